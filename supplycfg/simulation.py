"""The charge run: a battery charged by the generator through its plan, through time.

The run follows the setting's charge plan (:func:`supplycfg.jobs.battery.charge_plan`):
the main charge on the setting as given until the cells reach the hand-over
voltage, then the finish on the plan's weaker field, at the setting's own
speed and winding temperature. At every state of charge the machine sits at
its normal operating point against the bank (the highest stable
intersection), so the time follows from the charge balance

    ds/dt = I_stored / C     [1/h],

integrated over the state of charge; ``I_stored`` is the part of the
current the charge reaction takes, the rest goes into gas. The figures are
the plan's figures of the search for the same setting: the run and the
search compute them with the same functions on the same grid.

References
----------
Two-rate charging of vented lead-acid banks (common practice; DIN 41773 /
DIN 41774 charger characteristics, from memory); the cell model of
:mod:`supplycfg.jobs.battery`; ventilation IEC 62485-2 (seen).
"""

from dataclasses import dataclass, field, replace

import numpy as np

from . import STANDING_NOTICE
from .jobs import battery
from .jobs import option_cautions, profile_cautions
from .profile import load_profile
from .circuit import Setting, build_circuit, check_setting, circuit_residual, drive_point_keys
from .envelope import expand_candidates
from .errors import InputError
from .text import visible
from .wording import connection_words, source_text

#: Time cap when none is given [h]: a charge not finished in two days points to
#: a fault of the set or the battery (model choice).
DEFAULT_MAX_HOURS = 48.0
#: Rows of the time table in the text summary.
TEXT_ROWS = 12

STOP_CODES = ("end-soc", "voltage-limit", "current-floor", "time-cap", "no-operating-point")


