"""PyTorch reference modules for every layer of the earshot effect format.

Each module computes exactly what the native core computes for the layer of the
same name in dsp/FORMAT.md, and its parameter names and shapes are the tensor
names and shapes of the effect file, so `Effect.state_dict()` and the file agree.

Convention: every earshot module takes and returns channels-last tensors
[batch, time, channels]. `Effect` is the top-level model: audio [batch, time]
(+ controls [batch, time, n_controls]) -> audio [batch, time].
"""

import math
import re
import numpy as np
import torch
import torch.nn as nn
import torch.nn.functional as F

ACTIVATIONS = ("identity", "tanh", "sigmoid", "relu", "leaky_relu", "softsign", "hardtanh")


def apply_activation(x, fn, slope=0.01, lo=-1.0, hi=1.0):
    """Element-wise activation by its effect-file name."""
    if fn == "identity":
        return x
    if fn == "tanh":
        return torch.tanh(x)
    if fn == "sigmoid":
        return torch.sigmoid(x)
    if fn == "relu":
        return torch.relu(x)
    if fn == "leaky_relu":
        return F.leaky_relu(x, slope)
    if fn == "softsign":
        return x / (1 + x.abs())
    if fn == "hardtanh":
        return torch.clamp(x, lo, hi)
    raise ValueError(f"unsupported activation {fn!r}; earshot knows {', '.join(ACTIVATIONS)}")


# --------------------------------------------------------------------------
# Single layers
# --------------------------------------------------------------------------

class Linear(nn.Linear):
    """`linear`: y = W x + b per sample. weight [out, in], bias [out]. Same as nn.Linear."""


class CausalConv1d(nn.Conv1d):
    """`conv1d`: causal dilated convolution, channels-last.

    y[t] = b + sum_k W[:, :, k] x[t - (kernel-1-k)*dilation]: an nn.Conv1d with
    (kernel-1)*dilation zeros padded on the left. weight [out, in, kernel].
    Input and output [batch, time, channels].
    """

    def __init__(self, in_channels, out_channels, kernel_size=1, dilation=1, bias=True):
        super().__init__(in_channels, out_channels, kernel_size, dilation=dilation, bias=bias)

    @property
    def left_pad(self):
        return (self.kernel_size[0] - 1) * self.dilation[0]

    def forward(self, x):
        x = F.pad(x.transpose(1, 2), (self.left_pad, 0))
        return F.conv1d(x, self.weight, self.bias, dilation=self.dilation).transpose(1, 2)


class LSTM(nn.LSTM):
    """`lstm`: nn.LSTM with batch_first=True whose forward returns the output only.

    forward(x [B, T, in], state=None, return_state=False) -> [B, T, hidden]
    (and the (h, c) state when return_state, for truncated backpropagation).
    """

    def __init__(self, input_size, hidden_size, num_layers=1, bias=True):
        super().__init__(input_size, hidden_size, num_layers=num_layers, bias=bias, batch_first=True)

    def forward(self, x, state=None, return_state=False):
        y, state = super().forward(x, state)
        return (y, state) if return_state else y


class GRU(nn.GRU):
    """`gru`: nn.GRU with batch_first=True whose forward returns the output only."""

    def __init__(self, input_size, hidden_size, num_layers=1, bias=True):
        super().__init__(input_size, hidden_size, num_layers=num_layers, bias=bias, batch_first=True)

    def forward(self, x, state=None, return_state=False):
        y, state = super().forward(x, state)
        return (y, state) if return_state else y


class Activation(nn.Module):
    """`activation`: element-wise fn in tanh, sigmoid, relu, leaky_relu (slope),
    softsign, hardtanh (min, max). `channels` is only the declared width."""

    def __init__(self, channels, fn="tanh", slope=0.01, min=-1.0, max=1.0):
        super().__init__()
        if fn not in ACTIVATIONS:
            raise ValueError(f"unsupported activation {fn!r}; earshot knows {', '.join(ACTIVATIONS)}")
        if fn == "hardtanh" and not min < max:
            raise ValueError(f"hardtanh needs min < max, got min={min}, max={max}")
        self.channels, self.fn, self.slope, self.min, self.max = channels, fn, float(slope), float(min), float(max)

    def forward(self, x):
        return apply_activation(x, self.fn, self.slope, self.min, self.max)

    def extra_repr(self):
        return f"channels={self.channels}, fn={self.fn}"


