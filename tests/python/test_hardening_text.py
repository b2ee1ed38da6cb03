"""Hostile input to the JSON document readers (dsp/core/json_reader.hpp) and
untrusted text on its way out of the CLI (dsp/cli/text_out.hpp, docs/cli.md
"Untrusted text"): CSV cells neutralised per OWASP "CSV Injection" and read back
with Python's csv module (RFC 4180), terminal output free of control characters,
SVG parsed by Python's xml.etree.ElementTree (XML 1.0, section 2.2 `Char`).

Drives $EARSHOT_BUILD/earshot (default build/native). Exit codes from
docs/cli.md (3 = bad input). JSON grammar from RFC 8259; UTF-8 from RFC 3629.
"""
import csv
import json
import os
import pathlib
import re
import struct
import subprocess
import xml.etree.ElementTree as ET

import pytest

from conftest import BUILD, need_built  # noqa: E402
EARSHOT = BUILD / "earshot"
INPUT = 3  # docs/cli.md


@pytest.fixture(scope="module", autouse=True)
def _built():
    need_built(EARSHOT)


def run(*args):
    p = subprocess.run([str(EARSHOT)] + [str(a) for a in args], capture_output=True, timeout=600)
    # A negative return code is death by a signal (the old recursive parse overflowed the stack).
    assert p.returncode >= 0, f"earshot {args} died by signal {-p.returncode}"
    return p


def test_tally_refuses_a_million_levels_of_nesting(tmp_path):
    f = tmp_path / "deep.json"
    f.write_text("[" * 1_000_000)
    p = run("tally", f)
    assert p.returncode == INPUT
    assert f"{f}: line 1, column 129: nesting deeper than 128 levels".encode() in p.stderr


def test_tally_refuses_nul_and_text_after_the_value(tmp_path):
    f = tmp_path / "nul.json"
    f.write_bytes(b"{}\x00garbage")
    p = run("tally", f)
    assert p.returncode == INPUT
    assert f"{f}: line 1, column 3: NUL byte in the text".encode() in p.stderr
    f.write_bytes(b"{} x")
    p = run("tally", f)
    assert p.returncode == INPUT
    assert f"{f}: line 1, column 4: text after the end of the JSON value".encode() in p.stderr


def test_tally_refuses_invalid_utf8_naming_the_position(tmp_path):
    f = tmp_path / "utf8.json"
    f.write_bytes(b'{\n "a": "\xff"}')  # 0xFF never appears in UTF-8 (RFC 3629, section 1)
    p = run("tally", f)
    assert p.returncode == INPUT
    assert f"{f}: line 2, column ".encode() in p.stderr


def test_tally_refuses_duplicate_keys(tmp_path):
    f = tmp_path / "dup.json"
    f.write_text('{"format": "a", "format": "b"}')
    p = run("tally", f)
    assert p.returncode == INPUT
    assert b'duplicate key "format"' in p.stderr


def test_site_refuses_a_million_levels_of_nesting_in_its_config(tmp_path):
    f = tmp_path / "site.json"
    f.write_text("[" * 1_000_000)
    p = run("site", f, "--out", tmp_path / "out")
    assert p.returncode == INPUT
    assert f"{f}: line 1, column 129: nesting deeper than 128 levels".encode() in p.stderr


# ---- untrusted text (docs/cli.md, "Untrusted text") ------------------------------------

# OWASP Foundation, "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection):
# a cell starting with one of these is read as a formula by spreadsheets.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
ESC_TITLE = "\x1b]0;pwned\x07\x00"  # an OSC "set window title" sequence, then NUL
HOSTILE_CONDITIONS = ['=HYPERLINK("http://example.org/x","y")', "+1", "-2", "@SUM(A1)", "\tx", "\rx"]
HOSTILE_PARTICIPANTS = ['=cmd|" /C calc"!A0', "+1", "-2", "@SUM(A1)", "\tx", "\rx" + ESC_TITLE]
# Items for the SVG: markup, CDATA end, ESC, NUL, U+FFFE (not an XML Char), a lone
# low surrogate (JSON "\udc00", which RapidJSON stores as the bytes ED B0 80),
# C1 NEL and DEL.
HOSTILE_ITEMS = ["<script>alert(1)</script>", "]]>", "a" + ESC_TITLE + "\ufffe\udc00\u0085\u007f&'\""]


