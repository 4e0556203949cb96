"""The sweep over functional forms (docs/contract.md §3.16) against one core.analyze call per model.

Printed, measured side by side in one run:
- demo data, every combination the advisor's plausible forms allow (64 models), HC1: target ≤ 1 s;
- 1,000,000 invented rows (bench/_common.py), 256 models (the outcome and seven of the ten
  regressors each in level or log), HC1: target ≤ 5 s, and ≥ 20x faster than
  256 separate ``core.analyze(parts={"fit", "effects"})`` calls on the sweep's rows (a sample of
  them timed, scaled to 256);
- the machine's load average before and after (other processes share its cores).

Each sweep on the large table is timed ``--repeats`` times (default 3) and every run is printed;
the ratio is given to the median and to the slowest run.

Run: ``.venv/bin/python bench/sweep.py`` (about a minute; ``--rows 200000`` for a quicker run).
"""

from __future__ import annotations

import argparse
import json
import os
import random
import statistics
import time

from _common import ROOT, make_data

import core
from core.inference.sweep import spec_of_model, sweep_rows
from core.model.spec import parse_spec


def _timed(call) -> tuple[float, object]:
    start = time.perf_counter()
    out = call()
    return time.perf_counter() - start, out


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--sample", type=int, default=8, help="separate analyze calls timed and scaled")
    parser.add_argument("--repeats", type=int, default=3, help="sweeps timed on the large table")
    args = parser.parse_args()
    print(f"load average before: {os.getloadavg()}, cores: {os.cpu_count()}")

    import pandas as pd

    demo = pd.read_csv(ROOT / "demo_data" / "kiosks.csv")
    spec = json.loads((ROOT / "demo_data" / "default_spec.json").read_text())
    spec["sweep"] = {"focus": "drink_price"}
    core.analyze(demo, spec, parts=["sweep"])  # warm-up
    seconds, result = _timed(lambda: core.analyze(demo, spec, parts=["sweep"]))
    print(f"demo: {result['sweep']['n_models']} models in {seconds:.3f} s (target <= 1 s)")

    data = make_data(args.rows)
    both = ["level", "log"]
    big = {
        "outcome": {"column": "revenue", "transform": "log"},
        "regressors": [
            {"column": "price", "transform": "log", "change": "+10%"},
            {"column": "income", "transform": "log"},
            {"column": "size", "transform": "log"},
            {"column": "distance", "transform": "log"},
            {"column": "ad_spend", "transform": "ihs"},
            {"column": "age", "transform": "level"},
            {"column": "rating", "transform": "level"},
            {"column": "share", "transform": "level"},
            {"column": "promo", "transform": "level"},
            {"column": "region", "transform": "category", "reference": "Coast"},
        ],
        "covariance": "HC1",
        "sweep": {
            "focus": "price",
            "candidates": {c: both for c in ("revenue", "price", "income", "size", "distance", "age", "rating", "share")}
            | {"ad_spend": ["ihs"]},
        },
    }
    runs = []
    for _ in range(args.repeats):
        cpu = time.process_time()
        seconds, result = _timed(lambda: core.analyze(data, big, parts=["sweep"]))
        runs.append((seconds, time.process_time() - cpu))
    sweep = result["sweep"]
    seconds = statistics.median(s for s, _ in runs)
    listed = ", ".join(f"{s:.2f} s wall / {c:.2f} s CPU" for s, c in runs)
    print(f"{args.rows:,} rows: {sweep['n_models']} models, HC1, runs: {listed}")
    print(f"  median {seconds:.2f} s, slowest {max(s for s, _ in runs):.2f} s (the first run pays one-off costs) (target <= 5 s)")
    rows = data.iloc[sweep_rows(data, big, parse_spec(big, data))]
    picked = random.Random(0).sample(sweep["models"], args.sample)
    times = []
    for model in picked:
        one = spec_of_model(big, sweep, model["transforms"])
        t, _ = _timed(lambda one=one: core.analyze(rows, one, parts=["fit", "effects"]))
        times.append(t)
    per_call = sum(times) / len(times)
    separate = per_call * sweep["n_models"]
    print(
        f"separate core.analyze: {per_call:.3f} s per model ({args.sample} timed) -> {separate:.1f} s for "
        f"{sweep['n_models']}; ratio {separate / seconds:.1f}x to the median sweep, "
        f"{separate / max(s for s, _ in runs):.1f}x to the slowest (target >= 20x)"
    )
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
