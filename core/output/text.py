"""The sentences Formwise says about a result: one module of words for the app and the report.

Plain data in, plain text out (no Markdown, no HTML): each caller escapes for its own target
(``core.output.escape``).
"""

from __future__ import annotations

import datetime
import math
from typing import Any

import numpy as np

from core.model.covariance import COVARIANCE_KINDS
from core.model.transforms import variable_label
from core.output.numbers import compact, p_text, sig, signed
from core.output.unit_words import amount, plural

# Fewer rows than this, or fewer than ROWS_PER_COEFFICIENT rows per coefficient (intercept
# included), and every figure is flagged as fragile (common practice, no source).
SMALL_SAMPLE = 30
ROWS_PER_COEFFICIENT = 10


def small_sample(n: int, k: int) -> bool:
    """Whether n rows are few for k coefficients (the one small-sample rule)."""
    return n < max(SMALL_SAMPLE, ROWS_PER_COEFFICIENT * k)


def small_sample_lines(n: int, k: int | None) -> list[str]:
    """The cautions for a small sample: one line for fewer than 30 rows, one for fewer than 10
    rows per coefficient."""
    lines = []
    if n < SMALL_SAMPLE:
        lines.append(f"Small sample: {n} rows. Treat every figure as fragile.")
    if k and n < ROWS_PER_COEFFICIENT * k:
        lines.append(
            f"Few rows for the model's size: {n} rows for {k} coefficients, fewer than {ROWS_PER_COEFFICIENT} "
            "per coefficient. Estimates, intervals and tests are fragile; a smaller model may be more honest."
        )
    return lines


def join_words(items: list[str]) -> str:
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def model_sentence(result: dict[str, Any]) -> str:
    """'log of weekly_revenue explained by log of drink_price, ... and region (categories)'."""
    outcome = result["outcome"]
    y = variable_label(outcome["column"], outcome["transform"], "outcome")
    seen: dict[str, str] = {}
    for term in result.get("terms") or []:
        if term["column"] and term["column"] not in seen:
            seen[term["column"]] = variable_label(term["column"], term["transform"])
    absorbed = (result.get("absorb") or {}).get("columns") or []
    effects = f", with the fixed effects of {join_words(absorbed)} absorbed" if absorbed else ""
    if not seen:
        return f"{y} with no regressors (a mean only){effects}"
    return f"{y} explained by {join_words(list(seen.values()))}{effects}"


def rows_sentence(result: dict[str, Any]) -> str:
    used = result.get("n_obs", 0)
    dropped = result.get("n_dropped", 0)
    return f"{used:,} rows used, {dropped:,} dropped"


def fit_sentence(result: dict[str, Any], estimator: str = "ols") -> str:
    """' · R² 0.714 on the log scale, 0.703 for weekly_revenue itself' (empty without a fit).

    R² of a transformed outcome measures the transformed scale; the original-scale R²
    (squared correlation of y with the retransformed prediction) is the one that compares
    across outcome transforms, so both are named. PPML has no least-squares R²; its R² is the
    squared correlation of y with the fitted mean, and is named so.
    """
    fit = result.get("fit") or {}
    r2 = fit.get("r2")
    if r2 is None:
        return ""
    outcome = result["outcome"]
    if estimator == "ppml":
        return f" · R² {r2:.3f} (squared correlation of {outcome['column']} with its fitted mean)"
    if outcome["transform"] == "level":
        return f" · R² {r2:.3f}"
    text = f" · R² {r2:.3f} for {variable_label(outcome['column'], outcome['transform'], 'outcome')}"
    original = fit.get("r2_original_scale")
    if original is not None:
        text += f", {original:.3f} for {outcome['column']} itself"
    return text


def dropped_lines(result: dict[str, Any]) -> list[str]:
    """One line per reason rows were left out, naming the column."""
    return [f"{d['count']:,} row(s): {d['reason']} in '{d['column']}'" for d in result.get("dropped") or []]


def sentence_case(text: str) -> str:
    return text[:1].upper() + text[1:] if text else text


# Significance level for the plain-word test sentences (common practice, no source).
ALPHA = 0.05


