"""The drive: its table, the machine's losses, the coupled operating point, the drive's limits and `size`.

Sources beside each test: closed forms (derived), textbook worked examples of
generator power stages (B. L. Theraja, A. K. Theraja, *A Textbook of
Electrical Technology* Vol II, ch. 26), conservation of energy (derived),
IEEE Std 113 for the stray-load allowance (from memory), common practice for
governor droop and motor slip. The ngspice checks of the coupled point are in
``test_ngspice.py``.
"""

import json
import math
import re
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, note, strategies as st
from numpy.testing import assert_allclose

from supplycfg import drive as dm
from supplycfg.circuit import (Load, Setting, external_characteristic, operating_points)
from supplycfg.cli import main
from supplycfg.envelope import build_space
from supplycfg.errors import InputError
from supplycfg.jobs import lighting, option_cautions
from supplycfg.machine import load_machine, machine_from_dict, machine_to_dict
from supplycfg.profile import load_profile, profile_from_dict, profile_to_dict
from supplycfg.search import search
from supplycfg.sizing import required_drive_rating

try:
    from .test_properties import log_uniform, machine_tables, settings_for, uniform
except ImportError:
    from test_properties import log_uniform, machine_tables, settings_for, uniform

ROOT = Path(__file__).resolve().parents[1]
MACHINES = ROOT / "profiles" / "machines"
LOADS = ROOT / "profiles" / "loads"


def profile_with(drive, kind="lighting", job=None):
    job = job or {"nominal_voltage_v": 100, "load_current_a": [5, 20]}
    return profile_from_dict({"load": {"kind": kind}, "drive": drive, kind: job}, "drive test")


def loss_sum(pt):
    return sum(v for v in pt["losses_w"].values())


# ---------------------------------------------------------------------------
# the [drive] table and the [losses] table
# ---------------------------------------------------------------------------

def test_fixed_drive_loads_unchanged():
    """A profile without ``kind`` is a fixed drive, read as before (its speeds the generator's)."""
    p = profile_with({"speed_range_rpm": [1400, 1500], "winding_temperature_range_c": [20, 75]})
    assert p.drive.kind == "fixed" and p.drive.ratio == 1.0
    assert p.speeds_rpm == (1400.0, 1500.0) and p.temperatures_c == (20.0, 75.0)
    assert profile_to_dict(p)["drive"] == {"speed_range_rpm": [1400.0, 1500.0], "winding_temperature_range_c": [20.0, 75.0]}


def test_fixed_drive_ratio_scales_the_generator_speed():
    """``ratio`` is generator speed per drive speed (belt or gearing)."""
    p = profile_with({"speed_rpm": 1000, "ratio": 1.5})
    assert_allclose(p.speeds_rpm, (1500.0,), rtol=1e-15)
    assert profile_from_dict(profile_to_dict(p)) == p


@pytest.mark.parametrize("table", [
    {"kind": "engine", "no_load_speed_rpm": 3000, "droop_percent": 5, "rated_power_kw": 10, "idle_speed_rpm": 1800,
     "ratio": 0.5},
    {"kind": "motor", "synchronous_speed_rpm": 1500, "rated_slip_percent": 3.5, "rated_power_kw": 11},
])
def test_coupled_drive_round_trip(table):
    """Engine and motor tables read back unchanged; the motor's breakdown torque defaults to 225 %
    (200-250 %, common practice, from memory)."""
    p = profile_with(table)
    assert p.drive.kind == table["kind"]
    assert profile_from_dict(profile_to_dict(p)) == p
    if table["kind"] == "motor":
        assert p.drive.breakdown_torque_percent == 225.0
        assert p.speeds_rpm == (1500.0,)
    else:
        assert p.speeds_rpm == (1500.0,) and p.drive.idle_generator_speed_rpm == 900.0


@pytest.mark.parametrize("table, key", [
    ({"kind": "engine", "droop_percent": 5, "rated_power_kw": 10}, "drive.no_load_speed_rpm"),
    ({"kind": "engine", "no_load_speed_rpm": 3000, "droop_percent": -1, "rated_power_kw": 10}, "drive.droop_percent"),
    ({"kind": "engine", "no_load_speed_rpm": 3000, "droop_percent": 5, "rated_power_kw": 0}, "drive.rated_power_kw"),
    ({"kind": "engine", "no_load_speed_rpm": 3000, "droop_percent": 5, "rated_power_kw": 10, "idle_speed_rpm": 3000},
     "drive.idle_speed_rpm"),
    ({"kind": "engine", "no_load_speed_rpm": 3000, "droop_percent": 5, "rated_power_kw": 10, "rated_slip_percent": 3},
     "drive.rated_slip_percent"),
    ({"kind": "motor", "synchronous_speed_rpm": 1500, "rated_slip_percent": 0, "rated_power_kw": 5},
     "drive.rated_slip_percent"),
    # a slip written as a fraction (newcomer review): below any induction motor's (0.5 % at the largest, from memory)
    ({"kind": "motor", "synchronous_speed_rpm": 1500, "rated_slip_percent": 0.035, "rated_power_kw": 5},
     "drive.rated_slip_percent"),
    ({"kind": "motor", "synchronous_speed_rpm": 1500, "rated_slip_percent": 3, "rated_power_kw": 5,
      "breakdown_torque_percent": 100}, "drive.breakdown_torque_percent"),
    ({"kind": "motor", "synchronous_speed_rpm": 1500, "rated_slip_percent": 3, "rated_power_kw": 5,
      "speed_rpm": 1450}, "drive.speed_rpm"),
    ({"kind": "diesel", "speed_rpm": 1500}, "drive.kind"),
    ({"speed_rpm": 1500, "ratio": -2}, "drive.ratio"),
    ({"speed_rpm": 1500, "ratio": True}, "drive.ratio"),
    ({"speed_rpm": 1500, "idle_speed_rpm": 1000}, "drive.idle_speed_rpm"),
    ({"speed_rpm": 90000, "ratio": 2}, "drive.speed_rpm"),
])
def test_bad_drive_one_line(table, key):
    """Each broken drive key: an InputError naming the file and the key, on one line (project rule)."""
    with pytest.raises(InputError) as e:
        profile_with(table)
    msg = str(e.value)
    assert "drive test" in msg and key in msg and "\n" not in msg


