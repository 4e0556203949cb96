"""Refit speed at 1,000,000 rows x 10 regressors with HC1 (docs/contract.md §6), measured side by side.

    .venv/bin/python bench/refit.py                 # both workloads, 1,000,000 rows, 5 timed repetitions each
    .venv/bin/python bench/refit.py --rows 200000 --repeats 3 --no-profile --workload logs

Two workloads (bench/_common.py, seeded invented data), each timed in this one process on the
same DataFrame, interleaved round-robin after one untimed warm-up call of each, each timed call
after an untimed pause (bench/_common.py SETTLE_S: BLAS threads left busy-waiting by the job before
must not be billed to the next), median of --repeats calls (wall and CPU time):

  bench   4 log, 1 ihs (with zeros), 4 level regressors and a text category with 4 levels; log
          outcome; 13 coefficients
  logs    10 log regressors, log outcome; 11 coefficients

  (a)  core.analyze(data, spec, parts={"terms", "fit", "effects"})    the app's quick refit
  (b)  statsmodels.formula.api.ols(formula, data).fit(cov_type="HC1")  formula with np.log,
                                                                       np.arcsinh and C()
  (c)  a bare numpy floor, INCLUDING: pulling the columns out of the DataFrame, log / arcsinh of
       the regressors and the outcome, dummies from the category column (pandas.factorize),
       assembling X (n x k), X'X, X'y, Cholesky solve, residuals, (X'X)^-1 and the HC1 sandwich.
       EXCLUDING what core adds on top: spec parsing, missing/domain screening and the dropped-row
       report, the shift and the refinement, the collinearity screen, fit measures, p-values and
       intervals, effects, JSON conversion.

  (a1) core.analyze(..., parts={"terms"})                           design, fit, HC1, coefficient table

and, on the bench workload only, where the rest of the time goes:

  (a2) core.analyze(..., parts={"fit"})                            the same plus original-scale fit
                                                                   measures, without the table
  (a3) core.analyze(..., parts={"terms", "fit"})                   the refit without effects
  (a4) (a), but each call alternates 'price' between log and level  a transform toggle as the app
                                                                   sends it (a spec not just seen)
  (a5) (a4) through a core.ColumnCache, as the app runs it: columns    the toggle recomputes only
       converted and transformed by earlier calls are reused           the column it changed
       (also on the logs workload, toggling its first regressor)

Targets (issue 14): (a)/(c) <= 1.0 and (b)/(a) >= 10 on both workloads; wall-time ratios are the
headline, CPU-time ratios are printed beside them because other work on a shared machine inflates
wall times (the load average is printed at the start and end). Agreement: the largest relative
difference of core's (and the floor's) coefficients and HC1 standard errors from statsmodels',
checked against 1e-10. Then one cProfile run of (a) on the bench workload with the top hotspots.

No timed assertions: this prints what it measures.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import pstats
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.linalg as sla
from _common import (
    CATEGORY_COLUMN,
    CATEGORY_LEVELS,
    IHS_COLUMN,
    LEVEL_COLUMNS,
    LOG10_COLUMNS,
    LOG10_OUTCOME,
    LOG_COLUMNS,
    OUTCOME,
    ROOT,
    SETTLE_S,
    Timing,
    load_line,
    machine_line,
    make_data,
    make_formula,
    make_log_data,
    make_log_formula,
    make_log_spec,
    make_spec,
    round_robin,
    statsmodels_name,
)

import core  # noqa: E402  (path set up by _common)

REFIT_PARTS = {"terms", "fit", "effects"}
REFERENCE_LEVEL = "Coast"


@dataclass(frozen=True)
class Workload:
    """One benchmark model: its data, spec, formula and the columns the floor transforms."""

    key: str
    title: str
    data: pd.DataFrame
    spec: dict
    formula: str
    outcome: str
    logs: list[str]
    ihs: list[str] = field(default_factory=list)
    levels: list[str] = field(default_factory=list)
    category: str | None = None


def numpy_floor(work: Workload) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Least squares with HC1 by hand: transforms, X, normal equations, sandwich. See module doc."""
    data = work.data
    n = len(data)
    levels: list[str] = []
    if work.category is not None:
        codes, uniques = pd.factorize(data[work.category])
        levels = [lv for lv in CATEGORY_LEVELS if lv != REFERENCE_LEVEL]
    k = 1 + len(work.logs) + len(work.ihs) + len(work.levels) + len(levels)
    X = np.empty((n, k))
    X[:, 0] = 1.0
    j = 1
    for c in work.logs:
        np.log(data[c].to_numpy(dtype=float), out=X[:, j])
        j += 1
    for c in work.ihs:
        np.arcsinh(data[c].to_numpy(dtype=float), out=X[:, j])
        j += 1
    for c in work.levels:
        X[:, j] = data[c].to_numpy(dtype=float)
        j += 1
    if levels:
        positions = {str(u): i for i, u in enumerate(uniques)}
        for lv in levels:
            X[:, j] = codes == positions[lv]
            j += 1
    y = np.log(data[work.outcome].to_numpy(dtype=float))

    xtx = X.T @ X
    factor = sla.cho_factor(xtx, lower=False, check_finite=False)
    coef = sla.cho_solve(factor, X.T @ y, check_finite=False)
    u = y - X @ coef
    bread = sla.cho_solve(factor, np.eye(k), check_finite=False)
    scores = X * u[:, None]
    cov = n / (n - k) * (bread @ (scores.T @ scores) @ bread)
    names = (
        ["Intercept"]
        + [f"np.log({c})" for c in work.logs]
        + [f"np.arcsinh({c})" for c in work.ihs]
        + work.levels
        + [f"C({work.category}, Treatment(reference='{REFERENCE_LEVEL}'))[T.{lv}]" for lv in levels]
    )
    return coef, np.sqrt(np.diag(cov)), names


