"""The battery cell model against its calibration checks, and the `supplycfg cell` command.

Each check names its source. The model's reaction rates are solved here with
SciPy's scalar root finder and integrated with its adaptive quadrature,
independently of the package's vectorised Newton inversions and midpoint rule.

Calibration table (sources as in the project's source list):

- full charge at 25 degC, current at the float voltage: vented lead-acid 2.23 V,
  valve-regulated 2.27 V, vented NiCd 1.40 V -> 1 mA/Ah; at the boost voltage
  2.40 V, 2.40 V, 1.55 V -> 4, 8 and 10 mA/Ah; each within a factor of 2
  (IEC 62485-2, the table's Igas divided by the gas-emission factor and the
  safety factor 5; seen for the table, the factors' structure from memory);
- vented lead-acid charged at C/10, 25 degC: 2.37-2.40 V per cell between 75 %
  and 90 % state of charge (common practice, from memory);
- vented lead-acid, full, finishing rate C/20: 2.5-2.7 V per cell (common
  practice, from memory);
- temperature: the whole curve, gassing voltage and end limit alike, move by
  -3 to -5 mV/K per cell for lead-acid, -3 mV/K for NiCd (manufacturers'
  practice; vented NiCd seen);
- Ah returned for a full recharge from 20 %: 1.05-1.25 x the Ah removed for
  lead-acid (common practice); 1.3-1.6 x for vented NiCd, whose makers' normal
  charge of 0.2 C5 for 7-8 h from empty puts back 1.4-1.6 x C5 (from memory).
"""

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad
from scipy.optimize import brentq

from supplycfg.cli import main
from supplycfg.errors import InputError
from supplycfg.jobs import battery
from supplycfg.jobs.battery import CHEMISTRIES, chemistry

NAMES = list(CHEMISTRIES)
FLOAT_BOOST = {  # chemistry: (float V, mA/Ah; boost V, mA/Ah), IEC 62485-2
    "lead-acid-vented": (2.23, 1.0, 2.40, 4.0),
    "lead-acid-valve-regulated": (2.27, 1.0, 2.40, 8.0),
    "nickel-cadmium-vented": (1.40, 1.0, 1.55, 10.0),
}


# ---------------------------------------------------------------------------
# the model solved independently: SciPy on the rate laws
# ---------------------------------------------------------------------------

def rates(chem, soc, u, temp=25.0):
    s, g = battery.reaction_rates_per_h(chem, soc, u, temp)
    return float(s), float(g)


def internal_at_rate(chem, soc, rate, temp=25.0):
    """Internal voltage that carries ``rate`` [1/h] (brentq on stored + gas = rate)."""
    e = float(battery.open_circuit_voltage_per_cell(chem, soc))
    return brentq(lambda u: sum(rates(chem, soc, u, temp)) - rate, e, e + 3.0, xtol=1e-14, rtol=1e-14)


def volts_at_rate(chem, soc, rate, temp=25.0):
    return internal_at_rate(chem, soc, rate, temp) + chem.resistance_ohm_ah * rate


def rate_at_volts(chem, soc, volts, temp=25.0):
    e = float(battery.open_circuit_voltage_per_cell(chem, soc))
    u = brentq(lambda u: u + chem.resistance_ohm_ah * sum(rates(chem, soc, u, temp)) - volts, e, volts,
               xtol=1e-14, rtol=1e-14)
    return sum(rates(chem, soc, u, temp))


def stored_at_rate(chem, soc, rate, temp=25.0):
    return rates(chem, soc, internal_at_rate(chem, soc, rate, temp), temp)[0]


def soc_reaching(chem, rate, volts, temp=25.0):
    """State of charge where a constant-current charge reaches ``volts``."""
    return brentq(lambda s: volts_at_rate(chem, s, rate, temp) - volts, 0.0, 1.0 - 1e-12, xtol=1e-12)


def hours_at_rate(chem, s_from, s_to, rate):
    """Hours of a constant-current charge from ``s_from`` to ``s_to``: integral of ds / r_stored."""
    val, err = quad(lambda s: 1.0 / stored_at_rate(chem, s, rate), s_from, s_to, limit=400, epsabs=1e-10,
                    epsrel=1e-10, points=[0.5 * (s_from + s_to)] if s_to < 1 else None)
    return val


