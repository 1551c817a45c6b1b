"""The charge run: a battery charged by the generator, through time.

At every state of charge the machine sits at its normal operating point
(the highest stable intersection, :func:`supplycfg.circuit.normal_points`)
against the bank's charging curve

    V = n [Vc(s, I/C) - I Rc/C] + I (Rb + Rcable),

the same curve the search uses at the end of charge: ``Vc`` the chemistry's
per-cell charging voltage (open-circuit voltage, resistive drop and the
overvoltage that rises steeply near full charge), with the profile's bank
resistance ``Rb`` in place of the chemistry's generic ``Rc``. The state of
charge then rises as

    ds/dt = I eta / C     [1/h],

``eta`` the charge (ampere-hour) efficiency and ``C`` the capacity [Ah].
The operating point depends on the state of charge only, so it is solved
once on a fine grid of states of charge (one vectorised call) and the
integrator reads that table; the reported currents and voltages are solved
again, exactly, at the states of charge of the output grid.

References
----------
Constant-potential charging from a shunt generator, current falling as the
battery voltage rises: Theraja Vol I, batteries (from memory). Charging
voltages and ventilation: IEC 62485-2 (seen). Ampere-hour efficiency:
common practice (see the chemistry table).
"""

from dataclasses import dataclass, field

import numpy as np
from scipy.integrate import solve_ivp

from . import STANDING_NOTICE
from .jobs import battery
from .jobs import option_cautions, profile_cautions
from .profile import load_profile
from .circuit import _params, build_circuit, check_setting, drive_point_keys, machine_state, normal_points
from .errors import InputError

#: Time cap when none is given [h]: a charge not finished in two days points to
#: a fault of the set or the battery (model choice).
DEFAULT_MAX_HOURS = 48.0
#: Stop when the charging current falls below this share of capacity [1/h]:
#: C/100 is the usual floor of a finishing current (common practice; the
#: search's end-of-charge floor is the same).
CURRENT_FLOOR_PER_H = 0.01
#: States of charge in the operating-point table the integrator reads (the
#: current varies smoothly; 257 points put the interpolation error far below
#: the integrator's tolerance).
SOC_TABLE_POINTS = 257
#: Points of the reported time grid (dense output of the integrator).
OUTPUT_POINTS = 241
#: Rows of the time table in the text summary.
TEXT_ROWS = 12
#: Integrator tolerances: relative, and absolute in state of charge, Ah and kWh.
RTOL = 1e-6
ATOL = (1e-9, 1e-6, 1e-6)
#: Load-line grid and bisection steps of the operating points (as the search's
#: reported figures).
SOLVE = {"grid": 401, "steps": 60}

STOP_CODES = ("end-soc", "voltage-limit", "current-floor", "time-cap", "no-operating-point")


@dataclass
class ChargeRun:
    """A battery charge through time.

    Arrays follow the time grid ``time_h`` [h]: ``current_a`` (into the
    bank), ``terminal_voltage_v`` (at the machine), ``bank_voltage_v`` (at
    the battery, after the cable), ``volts_per_cell`` (bank voltage over the
    cells), ``state_of_charge`` (0..1), ``ah`` and ``kwh`` delivered by the
    machine (``kwh`` at its terminals), ``armature_current_a``.
    """

    setting: object
    time_h: np.ndarray
    current_a: np.ndarray
    terminal_voltage_v: np.ndarray
    bank_voltage_v: np.ndarray
    volts_per_cell: np.ndarray
    state_of_charge: np.ndarray
    ah: np.ndarray
    kwh: np.ndarray
    armature_current_a: np.ndarray
    duration_h: float
    stop: str
    stop_reason: str
    limit_volts_per_cell: float
    gassing_volts_per_cell: float
    gassing_from_h: float | None
    floor_current_a: float
    max_hours: float
    start_state_of_charge: float
    end_state_of_charge: float
    capacity_ah: float
    cells: int
    charge_efficiency: float
    converged: bool = True
    cautions: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    machine_label: str = ""
    profile_label: str = ""
    setting_source: str = ""
    speed_rpm: np.ndarray = None
    shaft_power_kw: np.ndarray = None

    def as_dict(self):
        """JSON-safe: arrays as lists, NaN as None."""
        def arr(a):
            return [float(v) if np.isfinite(v) else None for v in np.asarray(a, float)]

        def num(v):
            return None if v is None or not np.isfinite(v) else float(v)

        return {
            "machine": self.machine_label, "profile": self.profile_label,
            "setting": self.setting.as_dict(), "setting_source": self.setting_source,
            "time_h": arr(self.time_h), "current_a": arr(self.current_a),
            "terminal_voltage_v": arr(self.terminal_voltage_v), "bank_voltage_v": arr(self.bank_voltage_v),
            "volts_per_cell": arr(self.volts_per_cell), "state_of_charge": arr(self.state_of_charge),
            "ah": arr(self.ah), "kwh": arr(self.kwh), "armature_current_a": arr(self.armature_current_a),
            "duration_h": num(self.duration_h), "stop": self.stop, "stop_reason": self.stop_reason,
            "limit_volts_per_cell": num(self.limit_volts_per_cell),
            "gassing_volts_per_cell": num(self.gassing_volts_per_cell),
            "gassing_from_h": num(self.gassing_from_h), "floor_current_a": num(self.floor_current_a),
            "max_hours": num(self.max_hours), "start_state_of_charge": num(self.start_state_of_charge),
            "end_state_of_charge": num(self.end_state_of_charge), "capacity_ah": num(self.capacity_ah),
            "cells": int(self.cells), "charge_efficiency": num(self.charge_efficiency),
            "converged": bool(self.converged), "cautions": [c.as_dict() for c in self.cautions],
            "notes": list(self.notes), "notice": STANDING_NOTICE,
            "speed_rpm": None if self.speed_rpm is None else arr(self.speed_rpm),
            "shaft_power_kw": None if self.shaft_power_kw is None else arr(self.shaft_power_kw),
        }


