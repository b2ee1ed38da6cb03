"""Proves the demo diode-clipper simulation solves its ODE (against SciPy solvers)
and behaves like the circuit it models (small-signal RC low-pass, DC balance)."""
import pathlib
import sys

import numpy as np
import pytest
from scipy import signal
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from demos.circuit import pedal  # noqa: E402
from demos.circuit.clipper import ClipperParams, ode_rhs, simulate  # noqa: E402

P = ClipperParams()
FS_OVER = pedal.SAMPLE_RATE * pedal.OVERSAMPLE  # the rate the clipper runs at in the demo


def _esr(y, ref):
    return float(np.sum((y - ref) ** 2) / np.sum(ref ** 2))


def _radau(vin, dur):
    """Independent reference: scipy.integrate.solve_ivp, Radau (implicit
    Runge-Kutta, order 5), rtol 1e-10, atol 1e-12, with the exact Jacobian."""
    def jac(t, v):
        return np.array([[-1.0 / (P.R * P.C) - (2.0 * P.Is / (P.C * P.nVt)) * np.cosh(v[0] / P.nVt)]])
    sol = solve_ivp(lambda t, v: ode_rhs(v, vin(t), P), (0.0, dur), [0.0], method="Radau",
                    rtol=1e-10, atol=1e-12, jac=jac, dense_output=True)
    assert sol.success, sol.message
    return sol.sol


INPUTS = {
    # name: input voltage as a function of time (volts); amplitudes span the
    # linear region (10 mV) to hard clipping (30 V, near the demo's top drive)
    "sine_10mV_1k": lambda t: 0.01 * np.sin(2 * np.pi * 1000 * t),
    "sine_1V_1k": lambda t: 1.0 * np.sin(2 * np.pi * 1000 * t),
    "sine_30V_1k": lambda t: 30.0 * np.sin(2 * np.pi * 1000 * t),
    "two_tone_440_3100": lambda t: 8.0 * np.sin(2 * np.pi * 440 * t) + 6.0 * np.sin(2 * np.pi * 3100 * t),
}


@pytest.mark.parametrize("name", sorted(INPUTS))
def test_trapezoidal_matches_radau(name):
    vin = INPUTS[name]
    dur = 4e-3
    ref_sol = _radau(vin, dur)
    errs = {}
    for fs in (FS_OVER, 2 * FS_OVER):
        t = np.arange(int(dur * fs)) / fs
        y = simulate(vin(t), fs, P)
        errs[fs] = _esr(y, ref_sol(t)[0])
    # Tolerance: ESR below 1e-5 (-50 dB) at the demo's 384 kHz clipper rate
    # (measured worst case 3.4e-6, 30 V sine).
    assert errs[FS_OVER] < 1e-5, errs
    # The trapezoidal rule is second order (error ~ h^2, ESR ~ h^4): halving
    # the step must cut the ESR by well over 4x (measured 8x to 23x).
    assert errs[2 * FS_OVER] < errs[FS_OVER] / 4, errs


def test_lsoda_agrees_with_radau_reference():
    # A second SciPy solver (LSODA, rtol 1e-10, atol 1e-12) on the hardest input
    # guards against the reference itself being wrong; the simulation must sit
    # within the same ESR bound of it.
    vin = INPUTS["sine_30V_1k"]
    dur = 4e-3
    sol = solve_ivp(lambda t, v: ode_rhs(v, vin(t), P), (0.0, dur), [0.0], method="LSODA",
                    rtol=1e-10, atol=1e-12, dense_output=True)
    assert sol.success, sol.message
    t = np.arange(int(dur * FS_OVER)) / FS_OVER
    assert _esr(simulate(vin(t), FS_OVER, P), sol.sol(t)[0]) < 1e-5


def test_dc_steady_state_balances_currents():
    # Constant input V: at rest the resistor current equals the diode-pair
    # current, (V - v)/R = 2 Is sinh(v / nVt) (Kirchhoff's current law with the
    # Shockley equation); root found independently with scipy.optimize.brentq.
    for V in (0.05, 0.4, -2.0, 25.0):
        v_ref = brentq(lambda v: (V - v) / P.R - 2 * P.Is * np.sinh(v / P.nVt), -abs(V), abs(V), xtol=1e-15)
        y = simulate(np.full(4000, V), FS_OVER, P)  # ~10 ms, hundreds of RC time constants
        assert abs(y[-1] - v_ref) < 1e-9, (V, y[-1], v_ref)


