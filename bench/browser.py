"""The app in headless Chromium at 1,000,000 rows and on the demo: edit to updated screen.

    .venv/bin/python bench/browser.py                     # 1,000,000 rows (a ~170 MB CSV), 10 toggles
    .venv/bin/python bench/browser.py --rows 100000 --toggles 4 --skip-report

Starts the app (app/main.py) on a free localhost port as ./start-app.sh does, drives Debian's
Chromium through playwright, and times each action from the user's last keystroke or click to
the page's last change: an action is done once the server has said, on the page's websocket, that
the script run it started has finished (a long computation can leave the page still for seconds,
so the look of the page alone is not enough), no progress bar of work on a worker thread is on
the page, and nothing has changed for QUIET_S since; a MutationObserver in the page records the
time of the last change. Figures (seconds):

  demo: a transform toggle in the grid to a new state and back to a seen one; each view opened
  1,000,000 rows (bench/refit.py's invented table written as CSV; 10 regressors, one category):
    upload    the file chosen in the uploader -> first results on screen
    toggles   --toggles edits to new states (each regressor in turn to another transform), then
              the same edits undone one by one (states already seen: results are cached)
    views     each view opened once (first draw), then again (drawn from cached results)
    report    "Prepare the report" -> the download button on screen (--skip-report leaves it out)
  reading     core.intake.reader.read_table against pandas.read_csv of the same file, in this
              process, median of 3 alternating calls

Beside each figure its floor, measured in the same run: for a toggle to a new state the toggle
to a seen state (the same page drawn from a stored result, nothing computed), for a view's first
draw its second. The report has no floor of its own. The server's peak resident memory (VmHWM
of its process) is read at the end. The last line is one JSON object of every figure, with the
keys toggle_p50_s, toggle_p95_s, view_max_s, report_s, upload_s, read_vs_pandas,
demo_toggle_p50_s, demo_view_max_s, peak_rss_mb and rows.

Targets (docs/contract.md §6, the speed issue): at 1,000,000 rows a toggle p50 <= 0.5 s and p95
<= 0.8 s, every view's first draw <= 2 s, the report <= 5 s, the upload <= 4 s, reading <= 2x
pandas; on the demo a toggle p50 <= 0.25 s and a view <= 0.3 s; peak memory < 2 GB.

No timed assertions: this prints what it measures.
"""

from __future__ import annotations

import argparse
import json
import shutil
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

from _common import ROOT, load_line, machine_line, make_data

QUIET_S = 0.4  # nothing changed on the page for this long: the update is done
TIMEOUT_S = 120.0
VIEWS = ["Coefficients", "Effects", "Approx.", "Curves", "Checks", "Compare", "Predict", "Scenarios", "Columns", "Forms"]
FLAGS = [
    "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--disable-quic", "--no-first-run",
]  # fmt: skip
WATCH = """() => {
  window.__changes = 0; window.__last = performance.now();
  new MutationObserver(() => { window.__changes += 1; window.__last = performance.now(); })
    .observe(document.body, {subtree: true, childList: true, characterData: true, attributes: true});
}"""
STATE = "() => [performance.now(), window.__last]"
PROGRESS = '[data-testid="stProgress"]'  # app.jobs' progress bar


