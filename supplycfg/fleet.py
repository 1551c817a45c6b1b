"""Which of our sets can do this job? One search per machine file of a folder, on every core.

Each machine is read and searched on its own: a bad file gets its one-line
error in its own row and does not stop the others. Rows keep the order of
the file names, whatever order the workers finish in.
"""

import math
import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

from . import STANDING_NOTICE, __version__
from .errors import InputError

#: Most machine files one fleet run takes: a folder of a site's sets is tens of
#: files; the bound keeps a mistaken folder (a whole disk) from running for hours.
MAX_FLEET_FILES = 1000
#: Chunks of files per worker: each task carries a chunk, so the profile is sent
#: once per chunk and the workers end together within about one chunk.
CHUNKS_PER_WORKER = 3


@dataclass
class FleetRow:
    """One machine file's answer: can it do the job, and its best option.

    ``objective`` is the job's objective as a table shows it (``objective_label``
    names it with its unit: hours to full, tap changes, the load-end voltage's
    margin); ``shaft_power_kw`` is the best option's highest shaft power over
    the job's load points, what the drive must give, and ``drive_loading_percent``
    that power over the profile's drive rating (None for a fixed speed).
    ``drive_needed_kw``, where no setting meets the job because the drive is
    too small: the least highest shaft power of a setting that meets it with
    a larger drive of the same kind [kW]. ``overspeed_ratio``, where the drive
    itself turns the machine past the overspeed stop (every setting carries it):
    the largest belt or gearing ratio that keeps it to its rated speed.
    ``best["stops"]`` lists the rules of the best option's stop cautions.
    """

    file: str
    label: str | None = None
    feasible: bool = False
    best: dict | None = None
    objective: float | None = None
    objective_label: str | None = None
    shaft_power_kw: float | None = None
    drive_loading_percent: float | None = None
    drive_needed_kw: float | None = None
    overspeed_ratio: float | None = None
    error: str | None = None

    def as_dict(self):
        return {"file": self.file, "label": self.label, "feasible": self.feasible, "best": self.best,
                "objective": self.objective, "objective_label": self.objective_label,
                "shaft_power_kw": self.shaft_power_kw, "drive_loading_percent": self.drive_loading_percent,
                "drive_needed_kw": self.drive_needed_kw, "overspeed_ratio": self.overspeed_ratio, "error": self.error}


@dataclass
class FleetResult:
    """Rows of a fleet search, one per machine file, in file-name order."""

    folder: str
    profile_label: str
    kind: str
    machines: list
    workers: int
    notes: list = field(default_factory=list)

    def as_dict(self):
        return {"tool": f"supplycfg {__version__}", "folder": self.folder, "profile": self.profile_label,
                "kind": self.kind, "machines": [r.as_dict() for r in self.machines], "workers": self.workers,
                "notes": list(self.notes), "notice": STANDING_NOTICE}


def machine_files(folder):
    """The ``*.toml`` files of ``folder`` in name order; an InputError if there are none or too many."""
    p = Path(folder)
    if not p.is_dir():
        raise InputError(str(folder), "folder", "is not a folder; allowed: a folder of machine files (*.toml)")
    files = sorted(f for f in p.glob("*.toml") if f.is_file())
    if not files:
        raise InputError(str(folder), "folder", "holds no machine files (*.toml)")
    if len(files) > MAX_FLEET_FILES:
        raise InputError(str(folder), "folder", f"holds {len(files)} machine files; allowed: at most {MAX_FLEET_FILES}")
    return files


def objective_shown(profile, option):
    """``(value, label)``: an option's objective as a table shows it (the job's ``OBJECTIVE_SHOWN``).

    None where the job or the option has none (an option that breaks a limit may
    have no objective: it is ranked by its breaches).
    """
    from .jobs import JOBS
    shown = getattr(JOBS[profile.kind], "OBJECTIVE_SHOWN", None)
    if shown is None:
        return None, None
    words, unit, factor = shown
    label = f"{words} [{unit}]" if unit else words
    v = None if option is None else option.objective
    if v is None or not math.isfinite(v):
        return None, label
    return factor * float(v) + 0.0, label


def _finite_or_none(v):
    return float(v) if v is not None and math.isfinite(v) else None


