"""Load profiles and the small named tables behind them.

A load profile is TOML with the tables ``[load]`` and ``[drive]`` and one job
table matching ``load.kind``: ``[battery]``, ``[welding]``, ``[lighting]`` or
``[booster]``. :func:`load_profile` reads and checks one;
:func:`profile_to_dict` gives back the same tables so a saved profile loads
unchanged.

The tables (battery chemistries, welding processes, no-load voltage limits,
welding environments, lamps) keep every value beside its source. Marks:
"seen" = read in a public copy of the source; "from memory" = recalled, not
checked against a copy; "common practice" = a trade rule of thumb;
"model choice" = a shape parameter of our own model, fitted by eye.
"""

from dataclasses import dataclass, field, fields

import numpy as np

from .errors import InputError
from .validate import Table, check_tables, read_toml, refuse_unknown_keys, source_name

KINDS = ("battery", "welding", "lighting", "booster")


def _lookup(table, name, what):
    """Entry ``name`` of a named table, or an InputError listing the valid names."""
    if isinstance(name, str) and name in table:
        return table[name]
    raise InputError(what, "name", f"is {name!r}; allowed: {', '.join(table)}")


def _build(cls, name, spec):
    """A table entry from ``{field: (value, source)}``; the sources go to ``basis``."""
    values = {k: v for k, (v, _) in spec.items()}
    basis = {k: s for k, (_, s) in spec.items()}
    return cls(name=name, basis=basis, **values)


