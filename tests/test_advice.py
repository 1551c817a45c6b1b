"""Advice a technician can set and trust (issue 10): readings and bands, the welding dial, the
stated ranking, cautions on every command, readable files and text.

Independent re-solves use the engine's all-intersections solver ``operating_points`` at every
speed and winding-temperature corner, against limits written out here from their sources:
the IEC 60974-1 conventional load line U = 20 + 0.04 I for manual metal arc and 113 V peak
no-load for DC (seen); 100 V mean for manual welding under US 29 CFR 1910.254(b)(3) (seen);
about 50 V no-load to strike a manual metal arc (electrode makers' practice, from memory);
drooping at least 0.10 V/A (common practice); the lighting band nominal +- tolerance (the
person's input, common practice).
"""

import json
import math
import re
import tomllib
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from supplycfg import cli
from supplycfg.cautions import GOVERNOR_BAND_FRACTION, caution, drive_cautions, setting_cautions
from supplycfg.circuit import Load, Setting, check_setting, operating_points
from supplycfg.jobs import command_cautions, welding
from supplycfg.jobs import option_cautions as job_option_cautions
from supplycfg.machine import load_machine, machine_from_dict
from supplycfg.profile import load_profile, profile_from_dict
from supplycfg.readings import (bisection_grid_point, bisection_tree, control_band, diverter_rating,
                                exciter_field_current_max_a,
                                preferred_resistance_ohm, readings_and_band, round_to, rounded_band,
                                settable_step)
from supplycfg.search import Option, margin_steps, merge_identical, rank_options, search

try:
    from .builders import DEMOS, LOADS, MACHINES, ROOT, demo
except ImportError:
    from builders import DEMOS, LOADS, MACHINES, ROOT, demo
#: Relative slack of a re-solve with another solver at a band's exact end.
SLACK = 1e-5


def corners(machine, profile):
    temps = profile.temperatures_c or (machine.reference_temperature_c,)
    speeds = list(profile.speeds_rpm)
    if len(speeds) == 2:
        speeds.insert(1, 0.5 * sum(speeds))
    return [(float(s), float(t)) for s in speeds for t in temps]


def normal(machine, setting, load, drive=None):
    pt = operating_points(machine, setting, load, drive).normal
    assert pt is not None, (setting, load)
    return pt


# ---------------------------------------------------------------------------
# rounding to what can be set
# ---------------------------------------------------------------------------

def test_settable_step_three_figures_or_coarser():
    """At most 3 significant figures; coarser where the band is wide (at least 5 steps across it)."""
    assert settable_step(48.61) == pytest.approx(0.1)
    assert settable_step(48.61, band_width=10.0) == pytest.approx(1.0)
    assert settable_step(0.00612) == pytest.approx(1e-5)
    assert settable_step(1.234, band_width=0.001) == pytest.approx(0.01)   # never finer than 3 figures


@settings(max_examples=300, deadline=None)
@given(st.floats(0.01, 500.0), st.floats(0.0, 1.0), st.floats(0.001, 0.5))
def test_rounded_readings_lie_inside_the_band(centre, where, half_width):
    """A reading rounded to what can be set lies inside its band, rounded inward (issue 10)."""
    lo, hi = centre * (1 - half_width), centre * (1 + half_width)
    value = lo + where * (hi - lo)
    v, (rlo, rhi), step, ok = rounded_band(lo, hi, value)
    if ok:
        assert lo - 1e-12 <= rlo <= v <= rhi <= hi + 1e-12
        assert abs(v - value) <= step * (1 + 1e-9)
        assert v == pytest.approx(round_to(v, step))


def test_readings_dict_keys():
    """JSON keys of issue 10: readings (field current cold/hot, rheostat, travel) and band."""
    r, b = readings_and_band("rheostat", 48.613, 1.2134, 1.1301, (40.2, 57.3), (1.02, 1.35), 150.0)
    assert set(r) >= {"field_current_a", "rheostat_ohm", "rheostat_travel_percent"}
    assert set(r["field_current_a"]) == {"cold", "hot"}
    assert b["rheostat_ohm"][0] <= r["rheostat_ohm"] <= b["rheostat_ohm"][1]
    assert b["field_current_a"][0] <= r["field_current_a"]["hot"] <= r["field_current_a"]["cold"] <= b["field_current_a"][1]
    assert r["rheostat_ohm"] == 49.0 and r["rheostat_travel_percent"] == pytest.approx(32.7)
    assert b["control_exact"] == [40.2, 57.3]
    assert readings_and_band("none", float("nan"), None, None) == (None, None)


def test_control_band_finds_the_interval():
    """Scan and bisection find [2, 7] for a margin that holds there, from any point inside."""
    def margin_of(k, u):
        return np.minimum(u - 2.0, 7.0 - u) / 10.0
    lo, hi = control_band(margin_of, np.array([3.0, 6.5, 9.0]), 0.0, 10.0)
    assert_allclose(lo[:2], 2.0, atol=1e-4) and assert_allclose(hi[:2], 7.0, atol=1e-4)
    assert np.isnan(lo[2]) and np.isnan(hi[2])


def _halving_one_per_call(margin_of, u0, lo, hi, scan, steps):
    """The band as the bisection method states it: each end on its own, one halving per call."""
    u0 = np.asarray(u0, float)
    out = []
    for end in (lo, hi):
        edge = np.full(u0.size, np.nan)
        for i, u in enumerate(u0):
            if not margin_of(np.array([i]), np.array([u]))[0] >= 0:
                continue
            pts = u + (end - u) * (np.arange(1, scan + 1) / scan)
            ok = margin_of(np.full(scan, i), pts) >= 0
            if ok.all():
                edge[i] = end
                continue
            first = int(np.argmin(ok))
            a, b = (pts[first - 1] if first else u), pts[first]
            for _ in range(steps):
                mid = 0.5 * (a + b)
                a, b = (mid, b) if margin_of(np.array([i]), np.array([mid]))[0] >= 0 else (a, mid)
            edge[i] = a
        out.append(edge)
    return np.fmin(*out), np.fmax(*out)


