#!/usr/bin/env python3
"""Writes the synthetic benchmark model set to build/bench-models/ (or DIR):
LSTM hidden 16/32/64/96, GRU 32/64/96, WaveNet 10 layers x 16 channels kernel 3, and a
TCN with FiLM on two controls. Weights are PyTorch's default initialisation
with a fixed seed: the figures measure speed, not sound.

Usage: /usr/bin/python3 tools/make_bench_models.py [DIR]
"""
import os
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "python"))

import torch  # noqa: E402

import earshot  # noqa: E402
from earshot import models  # noqa: E402

CONTROLS = [{"name": "drive", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20},
            {"name": "tone", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20}]


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else os.path.join("build", "bench-models")
    os.makedirs(out, exist_ok=True)
    torch.manual_seed(2026)
    made = {
        "lstm-16": models.recurrent("lstm", hidden=16),
        "lstm-32": models.recurrent("lstm", hidden=32),
        "lstm-64": models.recurrent("lstm", hidden=64),
        "gru-32": models.recurrent("gru", hidden=32),
        "wavenet-10x16": models.wavenet(channels=16, dilations=(1, 2, 4, 8, 16, 32, 64, 128, 256, 512), kernel=3),
        "tcn-film": models.tcn(CONTROLS, channels=16, kernel=5, dilations=(1, 4, 16, 64)),
        # Made after the first six so that their weights stay as they were.
        "lstm-96": models.recurrent("lstm", hidden=96),
        "gru-64": models.recurrent("gru", hidden=64),
        "gru-96": models.recurrent("gru", hidden=96),
    }
    for name, model in made.items():
        path = os.path.join(out, name + ".nfx")
        kw = {"controls": CONTROLS} if name == "tcn-film" else {}
        earshot.export(model, path, sample_rate=48000, credits={"title": f"benchmark {name}"}, **kw)
        print(path)


if __name__ == "__main__":
    main()
