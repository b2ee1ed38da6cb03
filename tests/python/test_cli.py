"""Proves the `earshot` command-line tool: info figures against the effect's own
tensors and PyTorch's layer equations, render output against closed forms and an
independent SciPy resampling chain (stereo, latency trimming, formats, controls,
mix, gains), verify's hashes against an independent FNV-1a and its test signal
against a NumPy re-derivation, bench's figures for consistency, and a clear error
with a documented exit code for every bad argument and file.

Drives $EARSHOT_BUILD/earshot (default build/native; conftest.need_built says
what happens when it is missing). Effect files are written here with struct/json/numpy (dsp/FORMAT.md
container), audio with scipy.io.wavfile and the `wave` module, FLAC/AIFF read back
through sox.
"""
import json
import math
import os
import pathlib
import shutil
import struct
import subprocess
import warnings
import wave

import numpy as np
import pytest
from scipy import signal
from scipy.io import wavfile
from scipy.optimize import minimize_scalar

from conftest import BUILD, need_built  # noqa: E402
EARSHOT = BUILD / "earshot"

# Exit codes documented in docs/cli.md and `earshot --help`.
OK, CHECK_FAILED, USAGE, INPUT = 0, 1, 2, 3


@pytest.fixture(scope="module", autouse=True)
def _built():
    need_built(EARSHOT)


def run(*args, check_rc=None):
    p = subprocess.run([str(EARSHOT)] + [str(a) for a in args], capture_output=True, text=True, timeout=600)
    # A negative code is a signal (a crash); the tool must never crash.
    assert p.returncode >= 0, f"earshot {args} died by signal {-p.returncode}: {p.stderr}"
    if check_rc is not None:
        assert p.returncode == check_rc, f"earshot {args}: rc {p.returncode}, stderr: {p.stderr}"
    return p


# ---- effect files (dsp/FORMAT.md: u64 LE header length, JSON header, raw LE data) ----

def write_effect(path, layers, tensors, rate=48000, controls=(), inputs=None, input_skip=False, credits=None):
    desc = {"format": "earshot-effect", "version": 1, "sample_rate": rate, "controls": list(controls),
            "credits": credits or {"title": "test effect"},
            "graph": {"inputs": inputs or ["audio"], "layers": layers, "input_skip": input_skip}}
    header, blobs, off = {"__metadata__": {"earshot.effect": json.dumps(desc)}}, [], 0
    for name, a in tensors:
        b = np.asarray(a, dtype="<f4").tobytes()
        header[name] = {"dtype": "F32", "shape": list(np.shape(a)), "data_offsets": [off, off + len(b)]}
        blobs.append(b)
        off += len(b)
    text = json.dumps(header).encode()
    text += b" " * (-len(text) % 8)
    pathlib.Path(path).write_bytes(struct.pack("<Q", len(text)) + text + b"".join(blobs))
    return sum(int(np.size(a)) for _, a in tensors)


H = 16
CONTROLS = [{"name": "drive", "unit": "", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20},
            {"name": "level", "unit": "dB", "min": -24, "max": 6, "default": -3, "smoothing_ms": 50}]
CREDITS = {"title": "Test LSTM", "authors": ["A. Tester", "B. Tester"], "paper": "https://example.org/paper",
           "licence": "CC0-1.0"}


@pytest.fixture(scope="module")
def fx(tmp_path_factory):
    d = tmp_path_factory.mktemp("effects")
    out = {}
    # dsp/FORMAT.md worked example: y = 0.5·x + x = 1.5·x.
    out["half"] = d / "half.nfx"
    write_effect(out["half"], [{"type": "linear", "name": "g", "in": 1, "out": 1, "bias": False}],
                 [("g.weight", [[0.5]])], credits={"title": "half"}, input_skip=True)
    # An LSTM on audio + 2 controls, with a linear head.
    rng = np.random.default_rng(1)
    out["lstm"] = d / "lstm.nfx"
    out["lstm_params"] = write_effect(
        out["lstm"],
        [{"type": "lstm", "name": "rnn", "in": 3, "hidden": H, "num_layers": 1},
         {"type": "linear", "name": "head", "in": H, "out": 1}],
        [("rnn.weight_ih_l0", rng.normal(0, .3, (4 * H, 3))), ("rnn.weight_hh_l0", rng.normal(0, .3, (4 * H, H))),
         ("rnn.bias_ih_l0", rng.normal(0, .1, 4 * H)), ("rnn.bias_hh_l0", rng.normal(0, .1, 4 * H)),
         ("head.weight", rng.normal(0, .3, (1, H))), ("head.bias", [0.0])],
        controls=CONTROLS, inputs=["audio", "drive", "level"], input_skip=True, credits=CREDITS)
    # Two dilated causal convolutions (kernel 3 dilation 4, kernel 5 dilation 2) and a tanh.
    out["conv"] = d / "conv.nfx"
    out["conv_params"] = write_effect(
        out["conv"],
        [{"type": "conv1d", "name": "c1", "in": 1, "out": 4, "kernel": 3, "dilation": 4},
         {"type": "activation", "name": "a1", "channels": 4, "fn": "tanh"},
         {"type": "conv1d", "name": "c2", "in": 4, "out": 1, "kernel": 5, "dilation": 2}],
        [("c1.weight", rng.normal(0, .5, (4, 1, 3))), ("c1.bias", rng.normal(0, .1, 4)),
         ("c2.weight", rng.normal(0, .5, (1, 4, 5))), ("c2.bias", [0.0])])
    # y = gain · x: FiLM with no hidden layer, γ = 1·gain + 0, β = 0·gain + 0.
    out["gain"] = d / "gain.nfx"
    write_effect(out["gain"], [{"type": "film", "name": "f", "channels": 1, "hidden": []}],
                 [("f.mlp.0.weight", [[1.0], [0.0]]), ("f.mlp.0.bias", [0.0, 0.0])],
                 controls=[{"name": "gain", "unit": "", "min": 0, "max": 2, "default": 1, "smoothing_ms": 100}])
    # A chaotic GRU (large random weights): fused multiply-adds make avx2fma diverge.
    rng = np.random.default_rng(5)
    G = 32
    out["chaos"] = d / "chaos.nfx"
    write_effect(out["chaos"],
                 [{"type": "gru", "name": "rnn", "in": 1, "hidden": G, "num_layers": 1},
                  {"type": "linear", "name": "head", "in": G, "out": 1}],
                 [("rnn.weight_ih_l0", rng.normal(0, 2, (3 * G, 1))), ("rnn.weight_hh_l0", rng.normal(0, 2, (3 * G, G))),
                  ("rnn.bias_ih_l0", rng.normal(0, 2, 3 * G)), ("rnn.bias_hh_l0", rng.normal(0, 2, 3 * G)),
                  ("head.weight", rng.normal(0, .3, (1, G))), ("head.bias", [0.0])])
    return out


