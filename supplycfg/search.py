"""The setting search: connections, taps, diverters, field control and speed that meet a job.

Every candidate (connection x series tap x diverter) is evaluated over the
whole envelope (each drive speed and winding temperature of the profile) at
the operating point the machine actually reaches (the highest stable
intersection, see :func:`supplycfg.circuit.normal_points`). The field
control (rheostat, or the exciter's field current) is continuous: for
welding it is solved for each target current; for the other jobs the value
with the largest smallest margin is found on a grid and refined by
golden-section search. Margins are positive inside a limit.
"""

import math
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from . import STANDING_NOTICE, __version__, loads
from .cautions import option_cautions, profile_cautions
from .circuit import (SEPARATE, USES_SERIES, Setting, allowed_connections, build_circuit,
                      candidate_params, check_setting, machine_state, no_load_voltages, normal_points,
                      refine_bracketed_roots, terminal_voltage_at_armature_current, voltage_span)
from .machine import load_machine

#: Grid of field-control values before refinement.
CONTROL_GRID = 13
#: Golden-section steps refining the best control value (0.618**14 ~ 1e-3 of a grid cell).
GOLDEN_STEPS = 12
#: Diverters tried, as multiples of the series-winding resistance in use (none is always tried).
DIVERTER_FACTORS = (0.5, 1.0, 2.0, 4.0)
#: Booster diverters: a finer set, since the diverter is its only trim.
BOOSTER_DIVERTER_FACTORS = tuple(np.round(np.geomspace(0.25, 16.0, 13), 4))
#: No-load voltage kept above the bank's full-charge open-circuit voltage (common practice:
#: a few per cent so the set still charges at full speed droop).
NO_LOAD_MARGIN_FRACTION = 0.05
#: A charge still "reaches" its end state of charge if the machine gives at least this
#: share of capacity as current there (C/100; common practice for a finishing current floor).
END_CURRENT_FLOOR_PER_H = 0.01
#: Welding: each target current reached within this share (issue rule).
WELD_CURRENT_TOLERANCE = 0.03
#: Lighting and booster: load currents checked across the range.
LOAD_POINTS = 5
#: What a limit whose figure the engine could not determine says (it counts as broken).
UNDETERMINED = ("undetermined: the engine found no operating point for this figure within its span (the voltage "
                "runs away past the measured curve, or the current would pass 10 x the rated armature current)")
#: Load-line grid and bisection steps while searching, and for the reported figures.
COARSE = {"grid": 33, "steps": 26}
FINE = {"grid": 401, "steps": 60}


@dataclass
class Option:
    """One candidate setting with its figures, margins and cautions."""

    rank: int
    feasible: bool
    setting: Setting
    figures: dict
    margins: dict
    failed: list
    cautions: list
    smallest_margin: float
    current_settings: list | None = None
    control: str = "rheostat"
    extrapolated: bool = False

    def setting_dict(self):
        s = self.setting
        d = {"connection": s.connection, "series_turns": s.series_turns, "diverter_ohm": s.diverter_ohm,
             "speed_rpm": s.speed_rpm}
        if self.control == "field-current":
            d["field_current_a"] = s.field_current_a
        else:
            d["rheostat_ohm"] = None if self.control == "none" else s.rheostat_ohm
        return d

    def as_dict(self):
        d = {"rank": self.rank, "feasible": self.feasible, "setting": self.setting_dict(),
             "figures": self.figures, "margins": self.margins, "failed": list(self.failed),
             "smallest_margin": self.smallest_margin, "extrapolated": self.extrapolated,
             "cautions": [c.as_dict() for c in self.cautions]}
        if self.current_settings is not None:
            d["current_settings"] = self.current_settings
        return d


@dataclass
class SearchResult:
    """Ranked options for a machine and a load profile."""

    machine: object
    profile: object
    options: list
    cautions: list
    candidates_evaluated: int
    search_seconds: float
    notes: list = field(default_factory=list)

    @property
    def feasible(self):
        return [o for o in self.options if o.feasible]

    def as_dict(self):
        return {"tool": f"supplycfg {__version__}", "machine": self.machine.label,
                "profile": self.profile.label, "kind": self.profile.kind,
                "options": [o.as_dict() for o in self.options],
                "cautions": [c.as_dict() for c in self.cautions],
                "candidates_evaluated": self.candidates_evaluated,
                "search_seconds": self.search_seconds, "notes": list(self.notes),
                "notice": STANDING_NOTICE}


