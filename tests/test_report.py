"""The setting sheet: content, escaping, page 1 in print, the files it writes."""

import copy
import dataclasses
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from supplycfg import STANDING_NOTICE, __version__, report
from supplycfg.cli import main as cli_main
from supplycfg.errors import InputError
from supplycfg.profile import load_profile
from supplycfg.machine import load_machine
from supplycfg.search import search, search_text
from supplycfg.wording import connection_words

DEMO = Path(__file__).resolve().parent.parent / "profiles"
PAIRS = {"battery": ("charging-set", "battery-charging"), "welding": ("welding-set", "welding"),
         "lighting": ("lighting-set", "lighting"), "booster": ("feeder-booster", "booster")}
HOSTILE = "<script>alert(1)</script>"


def files(kind):
    m, p = PAIRS[kind]
    return DEMO / "machines" / f"{m}.toml", DEMO / "loads" / f"{p}.toml"


@pytest.fixture(scope="module")
def results():
    out = {}
    for kind in PAIRS:
        mp, pp = files(kind)
        out[kind] = search(load_machine(mp), load_profile(pp))
    return out


@pytest.mark.parametrize("kind", list(PAIRS))
def test_markdown_sheet_holds_setting_cautions_notice(results, kind):
    """Machine, job, setting, figures, margins, cautions with their basis, notice, version and date."""
    res = results[kind]
    opt = res.options[0]
    md = report.sheet_markdown(res, date="2031-05-04")
    assert res.machine.label in md and res.profile.label in md
    assert f"| Connection | {connection_words(opt.setting.connection)} |" in md
    assert "## What to expect" in md and "## Limits and margins" in md
    for c in list(opt.cautions) + list(res.cautions):
        assert report.md_esc(c.message) in md
        assert report.md_esc(report.source_text(c.basis)) in md
    assert "(seen)" not in md and "from memory" not in md
    assert report.md_esc(STANDING_NOTICE) in md
    assert f"supplycfg {__version__} on 2031-05-04" in md
    if kind == "welding":
        assert "Welding dial" in md or "each end of the welding range" in md


def test_html_sheet_with_charts(results):
    """The printable page carries the charts as inline SVG and prints on A4."""
    res = results["battery"]
    html = report.sheet_html(res, date="2031-05-04")
    assert html.startswith("<!DOCTYPE html>")
    assert html.count("<svg") >= 2
    assert "<?xml" not in html
    assert "@page" in html and "@media print" in html
    assert STANDING_NOTICE.replace("'", "&#x27;") in html
    assert connection_words(res.options[0].setting.connection) in html
    assert "(seen)" not in html and "from memory" not in html and "Source: " in html


def test_html_sheet_option_rank(results):
    res = results["battery"]
    html = report.sheet_html(res, rank=2, charts=False)
    assert "option 2 of" in html
    with pytest.raises(InputError, match="--option"):
        report.sheet_html(res, rank=len(res.options) + 1, charts=False)


def test_labels_are_escaped(results):
    """A label like <script> from a file or form prints as text in both sheets (issue 5).
    Regression, issue 8 item 9."""
    res = results["welding"]
    m = dataclasses.replace(res.machine, label=HOSTILE)
    p = dataclasses.replace(res.profile, label=HOSTILE + " & <b>bold</b>")
    bad = dataclasses.replace(res, machine=m, profile=p)
    html = report.sheet_html(bad)
    assert "<script" not in html.lower()
    assert "<b>bold" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    md = report.sheet_markdown(bad)
    assert "<script" not in md.lower()
    assert "&lt;script&gt;" in md


def test_margin_rows_read_the_search_margins(results):
    """Every margin of the search shows once; a feasible option is inside each, a miss breaks one."""
    for res in results.values():
        for opt in res.options[:8]:
            rows = report.margin_rows(opt)
            assert len(rows) == len(opt.margins)
            status = [r[5] for r in rows]
            broken = {n for n, m in opt.margins.items() if m["fraction"] is None or m["fraction"] < 0}
            assert status.count("broken") == len(broken)
            if opt.feasible:
                assert not broken