# ---------------------------------------------------------------------------
# calibration table
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("name", NAMES)
def test_float_and_boost_currents_of_a_full_cell(name):
    """A full cell at 25 degC takes the float and boost currents behind IEC 62485-2's gas-current table
    (Igas / (fg x fs): 1 mA/Ah at float for all three; 4, 8, 10 mA/Ah at boost), each within a factor
    of 2 (the calibration table's tolerance). The table's own values also give these currents."""
    chem = chemistry(name)
    vf, i_f, vb, ib = FLOAT_BOOST[name]
    assert_allclose([chem.float_current_ma_per_ah, chem.boost_current_ma_per_ah], [i_f, ib], rtol=1e-12)
    for volts, want in ((vf, i_f), (vb, ib)):
        got = 1e3 * rate_at_volts(chem, 1.0, volts)
        assert want / 2 <= got <= want * 2, (volts, got, want)
        # the package's own inversion agrees with SciPy's
        assert_allclose(1e3 * battery.cell_at_voltage(chem, 1.0, volts).rate_per_h, got, rtol=1e-9)
    # at full charge nothing is stored: all the current is gas
    p = battery.cell_at_voltage(chem, 1.0, vb)
    assert float(p.stored_per_h) == 0.0 and float(p.gas_per_h) > 0


def test_vented_lead_acid_reaches_gassing_between_75_and_90_percent_at_c10():
    """Vented lead-acid at C/10, 25 degC: 2.37-2.40 V per cell between 75 % and 90 % state of charge
    (common practice, from memory; practice says roughly 80-85 %)."""
    chem = chemistry("lead-acid-vented")
    s237, s240 = soc_reaching(chem, 0.1, 2.37), soc_reaching(chem, 0.1, 2.40)
    assert 0.75 <= s237 < s240 <= 0.90, (s237, s240)
    # and the model's gassing voltage 2.38 V falls between
    assert 0.80 <= soc_reaching(chem, 0.1, chem.gassing_voltage_v) <= 0.85


def test_vented_lead_acid_full_on_a_c20_finish():
    """A full vented cell on a C/20 finishing charge reads 2.5-2.7 V (common practice, from memory);
    and at C/10 it stays within the chemistry's highest cell voltage, 2.7 V (same source)."""
    chem = chemistry("lead-acid-vented")
    v20 = volts_at_rate(chem, 1.0, 0.05)
    assert 2.5 <= v20 <= 2.7, v20
    assert volts_at_rate(chem, 1.0, 0.1) <= chem.max_cell_voltage_v
    assert_allclose(float(battery.cell_on_charge(chem, 1.0, 0.05).volts_per_cell), v20, rtol=1e-12)


@pytest.mark.parametrize("name", NAMES)
def test_temperature_moves_the_whole_curve(name):
    """The gassing voltage and the highest cell voltage move by the chemistry's coefficient, which is
    -3 to -5 mV/K for lead-acid and -3 mV/K for vented NiCd (manufacturers' practice; NiCd seen). The
    charging curve at the chemistry's normal rate moves with them, 10 K either side of 25 degC: by the
    coefficient within 3 % from 80 % charge up (where it meets the hand-over voltage and finishes),
    and by at least 80 % of it from 20 % up (the model moves a reaction's voltage by the coefficient
    wherever it runs well above its rest rate, less near the rest voltage)."""
    chem = chemistry(name)
    a = chem.temperature_coefficient_v_per_c
    if name.startswith("lead-acid"):
        assert -0.005 <= a <= -0.003
    else:
        assert_allclose(a, -0.003, atol=1e-12)
    for t in (15.0, 35.0):
        assert_allclose(battery.gassing_volts_per_cell(chem, t) - chem.gassing_voltage_v, a * (t - 25), atol=1e-12)
        assert_allclose(battery.highest_volts_per_cell(chem, t) - chem.max_cell_voltage_v, a * (t - 25), atol=1e-12)
        r = chem.reference_rate_per_h
        for s in (0.2, 0.5, 0.8, 0.9, 1.0):
            shift = (volts_at_rate(chem, s, r, t) - volts_at_rate(chem, s, r)) / (t - 25)
            assert (0.97 if s >= 0.8 else 0.80) <= shift / a <= 1.0 + 1e-9, (s, t, shift)
    # and the rest voltage does not move (the model's shift acts on the reactions only)
    assert_allclose(float(battery.cell_on_charge(chem, 0.5, 0.0, 40.0).volts_per_cell),
                    float(battery.open_circuit_voltage_per_cell(chem, 0.5)), atol=1e-12)


