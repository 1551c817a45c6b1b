"""Battery charging: chemistries, the charging-voltage model, the job's figures, limits and cautions.

The chemistry table keeps every value beside its source. Marks: "seen" =
read in a public copy of the source; "from memory" = recalled, not checked
against a copy; "common practice" = a trade rule of thumb; "model choice" =
a shape parameter of our own model, fitted by eye.
"""

from dataclasses import dataclass, field

import numpy as np

from ..cautions import caution
from ..circuit import no_load_voltages, normal_points
from ..envelope import (COARSE, FINE, critical_resistance_ratios, expand_candidates, optimise_control,
                        worst_over_corners)
from ..errors import InputError
from ..powerflow import load_point_figures
from ..validate import MAX_CURRENT_A, MAX_OHM, named_entry, read_pair, table_entry

#: The profile table this job reads.
TABLE = "battery"

_IEC_62485_2 = "IEC 62485-2, table of charging voltages and gas-producing currents (seen)"
_IEC_62485_2_VENT = "IEC 62485-2, ventilation airflow formula (seen)"


@dataclass(frozen=True)
class Chemistry:
    """Per-cell data of one battery chemistry (voltages [V/cell] at 25 degC).

    The charging-voltage model (see :func:`charging_voltage_per_cell`) is
    calibrated to two points at ``reference_rate_per_h``:
    ``mid_charge_voltage_v`` at half charge and ``end_of_charge_voltage_v``
    at full charge.
    """

    name: str
    float_voltage_v: float
    boost_voltage_v: float
    gassing_voltage_v: float
    end_of_charge_voltage_v: float
    mid_charge_voltage_v: float
    reference_rate_per_h: float
    max_cell_voltage_v: float
    temperature_coefficient_v_per_c: float
    open_circuit_voltage_empty_v: float
    open_circuit_voltage_full_v: float
    resistance_ohm_ah: float
    charge_efficiency: float
    gas_current_float_ma_per_ah: float
    gas_current_boost_ma_per_ah: float
    capacity_rate: str
    overvoltage_shape: float
    rate_knee_per_h: float
    basis: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def cell_resistance_at_reference_v(self):
        """Resistive drop per cell at the reference rate [V]."""
        return self.reference_rate_per_h * self.resistance_ohm_ah

    @property
    def overvoltage_coefficients_v(self):
        """``(b, K)`` [V] of the overvoltage ``b + K s / (1 - s + delta)`` at the reference rate.

        Solved from the two calibration points with the table's open-circuit
        voltages.
        """
        d = self.overvoltage_shape
        e0, e1 = self.open_circuit_voltage_empty_v, self.open_circuit_voltage_full_v
        ir = self.cell_resistance_at_reference_v
        eta_end = self.end_of_charge_voltage_v - e1 - ir
        eta_mid = self.mid_charge_voltage_v - 0.5 * (e0 + e1) - ir
        g_end, g_mid = 1.0 / d, 0.5 / (0.5 + d)
        k = (eta_end - eta_mid) / (g_end - g_mid)
        return eta_end - k * g_end, k


