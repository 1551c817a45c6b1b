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
from .readings import diverter_rating, exciter_supply, field_windows
from .machine import load_machine
from .powerflow import idle_figures, no_load_speeds
from .profile import load_profile
from .text import visible
from .wording import source_text

__all__ = ["Option", "RANKING_RULE", "SearchResult", "candidate_bases", "rank_options", "ranking_rule", "search",
           "search_machine_profile", "search_text"]

#: Objectives closer than this share of the larger tie (issue rule).
OBJECTIVE_TIE_FRACTION = 0.02
#: Least margins are compared in steps of this share of their limit: closer ones are alike, and the
#: better objective decides (a margin held by construction at 3 % is not beaten by 3.0001 %).
MARGIN_STEP_FRACTION = 1e-3


def margin_steps(smallest_margin):
    """The least margin in whole steps of :data:`MARGIN_STEP_FRACTION` (the ranking compares these)."""
    return round(smallest_margin / MARGIN_STEP_FRACTION) if math.isfinite(smallest_margin) else -math.inf

#: Narrowest field-current band, as a share of the reading, a person can set a machine in by its field
#: ammeter: a class-1.5 panel meter reads within 1.5 % of its full scale (IEC 60051-2 classes, recalled, not
#: checked against the text), about 2 % of a reading in the upper part of the scale, so a band of under 3 % of
#: the reading is hit by luck, not by reading the meter (a reviewer's 88.2-88.3 ohm window, 1.03 to 1.03 A).
KNIFE_EDGE_BAND_FRACTION = 0.03
#: Narrowest rheostat window, as a share of the rheostat's travel, a person can set: a stud rheostat has some
#: 50 to 100 steps, and a slide wire is set by hand to about as fine (common practice).
KNIFE_EDGE_RHEOSTAT_SHARE = 0.01

def setting_is_knife_edge(control, readings, band, field_current_a=None):
    """Whether one field setting (its ``readings`` and ``band``, as :func:`supplycfg.readings.readings_and_band`
    gives them) lies in a window a person cannot set by the meters: narrower than its reading is written,
    a rheostat window under :data:`KNIFE_EDGE_RHEOSTAT_SHARE` of the travel, or a field-current window
    under :data:`KNIFE_EDGE_BAND_FRACTION` of the current [A] (``field_current_a``, for that control)."""
    if not readings:
        return False
    if readings.get("settable") is False:
        return True
    exact = (band or {}).get("control_exact")
    if not exact or not all(math.isfinite(x) for x in exact):
        return False
    width = abs(exact[1] - exact[0])
    if control == "rheostat":
        ohm, travel = readings.get("rheostat_ohm"), readings.get("rheostat_travel_percent")
        return bool(ohm and travel) and width < KNIFE_EDGE_RHEOSTAT_SHARE * ohm * 100.0 / travel
    u = field_current_a
    return control == "field-current" and u is not None and u > 0 and width < KNIFE_EDGE_BAND_FRACTION * u


#: Limits that bound one quantity, by the requirement they make up (each job's ``LIMIT_GROUPS``).
LIMIT_REQUIREMENTS = {k: v for job in JOBS.values() for k, v in getattr(job, "LIMIT_GROUPS", {}).items()}

#: The words of the ranking rule; ``{objective}`` is the job's objective label.
RANKING_RULE = (
    "Ranking: options that meet every limit first, by {objective} (one whose band is narrower than the meters "
    "can set it is marked knife-edge where it stands); objectives within 2 % of each other "
    "tie, and a tie goes to the simpler rig (no diverter, fewer series turns in circuit, no exciter needed), "
    "then to the larger least margin (counted in steps of 0.1 % of its limit), then to the better objective. "
    "Then the options without a stop caution, by the number of requirements "
    "broken (the two ends of one band, or two limits on one voltage, count once) and then by the worst breach "
    "as a share of its limit; among them those whose figures the engine could not find (no operating point, "
    "or a solve that did not converge) after those it could, and those that need an exciter the "
    "machine lacks (a change to the plant, not a setting) after all others. Options with a stop caution come "
    "last, marked not usable. Options with the same figures are listed once.")
#: What "least margin" means wherever it is printed.
LEAST_MARGIN_MEANING = ("least margin: the smallest margin over every limit of the job, as a share of that "
                        "limit (negative where a limit is broken)")


def ranking_rule(kind):
    """The ranking rule in words for a job ``kind``, with its objective and what "least margin" means."""
    meaning = LEAST_MARGIN_MEANING[0].upper() + LEAST_MARGIN_MEANING[1:]
    return RANKING_RULE.format(objective=JOBS[kind].OBJECTIVE_LABEL) + f" {meaning}."


