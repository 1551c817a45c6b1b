"""Lighting or a DC bus at the far end of a feeder: lamps, the job's figures and limits.

The lamp table keeps every value beside its source ("from memory" = recalled,
not checked against a copy).
"""

from dataclasses import dataclass, field

import numpy as np

from ..cautions import caution, job_current_cautions
from ..circuit import (NORMAL_POINTS_GRID, candidate_params, machine_state, no_load_voltages, normal_points,
                       terminal_voltage_at_armature_current, voltage_span)
from ..envelope import (COARSE, FINE, critical_resistance_ratios, expand_candidates, optimise_control,
                        worst_over_corners)
from ..powerflow import load_point_figures
from ..readings import no_load_setting_field, option_advice
from ..validate import MAX_CURRENT_A, MAX_OHM, MAX_VOLTAGE_V, MIN_VOLTAGE_V, named_entry, read_pair, table_entry
from ..errors import InputError

#: The profile table this job reads.
TABLE = "lighting"
#: Load currents checked across the range.
LOAD_POINTS = 5
#: Most grid points (rows x grid) in one solve of the feeder's load points: several currents share a
#: call (the solver's fixed cost is paid once) up to this size, beyond which the arrays, not the
#: calls, cost (measured at the machine file's bounds, whose final solve has a 401-point grid: all
#: five currents in one call took the search to 157 MB, one current at a time 64 MB).
FEEDER_BATCH_POINTS = 2 ** 18
#: Share of the feeder's voltage grid (a third of nominal up to the engine's span) scanned first,
#: from its top: the machine sits near nominal, in the lower half of that range; any share gives
#: the same points, this one the fewest evaluations on the demo job (measured).
FEEDER_SCAN_TOP_SHARE = 0.7

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
    "incandescent": table_entry(Lamp, "incandescent", {
        "light_exponent": (LIGHT_EXPONENT, _IES), "power_exponent": (POWER_EXPONENT, _IES),
        "life_exponent": (LIFE_EXPONENT, _IES)}),
    "electronic": table_entry(Lamp, "electronic", {
        "light_exponent": (None, "an electronic driver holds its output over its input range: no estimate"),
        "power_exponent": (None, "as above"), "life_exponent": (None, "as above")}),
    "none": table_entry(Lamp, "none", {
        "light_exponent": (None, "no lamps: no estimate"), "power_exponent": (None, "as above"),
        "life_exponent": (None, "as above")}),
}


def lamp(name):
    """The :class:`Lamp` called ``name``; an InputError lists the valid names."""
    return named_entry(LAMPS, name, "lamp")


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
# the [lighting] table
# ===========================================================================

#: Feeder resistance when none is given: the lamps sit at the machine's terminals.
DEFAULT_CABLE_RESISTANCE_OHM = 0.0
#: Supply tolerance: no single standard for DC; +-5 % is common practice.
DEFAULT_TOLERANCE_PERCENT = 5.0
#: Narrowest band a job may ask [% either side]: a voltmeter of class 0.5 (IEC 60051-2, from memory) reads
#: no finer, so a band inside it cannot be set or checked.
MIN_TOLERANCE_PERCENT = 0.5
#: Lamp type when none is given: no lamp estimate.
DEFAULT_LAMP = "none"


@dataclass(frozen=True)
class LightingJob:
    """Feed lamps at the far end of a feeder. Field names are the ``[lighting]`` keys."""

    nominal_voltage_v: float
    load_current_a: tuple
    tolerance_percent: float
    feeder_resistance_ohm: float
    lamp: str


#: The dataclass of the [lighting] table; its fields are the table's keys.
JOB_TABLE = LightingJob


def read_job(t, source):
    """The ``[lighting]`` table ``t`` of a profile read from ``source``, checked."""
    vn = t.number("nominal_voltage_v", low=MIN_VOLTAGE_V, high=MAX_VOLTAGE_V)
    cur = read_pair(t, "load_current_a", source, low=0, high=MAX_CURRENT_A)
    if cur[1] <= 0:
        raise InputError(source, t.key("load_current_a"), f"is [{cur[0]:g}, {cur[1]:g}]; allowed: a full load above 0 A")
    tol = t.number("tolerance_percent", DEFAULT_TOLERANCE_PERCENT, low=MIN_TOLERANCE_PERCENT, high=50)
    rf = t.number("feeder_resistance_ohm", DEFAULT_CABLE_RESISTANCE_OHM, low=0, high=MAX_OHM)
    lp = t.text("lamp", DEFAULT_LAMP, choices=tuple(LAMPS))
    return LightingJob(nominal_voltage_v=vn, load_current_a=cur, tolerance_percent=tol,
                       feeder_resistance_ohm=rf, lamp=lp)


