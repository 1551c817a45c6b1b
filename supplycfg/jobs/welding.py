"""Arc welding: load lines, no-load limits, environments, the job's figures, limits and cautions.

The tables keep every value beside its source. Marks: "seen" = read in a
public copy of the source; "from memory" = recalled; "common practice" = a
trade rule of thumb.
"""

import math
from dataclasses import dataclass, field

import numpy as np

from ..cautions import caution
from ..circuit import _bisect, _params, machine_state, no_load_voltages, normal_points
from ..envelope import control_range, critical_resistance_ratios, expand_candidates, worst_over_corners
from ..powerflow import load_point_figures
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
    basis: dict = field(default_factory=dict, compare=False, repr=False)


WELDING_PROCESSES = {
    "manual-metal-arc": table_entry(WeldingProcess, "manual-metal-arc", {
        "load_line_offset_v": (20.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.04, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (44.0, _IEC_60974_1_TOP),
        "characteristic": ("drooping", "manual arc needs a drooping source (textbooks on utilisation of electrical energy; seen)"),
    }),
    "tungsten-inert-gas": table_entry(WeldingProcess, "tungsten-inert-gas", {
        "load_line_offset_v": (10.0, _IEC_60974_1_LINES),
        "load_line_slope_v_per_a": (0.04, _IEC_60974_1_LINES),
        "load_line_knee_a": (600.0, _IEC_60974_1_TOP),
        "load_line_top_v": (34.0, _IEC_60974_1_TOP),
        "characteristic": ("drooping", "TIG needs a constant-current (drooping) source (common practice)"),
    }),
    "metal-inert-gas": table_entry(WeldingProcess, "metal-inert-gas", {
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


@dataclass(frozen=True)
class WeldingJob:
    """Feed an arc. Field names are the ``[welding]`` keys; ``max_no_load_voltage_v`` None for none."""

    process: str
    current_range_a: tuple
    environment: str
    duty_cycle_percent: float
    cable_resistance_ohm: float
    max_no_load_voltage_v: float | None


def read_job(t, source):
    """The ``[welding]`` table ``t`` of a profile read from ``source``, checked."""
    proc = t.text("process", choices=tuple(WELDING_PROCESSES))
    cur = read_pair(t, "current_range_a", source, low=0, low_open=True, high=MAX_CURRENT_A)
    env = t.text("environment", DEFAULT_ENVIRONMENT, choices=tuple(ENVIRONMENTS))
    duty = t.number("duty_cycle_percent", DEFAULT_DUTY_CYCLE_PERCENT, low=0, low_open=True, high=100)
    rc = t.number("cable_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=MAX_OHM)
    top = NO_LOAD_VOLTAGE_LIMITS[ENVIRONMENTS[env].dc_limit].voltage_v
    vmax = t.number("max_no_load_voltage_v", None, low=0, low_open=True, high=top, what="mean volts")
    return WeldingJob(process=proc, current_range_a=cur, environment=env, duty_cycle_percent=duty,
                      cable_resistance_ohm=rc, max_no_load_voltage_v=vmax)


def welding_line_voltage_v(job, current_a):
    """Terminal voltage [V] on the process's conventional load line plus the welding leads."""
    return np.asarray(conventional_load_voltage(job.process, current_a), float) + \
        np.asarray(current_a, float) * job.cable_resistance_ohm


def _solve_weld_control(space, base_idx, corner_idx, target_a):
    """Control value putting the operating point at ``target_a`` on the welding line."""
    job = space.profile.welding
    base_idx = np.asarray(base_idx, int)
    n = base_idx.size
    lo = np.array([control_range(space.machine, space.bases[b][3])[0] for b in base_idx])
    hi = np.array([control_range(space.machine, space.bases[b][3])[1] for b in base_idx])
    vt = welding_line_voltage_v(job, target_a)
    it = np.full(n, float(target_a))

    def h(u):
        sub, _ = expand_candidates(space, base_idx, u, corner_idx)
        p = _params(sub, np.arange(sub.n))
        return machine_state(sub, p, np.full(n, vt), it)["h"]

    ha, hb = h(lo), h(hi)
    ok = np.signbit(ha) != np.signbit(hb)
    u = _bisect(h, lo, hi, ha, 50)
    # unreachable: take the end that comes closer
    u = np.where(ok, u, np.where(np.abs(ha) < np.abs(hb), lo, hi))
    return u, ok


def _weld_current(space, base_idx, u, corner_idx=None):
    """Welding current on the line at every corner (or one), the machine's normal point."""
    job = space.profile.welding
    sub, rows = expand_candidates(space, base_idx, u, corner_idx)
    r = normal_points(sub, np.zeros(sub.n), np.full(sub.n, sub.imax),
                      v_of=lambda t: welding_line_voltage_v(job, t))
    return r, sub


def _char_slope(sub, v, il):
    """Slope dV/dIL [V/A] of each candidate's characteristic at (v, il): -h_IL/h_V."""
    p = _params(sub, np.arange(sub.n))
    dv = 1e-4 * np.maximum(1.0, np.abs(v)); di = 1e-4 * np.maximum(1.0, np.abs(il))
    h_v = (machine_state(sub, p, v + dv, il)["h"] - machine_state(sub, p, v - dv, il)["h"]) / (2 * dv)
    h_i = (machine_state(sub, p, v, il + di)["h"] - machine_state(sub, p, v, il - di)["h"]) / (2 * di)
    return -h_i / h_v


def evaluate_range_ends(space):
    m, prof = space.machine, space.profile
    job = prof.welding
    nb = len(space.bases)
    bi = np.arange(nb)
    nc = space.nc
    # nominal corner: closest to mean speed, hottest windings
    nom = min(range(nc), key=lambda k: (abs(space.corners[k][0] - space.nominal[0]), -space.corners[k][1]))
    worst = max(range(nc), key=lambda k: (space.corners[k][0], -space.corners[k][1]))  # top speed, coldest
    lo_a, hi_a = job.current_range_a
    env = environment(job.environment)
    limit_peak = no_load_voltage_limit(env.dc_limit).voltage_v
    per = {}
    evaluated = 0
    drive_pts = []
    for end, target in (("low", lo_a), ("high", hi_a)):
        u, ok = _solve_weld_control(space, bi, np.full(nb, nom), target)
        evaluated += nb * 52
        r, sub = _weld_current(space, bi, u)
        evaluated += sub.n
        drive_pts.append((f"{end} end, {target:g} A", sub, r["terminal_voltage_v"], r["load_current_a"]))
        cur = r["load_current_a"].reshape(nb, nc)
        # the control is solved at the nominal corner; elsewhere the current drifts (a figure, not a limit)
        dev = np.abs(cur[:, nom] / target - 1.0)
        dev = np.where(np.isnan(dev) | ~ok, np.inf, dev)
        subw, _ = expand_candidates(space, bi, u, np.full(nb, worst))
        vnl = no_load_voltages(subw)
        evaluated += nb
        rn, subn = _weld_current(space, bi, u, np.full(nb, nom))
        slope = _char_slope(subn, rn["terminal_voltage_v"], rn["load_current_a"])
        per[end] = {"u": u, "reachable": ok, "dev": dev, "current": cur, "vnl": vnl,
                    "slope": slope, "v": rn["terminal_voltage_v"], "x": r["x"].reshape(nb, nc).min(axis=1), "xabs": np.abs(r["x"]).reshape(nb, nc).max(axis=1),
                    "e": r["generated_emf_v"].reshape(nb, nc).min(axis=1),
                    "ia": np.abs(r["armature_current_a"]).reshape(nb, nc).max(axis=1),
                    "conv": r["converged"].reshape(nb, nc).all(axis=1)}
    # stuck electrode at the top setting, worst corner: the cable alone as load
    subs, _ = expand_candidates(space, bi, per["high"]["u"], np.full(nb, worst))
    rs = normal_points(subs, np.zeros(nb), np.full(nb, subs.imax),
                       v_of=lambda t: job.cable_resistance_ohm * t)
    isc = np.where(rs["found"], rs["load_current_a"], np.nan)
    duty = job.duty_cycle_percent / 100.0
    deq = float(thermal_equivalent_current(hi_a, duty))
    vnl_max = np.fmax(per["low"]["vnl"], per["high"]["vnl"])
    peak = np.asarray(no_load_peak_voltage(vnl_max), float)
    cm_lo = np.asarray(characteristic_margin_v_per_a(job.process, per["low"]["slope"]), float)
    cm_hi = np.asarray(characteristic_margin_v_per_a(job.process, per["high"]["slope"]), float)
    lim = {
        "current_low_end": (per["low"]["dev"], WELD_CURRENT_TOLERANCE, "max", "fraction"),
        "current_high_end": (per["high"]["dev"], WELD_CURRENT_TOLERANCE, "max", "fraction"),
        "no_load_peak_voltage": (peak, limit_peak, "max", "V"),
        "characteristic_slope_low": (-cm_lo, 0.0, "max", "V/A"),
        "characteristic_slope_high": (-cm_hi, 0.0, "max", "V/A"),
        "stuck_electrode_current": (np.where(np.isnan(isc), np.inf, isc), m.peak_current_a, "max", "A"),
        "duty_cycle_heating": (np.full(nb, deq), m.rated_armature_current_a, "max", "A"),
    }
    if job.max_no_load_voltage_v is not None:
        lim["no_load_mean_voltage"] = (vnl_max, job.max_no_load_voltage_v, "max", "V")
    drive_lim, drive_figs = load_point_figures(space, nb, drive_pts)
    lim.update(drive_lim)
    spread = {e: (worst_over_corners(per[e]["current"], nb, nc, "min"), worst_over_corners(per[e]["current"], nb, nc, "max"))
              for e in ("low", "high")}
    figs = {"low_end_current_a": per["low"]["current"][:, nom], "high_end_current_a": per["high"]["current"][:, nom],
            "low_end_current_envelope_min_a": spread["low"][0], "low_end_current_envelope_max_a": spread["low"][1],
            "high_end_current_envelope_min_a": spread["high"][0], "high_end_current_envelope_max_a": spread["high"][1],
            "max_no_load_voltage_v": vnl_max, "no_load_peak_voltage_v": peak,
            "no_load_limit_v": np.full(nb, limit_peak),
            "no_load_mean_limit_v": np.full(nb, np.nan if job.max_no_load_voltage_v is None else job.max_no_load_voltage_v),
            "slope_low_end_v_per_a": per["low"]["slope"], "slope_high_end_v_per_a": per["high"]["slope"],
            "stuck_electrode_current_a": isc, "duty_equivalent_current_a": np.full(nb, deq),
            "max_armature_current_a": np.fmax(per["high"]["ia"], np.where(np.isnan(isc), 0, isc)),
            "min_net_mmf_a": np.fmin(per["low"]["x"], per["high"]["x"]),
            "max_net_mmf_a": np.fmax(per["low"]["xabs"], per["high"]["xabs"]),
            "min_generated_emf_v": np.fmin(per["low"]["e"], per["high"]["e"]),
            "converged": (per["low"]["conv"] & per["high"]["conv"]).astype(float)}
    subc, _ = expand_candidates(space, np.concatenate([bi, bi]), np.concatenate([per["low"]["u"], per["high"]["u"]]))
    rr = critical_resistance_ratios(space, subc, 2 * nb)
    figs["critical_resistance_ratio"] = np.fmin(rr[:nb], rr[nb:])
    figs.update(drive_figs)
    return lim, figs, per, evaluated


def solve(space):
    """Field control for each end of the current range and the limits and figures.

    Returns
    -------
    (u, limits, figures, extras, evaluated)
        ``u`` is the control at the low end; ``extras`` holds each candidate's
        ``current_settings`` (one per end of the range).
    """
    lim, figs, per, evaluated = evaluate_range_ends(space)
    job = space.profile.welding
    extras = []
    for i, base in enumerate(space.bases):
        cs = []
        for end, target in (("low", job.current_range_a[0]), ("high", job.current_range_a[1])):
            d = {"current_a": float(target)}
            key = "field_current_a" if base[3] == "field-current" else "rheostat_ohm"
            uval = float(per[end]["u"][i])
            d[key] = uval if math.isfinite(uval) else None  # a series machine has no field control
            d["terminal_voltage_v"] = float(per[end]["v"][i]) if math.isfinite(per[end]["v"][i]) else None
            d["no_load_voltage_v"] = float(per[end]["vnl"][i]) if math.isfinite(per[end]["vnl"][i]) else None
            d["reachable"] = bool(per[end]["reachable"][i])
            cs.append(d)
        extras.append({"current_settings": cs})
    return per["low"]["u"], lim, figs, extras, evaluated


# ===========================================================================
# cautions
# ===========================================================================

def option_cautions(machine, profile, setting, f):
    """Welding cautions of one setting from its figures ``f``."""
    out = []
    pk, lim = f.get("no_load_peak_voltage_v"), f.get("no_load_limit_v")
    if pk is not None and lim is not None and pk > lim:
        out.append(caution("welding-no-load-voltage", "stop",
                      f"No-load voltage reaches {pk:.1f} V peak, above the {lim:.0f} V limit: a welder touching the "
                      "electrode and the work can get a dangerous shock.",
                      "IEC 60974-1 rated no-load voltage, DC 113 V peak (seen); lower limits as set in the profile",
                      no_load_peak_voltage_v=pk, no_load_limit_v=lim))
    mean, mean_lim = f.get("max_no_load_voltage_v"), f.get("no_load_mean_limit_v")
    if mean is not None and mean_lim is not None and mean > mean_lim:
        out.append(caution("welding-no-load-local-limit", "stop",
                      f"No-load voltage {mean:.1f} V is above the {mean_lim:.0f} V limit set for this job.",
                      "the profile's max_no_load_voltage_v (a local rule, e.g. US 29 CFR 1910.254(b)(3): 100 V DC for manual welding, seen)",
                      max_no_load_voltage_v=mean, limit_v=mean_lim))
    de, rated = f.get("duty_equivalent_current_a"), machine.rated_armature_current_a
    if de is not None and de > rated:
        out.append(caution("welding-duty-cycle", "warn",
                      f"At the top current and the stated duty cycle the armature heats like {de:.0f} A continuous, "
                      f"above its {rated:.0f} A rating: shorten the duty cycle or lower the current. I*sqrt(duty) is "
                      "an upper bound; the maker's duty rating comes first.",
                      "duty cycle over a 10-minute period (IEC 60974-1, seen); I*sqrt(duty) equivalence (rating practice, from memory)",
                      duty_equivalent_current_a=de, rated_armature_current_a=rated))
    if profile.welding.environment == "increased-shock-hazard":
        out.append(caution("welding-increased-hazard", "note",
                      environment("increased-shock-hazard").precautions.capitalize() + ".",
                      "IEC 60974-1 increased hazard of electric shock (seen); measures are common practice"))
    return out


def profile_cautions(machine, profile):
    """Cautions of the welding job as a whole, whatever the setting."""
    out = []
    out.append(caution("welding-no-load-rule", "note",
                  "The open-circuit voltage of a DC welding source must not exceed 113 V peak in any environment; "
                  "local rules may set less (e.g. 100 V DC for manual welding in the US).",
                  "IEC 60974-1 (seen); US 29 CFR 1910.254(b)(3) (seen)"))
    return out