@dataclass
class ChargeRun:
    """A battery charge through time, following its plan.

    Arrays follow the time grid ``time_h`` [h]: ``current_a`` (into the
    bank), ``stored_current_a`` and ``gas_current_a`` (its split),
    ``terminal_voltage_v`` (at the machine), ``bank_voltage_v`` (at the
    battery, after the cable), ``volts_per_cell`` (bank voltage over the
    cells), ``state_of_charge`` (0..1), ``ah`` and ``kwh`` delivered by the
    machine (``kwh`` at its terminals), ``armature_current_a`` and ``stage``
    (1 main charge, 2 finish). At the hand-over the time repeats: the current
    steps down there.
    """

    setting: object
    time_h: np.ndarray
    current_a: np.ndarray
    stored_current_a: np.ndarray
    gas_current_a: np.ndarray
    terminal_voltage_v: np.ndarray
    bank_voltage_v: np.ndarray
    volts_per_cell: np.ndarray
    state_of_charge: np.ndarray
    ah: np.ndarray
    kwh: np.ndarray
    armature_current_a: np.ndarray
    stage: np.ndarray
    duration_h: float
    stop: str
    stop_reason: str
    limit_volts_per_cell: float
    handover_volts_per_cell: float
    gassing_volts_per_cell: float
    gassing_from_h: float | None
    floor_current_a: float
    max_hours: float
    start_state_of_charge: float
    end_state_of_charge: float
    capacity_ah: float
    cells: int
    charge_efficiency: float | None
    finish_setting: object = None
    stages: list = field(default_factory=list)
    hours_to_full: float | None = None
    target_hours: float = 16.0
    ah_charge_factor: float | None = None
    gassing_state_of_charge: float | None = None
    ventilation: dict = field(default_factory=dict)
    cut_in_speed_rpm: dict = field(default_factory=dict)
    standstill_backfeed_current_a: float | None = None
    conditions: dict = field(default_factory=dict)
    figures: dict = field(default_factory=dict)
    converged: bool = True
    cautions: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    machine_label: str = ""
    profile_label: str = ""
    setting_source: str = ""
    speed_rpm: np.ndarray = None
    shaft_power_kw: np.ndarray = None
    drive_coupled: bool = False

    def as_dict(self):
        """JSON-safe: arrays as lists, NaN as None."""
        def arr(a):
            return [float(v) if np.isfinite(v) else None for v in np.asarray(a, float)]

        def num(v):
            return None if v is None or not np.isfinite(v) else float(v)

        return {
            "machine": self.machine_label, "profile": self.profile_label,
            "setting": self.setting.as_dict(), "setting_source": self.setting_source,
            "finish_setting": None if self.finish_setting is None else self.finish_setting.as_dict(),
            "conditions": self.conditions,
            "stages": self.stages, "hours_to_full": num(self.hours_to_full), "target_hours": num(self.target_hours),
            "ah_charge_factor": num(self.ah_charge_factor),
            "gassing_state_of_charge": num(self.gassing_state_of_charge),
            "ventilation": self.ventilation, "cut_in_speed_rpm": self.cut_in_speed_rpm,
            "standstill_backfeed_current_a": num(self.standstill_backfeed_current_a),
            "time_h": arr(self.time_h), "current_a": arr(self.current_a),
            "stored_current_a": arr(self.stored_current_a), "gas_current_a": arr(self.gas_current_a),
            "terminal_voltage_v": arr(self.terminal_voltage_v), "bank_voltage_v": arr(self.bank_voltage_v),
            "volts_per_cell": arr(self.volts_per_cell), "state_of_charge": arr(self.state_of_charge),
            "ah": arr(self.ah), "kwh": arr(self.kwh), "armature_current_a": arr(self.armature_current_a),
            "stage": [int(s) for s in self.stage],
            "duration_h": num(self.duration_h), "stop": self.stop, "stop_reason": self.stop_reason,
            "limit_volts_per_cell": num(self.limit_volts_per_cell),
            "handover_volts_per_cell": num(self.handover_volts_per_cell),
            "gassing_volts_per_cell": num(self.gassing_volts_per_cell),
            "gassing_from_h": num(self.gassing_from_h), "floor_current_a": num(self.floor_current_a),
            "max_hours": num(self.max_hours), "start_state_of_charge": num(self.start_state_of_charge),
            "end_state_of_charge": num(self.end_state_of_charge), "capacity_ah": num(self.capacity_ah),
            "cells": int(self.cells), "charge_efficiency": num(self.charge_efficiency),
            "figures": {k: num(v) for k, v in self.figures.items()},
            "converged": bool(self.converged), "cautions": [c.as_dict() for c in self.cautions],
            "notes": list(self.notes), "notice": STANDING_NOTICE,
            "speed_rpm": None if self.speed_rpm is None else arr(self.speed_rpm),
            "shaft_power_kw": None if self.shaft_power_kw is None else arr(self.shaft_power_kw),
        }


def _battery_job(profile):
    if profile.kind != "battery":
        raise InputError(profile.source, "load.kind",
                         f"is {profile.kind!r}; allowed: 'battery' (a charge run needs a battery profile)")
    return profile.battery


