"""Files larger than the reader's sniffing head and its decoding pieces: the encoding is judged on
the whole file (also past the first pieces), and the table equals pandas' reading of the
decoded text."""

from __future__ import annotations

import io

import pandas as pd
import pytest

from core.errors import DataError
from core.intake.reader import _DECODE_BYTES, read_table_with_notes


def _rows(count: int, text: str = "é") -> str:
    return "x,label\n" + "".join(f"{i},{text}{i % 7}\n" for i in range(count))


def _expected(text: str) -> pd.DataFrame:
    return pd.read_csv(io.StringIO(text), keep_default_na=False, na_values=[""])


def _rows_past(limit: int, text: str, encoding: str) -> str:
    count = 1000
    while len(_rows(count, text).encode(encoding)) <= limit:
        count *= 2
    return _rows(count, text)


@pytest.mark.parametrize(
    ("encoding", "described"),
    [("utf-8", "UTF-8 encoding"), ("utf-8-sig", "UTF-8 encoding with byte-order mark"), ("utf-16", "UTF-16 encoding")],
)
def test_large_file_reads_like_its_decoded_text(encoding: str, described: str) -> None:
    text = _rows_past(_DECODE_BYTES + 10, "€é", encoding)  # multi-byte characters cross piece boundaries
    frame, notes = read_table_with_notes(text.encode(encoding), name="big.csv")
    pd.testing.assert_frame_equal(frame, _expected(text), check_exact=True)
    assert any(described in note for note in notes)


def test_a_bad_utf8_byte_past_the_first_piece_makes_it_windows_1252() -> None:
    text = _rows_past(_DECODE_BYTES + 10, "e", "utf-8")
    raw = text.encode("utf-8") + "99,caf\xe9\n".encode("cp1252")
    frame, notes = read_table_with_notes(raw, name="late.csv")
    assert any("Windows-1252" in note for note in notes)
    assert frame["label"].iloc[-1] == "café"


def test_a_byte_undefined_in_windows_1252_past_the_first_piece_makes_it_latin_1() -> None:
    text = _rows_past(_DECODE_BYTES + 10, "e", "utf-8")
    raw = text.encode("utf-8") + b"99,caf\xe9\x81\n"
    frame, notes = read_table_with_notes(raw, name="latin.csv")
    assert any("Latin-1" in note for note in notes)
    assert frame["label"].iloc[-1] == "café\x81"


def test_a_ragged_line_far_down_is_named() -> None:
    text = _rows(60_000) + "1,2,3\n"
    with pytest.raises(DataError, match="line 60002 has 3 fields"):
        read_table_with_notes(text.encode(), name="ragged.csv")


def test_a_web_page_after_a_long_run_of_blank_lines_is_refused() -> None:
    raw = ("\n" * 300_000 + "<html><body><table><tr><td>1</td></tr></table></body></html>").encode()
    with pytest.raises(DataError, match="web page"):
        read_table_with_notes(raw, name="page.csv")


def test_whitespace_only_file_longer_than_the_head_is_empty() -> None:
    with pytest.raises(DataError, match="is empty"):
        read_table_with_notes(("\u00a0 \n" * 200_000).encode(), name="blank.csv")
