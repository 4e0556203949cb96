"""Hostile and careless inputs: workbooks that unpack to gigabytes or claim more than a worksheet
holds, encrypted workbooks, giant cells, old Mac line endings, spec documents nested 100,000 deep
or holding 5,000-digit numbers, and fuzzed workbooks and spec texts. Each must end in the
project's own clear error (or the right answer), within a hang guard, without touching the file.

Every hostile file is generated here (zipfile and a few lines of XML); none is committed. The
workbook parts follow ECMA-376 Part 1 (SpreadsheetML) and Part 2 (the zip package), reduced to what
openpyxl needs to open a workbook.
"""

from __future__ import annotations

import codecs
import contextlib
import io
import itertools
import json
import os
import signal
import subprocess
import sys
import zipfile
from collections.abc import Iterable, Iterator
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.cli import main
from core.errors import DataError, FormwiseError, SpecError
from core.intake import reader
from core.intake.reader import read_table_with_notes
from core.model.specfile import MAX_DEPTH, parse_spec_document, read_spec_file

HANG_SECONDS = 10
# Fuzzing runs for a bounded number of inputs; FORMWISE_FUZZ_SCALE=20 runs twenty times as many.
SCALE = max(1, int(os.environ.get("FORMWISE_FUZZ_SCALE", "1")))


class Hung(BaseException):
    """Raised by the hang guard; a BaseException so no ``except Exception`` in the code swallows it."""


@contextlib.contextmanager
def hang_guard(seconds: float = HANG_SECONDS) -> Iterator[None]:
    """Fail the test if the block runs longer than ``seconds`` (a hang, not a speed target)."""

    def expire(signum: int, frame: object) -> None:
        raise Hung(f"still running after {seconds} s")

    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


# --- workbooks built from parts -----------------------------------------------------------------
MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
RELATIONSHIPS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PACKAGE_RELATIONSHIPS = "http://schemas.openxmlformats.org/package/2006/relationships"
SHEET_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"


def _content_types(sheets: int) -> str:
    overrides = "".join(
        f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="{SHEET_TYPE}"/>' for i in range(1, sheets + 1)
    )
    return (
        '<?xml version="1.0" encoding="UTF-8"?>'
        '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
        '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
        '<Default Extension="xml" ContentType="application/xml"/>'
        '<Override PartName="/xl/workbook.xml" '
        'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
        '<Override PartName="/xl/sharedStrings.xml" '
        'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sharedStrings+xml"/>'
        f"{overrides}</Types>"
    )


def workbook(
    sheets: dict[str, Iterable[bytes]],
    shared: Iterable[bytes] = (),
    extra: dict[str, bytes] | None = None,
    level: int = 6,
) -> bytes:
    """An .xlsx package; each sheet's XML and the shared strings are written piece by piece, so a
    part can unpack to hundreds of megabytes without being held whole."""
    names = list(sheets)
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED, compresslevel=level) as package:
        package.writestr("[Content_Types].xml", _content_types(len(names)))
        package.writestr(
            "_rels/.rels",
            f'<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="{PACKAGE_RELATIONSHIPS}">'
            f'<Relationship Id="rId1" Type="{RELATIONSHIPS}/officeDocument" Target="xl/workbook.xml"/></Relationships>',
        )
        tabs = "".join(f'<sheet name="{n}" sheetId="{i}" r:id="rId{i}"/>' for i, n in enumerate(names, start=1))
        package.writestr(
            "xl/workbook.xml",
            f'<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="{MAIN}" xmlns:r="{RELATIONSHIPS}">'
            f"<sheets>{tabs}</sheets></workbook>",
        )
        links = "".join(
            f'<Relationship Id="rId{i}" Type="{RELATIONSHIPS}/worksheet" Target="worksheets/sheet{i}.xml"/>'
            for i in range(1, len(names) + 1)
        )
        package.writestr(
            "xl/_rels/workbook.xml.rels",
            f'<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="{PACKAGE_RELATIONSHIPS}">{links}'
            f'<Relationship Id="rId{len(names) + 1}" Type="{RELATIONSHIPS}/sharedStrings" Target="sharedStrings.xml"/>'
            "</Relationships>",
        )
        with package.open("xl/sharedStrings.xml", "w", force_zip64=True) as part:
            part.write(f'<?xml version="1.0" encoding="UTF-8"?><sst xmlns="{MAIN}">'.encode())
            for piece in shared:
                part.write(piece)
            part.write(b"</sst>")
        for i, name in enumerate(names, start=1):
            with package.open(f"xl/worksheets/sheet{i}.xml", "w", force_zip64=True) as part:
                for piece in sheets[name]:
                    part.write(piece)
        for path, data in (extra or {}).items():
            package.writestr(path, data)
    return buffer.getvalue()


