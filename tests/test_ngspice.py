"""The engine against an independent solver: ngspice.

Method (the source of every check here): ngspice 39 batch solve of the
equivalent circuit, an independent general-purpose circuit solver. Each
setting is built as a circuit of its physical elements (``tests/spice.py``):
armature, series-winding, diverter, shunt-winding, rheostat and load
resistors; zero-volt sources sensing the currents; the EMF a behavioural
source reading the open-circuit characteristic as a ``pwl()`` table of the
net mmf per pole (armature reaction inside the mmf expression); the brush
drop a behavioural source; copper resistances corrected by ngspice's own
``tc1``/``.temp``. ngspice solves that circuit by Newton iteration with its
own continuation along a ``.dc`` sweep; nothing of the engine's algebra is
reused. The machine asks for ``linear`` interpolation so both read the same
curve. Agreement is required within 0.2 %.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from supplycfg.circuit import (CONNECTIONS, Load, Setting, external_characteristic,
                               operating_points)
from supplycfg.machine import machine_from_dict

try:
    from . import spice
except ImportError:
    import spice

pytestmark = pytest.mark.skipif(
    spice.NGSPICE is None,
    reason="ngspice is not installed (Debian package 'ngspice'); the independent-solver checks need it")

#: Relative tolerance of the comparison (0.2 %, the required agreement).
RTOL = 2e-3
#: Absolute floor [V] or [A] for quantities that are zero in a connection.
ATOL = 1e-6
QUANTITIES = ("terminal_voltage_v", "load_current_a", "armature_current_a",
              "shunt_field_current_a", "series_field_current_a", "generated_emf_v")
#: Starting conductance of a sweep [S]: a heavy load, near a short circuit.
HEAVY_LOAD_S = 50.0
#: Field flash at the start of a sweep, as equivalent field current [A]: twice
#: the last OCC point. A cumulative series field also holds a reversed-polarity
#: state on a heavy load; unflashed, ngspice sometimes started there.
FLASH_A = 5.0

# Invented test machine: 220 V, 50 A, shunt and series windings, linear OCC
# with residual voltage, linear armature reaction, carbon brushes.
MACHINE = {
    "machine": {
        "label": "ngspice check machine",
        "poles": 4,
        "rated_speed_rpm": 1500,
        "rated_voltage_v": 220,
        "rated_armature_current_a": 50,
        "armature_resistance_ohm": 0.25,
        "brush_drop_v": 2.0,
        "shunt_field_resistance_ohm": 110,
        "shunt_turns_per_pole": 1000,
        "series_field_resistance_ohm": 0.1,
        "series_turns_per_pole": 20,
        "series_taps": [0, 4, 8, 20],
        "rheostat_max_ohm": 200,
        "excitation_voltage_v": 110,
        "reference_temperature_c": 75,
    },
    "open_circuit": {
        "speed_rpm": 1500,
        "field_current_a": [0.0, 0.2, 0.4, 0.6, 0.8, 1.0, 1.25, 1.5, 1.75, 2.0, 2.5],
        "emf_v": [6.0, 50.0, 96.0, 135.0, 165.0, 188.0, 208.0, 222.0, 232.0, 240.0, 250.0],
        "interpolation": "linear",
    },
    "armature_reaction": {"demagnetizing_at_per_pole_at_rated": 150},
}

#: One setting per connection (taps, diverters, speeds and temperatures varied)
#: and the load resistances [ohm] checked, from light load to past breakdown.
CASES = {
    "separate": (Setting("separate", field_current_a=1.2, speed_rpm=1400, winding_temperature_c=20),
                 (20.0, 8.0, 4.0, 2.5, 1.0)),
    "separate-cumulative": (Setting("separate-cumulative", rheostat_ohm=20, series_turns=8,
                                    winding_temperature_c=95),
                            (20.0, 8.0, 4.0, 2.0, 0.5)),
    "separate-differential": (Setting("separate-differential", field_current_a=1.5, series_turns=4,
                                      diverter_ohm=0.03),
                              (20.0, 8.0, 4.0, 2.0)),
    "shunt": (Setting("shunt", rheostat_ohm=40), (40.0, 10.0, 5.0, 3.0, 2.2, 1.5)),
    "series": (Setting("series", series_turns=20), (3.0, 2.0, 1.2)),
    "long-shunt-cumulative": (Setting("long-shunt-cumulative", rheostat_ohm=40, series_turns=8,
                                      diverter_ohm=0.05, speed_rpm=1450),
                              (40.0, 10.0, 4.0, 2.0, 1.0)),
    "short-shunt-cumulative": (Setting("short-shunt-cumulative", rheostat_ohm=30, series_turns=4,
                                       winding_temperature_c=40),
                               (40.0, 10.0, 4.0, 2.0, 1.0)),
    "long-shunt-differential": (Setting("long-shunt-differential", rheostat_ohm=20, series_turns=4,
                                        winding_temperature_c=60),
                                (40.0, 10.0, 5.0, 3.5, 2.5)),
    "short-shunt-differential": (Setting("short-shunt-differential", rheostat_ohm=20, series_turns=4,
                                         speed_rpm=1600),
                                 (40.0, 10.0, 5.0, 3.5, 2.5)),
}
EXPLICIT = ("separate", "separate-cumulative", "separate-differential", "series")
#: Settings whose characteristic turns back at a breakdown current.
TURN_BACK = ("shunt", "long-shunt-differential", "short-shunt-differential")


@pytest.fixture(scope="module")
def machine():
    return machine_from_dict(MACHINE, "ngspice check machine")


def conductance_path(targets_s, heavy_s=HEAVY_LOAD_S, fill=40):
    """Load conductances [S] from a heavy load down through every target.

    Geometric filler points keep each step of the continuation small.
    """
    targets = np.asarray(targets_s, float)
    lo = targets[targets > 0].min()
    path = np.concatenate([np.geomspace(heavy_s, lo, fill), targets])
    return tuple(np.unique(path)[::-1])


def engine_arrays(points):
    return {k: np.array([p[k] for p in points]) for k in QUANTITIES}


def assert_same(engine, ngs, what):
    for k in QUANTITIES:
        assert_allclose(engine[k], ngs[k], rtol=RTOL, atol=ATOL, err_msg=f"{what}: {k}")


def test_every_connection_has_a_case():
    """The nine connections of the design note each get an ngspice case."""
    assert set(CASES) == set(CONNECTIONS)


@pytest.mark.parametrize("connection", CONNECTIONS)
def test_resistor_load_matches_ngspice(machine, connection, tmp_path):
    """Normal operating point against resistor loads.

    Source: ngspice 39 batch solve of the equivalent circuit, an independent
    general-purpose circuit solver; the drive runs up on a heavy load with
    the field flashed, the flash is released, and the load conductance is
    swept down through each target so a self-excited machine stays on its
    built-up branch. Compared with the engine's highest stable intersection
    (``operating_points(...).normal``) within 0.2 %, and the engine's
    ``extrapolated`` flag with the solved net mmf beyond the last OCC point.
    """
    setting, resistances = CASES[connection]
    path = conductance_path([1.0 / r for r in resistances])
    res = spice.solve(machine, setting, spice.LoadSweep("conductance", path, flash_a=FLASH_A), tmp_path, connection)
    rows = [int(np.argmin(np.abs(res["load_value"] - 1.0 / r))) for r in resistances]
    normals, flags = [], []
    for j in rows:
        op = operating_points(machine, setting, Load.resistor(1.0 / res["load_value"][j]))
        assert op.converged
        assert op.normal is not None, f"{connection}: engine found no stable point at {1 / res['load_value'][j]:g} ohm"
        normals.append(op.normal)
        flags.append(op.normal["extrapolated"])
    ngs = {k: res[k][rows] for k in QUANTITIES}
    assert_same(engine_arrays(normals), ngs, connection)
    beyond = np.abs(res["equivalent_field_current_a"][rows]) > machine.occ_field_current_a[-1]
    assert flags == list(beyond)
    if connection == "series":
        assert beyond[-1], "the heaviest series load should need the chord beyond the last OCC point"


def test_battery_load_matches_ngspice_both_directions(machine, tmp_path):
    """Separately excited machine on a battery, charging and driven back.

    Source: ngspice 39 batch solve of the equivalent circuit, an independent
    general-purpose circuit solver; the battery EMF is swept from well below
    the machine's open-circuit voltage to above it (reverse current: the
    battery drives the machine; brush drop and armature reaction reverse with
    the current), through the brush-drop ramp near zero current. Every
    intersection the engine reports is compared within 0.2 %.
    """
    setting = Setting("separate", field_current_a=1.0, winding_temperature_c=30)
    v_open = operating_points(machine, setting, Load.constant_current(0.0)).normal["terminal_voltage_v"]
    emfs = tuple(v_open + d for d in (-60.0, -20.0, -5.0, -1.0, -0.2, 0.3, 2.0, 5.0, 10.0))
    ohm = 0.4
    res = spice.solve(machine, setting, spice.LoadSweep("battery", emfs, battery_ohm=ohm), tmp_path, "battery")
    pts = []
    for eb in emfs:
        op = operating_points(machine, setting, Load.battery(eb, ohm))
        assert op.converged
        assert len(op.points) == 1, f"battery {eb:g} V: {len(op.points)} points"
        pts.append(op.points[0])
    eng = engine_arrays(pts)
    assert_same(eng, {k: res[k] for k in QUANTITIES}, "battery")
    ramp = 0.01 * machine.rated_armature_current_a
    assert np.any(np.abs(res["armature_current_a"]) < ramp)  # a point inside the brush ramp
    assert np.all(res["load_current_a"][-3:] < 0) and np.all(eng["load_current_a"][-3:] < 0)


#: Self-excited settings that do not build up, with loads [ohm]: a shunt field
#: circuit above the critical resistance, a series machine above its critical
#: circuit resistance.
NOT_BUILT_UP = (
    (Setting("shunt", rheostat_ohm=150), (100.0, 20.0, 5.0)),
    (Setting("series", series_turns=20), (8.0, 6.0, 4.5)),
)


@pytest.mark.parametrize("setting, resistances", NOT_BUILT_UP, ids=lambda v: getattr(v, "connection", ""))
def test_unexcited_machine_on_resistor_matches_ngspice(machine, setting, resistances, tmp_path):
    """A machine that stays near its residual voltage on a resistor load.

    Source: ngspice 39 batch solve of the equivalent circuit, an independent
    general-purpose circuit solver; the drive runs up from rest on the load,
    no field flash, so the residual flux alone excites it. Compared with the
    engine's highest stable intersection within 0.2 %.
    """
    normals, ngs = [], []
    for r in resistances:
        res = spice.solve(machine, setting, spice.LoadSweep("conductance", (1.0 / r,)), tmp_path, f"rest-{r:g}")
        ngs.append({k: res[k][0] for k in QUANTITIES})
        op = operating_points(machine, setting, Load.resistor(r))
        assert op.converged
        normals.append(op.normal)
    ngs = {k: np.array([d[k] for d in ngs]) for k in QUANTITIES}
    assert_same(engine_arrays(normals), ngs, f"{setting.connection} not built up")
    assert np.all(ngs["terminal_voltage_v"] < 0.2 * machine.rated_voltage_v)


@pytest.mark.parametrize("connection", CONNECTIONS)
def test_external_characteristic_matches_ngspice(machine, connection, tmp_path):
    """Points along the external characteristic, turn-back included.

    Source: ngspice 39 batch solve of the equivalent circuit, an independent
    general-purpose circuit solver. Separately excited and series machines
    (one solution per load current) are swept with a current-sink load
    through the engine's load currents; self-excited machines with a load
    conductance swept from a heavy load down through each point's ``IL / V``
    (single-valued along the curve, so the sweep follows it through the
    breakdown point). Within 0.2 %.
    """
    setting, _ = CASES[connection]
    curve = external_characteristic(machine, setting, 100).points
    v, il = curve["terminal_voltage_v"], curve["load_current_a"]
    keep = np.flatnonzero((v > 1.0) & (il >= 0))[::6]
    assert keep.size >= 8
    if connection in TURN_BACK:
        assert keep.max() > np.argmax(il), "the checked points should pass the breakdown point"
    eng = {k: curve[k][keep] for k in QUANTITIES}
    if connection in EXPLICIT:
        order = np.argsort(il[keep])
        sweep = spice.LoadSweep("current", tuple(il[keep][order]))
        res = spice.solve(machine, setting, sweep, tmp_path, connection)
        rows = np.empty(keep.size, int)
        rows[order] = np.arange(keep.size)
    else:
        g = il[keep] / v[keep]
        path = conductance_path(g)
        res = spice.solve(machine, setting, spice.LoadSweep("conductance", path, flash_a=FLASH_A), tmp_path, connection)
        rows = np.array([int(np.argmin(np.abs(res["load_value"] - gi))) for gi in g])
        assert_allclose(res["load_value"][rows], g, rtol=1e-9, atol=0)  # ngspice writes 11 digits
    assert_same(eng, {k: res[k][rows] for k in QUANTITIES}, f"{connection} characteristic")


def test_armature_reaction_at_a_weak_field_matches_ngspice(machine, tmp_path):
    """Armature reaction against a weak field: it brings the net field to zero
    at most, never reverses it (design note).

    Source: ngspice 39 batch solve of the equivalent circuit (the net field is
    ``sgn(x_w) max(|x_w| - F_ar/Nsh, 0)`` in its behavioural source), an
    independent general-purpose circuit solver. A separately excited machine
    on 0.1 A of field carries 20, 40 and 60 A from a current sink (150 AT
    at 50 A on 1000 turns is 0.06, 0.12 and 0.18 A of reaction, so the net
    field is 0.04 A, then zero); a shunt machine run up from rest on a near
    dead short stays at its residual voltage with no net field. Within 0.2 %.
    """
    sep = Setting("separate", field_current_a=0.1)
    amps = (20.0, 40.0, 60.0)
    res = spice.solve(machine, sep, spice.LoadSweep("current", amps), tmp_path, "weak-separate")
    assert_allclose(res["equivalent_field_current_a"], [0.04, 0.0, 0.0], atol=1e-9)
    pts = []
    for a in amps:
        op = operating_points(machine, sep, Load.constant_current(a))
        assert op.converged and len(op.points) == 1
        pts.append(op.points[0])
    assert_same(engine_arrays(pts), {k: res[k] for k in QUANTITIES}, "weak separate field")
    shunt = Setting("shunt", rheostat_ohm=40)
    normals, ngs = [], []
    for r in (0.05, 0.2):
        res = spice.solve(machine, shunt, spice.LoadSweep("conductance", (1.0 / r,)), tmp_path, f"short-{r:g}")
        assert abs(res["equivalent_field_current_a"][0]) < 1e-9
        ngs.append({k: res[k][0] for k in QUANTITIES})
        op = operating_points(machine, shunt, Load.resistor(r))
        assert op.converged
        normals.append(op.normal)
    assert_same(engine_arrays(normals), {k: np.array([d[k] for d in ngs]) for k in QUANTITIES}, "near dead short")


@pytest.mark.parametrize("connection", ["shunt", "long-shunt-differential", "short-shunt-differential"])
def test_characteristic_near_short_circuit_matches_ngspice(machine, connection, tmp_path):
    """The last few volts of the external characteristic, where armature
    reaction holds the net field at zero and the machine runs on its residual
    flux (design note: the reaction never reverses the field).

    Source: ngspice 39 batch solve of the equivalent circuit, an independent
    general-purpose circuit solver, with the load conductance swept from twice
    the heaviest checked load down through each point's ``IL / V``. Within
    0.2 %; ngspice's net field is zero on part of this stretch (and, for the
    differential connections, reversed by the series field on the rest).
    """
    setting, _ = CASES[connection]
    curve = external_characteristic(machine, setting, 400).points
    v, il = curve["terminal_voltage_v"], curve["load_current_a"]
    keep = np.flatnonzero((v > 0.02) & (v < 3.0) & (il > 0))
    assert keep.size >= 6
    keep = keep[::keep.size // 6]
    g = il[keep] / v[keep]
    res = spice.solve(machine, setting, spice.LoadSweep("conductance", conductance_path(g, heavy_s=2 * g.max()),
                                                       flash_a=FLASH_A), tmp_path, connection)
    rows = np.array([int(np.argmin(np.abs(res["load_value"] - gi))) for gi in g])
    x = res["equivalent_field_current_a"][rows]
    assert np.any(np.abs(x) < 1e-12)  # the zero-field stretch is checked
    assert_same({k: curve[k][keep] for k in QUANTITIES}, {k: res[k][rows] for k in QUANTITIES},
                f"{connection} near short circuit")


# ---------------------------------------------------------------------------
# the speed an unknown: an engine or a motor turns the machine
# ---------------------------------------------------------------------------

#: The check machine with its losses stated: friction, windage and core 400 W at rated speed,
#: scaling as speed^1.5, stray load loss 1 % of output.
DRIVEN_MACHINE = dict(MACHINE, losses={"rotational_loss_w": 400.0, "rotational_loss_speed_exponent": 1.5,
                                       "stray_load_loss_percent": 1.0})
#: Invented drives: a governed engine direct coupled, and an induction motor through a belt.
ENGINE = {"kind": "engine", "no_load_speed_rpm": 1560.0, "droop_percent": 6.0, "rated_power_kw": 12.0}
MOTOR = {"kind": "motor", "synchronous_speed_rpm": 1500.0, "rated_slip_percent": 4.0, "rated_power_kw": 15.0,
         "ratio": 1.04}
#: (setting, drive table, load resistances [ohm]): a shunt machine and a cumulative compound.
DRIVEN_CASES = {
    "shunt-engine": (Setting("shunt", rheostat_ohm=40), ENGINE, (40.0, 10.0, 5.0, 3.0, 2.4)),
    "compound-motor": (Setting("long-shunt-cumulative", rheostat_ohm=40, series_turns=8), MOTOR,
                       (40.0, 10.0, 5.0, 3.0)),
}


def drive_model(table, machine):
    """The drive as the circuit's own parameters, written out from the profile's figures."""
    ratio = table.get("ratio", 1.0)
    top = table["no_load_speed_rpm"] if table["kind"] == "engine" else table["synchronous_speed_rpm"]
    frac = (table["droop_percent"] if table["kind"] == "engine" else table["rated_slip_percent"]) / 100
    ls = DRIVEN_MACHINE["losses"]
    return spice.DriveModel(table["kind"], ratio * top / machine.occ_speed_rpm, 1e3 * table["rated_power_kw"], frac,
                            ls["rotational_loss_w"], machine.rated_speed_rpm / machine.occ_speed_rpm,
                            ls["rotational_loss_speed_exponent"], ls["stray_load_loss_percent"] / 100)


def profile_drive(table):
    from supplycfg.profile import profile_from_dict
    prof = {"load": {"kind": "lighting"}, "drive": dict(table),
            "lighting": {"nominal_voltage_v": 200, "load_current_a": [0, 10]}}
    return profile_from_dict(prof, "driven check").drive


@pytest.mark.parametrize("case", list(DRIVEN_CASES))
def test_driven_machine_matches_ngspice(case, tmp_path):
    """The coupled operating point: the speed a circuit node.

    Source: ngspice 39 batch solve of the equivalent circuit with the speed as
    a node: a behavioural source gives the drive's speed from the shaft power
    node ``E Ia + P_rot(n) + stray |V IL|`` (engine: linear droop in power;
    motor: the upper root of its linear torque line), and the EMF source reads
    that speed, so ngspice's own Newton iteration solves speed and circuit
    together; nothing of the engine's speed solve is reused. The drive runs up
    on a heavy load with the field flashed, then the load conductance is swept
    down through each target. Currents, voltages, EMF, speed and shaft power
    within 0.2 %.
    """
    machine = machine_from_dict(DRIVEN_MACHINE, "driven check machine")
    setting, table, resistances = DRIVEN_CASES[case]
    model = drive_model(table, machine)
    drive = profile_drive(table)
    path = conductance_path([1.0 / r for r in resistances], heavy_s=2.0)
    res = spice.solve(machine, setting, spice.LoadSweep("conductance", path, flash_a=FLASH_A), tmp_path, case,
                      drive=model)
    rows = [int(np.argmin(np.abs(res["load_value"] - 1.0 / r))) for r in resistances]
    normals = []
    for j in rows:
        op = operating_points(machine, setting, Load.resistor(1.0 / res["load_value"][j]), drive)
        assert op.converged and op.normal is not None
        normals.append(op.normal)
    ngs = {k: res[k][rows] for k in QUANTITIES}
    assert_same(engine_arrays(normals), ngs, case)
    speed = np.array([p["speed_rpm"] for p in normals])
    shaft = np.array([p["shaft_power_kw"] for p in normals])
    assert_allclose(speed, res["speed_ratio"][rows] * machine.occ_speed_rpm, rtol=RTOL)
    assert_allclose(shaft, 1e-3 * res["shaft_power_w"][rows], rtol=RTOL)
    # the drive really slows: at least 1 % between the lightest and the heaviest load
    assert speed.max() > 1.01 * speed.min()


def test_driven_shunt_characteristic_matches_ngspice(tmp_path):
    """The driven shunt machine's external characteristic through its turn-back (traced along rays).

    Source: ngspice 39 as above, the load conductance swept from a heavy load down through each
    point's ``IL / V``. Within 0.2 %.
    """
    machine = machine_from_dict(DRIVEN_MACHINE, "driven check machine")
    setting, table, _ = DRIVEN_CASES["shunt-engine"]
    ch = external_characteristic(machine, setting, 100, profile_drive(table))
    curve = ch.points
    v, il = curve["terminal_voltage_v"], curve["load_current_a"]
    keep = np.flatnonzero((v > 1.0) & (il > 0))[::6]
    assert keep.size >= 8 and keep.max() > np.argmax(il)
    g = il[keep] / v[keep]
    res = spice.solve(machine, setting, spice.LoadSweep("conductance", conductance_path(g), flash_a=FLASH_A),
                      tmp_path, "driven-curve", drive=drive_model(table, machine))
    rows = np.array([int(np.argmin(np.abs(res["load_value"] - gi))) for gi in g])
    assert_same({k: curve[k][keep] for k in QUANTITIES}, {k: res[k][rows] for k in QUANTITIES}, "driven curve")
    assert_allclose(ch.power["speed_rpm"][keep], res["speed_ratio"][rows] * machine.occ_speed_rpm, rtol=RTOL)
