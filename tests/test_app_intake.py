"""Getting a table into the app: uploads read with notes, the sheet picker, the size cap, bad
files, the Column profiles view, "Apply every suggestion" and identifier columns kept out of the
model; through AppTest, plus the pure helpers behind them (app.intake, app.state)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from streamlit.testing.v1 import AppTest

import core
from app import intake, keys, profiles_view
from app.gridspec import spec_to_grid
from core.intake.profile import profile_table
from core.intake.reader import read_table_with_notes
from core.model.transforms import menu_word
from tests.app_support import edit_grid

ROOT = Path(__file__).resolve().parent.parent
MAIN = str(ROOT / "app" / "main.py")
CORPUS = ROOT / "tests" / "corpus"
TIMEOUT = 120


# --- helpers ---------------------------------------------------------------------------------------
def start() -> AppTest:
    at = AppTest.from_file(MAIN, default_timeout=TIMEOUT)
    at.run()
    assert not at.exception, at.exception
    return at


def upload(at: AppTest, name: str, raw: bytes | None = None) -> AppTest:
    data = (CORPUS / name).read_bytes() if raw is None else raw
    at.file_uploader[0].set_value((name, data, "application/octet-stream")).run()
    assert not at.exception, at.exception
    return at


def grid(at: AppTest) -> pd.DataFrame:
    return at.session_state["grid_base"].set_index("column")


def coefficients(at: AppTest) -> pd.DataFrame:
    found = [t.value for t in at.table if "What it means" in t.value.columns]
    assert found, "no coefficient table"
    return found[0]


def terms(at: AppTest) -> set[str]:
    """The coefficient table's terms as read on screen."""
    return {unescaped(t) for t in coefficients(at)["Term"]}


def sidebar_captions(at: AppTest) -> str:
    return "\n".join(c.value for c in at.sidebar.caption)


def unescaped(text: str) -> str:
    """Markdown text as read on screen (plain backslash-escapes punctuation)."""
    return text.replace("\\", "")


def profile_view(at: AppTest) -> pd.DataFrame:
    at.segmented_control(key="view").set_value(profiles_view.VIEW_NAME).run()
    assert not at.exception, at.exception
    found = [d.value for d in at.dataframe if "Suggested" in d.value.columns]
    assert found, "no column profiles table"
    return found[0].set_index("Column")


# --- uploads: notes, sheets, bad files, the size cap ---------------------------------------------------
def test_a_messy_upload_shows_what_reading_changed() -> None:
    at = start()
    upload(at, "twin_semicolon_cp1252.csv")
    assert not at.error
    assert at.session_state["data"]["name"] == "twin_semicolon_cp1252.csv"
    assert "What was changed while reading" in [e.label for e in at.sidebar.expander]
    notes = unescaped(sidebar_captions(at))
    assert "semicolon-separated text, Windows-1252 encoding, decimal comma" in notes
    assert "prix_unitaire: removed thousands separators in 56 cells" in notes
    # The default model follows the advisor: a log of the amounts, the region as categories.
    g = grid(at)
    assert g.at["ventes_€", "role"] == "outcome" and g.at["ventes_€", "transform"] == "log"
    assert g.at["prix_unitaire", "transform"] == "log" and g.at["région", "transform"] == "category"
    assert "log of prix_unitaire" in terms(at)


def test_notes_come_file_first_then_by_column() -> None:
    at = start()
    upload(at, "semicolon_comma_cp1252.csv")
    notes = unescaped(sidebar_captions(at)).splitlines()
    assert notes[0].startswith("- Read 'semicolon_comma_cp1252.csv' as semicolon-separated text")
    assert notes[1].startswith("- Prix (€): removed thousands separators")
    assert notes[2].startswith("- Remise: removed '%' from 4 cells")


def test_a_workbook_with_two_sheets_gets_a_sheet_picker() -> None:
    at = start()
    upload(at, "two_sheets.xlsx")
    picker = [s for s in at.sidebar.selectbox if s.label == "Sheet"]
    assert picker and picker[0].options == ["Sales", "Costs"]
    assert at.session_state["data"]["name"] == "two_sheets.xlsx · sheet Sales"
    assert "list_price: removed currency symbol '$'" in unescaped(sidebar_captions(at))
    picker[0].set_value("Costs").run()
    assert not at.exception
    assert at.session_state["data"]["name"] == "two_sheets.xlsx · sheet Costs"
    assert list(at.session_state["data"]["frame"].columns) == ["item", "cost", "share"]
    assert "Skipped 1 row above the header row" in unescaped(sidebar_captions(at))


