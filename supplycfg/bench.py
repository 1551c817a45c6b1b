"""``supplycfg bench``: medians of repeated runs of the engine, the search, the charge run and the page.

Targets on a 2-core machine (issue 12): ``characteristic_ms`` <= 2.5,
``grid_seconds`` <= 0.25, ``search_seconds`` <= 0.15, ``charge_run_seconds``
<= 0.05, ``cli_search_seconds`` <= 0.7 (the whole ``supplycfg search``
process on the slowest demo job, Python's bytecode cache warm as after a
first run; also measured with none), ``engine_vs_ngspice`` <= 0.5 (the engine's
time over ngspice's analysis time on the same 200-point shunt characteristic,
measured in the same run; skipped without ngspice), ``fleet_seconds`` <= 3
(48 machine variants, one job), ``peak_memory_mb`` <= 300 (a whole search
process at the largest inputs the files allow), ``app_first_render_seconds``
<= 1.5, ``app_change_seconds`` <= 0.15, ``browser_render_seconds`` <= 4 (load
to last chart in chromium; skipped when chromium or playwright is absent;
printed beside ``browser_floor_seconds``, a bare Streamlit page with three
small charts timed in turn with it).
The aim is half of each target. The bench also compares the demo searches
with stored reference answers: feasible options lost or gained, and the
largest relative difference of a figure.
"""

import os
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path

from . import __version__

PROFILES = Path(__file__).resolve().parent.parent / "profiles"
DEMO_PAIRS = (("charging-set", "battery-charging"), ("welding-set", "welding"),
              ("lighting-set", "lighting"), ("feeder-booster", "booster"))
#: Most runs per figure: a median of 20 is steady, and one bench stays within minutes.
MAX_BENCH_REPEAT = 20
TARGETS = {"characteristic_ms": 2.5, "grid_seconds": 0.25, "search_seconds": 0.15,
           "charge_run_seconds": 0.05, "cli_search_seconds": 0.7, "engine_vs_ngspice": 0.5,
           "fleet_seconds": 3.0, "peak_memory_mb": 300.0, "app_first_render_seconds": 1.5,
           "app_change_seconds": 0.15, "browser_render_seconds": 4.0}
#: Share of a target the bench aims at (the brief: aim for half).
AIM = 0.5
#: Measures that are skipped (None) where a tool they need is absent, and what is missing.
OPTIONAL = {"browser_render_seconds": "chromium absent", "engine_vs_ngspice": "ngspice absent"}
#: Points of the characteristic timed against ngspice (issue 12: one 200-point shunt characteristic).
NGSPICE_POINTS = 200
#: Times ngspice solves the sweep in one run; its total analysis time is divided by this.
NGSPICE_REPEAT = 20


#: Stored answers of the demo searches, from the solver as it stood when the speed work began
#: (issue 12): the bench prints the largest difference against them.
REFERENCE_DIR = Path(__file__).resolve().parent.parent / "tests" / "data" / "reference"
#: Below this size a figure counts as zero when differences are taken relative to it.
RELATIVE_FLOOR = 1e-9


def option_key(option):
    """An option's base (connection, series turns, diverter) as one string: how answers are matched."""
    s = option["setting"]
    return f"{s['connection']}|{s.get('series_turns')}|{s.get('diverter_ohm')}"


def _numbers(d, prefix=""):
    """Numeric leaves of a nested dict or list as ``{path: float}`` (booleans and text left out)."""
    out = {}
    if isinstance(d, dict):
        for k, v in d.items():
            out.update(_numbers(v, f"{prefix}{k}."))
    elif isinstance(d, list):
        for k, v in enumerate(d):
            out.update(_numbers(v, f"{prefix}{k}."))
    elif isinstance(d, (int, float)) and not isinstance(d, bool):
        out[prefix[:-1]] = float(d)
    return out


#: Parts of an option compared beside its setting and figures: what a person sets and reads.
ANSWER_PARTS = ("readings", "band", "dial", "current_settings", "plan", "diverters", "exciter")