@pytest.mark.parametrize("name", NAMES)
def test_ah_returned_for_a_full_recharge_from_20_percent(name):
    """A two-rate recharge from 20 %: the normal start rate (C/10 lead-acid, C/5 NiCd) to the gassing
    voltage, then the finishing rate to full (two-rate charging, common practice) returns 1.05-1.25 x
    the Ah removed for lead-acid (common practice) and 1.3-1.6 x for vented NiCd (makers' normal charge,
    0.2 C5 for 7-8 h from empty, from memory). Integrated here with scipy.integrate.quad over ds / r_stored.
    (Regression: NiCd returned 1.12 x, a bank taken off 'full' undercharged.)"""
    chem = chemistry(name)
    r1, r2 = chem.reference_rate_per_h, chem.finishing_rate_per_h
    s_ho = soc_reaching(chem, r1, chem.gassing_voltage_v)
    t1 = hours_at_rate(chem, 0.2, s_ho, r1)
    t2 = hours_at_rate(chem, s_ho, 1.0, r2)
    factor = (r1 * t1 + r2 * t2) / 0.8
    lo_f, hi_f = (1.05, 1.25) if name.startswith("lead-acid") else (1.3, 1.6)
    assert lo_f <= factor <= hi_f, (factor, t1, t2)
    # hours a battery shop recognises for such a recharge: 8-16 h lead-acid, 5-9 h NiCd at C/5 (common practice)
    lo, hi = (8.0, 16.0) if name.startswith("lead-acid") else (5.0, 9.0)
    assert lo <= t1 + t2 <= hi, (t1, t2)


# ---------------------------------------------------------------------------
# the model's structure
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("name", NAMES)
def test_split_and_monotony(name):
    """Stored + gas = the current; the stored share falls as the cell fills; the voltage rises with
    state of charge and with current; no current at the rest voltage (charge balance of the model,
    by construction)."""
    chem = chemistry(name)
    soc = np.linspace(0.0, 1.0, 201)
    for r in (0.01, 0.05, 0.1, 0.2):
        p = battery.cell_on_charge(chem, soc, r)
        assert_allclose(p.stored_per_h + p.gas_per_h, r, rtol=1e-10)
        assert np.all(np.diff(p.volts_per_cell) > 0)
        assert np.all(np.diff(p.stored_fraction) < 1e-12)
        assert p.stored_per_h[-1] == 0.0
    for s in (0.2, 0.6, 0.95):
        v = battery.cell_on_charge(chem, s, [0.02, 0.05, 0.1, 0.2]).volts_per_cell
        assert np.all(np.diff(v) > 0)
    st, gs = battery.reaction_rates_per_h(chem, soc, battery.open_circuit_voltage_per_cell(chem, soc))
    assert_allclose(st, 0.0, atol=1e-15) and assert_allclose(gs, 0.0, atol=1e-15)


@pytest.mark.parametrize("name", NAMES)
def test_inversions_agree_with_scipy_and_each_other(name):
    """The package's Newton inversions (current -> voltage, voltage -> current) agree with brentq to
    1e-9 and invert each other."""
    chem = chemistry(name)
    soc = np.array([0.0, 0.3, 0.7, 0.9, 0.99, 1.0])
    for r in (0.001, 0.05, 0.3):
        got = battery.cell_on_charge(chem, soc, r).volts_per_cell
        want = [volts_at_rate(chem, s, r) for s in soc]
        assert_allclose(got, want, rtol=1e-9)
        back = battery.cell_at_voltage(chem, soc, got).rate_per_h
        assert_allclose(back, r, rtol=1e-8)


def test_rest_voltage_is_linear_in_state_of_charge():
    """Open-circuit volts = specific gravity + 0.84 (common practice, from memory), linear in state of
    charge: vented lead-acid 1.98 V empty (SG 1.14), 2.12 V full (SG 1.28); outside 0..1 held at the ends."""
    got = battery.open_circuit_voltage_per_cell("lead-acid-vented", [0.0, 0.5, 1.0, 1.2, -0.1])
    assert_allclose(got, [1.98, 2.05, 2.12, 2.12, 1.98], atol=1e-12)
    assert_allclose(1.14 + 0.84, 1.98, atol=1e-12)