def test_sheet_from_files_writes_and_refuses_to_overwrite(tmp_path):
    """Markdown and HTML by the file name; an existing file is kept unless forced."""
    mp, pp = files("lighting")
    out = tmp_path / "sheet.md"
    path = report.sheet_from_files(mp, pp, out)
    text = out.read_text(encoding="utf-8")
    assert path == out and "# Setting sheet" in text
    out.write_text("mine", encoding="utf-8")
    with pytest.raises(InputError, match="exists already"):
        report.sheet_from_files(mp, pp, out)
    assert out.read_text(encoding="utf-8") == "mine"
    report.sheet_from_files(mp, pp, out, option_rank=2, force=True)
    assert "option 2 of" in out.read_text(encoding="utf-8")
    with pytest.raises(InputError, match="--output"):
        report.sheet_from_files(mp, pp, tmp_path / "sheet.pdf")
    with pytest.raises(InputError, match="--option"):
        report.sheet_from_files(mp, pp, tmp_path / "other.md", option_rank=10_000)
    assert not (tmp_path / "other.md").exists()
    assert [p.name for p in tmp_path.iterdir()] == ["sheet.md"]


def test_sheet_command(tmp_path, capsys):
    """``supplycfg sheet`` writes the HTML sheet; exit code 2 when the file exists."""
    mp, pp = files("booster")
    out = tmp_path / "booster.html"
    assert cli_main(["sheet", str(mp), str(pp), "--output", str(out)]) == 0
    assert "<svg" in out.read_text(encoding="utf-8")
    assert cli_main(["sheet", str(mp), str(pp), "--output", str(out)]) == 2
    err = capsys.readouterr().err
    assert "exists already" in err and len(err.strip().splitlines()) == 1


def test_battery_sheet_from_files_has_the_charge_run(tmp_path):
    mp, pp = files("battery")
    out = tmp_path / "charge.md"
    report.sheet_from_files(mp, pp, out)
    text = out.read_text(encoding="utf-8")
    assert "## Charge run" in text and "Stops because" in text


def test_battery_sheet_carries_the_plan_and_the_cut_out(results):
    """The battery sheet shows the plan (both stages, at the speed and winding temperature they hold at)
    and, beside the cut-out caution, the cut-out's closing voltage, cut-in speeds and standstill back-feed;
    the figures name their conditions; the run's figures are the search's (one set of figures)."""
    res = results["battery"]
    o = res.options[0]
    md = report.sheet_markdown(res, run=report.charge_run_for(res, o))
    assert "## Charge plan" in md and "1: main charge" in md and "2: finish" in md
    cond = o.extras["conditions"]["setting"]
    # on the demo's motor the speed is named as its top speed, lower under load
    assert (f"At the motor's speed under load (top speed {report.fmt(cond['speed_rpm'], 'rpm')}), "
            f"windings {cond['winding_temperature_c']:g} °C") in md
    f = o.figures
    assert f"| Machine reaches it at | {f['cut_in_speed_cold_rpm']:.0f} rpm cold, {f['cut_in_speed_hot_rpm']:.0f} rpm hot |" in md
    assert f"{f['cutout_closing_voltage_v']:.1f} V" in md
    assert (f"charging current at the start, the motor's speed under load (top speed "
            f"{report.fmt(cond['speed_rpm'], 'rpm')}), windings {cond['winding_temperature_c']:g} °C") in md
    # the hot corner is the nominal one here: its figure is said once, not twice
    rows = report.figure_rows(o)
    assert len(rows) == len(set(rows))
    assert f"| Hours to full | {report.fmt(f['hours_to_full'], 'h')} |" in md
    html = report.sheet_html(res, charts=False)
    assert "Charge plan" in html and "Reverse-current cut-out" in html
FORGED = ("Kestrel\n## Cautions\nNone raised by the rules for this setting.\n\n# Setting sheet: fake "
          "| cell | [click](https://example.invalid) *bold* `code` $x$ :red[red] www.example.invalid "
          "\u202egnp.exe\u200b\u2066\r\u2028end")


