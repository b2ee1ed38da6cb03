"""Proves the exporter writes dsp/FORMAT.md exactly, the loader rebuilds the same
model (round trip), and everything the format cannot express is refused with an
error naming the module path and type."""

import json
import math
import os
import struct
import subprocess
import sys

import numpy as np
import pytest
import torch
import torch.nn as nn

import earshot
from earshot.container import FormatError
from earshot.exporter import ExportError

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PY = sys.executable


def parse_safetensors(blob):
    """Independent reader following the safetensors layout as published
    (huggingface.co/docs/safetensors, "Format": u64 LE header size, JSON header,
    byte buffer; offsets relative to the buffer start)."""
    (n,) = struct.unpack("<Q", blob[:8])
    header = json.loads(blob[8:8 + n])
    buf = blob[8 + n:]
    out = {}
    for name, t in header.items():
        if name == "__metadata__":
            continue
        dt = {"F32": "<f4", "F16": "<f2"}[t["dtype"]]
        b, e = t["data_offsets"]
        out[name] = np.frombuffer(buf[b:e], dtype=dt).reshape(t["shape"])
    return n, header, out


def one_of_each(seed=0):
    """Models that between them use every layer type and option of the format."""
    torch.manual_seed(seed)
    ms = {}
    ms["linear"] = earshot.Effect([nn.Linear(2, 3), earshot.Linear(3, 1, bias=False)],
                                  inputs=["drive", "audio"], input_skip=True)
    ms["conv1d"] = earshot.Effect([earshot.CausalConv1d(1, 4, 3, 5), nn.Conv1d(4, 3, 2, dilation=7),
                                   earshot.CausalConv1d(3, 1, 1, bias=False)])
    ms["lstm"] = earshot.Effect([earshot.LSTM(1, 5, 2), nn.LSTM(5, 3, bias=False, batch_first=True),
                                 nn.Linear(3, 1)], input_skip=True)
    ms["gru"] = earshot.Effect([earshot.GRU(2, 7), nn.GRU(7, 4, num_layers=3), nn.Linear(4, 1)],
                               inputs=["audio", "tone"])
    acts = [earshot.Activation(4, f) for f in earshot.ACTIVATIONS] + [
        earshot.Activation(4, "leaky_relu", slope=0.3), earshot.Activation(4, "hardtanh", min=-0.5, max=0.25),
        nn.Tanh(), nn.Sigmoid(), nn.ReLU(), nn.LeakyReLU(0.2), nn.Softsign(), nn.Hardtanh(-2, 3)]
    ms["activation"] = earshot.Effect([nn.Linear(1, 4)] + acts + [nn.Linear(4, 1)])
    ms["gated"] = earshot.Effect([nn.Linear(1, 6), earshot.Gated(6), nn.Linear(3, 1)])
    ms["film"] = earshot.Effect([nn.Linear(1, 3), earshot.FiLM(3, 2, [4, 5], "tanh"), earshot.FiLM(3, 2),
                                 nn.Linear(3, 1)], controls=["a", {"name": "b", "min": -2, "max": 2}])
    ms["wavenet"] = earshot.models.wavenet(5, [1, 3, 6], 2, skip=4, head=[3], controls=["gain"])
    ms["wavenet_nobias"] = earshot.Effect([earshot.WaveNet(1, 3, 2, 3, [2, 5], bias=False), nn.Linear(2, 1)])
    ms["tcn"] = earshot.Effect([
        earshot.TCNBlock(1, 4, 5, 1, film={"hidden": [6]}, n_controls=2),
        earshot.TCNBlock(4, 4, 3, 3, activation={"fn": "hardtanh", "min": -0.5, "max": 0.5}),
        earshot.TCNBlock(4, 3, 2, 7, bias=False, residual=False, activation={"fn": "tanh"},
                         film={"hidden": [], "activation": "relu"}, n_controls=2),
        earshot.TCNBlock(3, 1, 1, 1, activation="sigmoid")], controls=["x", "y"])
    ms["sequential"] = nn.Sequential(nn.Conv1d(1, 3, 3), nn.Tanh(), nn.Dropout(0.1), nn.Linear(3, 1))
    return ms


