"""The conformance corpus (tests/data/effects/README.md) through the Python side.

- earshot.load accepts every valid file with the description the core gives
  (expected.json: layer names, types, widths, parameter counts; controls) and
  refuses every invalid one with a message naming the same field or tensor
  (index.json `names`).
- Re-exporting a loaded valid file keeps every tensor bit for bit, and the core
  reads the re-export as the same effect (same description JSON, same output
  hash); where the original is in the exporter's own form the bytes are equal.
- The exporter refuses every core limit exceeded by one, naming the limit, and
  the Python limits table equals dsp/core/model.hpp's constants.
- The PyTorch reference of each valid file matches the core (libearshot.so by
  ctypes) within test_parity.py's whole-model tolerances.
"""

import json
import os
import re

import numpy as np
import pytest
import torch
import torch.nn as nn

import earshot
from earshot import container, layer_types, limits, native
from earshot.cli import figures
from earshot.container import FormatError
from earshot.exporter import ExportError
from test_parity import MODEL, esr_db

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DIR = os.path.join(ROOT, "tests", "data", "effects")
INDEX = json.load(open(os.path.join(DIR, "index.json")))
EXPECTED = json.load(open(os.path.join(DIR, "expected.json")))
VALID = [e["file"] for e in INDEX["valid"]]
# "pending" files (see make_corpus.py) are refused by the Python loader already; the core follows later.
INVALID = INDEX["invalid"] + INDEX.get("pending", [])
torch.set_num_threads(1)


def blob(name):
    with open(os.path.join(DIR, name), "rb") as f:
        return f.read()


def signal():
    """The standard test signal (dsp/cli/test_signal.hpp), as the Catch2 corpus test checked it in."""
    return np.fromfile(os.path.join(DIR, "signal.f32"), dtype="<f4")


def fnv1a64(y):
    """FNV-1a 64 (offset basis 14695981039346656037, prime 1099511628211; the FNV
    reference, draft-eastlake-fnv) over the little-endian float32 bytes."""
    h = 14695981039346656037
    for b in np.ascontiguousarray(y, "<f4").tobytes():
        h = ((h ^ b) * 1099511628211) & 0xFFFFFFFFFFFFFFFF
    return f"{h:016x}"


def core_run(data, rate):
    """(description JSON without the variant, output hash) from the core."""
    with native.Stream(data, rate) as s:
        info = json.loads(native.library().earshot_info(s.h).decode())
        info.pop("variant")
        y = s.process(signal(), len(signal()))
    return info, fnv1a64(y)


# --------------------------------------------------------------------------
def test_limits_table_matches_model_hpp():
    """Every `constexpr ... kMax... = ...;` of dsp/core/model.hpp is in earshot.limits with the same value."""
    text = open(os.path.join(ROOT, "dsp", "core", "model.hpp")).read()
    found = dict(re.findall(r"constexpr\s+\w+\s+(kMax\w+)\s*=\s*([^;]+);", text))
    assert len(found) >= 13
    values = {}
    for k, expr in found.items():
        expr = re.sub(r"(\d+)[uU]?[lL]*", r"\1", expr)
        assert re.fullmatch(r"[\d\s<()+*-]+", expr), f"{k}: unexpected expression {expr!r}"
        values[k] = eval(expr)  # digits, spaces, <<, + - * and parentheses only (checked above)
    assert values == limits.LIMITS


def test_layer_table_matches_the_core_registry():
    """earshot.layer_types has one row per row of dsp/layers/registry.hpp, same names, same order."""
    text = open(os.path.join(ROOT, "dsp", "layers", "registry.hpp")).read()
    rows = re.findall(r"^\s*X\((\w+), \w+\)", text, re.M)
    assert len(rows) >= 9
    assert rows == list(layer_types.LAYER_TYPES)


@pytest.mark.parametrize("name", VALID)
def test_python_figures_equal_the_core_description(name):
    """Multiply-adds per sample and receptive field from the Python table (earshot.cli.figures) equal the
    core's, for every valid corpus file (the core's figures are the checked-in expected.json)."""
    want = EXPECTED[name]["description"]
    got = figures(want["effect"])
    assert got["madds_per_sample"] == want["macs_per_sample"]
    assert got["receptive_field"] == ("recurrent" if want["recurrent"] else want["receptive_field"])