def read_wav(path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", wavfile.WavFileWarning)  # libsndfile's PEAK chunk
        return wavfile.read(path)


def via_sox(path, tmp_path):
    """Any container sox reads → (rate, float32 samples) through a float WAV."""
    dst = tmp_path / (pathlib.Path(path).name + ".f32.wav")
    subprocess.run(["sox", str(path), "-e", "floating-point", "-b", "32", str(dst)], check=True, capture_output=True)
    return read_wav(dst)


def read_aifc_float(path):
    """(compression type, samples) of a mono AIFF-C file: FORM/AIFC chunks, COMM
    (channels, frames, size, 80-bit rate, compression id), SSND (offset, block size,
    big-endian samples), per Apple's AIFF-C specification (1991). sox is no use here:
    it converts through 32-bit integers and loses the small values."""
    b = pathlib.Path(path).read_bytes()
    assert b[:4] == b"FORM" and b[8:12] == b"AIFC"
    pos, comp, data = 12, None, None
    while pos + 8 <= len(b):
        cid, size = b[pos:pos + 4], struct.unpack(">I", b[pos + 4:pos + 8])[0]
        body = b[pos + 8:pos + 8 + size]
        if cid == b"COMM":
            channels, frames = struct.unpack(">hI", body[:6])
            assert channels == 1
            comp = body[18:22]
        elif cid == b"SSND":
            offset = struct.unpack(">I", body[:4])[0]
            data = np.frombuffer(body[8 + offset:], ">f4")[:frames]
        pos += 8 + size + (size & 1)
    return comp, data.astype(np.float32)


def tones(rate, seconds, freqs, amp=0.2):
    n = int(rate * seconds)
    t = np.arange(n) / rate
    x = sum(amp * np.sin(2 * np.pi * f * t + k) for k, f in enumerate(freqs)) * np.hanning(n)
    return x.astype(np.float32)


# ---- help, version, dispatch ----

def test_version_and_help():
    p = run("--version", check_rc=OK)
    assert p.stdout.startswith("earshot ") and p.stdout.split()[1][0].isdigit()
    p = run("--help", check_rc=OK)
    for cmd in ("info", "render", "bench", "verify"):
        assert f"  {cmd} " in p.stdout
    for cmd in ("info", "render", "bench", "verify"):
        p = run(cmd, "--help", check_rc=OK)
        assert p.stdout.startswith(f"usage: earshot {cmd}")
    p = run("render", "--help", check_rc=OK)
    assert "each channel comes out exactly as a mono file" in p.stdout and "32-bit float" in p.stdout
    assert "FNV-1a 64" in run("verify", "-h", check_rc=OK).stdout
    assert run(check_rc=USAGE).stderr.startswith("earshot ")  # no command: usage on stderr


# ---- info ----

def test_info_text_lstm(fx):
    p = run("info", fx["lstm"], check_rc=OK)
    out = p.stdout
    assert out.splitlines()[0] == "Test LSTM"
    size = os.path.getsize(fx["lstm"])
    assert f"{size:,}".replace(",", " ") + " bytes" in out
    assert "A. Tester, B. Tester" in out and "https://example.org/paper" in out and "CC0-1.0" in out
    # Parameters: every scalar in the file's tensors (counted from what we wrote).
    assert f"{fx['lstm_params']:,}".replace(",", " ") in line_of(out, "parameters")
    # Multiply-adds: PyTorch nn.LSTM equations (torch.nn.LSTM docs): four gates, each
    # W_i·x (H×in) + W_h·h (H×H) → 4H(in+H); nn.Linear: out·in.
    macs = 4 * H * (3 + H) + 1 * H
    assert f"{macs:,}".replace(",", " ") + " per sample" in line_of(out, "multiply-adds")
    assert "recurrent" in line_of(out, "receptive field")
    assert "0 samples at 48000 Hz" in line_of(out, "latency")
    # Layers with their shapes.
    assert any(l.split()[:5] == ["0", "rnn", "lstm", "3", "->"] and "hidden 16" in l for l in out.splitlines())
    assert any(l.split()[:6] == ["1", "head", "linear", "16", "->", "1"] for l in out.splitlines())
    # Controls: name, unit, min, max, default, smoothing.
    rows = {l.split()[0]: l.split() for l in section(out, "controls")}
    assert rows["drive"] == ["drive", "-", "0", "1", "0.5", "20", "ms"]
    assert rows["level"] == ["level", "dB", "-24", "6", "-3", "50", "ms"]


def test_info_text_conv_receptive_field(fx):
    out = run("info", fx["conv"], check_rc=OK).stdout
    # Receptive field of stacked causal dilated convolutions: 1 + Σ (kernel − 1)·dilation
    # (van den Oord et al. 2016, WaveNet §2.1; common practice).
    rf = 1 + (3 - 1) * 4 + (5 - 1) * 2
    assert line_of(out, "receptive field").split()[2:4] == [str(rf), "samples"]
    # Conv1d products per output sample: out·in·kernel (torch.nn.Conv1d docs).
    macs = 4 * 1 * 3 + 1 * 4 * 5
    assert f" {macs} per sample" in line_of(out, "multiply-adds")
    assert f" {fx['conv_params']}" in line_of(out, "parameters")
    assert "kernel 3, dilation 4" in out and "kernel 5, dilation 2" in out and " tanh" in out
    assert "none" in section(out, "controls")[0]


def line_of(text, key):
    for l in text.splitlines():
        if l.strip().startswith(key):
            return l
    raise AssertionError(f"no line starting with {key!r} in:\n{text}")


def section(text, head):
    lines = text.splitlines()
    i = next(k for k, l in enumerate(lines) if l.startswith(head + " ("))
    body = []
    for l in lines[i + 1:]:
        if not l.strip():
            break
        body.append(l)
    return body[1:] if body and body[0].split()[0] == "name" else body


def test_info_json(fx):
    j = json.loads(run("info", fx["lstm"], "--json", check_rc=OK).stdout)
    assert j["title"] == "Test LSTM" and j["model_rate"] == 48000 and j["host_rate"] == 48000
    assert j["latency"] == 0 and j["recurrent"] is True and j["receptive_field"] is None
    assert j["parameters"] == fx["lstm_params"]
    assert j["macs_per_sample"] == 4 * H * (3 + H) + H
    assert [l["name"] for l in j["layers"]] == ["rnn", "head"]
    assert [c["name"] for c in j["effect"]["controls"]] == ["drive", "level"]
    j44 = json.loads(run("info", fx["lstm"], "--json", "--rate", "44100", check_rc=OK).stdout)
    assert j44["host_rate"] == 44100 and j44["latency"] > 0
    j = json.loads(run("info", fx["lstm"], "--json", "--variant", "scalar", check_rc=OK).stdout)
    assert j["variant"] == "scalar"


# ---- render ----

def test_render_closed_form_float_and_pcm16(fx, tmp_path):
    rate = 48000
    rng = np.random.default_rng(2)
    x = (0.5 * rng.uniform(-1, 1, rate)).astype(np.float32)
    wavfile.write(tmp_path / "in.wav", rate, x)
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "out.wav", check_rc=OK)
    r, y = read_wav(tmp_path / "out.wav")
    assert r == rate and y.dtype == np.float32 and y.shape == x.shape
    # 0.5·x + x rounds once to float32, as does 1.5·x (IEEE 754: both exact before rounding).
    assert np.array_equal(y, np.float32(1.5) * x)

    # 16-bit PCM input: libsndfile reads int16 as v / 32768 (libsndfile docs,
    # "sf_read_float ... normalised"; recalled from memory); the output is float32 WAV.
    xi = (rng.uniform(-0.5, 0.5, rate) * 32768).astype(np.int16)
    wavfile.write(tmp_path / "in16.wav", rate, xi)
    run("render", fx["half"], tmp_path / "in16.wav", tmp_path / "out16.wav", check_rc=OK)
    _, y = read_wav(tmp_path / "out16.wav")
    assert y.dtype == np.float32
    assert np.array_equal(y, np.float32(1.5) * (xi.astype(np.float32) / np.float32(32768)))


