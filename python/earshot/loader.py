"""Effect file -> earshot.Effect of reference modules (the exporter's inverse).

Checks the effect description against dsp/FORMAT.md as it goes; every
rejection is a container.FormatError naming the field or tensor at fault.
"""

import json
import math

import torch

from . import container
from .container import FormatError
from .limits import (MAX_CHANNELS, MAX_CONTROLS, MAX_DILATION, MAX_FILM_HIDDEN, MAX_KERNEL, MAX_LAYERS,
                     MAX_RATE, MAX_RECEPTIVE_FIELD, MAX_RECURRENT_LAYERS, MAX_WAVENET_LAYERS, MIN_RATE)
from .exporter import CREDIT_KEYS, LAYER_NAME
from .modules import (ACTIVATIONS, GRU, LSTM, Activation, CausalConv1d, Effect, FiLM, Gated, Linear, TCNBlock,
                      WaveNet, _activation_object, control_spec)


def read(source):
    """(effect description dict, {tensor name: (dtype code, float32 numpy array)}) from a path or bytes."""
    meta, tensors = container.read(source)
    if "earshot.effect" not in meta:
        raise FormatError("__metadata__ has no 'earshot.effect' entry: not an earshot effect file")
    try:
        desc = json.loads(meta["earshot.effect"])
    except (TypeError, ValueError) as e:
        raise FormatError(f"effect description: invalid JSON: {e}") from None
    except RecursionError:  # Python's parser recurses per level; the core's is iterative
        raise FormatError("effect description: invalid JSON: nested too deeply for this reader") from None
    if not isinstance(desc, dict):
        raise FormatError("__metadata__.earshot.effect is not a JSON object")
    return desc, tensors


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


def _film_args(name, f):
    hidden = f.get("hidden", [])
    if (not isinstance(hidden, list) or len(hidden) > MAX_FILM_HIDDEN
            or not all(isinstance(h, int) and not isinstance(h, bool) and 1 <= h <= MAX_CHANNELS for h in hidden)):
        raise FormatError(f"layer {name!r}: film hidden must be a list of 0 .. {MAX_FILM_HIDDEN} widths of "
                          f"1 .. {MAX_CHANNELS}, got {hidden!r}")
    act = f.get("activation", "relu")
    if act not in ACTIVATIONS:
        raise FormatError(f"layer {name!r}: film activation {act!r} is not one of {', '.join(ACTIVATIONS)}")
    extra = {}
    for key, default in (("slope", 0.01), ("min", -1.0), ("max", 1.0)):
        v = f.get(key, default)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise FormatError(f"layer {name!r}: film field {key!r} must be a finite number, got {v!r}")
        extra[key] = float(v)
    if act == "hardtanh" and not extra["min"] < extra["max"]:
        raise FormatError(f"layer {name!r}: film hardtanh needs min < max")
    return hidden, act, extra