def test_a_label_cannot_forge_the_markdown_sheet(results):
    """A label with line breaks, headings, a table bar, a link, maths, a right-to-left override and zero-width
    characters stays one line of inert text (regression, issue 8 item 9)."""
    res = results["battery"]
    bad = dataclasses.replace(res, machine=dataclasses.replace(res.machine, label=FORGED),
                              profile=dataclasses.replace(res.profile, label=FORGED))
    md = report.sheet_markdown(bad, date="2031-05-04")
    headings = [ln for ln in md.splitlines() if ln.startswith("#")]
    assert headings[0].startswith(r"# Setting sheet: Kestrel\\n\#\# Cautions")
    assert sum(h == "## Cautions" for h in headings) == 1
    assert not any(h.startswith("# Setting sheet: fake") for h in headings)
    for ch in ("\u202e", "\u200b", "\u2066", "\r", "\u2028"):
        assert ch not in md
    assert "\\u202e" in md and "\\u200b" in md
    assert "](" not in md.replace("\\](", "")
    assert "\\[click\\](https\\://example.invalid)" in md
    assert "\\*bold\\*" in md and "\\`code\\`" in md and "\\$x\\$" in md and "\\:red\\[red\\]" in md
    assert "www\\.example" in md
    first = md.splitlines()[0]
    assert first.count("|") == first.count("\\|")  # no bare bar: no table cell can be opened
    table_rows = [ln for ln in md.splitlines() if ln.startswith("| Drive speed")]
    assert table_rows, "the job table is still there"


def test_a_label_cannot_forge_the_html_sheet(results):
    """HTML: the same label is text, its direction override and zero-width characters shown as escapes."""
    res = results["battery"]
    bad = dataclasses.replace(res, machine=dataclasses.replace(res.machine, label=FORGED))
    html = report.sheet_html(bad, charts=False, date="2031-05-04")
    for ch in ("\u202e", "\u200b", "\u2066", "\u2028"):
        assert ch not in html
    assert "\\u202egnp.exe" in html
    assert "<a " not in html
    assert html.count("<h1>") == 1


def test_md_data_and_md_esc():
    assert report.md_data("a|b") == "a\\|b"
    assert report.md_data("<b>&") == "&lt;b&gt;&amp;"
    assert report.md_data("two\nlines") == "two\\\\nlines"
    assert report.md_data("CS-1, ok.") == "CS-1, ok."
    assert report.md_data("see www.example.invalid or x@y.z") == "see www\\.example.invalid or x\\@y.z"
    assert report.md_esc("option 1 of 8: meets *all*") == "option 1 of 8: meets \\*all\\*"


@pytest.mark.parametrize("kind", list(PAIRS))
def test_sheet_leads_with_card_wiring_and_checklist(results, kind):
    """The HTML sheet: the card, the wiring drawing and the checklist (Expected, Measured, Initials) come before
    the figures; the checklist has the job's rows; the job table is in words with units."""
    res = results[kind]
    o = res.options[0]
    html = report.sheet_html(res, charts=False, date="2031-05-04")
    assert "@page { size: A4" in html
    card, wiring_at, check = html.index('id="setting-card"'), html.index('class="wiring"'), html.index('id="checklist"')
    later = html.index("What to expect")
    assert card < wiring_at < check < later
    assert "<th>Expected</th><th>Measured</th><th>Initials</th>" in html
    rows = [c for c, _ in report.checklist_rows(res, o)]
    for start in ("Polarity", ("Field current", "Field ammeter"), "Drive speed"):
        assert any(r.startswith(start) for r in rows), start
    # a shunt or separate field needs its discharge path; a series field (the booster) has none to open
    assert any(r.startswith("Field discharge path") for r in rows) == (o.setting.connection != "series")
    if kind == "battery":
        assert any(r.startswith("Reverse-current cut-out fitted") for r in rows)
        assert any(r.startswith("Battery-room ventilation") for r in rows)
        assert any(r.startswith("Charging current at the start") for r in rows)
    if kind == "welding":
        assert any(r.startswith("No-load voltage against the limits") for r in rows)
        assert any(r.startswith("No tap change under load") for r in rows)
    if kind != "booster":
        assert any(r.startswith("No-load voltage") for r in rows)
    assert report.ranking_line(res, o) in html.replace("&#x27;", "'")
    words = dict(report.job_rows(res.profile))
    assert "Drive speed" in words and words["Drive speed"].endswith("rpm")
    assert "drive.speed" not in html and "speed_rpm" not in html
    md = report.sheet_markdown(res, date="2031-05-04")
    assert md.index("## Wiring") < md.index("## Check at the machine") < md.index("## What to expect")
    assert "| Check | Expected | Measured | Initials |" in md


