"""Bootstrap timings (issue 18): B = 999 pairs draws at 1,500 and at 1,000,000 rows, one run each.

    .venv/bin/python bench/bootstrap.py                  # 1,500 rows (demo) and 1,000,000 rows
    .venv/bin/python bench/bootstrap.py --rows 200000     # a smaller large run
    .venv/bin/python bench/bootstrap.py --skip-large      # the demo only

Workloads:
  demo   demo_data/kiosks.csv (1,500 invented rows) with demo_data/default_spec.json (log outcome,
         8 effects), one scenario of three changes and one prediction: 10 bootstrapped entries;
         the same with the outcome as IHS (smearing recomputed over every row in every draw).
  large  bench/_common.py's seeded invented data (13 coefficients, log outcome, 13 effects) and
         one prediction at --rows rows; the same with the outcome as IHS (smearing linearised in
         the coefficient shift above core.inference.bootstrap.EXACT_ROWS rows).

Each line: the wall time of core.analyze(parts={"terms", "effects", "scenarios", "predictions"})
with "bootstrap": {"draws": 999, "seed": 1}, the same without the bootstrap, their difference (the
bootstrap's own time), CPU time of the process, and the progress callbacks seen, after one
untimed warm-up call with 50 draws (imports and first calls). Target: the
bootstrap at 1,500 rows within 2 s. One run each, no repetitions: the machine's 2 cores are shared
with other work, so the load average is printed before and after and wall times can be inflated
by it (CPU time less so).

No timed assertions: this prints what it measures.
"""

from __future__ import annotations

import argparse
import json
import time

import pandas as pd
from _common import ROOT, load_line, make_data, make_spec

import core

PARTS = {"terms", "effects", "scenarios", "predictions"}
BOOTSTRAP = {"draws": 999, "seed": 1}


def _timed(data: pd.DataFrame, spec: dict, progress=None) -> tuple[float, float, dict]:
    wall, cpu = time.perf_counter(), time.process_time()
    result = core.analyze(data, spec, parts=PARTS, progress=progress)
    return time.perf_counter() - wall, time.process_time() - cpu, result


def run(label: str, data: pd.DataFrame, spec: dict) -> None:
    _timed(data.head(2000), spec | {"bootstrap": {"draws": 50, "seed": 0}})
    plain_wall, _, _ = _timed(data, spec)
    calls: list[float] = []
    wall, cpu, result = _timed(data, spec | {"bootstrap": BOOTSTRAP}, lambda share: calls.append(share) or True)
    entries = [e for key in ("effects", "scenarios", "predictions") for e in result[key] if e.get("bootstrap")]
    print(
        f"{label:<42} {len(data):>9,} rows  {len(entries):>2} entries  with bootstrap {wall:7.2f} s wall "
        f"({cpu:7.2f} s CPU)  without {plain_wall:6.2f} s  bootstrap alone {wall - plain_wall:7.2f} s  "
        f"progress calls {len(calls)}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--skip-large", action="store_true")
    args = parser.parse_args()
    print(load_line() + " (the cores are shared with other work: wall times may be inflated)")

    demo = pd.read_csv(ROOT / "demo_data" / "kiosks.csv")
    spec = json.loads((ROOT / "demo_data" / "default_spec.json").read_text())
    spec["scenarios"] = [
        {"name": "price, promotion, inland", "changes": {"drink_price": "+10%", "promo": "0->1", "region": "Coast->Inland"}}
    ]
    spec["predict"] = [{"drink_price": 5.0}]
    run("demo, log outcome", demo, spec)
    run("demo, IHS outcome (exact smearing)", demo, spec | {"outcome": {"column": "weekly_revenue", "transform": "ihs"}})

    if not args.skip_large:
        data = make_data(args.rows)
        large = make_spec() | {"predict": [{"price": 3.0}]}
        run("large, log outcome", data, large)
        run("large, IHS outcome (linearised smearing)", data, large | {"outcome": {"column": "revenue", "transform": "ihs"}})
    print(load_line())


if __name__ == "__main__":
    main()
