"""Result tables as files: the screen's tables (``core.output.display``) written as CSV,
Markdown or LaTeX, each with a model footer, so a table pasted into a memo keeps its model.

Every number is the screen's number as printed. In CSV a number column holds that number as a
plain number (ASCII minus, no separators or units; its unit is in the header or the
"Measured as" column) so a spreadsheet reads it; text cells a spreadsheet would run as a
formula get a leading apostrophe (OWASP, "CSV Injection"). LaTeX uses booktabs rules and a
tabularx column that wraps the longest text column; it needs
``\\usepackage{booktabs,tabularx}``.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from core.output import display, escape
from core.output.numbers import format_cell, p_value, sig
from core.output.text import model_footer, slope_test_sentence

Cell = float | int | str | None


@dataclass
class Table:
    title: str
    header: list[str]
    rows: list[list[Cell]]
    numeric: set[str] = field(default_factory=set)  # columns that hold numbers (printed)
    footer: list[str] = field(default_factory=list)  # the model the table belongs to


def from_frame(title: str, frame: pd.DataFrame, footer: list[str] | None = None, numeric: set[str] | None = None) -> Table:
    """A display table (strings as printed on screen) as an exportable table."""
    header = [str(c) for c in frame.columns]
    numbers = {c for c in header if c in display.NUMBER_COLUMNS} | set(numeric or ())
    return Table(title, header, frame.astype(object).where(frame.notna(), None).values.tolist(), numbers, list(footer or []))


# --- the result's tables ----------------------------------------------------------------------
def coefficient_table(result: dict[str, Any], spec: dict[str, Any] | None = None) -> Table:
    title = f"Coefficients ({result['covariance']} standard errors)"
    return from_frame(title, display.coefficient_table(result, spec), model_footer(result))


def effects_table(result: dict[str, Any], spec: dict[str, Any] | None = None) -> Table:
    title = "Effects of changes (other regressors at the reference point)"
    return from_frame(title, display.effects_table(result, spec), slope_test_lines(result, spec) + model_footer(result))


def slope_test_lines(result: dict[str, Any], spec: dict[str, Any] | None = None) -> list[str]:
    """The equal-slopes test of each moderated regressor, in words (shown under its effects)."""
    transforms = {r["column"]: r.get("transform", "level") for r in (spec or {}).get("regressors", [])}
    covariance = result.get("covariance") or ""
    return [slope_test_sentence(t, transforms.get(t["column"]), covariance) for t in result.get("slope_tests") or []]


def scenarios_table(result: dict[str, Any]) -> Table:
    title = "Scenarios: several changes at once (other regressors at the reference point)"
    return from_frame(title, display.scenarios_table(result), model_footer(result))


def diagnostics_table(result: dict[str, Any]) -> Table:
    checks = result.get("diagnostics") or {}
    names = {
        "breusch_pagan": "Breusch-Pagan (Koenker), spread vs regressors",
        "white": "White, spread vs regressors, squares and products",
        "jarque_bera": "Jarque-Bera, normal residuals",
        "reset": "RESET, missing curvature (fitted^2, fitted^3)",
    }
    white = checks.get("white") or {}
    notes = []
    if white.get("form") == "fitted":
        names["white"] = "White on fitted values and their squares, spread vs fitted values"
    notes = [white["note"]] if white.get("note") else []
    rows: list[list[Cell]] = [
        [label, sig(checks[key]["statistic"], 4), p_value(checks[key]["p_value"])]
        for key, label in names.items()
        if key in checks
    ]
    return Table(
        "Residual checks", ["Check", "Statistic", "p-value"], rows, {"Statistic", "p-value"}, notes + model_footer(result)
    )


def comparison_table(results: dict[str, dict[str, Any]]) -> Table:
    """Saved models side by side on measures comparable across outcome transforms."""
    names = list(results)
    measures = [
        ("Outcome", lambda r: f"{r['outcome']['transform']} of {r['outcome']['column']}"),
        ("Rows used", lambda r: f"{r['n_obs']:,}"),
        ("R² on the original scale", lambda r: sig(r["fit"]["r2_original_scale"], 3)),
        ("Log-likelihood, original scale", lambda r: sig(r["fit"]["loglik_original_scale"], 6)),
        ("AIC, original scale", lambda r: sig(r["fit"]["aic_original_scale"], 6)),
        ("BIC, original scale", lambda r: sig(r["fit"]["bic_original_scale"], 6)),
        ("Breusch-Pagan p", lambda r: p_value((r.get("diagnostics") or {}).get("breusch_pagan", {}).get("p_value"))),
        ("R² of the model's own outcome (not comparable across outcomes)", lambda r: sig(r["fit"]["r2"], 3)),
    ]
    rows: list[list[Cell]] = [[label] + [pick(results[n]) for n in names] for label, pick in measures]
    seen: list[tuple[str, str, str]] = []
    for n in names:
        for e in results[n].get("effects", []):
            key = (e["column"], e["change"], display.group_text(e.get("group")))
            if key not in seen:
                seen.append(key)
    for column, change, at in seen:
        row: list[Cell] = [f"Effect of {column} {change}" + (f" at {at}" if at else "")]
        for n in names:
            found = next(
                (
                    e
                    for e in results[n].get("effects", [])
                    if (e["column"], e["change"], display.group_text(e.get("group"))) == (column, change, at)
                ),
                None,
            )
            unit = "%" if found and found["units"] == "percent" else "units"
            row.append(None if found is None else f"{sig(found['exact'], 4, signed=True)} {unit}")
        rows.append(row)
    return Table("Models compared", ["Measure", *names], rows)


def result_tables(result: dict[str, Any]) -> list[Table]:
    tables = [coefficient_table(result), effects_table(result)]
    if result.get("scenarios"):
        tables.append(scenarios_table(result))
    if result.get("diagnostics"):
        tables.append(diagnostics_table(result))
    return tables


# --- rendering ---------------------------------------------------------------------------------
_NUMBER = re.compile(r"^[+−-]?[\d,]*\.?\d+(?:e[+−-]?\d+)?$")


def plain_number(text: Cell) -> Cell:
    """A printed number as a plain number string ('−1,234.5 %' -> '-1234.5'); other text as it is."""
    if not isinstance(text, str):
        return text
    core_text = text.replace(display.NBSP, " ").replace("% pts", "").replace("%", "").strip()
    if _NUMBER.match(core_text):
        return core_text.replace("−", "-").replace(",", "").lstrip("+")
    return text


def to_csv(table: Table) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([escape.csv_cell(h) for h in table.header])
    numeric = [h in table.numeric for h in table.header]
    for row in table.rows:
        cells = []
        for cell, is_number in zip(row, numeric, strict=True):
            if cell is None:
                cells.append("")
            elif is_number and plain_number(cell) != cell:
                cells.append(float(plain_number(cell)))  # written as a number, so a spreadsheet reads it
            else:
                cells.append(escape.csv_cell(cell if isinstance(cell, str) else format_cell(cell)))
        writer.writerow(cells)
    if table.footer:
        writer.writerow([])
        for line in table.footer:
            writer.writerow([escape.csv_cell(line)])
    return buffer.getvalue()


def _text(cell: Cell) -> str:
    return cell if isinstance(cell, str) else format_cell(cell)


def to_markdown(table: Table) -> str:
    lines = [f"**{escape.markdown(table.title)}**", "", "| " + " | ".join(escape.markdown(h) for h in table.header) + " |"]
    lines.append("|" + "|".join("---:" if h in table.numeric else "---" for h in table.header) + "|")
    lines += ["| " + " | ".join(escape.markdown(_text(c)) for c in row) + " |" for row in table.rows]
    if table.footer:
        lines += [""] + [f"*{escape.markdown(line)}*  " for line in table.footer]
    return "\n".join(lines) + "\n"


def _latex_cell(cell: Cell) -> str:
    return escape.latex(_text(cell))


def latex_columns(table: Table) -> str:
    """Column types: numbers right-aligned, the longest text column wrapping (X), other text left."""
    lengths = {h: max([len(_text(r[i])) for r in table.rows] + [0]) for i, h in enumerate(table.header)}
    texts = [h for h in table.header if h not in table.numeric]
    wide = max(texts, key=lambda h: lengths[h]) if texts else None
    wrap = wide if wide is not None and lengths[wide] > 30 else None
    return "".join(
        "r" if h in table.numeric else (r">{\raggedright\arraybackslash}X" if h == wrap else "l") for h in table.header
    )


def to_latex(table: Table) -> str:
    lines = [
        r"\begin{table}[htbp]",
        r"\centering",
        r"\small",
        rf"\caption{{{escape.latex(table.title)}}}",
        rf"\begin{{tabularx}}{{\linewidth}}{{{latex_columns(table)}}}",
        r"\toprule",
        " & ".join(escape.latex(h) for h in table.header) + r" \\",
        r"\midrule",
    ]
    lines += [" & ".join(_latex_cell(c) for c in row) + r" \\" for row in table.rows]
    lines += [r"\bottomrule", r"\end{tabularx}"]
    if table.footer:
        lines.append(r"\par\smallskip\footnotesize " + r" \\ ".join(escape.latex(line) for line in table.footer))
    lines.append(r"\end{table}")
    return "\n".join(lines) + "\n"


RENDERERS = {"csv": to_csv, "markdown": to_markdown, "latex": to_latex}


def render(tables: list[Table], fmt: str) -> str:
    """Several tables in one document; CSV tables are separated by a blank line and a title row."""
    renderer = RENDERERS[fmt]
    if fmt == "csv":
        return "\n".join(f"{escape.csv_cell(t.title)}\n{renderer(t)}" for t in tables)
    return "\n".join(renderer(t) for t in tables)
