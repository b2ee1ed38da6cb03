#!/usr/bin/env python3
"""earshot against PyTorch on the same weights, side by side, in one run.

Builds PyTorch models of the sizes researchers publish (LSTM and GRU hidden
16/32/64/96 with a linear head; WaveNet 10 layers x 8/16/24 channels, kernel 3;
TCN 4 blocks x 16 channels, kernel 5, FiLM on two controls), exports each with
earshot's exporter into build/bench-vs-torch/, and in interleaved rounds times

  earshot   every native variant this CPU runs (`earshot bench --json
            --rounds 1`: thread CPU time around earshot_process, blocks of
            --block samples, the standard test signal)
  PyTorch   1.13 or later, torch.set_num_threads(1), under torch.no_grad():
            whole clip  one forward call over the whole clip
            stream      blocks of --block samples, carrying the (h, c) state
                        between calls (recurrent models only: a convolution
                        has no state to carry in PyTorch, so streaming it
                        would mean re-running its receptive field every
                        block; the conv models are timed whole-clip only)
            timed with time.thread_time() (the thread's CPU time, as earshot).

Each round runs every model once in every engine; the tables show medians
over rounds, "x real time" (audio seconds per CPU second), the ratio of each
earshot variant over PyTorch's best mode, and the cost in nanoseconds per
multiply-add (earshot's macs_per_sample, the same count for both engines).
Before timing, each model's earshot output (default variant, through the C
ABI) is compared with PyTorch's on the same clip: max |difference| is printed
so a table never compares two different networks.

Usage (from the repository root, after `cmake --build --preset native`):
  /usr/bin/python3 tools/bench_vs_torch.py                 # ~3 minutes
  /usr/bin/python3 tools/bench_vs_torch.py --long          # 5 s clips, 5 rounds
  /usr/bin/python3 tools/bench_vs_torch.py --only lstm-64,wavenet-16 --rounds 5
  /usr/bin/python3 tools/bench_vs_torch.py --wasm          # also tools/wasm-bench.mjs on the same files
Options: --seconds S (clip length, default 1), --rounds R (default 3),
--block N (default 128), --earshot PATH (default build/native/earshot),
--out DIR (default build/bench-vs-torch), --json FILE (write the medians),
--baseline PATH (an earlier earshot build, timed in the same rounds: columns
"<variant> before").
"""
import argparse
import json
import os
import statistics
import subprocess
import sys
import time

ROOT = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
sys.path.insert(0, os.path.join(ROOT, "python"))

import numpy as np  # noqa: E402
import torch  # noqa: E402

import earshot  # noqa: E402
from earshot import models, native  # noqa: E402

RATE = 48000
CONTROLS = [{"name": "drive", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20},
            {"name": "tone", "min": 0, "max": 1, "default": 0.5, "smoothing_ms": 20}]
DILATIONS = (1, 2, 4, 8, 16, 32, 64, 128, 256, 512)


def model_set():
    """name -> (model, recurrent?, export keywords). Fixed seed: speed, not sound."""
    torch.manual_seed(2026)
    out = {}
    for cell in ("lstm", "gru"):
        for h in (16, 32, 64, 96):
            out[f"{cell}-{h}"] = (models.recurrent(cell, hidden=h), True, {})
    for c in (8, 16, 24):
        out[f"wavenet-{c}"] = (models.wavenet(channels=c, dilations=DILATIONS, kernel=3), False, {})
    out["tcn-16"] = (models.tcn(CONTROLS, channels=16, kernel=5, dilations=(1, 4, 16, 64)), False,
                     {"controls": CONTROLS})
    return out


def test_clip(seconds):
    """A 220 Hz triangle at 0.25 plus a little seeded noise (what the speed sees hardly matters)."""
    n = int(round(seconds * RATE))
    t = np.arange(n) / RATE
    tri = 4 * np.abs(t * 220 - np.floor(t * 220 + 0.5)) - 1
    rng = np.random.default_rng(7)
    return (0.25 * tri + 0.01 * (rng.random(n) - 0.5)).astype(np.float32)


def torch_whole(model, x):
    t0 = time.thread_time()
    with torch.no_grad():
        y = model(x)
    return time.thread_time() - t0, y


def torch_stream(model, x, block):
    state = None
    parts = []
    t0 = time.thread_time()
    with torch.no_grad():
        for s in range(0, x.shape[1], block):
            y, state = model(x[:, s:s + block], state=state, return_state=True)
            parts.append(y)
    dt = time.thread_time() - t0
    return dt, torch.cat(parts, dim=1)


def earshot_bench(exe, path, seconds, block):
    out = subprocess.run([exe, "bench", path, "--json", "--rounds", "1", "--seconds", str(seconds),
                          "--block", str(block)], check=True, capture_output=True, text=True).stdout
    d = json.loads(out)
    return d["macs_per_sample"], {v["variant"]: v for v in d["variants"]}


