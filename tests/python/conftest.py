"""Shared fixtures for the Python tests: the package on sys.path, the native core
(skipped with a reason when it is not built), a deterministic test signal, and the
parity report that test_parity*.py fills (printed at the end, written to
build/parity-report.txt)."""

import os
import sys

import numpy as np
import pytest

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
sys.path.insert(0, os.path.join(ROOT, "python"))

import earshot.native  # noqa: E402

REPORT_PATH = os.path.join(ROOT, "build", "parity-report.txt")
_report_rows = []


@pytest.fixture(scope="session")
def core():
    """The native core's ctypes library, or a skip naming the missing path."""
    try:
        return earshot.native.library()
    except OSError as e:
        pytest.skip(f"native core not available: {e}")


def make_signal(seconds=10.0, rate=48000, seed=1234):
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


@pytest.fixture(scope="session")
def signal():
    """10 s at 48 kHz of make_signal() (EARSHOT_PARITY_SECONDS shortens it for quick runs)."""
    return make_signal(float(os.environ.get("EARSHOT_PARITY_SECONDS", "10")))


def add_report_row(row):
    _report_rows.append(row)


def pytest_sessionfinish(session, exitstatus):
    if not _report_rows:
        return
    cols = ["case", "variant", "file", "n", "ESR core/f32", "max|e| core/f32", "ESR core/f64", "ESR f32/f64",
            "max|e| f32/f64", "target", "ok"]
    lines = ["earshot parity: native core (C ABI) vs PyTorch reference, ESR = sum(e^2)/sum(y^2) in dB",
             f"library: {earshot.native.library_path()}",
             "columns: core/f32 = core vs PyTorch float32 (the asserted figure), core/f64 = core vs PyTorch"
             " float64, f32/f64 = PyTorch float32 vs float64 (PyTorch's own rounding error)", ""]
    fmt = "{:<58} {:>7} {:>4} {:>7} {:>12} {:>15} {:>12} {:>11} {:>14} {:>16} {:>3}"
    lines.append(fmt.format(*cols))
    for r in _report_rows:
        lines.append(fmt.format(r["case"], r.get("variant", "?"), r["file"], r["n"], f"{r['esr32']:.1f}", f"{r['max32']:.2e}",
                                f"{r['esr64']:.1f}", f"{r['esr_ref']:.1f}", f"{r['max_ref']:.2e}",
                                r["target"], "yes" if r["ok"] else "NO"))
    text = "\n".join(lines) + "\n"
    os.makedirs(os.path.dirname(REPORT_PATH), exist_ok=True)
    with open(REPORT_PATH, "w") as f:
        f.write(text)
    tr = session.config.pluginmanager.get_plugin("terminalreporter")
    if tr is not None:
        tr.write_line("")
        for line in lines:
            tr.write_line(line)
        tr.write_line(f"(written to {REPORT_PATH})")