class Gated(nn.Module):
    """`gated`: y = tanh(x[:C]) * sigmoid(x[C:2C]); `channels` = 2C in, C out."""

    def __init__(self, channels):
        super().__init__()
        if channels % 2:
            raise ValueError(f"gated needs an even channel count, got {channels}")
        self.channels = channels

    def forward(self, x):
        c = self.channels // 2
        return torch.tanh(x[..., :c]) * torch.sigmoid(x[..., c:])


class FiLM(nn.Module):
    """`film`: [gamma; beta] = MLP(controls), y = gamma * x + beta (Perez et al. 2018).

    MLP: n_controls -> hidden[0] -> ... -> 2*channels, `activation` between the
    linear layers (none after the last). Parameters mlp.{j}.weight / .bias.
    forward(x [B, T, C], controls [B, T, n_controls]).
    """

    def __init__(self, channels, n_controls, hidden=(), activation="relu", slope=0.01, min=-1.0, max=1.0):
        super().__init__()
        if n_controls < 1:
            raise ValueError("film needs at least one control")
        if activation not in ACTIVATIONS:
            raise ValueError(f"unsupported FiLM activation {activation!r}")
        self.channels, self.n_controls = channels, n_controls
        self.hidden, self.activation, self.slope = list(hidden), activation, float(slope)
        self.min, self.max = float(min), float(max)
        if activation == "hardtanh" and not self.min < self.max:
            raise ValueError(f"FiLM hardtanh needs min < max, got {self.min}, {self.max}")
        widths = [n_controls] + self.hidden + [2 * channels]
        self.mlp = nn.ModuleList(nn.Linear(a, b) for a, b in zip(widths[:-1], widths[1:]))

    def coefficients(self, controls):
        h = controls
        for j, lin in enumerate(self.mlp):
            h = lin(h)
            if j < len(self.mlp) - 1:
                h = apply_activation(h, self.activation, self.slope, self.min, self.max)
        return h[..., :self.channels], h[..., self.channels:]

    def forward(self, x, controls):
        gamma, beta = self.coefficients(controls)
        return gamma * x + beta


class WaveNetLayer(nn.Module):
    """One layer of the gated residual stack: conv (2C, dilated), res and skip 1x1."""

    def __init__(self, channels, skip, kernel, dilation, bias=True):
        super().__init__()
        self.conv = CausalConv1d(channels, 2 * channels, kernel, dilation, bias)
        self.res = CausalConv1d(channels, channels, 1, 1, bias)
        self.skip = CausalConv1d(channels, skip, 1, 1, bias)


class WaveNet(nn.Module):
    """`wavenet`: gated residual stack, feed-forward form (Damskägg et al. 2019).

    x0 = input(x); per layer l: z = conv_l(x); g = tanh(z[:C]) * sigmoid(z[C:]);
    x <- x + res_l(g); output sum_l skip_l(g), `skip` channels.
    Follow it with Linear layers for the 1x1 mixing.
    """

    def __init__(self, in_channels, channels, skip, kernel, dilations, bias=True):
        super().__init__()
        self.in_channels, self.channels, self.skip_channels = in_channels, channels, skip
        self.kernel, self.dilations, self.bias = kernel, list(dilations), bias
        self.input = CausalConv1d(in_channels, channels, 1, 1, bias)
        self.layers = nn.ModuleList(WaveNetLayer(channels, skip, kernel, d, bias) for d in self.dilations)

    def forward(self, x):
        x = self.input(x)
        out = 0
        c = self.channels
        for layer in self.layers:
            z = layer.conv(x)
            g = torch.tanh(z[..., :c]) * torch.sigmoid(z[..., c:])
            x = x + layer.res(g)
            out = out + layer.skip(g)
        return out


def _activation_object(a, default_slope=0.2):
    """Completes a TCN activation object: slope for leaky_relu (default 0.2 when the
    object omits it, as the core reads it), min/max for hardtanh."""
    if isinstance(a, str):
        a = {"fn": a}
    if not isinstance(a, dict) or a.get("fn") not in ACTIVATIONS:
        raise ValueError(f"TCN activation must be {{'fn': one of {', '.join(ACTIVATIONS)}, ...}}, got {a!r}")
    unknown = set(a) - {"fn", "slope", "min", "max"}
    if unknown:
        raise ValueError(f"TCN activation: unknown field(s) {sorted(unknown)}")
    out = {"fn": a["fn"]}
    if a["fn"] == "leaky_relu":
        out["slope"] = float(a.get("slope", default_slope))
    if a["fn"] == "hardtanh":
        out["min"], out["max"] = float(a.get("min", -1.0)), float(a.get("max", 1.0))
        if not out["min"] < out["max"]:
            raise ValueError(f"TCN hardtanh needs min < max, got {out['min']}, {out['max']}")
    return out


