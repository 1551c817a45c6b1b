"""Property tests over random machines drawn from physical ranges.

Machines: 2 to 12 poles; 24 to 600 V, 5 to 2000 A; armature resistance 0.5 to
10 % of rated voltage over rated current (about six decades of ohms over the
ranges), field current 0.5 to 5 % of the armature current, the shunt field's
line 0.8 to 2 times as steep as the chord from the origin to the curve's top;
open-circuit curves with or without residual voltage, from flat-topped to
nearly linear, some ending on a plateau; with or without armature reaction,
series winding and brush drop. The circuit is recomputed here from the design note's
connection table, not from the engine's own residual.

References
----------
Circuit equations, connection table, curve conventions: the project's design
note (equivalent-field-current method, S. J. Chapman, *Electric Machinery
Fundamentals*, DC generators, from memory). Power balance: conservation of
energy in the equivalent circuit (derived).
"""

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import assume, example, given, note, strategies as st
from numpy.testing import assert_allclose
from scipy.interpolate import PchipInterpolator
from scipy.optimize import brentq

from supplycfg.circuit import (Load, Setting, allowed_connections, external_characteristic, operating_points,
                               self_excitation, series_critical_resistance_ohm)
from supplycfg.errors import InputError
from supplycfg.machine import machine_from_dict

RESIDUAL_V = 1e-6    # circuit equation tolerance [V] (the engine issue's figure)
RAMP = 0.01          # brush drop ramps through zero below 1 % of rated current (design note)


def log_uniform(lo, hi):
    return st.floats(math.log(lo), math.log(hi)).map(math.exp)


def uniform(lo, hi):
    return st.floats(lo, hi)


# ---------------------------------------------------------------------------
# strategies
# ---------------------------------------------------------------------------

@st.composite
def machine_tables(draw, series=None, plateau=True, armature_reaction=True, residual=None):
    """TOML tables of a valid machine from physical ranges."""
    vr = draw(log_uniform(24, 600))
    ir = draw(log_uniform(5, 2000))
    base = vr / ir
    ra = base * draw(log_uniform(0.005, 0.1))
    if_r = ir * draw(log_uniform(0.005, 0.05))
    nsh = draw(log_uniform(100, 5000))
    speed = draw(log_uniform(500, 3600))
    m = {"label": "random", "poles": draw(st.sampled_from([2, 4, 6, 8, 12])), "rated_speed_rpm": speed,
         "rated_voltage_v": vr, "rated_armature_current_a": ir, "armature_resistance_ohm": ra,
         "shunt_turns_per_pole": nsh,
         "brush_drop_v": draw(st.sampled_from([0.0, 1.0, 2.0])) * draw(uniform(0.5, 1.25)),
         "reference_temperature_c": draw(st.sampled_from([75.0, 40.0, 20.0]))}
    if draw(st.booleans()):
        m["excitation_voltage_v"] = vr * draw(uniform(0.3, 1.0))
    if series if series is not None else draw(st.booleans()):
        nse = draw(uniform(0.05, 0.5)) * nsh * if_r / ir
        m["series_turns_per_pole"] = nse
        m["series_field_resistance_ohm"] = ra * draw(uniform(0.1, 1.0))
        m["series_taps"] = draw(st.sampled_from([[0.0, nse], [0.0, 0.5 * nse, nse], [0.5 * nse, nse]]))
    # open-circuit curve: E = Er + (Emax - Er) u (1 + beta) / (u + beta), u = x / xm
    npts = draw(st.integers(4, 30))
    xm = if_r * draw(uniform(1.5, 3.0))
    if draw(st.booleans()):
        x = np.linspace(0.0, xm, npts)
    else:
        steps = np.array(draw(st.lists(uniform(0.2, 1.0), min_size=npts - 1, max_size=npts - 1)))
        x = np.concatenate([[0.0], np.cumsum(steps)]) * xm / steps.sum()
    beta = draw(log_uniform(0.05, 50.0))
    emax = vr * draw(uniform(1.1, 1.6))
    has_residual = draw(st.booleans()) if residual is None else residual
    er = vr * draw(uniform(0.005, 0.05)) if has_residual else 0.0
    u = x / xm
    e = er + (emax - er) * u * (1 + beta) / (u + beta)
    if plateau and draw(st.booleans()):
        e[-1] = e[-2]       # a flat top
    # field winding: its line crosses the curve near the measured top or below
    rsh = float(e[-1] / x[-1]) * draw(uniform(0.8, 2.0))
    m["shunt_field_resistance_ohm"] = rsh
    m["rheostat_max_ohm"] = rsh * draw(uniform(0.2, 3.0))
    o = {"speed_rpm": speed * draw(uniform(0.8, 1.2)), "field_current_a": x.tolist(), "emf_v": e.tolist(),
         "interpolation": draw(st.sampled_from(["monotone-cubic", "linear"]))}
    tables = {"machine": m, "open_circuit": o}
    if armature_reaction:
        kind = draw(st.sampled_from(["none", "linear", "table"]))
        at = nsh * if_r * draw(uniform(0.0, 0.3))
        if kind == "linear":
            tables["armature_reaction"] = {"demagnetizing_at_per_pole_at_rated": at}
        elif kind == "table":
            k = draw(st.integers(2, 5))
            cur = np.linspace(0.0, 2 * ir, k)
            grow = np.concatenate([[0.0], np.cumsum(draw(st.lists(uniform(0.0, 1.0), min_size=k - 1,
                                                                   max_size=k - 1)))])
            tables["armature_reaction"] = {"armature_current_a": cur.tolist(),
                                           "demagnetizing_at_per_pole": (at * grow).tolist()}
    return tables


