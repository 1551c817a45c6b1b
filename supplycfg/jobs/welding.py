"""Arc welding: load lines, no-load limits, environments, the job's figures, limits and cautions.

The tables keep every value beside its source. Marks: "seen" = read in a
public copy of the source; "from memory" = recalled; "common practice" = a
trade rule of thumb.
"""

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..cautions import ENGINE_OVERLOAD_FACTOR, caution
from ..circuit import (USES_SERIES, candidate_params, circuit_residual, no_load_voltages, normal_points,
                       refine_bracketed_roots)
from ..envelope import (control_of_rows, control_range, critical_resistance_ratios, expand_candidates,
                        smallest_margin_fraction)
from ..errors import InputError
from ..powerflow import finite_or_none_lists, load_point_figures
from ..readings import (control_band, diverter_rating, exciter_supply, no_load_field_current_a,
                        readings_and_band, weak_end_is_high)
from ..validate import MAX_CURRENT_A, MAX_OHM, named_entry, read_pair, table_entry

#: The profile table this job reads.
TABLE = "welding"

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
    min_no_load_voltage_v: float | None = None
    electrode_polarity: str = "+"
    basis: dict = field(default_factory=dict, compare=False, repr=False)


_STRIKE_MMA = ("electrode makers' data sheets: about 50 V or more open-circuit on DC for reliable striking, "
               "more for some basic electrodes (common practice, from memory)")