def search_one_machine(path, profile, text=None):
    """Search one machine file for ``profile``; a :class:`FleetRow` whatever happens to the file.

    Parameters
    ----------
    path : str or Path
        The file, or the name its ``text`` is known by (an upload on the page).
    profile : LoadProfile
    text : str, optional
        The file's text, when it is not read from ``path``.

    Returns
    -------
    FleetRow
        ``error`` holds the one-line message of a bad file (nothing else is set).
    """
    from .machine import load_machine
    from .search import drive_overspeed, search
    row = FleetRow(file=str(path))
    try:
        m = load_machine(path, text)
        # a row shows the best setting only: its meter readings and bands are left to `search`
        res = search(m, profile, advice=False, warm_check=False)
    except InputError as exc:
        row.error = str(exc)
        return row
    row.label = m.label
    best = res.options[0] if res.options else None
    row.feasible = bool(best is not None and best.feasible)
    if best is not None:
        row.best = {"rank": best.rank, "feasible": best.feasible, "setting": best.setting_dict(),
                    "smallest_margin": best.smallest_margin, "failed": list(best.failed),
                    # a stop of the job itself (a load past the machine's short-time limit) holds for every setting
                    # and is the one to tell; else the best option's own
                    "stops": ([c.rule for c in res.cautions if c.severity == "stop"]
                              or [c.rule for c in best.cautions if c.severity == "stop"])}
        row.objective, row.objective_label = objective_shown(profile, best)
        if not best.feasible:
            row.objective = None  # a near miss's objective is no score of what the machine can do
        row.shaft_power_kw = _finite_or_none(best.figures.get("max_shaft_power_kw"))
        row.drive_loading_percent = _finite_or_none(best.figures.get("max_drive_loading_percent"))
    row.drive_needed_kw = _finite_or_none(res.drive_needed_kw)
    fast = drive_overspeed(m, profile)
    if fast is not None:
        row.overspeed_ratio = fast[1]
    return row


def _worker(args):
    path, profile, text = args if len(args) == 3 else (*args, None)
    try:
        return search_one_machine(path, profile, text)
    except Exception as exc:  # a fault of ours on one file must not lose the others
        return FleetRow(file=str(path), error=f"internal error, please report it: {type(exc).__name__}: {exc}")


def _chunk_worker(args):
    """Rows of a chunk of machine files, searched one after another in one worker."""
    paths, profile = args
    return [_worker((p, profile)) for p in paths]


def fleet_search(folder, profile, workers=None):
    """Search every machine file of ``folder`` for one job.

    Parameters
    ----------
    folder : str or Path
        A folder of machine files (``*.toml``).
    profile : LoadProfile
    workers : int, optional
        Processes to use; default every core. 1 runs in this process.

    Returns
    -------
    FleetResult
    """
    files = machine_files(folder)
    n = workers or os.cpu_count() or 1
    n = max(1, min(n, len(files)))
    # the engine is imported once, here: forked workers start with it loaded
    from . import search as _preloaded  # noqa: F401
    if n == 1:
        rows = [_worker((f, profile)) for f in files]
    else:
        # one chunk of files per task (a few per worker, so a slow machine does not hold up the end)
        chunks = [files[k::CHUNKS_PER_WORKER * n] for k in range(CHUNKS_PER_WORKER * n)]
        chunks = [c for c in chunks if c]
        # forked workers inherit the loaded engine (no second start-up); the command line forks
        # from one thread. Where fork is missing the workers import it themselves.
        ctx = multiprocessing.get_context("fork") if "fork" in multiprocessing.get_all_start_methods() else None
        with ProcessPoolExecutor(max_workers=n, mp_context=ctx) as pool:
            done = list(pool.map(_chunk_worker, [(c, profile) for c in chunks]))
        by_file = {r.file: r for rows_ in done for r in rows_}
        rows = [by_file[str(f)] for f in files]
    notes = []
    if rows and all(r.error is not None for r in rows):
        notes.append("no machine file in the folder could be read: each row gives its file's error")
    elif not any(r.feasible for r in rows):
        notes.append("no machine in the folder meets every limit of this job")
    return FleetResult(str(folder), profile.label, profile.kind, rows, n, notes)


def setting_words(setting, trade_words=False):
    """A best setting in a line: the connection (as typed on the command line, or in the trade's words),
    taps, diverter, field."""
    from .wording import connection_words
    desc = connection_words(setting["connection"]) if trade_words else setting["connection"]
    if setting.get("series_turns"):
        desc += f", {setting['series_turns']:g} series turns"
    if setting.get("diverter_ohm") is not None:
        desc += f", diverter {setting['diverter_ohm']:.3g} ohm"
    if setting.get("rheostat_ohm") is not None:
        desc += f", rheostat {setting['rheostat_ohm']:.3g} ohm"
    if setting.get("field_current_a") is not None:
        desc += f", field {setting['field_current_a']:.3g} A"
    return desc


