"""Timing of the page for ``supplycfg bench``, through Streamlit's AppTest.

``app_first_render_seconds``: the demo page's full first render in a fresh
session with the solve caches emptied (search, charge run, charts included).
``app_change_seconds``: one widget change and its rerun: the rheostat trim of
the curves moved to a value not drawn before, so the curves are recomputed.
``browser_render_seconds``: in Debian's chromium, from opening the demo page
to its last chart drawn (the server's caches warm); skipped without chromium.
``browser_floor_seconds``: the same for a bare Streamlit page with a title and
three 20-point line charts, loaded in turn with the demo page in the same
run: what Streamlit and Vega cost on this machine before the page adds
anything.
"""

import statistics
import time
from pathlib import Path

#: Rerun limit of one AppTest run [s]; far above the targets, only a guard.
APP_TIMEOUT_S = 60


def app_path():
    """``app.py`` beside the package (a source checkout or an editable install)."""
    p = Path(__file__).resolve().parents[2] / "app.py"
    if not p.is_file():
        from ..errors import InputError
        raise InputError("bench", "app.py", f"not found at {p}; run the bench from a source checkout")
    return p


def _trim_slider(at):
    for s in at.slider:
        if s.label.startswith("Field rheostat for these curves") or s.label.startswith("Exciter field current"):
            return s
    return None


def time_app(repeat=5):
    """Median first-render and change times of the demo page [s].

    Parameters
    ----------
    repeat : int
        Timed repetitions after one untimed warm-up run.

    Returns
    -------
    dict
        ``{"app_first_render_seconds": float, "app_change_seconds": float}``.
    """
    import streamlit as st
    from streamlit.testing.v1 import AppTest

    path = str(app_path())
    warm = AppTest.from_file(path, default_timeout=APP_TIMEOUT_S).run()
    slider = _trim_slider(warm)
    if slider is not None:
        slider.set_value(slider.min).run()
    first, change = [], []
    for k in range(max(1, int(repeat))):
        st.cache_data.clear()
        t0 = time.perf_counter()
        at = AppTest.from_file(path, default_timeout=APP_TIMEOUT_S).run()
        first.append(time.perf_counter() - t0)
        if at.exception:
            raise RuntimeError(f"the page failed: {at.exception[0].message}")
        slider = _trim_slider(at)
        if slider is None:
            continue
        lo, hi = float(slider.min), float(slider.max)
        value = lo + (hi - lo) * (0.2 + 0.6 * (k + 0.5) / max(1, int(repeat)))
        slider.set_value(value)
        t0 = time.perf_counter()
        at.run()
        change.append(time.perf_counter() - t0)
    return {"app_first_render_seconds": statistics.median(first),
            "app_change_seconds": statistics.median(change) if change else None}


# ---------------------------------------------------------------------------
# the page in a real browser (Debian's chromium through playwright)
# ---------------------------------------------------------------------------

#: Where Debian puts chromium.
CHROMIUM = "/usr/bin/chromium"
#: Launch flags for a headless chromium with no network side traffic.
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
#: Seconds the server gets to answer its health check; only a guard.
START_TIMEOUT_S = 60
#: Longest wait for the page's charts in the browser [ms]; only a guard against a hang.
RENDER_TIMEOUT_MS = 180_000
#: Charts drawn (Vega's ``.marks`` element exists once a chart is rendered) in the page.
RENDERED_CHARTS_JS = "document.querySelectorAll('[data-testid=\"stVegaLiteChart\"] .marks').length"
#: Charts of the demo page on load: the open-circuit characteristic, the battery and the charge run
#: (the cells' charging curves are drawn when asked for).
DEMO_CHARTS = 3


def chromium_path():
    """The chromium executable, or None when it is not installed."""
    import shutil
    found = shutil.which("chromium")
    if found:
        return found
    return CHROMIUM if Path(CHROMIUM).exists() else None


def _free_port():
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


