"""``supplycfg bench``: medians of repeated runs of the engine, the search, the charge run and the page.

Targets on a 2-core machine (from the issues): ``characteristic_ms`` <= 5,
``grid_seconds`` <= 0.5, ``search_seconds`` <= 0.3, ``charge_run_seconds``
<= 0.1, ``app_first_render_seconds`` <= 3, ``app_change_seconds`` <= 0.3,
``browser_render_seconds`` <= 4 (load to last chart in chromium; skipped when
chromium or playwright is absent).
"""

import platform
import statistics
import time
from pathlib import Path

from . import __version__

PROFILES = Path(__file__).resolve().parent.parent / "profiles"
DEMO_PAIRS = (("charging-set", "battery-charging"), ("welding-set", "welding"),
              ("lighting-set", "lighting"), ("feeder-booster", "booster"))
#: Most runs per figure: a median of 20 is steady, and one bench stays within minutes.
MAX_BENCH_REPEAT = 20
TARGETS = {"characteristic_ms": 5.0, "grid_seconds": 0.5, "search_seconds": 0.3,
           "charge_run_seconds": 0.1, "app_first_render_seconds": 3.0, "app_change_seconds": 0.3,
           "fleet_seconds": 3.0, "browser_render_seconds": 4.0}
#: Measures that are skipped (None) where a tool they need is absent.
OPTIONAL = ("browser_render_seconds",)


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


def answer_summary(result_dict):
    """What the comparison keeps of a search's JSON: per option, feasible, setting, figures, margins."""
    out = {}
    for o in result_dict["options"]:
        out[option_key(o)] = {"feasible": o["feasible"], "rank": o["rank"], "setting": o["setting"],
                              "figures": o["figures"], "smallest_margin": o["smallest_margin"],
                              "objective": (o.get("objective") or {}).get("value")}
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
        reference not found now), ``largest_relative_difference`` and
        ``where`` (option key and figure).
    """
    a, b = now["options"], ref["options"]
    feas_now = {k for k, v in a.items() if v["feasible"]}
    feas_ref = {k for k, v in b.items() if v["feasible"]}
    worst, where = 0.0, None
    for k in sorted(set(a) & set(b)):
        x, y = _numbers(a[k]), _numbers(b[k])
        for name in sorted(set(x) | set(y)):
            if name == "rank":
                continue
            if (name in x) != (name in y):
                d = float("inf")
            else:
                scale = max(abs(x[name]), abs(y[name]))
                d = 0.0 if scale < RELATIVE_FLOOR else abs(x[name] - y[name]) / scale
            if d > worst:
                worst, where = d, f"{k} {name}"
    return {"lost": sorted(feas_ref - feas_now), "gained": sorted(feas_now - feas_ref),
            "missing": sorted(set(b) - set(a)), "largest_relative_difference": worst, "where": where}


def reference_differences(results=None):
    """Compare the demo searches with the stored reference answers (None where none is stored).

    ``results`` maps a job's profile stem to its ``SearchResult``; searched here when absent.
    """
    import json
    from .files import jsonable
    if not REFERENCE_DIR.is_dir():
        return None
    out = {}
    for mach, prof in DEMO_PAIRS:
        f = REFERENCE_DIR / f"{prof}.json"
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
        out[prof] = compare_answers(answer_summary(jsonable(res.as_dict())), json.loads(f.read_text("utf-8")))
    return out


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
    import os
    import sys
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


def run_bench(repeat=5):
    """Run every benchmark (``repeat`` runs per figure, 1 to MAX_BENCH_REPEAT); returns a JSON-safe dict."""
    if isinstance(repeat, bool) or not isinstance(repeat, int) or not 1 <= repeat <= MAX_BENCH_REPEAT:
        from .errors import InputError
        raise InputError("bench", "repeat", f"is {repeat!r}; allowed: a whole number 1 to {MAX_BENCH_REPEAT}")
    from .circuit import Setting, characteristics, external_characteristic
    from .profile import load_profile
    from .machine import load_machine
    from .search import search
    res = {"supplycfg": __version__, "python": platform.python_version(), "repeat": repeat}
    m = load_machine(PROFILES / "machines" / "charging-set.toml")
    st = Setting("shunt", rheostat_ohm=30.0)
    res["characteristic_ms"] = 1e3 * _median(lambda: external_characteristic(m, st, 400), repeat)
    settings = grid_settings(m)
    res["grid_candidates"] = len(settings)
    res["grid_seconds"] = _median(lambda: characteristics(m, settings, 100), max(1, repeat // 2))
    worst, cands = 0.0, 0
    per = {}
    for mach, prof in DEMO_PAIRS:
        mm = load_machine(PROFILES / "machines" / f"{mach}.toml")
        pp = load_profile(PROFILES / "loads" / f"{prof}.toml")
        t = _median(lambda: search(mm, pp), repeat)
        per[prof] = t
        if t >= worst:
            worst, cands = t, search(mm, pp).candidates_evaluated
    res["search_seconds"] = worst
    res["search_seconds_by_profile"] = per
    res["candidates_evaluated"] = cands
    try:
        from .simulation import charge_run_for_option
        mm = load_machine(PROFILES / "machines" / "charging-set.toml")
        pp = load_profile(PROFILES / "loads" / "battery-charging.toml")
        best = search(mm, pp).options[0]
        res["charge_run_seconds"] = _median(lambda: charge_run_for_option(mm, pp, best, max_hours=12.0), repeat)
    except ImportError:
        res["charge_run_seconds"] = None
    import tempfile
    from .fleet import fleet_search
    with tempfile.TemporaryDirectory() as d:
        write_fleet_variants(d)
        fp = load_profile(PROFILES / "loads" / "welding.toml")
        t0 = time.perf_counter()
        fr = fleet_search(d, fp)
        res["fleet_seconds"] = time.perf_counter() - t0
        res["fleet_machines"] = len(fr.machines)
        res["fleet_errors"] = sum(r.error is not None for r in fr.machines)
    try:
        from .page.timing import time_app
        res.update(_quiet(time_app, max(1, min(repeat, 3))))
    except ImportError:
        res["app_first_render_seconds"] = None
        res["app_change_seconds"] = None
    try:
        from .page.timing import time_browser
        res["browser_render_seconds"] = _quiet(time_browser, max(1, min(repeat, 3)))
    except ImportError:
        res["browser_render_seconds"] = None
    res["targets"] = TARGETS
    res["met"] = {k: (res.get(k) is not None and res[k] <= v) for k, v in TARGETS.items()}
    return res


def bench_text(res):
    lines = [f"supplycfg {res['supplycfg']} bench, Python {res['python']}, median of {res['repeat']} runs", ""]
    lines.append(f"{'measure':<28} {'value':>12} {'target':>10}  met")
    for k, target in TARGETS.items():
        v = res.get(k)
        val = "-" if v is None else f"{v:.4g}"
        met = "skipped (chromium absent)" if v is None and k in OPTIONAL else ("yes" if res["met"][k] else "NO")
        lines.append(f"{k:<28} {val:>12} {target:>10g}  {met}")
    lines.append("")
    lines.append(f"grid_candidates {res['grid_candidates']}; candidates_evaluated (slowest search) {res['candidates_evaluated']}")
    for k, v in res["search_seconds_by_profile"].items():
        lines.append(f"  search {k}: {v:.4g} s")
    return "\n".join(lines)