def sheet(rows: Iterable[bytes], dimension: str | None = None) -> Iterator[bytes]:
    """A worksheet's XML around the given row elements."""
    yield f'<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="{MAIN}">'.encode()
    if dimension:
        yield f'<dimension ref="{dimension}"/>'.encode()
    yield b"<sheetData>"
    yield from rows
    yield b"</sheetData></worksheet>"


def table_rows(count: int, width: int = 2, start: int = 1) -> Iterator[bytes]:
    """A header row (inline strings) and ``count`` numeric rows, every cell with its reference."""
    letters = [chr(65 + j) for j in range(width)]
    yield (
        f'<row r="{start}">' + "".join(f'<c r="{c}{start}" t="inlineStr"><is><t>v{c}</t></is></c>' for c in letters) + "</row>"
    ).encode()
    for i in range(start + 1, start + 1 + count):
        yield (
            f'<row r="{i}">' + "".join(f'<c r="{c}{i}"><v>{i * (j + 1) % 97}.5</v></c>' for j, c in enumerate(letters)) + "</row>"
        ).encode()


def repeated(piece: bytes, times: int, batch: int = 10_000) -> Iterator[bytes]:
    """``piece`` written ``times`` times, a batch at a time (fast to deflate: a zip bomb's body)."""
    full, rest = divmod(times, batch)
    block = piece * batch
    yield from itertools.repeat(block, full)
    yield piece * rest


def read_file(tmp_path: Path, raw: bytes, name: str, sheet_name: str | None = None) -> pd.DataFrame:
    """Read ``raw`` from a file under the hang guard and check the file is left exactly as it was."""
    path = tmp_path / name
    path.write_bytes(raw)
    before = (path.stat().st_mtime_ns, path.stat().st_size)
    try:
        with hang_guard():
            return read_table_with_notes(path, sheet=sheet_name)[0]
    finally:
        assert path.read_bytes() == raw
        assert (path.stat().st_mtime_ns, path.stat().st_size) == before


def refused(tmp_path: Path, raw: bytes, name: str, match: str) -> str:
    with pytest.raises(DataError, match=match) as caught:
        read_file(tmp_path, raw, name)
    message = str(caught.value)
    assert "Traceback" not in message and len(message) < 600
    return message


def test_a_well_formed_generated_workbook_reads() -> None:
    frame = read_table_with_notes(workbook({"Data": sheet(table_rows(50, 3), "A1:C51")}), name="ok.xlsx")[0]
    assert list(frame.columns) == ["vA", "vB", "vC"]
    assert frame.shape == (50, 3)
    assert frame["vA"].iloc[0] == 2.5  # row 2: 2 * 1 % 97 + .5


# --- zip bombs and impossible sheets ------------------------------------------------------------
def test_two_million_rows_are_more_than_a_worksheet_holds(tmp_path: Path) -> None:
    # The Why list's 302 KB file with 2,000,000 rows: rows without references, one cell each.
    raw = workbook({"Data": sheet(repeated(b"<row><c><v>1</v></c></row>", 2_000_000))}, level=9)
    assert len(raw) < 1_000_000
    refused(tmp_path, raw, "rows.xlsx", r"more rows than a worksheet can hold \(1,048,576\)")