@pytest.mark.parametrize("per_round", [1, 2, 3, 5])
def test_control_band_with_several_halvings_per_call_is_exact(per_round):
    """Several halvings per call (every point they may visit at once) give bit for bit the edges of
    halving one step per call (closed form: bisection of a bracket; a margin that holds on two
    separate stretches, so the scan matters too)."""
    calls = []

    def margin_of(k, u):
        calls.append(len(k))
        u = np.asarray(u, float)
        shift = 0.37 * np.asarray(k, float)
        return np.maximum(np.minimum(u - 2.0 - shift, 7.1 - u), np.minimum(u - 8.3, 9.6 - u)) / 10.0

    u0 = np.array([3.0, 6.5, 9.0, 1.0, 8.5, np.nan])
    lo, hi = control_band(margin_of, u0, 0.0, 10.0, scan=6, steps=11, per_round=per_round)
    ref_lo, ref_hi = _halving_one_per_call(margin_of, u0, 0.0, 10.0, 6, 11)
    np.testing.assert_array_equal(lo, ref_lo)
    np.testing.assert_array_equal(hi, ref_hi)
    calls.clear()
    control_band(margin_of, u0, 0.0, 10.0, scan=6, steps=11, per_round=per_round)
    assert len(calls) == 1 + -(-11 // per_round)


def test_bisection_grid_point_is_the_halving_number():
    """Every point of the grid of ``depth`` halvings, computed as a halving reaches it (closed form:
    the bisection tree's nodes, in heap order, are the grid's odd multiples level by level)."""
    a, b, depth = np.array([3.0, 0.1]), np.array([0.7, 9.3]), 5
    tree = bisection_tree(a, b, depth)
    top = 2 ** depth
    for level in range(depth):
        for pos in range(2 ** level):
            k = (2 * pos + 1) * (top >> (level + 1))
            np.testing.assert_array_equal(bisection_grid_point(a, b, np.full(2, k), depth),
                                          tree[:, 2 ** level - 1 + pos])
    np.testing.assert_array_equal(bisection_grid_point(a, b, np.array([0, top]), depth), [3.0, 9.3])


def test_bisection_grid_point_is_the_halving_number_at_any_depth():
    """As above for brackets of any scale and direction and depths 0 to 10 (closed form: the bisection
    tree's nodes); a point outside the grid is NaN, and a scalar bracket takes the points' shape."""
    rng = np.random.default_rng(3)
    for trial in range(60):
        depth = int(rng.integers(0, 11))
        top = 2 ** depth
        a = rng.normal(size=2) * 10.0 ** rng.integers(-3, 4)
        b = a + rng.normal(size=2) * 10.0 ** rng.integers(-6, 3)
        tree = bisection_tree(a, b, depth)
        for level in range(depth):
            for pos in range(2 ** level):
                k = (2 * pos + 1) * (top >> (level + 1))
                np.testing.assert_array_equal(bisection_grid_point(a, b, np.full(2, k), depth),
                                              tree[:, 2 ** level - 1 + pos])
        np.testing.assert_array_equal(bisection_grid_point(a, b, np.array([0, top]), depth), [a[0], b[1]])
        assert np.isnan(bisection_grid_point(a, b, np.array([-1, top + 1]), depth)).all()
        ks = np.arange(top + 1)
        one = bisection_grid_point(a[0], b[0], ks, depth)
        assert one.shape == ks.shape
        np.testing.assert_array_equal(one, bisection_grid_point(np.full(ks.size, a[0]), np.full(ks.size, b[0]),
                                                                ks, depth))


def _two_limits(calls):
    """Two limits per candidate: a rising line and a falling exponential (the edges 2 + 0.37 k and
    7 - ln(1 + 0.1 k), closed forms), with their smallest as the margin when asked for one row."""
    def margin_of(k, u, rows=True):
        calls.append(len(k))
        u = np.asarray(u, float)
        k = np.asarray(k, float)
        m = np.vstack([(u - 2.0 - 0.37 * k) / 10.0, 1.0 + 0.1 * k - np.exp(u - 7.0)])
        return m if rows else m.min(axis=0)
    return margin_of


@pytest.mark.parametrize("scan,steps", [(6, 11), (4, 10), (8, 18), (1, 12)])
def test_control_band_guided_by_roots_gives_the_halving_edges(scan, steps):
    """``refine="root"`` gives bit for bit the edges of halving (closed form: each limit breaks once),
    per limit or from the smallest margin alone; the margins at ``u0`` may be given."""
    calls = []
    margin_of = _two_limits(calls)
    u0 = np.array([3.0, 6.5, 4.0, 1.0, 8.5, np.nan, 2.5])
    ref = control_band(lambda k, u: margin_of(k, u, rows=False), u0, 0.0, 10.0, scan=scan, steps=steps)
    for rows in (True, False):
        calls.clear()
        got = control_band(lambda k, u: margin_of(k, u, rows), u0, 0.0, 10.0, scan=scan, steps=steps,
                           refine="root")
        np.testing.assert_array_equal(got[0], ref[0])
        np.testing.assert_array_equal(got[1], ref[1])
    known = margin_of(np.arange(u0.size), np.nan_to_num(u0))
    got = control_band(margin_of, u0, 0.0, 10.0, scan=scan, steps=steps, refine="root", m0=known)
    np.testing.assert_array_equal(got[0], ref[0])
    np.testing.assert_array_equal(got[1], ref[1])


def test_battery_bands_guided_by_roots_are_the_halving_bands():
    """The battery demo's bands of the main charge's and of the finish's field, found by the guided
    search, are bit for bit those of halving (the method the bands state), in fewer calls."""
    from supplycfg.envelope import build_space
    from supplycfg.jobs import battery
    from supplycfg import readings
    m, p = (load_machine(MACHINES / "charging-set.toml"), load_profile(LOADS / "battery-charging.toml"))
    space = build_space(m, p)
    seen = {}
    real = readings.control_band

    def recording(margin_of, *args, **kw):
        calls = []

        def counted(k, u):
            calls.append(len(k))
            return margin_of(k, u)
        out = real(counted, *args, **kw)
        seen.setdefault(kw.get("refine", "bisection"), []).append((out, len(calls)))
        return out

    try:
        readings.control_band = recording
        battery.solve(space)
        plan = battery.charge_plan(space)
        lim, _, _ = battery.plan_figures(plan)
        readings.option_advice(space, battery.evaluate_limits, plan.u1, lim, battery.start_setting_field, scan=4,
                               steps=10)
    finally:
        readings.control_band = real
    (guided, n_guided), _ = seen["root"]
    [(halved, n_halved)] = seen["bisection"]
    assert np.isfinite(guided[0]).sum() >= 4
    np.testing.assert_array_equal(guided[0], halved[0])
    np.testing.assert_array_equal(guided[1], halved[1])
    assert n_guided < n_halved


def test_control_band_guided_by_roots_halves_where_points_contradict_one_crossing():
    """A margin broken in a narrow hole inside the bracket (closed form: the hole 5.078 +- 0.01 lies on
    a grid point the guided search evaluates first, the edge at 6): a point that breaks before one that
    holds sends that edge back to halving, which never visits the hole, so the edges are halving's."""
    def margin_of(k, u):
        u = np.asarray(u, float)
        return np.minimum(6.0 - u, np.abs(u - 5.078125) - 0.01) / 10.0

    u0 = np.array([5.0])
    ref = control_band(margin_of, u0, 4.999, 10.0, scan=4, steps=10)
    got = control_band(margin_of, u0, 4.999, 10.0, scan=4, steps=10, refine="root")
    assert_allclose(ref[1], 6.0, atol=2e-3)
    np.testing.assert_array_equal(got[0], ref[0])
    np.testing.assert_array_equal(got[1], ref[1])


def test_control_band_guided_by_roots_with_a_second_stretch():
    """Where the scan separates two stretches that hold (closed form: bisection of a bracket), the
    guided edges are those of halving too."""
    def margin_of(k, u):
        u = np.asarray(u, float)
        shift = 0.37 * np.asarray(k, float)
        return np.maximum(np.minimum(u - 2.0 - shift, 7.1 - u), np.minimum(u - 8.3, 9.6 - u)) / 10.0

    u0 = np.array([3.0, 6.5, 9.0, 1.0, 8.5, np.nan])
    ref = control_band(margin_of, u0, 0.0, 10.0, scan=6, steps=11)
    got = control_band(margin_of, u0, 0.0, 10.0, scan=6, steps=11, refine="root")
    np.testing.assert_array_equal(got[0], ref[0])
    np.testing.assert_array_equal(got[1], ref[1])


def test_preferred_diverter_values():
    """Diverters are E12 preferred values (IEC 60063, seen), with a 1-2-5 power rating."""
    assert preferred_resistance_ohm(0.006) == 0.0056
    assert preferred_resistance_ohm(0.0125) == 0.012
    m = load_machine(MACHINES / "welding-set.toml")
    d = diverter_rating(m, 12.0, 0.0056, 180.0, 75.0)
    # Kosow Ex 3-8 current division: I_div = I rse / (rse + Rd)
    assert_allclose(d["current_a"], 180.0 * 0.012 / (0.012 + 0.0056), rtol=1e-3)
    assert d["rating_w"] >= 1.5 * d["power_w"]


# ---------------------------------------------------------------------------
# bands re-solved independently
# ---------------------------------------------------------------------------

def lighting_margin(m, p, setting):
    """Smallest margin (fraction) of the lighting limits, re-solved at every corner and 5 currents."""
    j = p.lighting
    lo, hi = j.nominal_voltage_v * (1 - j.tolerance_percent / 100), j.nominal_voltage_v * (1 + j.tolerance_percent / 100)
    worst = math.inf
    for sp, tc in corners(m, p):
        for il in np.linspace(*j.load_current_a, 5):
            pt = operating_points(m, replace(setting, speed_rpm=sp, winding_temperature_c=tc),
                                  Load.constant_current(float(il))).normal
            if pt is None:
                return -math.inf
            vf = pt["terminal_voltage_v"] - il * j.feeder_resistance_ohm
            worst = min(worst, (hi - vf) / hi, (vf - lo) / lo,
                        (m.rated_armature_current_a - abs(pt["armature_current_a"])) / m.rated_armature_current_a)
    return worst


def test_lighting_band_ends_resolved():
    """Every feasible lighting option with a band: at each exact end every limit holds at every corner;
    a step of 0.5 % of the rheostat's range outside it breaks one (unless the end is the range's end)."""
    m, p, res = demo("lighting")
    checked = 0
    for o in res.feasible[:4]:
        if o.band is None:
            continue
        a, b = o.band["control_exact"]
        assert a <= o.setting.rheostat_ohm <= b
        assert o.band["rheostat_ohm"][0] <= o.readings["rheostat_ohm"] <= o.band["rheostat_ohm"][1]
        step = 5e-3 * m.rheostat_max_ohm
        for end, out in ((a, a - step), (b, b + step)):
            assert lighting_margin(m, p, replace(o.setting, rheostat_ohm=end)) >= -SLACK
            if 0 < out < m.rheostat_max_ohm:
                assert lighting_margin(m, p, replace(o.setting, rheostat_ohm=out)) < 0
        checked += 1
    assert checked >= 1


def test_battery_band_ends_resolved():
    """Battery (best option): at the band's exact ends the start current on the open-circuit line
    stays within the profile's [min, max] and the no-load voltage 5 % above the full bank at every
    corner (the limits that bind in the demo); a step outside breaks a limit of the search. The demo's
    motor sets the speed of the loaded points (re-solved with the same drive)."""
    m, p, res = demo("battery")
    o = res.feasible[0]
    b = p.battery
    from supplycfg.jobs import battery
    e0 = b.cells * float(battery.open_circuit_voltage_per_cell(b.chemistry, b.state_of_charge[0],
                                                              b.open_circuit_voltage_per_cell_v))
    line = Load.battery(e0, b.internal_resistance_ohm + b.cable_resistance_ohm)

    def start_currents(r):
        return [normal(m, replace(o.setting, rheostat_ohm=r, speed_rpm=sp, winding_temperature_c=tc), line,
                       p.drive)["load_current_a"] for sp, tc in corners(m, p)]

    a, z = o.band["control_exact"]
    for end in (a, z):
        cur = start_currents(end)
        assert max(cur) <= b.max_charge_current_a * (1 + SLACK)
        assert min(cur) >= b.min_charge_current_a * (1 - 1e-3)   # the charging-curve start is checked too
    # a step outside: the search's own evaluation of the limits breaks
    from supplycfg.envelope import build_space, smallest_margin_fraction
    space = build_space(m, p)
    i = next(k for k, base in enumerate(space.bases) if base[:3] == (o.setting.connection, o.setting.series_turns or 0.0,
                                                                     o.setting.diverter_ohm))
    step = 5e-3 * m.rheostat_max_ohm
    for out in (a - step, z + step):
        if 0 < out < m.rheostat_max_ohm:
            lim, _ = battery.evaluate(space, np.array([i]), np.array([out]))
            assert smallest_margin_fraction(lim)[0] < 0


def test_battery_finish_stage_readings_and_band_resolved():
    """Battery (best option, a two-stage plan): the finish carries its own readings and band (issue 10:
    "each stage in plan carries its own"); the plan re-solved with the finish's field at either exact
    end of its band keeps every limit, a step outside breaks one, and the finish's rheostat reading
    lies inside its band (rounded inward)."""
    m, p, res = demo("battery")
    o = res.feasible[0]
    stages = o.extras["plan"]
    assert len(stages) == 2
    assert stages[0]["readings"] == o.readings and stages[0]["band"] == o.band
    fin = stages[1]
    r, b = fin["readings"], fin["band"]
    lo, hi = b["rheostat_ohm"]
    assert lo <= r["rheostat_ohm"] <= hi
    assert b["field_current_a"][0] <= r["field_current_a"]["hot"] <= r["field_current_a"]["cold"] <= b["field_current_a"][1]
    from supplycfg.envelope import build_space, smallest_margin_fraction
    from supplycfg.jobs import battery
    space = build_space(m, p)
    i = next(k for k, base in enumerate(space.bases) if base[:3] == (o.setting.connection, o.setting.series_turns or 0.0,
                                                                     o.setting.diverter_ohm))
    u1 = np.array([o.setting.rheostat_ohm])

    def margin(u2):
        lim, _, _ = battery.plan_figures(battery.charge_plan(space, np.array([i]), u1, np.array([u2])))
        return smallest_margin_fraction(lim)[0]

    a, z = b["control_exact"]
    assert a < fin["setting"]["rheostat_ohm"] < z
    for end in (a, z):
        assert margin(end) >= -SLACK
    step = 5e-3 * m.rheostat_max_ohm
    for out in (a - step, z + step):
        assert margin(out) < 0


# ---------------------------------------------------------------------------
# the welding dial, re-solved
# ---------------------------------------------------------------------------

def row_setting(o, row, key=None):
    key = key or ("field_current_a" if row["rheostat_ohm"] is None else "rheostat_ohm")
    return replace(o.setting, series_turns=row["series_turns"], diverter_ohm=row["diverter_ohm"], **{key: row[key]})


def row_holds(m, p, st_, target):
    """Smallest margin of one dial row, re-solved: current on the line within 3 % at the nominal
    corner, no-load voltage inside the window at every corner, drooping at the working point. The
    profile's drive turns the machine: the working point at the speed it falls to, the no-load
    voltage at its no-load speed."""
    j = p.welding
    line = Load.line(20.0, 0.04 + j.cable_resistance_ohm)
    nominal = (0.5 * sum(p.speeds_rpm), max(p.temperatures_c))
    pt = normal(m, replace(st_, speed_rpm=nominal[0], winding_temperature_c=nominal[1]), line, p.drive)
    ms = [(0.03 - abs(pt["load_current_a"] / target - 1)) / 0.03]
    for sp, tc in corners(m, p):
        v0 = normal(m, replace(st_, speed_rpm=sp, winding_temperature_c=tc), Load.constant_current(0.0))["terminal_voltage_v"]
        ms += [(113.0 - 1.05 * v0) / 113.0, (j.max_no_load_voltage_v - v0) / j.max_no_load_voltage_v,
               (v0 - j.min_no_load_voltage_v) / j.min_no_load_voltage_v]
    return min(ms)


def test_demo_welding_dial_rows_resolved():
    """Every row of the best welding options: the current on the IEC 60974-1 line within 3 % at the
    nominal corner and the no-load voltage between 50 V (to strike) and 100 V mean / 113 V peak at
    every corner; the low end of the dial strikes an arc."""
    m, p, res = demo("welding")
    for o in res.feasible[:3]:
        dial = o.extras["dial"]
        assert [r["current_a"] for r in dial] == list(np.arange(60.0, 181.0, 10.0))
        for row in dial:
            assert row_holds(m, p, row_setting(o, row), row["current_a"]) >= -SLACK
            assert row["no_load_voltage_min_v"] >= 50.0 - 1e-6
            assert row["no_load_voltage_max_v"] <= 100.0 + 1e-6
        ends = o.current_settings
        assert (ends[0]["series_turns"], ends[0]["diverter_ohm"]) == (dial[0]["series_turns"], dial[0]["diverter_ohm"])
        assert (ends[1]["series_turns"], ends[1]["diverter_ohm"]) == (dial[-1]["series_turns"], dial[-1]["diverter_ohm"])
        changes = sum(1 for a, b in zip(dial, dial[1:]) if (a["series_turns"], a["diverter_ohm"]) != (b["series_turns"], b["diverter_ohm"]))
        assert changes == o.figures["tap_changes"] == sum(r["tap_change"] for r in dial)


def test_demo_welding_dial_row_bands_resolved():
    """The band of the best option's first, middle and last rows: the exact ends hold, a step of
    0.5 % of the rheostat's range outside breaks a limit (re-solved)."""
    m, p, res = demo("welding")
    o = res.feasible[0]
    dial = o.extras["dial"]
    for row in (dial[0], dial[len(dial) // 2], dial[-1]):
        a, b = row["band"]["control_exact"]
        assert a <= row["rheostat_ohm"] <= b
        rd = row["readings"]
        assert row["band"]["rheostat_ohm"][0] <= rd["rheostat_ohm"] <= row["band"]["rheostat_ohm"][1]
        step = 5e-3 * m.rheostat_max_ohm
        for end, out in ((a, a - step), (b, b + step)):
            assert row_holds(m, p, row_setting(o, dict(row, rheostat_ohm=end)), row["current_a"]) >= -SLACK
            if 0 < out < m.rheostat_max_ohm:
                assert row_holds(m, p, row_setting(o, dict(row, rheostat_ohm=out)), row["current_a"]) < 0


LINEAR_MACHINE = {
    "machine": {"label": "linear test machine", "poles": 4, "rated_speed_rpm": 1500, "rated_voltage_v": 60,
                "rated_armature_current_a": 150, "armature_resistance_ohm": 0.05,
                "shunt_field_resistance_ohm": 50, "shunt_turns_per_pole": 500,
                "series_field_resistance_ohm": 0.01, "series_turns_per_pole": 5, "series_taps": [0, 5],
                "rheostat_max_ohm": 100, "excitation_voltage_v": 110, "peak_armature_current_a": 400},
    "open_circuit": {"speed_rpm": 1500, "field_current_a": [0.0, 1.0, 2.0, 3.0, 4.0],
                     "emf_v": [0.0, 50.0, 100.0, 150.0, 200.0], "interpolation": "linear"},
}
LINEAR_JOB = {"load": {"kind": "welding", "label": "three currents"}, "drive": {"speed_rpm": 1500},
              "welding": {"process": "manual-metal-arc", "current_range_a": [60, 120], "dial_step_a": 30,
                          "max_no_load_voltage_v": 100}}


def test_welding_dial_hand_calculation_linear_curve():
    """A separately excited differential machine on a linear curve E = 50 V/A x (If - c I), one tap
    (5 of 500 turns: c = 0.01), Ra + Rse = 0.06 ohm, no brush drop, no armature reaction, leads
    0 ohm, on the IEC 60974-1 line U = 20 + 0.04 I (seen). By hand at I = 60, 90, 120 A:
    E = U + 0.06 I = 26, 29, 32 V; If = E/50 + 0.01 I = 1.12, 1.48, 1.84 A; rheostat on the 110 V
    exciter 110/If - 50 = 48.214, 24.324, 9.783 ohm; no-load 50 If = 56, 74, 92 V; slope
    -(50 x 0.01 + 0.06) = -0.56 V/A; short circuit 50 If / 0.56 = 100, 132.14, 164.29 A; current per
    arc volt 1 / -0.56 = -1.786 A/V (arithmetic on the stated inputs)."""
    m = machine_from_dict(LINEAR_MACHINE, "linear.toml")
    p = profile_from_dict(LINEAR_JOB, "job.toml")
    res = search(m, p)
    o = next(o for o in res.options if o.setting.connection == "separate-differential" and o.setting.diverter_ohm is None)
    dial = o.extras["dial"]
    assert [r["current_a"] for r in dial] == [60.0, 90.0, 120.0]
    i = np.array([60.0, 90.0, 120.0])
    e = 20.0 + 0.04 * i + 0.06 * i
    field = e / 50.0 + 0.01 * i
    assert_allclose(field, [1.12, 1.48, 1.84], rtol=1e-12)
    assert_allclose([r["rheostat_ohm"] for r in dial], 110.0 / field - 50.0, rtol=1e-6)
    assert_allclose([r["field_current_a"] for r in dial], field, rtol=1e-6)
    assert_allclose([r["no_load_voltage_v"] for r in dial], 50.0 * field, rtol=1e-6)
    assert_allclose([r["slope_v_per_a"] for r in dial], -0.56, rtol=1e-4)
    assert_allclose([r["short_circuit_current_a"] for r in dial], 50.0 * field / 0.56, rtol=1e-6)
    assert_allclose([r["current_change_per_arc_volt_a_per_v"] for r in dial], 1 / -0.56, rtol=1e-4)
    assert all(r["series_turns"] == 5.0 and r["diverter_ohm"] is None for r in dial)
    assert o.feasible and o.figures["tap_changes"] == 0
    assert_allclose([r["arc_voltage_v"] for r in dial], 20.0 + 0.04 * i, rtol=1e-6)
    assert_allclose([r["terminal_voltage_v"] for r in dial], 20.0 + 0.04 * i, rtol=1e-6)   # 0 ohm leads


def test_welding_dial_changes_tap_to_keep_the_strike_voltage():
    """With a strike minimum of 70 V the linear machine's low rows (56 V with the 5-turn tap alone)
    cannot use that tap: every row of a feasible option strikes, or no option is feasible."""
    m = machine_from_dict(LINEAR_MACHINE, "linear.toml")
    job = json.loads(json.dumps(LINEAR_JOB))
    job["welding"]["min_no_load_voltage_v"] = 70
    res = search(m, profile_from_dict(job, "job.toml"))
    for o in res.feasible:
        assert all(r["no_load_voltage_min_v"] >= 70 - 1e-6 for r in o.extras["dial"])
    plain = next(o for o in res.options if o.setting.connection == "separate-differential" and o.setting.diverter_ohm is None)
    assert not plain.feasible and "no_load_strike_voltage" in plain.failed


def test_welding_profile_keys_defaults_and_errors(tmp_path):
    """dial_step_a defaults to 10 A, min_no_load_voltage_v to the process's (50 V manual metal arc,
    none for TIG); a step giving over 100 rows is refused with one line."""
    job = json.loads(json.dumps(LINEAR_JOB))
    del job["welding"]["dial_step_a"]
    w = profile_from_dict(job, "j.toml").welding
    assert w.dial_step_a == 10.0 and w.min_no_load_voltage_v == 50.0
    job["welding"]["process"] = "tungsten-inert-gas"
    assert profile_from_dict(job, "j.toml").welding.min_no_load_voltage_v is None
    assert "common practice" in welding.WELDING_PROCESSES["manual-metal-arc"].basis["min_no_load_voltage_v"]
    job["welding"]["dial_step_a"] = 0.1
    with pytest.raises(Exception) as exc:
        profile_from_dict(job, "j.toml")
    assert "welding.dial_step_a" in str(exc.value)


# ---------------------------------------------------------------------------
# the ranking rule, as properties
# ---------------------------------------------------------------------------

def _option(i, feasible, stop, objective, diverter, turns, margin, broken, breach):
    s = Setting("separate-differential" if turns else "shunt", rheostat_ohm=float(i), series_turns=turns,
                diverter_ohm=0.01 if diverter else None, speed_rpm=1500.0, winding_temperature_c=75.0)
    failed = [] if feasible else [f"limit_{k}" for k in range(broken)]
    margins = {n: {"fraction": breach if k == 0 else -0.01} for k, n in enumerate(failed)}
    margins["ok"] = {"fraction": margin}
    cautions = [caution("x", "stop", "stopped", "test")] if stop else []
    if stop:
        failed.append("stop_caution")
    return Option(0, feasible and not stop, s, {"i": float(i)}, margins, failed, cautions,
                  min(f["fraction"] for f in margins.values()), objective=objective)


options_strategy = st.lists(st.tuples(st.booleans(), st.booleans(), st.one_of(st.none(), st.floats(-1, 10)),
                                      st.booleans(), st.sampled_from([0.0, 3.0, 5.0]), st.floats(0, 1),
                                      st.integers(1, 4), st.floats(-2, -0.001)), min_size=1, max_size=25)


@settings(max_examples=200, deadline=None)
@given(options_strategy)
def test_ranking_rule_properties(specs):
    """No stop option above a usable one, no infeasible above a feasible one; feasible options by
    objective with 2 % ties broken by the simpler rig, then the larger least margin in steps of 0.1 % of
    its limit, then the better objective; misses by the
    number of limits broken, then the worst breach (issue 10)."""
    opts = [_option(i, *sp) for i, sp in enumerate(specs)]
    ranked = rank_options(opts)
    assert [o.rank for o in ranked] == list(range(1, len(opts) + 1))
    group = [0 if o.feasible else (1 if o.usable else 2) for o in ranked]
    assert group == sorted(group)
    feas = [o for o in ranked if o.feasible]
    # within a tie group anchored at its first member, the rig order never goes back
    i = 0
    while i < len(feas):
        anchor = feas[i]
        j = i
        while j + 1 < len(feas) and (
                (anchor.objective is None and feas[j + 1].objective is None) or
                (anchor.objective is not None and feas[j + 1].objective is not None and
                 abs(anchor.objective - feas[j + 1].objective) <= 0.02 * max(abs(anchor.objective), abs(feas[j + 1].objective)))):
            j += 1
        grp = feas[i:j + 1]
        keys = [(o.rig, -margin_steps(o.smallest_margin), o.objective if o.objective is not None else 0.0)
                for o in grp]
        assert keys == sorted(keys)
        if j + 1 < len(feas) and anchor.objective is not None and feas[j + 1].objective is not None:
            assert feas[j + 1].objective > anchor.objective
        i = j + 1
    for g in (1, 2):
        keys = [(len(o.requirements_broken), -o.worst_breach) for o, k in zip(ranked, group) if k == g]
        assert keys == sorted(keys)


def test_battery_tie_with_alike_margins_goes_to_the_quicker_charge():
    """Regression: two plans of the demo tie on hours (within 2 %) with the same rig and least margins
    equal to 1e-14 (both held at the 3 % setting margin by construction); the ranking put the slower
    first on that round-off. Margins now compare in steps of 0.1 % of the limit, then the objective."""
    _, _, res = demo("battery")
    a, b = res.feasible[0], res.feasible[1]
    if a.rig == b.rig and margin_steps(a.smallest_margin) == margin_steps(b.smallest_margin):
        assert a.objective <= b.objective


def test_demo_ranking_rules():
    """The demos: welding feasible options by tap changes, then the simpler rig; lighting's separately
    excited options (no exciter) are not feasible; the rule is printed in every output."""
    _, _, res = demo("welding")
    feas = res.feasible
    assert [o.figures["tap_changes"] for o in feas] == sorted(o.figures["tap_changes"] for o in feas)
    m, p, lres = demo("lighting")
    for o in lres.options:
        if o.setting.connection.startswith("separate"):
            assert not o.feasible and "exciter_supply" in o.failed
            assert o.extras["exciter"]["available_voltage_v"] is None and o.extras["exciter"]["voltage_v"] > 0
    d = res.as_dict()
    assert "2 %" in d["ranking_rule"] and "stop" in d["ranking_rule"] and "least margin" in d["least_margin"]


def test_identical_options_merged():
    """Taps and diverters giving the same circuit (same effective turns and branch resistance)
    are one option; the others are named in same_as."""
    _, _, res = demo("welding")
    sigs = {}
    for o in res.options:
        key = (o.setting.connection, o.control, round(o.setting.rheostat_ohm or 0, 9),
               tuple(sorted((k, None if v is None else round(v, 6)) for k, v in o.figures.items())))
        assert key not in sigs, (o.rank, sigs.get(key))
        sigs[key] = o.rank
    a = _option(1, True, False, 1.0, True, 5.0, 0.1, 1, -0.1)
    b = _option(1, True, False, 1.0, False, 3.0, 0.1, 1, -0.1)
    merged = merge_identical([a, b])
    assert len(merged) == 1 and merged[0] is b and merged[0].same_as[0]["diverter_ohm"] == 0.01


# ---------------------------------------------------------------------------
# cautions on every command, by the search's rules
# ---------------------------------------------------------------------------

M = str(MACHINES / "charging-set.toml")


def run_json(argv, capsys):
    rc = cli.main(argv + ["--json"])
    out, err = capsys.readouterr()
    assert rc == 0, err
    return json.loads(out)


def rules(d):
    return {c["rule"]: c["severity"] for c in d["cautions"]}


def test_point_cautions_match_the_search_rules(capsys):
    """point: series turns into a battery (stop), 2000 rpm on a 1450 rpm machine (stop), the armature
    above its rating; the same rules as the search's option_cautions give."""
    m = load_machine(M)
    d = run_json(["point", M, "--connection", "long-shunt-cumulative", "--rheostat-ohm", "60",
                  "--battery-emf-v", "120", "--battery-ohm", "0.06", "--speed-rpm", "2000"], capsys)
    r = rules(d)
    assert r["battery-series-back-current"] == "stop" and r["overspeed"] == "stop"
    st_ = check_setting(m, Setting("long-shunt-cumulative", rheostat_ohm=60.0, speed_rpm=2000.0))
    same = {c.rule for c in command_cautions(m, st_, {"top_speed_rpm": 2000.0}, load="battery")}
    assert same <= set(r)
    d = run_json(["point", M, "--connection", "shunt", "--rheostat-ohm", "0", "--load-ohm", "1.5"], capsys)
    ia = max(abs(p["armature_current_a"]) for p in d["operating_points"] if p["stable"])
    assert ia > m.rated_armature_current_a and rules(d)["armature-rating"] in ("warn", "stop")


def test_curve_and_buildup_cautions(capsys):
    """curve: a speed in the governor band is a note, above it a warning (the search's rule);
    buildup without --rheostat-ohm gives the critical resistance and null for the rest."""
    m = load_machine(M)
    band = m.rated_speed_rpm * (1 + GOVERNOR_BAND_FRACTION / 2)
    d = run_json(["curve", M, "--connection", "shunt", "--rheostat-ohm", "40", "--speed-rpm", f"{band:g}",
                  "--points", "5"], capsys)
    assert rules(d)["overspeed"] == "note"
    d = run_json(["curve", M, "--connection", "shunt", "--rheostat-ohm", "40", "--speed-rpm", "1600",
                  "--points", "5"], capsys)
    assert rules(d)["overspeed"] == "warn"
    d = run_json(["buildup", M], capsys)
    assert d["critical_field_resistance_ohm"] > 0
    assert d["no_load_voltage_v"] is None and d["builds_up"] is None and d["field_circuit_resistance_ohm"] is None
    assert "field-switching" in rules(d)
    d = run_json(["buildup", M, "--rheostat-ohm", "0"], capsys)
    assert d["no_load_voltage_v"] > 0


def test_overspeed_is_graded():
    """A note within a 5 % governor band, a warning above it, a stop above 1.2 x (IEC 60034-1 test)."""
    m = load_machine(M)
    st_ = check_setting(m, Setting("shunt", rheostat_ohm=40.0))
    sev = {s: {c.rule: c.severity for c in setting_cautions(m, st_, {"top_speed_rpm": s})}.get("overspeed")
           for s in (1450.0, 1480.0, 1600.0, 1800.0)}
    assert sev == {1450.0: None, 1480.0: "note", 1600.0: "warn", 1800.0: "stop"}


@pytest.mark.parametrize("command", ["curve", "point", "charge"])
def test_self_excited_needs_its_rheostat(command, capsys):
    """A self-excited --connection without --rheostat-ohm: one line, exit 2; an explicit 0 is accepted."""
    argv = {"curve": ["curve", M], "point": ["point", M, "--load-ohm", "3"],
            "charge": ["charge", M, str(LOADS / "battery-charging.toml")]}[command]
    rc = cli.main(argv + ["--connection", "shunt"])
    out, err = capsys.readouterr()
    assert rc == 2 and out == "" and len(err.strip().splitlines()) == 1 and "--rheostat-ohm" in err
    rc = cli.main(argv + ["--connection", "shunt", "--rheostat-ohm", "0", "--json"])
    out, err = capsys.readouterr()
    assert rc == 0, err


def test_field_current_beyond_the_exciter_refused(capsys):
    """The 110 V exciter drives at most 110 / 70 = 1.57 A through the 70 ohm field at 75 degC."""
    m = load_machine(M)
    assert_allclose(exciter_field_current_max_a(m, 75.0), 110 / 70, rtol=1e-12)
    rc = cli.main(["curve", M, "--connection", "separate", "--field-current-a", "4.5"])
    out, err = capsys.readouterr()
    assert rc == 2 and "--field-current-a" in err and "1.57" in err
    assert cli.main(["curve", M, "--connection", "separate", "--field-current-a", "1.5", "--points", "3"]) == 0
    capsys.readouterr()


def test_charge_cautions_follow_the_search(capsys, tmp_path):
    """charge with a setting: the battery's rules and the machine's, as the search applies them. The
    demo job on a fixed drive (its motor replaced by a set speed, so --speed-rpm applies); on its motor
    the drive's own note comes with them."""
    text = (LOADS / "battery-charging.toml").read_text(encoding="utf-8")
    drive = re.search(r"\[drive\]\n(.*?)\n\n", text, re.S).group(1)
    fixed = tmp_path / "fixed.toml"
    temps = next(ln for ln in drive.splitlines() if ln.startswith("winding_temperature_range_c"))
    fixed.write_text(text.replace(drive, "speed_rpm = 1450\n" + temps), encoding="utf-8")
    d = run_json(["charge", M, str(fixed), "--connection", "shunt", "--rheostat-ohm", "60", "--speed-rpm", "1480"],
                 capsys)
    r = rules(d)
    assert r["overspeed"] == "note" and "battery-reverse-current" in r
    d = run_json(["charge", M, str(LOADS / "battery-charging.toml"), "--connection", "shunt", "--rheostat-ohm", "60"],
                 capsys)
    r = rules(d)
    assert r["drive-speed"] == "note" and "battery-reverse-current" in r


# ---------------------------------------------------------------------------
# readable text and files
# ---------------------------------------------------------------------------

def test_search_text_is_readable(capsys):
    """No raw keys, one unit per column, 'least margin' defined, the ranking rule printed."""
    for kind in ("welding", "lighting"):
        mp, pp = DEMOS[kind]
        assert cli.main(["search", str(MACHINES / f"{mp}.toml"), str(LOADS / f"{pp}.toml"), "--top", "4"]) == 0
        out = capsys.readouterr().out
        assert "Ranking:" in out and "Least margin: the smallest margin" in out
        assert not re.search(r"\b[a-z]+(_[a-z0-9]+)+\b", out), re.findall(r"\b[a-z]+(?:_[a-z0-9]+)+\b", out)
        header = next(line for line in out.splitlines() if line.lstrip().startswith("rank"))
        for col in re.split(r"\s{2,}", header.strip()):
            assert len(re.findall(r"\[[^\]]+\]", col)) <= 1
    out = cli_output(["search", str(MACHINES / "welding-set.toml"), str(LOADS / "welding.toml"), "--top", "3"], capsys)
    assert "welding dial" in out
    lines = out.splitlines()
    k = next(i for i, line in enumerate(lines) if line.lstrip().startswith("rank"))
    head = re.split(r"\s{2,}", lines[k].strip())
    first = dict(zip(head, re.split(r"\s{2,}", lines[k + 2].strip())))
    o = demo("welding")[2].options[0]
    assert float(first["tap or diverter changes"]) == o.figures["tap_changes"]
    assert float(first["least margin [%]"]) == pytest.approx(100 * o.smallest_margin, abs=0.05)
    assert float(first["rheostat [ohm]"]) == o.extras["dial"][0]["readings"]["rheostat_ohm"]


def test_search_text_names_connections_in_trade_words(capsys):
    """Issue 13's words on the command line too: the table says "short-shunt cumulative compound", lists the
    id that --connection takes for each connection shown, and says a broken limit shared by a run of ranks
    once (the lighting demo's separately excited options each need the exciter the machine lacks)."""
    out = cli_output(["search", str(MACHINES / "lighting-set.toml"), str(LOADS / "lighting.toml")], capsys)
    table = out.split("----")[-1].split("Rheostat and field")[0]
    assert "short-shunt cumulative compound" in table and "short-shunt-cumulative" not in table
    ids = out.split("(--connection):")[1].split("\n\n")[0].splitlines()
    assert "  short-shunt cumulative compound: short-shunt-cumulative" in ids
    res = demo("lighting")[2]
    words = [w.split(": ")[1] for w in ids if w.strip()]
    assert words == list(dict.fromkeys(o.setting.connection for o in res.options[:10]))
    broken = out.split("Limits broken:")[1].split("\n\n")[0].strip().splitlines()
    told = [o.rank for o in res.options[:10] if not o.feasible]
    assert len(broken) < len(told), broken
    assert broken[0].startswith(f"options {told[0]} to ")
    # the booster's only connection is "series" in both: no list that repeats it
    out = cli_output(["search", str(MACHINES / "feeder-booster.toml"), str(LOADS / "booster.toml")], capsys)
    assert "(--connection):" not in out and "series: series" not in out


def test_search_text_says_each_figure_once(capsys):
    """Regression: the battery demo printed its start current at the hot corner twice (the hot corner
    is the nominal one on the demo's motor); a figure line that reads the same is said once."""
    out = cli_output(["search", str(MACHINES / "charging-set.toml"), str(LOADS / "battery-charging.toml"),
                      "--top", "2"], capsys)
    lines = out.split("in figures:")[1].split("against its limits")[0].splitlines()
    figs = [line for line in lines if line.startswith("  ")]
    assert figs and len(figs) == len(set(figs))
    assert "(top speed " in out and "at no load)" not in out


def test_command_line_cautions_name_their_source_in_words(capsys):
    """Issue 13's wording on the command line too: "Source: ...", no "(seen)" or "from memory"."""
    for argv in (["search", str(MACHINES / "charging-set.toml"), str(LOADS / "battery-charging.toml"), "--top", "2"],
                 ["charge", str(MACHINES / "charging-set.toml"), str(LOADS / "battery-charging.toml")]):
        out = cli_output(argv, capsys)
        assert "(Source: IEC 62485-2" in out
        assert "(seen)" not in out and "from memory" not in out and "(basis:" not in out


def cli_output(argv, capsys):
    assert cli.main(argv) == 0
    return capsys.readouterr().out


def test_every_argument_has_help():
    """--help text for every argument of every command."""
    parser = cli.command_parser()
    subs = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    for name, sub in subs.choices.items():
        for a in sub._actions:
            if a.dest == "help":
                continue
            assert a.help, (name, a.dest)


def test_demo_profiles_comment_every_key():
    """Every key of every demo file has a comment; named-table keys list the allowed names."""
    named = {"kind", "process", "environment", "chemistry", "lamp", "interpolation"}
    for path in sorted(MACHINES.glob("*.toml")) + sorted(LOADS.glob("*.toml")):
        for line in path.read_text(encoding="utf-8").splitlines():
            m = re.match(r"(\w+) = ", line)
            if m:
                assert "#" in line.split("=", 1)[1], (path.name, line)
                if m.group(1) in named:
                    assert "one of:" in line, (path.name, line)


def test_readme_file_examples_load():
    """The README's TOML examples are valid TOML and load as written."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```toml\n(.*?)```", text, re.S)
    assert len(blocks) >= 2
    kinds = set()
    for b in blocks:
        data = tomllib.loads(b)
        if "machine" in data:
            load_machine("README machine", text=b)
            kinds.add("machine")
        else:
            load_profile("README profile", text=b)
            kinds.add("profile")
    assert kinds == {"machine", "profile"}


def test_bisection_keeps_a_root_found_on_the_grid():
    """Regression: a load-curve grid point exactly on the root (residual exactly 0 at the bracket's
    end) lost the bracket and returned the other end; the root is kept. Binary-exact numbers:
    x = 1.203125 - 5/512 x 72 = 0.5 A, E = 25 V, V = 25 - 0.0625 x 72 = 20.5 V = 16 + 0.0625 x 72."""
    from supplycfg.circuit import build_circuit, normal_points
    tables = json.loads(json.dumps(LINEAR_MACHINE))
    tables["machine"].update(shunt_turns_per_pole=512, armature_resistance_ohm=0.046875,
                             series_field_resistance_ohm=0.015625)
    m = machine_from_dict(tables, "exact.toml")
    circ = build_circuit(m, [Setting("separate-differential", field_current_a=1.203125, series_turns=5.0)])
    r = normal_points(circ, np.array([36.0]), np.array([108.0]), v_of=lambda t: 16.0 + 0.0625 * t, grid=9, steps=40)
    assert r["converged"][0]
    assert_allclose(r["load_current_a"][0], 72.0, rtol=1e-12)


def test_round_to_directions_and_an_unknown_direction():
    """Rounding to a settable step (closed form): nearest, up and down; a wrong direction is refused."""
    assert round_to(48.61, 0.1) == 48.6
    assert round_to(48.61, 0.1, "up") == 48.7
    assert round_to(48.69, 0.1, "down") == 48.6
    assert round_to(0.2802, 0.001, "up") == 0.281
    assert round_to(30.0, 0.5, "down") == 30.0  # a value on the step stays (no step lost to rounding)
    with pytest.raises(ValueError, match="allowed: nearest, up, down"):
        round_to(1.0, 0.1, "sideways")


def test_separately_excited_cautions_name_its_own_field_and_basis():
    """Regression: the welding demo's separately excited option was told not to open "the shunt field circuit"
    (it has none; its field is the separate one) and its idle voltage cited the critical speed of
    self-excitation, which a separately excited field does not have (E = k Phi n at a given field does)."""
    m, p, res = demo("welding")
    o = res.options[0]
    assert o.setting.connection.startswith("separate")
    by_rule = {c.rule: c for c in o.cautions}
    assert "separate field circuit" in by_rule["field-switching"].message
    idle = {c.rule: c for c in drive_cautions(m, p.drive, o.figures)}["drive-idle"]
    assert "self-excitation" not in idle.basis and "E = k Phi n" in idle.basis
    shunt = next(x for x in res.options if not x.setting.connection.startswith("separate")
                 and x.setting.connection != "series")
    assert "shunt field circuit" in {c.rule: c for c in shunt.cautions}["field-switching"].message


def test_charge_text_names_the_connection_in_trade_words(capsys):
    """Issue 13's words on `charge` too: the setting line names the connection as the trade does, with the id that
    --connection takes beside it (it printed 'long-shunt-differential' alone)."""
    out = cli_output(["charge", str(MACHINES / "charging-set.toml"), str(LOADS / "battery-charging.toml")], capsys)
    line = next(x for x in out.splitlines() if x.startswith("setting: "))
    assert line.startswith("setting: long-shunt differential compound (--connection long-shunt-differential), ")


def test_idle_voltage_is_told_once_when_the_job_tells_it():
    """Regression: the welding demo's sheet gave the engine's idle voltage twice, in the strike note
    ("let the engine come up to speed") and in the drive's idle note; the job's note carries it alone.
    A field that does not build up at idle is still told by the drive's note (it adds that)."""
    m, p, res = demo("welding")
    rules = [c.rule for c in res.options[0].cautions]
    assert "welding-strike-at-idle" in rules and "drive-idle" not in rules
    f = dict(res.options[0].figures, idle_builds_up=0.0)
    kept = [c.rule for c in job_option_cautions(m, p, res.options[0].setting, f)]
    assert "welding-strike-at-idle" in kept and "drive-idle" in kept