def test_card_shows_readings_bands_dial_and_plan_when_the_core_gives_them(results):
    """Meter readings with their band, the welding dial and the charge plan (issues 9 and 10's option keys) are
    shown as given, rounded to what can be set; nothing is computed."""
    res = results["welding"]
    o = copy.copy(res.options[0])
    o.readings = {"field_current_a": {"cold": 0.98765, "hot": 0.91234}, "rheostat_ohm": 48.6123,
                  "rheostat_travel_percent": 81.02}
    o.band = {"field_current_a": [0.9, 1.05], "rheostat_ohm": [40.0, 55.0]}
    o.dial = [{"current_a": 60.0 + 10 * k, "series_turns": 3.0 if k < 6 else 5.0, "diverter_ohm": None,
               "field_current_a": 0.5 + 0.02 * k, "rheostat_ohm": 50.0 - 2 * k, "no_load_voltage_v": 60.0 + k,
               "no_load_voltage_max_v": 64.0 + k, "short_circuit_current_a": 150.0 + 10 * k, "slope_v_per_a": -0.3}
              for k in range(13)]
    rows = dict(report.setting_rows(o, res.machine, res.profile))
    assert rows["Field ammeter reads"] == "0.988 A cold, 0.912 A hot; set it within 0.9 to 1.05 A"
    assert rows["Field rheostat"] == "48.6 Ω (81 % of its travel); every limit holds from 40 to 55 Ω"
    dial = report.dial_rows(o)
    assert len(dial) == 13 and dial[0][0] == "60 A" and dial[-1][1] == "5"
    assert report.objective_value(o, "welding") == (1.0, "1 tap or diverter change")
    res2 = dataclasses.replace(res, options=[o] + res.options[1:])
    html = report.sheet_html(res2, charts=False)
    assert "Welding dial" in html and "0.988 A cold" in html
    assert "Field ammeter reads" in dict(report.checklist_rows(res2, o)) or \
        any("0.988 A cold" in e for _, e in report.checklist_rows(res2, o))

    bres = results["battery"]
    b = copy.copy(bres.options[0])
    b.plan = [{"setting": {"rheostat_ohm": 30.0}, "from_h": 0.0, "to_h": 7.2, "start_current_a": 30.0,
               "end_current_a": 18.0, "end_volts_per_cell": 2.37, "ends_because": "gassing voltage reached",
               "readings": {"field_current_a": {"cold": 1.41, "hot": 1.3}}},
              {"setting": {"rheostat_ohm": 60.0}, "from_h": 7.2, "to_h": 10.1, "start_current_a": 10.0,
               "end_current_a": 9.0, "end_volts_per_cell": 2.62, "ends_because": "end state of charge reached"}]
    plan = report.card_plan_rows(b)
    assert [r[0] for r in plan] == ["1: main charge", "2: finish"]
    # stage 1 is the option's own setting, whose readings the card gives above its plan
    assert plan[0][2] == "as set above" and plan[1][2] == "rheostat 60 Ω"
    assert plan[1][4] == "end state of charge reached at 2.62 V per cell"


def _print_page_one(html, tmp_path):
    src = tmp_path / "sheet.html"
    src.write_text(html, encoding="utf-8")
    pdf = tmp_path / "sheet.pdf"
    subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                    "--disable-background-networking", "--disable-component-update", "--disable-sync",
                    f"--print-to-pdf={pdf}", "--no-pdf-header-footer", src.as_uri()],
                   capture_output=True, timeout=180, check=False)
    assert pdf.is_file() and pdf.stat().st_size > 1000, "chromium wrote no PDF"
    one = subprocess.run(["pdftotext", "-layout", "-f", "1", "-l", "1", str(pdf), "-"], capture_output=True,
                         text=True, timeout=60).stdout
    size = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, timeout=60).stdout
    return one, size


CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
needs_print = pytest.mark.skipif(not (Path(CHROMIUM).exists() and shutil.which("pdftotext") and shutil.which("pdfinfo")),
                                 reason="chromium and poppler-utils (pdftotext, pdfinfo) are needed to print")


