"""A million levels of JSON nesting, in every document every command reads.

Each reader goes through the one iterative JSON reader (dsp/core/json_reader.hpp,
depth limit 128), so the answer is the same everywhere: exit 3 (docs/cli.md)
and "<document>: line 1, column 129: nesting deeper than 128 levels" — never a
crash by stack overflow. The effect file layout (8-byte little-endian header
length, JSON header, tensor data) is dsp/FORMAT.md's. JSON grammar: RFC 8259.
"""
import json
import os
import pathlib
import shutil
import struct
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
from conftest import BUILD, need_built  # noqa: E402

EARSHOT = BUILD / "earshot"
INPUT = 3  # docs/cli.md
DEEP = "[" * 1_000_000
MESSAGE = "line 1, column 129: nesting deeper than 128 levels"


@pytest.fixture(scope="module", autouse=True)
def _built():
    need_built(EARSHOT)


def run(*args):
    p = subprocess.run([str(EARSHOT)] + [str(a) for a in args], capture_output=True, timeout=600)
    assert p.returncode >= 0, f"earshot {args} died by signal {-p.returncode}"
    return p


def effect_with_header(header: bytes) -> bytes:
    return struct.pack("<Q", len(header)) + header


def effect_with_description(description: str) -> bytes:
    header = json.dumps({"__metadata__": {"earshot.effect": description}}).encode()
    return effect_with_header(header)


@pytest.fixture
def deep_header(tmp_path):
    f = tmp_path / "deep_header.nfx"
    f.write_bytes(effect_with_header(DEEP.encode()))
    return f


@pytest.fixture
def deep_description(tmp_path):
    f = tmp_path / "deep_description.nfx"
    f.write_bytes(effect_with_description(DEEP))
    return f


@pytest.fixture
def wav(tmp_path):
    f = tmp_path / "in.wav"
    shutil.copy(ROOT / "demos" / "clips" / "sweep.wav", f)
    return f


@pytest.mark.parametrize("which,document", [("header", "effect file header"),
                                             ("description", "effect description")])
@pytest.mark.parametrize("command", ["info", "render", "verify", "bench"])
def test_effect_file_commands(command, which, document, deep_header, deep_description, wav, tmp_path):
    f = deep_header if which == "header" else deep_description
    args = {"info": [f], "render": [f, wav, tmp_path / "out.wav"], "verify": [f],
            "bench": [f, "--seconds", "0.1"]}[command]
    p = run(command, *args)
    assert p.returncode == INPUT, p.stderr
    assert str(f).encode() in p.stderr
    assert f"{document}: {MESSAGE}".encode() in p.stderr
    assert not (tmp_path / "out.wav").exists()


def site_folder(tmp_path):
    """A copy of the bundled demo site's inputs, to break one document at a time."""
    d = tmp_path / "site"
    shutil.copytree(ROOT / "demos", d, ignore=shutil.ignore_patterns("circuit", "*.py", "__pycache__"))
    return d


def test_site_listening_definition(tmp_path):
    d = site_folder(tmp_path)
    (d / "listening.json").write_text(DEEP)
    p = run("site", d / "site.json", "--out", tmp_path / "out")
    assert p.returncode == INPUT, p.stderr
    assert f"{d / 'listening.json'}: {MESSAGE}".encode() in p.stderr


def test_site_effect_named_by_the_config(tmp_path):
    d = site_folder(tmp_path)
    (d / "effects" / "gru.nfx").write_bytes(effect_with_header(DEEP.encode()))
    p = run("site", d / "site.json", "--out", tmp_path / "out")
    assert p.returncode == INPUT, p.stderr
    assert b"gru.nfx" in p.stderr
    assert f"effect file header: {MESSAGE}".encode() in p.stderr


def test_tally_results_file_object_member(tmp_path):
    # Deep nesting below the top-level object, where a results file's fields live:
    # the object is level 1, so the 128th "[" (column 11 + 128) is level 129.
    f = tmp_path / "results.json"
    f.write_text('{"format": ' + DEEP)
    p = run("tally", f)
    assert p.returncode == INPUT, p.stderr
    assert f"{f}: line 1, column 139: nesting deeper than 128 levels".encode() in p.stderr