def evaluate_feeder(space, base_idx, u, booster=False, res=COARSE):
    """Limits and figures of candidates feeding a load over a feeder (lighting, or a booster's feeder)."""
    m, prof = space.machine, space.profile
    job = prof.booster if booster else prof.lighting
    n = len(base_idx)
    sub, rows = expand_candidates(space, base_idx, u)
    lo, hi = job.load_current_a
    currents = np.linspace(lo, hi, LOAD_POINTS)
    nominal = job.bus_voltage_v if booster else job.nominal_voltage_v
    tol = job.tolerance_percent / 100.0
    vload = np.empty((sub.n, currents.size)); ia_all = np.empty_like(vload); x_all = np.empty_like(vload)
    e_all = np.empty_like(vload); conv = np.ones(sub.n, bool)
    drive_pts = []
    p = candidate_params(sub, np.arange(sub.n))
    if not booster:
        # several load currents in one solve, a copy of the rows for each (each row's point is its own):
        # a machine sitting below a third of the nominal voltage has failed anyway; the top is
        # the engine's whole voltage span (widened further while the machine is above the load)
        top = np.maximum(1.5 * nominal * (1 + tol) + 50.0, voltage_span(sub))
        grid = res.get("grid", NORMAL_POINTS_GRID)
        per_call = max(1, min(currents.size, FEEDER_BATCH_POINTS // max(sub.n * grid, 1)))
        parts = []
        for c0 in range(0, currents.size, per_call):
            cur = currents[c0:c0 + per_call]
            each = sub.subset(np.tile(np.arange(sub.n), cur.size))
            il_rows = np.repeat(cur, sub.n)[:, None]
            parts.append(normal_points(each, np.full(each.n, nominal / 3), np.tile(top, cur.size),
                                       il_of=lambda t, rows=None, il_rows=il_rows: np.broadcast_to(
                                           il_rows if rows is None else il_rows[rows], t.shape),
                                       top_share=FEEDER_SCAN_TOP_SHARE, fixed_current=True, **res))
        r_all = {key: np.concatenate([q[key] for q in parts]) for key in parts[0]}
    for k, il in enumerate(currents):
        if booster:
            ia = np.full(sub.n, il)
            v = terminal_voltage_at_armature_current(sub, p, ia)
            st = machine_state(sub, p, v, ia)
            vl = job.bus_voltage_v + v - il * job.feeder_resistance_ohm
            x, e, iak = st["x"], st["generated_emf_v"], st["armature_current_a"]
            drive_pts.append((f"{il:g} A", sub, v, np.full(sub.n, il)))
        else:
            r = {key: val[k * sub.n:(k + 1) * sub.n] for key, val in r_all.items()}
            vl = r["terminal_voltage_v"] - il * job.feeder_resistance_ohm
            x, e, iak = r["x"], r["generated_emf_v"], r["armature_current_a"]
            conv &= r["converged"]
            drive_pts.append((f"{il:g} A", sub, r["terminal_voltage_v"], r["load_current_a"]))
        vload[:, k], ia_all[:, k], x_all[:, k], e_all[:, k] = vl, iak, x, e
    nc = space.nc
    with np.errstate(invalid="ignore"):
        vmax_c = np.where(np.isnan(vload).any(axis=1), np.nan, vload.max(axis=1))
        vmin_c = np.where(np.isnan(vload).any(axis=1), np.nan, vload.min(axis=1))
    vmax, vmin = worst_over_corners(vmax_c, n, nc, "max"), worst_over_corners(vmin_c, n, nc, "min")
    iamax = worst_over_corners(np.abs(ia_all).max(axis=1), n, nc, "max")
    lim = {
        "load_voltage_high": (vmax, nominal * (1 + tol), "max", "V"),
        "load_voltage_low": (vmin, nominal * (1 - tol), "min", "V"),
        "armature_current_rating": (iamax, m.rated_armature_current_a, "max", "A"),
    }
    figs = {"load_voltage_max_v": vmax, "load_voltage_min_v": vmin,
            "band_low_v": np.full(n, nominal * (1 - tol)), "band_high_v": np.full(n, nominal * (1 + tol)),
            "max_armature_current_a": iamax,
            "min_net_mmf_a": worst_over_corners(x_all.min(axis=1), n, nc, "min"),
            "max_net_mmf_a": worst_over_corners(np.abs(x_all).max(axis=1), n, nc, "max"),
            "min_generated_emf_v": worst_over_corners(e_all.min(axis=1), n, nc, "min"),
            "critical_resistance_ratio": critical_resistance_ratios(space, sub, n),
            "converged": worst_over_corners(conv.astype(float), n, nc, "min")}
    drive_lim, drive_figs = load_point_figures(space, n, drive_pts)
    lim.update(drive_lim)
    figs.update(drive_figs)
    if not booster:
        figs["regulation_band_percent"] = 100.0 * (vmax - vmin) / nominal
        lp = lamp(job.lamp)
        if lp.light_exponent is not None:
            vmin = np.where(vmin > 0, vmin, np.nan); vmax = np.where(vmax > 0, vmax, np.nan)
            figs["lamp_light_at_low"] = np.asarray(lamp_light_ratio(vmin / nominal, lp.light_exponent))
            figs["lamp_light_at_high"] = np.asarray(lamp_light_ratio(vmax / nominal, lp.light_exponent))
            figs["lamp_life_at_high"] = np.asarray(lamp_life_ratio(vmax / nominal, lp.life_exponent))
            figs["lamp_life_at_low"] = np.asarray(lamp_life_ratio(vmin / nominal, lp.life_exponent))
    return lim, figs


def no_load_voltage_figures(space, u):
    """The machine's terminal voltage with the load off, lowest and highest over the envelope [V].

    What the technician reads on the voltmeter at speed before closing onto
    the feeder (the checklist's expected value); at the chosen control values
    ``u`` only, so the search's rounds do not pay for it.
    """
    n = len(space.bases)
    sub, _ = expand_candidates(space, np.arange(n), u)
    vnl = no_load_voltages(sub)
    return {"no_load_voltage_min_v": worst_over_corners(vnl, n, space.nc, "min"),
            "no_load_voltage_max_v": worst_over_corners(vnl, n, space.nc, "max")}


def evaluate(space, base_idx, u, res=COARSE):
    """Limits and figures of lighting candidates ``(base, control value)`` over the envelope."""
    return evaluate_feeder(space, base_idx, u, False, res)


def solve(space, advice=True):
    """Best control value of every candidate, its limits and figures (fine solve), readings and band.

    The technician sets the field at no load. ``advice=False`` leaves out
    the readings and bands (see :func:`supplycfg.search.search`).
    """
    u, evaluated = optimise_control(space, evaluate)
    lim, figs = evaluate(space, np.arange(len(space.bases)), u, FINE)
    figs.update(no_load_voltage_figures(space, u))
    if not advice:
        return u, lim, figs, [{"readings": None, "band": None} for _ in space.bases], evaluated
    extras, n = option_advice(space, evaluate, u, lim, no_load_setting_field)
    return u, lim, figs, extras, evaluated + n


#: What the lighting job ranks its feasible options by.
OBJECTIVE_LABEL = ("the widest margin of the load-end voltage inside its band (the objective's value is minus "
                   "that margin, as a fraction of the band's end)")
#: The objective as a table shows it: words, unit and the factor from the objective's value
#: (minus a fraction: the load-end voltage's margin inside its band in per cent).
#: Limits that bound one quantity, by the requirement they make up: a near miss that leaves the band at both
#: ends breaks one requirement, not two (the ranking counts requirements).
LIMIT_GROUPS = {"load_voltage_high": "load_voltage_band", "load_voltage_low": "load_voltage_band"}
OBJECTIVE_SHOWN = ("load-end voltage's margin inside its band", "%", -100.0)


def voltage_band_objective(figures):
    """Minus the smaller margin of the load-end voltage to its band's ends, as a fraction of that end.

    Smaller is better (the widest margin first); NaN where the voltage is unknown.
    """
    hi = np.asarray(figures["band_high_v"], float)
    lo = np.asarray(figures["band_low_v"], float)
    with np.errstate(invalid="ignore", divide="ignore"):
        m_hi = (hi - np.asarray(figures["load_voltage_max_v"], float)) / hi
        m_lo = (np.asarray(figures["load_voltage_min_v"], float) - lo) / lo
    return -np.minimum(m_hi, m_lo)


def objective(figures):
    """The lighting job's objective: see :func:`voltage_band_objective`."""
    return voltage_band_objective(figures)


def option_cautions(machine, profile, setting, f):
    """Lighting cautions of one setting (a near miss, or a setting given by hand): lamps over their band,
    and a far-end swing wider than the band, with what would narrow it."""
    job = profile.lighting
    vn, tol = job.nominal_voltage_v, job.tolerance_percent / 100.0
    lo, hi = vn * (1 - tol), vn * (1 + tol)
    vmax, vmin = f.get("load_voltage_max_v"), f.get("load_voltage_min_v")
    out = []
    if vmax is not None and vmax > hi * (1 + 1e-9):
        life = f.get("lamp_life_at_high")
        # weakening the field lowers both ends: no cure where the low end is already below the band
        both = vmin is not None and vmin < lo * (1 - 1e-9)
        out.append(caution("lighting-over-voltage", "warn",
                           f"The far end reaches {vmax:.1f} V, {100 * (vmax / vn - 1):.1f} % over the nominal {vn:g} V "
                           f"and above the band's top {hi:.1f} V"
                           + (f": the lamps' life falls to about {life:.2g} x rated" if life is not None else "")
                           + (f". The low end ({vmin:.1f} V) is below the band as well, so weakening the field is no "
                              "cure: the swing is too wide (what narrows it is with the next caution)." if both
                              else ". Weaken the field."),
                           "the job's tolerance_percent; lamp life against voltage (IES exponents, from memory)",
                           load_voltage_max_v=vmax, band_top_v=hi))
    if vmax is not None and vmin is not None and vmax - vmin > hi - lo:
        i0, i1 = job.load_current_a
        drop = job.feeder_resistance_ohm * (i1 - i0)
        words = (f"The far-end voltage swings {vmax - vmin:.1f} V ({vmin:.1f} to {vmax:.1f} V) from light to full "
                 f"load over the speed and temperature range, wider than the band's {hi - lo:.1f} V ({lo:.1f} to "
                 f"{hi:.1f} V): no rheostat setting fits it. ")
        if job.feeder_resistance_ohm > 0:
            words += f"The feeder alone drops {drop:.1f} V more at {i1:g} A than at {i0:g} A. "
        cures = compounding_cures(machine, setting) + ["a series booster in the feeder"]
        t = profile.temperatures_c
        if t and t[1] - t[0] > 10.0:
            # with the rheostat left as set, the winding's warming moves the voltage as much as the load may
            cures.insert(0, f"a narrower winding-temperature range ({t[0]:g} to {t[1]:g} °C now, the rheostat left as "
                            "set): run the set up to temperature before the lamps go on and set the field once warm")
        r_need = feeder_resistance_to_hold_ohm(vmax - vmin, hi - lo, job.feeder_resistance_ohm, i0, i1)
        if r_need is not None and r_need < job.feeder_resistance_ohm:
            cures.append(f"a heavier feeder (about {r_need:.2g} ohm or less, go and return: below "
                         f"{(hi - lo) / (i1 - i0):.2g} ohm the feeder alone drops less than the band, and the "
                         "machine's own swing takes the rest)")
        cures.append("a wider band, if the lamps allow it")
        out.append(caution("lighting-band-too-narrow", "warn", words + "To hold the band: " + "; ".join(cures) + ".",
                           "the job's band and feeder; the machine's regulation over the envelope (circuit model)",
                           swing_v=vmax - vmin, band_width_v=hi - lo, feeder_drop_v=drop))
    return out


def feeder_resistance_to_hold_ohm(swing_v, band_v, feeder_ohm, light_a, full_a):
    """The feeder resistance [ohm] at which the far end's swing fits the band, the machine's own swing kept.

    The far end swings by the machine's terminal swing plus the feeder's
    ``R (I_full - I_light)``; with the same setting the terminal swing stays,
    so the feeder may drop at most what the band leaves over:
    ``R <= (band - (swing - R0 dI)) / dI`` (closed form; an estimate, as the
    field would be set again for the new feeder). None where no feeder
    resistance fits (the machine alone swings more than the band) or the
    load does not change.
    """
    di = full_a - light_a
    if not di > 0:
        return None
    machine_swing = swing_v - feeder_ohm * di
    room = band_v - machine_swing
    return room / di if room > 0 else None


def compounding_cures(machine, setting):
    """What more compounding can be had from this machine in this setting, as cures for a far end that
    sags with load: the next series tap up, a weaker diverter, a cumulative connection; none at the
    top tap with no diverter in."""
    conn = setting.connection
    taps = [t for t in machine.series_taps if t > 0]
    if not taps:
        return []
    if conn.endswith("differential"):
        return ["a cumulative compound connection (the differential series field makes the far end droop "
                "with load)"]
    if conn in ("shunt", "separate"):
        return ["a cumulative compound connection with series turns (the series field lifts the voltage with "
                "the load, over-compounded for the feeder)"]
    if conn == "series":
        return []
    turns = setting.series_turns or 0.0
    out = []
    if turns < max(taps):
        out.append(f"more series turns (a tap above {turns:g}, over-compounded for the feeder)")
    if setting.diverter_ohm is not None:
        out.append(f"less current diverted from the series field (a diverter above {setting.diverter_ohm:g} ohm, "
                   "or none)")
    return out


def profile_cautions(machine, profile):
    """Cautions of the lighting job as a whole: a heaviest load the machine cannot carry at any setting."""
    return job_current_cautions(machine, profile.lighting.load_current_a[1])