def run(model, x, c):
    with torch.no_grad():
        if isinstance(model, earshot.Effect):
            return model(x, c if model.controls else None)
        return earshot.Effect(list(model))(x)


@pytest.mark.parametrize("name", list(one_of_each()))
@pytest.mark.parametrize("dtype", ["f32", "f16"])
def test_round_trip(tmp_path, name, dtype):
    model = one_of_each()[name].eval()
    path = tmp_path / f"{name}.nfx"
    desc = earshot.export(model, path, sample_rate=44100, dtype=dtype,
                          credits={"title": name, "authors": ["A", "B"], "licence": "CC0-1.0"})
    blob = path.read_bytes()
    n, header, arrays = parse_safetensors(blob)
    assert n % 8 == 0 and blob[8:8 + n].decode().endswith(("}", " "))
    assert json.loads(header["__metadata__"]["earshot.effect"]) == desc
    # data section contiguous, in the documented order, no overlap
    ends = [0]
    for k, t in header.items():
        if k != "__metadata__":
            assert t["data_offsets"][0] == ends[-1]
            ends.append(t["data_offsets"][1])
    assert ends[-1] == len(blob) - 8 - n
    loaded = earshot.load(path)
    # weights: exact in f32; in f16 the IEEE round-to-nearest value numpy gives
    effect = model if isinstance(model, earshot.Effect) else earshot.Effect(list(model))
    params = {}
    for lname, layer in zip(effect.layer_names, effect.layers):
        for p, v in layer.state_dict().items():
            params[f"{lname}.{p}"] = v.numpy()
    assert set(arrays) == {k for k in params}
    for k, v in params.items():
        want = v.astype(np.float16) if dtype == "f16" else v
        assert np.array_equal(arrays[k], want), k
    for lname, layer in zip(loaded.layer_names, loaded.layers):
        for p, v in layer.state_dict().items():
            assert np.array_equal(v.numpy(), arrays[f"{lname}.{p}"].astype(np.float32))
    assert loaded.sample_rate == 44100 and loaded.credits["authors"] == ["A", "B"]
    # same output (exactly in f32: same modules, same weights)
    torch.manual_seed(1)
    x = torch.randn(2, 300) * 0.5
    c = torch.rand(2, 300, len(loaded.controls))
    y0, y1 = run(model, x, c), run(loaded, x, c)
    if dtype == "f32":
        assert torch.equal(y0, y1)
    else:
        # f16 weights carry ~2^-11 relative error (IEEE 754 binary16, 11-bit significand)
        assert torch.allclose(y0, y1, rtol=0, atol=0.05 * float(y0.abs().max()) + 1e-3)
    # re-export of the loaded model: identical bytes (f32)
    if dtype == "f32":
        earshot.export(loaded, tmp_path / "again.nfx")
        assert (tmp_path / "again.nfx").read_bytes() == blob


def test_worked_example_bytes(tmp_path):
    """The header from dsp/FORMAT.md "Worked example", byte for byte."""
    lin = nn.Linear(1, 1, bias=False)
    with torch.no_grad():
        lin.weight.fill_(0.5)
    earshot.export(earshot.Effect({"g": lin}, input_skip=True), tmp_path / "half.nfx", sample_rate=48000,
                   credits={"title": "half"})
    doc = ('{"__metadata__":{"earshot.effect":"{\\"format\\":\\"earshot-effect\\",\\"version\\":1,'
           '\\"sample_rate\\":48000,\\"controls\\":[],\\"credits\\":{\\"title\\":\\"half\\"},'
           '\\"graph\\":{\\"inputs\\":[\\"audio\\"],\\"layers\\":[{\\"type\\":\\"linear\\",\\"name\\":\\"g\\",'
           '\\"in\\":1,\\"out\\":1,\\"bias\\":false}],\\"input_skip\\":true}}"},'
           '"g.weight":{"dtype":"F32","shape":[1,1],"data_offsets":[0,4]}}').encode()
    doc += b" " * (-len(doc) % 8)
    want = struct.pack("<Q", len(doc)) + doc + bytes([0x00, 0x00, 0x00, 0x3F])
    assert (tmp_path / "half.nfx").read_bytes() == want
    # FORMAT.md: "Its output is y[t] = 0.5·x[t] + x[t] = 1.5·x[t]."
    x = torch.linspace(-1, 1, 11)[None]
    assert torch.equal(earshot.load(tmp_path / "half.nfx")(x), 1.5 * x)


