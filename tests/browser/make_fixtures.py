#!/usr/bin/python3
"""Writes the browser tests' fixtures into DIR (default build/browser-tests/fixtures):
effects made with python/earshot (seeded, untrained: they test plumbing, not
sound), a corrupt effect, audio files (WAV by SciPy, FLAC by sox) and a
non-audio file.

    /usr/bin/python3 tests/browser/make_fixtures.py [DIR]

Every file is written under a temporary name and renamed, so a reader never
sees half a file.
"""
import os
import subprocess
import sys

import numpy as np
import scipy.io.wavfile as wavfile
import torch

REPO = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, os.path.join(REPO, "python"))
sys.path.insert(0, os.path.join(REPO, "tests", "data", "effects"))

import earshot  # noqa: E402
from earshot import models  # noqa: E402
import make_corpus  # noqa: E402  (writes safetensors directly: shapes the exporter would not make)

CONTROLS = [{"name": "drive", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20},
            {"name": "tone", "unit": "dB", "min": -12, "max": 12, "default": 0, "smoothing_ms": 10}]

# Markup in a title: the page must show these characters, not make elements.
MARKUP_TITLE = '<img src=x onerror="window.__markup=1"><b>Bold</b> & <i>co</i>'


def replace_into(path, write):
    tmp = f"{path}.tmp{os.getpid()}"
    write(tmp)
    os.replace(tmp, path)


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else os.path.join(REPO, "build", "browser-tests", "fixtures")
    os.makedirs(out, exist_ok=True)
    torch.manual_seed(7)
    effects = {
        "lstm-12": (models.recurrent("lstm", hidden=12), {"title": "test LSTM-12", "authors": ["Test Author"],
                                                          "licence": "CC0-1.0", "paper": "https://example.org/p"}),
        "tcn-film": (models.tcn(CONTROLS, channels=8, kernel=3, dilations=(1, 4, 16), film_hidden=(8,)),
                     {"title": "test TCN-FiLM"}),
        "markup": (models.recurrent("gru", hidden=4), {"title": MARKUP_TITLE, "code": "javascript:alert(1)"}),
    }
    for name, (model, credits) in effects.items():
        kw = {"controls": CONTROLS} if name == "tcn-film" else {}
        # The markup effect runs at 44.1 kHz: a model rate other than 48 kHz.
        rate = 44100 if name == "markup" else 48000
        replace_into(os.path.join(out, name + ".nfx"),
                     lambda p, m=model, c=credits, k=kw, r=rate: earshot.export(m, p, sample_rate=r, credits=c, **k))

    # Corrupt: a valid file with its JSON header damaged (the loader must name the fault).
    good = open(os.path.join(out, "lstm-12.nfx"), "rb").read()
    bad = bytearray(good)
    bad[8:20] = b"{not json!!!"
    replace_into(os.path.join(out, "corrupt.nfx"), lambda p: open(p, "wb").write(bytes(bad)))

    # Stream memory (dsp/FORMAT.md, "Stream memory"): small files, large
    # streams. wide-history: five kernel-2 convolutions over 1 024 channels at
    # dilation 65 536, 2.5 GiB of history at 48 kHz (more than a WebAssembly
    # instance can grow to), refused by the 64 MiB limit. wide-history-60mib:
    # one such convolution over 120 channels, 60.1 MiB, just under the limit.
    conv = {"type": "conv1d", "out": 1, "kernel": 2, "dilation": 65536}
    wide = []
    for i in range(5):
        wide += [make_corpus.lin(f"wide{i}", 1, 1024), dict(conv, name=f"far{i}", **{"in": 1024})]
    for name, layers in (("wide-history", wide),
                         ("wide-history-60mib", [make_corpus.lin("wide", 1, 120), dict(conv, name="far", **{"in": 120})])):
        desc = make_corpus.effect(layers, title=name)
        replace_into(os.path.join(out, name + ".nfx"),
                     lambda p, n=name, d=desc: open(p, "wb").write(make_corpus.file_bytes(n, d)))

    rng = np.random.default_rng(11)

    def tones(rate, seconds, channels, level):
        t = np.arange(int(rate * seconds)) / rate
        env = np.exp(-4.0 * (t % 0.5))
        chans = [level * env * np.sin(2 * np.pi * (196.0 + 50 * c) * t) + 0.05 * level * rng.standard_normal(t.size)
                 for c in range(channels)]
        return np.stack(chans, axis=1) if channels > 1 else chans[0]

    # Offline: float32 stereo at 44.1 kHz (the core resamples) and 16-bit mono at 48 kHz.
    replace_into(os.path.join(out, "stereo-44k-f32.wav"),
                 lambda p: wavfile.write(p, 44100, tones(44100, 2.5, 2, 0.6).astype(np.float32)))
    replace_into(os.path.join(out, "mono-48k-i16.wav"),
                 lambda p: wavfile.write(p, 48000, np.round(tones(48000, 1.5, 1, 0.5) * 32767).astype(np.int16)))
    # Live: 16-bit mono at 44.1 kHz, the rate Chromium's fake capture device runs at here.
    replace_into(os.path.join(out, "live-44k-i16.wav"),
                 lambda p: wavfile.write(p, 44100, np.round(tones(44100, 4.0, 1, 0.4) * 32767).astype(np.int16)))
    # FLAC (decoded by the browser, not the page's WAV reader), made with sox.
    flac = os.path.join(out, "stereo-44k.flac")
    tmp = f"{flac}.tmp{os.getpid()}.flac"
    subprocess.run(["sox", os.path.join(out, "stereo-44k-f32.wav"), "-b", "16", tmp], check=True)
    os.replace(tmp, flac)
    # Three channels: refused by the page and the builder.
    replace_into(os.path.join(out, "three-channels.wav"),
                 lambda p: wavfile.write(p, 48000, tones(48000, 0.5, 3, 0.3).astype(np.float32)))
    replace_into(os.path.join(out, "notes.txt"),
                 lambda p: open(p, "w").write("These are notes, not audio.\n" * 20))
    # Live, stereo: two different channels (tones at 196 and 246 Hz, levels 0.4
    # and 0.25, each with its own noise), made last so the files above keep
    # their samples.
    def live_stereo(p):
        x = tones(44100, 4.0, 2, 0.4)
        x[:, 1] *= 0.625
        wavfile.write(p, 44100, np.round(x * 32767).astype(np.int16))
    replace_into(os.path.join(out, "live-stereo-44k-i16.wav"), live_stereo)
    print(out)


if __name__ == "__main__":
    main()
