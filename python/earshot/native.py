"""The native core through its C ABI (dsp/include/earshot/earshot.h), by ctypes.

    lib = earshot.native.library()          # $EARSHOT_LIB or build/native/libearshot.so
    with earshot.native.Stream(open("fx.nfx", "rb").read(), 48000) as s:
        s.set_control("drive", 0.8)
        y = s.process(x)                    # float32 numpy array in, out
"""

import ctypes
import json
import os

import numpy as np

DEFAULT_LIB = os.path.join(os.path.dirname(__file__), "..", "..", "build", "native", "libearshot.so")
MAX_BLOCK = 65536


def library_path():
    return os.path.abspath(os.environ.get("EARSHOT_LIB") or DEFAULT_LIB)


_lib = None


def library():
    """Loads the core's shared library once; raises OSError naming the path when it is missing."""
    global _lib
    if _lib is not None:
        return _lib
    path = library_path()
    if not os.path.exists(path):
        raise OSError(f"earshot core library not found at {path} (build it, or set EARSHOT_LIB)")
    lib = ctypes.CDLL(path)
    P, c_float_p = ctypes.c_void_p, ctypes.POINTER(ctypes.c_float)
    sig = {
        "earshot_create": (P, [ctypes.c_char_p, ctypes.c_size_t, ctypes.c_double, ctypes.c_char_p,
                               ctypes.c_char_p, ctypes.c_size_t]),
        "earshot_process": (ctypes.c_int, [P, c_float_p, c_float_p, ctypes.c_int]),
        "earshot_control_count": (ctypes.c_int, [P]),
        "earshot_control_index": (ctypes.c_int, [P, ctypes.c_char_p]),
        "earshot_set_control": (ctypes.c_int, [P, ctypes.c_int, ctypes.c_float]),
        "earshot_get_control": (ctypes.c_float, [P, ctypes.c_int]),
        "earshot_set_mix": (ctypes.c_int, [P, ctypes.c_float]),
        "earshot_set_gain": (ctypes.c_int, [P, ctypes.c_float, ctypes.c_float]),
        "earshot_reset": (None, [P]),
        "earshot_latency": (ctypes.c_int, [P]),
        "earshot_info": (ctypes.c_char_p, [P]),
        "earshot_variant": (ctypes.c_char_p, [P]),
        "earshot_nonfinite_count": (ctypes.c_uint, [P]),
        "earshot_status_text": (ctypes.c_char_p, [ctypes.c_int]),
        "earshot_destroy": (None, [P]),
    }
    for name, (res, args) in sig.items():
        f = getattr(lib, name)
        f.restype, f.argtypes = res, args
    _lib = lib
    return lib


class CoreError(RuntimeError):
    """The core refused a file or a call; the message is the core's own."""


class Stream:
    """One earshot stream: effect bytes + host rate (+ variant)."""

    def __init__(self, data, host_rate, variant=None):
        self.lib = library()
        err = ctypes.create_string_buffer(1024)
        self._keep = bytes(data)
        h = self.lib.earshot_create(self._keep, len(self._keep), float(host_rate),
                                    variant.encode() if variant else None, err, len(err))
        if not h:
            raise CoreError(err.value.decode("utf-8", "replace"))
        self.h = h

    def _status(self, rc, what):
        if rc != 0:
            raise CoreError(f"{what}: {self.lib.earshot_status_text(rc).decode()}")

    def process(self, x, block=512):
        """Runs x (1-D) through the stream in blocks of `block`; returns float32 output."""
        x = np.ascontiguousarray(x, dtype=np.float32)
        y = np.empty_like(x)
        fp = ctypes.POINTER(ctypes.c_float)
        for i in range(0, len(x), block):
            n = min(block, len(x) - i)
            xi = x[i:i + n]
            yi = y[i:i + n]
            got = self.lib.earshot_process(self.h, xi.ctypes.data_as(fp), yi.ctypes.data_as(fp), n)
            if got != n:
                raise CoreError(f"earshot_process refused a block of {n} samples")
        return y

    def control_index(self, name):
        i = self.lib.earshot_control_index(self.h, name.encode())
        if i < 0:
            raise CoreError(f"no control named {name!r}")
        return i

    def set_control(self, which, value):
        i = self.control_index(which) if isinstance(which, str) else which
        self._status(self.lib.earshot_set_control(self.h, i, value), f"set_control({which!r}, {value})")

    def get_control(self, i):
        return self.lib.earshot_get_control(self.h, i)

    def reset(self):
        self.lib.earshot_reset(self.h)

    @property
    def latency(self):
        return self.lib.earshot_latency(self.h)

    @property
    def info(self):
        return json.loads(self.lib.earshot_info(self.h).decode())

    @property
    def variant(self):
        return self.lib.earshot_variant(self.h).decode()

    @property
    def nonfinite_count(self):
        return self.lib.earshot_nonfinite_count(self.h)

    def close(self):
        if getattr(self, "h", None):
            self.lib.earshot_destroy(self.h)
            self.h = None

    __del__ = close

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def render(data, x, host_rate, events=(), block=512, variant=None, info=None):
    """Processes x through a fresh stream, applying control events
    (sample, control index, value) just before the block that starts at `sample`
    (blocks are cut at event positions). `info`, a dict, receives the variant used."""
    with Stream(data, host_rate, variant) as s:
        if info is not None:
            info["variant"] = s.variant
        x = np.ascontiguousarray(x, dtype=np.float32)
        cuts = sorted({0, len(x)} | {int(p) for p, _, _ in events})
        out = []
        for a, b in zip(cuts[:-1], cuts[1:]):
            for p, i, v in events:
                if int(p) == a:
                    s.set_control(i, v)
            out.append(s.process(x[a:b], block))
        for p, i, v in events:
            if int(p) == len(x):
                s.set_control(i, v)
        return np.concatenate(out) if out else np.zeros(0, np.float32)
