#!/usr/bin/python3
"""Writes the conformance corpus of effect files (dsp/FORMAT.md, version 1).

    /usr/bin/python3 tests/data/effects/make_corpus.py

valid/*.nfx    files every loader must accept; invalid/*.nfx files every loader
must refuse. index.json lists both; for an invalid file it gives `names`, a
text the refusal must contain (the field or tensor at fault), and `why`.
The safetensors bytes are written here directly (not by the exporter) so that
edges the exporter refuses can be expressed. Weights come from a generator
seeded by the file name, so a rerun writes the same bytes. expected.json (the
core's description JSON, output hash and refusal texts) is written by the
Catch2 corpus test in bless mode: see README.md.
"""

import json
import os
import struct
import zlib

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))


def container(header, data, header_len=None, pad=True):
    """safetensors bytes: u64 LE header length, JSON header (space padded to 8), data."""
    text = json.dumps(header, separators=(",", ":")).encode() if not isinstance(header, bytes) else header
    if pad:
        text += b" " * (-len(text) % 8)
    n = len(text) if header_len is None else header_len
    return struct.pack("<Q", n) + text + data


def effect(layers, controls=(), inputs=("audio",), rate=48000, input_skip=False, title="corpus", **extra):
    d = {"format": "earshot-effect", "version": 1, "sample_rate": rate, "controls": list(controls),
         "credits": {"title": title}, "graph": {"inputs": list(inputs), "layers": list(layers),
                                               "input_skip": input_skip}}
    d.update(extra)
    return d


def control(name, lo=0.0, hi=1.0, default=0.5, **kw):
    return dict({"name": name, "unit": "", "min": lo, "max": hi, "default": default, "smoothing_ms": 20}, **kw)


def tensors_for(desc, n_controls=None):
    """[(tensor name, shape)] the graph names, in graph order (FORMAT.md layer table)."""
    nc = len(desc["controls"]) if n_controls is None else n_controls
    out = []

    def mlp(prefix, f, channels):
        w = [nc] + list(f.get("hidden", [])) + [2 * channels]
        for j in range(len(w) - 1):
            out.extend([(f"{prefix}mlp.{j}.weight", [w[j + 1], w[j]]), (f"{prefix}mlp.{j}.bias", [w[j + 1]])])

    for L in desc["graph"]["layers"]:
        n, t, b = L["name"], L["type"], L.get("bias", True)
        if t == "linear":
            out.append((f"{n}.weight", [L["out"], L["in"]]))
            if b:
                out.append((f"{n}.bias", [L["out"]]))
        elif t == "conv1d":
            out.append((f"{n}.weight", [L["out"], L["in"], L["kernel"]]))
            if b:
                out.append((f"{n}.bias", [L["out"]]))
        elif t in ("lstm", "gru"):
            g = (4 if t == "lstm" else 3) * L["hidden"]
            for l in range(L.get("num_layers", 1)):
                out += [(f"{n}.weight_ih_l{l}", [g, L["in"] if l == 0 else L["hidden"]]),
                        (f"{n}.weight_hh_l{l}", [g, L["hidden"]])]
                if b:
                    out += [(f"{n}.bias_ih_l{l}", [g]), (f"{n}.bias_hh_l{l}", [g])]
        elif t == "film":
            mlp(n + ".", L, L["channels"])
        elif t == "wavenet":
            C, S, K = L["channels"], L["skip"], L["kernel"]
            out.append((f"{n}.input.weight", [C, L["in"], 1]))
            if b:
                out.append((f"{n}.input.bias", [C]))
            for l in range(len(L["dilations"])):
                for part, o, i, k in (("conv", 2 * C, C, K), ("res", C, C, 1), ("skip", S, C, 1)):
                    out.append((f"{n}.layers.{l}.{part}.weight", [o, i, k]))
                    if b:
                        out.append((f"{n}.layers.{l}.{part}.bias", [o]))
        elif t == "tcn":
            out.append((f"{n}.conv.weight", [L["out"], L["in"], L["kernel"]]))
            if b:
                out.append((f"{n}.conv.bias", [L["out"]]))
            if "film" in L:
                mlp(n + ".film.", L["film"], L["out"])
            if L.get("residual", True) and L["in"] != L["out"]:
                out.append((f"{n}.res.weight", [L["out"], L["in"], 1]))
    return out


