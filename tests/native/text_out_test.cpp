// Proves dsp/cli/text_out.hpp: formula cells prefixed per OWASP "CSV Injection"
// and quoted per RFC 4180, control characters (ECMA-48 C0 0x00-0x1F, DEL, C1
// 0x80-0x9F) and invalid UTF-8 (RFC 3629) escaped for the terminal, and only the
// XML 1.0 Fifth Edition section 2.2 `Char` production left in XML text.
#include <catch2/catch.hpp>

#include <string>

#include "../../dsp/cli/text_out.hpp"

using earshot::cli::csv_cell;
using earshot::cli::terminal_lines;
using earshot::cli::terminal_text;
using earshot::cli::xml_text;

TEST_CASE("text_out: csv_cell prefixes formula starts and quotes per RFC 4180") {
  // OWASP Foundation, "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection):
  // = + - @ TAB CR start a formula.
  auto row = GENERATE(table<std::string, std::string>({
      {"plain", "plain"},
      {"", ""},
      {"=1+2", "'=1+2"},
      {"+1", "'+1"},
      {"-2", "'-2"},
      {"@SUM(A1)", "'@SUM(A1)"},
      {"\tx", "'\tx"},
      {"\rx", "\"'\rx\""},                       // prefixed, then quoted: it holds CR
      {"=HYPERLINK(\"u\",\"t\")", "\"'=HYPERLINK(\"\"u\"\",\"\"t\"\")\""},
      {"a,b", "\"a,b\""},
      {"say \"hi\"", "\"say \"\"hi\"\"\""},
      {"x\ny", "\"x\ny\""},
      {"a=b", "a=b"},                            // only the first character counts
  }));
  CAPTURE(std::get<0>(row));
  CHECK(csv_cell(std::get<0>(row)) == std::get<1>(row));
}

TEST_CASE("text_out: terminal_text escapes C0, DEL, C1 and invalid UTF-8") {
  auto row = GENERATE(table<std::string, std::string>({
      {"plain text", "plain text"},
      {"\x1b]0;pwned\x07", "\\x1b]0;pwned\\x07"},
      {std::string("a\0b", 3), "a\\x00b"},
      {"tab\there\nand\rthere", "tab\\x09here\\x0aand\\x0dthere"},
      {"del\x7f", "del\\x7f"},
      {"nel\xc2\x85 csi\xc2\x9b", "nel\\u0085 csi\\u009b"},
      {"\xc2\xa0 \xc3\xa9 \xe2\x82\xac \xf0\x9f\x8e\xb8", "\xc2\xa0 \xc3\xa9 \xe2\x82\xac \xf0\x9f\x8e\xb8"},  // U+00A0 is not C1
      {"\xff", "\\xff"},                         // never in UTF-8 (RFC 3629, section 1)
      {"\xc0\x80", "\\xc0\\x80"},                // overlong NUL
      {"\xed\xa0\x80", "\\xed\\xa0\\x80"},       // a surrogate (RFC 3629, section 3)
      {"\xf4\x90\x80\x80", "\\xf4\\x90\\x80\\x80"},  // above U+10FFFF
      {"\xe2\x82", "\\xe2\\x82"},                // cut short
      {"back\\slash", "back\\slash"},
  }));
  CAPTURE(std::get<0>(row));
  CHECK(terminal_text(std::get<0>(row)) == std::get<1>(row));
  CHECK(terminal_text(terminal_text(std::get<0>(row))) == std::get<1>(row));  // idempotent
}

TEST_CASE("text_out: terminal_lines keeps the line breaks of a message") {
  CHECK(terminal_lines("one\ntwo\x1b[2J\tthree") == "one\ntwo\\x1b[2J\\x09three");
}

TEST_CASE("text_out: xml_text keeps only XML 1.0 Char and escapes markup") {
  const std::string fffd = "\xef\xbf\xbd";
  auto row = GENERATE_COPY(table<std::string, std::string>({
      {"<script>&'\"]]>", "&lt;script&gt;&amp;&apos;&quot;]]&gt;"},
      {"\t\n\r", "\t\n\r"},                      // #x9 | #xA | #xD
      {std::string("\x1b\0\x7f", 3), fffd + fffd + "\x7f"},  // DEL (#x7F) is a Char
      {"\xef\xbf\xbe\xef\xbf\xbf", fffd + fffd},  // U+FFFE, U+FFFF
      {"\xed\xb0\x80", fffd + fffd + fffd},      // a lone low surrogate as bytes: three invalid bytes
      {"\xee\x80\x80\xf0\x90\x80\x80", "\xee\x80\x80\xf0\x90\x80\x80"},  // U+E000, U+10000
      {"\xc2\x85", "\xc2\x85"},                  // U+0085 is a Char in XML 1.0
  }));
  CAPTURE(std::get<0>(row));
  CHECK(xml_text(std::get<0>(row)) == std::get<1>(row));
}