def test_losses_table_and_defaults():
    """``[losses]`` reads back unchanged; without it the defaults: rotational loss 3 % of rated output
    (2-5 %, common practice, from memory), exponent 1.5 (model choice), stray 1 % of output
    (IEEE Std 113, from memory)."""
    tables = machine_to_dict(load_machine(MACHINES / "charging-set.toml"))
    m = machine_from_dict(tables)
    assert dm.machine_rotational_loss_w(m) == pytest.approx(0.03 * 160 * 60)
    assert dm.machine_loss_exponent(m) == 1.5 and dm.machine_stray_percent(m) == 1.0
    tables["losses"] = {"rotational_loss_w": 250.0, "rotational_loss_speed_exponent": 2.0,
                        "stray_load_loss_percent": 0.5}
    m2 = machine_from_dict(tables)
    assert machine_from_dict(machine_to_dict(m2)) == m2
    assert dm.machine_rotational_loss_w(m2) == 250.0
    for key, bad in (("rotational_loss_w", -1.0), ("stray_load_loss_percent", 50.0), ("typo", 1.0)):
        t = dict(tables, losses={key: bad})
        with pytest.raises(InputError) as e:
            machine_from_dict(t, "m.toml")
        assert f"losses.{key}" in str(e.value)


# ---------------------------------------------------------------------------
# the drive characteristics and the speed solve
# ---------------------------------------------------------------------------

def test_engine_and_motor_characteristics():
    """Engine: 5 % droop at rated power (common practice). Motor: rated slip at rated torque, speed
    linear in torque: at rated power the speed is n_s (1 - s_r) and the torque 100 %; at half the
    torque half the slip (derived from the linear torque line)."""
    assert_allclose(dm.engine_speed_rpm(10e3, 3000, 5, 10), 2850.0, rtol=1e-15)
    n = dm.motor_speed_rpm(11e3, 1500, 4, 11)
    assert_allclose(n, 1440.0, rtol=1e-12)
    assert_allclose(dm.motor_torque_percent(11e3, n, 1500, 4, 11), 100.0, rtol=1e-12)
    n_half = 1500 * 0.98
    p_half = 0.5 * 11e3 * n_half / 1440.0
    assert_allclose(dm.motor_speed_rpm(p_half, 1500, 4, 11), n_half, rtol=1e-12)


def test_speed_solve_reports_several_solutions():
    """A machine driven hard by its load (a battery back-feeding it) past the drive's slope: the
    speed equation's residual falls with speed at the root, which is reported, not hidden
    (project rule: a solve that may have another solution says so)."""
    m = load_machine(MACHINES / "charging-set.toml")
    d = profile_with({"kind": "engine", "no_load_speed_rpm": 1450, "droop_percent": 25, "rated_power_kw": 1}).drive
    rows = dm.DriveRows.build(m, d)
    a = np.array([1e3, -20e3])    # OCC(x) Ia [W]: generating, and strongly motoring
    s, conv, unique = rows.speed_ratio({}, a, 0.0, np.zeros(2))
    assert conv[0] and unique[0]
    assert not (conv[1] and unique[1])


def _newton_speed(rows, a, c):
    """The drive equation solved row by row with plain Newton steps from s0 (the documented method,
    written out here with scalars): P = a s + P_rot(s) + stray |c|, clipped to the speed limits."""
    s0, g = rows.s0, rows.s0 * rows.k
    lo, hi = dm.SPEED_FLOOR_SHARE * s0, dm.SPEED_CEILING_SHARE * s0
    out = []
    for ai, ci in zip(a, c):
        s = s0
        for _ in range(dm.SPEED_NEWTON_STEPS):
            rot, drot = rows.rotational_w(s)
            pw, dpw = ai * s + rot + rows.stray * abs(ci), ai + drot
            if rows.motor:
                f, df = s - s0 + g * pw * s0 / s, 1.0 + g * s0 / s * (dpw - pw / s)
            else:
                f, df = s - s0 + g * pw, 1.0 + g * dpw
            if abs(f) <= dm.SPEED_TOLERANCE * s0:
                break
            step = f / df if df > 0 else (0.1 if f > 0 else -0.1) * s0
            s = min(max(s - step, lo), hi)
        out.append(s)
    return np.array(out)