@dataclass
class Option:
    """One candidate setting with its figures, margins, cautions and what a person sets and reads.

    ``setting`` keeps the exact control (what a re-solve uses); ``readings``
    and ``band`` give it rounded to what can be set. ``extras`` holds the
    job's own keys (the welding ``dial``, ``diverters``, ``exciter``) for the
    JSON.
    """

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
    readings: dict | None = None
    band: dict | None = None
    extras: dict = field(default_factory=dict)
    objective: float | None = None
    same_as: list = field(default_factory=list)

    @property
    def usable(self):
        """False when a ``stop`` caution rules the setting out, its own or the job's (a hot bank)."""
        return "stop_caution" not in self.failed and not any(c.severity == "stop" for c in self.cautions)

    @property
    def needs_missing_exciter(self):
        """The option needs an exciter the machine file does not have: a change to the plant, not a setting."""
        ex = (self.extras or {}).get("exciter") or {}
        return "exciter_supply" in self.failed and ex.get("available_voltage_v") is None

    @property
    def undetermined(self):
        """Some limit of the option could not be evaluated: the engine found no operating point for it, or a
        solve did not converge. Such a near miss is not known to come close, so it ranks after those that are."""
        return ("solve_not_converged" in self.failed
                or any(m.get("fraction") is None for m in self.margins.values()))

    @property
    def limits_broken(self):
        """Names of the job's limits this option breaks (the stop caution not counted)."""
        return [n for n in self.failed if n != "stop_caution"]

    @property
    def knife_edge(self):
        """The option meets every limit only in a band a person cannot set it in by the meters: narrower
        than its reading can be written, or its field-current band narrower than
        :data:`KNIFE_EDGE_BAND_FRACTION` of the reading. At the machine it is likely to miss."""
        if not self.feasible:
            return False
        if self.readings:
            return setting_is_knife_edge(self.control, self.readings, self.band, self.setting.field_current_a)
        # a welding dial: knife-edge where any row is (each row is set by the meters on its own)
        rows = (self.extras or {}).get("dial") or []
        return any(setting_is_knife_edge(self.control, r.get("readings"), r.get("band"), r.get("field_current_a"))
                   for r in rows)

    @property
    def requirements_broken(self):
        """What the job asks that this option does not give: its broken limits, with the limits that
        bound one quantity (:data:`LIMIT_REQUIREMENTS`: the two ends of a voltage band) counted once."""
        return sorted({LIMIT_REQUIREMENTS.get(n, n) for n in self.limits_broken})

    @property
    def worst_breach(self):
        """The most negative margin fraction among the broken limits (-inf where one is unknown)."""
        fr = [m["fraction"] for n, m in self.margins.items() if n in self.failed]
        fr = [-math.inf if f is None else f for f in fr]
        if "solve_not_converged" in self.failed:
            fr.append(-math.inf)
        return min(fr) if fr else 0.0

    @property
    def rig(self):
        """Sort key of the rig's simplicity: diverter, series turns in circuit, exciter needed."""
        divs = self.extras.get("diverters")
        has_div = bool(divs) if divs is not None else self.setting.diverter_ohm is not None
        dial = self.extras.get("dial") or []
        turns = max([r.get("series_turns") or 0.0 for r in dial] + [self.setting.series_turns or 0.0])
        return (has_div, turns, self.setting.connection.startswith("separate"))
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

    def as_dict(self, objective_label=None):
        d = {"rank": self.rank, "feasible": self.feasible, "usable": self.usable, "setting": self.setting_dict(),
             "figures": self.figures, "margins": self.margins, "failed": list(self.failed),
             "smallest_margin": self.smallest_margin if math.isfinite(self.smallest_margin) else None,
             "extrapolated": self.extrapolated, "readings": self.readings, "band": self.band,
             "objective": {"value": self.objective, "label": objective_label},
             "same_as": list(self.same_as), "cautions": [c.as_dict() for c in self.cautions]}
        for k, v in self.extras.items():
            d.setdefault(k, v)
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
    #: Where nothing is feasible and the drive is the reason: the least highest shaft power [kW] of a
    #: setting that meets the job with a far larger drive of the same kind (what the drive must give).
    drive_needed_kw: float | None = None

    @property
    def feasible(self):
        return [o for o in self.options if o.feasible]

    @property
    def ranking_rule(self):
        """The rule the options are ranked by, in words."""
        return ranking_rule(self.profile.kind)

    def as_dict(self):
        label = JOBS[self.profile.kind].OBJECTIVE_LABEL
        return {"tool": f"supplycfg {__version__}", "machine": self.machine.label,
                "profile": self.profile.label, "kind": self.profile.kind,
                "ranking_rule": self.ranking_rule, "least_margin": LEAST_MARGIN_MEANING,
                "options": [o.as_dict(label) for o in self.options],
                "cautions": [c.as_dict() for c in self.cautions],
                "candidates_evaluated": self.candidates_evaluated,
                "search_seconds": self.search_seconds, "notes": list(self.notes),
                "drive_needed_kw": self.drive_needed_kw, "notice": STANDING_NOTICE}


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


#: What a limit whose figure the engine could not determine says (it counts as broken).
UNDETERMINED = ("undetermined: the engine found no operating point for this figure within its span (the voltage "
                "runs away past the measured curve, or the current would pass 10 x the rated armature current)")


def _margin_entry(v, limit, kind, unit):
    if not math.isfinite(v):
        return {"value": None, "limit": limit, "kind": kind, "unit": unit, "margin": None, "fraction": None,
                "why": UNDETERMINED}
    mv, fr = margin(v, limit, kind, unit)
    return {"value": v, "limit": limit, "kind": kind, "unit": unit, "margin": mv, "fraction": fr}


