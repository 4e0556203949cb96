"""The reader on real-world mess: every corpus file parses to the expected numbers or fails
with a message that says what is wrong; the user's file is never written to.

The corpus (tests/corpus/) is invented and written by tests/corpus/make_corpus.py.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import core
from core.errors import DataError, FormwiseError
from core.intake.profile import profile_table
from core.intake.reader import read_table, read_table_with_notes
from tests.corpus import make_corpus

CORPUS = Path(__file__).resolve().parent / "corpus"
DEMO_CSV = Path(__file__).resolve().parent.parent / "demo_data" / "kiosks.csv"
CORPUS_FILES = sorted(p for p in CORPUS.iterdir() if p.suffix != ".py" and p.is_file())
NAN = math.nan


def read(name: str, sheet: str | None = None) -> tuple[pd.DataFrame, list[str]]:
    return read_table_with_notes(CORPUS / name, sheet=sheet)


def values(frame: pd.DataFrame, column: str) -> list[float]:
    return frame[column].astype(float).tolist()


def same(got: list[float], expected: list[float]) -> bool:
    return len(got) == len(expected) and all(
        (math.isnan(a) and math.isnan(b)) or a == b for a, b in zip(got, expected, strict=True)
    )


def noted(notes: list[str], *words: str) -> bool:
    """Some single note contains every word (case-insensitive)."""
    return any(all(w.lower() in n.lower() for w in words) for n in notes)


# --- the corpus is what the generator writes ---------------------------------------------------
def test_corpus_files_match_their_generator() -> None:
    written = make_corpus.files()
    on_disk = {p.name for p in CORPUS_FILES}
    assert on_disk == set(written), "run python tests/corpus/make_corpus.py"
    for name, data in written.items():
        assert (CORPUS / name).read_bytes() == data, f"{name} differs from make_corpus.py; rerun it"


# --- files that parse ----------------------------------------------------------------------------
# name -> (expected numeric columns, expected notes as key words)
PARSED: dict[str, tuple[dict[str, list[float]], list[tuple[str, ...]]]] = {
    "semicolon_comma_cp1252.csv": (
        {"Prix (€)": [1234.5, 987.25, 12.0, 2500.75], "Quantité": [12, 7, 0, 3], "Remise": [5.5, 10, 0, 2.5]},
        [("semicolon", "Windows-1252", "decimal comma"), ("Remise", "percent units"), ("Prix (€)", "thousands")],
    ),
    "utf8_bom.csv": ({"value": [1.5, 2.5, 3.5]}, [("byte-order mark",)]),
    "tabs.tsv": (
        {"population": [114394, 52012, 9870], "area_km2": [158.1, 61.9, 12.4]},
        [("tab-separated",), ("population", "thousands")],
    ),
    "currency_dollar.csv": (
        {"price": [1234.5, 980.0, 12345.67, 0.99], "profit": [-1000, 2000, -250, 10], "fee": [5, 7.25, -3, 0]},
        [("price", "currency symbol '$'", "thousands", "4 cells"), ("profit", "parentheses", "negative")],
    ),
    "currency_euro.csv": (
        {"pris": [1234.5, 99.95, 0.5], "belopp": [1234.5, 12000.0, -150.25]},
        [("pris", "'€'"), ("belopp", "'kr'"), ("decimal comma",)],
    ),
    "percent.csv": ({"growth": [12, 7.5, 0], "margin": [12, -3, 100]}, [("growth", "percent units"), ("margin", "'%'")]),
    "missing_markers.csv": (
        {"x": [v for i in range(11) for v in (i + 0.5, NAN)]},
        [("x", "10 missing markers", "'NA'"), ("label", "missing")],
    ),
    "headers_dup_blank.csv": (
        {
            "price": [1, 7, 13],
            "price_2": [2, 8, 14],
            "column_3": [3, 9, 15],
            "qty": [4, 10, 16],
            "column_5": [5, 11, 17],
            "price_3": [6, 12, 18],
        },
        [("repeats", "price_2"), ("no name", "column_3")],
    ),
    "two_sheets.xlsx": (
        {
            "revenue": [1200.5, 980.25, 1500.0, 1110.75],
            "list_price": [1299.0, 899.5, 2100.0, -50.0],
            "visits": [410, 388, NAN, 502],
        },
        [("sheet 'Sales'", "Costs"), ("list_price", "'$'"), ("visits", "'NA'")],
    ),
    "infinities.csv": ({"y": [math.inf, -math.inf, 5.5, math.inf, 2.0]}, [("y", "3 infinite")]),
    "sep_hint.csv": ({"a": [1.5, 3.0], "b": [2, 4]}, [("sep=;",)]),
    "title_line.csv": ({"week": [1, 2, 3], "sales": [100, 200, 150]}, [("skipped", "above the header")]),
    "utf16.txt": ({"value": [1.5, 2.25, 3.0]}, [("UTF-16", "decimal comma")]),
    "trailing_delimiters.csv": ({"a": [1, 3, 5], "b": [2, 4, 6]}, []),
    "odd_names.csv": (
        {
            "Umsatz (€) – netto": [0, 1, 2, 3],
            "名前": [2, 3, 4, 5],
            make_corpus.LONG_NAME: [3, 4, 5, 6],
            "rocket 🚀": [4, 5, 6, 7],
            "a,b": [6, 7, 8, 9],
        },
        [("line breaks",)],
    ),
}


@pytest.mark.parametrize("name", sorted(PARSED))
def test_corpus_file_parses_to_expected_numbers(name: str) -> None:
    frame, notes = read(name)
    expected_columns, expected_notes = PARSED[name]
    for column, expected in expected_columns.items():
        assert column in frame.columns, f"{column!r} not in {list(frame.columns)}"
        assert pd.api.types.is_numeric_dtype(frame[column]), f"{column} is {frame[column].dtype}"
        assert same(values(frame, column), [float(v) for v in expected]), f"{column}: {values(frame, column)}"
    for words in expected_notes:
        assert noted(notes, *words), f"no note with {words}: {notes}"
    assert frame.attrs["formwise_intake"]["notes"] == notes


def test_text_columns_keep_accents_and_names_are_clean() -> None:
    frame, _ = read("semicolon_comma_cp1252.csv")
    assert frame["Région"].tolist() == ["Île-de-France", "Rhône-Alpes", "Provence", "Bretagne"]
    assert frame["Note"].tolist()[1] == "café"
    assert list(read("utf8_bom.csv")[0].columns) == ["name", "value"]  # no BOM left in the first name
    odd = read("odd_names.csv")[0]
    assert "spaced   name" in odd.columns and "line break" in odd.columns
    assert len(make_corpus.LONG_NAME) == 300 and make_corpus.LONG_NAME in odd.columns


def test_missing_markers_in_text_and_numbers() -> None:
    frame, _ = read("missing_markers.csv")
    assert frame["x"].isna().sum() == 11  # ten markers and one blank cell
    labels = frame["label"]
    assert labels.iloc[1] == "b" and labels.iloc[3::2].isna().all()


def test_mixed_column_stays_text_and_names_its_text_rows() -> None:
    frame, notes = read("mixed.csv")
    assert not pd.api.types.is_numeric_dtype(frame["x"])
    assert noted(notes, "'x'", "mostly numbers", "rows 4, 9", "'abc'", "'n.v.'")
    assert frame.attrs["formwise_intake"]["columns"]["x"]["mixed_rows"] == [4, 9]


def test_excel_second_sheet_skips_its_title_row() -> None:
    frame, notes = read("two_sheets.xlsx", sheet="Costs")
    assert list(frame.columns) == ["item", "cost", "share"]
    assert values(frame, "cost") == [2500, 1500, 1000]
    assert noted(notes, "skipped", "title")
    first = read("two_sheets.xlsx")[0]
    assert pd.api.types.is_datetime64_any_dtype(first["opened"])
    assert read("two_sheets.xlsx", sheet=" costs ")[0].shape == (3, 3)  # case and spaces forgiven


def test_bytes_with_a_name_read_like_the_file() -> None:
    raw = (CORPUS / "currency_dollar.csv").read_bytes()
    from_bytes = read_table(raw, name="currency_dollar.csv")
    pd.testing.assert_frame_equal(from_bytes, read_table(CORPUS / "currency_dollar.csv"))


def test_demo_data_reads_exactly_as_plain_pandas() -> None:
    frame, notes = read_table_with_notes(DEMO_CSV)
    pd.testing.assert_frame_equal(frame, pd.read_csv(DEMO_CSV))
    assert notes == ["read 'kiosks.csv' as comma-separated text, UTF-8 encoding."]


# --- files that must fail with a clear message -----------------------------------------------
BROKEN: dict[tuple[str, str | None], tuple[str, ...]] = {
    ("empty.csv", None): ("empty", "header row"),
    ("whitespace_only.csv", None): ("empty",),
    ("header_only.csv", None): ("header row but no data rows", "add data"),
    ("garbage.csv", None): ("binary", "export it as CSV"),
    ("page.csv", None): ("web page", "HTML", "export"),
    ("single_row.csv", None): ("only one data row", "at least a few rows"),
    ("wide_501.csv", None): ("501 columns", "at most 500"),
    ("corrupt.xlsx", None): ("not a readable .xlsx", "save it again"),
    ("csv_renamed.xlsx", None): ("not an Excel workbook", "rename it to .csv"),
    ("two_sheets.xlsx", "Nope"): ("no sheet 'Nope'", "Sales, Costs"),
    ("ragged.csv", None): ("line 4", "4 fields", "header has 3", "quote"),
}


@pytest.mark.parametrize(("name", "sheet"), sorted(BROKEN, key=str))
def test_broken_file_gives_its_message(name: str, sheet: str | None) -> None:
    with pytest.raises(DataError) as caught:
        read(name, sheet=sheet)
    message = str(caught.value)
    for word in BROKEN[(name, sheet)]:
        assert word.lower() in message.lower(), f"{word!r} not in {message!r}"
    assert "\n" not in message


def test_every_corpus_file_is_covered() -> None:
    covered = (
        set(PARSED) | {name for name, _ in BROKEN} | {"mixed.csv", "dates.csv", "twin_clean.csv", "twin_semicolon_cp1252.csv"}
    )
    assert {p.name for p in CORPUS_FILES} <= covered


@pytest.mark.parametrize("suffix", [".xls", ".ods", ".json"])
def test_unsupported_file_types_say_what_to_use(suffix: str) -> None:
    with pytest.raises(DataError, match=r"\.xlsx"):
        read_table(b"a,b\n1,2\n3,4\n", name=f"data{suffix}")


# --- the file is never written ------------------------------------------------------------------
@pytest.mark.parametrize("path", CORPUS_FILES, ids=lambda p: p.name)
def test_reading_never_writes_the_source_file(path: Path, tmp_path: Path) -> None:
    copy = tmp_path / path.name
    copy.write_bytes(path.read_bytes())
    before = (hashlib.sha256(copy.read_bytes()).hexdigest(), copy.stat().st_mtime_ns, copy.stat().st_size)
    try:
        read_table_with_notes(copy)
    except DataError:
        pass
    after = (hashlib.sha256(copy.read_bytes()).hexdigest(), copy.stat().st_mtime_ns, copy.stat().st_size)
    assert before == after
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]  # nothing written beside it


# --- the twins: one invented frame, two spellings, one model ---------------------------------------
def test_windows_semicolon_decimal_comma_twin_fits_like_its_clean_utf8_twin() -> None:
    clean, _ = read("twin_clean.csv")
    messy, notes = read("twin_semicolon_cp1252.csv")
    assert noted(notes, "semicolon", "Windows-1252", "decimal comma")
    invented = make_corpus.twin_frame()
    assert list(messy.columns) == list(invented.columns) == ["ventes_€", "prix_unitaire", "quantité", "région"]
    for column in ("ventes_€", "prix_unitaire", "quantité"):
        assert np.array_equal(messy[column].to_numpy(dtype=float), invented[column].to_numpy(dtype=float))
    spec = {
        "outcome": {"column": "ventes_€", "transform": "log"},
        "regressors": [
            {"column": "prix_unitaire", "transform": "log", "change": "+10%"},
            {"column": "quantité", "transform": "level", "change": "+1"},
            {"column": "région", "transform": "category", "reference": "Île"},
        ],
        "covariance": "HC1",
    }
    parts = {"terms", "fit", "effects"}
    a, b = core.analyze(clean, spec, parts=parts), core.analyze(messy, spec, parts=parts)
    assert [t["name"] for t in a["terms"]] == [t["name"] for t in b["terms"]]
    for ta, tb in zip(a["terms"], b["terms"], strict=True):
        assert ta["estimate"] == tb["estimate"] and ta["std_error"] == tb["std_error"]
    assert a["n_obs"] == b["n_obs"] == make_corpus.TWIN_ROWS


# --- properties: nothing but FormwiseError escapes ------------------------------------------------
FUZZ = settings(max_examples=150, deadline=None, database=None, suppress_health_check=[HealthCheck.too_slow])


def read_or_refuse(raw: bytes, name: str) -> None:
    """Reading either works (and the profile is strict JSON) or raises a FormwiseError."""
    try:
        frame, notes = read_table_with_notes(raw, name=name)
    except FormwiseError as exc:
        assert str(exc).strip()
        return
    assert all(isinstance(n, str) for n in notes)
    assert frame.shape[0] >= 2 and frame.columns.is_unique
    json.dumps(profile_table(frame, notes), allow_nan=False)


@FUZZ
@given(st.text(max_size=400), st.sampled_from(["x.csv", "x.tsv", "x.txt"]))
def test_any_text_reads_or_gives_a_formwise_error(text: str, name: str) -> None:
    read_or_refuse(text.encode("utf-8"), name)


@FUZZ
@given(st.binary(max_size=400), st.sampled_from(["x.csv", "x.xlsx"]))
def test_any_bytes_read_or_give_a_formwise_error(raw: bytes, name: str) -> None:
    read_or_refuse(raw, name)


CELLS = st.one_of(
    st.integers(-(10**12), 10**12).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.floats(-1e7, 1e7).map(lambda v: f"${v:,.2f}"),
    st.floats(-1e7, 1e7).map(lambda v: f"({abs(v):,.2f})"),
    st.floats(-1e7, 1e7).map(lambda v: f"{v:,.2f}".replace(",", " ").replace(".", ",") + " kr"),
    st.floats(-100, 100).map(lambda v: f"{v:.1f} %"),
    st.sampled_from(["", "NA", "N/A", "n/a", "#N/A", "null", "None", "-", ".", "?", "missing", "#DIV/0!", "inf"]),
    st.sampled_from(["2024-01-31", "31/01/2024", "Coast", "Île", "a;b", 'say "hi"', "x\ny", "  padded  ", "1.234,5", "1,234.5"]),
    st.text(max_size=12),
)


@st.composite
def tables(draw: st.DrawFn) -> tuple[bytes, str]:
    n_cols = draw(st.integers(1, 6))
    n_rows = draw(st.integers(0, 12))
    header = draw(
        st.lists(
            st.one_of(st.text(max_size=10), st.sampled_from(["a", "a", "", " ", "price", "week"])),
            min_size=n_cols,
            max_size=n_cols,
        )
    )
    rows = draw(st.lists(st.lists(CELLS, min_size=n_cols, max_size=n_cols), min_size=n_rows, max_size=n_rows))
    delimiter = draw(st.sampled_from([",", ";", "\t", "|"]))
    buffer = io.StringIO()
    writer = csv.writer(buffer, delimiter=delimiter, lineterminator=draw(st.sampled_from(["\n", "\r\n"])))
    writer.writerow(header)
    writer.writerows(rows)
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "cp1252", "utf-16"]))
    raw = buffer.getvalue().encode(encoding, errors="replace")
    return raw, draw(st.sampled_from(["t.csv", "t.tsv", "t.txt"]))


@FUZZ
@given(tables())
def test_random_messy_tables_read_or_give_a_formwise_error(table: tuple[bytes, str]) -> None:
    read_or_refuse(*table)


@FUZZ
@given(
    st.lists(
        st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=3, max_size=3), min_size=2, max_size=20
    ),
    st.sampled_from([",", ";", "\t", "|"]),
)
def test_clean_numbers_come_back_exactly(rows: list[list[float]], delimiter: str) -> None:
    text = delimiter.join(["p", "q", "r"]) + "\n" + "".join(delimiter.join(repr(v) for v in row) + "\n" for row in rows)
    frame = read_table(text.encode(), name="n.csv")
    assert frame.shape == (len(rows), 3)
    assert np.array_equal(frame.to_numpy(dtype=float), np.array(rows, dtype=float))


def _us(amount: float) -> str:
    body = f"${abs(amount):,.2f}"
    return body if amount >= 0 else (f"({body})" if int(abs(amount) * 100) % 2 else f"-{body}")


def _european(amount: float, suffix: str) -> str:
    grouped = f"{abs(amount):,.2f}".replace(",", "_").replace(".", ",")
    body = grouped.replace("_", "." if suffix == "€" else "\u00a0") + f" {suffix}"
    return body if amount >= 0 else (f"({body})" if int(abs(amount) * 100) % 2 else f"-{body}")


@FUZZ
@given(
    st.lists(st.floats(-1e9, 1e9, allow_nan=False).map(lambda v: round(v, 2)), min_size=2, max_size=25),
    st.sampled_from(["us", "euro", "krona"]),
)
def test_formatted_amounts_come_back_as_their_numbers(amounts: list[float], style: str) -> None:
    if style == "us":
        cells, delimiter = [_us(a) for a in amounts], ","
    else:
        cells, delimiter = [_european(a, "€" if style == "euro" else "kr") for a in amounts], ";"
    buffer = io.StringIO()
    writer = csv.writer(buffer, delimiter=delimiter, lineterminator="\n")
    writer.writerow(["row", "amount"])
    writer.writerows([i, c] for i, c in enumerate(cells))
    frame = read_table(buffer.getvalue().encode("utf-8"), name="amounts.csv")
    assert frame["amount"].astype(float).tolist() == [float(f"{a:.2f}") for a in amounts]


def test_text_series_by_arrow_take_equals_the_object_path(monkeypatch) -> None:
    # The arrow-built column (pandas 3's string type) and the object path kept for pandas 2 give
    # the same cells, missing ones (code -1, or a distinct value read as missing) included.
    from core.intake import reader

    codes = np.array([0, 2, -1, 1, 0, 3, 2])
    shown = ["Coast", None, "North", "South"]
    fast = reader._text_series(shown, codes)
    monkeypatch.setattr(reader, "_TEXT_DTYPE", np.dtype(object))
    slow = reader._text_series(shown, codes)
    assert fast.tolist()[:2] == ["Coast", "North"] and fast.isna().tolist() == [False, False, True, True, False, False, False]
    assert [None if pd.isna(v) else v for v in fast] == [None if pd.isna(v) else v for v in slow]