def test_reference_modules_match_torch():
    """The reference layers against torch's own formulation of the same maths."""
    torch.manual_seed(3)
    x = torch.randn(2, 50, 3)
    conv = earshot.CausalConv1d(3, 4, 3, 2)
    # PyTorch Conv1d with padding (k-1)*d on both sides, keeping the first T outputs, is causal
    full = nn.functional.conv1d(x.transpose(1, 2), conv.weight, conv.bias, padding=4, dilation=2)[..., :50]
    assert torch.allclose(conv(x), full.transpose(1, 2), atol=1e-6)
    # causality: changing x at t=30 leaves y[:30] unchanged
    x2 = x.clone()
    x2[:, 30] += 1
    assert torch.equal(conv(x)[:, :30], conv(x2)[:, :30]) and not torch.equal(conv(x)[:, 30], conv(x2)[:, 30])
    # softsign and hardtanh against torch.nn's definitions
    assert torch.allclose(earshot.Activation(3, "softsign")(x), nn.Softsign()(x))
    assert torch.equal(earshot.Activation(3, "hardtanh", min=-0.3, max=0.7)(x), nn.Hardtanh(-0.3, 0.7)(x))
    # gated = tanh(a) * sigmoid(b) (van den Oord et al. 2016, eq. 2)
    g = earshot.Gated(4)(torch.cat([x[..., :2], x[..., 1:]], -1))
    assert torch.allclose(g, torch.tanh(x[..., :2]) * torch.sigmoid(x[..., 1:]))
    # nn.LSTM with batch_first=False in an Effect gives the same as batch_first=True
    a, b = nn.LSTM(1, 4), nn.LSTM(1, 4, batch_first=True)
    b.load_state_dict(a.state_dict())
    xa = torch.randn(3, 40)
    ea, eb = earshot.Effect([a, nn.Linear(4, 1)]), earshot.Effect([b, nn.Linear(4, 1)])
    eb.layers[1].load_state_dict(ea.layers[1].state_dict())
    assert torch.allclose(ea(xa), eb(xa))
    # state carried across calls equals one long call (truncated backpropagation use)
    m = earshot.models.recurrent("gru", 6)
    whole = m(xa)
    y1, st = m(xa[:, :17], return_state=True)
    y2, _ = m(xa[:, 17:], state=st, return_state=True)
    assert torch.allclose(torch.cat([y1, y2], 1), whole, atol=1e-6)


def plain_loop_smoother(n, rate, initial, events, ms):
    """The ramp as worded in dsp/FORMAT.md, "Control smoothing", one sample at a time (float32)."""
    f = np.float32
    steps = int(math.floor(ms / 1000 * rate + 0.5))
    cur, target, inc, left = f(initial), f(initial), f(0), 0
    out = []
    for t in range(n):
        for p, _, v in events:
            if p == t:
                target = f(v)
                if steps == 0:
                    cur, left = target, 0
                else:
                    inc, left = f(f(target - cur) / f(steps)), steps
        if left > 0:
            left -= 1
            cur = target if left == 0 else f(cur + inc)
        out.append(cur)
    return np.array(out, dtype=np.float32)


