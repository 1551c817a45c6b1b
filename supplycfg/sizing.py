"""The drive rating a job needs: the smallest with which some setting meets it.

The profile's drive keeps its kind and every other figure (speeds, droop or
slip, breakdown torque, belt ratio); only its rated power changes. With an
engine or a motor the rating matters twice: the ``drive_power`` limit, and the
speed, which droops further under the same load on a smaller drive. Whether
some setting meets the job is found by the full search at each trial rating;
the ratings are bracketed and then halved geometrically until the feasible
and the infeasible rating lie within 1 % of each other. With a fixed-speed
drive the speed does not depend on the rating, so the answer is the peak
shaft power of the feasible setting that needs the least.
"""

import math
from dataclasses import dataclass, field, replace

from . import STANDING_NOTICE, __version__
from .drive import MAX_RATED_POWER_KW
from .search import drive_overspeed_note, search, warm_start_note

#: The rating is found to this share (issue rule: to 1 %).
RATING_TOLERANCE = 0.01
#: Growth of the trial rating while no setting meets the job, and the most trials that way.
GROW_FACTOR = 4.0
GROW_STEPS = 8
#: Shrink of the trial rating while every trial still meets the job.
SHRINK_FACTOR = 0.7


#: Standard rated outputs of motors [kW] (IEC 60072-1's preferred ratings, recalled, not checked against the
#: text): a motor is bought in one of these, the next one at or above the rating found.
MOTOR_RATINGS_KW = (0.75, 1.1, 1.5, 2.2, 3.0, 4.0, 5.5, 7.5, 11.0, 15.0, 18.5, 22.0, 30.0, 37.0, 45.0, 55.0, 75.0,
                    90.0, 110.0, 132.0, 160.0, 200.0, 250.0, 315.0, 355.0, 400.0, 450.0, 500.0)


def rating_to_choose_kw(required_kw, kind):
    """The rating [kW] to choose for a drive that needs ``required_kw``: a motor's next standard rating
    (:data:`MOTOR_RATINGS_KW`), else the figure rounded up to two significant figures (an engine has no
    standard series; a figure found to 1 % is not worth four). Never below what is needed."""
    if required_kw is None or not required_kw > 0:
        return None
    if kind == "motor":
        for r in MOTOR_RATINGS_KW:
            if r >= required_kw * (1 - 1e-9):
                return r
    step = 10.0 ** (math.floor(math.log10(required_kw)) - 1)
    return math.ceil(required_kw / step - 1e-9) * step


@dataclass
class SizeResult:
    """The smallest drive rating for a job, with the best setting at that rating."""

    machine: object
    profile: object
    required_drive_kw: float | None
    option: object
    drive: object
    infeasible_below_kw: float | None
    searches: int
    notes: list = field(default_factory=list)

    @property
    def rating_to_choose_kw(self):
        """The rating to buy [kW]: see :func:`rating_to_choose_kw`."""
        return rating_to_choose_kw(self.required_drive_kw, self.profile.drive.kind)

    @property
    def rating_to_choose_words(self):
        """How the rating to choose follows from the least that meets the job, in words."""
        return ("the next standard motor rating (IEC 60072-1, recalled)" if self.profile.drive.kind == "motor"
                else "rounded up")

    def as_dict(self):
        return {"tool": f"supplycfg {__version__}", "machine": self.machine.label, "profile": self.profile.label,
                "kind": self.profile.kind, "drive_kind": self.profile.drive.kind,
                "required_drive_kw": self.required_drive_kw,
                "rating_to_choose_kw": self.rating_to_choose_kw,
                "infeasible_below_kw": self.infeasible_below_kw,
                "drive": None if self.drive is None else self.drive.as_table(),
                "option": None if self.option is None else self.option.as_dict(),
                "searches": self.searches, "notes": list(self.notes), "notice": STANDING_NOTICE}