def charging_current_a(machine, profile, setting, soc):
    """Charging current [A] at each state of charge with one constant setting: the machine's normal point.

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
    job = _battery_job(profile)
    soc = np.atleast_1d(np.asarray(soc, float))
    circ = build_circuit(machine, [setting], profile.drive)
    sub = circ.subset(np.zeros(soc.size, int))
    return battery.bank_points(sub, job, soc)["load_current_a"]


def _interp_at(t, x, t_new):
    return float(np.interp(t_new, t, x)) if np.all(np.isfinite(x)) else float("nan")


def charge_run(machine, profile, setting, max_hours=None, finish_setting=None):
    """Charge the bank through the setting's plan, from the start to the end state of charge.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
        A battery profile (``load.kind = "battery"``).
    setting : Setting
        The main charge's setting (connection, field, speed, winding temperature).
    max_hours : float, optional
        Time cap [h]; :data:`DEFAULT_MAX_HOURS` when omitted.
    finish_setting : Setting, optional
        The finish's setting (same connection, taps and diverter); default the
        plan's rule (:func:`supplycfg.jobs.battery.finish_controls`).

    Returns
    -------
    ChargeRun
        Stops at the first of: the end state of charge; the cells at the
        chemistry's highest voltage; the current below the floor (or flowing
        back); no operating point; the time cap.

    Raises
    ------
    InputError
        The profile is not a battery profile, ``max_hours`` is not a positive
        number, or the finish setting changes the connection.
    """
    job = _battery_job(profile)
    cap_h = DEFAULT_MAX_HOURS if max_hours is None else max_hours
    if isinstance(cap_h, bool) or not np.isfinite(float(cap_h)) or float(cap_h) <= 0:
        raise InputError("charge run", "max_hours", f"is {max_hours!r}; allowed: a number of hours > 0")
    cap_h = float(cap_h)
    if profile.drive.coupled:
        # an engine or a motor: the setting's speed is the drive's no-load speed; loaded, it falls
        setting = replace(setting, speed_rpm=profile.drive.generator_speeds_rpm()[0])
    st = check_setting(machine, setting)
    if finish_setting is not None:
        fs = check_setting(machine, finish_setting)
        if (fs.connection, fs.series_turns, fs.diverter_ohm) != (st.connection, st.series_turns, st.diverter_ohm):
            raise InputError("charge run", "finish_setting", "changes the connection, taps or diverter; allowed: "
                             "only the field control changes between stages")
    plan = battery.setting_plan(machine, profile, st, finish_setting)
    space = plan.space
    lim, figs, extras = battery.plan_figures(plan)
    f = {k: float(np.asarray(v)[0]) for k, v in figs.items() if k != "drive_points"}
    f["top_speed_rpm"] = max(c[0] for c in space.corners)
    ex = extras[0]
    nom = battery.corner_roles(space)[0]
    chem = battery.chemistry(job.chemistry)
    cap, cells = job.capacity_ah, job.cells
    soc0, soc1 = (float(v) for v in job.state_of_charge)
    floor = battery.CURRENT_FLOOR_PER_H * cap
    vmax = float(battery.highest_volts_per_cell(chem, job.temperature_c))
    vho = battery.handover_volts_per_cell(job)
    gas_v = float(battery.gassing_volts_per_cell(chem, job.temperature_c))
    notes = []

    # the run's arrays: the main charge, then the finish where the plan hands over
    r = nom
    m, fi = plan.main, plan.finish
    # a one-stage plan runs on past the hand-over voltage with the same field: still its stage 1
    parts = [(m, 1)] + ([(fi, 2 if plan.two_stage[0] else 1)] if plan.handed_over[r] else [])
    if plan.handed_over[r] and not m.soc[r, -1] > m.soc[r, 0]:
        # the bank was at the hand-over voltage from the start: no main charge to show, its nodes all one
        parts = [(fi, 1)]
    cols = {k: [] for k in ("time_h", "current_a", "stored_current_a", "gas_current_a", "terminal_voltage_v",
                            "volts_per_cell", "soc", "ah", "kwh", "armature_current_a", "found", "stage",
                            "part")}
    t_off = ah_off = kwh_off = 0.0
    for stg, no in parts:
        cols["time_h"].append(stg.time_h[r] + t_off)
        cols["ah"].append(stg.ah[r] + ah_off)
        cols["kwh"].append(stg.kwh[r] + kwh_off)
        for k, src in (("current_a", "current_a"), ("stored_current_a", "stored_current_a"),
                       ("gas_current_a", "gas_current_a"), ("terminal_voltage_v", "terminal_voltage_v"),
                       ("volts_per_cell", "volts_per_cell"), ("soc", "soc"),
                       ("armature_current_a", "armature_current_a"), ("found", "found")):
            cols[k].append(getattr(stg, src)[r])
        cols["stage"].append(np.full(stg.soc.shape[1], no))
        cols["part"].append(np.full(stg.soc.shape[1], len(cols["part"])))
        t_off, ah_off, kwh_off = t_off + stg.time_h[r, -1], ah_off + stg.ah[r, -1], kwh_off + stg.kwh[r, -1]
    a = {k: np.concatenate(v) for k, v in cols.items()}
    t = a["time_h"]
    converged = bool(f["converged"] >= 1)
    if not converged:
        notes.append("an operating point did not converge: the figures of this run are not trustworthy")

    # where the run ends: the first of a stall, the voltage ceiling and the time cap
    reach = np.isfinite(t)
    last = int(np.flatnonzero(reach)[-1]) if reach.any() else 0
    stop = "end-soc" if last == t.size - 1 and reach.all() else None
    if stop is None:
        nxt = min(last + 1, t.size - 1)
        if not a["found"][nxt]:
            stop = "no-operating-point"
        else:
            stop = "current-floor"
    # the voltage ceiling and the time cap cut the run between two points, by interpolation
    cut = None
    vpc_all = np.nan_to_num(a["volts_per_cell"], nan=-np.inf)
    over = np.flatnonzero(vpc_all > vmax * (1 + 1e-9))
    if over.size and over[0] <= last:
        j = int(over[0])
        w = 1.0 if j == 0 else float((vmax - vpc_all[j - 1]) / (vpc_all[j] - vpc_all[j - 1]))
        cut = ("voltage-limit", j, w)
    t_end = float(t[last]) if cut is None else float(t[max(cut[1] - 1, 0)] + cut[2] * (t[cut[1]] - t[max(cut[1] - 1, 0)]))
    if t_end > cap_h:
        j = int(np.searchsorted(t[: last + 1], cap_h, side="left"))
        w = 1.0 if j == 0 or t[j] == t[j - 1] else float((cap_h - t[j - 1]) / (t[j] - t[j - 1]))
        cut = ("time-cap", j, w)
    end_idx = last if cut is None else cut[1]
    out = {k: v[: end_idx + 1].astype(float) for k, v in a.items() if k != "found"}
    if cut is not None:
        # inside the step the currents vary linearly in time (the step's own rule), so the state of
        # charge, the Ah and the kWh at the cut follow from their trapezoid integrals
        stop, j, w = cut
        lo = max(j - 1, 0)
        dt = float(t[j] - t[lo])
        tau = w * dt
        for k in out:
            if k not in ("stage", "part"):
                out[k][-1] = a[k][lo] + w * (a[k][j] - a[k][lo])
        if dt > 0:
            i_a, i_b = a["stored_current_a"][lo], a["stored_current_a"][j]
            out["soc"][-1] = a["soc"][lo] + (i_a * tau + (i_b - i_a) * tau ** 2 / (2 * dt)) / cap
            out["ah"][-1] = a["ah"][lo] + 0.5 * (a["current_a"][lo] + out["current_a"][-1]) * tau
            p_a = a["terminal_voltage_v"][lo] * a["current_a"][lo]
            out["kwh"][-1] = a["kwh"][lo] + 0.5e-3 * (p_a + out["terminal_voltage_v"][-1] * out["current_a"][-1]) * tau
        out["time_h"][-1] = t[lo] + tau
        if stop == "time-cap":
            out["time_h"][-1] = cap_h
    duration = float(out["time_h"][-1]) if out["time_h"].size else 0.0
    soc = out["soc"]
    pct = f"{100 * soc[-1]:.1f} %" if soc.size else "-"
    cur = out["current_a"]
    # speed and shaft power along the run: the main charge's field, then the finish's, at the setting's corner
    rows, _ = expand_candidates(space, np.zeros(2, int), np.array([plan.u1[0], plan.u2[0]]), np.full(2, nom))
    ok = np.isfinite(out["terminal_voltage_v"]) & np.isfinite(cur)
    part = out.pop("part").astype(int)
    flow = drive_point_keys(rows, rows.take(part), np.where(ok, out["terminal_voltage_v"], 0.0), np.where(ok, cur, 0.0))
    speed = np.where(ok, flow["speed_rpm"], np.nan)
    shaft = np.where(ok, flow["shaft_power_kw"], np.nan)
    if stop == "end-soc":
        reason = f"the battery reached the end state of charge {100 * soc1:.0f} %"
    elif stop == "voltage-limit":
        reason = (f"the cells reached the chemistry's highest voltage {vmax:.3f} V per cell (temperature-corrected) "
                  f"at {pct} state of charge; weaken the field before that")
    elif stop == "current-floor":
        nxt = min(end_idx + 1, a["current_a"].size - 1)
        if np.isfinite(a["current_a"][nxt]) and a["current_a"][nxt] < 0:
            reason = (f"the bank's voltage is above what the machine holds at {pct}: current would flow back into "
                      "the machine (a reverse-current cut-out must open)")
        else:
            reason = (f"the charging current fell to the floor {floor:.3g} A at {pct} state of charge: the machine's "
                      "voltage no longer drives a useful current")
    elif stop == "no-operating-point":
        reason = (f"the machine has no stable operating point against the bank at {pct} state of charge "
                  "(its characteristic does not meet the charging curve)")
        if _below_bank(machine, st, profile, soc[-1] if soc.size else soc0):
            reason += ": the bank's voltage is above the machine's and current would flow back into it " \
                      "(a reverse-current cut-out must open)"
    else:
        reason = f"the time cap of {cap_h:g} h was reached at {pct} state of charge"

    stages = _stages_as_run(ex["plan"], out, stop, reason, duration)
    full_h = duration if stop == "end-soc" else None
    hours_to_full = full_h if full_h is not None and full_h <= job.target_hours * (1 + 1e-12) else None
    gained = (soc[-1] - soc0) * cap if soc.size else 0.0
    ah_end = float(out["ah"][-1]) if out["ah"].size else 0.0
    factor = ah_end / gained if gained > 0 else None
    gas_s = f["gassing_state_of_charge"] if np.isfinite(f["gassing_state_of_charge"]) else None
    gas_h = None
    if gas_s is not None and soc.size and gas_s <= soc[-1] + 1e-12:
        gas_h = float(np.interp(gas_s, soc, out["time_h"]))
    cautions = option_cautions(machine, profile, st, f) + profile_cautions(machine, profile)
    fin = None if ex["finish_setting"] is None else Setting(**ex["finish_setting"])
    return ChargeRun(
        setting=st, time_h=out["time_h"], current_a=cur, stored_current_a=out["stored_current_a"],
        gas_current_a=out["gas_current_a"], terminal_voltage_v=out["terminal_voltage_v"],
        bank_voltage_v=out["terminal_voltage_v"] - cur * job.cable_resistance_ohm,
        volts_per_cell=out["volts_per_cell"], state_of_charge=soc, ah=out["ah"], kwh=out["kwh"],
        armature_current_a=out["armature_current_a"], stage=out["stage"].astype(int), duration_h=duration,
        stop=stop, stop_reason=reason, limit_volts_per_cell=vmax, handover_volts_per_cell=vho,
        gassing_volts_per_cell=gas_v, gassing_from_h=gas_h, floor_current_a=floor, max_hours=cap_h,
        start_state_of_charge=soc0, end_state_of_charge=soc1, capacity_ah=cap, cells=cells,
        charge_efficiency=None if not factor else 1.0 / factor, finish_setting=fin, stages=stages,
        hours_to_full=hours_to_full, target_hours=job.target_hours, ah_charge_factor=factor,
        gassing_state_of_charge=gas_s, ventilation=ex["ventilation"], cut_in_speed_rpm=ex["cut_in_speed_rpm"],
        standstill_backfeed_current_a=ex["standstill_backfeed_current_a"], conditions=ex["conditions"],
        figures=f, converged=converged, cautions=cautions, notes=notes,
        machine_label=machine.label, profile_label=profile.label, speed_rpm=speed,
        shaft_power_kw=shaft, drive_coupled=profile.drive.coupled)


def _stages_as_run(planned, out, stop, reason, duration):
    """The plan's stages as the run went: a stage the run went past stands as planned; the stage
    holding the run's last point ends there, for the run's reason (unless that is the plan's end)."""
    if stop == "end-soc":
        return [dict(s) for s in planned]
    stages = []
    t, stage_no = out["time_h"], out["stage"]
    for s in planned:
        sel = np.flatnonzero(stage_no == s["stage"])
        if not sel.size:
            break
        s = dict(s)
        k = int(sel[-1])
        if k == t.size - 1:
            s.update(to_h=float(t[k]), to_state_of_charge=float(out["soc"][k]),
                     end_current_a=_finite(out["current_a"][k]), end_volts_per_cell=_finite(out["volts_per_cell"][k]),
                     ends_because=stop, ends_reason=reason)
            stages.append(s)
            break
        stages.append(s)
    return stages


def _finite(v):
    return float(v) if np.isfinite(v) else None


def _below_bank(machine, setting, profile, soc):
    """Whether the machine's available voltage at no load is below the bank's open-circuit voltage."""
    job = profile.battery
    chem = battery.chemistry(job.chemistry)
    e = job.cells * float(battery.open_circuit_voltage_per_cell(chem, soc, job.open_circuit_voltage_per_cell_v))
    circ = build_circuit(machine, [setting], profile.drive)
    h = circuit_residual(circ, circ.take(np.zeros(1, int)), np.full(1, e), np.zeros(1))
    return bool(h[0] < 0)


# ---------------------------------------------------------------------------
# from files, and the text the command prints
# ---------------------------------------------------------------------------

def finish_setting_of(option):
    """The finish's :class:`~supplycfg.circuit.Setting` of a search option's plan, or None (one stage)."""
    d = (getattr(option, "extras", None) or {}).get("finish_setting")
    return None if d is None else Setting(**d)


def charge_run_for_option(machine, profile, option, max_hours=None):
    """The charge run of a search option: its setting and its plan's finish."""
    return charge_run(machine, profile, option.setting, max_hours, finish_setting_of(option))


def charge_from_files(machine_path, profile_path, setting=None, names=None, max_hours=None):
    """Read both files and run the charge (the ``supplycfg charge`` command).

    Parameters
    ----------
    machine_path, profile_path : str or Path
    setting : Setting, optional
        Checked as command-line input; default the best plan of the search
        (the best feasible option, else the best without a ``stop`` caution).
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
        run = charge_run_for_option(m, p, pick, max_hours)
        # the plan's meter readings, rounded to what can be set, go with the stages they belong to
        readings = {q.get("stage"): q.get("readings") for q in (pick.extras or {}).get("plan") or []}
        for q in run.stages:
            if readings.get(q.get("stage")) is not None:
                q["readings"] = readings[q["stage"]]
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
    if v is None or not np.isfinite(v):
        return "-"
    # no e-notation for a reader: a figure of 1000 or more is written whole
    return f"{v:.0f}" if f.endswith("g") and abs(v) >= 1000 else format(v, f)


def charge_text(run):
    """A readable summary of a charge run: its plan, its figures and a table over time."""
    c = run.conditions.get("setting", {})
    sp = c.get("speed_rpm", run.setting.speed_rpm)
    sp_words = f"{sp:.0f} rpm at no load, lower under load on the {c['drive']}" if c.get("drive") else f"{sp:g} rpm"
    at = (f" at {sp_words}, windings {c.get('winding_temperature_c', run.setting.winding_temperature_c):g} degC"
          if c or run.setting.speed_rpm else "")
    stops = [c for c in getattr(run, "cautions", None) or [] if c.severity == "stop"]
    lines = [f"Charge run: {visible(run.machine_label)} on {visible(run.profile_label)}"]
    # a stop heads the run: what follows is for reference, not a charge to start
    lines += [f"STOP: {c.message} The run below is for reference only." for c in stops]
    lines += [f"setting: {connection_words(run.setting.connection)} (--connection {run.setting.connection}), "
             f"{run.setting.describe()}" + (f" ({run.setting_source})" if run.setting_source else "")
             + ("; simulated at these exact values, set the meter readings of the plan below"
                if any(q.get("readings") for q in run.stages) else ""),
             f"battery: {run.cells} cells, {run.capacity_ah:g} Ah, from {100 * run.start_state_of_charge:.0f} % "
             f"to {100 * run.end_state_of_charge:.0f} % state of charge",
             f"stopped after {run.duration_h:.2f} h because {run.stop_reason}", "", f"Plan{at}:"]
    for row in battery.plan_rows(run.stages):
        lines.append("  " + "; ".join(row))
    full = "not within the target" if run.hours_to_full is None else f"{run.hours_to_full:.2f} h"
    lines.append(f"hours to full: {full} (target {run.target_hours:g} h); Ah returned / Ah stored "
                 f"{_g(run.ah_charge_factor, '.3f')}; gassing from {_g(None if run.gassing_state_of_charge is None else 100 * run.gassing_state_of_charge, '.0f')} % charge")
    t = np.asarray(run.time_h, float)
    if t.size:
        lines.append(f"delivered {_g(run.ah[-1], '.1f')} Ah and {_g(run.kwh[-1], '.2f')} kWh; current "
                     f"{_g(run.current_a[0], '.3g')} A at the start, {_g(run.current_a[-1], '.3g')} A at the end")
    v = run.ventilation or {}
    lines.append(f"ventilation: {_g(v.get('airflow_m3_per_h'), '.3g')} m3/h, natural-ventilation opening "
                 f"{_g(v.get('opening_cm2'), '.0f')} cm2 ({battery.VENTILATION_GOVERNORS.get(v.get('governed_by'), '-')})")
    ci = run.cut_in_speed_rpm or {}
    lines.append(f"cut-out: closes at {_g(run.figures.get('cutout_closing_voltage_v'), '.1f')} V, reached at "
                 f"{_g(ci.get('cold'), '.0f')} rpm cold and {_g(ci.get('hot'), '.0f')} rpm hot; standstill back-feed "
                 f"without it {_g(run.standstill_backfeed_current_a, '.0f')} A")
    lines.append(f"volts per cell: hand-over {run.handover_volts_per_cell:.3f} V, gassing {run.gassing_volts_per_cell:.3f} V, "
                 f"highest allowed {run.limit_volts_per_cell:.3f} V (temperature-corrected); the run stops if the "
                 f"current falls below {run.floor_current_a:.3g} A (half a float current: no longer charging)")
    lines.append("")
    head = ["time [h]", "stage", "charge [%]", "current [A]", "stored [A]", "machine [V]", "bank [V]", "per cell [V]",
            "charged [Ah]", "energy [kWh]"]
    # on an engine or a motor the speed follows the load: the tachometer and the shaft power along the run
    driven = run.speed_rpm is not None and getattr(run, "drive_coupled", False)
    if driven:
        head += ["speed [rpm]", "shaft [kW]"]
    rows = []
    if t.size:
        sel = np.unique(np.round(np.linspace(0, t.size - 1, min(TEXT_ROWS, t.size))).astype(int))
        for k in sel:
            rows.append([_g(t[k], ".2f"), str(int(run.stage[k])), _g(100 * run.state_of_charge[k], ".1f"),
                         _g(run.current_a[k], ".3g"), _g(run.stored_current_a[k], ".3g"),
                         _g(run.terminal_voltage_v[k], ".1f"), _g(run.bank_voltage_v[k], ".1f"),
                         _g(run.volts_per_cell[k], ".3f"), _g(run.ah[k], ".1f"), _g(run.kwh[k], ".2f")]
                        + ([_g(run.speed_rpm[k], ".0f"), _g(run.shaft_power_kw[k], ".3g")] if driven else []))
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(head)]
    lines.append("  ".join(h.rjust(w) for h, w in zip(head, widths)))
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(c.rjust(w) for c, w in zip(r, widths)) for r in rows]
    if run.cautions:
        lines += ["", "Cautions:"]
        order = {"stop": 0, "warn": 1, "note": 2}
        for c in sorted(run.cautions, key=lambda c: order.get(c.severity, 3)):
            lines.append(f"  [{c.severity}] {c.message} ({source_text(c.basis)})")
    for n in run.notes:
        lines.append(f"note: {n}")
    if not run.converged:
        lines.append("warning: a solve did not converge; the figures are not trustworthy")
    return "\n".join(lines)
