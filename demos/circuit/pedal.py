"""The demo circuit: drive gain -> oversampled diode clipper -> tone blend.

Two controls, both 0..1:
  drive  pre-gain before the clipper, DRIVE_DB_MIN .. DRIVE_DB_MAX dB (linear in dB);
         input full scale 1.0 is taken as 1 V, and the clipper output in volts
         is the output sample value.
  tone   y = (1 - tone) * lowpass(c) + tone * c, where c is the clipper output and
         lowpass is a 2nd-order Butterworth low-pass at TONE_CUTOFF_HZ
         (bilinear transform with pre-warping).

The clipper runs at OVERSAMPLE x the base rate; resampling is scipy's polyphase
FIR (resample_poly, zero-phase), so the reference is offline and not causal.
"""
from __future__ import annotations

import numpy as np
from scipy.signal import lfilter, resample_poly

from .clipper import ClipperParams, simulate

SAMPLE_RATE = 48000
OVERSAMPLE = 8
DRIVE_DB_MIN = -12.0
DRIVE_DB_MAX = 30.0
TONE_CUTOFF_HZ = 1200.0


def drive_gain(drive):
    """Linear pre-gain for a drive value in 0..1."""
    drive = _check_control("drive", drive)
    return 10.0 ** ((DRIVE_DB_MIN + (DRIVE_DB_MAX - DRIVE_DB_MIN) * drive) / 20.0)


def butter2_lowpass(fc: float, fs: float):
    """(b, a) of a 2nd-order Butterworth low-pass: the analog prototype
    1 / (s^2 + sqrt(2) s + 1), scaled to wc = 2 fs tan(pi fc / fs) and mapped with
    the bilinear transform s = 2 fs (1 - z^-1) / (1 + z^-1)."""
    if not (0 < fc < fs / 2):
        raise ValueError(f"butter2_lowpass: cutoff {fc!r} Hz must lie strictly between 0 and fs/2 = {fs / 2} Hz")
    k = np.tan(np.pi * fc / fs)  # wc / (2 fs)
    k2 = k * k
    norm = 1.0 + np.sqrt(2.0) * k + k2
    b = np.array([k2, 2.0 * k2, k2]) / norm
    a = np.array([1.0, 2.0 * (k2 - 1.0) / norm, (1.0 - np.sqrt(2.0) * k + k2) / norm])
    return b, a


def tone_filter(c, tone, fs: float = SAMPLE_RATE):
    """Blend of the clipper output c [..., T] with its low-passed copy."""
    tone = _check_control("tone", tone)
    b, a = butter2_lowpass(TONE_CUTOFF_HZ, fs)
    lp = lfilter(b, a, c, axis=-1)
    t = np.asarray(tone, dtype=np.float64)[..., None]
    return (1.0 - t) * lp + t * c


def clip(x, drive, fs: float = SAMPLE_RATE, oversample: int = OVERSAMPLE,
         params: ClipperParams = ClipperParams()):
    """Drive gain and clipper only (before the tone blend). x: [..., T] at fs."""
    x = _check_audio(x)
    g = drive_gain(drive)
    g = np.broadcast_to(np.asarray(g, dtype=np.float64), x.shape[:-1])[..., None]
    if not (isinstance(oversample, (int, np.integer)) and oversample >= 1):
        raise ValueError(f"clip: oversample must be a positive integer, got {oversample!r}")
    if oversample == 1:
        return simulate(g * x, fs, params)
    xu = resample_poly(g * x, oversample, 1, axis=-1)
    v = simulate(xu, fs * oversample, params)
    return resample_poly(v, 1, oversample, axis=-1)


def process(x, drive, tone, fs: float = SAMPLE_RATE, oversample: int = OVERSAMPLE,
            params: ClipperParams = ClipperParams()):
    """The whole circuit. x: [..., T] at fs; drive, tone: scalars or arrays of
    shape x.shape[:-1] (one value per signal, held for its whole length)."""
    return tone_filter(clip(x, drive, fs, oversample, params), tone, fs)


def _check_control(name, value):
    v = np.asarray(value, dtype=np.float64)
    if not np.all(np.isfinite(v)) or np.any(v < 0) or np.any(v > 1):
        raise ValueError(f"{name} must lie in 0..1, got {value!r}")
    return v


def _check_audio(x):
    x = np.asarray(x, dtype=np.float64)
    if x.ndim < 1 or x.shape[-1] < 2:
        raise ValueError(f"audio must have at least 2 samples on its last axis, got shape {x.shape}")
    if not np.all(np.isfinite(x)):
        raise ValueError("audio holds non-finite values")
    return x
