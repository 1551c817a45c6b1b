"""The charge run: its plan, charge balance, steady-state agreement, stop reasons, command line.

The charge balance is the model's definition: the state of charge rises by
the stored current, ``ds/dt = I_stored / C``; the rest of the current is gas.
The steady-state check solves the same machine against the same bank
independently with the engine's all-intersections solver,
``operating_points``, by Newton steps on tangent lines of the bank's
charging curve. The hand-checkable case puts a separately excited machine at
a constant field on a bank: its current then follows from the cell curve
alone, solved here with SciPy.
"""

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad
from scipy.optimize import brentq

from supplycfg.circuit import Load, Setting, operating_points
from supplycfg.cli import main
from supplycfg.errors import InputError
from supplycfg.jobs import battery
from supplycfg.machine import load_machine, machine_from_dict
from supplycfg.profile import load_profile, profile_from_dict
from supplycfg.search import search
from supplycfg.simulation import (charge_from_files, charge_run, charge_run_for_option, charge_text,
                                  charging_current_a, finish_setting_of)

ROOT = Path(__file__).resolve().parents[1]
MACHINE = ROOT / "profiles" / "machines" / "charging-set.toml"
PROFILE = ROOT / "profiles" / "loads" / "battery-charging.toml"
DIFF = dict(connection="long-shunt-differential", series_turns=24)


@pytest.fixture(scope="module")
def machine():
    return load_machine(MACHINE)


@pytest.fixture(scope="module")
def profile():
    return load_profile(PROFILE)


@pytest.fixture(scope="module")
def result(machine, profile):
    return search(machine, profile)


@pytest.fixture(scope="module")
def best(result):
    return result.options[0]


@pytest.fixture(scope="module")
def full_run(machine, profile, best):
    return charge_run_for_option(machine, profile, best)


def steady_current_a(machine, setting, job, soc, iterations=40, drive=None):
    """Normal operating point on the bank's charging curve by Newton steps: each step meets the tangent
    line of the curve at the last current (``Load.line``) with ``operating_points`` (on ``drive``)."""
    i = 1.0
    for _ in range(iterations):
        d = 1e-5 * max(1.0, abs(i))
        v = lambda c: float(battery.bank_voltage_v(job, soc, c))
        slope = (v(i + d) - v(i - d)) / (2 * d)
        v0 = v(i) - slope * i
        pt = operating_points(machine, setting, Load.line(v0, slope), drive).normal
        assert pt is not None
        new = pt["load_current_a"]
        if abs(new - i) < 1e-10 * max(1.0, abs(i)):
            return new
        i = new
    return i


# ---------------------------------------------------------------------------
# the demo plan, as a battery shop reads it
# ---------------------------------------------------------------------------

def test_demo_plan_a_battery_shop_accepts(full_run, profile):
    """The demo bank (60 vented cells, 200 Ah) from 20 %: start near C/10 (20 A) and within the job's
    22 A; hand-over at the gassing voltage 2.38 V per cell at 80-85 % charge; finish at about C/20
    (C/30 to C/20) up to 2.5-2.7 V per cell; Ah returned 1.05-1.25 x the Ah stored; full within the
    job's 16 h (common practice for two-rate charging of vented banks, from memory)."""
    r, b = full_run, profile.battery
    assert r.stop == "end-soc"
    s1, s2 = r.stages
    assert s1["ends_because"] == "handover-voltage" and s2["ends_because"] == "end-state-of-charge"
    assert 0.9 * 20 <= s1["start_current_a"] <= b.max_charge_current_a
    assert_allclose(s1["end_volts_per_cell"], 2.38, atol=1e-4)
    assert 0.80 <= s1["to_state_of_charge"] <= 0.85
    assert s1["end_current_a"] >= b.min_charge_current_a
    assert 200 / 30 <= s2["start_current_a"] <= 200 / 20
    assert s2["end_current_a"] <= s2["start_current_a"]
    assert 2.5 <= s2["end_volts_per_cell"] <= 2.7
    assert 1.05 <= r.ah_charge_factor <= 1.25
    assert r.hours_to_full is not None and 8.0 <= r.hours_to_full <= b.target_hours
    # only the field changes between the stages
    a, f = s1["setting"], s2["setting"]
    assert {k: a[k] for k in a if k != "rheostat_ohm"} == {k: f[k] for k in f if k != "rheostat_ohm"}
    assert f["rheostat_ohm"] > a["rheostat_ohm"]