def exciter_margin(supply):
    """Margin entry of the exciter supply: the voltage needed at the hot field against the exciter's.

    Without an exciter the whole supply is missing: fraction -1.
    """
    need, have = supply["voltage_v"], supply["available_voltage_v"]
    if have is None:
        return {"value": need, "limit": 0.0, "kind": "max", "unit": "V", "margin": -need, "fraction": -1.0}
    return _margin_entry(need, have, "max", "V")


def _sig(v):
    if v is None:
        return None
    x = float(v)
    return float(f"{x:.6g}") if math.isfinite(x) else None


def _signature(o):
    """What must agree for two options to be the same: connection, control, fitness, cautions, figures."""
    s = o.setting
    u = s.field_current_a if o.control == "field-current" else s.rheostat_ohm
    return (s.connection, o.control, _sig(u if o.control != "none" else None), o.feasible,
            tuple(sorted((c.rule, c.severity) for c in o.cautions)),
            tuple((k, _sig(v)) for k, v in sorted(o.figures.items())))


def merge_identical(options):
    """One option per set of identical settings and figures: the simplest rig, the others in ``same_as``."""
    groups = {}
    for o in options:
        groups.setdefault(_signature(o), []).append(o)
    out = []
    for grp in groups.values():
        grp.sort(key=lambda o: (o.rig, o.setting.series_turns or 0.0, o.setting.diverter_ohm or 0.0))
        keep = grp[0]
        keep.same_as = [o.setting_dict() for o in grp[1:]]
        out.append(keep)
    return out


def _ties(a, b, tie=OBJECTIVE_TIE_FRACTION):
    if a is None and b is None:
        return True
    if a is None or b is None:
        return False
    return abs(a - b) <= tie * max(abs(a), abs(b))


def tie_break(first, second, tie=OBJECTIVE_TIE_FRACTION):
    """What puts feasible ``first`` above feasible ``second`` under the stated rule.

    Returns
    -------
    str
        ``objective`` (their objectives do not tie), ``diverter``, ``series
        turns`` or ``exciter`` (a tie that goes to the simpler rig, by its
        first difference), ``margin`` (the larger least margin),
        ``objective-in-tie`` (alike margins: the better objective) or
        ``order`` (nothing tells them apart; a fixed order of settings).
    """
    if not _ties(first.objective, second.objective, tie):
        return "objective"
    for name, a, b in zip(("diverter", "series turns", "exciter"), first.rig, second.rig):
        if a != b:
            return name
    if margin_steps(first.smallest_margin) != margin_steps(second.smallest_margin):
        return "margin"
    return "objective-in-tie" if first.objective != second.objective else "order"


def rank_options(options, tie=OBJECTIVE_TIE_FRACTION):
    """Options in the stated order (:data:`RANKING_RULE`), ranks set from 1.

    Feasible options by the job's objective (None last), ties within
    ``tie`` of the first of each group broken by the simpler rig and then by
    the larger least margin; then the options without a stop caution by the
    number of requirements broken and the worst breach (those whose figures could not
    be found after those that could, those needing an exciter the machine lacks after
    all others); then those with one.
    """
    def stable(o):
        s = o.setting
        return (s.connection, s.series_turns or 0.0, s.diverter_ohm or 0.0)

    feas = sorted((o for o in options if o.feasible),
                  key=lambda o: (o.objective is None, o.objective if o.objective is not None else 0.0,
                                 o.rig, -o.smallest_margin, stable(o)))
    groups = []
    for o in feas:
        if groups and _ties(groups[-1][0].objective, o.objective, tie):
            groups[-1].append(o)
        else:
            groups.append([o])
    ordered = []
    for g in groups:
        ordered += sorted(g, key=lambda o: (o.rig, -margin_steps(o.smallest_margin),
                                            o.objective if o.objective is not None else 0.0, stable(o)))

    def miss_key(o):
        return (o.needs_missing_exciter, o.undetermined, len(o.requirements_broken), -o.worst_breach, stable(o))

    ordered += sorted((o for o in options if not o.feasible and o.usable), key=miss_key)
    ordered += sorted((o for o in options if not o.feasible and not o.usable), key=miss_key)
    for k, o in enumerate(ordered, 1):
        o.rank = k
    return ordered


#: The note of a search in which nothing meets the job (a near miss's card says as much in its own words).
NO_FIT_NOTE = "no setting meets every limit; the nearest misses are listed with the limit each breaks"

#: How far below its hot figure a set run up to temperature before the job is taken to start [K]: an hour
#: on load brings the windings close to their working temperature (common practice; the demo battery job
#: states 65 to 75 degC for that).
WARM_START_SPAN_K = 10.0