def weights(seed_name, shapes, dtype="F32"):
    """{name: (dtype, array)}: small values (|w| ~ 0.5/sqrt(fan-in)) so every output stays in range."""
    rng = np.random.default_rng(zlib.crc32(seed_name.encode()))
    out = {}
    for name, shape in shapes:
        fan = int(np.prod(shape[1:])) if len(shape) > 1 else 4
        a = (rng.standard_normal(shape) * (0.5 / np.sqrt(max(fan, 1)))).astype(np.float32)
        out[name] = (dtype, a)
    return out


def pack(desc, tens, header_extra=None, meta_text=None):
    """(header dict, data bytes) for a description and {name: (dtype, array)}."""
    header = {"__metadata__": {"earshot.effect": meta_text if meta_text is not None
                               else json.dumps(desc, separators=(",", ":"))}}
    data = b""
    for name, (dt, a) in tens.items():
        raw = a.astype("<f4" if dt == "F32" else "<f2").tobytes()
        header[name] = {"dtype": dt, "shape": list(a.shape), "data_offsets": [len(data), len(data) + len(raw)]}
        data += raw
    if header_extra:
        header.update(header_extra)
    return header, data


def file_bytes(name, desc, dtype="F32"):
    w = weights(name, tensors_for(desc), dtype)
    if name == "edge_layers_256":  # gains of ±1, so 256 layers in series neither vanish nor explode
        w = {k: (dt, np.where(a < 0, -1.0, 1.0).astype(np.float32)) for k, (dt, a) in w.items()}
    return container(*pack(desc, w))


# --------------------------------------------------------------------------
# Valid files: every layer type and option of dsp/FORMAT.md, every limit at its edge.
def lin(name, i, o, bias=True):
    return {"type": "linear", "name": name, "in": i, "out": o, "bias": bias}


