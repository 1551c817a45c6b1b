"""The page in a real browser: Debian's chromium driven by playwright against ``streamlit run``."""

import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

CHROMIUM = "/usr/bin/chromium"
ROOT = Path(__file__).resolve().parent.parent
#: Launch flags for a headless chromium with no network side traffic.
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
#: Row height of Streamlit's data grid [px] (its default), to click a row's selection box.
ROW_PX = 35
#: Seconds the server gets to answer its health check.
START_TIMEOUT_S = 30

if not Path(CHROMIUM).exists():
    pytest.skip(f"chromium is not installed at {CHROMIUM} (apt-get install -y chromium)", allow_module_level=True)
sync_api = pytest.importorskip("playwright.sync_api", reason="the playwright package is not installed "
                                                            "(pip install playwright; never 'playwright install')")


def _free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def server():
    port = _free_port()
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(
        [sys.executable, "-m", "streamlit", "run", str(ROOT / "app.py"), "--server.headless", "true",
         "--server.address", "127.0.0.1", "--server.port", str(port), "--browser.gatherUsageStats", "false"],
        cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + START_TIMEOUT_S
        while True:
            try:
                with urllib.request.urlopen(url + "/_stcore/health", timeout=2) as r:
                    if r.read().strip() == b"ok":
                        break
            except OSError:
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                out = proc.stdout.read().decode(errors="replace") if proc.poll() is not None else ""
                pytest.fail(f"streamlit did not start on {url}: {out[-800:]}")
            time.sleep(0.2)
        yield url
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()


def _shot(page, path):
    """Screenshot of the whole page: Streamlit scrolls inside its main block, so grow the window to it."""
    height = page.evaluate("() => (document.querySelector('[data-testid=\"stMain\"]') || document.body).scrollHeight")
    size = page.viewport_size
    page.set_viewport_size({"width": size["width"], "height": min(int(height) + 40, 12_000)})
    page.wait_for_timeout(500)
    page.screenshot(path=str(path), full_page=True)
    page.set_viewport_size(size)


def test_page_in_chromium(server, tmp_path):
    """Wait for the options table, move the rheostat trim, check the curves follow, save screenshots."""
    with sync_api.sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 900, "height": 1400}, accept_downloads=True)
            page.goto(server)
            page.wait_for_selector("text=Settings for this job", timeout=30_000)
            # the options table (the machine's point tables sit in a closed expander above it)
            page.locator('[data-testid="stDataFrame"]').last.wait_for(state="visible", timeout=30_000)
            page.wait_for_selector("text=meets every limit", timeout=30_000)
            page.wait_for_selector('[data-testid="stVegaLiteChart"]', timeout=30_000)
            _shot(page, tmp_path / "page.png")

            # a row of the options table picks that option
            table = page.locator('[data-testid="stDataFrame"]').last
            table.scroll_into_view_if_needed()
            box = table.bounding_box()
            page.mouse.click(box["x"] + 18, box["y"] + ROW_PX * 3 + ROW_PX / 2)
            page.wait_for_selector("text=Option 3 in detail", timeout=20_000)

            assert page.get_by_text("Drawn with the rheostat").count() == 0
            thumb = page.get_by_role("slider").first
            thumb.focus()
            for _ in range(5):
                page.keyboard.press("ArrowRight")
            page.wait_for_selector("text=Drawn with the rheostat", timeout=20_000)
            assert page.locator('[data-testid="stVegaLiteChart"]').count() >= 2
            _shot(page, tmp_path / "after-change.png")

            # the printable sheet is built when its button is pressed
            sheet = page.get_by_role("button", name="Setting sheet to print (.html)")
            sheet.scroll_into_view_if_needed()
            with page.expect_download(timeout=30_000) as info:
                sheet.click()
            html = Path(info.value.path()).read_text(encoding="utf-8")
            assert html.startswith("<!DOCTYPE html>") and "Option 3" not in html and "option 3 of" in html
            assert "<svg" in html

            narrow = browser.new_page(viewport={"width": 380, "height": 900})
            narrow.goto(server)
            narrow.wait_for_selector("text=meets every limit", timeout=30_000)
            width = narrow.evaluate("() => document.documentElement.scrollWidth")
            assert width <= 400, f"the page is {width} px wide in a 380 px window"
            _shot(narrow, tmp_path / "narrow.png")
            narrow.emulate_media(media="print")
            assert narrow.locator('[data-testid="stFileUploader"]').first.is_hidden()
            _shot(narrow, tmp_path / "print.png")
        finally:
            browser.close()
    assert (tmp_path / "page.png").stat().st_size > 10_000
    assert (tmp_path / "after-change.png").stat().st_size > 10_000