def test_render_stereo_is_two_independent_streams(fx, tmp_path):
    rate = 44100
    a, b = tones(rate, 0.5, [330, 2500]), tones(rate, 0.5, [97, 7000], amp=0.3)
    wavfile.write(tmp_path / "st.wav", rate, np.stack([a, b], 1))
    wavfile.write(tmp_path / "a.wav", rate, a)
    wavfile.write(tmp_path / "b.wav", rate, b)
    ctl = ["--control", "drive=0.8", "--control", "level=-6"]
    run("render", fx["lstm"], tmp_path / "st.wav", tmp_path / "st_out.wav", *ctl, check_rc=OK)
    run("render", fx["lstm"], tmp_path / "a.wav", tmp_path / "a_out.wav", *ctl, check_rc=OK)
    run("render", fx["lstm"], tmp_path / "b.wav", tmp_path / "b_out.wav", *ctl, check_rc=OK)
    _, st = read_wav(tmp_path / "st_out.wav")
    _, ya = read_wav(tmp_path / "a_out.wav")
    _, yb = read_wav(tmp_path / "b_out.wav")
    assert st.shape == (len(a), 2)
    assert np.array_equal(st[:, 0], ya) and np.array_equal(st[:, 1], yb)
    assert not np.array_equal(ya, yb)


