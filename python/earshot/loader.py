"""Effect file -> earshot.Effect of reference modules (the exporter's inverse).

Checks the effect description against dsp/FORMAT.md as it goes; every
rejection is a container.FormatError naming the field or tensor at fault.
"""

import json
import math

import torch

from . import container
from .container import FormatError
from .exporter import CREDIT_KEYS, LAYER_NAME
from .layer_types import LAYER_TYPES, layer_figures
from .limits import MAX_CONTROLS, MAX_LAYERS, MAX_RATE, MAX_RECEPTIVE_FIELD, MIN_RATE
from .modules import Effect, control_spec


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


def build_layer(layer, width, n_controls):
    """(module, output width) for one layer object: its type's load (layer_types.py)."""
    name, kind = layer.get("name"), layer.get("type")
    t = LAYER_TYPES.get(kind)
    declared = layer.get(t.width_key if t else "in")
    if declared != width:
        raise FormatError(f"layer {name!r}: field {t.width_key if t else 'in'!r} is {declared!r} but the previous "
                          f"stage gives {width} channels")
    if t is None:
        raise FormatError(f"layer {name!r}: unknown type {kind!r}")
    return t.load(layer, width, n_controls)


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
        receptive += layer_figures(layer)[1]
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