# ---------------------------------------------------------------------------
# the bank on charge
# ---------------------------------------------------------------------------

def charging_line_voltage_v(job, soc, current_a):
    """Voltage at the machine's terminals [V] that drives ``current_a`` into the bank.

    Parameters
    ----------
    job : BatteryJob
        The profile's ``[battery]`` table.
    soc : array_like
        State of charge 0..1.
    current_a : array_like
        Charging current [A]; a negative (discharge) current meets the
        open-circuit voltage and the resistances only.

    Returns
    -------
    ndarray
        ``n [Vc(s, I/C) - I Rc/C] + I (Rb + Rcable)`` [V], the search's
        end-of-charge curve at any state of charge.

    References
    ----------
    Charging-voltage model :func:`supplycfg.jobs.battery.charging_voltage_per_cell`
    (Shepherd-type polarisation, from memory).
    """
    chem = battery.chemistry(job.chemistry)
    i = np.asarray(current_a, float)
    ic = np.maximum(i, 0.0)
    cap = job.capacity_ah
    cell = battery.charging_voltage_per_cell(chem, soc, ic / cap, job.temperature_c,
                                           job.open_circuit_voltage_per_cell_v) - ic * chem.resistance_ohm_ah / cap
    return job.cells * cell + i * (job.internal_resistance_ohm + job.cable_resistance_ohm)


def _points_at(circ, job, soc):
    """Normal operating point of the one-candidate ``circ`` at each state of charge."""
    soc = np.asarray(soc, float)
    sub = circ.subset(np.zeros(soc.size, int))
    s2 = soc[:, None]
    r = normal_points(sub, np.full(soc.size, -sub.imax), np.full(soc.size, sub.imax),
                      v_of=lambda t: charging_line_voltage_v(job, s2, t), **SOLVE)
    return r


def charging_current_a(machine, profile, setting, soc):
    """Charging current [A] at each state of charge: the machine's normal operating point.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
        A battery profile.
    setting : Setting
    soc : array_like
        States of charge 0..1.

    Returns
    -------
    ndarray
        [A]; negative when the bank drives current back into the machine,
        NaN where no stable operating point exists.
    """
    _battery_job(profile)
    circ = build_circuit(machine, [setting], profile.drive)
    return _points_at(circ, profile.battery, np.atleast_1d(soc))["load_current_a"]


def _battery_job(profile):
    if profile.kind != "battery":
        raise InputError(profile.source, "load.kind",
                         f"is {profile.kind!r}; allowed: 'battery' (a charge run needs a battery profile)")
    return profile.battery


def _first_crossing(s, g):
    """First ``s`` where ``g`` (sampled on ``s``) rises through zero, or None."""
    up = np.flatnonzero((g[:-1] < 0) & (g[1:] >= 0))
    if not up.size:
        return None
    k = up[0]
    return float(s[k] + (s[k + 1] - s[k]) * (-g[k]) / (g[k + 1] - g[k]))


