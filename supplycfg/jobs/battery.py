"""Battery charging: chemistries, the charge-acceptance model, the charge plan, its figures, limits and cautions.

The cell model
--------------
Per cell, with state of charge ``s`` (0..1), internal voltage ``U`` (the
cell voltage less its resistive drop) and the overpotential ``eta = U - E(s)``
above the rest voltage ``E(s)``, two reactions share the charging current:

- the charge reaction, which is what raises the state of charge (stored):
  ``r_s = A(s) [exp(eta / b_c) - 1]`` with the charge acceptance
  ``A(s) = A_half exp(-kappa (s^m - 0.5^m)) (2 (1 - s))^p``: high on an empty
  cell, falling steeply as the active material is used up, and as
  ``(1 - s)^p`` at the very end (``p < 1`` lets a charge finish in finite
  time);
- the overcharge (gas) reaction, Tafel-like:
  ``r_g = g_ref [exp((U - U_ref) / b_g) - exp((E(s) - U_ref) / b_g)]``
  (its rate at rest, self-discharge, is left out, so no current flows at the
  rest voltage).

Rates are per ampere-hour of capacity [1/h] (0.1 = C/10). The cell voltage
is ``V = U + R_c r`` with ``r = r_s + r_g``. Warm cells charge at lower
voltage: both reactions run faster by ``exp(-alpha dT / b)``, which moves the
curve by ``alpha`` [V/K] wherever a reaction runs well above its rest rate
and leaves the rest voltage alone. The constants of each chemistry are fitted
to the published checks (see the chemistry table and ``tests/test_battery_model.py``).

The plan
--------
A charging set's field is turned down when the cells reach their gassing
voltage (two-rate charging, common practice): stage 1 (main charge) with one
field setting until the hand-over voltage, stage 2 (finish) with a weaker
field, same connection, taps and diverter. The time follows from the charge
balance ``ds/dt = I_stored / C`` integrated over the state of charge at the
machine's operating point (quasi-static: the machine settles in a fraction
of a second, the battery in hours).

Marks: "seen" = read in a public copy of the source; "from memory" =
recalled; "common practice" = a trade rule of thumb; "model choice" = a
shape parameter of our own model.
"""

import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..cautions import caution
from ..circuit import (Setting, USES_SERIES, build_circuit, check_setting, circuit_residual,
                       critical_field_resistance_ohm, machine_state, no_load_voltages, normal_points,
                       refine_bracketed_roots)
from ..envelope import (Space, control_kind, control_of_rows, control_range, critical_resistance_ratios,
                        envelope_corners, expand_candidates, worst_over_corners)
from ..errors import InputError
from ..powerflow import load_point_figures
from ..readings import option_advice
from ..validate import MAX_CURRENT_A, MAX_OHM, named_entry, read_pair, table_entry

#: The profile table this job reads.
TABLE = "battery"
#: What the battery job's ranking minimises (the objective hook of the search).
OBJECTIVE_LABEL = "hours to full [h]"
#: The objective as a table shows it: words, unit and the factor from the objective's value.
OBJECTIVE_SHOWN = ("hours to full", "h", 1.0)

_IEC = "IEC 62485-2, table of charging voltages and gas-producing currents (seen)"
_IEC_VENT = "IEC 62485-2, ventilation airflow formula (seen)"
_IEC_FACTORS = ("IEC 62485-2 gas current Igas = I fg fs: gas-emission factor fg (structure of the formula "
                "from memory; the resulting Igas values seen)")
_FIT = ("model choice: fitted to the calibration checks (IEC 62485-2 float and boost currents, the C/10 "
        "gassing state of charge, the C/20 finishing voltage, the Ah returned), see tests/test_battery_model.py")

_FIT_NICD = _FIT + ("; for vented NiCd the Ah returned is aimed at 1.4 x the Ah removed, as makers' normal charge "
                    "of 0.2 C5 for 7-8 h from empty puts back 1.4-1.6 x C5 (from memory)")

LN10 = math.log(10.0)
#: Temperature the chemistry voltages refer to [degC]: the reference of the
#: charging voltages and of IEEE 450 / IEEE 1188 practice (from memory).
REFERENCE_TEMPERATURE_C = 25.0
#: Safety factor fs of the IEC 62485-2 gas current (structure of the formula from memory;
#: the table's currents it gives are seen).
GAS_SAFETY_FACTOR = 5.0


@dataclass(frozen=True)
class Chemistry:
    """Per-cell data of one battery chemistry (voltages [V/cell] at 25 degC, rates [1/h] = A per Ah).

    ``gas_current_*_ma_per_ah`` are the IEC 62485-2 table's gas-producing
    currents Igas (gas-emission and safety factors included); the charging
    currents behind them are :attr:`float_current_ma_per_ah` and
    :attr:`boost_current_ma_per_ah`. The ``acceptance_*``, ``charge_slope_v``
    and ``gas_*`` fields are the cell model's constants (module docstring).
    """

    name: str
    float_voltage_v: float
    boost_voltage_v: float
    gas_current_float_ma_per_ah: float
    gas_current_boost_ma_per_ah: float
    gas_emission_factor: float
    gassing_voltage_v: float
    max_cell_voltage_v: float
    reference_rate_per_h: float
    finishing_rate_per_h: float
    temperature_coefficient_v_per_c: float
    open_circuit_voltage_empty_v: float
    open_circuit_voltage_full_v: float
    resistance_ohm_ah: float
    capacity_rate: str
    acceptance_half_per_h: float
    acceptance_fall: float
    acceptance_fall_power: float
    acceptance_end_power: float
    charge_slope_v: float
    gas_reference_voltage_v: float
    gas_reference_ma_per_ah: float
    gas_slope_v: float
    basis: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def float_current_ma_per_ah(self):
        """Charging current of a full cell at the float voltage behind the IEC table [mA/Ah]: Igas / (fg fs)."""
        return self.gas_current_float_ma_per_ah / (self.gas_emission_factor * GAS_SAFETY_FACTOR)

    @property
    def boost_current_ma_per_ah(self):
        """Charging current of a full cell at the boost voltage behind the IEC table [mA/Ah]: Igas / (fg fs)."""
        return self.gas_current_boost_ma_per_ah / (self.gas_emission_factor * GAS_SAFETY_FACTOR)

    @property
    def grading_power(self):
        """Power ``q = 1/(1 - p)`` of the state-of-charge grid that makes the end of charge smooth to integrate."""
        return 1.0 / (1.0 - self.acceptance_end_power)


_END_POWER = (0.5, "model choice: acceptance falls as the square root of the charge still missing at the very end, "
                   "so a charge at any voltage above rest finishes in finite time")
_SLOPE = (0.05, "model choice: 0.05 V per e-fold (115 mV per decade), a lumped slope of the charge reaction that "
                "lets a 2.40 V/cell constant-voltage finish take a vented cell from its gassing point to 95 % in "
                "about 5 h (a few hours' absorption: common practice, from memory) and keeps the curve's "
                "temperature shift within 15 % of the coefficient")

CHEMISTRIES = {
    "lead-acid-vented": table_entry(Chemistry, "lead-acid-vented", {
        "float_voltage_v": (2.23, _IEC),
        "boost_voltage_v": (2.40, _IEC),
        "gas_current_float_ma_per_ah": (5.0, _IEC),
        "gas_current_boost_ma_per_ah": (20.0, _IEC),
        "gas_emission_factor": (1.0, _IEC_FACTORS),
        "gassing_voltage_v": (2.38, "gassing sets in near 2.35-2.40 V/cell at 25 degC (from memory; common practice)"),
        "max_cell_voltage_v": (2.70, "a full vented cell on a C/20 finishing charge reads about 2.5-2.7 V "
                                     "(common practice, from memory)"),
        "reference_rate_per_h": (0.10, "normal start rate about C/10 (from memory; common practice)"),
        "finishing_rate_per_h": (0.05, "finishing rate about C/20 to C/25 (from memory; common practice)"),
        "temperature_coefficient_v_per_c": (-0.004, "lead-acid compensation -3 to -5 mV/degC/cell (common "
                                                    "practice); middle taken"),
        "open_circuit_voltage_empty_v": (1.98, "open-circuit volts = specific gravity + 0.84, SG 1.14 discharged "
                                               "(common practice, from memory)"),
        "open_circuit_voltage_full_v": (2.12, "open-circuit volts = specific gravity + 0.84, SG 1.28 charged "
                                              "(common practice, from memory)"),
        "resistance_ohm_ah": (0.15, "cell resistance x C10 capacity, order of magnitude of makers' data (from memory)"),
        "capacity_rate": ("C10", _IEC_VENT),
        "acceptance_half_per_h": (7.166e-3, _FIT),
        "acceptance_fall": (6.291, _FIT),
        "acceptance_fall_power": (4.5, _FIT),
        "acceptance_end_power": _END_POWER,
        "charge_slope_v": _SLOPE,
        "gas_reference_voltage_v": (2.23, "the float voltage (IEC 62485-2, seen)"),
        "gas_reference_ma_per_ah": (1.139, _FIT),
        "gas_slope_v": (0.09609, _FIT + "; 0.221 V per decade"),
    }),
    "lead-acid-valve-regulated": table_entry(Chemistry, "lead-acid-valve-regulated", {
        "float_voltage_v": (2.27, _IEC),
        "boost_voltage_v": (2.40, _IEC),
        "gas_current_float_ma_per_ah": (1.0, _IEC),
        "gas_current_boost_ma_per_ah": (8.0, _IEC),
        "gas_emission_factor": (0.2, _IEC_FACTORS),
        "gassing_voltage_v": (2.35, "oxygen evolution and venting risk above about 2.35 V/cell at 25 degC "
                                    "(from memory)"),
        "max_cell_voltage_v": (2.40, "the boost voltage (IEC 62485-2, seen): a valve-regulated cell must not be "
                                     "gassed"),
        "reference_rate_per_h": (0.10, "charge rate about C/10 (from memory; common practice)"),
        "finishing_rate_per_h": (0.05, "makers' two-step charge, second step about 0.05 C (from memory); the "
                                       "2.40 V limit usually governs"),
        "temperature_coefficient_v_per_c": (-0.003, "-3 mV/degC/cell, manufacturers' practice that IEEE 1188 "
                                                    "defers to"),
        "open_circuit_voltage_empty_v": (1.99, "open-circuit volts = specific gravity + 0.84, SG about 1.15 "
                                               "discharged (common practice, from memory)"),
        "open_circuit_voltage_full_v": (2.14, "open-circuit volts = specific gravity + 0.84, SG about 1.30 "
                                              "charged (common practice, from memory)"),
        "resistance_ohm_ah": (0.10, "cell resistance x C10 capacity, order of magnitude of makers' data (from memory)"),
        "capacity_rate": ("C10", _IEC_VENT),
        "acceptance_half_per_h": (5.798e-3, _FIT),
        "acceptance_fall": (3.266, _FIT),
        "acceptance_fall_power": (7.0, _FIT),
        "acceptance_end_power": _END_POWER,
        "charge_slope_v": _SLOPE,
        "gas_reference_voltage_v": (2.27, "the float voltage (IEC 62485-2, seen)"),
        "gas_reference_ma_per_ah": (1.166, _FIT),
        "gas_slope_v": (0.0664, _FIT + "; 0.153 V per decade"),
    }),
    "nickel-cadmium-vented": table_entry(Chemistry, "nickel-cadmium-vented", {
        "float_voltage_v": (1.40, _IEC),
        "boost_voltage_v": (1.55, _IEC),
        "gas_current_float_ma_per_ah": (5.0, _IEC),
        "gas_current_boost_ma_per_ah": (50.0, _IEC),
        "gas_emission_factor": (1.0, _IEC_FACTORS),
        "gassing_voltage_v": (1.55, "vented NiCd gasses freely from about its boost voltage 1.55 V/cell "
                                    "(IEC 62485-2 boost, seen; onset from memory)"),
        "max_cell_voltage_v": (1.70, "no cell above about 1.7 V (from memory)"),
        "reference_rate_per_h": (0.20, "normal charge rate C/5 (from memory; common practice)"),
        "finishing_rate_per_h": (0.10, "finishing (and standard) charge at C/10 (common practice, from memory)"),
        "temperature_coefficient_v_per_c": (-0.003, "vented NiCd -3 mV/K/cell (seen)"),
        "open_circuit_voltage_empty_v": (1.25, "open-circuit voltage nearly flat, about 1.25-1.30 V/cell "
                                               "(from memory)"),
        "open_circuit_voltage_full_v": (1.30, "open-circuit voltage nearly flat, about 1.25-1.30 V/cell "
                                              "(from memory)"),
        "resistance_ohm_ah": (0.20, "cell resistance x C5 capacity, order of magnitude of makers' data for "
                                    "pocket-plate cells (from memory)"),
        "capacity_rate": ("C5", _IEC_VENT),
        "acceptance_half_per_h": (9.0e-3, _FIT_NICD),
        "acceptance_fall": (4.8, _FIT_NICD),
        "acceptance_fall_power": (4.0, _FIT),
        "acceptance_end_power": _END_POWER,
        "charge_slope_v": _SLOPE,
        "gas_reference_voltage_v": (1.40, "the float voltage (IEC 62485-2, seen)"),
        "gas_reference_ma_per_ah": (0.986, _FIT),
        "gas_slope_v": (0.05279, _FIT + "; 0.122 V per decade"),
    }),
}


def chemistry(name):
    """The :class:`Chemistry` called ``name``; an InputError lists the valid names."""
    if isinstance(name, Chemistry):
        return name
    return named_entry(CHEMISTRIES, name, "chemistry")


# ===========================================================================
# the cell
# ===========================================================================

def open_circuit_voltage_range(chem, ocv_range):
    """``(empty, full)`` rest voltage per cell [V]: ``ocv_range`` or the chemistry's."""
    if ocv_range is None:
        return chem.open_circuit_voltage_empty_v, chem.open_circuit_voltage_full_v
    return float(ocv_range[0]), float(ocv_range[1])


def open_circuit_voltage_per_cell(chem, soc, ocv_range=None):
    """Rest (open-circuit) voltage of one cell [V].

    Linear in state of charge between the empty and full values: for
    lead-acid the acid's specific gravity, and with it the rest voltage,
    falls in proportion to the ampere-hours drawn.

    Parameters
    ----------
    chem : Chemistry or str
    soc : array_like
        State of charge, 0 (empty) to 1 (full); values outside are held at
        the nearest end.
    ocv_range : (float, float), optional
        Open-circuit voltage at empty and full [V/cell]; default the
        chemistry table's.

    Returns
    -------
    ndarray
        [V/cell]

    References
    ----------
    Open-circuit volts = specific gravity + 0.84 for lead-acid (common
    practice, from memory).
    """
    chem = chemistry(chem)
    e0, e1 = open_circuit_voltage_range(chem, ocv_range)
    s = np.clip(np.asarray(soc, float), 0.0, 1.0)
    return e0 + (e1 - e0) * s


def charge_acceptance_per_h(chem, soc):
    """Charge acceptance ``A(s)`` of the charge reaction [1/h] (the prefactor of its rate law).

    ``A(s) = A_half exp(-kappa (s^m - 0.5^m)) (2 (1 - s))^p``; zero at full charge.

    References
    ----------
    Model choice (module docstring); the falling acceptance of a cell near full
    charge is the textbook reason for the rising charging voltage (from memory).
    """
    chem = chemistry(chem)
    s = np.clip(np.asarray(soc, float), 0.0, 1.0)
    m = chem.acceptance_fall_power
    return (chem.acceptance_half_per_h * np.exp(-chem.acceptance_fall * (s ** m - 0.5 ** m))
            * (2.0 * (1.0 - s)) ** chem.acceptance_end_power)


def _temperature_speedup(chem, temperature_c, slope_v):
    return np.exp(-chem.temperature_coefficient_v_per_c * (np.asarray(temperature_c, float)
                                                          - REFERENCE_TEMPERATURE_C) / slope_v)