@st.composite
def settings_for(draw, machine, connections=None):
    """A valid setting for ``machine``."""
    conns = connections or allowed_connections(machine)
    conn = draw(st.sampled_from([c for c in conns if c in allowed_connections(machine)]))
    kw = {}
    if draw(st.booleans()):
        kw["speed_rpm"] = machine.rated_speed_rpm * draw(uniform(0.7, 1.3))
    if draw(st.booleans()):
        kw["winding_temperature_c"] = draw(uniform(-20.0, 120.0))
    if conn.startswith("separate"):
        if machine.excitation_voltage_v is None or draw(st.booleans()):
            kw["field_current_a"] = machine.occ_field_current_a[-1] * draw(uniform(0.0, 1.2))
        else:
            kw["rheostat_ohm"] = machine.rheostat_max_ohm * draw(uniform(0.0, 1.0))
    elif draw(st.booleans()):
        kw["rheostat_ohm"] = machine.rheostat_max_ohm * draw(uniform(0.0, 1.0))
    if conn not in ("separate", "shunt"):
        taps = [t for t in machine.series_taps if t > 0 or conn != "series"]
        if draw(st.booleans()):
            kw["series_turns"] = draw(st.sampled_from(taps))
        if draw(st.booleans()):
            kw["diverter_ohm"] = machine.series_field_resistance_ohm * draw(log_uniform(0.2, 5.0))
    return Setting(conn, **kw)


@st.composite
def loads_for(draw, machine):
    vr, ir = machine.rated_voltage_v, machine.rated_armature_current_a
    base = vr / ir
    kind = draw(st.sampled_from(["resistor", "current", "battery", "line"]))
    if kind == "resistor":
        return Load.resistor(base * draw(log_uniform(0.3, 30.0)))
    if kind == "current":
        return Load.constant_current(ir * draw(uniform(-0.5, 1.5)))
    if kind == "battery":
        return Load.battery(vr * draw(uniform(0.5, 1.2)), base * draw(log_uniform(0.001, 0.1)))
    return Load.line(vr * draw(uniform(0.0, 0.5)), base * draw(log_uniform(0.01, 1.0)))


@st.composite
def cases(draw, **kw):
    tables = draw(machine_tables(**kw))
    m = machine_from_dict(tables)
    return m, draw(settings_for(m)), draw(loads_for(m))


# ---------------------------------------------------------------------------
# the design note's circuit, recomputed
# ---------------------------------------------------------------------------

def occ_emf(m, x):
    """Open-circuit EMF at the test speed for equivalent field current x [A]:
    interpolation, chord beyond the last point, mirror below zero."""
    xs, ys = np.asarray(m.occ_field_current_a), np.asarray(m.occ_emf_v)
    x = np.asarray(x, float)
    ax = np.minimum(np.abs(x), xs[-1])
    e = np.interp(ax, xs, ys) if m.occ_interpolation == "linear" else PchipInterpolator(xs, ys)(ax)
    chord = (ys[-1] - ys[-2]) / (xs[-1] - xs[-2])
    e = np.where(np.abs(x) > xs[-1], ys[-1] + chord * (np.abs(x) - xs[-1]), e)
    return np.where(x >= 0, e, 2 * ys[0] - e)