def build_layer(layer, width, n_controls):
    """(module, output width) for one layer object."""
    name, kind = layer.get("name"), layer.get("type")
    key = "channels" if kind in ("activation", "gated", "film") else "in"
    declared = layer.get(key)
    if declared != width:
        raise FormatError(f"layer {name!r}: field {key!r} is {declared!r} but the previous stage gives "
                          f"{width} channels")
    if kind == "linear":
        out = _int(layer, "out")
        return Linear(width, out, bias=_bool(layer, "bias", True)), out
    if kind == "conv1d":
        out = _int(layer, "out")
        return CausalConv1d(width, out, _int(layer, "kernel", hi=MAX_KERNEL),
                            _int(layer, "dilation", hi=MAX_DILATION, default=1), _bool(layer, "bias", True)), out
    if kind in ("lstm", "gru"):
        h = _int(layer, "hidden")
        cls = LSTM if kind == "lstm" else GRU
        return cls(width, h, _int(layer, "num_layers", 1, MAX_RECURRENT_LAYERS, 1), _bool(layer, "bias", True)), h
    if kind == "activation":
        fn = layer.get("fn")
        if fn not in ACTIVATIONS:
            raise FormatError(f"layer {name!r}: fn {fn!r} is not one of {', '.join(ACTIVATIONS)}")
        for key in ("slope", "min", "max"):
            v = layer.get(key, 0.0)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise FormatError(f"layer {name!r}: field {key!r} must be a finite number, got {v!r}")
        try:
            return Activation(width, fn, layer.get("slope", 0.01), layer.get("min", -1.0),
                              layer.get("max", 1.0)), width
        except ValueError as e:
            raise FormatError(f"layer {name!r}: {e}") from None
    if kind == "gated":
        if width % 2:
            raise FormatError(f"layer {name!r}: gated needs an even channel count, got {width}")
        return Gated(width), width // 2
    if kind == "film":
        if n_controls < 1:
            raise FormatError(f"layer {name!r}: film needs at least one control")
        hidden, act, extra = _film_args(name, layer)
        try:
            return FiLM(width, n_controls, hidden, act, extra["slope"], extra["min"], extra["max"]), width
        except ValueError as e:
            raise FormatError(f"layer {name!r}: {e}") from None
    if kind == "wavenet":
        c, s = _int(layer, "channels"), _int(layer, "skip")
        dil = layer.get("dilations")
        if (not isinstance(dil, list) or not 1 <= len(dil) <= MAX_WAVENET_LAYERS
                or not all(isinstance(d, int) and not isinstance(d, bool) and 1 <= d <= MAX_DILATION for d in dil)):
            raise FormatError(f"layer {name!r}: dilations must be a list of 1 .. {MAX_WAVENET_LAYERS} integers "
                              f"of 1 .. {MAX_DILATION}")
        return WaveNet(width, c, s, _int(layer, "kernel", hi=MAX_KERNEL), dil, _bool(layer, "bias", True)), s
    if kind == "tcn":
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
            for key in ("slope", "min", "max"):
                v = a.get(key, 0.0)
                if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                    raise ValueError(f"activation field {key!r} must be a finite number, got {v!r}")
            # keys the format does not define are ignored, as the core does
            act = _activation_object({k: v for k, v in a.items() if k in ("fn", "slope", "min", "max")})
        except ValueError as e:
            raise FormatError(f"layer {name!r}: {e}") from None
        return TCNBlock(width, out, _int(layer, "kernel", hi=MAX_KERNEL),
                        _int(layer, "dilation", hi=MAX_DILATION, default=1),
                        _bool(layer, "bias", True), act, film, n_controls,
                        _bool(layer, "residual", True)), out
    raise FormatError(f"layer {name!r}: unknown type {kind!r}")


def _check_desc(desc):
    if desc.get("format") != "earshot-effect":
        raise FormatError(f"format is {desc.get('format')!r}, expected 'earshot-effect'")
    v = desc.get("version")
    if isinstance(v, bool) or not isinstance(v, int) or v < 1:
        raise FormatError(f"version {v!r} is not a positive integer")
    if v > 1:
        raise FormatError(f"version {v} is too new (this loader reads version 1)")
    rate = desc.get("sample_rate")
    if isinstance(rate, bool) or not isinstance(rate, (int, float)) or not math.isfinite(rate) \
            or not MIN_RATE <= rate <= MAX_RATE:
        raise FormatError(f"sample_rate {rate!r} is outside {MIN_RATE} .. {MAX_RATE} Hz")
    if rate != int(rate):
        raise FormatError(f"sample_rate {rate!r} must be a whole number of Hz")
    ctl = desc.get("controls", [])
    if not isinstance(ctl, list) or len(ctl) > MAX_CONTROLS:
        raise FormatError(f"controls must be an array of at most {MAX_CONTROLS} controls")
    credits = desc.get("credits")
    if not isinstance(credits, dict) or not isinstance(credits.get("title"), str):
        raise FormatError("credits.title is required")
    for k, val in credits.items():
        if k not in CREDIT_KEYS:
            continue  # the core ignores keys the format does not define
        items = val if k == "authors" else [val]
        if k == "authors" and not isinstance(val, list):
            raise FormatError("credits.authors must be an array of strings")
        if not all(isinstance(x, str) and len(x) <= 1000 for x in items):
            raise FormatError(f"credits.{k} must hold strings of at most 1000 characters")
    g = desc.get("graph")
    if not isinstance(g, dict):
        raise FormatError("graph is missing")
    layers = g.get("layers")
    if not isinstance(layers, list) or not 1 <= len(layers) <= MAX_LAYERS:
        raise FormatError(f"graph.layers must be an array of 1 .. {MAX_LAYERS} layers")
    if not isinstance(g.get("input_skip", False), bool):
        raise FormatError("graph.input_skip must be true or false")


