"""Peak memory and load time at 1,000,000 rows: CSV -> core.intake.reader.read_table -> core.analyze.

    .venv/bin/python bench/memory.py                    # 1,000,000 rows; full analysis included
    .venv/bin/python bench/memory.py --rows 200000 --skip-full

The invented 1,000,000-row table of bench/refit.py (11 columns) is written to a CSV file in a
temporary folder with pandas. Each measurement then runs in a FRESH Python process, so that its
peak resident set size (the kernel's high-water mark of the whole process: interpreter,
libraries, the table and every temporary) belongs to that measurement alone. The peak is read
from /proc/self/status (VmHWM): it is the figure resource.getrusage(RUSAGE_SELF).ru_maxrss gives,
without the parent's peak that Linux carries over into ru_maxrss across fork + exec (elsewhere
ru_maxrss is used as is):

  pandas        pandas.read_csv(path) only                       (reference)
  core refit    read_table(path), then core.analyze(parts={"terms","fit","effects"})
  core full     read_table(path), then core.analyze(data, spec)  (every section: diagnostics,
                                                                  Box-Cox, curves, units check, ...)
  core cached   as core full, through a core.ColumnCache (as the app runs it), then refits
                toggling every numeric regressor through level, log / ihs and sqrt until the
                cache holds its cap of converted and transformed columns

Target: peak below 2 GB (2,000,000,000 bytes) for loading and analysing at that size.
Load time: core.intake.reader.read_table(path) against plain pandas.read_csv(path), median of
--repeats alternating calls in one process, and their ratio.

No timed or sized assertions: this prints what it measures.
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from _common import ROOT, machine_line, make_data, make_spec, mb, peak_rss_bytes

TARGET_BYTES = 2_000_000_000
REFIT_PARTS = ["terms", "fit", "effects"]


# --- child process ------------------------------------------------------------------------------
def child(mode: str, path: str, repeats: int) -> dict:
    import pandas as pd

    out: dict = {"mode": mode}
    if mode == "pandas":
        out["peak_after_imports"] = peak_rss_bytes()
        start = time.perf_counter()
        frame = pd.read_csv(path)
        out["load_s"] = time.perf_counter() - start
        out["peak_after_load"] = peak_rss_bytes()
        out["frame_bytes"] = int(frame.memory_usage(deep=True).sum())
        return out

    import core
    from core.intake.reader import read_table

    if mode == "load-times":
        reader_times, pandas_times = [], []
        read_table(path)  # warm-up: file in the page cache for both
        for _ in range(repeats):
            start = time.perf_counter()
            read_table(path)
            reader_times.append(time.perf_counter() - start)
            start = time.perf_counter()
            pd.read_csv(path)
            pandas_times.append(time.perf_counter() - start)
        out["read_table_s"] = reader_times
        out["read_csv_s"] = pandas_times
        return out

    out["peak_after_imports"] = peak_rss_bytes()
    start = time.perf_counter()
    frame = read_table(path)
    out["load_s"] = time.perf_counter() - start
    out["peak_after_load"] = peak_rss_bytes()
    out["frame_bytes"] = int(frame.memory_usage(deep=True).sum())
    spec = make_spec("HC1")
    parts = set(REFIT_PARTS) if mode == "core-refit" else None
    columns = core.ColumnCache() if mode == "core-cached" else None
    start = time.perf_counter()
    result = core.analyze(frame, spec, parts=parts, columns=columns)
    out["analyze_s"] = time.perf_counter() - start
    if columns is not None:
        for regressor in spec["regressors"]:
            if regressor["transform"] == "category":
                continue
            for transform in ("level", "ihs", "sqrt"):
                toggled = {**spec, "regressors": [dict(r) for r in spec["regressors"]]}
                for r in toggled["regressors"]:
                    if r["column"] == regressor["column"]:
                        r["transform"] = transform
                core.analyze(frame, toggled, parts=set(REFIT_PARTS), columns=columns)
        out["cache_bytes"] = columns._bytes
    out["peak_after_analyze"] = peak_rss_bytes()
    out["n_obs"] = result["n_obs"]
    return out


def run_child(mode: str, path: Path, repeats: int) -> dict:
    command = [sys.executable, str(Path(__file__).resolve()), "--child", mode, "--path", str(path), "--repeats", str(repeats)]
    done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT, check=False)
    if done.returncode != 0:
        raise SystemExit(f"child '{mode}' failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


# --- parent -------------------------------------------------------------------------------------
def verdict(peak: int) -> str:
    return "meets target (< 2 GB)" if peak < TARGET_BYTES else "MISSES target (>= 2 GB)"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=5, help="alternating load-time repetitions (median reported)")
    parser.add_argument("--skip-full", action="store_true", help="skip the full (every section) analysis")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument("--path", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        print(json.dumps(child(args.child, args.path, args.repeats)))
        return

    started = time.perf_counter()
    print("Formwise memory and load benchmark (target: peak RSS < 2 GB = 2,000,000,000 bytes at 1,000,000 rows)")
    print(machine_line())
    with tempfile.TemporaryDirectory(prefix="formwise-bench-") as tmp:
        path = Path(tmp) / "bench_1m.csv"
        data = make_data(args.rows)
        start = time.perf_counter()
        data.to_csv(path, index=False)
        written = time.perf_counter() - start
        del data
        print(
            f"CSV: {args.rows:,} rows x 11 columns, {path.stat().st_size / 1e6:,.0f} MB on disk "
            f"(written by pandas in {written:.1f} s)\n"
        )

        results = {"pandas": run_child("pandas", path, args.repeats), "core-refit": run_child("core-refit", path, args.repeats)}
        if not args.skip_full:
            results["core-full"] = run_child("core-full", path, args.repeats)
            results["core-cached"] = run_child("core-cached", path, args.repeats)
        times = run_child("load-times", path, args.repeats)

    print(
        "peak RSS of a fresh process (VmHWM = the ru_maxrss high-water mark of this process alone; cumulative; 1 MB = 10^6 bytes)"
    )
    print(f"{'process':<58}{'after imports':>14}{'after load':>12}{'after analyze':>15}   verdict")
    p = results["pandas"]
    print(f"{'pandas.read_csv only':<58}{mb(p['peak_after_imports']):>14}{mb(p['peak_after_load']):>12}{'-':>15}")
    labels = {
        "core-refit": "read_table + analyze(parts={terms,fit,effects})",
        "core-full": "read_table + analyze(all sections)",
        "core-cached": "the same through a ColumnCache, then 3 toggles per regressor",
    }
    for key, label in labels.items():
        if key not in results:
            continue
        r = results[key]
        print(
            f"{label:<58}{mb(r['peak_after_imports']):>14}{mb(r['peak_after_load']):>12}"
            f"{mb(r['peak_after_analyze']):>15}   {verdict(r['peak_after_analyze'])}"
        )
    r = results["core-refit"]
    print(
        f"\nthe loaded DataFrame itself: {mb(r['frame_bytes'])} (memory_usage(deep=True)); "
        f"pandas' own frame: {mb(p['frame_bytes'])}"
    )
    for key, label in labels.items():
        if key in results:
            r = results[key]
            print(
                f"{label}: analyze took {r['analyze_s']:.1f} s, n_obs {r['n_obs']:,}; "
                f"peak rose {mb(r['peak_after_analyze'] - r['peak_after_load'])} above the post-load peak"
            )

    if "core-cached" in results:
        print(f"column cache at the end of the toggles: {mb(results['core-cached']['cache_bytes'])} held (cap 256 MB)")

    t_reader = statistics.median(times["read_table_s"])
    t_pandas = statistics.median(times["read_csv_s"])
    print(f"\nCSV load time (median of {args.repeats} alternating calls in one process, after one warm-up)")
    print(
        f"  core.intake.reader.read_table(path)  {t_reader:7.2f} s   runs: {', '.join(f'{t:.2f}' for t in times['read_table_s'])}"
    )
    print(f"  pandas.read_csv(path)         {t_pandas:7.2f} s   runs: {', '.join(f'{t:.2f}' for t in times['read_csv_s'])}")
    print(f"  ratio read_table / read_csv   {t_reader / t_pandas:7.2f}x")
    print(
        f"  (first, cold-process loads: read_table {results['core-refit']['load_s']:.2f} s, "
        f"read_csv {results['pandas']['load_s']:.2f} s)"
    )
    print(f"\ntotal benchmark time {time.perf_counter() - started:.0f} s")


if __name__ == "__main__":
    main()
