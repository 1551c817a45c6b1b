"""Load profiles: what the load needs, read from TOML.

A load profile is TOML with the tables ``[load]`` and ``[drive]`` and one job
table matching ``load.kind``: ``[battery]``, ``[welding]``, ``[lighting]`` or
``[booster]``. :func:`load_profile` reads and checks one, handing the job
table to its job module (:mod:`supplycfg.jobs`); :func:`profile_to_dict`
gives back the same tables so a saved profile loads unchanged.
"""

from dataclasses import dataclass, field, fields

from .drive import DRIVE_KEYS, Drive, read_drive
from .errors import InputError
from .jobs import JOBS, KINDS
from .validate import (Table, check_tables, read_pair, read_toml, refuse_unknown_keys,
                       source_name)

__all__ = ["KINDS", "LoadProfile", "load_profile", "profile_from_dict", "profile_to_dict"]


@dataclass(frozen=True)
class LoadProfile:
    """What the load needs: kind, the drive, winding temperatures and one job.

    ``speeds_rpm`` holds the generator's speed or ``(low, high)`` for a fixed
    drive, its speed at zero shaft power for an engine or a motor (whose
    speed then follows the load, see :mod:`supplycfg.drive`);
    ``temperatures_c`` is ``(cold, hot)`` or None for the machine's reference
    temperature.
    """

    kind: str
    label: str
    speeds_rpm: tuple
    temperatures_c: tuple | None
    battery: object = None
    welding: object = None
    lighting: object = None
    booster: object = None
    drive: Drive | None = None
    source: str = field(default="profile", compare=False)

    def __post_init__(self):
        if self.drive is None:  # a profile built from speeds alone: a fixed drive, direct coupled
            object.__setattr__(self, "drive", Drive(speeds_rpm=tuple(float(s) for s in self.speeds_rpm)))

    @property
    def job(self):
        """The job of the profile's kind."""
        return getattr(self, self.kind)


def load_profile(path, text=None):
    """Read and check a load-profile file.

    Parameters
    ----------
    path : str or Path
        The file (its name is used in messages).
    text : str or bytes, optional
        The file's content, when already in memory.

    Returns
    -------
    LoadProfile

    Raises
    ------
    InputError
        One line naming the file, the key and what is allowed.
    """
    return profile_from_dict(read_toml(path, text), source_name(path))


def profile_from_dict(data, source="profile"):
    """Build a :class:`LoadProfile` from parsed TOML tables, checking every rule."""
    check_tables(data, source, ("load", "drive") + KINDS, "load profile",
                 ("machine", "open_circuit", "armature_reaction", "winding", "losses"), "machine file")
    keys = {"load": ("kind", "label"), "drive": DRIVE_KEYS + ("winding_temperature_range_c",),
            **{k: tuple(f.name for f in fields(JOBS[k].JOB_TABLE)) for k in KINDS}}
    refuse_unknown_keys(data, source, keys)
    ld = Table(data.get("load"), source, "load", keys=keys["load"])
    kind = ld.text("kind", choices=KINDS)
    label = ld.text("label", "")
    ld.finish()
    for other in KINDS:
        if other != kind and other in data:
            raise InputError(source, other, f"table given but load.kind is {kind!r}; allowed: only [{kind}]")

    dr = Table(data.get("drive"), source, "drive", keys=keys["drive"])
    drive = read_drive(dr, source)
    temps = read_pair(dr, "winding_temperature_range_c", source, low=-60, high=250, names=("cold", "hot"),
                  required=False)
    dr.finish()

    jt = Table(data.get(kind), source, kind, keys=keys[kind])
    jobs = {"battery": None, "welding": None, "lighting": None, "booster": None}
    jobs[kind] = JOBS[kind].read_job(jt, source)
    jt.finish()
    return LoadProfile(kind=kind, label=label, speeds_rpm=drive.generator_speeds_rpm(), temperatures_c=temps,
                       drive=drive, source=source, **jobs)


def _toml_value(v):
    return list(v) if isinstance(v, tuple) else v


def profile_to_dict(profile):
    """The profile's TOML tables; ``profile_from_dict`` of it gives ``profile`` back."""
    p = profile
    drive = p.drive.as_table()
    if p.temperatures_c is not None:
        drive["winding_temperature_range_c"] = list(p.temperatures_c)
    job = p.job
    table = {f.name: _toml_value(getattr(job, f.name)) for f in fields(job)
             if getattr(job, f.name) is not None}
    return {"load": {"kind": p.kind, "label": p.label}, "drive": drive, p.kind: table}