def test_a_package_that_unpacks_past_the_budget_is_refused_from_its_directory(tmp_path: Path) -> None:
    # Like the Why list's 3 MB file with 20,000,000 rows: the declared sizes alone refuse it.
    rows = repeated(b"<row><c><v>1</v></c></row>", reader.XLSX_MAX_BYTES // 26 + 10, batch=200_000)
    raw = workbook({"Data": sheet(rows)}, level=1)
    message = refused(tmp_path, raw, "bomb.xlsx", "unpacks to")
    assert "CSV" in message


def test_rows_of_sixteen_thousand_cells_exceed_the_cell_budget(tmp_path: Path) -> None:
    # The Why list's file of 16,384-cell rows.
    row = b"<row>" + b"<c><v>7</v></c>" * 16_384 + b"</row>"
    raw = workbook({"Data": sheet(repeated(row, 80, batch=10))})
    refused(tmp_path, raw, "wide.xlsx", f"more than {reader.XLSX_MAX_CELLS:,} cells")


def test_one_huge_shared_string_is_refused_before_it_is_loaded(tmp_path: Path) -> None:
    # The Why list's 950 KB file with a 1 GB shared string, at a size the test can build quickly.
    size = reader.XLSX_MAX_SHARED_STRING_BYTES + 1
    text = itertools.chain([b"<si><t>"], repeated(b"a", size, batch=4 * 2**20), [b"</t></si>"])
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4")}, shared=text, level=9)
    refused(tmp_path, raw, "strings.xlsx", "of shared text")


def test_millions_of_shared_strings_are_refused(tmp_path: Path) -> None:
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4")}, shared=repeated(b"<si><t>a</t></si>", 2 * reader.XLSX_MAX_CELLS))
    refused(tmp_path, raw, "many.xlsx", "distinct texts")


def test_a_declared_range_past_the_worksheet_limits_is_refused(tmp_path: Path) -> None:
    raw = workbook({"Data": sheet(table_rows(3), "A1:XFD1048577")})
    refused(tmp_path, raw, "claims.xlsx", r"declares the range A1:XFD1048577 \(1,048,577 rows by 16,384 columns\)")


def test_a_declared_range_larger_than_the_data_is_not_trusted(tmp_path: Path) -> None:
    frame = read_file(tmp_path, workbook({"Data": sheet(table_rows(4), "A1:XFD1048576")}), "inflated.xlsx")
    assert frame.shape == (4, 2)


def test_a_row_two_billion_down_is_refused(tmp_path: Path) -> None:
    rows = itertools.chain(table_rows(3), [b'<row r="2000000000"><c r="A2000000000"><v>1</v></c></row>'])
    refused(tmp_path, workbook({"Data": sheet(rows, "A1:B5")}), "far.xlsx", "more rows than a worksheet can hold")


@pytest.mark.parametrize("number", ["1048577", "1e9", "2.0e9"])
def test_rows_far_down_are_refused_however_the_number_is_written(tmp_path: Path, number: str) -> None:
    rows = itertools.chain(table_rows(3), [f'<row r="{number}"><c><v>1</v></c></row>'.encode()])
    refused(tmp_path, workbook({"Data": sheet(rows, "A1:B4")}), "far.xlsx", "more rows than a worksheet can hold")


def test_a_cell_past_the_last_column_is_refused(tmp_path: Path) -> None:
    # Cells without references run on to the right; 20,000 in one row pass column XFD (16,384).
    rows = itertools.chain(table_rows(3), [b"<row>" + b"<c><v>1</v></c>" * 20_000 + b"</row>"])
    refused(tmp_path, workbook({"Data": sheet(rows)}), "past.xlsx", "beyond column 16,384")


def test_a_sheet_wider_than_formwise_reads_is_refused_at_its_first_wide_row(tmp_path: Path) -> None:
    rows = itertools.chain(
        [b"<row>" + b"<c><v>1</v></c>" * (reader.MAX_COLUMNS + 100) + b"</row>"],
        repeated(b"<row>" + b"<c><v>1</v></c>" * 600 + b"</row>", 1_000, batch=100),
    )
    refused(
        tmp_path,
        workbook({"Data": sheet(rows, "A1:WB1001")}),
        "wide.xlsx",
        f"has 600 columns; Formwise reads at most {reader.MAX_COLUMNS}",
    )


def test_one_stray_value_in_the_last_column_reads_without_hanging(tmp_path: Path) -> None:
    # Found by the fuzzing below: 16,383 empty columns to drop took minutes (a quadratic step).
    rows = itertools.chain(table_rows(3), [b'<row r="5"><c r="XFD5"><v>1</v></c></row>'])
    frame = read_file(tmp_path, workbook({"Data": sheet(rows, "A1:XFD5")}), "stray.xlsx")
    assert frame.shape == (4, 3) and frame.iloc[-1, 2] == 1


def test_a_stray_value_far_right_on_every_row_is_refused(tmp_path: Path) -> None:
    # Few cells, but every row padded out to column XFD: the grid guard stops it early.
    rows = (f'<row r="{i}"><c r="A{i}"><v>1</v></c><c r="XFD{i}"><v>2</v></c></row>'.encode() for i in range(1, 2_001))
    refused(tmp_path, workbook({"Data": sheet(rows)}), "stray.xlsx", "empty cells between")


def test_sheets_without_a_declared_size_count_toward_opening(tmp_path: Path) -> None:
    # openpyxl reads a sheet with no <dimension> through to its end when the workbook opens:
    # three such sheets, each within the cell budget, are too much together.
    rows = reader.XLSX_MAX_OPEN_TAGS // (3 * 6) + 1_000  # six tags a row
    others = {f"Big{i}": sheet(repeated(b"<row><c><v>1</v></c></row>", rows)) for i in range(3)}
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4"), **others})
    refused(tmp_path, raw, "open.xlsx", "just to open it")


def test_a_sheet_without_a_declared_size_past_the_limits_is_refused_before_opening(tmp_path: Path) -> None:
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4"), "Big": sheet(repeated(b"<row><c/></row>", 1_100_000))})
    refused(tmp_path, raw, "open.xlsx", r"a sheet of 'open.xlsx' \(xl/worksheets/sheet2.xml\) has more rows than a worksheet")


def test_a_large_sheet_with_a_declared_size_is_not_parsed_unless_chosen(tmp_path: Path) -> None:
    big = sheet(repeated(b"<row><c><v>1</v></c></row>", 1_040_000), "A1:A1040000")
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4"), "Big": big})
    assert read_file(tmp_path, raw, "two.xlsx").shape == (3, 2)
    with pytest.raises(DataError, match=f"sheet 'Big' of 'two.xlsx' has more than {reader.XLSX_MAX_CELLS:,} cells"):
        read_file(tmp_path, raw, "two.xlsx", sheet_name="Big")


def _utf16(pieces: Iterable[bytes]) -> Iterator[bytes]:
    """XML pieces re-encoded as UTF-16 with a byte-order mark (ECMA-376 Part 2 allows UTF-16 parts)."""
    yield codecs.BOM_UTF16_LE
    for piece in pieces:
        yield piece.decode().replace('encoding="UTF-8"', 'encoding="UTF-16"').encode("utf-16-le")


def test_a_utf16_sheet_reads_and_is_counted_like_a_utf8_one(tmp_path: Path) -> None:
    assert read_file(tmp_path, workbook({"Data": _utf16(sheet(table_rows(5), "A1:B6"))}), "utf16.xlsx").shape == (5, 2)
    big = _utf16(sheet(repeated(b"<row><c/><c/></row>", 600_000)))
    refused(
        tmp_path, workbook({"Data": sheet(table_rows(3), "A1:B4"), "Big": big}), "utf16.xlsx", "has more than 1,000,000 cells"
    )


def _prefixed(rows: Iterable[bytes]) -> Iterator[bytes]:
    """A worksheet whose tags carry a namespace prefix (<x:row>, <x:c>), as some writers emit."""
    yield f'<?xml version="1.0" encoding="UTF-8"?><x:worksheet xmlns:x="{MAIN}"><x:sheetData>'.encode()
    yield from rows
    yield b"</x:sheetData></x:worksheet>"


def test_a_sheet_with_prefixed_tags_reads_and_is_counted(tmp_path: Path) -> None:
    small = [b'<x:row r="1"><x:c r="A1" t="inlineStr"><x:is><x:t>y</x:t></x:is></x:c></x:row>']
    small += [f'<x:row r="{i}"><x:c r="A{i}"><x:v>{i}</x:v></x:c></x:row>'.encode() for i in range(2, 6)]
    assert read_file(tmp_path, workbook({"Data": _prefixed(small)}), "prefixed.xlsx")["y"].tolist() == [2, 3, 4, 5]
    big = _prefixed(repeated(b"<x:row><x:c><x:v>1</x:v></x:c></x:row>", 1_100_000))
    refused(tmp_path, workbook({"Data": big}), "prefixed.xlsx", "more rows than a worksheet can hold")


def test_large_numbers_in_parts_that_are_not_sheets_are_not_row_numbers(tmp_path: Path) -> None:
    # A theme's DrawingML holds dir="5400000" and r="..." percentages; neither is a row.
    theme = b'<a:theme xmlns:a="http://schemas.openxmlformats.org/drawingml/2006/main"><a:lin ang="5400000" dir="5400000"/>'
    theme += b'<a:fillToRect l="50000" r="5000000"/></a:theme>'
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4")}, extra={"xl/theme/theme1.xml": theme})
    assert read_file(tmp_path, raw, "theme.xlsx").shape == (3, 2)


def test_too_many_parts_are_refused(tmp_path: Path) -> None:
    extra = {f"xl/media/p{i}.bin": b"" for i in range(reader.XLSX_MAX_MEMBERS + 1)}
    refused(tmp_path, workbook({"Data": sheet(table_rows(3), "A1:B4")}, extra=extra), "parts.xlsx", "parts")


def test_entity_expansion_in_shared_strings_is_a_damaged_workbook(tmp_path: Path) -> None:
    # "Billion laughs": nested entities; the XML parser refuses the amplification.
    entities = '<!ENTITY a "aaaaaaaaaa">' + "".join(
        f'<!ENTITY {c} "{("&" + p + ";") * 10}">' for p, c in zip("abcdefgh", "bcdefghi", strict=True)
    )
    raw = workbook({"Data": sheet(table_rows(3), "A1:B4")})
    with zipfile.ZipFile(io.BytesIO(raw)) as source:
        parts = {i.filename: source.read(i) for i in source.infolist()}
    parts["xl/sharedStrings.xml"] = (
        f'<?xml version="1.0"?><!DOCTYPE sst [{entities}]><sst xmlns="{MAIN}"><si><t>&i;</t></si></sst>'.encode()
    )
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as target:
        for path, data in parts.items():
            target.writestr(path, data)
    refused(tmp_path, buffer.getvalue(), "laughs.xlsx", "not a readable .xlsx")


@pytest.mark.parametrize(
    ("offset", "value"),
    [(6, 64), (8, 1)],  # central directory entry: "version needed" 6.4; "encrypted" flag (PKWARE APPNOTE 4.3.12)
)
def test_a_zip_directory_entry_zipfile_cannot_handle_is_a_damaged_workbook(tmp_path: Path, offset: int, value: int) -> None:
    # Found by the fuzzing below: zipfile raised NotImplementedError for an unknown zip version.
    raw = bytearray(workbook({"Data": sheet(table_rows(3), "A1:B4")}))
    entry = raw.index(b"PK\x01\x02")
    raw[entry + offset] = value
    refused(tmp_path, bytes(raw), "odd.xlsx", "not a readable .xlsx")


def _compound_file(*streams: str) -> bytes:
    """The start of an OLE compound file ([MS-CFB] 2.2 header signature) with directory entries
    naming ``streams`` (UTF-16LE names in 128-byte entries, [MS-CFB] 2.6.1); enough for a reader
    that looks at the signature and the stream names."""
    header = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504)
    entries = b"".join(
        (name.encode("utf-16-le") + b"\x00\x00").ljust(64, b"\x00") + bytes(64) for name in ("Root Entry", *streams)
    )
    return header + entries + bytes(4096)


