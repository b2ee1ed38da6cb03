"""Proves demos/train.py runs end to end for every demo model in seconds (tiny
data, a few updates on one fixed batch): the loss stays finite and falls, and
the exported effect file reloads (earshot.load) to the same function."""
import json
import pathlib
import subprocess
import sys

import numpy as np
import pytest
import torch

REPO = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO / "python"))

import earshot  # noqa: E402

MODELS = ("lstm", "gru", "wavenet", "tcn")
STEPS = 8


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out = tmp_path_factory.mktemp("smoke")
    proc = subprocess.run([sys.executable, str(REPO / "demos" / "train.py"), "--all", "--tiny",
                           "--steps", str(STEPS), "--out-dir", str(out), "--log-dir", str(out)],
                          capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr[-3000:]
    return out


@pytest.mark.parametrize("name", MODELS)
def test_loss_finite_and_falling(run, name):
    info = json.loads((run / f"{name}.json").read_text())
    losses = np.array(info["losses"])
    assert losses.size == STEPS
    assert np.all(np.isfinite(losses))
    # one fixed batch: Adam must bring the loss down within a few updates
    assert losses[-1] < losses[0], losses


@pytest.mark.parametrize("name", MODELS)
def test_export_round_trips(run, name):
    info = json.loads((run / f"{name}.json").read_text())
    # F32 weights written and read back: the reloaded Effect computes exactly
    # what the trained one did (train.py measures this on held-out clips).
    assert info["export_max_abs_diff"] == 0.0
    model = earshot.load(str(run / f"{name}.nfx"))
    assert [c["name"] for c in model.controls] == ["drive", "tone"]
    assert sum(p.numel() for p in model.parameters()) == info["params"]
    x = torch.zeros(1, 256)
    x[0, 10] = 0.5
    y = model(x, torch.tensor([[0.5, 0.5]]))
    assert torch.all(torch.isfinite(y))


def test_bad_arguments_are_named():
    proc = subprocess.run([sys.executable, str(REPO / "demos" / "train.py"), "--model", "lstm", "--steps", "0"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode != 0 and "--steps must be at least 1" in proc.stderr
    proc = subprocess.run([sys.executable, str(REPO / "demos" / "train.py")],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode != 0 and "--all" in proc.stderr