def test_small_signal_is_rc_lowpass():
    # Trade fact (common practice, no source): for signals far below the diode
    # knee the diodes draw no current and the circuit is the RC low-pass
    # H(f) = 1 / (1 + j f / fc), fc = 1/(2 pi R C) = 7234 Hz.
    # Measured on the whole demo chain (drive 0, tone 1 = no tone filter) from a
    # 1 mV impulse, with scipy.signal.freqz.
    n0, N = 256, 4096
    x = np.zeros(N)
    x[n0] = 1e-3
    y = pedal.process(x, 0.0, 1.0) / pedal.drive_gain(0.0)
    f = np.linspace(50, 15000, 300)
    _, H = signal.freqz(y / 1e-3, worN=f, fs=pedal.SAMPLE_RATE)
    H *= np.exp(2j * np.pi * f * n0 / pedal.SAMPLE_RATE)  # undo the impulse's position
    Ha = 1.0 / (1.0 + 1j * f / P.cutoff_hz)
    mag_err_db = np.abs(20 * np.log10(np.abs(H) / np.abs(Ha)))
    # Measured: 0.035 dB, 0.0019 rad, -2.993 dB at fc.
    # 0.1 dB / 0.01 rad: room for the resampling filters' passband ripple and
    # the bilinear frequency warping at 384 kHz (0.6% at fc).
    assert mag_err_db.max() < 0.1, mag_err_db.max()
    assert np.abs(np.angle(H / Ha)).max() < 0.01
    _, Hc = signal.freqz(y / 1e-3, worN=[P.cutoff_hz], fs=pedal.SAMPLE_RATE)
    assert abs(20 * np.log10(abs(Hc[0])) + 3.0103) < 0.05  # -3 dB at the corner


def test_tone_lowpass_matches_scipy_butter():
    # Our bilinear-transform Butterworth against scipy.signal.butter.
    for fc in (pedal.TONE_CUTOFF_HZ, 100.0, 15000.0):
        b, a = pedal.butter2_lowpass(fc, pedal.SAMPLE_RATE)
        bs, as_ = signal.butter(2, fc, fs=pedal.SAMPLE_RATE)
        np.testing.assert_allclose(b, bs, rtol=1e-12)
        np.testing.assert_allclose(a, as_, rtol=1e-12)


def test_tone_blend_endpoints():
    # tone 1 is the clipper output unchanged; tone 0 is its Butterworth low-pass
    # (scipy.signal.butter + lfilter as the reference).
    rng = np.random.default_rng(1)
    c = rng.standard_normal((2, 500))
    np.testing.assert_array_equal(pedal.tone_filter(c, 1.0), c)
    b, a = signal.butter(2, pedal.TONE_CUTOFF_HZ, fs=pedal.SAMPLE_RATE)
    np.testing.assert_allclose(pedal.tone_filter(c, 0.0), signal.lfilter(b, a, c, axis=-1), rtol=1e-9, atol=1e-12)


def test_output_bounded_by_diode_knee():
    # Hard drive: the pair clamps the capacitor near the diode drop; with these
    # values (Is 2.52 nA, nVt 45.3 mV) 2 Is sinh(v/nVt) reaches 30 V / 2.2 kOhm
    # at v = nVt asinh(13.6 mA / 5.04 nA) = 0.70 V, the largest possible |v|
    # (the capacitor voltage moves towards v_in only while the resistor current
    # exceeds the diode current). The first and last 100 samples are skipped:
    # the resampling filters ring where the signal starts and stops abruptly.
    t = np.arange(2000) / pedal.SAMPLE_RATE
    y = pedal.clip(np.sin(2 * np.pi * 200 * t) * 0.95, 1.0)[100:-100]
    bound = P.nVt * np.arcsinh((0.95 * pedal.drive_gain(1.0) / P.R) / (2 * P.Is))
    assert 0.6 < np.abs(y).max() < bound * 1.005  # 0.5%: resampling-filter overshoot


@pytest.mark.parametrize("call, message", [
    (lambda: pedal.process(np.zeros(100), 1.5, 0.5), "drive"),
    (lambda: pedal.process(np.zeros(100), 0.5, -0.1), "tone"),
    (lambda: pedal.process(np.array([0.0, np.nan, 0.0]), 0.5, 0.5), "non-finite"),
    (lambda: simulate(np.zeros(10), -1.0), "fs"),
    (lambda: ClipperParams(R=0.0), "ClipperParams.R"),
    (lambda: pedal.butter2_lowpass(30000.0, 48000.0), "cutoff"),
])
def test_bad_inputs_are_named(call, message):
    with pytest.raises(ValueError, match=message):
        call()
