"""The drive's figures over a job's envelope: shaft power, speed, efficiency and losses at each load point.

Each job evaluates its candidates at a few load points (the ends of a
welding range, the start and the end of a charge, the currents of a feeder)
at every corner of the envelope. :func:`load_point_figures` takes those
points, solves their power flow (:func:`supplycfg.circuit.drive_point_keys`)
and adds the drive's limits and figures to the job's: ``drive_power``
(shaft power above the drive's rating anywhere, no averaging over a duty
cycle), the motor's torque against its breakdown torque, and whether a
self-excited machine holds a stable loaded point at the speed the drive
falls to. The per-point table (:class:`DrivePoints`) becomes each option's
``drive_points``.
"""

import warnings
from dataclasses import replace

import numpy as np

from .circuit import (DRIVE_POINT_KEYS, NO_LOAD_SCAN_TOP_SHARE, circuit_residual, critical_field_resistance_ohm,
                      drive_point_keys, no_load_voltages, normal_points, zero_load_current)
from .envelope import expand_candidates

#: Relative step of terminal voltage for the slope test of a loaded self-excited point.
SLOPE_STEP = 1e-6


class DrivePoints:
    """Power flow of every candidate at every load point and corner, solved when first asked for.

    ``values[key]`` is an array ``(n, corners, points)``; ``losses[kind]``
    the same for each loss; ``collapsed`` counts, per candidate, the loaded
    points where a self-excited machine on an engine or a motor has no
    stable point at the speed the drive falls to.
    """

    def __init__(self, space, n, points, missing_collapses=True):
        self.drive = space.profile.drive
        self.missing_collapses = missing_collapses
        self.corners = list(space.corners)
        self.labels = [p[0] for p in points]
        self._args = (space.nc, n, points)
        self._done = False
        self._lists = None

    def _solve(self):
        if self._done:
            return
        nc, n, points = self._args
        vals = {k: [] for k in DRIVE_POINT_KEYS if k != "losses_w"}
        vals.update(drive_torque_percent=[], exciter_power_w=[], terminal_voltage_v=[], load_current_a=[])
        losses = {}
        collapsed = np.zeros(n * nc)
        for label, sub, v, il in points:
            p = sub.take(np.arange(sub.n))
            v = np.asarray(v, float); il = np.asarray(il, float)
            found = np.isfinite(v) & np.isfinite(il)
            vv, ii = np.where(found, v, 0.0), np.where(found, il, 0.0)
            keys = drive_point_keys(sub, p, vv, ii)
            keys.update(terminal_voltage_v=v, load_current_a=il)
            for k in vals:
                vals[k].append(np.where(found, keys[k], np.nan))
            for kind, arr in keys["losses_w"].items():
                losses.setdefault(kind, []).append(np.where(found, arr, np.nan))
            if self.drive.coupled:
                # no stable point on the job's line, or (plain shunt field) only the one below the knee
                lower = (sub.c == 0) & _on_lower_branch(sub, p, vv, ii)
                missing = ~found if self.missing_collapses else np.zeros(found.shape, bool)
                collapsed += (sub.kind == 1) & (missing | (found & lower))

        def cube(lst):
            return np.stack(lst, axis=-1).reshape(n, nc, len(points))

        self.values = {k: cube(a) for k, a in vals.items()}
        self.losses = {k: cube(a) for k, a in losses.items()}
        self.collapsed = collapsed.reshape(n, nc).sum(axis=1)
        self._done = True

    def summary(self):
        """Per-candidate figures: peak shaft power [kW], least and most speed [rpm], least
        efficiency [%], collapsed points; with a rated drive its loading and (motor) torque [%]."""
        self._solve()
        v = self.values
        n = v["shaft_power_kw"].shape[0]
        figs = {"max_shaft_power_kw": _nan_reduce(v["shaft_power_kw"], "max"),
                "min_speed_rpm": _nan_reduce(v["speed_rpm"], "min"),
                "max_speed_rpm": _nan_reduce(v["speed_rpm"], "max"),
                "min_efficiency_percent": 100.0 * _nan_reduce(v["efficiency"], "min"),
                "max_terminal_voltage_v": _nan_reduce(v["terminal_voltage_v"], "max"),
                "heaviest_point_efficiency_percent": 100.0 * efficiency_at_heaviest_point(v["shaft_power_kw"],
                                                                                          v["efficiency"])}
        if self.drive.coupled:
            figs["collapsed_load_points"] = self.collapsed
            figs["max_drive_loading_percent"] = _nan_reduce(v["drive_loading_percent"], "max")
            figs["drive_rated_power_kw"] = np.full(n, self.drive.rated_power_kw)
            if self.drive.kind == "motor":
                figs["max_drive_torque_percent"] = _nan_reduce(v["drive_torque_percent"], "max")
                figs["breakdown_torque_percent"] = np.full(n, self.drive.breakdown_torque_percent)
        return figs

    def rows(self, i):
        """Candidate ``i``'s points as JSON-ready dicts (None where a point does not exist)."""
        self._solve()
        if self._lists is None:
            # every table read into nested lists once: a search asks for every candidate's rows
            self._lists = ({key: finite_or_none_lists(arr) for key, arr in self.values.items()
                            if not (key == "drive_torque_percent" and self.drive.kind != "motor")},
                           {kind: finite_or_none_lists(arr) for kind, arr in self.losses.items()})
        vals = {key: v[i] for key, v in self._lists[0].items()}
        losses = {kind: v[i] for kind, v in self._lists[1].items()}
        out = []
        for j, (speed, temp) in enumerate(self.corners):
            for k, label in enumerate(self.labels):
                d = {"load_point": label, "winding_temperature_c": temp}
                for key, v in vals.items():
                    d[key] = v[j][k]
                d["losses_w"] = {kind: v[j][k] for kind, v in losses.items()}
                out.append(d)
        return out


