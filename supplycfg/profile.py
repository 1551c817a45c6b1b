"""Load profiles: what the load needs, read from TOML.

A load profile is TOML with the tables ``[load]`` and ``[drive]`` and one job
table matching ``load.kind``: ``[battery]``, ``[welding]``, ``[lighting]`` or
``[booster]``. :func:`load_profile` reads and checks one, handing the job
table to its job module (:mod:`supplycfg.jobs`); :func:`profile_to_dict`
gives back the same tables so a saved profile loads unchanged.
"""

from dataclasses import dataclass, field, fields

from .errors import InputError
from .jobs import JOBS, KINDS
from .validate import (MAX_SPEED_RPM, MIN_SPEED_RPM, Table, check_tables, read_pair, read_toml,
                       refuse_unknown_keys, source_name)

__all__ = ["KINDS", "LoadProfile", "load_profile", "profile_from_dict", "profile_to_dict"]


@dataclass(frozen=True)
class LoadProfile:
    """What the load needs: kind, drive speeds, winding temperatures and one job.

    ``speeds_rpm`` holds one speed or ``(low, high)``; ``temperatures_c`` is
    ``(cold, hot)`` or None for the machine's reference temperature.
    """

    kind: str
    label: str
    speeds_rpm: tuple
    temperatures_c: tuple | None
    battery: object = None
    welding: object = None
    lighting: object = None
    booster: object = None
    source: str = field(default="profile", compare=False)

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
                 ("machine", "open_circuit", "armature_reaction", "winding"), "machine file")
    keys = {"load": ("kind", "label"), "drive": ("speed_rpm", "speed_range_rpm", "winding_temperature_range_c"),
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
    has_one, has_range = dr.has("speed_rpm"), dr.has("speed_range_rpm")
    if has_one and has_range:
        raise InputError(source, "drive.speed_range_rpm", "given together with speed_rpm; allowed: one of the two")
    if has_range:
        dr.raw("speed_rpm", None)
        speeds = read_pair(dr, "speed_range_rpm", source, low=MIN_SPEED_RPM, high=MAX_SPEED_RPM)
    else:
        if not has_one:
            raise InputError(source, "drive.speed_rpm",
                             "is missing; give speed_rpm, or speed_range_rpm = [low, high]")
        speeds = (dr.number("speed_rpm", low=MIN_SPEED_RPM, high=MAX_SPEED_RPM),)
        dr.raw("speed_range_rpm", None)
    temps = read_pair(dr, "winding_temperature_range_c", source, low=-60, high=250, names=("cold", "hot"),
                  required=False)
    dr.finish()

    jt = Table(data.get(kind), source, kind, keys=keys[kind])
    jobs = {"battery": None, "welding": None, "lighting": None, "booster": None}
    jobs[kind] = JOBS[kind].read_job(jt, source)
    jt.finish()
    return LoadProfile(kind=kind, label=label, speeds_rpm=speeds, temperatures_c=temps,
                       source=source, **jobs)


def _toml_value(v):
    return list(v) if isinstance(v, tuple) else v


def profile_to_dict(profile):
    """The profile's TOML tables; ``profile_from_dict`` of it gives ``profile`` back."""
    p = profile
    drive = {}
    if len(p.speeds_rpm) == 1:
        drive["speed_rpm"] = p.speeds_rpm[0]
    else:
        drive["speed_range_rpm"] = list(p.speeds_rpm)
    if p.temperatures_c is not None:
        drive["winding_temperature_range_c"] = list(p.temperatures_c)
    job = p.job
    table = {f.name: _toml_value(getattr(job, f.name)) for f in fields(job)
             if getattr(job, f.name) is not None}
    return {"load": {"kind": p.kind, "label": p.label}, "drive": drive, p.kind: table}