@pytest.mark.parametrize("name", ["locked.xlsx", "locked.csv"])
def test_an_encrypted_workbook_is_called_encrypted(tmp_path: Path, name: str) -> None:
    # An encrypted OOXML file: \EncryptionInfo and \EncryptedPackage streams ([MS-OFFCRYPTO] 2.3.4.4-5).
    message = refused(tmp_path, _compound_file("EncryptionInfo", "EncryptedPackage"), name, "encrypted")
    assert "old Excel" not in message and "password" in message


def test_an_old_xls_file_is_still_called_old_excel(tmp_path: Path) -> None:
    refused(tmp_path, _compound_file("Workbook", "SummaryInformation"), "old.xlsx", r"old Excel format \(\.xls\)")


# --- text files ---------------------------------------------------------------------------------
def test_old_mac_line_endings_read_as_rows(tmp_path: Path) -> None:
    frame = read_file(tmp_path, b"y,x,z\r1,2,3\r4,5,6\r7,8,9\r", "mac.csv")
    assert list(frame.columns) == ["y", "x", "z"]
    assert frame["z"].tolist() == [3, 6, 9]


def test_old_mac_line_endings_with_a_quoted_cell_and_a_title(tmp_path: Path) -> None:
    raw = b'Kiosk sales\r\ry;x;label\r1,5;2;"a;b"\r2,5;3;c\r3,5;4;d\r'
    frame, notes = read_table_with_notes(raw, name="mac.csv")
    assert list(frame.columns) == ["y", "x", "label"]
    assert frame["y"].tolist() == [1.5, 2.5, 3.5]
    assert frame["label"].tolist() == ["a;b", "c", "d"]
    assert any("CR only" in n for n in notes)