def load(source):
    """Rebuilds the Effect stored at `source` (path or bytes), in eval mode.

    The Effect carries sample_rate, controls and credits from the file, and
    `weight_dtypes` ({tensor name: "F32" | "F16"}); F16 weights arrive as the
    float32 values the core converts them to.
    """
    desc, tensors = read(source)
    _check_desc(desc)
    seen_controls = set()
    for i, c in enumerate(desc.get("controls", [])):
        if not isinstance(c, dict):
            raise FormatError(f"controls[{i}]: must be an object")
        for k in ("name", "min", "max", "default"):
            if k not in c:
                raise FormatError(f"controls[{i}]: field {k!r} is missing")
        for k in ("min", "max", "default", "smoothing_ms"):
            v = c.get(k, 0)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise FormatError(f"control {c['name']!r}: field {k!r} must be a finite number")
        if c["name"] in seen_controls:
            raise FormatError(f"control {c['name']!r}: name used twice")
        seen_controls.add(c["name"])
    try:
        specs = [control_spec(c) for c in desc.get("controls", [])]
    except ValueError as e:
        raise FormatError(f"controls: {e}") from None
    g = desc["graph"]
    inputs = g.get("inputs")
    if isinstance(inputs, list) and not all(isinstance(n, str) for n in inputs):
        raise FormatError("graph: 'inputs' entries must be strings")
    if not isinstance(inputs, list) or inputs.count("audio") != 1:
        raise FormatError("graph.inputs must be an array holding 'audio' once")
    names, mods, width, seen, receptive = [], [], len(inputs), set(), 1
    for layer in g["layers"]:
        if not isinstance(layer, dict):
            raise FormatError(f"layer {len(names)}: must be an object")
        name = layer.get("name")
        if not isinstance(name, str) or not LAYER_NAME.match(name):
            raise FormatError(f"layer {len(names)}: field 'name' {name!r} must be 1 to 64 characters of "
                              "[A-Za-z0-9_.]")
        if name in seen:
            raise FormatError(f"layer {name!r}: name used twice")
        seen.add(name)
        m, width = build_layer(layer, width, len(specs))
        kind = layer.get("type")
        if kind in ("conv1d", "tcn"):
            receptive += (layer["kernel"] - 1) * layer.get("dilation", 1)
        elif kind == "wavenet":
            receptive += sum((layer["kernel"] - 1) * d for d in layer["dilations"])
        if receptive > MAX_RECEPTIVE_FIELD:
            raise FormatError(f"layer {name!r}: receptive field exceeds {MAX_RECEPTIVE_FIELD} samples")
        names.append(name)
        mods.append(m)
    if width != 1:
        raise FormatError(f"the last layer ({names[-1]!r}) gives {width} channels; it must give exactly 1")
    try:
        effect = Effect(dict(zip(names, mods)), inputs=inputs, controls=specs,
                        input_skip=g.get("input_skip", False), sample_rate=desc["sample_rate"],
                        credits={k: v for k, v in desc["credits"].items() if k in CREDIT_KEYS})
    except ValueError as e:
        raise FormatError(f"graph: {e}") from None
    wanted = {}
    for name, m in zip(names, mods):
        for pname, p in m.named_parameters():
            wanted[f"{name}.{pname}"] = p
    missing = [n for n in wanted if n not in tensors]
    extra = [n for n in tensors if n not in wanted]
    if missing:
        raise FormatError(f"tensor {missing[0]!r} is missing" + (f" (and {len(missing) - 1} more)" if len(missing) > 1 else ""))
    if extra:
        raise FormatError(f"tensor {extra[0]!r} is not used by the graph" + (f" (and {len(extra) - 1} more)" if len(extra) > 1 else ""))
    with torch.no_grad():
        for n, p in wanted.items():
            arr = tensors[n][1]
            if list(arr.shape) != list(p.shape):
                raise FormatError(f"tensor {n!r}: shape {list(arr.shape)}, the graph needs {list(p.shape)}")
            p.copy_(torch.from_numpy(arr.copy()))
    effect.weight_dtypes = {n: tensors[n][0] for n in tensors}
    effect.description = desc
    return effect.eval()