@pytest.mark.parametrize("kind", ["engine", "motor"])
def test_speed_solve_rows_of_every_kind(kind):
    """Generating rows, a motoring row held at the speed ceiling, and rows of undefined power (NaN):
    the vectorised solve gives each row what Newton's steps from the no-load speed give it alone
    (derived), and the generating rows meet the drive's own characteristic (common practice:
    linear droop, or slip linear in torque)."""
    m = load_machine(MACHINES / "charging-set.toml")
    table = ({"kind": "engine", "no_load_speed_rpm": 1500, "droop_percent": 5, "rated_power_kw": 10}
             if kind == "engine" else
             {"kind": "motor", "synchronous_speed_rpm": 1500, "rated_slip_percent": 4, "rated_power_kw": 10})
    rows = dm.DriveRows.build(m, profile_with(table).drive)
    a = np.array([0.0, 2e3, 8e3, 15e3, -1e6, np.nan, 1e3, 5e3])
    c = np.array([0.0, 1e3, 7e3, 12e3, 5e4, 1e3, np.nan, 4e3])
    s, conv, unique = rows.speed_ratio({}, a, 0.0, c)
    assert_allclose(s, _newton_speed(rows, a, c), rtol=1e-12, atol=0)
    assert_allclose(rows.speed_ratio({}, a, 0.0, c, flags=False)[0], s, rtol=0, atol=0)
    ok = np.isfinite(a) & np.isfinite(c) & (a > -1e5)
    assert conv[ok].all() and unique[ok].all() and not conv[~ok].any()
    assert not unique[~(np.isfinite(a) & np.isfinite(c))].any()
    # many rows at once (whole-array steps, then the open rows gathered, then the last few alone)
    rng = np.random.default_rng(7)
    a2 = np.concatenate([np.tile(a, 10), rng.uniform(-6e4, 4e4, 300)])
    c2 = np.concatenate([np.tile(c, 10), rng.uniform(0.0, 3e4, 300)])
    assert_allclose(rows.speed_ratio({}, a2, 0.0, c2)[0], _newton_speed(rows, a2, c2), rtol=1e-12, atol=0)
    pw = a * s + rows.rotational_w(s)[0] + rows.stray * np.abs(c)
    n_gen = s * m.occ_speed_rpm
    if kind == "engine":
        n_drive = dm.engine_speed_rpm(pw, 1500, 5, 10)
    else:
        n_drive = dm.motor_speed_rpm(pw, 1500, 4, 10)
    assert_allclose(n_gen[ok], n_drive[ok], rtol=1e-11)


# ---------------------------------------------------------------------------
# closed form: separately excited, resistor, linear droop, linear curve
# ---------------------------------------------------------------------------

CLOSED = {
    "machine": {"label": "closed form", "poles": 4, "rated_speed_rpm": 1500, "rated_voltage_v": 200,
                "rated_armature_current_a": 50, "armature_resistance_ohm": 0.1, "shunt_field_resistance_ohm": 50,
                "shunt_turns_per_pole": 1000, "rheostat_max_ohm": 100},
    "open_circuit": {"speed_rpm": 1500, "field_current_a": [0, 1, 2, 3], "emf_v": [0, 100, 200, 300],
                     "interpolation": "linear"},
    "losses": {"rotational_loss_w": 300.0, "rotational_loss_speed_exponent": 1.0, "stray_load_loss_percent": 1.0},
}


@pytest.mark.parametrize("r_ohm", [2.0, 3.1, 8.0])
def test_closed_form_quadratic_in_speed(r_ohm):
    """Separately excited (field 1.5 A on the linear curve E = 100 x n/1500), resistor R, no brush
    drop or armature reaction, rotational loss 300 W (n/1500), stray 1 % of V IL, engine 1550 rpm
    with 5 % droop at 10 kW. With s = n/1500, E = 150 s, Ia = E/(Ra + R):
    P = A s^2 + 300 s, A = 150^2 (1/(Ra+R) + 0.01 R/(Ra+R)^2), and s = s0 (1 - 0.05 P/10^4),
    so s0 k A s^2 + (1 + 300 s0 k) s - s0 = 0 (derived); its positive root to 1e-6."""
    m = machine_from_dict(CLOSED)
    d = profile_with({"kind": "engine", "no_load_speed_rpm": 1550, "droop_percent": 5, "rated_power_kw": 10}).drive
    ra = 0.1
    a = 150.0 ** 2 * (1 / (ra + r_ohm) + 0.01 * r_ohm / (ra + r_ohm) ** 2)
    s0, k = 1550 / 1500, 0.05 / 10e3
    qa, qb, qc = s0 * k * a, 1 + 300 * s0 * k, -s0
    s = (-qb + math.sqrt(qb * qb - 4 * qa * qc)) / (2 * qa)
    op = operating_points(m, Setting("separate", field_current_a=1.5), Load.resistor(r_ohm), d)
    assert op.converged and len(op.points) == 1
    pt = op.points[0]
    assert_allclose(pt["speed_rpm"], 1500 * s, rtol=1e-6)
    assert_allclose(pt["terminal_voltage_v"], r_ohm * 150 * s / (ra + r_ohm), rtol=1e-6)
    assert_allclose(pt["shaft_power_kw"] * 1e3, a * s * s + 300 * s, rtol=1e-6)


# ---------------------------------------------------------------------------
# published power flow
# ---------------------------------------------------------------------------

def flat_top_machine(ra, rsh, e_top, x_flat, rot_w=0.0, series=None):
    """A machine whose curve is flat at ``e_top`` over ``x_flat`` so a textbook point is an exact
    operating point: the published E stands, whatever the field current there."""
    m = {"label": "textbook", "poles": 4, "rated_speed_rpm": 1000, "rated_voltage_v": 250,
         "rated_armature_current_a": 200, "armature_resistance_ohm": ra, "shunt_field_resistance_ohm": rsh,
         "shunt_turns_per_pole": 100, "rheostat_max_ohm": 10}
    if series:
        m.update(series)
    lo, hi = x_flat
    return machine_from_dict({"machine": m,
                              "open_circuit": {"speed_rpm": 1000, "field_current_a": [0, 1, lo, hi],
                                               "emf_v": [10, 0.5 * e_top, e_top, e_top], "interpolation": "linear"},
                              "losses": {"rotational_loss_w": rot_w, "stray_load_loss_percent": 0.0}})


