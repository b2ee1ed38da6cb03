"""The table of layer types on the Python side: one row per type of the core's
table (dsp/layers/registry.hpp, same names in the same order; test_corpus.py
checks that). A row holds everything Python knows of a type beyond its
PyTorch twin in modules.py:

  name        the type's name in effect files;
  width_key   the field holding its input width ("in" or "channels");
  recurrent   whether it keeps state beyond any receptive field;
  madds       multiply-adds per sample of a layer object (dsp/FORMAT.md);
  field       the receptive field it adds, in samples;
  matches     whether a torch module is written as this type;
  export      (path, module, width, n_controls) -> (layer object without
              name, [(parameter, tensor)], output width), or ExportError;
  load        (layer object, width, n_controls) -> (twin module, output
              width), or FormatError;
  examples    small effects of the type that tests/python/test_parity.py runs
              against the core: {name: (build() -> Effect, control events)};
  modules     the modules it exports, as the exporter's refusal lists them.

exporter.py and loader.py walk the graph and dispatch on this table.
"""

import math
from collections import namedtuple

import torch
import torch.nn as nn

from .container import FormatError
from .limits import (MAX_CHANNELS, MAX_DILATION, MAX_FILM_HIDDEN, MAX_KERNEL, MAX_RECURRENT_LAYERS,
                     MAX_WAVENET_LAYERS)
from .modules import (ACTIVATIONS, GRU, LSTM, Activation, CausalConv1d, Effect, FiLM, Gated, Linear, TCNBlock,
                      WaveNet, _activation_object)


class ExportError(ValueError):
    """The model holds something the effect format cannot express exactly."""


# ---- export checks shared by the types ---------------------------------------------------------

def _where(path, module):
    return f"{path} ({type(module).__module__}.{type(module).__qualname__})"


def _check_width(path, module, declared, width):
    if declared != width:
        raise ExportError(f"{_where(path, module)}: takes {declared} channels but receives {width}")


def _conv_checks(path, m, allow_padding=False):
    if m.stride != (1,):
        raise ExportError(f"{_where(path, m)}: stride {m.stride[0]} is not supported (needs 1)")
    if m.groups != 1:
        raise ExportError(f"{_where(path, m)}: groups={m.groups} is not supported (needs 1)")
    if not allow_padding and m.padding not in ((0,), "valid"):
        raise ExportError(f"{_where(path, m)}: padding {m.padding} is not causal; use padding=0 "
                          "(the Effect pads (kernel-1)*dilation zeros on the left) or earshot.CausalConv1d")


def _check_channels(path, m, what, n):
    if not 1 <= n <= MAX_CHANNELS:
        raise ExportError(f"{_where(path, m)}: {what} {n} is outside 1 .. {MAX_CHANNELS} (kMaxChannels)")


def _check_kernel(path, m, kernel, dilations):
    if not 1 <= kernel <= MAX_KERNEL:
        raise ExportError(f"{_where(path, m)}: kernel {kernel} is outside 1 .. {MAX_KERNEL} (kMaxKernel)")
    for d in dilations:
        if not 1 <= d <= MAX_DILATION:
            raise ExportError(f"{_where(path, m)}: dilation {d} is outside 1 .. {MAX_DILATION} (kMaxDilation)")


def _exact_type(path, m, allowed, what):
    if type(m) not in allowed:
        raise ExportError(f"{_where(path, m)}: a subclass of {what} may compute something else")


def _weight_bias(m, prefix=""):
    return [(prefix + "weight", m.weight)] + ([(prefix + "bias", m.bias)] if m.bias is not None else [])