def warm_start_note(machine, profile):
    """Where nothing meets the job over the profile's whole cold-to-hot winding range, whether a setting
    does once the set is warm (``WARM_START_SPAN_K`` below the hot figure): a note saying so and what
    to do, or None.

    With the rheostat left as set, a cold winding's lower resistance moves every figure; a set run up to
    temperature before the job, its field set by the field ammeter once warm, does not see the cold end.
    """
    t = profile.temperatures_c
    if not t or t[1] - t[0] <= WARM_START_SPAN_K:
        return None
    warm = (t[1] - WARM_START_SPAN_K, t[1])
    res = search(machine, replace(profile, temperatures_c=warm), with_drive_check=False, advice=False)
    if not res.feasible:
        return None
    from .wording import connection_words
    best = res.feasible[0].setting
    return (f"once warm it can: at {warm[0]:g} to {warm[1]:g} °C {len(res.feasible)} "
            f"setting{'s' if len(res.feasible) != 1 else ''} meet the job (best: {connection_words(best.connection)}"
            f"{f', {best.series_turns:g} series turns' if best.series_turns else ''}); the cold end ({t[0]:g} °C, "
            "the rheostat left as set) stops it. Run the set up to temperature and set the field by the ammeter "
            f"once warm; give winding_temperature_range_c = [{warm[0]:g}, {warm[1]:g}] (common practice)")


def exciter_wanted_notes(options):
    """Where options break nothing but the exciter the machine lacks: a note of what supply would make them
    meet the job (the highest voltage and power any of them needs), or none."""
    only = [o for o in options if o.needs_missing_exciter and o.failed == ["exciter_supply"]]
    if not only:
        return []
    need = sorted(((n.get("voltage_v") or 0.0, n.get("power_w") or 0.0)
                   for n in (o.extras.get("exciter") or {} for o in only)))
    (v_lo, w_lo), v_hi = need[0], need[-1][0]
    more = (f"; {v_hi:.3g} V and {max(w for _, w in need):.3g} W serve all {len(only)}" if len(only) > 1 else "")
    return [f"the machine file gives no exciter (excitation_voltage_v): with a separate field supply of "
            f"{v_lo:.3g} V and {w_lo:.3g} W (an exciter, or a battery of that voltage) a setting meets the job"
            f"{more} (see the options that break only 'field current within the exciter's reach')"]


def search(machine, profile, with_drive_check=True, advice=True, warm_check=True):
    """Every setting that meets the job, ranked by the stated rule, with the nearest misses.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
    with_drive_check : bool, optional
        When nothing is feasible with an engine or a motor, search again with
        a far larger drive of the same kind to say whether the drive limits the job.
    advice : bool, optional
        Search each option's meter readings and band (what a person sets at
        the machine). False leaves the bands out (and, for a battery, the
        readings; for a welding dial, each row's no-load voltage at the
        nominal speed): the ranking does not use them, so a fleet row or a trial
        rating of ``size``, which show only the setting or ask only whether
        any setting is feasible, need not pay for them.
    warm_check : bool, optional
        When nothing is feasible over a cold-to-hot winding range, search
        again warm (:func:`warm_start_note`) and say whether that fits; a
        fleet row, which shows no notes, leaves it out.

    Returns
    -------
    SearchResult
        Ordered as :data:`RANKING_RULE` says. A setting with a ``stop``
        caution is never feasible; a separately excited option is feasible
        only if the machine's exciter drives its field current at the
        hottest winding of the envelope.
    """
    t0 = time.perf_counter()
    space = build_space(machine, profile)
    notes = []
    if space.circ is None:
        res = SearchResult(machine, profile, [], profile_cautions(machine, profile), 0,
                           time.perf_counter() - t0, ["this machine has no connection for this job (a booster needs a series winding)"])
        return res
    nb = len(space.bases)
    job = JOBS[profile.kind]
    u_best, lim, figs, extras, evaluated = job.solve(space, advice=advice)
    objective = np.asarray(job.objective(figs), float)
    top_speed = max(c[0] for c in space.corners)
    hot_t = max(c[1] for c in space.corners)
    figs = dict(figs)
    figs["idle_no_load_voltage_v"], figs["idle_builds_up"] = idle_figures(space, np.arange(nb), u_best)
    figs["no_load_speed_rpm"] = no_load_speeds(space, np.arange(nb), u_best)
    table = figs.get("drive_points")
    if table is not None:
        figs.update({k: v for k, v in table.summary().items() if k not in figs})
    options = []
    job_cautions = profile_cautions(machine, profile)
    job_stop = any(c.severity == "stop" for c in job_cautions)
    candidate_of = {}  # id of each option -> its candidate row (for its drive points once merged)
    for i in range(nb):
        margins, failed = {}, []
        for name, (val, limit, kind, unit) in lim.items():
            margins[name] = _margin_entry(float(np.asarray(val)[i]), limit, kind, unit)
            fr = margins[name]["fraction"]
            if fr is None or fr < 0:
                failed.append(name)
        ex = dict(extras[i] or {})
        control = space.bases[i][3]
        supply = ex.get("exciter")
        if supply is None and control in ("exciter", "field-current"):
            supply = exciter_supply(machine, control, u_best[i], hot_t)
        ex["exciter"] = supply
        if supply is not None and not supply["reaches"]:
            margins["exciter_supply"] = exciter_margin(supply)
            failed.append("exciter_supply")
        f = _fig_dict(figs, i)
        f["top_speed_rpm"] = top_speed
        st = _setting_for(space, i, u_best[i])
        if "diverters" not in ex:
            rating = diverter_rating(machine, st.series_turns, st.diverter_ohm, f.get("max_armature_current_a"), hot_t)
            ex["diverters"] = [] if rating is None else [dict(rating, series_turns=st.series_turns)]
        cautions = option_cautions(machine, profile, st, f)
        conv = bool(np.asarray(figs["converged"])[i] >= 1)
        if not conv:
            failed.append("solve_not_converged")
        if job_stop or any(c.severity == "stop" for c in cautions):
            # a stop of the job as a whole (a hot bank) holds whatever the setting: no option is usable
            failed.append("stop_caution")
        fracs = [-math.inf if m["fraction"] is None else m["fraction"] for m in margins.values()]
        xmax = f.get("max_net_mmf_a")
        extrap = xmax is not None and xmax > machine.occ_field_current_a[-1] * (1 + 1e-9)
        obj = float(objective[i])
        readings, band = ex.pop("readings", None), ex.pop("band", None)
        cs = ex.pop("current_settings", None)
        options.append(Option(0, not failed, st, f, margins, failed, cautions, float(min(fracs)) if fracs else 0.0,
                              cs, {"field-current": "field-current", "none": "none"}.get(control, "rheostat"),
                              extrap, readings, band, ex, obj if math.isfinite(obj) else None))
        candidate_of[id(options[-1])] = i
    options = rank_options(merge_identical(options))
    if table is not None:
        # the drive's points of the options kept (merging drops about two in three of a welding search's)
        for o in options:
            o.drive_points = table.rows(candidate_of[id(o)])
    need = None
    if not any(o.feasible for o in options):
        notes.append(NO_FIT_NOTE)
        fast = drive_overspeed_note(machine, profile)
        notes += [fast] if fast else []
        if profile.drive.coupled and with_drive_check:
            need, more = drive_limit_check(machine, profile, options)
            notes += more
        if with_drive_check and warm_check:
            warm = warm_start_note(machine, profile)
            notes += [warm] if warm else []
        notes += exciter_wanted_notes(options)
    return SearchResult(machine, profile, options, job_cautions, int(evaluated),
                        time.perf_counter() - t0, notes, need)


