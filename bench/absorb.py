"""Absorbed fixed effects at 1,000,000 rows with an identifier of 5,000 levels: fit time and peak memory.

    .venv/bin/python bench/absorb.py                      # 1,000,000 rows, 5,000 stores
    .venv/bin/python bench/absorb.py --rows 200000 --levels 1000 --repeats 3 --skip-reference

Data: the invented table of bench/refit.py (10 regressors, 13 coefficients, a log outcome) plus a
column ``store`` of 5,000 levels (about 200 rows each, seeded), whose own effect moves the
outcome and the price. The model absorbs ``store`` and clusters the errors by it (what the app
suggests when an identifier is absorbed).

Timed in a FRESH Python process (so its peak resident set size belongs to this measurement
alone; see bench/memory.py), interleaved, median of --repeats calls after one warm-up each;
the peak is read after (a), (a1) and (b), before the reference library is loaded, and (c) is
then timed interleaved with (a) again:

  (a) core.analyze(data, spec with "absorb": ["store"], parts={"terms","fit","effects"})
  (a1) the same through a core.ColumnCache while one regressor flips between log and level:
      what a transform toggle costs in the app
  (b) the same model without "absorb" (store left out): what sweeping out 5,000 levels adds
  (c) linearmodels' AbsorbingLS on the same transformed columns, cov_type="clustered",
      debiased=True: a reference library doing the same job (--skip-reference leaves it out)

The dense dummy-variable regression would need a 1,000,000 x 5,013 design: its size is printed,
not run. Targets (docs/contract.md §6): (a) at most 1.5 s; peak memory below 2 GB. Agreement of
(a) with (c) is printed (largest relative difference of coefficients and standard errors).

No timed or sized assertions: this prints what it measures.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
from _common import LOG_COLUMNS, ROOT, load_line, machine_line, make_data, make_spec, mb, peak_rss_bytes, round_robin

FIT_TARGET_S = 1.5
MEMORY_TARGET_BYTES = 2_000_000_000
PARTS = {"terms", "fit", "effects"}


def make_panel(rows: int, levels: int, seed: int = 20261203) -> pd.DataFrame:
    """bench/refit.py's table with a store identifier whose effect moves outcome and price."""
    data = make_data(rows)
    rng = np.random.default_rng(seed)
    store = rng.integers(0, levels, rows)
    effect = rng.normal(0.0, 0.4, levels)
    data["price"] = data["price"] * np.exp(0.3 * effect[store])
    data["revenue"] = data["revenue"] * np.exp(effect[store])
    data["store"] = np.char.add("S", np.char.zfill(store.astype(str), 5))
    return data


def absorb_spec() -> dict:
    spec = make_spec("cluster")
    spec["regressors"] = [r for r in spec["regressors"] if r["transform"] != "category"]
    return {**spec, "absorb": ["store"], "cluster": "store"}


def _toggle(spec: dict, column: str, state: list[int]) -> dict:
    state[0] += 1
    out = {**spec, "regressors": [dict(r) for r in spec["regressors"]]}
    for r in out["regressors"]:
        if r["column"] == column:
            r["transform"] = "level" if state[0] % 2 else "log"
    return out


def _reference(data: pd.DataFrame, spec: dict):
    """linearmodels' AbsorbingLS on the spec's transformed columns."""
    from linearmodels.iv.absorbing import AbsorbingLS

    exog = {"const": np.ones(len(data))}
    for r in spec["regressors"]:
        x = data[r["column"]].to_numpy(dtype=float)
        exog[r["column"]] = {"log": np.log, "ihs": np.arcsinh}.get(r["transform"], lambda v: v)(x)
    effects = pd.DataFrame({"store": pd.Categorical(data["store"])})
    model = AbsorbingLS(np.log(data["revenue"]), pd.DataFrame(exog), absorb=effects)
    return model.fit(cov_type="clustered", clusters=data[["store"]], debiased=True)


