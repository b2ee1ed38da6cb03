"""The safetensors container, written and read with the standard library only.

Layout (dsp/FORMAT.md, "Container"): u64 little-endian header length N, N bytes
of JSON header padded with spaces to a multiple of 8, then the raw little-endian
tensor data. We write tensors contiguously, in the order given (the exporter
gives graph order: layer by layer, each layer's tensors in the order FORMAT.md
lists them), with no gaps; every tensor starts at a multiple of its element size.
"""

import json
import math
import struct

import numpy as np

from .limits import MAX_DIM, MAX_FILE_BYTES as MAX_FILE, MAX_HEADER_BYTES as MAX_HEADER, MAX_PARAMETERS as MAX_PARAMS
DTYPES = {"F32": np.dtype("<f4"), "F16": np.dtype("<f2")}


class FormatError(ValueError):
    """An effect file (or what is about to become one) breaks dsp/FORMAT.md."""


def write(path_or_file, tensors, metadata):
    """tensors: list of (name, numpy array of float32 or float16); metadata: dict str -> str.

    Returns the bytes written.
    """
    header = {"__metadata__": dict(metadata)}
    chunks, offset = [], 0
    for name, arr in tensors:
        if name == "__metadata__" or name in header:
            raise FormatError(f"tensor name {name!r} used twice or reserved")
        arr = np.ascontiguousarray(arr)
        code = {np.dtype("float32"): "F32", np.dtype("float16"): "F16"}.get(arr.dtype)
        if code is None:
            raise FormatError(f"tensor {name!r}: dtype {arr.dtype} is neither float32 nor float16")
        data = arr.astype(DTYPES[code], copy=False).tobytes()
        header[name] = {"dtype": code, "shape": list(arr.shape), "data_offsets": [offset, offset + len(data)]}
        chunks.append(data)
        offset += len(data)
    for k, v in header["__metadata__"].items():
        if not isinstance(k, str) or not isinstance(v, str):
            raise FormatError(f"__metadata__ values must be strings, {k!r} is {type(v).__name__}")
    text = json.dumps(header, separators=(",", ":")).encode("utf-8")
    text += b" " * (-len(text) % 8)
    blob = struct.pack("<Q", len(text)) + text + b"".join(chunks)
    if len(blob) > MAX_FILE:
        raise FormatError(f"effect file would be {len(blob)} bytes, over the {MAX_FILE}-byte limit")
    if hasattr(path_or_file, "write"):
        path_or_file.write(blob)
    else:
        with open(path_or_file, "wb") as f:
            f.write(blob)
    return blob


class _Duplicate(ValueError):
    pass


def _no_duplicates(pairs):
    """A JSON object that names a key twice is refused (the core: "listed twice")."""
    out = {}
    for k, v in pairs:
        if k in out:
            raise _Duplicate(f"tensor {k!r}: listed twice")
        out[k] = v
    return out


def read(source):
    """Parses a container from a path or bytes, checking the container rules.

    Returns (metadata dict, dict name -> (dtype code, numpy float32 array)), tensors
    in file order.
    """
    if isinstance(source, (bytes, bytearray, memoryview)):
        blob = bytes(source)
    else:
        with open(source, "rb") as f:
            blob = f.read()
    # Messages follow dsp/core/loader.cpp's, so both sides name the same field.
    if not blob:
        raise FormatError("effect file: no data")
    if len(blob) < 8:
        raise FormatError(f"effect file: truncated ({len(blob)} bytes; the 8-byte header length is missing)")
    if len(blob) > MAX_FILE:
        raise FormatError(f"effect file: {len(blob)} bytes exceeds the {MAX_FILE >> 20} MiB limit")
    (n,) = struct.unpack_from("<Q", blob, 0)
    if n > MAX_HEADER:
        raise FormatError(f"effect file: header length {n} exceeds the {MAX_HEADER >> 20} MiB limit")
    if n < 2:
        raise FormatError(f"effect file: header length {n} is too small for a JSON object")
    if 8 + n > len(blob):
        raise FormatError(f"effect file: header length {n} runs past the end of the file ({len(blob)} bytes)")
    try:
        header = json.loads(blob[8:8 + n].decode("utf-8"), object_pairs_hook=_no_duplicates)
    except _Duplicate as e:
        raise FormatError(str(e)) from None
    except RecursionError:  # Python's parser recurses per level; the core's is iterative
        raise FormatError("effect file header: invalid JSON: nested too deeply for this reader") from None
    except (UnicodeDecodeError, ValueError) as e:
        raise FormatError(f"effect file header: invalid JSON: {e}") from None
    if not isinstance(header, dict):
        raise FormatError("effect file header: must be a JSON object")
    if "__metadata__" not in header:
        raise FormatError("effect file header: no '__metadata__' (not an earshot effect file)")
    meta = header.pop("__metadata__")
    if not isinstance(meta, dict):
        raise FormatError("effect file header: '__metadata__' must be an object")
    data = memoryview(blob)[8 + n:]
    tensors, spans, total = {}, [], 0
    for name, t in header.items():
        if not isinstance(t, dict):
            raise FormatError(f"tensor {name!r}: header entry must be an object")
        for k in ("dtype", "shape", "data_offsets"):
            if k not in t:
                raise FormatError(f"tensor {name!r}: field {k!r} is missing")
        code = t["dtype"]
        if code not in DTYPES:
            raise FormatError(f"tensor {name!r}: dtype {code!r} is not F32 or F16")
        shape = t["shape"]
        if (not isinstance(shape, list) or not 1 <= len(shape) <= 4
                or not all(isinstance(d, int) and not isinstance(d, bool) and 1 <= d <= MAX_DIM for d in shape)):
            raise FormatError(f"tensor {name!r}: shape {shape} needs 1 to 4 dimensions of 1 .. {MAX_DIM}")
        if math.prod(shape) > MAX_PARAMS:
            raise FormatError(f"tensor {name!r}: more than {MAX_PARAMS} values")
        offs = t["data_offsets"]
        if (not isinstance(offs, list) or len(offs) != 2 or not all(isinstance(o, int) and not isinstance(o, bool) for o in offs)
                or not 0 <= offs[0] <= offs[1] <= len(data)):
            raise FormatError(f"tensor {name!r}: data_offsets {offs} outside the {len(data)}-byte data section")
        count = math.prod(shape)
        if count * DTYPES[code].itemsize != offs[1] - offs[0]:
            raise FormatError(f"tensor {name!r}: shape {shape} of {code} needs {count * DTYPES[code].itemsize}"
                              f" bytes, data_offsets give {offs[1] - offs[0]}")
        arr = np.frombuffer(data[offs[0]:offs[1]], dtype=DTYPES[code]).reshape(shape)
        if not np.all(np.isfinite(arr)):
            raise FormatError(f"tensor {name!r}: holds a non-finite value")
        spans.append((offs[0], offs[1], name))
        total += count
        tensors[name] = (code, arr.astype(np.float32))
    spans.sort()
    for (b0, e0, n0), (b1, e1, n1) in zip(spans, spans[1:]):
        if b1 < e0:
            raise FormatError(f"tensor {n1!r}: data overlaps tensor {n0!r}")
    if total > MAX_PARAMS:
        raise FormatError(f"{total} parameters, over the limit of {MAX_PARAMS}")
    return meta, tensors