def statsmodels_fit(data: pd.DataFrame, formula: str):
    import statsmodels.formula.api as smf

    result = smf.ols(formula, data).fit(cov_type="HC1")
    _ = result.bse  # make sure the standard errors are computed inside the timing
    return result


def max_rel_diff(ours: dict[str, float], theirs: pd.Series) -> float:
    return max(abs(ours[name] - theirs[name]) / max(abs(theirs[name]), 1e-300) for name in ours)


def verdict(value: float, target: float, higher_is_better: bool) -> str:
    ok = value >= target if higher_is_better else value <= target
    return "meets target" if ok else "MISSES target"


def profile_core(data: pd.DataFrame, spec: dict, top: int) -> str:
    profiler = cProfile.Profile()
    profiler.enable()
    core.analyze(data, spec, parts=REFIT_PARTS)
    profiler.disable()
    out = io.StringIO()
    stats = pstats.Stats(profiler, stream=out)
    total = stats.total_tt
    out.write(f"cProfile of one core.analyze(parts={sorted(REFIT_PARTS)}) call: {total:.3f} s under the profiler\n")

    out.write("\n-- stages (cumulative time under the profiler; nested stages overlap) --\n")
    wanted = [
        ("core/analysis.py", "analyze"),
        ("core/model/spec.py", "parse_spec"),
        ("core/model/fitted.py", "fit_model"),
        ("core/model/design.py", "build_design"),
        ("core/model/design.py", "encode"),
        ("core/model/design.py", "reference_point"),
        ("core/model/ols.py", "fit_ols"),
        ("core/model/engine.py", "gram_pass"),
        ("core/model/engine.py", "tsqr_pass"),
        ("core/model/engine.py", "residual_pass"),
        ("core/model/covariance.py", "covariance"),
        ("core/inference/retransform.py", "fit_on_original_scale"),
        ("core/analysis.py", "_terms"),
        ("core/inference/effects.py", "compute_effects"),
        ("core/inference/effects.py", "_average_effect"),
        ("core/analysis.py", "json_safe"),
    ]
    found: dict[tuple[str, str], tuple[int, float, float]] = {}
    for (filename, _line, func), (_cc, nc, tt, ct, _callers) in stats.stats.items():
        for path, name in wanted:
            if func == name and filename.replace("\\", "/").endswith(path):
                prev = found.get((path, name))
                if prev is None or ct > prev[2]:
                    found[(path, name)] = (nc, tt, ct)
    whole = found.get(("core/analysis.py", "analyze"), (1, 0.0, total))[2] or total
    out.write(f"{'stage':<45}{'calls':>7}{'cum s':>9}{'share':>8}\n")
    for path, name in wanted:
        if (path, name) in found:
            nc, _tt, ct = found[(path, name)]
            out.write(f"{path + ':' + name:<45}{nc:>7}{ct:>9.3f}{100 * ct / whole:>7.1f}%\n")

    root = str(ROOT) + "/"
    for key, label in (("tottime", "own time"), ("cumulative", "cumulative time")):
        buf = io.StringIO()
        pstats.Stats(profiler, stream=buf).sort_stats(key).print_stats(top)
        lines = [ln.replace(root, "") for ln in buf.getvalue().splitlines()]
        start = next((i for i, ln in enumerate(lines) if ln.strip().startswith("ncalls")), 0)
        out.write(f"\n-- top {top} by {label} --\n")
        out.write("\n".join(ln[:150] for ln in lines[start:] if ln.strip()) + "\n")
    return out.getvalue()