def demagnetising_at(m, ia):
    a = np.abs(np.asarray(ia, float))
    if m.ar_at_per_pole_at_rated is not None:
        return m.ar_at_per_pole_at_rated / m.rated_armature_current_a * a
    if m.ar_table_current_a is not None:
        xi, fi = np.asarray(m.ar_table_current_a), np.asarray(m.ar_table_at_per_pole)
        chord = (fi[-1] - fi[-2]) / (xi[-1] - xi[-2])
        return np.where(a > xi[-1], fi[-1] + chord * (a - xi[-1]), np.interp(a, xi, fi))
    return 0.0 * a


def circuit(m, s):
    """Resistances and constants of setting ``s``, defaults filled as the issue says."""
    t = m.reference_temperature_c if s.winding_temperature_c is None else s.winding_temperature_c
    ct = (234.5 + t) / (234.5 + m.reference_temperature_c)
    uses_series = s.connection not in ("separate", "shunt")
    nse = (m.series_turns_per_pole if s.series_turns is None else s.series_turns) if uses_series else 0.0
    rse = m.series_field_resistance_ohm * ct * nse / m.series_turns_per_pole if nse else 0.0
    if s.diverter_ohm is not None and nse:
        rbr, share = rse * s.diverter_ohm / (rse + s.diverter_ohm), s.diverter_ohm / (rse + s.diverter_ohm)
    else:
        rbr, share = rse, (1.0 if nse else 0.0)
    rf = m.shunt_field_resistance_ohm * ct + (s.rheostat_ohm or 0.0)
    sign = -1.0 if s.connection.endswith("differential") else 1.0
    speed = m.rated_speed_rpm if s.speed_rpm is None else s.speed_rpm
    return {"ra": m.armature_resistance_ohm * ct, "rse": rse, "rbr": rbr, "share": share, "rf": rf,
            "nse": sign * nse, "ratio": speed / m.occ_speed_rpm}


def currents(m, s, c, v, il):
    """Shunt-field, armature and series-branch currents from the connection table."""
    conn = s.connection
    if conn.startswith("separate"):
        ish = s.field_current_a if s.field_current_a is not None else m.excitation_voltage_v / c["rf"]
        return ish, il, (0.0 if conn == "separate" else il)
    if conn == "series":
        return 0.0, il, il
    if conn == "shunt":
        ish = v / c["rf"]
        return ish, il + ish, 0.0
    if conn.startswith("long"):
        ish = v / c["rf"]
        return ish, il + ish, il + ish
    ish = (v + il * c["rbr"]) / c["rf"]
    return ish, il + ish, il


def recompute(m, s, v, il):
    c = circuit(m, s)
    ish, ia, ibr = currents(m, s, c, v, il)
    ise = c["share"] * ibr
    # design note: armature reaction shrinks the windings' net mmf towards zero, never past it
    xw = ish + c["nse"] * ise / m.shunt_turns_per_pole
    far = demagnetising_at(m, ia) / m.shunt_turns_per_pole
    x = np.where(xw > 0, np.maximum(xw - far, 0.0), np.minimum(xw + far, 0.0))
    e = c["ratio"] * occ_emf(m, x)
    vb = m.brush_drop_v * np.clip(ia / (RAMP * m.rated_armature_current_a), -1.0, 1.0)
    h = e - ia * c["ra"] - ibr * c["rbr"] - vb - v
    return {"ish": ish, "ia": ia, "ibr": ibr, "ise": ise, "e": e, "vb": vb, "h": h, **c}


def check_point(m, s, pt):
    """The circuit equation and the reported currents at one point."""
    r = {k: float(v) for k, v in recompute(m, s, pt["terminal_voltage_v"], pt["load_current_a"]).items()}
    note(f"point {pt}\nrecomputed {r}")
    scale = abs(r["ia"]) + m.rated_armature_current_a
    assert abs(r["h"]) < RESIDUAL_V
    assert_allclose(pt["armature_current_a"], r["ia"], rtol=1e-9, atol=1e-9 * scale)
    assert_allclose(pt["shunt_field_current_a"], r["ish"], rtol=1e-9, atol=1e-12)
    assert_allclose(pt["series_field_current_a"], r["ise"], rtol=1e-9, atol=1e-9 * scale)
    assert_allclose(pt["generated_emf_v"], r["e"], rtol=1e-9, atol=1e-9)
    return r


# ---------------------------------------------------------------------------
# properties
# ---------------------------------------------------------------------------