CHEMISTRIES = {
    "lead-acid-vented": table_entry(Chemistry, "lead-acid-vented", {
        "float_voltage_v": (2.23, _IEC_62485_2),
        "boost_voltage_v": (2.40, _IEC_62485_2),
        "gassing_voltage_v": (2.37, "gassing sets in near 2.35-2.40 V/cell at 25 degC (from memory; common practice); middle taken"),
        "end_of_charge_voltage_v": (2.55, "finishing voltage at the 10-hour rate, 2.5-2.6 V/cell on textbook charging curves (from memory)"),
        "mid_charge_voltage_v": (2.18, "flat middle of the constant-current charging curve at the 10-hour rate, 2.15-2.25 V/cell (from memory)"),
        "reference_rate_per_h": (0.10, "normal finishing charge rate about C/10 (from memory; common practice)"),
        "max_cell_voltage_v": (2.70, "highest cell voltage seen on an overcharge at the finishing rate (from memory)"),
        "temperature_coefficient_v_per_c": (-0.004, "lead-acid compensation -3 to -5 mV/degC/cell (common practice); middle taken"),
        "open_circuit_voltage_empty_v": (1.98, "open-circuit volts = specific gravity + 0.84, SG 1.14 discharged (common practice, from memory)"),
        "open_circuit_voltage_full_v": (2.12, "open-circuit volts = specific gravity + 0.84, SG 1.28 charged (common practice, from memory)"),
        "resistance_ohm_ah": (0.15, "cell resistance x C10 capacity, order of magnitude of makers' data (from memory)"),
        "charge_efficiency": (0.90, "recharge 110-115 % of the ampere-hours drawn (common practice)"),
        "gas_current_float_ma_per_ah": (5.0, _IEC_62485_2),
        "gas_current_boost_ma_per_ah": (20.0, _IEC_62485_2),
        "capacity_rate": ("C10", _IEC_62485_2_VENT),
        "overvoltage_shape": (0.08, "model choice: steepness of the rise near full charge, fitted by eye to textbook charging curves"),
        "rate_knee_per_h": (0.01, "model choice: overvoltage logarithmic in current above about C/100 (Tafel behaviour)"),
    }),
    "lead-acid-valve-regulated": table_entry(Chemistry, "lead-acid-valve-regulated", {
        "float_voltage_v": (2.27, _IEC_62485_2),
        "boost_voltage_v": (2.40, _IEC_62485_2),
        "gassing_voltage_v": (2.35, "oxygen evolution and venting risk above about 2.35 V/cell at 25 degC (from memory)"),
        "end_of_charge_voltage_v": (2.45, "finishing voltage at the 10-hour rate, lower than vented cells because of oxygen recombination (from memory)"),
        "mid_charge_voltage_v": (2.20, "middle of the constant-current charging curve at the 10-hour rate (from memory)"),
        "reference_rate_per_h": (0.10, "charge rate about C/10 (from memory; common practice)"),
        "max_cell_voltage_v": (2.50, "makers' limit for cyclic charging 2.45-2.50 V/cell (from memory)"),
        "temperature_coefficient_v_per_c": (-0.003, "-3 mV/degC/cell, manufacturers' practice that IEEE 1188 defers to"),
        "open_circuit_voltage_empty_v": (1.99, "open-circuit volts = specific gravity + 0.84, SG about 1.15 discharged (common practice, from memory)"),
        "open_circuit_voltage_full_v": (2.14, "open-circuit volts = specific gravity + 0.84, SG about 1.30 charged (common practice, from memory)"),
        "resistance_ohm_ah": (0.10, "cell resistance x C10 capacity, order of magnitude of makers' data (from memory)"),
        "charge_efficiency": (0.95, "recharge 105-110 % of the ampere-hours drawn (common practice)"),
        "gas_current_float_ma_per_ah": (1.0, _IEC_62485_2),
        "gas_current_boost_ma_per_ah": (8.0, _IEC_62485_2),
        "capacity_rate": ("C10", _IEC_62485_2_VENT),
        "overvoltage_shape": (0.08, "model choice: steepness of the rise near full charge, fitted by eye to textbook charging curves"),
        "rate_knee_per_h": (0.01, "model choice: overvoltage logarithmic in current above about C/100 (Tafel behaviour)"),
    }),
    "nickel-cadmium-vented": table_entry(Chemistry, "nickel-cadmium-vented", {
        "float_voltage_v": (1.40, _IEC_62485_2),
        "boost_voltage_v": (1.55, _IEC_62485_2),
        "gassing_voltage_v": (1.45, "gassing sets in near 1.45 V/cell at 25 degC (from memory)"),
        "end_of_charge_voltage_v": (1.65, "finishing voltage at the 5-hour rate, 1.6-1.7 V/cell (from memory)"),
        "mid_charge_voltage_v": (1.43, "plateau of the constant-current charging curve at the 5-hour rate, 1.40-1.45 V/cell (from memory)"),
        "reference_rate_per_h": (0.20, "normal charge rate C/5 (from memory; common practice)"),
        "max_cell_voltage_v": (1.70, "no cell above about 1.7 V (from memory)"),
        "temperature_coefficient_v_per_c": (-0.003, "vented NiCd -3 mV/K/cell (seen)"),
        "open_circuit_voltage_empty_v": (1.25, "open-circuit voltage nearly flat, about 1.25-1.30 V/cell (from memory)"),
        "open_circuit_voltage_full_v": (1.30, "open-circuit voltage nearly flat, about 1.25-1.30 V/cell (from memory)"),
        "resistance_ohm_ah": (0.20, "cell resistance x C5 capacity, order of magnitude of makers' data for pocket-plate cells (from memory)"),
        "charge_efficiency": (0.71, "charge 7 h at C/5, i.e. 140 % of capacity (common practice)"),
        "gas_current_float_ma_per_ah": (5.0, _IEC_62485_2),
        "gas_current_boost_ma_per_ah": (50.0, _IEC_62485_2),
        "capacity_rate": ("C5", _IEC_62485_2_VENT),
        "overvoltage_shape": (0.08, "model choice: steepness of the rise near full charge, fitted by eye to textbook charging curves"),
        "rate_knee_per_h": (0.01, "model choice: overvoltage logarithmic in current above about C/100 (Tafel behaviour)"),
    }),
}

