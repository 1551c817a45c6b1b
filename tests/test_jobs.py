"""Load profiles, the named tables and the battery, welding and lamp models."""

import copy
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from supplycfg.jobs import battery, lighting, welding
from supplycfg import profile
from supplycfg.errors import InputError
from supplycfg.validate import read_toml

PROFILES = Path(__file__).resolve().parent.parent / "profiles" / "loads"
DEMO_FILES = sorted(PROFILES.glob("*.toml"))


# ---------------------------------------------------------------------------
# chemistry table against its sources
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("name, float_v, boost_v", [
    ("lead-acid-vented", 2.23, 2.40),
    ("lead-acid-valve-regulated", 2.27, 2.40),
    ("nickel-cadmium-vented", 1.40, 1.55),
])
def test_float_and_boost_voltages_iec_62485_2(name, float_v, boost_v):
    """Per-cell float and boost voltages: IEC 62485-2 table (seen)."""
    c = battery.chemistry(name)
    assert_allclose([c.float_voltage_v, c.boost_voltage_v], [float_v, boost_v], rtol=0, atol=1e-12)


@pytest.mark.parametrize("name, igas_float, igas_boost, rate", [
    ("lead-acid-vented", 5.0, 20.0, "C10"),
    ("lead-acid-valve-regulated", 1.0, 8.0, "C10"),
    ("nickel-cadmium-vented", 5.0, 50.0, "C5"),
])
def test_gas_currents_iec_62485_2(name, igas_float, igas_boost, rate):
    """Gas-producing currents [mA/Ah] and the capacity they refer to: IEC 62485-2 (seen)."""
    c = battery.chemistry(name)
    assert_allclose([c.gas_current_float_ma_per_ah, c.gas_current_boost_ma_per_ah],
                    [igas_float, igas_boost], rtol=0, atol=1e-12)
    assert c.capacity_rate == rate


def test_temperature_coefficients():
    """-3 mV/degC/cell for valve-regulated lead-acid (manufacturers' practice) and vented
    NiCd (seen); vented lead-acid inside the -3 to -5 mV range (common practice)."""
    assert_allclose(battery.chemistry("lead-acid-valve-regulated").temperature_coefficient_v_per_c, -0.003, atol=1e-12)
    assert_allclose(battery.chemistry("nickel-cadmium-vented").temperature_coefficient_v_per_c, -0.003, atol=1e-12)
    assert -0.005 <= battery.chemistry("lead-acid-vented").temperature_coefficient_v_per_c <= -0.003


def test_gassing_and_limits_ordered():
    """Gassing of vented lead-acid at 2.35-2.40 V/cell (from memory); highest cell voltage 2.7 V for vented
    lead-acid (a full cell on a C/20 finish reads 2.5-2.7 V, from memory), the boost voltage 2.40 V for
    valve-regulated (must not be gassed; IEC 62485-2 seen), about 1.7 V for NiCd (from memory);
    float < gassing <= highest, rest voltages below float, every value with its source."""
    assert 2.35 <= battery.chemistry("lead-acid-vented").gassing_voltage_v <= 2.40
    assert_allclose([battery.chemistry(n).max_cell_voltage_v for n in battery.CHEMISTRIES], [2.70, 2.40, 1.70],
                    atol=1e-12)
    for c in battery.CHEMISTRIES.values():
        assert c.float_voltage_v < c.gassing_voltage_v <= c.max_cell_voltage_v
        assert c.open_circuit_voltage_empty_v < c.open_circuit_voltage_full_v < c.float_voltage_v
        assert 0 < c.finishing_rate_per_h < c.reference_rate_per_h
        assert 0 < c.acceptance_end_power < 1
        missing = {f for f in c.__dataclass_fields__ if f not in ("name", "basis")} - set(c.basis)
        assert not missing, missing


