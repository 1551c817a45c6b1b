"""The setting sheet: content, escaping, the files it writes."""

import dataclasses
from pathlib import Path

import pytest

from supplycfg import STANDING_NOTICE, __version__, report
from supplycfg.cli import main as cli_main
from supplycfg.errors import InputError
from supplycfg.profile import load_profile
from supplycfg.machine import load_machine
from supplycfg.search import search

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
    assert f"| Connection | {opt.setting.connection} |" in md
    assert "## What to expect" in md and "## Limits and margins" in md
    for c in list(opt.cautions) + list(res.cautions):
        assert report.md_esc(c.message) in md
        assert report.md_esc(c.basis) in md
    assert report.md_esc(STANDING_NOTICE) in md
    assert f"supplycfg {__version__} on 2031-05-04" in md
    if kind == "welding":
        assert "Field setting for each end of the welding range" in md


def test_html_sheet_with_charts(results):
    """The printable page carries the charts as inline SVG and prints on A4."""
    res = results["battery"]
    html = report.sheet_html(res, date="2031-05-04")
    assert html.startswith("<!DOCTYPE html>")
    assert html.count("<svg") >= 2
    assert "<?xml" not in html
    assert "@page" in html and "@media print" in html
    assert STANDING_NOTICE.replace("'", "&#x27;") in html
    assert res.options[0].setting.connection in html


def test_html_sheet_option_rank(results):
    res = results["battery"]
    html = report.sheet_html(res, rank=2, charts=False)
    assert "option 2 of" in html
    with pytest.raises(InputError, match="--option"):
        report.sheet_html(res, rank=len(res.options) + 1, charts=False)


def test_labels_are_escaped(results):
    """A label like <script> from a file or form prints as text in both sheets (issue 5)."""
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
    assert f"At {cond['speed_rpm']:g} rpm, windings {cond['winding_temperature_c']:g} °C" in md
    f = o.figures
    assert f"| Machine reaches it at | {f['cut_in_speed_cold_rpm']:.0f} rpm cold, {f['cut_in_speed_hot_rpm']:.0f} rpm hot |" in md
    assert f"{f['cutout_closing_voltage_v']:.1f} V" in md
    assert f"charging current at the start, {cond['speed_rpm']:g} rpm, windings {cond['winding_temperature_c']:g} °C" in md
    assert f"| Hours to full | {report.fmt(f['hours_to_full'], 'h')} |" in md
    html = report.sheet_html(res, charts=False)
    assert "Charge plan" in html and "Reverse-current cut-out" in html
