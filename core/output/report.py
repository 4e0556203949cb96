"""A self-contained HTML report: one file, no script, nothing fetched from the network.

Everything in it comes from ``core.analyze``; every piece of user text (file, column and
level names, spec names) is HTML-escaped. Charts are inline SVG (``core.svgplot``).
"""

from __future__ import annotations

import json
from datetime import UTC, datetime
from html import escape
from typing import Any

import pandas as pd

from core.analysis import analyze
from core.model.transforms import parse_transform
from core.output.svgplot import OKABE_ITO, Band, Chart, Series, render
from core.output.tables import Table, coefficient_table, comparison_table, diagnostics_table, effects_table, format_cell

STYLE = """
body { font-family: Helvetica, Arial, sans-serif; color: #1F2933; max-width: 1100px; margin: 2rem auto; padding: 0 1rem;
       line-height: 1.45; }
h1 { font-size: 2rem; margin-bottom: .2rem; } h2 { margin-top: 2.2rem; border-bottom: 2px solid #0072B2; padding-bottom: .2rem; }
table { border-collapse: collapse; margin: .8rem 0 1.2rem; font-size: .92rem; width: 100%; }
th, td { border-bottom: 1px solid #E4E7EB; padding: .35rem .5rem; text-align: left; vertical-align: top; }
th { background: #F3F6F9; } td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.caution { background: #FFF8E1; border-left: 4px solid #E69F00; padding: .6rem 1rem; margin: .6rem 0; }
.meta { color: #52606D; } pre { background: #F3F6F9; padding: .8rem; overflow-x: auto; font-size: .85rem; }
figure { margin: 1rem 0 2rem; } figcaption { color: #52606D; font-size: .9rem; }
"""

CAUTION_REVIEW = (
    "For decisions with consequences, have the analysis reviewed by a qualified statistician and follow "
    "the reporting rules that apply where you work."
)


def html_table(table: Table) -> str:
    head = "".join(f"<th>{escape(h)}</th>" for h in table.header)
    body = []
    for row in table.rows:
        cells = []
        for cell in row:
            numeric = isinstance(cell, (int, float)) and not isinstance(cell, bool)
            cells.append(
                f'<td class="num">{escape(format_cell(cell))}</td>' if numeric else f"<td>{escape(format_cell(cell))}</td>"
            )
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><caption>{escape(table.title)}</caption><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def model_in_words(spec: dict[str, Any]) -> str:
    outcome = spec["outcome"]
    y = parse_transform(outcome.get("transform", "level"), "outcome", "outcome").label(outcome["column"])
    parts = []
    for r in spec.get("regressors", []):
        label = parse_transform(r.get("transform", "level"), "regressor", r["column"]).label(r["column"])
        if r.get("change"):
            label += f" (change {r['change']})"
        parts.append(label)
    estimator = "Poisson pseudo-maximum likelihood" if spec.get("estimator") == "ppml" else "least squares"
    return f"{y} explained by {', '.join(parts) or 'an intercept only'}, fitted by {estimator}"


def _gap_chart(curve: dict[str, Any], y: str) -> str:
    pct = curve["kind"] == "percent"
    unit = "%" if curve["units"] == "percent" else f"in {y}'s units"
    chart = Chart(
        title=f"Approximate versus exact effect of changing {curve['column']}",
        x_label=f"change in {curve['column']} ({'%' if pct else 'units'})",
        y_label=f"effect on {y} ({unit})",
        series=[
            Series("exact", curve["sizes"], curve["exact"], OKABE_ITO[0]),
            Series("first-order approximation", curve["sizes"], curve["approximate"], OKABE_ITO[1], dashed=True),
        ],
        bands=[Band("gap", curve["sizes"], curve["approximate"], curve["exact"], OKABE_ITO[4])],
        v_lines=[(curve["chosen"], f"chosen change {curve['chosen']:+g}{'%' if pct else ''}")],
    )
    return render(chart)


def _effect_curve_chart(curve: dict[str, Any], y: str, label: str) -> str:
    if curve["kind"] == "levels":
        positions = list(range(len(curve["x"])))
        chart = Chart(
            title=f"Expected {y} by {curve['column']}",
            x_label=curve["column"],
            y_label=f"expected {y}",
            series=[Series("expected value (smearing)", positions, curve["smearing"], OKABE_ITO[0], markers=True)],
            bands=[Band("95 % interval", positions, curve["ci_low"], curve["ci_high"], bars=True)],
            x_names=[_level_name(v) for v in curve["x"]],
        )
        return render(chart)
    x = curve["x"]
    regions = []
    if x[0] < curve["observed_min"]:
        regions.append((x[0], curve["observed_min"], "beyond the data"))
    if x[-1] > curve["observed_max"]:
        regions.append((curve["observed_max"], x[-1], "beyond the data"))
    series = [Series("expected value (smearing retransform)", x, curve["smearing"], OKABE_ITO[0])]
    if any(abs(a - b) > 1e-9 * max(1.0, abs(b)) for a, b in zip(curve["naive"], curve["smearing"], strict=True)):
        series.append(Series("naive back-transform", x, curve["naive"], OKABE_ITO[1], dashed=True))
    chart = Chart(
        title=f"Expected {y} across {label}",
        x_label=curve["column"],
        y_label=f"expected {y}",
        series=series,
        bands=[Band("95 % interval", x, curve["ci_low"], curve["ci_high"])],
        x_regions=regions,
    )
    return render(chart)