def test_charge_balance(full_run, profile):
    """The state of charge rises by the stored current (the model's charge balance): the time integral
    of the reported stored current equals delta SOC x capacity to 0.5 %, stored + gas = current at every
    point, the Ah delivered are the time integral of the current (0.5 %), and the Ah factor is their ratio."""
    r, b = full_run, profile.battery
    gained = (r.state_of_charge[-1] - r.state_of_charge[0]) * b.capacity_ah
    assert_allclose(np.trapezoid(r.stored_current_a, r.time_h), gained, rtol=5e-3)
    assert_allclose(r.stored_current_a + r.gas_current_a, r.current_a, rtol=1e-9)
    assert_allclose(np.trapezoid(r.current_a, r.time_h), r.ah[-1], rtol=5e-3)
    assert_allclose(r.ah_charge_factor, r.ah[-1] / gained, rtol=1e-12)


def test_energy_is_voltage_times_current(full_run):
    """kWh delivered = integral of machine-terminal voltage x current (definition), to 0.5 %."""
    r = full_run
    assert_allclose(r.kwh[-1], np.trapezoid(r.terminal_voltage_v * r.current_a, r.time_h) / 1000, rtol=5e-3)


def test_run_is_the_searchs_plan(full_run, best):
    """One set of figures: the run follows the option's plan and reports the same stages, start
    current, end volts per cell, hours and Ah factor as the search, at the same speed and winding
    temperature (same functions, same grid)."""
    r, f = full_run, best.figures
    assert r.setting == best.setting
    assert r.finish_setting == finish_setting_of(best)
    assert r.conditions == best.extras["conditions"]
    # on the demo's motor the condition names the drive: its speed is the motor's no-load speed
    assert r.conditions["setting"] == {"speed_rpm": best.setting.speed_rpm,
                                       "winding_temperature_c": best.setting.winding_temperature_c, "drive": "motor"}
    for a, b in zip(r.stages, best.extras["plan"]):
        assert a["setting"] == b["setting"] and a["ends_because"] == b["ends_because"]
        for k in ("from_h", "to_h", "start_current_a", "end_current_a", "end_volts_per_cell"):
            assert_allclose(a[k], b[k], rtol=1e-6)
    assert_allclose([r.current_a[0], r.volts_per_cell[-1], r.hours_to_full, r.ah_charge_factor],
                    [f["start_charge_current_a"], f["end_volts_per_cell"], f["hours_to_full"], f["ah_charge_factor"]],
                    rtol=1e-6)
    assert_allclose(r.gassing_state_of_charge, f["gassing_state_of_charge"], rtol=1e-9)


@pytest.mark.parametrize("k", [0, 10, 24, 25, 40, -1])
def test_current_equals_steady_state_point(machine, profile, full_run, k):
    """At each state of charge the run's current is the machine's normal operating point on the
    bank's charging curve, for the stage's setting: Newton steps on tangent lines with
    ``operating_points`` agree within 0.1 % (derived: both solve the same circuit and curve)."""
    r = full_run
    st = r.setting if r.stage[k] == 1 else r.finish_setting
    want = steady_current_a(machine, st, profile.battery, float(r.state_of_charge[k]), drive=profile.drive)
    assert_allclose(r.current_a[k], want, rtol=1e-3)
    assert_allclose(charging_current_a(machine, profile, st, [r.state_of_charge[k]])[0], want, rtol=1e-3)
    assert_allclose(r.terminal_voltage_v[k], battery.bank_voltage_v(profile.battery, r.state_of_charge[k], want),
                    rtol=2e-4)


