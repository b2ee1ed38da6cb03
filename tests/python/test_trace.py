"""Proves a researcher's own nn.Module exports as written (earshot/trace.py):
each model style below is traced, exported, run by the native core (C ABI,
ctypes) on 1 s of programme audio at 48 kHz with its controls moving where
the forward takes them per sample, and compared with the module's own
forward in float32: ESR <= -100 dB and max abs <= 1e-5 (the project's
per-layer tolerance; ESR after Wright et al. 2019, eq. 3, no pre-emphasis).
The refusals name the traced operation and the source line it came from.
"""

import os
import subprocess
import sys

import numpy as np
import pytest
import torch
import torch.nn as nn
import torch.nn.functional as F

import earshot
import earshot.exporter
from earshot import native
from earshot.layer_types import ExportError
from earshot.modules import smooth_controls
from earshot.signals import programme
from conftest import add_report_row

torch.set_num_threads(1)
RATE = 48000
HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))


def esr_db(ref, out):
    num, den = np.sum((ref - out) ** 2), np.sum(ref ** 2)
    return -np.inf if num == 0 else float(10 * np.log10(num / den))


def report(case, n, e, m):
    """A row of the parity report printed at the end of the session (conftest.py): core vs the
    researcher's own forward in float32."""
    add_report_row({"case": case[:58], "variant": "-", "file": "F32",
                    "n": n, "esr32": e, "max32": m, "esr64": np.nan, "esr_ref": np.nan, "max_ref": np.nan,
                    "target": "ESR<=-100,max<=1e-05", "ok": e <= -100 and m <= 1e-5})


def compare(tmp_path, model, call, controls=(), events=(), name="style"):
    """Exports `model`, renders with the core, and holds it to the module's own forward.
    call(model, x [1, T] float32, ctl [1, T, n] float32) -> output with T values."""
    torch.manual_seed(0)
    path = tmp_path / "fx.nfx"
    earshot.export(model, path, sample_rate=RATE, controls=list(controls) or None)
    x = programme(1.0, RATE)
    n = len(x)
    specs = [earshot.control_spec(c) for c in controls]
    ctl = smooth_controls(n, RATE, [c["default"] for c in specs], events,
                          [c["smoothing_ms"] for c in specs])[None] if specs else None
    y_core = native.render(path.read_bytes(), x, RATE, events).astype(np.float64)
    with torch.no_grad():
        y_ref = call(model.eval(), torch.from_numpy(np.asarray(x, np.float32))[None], ctl)
    y_ref = y_ref.reshape(-1).double().numpy()
    e, m = esr_db(y_ref, y_core), float(np.max(np.abs(y_ref - y_core)))
    print(f"\n{name}: ESR {e:.1f} dB, max abs {m:.2e} ({n} samples, {len(events)} control changes)")
    report(f"own module {name}", n, e, m)
    assert np.sum(y_ref ** 2) > 1e-6 * n, "the model's output is nearly silent"
    assert e <= -100 and m <= 1e-5, f"{name}: ESR {e:.1f} dB, max abs {m:.2e}"
    return earshot.load(path)


# ---- the styles ---------------------------------------------------------------------------------

class SeqFirstLSTM(nn.Module):
    """(1) nn.LSTM sequence-first, audio [B, 1, T], permutes in and out."""

    def __init__(self):
        super().__init__()
        self.rnn = nn.LSTM(1, 12)
        self.head = nn.Linear(12, 1)

    def forward(self, x):
        h, _ = self.rnn(x.permute(2, 0, 1))
        return self.head(h).permute(1, 2, 0)


class Body(nn.Module):
    def __init__(self):
        super().__init__()
        self.rnn = nn.GRU(2, 10, batch_first=True)
        self.out = nn.Linear(10, 1)


class GruResidual(nn.Module):
    """(2) GRU + Linear + residual, one control [B, T] concatenated to the audio."""

    def __init__(self):
        super().__init__()
        self.body = Body()

    def forward(self, x, drive):
        inp = torch.cat([x.unsqueeze(-1), drive.unsqueeze(-1)], dim=-1)
        h, _ = self.body.rnn(inp)
        return self.body.out(h).squeeze(-1) + x


