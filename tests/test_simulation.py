"""The charge run: charge balance, steady-state agreement, stop reasons, command line.

The charge balance is the definition of ampere-hour (charge) efficiency:
``Ah in = delta SOC x capacity / efficiency`` (common practice: a lead-acid
battery takes back 110-115 % of the ampere-hours drawn). The steady-state
check solves the same machine against the same charging curve independently
with the engine's all-intersections solver, ``operating_points``, by Newton
steps on tangent lines of the curve.
"""

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from supplycfg.jobs import battery
from supplycfg.circuit import Load, Setting, operating_points
from supplycfg.cli import main
from supplycfg.errors import InputError
from supplycfg.profile import load_profile
from supplycfg.machine import load_machine
from supplycfg.search import search
from supplycfg.simulation import charge_from_files, charge_run, charge_text, charging_current_a

ROOT = Path(__file__).resolve().parents[1]
MACHINE = ROOT / "profiles" / "machines" / "charging-set.toml"
PROFILE = ROOT / "profiles" / "loads" / "battery-charging.toml"


@pytest.fixture(scope="module")
def machine():
    return load_machine(MACHINE)


@pytest.fixture(scope="module")
def profile():
    return load_profile(PROFILE)


@pytest.fixture(scope="module")
def best(machine, profile):
    return search(machine, profile).options[0]


@pytest.fixture(scope="module")
def full_run(machine, profile, best):
    return charge_run(machine, profile, best.setting)


def bank_curve_v(job, soc, current_a):
    """Machine-terminal voltage on the bank's charging curve [V], written out from the chemistry model:
    ``n [Vc(s, I/C) - I Rc/C] + I (Rb + Rcable)`` (the search's end-of-charge curve)."""
    chem = battery.chemistry(job.chemistry)
    i = max(float(current_a), 0.0)
    cell = float(battery.charging_voltage_per_cell(chem, soc, i / job.capacity_ah, job.temperature_c,
                                                 job.open_circuit_voltage_per_cell_v))
    cell -= i * chem.resistance_ohm_ah / job.capacity_ah
    return job.cells * cell + float(current_a) * (job.internal_resistance_ohm + job.cable_resistance_ohm)


def steady_current_a(machine, setting, job, soc, iterations=30, drive=None):
    """Normal operating point on the charging curve by Newton steps: each step meets the tangent
    line of the curve at the last current (``Load.line``) with ``operating_points`` (on ``drive``)."""
    i = 0.0
    for _ in range(iterations):
        d = 1e-4 * max(1.0, abs(i))
        slope = (bank_curve_v(job, soc, i + d) - bank_curve_v(job, soc, max(i - d, 0.0))) / (i + d - max(i - d, 0.0))
        v0 = bank_curve_v(job, soc, i) - slope * i
        pt = operating_points(machine, setting, Load.line(v0, slope), drive).normal
        assert pt is not None
        new = pt["load_current_a"]
        if abs(new - i) < 1e-9 * max(1.0, abs(i)):
            return new
        i = new
    return i


def test_charge_balance(full_run, profile):
    """Ah delivered = delta SOC x capacity / charge efficiency to 0.5 %, for the integrated Ah and for
    the trapezoidal sum of the reported current over time (definition of ampere-hour efficiency;
    0.90 for vented lead-acid, common practice)."""
    r, b = full_run, profile.battery
    assert r.stop == "end-soc"
    eff = battery.chemistry(b.chemistry).charge_efficiency
    want = (r.state_of_charge[-1] - r.state_of_charge[0]) * b.capacity_ah / eff
    assert_allclose(np.trapezoid(r.current_a, r.time_h), want, rtol=5e-3)
    assert_allclose(r.ah[-1], want, rtol=5e-3)
    # and all along the run
    ah = np.concatenate([[0.0], np.cumsum(0.5 * (r.current_a[1:] + r.current_a[:-1]) * np.diff(r.time_h))])
    assert_allclose(ah, (r.state_of_charge - r.state_of_charge[0]) * b.capacity_ah / eff,
                    rtol=5e-3, atol=0.5e-2 * want)