def _level_name(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _boxcox_chart(boxcox: dict[str, Any], y: str) -> str:
    chart = Chart(
        title=f"Box-Cox profile likelihood for {y}",
        x_label="lambda (0 = log, 1 = level)",
        y_label="profile log-likelihood",
        series=[Series("profile log-likelihood", boxcox["profile"]["lambda"], boxcox["profile"]["loglik"])],
        v_lines=[(0.0, "log"), (1.0, "level"), (boxcox["lambda"], f"best {boxcox['lambda']:.2f}")],
    )
    if boxcox["ci_low"] is not None and boxcox["ci_high"] is not None:
        chart.x_regions = [(boxcox["ci_low"], boxcox["ci_high"], "95 % interval")]
    return render(chart)


def build_report(
    data: pd.DataFrame,
    spec: dict[str, Any],
    data_name: str,
    saved: dict[str, dict[str, Any]] | None = None,
) -> str:
    """The whole report as one HTML string."""
    result = analyze(data, spec)
    y = result["outcome"]["column"]
    title = spec.get("name") or "Formwise report"
    blocks = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">",
        f"<title>{escape(title)}</title><style>{STYLE}</style></head><body>",
        f"<h1>{escape(title)}</h1>",
        f'<p class="meta">Data: {escape(data_name)} · {result["n_obs"]:,} rows used, {result["n_dropped"]:,} dropped · '
        f"standard errors: {escape(result['covariance'])} · generated {datetime.now(UTC):%Y-%m-%d %H:%M} UTC</p>",
        f"<p><strong>Model:</strong> {escape(model_in_words(spec))}.</p>",
        "<h2>Cautions</h2>",
        *[f'<div class="caution">{escape(c)}</div>' for c in [*result["cautions"], CAUTION_REVIEW]],
    ]
    n_coefficients = len(result.get("terms", [])) or 1
    if result["n_obs"] < max(30, 10 * n_coefficients):
        blocks.append(
            f'<div class="caution">Small sample: {result["n_obs"]} rows for {n_coefficients} coefficients '
            "(fewer than 30 rows, or fewer than 10 per coefficient). Treat every figure as fragile.</div>"
        )
    if result["warnings"]:
        blocks.append(
            "<h2>Warnings for this model</h2><ul>" + "".join(f"<li>{escape(w)}</li>" for w in result["warnings"]) + "</ul>"
        )
    if result["dropped"]:
        rows = "".join(f"<li>{escape(d['column'])}: {d['count']:,} row(s), {escape(d['reason'])}</li>" for d in result["dropped"])
        blocks.append(f"<p>Rows left out:</p><ul>{rows}</ul>")

    blocks += ["<h2>Estimates</h2>", html_table(coefficient_table(result))]
    blocks += ["<h2>Effects of changes</h2>", html_table(effects_table(result))]
    reference = ", ".join(
        f"{escape(str(k))} = {escape(format_cell(v) if not isinstance(v, str) else v)}"
        for k, v in result["reference_point"].items()
    )
    blocks.append(f'<p class="meta">Other regressors are held at the reference point: {reference}.</p>')
    for curve in result.get("gap_curves", []):
        blocks.append(
            f"<figure>{_gap_chart(curve, y)}<figcaption>The shaded gap is what the first-order "
            "approximation misses; prefer the exact effect where the gap is large.</figcaption></figure>"
        )
    blocks.append("<h2>Effect curves</h2>")
    labels = {
        r["column"]: parse_transform(r.get("transform", "level"), "regressor", r["column"]).label(r["column"])
        for r in spec.get("regressors", [])
    }
    for curve in result.get("curves", []):
        blocks.append(
            f"<figure>{_effect_curve_chart(curve, y, labels.get(curve['column'], curve['column']))}"
            "<figcaption>Other regressors at the reference point; shaded: 95 % interval of the expected value.</figcaption></figure>"
        )

    if result.get("diagnostics"):
        blocks += ["<h2>Checks</h2>", html_table(diagnostics_table(result))]
        fit = result["fit"]
        blocks.append(
            f"<p>R² on the original scale {escape(format_cell(fit['r2_original_scale']))}; AIC on the original scale "
            f"{escape(format_cell(fit['aic_original_scale']))}. R² of the model's own outcome ({escape(format_cell(fit['r2']))}) is "
            "not comparable across different outcome transforms.</p>"
        )
    if result.get("boxcox"):
        blocks.append(f"<figure>{_boxcox_chart(result['boxcox'], y)}</figure>")
    if saved:
        compared = {name: analyze(data, s, parts={"fit", "effects", "diagnostics"}) for name, s in saved.items()}
        blocks += ["<h2>Models compared</h2>", html_table(comparison_table(compared))]
        blocks.append(
            "<p>Compare models on the original-scale measures. Raw R² is not comparable across different outcome transforms.</p>"
        )
    blocks += ["<h2>Specification</h2>", f"<pre>{escape(json.dumps(spec, indent=2, ensure_ascii=False))}</pre>", "</body></html>"]
    return "\n".join(blocks)
