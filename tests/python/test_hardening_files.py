"""File-safety checks for the CLI: a failed run never loses an existing output.

Drives $EARSHOT_BUILD/earshot. Corrupt input is made with sox (Debian sox) and truncated
with plain byte slicing; the decoder error itself comes from libsndfile's FLAC reader.
"""
import json
import math
import os
import pathlib
import re
import shutil
import stat
import struct
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
from conftest import BUILD, need_built  # noqa: E402

EARSHOT = BUILD / "earshot"
FX = ROOT / "demos" / "effects" / "gru.nfx"


@pytest.fixture(scope="module", autouse=True)
def _built():
    need_built(EARSHOT)


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
    # --force: an existing OUT is refused without it (docs/cli.md, "Outputs").
    r = subprocess.run([str(EARSHOT), "render", str(FX), str(bad), str(out), "--force"], capture_output=True, text=True)
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


# ---- helpers for the checks below --------------------------------------------------------------

OK, USAGE, INPUT = 0, 2, 3  # docs/cli.md


def run(*args):
    p = subprocess.run([str(EARSHOT)] + [str(a) for a in args], capture_output=True, text=True, timeout=600)
    assert p.returncode >= 0, f"earshot {args} died by signal {-p.returncode}: {p.stderr}"
    return p


def sine(n=48000, rate=48000):
    return [0.5 * math.sin(2 * math.pi * 441 * k / rate) for k in range(n)]