def reaction_rates_per_h(chem, soc, internal_v, temperature_c=REFERENCE_TEMPERATURE_C, ocv_range=None):
    """Rates of the charge reaction (stored) and of the overcharge reaction (gas) [1/h].

    Parameters
    ----------
    chem : Chemistry or str
    soc : array_like
        State of charge 0..1.
    internal_v : array_like
        Internal cell voltage ``U`` [V] (cell voltage less the resistive drop).
    temperature_c : array_like, optional
        Cell temperature [degC].
    ocv_range : (float, float), optional
        Rest voltage at empty and full [V/cell].

    Returns
    -------
    (ndarray, ndarray)
        ``r_s`` and ``r_g`` [A per Ah]; both zero at the rest voltage, ``r_s``
        negative below it (the model is meant for charge: ``U >= E(s)``).

    References
    ----------
    Tafel (exponential) rate laws of electrode reactions, e.g. J. Newman,
    *Electrochemical Systems*, electrode kinetics (from memory); IEC 62485-2
    float and boost currents for the gas reaction's calibration (seen).
    """
    chem = chemistry(chem)
    s = np.asarray(soc, float)
    u = np.asarray(internal_v, float)
    e = open_circuit_voltage_per_cell(chem, s, ocv_range)
    bc, bg = chem.charge_slope_v, chem.gas_slope_v
    with np.errstate(over="ignore"):
        stored = (charge_acceptance_per_h(chem, s) * _temperature_speedup(chem, temperature_c, bc)
                  * np.expm1((u - e) / bc))
        gas = (1e-3 * chem.gas_reference_ma_per_ah * _temperature_speedup(chem, temperature_c, bg)
               * (np.exp((u - chem.gas_reference_voltage_v) / bg) - np.exp((e - chem.gas_reference_voltage_v) / bg)))
    return stored, gas


class _CellRates:
    """The rate laws of :func:`reaction_rates_per_h` with what depends only on the state of charge
    and the temperature worked out once (the same numbers; a Newton or a load-curve solve calls the
    laws many times at one state of charge)."""

    def __init__(self, chem, soc, temperature_c, ocv_range):
        self.e = open_circuit_voltage_per_cell(chem, soc, ocv_range)
        self.bc, self.bg, self.uref = chem.charge_slope_v, chem.gas_slope_v, chem.gas_reference_voltage_v
        self.a = charge_acceptance_per_h(chem, soc) * _temperature_speedup(chem, temperature_c, self.bc)
        self.g = 1e-3 * chem.gas_reference_ma_per_ah * _temperature_speedup(chem, temperature_c, self.bg)
        with np.errstate(over="ignore"):
            self.ge = np.exp((self.e - self.uref) / self.bg)

    def rates(self, u):
        """``(r_s, r_g)`` at internal voltage ``u`` [1/h]."""
        with np.errstate(over="ignore"):
            return self.a * np.expm1((u - self.e) / self.bc), self.g * (np.exp((u - self.uref) / self.bg) - self.ge)

    def rates_and_slopes(self, u):
        """``(r_s, r_g, d r_s/dU, d r_g/dU)`` at ``u``."""
        with np.errstate(over="ignore"):
            x = (u - self.e) / self.bc
            eg = np.exp((u - self.uref) / self.bg)
            return (self.a * np.expm1(x), self.g * (eg - self.ge), self.a * np.exp(x) / self.bc,
                    self.g * eg / self.bg)


def _rate_slopes(chem, soc, internal_v, temperature_c, ocv_range):
    """d r_s/dU and d r_g/dU [1/(h V)]."""
    e = open_circuit_voltage_per_cell(chem, soc, ocv_range)
    bc, bg = chem.charge_slope_v, chem.gas_slope_v
    with np.errstate(over="ignore"):
        ds = (charge_acceptance_per_h(chem, soc) * _temperature_speedup(chem, temperature_c, bc)
              * np.exp((internal_v - e) / bc) / bc)
        dg = (1e-3 * chem.gas_reference_ma_per_ah * _temperature_speedup(chem, temperature_c, bg)
              * np.exp((internal_v - chem.gas_reference_voltage_v) / bg) / bg)
    return ds, dg


def _internal_voltage_bound(chem, soc, rate, temperature_c, ocv_range):
    """An internal voltage at or above the one that carries ``rate`` (>= 0): the lower of the
    voltages at which either reaction alone would carry it (closed forms)."""
    e = open_circuit_voltage_per_cell(chem, soc, ocv_range)
    bc, bg = chem.charge_slope_v, chem.gas_slope_v
    a = charge_acceptance_per_h(chem, soc) * _temperature_speedup(chem, temperature_c, bc)
    g = 1e-3 * chem.gas_reference_ma_per_ah * _temperature_speedup(chem, temperature_c, bg)
    with np.errstate(divide="ignore", invalid="ignore"):
        u_s = np.where(a > 0, e + bc * np.log1p(rate / np.where(a > 0, a, 1.0)), np.inf)
    u_g = chem.gas_reference_voltage_v + bg * np.log(rate / g + np.exp((e - chem.gas_reference_voltage_v) / bg))
    return np.minimum(u_s, u_g)


#: Newton steps of the cell inversions (monotone from above on a convex function: a handful suffice;
#: the cap is a guard).
NEWTON_STEPS = 60


def _newton_down(fun, u):
    """Root of the convex increasing ``fun`` by Newton steps from ``u`` where ``fun(u) >= 0``."""
    for _ in range(NEWTON_STEPS):
        f, fp = fun(u)
        step = np.where(fp > 0, f / np.where(fp > 0, fp, 1.0), 0.0)
        step = np.where(np.isfinite(step), np.maximum(step, 0.0), 0.0)
        u = u - step
        if np.all(step <= 1e-13 * np.maximum(1.0, np.abs(u))):
            break
    return u