def answer_summary(result_dict):
    """What the comparison keeps of a search's JSON: per option, feasible, setting, figures, objective,
    readings, band (and the job's dial or plan)."""
    out = {}
    for o in result_dict["options"]:
        out[option_key(o)] = {"feasible": o["feasible"], "rank": o["rank"], "setting": o["setting"],
                              "figures": o["figures"], "smallest_margin": o["smallest_margin"],
                              "objective": (o.get("objective") or {}).get("value"),
                              **{k: o[k] for k in ANSWER_PARTS if k in o}}
    return {"options": out}


def compare_answers(now, ref):
    """Feasible options lost and gained, and the largest relative difference of a number.

    Parameters
    ----------
    now, ref : dict
        :func:`answer_summary` of the search now and of the stored reference.

    Returns
    -------
    dict
        ``lost``, ``gained`` (option keys), ``missing`` (options of the
        reference not found now), ``largest_relative_difference``,
        ``where`` (option key and figure) and ``added`` (numbers given now
        that the reference lacks: new figures, not changed answers; one the
        reference has and the answer lacks counts as an infinite difference).
    """
    a, b = now["options"], ref["options"]
    feas_now = {k for k, v in a.items() if v["feasible"]}
    feas_ref = {k for k, v in b.items() if v["feasible"]}
    worst, where, added = 0.0, None, set()
    for k in sorted(set(a) & set(b)):
        x, y = _numbers(a[k]), _numbers(b[k])
        for name in sorted(set(x) | set(y)):
            if name == "rank":
                continue
            if name not in y:
                added.add(name)  # a figure the reference did not have yet: new, not a changed answer
                continue
            if name not in x:
                d = float("inf")
            else:
                scale = max(abs(x[name]), abs(y[name]))
                d = 0.0 if scale < RELATIVE_FLOOR else abs(x[name] - y[name]) / scale
            if d > worst:
                worst, where = d, f"{k} {name}"
    return {"lost": sorted(feas_ref - feas_now), "gained": sorted(feas_now - feas_ref),
            "missing": sorted(set(b) - set(a)), "largest_relative_difference": worst, "where": where,
            "added": sorted(added)}


def reference_differences(results=None):
    """Compare the demo searches with the stored reference answers (None where none is stored).

    ``results`` maps a job's profile stem to its ``SearchResult``; searched here when absent.
    """
    from .files import jsonable
    if not REFERENCE_DIR.is_dir():
        return None
    out = {}
    for mach, prof in DEMO_PAIRS:
        f = REFERENCE_DIR / f"{prof}.json.gz"
        if not f.is_file():
            continue
        if results is not None and prof in results:
            res = results[prof]
        else:
            from .machine import load_machine
            from .profile import load_profile
            from .search import search
            res = search(load_machine(PROFILES / "machines" / f"{mach}.toml"),
                         load_profile(PROFILES / "loads" / f"{prof}.toml"))
        out[prof] = compare_answers(answer_summary(jsonable(res.as_dict())), read_reference(f))
    return out


def read_reference(path):
    """A stored reference answer (gzip-compressed JSON of :func:`answer_summary`)."""
    import gzip
    import json
    with gzip.open(path, "rt", encoding="utf-8") as fh:
        return json.load(fh)


def _median(fn, repeat):
    fn()  # warm-up
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def _quiet(fn, *args):
    """Run ``fn`` with standard error closed: bare-mode AppTest logs harmless lines there."""
    sys.stderr.flush()
    saved = os.dup(2)
    try:
        with open(os.devnull, "w") as null:
            os.dup2(null.fileno(), 2)
            return fn(*args)
    finally:
        sys.stderr.flush()
        os.dup2(saved, 2)
        os.close(saved)


def grid_settings(machine, rheostats=50):
    """All connections x all taps x ``rheostats`` rheostat (or field-current) values."""
    import numpy as np
    from .circuit import SEPARATE, USES_SERIES, Setting, allowed_connections
    out = []
    for conn in allowed_connections(machine):
        taps = [t for t in machine.series_taps if t > 0] if conn in USES_SERIES else [None]
        for tap in taps:
            for r in np.linspace(0, machine.rheostat_max_ohm, rheostats):
                if conn in SEPARATE and machine.excitation_voltage_v is None:
                    out.append(Setting(conn, field_current_a=float(r / max(machine.rheostat_max_ohm, 1e-9)
                                                                   * machine.occ_field_current_a[-1]), series_turns=tap))
                else:
                    out.append(Setting(conn, rheostat_ohm=float(r), series_turns=tap))
    return out


