"""Proves `earshot tally`: MUSHRA statistics (mean, t-based confidence interval,
standard deviation, median, quartiles, range) against NumPy and scipy.stats, the
ITU-R BS.1534-3 post-screening rule at its 15 % boundary, ABX one-tailed and A/B
two-sided exact binomial p-values against scipy.stats.binomtest (with the check
value 12 of 16 -> p = 0.038), the SVG box plots against NumPy quartiles and Tukey
whiskers, and a clear error naming the file and field for every malformed or
mismatched results file.

Drives $EARSHOT_BUILD/earshot (default build/native; conftest.need_built says
what happens when it is missing). Results files are written here as the format of docs/listening.md.
"""
import copy
import csv
import json
import math
import os
import pathlib
import subprocess
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from scipy import stats

from conftest import BUILD, need_built  # noqa: E402
EARSHOT = BUILD / "earshot"
OK, USAGE, INPUT = 0, 2, 3  # docs/cli.md
SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module", autouse=True)
def _built():
    need_built(EARSHOT)


def run(*args):
    p = subprocess.run([str(EARSHOT)] + [str(a) for a in args], capture_output=True, text=True, timeout=600)
    assert p.returncode >= 0, f"earshot {args} died by signal {-p.returncode}: {p.stderr}"
    return p


# ---- results files (docs/listening.md) ------------------------------------------------------------

MUSHRA_CONDITIONS = [{"id": "reference", "role": "reference"}, {"id": "lp3500", "role": "anchor-low"},
                     {"id": "lp7000", "role": "anchor-mid"}, {"id": "lstm", "role": "test"},
                     {"id": "gru", "role": "test"}]
PAIR_CONDITIONS = [{"id": "reference", "role": "reference"}, {"id": "lstm", "role": "test"},
                   {"id": "gru", "role": "test"}]


def fake_hash(item, cond):
    h = 14695981039346656037
    for b in f"{item}/{cond}".encode():
        h = ((h ^ b) * 1099511628211) % 2 ** 64
    return f"fnv1a64-float32le:{h:016x}"


def stimuli(items, conditions):
    return [{"item": i, "condition": c["id"], "hash": fake_hash(i, c["id"]), "source": "file"}
            for i in items for c in conditions]


def doc(participant, seed, trials, kind="mushra", test_id="clipper-study", conditions=None, items=None):
    conditions = conditions or (MUSHRA_CONDITIONS if kind == "mushra" else PAIR_CONDITIONS)
    items = items or sorted({t["item"] for t in trials})
    return {"format": "earshot-listening-results", "version": 1,
            "test": {"id": test_id, "type": kind, "title": "Clipper models"},
            "participant": {"id": participant, "seed": seed},
            "page": {"version": "0.1.0"},
            "started": "2025-01-01T10:00:00Z", "finished": "2025-01-01T10:20:00Z",
            "conditions": conditions, "stimuli": stimuli(items, conditions), "trials": trials}


def mushra_trial(item, ratings):
    return {"item": item, "order": list(ratings), "ratings": ratings}


def write(folder, name, d):
    p = pathlib.Path(folder) / name
    p.write_text(json.dumps(d, indent=1) if not isinstance(d, str) else d)
    return p