@pytest.mark.parametrize("name", VALID)
def test_python_info_prints_every_valid_file(name, capsys):
    """`python3 -m earshot info` accepts every file the core accepts (omitted optional fields included)
    and prints the core's multiply-adds."""
    from earshot.cli import main
    assert main(["info", os.path.join(DIR, name)]) == 0
    out = capsys.readouterr().out
    assert f"madds/sample {EXPECTED[name]['description']['macs_per_sample']}" in out


def test_python_figures_refuse_an_unknown_layer_type():
    with pytest.raises(ValueError, match="unknown layer type 'magic'"):
        figures({"graph": {"layers": [{"type": "magic", "name": "m"}]}})


def test_rate_range_matches_earshot_h():
    """earshot.limits.MIN_RATE / MAX_RATE equal EARSHOT_MIN_RATE / EARSHOT_MAX_RATE of the C ABI header."""
    text = open(os.path.join(ROOT, "dsp", "include", "earshot", "earshot.h")).read()
    found = dict(re.findall(r"#define\s+(EARSHOT_M(?:IN|AX)_RATE)\s+(\d+)", text))
    assert {k: int(v) for k, v in found.items()} == {"EARSHOT_MIN_RATE": limits.MIN_RATE,
                                                     "EARSHOT_MAX_RATE": limits.MAX_RATE}


@pytest.mark.parametrize("name", VALID)
def test_valid_file_loads_with_the_core_description(name):
    want = EXPECTED[name]["description"]
    effect = earshot.load(blob(name))
    assert effect.sample_rate == want["model_rate"]
    assert effect.input_skip == want["input_skip"]
    assert effect.inputs == want["effect"]["graph"]["inputs"]
    assert [c["name"] for c in effect.controls] == [c["name"] for c in want["effect"]["controls"]]
    for got, c in zip(effect.controls, want["effect"]["controls"]):
        # unit and smoothing_ms are optional, default "" and 20 (dsp/FORMAT.md)
        for k, default in (("min", None), ("max", None), ("default", None), ("smoothing_ms", 20), ("unit", "")):
            want_k = c.get(k, default)
            assert got[k] == (pytest.approx(want_k) if k != "unit" else want_k), (name, k)
    layers = dict(zip(effect.layer_names, effect.layers))
    assert list(layers) == [L["name"] for L in want["layers"]]
    for L, obj in zip(want["layers"], want["effect"]["graph"]["layers"]):
        m = layers[L["name"]]
        assert obj["type"] == L["type"]
        assert sum(p.numel() for p in m.parameters()) == L["parameters"], (name, L["name"])
    assert sum(p.numel() for p in effect.parameters()) == want["parameters"]


@pytest.mark.parametrize("case", INVALID, ids=[e["file"] for e in INVALID])
def test_invalid_file_is_refused_naming_the_field(case):
    with pytest.raises(FormatError) as e:
        earshot.load(blob(case["file"]))
    assert case["names"].lower() in str(e.value).lower(), (
        f"{case['file']}: Python says {e.value!s}; the core says {EXPECTED.get(case['file'], {}).get('error')}")


@pytest.mark.parametrize("name", VALID)
def test_reexport_keeps_tensors_and_meaning(name, core, tmp_path):
    original = blob(name)
    effect = earshot.load(original)
    dtype = "f16" if any(v == "F16" for v in effect.weight_dtypes.values()) else "f32"
    out = tmp_path / "re.nfx"
    earshot.export(effect, out, dtype=dtype, credits=effect.credits)
    again = out.read_bytes()
    _, t0 = container.read(original)
    _, t1 = container.read(again)
    assert sorted(t0) == sorted(t1)
    for k in t0:
        assert t0[k][0] == t1[k][0] and np.array_equal(t0[k][1], t1[k][1]), (name, k)
    want = EXPECTED[name]
    info, h = core_run(again, want["description"]["model_rate"])
    info["effect"].pop("credits"), info.pop("title")
    ref = json.loads(json.dumps(want["description"]))
    ref["effect"].pop("credits"), ref.pop("title")
    assert h == want["hash"]
    # The exporter writes every default explicitly; the core's figures and layer list must not change
    # (stream_bytes excepted: it counts the stored description, which is longer with the defaults written).
    for k in ref:
        if k not in ("effect", "stream_bytes"):
            assert info[k] == ref[k], (name, k)
    if any(e["file"] == name and e.get("exporter_form") for e in INDEX["valid"]):
        assert again == original, f"{name}: the exporter no longer writes this file byte for byte"
    # A re-export of the re-export is byte-identical (the exporter's own form is a fixed point).
    out2 = tmp_path / "re2.nfx"
    earshot.export(earshot.load(again), out2, dtype=dtype, credits=effect.credits)
    assert out2.read_bytes() == again