def drive_overspeed(machine, profile):
    """``(top generator speed [rpm], largest ratio that keeps it to the rated speed)`` where the drive
    itself turns the generator past the overspeed stop at no load; None otherwise."""
    from .cautions import OVERSPEED_STOP_FACTOR
    drive, rated = profile.drive, machine.rated_speed_rpm
    top = max(drive.generator_speeds_rpm())
    if not top > OVERSPEED_STOP_FACTOR * rated:
        return None
    return top, rated / drive.top_speed_rpm


def drive_overspeed_note(machine, profile):
    """A note where the drive itself turns the generator past the overspeed stop at no load (every
    setting then carries it, whatever the setting or the drive's rating), with the ratio or drive
    speed that would bring the top speed to the machine's rated speed; None otherwise."""
    from .cautions import OVERSPEED_STOP_FACTOR
    fast = drive_overspeed(machine, profile)
    if fast is None:
        return None
    top, ratio = fast
    drive, rated = profile.drive, machine.rated_speed_rpm
    what = {"engine": "engine's governed no-load speed", "motor": "motor's synchronous speed"}.get(
        drive.kind, "drive's speed")
    return (f"the drive turns the generator at up to {top:.0f} rpm ({drive.top_speed_rpm:g} rpm x {drive.ratio:g}), "
            f"more than {100 * (OVERSPEED_STOP_FACTOR - 1):.0f} % above its rated {rated:g} rpm: every setting "
            "carries the overspeed stop, whatever the setting or the drive's rating; the cure is the drive's "
            f"speed: a belt or gearing ratio of at most {ratio:.3g} (generator per drive speed), or the {what} "
            f"at most {rated / drive.ratio:.0f} rpm, brings it to the rated speed")


#: Stop cautions a larger drive of the same speeds keeps: the overspeed stop is the drive's top
#: speed against the machine's rating, whatever the drive's power (see drive_limit_check).
RATING_FREE_STOPS = ("overspeed",)
#: Rating multiple of the "far larger drive" that tells whether the drive limits a job.
STIFF_DRIVE_FACTOR = 100.0


def drive_limit_check(machine, profile, options):
    """Whether the drive is why nothing is feasible: ``(need_kw, notes)`` of an infeasible search.

    The job is searched again with a drive of :data:`STIFF_DRIVE_FACTOR` times
    the rating (same kind and figures). ``need_kw`` is the least highest
    shaft power of a setting that meets it then [kW], None where none does
    (the drive is not the reason). Where every option breaks one of the job's
    ``DRIVE_FREE_LIMITS`` (limits no drive changes) or has a stop of
    :data:`RATING_FREE_STOPS` the answer is known without that search: None.
    """
    drive = profile.drive
    free = set(getattr(JOBS[profile.kind], "DRIVE_FREE_LIMITS", ()))

    def kept_by_larger_drive(o):
        """The option breaks what a larger drive of the same speeds would keep broken."""
        return bool(set(o.failed) & free) or any(c.severity == "stop" and c.rule in RATING_FREE_STOPS
                                                 for c in o.cautions)

    if options and all(kept_by_larger_drive(o) for o in options):
        return None, []  # a larger drive meets nothing either
    over = [o for o in options if "drive_power" in o.failed]
    stiff = replace(profile, drive=drive.with_rating(STIFF_DRIVE_FACTOR * drive.rated_power_kw))
    big = search(machine, stiff, with_drive_check=False, advice=False)
    if not big.feasible:
        return None, []
    need = min(o.figures.get("max_shaft_power_kw") or math.inf for o in big.feasible)
    if need <= drive.rated_power_kw:
        # the rating would carry the load: what the larger drive changes is how far the speed falls
        fall, cure = drive.speed_fall_words()
        text = (f"the {drive.kind}'s {fall} limits this job, not its rating: with a larger {drive.kind} of the same "
                f"figures {len(big.feasible)} setting(s) meet it, the least of them drawing {need:.3g} kW at the "
                f"shaft, within the {drive.rated_power_kw:g} kW this one has, because the larger one slows less at "
                f"that load; {cure} may do the same")
        return None, [text]  # no larger rating is needed
    text = (f"the drive limits this job: with a larger {drive.kind} of the same figures "
            f"{len(big.feasible)} setting(s) meet it, the least of them drawing {need:.3g} kW at the shaft against "
            f"the {drive.rated_power_kw:g} kW rating")
    if over:
        text += f"; {len(over)} setting(s) here break the drive_power limit"
    return (need if math.isfinite(need) else None), [text + "; `supplycfg size` finds the smallest rating that works"]