def _peak(option):
    v = option.figures.get("max_shaft_power_kw")
    return math.inf if v is None else v


def required_drive_rating(machine, profile, tolerance=RATING_TOLERANCE):
    """Smallest drive rating [kW] with which some setting meets the job.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
    tolerance : float, optional
        Relative width of the final bracket (0.01: to 1 %).

    Returns
    -------
    SizeResult
        ``required_drive_kw`` is the feasible end of the final bracket
        (None when no rating makes the job feasible: the machine itself
        cannot do it); ``infeasible_below_kw`` the infeasible end, within
        ``tolerance`` below it; ``option`` the best setting at the rating.
    """
    drive = profile.drive
    count = 0
    from .jobs import profile_cautions
    stops = [c for c in profile_cautions(machine, profile) if c.severity == "stop"]
    if stops:
        # a stop of the job as a whole holds whatever the drive: no rating is worth searching for
        return SizeResult(machine, profile, None, None, None, None, 0,
                          ["STOP, whatever the setting and the drive: " + c.message for c in stops])

    fast = drive_overspeed_note(machine, profile)
    if fast:
        # the drive's speed, not its rating: no rating is worth searching for
        return SizeResult(machine, profile, None, None, None, None, 0, [fast])

    def trial(kw):
        nonlocal count
        count += 1
        # a trial asks only whether some setting is feasible: no readings or bands
        return search(machine, replace(profile, drive=drive.with_rating(kw)), with_drive_check=False, advice=False)

    if not drive.coupled:
        count += 1
        res = search(machine, profile, with_drive_check=False)
        if not res.feasible:
            return SizeResult(machine, profile, None, None, None, None, count,
                              ["no setting meets the job at this fixed speed, whatever the drive's rating"])
        best = min(res.feasible, key=_peak)
        need = _peak(best)
        return SizeResult(machine, profile, need, best, drive, None, count,
                          ["a fixed-speed drive: the rating is the peak shaft power of the feasible setting "
                           "that needs the least, anywhere in the envelope"])
    hi = drive.rated_power_kw
    res = trial(hi)
    steps = 0
    while not res.feasible:
        if steps >= GROW_STEPS or hi >= MAX_RATED_POWER_KW:
            # a stiffer drive runs the machine faster: the profile's own rating may be the one that fits warm
            warm = warm_start_note(machine, profile) or warm_start_note(machine, replace(profile, drive=drive.with_rating(hi)))
            return SizeResult(machine, profile, None, None, None, None, count,
                              [f"no rating up to {hi:g} kW makes the job feasible over the whole winding-temperature "
                               "range: the machine itself cannot do it there (see the limits each setting breaks in "
                               "`supplycfg search`)"] + ([warm] if warm else []))
        hi = min(hi * GROW_FACTOR, MAX_RATED_POWER_KW)
        res = trial(hi)
        steps += 1
    best_res = res
    lo = None
    while lo is None:
        est = min(_peak(o) for o in best_res.feasible)
        cand = min(SHRINK_FACTOR * hi, est)
        r = trial(cand)
        if r.feasible:
            hi, best_res = cand, r
        else:
            lo = cand
    while hi / lo > 1.0 + tolerance:
        mid = math.sqrt(hi * lo)
        r = trial(mid)
        if r.feasible:
            hi, best_res = mid, r
        else:
            lo = mid
    # the chosen rating once more, with the readings and bands a person sets the machine by
    final = search(machine, replace(profile, drive=drive.with_rating(hi)), with_drive_check=False)
    count += 1
    best = final.feasible[0] if final.feasible else best_res.feasible[0]
    notes = [f"the {drive.kind}'s other figures are the profile's; only its rating changed",
             f"at {lo:.4g} kW no setting meets the job"]
    if best.knife_edge:
        notes.append("at this rating the best setting meets the job only on a knife-edge (its band is narrower "
                     "than the reading can be set): look for more margin (a larger or stiffer drive, or the job eased) "
                     "before relying on it")
    return SizeResult(machine, profile, hi, best, drive.with_rating(hi), lo, count, notes)