def test_finishing_rates_and_emission_factors():
    """Finishing rate C/20 for vented lead-acid (common practice, from memory); gas-emission factor
    fg 1 for vented cells, 0.2 for valve-regulated (IEC 62485-2, structure from memory)."""
    assert_allclose(battery.chemistry("lead-acid-vented").finishing_rate_per_h, 0.05, atol=1e-12)
    assert_allclose([battery.chemistry(n).gas_emission_factor for n in battery.CHEMISTRIES], [1.0, 0.2, 1.0],
                    atol=1e-12)


def test_temperature_correction_of_cell_voltages():
    """VRLA float 2.25 V/cell at 25 degC, -3 mV/degC/cell (manufacturers' practice): 2.22 V at 35 degC,
    2.28 V at 15 degC (derived); the gassing voltage and the highest cell voltage move the same way."""
    got = battery.temperature_corrected_volts_per_cell("lead-acid-valve-regulated", 2.25, [15.0, 25.0, 35.0])
    assert_allclose(got, [2.28, 2.25, 2.22], rtol=0, atol=1e-12)
    assert_allclose(battery.gassing_volts_per_cell("nickel-cadmium-vented", 45.0), 1.55 - 0.06, atol=1e-12)
    assert_allclose(battery.highest_volts_per_cell("lead-acid-vented", 35.0), 2.70 - 0.04, atol=1e-12)


def test_open_circuit_voltage_linear_between_table_values():
    """Lead-acid rest voltage = specific gravity + 0.84: 1.98 V empty, 2.12 V full
    (common practice, from memory), linear in state of charge."""
    got = battery.open_circuit_voltage_per_cell("lead-acid-vented", [0.0, 0.5, 1.0, 1.2, -0.1])
    assert_allclose(got, [1.98, 2.05, 2.12, 2.12, 1.98], rtol=0, atol=1e-12)
    got = battery.open_circuit_voltage_per_cell("lead-acid-vented", 0.25, ocv_range=(2.0, 2.2))
    assert_allclose(got, 2.05, rtol=0, atol=1e-12)


def test_nickel_cadmium_flat_rest_voltage():
    """NiCd: rest voltage nearly flat (from memory): the charging curve at C/5 rises several times more."""
    c = battery.chemistry("nickel-cadmium-vented")
    ocv = battery.open_circuit_voltage_per_cell(c, [0.0, 1.0])
    v = battery.cell_on_charge(c, [0.5, 1.0], 0.2).volts_per_cell
    assert ocv[1] - ocv[0] <= 0.06
    assert ocv[1] - ocv[0] < 0.25 * (v[1] - v[0])


def test_default_bank_resistance():
    """Bank resistance = cells x (cell resistance x capacity) / capacity (derived)."""
    assert_allclose(battery.bank_resistance_ohm("lead-acid-vented", 60, 200), 60 * 0.15 / 200, rtol=1e-12)


# ---------------------------------------------------------------------------
# welding
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("process, currents, volts", [
    ("manual-metal-arc", [0, 60, 180, 600, 700], [20.0, 22.4, 27.2, 44.0, 44.0]),
    ("tungsten-inert-gas", [100, 250, 600, 800], [14.0, 20.0, 34.0, 34.0]),
    ("metal-inert-gas", [100, 300, 600, 900], [19.0, 29.0, 44.0, 44.0]),
])
def test_conventional_load_lines_iec_60974_1(process, currents, volts):
    """IEC 60974-1 conventional load: MMA 20 + 0.04 I, TIG 10 + 0.04 I, MIG/MAG 14 + 0.05 I
    (seen); constant 44, 34, 44 V above 600 A (from memory)."""
    assert_allclose(welding.conventional_load_voltage(process, currents), volts, rtol=5e-4)
    assert_allclose(welding.conventional_load_voltage(process, -np.asarray(currents, float)), volts, rtol=5e-4)