def _margin(value, limit, kind, unit):
    """Margin of ``value`` against ``limit``: positive inside (``kind`` 'max' or 'min')."""
    m = (limit - value) if kind == "max" else (value - limit)
    frac = m / abs(limit) if limit else m
    return m, frac


# ---------------------------------------------------------------------------
# candidates and envelope
# ---------------------------------------------------------------------------

@dataclass
class _Space:
    machine: object
    profile: object
    bases: list          # (connection, series_turns, diverter_ohm, control)
    corners: list        # (speed, temperature)
    nominal: tuple
    circ: object         # circuit of bases x corners (row = base * nc + corner)

    @property
    def nc(self):
        return len(self.corners)


def _controls(machine, conn):
    if conn == "series":
        return "none"
    if conn in SEPARATE:
        return "exciter" if machine.excitation_voltage_v is not None else "field-current"
    return "rheostat"


def candidate_bases(machine, profile):
    """(connection, series_turns, diverter_ohm, control) tuples the search tries."""
    conns = list(allowed_connections(machine))
    kind = profile.kind
    if kind == "booster":
        conns = ["series"] if machine.has_series else []
    bases = []
    for conn in conns:
        control = _controls(machine, conn)
        if conn in USES_SERIES:
            taps = [t for t in machine.series_taps if t > 0]
        else:
            taps = [0.0]
        for tap in taps:
            divs = [None]
            if conn in USES_SERIES and kind in ("welding", "lighting", "booster"):
                rse = machine.series_field_resistance_ohm * tap / machine.series_turns_per_pole
                factors = BOOSTER_DIVERTER_FACTORS if kind == "booster" else DIVERTER_FACTORS
                divs += [float(round(f * rse, 6)) for f in factors]
            for d in divs:
                bases.append((conn, float(tap), d, control))
    return bases


def _corners(machine, profile):
    speeds = tuple(float(s) for s in profile.speeds_rpm)
    if len(speeds) == 2 and speeds[0] < speeds[1]:
        # the setting is stated at the middle speed, so it is evaluated there too
        speeds = (speeds[0], 0.5 * (speeds[0] + speeds[1]), speeds[1])
    temps = tuple(float(t) for t in profile.temperatures_c) if profile.temperatures_c else \
        (machine.reference_temperature_c,)
    corners = [(s, t) for s in speeds for t in temps]
    nominal = (float(np.mean(speeds)), temps[-1])
    return corners, nominal


def build_space(machine, profile):
    bases = candidate_bases(machine, profile)
    corners, nominal = _corners(machine, profile)
    settings = []
    for conn, tap, d, control in bases:
        for sp, tc in corners:
            kw = {}
            if control == "field-current":
                kw["field_current_a"] = 0.0
            settings.append(Setting(conn, series_turns=tap if conn in USES_SERIES else None, diverter_ohm=d,
                                    speed_rpm=sp, winding_temperature_c=tc, **kw))
    circ = build_circuit(machine, settings) if settings else None
    return _Space(machine, profile, bases, corners, nominal, circ)


def _control_range(machine, control):
    if control == "field-current":
        return 0.0, float(machine.occ_field_current_a[-1])
    if control == "none":
        return math.nan, math.nan
    return 0.0, float(machine.rheostat_max_ohm)


def _expand(space, base_idx, u, corner_idx=None):
    """Circuit rows for (base, control value) pairs at every corner (or one corner each)."""
    base_idx = np.asarray(base_idx, int)
    u = np.asarray(u, float)
    nc = space.nc
    if corner_idx is None:
        rows = (base_idx[:, None] * nc + np.arange(nc)[None, :]).ravel()
        uu = np.repeat(u, nc)
        bb = np.repeat(base_idx, nc)
    else:
        rows = base_idx * nc + np.asarray(corner_idx, int)
        uu, bb = u, base_idx
    controls = np.array([space.bases[b][3] for b in bb]) if bb.size else np.array([], str)
    rh = np.where((controls == "rheostat") | (controls == "exciter"), uu, np.nan)
    fc = np.where(controls == "field-current", uu, np.nan)
    ev = space.machine.excitation_voltage_v
    sub = space.circ.subset(rows, rheostat_ohm=rh, field_current_a=fc,
                            exciter_v=np.full(rows.size, np.nan if ev is None else ev))
    return sub, rows