@given(
    st.lists(st.lists(st.integers(-1000, 1000), min_size=3, max_size=3), min_size=2, max_size=20),
    st.sampled_from(["\n", "\r\n", "\r"]),
)
@settings(max_examples=50 * SCALE, deadline=None)
def test_any_line_ending_gives_the_same_table(rows: list[list[int]], newline: str) -> None:
    text = newline.join(["y,x,z", *(",".join(map(str, r)) for r in rows)]) + newline
    frame = read_table_with_notes(text.encode(), name="t.csv")[0]
    assert frame.values.tolist() == rows


def test_a_fifty_megabyte_quoted_cell_is_refused_quickly(tmp_path: Path) -> None:
    raw = b'y,x,note\n1,2,"' + b"a" * 50_000_000 + b'"\n3,4,b\n5,6,c\n'
    message = refused(tmp_path, raw, "cell.csv", "50,000,000 characters")
    assert "'note'" in message


def test_a_long_cell_under_the_budget_reads(tmp_path: Path) -> None:
    text = "a" * (reader.MAX_CELL_CHARS - 10) + " USD"  # ends like a currency amount: no slow search
    frame = read_file(tmp_path, f'y,x,note\n1,2,"{text}"\n3,4,b\n5,6,c\n'.encode(), "long.csv")
    assert frame["note"].iloc[0] == text