@given(cases())
def test_circuit_equations_hold_at_every_operating_point(case):
    """Every reported operating point satisfies V = E - Ia Ra - Ibr Rbr - Vb(Ia)
    with the currents of the connection table, to 1e-6 V (design note); a solve
    that stops short says why (project rule)."""
    m, s, load = case
    ops = operating_points(m, s, load)
    # a machine still above its load at the top of the search says so
    assert ops.converged or ops.message
    for pt in ops.points:
        check_point(m, s, pt)
        if load.current_a is not None:
            assert_allclose(pt["load_current_a"], load.current_a, rtol=1e-12, atol=1e-12)
        else:
            assert_allclose(pt["terminal_voltage_v"], load.v0 + load.slope_ohm * pt["load_current_a"],
                            rtol=1e-9, atol=1e-9)


@given(cases())
def test_power_balance_at_every_operating_point(case):
    """E Ia = V IL + Ia^2 Ra + (Ise^2 Rse + Id^2 Rd) + Vb Ia + Ish^2 (Rsh + Rrh),
    the last term absent for separate excitation (the exciter supplies it);
    from the reported figures (conservation of energy, derived)."""
    m, s, load = case
    for pt in operating_points(m, s, load).points:
        c = circuit(m, s)
        e, ia, v, il = (pt[k] for k in ("generated_emf_v", "armature_current_a", "terminal_voltage_v",
                                        "load_current_a"))
        ish, ise = pt["shunt_field_current_a"], pt["series_field_current_a"]
        conn = s.connection
        ibr = 0.0 if conn in ("separate", "shunt") else (ia if conn.startswith("long") else il)
        series_loss = ise**2 * c["rse"]
        if s.diverter_ohm is not None and c["rse"]:
            series_loss += (ibr - ise)**2 * s.diverter_ohm
        vb = m.brush_drop_v * min(1.0, max(-1.0, ia / (RAMP * m.rated_armature_current_a)))
        field_loss = 0.0 if conn.startswith("separate") else ish**2 * c["rf"]
        out = v * il + ia**2 * c["ra"] + series_loss + vb * ia + field_loss
        scale = abs(e * ia) + abs(v * il) + ia**2 * c["ra"] + series_loss + abs(vb * ia) + field_loss
        assert_allclose(e * ia, out, rtol=0, atol=RESIDUAL_V * abs(ia) + 1e-9 * scale)


@given(cases())
def test_external_characteristic_points_satisfy_the_circuit(case):
    """Every point of the external characteristic satisfies the circuit
    equation (1e-6 V); its figures are finite or None, never NaN (issue:
    undefined values are null)."""
    m, s, _ = case
    ch = external_characteristic(m, s, points=60)
    for k, arr in ch.points.items():
        assert np.all(np.isfinite(np.asarray(arr, float))), k
    for k in ("no_load_voltage_v", "short_circuit_current_a", "max_load_current_a", "regulation_percent"):
        val = getattr(ch, k)
        assert val is None or math.isfinite(val), k
    for pt in ch.point_list():
        check_point(m, s, pt)


@given(cases())
def test_characteristic_figures_agree_with_operating_points(case):
    """The curve's figures (issue): the no-load voltage is an operating point at
    zero load current and opens the curve; the largest load current is not
    exceeded along the curve above zero volts; the regulation's full-load
    voltage is an operating point with the rated current in the armature; the short-circuit
    current is an operating point at zero volts."""
    m, s, _ = case
    ch = external_characteristic(m, s, points=60)
    tol_v = 1e-6 * max(1.0, m.rated_voltage_v)
    tol_i = 1e-6 * m.rated_armature_current_a
    il, v = ch.points["load_current_a"], ch.points["terminal_voltage_v"]

    def has_point(load, volts):
        return any(math.isclose(p["terminal_voltage_v"], volts, rel_tol=1e-6, abs_tol=tol_v)
                   for p in operating_points(m, s, load).points)

    if ch.no_load_voltage_v is not None:
        assert has_point(Load.constant_current(0.0), ch.no_load_voltage_v)
        assert_allclose([v[0], il[0]], [ch.no_load_voltage_v, 0.0], atol=max(tol_v, tol_i))
    if ch.max_load_current_a is not None and il.size:
        assert np.max(il[v >= 0]) <= ch.max_load_current_a + tol_i
    # (a machine with no no-load voltage has -100 % regulation: V_full cannot be recovered from it)
    if ch.regulation_percent is not None and ch.no_load_voltage_v > tol_v:
        v_full = ch.no_load_voltage_v / (1 + ch.regulation_percent / 100)
        # full load: the armature carries its rated current (issue 8)
        assert has_point(Load.armature_current(m.rated_armature_current_a), v_full)
    if ch.short_circuit_current_a is not None:
        pts = operating_points(m, s, Load.line(0.0, 0.0)).points
        assert any(math.isclose(p["load_current_a"], ch.short_circuit_current_a, rel_tol=1e-6, abs_tol=tol_i)
                   for p in pts)