@needs_print
@pytest.mark.parametrize("kind", ["battery", "welding"])
def test_printed_page_one_holds_the_card_and_the_checklist(results, kind, tmp_path):
    """Chromium's print to PDF: A4, and page 1 holds the setting card and the whole checklist; the figures start
    on a later page. The welding option carries a 13-row dial and the battery one a two-stage plan, as the core
    will give them."""
    res = results[kind]
    o = copy.copy(res.options[0])
    if kind == "welding":
        o.dial = [{"current_a": 60.0 + 10 * k, "series_turns": 3.0, "diverter_ohm": None, "field_current_a": 0.5,
                   "rheostat_ohm": 50.0 - 2 * k, "no_load_voltage_v": 60.0, "no_load_voltage_max_v": 64.0,
                   "short_circuit_current_a": 150.0, "slope_v_per_a": -0.3} for k in range(13)]
    else:
        o.plan = [{"from_h": 0.0, "to_h": 7.2, "start_current_a": 30.0, "end_current_a": 18.0,
                   "end_volts_per_cell": 2.37, "ends_because": "gassing voltage reached", "setting": {}},
                  {"from_h": 7.2, "to_h": 10.1, "start_current_a": 10.0, "end_current_a": 9.0,
                   "end_volts_per_cell": 2.62, "ends_because": "end state of charge reached", "setting": {}}]
    res = dataclasses.replace(res, options=[o] + res.options[1:])
    html = report.sheet_html(res, charts=False, date="2031-05-04")
    one, info = _print_page_one(html, tmp_path)
    assert re.search(r"Page size:.*\(A4\)", info), info
    text = " ".join(one.split())
    assert "Set the machine like this" in text
    assert connection_words(o.setting.connection) in text
    assert re.search(r"Check\s+Expected\s+Measured\s+Initials", text)
    for check, _ in report.checklist_rows(res, o):
        assert " ".join(check.split()[:3]) in text, check
    assert "Field discharge path fitted" in text
    assert "What to expect" not in text
    assert ("Welding dial" in text) if kind == "welding" else ("Charge plan" in text)


@needs_print
@pytest.mark.parametrize("kind", list(PAIRS))
def test_printed_page_one_of_each_demo_sheet_as_it_stands(results, kind, tmp_path):
    """The demo sheets as the core gives them (the battery's two-stage plan with its readings, hand-over and
    end-of-charge checks; the welding dial): page 1 holds the card and every row of the checklist.
    (Regression: the battery sheet's checklist moved whole to page 2 once it gained rows.)"""
    res = results[kind]
    one, info = _print_page_one(report.sheet_html(res, charts=False, date="2031-05-04"), tmp_path)
    assert re.search(r"Page size:.*\(A4\)", info), info
    text = " ".join(one.split())
    assert re.search(r"Check\s+Expected\s+Measured\s+Initials", text)
    for check, _ in report.checklist_rows(res, res.options[0]):
        assert " ".join(check.split()[:3]) in text, check
    assert "What to expect" not in text
    # (regression: the battery sheet's standing notice went alone to page 2, a page for two lines)
    assert "they come first." in text and report.cautions_pointer(res.options[0], res) in text


@pytest.mark.parametrize("kind", list(PAIRS))
def test_ranking_line_says_the_reason_the_rule_gives(results, kind):
    """Regression: every job but the battery's gave the least margins as the reason rank 1 beats rank 2, even
    where rank 1 has the smaller margin and won a tie on the simpler rig (the welding demo: 0 tap changes each,
    3 series turns against 5; the booster: no diverter). The line says what ``tie_break`` says, for rank 1
    and for every other option that meets every limit (against option 1)."""
    from supplycfg.search import tie_break
    res = results[kind]
    feasible = [o for o in res.options if o.feasible]
    assert len(feasible) >= 2
    best = feasible[0]
    for o in feasible[1:]:
        why = tie_break(best, o)
        lines = [report.ranking_line(res, o)] + ([report.ranking_line(res, best)] if o is feasible[1] else [])
        for line in lines:
            if why in report.RIG_WORDS:
                assert report.RIG_WORDS[why] in line, line
            if why != "margin":
                assert "least margin:" not in line and "tightest limit" not in line, line
        assert f"option {best.rank}" in report.ranking_line(res, o)
        if o is feasible[1]:
            first = report.ranking_line(res, best)
            assert first.startswith("Ranked first of") and f"option {o.rank}" in first
    if kind == "welding":
        assert tie_break(best, feasible[1]) == "series turns"
        assert "the simpler rig (fewer series turns in circuit)" in report.ranking_line(res, best)


def test_welding_checklist_sets_each_no_load_limit_the_right_way(results):
    """Regression: the welding checklist read "86.67 V, below 50 V", the strike minimum given as the upper
    limit. Each upper limit (site mean, IEC 60974-1's 113 V peak) is said with its own voltage and '≤', the
    strike minimum (common practice, 50 V for manual metal arc) with the lowest no-load voltage and '≥'."""
    res = results["welding"]
    o = res.options[0]
    row = dict(report.checklist_rows(res, o))["No-load voltage against the limits"]
    m = o.margins
    assert f"mean {report.fmt(m['no_load_mean_voltage']['value'], 'V')} ≤ 100 V" in row
    assert f"peak {report.fmt(m['no_load_peak_voltage']['value'], 'V')} ≤ 113 V" in row
    assert f"lowest {report.fmt(m['no_load_strike_voltage']['value'], 'V')} ≥ 50 V" in row
    assert "below 50" not in row