#: Said with every rating found: it is loaded to the full at the job's heaviest point, nothing left for wear
#: or a low supply.
RATING_MARGIN_NOTE = ("at this rating the drive is fully loaded at the job's heaviest point; choose the next "
                      "standard rating above it, with some margin (common practice)")
#: Loading [%] of the found rating below which the rating is not what limits the job: the drive's speed
#: fall is (a larger drive of the same figures falls less in speed at the same load).
DROOP_BOUND_LOADING_PERCENT = 90.0


def rating_margin_note(option, drive):
    """What to make of the rating found: :data:`RATING_MARGIN_NOTE` where the drive is loaded to the full;
    where it is loaded well below its rating, that the speed fall (engine droop, motor slip) limits the job,
    not the rating."""
    load = (option.figures or {}).get("max_drive_loading_percent") if option is not None else None
    if load is None or load >= DROOP_BOUND_LOADING_PERCENT or not drive.coupled:
        return RATING_MARGIN_NOTE
    fall, cure = drive.speed_fall_words()
    cure += ", or a higher speed setting" if drive.kind == "engine" else ", or a faster pulley ratio"
    return (f"at this rating the {drive.kind} is loaded to only {load:.0f} % at the job's heaviest point: its "
            f"rating is not what limits the job but its {fall} (a larger {drive.kind} of the same figures slows "
            f"less at the same load). {cure[0].upper() + cure[1:]} may meet the job with the "
            f"{drive.rated_power_kw:g} kW {drive.kind} as it is")


def size_text(res):
    """What the ``size`` command prints."""
    p = res.profile
    from .text import visible
    lines = [f"{visible(res.machine.label)} for {visible(p.label)} ({p.kind}), drive: {p.drive.describe()}"]
    if res.required_drive_kw is None:
        lines.append("No drive rating makes this job feasible.")
    elif p.drive.coupled:
        lines.append(f"{p.drive.kind.capitalize()} rating to choose: {res.rating_to_choose_kw:g} kW, "
                     f"{res.rating_to_choose_words}; the least that meets the "
                     f"job is {res.required_drive_kw:.3g} kW (found to {100 * RATING_TOLERANCE:g} %; the profile "
                     f"gives {p.drive.rated_power_kw:g} kW)")
    else:
        lines.append(f"Drive rating the job needs: {res.required_drive_kw:.4g} kW at the shaft")
    o = res.option
    if o is not None:
        f = o.figures
        from .search import at_machine_lines
        from .wording import connection_words
        st = o.setting
        lines.append(f"Best setting at that rating: {connection_words(st.connection)}"
                     + (f", {st.series_turns:g} series turns" if st.series_turns else ""))
        lines += at_machine_lines(o, p)
        lines.append("The drive with that setting:")
        from .report import figure_label
        for k in ("max_shaft_power_kw", "max_drive_loading_percent", "min_speed_rpm", "max_speed_rpm",
                  "heaviest_point_efficiency_percent", "min_efficiency_percent"):
            v = f.get(k)
            if v is not None:
                words, unit = figure_label(k)
                lines.append(f"  {words}: {v:.4g} {unit}".rstrip())
    for n in res.notes:
        lines.append(f"note: {n}")
    if res.required_drive_kw is not None:
        lines.append(f"note: {rating_margin_note(res.option, p.drive)}")
    if o is not None:
        # the setting printed above is one to make: its cautions and the job's go with it, as in `search`
        from .wording import caution_lines
        lines += caution_lines(list(o.cautions) + list(job_cautions(res)))
    lines.append(f"{res.searches} searches")
    return "\n".join(lines)


def job_cautions(res):
    """The job's own cautions (whatever the setting) for a size result."""
    from .jobs import profile_cautions
    return profile_cautions(res.machine, res.profile)
