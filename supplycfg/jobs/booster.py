"""A series booster in a feeder from a bus: the job's figures, limits and cautions.

``V_load = V_bus + V_booster(IL) - IL R_feeder`` (design note).
"""

from dataclasses import dataclass

import numpy as np

from ..cautions import caution, job_current_cautions
from ..envelope import COARSE, FINE, optimise_control
from ..magnetisation import OpenCircuitCurve
from ..validate import MAX_CURRENT_A, MAX_OHM, MAX_VOLTAGE_V, MIN_VOLTAGE_V, read_pair
from ..errors import InputError
from .lighting import DEFAULT_TOLERANCE_PERCENT, MIN_TOLERANCE_PERCENT, evaluate_feeder, voltage_band_objective

#: The profile table this job reads.
TABLE = "booster"


@dataclass(frozen=True)
class BoosterJob:
    """A series booster in a feeder from a bus. Field names are the ``[booster]`` keys."""

    bus_voltage_v: float
    feeder_resistance_ohm: float
    load_current_a: tuple
    tolerance_percent: float


#: The dataclass of the [booster] table; its fields are the table's keys.
JOB_TABLE = BoosterJob


def read_job(t, source):
    """The ``[booster]`` table ``t`` of a profile read from ``source``, checked."""
    vb = t.number("bus_voltage_v", low=MIN_VOLTAGE_V, high=MAX_VOLTAGE_V)
    rf = t.number("feeder_resistance_ohm", low=0, low_open=True, high=MAX_OHM)
    cur = read_pair(t, "load_current_a", source, low=0, high=MAX_CURRENT_A)
    if cur[1] <= 0:
        raise InputError(source, t.key("load_current_a"), f"is [{cur[0]:g}, {cur[1]:g}]; allowed: a full load above 0 A")
    tol = t.number("tolerance_percent", DEFAULT_TOLERANCE_PERCENT, low=MIN_TOLERANCE_PERCENT, high=50)
    return BoosterJob(bus_voltage_v=vb, feeder_resistance_ohm=rf, load_current_a=cur, tolerance_percent=tol)


def evaluate(space, base_idx, u, res=COARSE):
    """Limits and figures of booster candidates ``(base, diverter/control)`` over the envelope."""
    return evaluate_feeder(space, base_idx, u, True, res)


def solve(space, advice=True):
    """Best control value of every candidate and its limits and figures (fine solve).

    A series booster has no field control: its trim is the diverter, so it
    has no readings or band of its own (``advice`` changes nothing).
    """
    u, evaluated = optimise_control(space, evaluate)
    lim, figs = evaluate(space, np.arange(len(space.bases)), u, FINE)
    return u, lim, figs, [{"readings": None, "band": None} for _ in space.bases], evaluated


#: What the booster job ranks its feasible options by.
OBJECTIVE_LABEL = ("the widest margin of the load-end voltage inside its band (the objective's value is minus "
                   "that margin, as a fraction of the band's end)")
#: The objective as a table shows it: words, unit and the factor from the objective's value
#: (minus a fraction: the load-end voltage's margin inside its band in per cent).
#: Limits that bound one quantity, by the requirement they make up: a near miss that leaves the band at both
#: ends breaks one requirement, not two (the ranking counts requirements).
LIMIT_GROUPS = {"load_voltage_high": "load_voltage_band", "load_voltage_low": "load_voltage_band"}
OBJECTIVE_SHOWN = ("load-end voltage's margin inside its band", "%", -100.0)


def objective(figures):
    """Minus the smaller margin to the voltage band (fraction; smaller is better), as for lighting."""
    return voltage_band_objective(figures)


#: Share of the straight part's slope below which the open-circuit curve is past its knee: there the
#: boost no longer rises in step with the line current (a booster is worked on the straight part of its
#: curve; textbook practice, from memory; the share is our reading of "the knee").
KNEE_SLOPE_SHARE = 0.75


def drive_trip_cautions(setting):
    """What the line does to a booster whose drive trips: it drives the line current through the stopped
    armature, which runs as a motor; with its field in series (a series motor) its speed has no bound."""
    if setting.connection == "series" or (setting.series_turns or 0) > 0:
        how = ("the line current still flows through its series field and armature: it runs as a series motor "
               "on the line, turning backwards with its driving motor, and with so little load it can race to "
               "a dangerous speed")
    else:
        how = ("the line current still flows through its armature while its field stays excited: it runs as a "
               "motor on the line, turning backwards with its driving motor, and takes power from the line")
    return [caution("booster-drive-trip", "warn",
                    f"If the booster's drive trips while the feeder carries current, {how}. Interlock the drive "
                    "with the line: a bypass switch across the booster (or a line contactor) that closes when the "
                    "drive trips, and an overspeed trip on the set.",
                    "series-motor speed rises without limit at light load (Theraja Vol II ch. 29, recalled); "
                    "common practice")]


def option_cautions(machine, profile, setting, f):
    """Booster cautions of one setting: what a drive trip does, and a note where its field at the heaviest
    load is past the knee of the open-circuit curve (the boost then falls behind the feeder's drop)."""
    out = drive_trip_cautions(setting)
    x = f.get("max_net_mmf_a")
    if x is None or not x > 0:
        return out
    occ = OpenCircuitCurve.from_machine(machine)
    _, slope = occ.emf(np.array([float(x)]), with_slope=True)
    straight = occ.air_gap_slope()
    share = float(slope[0]) / straight
    if share >= KNEE_SLOPE_SHARE:
        return out
    return out + [caution("booster-past-knee", "note",
                    f"At the heaviest load the booster's field reaches {x:.3g} A (equivalent field current), past "
                    f"the knee of its curve: the curve rises {float(slope[0]):.3g} V/A there against "
                    f"{straight:.3g} V/A on its straight part ({100 * share:.0f} %). The boost no longer rises in "
                    "step with the line current, so the far end sags at full load (the band's figures include "
                    "it); a booster whose straight part reaches further follows the feeder better.",
                    "series booster worked on the straight part of its curve (textbook practice, from memory)",
                    max_net_mmf_a=x, slope_share=share)]


def profile_cautions(machine, profile):
    """Cautions of the booster job as a whole, whatever the setting."""
    out = []
    out.append(caution("booster-series", "note",
                  "A series booster carries the whole feeder current: check its rating and that the feeder "
                  "protection covers it; never open the series circuit under load.", "common practice"))
    return out + job_current_cautions(machine, profile.booster.load_current_a[1], "feeder current")