class ConvStack(nn.Module):
    """(5) a conv stack in [B, C, T] layout written as nn.Sequential with causal pads."""

    def __init__(self):
        super().__init__()
        self.net = nn.Sequential(
            nn.ConstantPad1d((2, 0), 0.0), nn.Conv1d(1, 6, 3), nn.Tanh(),
            nn.ConstantPad1d((8, 0), 0.0), nn.Conv1d(6, 6, 3, dilation=4), nn.LeakyReLU(0.1),
            nn.Conv1d(6, 1, 1))

    def forward(self, x):
        return self.net(x)


class PaddedConvs(nn.Module):
    """Convolutions padded by F.pad and by a padding attribute trimmed on the right,
    functional activations and a gated unit written with chunk."""

    def __init__(self):
        super().__init__()
        self.conv_in = nn.Conv1d(1, 8, 2, dilation=3)
        self.gate_conv = nn.Conv1d(8, 8, 3, padding=4, dilation=2)
        self.mix = nn.Conv1d(4, 1, 1)

    def forward(self, x):
        h = torch.tanh(self.conv_in(F.pad(x.unsqueeze(1), (3, 0))))
        z = self.gate_conv(h)[..., :-4]
        a, b = z.chunk(2, dim=1)
        g = torch.tanh(a) * torch.sigmoid(b)
        return self.mix(g).squeeze(1)


class ParamsVector(nn.Module):
    """(6) forward(x, params), params [B, 2] broadcast over time and concatenated."""

    def __init__(self):
        super().__init__()
        self.lstm = nn.LSTM(3, 9, batch_first=True)
        self.dense = nn.Linear(9, 1)

    def forward(self, x, params):
        p = params.unsqueeze(1).expand(-1, x.shape[1], -1)
        h, _ = self.lstm(torch.cat([x.unsqueeze(-1), p], dim=-1))
        return self.dense(h)


class TwoArgs(nn.Module):
    """(7) two controls passed as separate arguments, each [B, 1]."""

    def __init__(self):
        super().__init__()
        self.rnn = nn.GRU(3, 8, batch_first=True)
        self.act = nn.Softsign()
        self.out = nn.Linear(8, 1)

    def forward(self, x, gain, tone):
        t = x.shape[1]
        c = torch.cat([x.unsqueeze(-1), gain.unsqueeze(1).expand(-1, t, -1), tone.unsqueeze(1).expand(-1, t, -1)], -1)
        h, _ = self.rnn(c)
        return self.out(self.act(h)).squeeze(-1)


MOVING = [(12000, 0, 0.9), (30000, 0, 0.2)]


def test_style_1_sequence_first_lstm(core, tmp_path):
    torch.manual_seed(1)
    m = SeqFirstLSTM()
    fx = compare(tmp_path, m, lambda m, x, c: m(x[:, None, :]), name="(1) seq-first LSTM, permutes")
    assert fx.layer_names == ["rnn", "head"]


def test_style_2_gru_residual_with_control(core, tmp_path):
    torch.manual_seed(2)
    m = GruResidual()
    ctl = [{"name": "drive", "min": 0, "max": 1, "default": 0.4, "smoothing_ms": 10}]
    fx = compare(tmp_path, m, lambda m, x, c: m(x, c[..., 0]), ctl, MOVING, name="(2) GRU + Linear + residual")
    assert fx.layer_names == ["body.rnn", "body.out"] and fx.input_skip and fx.inputs == ["audio", "drive"]


def test_style_5_conv_stack_sequential(core, tmp_path):
    torch.manual_seed(5)
    fx = compare(tmp_path, ConvStack(), lambda m, x, c: m(x[:, None, :]), name="(5) conv stack, nn.Sequential")
    assert [type(l).__name__ for l in fx.layers] == ["CausalConv1d", "Activation", "CausalConv1d", "Activation",
                                                     "CausalConv1d"]


def test_padded_convolutions_and_gated_unit(core, tmp_path):
    torch.manual_seed(3)
    fx = compare(tmp_path, PaddedConvs(), lambda m, x, c: m(x), name="F.pad, padding + trim, chunk gate")
    assert [type(l).__name__ for l in fx.layers] == ["CausalConv1d", "Activation", "CausalConv1d", "Gated",
                                                     "CausalConv1d"]