def test_energy_is_voltage_times_current(full_run):
    """kWh delivered = integral of machine-terminal voltage x current (definition), to 0.5 %."""
    r = full_run
    assert_allclose(r.kwh[-1], np.trapezoid(r.terminal_voltage_v * r.current_a, r.time_h) / 1000, rtol=5e-3)


@pytest.mark.parametrize("soc", [0.2, 0.5, 0.8, 0.95, 1.0])
def test_current_equals_steady_state_point(machine, profile, best, soc):
    """At fixed SOC the run's current is the machine's normal operating point on the charging curve:
    independently, Newton steps on tangent lines with ``operating_points`` agree within 0.2 %
    (derived: both solve the same circuit equation and curve)."""
    want = steady_current_a(machine, best.setting, profile.battery, soc, drive=profile.drive)
    assert_allclose(charging_current_a(machine, profile, best.setting, [soc])[0], want, rtol=2e-3)


def test_run_arrays_are_steady_state_points(machine, profile, best, full_run):
    """Along the run, each reported (SOC, current) pair is the steady-state point of that SOC,
    and the bank voltage is the curve's voltage less the cable drop (derived)."""
    r, b = full_run, profile.battery
    for k in (0, 60, 150, len(r.time_h) - 1):
        s = float(r.state_of_charge[k])
        i = steady_current_a(machine, best.setting, b, s, drive=profile.drive)
        assert_allclose(r.current_a[k], i, rtol=2e-3)
        assert_allclose(r.terminal_voltage_v[k], bank_curve_v(b, s, i), rtol=2e-4)
        assert_allclose(r.bank_voltage_v[k], r.terminal_voltage_v[k] - i * b.cable_resistance_ohm, rtol=1e-9)
        assert_allclose(r.volts_per_cell[k], r.bank_voltage_v[k] / b.cells, rtol=1e-9)


def test_end_current_is_the_searchs(machine, profile, best):
    """Consistency with the search: at the end SOC and the option's own corner (hottest windings) the
    run's current equals the search's end-of-charge current (the same curve, derived), within 0.2 %."""
    i = charging_current_a(machine, profile, best.setting, [profile.battery.state_of_charge[1]])[0]
    assert_allclose(i, best.figures["end_charge_current_a"], rtol=2e-3)


def test_state_of_charge_rises_and_current_falls(full_run):
    """On a constant-field generator the current falls as the bank's voltage rises with charge
    (constant-potential charging, textbook behaviour, from memory)."""
    r = full_run
    assert np.all(np.diff(r.state_of_charge) > 0)
    assert np.all(np.diff(r.current_a) < 0)
    assert np.all(np.diff(r.volts_per_cell) > 0)
    assert r.time_h[0] == 0 and r.time_h[-1] == r.duration_h


def test_stop_at_end_soc(full_run, profile):
    """The demo option reaches the end state of charge (the search promised it above the C/100 floor)."""
    r = full_run
    assert r.stop == "end-soc" and "end state of charge" in r.stop_reason
    assert_allclose(r.state_of_charge[-1], profile.battery.state_of_charge[1], atol=1e-9)
    assert r.current_a[-1] > r.floor_current_a


def test_stop_at_voltage_limit(machine, profile):
    """A strong field drives the cells to the boost limit 2.40 V/cell at 25 degC (IEC 62485-2, seen)
    before full charge: the run stops there, at the limit within 2 mV."""
    r = charge_run(machine, profile, Setting("shunt", rheostat_ohm=60.0))
    assert r.stop == "voltage-limit" and "charge limit" in r.stop_reason
    assert_allclose(r.limit_volts_per_cell, 2.40, atol=1e-12)
    assert_allclose(r.volts_per_cell[-1], 2.40, atol=2e-3)
    assert r.state_of_charge[-1] < profile.battery.state_of_charge[1]
    assert r.gassing_from_h is not None and r.gassing_from_h < r.duration_h