def write_fleet_variants(folder, count=48):
    """Write ``count`` invented variants of the demo machines into ``folder`` (for ``fleet_seconds``).

    Each variant scales the armature resistance, the shunt turns and the
    rheostat a little, as sister machines of one make differ.
    """
    from dataclasses import replace
    import numpy as np
    from .files import dumps_toml
    from .machine import load_machine, machine_to_dict
    bases = [load_machine(PROFILES / "machines" / f"{m}.toml") for m, _ in DEMO_PAIRS]
    rng = np.random.default_rng(2026)
    folder = Path(folder)
    for k in range(count):
        b = bases[k % len(bases)]
        f = rng.uniform(0.85, 1.15, 3)
        v = replace(b, label=f"{b.label} variant {k + 1}", armature_resistance_ohm=b.armature_resistance_ohm * f[0],
                    rheostat_max_ohm=b.rheostat_max_ohm * f[2])
        (folder / f"variant-{k + 1:02d}.toml").write_text(dumps_toml(machine_to_dict(v)), encoding="utf-8")
    return folder


def machine_at_bounds_toml(taps=None, occ_points=None, ar_rows=None):
    """The demo welding set stretched to the machine file's bounds (series taps, curve points, table rows).

    The largest machine file a search can be given: every bound of
    :mod:`supplycfg.machine` at once (``peak_memory_mb``).
    """
    import numpy as np
    from .files import dumps_toml
    from .machine import MAX_AR_ROWS, MAX_OCC_POINTS, MAX_SERIES_TAPS
    from .validate import read_toml
    taps = MAX_SERIES_TAPS if taps is None else taps
    occ_points = MAX_OCC_POINTS if occ_points is None else occ_points
    ar_rows = MAX_AR_ROWS if ar_rows is None else ar_rows
    m = read_toml(PROFILES / "machines" / "welding-set.toml")
    nse = m["machine"]["series_turns_per_pole"]
    m["machine"]["series_taps"] = [float(t) for t in np.linspace(0.0, nse, taps)]
    fc, ev = m["open_circuit"]["field_current_a"], m["open_circuit"]["emf_v"]
    x = np.linspace(0.0, fc[-1], occ_points)
    m["open_circuit"]["field_current_a"] = x.tolist()
    m["open_circuit"]["emf_v"] = np.maximum.accumulate(np.interp(x, fc, ev)).tolist()
    ia = np.linspace(0.0, 2.0 * m["machine"]["rated_armature_current_a"], ar_rows)
    m["armature_reaction"] = {"armature_current_a": ia.tolist(),
                              "demagnetizing_at_per_pole": (125.0 * (ia / ia[-1]) ** 1.5).tolist()}
    return dumps_toml(m)


def search_command(machine_path, profile_path):
    """The whole ``supplycfg search`` process, as a command."""
    return [sys.executable, "-m", "supplycfg.cli", "search", str(machine_path), str(profile_path), "--json"]


#: Run by the measured process: the command line, then its own peak resident memory (``VmHWM``, which
#: starts afresh at ``exec``; the rusage of a child counts the forked parent's pages too) on standard error.
_PEAK_WRAPPER = """
import atexit, sys
def _peak():
    with open("/proc/self/status") as fh:
        kb = [ln.split()[1] for ln in fh if ln.startswith("VmHWM:")]
    sys.stderr.write("\\npeak_kb=" + (kb[0] if kb else "nan") + "\\n")
atexit.register(_peak)
from supplycfg.cli import main
sys.exit(main(sys.argv[1:]))
"""


def process_seconds(argv, env=None):
    """Wall time [s] of one process run to its end (its start-up included); ``env`` as for subprocess."""
    t0 = time.perf_counter()
    proc = subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    seconds = time.perf_counter() - t0
    if proc.returncode != 0:
        err = proc.stderr.decode(errors="replace")
        raise RuntimeError(f"{' '.join(map(str, argv[-4:]))} failed ({proc.returncode}): {err.strip()[-300:]}")
    return seconds