def test_load_lines_continuous_at_knee():
    """The line meets its constant part at 600 A (IEC 60974-1, derived)."""
    for p in welding.WELDING_PROCESSES.values():
        assert_allclose(p.load_line_offset_v + p.load_line_slope_v_per_a * p.load_line_knee_a,
                        p.load_line_top_v, rtol=5e-4)


def test_required_characteristics():
    """Drooping for manual metal arc and TIG, flat for MIG/MAG (textbooks; common practice)."""
    assert welding.welding_process("manual-metal-arc").characteristic == "drooping"
    assert welding.welding_process("tungsten-inert-gas").characteristic == "drooping"
    assert welding.welding_process("metal-inert-gas").characteristic == "flat"
    m = welding.characteristic_margin_v_per_a("manual-metal-arc", [-0.3, -0.1, -0.02])
    assert_allclose(m, [0.2, 0.0, -0.08], atol=1e-12)
    f = welding.characteristic_margin_v_per_a("metal-inert-gas", [-0.3, -0.05, -0.02])
    assert_allclose(f, [-0.25, 0.0, 0.03], atol=1e-12)


def test_no_load_voltage_limits():
    """IEC 60974-1: DC 113 V peak in normal and increased-shock-hazard environments; AC 80 V
    and 48 V r.m.s. (seen). US 29 CFR 1910.254(b)(3): manual DC 100 V (seen)."""
    lim = welding.NO_LOAD_VOLTAGE_LIMITS
    assert_allclose([lim["iec-dc-normal"].voltage_v, lim["iec-dc-increased-shock-hazard"].voltage_v,
                     lim["iec-ac-normal"].voltage_v, lim["iec-ac-increased-shock-hazard"].voltage_v,
                     lim["us-manual-dc"].voltage_v], [113, 113, 80, 48, 100], atol=1e-12)
    assert lim["iec-dc-normal"].measure == "peak"
    for env in welding.ENVIRONMENTS.values():
        assert_allclose(welding.no_load_voltage_limit(env.dc_limit).voltage_v, 113.0, atol=1e-12)


def test_no_load_peak_from_mean():
    """Commutator ripple allowance 5 % (common practice): 100 V mean -> 105 V peak."""
    assert_allclose(welding.no_load_peak_voltage([80.0, 100.0]), [84.0, 105.0], rtol=1e-12)
    assert_allclose(welding.no_load_peak_voltage(100.0, ripple_fraction=0.0), 100.0, rtol=1e-12)


def test_thermal_equivalent_current():
    """I_X2 = I_X1 sqrt(X1 / X2): 300 A at 60 % ~ 232 A at 100 % (rating practice, from memory)."""
    assert_allclose(welding.thermal_equivalent_current(300.0, 0.6), 232.4, rtol=5e-4)
    assert_allclose(welding.thermal_equivalent_current([200.0, 200.0], [1.0, 0.25]), [200.0, 100.0], rtol=1e-12)


# ---------------------------------------------------------------------------
# lamps
# ---------------------------------------------------------------------------

def test_incandescent_lamp_laws():
    """IES Lighting Handbook exponents (from memory): light V^3.38, life V^-13.1.
    At 0.95 Vr light 0.841, life 1.96x; at 1.05 Vr light 1.179, life 0.528x (derived)."""
    assert_allclose(lighting.lamp_light_ratio([0.95, 1.05]), [0.841, 1.179], rtol=5e-4)
    assert_allclose(lighting.lamp_life_ratio([0.95, 1.05]), [1.958, 0.5277], rtol=5e-4)
    assert_allclose(lighting.lamp_power_ratio([0.95, 1.05]), [0.95 ** 1.54, 1.05 ** 1.54], rtol=1e-12)
    assert_allclose(lighting.lamp_power_ratio(1.0), 1.0, rtol=1e-12)
    inc = lighting.lamp("incandescent")
    assert_allclose([inc.light_exponent, inc.power_exponent, inc.life_exponent], [3.38, 1.54, -13.1], atol=1e-12)
    assert lighting.lamp("electronic").light_exponent is None