def _worst(values, n, nc, how):
    v = np.asarray(values, float).reshape(n, nc)
    if v.size == 0:
        return np.zeros(n)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if how == "max":
            return np.where(np.isnan(v).any(axis=1), np.nan, np.nanmax(v, axis=1))
        return np.where(np.isnan(v).any(axis=1), np.nan, np.nanmin(v, axis=1))


# ---------------------------------------------------------------------------
# jobs: each returns (limits, figures) for candidates given as (base, control value)
# limits: name -> (value array, limit, 'max'|'min', unit)
# ---------------------------------------------------------------------------

def _critical_ratios(space, sub, n):
    """Least R_crit/R_field and n/n_crit over the envelope (self-excited candidates)."""
    occ = sub.occ
    slope = occ.air_gap_slope()
    rcrit = sub.s * slope
    self_ex = sub.kind == 1
    rr = np.where(self_ex, rcrit / sub.rf, np.nan)
    return _worst(rr, n, space.nc, "min")


def _battery(space, base_idx, u, res=COARSE):
    m, prof = space.machine, space.profile
    b = prof.battery
    chem = loads.chemistry(b.chemistry)
    n = len(base_idx)
    sub, rows = _expand(space, base_idx, u)
    soc0, soc1 = b.state_of_charge
    ocv = b.open_circuit_voltage_per_cell_v
    e0 = b.cells * float(loads.open_circuit_voltage_per_cell(chem, soc0, ocv))
    e1 = b.cells * float(loads.open_circuit_voltage_per_cell(chem, soc1, ocv))
    r = b.internal_resistance_ohm + b.cable_resistance_ohm
    imax = sub.imax
    start = normal_points(sub, -imax, imax, v_of=lambda t: e0 + r * t, **res)
    i_start = start["load_current_a"]
    cap = b.capacity_ah
    rc_cell = chem.resistance_ohm_ah / cap

    def bank_end(t):
        rate = np.maximum(t, 0.0) / cap
        cell = loads.charging_voltage_per_cell(chem, soc1, rate, b.temperature_c, ocv) - np.maximum(t, 0) * rc_cell
        return b.cells * cell + t * r

    def bank_at(soc):
        def f(t):
            rate = np.maximum(t, 0.0) / cap
            cell = loads.charging_voltage_per_cell(chem, soc, rate, b.temperature_c, ocv) - np.maximum(t, 0) * rc_cell
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
    limit_vpc = float(loads.charge_voltage_limit_per_cell(chem, b.temperature_c, b.charge_voltage_per_cell_v))
    ia_start = start["armature_current_a"]
    nc = space.nc
    lim = {
        "start_current_max": (_worst(i_start, n, nc, "max"), b.max_charge_current_a, "max", "A"),
        # conservative pair: the open-circuit line (issue rule) gives the higher current, the
        # charging curve the lower; the maximum is checked on the first, the minimum on the second
        "start_current_min": (_worst(np.minimum(i_start, i_start_c), n, nc, "min"), b.min_charge_current_a, "min", "A"),
        "end_volts_per_cell": (_worst(vpc_end, n, nc, "max"), limit_vpc, "max", "V"),
        "end_current_floor": (_worst(i_end, n, nc, "min"), END_CURRENT_FLOOR_PER_H * cap, "min", "A"),
        "no_load_above_bank": (_worst(vnl, n, nc, "min"), (1 + NO_LOAD_MARGIN_FRACTION) * e1, "min", "V"),
        "armature_current_rating": (_worst(np.abs(ia_start), n, nc, "max"), m.rated_armature_current_a, "max", "A"),
    }
    q = float(loads.ventilation_airflow_m3_per_h(b.cells, b.capacity_ah, chem.gas_current_boost_ma_per_ah))
    figs = {
        "start_charge_current_a": _worst(i_start, n, nc, "max"),
        "start_charge_current_min_a": _worst(i_start, n, nc, "min"),
        "start_charge_current_on_charge_a": _worst(i_start_c, n, nc, "max"),
        "start_charge_current_on_charge_min_a": _worst(i_start_c, n, nc, "min"),
        "end_charge_current_a": _worst(i_end, n, nc, "min"),
        "end_volts_per_cell": _worst(vpc_end, n, nc, "max"),
        "end_volts_per_cell_limit": np.full(n, limit_vpc),
        "gassing_volts_per_cell": np.full(n, chem.gassing_voltage_v),
        "ventilation_m3_per_h": np.full(n, q),
        "no_load_voltage_min_v": _worst(vnl, n, nc, "min"),
        "no_load_voltage_max_v": _worst(vnl, n, nc, "max"),
        "bank_open_circuit_voltage_start_v": np.full(n, e0),
        "bank_open_circuit_voltage_end_v": np.full(n, e1),
        "max_armature_current_a": _worst(np.abs(ia_start), n, nc, "max"),
        # caution figures: the worst over the points that exist (a limit's figure never skips an unknown)
        "min_net_mmf_a": _worst(np.fmin(start["x"], end["x"]), n, nc, "min"),
        "max_net_mmf_a": _worst(np.fmax(np.abs(start["x"]), np.abs(end["x"])), n, nc, "max"),
        "min_generated_emf_v": _worst(np.fmin(start["generated_emf_v"], end["generated_emf_v"]), n, nc, "min"),
        "critical_resistance_ratio": _critical_ratios(space, sub, n),
        "converged": _worst((start["converged"] & end["converged"]).astype(float), n, nc, "min"),
    }
    return lim, figs