def search_machine_profile(machine_path, profile_path):
    """Read both files and search."""
    m = load_machine(machine_path)
    p = load_profile(profile_path)
    return search(m, p)


def _num(v, f=".3g"):
    # no e-notation for a reader: a figure of 1000 or more is written whole (10740, not 1.074e+04)
    if v is not None and f.endswith("g") and isinstance(v, (int, float)) and math.isfinite(v) and abs(v) >= 1000:
        return f"{v:.0f}"
    return "-" if v is None else format(v, f)


def _dedupe_order(items):
    """The items once each, in the order first met."""
    return list(dict.fromkeys(items))


def _runs_alike(pairs):
    """``[(rank, text), ...]`` grouped into runs of consecutive ranks with the same text: ``[(ranks, text)]``."""
    runs = []
    for rank, text in pairs:
        if runs and runs[-1][1] == text and runs[-1][0][-1] == rank - 1:
            runs[-1][0].append(rank)
        else:
            runs.append(([rank], text))
    return runs


def _ranks_text(ranks):
    """'option 3', 'options 3 and 4' or 'options 3 to 10' (``ranks`` consecutive)."""
    if len(ranks) == 1:
        return f"option {ranks[0]}"
    return f"options {ranks[0]} {'and' if len(ranks) == 2 else 'to'} {ranks[-1]}"


def _table(headers, rows):
    """Fixed-width table: right-aligned columns, one header line, one rule."""
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(headers)]
    out = ["  ".join(h.rjust(w) for h, w in zip(headers, widths)), "  ".join("-" * w for w in widths)]
    out += ["  ".join(c.rjust(w) for c, w in zip(r, widths)) for r in rows]
    return out


def _field_cells(o):
    """(rheostat [ohm], field current hot [A]) as read at the machine (a welding dial's low end)."""
    from .report import low_end_readings
    r = low_end_readings(o)[0] or None
    if o.control == "none":
        return "none", "-"
    if r is None:
        s = o.setting
        if o.control == "field-current":
            return "-", _num(s.field_current_a)
        return _num(s.rheostat_ohm), "-"
    return _num(r["rheostat_ohm"], "g"), _num(r["field_current_a"]["hot"], "g")


def _dial_lines(o, cable_ohm, profile=None):
    hdr = ("current [A]", "series turns", "diverter [ohm]", "rheostat [ohm]", "travel [%]", "field hot [A]",
           "no-load [V]", "no-load low [V]", "no-load high [V]", "stuck electrode cold [A]", "slope [V/A]",
           "per arc volt [A/V]", "terminal [V]", "arc [V]", "tap change")
    rows = []
    for r in o.extras.get("dial") or []:
        rd = r.get("readings") or {}
        rows.append((_num(r["current_a"], "g"), _num(r["series_turns"], "g"), _num(r["diverter_ohm"], "g"),
                     _num(rd.get("rheostat_ohm"), "g"), _num(rd.get("rheostat_travel_percent"), "g"),
                     _num((rd.get("field_current_a") or {}).get("hot"), "g"),
                     _num(r["no_load_voltage_v"], ".1f"), _num(r["no_load_voltage_min_v"], ".1f"),
                     _num(r["no_load_voltage_max_v"], ".1f"), _num(r["short_circuit_current_a"], ".0f"),
                     _num(r["slope_v_per_a"], ".3f"), _num(r["current_change_per_arc_volt_a_per_v"], ".2f"),
                     _num(r["terminal_voltage_v"], ".1f"), _num(r["arc_voltage_v"], ".1f"),
                     "yes" if r.get("tap_change") else ""))
    from .report import dial_setting_words
    words = dial_setting_words(profile)
    lines = ["Welding dial: " + words[0].lower() + words[1:]]
    lines += ["  " + ln for ln in _table(hdr, rows)]
    lines.append("  no-load low / high: the lowest and highest no-load voltage over the speed and temperature range; "
                 "per arc volt: change of current for 1 V more arc voltage (a longer arc); "
                 f"terminal: at the machine; arc: on the conventional load line, after the {cable_ohm:g} ohm leads.")
    return lines


