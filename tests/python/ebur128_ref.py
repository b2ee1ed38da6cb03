"""libebur128 as a loudness reference for the tests (Debian package libebur128-1,
the general-purpose C library that implements ITU-R BS.1770 / EBU R 128
measurement), through ctypes with the constants of its header ebur128.h v1.2.6.
Used by tests/python/test_loudness.py and, through the command line below, by
tests/browser/units.test.js, so there is one binding.

    python3 tests/python/ebur128_ref.py OUT.f32
writes noise-burst cases (8-192 kHz, mono and stereo) to OUT.f32 as raw float32,
each case channel after channel, and prints their libebur128 readings as JSON:
[{"rate", "channels", "frames", "lufs"}, ...] in file order.
"""
import ctypes
import json
import sys

import numpy as np

F32P = ctypes.POINTER(ctypes.c_float)
F64P = ctypes.POINTER(ctypes.c_double)
EBUR128_MODE_I = 5  # (1 << 2) | EBUR128_MODE_M
UNUSED, LEFT, RIGHT, CENTER, LEFT_SURROUND, RIGHT_SURROUND = 0, 1, 2, 3, 4, 5
# Our default layouts by channel count (dsp/include/earshot/earshot.h) as libebur128 channel types.
LAYOUT = {1: [LEFT], 2: [LEFT, RIGHT], 3: [LEFT, RIGHT, CENTER],
          4: [LEFT, RIGHT, LEFT_SURROUND, RIGHT_SURROUND],
          5: [LEFT, RIGHT, CENTER, LEFT_SURROUND, RIGHT_SURROUND],
          6: [LEFT, RIGHT, CENTER, UNUSED, LEFT_SURROUND, RIGHT_SURROUND]}


def load():
    """The library with its prototypes set; OSError naming the package when missing."""
    try:
        eb = ctypes.CDLL("libebur128.so.1")
    except OSError as e:
        raise OSError(f"libebur128 is not installed ({e}): bash tools/setup.sh test installs libebur128-1") from e
    eb.ebur128_init.restype = ctypes.c_void_p
    eb.ebur128_init.argtypes = [ctypes.c_uint, ctypes.c_ulong, ctypes.c_int]
    eb.ebur128_set_channel.restype = ctypes.c_int
    eb.ebur128_set_channel.argtypes = [ctypes.c_void_p, ctypes.c_uint, ctypes.c_int]
    eb.ebur128_add_frames_float.restype = ctypes.c_int
    eb.ebur128_add_frames_float.argtypes = [ctypes.c_void_p, F32P, ctypes.c_size_t]
    eb.ebur128_loudness_global.restype = ctypes.c_int
    eb.ebur128_loudness_global.argtypes = [ctypes.c_void_p, F64P]
    eb.ebur128_destroy.restype = None
    eb.ebur128_destroy.argtypes = [ctypes.POINTER(ctypes.c_void_p)]
    return eb


def lkfs(eb, x, rate):
    """Integrated loudness of float32 audio (frames x channels, or mono 1-D) in our
    default layout; -inf when no block passes the absolute gate."""
    x = np.ascontiguousarray(x, dtype=np.float32)
    if x.ndim == 1:
        x = x[:, None]
    st = ctypes.c_void_p(eb.ebur128_init(x.shape[1], int(rate), EBUR128_MODE_I))
    if not st.value:
        raise RuntimeError(f"ebur128_init({x.shape[1]}, {rate}) failed")
    try:
        for i, kind in enumerate(LAYOUT[x.shape[1]]):
            if eb.ebur128_set_channel(st, i, kind) != 0:
                raise RuntimeError(f"ebur128_set_channel({i}, {kind}) failed")
        if eb.ebur128_add_frames_float(st, x.ctypes.data_as(F32P), x.shape[0]) != 0:
            raise RuntimeError("ebur128_add_frames_float failed")
        out = ctypes.c_double(0)
        if eb.ebur128_loudness_global(st, ctypes.byref(out)) != 0:
            raise RuntimeError("ebur128_loudness_global failed")
        return out.value
    finally:
        eb.ebur128_destroy(ctypes.byref(st))


def noise_bursts(rate, seconds, channels, seed):
    """White noise under a random stepped envelope from -95 to -5 dBFS (5 steps a
    second): blocks on both sides of the absolute (-70) and relative (-10 LU) gates."""
    rng = np.random.default_rng(seed)
    n = int(seconds * rate)
    steps = int(seconds * 5)
    env = np.repeat(10 ** (rng.uniform(-95, -5, steps) / 20), n // steps + 1)[:n]
    return np.clip(rng.standard_normal((n, channels)) * 0.25 * env[:, None], -1, 1).astype(np.float32)


def main(out_path):
    eb = load()
    cases, blobs = [], []
    for rate in (8000, 22050, 32000, 44100, 48000, 88200, 96000, 192000):
        for ch in (1, 2):
            x = noise_bursts(rate, 5, ch, rate + ch)
            cases.append({"rate": rate, "channels": ch, "frames": x.shape[0], "lufs": lkfs(eb, x, rate)})
            blobs.append(x.T.tobytes())  # channel after channel
    with open(out_path, "wb") as f:
        f.write(b"".join(blobs))
    print(json.dumps(cases))


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: ebur128_ref.py OUT.f32")
    main(sys.argv[1])