def _lighting_like(space, base_idx, u, booster=False, res=COARSE):
    m, prof = space.machine, space.profile
    job = prof.booster if booster else prof.lighting
    n = len(base_idx)
    sub, rows = _expand(space, base_idx, u)
    lo, hi = job.load_current_a
    currents = np.linspace(lo, hi, LOAD_POINTS)
    nominal = job.bus_voltage_v if booster else job.nominal_voltage_v
    tol = job.tolerance_percent / 100.0
    vload = np.empty((sub.n, currents.size)); ia_all = np.empty_like(vload); x_all = np.empty_like(vload)
    e_all = np.empty_like(vload); conv = np.ones(sub.n, bool)
    p = candidate_params(sub, np.arange(sub.n))
    for k, il in enumerate(currents):
        if booster:
            ia = np.full(sub.n, il)
            v = terminal_voltage_at_armature_current(sub, p, ia)
            st = machine_state(sub, p, v, ia)
            vl = job.bus_voltage_v + v - il * job.feeder_resistance_ohm
            x, e, iak = st["x"], st["generated_emf_v"], st["armature_current_a"]
        else:
            # a machine sitting below a third of the nominal voltage has failed anyway; the top is
            # the engine's whole voltage span (widened further while the machine is above the load)
            top = np.maximum(1.5 * nominal * (1 + tol) + 50.0, voltage_span(sub))
            r = normal_points(sub, np.full(sub.n, nominal / 3), top,
                              il_of=lambda t, il=il: np.full_like(t, il), **res)
            vl = r["terminal_voltage_v"] - il * job.feeder_resistance_ohm
            x, e, iak = r["x"], r["generated_emf_v"], r["armature_current_a"]
            conv &= r["converged"]
        vload[:, k], ia_all[:, k], x_all[:, k], e_all[:, k] = vl, iak, x, e
    nc = space.nc
    with np.errstate(invalid="ignore"):
        vmax_c = np.where(np.isnan(vload).any(axis=1), np.nan, vload.max(axis=1))
        vmin_c = np.where(np.isnan(vload).any(axis=1), np.nan, vload.min(axis=1))
    vmax, vmin = _worst(vmax_c, n, nc, "max"), _worst(vmin_c, n, nc, "min")
    iamax = _worst(np.abs(ia_all).max(axis=1), n, nc, "max")
    lim = {
        "load_voltage_high": (vmax, nominal * (1 + tol), "max", "V"),
        "load_voltage_low": (vmin, nominal * (1 - tol), "min", "V"),
        "armature_current_rating": (iamax, m.rated_armature_current_a, "max", "A"),
    }
    figs = {"load_voltage_max_v": vmax, "load_voltage_min_v": vmin,
            "band_low_v": np.full(n, nominal * (1 - tol)), "band_high_v": np.full(n, nominal * (1 + tol)),
            "max_armature_current_a": iamax,
            "min_net_mmf_a": _worst(x_all.min(axis=1), n, nc, "min"),
            "max_net_mmf_a": _worst(np.abs(x_all).max(axis=1), n, nc, "max"),
            "min_generated_emf_v": _worst(e_all.min(axis=1), n, nc, "min"),
            "critical_resistance_ratio": _critical_ratios(space, sub, n),
            "converged": _worst(conv.astype(float), n, nc, "min")}
    if not booster:
        figs["regulation_band_percent"] = 100.0 * (vmax - vmin) / nominal
        lamp = loads.lamp(job.lamp)
        if lamp.light_exponent is not None:
            vmin = np.where(vmin > 0, vmin, np.nan); vmax = np.where(vmax > 0, vmax, np.nan)
            figs["lamp_light_at_low"] = np.asarray(loads.lamp_light_ratio(vmin / nominal, lamp.light_exponent))
            figs["lamp_light_at_high"] = np.asarray(loads.lamp_light_ratio(vmax / nominal, lamp.light_exponent))
            figs["lamp_life_at_high"] = np.asarray(loads.lamp_life_ratio(vmax / nominal, lamp.life_exponent))
            figs["lamp_life_at_low"] = np.asarray(loads.lamp_life_ratio(vmin / nominal, lamp.life_exponent))
    return lim, figs