#: Where the technician sets the field and reads the ammeter, per job.
READING_POINT = {"lighting": "at no load", "booster": "at no load", "battery": "at the start of charge",
                 "welding": "at no load"}


def _reading_lines(o, kind=""):
    lines = []
    if o.control == "none":
        lines.append("  series winding only, no field control: the series tap and the diverter set it")
    stages = o.extras.get("plan") or []
    if len(stages) == 2:
        # a two-stage charge: the attendant sets the field twice, each stage where it starts
        for st in stages:
            lines.append(f"  stage {st['stage']}, {st['name']}: {_num(st['from_h'], '.4g')} to {_num(st['to_h'], '.4g')} h, "
                         f"{_num(st['start_current_a'], '.3g')} to {_num(st['end_current_a'], '.3g')} A; "
                         f"{st['ends_reason']}")
            where = "at the start of charge" if st["stage"] == 1 else "at the hand-over"
            lines += ["  " + x for x in field_reading_lines(st.get("readings"), st.get("band"), where)]
            lines += ["    " + x for x in _stage_meter_lines(st)]
    else:
        for st in stages:
            # a one-stage charge: its span and why it ends, then the one field setting
            lines.append(f"  {st['name']}: {_num(st['from_h'], '.4g')} to {_num(st['to_h'], '.4g')} h, "
                         f"{_num(st['start_current_a'], '.3g')} to {_num(st['end_current_a'], '.3g')} A; "
                         f"{st['ends_reason']}")
        lines += field_reading_lines(o.readings, o.band, READING_POINT.get(kind, ""), o.knife_edge)
        for st in stages:
            lines += ["  " + x for x in _stage_meter_lines(st)]
    return lines + _rig_lines(o)


def _stage_meter_lines(st):
    """What the meters do along a charge stage: the field ammeter following the bank, and the
    voltmeter reading that calls the hand-over."""
    from .report import stage_current_rise_text, stage_field_rise_text
    out = [x for x in (stage_field_rise_text(st), stage_current_rise_text(st)) if x]
    v = st.get("end_terminal_voltage_v")
    if st.get("ends_because") == "handover-voltage" and v is not None:
        out.append(f"hand over when the voltmeter at the machine reads about {v:.4g} V")
    return out


def field_reading_lines(r, b, where="", knife_edge=None):
    """Text lines of one field setting: the meter readings and the band over which every limit holds
    (``knife_edge``: the option's own verdict; by default, a band narrower than its reading is written)."""
    if knife_edge is None:
        knife_edge = r is not None and r.get("settable") is False
    lines = []
    if r is not None:
        fc = r["field_current_a"]
        parts = [f"field current {_num(fc['cold'], 'g')} A with cold windings, {_num(fc['hot'], 'g')} A hot"]
        if r["rheostat_ohm"] is not None:
            parts.append(f"rheostat {_num(r['rheostat_ohm'], 'g')} ohm"
                         + (f" ({_num(r['rheostat_travel_percent'], 'g')} % of its travel)"
                            if r["rheostat_travel_percent"] is not None else ""))
        lines.append(f"  set {where}: ".replace("  set : ", "  set: ") + "; ".join(parts))
    if b is not None:
        parts = []
        if b.get("rheostat_ohm"):
            parts.append(f"rheostat {_num(b['rheostat_ohm'][0], 'g')} to {_num(b['rheostat_ohm'][1], 'g')} ohm")
        windows = [f"{_num(w[0], 'g')} to {_num(w[1], 'g')} A {k}".rstrip() for k, w in field_windows(b)]
        if windows:
            parts.append("field current " + ", ".join(windows))
        lines.append("  every limit holds for " + " and ".join(parts))
    if knife_edge:
        lines.append("  knife-edge: the band is narrower than the meters can set it, so at the machine it is likely "
                     "to miss; set it with a finer instrument, or take a setting with a wider band")
    return lines


def _rig_lines(o):
    lines = []
    for d in o.extras.get("diverters") or []:
        lines.append(f"  diverter {d['resistance_ohm']:g} ohm across {d['series_turns']:g} series turns: carries up to "
                     f"{_num(d['current_a'], 'g')} A ({_num(d['share_percent'], 'g')} % of the branch), "
                     f"dissipates up to {_num(d['power_w'], 'g')} W: use a resistor rated {_num(d['rating_w'], 'g')} W or more")
    ex = o.extras.get("exciter")
    if ex is not None:
        have = ex["available_voltage_v"]
        lines.append(f"  exciter supply needed with hot windings: {_num(ex['voltage_v'], 'g')} V, {_num(ex['power_w'], 'g')} W "
                     f"for {_num(ex['field_current_a'], 'g')} A; "
                     + ("the machine has no exciter" if have is None else
                        f"the machine's exciter gives {have:g} V" + ("" if ex["reaches"] else ", too little")))
    for s in o.same_as:
        lines.append(f"  the same figures with {s['series_turns'] or 0:g} series turns and a "
                     + ("no diverter" if s["diverter_ohm"] is None else f"{s['diverter_ohm']:g} ohm diverter"))
    return lines