def test_checklist_gives_expected_values_where_the_core_has_them(results):
    """Regression: the lighting checklist asked to "note the reading" of the no-load voltage and the welding one
    of the field ammeter, though the core knows both. Lighting: the no-load voltage over the envelope (the
    figures ``no_load_voltage_min_v``/``max_v``, solved at the chosen field; cross-checked against a fresh
    :func:`supplycfg.circuit.external_characteristic` at the hot corner, 1e-3 relative for the rheostat's
    rounding to its reading). Welding: each end's no-load voltage with its current, and the dial's hot readings."""
    from dataclasses import replace as _r
    from supplycfg.circuit import external_characteristic
    res = results["lighting"]
    o = res.options[0]
    rows = dict(report.checklist_rows(res, o))
    lo, hi = o.figures["no_load_voltage_min_v"], o.figures["no_load_voltage_max_v"]
    assert rows["No-load voltage at speed, load off"] == (f"{report.fmt(lo)} to {report.fmt(hi, 'V')} over speed "
                                                        "and winding temperature")
    hot = max(res.profile.temperatures_c)
    ch = external_characteristic(res.machine, _r(o.setting, winding_temperature_c=hot), 50)
    assert_allclose(ch.no_load_voltage_v, lo, rtol=1e-3)
    res = results["welding"]
    o = res.options[0]
    rows = dict(report.checklist_rows(res, o))
    ends = o.current_settings
    assert rows["No-load voltage at speed, load off"].startswith(
        f"{report.fmt(ends[0]['no_load_voltage_v'], 'V')} at the {report.fmt(ends[0]['current_a'], 'A')} setting")
    hots = [r["readings"]["field_current_a"]["hot"] for r in o.extras["dial"]]
    assert rows["Field current on the field ammeter"] == (
        f"as the dial's row: {report.fmt(min(hots))} to {report.fmt(max(hots), 'A')} with hot windings")


def test_checklist_start_current_and_series_field_rows(results):
    """Regression: the battery checklist gave the start current at the nominal corner alone (19.93 A) while the
    cold windings drive 21.34 A, and the booster's field row said only "no shunt field". Now the start current
    with hot and cold windings (the figures of the battery job), and the current the series field carries."""
    res = results["battery"]
    o = res.options[0]
    f = o.figures
    row = dict(report.checklist_rows(res, o))["Charging current at the start"]
    assert row == (f"{report.fmt(f['start_charge_current_hot_a'], 'A')} with hot windings, "
                   f"{report.fmt(f['start_charge_current_cold_a'], 'A')} cold")
    res = results["booster"]
    o = res.options[0]
    row = dict(report.checklist_rows(res, o))["Field current on the field ammeter"]
    assert row.endswith(f"up to {report.fmt(o.figures['max_armature_current_a'], 'A')}")


def test_sheet_says_the_rule_once_and_leaves_out_figures_that_do_not_apply(results):
    """Regression: the sheet read "Ranked by: Ranking: options that ..." and listed "no-load voltage at the
    engine's idle: –" for the battery demo, whose drive is a motor (the figure is None there)."""
    res = results["battery"]
    o = res.options[0]
    assert any(v is None for v in o.figures.values())
    md = report.sheet_markdown(res, date="2031-05-04")
    html = report.sheet_html(res, charts=False, date="2031-05-04")
    assert "Ranking:" not in md and "Ranking:" not in html
    assert "**Ranked by:** Options that meet every limit first" in md
    assert all(value != "–" for _, value in report.figure_rows(o))
    assert "engine's idle" not in md


def test_polarity_check_names_the_welding_leads(results):
    """Regression: the welding checklist asked for "machine + to load +", which names no lead; the wiring puts the
    electrode on + (electrode positive), and the check says so with the electrode maker's word as the exception."""
    for kind, want in (("welding", "electrode lead on +"), ("battery", "machine + to battery +"),
                       ("lighting", "machine + to load +")):
        res = results[kind]
        rows = dict(report.checklist_rows(res, res.options[0]))
        assert rows["Polarity checked with a voltmeter before closing onto the load"].startswith(want)
    from supplycfg.wiring import wiring
    res = results["welding"]
    steps = wiring(res.machine, res.options[0].setting, "welding").steps
    assert any(step.startswith("+ line") and "to the electrode" in step for step in steps)