@pytest.mark.parametrize("name", VALID)
def test_pytorch_reference_matches_core(name, core):
    want = EXPECTED[name]
    data = blob(name)
    effect = earshot.load(data)
    x = signal()
    rate = want["description"]["model_rate"]
    y_core = native.render(data, x, rate, block=len(x))
    assert native.render(data, x, rate, block=len(x)).tobytes() == y_core.tobytes()
    assert fnv1a64(y_core) == want["hash"]
    ctl = None
    if effect.controls:
        ctl = earshot.smooth_controls(len(x), rate, [c["default"] for c in effect.controls], [],
                                      [c["smoothing_ms"] for c in effect.controls])[None]
    with torch.no_grad():
        y_ref = effect.eval()(torch.from_numpy(x)[None], ctl)[0].numpy()
    assert np.sum(y_ref.astype(np.float64) ** 2) > 0, f"{name}: reference output is silent"
    e, mx = esr_db(y_ref, y_core), float(np.max(np.abs(y_ref - y_core)))
    assert e <= MODEL["esr"] and mx <= MODEL["max"], f"{name}: ESR {e:.1f} dB, max abs {mx:.2e}"


# --------------------------------------------------------------------------
# The exporter refuses each core limit exceeded by one (dsp/core/model.hpp), naming it.
def _ctl(n):
    return [{"name": f"c{i}", "min": 0, "max": 1, "default": 0} for i in range(n)]


def over_limit_models():
    L = limits
    return {
        "kMaxControls": lambda: earshot.Effect([nn.Linear(L.MAX_CONTROLS + 2, 1)],
                                               inputs=["audio"] + [f"c{i}" for i in range(L.MAX_CONTROLS + 1)],
                                               controls=_ctl(L.MAX_CONTROLS + 1)),
        "kMaxKernel": lambda: nn.Sequential(earshot.CausalConv1d(1, 1, L.MAX_KERNEL + 1)),
        "kMaxDilation": lambda: nn.Sequential(earshot.CausalConv1d(1, 1, 2, L.MAX_DILATION + 1)),
        "kMaxLayers": lambda: nn.Sequential(*[nn.Linear(1, 1) for _ in range(L.MAX_LAYERS + 1)]),
        "kMaxRecurrentLayers": lambda: nn.Sequential(nn.LSTM(1, 1, L.MAX_RECURRENT_LAYERS + 1, batch_first=True)),
        "kMaxWavenetLayers": lambda: nn.Sequential(earshot.WaveNet(1, 1, 1, 1, [1] * (L.MAX_WAVENET_LAYERS + 1))),
        "kMaxFilmHidden": lambda: earshot.Effect([earshot.FiLM(1, 1, [1] * (L.MAX_FILM_HIDDEN + 1))],
                                                 controls=_ctl(1)),
        "kMaxChannels": lambda: nn.Sequential(nn.Linear(1, L.MAX_CHANNELS + 1), nn.Linear(L.MAX_CHANNELS + 1, 1)),
        "kMaxReceptiveField": lambda: nn.Sequential(earshot.CausalConv1d(1, 1, 2, 65536),
                                                    earshot.WaveNet(1, 1, 1, 2, [65536] * 15)),
    }


@pytest.mark.parametrize("limit", list(over_limit_models()))
def test_exporter_refuses_limit_plus_one(limit, tmp_path):
    model = over_limit_models()[limit]()
    with pytest.raises(ExportError, match=limit):
        earshot.export(model, tmp_path / "x.nfx", sample_rate=48000)
    assert not (tmp_path / "x.nfx").exists()


@pytest.mark.parametrize("kwargs,match", [
    ({"sample_rate": 48000.5}, "sample_rate"),   # the core: "must be a whole number of Hz"
    ({"model": nn.Sequential(earshot.Activation(1, "leaky_relu", slope=float("inf")))}, "slope"),
    ({"model": nn.Sequential(nn.Hardtanh(-1.0, float("inf")))}, "max"),
])
def test_exporter_refuses_what_the_core_refuses(kwargs, match, tmp_path):
    """Files the exporter used to write and the core then refused (blessed messages in expected.json)."""
    model = kwargs.pop("model", nn.Sequential(nn.Linear(1, 1)))
    with pytest.raises(ExportError, match=match):
        earshot.export(model, tmp_path / "x.nfx", **dict({"sample_rate": 48000}, **kwargs))
    assert not (tmp_path / "x.nfx").exists()
