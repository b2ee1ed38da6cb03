#!/usr/bin/python3
"""Reference magnitudes for tests/browser/spectrogram.test.js, from
scipy.signal.stft (SciPy 1.10 documentation of scipy.signal.stft).

    /usr/bin/python3 tests/browser/stft_reference.py OUT_DIR RATE SECONDS NPERSEG HOP

Writes OUT_DIR/signal-RATE.f32 (the test signal, float32 little-endian) and
OUT_DIR/scipy-RATE.f64 (|Zxx| in float64, frame after frame, N/2 + 1 bins
each), each under a temporary name and renamed; prints the shape as JSON.
The signal: three sines (0.5 at 440 Hz, 0.25 at 3 000 Hz, 0.1 at 0.3·rate)
plus a linear chirp (0.1, 50 Hz to 0.45·rate over the clip), deterministic.
"""
import json
import os
import sys

import numpy as np
import scipy
import scipy.signal


def replace_into(path, data):
    tmp = f"{path}.tmp{os.getpid()}"
    with open(tmp, "wb") as f:
        f.write(data)
    os.replace(tmp, path)


def main():
    out, rate, seconds, nperseg, hop = sys.argv[1], int(sys.argv[2]), float(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5])
    os.makedirs(out, exist_ok=True)
    t = np.arange(int(round(rate * seconds))) / rate
    x = (0.5 * np.sin(2 * np.pi * 440 * t) + 0.25 * np.sin(2 * np.pi * 3000 * t) + 0.1 * np.sin(2 * np.pi * 0.3 * rate * t)
         + 0.1 * scipy.signal.chirp(t, 50, seconds, 0.45 * rate, method="linear")).astype(np.float32)
    # The float32 samples, computed on in double precision (scipy keeps
    # float32 input in single precision; the page's FFT works in double).
    _, _, z = scipy.signal.stft(x.astype(np.float64), fs=rate, window="hann", nperseg=nperseg, noverlap=nperseg - hop,
                                detrend=False, return_onesided=True, boundary="zeros", padded=True, scaling="spectrum")
    mags = np.abs(z).T.astype("<f8")  # frames × bins
    replace_into(os.path.join(out, f"signal-{rate}.f32"), x.astype("<f4").tobytes())
    replace_into(os.path.join(out, f"scipy-{rate}.f64"), mags.tobytes())
    print(json.dumps({"scipy": scipy.__version__, "samples": int(x.size), "frames": int(mags.shape[0]),
                      "bins": int(mags.shape[1])}))


if __name__ == "__main__":
    main()
