"""Shared fixtures for the Python tests: the package on sys.path, the build folder
(BUILD: $EARSHOT_BUILD, else build/native of this checkout) and need_built(), the
native core, a deterministic test signal, and the parity report that
test_parity*.py fills (printed at the end, written to build/parity-report.txt)."""

import os
import pathlib
import sys

import pytest

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
sys.path.insert(0, os.path.join(ROOT, "python"))

import earshot.native  # noqa: E402
from earshot.signals import programme as make_signal  # noqa: E402,F401

REPORT_PATH = os.path.join(ROOT, "build", "parity-report.txt")
_report_rows = []

BUILD = pathlib.Path(os.environ.get("EARSHOT_BUILD") or os.path.join(ROOT, "build", "native"))


def missing_build(message):
    """A build the tests need is missing: a skip on a developer's machine that has
    not built it, a failure when EARSHOT_BUILD or CI is set (tools/test.sh and CI
    build first, so there a missing build is a defect, never a reason to skip)."""
    message += " (build it as DEVELOPERS.md says, or set EARSHOT_BUILD to the build folder)"
    if os.environ.get("EARSHOT_BUILD") or os.environ.get("CI"):
        pytest.fail(message)
    pytest.skip(message)


def need_built(path):
    """Returns `path` (a program of the build) when it exists, else missing_build()."""
    path = pathlib.Path(path)
    if not path.is_file():
        missing_build(f"{path} is not built")
    return path


@pytest.fixture(scope="session")
def core():
    """The native core's ctypes library; missing_build() naming the path when absent."""
    try:
        return earshot.native.library()
    except OSError as e:
        missing_build(f"native core not available: {e}")


@pytest.fixture(scope="session")
def signal():
    """10 s at 48 kHz of earshot.signals.programme() (EARSHOT_PARITY_SECONDS shortens it for quick runs)."""
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