def bytecode_cache_env(folder):
    """The environment of a measured process with Python's bytecode cache on, kept under ``folder``.

    The first run writes it, later runs read it, as on a normal install; an
    environment that turns the cache off (``PYTHONDONTWRITEBYTECODE``) would
    otherwise compile every module at each start.
    """
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPYCACHEPREFIX"] = str(Path(folder) / "bytecode")
    return env


def process_peak_mb(argv):
    """Peak resident memory [MB] of the command line run with ``argv[3:]`` (as from :func:`search_command`)."""
    proc = subprocess.run([sys.executable, "-c", _PEAK_WRAPPER, *argv[3:]], stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE)
    err = proc.stderr.decode(errors="replace")
    if proc.returncode != 0:
        raise RuntimeError(f"{' '.join(map(str, argv[3:6]))} failed ({proc.returncode}): {err.strip()[-300:]}")
    found = [ln for ln in err.splitlines() if ln.startswith("peak_kb=")]
    return float(found[-1].split("=")[1]) / 1024.0 if found else float("nan")


def engine_against_ngspice(repeat):
    """The same 200-point shunt characteristic by the engine and by ngspice; None without ngspice.

    The charging set's curve is read linearly by both (ngspice's ``pwl``
    table); ngspice solves the engine's points as load conductances swept
    from a heavy load to no load. Returns the engine's median time [ms],
    ngspice's analysis time [ms] (no process start), their ratio and the
    largest relative difference of the terminal voltage.
    """
    import tempfile
    from dataclasses import replace
    import numpy as np
    from . import spice
    from .circuit import Setting, external_characteristic
    from .machine import load_machine
    if spice.NGSPICE is None:
        return None
    m = replace(load_machine(PROFILES / "machines" / "charging-set.toml"), occ_interpolation="linear")
    st = Setting("shunt", rheostat_ohm=30.0)
    engine_s = _median(lambda: external_characteristic(m, st, NGSPICE_POINTS), repeat)
    pts = external_characteristic(m, st, NGSPICE_POINTS).points
    v, il = pts["terminal_voltage_v"], pts["load_current_a"]
    keep = (v > 0.01 * m.rated_voltage_v) & (il >= 0)
    g = il[keep] / v[keep]
    times = []
    with tempfile.TemporaryDirectory() as d:
        for _ in range(max(1, min(repeat, 3))):
            res, t = spice.characteristic_by_ngspice(m, st, g, d, repeat=NGSPICE_REPEAT)
            times.append(t)
    rows = np.array([int(np.argmin(np.abs(res["load_value"] - gi))) for gi in g])
    diff = np.abs(res["terminal_voltage_v"][rows] - v[keep]) / np.maximum(np.abs(v[keep]), 1e-9)
    ngs = statistics.median(times)
    return {"engine_characteristic_200_ms": 1e3 * engine_s, "ngspice_characteristic_ms": 1e3 * ngs,
            "engine_vs_ngspice": engine_s / ngs if ngs > 0 else None,
            "ngspice_points": int(g.size), "ngspice_largest_voltage_difference": float(diff.max())}


