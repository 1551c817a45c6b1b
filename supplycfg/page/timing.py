"""Timing of the page for ``supplycfg bench``, through Streamlit's AppTest.

``app_first_render_seconds``: the demo page's full first render in a fresh
session with the solve caches emptied (search, charge run, charts included).
``app_change_seconds``: one widget change and its rerun: the rheostat trim of
the curves moved to a value not drawn before, so the curves are recomputed.
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
