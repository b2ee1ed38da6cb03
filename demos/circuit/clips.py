"""Writes the demo clips in demos/clips/: short synthesized dry sources (48 kHz,
16-bit mono WAV) and, beside each, the circuit's own output at the default
controls (drive 0.5, tone 0.5) as the reference a listener can compare against.

    /usr/bin/python3 -m demos.circuit.clips      # from the repository root
"""
from __future__ import annotations

import pathlib
import sys

import numpy as np
from scipy.io import wavfile

from . import pedal, sources

FS = sources.FS
SECONDS = 3.0
SEED = 3
OUT = pathlib.Path(__file__).resolve().parents[1] / "clips"
PEAK_DB = -3.0
DEFAULT_DRIVE, DEFAULT_TONE = 0.5, 0.5


def melody(n, rng):
    """Plucked E-minor pentatonic phrase, one note every 0.3 s."""
    out = np.zeros(n)
    notes = [52, 55, 57, 59, 62, 64, 62, 59, 57]  # E3 G3 A3 B3 D4 E4 D4 B3 A3
    for i, m in enumerate(notes):
        s = int((0.01 + 0.3 * i) * FS)
        if s >= n:
            break
        out[s:] += sources.karplus_strong(float(sources.midi_hz(m)), n - s, rng, FS, decay=0.996, brightness=0.7)
    return out


def strum(n, rng):
    """E major then A major, strummed, 1.5 s apart."""
    out = np.zeros(n)
    for j, (root, shape) in enumerate([(40, (0, 7, 12, 16, 19, 24)), (45, (0, 7, 12, 16, 19))]):
        t0 = int((0.01 + 1.5 * j) * FS)
        for i, step in enumerate(shape):
            s = t0 + int(i * 0.018 * FS)
            out[s:] += 0.7 * sources.karplus_strong(float(sources.midi_hz(root + step)), n - s, rng, FS,
                                                    decay=0.997, brightness=0.6)
    return out


def sweep(n, rng):
    """Exponential sine sweep 40 Hz -> 8 kHz under a rising level."""
    t = np.arange(n) / FS
    T = n / FS
    L = T / np.log(8000.0 / 40.0)
    return (0.1 + 0.9 * t / T) * np.sin(2 * np.pi * 40.0 * L * (np.exp(t / L) - 1.0))


def bursts(n, rng):
    return sources.noise_burst(n, rng, FS)


CLIPS = {"melody": melody, "strum": strum, "sweep": sweep, "bursts": bursts}


def make_dry(name, n=None):
    """The dry clip `name` as float64 at a -3 dBFS peak with 5 ms fades."""
    n = int(SECONDS * FS) if n is None else n
    if name not in CLIPS:
        raise ValueError(f"unknown clip {name!r}; choose one of {', '.join(CLIPS)}")
    rng = np.random.default_rng([SEED, list(CLIPS).index(name)])
    x = CLIPS[name](n, rng)
    fade = int(0.005 * FS)
    ramp = np.linspace(0.0, 1.0, fade)
    x[:fade] *= ramp
    x[-fade:] *= ramp[::-1]
    return x * (10 ** (PEAK_DB / 20) / np.max(np.abs(x)))


def write_wav(path, x):
    """16-bit PCM, rounded; refuses (rather than clips) samples beyond full scale."""
    x = np.asarray(x, dtype=np.float64)
    if not np.all(np.isfinite(x)) or np.max(np.abs(x)) > 1.0:
        raise ValueError(f"{path}: samples must be finite and within -1 .. 1 (peak {np.max(np.abs(x)):.3f})")
    wavfile.write(str(path), FS, np.round(x * 32767).astype(np.int16))


def main(argv=None):
    OUT.mkdir(parents=True, exist_ok=True)
    dry = np.stack([make_dry(name) for name in CLIPS])
    wet = pedal.process(dry, DEFAULT_DRIVE, DEFAULT_TONE)  # all clips in one simulation pass
    for name, x, y in zip(CLIPS, dry, wet):
        write_wav(OUT / f"{name}.wav", x)
        write_wav(OUT / f"{name}-circuit.wav", y)
        print(f"{name}: {x.size / FS:.1f} s, dry peak {np.max(np.abs(x)):.3f}, circuit peak {np.max(np.abs(y)):.3f}")


if __name__ == "__main__":
    sys.exit(main())