def fnv(item, cond):
    h = 14695981039346656037
    for b in f"{item}/{cond}".encode("utf-8", "surrogatepass"):
        h = ((h ^ b) * 1099511628211) % 2 ** 64
    return f"fnv1a64-float32le:{h:016x}"


def results_doc(kind, participant, seed, conditions, items, trials, test_id="study" + ESC_TITLE):
    return {"format": "earshot-listening-results", "version": 1,
            "test": {"id": test_id, "type": kind, "title": ESC_TITLE},
            "participant": {"id": participant, "seed": seed}, "conditions": conditions,
            "stimuli": [{"item": i, "condition": c["id"], "hash": fnv(i, c["id"])} for i in items for c in conditions],
            "trials": trials}


def write_json(path, d):
    # ensure_ascii: every hostile character travels as a JSON \u escape (RFC 8259, section 7).
    path.write_text(json.dumps(d, ensure_ascii=True))
    return path


def hostile_mushra(tmp_path, items=("gtr",)):
    conds = [{"id": "reference", "role": "reference"}] + [{"id": c, "role": "test"} for c in HOSTILE_CONDITIONS]
    files = []
    for k, pid in enumerate(HOSTILE_PARTICIPANTS[:2]):
        # Scores 0 and 10: the t interval of two assessors reaches below 0, so the tool
        # itself writes negative numbers (ci_low) that must stay plain numbers.
        trials = [{"item": i, "ratings": {c["id"]: (100 if c["role"] == "reference" else 10 * k) for c in conds}}
                  for i in items]
        files.append(write_json(tmp_path / f"m{k}.json", results_doc("mushra", pid, k, conds, list(items), trials)))
    return files


def hostile_abx(tmp_path):
    conds = [{"id": "reference", "role": "reference"}, {"id": "-net", "role": "test"}]
    files = []
    for k, pid in enumerate(HOSTILE_PARTICIPANTS):
        trials = [{"item": "gtr", "a": "reference", "b": "-net", "x": "a", "answer": "a" if j < k else "b"}
                  for j in range(4)]
        files.append(write_json(tmp_path / f"x{k}.json", results_doc("abx", pid, k, conds, ["gtr"], trials)))
    return files


def assert_terminal_clean(data):
    """No C0 control but the LF that ends lines, no DEL, no C1 (as UTF-8: C2 80..9F),
    and valid UTF-8 (RFC 3629) throughout."""
    for i, b in enumerate(data):
        assert b >= 0x20 or b == 0x0A, f"control byte 0x{b:02x} at {i}: {data[max(0, i - 30):i + 30]!r}"
        assert b != 0x7F, f"DEL at {i}: {data[max(0, i - 30):i + 30]!r}"
    assert not re.search(rb"\xc2[\x80-\x9f]", data), data
    data.decode("utf-8")  # strict: raises on an invalid byte


def check_cell(got, original):
    if original.startswith(FORMULA_STARTS):
        assert got == "'" + original, (got, original)
    else:
        assert got == original, (got, original)