def run_bench(repeat=5):
    """Run every benchmark (``repeat`` runs per figure, 1 to MAX_BENCH_REPEAT); returns a JSON-safe dict."""
    if isinstance(repeat, bool) or not isinstance(repeat, int) or not 1 <= repeat <= MAX_BENCH_REPEAT:
        from .errors import InputError
        raise InputError("bench", "repeat", f"is {repeat!r}; allowed: a whole number 1 to {MAX_BENCH_REPEAT}")
    import tempfile
    from .circuit import Setting, characteristics, external_characteristic
    from .profile import load_profile
    from .machine import load_machine
    from .search import search
    res = {"supplycfg": __version__, "python": platform.python_version(), "repeat": repeat}
    m = load_machine(PROFILES / "machines" / "charging-set.toml")
    st = Setting("shunt", rheostat_ohm=30.0)
    res["characteristic_ms"] = 1e3 * _median(lambda: external_characteristic(m, st, 400), repeat)
    ng = engine_against_ngspice(repeat)
    res.update(ng or {"engine_vs_ngspice": None, "ngspice_characteristic_ms": None})
    # the same curve with the demo's motor: the speed solved at every point (no target: for comparison)
    motor = load_profile(PROFILES / "loads" / "battery-charging.toml").drive
    res["driven_characteristic_ms"] = 1e3 * _median(lambda: external_characteristic(m, st, 400, motor), repeat)
    settings = grid_settings(m)
    res["grid_candidates"] = len(settings)
    res["grid_seconds"] = _median(lambda: characteristics(m, settings, 100), repeat)
    worst, cands, slowest = 0.0, 0, DEMO_PAIRS[0]
    per, results = {}, {}
    for mach, prof in DEMO_PAIRS:
        mm = load_machine(PROFILES / "machines" / f"{mach}.toml")
        pp = load_profile(PROFILES / "loads" / f"{prof}.toml")
        t = _median(lambda: search(mm, pp), repeat)
        per[prof] = t
        results[prof] = search(mm, pp)
        if t >= worst:
            worst, cands, slowest = t, results[prof].candidates_evaluated, (mach, prof)
    res["search_seconds"] = worst
    res["search_seconds_by_profile"] = per
    res["candidates_evaluated"] = cands
    res["reference"] = reference_differences(results)
    argv = search_command(PROFILES / "machines" / f"{slowest[0]}.toml", PROFILES / "loads" / f"{slowest[1]}.toml")
    runs = max(1, min(repeat, 5))
    with tempfile.TemporaryDirectory() as d:
        # as a user runs it: Python's bytecode cache written by the first run and read after
        # (kept in a folder of its own, so an environment that turns the cache off is measured alike)
        warm = bytecode_cache_env(d)
        process_seconds(argv, warm)  # warm-up: the files in the system's cache, the bytecode written
        res["cli_search_seconds"] = statistics.median(process_seconds(argv, warm) for _ in range(runs))
        # and in this environment as it stands (it may turn the cache off: modules compiled at each start)
        res["cli_search_as_set_seconds"] = statistics.median(process_seconds(argv) for _ in range(runs))
        res["cli_search_environment"] = ("PYTHONDONTWRITEBYTECODE set" if os.environ.get("PYTHONDONTWRITEBYTECODE")
                                         else "bytecode cache on")
    res["cli_search_job"] = slowest[1]
    peak = {}
    with tempfile.TemporaryDirectory() as d:
        big = Path(d) / "machine-at-bounds.toml"
        big.write_text(machine_at_bounds_toml(), encoding="utf-8")
        for _, prof in DEMO_PAIRS:
            argv = search_command(big, PROFILES / "loads" / f"{prof}.toml")
            peak[prof] = (process_seconds(argv), process_peak_mb(argv))
    res["peak_memory_mb"] = max(v[1] for v in peak.values())
    res["at_bounds_by_profile"] = {k: {"seconds": v[0], "peak_memory_mb": v[1]} for k, v in peak.items()}
    try:
        from .simulation import charge_run_for_option
        best = results["battery-charging"].options[0]
        mm, pp = results["battery-charging"].machine, results["battery-charging"].profile
        res["charge_run_seconds"] = _median(lambda: charge_run_for_option(mm, pp, best, max_hours=12.0), repeat)
    except ImportError:
        res["charge_run_seconds"] = None
    from .fleet import fleet_search
    with tempfile.TemporaryDirectory() as d:
        write_fleet_variants(d)
        fp = load_profile(PROFILES / "loads" / "welding.toml")
        t0 = time.perf_counter()
        fr = fleet_search(d, fp)
        res["fleet_seconds"] = time.perf_counter() - t0
        res["fleet_machines"] = len(fr.machines)
        res["fleet_workers"] = fr.workers
        res["fleet_errors"] = sum(r.error is not None for r in fr.machines)
    try:
        from .page.timing import time_app
        res.update(_quiet(time_app, max(1, min(repeat, 3))))
    except ImportError:
        res["app_first_render_seconds"] = None
        res["app_change_seconds"] = None
    try:
        from .page.timing import time_browser
        res.update(_quiet(time_browser, max(1, min(repeat, 3))) or {})
    except ImportError:
        pass
    res.setdefault("browser_render_seconds", None)
    res.setdefault("browser_floor_seconds", None)
    res["targets"] = TARGETS
    res["met"] = {k: (res.get(k) is not None and res[k] <= v) for k, v in TARGETS.items()}
    res["within_aim"] = {k: (res.get(k) is not None and res[k] <= AIM * v) for k, v in TARGETS.items()}
    return res


