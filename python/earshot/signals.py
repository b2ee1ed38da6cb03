"""Deterministic test signals for parity checks (tests/python, `python3 -m earshot verify`)."""

import numpy as np


def programme(seconds=10.0, rate=48000, seed=1234):
    """Deterministic programme-like signal at a -6 dBFS peak: plucked tones,
    noise bursts between silences, a logarithmic sweep, then plucks over noise.

    Returns float32 [n]."""
    rng = np.random.default_rng(seed)
    n = int(round(seconds * rate))
    x = np.zeros(n)
    q = n // 4

    def pluck(start, f0, decay, count=12):
        seg = np.arange(n - start) / rate
        tone = sum(np.sin(2 * np.pi * f0 * k * seg + rng.uniform(0, 2 * np.pi)) / k ** 1.3
                   * np.exp(-seg * decay * (1 + 0.35 * k)) for k in range(1, count + 1) if f0 * k < rate / 2.2)
        x[start:] += tone

    # first quarter: decaying plucks (a small phrase)
    for i, f0 in enumerate([110.0, 164.8, 220.0, 146.8, 98.0]):
        pluck(int(i * q / 5), f0, 2.5)
    x[q:] *= np.exp(-np.arange(n - q) / rate * 8)  # let the phrase die out
    # second quarter: noise bursts with silences between them
    burst = int(0.06 * rate)
    for s in range(q, 2 * q - burst, int(0.25 * rate)):
        env = np.exp(-np.arange(burst) / (0.015 * rate))
        x[s:s + burst] += rng.standard_normal(burst) * env * rng.uniform(0.2, 1.0)
    # third quarter: log sweep 20 Hz .. 20 kHz (Farina's exponential sweep)
    f1, f2, T = 20.0, 20000.0, q / rate
    ts = np.arange(q) / rate
    L = T / np.log(f2 / f1)
    sweep = np.sin(2 * np.pi * f1 * L * (np.exp(ts / L) - 1))
    fade = np.minimum(1, np.minimum(ts, T - ts) / 0.01)
    x[2 * q:3 * q] = sweep * fade * 0.8
    # last quarter: plucks over low noise
    for i, f0 in enumerate([82.4, 123.5, 196.0]):
        pluck(3 * q + int(i * q / 3), f0, 4.0)
    x[3 * q:] += 0.02 * rng.standard_normal(n - 3 * q)
    x *= 0.5 / np.max(np.abs(x))  # -6 dBFS peak
    return x.astype(np.float32)