def test_render_more_than_two_channels_refused(fx, tmp_path):
    wavfile.write(tmp_path / "c3.wav", 48000, np.zeros((100, 3), np.float32))
    p = run("render", fx["half"], tmp_path / "c3.wav", tmp_path / "o.wav", check_rc=INPUT)
    assert "3 channels" in p.stderr and "mono or stereo" in p.stderr
    assert not (tmp_path / "o.wav").exists()


def _resample(x, up, down):
    """scipy.signal.resample_poly with a long Kaiser-windowed FIR (firwin, β = 12,
    cutoff 0.95 of the lower Nyquist): an independent, zero-phase, nearly ideal
    resampler for signals below 0.8 of the lower Nyquist."""
    m = max(up, down)
    h = signal.firwin(2 * 64 * m + 1, 0.95 / m, window=("kaiser", 12.0))
    return signal.resample_poly(x, up, down, window=h)


@pytest.mark.parametrize("rate,up,down", [(44100, 160, 147), (32000, 3, 2), (96000, 1, 2)])
def test_render_latency_trim_against_scipy(fx, tmp_path, rate, up, down):
    """Host rate ≠ model rate (48 kHz): OUT has IN's length and lines up with IN.

    Reference: x → 48 kHz → ×1.5 (the worked example) → back, with SciPy. The core's
    resampler chain delays by a whole number of samples plus a fraction; the trim
    removes the whole number (earshot_latency), so the fitted residual delay must be
    within half a sample, and after that fraction the two agree to ESR ≤ −100 dB
    (measured −112.7 … −118 dB here; both resamplers' passband errors are below that)."""
    x = tones(rate, 1.0, [220, 1234.5, 0.2 * rate, 0.4 * rate])
    wavfile.write(tmp_path / "in.wav", rate, x)
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "out.wav", check_rc=OK)
    r, y = read_wav(tmp_path / "out.wav")
    assert r == rate and len(y) == len(x)
    ref = _resample(1.5 * _resample(x.astype(np.float64), up, down), down, up)
    n = len(x)
    R, f = np.fft.rfft(ref, 2 * n), np.fft.rfftfreq(2 * n)

    def esr(d):  # ref delayed by d samples (exact fractional delay of a zero-padded, windowed signal)
        shifted = np.fft.irfft(R * np.exp(-2j * np.pi * f * d), 2 * n)[:n]
        return np.sum((y - shifted) ** 2) / np.sum(ref ** 2)

    fit = minimize_scalar(esr, bounds=(-2, 2), method="bounded", options={"xatol": 1e-7})
    assert abs(fit.x) <= 0.5, f"residual delay {fit.x:.4f} samples: the trim is off by a whole sample"
    assert 10 * math.log10(fit.fun) <= -100, f"ESR {10 * math.log10(fit.fun):.1f} dB"

    # --keep-latency: no trim, tail flushed; the trimmed output is its slice.
    lat = json.loads(run("info", fx["half"], "--json", "--rate", rate, check_rc=OK).stdout)["latency"]
    assert lat > 0
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "keep.wav", "--keep-latency", check_rc=OK)
    _, k = read_wav(tmp_path / "keep.wav")
    assert len(k) == n + lat
    assert np.array_equal(k[lat:], y)


def test_render_block_size_does_not_matter(fx, tmp_path):
    rate = 44100
    x = tones(rate, 0.4, [110, 3000, 12000], amp=0.3)
    wavfile.write(tmp_path / "in.wav", rate, x)
    outs = []
    for b in (1, 7, 512, 65536):
        run("render", fx["lstm"], tmp_path / "in.wav", tmp_path / f"o{b}.wav", "--block", b, check_rc=OK)
        outs.append(read_wav(tmp_path / f"o{b}.wav")[1])
    for o in outs[1:]:
        assert np.array_equal(o, outs[0])


def test_render_controls_start_at_their_value(fx, tmp_path):
    rate = 48000
    x = tones(rate, 0.3, [440, 5000], amp=0.4)
    wavfile.write(tmp_path / "in.wav", rate, x)
    run("render", fx["gain"], tmp_path / "in.wav", tmp_path / "d.wav", check_rc=OK)
    assert np.array_equal(read_wav(tmp_path / "d.wav")[1], x)  # default gain 1: γ·x + β = 1·x + 0
    run("render", fx["gain"], tmp_path / "in.wav", tmp_path / "g.wav", "--control", "gain=0.3", check_rc=OK)
    # γ = 1·0.3 + 0 and y = γ·x + 0: one float32 rounding of 0.3f·x, from the first sample (no ramp).
    assert np.array_equal(read_wav(tmp_path / "g.wav")[1], np.float32(0.3) * x)
    # The last of repeated settings wins.
    run("render", fx["gain"], tmp_path / "in.wav", tmp_path / "g2.wav", "--control", "gain=2",
        "--control", "gain=0.3", check_rc=OK)
    assert np.array_equal(read_wav(tmp_path / "g2.wav")[1], np.float32(0.3) * x)