@dataclass
class CellPoint:
    """One cell on charge: arrays of ``volts_per_cell`` [V], ``internal_v`` [V], ``rate_per_h``
    (current per Ah), ``stored_per_h`` and ``gas_per_h`` [1/h]."""

    volts_per_cell: np.ndarray
    internal_v: np.ndarray
    rate_per_h: np.ndarray
    stored_per_h: np.ndarray
    gas_per_h: np.ndarray

    @property
    def stored_fraction(self):
        """Share of the current that is stored (NaN with no current)."""
        r = np.asarray(self.rate_per_h, float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(r > 0, self.stored_per_h / np.where(r > 0, r, 1.0), np.nan)


def cell_on_charge(chem, soc, rate_per_h, temperature_c=REFERENCE_TEMPERATURE_C, ocv_range=None,
                   resistance_ohm_ah=None):
    """The cell at a charging current: voltage and the split into stored and gas.

    Parameters
    ----------
    chem : Chemistry or str
    soc : array_like
        State of charge 0..1.
    rate_per_h : array_like
        Current per Ah of capacity [A/Ah] (0.1 = C/10). A discharge (negative)
        meets the rest voltage and the cell resistance only, and is all
        "stored" (negative).
    temperature_c : array_like, optional
        [degC].
    ocv_range : (float, float), optional
        Rest voltage at empty and full [V/cell].
    resistance_ohm_ah : float, optional
        Cell resistance x capacity [ohm Ah] in place of the chemistry's (a
        bank's measured resistance).

    Returns
    -------
    CellPoint

    References
    ----------
    Module docstring (two parallel reactions with Tafel-like rate laws).
    """
    chem = chemistry(chem)
    s, r, t = np.broadcast_arrays(np.asarray(soc, float), np.asarray(rate_per_h, float),
                                  np.asarray(temperature_c, float))
    e = open_circuit_voltage_per_cell(chem, s, ocv_range)
    rp = np.maximum(r, 0.0)
    laws = _CellRates(chem, s, t, ocv_range)

    def fun(u):
        st, gs, d1, d2 = laws.rates_and_slopes(u)
        return st + gs - rp, d1 + d2

    u = np.where(rp > 0, _internal_voltage_bound(chem, s, rp, t, ocv_range), e)
    u = np.maximum(_newton_down(fun, u), e)
    st, gs = laws.rates(u)
    charge = r > 0
    stored = np.where(charge, st, r)
    gas = np.where(charge, gs, 0.0)
    rc = chem.resistance_ohm_ah if resistance_ohm_ah is None else float(resistance_ohm_ah)
    return CellPoint(u + rc * r, u, r, stored, gas)


def cell_at_voltage(chem, soc, volts_per_cell, temperature_c=REFERENCE_TEMPERATURE_C, ocv_range=None,
                    resistance_ohm_ah=None):
    """The cell held at a terminal voltage: the current it takes and its split (see :func:`cell_on_charge`).

    Below the rest voltage the cell discharges through its resistance.
    """
    chem = chemistry(chem)
    s, v, t = np.broadcast_arrays(np.asarray(soc, float), np.asarray(volts_per_cell, float),
                                  np.asarray(temperature_c, float))
    e = open_circuit_voltage_per_cell(chem, s, ocv_range)
    rc = chem.resistance_ohm_ah if resistance_ohm_ah is None else float(resistance_ohm_ah)
    laws = _CellRates(chem, s, t, ocv_range)

    def fun(u):
        st, gs, d1, d2 = laws.rates_and_slopes(u)
        return u + rc * (st + gs) - v, 1.0 + rc * (d1 + d2)

    charge = v > e
    u = np.where(charge, _newton_down(fun, np.where(charge, v, e)), e)
    st, gs = laws.rates(u)
    r = np.where(charge, st + gs, (v - e) / rc)
    return CellPoint(v.astype(float), u, r, np.where(charge, st, r), np.where(charge, gs, 0.0))


def temperature_corrected_volts_per_cell(chem, volts_at_25, temperature_c):
    """A cell voltage stated at 25 degC moved to ``temperature_c``: ``V25 + alpha (T - 25)`` [V].

    References
    ----------
    Temperature compensation -3 to -5 mV/degC/cell for lead-acid (common
    practice), -3 mV/K/cell for vented NiCd (seen).
    """
    chem = chemistry(chem)
    return (np.asarray(volts_at_25, float)
            + chem.temperature_coefficient_v_per_c * (np.asarray(temperature_c, float) - REFERENCE_TEMPERATURE_C))


def gassing_volts_per_cell(chem, temperature_c=REFERENCE_TEMPERATURE_C):
    """Temperature-corrected gassing voltage of one cell [V]."""
    chem = chemistry(chem)
    return temperature_corrected_volts_per_cell(chem, chem.gassing_voltage_v, temperature_c)


def highest_volts_per_cell(chem, temperature_c=REFERENCE_TEMPERATURE_C):
    """Temperature-corrected highest cell voltage of the chemistry [V] (the finish's ceiling)."""
    chem = chemistry(chem)
    return temperature_corrected_volts_per_cell(chem, chem.max_cell_voltage_v, temperature_c)


def charging_curves(chem, temperature_c=REFERENCE_TEMPERATURE_C, rates_per_h=(0.2, 0.1, 0.05), points=101,
                    ocv_range=None):
    """The family of constant-current charging curves: volts per cell against state of charge.

    Returns
    -------
    dict
        ``state_of_charge`` (list), ``curves`` (one per rate: ``rate_per_h``,
        ``label``, ``volts_per_cell``, ``stored_fraction``),
        ``gassing_volts_per_cell`` and ``highest_volts_per_cell`` at the
        temperature, ``temperature_c``.
    """
    chem = chemistry(chem)
    s = np.linspace(0.0, 1.0, points)
    out = []
    for r in rates_per_h:
        p = cell_on_charge(chem, s, r, temperature_c, ocv_range)
        out.append({"rate_per_h": float(r), "label": f"C/{1 / r:g}", "volts_per_cell": p.volts_per_cell.tolist(),
                    "stored_fraction": p.stored_fraction.tolist()})
    return {"chemistry": chem.name, "temperature_c": float(temperature_c), "state_of_charge": s.tolist(),
            "curves": out, "gassing_volts_per_cell": float(gassing_volts_per_cell(chem, temperature_c)),
            "highest_volts_per_cell": float(highest_volts_per_cell(chem, temperature_c))}


#: Highest charging rate the ``cell`` command accepts [A per Ah] (5C: far beyond any charging set).
MAX_CELL_RATE_PER_H = 5.0


def cell_point(name, soc, volts_per_cell=None, current_per_ah=None, temperature_c=REFERENCE_TEMPERATURE_C,
               source="command line"):
    """The cell model at one point, as the ``supplycfg cell`` command reports it.

    Parameters
    ----------
    name : str
        Chemistry name (:data:`CHEMISTRIES`).
    soc : float
        State of charge 0..1.
    volts_per_cell : float, optional
        Cell voltage [V]; give this or ``current_per_ah``.
    current_per_ah : float, optional
        Charging current per Ah of capacity [A/Ah] (0.1 = C/10).
    temperature_c : float, optional
        [degC].
    source : str
        Where the values came from, for messages.

    Returns
    -------
    dict
        ``volts_per_cell``, ``current_a_per_ah``, ``stored_fraction`` (None
        with no charging current), ``stored_a_per_ah``, ``gas_a_per_ah``,
        ``rest_volts_per_cell``, ``gassing_volts_per_cell`` and
        ``highest_volts_per_cell`` at the temperature.

    Raises
    ------
    InputError
        A name, value or combination outside what is allowed.
    """
    if name not in CHEMISTRIES:
        raise InputError(source, "CHEMISTRY", f"is {str(name)[:40]!r}; allowed: {', '.join(CHEMISTRIES)}")
    chem = CHEMISTRIES[name]
    if (volts_per_cell is None) == (current_per_ah is None):
        raise InputError(source, "--volts-per-cell", "give exactly one of --volts-per-cell and --current-per-ah")
    if not 0.0 <= soc <= 1.0:
        raise InputError(source, "--soc", f"is {soc:g}; allowed: 0 to 1")
    if not -40.0 <= temperature_c <= 70.0:
        raise InputError(source, "--temperature-c", f"is {temperature_c:g}; allowed: -40 to 70 degC")
    if current_per_ah is not None:
        if not 0.0 <= current_per_ah <= MAX_CELL_RATE_PER_H:
            raise InputError(source, "--current-per-ah", f"is {current_per_ah:g}; allowed: 0 to "
                             f"{MAX_CELL_RATE_PER_H:g} A per Ah (0.1 is C/10)")
        p = cell_on_charge(chem, soc, current_per_ah, temperature_c)
    else:
        top = 1.5 * chem.max_cell_voltage_v
        if not 0.0 < volts_per_cell <= top:
            raise InputError(source, "--volts-per-cell", f"is {volts_per_cell:g}; allowed: above 0 and at most "
                             f"{top:.3g} V for {name}")
        p = cell_at_voltage(chem, soc, volts_per_cell, temperature_c)
    num = lambda v: None if not np.isfinite(v) else float(v)
    vpc, rate = float(p.volts_per_cell), float(p.rate_per_h)
    top = float(highest_volts_per_cell(chem, temperature_c))
    notes = []
    if rate < 0:
        notes.append("below the rest voltage the cell discharges: the current is given out, not taken in (the "
                     "model's discharge is the rest voltage and the cell resistance only)")
    if vpc > top * (1 + 1e-9):
        notes.append(f"above the highest cell voltage {top:.3f} V: outside what the model is calibrated for "
                     "(a real cell there gasses violently and heats)")
    return {"chemistry": name, "state_of_charge": float(soc), "temperature_c": float(temperature_c), "notes": notes,
            "volts_per_cell": float(p.volts_per_cell), "current_a_per_ah": float(p.rate_per_h),
            "stored_fraction": num(p.stored_fraction), "stored_a_per_ah": float(p.stored_per_h),
            "gas_a_per_ah": float(p.gas_per_h),
            "rest_volts_per_cell": float(open_circuit_voltage_per_cell(chem, soc)),
            "gassing_volts_per_cell": float(gassing_volts_per_cell(chem, temperature_c)),
            "highest_volts_per_cell": float(highest_volts_per_cell(chem, temperature_c))}


def bank_resistance_ohm(chem, cells, capacity_ah):
    """Internal resistance of a series string [ohm]: ``cells * Rc / C``."""
    chem = chemistry(chem)
    return np.asarray(cells, float) * chem.resistance_ohm_ah / np.asarray(capacity_ah, float)


# ===========================================================================
# ventilation
# ===========================================================================

#: Dilution factor and air changes of the ventilation formula (IEC 62485-2, seen):
#: Q = v q s n Igas C 1e-3 with v q s = 0.05 m^3/Ah for 4 % hydrogen in air.
VENTILATION_FACTOR_M3_PER_AH = 0.05
#: Natural-ventilation opening per airflow [cm^2 per m^3/h] (IEC 62485-2, seen).
OPENING_CM2_PER_M3_PER_H = 28.0


def ventilation_airflow_m3_per_h(cells, capacity_ah, igas_ma_per_ah):
    """Airflow that keeps a battery room's hydrogen well below the lower explosive limit.

    Parameters
    ----------
    cells : array_like
        Cells in the room.
    capacity_ah : array_like
        Rated capacity [Ah] (C10 lead-acid, C5 NiCd).
    igas_ma_per_ah : array_like
        Gas-producing current [mA/Ah].

    Returns
    -------
    ndarray
        ``Q = 0.05 n Igas C 1e-3`` [m^3/h].

    References
    ----------
    IEC 62485-2, ventilation requirements (seen).
    """
    return (VENTILATION_FACTOR_M3_PER_AH * np.asarray(cells, float) * np.asarray(igas_ma_per_ah, float)
            * np.asarray(capacity_ah, float) * 1e-3)


def ventilation_opening_cm2(airflow_m3_per_h):
    """Free area of the inlet and of the outlet for natural ventilation [cm^2], ``A = 28 Q``.

    References
    ----------
    IEC 62485-2, natural ventilation (seen).
    """
    return OPENING_CM2_PER_M3_PER_H * np.asarray(airflow_m3_per_h, float)


VENTILATION_GOVERNORS = {
    "table-float": "the standard's float-charge gas current (no charge above the float voltage)",
    "table-boost": "the standard's boost-charge gas current (the charge goes above the float voltage)",
    "plan-gas-current": "the plan's own largest gas current x the gas-emission factor x the safety factor 5",
}


def ventilation(chem, cells, capacity_ah, highest_volts_per_cell_v, largest_gas_per_h,
                temperature_c=REFERENCE_TEMPERATURE_C):
    """IEC 62485-2 airflow for a charge that reaches ``highest_volts_per_cell_v`` and gasses at most
    ``largest_gas_per_h`` [A per Ah] (vectorised).

    The gas current is the larger of the standard's table value for the
    highest charging voltage (the boost row for any charge above the
    temperature-corrected float voltage) and the plan's own largest gas
    current x the gas-emission factor x the safety factor 5.

    Returns
    -------
    dict of arrays
        ``airflow_m3_per_h``, ``opening_cm2``, ``gas_current_ma_per_ah``,
        ``governed_by`` (keys of :data:`VENTILATION_GOVERNORS`).

    References
    ----------
    IEC 62485-2, ventilation formula, gas currents and natural ventilation
    (seen); gas-emission and safety factors (structure from memory).
    """
    chem = chemistry(chem)
    vmax = np.asarray(highest_volts_per_cell_v, float)
    above_float = vmax > temperature_corrected_volts_per_cell(chem, chem.float_voltage_v, temperature_c) + 1e-9
    table = np.where(above_float, chem.gas_current_boost_ma_per_ah, chem.gas_current_float_ma_per_ah)
    own = 1e3 * np.maximum(np.asarray(largest_gas_per_h, float), 0.0) * chem.gas_emission_factor * GAS_SAFETY_FACTOR
    plan_governs = own > table
    igas = np.where(plan_governs, own, table)
    q = ventilation_airflow_m3_per_h(cells, capacity_ah, igas)
    who = np.where(plan_governs, "plan-gas-current", np.where(above_float, "table-boost", "table-float"))
    return {"airflow_m3_per_h": q, "opening_cm2": ventilation_opening_cm2(q), "gas_current_ma_per_ah": igas,
            "governed_by": who}


# ===========================================================================
# the [battery] table
# ===========================================================================

#: Battery: no lower bound on the main-charge current unless one is asked for.
DEFAULT_MIN_CHARGE_CURRENT_A = 0.0
#: Cable resistance when none is given: the bank sits at the machine's terminals.
DEFAULT_CABLE_RESISTANCE_OHM = 0.0
#: Battery temperature: the reference of the chemistry table's voltages.
DEFAULT_BATTERY_TEMPERATURE_C = REFERENCE_TEMPERATURE_C
#: A charge must reach its end state of charge within this time [h]: the usual overnight-plus
#: recharge, and the NiCd standard charge of C/10 for 14-16 h (common practice).
DEFAULT_TARGET_HOURS = 16.0
#: Shortest target a job may ask [h]: a quarter of an hour, a charge the quickest boost would need
#: (common practice); a target below it is a typing slip.
MIN_TARGET_HOURS = 0.25
#: Smallest bank [Ah]: a 1 Ah cell is a torch battery, not a bank a generator charges.
MIN_CAPACITY_AH = 1.0
#: Smallest charge a job may ask [share of capacity]: 1 %; a span below it is a slip.
MIN_CHARGE_SPAN = 0.01
#: The reverse-current cut-out closes this far above the bank's rest voltage at the top of the
#: state-of-charge range [V per cell] (common practice; classic dynamo practice, from memory).
CUTOUT_MARGIN_V_PER_CELL = 0.05


@dataclass(frozen=True)
class BatteryJob:
    """Charge a battery bank. Field names are the ``[battery]`` keys.

    ``capacity_ah`` is at the chemistry's rating time (``Chemistry.capacity_rate``:
    10 h for lead-acid, 5 h for nickel-cadmium). ``charge_voltage_per_cell_v``
    is the voltage (at 25 degC, temperature-corrected in use) at which the main
    charge hands over to the finish. Keys the profile leaves out that depend on
    the chemistry are None and resolved on use (:func:`handover_volts_per_cell`,
    :func:`finishing_current_a`, :func:`cutout_closing_voltage_v`), so a saved
    profile keeps them left out.
    """

    chemistry: str
    cells: int
    capacity_ah: float
    state_of_charge: tuple
    max_charge_current_a: float
    min_charge_current_a: float
    internal_resistance_ohm: float
    cable_resistance_ohm: float
    temperature_c: float
    open_circuit_voltage_per_cell_v: tuple
    charge_voltage_per_cell_v: float | None = None
    finishing_rate_per_h: float | None = None
    target_hours: float = DEFAULT_TARGET_HOURS
    cutout_closing_volts_per_cell: float | None = None


#: The dataclass of the [battery] table; its fields are the table's keys.
JOB_TABLE = BatteryJob


def read_job(t, source):
    """The ``[battery]`` table ``t`` of a profile read from ``source``, checked."""
    name = t.text("chemistry", choices=tuple(CHEMISTRIES))
    chem = CHEMISTRIES[name]
    cells = t.integer("cells", low=1, high=10_000)
    cap = t.number("capacity_ah", low=MIN_CAPACITY_AH, high=1e6)
    soc = read_pair(t, "state_of_charge", source, low=0, high=1, strict=True, names=("start", "end"))
    if soc[1] - soc[0] < MIN_CHARGE_SPAN:
        raise InputError(source, t.key("state_of_charge"), f"is [{soc[0]:g}, {soc[1]:g}]; allowed: an end at least "
                         f"{MIN_CHARGE_SPAN:g} above the start (a charge of {100 * MIN_CHARGE_SPAN:g} % or more)")
    imax = t.number("max_charge_current_a", low=0, low_open=True, high=MAX_CURRENT_A)
    imin = t.number("min_charge_current_a", DEFAULT_MIN_CHARGE_CURRENT_A, low=0, high=MAX_CURRENT_A)
    if imin > imax:
        raise InputError(source, t.key("min_charge_current_a"),
                         f"is {imin:g}; allowed: at most max_charge_current_a ({imax:g} A)")
    rb = t.number("internal_resistance_ohm", None, low=0, low_open=True, high=MAX_OHM)
    if rb is None:
        rb = float(bank_resistance_ohm(chem, cells, cap))
    rc = t.number("cable_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=MAX_OHM)
    temp = t.number("temperature_c", DEFAULT_BATTERY_TEMPERATURE_C, low=-40, high=70)
    ocv = read_pair(t, "open_circuit_voltage_per_cell_v", source, low=0, low_open=True, high=chem.max_cell_voltage_v,
                    names=("empty", "full"), required=False,
                    default=(chem.open_circuit_voltage_empty_v, chem.open_circuit_voltage_full_v))
    lowest = 0.8 * chem.open_circuit_voltage_empty_v
    if ocv[0] < lowest:
        raise InputError(source, t.key("open_circuit_voltage_per_cell_v"),
                         f"starts at {ocv[0]:g} V/cell; allowed for {name}: at least {lowest:.3g} V/cell "
                         f"(the table's empty value is {chem.open_circuit_voltage_empty_v:g})")
    vho = t.number("charge_voltage_per_cell_v", None, low=0, low_open=True)
    if vho is not None and vho > chem.max_cell_voltage_v:
        raise InputError(source, t.key("charge_voltage_per_cell_v"),
                         f"is {vho:g}; allowed for {name}: at most {chem.max_cell_voltage_v:g} V/cell "
                         f"(the chemistry's highest cell voltage)")
    if vho is not None and vho <= ocv[1]:
        raise InputError(source, t.key("charge_voltage_per_cell_v"),
                         f"is {vho:g}; allowed: above the open-circuit voltage at full charge ({ocv[1]:g} V/cell)")
    if vho is None and chem.gassing_voltage_v <= ocv[1]:
        # the default hand-over is the gassing voltage: a full cell resting above it is a slip (a voltage on
        # charge copied as the rest voltage) that would give a charge of hundreds of hours
        raise InputError(source, t.key("open_circuit_voltage_per_cell_v"),
                         f"full-charge rest voltage {ocv[1]:g} V/cell is at or above the hand-over (gassing) voltage "
                         f"{chem.gassing_voltage_v:g} V/cell at 25 degC; allowed: below it (a full cell of {name} "
                         f"rests at about {chem.open_circuit_voltage_full_v:g} V)")
    fin = t.number("finishing_rate_per_h", None, low=0, low_open=True, high=1.0)
    hours = t.number("target_hours", DEFAULT_TARGET_HOURS, low=MIN_TARGET_HOURS, high=1000.0)
    close = t.number("cutout_closing_volts_per_cell", None, low=ocv[0], high=chem.max_cell_voltage_v)
    rest_top = float(open_circuit_voltage_per_cell(chem, soc[1], tuple(ocv)))
    if close is not None and close <= rest_top:
        # closing below the battery's own voltage lets the bank drive current back at every closing
        raise InputError(source, t.key("cutout_closing_volts_per_cell"),
                         f"is {close:g}; allowed: above {rest_top:.4g} V/cell (the bank's rest voltage at "
                         f"{100 * soc[1]:.3g} % charge: the cut-out must close only once the machine is above the "
                         f"battery) and at most {chem.max_cell_voltage_v:g}")
    return BatteryJob(chemistry=name, cells=cells, capacity_ah=cap, state_of_charge=soc,
                      max_charge_current_a=imax, min_charge_current_a=imin, internal_resistance_ohm=rb,
                      cable_resistance_ohm=rc, temperature_c=temp, open_circuit_voltage_per_cell_v=tuple(ocv),
                      charge_voltage_per_cell_v=vho, finishing_rate_per_h=fin, target_hours=hours,
                      cutout_closing_volts_per_cell=close)


def handover_volts_per_cell(job):
    """The temperature-corrected voltage per cell at which the main charge hands over to the finish [V]:
    ``charge_voltage_per_cell_v`` (default the chemistry's gassing voltage) at the battery's temperature."""
    chem = chemistry(job.chemistry)
    v25 = chem.gassing_voltage_v if job.charge_voltage_per_cell_v is None else job.charge_voltage_per_cell_v
    return float(temperature_corrected_volts_per_cell(chem, v25, job.temperature_c))


def starts_above_handover(job):
    """Whether the bank is already at its hand-over voltage at the start of charge when it takes the
    job's lowest main-charge current (a nearly full bank): the job is a top-up with no main charge.

    The cell model at the starting state of charge, at ``min_charge_current_a``
    (a job asking no lowest current is never one).
    """
    if not job.min_charge_current_a > 0:
        return False
    p = cell_on_charge(chemistry(job.chemistry), job.state_of_charge[0], job.min_charge_current_a / job.capacity_ah,
                       job.temperature_c, job.open_circuit_voltage_per_cell_v, bank_resistance_ohm_ah(job))
    return bool(float(p.volts_per_cell) >= handover_volts_per_cell(job))


def finishing_rate_per_h(job):
    """The finish's highest current per Ah [A/Ah]: the job's, default the chemistry's."""
    chem = chemistry(job.chemistry)
    return chem.finishing_rate_per_h if job.finishing_rate_per_h is None else float(job.finishing_rate_per_h)


def finishing_current_a(job):
    """The finish's highest current [A]."""
    return finishing_rate_per_h(job) * job.capacity_ah


def cutout_closing_volts_per_cell(job):
    """Closing voltage of the reverse-current cut-out per cell [V]: the job's, default the rest voltage at
    the top of the state-of-charge range plus 0.05 V (common practice)."""
    if job.cutout_closing_volts_per_cell is not None:
        return float(job.cutout_closing_volts_per_cell)
    chem = chemistry(job.chemistry)
    return float(open_circuit_voltage_per_cell(chem, job.state_of_charge[1], job.open_circuit_voltage_per_cell_v)) \
        + CUTOUT_MARGIN_V_PER_CELL


def cutout_closing_margin_volts_per_cell(job):
    """How far the cut-out closes above the bank's rest voltage at the top of the state-of-charge range
    [V per cell]."""
    chem = chemistry(job.chemistry)
    rest = float(open_circuit_voltage_per_cell(chem, job.state_of_charge[1], job.open_circuit_voltage_per_cell_v))
    return cutout_closing_volts_per_cell(job) - rest


#: Closing voltage above the full bank's rest voltage [V per cell] past which the closing surge is
#: worth a word: four times the usual margin (common practice).
CUTOUT_FAR_V_PER_CELL = 4 * CUTOUT_MARGIN_V_PER_CELL


def cutout_closing_surge_a(machine, job):
    """Upper bound of the current at the moment the cut-out closes onto the bank at the start of charge
    [A]: the closing voltage less the bank's rest voltage there, over the bank, the leads and the
    armature (series field, brushes and the field's fall left out: an upper bound)."""
    dv = cutout_closing_voltage_v(job) - cells_rest_voltage_v(job, job.state_of_charge[0])
    r = job.internal_resistance_ohm + job.cable_resistance_ohm + machine.armature_resistance_ohm
    return max(dv, 0.0) / r


def cutout_closing_voltage_v(job):
    """Closing voltage of the reverse-current cut-out for the whole bank [V]."""
    return job.cells * cutout_closing_volts_per_cell(job)


def bank_resistance_ohm_ah(job):
    """The bank's resistance per cell x capacity [ohm Ah]: the profile's in place of the chemistry's."""
    return job.internal_resistance_ohm * job.capacity_ah / job.cells


# ===========================================================================
# the bank against the machine
# ===========================================================================

#: Load-curve grid and refinement steps of the plan's operating points (the curve is parameterised
#: by the cells' internal voltage, about 1.5 V wide per cell: 49 points resolve it to 30 mV/cell).
PLAN_SOLVE = {"grid": 49, "steps": 40}
#: Share of the plan's load-curve grid scanned first, from its top (the rest only where no stable
#: point lies there): the demo's points sit 0.6-0.9 of the way up (measured); any share gives the
#: same points, this one the fewest evaluations on the demo job and its fleet variants.
BANK_SCAN_TOP_SHARE = 0.3
#: State-of-charge intervals per stage (model choice: the hours are then within about 0.1 % of a
#: fine grid's on the demo job, see tests).
PLAN_INTERVALS = 32
#: Intervals of the first look along the main charge for the hand-over voltage.
SCAN_INTERVALS = 16
#: Regula-falsi (Illinois) steps placing the hand-over on the hand-over voltage (at most).
HANDOVER_STEPS = 30
#: ... ending once every bracket is this narrow relative to the state of charge (a few units in
#: the last place: the steps after it move the hand-over by about 1e-15).
HANDOVER_TOLERANCE = 8e-16
#: Below half the float current the machine no longer charges the bank in any useful sense
#: (model choice; IEC 62485-2 float currents are about 1 mA/Ah, seen).
CURRENT_FLOOR_PER_H = 5e-4
#: The plan's field settings keep this share below a current limit: room for setting the field by
#: the ammeter (common practice).
CURRENT_MARGIN_FRACTION = 0.03
#: ... and this much below the highest cell voltage [V per cell]: about the reading of a cell
#: voltmeter (common practice).
VOLTAGE_MARGIN_V_PER_CELL = 0.01
#: Refinement steps of the field control when it is solved for a target point (at most; half regula
#: falsi, half halving, see :func:`supplycfg.circuit.refine_bracketed_roots`).
CONTROL_STEPS = 48


def bank_line(job, soc):
    """The bank as the machine sees it, parameterised by its cells' internal voltage ``U``.

    Parameters
    ----------
    job : BatteryJob
    soc : ndarray, shape (n,)
        State of charge of each candidate row.

    Returns
    -------
    callable
        ``vi(U, rows=None) -> (V, I)`` for ``U`` shaped ``(n, k)``, one row
        per candidate (or per candidate of ``rows``, as
        :func:`~supplycfg.circuit.normal_points` asks with ``top_share``):
        machine-terminal voltage [V] and charging current [A]. On charge ``I = C (r_s + r_g)``,
        ``V = n U + I (Rb + Rcable)``; below the rest voltage the bank
        discharges through ``Rb`` (``I = n (U - E) / Rb``, no overvoltage).

    References
    ----------
    Cell model of this module; bank of ``n`` cells in series with the
    profile's bank and cable resistances.
    """
    chem = chemistry(job.chemistry)
    s = np.asarray(soc, float)[:, None]
    n, cap = job.cells, job.capacity_ah
    rb, rc = job.internal_resistance_ohm, job.cable_resistance_ohm
    ocv = job.open_circuit_voltage_per_cell_v
    e = open_circuit_voltage_per_cell(chem, s, ocv)
    laws = _CellRates(chem, s, job.temperature_c, ocv)

    def vi(u, rows=None):
        # the numbers of reaction_rates_per_h and of the expressions in the docstring, with fewer
        # temporaries (a load-curve grid is large): products and sums in place, each once
        u = np.asarray(u, float)
        e_, a_, ge_ = (e, laws.a, laws.ge) if rows is None else (e[rows], laws.a[rows], laws.ge[rows])
        over = u - e_
        with np.errstate(over="ignore"):
            st = np.expm1(over / laws.bc)
            gs = u - laws.uref
            gs /= laws.bg
            np.exp(gs, out=gs)
        st *= a_
        gs -= ge_
        gs *= laws.g
        st += gs
        st *= cap                      # the charging current, cap (r_s + r_g)
        over *= n
        over /= rb                     # the discharge through the bank, n (U - E) / Rb
        on = u >= e_
        i = np.where(on, st, over)
        nu = u * n
        v = i * rb
        v += nu
        v = np.where(on, v, nu)
        v += i * rc
        return v, i
    return vi


def bank_voltage_v(job, soc, current_a):
    """Machine-terminal voltage [V] that drives ``current_a`` [A] into the bank at ``soc``.

    ``n V_cell(s, I/C) + I Rcable`` with the profile's bank resistance in place
    of the chemistry's; a discharge meets the rest voltage and the bank and
    cable resistances only.
    """
    chem = chemistry(job.chemistry)
    i = np.asarray(current_a, float)
    p = cell_on_charge(chem, soc, i / job.capacity_ah, job.temperature_c, job.open_circuit_voltage_per_cell_v,
                       bank_resistance_ohm_ah(job))
    return job.cells * p.volts_per_cell + i * job.cable_resistance_ohm


def bank_points(sub, job, soc, res=None):
    """The machine's normal operating point against the bank at each row's state of charge.

    Parameters
    ----------
    sub : Circuit
        One row per entry of ``soc``.
    job : BatteryJob
    soc : ndarray, shape (n,)
    res : dict, optional
        ``grid`` and ``steps`` of :func:`supplycfg.circuit.normal_points`.

    Returns
    -------
    dict of arrays
        The operating-point keys of :func:`~supplycfg.circuit.normal_points`
        plus ``internal_v``, ``volts_per_cell`` (at the battery's terminals),
        ``stored_current_a`` and ``gas_current_a`` (NaN where no stable point).
    """
    res = PLAN_SOLVE if res is None else res
    chem = chemistry(job.chemistry)
    soc = np.asarray(soc, float)
    n, cap = job.cells, job.capacity_ah
    ocv = job.open_circuit_voltage_per_cell_v
    e = open_circuit_voltage_per_cell(chem, soc, ocv)
    imax = sub.imax
    lo = e - imax * job.internal_resistance_ohm / n
    hi = np.maximum(_internal_voltage_bound(chem, soc, imax / cap, job.temperature_c, ocv), e + 1e-6)
    r = normal_points(sub, lo, hi, vi_of=bank_line(job, soc), top_share=BANK_SCAN_TOP_SHARE, **res)
    v, i = r["terminal_voltage_v"], r["load_current_a"]
    rb, rcab = job.internal_resistance_ohm, job.cable_resistance_ohm
    u = np.where(i >= 0, (v - i * (rb + rcab)) / n, (v - i * rcab) / n)
    st, gs = reaction_rates_per_h(chem, soc, np.where(np.isfinite(u), u, e), job.temperature_c, ocv)
    charge = i > 0
    r["internal_v"] = u
    r["volts_per_cell"] = (v - i * rcab) / n
    r["stored_current_a"] = np.where(np.isfinite(i), np.where(charge, cap * st, i), np.nan)
    r["gas_current_a"] = np.where(np.isfinite(i), np.where(charge, cap * gs, 0.0), np.nan)
    return r


def _strength_sign(space, base_idx):
    """+1 where a larger control value strengthens the field (field current), -1 where it weakens
    it (rheostat), 0 where there is no control (series)."""
    kinds = [space.bases[b][3] for b in np.asarray(base_idx, int)]
    return np.array([{"field-current": 1.0, "rheostat": -1.0, "exciter": -1.0}.get(k, 0.0) for k in kinds])


def _weaker(u_a, u_b, sign):
    """The weaker of two field-control values (NaN ignored)."""
    both = np.where(sign > 0, np.fmin(u_a, u_b), np.fmax(u_a, u_b))
    return np.where(sign == 0, np.nan, both)


def _weakest_per_base(u_rows, rows_base, nb, sign):
    """The weakest control value of each base over its rows (NaN where a base has none)."""
    u_rows = np.asarray(u_rows, float)
    rows_base = np.asarray(rows_base, int)
    sign = np.broadcast_to(np.asarray(sign), (nb,))
    keep = np.isfinite(u_rows) & (rows_base >= 0) & (rows_base < nb)
    rb, u = rows_base[keep], u_rows[keep]
    # one reduction over all rows in place of a mask per base
    lo = np.full(nb, np.inf)
    hi = np.full(nb, -np.inf)
    np.minimum.at(lo, rb, u)
    np.maximum.at(hi, rb, u)
    has = np.bincount(rb, minlength=nb) > 0
    return np.where(has & (sign > 0), lo, np.where(has & (sign < 0), hi, np.nan))


def control_for_point(space, base_idx, corner_idx, terminal_voltage_v, load_current_a):
    """Field control that puts each (base, corner) row at a given terminal voltage and load current.

    The circuit residual at the point rises with the field's strength, so the
    control is the root of the residual over its range (bracketed regula
    falsi, then halving); where no value reaches the point, the end of the
    range that comes closest is returned.

    Returns
    -------
    (ndarray, ndarray)
        Control value per row (NaN where the base has no field control) and
        whether the point was reached.
    """
    base_idx = np.asarray(base_idx, int)
    corner_idx = np.asarray(corner_idx, int)
    n = base_idx.size
    m = space.machine
    lo = np.array([control_range(m, space.bases[b][3])[0] for b in base_idx], float)
    hi = np.array([control_range(m, space.bases[b][3])[1] for b in base_idx], float)
    v = np.broadcast_to(np.asarray(terminal_voltage_v, float), (n,))
    i = np.broadcast_to(np.asarray(load_current_a, float), (n,))
    fixed = ~np.isfinite(lo)

    if n == 0:
        return np.zeros(0), np.zeros(0, bool)
    # the rows once; each step changes only their field control (as expand_candidates would)
    sub, _ = expand_candidates(space, base_idx, np.zeros(n), corner_idx)
    controls_at = control_of_rows(space, base_idx)

    def h(u):
        return circuit_residual(sub, sub.params_with_control(*controls_at(u)), v, i)
    h_lo, h_hi = h(np.where(fixed, 0.0, lo)), h(np.where(fixed, 0.0, hi))
    ok = (np.signbit(h_lo) != np.signbit(h_hi)) & np.isfinite(h_lo) & np.isfinite(h_hi)
    # regula falsi (Illinois), then halving: the root to the residual's 1e-11 V in a dozen steps or so
    # where halving took 48; rows without a sign change get an empty bracket and wait
    lo0 = np.where(fixed, 0.0, lo)
    root = refine_bracketed_roots(h, lo0, np.where(ok, hi, lo0), np.where(ok, h_lo, 0.0), CONTROL_STEPS)
    u = np.where(ok, root, np.where(np.abs(h_lo) < np.abs(h_hi), lo, hi))
    return np.where(fixed, np.nan, u), ok & ~fixed


def _grid(s_from, s_to, intervals, power):
    """State of charge at the nodes of a grid graded towards ``s_to`` (per row).

    ``s = s_to - (s_to - s_from) (1 - xi)^q``, ``xi`` uniform: with
    ``q = 1/(1 - p)`` the stored current falls linearly in ``xi`` where the
    acceptance ends as ``(1 - s)^p``, which the time step integrates exactly.
    """
    xi = np.linspace(0.0, 1.0, intervals + 1)
    s_from = np.asarray(s_from, float)[:, None]
    s_to = np.asarray(s_to, float)[:, None]
    return s_to - (s_to - s_from) * (1.0 - xi) ** power


@dataclass
class Stage:
    """One stage of a plan for many rows: arrays (rows, nodes) along the state of charge, and the
    time and charge integrals at the nodes (``time_h``, ``ah``, ``kwh``, from the stage's start)."""

    soc: np.ndarray
    time_h: np.ndarray
    ah: np.ndarray
    kwh: np.ndarray
    current_a: np.ndarray
    terminal_voltage_v: np.ndarray
    volts_per_cell: np.ndarray
    stored_current_a: np.ndarray
    gas_current_a: np.ndarray
    armature_current_a: np.ndarray
    x: np.ndarray
    generated_emf_v: np.ndarray
    field_current_a: np.ndarray  # in the shunt (or separate) field, what the field ammeter reads
    found: np.ndarray
    converged: np.ndarray
    stalled_at: np.ndarray      # state of charge where the charge stops (NaN: it does not)


def _stage(space, rows_base, rows_corner, rows_u, s_from, s_to, intervals=None, with_time=True):
    """Solve one constant-field stage from ``s_from`` to ``s_to`` (per row) and integrate its time.

    The charge balance ``ds/dt = I_stored / C`` gives each step
    ``dt = 2 C ds / (I_s,a + I_s,b)``, the trapezoid rule for the stored
    charge: the reported currents integrate (trapezoid rule) to exactly the
    charge stored, and the Ah and kWh are the trapezoid integrals of the
    current and the power. The charge stalls at the first node whose current
    is below the floor (or where the machine has no operating point); its
    time is infinite from there.
    """
    job = space.profile.battery
    chem = chemistry(job.chemistry)
    cap = job.capacity_ah
    nr = rows_base.size
    intervals = PLAN_INTERVALS if intervals is None else intervals
    s = _grid(s_from, s_to, intervals, chem.grading_power)
    nn = intervals + 1
    rep = np.repeat(np.arange(nr), nn)
    sub, _ = expand_candidates(space, rows_base[rep], rows_u[rep], rows_corner[rep])
    r = bank_points(sub, job, s.ravel())
    get = lambda k: np.asarray(r[k], float).reshape(nr, nn)
    cur, st, vt = get("load_current_a"), get("stored_current_a"), get("terminal_voltage_v")
    found = np.asarray(r["found"], bool).reshape(nr, nn)
    floor = CURRENT_FLOOR_PER_H * cap
    # a node the charge cannot pass: no operating point, a current below the floor, or nothing
    # stored short of full charge (at full charge nothing is stored by definition)
    dead = ~found | ~(cur > floor) | (~(st > 0) & (s < 1.0 - 1e-12))
    first = np.where(dead.any(axis=1), np.argmax(dead, axis=1), nn)
    empty = ~(s[:, -1] > s[:, 0])
    first = np.where(empty, nn, first)
    if with_time:
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            dt = 2.0 * cap * np.diff(s, axis=1) / (st[:, :-1] + st[:, 1:])
            dt = np.where(empty[:, None], 0.0, dt)
            dt = np.where(np.isfinite(dt) & (dt >= 0), dt, np.inf)
            j = np.arange(intervals)[None, :]
            dt = np.where(j >= first[:, None] - 1, np.inf, dt)
            t = np.concatenate([np.zeros((nr, 1)), np.cumsum(dt, axis=1)], axis=1)
            fin = np.isfinite(dt)
            step = np.where(fin, dt, 0.0)
            dah = np.where(fin, 0.5 * (cur[:, :-1] + cur[:, 1:]) * step, np.inf)
            p_ = vt * cur
            dkwh = np.where(fin, 0.5e-3 * (p_[:, :-1] + p_[:, 1:]) * step, np.inf)
        ah = np.concatenate([np.zeros((nr, 1)), np.cumsum(dah, axis=1)], axis=1)
        kwh = np.concatenate([np.zeros((nr, 1)), np.cumsum(dkwh, axis=1)], axis=1)
    else:
        t = ah = kwh = np.full((nr, nn), np.nan)
    stalled = np.where(first < nn, s[np.arange(nr), np.maximum(first - 1, 0)], np.nan)
    return Stage(soc=s, time_h=t, ah=ah, kwh=kwh, current_a=cur, terminal_voltage_v=vt,
                 volts_per_cell=get("volts_per_cell"), stored_current_a=st, gas_current_a=get("gas_current_a"),
                 armature_current_a=get("armature_current_a"), x=get("x"), generated_emf_v=get("generated_emf_v"),
                 field_current_a=get("shunt_field_current_a"),
                 found=found, converged=np.asarray(r["converged"], bool).reshape(nr, nn).all(axis=1), stalled_at=stalled)


@dataclass
class Plan:
    """A charge plan for bases x corners (``rows_base``, ``rows_corner``, one row each).

    ``u1``, ``u2`` are the field controls of the main charge and the finish per
    base (equal for a one-stage plan, NaN for no field control); ``main`` and
    ``finish`` the two stages per row (``finish`` starts where the main charge
    reached the hand-over voltage, ``handed_over``; it is empty otherwise).
    """

    space: object
    base_idx: np.ndarray
    rows_base: np.ndarray
    rows_corner: np.ndarray
    u1: np.ndarray
    u2: np.ndarray
    main: Stage
    finish: Stage
    handed_over: np.ndarray
    handover_soc: np.ndarray

    @property
    def two_stage(self):
        """Per base: the finish runs on a weaker field than the main charge."""
        return ~((self.u1 == self.u2) | (np.isnan(self.u1) & np.isnan(self.u2)))


def start_target_current_a(space):
    """The main charge's target start current at the strongest corner [A]: the job's highest
    charging current (or the armature rating, if lower) less the setting margin."""
    job = space.profile.battery
    return (1.0 - CURRENT_MARGIN_FRACTION) * min(job.max_charge_current_a, space.machine.rated_armature_current_a)


def start_controls(space, base_idx=None):
    """Field control of the main charge for each base: the value that starts the charge at
    :func:`start_target_current_a` at its strongest corner (the weakest of the per-corner values)."""
    job = space.profile.battery
    chem = chemistry(job.chemistry)
    nb = len(space.bases)
    base_idx = np.arange(nb) if base_idx is None else np.asarray(base_idx, int)
    nc = space.nc
    rb = np.repeat(base_idx, nc)
    rcn = np.tile(np.arange(nc), base_idx.size)
    it = start_target_current_a(space)
    p = cell_on_charge(chem, job.state_of_charge[0], it / job.capacity_ah, job.temperature_c,
                       job.open_circuit_voltage_per_cell_v, bank_resistance_ohm_ah(job))
    v = job.cells * float(p.volts_per_cell) + it * job.cable_resistance_ohm
    u, _ = control_for_point(space, rb, rcn, v, it)
    sign = _strength_sign(space, base_idx)
    pos = np.repeat(np.arange(base_idx.size), nc)
    return _weakest_per_base(u, pos, base_idx.size, sign)


def peak_controls(space, base_idx, u1, main, rows_base_pos, rows_corner):
    """Main-charge field per base that holds the highest current along the charge at the start target.

    Only bases whose current rises above the target somewhere along the main
    charge get a value (the weakest over the corners); NaN elsewhere.
    """
    job = space.profile.battery
    chem = chemistry(job.chemistry)
    it = start_target_current_a(space)
    cur = np.where(np.isfinite(main.current_a), main.current_a, -np.inf)
    k = np.argmax(cur, axis=1)
    peak = cur[np.arange(cur.shape[0]), k]
    rows = np.flatnonzero(peak > it * (1 + 1e-6))
    out = np.full(np.asarray(base_idx).size, np.nan)
    if not rows.size:
        return out
    soc = main.soc[rows, k[rows]]
    pt = cell_on_charge(chem, soc, it / job.capacity_ah, job.temperature_c, job.open_circuit_voltage_per_cell_v,
                        bank_resistance_ohm_ah(job))
    v = job.cells * pt.volts_per_cell + it * job.cable_resistance_ohm
    base_idx = np.asarray(base_idx, int)
    u, _ = control_for_point(space, base_idx[rows_base_pos[rows]], rows_corner[rows], v, it)
    sign = _strength_sign(space, base_idx)
    up = _weakest_per_base(u, rows_base_pos[rows], base_idx.size, sign)
    return np.where(np.isfinite(up), _weaker(np.asarray(u1, float), up, sign), np.nan)


def finish_controls(space, base_idx, u1, rows_base_pos, rows_corner, handed_over, handover_soc):
    """Field control of the finish per base: the strongest value that keeps the finish's current
    at most the finishing current where it starts (the hand-over, per corner) and the cells at
    most their highest voltage at the end state of charge, at every corner; never stronger than
    the main charge's (then the plan has one stage)."""
    job = space.profile.battery
    chem = chemistry(job.chemistry)
    cap, n = job.capacity_ah, job.cells
    ocv, temp = job.open_circuit_voltage_per_cell_v, job.temperature_c
    rbah = bank_resistance_ohm_ah(job)
    base_idx = np.asarray(base_idx, int)
    sign = _strength_sign(space, base_idx)
    sel = np.flatnonzero(handed_over)
    if not sel.size:
        return np.array(u1, float)
    rb_ = base_idx[rows_base_pos[sel]]
    rc_ = rows_corner[sel]
    # (a) the finishing current where the finish starts
    ia = (1.0 - CURRENT_MARGIN_FRACTION) * finishing_current_a(job)
    pa = cell_on_charge(chem, handover_soc[sel], ia / cap, temp, ocv, rbah)
    va = n * pa.volts_per_cell + ia * job.cable_resistance_ohm
    # (b) the highest cell voltage at the end of charge
    vt = float(highest_volts_per_cell(chem, temp)) - VOLTAGE_MARGIN_V_PER_CELL
    pb = cell_at_voltage(chem, np.full(sel.size, job.state_of_charge[1]), vt, temp, ocv, rbah)
    ib = cap * pb.rate_per_h
    vb = n * vt + ib * job.cable_resistance_ohm
    # both points in one solve (each row is halved on its own)
    u_ab, _ = control_for_point(space, np.concatenate([rb_, rb_]), np.concatenate([rc_, rc_]),
                                np.concatenate([np.broadcast_to(va, sel.shape), np.broadcast_to(vb, sel.shape)]),
                                np.concatenate([np.full(sel.size, ia), np.broadcast_to(ib, sel.shape)]))
    ua, ub = u_ab[:sel.size], u_ab[sel.size:]
    rows_sign = sign[rows_base_pos[sel]]
    u2 = _weakest_per_base(_weaker(ua, ub, rows_sign), rows_base_pos[sel], base_idx.size, sign)
    u2 = np.where(np.isnan(u2), u1, u2)
    return _weaker(np.asarray(u1, float), u2, sign)


def _handover(space, rows_base, rows_corner, rows_u, job):
    """Where each row's main charge reaches the hand-over voltage: ``(handed_over, soc)``.

    A scan along the state of charge brackets the first crossing, regula falsi
    (Illinois) puts it on the voltage. A charge that stalls first, or never
    gets there, does not hand over (its soc is the end state of charge).
    """
    s0, s1 = job.state_of_charge
    vho = handover_volts_per_cell(job)
    nr = rows_base.size
    scan = _stage(space, rows_base, rows_corner, rows_u, np.full(nr, s0), np.full(nr, s1), SCAN_INTERVALS,
                  with_time=False)
    vpc = scan.volts_per_cell
    above = np.nan_to_num(vpc, nan=-np.inf) >= vho
    first = np.where(above.any(axis=1), np.argmax(above, axis=1), -1)
    stall = np.where(np.isnan(scan.stalled_at), np.inf, scan.stalled_at)
    s_first = np.where(first >= 0, scan.soc[np.arange(nr), np.maximum(first, 0)], np.inf)
    handed = (first >= 0) & (s_first <= stall + 1e-12)
    soc = np.full(nr, float(s1))
    at_start = handed & (first == 0)
    soc[at_start] = s0
    idx = np.flatnonzero(handed & (first > 0))
    if idx.size:
        # on the hand-over voltage the bank's current follows from the cell model alone, so the
        # hand-over is the root in soc of the machine's residual at that (V, I)
        chem = chemistry(job.chemistry)
        sub, _ = expand_candidates(space, rows_base[idx], rows_u[idx], rows_corner[idx])
        params = sub.take(np.arange(sub.n))
        rbah = bank_resistance_ohm_ah(job)

        def h(soc_):
            p = cell_at_voltage(chem, soc_, vho, job.temperature_c, job.open_circuit_voltage_per_cell_v, rbah)
            i = job.capacity_ah * p.rate_per_h
            return circuit_residual(sub, params, job.cells * vho + i * job.cable_resistance_ohm, i)

        k = first[idx]
        a, b = scan.soc[idx, k - 1], scan.soc[idx, k]
        fa, fb = h(a), h(b)
        for _ in range(HANDOVER_STEPS):
            c = a - fa * (b - a) / np.where(fb != fa, fb - fa, 1.0)
            c = np.where((c > np.minimum(a, b)) & (c < np.maximum(a, b)), c, 0.5 * (a + b))
            fc = h(c)
            flip = np.signbit(fc) != np.signbit(fb)
            a, fa = np.where(flip, b, a), np.where(flip, fb, 0.5 * fa)
            b, fb = c, fc
            # every row on its root, or its bracket down to a few units in the last place: further
            # steps only trade ulps
            if np.all((fa == 0) | (fb == 0) | (np.abs(b - a) <= HANDOVER_TOLERANCE * np.abs(b))):
                break
        soc[idx] = np.where(np.abs(fa) < np.abs(fb), a, b)
    return handed, soc


def charge_plan(space, base_idx=None, u1=None, u2=None, main_from=None):
    """The charge plan of each base over every corner of the envelope.

    Parameters
    ----------
    space : Space
        Candidates and envelope (a battery profile).
    base_idx : array of int, optional
        Bases to plan; default all.
    u1 : array, optional
        Main-charge field control per base; default :func:`start_controls`.
    u2 : array, optional
        Finish field control per base; default :func:`finish_controls`.
    main_from : Plan, optional
        A plan of the same space holding every base of ``base_idx`` with the
        same main-charge control: its main charge and hand-over are taken as
        they are (only the finish is solved; a finish field's band).

    Returns
    -------
    Plan

    References
    ----------
    Two-rate charging of vented banks: start rate to the gassing voltage, then
    a finishing rate (common practice; DIN 41773/41774 charger
    characteristics, from memory).
    """
    job = space.profile.battery
    nb = len(space.bases)
    base_idx = np.arange(nb) if base_idx is None else np.asarray(base_idx, int)
    nc = space.nc
    aim_start = u1 is None
    u1 = start_controls(space, base_idx) if u1 is None else np.asarray(u1, float)
    pos = np.repeat(np.arange(base_idx.size), nc)
    rows_base = base_idx[pos]
    rows_corner = np.tile(np.arange(nc), base_idx.size)
    nr = rows_base.size
    s0, s1 = job.state_of_charge
    finish_part = None
    if main_from is None and not aim_start:
        # the field of each stage is known before either is solved: both stages in one solve (the
        # finish of every row that hands over; those whose main charge stalls are dropped below)
        handed, s_ho = _handover(space, rows_base, rows_corner, u1[pos], job)
        if u2 is None:
            u2 = finish_controls(space, base_idx, u1, pos, rows_corner, handed, s_ho)
        u2 = np.asarray(u2, float)
        ho = np.flatnonzero(handed)
        both = _stage(space, np.concatenate([rows_base, rows_base[ho]]), np.concatenate([rows_corner, rows_corner[ho]]),
                      np.concatenate([u1[pos], u2[pos][ho]]), np.concatenate([np.full(nr, s0), s_ho[ho]]),
                      np.concatenate([s_ho, np.full(ho.size, s1)]))
        main, finish_part = _stage_rows(both, slice(0, nr)), (ho, _stage_rows(both, slice(nr, None)))
    elif main_from is None:
        handed, s_ho = _handover(space, rows_base, rows_corner, u1[pos], job)
        main = _stage(space, rows_base, rows_corner, u1[pos], np.full(nr, s0), s_ho)

        def resolve_main(redo):
            """Hand-over and main charge again for rows ``redo``, whose base's field ``u1`` changed."""
            h2, s2 = _handover(space, rows_base[redo], rows_corner[redo], u1[pos][redo], job)
            part = _stage(space, rows_base[redo], rows_corner[redo], u1[pos][redo], np.full(redo.size, s0), s2)
            handed[redo], s_ho[redo] = h2, s2
            for f in _STAGE_FIELDS:
                getattr(main, f)[redo] = getattr(part, f)

        if aim_start:
            # where the current rises along the charge (a rising characteristic, a cold bank), aim the
            # field at the target current where the peak lies, not at the start: one re-aim suffices
            # within the setting margin
            u_peak = peak_controls(space, base_idx, u1, main, pos, rows_corner)
            changed = np.flatnonzero(np.isfinite(u_peak) & (u_peak != u1))
            if changed.size:
                u1 = np.where(np.isfinite(u_peak), u_peak, u1)
                resolve_main(np.flatnonzero(np.isin(pos, changed)))
        # a bank already at the hand-over voltage when the charge starts (a nearly full one) gets no
        # main charge: the whole charge runs on the finish's field (common practice)
        at_start = np.zeros(base_idx.size, bool)
        np.logical_or.at(at_start, pos, handed & (s_ho <= s0))
        if at_start.any():
            u_fin = finish_controls(space, base_idx, u1, pos, rows_corner, handed & at_start[pos], s_ho)
            u1 = np.where(at_start, u_fin, u1)
            resolve_main(np.flatnonzero(at_start[pos]))
    else:
        at = {int(b): k for k, b in enumerate(main_from.base_idx)}
        rows = np.array([at[int(b)] * nc + c for b, c in zip(rows_base, rows_corner)], int)
        handed, s_ho = main_from.handed_over[rows], main_from.handover_soc[rows]
        main = Stage(**{f: getattr(main_from.main, f)[rows] for f in _STAGE_FIELDS})
    if u2 is None:
        u2 = finish_controls(space, base_idx, u1, pos, rows_corner, handed, s_ho)
    u2 = np.asarray(u2, float)
    # the finish starts where the main charge handed over (and got there in finite time)
    reached = handed & np.isfinite(main.time_h[:, -1])
    finish = _held(main)
    sel = np.flatnonzero(reached)
    if sel.size and finish_part is not None:
        ho, part = finish_part
        at = np.searchsorted(ho, sel)
        for f in _STAGE_FIELDS:
            getattr(finish, f)[sel] = getattr(part, f)[at]
    elif sel.size:
        part = _stage(space, rows_base[sel], rows_corner[sel], u2[pos][sel], s_ho[sel], np.full(sel.size, s1))
        for f in _STAGE_FIELDS:
            getattr(finish, f)[sel] = getattr(part, f)
    return Plan(space, base_idx, rows_base, rows_corner, u1, u2, main, finish, reached, s_ho)


_STAGE_FIELDS = ("soc", "time_h", "ah", "kwh", "current_a", "terminal_voltage_v", "volts_per_cell", "stored_current_a",
                 "gas_current_a", "armature_current_a", "x", "generated_emf_v", "field_current_a", "found", "converged",
                 "stalled_at")


def _stage_rows(stage, rows):
    """The rows ``rows`` (an index or a slice) of a stage."""
    return Stage(**{f: getattr(stage, f)[rows] for f in _STAGE_FIELDS})


def _held(stage):
    """An empty stage at each row's last node of ``stage`` (no time passes)."""
    nn = stage.soc.shape[1]
    out = {}
    for f in _STAGE_FIELDS:
        a = getattr(stage, f)
        if a.ndim == 2:
            out[f] = np.repeat(a[:, -1:], nn, axis=1).copy()
        else:
            out[f] = a.copy()
    for f in ("time_h", "ah", "kwh"):
        out[f] = np.zeros_like(out[f])
    out["stalled_at"] = np.full(stage.soc.shape[0], np.nan)
    return Stage(**out)


# ===========================================================================
# cut-out figures
# ===========================================================================

def cut_in_speeds_rpm(space, base_idx, u, corner_idx):
    """Drive speed at which each setting's no-load voltage first reaches the cut-out's closing voltage [rpm].

    At no load the field and every drop are fixed by the terminal voltage,
    so at the closing voltage ``V`` only the EMF scales with speed:
    ``n_cut = n (V + drops) / E(n)``. A self-excited machine builds up only
    above its critical speed, which bounds it from below.

    Returns
    -------
    ndarray
        [rpm]; NaN where the field is reversed or absent at that voltage.

    References
    ----------
    EMF proportional to speed at constant flux (design note; Kosow Ex 3-3);
    critical speed ``n_occ (Rsh + Rrh) / R_crit`` (design note); cut-out
    closing on rising voltage (classic dynamo practice, from memory).
    """
    job = space.profile.battery
    base_idx = np.asarray(base_idx, int)
    sub, _ = expand_candidates(space, base_idx, u, corner_idx)
    sub = sub.without_drive()  # the speed here is the unknown of the question, not the drive's
    p = sub.take(np.arange(sub.n))
    v = np.full(sub.n, cutout_closing_voltage_v(job))
    st = machine_state(sub, p, v, np.zeros(sub.n))
    e, h = st["generated_emf_v"], st["h"]
    speed = np.array([space.corners[c][0] for c in np.broadcast_to(corner_idx, base_idx.shape)], float)
    with np.errstate(divide="ignore", invalid="ignore"):
        n_cut = np.where(e > 0, speed * (e - h) / e, np.nan)
        n_crit = np.where(sub.kind == 1, speed * sub.rf / critical_field_resistance_ohm(sub), 0.0)
    return np.where(np.isfinite(n_cut), np.maximum(n_cut, n_crit), np.nan)


def standstill_backfeed_current_a(space, base_idx, u, corner_idx):
    """Current a full bank drives back into the machine at standstill with no cut-out [A] (positive).

    At standstill the machine has no EMF; the bank's rest voltage at the top
    of the state-of-charge range drives current through the bank, the cable,
    the brushes, the armature and the series branch (and, for a self-excited
    field, the shunt winding too).

    References
    ----------
    Circuit equation of the design note with zero speed; reverse current of
    a stopped dynamo (classic practice, from memory).
    """
    job = space.profile.battery
    chem = chemistry(job.chemistry)
    sub, _ = expand_candidates(space, base_idx, u, corner_idx)
    sub = sub.without_drive()  # standstill: no drive turns the machine
    p = sub.take(np.arange(sub.n))
    p["s"] = np.zeros(sub.n)
    vb = job.cells * float(open_circuit_voltage_per_cell(chem, job.state_of_charge[1],
                                                         job.open_circuit_voltage_per_cell_v))
    rext = job.internal_resistance_ohm + job.cable_resistance_ohm

    def h(il):
        return circuit_residual(sub, p, vb + il * rext, il)

    a, b = np.full(sub.n, -vb / rext), np.zeros(sub.n)
    fa = h(a)
    for _ in range(CONTROL_STEPS + 12):
        c = 0.5 * (a + b)
        fc = h(c)
        same = np.signbit(fc) == np.signbit(fa)
        a, fa, b = np.where(same, c, a), np.where(same, fc, fa), np.where(same, b, c)
    return -0.5 * (a + b)


# ===========================================================================
# the plan's figures, limits and the search's hooks
# ===========================================================================

STAGE_NAMES = ("main charge", "finish")
ENDS = {
    "handover-voltage": "the cells reached the hand-over voltage {v:.3f} V per cell at {soc:.0f} % charge: "
                        "turn the field down to the finish setting",
    "end-state-of-charge": "the battery reached the end state of charge {soc:.0f} %",
    "stalled": "the charging current fell below {floor:.3g} A at {soc:.0f} % charge: the machine no longer "
               "drives a useful current into the bank",
}


def corner_roles(space):
    """Corner indices ``(setting, cold, hot)``: the setting's own (the nominal speed and temperature),
    the coldest at the top speed (the strongest machine) and the hottest at the lowest speed (the weakest)."""
    cs = space.corners
    nom = min(range(len(cs)), key=lambda k: (abs(cs[k][0] - space.nominal[0]), abs(cs[k][1] - space.nominal[1])))
    cold = min(range(len(cs)), key=lambda k: (cs[k][1], -cs[k][0]))
    hot = max(range(len(cs)), key=lambda k: (cs[k][1], -cs[k][0]))
    return nom, cold, hot


def stage_setting(space, b, u, corner):
    """The :class:`~supplycfg.circuit.Setting` of base ``b`` with control ``u`` at a corner's speed and temperature."""
    conn, tap, d, control = space.bases[b]
    kw = {}
    if control == "field-current" and np.isfinite(u):
        kw["field_current_a"] = float(u)
    elif control in ("rheostat", "exciter") and np.isfinite(u):
        kw["rheostat_ohm"] = float(u)
    sp, tc = space.corners[corner]
    return check_setting(space.machine, Setting(conn, series_turns=tap if conn in USES_SERIES else None,
                                                diverter_ohm=d, speed_rpm=sp, winding_temperature_c=tc, **kw))


def _nanmax_rows(*arrays):
    with np.errstate(invalid="ignore"):
        stacked = np.concatenate([np.where(np.isfinite(a), a, -np.inf) for a in arrays], axis=1)
        out = stacked.max(axis=1)
    return np.where(np.isfinite(out), out, np.nan)


def _nanmin_rows(*arrays):
    with np.errstate(invalid="ignore"):
        stacked = np.concatenate([np.where(np.isfinite(a), a, np.inf) for a in arrays], axis=1)
        out = stacked.min(axis=1)
    return np.where(np.isfinite(out), out, np.nan)


def _first_crossing_soc(soc, v, level):
    """First state of charge where ``v`` (rows x nodes, along ``soc``) reaches ``level``; NaN if never."""
    above = np.nan_to_num(v, nan=-np.inf) >= level
    any_ = above.any(axis=1)
    k = np.argmax(above, axis=1)
    r = np.arange(soc.shape[0])
    km = np.maximum(k - 1, 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(k > 0, (level - v[r, km]) / (v[r, k] - v[r, km]), 0.0)
    s = soc[r, km] + np.clip(np.nan_to_num(w), 0, 1) * (soc[r, k] - soc[r, km])
    return np.where(any_, s, np.nan)


def row_figures(plan):
    """Per-row figures of a plan (arrays over bases x corners)."""
    job = plan.space.profile.battery
    chem = chemistry(job.chemistry)
    m, f = plan.main, plan.finish
    s0, s1 = job.state_of_charge
    cap = job.capacity_ah
    reached = plan.handed_over
    hours = m.time_h[:, -1] + f.time_h[:, -1]
    ah = m.ah[:, -1] + f.ah[:, -1]
    vpc = np.concatenate([m.volts_per_cell, f.volts_per_cell], axis=1)
    soc = np.concatenate([m.soc, f.soc], axis=1)
    gas_v = float(gassing_volts_per_cell(chem, job.temperature_c))
    vho = handover_volts_per_cell(job)
    # 1 uV below: a hand-over placed on the gassing voltage counts as reaching it
    gas_soc = _first_crossing_soc(soc, vpc, gas_v - 1e-6)
    stalled = np.where(np.isfinite(m.stalled_at), m.stalled_at, f.stalled_at)
    with np.errstate(invalid="ignore", divide="ignore"):
        return {
            "hours": np.where(np.isfinite(hours), hours, np.inf),
            "ah": ah,
            "ah_factor": ah / ((s1 - s0) * cap),
            "start_current": m.current_a[:, 0],
            "main_end_current": m.current_a[:, -1],
            "main_end_soc": m.soc[:, -1],
            "finish_start_current": np.where(reached, f.current_a[:, 0], np.nan),
            # the current can rise along a stage (a rising characteristic, a cold bank): limits take its
            # highest and lowest over the stage, never just an end
            "main_peak": np.where(np.isfinite(m.current_a[:, 0]), _nanmax_rows(m.current_a), np.nan),
            "main_low": np.where(np.isfinite(m.current_a[:, 0]), _nanmin_rows(m.current_a), np.nan),
            # above the hand-over voltage: the finish, and any main-charge node already past it (a bank
            # at the hand-over voltage when the charge starts)
            "finish_peak": np.maximum(np.where(reached, _nanmax_rows(f.current_a), 0.0),
                                      np.where(m.volts_per_cell > vho + 1e-6, m.current_a, -np.inf).max(axis=1)),
            "end_current": np.where(reached, f.current_a[:, -1], m.current_a[:, -1]),
            "end_vpc": np.where(reached, f.volts_per_cell[:, -1], m.volts_per_cell[:, -1]),
            "highest_vpc": _nanmax_rows(m.volts_per_cell, f.volts_per_cell),
            "largest_gas_per_h": _nanmax_rows(m.gas_current_a, f.gas_current_a) / cap,
            "max_ia": _nanmax_rows(np.abs(m.armature_current_a), np.abs(f.armature_current_a)),
            "min_x": _nanmin_rows(m.x, f.x),
            "max_x": _nanmax_rows(np.abs(m.x), np.abs(f.x)),
            "min_emf": _nanmin_rows(m.generated_emf_v, f.generated_emf_v),
            "gassing_soc": gas_soc,
            "stalled_at": stalled,
            "converged": m.converged & f.converged & np.isfinite(m.current_a[:, 0]),
        }


def _num(v):
    v = float(v)
    return v if math.isfinite(v) else None


def plan_stages(plan, k, corner):
    """The stages of base position ``k`` at ``corner`` as JSON-ready dicts (the plan a person follows)."""
    space, job = plan.space, plan.space.profile.battery
    b = int(plan.base_idx[k])
    r = k * space.nc + corner
    m, f = plan.main, plan.finish
    vho = handover_volts_per_cell(job)
    floor = CURRENT_FLOOR_PER_H * job.capacity_ah
    two = bool(plan.two_stage[k]) and bool(plan.handed_over[r])

    def ends(stage_last):
        stall = m.stalled_at[r] if np.isfinite(m.stalled_at[r]) else f.stalled_at[r]
        if stage_last and np.isfinite(stall):
            return "stalled", ENDS["stalled"].format(floor=floor, soc=100 * stall)
        if not stage_last:
            return "handover-voltage", ENDS["handover-voltage"].format(v=vho, soc=100 * plan.handover_soc[r])
        return "end-state-of-charge", ENDS["end-state-of-charge"].format(soc=100 * job.state_of_charge[1])

    def stage(no, u, t0, t1, s_from, s_to, i0, i1, v1, last, st0, st1):
        code, text = ends(last)
        return {"stage": no, "name": STAGE_NAMES[no - 1] if two else "whole charge",
                "setting": stage_setting(space, b, u, corner).as_dict(),
                "from_h": _num(t0), "to_h": _num(t1), "from_state_of_charge": _num(s_from),
                "to_state_of_charge": _num(s_to), "start_current_a": _num(i0), "end_current_a": _num(i1),
                "end_volts_per_cell": _num(v1), "ends_because": code, "ends_reason": text,
                # the meters at the stage's ends: the field ammeter follows the terminal voltage on a
                # self-excited machine, and the voltmeter at the machine tells the hand-over
                "start_field_current_a": _num(st0.field_current_a[r, 0]),
                "end_field_current_a": _num(st1.field_current_a[r, -1]),
                "end_terminal_voltage_v": _num(st1.terminal_voltage_v[r, -1])}

    t_main = m.time_h[r, -1]
    if two:
        return [stage(1, plan.u1[k], 0.0, t_main, m.soc[r, 0], m.soc[r, -1], m.current_a[r, 0], m.current_a[r, -1],
                      m.volts_per_cell[r, -1], False, m, m),
                stage(2, plan.u2[k], t_main, t_main + f.time_h[r, -1], f.soc[r, 0], f.soc[r, -1], f.current_a[r, 0],
                      f.current_a[r, -1], f.volts_per_cell[r, -1], True, f, f)]
    last = f if plan.handed_over[r] else m
    stall = m.stalled_at[r] if np.isfinite(m.stalled_at[r]) else f.stalled_at[r]
    s_end = stall if np.isfinite(stall) else last.soc[r, -1]
    return [stage(1, plan.u1[k], 0.0, t_main + f.time_h[r, -1], m.soc[r, 0], s_end, m.current_a[r, 0],
                  last.current_a[r, -1], last.volts_per_cell[r, -1], True, m, last)]


def _fmt(v, f):
    return "-" if v is None or not math.isfinite(v) else format(v, f)


def plan_rows(stages, ohm="ohm"):
    """The stages in plain words: ``[(stage, field setting, hours, current, end volts per cell, ends because)]``.

    The field setting is the stage's meter reading, rounded to what can be
    set, where the stage carries one (``readings``); else the exact value.
    ``ohm`` is the unit's sign: plain text for a terminal, "Ω" on the page
    and the sheet.
    """
    rows = []
    for s in stages:
        st = s["setting"]
        rd = s.get("readings") or {}
        if st.get("field_current_a") is not None:
            fld = f"field current {st['field_current_a']:.4g} A"
        elif st["connection"] == "series":
            fld = "series winding only"
        elif rd.get("rheostat_ohm") is not None:
            fld = f"rheostat {rd['rheostat_ohm']:g} {ohm}"
        else:
            fld = f"rheostat {st.get('rheostat_ohm') or 0:.4g} {ohm}"
        rows.append((f"{s['stage']}: {s['name']}", fld, f"{_fmt(s['from_h'], '.2f')} to {_fmt(s['to_h'], '.2f')} h",
                     f"{_fmt(s['start_current_a'], '.3g')} to {_fmt(s['end_current_a'], '.3g')} A",
                     f"{_fmt(s['end_volts_per_cell'], '.3f')} V", s["ends_reason"]))
    return rows


def condition_text(cond):
    """``1450 rpm, windings 75 degC`` from a conditions entry."""
    return f"{cond['speed_rpm']:g} rpm, windings {cond['winding_temperature_c']:g} degC"


def _plan_limits(plan, rf, sub1, sub2, vnl_rows):
    """The limits of a plan (see :func:`plan_figures`) from its row figures, the circuits of its two
    fields and the no-load voltages of the first; and the drive's figures at its load points."""
    space = plan.space
    job = space.profile.battery
    nb, nc = plan.base_idx.size, space.nc
    worst_max = lambda k: worst_over_corners(rf[k], nb, nc, "max")
    hours_worst = np.asarray(rf["hours"]).reshape(nb, nc).max(axis=1)
    lim = {
        "charge_current_max": (worst_max("main_peak"), job.max_charge_current_a, "max", "A"),
        "main_charge_current_min": (worst_over_corners(rf["main_low"], nb, nc, "min"), job.min_charge_current_a,
                                    "min", "A"),
        "finish_current_max": (worst_max("finish_peak"), finishing_current_a(job), "max", "A"),
        "end_volts_per_cell": (worst_max("highest_vpc"),
                               float(highest_volts_per_cell(chemistry(job.chemistry), job.temperature_c)), "max", "V"),
        "hours_to_full": (np.where(np.isfinite(hours_worst), hours_worst, np.inf), job.target_hours, "max", "h"),
        "no_load_above_cutout": (worst_over_corners(vnl_rows, nb, nc, "min"), cutout_closing_voltage_v(job), "min",
                                 "V"),
        "armature_current_rating": (worst_max("max_ia"), space.machine.rated_armature_current_a, "max", "A"),
    }
    if starts_above_handover(job):
        # a top-up has no main charge to hold up
        del lim["main_charge_current_min"]
    # the drive at the plan's load points (at the coupled speed of each)
    mn, fn = plan.main, plan.finish
    with np.errstate(invalid="ignore"):
        pw = np.where(np.isfinite(mn.terminal_voltage_v * mn.current_a), mn.terminal_voltage_v * mn.current_a, -np.inf)
    kmax = np.argmax(pw, axis=1)
    rr = np.arange(kmax.size)
    drive_lim, drive_figs = load_point_figures(space, nb, [
        ("start of charge", sub1, mn.terminal_voltage_v[:, 0], mn.current_a[:, 0]),
        ("heaviest point of the main charge", sub1, mn.terminal_voltage_v[rr, kmax], mn.current_a[rr, kmax]),
        ("hand-over", sub1, mn.terminal_voltage_v[:, -1], mn.current_a[:, -1]),
        ("start of the finish", sub2, fn.terminal_voltage_v[:, 0], fn.current_a[:, 0]),
        ("end of charge", sub2, fn.terminal_voltage_v[:, -1], fn.current_a[:, -1])], missing_collapses=False)
    lim.update(drive_lim)
    return lim, drive_figs


def plan_limits(plan):
    """The limits of :func:`plan_figures` alone (what a band's margins need; no figures or extras)."""
    sub1, _ = expand_candidates(plan.space, plan.base_idx, plan.u1)
    sub2, _ = expand_candidates(plan.space, plan.base_idx, plan.u2)
    return _plan_limits(plan, row_figures(plan), sub1, sub2, no_load_voltages(sub1))[0]


def plan_figures(plan):
    """Limits, figures and extras of every planned base (the search's contract).

    Returns
    -------
    (limits, figures, extras)
        ``limits``: name -> (values per base, limit, 'max'|'min', unit), over
        every corner of the envelope; ``figures``: name -> array per base, the
        plan's figures at the setting's own speed and winding temperature and
        the envelope's extremes (``*_cold`` at the coldest windings and top
        speed, ``*_hot`` at the hottest and lowest speed); ``extras``: one dict
        per base with ``plan`` (the stages at the setting's condition),
        ``finish_setting``, ``conditions``, ``ventilation``,
        ``cut_in_speed_rpm`` and ``standstill_backfeed_current_a``.
    """
    space = plan.space
    job = space.profile.battery
    chem = chemistry(job.chemistry)
    nb, nc = plan.base_idx.size, space.nc
    rf = row_figures(plan)
    grid = {k: np.asarray(v).reshape(nb, nc) for k, v in rf.items()}
    nom, cold, hot = corner_roles(space)
    worst_max = lambda k: worst_over_corners(rf[k], nb, nc, "max")
    worst_min = lambda k: worst_over_corners(rf[k], nb, nc, "min")
    temp = job.temperature_c
    vmax = float(highest_volts_per_cell(chem, temp))
    close_v = cutout_closing_voltage_v(job)
    s0, s1 = job.state_of_charge
    ocv = job.open_circuit_voltage_per_cell_v
    # the main charge's setting at no load, every corner
    sub1, _ = expand_candidates(space, plan.base_idx, plan.u1)
    vnl_rows = no_load_voltages(sub1)
    sub2, _ = expand_candidates(space, plan.base_idx, plan.u2)
    crit = np.fmin(critical_resistance_ratios(space, sub1, nb), critical_resistance_ratios(space, sub2, nb))
    hours_all = grid["hours"]
    hours_worst = hours_all.max(axis=1)
    vent = ventilation(chem, job.cells, job.capacity_ah, worst_max("highest_vpc"), worst_max("largest_gas_per_h"), temp)
    cut_cold = cut_in_speeds_rpm(space, plan.base_idx, plan.u1, np.full(nb, cold))
    cut_hot = cut_in_speeds_rpm(space, plan.base_idx, plan.u1, np.full(nb, hot))
    backfeed = standstill_backfeed_current_a(space, plan.base_idx, plan.u1, np.full(nb, cold))
    at = lambda k, c=nom: grid[k][:, c]
    target = job.target_hours
    hours_nom = at("hours")
    lim, drive_figs = _plan_limits(plan, rf, sub1, sub2, vnl_rows)
    nanify = lambda a: np.where(np.isfinite(a), a, np.nan)
    figs = {
        "hours_to_full": np.where(hours_nom <= target, hours_nom, np.nan),
        "hours_to_full_longest": nanify(hours_worst),
        "ah_charge_factor": nanify(at("ah_factor")),
        "gassing_state_of_charge": at("gassing_soc"),
        "stages": np.where(plan.two_stage, 2.0, 1.0),
        "start_charge_current_a": at("start_current"),
        "start_charge_current_cold_a": at("start_current", cold),
        "start_charge_current_hot_a": at("start_current", hot),
        "handover_current_a": np.where(plan.handed_over.reshape(nb, nc)[:, nom], at("main_end_current"), np.nan),
        "handover_state_of_charge": np.where(plan.handed_over.reshape(nb, nc)[:, nom], at("main_end_soc"), np.nan),
        "finish_start_current_a": np.where(plan.two_stage, at("finish_start_current"), np.nan),
        "end_charge_current_a": at("end_current"),
        "end_volts_per_cell": at("end_vpc"),
        "end_volts_per_cell_cold": at("end_vpc", cold),
        "handover_volts_per_cell": np.full(nb, handover_volts_per_cell(job)),
        "gassing_volts_per_cell": np.full(nb, float(gassing_volts_per_cell(chem, temp))),
        "highest_volts_per_cell_limit": np.full(nb, vmax),
        "ventilation_m3_per_h": vent["airflow_m3_per_h"],
        "ventilation_opening_cm2": vent["opening_cm2"],
        "gas_current_ma_per_ah": vent["gas_current_ma_per_ah"],
        "cutout_closing_voltage_v": np.full(nb, close_v),
        "cut_in_speed_cold_rpm": cut_cold,
        "cut_in_speed_hot_rpm": cut_hot,
        "standstill_backfeed_current_a": backfeed,
        "start_charge_current_highest_a": worst_max("start_current"),
        "main_charge_current_highest_a": worst_max("main_peak"),
        "main_charge_current_lowest_a": worst_min("main_low"),
        "finish_current_highest_a": worst_max("finish_peak"),
        "highest_volts_per_cell": worst_max("highest_vpc"),
        "no_load_voltage_min_v": worst_over_corners(vnl_rows, nb, nc, "min"),
        "no_load_voltage_max_v": worst_over_corners(vnl_rows, nb, nc, "max"),
        "bank_open_circuit_voltage_start_v": np.full(nb, job.cells * float(open_circuit_voltage_per_cell(chem, s0, ocv))),
        "bank_open_circuit_voltage_end_v": np.full(nb, job.cells * float(open_circuit_voltage_per_cell(chem, s1, ocv))),
        "max_armature_current_a": worst_max("max_ia"),
        "min_net_mmf_a": worst_min("min_x"),
        "max_net_mmf_a": worst_max("max_x"),
        "min_generated_emf_v": worst_min("min_emf"),
        "critical_resistance_ratio": crit,
        "converged": grid["converged"].all(axis=1).astype(float),
    }
    figs.update(drive_figs)
    conds = {name: {"speed_rpm": space.corners[c][0], "winding_temperature_c": space.corners[c][1]}
             for name, c in (("setting", nom), ("cold", cold), ("hot", hot))}
    if space.profile.drive.coupled:
        # the corner's speed is the drive's no-load speed; loaded, the speed falls
        for c in conds.values():
            c["drive"] = space.profile.drive.kind
    extras = []
    for k in range(nb):
        b = int(plan.base_idx[k])
        fin = stage_setting(space, b, plan.u2[k], nom).as_dict() if plan.two_stage[k] else None
        extras.append({
            "plan": plan_stages(plan, k, nom),
            "finish_setting": fin,
            "conditions": conds,
            "ventilation": {"airflow_m3_per_h": _num(vent["airflow_m3_per_h"][k]),
                            "opening_cm2": _num(vent["opening_cm2"][k]),
                            "gas_current_ma_per_ah": _num(vent["gas_current_ma_per_ah"][k]),
                            "governed_by": str(vent["governed_by"][k])},
            "cut_in_speed_rpm": {"cold": _num(cut_cold[k]), "hot": _num(cut_hot[k])},
            "standstill_backfeed_current_a": _num(backfeed[k]),
        })
    return lim, figs, extras


def solve(space, advice=True):
    """The charge plan of every candidate base, with its limits and figures.

    ``advice=False`` leaves out the stages' readings and bands (see
    :func:`supplycfg.search.search`).

    Returns
    -------
    (u, limits, figures, extras, evaluated)
        ``u`` is the main charge's field control (the option's setting is the
        plan's first stage); ``extras`` holds each candidate's ``plan``.
    """
    plan = charge_plan(space)
    lim, figs, extras = plan_figures(plan)
    evaluated = plan.rows_base.size * ((PLAN_INTERVALS + 1) * 2 + SCAN_INTERVALS + 1)
    if not advice:
        return plan.u1, lim, figs, extras, int(evaluated)
    # readings at the start of charge and the band of main-charge fields that keeps every limit
    # each band step re-solves whole plans: a coarser scan and fewer halvings (a few hundredths of
    # an ohm, far below what the readings are rounded to) keep the search quick
    advice, n = option_advice(space, evaluate_limits, plan.u1, lim, start_setting_field, scan=4, steps=10,
                              refine="root")
    finish, n2 = finish_advice(plan, lim)
    extras = [dict(e or {}, **a) for e, a in zip(extras, advice)]
    for e, a, f in zip(extras, advice, finish):
        stages = e.get("plan") or []
        # each stage carries the readings where its field is set: stage 1's are the option's
        if stages:
            stages[0].update(a)
        if len(stages) == 2 and f is not None:
            stages[1].update(f)
    return plan.u1, lim, figs, extras, int(evaluated + n + n2)


def finish_advice(plan, limits):
    """Readings and band of the finish's field for every two-stage plan that keeps every limit.

    The finish's field is set at the hand-over, so its readings are the field
    currents there; its band is the interval of finish fields over which every
    limit of the whole plan still holds with the main charge as planned.

    Returns
    -------
    (list, int)
        Per base ``{"readings", "band"}`` or None (one stage, or a limit
        broken), and the candidate evaluations spent.
    """
    space, job = plan.space, plan.space.profile.battery
    nb = len(space.bases)
    u1 = np.full(nb, np.nan)
    u1[plan.base_idx] = plan.u1
    u2 = np.full(nb, np.nan)
    two = np.asarray(plan.two_stage, bool)
    u2[plan.base_idx[two]] = plan.u2[two]
    # the hand-over's state of charge at every corner, by base (the main charge does not change)
    soc = np.full((nb, space.nc), job.state_of_charge[1])
    soc[plan.base_idx] = np.where(np.isfinite(plan.handover_soc), plan.handover_soc,
                                  job.state_of_charge[1]).reshape(-1, space.nc)
    if not np.isfinite(u2).any():
        return [None] * nb, 0

    def evaluate_finish(space_, base_idx, u, res=None):
        return plan_limits(charge_plan(space_, base_idx, u1[base_idx], u, main_from=plan)), None

    def finish_field(space_, base_idx, u):
        sub, _ = expand_candidates(space_, base_idx, u)
        return bank_points(sub, job, soc[base_idx].ravel())["shunt_field_current_a"]

    advice, n = option_advice(space, evaluate_finish, u2, limits, finish_field, scan=4, steps=10,
                              refine="root")
    return [a if np.isfinite(u2[i]) else None for i, a in enumerate(advice)], n


def evaluate(space, base_idx, u, res=None):
    """Limits and figures of battery candidates ``(base, main-charge control)``: their plans over the envelope.

    The finish's field follows from the plan's rule for each main-charge field.
    """
    plan = charge_plan(space, np.asarray(base_idx, int), np.asarray(u, float))
    lim, figs, _ = plan_figures(plan)
    return lim, figs


def evaluate_limits(space, base_idx, u, res=None):
    """The limits of :func:`evaluate` alone (the figures are None): what a band's margins need."""
    return plan_limits(charge_plan(space, np.asarray(base_idx, int), np.asarray(u, float))), None


def start_setting_field(space, base_idx, u):
    """Field current [A] at the start of charge, where the attendant sets the field, at every corner.

    The operating point against the bank on charge at the starting state of
    charge (the cell model of :func:`bank_points`, as the plan's first node
    and the charge run have it), so the reading is what the field ammeter
    shows at switch-on.
    """
    b = space.profile.battery
    sub, _ = expand_candidates(space, base_idx, u)
    return bank_points(sub, b, np.full(sub.n, b.state_of_charge[0]))["shunt_field_current_a"]


def objective(figures):
    """The battery job's objective per candidate: hours to full at the setting (smaller is better; NaN unknown)."""
    return np.asarray(figures["hours_to_full"], float)


def setting_space(machine, profile, setting):
    """The search space of one setting: its base over the profile's envelope corners plus its own
    speed and winding temperature (the setting's own condition is the nominal corner).

    Returns
    -------
    (Space, float)
        The space and the setting's control value.
    """
    if profile.drive.coupled:
        # an engine or a motor: the setting's speed is the drive's no-load speed; loaded, it falls
        setting = replace(setting, speed_rpm=profile.drive.generator_speeds_rpm()[0])
    st = check_setting(machine, setting)
    conn = st.connection
    control = "field-current" if st.field_current_a is not None else control_kind(machine, conn)
    if conn == "series":
        control, u = "none", np.nan
    elif control == "field-current":
        u = st.field_current_a if st.field_current_a is not None else 0.0
    else:
        u = st.rheostat_ohm or 0.0
    base = (conn, float(st.series_turns or 0.0), st.diverter_ohm, control)
    corners, _ = envelope_corners(machine, profile)
    own = (float(st.speed_rpm), float(st.winding_temperature_c))
    if own not in corners:
        corners = corners + [own]
    settings = []
    for sp, tc in corners:
        kw = {"field_current_a": 0.0} if control == "field-current" else {}
        settings.append(Setting(conn, series_turns=base[1] if conn in USES_SERIES else None, diverter_ohm=base[2],
                                speed_rpm=sp, winding_temperature_c=tc, **kw))
    space = Space(machine, profile, [base], corners, own, build_circuit(machine, settings, profile.drive))
    return space, float(u)


def setting_plan(machine, profile, setting, finish_setting=None):
    """The plan of one setting (its main charge) over the envelope and its own condition.

    Parameters
    ----------
    finish_setting : Setting, optional
        The finish's setting (the search's plan); default derived by the plan's rule.

    Returns
    -------
    Plan
    """
    space, u1 = setting_space(machine, profile, setting)
    u2 = None
    if finish_setting is not None:
        fs = check_setting(machine, finish_setting)
        u2 = [fs.field_current_a if space.bases[0][3] == "field-current" else
              (np.nan if space.bases[0][3] == "none" else (fs.rheostat_ohm or 0.0))]
    return charge_plan(space, np.zeros(1, int), np.array([u1]), u2)


# ===========================================================================
# cautions
# ===========================================================================

_IEC_VENT_BASIS = ("IEC 62485-2 ventilation formula Q = 0.05 n Igas C 1e-3 and opening A = 28 Q (seen; stationary "
                   "batteries, and IEC 62485-3 for traction batteries uses the same formula, recalled); gas "
                   "current from the larger of the standard's table and the plan's own gas current x fg x fs")


def _fig(f, key):
    v = f.get(key)
    return None if v is None or not math.isfinite(v) else float(v)


def option_cautions(machine, profile, setting, f):
    """Battery cautions of one setting (the plan's first stage) from its figures ``f``."""
    out = []
    conn = setting.connection
    turns = setting.series_turns or 0.0
    if conn == "series" or (conn.endswith("cumulative") and turns > 0):
        out.append(caution("battery-series-back-current", "stop",
                           "Series turns in circuit with a battery: when the machine slows, the battery drives current "
                           "back through the series field, which weakens or reverses the field and can reverse the "
                           "machine's polarity onto the battery. Use a shunt or separately excited connection, "
                           "without series turns or with them differential (a back current then strengthens the "
                           "field instead of reversing it).",
                           "textbook rule for charging generators (Theraja Vol II ch. 28, from memory); common practice",
                           connection=conn, series_turns=turns))
    if profile is None:
        # a battery load given on the command line: no bank data for the cut-out figures
        out.append(caution("battery-reverse-current", "warn",
                           "Fit a reverse-current cut-out (or a blocking diode) that closes a little above the "
                           "battery's voltage and opens on a small reverse current: if the machine slows or stops, "
                           "the battery drives it as a motor and discharges into it.",
                           "common practice for DC charging sets (reverse-current relay; classic dynamo practice, "
                           "from memory)"))
        return out
    b = profile.battery
    chem = chemistry(b.chemistry)
    close_v = cutout_closing_voltage_v(b)
    cold, hot, back = _fig(f, "cut_in_speed_cold_rpm"), _fig(f, "cut_in_speed_hot_rpm"), _fig(f, "standstill_backfeed_current_a")
    cut = ""
    if cold is not None or hot is not None:
        cut = (f" The machine reaches the closing voltage at about {cold or float('nan'):.0f} rpm with cold windings "
               f"and {hot or float('nan'):.0f} rpm hot; below that speed the cut-out must stay open.")
    if back is not None:
        cut += (f" With no cut-out a full bank drives about {back:.0f} A back into the machine at standstill "
                "(cold windings).")
    gap = cutout_closing_margin_volts_per_cell(b)
    surge = cutout_closing_surge_a(machine, b)
    if gap > CUTOUT_FAR_V_PER_CELL:
        # the difference between the machine and an emptier bank at the moment of closing
        cut += (f" The job's closing voltage is {1e3 * gap:.0f} mV per cell above the full bank's rest voltage "
                f"(common practice: about {1e3 * CUTOUT_MARGIN_V_PER_CELL:.0f} mV): at closing onto the bank at "
                f"{100 * b.state_of_charge[0]:.0f} % charge the difference drives a surge of up to about {surge:.0f} A "
                "until the field settles; set it lower.")
    elif gap < CUTOUT_MARGIN_V_PER_CELL / 2:
        # a relay's own tolerance and a small speed dip are of this size: it closes and opens in turn
        cut += (f" The job's closing voltage is only {1e3 * gap:.0f} mV per cell above the bank's rest voltage at "
                f"full charge (common practice: about {1e3 * CUTOUT_MARGIN_V_PER_CELL:.0f} mV): a cut-out set so "
                "close can close on a full bank with next to no charging current and open and close in turn "
                "(chatter) as the speed wanders; set it higher.")
    out.append(caution("battery-reverse-current", "warn",
                       f"Fit a reverse-current cut-out (or a blocking diode) set to close at {close_v:.1f} V "
                       f"({cutout_closing_volts_per_cell(b):.2f} V per cell) and to open on a small reverse current: "
                       f"if the machine slows or stops, the battery drives it as a motor and discharges into it."
                       + cut,
                       "common practice for DC charging sets (reverse-current relay; classic dynamo practice, from "
                       "memory); standstill current from the circuit equation at zero speed",
                       cutout_closing_voltage_v=close_v, cut_in_speed_cold_rpm=cold, cut_in_speed_hot_rpm=hot,
                       standstill_backfeed_current_a=back))
    vi = _fig(f, "idle_no_load_voltage_v")
    if vi is not None and profile.drive.idle_speed_rpm is not None and vi < close_v:
        out.append(caution("battery-engine-idle", "warn",
                           f"At the engine's idle the machine gives about {vi:.0f} V, below the cut-out's closing "
                           f"{close_v:.1f} V: no charging current flows at idle, so an automatic idle that wakes on "
                           "load never wakes and the cut-out never closes. Switch the automatic idle off for the whole "
                           "charge and run up to governed speed before the cut-out can close; if the engine drops "
                           "to idle during the charge, the cut-out must open.",
                           "engine idle from the profile; cut-out closing voltage (common practice for engine-driven "
                           "charging sets)", idle_no_load_voltage_v=vi, cutout_closing_voltage_v=close_v))
    why = ("its field leads or the exciter's may be connected the wrong way round" if conn.startswith("separate")
           else "a self-excited machine can build up reversed")
    out.append(caution("battery-polarity", "note",
                       f"Check the machine's polarity with a voltmeter before closing onto the battery: {why}.",
                       "common practice"))
    q, a, ig = _fig(f, "ventilation_m3_per_h"), _fig(f, "ventilation_opening_cm2"), _fig(f, "gas_current_ma_per_ah")
    if q is not None:
        if ig is not None and ig > chem.gas_current_boost_ma_per_ah * (1 + 1e-9):
            who = VENTILATION_GOVERNORS["plan-gas-current"]
        elif ig is not None and ig > chem.gas_current_float_ma_per_ah * (1 + 1e-9):
            who = VENTILATION_GOVERNORS["table-boost"]
        else:
            who = VENTILATION_GOVERNORS["table-float"]
        out.append(caution("battery-ventilation", "warn",
                           f"Ventilate the battery room for this charge: at least {q:.3g} m3/h of air (natural "
                           f"ventilation: an inlet and an outlet of {a:.0f} cm2 each), from a gas current of "
                           f"{ig:.3g} mA/Ah, set by {who}. No smoking, flames or sparks near the cells.",
                           _IEC_VENT_BASIS, ventilation_m3_per_h=q, opening_cm2=a, gas_current_ma_per_ah=ig))
    ev, gv = _fig(f, "highest_volts_per_cell"), _fig(f, "gassing_volts_per_cell")
    if ev is not None and gv is not None and ev > gv:
        out.append(caution("battery-gassing", "warn",
                           f"The charge goes up to {ev:.3f} V per cell (over the speed and temperature range), above "
                           f"the gassing voltage {gv:.3f} V: the cells "
                           "give off hydrogen and oxygen while they finish. Keep the ventilation running until an hour "
                           "after the charge, and do not make or break battery connections under load.",
                           "IEC 62485-2 (seen); gassing voltage from the chemistry table",
                           highest_volts_per_cell=ev, gassing_volts_per_cell=gv))
    # the job's limits, where a setting (given by hand, or a near miss) breaks them
    starts = [v for v in (_fig(f, k) for k in ("start_charge_current_a", "start_charge_current_cold_a",
                                                "start_charge_current_hot_a")) if v is not None]
    if starts and min(starts) < 0:
        out.append(caution("battery-back-feed", "stop",
                           f"At the start of charge the bank drives {-min(starts):.3g} A back into the machine: its "
                           "voltage is below the bank's at this setting, so the bank discharges and the machine runs "
                           "as a motor. Do not close onto the bank; take a stronger field, if the machine has one, or another "
                           "setting.",
                           "circuit model (the bank's curve against the machine's); reverse-current practice "
                           "(common practice)", start_charge_current_a=min(starts)))
    i0 = _fig(f, "start_charge_current_highest_a")
    if i0 is not None and i0 > b.max_charge_current_a * (1 + 1e-9):
        out.append(caution("battery-start-current", "warn",
                           f"This setting starts the charge at up to {i0:.3g} A, above the job's highest charging "
                           f"current {b.max_charge_current_a:g} A: weaken the field until the ammeter reads no more.",
                           "the job's max_charge_current_a (the battery maker's or the site's figure)",
                           start_charge_current_a=i0, max_charge_current_a=b.max_charge_current_a))
    il = _fig(f, "main_charge_current_lowest_a")
    top_up = starts_above_handover(b)
    if top_up:
        pct = 100 * b.state_of_charge[0]
        out.append(caution("battery-top-up", "note",
                           f"At {pct:.3g} % charge the cells are already at the hand-over voltage "
                           f"{handover_volts_per_cell(b):.3f} V per cell at the job's lowest main-charge current "
                           f"{b.min_charge_current_a:g} A: there is no main charge. The whole charge runs on the "
                           f"finish's field, at most the finishing current {finishing_current_a(b):.3g} A.",
                           "two-rate charging of vented banks (common practice); the cell model at the starting "
                           "state of charge"))
    backfeeds = il is not None and il < 0  # the bank drives the machine: its stop says so, not "drags on"
    if b.min_charge_current_a > 0 and not top_up and not backfeeds and (
            il is None or il < b.min_charge_current_a * (1 - 1e-9)):
        out.append(caution("battery-main-current-low", "warn",
                           f"The main charge falls to {'no current' if il is None else f'{il:.3g} A'} before the "
                           f"hand-over, below the job's lowest {b.min_charge_current_a:g} A: the charge drags on.",
                           "the job's min_charge_current_a", main_charge_current_a=il,
                           min_charge_current_a=b.min_charge_current_a))
    ifin = _fig(f, "finish_current_highest_a")
    if ifin is not None and ifin > finishing_current_a(b) * (1 + 1e-9):
        out.append(caution("battery-finish-current", "warn",
                           f"Above the hand-over voltage this setting still drives up to {ifin:.3g} A, more than the "
                           f"finishing current {finishing_current_a(b):.3g} A: the cells gas hard and heat.",
                           "finishing rate about C/20 for vented lead-acid (common practice, from memory); the "
                           "job's finishing_rate_per_h", finish_current_a=ifin,
                           finishing_current_a=finishing_current_a(b)))
    vmax = float(highest_volts_per_cell(chem, b.temperature_c))
    if ev is not None and ev > vmax * (1 + 1e-9):
        out.append(caution("battery-cell-voltage", "warn",
                           f"The cells reach {ev:.3f} V, above the chemistry's highest {vmax:.3f} V per cell at "
                           f"{b.temperature_c:g} degC: stop the charge or weaken the field before that.",
                           "highest cell voltage of the chemistry table (sources there)",
                           highest_volts_per_cell=ev, limit_volts_per_cell=vmax))
    h = _fig(f, "hours_to_full_longest")
    if h is None or h > b.target_hours * (1 + 1e-9):
        words = "never reaches" if h is None else f"takes up to {h:.4g} h to reach" if h < 1e4 else \
            f"takes up to {h:.0f} h to reach"
        out.append(caution("battery-hours", "warn",
                           f"This plan {words} the end state of charge {100 * b.state_of_charge[1]:.0f} %, against "
                           f"the job's {b.target_hours:g} h.", "the job's target_hours", hours_to_full=h,
                           target_hours=b.target_hours))
    return out


#: Battery temperature [degC] above which a charge is not started, and above which charging stops:
#: makers' instructions for vented lead-acid and NiCd (recalled, about 45 and 55 degC; from memory);
#: valve-regulated cells risk thermal runaway from lower (IEEE 1188 practice, from memory).
CHARGE_START_MAX_TEMPERATURE_C = {"lead-acid-vented": 45.0, "lead-acid-valve-regulated": 40.0,
                                  "nickel-cadmium-vented": 45.0}
CHARGE_STOP_TEMPERATURE_C = {"lead-acid-vented": 55.0, "lead-acid-valve-regulated": 50.0,
                             "nickel-cadmium-vented": 55.0}

#: What splashes from the cells, and what to keep at hand, per chemistry (common practice).
ELECTROLYTE_WORDS = {
    "lead-acid-vented": "wear eye protection and keep water at hand for acid splashes (dilute sulphuric acid)",
    "lead-acid-valve-regulated": "wear eye protection and keep water at hand: a damaged cell leaks sulphuric acid",
    "nickel-cadmium-vented": ("wear eye protection and keep eye-wash water at hand: the electrolyte is alkaline "
                              "(potassium hydroxide) and burns the eyes; keep its tools and hydrometer apart from "
                              "any lead-acid battery's"),
}


def profile_cautions(machine, profile):
    """Cautions of the battery job as a whole, whatever the setting."""
    b = profile.battery
    out = [caution("battery-hydrogen", "warn",
                   "Charging releases hydrogen and oxygen: ventilate the battery room (the airflow each setting needs "
                   f"is with its cautions), no smoking, flames or sparks near the cells, {ELECTROLYTE_WORDS[b.chemistry]}.",
                   "IEC 62485-2 (seen); common practice")]
    start, stop = CHARGE_START_MAX_TEMPERATURE_C[b.chemistry], CHARGE_STOP_TEMPERATURE_C[b.chemistry]
    basis = ("battery makers' instructions (recalled, not checked against a maker's text: about 45 degC to start "
             "and 55 degC to stop for vented cells, less for valve-regulated); the temperature rise during the "
             "charge is not modelled")
    if b.temperature_c > stop:
        out.append(caution("battery-temperature", "stop",
                           f"The bank is at {b.temperature_c:g} °C, above {stop:g} °C: do not charge it until it has "
                           "cooled. A hot bank takes more current at the same voltage, gasses harder and heats "
                           "further" + (" (thermal runaway in valve-regulated cells)"
                                        if b.chemistry == "lead-acid-valve-regulated" else "") + ".",
                           basis, temperature_c=b.temperature_c, stop_temperature_c=stop))
    elif b.temperature_c > start:
        out.append(caution("battery-temperature", "warn",
                           f"The bank is at {b.temperature_c:g} °C, above {start:g} °C: let it cool before starting "
                           f"the charge, and stop if it reaches {stop:g} °C. The charge warms the cells further, "
                           "which these figures do not include.",
                           basis, temperature_c=b.temperature_c, start_max_temperature_c=start,
                           stop_temperature_c=stop))
    out += cold_bank_cautions(b)
    out += charge_rate_cautions(b)
    out += target_time_cautions(b)
    out += deep_discharge_cautions(b)
    out += battery_protection_cautions(b)
    out += warm_nickel_cadmium_cautions(b)
    return out


#: State of charge at or below which the bank counts as deeply discharged (common practice: a bank
#: run to its end voltage is at about 10 % or less).
DEEP_DISCHARGE_STATE_OF_CHARGE = 0.1


def deep_discharge_cautions(job):
    """A note where the charge starts from a deeply discharged bank: cells to check first, charge at once,
    and an equalising charge after (common battery-shop practice)."""
    s0 = job.state_of_charge[0]
    if s0 > DEEP_DISCHARGE_STATE_OF_CHARGE:
        return []
    lead = job.chemistry.startswith("lead")
    return [caution("battery-deep-discharge", "note",
                    f"The bank starts at {100 * s0:.0f} % charge: before charging, read every cell's voltage"
                    + (" and gravity" if job.chemistry == "lead-acid-vented" else "")
                    + ": a cell well below the others may be reversed or shorted and needs the maker's attention. "
                    + ("Charge a flat lead-acid bank at once (left flat it sulphates) and follow with an "
                       "equalising charge as the maker asks." if lead else
                       "Follow the maker's instructions for a fully discharged bank."),
                    "battery-shop practice (common practice)", state_of_charge_start=s0)]


def least_hours_to_full(job):
    """A lower bound of the hours to full [h]: the charge to put back, ``C (s_end - s_start)``, at the job's
    highest charging current the whole time (closed form; the finish's lower current and the charge
    lost to gas only add to it)."""
    return job.capacity_ah * (job.state_of_charge[1] - job.state_of_charge[0]) / job.max_charge_current_a


def target_time_cautions(job):
    """Where the job's target hours are shorter than the battery's own highest current allows: no setting
    of any machine meets them, and the search's near misses would otherwise look like the machine's fault."""
    least = least_hours_to_full(job)
    if job.target_hours >= least:
        return []
    ah = job.capacity_ah * (job.state_of_charge[1] - job.state_of_charge[0])
    return [caution("battery-target-too-short", "warn",
                    f"The target of {job.target_hours:g} h cannot be met by any setting: {ah:.0f} Ah to put back at "
                    f"the bank's highest charging current of {job.max_charge_current_a:g} A take at least "
                    f"{least:.1f} h, before the finish's lower current and the charge lost to gas. Allow more time, "
                    "or a higher charging current if the battery maker allows it.",
                    "the job's capacity, state of charge and highest charging current (closed form: Ah / A)",
                    target_hours=job.target_hours, least_hours=least)]


#: NiCd bank temperature [degC] above which the charge efficiency falls enough to matter: makers ask a
#: larger charge input above about 35 degC (NiCd makers' charging notes, recalled, not checked).
NICD_WARM_C = 35.0


def warm_nickel_cadmium_cautions(job):
    """A note where a NiCd bank is warm: the model's temperature shift makes it charge a little faster,
    while the cells' charge efficiency falls (oxygen at the positive plate starts earlier)."""
    if not job.chemistry.startswith("nickel") or job.temperature_c <= NICD_WARM_C:
        return []
    return [caution("battery-warm-nicd", "note",
                    f"The bank is at {job.temperature_c:g} °C: a warm NiCd cell turns more of its charge into gas, "
                    "so the hours to full and the Ah factor here are optimistic; makers ask a larger charge input "
                    "(longer finish) when warm: follow the battery maker's instructions.",
                    "NiCd makers' charging notes (recalled, not checked against a maker's text)",
                    temperature_c=job.temperature_c)]


def prospective_short_circuit_current_a(job):
    """Current a full bank drives into a short at its own terminals [A]: its rest voltage at the top of
    the state-of-charge range over its internal resistance (closed form; the upper bound a fuse must break)."""
    return cells_rest_voltage_v(job) / job.internal_resistance_ohm


def cells_rest_voltage_v(job, soc=None):
    """The bank's rest voltage [V] at ``soc`` (default the top of the job's state-of-charge range)."""
    chem = chemistry(job.chemistry)
    soc = job.state_of_charge[1] if soc is None else soc
    return job.cells * float(open_circuit_voltage_per_cell(chem, soc, job.open_circuit_voltage_per_cell_v))


def battery_protection_cautions(job):
    """The bank, not the machine, gives the largest fault current in a charging plant: a fuse or DC breaker
    that breaks it and an isolating switch, at the battery end of its leads."""
    isc, v = prospective_short_circuit_current_a(job), cells_rest_voltage_v(job)
    # the device must also withstand what the circuit reaches on charge, not the rest voltage alone
    v_top = job.cells * highest_volts_per_cell(job.chemistry, job.temperature_c)
    size = f"{isc / 1e3:.2g} kA" if isc >= 1e3 else f"{isc:.3g} A"
    return [caution("battery-protection", "warn",
                    f"Fit a fuse or DC breaker that breaks the bank's prospective short-circuit current (about {size} "
                    f"at {v:.0f} V DC at its terminals), rated for at least {v_top:.0f} V DC (the bank's highest on "
                    "charge; more where it also sees the machine's no-load voltage), and an isolating switch, in the "
                    "battery leads as near the battery as you can: a cut-out does not break a fault. Open the "
                    "isolator for the no-load check.",
                    "protection and isolation of battery circuits (IEC 62485-2, recalled, not checked against the "
                    "text; common practice); prospective current = rest voltage / internal resistance (closed form)",
                    prospective_short_circuit_current_a=isc, bank_rest_voltage_v=v, rated_voltage_at_least_v=v_top)]


#: Freezing point of lead-acid electrolyte [degC] by specific gravity: the handbook table of dilute
#: sulphuric acid (recalled, not checked against the text: 1.10 about -8, 1.15 about -15, 1.20 about -27,
#: 1.25 about -52, 1.28 about -69 degC).
LEAD_ACID_FREEZING_POINT_C = ((1.00, 0.0), (1.05, -3.0), (1.10, -8.0), (1.15, -15.0), (1.20, -27.0),
                              (1.25, -52.0), (1.28, -69.0), (1.30, -70.0))
#: Rest volts per cell over specific gravity for lead-acid (open-circuit volts = SG + 0.84; common practice).
LEAD_ACID_REST_OFFSET_V = 0.84
#: Freezing point of a vented NiCd cell's standard potassium hydroxide electrolyte (SG about 1.19) [degC]
#: (makers' data, recalled, not checked against a maker's text); it does not change with the charge.
NICD_FREEZING_POINT_C = -25.0
#: Below this bank temperature [degC] a charge is slow and the plan optimistic: the model's temperature
#: enters only through the voltages, not the lower charge acceptance of cold cells (common practice).
COLD_BANK_C = 5.0


def electrolyte_freezing_point_c(job):
    """Freezing point of the bank's electrolyte at the start of charge [degC], and the specific gravity it
    rests on (None for NiCd, whose gravity does not follow the charge).

    Lead-acid: the gravity from the rest voltage at the starting state of
    charge (SG = V - 0.84), then the handbook table, linear between rows.
    """
    chem = chemistry(job.chemistry)
    if job.chemistry.startswith("nickel"):
        return NICD_FREEZING_POINT_C, None
    sg = float(open_circuit_voltage_per_cell(chem, job.state_of_charge[0], job.open_circuit_voltage_per_cell_v)) \
        - LEAD_ACID_REST_OFFSET_V
    g, t = zip(*LEAD_ACID_FREEZING_POINT_C)
    return float(np.interp(sg, g, t)), sg


def cold_bank_cautions(job):
    """A ``stop`` where the bank may be frozen at the start of charge (its temperature at or below the
    electrolyte's freezing point), a ``warn`` where it is cold (below ``COLD_BANK_C``)."""
    temp = job.temperature_c
    if temp >= COLD_BANK_C:
        return []
    freeze, sg = electrolyte_freezing_point_c(job)
    vho = handover_volts_per_cell(job)
    at = (f"the electrolyte at {100 * job.state_of_charge[0]:.0f} % charge (gravity about {sg:.2f}) freezes at "
          f"about {freeze:.0f} °C" if sg is not None else
          f"a standard potassium hydroxide electrolyte freezes at about {freeze:.0f} °C")
    basis = ("freezing point of the electrolyte: handbook table of dilute sulphuric acid by gravity, gravity = "
             "rest voltage - 0.84 (recalled, not checked against the text)" if sg is not None else
             "NiCd makers' electrolyte data (recalled, not checked against a maker's text)") + \
        "; cold cells take charge slowly (common practice)"
    if temp <= freeze:
        return [caution("battery-frozen", "stop",
                        f"The bank is at {temp:g} °C and {at}: it may be frozen. Do not charge a frozen cell (it can "
                        "burst or gas violently): warm the bank above about 5 °C and check that the electrolyte "
                        "is liquid first.", basis, temperature_c=temp, freezing_point_c=freeze)]
    return [caution("battery-cold", "warn",
                    f"The bank is at {temp:g} °C: cold cells take charge slowly, so the hours here are optimistic, "
                    f"and the temperature correction raises the hand-over to {vho:.3f} V per cell (many chargers "
                    "stop correcting below about 0 °C: check the battery maker's limit); "
                    f"{at}. Warm the bank if you can.", basis, temperature_c=temp,
                    freezing_point_c=freeze, handover_volts_per_cell=vho)]


#: Highest charge rate a job may ask, as multiples of the chemistry's normal rate: a warning past
#: ``warn`` (vented lead-acid at C/10 normal: past C/3.3, about the makers' highest start rate), a stop
#: past ``stop`` (past 1 C: the bank overheats and gasses, or the capacity is a slip) (common practice,
#: recalled, not checked against a maker's text).
CHARGE_RATE_LIMITS = {"warn": 3.0, "stop": 10.0}


def charge_rate_cautions(job):
    """Cautions where the job's highest charging current is many times the bank's normal charge rate:
    the likeliest cause is a slip in ``capacity_ah`` or ``max_charge_current_a``."""
    chem = chemistry(job.chemistry)
    normal = chem.reference_rate_per_h * job.capacity_ah
    ratio = job.max_charge_current_a / normal
    if ratio <= CHARGE_RATE_LIMITS["warn"]:
        return []
    rate = job.max_charge_current_a / job.capacity_ah
    sev = "stop" if ratio > CHARGE_RATE_LIMITS["stop"] else "warn"
    words = (f"The highest charging current {job.max_charge_current_a:g} A is {rate:.2g} C for a "
             f"{job.capacity_ah:g} Ah bank, {ratio:.3g} times its normal rate of {normal:.3g} A "
             f"(C/{1 / chem.reference_rate_per_h:g}): ")
    words += ("the bank overheats and gasses at such a current. Check capacity_ah and max_charge_current_a "
              "against the battery's plate." if sev == "stop" else
              "above the makers' usual highest start rate. Check it against the battery maker's instructions.")
    return [caution("battery-charge-rate", sev, words,
                    f"{chem.basis.get('reference_rate_per_h', 'normal charge rate')}; the limits are common practice "
                    "(recalled, not checked against a maker's text)",
                    max_charge_current_a=job.max_charge_current_a, capacity_ah=job.capacity_ah)]
