"""The table of layer types on the Python side: one row per type of the core's
table (dsp/layers/registry.hpp, same names in the same order; test_corpus.py
checks that), with the figures dsp/FORMAT.md defines for it: multiply-adds per
sample, the receptive field it adds (samples), and whether it is recurrent.
"""


def _recurrent_madds(layer, gates):
    h, x, madds = layer["hidden"], layer["in"], 0
    for _ in range(layer.get("num_layers", 1)):
        madds += gates * h * (x + h)
        x = h
    return madds


def _wavenet_madds(layer):
    c, s, k = layer["channels"], layer["skip"], layer["kernel"]
    return c * layer["in"] + len(layer["dilations"]) * (2 * c * c * k + c * c + s * c)


def _tcn_madds(layer):
    m = layer["out"] * layer["in"] * layer["kernel"]
    if layer.get("residual", True) and layer["in"] != layer["out"]:
        m += layer["out"] * layer["in"]
    return m


def _conv_field(layer):
    return (layer["kernel"] - 1) * layer.get("dilation", 1)


def _none(layer):
    return 0


# name: (multiply-adds per sample, receptive field added, recurrent)
LAYER_TYPES = {
    "linear": (lambda l: l["out"] * l["in"], _none, False),
    "conv1d": (lambda l: l["out"] * l["in"] * l["kernel"], _conv_field, False),
    "lstm": (lambda l: _recurrent_madds(l, 4), _none, True),
    "gru": (lambda l: _recurrent_madds(l, 3), _none, True),
    "activation": (_none, _none, False),
    "gated": (_none, _none, False),
    "film": (_none, _none, False),
    "wavenet": (_wavenet_madds, lambda l: sum((l["kernel"] - 1) * d for d in l["dilations"]), False),
    "tcn": (_tcn_madds, _conv_field, False),
}


def layer_figures(layer):
    """(multiply-adds per sample, receptive field added, recurrent) of one layer object;
    ValueError naming the type when the table has no such type."""
    row = LAYER_TYPES.get(layer.get("type"))
    if row is None:
        raise ValueError(f"layer {layer.get('name', '?')!r}: unknown layer type {layer.get('type')!r} "
                         f"({', '.join(LAYER_TYPES)})")
    madds, field, recurrent = row
    return madds(layer), field(layer), recurrent