def test_render_mix_and_gains(fx, tmp_path):
    rate = 48000
    x = tones(rate, 0.3, [300, 4000], amp=0.3)
    wavfile.write(tmp_path / "in.wav", rate, x)

    def render(*opts):
        # The same OUT each time: --force replaces it (an existing OUT is refused without it).
        run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o.wav", "--force", *opts, check_rc=OK)
        return read_wav(tmp_path / "o.wav")[1].astype(np.float64)

    assert np.array_equal(render("--mix", "0"), x)  # dry only: dry·1 + wet·0
    # Dry/wet: (1 − w)·x + w·1.5x; float32 arithmetic, so within a few ulps.
    np.testing.assert_allclose(render("--mix", "0.5"), 1.25 * x, rtol=1e-6, atol=1e-9)
    # Gain in dB: 10^(dB/20) (IEC 60027-3 field quantity level; common practice).
    np.testing.assert_allclose(render("--output-gain", "-6"), 1.5 * x * 10 ** (-6 / 20), rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(render("--input-gain", "3.5"), 1.5 * x * 10 ** (3.5 / 20), rtol=1e-6, atol=1e-9)


def test_render_formats_and_containers(fx, tmp_path):
    rate = 48000  # the model rate: no resampling, so the closed form holds exactly
    x = tones(rate, 0.3, [500, 9000], amp=0.25)
    wavfile.write(tmp_path / "in.wav", rate, x)
    ref = 1.5 * x.astype(np.float64)

    # FLAC: 24-bit integer by default; within 2 LSB of 2^-23 (quantisation plus
    # libsndfile's float→int scaling by 2^23 − 1 rather than 2^23, recalled from memory).
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o.flac", check_rc=OK)
    assert (tmp_path / "o.flac").read_bytes()[:4] == b"fLaC"
    info = subprocess.run(["soxi", "-b", str(tmp_path / "o.flac")], capture_output=True, text=True).stdout.strip()
    assert info == "24"
    r, y = via_sox(tmp_path / "o.flac", tmp_path)
    assert r == rate and len(y) == len(x)
    assert np.max(np.abs(y - ref)) <= 2 * 2.0 ** -23

    # AIFF: 32-bit float (AIFF-C), the exact core output.
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o.aiff", check_rc=OK)
    assert (tmp_path / "o.aiff").read_bytes()[:4] == b"FORM"
    comp, y = read_aifc_float(tmp_path / "o.aiff")
    # 32-bit float compression type: "fl32" in Apple's text, "FL32" as libsndfile writes it.
    assert comp.lower() == b"fl32" and np.array_equal(y, np.float32(1.5) * x)

    # No extension: IN's container (FLAC in → FLAC out, 24-bit).
    run("render", fx["half"], tmp_path / "o.flac", tmp_path / "noext", check_rc=OK)
    assert (tmp_path / "noext").read_bytes()[:4] == b"fLaC"
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "noext2", check_rc=OK)
    assert (tmp_path / "noext2").read_bytes()[:4] == b"RIFF"

    # --encoding pcm16 in WAV: 16-bit, read with the `wave` module; within 1 LSB of 2^-15.
    run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o16.wav", "--encoding", "pcm16", check_rc=OK)
    with wave.open(str(tmp_path / "o16.wav")) as w:
        assert w.getsampwidth() == 2 and w.getframerate() == rate and w.getnchannels() == 1
        y = np.frombuffer(w.readframes(w.getnframes()), "<i2") / 32768.0
    assert np.max(np.abs(y - ref)) <= 2.0 ** -15


def test_render_integer_output_clips_with_a_warning(fx, tmp_path):
    x = np.full(1000, 0.9, np.float32)  # 1.5 · 0.9 = 1.35: over full scale
    wavfile.write(tmp_path / "in.wav", 48000, x)
    p = run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o.wav", "--encoding", "pcm16", check_rc=OK)
    assert "clipped" in p.stderr
    with wave.open(str(tmp_path / "o.wav")) as w:
        y = np.frombuffer(w.readframes(w.getnframes()), "<i2")
    assert y.max() == 32767  # clipped at full scale, not wrapped to negative


def test_render_progress_bar_only_when_asked(fx, tmp_path):
    wavfile.write(tmp_path / "in.wav", 48000, np.zeros(48000, np.float32))
    p = run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o.wav", "--block", "1000", check_rc=OK)
    assert p.stderr == ""  # stderr is a pipe here: no bar
    assert p.stdout.startswith("wrote ")
    p = run("render", fx["half"], tmp_path / "in.wav", tmp_path / "o.wav", "--progress", "--quiet", "--force",
            check_rc=OK)
    assert "rendering [" in p.stderr and "100%" in p.stderr and p.stdout == ""


# ---- verify ----

FNV_OFFSET, FNV_PRIME = 0xcbf29ce484222325, 0x100000001b3  # FNV-1a 64 (Fowler, Noll, Vo; IETF draft-eastlake-fnv)


def fnv1a64(data):
    h = FNV_OFFSET
    for byte in data:
        h = ((h ^ byte) * FNV_PRIME) & 0xFFFFFFFFFFFFFFFF
    return h