def toggled(spec: dict, column: str, transform: str) -> dict:
    out = dict(spec, regressors=[dict(r) for r in spec["regressors"]])
    for r in out["regressors"]:
        if r["column"] == column:
            r["transform"] = transform
            r.pop("change", None)
    return out


def toggle(data: pd.DataFrame, spec: dict, column: str, columns: core.ColumnCache | None = None) -> Callable[[], dict]:
    """A refit that alternates ``column`` between the spec's transform and level at each call."""
    spec_level = toggled(spec, column, "level")
    flip = {"state": False}

    def refit() -> dict:
        flip["state"] = not flip["state"]
        return core.analyze(data, spec_level if flip["state"] else spec, parts=REFIT_PARTS, columns=columns)

    return refit


def agreement(core_result: dict, sm, floor: tuple[np.ndarray, np.ndarray, list[str]]) -> tuple[float, float, float, float]:
    core_est = {statsmodels_name(term): term["estimate"] for term in core_result["terms"]}
    core_se = {statsmodels_name(term): term["std_error"] for term in core_result["terms"]}
    floor_coef, floor_se, floor_names = floor
    return (
        max_rel_diff(core_est, sm.params),
        max_rel_diff(core_se, sm.bse),
        max_rel_diff(dict(zip(floor_names, floor_coef, strict=True)), sm.params),
        max_rel_diff(dict(zip(floor_names, floor_se, strict=True)), sm.bse),
    )


def print_times(t: dict[str, Timing]) -> None:
    print(f"{'what':<46}{'wall median':>12}{'wall min':>10}{'cpu median':>12}   all wall runs (s)")
    for timing in t.values():
        runs = ", ".join(f"{r:.3f}" for r in timing.wall)
        print(f"{timing.label:<46}{timing.median:>10.3f} s{min(timing.wall):>8.3f} s{timing.cpu_median:>10.3f} s   {runs}")


def print_ratios(t: dict[str, Timing], rows: list[tuple[str, str, str, float | None, bool]]) -> None:
    print("\nratios (same process, same data, interleaved runs; wall medians, CPU medians beside)")
    for label, num, den, target, higher in rows:
        value = t[num].median / t[den].median
        cpu_value = t[num].cpu_median / t[den].cpu_median
        goal = "" if target is None else f"   target {'>=' if higher else '<='} {target:g}: {verdict(value, target, higher)}"
        print(f"{label:<44}{value:8.2f}x   (cpu {cpu_value:6.2f}x){goal}")