# ===========================================================================
# battery chemistries
# ===========================================================================

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
    "lead-acid-vented": _build(Chemistry, "lead-acid-vented", {
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
    "lead-acid-valve-regulated": _build(Chemistry, "lead-acid-valve-regulated", {
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
    "nickel-cadmium-vented": _build(Chemistry, "nickel-cadmium-vented", {
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
    return _lookup(CHEMISTRIES, name, "chemistry")


def _ocv_pair(chem, ocv_range):
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
    e0, e1 = _ocv_pair(chem, ocv_range)
    s = np.clip(np.asarray(soc, float), 0.0, 1.0)
    return e0 + (e1 - e0) * s


def _rate_factor(chem, rate_per_h):
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
    eta = _rate_factor(chem, r) * np.maximum(eta, 0.0)
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
# arc welding
# ===========================================================================

_IEC_60974_1_LINES = "IEC 60974-1 conventional load voltage (seen)"
_IEC_60974_1_TOP = "IEC 60974-1 conventional load above 600 A (from memory)"

#: Drooping: the source loses at least 10 V per 100 A near the working point,
#: so an arc-length change hardly moves the current (common practice).
DROOPING_MAX_SLOPE_V_PER_A = -0.10
#: Flat: the source loses at most 5 V per 100 A (a constant-voltage source
#: for self-regulating wire feed; common practice).
FLAT_MIN_SLOPE_V_PER_A = -0.05
CHARACTERISTICS = ("drooping", "flat")


@dataclass(frozen=True)
class WeldingProcess:
    """A process's conventional load line ``U2 = offset + slope I2`` up to the knee, constant above."""

    name: str
    load_line_offset_v: float
    load_line_slope_v_per_a: float
    load_line_knee_a: float
    load_line_top_v: float
    characteristic: str
    basis: dict = field(default_factory=dict, compare=False, repr=False)


WELDING_PROCESSES = {
    "manual-metal-arc": _build(WeldingProcess, "manual-metal-arc", {
        "load_line_offset_v": (20.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.04, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (44.0, _IEC_60974_1_TOP),
        "characteristic": ("drooping", "manual arc needs a drooping source (textbooks on utilisation of electrical energy; seen)"),
    }),
    "tungsten-inert-gas": _build(WeldingProcess, "tungsten-inert-gas", {
        "load_line_offset_v": (10.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.04, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (34.0, _IEC_60974_1_TOP),
        "characteristic": ("drooping", "TIG needs a constant-current (drooping) source (common practice)"),
    }),
    "metal-inert-gas": _build(WeldingProcess, "metal-inert-gas", {
        "load_line_offset_v": (14.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.05, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (44.0, _IEC_60974_1_TOP),
        "characteristic": ("flat", "MIG/MAG with constant wire feed needs a flat (constant-voltage) source (common practice)"),
    }),
}


def welding_process(name):
    """The :class:`WeldingProcess` called ``name``; an InputError lists the valid names."""
    if isinstance(name, WeldingProcess):
        return name
    return _lookup(WELDING_PROCESSES, name, "welding process")


def conventional_load_voltage(process, current_a):
    """Conventional load voltage of a welding process [V].

    Parameters
    ----------
    process : WeldingProcess or str
    current_a : array_like
        Welding current [A] (magnitude).

    Returns
    -------
    ndarray
        ``offset + slope |I|`` up to the knee (600 A), constant above.

    References
    ----------
    IEC 60974-1, conventional load (lines seen; the constant part above
    600 A from memory).
    """
    p = welding_process(process)
    i = np.abs(np.asarray(current_a, float))
    return np.where(i <= p.load_line_knee_a, p.load_line_offset_v + p.load_line_slope_v_per_a * i,
                    p.load_line_top_v)


def characteristic_margin_v_per_a(process, slope_v_per_a):
    """How far a source's slope dV/dI at the working point is inside the process's need [V/A].

    Positive inside: drooping needs ``slope <= -0.10 V/A``, flat needs
    ``slope >= -0.05 V/A`` (common practice).

    Parameters
    ----------
    process : WeldingProcess or str
    slope_v_per_a : array_like
        Slope of the machine's external characteristic [V/A] (negative when
        the voltage falls with current).

    Returns
    -------
    ndarray
        [V/A]
    """
    p = welding_process(process)
    s = np.asarray(slope_v_per_a, float)
    if p.characteristic == "drooping":
        return DROOPING_MAX_SLOPE_V_PER_A - s
    return s - FLAT_MIN_SLOPE_V_PER_A


@dataclass(frozen=True)
class NoLoadLimit:
    """A published ceiling for a welding source's no-load voltage."""

    name: str
    voltage_v: float
    measure: str          # "peak", "rms" or "mean"
    current_kind: str     # "dc" or "ac"
    basis: dict = field(default_factory=dict, compare=False, repr=False)


_IEC_60974_1_NL = "IEC 60974-1 rated no-load voltage (seen)"
_US_CFR = "US 29 CFR 1910.254(b)(3), manual arc welding (seen)"

NO_LOAD_VOLTAGE_LIMITS = {
    "iec-dc-normal": _build(NoLoadLimit, "iec-dc-normal", {
        "voltage_v": (113.0, _IEC_60974_1_NL), "measure": ("peak", _IEC_60974_1_NL),
        "current_kind": ("dc", _IEC_60974_1_NL)}),
    "iec-dc-increased-shock-hazard": _build(NoLoadLimit, "iec-dc-increased-shock-hazard", {
        "voltage_v": (113.0, _IEC_60974_1_NL), "measure": ("peak", _IEC_60974_1_NL),
        "current_kind": ("dc", _IEC_60974_1_NL)}),
    "iec-ac-normal": _build(NoLoadLimit, "iec-ac-normal", {
        "voltage_v": (80.0, _IEC_60974_1_NL), "measure": ("rms", _IEC_60974_1_NL),
        "current_kind": ("ac", _IEC_60974_1_NL)}),
    "iec-ac-increased-shock-hazard": _build(NoLoadLimit, "iec-ac-increased-shock-hazard", {
        "voltage_v": (48.0, _IEC_60974_1_NL), "measure": ("rms", _IEC_60974_1_NL),
        "current_kind": ("ac", _IEC_60974_1_NL)}),
    "us-manual-dc": _build(NoLoadLimit, "us-manual-dc", {
        "voltage_v": (100.0, _US_CFR), "measure": ("mean", "a meter reading of the DC voltage (our reading of the rule)"),
        "current_kind": ("dc", _US_CFR)}),
}


def no_load_voltage_limit(name):
    """The :class:`NoLoadLimit` called ``name``; an InputError lists the valid names."""
    return _lookup(NO_LOAD_VOLTAGE_LIMITS, name, "no-load voltage limit")


#: Peak over mean no-load voltage of a DC generator, for its commutator
#: ripple (common practice: a few per cent for a machine with many
#: commutator segments; 5 % taken, on the safe side).
COMMUTATOR_RIPPLE_FRACTION = 0.05


def no_load_peak_voltage(mean_v, ripple_fraction=COMMUTATOR_RIPPLE_FRACTION):
    """Peak no-load voltage [V] of a DC generator from its mean (meter) value.

    Parameters
    ----------
    mean_v : array_like
        Mean no-load voltage [V].
    ripple_fraction : float, optional
        Peak excess over the mean (commutator ripple); 5 % by default
        (common practice).

    Returns
    -------
    ndarray
        ``mean (1 + ripple)`` [V], compared with the 113 V peak of IEC 60974-1.
    """
    return np.asarray(mean_v, float) * (1.0 + ripple_fraction)


@dataclass(frozen=True)
class Environment:
    """Where the welding is done, with the IEC limit that applies to a DC source."""

    name: str
    dc_limit: str
    precautions: str
    basis: dict = field(default_factory=dict, compare=False, repr=False)


ENVIRONMENTS = {
    "normal": _build(Environment, "normal", {
        "dc_limit": ("iec-dc-normal", _IEC_60974_1_NL),
        "precautions": ("", "IEC 60974-1 normal environment"),
    }),
    "increased-shock-hazard": _build(Environment, "increased-shock-hazard", {
        "dc_limit": ("iec-dc-increased-shock-hazard", _IEC_60974_1_NL),
        "precautions": (
            "confined, damp or hot place or work on conductive parts: use a source marked for increased "
            "hazard of electric shock, dry insulating gloves and mats, and never weld alone",
            "IEC 60974-1 increased hazard of electric shock (seen); the individual measures are common practice"),
    }),
}


def environment(name):
    """The :class:`Environment` called ``name``; an InputError lists the valid names."""
    return _lookup(ENVIRONMENTS, name, "welding environment")


def thermal_equivalent_current(current_a, duty_fraction):
    """Continuous current with the same heating as ``current_a`` at a duty cycle [A].

    Parameters
    ----------
    current_a : array_like
        Current while the arc burns [A].
    duty_fraction : array_like
        On-load share of the 10-minute period (0..1).

    Returns
    -------
    ndarray
        ``I sqrt(duty)`` [A]. An upper bound on what a winding may carry at
        that duty: real ratings are often more conservative.

    References
    ----------
    Duty cycle as on-load time over 10 minutes: IEC 60974-1 (seen); the
    square-root rule is rating practice (from memory).
    """
    return np.asarray(current_a, float) * np.sqrt(np.asarray(duty_fraction, float))


# ===========================================================================
# lighting
# ===========================================================================

_IES = "IES Lighting Handbook, gas-filled tungsten lamps near rated voltage (from memory)"
#: Exponents of light output, power and life against voltage (IES Lighting
#: Handbook, from memory; the SPIE Field Guide to Illumination agrees within 2 %).
LIGHT_EXPONENT = 3.38
POWER_EXPONENT = 1.54
LIFE_EXPONENT = -13.1


@dataclass(frozen=True)
class Lamp:
    """A lamp type; exponents are None where no voltage law applies."""

    name: str
    light_exponent: float | None
    power_exponent: float | None
    life_exponent: float | None
    basis: dict = field(default_factory=dict, compare=False, repr=False)


LAMPS = {
    "incandescent": _build(Lamp, "incandescent", {
        "light_exponent": (LIGHT_EXPONENT, _IES), "power_exponent": (POWER_EXPONENT, _IES),
        "life_exponent": (LIFE_EXPONENT, _IES)}),
    "electronic": _build(Lamp, "electronic", {
        "light_exponent": (None, "an electronic driver holds its output over its input range: no estimate"),
        "power_exponent": (None, "as above"), "life_exponent": (None, "as above")}),
    "none": _build(Lamp, "none", {
        "light_exponent": (None, "no lamps: no estimate"), "power_exponent": (None, "as above"),
        "life_exponent": (None, "as above")}),
}


def lamp(name):
    """The :class:`Lamp` called ``name``; an InputError lists the valid names."""
    return _lookup(LAMPS, name, "lamp")


def lamp_light_ratio(v_ratio, exponent=LIGHT_EXPONENT):
    """Light output over rated light of an incandescent lamp at ``V / Vrated``.

    References
    ----------
    IES Lighting Handbook, lamp characteristics near rated voltage (from memory).
    """
    return np.asarray(v_ratio, float) ** exponent


def lamp_power_ratio(v_ratio, exponent=POWER_EXPONENT):
    """Power over rated power of an incandescent lamp at ``V / Vrated``.

    References
    ----------
    IES Lighting Handbook (from memory).
    """
    return np.asarray(v_ratio, float) ** exponent


def lamp_life_ratio(v_ratio, exponent=LIFE_EXPONENT):
    """Life over rated life of an incandescent lamp at ``V / Vrated``.

    References
    ----------
    IES Lighting Handbook (from memory).
    """
    return np.asarray(v_ratio, float) ** exponent


# ===========================================================================
# load profiles
# ===========================================================================

#: Battery: no lower bound on the starting current unless one is asked for.
DEFAULT_MIN_CHARGE_CURRENT_A = 0.0
#: Cable resistance when none is given: the load sits at the machine's
#: terminals (the welding standard's conventional load is taken there too).
DEFAULT_CABLE_RESISTANCE_OHM = 0.0
#: Battery temperature: the reference of the chemistry table's voltages.
DEFAULT_BATTERY_TEMPERATURE_C = REFERENCE_TEMPERATURE_C
#: Welding environment: the standard's base case (the DC limit is the same in both).
DEFAULT_ENVIRONMENT = "normal"
#: Welding duty cycle: a usual rating point of manual sets (common practice).
DEFAULT_DUTY_CYCLE_PERCENT = 60.0
#: Supply tolerance: no single standard for DC; +-5 % is common practice.
DEFAULT_TOLERANCE_PERCENT = 5.0
#: Lamp type when none is given: no lamp estimate.
DEFAULT_LAMP = "none"

_MAX_SPEED_RPM = 100_000.0
_MAX_VOLTAGE_V = 100_000.0
_MAX_CURRENT_A = 1e6
_MAX_OHM = 1e4
# Smallest speed and voltages accepted: far below any real job, and large
# enough that ratios to them stay finite (1e-300 passes "> 0" but overflows
# the lamp laws).
_MIN_SPEED_RPM = 1.0
_MIN_VOLTAGE_V = 0.1


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


@dataclass(frozen=True)
class WeldingJob:
    """Feed an arc. Field names are the ``[welding]`` keys; ``max_no_load_voltage_v`` None for none."""

    process: str
    current_range_a: tuple
    environment: str
    duty_cycle_percent: float
    cable_resistance_ohm: float
    max_no_load_voltage_v: float | None


@dataclass(frozen=True)
class LightingJob:
    """Feed lamps at the far end of a feeder. Field names are the ``[lighting]`` keys."""

    nominal_voltage_v: float
    load_current_a: tuple
    tolerance_percent: float
    feeder_resistance_ohm: float
    lamp: str


@dataclass(frozen=True)
class BoosterJob:
    """A series booster in a feeder from a bus. Field names are the ``[booster]`` keys."""

    bus_voltage_v: float
    feeder_resistance_ohm: float
    load_current_a: tuple
    tolerance_percent: float


@dataclass(frozen=True)
class LoadProfile:
    """What the load needs: kind, drive speeds, winding temperatures and one job.

    ``speeds_rpm`` holds one speed or ``(low, high)``; ``temperatures_c`` is
    ``(cold, hot)`` or None for the machine's reference temperature.
    """

    kind: str
    label: str
    speeds_rpm: tuple
    temperatures_c: tuple | None
    battery: BatteryJob | None = None
    welding: WeldingJob | None = None
    lighting: LightingJob | None = None
    booster: BoosterJob | None = None
    source: str = field(default="profile", compare=False)

    @property
    def job(self):
        """The job of the profile's kind."""
        return getattr(self, self.kind)


def load_profile(path, text=None):
    """Read and check a load-profile file.

    Parameters
    ----------
    path : str or Path
        The file (its name is used in messages).
    text : str or bytes, optional
        The file's content, when already in memory.

    Returns
    -------
    LoadProfile

    Raises
    ------
    InputError
        One line naming the file, the key and what is allowed.
    """
    return profile_from_dict(read_toml(path, text), source_name(path))


def _pair(t, k, source, *, low=None, low_open=False, high=None, strict=False, names=("low", "high"),
          default=None, required=True):
    """Read ``[a, b]`` with ``a <= b`` (``a < b`` when strict)."""
    if not required and not t.has(k):
        t.raw(k, None)
        return default
    v = t.numbers(k, low=low, low_open=low_open, high=high, min_len=2, max_len=2)
    if v[0] > v[1] or (strict and v[0] == v[1]):
        rel = "<" if strict else "<="
        raise InputError(source, t.key(k), f"is [{v[0]:g}, {v[1]:g}]; allowed: [{names[0]}, {names[1]}] "
                                           f"with {names[0]} {rel} {names[1]}")
    return v


def profile_from_dict(data, source="profile"):
    """Build a :class:`LoadProfile` from parsed TOML tables, checking every rule."""
    check_tables(data, source, ("load", "drive") + KINDS, "load profile",
                 ("machine", "open_circuit", "armature_reaction", "winding"), "machine file")
    keys = {"load": ("kind", "label"), "drive": ("speed_rpm", "speed_range_rpm", "winding_temperature_range_c"),
            **{k: tuple(f.name for f in fields(_JOB_CLASSES[k])) for k in KINDS}}
    refuse_unknown_keys(data, source, keys)
    ld = Table(data.get("load"), source, "load", keys=keys["load"])
    kind = ld.text("kind", choices=KINDS)
    label = ld.text("label", "")
    ld.finish()
    for other in KINDS:
        if other != kind and other in data:
            raise InputError(source, other, f"table given but load.kind is {kind!r}; allowed: only [{kind}]")

    dr = Table(data.get("drive"), source, "drive", keys=keys["drive"])
    has_one, has_range = dr.has("speed_rpm"), dr.has("speed_range_rpm")
    if has_one and has_range:
        raise InputError(source, "drive.speed_range_rpm", "given together with speed_rpm; allowed: one of the two")
    if has_range:
        dr.raw("speed_rpm", None)
        speeds = _pair(dr, "speed_range_rpm", source, low=_MIN_SPEED_RPM, high=_MAX_SPEED_RPM)
    else:
        if not has_one:
            raise InputError(source, "drive.speed_rpm",
                             "is missing; give speed_rpm, or speed_range_rpm = [low, high]")
        speeds = (dr.number("speed_rpm", low=_MIN_SPEED_RPM, high=_MAX_SPEED_RPM),)
        dr.raw("speed_range_rpm", None)
    temps = _pair(dr, "winding_temperature_range_c", source, low=-60, high=250, names=("cold", "hot"),
                  required=False)
    dr.finish()

    jt = Table(data.get(kind), source, kind, keys=keys[kind])
    jobs = {"battery": None, "welding": None, "lighting": None, "booster": None}
    jobs[kind] = _JOB_READERS[kind](jt, source)
    jt.finish()
    return LoadProfile(kind=kind, label=label, speeds_rpm=speeds, temperatures_c=temps,
                       source=source, **jobs)


def _read_battery(t, source):
    name = t.text("chemistry", choices=tuple(CHEMISTRIES))
    chem = CHEMISTRIES[name]
    cells = t.integer("cells", low=1, high=10_000)
    cap = t.number("capacity_ah", low=0, low_open=True, high=1e6)
    soc = _pair(t, "state_of_charge", source, low=0, high=1, strict=True, names=("start", "end"))
    imax = t.number("max_charge_current_a", low=0, low_open=True, high=_MAX_CURRENT_A)
    imin = t.number("min_charge_current_a", DEFAULT_MIN_CHARGE_CURRENT_A, low=0, high=_MAX_CURRENT_A)
    if imin > imax:
        raise InputError(source, t.key("min_charge_current_a"),
                         f"is {imin:g}; allowed: at most max_charge_current_a ({imax:g} A)")
    rb = t.number("internal_resistance_ohm", None, low=0, low_open=True, high=_MAX_OHM)
    if rb is None:
        rb = float(bank_resistance_ohm(chem, cells, cap))
    rc = t.number("cable_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=_MAX_OHM)
    temp = t.number("temperature_c", DEFAULT_BATTERY_TEMPERATURE_C, low=-40, high=70)
    ocv = _pair(t, "open_circuit_voltage_per_cell_v", source, low=0, low_open=True, high=chem.max_cell_voltage_v,
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


def _read_welding(t, source):
    proc = t.text("process", choices=tuple(WELDING_PROCESSES))
    cur = _pair(t, "current_range_a", source, low=0, low_open=True, high=_MAX_CURRENT_A)
    env = t.text("environment", DEFAULT_ENVIRONMENT, choices=tuple(ENVIRONMENTS))
    duty = t.number("duty_cycle_percent", DEFAULT_DUTY_CYCLE_PERCENT, low=0, low_open=True, high=100)
    rc = t.number("cable_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=_MAX_OHM)
    top = NO_LOAD_VOLTAGE_LIMITS[ENVIRONMENTS[env].dc_limit].voltage_v
    vmax = t.number("max_no_load_voltage_v", None, low=0, low_open=True, high=top, what="mean volts")
    return WeldingJob(process=proc, current_range_a=cur, environment=env, duty_cycle_percent=duty,
                      cable_resistance_ohm=rc, max_no_load_voltage_v=vmax)


def _read_lighting(t, source):
    vn = t.number("nominal_voltage_v", low=_MIN_VOLTAGE_V, high=_MAX_VOLTAGE_V)
    cur = _pair(t, "load_current_a", source, low=0, high=_MAX_CURRENT_A)
    tol = t.number("tolerance_percent", DEFAULT_TOLERANCE_PERCENT, low=0, low_open=True, high=50)
    rf = t.number("feeder_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=_MAX_OHM)
    lp = t.text("lamp", DEFAULT_LAMP, choices=tuple(LAMPS))
    return LightingJob(nominal_voltage_v=vn, load_current_a=cur, tolerance_percent=tol,
                       feeder_resistance_ohm=rf, lamp=lp)


def _read_booster(t, source):
    vb = t.number("bus_voltage_v", low=_MIN_VOLTAGE_V, high=_MAX_VOLTAGE_V)
    rf = t.number("feeder_resistance_ohm", low=0, low_open=True, high=_MAX_OHM)
    cur = _pair(t, "load_current_a", source, low=0, high=_MAX_CURRENT_A)
    tol = t.number("tolerance_percent", DEFAULT_TOLERANCE_PERCENT, low=0, low_open=True, high=50)
    return BoosterJob(bus_voltage_v=vb, feeder_resistance_ohm=rf, load_current_a=cur, tolerance_percent=tol)


_JOB_READERS = {"battery": _read_battery, "welding": _read_welding,
                "lighting": _read_lighting, "booster": _read_booster}
# each job table's keys are its dataclass's fields
_JOB_CLASSES = {"battery": BatteryJob, "welding": WeldingJob, "lighting": LightingJob, "booster": BoosterJob}


def _toml_value(v):
    return list(v) if isinstance(v, tuple) else v


def profile_to_dict(profile):
    """The profile's TOML tables; ``profile_from_dict`` of it gives ``profile`` back."""
    p = profile
    drive = {}
    if len(p.speeds_rpm) == 1:
        drive["speed_rpm"] = p.speeds_rpm[0]
    else:
        drive["speed_range_rpm"] = list(p.speeds_rpm)
    if p.temperatures_c is not None:
        drive["winding_temperature_range_c"] = list(p.temperatures_c)
    job = p.job
    table = {f.name: _toml_value(getattr(job, f.name)) for f in fields(job)
             if getattr(job, f.name) is not None}
    return {"load": {"kind": p.kind, "label": p.label}, "drive": drive, p.kind: table}