def test_theraja_shunt_generator_efficiency():
    """Theraja Vol II ch. 26, the power-stages example of a shunt generator delivering 195 A at
    250 V, Ra 0.02 ohm, Rsh 50 ohm, iron and friction 950 W (example number and answers from
    memory): E = 254 V, copper losses 800 + 1250 = 2050 W, prime-mover output 51.75 kW,
    commercial efficiency 94.2 %, mechanical 98.2 %, electrical 96.0 % (answers re-derived)."""
    m = flat_top_machine(0.02, 50.0, 254.0, (4.0, 6.0), rot_w=950.0)
    op = operating_points(m, Setting("shunt"), Load.constant_current(195.0))
    pt = op.normal
    assert_allclose([pt["terminal_voltage_v"], pt["armature_current_a"], pt["generated_emf_v"]],
                    [250.0, 200.0, 254.0], rtol=1e-9)
    ls = pt["losses_w"]
    assert_allclose([ls["armature_copper"], ls["field_circuit"], ls["rotational"]], [800.0, 1250.0, 950.0], rtol=1e-9)
    assert ls["brush_contact"] == 0 and ls["stray_load"] == 0 and ls["series_branch"] == 0
    assert_allclose(pt["shaft_power_kw"], 51.75, rtol=1e-9)
    assert_allclose(pt["efficiency"], 48750 / 51750, rtol=1e-9)
    assert round(100 * pt["efficiency"], 1) == 94.2
    electrical = pt["generated_emf_v"] * pt["armature_current_a"]
    assert round(100 * electrical / (1e3 * pt["shaft_power_kw"]), 1) == 98.2
    assert round(100 * 48750 / electrical, 1) == 96.0


def test_theraja_long_shunt_power_distribution():
    """Theraja Vol II Ex 26.6 (S. Chand numbering; inputs and method seen in a public companion of
    the book, answers derived): long-shunt compound, 150 A at 230 V, Rsh 92, Rse 0.015, diverter
    0.03, Ra 0.032 ohm: E = 236.4 V, power generated E Ia = 36 051.8 W, lost in the armature
    744.2 W, in series field and diverter 232.6 W, in the shunt winding 575 W, delivered 34 500 W."""
    series = {"series_field_resistance_ohm": 0.015, "series_turns_per_pole": 10, "series_taps": [0, 10]}
    m = flat_top_machine(0.032, 92.0, 236.405, (10.0, 20.0), series=series)
    st = Setting("long-shunt-cumulative", diverter_ohm=0.03)
    pt = operating_points(m, st, Load.constant_current(150.0)).normal
    assert_allclose(pt["terminal_voltage_v"], 230.0, rtol=1e-9)
    assert_allclose(pt["generated_emf_v"], 236.4, atol=0.01)
    ls = pt["losses_w"]
    assert_allclose([ls["armature_copper"], ls["series_branch"], ls["field_circuit"]], [744.2, 232.6, 575.0], atol=0.05)
    electrical = pt["generated_emf_v"] * pt["armature_current_a"]
    assert_allclose(electrical, 36051.8, atol=0.1)
    assert_allclose(34500 + ls["armature_copper"] + ls["series_branch"] + ls["field_circuit"], electrical, rtol=1e-12)


# ---------------------------------------------------------------------------
# energy balance at every reported point, over random machines, drives and loads
# ---------------------------------------------------------------------------

@st.composite
def driven_cases(draw):
    tables = draw(machine_tables())
    m0 = machine_from_dict(tables)
    vr, ir, nr = m0.rated_voltage_v, m0.rated_armature_current_a, m0.rated_speed_rpm
    if draw(st.booleans()):
        tables["losses"] = {"rotational_loss_w": vr * ir * draw(uniform(0.0, 0.08)),
                            "rotational_loss_speed_exponent": draw(uniform(0.5, 3.0)),
                            "stray_load_loss_percent": draw(uniform(0.0, 3.0))}
    m = machine_from_dict(tables)
    ratio = draw(st.sampled_from([1.0, draw(uniform(0.5, 2.0))]))
    kw = vr * ir * 1e-3 * draw(log_uniform(0.6, 3.0))
    top = nr / ratio * draw(uniform(0.9, 1.1))
    kind = draw(st.sampled_from(["engine", "motor", "fixed"]))
    if kind == "engine":
        table = {"kind": "engine", "no_load_speed_rpm": top, "droop_percent": draw(uniform(0.0, 12.0)),
                 "rated_power_kw": kw}
    elif kind == "motor":
        table = {"kind": "motor", "synchronous_speed_rpm": top, "rated_slip_percent": draw(uniform(1.0, 8.0)),
                 "rated_power_kw": kw}
    else:
        table = {"speed_rpm": top}
    table["ratio"] = ratio
    drive = profile_with(table).drive
    s = draw(settings_for(m))
    if kind == "fixed":
        s = replace(s, speed_rpm=drive.generator_speeds_rpm()[0])
    base = vr / ir
    kind = draw(st.sampled_from(["resistor", "current", "battery"]))
    if kind == "resistor":
        load = Load.resistor(base * draw(log_uniform(0.3, 30.0)))
    elif kind == "current":
        load = Load.constant_current(ir * draw(uniform(-0.5, 1.5)))
    else:
        load = Load.battery(vr * draw(uniform(0.5, 1.2)), base * draw(log_uniform(0.001, 0.1)))
    return m, drive, s, load