def test_style_6_params_vector(core, tmp_path):
    torch.manual_seed(6)
    ctl = [{"name": "gain", "default": 0.7}, {"name": "tone", "min": -1, "max": 1, "default": -0.3}]
    # [B, n] controls are one value per call: held at non-default-looking values, not moved.
    compare(tmp_path, ParamsVector(), lambda m, x, c: m(x, c[:, 0, :]), ctl, name="(6) forward(x, params [B, 2])")


def test_style_7_separate_control_arguments(core, tmp_path):
    torch.manual_seed(7)
    ctl = [{"name": "gain", "default": 0.25}, {"name": "tone", "default": 0.8}]
    compare(tmp_path, TwoArgs(), lambda m, x, c: m(x, c[:, 0, :1], c[:, 0, 1:]), ctl,
            name="(7) forward(x, gain, tone)")


STYLE8 = '''
import torch, torch.nn as nn

class Saved(nn.Module):
    def __init__(self):
        super().__init__()
        self.encoder = nn.Linear(2, 6)
        self.rnn = nn.LSTM(6, 11, batch_first=True)
        self.decoder = nn.Linear(11, 1)

    def forward(self, x, knob):
        k = knob.unsqueeze(1).expand(-1, x.shape[1], -1)
        h, _ = self.rnn(torch.tanh(self.encoder(torch.cat([x, k], dim=-1))))
        return self.decoder(h) + x
'''


def test_style_8_saved_model_through_the_cli(core, tmp_path):
    (tmp_path / "researcher_models.py").write_text(STYLE8)
    sys.path.insert(0, str(tmp_path))
    try:
        import researcher_models
        torch.manual_seed(8)
        torch.save(researcher_models.Saved(), tmp_path / "my_model.pt")
        env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(tmp_path), os.path.join(ROOT, "python")]))
        r = subprocess.run([sys.executable, "-m", "earshot", "export", str(tmp_path / "my_model.pt"),
                            str(tmp_path / "fx.nfx"), "--sample-rate", "48000",
                            "--control", "name=knob,min=0,max=1,default=0.6"],
                           capture_output=True, text=True, env=env, timeout=300)
        assert r.returncode == 0, r.stderr
        assert "wrote" in r.stdout
        m = torch.load(tmp_path / "my_model.pt")
        x = programme(1.0, RATE)
        y_core = native.render((tmp_path / "fx.nfx").read_bytes(), x, RATE).astype(np.float64)
        with torch.no_grad():
            y_ref = m(torch.from_numpy(np.asarray(x, np.float32))[None, :, None],
                      torch.tensor([[0.6]])).reshape(-1).double().numpy()
        e, mx = esr_db(y_ref, y_core), float(np.max(np.abs(y_ref - y_core)))
        print(f"\n(8) torch.save + python3 -m earshot export: ESR {e:.1f} dB, max abs {mx:.2e}")
        report("own module (8) torch.save + python3 -m earshot export", len(x), e, mx)
        assert e <= -100 and mx <= 1e-5
    finally:
        sys.path.remove(str(tmp_path))
        sys.modules.pop("researcher_models", None)


# ---- refusals -----------------------------------------------------------------------------------

class Bidirectional(nn.Module):
    def __init__(self):
        super().__init__()
        self.rnn = nn.GRU(1, 4, batch_first=True, bidirectional=True)
        self.out = nn.Linear(8, 1)

    def forward(self, x):
        h, _ = self.rnn(x)
        return self.out(h)


class LookAhead(nn.Module):
    def __init__(self):
        super().__init__()
        self.conv = nn.Conv1d(1, 1, 3, padding=1)

    def forward(self, x):
        return self.conv(x)


class Strided(nn.Module):
    def __init__(self):
        super().__init__()
        self.conv = nn.Conv1d(1, 1, 2, stride=2)

    def forward(self, x):
        return self.conv(F.pad(x, (1, 0)))


class Normalised(nn.Module):
    def __init__(self):
        super().__init__()
        self.conv = nn.Conv1d(1, 4, 1)
        self.norm = nn.BatchNorm1d(4)
        self.out = nn.Conv1d(4, 1, 1)

    def forward(self, x):
        return self.out(self.norm(self.conv(x)))