SELF_EXCITED = ["shunt", "long-shunt-cumulative", "short-shunt-cumulative", "long-shunt-differential",
                "short-shunt-differential"]


def load_current_on_line(load, v):
    return load.current_a if load.current_a is not None else (v - load.v0) / load.slope_ohm


def highest_stable_voltage(m, s, load):
    """Highest terminal voltage [V] where the recomputed residual falls through
    zero along the load line (a stable point), scanning 0 to 1000 x rated;
    ``inf`` when it is still positive there, ``None`` when it never falls."""
    top = float(np.max(m.occ_emf_v)) * 3.0
    v = np.unique(np.concatenate([np.linspace(0.0, top, 20001),
                                  np.geomspace(top, 1e3 * max(m.rated_voltage_v, top), 2001)]))
    h = recompute(m, s, v, load_current_on_line(load, v))["h"]
    if h[-1] > 0:
        return math.inf
    down = np.flatnonzero((h[:-1] > 0) & (h[1:] <= 0))
    if down.size == 0:
        return None
    j = down[-1]
    fun = lambda vv: float(recompute(m, s, vv, load_current_on_line(load, vv))["h"])
    return brentq(fun, v[j], v[j + 1], xtol=1e-13, rtol=4 * np.finfo(float).eps)


# Found by the long profile (regressions): a nearly linear curve measured to 1.5 x rated
# voltage, read beyond its end along its last chord.
_SHORT_CURVE = {"label": "short curve", "poles": 2, "rated_speed_rpm": 1096.6331584284585,
                "rated_voltage_v": 54.598150033144236, "rated_armature_current_a": 7.38905609893065,
                "armature_resistance_ohm": 0.3678794411714423, "shunt_turns_per_pole": 148.4131591025766,
                "brush_drop_v": 0.0, "reference_temperature_c": 75.0}
# the chord extension is steeper than the field line: no finite no-load voltage
RUNAWAY_TABLES = {
    "machine": dict(_SHORT_CURVE, shunt_field_resistance_ohm=74.2065795512883, rheostat_max_ohm=74.2065795512883),
    "open_circuit": {"speed_rpm": 1096.6331584284585, "interpolation": "monotone-cubic",
                     "field_current_a": (0.5518191617571635 * np.arange(12) / 11).tolist(),
                     "emf_v": [1.0, 13.64953750828606, 25.199146169143493, 35.09881073559272,
                               43.678520026515386, 51.18576565607272, 57.80980591744684, 63.697841705334945,
                               68.96608425239272, 73.70750254474471, 77.99735719020605, 81.89722504971635]}}
# the stable point lies near 330 V, four times the last measured field current out
FAR_ROOT_TABLES = {
    "machine": dict(_SHORT_CURVE, shunt_field_resistance_ohm=302.5715951195514, rheostat_max_ohm=302.5715951195514),
    "open_circuit": {"speed_rpm": 891.0144412231225, "interpolation": "monotone-cubic",
                     "field_current_a": [0.0, 0.09022352215774178, 0.18044704431548356, 0.27067056647322535],
                     "emf_v": [0.0, 33.26292772390102, 59.974711410839745, 81.89722504971635]}}
_R = Load.resistor(54.598150033144236 / 7.38905609893065)


# a stiff battery on a separately excited machine with armature reaction: the
# charging point (41.0 V, +3.46 A) and a motoring one (40.9 V, -5.65 A) lie
# 0.1 V apart, closer than the load-line grid step (a regression)
STIFF_BATTERY_TABLES = {
    "machine": dict(_SHORT_CURVE, shunt_field_resistance_ohm=111.30986932693244, rheostat_max_ohm=111.30986932693244),
    "open_circuit": {"speed_rpm": 1096.6331584284585, "interpolation": "monotone-cubic",
                     "field_current_a": [0.0, 0.24525296078096157, 0.49050592156192313, 0.7357588823428847],
                     "emf_v": [0.0, 40.94861252485818, 65.51778003977309, 81.89722504971635]},
    "armature_reaction": {"demagnetizing_at_per_pole_at_rated": 13.649537508286059}}
STIFF_BATTERY_CASE = (machine_from_dict(STIFF_BATTERY_TABLES), Setting("separate", field_current_a=0.2989020459517969),
                      Load.battery(40.94861252485818, 0.011108996538242304))


