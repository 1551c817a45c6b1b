"""Which of our sets can do this job? One search per machine file of a folder, on every core.

Each machine is read and searched on its own: a bad file gets its one-line
error in its own row and does not stop the others. Rows keep the order of
the file names, whatever order the workers finish in.
"""

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
    """One machine file's answer: can it do the job, and its best option."""

    file: str
    label: str | None = None
    feasible: bool = False
    best: dict | None = None
    objective: float | None = None
    objective_label: str | None = None
    required_drive_kw: float | None = None
    error: str | None = None

    def as_dict(self):
        return {"file": self.file, "label": self.label, "feasible": self.feasible, "best": self.best,
                "objective": self.objective, "objective_label": self.objective_label,
                "required_drive_kw": self.required_drive_kw, "error": self.error}


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


def _objective_of(profile, option):
    """The job's objective figure of an option and its label, where the job defines one."""
    from .jobs import JOBS
    job = JOBS[profile.kind]
    label = getattr(job, "OBJECTIVE_LABEL", None)
    value = option.figures.get(getattr(job, "OBJECTIVE_FIGURE", ""), None) if option is not None else None
    return value, label


def search_one_machine(path, profile):
    """Search one machine file for ``profile``; a :class:`FleetRow` whatever happens to the file.

    Parameters
    ----------
    path : str or Path
    profile : LoadProfile

    Returns
    -------
    FleetRow
        ``error`` holds the one-line message of a bad file (nothing else is set).
    """
    from .machine import load_machine
    from .search import search
    row = FleetRow(file=str(path))
    try:
        m = load_machine(path)
        # a row shows the best setting only: its meter readings and bands are left to `search`
        res = search(m, profile, advice=False)
    except InputError as exc:
        row.error = str(exc)
        return row
    row.label = m.label
    best = res.options[0] if res.options else None
    row.feasible = bool(best is not None and best.feasible)
    if best is not None:
        row.best = {"rank": best.rank, "feasible": best.feasible, "setting": best.setting_dict(),
                    "smallest_margin": best.smallest_margin, "failed": list(best.failed)}
        row.objective, row.objective_label = _objective_of(profile, best)
        row.required_drive_kw = best.figures.get("required_drive_kw")
    return row


def _worker(args):
    path, profile = args
    try:
        return search_one_machine(path, profile)
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
    if not any(r.feasible for r in rows):
        notes.append("no machine in the folder meets every limit of this job")
    return FleetResult(str(folder), profile.label, profile.kind, rows, n, notes)


def fleet_text(res):
    """One row per machine a plant engineer reads."""
    lines = [f"{len(res.machines)} machines for {res.profile_label} ({res.kind}), {res.workers} worker(s)", ""]
    hdr = f"{'machine file':<32} {'can do it':<9}  best setting"
    lines += [hdr, "-" * len(hdr)]
    for r in res.machines:
        name = Path(r.file).name
        if r.error:
            lines.append(f"{name:<32} {'error':<9}  {r.error}")
            continue
        if r.best is None:
            lines.append(f"{name:<32} {'no':<9}  no connection of this machine suits the job")
            continue
        s = r.best["setting"]
        desc = s["connection"]
        if s.get("series_turns"):
            desc += f", {s['series_turns']:g} series turns"
        if s.get("rheostat_ohm") is not None:
            desc += f", rheostat {s['rheostat_ohm']:.3g} ohm"
        if s.get("field_current_a") is not None:
            desc += f", field {s['field_current_a']:.3g} A"
        if r.objective is not None and r.objective_label:
            desc += f"; {r.objective_label} {r.objective:.3g}"
        if r.required_drive_kw is not None:
            desc += f"; drive needed {r.required_drive_kw:.3g} kW"
        if not r.feasible:
            desc += "; breaks " + ", ".join(r.best["failed"])
        lines.append(f"{name:<32} {'yes' if r.feasible else 'no':<9}  {desc}")
    for n in res.notes:
        lines.append(f"note: {n}")
    return "\n".join(lines)