def efficiency_at_heaviest_point(shaft_power_kw, efficiency):
    """Per candidate (first axis), the efficiency where the shaft power is highest over the other axes
    (NaN where no point exists): the figure that describes the set at work, where the lowest efficiency
    over the points is set by the lightest load and falls towards zero with it."""
    n = shaft_power_kw.shape[0]
    sp = np.where(np.isfinite(shaft_power_kw), shaft_power_kw, -np.inf).reshape(n, -1)
    k = np.argmax(sp, axis=1)
    eff = efficiency.reshape(n, -1)[np.arange(n), k]
    return np.where(np.isfinite(sp[np.arange(n), k]), eff, np.nan)


def finite_or_none_lists(a):
    """``a`` as nested lists of floats, None where a value is not finite."""
    a = np.asarray(a, float)
    o = a.astype(object)
    o[~np.isfinite(a)] = None
    return o.tolist()


def _nan_reduce(a, how):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return np.nanmax(a, axis=(1, 2)) if how == "max" else np.nanmin(a, axis=(1, 2))


def _on_lower_branch(sub, p, v, il):
    """Where a shunt-excited point sits below the knee: the residual rises with voltage at fixed current.

    For a plain shunt field such a point is the collapsed state, not the
    normal branch: the field line is steeper than the curve there (design
    note: stable means the residual falls as the voltage rises). A series
    winding can hold a normal point there, so compounds are not judged this way.
    """
    dv = SLOPE_STEP * np.maximum(1.0, np.abs(v))
    hp = circuit_residual(sub, p, v + dv, il)
    hm = circuit_residual(sub, p, v - dv, il)
    return (hp - hm) >= 0


def load_point_figures(space, n, points, missing_collapses=True):
    """The drive's limits and figures of ``n`` candidates at a job's load points.

    Parameters
    ----------
    space : Space
        The search's candidate space (its profile has the drive).
    n : int
        Candidates; each point's arrays have ``n * corners`` rows, corner fastest.
    points : list of (label, circuit, v, il)
        A load point: its name, the circuit of its rows, and the terminal
        voltage [V] and load current [A] the job found there (NaN where the
        machine has no operating point).
    missing_collapses : bool, optional
        Count a load point where a self-excited machine has no operating
        point as a collapse (the job's other limits do not already catch it).

    Returns
    -------
    (limits, figures)
        ``figures["drive_points"]`` is a :class:`DrivePoints`. With an engine
        or a motor its summary is solved at once and ``limits`` holds
        ``drive_power`` (the peak shaft power against the rating, anywhere
        in the envelope); with a fixed drive nothing limits and the table
        is solved only when the search reports it.
    """
    table = DrivePoints(space, n, points, missing_collapses)
    figs = {"drive_points": table}
    lim = {}
    drive = space.profile.drive
    if drive.coupled:
        figs.update(table.summary())
        # a drive driven backwards (a battery overhauling the set) is loaded as surely: the size counts
        lim["drive_power"] = (np.fmax(figs["max_shaft_power_kw"], _nan_reduce(-table.values["shaft_power_kw"], "max")),
                              drive.rated_power_kw, "max", "kW")
    return lim, figs


def idle_figures(space, base_idx, u):
    """No-load voltage [V] at the engine's idle and whether a self-excited field builds up there.

    Returns ``(voltage, builds_up)`` per candidate (worst over the winding
    temperatures: the lowest voltage, and 0 where any corner fails to build
    up); NaN where the drive has no idle or the field is not self-excited.
    """
    drive = space.profile.drive
    n = len(base_idx)
    if drive.idle_speed_rpm is None:
        return np.full(n, np.nan), np.full(n, np.nan)
    sub, _ = expand_candidates(space, base_idx, u)
    s_idle = drive.idle_generator_speed_rpm / sub.occ.speed_rpm
    idle = replace(sub, s=np.full(sub.n, s_idle), drive=None)
    vnl = no_load_voltages(idle).reshape(n, space.nc)
    rcrit = critical_field_resistance_ohm(idle)
    builds = np.where(idle.kind == 1, (idle.rf < rcrit).astype(float), np.nan).reshape(n, space.nc)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return np.nanmin(vnl, axis=1), np.nanmin(builds, axis=1)


def no_load_speeds(space, base_idx, u):
    """Generator speed [rpm] at no load on an engine or a motor: the set's own losses already load it.

    The highest over the envelope's corners (the tachometer check at no load); NaN where the
    machine has no no-load point, or with a fixed drive.
    """
    n = len(base_idx)
    if not space.profile.drive.coupled:
        return np.full(n, np.nan)
    sub, _ = expand_candidates(space, base_idx, u)
    top = 1.5 * sub.machine.rated_voltage_v * sub.s / sub.s.min() + 50.0
    r = normal_points(sub, np.zeros(sub.n), top, il_of=zero_load_current, alike=True, top_share=NO_LOAD_SCAN_TOP_SHARE)
    v = np.where(r["found"], r["terminal_voltage_v"], 0.0)
    speed = drive_point_keys(sub, sub.take(np.arange(sub.n)), v, np.zeros(sub.n))["speed_rpm"]
    speed = np.where(r["found"], speed, np.nan).reshape(n, space.nc)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return np.nanmax(speed, axis=1)
