"""File-safety checks for the CLI: a failed run never loses an existing output.

Drives $EARSHOT_BUILD/earshot. Corrupt input is made with sox (Debian sox) and truncated
with plain byte slicing; the decoder error itself comes from libsndfile's FLAC reader.
"""
import os
import pathlib
import shutil
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
EARSHOT = pathlib.Path(os.environ.get("EARSHOT_BUILD", ROOT / "build" / "native")) / "earshot"
FX = ROOT / "demos" / "effects" / "gru.nfx"

pytestmark = pytest.mark.skipif(not EARSHOT.exists(), reason="earshot CLI not built")


def test_render_failure_keeps_existing_out(tmp_path):
    """Corrupt FLAC part-way: exit 3, existing OUT byte-identical, no temporary file left."""
    if shutil.which("sox") is None:
        pytest.fail("sox is required (tools/setup.sh installs it)")
    good = tmp_path / "in.flac"
    subprocess.run(["sox", "-n", "-r", "48000", "-c", "1", str(good), "synth", "1", "sine", "440"], check=True)
    bad = tmp_path / "bad.flac"
    bad.write_bytes(good.read_bytes()[:20000])  # cut inside the frame data
    out = tmp_path / "out.wav"
    out.write_bytes(b"previous output")
    r = subprocess.run([str(EARSHOT), "render", str(FX), str(bad), str(out)], capture_output=True, text=True)
    assert r.returncode == 3, r.stderr
    assert "bad.flac" in r.stderr
    assert out.read_bytes() == b"previous output"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.flac", "in.flac", "out.wav"]


@pytest.mark.parametrize("link", ["symlink", "hardlink"])
def test_loudness_match_refuses_same_file_by_identity(tmp_path, link):
    """--out a symlink or hard link to FILE: refused even with --force; FILE byte-identical."""
    if shutil.which("sox") is None:
        pytest.fail("sox is required (tools/setup.sh installs it)")
    src = tmp_path / "in.wav"
    subprocess.run(["sox", "-n", "-r", "48000", "-c", "1", str(src), "synth", "1", "sine", "440"], check=True)
    before = src.read_bytes()
    out = tmp_path / "out.wav"
    (os.symlink if link == "symlink" else os.link)(src, out)
    r = subprocess.run([str(EARSHOT), "loudness", "--match", "-23", "--out", str(out), "--force", str(src)],
                       capture_output=True, text=True)
    assert r.returncode != 0
    assert "same file" in r.stderr
    assert src.read_bytes() == before