def test_tally_csv_cells_from_results_files_are_neutralised(tmp_path):
    # MUSHRA: condition ids from the results files; the tool's own numbers unprefixed.
    out = tmp_path / "m.csv"
    p = run("tally", *hostile_mushra(tmp_path), "--csv", out)
    assert p.returncode == 0, p.stderr
    with open(out, newline="") as f:  # Python's csv module reads RFC 4180 quoting
        rows = list(csv.DictReader(f))
    by_cond = {}
    for r in rows:
        by_cond.setdefault(r["condition"], r)
    assert len(by_cond) == 1 + len(HOSTILE_CONDITIONS)
    for c in HOSTILE_CONDITIONS:  # every one starts a formula: each cell is the id with ' before it
        assert "'" + c in by_cond and c not in by_cond, (c, sorted(by_cond))
    assert "reference" in by_cond  # text that starts no formula is left alone
    negative = [r["ci_low"] for r in rows if r["ci_low"].startswith("-")]
    assert negative, "the worked example has a negative interval bound"
    for v in negative:
        float(v)  # a plain number, not "'-58.5"
    for r in rows:
        for k in ("n", "mean", "sd", "ci_high", "median", "q1", "q3", "min", "max", "missing"):
            float(r[k])
    # ABX: participant ids, one per row, and a condition id starting with '-'.
    out = tmp_path / "x.csv"
    p = run("tally", *hostile_abx(tmp_path), "--csv", out)
    assert p.returncode == 0, p.stderr
    with open(out, newline="") as f:
        rows = list(csv.DictReader(f))
    seen = [r["participant"] for r in rows if r["participant"]]
    assert len(seen) == len(HOSTILE_PARTICIPANTS)
    for got, original in zip(seen, HOSTILE_PARTICIPANTS):
        check_cell(got, original)
    for r in rows:
        check_cell(r["pair_b"], "-net")
        float(r["p_one_tailed"]), int(r["correct"]), int(r["seed"] or 0)


def test_tally_terminal_output_has_no_control_characters(tmp_path):
    for files in (hostile_mushra(tmp_path, HOSTILE_ITEMS), hostile_abx(tmp_path)):
        p = run("tally", *files)
        assert p.returncode == 0, p.stderr
        assert_terminal_clean(p.stdout)
        assert_terminal_clean(p.stderr)
        assert b"\\x1b]0;pwned\\x07\\x00" in p.stdout  # escaped, still readable
    # Refusals quote the text too: a rating for an undeclared hostile condition.
    d = json.loads(hostile_mushra(tmp_path)[0].read_text())
    d["trials"][0]["ratings"][ESC_TITLE + "\u009b2J"] = 50
    bad = write_json(tmp_path / "bad.json", d)
    p = run("tally", bad)
    assert p.returncode == INPUT
    assert_terminal_clean(p.stderr)
    assert b"\\x1b]0;pwned\\x07\\x00\\u009b2J" in p.stderr, p.stderr


def test_tally_svg_is_well_formed_xml_whatever_the_ids(tmp_path):
    out = tmp_path / "svg"
    p = run("tally", *hostile_mushra(tmp_path, HOSTILE_ITEMS), "--svg", out)
    assert p.returncode == 0, p.stderr
    svgs = sorted(out.glob("*.svg"))
    assert len(svgs) == 1 + len(HOSTILE_ITEMS)
    texts = []
    for f in svgs:
        root = ET.parse(f).getroot()  # raises on any character outside XML 1.0 Char
        texts += ["".join(e.itertext()) for e in root.iter()] + [v for e in root.iter() for v in e.attrib.values()]
    joined = "\n".join(texts)
    assert "item <script>alert(1)</script>" in joined  # markup escaped, read back as text
    assert "item ]]>" in joined
    # ESC, BEL, NUL, U+FFFE and the lone surrogate's three bytes became U+FFFD.
    assert "a\ufffd]0;pwned\ufffd\ufffd\ufffd\ufffd\ufffd\ufffd\u0085\u007f&'\"" in joined
    for c in HOSTILE_CONDITIONS:
        want = c.replace("\r", "\n") if "\r" in c else c  # XML 1.0 section 2.11: CR is read as LF
        assert any(want.strip() in t for t in texts), c


