"""Command line: `python3 -m earshot export ...` and `python3 -m earshot info FILE`."""

import argparse
import importlib
import inspect
import json
import os
import sys

import torch

from .container import FormatError
from .exporter import ExportError, export
from .layer_types import layer_figures
from .loader import load, read


def figures(desc):
    """Parameters, multiply-adds per sample and receptive field, as dsp/FORMAT.md defines them."""
    madds, rf, recurrent = 0, 1, False
    for layer in desc["graph"]["layers"]:
        m, f, r = layer_figures(layer)
        madds, rf, recurrent = madds + m, rf + f, recurrent or r
    return {"madds_per_sample": madds, "receptive_field": "recurrent" if recurrent else rf}


def _control_arg(text):
    """A control as JSON ({"name": ...}) or as name=drive,min=0,max=1,default=0.5,unit=dB,smoothing_ms=20."""
    text = text.strip()
    if text.startswith("{"):
        return json.loads(text)
    out = {}
    for part in text.split(","):
        if "=" not in part:
            if not out:
                out["name"] = part
                continue
            raise argparse.ArgumentTypeError(f"control field {part!r} is not key=value")
        k, v = part.split("=", 1)
        out[k.strip()] = v if k.strip() in ("name", "unit") else float(v)
    return out


def _load_model(spec, state_dict):
    if ":" in spec and not os.path.exists(spec):
        mod, attr = spec.split(":", 1)
        obj = getattr(importlib.import_module(mod), attr)
        model = obj if isinstance(obj, torch.nn.Module) else obj()
    else:
        model = torch.load(spec, map_location="cpu")
        if isinstance(model, dict):
            raise SystemExit(f"{spec} holds a state dict, not a model: pass the model as module:factory "
                             f"and the weights with --state-dict {spec}")
    if not isinstance(model, torch.nn.Module):
        raise SystemExit(f"{spec} does not give a torch.nn.Module (got {type(model).__name__})")
    if state_dict:
        model.load_state_dict(torch.load(state_dict, map_location="cpu"))
    return model.eval()


class ModelCallError(Exception):
    """`verify --model`: the model could not be loaded or called (exit code 3, not a FAIL)."""


def _model_caller(model, n_controls):
    """(call(x [T], ctl [1, T, n] or None) -> y [T], per_call_controls, convention text) for the
    researcher's model: an earshot.Effect, or a module whose convention is detected as the
    exporter's tracer detects it (audio [B, T] / [B, T, 1] / [B, 1, T]; controls [B, n],
    [B, T, n] or one argument each)."""
    from .modules import Effect
    from .trace import _example_inputs
    from .layer_types import ExportError
    if isinstance(model, Effect):
        return (lambda x, ctl: model(x[None], ctl)[0]), False, "earshot.Effect: audio [B, T], controls [B, T, n]"
    n_args = sum(1 for p in inspect.signature(model.forward).parameters.values()
                 if p.default is inspect.Parameter.empty and p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD))
    if n_args < 1:
        raise ModelCallError(f"{type(model).__name__}.forward takes no audio argument")
    try:
        _, (audio, controls) = _example_inputs(model, n_args, n_controls, (2, 97))
    except ExportError as e:
        raise ModelCallError(str(e)) from None
    shape_audio = {"[B, T]": lambda x: x[None], "[B, T, 1]": lambda x: x[None, :, None],
                   "[B, 1, T]": lambda x: x[None, None, :]}[audio]
    per_call = controls.startswith("[B, ") and "T" not in controls or controls.startswith("[B] ")

    def controls_args(ctl):
        if controls == "none":
            return []
        if controls.startswith("[B, T, "):
            return [ctl]
        if controls == "[B, T]":
            return [ctl[..., 0]]
        if controls == "[B, T] each":
            return [ctl[..., i] for i in range(ctl.shape[-1])]
        if controls == "[B, 1] each":
            return [ctl[:, 0, i:i + 1] for i in range(ctl.shape[-1])]
        if controls == "[B] each":
            return [ctl[:, 0, i] for i in range(ctl.shape[-1])]
        return [ctl[:, 0, :]]  # [B, n]

    def call(x, ctl):
        return model(shape_audio(x), *controls_args(ctl)).reshape(-1)
    return call, per_call, f"audio {audio}, controls {controls}"