def test_run_is_monotone_and_steps_down_at_the_handover(full_run):
    """Within a stage the state of charge and the cell voltage rise and the current falls (constant
    field against a rising bank voltage; textbook taper charging, from memory); at the hand-over the
    time repeats and the current steps down to the finish. The demo's main charge (on its motor, at
    1500 rpm no load) sits on the heavy differential winding's near-flat part: early in the charge
    the shunt field's rise with the bank voltage holds the current level, so there it may rise by a
    few hundredths of a per cent (the same at a fixed speed: a property of the setting, not of the
    drive); over the stage it falls."""
    r = full_run
    for no in (1, 2):
        sel = r.stage == no
        cur = r.current_a[sel]
        assert np.all(np.diff(r.state_of_charge[sel]) > 0)
        if no == 1:
            assert np.all(np.diff(cur) < 5e-4 * cur[0]) and cur[-1] < cur[0]
        else:
            assert np.all(np.diff(cur) < 0)
        assert np.all(np.diff(r.volts_per_cell[sel]) > 0)
    k = int(np.flatnonzero(r.stage == 2)[0])
    assert r.time_h[k] == r.time_h[k - 1] and r.current_a[k] < 0.6 * r.current_a[k - 1]
    assert np.all(np.diff(r.time_h) >= 0) and r.time_h[0] == 0 and r.time_h[-1] == r.duration_h


def test_warm_bank_still_gasses(machine, profile):
    """Regression: the gassing voltage moves with the battery's temperature like the whole curve
    (-4 mV/K, common practice), so a warm bank hands over at about the same state of charge, at
    2.38 - 0.004 x 10 = 2.34 V per cell at 35 degC, instead of never gassing."""
    warm = replace(profile, battery=replace(profile.battery, temperature_c=35.0))
    r = charge_run(machine, warm, Setting(rheostat_ohm=21.39, **DIFF))
    assert_allclose(r.handover_volts_per_cell, 2.34, atol=1e-12)
    assert r.stages[0]["ends_because"] == "handover-voltage"
    assert_allclose(r.stages[0]["end_volts_per_cell"], 2.34, atol=1e-4)
    assert 0.78 <= r.gassing_state_of_charge <= 0.87


# ---------------------------------------------------------------------------
# limits and stops
# ---------------------------------------------------------------------------

def test_start_current_above_the_jobs_highest_gets_a_caution(machine, profile, result):
    """A setting given by hand that starts above max_charge_current_a is run as given, with a caution
    carrying the figure; the search never offers such a setting (issue rule)."""
    r = charge_run(machine, profile, Setting(rheostat_ohm=10.0, **DIFF))
    assert r.current_a[0] > profile.battery.max_charge_current_a
    c = {c.rule: c for c in r.cautions}["battery-start-current"]
    assert c.severity == "warn" and c.figures["start_charge_current_a"] > profile.battery.max_charge_current_a
    for o in result.feasible:
        assert o.figures["start_charge_current_highest_a"] <= profile.battery.max_charge_current_a


def test_stop_at_the_highest_cell_voltage(machine, profile):
    """A finish on a strong field drives the cells to the chemistry's highest voltage, 2.7 V for vented
    lead-acid (common practice, from memory): the run stops there and says so."""
    # the demo's motor slows under load (about 1430 rpm at the generator), so the finish is set strong
    r = charge_run(machine, profile, Setting(rheostat_ohm=21.39, **DIFF), finish_setting=Setting(rheostat_ohm=0.0, **DIFF))
    assert r.stop == "voltage-limit" and "highest voltage" in r.stop_reason
    assert r.stages[-1]["ends_because"] == "voltage-limit"
    assert_allclose(r.volts_per_cell[-1], 2.7, atol=1e-9)
    assert r.state_of_charge[-1] < 1.0
    # a finish given by hand that breaks the job's limits carries the cautions with their figures
    rules = {c.rule: c for c in r.cautions}
    assert rules["battery-cell-voltage"].figures["highest_volts_per_cell"] > 2.7
    assert rules["battery-finish-current"].figures["finish_current_a"] > 10.0