def test_voltage_limit_is_temperature_corrected(machine, profile):
    """At 35 degC the limit is 2.40 - 0.004 x 10 = 2.36 V/cell (lead-acid compensation -3 to
    -5 mV/degC/cell, common practice; the table takes -4)."""
    warm = replace(profile, battery=replace(profile.battery, temperature_c=35.0))
    r = charge_run(machine, warm, Setting("shunt", rheostat_ohm=60.0))
    assert_allclose(r.limit_volts_per_cell, 2.36, atol=1e-12)
    assert r.stop == "voltage-limit"
    assert_allclose(r.volts_per_cell[-1], 2.36, atol=2e-3)


def test_stop_at_current_floor(machine, profile):
    """A weak field: the current falls to the C/100 floor (common practice) before full charge."""
    r = charge_run(machine, profile, Setting("shunt", rheostat_ohm=80.0))
    assert r.stop == "current-floor" and "floor" in r.stop_reason
    assert_allclose(r.floor_current_a, 0.01 * profile.battery.capacity_ah)
    assert_allclose(r.current_a[-1], r.floor_current_a, rtol=1e-2)
    assert r.state_of_charge[-1] < profile.battery.state_of_charge[1]


def test_back_current_at_start_stops_at_once(machine, profile):
    """A field too weak to hold the bank's voltage: current would flow back into the machine, so the
    run stops at once and says so (a reverse-current cut-out must open; common practice)."""
    r = charge_run(machine, profile, Setting("shunt", rheostat_ohm=90.0))
    assert r.stop == "current-floor" and r.duration_h == 0
    assert r.current_a[0] < 0 and "back" in r.stop_reason


def test_no_operating_point(machine, profile):
    """Where the characteristic never meets the charging curve the run stops with that reason."""
    r = charge_run(machine, profile, Setting("shunt", rheostat_ohm=100.0))
    assert r.stop == "no-operating-point" and "no stable operating point" in r.stop_reason
    assert "flow back" in r.stop_reason and r.duration_h == 0
    json.dumps(r.as_dict(), allow_nan=False)


def test_time_cap(machine, profile, best):
    """max_hours caps the run (the bench's 12-hour run) and the reason names the cap."""
    r = charge_run(machine, profile, best.setting, max_hours=2.0)
    assert r.stop == "time-cap" and "2 h" in r.stop_reason
    assert_allclose(r.duration_h, 2.0)
    assert_allclose(r.time_h[-1], 2.0)


def test_bad_max_hours(machine, profile, best):
    """A time cap that is not a positive number is bad input (project rule: one-line InputError)."""
    with pytest.raises(InputError, match="max_hours"):
        charge_run(machine, profile, best.setting, max_hours=0)


def test_non_battery_profile_is_refused(machine):
    """A charge run needs a battery profile: InputError naming load.kind."""
    welding = load_profile(ROOT / "profiles" / "loads" / "welding.toml")
    with pytest.raises(InputError, match=r"load\.kind"):
        charge_run(machine, welding, Setting("shunt"))


def test_as_dict_is_json(full_run):
    """as_dict is JSON without NaN: arrays as lists of the time grid's length, scalars beside them."""
    d = full_run.as_dict()
    text = json.dumps(d, allow_nan=False)
    back = json.loads(text)
    for k in ("time_h", "current_a", "bank_voltage_v", "terminal_voltage_v", "volts_per_cell",
              "state_of_charge", "ah", "kwh"):
        assert isinstance(back[k], list) and len(back[k]) == len(full_run.time_h)
    for k in ("duration_h", "stop_reason", "limit_volts_per_cell", "gassing_volts_per_cell", "setting",
              "cautions", "notice"):
        assert k in back
    assert back["setting"]["connection"] == full_run.setting.connection