JOBS = {"battery": _battery,
        "lighting": lambda s, b, u, res=COARSE: _lighting_like(s, b, u, False, res),
        "booster": lambda s, b, u, res=COARSE: _lighting_like(s, b, u, True, res)}


def _smallest(lim):
    fr = []
    for name, (val, limit, kind, unit) in lim.items():
        _, f = _margin(np.asarray(val, float), limit, kind, unit)
        fr.append(np.where(np.isnan(f), -np.inf, f))
    return np.min(np.vstack(fr), axis=0)


def _optimise_control(space, job):
    """Best control value per base: grid, then golden-section on the smallest margin."""
    nb = len(space.bases)
    lo = np.array([_control_range(space.machine, b[3])[0] for b in space.bases])
    hi = np.array([_control_range(space.machine, b[3])[1] for b in space.bases])
    fixed = np.isnan(lo)
    grid = np.linspace(0, 1, CONTROL_GRID)
    bi = np.repeat(np.arange(nb), CONTROL_GRID)
    uu = np.where(np.repeat(fixed, CONTROL_GRID), np.nan, np.repeat(lo, CONTROL_GRID) +
                  np.repeat(hi - lo, CONTROL_GRID) * np.tile(grid, nb))
    lim, _ = job(space, bi, uu)
    score = _smallest(lim).reshape(nb, CONTROL_GRID)
    j = np.argmax(score, axis=1)
    evaluated = bi.size * space.nc
    # golden-section inside the neighbouring cells
    step = (hi - lo) / (CONTROL_GRID - 1)
    cen = lo + j * step
    a = np.where(fixed, np.nan, np.maximum(lo, cen - step))
    b = np.where(fixed, np.nan, np.minimum(hi, cen + step))
    g = (math.sqrt(5) - 1) / 2
    live = ~fixed
    best_u = np.where(fixed, np.nan, cen)
    best_s = score[np.arange(nb), j]
    if live.any():
        idx = np.flatnonzero(live)
        a_, b_ = a[idx], b[idx]
        c_ = b_ - g * (b_ - a_); d_ = a_ + g * (b_ - a_)
        fc = _smallest(job(space, idx, c_)[0]); fd = _smallest(job(space, idx, d_)[0])
        evaluated += 2 * idx.size * space.nc
        for _ in range(GOLDEN_STEPS):
            left = fc >= fd
            b_ = np.where(left, d_, b_); a_ = np.where(left, a_, c_)
            new = np.where(left, b_ - g * (b_ - a_), a_ + g * (b_ - a_))
            fn = _smallest(job(space, idx, new)[0])
            evaluated += idx.size * space.nc
            d_, fd, c_, fc = (np.where(left, c_, new), np.where(left, fc, fn),
                              np.where(left, new, d_), np.where(left, fn, fd))
        cand_u = np.where(fc >= fd, c_, d_)
        cand_s = np.maximum(fc, fd)
        better = cand_s > best_s[idx]
        best_u[idx] = np.where(better, cand_u, best_u[idx])
    return best_u, evaluated