def test_back_current_at_start_stops_at_once(machine, profile):
    """A field too weak to hold the bank's voltage: current would flow back into the machine, so the
    run stops at once and says so (a reverse-current cut-out must open; common practice)."""
    r = charge_run(machine, profile, Setting(rheostat_ohm=120.0, **DIFF))
    assert r.stop == "current-floor" and r.duration_h == 0
    assert r.current_a[0] < 0 and "back" in r.stop_reason
    json.dumps(r.as_dict(), allow_nan=False)


def test_no_operating_point(machine, profile):
    """Where the characteristic never meets the charging curve the run stops with that reason. A
    100-cell bank (about 200 V) on the unexcited machine (field circuit above critical) would drive
    back more than 10 x the rated armature current: (200 - 5 + 2) V / (0.22 + 0.065) ohm is about
    690 A, beyond the 600 A the engine searches (hand calculation: residual 5 V, 2 V brushes), so
    there is no operating point. (Armature reaction cannot reverse the field, design note, so a
    60-cell bank finds a back-fed point; test_back_current_at_start_stops_at_once covers that.)"""
    profile = replace(profile, battery=replace(profile.battery, cells=100))
    r = charge_run(machine, profile, Setting("shunt", rheostat_ohm=100.0))
    assert r.stop == "no-operating-point" and "no stable operating point" in r.stop_reason
    assert "flow back" in r.stop_reason and r.duration_h == 0
    json.dumps(r.as_dict(), allow_nan=False)


def test_time_cap(machine, profile, best):
    """max_hours caps the run and the reason names the cap; the stage running then ends there."""
    r = charge_run_for_option(machine, profile, best, max_hours=2.0)
    assert r.stop == "time-cap" and "2 h" in r.stop_reason
    assert_allclose([r.duration_h, r.time_h[-1]], [2.0, 2.0])
    assert len(r.stages) == 1 and r.stages[0]["ends_because"] == "time-cap"
    assert_allclose(r.stages[0]["to_h"], 2.0)
    assert r.hours_to_full is None


def test_slow_taper_is_not_full_within_the_target(machine, profile):
    """A weak field charges for ever at a falling current: hours_to_full is null when the end state of
    charge is not reached within target_hours (issue contract), with a caution saying so."""
    r = charge_run(machine, profile, Setting(rheostat_ohm=60.0, **DIFF))
    assert r.hours_to_full is None
    assert "battery-hours" in {c.rule for c in r.cautions}


def test_bad_max_hours(machine, profile, best):
    """A time cap that is not a positive number is bad input (project rule: one-line InputError)."""
    with pytest.raises(InputError, match="max_hours"):
        charge_run(machine, profile, best.setting, max_hours=0)


def test_finish_must_keep_the_connection(machine, profile):
    """Never switch windings under load: a finish on another connection or tap is refused."""
    with pytest.raises(InputError, match="only the field"):
        charge_run(machine, profile, Setting(rheostat_ohm=21.39, **DIFF),
                   finish_setting=Setting("long-shunt-differential", series_turns=16, rheostat_ohm=40.0))


def test_non_battery_profile_is_refused(machine):
    """A charge run needs a battery profile: InputError naming load.kind."""
    welding = load_profile(ROOT / "profiles" / "loads" / "welding.toml")
    with pytest.raises(InputError, match=r"load\.kind"):
        charge_run(machine, welding, Setting("shunt"))


