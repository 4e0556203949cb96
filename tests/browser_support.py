"""Shared pieces for the end-to-end tests: a Formwise server on a free localhost port and
Debian's Chromium driven through playwright."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SCREENSHOTS = ROOT / "tests" / "screenshots"
CHROMIUM_FLAGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-dev-shm-usage",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-quic",
    "--no-first-run",
]


def chromium_path() -> str:
    """Debian's Chromium; fail in CI, skip with instructions on a laptop without it."""
    for candidate in ("chromium", "chromium-browser"):
        found = shutil.which(candidate)
        if found:
            return found
    message = "browser tests need Debian's Chromium: run 'sudo apt-get install chromium' to enable them"
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail(message)
    pytest.skip(message)


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


@contextmanager
def formwise_server(extra_args: tuple[str, ...] = ()) -> Iterator[str]:
    """Start the app as a user would (the repo's .streamlit/config.toml applies)."""
    port = free_port()
    command = [
        sys.executable, "-m", "streamlit", "run", "app/main.py",
        "--server.port", str(port), "--server.headless", "true", "--browser.gatherUsageStats", "false",
        *extra_args,
    ]  # fmt: skip
    process = subprocess.Popen(command, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            if process.poll() is not None:
                raise RuntimeError(f"the app exited early: {process.stderr.read() if process.stderr else ''}")
            try:
                with urllib.request.urlopen(f"{url}/_stcore/health", timeout=2) as answer:
                    if answer.status == 200:
                        break
            except OSError:
                time.sleep(0.3)
        else:
            raise RuntimeError("the app did not answer within 60 s")
        yield url
    finally:
        process.terminate()
        try:
            process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
