"""Proves the synthesized demo sources have the pitch, sweep range and levels they
claim, are reproducible from their seed, and that the dataset's tone split
reproduces the whole circuit."""
import pathlib
import sys

import numpy as np
import pytest
from scipy import signal

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from demos.circuit import dataset, pedal, sources  # noqa: E402

FS = sources.FS


@pytest.mark.parametrize("f0", [82.41, 110.0, 196.0, 440.0, 659.26])
def test_karplus_strong_period(f0):
    # The two-point average in the loop delays by half a sample, so the period
    # is N + 1/2 samples with N = round(fs/f0) (Jaffe and Smith 1983, recalled
    # from memory). Measured as the first autocorrelation peak (numpy.correlate)
    # past half a period, refined by parabolic interpolation.
    y = sources.karplus_strong(f0, 24000, np.random.default_rng(3))
    N = round(FS / f0)
    seg = y[2000:2000 + 8192]
    ac = np.correlate(seg, seg, "full")[seg.size - 1:]
    lo, hi = N // 2, int(1.5 * N)
    k = lo + int(np.argmax(ac[lo:hi]))
    a, b, c = ac[k - 1], ac[k], ac[k + 1]
    period = k + 0.5 * (a - c) / (a - 2 * b + c)
    assert abs(period - (N + 0.5)) < 0.1, (period, N)


def test_karplus_strong_decays():
    # The loop filter decay (1 + z^-1)/2 has gain decay |cos(w/2)| <= decay at
    # every frequency (common practice, no source), so every partial loses at
    # least a factor `decay` per period of N + 1/2 samples. Window RMS 0.1 s
    # long, window starts 43 200 samples (99 periods) apart; bound taken over
    # 88 periods (window ends) to allow for misalignment.
    decay = 0.99
    y = sources.karplus_strong(110.0, 48000, np.random.default_rng(0), decay=decay)
    first, last = np.sqrt(np.mean(y[:4800] ** 2)), np.sqrt(np.mean(y[-4800:] ** 2))
    periods = (48000 - 2 * 4800) / (round(FS / 110.0) + 0.5)
    assert 0 < last < first * decay ** periods, (last / first, decay ** periods)


def test_sweep_covers_its_range():
    # Instantaneous frequency from the analytic signal (scipy.signal.hilbert)
    # must rise (or fall) monotonically within 30 Hz .. 12 kHz.
    rng = np.random.default_rng(5)
    x = sources.sine_sweep(FS, rng)
    phase = np.unwrap(np.angle(signal.hilbert(x)))
    inst = np.diff(phase) * FS / (2 * np.pi)
    inner = signal.medfilt(inst[2000:-2000], 101)
    assert 25 < inner.min() and inner.max() < 12500
    assert inner.max() / inner.min() > 5


@pytest.mark.parametrize("kind", sources.KINDS)
def test_sources_levels_and_seed(kind):
    a = sources.make(kind, FS, np.random.default_rng(7))
    b = sources.make(kind, FS, np.random.default_rng(7))
    c = sources.make(kind, FS, np.random.default_rng(8))
    np.testing.assert_array_equal(a, b)
    assert not np.allclose(a, c)
    peak_db = 20 * np.log10(np.abs(a).max())
    assert -24.0 - 1e-9 <= peak_db <= -1.0 + 1e-9
    assert a[0] == 0.0 and a[-1] == 0.0  # 5 ms fades to silence at both ends


def test_dataset_tone_split_reproduces_circuit():
    # target(data, tone) = (1-t) lp + t c must equal the whole chain run directly.
    data = dataset.generate("heldout", n_clips=2, clip_seconds=0.2, log=lambda *_: None)
    y = dataset.target(data, data["tone"])
    ref = pedal.process(data["dry"].astype(np.float64), data["drive"], data["tone"])
    np.testing.assert_allclose(y, ref, rtol=0, atol=1e-6)  # float32 storage


@pytest.mark.parametrize("call, message", [
    (lambda: sources.make("cello", FS, np.random.default_rng(0)), "unknown source kind"),
    (lambda: sources.make("pluck", 100, np.random.default_rng(0)), "at least"),
    (lambda: sources.karplus_strong(5.0, 100, np.random.default_rng(0)), "f0"),
    (lambda: sources.karplus_strong(100.0, 100, np.random.default_rng(0), decay=1.0), "decay"),
    (lambda: dataset.generate("valid"), "unknown split"),
])
def test_bad_inputs_are_named(call, message):
    with pytest.raises(ValueError, match=message):
        call()