# ---------------------------------------------------------------------------
# output: JSON contract, text, cautions
# ---------------------------------------------------------------------------

STAGE_KEYS = {"setting", "from_h", "to_h", "start_current_a", "end_current_a", "end_volts_per_cell", "ends_because"}


def test_charge_json_contract(full_run):
    """`charge --json` as before plus stages, hours_to_full, ah_charge_factor, gassing_state_of_charge,
    ventilation{airflow_m3_per_h, opening_cm2, gas_current_ma_per_ah, governed_by}, cut_in_speed_rpm{cold,
    hot}, standstill_backfeed_current_a (issue contract); no NaN."""
    d = json.loads(json.dumps(full_run.as_dict(), allow_nan=False))
    for k in ("time_h", "current_a", "bank_voltage_v", "terminal_voltage_v", "volts_per_cell",
              "state_of_charge", "ah", "kwh"):
        assert isinstance(d[k], list) and len(d[k]) == len(full_run.time_h)
    for k in ("duration_h", "stop_reason", "limit_volts_per_cell", "gassing_volts_per_cell", "setting",
              "cautions", "notice"):
        assert k in d
    assert all(STAGE_KEYS <= set(s) for s in d["stages"]) and len(d["stages"]) == 2
    assert isinstance(d["hours_to_full"], float) and isinstance(d["ah_charge_factor"], float)
    assert 0 < d["gassing_state_of_charge"] < 1
    assert set(d["ventilation"]) == {"airflow_m3_per_h", "opening_cm2", "gas_current_ma_per_ah", "governed_by"}
    assert d["ventilation"]["governed_by"] in battery.VENTILATION_GOVERNORS
    assert set(d["cut_in_speed_rpm"]) == {"cold", "hot"} and all(v > 0 for v in d["cut_in_speed_rpm"].values())
    assert d["standstill_backfeed_current_a"] > 0


def test_ventilation_from_the_gas_that_flows(full_run, profile):
    """IEC 62485-2 airflow from the larger of the table's boost row and the plan's own largest gas
    current x fg x fs: the finish pushes C/30-C/20 into a full bank, all gas at the end, so the plan
    governs and Q = 0.05 n Igas C 1e-3 with Igas = 5 x that current per Ah (derived), far above the
    12 m3/h of the boost row (IEC 62485-2, seen)."""
    v, b = full_run.ventilation, profile.battery
    assert v["governed_by"] == "plan-gas-current"
    assert_allclose(v["airflow_m3_per_h"], 0.05 * b.cells * v["gas_current_ma_per_ah"] * b.capacity_ah * 1e-3, rtol=1e-12)
    assert_allclose(v["opening_cm2"], 28 * v["airflow_m3_per_h"], rtol=1e-12)
    end_gas = full_run.gas_current_a[-1] / b.capacity_ah * 1e3 * 5
    assert v["gas_current_ma_per_ah"] >= end_gas * (1 - 1e-9)
    assert v["airflow_m3_per_h"] > 12.0 * 5
    c = {c.rule: c for c in full_run.cautions}["battery-ventilation"]
    assert_allclose(c.figures["ventilation_m3_per_h"], v["airflow_m3_per_h"], rtol=1e-12)


