"""The command line's own promises (issue 8 items 8 and 13).

Text from files reaches the terminal with every hidden character made
visible, so a label cannot hide or reorder the lines after it; ``--json``
keeps it exact. Options take the values a person needs (``--top 1``) and
refuse the rest in one line with exit code 2, before any long work; values at
their bounds answer with nothing else on standard error.
"""

import json
import warnings
from pathlib import Path

import pytest

from supplycfg import cli, search as search_module
from supplycfg.text import visible

ROOT = Path(__file__).resolve().parent.parent
MACHINE = ROOT / "profiles" / "machines" / "charging-set.toml"
PROFILE = ROOT / "profiles" / "loads" / "battery-charging.toml"
#: A label built to forge the output: conceal (SGR 8) hides what follows on a
#: terminal, a right-to-left override reverses it, a zero-width space makes
#: two names look alike, a line break starts a fake line.
FORGING_LABEL = "CS-1\x1b[8m\u202eRTL\u200b\r\n  [note] no cautions\x07\u2028end"
HIDDEN = ("\x1b", "\u202e", "\u200b", "\r", "\x07", "\u2028")


@pytest.fixture()
def forged_machine(tmp_path):
    text = MACHINE.read_text(encoding="utf-8")
    label = json.dumps(FORGING_LABEL)  # a TOML basic string: the same escapes
    path = tmp_path / "forged.toml"
    path.write_text(text.replace('label = "Kestrel Ridge charging set CS-1"', f"label = {label}"), encoding="utf-8")
    return path


def test_visible_escapes_every_hidden_character():
    """Control, format (bidirectional, zero-width, tags) and separator characters become escapes; the rest stays."""
    assert visible("Kühlwasser ⚡ e\u0301 [ok]") == "Kühlwasser ⚡ e\u0301 [ok]"
    assert visible("a\x1b[8mb") == "a\\x1b[8mb"
    assert visible("\u202e\u2066\u200b\u200d\ufeff\U000e0041") == "\\u202e\\u2066\\u200b\\u200d\\ufeff\\U000e0041"
    assert visible("one\ntwo\ttab\r\x85\u2028\u2029") == "one\\ntwo\\ttab\\r\\x85\\u2028\\u2029"
    assert visible("one\ntwo\x1b", keep_newlines=True) == "one\ntwo\\x1b"
    assert visible("\ud800") == "\\ud800"


@pytest.mark.parametrize("argv", [
    ["curve", "{m}", "--connection", "shunt", "--rheostat-ohm", "20", "--points", "3"],
    ["point", "{m}", "--connection", "shunt", "--rheostat-ohm", "20", "--load-ohm", "3"],
    ["buildup", "{m}", "--rheostat-ohm", "30"],
    ["buildup", "{m}", "--connection", "series"],
    ["search", "{m}", "{p}", "--top", "1"],
    ["charge", "{m}", "{p}"],
], ids=lambda a: a[0] + ("-series" if "series" in a else ""))
def test_text_output_shows_file_text_visibly(forged_machine, capsys, argv):
    """Issue 8 item 8: the label's hidden characters print as escapes; its line break starts no line."""
    argv = [a.format(m=forged_machine, p=PROFILE) for a in argv]
    assert cli.main(argv) == 0
    out, err = capsys.readouterr()
    assert err == ""
    for ch in HIDDEN:
        assert ch not in out, repr(ch)
    assert visible(FORGING_LABEL) in out
    assert not any(line.startswith("  [note] no cautions") for line in out.splitlines())