def zero_sentence(note: dict[str, Any]) -> str:
    """'catering_orders is zero in 955 rows: a log of catering_orders would drop 955 rows (64 %).'"""
    column = note["column"]
    what = f"zero in {note['zeros']:,} row{'s' if note['zeros'] != 1 else ''}"
    if note["negatives"]:
        what += f" and negative in {note['negatives']:,}"
    return (
        f"{column} is {what}: a log of {column} would drop {note['dropped_by_log']:,} rows "
        f"({note['share'] * 100:.0f} % of the data)."
    )


def showing_words(shown: int, total: int, what: str = "rows") -> str:
    """'showing all 1,500 rows' or 'showing 20,000 of 1,000,000 rows (a random sample)'."""
    if shown >= total:
        return f"showing all {total:,} {what}"
    return f"showing {shown:,} of {total:,} {what} (a random sample)"


# --- units check (IHS and shifted-log regressors) -----------------------------------------------------
UNIT_WORDS = {
    0.001: ("÷1000", "in thousands"),
    0.01: ("÷100", "in hundreds"),
    0.1: ("÷10", "in tens"),
    1.0: ("as recorded", "as in the data"),
    10.0: ("×10", "in tenths"),
    100.0: ("×100", "in hundredths"),
    1000.0: ("×1000", "in thousandths"),
}


def factor_words(factor: float) -> tuple[str, str]:
    """('÷1000', 'in thousands') for 0.001; a generic '×f' for factors not listed."""
    for known, words in UNIT_WORDS.items():
        if math.isclose(factor, known, rel_tol=1e-9):
            return words
    return f"×{factor:g}", f"multiplied by {factor:g}"


def units_warning(check: dict[str, Any], transform: str | None) -> str | None:
    """The plain warning when the effect moves with the units (None when it barely moves)."""
    if not check.get("moves"):
        return None
    column = check["column"]
    largest = check.get("max_relative_move") or 0.0
    kind = variable_label(column, transform)
    return (
        f"The effect of {column} changes by up to {largest * 100:.0f} % when {column} is measured in other units. "
        f"With {kind} the result depends on the units of measurement, so report the units you used, or use a log "
        f"of {column} if it has no zeros (a log's effects do not depend on units)."
    )


def skew_words(before: float | None, after: float | None, zeros: int = 0) -> str:
    """'skewness 3.10 → 0.05' with a word on what changed; a transform that keeps zeros leaves
    them as a spike at zero, which a skewness near 0 does not show."""
    if before is None:
        return "skewness not available"
    if after is None:
        return f"skewness {signed(before)}"
    text = f"skewness {signed(before)} → {signed(after)}"
    if abs(after) < 0.5 <= abs(before):
        text += " (the transform tamed the long tail)"
    elif abs(after) > abs(before) + 0.25:
        text += " (more skewed than before)"
    if zeros:
        text += f"; its {zeros:,} zeros stay a separate spike at 0"
    return text


def check_sentences(diagnostics: dict[str, Any], covariance: str = "HC1") -> list[tuple[bool, str]]:
    """One plain sentence per residual test, with whether it raises a concern (p < ALPHA)."""
    out: list[tuple[bool, str]] = []
    robust = covariance != "classical"
    bp = diagnostics.get("breusch_pagan") or {}
    p = bp.get("p_value")
    if p is not None and p < ALPHA:
        text = f"The spread of residuals changes with the regressors (Breusch–Pagan, Koenker form: {p_text(p)})."
        text += (
            " The robust standard errors chosen in the sidebar allow for this."
            if robust
            else " Classical standard errors assume it does not: choose robust (HC) errors in the sidebar."
        )
        out.append((True, text))
    elif p is not None:
        out.append(
            (
                False,
                f"No sign that the spread of residuals changes with the regressors (Breusch–Pagan, Koenker form: {p_text(p)}).",
            )
        )
    white = diagnostics.get("white") or {}
    p = white.get("p_value")
    # Over its size budget the White test runs on the fitted values and their squares
    # (core.inference.diagnostics.white): the sentence names what was tested.
    against, name = (
        ("the fitted values or their squares", "White, on fitted values")
        if white.get("form") == "fitted"
        else ("the regressors, their squares or products", "White")
    )
    if p is not None and p < ALPHA:
        out.append((True, f"The spread of residuals changes with {against} ({name}: {p_text(p)})."))
    elif p is not None:
        out.append((False, f"No sign that the spread changes with {against} ({name}: {p_text(p)})."))
    jb = diagnostics.get("jarque_bera") or {}
    p = jb.get("p_value")
    shape = ""
    if jb.get("skewness") is not None and jb.get("kurtosis") is not None:
        shape = f"; skewness {jb['skewness']:.2f}, kurtosis {jb['kurtosis']:.2f} where a normal curve has 0 and 3"
    if p is not None and p < ALPHA:
        out.append(
            (
                True,
                f"The residuals don't look normal (Jarque–Bera: {p_text(p)}{shape}). Coefficients and robust intervals do "
                "not need normal residuals in large samples, but the prediction interval and the normal-theory "
                "retransform lean on it; the smearing retransform does not.",
            )
        )
    elif p is not None:
        out.append((False, f"The residuals look normal (Jarque–Bera: {p_text(p)}{shape})."))
    reset = diagnostics.get("reset") or {}
    p = reset.get("p_value")
    if p is not None and p < ALPHA:
        out.append(
            (
                True,
                f"The functional form may be missing curvature (RESET: {p_text(p)}): try another transform, a quadratic "
                "term, or a regressor that is left out.",
            )
        )
    elif p is not None:
        out.append((False, f"No sign of missing curvature in the functional form (RESET: {p_text(p)})."))
    return out