# ---------------------------------------------------------------------------
# loaders list the valid names
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("loader, table", [
    (battery.chemistry, battery.CHEMISTRIES),
    (welding.welding_process, welding.WELDING_PROCESSES),
    (welding.no_load_voltage_limit, welding.NO_LOAD_VOLTAGE_LIMITS),
    (welding.environment, welding.ENVIRONMENTS),
    (lighting.lamp, lighting.LAMPS),
])
def test_loader_lists_valid_names(loader, table):
    """A wrong name gives one line listing every valid name."""
    for name in table:
        assert loader(name).name == name
    with pytest.raises(InputError) as exc:
        loader("no-such-thing")
    msg = str(exc.value)
    assert "\n" not in msg and "no-such-thing" in msg
    for name in table:
        assert name in msg
    with pytest.raises(InputError):
        loader(None)


# ---------------------------------------------------------------------------
# profiles
# ---------------------------------------------------------------------------

def test_demo_profiles_present():
    """One demo profile per kind."""
    kinds = {profile.load_profile(f).kind for f in DEMO_FILES}
    assert kinds == set(profile.KINDS)


@pytest.mark.parametrize("path", DEMO_FILES, ids=lambda p: p.name)
def test_demo_profile_round_trip(path):
    """profile_from_dict(profile_to_dict(p)) == p, and the text form reads the same."""
    p = profile.load_profile(path)
    assert p.source == str(path)
    q = profile.profile_from_dict(profile_dict := profile.profile_to_dict(p), "again")
    assert q == p
    assert profile.profile_to_dict(q) == profile_dict
    assert profile.load_profile(path.name, path.read_text()) == p
    assert p.job is getattr(p, p.kind)
    for other in profile.KINDS:
        if other != p.kind:
            assert getattr(p, other) is None


def test_battery_demo_values():
    """The demo charging job as written, defaults from the chemistry table."""
    p = profile.load_profile(PROFILES / "battery-charging.toml")
    b = p.battery
    assert (b.chemistry, b.cells) == ("lead-acid-vented", 60)
    # the demo's motor: 1500 rpm synchronous through a 140/145 mm belt, the generator's speed at zero shaft power
    assert p.drive.kind == "motor" and p.drive.rated_power_kw == 11.0
    assert_allclose(p.speeds_rpm, (1500.0 * 0.9655,), rtol=1e-12)
    assert_allclose(b.open_circuit_voltage_per_cell_v, (1.98, 2.12), atol=1e-12)
    # left out: the chemistry's gassing voltage, finishing rate and the cut-out rule, resolved on use
    assert b.charge_voltage_per_cell_v is None and b.finishing_rate_per_h is None
    assert_allclose(battery.handover_volts_per_cell(b), 2.38, atol=1e-12)
    assert_allclose(battery.finishing_current_a(b), 0.05 * 200, rtol=1e-12)
    assert_allclose(battery.cutout_closing_voltage_v(b), 60 * (2.12 + 0.05), rtol=1e-12)
    assert_allclose(b.target_hours, 16.0, atol=1e-12)


def test_old_battery_profile_keeps_loading():
    """A profile written before the charge plan (charge_voltage_per_cell_v = 2.40, the old default
    charge limit, and none of the new keys) loads unchanged: 2.40 V is now its hand-over voltage and
    the new keys take their defaults (regression: old profiles keep loading)."""
    text = (PROFILES / "battery-charging.toml").read_text()
    text = text.replace("target_hours = 16", "charge_voltage_per_cell_v = 2.40")
    p = profile.load_profile("old.toml", text)
    b = p.battery
    assert_allclose(battery.handover_volts_per_cell(b), 2.40, atol=1e-12)
    assert_allclose(b.target_hours, battery.DEFAULT_TARGET_HOURS, atol=1e-12)
    assert b.finishing_rate_per_h is None and b.cutout_closing_volts_per_cell is None
    assert profile.profile_from_dict(profile.profile_to_dict(p), "old.toml") == p


