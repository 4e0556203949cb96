"""Shared helpers for the benchmarks: invented data, the matching spec and formula, timing.

Nothing here asserts on time; the scripts print what they measure.
"""

from __future__ import annotations

import os
import platform
import resource
import statistics
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # run as `python bench/x.py` from anywhere
    sys.path.insert(0, str(ROOT))

# 10 regressors: 4 log, 1 ihs (with zeros), 4 level, 1 category with 4 levels -> k = 13 coefficients.
LOG_COLUMNS = ["price", "income", "size", "distance"]
IHS_COLUMN = "ad_spend"
LEVEL_COLUMNS = ["age", "rating", "share", "promo"]
CATEGORY_COLUMN = "region"
CATEGORY_LEVELS = ["Coast", "Inland", "North", "South"]
OUTCOME = "revenue"


def make_data(n: int = 1_000_000, seed: int = 20240501) -> pd.DataFrame:
    """Invented data with known coefficients; the outcome is positive (used with 'log')."""
    rng = np.random.default_rng(seed)
    cols: dict[str, np.ndarray] = {}
    for j, name in enumerate(LOG_COLUMNS):
        cols[name] = rng.lognormal(mean=1.0 + 0.5 * j, sigma=0.6, size=n)
    ad = rng.lognormal(mean=2.0, sigma=1.0, size=n)
    ad[rng.random(n) < 0.3] = 0.0  # about 30 % zeros: the reason for ihs
    cols[IHS_COLUMN] = ad
    cols["age"] = rng.uniform(0.0, 40.0, n)
    cols["rating"] = rng.normal(3.5, 0.8, n)
    cols["share"] = rng.beta(2.0, 5.0, n)
    cols["promo"] = (rng.random(n) < 0.25).astype(float)
    region_codes = rng.choice(len(CATEGORY_LEVELS), size=n, p=[0.4, 0.25, 0.2, 0.15])
    region = np.asarray(CATEGORY_LEVELS, dtype=object)[region_codes]
    index = (
        2.0
        - 0.8 * np.log(cols["price"])
        + 0.5 * np.log(cols["income"])
        + 0.3 * np.log(cols["size"])
        - 0.2 * np.log(cols["distance"])
        + 0.05 * np.arcsinh(cols[IHS_COLUMN])
        + 0.01 * cols["age"]
        + 0.1 * cols["rating"]
        - 0.4 * cols["share"]
        + 0.15 * cols["promo"]
        + np.array([0.0, -0.1, 0.05, 0.2])[region_codes]
    )
    # Heteroskedastic errors, so HC1 differs from classical.
    noise = rng.normal(0.0, 0.3 + 0.1 * cols["promo"] + 0.005 * cols["age"], n)
    cols[OUTCOME] = np.exp(index + noise)
    frame = pd.DataFrame(cols)
    frame[CATEGORY_COLUMN] = region  # object (str) column, as read from a CSV
    return frame


def make_spec(covariance: str = "HC1") -> dict:
    regressors = [{"column": c, "transform": "log", "change": "+10%"} for c in LOG_COLUMNS]
    regressors.append({"column": IHS_COLUMN, "transform": "ihs"})
    regressors += [{"column": c, "transform": "level"} for c in LEVEL_COLUMNS]
    regressors.append({"column": CATEGORY_COLUMN, "transform": "category", "reference": "Coast"})
    return {"outcome": {"column": OUTCOME, "transform": "log"}, "regressors": regressors, "covariance": covariance}


def make_formula() -> str:
    """The statsmodels/patsy formula for the same model (same reference level)."""
    parts = [f"np.log({c})" for c in LOG_COLUMNS]
    parts.append(f"np.arcsinh({IHS_COLUMN})")
    parts += LEVEL_COLUMNS
    parts.append(f"C({CATEGORY_COLUMN}, Treatment(reference='Coast'))")
    return f"np.log({OUTCOME}) ~ " + " + ".join(parts)


def statsmodels_name(term: dict) -> str:
    """The statsmodels parameter name of a core term (column order differs)."""
    if term["column"] is None:
        return "Intercept"
    if term["transform"] == "log":
        return f"np.log({term['column']})"
    if term["transform"] == "ihs":
        return f"np.arcsinh({term['column']})"
    if term["transform"] == "category":
        return f"C({term['column']}, Treatment(reference='Coast'))[T.{term['level']}]"
    return term["column"]


# The second workload: ten positive regressors, every one used with log, and a log outcome
# (k = 11 coefficients): the case where core's transforms and domain checks cost the most per
# column, and no category or IHS column dilutes them.
LOG10_COLUMNS = [f"v{j}" for j in range(1, 11)]
LOG10_OUTCOME = "sales"