def _white_form_words(diagnostics: dict[str, Any]) -> list[str]:
    """What the White test's budget changed, when it did (core.inference.diagnostics.white): its
    form on the fitted values and their squares, or a sample of the rows."""
    white = diagnostics.get("white") or {}
    return [white["note"]] if white.get("note") else []


def _spread_words(residuals: dict[str, Any] | None) -> list[str]:
    bands = (residuals or {}).get("spread_bands") or []
    widths = [b["q75"] - b["q25"] for b in bands]
    if len(widths) < 2 or min(widths) <= 0:
        return []
    return [
        f"Across {len(widths)} bands of fitted values with {bands[0]['n']:,} rows or so each, the middle half of the "
        f"residuals is {max(widths) / min(widths):.1f} times as wide in the widest band as in the narrowest."
    ]


def _shape_headline(jb: dict[str, Any]) -> str:
    skew, kurt = jb.get("skewness"), jb.get("kurtosis")
    if kurt is not None and kurt > 3.5:
        return "The residuals have heavier tails than a bell curve"
    if skew is not None and abs(skew) > 0.5:
        return f"The residuals lean to one side: a longer tail {'above' if skew > 0 else 'below'} zero"
    if kurt is not None and kurt < 2.5:
        return "The residuals have lighter tails than a bell curve"
    return "The residuals are not quite shaped like a bell"


def _tail_words(residuals: dict[str, Any] | None) -> list[str]:
    two = [t for t in (residuals or {}).get("tails") or [] if t["point"] == 2.0]
    if not two:
        return []
    observed = sum(t["count"] for t in two)
    share = sum(t["share"] for t in two) * 100
    normal = sum(t["normal_share"] for t in two) * 100
    return [
        f"{observed:,} rows ({share:.1f} %) lie more than 2 standard deviations from zero, where a bell curve puts "
        f"{normal:.1f} %."
    ]


def _curve_words(residuals: dict[str, Any] | None) -> list[str]:
    bands = (residuals or {}).get("mean_bands") or []
    if len(bands) < 2:
        return []
    off = sum(1 for b in bands if b["low"] > 0 or b["high"] < 0)
    return [
        f"{off} of {len(bands)} bands of fitted values have a mean residual whose 95 % interval misses zero "
        f"(about {0.05 * len(bands):.0f} would by chance alone)."
    ]