def at_machine_lines(option, profile):
    """What to set and read at the machine for one option, as text lines: the welding dial, the field
    readings and bands (per stage of a charge plan), diverters with their ratings, the exciter supply."""
    lines = []
    if profile.kind == "welding":
        lines += _dial_lines(option, profile.welding.cable_resistance_ohm, profile)
    return lines + _reading_lines(option, profile.kind)


def search_text(res, top=10):
    """The ranked table a technician reads, the stated ranking rule and the best option's details."""
    from .report import KIND_WORDS, broken_limits_text, condition_words, figure_label, limit_label, ranking_line
    from .wording import connection_words
    kind = res.profile.kind
    lines = [f"{visible(res.machine.label)} for {visible(res.profile.label)} ({KIND_WORDS.get(kind, kind)})",
             f"drive: {res.profile.drive.describe()}",
             f"{len(res.options)} distinct options; {res.candidates_evaluated} candidate evaluations in "
             f"{res.search_seconds:.2f} s", "", res.ranking_rule, ""]
    for c in res.cautions:
        if c.severity == "stop":
            # the job as given, whatever the setting: said before any option is read
            lines += [f"STOP, whatever the setting: {visible(c.message)}", ""]
    welding = kind == "welding"
    hdr = ["rank", "fit", "connection", "series turns", "diverter [ohm]", "rheostat [ohm]", "field hot [A]",
           "speed [rpm]", "least margin [%]", "cautions"]
    if welding:
        hdr.insert(-2, "tap or diverter changes")
    rows, tails = [], []
    remarks = set()  # what the remarks below the table hold: broken limits, extrapolated curves
    for o in res.options[:top]:
        s = o.setting
        rh, fh = _field_cells(o)
        fit = ("knife-edge" if o.knife_edge else "yes") if o.feasible else ("no" if o.usable else "NOT USABLE")
        row = [str(o.rank), fit, connection_words(s.connection), _num(s.series_turns or 0, "g"),
               "none" if s.diverter_ohm is None else f"{s.diverter_ohm:g}", rh, fh, f"{s.speed_rpm:.0f}",
               "-" if not math.isfinite(o.smallest_margin) else f"{100 * o.smallest_margin:.1f}"]
        sev = sorted({c.severity for c in o.cautions}, key=["stop", "warn", "note"].index)
        row.append(", ".join(sev) or "none")
        if welding:
            row.insert(-2, _num(o.figures.get("tap_changes"), "g"))
        rows.append(row)
        tail = []
        if not o.feasible:
            tail.append("breaks: " + broken_limits_text(o.failed))
            remarks.add("breaks")
        if o.extrapolated:
            tail.append("needs the open-circuit curve beyond its last measured point")
            remarks.add("extrapolated")
        if tail:
            tails.append((o.rank, "; ".join(tail)))
    lines += _table(hdr, rows)
    lines.append("Rheostat and field: meter readings, rounded to what can be set"
                 + ("; for welding, at the low end of the dial." if welding else "."))
    shown = [c for c in _dedupe_order(o.setting.connection for o in res.options[:top]) if connection_words(c) != c]
    if shown:
        lines.append("Connections as the other commands take them (--connection):")
        lines += [f"  {connection_words(c)}: {c}" for c in shown]
    if tails:
        head = {frozenset({"breaks"}): "Limits broken",
                frozenset({"extrapolated"}): "Curves read past their measured points"}.get(
            frozenset(remarks), "Limits broken and curves read past their measured points")
        lines += ["", head + ":"] + [f"  {_ranks_text(ranks)}: {text}" for ranks, text in _runs_alike(tails)]
    if res.options:
        best = res.options[0]
        lines += ["", f"Why option {best.rank}: {ranking_line(res, best)}"]
        lines += ["", f"Option {best.rank} at the machine:"] + at_machine_lines(best, res.profile)
        lines += ["", f"Option {best.rank} in figures:"]
        at = condition_words(best)
        said = set()
        for k, v in best.figures.items():
            if v is None:
                continue
            words, unit = figure_label(k)
            words = words.format(**at) if "{" in words else words
            unit = {"Ω": "ohm", "°C": "degC", "m³/h": "m3/h"}.get(unit, unit)
            line = f"  {words}: {_num(v, '.4g')}" + (f" {unit}" if unit else "")
            # two corners that coincide (hot windings at the nominal speed) read the same: say it once
            if line not in said:
                said.add(line)
                lines.append(line)
        lines += ["", f"Option {best.rank} against its limits (margin as a share of the limit):"]
        for name, m in best.margins.items():
            frac = m["fraction"]
            lines.append(f"  {limit_label(name)}: " + ("unknown" if frac is None else f"{100 * frac:+.1f} %")
                         + ("" if frac is not None and frac >= 0 else "  BROKEN"))
        lines += ["", "Cautions of option %d:" % best.rank]
        if not best.cautions:
            lines.append("  none of its own (the job's cautions below apply)")
        for c in sorted(best.cautions, key=lambda c: ["stop", "warn", "note"].index(c.severity)):
            lines.append(f"  [{c.severity}] {c.message} ({source_text(c.basis)})")
    if res.cautions:
        lines += ["", "Cautions of the job:"]
        for c in res.cautions:
            lines.append(f"  [{c.severity}] {c.message} ({source_text(c.basis)})")
    for n in res.notes:
        lines.append(f"note: {n}")
    return "\n".join(lines)