def run_bench(work: Workload, repeats: int, columns_check: bool) -> dict[str, Timing]:
    data, spec = work.data, work.spec
    # (a4): what a transform toggle in the app costs: every call is a spec core has not just seen;
    # (a5): the same toggle through the app's column cache (both specs' columns stay cached).
    columns = core.ColumnCache()
    toggle_refit = toggle(data, spec, LOG_COLUMNS[0])
    toggle_refit_cached = toggle(data, spec, LOG_COLUMNS[0], columns)
    jobs = {
        "a": ("(a)  core.analyze parts={terms,fit,effects}", lambda: core.analyze(data, spec, parts=REFIT_PARTS)),
        "a1": ("(a1) core.analyze parts={terms}", lambda: core.analyze(data, spec, parts={"terms"})),
        "a2": ("(a2) core.analyze parts={fit}", lambda: core.analyze(data, spec, parts={"fit"})),
        "a3": ("(a3) core.analyze parts={terms,fit}", lambda: core.analyze(data, spec, parts={"terms", "fit"})),
        "a4": (f"(a4) refit, toggling {LOG_COLUMNS[0]} log<->level", toggle_refit),
        "a5": ("(a5) (a4) through the column cache", toggle_refit_cached),
        "b": ("(b)  statsmodels ols(...).fit(HC1)", lambda: statsmodels_fit(data, work.formula)),
        "c": ("(c)  numpy floor (transforms+X+solve+HC1)", lambda: numpy_floor(work)),
    }
    t = round_robin(jobs, repeats)
    print_times(t)
    print_ratios(
        t,
        [
            ("(b)/(a)   statsmodels / core refit", "b", "a", 10.0, True),
            ("(a)/(c)   core refit / numpy floor", "a", "c", 1.0, False),
            ("(b)/(a1)  statsmodels / core terms only", "b", "a1", 10.0, True),
            ("(a1)/(c)  core terms only / numpy floor", "a1", "c", 1.0, False),
            ("(b)/(a2)  statsmodels / core fit only", "b", "a2", 10.0, True),
            ("(a2)/(c)  core fit only / numpy floor", "a2", "c", 1.0, False),
            ("(b)/(a3)  statsmodels / core terms+fit", "b", "a3", 10.0, True),
            ("(b)/(a4)  statsmodels / core toggled refit", "b", "a4", 10.0, True),
            ("(b)/(a5)  statsmodels / toggle, column cache", "b", "a5", 10.0, True),
            ("(a5)/(c)  toggle, column cache / numpy floor", "a5", "c", 1.0, False),
            ("(a4)/(a5) toggle: without / with the cache", "a4", "a5", None, True),
            ("(b)/(c)   statsmodels / numpy floor", "b", "c", None, True),
        ],
    )
    if columns_check:
        same_terms = [x["estimate"] for x in t["a1"].result["terms"]] == [x["estimate"] for x in t["a"].result["terms"]]
        print(f"\n  core parts={{terms}} gives the same estimates as the refit: {same_terms}")
        cached_same = core.analyze(data, spec, parts=REFIT_PARTS, columns=columns) == t["a"].result
        print(f"  a refit through the column cache gives the same result as one without: {cached_same}")
    return t


def run_logs(work: Workload, repeats: int) -> dict[str, Timing]:
    data, spec = work.data, work.spec
    # (a5) as on the bench workload: a toggle of the first regressor through the app's column cache.
    first = spec["regressors"][0]["column"]
    toggle_refit_cached = toggle(data, spec, first, core.ColumnCache())
    jobs = {
        "a": ("(a)  core.analyze parts={terms,fit,effects}", lambda: core.analyze(data, spec, parts=REFIT_PARTS)),
        "a1": ("(a1) core.analyze parts={terms}", lambda: core.analyze(data, spec, parts={"terms"})),
        "a5": (f"(a5) toggling {first} log<->level, column cache", toggle_refit_cached),
        "b": ("(b)  statsmodels ols(...).fit(HC1)", lambda: statsmodels_fit(data, work.formula)),
        "c": ("(c)  numpy floor (transforms+X+solve+HC1)", lambda: numpy_floor(work)),
    }
    t = round_robin(jobs, repeats)
    print_times(t)
    print_ratios(
        t,
        [
            ("(b)/(a)   statsmodels / core refit", "b", "a", 10.0, True),
            ("(a)/(c)   core refit / numpy floor", "a", "c", 1.0, False),
            ("(b)/(a1)  statsmodels / core terms only", "b", "a1", 10.0, True),
            ("(a1)/(c)  core terms only / numpy floor", "a1", "c", 1.0, False),
            ("(b)/(a5)  statsmodels / toggle, column cache", "b", "a5", 10.0, True),
            ("(a5)/(c)  toggle, column cache / numpy floor", "a5", "c", 1.0, False),
            ("(b)/(c)   statsmodels / numpy floor", "b", "c", None, True),
        ],
    )
    return t