def check_verdicts(
    diagnostics: dict[str, Any], covariance: str = "HC1", residuals: dict[str, Any] | None = None
) -> list[dict[str, Any]]:
    """The residual checks as three questions, each with a plain-word verdict (the headline of
    its chart), whether it raises a concern, and the sentences behind it: the tests
    (``check_sentences``) and what the bands and tails of ``residuals`` show."""
    spread_tests = {k: diagnostics[k] for k in ("breusch_pagan", "white") if diagnostics.get(k)}
    jb, reset = diagnostics.get("jarque_bera") or {}, diagnostics.get("reset") or {}
    checks = [
        (
            "spread",
            "Is the spread even?",
            check_sentences(spread_tests, covariance),
            _white_form_words(spread_tests) + _spread_words(residuals),
        ),
        ("shape", "Are the residuals shaped like a bell?", check_sentences({"jarque_bera": jb}), _tail_words(residuals)),
        ("curve", "Is a curve missing?", check_sentences({"reset": reset}), _curve_words(residuals)),
    ]
    headlines = {
        "spread": ("The spread of the residuals changes", "The spread of the residuals is even"),
        "shape": (_shape_headline(jb), "The residuals are shaped like a bell"),
        "curve": ("The model may be missing a curve", "No sign of a missing curve"),
    }
    out = []
    for key, question, tests, more in checks:
        concern = any(flag for flag, _ in tests)
        out.append(
            {
                "check": key,
                "question": question,
                "concern": concern,
                "tested": bool(tests),
                "headline": headlines[key][0 if concern else 1] if tests else "Not tested for this model",
                "sentences": [sentence for _, sentence in tests] + more,
            }
        )
    return out


def boxcox_headline(boxcox: dict[str, Any], column: str) -> str:
    """The Box-Cox verdict in a few words: 'A log of weekly_revenue fits the data'."""
    lam, low, high = boxcox.get("lambda"), boxcox.get("ci_low"), boxcox.get("ci_high")
    if lam is None or low is None or high is None:
        return f"The best power of {column} is not pinned down"
    if low <= 0 <= high and low <= 1 <= high:
        return f"A log or levels of {column}: the data cannot choose"
    if low <= 0 <= high:
        return f"A log of {column} fits the data"
    if low <= 1 <= high:
        return f"{column} in levels fits the data"
    if low <= 0.5 <= high:
        return f"A square root of {column} fits better than a log or levels"
    if high < 0:
        return f"{column} needs a stronger transform than a log"
    if low > 1:
        return f"{column} needs a power above 1"
    return f"The best power of {column} lies between a log and levels"


def boxcox_sentence(boxcox: dict[str, Any], column: str) -> str:
    """What the Box-Cox profile suggests for the outcome, in words."""
    lam, low, high = boxcox.get("lambda"), boxcox.get("ci_low"), boxcox.get("ci_high")
    if lam is None:
        return f"The Box-Cox profile for {column} could not be computed."
    if low is None or high is None:
        return f"The best power for {column} is λ = {signed(lam)}; its 95 % interval is open on one side."
    head = f"The best power for {column} is λ = {signed(lam)} (95 % interval {signed(low)} to {signed(high)}). "

    def inside(value: float) -> bool:
        return low <= value <= high

    if inside(0) and inside(1):
        return (
            head + "Both a log (λ = 0) and levels (λ = 1) are consistent with the data; the profile cannot choose between them."
        )
    if inside(0):
        return head + f"A log of {column} (λ = 0) is consistent with the data; levels (λ = 1) are not."
    if inside(1):
        return head + f"{column} in levels (λ = 1) is consistent with the data; a log (λ = 0) is not."
    if inside(0.5):
        return head + f"Neither a log nor levels: a square root of {column} (λ = 0.5) is consistent with the data."
    if high < 0:
        return head + f"The data ask for a stronger transform than a log (λ below 0), so even log of {column} leaves some skew."
    if low > 1:
        return head + f"The data ask for a power above 1: {column} is skewed to the left, and a log would make it worse."
    side = "log" if abs(lam) < abs(lam - 1) else "levels"
    return head + f"Neither a log nor levels fits best; the best power lies between them, closer to {side}."


def outside_words(prediction: dict[str, Any], inputs: list[dict[str, Any]]) -> list[str]:
    """'drink_price = 8 is outside the observed 3 to 6.29' for each flagged value."""
    ranges = {i["column"]: (i.get("low"), i.get("high")) for i in inputs if i["kind"] == "number"}
    out = []
    for column in prediction.get("outside_observed_range") or []:
        value = (prediction.get("values") or {}).get(column)
        low, high = ranges.get(column, (None, None))
        where = f" (observed {compact(low)} to {compact(high)})" if low is not None and high is not None else ""
        shown = compact(float(value)) if isinstance(value, (int, float)) else str(value)
        out.append(f"{column} = {shown} is outside the values in the data{where}")
    return out