class TCNBlock(nn.Module):
    """`tcn`: y = act(FiLM(conv(x))) + residual (Steinmetz & Reiss 2022).

    residual: x when in == out, res(x) (1x1, no bias) otherwise; none when
    residual=False. activation: dict {"fn": ..., "slope"/"min"/"max": ...}.
    film: None or dict {"hidden": [...], "activation": "relu"}; then forward
    needs controls [B, T, n_controls].
    """

    def __init__(self, in_channels, out_channels, kernel, dilation=1, bias=True,
                 activation=None, film=None, n_controls=0, residual=True):
        super().__init__()
        self.in_channels, self.out_channels = in_channels, out_channels
        self.act = _activation_object(activation or {"fn": "leaky_relu", "slope": 0.2})
        self.conv = CausalConv1d(in_channels, out_channels, kernel, dilation, bias)
        self.film_spec = None
        if film is not None:
            self.film_spec = {"hidden": list(film.get("hidden", [])), "activation": film.get("activation", "relu")}
            for k in ("slope", "min", "max"):
                if k in film:
                    self.film_spec[k] = float(film[k])
            self.film = FiLM(out_channels, n_controls, self.film_spec["hidden"], self.film_spec["activation"],
                             self.film_spec.get("slope", 0.01), self.film_spec.get("min", -1.0),
                             self.film_spec.get("max", 1.0))
        self.residual = residual
        if residual and in_channels != out_channels:
            self.res = CausalConv1d(in_channels, out_channels, 1, 1, bias=False)

    def forward(self, x, controls=None):
        y = self.conv(x)
        if self.film_spec is not None:
            if controls is None:
                raise ValueError("this TCN block has FiLM: pass controls [batch, time, n_controls]")
            y = self.film(y, controls)
        y = apply_activation(y, self.act["fn"], self.act.get("slope", 0.01),
                             self.act.get("min", -1.0), self.act.get("max", 1.0))
        if self.residual:
            y = y + (x if self.in_channels == self.out_channels else self.res(x))
        return y


# --------------------------------------------------------------------------
# Controls
# --------------------------------------------------------------------------

NAME_RE = re.compile(r"^[A-Za-z0-9_]{1,32}$")


def control_spec(c):
    """Normalise a control given as a name or a dict to the file's control object.

    Missing fields default to unit "", min 0, max 1, default 0.5, smoothing_ms 20.
    """
    if isinstance(c, str):
        c = {"name": c}
    if not isinstance(c, dict) or "name" not in c:
        raise ValueError(f"a control is a name or a dict with 'name', got {c!r}")
    unknown = set(c) - {"name", "unit", "min", "max", "default", "smoothing_ms"}
    if unknown:
        raise ValueError(f"control {c['name']!r}: unknown field(s) {sorted(unknown)}")
    spec = {"name": c["name"], "unit": c.get("unit", ""), "min": float(c.get("min", 0.0)),
            "max": float(c.get("max", 1.0))}
    spec["default"] = float(c.get("default", 0.5 * (spec["min"] + spec["max"])))
    spec["smoothing_ms"] = float(c.get("smoothing_ms", 20.0))
    n = spec["name"]
    if not isinstance(n, str) or not NAME_RE.match(n) or n == "audio":
        raise ValueError(f"control name {n!r}: needs 1 to 32 characters of [A-Za-z0-9_] and not 'audio'")
    if not isinstance(spec["unit"], str) or len(spec["unit"]) > 16:
        raise ValueError(f"control {n!r}: unit must be a string of at most 16 characters")
    for k in ("min", "max", "default", "smoothing_ms"):
        if not math.isfinite(spec[k]):
            raise ValueError(f"control {n!r}: {k} must be finite, got {spec[k]}")
    if not spec["min"] < spec["max"]:
        raise ValueError(f"control {n!r}: min ({spec['min']}) must be below max ({spec['max']})")
    if not spec["min"] <= spec["default"] <= spec["max"]:
        raise ValueError(f"control {n!r}: default {spec['default']} outside [{spec['min']}, {spec['max']}]")
    if not 0 <= spec["smoothing_ms"] <= 10000:
        raise ValueError(f"control {n!r}: smoothing_ms {spec['smoothing_ms']} outside 0 .. 10000")
    return spec