def read_csv(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def close(got, want):
    return abs(float(got) - want) <= 1e-9 * max(1.0, abs(want))


# ---- MUSHRA ------------------------------------------------------------------------------------------

ITEMS = ["gtr", "bass", "keys", "drums"]


def mushra_panel(seed):
    """Eight assessors: six clean, p-ref rates the hidden reference below 90 for 2 of
    4 items, p-mid rates the mid anchor above 90 for 1 of 4 items (25 % > 15 %)."""
    rng = np.random.default_rng(seed)
    docs = {}
    for k in range(8):
        pid = ["p1", "p2", "p3", "p4", "p5", "p6", "p-ref", "p-mid"][k]
        trials = []
        for j, item in enumerate(ITEMS):
            r = {"reference": float(rng.choice([100, 100, 97, 93.5])),
                 "lp3500": float(np.round(rng.uniform(0, 30), 1)),
                 "lp7000": float(np.round(rng.uniform(25, 65), 1)),
                 "lstm": float(np.round(rng.uniform(55, 95), 1)),
                 "gru": float(np.round(rng.uniform(40, 90), 1))}
            if pid == "p-ref" and j < 2:
                r["reference"] = [72.0, 88.0][j]
            if pid == "p-mid" and j == 3:
                r["lp7000"] = 95.0
            trials.append(mushra_trial(item, r))
        docs[pid] = doc(pid, 1000 + k, trials, items=ITEMS)
    return docs


def scores(docs, keep, cond, item=None):
    return np.array([t["ratings"][cond] for pid in keep for t in docs[pid]["trials"]
                     if item is None or t["item"] == item])


def test_mushra_worked_example_against_numpy_and_scipy(tmp_path):
    docs = mushra_panel(3)
    files = [write(tmp_path, f"{pid}.json", d) for pid, d in docs.items()]
    out_csv = tmp_path / "stats.csv"
    p = run("tally", *files, "--csv", out_csv)
    assert p.returncode == OK, p.stderr
    # Post-screening report: who and why (ITU-R BS.1534-3 rule, docs/listening.md).
    assert "excluded p-ref (" in p.stdout and "hidden reference rated below 90 in 2 of 4 items (50% > 15%)" in p.stdout
    assert "gtr 72, bass 88" in p.stdout
    assert "excluded p-mid (" in p.stdout and "mid anchor rated above 90 in 1 of 4 items (25% > 15%)" in p.stdout
    assert "6 of 8 assessors kept" in p.stdout
    keep = ["p1", "p2", "p3", "p4", "p5", "p6"]
    rows = read_csv(out_csv)
    assert len(rows) == 5 * (1 + len(ITEMS))
    for row in rows:
        item = None if row["scope"] == "all" else row["scope"]
        v = scores(docs, keep, row["condition"], item)
        n = len(v)
        mean, sd = v.mean(), v.std(ddof=1)
        # scipy.stats.t.interval: mean ± t_{0.975, n-1} · s/√n.
        lo, hi = stats.t.interval(0.95, n - 1, loc=mean, scale=stats.sem(v))
        q1, med, q3 = np.percentile(v, [25, 50, 75])  # NumPy's default: linear (type 7)
        assert int(row["n"]) == n == (len(keep) * (len(ITEMS) if item is None else 1))
        for key, want in [("mean", mean), ("sd", sd), ("ci_low", lo), ("ci_high", hi), ("median", med),
                          ("q1", q1), ("q3", q3), ("min", v.min()), ("max", v.max()), ("confidence", 0.95)]:
            assert close(row[key], want), (row["scope"], row["condition"], key, row[key], want)
    # The text table shows the same pooled mean for the test condition.
    lstm_all = scores(docs, keep, "lstm").mean()
    assert f"{lstm_all:.1f}" in [line.split()[3] for line in p.stdout.splitlines() if line.strip().startswith("lstm")]


def test_screening_boundary_is_more_than_15_percent(tmp_path):
    # 20 items: 3 hits = 15 % (kept: the rule says "more than 15 %"), 4 hits = 20 %
    # (excluded). A reference at exactly 90 is not "below 90"; a mid anchor at
    # exactly 90 is not "above 90".
    items = [f"i{k:02d}" for k in range(20)]

    def panel(pid, ref_low, mid_high, seed):
        trials = []
        for k, item in enumerate(items):
            r = {"reference": 85.0 if k < ref_low else 90.0, "lp3500": 10.0,
                 "lp7000": 91.0 if k < mid_high else 90.0, "lstm": 70.0, "gru": 60.0}
            trials.append(mushra_trial(item, r))
        return doc(pid, seed, trials, items=items)

    files = [write(tmp_path, f"{pid}.json", panel(pid, a, b, s))
             for pid, a, b, s in [("ref3", 3, 0, 1), ("ref4", 4, 0, 2), ("mid3", 0, 3, 3), ("mid4", 0, 4, 4)]]
    p = run("tally", *files)
    assert p.returncode == OK, p.stderr
    excluded = [line.split()[1] for line in p.stdout.splitlines() if line.strip().startswith("excluded")]
    assert excluded == ["ref4", "mid4"]
    assert "2 of 4 assessors kept" in p.stdout
    # --no-screening keeps everyone and still reports the rule's verdict.
    p = run("tally", *files, "--no-screening", "--csv", tmp_path / "all.csv")
    assert p.returncode == OK, p.stderr
    assert "would exclude ref4" in p.stdout and "4 of 4 assessors kept" in p.stdout
    assert [r["n"] for r in read_csv(tmp_path / "all.csv") if r["scope"] == "all"] == ["80"] * 5


@pytest.mark.parametrize("confidence", [0.90, 0.95, 0.99])
def test_t_quantile_against_scipy(tmp_path, confidence):
    # The CI half-width is t_{(1+c)/2, n-1} · s/√n; scipy.stats.t.ppf is the reference
    # for our quantile (bisection on the regularized incomplete beta function).
    rng = np.random.default_rng(int(confidence * 100))
    conds = [{"id": "reference", "role": "reference"}, {"id": "x", "role": "test"}]
    for n in [2, 3, 4, 5, 7, 10, 16, 30, 61, 120]:
        folder = tmp_path / f"n{n}"
        folder.mkdir()
        vals = np.round(rng.uniform(10, 90, size=n), 2)
        files = [write(folder, f"a{k}.json",
                       doc(f"a{k}", k, [mushra_trial("only", {"reference": 100.0, "x": float(vals[k])})],
                           conditions=conds, items=["only"])) for k in range(n)]
        p = run("tally", *files, "--csv", folder / "s.csv", "--confidence", confidence)
        assert p.returncode == OK, p.stderr
        row = [r for r in read_csv(folder / "s.csv") if r["scope"] == "all" and r["condition"] == "x"][0]
        half = (float(row["ci_high"]) - float(row["ci_low"])) / 2
        t_ours = half / (vals.std(ddof=1) / math.sqrt(n))
        t_scipy = stats.t.ppf((1 + confidence) / 2, n - 1)
        assert abs(t_ours - t_scipy) <= 1e-8 * t_scipy, (n, confidence, t_ours, t_scipy)
    # No interval from a single rating.
    one = tmp_path / "one.json"
    write(tmp_path, "one.json", doc("solo", 1, [mushra_trial("only", {"reference": 100.0, "x": 50.0})],
                                    conditions=conds, items=["only"]))
    p = run("tally", one, "--csv", tmp_path / "one.csv")
    assert p.returncode == OK, p.stderr
    row = [r for r in read_csv(tmp_path / "one.csv") if r["condition"] == "x"][0]
    assert row["ci_low"] == "" and row["sd"] == "" and row["mean"] == "50"


def test_svg_box_plots_match_numpy(tmp_path):
    docs = mushra_panel(8)
    files = [write(tmp_path, f"{pid}.json", d) for pid, d in docs.items()]
    out = tmp_path / "plots"
    p = run("tally", *files, "--svg", out)
    assert p.returncode == OK, p.stderr
    assert sorted(f.name for f in out.iterdir()) == sorted(["all.svg"] + [f"item-{i}.svg" for i in ITEMS])
    keep = ["p1", "p2", "p3", "p4", "p5", "p6"]
    for scope in [None] + ITEMS:
        root = ET.parse(out / ("all.svg" if scope is None else f"item-{scope}.svg")).getroot()
        assert root.tag == SVG + "svg"
        # The value axis from its own tick labels: y(v) = y0 + (y100 - y0)·v/100.
        ticks = {t.text: float(t.get("y")) - 4 for t in root.iter(SVG + "text") if t.get("text-anchor") == "end"}
        y0, y100 = ticks["0"], ticks["100"]
        y = lambda v: y0 + (y100 - y0) * v / 100
        boxes = [g for g in root.iter(SVG + "g") if g.get("class") == "box"]
        assert [b.get("data-condition") for b in boxes] == [c["id"] for c in MUSHRA_CONDITIONS]
        for b in boxes:
            v = np.sort(scores(docs, keep, b.get("data-condition"), scope))
            q1, med, q3 = np.percentile(v, [25, 50, 75])
            iqr = q3 - q1
            inside = v[(v >= q1 - 1.5 * iqr) & (v <= q3 + 1.5 * iqr)]  # Tukey's whiskers
            outliers = v[(v < q1 - 1.5 * iqr) | (v > q3 + 1.5 * iqr)]
            for key, want in [("data-q1", q1), ("data-median", med), ("data-q3", q3), ("data-mean", v.mean()),
                              ("data-whisker-low", inside.min()), ("data-whisker-high", inside.max())]:
                assert close(b.get(key), want), (scope, b.get("data-condition"), key)
            rect = [e for e in b if e.get("class") == "iqr"][0]
            assert abs(float(rect.get("y")) - y(q3)) < 2e-3
            assert abs(float(rect.get("height")) - (y(q1) - y(q3))) < 2e-3
            median = [e for e in b if e.get("class") == "median"][0]
            assert abs(float(median.get("y1")) - y(med)) < 2e-3
            whisker = [e for e in b if e.get("class") == "whisker"][0]
            assert abs(float(whisker.get("y1")) - y(inside.max())) < 2e-3
            assert abs(float(whisker.get("y2")) - y(inside.min())) < 2e-3
            dots = sorted(float(c.get("cy")) for c in b if c.get("class") == "outlier")
            assert np.allclose(dots, sorted(y(o) for o in outliers), atol=2e-3)


# ---- ABX and A/B ------------------------------------------------------------------------------------

def abx_trials(item, a, b, correct, n, seed):
    rng = np.random.default_rng(seed)
    out = []
    for k in range(n):
        x = "a" if rng.random() < 0.5 else "b"
        right = k < correct
        out.append({"item": item, "a": a, "b": b, "x": x, "answer": x if right else ("b" if x == "a" else "a")})
    return out


def test_abx_p_values_against_scipy_binomtest(tmp_path):
    # Check value (scipy.stats.binomtest(12, 16, 0.5, 'greater'); one-sided binomial tail, common practice):
    # 12 correct of 16 gives p = 0.038.
    one = write(tmp_path, "alice.json", doc("alice", 7, abx_trials("gtr", "reference", "lstm", 12, 16, 1), "abx"))
    p = run("tally", one, "--csv", tmp_path / "a.csv")
    assert p.returncode == OK, p.stderr
    ref = stats.binomtest(12, 16, 0.5, alternative="greater").pvalue
    assert round(ref, 3) == 0.038
    assert "0.0384" in p.stdout
    rows = read_csv(tmp_path / "a.csv")
    assert rows[0]["participant"] == "" and rows[0]["correct"] == "12" and rows[0]["trials"] == "16"
    assert close(rows[0]["p_one_tailed"], ref)
    # A panel: per participant and pooled per pair, the pair in declared condition order
    # whatever order A and B were presented in.
    cases = {"bob": (16, 16), "carol": (8, 16), "dave": (0, 16), "erin": (50, 80), "frank": (31, 40)}
    files = []
    for k, (pid, (c, n)) in enumerate(cases.items()):
        t = abx_trials("gtr", "lstm", "reference", c, n, k) if k % 2 else abx_trials("gtr", "reference", "lstm", c,
                                                                                       n, k)
        t += abx_trials("bass", "gru", "lstm", n // 4, n // 2, 10 + k)
        files.append(write(tmp_path, f"{pid}.json", doc(pid, k, t, "abx", items=["gtr", "bass"])))
    p = run("tally", *files, "--csv", tmp_path / "panel.csv")
    assert p.returncode == OK, p.stderr
    rows = read_csv(tmp_path / "panel.csv")
    for r in rows:
        want = stats.binomtest(int(r["correct"]), int(r["trials"]), 0.5, alternative="greater").pvalue
        assert close(r["p_one_tailed"], want), r
    pooled = {(r["pair_a"], r["pair_b"]): r for r in rows if r["participant"] == ""}
    assert set(pooled) == {("reference", "lstm"), ("lstm", "gru")}
    assert int(pooled[("reference", "lstm")]["correct"]) == sum(c for c, _ in cases.values())
    assert int(pooled[("reference", "lstm")]["trials"]) == sum(n for _, n in cases.values())
    per = {r["participant"]: r for r in rows if r["pair_a"] == "reference" and r["participant"]}
    for pid, (c, n) in cases.items():
        assert (int(per[pid]["correct"]), int(per[pid]["trials"])) == (c, n)
        assert per[pid]["seed"] == str(list(cases).index(pid))


def ab_trials(item, first, second, prefer_first, prefer_second, none, seed):
    rng = np.random.default_rng(seed)
    out = []
    for choice in ["first"] * prefer_first + ["second"] * prefer_second + ["none"] * none:
        swap = rng.random() < 0.5  # presentation order randomised
        a, b = (second, first) if swap else (first, second)
        if choice == "none":
            ans = "none"
        else:
            chosen = first if choice == "first" else second
            ans = "a" if chosen == a else "b"
        out.append({"item": item, "a": a, "b": b, "answer": ans})
    return out


def test_ab_preferences_against_scipy_binomtest(tmp_path):
    # Two-sided exact binomial test of the preferences, 'no preference' answers
    # counted but left out (docs/listening.md); reference: scipy.stats.binomtest.
    t1 = ab_trials("gtr", "reference", "lstm", 9, 3, 4, 1) + ab_trials("gtr", "lstm", "gru", 5, 5, 0, 2)
    t2 = ab_trials("gtr", "reference", "lstm", 6, 1, 2, 3) + ab_trials("gtr", "gru", "lstm", 1, 9, 1, 4)
    files = [write(tmp_path, "u1.json", doc("u1", 1, t1, "ab")), write(tmp_path, "u2.json", doc("u2", 2, t2, "ab"))]
    p = run("tally", *files, "--csv", tmp_path / "ab.csv")
    assert p.returncode == OK, p.stderr
    rows = {(r["pair_a"], r["pair_b"]): r for r in read_csv(tmp_path / "ab.csv")}
    assert set(rows) == {("reference", "lstm"), ("lstm", "gru")}
    r = rows[("reference", "lstm")]
    assert (r["prefer_a"], r["prefer_b"], r["no_preference"]) == ("15", "4", "6")
    assert close(r["p_two_sided"], stats.binomtest(15, 19, 0.5).pvalue)
    r = rows[("lstm", "gru")]
    assert (r["prefer_a"], r["prefer_b"], r["no_preference"]) == ("14", "6", "1")
    assert close(r["p_two_sided"], stats.binomtest(14, 20, 0.5).pvalue)
    # Ties do not move the test: more 'none' answers, same p.
    t3 = t1 + [{"item": "gtr", "a": "lstm", "b": "reference", "answer": "none"}] * 7
    files[0] = write(tmp_path, "u1.json", doc("u1", 1, t3, "ab"))
    p = run("tally", *files, "--csv", tmp_path / "ab2.csv")
    r2 = {(r["pair_a"], r["pair_b"]): r for r in read_csv(tmp_path / "ab2.csv")}[("reference", "lstm")]
    assert r2["no_preference"] == "13" and r2["p_two_sided"] == rows[("reference", "lstm")]["p_two_sided"]
    # Balanced preferences: p = 1 (scipy.stats.binomtest(5, 10).pvalue).
    even = write(tmp_path, "even.json", doc("e", 3, ab_trials("gtr", "lstm", "gru", 5, 5, 0, 9), "ab"))
    p = run("tally", even, "--csv", tmp_path / "even.csv")
    assert close(read_csv(tmp_path / "even.csv")[0]["p_two_sided"], stats.binomtest(5, 10, 0.5).pvalue)


# ---- bad input --------------------------------------------------------------------------------------

def base_mushra():
    return mushra_panel(1)["p1"]


def base_abx():
    return doc("x1", 1, abx_trials("gtr", "reference", "lstm", 3, 4, 0), "abx")


def base_ab():
    return doc("y1", 1, ab_trials("gtr", "reference", "lstm", 2, 1, 1, 0), "ab")


def mutate(base, fn):
    d = copy.deepcopy(base)
    fn(d)
    return d


def _del(d, *path):
    for k in path[:-1]:
        d = d[k]
    del d[path[-1]]


def _set(d, value, *path):
    for k in path[:-1]:
        d = d[k]
    d[path[-1]] = value


SINGLE_FILE_ERRORS = [
    ("not-json", lambda: "{\n  \"format\": ", ["line 2, column"]),
    ("array", lambda: "[]", ["(top level)", "must be a JSON object"]),
    ("format", lambda: mutate(base_mushra(), lambda d: _set(d, "something-else", "format")),
     ["format", "not an earshot results file"]),
    ("version", lambda: mutate(base_mushra(), lambda d: _set(d, 2, "version")), ["version", "not supported"]),
    ("no-test-id", lambda: mutate(base_mushra(), lambda d: _del(d, "test", "id")), ["test.id: missing"]),
    ("test-type", lambda: mutate(base_mushra(), lambda d: _set(d, "mos", "test", "type")),
     ["test.type", "'mos' is not a test type"]),
    ("test-id-type", lambda: mutate(base_mushra(), lambda d: _set(d, 5, "test", "id")),
     ["test.id", "must be a string, not a number"]),
    ("seed", lambda: mutate(base_mushra(), lambda d: _set(d, -1, "participant", "seed")), ["participant.seed"]),
    ("no-reference", lambda: mutate(base_mushra(), lambda d: _set(d, "test", "conditions", 0, "role")),
     ["conditions", "exactly one condition with role 'reference'"]),
    ("role", lambda: mutate(base_mushra(), lambda d: _set(d, "anchor", "conditions", 1, "role")),
     ["conditions[1].role", "'anchor' is not a role"]),
    ("dup-condition", lambda: mutate(base_mushra(), lambda d: _set(d, "lstm", "conditions", 4, "id")),
     ["conditions[4].id", "listed twice"]),
    ("stim-condition", lambda: mutate(base_mushra(), lambda d: _set(d, "tcn", "stimuli", 0, "condition")),
     ["stimuli[0].condition", "'tcn' is not one of the conditions"]),
    ("hash", lambda: mutate(base_mushra(), lambda d: _set(d, "abc", "stimuli", 2, "hash")),
     ["stimuli[2].hash", "ALGORITHM:HEX"]),
    ("dup-stimulus", lambda: mutate(base_mushra(), lambda d: d["stimuli"].append(dict(d["stimuli"][0]))),
     ["stimuli[20]", "twice"]),
    ("too-many", lambda: mutate(base_mushra(), lambda d: (
        d["conditions"].extend({"id": f"c{k}"} for k in range(8)),
        d["stimuli"].extend({"item": "gtr", "condition": f"c{k}", "hash": "x:00"} for k in range(8)))),
     ["stimuli", "item 'gtr' has 13 stimuli", "at most 12"]),
    ("trial-item", lambda: mutate(base_mushra(), lambda d: _set(d, "flute", "trials", 0, "item")),
     ["trials[0].item", "'flute' has no stimuli"]),
    ("rating-range", lambda: mutate(base_mushra(), lambda d: _set(d, 101, "trials", 1, "ratings", "lstm")),
     ["trials[1].ratings.lstm", "101 is outside the scale 0 .. 100"]),
    ("rating-type", lambda: mutate(base_mushra(), lambda d: _set(d, "80", "trials", 0, "ratings", "gru")),
     ["trials[0].ratings.gru", "must be a number, not a string"]),
    ("rating-missing", lambda: mutate(base_mushra(), lambda d: _del(d, "trials", 2, "ratings", "gru")),
     ["trials[2].ratings", "no rating for condition 'gru'"]),
    ("rating-unknown", lambda: mutate(base_mushra(), lambda d: _set(d, 50, "trials", 0, "ratings", "tcn")),
     ["trials[0].ratings.tcn", "no stimulus of condition 'tcn'"]),
    ("dup-item", lambda: mutate(base_mushra(), lambda d: _set(d, "gtr", "trials", 1, "item")),
     ["trials[1].item", "already rated"]),
    ("no-trials", lambda: mutate(base_mushra(), lambda d: _set(d, [], "trials")), ["trials", "holds no answers"]),
    ("abx-answer", lambda: mutate(base_abx(), lambda d: _set(d, "none", "trials", 0, "answer")),
     ["trials[0].answer", "forced choice"]),
    ("abx-x", lambda: mutate(base_abx(), lambda d: _set(d, "c", "trials", 2, "x")), ["trials[2].x", "'c'"]),
    ("abx-same", lambda: mutate(base_abx(), lambda d: _set(d, "reference", "trials", 1, "b")),
     ["trials[1]", "same condition 'reference'"]),
    ("abx-unknown", lambda: mutate(base_abx(), lambda d: _set(d, "tcn", "trials", 1, "a")),
     ["trials[1].a", "no stimulus of condition 'tcn'"]),
    ("ab-answer", lambda: mutate(base_ab(), lambda d: _set(d, "maybe", "trials", 0, "answer")),
     ["trials[0].answer", "'a', 'b' or 'none'"]),
]


# The optional familiarisation record and condition names (docs/listening.md, "Results file").
def with_familiarisation(d, seed=12345):
    d = copy.deepcopy(d)
    items = list(dict.fromkeys(s["item"] for s in d["stimuli"]))
    conds = [c["id"] for c in d["conditions"]]
    d["familiarisation"] = {"seed": seed, "order": [{"item": i, "conditions": conds[::-1]} for i in items[::-1]]}
    return d


def _fam(fn):
    return lambda: mutate(with_familiarisation(base_mushra()), fn)


FAMILIARISATION_ERRORS = [
    ("fam-type", _fam(lambda d: _set(d, [], "familiarisation")), ["familiarisation", "must be an object, not an array"]),
    ("fam-seed", _fam(lambda d: _set(d, -3, "familiarisation", "seed")),
     ["familiarisation.seed", "whole number from 0 to 2^53 - 1"]),
    ("fam-seed-missing", _fam(lambda d: _del(d, "familiarisation", "seed")), ["familiarisation.seed: missing"]),
    ("fam-order-type", _fam(lambda d: _set(d, "gtr", "familiarisation", "order")),
     ["familiarisation.order", "must be an array, not a string"]),
    ("fam-item", _fam(lambda d: _set(d, "flute", "familiarisation", "order", 1, "item")),
     ["familiarisation.order[1].item", "'flute' has no stimuli"]),
    ("fam-item-twice", _fam(lambda d: _set(d, d["familiarisation"]["order"][0]["item"], "familiarisation", "order", 2,
                                           "item")), ["familiarisation.order[2].item", "is listed twice"]),
    ("fam-item-missing", _fam(lambda d: d["familiarisation"]["order"].pop()),
     ["familiarisation.order", "does not list item"]),
    ("fam-cond", _fam(lambda d: _set(d, "tcn", "familiarisation", "order", 0, "conditions", 3)),
     ["familiarisation.order[0].conditions[3]", "has no stimulus of condition 'tcn'"]),
    ("fam-cond-twice", _fam(lambda d: _set(d, "gru", "familiarisation", "order", 0, "conditions", 1)),
     ["familiarisation.order[0].conditions[1]", "'gru' is listed twice"]),
    ("fam-cond-short", _fam(lambda d: d["familiarisation"]["order"][3]["conditions"].pop()),
     ["familiarisation.order[3].conditions", "lists 4 of the 5 stimuli"]),
    ("fam-cond-type", _fam(lambda d: _set(d, 7, "familiarisation", "order", 0, "conditions", 0)),
     ["familiarisation.order[0].conditions[0]", "must be a string, not a number"]),
    ("name-type", lambda: mutate(base_mushra(), lambda d: _set(d, 3, "conditions", 3, "name")),
     ["conditions[3].name", "must be a string, not a number"]),
    ("name-long", lambda: mutate(base_mushra(), lambda d: _set(d, "n" * 201, "conditions", 3, "name")),
     ["conditions[3].name", "longer than 200 characters"]),
]


ALL_FILE_ERRORS = SINGLE_FILE_ERRORS + FAMILIARISATION_ERRORS


@pytest.mark.parametrize("name,make,words", ALL_FILE_ERRORS, ids=[e[0] for e in ALL_FILE_ERRORS])
def test_single_file_errors_name_file_and_field(tmp_path, name, make, words):
    f = write(tmp_path, f"{name}.json", make())
    p = run("tally", f)
    assert p.returncode == INPUT, (p.stdout, p.stderr)
    assert f"{name}.json" in p.stderr, p.stderr
    for w in words:
        assert w in p.stderr, (w, p.stderr)


MIXED_ERRORS = [
    ("test-id", lambda d: _set(d, "other-study", "test", "id"),
     ["test.id", "'other-study' differs from 'clipper-study'", "different tests"]),
    ("hash", lambda d: _set(d, "fnv1a64-float32le:00000000000000ff", "stimuli", 3, "hash"),
     ["stimuli[3].hash", "different audio", "00000000000000ff"]),
    # The last stimulus (drums, gru) and its rating gone: consistent inside the file.
    ("missing-stimulus", lambda d: (d["stimuli"].pop(), d["trials"][3]["ratings"].pop("gru")),
     ["stimuli", "item 'drums', condition 'gru' of", "is missing"]),
    ("participant", lambda d: _set(d, "p1", "participant", "id"), ["participant.id", "'p1' also appears in"]),
    ("conditions", lambda d: _set(d, "tcn", "conditions", 3, "id"), ["conditions[3].id", "'tcn' differs from"]),
    ("roles", lambda d: (_set(d, "test", "conditions", 2, "role")), ["conditions[2].role", "differs from"]),
]


@pytest.mark.parametrize("name,change,words", MIXED_ERRORS, ids=[e[0] for e in MIXED_ERRORS])
def test_mixed_up_files_are_refused(tmp_path, name, change, words):
    panel = mushra_panel(2)
    first = write(tmp_path, "first.json", panel["p1"])
    d = copy.deepcopy(panel["p2"])
    change(d)
    # A changed condition must stay consistent inside the file itself.
    if name == "conditions":
        for s in d["stimuli"]:
            if s["condition"] == "lstm":
                s["condition"] = "tcn"
        for t in d["trials"]:
            t["ratings"]["tcn"] = t["ratings"].pop("lstm")
    second = write(tmp_path, "second.json", d)
    p = run("tally", first, second)
    assert p.returncode == INPUT, (p.stdout, p.stderr)
    assert "second.json" in p.stderr and "first.json" in p.stderr, p.stderr
    for w in words:
        assert w in p.stderr, (w, p.stderr)


def test_mixed_types_and_usage_errors(tmp_path):
    m = write(tmp_path, "m.json", base_mushra())
    a = write(tmp_path, "a.json", mutate(base_abx(), lambda d: _set(d, "clipper-study", "test", "id")))
    p = run("tally", m, a)
    assert p.returncode == INPUT and "a.json" in p.stderr and "test.type" in p.stderr
    assert "'abx' differs from 'mushra'" in p.stderr
    p = run("tally")
    assert p.returncode == USAGE and "RESULTS" in p.stderr
    p = run("tally", a, "--svg", tmp_path / "svg")
    assert p.returncode == USAGE and "--svg draws MUSHRA box plots" in p.stderr
    p = run("tally", m, "--confidence", "1.5")
    assert p.returncode == USAGE and "--confidence" in p.stderr
    p = run("tally", tmp_path / "nope.json")
    assert p.returncode == INPUT and "cannot read results file" in p.stderr and "nope.json" in p.stderr
    p = run("tally", tmp_path)
    assert p.returncode == INPUT and "is a folder" in p.stderr
    p = run("tally", m, "--svg", m)
    assert p.returncode == USAGE and "not a folder" in p.stderr


# ---- positions and incomplete participants ------------------------------------------------------

def line_col(text, offset):
    """1-based line and column in characters, as dsp/core/json_reader.hpp counts them."""
    return text.count("\n", 0, offset) + 1, offset - (text.rfind("\n", 0, offset) + 1) + 1


def test_field_errors_give_file_line_column_and_field(tmp_path):
    # "<file>: line L, column C: <field>: <what>", the shared reader's shape, at the
    # place the value starts (docs/listening.md).
    d = base_mushra()
    d["trials"][1]["ratings"]["lstm"] = 101
    f = write(tmp_path, "range.json", d)
    text = f.read_text()
    start = text.index('"trials"')
    for _ in range(2):
        start = text.index('"ratings"', start) + 1
    off = text.index('"lstm": 101', start) + len('"lstm": ')
    line, col = line_col(text, off)
    p = run("tally", f)
    assert p.returncode == INPUT
    assert f"{f}: line {line}, column {col}: trials[1].ratings.lstm: 101 is outside the scale 0 .. 100" in p.stderr, \
        p.stderr
    # A missing field is placed at the object that lacks it.
    d = base_mushra()
    del d["participant"]["id"]
    f = write(tmp_path, "noid.json", d)
    text = f.read_text()
    line, col = line_col(text, text.index("{", text.index('"participant"')))
    p = run("tally", f)
    assert p.returncode == INPUT
    assert f"{f}: line {line}, column {col}: participant.id: missing" in p.stderr, p.stderr


def incomplete_panel(tmp_path):
    docs = mushra_panel(5)
    del docs["p2"]["trials"][3]                     # skipped item 'drums' (its stimuli are listed)
    del docs["p3"]["trials"][2]["ratings"]["gru"]   # skipped one slider of item 'keys'
    files = [write(tmp_path, f"{pid}.json", d) for pid, d in docs.items()]
    return docs, files


def test_incomplete_mushra_participants_are_refused_by_default(tmp_path):
    docs, files = incomplete_panel(tmp_path)
    p = run("tally", *files)
    assert p.returncode == INPUT, (p.stdout, p.stderr)
    assert p.stdout == ""
    assert "2 participants are incomplete" in p.stderr and "--keep-incomplete" in p.stderr
    t2 = (tmp_path / "p2.json").read_text()
    line, col = line_col(t2, t2.index("[", t2.index('"trials"')))
    assert (f"p2.json: line {line}, column {col}: trials: participant 'p2' has no trial for item 'drums' "
            "(5 ratings missing: 'reference', 'lp3500', 'lp7000', 'lstm', 'gru')") in p.stderr, p.stderr
    t3 = (tmp_path / "p3.json").read_text()
    off = t3.index('"trials"')
    for _ in range(3):
        off = t3.index('"ratings"', off) + 1
    line, col = line_col(t3, t3.index("{", off))
    assert (f"p3.json: line {line}, column {col}: trials[2].ratings: participant 'p3' has no rating for "
            "condition 'gru', which item 'keys' has") in p.stderr, p.stderr


def test_incomplete_mushra_participants_kept_on_request(tmp_path):
    docs, files = incomplete_panel(tmp_path)
    out_csv, out_svg = tmp_path / "s.csv", tmp_path / "svg"
    p = run("tally", *files, "--keep-incomplete", "--csv", out_csv, "--svg", out_svg)
    assert p.returncode == OK, p.stderr
    assert "incomplete participants (kept: --keep-incomplete)" in p.stdout
    assert "p2 (" in p.stdout and "5 ratings missing" in p.stdout
    assert "p3 (" in p.stdout and "1 rating missing" in p.stdout
    assert "ratings missing (incomplete assessors kept): reference 1, lp3500 1, lp7000 1, lstm 1, gru 2" in p.stdout
    keep = ["p1", "p2", "p3", "p4", "p5", "p6"]  # p-ref and p-mid are screened out (BS.1534-3)
    rows = {(r["scope"], r["condition"]): r for r in read_csv(out_csv)}
    for cond, missing in [("reference", 1), ("gru", 2), ("lstm", 1)]:
        got = np.array([t["ratings"][cond] for pid in keep for t in docs[pid]["trials"] if cond in t["ratings"]])
        r = rows[("all", cond)]
        assert int(r["n"]) == len(got) == 24 - missing and int(r["missing"]) == missing
        assert close(r["mean"], float(np.mean(got)))  # NumPy over the ratings given
    assert rows[("drums", "gru")]["missing"] == "1" and rows[("drums", "gru")]["n"] == "5"
    assert rows[("gtr", "gru")]["missing"] == "0"
    # SVG: the title says who is incomplete; each box carries its missing count.
    assert len([ET.parse(f) for f in out_svg.glob("*.svg")]) == 1 + len(ITEMS)  # every one well-formed XML
    root = ET.parse(out_svg / "all.svg").getroot()
    assert "(6 assessors, 2 incomplete: 6 ratings missing)" in root.find(f"{SVG}title").text
    boxes = {g.get("data-condition"): g for g in root.iter(f"{SVG}g") if g.get("class") == "box"}
    assert boxes["gru"].get("data-missing") == "2" and boxes["lstm"].get("data-missing") == "1"
    title = ET.parse(out_svg / "item-drums.svg").getroot().find(f"{SVG}title").text
    assert "(6 assessors, 1 incomplete: 5 ratings missing)" in title


def test_incomplete_abx_participant(tmp_path):
    full = abx_trials("gtr", "reference", "lstm", 3, 4, 0) + abx_trials("bass", "reference", "lstm", 2, 4, 1)
    a = write(tmp_path, "a.json", doc("a", 1, full, "abx", items=["gtr", "bass"]))
    b = write(tmp_path, "b.json", doc("b", 2, full[:4], "abx", items=["gtr", "bass"]))  # never answered 'bass'
    p = run("tally", a, b)
    assert p.returncode == INPUT
    assert "1 participant is incomplete" in p.stderr
    assert "b.json: line" in p.stderr and "trials: participant 'b' has no answers for item 'bass'" in p.stderr
    p = run("tally", a, b, "--keep-incomplete", "--csv", tmp_path / "x.csv")
    assert p.returncode == OK, p.stderr
    assert "b (" in p.stdout and "1 item missing" in p.stdout
    rows = read_csv(tmp_path / "x.csv")
    per = {r["participant"]: r for r in rows}
    assert per["a"]["missing_items"] == "0" and per["b"]["missing_items"] == "1" and per[""]["missing_items"] == "1"
    assert per["b"]["trials"] == "4" and per[""]["trials"] == "12"


def test_a_long_list_of_gaps_is_cut_short(tmp_path):
    # 40 items listed in the stimuli, one answered: 39 gaps, the first 20 listed.
    items = [f"i{k:02d}" for k in range(40)]
    trial = mushra_trial("i00", {c["id"]: 50.0 for c in MUSHRA_CONDITIONS})
    f = write(tmp_path, "sparse.json", doc("s", 1, [trial], items=items))
    p = run("tally", f)
    assert p.returncode == INPUT
    listed = [ln for ln in p.stderr.splitlines() if "has no trial for item" in ln]
    assert len(listed) == 20 and "item 'i01'" in listed[0] and "item 'i20'" in listed[-1]
    assert "... and 19 more" in p.stderr
    p = run("tally", f, "--keep-incomplete")
    assert p.returncode == OK and "195 ratings missing" in p.stdout  # 39 items x 5 conditions


# ---- paired comparisons: Wilcoxon signed-rank test and the t interval of the mean difference --------
#
# Reference: scipy.stats.wilcoxon (SciPy 1.10.1) with its default zero_method='wilcox'. Our rule
# (docs/listening.md): the exact null distribution when the differences hold no zero and no tie and
# there are at most 50 of them -- compared with method='exact'; otherwise the normal approximation with
# tie and continuity corrections -- compared with method='approx', correction=True. The rule is
# worked out here again from the data. Tolerance: 1e-9 relative for p, z, the mean difference and the
# interval's centre (the CSV prints 12 significant digits); 1e-8 relative for the interval's half-width
# (scipy.stats.t.ppf is off by up to 2e-9 relative, see tests/native/stats_test.cpp); exact for the
# rank sums (sums of halves).

PAIRED_CONDITIONS = [{"id": "reference", "role": "reference"}, {"id": "net-a", "role": "test"},
                     {"id": "net-b", "role": "test"}]


def paired_panel(n_assessors, items, rate):
    """rate(k, j) -> {condition: score} for assessor k and item j (scores rounded to 0.01, as the page stores)."""
    docs = {}
    for k in range(n_assessors):
        trials = [mushra_trial(item, {c: round(float(v), 2) for c, v in rate(k, j).items()})
                  for j, item in enumerate(items)]
        docs[f"q{k:02d}"] = doc(f"q{k:02d}", 500 + k, trials, conditions=PAIRED_CONDITIONS, items=items)
    return docs


def scipy_signed_rank(d):
    """(method, statistic, p, z) from scipy.stats.wilcoxon, by our rule for which method applies."""
    import warnings
    d = np.asarray(d, dtype=float)
    nz = d[d != 0]
    if len(nz) == 0:
        return "none", None, None, None
    ties = len(np.unique(np.abs(nz))) < len(nz)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # scipy warns about small n for the approximation
        if len(nz) == len(d) and not ties and len(d) <= 50:
            r = stats.wilcoxon(d, method="exact")
            return "exact", float(r.statistic), float(r.pvalue), None
        r = stats.wilcoxon(d, method="approx", correction=True)
        return "normal", float(r.statistic), float(r.pvalue), float(r.zstatistic)


PAIRED_SETS = {
    # 9 assessors, one item, continuous scores: untied, no zeros, n = 9 -> exact.
    "exact-small": (9, ["gtr"], lambda k, j, rng: {"reference": rng.uniform(92, 100), "net-a": rng.uniform(40, 90),
                                                    "net-b": rng.uniform(30, 85)}),
    # Whole-point scores from a few values: many ties and some zeros -> normal approximation.
    "ties-zeros": (8, ["gtr", "bass"], lambda k, j, rng: {"reference": float(rng.choice([95, 100])),
                                                           "net-a": float(rng.choice([60, 65, 70])),
                                                           "net-b": float(rng.choice([60, 65, 70, 75]))}),
    # Zeros only from one pair: net-a equals net-b for a third of the trials.
    "zeros": (12, ["gtr"], lambda k, j, rng: (lambda a: {"reference": rng.uniform(90, 100), "net-a": a,
                                                         "net-b": a if k % 3 == 0 else rng.uniform(20, 95)})(
        rng.uniform(20, 95))),
    # 7 assessors x 10 items = 70 pairs over all items: n > 50 -> normal approximation without ties;
    # per item n = 7 -> exact.
    "large": (7, [f"i{j}" for j in range(10)], lambda k, j, rng: {"reference": rng.uniform(90, 100),
                                                                   "net-a": rng.uniform(50, 95),
                                                                   "net-b": rng.uniform(45, 90)}),
    # One assessor, one item: n = 1, exact p = 1, no interval.
    "single": (1, ["gtr"], lambda k, j, rng: {"reference": 100.0, "net-a": 70.0, "net-b": 55.5}),
}


@pytest.mark.parametrize("name", list(PAIRED_SETS))
def test_paired_comparisons_against_scipy_wilcoxon_and_t(tmp_path, name):
    n_assessors, items, make = PAIRED_SETS[name]
    rng = np.random.default_rng(sum(map(ord, name)))
    docs = paired_panel(n_assessors, items, lambda k, j: make(k, j, rng))
    files = [write(tmp_path, f"{pid}.json", d) for pid, d in docs.items()]
    out = tmp_path / "paired.csv"
    p = run("tally", *files, "--paired-csv", out, "--csv", tmp_path / "stats.csv")
    assert p.returncode == OK, p.stderr
    assert "paired comparisons" in p.stdout and "Wilcoxon signed-rank test" in p.stdout
    rows = read_csv(out)
    ids = [c["id"] for c in PAIRED_CONDITIONS]
    pairs = [(ids[a], ids[b]) for a in range(3) for b in range(a + 1, 3)]
    assert [(r["scope"], r["condition_a"], r["condition_b"]) for r in rows] == \
        [(s, a, b) for s in ["all"] + items for a, b in pairs]
    methods = set()
    for r in rows:
        scope = None if r["scope"] == "all" else r["scope"]
        d = np.array([t["ratings"][r["condition_a"]] - t["ratings"][r["condition_b"]]
                      for pid in docs for t in docs[pid]["trials"] if scope is None or t["item"] == scope])
        assert int(r["n"]) == len(d)
        assert int(r["zeros"]) == int(np.sum(d == 0))
        assert close(r["mean_diff"], d.mean()) and close(r["median_diff"], np.median(d))
        if len(d) > 1:
            # The interval's centre to 1e-9 relative; its half-width t_{0.975, n-1}·s/√n to 1e-8 relative,
            # the accuracy of scipy.stats.t.ppf here (as in test_t_quantile_against_scipy).
            half = stats.t.ppf(0.975, len(d) - 1) * stats.sem(d)
            lo, hi = float(r["ci_low"]), float(r["ci_high"])
            assert close((lo + hi) / 2, d.mean())
            assert abs((hi - lo) / 2 - half) <= 1e-8 * half, (r, half)
            assert close(r["sd_diff"], d.std(ddof=1))
        else:
            assert r["ci_low"] == r["ci_high"] == r["sd_diff"] == ""
        method, statistic, pvalue, z = scipy_signed_rank(d)
        methods.add(method)
        assert r["method"] == method, (r, method)
        if method == "none":
            assert r["p_two_sided"] == "" and r["statistic"] == ""
            continue
        assert float(r["statistic"]) == statistic, (r, statistic)
        assert close(r["p_two_sided"], pvalue), (r["scope"], r["condition_a"], r["condition_b"], r["p_two_sided"],
                                                 pvalue)
        nz = d[d != 0]
        assert float(r["w_plus"]) + float(r["w_minus"]) == len(nz) * (len(nz) + 1) / 2
        if z is None:
            assert r["z"] == ""
        else:
            assert close(r["z"], z), (r, z)
    # Each data set reaches the method it was made for.
    want = {"exact-small": {"exact"}, "ties-zeros": {"normal"}, "zeros": {"exact", "normal"},
            "large": {"exact", "normal"}, "single": {"exact"}}[name]
    assert methods == want, methods


def test_paired_comparison_of_identical_scores_has_no_test(tmp_path):
    # Every difference zero: nothing left to rank (scipy.stats.wilcoxon refuses such data).
    docs = paired_panel(4, ["gtr"], lambda k, j: {"reference": 100.0, "net-a": 60.0 + k, "net-b": 60.0 + k})
    files = [write(tmp_path, f"{pid}.json", d) for pid, d in docs.items()]
    p = run("tally", *files, "--paired-csv", tmp_path / "p.csv")
    assert p.returncode == OK, p.stderr
    row = [r for r in read_csv(tmp_path / "p.csv") if r["scope"] == "all" and r["condition_a"] == "net-a"][0]
    assert row["zeros"] == "4" and row["method"] == "none" and row["p_two_sided"] == ""
    assert row["mean_diff"] == "0" and row["ci_low"] == "0" and row["ci_high"] == "0"


def test_paired_csv_is_for_mushra_only(tmp_path):
    a = write(tmp_path, "a.json", base_abx())
    p = run("tally", a, "--paired-csv", tmp_path / "p.csv")
    assert p.returncode == USAGE and "--paired-csv compares MUSHRA scores" in p.stderr


# ---- condition names and confidence interval marks ----------------------------------------------------

NAMED_CONDITIONS = [{"id": "reference", "role": "reference", "name": "Circuit (reference)"},
                    {"id": "lp3500", "role": "anchor-low"}, {"id": "lp7000", "role": "anchor-mid"},
                    {"id": "lstm", "role": "test", "name": "=HYPERLINK(\"http://x\")"},
                    {"id": "gru", "role": "test", "name": "GRU <small> model with a long name"}]


def named_panel(with_names=True):
    docs = mushra_panel(4)
    for d in docs.values():
        d["conditions"] = copy.deepcopy(NAMED_CONDITIONS if with_names else MUSHRA_CONDITIONS)
    return docs


def test_condition_names_in_text_csv_and_svg(tmp_path):
    docs = named_panel()
    # One older file without names: the names of the others still apply.
    docs["p1"]["conditions"] = copy.deepcopy(MUSHRA_CONDITIONS)
    files = [write(tmp_path, f"{pid}.json", d) for pid, d in docs.items()]
    out_csv, out_svg, out_pairs = tmp_path / "s.csv", tmp_path / "svg", tmp_path / "p.csv"
    p = run("tally", *files, "--csv", out_csv, "--svg", out_svg, "--paired-csv", out_pairs)
    assert p.returncode == OK, p.stderr
    labels = {"reference": "Circuit (reference)", "lp3500": "lp3500", "lp7000": "lp7000",
              "lstm": "=HYPERLINK(\"http://x\")", "gru": "GRU <small> model with a long name"}
    # Text: the names, and the ids only where there is no name.
    table = [ln for ln in p.stdout.split("\nitem ")[0].splitlines() if ln.startswith("  ")]
    shown = [ln for ln in table if any(ln.strip().startswith(v) for v in labels.values())]
    assert len(shown) == 5, p.stdout
    assert "  lstm " not in p.stdout and "  gru " not in p.stdout
    assert "Circuit (reference) - =HYPERLINK(\"http://x\")" in p.stdout  # the paired comparisons
    # CSV: `name` is the last column; formula injection is neutralised (OWASP, CSV injection).
    with open(out_csv, newline="") as f:
        raw = f.read()
    assert raw.splitlines()[0].endswith(",missing,name")
    assert "'=HYPERLINK" in raw and ",=HYPERLINK" not in raw
    rows = read_csv(out_csv)
    for r in rows:
        want = labels[r["condition"]]
        assert r["name"] == ("'" + want if want.startswith("=") else want)
    pair_rows = read_csv(out_pairs)
    assert {(r["name_a"], r["name_b"]) for r in pair_rows if r["condition_a"] == "reference" and
            r["condition_b"] == "lstm"} == {("Circuit (reference)", "'=HYPERLINK(\"http://x\")")}
    # SVG: the label under each box (cut to 11 characters with the whole name in a <title>), the
    # name on the box, and beside it the confidence interval from the CSV.
    root = ET.parse(out_svg / "all.svg").getroot()
    texts = [t for t in root.iter(SVG + "text") if t.get("class") == "condition"]
    assert [("".join(t.itertext()) if t.find(SVG + "title") is None else t.find(SVG + "title").text)
            for t in texts] == list(labels.values())
    cut = texts[4]
    assert cut.find(SVG + "title").text == labels["gru"]
    assert "".join(cut.itertext()).endswith("GRU <small\u2026")  # 10 characters and the ellipsis
    ticks = {t.text: float(t.get("y")) - 4 for t in root.iter(SVG + "text") if t.get("text-anchor") == "end"}
    y = lambda v: ticks["0"] + (ticks["100"] - ticks["0"]) * v / 100
    csv_all = {r["condition"]: r for r in rows if r["scope"] == "all"}
    boxes = [g for g in root.iter(SVG + "g") if g.get("class") == "box"]
    assert [b.get("data-name") for b in boxes] == list(labels.values())
    for b in boxes:
        r = csv_all[b.get("data-condition")]
        ci = [g for g in b if g.get("class") == "ci"]
        assert len(ci) == 1, b.get("data-condition")
        assert close(ci[0].get("data-ci-low"), float(r["ci_low"])) and close(ci[0].get("data-ci-high"), float(r["ci_high"]))
        assert ci[0].get("data-confidence") == "0.95"
        bar = [e for e in ci[0] if e.get("class") == "ci-bar"][0]
        assert abs(float(bar.get("y1")) - y(min(100.0, float(r["ci_high"])))) < 2e-3
        assert abs(float(bar.get("y2")) - y(max(0.0, float(r["ci_low"])))) < 2e-3
        # Beside the box, not over it.
        rect = [e for e in b if e.get("class") == "iqr"][0]
        assert float(bar.get("x1")) > float(rect.get("x")) + float(rect.get("width"))
    legend = [t for t in root.iter(SVG + "text") if t.get("class") == "legend-ci"]
    assert len(legend) == 1 and "95% confidence interval of the mean" in legend[0].text
    # ABX and A/B: the names follow the pair ids as the last two columns.
    ab = mutate(base_ab(), lambda d: d["conditions"][1].__setitem__("name", "@LSTM"))
    f = write(tmp_path, "ab.json", ab)
    p = run("tally", f, "--csv", tmp_path / "ab.csv")
    assert p.returncode == OK, p.stderr
    assert "reference vs @LSTM" in p.stdout
    r = read_csv(tmp_path / "ab.csv")[0]
    assert list(r)[-2:] == ["name_a", "name_b"] and (r["name_a"], r["name_b"]) == ("reference", "'@LSTM")
    abx = mutate(base_abx(), lambda d: d["conditions"][1].__setitem__("name", "LSTM net"))
    f = write(tmp_path, "abx.json", abx)
    p = run("tally", f, "--csv", tmp_path / "abx.csv")
    assert p.returncode == OK and "reference vs LSTM net" in p.stdout
    assert {(r["name_a"], r["name_b"]) for r in read_csv(tmp_path / "abx.csv")} == {("reference", "LSTM net")}


def test_a_name_two_conditions_share_gets_the_ids(tmp_path):
    conds = copy.deepcopy(MUSHRA_CONDITIONS)
    conds[3]["name"] = conds[4]["name"] = "net"
    d = mutate(base_mushra(), lambda x: x.__setitem__("conditions", conds))
    p = run("tally", write(tmp_path, "d.json", d), "--csv", tmp_path / "d.csv")
    assert p.returncode == OK, p.stderr
    names = {r["condition"]: r["name"] for r in read_csv(tmp_path / "d.csv") if r["scope"] == "all"}
    assert names["lstm"] == "net (lstm)" and names["gru"] == "net (gru)"


# ---- the familiarisation record (optional) -----------------------------------------------------------

def test_results_with_and_without_the_familiarisation_record(tmp_path):
    docs = mushra_panel(6)
    files = []
    for k, (pid, d) in enumerate(docs.items()):
        files.append(write(tmp_path, f"{pid}.json", with_familiarisation(d, 1000 + k) if k % 2 else d))
    p = run("tally", *files, "--csv", tmp_path / "with.csv")
    assert p.returncode == OK, p.stderr
    assert "(familiarisation order recorded in 4)" in p.stdout
    # The statistics do not depend on it.
    plain = [write(tmp_path, f"plain-{pid}.json", d) for pid, d in docs.items()]
    p2 = run("tally", *plain, "--csv", tmp_path / "without.csv")
    assert p2.returncode == OK and "familiarisation" not in p2.stdout
    assert (tmp_path / "with.csv").read_text() == (tmp_path / "without.csv").read_text()


def test_different_names_for_one_condition_are_refused(tmp_path):
    panel = named_panel()
    first = write(tmp_path, "first.json", panel["p1"])
    d = copy.deepcopy(panel["p2"])
    d["conditions"][4]["name"] = "Another"
    second = write(tmp_path, "second.json", d)
    p = run("tally", first, second)
    assert p.returncode == INPUT
    assert "second.json: line" in p.stderr and "conditions[4].name: 'Another' differs from" in p.stderr
    assert "first.json" in p.stderr