def curve_sentence(curve: dict[str, Any], outcome: str, show_naive: bool, units: dict[str, str] | None = None) -> str:
    """What an effect curve says, in one or two sentences; values in the columns' ``units``
    where they are named."""

    def floats(key: str) -> np.ndarray:
        return np.array([np.nan if v is None else float(v) for v in curve.get(key) or []], dtype=float)

    smear, naive = floats("smearing"), floats("naive")
    column = curve["column"]
    y_unit, x_unit = (units or {}).get(outcome), (units or {}).get(column)
    if curve["kind"] == "levels":
        parts = [
            f"{v if not isinstance(v, float) else f'{column} = {v:g}'}: {amount(compact(s), y_unit)}"
            for v, s in zip(curve["x"], smear, strict=True)
        ]
        text = f"Expected {outcome} with the other regressors at their reference values: " + "; ".join(parts) + "."
    else:
        x = floats("x")
        low, high = float(curve["observed_min"]), float(curve["observed_max"])
        start, end = float(np.interp(low, x, smear)), float(np.interp(high, x, smear))
        change = (end / start - 1) * 100 if start else float("nan")
        move = "rises" if end > start else "falls"
        text = (
            f"Across the observed {column} ({compact(low)} to {amount(compact(high), x_unit)}), expected {outcome} "
            f"{move} from {amount(compact(start), y_unit)} to {amount(compact(end), y_unit)}"
            + (f" ({change:+.0f} %)".replace("-", "\u2212") if math.isfinite(change) else "")
            + ", the other regressors held at their reference values."
        )
    if show_naive:
        with np.errstate(invalid="ignore", divide="ignore"):
            gap = float(np.nanmean(naive / smear - 1)) * 100
        if math.isfinite(gap):
            side = "below" if gap < 0 else "above"
            text += (
                f" The naive back-transform lies on average {abs(gap):.1f} % {side} the expected value: it tracks "
                f"something closer to the median of {outcome}, not its mean."
            )
    return text


def model_footer(result: dict[str, Any], today: str | None = None) -> list[str]:
    """The model a table belongs to, for the footer of every exported table: the model in
    words, rows used and dropped, R² as fitted and on the original scale, the standard errors,
    and the date."""
    fit = result.get("fit") or {}
    outcome = result["outcome"]
    estimator = "Poisson pseudo-maximum likelihood" if result.get("estimator") == "ppml" else "least squares"
    kind = COVARIANCE_KINDS.get(result.get("covariance") or "")
    lines = [f"Model: {model_sentence(result)} ({estimator}).", f"Rows: {rows_sentence(result)}."]
    r2, original = fit.get("r2"), fit.get("r2_original_scale")
    if r2 is not None:
        scale = variable_label(outcome["column"], outcome["transform"], "outcome")
        text = f"R² {signed(r2, 3).lstrip('+')} as fitted ({scale})"
        if original is not None and outcome["transform"] != "level":
            text += f"; {signed(original, 3).lstrip('+')} on the original scale of {outcome['column']}"
        lines.append(text + ".")
    lines.append(f"Standard errors: {kind.short if kind else result.get('covariance')}.")
    units = result.get("column_units") or {}
    if units:
        lines.append("Units: " + "; ".join(f"{column} in {plural(unit)}" for column, unit in units.items()) + ".")
    lines.append(f"Formwise, {today or datetime.date.today().isoformat()}. Effects are associations in this data.")
    return lines


def slope_test_sentence(test: dict[str, Any], transform: str | None, covariance: str) -> str:
    """The equal-slopes Wald test of a moderated regressor (docs/contract.md §3.7) in words."""
    kind = COVARIANCE_KINDS.get(covariance)
    what = variable_label(test["column"], transform)
    verdict = (
        f"the slope of {what} differs with {test['by']} at the 5 % level"
        if test["p_value"] is not None and test["p_value"] < 0.05
        else f"no clear difference in the slope of {what} across {test['by']} at the 5 % level"
    )
    return (
        f"Same slope of {what} at every value of {test['by']}? Wald test of the {test['df_num']} product "
        f"coefficient(s) with {kind.short if kind else covariance} errors: F = {sig(test['statistic'], 4)} on "
        f"{test['df_num']} and {test['df_denom']:,} df, {p_text(test['p_value'])}: {verdict}."
    )