def fleet_rows(res, trade_words=False):
    """One row per machine in words, for a table (the command line's and, with ``trade_words``, the page's).

    Keys: ``machine file``, ``machine``, ``can do it`` (yes, no or error),
    ``best setting``, ``objective`` (with the job's words and unit), ``shaft
    power``, ``drive needed`` (where the drive is why nothing meets the job),
    ``breaks`` (the limits the best option breaks, in words) and ``error``.
    """
    from .report import broken_limits_text
    out = []
    for r in res.machines:
        row = {"machine file": Path(r.file).name, "machine": r.label or "", "can do it": "error", "best setting": "",
               "objective": "", "shaft power": "", "drive needed": "", "breaks": "", "error": r.error or ""}
        if r.error is None:
            row["can do it"] = "yes" if r.feasible else "no"
            if r.best is None:
                row["best setting"] = "no connection of this machine suits the job"
            else:
                row["best setting"] = setting_words(r.best["setting"], trade_words)
                if r.objective is not None:
                    row["objective"] = f"{r.objective_label}: {r.objective:.3g}"
                if r.shaft_power_kw is not None and r.shaft_power_kw < 0:
                    # at every load point the load drives the machine: no shaft power to size a drive by
                    row["shaft power"] = "none: the load drives the machine (back-feeding)"
                elif r.shaft_power_kw is not None:
                    row["shaft power"] = f"{r.shaft_power_kw:.3g} kW" + (
                        f" ({r.drive_loading_percent:.0f} % of the drive's rating)"
                        if r.drive_loading_percent is not None else "")
                row["breaks"] = broken_limits_text(r.best["failed"], r.best.get("stops", ()))
            if r.overspeed_ratio is not None:
                # the drive's speed, not its rating: every setting has the overspeed stop
                row["drive needed"] = (f"the drive turns it past the overspeed stop: a belt or gearing ratio of at "
                                       f"most {r.overspeed_ratio:.3g} brings it to its rated speed")
            elif r.drive_needed_kw is not None:
                # nothing works because the drive is too small: what a larger one must give
                row["drive needed"] = (f"the drive limits it: with a larger drive a setting meets the job, "
                                       f"{r.drive_needed_kw:.3g} kW at the shaft")
        out.append(row)
    return out


def fleet_search_texts(items, profile, source="machine files"):
    """Search machine files given as ``(name, text, error)`` for one job, one after another in this process.

    For the page, whose uploads are in memory (a page's server is threaded: it
    does not fork workers). ``error`` is None, or the one-line message met
    while reading the file (too large, say): that row carries it and the file
    is not searched.

    Returns
    -------
    FleetResult
        Rows in the order of ``items``.
    """
    items = list(items)
    if len(items) > MAX_FLEET_FILES:
        raise InputError(source, "files", f"are {len(items)}; allowed: at most {MAX_FLEET_FILES}")
    rows = [FleetRow(file=str(name), error=str(error)) if error is not None else _worker((name, profile, text))
            for name, text, error in items]
    notes = [] if any(r.feasible for r in rows) else ["no machine given meets every limit of this job"]
    return FleetResult(source, profile.label, profile.kind, rows, 1, notes)


def fleet_text(res):
    """One row per machine a plant engineer reads."""
    workers = f"{res.workers} worker{'s' if res.workers != 1 else ''}"
    lines = [f"{len(res.machines)} machine{'s' if len(res.machines) != 1 else ''} for {res.profile_label} "
             f"({res.kind}), {workers}; settings as --connection takes them, exact (`search` gives the meter "
             "readings)", ""]
    hdr = f"{'machine file':<32} {'can do it':<9}  best setting"
    lines += [hdr, "-" * len(hdr)]
    for row in fleet_rows(res):
        name = row["machine file"]
        if row["error"]:
            lines.append(f"{name:<32} {'error':<9}  {row['error']}")
            continue
        desc = row["best setting"]
        if row["objective"]:
            desc += f"; {row['objective']}"
        if row["shaft power"]:
            desc += f"; shaft power {row['shaft power']}"
        if row["drive needed"]:
            desc += f"; {row['drive needed']}"
        if row["breaks"]:
            desc += "; breaks: " + row["breaks"]
        lines.append(f"{name:<32} {row['can do it']:<9}  {desc}")
    for n in res.notes:
        lines.append(f"note: {n}")
    return "\n".join(lines)
