"""earshot: PyTorch reference modules, exporter and loader for earshot effect files.

Every module computes what the native core computes for the layer of the same
name in dsp/FORMAT.md; parameter names and shapes equal the file's tensors.
All layer modules are channels-last: [batch, time, channels].

Building and training
---------------------
    import torch, earshot
    model = earshot.models.recurrent("lstm", hidden=16, controls=[
        {"name": "drive", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20}])
    y = model(audio, controls)       # audio [B, T]; controls [B, T, 1] or [B, 1]
    # truncated backpropagation: y, state = model(x, c, state=state, return_state=True)

or by hand:
    model = earshot.Effect({"rnn": earshot.LSTM(2, 16), "head": earshot.Linear(16, 1)},
                           inputs=["audio", "drive"], input_skip=True)

Layer modules (earshot.modules; one per row of earshot.layer_types): Linear, CausalConv1d(in, out, kernel, dilation, bias),
LSTM(in, hidden, num_layers, bias) and GRU (batch_first, forward returns the
output), Activation(channels, fn, slope, min, max) with fn in tanh, sigmoid,
relu, leaky_relu, softsign, hardtanh, Gated(2C), FiLM(channels, n_controls,
hidden, activation), WaveNet(in, channels, skip, kernel, dilations, bias),
TCNBlock(in, out, kernel, dilation, bias, activation, film, n_controls,
residual). torch's own nn.Linear, nn.Conv1d (padding=0, run causally), nn.LSTM,
nn.GRU, nn.Tanh/Sigmoid/ReLU/LeakyReLU/Softsign/Hardtanh and nn.Sequential of
them are accepted in an Effect and export too.

Families (earshot.models): recurrent(...), wavenet(...), tcn(...).

Controls: smooth_controls(n, sample_rate, initial, events, smoothing_ms) gives
the per-sample trajectory the core produces for earshot_set_control events.

Files
-----
    earshot.export(model, "fx.nfx", sample_rate=48000, controls=[...],
                   credits={"title": "..."}, dtype="f32")   # or "f16"
    model = earshot.load("fx.nfx")      # an Effect, weights as stored (f16 -> f32)
    python3 -m earshot export ... / info ... (see python3 -m earshot --help)
"""

from .modules import *  # noqa: F401,F403 (the names in modules.__all__)
from . import models

__version__ = "0.1.0"


def export(model, path, **kw):
    """Writes `model` to an effect file; see earshot.exporter.export."""
    from .exporter import export as _export
    return _export(model, path, **kw)


def load(path):
    """Rebuilds the Effect stored in an effect file; see earshot.loader.load."""
    from .loader import load as _load
    return _load(path)