@pytest.mark.parametrize(
    ("name", "words"),
    [
        ("garbage.csv", "binary file"),
        ("header_only.csv", "no data rows"),
        ("empty.csv", "is empty"),
        ("page.csv", "web page (HTML)"),
        ("single_row.csv", "only one data row"),
        ("wide_501.csv", "at most 500"),
        ("corrupt.xlsx", "not a readable .xlsx workbook"),
    ],
)
def test_a_broken_file_shows_an_error_and_keeps_the_results(name: str, words: str) -> None:
    at = start()
    good = coefficients(at)
    upload(at, name)
    errors = [unescaped(e.value) for e in at.sidebar.error]
    assert len(errors) == 1 and name in errors[0] and words in errors[0], errors
    assert at.session_state["data"]["id"].startswith("demo:")
    pd.testing.assert_frame_equal(coefficients(at), good)
    assert "Still working with: demo" in unescaped(sidebar_captions(at))


def test_a_broken_file_after_an_upload_keeps_that_upload() -> None:
    at = start()
    upload(at, "twin_semicolon_cp1252.csv")
    good = coefficients(at)
    upload(at, "header_only.csv")
    assert any("header_only.csv" in unescaped(e.value) for e in at.sidebar.error)
    assert at.session_state["data"]["name"] == "twin_semicolon_cp1252.csv"
    pd.testing.assert_frame_equal(coefficients(at), good)


