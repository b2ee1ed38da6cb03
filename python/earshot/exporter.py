"""PyTorch model -> earshot effect file (dsp/FORMAT.md, version 1).

The exporter walks the Effect's layers in order, turns each into its layer
object and tensors, checks the widths chain, and writes the safetensors
container with the effect description under __metadata__["earshot.effect"].
What it cannot express exactly it refuses with ExportError naming the module
path and type; it never approximates.

Tensor order in the file: layer by layer in graph order; inside a layer,
  linear/conv1d: weight, bias;
  lstm/gru: per layer l: weight_ih_l, weight_hh_l, bias_ih_l, bias_hh_l;
  film: mlp.0.weight, mlp.0.bias, mlp.1.weight, ...;
  wavenet: input.weight, input.bias, then per layer l: conv.weight, conv.bias,
    res.weight, res.bias, skip.weight, skip.bias;
  tcn: conv.weight, conv.bias, film.mlp.{j}..., res.weight.
"""

import json
import math
import re

import numpy as np
import torch
import torch.nn as nn

from . import container
from .limits import (MAX_CHANNELS, MAX_CONTROLS, MAX_DILATION, MAX_FILM_HIDDEN, MAX_KERNEL, MAX_LAYERS,
                     MAX_RATE, MAX_RECEPTIVE_FIELD, MAX_RECURRENT_LAYERS, MAX_WAVENET_LAYERS, MIN_RATE)
from .modules import (ACTIVATIONS, GRU, LSTM, Activation, CausalConv1d, Effect, FiLM, Gated, Linear,
                      TCNBlock, WaveNet, control_spec)

FORMAT_VERSION = 1
LAYER_NAME = re.compile(r"^[A-Za-z0-9_.]{1,64}$")
CREDIT_KEYS = ("title", "authors", "paper", "code", "licence")


class ExportError(ValueError):
    """The model holds something the effect format cannot express exactly."""


def _where(path, module):
    return f"{path} ({type(module).__module__}.{type(module).__qualname__})"


def _arr(t):
    return t.detach().to("cpu", torch.float32).contiguous().numpy()


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


def _rnn(path, m, kind, width):
    if m.bidirectional:
        raise ExportError(f"{_where(path, m)}: a bidirectional {kind.upper()} is not causal and cannot be exported")
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


def describe_layer(path, m, width, n_controls):
    """(layer object without name, [(param, tensor)], output width) for one module."""
    if isinstance(m, (nn.LSTM, nn.GRU)):
        if type(m) not in (nn.LSTM, nn.GRU, LSTM, GRU):
            raise ExportError(f"{_where(path, m)}: a subclass of nn.LSTM/nn.GRU may compute something else; "
                              "use nn.LSTM, nn.GRU, earshot.LSTM or earshot.GRU")
        return _rnn(path, m, "lstm" if isinstance(m, nn.LSTM) else "gru", width)
    if isinstance(m, nn.RNNBase):
        raise ExportError(f"{_where(path, m)}: only LSTM and GRU recurrences are supported")
    if isinstance(m, nn.Linear):
        if type(m) not in (nn.Linear, Linear):
            raise ExportError(f"{_where(path, m)}: a subclass of nn.Linear may compute something else")
        _check_width(path, m, m.in_features, width)
        _check_channels(path, m, "out", m.out_features)
        tensors = [("weight", m.weight)] + ([("bias", m.bias)] if m.bias is not None else [])
        return ({"type": "linear", "in": m.in_features, "out": m.out_features, "bias": m.bias is not None},
                tensors, m.out_features)
    if isinstance(m, nn.Conv1d):
        if type(m) not in (nn.Conv1d, CausalConv1d):
            raise ExportError(f"{_where(path, m)}: a subclass of nn.Conv1d may compute something else")
        _conv_checks(path, m)
        _check_width(path, m, m.in_channels, width)
        _check_channels(path, m, "out", m.out_channels)
        _check_kernel(path, m, m.kernel_size[0], [m.dilation[0]])
        tensors = [("weight", m.weight)] + ([("bias", m.bias)] if m.bias is not None else [])
        return ({"type": "conv1d", "in": m.in_channels, "out": m.out_channels, "kernel": m.kernel_size[0],
                 "dilation": m.dilation[0], "bias": m.bias is not None}, tensors, m.out_channels)
    act = _activation_of(m)
    if act is not None:
        fn, extra = act
        for k, v in extra.items():
            if not math.isfinite(v):
                raise ExportError(f"{_where(path, m)}: {fn} {k} {v} is not finite")
        if fn == "hardtanh" and not extra["min"] < extra["max"]:
            raise ExportError(f"{_where(path, m)}: hardtanh needs min < max")
        return dict({"type": "activation", "channels": width, "fn": fn}, **extra), [], width
    if isinstance(m, Gated):
        _check_width(path, m, m.channels, width)
        return {"type": "gated", "channels": m.channels}, [], m.channels // 2
    if isinstance(m, FiLM):
        _check_width(path, m, m.channels, width)
        fields, tensors = _film_fields(path, m, n_controls)
        return dict({"type": "film", "channels": m.channels}, **fields), tensors, width
    if isinstance(m, WaveNet):
        _check_width(path, m, m.in_channels, width)
        if not 1 <= len(m.dilations) <= MAX_WAVENET_LAYERS:
            raise ExportError(f"{_where(path, m)}: {len(m.dilations)} dilations, needs 1 .. {MAX_WAVENET_LAYERS} "
                              "(kMaxWavenetLayers)")
        _check_channels(path, m, "channels", m.channels)
        _check_channels(path, m, "skip", m.skip_channels)
        _check_kernel(path, m, m.kernel, m.dilations)
        b = m.bias
        t = [("input.weight", m.input.weight)] + ([("input.bias", m.input.bias)] if b else [])
        for l, layer in enumerate(m.layers):
            for part in ("conv", "res", "skip"):
                conv = getattr(layer, part)
                t.append((f"layers.{l}.{part}.weight", conv.weight))
                if b:
                    t.append((f"layers.{l}.{part}.bias", conv.bias))
        return ({"type": "wavenet", "in": m.in_channels, "channels": m.channels, "skip": m.skip_channels,
                 "kernel": m.kernel, "dilations": list(m.dilations), "bias": bool(b)}, t, m.skip_channels)
    if isinstance(m, TCNBlock):
        _check_width(path, m, m.in_channels, width)
        conv = m.conv
        _check_channels(path, m, "out", m.out_channels)
        _check_kernel(path, m, conv.kernel_size[0], [conv.dilation[0]])
        t = [("conv.weight", conv.weight)] + ([("conv.bias", conv.bias)] if conv.bias is not None else [])
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
    raise ExportError(f"{_where(path, m)}: this module type cannot be exported; earshot exports "
                      "Linear, Conv1d, LSTM, GRU, activations (tanh, sigmoid, relu, leaky_relu, softsign, "
                      "hardtanh), Gated, FiLM, WaveNet, TCNBlock and nn.Sequential of them")