def _activation_of(module):
    """(fn, extra fields) for a torch or earshot activation module, or None."""
    if isinstance(module, Activation):
        extra = {}
        if module.fn == "leaky_relu":
            extra["slope"] = module.slope
        if module.fn == "hardtanh":
            extra.update(min=module.min, max=module.max)
        return module.fn, extra
    if isinstance(module, nn.Tanh):
        return "tanh", {}
    if isinstance(module, nn.Sigmoid):
        return "sigmoid", {}
    if isinstance(module, nn.ReLU):
        return "relu", {}
    if isinstance(module, nn.LeakyReLU):
        return "leaky_relu", {"slope": float(module.negative_slope)}
    if isinstance(module, nn.Softsign):
        return "softsign", {}
    if isinstance(module, nn.Hardtanh) and type(module) is nn.Hardtanh:
        return "hardtanh", {"min": float(module.min_val), "max": float(module.max_val)}
    return None


def _film_fields(path, film, n_controls):
    if n_controls < 1:
        raise ExportError(f"{_where(path, film)}: FiLM needs at least one control, the effect declares none")
    if film.n_controls != n_controls:
        raise ExportError(f"{_where(path, film)}: FiLM takes {film.n_controls} controls, "
                          f"the effect declares {n_controls}")
    if len(film.hidden) > MAX_FILM_HIDDEN:
        raise ExportError(f"{_where(path, film)}: FiLM MLP has {len(film.hidden)} hidden layers, "
                          f"at most {MAX_FILM_HIDDEN} (kMaxFilmHidden)")
    for h in film.hidden:
        _check_channels(path, film, "FiLM hidden width", h)
    _check_channels(path, film, "channels", film.channels)
    if film.activation not in ACTIVATIONS:
        raise ExportError(f"{_where(path, film)}: FiLM activation {film.activation!r} is not supported")
    fields = {"hidden": list(film.hidden), "activation": film.activation}
    if film.activation == "leaky_relu":
        fields["slope"] = film.slope
    if film.activation == "hardtanh":
        if not film.min < film.max:
            raise ExportError(f"{_where(path, film)}: FiLM hardtanh needs min < max")
        fields.update(min=film.min, max=film.max)
    for j, lin in enumerate(film.mlp):
        if lin.bias is None:
            raise ExportError(f"{_where(path + f'.mlp.{j}', lin)}: FiLM linear layers need a bias")
    tensors = []
    for j, lin in enumerate(film.mlp):
        tensors += [(f"mlp.{j}.weight", lin.weight), (f"mlp.{j}.bias", lin.bias)]
    return fields, tensors


# ---- load checks shared by the types -----------------------------------------------------------

def _int(layer, key, lo=1, hi=MAX_CHANNELS, default=None):
    v = layer.get(key, default)
    if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
        raise FormatError(f"layer {layer.get('name')!r}: {key} must be an integer in {lo} .. {hi}, got {v!r}")
    return v


def _bool(layer, key, default):
    v = layer.get(key, default)
    if not isinstance(v, bool):
        raise FormatError(f"layer {layer.get('name')!r}: {key} must be true or false, got {v!r}")
    return v


def _finite(obj, keys, what):
    """ValueError unless each of `keys` present in `obj` is a finite number."""
    for key in keys:
        v = obj.get(key, 0.0)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise ValueError(f"{what} {key!r} must be a finite number, got {v!r}")


def _film_args(name, f):
    hidden = f.get("hidden", [])
    if (not isinstance(hidden, list) or len(hidden) > MAX_FILM_HIDDEN
            or not all(isinstance(h, int) and not isinstance(h, bool) and 1 <= h <= MAX_CHANNELS for h in hidden)):
        raise FormatError(f"layer {name!r}: film hidden must be a list of 0 .. {MAX_FILM_HIDDEN} widths of "
                          f"1 .. {MAX_CHANNELS}, got {hidden!r}")
    act = f.get("activation", "relu")
    if act not in ACTIVATIONS:
        raise FormatError(f"layer {name!r}: film activation {act!r} is not one of {', '.join(ACTIVATIONS)}")
    try:
        _finite(f, ("slope", "min", "max"), "film field")
    except ValueError as e:
        raise FormatError(f"layer {name!r}: {e}") from None
    extra = {key: float(f.get(key, default)) for key, default in (("slope", 0.01), ("min", -1.0), ("max", 1.0))}
    if act == "hardtanh" and not extra["min"] < extra["max"]:
        raise FormatError(f"layer {name!r}: film hardtanh needs min < max")
    return hidden, act, extra