# --- the server ----------------------------------------------------------------------------------
def start_server() -> tuple[subprocess.Popen, str]:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    command = [sys.executable, "-m", "streamlit", "run", "app/main.py", "--server.port", str(port),
               "--server.headless", "true", "--browser.gatherUsageStats", "false"]  # fmt: skip
    process = subprocess.Popen(command, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(f"{url}/_stcore/health", timeout=2):
                return process, url
        except OSError:
            time.sleep(0.3)
    process.kill()
    raise SystemExit("the app did not answer within 60 s")


def peak_mb(pid: int) -> float:
    """VmHWM of the server process (its own peak; the browser is another process)."""
    with open(f"/proc/{pid}/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024 / 1e6
    return float("nan")


# --- timing one action ---------------------------------------------------------------------------
VERBOSE = False
# What is typed into a transform cell (its menu words) and the code the cell then holds.
CODES = {"level": "level", "IHS": "ihs", "square root": "sqrt"}


class Runs:
    """The server's own word on its script runs, read from the page's websocket: a run is over
    when the server says it finished, not when the page looks still (a long computation can
    leave the page unchanged for seconds)."""

    def __init__(self) -> None:
        from streamlit.proto.ForwardMsg_pb2 import ForwardMsg

        self._message = ForwardMsg
        self.finished = 0  # runs that finished successfully (whole page or a fragment)
        self.running = False
        self.last_finish = 0.0  # time.monotonic() of the last finished run

    def watch(self, page) -> None:
        page.on("websocket", lambda socket: socket.on("framereceived", self._frame))

    def _frame(self, payload) -> None:
        if isinstance(payload, str):
            return
        message = self._message.FromString(payload)
        kind = message.WhichOneof("type")
        if kind == "session_status_changed":
            self.running = message.session_status_changed.script_is_running
        elif kind == "script_finished":
            finished = self._message.ScriptFinishedStatus
            if message.script_finished in (finished.FINISHED_SUCCESSFULLY, finished.FINISHED_FRAGMENT_RUN_SUCCESSFULLY):
                self.finished += 1
                self.last_finish = time.monotonic()
                self.running = False


RUNS: Runs | None = None


def timed(page, act, done_text: str | None = None, label: str = "") -> float:
    """Seconds from ``act()`` (the last keystroke or click) to the last change of the page, once
    the server has finished the run(s) the action started and the page has been quiet for
    QUIET_S since (and shows ``done_text``)."""
    before = RUNS.finished
    start = page.evaluate("() => performance.now()")
    start_clock = time.monotonic()
    act()
    deadline = time.monotonic() + TIMEOUT_S
    while time.monotonic() < deadline:
        now, last = page.evaluate(STATE)  # also lets playwright deliver the websocket frames
        quiet = time.monotonic() - RUNS.last_finish >= QUIET_S and now - last >= QUIET_S * 1000
        # The page's text is searched only once the server is done and the page still: the browser
        # shares the two cores with the server, and a search of the whole page every 50 ms is
        # the benchmark's own load (during an upload the browser took about 40 % of a core with
        # this loop polling, 31 % with nothing polling).
        if not (RUNS.finished > before and not RUNS.running and quiet):
            time.sleep(0.05)
            continue
        # Work on a worker thread (a long view, the report) shows a progress bar until it is done.
        shown = (done_text is None or page.get_by_text(done_text).count() > 0) and page.locator(PROGRESS).count() == 0
        if shown:
            seconds = max((last - start) / 1000, RUNS.last_finish - start_clock)
            if VERBOSE:
                print(f"    {label}: {seconds:.3f} s", file=sys.stderr)
            return seconds
        time.sleep(0.05)
    page.screenshot(path=str(Path(tempfile.gettempdir()) / "browser-bench-failed.png"))
    raise SystemExit(f"'{label}' did not finish within {TIMEOUT_S:.0f} s (runs finished {RUNS.finished - before})")


def grid_cell(page, row: int, column: int) -> str:
    return page.locator(f"td#glide-cell-{column}-{row}").inner_text()


def edit_cell(page, row: int, column: int, text: str) -> float:
    """Edit one grid cell with the keyboard; the time from the Enter that commits it."""
    for _attempt in range(3):
        box = page.locator('[data-testid="stDataFrame"]').first.bounding_box()
        page.mouse.click(box["x"] + 60, box["y"] + 35 + 17)
        for _ in range(40):  # to the first row, whichever row the grid was scrolled to
            page.keyboard.press("ArrowUp")
        for _ in range(row):
            page.keyboard.press("ArrowDown")
        for _ in range(column):
            page.keyboard.press("ArrowRight")
        page.keyboard.press("Enter")
        time.sleep(0.3)
        page.keyboard.type(text)
        seconds = timed(page, lambda: page.keyboard.press("Enter"), label=f"row {row} to {text}")
        shown = grid_cell(page, row, column).lower()  # the cell's value: a transform's code
        if shown.startswith(text.lower()) or shown == CODES.get(text):
            return seconds
        page.keyboard.press("Escape")
    page.screenshot(path=str(Path(tempfile.gettempdir()) / "browser-bench-failed.png"))
    raise SystemExit(f"the grid did not take '{text}' in row {row}: it shows '{grid_cell(page, row, column)}'")


def open_view(page, name: str) -> float:
    return timed(page, lambda: page.get_by_role("radio", name=name, exact=True).first.click(), label=f"view {name}")


# --- the runs ------------------------------------------------------------------------------------
def regressor_rows(page, wanted: int) -> list[tuple[int, str]]:
    """(grid row, transform as the grid shows it) of up to ``wanted`` numeric regressors."""
    out = []
    for row in range(1, 40):
        if page.locator(f"td#glide-cell-2-{row}").count() == 0:
            break
        role, shown = grid_cell(page, row, 2), grid_cell(page, row, 3)
        if role == "regressor" and not shown.startswith("category"):
            out.append((row, shown))
        if len(out) == wanted:
            break
    return out


def toggles(page, count: int) -> tuple[list[float], list[float]]:
    """``count`` edits to new states (each numeric regressor in turn to another transform: level,
    or IHS for one in levels; a second round on to square root or level), then the same edits
    undone one by one, back through states already seen."""
    rows = regressor_rows(page, count)
    if not rows:
        raise SystemExit("no numeric regressor to toggle")
    fresh, seen, undo = [], [], []
    current = dict(rows)
    for i in range(count):
        row = rows[i % len(rows)][0]
        before = current[row]
        if i < len(rows):
            after = "IHS" if before.startswith("level") else "level"
        else:
            after = "square root" if not before.startswith("square") else "level"
        fresh.append(edit_cell(page, row, 3, after))
        current[row] = grid_cell(page, row, 3)
        undo.append((row, before))
    for row, before in reversed(undo):
        seen.append(edit_cell(page, row, 3, before))
    return fresh, seen


def views(page) -> tuple[dict[str, float], dict[str, float]]:
    first, again = {}, {}
    for name in VIEWS[1:] + VIEWS[:1]:
        first[name] = open_view(page, name)
    for name in VIEWS[1:] + VIEWS[:1]:
        again[name] = open_view(page, name)
    return first, again


def percentile(values: list[float], share: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, round(share * (len(ordered) - 1)))]


def reading_ratio(path: Path) -> tuple[float, float]:
    import pandas as pd

    from core.intake.reader import read_table

    ours, theirs = [], []
    read_table(path)
    for _ in range(3):
        start = time.perf_counter()
        read_table(path)
        ours.append(time.perf_counter() - start)
        start = time.perf_counter()
        pd.read_csv(path)
        theirs.append(time.perf_counter() - start)
    return statistics.median(ours), statistics.median(theirs)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--toggles", type=int, default=10)
    parser.add_argument("--skip-report", action="store_true")
    parser.add_argument("--verbose", action="store_true", help="print each action's time as it is measured")
    args = parser.parse_args()
    global VERBOSE
    VERBOSE = args.verbose
    from playwright.sync_api import sync_playwright

    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if not chromium:
        raise SystemExit("needs Debian's chromium (apt-get install chromium)")
    print(machine_line())
    print(load_line())
    folder = Path(tempfile.mkdtemp(prefix="formwise-browser-"))
    path = folder / f"invented_{args.rows}.csv"
    make_data(args.rows).to_csv(path, index=False)
    print(f"wrote {path.name}: {args.rows:,} rows, {path.stat().st_size / 1e6:,.0f} MB")
    ours, theirs = reading_ratio(path)
    process, url = start_server()
    out: dict = {"rows": args.rows}
    try:
        with sync_playwright() as driver:
            browser = driver.chromium.launch(executable_path=chromium, args=FLAGS, headless=True)
            page = browser.new_page(viewport={"width": 1440, "height": 1000})
            global RUNS
            RUNS = Runs()
            RUNS.watch(page)
            page.goto(url)
            page.get_by_text("What it means").first.wait_for(timeout=120_000)
            time.sleep(1.0)
            page.evaluate(WATCH)
            demo_fresh, demo_seen = toggles(page, 4)
            demo_first, demo_again = views(page)
            choose = lambda: page.locator('input[type="file"]').first.set_input_files(str(path))  # noqa: E731
            upload = timed(page, choose, f"data: {path.name}", "upload")
            big_fresh, big_seen = toggles(page, args.toggles)
            big_first, big_again = views(page)
            report = None
            if not args.skip_report:
                report = timed(
                    page,
                    lambda: page.get_by_role("button", name="Prepare the report").click(),
                    "Download the report (HTML)",
                    "report",
                )
            browser.close()
        out["peak_rss_mb"] = peak_mb(process.pid)
    finally:
        process.kill()
        shutil.rmtree(folder, ignore_errors=True)
    run = {
        "demo_fresh": demo_fresh, "demo_seen": demo_seen, "demo_first": demo_first, "demo_again": demo_again,
        "upload": upload, "big_fresh": big_fresh, "big_seen": big_seen, "big_first": big_first,
        "big_again": big_again, "report": report, "ours": ours, "theirs": theirs,
    }  # fmt: skip
    print_figures(args, out, run)


def print_figures(args, out: dict, run: dict) -> None:
    def line(what: str, value: float | None, floor: str = "") -> None:
        shown = "not run" if value is None else f"{value:.3f} s"
        print(f"  {what:<46} {shown:>10}   {floor}")

    print("\nDemo (1,500 rows):")
    line(
        "toggle to a new state, p50",
        statistics.median(run["demo_fresh"]),
        f"floor (seen state) p50 {statistics.median(run['demo_seen']):.3f} s",
    )
    for name in VIEWS:
        line(f"view {name}, first draw", run["demo_first"][name], f"floor (drawn again) {run['demo_again'][name]:.3f} s")
    print(f"\n{args.rows:,} rows:")
    line("upload to first results", run["upload"])
    fresh, seen = run["big_fresh"], run["big_seen"]
    line(
        f"toggle to a new state, p50 of {len(fresh)}",
        statistics.median(fresh),
        f"floor (seen state) p50 {statistics.median(seen):.3f} s",
    )
    line(f"toggle to a new state, p95 of {len(fresh)}", percentile(fresh, 0.95), f"floor p95 {percentile(seen, 0.95):.3f} s")
    for name in VIEWS:
        line(f"view {name}, first draw", run["big_first"][name], f"floor (drawn again) {run['big_again'][name]:.3f} s")
    line("report prepared", run["report"], "no floor of its own")
    print(f"reading: read_table {run['ours']:.3f} s, pandas.read_csv {run['theirs']:.3f} s: {run['ours'] / run['theirs']:.2f}x")
    print(f"server peak memory {out['peak_rss_mb']:,.0f} MB")
    out.update(
        toggle_p50_s=statistics.median(fresh),
        toggle_p95_s=percentile(fresh, 0.95),
        toggle_seen_p50_s=statistics.median(seen),
        view_max_s=max(run["big_first"].values()),
        view_floor_max_s=max(run["big_again"].values()),
        report_s=run["report"],
        upload_s=run["upload"],
        read_vs_pandas=run["ours"] / run["theirs"],
        demo_toggle_p50_s=statistics.median(run["demo_fresh"]),
        demo_view_max_s=max(run["demo_first"].values()),
        views={name: run["big_first"][name] for name in VIEWS},
    )  # fmt: skip
    print(json.dumps(out))


if __name__ == "__main__":
    main()