def valid_files():
    V = {}
    V["linear"] = effect([lin("g", 1, 1)])
    V["linear_nobias_skip"] = effect([lin("g", 1, 1, False)], input_skip=True)
    V["conv1d"] = effect([{"type": "conv1d", "name": "c", "in": 1, "out": 2, "kernel": 3, "dilation": 2},
                          lin("o", 2, 1)])
    V["conv1d_nobias_defaults"] = effect([{"type": "conv1d", "name": "c", "in": 1, "out": 1, "kernel": 2,
                                           "bias": False}])
    V["lstm_2layers"] = effect([{"type": "lstm", "name": "r", "in": 1, "hidden": 4, "num_layers": 2},
                                lin("o", 4, 1)], input_skip=True)
    V["gru_nobias"] = effect([{"type": "gru", "name": "r", "in": 1, "hidden": 3, "bias": False}, lin("o", 3, 1)])
    acts = {"identity": {}, "tanh": {}, "sigmoid": {}, "relu": {}, "leaky_relu": {"slope": 0.3},
            "softsign": {}, "hardtanh": {"min": -0.25, "max": 0.5}}
    for fn, extra in acts.items():
        V[f"act_{fn}"] = effect([lin("a", 1, 3), dict({"type": "activation", "name": "f", "channels": 3, "fn": fn},
                                                       **extra), lin("o", 3, 1)])
    V["act_leaky_relu_default"] = effect([lin("a", 1, 2), {"type": "activation", "name": "f", "channels": 2,
                                                            "fn": "leaky_relu"}, lin("o", 2, 1)])
    V["act_hardtanh_default"] = effect([lin("a", 1, 2), {"type": "activation", "name": "f", "channels": 2,
                                                          "fn": "hardtanh"}, lin("o", 2, 1)])
    V["gated"] = effect([lin("a", 1, 4), {"type": "gated", "name": "g", "channels": 4}, lin("o", 2, 1)])
    two = [control("drive", 0, 10, 2.5), control("tone", -1, 1, 0.25, unit="dB", smoothing_ms=0)]
    V["film_default"] = effect([lin("a", 1, 3), {"type": "film", "name": "f", "channels": 3}, lin("o", 3, 1)],
                               controls=two)
    film_acts = {"identity": {}, "tanh": {}, "sigmoid": {}, "relu": {}, "leaky_relu": {"slope": 0.3},
                 "softsign": {}, "hardtanh": {"min": -0.25, "max": 0.5}}
    for fn, extra in film_acts.items():
        V[f"film_{fn}"] = effect([lin("a", 1, 3), dict({"type": "film", "name": "f", "channels": 3,
                                                        "hidden": [4, 2], "activation": fn}, **extra),
                                  lin("o", 3, 1)], controls=two)
    V["wavenet"] = effect([{"type": "wavenet", "name": "w", "in": 1, "channels": 2, "skip": 3, "kernel": 3,
                            "dilations": [1, 2, 4]}, lin("o", 3, 1)])
    V["wavenet_nobias"] = effect([{"type": "wavenet", "name": "w", "in": 2, "channels": 2, "skip": 1, "kernel": 2,
                                   "dilations": [1, 3], "bias": False}], controls=[control("drive")],
                                 inputs=["audio", "drive"])
    V["tcn_residual_same"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 1, "kernel": 3, "dilation": 2}])
    V["tcn_residual_res"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 2, "kernel": 3, "dilation": 1,
                                     "activation": {"fn": "tanh"}}, lin("o", 2, 1)])
    V["tcn_no_residual"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 2, "kernel": 2, "residual": False,
                                    "bias": False, "activation": {"fn": "hardtanh", "min": -0.5, "max": 0.75}},
                                   lin("o", 2, 1)])
    V["tcn_leaky_default_slope"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 1, "kernel": 2,
                                            "activation": {"fn": "leaky_relu"}}])
    V["tcn_film"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 2, "kernel": 3, "dilation": 2,
                             "film": {"hidden": [3]}}, lin("o", 2, 1)], controls=two)
    V["tcn_film_leaky"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 2, "kernel": 2,
                                   "activation": {"fn": "identity"},
                                   "film": {"hidden": [3], "activation": "leaky_relu", "slope": 0.4}},
                                  lin("o", 2, 1)], controls=two)
    V["tcn_film_hardtanh"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 1, "kernel": 2,
                                      "film": {"hidden": [2], "activation": "hardtanh", "min": -0.3, "max": 0.2}}],
                                    controls=two)
    V["controls_as_inputs"] = effect([lin("m", 3, 2), {"type": "activation", "name": "f", "channels": 2,
                                                       "fn": "tanh"}, lin("o", 2, 1)],
                                     controls=two, inputs=["tone", "audio", "drive"])
    V["control_order_differs"] = effect([lin("g", 3, 1)], controls=two, inputs=["audio", "tone", "drive"])
    V["control_defaults_omitted"] = effect([lin("g", 2, 1)], controls=[{"name": "k", "min": -2, "max": 2,
                                                                         "default": 0}], inputs=["audio", "k"])
    V["credits_full"] = effect([lin("g", 1, 1)], credits={"title": "full", "authors": ["A", "B"],
                                                          "paper": "https://example.org/p", "code": "c",
                                                          "licence": "CC0-1.0"})
    # Keys dsp/FORMAT.md does not define are ignored by the core (forward-compatible readers).
    V["unknown_keys_ignored"] = effect([dict(lin("g", 1, 1), note="x"),
                                        {"type": "tcn", "name": "t", "in": 1, "out": 1, "kernel": 2,
                                         "activation": {"fn": "tanh", "note": 1}}],
                                       credits={"title": "x", "year": "2026"}, note={"any": 1})
    V["control_not_in_inputs"] = effect([lin("g", 1, 1)], controls=[control("unused")])
    V["lstm_f16"] = effect([{"type": "lstm", "name": "r", "in": 1, "hidden": 3}, lin("o", 3, 1)])
    V["tcn_film_f16"] = effect([{"type": "tcn", "name": "t", "in": 1, "out": 2, "kernel": 3,
                                 "film": {"hidden": [2]}}, lin("o", 2, 1)], controls=two)
    V["rate_44100"] = effect([{"type": "gru", "name": "r", "in": 1, "hidden": 2}, lin("o", 2, 1)], rate=44100)
    V["rate_8000"] = effect([lin("g", 1, 1)], rate=8000)
    V["rate_384000"] = effect([lin("g", 1, 1)], rate=384000)
    # Limits at their edge (dsp/core/model.hpp).
    many = [control("c%02d" % i + "x" * 29, unit="u" * 16, smoothing_ms=10000 if i == 0 else 20)
            for i in range(16)]
    V["edge_controls_16"] = effect([lin("a", 1, 2), {"type": "film", "name": "f", "channels": 2}, lin("o", 2, 1)],
                                   controls=many)
    V["edge_kernel_64"] = effect([{"type": "conv1d", "name": "c", "in": 1, "out": 1, "kernel": 64}])
    V["edge_layers_256"] = effect([lin("l%03d" % i, 1, 1, False) for i in range(256)])
    V["edge_recurrent_layers_8"] = effect([{"type": "lstm", "name": "r", "in": 1, "hidden": 1, "num_layers": 8}])
    V["edge_wavenet_layers_64"] = effect([{"type": "wavenet", "name": "w", "in": 1, "channels": 1, "skip": 1,
                                           "kernel": 1, "dilations": [1] * 64}])
    V["edge_film_hidden_4"] = effect([{"type": "film", "name": "f", "channels": 1, "hidden": [2, 3, 2, 1]}],
                                     controls=[control("k")])
    V["edge_names"] = effect([lin("N" * 32 + "." * 8 + "_" * 8 + "z9" * 8, 1, 1)],
                             controls=[control("K" * 32, unit="m" * 16)], title="t" * 1000)
    V["edge_channels_1024"] = effect([lin("a", 1, 1024, False), lin("o", 1024, 1, False)])
    V["edge_dilation_65536"] = effect([{"type": "conv1d", "name": "c", "in": 1, "out": 1, "kernel": 2,
                                        "dilation": 65536}])
    # 1 + 15·65536 + 65535 = 2^20 samples exactly.
    V["edge_receptive_field"] = effect([{"type": "wavenet", "name": "w", "in": 1, "channels": 1, "skip": 1,
                                         "kernel": 2, "dilations": [65536] * 15},
                                        {"type": "conv1d", "name": "c", "in": 1, "out": 1, "kernel": 2,
                                         "dilation": 65535}])
    return V