#: The bare page of ``browser_floor_seconds``: a title and three small Vega-Lite line charts.
FLOOR_PAGE = """import streamlit as st
st.title("floor")
for i in range(3):
    st.vega_lite_chart({"data": {"values": [{"x": k, "y": k * k} for k in range(20)]}, "mark": "line",
                        "encoding": {"x": {"field": "x", "type": "quantitative"},
                                     "y": {"field": "y", "type": "quantitative"}}}, key=f"floor{i}")
"""


class PageServer:
    """``streamlit run app.py`` (or ``script``) on loopback in a subprocess, ended on exit
    (``with PageServer() as url``)."""

    def __init__(self, script=None):
        self.proc = None
        self.script = script

    def __enter__(self):
        import os
        import subprocess
        import sys
        import urllib.request
        root = app_path().parent
        script = Path(self.script) if self.script else app_path()
        port = _free_port()
        env = dict(os.environ, PYTHONPATH=str(root) + os.pathsep + os.environ.get("PYTHONPATH", ""))
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "streamlit", "run", str(script), "--server.headless", "true",
             "--server.address", "127.0.0.1", "--server.port", str(port), "--browser.gatherUsageStats", "false"],
            cwd=root, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
        url = f"http://127.0.0.1:{port}"
        deadline = time.monotonic() + START_TIMEOUT_S
        while True:  # poll the health check until it answers (a condition, with a deadline as a guard)
            try:
                with urllib.request.urlopen(url + "/_stcore/health", timeout=2) as r:
                    if r.read().strip() == b"ok":
                        return url
            except OSError:
                pass
            if self.proc.poll() is not None or time.monotonic() > deadline:
                out = self.proc.stdout.read().decode(errors="replace") if self.proc.poll() is not None else ""
                self.__exit__(None, None, None)
                raise RuntimeError(f"streamlit did not start on {url}: {out[-800:]}")
            time.sleep(0.2)

    def __exit__(self, *exc):
        import subprocess
        if self.proc is not None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=10)
            if self.proc.stdout is not None:
                self.proc.stdout.close()
            self.proc = None
        return False


def wait_for_charts(page, count, timeout_ms=RENDER_TIMEOUT_MS):
    """Wait until ``count`` charts are drawn on the page (the condition itself, never a fixed time)."""
    page.wait_for_function(f"() => {RENDERED_CHARTS_JS} >= {int(count)}", timeout=timeout_ms)


def load_and_render_seconds(browser, url, width=1400, height=900, charts=DEMO_CHARTS):
    """Seconds from opening the page in a new tab to its last chart drawn."""
    page = browser.new_page(viewport={"width": width, "height": height})
    try:
        t0 = time.perf_counter()
        page.goto(url)
        wait_for_charts(page, charts)
        return time.perf_counter() - t0
    finally:
        page.close()


def time_browser(repeat=3):
    """Median seconds from load to the last chart in chromium: the demo page and the bare floor page.

    The two pages are loaded in turn, each after one untimed load, so both
    medians come from the same minutes of a noisy machine.

    Returns
    -------
    dict or None
        ``{"browser_render_seconds": float, "browser_floor_seconds": float}``;
        None when chromium or playwright is not installed.
    """
    import tempfile
    exe = chromium_path()
    if exe is None:
        return None
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return None
    page_times, floor_times = [], []
    with tempfile.TemporaryDirectory() as d:
        floor = Path(d) / "floor_page.py"
        floor.write_text(FLOOR_PAGE, encoding="utf-8")
        with PageServer() as url, PageServer(floor) as floor_url, sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=exe, args=CHROMIUM_ARGS)
            try:
                load_and_render_seconds(browser, url)  # warm-up: the server's first run fills its caches
                load_and_render_seconds(browser, floor_url, charts=3)
                for _ in range(max(1, int(repeat))):
                    page_times.append(load_and_render_seconds(browser, url))
                    floor_times.append(load_and_render_seconds(browser, floor_url, charts=3))
            finally:
                browser.close()
    return {"browser_render_seconds": statistics.median(page_times),
            "browser_floor_seconds": statistics.median(floor_times)}