def test_charging_curve_family():
    """The family the page draws (C/5, C/10, C/20): higher current, higher curve; each rises with charge."""
    fam = battery.charging_curves("lead-acid-vented")
    assert [c["label"] for c in fam["curves"]] == ["C/5", "C/10", "C/20"]
    v = np.array([c["volts_per_cell"] for c in fam["curves"]])
    assert np.all(v[0] > v[1]) and np.all(v[1] > v[2])
    assert np.all(np.diff(v, axis=1) > 0)
    assert_allclose(fam["gassing_volts_per_cell"], 2.38, atol=1e-12)
    json.dumps(fam, allow_nan=False)


# ---------------------------------------------------------------------------
# ventilation
# ---------------------------------------------------------------------------

def test_ventilation_worked_example():
    """IEC 62485-2: Q = 0.05 n Igas C 1e-3; 110 vented lead-acid cells of 100 Ah on boost (20 mA/Ah):
    11.0 m3/h (derived); opening A = 28 Q = 308 cm2 (seen)."""
    q = battery.ventilation_airflow_m3_per_h(110, 100, 20.0)
    assert_allclose(q, 11.0, rtol=1e-12)
    assert_allclose(battery.ventilation_opening_cm2(q), 308.0, rtol=1e-12)


def test_ventilation_governed_by_the_larger_gas_current():
    """The airflow rests on the larger of the standard's row for the highest voltage reached (float row
    at or below the float voltage, boost row above it) and the plan's own gas current x fg x fs
    (IEC 62485-2; issue rule). 60 vented cells of 200 Ah: float row 5 mA/Ah -> 3 m3/h; boost row
    20 -> 12 m3/h; a plan gassing 30 mA/Ah x 1 x 5 = 150 mA/Ah -> 90 m3/h (derived)."""
    v = battery.ventilation("lead-acid-vented", 60, 200, [2.20, 2.38, 2.55], [0.0005, 0.002, 0.030])
    assert list(v["governed_by"]) == ["table-float", "table-boost", "plan-gas-current"]
    assert_allclose(v["gas_current_ma_per_ah"], [5.0, 20.0, 150.0], rtol=1e-12)
    assert_allclose(v["airflow_m3_per_h"], [3.0, 12.0, 90.0], rtol=1e-12)
    assert_allclose(v["opening_cm2"], 28 * v["airflow_m3_per_h"], rtol=1e-12)
    # valve-regulated cells release a fifth of their gas (fg = 0.2): 30 mA/Ah x 0.2 x 5 = 30 mA/Ah
    vr = battery.ventilation("lead-acid-valve-regulated", 60, 200, [2.39], [0.030])
    assert_allclose(vr["gas_current_ma_per_ah"], [30.0], rtol=1e-12)


# ---------------------------------------------------------------------------
# supplycfg cell
# ---------------------------------------------------------------------------

def cell_json(capsys, *args):
    rc = main(["cell", *args, "--json"])
    out, err = capsys.readouterr()
    assert rc == 0 and err == "", err
    return json.loads(out)


def test_cell_command_contract(capsys):
    """`supplycfg cell` prints the model at one point: volts_per_cell, current_a_per_ah, stored_fraction,
    gassing_volts_per_cell (vented lead-acid at 25 degC between 2.37 and 2.40 V, from the source list)."""
    d = cell_json(capsys, "lead-acid-vented", "--soc", "0.5", "--current-per-ah", "0.1")
    assert {"volts_per_cell", "current_a_per_ah", "stored_fraction", "gassing_volts_per_cell"} <= set(d)
    assert_allclose(d["current_a_per_ah"], 0.1, rtol=1e-12)
    assert_allclose(d["volts_per_cell"], volts_at_rate(chemistry("lead-acid-vented"), 0.5, 0.1), rtol=1e-9)
    assert 0.99 < d["stored_fraction"] <= 1.0
    assert 2.37 <= d["gassing_volts_per_cell"] <= 2.40
    # by voltage, the other way round
    d2 = cell_json(capsys, "lead-acid-vented", "--soc", "0.5", "--volts-per-cell", str(d["volts_per_cell"]))
    assert_allclose(d2["current_a_per_ah"], 0.1, rtol=1e-8)
    # temperature-corrected gassing voltage: 2.38 - 0.004 x 10 (common practice coefficient)
    d3 = cell_json(capsys, "lead-acid-vented", "--soc", "1", "--volts-per-cell", "2.23", "--temperature-c", "35")
    assert_allclose(d3["gassing_volts_per_cell"], 2.34, atol=1e-12)
    assert d3["stored_fraction"] == 0.0
    # no current: the stored share is undefined
    d4 = cell_json(capsys, "nickel-cadmium-vented", "--soc", "0.3", "--current-per-ah", "0")
    assert d4["stored_fraction"] is None and d4["current_a_per_ah"] == 0.0