def test_booster_polarity_is_checked_where_a_reversed_series_field_shows(results):
    """A series booster gives only its residual voltage (4 V on the demo curve) with no line current,
    whichever way its series field is connected: a check before closing passes a reversed field that then
    bucks. The check is at the job's first load above zero (75 A of 0 to 300 A), with the voltage the
    engine gives there across the winding-temperature range. (Regression: 'booster adds to the bus
    voltage', checked before closing.)"""
    res = results["booster"]
    o = res.options[0]
    rows = dict(report.checklist_rows(res, o))
    assert "Polarity checked with a voltmeter before closing onto the load" not in rows
    text = rows["Polarity: voltmeter across the booster at a first light load"]
    at_75 = [p["terminal_voltage_v"] for p in o.drive_points if p["load_current_a"] == 75.0]
    assert len(at_75) >= 2
    assert text.startswith(f"at about 75 A on the feeder: + on the feeder side, {min(at_75):.4g} to "
                           f"{max(at_75):.4g} V")
    assert "swap the series field's leads" in text


def test_every_option_shows_its_field_as_a_meter_reading(results):
    """Regression: the page's options table showed the exact rheostat of every option after the first (30.68 Ω,
    8.199 Ω), which nobody can set. Each option's field is its meter reading, rounded as the core rounds it
    (issue 10's readings; the welding dial's low end)."""
    for kind, res in results.items():
        for o in res.options[:8]:
            text = report.field_reading_text(o)
            r = report.option_value(o, "readings")
            dial = report.option_value(o, "dial")
            if not r and dial:
                r = dial[0]["readings"]
            if r and r.get("rheostat_ohm") is not None and o.setting.connection != "series":
                assert text.startswith(f"rheostat {report.fmt(r['rheostat_ohm'], 'Ω')}"), (kind, o.rank, text)
            if o.setting.rheostat_ohm is not None and r:
                exact = report.fmt(o.setting.rheostat_ohm, "Ω")
                assert exact == report.fmt(r["rheostat_ohm"], "Ω") or exact not in text


def test_cautions_pointer_counts_in_words(results):
    """'1 warning; read it', '5 warnings and 2 notes; read them' (the page said '1 warning(s) and 0 note(s)')."""
    res = results["lighting"]
    line = report.cautions_pointer(res.options[0], res)
    n = sum(c.severity in ("warn", "note") for c in list(res.options[0].cautions) + list(res.cautions))
    assert "(s)" not in line and ("read it " in line) == (n == 1)
    res = results["battery"]
    assert "read them " in report.cautions_pointer(res.options[0], res)


def test_broken_limits_read_forwards():
    """Regression: an option with a stop caution was listed as "breaks: ..., no stop caution" (the rule's
    name read backwards). Every list of broken limits says "carries a stop caution"; the margins keep the
    rule's name. (The feeder booster on the lighting job: every option needs its field beyond the curve.)"""
    res = search(load_machine(DEMO / "machines" / "feeder-booster.toml"), load_profile(DEMO / "loads" / "lighting.toml"))
    stopped = [o for o in res.options if "stop_caution" in o.failed]
    assert stopped
    text = report.broken_limits_text(stopped[0].failed)
    assert "carries a stop caution" in text and "no stop caution" not in text
    assert "no stop caution" not in report.status_text(stopped[0])
    assert "no stop caution" not in search_text(res)


def test_drive_speed_caution_and_checklist_give_the_same_no_load_speed(tmp_path):
    """The checklist's 'load off' tachometer reading and the drive caution's speed 'with the load off'
    are one figure (a reviewer found 1445 rpm in one and 1448 rpm, the drive with nothing on its shaft,
    in the other)."""
    import re
    from supplycfg.report import sheet_from_files
    out = sheet_from_files(DEMO / "machines" / "charging-set.toml",
                           DEMO / "loads" / "battery-charging.toml", tmp_path / "s.md", None, True)
    text = Path(out).read_text(encoding="utf-8")
    row = re.search(r"Drive speed on the tachometer \(generator shaft\) \| about (\d+) rpm load off", text)
    note = re.search(r"slows with load: about (\d+) rpm at the generator with the load off", text)
    assert row and note and row.group(1) == note.group(1)