def check_balance(pt, drive):
    """Shaft + exciter power = output + every loss (1e-9 relative), and the speed is the drive's at that power.

    The engine's speed is linear in power, the motor's in torque (``n = n_s (1 - s_r T / T_r)`` with
    ``T / T_r = (P / P_r) n_r / n``; past its breakdown torque too, where the point is flagged by the
    job, not here).
    """
    out = pt["terminal_voltage_v"] * pt["load_current_a"]
    inp = 1e3 * pt["shaft_power_kw"] + pt["exciter_power_w"]
    scale = abs(inp) + abs(out) + sum(abs(v) for v in pt["losses_w"].values())
    assert abs(inp - out - loss_sum(pt)) <= 1e-9 * scale + 1e-12, (inp, out, loss_sum(pt))
    if drive is None or not drive.coupled:
        return
    p_w = 1e3 * pt["shaft_power_kw"]
    n = pt["speed_rpm"] / drive.ratio
    if n <= dm.SPEED_FLOOR_SHARE * drive.top_speed_rpm * (1 + 1e-9):
        return      # held at the floor: a stalled set
    pr = 1e3 * drive.rated_power_kw
    if drive.kind == "engine":
        want = drive.no_load_speed_rpm * (1 - drive.droop_percent / 100 * p_w / pr)
    else:
        slip = drive.rated_slip_percent / 100
        torque = p_w / pr * drive.synchronous_speed_rpm * (1 - slip) / n
        want = drive.synchronous_speed_rpm * (1 - slip * torque)
    assert_allclose(n, want, rtol=1e-9)


@given(driven_cases())
def test_energy_balance_at_every_operating_point(case):
    """Every operating point on an engine, a motor or a fixed drive: shaft power plus exciter power equals the
    electrical output plus armature and series-branch copper, brush, shunt-field, rotational and
    stray losses to 1e-9 relative (conservation of energy, derived), and its speed is the drive's
    characteristic at its shaft power (the coupled point's definition)."""
    m, drive, s, load = case
    ops = operating_points(m, s, load, drive)
    note(f"{drive}\n{s}\n{load}")
    assert ops.converged or ops.message
    for pt in ops.points:
        if ops.converged:
            check_balance(pt, drive)


@given(driven_cases())
def test_energy_balance_along_driven_characteristics(case):
    """The same balance at every point of the external characteristic on the drive."""
    m, drive, s, _ = case
    ch = external_characteristic(m, s, 40, drive)
    for pt in ch.point_list():
        if ch.converged:
            check_balance(pt, drive)


@pytest.mark.parametrize("kind, stems", [("battery", ("charging-set", "battery-charging")),
                                         ("welding", ("welding-set", "welding"))])
def test_energy_balance_at_the_search_drive_points(kind, stems):
    """The demo options' drive points balance too, and each carries the issue's keys."""
    m = load_machine(MACHINES / f"{stems[0]}.toml")
    p = load_profile(LOADS / f"{stems[1]}.toml")
    res = search(m, p)
    for o in res.options[:5]:
        assert o.drive_points
        for pt in o.drive_points:
            assert {"speed_rpm", "shaft_power_kw", "drive_loading_percent", "efficiency", "losses_w"} <= set(pt)
            if pt["shaft_power_kw"] is None:
                continue
            check_balance(pt, p.drive)


# ---------------------------------------------------------------------------
# the drive's limits and cautions
# ---------------------------------------------------------------------------

def test_demo_drives_fit_their_scenario():
    """The welding set on a governed engine, the charging set on an induction motor, with figures of
    real sets: droop and slip of a few per cent (common practice), no-load generator speed at or
    below the machine's rating (belt ratio), the best option's peak shaft power inside the rating,
    and the drive sized near the machine (the motor about its machine's output; the engine about
    the welding peak)."""
    for stems, kind in ((("welding-set", "welding"), "engine"), (("charging-set", "battery-charging"), "motor")):
        m = load_machine(MACHINES / f"{stems[0]}.toml")
        p = load_profile(LOADS / f"{stems[1]}.toml")
        d = p.drive
        assert d.kind == kind
        frac = d.droop_percent if kind == "engine" else d.rated_slip_percent
        assert 2 <= frac <= 8
        assert p.speeds_rpm[0] <= m.rated_speed_rpm
        best = search(m, p).feasible[0]
        peak = best.figures["max_shaft_power_kw"]
        assert 0.2 * d.rated_power_kw < peak < d.rated_power_kw
        assert best.figures["min_speed_rpm"] < 0.995 * p.speeds_rpm[0]   # it really slows
        if kind == "motor":
            assert 1.0 <= d.rated_power_kw / (1e-3 * m.rated_voltage_v * m.rated_armature_current_a) <= 1.5
        else:
            assert peak > 0.6 * d.rated_power_kw
            # the idle voltage is told once: by the welding job's strike note where it is below the strike
            assert sum(c.rule in ("drive-idle", "welding-strike-at-idle") for c in best.cautions) == 1


def test_too_small_drive_is_named_and_sized():
    """A motor too small for the booster: nothing is feasible and the notes say the drive limits
    it; `size` finds a rating with which a setting meets the job, and 5 % below it none does
    (issue rule; rating to 1 %)."""
    m = load_machine(MACHINES / "feeder-booster.toml")
    d = profile_to_dict(load_profile(LOADS / "booster.toml"))
    d["drive"] = {"kind": "motor", "synchronous_speed_rpm": 1000, "rated_slip_percent": 4, "rated_power_kw": 12,
                  "winding_temperature_range_c": [20, 75]}
    p = profile_from_dict(d, "small motor")
    res = search(m, p)
    assert not res.feasible
    assert any("the drive limits this job" in n for n in res.notes)
    assert any("drive_power" in o.failed for o in res.options)
    size = required_drive_rating(m, p)
    need = size.required_drive_kw
    assert need is not None and need > 12
    assert size.option.feasible and size.option.figures["max_shaft_power_kw"] <= need * (1 + 1e-12)
    assert search(m, replace(p, drive=p.drive.with_rating(need))).feasible
    assert not search(m, replace(p, drive=p.drive.with_rating(0.95 * need))).feasible
    assert size.infeasible_below_kw >= need / 1.01