def test_cut_out_figures(full_run, machine, profile):
    """Cut-in speed: the no-load voltage of a shunt-fed setting is proportional to speed at a fixed
    field current (EMF proportional to speed, Kosow Ex 3-3): at the cut-in speed it equals the closing
    voltage, 60 x (2.12 + 0.05) = 130.2 V (common practice default); the cold windings cut in lower.
    Standstill back-feed: the full bank's rest voltage 127.2 V drives, through bank, cable, brushes
    (2 V) and the armature circuit, about (127.2 - 2) / R amperes (derived, within 5 %: the shunt
    field draws a little too)."""
    r = full_run
    cold, hot = r.cut_in_speed_rpm["cold"], r.cut_in_speed_rpm["hot"]
    assert 0 < cold < hot < r.setting.speed_rpm
    st = replace(r.setting, speed_rpm=hot, winding_temperature_c=r.conditions["hot"]["winding_temperature_c"])
    pt = operating_points(machine, st, Load.constant_current(0.0)).normal
    assert_allclose(pt["terminal_voltage_v"], 130.2, rtol=1e-6)
    b = profile.battery
    t = r.conditions["cold"]["winding_temperature_c"]
    k = (234.5 + t) / (234.5 + machine.reference_temperature_c)      # copper, IEC 60228
    rtot = b.internal_resistance_ohm + b.cable_resistance_ohm + k * (machine.armature_resistance_ohm
                                                                      + machine.series_field_resistance_ohm)
    assert_allclose(r.standstill_backfeed_current_a, (127.2 - 2.0) / rtot, rtol=5e-2)
    c = {c.rule: c for c in r.cautions}["battery-reverse-current"]
    assert "130.2 V" in c.message and f"{cold:.0f} rpm" in c.message and f"{r.standstill_backfeed_current_a:.0f} A" in c.message


def test_text_summary(full_run):
    """The text names the plan, the stop reason, the figures and tabulates about 12 rows over time."""
    text = charge_text(full_run)
    assert "end state of charge" in text and "Cautions" in text and "1: main charge" in text and "2: finish" in text
    assert "hours to full" in text and "ventilation" in text and "cut-out" in text
    table = [ln for ln in text.splitlines() if ln.strip() and ln.strip()[0].isdigit() and "  " in ln
             and ln.split()[0].replace(".", "").isdigit()]
    assert 10 <= len(table) <= 13


def test_from_files_uses_the_best_plan(best):
    """Without a setting the run follows the search's best plan (both stages)."""
    r = charge_from_files(MACHINE, PROFILE)
    assert r.setting == best.setting and r.finish_setting == finish_setting_of(best)
    assert "search" in r.setting_source


def test_from_files_checks_a_given_setting():
    """A given setting is checked as command-line input and the message names the option."""
    with pytest.raises(InputError, match="--rheostat-ohm"):
        charge_from_files(MACHINE, PROFILE, Setting("shunt", rheostat_ohm=1e4), names={"rheostat_ohm": "--rheostat-ohm"})


def test_from_files_nearest_miss(tmp_path):
    """Where no setting meets every limit the run takes the nearest miss and says so."""
    bad = tmp_path / "narrow.toml"
    bad.write_text(PROFILE.read_text().replace("target_hours = 16 ", "target_hours = 4 "))
    r = charge_from_files(MACHINE, bad)
    assert "nearest miss" in r.setting_source and any("nearest miss" in n for n in r.notes)
    assert not any(c.severity == "stop" for c in r.cautions)


def test_cli_json(capsys):
    """`supplycfg charge MACHINE PROFILE --json` prints one JSON object with the plan."""
    rc = main(["charge", str(MACHINE), str(PROFILE), "--json"])
    out, err = capsys.readouterr()
    assert rc == 0 and err == ""
    d = json.loads(out)
    assert d["stop"] == "end-soc" and len(d["stages"]) == 2 and d["hours_to_full"] > 0
    assert len(d["time_h"]) == len(d["current_a"]) > 10


def test_cli_with_setting(capsys):
    """A setting on the command line is run as given, with the finish the plan's rule sets."""
    rc = main(["charge", str(MACHINE), str(PROFILE), "--connection", "long-shunt-differential", "--series-turns",
               "24", "--rheostat-ohm", "25"])
    out, err = capsys.readouterr()
    assert rc == 0 and "2: finish" in out and "command line" in out


def test_cli_non_battery_profile(capsys):
    """A non-battery profile: exit code 2 and one line naming load.kind."""
    rc = main(["charge", str(MACHINE), str(ROOT / "profiles" / "loads" / "lighting.toml")])
    out, err = capsys.readouterr()
    assert rc == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and "load.kind" in err and "lighting.toml" in err


