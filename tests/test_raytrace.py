"""The ray tracer of self-excited characteristics on a variable-speed drive, on curves known in closed form."""

import numpy as np
from numpy.testing import assert_allclose

from supplycfg import raytrace
from supplycfg.circuit import refine_bracketed_roots


def ellipse_state(v0, i0):
    """``h = 1 - (V/v0)^2 - (IL/i0)^2`` [per unit]: positive inside the quarter ellipse, the curve its edge."""
    def state(rows, v, il):
        v, il = np.broadcast_arrays(np.asarray(v, float), np.asarray(il, float))
        return {"h": 1.0 - (v / v0) ** 2 - (il / i0) ** 2, "terminal_voltage_v": v, "load_current_a": il}
    return state


def test_rays_land_on_a_quarter_ellipse(monkeypatch):
    """Every sample lies on the ellipse (closed form), from no load (V = v0) to short circuit (IL = i0),
    whether the second pass finds it near its first-pass neighbours or on the whole ray."""
    v0, i0 = 120.0, 300.0
    near = raytrace.crossings_near
    found = []

    def spy(*a):
        root, ok = near(*a)
        found.append(ok.sum())
        return root, ok

    monkeypatch.setattr(raytrace, "crossings_near", spy)
    states, notes = raytrace.trace_on_rays(ellipse_state(v0, i0), refine_bracketed_roots, np.array([0]),
                                           np.array([2 * v0]), 2 * i0, 100.0, 200.0, 160)
    st = states[0]
    v, il = st["terminal_voltage_v"], st["load_current_a"]
    assert v.size == 160
    assert_allclose((v / v0) ** 2 + (il / i0) ** 2, 1.0, rtol=0, atol=1e-9)
    assert_allclose([v[0], il[-1]], [v0, i0], rtol=1e-9)
    assert np.all(np.diff(il) > 0)  # in order along the curve
    assert notes[0] == ""
    assert found and found[0] >= 150  # the short window did the work


def test_second_pass_near_window_agrees_with_the_whole_ray(monkeypatch):
    """The second pass's short window (speed) finds the same crossings as a grid along the whole ray."""
    def bumpy(rows, v, il):
        v, il = np.broadcast_arrays(np.asarray(v, float), np.asarray(il, float))
        r = np.hypot(v / 100.0, il / 200.0)
        th = np.arctan2(v / 100.0, il / 200.0)
        return {"h": 1.0 + 0.3 * np.sin(5 * th) - r, "terminal_voltage_v": v, "load_current_a": il}

    args = (bumpy, refine_bracketed_roots, np.array([0]), np.array([400.0]), 800.0, 100.0, 200.0, 120)
    fast, _ = raytrace.trace_on_rays(*args)
    monkeypatch.setattr(raytrace, "crossings_near",
                        lambda state_fn, refine, rows, *a: (np.full(rows.size, np.nan), np.zeros(rows.size, bool)))
    whole, _ = raytrace.trace_on_rays(*args)
    assert_allclose(fast[0]["terminal_voltage_v"], whole[0]["terminal_voltage_v"], rtol=1e-10, atol=1e-9)
    assert_allclose(fast[0]["load_current_a"], whole[0]["load_current_a"], rtol=1e-10, atol=1e-9)


def test_samples_about_evenly_spaced_with_as_many_first_rays_as_samples():
    """With a first pass of max(FIRST_RAYS, points) rays, the samples still lie on the curve (closed form) and
    their spacing along it stays within 1.5 x its median on a smooth curve (a quarter ellipse of 10:1 axes; measured
    1.04-1.10; a curve with a corner, where the polyline cuts across, measured up to 2)."""
    v0, i0 = 100.0, 200.0
    for points in (60, 160, 400):
        states, _ = raytrace.trace_on_rays(ellipse_state(v0, i0 / 10), refine_bracketed_roots, np.array([0]),
                                           np.array([2 * v0]), 2 * i0, 100.0, 200.0, points)
        v, il = states[0]["terminal_voltage_v"], states[0]["load_current_a"]
        assert v.size == points
        assert_allclose((v / v0) ** 2 + (il / (i0 / 10)) ** 2, 1.0, rtol=0, atol=1e-9)
        d = np.hypot(np.diff(v) / 100.0, np.diff(il) / 200.0)
        assert d.max() <= 1.5 * np.median(d)
