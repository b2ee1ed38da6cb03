"""Training and held-out audio for the demo effects, at 48 kHz.

Each split is a set of dry source clips run through the circuit at several
drive values. The tone stage is linear and comes after the clipper, so we keep
both the clipper output c and its tone low-pass lp; the target for any tone t
is then (1 - t) lp + t c, which lets training draw tone continuously for free.

    train    48 clips x 3 drives (stratified: one drive in each third of 0..1),
             seed 1; tone drawn per training window.
    heldout  15 clips, seed 2, each at one fixed (drive, tone) pair, covering
             every source kind and off-grid control values.

Splits are cached in build/data/ as .npz (regenerated when missing).
Run `python3 -m demos.circuit.dataset` from the repository root to (re)build.
"""
from __future__ import annotations

import argparse
import pathlib
import sys
import time

import numpy as np

from . import pedal, sources

FS = pedal.SAMPLE_RATE
CLIP_SECONDS = 2.0
VERSION = 1  # bump when generation changes, so stale caches are rebuilt
REPO = pathlib.Path(__file__).resolve().parents[2]
CACHE = REPO / "build" / "data"

HELDOUT_CONTROLS = [  # (drive, tone): grid edges, centre and off-grid values
    (0.0, 1.0), (0.1, 0.3), (0.3, 0.8), (0.5, 0.5), (0.7, 0.2),
    (0.9, 0.9), (1.0, 0.0), (0.15, 0.65), (0.45, 0.05), (0.6, 0.95),
    (0.85, 0.4), (0.25, 0.15), (0.75, 0.7), (0.95, 0.55), (0.4, 0.35),
]


def _sources(n_clips, seed, n):
    rng = np.random.default_rng(seed)
    kinds = [sources.KINDS[i % len(sources.KINDS)] for i in range(n_clips)]
    return np.stack([sources.make(k, n, rng) for k in kinds]), kinds


def generate(split: str, n_clips=None, clip_seconds=CLIP_SECONDS, oversample=pedal.OVERSAMPLE, log=print):
    """Builds a split in memory: dict of float32 arrays
    dry [S, T], c [S, T], lp [S, T], drive [S], tone [S] (NaN in train: drawn later),
    clip [S] (index of the source clip of each row) and kinds (source kind per row)."""
    n = int(round(clip_seconds * FS))
    t0 = time.time()
    if split == "train":
        n_clips = 48 if n_clips is None else n_clips
        dry, kinds = _sources(n_clips, 1, n)
        rng = np.random.default_rng(101)
        per = 3
        drive = np.stack([(np.arange(per) + rng.uniform(0, 1, per)) / per for _ in range(n_clips)]).reshape(-1)
        dry = np.repeat(dry, per, axis=0)
        clip = np.repeat(np.arange(n_clips), per)
        kinds = [k for k in kinds for _ in range(per)]
        tone = np.full(drive.shape, np.nan)
    elif split == "heldout":
        pairs = HELDOUT_CONTROLS if n_clips is None else HELDOUT_CONTROLS[:n_clips]
        dry, kinds = _sources(len(pairs), 2, n)
        drive = np.array([d for d, _ in pairs])
        tone = np.array([t for _, t in pairs])
        clip = np.arange(len(pairs))
    else:
        raise ValueError(f"unknown split {split!r}; choose train or heldout")
    c = pedal.clip(dry, drive, FS, oversample)
    lp = pedal.tone_filter(c, 0.0, FS)
    log(f"dataset {split}: {dry.shape[0]} signals x {n} samples, {time.time() - t0:.1f} s")
    f32 = lambda a: np.asarray(a, dtype=np.float32)
    return {"dry": f32(dry), "c": f32(c), "lp": f32(lp), "drive": f32(drive), "tone": f32(tone),
            "clip": clip, "kinds": np.array(kinds)}


def target(data, tone):
    """Circuit output for rows of `data` at per-row tone values [S]."""
    t = np.asarray(tone, dtype=np.float32)[:, None]
    return (1.0 - t) * data["lp"] + t * data["c"]


def load(split: str, cache_dir=CACHE, regen=False, log=print):
    """A split from the cache, generating (and caching) it when absent."""
    path = pathlib.Path(cache_dir) / f"{split}-v{VERSION}.npz"
    if path.exists() and not regen:
        with np.load(path) as z:
            return {k: z[k] for k in z.files}
    data = generate(split, log=log)
    path.parent.mkdir(parents=True, exist_ok=True)
    np.savez(path, **data)
    return data


def main(argv=None):
    ap = argparse.ArgumentParser(description="Build the demo training and held-out audio (cached in build/data/).")
    ap.add_argument("--regen", action="store_true", help="rebuild even when a cached copy exists")
    args = ap.parse_args(argv)
    for split in ("train", "heldout"):
        d = load(split, regen=args.regen)
        print(f"{split}: dry {d['dry'].shape}, peak in {np.abs(d['dry']).max():.3f}, "
              f"peak out {np.abs(d['c']).max():.3f}")


if __name__ == "__main__":
    sys.exit(main())