def check_highest_found(m, s, load, note=note):
    """The engine's normal point is the recomputed highest stable one, or it says why not."""
    v_hi = highest_stable_voltage(m, s, load)
    note(f"recomputed highest stable voltage {v_hi}")
    if v_hi is None:
        return
    ops = operating_points(m, s, load)
    said = not ops.converged or bool(ops.message)
    if math.isinf(v_hi):
        assert said
        return
    r = recompute(m, s, v_hi, load_current_on_line(load, v_hi))
    if abs(float(r["ia"])) > 10 * m.rated_armature_current_a:
        return
    if float(r["e"]) < 0:
        # a reversed build-up is listed, marked, and never the normal point (design note)
        assert said or any(p["reversed"] and math.isclose(p["terminal_voltage_v"], v_hi, rel_tol=1e-7, abs_tol=1e-7)
                           for p in ops.points)
        assert ops.normal is None or ops.normal["generated_emf_v"] >= 0
        return
    pt = ops.normal
    found = pt is not None and math.isclose(pt["terminal_voltage_v"], v_hi, rel_tol=1e-7, abs_tol=1e-7)
    note(f"engine normal {pt}")
    assert found or said


@pytest.mark.parametrize("tables", [RUNAWAY_TABLES, FAR_ROOT_TABLES], ids=["runaway", "far-root"])
def test_points_beyond_the_measured_curve_are_found_or_reported(tables):
    """Regressions found by the long profile: a stable point four times the last
    measured field current out, and a voltage that runs away along the chord
    extension, are reported or said (design note: report every intersection;
    project rule: a solve that does not converge says so)."""
    check_highest_found(machine_from_dict(tables), Setting("shunt", rheostat_ohm=0.0), _R, note=print)


@example(case=STIFF_BATTERY_CASE)
@given(cases())
def test_highest_stable_point_is_found_or_reported(case):
    """The engine's normal point is the highest stable intersection (design
    note), found by a recomputed scan; if it lies far out on the curve's chord
    extension, or the voltage runs away there, the engine must say so (not
    converged, or a message) rather than report a lower point or none.
    Intersections beyond 10 x rated armature current are out of scope (issue)."""
    check_highest_found(*case)


@example(tables=RUNAWAY_TABLES, fraction=0.0)
@given(machine_tables(), uniform(0.0, 1.0))
def test_build_up_comes_with_its_voltage(tables, fraction):
    """Self-excitation (design note): a machine said to build up gives the
    no-load voltage it holds, the highest stable no-load intersection (checked
    against the recomputed circuit), or says that it runs away past the
    measured curve (its no-load voltage unknown, issue 8)."""
    m = machine_from_dict(tables)
    rh = fraction * m.rheostat_max_ohm
    se = self_excitation(m, rheostat_ohm=rh)
    note(f"{se}")
    if se.builds_up:
        assert (se.no_load_voltage_v is not None) != (se.runaway and bool(se.notes))
    v_hi = highest_stable_voltage(m, Setting("shunt", rheostat_ohm=rh), Load.constant_current(0.0))
    if se.no_load_voltage_v is not None and v_hi is not None and not math.isinf(v_hi):
        assert_allclose(se.no_load_voltage_v, v_hi, rtol=1e-7, atol=1e-7)


# Found by the long profile: no residual, linear armature reaction.
SYMMETRIC_TABLES = {
    "machine": dict(_SHORT_CURVE, shunt_field_resistance_ohm=111.30986932693244, rheostat_max_ohm=111.30986932693244),
    "open_circuit": {"speed_rpm": 1096.6331584284585, "interpolation": "monotone-cubic",
                     "field_current_a": [0.0, 0.24525296078096157, 0.49050592156192313, 0.7357588823428847],
                     "emf_v": [0.0, 40.94861252485818, 65.51778003977309, 81.89722504971635]},
    "armature_reaction": {"demagnetizing_at_per_pole_at_rated": 13.649537508286059}}


@example(data=None, tables=SYMMETRIC_TABLES)
@given(st.data(), machine_tables(residual=False))
def test_without_residual_both_polarities_are_alike(data, tables):
    """Without residual magnetism nothing distinguishes the two polarities:
    the curve is odd (design note mirror with E_r = 0), the brush drop and the
    series mmf reverse with the current, and armature reaction demagnetises,
    i.e. opposes the field whichever way it points (Theraja Vol II ch. 27,
    from memory). So on a resistor every operating point (V, IL) has its mirror
    (-V, -IL) among the reported points."""
    m = machine_from_dict(tables)
    if data is None:
        s, load = Setting("shunt", rheostat_ohm=0.5 * m.rheostat_max_ohm), Load.resistor(7.3890560989306495)
    else:
        s = data.draw(settings_for(m, SELF_EXCITED + ["series"]))
        load = Load.resistor(m.rated_voltage_v / m.rated_armature_current_a * data.draw(log_uniform(0.3, 10.0)))
    pts = operating_points(m, s, load).points
    note(f"{pts}")
    span = min(max(abs(p["terminal_voltage_v"]) for p in pts), 1e300) if pts else 0.0
    for p in pts:
        mirror = [q for q in pts if math.isclose(q["terminal_voltage_v"], -p["terminal_voltage_v"],
                                                  rel_tol=1e-7, abs_tol=1e-7 * (1 + span))]
        assert mirror, p
        assert mirror[0]["stable"] == p["stable"]