# ---- examples shared by the types --------------------------------------------------------------
# Controls and control events (fraction of the signal, control name, value) of the examples.

EXAMPLE_CTL_1 = [{"name": "drive", "min": 0, "max": 4, "default": 1, "smoothing_ms": 50}]
EXAMPLE_EVENTS_1 = [(0.13, "drive", 3.5), (0.1301, "drive", 0.5), (0.6, "drive", 2.2)]
EXAMPLE_CTL_2 = [{"name": "a", "min": 0, "max": 1, "default": 0.3, "smoothing_ms": 20},
                 {"name": "b", "min": -2, "max": 2, "default": 0.5, "smoothing_ms": 3.3}]
EXAMPLE_EVENTS_2 = [(0.21, "a", 0.9), (0.21, "b", -1.5), (0.2103, "a", 0.1), (0.5, "b", 1.8), (0.77, "a", 0.6)]


def _gain_in(width, gain):
    """A Linear(1 -> width) whose weights are scaled so the next layer sees |x| well above 1."""
    lin = nn.Linear(1, width)
    with torch.no_grad():
        lin.weight.mul_(gain)
    return lin


def _none(layer):
    return 0


def _conv_field(layer):
    return (layer["kernel"] - 1) * layer.get("dilation", 1)


# ---- linear ------------------------------------------------------------------------------------

def _linear_export(path, m, width, n_controls):
    _exact_type(path, m, (nn.Linear, Linear), "nn.Linear")
    _check_width(path, m, m.in_features, width)
    _check_channels(path, m, "out", m.out_features)
    return ({"type": "linear", "in": m.in_features, "out": m.out_features, "bias": m.bias is not None},
            _weight_bias(m), m.out_features)


def _linear_load(layer, width, n_controls):
    out = _int(layer, "out")
    return Linear(width, out, bias=_bool(layer, "bias", True)), out


def _linear_examples():
    return {"linear": (lambda: Effect([nn.Linear(2, 7), Linear(7, 1, bias=False)],
                                      inputs=["audio", "drive"], controls=EXAMPLE_CTL_1), EXAMPLE_EVENTS_1)}


# ---- conv1d ------------------------------------------------------------------------------------

def _conv1d_export(path, m, width, n_controls):
    _exact_type(path, m, (nn.Conv1d, CausalConv1d), "nn.Conv1d")
    _conv_checks(path, m)
    _check_width(path, m, m.in_channels, width)
    _check_channels(path, m, "out", m.out_channels)
    _check_kernel(path, m, m.kernel_size[0], [m.dilation[0]])
    return ({"type": "conv1d", "in": m.in_channels, "out": m.out_channels, "kernel": m.kernel_size[0],
             "dilation": m.dilation[0], "bias": m.bias is not None}, _weight_bias(m), m.out_channels)


def _conv1d_load(layer, width, n_controls):
    out = _int(layer, "out")
    return CausalConv1d(width, out, _int(layer, "kernel", hi=MAX_KERNEL),
                        _int(layer, "dilation", hi=MAX_DILATION, default=1), _bool(layer, "bias", True)), out


def _conv1d_examples():
    c = {}
    for k, d, w, torch_conv in [(1, 1, 3, False), (2, 5, 5, False), (3, 7, 6, True), (5, 3, 11, True),
                                (3, 100, 4, False)]:
        conv = (lambda a, b, kk, dd: nn.Conv1d(a, b, kk, dilation=dd)) if torch_conv else CausalConv1d
        c[f"conv1d k{k} d{d} C{w}{' (nn.Conv1d)' if torch_conv else ''}"] = (
            lambda k=k, d=d, w=w, conv=conv: Effect([conv(1, w, k, d), conv(w, 1, k, d)]), [])
    return c


# ---- lstm, gru ---------------------------------------------------------------------------------

