"""Reading the user's table: CSV, TSV, TXT and XLSX into a DataFrame, never editing the file.

Reading is separate from analysis so a file is read and converted once; the app keeps the
frame and refits on it as the user edits the spec.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pandas as pd

from core.errors import DataError

TEXT_SUFFIXES = {".csv", ".tsv", ".txt"}
EXCEL_SUFFIXES = {".xlsx"}
MISSING_MARKERS = ["", "NA", "N/A", "n/a", "na", "NaN", "nan", "#N/A", "null", "NULL", "None", "-", "."]


def read_table(source: str | Path | bytes, name: str | None = None, sheet: str | None = None) -> pd.DataFrame:
    """Read a table from a path or from raw bytes (``name`` gives the file type for bytes)."""
    if isinstance(source, (str, Path)):
        path = Path(source)
        if not path.exists():
            raise DataError(f"file not found: '{path}'. Check the path and try again.")
        if path.is_dir():
            raise DataError(f"'{path}' is a folder, not a file; give the path of a .csv, .tsv, .txt or .xlsx file.")
        raw = path.read_bytes()
        name = name or path.name
    else:
        raw = bytes(source)
        name = name or "upload.csv"
    suffix = Path(name).suffix.lower()
    if suffix in EXCEL_SUFFIXES:
        return _read_excel(raw, name, sheet)
    if suffix not in TEXT_SUFFIXES:
        raise DataError(f"'{name}' is not a supported file type; use .csv, .tsv, .txt or .xlsx.")
    return _read_text(raw, name)


def _decode(raw: bytes, name: str) -> str:
    if b"\x00" in raw[:4096]:
        raise DataError(f"'{name}' looks like a binary file, not a text table; export it as CSV or XLSX.")
    for encoding in ("utf-8-sig", "cp1252", "latin-1"):
        try:
            return raw.decode(encoding)
        except UnicodeDecodeError:
            continue
    raise DataError(f"'{name}' could not be decoded as text; save it as UTF-8 CSV.")


def _read_text(raw: bytes, name: str) -> pd.DataFrame:
    text = _decode(raw, name)
    if not text.strip():
        raise DataError(f"'{name}' is empty; it needs a header row and data rows.")
    sample = text[:20000]
    try:
        delimiter = csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        delimiter = "\t" if name.lower().endswith(".tsv") else ","
    try:
        frame = pd.read_csv(io.StringIO(text), sep=delimiter, na_values=MISSING_MARKERS, keep_default_na=False)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError) as exc:
        raise DataError(
            f"'{name}' could not be read as a table ({str(exc).splitlines()[0]}); check that it is a CSV file."
        ) from None
    if frame.empty:
        raise DataError(f"'{name}' has a header row but no data rows; add data below the header.")
    return frame


def _read_excel(raw: bytes, name: str, sheet: str | None) -> pd.DataFrame:
    try:
        book = pd.ExcelFile(io.BytesIO(raw), engine="openpyxl")
    except Exception:  # openpyxl raises several unrelated types for a broken file
        raise DataError(f"'{name}' is not a readable .xlsx workbook; open it in a spreadsheet and save it again.") from None
    sheets = book.sheet_names
    chosen = sheet if sheet is not None else sheets[0]
    if chosen not in sheets:
        raise DataError(f"'{name}' has no sheet '{sheet}'; its sheets are: {', '.join(sheets)}.")
    frame = book.parse(chosen, na_values=MISSING_MARKERS, keep_default_na=False)
    if frame.empty:
        raise DataError(f"sheet '{chosen}' of '{name}' has no data rows.")
    return frame
