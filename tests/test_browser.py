"""A real browser: JupyterLab runs the quickstart notebook and the explorer answers a slider.

Starts JupyterLab on loopback with a token, opens 01-quickstart in Debian's chromium
(driven by playwright, no browser download), runs all cells, moves the deceleration slider
with the keyboard, and checks that a readout and the drawn plot changed (screenshots of the
plot element before and after). Skipped, with the reason, where chromium or playwright is
missing; CI sets TILTWELL_REQUIRE_BROWSER=1 so there it fails instead of skipping.
"""

from __future__ import annotations

import os
import secrets
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from collections.abc import Iterator
from pathlib import Path

import pytest

pytestmark = pytest.mark.slow  # starts JupyterLab and a real browser (make test-fast leaves it out)

CHROMIUM = Path("/usr/bin/chromium")
NOTEBOOK = Path(__file__).resolve().parents[1] / "notebooks" / "01-quickstart.ipynb"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _missing() -> str | None:
    if not CHROMIUM.exists():
        return "Debian's chromium is not installed (apt-get install chromium)"
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "playwright is not installed (pip install playwright; no browser download needed)"
    return None


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@pytest.fixture
def lab(tmp_path: Path) -> Iterator[str]:
    """A JupyterLab server on loopback serving a copy of the quickstart; yields its URL."""
    reason = _missing()
    if reason is not None:
        if os.environ.get("TILTWELL_REQUIRE_BROWSER"):
            pytest.fail(f"browser test required in CI but {reason}")
        pytest.skip(reason)
    shutil.copy(NOTEBOOK, tmp_path / NOTEBOOK.name)
    port, token = _free_port(), secrets.token_hex(16)
    log = open(tmp_path / "lab.log", "w")  # noqa: SIM115 - closed below
    server = subprocess.Popen(
        [sys.executable, "-m", "jupyter", "lab", "--no-browser", "--allow-root", f"--ServerApp.port={port}",
         "--ServerApp.ip=127.0.0.1", f"--IdentityProvider.token={token}", f"--ServerApp.root_dir={tmp_path}",
         "--LabApp.news_url="],
        stdout=log, stderr=subprocess.STDOUT,
    )
    try:
        deadline = time.monotonic() + 120
        while True:
            try:
                urllib.request.urlopen(f"http://127.0.0.1:{port}/api/status?token={token}", timeout=2).close()
                break
            except OSError:
                if time.monotonic() > deadline or server.poll() is not None:
                    pytest.fail("JupyterLab did not start: " + (tmp_path / "lab.log").read_text()[-2000:])
                time.sleep(0.5)
        yield f"http://127.0.0.1:{port}/lab/tree/{NOTEBOOK.name}?token={token}"
    finally:
        server.terminate()
        try:
            server.wait(20)
        except subprocess.TimeoutExpired:
            server.kill()
        log.close()


def test_slider_moves_readout_and_plot(lab: str, tmp_path: Path) -> None:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as driver:
        browser = driver.chromium.launch(executable_path=str(CHROMIUM), args=FLAGS)
        try:
            page = browser.new_page(viewport={"width": 1500, "height": 1400})
            page.goto(lab)
            page.wait_for_selector(".jp-Notebook", timeout=120_000)
            page.wait_for_selector(".jp-Notebook-ExecutionIndicator, .jp-Toolbar", timeout=60_000)
            time.sleep(2)  # let the kernel start
            page.click("text=Run >> nth=0")
            page.click("text=Run All Cells")
            slider = page.locator(".widget-slider", has=page.locator(".widget-label", has_text="deceleration")).first
            slider.wait_for(timeout=300_000)
            readout = page.locator(".tiltwell-readouts").first
            readout.wait_for(timeout=60_000)
            plot = page.locator(".tiltwell-view-phase .bk-Canvas, .tiltwell-view-phase canvas").first
            plot.wait_for(timeout=60_000)
            time.sleep(2)
            text_before, picture_before = readout.inner_text(), plot.screenshot()
            slider.locator(".noUi-handle, .slider-handle, [role=slider]").first.focus()
            for _ in range(8):
                page.keyboard.press("PageUp")
            page.wait_for_function(
                "([el, old]) => el.innerText !== old", arg=[readout.element_handle(), text_before], timeout=60_000)
            time.sleep(2)
            text_after, picture_after = readout.inner_text(), plot.screenshot()
            page.screenshot(path=str(tmp_path / "explorer.png"))
        finally:
            browser.close()
    assert text_after != text_before
    assert picture_after != picture_before