def ramp_steps(smoothing_ms, sample_rate):
    """Samples a control change takes: round(smoothing_ms / 1000 * sample_rate), half away from zero."""
    return int(math.floor(smoothing_ms / 1000.0 * sample_rate + 0.5))


def smooth_controls(n_samples, sample_rate, initial, events=(), smoothing_ms=20.0):
    """Per-sample control values as the core produces them.

    initial: starting value of each control (the defaults after earshot_create),
    events: (sample, control_index, target) tuples: the target is set just before
    `sample` is processed (earshot_set_control between blocks). Each change is a
    float32 linear ramp from the current value over
    steps = round(smoothing_ms/1000 * sample_rate) samples: every sample
    current += (target - start) / steps, the last step lands exactly on target;
    the sample at the event position already carries the first step. A new target
    starts a new ramp from the current value. steps = 0 jumps at once.
    smoothing_ms: one number or one per control.
    Returns float32 tensor [n_samples, n_controls].
    """
    initial = np.asarray(initial, dtype=np.float32).reshape(-1)
    n = initial.size
    ms = np.broadcast_to(np.asarray(smoothing_ms, dtype=np.float64), (n,))
    out = np.empty((n_samples, n), dtype=np.float32)
    for ci in range(n):
        evs = sorted((int(p), float(v)) for p, i, v in events if int(i) == ci)
        steps = ramp_steps(float(ms[ci]), sample_rate)
        cur = np.float32(initial[ci])
        track = out[:, ci]
        bounds = [p for p, _ in evs] + [n_samples]
        track[:max(0, min(bounds[0], n_samples))] = cur
        for k, (p, target) in enumerate(evs):
            if not 0 <= p <= n_samples:
                raise ValueError(f"control event at sample {p} outside 0 .. {n_samples}")
            end = min(bounds[k + 1], n_samples)
            target = np.float32(target)
            if end <= p:
                # superseded before any sample ran: the ramp has not moved yet.
                continue
            if steps == 0:
                track[p:end] = target
                cur = target
                continue
            inc = np.float32(np.float32(target - cur) / np.float32(steps))
            m = min(steps, end - p)
            seq = np.empty(m + 1, dtype=np.float32)
            seq[0] = cur
            seq[1:] = inc
            ramp = np.add.accumulate(seq, dtype=np.float32)[1:]
            if m == steps:
                ramp[-1] = target
            track[p:p + m] = ramp
            track[p + m:end] = target
            cur = ramp[-1] if m < steps else target
    return torch.from_numpy(out)


# --------------------------------------------------------------------------
# The effect
# --------------------------------------------------------------------------

def _kind(m):
    """The type name a module is written as (layer_types.py), for default layer names."""
    from .layer_types import type_of_module  # the table imports this module
    t = type_of_module(m)
    return t.name if t is not None else "activation"