WELDING_PROCESSES = {
    "manual-metal-arc": table_entry(WeldingProcess, "manual-metal-arc", {
        "load_line_offset_v": (20.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.04, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (44.0, _IEC_60974_1_TOP),
        "characteristic": ("drooping", "manual arc needs a drooping source (textbooks on utilisation of electrical energy; seen)"),
        "min_no_load_voltage_v": (50.0, _STRIKE_MMA),
        "electrode_polarity": ("+", "most covered electrodes run electrode positive on DC; some ask for negative: the electrode's maker decides (common practice)"),
    }),
    "tungsten-inert-gas": table_entry(WeldingProcess, "tungsten-inert-gas", {
        "load_line_offset_v": (10.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.04, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (34.0, _IEC_60974_1_TOP),
        "characteristic": ("drooping", "TIG needs a constant-current (drooping) source (common practice)"),
        "min_no_load_voltage_v": (None, "the arc is started by high frequency or by lifting the tungsten, "
                                        "not by the no-load voltage (common practice)"),
        "electrode_polarity": ("−", "DC TIG runs electrode negative: on + two thirds of the arc's heat goes into the tungsten, which melts (welding handbooks, from memory; common practice)"),
    }),
    "metal-inert-gas": table_entry(WeldingProcess, "metal-inert-gas", {
        "load_line_offset_v": (14.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.05, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (44.0, _IEC_60974_1_TOP),
        "characteristic": ("flat", "MIG/MAG with constant wire feed needs a flat (constant-voltage) source (common practice)"),
        "min_no_load_voltage_v": (None, "the wire touches the work and starts the arc by a short circuit "
                                        "(common practice)"),
        "electrode_polarity": ("+", "MIG/MAG with solid wire runs wire positive (common practice)"),
    }),
}


def welding_process(name):
    """The :class:`WeldingProcess` called ``name``; an InputError lists the valid names."""
    if isinstance(name, WeldingProcess):
        return name
    return named_entry(WELDING_PROCESSES, name, "welding process")


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


def arc_stability_slope_limit_v_per_a(process, cable_resistance_ohm):
    """Steepest rise of the machine's characteristic [V/A] at which the arc still holds a working point.

    The working point is stable where the source's characteristic, taken at
    the arc (the machine's slope less the leads' resistance), is less steep
    than the arc's own line: a small rise in current then leaves the source
    short of the voltage the arc needs, and the current falls back. A
    rising characteristic steeper than that (a self-excited machine past
    the turn of its curve) runs the arc away or puts it out. The arc's line
    is the process's conventional load line.

    Parameters
    ----------
    process : WeldingProcess or str
    cable_resistance_ohm : float
        Electrode and return leads together [ohm].

    Returns
    -------
    float
        ``slope of the conventional load line + R_cable`` [V/A]; the
        machine's slope at the working point must stay below it.

    References
    ----------
    Arc stability criterion (Kaufmann 1900; Lancaster, The Physics of
    Welding, ch. on the arc and its power source; from memory); the
    conventional load line from IEC 60974-1.
    """
    return float(welding_process(process).load_line_slope_v_per_a + cable_resistance_ohm)


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
    "iec-dc-normal": table_entry(NoLoadLimit, "iec-dc-normal", {
        "voltage_v": (113.0, _IEC_60974_1_NL), "measure": ("peak", _IEC_60974_1_NL),
        "current_kind": ("dc", _IEC_60974_1_NL)}),
    "iec-dc-increased-shock-hazard": table_entry(NoLoadLimit, "iec-dc-increased-shock-hazard", {
        "voltage_v": (113.0, _IEC_60974_1_NL), "measure": ("peak", _IEC_60974_1_NL),
        "current_kind": ("dc", _IEC_60974_1_NL)}),
    "iec-ac-normal": table_entry(NoLoadLimit, "iec-ac-normal", {
        "voltage_v": (80.0, _IEC_60974_1_NL), "measure": ("rms", _IEC_60974_1_NL),
        "current_kind": ("ac", _IEC_60974_1_NL)}),
    "iec-ac-increased-shock-hazard": table_entry(NoLoadLimit, "iec-ac-increased-shock-hazard", {
        "voltage_v": (48.0, _IEC_60974_1_NL), "measure": ("rms", _IEC_60974_1_NL),
        "current_kind": ("ac", _IEC_60974_1_NL)}),
    "us-manual-dc": table_entry(NoLoadLimit, "us-manual-dc", {
        "voltage_v": (100.0, _US_CFR), "measure": ("mean", "a meter reading of the DC voltage (our reading of the rule)"),
        "current_kind": ("dc", _US_CFR)}),
}


def no_load_voltage_limit(name):
    """The :class:`NoLoadLimit` called ``name``; an InputError lists the valid names."""
    return named_entry(NO_LOAD_VOLTAGE_LIMITS, name, "no-load voltage limit")


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
    "normal": table_entry(Environment, "normal", {
        "dc_limit": ("iec-dc-normal", _IEC_60974_1_NL),
        "precautions": ("", "IEC 60974-1 normal environment"),
    }),
    "increased-shock-hazard": table_entry(Environment, "increased-shock-hazard", {
        "dc_limit": ("iec-dc-increased-shock-hazard", _IEC_60974_1_NL),
        "precautions": (
            "confined, damp or hot place or work on conductive parts: use a source marked for increased "
            "hazard of electric shock, dry insulating gloves and mats, and never weld alone",
            "IEC 60974-1 increased hazard of electric shock (seen); the individual measures are common practice"),
    }),
}


def environment(name):
    """The :class:`Environment` called ``name``; an InputError lists the valid names."""
    return named_entry(ENVIRONMENTS, name, "welding environment")


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
# the [welding] table
# ===========================================================================

#: Cable resistance when none is given: the conventional load of the welding
#: standard is taken at the terminals.
DEFAULT_CABLE_RESISTANCE_OHM = 0.0
#: Welding environment: the standard's base case (the DC limit is the same in both).
DEFAULT_ENVIRONMENT = "normal"
#: Welding duty cycle: a usual rating point of manual sets (common practice).
DEFAULT_DUTY_CYCLE_PERCENT = 60.0
#: Each target current reached within this share (issue rule).
WELD_CURRENT_TOLERANCE = 0.03
#: Step between the rows of the welding dial [A] (issue rule; a usual dial
#: graduation of manual sets, common practice).
DEFAULT_DIAL_STEP_A = 10.0
#: Most rows a dial may have: enough for a 10 A dial over 1000 A.
MAX_DIAL_ROWS = 100


@dataclass(frozen=True)
class WeldingJob:
    """Feed an arc. Field names are the ``[welding]`` keys; ``max_no_load_voltage_v`` None for none.

    ``min_no_load_voltage_v`` is the no-load voltage an arc needs to strike
    (None: the process starts its arc otherwise); the dial keeps every row's
    no-load voltage between it and the limits.
    """

    process: str
    current_range_a: tuple
    environment: str
    duty_cycle_percent: float
    cable_resistance_ohm: float
    max_no_load_voltage_v: float | None
    dial_step_a: float = DEFAULT_DIAL_STEP_A
    min_no_load_voltage_v: float | None = None


#: The dataclass of the [welding] table; its fields are the table's keys.
JOB_TABLE = WeldingJob


#: Lowest welding current a job may ask [A]: the smallest arcs (fine TIG) run at about 5 A (welding
#: handbooks, from memory); below it there is no arc to set a dial for.
MIN_WELDING_CURRENT_A = 5.0
#: Lowest duty cycle [%]: rating plates state 20 % and up (IEC 60974-1 rates at 60 % and 100 % and the
#: maker's own, from memory); 5 % leaves room for a light hand-held set.
MIN_DUTY_CYCLE_PERCENT = 5.0
#: Lowest strike voltage a job may ask [V]: no arc strikes from under 10 V (common practice).
MIN_STRIKE_VOLTAGE_V = 10.0


def read_job(t, source):
    """The ``[welding]`` table ``t`` of a profile read from ``source``, checked."""
    proc = t.text("process", choices=tuple(WELDING_PROCESSES))
    cur = read_pair(t, "current_range_a", source, low=MIN_WELDING_CURRENT_A, high=MAX_CURRENT_A)
    env = t.text("environment", DEFAULT_ENVIRONMENT, choices=tuple(ENVIRONMENTS))
    duty = t.number("duty_cycle_percent", DEFAULT_DUTY_CYCLE_PERCENT, low=MIN_DUTY_CYCLE_PERCENT, high=100)
    rc = t.number("cable_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=MAX_OHM)
    top = NO_LOAD_VOLTAGE_LIMITS[ENVIRONMENTS[env].dc_limit].voltage_v
    vmax = t.number("max_no_load_voltage_v", None, low=0, low_open=True, high=top, what="mean volts")
    step = t.number("dial_step_a", DEFAULT_DIAL_STEP_A, low=0, low_open=True, high=MAX_CURRENT_A)
    if (cur[1] - cur[0]) / step > MAX_DIAL_ROWS:
        raise InputError(source, t.key("dial_step_a"),
                         f"is {step:g}; allowed: at least {(cur[1] - cur[0]) / MAX_DIAL_ROWS:.3g} A "
                         f"(at most {MAX_DIAL_ROWS} rows over the current range)")
    vmin = t.number("min_no_load_voltage_v", WELDING_PROCESSES[proc].min_no_load_voltage_v,
                    low=MIN_STRIKE_VOLTAGE_V, high=top, what="mean volts")
    if vmax is not None and vmin is not None and vmax <= vmin:
        # no no-load voltage both strikes the arc and keeps the site's limit: no setting can exist
        given = "the job's min_no_load_voltage_v" if t.has("min_no_load_voltage_v") else f"the {proc} default"
        raise InputError(source, t.key("max_no_load_voltage_v"),
                         f"is {vmax:g}; allowed: above {vmin:g} V, the no-load voltage the arc needs to strike "
                         f"({given}); no setting can keep below the one and strike above the other")
    return WeldingJob(process=proc, current_range_a=cur, environment=env, duty_cycle_percent=duty,
                      cable_resistance_ohm=rc, max_no_load_voltage_v=vmax, dial_step_a=step,
                      min_no_load_voltage_v=vmin)


def welding_line_voltage_v(job, current_a):
    """Terminal voltage [V] on the process's conventional load line plus the welding leads."""
    return np.asarray(conventional_load_voltage(job.process, current_a), float) + \
        np.asarray(current_a, float) * job.cable_resistance_ohm


def dial_currents_a(job):
    """The welding dial's currents [A]: the low end, then every ``dial_step_a``, and the high end."""
    lo, hi = job.current_range_a
    n = int(math.floor((hi - lo) / job.dial_step_a + 1e-9))
    cur = lo + job.dial_step_a * np.arange(n + 1)
    if hi - cur[-1] > 1e-9 * max(hi, 1.0):
        cur = np.append(cur, hi)
    return cur


def current_change_per_arc_volt_a_per_v(slope_v_per_a, cable_resistance_ohm):
    """Change of welding current for one volt more arc voltage (a longer arc) [A/V].

    With the arc held at a fixed length taken as a constant voltage, the
    operating point moves along the source's characteristic less the leads:
    ``dI = dU / (dV/dI - R_cable)``; negative (the current falls).

    References
    ----------
    Operating point of a drooping source on the arc (textbooks on
    utilisation of electrical energy; the constant-voltage arc is common
    practice).
    """
    s = np.asarray(slope_v_per_a, float) - cable_resistance_ohm
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(s < 0, 1.0 / s, np.nan)


def solve_weld_control(space, base_idx, corner_idx, target_a):
    """Control value putting the operating point at ``target_a`` [A] on the welding line.

    Returns ``(u, reached)``: the control of each row (its field rheostat
    [ohm] or field current [A]; where its range does not reach the target,
    the end that comes closer) and whether the range reaches it.
    """
    job = space.profile.welding
    base_idx = np.asarray(base_idx, int)
    n = base_idx.size
    lo = np.array([control_range(space.machine, space.bases[b][3])[0] for b in base_idx])
    hi = np.array([control_range(space.machine, space.bases[b][3])[1] for b in base_idx])
    it = np.broadcast_to(np.asarray(target_a, float), (n,))
    vt = welding_line_voltage_v(job, it)

    corner_idx = np.asarray(corner_idx, int)

    def residual(rows):
        """The residual of ``rows`` as a function of their control: the rows are read once, each
        step changes only their field control (as expand_candidates would)."""
        sub, _ = expand_candidates(space, base_idx[rows], np.zeros(rows.size), corner_idx[rows])
        controls_at = control_of_rows(space, base_idx[rows])
        return lambda u: circuit_residual(sub, sub.params_with_control(*controls_at(u)), vt[rows], it[rows])

    h = residual(np.arange(n))
    ha, hb = h(lo), h(hi)
    ok = np.signbit(ha) != np.signbit(hb)
    # unreachable: take the end that comes closer
    u = np.where(np.abs(ha) < np.abs(hb), lo, hi)
    k = np.flatnonzero(ok)
    if k.size:
        # only the rows with a bracket are refined (each row's search is its own: a row with none
        # would take every step and hold the others' calls to its length)
        u[k] = refine_bracketed_roots(residual(k), lo[k], hi[k], ha[k], 50)
    return u, ok


#: Share of a scan from zero to the searched current span taken from its top, along the welding load
#: line and along the cable on a stuck electrode (each voltage rising with the current): all of it,
#: since both currents sit low in the span (3 to 9 % on the demo set), and the blocks above them where
#: the residual provably stays below zero are not evaluated.
CURRENT_SCAN_TOP_SHARE = 1.0


def _weld_current(space, base_idx, u, corner_idx=None, field_set_at=None):
    """Welding current on the line at every corner (or one), the machine's normal point.

    With ``field_set_at`` (a corner) a separately excited field carries at every
    corner the current it has at that corner: the dial is set by the field
    ammeter, whatever the winding temperature, not by the rheostat's ohms.
    """
    job = space.profile.welding
    sub, rows = expand_candidates(space, base_idx, u, corner_idx)
    if field_set_at is not None:
        base_idx = np.asarray(base_idx, int)
        ref, _ = expand_candidates(space, base_idx, u, np.full(base_idx.size, field_set_at))
        each = (lambda a: a) if corner_idx is not None else (lambda a: np.repeat(a, space.nc))
        # separately excited: the field current itself (subset changes only those rows)
        sub = sub.subset(np.arange(sub.n), field_current_a=each(ref.x0))
        if np.any(ref.kind == 1):
            sub = sub.subset(np.arange(sub.n), rheostat_ohm=rheostat_holding_no_load_field(
                sub, each(no_load_voltages(ref) / ref.rf)))

    # (the conventional load line and the leads: the voltage never falls as the current rises)
    r = normal_points(sub, np.zeros(sub.n), np.full(sub.n, sub.imax),
                      v_of=lambda t, rows=None: welding_line_voltage_v(job, t), alike=True,
                      top_share=CURRENT_SCAN_TOP_SHARE, rising_line=True)
    return r, sub


def rheostat_holding_no_load_field(circ, field_a):
    """Rheostat [ohm] at which each self-excited row's field ammeter reads ``field_a`` [A] at no load
    (NaN for other rows, and where that field current gives no voltage).

    At no load the shunt current ``I`` fixes the net field, so the machine's
    voltage there is explicit: ``V = s E(x(I)) - I (Ra + Rbr) - brush(I)``
    (the residual at ``v = I`` on a field circuit of 1 ohm, plus ``I``); the
    field circuit that carries ``I`` at ``V`` is ``V / I``, less the winding.
    """
    circ = circ.without_drive()  # no-load voltages are at the drive's no-load speed
    field_a = np.asarray(field_a, float)
    p = circ.params_with_control(rheostat_ohm=np.where(circ.kind == 1, 1.0 - circ.rsh, np.nan))
    with np.errstate(invalid="ignore", divide="ignore"):
        v = circuit_residual(circ, p, field_a, np.zeros(circ.n)) + field_a
        rh = v / field_a - circ.rsh
    return np.where((circ.kind == 1) & (field_a > 0) & (v > 0), np.maximum(rh, 0.0), np.nan)


def _char_slope(sub, v, il):
    """Slope dV/dIL [V/A] of each candidate's characteristic at (v, il): -h_IL/h_V."""
    p = candidate_params(sub, np.arange(sub.n))
    dv = 1e-4 * np.maximum(1.0, np.abs(v)); di = 1e-4 * np.maximum(1.0, np.abs(il))
    h_v = (circuit_residual(sub, p, v + dv, il) - circuit_residual(sub, p, v - dv, il)) / (2 * dv)
    h_i = (circuit_residual(sub, p, v, il + di) - circuit_residual(sub, p, v, il - di)) / (2 * di)
    return -h_i / h_v


def dial_corners(space):
    """Corner indices: nominal (mean speed, hottest), weakest (lowest speed, hottest), strongest (top speed, coldest).

    The no-load voltage is lowest at the weakest corner and highest at the
    strongest: hot copper lowers the field current, speed raises the EMF.
    """
    nc = space.nc
    nom = min(range(nc), key=lambda k: (abs(space.corners[k][0] - space.nominal[0]), -space.corners[k][1]))
    weak = min(range(nc), key=lambda k: (space.corners[k][0], -space.corners[k][1]))
    strong = max(range(nc), key=lambda k: (space.corners[k][0], -space.corners[k][1]))
    return nom, weak, strong


def no_load_voltage_v(sub):
    """No-load terminal voltage of every candidate of ``sub`` [V] (NaN where none).

    With no load current a separately excited or series machine carries no
    armature current: ``V0 = (n / n_occ) OCC(x0)`` exactly (no drop, no
    armature reaction; the series field is idle). Self-excited candidates are
    solved for their highest stable no-load point.
    """
    v = np.asarray(sub.s * sub.occ.emf(np.where(sub.kind == 0, sub.x0, 0.0)), float)
    slf = np.flatnonzero(sub.kind == 1)
    if slf.size:
        v = v.copy()
        v[slf] = no_load_voltages(sub.subset(slf))
    return v


#: While a row's band is searched its current is looked for within this share of the
#: target either side, on a coarse grid (the row's own point was found on the full span).
BAND_CURRENT_WINDOW = 0.5


def evaluate_rows(space, base_idx, u, target_a, near=False, lazy=False):
    """A dial row of each candidate: base ``base_idx`` with control ``u`` aimed at ``target_a``.

    Returns
    -------
    dict of ndarrays
        ``current_a`` and ``terminal_voltage_v`` at the nominal corner,
        ``deviation`` from the target (fraction; inf where no point),
        ``slope_v_per_a`` there, the no-load voltage at the weakest and the
        strongest corner (``no_load_min_v``, ``no_load_max_v``), the
        stuck-electrode current at the strongest corner
        (``short_circuit_current_a``), ``converged``. With ``near`` the
        current is looked for only within :data:`BAND_CURRENT_WINDOW` of the
        target, on coarser grids (a band search near a known point). With
        ``lazy`` the no-load voltages are solved only for the rows inside the
        limits of the current and the slope, and the stuck-electrode current
        only for those also inside the no-load limits (NaN for the others, which
        break a limit whatever the rest: a band search asks only whether a row
        holds). Each row's figures are its own, so a row solved is solved as
        without ``lazy``.
    """
    job = space.profile.welding
    base_idx = np.asarray(base_idx, int)
    u = np.asarray(u, float)
    target = np.broadcast_to(np.asarray(target_a, float), base_idx.shape)
    n = base_idx.size
    nom, weak, strong = dial_corners(space)
    if near:
        subn, _ = expand_candidates(space, base_idx, u, np.full(n, nom))
        rn = normal_points(subn, (1 - BAND_CURRENT_WINDOW) * target, (1 + BAND_CURRENT_WINDOW) * target,
                           v_of=lambda t: welding_line_voltage_v(job, t), grid=9, steps=40, alike=True)
    else:
        rn, subn = _weld_current(space, base_idx, u, np.full(n, nom))
    cur = rn["load_current_a"]
    with np.errstate(invalid="ignore", divide="ignore"):
        dev = np.abs(cur / target - 1.0)
    dev = np.where(np.isnan(dev), np.inf, dev)
    slope = _char_slope(subn, rn["terminal_voltage_v"], cur)
    ev = {"current_a": cur, "terminal_voltage_v": rn["terminal_voltage_v"], "deviation": dev,
          "slope_v_per_a": slope}
    k = np.arange(n)
    if lazy:
        k = np.flatnonzero(rn["converged"] & (smallest_margin_fraction(row_limits(space, ev)) >= 0))
    ev["no_load_min_v"], ev["no_load_max_v"] = np.full(n, np.nan), np.full(n, np.nan)
    if k.size:
        sub2, _ = expand_candidates(space, np.concatenate([base_idx[k], base_idx[k]]), np.concatenate([u[k], u[k]]),
                                    np.concatenate([np.full(k.size, weak), np.full(k.size, strong)]))
        vnl = no_load_voltage_v(sub2)
        ev["no_load_min_v"][k], ev["no_load_max_v"][k] = vnl[:k.size], vnl[k.size:]
    if lazy and k.size:
        k = k[smallest_margin_fraction(row_limits(space, {key: ev[key][k] for key in
                                                           ("no_load_min_v", "no_load_max_v")})) >= 0]
    ev["short_circuit_current_a"] = np.full(n, np.nan)
    converged = rn["converged"].copy()
    if k.size:
        subs, _ = expand_candidates(space, base_idx[k], u[k], np.full(k.size, strong))
        rs = normal_points(subs, np.zeros(k.size), np.full(k.size, subs.imax),
                           v_of=lambda t, rows=None: job.cable_resistance_ohm * t, alike=True,
                           top_share=CURRENT_SCAN_TOP_SHARE, rising_line=True, **({"grid": 33} if near else {}))
        ev["short_circuit_current_a"][k] = np.where(rs["found"], rs["load_current_a"], np.nan)
        converged[k] &= rs["converged"]
    ev.update(armature_current_a=rn["armature_current_a"], x=rn["x"], generated_emf_v=rn["generated_emf_v"],
              converged=converged)
    return ev


def row_limits(space, ev):
    """Limits of dial rows from :func:`evaluate_rows`: ``name -> (values, limit, kind, unit)``; those
    of the figures ``ev`` holds (a lazy evaluation checks a few first)."""
    m, job = space.machine, space.profile.welding
    env = environment(job.environment)
    proc = welding_process(job.process)
    lim = {}
    if "deviation" in ev:
        lim["dial_current"] = (ev["deviation"], WELD_CURRENT_TOLERANCE, "max", "fraction")
    if "no_load_max_v" in ev:
        lim["no_load_peak_voltage"] = (np.asarray(no_load_peak_voltage(ev["no_load_max_v"]), float),
                                       no_load_voltage_limit(env.dc_limit).voltage_v, "max", "V")
        if job.max_no_load_voltage_v is not None:
            lim["no_load_mean_voltage"] = (ev["no_load_max_v"], job.max_no_load_voltage_v, "max", "V")
    if "no_load_min_v" in ev and job.min_no_load_voltage_v is not None:
        lim["no_load_strike_voltage"] = (ev["no_load_min_v"], job.min_no_load_voltage_v, "min", "V")
    if "slope_v_per_a" in ev:
        if proc.characteristic == "drooping":
            lim["characteristic_slope"] = (ev["slope_v_per_a"], DROOPING_MAX_SLOPE_V_PER_A, "max", "V/A")
        else:
            lim["characteristic_slope"] = (ev["slope_v_per_a"], FLAT_MIN_SLOPE_V_PER_A, "min", "V/A")
        # a flat source's lower bound alone lets a rising curve through: the arc must hold its point
        lim["arc_stability"] = (ev["slope_v_per_a"], arc_stability_slope_limit_v_per_a(proc, job.cable_resistance_ohm),
                                "max", "V/A")
    if "short_circuit_current_a" in ev:
        isc = ev["short_circuit_current_a"]
        lim["stuck_electrode_current"] = (np.where(np.isnan(isc), np.inf, isc), m.peak_current_a, "max", "A")
    return lim


def _simplicity(base):
    """Sort key of a base: no diverter first, then fewer series turns."""
    return (base[2] is not None, base[1], base[2] or 0.0)


def dial_paths(space, valid, margin):
    """The base (tap and diverter) of every dial row, for each option.

    Option ``i`` starts on its own base at the low end; along the dial it
    keeps its tap while the row stays inside every limit, and where it would
    not, changes to the tap (of the same connection) that stays inside for
    the most rows from there: the fewest tap changes for a dial that starts
    on that tap (the greedy interval cover). Ties go to the simpler rig
    (no diverter, fewer turns), then to the larger margin of the row.

    Parameters
    ----------
    valid : ndarray of bool, shape (bases, rows)
    margin : ndarray, shape (bases, rows)
        Smallest margin (fraction) of each row.

    Returns
    -------
    ndarray of int, shape (bases, rows)
    """
    nb, nr = valid.shape
    run = np.zeros((nb, nr + 1), int)
    for r in range(nr - 1, -1, -1):
        run[:, r] = np.where(valid[:, r], run[:, r + 1] + 1, 0)
    conn = [b[0] for b in space.bases]
    family = {}
    for i, c in enumerate(conn):
        family.setdefault(c, []).append(i)
    # where a row leaves the limits the tap changed to depends on the connection and the row only
    best = {}
    for c, fam in family.items():
        for r in range(1, nr):
            ok = [b for b in fam if valid[b, r]]
            best[c, r] = min(ok, key=lambda b: (-run[b, r], _simplicity(space.bases[b]), -margin[b, r])) if ok else None
    paths = np.zeros((nb, nr), int)
    valid_l = valid.tolist()
    for i in range(nb):
        cur = i
        paths[i, 0] = cur
        for r in range(1, nr):
            if not valid_l[cur][r]:
                b = best[conn[i], r]
                if b is not None:
                    cur = b
            paths[i, r] = cur
    return paths


def _worst(values, kind):
    v = np.asarray(values, float)
    with np.errstate(invalid="ignore"):
        w = v.max(axis=1) if kind == "max" else v.min(axis=1)
    return np.where(np.isnan(v).any(axis=1), np.nan, w)


def reading_corners(space):
    """Corner indices of the readings: the nominal speed with the coldest and with the hottest windings."""
    speeds = sorted({c[0] for c in space.corners})
    sp = min(speeds, key=lambda x: abs(x - space.nominal[0]))
    ks = [k for k, c in enumerate(space.corners) if c[0] == sp]
    return min(ks, key=lambda k: space.corners[k][1]), max(ks, key=lambda k: space.corners[k][1])


def _row_field(space, base_idx, u, voltages=False):
    """No-load field current [A] of each (base, control) at the nominal speed: (cold, hot).

    With ``voltages`` also the no-load voltages [V] there, (cold, hot).
    """
    base_idx = np.asarray(base_idx, int)
    n = base_idx.size
    cold, hot = reading_corners(space)
    sub, _ = expand_candidates(space, np.concatenate([base_idx, base_idx]), np.concatenate([u, u]),
                               np.concatenate([np.full(n, cold), np.full(n, hot)]))
    v = no_load_voltage_v(sub)
    f = no_load_field_current_a(sub, v)
    if voltages:
        return f[:n], f[n:], v[:n], v[n:]
    return f[:n], f[n:]


#: Limits no drive can change: the duty cycle's equivalent current against the armature's
#: rating (the job and the machine alone). Where every option breaks one of them, a larger
#: drive cannot make any feasible, so the search does not try one (search.drive_limit_check).
DRIVE_FREE_LIMITS = ("duty_cycle_heating",)


#: Limits that bound one quantity, by the requirement they make up: the no-load voltage's mean and peak
#: (the peak follows from the mean) are one limit on one voltage (the ranking counts requirements).
LIMIT_GROUPS = {"no_load_mean_voltage": "no_load_voltage_limit", "no_load_peak_voltage": "no_load_voltage_limit"}


def solve(space, advice=True):
    """The welding dial of every option, its limits and figures.

    Every base (connection, tap, diverter) is solved for every dial current
    at the nominal corner; each option's dial starts on its own base and
    changes tap where that keeps the row inside every limit
    (:func:`dial_paths`). An option's limits are the worst of its rows.

    Returns
    -------
    (u, limits, figures, extras, evaluated)
        ``u`` is the control at the low end; ``extras`` holds each option's
        ``dial``, ``current_settings`` (the two ends), ``diverters`` and
        ``exciter``. ``advice=False`` leaves out the dial rows' bands (see
        :func:`supplycfg.search.search`).
    """
    m, job = space.machine, space.profile.welding
    nb = len(space.bases)
    targets = dial_currents_a(job)
    nr = targets.size
    nom, weak, strong = dial_corners(space)
    bi = np.repeat(np.arange(nb), nr)
    tg = np.tile(targets, nb)
    u_all, reach = solve_weld_control(space, bi, np.full(bi.size, nom), tg)
    ev = evaluate_rows(space, bi, u_all, tg)
    # a target the control cannot bracket is not reached, even where its end comes close
    ev["deviation"] = np.where(reach, ev["deviation"], np.inf)
    evaluated = bi.size * (52 + 4 + 3)
    lim_rows = row_limits(space, ev)
    sm = smallest_margin_fraction(lim_rows)
    valid = ((sm >= 0) & ev["converged"]).reshape(nb, nr)
    paths = dial_paths(space, valid, sm.reshape(nb, nr))
    pidx = paths * nr + np.arange(nr)[None, :]
    # an option's limits: the worst of its rows
    lim = {name: (_worst(np.asarray(val, float)[pidx], kind), limit, kind, unit)
           for name, (val, limit, kind, unit) in lim_rows.items()}
    duty = job.duty_cycle_percent / 100.0
    lo_a, hi_a = job.current_range_a
    deq = float(thermal_equivalent_current(hi_a, duty))
    lim["duty_cycle_heating"] = (np.full(nb, deq), m.rated_armature_current_a, "max", "A")
    # the two ends at every corner: the current's spread and the machine's figures
    ends = np.concatenate([pidx[:, 0], pidx[:, -1]])
    r_end, sub_end = _weld_current(space, bi[ends], u_all[ends], field_set_at=nom)
    evaluated += ends.size * space.nc
    nc = space.nc
    # the drive at the two ends of each dial, every corner (at the speed the drive falls to)
    half = np.arange(nb * nc)
    drive_lim, drive_figs = load_point_figures(space, nb, [
        (f"{end} end, {target:g} A", sub_end.subset(half + off), r_end["terminal_voltage_v"][half + off],
         r_end["load_current_a"][half + off])
        for end, target, off in (("low", targets[0], 0), ("high", targets[-1], nb * nc))])
    lim.update(drive_lim)
    if space.profile.drive.coupled:
        # each end's heaviest shaft power over the corners: how far up the dial a small drive carries
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            end_kw = np.nanmax(drive_figs["drive_points"].values["shaft_power_kw"], axis=1)
        drive_figs = {**drive_figs, "low_end_shaft_power_kw": end_kw[:, 0], "high_end_shaft_power_kw": end_kw[:, 1]}
    cur_end = r_end["load_current_a"].reshape(2 * nb, nc)
    spread_min, spread_max = _worst(cur_end, "min"), _worst(cur_end, "max")
    ia_end = np.abs(r_end["armature_current_a"]).reshape(2 * nb, nc).max(axis=1)
    x_end = r_end["x"].reshape(2 * nb, nc)
    e_end = r_end["generated_emf_v"].reshape(2 * nb, nc)
    isc_rows = ev["short_circuit_current_a"][pidx]
    isc = _worst(isc_rows, "max")
    ia_rows = np.abs(ev["armature_current_a"][pidx])
    vmax_rows = ev["no_load_max_v"][pidx]
    vmin_rows = ev["no_load_min_v"][pidx]
    vnl_max = _worst(vmax_rows, "max")
    with np.errstate(invalid="ignore"):
        x_rows = ev["x"][pidx]
        e_rows = ev["generated_emf_v"][pidx]
        min_x = np.fmin(np.fmin(x_end[:nb].min(axis=1), x_end[nb:].min(axis=1)), x_rows.min(axis=1))
        max_x = np.fmax(np.fmax(np.abs(x_end[:nb]).max(axis=1), np.abs(x_end[nb:]).max(axis=1)),
                        np.abs(x_rows).max(axis=1))
        min_e = np.fmin(np.fmin(e_end[:nb].min(axis=1), e_end[nb:].min(axis=1)), e_rows.min(axis=1))
    # critical field resistance over every row's control at every corner
    subc, _ = expand_candidates(space, bi[pidx.ravel()], u_all[pidx.ravel()])
    rr = critical_resistance_ratios(space, subc, pidx.size).reshape(nb, nr)
    changes = (np.array([[space.bases[b][1:3] != space.bases[a][1:3] for a, b in zip(p[:-1], p[1:])]
                         for p in paths]).reshape(nb, max(nr - 1, 0)).sum(axis=1)).astype(float)
    figs = {"low_end_current_a": ev["current_a"][pidx[:, 0]], "high_end_current_a": ev["current_a"][pidx[:, -1]],
            "low_end_current_envelope_min_a": spread_min[:nb], "low_end_current_envelope_max_a": spread_max[:nb],
            "high_end_current_envelope_min_a": spread_min[nb:], "high_end_current_envelope_max_a": spread_max[nb:],
            "max_no_load_voltage_v": vnl_max, "min_no_load_voltage_v": _worst(vmin_rows, "min"),
            "no_load_peak_voltage_v": np.asarray(no_load_peak_voltage(vnl_max), float),
            "no_load_limit_v": np.full(nb, no_load_voltage_limit(environment(job.environment).dc_limit).voltage_v),
            "no_load_mean_limit_v": np.full(nb, np.nan if job.max_no_load_voltage_v is None else job.max_no_load_voltage_v),
            "no_load_strike_min_v": np.full(nb, np.nan if job.min_no_load_voltage_v is None else job.min_no_load_voltage_v),
            "slope_low_end_v_per_a": ev["slope_v_per_a"][pidx[:, 0]],
            "slope_high_end_v_per_a": ev["slope_v_per_a"][pidx[:, -1]],
            "stuck_electrode_current_a": isc, "duty_equivalent_current_a": np.full(nb, deq),
            "max_armature_current_a": np.fmax(np.fmax(np.fmax(ia_end[:nb], ia_end[nb:]), ia_rows.max(axis=1)),
                                              np.where(np.isnan(isc), 0, isc)),
            # while welding, on the dial's rows as set by the field ammeter (which holds a row's current cold
            # as well), not the moment of a stuck electrode: what the continuous rating is held to
            "max_working_armature_current_a": ia_rows.max(axis=1),
            "min_net_mmf_a": min_x, "max_net_mmf_a": max_x, "min_generated_emf_v": min_e,
            "critical_resistance_ratio": _worst(rr, "min"),
            "tap_changes": changes,
            **drive_figs,
            "converged": (ev["converged"][pidx].all(axis=1) & r_end["converged"].reshape(2 * nb, nc).all(axis=1)[:nb]
                          & r_end["converged"].reshape(2 * nb, nc).all(axis=1)[nb:]).astype(float)}
    option_ok = (smallest_margin_fraction(lim) >= 0) & (figs["converged"] >= 1)
    extras, n_adv = dial_advice(space, targets, paths, u_all, reach, ev, valid, option_ok, bands=advice)
    evaluated += n_adv
    return u_all[pidx[:, 0]], lim, figs, extras, evaluated


def dial_advice(space, targets, paths, u_all, reach, ev, valid, option_ok, bands=True):
    """Each option's dial rows with readings and bands, its two ends, diverters and exciter.

    Bands are searched for the rows of options that hold every limit (a band
    is where the limits still hold; an option that breaks one has none);
    ``bands=False`` leaves every band and reading out, and each row's no-load
    voltage at the nominal speed (the rows keep their settings, their no-load
    voltages over the envelope, their voltages and currents).
    """
    m, job = space.machine, space.profile.welding
    nb, nr = paths.shape
    nom, weak, strong = dial_corners(space)
    # pairs (base, row) used by some dial
    used = np.unique((paths * nr + np.arange(nr)[None, :]).ravel())
    pb, pr = used // nr, used % nr
    pu = u_all[used]
    controls = [space.bases[b][3] for b in pb]
    # bands of the rows inside every limit
    lo = np.array([control_range(m, c)[0] for c in controls])
    hi = np.array([control_range(m, c)[1] for c in controls])
    banded = np.zeros(nb * nr, bool)
    banded[(paths * nr + np.arange(nr)[None, :])[option_ok].ravel()] = True
    ok = valid.ravel()[used] & banded[used] & bands
    counter = [0]

    def margin_of(k, val):
        counter[0] += len(k) * 5
        e = evaluate_rows(space, pb[k], val, targets[pr[k]], near=True, lazy=True)
        return np.where(e["converged"], smallest_margin_fraction(row_limits(space, e)), np.nan)

    band_lo, band_hi = control_band(margin_of, np.where(ok, pu, np.nan), lo, hi, scan=4, steps=16)
    have = np.isfinite(band_lo)
    # readings: no-load field current at the nominal speed, cold and hot, at each row's control and
    # at both ends of its band, in one solve (most rows have no band: their copies are solved once)
    n_used = used.size
    if bands:
        c3, h3, _, v3 = _row_field(space, np.tile(pb, 3), np.concatenate(
            [pu, np.where(have, band_lo, pu), np.where(have, band_hi, pu)]), voltages=True)
        c0, cl, ch = c3[:n_used], c3[n_used:2 * n_used], c3[2 * n_used:]
        h0, hl, hh = h3[:n_used], h3[n_used:2 * n_used], h3[2 * n_used:]
        if reading_corners(space)[1] == nom:
            vnl_nom = v3[:n_used]  # the nominal corner is the readings' hot one: its no-load voltages are solved there
        else:
            vnl_nom = no_load_voltage_v(expand_candidates(space, pb, pu, np.full(n_used, nom))[0])
    else:
        # no readings, and no row's no-load voltage at nominal speed: that is advice too
        c0 = h0 = cl = hl = ch = hh = vnl_nom = np.full(n_used, np.nan)
    if have.any():
        counter[0] += 4 * used.size * space.nc
    pos = {int(p): j for j, p in enumerate(used)}
    rc = job.cable_resistance_ohm
    di = current_change_per_arc_volt_a_per_v(ev["slope_v_per_a"], rc)
    hot_t = max(c[1] for c in space.corners)
    # each row's numbers as JSON-ready columns (one conversion per column, not per cell)
    cur = np.asarray(ev["current_a"], float)[used]
    col = {k: finite_or_none_lists(a) for k, a in (
        ("welding_current_a", cur), ("terminal_voltage_v", np.asarray(ev["terminal_voltage_v"], float)[used]),
        ("arc_voltage_v", conventional_load_voltage(job.process, cur)), ("no_load_voltage_v", vnl_nom),
        ("no_load_voltage_min_v", np.asarray(ev["no_load_min_v"], float)[used]),
        ("no_load_voltage_max_v", np.asarray(ev["no_load_max_v"], float)[used]),
        ("short_circuit_current_a", np.asarray(ev["short_circuit_current_a"], float)[used]),
        ("slope_v_per_a", np.asarray(ev["slope_v_per_a"], float)[used]),
        ("current_change_per_arc_volt_a_per_v", np.asarray(di, float)[used]))}
    pu_l, h0_l = finite_or_none_lists(pu), finite_or_none_lists(h0)
    reach_l, valid_l = np.asarray(reach, bool)[used].tolist(), valid.ravel()[used].tolist()
    target_l = np.asarray(targets, float).tolist()
    rows_of = []
    for j in range(used.size):
        b, r = int(pb[j]), int(pr[j])
        conn, tap, d, ctl = space.bases[b]
        rd = bd = None
        if bands:
            band_u = band_field = None
            if have[j]:
                band_u = (band_lo[j], band_hi[j])
                band_field = (hh[j], cl[j]) if weak_end_is_high(ctl) else (hl[j], ch[j])
            rd, bd = readings_and_band(ctl, float(pu[j]), float(c0[j]), float(h0[j]), band_u, band_field,
                                       m.rheostat_max_ohm, *(((cl[j], ch[j]), (hl[j], hh[j])) if have[j] else ()))
        row = {"current_a": target_l[r], "series_turns": tap if conn in USES_SERIES else None,
               "diverter_ohm": d,
               "field_current_a": pu_l[j] if ctl == "field-current" else h0_l[j],
               "rheostat_ohm": pu_l[j] if ctl in ("rheostat", "exciter") else None,
               **{k: v[j] for k, v in col.items()},
               "reachable": reach_l[j], "inside_limits": valid_l[j],
               "readings": rd, "band": bd}
        rows_of.append(row)
    extras = []
    for i in range(nb):
        dial = []
        for r in range(nr):
            row = dict(rows_of[pos[int(paths[i, r] * nr + r)]])
            row["tap_change"] = bool(r > 0 and space.bases[paths[i, r]][1:3] != space.bases[paths[i, r - 1]][1:3])
            dial.append(row)
        ctl = space.bases[i][3]
        key = "field_current_a" if ctl == "field-current" else "rheostat_ohm"
        cs = []
        for row in (dial[0], dial[-1]):
            cs.append({"current_a": row["current_a"], "series_turns": row["series_turns"],
                       "diverter_ohm": row["diverter_ohm"], key: row[key],
                       "terminal_voltage_v": row["terminal_voltage_v"], "arc_voltage_v": row["arc_voltage_v"],
                       "no_load_voltage_v": row["no_load_voltage_v"], "reachable": row["reachable"]})
        divs = {}
        for row in dial:
            if row["diverter_ohm"] is not None:
                k = (row["series_turns"], row["diverter_ohm"])
                divs[k] = max(divs.get(k, 0.0), row["welding_current_a"] or 0.0)
        diverters = [dict(diverter_rating(m, t, d, cur, hot_t), series_turns=t) for (t, d), cur in sorted(divs.items())]
        exc = None
        if ctl in ("exciter", "field-current"):
            vals = [row["rheostat_ohm"] if ctl == "exciter" else row["field_current_a"] for row in dial]
            vals = [v for v in vals if v is not None]
            if vals:
                exc = exciter_supply(m, ctl, min(vals) if ctl == "exciter" else max(vals), hot_t)
        extras.append({"dial": dial, "current_settings": cs, "diverters": diverters, "exciter": exc,
                       "readings": None, "band": None})
    return extras, counter[0]


OBJECTIVE_LABEL = ("the fewest tap or diverter changes along the welding dial (every row inside the no-load "
                   "window)")
#: The objective as a table shows it: words, unit and the factor from the objective's value.
OBJECTIVE_SHOWN = ("tap or diverter changes along the dial", "", 1.0)


def objective(figures):
    """Tap changes along the dial (smaller is better); NaN where unknown.

    Only options whose whole dial holds every limit (the no-load window
    included) are ranked by it.
    """
    return np.asarray(figures["tap_changes"], float)


# ===========================================================================
# cautions
# ===========================================================================

def drive_carries_up_to_a(profile, f, share=1.0):
    """Highest welding current [A] the drive gives steadily where its rating falls inside the dial
    (None where the whole dial is within it, or none of it is); ``share`` of the rating, e.g. an engine's
    short overload.

    The shaft power is known at the dial's two ends (``low_end_shaft_power_kw``,
    ``high_end_shaft_power_kw``); between them it is taken as linear in the
    output on the conventional load line plus the leads (the losses change
    little along a drooping dial), an estimate to round, not a rating.
    """
    drive = profile.drive
    lo_kw, hi_kw = f.get("low_end_shaft_power_kw"), f.get("high_end_shaft_power_kw")
    if not drive.coupled or not drive.rated_power_kw or lo_kw is None or hi_kw is None:
        return None
    rating = share * drive.rated_power_kw
    if not (lo_kw < rating < hi_kw):
        return None
    job = profile.welding
    amps = np.linspace(*job.current_range_a, 401)
    out_kw = amps * welding_line_voltage_v(job, amps) / 1e3
    shaft = lo_kw + (hi_kw - lo_kw) * (out_kw - out_kw[0]) / (out_kw[-1] - out_kw[0])
    return float(np.interp(rating, shaft, amps))


def option_cautions(machine, profile, setting, f):
    """Welding cautions of one setting from its figures ``f``."""
    out = []
    vi, strike = f.get("idle_no_load_voltage_v"), profile.welding.min_no_load_voltage_v
    if vi is not None and strike is not None and vi < strike and profile.drive.idle_speed_rpm is not None:
        out.append(caution("welding-strike-at-idle", "note",
                           f"At the engine's idle the no-load voltage is about {vi:.0f} V, below the {strike:g} V an "
                           "arc needs to strike: let the engine come up to speed before striking (touch the work to "
                           "wake an automatic idle, or switch the idle off for electrodes that need the full "
                           "no-load voltage).",
                           "the job's strike voltage; engine idle from the profile (common practice)",
                           idle_no_load_voltage_v=vi, min_no_load_voltage_v=strike))
    top = drive_carries_up_to_a(profile, f)
    if top is not None:
        drive = profile.drive
        rating = drive.rated_power_kw
        if drive.kind == "motor":
            beyond = "above that it runs hot and its protection trips: keep to the lower rows or fit a larger motor."
        else:
            over = drive_carries_up_to_a(profile, f, ENGINE_OVERLOAD_FACTOR)
            short = (f"up to about {over:.0f} A only within its short overload (an hour in twelve), and above that "
                     "it bogs down" if over is not None else "above that only within its short overload (an hour "
                     "in twelve)")
            beyond = f"{short}: keep to the lower rows or fit a larger engine."
        out.append(caution("welding-drive-dial", "note",
                           f"The {rating:g} kW {drive.kind} carries the dial steadily up to about {top:.0f} A (on the "
                           f"conventional load line); {beyond}",
                           "shaft power at the dial's two ends from the power flow, taken as linear in the arc "
                           "power between them (an estimate); conventional load line, IEC 60974-1 (seen); engine "
                           "overload 110 % for one hour in twelve, ISO 3046-1 (from memory)",
                           drive_carries_up_to_a=top, drive_rated_power_kw=rating))
    pk, lim = f.get("no_load_peak_voltage_v"), f.get("no_load_limit_v")
    if pk is None and lim is not None:
        out.append(caution("welding-no-load-voltage-unknown", "stop",
                           "The no-load voltage could not be determined at some setting of the range: it runs away "
                           "past the measured open-circuit curve, so it may exceed the limit. Measure the curve "
                           "further before using this setting.",
                           "IEC 60974-1 rated no-load voltage, DC 113 V peak (seen); circuit model (design note)",
                           no_load_limit_v=lim))
    if pk is not None and lim is not None and pk > lim:
        out.append(caution("welding-no-load-voltage", "stop",
                      f"No-load voltage reaches {pk:.1f} V peak, above the {lim:.0f} V limit: a welder touching the "
                      "electrode and the work can get a dangerous shock.",
                      "IEC 60974-1 rated no-load voltage, DC 113 V peak (seen); lower limits as set in the profile",
                      no_load_peak_voltage_v=pk, no_load_limit_v=lim))
    mean, mean_lim = f.get("max_no_load_voltage_v"), f.get("no_load_mean_limit_v")
    if mean is not None and mean_lim is not None and mean > mean_lim:
        out.append(caution("welding-no-load-local-limit", "stop",
                      f"No-load voltage reaches {mean:.1f} V, above the {mean_lim:.0f} V limit set for this job (the "
                      "highest at the top of the dial, top speed, cold windings): a welder touching the electrode "
                      "and the work gets more than the site allows. A dial held under it reaches less current: "
                      "narrow the current range, lower the speed, or check what the site rule allows.",
                      "the profile's max_no_load_voltage_v (a local rule, e.g. US 29 CFR 1910.254(b)(3): 100 V DC "
                      "for manual welding)",
                      max_no_load_voltage_v=mean, limit_v=mean_lim))
    de, rated = f.get("duty_equivalent_current_a"), machine.rated_armature_current_a
    if de is not None and de > rated:
        out.append(caution("welding-duty-cycle", "warn",
                      f"At the top current and the stated duty cycle the armature heats like {de:.0f} A continuous, "
                      f"above its {rated:.0f} A rating: shorten the duty cycle or lower the current. I*sqrt(duty) is "
                      "optimistic where the winding heats faster than the 10-minute cycle; the maker's duty rating "
                      "comes first.",
                      "duty cycle over a 10-minute period (IEC 60974-1, seen); I*sqrt(duty) equivalence (rating practice, from memory)",
                      duty_equivalent_current_a=de, rated_armature_current_a=rated))
    n = f.get("tap_changes")
    if n is not None and n > 0:
        out.append(caution("welding-tap-change", "warn",
                      f"This dial changes the series tap or the diverter {n:.0f} time{'s' if n != 1 else ''} along its "
                      "range: change them only with the arc out. A tap link or diverter switch is not made to break "
                      "the welding current: opened under load it draws an arc, and the series field's inductance "
                      "drives a spike across it.",
                      "common practice: series-field links and diverter switches are set off load",
                      tap_changes=n))
    if profile.welding.environment == "increased-shock-hazard":
        # required measures, not background (safety review): a warning, counted on the sheet's first page
        out.append(caution("welding-increased-hazard", "warn",
                      environment("increased-shock-hazard").precautions.capitalize() + ".",
                      "IEC 60974-1 increased hazard of electric shock (seen); measures are common practice"))
    return out


def stuck_electrode_on_curve(load_current_a, terminal_voltage_v, armature_current_a, cable_resistance_ohm):
    """Where a traced characteristic meets a stuck electrode: a short through the welding leads.

    Parameters
    ----------
    load_current_a, terminal_voltage_v, armature_current_a : array_like
        The curve's points [A], [V], [A], from no load towards short circuit.
    cable_resistance_ohm : float
        Electrode and return leads together [ohm].

    Returns
    -------
    (load current [A], armature current [A], reached)
        Linear between the two points either side of ``V = R I``; where the
        curve stops before meeting it, its last point and ``reached`` False.
    """
    il = np.asarray(load_current_a, float)
    v = np.asarray(terminal_voltage_v, float)
    ia = np.abs(np.asarray(armature_current_a, float))
    if il.size == 0:
        return None, None, False
    h = v - cable_resistance_ohm * il
    k = np.flatnonzero((h <= 0) & (il > 0))
    if k.size == 0 or k[0] == 0:
        return float(il[-1]), float(ia[-1]), False
    j = k[0]
    w = h[j - 1] / (h[j - 1] - h[j])
    return float(il[j - 1] + w * (il[j] - il[j - 1])), float(ia[j - 1] + w * (ia[j] - ia[j - 1])), True


def stuck_electrode_cautions(machine, profile, load_current_a, terminal_voltage_v, armature_current_a):
    """A ``stop`` where a stuck electrode on this curve drives the armature past its short-time limit:
    with a welding set a short through the leads is an everyday event, not a fault to protect against
    (``curve`` with a welding profile; the search holds each option to the same limit)."""
    rc = profile.welding.cable_resistance_ohm
    il, ia, reached = stuck_electrode_on_curve(load_current_a, terminal_voltage_v, armature_current_a, rc)
    if ia is None or not ia > machine.peak_current_a:
        return []
    return [caution("welding-stuck-electrode", "stop",
                    f"A stuck electrode (a short through the {rc:g} ohm leads) drives the armature to "
                    f"{'at least ' if not reached else 'about '}{ia:.0f} A, above the machine's short-time limit "
                    f"{machine.peak_current_a:.0f} A: commutation fails (sparking, flashover). Use a setting with "
                    "more droop (more differential series turns or less field).",
                    "machine file peak_armature_current_a (default 2 x rated, common practice); the job's "
                    "cable_resistance_ohm; circuit model",
                    stuck_electrode_current_a=il, stuck_electrode_armature_current_a=ia,
                    peak_armature_current_a=machine.peak_current_a)]


def no_load_cautions(machine, profile, setting, no_load_voltage_v):
    """The welding job's no-load checks of one setting at its own speed and temperature (``curve`` and
    ``point`` with a welding profile): the limits of :func:`option_cautions` on the no-load voltage
    [V], and a warning where it is below what the process needs to strike."""
    job = profile.welding
    v = no_load_voltage_v
    f = {"no_load_limit_v": no_load_voltage_limit(environment(job.environment).dc_limit).voltage_v,
         "no_load_mean_limit_v": job.max_no_load_voltage_v}
    if v is not None:
        f.update(max_no_load_voltage_v=v, no_load_peak_voltage_v=float(no_load_peak_voltage(v)))
    out = option_cautions(machine, profile, setting, f)
    if v is not None and job.min_no_load_voltage_v is not None and v < job.min_no_load_voltage_v:
        out.append(caution("welding-no-load-strike", "warn",
                           f"No-load voltage {v:.1f} V is below the {job.min_no_load_voltage_v:g} V the arc needs to "
                           "strike: the electrode sticks instead of striking.", _STRIKE_MMA,
                           no_load_voltage_v=v, min_no_load_voltage_v=job.min_no_load_voltage_v))
    return out


#: Machine rules that do not fit a welding set: its loaded voltage sits far below its no-load voltage (which
#: the welding limits hold), and a loaded voltage above the plate comes from long leads, whose own note says
#: the cure; the rated-voltage rule's 'use a machine rated for the job's voltage' misleads (second welding review).
MACHINE_RULES_LEFT_OUT = ("over-voltage",)

#: Voltage the welding leads may drop at the top current before a note says so [V]: welding-cable charts
#: size the leads for about 4 V (common practice, from memory).
LEAD_DROP_NOTE_V = 4.0


def profile_cautions(machine, profile):
    """Cautions of the welding job as a whole, whatever the setting."""
    out = []
    job = profile.welding
    top = job.current_range_a[1]
    drop = job.cable_resistance_ohm * top
    if drop > LEAD_DROP_NOTE_V:
        out.append(caution("welding-lead-drop", "note",
                      f"The leads ({job.cable_resistance_ohm:g} ohm, go and return) drop {drop:.1f} V at {top:g} A and "
                      f"turn {drop * top / 1e3:.2g} kW into heat: leads are usually sized for about "
                      f"{LEAD_DROP_NOTE_V:g} V. Use heavier or shorter leads.",
                      "welding-cable sizing charts, about 4 V drop (common practice, from memory)",
                      lead_drop_v=drop, cable_resistance_ohm=job.cable_resistance_ohm))
    out.append(caution("welding-no-load-rule", "note",
                  "The open-circuit voltage of a DC welding source must not exceed 113 V peak in any environment; "
                  "local rules may set less (e.g. 100 V DC for manual welding in the US).",
                  "IEC 60974-1 (seen); US 29 CFR 1910.254(b)(3) (seen)"))
    return out
