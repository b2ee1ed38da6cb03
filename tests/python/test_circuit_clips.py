"""Proves the committed demo clips in demos/clips/ are what demos/circuit/clips.py
makes: 48 kHz 16-bit mono WAV, read back with the standard library's wave module."""
import pathlib
import sys
import wave

import numpy as np
import pytest

REPO = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from demos.circuit import clips  # noqa: E402


def _read(path):
    with wave.open(str(path), "rb") as w:
        assert (w.getnchannels(), w.getsampwidth(), w.getframerate()) == (1, 2, 48000)
        return np.frombuffer(w.readframes(w.getnframes()), dtype="<i2")


@pytest.mark.parametrize("name", list(clips.CLIPS))
def test_dry_clip_matches_generator(name):
    data = _read(REPO / "demos" / "clips" / f"{name}.wav")
    expected = np.round(clips.make_dry(name) * 32767).astype(np.int16)
    np.testing.assert_array_equal(data, expected)
    assert 2.0 <= data.size / 48000 <= 4.0


@pytest.mark.parametrize("name", list(clips.CLIPS))
def test_circuit_reference_is_present_and_sane(name):
    data = _read(REPO / "demos" / "clips" / f"{name}-circuit.wav").astype(np.float64) / 32767
    dry = clips.make_dry(name)
    assert data.size == dry.size
    # drive 0.5 is +9 dB into the diode pair: the output peak sits near the
    # diode drop (0.4 .. 0.75 V), never at full scale
    assert 0.4 < np.abs(data).max() < 0.75
    # the clipper keeps the waveform's sign where the dry signal is clearly
    # non-zero and slowly moving (low frequencies dominate every clip)
    loud = np.abs(dry) > 0.3
    assert np.mean(np.sign(data[loud]) == np.sign(dry[loud])) > 0.9


def test_write_wav_refuses_out_of_range(tmp_path):
    with pytest.raises(ValueError, match="within -1 .. 1"):
        clips.write_wav(tmp_path / "x.wav", np.array([0.0, 1.5]))
    with pytest.raises(ValueError, match="unknown clip"):
        clips.make_dry("drums")