# --------------------------------------------------------------------------
# Invalid files: (bytes, names, why). `names` is what the refusal must contain.
def invalid_files():
    I = {}
    base_desc = effect([lin("a", 1, 2), lin("o", 2, 1)], controls=[control("drive")])
    base_w = weights("base", tensors_for(base_desc))
    base = container(*pack(base_desc, base_w))

    def desc_case(name, desc, names, why, n_controls=None, dtype="F32", no_tensors=False, shapes_of=None):
        if shapes_of is not None:  # the tensors of a neighbouring graph (those read before the fault)
            I[name] = (container(*pack(desc, weights(name, tensors_for(shapes_of)))), names, why)
            return
        if no_tensors:  # refused before any tensor is looked up; keeps the file small
            I[name] = (container(*pack(desc, {})), names, why)
            return
        try:
            shapes = tensors_for(desc, n_controls)
        except (KeyError, TypeError, AttributeError):  # no graph to name tensors: carry the base file's
            shapes = tensors_for(base_desc)
        I[name] = (container(*pack(desc, weights(name, shapes, dtype))), names, why)

    def hdr_case(name, mutate, names, why):
        h, d = pack(base_desc, weights("base", tensors_for(base_desc)))
        h = json.loads(json.dumps(h))
        r = mutate(h, d)
        d = r if isinstance(r, bytes) else d
        I[name] = (container(h, d), names, why)

    I["empty"] = (b"", "effect file", "no bytes at all")
    I["truncated_5"] = (base[:5], "truncated", "shorter than the 8-byte header length")
    I["truncated_header"] = (base[:40], "header length", "header runs past the end")
    I["truncated_data"] = (base[:-4], "o.bias", "last tensor runs past the data section")
    I["header_len_0"] = (struct.pack("<Q", 0) + base[8:], "header length", "N = 0")
    I["header_len_1"] = (struct.pack("<Q", 1) + base[8:], "header length", "N = 1 < 2")
    I["header_len_past_end"] = (struct.pack("<Q", len(base)) + base[8:], "header length", "8 + N > file size")
    I["header_len_over_16mib"] = (struct.pack("<Q", (16 << 20) + 1) + base[8:], "16 MiB", "N over kMaxHeaderBytes")
    I["header_not_json"] = (container(b"{not json}", b""), "effect file header", "header is not JSON")
    I["header_not_object"] = (container(b"[1,2]", b""), "JSON object", "header is an array")
    I["header_no_metadata"] = (container({}, b""), "__metadata__", "no __metadata__")
    I["metadata_not_object"] = (container({"__metadata__": 3}, b""), "__metadata__", "__metadata__ is a number")
    I["metadata_no_effect"] = (container({"__metadata__": {"other": "x"}}, b""), "earshot.effect",
                               "__metadata__ lacks earshot.effect")
    I["description_not_json"] = (container(*pack(base_desc, base_w, meta_text="{oops")), "effect description",
                                 "effect description is not JSON")
    I["description_not_object"] = (container(*pack(base_desc, base_w, meta_text="[]")), "JSON object",
                                   "effect description is an array")
    # Text-level faults of the two JSON documents (the header and the description).
    good_meta = json.dumps(base_desc, separators=(",", ":"))
    I["description_trailing_bytes"] = (container(*pack(base_desc, base_w, meta_text=good_meta + " x")),
                                       "effect description", "bytes after the description's JSON object")
    I["description_trailing_nul"] = (container(*pack(base_desc, base_w, meta_text=good_meta + "\0")),
                                     "effect description", "a NUL after the description's JSON object")
    I["description_nul_in_string"] = (container(*pack(base_desc, base_w,
                                                      meta_text=good_meta.replace('"corpus"', '"cor\0pus"'))),
                                      "effect description", "a raw NUL inside a string of the description")
    # 50 000 levels (100 KB): deep enough to exhaust a recursive parser's stack.
    I["description_deep_nesting"] = (container(*pack(base_desc, base_w, meta_text="[" * 50000 + "]" * 50000)),
                                     "effect description", "an array nested 50 000 levels deep")
    deep_header = json.dumps(pack(base_desc, base_w)[0], separators=(",", ":")).encode()
    I["header_deep_nesting"] = (container(deep_header[:-1] + b',"x":' + b"[" * 50000 + b"]" * 50000 + b"}",
                                          pack(base_desc, base_w)[1]), "header", "a header entry nested 50 000 levels deep")
    hb = json.dumps(pack(base_desc, base_w)[0], separators=(",", ":")).encode()
    I["header_trailing_bytes"] = (container(hb + b" x", pack(base_desc, base_w)[1]), "effect file header",
                                  "bytes after the header's JSON object")
    I["header_trailing_nul"] = (container(hb + b"\0", pack(base_desc, base_w)[1]), "effect file header",
                                "a NUL after the header's JSON object")
    I["header_invalid_utf8"] = (container(hb.replace(b'"a.weight"', b'"a.\xffweight"', 1),
                                          pack(base_desc, base_w)[1]), "effect file header",
                                "a tensor name that is not UTF-8 (byte 0xff)")
    bad_title = good_meta.encode().replace(b'"corpus"', b'"cor\xc3pus"')
    I["description_invalid_utf8"] = (container(hb.replace(json.dumps(good_meta)[1:-1].encode(),
                                                          json.dumps(good_meta)[1:-1].encode()
                                                          .replace(b"corpus", b"cor\xc3pus")),
                                               pack(base_desc, base_w)[1]), "effect",
                                     "a truncated UTF-8 sequence (0xc3) in the title")
    del bad_title
    I["tensor_listed_twice"] = (container(hb.replace(b'"a.bias":', b'"a.weight":', 1), pack(base_desc, base_w)[1]),
                                "a.weight", "a tensor name twice in the header (JSON duplicate key)")
    hdr_case("tensor_over_max_parameters", lambda h, d: h["a.weight"].update(shape=[4097, 4097]),
             "16777216", "one tensor of 4097 x 4097 values, over kMaxParameters (refused before its data is read)")
    hdr_case("tensor_entry_not_object", lambda h, d: h.update({"a.weight": 5}), "a.weight", "entry is a number")
    hdr_case("dtype_missing", lambda h, d: h["a.weight"].pop("dtype"), "dtype", "no dtype")
    hdr_case("dtype_unknown", lambda h, d: h["a.weight"].update(dtype="Q4"), "dtype", "dtype Q4")
    hdr_case("shape_five_dims", lambda h, d: h["a.weight"].update(shape=[1, 1, 1, 1, 2]), "shape", "5 dimensions")
    hdr_case("shape_zero_dim", lambda h, d: h["a.weight"].update(shape=[0, 1]), "dimension", "a zero dimension")
    hdr_case("shape_dim_over_65536", lambda h, d: h["a.weight"].update(shape=[65537, 1]), "dimension",
             "dimension over kMaxDim")
    hdr_case("shape_bytes_mismatch", lambda h, d: h["a.weight"].update(shape=[2, 2]), "a.weight",
             "shape needs 16 bytes, span is 8")
    hdr_case("offsets_missing", lambda h, d: h["a.weight"].pop("data_offsets"), "data_offsets", "no offsets")
    hdr_case("offsets_reversed", lambda h, d: h["a.weight"].update(data_offsets=[8, 0]), "data_offsets",
             "begin after end")
    hdr_case("offsets_negative", lambda h, d: h["a.weight"].update(data_offsets=[-8, 0]), "data_offsets",
             "negative offset")
    hdr_case("offsets_outside", lambda h, d: h["o.bias"].update(
        data_offsets=[len(d) - 2, len(d) + 2]), "data_offsets", "span past the data section")

    def overlap(h, d):
        h["a.bias"]["data_offsets"] = list(h["a.weight"]["data_offsets"])
    hdr_case("offsets_overlap", overlap, "overlaps", "two tensors share bytes")
    hdr_case("tensor_extra", lambda h, d: (h.update({"x.weight": {"dtype": "F32", "shape": [1],
                                                                   "data_offsets": [len(d), len(d) + 4]}}),
                                           d + b"\0\0\0\0")[1], "x.weight", "a tensor the graph does not use")

    def drop(h, d):
        h.pop("o.bias")
    hdr_case("tensor_missing", drop, "o.bias", "a tensor the graph needs is absent")
    nan = dict(base_w)
    nan["a.bias"] = ("F32", np.array([0.0, np.nan], np.float32))
    I["weight_nan"] = (container(*pack(base_desc, nan)), "a.bias", "a NaN weight")
    inf16 = {k: ("F16", v) for k, (_, v) in base_w.items()}
    inf16["o.weight"] = ("F16", np.array([[np.inf, 0]], np.float32))
    I["weight_f16_inf"] = (container(*pack(base_desc, inf16)), "o.weight", "an F16 infinity")

    def d(**kw):
        x = json.loads(json.dumps(base_desc))
        for k, v in kw.items():
            if v is None:
                x.pop(k)
            else:
                x[k] = v
        return x
    desc_case("format_wrong", d(format="other"), "format", "format is not earshot-effect")
    desc_case("version_missing", d(version=None), "version", "no version")
    desc_case("version_2", d(version=2), "too new", "version 2")
    desc_case("version_0", d(version=0), "version", "version 0")
    desc_case("version_float", d(version=1.0), "version", "version 1.0 (a JSON number with a fraction part)")
    desc_case("rate_string", d(sample_rate="48000"), "sample_rate", "sample_rate as a string")
    desc_case("rate_7999", d(sample_rate=7999), "sample_rate", "below 8000 Hz")
    desc_case("rate_384001", d(sample_rate=384001), "sample_rate", "above 384000 Hz")
    desc_case("rate_fraction", d(sample_rate=48000.5), "sample_rate", "not a whole number of Hz")
    desc_case("graph_missing", d(graph=None), "graph", "no graph")
    desc_case("credits_missing", d(credits=None), "credits", "no credits")
    desc_case("credits_title_long", d(credits={"title": "t" * 1001}), "title", "title over 1000 characters")
    desc_case("credits_authors_not_array", d(credits={"title": "x", "authors": "me"}), "authors",
              "authors is a string")
    desc_case("credits_paper_long", d(credits={"title": "x", "paper": "p" * 1001}), "paper", "paper too long")
    desc_case("controls_not_array", d(controls={}), "controls", "controls is an object", n_controls=0)
    desc_case("controls_17", effect([lin("g", 1, 1)], controls=[control("c%d" % i) for i in range(17)]),
              "controls", "one over kMaxControls")
    desc_case("control_name_33", d(controls=[control("c" * 33)]), "name", "control name one over 32 characters")
    desc_case("control_name_bad_char", d(controls=[control("dr-ive")]), "name", "'-' in a control name")
    desc_case("control_name_utf8", d(controls=[control("dr\u00efve")]), "name", "non-ASCII control name")
    desc_case("control_named_audio", d(controls=[control("audio")]), "audio", "a control named like the input sample")
    desc_case("control_name_twice", d(controls=[control("k"), control("k")]), "twice", "duplicate control name")
    desc_case("control_unit_17", d(controls=[control("k", unit="u" * 17)]), "unit", "unit one over 16")
    desc_case("control_min_not_below_max", d(controls=[control("k", 1, 1, 1)]), "min", "min = max")
    desc_case("control_default_outside", d(controls=[control("k", 0, 1, 2)]), "default", "default above max")
    desc_case("control_smoothing_10001", d(controls=[control("k", smoothing_ms=10001)]), "smoothing_ms",
              "smoothing over 10000 ms")
    desc_case("control_not_object", d(controls=["drive"]), "controls[0]", "a control given as a bare name")
    desc_case("control_max_not_number", d(controls=[control("k", hi="1")]), "max", "max is a string")
    desc_case("credits_author_long", d(credits={"title": "x", "authors": ["a" * 1001]}), "authors",
              "an author over 1000 characters")
    desc_case("control_min_missing", d(controls=[{"name": "k", "max": 1, "default": 0}]), "min", "no min")

    def g(layers, controls=(control("drive"),), inputs=("audio",), **kw):
        return effect(layers, controls=controls, inputs=inputs, **kw)
    desc_case("inputs_no_audio", g([lin("g", 1, 1)], inputs=["drive"]), "audio", "no audio input")
    desc_case("inputs_audio_twice", g([lin("g", 2, 1)], inputs=["audio", "audio"]), "audio", "audio twice")
    desc_case("inputs_unknown", g([lin("g", 2, 1)], inputs=["audio", "gain"]), "gain", "an undeclared input")
    desc_case("layers_empty", g([]), "layers", "no layers")
    desc_case("layer_not_object", g(["linear"]), "layer 0", "a layer given as a string", no_tensors=True)
    desc_case("layer_type_not_string", g([dict(lin("g", 1, 1), type=1)]), "type", "type is a number")
    bare = g([lin("g", 1, 1)])
    bare["graph"]["inputs"] = "audio"
    desc_case("inputs_not_array", bare, "inputs", "inputs is a string", no_tensors=True)
    desc_case("inputs_entry_not_string", g([lin("g", 2, 1)], inputs=["audio", 1]), "inputs",
              "an input given as a number")
    desc_case("input_skip_not_bool", g([lin("g", 1, 1)], input_skip="yes"), "input_skip", "input_skip is a string")
    desc_case("layers_257", effect([lin("l%03d" % i, 1, 1, False) for i in range(257)]), "layers",
              "one over kMaxLayers", no_tensors=True)
    desc_case("layer_type_unknown", g([{"type": "magic", "name": "m", "in": 1}]), "magic", "unknown layer type")
    desc_case("layer_name_65", g([lin("n" * 65, 1, 1)]), "name", "layer name one over 64 characters")
    desc_case("layer_name_utf8", g([lin("g\u00e9", 1, 1)]), "name", "non-ASCII layer name")
    desc_case("layer_name_twice", g([lin("g", 1, 1), lin("g", 1, 1)]), "twice", "duplicate layer name")
    desc_case("layer_in_mismatch", g([lin("g", 2, 1)]), "'in'", "declared width 2, receives 1")
    desc_case("last_layer_two_channels", g([lin("g", 1, 2)]), "last layer", "ends in 2 channels")
    desc_case("linear_out_1025", g([lin("a", 1, 1025), lin("o", 1025, 1)]), "out", "one over kMaxChannels")
    desc_case("bias_not_bool", g([dict(lin("g", 1, 1), bias=1)]), "bias", "bias is a number")
    conv = {"type": "conv1d", "name": "c", "in": 1, "out": 1, "kernel": 2}
    desc_case("conv_kernel_65", g([dict(conv, kernel=65)]), "kernel", "one over kMaxKernel")
    desc_case("conv_kernel_float", g([dict(conv, kernel=2.0)]), "kernel", "kernel 2.0, not an integer",
              no_tensors=True)
    desc_case("conv_kernel_0", g([dict(conv, kernel=0)]), "kernel", "kernel 0", no_tensors=True)
    desc_case("conv_dilation_65537", g([dict(conv, dilation=65537)]), "dilation", "one over kMaxDilation")
    desc_case("conv_weight_shape", g([conv]), "c.weight", "weight [1, 1, 3] for kernel 2", n_controls=1)
    I["conv_weight_shape"] = (container(*pack(g([conv]), {"c.weight": ("F32", np.zeros((1, 1, 3), np.float32)),
                                                           "c.bias": ("F32", np.zeros(1, np.float32))})),
                              "c.weight", "weight [1, 1, 3] for kernel 2")
    rnn = {"type": "lstm", "name": "r", "in": 1, "hidden": 1}
    desc_case("lstm_layers_9", g([dict(rnn, num_layers=9)]), "num_layers", "one over kMaxRecurrentLayers")
    desc_case("gru_hidden_0", g([dict(rnn, type="gru", hidden=0)]), "hidden", "hidden 0", no_tensors=True)
    desc_case("gru_hidden_1025", g([dict(rnn, type="gru", hidden=1025), lin("o", 1025, 1)]), "hidden",
              "one over kMaxChannels", no_tensors=True)
    act = {"type": "activation", "name": "f", "channels": 1}
    desc_case("act_fn_unknown", g([dict(act, fn="swish")]), "swish", "unknown activation")
    desc_case("act_fn_missing", g([act]), "fn", "no fn")
    desc_case("act_hardtanh_min_not_below_max", g([dict(act, fn="hardtanh", min=1, max=1)]), "min < max",
              "hardtanh min = max")
    desc_case("act_slope_not_number", g([dict(act, fn="leaky_relu", slope="x")]), "slope", "slope is a string")
    desc_case("gated_odd", g([lin("a", 1, 3), {"type": "gated", "name": "q", "channels": 3}, lin("o", 1, 1)]),
              "even", "3 channels")
    film = {"type": "film", "name": "f", "channels": 1}
    desc_case("film_no_controls", effect([film]), "control", "FiLM without controls", no_tensors=True)
    desc_case("film_hidden_5", g([dict(film, hidden=[1] * 5)]), "hidden", "one over kMaxFilmHidden")
    desc_case("film_hidden_width_0", g([dict(film, hidden=[0])]), "hidden", "a hidden width 0", no_tensors=True)
    desc_case("film_hidden_width_1025", g([dict(film, hidden=[1025])]), "hidden", "a hidden width over kMaxChannels")
    desc_case("film_activation_unknown", g([dict(film, activation="swish")]), "swish", "unknown FiLM activation")
    desc_case("film_activation_not_string", g([dict(film, activation={"fn": "tanh"})]), "activation",
              "FiLM activation is an object")
    desc_case("film_hardtanh_min_not_below_max", g([dict(film, hidden=[1], activation="hardtanh", min=0.5,
                                                         max=0.5)]), "min < max", "FiLM hardtanh min = max")
    wn = {"type": "wavenet", "name": "w", "in": 1, "channels": 1, "skip": 1, "kernel": 2, "dilations": [1]}
    desc_case("wavenet_dilations_65", g([dict(wn, kernel=1, dilations=[1] * 65)]), "dilations",
              "one over kMaxWavenetLayers", no_tensors=True)
    desc_case("wavenet_dilations_empty", g([dict(wn, dilations=[])]), "dilations", "no dilations")
    desc_case("wavenet_dilation_0", g([dict(wn, dilations=[0])]), "dilation", "a dilation 0")
    desc_case("wavenet_skip_0", g([dict(wn, skip=0)]), "skip", "skip 0", no_tensors=True)
    tcn = {"type": "tcn", "name": "t", "in": 1, "out": 1, "kernel": 2}
    desc_case("tcn_activation_not_object", g([dict(tcn, activation="tanh")]), "activation",
              "activation is a bare string")
    desc_case("tcn_activation_unknown", g([dict(tcn, activation={"fn": "swish"})]), "swish", "unknown activation")
    desc_case("tcn_film_not_object", g([dict(tcn, film=[])]), "film", "film is an array", shapes_of=g([tcn]))
    desc_case("tcn_film_no_controls", effect([dict(tcn, film={})]), "control", "FiLM without controls",
              shapes_of=effect([tcn]))
    desc_case("tcn_residual_not_bool", g([dict(tcn, residual="yes")]), "residual", "residual is a string")
    desc_case("tcn_kernel_65", g([dict(tcn, kernel=65)]), "kernel", "one over kMaxKernel")
    desc_case("receptive_field_over", g([dict(wn, dilations=[65536] * 16)]), "receptive field",
              "1 + 16·65536 = 2^20 + 1 samples")
    return I