def test_a_giant_shared_string_cell_is_refused_like_a_giant_csv_cell(tmp_path: Path) -> None:
    shared = [b"<si><t>note</t></si><si><t>" + b"b" * (reader.MAX_CELL_CHARS + 1) + b"</t></si>"]
    rows = [
        b'<row r="1"><c r="A1" t="s"><v>0</v></c></row>',
        b'<row r="2"><c r="A2" t="s"><v>1</v></c></row>',
        b'<row r="3"><c r="A3" t="inlineStr"><is><t>c</t></is></c></row>',
    ]
    refused(tmp_path, workbook({"Data": sheet(rows, "A1:A3")}, shared=shared), "cell.xlsx", "characters")


def test_a_pipe_is_refused_not_read(tmp_path: Path) -> None:
    pipe = tmp_path / "data.csv"
    os.mkfifo(pipe)
    with hang_guard(), pytest.raises(DataError, match="not a regular file"):
        read_table_with_notes(pipe)
    with hang_guard(), pytest.raises(SpecError, match="not a regular file"):
        read_spec_file(pipe)


# --- spec documents -----------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("[" * 100_000 + "]" * 100_000, "nests 100,000 levels"),
        ('{"a":' * 100_000 + "1" + "}" * 100_000, "nests 100,000 levels"),
        ("[" * (MAX_DEPTH + 1) + "]" * (MAX_DEPTH + 1), "levels deep"),
        ('{"outcome": ' + "9" * 5_000 + "}", "integer of 5,000 digits"),
        ('{"outcome": -' + "9" * 400 + "}", "integer of 400 digits"),
        ('{"outcome": {"column": "y"}, "at": {"x": NaN}}', "NaN, which JSON does not allow"),
        ('{"at": {"x": Infinity}}', "Infinity"),
        ('{"at": {"x": -Infinity}}', "-Infinity"),
        ('{"at": {"x": 1e400}}', "1e400, too large"),
        ('{"outcome": "y", "outcome": "x"}', "'outcome' twice"),
        ("[" + ",".join(["0"] * 200_000) + "]", "more than 100,000 values"),
        ('{"outcome": "\\ud800"}', "lone surrogate"),
        ("[" + " " * 2_000_001 + "]", "larger than 2 MB"),
        ('["[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[["]', "must hold one JSON object"),  # brackets in a text do not nest
    ],
)
def test_spec_documents_are_bounded_data(text: str, match: str) -> None:
    for form in (text, text.encode()):
        with hang_guard(), pytest.raises(SpecError, match=match):
            parse_spec_document(form)