#: Temperature the chemistry voltages refer to [degC]: the reference of the
#: charging voltages and of IEEE 450 / IEEE 1188 practice (from memory).
REFERENCE_TEMPERATURE_C = 25.0


def chemistry(name):
    """The :class:`Chemistry` called ``name``; an InputError lists the valid names."""
    if isinstance(name, Chemistry):
        return name
    return named_entry(CHEMISTRIES, name, "chemistry")


def open_circuit_voltage_range(chem, ocv_range):
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


def rate_factor(chem, rate_per_h):
    r = np.maximum(np.asarray(rate_per_h, float), 0.0)
    return np.log1p(r / chem.rate_knee_per_h) / np.log1p(chem.reference_rate_per_h / chem.rate_knee_per_h)


def charging_voltage_per_cell(chem, soc, rate_per_h, temperature_c=REFERENCE_TEMPERATURE_C,
                              ocv_range=None):
    """Terminal voltage of one cell on charge [V].

    ``V = E(s) + r Rc + f(r) [b + K s / (1 - s + delta) + alpha (T - 25) delta s / (1 - s + delta)]``

    with ``E(s)`` the open-circuit voltage, ``r`` the charge rate (current over
    capacity), ``Rc`` the cell resistance times capacity, ``alpha`` the
    temperature coefficient and ``f(r) = ln(1 + r/r0) / ln(1 + r_ref/r0)`` (1 at
    the reference rate, 0 with no current). ``b`` and ``K`` are solved so that
    the curve passes the table's mid-charge and end-of-charge voltages at the
    reference rate; the temperature term shifts the end-of-charge voltage by
    exactly ``alpha`` per degree at that rate.

    Parameters
    ----------
    chem : Chemistry or str
    soc : array_like
        State of charge 0..1 (held at the nearest end outside).
    rate_per_h : array_like
        Charging current over capacity [1/h] (0.1 = the 10-hour rate); a
        negative rate (discharge) is not modelled and counts as zero.
    temperature_c : array_like, optional
        Electrolyte temperature [degC].
    ocv_range : (float, float), optional
        Open-circuit voltage at empty and full [V/cell]; default the table's.

    Returns
    -------
    ndarray
        [V/cell]

    References
    ----------
    Polarisation term after C. M. Shepherd, "Design of primary and secondary
    cells", J. Electrochem. Soc. 112 (1965) (from memory), regularised so it
    stays finite at full charge.
    """
    chem = chemistry(chem)
    s = np.clip(np.asarray(soc, float), 0.0, 1.0)
    r = np.maximum(np.asarray(rate_per_h, float), 0.0)
    t = np.asarray(temperature_c, float)
    b, k = chem.overvoltage_coefficients_v
    d = chem.overvoltage_shape
    shape = s / (1.0 - s + d)
    eta = b + k * shape + chem.temperature_coefficient_v_per_c * (t - REFERENCE_TEMPERATURE_C) * d * shape
    eta = rate_factor(chem, r) * np.maximum(eta, 0.0)
    return open_circuit_voltage_per_cell(chem, s, ocv_range) + r * chem.resistance_ohm_ah + eta


