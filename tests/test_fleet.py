"""``supplycfg fleet``: one search per machine file of a folder, bad files in their own row.

Checks against the project's own single-machine search (the fleet must give
the same best option as ``search`` on each file) and the one-line error rule.
"""

import json
import shutil
from pathlib import Path

import pytest

from supplycfg.cli import main
from supplycfg.fleet import fleet_search
from supplycfg.machine import load_machine
from supplycfg.profile import load_profile
from supplycfg.search import search

ROOT = Path(__file__).resolve().parent.parent
MACHINES = ROOT / "profiles" / "machines"
WELDING = ROOT / "profiles" / "loads" / "welding.toml"


@pytest.fixture
def folder(tmp_path):
    for name in ("welding-set.toml", "lighting-set.toml"):
        shutil.copy(MACHINES / name, tmp_path / name)
    (tmp_path / "broken.toml").write_text("[machine]\nlabel = 'x'\n", encoding="utf-8")
    (tmp_path / "notes.txt").write_text("not a machine file", encoding="utf-8")
    return tmp_path


def test_fleet_rows_match_single_searches_and_keep_bad_files_apart(folder):
    """Each good row's best option is the best option of ``search`` on that file; the bad one has its error."""
    p = load_profile(WELDING)
    res = fleet_search(folder, p, workers=2)
    names = [Path(r.file).name for r in res.machines]
    assert names == ["broken.toml", "lighting-set.toml", "welding-set.toml"]
    bad = res.machines[0]
    assert bad.error and "broken.toml" in bad.error and "\n" not in bad.error
    for r in res.machines[1:]:
        assert r.error is None
        single = search(load_machine(r.file), p).options[0]
        assert r.best["setting"] == single.setting_dict()
        assert r.feasible == single.feasible
    assert res.machines[2].feasible  # the welding set does the welding job