def make_log_data(n: int = 1_000_000, seed: int = 20240502) -> pd.DataFrame:
    """Invented data for the ten-log workload; heteroskedastic, so HC1 differs from classical."""
    rng = np.random.default_rng(seed)
    cols = {name: rng.lognormal(mean=0.5 + 0.2 * j, sigma=0.5, size=n) for j, name in enumerate(LOG10_COLUMNS)}
    slopes = np.linspace(-0.6, 0.6, len(LOG10_COLUMNS))
    index = 1.0 + sum(b * np.log(cols[c]) for b, c in zip(slopes, LOG10_COLUMNS, strict=True))
    noise = rng.normal(0.0, 0.2 + 0.1 * np.abs(np.log(cols[LOG10_COLUMNS[0]])), n)
    cols[LOG10_OUTCOME] = np.exp(index + noise)
    return pd.DataFrame(cols)


def make_log_spec(covariance: str = "HC1") -> dict:
    regressors = [{"column": c, "transform": "log"} for c in LOG10_COLUMNS]
    return {"outcome": {"column": LOG10_OUTCOME, "transform": "log"}, "regressors": regressors, "covariance": covariance}


def make_log_formula() -> str:
    return f"np.log({LOG10_OUTCOME}) ~ " + " + ".join(f"np.log({c})" for c in LOG10_COLUMNS)


@dataclass
class Timing:
    label: str
    wall: list[float] = field(default_factory=list)
    cpu: list[float] = field(default_factory=list)
    result: object = None

    @property
    def median(self) -> float:
        return statistics.median(self.wall)

    @property
    def cpu_median(self) -> float:
        return statistics.median(self.cpu)


# Untimed pause before each timed call. After a call that ran BLAS on several threads, OpenBLAS's
# idle threads keep busy-waiting for more work for a while and hold a core: measured on the
# two-core machine, a core refit straight after the numpy floor took 95 ms, 78 ms after a 0.3 s
# pause, 72 ms after another core refit. A user's edit never follows a threaded BLAS call that
# closely, so each timed call starts on a settled machine, whichever job ran before it.
SETTLE_S = 0.3


def round_robin(jobs: dict[str, tuple[str, Callable[[], object]]], repeats: int) -> dict[str, Timing]:
    """Time every job ``repeats`` times, interleaved (a, b, c, a, b, c, ...), after one untimed
    warm-up call of each and a pause of ``SETTLE_S`` before each timed call. Interleaving spreads
    any drift in the machine's load over all jobs alike, so ratios measured in one run stay fair.
    Wall time (perf_counter) and this process's CPU time (process_time, all threads) are both
    kept; the last result of each job too."""
    out = {key: Timing(label) for key, (label, _) in jobs.items()}
    for key, (_, fn) in jobs.items():
        out[key].result = fn()
    for _ in range(repeats):
        for key, (_, fn) in jobs.items():
            time.sleep(SETTLE_S)
            wall, cpu = time.perf_counter(), time.process_time()
            out[key].result = fn()
            out[key].wall.append(time.perf_counter() - wall)
            out[key].cpu.append(time.process_time() - cpu)
    return out


def load_line() -> str:
    """The machine's load average: other work running beside the benchmark skews wall times."""
    try:
        one, five, _ = os.getloadavg()
    except OSError:
        return "load average: unknown"
    return f"load average {one:.2f} (1 min), {five:.2f} (5 min) on {os.cpu_count()} CPU(s)"


def peak_rss_bytes() -> int:
    """Peak resident set size of this process so far, in bytes.

    On Linux this is VmHWM from /proc/self/status: the high-water mark of this process's own
    memory map, which starts afresh at exec. getrusage's ru_maxrss would be the same number but
    for one catch: Linux carries ru_maxrss over from the parent across fork + exec, so a child
    started by a big parent reports at least the parent's peak. Elsewhere ru_maxrss is used.
    """
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return int(peak) if sys.platform == "darwin" else int(peak) * 1024


def current_rss_bytes() -> int:
    """Current resident set size (Linux /proc; falls back to the peak elsewhere)."""
    try:
        with open("/proc/self/statm") as fh:
            pages = int(fh.read().split()[1])
        return pages * os.sysconf("SC_PAGE_SIZE")
    except OSError:
        return peak_rss_bytes()


def mb(n_bytes: float) -> str:
    """Decimal megabytes (1 MB = 1,000,000 bytes), as in the '2 GB' target."""
    return f"{n_bytes / 1e6:,.0f} MB"


def machine_line() -> str:
    import scipy
    import statsmodels

    return (
        f"python {platform.python_version()}, numpy {np.__version__}, pandas {pd.__version__}, "
        f"scipy {scipy.__version__}, statsmodels {statsmodels.__version__}; "
        f"{os.cpu_count()} CPU(s), {platform.machine()}"
    )


def fmt_s(seconds: float) -> str:
    return f"{seconds:8.3f} s"
