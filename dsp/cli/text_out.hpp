// Text from input files (results files from remote listeners, effect titles,
// site configs, listening definitions: all written by strangers) on its way
// into other programs. One helper per destination (docs/cli.md, "Untrusted
// text"):
//   csv_cell       a spreadsheet: formula prefixes neutralised (OWASP
//                  Foundation, "CSV Injection",
//                  owasp.org/www-community/attacks/CSV_Injection), then
//                  quoted per RFC 4180;
//   terminal_text  a terminal: C0 controls, DEL, C1 controls and invalid
//                  UTF-8 escaped, so no ESC/OSC sequence or NUL arrives raw;
//   xml_text       SVG/XML: only the XML 1.0 `Char` production (W3C XML 1.0
//                  Fifth Edition, section 2.2) survives, markup escaped.
// Numbers the tool computes are not text from a file and bypass csv_cell.
#pragma once
#include <cstdio>
#include <string>

namespace earshot {
namespace cli {

namespace text_detail {

// The code point of the UTF-8 sequence at s[i] and its length, or false for
// an invalid sequence (RFC 3629: no overlongs, no surrogates, at most U+10FFFF).
inline bool utf8_next(const std::string& s, size_t i, unsigned& cp, size_t& len) {
  const unsigned char c = static_cast<unsigned char>(s[i]);
  if (c < 0x80) {
    cp = c;
    len = 1;
    return true;
  }
  unsigned min;
  if (c >= 0xC2 && c <= 0xDF) {
    len = 2, cp = c & 0x1F, min = 0x80;
  } else if (c >= 0xE0 && c <= 0xEF) {
    len = 3, cp = c & 0x0F, min = 0x800;
  } else if (c >= 0xF0 && c <= 0xF4) {
    len = 4, cp = c & 0x07, min = 0x10000;
  } else {
    return false;
  }
  if (i + len > s.size()) return false;
  for (size_t k = 1; k < len; ++k) {
    const unsigned char d = static_cast<unsigned char>(s[i + k]);
    if ((d & 0xC0) != 0x80) return false;
    cp = (cp << 6) | (d & 0x3F);
  }
  return cp >= min && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF);
}

inline std::string hex_escape(const char* prefix, unsigned v, int digits) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "%s%0*x", prefix, digits, v);
  return buf;
}

inline std::string terminal(const std::string& s, bool keep_lf) {
  std::string o;
  o.reserve(s.size());
  for (size_t i = 0; i < s.size();) {
    unsigned cp;
    size_t len;
    if (!utf8_next(s, i, cp, len)) {
      o += hex_escape("\\x", static_cast<unsigned char>(s[i]), 2);
      ++i;
      continue;
    }
    if (cp == '\n' && keep_lf)
      o += '\n';
    else if (cp < 0x20 || cp == 0x7F)
      o += hex_escape("\\x", cp, 2);
    else if (cp >= 0x80 && cp <= 0x9F)
      o += hex_escape("\\u", cp, 4);
    else
      o.append(s, i, len);
    i += len;
  }
  return o;
}

}  // namespace text_detail

// For a terminal: every C0 control (TAB and LF included), DEL and every C1
// control (U+0080..U+009F) becomes \xNN or \uNNNN; a byte that is not part of
// valid UTF-8 becomes \xNN. Everything else, backslash included, is kept, so
// the function is idempotent (applying it twice changes nothing).
inline std::string terminal_text(const std::string& s) { return text_detail::terminal(s, false); }

// The same for a whole message of the tool's own lines: LF is kept as the
// line break, everything else is escaped as terminal_text does. Used by the
// error handlers as a net under messages that quote input text.
inline std::string terminal_lines(const std::string& s) { return text_detail::terminal(s, true); }

// One CSV cell holding text from an input file. A cell starting with = + - @
// TAB or CR is prefixed with ' (OWASP Foundation, "CSV Injection",
// owasp.org/www-community/attacks/CSV_Injection); a cell holding " , CR or LF
// is then quoted with doubled quotes (RFC 4180, section 2, rules 6 and 7).
inline std::string csv_cell(const std::string& s) {
  std::string v = s;
  if (!v.empty() && (v[0] == '=' || v[0] == '+' || v[0] == '-' || v[0] == '@' || v[0] == '\t' || v[0] == '\r'))
    v.insert(v.begin(), '\'');
  if (v.find_first_of(",\"\n\r") == std::string::npos) return v;
  std::string o = "\"";
  for (char c : v) {
    if (c == '"') o += '"';
    o += c;
  }
  return o + "\"";
}

// Text for XML character data or an attribute value: a code point outside
// Char ::= #x9 | #xA | #xD | [#x20-#xD7FF] | [#xE000-#xFFFD] | [#x10000-#x10FFFF]
// (W3C XML 1.0 Fifth Edition, section 2.2) or an invalid UTF-8 byte becomes
// U+FFFD; & < > " ' become entity references.
inline std::string xml_text(const std::string& s) {
  std::string o;
  o.reserve(s.size());
  for (size_t i = 0; i < s.size();) {
    unsigned cp;
    size_t len;
    if (!text_detail::utf8_next(s, i, cp, len)) {
      o += "\xEF\xBF\xBD";
      ++i;
      continue;
    }
    const bool is_char = cp == 0x9 || cp == 0xA || cp == 0xD || (cp >= 0x20 && cp <= 0xD7FF) ||
                         (cp >= 0xE000 && cp <= 0xFFFD) || (cp >= 0x10000 && cp <= 0x10FFFF);
    if (!is_char)
      o += "\xEF\xBF\xBD";
    else if (cp == '&')
      o += "&amp;";
    else if (cp == '<')
      o += "&lt;";
    else if (cp == '>')
      o += "&gt;";
    else if (cp == '"')
      o += "&quot;";
    else if (cp == '\'')
      o += "&apos;";
    else
      o.append(s, i, len);
    i += len;
  }
  return o;
}

}  // namespace cli
}  // namespace earshot