def test_fleet_json_contract(folder, capsys):
    """JSON: ``machines`` rows with file, feasible, best and error; exit 0 even with a bad file."""
    assert main(["fleet", str(folder), str(WELDING), "--json", "--workers", "1"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert [set(("file", "feasible", "best", "error")) <= set(r) for r in d["machines"]] == [True] * 3
    assert d["machines"][0]["error"] and d["machines"][0]["best"] is None


def test_fleet_refuses_a_folder_without_machines(tmp_path, capsys):
    """A folder with no *.toml gives one line naming it and exit 2."""
    assert main(["fleet", str(tmp_path), str(WELDING)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "no machine files" in err


def test_fleet_rows_carry_the_objective_and_the_shaft_power_in_words(tmp_path):
    """Regression: every row's objective and drive figure were empty (the jobs named no objective figure).
    A row now shows the job's objective as ``search`` ranks by it (hours to full for a battery), the best
    option's highest shaft power, and the limits it breaks in words, not file keys."""
    from supplycfg.fleet import fleet_rows
    for name in ("charging-set.toml", "welding-set.toml"):
        shutil.copy(MACHINES / name, tmp_path / name)
    p = load_profile(ROOT / "profiles" / "loads" / "battery-charging.toml")
    res = fleet_search(tmp_path, p, workers=1)
    good = res.machines[0]
    single = search(load_machine(good.file), p).options[0]
    assert good.feasible and good.objective_label == "hours to full [h]"
    assert good.objective == pytest.approx(single.figures["hours_to_full"], rel=1e-9)
    assert good.shaft_power_kw == pytest.approx(single.figures["max_shaft_power_kw"], rel=1e-9)
    rows = fleet_rows(res)
    assert rows[0]["objective"].startswith("hours to full [h]: ")
    assert rows[0]["shaft power"].endswith("% of the drive's rating)")
    # the welding set cannot charge the bank: what it breaks, in words
    assert rows[1]["can do it"] == "no" and rows[1]["breaks"] and "_" not in rows[1]["breaks"]


def test_fleet_of_texts_keeps_refused_and_bad_files_in_their_rows():
    """The page's fleet (files in memory): a refused file and a bad one get their one line each, the
    good one the same best option as ``search`` on the file."""
    from supplycfg.fleet import fleet_search_texts
    p = load_profile(WELDING)
    good = (MACHINES / "welding-set.toml").read_bytes()
    res = fleet_search_texts([("big.toml", None, "big.toml: file: is 2000000 bytes; at most 1048576 allowed"),
                              ("bad.toml", b"[machine]\nlabel = 'x'\n", None),
                              ("welding-set.toml", good, None)], p)
    big, bad, ok = res.machines
    assert big.error.startswith("big.toml: file:") and bad.error and "bad.toml" in bad.error
    assert ok.error is None and ok.feasible
    assert ok.best["setting"] == search(load_machine(MACHINES / "welding-set.toml"), p).options[0].setting_dict()


def test_fleet_row_says_what_a_larger_drive_must_give_where_the_drive_limits_the_job(tmp_path):
    """A motor too small for the booster (as in test_drive): the row says the drive limits the job and
    what a larger drive must give at the shaft, the same figure as the single search's; with the
    drive large enough the row has no such figure (issue 12: "the drive rating it needs")."""
    from supplycfg.fleet import fleet_rows
    from supplycfg.profile import profile_from_dict, profile_to_dict
    shutil.copy(MACHINES / "feeder-booster.toml", tmp_path / "feeder-booster.toml")
    d = profile_to_dict(load_profile(ROOT / "profiles" / "loads" / "booster.toml"))
    d["drive"] = {"kind": "motor", "synchronous_speed_rpm": 1000, "rated_slip_percent": 4, "rated_power_kw": 12,
                  "winding_temperature_range_c": [20, 75]}
    small = profile_from_dict(d, "small motor")
    res = fleet_search(tmp_path, small, workers=1)
    row = res.machines[0]
    single = search(load_machine(row.file), small)
    assert not row.feasible and row.drive_needed_kw is not None and row.drive_needed_kw > 12
    assert row.drive_needed_kw == pytest.approx(single.drive_needed_kw, rel=1e-12)
    assert "the drive limits it" in fleet_rows(res)[0]["drive needed"]
    assert res.as_dict()["machines"][0]["drive_needed_kw"] == pytest.approx(row.drive_needed_kw)
    d["drive"]["rated_power_kw"] = 2 * row.drive_needed_kw
    roomy = fleet_search(tmp_path, profile_from_dict(d, "larger motor"), workers=1).machines[0]
    assert roomy.feasible and roomy.drive_needed_kw is None


def test_fleet_of_only_broken_files_prints_every_row_and_exits_2(tmp_path, capsys):
    """A folder whose every machine file is broken answers nothing: each file's error row is still
    printed (nothing lost) and the exit code is 2 with one line saying so (the project's error rule)."""
    (tmp_path / "a.toml").write_text("x = [\n", encoding="utf-8")
    (tmp_path / "b.toml").write_text("y = 1\n", encoding="utf-8")
    assert main(["fleet", str(tmp_path), str(WELDING), "--workers", "1"]) == 2
    cap = capsys.readouterr()
    assert "a.toml" in cap.out and "b.toml" in cap.out
    assert cap.err.count("\n") == 1 and "no machine file in it could be read" in cap.err
    assert main(["fleet", str(tmp_path), str(WELDING), "--workers", "1", "--json"]) == 2
    cap = capsys.readouterr()
    assert [m["error"] is not None for m in json.loads(cap.out)["machines"]] == [True, True]


def test_fleet_row_of_a_machine_too_small_for_the_job_says_so(tmp_path):
    """A lighting load of 200 A is past the demo lighting set's short-time limit (180 A): its row names the
    job's stop (machine too small), and its best option is one whose figures were found. (Regression: the
    row offered a differential rig whose every figure was unknown, with no stop.)"""
    from supplycfg.fleet import fleet_rows
    shutil.copy(MACHINES / "lighting-set.toml", tmp_path / "lighting-set.toml")
    text = (ROOT / "profiles" / "loads" / "lighting.toml").read_text().replace(
        "load_current_a = [5, 90]", "load_current_a = [5, 200]")
    (tmp_path / "job.toml").write_text(text)
    folder = tmp_path / "m"
    folder.mkdir()
    shutil.move(tmp_path / "lighting-set.toml", folder / "lighting-set.toml")
    res = fleet_search(folder, load_profile(tmp_path / "job.toml"), workers=1)
    row = res.machines[0]
    assert not row.feasible and row.best["stops"] == ["job-above-peak"]
    assert "differential" not in row.best["setting"]["connection"]
    assert "machine too small" in fleet_rows(res)[0]["breaks"]