def test_a_nested_spec_within_the_limits_parses() -> None:
    spec = {"outcome": {"column": "y"}, "regressors": [{"column": "x", "transform": "log"}], "at": {"x": 1.5e300}}
    document = {"formwise_spec": 1, "spec": spec, "saved": {"a": spec}}
    assert parse_spec_document(json.dumps(document)) == (spec, {"a": spec})


def test_a_huge_spec_file_is_not_read_whole(tmp_path: Path) -> None:
    path = tmp_path / "spec.json"
    with path.open("wb") as handle:
        handle.truncate(4 * 2**30)  # a sparse 4 GB file: reading it whole would exhaust memory
    with hang_guard(), pytest.raises(SpecError, match="larger than 2 MB"):
        read_spec_file(path)


# --- fuzzing ------------------------------------------------------------------------------------
_REFS = st.one_of(
    st.sampled_from(["A1", "B2", "XFD1", "XFE1", "ZZZZ9", "A0", "1A", "", "A-1", "$A$1", "A1048577", "AAAAAAAA1"]),
    st.builds(lambda c, r: f"{c}{r}", st.sampled_from(["A", "B", "C", "AB", "XFD"]), st.integers(-5, 3_000_000)),
)
_NUMBERS = st.sampled_from(
    ["1", "2.5", "-0", "1e308", "1e400", "-1e400", "inf", "nan", "NaN", "1" * 400, "0x10", "", " ", "1,5", "2020-01-01"]
)
_TEXT = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="<&\x00"), max_size=12)
_cell = st.builds(
    lambda ref, kind, style, value: (
        "<c"
        + (f' r="{ref}"' if ref is not None else "")
        + (f' t="{kind}"' if kind else "")
        + (f' s="{style}"' if style else "")
        + (f"><is><t>{value}</t></is></c>" if kind == "inlineStr" else f"><v>{value}</v></c>")
    ),
    st.one_of(st.none(), _REFS),
    st.sampled_from(["", "n", "s", "str", "inlineStr", "b", "e", "d", "zz"]),
    st.sampled_from(["", "0", "1", "999", "-1", "x"]),
    st.one_of(_NUMBERS, _TEXT),
)
_row = st.builds(
    lambda r, cells: "<row" + (f' r="{r}"' if r is not None else "") + ">" + "".join(cells) + "</row>",
    st.one_of(st.none(), st.integers(-2, 8), st.sampled_from(["x", "2.0", "", "-0"])),
    st.lists(_cell, max_size=6),
)
_dimension = st.one_of(
    st.none(), st.sampled_from(["A1", "A1:C10", "A1:XFD1048576", "A1:XFE1", "B2:A1", "nonsense", "A1:A99999999999"])
)


@settings(max_examples=150 * SCALE, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(_row, max_size=8), _dimension, st.lists(_TEXT, max_size=4))
def test_generated_sheets_read_or_give_a_formwise_error(rows: list[str], dimension: str | None, shared: list[str]) -> None:
    # Rows far down are left to test_rows_far_down_...: each costs a pass over the empty rows above.
    body = (r.encode() for r in rows)
    raw = workbook({"Data": sheet(body, dimension)}, shared=[f"<si><t>{s}</t></si>".encode() for s in shared])
    with hang_guard():
        try:
            read_table_with_notes(raw, name="fuzz.xlsx")
        except FormwiseError as error:
            assert str(error) and "Traceback" not in str(error)


_VALID_BOOK = workbook({"Data": sheet(table_rows(6, 3), "A1:C7")})


@settings(max_examples=150 * SCALE, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.integers(0, len(_VALID_BOOK) - 1), st.integers(0, 255)), min_size=1, max_size=6), st.booleans())
def test_damaged_workbooks_read_or_give_a_formwise_error(flips: list[tuple[int, int]], truncate: bool) -> None:
    raw = bytearray(_VALID_BOOK)
    for position, value in flips:
        raw[position] = value
    if truncate:
        raw = raw[: flips[0][0]]
    with hang_guard():
        try:
            read_table_with_notes(bytes(raw), name="damaged.xlsx")
        except FormwiseError:
            pass


_json_leaf = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(),
    st.floats(allow_nan=False, allow_infinity=False),
    st.text(max_size=10),
    st.sampled_from(["NaN", "Infinity", "-Infinity", "1e400", "-1e999", "9" * 5_000, "1" * 309, '"\\ud800"', "1.0e-400"]),
)