def charge_voltage_limit_per_cell(chem, temperature_c, limit_at_25=None):
    """Temperature-corrected charging voltage limit of one cell [V].

    Parameters
    ----------
    chem : Chemistry or str
    temperature_c : array_like
        Battery temperature [degC].
    limit_at_25 : float, optional
        Limit at 25 degC [V/cell]; default the chemistry's boost voltage.

    Returns
    -------
    ndarray
        ``limit_at_25 + alpha (T - 25)`` [V/cell].

    References
    ----------
    Boost voltages IEC 62485-2 (seen); -3 mV/degC/cell for valve-regulated
    lead-acid (manufacturers' practice) and vented NiCd (seen).
    """
    chem = chemistry(chem)
    v25 = chem.boost_voltage_v if limit_at_25 is None else float(limit_at_25)
    t = np.asarray(temperature_c, float)
    return v25 + chem.temperature_coefficient_v_per_c * (t - REFERENCE_TEMPERATURE_C)


def bank_resistance_ohm(chem, cells, capacity_ah):
    """Internal resistance of a series string [ohm]: ``cells * Rc / C``."""
    chem = chemistry(chem)
    return np.asarray(cells, float) * chem.resistance_ohm_ah / np.asarray(capacity_ah, float)


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
        Gas-producing current [mA/Ah] for float or boost charge.

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


# ===========================================================================
# the [battery] table
# ===========================================================================

#: Battery: no lower bound on the starting current unless one is asked for.
DEFAULT_MIN_CHARGE_CURRENT_A = 0.0
#: Cable resistance when none is given: the bank sits at the machine's terminals.
DEFAULT_CABLE_RESISTANCE_OHM = 0.0
#: Battery temperature: the reference of the chemistry table's voltages.
DEFAULT_BATTERY_TEMPERATURE_C = REFERENCE_TEMPERATURE_C
#: No-load voltage kept above the bank's full-charge open-circuit voltage (common practice:
#: a few per cent so the set still charges at full speed droop).
NO_LOAD_MARGIN_FRACTION = 0.05
#: A charge still "reaches" its end state of charge if the machine gives at least this
#: share of capacity as current there (C/100; common practice for a finishing current floor).
END_CURRENT_FLOOR_PER_H = 0.01