def charge_run(machine, profile, setting, max_hours=None):
    """Integrate a battery charge from the start to the end state of charge.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
        A battery profile (``load.kind = "battery"``).
    setting : Setting
        How the machine runs (connection, field, speed, winding temperature).
    max_hours : float, optional
        Time cap [h]; :data:`DEFAULT_MAX_HOURS` when omitted.

    Returns
    -------
    ChargeRun
        Stops at the first of: the end state of charge; the volts per cell
        reaching the temperature-corrected charge limit; the current falling
        below the floor (C/100); the time cap.

    Raises
    ------
    InputError
        The profile is not a battery profile, or ``max_hours`` is not a
        positive number.

    References
    ----------
    ``scipy.integrate.solve_ivp`` (RK45 with event location); charge limit
    :func:`supplycfg.jobs.battery.charge_voltage_limit_per_cell` (IEC 62485-2 boost
    voltages, seen).
    """
    job = _battery_job(profile)
    cap_h = DEFAULT_MAX_HOURS if max_hours is None else max_hours
    if isinstance(cap_h, bool) or not np.isfinite(float(cap_h)) or float(cap_h) <= 0:
        raise InputError("charge run", "max_hours", f"is {max_hours!r}; allowed: a number of hours > 0")
    cap_h = float(cap_h)
    circ = build_circuit(machine, [setting], profile.drive)
    st = circ.settings[0]
    chem = battery.chemistry(job.chemistry)
    cap, cells, eff = job.capacity_ah, job.cells, chem.charge_efficiency
    soc0, soc1 = (float(v) for v in job.state_of_charge)
    limit = float(battery.charge_voltage_limit_per_cell(chem, job.temperature_c, job.charge_voltage_per_cell_v))
    floor = CURRENT_FLOOR_PER_H * cap
    rcab = job.cable_resistance_ohm
    notes = []

    # operating points on the state-of-charge table
    s_tab = np.linspace(soc0, soc1, SOC_TABLE_POINTS)
    tab = _points_at(circ, job, s_tab)
    found = tab["found"]
    i_tab = np.where(found, tab["load_current_a"], 0.0)
    v_tab = np.where(found, tab["terminal_voltage_v"], 0.0)
    vpc_tab = (v_tab - i_tab * rcab) / cells
    lost_at = float(s_tab[np.argmin(found)]) if not found.all() else None
    converged = bool(np.all(tab["converged"]))
    if not converged:
        notes.append("an operating point did not converge: the figures of this run are not trustworthy")

    def rhs(t, y):
        i = np.interp(y[0], s_tab, i_tab)
        v = np.interp(y[0], s_tab, v_tab)
        return [i * eff / cap, i, v * i * 1e-3]

    def ev_end(t, y):
        return y[0] - soc1
    ev_end.terminal, ev_end.direction = True, 1

    def ev_volts(t, y):
        return np.interp(y[0], s_tab, vpc_tab) - limit
    ev_volts.terminal, ev_volts.direction = True, 1

    def ev_floor(t, y):
        return np.interp(y[0], s_tab, i_tab) - floor
    ev_floor.terminal, ev_floor.direction = True, -1

    y0 = np.array([soc0, 0.0, 0.0])
    start_stop = None
    if not found[0]:
        start_stop = "no-operating-point"
    elif i_tab[0] < floor:
        start_stop = "current-floor"
    elif vpc_tab[0] >= limit:
        start_stop = "voltage-limit"

    if start_stop is None:
        sol = solve_ivp(rhs, (0.0, cap_h), y0, method="RK45", rtol=RTOL, atol=ATOL, dense_output=True,
                        events=(ev_end, ev_volts, ev_floor))
        if sol.status < 0:
            notes.append(f"the integration failed: {sol.message}")
            converged = False
        t_end = float(sol.t[-1])
        times = np.linspace(0.0, t_end, OUTPUT_POINTS)
        y = sol.sol(times)
        y[:, -1] = sol.y[:, -1]
        hit = [k for k, te in enumerate(sol.t_events) if te.size]
        stop = ("end-soc", "voltage-limit", "current-floor")[hit[0]] if hit else "time-cap"
    else:
        t_end, times, y = 0.0, np.zeros(1), y0[:, None]
        stop = start_stop
    soc = np.minimum(y[0], soc1) if stop == "end-soc" else y[0]
    soc = np.maximum(soc, soc0)
    if stop == "end-soc":
        soc[-1] = soc1

    # exact operating points on the output grid
    pts = _points_at(circ, job, soc)
    cur = pts["load_current_a"]
    vt = pts["terminal_voltage_v"]
    vbank = vt - cur * rcab
    vpc = vbank / cells
    converged &= bool(np.all(pts["converged"]))
    ok = np.isfinite(vt) & np.isfinite(cur)
    flow = drive_point_keys(circ, circ.take(np.zeros(vt.size, int)), np.where(ok, vt, 0.0), np.where(ok, cur, 0.0))
    speed = np.where(ok, flow["speed_rpm"], np.nan)
    shaft = np.where(ok, flow["shaft_power_kw"], np.nan)
    if stop == "current-floor" and lost_at is not None and soc[-1] >= lost_at - 2 * (s_tab[1] - s_tab[0]):
        stop = "no-operating-point"

    soc_end = float(soc[-1])
    pct = f"{100 * soc_end:.1f} %"
    if stop == "end-soc":
        reason = f"the battery reached the end state of charge {100 * soc1:.0f} %"
    elif stop == "voltage-limit":
        reason = (f"the cells reached the charge limit {limit:.3f} V per cell (temperature-corrected) at {pct} "
                  "state of charge; finish at constant voltage or lower the field")
    elif stop == "current-floor":
        if np.isfinite(cur[-1]) and cur[-1] < 0:
            reason = (f"the bank's voltage is above what the machine holds at {pct}: current would flow back into "
                      "the machine (a reverse-current cut-out must open)")
        else:
            reason = (f"the charging current fell to the floor {floor:.3g} A (C/100) at {pct} state of charge: the "
                      "machine's voltage no longer drives a useful current")
    elif stop == "no-operating-point":
        reason = (f"the machine has no stable operating point against the bank at {pct} state of charge "
                  "(its characteristic does not meet the charging curve)")
        if _below_bank(circ, job, soc_end):
            reason += ": the bank's voltage is above the machine's and current would flow back into it " \
                      "(a reverse-current cut-out must open)"
    else:
        reason = f"the time cap of {cap_h:g} h was reached at {pct} state of charge"

    gas = chem.gassing_voltage_v
    gas_s = _first_crossing(soc, vpc - gas) if np.all(np.isfinite(vpc)) else None
    gas_h = None
    if np.isfinite(vpc[0]) and vpc[0] >= gas:
        gas_h = 0.0
    elif gas_s is not None:
        gas_h = float(np.interp(gas_s, soc, times))

    # cautions of this setting on this run
    fig = {"end_volts_per_cell": _nanmax(vpc), "gassing_volts_per_cell": gas,
           "ventilation_m3_per_h": float(battery.ventilation_airflow_m3_per_h(cells, cap, chem.gas_current_boost_ma_per_ah)),
           "max_armature_current_a": _nanmax(np.abs(pts["armature_current_a"])),
           "min_net_mmf_a": _nanmin(pts["x"]), "min_generated_emf_v": _nanmin(pts["generated_emf_v"]),
           "top_speed_rpm": st.speed_rpm}
    if circ.kind[0] == 1:
        fig["critical_resistance_ratio"] = float(circ.s[0] * circ.occ.air_gap_slope() / circ.rf[0])
    cautions = option_cautions(machine, profile, st, fig) + profile_cautions(machine, profile)

    return ChargeRun(
        setting=st, time_h=times, current_a=cur, terminal_voltage_v=vt, bank_voltage_v=vbank,
        volts_per_cell=vpc, state_of_charge=soc, ah=y[1], kwh=y[2], armature_current_a=pts["armature_current_a"],
        duration_h=t_end, stop=stop, stop_reason=reason, limit_volts_per_cell=limit,
        gassing_volts_per_cell=gas, gassing_from_h=gas_h, floor_current_a=floor, max_hours=cap_h,
        start_state_of_charge=soc0, end_state_of_charge=soc1, capacity_ah=cap, cells=cells,
        charge_efficiency=eff, converged=converged, cautions=cautions, notes=notes,
        machine_label=machine.label, profile_label=profile.label, speed_rpm=speed, shaft_power_kw=shaft)