def _render(value: object) -> str:
    """JSON text of a generated value; strings from the leaf sample are written raw (NaN, 1e400)."""
    if isinstance(value, list):
        return "[" + ",".join(_render(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ",".join(f"{json.dumps(k)}:{_render(v)}" for k, v in value.items()) + "}"
    if isinstance(value, str) and (
        value in ("NaN", "Infinity", "-Infinity", '"\\ud800"') or value[:1].isdigit() or value[:2] == "-1"
    ):
        return value
    return json.dumps(value)


_json_tree = st.recursive(
    _json_leaf,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4), st.dictionaries(st.sampled_from(["outcome", "spec", "saved", "a", "b"]), inner, max_size=4)
    ),
    max_leaves=12,
)
_spec_text = st.one_of(
    _json_tree.map(_render),
    st.builds(lambda depth, inner: "[" * depth + inner + "]" * depth, st.integers(0, 3_000), _json_tree.map(_render)),
    st.builds(lambda depth: '{"a":' * depth + "0" + "}" * depth, st.integers(0, 3_000)),
    st.text(alphabet='[]{}":,0123456789.eE-+ \\nul', max_size=200),
    st.builds(lambda doc: json.dumps({"formwise_spec": 1, "spec": doc, "saved": {"m": doc}}), _json_tree),
)


@settings(max_examples=1_000 * SCALE, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_spec_text, st.sampled_from(["", "\ufeff"]), st.booleans())
def test_generated_spec_texts_parse_or_give_a_spec_error(text: str, bom: str, as_bytes: bool) -> None:
    form: str | bytes = (bom + text).encode("utf-8", "surrogatepass") if as_bytes else text
    with hang_guard():
        try:
            spec, saved = parse_spec_document(form)
        except SpecError as error:
            assert str(error) and len(str(error)) < 400
            return
    assert isinstance(spec, dict) and isinstance(saved, dict)
    json.dumps([spec, saved], allow_nan=False)  # what parses can be written back as JSON


# --- the command line: one error line, never a warning before it --------------------------------
ROOT = Path(__file__).resolve().parent.parent


def _cli(*args: str) -> tuple[int, list[str]]:
    """A separate process: warnings print to its stderr as they would for a user (in process,
    pytest's own warning capture would hide them)."""
    done = subprocess.run([sys.executable, "-m", "core", *args], cwd=ROOT, capture_output=True, text=True, timeout=60)
    return done.returncode, done.stderr.splitlines()


def test_the_command_line_prints_one_error_line_after_numeric_warnings(tmp_path: Path) -> None:
    # Values near the float limit: numpy warns of overflow on the way to our own error.
    data = tmp_path / "extreme.csv"
    data.write_text("y,x\n1e308,1\n-1e308,2\n1.7e308,3\n1e-320,4\n5,5\n6,7\n")
    spec = tmp_path / "spec.json"
    spec.write_text('{"outcome": {"column": "y"}, "regressors": [{"column": "x"}]}')
    code, lines = _cli("analyze", str(data), "--spec", str(spec))
    assert code == 2
    assert len(lines) == 1 and lines[0].startswith("error: "), lines


@pytest.mark.parametrize(
    ("name", "content", "match"),
    [
        ("deep.json", "[" * 100_000 + "]" * 100_000, "levels deep"),
        ("digits.json", '{"outcome": ' + "9" * 5_000 + "}", "5,000 digits"),
        ("nan.json", '{"outcome": {"column": "y"}, "regressors": [], "at": {"x": NaN}}', "NaN"),
    ],
)
def test_the_command_line_refuses_hostile_spec_files_in_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], name: str, content: str, match: str
) -> None:
    spec = tmp_path / name
    spec.write_text(content)
    data = tmp_path / "data.csv"
    data.write_text("y,x\n1,2\n2,3\n3,5\n")
    with hang_guard():
        assert main(["analyze", str(data), "--spec", str(spec)]) == 2
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and match in lines[0], lines


def test_the_command_line_refuses_a_zip_bomb_in_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    book = tmp_path / "rows.xlsx"
    book.write_bytes(workbook({"Data": sheet(repeated(b"<row><c><v>1</v></c></row>", 2_000_000))}, level=9))
    with hang_guard():
        assert main(["profile", str(book)]) == 2
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == 1 and "more rows than a worksheet can hold" in lines[0], lines