def _status(res, k):
    if res.get(k) is None:
        return f"skipped ({OPTIONAL[k]})" if k in OPTIONAL else "not measured"
    if res["within_aim"][k]:
        return "met (within half)"
    return "met" if res["met"][k] else "NOT met"


def figure_name_pattern(name):
    """A figure's path with its list indices (a dial row, a plan stage, a band's end) as ``*``: one name per
    figure, however many rows carry it (``dial.3.band.field_current_hot_a.0`` -> ``dial.*.band.field_current_hot_a.*``)."""
    return ".".join("*" if part.isdigit() else part for part in str(name).split("."))


def bench_text(res):
    lines = [f"supplycfg {res['supplycfg']} bench, Python {res['python']}, median of {res['repeat']} runs", ""]
    lines.append(f"{'measure':<28} {'value':>12} {'target':>10} {'aim':>8}  status")
    for k, target in TARGETS.items():
        v = res.get(k)
        val = "-" if v is None else f"{v:.4g}"
        lines.append(f"{k:<28} {val:>12} {target:>10g} {AIM * target:>8g}  {_status(res, k)}")
    lines.append("")
    if res.get("ngspice_characteristic_ms") is not None:
        lines.append(f"same {res['ngspice_points']}-point shunt characteristic: engine "
                     f"{res['engine_characteristic_200_ms']:.4g} ms, ngspice {res['ngspice_characteristic_ms']:.4g} ms "
                     f"of analysis (no process start); largest voltage difference "
                     f"{res['ngspice_largest_voltage_difference']:.2g} (relative)")
    lines.append(f"grid_candidates {res['grid_candidates']}; candidates_evaluated (slowest search) {res['candidates_evaluated']}")
    if res.get("driven_characteristic_ms") is not None:
        lines.append(f"  characteristic on the demo motor (speed solved at every point): "
                     f"{res['driven_characteristic_ms']:.4g} ms")
    if res.get("browser_floor_seconds") is not None:
        lines.append(f"browser: the demo page's last chart at {res['browser_render_seconds']:.3g} s; a bare "
                     f"Streamlit page with three 20-point charts at {res['browser_floor_seconds']:.3g} s, "
                     "loaded in turn in the same run (the floor before the page adds anything)")
    for k, v in res["search_seconds_by_profile"].items():
        lines.append(f"  search {k}: {v:.4g} s")
    as_set = res.get("cli_search_as_set_seconds")
    lines.append(f"cli_search_seconds on {res['cli_search_job']}, Python's bytecode cache warm"
                 + (f" ({as_set:.3g} s in this environment as it stands: {res['cli_search_environment']})"
                    if as_set is not None else "")
                 + f"; fleet: {res['fleet_machines']} machines, "
                 f"{res['fleet_workers']} workers, {res['fleet_errors']} errors")
    lines.append("peak memory at the machine file's bounds: " + ", ".join(
        f"{k} {v['peak_memory_mb']:.0f} MB in {v['seconds']:.3g} s" for k, v in res["at_bounds_by_profile"].items()))
    ref = res.get("reference")
    if ref is None:
        lines.append("reference answers: none stored (tests/data/reference)")
    else:
        lost = sum(len(v["lost"]) for v in ref.values())
        gained = sum(len(v["gained"]) for v in ref.values())
        missing = sum(len(v["missing"]) for v in ref.values())
        job, worst = max(((k, v) for k, v in ref.items()), key=lambda kv: kv[1]["largest_relative_difference"])
        added = sorted({figure_name_pattern(n) for v in ref.values() for n in v.get("added", [])})
        lines.append(f"against the reference answers ({len(ref)} demo jobs): feasible options lost {lost}, "
                     f"gained {gained}, options missing {missing}; largest relative difference "
                     f"{worst['largest_relative_difference']:.2g}"
                     + (f" ({job}: {worst['where']})" if worst["where"] else "")
                     + (f"; new figures the references lack: {', '.join(added)}" if added else ""))
    return "\n".join(lines)