def test_the_size_cap_says_the_limit_and_how_to_raise_it(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv(intake.CAP_VARIABLE, "0.001")  # about 1 KB
    at = start()
    good = coefficients(at)
    upload(at, "twin_clean.csv")  # about 2 KB
    errors = [unescaped(e.value) for e in at.sidebar.error]
    assert len(errors) == 1
    assert "'twin_clean.csv' is 1.5 KB, more than the 0.001 MB Formwise accepts" in errors[0]
    assert "FORMWISE_MAX_UPLOAD_MB" in errors[0] and "--server.maxUploadSize" in errors[0]
    assert at.session_state["data"]["id"].startswith("demo:")
    pd.testing.assert_frame_equal(coefficients(at), good)


def test_cap_setting_and_size_words() -> None:
    assert intake.upload_cap({}) == (200.0, None)
    assert intake.upload_cap({intake.CAP_VARIABLE: "50"}) == (50.0, None)
    cap, problem = intake.upload_cap({intake.CAP_VARIABLE: "lots"})
    assert cap == 200.0 and problem and "not a positive number" in problem
    assert intake.upload_cap({intake.CAP_VARIABLE: "-3"})[0] == 200.0
    assert intake.size_problem("a.csv", 199 * 1024 * 1024, {}) is None
    message = intake.size_problem("a.csv", 250 * 1024 * 1024, {})
    assert message and "250.0 MB, more than the 200 MB" in message and "FORMWISE_MAX_UPLOAD_MB=500" in message
    assert "server.maxUploadSize 500" in message


# --- the advisor in the app --------------------------------------------------------------------------------
def test_the_demo_profile_shows_the_suggestions() -> None:
    at = start()
    table = profile_view(at)
    suggested = table["Suggested"].to_dict()
    for column in ("weekly_revenue", "drink_price", "foot_traffic"):
        assert suggested[column] == "log", column
    assert suggested["ad_spend"] == menu_word("ihs")
    for column in ("years_open", "app_order_share", "promo"):
        assert suggested[column] == menu_word("level"), column
    assert suggested["kiosk_id"] == "not used"
    assert table.at["kiosk_id", "Kind"] == "identifier"
    assert table.at["ad_spend", "Zeros"] == 647 and table.at["ad_spend", "Log drops rows"] == 647
    assert table.at["weekly_revenue", "Skewness"] == pytest.approx(2.23)
    assert len(table.at["weekly_revenue", "Shape"]) == 20  # the histogram's bars
    # The outcome's reasons and evidence, Box-Cox power included.
    words = unescaped("\n".join(m.value for m in at.markdown))
    assert "Suggested: log" in words
    assert "right-skewed (skewness 2.2 → 0.2 after log)" in words
    assert "Skewness 2.23 as recorded, 0.22 after a log" in words
    assert "λ = −0.15 (95 % interval −0.23 to −0.06)" in words
    at.selectbox(key="profile_pick").set_value("ad_spend").run()
    words = unescaped("\n".join(m.value for m in at.markdown))
    assert "A log would drop 647 rows (43%)" in words and "IHS keeps the zeros" in words


def test_apply_every_suggestion_sets_the_transforms_and_keeps_the_roles() -> None:
    at = start()
    edit_grid(at, {"drink_price": {"transform": "level"}, "ad_spend": {"transform": "sqrt"}, "years_open": {"transform": "log"}})
    before = at.session_state["previous_grid"].set_index("column")  # the grid with the edits
    assert before.at["drink_price", "transform"] == "level"
    at.button(key="apply_suggestions").click().run()
    assert not at.exception and not at.error
    after = grid(at)
    assert after.at["drink_price", "transform"] == "log"
    assert after.at["ad_spend", "transform"] == "ihs"
    assert after.at["years_open", "transform"] == "level"
    assert list(after["role"]) == list(before["role"])
    assert list(after["change"]) == list(before["change"])
    assert "log of drink_price" in terms(at)
    assert "Set 3 transforms to the suggestion" in unescaped("\n".join(c.value for c in at.caption))
    # Every suggestion can be overridden afterwards.
    edit_grid(at, {"drink_price": {"transform": "quadratic"}})
    assert at.session_state["previous_grid"].set_index("column").at["drink_price", "transform"] == "quadratic"
    assert "drink_price squared" in terms(at)


def test_identifier_columns_are_kept_out_unless_asked_for() -> None:
    at = start()
    assert grid(at).at["kiosk_id", "role"] == "not used"
    assert grid(at).at["kiosk_id", "about"].startswith("identifier")
    good = coefficients(at)
    edit_grid(at, {"kiosk_id": {"role": "regressor"}})
    assert grid(at).at["kiosk_id", "role"] == "not used"
    assert any("kiosk_id holds identifiers" in unescaped(i.value) for i in at.info)
    pd.testing.assert_frame_equal(coefficients(at), good)
    # Ticked: the identifier can enter, here as categories (one dummy per kiosk).
    at.checkbox(key=keys.UNLOCK_LOCKED).check().run()
    edit_grid(at, {"kiosk_id": {"role": "regressor", "transform": "category"}})
    assert at.session_state["previous_grid"].set_index("column").at["kiosk_id", "role"] == "regressor"
    # The model now takes it: one dummy per kiosk, which the kiosk-level columns make collinear.
    assert at.error and "kiosk_id[K0" in unescaped(at.error[0].value)


def test_an_uploaded_identifier_and_date_stay_out_of_the_default_model() -> None:
    rng = np.random.default_rng(3)
    n = 60
    frame = pd.DataFrame(
        {
            "order_id": [f"A-{i:04d}" for i in range(n)],
            "day": pd.date_range("2024-01-01", periods=n).strftime("%Y-%m-%d"),
            "spend": np.round(rng.lognormal(4, 1, n), 2),
            "price": np.round(rng.uniform(2, 9, n), 2),
        }
    )
    at = start()
    upload(at, "orders.csv", frame.to_csv(index=False).encode())
    g = grid(at)
    assert g.at["order_id", "role"] == "not used" and g.at["day", "role"] == "not used"
    assert g.at["day", "about"].startswith("dates")
    assert g.at["spend", "role"] == "outcome" and g.at["price", "role"] == "regressor"
    assert [c.label for c in at.checkbox if c.key == keys.UNLOCK_LOCKED] == ["Use identifier and date columns"]


# --- pure helpers --------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo_profile() -> tuple[pd.DataFrame, dict]:
    frame, notes = read_table_with_notes(ROOT / "demo_data" / "kiosks.csv")
    return frame, profile_table(frame, notes)


def test_apply_suggestions_keeps_roles_and_skips_what_an_outcome_cannot_take(demo_profile) -> None:
    frame, profile = demo_profile
    base = spec_to_grid(core.suggest(frame, profile), frame, profile)
    edited = base.copy()
    edited.loc[edited["column"] == "drink_price", "transform"] = "sqrt"
    edited.loc[edited["column"] == "region", "role"] = "outcome"  # an outcome cannot be a category
    edited.loc[edited["column"] == "region", "transform"] = "level"
    out, changes = intake.apply_suggestions(edited, profile)
    assert out is not edited
    assert changes == [("drink_price", "sqrt", "log")]
    assert list(out["role"]) == list(edited["role"])
    assert out.loc[out["column"] == "region", "transform"].item() == "level"
    assert out.loc[out["column"] == "kiosk_id", "transform"].item() == base.loc[base["column"] == "kiosk_id", "transform"].item()


def test_lock_roles_and_locked_columns(demo_profile) -> None:
    frame, profile = demo_profile
    assert intake.locked_columns(profile) == {"kiosk_id": "identifier"}
    g = spec_to_grid(core.suggest(frame, profile), frame, profile)
    g.loc[g["column"] == "kiosk_id", "role"] = "regressor"
    fixed, moved = intake.lock_roles(g, {"kiosk_id": "identifier"})
    assert moved == ["kiosk_id"] and set(fixed.loc[fixed["column"] == "kiosk_id", "role"]) == {"not used"}
    same, none = intake.lock_roles(fixed, {"kiosk_id": "identifier"})
    assert same is fixed and none == []


def test_default_spec_follows_the_advisor() -> None:
    rng = np.random.default_rng(1)
    n = 200
    frame = pd.DataFrame(
        {
            "row": np.arange(1, n + 1),  # a saved row counter
            "week": rng.integers(1, 10, n),  # a time index: a trend is the user's call
            "revenue": rng.lognormal(8, 1, n),  # money: the outcome, logged
            "visits": rng.lognormal(5, 1, n),  # positive and skewed: log
            "spend": np.where(rng.random(n) < 0.3, 0.0, rng.lognormal(3, 1.2, n)),  # zeros: IHS
            "share": rng.uniform(0, 1, n),  # level
            "promo": rng.integers(0, 2, n),  # 0/1: level
            "region": rng.choice(["A", "B", "C"], n),  # category
            "customer": [f"c{i}" for i in range(n)],  # identifier
            "constant": 1.0,  # no variation
        }
    )
    profile = profile_table(frame)
    spec = core.suggest(frame, profile)
    assert spec["outcome"] == {"column": "revenue", "transform": "log"}
    assert {r["column"]: r["transform"] for r in spec["regressors"]} == {
        "visits": "log",
        "spend": "ihs",
        "share": "level",
        "promo": "level",
        "region": "category",
    }
    assert core.analyze(frame, spec)["n_obs"] == n
    g = spec_to_grid(spec, frame, profile).set_index("column")
    assert g.at["customer", "about"].startswith("identifier") and g.at["customer", "role"] == "not used"
    assert g.at["week", "transform"] == "level"  # unused rows carry the advisor's suggestion too
    with pytest.raises(core.DataError):
        names = pd.DataFrame({"name": ["a", "b", "c"], "town": ["x", "y", "z"]})
        core.suggest(names, profile_table(names))


def test_profile_table_rows_and_words(demo_profile) -> None:
    frame, profile = demo_profile
    g = spec_to_grid(core.suggest(frame, profile), frame, profile)
    table = profiles_view.profile_frame(profile, g)
    assert list(table["Column"]) == list(g["column"])  # the grid's order
    row = table.set_index("Column").loc["region"]
    assert row["Kind"] == "categories" and row["Shape"] == [750, 450, 300] and pd.isna(row["Min"])
    assert table.set_index("Column").at["drink_price", "In your grid"] == "regressor: log"
    assert table.set_index("Column").at["week", "Kind"] == "time index"
    assert intake.note_order(["b: x", "general", "column 'a' is mostly numbers", "a: y"], ["a", "b"]) == [
        "general",
        "column 'a' is mostly numbers",
        "a: y",
        "b: x",
    ]


def test_notes_with_markdown_in_names_are_shown_as_written() -> None:
    raw = "**big** [x](http://example.invalid),price\n" + "".join(f'"${1000 + 37 * i:,}",{2 + i % 5}\n' for i in range(30))
    at = start()
    upload(at, "names.csv", raw.encode())
    shown = sidebar_captions(at)
    assert "\\*\\*big\\*\\* \\[x\\]\\(http" in shown  # escaped, so no bold text and no link
    assert "**big**" not in shown.replace("\\*", "")