class Gelu(nn.Module):
    def __init__(self):
        super().__init__()
        self.a = nn.Linear(1, 4)
        self.b = nn.Linear(4, 1)

    def forward(self, x):
        return self.b(F.gelu(self.a(x)))


@pytest.mark.parametrize("model,needle", [
    (Bidirectional(), "bidirectional"),
    (LookAhead(), "looks ahead"),
    (Strided(), "stride 2"),
    (Normalised(), "batch normalisation"),
    (Gelu(), "gelu"),
], ids=["bidirectional", "look-ahead padding", "stride", "batch norm", "unsupported activation"])
def test_refusals_name_the_operation_and_line(tmp_path, model, needle):
    if isinstance(model, Normalised):
        model.train()  # the exporter must not change the mode the researcher left it in ...
    with pytest.raises(ExportError) as e:
        earshot.export(model, tmp_path / "fx.nfx", sample_rate=RATE)
    msg = str(e.value)
    print(f"\n{msg}")
    assert needle in msg
    assert "test_trace.py:" in msg, "the message names the source line"
    assert not (tmp_path / "fx.nfx").exists()
    if isinstance(model, Normalised):
        assert model.training and model.norm.training  # ... and leaves it as it was


def test_a_model_that_cannot_be_called_says_what_was_tried(tmp_path):
    class NeedsThree(nn.Module):
        def __init__(self):
            super().__init__()
            self.l = nn.Linear(3, 1)

        def forward(self, x):
            return self.l(x)

    with pytest.raises(ExportError, match=r"calling convention tried:\n  audio \[B, T\]"):
        earshot.export(NeedsThree(), tmp_path / "fx.nfx", sample_rate=RATE)


# ---- verify --model with the researcher's own forward -------------------------------------------

def _verify(tmp_path, *args):
    """python3 -m earshot verify ARGS --seconds 0.5, with this folder importable (the
    pickled models' classes live in this file)."""
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([HERE, str(tmp_path), os.path.join(ROOT, "python")]),
               EARSHOT_LIB=native.library_path())
    return subprocess.run([sys.executable, "-m", "earshot", "verify", *map(str, args), "--seconds", "0.5"],
                          capture_output=True, text=True, env=env, timeout=300)


def test_verify_takes_the_researchers_forward(core, tmp_path):
    torch.manual_seed(1)
    m = SeqFirstLSTM()
    earshot.export(m, tmp_path / "fx.nfx", sample_rate=RATE)
    torch.save(m, tmp_path / "m.pt")
    r = _verify(tmp_path, tmp_path / "fx.nfx", "--model", tmp_path / "m.pt")  # unpickling needs HERE
    print(r.stdout)
    assert r.returncode == 0, r.stdout + r.stderr
    assert "your model: audio [B, 1, T], controls none" in r.stdout
    assert "core vs your model, float32" in r.stdout and "PASS" in r.stdout


def test_verify_model_that_cannot_be_called_is_not_a_fail(core, tmp_path):
    torch.manual_seed(1)
    earshot.export(SeqFirstLSTM(), tmp_path / "fx.nfx", sample_rate=RATE)
    torch.save(nn.Linear(3, 1), tmp_path / "bad.pt")
    r = _verify(tmp_path, tmp_path / "fx.nfx", "--model", tmp_path / "bad.pt")
    print(r.stderr)
    assert r.returncode == 3, r.stdout + r.stderr
    assert "calling convention tried" in r.stderr and "audio [B, 1, T]" in r.stderr
    assert "PASS" not in r.stdout and "FAIL" not in r.stdout


def test_verify_f16_file_row_of_the_model_is_informative(core, tmp_path):
    torch.manual_seed(2)
    m = GruResidual()
    with torch.no_grad():
        for p in m.parameters():
            p.mul_(3.0)  # large weights: F16 storage costs more than the limits allow
    earshot.export(m, tmp_path / "fx.nfx", sample_rate=RATE, dtype="f16",
                   controls=[{"name": "drive", "default": 0.4}])
    torch.save(m, tmp_path / "m.pt")
    r = _verify(tmp_path, tmp_path / "fx.nfx", "--model", tmp_path / "m.pt")
    print(r.stdout)
    line = [l for l in r.stdout.splitlines() if "your model, float32" in l][0]
    assert "informative" in line and "F16" in line
    assert r.returncode == 0 and "PASS" in r.stdout, r.stdout + r.stderr