def _recurrent_export(kind):
    def export(path, m, width, n_controls):
        if type(m) not in (nn.LSTM, nn.GRU, LSTM, GRU):
            raise ExportError(f"{_where(path, m)}: a subclass of nn.LSTM/nn.GRU may compute something else; "
                              "use nn.LSTM, nn.GRU, earshot.LSTM or earshot.GRU")
        if m.bidirectional:
            raise ExportError(f"{_where(path, m)}: a bidirectional {kind.upper()} is not causal and cannot be "
                              "exported")
        if getattr(m, "proj_size", 0):
            raise ExportError(f"{_where(path, m)}: proj_size={m.proj_size} is not supported")
        if not 1 <= m.num_layers <= MAX_RECURRENT_LAYERS:
            raise ExportError(f"{_where(path, m)}: num_layers={m.num_layers} is outside 1 .. {MAX_RECURRENT_LAYERS} "
                              "(kMaxRecurrentLayers)")
        _check_width(path, m, m.input_size, width)
        _check_channels(path, m, "hidden", m.hidden_size)
        tensors = []
        for l in range(m.num_layers):
            tensors += [(f"weight_ih_l{l}", getattr(m, f"weight_ih_l{l}")),
                        (f"weight_hh_l{l}", getattr(m, f"weight_hh_l{l}"))]
            if m.bias:
                tensors += [(f"bias_ih_l{l}", getattr(m, f"bias_ih_l{l}")),
                            (f"bias_hh_l{l}", getattr(m, f"bias_hh_l{l}"))]
        layer = {"type": kind, "in": m.input_size, "hidden": m.hidden_size, "num_layers": m.num_layers,
                 "bias": bool(m.bias)}
        return layer, tensors, m.hidden_size
    return export


def _recurrent_load(cls):
    def load(layer, width, n_controls):
        h = _int(layer, "hidden")
        return cls(width, h, _int(layer, "num_layers", 1, MAX_RECURRENT_LAYERS, 1), _bool(layer, "bias", True)), h
    return load


def _recurrent_madds(gates):
    def madds(layer):
        h, x, total = layer["hidden"], layer["in"], 0
        for _ in range(layer.get("num_layers", 1)):
            total += gates * h * (x + h)
            x = h
        return total
    return madds


def _lstm_examples():
    return {
        "lstm H5": (lambda: Effect([LSTM(1, 5), nn.Linear(5, 1)]), []),
        "lstm H13 x3 no bias": (lambda: Effect([LSTM(1, 13, 3, bias=False), nn.Linear(13, 1)]), []),
        "lstm H9 (nn.LSTM) + control": (lambda: Effect([nn.LSTM(2, 9, batch_first=True), nn.Linear(9, 1)],
                                                       inputs=["audio", "drive"], controls=EXAMPLE_CTL_1),
                                        EXAMPLE_EVENTS_1),
    }


def _gru_examples():
    return {
        "gru H7 x2": (lambda: Effect([GRU(1, 7, 2), nn.Linear(7, 1)]), []),
        "gru H3 (nn.GRU)": (lambda: Effect([nn.GRU(1, 3), nn.Linear(3, 1)]), []),
    }


# ---- activation --------------------------------------------------------------------------------

def _activation_export(path, m, width, n_controls):
    fn, extra = _activation_of(m)
    for k, v in extra.items():
        if not math.isfinite(v):
            raise ExportError(f"{_where(path, m)}: {fn} {k} {v} is not finite")
    if fn == "hardtanh" and not extra["min"] < extra["max"]:
        raise ExportError(f"{_where(path, m)}: hardtanh needs min < max")
    return dict({"type": "activation", "channels": width, "fn": fn}, **extra), [], width


def _activation_load(layer, width, n_controls):
    name, fn = layer.get("name"), layer.get("fn")
    if fn not in ACTIVATIONS:
        raise FormatError(f"layer {name!r}: fn {fn!r} is not one of {', '.join(ACTIVATIONS)}")
    try:
        _finite(layer, ("slope", "min", "max"), "field")
        return Activation(width, fn, layer.get("slope", 0.01), layer.get("min", -1.0), layer.get("max", 1.0)), width
    except ValueError as e:
        raise FormatError(f"layer {name!r}: {e}") from None