@pytest.mark.parametrize("ms,rate", [(20, 48000), (0, 48000), (1.01, 44100), (7, 8000)])
def test_smooth_controls(ms, rate):
    events = [(5, 0, 1.0), (40, 0, -0.3), (41, 0, 0.7), (300, 0, 0.7), (303, 0, 0.1)]
    got = earshot.smooth_controls(1500, rate, [0.25], events, ms)[:, 0].numpy()
    want = plain_loop_smoother(1500, rate, 0.25, events, ms)
    assert np.array_equal(got, want)
    if earshot.ramp_steps(ms, rate) > 0:
        assert got[4] == np.float32(0.25) and got[5] != got[4]
    last, steps = max(p for p, _, _ in events), earshot.ramp_steps(ms, rate)
    assert got[last + max(steps, 1) - 1] == np.float32(0.1) and np.all(got[last + steps:] == np.float32(0.1))
    if steps > 1:
        assert got[last + steps - 2] != np.float32(0.1)


# --- refusals: every message names the module path and its type ------------------------------

def refuse(model, match, **kw):
    kw.setdefault("sample_rate", 48000)
    with pytest.raises(ExportError, match=match):
        earshot.exporter.build(model, **kw)


@pytest.mark.parametrize("model,match", [
    (lambda: [nn.LSTM(1, 4, bidirectional=True, batch_first=True), nn.Linear(8, 1)],
     r"layers\.0 \(torch\.nn\.modules\.rnn\.LSTM\): a bidirectional LSTM"),
    (lambda: [nn.GRU(1, 4, bidirectional=True), nn.Linear(8, 1)], r"layers\.0 .*GRU\): a bidirectional GRU"),
    (lambda: [nn.LSTM(1, 4, proj_size=2), nn.Linear(2, 1)], r"layers\.0 .*LSTM\): proj_size=2"),
    (lambda: [nn.LSTM(1, 4, num_layers=9), nn.Linear(4, 1)], r"num_layers=9 is outside 1 \.\. 8"),
    (lambda: [nn.RNN(1, 4), nn.Linear(4, 1)], r"layers\.0 .*RNN\): only LSTM and GRU"),
    (lambda: [nn.Conv1d(1, 1, 3, padding=1)], r"layers\.0 .*Conv1d\): padding \(1,\) is not causal"),
    (lambda: [nn.Conv1d(1, 1, 3, padding="same")], r"padding same is not causal"),
    (lambda: [nn.Conv1d(1, 1, 3, stride=2)], r"layers\.0 .*Conv1d\): stride 2"),
    (lambda: [nn.Conv1d(2, 2, 3, groups=2), nn.Linear(2, 1)], r"groups=2"),
    (lambda: [nn.Linear(1, 3), nn.GELU(), nn.Linear(3, 1)], r"layers\.1 \(torch\.nn\.modules\.activation\.GELU\)"),
    (lambda: [nn.Linear(1, 3), nn.ELU(), nn.Linear(3, 1)], r"layers\.1 .*ELU\): this module type"),
    (lambda: [nn.Linear(1, 3), nn.ReLU6(), nn.Linear(3, 1)], r"layers\.1 .*ReLU6\)"),
    (lambda: [nn.Conv2d(1, 1, 1)], r"layers\.0 .*Conv2d\)"),
    (lambda: [nn.Linear(2, 1)], r"layers\.0 .*Linear\): takes 2 channels but receives 1"),
    (lambda: [nn.Linear(1, 2)], r"last layer \(layers\.0\) gives 2 channels"),
    (lambda: [nn.Sequential(nn.Linear(1, 3), nn.Sequential(nn.Tanh(), nn.GELU())), nn.Linear(3, 1)],
     r"layers\.0\.1\.1 .*GELU"),
    (lambda: [nn.Linear(1, 4), earshot.FiLM(4, 1), nn.Linear(4, 1)], r"FiLM needs at least one control"),
    (lambda: earshot.Effect([nn.Linear(1, 4), earshot.FiLM(4, 2), nn.Linear(4, 1)], controls=["c"]),
     r"layers\.1 .*FiLM\): FiLM takes 2 controls, the effect declares 1"),
])
def test_refusals(model, match):
    m = model()
    refuse(m if isinstance(m, nn.Module) else nn.Sequential(*m), match)