def effect_with_text(tmp_path, title, unit, author):
    src = pathlib.Path(__file__).resolve().parents[2] / "demos" / "effects" / "tcn.nfx"
    b = src.read_bytes()
    n = struct.unpack("<Q", b[:8])[0]
    header = json.loads(b[8:8 + n])
    desc = json.loads(header["__metadata__"]["earshot.effect"])
    desc["credits"]["title"] = title
    desc["credits"]["authors"] = [author]
    desc["controls"][0]["unit"] = unit
    header["__metadata__"]["earshot.effect"] = json.dumps(desc)
    text = json.dumps(header).encode()
    text += b" " * (-len(text) % 8)
    out = tmp_path / "hostile.nfx"
    out.write_bytes(struct.pack("<Q", len(text)) + text + b[8 + n:])
    return out


def test_info_verify_and_bench_escape_the_effect_files_text(tmp_path):
    fx = effect_with_text(tmp_path, "Clipper" + ESC_TITLE + "\u0085", "\x7f\x1b[2J", "\u009b31m" + "Eve")
    p = run("info", fx)
    assert p.returncode == 0, p.stderr
    assert_terminal_clean(p.stdout)
    # (The core keeps the title up to its NUL, so the title row ends there.)
    assert b"Clipper\\x1b]0;pwned\\x07\n" in p.stdout
    assert b"\\x7f\\x1b[2J" in p.stdout and b"\\u009b31mEve" in p.stdout
    # JSON output escapes C0 itself (RFC 8259, section 7); C1 and DEL may stay raw there.
    p = run("info", "--json", fx)
    assert p.returncode == 0
    assert not re.search(rb"[\x00-\x1f]", p.stdout.rstrip(b"\n").replace(b"\n", b""))
    assert json.loads(p.stdout)["effect"]["credits"]["title"] == "Clipper" + ESC_TITLE + "\u0085"
    p = run("verify", fx, "--seconds", "0.1")
    assert p.returncode in (0, 1), p.stderr
    assert b"Clipper\\x1b]0;pwned\\x07 (" in p.stdout
    assert_terminal_clean(p.stdout)
    assert_terminal_clean(p.stderr)
    p = run("bench", fx, "--seconds", "0.1", "--rounds", "1", "--variant", "scalar")
    assert p.returncode == 0, p.stderr
    assert b"Clipper\\x1b]0;pwned\\x07 (" in p.stdout
    assert_terminal_clean(p.stdout)
    p = run("bench", "--json", fx, "--seconds", "0.1", "--rounds", "1", "--variant", "scalar")
    assert p.returncode == 0
    assert json.loads(p.stdout)["title"] == "Clipper\x1b]0;pwned\x07"  # the core's title ends at the NUL


def test_site_refusals_escape_the_configs_text(tmp_path):
    cfg = tmp_path / "site.json"
    # (An id holding NUL is refused as such; ESC, BEL and C1 reach the id check.)
    cfg.write_text(json.dumps({"title": "t", "effects": [{"file": "x.nfx", "id": "a\x1b]0;pwned\x07\u0085"}]}))
    p = run("site", cfg, "--out", tmp_path / "out")
    assert p.returncode == INPUT
    assert_terminal_clean(p.stderr)
    assert b"'a\\x1b]0;pwned\\x07\\u0085' may hold only" in p.stderr, p.stderr
    # Field errors read like the shared reader's (dsp/core/json_reader.hpp): file, line and
    # column where the value starts, field. The id's value starts at this offset:
    text = cfg.read_text()
    off = text.index('"a\\u001b')
    line, col = text.count("\n", 0, off) + 1, off - (text.rfind("\n", 0, off) + 1) + 1
    assert f"{cfg}: line {line}, column {col}: effects[0].id: ".encode() in p.stderr, p.stderr


def test_unknown_command_or_option_is_named_without_control_characters():
    """An unknown command word or option is quoted escaped (ECMA-48 CSI and OSC would
    otherwise reach the terminal), and the exit code is the usage code, 2."""
    for word in ("\x1b[31mred", "-\x1b]0;pwned\x07"):
        p = run(word)
        assert p.returncode == 2, p.stderr
        assert_terminal_clean(p.stderr)
        assert b"\\x1b" in p.stderr, p.stderr
        assert (b"unknown option" if word.startswith("-") else b"unknown command") in p.stderr, p.stderr
