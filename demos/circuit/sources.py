"""Synthesized dry sources for the demo circuit: every sample is made here from
a seeded generator, nothing is recorded.

Kinds: plucked strings (Karplus-Strong), strummed chords of plucked strings,
noise bursts, exponential sine sweeps, and sustained additive-synthesis chords.
All functions return float64 mono audio at `fs`.
"""
from __future__ import annotations

import numpy as np
from scipy.signal import lfilter

FS = 48000
KINDS = ("pluck", "strum", "noise", "sweep", "pad")

# Guitar-range pitches (MIDI numbers): E2 (40) .. E5 (76).
MIDI_LOW, MIDI_HIGH = 40, 76
CHORDS = {"major": (0, 4, 7, 12), "minor": (0, 3, 7, 12), "power": (0, 7, 12), "sus4": (0, 5, 7, 12)}


def midi_hz(m):
    """Equal temperament, A4 = MIDI 69 = 440 Hz (common practice, no source)."""
    return 440.0 * 2.0 ** ((np.asarray(m, dtype=np.float64) - 69.0) / 12.0)


def karplus_strong(f0: float, n: int, rng: np.random.Generator, fs: int = FS,
                   decay: float = 0.996, brightness: float = 0.5):
    """Plucked string: a delay line of round(fs/f0) samples, excited with noise,
    fed back through the two-point average scaled by `decay`
    (y[t] = x[t] + decay (y[t-N] + y[t-N-1]) / 2; Karplus and Strong 1983).
    The delay length is rounded, so the pitch is within half a sample of f0.
    `brightness` 0..1 low-passes the excitation (one-pole) for a softer pluck."""
    if not (20.0 <= f0 < fs / 4):
        raise ValueError(f"karplus_strong: f0 {f0!r} Hz outside 20 .. {fs / 4} Hz")
    if not (0.0 < decay < 1.0):
        raise ValueError(f"karplus_strong: decay {decay!r} must lie strictly between 0 and 1")
    N = max(2, int(round(fs / f0)))
    exc = rng.uniform(-1.0, 1.0, N)
    a = 1.0 - float(np.clip(brightness, 0.05, 1.0))
    exc = lfilter([1.0 - a], [1.0, -a], exc)
    exc -= exc.mean()
    y = np.zeros(n + N + 1)
    y[1:N + 1] = exc[:min(N, n + N)]
    # block update: samples [k, k+N) depend only on samples at least N back
    k = N + 1
    while k < y.size:
        m = min(N, y.size - k)
        y[k:k + m] = decay * 0.5 * (y[k - N:k - N + m] + y[k - N - 1:k - N - 1 + m])
        k += m
    return y[1:n + 1]