def test_motor_past_breakdown_is_a_stop():
    """Torque above the motor's breakdown torque: a `stop` (the set stalls); never feasible."""
    m = load_machine(MACHINES / "feeder-booster.toml")
    d = profile_to_dict(load_profile(LOADS / "booster.toml"))
    d["drive"] = {"kind": "motor", "synchronous_speed_rpm": 1000, "rated_slip_percent": 4, "rated_power_kw": 8,
                  "breakdown_torque_percent": 200}
    res = search(m, profile_from_dict(d, "tiny motor"))
    stalled = [o for o in res.options if any(c.rule == "drive-stall" and c.severity == "stop" for c in o.cautions)]
    assert stalled and not any(o.feasible for o in stalled)
    for o in stalled:
        assert o.figures["max_drive_torque_percent"] > 200


def test_self_excited_machine_collapsing_on_a_drooping_engine_is_a_stop():
    """A shunt machine that holds 100 V at 20 A on a fixed 1450 rpm (rheostat 60 ohm) has no stable
    loaded point at the speed a 3 kW engine with 20 % droop falls to: `drive-collapse`, a stop
    (self-excitation below critical speed, Theraja Vol II ch. 28)."""
    m = load_machine(MACHINES / "charging-set.toml")
    job = {"nominal_voltage_v": 100, "load_current_a": [5, 20], "tolerance_percent": 50}
    fixed = build_space(m, profile_with({"speed_rpm": 1450}, job=job))
    eng = build_space(m, profile_with({"kind": "engine", "no_load_speed_rpm": 1450, "droop_percent": 20,
                                       "rated_power_kw": 3}, job=job))
    shunt = [i for i, b in enumerate(fixed.bases) if b[0] == "shunt"][:1]
    _, f_fixed = lighting.evaluate(fixed, np.array(shunt), np.array([60.0]))
    assert np.isfinite(f_fixed["load_voltage_min_v"][0])
    lim, f_eng = lighting.evaluate(eng, np.array(shunt), np.array([60.0]))
    assert f_eng["collapsed_load_points"][0] >= 1
    figs = {k: float(v[0]) for k, v in f_eng.items() if k != "drive_points" and np.ndim(v)}
    figs["top_speed_rpm"] = 1450.0
    rules = {c.rule: c.severity for c in option_cautions(m, eng.profile, Setting("shunt", rheostat_ohm=60.0), figs)}
    assert rules.get("drive-collapse") == "stop"


def test_no_load_limits_at_the_drives_no_load_speed():
    """No-load voltage limits are checked at the drive's no-load (highest) speed: the welding demo's
    no-load figure is the fixed-speed no-load voltage at the engine's no-load speed through the belt."""
    m = load_machine(MACHINES / "welding-set.toml")
    p = load_profile(LOADS / "welding.toml")
    o = search(m, p).feasible[0]
    top = p.drive.ratio * p.drive.no_load_speed_rpm
    cold = min(p.temperatures_c)
    vals = []
    for cs in o.current_settings:
        st = replace(o.setting, rheostat_ohm=cs["rheostat_ohm"], speed_rpm=top, winding_temperature_c=cold)
        vals.append(operating_points(m, st, Load.constant_current(0.0)).normal["terminal_voltage_v"])
    assert_allclose(o.figures["max_no_load_voltage_v"], max(vals), rtol=1e-4)


# ---------------------------------------------------------------------------
# the command line
# ---------------------------------------------------------------------------

