"""The bench's bookkeeping: answers against the stored reference, the machine at the bounds, the printed lines.

Nothing here is timed (speed lives in ``supplycfg bench`` itself).
"""

import copy
import tomllib

import pytest

from supplycfg import bench
from supplycfg.machine import MAX_AR_ROWS, MAX_OCC_POINTS, MAX_SERIES_TAPS, load_machine


def _summary(**opts):
    return {"options": {k: {"feasible": f, "rank": 1, "setting": {"connection": "shunt", "rheostat_ohm": r},
                            "figures": {"v": v}, "smallest_margin": 0.1, "objective": None}
                        for k, (f, r, v) in opts.items()}}


def test_compare_counts_feasible_options_lost_and_gained():
    """A feasible option that turns infeasible is lost, the reverse gained; the worst difference is named."""
    ref = _summary(a=(True, 10.0, 200.0), b=(False, 5.0, 100.0), c=(True, 1.0, 50.0))
    now = _summary(a=(False, 10.0, 200.0), b=(True, 5.0, 100.0), c=(True, 1.0, 50.0 * (1 + 1e-7)))
    out = bench.compare_answers(now, ref)
    assert out["lost"] == ["a"] and out["gained"] == ["b"] and out["missing"] == []
    assert out["largest_relative_difference"] == pytest.approx(1e-7, rel=1e-3)
    assert out["where"] == "c figures.v"
    same = bench.compare_answers(ref, ref)
    assert same["largest_relative_difference"] == 0.0 and not same["lost"] and not same["gained"]
    # a figure the reference lacks is new, not a change; one the answer lost is an infinite difference
    more = copy.deepcopy(ref)
    more["options"]["c"]["figures"]["w"] = 1.0
    out = bench.compare_answers(more, ref)
    assert out["added"] == ["figures.w"] and out["largest_relative_difference"] == 0.0
    out = bench.compare_answers(ref, more)
    assert out["largest_relative_difference"] == float("inf") and out["where"] == "c figures.w"


def test_stored_references_cover_the_demo_jobs():
    """One stored reference per demo job, each with its options keyed by connection, tap and diverter."""
    for _, prof in bench.DEMO_PAIRS:
        ref = bench.read_reference(bench.REFERENCE_DIR / f"{prof}.json.gz")
        assert ref["options"]
        assert any(o["feasible"] for o in ref["options"].values())


def test_machine_at_bounds_is_at_every_bound(tmp_path):
    """The peak-memory machine holds the most series taps, curve points and table rows a file may."""
    path = tmp_path / "big.toml"
    path.write_text(bench.machine_at_bounds_toml(), encoding="utf-8")
    m = load_machine(path)
    assert len(m.series_taps) == MAX_SERIES_TAPS
    assert len(m.occ_field_current_a) == MAX_OCC_POINTS
    assert len(m.ar_table_current_a) == MAX_AR_ROWS
    assert tomllib.loads(path.read_text("utf-8"))["machine"]["label"]


def test_bench_text_prints_every_key_with_its_target_and_status():
    """Each key with its target, the aim (half) and met / not met; skipped tools say what is missing."""
    res = {"supplycfg": "x", "python": "3", "repeat": 1, "grid_candidates": 1, "candidates_evaluated": 1,
           "search_seconds_by_profile": {"lighting": 0.1}, "cli_search_job": "lighting", "fleet_machines": 48,
           "fleet_workers": 2, "fleet_errors": 0, "at_bounds_by_profile": {"welding": {"seconds": 1.0,
                                                                                      "peak_memory_mb": 90.0}},
           "reference": {"lighting": {"lost": [], "gained": [], "missing": [], "largest_relative_difference": 0.0,
                                      "where": None}}}
    for k, t in bench.TARGETS.items():
        res[k] = 0.4 * t
    res["search_seconds"] = 0.9 * bench.TARGETS["search_seconds"]
    res["fleet_seconds"] = 2 * bench.TARGETS["fleet_seconds"]
    res["engine_vs_ngspice"] = None
    res["met"] = {k: res[k] is not None and res[k] <= t for k, t in bench.TARGETS.items()}
    res["within_aim"] = {k: res[k] is not None and res[k] <= bench.AIM * t for k, t in bench.TARGETS.items()}
    lines = bench.bench_text(res).splitlines()
    row = {ln.split()[0]: ln for ln in lines if ln.split() and ln.split()[0] in bench.TARGETS}
    assert set(row) == set(bench.TARGETS)
    assert row["characteristic_ms"].endswith("met (within half)")
    assert row["search_seconds"].endswith("  met")
    assert row["fleet_seconds"].endswith("NOT met")
    assert row["engine_vs_ngspice"].endswith("skipped (ngspice absent)")
    assert any("feasible options lost 0, gained 0" in ln for ln in lines)


def test_command_line_timing_runs_with_the_bytecode_cache_on(tmp_path, monkeypatch):
    """cli_search_seconds times the process as a user runs it: Python's bytecode cache on (kept in a folder
    of the bench's own), even where the environment turns it off."""
    monkeypatch.setenv("PYTHONDONTWRITEBYTECODE", "1")
    env = bench.bytecode_cache_env(tmp_path)
    assert "PYTHONDONTWRITEBYTECODE" not in env
    assert env["PYTHONPYCACHEPREFIX"].startswith(str(tmp_path))


def test_new_figures_are_named_once_however_many_rows_carry_them():
    """Regression: the bench listed every dial row's and band end's new figure (68 names for two new figures)."""
    from supplycfg.bench import figure_name_pattern
    names = [f"dial.{k}.band.field_current_hot_a.{e}" for k in range(13) for e in (0, 1)]
    assert {figure_name_pattern(n) for n in names} == {"dial.*.band.field_current_hot_a.*"}
    assert figure_name_pattern("figures.w") == "figures.w"