def test_cautions_travel_with_the_run(full_run, machine, profile):
    """The run carries the battery cautions: reverse-current cut-out (warn), polarity (note) and the
    ventilation airflow of IEC 62485-2, Q = 0.05 x 60 x 20 x 200 / 1000 = 12 m3/h (derived)."""
    rules = {c.rule: c for c in full_run.cautions}
    assert rules["battery-reverse-current"].severity == "warn"
    assert rules["battery-polarity"].severity == "note"
    assert_allclose(rules["battery-ventilation"].figures["ventilation_m3_per_h"], 12.0, rtol=1e-12)
    gas = charge_run(machine, profile, Setting("shunt", rheostat_ohm=60.0))
    assert "battery-gassing" in {c.rule for c in gas.cautions}
    assert "battery-gassing" not in rules


def test_text_summary(full_run):
    """The text names the stop reason, lists the cautions and tabulates about 12 rows over time."""
    text = charge_text(full_run)
    assert "end state of charge" in text and "Cautions" in text
    table = [ln for ln in text.splitlines() if ln.strip() and ln.strip()[0].isdigit() and "  " in ln]
    assert 10 <= len(table) <= 13


def test_from_files_uses_the_best_option(best):
    """Without a setting the run takes the search's best option."""
    r = charge_from_files(MACHINE, PROFILE)
    assert r.setting == best.setting
    assert "search" in r.setting_source


def test_from_files_checks_a_given_setting():
    """A given setting is checked as command-line input and the message names the option."""
    with pytest.raises(InputError, match="--rheostat-ohm"):
        charge_from_files(MACHINE, PROFILE, Setting("shunt", rheostat_ohm=1e4), names={"rheostat_ohm": "--rheostat-ohm"})


def test_cli_json(capsys):
    """`supplycfg charge MACHINE PROFILE --json` prints one JSON object."""
    rc = main(["charge", str(MACHINE), str(PROFILE), "--json"])
    out, err = capsys.readouterr()
    assert rc == 0 and err == ""
    d = json.loads(out)
    assert isinstance(d, dict) and d["stop"] == "end-soc"
    assert len(d["time_h"]) == len(d["current_a"]) > 10


def test_from_files_nearest_miss(tmp_path):
    """Where no setting meets every limit the run takes the nearest miss and says so."""
    bad = tmp_path / "narrow.toml"
    bad.write_text(PROFILE.read_text().replace("min_charge_current_a = 10", "min_charge_current_a = 29.9"))
    r = charge_from_files(MACHINE, bad)
    assert "nearest miss" in r.setting_source and any("nearest miss" in n for n in r.notes)
    assert not any(c.severity == "stop" for c in r.cautions)


def test_cli_with_setting(capsys):
    """A setting on the command line is run as given."""
    rc = main(["charge", str(MACHINE), str(PROFILE), "--connection", "shunt", "--rheostat-ohm", "60"])
    out, err = capsys.readouterr()
    assert rc == 0 and "charge limit" in out


def test_cli_non_battery_profile(capsys):
    """A non-battery profile: exit code 2 and one line naming load.kind."""
    rc = main(["charge", str(MACHINE), str(ROOT / "profiles" / "loads" / "lighting.toml")])
    out, err = capsys.readouterr()
    assert rc == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and "load.kind" in err and "lighting.toml" in err


def test_start_current_is_the_searchs_on_charge(machine, profile, best):
    """Consistency with the search: at the start SOC, over the profile's corners, the run's current
    spans the search's start current on the charging curve (same curve, derived), within 0.2 %."""
    b = profile.battery
    temps = profile.temperatures_c or (machine.reference_temperature_c,)
    cur = [charging_current_a(machine, profile, replace(best.setting, speed_rpm=sp, winding_temperature_c=tc),
                              [b.state_of_charge[0]])[0] for sp in profile.speeds_rpm for tc in temps]
    assert_allclose([max(cur), min(cur)], [best.figures["start_charge_current_on_charge_a"],
                                           best.figures["start_charge_current_on_charge_min_a"]], rtol=2e-3)
    assert min(cur) >= b.min_charge_current_a