def test_json_keeps_file_text_exact(forged_machine, capsys):
    """Issue 8 item 8: ``--json`` gives the label back exactly."""
    assert cli.main(["search", str(forged_machine), str(PROFILE), "--top", "1", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["machine"] == FORGING_LABEL


def test_top_1_and_option_1_are_taken(tmp_path, capsys):
    """Issue 8 item 13: the best option alone can be asked for."""
    assert cli.main(["search", str(MACHINE), str(PROFILE), "--top", "1", "--json"]) == 0
    assert len(json.loads(capsys.readouterr().out)["options"]) == 1
    assert cli.command_parser().parse_args(["search", "m", "p", "--top", str(cli.MAX_TOP)]).top == cli.MAX_TOP >= 100
    out = tmp_path / "best.md"
    assert cli.main(["sheet", str(MACHINE), str(PROFILE), "-o", str(out), "--option", "1"]) == 0
    assert "option 1 of" in out.read_text(encoding="utf-8")


def test_bare_command_prints_usage_on_stderr(capsys):
    """Issue 8 item 13: ``supplycfg`` alone: usage on standard error, exit code 2, nothing on standard output."""
    assert cli.main([]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.startswith("usage: supplycfg") and "command: is missing" in err


@pytest.fixture()
def no_search(monkeypatch):
    """Fail the test if the search runs: a refusal must come before it."""
    def refuse(*a, **k):
        raise AssertionError("the search ran before the output was checked")
    monkeypatch.setattr(search_module, "search", refuse)


def test_missing_output_folder_is_named_before_the_search(tmp_path, capsys, no_search):
    """Issue 8 item 13: a folder that does not exist is refused before the search, and named."""
    folder = tmp_path / "sheets" / "2026"
    assert cli.main(["sheet", str(MACHINE), str(PROFILE), "-o", str(folder / "sheet.html")]) == 2
    out, err = capsys.readouterr()
    assert out == "" and len(err.splitlines()) == 1
    assert f"{folder / 'sheet.html'}: output: " in err and repr(str(folder)) in err and "does not exist" in err


def test_overlong_output_name_is_one_line(tmp_path, capsys, no_search):
    """Issue 8 item 13: a 300-character name is refused in one line, exit 2, no internal error."""
    out_path = tmp_path / ("s" * 300 + ".html")
    assert cli.main(["sheet", str(MACHINE), str(PROFILE), "-o", str(out_path)]) == 2
    out, err = capsys.readouterr()
    assert out == "" and len(err.splitlines()) == 1
    assert "internal error" not in err and "output: " in err and "at most" in err


def test_existing_output_is_refused_before_the_search(tmp_path, capsys, no_search):
    """An existing file without --force is refused at once, not after the search."""
    out_path = tmp_path / "sheet.md"
    out_path.write_text("mine")
    assert cli.main(["sheet", str(MACHINE), str(PROFILE), "-o", str(out_path)]) == 2
    assert "exists already" in capsys.readouterr().err
    assert out_path.read_text() == "mine"


def test_series_turns_must_be_a_tap_exactly(capsys):
    """Issue 8 item 13: 1e-10 turns is not tap 0; a tap as listed is taken."""
    assert cli.main(["curve", str(MACHINE), "--connection", "separate-cumulative", "--series-turns", "1e-10",
                     "--rheostat-ohm", "10"]) == 2
    err = capsys.readouterr().err
    assert "--series-turns: is 1e-10; allowed taps: 0, 8, 16, 24" in err
    assert cli.main(["curve", str(MACHINE), "--connection", "separate-cumulative", "--series-turns", "8.0",
                     "--rheostat-ohm", "10", "--points", "3", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["setting"]["series_turns"] == 8.0


@pytest.mark.parametrize("argv, emf", [
    (["--poles", "64", "--conductors", "10000000", "--parallel-paths", "2", "--speed-rpm", "100000",
      "--flux-wb", "100"], 64 * 100 * 100000 * 10_000_000 / (60 * 2)),
    (["--poles", "2", "--conductors", "1000", "--parallel-paths", "1000", "--speed-rpm", "1", "--emf-v", "1e6"], 1e6),
    (["--poles", "4", "--conductors", "492", "--parallel-paths", "4", "--speed-rpm", "1450", "--flux-wb", "0"], 0.0),
], ids=["largest", "largest flux", "zero flux"])
def test_emf_at_its_bounds_is_finite(capsys, argv, emf):
    """Issue 8 item 13: the EMF equation at its bounds prints a finite answer and nothing on stderr."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert cli.main(["emf", *argv, "--json"]) == 0
    out, err = capsys.readouterr()
    res = json.loads(out)
    assert err == "" and res["emf_v"] == pytest.approx(emf, rel=1e-12)
    assert res["flux_wb"] is not None and "inf" not in out.lower()


W = str(ROOT / "profiles" / "machines" / "welding-set.toml")
EXTREMES = [
    ["curve", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "20", "--speed-rpm", "1", "--winding-temperature-c", "-60"],
    ["curve", str(MACHINE), "--connection", "series", "--speed-rpm", "100000", "--winding-temperature-c", "250",
     "--points", str(cli.MAX_CURVE_POINTS)],
    ["curve", str(MACHINE), "--connection", "separate", "--field-current-a", "1e-300"],
    ["curve", str(MACHINE), "--connection", "long-shunt-cumulative", "--rheostat-ohm", "20", "--diverter-ohm", "1e-300"],
    ["point", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "20", "--line-v0", "1e5", "--line-slope-ohm", "1e-300"],
    ["point", str(MACHINE), "--connection", "short-shunt-cumulative", "--rheostat-ohm", "20", "--battery-emf-v", "1e5", "--battery-ohm", "1e6"],
    ["point", W, "--connection", "series", "--load-current-a", "-1e6"],
    ["point", W, "--connection", "long-shunt-differential", "--rheostat-ohm", "20", "--load-ohm", "1e6", "--speed-rpm", "100000"],
    ["buildup", str(MACHINE), "--speed-rpm", "1"],
    ["buildup", W, "--connection", "series", "--speed-rpm", "100000"],
]


@pytest.mark.parametrize("argv", EXTREMES, ids=lambda a: " ".join(a[2:])[:60])
def test_extreme_accepted_values_leave_stderr_empty(capsys, argv):
    """Issue 8 item 13: values at the edges of what is accepted answer with no
    RuntimeWarning (nor anything else) on standard error."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert cli.main(argv + ["--json"]) == 0
    assert [str(w.message) for w in caught] == []
    assert capsys.readouterr().err == ""


def test_table_prints_a_negative_zero_as_zero():
    """Regression: a reversed point's series field current printed as "-0" (IEEE negative zero)."""
    from supplycfg.cli import table
    out = table([{"series_field_current_a": -0.0, "generated_emf_v": -36.74}],
                ["series_field_current_a", "generated_emf_v"])
    cells = out.splitlines()[2].split()
    assert cells == ["0", "-36.74"]


@pytest.mark.parametrize("conn, head", [("separate", "separate field current [A]"), ("shunt", "shunt field current [A]")])
def test_curve_table_names_the_field_it_has(capsys, conn, head):
    """Regression: `curve --connection separate` headed its field column "shunt field current"."""
    assert cli.main(["curve", str(MACHINE), "--connection", conn, "--rheostat-ohm", "30", "--points", "3"]) == 0
    out = capsys.readouterr().out
    assert head in out
    assert ("shunt field current" in out) == (conn == "shunt")


def test_rheostat_on_a_machine_without_one(capsys):
    """A rheostat value for a machine whose file gives none (the demo booster): the one line says so, not
    "allowed: 0 to 0 ohm"."""
    booster = ROOT / "profiles" / "machines" / "feeder-booster.toml"
    assert cli.main(["curve", str(booster), "--connection", "shunt", "--rheostat-ohm", "20"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "--rheostat-ohm: is 20; allowed: 0 only (the machine file gives no field rheostat" in err


@pytest.mark.parametrize("machine, rheostat, cure", [
    ("charging-set", "130", "set the rheostat below 100 ohm"),
    ("feeder-booster", "0", "the shunt winding alone is above it, so only a speed above 1481.5 rpm builds it up"),
])
def test_buildup_past_critical_says_what_helps(capsys, machine, rheostat, cure):
    """Regression: past the critical field resistance `buildup` said "lower the rheostat" with the rheostat
    at 0, and gave the point near the residual as the "no-load voltage once built up (or flashed)". The cure
    is the rheostat below R_crit - R_winding (here 170 - 70 ohm), or, with the winding alone past critical,
    a speed above critical (Theraja Vol II ch. 28); the voltage is said to stay near the residual."""
    path = ROOT / "profiles" / "machines" / f"{machine}.toml"
    assert cli.main(["buildup", str(path), "--rheostat-ohm", rheostat]) == 0
    out = capsys.readouterr().out
    assert cure in out
    assert "held up by the residual magnetism alone" in out and "flashing the field does not help" in out
    assert "once built up (or flashed)" not in out


def test_negative_regulation_is_explained(capsys):
    """An over-compounded machine's voltage rises with load: its regulation to full load, (V_nl - V_fl) / V_fl,
    is negative (-0.7 % on the charging set, short shunt, 24 turns, 30 ohm), and the line says what that means;
    a shunt curve's is positive and says nothing more. A series machine gives no regulation figure: with no
    load current it gives only its residual voltage (the 4 V of the booster's curve), so a figure from there
    (-94.6 % on the booster, -96 % on the charging set) says nothing. (Regression: those figures were printed.)"""
    assert cli.main(["curve", str(MACHINE), "--connection", "short-shunt-cumulative", "--series-turns", "24",
                     "--rheostat-ohm", "30", "--points", "3"]) == 0
    assert "(negative: the voltage rises with load)" in capsys.readouterr().out
    assert cli.main(["curve", str(MACHINE), "--connection", "series", "--series-turns", "24", "--points", "3"]) == 0
    out = capsys.readouterr().out
    assert "no regulation figure for a series connection" in out and "%" not in out.splitlines()[1]
    assert cli.main(["curve", str(MACHINE), "--connection", "series", "--series-turns", "24", "--points", "3",
                     "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["regulation_percent"] is None
    assert cli.main(["curve", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "30", "--points", "3"]) == 0
    assert "negative" not in capsys.readouterr().out


def test_point_does_not_deny_the_point_it_sits_at(capsys):
    """Regression (physics reviewer): `point` on a resistor printed 'no stable operating point of normal
    polarity on this load' under the point marked 'sits here'."""
    from supplycfg.cli import main
    root = Path(__file__).resolve().parents[1]
    assert main(["point", str(root / "profiles" / "machines" / "lighting-set.toml"), "--connection", "shunt",
                 "--rheostat-ohm", "20", "--load-ohm", "5"]) == 0
    out = capsys.readouterr().out
    assert "sits here" in out and "no stable operating point" not in out


def test_series_buildup_states_its_setting_and_the_critical_load_resistance(capsys):
    """Regression (physics reviewer): series `buildup` gave only the circuit's critical resistance and no
    speed or temperature. The critical load resistance is the circuit's less the armature and series field
    at the temperature (derived: the closed circuit is their sum with the load)."""
    from supplycfg.cli import main
    from supplycfg.circuit import Setting, build_circuit
    from supplycfg.machine import load_machine
    path = Path(__file__).resolve().parents[1] / "profiles" / "machines" / "welding-set.toml"
    assert main(["buildup", str(path), "--connection", "series", "--series-turns", "12",
                 "--winding-temperature-c", "20", "--json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["setting"]["winding_temperature_c"] == 20.0 and res["setting"]["series_turns"] == 12.0
    circ = build_circuit(load_machine(path), [Setting("series", series_turns=12.0, winding_temperature_c=20.0)])
    assert abs(res["critical_load_resistance_ohm"]
               - (res["critical_circuit_resistance_ohm"] - circ.ra[0] - circ.rbr[0])) < 1e-12


def test_curve_says_where_it_leaves_the_test_data_and_which_way_it_errs(capsys):
    """Regression (physics reviewer): the series booster's curve ran to 3200 A and 1184 kW on a field 7.7
    times its last test point with only 'some points needed the open-circuit curve beyond its last
    measured point'. The note now names the first such point and says the figures are overstated (the
    last chord carried on; real iron saturates further: any magnetisation curve, from memory)."""
    from supplycfg.cli import main
    path = Path(__file__).resolve().parents[1] / "profiles" / "machines" / "feeder-booster.toml"
    assert main(["curve", str(path), "--connection", "series", "--series-turns", "12", "--points", "5"]) == 0
    out = capsys.readouterr().out
    assert "(the first at 800 A of load current)" in out and "overstated" in out


def test_fuzzed_command_lines_name_the_option_and_the_reason(capsys):
    """Regressions (fuzz review): `buildup` named a bad option by its field (setting: rheostat_ohm), a
    negative battery EMF (a bank connected the other way round) was taken as a load, and a load line with no
    operating point gave no reason in JSON."""
    from supplycfg.cli import main
    assert main(["buildup", str(MACHINE), "--rheostat-ohm", "-1"]) == 2
    assert "command line: --rheostat-ohm:" in capsys.readouterr().err
    assert main(["buildup", str(MACHINE), "--connection", "series", "--series-turns", "5"]) == 2
    assert "command line: --series-turns:" in capsys.readouterr().err
    assert main(["point", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "30", "--battery-emf-v", "-125",
                 "--battery-ohm", "0.06"]) == 2
    assert "--battery-emf-v" in capsys.readouterr().err
    assert main(["point", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "30", "--line-v0", "-1e5",
                 "--line-slope-ohm", "1e-9", "--json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["operating_points"] == [] and "does not meet this load" in res["message"]


def test_every_json_output_carries_the_standing_notice(capsys):
    """Safety review: curve, point and buildup JSON had no notice while search, charge, size and fleet did,
    and the README says every command carries it."""
    from supplycfg import STANDING_NOTICE
    from supplycfg.cli import main
    for argv in (["curve", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "30", "--points", "3"],
                 ["point", str(MACHINE), "--connection", "shunt", "--rheostat-ohm", "30", "--load-ohm", "5"],
                 ["buildup", str(MACHINE), "--rheostat-ohm", "30"],
                 ["buildup", str(MACHINE), "--connection", "series", "--series-turns", "24"]):
        assert main(argv + ["--json"]) == 0
        assert json.loads(capsys.readouterr().out)["notice"] == STANDING_NOTICE, argv[0]