# Faults dsp/FORMAT.md refuses ("valid JSON", UTF-8) that the core's description
# parse still lets through on this branch; the shared JSON reader (dsp/core/
# json_reader.hpp, another branch) refuses them. Listed under "pending" in
# index.json, not run; move each to "invalid" and re-bless once that lands.
PENDING = set()  # refusals the core does not make yet (none)


# Valid files written in exactly the form the Python exporter writes (every field
# it writes, in its order, tensors in its order): re-exporting them must give the
# same bytes (tests/python/test_corpus.py). The others omit optional fields.
EXPORTER_FORM = {"act_hardtanh", "act_identity", "act_leaky_relu", "act_relu", "act_sigmoid", "act_softsign",
                 "act_tanh", "credits_full", "edge_channels_1024", "edge_layers_256", "gated", "linear",
                 "linear_nobias_skip", "rate_384000", "rate_8000"}


def main():
    index = {"valid": [], "invalid": [], "pending": []}
    for sub in ("valid", "invalid"):
        os.makedirs(os.path.join(HERE, sub), exist_ok=True)
        for f in os.listdir(os.path.join(HERE, sub)):
            if f.endswith(".nfx"):
                os.remove(os.path.join(HERE, sub, f))
    for name, desc in valid_files().items():
        dtype = "F16" if name.endswith("_f16") else "F32"
        with open(os.path.join(HERE, "valid", name + ".nfx"), "wb") as f:
            f.write(file_bytes(name, desc, dtype))
        index["valid"].append(dict({"file": f"valid/{name}.nfx"},
                                   **({"exporter_form": True} if name in EXPORTER_FORM else {})))
    for name, (data, names, why) in invalid_files().items():
        with open(os.path.join(HERE, "invalid", name + ".nfx"), "wb") as f:
            f.write(data)
        index["pending" if name in PENDING else "invalid"].append(
            {"file": f"invalid/{name}.nfx", "names": names, "why": why})
    with open(os.path.join(HERE, "index.json"), "w") as f:
        json.dump(index, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