@given(st.data(), machine_tables(plateau=False))
def test_more_rheostat_never_raises_terminal_voltage(data, tables):
    """Self-excited connections at a fixed load resistance: on the normal
    branch (the highest stable point) more field rheostat never raises the
    terminal voltage (positive polarity: a reversed build-up is not the normal
    branch). Curves here rise throughout: on an exact plateau less
    field current saves a little armature drop and the voltage may creep up
    (physics, not a fault; derived). The same holds where armature reaction
    holds the net field at zero (design note: it never reverses it), so the
    EMF is the residual's whatever the field current: such points are left
    out. Points beyond the measured curve's top are left to
    test_highest_stable_point_is_found_or_reported."""
    m = machine_from_dict(tables)
    s = data.draw(settings_for(m, SELF_EXCITED))
    load = Load.resistor(m.rated_voltage_v / m.rated_armature_current_a * data.draw(log_uniform(0.3, 10.0)))
    r1, r2 = sorted(m.rheostat_max_ohm * np.array(data.draw(st.lists(uniform(0, 1), min_size=2, max_size=2))))
    assume(r2 > r1)
    volts = []
    for r in (r1, r2):
        s_r = Setting(s.connection, rheostat_ohm=float(r), series_turns=s.series_turns, diverter_ohm=s.diverter_ohm,
                      speed_rpm=s.speed_rpm, winding_temperature_c=s.winding_temperature_c)
        v_hi = highest_stable_voltage(m, s_r, load)
        top = 1.2 * circuit(m, s_r)["ratio"] * m.occ_emf_v[-1]
        assume(v_hi is None or v_hi <= top)
        ops = operating_points(m, s_r, load)
        # the normal branch has the polarity of the residual (positive)
        up = [p for p in ops.points if p["stable"] and p["terminal_voltage_v"] >= 0]
        if up:
            x = recompute(m, s_r, up[0]["terminal_voltage_v"], up[0]["load_current_a"])
            xw = x["ish"] + x["nse"] * x["ise"] / m.shunt_turns_per_pole
            assume(xw > demagnetising_at(m, x["ia"]) / m.shunt_turns_per_pole)
        volts.append(up[0]["terminal_voltage_v"] if up else 0.0)
    note(f"rheostat {r1} -> {r2}: {volts}")
    assert volts[1] <= volts[0] + 1e-9 * max(1.0, abs(volts[0]))


@given(st.data(), machine_tables())
def test_separate_no_load_voltage_proportional_to_speed(data, tables):
    """At fixed net mmf the EMF is proportional to speed (E = OCC(F/Nsh) n/n_occ,
    design note), so a separately excited machine's no-load voltage is too."""
    m = machine_from_dict(tables)
    i_f = m.occ_field_current_a[-1] * data.draw(uniform(0.0, 1.2))
    n1, n2 = (m.rated_speed_rpm * data.draw(uniform(0.5, 1.5)) for _ in range(2))
    conn = data.draw(st.sampled_from(["separate", "separate-cumulative", "separate-differential"]
                                     if m.has_series else ["separate"]))
    v = []
    for n in (n1, n2):
        s = Setting(conn, field_current_a=i_f, speed_rpm=n)
        pt = operating_points(m, s, Load.constant_current(0.0)).normal
        ch = external_characteristic(m, s, points=20)
        assert_allclose(ch.no_load_voltage_v, pt["terminal_voltage_v"], rtol=1e-9, atol=1e-9 * m.rated_voltage_v)
        v.append(pt["terminal_voltage_v"])
    assert_allclose(v[1], v[0] * n2 / n1, rtol=1e-9, atol=1e-9 * m.rated_voltage_v)
    assert_allclose(v[0], occ_emf(m, i_f) * n1 / m.occ_speed_rpm, rtol=1e-9, atol=1e-9 * m.rated_voltage_v)


# ---------------------------------------------------------------------------
# bad or odd input never raises anything but InputError
# ---------------------------------------------------------------------------