def engine_threads(work: Workload, repeats: int) -> None:
    """fit_ols on the workload's design with the passes on one thread and on two, interleaved:
    whether the second core pays, measured rather than assumed."""
    from core.model import engine
    from core.model.design import build_design
    from core.model.ols import fit_ols
    from core.model.spec import parse_spec

    design = build_design(work.data, parse_spec(work.spec, work.data))
    saved = engine.THREADS

    def with_threads(count: int):
        def run():
            engine.THREADS = count
            try:
                return fit_ols(design.X, design.y, design.weights)
            finally:
                engine.THREADS = saved

        return run

    jobs = {f"t{count}": (f"fit_ols, passes on {count} thread(s)", with_threads(count)) for count in (1, 2)}
    t = round_robin(jobs, max(repeats, 7))
    fit = t["t1"].result
    print(
        f"\nfit engine alone ({work.key}; X {design.X.shape[0]:,} x {design.X.shape[1]}; solver {fit.solver}, {fit.refinements} refinement step(s)):"
    )
    print_times(t)
    print(
        f"  one thread / two threads: wall {t['t1'].median / t['t2'].median:.2f}x, min {min(t['t1'].wall) / min(t['t2'].wall):.2f}x"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=5, help="timed repetitions per measurement (median reported)")
    parser.add_argument("--workload", choices=["bench", "logs", "both"], default="both")
    parser.add_argument("--no-profile", action="store_true", help="skip the cProfile run")
    parser.add_argument("--top", type=int, default=15, help="rows in each profile table")
    args = parser.parse_args()
    started = time.perf_counter()

    print("Formwise refit benchmark (issue 14: core refit <= 1.0x a bare numpy floor and >= 10x statsmodels' formula path)")
    print(machine_line())
    print(f"at start: {load_line()}")
    print(
        f"timing: {args.repeats} timed calls of each, interleaved round-robin after 1 warm-up call of each, "
        f"a {SETTLE_S} s pause before each; median wall time (perf_counter) and median CPU time of this process (process_time, all threads)"
    )
    workloads = []
    if args.workload in ("bench", "both"):
        t0 = time.perf_counter()
        data = make_data(args.rows)
        title = (
            f"bench: {len(data):,} rows; 10 regressors (4 log, 1 ihs with {int((data[IHS_COLUMN] == 0).sum()):,} zeros, "
            f"4 level, 1 category with 4 levels) -> 13 coefficients; log outcome; HC1 (made in {time.perf_counter() - t0:.1f} s)"
        )
        workloads.append(
            Workload(
                "bench",
                title,
                data,
                make_spec("HC1"),
                make_formula(),
                OUTCOME,
                LOG_COLUMNS,
                [IHS_COLUMN],
                LEVEL_COLUMNS,
                CATEGORY_COLUMN,
            )
        )
    if args.workload in ("logs", "both"):
        t0 = time.perf_counter()
        data = make_log_data(args.rows)
        title = f"logs: {len(data):,} rows; 10 log regressors -> 11 coefficients; log outcome; HC1 (made in {time.perf_counter() - t0:.1f} s)"
        workloads.append(Workload("logs", title, data, make_log_spec("HC1"), make_log_formula(), LOG10_OUTCOME, LOG10_COLUMNS))

    summary = []
    for work in workloads:
        print(f"\n=== {work.title}")
        print(f"formula (b): {work.formula}\n")
        t = run_bench(work, args.repeats, True) if work.key == "bench" else run_logs(work, args.repeats)
        result = t["a"].result
        est, se, floor_est, floor_se = agreement(result, t["b"].result, t["c"].result)
        print("\nagreement with statsmodels (max relative difference over the coefficients; target <= 1e-10)")
        print(f"  core  estimates       {est:.2e}   {'ok' if est <= 1e-10 else 'EXCEEDS 1e-10'}")
        print(f"  core  HC1 std errors  {se:.2e}   {'ok' if se <= 1e-10 else 'EXCEEDS 1e-10'}")
        print(f"  floor estimates       {floor_est:.2e}")
        print(f"  floor HC1 std errors  {floor_se:.2e}")
        print(f"  core n_obs {result['n_obs']:,}, n_dropped {result['n_dropped']}, warnings: {result['warnings'] or 'none'}")
        summary.append((work.key, t["a"].median / t["c"].median, t["b"].median / t["a"].median, max(est, se)))
        engine_threads(work, args.repeats)
    print(f"\nat end of timing: {load_line()}")

    print("\nsummary (wall medians)")
    for key, floor_ratio, sm_ratio, agree in summary:
        print(
            f"  {key:<6} core / floor {floor_ratio:5.2f}x ({verdict(floor_ratio, 1.0, False)} <= 1.0)   "
            f"statsmodels / core {sm_ratio:5.1f}x ({verdict(sm_ratio, 10.0, True)} >= 10)   "
            f"agreement {agree:.1e} ({'ok' if agree <= 1e-10 else 'EXCEEDS'} <= 1e-10)"
        )

    if not args.no_profile and workloads and workloads[0].key == "bench":
        print()
        print(profile_core(workloads[0].data, workloads[0].spec, args.top))
    print(f"total benchmark time {time.perf_counter() - started:.0f} s")


if __name__ == "__main__":
    main()