def best_mode(m, engine):
    """engine's speed over PyTorch's faster mode, or for a torch column a mark on the faster mode."""
    best = min((m[k], k) for k in ("torch whole", "torch stream") if k in m)
    if "torch" in engine:
        return "best" if engine == best[1] else ""
    return f"{best[0] / m[engine]:.1f}×"


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seconds", type=float, default=None)
    ap.add_argument("--rounds", type=int, default=None)
    ap.add_argument("--block", type=int, default=128)
    ap.add_argument("--long", action="store_true", help="5 s clips and 5 rounds")
    ap.add_argument("--only", default="", help="comma-separated model names")
    ap.add_argument("--earshot", default=os.path.join(ROOT, "build", "native", "earshot"))
    ap.add_argument("--baseline", default="", help="a second earshot binary (an earlier build), timed in the same rounds")
    ap.add_argument("--out", default=os.path.join(ROOT, "build", "bench-vs-torch"))
    ap.add_argument("--json", default="")
    ap.add_argument("--wasm", action="store_true", help="also run tools/wasm-bench.mjs on the same files")
    a = ap.parse_args()
    seconds = a.seconds if a.seconds is not None else (5.0 if a.long else 1.0)
    rounds = a.rounds if a.rounds is not None else (5 if a.long else 3)
    if not (0.1 <= seconds <= 600) or not (1 <= rounds <= 100) or not (1 <= a.block <= 65536):
        sys.exit("bench_vs_torch: --seconds must be 0.1..600, --rounds 1..100, --block 1..65536")
    if not os.path.exists(a.earshot):
        sys.exit(f"bench_vs_torch: {a.earshot} not found (cmake --preset native && cmake --build --preset native)")
    if a.baseline and not os.access(a.baseline, os.X_OK):
        sys.exit(f"bench_vs_torch: --baseline {a.baseline} is not an executable")
    torch.set_num_threads(1)
    os.makedirs(a.out, exist_ok=True)

    made = model_set()
    if a.only:
        want = [w.strip() for w in a.only.split(",") if w.strip()]
        bad = [w for w in want if w not in made]
        if bad:
            sys.exit(f"bench_vs_torch: unknown model(s) {bad}; known: {', '.join(made)}")
        made = {k: made[k] for k in want}

    clip = test_clip(seconds)
    x = torch.from_numpy(clip)[None, :]
    paths, macs = {}, {}
    print(f"PyTorch {torch.__version__}, 1 thread; earshot {a.earshot}; {seconds:g} s clips at {RATE} Hz, "
          f"block {a.block}, {rounds} interleaved rounds, medians\n")
    print("same weights (earshot default variant vs PyTorch whole clip, max |difference|):")
    for name, (model, recurrent, kw) in made.items():
        model.eval()
        path = os.path.join(a.out, name + ".nfx")
        earshot.export(model, path, sample_rate=RATE, credits={"title": f"side-by-side {name}"}, **kw)
        paths[name] = path
        with open(path, "rb") as f, native.Stream(f.read(), RATE) as s:
            ye = s.process(clip, block=a.block)
        with torch.no_grad():
            yt = model(x)[0].numpy()
        print(f"  {name:12s} {float(np.max(np.abs(ye - yt))):.2e}")
    print()

    times = {n: {} for n in made}  # name -> engine -> [seconds per clip second]
    shares = {}  # name -> variant -> [earshot's share of the variant's measured multiply-add peak]
    for r in range(rounds):
        for name, (model, recurrent, kw) in made.items():
            for exe, suffix in ([(a.baseline, " before")] if a.baseline else []) + [(a.earshot, "")]:
                m, rows = earshot_bench(exe, paths[name], seconds, a.block)
                macs[name] = m
                for v, row in rows.items():
                    times[name].setdefault(v + suffix, []).append(1.0 / row["realtime"])
                    shares.setdefault(name, {}).setdefault(v + suffix, []).append(row["share_of_peak"])
            dt, _ = torch_whole(model, x)
            times[name].setdefault("torch whole", []).append(dt / seconds)
            if recurrent:
                dt, _ = torch_stream(model, x, a.block)
                times[name].setdefault("torch stream", []).append(dt / seconds)
        print(f"round {r + 1}/{rounds} done", file=sys.stderr)

    med = {n: {e: statistics.median(v) for e, v in t.items()} for n, t in times.items()}
    variants = [v + s for v in ("scalar", "sse4", "avx2", "avx2fma") for s in ((" before", "") if a.baseline else ("",))
                if any(v + s in m for m in med.values())]

    engines = variants + ["torch whole", "torch stream"]

    def table(title, cell):
        """One markdown table: a row per model, a column per engine; cell(model, engine) -> text."""
        print(f"\n{title}\n")
        print("| model | madd/sample | " + " | ".join(engines) + " |")
        print("|---|---:|" + "---:|" * len(engines))
        for n, m in med.items():
            print(f"| {n} | {macs[n]} | " + " | ".join(cell(n, e) if e in m else "—" for e in engines) + " |")

    table("x real time (higher is faster)", lambda n, e: f"{1.0 / med[n][e]:.{2 if 'torch' in e else 1}f}")
    table("earshot speed over PyTorch's best mode (whole clip, or stream where faster); torch columns: which is best",
          lambda n, e: best_mode(med[n], e))
    table("cost per multiply-add, ns (lower is cheaper)", lambda n, e: f"{med[n][e] * 1e9 / (macs[n] * RATE):.3f}")
    table("earshot's share of each variant's own multiply-add peak (`earshot bench`)",
          lambda n, e: "" if "torch" in e else f"{100 * statistics.median(shares[n][e]):.0f} %")

    if a.json:
        tmp = a.json + ".tmp"
        with open(tmp, "w") as f:
            json.dump({"seconds": seconds, "rounds": rounds, "block": a.block, "torch": torch.__version__,
                       "macs_per_sample": macs, "cpu_seconds_per_audio_second": med,
                       "share_of_peak": {n: {v: statistics.median(x) for v, x in sh.items()} for n, sh in shares.items()}}, f, indent=1)
        os.replace(tmp, a.json)

    if a.wasm:
        print("\nWebAssembly (tools/wasm-bench.mjs, same files):\n", flush=True)
        env = dict(os.environ, NODE_PATH="/usr/share/nodejs")
        subprocess.run(["node", os.path.join(ROOT, "tools", "wasm-bench.mjs"), "--seconds", str(seconds),
                        "--block", str(a.block), "--repeats", str(rounds)] + list(paths.values()),
                       check=True, env=env, cwd=ROOT)


if __name__ == "__main__":
    main()