MINIMAL = {
    "battery": {"load": {"kind": "battery"}, "drive": {"speed_rpm": 1450},
                "battery": {"chemistry": "nickel-cadmium-vented", "cells": 90, "capacity_ah": 100,
                            "state_of_charge": [0.1, 1.0], "max_charge_current_a": 20}},
    "welding": {"load": {"kind": "welding"}, "drive": {"speed_range_rpm": [1900, 2100]},
                "welding": {"process": "tungsten-inert-gas", "current_range_a": [20, 150]}},
    "lighting": {"load": {"kind": "lighting"}, "drive": {"speed_rpm": 1500},
                 "lighting": {"nominal_voltage_v": 110, "load_current_a": [0, 40]}},
    "booster": {"load": {"kind": "booster"}, "drive": {"speed_rpm": 1000},
                "booster": {"bus_voltage_v": 250, "feeder_resistance_ohm": 0.1, "load_current_a": [0, 100]}},
}


def test_defaults_of_optional_keys():
    """Missing optional keys take the documented defaults."""
    b = profile.profile_from_dict(MINIMAL["battery"], "m.toml")
    assert b.label == "" and b.temperatures_c is None
    c = battery.chemistry("nickel-cadmium-vented")
    assert_allclose([b.battery.min_charge_current_a, b.battery.cable_resistance_ohm, b.battery.temperature_c],
                    [battery.DEFAULT_MIN_CHARGE_CURRENT_A, battery.DEFAULT_CABLE_RESISTANCE_OHM, 25.0], atol=1e-12)
    assert_allclose(b.battery.internal_resistance_ohm, 90 * c.resistance_ohm_ah / 100, rtol=1e-12)
    assert_allclose(b.battery.open_circuit_voltage_per_cell_v,
                    (c.open_circuit_voltage_empty_v, c.open_circuit_voltage_full_v), atol=1e-12)
    assert b.battery.charge_voltage_per_cell_v is None
    assert_allclose(battery.handover_volts_per_cell(b.battery), c.gassing_voltage_v, atol=1e-12)
    assert_allclose(battery.finishing_rate_per_h(b.battery), c.finishing_rate_per_h, atol=1e-12)
    assert_allclose(b.battery.target_hours, battery.DEFAULT_TARGET_HOURS, atol=1e-12)
    assert_allclose(battery.cutout_closing_volts_per_cell(b.battery), c.open_circuit_voltage_full_v + 0.05,
                    atol=1e-12)
    w = profile.profile_from_dict(MINIMAL["welding"], "m.toml")
    assert w.speeds_rpm == (1900.0, 2100.0)
    assert w.welding.environment == "normal" and w.welding.max_no_load_voltage_v is None
    assert_allclose([w.welding.duty_cycle_percent, w.welding.cable_resistance_ohm], [60.0, 0.0], atol=1e-12)
    li = profile.profile_from_dict(MINIMAL["lighting"], "m.toml").lighting
    assert li.lamp == "none"
    assert_allclose([li.tolerance_percent, li.feeder_resistance_ohm], [5.0, 0.0], atol=1e-12)
    bo = profile.profile_from_dict(MINIMAL["booster"], "m.toml").booster
    assert_allclose(bo.tolerance_percent, 5.0, atol=1e-12)
    for kind, data in MINIMAL.items():
        p = profile.profile_from_dict(data, "m.toml")
        assert profile.profile_from_dict(profile.profile_to_dict(p), "m.toml") == p


def _with(kind, table, key, value):
    d = copy.deepcopy(MINIMAL[kind])
    if value is _DROP:
        d[table].pop(key)
    else:
        d.setdefault(table, {})[key] = value
    return d


_DROP = object()