def test_fnv_reference_vector():
    # FNV-1a 64 test vectors: "" → cbf29ce484222325, "a" → af63dc4c8601ec8c (recalled from memory).
    assert fnv1a64(b"") == 0xcbf29ce484222325 and fnv1a64(b"a") == 0xaf63dc4c8601ec8c


def reference_signal(rate, seconds):
    """dsp/cli/test_signal.hpp re-derived with NumPy's sin/exp and closed forms."""
    n = int(seconds * rate + 0.5)
    s = np.zeros(n)
    n_sweep, n_active = n * 8 // 10, n * 9 // 10
    top, octaves = 20.0, 0
    while octaves < 10 and top * 2 <= 0.45 * rate:
        top *= 2
        octaves += 1
    i = np.arange(n_sweep)
    ratio = 2.0 ** (octaves / (n_sweep - 1))
    phase = 20.0 / rate * (ratio ** i - 1) / (ratio - 1)  # Σ_{j<i} f0·r^j / R, in cycles
    fade = int(0.010 * rate + 0.5)
    g = np.minimum(1.0, np.minimum(i / fade, (n_sweep - 1 - i) / fade))
    s[:n_sweep] += 0.5 * g * np.sin(2 * np.pi * phase)
    period = int(0.5 * rate + 0.5)
    k = np.arange(n_active) % period
    env = np.exp(-k / (0.150 * rate))
    s[:n_active] += 0.35 * env * (np.sin(2 * np.pi * 220 * k / rate) + 0.5 * np.sin(2 * np.pi * 660 * k / rate))
    burst, every, first = int(0.030 * rate + 0.5), int(0.250 * rate + 0.5), int(0.100 * rate + 0.5)
    state = 1
    for j in range(first, n_active):
        if (j - first) % every >= burst:
            continue
        state = (state * 6364136223846793005 + 1442695040888963407) % 2 ** 64  # Knuth MMIX LCG
        s[j] += 0.25 * (2.0 * ((state >> 11) / 2.0 ** 53) - 1.0)
    return s * (10 ** (-6 / 20) / np.max(np.abs(s)))


def test_verify_signal_and_hashes(fx, tmp_path):
    p = run("verify", fx["half"], "--seconds", "1", "--json", "--write-signal", tmp_path / "sig.wav", check_rc=OK)
    j = json.loads(p.stdout)
    r, x = read_wav(tmp_path / "sig.wav")
    assert r == 48000 and x.dtype == np.float32 and len(x) == 48000 == j["signal"]["samples"]
    # The signal is what test_signal.hpp documents: NumPy's libm-based version agrees to
    # float32 rounding (2^-24 relative at 0.5 ≈ 3e-8) plus phase-accumulation error.
    assert np.max(np.abs(x - reference_signal(48000, 1.0))) <= 1e-6
    assert np.max(np.abs(x)) == np.float32(10 ** (-6 / 20))
    assert np.all(x[int(0.9 * len(x)):] == 0)
    assert j["hash"] == "fnv1a64-float32le"
    assert j["signal"]["hash"] == f"{fnv1a64(x.astype('<f4').tobytes()):016x}"
    # The worked example's output is fl(1.5·x) in every variant, so each hash is known.
    want = f"{fnv1a64((np.float32(1.5) * x).astype('<f4').tobytes()):016x}"
    ran = [v for v in j["variants"] if v["supported"]]
    assert ran and ran[0]["variant"] == "scalar"
    for v in ran:
        assert v["hash"] == want and v["block_invariant"] and v["nonfinite_blocks"] == 0
    assert j["parity"]["identical"] is True and j["parity"]["first_difference"] is None and j["pass"] is True
    if any(v["variant"] == "avx2fma" for v in ran):
        assert j["avx2fma"]["identical"] is True and j["avx2fma"]["esr_db"] is None


def test_verify_lstm_text_and_resampled(fx):
    p = run("verify", fx["lstm"], "--seconds", "1", check_rc=OK)
    assert "FNV-1a 64" in p.stdout and p.stdout.rstrip().endswith("PASS")
    assert "bit-identical" in line_of(p.stdout, "parity")
    j = json.loads(run("verify", fx["lstm"], "--seconds", "0.5", "--rate", "44100", "--json", check_rc=OK).stdout)
    hashes = {v["hash"] for v in j["variants"] if v["supported"] and v["variant"] in ("scalar", "sse4", "avx2")}
    assert len(hashes) == 1 and j["signal"]["rate"] == 44100 and j["pass"] is True
    if j["avx2fma"] is not None:
        assert j["avx2fma"]["esr_db"] is None or j["avx2fma"]["esr_db"] <= -120


def test_verify_fails_when_avx2fma_drifts(fx):
    j = json.loads(run("verify", fx["lstm"], "--seconds", "0.2", "--json", check_rc=OK).stdout)
    if not any(v["variant"] == "avx2fma" and v["supported"] for v in j["variants"]):
        pytest.skip("this CPU has no AVX2+FMA")
    # Chaotic recurrence: last-bit differences of fused multiply-adds grow until the
    # outputs decorrelate, so the −120 dB bound (design invariant 2) fails: exit 1.
    p = run("verify", fx["chaos"], "--seconds", "2", "--json", check_rc=CHECK_FAILED)
    j = json.loads(p.stdout)
    assert j["pass"] is False and j["avx2fma"]["ok"] is False and j["avx2fma"]["esr_db"] > -120
    assert j["parity"]["identical"] is True  # the parity variants still agree bit for bit
    p = run("verify", fx["chaos"], "--seconds", "2", check_rc=CHECK_FAILED)
    assert "EXCEEDED" in p.stdout and p.stdout.rstrip().endswith("FAIL")