def _below_bank(circ, job, soc):
    """Whether the machine's available voltage at no load is below the bank's open-circuit voltage."""
    e = charging_line_voltage_v(job, soc, 0.0)
    h = machine_state(circ, _params(circ, np.zeros(1, int)), np.full(1, float(e)), np.zeros(1))["h"]
    return bool(h[0] < 0)


def _nanmax(a):
    a = np.asarray(a, float)
    return float(np.nanmax(a)) if np.any(np.isfinite(a)) else None


def _nanmin(a):
    a = np.asarray(a, float)
    return float(np.nanmin(a)) if np.any(np.isfinite(a)) else None


# ---------------------------------------------------------------------------
# from files, and the text the command prints
# ---------------------------------------------------------------------------

def charge_from_files(machine_path, profile_path, setting=None, names=None, max_hours=None):
    """Read both files and run the charge (the ``supplycfg charge`` command).

    Parameters
    ----------
    machine_path, profile_path : str or Path
    setting : Setting, optional
        Checked as command-line input; default the best option of the search
        (the best feasible one, else the best without a ``stop`` caution).
    names : dict, optional
        Setting field -> option name, for messages.
    max_hours : float, optional
        Time cap [h].

    Returns
    -------
    ChargeRun
    """
    from .machine import load_machine
    from .search import search
    m = load_machine(machine_path)
    p = load_profile(profile_path)
    _battery_job(p)
    if setting is None:
        res = search(m, p)
        pick = next((o for o in res.options if o.feasible), None)
        source = f"option {pick.rank} of the search, the best feasible" if pick else ""
        if pick is None:
            pick = next((o for o in res.options if not any(c.severity == "stop" for c in o.cautions)), None)
            if pick is None:
                raise InputError(p.source, "battery", "no setting of this machine can charge this bank; "
                                 "see `supplycfg search` for the limits each setting breaks")
            source = f"option {pick.rank} of the search, the nearest miss (no setting meets every limit)"
        st = pick.setting
    else:
        if p.drive.coupled and setting.speed_rpm is not None:
            raise InputError("command line", (names or {}).get("speed_rpm", "speed_rpm"),
                             f"is given, but the profile's drive is {'an' if p.drive.kind == 'engine' else 'a'} {p.drive.kind} whose speed follows the load; "
                             "allowed: omit it")
        st = check_setting(m, setting, "command line", names)
        source = "command line"
    run = charge_run(m, p, st, max_hours)
    run.setting_source = source
    if "nearest miss" in source:
        run.notes.append("no setting meets every limit of the job; this run uses the nearest miss")
    return run




