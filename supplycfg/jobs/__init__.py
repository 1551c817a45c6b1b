"""The jobs a DC generator is set up for, one module each.

Each job module holds its named tables, its ``[kind]`` profile table reader
(``read_job``), its evaluation over the search envelope (``evaluate`` or
``solve``), and its own cautions (``option_cautions``, ``profile_cautions``).
The generic search (:mod:`supplycfg.search`) walks the candidates and calls
the job; the profile reader (:mod:`supplycfg.profile`) dispatches to
``read_job``. Imports run one way: profile reader -> jobs -> engine.
"""

from ..cautions import drive_cautions, setting_cautions
from . import battery, booster, lighting, welding

#: Job modules by ``load.kind``.
JOBS = {"battery": battery, "welding": welding, "lighting": lighting, "booster": booster}
#: The kinds of job, in the order the page and messages list them.
KINDS = tuple(JOBS)


def job_module(kind):
    """The module of the job ``kind`` (one of :data:`KINDS`)."""
    return JOBS[kind]


def option_cautions(machine, profile, setting, f):
    """Every caution of one setting for a job: the job's own, then the machine's.

    Parameters
    ----------
    machine : Machine
    profile : LoadProfile
    setting : Setting
    f : dict
        The setting's figures (named values; each key optional).

    Returns
    -------
    list of Caution
    """
    job = JOBS[profile.kind]
    # a job may leave out a machine rule that does not fit it (its own rules cover that hazard)
    skip = set(getattr(job, "MACHINE_RULES_LEFT_OUT", ()))
    own = job.option_cautions(machine, profile, setting, f)
    drive = drive_cautions(machine, profile.drive, f)
    if any("idle_no_load_voltage_v" in c.figures for c in own):
        # the job's caution already gives the idle voltage and what to do about it: the drive's
        # idle note would repeat the figure, unless it adds that the field does not build up
        drive = [c for c in drive if c.rule != "drive-idle" or c.figures.get("idle_builds_up") == 0]
    return (own + [c for c in setting_cautions(machine, setting, f) if c.rule not in skip] + drive)


def profile_cautions(machine, profile):
    """Cautions of the job as a whole, whatever the setting."""
    return JOBS[profile.kind].profile_cautions(machine, profile)


def command_cautions(machine, setting, f, load=None, profile=None):
    """Cautions of one setting given on the command line (``curve``, ``point``, ``buildup``, ``charge``).

    The same rules as the search: the job's when a profile is given (or the
    battery's rules when the load is a battery), then the machine's.

    Parameters
    ----------
    machine : Machine
    setting : Setting
    f : dict
        The figures of the setting (each key optional; see
        :func:`supplycfg.cautions.setting_cautions`).
    load : str, optional
        ``"battery"`` for a battery load without a profile.
    profile : LoadProfile, optional

    Returns
    -------
    list of Caution
    """
    if profile is not None:
        return option_cautions(machine, profile, setting, f)
    out = battery.option_cautions(machine, None, setting, f) if load == "battery" else []
    return out + setting_cautions(machine, setting, f)