# ---- bench (figures printed, never timed here: only their relations are checked) ----

def test_bench_figures_are_consistent(fx):
    j = json.loads(run("bench", fx["lstm"], "--seconds", "0.2", "--rounds", "1", "--json", check_rc=OK).stdout)
    v = json.loads(run("verify", fx["half"], "--seconds", "0.1", "--json", check_rc=OK).stdout)
    assert [r["variant"] for r in j["variants"]] == [x["variant"] for x in v["variants"] if x["supported"]]
    assert j["macs_per_sample"] == 4 * H * (3 + H) + H and j["model_rate"] == 48000 and j["threads"] == 1
    for r in j["variants"]:
        assert r["realtime"] > 0 and r["peak_madds_per_second"] > 0
        # madd/s = multiply-adds per sample × samples per second; share = achieved / peak.
        assert r["madds_per_second"] == pytest.approx(j["macs_per_sample"] * 48000 * r["realtime"], rel=1e-5)
        assert r["share_of_peak"] == pytest.approx(r["madds_per_second"] / r["peak_madds_per_second"], rel=1e-5)
    p = run("bench", fx["half"], "--seconds", "0.1", "--rounds", "1", "--variant", "scalar", check_rc=OK)
    rows = [l for l in p.stdout.splitlines() if l.split() and l.split()[0] in ("scalar", "sse4", "avx2", "avx2fma")]
    assert len(rows) == 1 and rows[0].split()[0] == "scalar" and "share" in p.stdout


# ---- errors: every one named, with its exit code, never a crash ----

@pytest.fixture(scope="module")
def bad(tmp_path_factory, fx):
    d = tmp_path_factory.mktemp("bad")
    wavfile.write(d / "ok.wav", 48000, np.zeros(480, np.float32))
    wavfile.write(d / "slow.wav", 4000, np.zeros(40, np.float32))
    (d / "corrupt.wav").write_bytes(b"RIFF\x24\x00\x00\x00WAVEfmt " + bytes(range(40)))
    (d / "text.nfx").write_text("not an effect file at all\n")
    blob = pathlib.Path(fx["lstm"]).read_bytes()
    (d / "truncated.nfx").write_bytes(blob[: len(blob) - 10])
    (d / "tiny.nfx").write_bytes(b"\x01\x02")
    os.mkdir(d / "dir.nfx")
    return d


