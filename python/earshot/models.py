"""Ready-made effects for the three published families the core supports.

Each returns an `Effect` of earshot reference modules, untrained (PyTorch's
default initialisation), ready to train and to export.
"""

from .modules import LSTM, GRU, Linear, WaveNet, TCNBlock, Activation, Effect, control_spec


def recurrent(cell="lstm", hidden=16, num_layers=1, controls=(), input_skip=True, **effect_kw):
    """Recurrent network with a linear head and an input skip (Wright et al. 2019, 2020).

    inputs = ["audio", *controls] (controls concatenated to the audio sample).
    Layers: rnn (LSTM or GRU, `hidden` units, `num_layers`), head (Linear hidden -> 1).
    """
    specs = [control_spec(c) for c in controls]
    inputs = ["audio"] + [c["name"] for c in specs]
    cls = {"lstm": LSTM, "gru": GRU}.get(cell)
    if cls is None:
        raise ValueError(f"cell must be 'lstm' or 'gru', got {cell!r}")
    layers = {"rnn": cls(len(inputs), hidden, num_layers), "head": Linear(hidden, 1)}
    return Effect(layers, inputs=inputs, controls=specs, input_skip=input_skip, **effect_kw)


def wavenet(channels=16, dilations=(1, 2, 4, 8, 16, 32, 64, 128, 256, 512), kernel=3, skip=None,
            head=(), head_activation="tanh", controls=(), input_skip=False, **effect_kw):
    """Feed-forward gated residual stack (Damskägg et al. 2019).

    inputs = ["audio", *controls]. Layers: stack (WaveNet, skip channels default
    = channels), then the 1x1 mixing: Linear layers through the widths in `head`
    with `head_activation` between them, ending in Linear(..., 1).
    """
    specs = [control_spec(c) for c in controls]
    inputs = ["audio"] + [c["name"] for c in specs]
    skip = channels if skip is None else skip
    layers = {"stack": WaveNet(len(inputs), channels, skip, kernel, dilations)}
    width = skip
    for j, w in enumerate(head):
        layers[f"mix{j}"] = Linear(width, w)
        layers[f"mix{j}_act"] = Activation(w, head_activation)
        width = w
    layers["out"] = Linear(width, 1)
    return Effect(layers, inputs=inputs, controls=specs, input_skip=input_skip, **effect_kw)


def tcn(controls, channels=16, kernel=5, dilations=(1, 4, 16, 64), film_hidden=(16, 16),
        film_activation="relu", activation=None, input_skip=False, **effect_kw):
    """Temporal convolutional network conditioned by FiLM on the controls
    (Steinmetz & Reiss 2022).

    inputs = ["audio"]; every block is conv -> FiLM(controls) -> activation
    (default leaky ReLU, slope 0.2) + residual; then Linear(channels, 1).
    """
    specs = [control_spec(c) for c in controls]
    if not specs:
        raise ValueError("tcn() conditions on controls through FiLM: give at least one control")
    film = {"hidden": list(film_hidden), "activation": film_activation}
    layers = {}
    width = 1
    for j, d in enumerate(dilations):
        layers[f"block{j}"] = TCNBlock(width, channels, kernel, d, activation=activation, film=film,
                                       n_controls=len(specs))
        width = channels
    layers["out"] = Linear(width, 1)
    return Effect(layers, inputs=["audio"], controls=specs, input_skip=input_skip, **effect_kw)