def _flatten(names, modules, paths):
    """Expands nn.Sequential into its children (names name.0, name.1, ...); drops Dropout/Identity
    (exact at inference)."""
    out = []
    for name, m, path in zip(names, modules, paths):
        if isinstance(m, nn.Sequential):
            sub = list(m._modules.items())
            out += _flatten([f"{name}.{k}" for k, _ in sub], [s for _, s in sub], [f"{path}.{k}" for k, _ in sub])
        elif isinstance(m, (nn.Dropout, nn.Identity)):
            continue
        else:
            out.append((name, m, path))
    return out


def _as_effect(model, controls, input_skip, inputs):
    if isinstance(model, Effect):
        if input_skip is not None and bool(input_skip) != model.input_skip:
            raise ExportError(f"input_skip={input_skip} contradicts the Effect's input_skip={model.input_skip}")
        if inputs is not None and list(inputs) != model.inputs:
            raise ExportError(f"inputs={list(inputs)} contradicts the Effect's inputs={model.inputs}")
        return model
    if not isinstance(model, nn.Module):
        raise ExportError(f"export needs a torch.nn.Module, got {type(model).__name__}")
    specs = [control_spec(c) for c in (controls or [])]
    if inputs is None:
        inputs = ["audio"] + [c["name"] for c in specs]
    layers = list(model) if isinstance(model, (nn.Sequential, nn.ModuleList)) else [model]
    return Effect(layers, inputs=inputs, controls=specs, input_skip=bool(input_skip))


def _credits(credits, default_title):
    c = dict(credits or {})
    unknown = set(c) - set(CREDIT_KEYS)
    if unknown:
        raise ExportError(f"credits: unknown field(s) {sorted(unknown)}; known: {', '.join(CREDIT_KEYS)}")
    c.setdefault("title", default_title)
    out = {}
    for k in CREDIT_KEYS:
        if k not in c or c[k] is None:
            continue
        v = c[k]
        if k == "authors":
            if isinstance(v, str):
                v = [v]
            if not all(isinstance(a, str) and len(a) <= 1000 for a in v):
                raise ExportError("credits.authors must be a list of strings of at most 1000 characters")
            v = list(v)
        elif not isinstance(v, str) or len(v) > 1000 or (k == "title" and not v):
            raise ExportError(f"credits.{k} must be a string of {'1' if k == 'title' else '0'} .. 1000 characters")
        out[k] = v
    return out