class HandWaveNet(nn.Module):
    """(3) a WaveNet-style stack written with nn.ModuleList, F.pad and gated units by chunk:
    h0 = 1x1 conv; per level z = conv(pad(h)), g = tanh * sigmoid of its halves,
    h = h + res(g), skips summed; a 1x1 head after a ReLU."""

    def __init__(self, channels=6, skip=5, kernel=3, dilations=(1, 2, 4, 8)):
        super().__init__()
        self.kernel, self.dilations = kernel, list(dilations)
        self.inp = nn.Conv1d(1, channels, 1)
        self.convs = nn.ModuleList(nn.Conv1d(channels, 2 * channels, kernel, dilation=d) for d in dilations)
        self.res = nn.ModuleList(nn.Conv1d(channels, channels, 1) for _ in dilations[:-1])
        self.skips = nn.ModuleList(nn.Conv1d(channels, skip, 1) for _ in dilations)
        self.head = nn.Conv1d(skip, 1, 1)

    def forward(self, x):
        h = self.inp(x.unsqueeze(1))
        out = 0
        for i, d in enumerate(self.dilations):
            a, b = self.convs[i](F.pad(h, ((self.kernel - 1) * d, 0))).chunk(2, dim=1)
            g = torch.tanh(a) * torch.sigmoid(b)
            out = out + self.skips[i](g)
            if i < len(self.res):
                h = h + self.res[i](g)
        return self.head(torch.relu(out)).squeeze(1)


def test_style_3_wavenet_written_out(core, tmp_path):
    torch.manual_seed(3)
    fx = compare(tmp_path, HandWaveNet(), lambda m, x, c: m(x), name="(3) WaveNet stack, ModuleList + chunk gates")
    assert [type(l).__name__ for l in fx.layers] == ["WaveNet", "Activation", "CausalConv1d"]
    assert fx.layers[0].dilations == [1, 2, 4, 8]


class FilmBlock(nn.Module):
    def __init__(self, cin, cout, kernel, dilation, n_params):
        super().__init__()
        self.pad = (kernel - 1) * dilation
        self.conv = nn.Conv1d(cin, cout, kernel, dilation=dilation)
        self.gamma = nn.Linear(n_params, cout)
        self.beta = nn.Linear(n_params, cout)
        self.act = nn.LeakyReLU(0.2)
        self.res = nn.Conv1d(cin, cout, 1, bias=False) if cin != cout else None

    def forward(self, x, p):
        y = self.conv(F.pad(x, (self.pad, 0)))
        y = self.act(self.gamma(p).unsqueeze(-1) * y + self.beta(p).unsqueeze(-1))
        return y + (x if self.res is None else self.res(x))


class FilmTCN(nn.Module):
    """(4) a TCN whose blocks take FiLM written as separate nn.Linear layers producing gamma and beta."""

    def __init__(self):
        super().__init__()
        self.blocks = nn.ModuleList([FilmBlock(1, 6, 5, 1, 2), FilmBlock(6, 6, 3, 4, 2), FilmBlock(6, 6, 3, 16, 2)])
        self.out = nn.Conv1d(6, 1, 1)

    def forward(self, x, params):
        h = x.unsqueeze(1)
        for b in self.blocks:
            h = b(h, params)
        return self.out(h).squeeze(1)


def test_style_4_tcn_with_film_written_out(core, tmp_path):
    torch.manual_seed(4)
    ctl = [{"name": "attack", "default": 0.3}, {"name": "ratio", "min": 1, "max": 10, "default": 4}]
    fx = compare(tmp_path, FilmTCN(), lambda m, x, c: m(x, c[:, 0, :]), ctl, name="(4) TCN, FiLM by nn.Linear")
    assert [type(l).__name__ for l in fx.layers] == ["TCNBlock", "TCNBlock", "TCNBlock", "CausalConv1d"]
    assert fx.layer_names[:3] == ["blocks.0", "blocks.1", "blocks.2"]