@dataclass(frozen=True)
class BatteryJob:
    """Charge a battery bank. Field names are the ``[battery]`` keys.

    ``capacity_ah`` is at the chemistry's rating time (``Chemistry.capacity_rate``:
    10 h for lead-acid, 5 h for nickel-cadmium).
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
    charge_voltage_per_cell_v: float


def read_job(t, source):
    """The ``[battery]`` table ``t`` of a profile read from ``source``, checked."""
    name = t.text("chemistry", choices=tuple(CHEMISTRIES))
    chem = CHEMISTRIES[name]
    cells = t.integer("cells", low=1, high=10_000)
    cap = t.number("capacity_ah", low=0, low_open=True, high=1e6)
    soc = read_pair(t, "state_of_charge", source, low=0, high=1, strict=True, names=("start", "end"))
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
    vlim = t.number("charge_voltage_per_cell_v", chem.boost_voltage_v, low=0, low_open=True)
    if vlim > chem.max_cell_voltage_v:
        raise InputError(source, t.key("charge_voltage_per_cell_v"),
                         f"is {vlim:g}; allowed for {name}: at most {chem.max_cell_voltage_v:g} V/cell "
                         f"(the chemistry's highest cell voltage)")
    if vlim <= ocv[1]:
        raise InputError(source, t.key("charge_voltage_per_cell_v"),
                         f"is {vlim:g}; allowed: above the open-circuit voltage at full charge ({ocv[1]:g} V/cell)")
    return BatteryJob(chemistry=name, cells=cells, capacity_ah=cap, state_of_charge=soc,
                      max_charge_current_a=imax, min_charge_current_a=imin, internal_resistance_ohm=rb,
                      cable_resistance_ohm=rc, temperature_c=temp, open_circuit_voltage_per_cell_v=tuple(ocv),
                      charge_voltage_per_cell_v=vlim)


def evaluate(space, base_idx, u, res=COARSE):
    """Limits and figures of battery candidates ``(base, control value)`` over the envelope."""
    m, prof = space.machine, space.profile
    b = prof.battery
    chem = chemistry(b.chemistry)
    n = len(base_idx)
    sub, rows = expand_candidates(space, base_idx, u)
    soc0, soc1 = b.state_of_charge
    ocv = b.open_circuit_voltage_per_cell_v
    e0 = b.cells * float(open_circuit_voltage_per_cell(chem, soc0, ocv))
    e1 = b.cells * float(open_circuit_voltage_per_cell(chem, soc1, ocv))
    r = b.internal_resistance_ohm + b.cable_resistance_ohm
    imax = sub.imax
    start = normal_points(sub, -imax, imax, v_of=lambda t: e0 + r * t, **res)
    i_start = start["load_current_a"]
    cap = b.capacity_ah
    rc_cell = chem.resistance_ohm_ah / cap

    def bank_end(t):
        rate = np.maximum(t, 0.0) / cap
        cell = charging_voltage_per_cell(chem, soc1, rate, b.temperature_c, ocv) - np.maximum(t, 0) * rc_cell
        return b.cells * cell + t * r

    def bank_at(soc):
        def f(t):
            rate = np.maximum(t, 0.0) / cap
            cell = charging_voltage_per_cell(chem, soc, rate, b.temperature_c, ocv) - np.maximum(t, 0) * rc_cell
            return b.cells * cell + t * r
        return f

    # the start current on the charging curve (overvoltage included): what the charge run sees
    start_c = normal_points(sub, np.zeros(sub.n), np.full(sub.n, imax), v_of=bank_at(soc0), **res)
    i_start_c = np.where(start_c["found"], start_c["load_current_a"], 0.0)
    end = normal_points(sub, np.zeros(sub.n), np.full(sub.n, imax), v_of=bank_end, **res)
    i_end = np.where(end["found"], end["load_current_a"], 0.0)
    # at the battery terminals, with the profile's bank resistance (as on the bank line)
    vpc_end = (bank_end(i_end) - i_end * b.cable_resistance_ohm) / b.cells
    vnl = no_load_voltages(sub, res["grid"])
    limit_vpc = float(charge_voltage_limit_per_cell(chem, b.temperature_c, b.charge_voltage_per_cell_v))
    ia_start = start["armature_current_a"]
    nc = space.nc
    lim = {
        "start_current_max": (worst_over_corners(i_start, n, nc, "max"), b.max_charge_current_a, "max", "A"),
        # conservative pair: the open-circuit line (issue rule) gives the higher current, the
        # charging curve the lower; the maximum is checked on the first, the minimum on the second
        "start_current_min": (worst_over_corners(np.fmin(i_start, i_start_c), n, nc, "min"), b.min_charge_current_a, "min", "A"),
        "end_volts_per_cell": (worst_over_corners(vpc_end, n, nc, "max"), limit_vpc, "max", "V"),
        "end_current_floor": (worst_over_corners(i_end, n, nc, "min"), END_CURRENT_FLOOR_PER_H * cap, "min", "A"),
        "no_load_above_bank": (worst_over_corners(vnl, n, nc, "min"), (1 + NO_LOAD_MARGIN_FRACTION) * e1, "min", "V"),
        "armature_current_rating": (worst_over_corners(np.abs(ia_start), n, nc, "max"), m.rated_armature_current_a, "max", "A"),
    }
    q = float(ventilation_airflow_m3_per_h(b.cells, b.capacity_ah, chem.gas_current_boost_ma_per_ah))
    figs = {
        "start_charge_current_a": worst_over_corners(i_start, n, nc, "max"),
        "start_charge_current_min_a": worst_over_corners(i_start, n, nc, "min"),
        "start_charge_current_on_charge_a": worst_over_corners(i_start_c, n, nc, "max"),
        "start_charge_current_on_charge_min_a": worst_over_corners(i_start_c, n, nc, "min"),
        "end_charge_current_a": worst_over_corners(i_end, n, nc, "min"),
        "end_volts_per_cell": worst_over_corners(vpc_end, n, nc, "max"),
        "end_volts_per_cell_limit": np.full(n, limit_vpc),
        "gassing_volts_per_cell": np.full(n, chem.gassing_voltage_v),
        "ventilation_m3_per_h": np.full(n, q),
        "no_load_voltage_min_v": worst_over_corners(vnl, n, nc, "min"),
        "no_load_voltage_max_v": worst_over_corners(vnl, n, nc, "max"),
        "bank_open_circuit_voltage_start_v": np.full(n, e0),
        "bank_open_circuit_voltage_end_v": np.full(n, e1),
        "max_armature_current_a": worst_over_corners(np.abs(ia_start), n, nc, "max"),
        "min_net_mmf_a": worst_over_corners(np.fmin(start["x"], end["x"]), n, nc, "min"),
        "max_net_mmf_a": worst_over_corners(np.fmax(np.abs(start["x"]), np.abs(end["x"])), n, nc, "max"),
        "min_generated_emf_v": worst_over_corners(np.fmin(start["generated_emf_v"], end["generated_emf_v"]), n, nc, "min"),
        "critical_resistance_ratio": critical_resistance_ratios(space, sub, n),
        "converged": worst_over_corners((start["converged"] & end["converged"]).astype(float), n, nc, "min"),
    }
    drive_lim, drive_figs = load_point_figures(space, n, [
        ("start of charge", sub, start["terminal_voltage_v"], i_start),
        ("end of charge", sub, end["terminal_voltage_v"], end["load_current_a"])])
    lim.update(drive_lim)
    figs.update(drive_figs)
    return lim, figs


def solve(space):
    """Best control value of every candidate and its limits and figures (fine solve).

    Returns
    -------
    (u, limits, figures, extras, evaluated)
        ``extras`` is one dict (or None) per candidate for the option's JSON.
    """
    u, evaluated = optimise_control(space, evaluate)
    lim, figs = evaluate(space, np.arange(len(space.bases)), u, FINE)
    return u, lim, figs, [None] * len(space.bases), evaluated


# ===========================================================================
# cautions
# ===========================================================================

def option_cautions(machine, profile, setting, f):
    """Battery cautions of one setting from its figures ``f``."""
    out = []
    conn = setting.connection
    turns = setting.series_turns or 0.0
    if conn == "series" or (conn.endswith("cumulative") and turns > 0):
        out.append(caution("battery-series-back-current", "stop",
                      "Series turns in circuit with a battery: when the machine slows, the battery drives current back "
                      "through the series field, which weakens or reverses the field and can reverse the machine's "
                      "polarity onto the battery. Use a shunt or separately excited connection with no series turns.",
                      "textbook rule for charging generators (Theraja Vol II ch. 28, from memory); common practice",
                      connection=conn, series_turns=turns))
    out.append(caution("battery-reverse-current", "warn",
                  "Fit a reverse-current cut-out or a blocking diode: if the machine slows or stops, the battery "
                  "drives it as a motor and discharges into it.",
                  "common practice for DC charging sets (reverse-current relay)"))
    out.append(caution("battery-polarity", "note",
                  "Check the machine's polarity with a voltmeter before closing onto the battery: a self-excited "
                  "machine can build up reversed.", "common practice"))
    ev, gv = f.get("end_volts_per_cell"), f.get("gassing_volts_per_cell")
    if ev is not None and gv is not None and ev > gv:
        q = f.get("ventilation_m3_per_h")
        out.append(caution("battery-gassing", "warn",
                      f"The charge finishes at {ev:.3f} V per cell, above the gassing voltage {gv:.2f} V: the cells "
                      f"give off hydrogen and oxygen. Ventilate the battery room (at least {q:.3g} m3/h by the "
                      f"standard's formula), keep flames and sparks away, and do not break battery connections under load.",
                      "IEC 62485-2 ventilation formula Q = 0.05 n Igas C 1e-3 (seen); gassing voltage from the chemistry table",
                      end_volts_per_cell=ev, gassing_volts_per_cell=gv, ventilation_m3_per_h=q))
    return out


def profile_cautions(machine, profile):
    """Cautions of the battery job as a whole, whatever the setting."""
    out = []
    b = profile.battery
    chem = chemistry(b.chemistry)
    q = float(ventilation_airflow_m3_per_h(b.cells, b.capacity_ah, chem.gas_current_boost_ma_per_ah))
    out.append(caution("battery-ventilation", "warn",
                  f"Charging releases hydrogen. Ventilate the battery room for boost charging: at least {q:.3g} m3/h "
                  f"(natural ventilation opening about {float(ventilation_opening_cm2(q)):.0f} cm2). No smoking, "
                  "flames or sparks near the cells; wear eye protection.",
                  "IEC 62485-2 ventilation formula (seen)", ventilation_m3_per_h=q))
    return out
