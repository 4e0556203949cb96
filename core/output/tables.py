"""Result tables for memos and appendices: built once, rendered as CSV, Markdown or LaTeX.

A table is a title, a header and rows of cells; a cell is a number (kept as a number in every
format) or text. CSV text cells that a spreadsheet would run as a formula (starting with =, +,
-, @, a tab or a carriage return) are prefixed with an apostrophe, as the OWASP guidance on CSV
injection recommends; numbers are written as numbers. LaTeX output uses booktabs rules and
escapes the characters LaTeX treats specially.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from typing import Any

from core.output import escape
from core.output.numbers import format_cell

Cell = float | int | str | None


@dataclass
class Table:
    title: str
    header: list[str]
    rows: list[list[Cell]]


# --- building tables from a result ------------------------------------------------------------


def coefficient_table(result: dict[str, Any]) -> Table:
    rows: list[list[Cell]] = [
        [t["name"], t["estimate"], t["std_error"], t["ci_low"], t["ci_high"], t["p_value"], t.get("reading", "")]
        for t in result.get("terms", [])
    ]
    header = ["Term", "Estimate", "Std. error", "95 % low", "95 % high", "p-value", "What it means"]
    return Table(f"Coefficients ({result['covariance']} standard errors)", header, rows)


def effects_table(result: dict[str, Any]) -> Table:
    y = result["outcome"]["column"]
    rows: list[list[Cell]] = []
    for e in result.get("effects", []):
        units = f"% change in {y}" if e["units"] == "percent" else f"change in {y}"
        rows.append(
            [
                e["column"],
                e["change"],
                units,
                e["approximate"],
                e["exact"],
                e["ci_low"],
                e["ci_high"],
                e.get("adjusted"),
                e.get("average"),
                "yes" if e.get("extrapolated") else "no",
            ]
        )
    header = [
        "Variable",
        "Change",
        "Measured as",
        "First-order approximation",
        "Exact",
        "95 % low (exact)",
        "95 % high (exact)",
        "Small-sample adjusted",
        "Average over rows",
        "Beyond observed data",
    ]
    return Table("Effects of changes (other regressors at the reference point)", header, rows)


def diagnostics_table(result: dict[str, Any]) -> Table:
    checks = result.get("diagnostics") or {}
    names = {
        "breusch_pagan": "Breusch-Pagan (Koenker), spread vs regressors",
        "white": "White, spread vs regressors, squares and products",
        "jarque_bera": "Jarque-Bera, normal residuals",
        "reset": "RESET, missing curvature (fitted^2, fitted^3)",
    }
    rows: list[list[Cell]] = [
        [label, checks[key]["statistic"], checks[key]["p_value"]] for key, label in names.items() if key in checks
    ]
    return Table("Residual checks", ["Check", "Statistic", "p-value"], rows)


def comparison_table(results: dict[str, dict[str, Any]]) -> Table:
    """Saved models side by side on measures comparable across outcome transforms."""
    names = list(results)
    measures = [
        ("Outcome", lambda r: f"{r['outcome']['transform']} of {r['outcome']['column']}"),
        ("Rows used", lambda r: r["n_obs"]),
        ("R² on the original scale", lambda r: r["fit"]["r2_original_scale"]),
        ("Log-likelihood, original scale", lambda r: r["fit"]["loglik_original_scale"]),
        ("AIC, original scale", lambda r: r["fit"]["aic_original_scale"]),
        ("BIC, original scale", lambda r: r["fit"]["bic_original_scale"]),
        ("Breusch-Pagan p", lambda r: (r.get("diagnostics") or {}).get("breusch_pagan", {}).get("p_value")),
        ("R² of the model's own outcome (not comparable across outcomes)", lambda r: r["fit"]["r2"]),
    ]
    rows: list[list[Cell]] = [[label] + [pick(results[n]) for n in names] for label, pick in measures]
    seen: list[tuple[str, str]] = []
    for n in names:
        for e in results[n].get("effects", []):
            key = (e["column"], e["change"])
            if key not in seen:
                seen.append(key)
    for column, change in seen:
        row: list[Cell] = [f"Effect of {column} {change}"]
        for n in names:
            found = next((e for e in results[n].get("effects", []) if e["column"] == column and e["change"] == change), None)
            row.append(
                None if found is None else f"{format_cell(found['exact'])} {'%' if found['units'] == 'percent' else 'units'}"
            )
        rows.append(row)
    return Table("Models compared", ["Measure", *names], rows)


def result_tables(result: dict[str, Any]) -> list[Table]:
    tables = [coefficient_table(result), effects_table(result)]
    if result.get("diagnostics"):
        tables.append(diagnostics_table(result))
    return tables


# --- rendering ---------------------------------------------------------------------------------


def to_csv(table: Table) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([escape.csv_cell(h) for h in table.header])
    for row in table.rows:
        writer.writerow(["" if c is None else (repr(c) if isinstance(c, float) else escape.csv_cell(c)) for c in row])
    return buffer.getvalue()


def to_markdown(table: Table) -> str:
    def clean(cell: Cell) -> str:
        text = format_cell(cell)
        return text if isinstance(cell, (int, float)) else escape.markdown(text)

    lines = [f"**{escape.markdown(table.title)}**", "", "| " + " | ".join(clean(h) for h in table.header) + " |"]
    lines.append("|" + "|".join("---:" if _numeric_column(table, i) else "---" for i in range(len(table.header))) + "|")
    lines += ["| " + " | ".join(clean(c) for c in row) + " |" for row in table.rows]
    return "\n".join(lines) + "\n"


def to_latex(table: Table) -> str:
    align = "".join("r" if _numeric_column(table, i) else "l" for i in range(len(table.header)))
    lines = [
        r"\begin{table}[htbp]",
        r"\centering",
        rf"\caption{{{escape.latex(table.title)}}}",
        rf"\begin{{tabular}}{{{align}}}",
        r"\toprule",
        " & ".join(escape.latex(h) for h in table.header) + r" \\",
        r"\midrule",
    ]
    for row in table.rows:
        lines.append(" & ".join(escape.latex(format_cell(c)) for c in row) + r" \\")
    lines += [r"\bottomrule", r"\end{tabular}", r"\end{table}"]
    return "\n".join(lines) + "\n"


def _numeric_column(table: Table, index: int) -> bool:
    cells = [row[index] for row in table.rows if row[index] is not None]
    return bool(cells) and all(isinstance(c, (int, float)) and not isinstance(c, bool) for c in cells)


RENDERERS = {"csv": to_csv, "markdown": to_markdown, "latex": to_latex}


def render(tables: list[Table], fmt: str) -> str:
    """Several tables in one document; CSV tables are separated by a blank line and a title row."""
    renderer = RENDERERS[fmt]
    if fmt == "csv":
        return "\n".join(f"{escape.csv_cell(t.title)}\n{renderer(t)}" for t in tables)
    return "\n".join(renderer(t) for t in tables)
