"""The welding job as a welder meets it at the set: polarity, the dial's readings, cautions, the profile.

One regression test per defect a welding-shop review found; each names where
what a welder expects comes from.
"""

import json

import numpy as np
from numpy.testing import assert_allclose
from pathlib import Path

import pytest

from supplycfg.circuit import Setting
from supplycfg.cautions import ENGINE_OVERLOAD_FACTOR, drive_overload_cautions
from supplycfg.cli import main
from supplycfg.errors import InputError
from supplycfg.jobs import welding
from supplycfg.machine import load_machine
from supplycfg.profile import load_profile
from supplycfg.report import (DIAL_SETTING_WORDS, checklist_rows, dial_rows, ranking_line, sheet_markdown,
                              wiring_svg_for)
from supplycfg.search import search, search_text

try:
    from .builders import profile_variant
except ImportError:
    from builders import profile_variant

ROOT = Path(__file__).resolve().parents[1]
MACHINE = ROOT / "profiles" / "machines" / "welding-set.toml"
PROFILE = ROOT / "profiles" / "loads" / "welding.toml"


def variant(tmp_path, name, *pairs):
    """The demo welding profile with lines replaced (old, new), written to ``tmp_path``."""
    return profile_variant("welding", tmp_path, name, *pairs)


TIG = (('process = "manual-metal-arc"', 'process = "tungsten-inert-gas"'),
       ("current_range_a = [60, 180]", "current_range_a = [20, 150]"),
       ("min_no_load_voltage_v = 50 ", "# min_no_load_voltage_v = 50 "))
SITE_70 = (('environment = "normal"', 'environment = "increased-shock-hazard"'),
           ("max_no_load_voltage_v = 100", "max_no_load_voltage_v = 70"))


@pytest.fixture(scope="module")
def demo():
    return search(load_machine(MACHINE), load_profile(PROFILE))


def test_tig_runs_electrode_negative(tmp_path):
    """DC TIG runs the tungsten negative: on + about two thirds of the arc's heat goes into it and it melts
    (welding handbooks, from memory; common practice). The wiring steps, the drawing and the polarity check
    say so; manual metal arc keeps electrode positive or as the electrode's maker asks. (Regression: the
    TIG sheet put the electrode lead on +.)"""
    res = search(load_machine(MACHINE), load_profile(variant(tmp_path, "tig.toml", *TIG)))
    md = sheet_markdown(res)
    assert "electrode negative" in md and "lead to the electrode; return lead from the work" not in md
    polarity = dict(checklist_rows(res, res.options[0]))["Polarity checked with a voltmeter before closing onto the load"]
    assert polarity.startswith("torch (tungsten) lead on −")
    assert "electrode −" in wiring_svg_for(res, res.options[0])
    assert welding.welding_process("tungsten-inert-gas").electrode_polarity == "−"


def test_manual_arc_keeps_electrode_positive(demo):
    """Manual metal arc: electrode on + (or as the electrode's maker asks), unchanged."""
    md = sheet_markdown(demo)
    assert "lead to the electrode; return lead from the work to A2." in md
    assert "electrode +" in wiring_svg_for(demo, demo.options[0])


@pytest.mark.parametrize("command, extra", [
    ("curve", ["--winding-temperature-c", "20"]),
    ("point", ["--line-v0", "20", "--line-slope-ohm", "0.06"]),
])
def test_curve_and_point_apply_the_welding_no_load_rules(tmp_path, capsys, command, extra):
    """With a welding profile, `curve` and `point` check the setting's no-load voltage against the site's
    limit (here 70 V for a damp or confined place) as `search` does, and give the increased-hazard
    precautions (IEC 60974-1, seen; the limit is the profile's). (Regression: 86.6 V printed with no
    caution.)"""
    prof = variant(tmp_path, "site70.toml", *SITE_70)
    assert main([command, str(MACHINE), "--connection", "separate-differential", "--series-turns", "3",
                 "--rheostat-ohm", "10.3", "--profile", str(prof), *extra, "--json"]) == 0
    rules = {c["rule"]: c["severity"] for c in json.loads(capsys.readouterr().out)["cautions"]}
    assert rules.get("welding-no-load-local-limit") == "stop"
    assert rules.get("welding-increased-hazard") == "warn"