# ---------------------------------------------------------------------------
# welding: solve the control for each end of the current range
# ---------------------------------------------------------------------------

def _weld_line_v(job, current_a):
    return np.asarray(loads.conventional_load_voltage(job.process, current_a), float) + \
        np.asarray(current_a, float) * job.cable_resistance_ohm


def _solve_weld_control(space, base_idx, corner_idx, target_a):
    """Control value putting the operating point at ``target_a`` on the welding line."""
    job = space.profile.welding
    base_idx = np.asarray(base_idx, int)
    n = base_idx.size
    lo = np.array([_control_range(space.machine, space.bases[b][3])[0] for b in base_idx])
    hi = np.array([_control_range(space.machine, space.bases[b][3])[1] for b in base_idx])
    vt = _weld_line_v(job, target_a)
    it = np.full(n, float(target_a))

    def h(u):
        sub, _ = _expand(space, base_idx, u, corner_idx)
        p = candidate_params(sub, np.arange(sub.n))
        return machine_state(sub, p, np.full(n, vt), it)["h"]

    ha, hb = h(lo), h(hi)
    ok = np.signbit(ha) != np.signbit(hb)
    u = refine_bracketed_roots(h, lo, hi, ha, 50)
    # unreachable: take the end that comes closer
    u = np.where(ok, u, np.where(np.abs(ha) < np.abs(hb), lo, hi))
    return u, ok


def _weld_current(space, base_idx, u, corner_idx=None):
    """Welding current on the line at every corner (or one), the machine's normal point."""
    job = space.profile.welding
    sub, rows = _expand(space, base_idx, u, corner_idx)
    r = normal_points(sub, np.zeros(sub.n), np.full(sub.n, sub.imax),
                      v_of=lambda t: _weld_line_v(job, t))
    return r, sub


def _char_slope(sub, v, il):
    """Slope dV/dIL [V/A] of each candidate's characteristic at (v, il): -h_IL/h_V."""
    p = candidate_params(sub, np.arange(sub.n))
    dv = 1e-4 * np.maximum(1.0, np.abs(v)); di = 1e-4 * np.maximum(1.0, np.abs(il))
    h_v = (machine_state(sub, p, v + dv, il)["h"] - machine_state(sub, p, v - dv, il)["h"]) / (2 * dv)
    h_i = (machine_state(sub, p, v, il + di)["h"] - machine_state(sub, p, v, il - di)["h"]) / (2 * di)
    return -h_i / h_v