def test_cell_command_text(capsys):
    assert main(["cell", "lead-acid-valve-regulated", "--soc", "0.8", "--current-per-ah", "0.05"]) == 0
    out = capsys.readouterr().out
    assert "cell voltage" in out and "gassing voltage" in out and "% stored" in out


@pytest.mark.parametrize("args, key", [
    (["lithium-ion", "--soc", "0.5", "--current-per-ah", "0.1"], "CHEMISTRY"),
    (["lead-acid-vented", "--soc", "1.5", "--current-per-ah", "0.1"], "--soc"),
    (["lead-acid-vented", "--soc", "0.5", "--current-per-ah", "-0.1"], "--current-per-ah"),
    (["lead-acid-vented", "--soc", "0.5", "--current-per-ah", "50"], "--current-per-ah"),
    (["lead-acid-vented", "--soc", "0.5", "--volts-per-cell", "0"], "--volts-per-cell"),
    (["lead-acid-vented", "--soc", "0.5", "--current-per-ah", "0.1", "--temperature-c", "90"], "--temperature-c"),
    (["lead-acid-vented", "--soc", "0.5"], "cell"),
    (["lead-acid-vented", "--soc", "nan", "--current-per-ah", "0.1"], "--soc"),
])
def test_cell_command_bad_input(capsys, args, key):
    """Bad input: one line naming the option and what is allowed, exit code 2 (project rule)."""
    rc = main(["cell", *args])
    out, err = capsys.readouterr()
    assert rc == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and key in err


def test_cell_point_refuses_both_or_neither():
    with pytest.raises(InputError, match="exactly one"):
        battery.cell_point("lead-acid-vented", 0.5, 2.2, 0.1)


# ---------------------------------------------------------------------------
# optional: the shape of a C/10 charge against a general-purpose battery-modelling library
# ---------------------------------------------------------------------------

@pytest.mark.optional
def test_c10_bulk_charge_against_pybamm():
    """Optional (skipped when PyBaMM is not installed; it is not a dependency): PyBaMM's lead-acid LOQS
    model (a general-purpose battery-modelling library, its default parameter set) charged at C/10 from
    20 %. Its default model has no gas reaction, so only the bulk of the charge (25-65 %) is compared:
    both curves rise steadily, their slopes agree within a factor of 2 and their levels within 0.06 V
    per cell (the parameter sets describe different cells). The end-of-charge rise is our
    calibration's alone (common practice, see the module docstring)."""
    pybamm = pytest.importorskip("pybamm")
    try:
        model = pybamm.lead_acid.LOQS()
        params = model.default_parameter_values
        cap = params["Nominal cell capacity [A.h]"]
        params["Current function [A]"] = -0.1 * cap
        params["Initial State of Charge"] = 0.2
        sol = pybamm.Simulation(model, parameter_values=params).solve(np.linspace(0.0, 3600 * 5.0, 101))
        v = np.asarray(sol["Terminal voltage [V]"].entries, float)
        t = np.asarray(sol["Time [h]"].entries, float)
    except Exception as exc:  # a library version whose names differ: not our failure
        pytest.skip(f"PyBaMM's lead-acid model did not run here: {type(exc).__name__}: {exc}")
    soc = 0.2 + 0.1 * t
    bulk = (soc >= 0.25) & (soc <= 0.65)
    theirs = v[bulk]
    ours = battery.cell_on_charge("lead-acid-vented", soc[bulk], 0.1).volts_per_cell
    assert np.all(np.diff(theirs) > 0) and np.all(np.diff(ours) > 0)
    slope_t = (theirs[-1] - theirs[0]) / (soc[bulk][-1] - soc[bulk][0])
    slope_o = (ours[-1] - ours[0]) / (soc[bulk][-1] - soc[bulk][0])
    assert 0.5 <= slope_o / slope_t <= 2.0, (slope_o, slope_t)
    assert np.max(np.abs(theirs - ours)) < 0.06