def test_search_json_carries_the_plan(result):
    """`search --json` for a battery job: each option carries `plan` (the stages) and
    figures.hours_to_full (issue contract)."""
    d = json.loads(json.dumps(result.as_dict(), allow_nan=False))
    for o in d["options"]:
        assert "plan" in o and "hours_to_full" in o["figures"]
        assert all(STAGE_KEYS <= set(s) for s in o["plan"])
    best = d["options"][0]
    assert best["feasible"] and best["figures"]["hours_to_full"] > 0 and len(best["plan"]) == 2
    assert best["setting"]["rheostat_ohm"] == best["plan"][0]["setting"]["rheostat_ohm"]


def test_feasible_plans_ranked_by_hours(result):
    """The battery's objective is hours to full (design note): feasible options come in order of it,
    where hours within 2 % of each other tie and go to the simpler rig, then the larger margin (the
    stated ranking rule): no option is beaten by more than 2 % by one ranked below it."""
    from supplycfg.search import OBJECTIVE_TIE_FRACTION
    hours = [o.figures["hours_to_full"] for o in result.feasible]
    for k, h in enumerate(hours):
        assert all(h <= later * (1 + OBJECTIVE_TIE_FRACTION) for later in hours[k + 1:])
    assert_allclose(battery.objective({"hours_to_full": np.array(hours)}), hours)
    assert battery.OBJECTIVE_LABEL.startswith("hours to full")


# ---------------------------------------------------------------------------
# a hand-checkable two-stage case: a separately excited machine at constant field
# ---------------------------------------------------------------------------

HAND_MACHINE = {
    "machine": {"label": "hand check", "poles": 4, "rated_speed_rpm": 1500, "rated_voltage_v": 36,
                "rated_armature_current_a": 50, "armature_resistance_ohm": 0.5, "brush_drop_v": 2.0,
                "shunt_field_resistance_ohm": 20, "shunt_turns_per_pole": 500, "rheostat_max_ohm": 50},
    "open_circuit": {"speed_rpm": 1500, "field_current_a": [0.0, 0.5, 1.0, 1.5, 2.0],
                     "emf_v": [0.0, 12.0, 24.0, 36.0, 40.0], "interpolation": "linear"},
}
HAND_JOB = {"load": {"kind": "battery"}, "drive": {"speed_rpm": 1500},
            "battery": {"chemistry": "lead-acid-vented", "cells": 12, "capacity_ah": 100,
                        "state_of_charge": [0.2, 1.0], "max_charge_current_a": 20,
                        "internal_resistance_ohm": 0.02, "cable_resistance_ohm": 0.01}}