def test_curve_and_point_carry_the_drive_keys(capsys):
    """`curve` and `point` with `--profile`: every point has speed, shaft power, loading, efficiency
    and losses by kind; the speed falls from no load."""
    mp, pp = MACHINES / "charging-set.toml", LOADS / "battery-charging.toml"
    assert main(["curve", str(mp), "--connection", "shunt", "--rheostat-ohm", "40", "--points", "12",
                 "--profile", str(pp), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    keys = {"speed_rpm", "shaft_power_kw", "drive_loading_percent", "efficiency", "losses_w"}
    assert all(keys <= set(pt) for pt in d["points"])
    assert d["points"][0]["speed_rpm"] > d["points"][3]["speed_rpm"]
    assert main(["point", str(mp), "--connection", "shunt", "--rheostat-ohm", "40", "--load-ohm", "4",
                 "--profile", str(pp), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert all(keys <= set(pt) for pt in d["operating_points"])
    assert main(["point", str(mp), "--connection", "shunt", "--load-ohm", "4", "--speed-rpm", "1400",
                 "--profile", str(pp)]) == 2
    assert "--speed-rpm" in capsys.readouterr().err


def test_size_json(capsys):
    """`supplycfg size MACHINE PROFILE --json`: required_drive_kw and the option at that rating; a
    fixed drive needs the peak shaft power of the feasible setting that needs least."""
    mp = MACHINES / "feeder-booster.toml"
    assert main(["size", str(mp), str(LOADS / "booster.toml"), "--json"]) == 0
    fixed = json.loads(capsys.readouterr().out)
    assert fixed["required_drive_kw"] > 0 and fixed["option"]["feasible"]
    assert_allclose(fixed["required_drive_kw"], fixed["option"]["figures"]["max_shaft_power_kw"], rtol=1e-12)


def test_sheet_gives_the_drive_and_tachometer_checks(tmp_path):
    """The setting sheet names the drive and gives the expected generator speed at no load and at
    the heaviest point of the job, to check with a tachometer; the figures come from the option."""
    from supplycfg.report import sheet_markdown
    m = load_machine(MACHINES / "charging-set.toml")
    p = load_profile(LOADS / "battery-charging.toml")
    res = search(m, p)
    md = sheet_markdown(res, date="2026-01-01")
    o = res.options[0]
    assert "induction motor, 11 kW" in md
    assert "Drive speed on the tachometer (generator shaft)" in md
    assert (f"about {o.figures['no_load_speed_rpm']:.0f} rpm load off; about {o.figures['min_speed_rpm']:.0f} rpm at "
            "the heaviest point of the job") in md
    assert o.figures["min_speed_rpm"] < o.figures["no_load_speed_rpm"] <= p.speeds_rpm[0]


@pytest.mark.parametrize("why", ["duty cycle", "overspeed"])
def test_drive_check_skipped_where_a_larger_drive_cannot_help(monkeypatch, why):
    """A welding set rated below the duty cycle's equivalent current breaks that limit in every
    option whatever drives it; one belted up past 1.2 x its rated speed has the overspeed stop in
    every option, which a larger drive of the same speeds keeps. Either way the drive-limit check
    answers None without searching again, the same answer as the search with a 100 x drive gives
    (regression: the fleet paid that search for every such machine)."""
    from supplycfg import search as search_mod
    from supplycfg.jobs import welding
    m = load_machine(MACHINES / "welding-set.toml")
    prof = load_profile(ROOT / "profiles" / "loads" / "welding.toml")
    if why == "duty cycle":
        m = replace(m, rated_armature_current_a=0.5 * m.rated_armature_current_a)
    else:
        table = profile_to_dict(prof)
        table["drive"]["ratio"] = 1.3 * m.rated_speed_rpm / prof.drive.top_speed_rpm
        prof = profile_from_dict(table, "overspeed test")
    res = search(m, prof, with_drive_check=False, advice=False)
    assert res.options and not res.feasible
    if why == "duty cycle":
        assert all("duty_cycle_heating" in o.failed for o in res.options)
    else:
        assert all(any(c.rule == "overspeed" and c.severity == "stop" for c in o.cautions) for o in res.options)
    calls = []
    real = search_mod.search
    monkeypatch.setattr(search_mod, "search", lambda *a, **k: calls.append(1) or real(*a, **k))
    assert search_mod.drive_limit_check(m, prof, res.options) == (None, [])
    assert calls == []
    monkeypatch.setattr(welding, "DRIVE_FREE_LIMITS", ())
    monkeypatch.setattr(search_mod, "RATING_FREE_STOPS", ())
    assert search_mod.drive_limit_check(m, prof, res.options) == (None, [])
    assert calls == [1]


def test_newton_speed_step_fallback_rows_only_matches_the_whole_where():
    """The fallback step worked out on the rows with a non-positive slope gives the numbers of the
    where over every row (closed form: s - f/df, or -+0.1 s0 towards the root, held in [lo, hi])."""
    from supplycfg.drive import newton_speed_step
    rng = np.random.default_rng(3)
    s = rng.uniform(0.5, 1.5, 400); f = rng.normal(0, 0.2, 400); df = rng.normal(0.5, 1.0, 400)
    f[::37] = np.nan
    s0, lo, hi = 1.0, 0.02, 3.0
    ok = df > 0
    ref = np.minimum(np.maximum(s - np.where(ok, f / np.where(ok, df, 1.0), np.where(f > 0, 0.1, -0.1) * s0), lo), hi)
    np.testing.assert_array_equal(newton_speed_step(s, f, df, s0, lo, hi), ref)
    for k in (0, 1, 5):  # one row: numpy scalars take the same route
        got = newton_speed_step(np.float64(s[k]), np.float64(f[k]), np.float64(-abs(df[k])), s0, lo, hi)
        want = min(max(s[k] - (0.1 if f[k] > 0 else -0.1) * s0, lo), hi)
        np.testing.assert_allclose(got, want, rtol=0, atol=0)


def test_size_welding_dial_is_not_called_option_1(capsys):
    """Regression: `size` headed the dial of its best setting at the smallest rating "Option 1, welding dial",
    the name of a different setting in `search` (3 series turns there, 12 here)."""
    assert main(["size", str(MACHINES / "welding-set.toml"), str(LOADS / "welding.toml")]) == 0
    out = capsys.readouterr().out
    assert "Welding dial: set the tap" in out and "Option 1" not in out


def test_size_advises_the_next_standard_rating(capsys):
    """The smallest rating found is fully loaded at the job's heaviest point (99.5 % in the battery demo): the
    text says to choose the next standard rating above it (common practice)."""
    assert main(["size", str(MACHINES / "charging-set.toml"), str(LOADS / "battery-charging.toml")]) == 0
    assert "choose the next standard rating above it" in capsys.readouterr().out


def test_curve_and_point_stop_a_motor_past_its_breakdown_torque(tmp_path, capsys):
    """Regression (fuzz review): with a 0.5 kW motor `point` said the machine 'sits here' at 836 % of
    rated torque and `curve` showed 831 %, each with a warning only, while `search` gave the same setting
    a drive-stall stop. Past its breakdown torque an induction motor stalls (torque-slip curve, from
    memory); the same stop now comes from every command."""
    from supplycfg.cli import main
    root = Path(__file__).resolve().parents[1]
    text = (root / "profiles" / "loads" / "battery-charging.toml").read_text(encoding="utf-8")
    assert "rated_power_kw = 11 " in text
    prof = tmp_path / "small.toml"
    prof.write_text(text.replace("rated_power_kw = 11 ", "rated_power_kw = 0.5 "), encoding="utf-8")
    machine = str(root / "profiles" / "machines" / "charging-set.toml")
    base = ["--connection", "shunt", "--rheostat-ohm", "20", "--profile", str(prof), "--json"]
    for argv in (["point", machine, "--load-ohm", "3"] + base, ["curve", machine, "--points", "6"] + base):
        assert main(argv) == 0
        res = json.loads(capsys.readouterr().out)
        assert any(c["rule"] == "drive-stall" and c["severity"] == "stop" for c in res["cautions"]), argv[0]


def test_a_machine_that_motors_its_drive_is_held_to_the_overspeed_rule_at_its_highest_speed():
    """Safety audit: the overspeed rule read only the drive's top (no-load) speed; a machine a bank drives as
    a motor at some point of the job runs faster than that (an engine's governor cannot brake it). At 1800 rpm
    on a 1450 rpm machine (over the 1.2 x overspeed test of IEC 60034-1, recalled) it is a stop."""
    from supplycfg.cautions import setting_cautions
    from supplycfg.circuit import Setting
    from supplycfg.machine import load_machine
    m = load_machine(Path(__file__).resolve().parents[1] / "profiles" / "machines" / "charging-set.toml")
    st = Setting("shunt", rheostat_ohm=30.0, speed_rpm=1450.0)
    c = [x for x in setting_cautions(m, st, {"top_speed_rpm": 1450.0, "max_speed_rpm": 1800.0}) if x.rule == "overspeed"]
    assert c and c[0].severity == "stop" and "Driven as a motor" in c[0].message
    assert not [x for x in setting_cautions(m, st, {"top_speed_rpm": 1450.0, "max_speed_rpm": 1440.0})
                if x.rule == "overspeed"]


def test_a_drive_that_overspeeds_the_machine_is_named_as_the_cause(tmp_path, capsys):
    """A welding set belted to 2700 rpm at the engine's no-load speed (rated 2000 rpm, the overspeed stop at
    1.2 x rated, IEC 60034-1 overspeed test, recalled): every setting carries the stop. `size` said 'the
    machine itself cannot do it' after growing the rating to 100000 kW; `search`, `size` and `fleet` now
    name the drive's speed and the ratio that cures it, rated / no-load speed = 2000 / 3000 (closed form)."""
    from supplycfg.fleet import fleet_rows, fleet_search
    from supplycfg.search import drive_overspeed
    m = load_machine(MACHINES / "welding-set.toml")
    table = profile_to_dict(load_profile(ROOT / "profiles" / "loads" / "welding.toml"))
    table["drive"]["ratio"] = 0.9
    prof = profile_from_dict(table, "fast belt")
    top, ratio = drive_overspeed(m, prof)
    assert_allclose((top, ratio), (2700.0, 2000.0 / 3000.0), rtol=1e-12)
    res = search(m, prof)
    assert any("the cure is the drive's speed: a belt or gearing ratio of at most 0.667" in n for n in res.notes)
    size = required_drive_rating(m, prof)
    assert size.required_drive_kw is None and size.searches == 0
    assert "every setting carries the overspeed stop" in size.notes[0]
    assert not any("machine itself cannot" in n for n in size.notes)
    folder = tmp_path / "fleet"
    folder.mkdir()
    (folder / "w.toml").write_text((MACHINES / "welding-set.toml").read_text(encoding="utf-8"), encoding="utf-8")
    row = fleet_rows(fleet_search(folder, prof))[0]
    assert "ratio of at most 0.667" in row["drive needed"]
    assert row["breaks"] == "carries a stop caution (overspeed)"
    assert drive_overspeed(m, load_profile(ROOT / "profiles" / "loads" / "welding.toml")) is None


def test_rating_to_choose_is_one_that_can_be_bought():
    """The least rating is found to 1 %, so four figures of it (7.118 kW, 54.57 kW) are false precision and no
    rating one can buy: an engine's is rounded up to two figures, a motor's is the next standard rating
    (IEC 60072-1's series, recalled: ..., 3, 4, 5.5, 7.5, 11, ...). Never below the least that meets the job.
    (Regression: `size` led with '54.57 kW'.)"""
    from supplycfg.sizing import rating_to_choose_kw
    assert rating_to_choose_kw(7.118, "engine") == pytest.approx(7.2)
    assert rating_to_choose_kw(54.57, "engine") == pytest.approx(55.0)
    assert rating_to_choose_kw(120.0, "engine") == pytest.approx(120.0)
    assert rating_to_choose_kw(3.45, "motor") == 4.0
    assert rating_to_choose_kw(7.5, "motor") == 7.5
    assert rating_to_choose_kw(None, "motor") is None


def test_size_leads_with_the_rating_to_choose(capsys):
    """`size` on the welding demo (engine): the first figure is the rounded-up rating, then the least found."""
    root = Path(__file__).resolve().parents[1]
    assert main(["size", str(root / "profiles" / "machines" / "welding-set.toml"),
                 str(root / "profiles" / "loads" / "welding.toml")]) == 0
    line = capsys.readouterr().out.splitlines()[1]
    assert re.match(r"Engine rating to choose: \d+(\.\d)? kW, rounded up; the least that meets the job is "
                    r"\d+(\.\d+)? kW \(found to 1 %", line), line