def verify(args):
    """`verify`: core (through the C ABI) against the PyTorch reference of the same file."""
    import numpy as np
    from . import native
    from .modules import smooth_controls
    from .signals import programme

    blob = open(args.file, "rb").read()
    model = load(blob)
    rate = model.sample_rate
    x = programme(args.seconds, rate)
    n = len(x)
    events = []
    if not args.fixed_controls:
        rng = np.random.default_rng(7)
        for frac in (0.25, 0.5, 0.75):
            for i, c in enumerate(model.controls):
                events.append((int(frac * n), i, float(rng.uniform(c["min"], c["max"]))))
    defaults = [c["default"] for c in model.controls]
    smoothing = [c["smoothing_ms"] for c in model.controls]

    def trajectory(evs):
        return smooth_controls(n, rate, defaults, evs, smoothing)[None] if model.controls else None
    ctl = trajectory(events)
    used = {}
    y = native.render(blob, x, rate, events, block=args.block, variant=args.variant, info=used).astype(np.float64)

    def as_dtype(m, dtype):
        import copy
        return copy.deepcopy(m).eval().to(dtype)

    def ref(m, dtype):
        m = as_dtype(m, dtype)
        with torch.no_grad():
            return m(torch.from_numpy(x).to(dtype)[None], None if ctl is None else ctl.to(dtype))[0].double().numpy()

    rows = []

    def row(label, r, core=y, held=True, why=""):
        num, den = np.sum((r - core) ** 2), np.sum(r ** 2)
        e = -np.inf if num == 0 else 10 * np.log10(num / max(den, 1e-300))
        mx = float(np.max(np.abs(r - core)))
        ok = e <= args.esr and mx <= args.max_abs
        verdict = ("pass" if ok else "FAIL") if held else "informative"
        print(f"  {label:<34} ESR {e:8.1f} dB   max abs {mx:.2e}   {verdict}{'  (' + why + ')' if why else ''}")
        rows.append(ok or not held)

    print(f"{args.file}: {n} samples at {rate} Hz, core variant {used['variant']}, blocks of {args.block}, "
          f"{len(events)} control changes")
    row("core vs PyTorch float32 (file)", ref(model, torch.float32))
    row("core vs PyTorch float64 (file)", ref(model, torch.float64))
    if args.model:
        try:
            orig = _load_model(args.model, None)
            call, per_call, convention = _model_caller(orig, len(model.controls))
        except ModelCallError:
            raise
        except (SystemExit, Exception) as e:  # noqa: BLE001 - anything that stops the model loading
            raise ModelCallError(f"--model {args.model}: {e}") from None
        core, c = y, ctl
        note = []
        if per_call and events:
            # the model takes one control value per call: compare with the controls held at their defaults
            core = native.render(blob, x, rate, [], block=args.block, variant=args.variant).astype(np.float64)
            c = trajectory([])
            note.append("controls at their defaults: the model takes one value per call")
        f16 = any(d == "F16" for d in getattr(model, "weight_dtypes", {}).values())
        if f16:
            note.append("the file stores F16 weights, the model F32: this is what F16 storage costs")
        try:
            with torch.no_grad():
                r = call(torch.from_numpy(x).float(), None if c is None else c.float()).double().numpy()
        except Exception as e:  # noqa: BLE001
            raise ModelCallError(f"--model {args.model} ({convention}) failed on the test signal: "
                                 f"{type(e).__name__}: {e}") from None
        if r.shape != (n,):
            raise ModelCallError(f"--model {args.model} ({convention}) gave {r.shape[0]} values for {n} samples")
        print(f"  your model: {convention}")
        row("core vs your model, float32", r, core, held=not f16, why="; ".join(note))
    ok = all(rows)
    print(f"{'PASS' if ok else 'FAIL'}: every held row within ESR <= {args.esr} dB, max abs <= {args.max_abs:g}")
    return 0 if ok else 1