def test_hand_checkable_two_stage_separately_excited():
    """12 vented cells of 100 Ah on a separately excited machine with no armature reaction: at a constant
    field current the EMF is fixed (linear OCC: 36 V at 1.5 A, 33 V at 1.375 A), so the charging current
    follows from E - 2 V brushes - I (Ra + Rb + Rcable) = 12 U(s, I) alone, U the cell's internal
    voltage (the cell curve). Solved here with brentq and quad: the start current, the state of charge
    where the cells reach 2.38 V, the hours of each stage and the Ah returned agree with the run
    within 0.3 % (derived)."""
    m = machine_from_dict(HAND_MACHINE, "hand.toml")
    p = profile_from_dict(HAND_JOB, "hand-job.toml")
    b = p.battery
    chem = battery.chemistry("lead-acid-vented")
    ra = 0.5
    r_line = ra + b.internal_resistance_ohm + b.cable_resistance_ohm
    n, cap = b.cells, b.capacity_ah

    def current(e, s):
        """Charging current [A] at state of charge s with EMF e: brentq on the cell's internal voltage."""
        def g(u):
            st, gs = battery.reaction_rates_per_h(chem, s, u)
            return e - 2.0 - cap * (st + gs) * r_line - n * u
        lo = float(battery.open_circuit_voltage_per_cell(chem, s))
        u = brentq(g, lo, lo + 2.0, xtol=1e-14)
        st, gs = battery.reaction_rates_per_h(chem, s, u)
        return cap * float(st + gs), cap * float(st), u

    def cell_volts(e, s):
        i, _, u = current(e, s)
        return u + i * b.internal_resistance_ohm / n

    e1, e2 = 36.0, 24.0 + 24.0 * 0.375        # 1.5 A and 1.375 A on the linear OCC
    run = charge_run(m, p, Setting("separate", field_current_a=1.5), finish_setting=Setting("separate", field_current_a=1.375))
    assert run.stop == "end-soc"
    s1, s2 = run.stages
    s_ho = brentq(lambda s: cell_volts(e1, s) - 2.38, 0.2, 0.999, xtol=1e-12)
    t1 = quad(lambda s: cap / current(e1, s)[1], 0.2, s_ho, epsrel=1e-10)[0]
    ah1 = quad(lambda s: cap * current(e1, s)[0] / current(e1, s)[1], 0.2, s_ho, epsrel=1e-10)[0]
    # the finish to full: s = 1 - (1 - s_ho)(1 - x)^2 keeps the integrand smooth where acceptance ends
    span = 1.0 - s_ho
    jac = lambda x: 2 * span * (1 - x)
    sx = lambda x: 1.0 - span * (1 - x) ** 2
    t2 = quad(lambda x: cap * jac(x) / current(e2, sx(x))[1], 0.0, 1.0 - 1e-12, epsrel=1e-9, limit=200)[0]
    ah2 = quad(lambda x: cap * jac(x) * current(e2, sx(x))[0] / current(e2, sx(x))[1], 0.0, 1.0 - 1e-12,
               epsrel=1e-9, limit=200)[0]
    assert_allclose(s1["start_current_a"], current(e1, 0.2)[0], rtol=1e-6)
    assert_allclose(s1["to_state_of_charge"], s_ho, rtol=1e-5)
    assert_allclose(s1["end_volts_per_cell"], 2.38, atol=1e-6)
    assert_allclose(s2["start_current_a"], current(e2, s_ho)[0], rtol=1e-6)
    assert_allclose([s1["to_h"], s2["to_h"] - s2["from_h"]], [t1, t2], rtol=3e-3)
    assert_allclose(run.ah_charge_factor, (ah1 + ah2) / (0.8 * cap), rtol=3e-3)
    assert_allclose(s2["end_volts_per_cell"], cell_volts(e2, 1.0), rtol=1e-6)


def test_charge_plan_shows_the_readings_a_technician_sets():
    """Regression: `charge` and the page's plan table printed the exact simulated rheostat (20.21 ohm),
    which nobody can set, while `search` gave the rounded meter reading (20 ohm). The plan now shows
    each stage's reading, the same as the search's, and says the run used the exact values."""
    from supplycfg.jobs.battery import plan_rows
    from supplycfg.search import search_machine_profile
    from supplycfg.simulation import charge_from_files, charge_text
    root = Path(__file__).resolve().parent.parent / "profiles"
    m, p = root / "machines" / "charging-set.toml", root / "loads" / "battery-charging.toml"
    best = search_machine_profile(m, p).feasible[0]
    want = [q["readings"]["rheostat_ohm"] for q in best.extras["plan"]]
    run = charge_from_files(m, p)
    assert [q["readings"]["rheostat_ohm"] for q in run.stages] == want
    fields = [row[1] for row in plan_rows(run.stages)]
    assert fields == [f"rheostat {r:g} ohm" for r in want]
    assert [row[1] for row in plan_rows(best.extras["plan"])] == fields
    assert "set the meter readings of the plan" in charge_text(run)
