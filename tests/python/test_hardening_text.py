"""Hostile input to the JSON document readers (dsp/core/json_reader.hpp).

Drives $EARSHOT_BUILD/earshot (default /work/main/build/native). Exit codes from
docs/cli.md (3 = bad input). JSON grammar from RFC 8259; UTF-8 from RFC 3629.
"""
import os
import pathlib
import subprocess

import pytest

BUILD = pathlib.Path(os.environ.get("EARSHOT_BUILD", "/work/main/build/native"))
EARSHOT = BUILD / "earshot"
INPUT = 3  # docs/cli.md


@pytest.fixture(scope="module", autouse=True)
def _built():
    if not EARSHOT.is_file():
        pytest.skip(f"{EARSHOT} is not built (set EARSHOT_BUILD to the build folder)")


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