def _activation_examples():
    c = {}
    for fn, extra in [("tanh", {}), ("sigmoid", {}), ("relu", {}), ("leaky_relu", {}),
                      ("leaky_relu", {"slope": 0.3}), ("softsign", {}), ("hardtanh", {}),
                      ("hardtanh", {"min": -0.4, "max": 0.7})]:
        name = f"activation {fn}" + "".join(f" {k}={v}" for k, v in extra.items())
        c[name] = (lambda fn=fn, extra=extra: Effect(
            [_gain_in(6, 4.0), Activation(6, fn, **extra), nn.Linear(6, 1)]), [])
    c["activation torch modules"] = (lambda: Effect(
        [_gain_in(4, 4.0), nn.LeakyReLU(0.05), nn.Softsign(), nn.Hardtanh(-0.2, 0.3), nn.Linear(4, 1)]), [])
    return c


# ---- gated -------------------------------------------------------------------------------------

def _gated_export(path, m, width, n_controls):
    _check_width(path, m, m.channels, width)
    return {"type": "gated", "channels": m.channels}, [], m.channels // 2


def _gated_load(layer, width, n_controls):
    if width % 2:
        raise FormatError(f"layer {layer.get('name')!r}: gated needs an even channel count, got {width}")
    return Gated(width), width // 2


def _gated_examples():
    return {"gated C5": (lambda: Effect([_gain_in(10, 3.0), Gated(10), nn.Linear(5, 1)]), [])}


# ---- film --------------------------------------------------------------------------------------

def _film_export(path, m, width, n_controls):
    _check_width(path, m, m.channels, width)
    fields, tensors = _film_fields(path, m, n_controls)
    return dict({"type": "film", "channels": m.channels}, **fields), tensors, width


def _film_load(layer, width, n_controls):
    name = layer.get("name")
    if n_controls < 1:
        raise FormatError(f"layer {name!r}: film needs at least one control")
    hidden, act, extra = _film_args(name, layer)
    try:
        return FiLM(width, n_controls, hidden, act, extra["slope"], extra["min"], extra["max"]), width
    except ValueError as e:
        raise FormatError(f"layer {name!r}: {e}") from None


def _film_examples():
    return {
        "film C6 hidden [5] tanh": (lambda: Effect(
            [nn.Linear(1, 6), FiLM(6, 2, [5], "tanh"), nn.Linear(6, 1)], controls=EXAMPLE_CTL_2), EXAMPLE_EVENTS_2),
        "film C3 no hidden relu": (lambda: Effect(
            [nn.Linear(1, 3), FiLM(3, 2, []), nn.Linear(3, 1)], controls=EXAMPLE_CTL_2), EXAMPLE_EVENTS_2),
        "film C4 hidden [7, 3] leaky_relu": (lambda: Effect(
            [nn.Linear(1, 4), FiLM(4, 2, [7, 3], "leaky_relu"), nn.Linear(4, 1)], controls=EXAMPLE_CTL_2),
            EXAMPLE_EVENTS_2),
    }


# ---- wavenet -----------------------------------------------------------------------------------

def _wavenet_export(path, m, width, n_controls):
    _check_width(path, m, m.in_channels, width)
    if not 1 <= len(m.dilations) <= MAX_WAVENET_LAYERS:
        raise ExportError(f"{_where(path, m)}: {len(m.dilations)} dilations, needs 1 .. {MAX_WAVENET_LAYERS} "
                          "(kMaxWavenetLayers)")
    _check_channels(path, m, "channels", m.channels)
    _check_channels(path, m, "skip", m.skip_channels)
    _check_kernel(path, m, m.kernel, m.dilations)
    t = _weight_bias(m.input, "input.")
    for l, layer in enumerate(m.layers):
        for part in ("conv", "res", "skip"):
            t += _weight_bias(getattr(layer, part), f"layers.{l}.{part}.")
    return ({"type": "wavenet", "in": m.in_channels, "channels": m.channels, "skip": m.skip_channels,
             "kernel": m.kernel, "dilations": list(m.dilations), "bias": bool(m.bias)}, t, m.skip_channels)