def pluck(n, rng, fs=FS):
    """One or a few plucked notes in sequence."""
    out = np.zeros(n)
    notes = rng.integers(1, 4)
    starts = np.sort(rng.integers(0, n // 2, notes))
    starts[0] = int(0.01 * fs)
    for s in starts:
        f0 = midi_hz(rng.integers(MIDI_LOW, MIDI_HIGH + 1))
        out[s:] += rng.uniform(0.5, 1.0) * karplus_strong(f0, n - s, rng, fs, decay=rng.uniform(0.990, 0.999),
                                                          brightness=rng.uniform(0.3, 1.0))
    return out


def strum(n, rng, fs=FS):
    """A chord of plucked strings, strings 8..40 ms apart, optionally strummed twice."""
    out = np.zeros(n)
    strums = rng.integers(1, 3)
    for j in range(strums):
        root = rng.integers(MIDI_LOW, MIDI_LOW + 15)
        shape = CHORDS[list(CHORDS)[rng.integers(len(CHORDS))]]
        t0 = int(0.01 * fs) + j * n // 2
        gap = rng.uniform(0.008, 0.040)
        for i, step in enumerate(shape):
            s = t0 + int(i * gap * fs)
            if s >= n:
                break
            out[s:] += rng.uniform(0.4, 0.8) * karplus_strong(midi_hz(root + step), n - s, rng, fs,
                                                              decay=rng.uniform(0.992, 0.999),
                                                              brightness=rng.uniform(0.3, 0.9))
    return out


def noise_burst(n, rng, fs=FS):
    """Two to five bursts of white noise through a random one-pole low-pass,
    exponential decays of 10..300 ms."""
    out = np.zeros(n)
    for _ in range(rng.integers(2, 6)):
        s = rng.integers(0, n - fs // 10)
        tau = rng.uniform(0.01, 0.3)
        m = n - s
        env = np.exp(-np.arange(m) / (tau * fs))
        a = rng.uniform(0.0, 0.95)
        burst = lfilter([1.0 - a], [1.0, -a], rng.standard_normal(m))
        burst /= np.max(np.abs(burst)) + 1e-12
        out[s:] += rng.uniform(0.3, 1.0) * env * burst
    return out


def sine_sweep(n, rng, fs=FS):
    """Exponential sine sweep between random ends in 30 Hz .. 12 kHz (either
    direction) under a slow amplitude ramp, so one clip visits many levels."""
    f1, f2 = np.exp(rng.uniform(np.log(30.0), np.log(300.0))), np.exp(rng.uniform(np.log(2000.0), np.log(12000.0)))
    if rng.random() < 0.3:
        f1, f2 = f2, f1
    T = n / fs
    t = np.arange(n) / fs
    L = T / np.log(f2 / f1)
    phase = 2 * np.pi * f1 * L * (np.exp(t / L) - 1.0)
    lo = rng.uniform(0.05, 0.5)
    env = lo + (1.0 - lo) * 0.5 * (1 - np.cos(2 * np.pi * rng.uniform(0.5, 2.0) * t / T))
    return env * np.sin(phase)


def pad_chord(n, rng, fs=FS):
    """A sustained chord of band-limited saw-like tones (harmonics 1/k below
    fs/4) with attack and release ramps."""
    root = rng.integers(MIDI_LOW, MIDI_LOW + 24)
    shape = CHORDS[list(CHORDS)[rng.integers(len(CHORDS))]]
    t = np.arange(n) / fs
    out = np.zeros(n)
    for step in shape:
        f0 = midi_hz(root + step) * (1.0 + rng.uniform(-0.002, 0.002))
        kmax = int((fs / 4) // f0)
        for k in range(1, kmax + 1):
            out += np.sin(2 * np.pi * k * f0 * t + rng.uniform(0, 2 * np.pi)) / k
    att, rel = int(rng.uniform(0.005, 0.2) * fs), int(rng.uniform(0.05, 0.4) * fs)
    att, rel = min(att, n // 3), min(rel, n // 3)
    env = np.ones(n)
    env[:att] = np.linspace(0.0, 1.0, att)
    env[n - rel:] = np.linspace(1.0, 0.0, rel)
    return out * env


GENERATORS = {"pluck": pluck, "strum": strum, "noise": noise_burst, "sweep": sine_sweep, "pad": pad_chord}


def make(kind: str, n: int, rng: np.random.Generator, fs: int = FS, peak_db=(-24.0, -1.0)):
    """One clip of `kind`, n samples, peak-normalised to a level drawn uniformly
    in `peak_db` dBFS. Starts and ends at silence (5 ms fades)."""
    if kind not in GENERATORS:
        raise ValueError(f"unknown source kind {kind!r}; choose one of {', '.join(KINDS)}")
    if n < fs // 5:
        raise ValueError(f"source clips need at least {fs // 5} samples (0.2 s), got {n}")
    x = GENERATORS[kind](n, rng, fs)
    fade = int(0.005 * fs)
    ramp = np.linspace(0.0, 1.0, fade)
    x[:fade] *= ramp
    x[-fade:] *= ramp[::-1]
    peak = np.max(np.abs(x))
    if peak > 0:
        x *= 10.0 ** (rng.uniform(*peak_db) / 20.0) / peak
    return x