BAD = [
    # (kind, table, key, value, key named in the message)
    ("battery", "load", "kind", "solar", "load.kind"),
    ("battery", "load", "colour", "red", "load.colour"),
    ("battery", "drive", "speed_range_rpm", [1400, 1500], "drive.speed_range_rpm"),
    ("battery", "drive", "speed_rpm", _DROP, "drive.speed_rpm"),
    ("battery", "drive", "speed_rpm", 0, "drive.speed_rpm"),
    ("welding", "drive", "speed_range_rpm", [2100, 1900], "drive.speed_range_rpm"),
    ("welding", "drive", "speed_range_rpm", [0, 1900], "drive.speed_range_rpm[0]"),
    ("welding", "drive", "speed_range_rpm", [1900], "drive.speed_range_rpm"),
    ("battery", "drive", "winding_temperature_range_c", [75, 20], "drive.winding_temperature_range_c"),
    ("battery", "battery", "chemistry", "lithium", "battery.chemistry"),
    ("battery", "battery", "cells", 0, "battery.cells"),
    ("battery", "battery", "cells", 2.5, "battery.cells"),
    ("battery", "battery", "cells", "sixty", "battery.cells"),
    ("battery", "battery", "capacity_ah", 0, "battery.capacity_ah"),
    ("battery", "battery", "state_of_charge", [0.8, 0.2], "battery.state_of_charge"),
    ("battery", "battery", "state_of_charge", [0.5, 0.5], "battery.state_of_charge"),
    ("battery", "battery", "state_of_charge", [0.2, 1.2], "battery.state_of_charge[1]"),
    ("battery", "battery", "min_charge_current_a", 30, "battery.min_charge_current_a"),
    ("battery", "battery", "max_charge_current_a", _DROP, "battery.max_charge_current_a"),
    ("battery", "battery", "internal_resistance_ohm", -0.1, "battery.internal_resistance_ohm"),
    ("battery", "battery", "internal_resistance_ohm", 0, "battery.internal_resistance_ohm"),
    ("battery", "battery", "cable_resistance_ohm", -0.01, "battery.cable_resistance_ohm"),
    ("battery", "battery", "open_circuit_voltage_per_cell_v", [1.32, 1.25], "battery.open_circuit_voltage_per_cell_v"),
    ("battery", "battery", "open_circuit_voltage_per_cell_v", [0.5, 1.3], "battery.open_circuit_voltage_per_cell_v"),
    ("battery", "battery", "charge_voltage_per_cell_v", 1.2, "battery.charge_voltage_per_cell_v"),
    ("battery", "battery", "charge_voltage_per_cell_v", 2.4, "battery.charge_voltage_per_cell_v"),
    ("battery", "battery", "finishing_rate_per_h", 0, "battery.finishing_rate_per_h"),
    ("battery", "battery", "finishing_rate_per_h", 2.0, "battery.finishing_rate_per_h"),
    ("battery", "battery", "target_hours", 0, "battery.target_hours"),
    ("battery", "battery", "target_hours", "overnight", "battery.target_hours"),
    ("battery", "battery", "cutout_closing_volts_per_cell", 1.0, "battery.cutout_closing_volts_per_cell"),
    ("battery", "battery", "cutout_closing_volts_per_cell", 1.8, "battery.cutout_closing_volts_per_cell"),
    ("battery", "battery", "voltage_v", 120, "battery.voltage_v"),
    ("welding", "welding", "process", "gas", "welding.process"),
    ("welding", "welding", "current_range_a", [0, 150], "welding.current_range_a[0]"),
    ("welding", "welding", "current_range_a", [150, 20], "welding.current_range_a"),
    ("welding", "welding", "environment", "wet", "welding.environment"),
    ("welding", "welding", "duty_cycle_percent", 0, "welding.duty_cycle_percent"),
    ("welding", "welding", "duty_cycle_percent", 120, "welding.duty_cycle_percent"),
    ("welding", "welding", "max_no_load_voltage_v", 150, "welding.max_no_load_voltage_v"),
    ("lighting", "lighting", "tolerance_percent", 0, "lighting.tolerance_percent"),
    ("lighting", "lighting", "tolerance_percent", 60, "lighting.tolerance_percent"),
    ("lighting", "lighting", "lamp", "led", "lighting.lamp"),
    ("lighting", "lighting", "load_current_a", [40, 0], "lighting.load_current_a"),
    ("lighting", "lighting", "nominal_voltage_v", True, "lighting.nominal_voltage_v"),
    ("booster", "booster", "feeder_resistance_ohm", 0, "booster.feeder_resistance_ohm"),
    ("booster", "booster", "load_current_a", [-10, 100], "booster.load_current_a[0]"),
    ("booster", "battery", "cells", 10, "battery"),
    ("booster", "motor", "poles", 4, "motor"),
]