def _wavenet_load(layer, width, n_controls):
    c, s = _int(layer, "channels"), _int(layer, "skip")
    dil = layer.get("dilations")
    if (not isinstance(dil, list) or not 1 <= len(dil) <= MAX_WAVENET_LAYERS
            or not all(isinstance(d, int) and not isinstance(d, bool) and 1 <= d <= MAX_DILATION for d in dil)):
        raise FormatError(f"layer {layer.get('name')!r}: dilations must be a list of 1 .. {MAX_WAVENET_LAYERS} "
                          f"integers of 1 .. {MAX_DILATION}")
    return WaveNet(width, c, s, _int(layer, "kernel", hi=MAX_KERNEL), dil, _bool(layer, "bias", True)), s


def _wavenet_madds(layer):
    c, s, k = layer["channels"], layer["skip"], layer["kernel"]
    return c * layer["in"] + len(layer["dilations"]) * (2 * c * c * k + c * c + s * c)


def _wavenet_examples():
    return {
        "wavenet C5 S3 k2 d[1,3,5]": (lambda: Effect([WaveNet(1, 5, 3, 2, [1, 3, 5]), nn.Linear(3, 1)]), []),
        "wavenet C3 S2 k1 d[1,1] no bias": (lambda: Effect(
            [WaveNet(1, 3, 2, 1, [1, 1], bias=False), nn.Linear(2, 1)]), []),
    }


# ---- tcn ---------------------------------------------------------------------------------------

def _tcn_export(path, m, width, n_controls):
    _check_width(path, m, m.in_channels, width)
    conv = m.conv
    _check_channels(path, m, "out", m.out_channels)
    _check_kernel(path, m, conv.kernel_size[0], [conv.dilation[0]])
    t = _weight_bias(conv, "conv.")
    layer = {"type": "tcn", "in": m.in_channels, "out": m.out_channels, "kernel": conv.kernel_size[0],
             "dilation": conv.dilation[0], "bias": conv.bias is not None, "activation": dict(m.act),
             "residual": bool(m.residual)}
    fn = m.act.get("fn")
    if fn not in ACTIVATIONS:
        raise ExportError(f"{_where(path, m)}: activation {fn!r} is not supported")
    if m.film_spec is not None:
        fields, ft = _film_fields(path + ".film", m.film, n_controls)
        layer["film"] = fields
        t += [("film." + k, v) for k, v in ft]
    if m.residual and m.in_channels != m.out_channels:
        t.append(("res.weight", m.res.weight))
    return layer, t, m.out_channels


def _tcn_load(layer, width, n_controls):
    name = layer.get("name")
    out = _int(layer, "out")
    film = film_in = layer.get("film")
    if film is not None:
        if not isinstance(film, dict):
            raise FormatError(f"layer {name!r}: film must be an object")
        if n_controls < 1:
            raise FormatError(f"layer {name!r}: film needs at least one control")
        hidden, act, extra = _film_args(name, film)
        film = {"hidden": hidden, "activation": act}
        film.update({k: v for k, v in extra.items() if k in film_in})
    if not isinstance(layer.get("activation", {}), dict):
        raise FormatError(f"layer {name!r}: field 'activation' must be an object {{\"fn\": ...}}")
    try:
        a = layer.get("activation", {"fn": "leaky_relu", "slope": 0.2})
        _finite(a, ("slope", "min", "max"), "activation field")
        # keys the format does not define are ignored, as the core does
        act = _activation_object({k: v for k, v in a.items() if k in ("fn", "slope", "min", "max")})
    except ValueError as e:
        raise FormatError(f"layer {name!r}: {e}") from None
    return TCNBlock(width, out, _int(layer, "kernel", hi=MAX_KERNEL),
                    _int(layer, "dilation", hi=MAX_DILATION, default=1),
                    _bool(layer, "bias", True), act, film, n_controls,
                    _bool(layer, "residual", True)), out


