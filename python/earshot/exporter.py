"""PyTorch model -> earshot effect file (dsp/FORMAT.md, version 1).

The exporter walks the Effect's layers in order, turns each into its layer
object and tensors by its type's row of layer_types.py, checks the widths chain, and writes the safetensors
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
from .layer_types import LAYER_TYPES, ExportError, _where, layer_figures, type_of_module
from .limits import MAX_CONTROLS, MAX_LAYERS, MAX_RATE, MAX_RECEPTIVE_FIELD, MIN_RATE
from .modules import Effect, control_spec

FORMAT_VERSION = 1
LAYER_NAME = re.compile(r"^[A-Za-z0-9_.]{1,64}$")
CREDIT_KEYS = ("title", "authors", "paper", "code", "licence")


def _arr(t):
    return t.detach().to("cpu", torch.float32).contiguous().numpy()


def describe_layer(path, m, width, n_controls):
    """(layer object without name, [(param, tensor)], output width) for one module: its type's
    export (layer_types.py)."""
    t = type_of_module(m)
    if t is not None:
        return t.export(path, m, width, n_controls)
    if isinstance(m, nn.RNNBase):
        raise ExportError(f"{_where(path, m)}: only LSTM and GRU recurrences are supported")
    raise ExportError(f"{_where(path, m)}: this module type cannot be exported; earshot exports "
                      f"{', '.join(t.modules for t in LAYER_TYPES.values())} and nn.Sequential of them")


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
    if not isinstance(model, (nn.Sequential, nn.ModuleList)) and type_of_module(model) is None:
        # A researcher's own module, as written: traced (trace.py).
        from .trace import trace
        effect, _ = trace(model, controls)
        if input_skip is not None and bool(input_skip) != effect.input_skip:
            raise ExportError(f"input_skip={input_skip} contradicts the traced forward "
                              f"({'adds' if effect.input_skip else 'does not add'} the input to the output)")
        if inputs is not None and list(inputs) != effect.inputs:
            raise ExportError(f"inputs={list(inputs)} contradicts the traced forward's inputs {effect.inputs}")
        return effect
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
        receptive += layer_figures(layer)[1]
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