def build(model, sample_rate=None, controls=None, credits=None, dtype="f32", input_skip=None, inputs=None,
          default_title="effect"):
    """(effect description dict, [(tensor name, numpy array)]) without writing anything."""
    if dtype not in ("f32", "f16"):
        raise ExportError(f"dtype must be 'f32' or 'f16', got {dtype!r}")
    effect = _as_effect(model, controls, input_skip, inputs)
    specs = effect.controls
    if controls is not None:
        specs = [control_spec(c) for c in controls]
        if [c["name"] for c in specs] != effect.control_names:
            raise ExportError(f"controls {[c['name'] for c in specs]} do not match the Effect's "
                              f"controls {effect.control_names} (same names, same order)")
    if len(specs) > MAX_CONTROLS:
        raise ExportError(f"{len(specs)} controls, at most {MAX_CONTROLS} (kMaxControls)")
    rate = sample_rate if sample_rate is not None else effect.sample_rate
    if rate is None:
        raise ExportError("sample_rate is required (the rate the model was trained at)")
    if not isinstance(rate, (int, float)) or not math.isfinite(rate) or not MIN_RATE <= rate <= MAX_RATE:
        raise ExportError(f"sample_rate {rate!r} is outside {MIN_RATE} .. {MAX_RATE} Hz")
    if not float(rate).is_integer():
        raise ExportError(f"sample_rate {rate!r} must be a whole number of Hz (the core refuses fractions)")
    rate = int(rate)

    names = list(effect.layer_names)
    flat = _flatten(names, list(effect.layers), [f"layers.{i}" for i in range(len(names))])
    if not 1 <= len(flat) <= MAX_LAYERS:
        raise ExportError(f"{len(flat)} layers, needs 1 .. {MAX_LAYERS} (kMaxLayers)")
    receptive = 1
    width, layers, tensors, seen = len(effect.inputs), [], [], set()
    for name, m, path in flat:
        if not LAYER_NAME.match(name):
            raise ExportError(f"{path}: layer name {name!r} needs 1 to 64 characters of [A-Za-z0-9_.]")
        if name in seen:
            raise ExportError(f"{path}: layer name {name!r} is used twice")
        seen.add(name)
        layer, ts, width = describe_layer(path, m, width, len(specs))
        kind = layer["type"]
        if kind in ("conv1d", "tcn"):
            receptive += (layer["kernel"] - 1) * layer["dilation"]
        elif kind == "wavenet":
            receptive += sum((layer["kernel"] - 1) * d for d in layer["dilations"])
        if receptive > MAX_RECEPTIVE_FIELD:
            raise ExportError(f"{path}: receptive field {receptive} samples exceeds {MAX_RECEPTIVE_FIELD} "
                              "(kMaxReceptiveField)")
        layers.append(dict({"type": layer.pop("type"), "name": name}, **layer))
        for pname, t in ts:
            a = _arr(t)
            tname = f"{name}.{pname}"
            if not np.all(np.isfinite(a)):
                raise ExportError(f"{path}: tensor {tname} holds a non-finite value")
            if a.ndim > 4 or any(d > container.MAX_DIM for d in a.shape):
                raise ExportError(f"{path}: tensor {tname} shape {list(a.shape)} exceeds the format's limits")
            if dtype == "f16":
                with np.errstate(over="ignore"):
                    h = a.astype(np.float16)
                if not np.all(np.isfinite(h)):
                    raise ExportError(f"{path}: tensor {tname} overflows float16 (|w| > 65504); export as f32")
                a = h
            tensors.append((tname, a))
    if width != 1:
        raise ExportError(f"the last layer ({flat[-1][2]}) gives {width} channels; it must give exactly 1")
    total = sum(a.size for _, a in tensors)
    if total > container.MAX_PARAMS:
        raise ExportError(f"{total} parameters, over the format's limit of {container.MAX_PARAMS}")
    desc = {
        "format": "earshot-effect",
        "version": FORMAT_VERSION,
        "sample_rate": rate,
        "controls": specs,
        "credits": _credits(credits if credits is not None else effect.credits, default_title),
        "graph": {"inputs": list(effect.inputs), "layers": layers, "input_skip": effect.input_skip},
    }
    return desc, tensors


def export(model, path, sample_rate=None, controls=None, credits=None, dtype="f32", input_skip=None,
           inputs=None):
    """Writes `model` to the effect file `path` and returns its effect description.

    model: an earshot.Effect, or an nn.Sequential / single module of supported
      layers (then `inputs` defaults to ["audio", *control names] and
      `input_skip` to False).
    sample_rate: training rate in Hz (default: model.sample_rate).
    controls: control dicts {name, unit, min, max, default, smoothing_ms} or names
      (default: the Effect's); names and order must match the Effect's.
    credits: {title, authors, paper, code, licence}; title defaults to the file name.
    dtype: "f32" or "f16" weights.
    """
    import os
    stem = os.path.splitext(os.path.basename(str(path)))[0] or "effect"
    desc, tensors = build(model, sample_rate, controls, credits, dtype, input_skip, inputs, stem)
    # allow_nan=False: a NaN or infinity anywhere would write JSON no reader accepts.
    try:
        meta = {"earshot.effect": json.dumps(desc, separators=(",", ":"), allow_nan=False)}
    except ValueError as e:
        raise ExportError(f"effect description holds a non-finite number: {e}") from None
    container.write(path, tensors, meta)
    return desc