def main(argv=None):
    p = argparse.ArgumentParser(prog="python3 -m earshot", description="earshot effect files from PyTorch")
    sub = p.add_subparsers(dest="cmd", required=True)
    e = sub.add_parser("export", help="write a model to an effect file (.nfx)")
    e.add_argument("model", help="a file saved with torch.save(model), or package.module:name where name "
                                 "is an nn.Module or a function returning one")
    e.add_argument("output", help="effect file to write, e.g. fx.nfx")
    e.add_argument("--state-dict", help="weights to load into the model first (torch.save(model.state_dict()))")
    e.add_argument("--sample-rate", type=float, help="training rate in Hz (default: model.sample_rate)")
    e.add_argument("--control", action="append", type=_control_arg, default=None,
                   help="a control, repeatable, in order: name=drive,min=0,max=1,default=0.5,unit=,smoothing_ms=20")
    e.add_argument("--title")
    e.add_argument("--author", action="append")
    e.add_argument("--paper")
    e.add_argument("--code")
    e.add_argument("--licence")
    e.add_argument("--dtype", choices=("f32", "f16"), default="f32")
    e.add_argument("--input-skip", action="store_true", help="for a plain nn.Sequential: add the input to the output")
    v = sub.add_parser("verify", help="run an effect file through the native core (ctypes) and through "
                                      "PyTorch, and report the difference",
                       epilog="exit codes: 0 every held row within the limits (PASS), 1 a row beyond them "
                              "(FAIL), 2 bad arguments, 3 the file or --model could not be read or called. "
                              "--model takes an earshot.Effect, or your own module with audio [B, T], "
                              "[B, T, 1] or [B, 1, T] and controls [B, n], [B, T, n] or one argument each "
                              "(detected by trying them in that order).")
    v.add_argument("file")
    v.add_argument("--model", help="also compare with this model (torch.save file or module:name), e.g. the "
                                   "one you exported, to see what F16 storage costs")
    v.add_argument("--seconds", type=float, default=10.0, help="length of the test signal (default 10)")
    v.add_argument("--block", type=int, default=512, help="samples per earshot_process call (default 512)")
    v.add_argument("--variant", help="core variant (default: the core's choice)")
    v.add_argument("--fixed-controls", action="store_true",
                   help="keep the controls at their defaults (default: move each one at 25, 50 and 75%%)")
    v.add_argument("--esr", type=float, default=-80.0, help="largest ESR in dB that passes (default -80)")
    v.add_argument("--max-abs", type=float, default=1e-4, help="largest abs error that passes (default 1e-4)")
    i = sub.add_parser("info", help="describe an effect file")
    i.add_argument("file")
    i.add_argument("--json", action="store_true", help="print the effect description as JSON")
    args = p.parse_args(argv)

    try:
        if args.cmd == "export":
            model = _load_model(args.model, args.state_dict)
            credits = dict(getattr(model, "credits", None) or {})
            for k, v in (("title", args.title), ("authors", args.author), ("paper", args.paper),
                         ("code", args.code), ("licence", args.licence)):
                if v:
                    credits[k] = v
            rate = args.sample_rate
            if rate is not None and rate.is_integer():
                rate = int(rate)
            desc = export(model, args.output, sample_rate=rate, controls=args.control,
                          credits=credits or None, dtype=args.dtype, input_skip=args.input_skip or None)
            f = figures(desc)
            print(f"wrote {args.output}: {len(desc['graph']['layers'])} layers, "
                  f"{os.path.getsize(args.output)} bytes, {f['madds_per_sample']} multiply-adds per sample")
            return 0
        if args.cmd == "verify":
            try:
                return verify(args)
            except ModelCallError as err:
                print(f"earshot verify: {err}", file=sys.stderr)
                return 3
        desc, tensors = read(args.file)
        load(args.file)  # full check
        if args.json:
            print(json.dumps(desc, indent=2))
            return 0
        f = figures(desc)
        params = sum(a.size for _, a in tensors.values())
        dtypes = sorted({c for c, _ in tensors.values()})
        print(f"title        {desc['credits'].get('title')}")
        print(f"sample rate  {desc['sample_rate']} Hz")
        print(f"parameters   {params} ({'/'.join(dtypes) or '-'})")
        print(f"madds/sample {f['madds_per_sample']}")
        print(f"receptive    {f['receptive_field']}")
        print(f"inputs       {', '.join(desc['graph']['inputs'])}; input skip "
              f"{'on' if desc['graph'].get('input_skip') else 'off'}")
        for c in desc["controls"]:
            # unit and smoothing_ms may be omitted (dsp/FORMAT.md: "" and 20 ms)
            print(f"control      {c['name']} [{c['min']} .. {c['max']}] default {c['default']} "
                  f"{c.get('unit', '')} smoothing {c.get('smoothing_ms', 20)} ms")
        for l in desc["graph"]["layers"]:
            rest = {k: v for k, v in l.items() if k not in ("type", "name")}
            print(f"layer        {l['name']}: {l['type']} {json.dumps(rest, separators=(',', ':'))}")
        return 0
    except (ExportError, FormatError, ValueError, OSError, RuntimeError) as err:
        print(f"earshot: {err}", file=sys.stderr)
        return 1