class Effect(nn.Module):
    """A whole effect: input vector -> layers in order -> one channel (+ input skip).

    layers: a list of modules (named l0_<kind>, l1_<kind>, ...) or an ordered
      dict name -> module. The names become the layer names in the file.
      Accepted: every module above, and torch's own nn.Linear, nn.Conv1d (run
      causally: padding must be 0, (kernel-1)*dilation zeros go on the left),
      nn.LSTM, nn.GRU, nn.Tanh, nn.Sigmoid, nn.ReLU, nn.LeakyReLU,
      nn.Softsign, nn.Hardtanh, and nn.Sequential of those.
    inputs: channel order of the vector fed to the first layer: "audio" and
      control names.
    controls: all controls in declaration order (names or dicts, see
      control_spec); default: the control names in `inputs`. FiLM layers see all
      of them in this order.
    input_skip: add the input sample to the output.
    sample_rate, credits: kept for export.

    forward(audio [B, T], controls [B, T, n_controls] or [B, n_controls] or None
    (defaults), state=None, return_state=False) -> [B, T] (and the recurrent
    state dict {layer index: state} when return_state).
    """

    def __init__(self, layers, inputs=("audio",), controls=None, input_skip=False,
                 sample_rate=None, credits=None):
        super().__init__()
        if isinstance(layers, nn.Module) and not isinstance(layers, (nn.ModuleList, nn.Sequential)):
            layers = [layers]
        if isinstance(layers, dict):
            names, mods = list(layers.keys()), list(layers.values())
        else:
            mods = list(layers)
            names = [f"l{i}_{_kind(m)}" for i, m in enumerate(mods)]
        if not mods:
            raise ValueError("an effect needs at least one layer")
        self.layers = nn.ModuleList(mods)
        self.layer_names = names
        self.inputs = list(inputs)
        if self.inputs.count("audio") != 1:
            raise ValueError(f"inputs must contain 'audio' exactly once, got {self.inputs}")
        if controls is None:
            controls = [n for n in self.inputs if n != "audio"]
        self.controls = [control_spec(c) for c in controls]
        cnames = [c["name"] for c in self.controls]
        if len(set(cnames)) != len(cnames):
            raise ValueError(f"control names must be unique, got {cnames}")
        for n in self.inputs:
            if n != "audio" and n not in cnames:
                raise ValueError(f"input {n!r} is neither 'audio' nor a declared control ({cnames})")
        if len(set(self.inputs)) != len(self.inputs):
            raise ValueError(f"inputs must not repeat a name, got {self.inputs}")
        self.input_skip = bool(input_skip)
        self.sample_rate = sample_rate
        self.credits = dict(credits) if credits else None

    @property
    def control_names(self):
        return [c["name"] for c in self.controls]

    def default_controls(self):
        return torch.tensor([c["default"] for c in self.controls], dtype=torch.float32)

    def _controls(self, audio, controls):
        b, t = audio.shape
        n = len(self.controls)
        if controls is None:
            controls = self.default_controls().to(audio)
        controls = torch.as_tensor(controls).to(audio)
        if controls.dim() == 1:
            controls = controls.expand(b, n)
        if controls.dim() == 2:
            controls = controls[:, None, :].expand(b, t, n)
        if controls.shape != (b, t, n):
            raise ValueError(f"controls must be [batch, time, {n}] (or [batch, {n}]), got {list(controls.shape)}")
        return controls

    def forward(self, audio, controls=None, state=None, return_state=False):
        if audio.dim() != 2:
            raise ValueError(f"audio must be [batch, time], got {list(audio.shape)}")
        ctl = self._controls(audio, controls)
        chans = [audio if n == "audio" else ctl[..., self.control_names.index(n)] for n in self.inputs]
        x = torch.stack(chans, dim=-1)
        new_state = {}
        state = state or {}
        for i, layer in enumerate(self.layers):
            x, st = _run(layer, x, ctl, state.get(i))
            if st is not None:
                new_state[i] = st
        if x.shape[-1] != 1:
            raise ValueError(f"the last layer must give 1 channel, gives {x.shape[-1]}")
        y = x[..., 0]
        if self.input_skip:
            y = y + audio
        return (y, new_state) if return_state else y


def _run(layer, x, ctl, st=None):
    """Applies one layer to channels-last x; returns (y, recurrent state or None)."""
    if isinstance(layer, (LSTM, GRU)):
        return layer(x, st, return_state=True)
    if isinstance(layer, (nn.LSTM, nn.GRU)):
        if layer.batch_first:
            return layer(x, st)
        y, s = layer(x.transpose(0, 1), st)
        return y.transpose(0, 1), s
    if isinstance(layer, CausalConv1d):
        return layer(x), None
    if isinstance(layer, nn.Conv1d):
        if layer.padding != (0,) and layer.padding != "valid":
            raise ValueError("an nn.Conv1d inside an Effect must have padding=0 (it is padded causally)")
        pad = (layer.kernel_size[0] - 1) * layer.dilation[0]
        return layer(F.pad(x.transpose(1, 2), (pad, 0))).transpose(1, 2), None
    if isinstance(layer, (FiLM, TCNBlock)):
        return layer(x, ctl), None
    if isinstance(layer, nn.Sequential):
        for sub in layer:
            x, _ = _run(sub, x, ctl)
        return x, None
    return layer(x), None


# What `import earshot` exposes (earshot/__init__.py imports these names): a
# new layer type's twin is added here.
__all__ = ["ACTIVATIONS", "apply_activation", "Linear", "CausalConv1d", "LSTM", "GRU", "Activation",
           "Gated", "FiLM", "WaveNet", "WaveNetLayer", "TCNBlock", "Effect", "control_spec",
           "ramp_steps", "smooth_controls"]