def test_no_load_below_the_strike_voltage_is_said(capsys):
    """A weak field that leaves the no-load voltage under the 50 V the electrode needs to strike gets a
    warning (electrode makers' practice, from memory)."""
    assert main(["curve", str(MACHINE), "--connection", "separate-differential", "--series-turns", "3",
                 "--rheostat-ohm", "60", "--profile", str(PROFILE), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["no_load_voltage_v"] < 50
    assert "welding-no-load-strike" in {c["rule"] for c in d["cautions"]}


def test_dial_is_set_by_the_field_ammeter(demo):
    """A set is set cold at the start of a shift: the dial's row is set by the field ammeter, whose reading
    gives the row's current whatever the winding temperature; the ohms are only a start (set by ohms on
    a cold machine, the 180 A row gives 208 A). The stuck-electrode column is the cold worst case."""
    o = demo.options[0]
    row = dial_rows(o)[-1]
    assert row[3].startswith("reads ") and "(about " in row[3]
    text = search_text(demo)
    assert "field ammeter reads the row's value at no load, whatever the winding temperature" in text
    assert "stuck electrode cold [A]" in text
    assert DIAL_SETTING_WORDS in sheet_markdown(demo)
    stuck = dict(checklist_rows(demo, o))["Short-circuit current (electrode stuck), at the top setting"]
    assert stuck.endswith("with cold windings (less when warm)")


def test_cold_field_set_by_the_ammeter_gives_the_dial_current(demo):
    """The physics behind setting by the ammeter: a separately excited field at the hot reading, with the
    windings cold, gives the row's current within 3 % on the conventional load line (IEC 60974-1:
    20 V + 0.04 V/A, plus the 0.02 ohm leads)."""
    from supplycfg.circuit import Load, operating_points
    o = demo.options[0]
    top = o.extras["dial"][-1]
    hot_field = top["readings"]["field_current_a"]["hot"]
    m = load_machine(MACHINE)
    st = Setting(o.setting.connection, series_turns=top["series_turns"], diverter_ohm=top["diverter_ohm"],
                 field_current_a=hot_field, speed_rpm=o.setting.speed_rpm, winding_temperature_c=20.0)
    pt = operating_points(m, st, Load.line(20.0, 0.04 + 0.02), demo.profile.drive).normal
    assert pt["load_current_a"] == pytest.approx(top["current_a"], rel=0.03)


def test_ranking_line_counts_diverter_swaps_as_the_table_does(tmp_path):
    """The ranking line and the table count the same stops to re-link the machine: tap and diverter
    changes. (Regression: '0 tap changes' in the line against 2 in the table.)"""
    res = search(load_machine(MACHINE), load_profile(variant(tmp_path, "site70.toml", *SITE_70)))
    o = res.options[0]
    n = int(o.figures["tap_changes"])
    assert n > 0
    assert f"{n} tap or diverter change" in ranking_line(res, o)
    assert "welding-tap-change" in {c.rule for c in o.cautions}


@pytest.mark.parametrize("kind, share, severity", [
    ("engine", 1.05, "warn"), ("engine", 1.2, "stop"), ("motor", 1.4, "warn"), ("engine", 0.99, None)])
def test_engine_past_its_overload_stalls(kind, share, severity):
    """An engine gives at most 110 % of its rating, for an hour in twelve (ISO 3046-1 overload power, from
    memory); past it the governor is at full fuel and it bogs down: a stop. A motor past its rating runs
    hot (a warning; its breakdown torque is a stop of its own). (Regression: an engine at 144 % printed as
    usable with a full dial.)"""
    from supplycfg.drive import Drive
    d = Drive(kind=kind, rated_power_kw=10.0, **({"no_load_speed_rpm": 3000.0, "droop_percent": 5.0}
                                                 if kind == "engine" else
                                                 {"synchronous_speed_rpm": 1500.0, "rated_slip_percent": 3.5}))
    got = drive_overload_cautions(d, 10.0 * share)
    assert [c.severity for c in got] == ([severity] if severity else [])
    assert ENGINE_OVERLOAD_FACTOR == pytest.approx(1.10)


def test_site_limit_below_the_strike_voltage_is_refused(tmp_path):
    """A site limit at or below the voltage the arc needs to strike leaves no setting: refused in one
    line naming the key and what is allowed."""
    bad = variant(tmp_path, "low.toml", ("max_no_load_voltage_v = 100", "max_no_load_voltage_v = 40"))
    with pytest.raises(InputError, match=r"max_no_load_voltage_v: is 40; allowed: above 50 V"):
        load_profile(bad)


def test_long_leads_get_a_note(tmp_path):
    """Leads of 0.1 ohm drop 18 V at 180 A: welding-cable charts size them for about 4 V (common
    practice, from memory)."""
    res = search(load_machine(MACHINE),
                 load_profile(variant(tmp_path, "leads.toml", ("cable_resistance_ohm = 0.02", "cable_resistance_ohm = 0.1"))))
    c = {c.rule: c for c in res.cautions}["welding-lead-drop"]
    assert c.figures["lead_drop_v"] == pytest.approx(18.0)


def test_demo_leads_get_no_note(demo):
    """The demo's 0.02 ohm leads drop 3.6 V at 180 A: inside the usual 4 V."""
    assert "welding-lead-drop" not in {c.rule for c in demo.cautions}


def test_fleet_gives_no_objective_to_a_machine_that_cannot_do_the_job():
    """A fleet row whose best option misses the job carries no objective: '0 tap changes' on a machine that
    cannot weld read as the best score. (Regression: the welding job's rows showed 0.0, the battery's null.)"""
    from supplycfg.fleet import fleet_search
    res = fleet_search(ROOT / "profiles" / "machines", load_profile(PROFILE))
    rows = [r for r in res.machines if r.error is None]
    assert any(r.feasible for r in rows) and any(not r.feasible for r in rows)
    for r in rows:
        assert (r.objective is not None) == r.feasible


def test_a_stuck_electrode_is_not_held_to_the_continuous_rating(demo):
    """A stuck electrode is a short of a moment: it is held to the machine's short-time limit (a limit of the
    job and the peak stop), not to its continuous rating. While welding, on the dial's rows as set by the
    field ammeter, the demo's best option carries at most its 180 A top row, inside the 200 A rating: no
    continuous-rating warning. (Regression: 'Armature current reaches 269 A, above its continuous rating
    200 A' on the recommended setting, from the stuck-electrode current.)"""
    o = demo.options[0]
    assert o.figures["max_armature_current_a"] == pytest.approx(o.figures["stuck_electrode_current_a"])
    assert o.figures["max_working_armature_current_a"] == pytest.approx(180.0, rel=0.03)
    assert "armature-rating" not in {c.rule for c in o.cautions}
    assert o.margins["stuck_electrode_current"]["fraction"] > 0


def test_drive_is_sized_for_the_dial_as_set_by_the_field_ammeter(tmp_path):
    """The dial is set by the field ammeter whatever the winding temperature, so a cold set at the
    250 A row gives about 250 A (the separate field holds its current), not the 300 A the rheostat's
    hot ohms would give it cold. A reviewer found `size` asking 14.5 kW for a job whose heaviest row
    needs about 11.3 kW (250 A at 35 V on the conventional load line over ~77 % efficiency: IEC 60974-1
    load line, closed-form power balance)."""
    prof = variant(tmp_path, "wide.toml", ("current_range_a = [60, 180]", "current_range_a = [30, 250]"))
    res = search(load_machine(MACHINE), load_profile(prof))
    f = res.options[0].figures
    assert f["high_end_current_envelope_max_a"] <= 250 * 1.03
    # 250 A x 35 V at the machine (the 0.02 ohm leads' drop inside it): an efficiency of 70-85 % for a
    # 10 kW-class DC generator (from memory) puts the shaft at 10.3-12.5 kW; the rheostat's ohms gave 14.5
    assert 250 * 35.0 / 1e3 / 0.85 <= f["max_shaft_power_kw"] <= 250 * 35.0 / 1e3 / 0.70


def test_a_self_excited_dial_holds_its_no_load_field_current_at_every_corner(tmp_path):
    """The dial is set by the field ammeter at no load; on a self-excited set that fixes the no-load field
    current, and the rheostat giving it follows in closed form (at no load the field current fixes the net
    mmf, so V = s E(x) - I (Ra + Rbr) - brush drop and the field circuit is V / I: derived from the circuit
    equations, design note). At the corner it was set at, the rheostat comes back exactly (the welding set
    without its exciter, self-excited)."""
    from supplycfg.circuit import no_load_voltages
    from supplycfg.envelope import build_space, expand_candidates
    text = MACHINE.read_text(encoding="utf-8")
    line = next(x for x in text.splitlines() if x.startswith("excitation_voltage_v"))
    noexc = tmp_path / "noexc.toml"
    noexc.write_text(text.replace(line + "\n", ""), encoding="utf-8")
    m, p = load_machine(noexc), load_profile(PROFILE)
    sp = build_space(m, p)
    idx = np.array([i for i, b in enumerate(sp.bases) if b[3] == "rheostat"][:6])
    nom = welding.dial_corners(sp)[0]
    ref, _ = expand_candidates(sp, idx, np.full(idx.size, 25.0), np.full(idx.size, nom))
    back = welding.rheostat_holding_no_load_field(ref, no_load_voltages(ref) / ref.rf)
    assert np.allclose(back, 25.0, rtol=1e-9)


def test_second_welding_review_regressions(tmp_path):
    """Second welding review: (1) on an exciter of fixed voltage a dial set cold drifts about a tenth low as the
    field warms (48 V over 14.8 ohm cold against 18 ohm hot: Ohm's law with copper's 234.5 K law), so the
    instruction says to read the ammeter again once warm; (2) the checklist's no-load line gave the dial's
    two ends while a tap change mid-range put the highest no-load voltage (TIG, 90 A row) inside it; (3) a
    machine without its exciter said nothing of the supply that would let 13 settings meet the job."""
    from supplycfg.report import DIAL_SETTING_SHORT
    assert "again once the set is warm" in DIAL_SETTING_WORDS and "again once the set is warm" in DIAL_SETTING_SHORT
    tig = variant(tmp_path, "tig.toml", *TIG)
    res = search(load_machine(MACHINE), load_profile(tig))
    o = res.options[0]
    top = max(r["no_load_voltage_v"] for r in o.extras["dial"])
    line = dict(checklist_rows(res, o))["No-load voltage at speed, load off"]
    assert f"{top:.4g} V" in line
    text = MACHINE.read_text(encoding="utf-8")
    line_ev = next(x for x in text.splitlines() if x.startswith("excitation_voltage_v"))
    noexc = tmp_path / "noexc.toml"
    noexc.write_text(text.replace(line_ev + "\n", ""), encoding="utf-8")
    notes = search(load_machine(noexc), load_profile(PROFILE)).notes
    assert any(n.startswith("the machine file gives no exciter") and "a setting meets the job" in n for n in notes)


def test_a_welding_dial_with_a_row_on_a_knife_edge_is_marked(tmp_path):
    """Second welding review: welding options carry their readings per dial row, so the knife-edge mark never
    applied; one 60 A row held between a 51.5 V strike minimum and a 53.65 V site rule left a rheostat window
    of 0.16 ohm, 0.26 % of the 60 ohm rheostat's travel (a stud rheostat's step is about 1 %: common
    practice), and was 'fit yes'."""
    prof = variant(tmp_path, "ke3.toml", ("current_range_a = [60, 180]", "current_range_a = [60, 60]"),
                   ("max_no_load_voltage_v = 100 ", "max_no_load_voltage_v = 53.65 "),
                   ("min_no_load_voltage_v = 50 ", "min_no_load_voltage_v = 51.5 "))
    res = search(load_machine(MACHINE), load_profile(prof))
    assert res.feasible and res.feasible[0].knife_edge
    assert "knife-edge  separately excited" in search_text(res)


def test_the_set_says_to_strike_only_at_full_speed_when_idle_will_not_strike():
    """Second welding review: on automatic idle the demo set gives about 31 V, below the 50 V a covered
    electrode needs to strike (common practice), and only a general idle note said so. Each option whose
    idle no-load voltage is below the job's strike voltage carries a note to strike at full speed."""
    res = search(load_machine(MACHINE), load_profile(PROFILE))
    c = [x for x in res.options[0].cautions if x.rule == "welding-strike-at-idle"]
    assert c and "before striking" in c[0].message


def test_long_leads_are_not_blamed_on_the_machines_rated_voltage(tmp_path):
    """Second welding review: with 0.1 ohm leads the set works at 45 V loaded, and the rated-voltage rule
    (IEC 60034-1 zone A, recalled) said 'use a machine rated for the job's voltage'; the cause is the 18 V
    the leads drop, which the lead note names with its cure. A welding set leaves that machine rule out."""
    prof = variant(tmp_path, "leads.toml", ("cable_resistance_ohm = 0.02 ", "cable_resistance_ohm = 0.1 "))
    res = search(load_machine(MACHINE), load_profile(prof))
    rules = {c.rule for o in res.options for c in o.cautions} | {c.rule for c in res.cautions}
    assert "over-voltage" not in rules and "welding-lead-drop" in rules


def test_a_broken_no_load_limit_is_not_written_as_met(tmp_path):
    """Safety review: with a 60 V site rule the checklist's Expected column read 'mean 65.35 V ≤ 60 V', a
    false inequality on the limit that protects against shock (US 29 CFR 1910.254(b)(3) kind of rule; IEC
    60974-1). A broken limit is said as broken."""
    from supplycfg.report import no_load_limit_text
    prof = variant(tmp_path, "site60.toml", ("max_no_load_voltage_v = 100 ", "max_no_load_voltage_v = 60 "))
    o = search(load_machine(MACHINE), load_profile(prof)).options[0]
    text = no_load_limit_text(o.margins)
    assert "ABOVE the 60 V limit" in text and "≤ 60 V" not in text


def test_an_undersized_engine_says_how_far_up_the_dial_it_carries(tmp_path):
    """A 7 kW engine on a dial that needs 7.1 kW at 180 A: the welder is told up to about which current
    the engine carries the dial steadily (and, for 5 kW, up to which its 110 % short overload reaches;
    ISO 3046-1 overload, from memory); the estimate is linear in the output on the conventional
    load line between the dial's two ends (closed form checked below)."""
    m = load_machine(MACHINE)
    notes = {}
    for kw in (5, 7, 10):
        p = load_profile(variant(tmp_path, f"w{kw}.toml", ("rated_power_kw = 10 ", f"rated_power_kw = {kw} ")))
        res = search(m, p)
        notes[kw] = [c for c in res.options[0].cautions if c.rule == "welding-drive-dial"]
    assert not notes[10]
    top7 = notes[7][0].figures["drive_carries_up_to_a"]
    assert 170 < top7 < 180 and "above that only within its short overload" in notes[7][0].message
    top5 = notes[5][0].figures["drive_carries_up_to_a"]
    assert 120 < top5 < top7 and "it bogs down" in notes[5][0].message
    # closed form: shaft power 1 kW at 60 A and 7 kW at 180 A, a 4 kW drive; the line is U = 20 + 0.04 I
    # plus the leads, so the output at I is I (20 + (0.04 + Rc) I) and 4 kW is half-way in output
    p = load_profile(variant(tmp_path, "w4.toml", ("rated_power_kw = 10 ", "rated_power_kw = 4 ")))
    job = p.welding
    rc = job.cable_resistance_ohm
    lo, hi = job.current_range_a

    def out(i):
        return i * (20 + (0.04 + rc) * i)

    want = out(lo) + 0.5 * (out(hi) - out(lo))
    k = 0.04 + rc
    i_half = (-20 + np.sqrt(400 + 4 * k * want)) / (2 * k)
    got = welding.drive_carries_up_to_a(p, {"low_end_shaft_power_kw": 1.0, "high_end_shaft_power_kw": 7.0})
    assert_allclose(got, i_half, rtol=1e-3)


def test_curve_with_a_welding_profile_stops_a_stuck_electrode_past_the_peak_limit(capsys):
    """With a welding set a short through the leads (a stuck electrode) happens every day: `curve` with a
    welding profile holds it to the short-time limit as the search does (a stop), where before it gave
    only the protection note of a short at the terminals. The stuck point is where the curve meets
    V = R_leads x I (closed form on a straight line checked too)."""
    base = ["curve", str(MACHINE), "--profile", str(ROOT / "profiles" / "loads" / "welding.toml"),
            "--connection", "separate-differential", "--field-current-a", "1.7", "--json"]
    assert main(base + ["--series-turns", "0"]) == 0
    got = json.loads(capsys.readouterr().out)
    stop = [c for c in got["cautions"] if c["rule"] == "welding-stuck-electrode"]
    assert len(stop) == 1 and stop[0]["severity"] == "stop"
    assert stop[0]["figures"]["stuck_electrode_armature_current_a"] > 450
    assert main(base + ["--series-turns", "3"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert not [c for c in got["cautions"] if c["rule"] == "welding-stuck-electrode"]
    # a straight curve V = 80 - 0.2 I meets V = 0.05 I at I = 320 A
    il = np.linspace(0, 400, 9)
    found = welding.stuck_electrode_on_curve(il, 80 - 0.2 * il, il + 2, 0.05)
    assert_allclose(found[:2], (320.0, 322.0), rtol=1e-12)
    assert found[2]


def test_a_flat_process_dial_says_the_wire_feed_sets_the_current(tmp_path):
    """On a flat (constant-voltage) source the wire feed sets the current and the field the voltage (common
    practice for metal inert gas): the dial's words say so for that process, in the search text, the
    Markdown sheet and the printed card, and not for manual metal arc."""
    from supplycfg.report import FLAT_DIAL_WORDS, sheet_html
    mig = load_profile(variant(tmp_path, "mig.toml", ('process = "manual-metal-arc" ', 'process = "metal-inert-gas" ')))
    m = load_machine(MACHINE)
    res = search(m, mig)
    assert res.options and dial_rows(res.options[0])
    assert FLAT_DIAL_WORDS in search_text(res) and FLAT_DIAL_WORDS in sheet_markdown(res)
    import html
    assert html.escape(FLAT_DIAL_WORDS) in " ".join(sheet_html(res, charts=False).split())
    mma = search(m, load_profile(ROOT / "profiles" / "loads" / "welding.toml"))
    assert FLAT_DIAL_WORDS not in search_text(mma) and FLAT_DIAL_WORDS not in sheet_markdown(mma)


def test_a_site_limit_the_dial_cannot_keep_says_what_would(tmp_path):
    """A 60 V site limit on the welding demo: the dial's top rows need about 65 V, so every option stops; the
    stop says where the voltage is highest and what would keep under it, and its source carries no project
    marker. (Regression: 'No-load voltage 65.4 V is above the 60 V limit set for this job.' alone, and
    '..., seen)' in the source.)"""
    from supplycfg.profile import load_profile
    from supplycfg.machine import load_machine
    from supplycfg.search import search, search_text
    root = Path(__file__).resolve().parents[1]
    text = (root / "profiles" / "loads" / "welding.toml").read_text().replace(
        "max_no_load_voltage_v = 100 ", "max_no_load_voltage_v = 60 ")
    (tmp_path / "low.toml").write_text(text)
    res = search(load_machine(root / "profiles" / "machines" / "welding-set.toml"), load_profile(tmp_path / "low.toml"))
    c = {c.rule: c for c in res.options[0].cautions}["welding-no-load-local-limit"]
    assert c.severity == "stop" and "narrow the current range" in c.message
    assert ", seen)" not in search_text(res)