def _tcn_madds(layer):
    m = layer["out"] * layer["in"] * layer["kernel"]
    if layer.get("residual", True) and layer["in"] != layer["out"]:
        m += layer["out"] * layer["in"]
    return m


def _tcn_examples():
    return {
        "tcn FiLM, in!=out, hardtanh": (lambda: Effect([
            TCNBlock(1, 6, 5, 3, film={"hidden": [4]}, n_controls=2),
            TCNBlock(6, 6, 3, 7, activation={"fn": "hardtanh", "min": -0.5, "max": 0.5}),
            nn.Linear(6, 1)], controls=EXAMPLE_CTL_2), EXAMPLE_EVENTS_2),
        "tcn no residual, no bias, sigmoid": (lambda: Effect([
            TCNBlock(1, 5, 2, 11, bias=False, residual=False, activation={"fn": "sigmoid"}),
            nn.Linear(5, 1)]), []),
    }


# ---- the table ---------------------------------------------------------------------------------

LayerType = namedtuple("LayerType", "name width_key recurrent madds field matches export load examples modules")

LAYER_TYPES = {t.name: t for t in (
    LayerType("linear", "in", False, lambda l: l["out"] * l["in"], _none,
              lambda m: isinstance(m, nn.Linear), _linear_export, _linear_load, _linear_examples, "Linear"),
    LayerType("conv1d", "in", False, lambda l: l["out"] * l["in"] * l["kernel"], _conv_field,
              lambda m: isinstance(m, nn.Conv1d), _conv1d_export, _conv1d_load, _conv1d_examples, "Conv1d"),
    LayerType("lstm", "in", True, _recurrent_madds(4), _none,
              lambda m: isinstance(m, nn.LSTM), _recurrent_export("lstm"), _recurrent_load(LSTM), _lstm_examples, "LSTM"),
    LayerType("gru", "in", True, _recurrent_madds(3), _none,
              lambda m: isinstance(m, nn.GRU), _recurrent_export("gru"), _recurrent_load(GRU), _gru_examples, "GRU"),
    LayerType("activation", "channels", False, _none, _none,
              lambda m: _activation_of(m) is not None, _activation_export, _activation_load, _activation_examples,
              "activations (tanh, sigmoid, relu, leaky_relu, softsign, hardtanh)"),
    LayerType("gated", "channels", False, _none, _none,
              lambda m: isinstance(m, Gated), _gated_export, _gated_load, _gated_examples, "Gated"),
    LayerType("film", "channels", False, _none, _none,
              lambda m: isinstance(m, FiLM), _film_export, _film_load, _film_examples, "FiLM"),
    LayerType("wavenet", "in", False, _wavenet_madds, lambda l: sum((l["kernel"] - 1) * d for d in l["dilations"]),
              lambda m: isinstance(m, WaveNet), _wavenet_export, _wavenet_load, _wavenet_examples, "WaveNet"),
    LayerType("tcn", "in", False, _tcn_madds, _conv_field,
              lambda m: isinstance(m, TCNBlock), _tcn_export, _tcn_load, _tcn_examples, "TCNBlock"),
)}


def type_of_module(m):
    """The row a torch module is written as, or None."""
    for t in LAYER_TYPES.values():
        if t.matches(m):
            return t
    return None


def layer_figures(layer):
    """(multiply-adds per sample, receptive field added, recurrent) of one layer object;
    ValueError naming the type when the table has no such type."""
    row = LAYER_TYPES.get(layer.get("type"))
    if row is None:
        raise ValueError(f"layer {layer.get('name', '?')!r}: unknown layer type {layer.get('type')!r} "
                         f"({', '.join(LAYER_TYPES)})")
    return row.madds(layer), row.field(layer), row.recurrent