ODD_NUMBERS = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**6, 10**6),
                        st.sampled_from([0, -1, 0.0, -0.0, 1e-300, 1e300]), st.text(max_size=3),
                        st.booleans(), st.none())


@st.composite
def odd_inputs(draw):
    tables = draw(machine_tables())
    # break a few keys
    for _ in range(draw(st.integers(0, 2))):
        table = draw(st.sampled_from(sorted(tables)))
        if not isinstance(tables[table], dict) or not tables[table]:
            continue
        key = draw(st.sampled_from(sorted(tables[table])))
        choice = draw(st.sampled_from(["value", "drop", "list-item"]))
        if choice == "drop":
            del tables[table][key]
        elif choice == "list-item" and isinstance(tables[table][key], list) and tables[table][key]:
            lst = list(tables[table][key])
            lst[draw(st.integers(0, len(lst) - 1))] = draw(ODD_NUMBERS)
            tables[table][key] = lst
        elif choice == "value":
            tables[table][key] = draw(ODD_NUMBERS)
    if draw(st.booleans()):
        tables[draw(st.sampled_from(["machine", "open_circuit", "winding", "extra"]))] = draw(ODD_NUMBERS)
    keys = ("rheostat_ohm", "field_current_a", "series_turns", "diverter_ohm", "speed_rpm", "winding_temperature_c")
    odd_value = st.one_of(st.none(), st.floats(-1e3, 1e5), st.sampled_from([0.0, float("nan"), float("inf")]))
    try:
        setting = draw(settings_for(machine_from_dict(tables)))
    except InputError:
        setting = Setting("shunt")
    # then break one field of it, or the connection
    what = draw(st.sampled_from(("none", "connection") + keys))
    if what == "connection":
        setting = replace(setting, connection=draw(st.sampled_from(["triple", "separate", "series", "shunt"])))
    elif what != "none":
        setting = replace(setting, **{what: draw(odd_value)})
    kind = draw(st.sampled_from([Load.resistor, Load.constant_current, Load.battery, Load.line]))
    args = [draw(st.floats(-1e4, 1e4)) for _ in range(1 if kind in (Load.resistor, Load.constant_current) else 2)]
    load = kind(*args)
    return tables, setting, load


@given(odd_inputs())
def test_no_exception_but_input_error(case):
    """Bad input gives supplycfg.errors.InputError (a ValueError with one line),
    never another exception (the project's bad-input rule); good input gives
    finite numbers."""
    tables, s, load = case
    try:
        m = machine_from_dict(tables)
    except InputError as exc:
        assert "\n" not in str(exc)
        return
    for call in (lambda: operating_points(m, s, load),
                 lambda: external_characteristic(m, s, points=30),
                 lambda: self_excitation(m, rheostat_ohm=s.rheostat_ohm, speed_rpm=s.speed_rpm,
                                         winding_temperature_c=s.winding_temperature_c),
                 lambda: series_critical_resistance_ohm(m, s.series_turns, s.speed_rpm, s.winding_temperature_c)):
        try:
            res = call()
        except InputError as exc:
            assert "\n" not in str(exc)
            continue
        if hasattr(res, "points") and isinstance(res.points, list):
            for pt in res.points:
                assert all(math.isfinite(pt[k]) for k in pt if isinstance(pt[k], float)), pt
        elif isinstance(res, float):
            assert math.isfinite(res)


def test_subnormal_load_slope_is_a_flat_line():
    """Regression (found by the property test above in a full run): a resistor of 5e-324 ohm overflowed the load
    current read off its line (V / R) and left RuntimeWarnings. A slope below ``LOAD_SLOPE_FLOOR_OHM`` is flat:
    the same answer as 0 ohm (a dead short), without a warning."""
    import warnings
    from pathlib import Path
    from supplycfg.circuit import LOAD_SLOPE_FLOOR_OHM
    from supplycfg.machine import load_machine
    m = load_machine(Path(__file__).resolve().parents[1] / "profiles" / "machines" / "charging-set.toml")
    s = Setting("separate", field_current_a=1.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        tiny = operating_points(m, s, Load.resistor(5e-324))
        short = operating_points(m, s, Load.resistor(0.0))
    assert 5e-324 < LOAD_SLOPE_FLOOR_OHM
    assert [(p["terminal_voltage_v"], p["load_current_a"]) for p in tiny.points] == \
        [(p["terminal_voltage_v"], p["load_current_a"]) for p in short.points]
    assert tiny.points and all(math.isfinite(p["load_current_a"]) for p in tiny.points)