def _g(v, f=".4g"):
    return "-" if v is None or not np.isfinite(v) else format(v, f)


def charge_text(run):
    """A readable summary of a charge run with a table over time."""
    lines = [f"Charge run: {run.machine_label} on {run.profile_label}",
             f"setting: {run.setting.describe(with_connection=True)}" + (f" ({run.setting_source})" if run.setting_source else ""),
             f"battery: {run.cells} cells, {run.capacity_ah:g} Ah, from {100 * run.start_state_of_charge:.0f} % "
             f"to {100 * run.end_state_of_charge:.0f} % state of charge; charge efficiency {100 * run.charge_efficiency:.0f} %",
             f"stopped after {run.duration_h:.2f} h because {run.stop_reason}"]
    t = np.asarray(run.time_h, float)
    if t.size:
        lines.append(f"delivered {_g(run.ah[-1], '.1f')} Ah and {_g(run.kwh[-1], '.2f')} kWh; current "
                     f"{_g(run.current_a[0], '.3g')} A at the start, {_g(run.current_a[-1], '.3g')} A at the end")
    gas = (f"reached after {run.gassing_from_h:.2f} h" if run.gassing_from_h is not None else "not reached")
    lines.append(f"volts per cell: limit {run.limit_volts_per_cell:.3f} V (temperature-corrected), gassing from "
                 f"{run.gassing_volts_per_cell:.2f} V ({gas}); current floor {run.floor_current_a:.3g} A")
    lines.append("")
    head = ["time_h", "soc_%", "current_a", "machine_v", "bank_v", "v_per_cell", "ah", "kwh"]
    rows = []
    if t.size:
        sel = np.unique(np.round(np.linspace(0, t.size - 1, min(TEXT_ROWS, t.size))).astype(int))
        for k in sel:
            rows.append([_g(t[k], ".2f"), _g(100 * run.state_of_charge[k], ".1f"), _g(run.current_a[k], ".3g"),
                         _g(run.terminal_voltage_v[k], ".1f"), _g(run.bank_voltage_v[k], ".1f"),
                         _g(run.volts_per_cell[k], ".3f"), _g(run.ah[k], ".1f"), _g(run.kwh[k], ".2f")])
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(head)]
    lines.append("  ".join(h.rjust(w) for h, w in zip(head, widths)))
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(c.rjust(w) for c, w in zip(r, widths)) for r in rows]
    if run.cautions:
        lines += ["", "Cautions:"]
        order = {"stop": 0, "warn": 1, "note": 2}
        for c in sorted(run.cautions, key=lambda c: order.get(c.severity, 3)):
            lines.append(f"  [{c.severity}] {c.message} (basis: {c.basis})")
    for n in run.notes:
        lines.append(f"note: {n}")
    if not run.converged:
        lines.append("warning: a solve did not converge; the figures are not trustworthy")
    return "\n".join(lines)