def write_wav(path, samples, rate=48000, encoding="pcm16", container="RIFF", data_size=None):
    """A mono WAV written byte by byte from the RIFF layout (Microsoft/IBM Multimedia
    Programming Interface and Data Specifications 1.0: 'fmt ' and 'data' chunks;
    format tag 1 = PCM, 3 = IEEE float) or, with container="RF64", the RF64 layout of
    EBU Tech 3306 (RIFF size and data size 0xFFFFFFFF, the real sizes in a 'ds64' chunk).
    data_size overrides the size the header declares (to make a lying header)."""
    if encoding == "pcm16":
        data = b"".join(struct.pack("<h", max(-32768, min(32767, round(v * 32767)))) for v in samples)
        tag, bits = 1, 16
    else:
        data = struct.pack(f"<{len(samples)}f", *samples)
        tag, bits = 3, 32
    align = bits // 8
    fmt = struct.pack("<HHIIHH", tag, 1, rate, rate * align, align, bits)
    declared = len(data) if data_size is None else data_size
    if container == "RF64":
        ds64 = struct.pack("<QQQI", 0, declared, declared // align, 0)
        body = b"WAVE" + b"ds64" + struct.pack("<I", len(ds64)) + ds64 + b"fmt " + struct.pack("<I", 16) + fmt
        body += b"data" + struct.pack("<I", 0xFFFFFFFF) + data
        blob = b"RF64" + struct.pack("<I", 0xFFFFFFFF) + body
    else:
        body = b"WAVE" + b"fmt " + struct.pack("<I", 16) + fmt + b"data" + struct.pack("<I", declared) + data
        blob = b"RIFF" + struct.pack("<I", len(body)) + body
    pathlib.Path(path).write_bytes(blob)
    return len(samples)


def leftovers(folder):
    """Temporary files of output_file.hpp (NAME.earshot-tmp-XXXXXX) under folder."""
    return sorted(str(p) for p in pathlib.Path(folder).rglob("*earshot-tmp*"))


def mushra_results(folder, name, participant="p1"):
    """A minimal valid MUSHRA results file (docs/listening.md)."""
    conds = [{"id": "reference", "role": "reference"}, {"id": "lp3500", "role": "anchor-low"},
             {"id": "lp7000", "role": "anchor-mid"}, {"id": "net", "role": "test"}]
    ratings = {"reference": 100, "lp3500": 20, "lp7000": 50, "net": 80}
    d = {"format": "earshot-listening-results", "version": 1,
         "test": {"id": "t", "type": "mushra", "title": "t"},
         "participant": {"id": participant, "seed": 1},
         "conditions": conds,
         "stimuli": [{"item": "a", "condition": c["id"], "hash": "fnv1a64-float32le:%016x" % k}
                     for k, c in enumerate(conds)],
         "trials": [{"item": "a", "order": list(ratings), "ratings": ratings}]}
    p = pathlib.Path(folder) / name
    p.write_text(json.dumps(d))
    return p


# ---- 1 and 2: every output through one writer, one overwrite policy -------------------------------

def test_existing_outputs_are_refused_without_force_and_replaced_with_it(tmp_path):
    """render OUT, tally --csv and --svg files, verify --write-signal, site DIR: an existing
    output is refused (exit 2, the message names it and says --force) and left byte-identical;
    with --force it is replaced, with mode 0666 & ~umask as open(2) with 0666 would give (POSIX
    open), not mkstemp's 0600. (loudness --match and anchors already refused; docs/cli.md.)"""
    old_mask = os.umask(0o022)
    try:
        check_overwrite_policy(tmp_path)
    finally:
        os.umask(old_mask)


def check_overwrite_policy(tmp_path):
    src = tmp_path / "in.wav"
    write_wav(src, sine(4800))
    res = mushra_results(tmp_path, "r.json")
    (tmp_path / "svg").mkdir()
    site_cfg = tmp_path / "cfg"
    site_cfg.mkdir()
    shutil.copy(FX, site_cfg / "gru.nfx")
    (site_cfg / "site.json").write_text(json.dumps({"version": 1, "title": "t", "effects": [{"file": "gru.nfx"}]}))
    wasm = tmp_path / "w.wasm"
    wasm.write_bytes(b"\0asm\1\0\0\0")  # read_wasm checks the magic only
    site_args = ["--assets", ROOT, "--wasm-simd", wasm, "--wasm-scalar", wasm, "--quiet"]
    site_out = tmp_path / "site"
    assert run("site", site_cfg / "site.json", "--out", site_out, *site_args).returncode == OK
    cases = [
        (tmp_path / "out.wav", ["render", FX, src, tmp_path / "out.wav", "--quiet"]),
        (tmp_path / "s.csv", ["tally", res, "--csv", tmp_path / "s.csv"]),
        (tmp_path / "svg" / "all.svg", ["tally", res, "--svg", tmp_path / "svg"]),
        (tmp_path / "sig.wav", ["verify", FX, "--seconds", "0.1", "--write-signal", tmp_path / "sig.wav"]),
        (site_out / "site.json", ["site", site_cfg / "site.json", "--out", site_out, *site_args]),
    ]
    for target, args in cases:
        if target.parent != site_out:
            target.write_bytes(b"keep me")
        before = target.read_bytes()
        p = run(*args)
        shown = site_out if target.parent == site_out else target
        assert p.returncode == USAGE, (args, p.stderr)
        assert str(shown) in p.stderr and "--force" in p.stderr, p.stderr
        assert target.read_bytes() == before, args
        p = run(*args, "--force")
        assert p.returncode == OK, (args, p.stderr)
        assert stat.S_IMODE(target.stat().st_mode) == 0o644, args
        if target.parent != site_out:
            assert target.read_bytes() != before, args
    assert leftovers(tmp_path) == []


def test_a_failed_run_writes_no_output_at_all(tmp_path):
    """anchors with a second, truncated reference; tally whose second output cannot be
    written: exit non-zero, no output file and no temporary file left (the outputs are
    held in temporary files and renamed only when every one is ready)."""
    good = tmp_path / "good.wav"
    write_wav(good, sine(24000))
    bad = tmp_path / "bad.wav"
    write_wav(bad, sine(24000))
    bad.write_bytes(bad.read_bytes()[:20000])  # the data chunk now runs past the end of the file
    out = tmp_path / "anchors"
    p = run("anchors", good, bad, "--out", out)
    assert p.returncode == INPUT and "bad.wav" in p.stderr, p.stderr
    assert sorted(x.name for x in out.iterdir()) == []

    res = mushra_results(tmp_path, "r.json")
    svg = tmp_path / "svg"
    (svg / "all.svg").mkdir(parents=True)  # a folder where the box plot goes: that write must fail
    (svg / "all.svg" / "x").write_text("x")
    p = run("tally", res, "--csv", tmp_path / "s.csv", "--svg", svg, "--force")
    assert p.returncode == INPUT, p.stderr
    assert "all.svg" in p.stderr
    assert not (tmp_path / "s.csv").exists(), "the CSV was written although the run failed"
    assert leftovers(tmp_path) == []


# ---- 3: same file by device and inode --------------------------------------------------------------

@pytest.mark.parametrize("link", ["symlink", "hardlink"])
def test_outputs_that_are_an_input_are_refused_even_with_force(tmp_path, link):
    """tally --csv onto a results file, an anchor onto its reference, through a symlink or
    a hard link (same st_dev and st_ino, POSIX stat): exit 2 naming both paths, input intact."""
    make = os.symlink if link == "symlink" else os.link
    res = mushra_results(tmp_path, "r.json")
    before = res.read_bytes()
    make(res, tmp_path / "s.csv")
    p = run("tally", res, "--csv", tmp_path / "s.csv", "--force")
    assert p.returncode == USAGE and "same file" in p.stderr, p.stderr
    assert str(res) in p.stderr and str(tmp_path / "s.csv") in p.stderr
    assert res.read_bytes() == before

    ref = tmp_path / "ref.wav"
    write_wav(ref, sine(24000))
    before = ref.read_bytes()
    (tmp_path / "a").mkdir()
    make(ref, tmp_path / "a" / "ref-lp3500.wav")
    p = run("anchors", ref, "--out", tmp_path / "a", "--force")
    assert p.returncode == USAGE and "same file" in p.stderr, p.stderr
    assert str(ref) in p.stderr
    assert ref.read_bytes() == before


# ---- 5: no silent truncation -----------------------------------------------------------------------

def truncated_files(folder):
    """(path, declared frames) of damaged files: WAV 16-bit, WAV float, RF64, each cut in
    half; a WAV whose data chunk declares 0x7ffffff0 bytes; a FLAC cut inside its frames
    (sox writes it; libsndfile's FLAC decoder reports the short read); a 16-bit AIFF cut
    inside its sound data."""
    folder = pathlib.Path(folder)
    out = []
    for name, kw in [("i16.wav", {}), ("f32.wav", {"encoding": "float"}), ("rf64.wav", {"container": "RF64"})]:
        p = folder / name
        n = write_wav(p, sine(48000), **kw)
        whole = p.read_bytes()
        p.write_bytes(whole[:len(whole) // 2])
        out.append((p, n))
    p = folder / "huge.wav"
    write_wav(p, sine(48000), data_size=0x7FFFFFF0)
    out.append((p, 0x7FFFFFF0 // 2))
    if shutil.which("sox") is None:
        pytest.fail("sox is required (tools/setup.sh installs it)")
    flac = folder / "cut.flac"
    subprocess.run(["sox", "-n", "-r", "48000", "-c", "1", str(flac), "synth", "1", "sine", "440"], check=True)
    flac.write_bytes(flac.read_bytes()[:20000])
    out.append((flac, 48000))
    # AIFF (sox writes it): the COMM chunk declares 48000 frames (AIFF 1.3), the SSND data is cut.
    aiff = folder / "cut.aiff"
    subprocess.run(["sox", "-n", "-r", "48000", "-c", "1", "-b", "16", str(aiff), "synth", "1", "sine", "440"],
                   check=True)
    aiff.write_bytes(aiff.read_bytes()[:50000])
    out.append((aiff, 48000))
    return out


def test_truncated_audio_is_an_error_never_a_shorter_result(tmp_path):
    """render, loudness, anchors: exit 3, 'read N of M frames' with M the declared length,
    the file named, and no output file. The undamaged 16-bit, float and RF64 files the
    same writer makes are read in full (libsndfile accepts the layout)."""
    for name, kw in [("ok16.wav", {}), ("okf.wav", {"encoding": "float"}), ("ok64.wav", {"container": "RF64"})]:
        write_wav(tmp_path / name, sine(4800), **kw)
        p = run("loudness", "--json", tmp_path / name)
        assert p.returncode == OK, p.stderr
        assert json.loads(p.stdout)["files"][0]["frames"] == 4800
    for path, declared in truncated_files(tmp_path):
        for args in (["render", FX, path, tmp_path / "o.wav"], ["loudness", path],
                     ["anchors", path, "--out", tmp_path / "anch"]):
            p = run(*args)
            assert p.returncode == INPUT, (args, p.stderr)
            assert path.name in p.stderr, p.stderr
            m = re.search(r"read (\d+) of (\d+) frames", p.stderr)
            assert m, p.stderr
            assert int(m.group(1)) < int(m.group(2)) == declared, p.stderr
        assert not (tmp_path / "o.wav").exists()
        assert not (tmp_path / "anch").exists() or list((tmp_path / "anch").iterdir()) == []
    assert leftovers(tmp_path) == []


# ---- 4: the site builder stays inside its folders ---------------------------------------------------

def site_setup(tmp_path):
    """A config folder with one effect and one clip, a folder outside it with a sentinel
    file, fake WebAssembly builds (the builder checks only their magic) and the options."""
    cfg = tmp_path / "cfg"
    cfg.mkdir()
    shutil.copy(FX, cfg / "gru.nfx")
    write_wav(cfg / "c.wav", sine(24000))
    outside = tmp_path / "outside"
    outside.mkdir()
    shutil.copy(FX, outside / "gru.nfx")
    write_wav(outside / "c.wav", sine(24000))
    (outside / "sentinel.txt").write_text("keep")
    wasm = tmp_path / "w.wasm"
    wasm.write_bytes(b"\0asm\1\0\0\0")
    args = ["--assets", ROOT, "--wasm-simd", wasm, "--wasm-scalar", wasm, "--quiet"]
    return cfg, outside, args


def site_config(cfg, effects=("gru.nfx",), clips=("c.wav",), listening=None, name="site.json"):
    d = {"version": 1, "title": "t", "effects": [{"file": f, "id": f"e{k}"} for k, f in enumerate(effects)],
         "clips": [{"file": f} for f in clips]}
    if listening:
        d["listening"] = listening
    (cfg / name).write_text(json.dumps(d))
    return cfg / name


def listening_definition(cfg, stimulus_file):
    d = {"format": "earshot-listening-tests", "version": 1,
         "tests": [{"id": "m", "type": "mushra", "target_lufs": -23, "anchors": False,
                    "conditions": [{"id": "ref", "role": "reference"}],
                    "items": [{"id": "one", "stimuli": {"ref": {"file": stimulus_file}}}]}]}
    (cfg / "listening.json").write_text(json.dumps(d))
    return "listening.json"


@pytest.mark.parametrize("case", ["dotdot-effect", "absolute-effect", "symlink-effect", "dotdot-clip",
                                  "symlink-clip", "dotdot-listening", "dotdot-stimulus", "symlink-stimulus"])
def test_site_paths_outside_the_config_folder_are_refused(tmp_path, case):
    """Every path of a site config and of its listening definition resolves (realpath, after
    symlinks) inside the config's folder, else exit 3 naming the file, the field and the
    resolved path; nothing is built. --allow-root OUTSIDE is the explicit opt-in."""
    cfg, outside, args = site_setup(tmp_path)
    os.symlink(outside / "gru.nfx", cfg / "link.nfx")
    os.symlink(outside / "c.wav", cfg / "link.wav")
    (cfg / "sub").mkdir()
    kind, what = case.split("-")
    rel = {"dotdot": "../outside/", "absolute": str(outside) + "/", "symlink": "link"}[kind]
    config_file, field, bad = cfg / "site.json", None, None
    if what == "effect":
        bad = rel + ("gru.nfx" if kind != "symlink" else ".nfx")
        site_config(cfg, effects=("gru.nfx", bad))
        field = "effects[1].file"
    elif what == "clip":
        bad = rel + ("c.wav" if kind != "symlink" else ".wav")
        site_config(cfg, clips=(bad,))
        field = "clips[0].file"
    elif what == "listening":
        (outside / "l.json").write_text("{}")
        bad = "sub/../../outside/l.json"
        site_config(cfg, listening=bad)
        field = "listening"
    else:
        bad = rel + ("c.wav" if kind != "symlink" else ".wav")
        site_config(cfg, listening=listening_definition(cfg, bad))
        config_file, field = cfg / "listening.json", "tests[0].items[0].stimuli.ref.file"
    out = tmp_path / "site"
    p = run("site", cfg / "site.json", "--out", out, *args)
    assert p.returncode == INPUT, p.stderr
    assert f"{config_file}: {field}: '{bad}'" in p.stderr, p.stderr
    assert str(outside.resolve()) in p.stderr, "the resolved path is named"
    assert not out.exists()
    p = run("site", cfg / "site.json", "--out", out, "--allow-root", outside, *args)
    if kind == "absolute":  # refused whatever the roots
        assert p.returncode == INPUT and "absolute path" in p.stderr, p.stderr
    elif what != "listening":  # l.json is no definition; the others build once allowed
        assert p.returncode == OK, p.stderr


def test_site_rebuild_never_follows_a_symlink_in_the_output_folder(tmp_path):
    """An earlier site whose clips/ is replaced by a symlink to an outside folder holding a
    file of the same name as the bundled clip, plus a symlink to that folder: a rebuild with
    --force leaves the outside folder byte-identical and writes a real clips/ folder."""
    cfg, outside, args = site_setup(tmp_path)
    site_config(cfg)
    out = tmp_path / "site"
    assert run("site", cfg / "site.json", "--out", out, *args).returncode == OK
    assert (out / "clips" / "c.wav").is_file()
    shutil.rmtree(out / "clips")
    os.symlink(outside, out / "clips")
    os.symlink(outside, out / "elsewhere")
    (outside / "c.wav").write_text("sentinel clip")
    before = {p.name: p.read_bytes() for p in outside.iterdir()}
    p = run("site", cfg / "site.json", "--out", f"{out}/", "--force", *args)  # "DIR/" names DIR
    assert p.returncode == OK, p.stderr
    assert {p.name: p.read_bytes() for p in outside.iterdir()} == before
    assert not (out / "clips").is_symlink() and (out / "clips" / "c.wav").read_bytes() == (cfg / "c.wav").read_bytes()
    assert leftovers(tmp_path) == [] and sorted(x.name for x in tmp_path.iterdir()) == ["cfg", "outside", "site",
                                                                                         "w.wasm"]


def test_site_output_folder_that_is_a_symlink_or_holds_an_input_is_refused(tmp_path):
    """--out a symlink to a folder: exit 2, the folder it points to untouched. --out an
    earlier site that now holds the config: exit 2 naming it, even with --force."""
    cfg, outside, args = site_setup(tmp_path)
    site_config(cfg)
    os.symlink(outside, tmp_path / "link")
    before = sorted(p.name for p in outside.iterdir())
    p = run("site", cfg / "site.json", "--out", tmp_path / "link", *args)
    assert p.returncode == USAGE and "symbolic link" in p.stderr and str(tmp_path / "link") in p.stderr, p.stderr
    assert sorted(p.name for p in outside.iterdir()) == before

    out = tmp_path / "site"
    assert run("site", cfg / "site.json", "--out", out, *args).returncode == OK
    shutil.copytree(cfg, out / "cfg")
    p = run("site", out / "cfg" / "site.json", "--out", out, "--force", *args)
    assert p.returncode == USAGE and "is or holds the config" in p.stderr, p.stderr
    assert (out / "cfg" / "site.json").is_file()


def test_site_failed_rebuild_leaves_the_old_site_as_it_was(tmp_path):
    """A rebuild that fails after building (the old site has a folder where the new one
    writes site.json): exit 3 and every file of the old site byte-identical."""
    cfg, outside, args = site_setup(tmp_path)
    site_config(cfg)
    out = tmp_path / "site"
    assert run("site", cfg / "site.json", "--out", out, *args).returncode == OK
    (out / "site.json").unlink()
    (out / "site.json").mkdir()
    (out / "site.json" / "mine.txt").write_text("mine")
    before = {str(p.relative_to(out)): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    p = run("site", cfg / "site.json", "--out", out, "--force", *args)
    assert p.returncode == INPUT and "mine.txt" in p.stderr, p.stderr
    assert {str(p.relative_to(out)): p.read_bytes() for p in out.rglob("*") if p.is_file()} == before
    assert sorted(x.name for x in tmp_path.iterdir()) == ["cfg", "outside", "site", "w.wasm"]


def test_site_truncated_clip_is_refused(tmp_path):
    """A bundled clip whose WAV data chunk runs past the end of the file: exit 3 naming the
    field and 'read N of M frames' (libsndfile alone reports the shorter length)."""
    cfg, outside, args = site_setup(tmp_path)
    whole = (cfg / "c.wav").read_bytes()
    (cfg / "c.wav").write_bytes(whole[:len(whole) // 2])
    site_config(cfg)
    p = run("site", cfg / "site.json", "--out", tmp_path / "site", *args)
    assert p.returncode == INPUT and "clips[0].file" in p.stderr and "of 24000 frames" in p.stderr, p.stderr


# ---- 1 (audio): memory follows the decoded frames, never the header's claim ----------------------

def flac_claiming(folder, total):
    """A 1 s mono FLAC (sox) whose STREAMINFO claims `total` samples. STREAMINFO layout
    (FLAC format specification, xiph.org, 'METADATA_BLOCK_STREAMINFO'): after 'fLaC' and
    the 4-byte block header, 2+2+3+3 bytes of block and frame sizes, then 64 bits holding
    sample rate (20), channels-1 (3), bits-1 (5) and the total sample count (36)."""
    if shutil.which("sox") is None:
        pytest.fail("sox is required (tools/setup.sh installs it)")
    p = pathlib.Path(folder) / f"claims-{total}.flac"
    subprocess.run(["sox", "-n", "-r", "48000", "-c", "1", "-b", "16", str(p), "synth", "1", "sine", "440"],
                   check=True)
    b = bytearray(p.read_bytes())
    assert b[:4] == b"fLaC" and b[4] & 0x7F == 0  # first block is STREAMINFO
    word = int.from_bytes(b[18:26], "big")
    assert word & ((1 << 36) - 1) == 48000
    word = (word & ~((1 << 36) - 1)) | total
    b[18:26] = word.to_bytes(8, "big")
    p.write_bytes(bytes(b))
    return p


def run_limited(*args, limit=512 << 20):
    """Runs earshot with its address space capped (RLIMIT_AS) at `limit` bytes."""
    import resource

    def cap():
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    return subprocess.run([str(EARSHOT), *map(str, args)], capture_output=True, text=True, preexec_fn=cap,
                          timeout=60)


def test_small_flac_claiming_many_frames_costs_what_it_holds(tmp_path):
    """A ~20 KB FLAC claiming 2^27 frames (512 MiB of float if allocated up front): under a
    512 MiB address-space cap, loudness and anchors refuse it with 'read 48000 of 134217728
    frames' (exit 3) instead of failing to allocate. One claiming 2^31 frames is refused by
    the documented sample limit (docs/cli.md) before any reading."""
    p = flac_claiming(tmp_path, 1 << 27)
    for args in (["loudness", p], ["anchors", p, "--out", tmp_path / "anch"]):
        r = run_limited(*args)
        assert r.returncode == INPUT, (args, r.returncode, r.stderr)
        assert p.name in r.stderr and "read 48000 of 134217728 frames" in r.stderr, r.stderr
    q = flac_claiming(tmp_path, 1 << 31)
    r = run_limited("loudness", q)
    assert r.returncode == INPUT, r.stderr
    assert "declares 2147483648 frames" in r.stderr and "at most 268435456 samples" in r.stderr, r.stderr
    assert leftovers(tmp_path) == []