@pytest.mark.parametrize("kind, table, key, value, named", BAD,
                         ids=[f"{b[1]}.{b[2]}={b[3] if b[3] is not _DROP else 'missing'}" for b in BAD])
def test_bad_profile_one_line_error(kind, table, key, value, named):
    """Each rule broken once: one line naming the file and the key."""
    data = _with(kind, table, key, value)
    with pytest.raises(InputError) as exc:
        profile.profile_from_dict(data, "bad.toml")
    msg = str(exc.value)
    assert "\n" not in msg
    assert msg.startswith(f"bad.toml: {named}: "), msg
    assert isinstance(exc.value, ValueError)


def test_bad_profile_messages_say_what_is_allowed():
    """Wrong names list the valid ones; unknown keys list the valid keys."""
    with pytest.raises(InputError, match="lead-acid-vented, lead-acid-valve-regulated, nickel-cadmium-vented"):
        profile.profile_from_dict(_with("battery", "battery", "chemistry", "lithium"), "bad.toml")
    with pytest.raises(InputError, match="valid keys: .*state_of_charge"):
        profile.profile_from_dict(_with("battery", "battery", "voltage_v", 1), "bad.toml")
    with pytest.raises(InputError, match="normal, increased-shock-hazard"):
        profile.profile_from_dict(_with("welding", "welding", "environment", "wet"), "bad.toml")


def test_missing_tables():
    """A missing [drive] or job table is named."""
    d = copy.deepcopy(MINIMAL["lighting"]); d.pop("drive")
    with pytest.raises(InputError, match=r"^bad.toml: drive: table is missing"):
        profile.profile_from_dict(d, "bad.toml")
    d = copy.deepcopy(MINIMAL["lighting"]); d.pop("lighting")
    with pytest.raises(InputError, match=r"^bad.toml: lighting: table is missing"):
        profile.profile_from_dict(d, "bad.toml")
    d = copy.deepcopy(MINIMAL["lighting"]); d["load"]["kind"] = "booster"
    with pytest.raises(InputError, match=r"^bad.toml: lighting: "):
        profile.profile_from_dict(d, "bad.toml")


@pytest.mark.parametrize("text, key", [
    ("[load\nkind = 'battery'", "file"),
    ("", "file"),
    ("[load]\nkind = 3\n[drive]\nspeed_rpm = 1000\n", "load.kind"),
])
def test_bad_profile_text(text, key):
    """Broken TOML and wrong types give one-line errors naming the file."""
    with pytest.raises(InputError) as exc:
        profile.load_profile("upload.toml", text)
    msg = str(exc.value)
    assert "\n" not in msg and msg.startswith(f"upload.toml: {key}: ")


def test_read_toml_matches_profile_dict():
    """The demo file's tables are exactly those profile_to_dict writes, key for key."""
    path = PROFILES / "lighting.toml"
    raw = read_toml(path)
    out = profile.profile_to_dict(profile.load_profile(path))
    assert set(raw) == set(out)
    for table in raw:
        assert set(raw[table]) == set(out[table])


