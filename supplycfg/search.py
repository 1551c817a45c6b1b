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
from dataclasses import dataclass, field, replace

import numpy as np

from . import STANDING_NOTICE, __version__
from .circuit import USES_SERIES, Setting, check_setting
from .envelope import build_space, candidate_bases, margin
from .jobs import JOBS, option_cautions, profile_cautions
from .machine import load_machine
from .powerflow import idle_figures, no_load_speeds
from .profile import load_profile

__all__ = ["Option", "SearchResult", "candidate_bases", "search", "search_machine_profile", "search_text"]

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
    drive_points: list = field(default_factory=list)

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
        d["drive_points"] = self.drive_points
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
                "drive": self.profile.drive.describe(),
                "options": [o.as_dict() for o in self.options],
                "cautions": [c.as_dict() for c in self.cautions],
                "candidates_evaluated": self.candidates_evaluated,
                "search_seconds": self.search_seconds, "notes": list(self.notes),
                "notice": STANDING_NOTICE}


# ---------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------

def _fig_dict(figs, i):
    out = {}
    for k, v in figs.items():
        if k in ("converged", "drive_points"):
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


def search(machine, profile, with_drive_check=True):
    """Every setting that meets the job, ranked, with the nearest misses.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
    with_drive_check : bool, optional
        When nothing is feasible with an engine or a motor, search again with
        a far larger drive of the same kind to say whether the drive limits the job.

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
    u_best, lim, figs, extras, evaluated = JOBS[profile.kind].solve(space)
    top_speed = max(c[0] for c in space.corners)
    figs = dict(figs)
    figs["idle_no_load_voltage_v"], figs["idle_builds_up"] = idle_figures(space, np.arange(nb), u_best)
    figs["no_load_speed_rpm"] = no_load_speeds(space, np.arange(nb), u_best)
    table = figs.get("drive_points")
    if table is not None:
        figs.update({k: v for k, v in table.summary().items() if k not in figs})
    options = []
    for i in range(nb):
        margins, failed, fracs = {}, [], []
        for name, (val, limit, kind, unit) in lim.items():
            v = float(np.asarray(val)[i])
            mv, fr = margin(v, limit, kind, unit)
            if not math.isfinite(fr):
                fr, mv = -1.0, None
                failed.append(name)
            elif fr < 0:
                failed.append(name)
            margins[name] = {"value": v if math.isfinite(v) else None, "limit": limit, "kind": kind,
                             "unit": unit, "margin": mv, "fraction": fr}
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
                              (extras[i] or {}).get("current_settings"), {"field-current": "field-current", "none": "none"}.get(space.bases[i][3], "rheostat"),
                              extrap, table.rows(i) if table is not None else []))
    options.sort(key=lambda o: (not o.feasible, -o.smallest_margin, o.setting.connection,
                                o.setting.series_turns or 0, o.setting.diverter_ohm or 0))
    for k, o in enumerate(options, 1):
        o.rank = k
    if not any(o.feasible for o in options):
        notes.append("no setting meets every limit; the nearest misses are listed with the limit each breaks")
        if profile.drive.coupled and with_drive_check:
            notes += drive_limit_notes(machine, profile, options)
    return SearchResult(machine, profile, options, profile_cautions(machine, profile), int(evaluated),
                        time.perf_counter() - t0, notes)


#: Rating multiple of the "far larger drive" that tells whether the drive limits a job.
STIFF_DRIVE_FACTOR = 100.0


def drive_limit_notes(machine, profile, options):
    """Why nothing is feasible, when the drive is the reason: the notes of an infeasible search."""
    drive = profile.drive
    over = [o for o in options if "drive_power" in o.failed]
    stiff = replace(profile, drive=drive.with_rating(STIFF_DRIVE_FACTOR * drive.rated_power_kw))
    big = search(machine, stiff, with_drive_check=False)
    if not big.feasible:
        return []
    need = min(o.figures.get("max_shaft_power_kw") or math.inf for o in big.feasible)
    text = (f"the drive limits this job: with a larger {drive.kind} of the same figures "
            f"{len(big.feasible)} setting(s) meet it, the least of them drawing {need:.3g} kW at the shaft against "
            f"the {drive.rated_power_kw:g} kW rating")
    if over:
        text += f"; {len(over)} setting(s) here break the drive_power limit"
    return [text + "; `supplycfg size` finds the smallest rating that works"]


def search_machine_profile(machine_path, profile_path):
    """Read both files and search."""
    m = load_machine(machine_path)
    p = load_profile(profile_path)
    return search(m, p)


def _short(v, f=".4g"):
    return "-" if v is None else format(v, f)


def search_text(res, top=10):
    """The ranked table a technician reads."""
    lines = [f"{res.machine.label} for {res.profile.label} ({res.profile.kind})",
             f"drive: {res.profile.drive.describe()}",
             f"{res.candidates_evaluated} candidate evaluations in {res.search_seconds:.2f} s", ""]
    hdr = f"{'rank':>4}  {'fit':<4}  {'connection':<25} {'turns':>5} {'diverter':>9} {'field':>14} {'speed':>6}  {'least margin':>12}  cautions / limits broken"
    lines += [hdr, "-" * len(hdr)]
    for o in res.options[:top]:
        s = o.setting
        fld = f"{s.field_current_a:.3f} A" if o.control == "field-current" else (
            "-" if s.rheostat_ohm is None or o.control == "none" else f"{s.rheostat_ohm:.2f} ohm")
        sev = sorted({c.severity for c in o.cautions}, key=["stop", "warn", "note"].index)
        extra = ", ".join(sev) + ("" if o.feasible else "; breaks " + ", ".join(o.failed))
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
