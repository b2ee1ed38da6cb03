"""Writes the effect files the WebAssembly parity tests run (untrained, seeded).

    /usr/bin/python3 tests/node/make_effects.py OUT_DIR

One file per layer family the core supports, with odd sizes so vector loops
meet their scalar tails: LSTM, multi-layer LSTM, GRU, WaveNet stack, TCN with
FiLM, a conv1d/activation/FiLM chain, and an F16 copy. Weights are PyTorch's
default initialisation scaled up a little so the nonlinearities are exercised.
Run by tests/node/effects.mjs when the files are missing or older than this script.
"""

import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "..", "python"))

import torch  # noqa: E402

import earshot  # noqa: E402
from earshot import models  # noqa: E402
from earshot.modules import Activation, CausalConv1d, Effect, FiLM, Linear  # noqa: E402

DRIVE = {"name": "drive", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20}
TONE = {"name": "tone", "unit": "dB", "min": -12, "max": 12, "default": 0, "smoothing_ms": 5}
LEVEL = {"name": "level", "min": 0, "max": 2, "default": 1, "smoothing_ms": 0}


def scaled(model, gain):
    with torch.no_grad():
        for p in model.parameters():
            p.mul_(gain)
    return model


def effects():
    torch.manual_seed(20240601)
    yield "lstm16", models.recurrent("lstm", hidden=16, controls=[DRIVE]), {}
    yield "lstm3x5", models.recurrent("lstm", hidden=5, num_layers=3, controls=[DRIVE, TONE]), {}
    yield "gru2x7", models.recurrent("gru", hidden=7, num_layers=2, controls=[]), {}
    yield "wavenet", models.wavenet(channels=6, dilations=(1, 2, 4, 8, 16, 32), kernel=3, skip=5,
                                    head=(3,), controls=[DRIVE]), {}
    yield "tcn_film", models.tcn([DRIVE, TONE, LEVEL], channels=5, kernel=3, dilations=(1, 3, 9),
                                 film_hidden=(7,)), {}
    chain = Effect({"conv": CausalConv1d(2, 9, 4, 2), "act": Activation(9, "softsign"),
                    "film": FiLM(9, 1, hidden=(3,), activation="tanh"),
                    "lin": Linear(9, 3), "act2": Activation(3, "hardtanh", min=-0.5, max=0.8),
                    "out": Linear(3, 1)},
                   inputs=["audio", "drive"], controls=[DRIVE], input_skip=True)
    yield "conv_chain", chain, {}
    torch.manual_seed(7)
    yield "lstm16_f16", models.recurrent("lstm", hidden=16, controls=[DRIVE]), {"dtype": "f16"}


def main(out):
    os.makedirs(out, exist_ok=True)
    for name, model, kw in effects():
        scaled(model, 1.5)
        earshot.export(model, os.path.join(out, name + ".nfx"), sample_rate=48000,
                       credits={"title": f"parity test {name}"}, **kw)
        print(name)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: make_effects.py OUT_DIR")
    main(sys.argv[1])