def child(rows: int, levels: int, repeats: int, skip_reference: bool) -> dict:
    import core

    data = make_panel(rows, levels)
    spec = absorb_spec()
    plain = {k: v for k, v in spec.items() if k != "absorb"}
    columns = core.ColumnCache()
    state = [0]
    jobs = {
        "a": ("core refit, store absorbed", lambda: core.analyze(data, spec, parts=PARTS)),
        "a1": ("core toggle through the column cache", lambda: core.analyze(data, _toggle(spec, LOG_COLUMNS[1], state), parts=PARTS, columns=columns)),
        "b": ("core refit, no store effects", lambda: core.analyze(data, plain, parts=PARTS)),
    }  # fmt: skip
    timings = round_robin(jobs, repeats)
    out = {key: {"label": t.label, "median_s": t.median, "wall_s": t.wall} for key, t in timings.items()}
    out["peak_bytes"] = peak_rss_bytes()  # core's alone: the reference library is not loaded yet
    result = timings["a"].result
    out["absorb"] = result["absorb"]
    if not skip_reference:
        # (c) interleaved with (a) again, so their ratio is measured side by side.
        pair = round_robin({"a": jobs["a"], "c": ("linearmodels AbsorbingLS", lambda: _reference(data, spec))}, repeats)
        out["c"] = {"label": pair["c"].label, "median_s": pair["c"].median, "wall_s": pair["c"].wall}
        out["a_beside_c"] = pair["a"].median
        reference = pair["c"].result
        terms = {t["name"]: t for t in result["terms"]}
        names = {
            "const": "intercept",
            **{
                r["column"]: f"{r['transform']}({r['column']})" if r["transform"] != "level" else r["column"]
                for r in spec["regressors"]
            },
        }
        names.pop("const")
        out["agreement"] = {
            "coef": max(abs(terms[ours]["estimate"] / reference.params[theirs] - 1) for theirs, ours in names.items()),
            "se": max(abs(terms[ours]["std_error"] / reference.std_errors[theirs] - 1) for theirs, ours in names.items()),
        }  # fmt: skip
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--levels", type=int, default=5_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--skip-reference", action="store_true")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        print(json.dumps(child(args.rows, args.levels, args.repeats, args.skip_reference)))
        return
    print(machine_line())
    print(load_line())
    command = [sys.executable, str(Path(__file__).resolve()), "--child", "--rows", str(args.rows), "--levels", str(args.levels),
               "--repeats", str(args.repeats)] + (["--skip-reference"] if args.skip_reference else [])  # fmt: skip
    done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT, check=False)
    if done.returncode != 0:
        raise SystemExit(f"the measuring process failed:\n{done.stderr[-3000:]}")
    found = json.loads(done.stdout.strip().splitlines()[-1])
    print(f"\nWorkload: {args.rows:,} rows, 9 regressors (4 log, 1 ihs, 4 level), store absorbed ({args.levels:,} levels), "
          f"errors clustered by store; median of {args.repeats} interleaved calls.")  # fmt: skip
    absorbed = found["absorb"]
    print(f"absorbed: {absorbed['levels'][0]:,} levels, {absorbed['dof']:,} parameters, {absorbed['singletons']} singletons")
    a = found["a"]["median_s"]
    for key in ("a", "a1", "b"):
        entry = found[key]
        ratio = "" if key == "a" else f"   {entry['median_s'] / a:.2f}x (a)"
        print(f"  ({key}) {entry['label']:<40} {entry['median_s']:.3f} s{ratio}")
    if "c" in found:
        beside = found["a_beside_c"]
        print(f"  (c) {found['c']['label']:<41} {found['c']['median_s']:.3f} s   {found['c']['median_s'] / beside:.1f}x (a), "
              f"(a) timed beside it at {beside:.3f} s")  # fmt: skip
    dense = 8.0 * args.rows * (args.levels + 10)
    print(f"  dummy regression: not run; its design alone would take {dense / 1e9:,.1f} GB")
    verdict = "meets" if a <= FIT_TARGET_S else "MISSES"
    print(f"fit (a) {a:.3f} s against the target of {FIT_TARGET_S} s: {verdict}")
    peak = found["peak_bytes"]
    print(
        f"peak memory of the process over (a), (a1), (b) {mb(peak)}: {'meets' if peak < MEMORY_TARGET_BYTES else 'MISSES'} (< 2 GB)"
    )
    if "agreement" in found:
        print(
            f"agreement with linearmodels: coefficients {found['agreement']['coef']:.1e}, standard errors {found['agreement']['se']:.1e}"
        )
    print(json.dumps({"rows": args.rows, "levels": args.levels, "fit_s": a, "toggle_s": found["a1"]["median_s"],
                      "no_absorb_s": found["b"]["median_s"], "reference_s": found.get("c", {}).get("median_s"),
                      "peak_mb": peak / 1e6, **found.get("agreement", {})}))  # fmt: skip


if __name__ == "__main__":
    main()