def error_cases():
    h, l = "{half}", "{lstm}"
    ok, o = "{bad}/ok.wav", "{tmp}/o.wav"
    return [
        # (arguments, exit code, words the message must contain)
        (["frobnicate"], USAGE, ["unknown command 'frobnicate'"]),
        (["--frob"], USAGE, ["unknown option '--frob'"]),
        (["info", h, "--frob"], USAGE, ["unknown option '--frob'"]),
        (["info"], USAGE, ["missing the effect FILE"]),
        (["info", h, h], USAGE, ["expected one effect FILE"]),
        (["info", h, "--rate"], USAGE, ["--rate needs a value"]),
        (["info", h, "--rate", "fast"], USAGE, ["--rate", "'fast' is not a number"]),
        (["info", h, "--rate", "1000"], USAGE, ["--rate", "outside the allowed range"]),
        (["info", h, "--json=yes"], USAGE, ["--json takes no value"]),
        (["info", "{bad}/missing.nfx"], INPUT, ["cannot read effect file", "No such file"]),
        (["info", "{bad}/dir.nfx"], INPUT, ["is a directory"]),
        (["info", "{bad}/text.nfx"], INPUT, ["text.nfx", "header length"]),
        (["info", "{bad}/tiny.nfx"], INPUT, ["tiny.nfx", "8"]),
        (["info", "{bad}/truncated.nfx"], INPUT, ["truncated.nfx"]),
        (["info", h, "--variant", "turbo"], USAGE, ["unknown variant 'turbo'"]),
        (["render", h, ok], USAGE, ["missing the output audio file OUT"]),
        (["render", h, ok, o, "x"], USAGE, ["expected FILE IN OUT"]),
        (["render", h, ok, o, "--block"], USAGE, ["--block needs a value"]),
        (["render", h, ok, o, "--block", "0"], USAGE, ["--block", "outside the allowed range 1 .. 65536"]),
        (["render", h, ok, o, "--block", "65537"], USAGE, ["--block", "outside the allowed range"]),
        (["render", h, ok, o, "--block", "12x"], USAGE, ["--block", "not a whole number"]),
        (["render", h, ok, o, "--block", "2.5"], USAGE, ["--block", "not a whole number"]),
        (["render", h, ok, o, "--mix", "nan"], USAGE, ["--mix", "not a finite number"]),
        (["render", h, ok, o, "--mix", "1.5"], USAGE, ["--mix 1.5", "value outside the allowed range"]),
        (["render", h, ok, o, "--input-gain", "30"], USAGE, ["--input-gain 30", "value outside the allowed range"]),
        (["render", h, ok, o, "--output-gain", "-61"], USAGE, ["--output-gain -61", "outside the allowed range"]),
        (["render", h, ok, o, "--control", "drive=1"], USAGE, ["no control named 'drive'", "no controls"]),
        (["render", l, ok, o, "--control", "gain=1"], USAGE, ["no control named 'gain'", "drive, level"]),
        (["render", l, ok, o, "--control", "drive"], USAGE, ["expected NAME=VALUE"]),
        (["render", l, ok, o, "--control", "drive=much"], USAGE, ["drive", "'much' is not a number"]),
        # earshot_status_text(EARSHOT_ERR_RANGE) with the control's range.
        (["render", l, ok, o, "--control", "drive=1.5"], USAGE, ["value outside the allowed range", "0 .. 1"]),
        (["render", l, ok, o, "--control", "level=-30"], USAGE, ["level=-30", "-24 .. 6"]),
        (["render", h, ok, o, "--variant", "turbo"], USAGE, ["unknown variant 'turbo'", "scalar"]),
        (["render", h, ok, o, "--encoding", "mp3"], USAGE, ["unknown encoding 'mp3'"]),
        (["render", h, ok, "{tmp}/o.flac", "--encoding", "float"], USAGE, ["FLAC cannot hold 32-bit float"]),
        (["render", h, ok, "{tmp}/o.mp3"], USAGE, ["unknown extension '.mp3'"]),
        (["render", h, ok, ok], USAGE, ["same file as IN"]),
        (["render", h, "{bad}/missing.wav", o], INPUT, ["cannot read audio file", "missing.wav"]),
        (["render", h, "{bad}/corrupt.wav", o], INPUT, ["cannot read audio file", "corrupt.wav"]),
        (["render", h, "{bad}/text.nfx", o], INPUT, ["cannot read audio file", "text.nfx"]),
        (["render", h, "{bad}/slow.wav", o], INPUT, ["sample rate 4000 Hz"]),
        (["render", h, ok, "{bad}/no/such/dir/o.wav"], INPUT, ["cannot write audio file"]),
        (["render", "{bad}/text.nfx", ok, o], INPUT, ["text.nfx", "header length"]),
        (["bench", h, "--seconds", "0"], USAGE, ["--seconds", "outside the allowed range"]),
        (["bench", h, "--rounds", "-1"], USAGE, ["--rounds", "outside the allowed range"]),
        (["bench", h, "--variant", "turbo"], USAGE, ["unknown variant"]),
        (["bench", "{bad}/missing.nfx"], INPUT, ["cannot read effect file"]),
        (["verify", h, "--seconds", "inf"], USAGE, ["--seconds", "not a finite number"]),
        (["verify", h, "--rate", "44100.5"], USAGE, ["--rate", "not a whole number"]),
        (["verify", "{bad}/truncated.nfx"], INPUT, ["truncated.nfx"]),
        (["verify", h, "--write-signal", "{bad}/no/such/dir/s.wav"], INPUT, ["cannot write"]),
    ]


@pytest.mark.parametrize("args,rc,words", error_cases(), ids=lambda v: " ".join(v) if isinstance(v, list) else None)
def test_errors(fx, bad, tmp_path, args, rc, words):
    subst = {"half": fx["half"], "lstm": fx["lstm"], "bad": bad, "tmp": tmp_path}
    p = run(*[a.format(**subst) for a in args], check_rc=rc)
    assert p.stderr.startswith("earshot"), p.stderr
    for w in words:
        assert w.format(**subst) in p.stderr, f"{w!r} not in: {p.stderr}"
    if rc == USAGE:
        assert "--help" in p.stderr
    assert "internal error" not in p.stderr
    assert not (tmp_path / "o.wav").exists()  # nothing written on failure


def test_unsupported_variant_refused(fx, tmp_path):
    j = json.loads(run("verify", fx["half"], "--seconds", "0.1", "--json", check_rc=OK).stdout)
    missing = [v["variant"] for v in j["variants"] if not v["supported"]]
    if not missing:
        pytest.skip("this CPU runs every variant; the refusal of an unsupported one cannot be shown here")
    p = run("info", fx["half"], "--variant", missing[0], check_rc=USAGE)
    assert "needs instructions this CPU does not have" in p.stderr


def test_corrupted_effect_files_never_crash(fx, tmp_path):
    """Truncations and byte flips of a valid file: each is refused (exit 3) with the
    file named, or still loads (exit 0); never a signal."""
    blob = bytearray(pathlib.Path(fx["lstm"]).read_bytes())
    rng = np.random.default_rng(3)
    cases = [bytes(blob[:k]) for k in (0, 7, 8, 9, 64, len(blob) // 2, len(blob) - 1)]
    for _ in range(25):
        b = bytearray(blob)
        for pos in rng.integers(0, len(b), 3):
            b[pos] ^= int(rng.integers(1, 256))
        cases.append(bytes(b))
    for k, c in enumerate(cases):
        f = tmp_path / f"c{k}.nfx"
        f.write_bytes(c)
        p = run("info", f)
        assert p.returncode in (OK, INPUT), p.stderr
        if p.returncode == INPUT:
            assert f"c{k}.nfx" in p.stderr and "internal error" not in p.stderr
