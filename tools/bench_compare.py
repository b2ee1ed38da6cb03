#!/usr/bin/env python3
"""Two builds of earshot, before and after a change, timed in one run.

  /usr/bin/python3 tools/bench_compare.py OLD_EARSHOT NEW_EARSHOT [FILE.nfx ...]
      [--seconds 1] [--rounds 3] [--block 128] [--variants avx2,sse4]

Each round runs `earshot bench FILE --json --rounds 1` with the old binary,
then the new one, for every file, so both see the same machine load; the table
shows medians over rounds of × real time and the share of the variant's own
multiply-add peak (both from `earshot bench`), and new/old speed. Default
files: build/bench-models/*.nfx (tools/make_bench_models.py).

A baseline binary is the `earshot` of any earlier commit, e.g.
  mkdir /tmp/base && git archive REV | tar -x -C /tmp/base
  cmake -S /tmp/base -B /tmp/base/build -DCMAKE_BUILD_TYPE=Release && nice cmake --build /tmp/base/build -j2 --target earshot
"""
import argparse
import glob
import json
import os
import statistics
import subprocess
import sys

ROOT = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))


def bench(exe, path, seconds, block):
    out = subprocess.run([exe, "bench", path, "--json", "--rounds", "1", "--seconds", str(seconds), "--block", str(block)],
                         check=True, capture_output=True, text=True).stdout
    return {v["variant"]: v for v in json.loads(out)["variants"]}


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("old")
    ap.add_argument("new")
    ap.add_argument("files", nargs="*")
    ap.add_argument("--seconds", type=float, default=1.0)
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--block", type=int, default=128)
    ap.add_argument("--variants", default="sse4,avx2,avx2fma")
    a = ap.parse_args()
    for exe in (a.old, a.new):
        if not os.access(exe, os.X_OK):
            sys.exit(f"bench_compare: {exe} is not an executable")
    if not (0.1 <= a.seconds <= 600) or not (1 <= a.rounds <= 100):
        sys.exit("bench_compare: --seconds must be 0.1..600 and --rounds 1..100")
    files = a.files or sorted(glob.glob(os.path.join(ROOT, "build", "bench-models", "*.nfx")))
    if not files:
        sys.exit("bench_compare: no effect files (run /usr/bin/python3 tools/make_bench_models.py)")
    want = [v for v in a.variants.split(",") if v]
    runs = {}  # (file, which, variant) -> ([realtime], [share])
    for r in range(a.rounds):
        for f in files:
            for which, exe in (("old", a.old), ("new", a.new)):
                for v, row in bench(exe, f, a.seconds, a.block).items():
                    rt, sh = runs.setdefault((f, which, v), ([], []))
                    rt.append(row["realtime"])
                    sh.append(row["share_of_peak"])
        print(f"round {r + 1}/{a.rounds} done", file=sys.stderr)

    med = {k: (statistics.median(v[0]), statistics.median(v[1])) for k, v in runs.items()}
    print(f"block {a.block}, {a.seconds:g} s per variant per round, median of {a.rounds} interleaved rounds; "
          "× real time (share of the variant's peak)\n")
    print("| model | " + " | ".join(f"{v} before | {v} after | {v} after/before" for v in want) + " |")
    print("|---|" + "---:|---:|---:|" * len(want))
    for f in files:
        cells = []
        for v in want:
            if (f, "old", v) not in med or (f, "new", v) not in med:
                cells += ["—"] * 3
                continue
            (ro, so), (rn, sn) = med[(f, "old", v)], med[(f, "new", v)]
            cells += [f"{ro:.1f}× ({100 * so:.0f} %)", f"{rn:.1f}× ({100 * sn:.0f} %)", f"{rn / ro:.2f}"]
        print(f"| {os.path.basename(f)[:-4]} | " + " | ".join(cells) + " |")


if __name__ == "__main__":
    main()