def test_refusals_of_values_and_metadata():
    good = lambda: earshot.Effect([nn.Linear(1, 1)])  # noqa: E731
    m = good()
    with torch.no_grad():
        m.layers[0].weight[0, 0] = float("nan")
    refuse(m, r"layers\.0: tensor l0_linear\.weight holds a non-finite value")
    m = good()
    with torch.no_grad():
        m.layers[0].weight[0, 0] = 1e6
    refuse(m, r"l0_linear\.weight overflows float16", dtype="f16")
    refuse(good(), r"dtype must be 'f32' or 'f16'", dtype="bf16")
    refuse(good(), r"sample_rate is required", sample_rate=None)
    refuse(good(), r"sample_rate 500 is outside", sample_rate=500)
    refuse(good(), r"credits: unknown field\(s\) \['license'\]", credits={"title": "x", "license": "MIT"})
    refuse(earshot.Effect([nn.Linear(2, 1)], inputs=["audio", "d"]), r"controls \['e'\] do not match",
           controls=["e"])
    refuse(earshot.Effect([nn.Linear(18, 1)], inputs=["audio"] + [f"c{i}" for i in range(17)]),
           r"17 controls, at most 16")
    refuse(earshot.Effect({"bad name": nn.Linear(1, 1)}), r"layer name 'bad name'")

    class MyLinear(nn.Linear):
        def forward(self, x):
            return super().forward(x) * 2
    refuse(nn.Sequential(MyLinear(1, 1)), r"layers\.0 \(.*MyLinear\): a subclass of nn\.Linear")
    with pytest.raises(ValueError, match=r"control name 'a b'"):
        earshot.Effect([nn.Linear(1, 1)], controls=["a b"])
    with pytest.raises(ValueError, match=r"control 'd': default 3\.0 outside"):
        earshot.control_spec({"name": "d", "default": 3})
    with pytest.raises(ValueError, match=r"control 'd': min \(1\.0\) must be below max"):
        earshot.control_spec({"name": "d", "min": 1, "max": 1})
    with pytest.raises(ValueError, match=r"inputs must contain 'audio' exactly once"):
        earshot.Effect([nn.Linear(1, 1)], inputs=["gain"])
    with pytest.raises(ValueError, match=r"unsupported activation 'gelu'"):
        earshot.Activation(3, "gelu")


# --- loader refusals on damaged files ----------------------------------------------------------

def _file(tmp_path):
    torch.manual_seed(0)
    p = tmp_path / "m.nfx"
    earshot.export(earshot.models.recurrent("lstm", 3), p, sample_rate=48000)
    return p.read_bytes()


def _rewrite(blob, edit_header=None, edit_desc=None, data=None):
    (n,) = struct.unpack("<Q", blob[:8])
    header = json.loads(blob[8:8 + n])
    if edit_desc:
        d = json.loads(header["__metadata__"]["earshot.effect"])
        edit_desc(d)
        header["__metadata__"]["earshot.effect"] = json.dumps(d)
    if edit_header:
        edit_header(header)
    text = json.dumps(header).encode()
    return struct.pack("<Q", len(text)) + text + (blob[8 + n:] if data is None else data)