def _welding(space):
    m, prof = space.machine, space.profile
    job = prof.welding
    nb = len(space.bases)
    bi = np.arange(nb)
    nc = space.nc
    # nominal corner: closest to mean speed, hottest windings
    nom = min(range(nc), key=lambda k: (abs(space.corners[k][0] - space.nominal[0]), -space.corners[k][1]))
    worst = max(range(nc), key=lambda k: (space.corners[k][0], -space.corners[k][1]))  # top speed, coldest
    lo_a, hi_a = job.current_range_a
    env = loads.environment(job.environment)
    limit_peak = loads.no_load_voltage_limit(env.dc_limit).voltage_v
    per = {}
    evaluated = 0
    for end, target in (("low", lo_a), ("high", hi_a)):
        u, ok = _solve_weld_control(space, bi, np.full(nb, nom), target)
        evaluated += nb * 52
        r, sub = _weld_current(space, bi, u)
        evaluated += sub.n
        cur = r["load_current_a"].reshape(nb, nc)
        # the control is solved at the nominal corner; elsewhere the current drifts (a figure, not a limit)
        dev = np.abs(cur[:, nom] / target - 1.0)
        dev = np.where(np.isnan(dev) | ~ok, np.inf, dev)
        subw, _ = _expand(space, bi, u, np.full(nb, worst))
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
    subs, _ = _expand(space, bi, per["high"]["u"], np.full(nb, worst))
    rs = normal_points(subs, np.zeros(nb), np.full(nb, subs.imax),
                       v_of=lambda t: job.cable_resistance_ohm * t)
    isc = np.where(rs["found"], rs["load_current_a"], np.nan)
    duty = job.duty_cycle_percent / 100.0
    deq = float(loads.thermal_equivalent_current(hi_a, duty))
    # an unknown no-load voltage (it runs away) leaves the no-load limits unknown, never kept
    vnl_max = np.maximum(per["low"]["vnl"], per["high"]["vnl"])
    peak = np.asarray(loads.no_load_peak_voltage(vnl_max), float)
    cm_lo = np.asarray(loads.characteristic_margin_v_per_a(job.process, per["low"]["slope"]), float)
    cm_hi = np.asarray(loads.characteristic_margin_v_per_a(job.process, per["high"]["slope"]), float)
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
    spread = {e: (_worst(per[e]["current"], nb, nc, "min"), _worst(per[e]["current"], nb, nc, "max"))
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
    subc, _ = _expand(space, np.concatenate([bi, bi]), np.concatenate([per["low"]["u"], per["high"]["u"]]))
    rr = _critical_ratios(space, subc, 2 * nb)
    figs["critical_resistance_ratio"] = np.fmin(rr[:nb], rr[nb:])
    return lim, figs, per, evaluated


# ---------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------

def _fig_dict(figs, i):
    out = {}
    for k, v in figs.items():
        if k == "converged":
            continue
        x = float(np.asarray(v)[i])
        out[k] = x if math.isfinite(x) else None
    return out


def _setting_for(space, i, u):
    conn, tap, d, control = space.bases[i]
    kw = {}
    if control == "field-current":
        kw["field_current_a"] = float(u)
    elif control in ("rheostat", "exciter"):
        kw["rheostat_ohm"] = float(u)
    return check_setting(space.machine, Setting(conn, series_turns=tap if conn in USES_SERIES else None,
                                                diverter_ohm=d, speed_rpm=space.nominal[0],
                                                winding_temperature_c=space.nominal[1], **kw))


def search(machine, profile):
    """Every setting that meets the job, ranked, with the nearest misses.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile

    Returns
    -------
    SearchResult
        Feasible options first (by smallest margin, largest first), then the
        misses (by how far their worst limit is broken). A setting with a
        ``stop`` caution is never feasible.
    """
    t0 = time.perf_counter()
    space = build_space(machine, profile)
    notes = []
    if space.circ is None:
        res = SearchResult(machine, profile, [], profile_cautions(machine, profile), 0,
                           time.perf_counter() - t0, ["this machine has no connection for this job (a booster needs a series winding)"])
        return res
    nb = len(space.bases)
    current_settings = [None] * nb
    if profile.kind == "welding":
        lim, figs, per, evaluated = _welding(space)
        u_best = per["low"]["u"]
        for i in range(nb):
            cs = []
            for end, target in (("low", profile.welding.current_range_a[0]), ("high", profile.welding.current_range_a[1])):
                d = {"current_a": float(target)}
                key = "field_current_a" if space.bases[i][3] == "field-current" else "rheostat_ohm"
                uval = float(per[end]["u"][i])
                d[key] = uval if math.isfinite(uval) else None  # a series machine has no field control
                d["terminal_voltage_v"] = float(per[end]["v"][i]) if math.isfinite(per[end]["v"][i]) else None
                d["no_load_voltage_v"] = float(per[end]["vnl"][i]) if math.isfinite(per[end]["vnl"][i]) else None
                d["reachable"] = bool(per[end]["reachable"][i])
                cs.append(d)
            current_settings[i] = cs
    else:
        job = JOBS[profile.kind]
        u_best, evaluated = _optimise_control(space, job)
        lim, figs = job(space, np.arange(nb), u_best, FINE)
    top_speed = max(c[0] for c in space.corners)
    options = []
    for i in range(nb):
        margins, failed, fracs = {}, [], []
        for name, (val, limit, kind, unit) in lim.items():
            v = float(np.asarray(val)[i])
            mv, fr = _margin(v, limit, kind, unit)
            why = None
            if not math.isfinite(fr):
                fr, mv = -1.0, None
                failed.append(name)
                why = UNDETERMINED
            elif fr < 0:
                failed.append(name)
            margins[name] = {"value": v if math.isfinite(v) else None, "limit": limit, "kind": kind,
                             "unit": unit, "margin": mv, "fraction": fr}
            if why:
                margins[name]["why"] = why
            fracs.append(fr)
        f = _fig_dict(figs, i)
        f["top_speed_rpm"] = top_speed
        st = _setting_for(space, i, u_best[i])
        cautions = option_cautions(machine, profile, st, f)
        conv = bool(np.asarray(figs["converged"])[i] >= 1)
        if not conv:
            failed.append("solve_not_converged")
        stop = any(c.severity == "stop" for c in cautions)
        if stop:
            failed.append("stop_caution")
        feasible = not failed
        xmax = f.get("max_net_mmf_a")
        extrap = xmax is not None and xmax > machine.occ_field_current_a[-1] * (1 + 1e-9)
        options.append(Option(0, feasible, st, f, margins, failed, cautions, float(min(fracs)) if fracs else 0.0,
                              current_settings[i], {"field-current": "field-current", "none": "none"}.get(space.bases[i][3], "rheostat"),
                              extrap))
    options.sort(key=lambda o: (not o.feasible, -o.smallest_margin, o.setting.connection,
                                o.setting.series_turns or 0, o.setting.diverter_ohm or 0))
    for k, o in enumerate(options, 1):
        o.rank = k
    if not any(o.feasible for o in options):
        notes.append("no setting meets every limit; the nearest misses are listed with the limit each breaks")
    return SearchResult(machine, profile, options, profile_cautions(machine, profile), int(evaluated),
                        time.perf_counter() - t0, notes)


def search_machine_profile(machine_path, profile_path):
    """Read both files and search."""
    m = load_machine(machine_path)
    p = loads.load_profile(profile_path)
    return search(m, p)


def _short(v, f=".4g"):
    return "-" if v is None else format(v, f)


def search_text(res, top=10):
    """The ranked table a technician reads."""
    lines = [f"{res.machine.label} for {res.profile.label} ({res.profile.kind})",
             f"{res.candidates_evaluated} candidate evaluations in {res.search_seconds:.2f} s", ""]
    hdr = f"{'rank':>4}  {'fit':<4}  {'connection':<25} {'turns':>5} {'diverter':>9} {'field':>14} {'speed':>6}  {'least margin':>12}  cautions / limits broken"
    lines += [hdr, "-" * len(hdr)]
    for o in res.options[:top]:
        s = o.setting
        fld = f"{s.field_current_a:.3f} A" if o.control == "field-current" else (
            "-" if s.rheostat_ohm is None or o.control == "none" else f"{s.rheostat_ohm:.2f} ohm")
        sev = sorted({c.severity for c in o.cautions}, key=["stop", "warn", "note"].index)
        extra = ", ".join(sev) + ("" if o.feasible else "; breaks " + ", ".join(
            f + (" (undetermined)" if "why" in o.margins.get(f, {}) else "") for f in o.failed))
        if o.extrapolated:
            extra += "; extrapolated OCC"
        lines.append(f"{o.rank:>4}  {'yes' if o.feasible else 'no':<4}  {s.connection:<25} {(s.series_turns or 0):>5g} "
                     f"{_short(s.diverter_ohm):>9} {fld:>14} {s.speed_rpm:>6.0f}  {100 * o.smallest_margin:>11.1f}%  {extra}")
        if o.current_settings:
            for cs in o.current_settings:
                key = "field_current_a" if "field_current_a" in cs else "rheostat_ohm"
                ctl = "no field control" if cs[key] is None else f"{key.replace('_', ' ')} {cs[key]:.3f}"
                lines.append(f"{'':>6}  at {cs['current_a']:.0f} A: {ctl}, "
                             f"arc-side voltage {_short(cs['terminal_voltage_v'])} V, no-load {_short(cs['no_load_voltage_v'])} V")
    if res.options:
        best = res.options[0]
        lines += ["", f"Option {best.rank} in figures:"]
        for k, v in best.figures.items():
            lines.append(f"  {k}: {_short(v)}")
        lines += ["", "Cautions of option %d:" % best.rank]
        for c in sorted(best.cautions, key=lambda c: ["stop", "warn", "note"].index(c.severity)):
            lines.append(f"  [{c.severity}] {c.message} (basis: {c.basis})")
    if res.cautions:
        lines += ["", "Cautions of the job:"]
        for c in res.cautions:
            lines.append(f"  [{c.severity}] {c.message} (basis: {c.basis})")
    for n in res.notes:
        lines.append(f"note: {n}")
    return "\n".join(lines)