def test_lazy_dial_rows_hold_and_break_as_the_whole_evaluation():
    """The band search's lazy evaluation of welding dial rows (later limits solved only for rows inside
    the earlier ones): every row holds or breaks as in the whole evaluation, and a row solved to the end
    has the same figures bit for bit (two routes to one answer)."""
    from supplycfg.envelope import build_space, control_range, smallest_margin_fraction
    from supplycfg.machine import load_machine
    root = Path(__file__).resolve().parents[1] / "profiles"
    space = build_space(load_machine(root / "machines" / "welding-set.toml"),
                        profile.load_profile(root / "loads" / "welding.toml"))
    rng = np.random.default_rng(5)
    nb = len(space.bases)
    base = np.repeat(np.arange(nb), 4)
    target = np.tile([60.0, 100.0, 140.0, 180.0], nb)
    nom = welding.dial_corners(space)[0]
    # each row's exact control for its current, moved by up to a fifth of its range either way:
    # some rows stay inside every limit, others break one or another
    u0 = welding.solve_weld_control(space, base, np.full(base.size, nom), target)[0]
    lo = np.array([control_range(space.machine, space.bases[b][3])[0] for b in base])
    hi = np.array([control_range(space.machine, space.bases[b][3])[1] for b in base])
    u = np.clip(np.where(np.isfinite(u0), u0, lo) + (hi - lo) * rng.uniform(-0.2, 0.2, base.size), lo, hi)
    whole = welding.evaluate_rows(space, base, u, target, near=True)
    lazy = welding.evaluate_rows(space, base, u, target, near=True, lazy=True)

    def holds(e):
        return np.where(e["converged"], smallest_margin_fraction(welding.row_limits(space, e)), np.nan) >= 0

    assert_array_equal(holds(lazy), holds(whole))
    assert holds(whole).any() and (~holds(whole)).any()
    solved = ~np.isnan(lazy["short_circuit_current_a"]) | holds(whole)
    assert solved.any() and (~solved).any()
    for k in whole:
        assert_array_equal(lazy[k][solved], whole[k][solved], err_msg=k)


def test_arc_stability_limit_closed_form():
    """The machine's slope at the working point must stay below the arc's conventional line plus the leads
    (Kaufmann's criterion, recalled; lines from IEC 60974-1): 0.05 + 0.02 V/A for MIG on 0.02 ohm leads,
    0.04 V/A for manual metal arc on none."""
    assert_allclose(welding.arc_stability_slope_limit_v_per_a("metal-inert-gas", 0.02), 0.07, rtol=1e-12)
    assert_allclose(welding.arc_stability_slope_limit_v_per_a("manual-metal-arc", 0.0), 0.04, rtol=1e-12)


def test_mig_on_a_folding_characteristic_is_not_offered():
    """Regression: for MIG (flat source) the demo welding set's best option worked a self-excited compound
    past the turn of its curve (slope +0.33 V/A at 60 A, short-circuit current 7 A): the flat test (slope at
    least -0.05 V/A) let a rising curve through. Every option that meets the job now holds the arc on every
    dial row, and the former first two break the arc-stability limit."""
    from supplycfg.machine import load_machine
    from supplycfg.profile import load_profile
    from supplycfg.search import search
    root = Path(__file__).resolve().parent.parent / "profiles"
    p = load_profile(root / "loads" / "welding.toml")
    from dataclasses import replace
    p = replace(p, welding=replace(p.welding, process="metal-inert-gas", min_no_load_voltage_v=None))
    res = search(load_machine(root / "machines" / "welding-set.toml"), p)
    limit = welding.arc_stability_slope_limit_v_per_a("metal-inert-gas", p.welding.cable_resistance_ohm)
    for o in res.options:
        rows = o.extras.get("dial") or []
        if o.feasible:
            assert all(r["slope_v_per_a"] < limit for r in rows)
    folded = [o for o in res.options if o.setting.connection.endswith("shunt-differential")
              and o.setting.series_turns == 3 and o.setting.diverter_ohm == 0.0015]
    assert folded and all("arc_stability" in o.failed and not o.feasible for o in folded)