@pytest.mark.parametrize("damage,match", [
    (lambda b: b[:5], r"truncated \(5 bytes; the 8-byte header length is missing\)"),
    (lambda b: struct.pack("<Q", 10 ** 9) + b[8:], r"header length 1000000000"),
    (lambda b: b[:8] + b"[" + b[9:], r"effect file header: invalid JSON"),
    (lambda b: _rewrite(b, edit_header=lambda h: h.pop("rnn.bias_hh_l0")), r"tensor 'rnn\.bias_hh_l0' is missing"),
    (lambda b: _rewrite(b, edit_header=lambda h: h.update(extra=h["head.bias"])),
     r"tensor '(extra|head\.bias)': data overlaps tensor '(extra|head\.bias)'"),
    (lambda b: _rewrite(b, edit_header=lambda h: h["head.weight"].update(dtype="F64")), r"dtype 'F64'"),
    (lambda b: _rewrite(b, edit_header=lambda h: h["head.weight"].update(shape=[1, 4])), r"needs 16 bytes"),
    (lambda b: _rewrite(b, edit_header=lambda h: h["head.weight"].update(data_offsets=[0, 10 ** 8])),
     r"outside the .*-byte data section"),
    (lambda b: _rewrite(b, edit_header=lambda h: h.pop("__metadata__")), r"no '__metadata__'"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d.update(version=2)), r"version 2 is too new"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d.update(sample_rate=1000)), r"sample_rate 1000"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d["graph"]["layers"][1].update(type="dense")),
     r"layer 'head': unknown type 'dense'"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d["graph"]["layers"][1].update({"in": 4})),
     r"layer 'head': field 'in' is 4 but the previous stage gives 3 channels"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d["graph"]["layers"][1].update(out=2)),
     r"tensor 'head\.weight': shape \[1, 3\], the graph needs \[2, 3\]|gives 2 channels"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d["credits"].pop("title")), r"credits\.title is required"),
    (lambda b: _rewrite(b, edit_desc=lambda d: d["graph"].update(inputs=["drive"])), r"'audio' once"),
])
def test_loader_refusals(tmp_path, damage, match):
    blob = damage(_file(tmp_path))
    with pytest.raises(FormatError, match=match):
        earshot.load(blob)


def test_loader_rejects_nonfinite_f16(tmp_path):
    blob = _file(tmp_path)
    (n,) = struct.unpack("<Q", blob[:8])
    header = json.loads(blob[8:8 + n])
    # rewrite head.weight ([1, 3]) as F16 holding an infinity (0x7c00, IEEE 754 binary16 +inf)
    header["head.weight"] = {"dtype": "F16", "shape": [1, 3], "data_offsets": [0, 6]}
    header = {k: v for k, v in header.items() if k in ("__metadata__", "head.weight")}
    text = json.dumps(header).encode()
    bad = struct.pack("<Q", len(text)) + text + struct.pack("<3H", 0x3C00, 0x7C00, 0)
    with pytest.raises(FormatError, match=r"tensor 'head\.weight': holds a non-finite value"):
        earshot.load(bad)


# --- command line -------------------------------------------------------------------------------

def test_command_line(tmp_path):
    env = dict(os.environ, PYTHONPATH=os.path.join(ROOT, "python"))
    torch.manual_seed(0)
    m = earshot.models.tcn([{"name": "drive"}, {"name": "tone"}], 4, 3, [1, 2], film_hidden=[4])
    torch.save(m, tmp_path / "m.pt")
    out = tmp_path / "m.nfx"
    r = subprocess.run([PY, "-m", "earshot.export", str(tmp_path / "m.pt"), str(out), "--sample-rate", "44100",
                        "--control", "name=drive,min=0,max=10,default=5,unit=dB",
                        "--control", "tone", "--title", "T", "--author", "A", "--dtype", "f16"],
                       env=env, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    loaded = earshot.load(out)
    assert loaded.controls[0] == {"name": "drive", "unit": "dB", "min": 0.0, "max": 10.0, "default": 5.0,
                                  "smoothing_ms": 20.0}
    assert set(loaded.weight_dtypes.values()) == {"F16"}
    r = subprocess.run([PY, "-m", "earshot", "info", str(out)], env=env, capture_output=True, text=True)
    assert r.returncode == 0 and "receptive    7" in r.stdout  # 1 + (3-1)*1 + (3-1)*2 (FORMAT.md)
    r = subprocess.run([PY, "-m", "earshot", "export", str(tmp_path / "m.pt"), str(out), "--sample-rate", "1"],
                       env=env, capture_output=True, text=True)
    assert r.returncode == 1 and "sample_rate 1 is outside 8000 .. 384000" in r.stderr