def test_html_sheet_gives_the_wiring_full_width_with_its_steps_after_page_one(results):
    """The card's drawing prints small beside the setting (labels of about 5 pt, found by a reviewer);
    the later pages repeat it full width with the wiring steps in words, which the Markdown sheet had and
    the HTML sheet lacked."""
    from supplycfg.wiring import wiring
    res = results["battery"]
    o = res.options[0]
    html = report.sheet_html(res, charts=False, date="2031-05-04")
    later = html.split('<section class="later">', 1)[1]
    assert '<div class="wiring large"' in later and "<svg" in later.split("<h2>Wiring</h2>", 1)[1][:400]
    for step in wiring(res.machine, o.setting, res.profile.kind).steps:
        assert f"<li>{report.esc(step)}</li>" in later


def test_a_near_miss_sheet_carries_what_the_search_says_would_fit(tmp_path):
    """A near miss's card is for reference only; the sheet now also says why nothing fits and what would
    (here the warm-start note: over 20-75 degC nothing fits the demo charge, at 65-75 degC four settings do),
    which the page showed and the sheet left out."""
    from supplycfg.machine import load_machine
    from supplycfg.profile import load_profile
    from supplycfg.search import NO_FIT_NOTE, search
    text = (DEMO / "loads" / "battery-charging.toml").read_text(encoding="utf-8")
    p = tmp_path / "cold.toml"
    p.write_text(text.replace("winding_temperature_range_c = [65, 75]", "winding_temperature_range_c = [20, 75]"),
                 encoding="utf-8")
    res = search(load_machine(DEMO / "machines" / "charging-set.toml"), load_profile(p))
    assert not res.feasible
    md = report.sheet_markdown(res, date="2031-05-04")
    html = report.sheet_html(res, charts=False, date="2031-05-04")
    assert "Once warm it can" in md and "Once warm it can" in html
    assert NO_FIT_NOTE not in md.lower()


@needs_print
def test_near_miss_battery_sheet_keeps_its_notice_on_page_one(tmp_path):
    """The near miss of the demo charge over 20-75 degC carries the search's notes on its card; page 1 still
    holds the checklist and the standing notice (it had gone alone to page 2)."""
    from supplycfg.machine import load_machine
    from supplycfg.profile import load_profile
    from supplycfg.search import search
    text = (DEMO / "loads" / "battery-charging.toml").read_text(encoding="utf-8")
    p = tmp_path / "cold.toml"
    p.write_text(text.replace("winding_temperature_range_c = [65, 75]", "winding_temperature_range_c = [20, 75]"),
                 encoding="utf-8")
    res = search(load_machine(DEMO / "machines" / "charging-set.toml"), load_profile(p))
    one, _ = _print_page_one(report.sheet_html(res, charts=False, date="2031-05-04"), tmp_path)
    text = " ".join(one.split())
    assert "Once warm it can" in text and "they come first." in text
    for check, _ in report.checklist_rows(res, res.options[0]):
        assert " ".join(check.split()[:3]) in text, check


def test_hours_to_full_carries_its_unit():
    """Regression: the battery sheet's 'What to expect' printed 'hours to full ... | 14.55' with no unit
    (the key ends in '_full', not a unit suffix)."""
    assert report.figure_label("hours_to_full")[1] == "h"
    assert report.figure_label("hours_to_full_longest")[1] == "h"


def test_charge_plan_table_on_page_and_sheet_writes_the_ohm_sign():
    """Regression: the page's and the sheet's full charge-plan table read "rheostat 20 ohm" beside
    cards that write "20 Ω"; the terminal's text keeps the plain word."""
    from supplycfg.jobs.battery import plan_rows
    try:
        from .builders import demo
    except ImportError:
        from builders import demo
    res = demo("battery")[2]
    rows = report.plan_table(res.options[0])
    assert rows and all("ohm" not in r[1] for r in rows) and "Ω" in rows[0][1]
    assert "ohm" in plan_rows(res.options[0].extras["plan"])[0][1]


def test_tie_line_does_not_call_two_connections_the_same_rig(results):
    """The battery demo's first two plans are long and short shunt: their rigs are equally simple (same turns,
    no diverter, no exciter), not 'the same rig'. (Regression: 'with the same rig'.)"""
    res = results["battery"]
    line = report.ranking_line(res, res.options[0])
    assert "same rig" not in line
    if "least margins alike" in line:
        assert "equally simple rigs" in line
