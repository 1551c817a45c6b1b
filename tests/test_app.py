"""The Streamlit page, run headless through streamlit.testing.v1.AppTest."""

import html
import json
import re
from html.parser import HTMLParser
import tomllib
import warnings
from pathlib import Path

import pandas as pd
import pytest

from supplycfg import STANDING_NOTICE
from supplycfg.errors import InputError
from supplycfg.files import dumps_toml
from supplycfg.profile import load_profile, profile_from_dict
from supplycfg.machine import load_machine, machine_from_dict
from supplycfg.wording import connection_words

pytest.importorskip("streamlit.testing.v1")
from streamlit.testing.v1 import AppTest  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
APP = str(ROOT / "app.py")
DEMO = ROOT / "profiles"


@pytest.fixture(autouse=True)
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


def fresh(forms=True):
    """The page as opened, with the machine and job forms shown (they are drawn only when asked for)."""
    at = AppTest.from_file(APP, default_timeout=60).run()
    assert not at.exception, at.exception
    if forms:
        at.toggle(key="show_machine_form").set_value(True)
        at.toggle(key="show_profile_form").set_value(True).run()
        assert not at.exception, at.exception
    return at


def test_forms_are_drawn_only_when_asked_for():
    """On load the forms are folded away (no text fields); the toggles show them."""
    at = fresh(forms=False)
    assert not any(t.label == "Poles" for t in at.text_input)
    at.toggle(key="show_machine_form").set_value(True).run()
    assert any(t.label == "Poles" for t in at.text_input)


def options_table(at):
    """The options table (static HTML, ``id="options"``) as a frame of the texts a reader sees."""
    for m in at.markdown:
        if '<table class="sc-table" id="options">' in m.value:
            rows = html_table(m.value)
            return pd.DataFrame(rows[1:], columns=rows[0])
    raise AssertionError("no options table on the page")


def text_field(at, label):
    return next(t for t in at.text_input if t.label == label)


def button(at, label):
    return next(b for b in at.button if b.label == label)


def shown(markdown):
    """What a reader sees of escaped Markdown: backslash escapes and HTML entities resolved."""
    return html.unescape(re.sub(r"\\(.)", r"\1", markdown))


def errors(at):
    """Error boxes other than stop cautions (those are shown as errors too), as the reader sees them."""
    return [shown(e.value) for e in at.error if not e.value.startswith("**STOP")]


def markdown_text(at):
    return "\n".join(m.value for m in at.markdown)


def test_default_page_shows_a_feasible_option():
    """The page opens on the battery-charging demo with the charging set, already solved; the answer comes first."""
    at = fresh()
    heads = [h.value for h in at.header]
    assert heads.index("All the settings, ranked") < heads.index("The machine and the job in detail")
    assert at.session_state["kind"] == "battery"
    assert at.session_state["machine_origin"] == "demo:charging-set"
    table = options_table(at)
    assert table["Fit"].iloc[0] == "meets all"
    assert list(table.columns)[:3] == ["Rank", "Smallest margin [%]", "Cautions"] or \
        list(table.columns)[:4] == ["Rank", "Objective", "Smallest margin [%]", "Cautions"]
    assert {"Limits broken", "Connection"} <= set(table.columns)
    assert len(at.get("vega_lite_chart")) >= 2
    assert "Kestrel Ridge charging set CS-1" in markdown_text(at)
    assert STANDING_NOTICE in markdown_text(at)
    assert not errors(at)


class _Cells(HTMLParser):
    def __init__(self):
        super().__init__()
        self.rows, self.cell = [], None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([])
        elif tag in ("td", "th"):
            self.cell = ""

    def handle_endtag(self, tag):
        if tag in ("td", "th"):
            self.rows[-1].append(self.cell)
            self.cell = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell += data


def html_table(markup):
    """Rows (header first) of a table the page draws as HTML, cells as the reader sees them."""
    p = _Cells()
    p.feed(markup)
    return p.rows


def card(at):
    """The block of ``st.container(key="recommended")`` (its id ends with the key)."""
    for j, ch in enumerate(at.main.children.values()):
        if type(ch).__name__ == "Block" and str(ch.proto.id).endswith("-recommended"):
            return j, ch
    raise AssertionError("no recommended card on the page")


def test_recommended_card_comes_first_with_setting_reason_and_checks():
    """The card (key 'recommended') stands before the ranked table: the setting in trade words, the line on why
    it ranks first under the stated rule, and the checks at the machine with their expected values."""
    from supplycfg.page import state
    from supplycfg.report import checklist_rows, md_esc, ranking_line
    at = fresh()
    mt, pt = dumps_toml(at.session_state["machine_tables"]), dumps_toml(at.session_state["profile_tables"])
    res, _ = state.solve(mt, pt)
    best = res.options[0]
    j, block = card(at)
    kinds = [type(ch).__name__ for ch in at.main.children.values()]
    assert j < kinds.index("Header"), "the card comes before every section header"
    assert [type(c).__name__ for c in block.children.values()][:2] == ["Subheader", "Markdown"]
    assert all("<script" not in m.value for m in at.markdown[1:])
    assert block.subheader[0].value == f"Recommended: {connection_words(best.setting.connection)}"
    line = ranking_line(res, best)
    assert line.startswith("Ranked first of") and block.markdown[0].value == f"*{md_esc(line)}*"
    tables = [html_table(m.value) for m in block.markdown if m.value.startswith("<table")]
    setting, checks = tables[0], tables[-1]
    assert setting[0] == ["Set", "To"]
    assert setting[1] == ["Connection", connection_words(best.setting.connection)]
    assert checks[0] == ["Check", "Expected"]
    expected = checklist_rows(res, best)
    assert checks[1:] == [list(r) for r in expected]
    assert "How they are ranked:" in "\n".join(c.value for c in at.caption)


@pytest.mark.parametrize("kind", ["welding", "lighting", "booster", "battery"])
def test_each_load_kind_runs(kind):
    """Choosing each kind loads its demo job and its paired demo machine and solves it."""
    at = fresh(forms=False)
    at.radio(key="kind_pick").set_value(kind).run()
    assert not at.exception, at.exception
    assert at.session_state["kind"] == kind
    assert at.session_state["profile_tables"]["load"]["kind"] == kind
    table = options_table(at)
    assert len(table) > 0
    assert (table["Fit"] == "meets all").any()
    assert len(at.get("vega_lite_chart")) >= 2
    spec = at.get("vega_lite_chart")[1].proto.spec
    assert "layer" in spec or "vconcat" in spec


def test_invalid_machine_value_shows_inline_and_keeps_typing():
    """A bad value gets its one-line message at the field; every typed value stays; the solve keeps the last good data."""
    at = fresh()
    text_field(at, "Poles").input("3")
    text_field(at, "Rated voltage [V]").input("165")
    button(at, "Use these machine data").click().run()
    assert not at.exception
    msgs = errors(at)
    assert any("machine.poles" in m and "even whole number" in m for m in msgs)
    assert "is 3; allowed: an even whole number >= 2" in msgs
    assert text_field(at, "Poles").value == "3"
    assert text_field(at, "Rated voltage [V]").value == "165"
    assert at.session_state["machine_tables"]["machine"]["poles"] == 4
    assert options_table(at)["Fit"].iloc[0] == "meets all"
    # text where a number belongs
    text_field(at, "Poles").input("4")
    text_field(at, "Armature resistance [Ω]").input("abc")
    button(at, "Use these machine data").click().run()
    msgs = errors(at)
    assert any("machine.armature_resistance_ohm" in m and "abc" in m for m in msgs)
    assert text_field(at, "Armature resistance [Ω]").value == "abc"


def test_invalid_job_value_shows_inline():
    at = fresh()
    field = text_field(at, "State of charge at start and end")
    field.input("0.9, 0.2")
    button(at, "Use this job").click().run()
    msgs = errors(at)
    assert any("battery.state_of_charge" in m and "start <" in m for m in msgs)
    assert text_field(at, "State of charge at start and end").value == "0.9, 0.2"


def test_changing_the_rheostat_or_the_job_changes_the_options():
    """A smaller field rheostat narrows the settings; another job gives other ones."""
    at = fresh()
    before = options_table(at)
    text_field(at, "Field rheostat, all in [Ω]").input("20")
    button(at, "Use these machine data").click().run()
    assert not errors(at)
    assert at.session_state["machine_origin"] == "edited on this page"
    after = options_table(at)
    assert list(after["Field"]) != list(before["Field"])
    assert list(after["Fit"]).count("meets all") < list(before["Fit"]).count("meets all")
    text_field(at, "Highest charging current [A]").input("12")
    button(at, "Use this job").click().run()
    assert not errors(at)
    assert at.session_state["profile_tables"]["battery"]["max_charge_current_a"] == 12
    assert not options_table(at).equals(after)


def test_trim_slider_redraws_the_curves():
    at = fresh()
    slider = next(s for s in at.slider if s.label.startswith("Field rheostat for these curves"))
    spec_before = at.get("vega_lite_chart")[1].proto.spec
    slider.set_value(float(slider.max)).run()
    assert not at.exception
    assert at.get("vega_lite_chart")[1].proto.spec != spec_before
    assert any(c.value.startswith("Drawn with the rheostat") for c in at.caption)


def test_picking_another_option_shows_its_details():
    """Option 2 in detail carries its own setting table; option 1's is the card's, shown once (regression:
    the recommended option's table stood twice on the page, in the card and again in its detail)."""
    at = fresh()
    assert not any(h.value == "Set the machine like this" for h in at.subheader)
    assert any("as the card at the top" in m.value for m in at.markdown)
    pick = next(s for s in at.selectbox if s.label == "Look at option")
    pick.select(2).run()
    assert any(h.value == "Option 2 in detail" for h in at.header)
    assert any(h.value == "Set the machine like this" for h in at.subheader)
    assert "option 2 of" in at.session_state["sheet_markdown"]


def test_downloads_give_a_sheet_with_the_setting_and_cautions():
    """The Markdown sheet behind its button holds the setting and the cautions; the HTML one is built on click."""
    from supplycfg.page import state
    at = fresh()
    labels = [d.proto.label for d in at.get("download_button")]
    assert sorted(labels) == sorted(["Setting sheet to print (.html)", "Setting sheet as text (.md)",
                                     "Search result (.json)", "Machine data (.toml)", "Job (.toml)"])
    md = at.session_state["sheet_markdown"]
    mt, pt = dumps_toml(at.session_state["machine_tables"]), dumps_toml(at.session_state["profile_tables"])
    res, err = state.solve(mt, pt)
    assert err is None
    opt = res.options[0]
    assert f"| Connection | {connection_words(opt.setting.connection)} |" in md
    assert opt.cautions and all(c.message.split(":")[0] in md for c in opt.cautions)
    assert "Source: " in md and "(seen)" not in md
    html = state.sheet_html_cached("test", res, 1, None)
    assert connection_words(opt.setting.connection) in html and "<svg" in html


def test_saved_machine_and_job_load_back_unchanged():
    """The TOML the page offers loads back equal to what it shows (round trip)."""
    at = fresh()
    text_field(at, "Rated voltage [V]").input("165.5")
    button(at, "Use these machine data").click().run()
    mt = dumps_toml(at.session_state["machine_tables"])
    m = load_machine("m.toml", mt)
    assert m.rated_voltage_v == 165.5
    assert machine_from_dict(tomllib.loads(mt)) == m
    demo = load_machine(DEMO / "machines" / "charging-set.toml")
    assert m == machine_from_dict(dict(tomllib.loads(mt)), "x") and m.poles == demo.poles
    pt = dumps_toml(at.session_state["profile_tables"])
    assert load_profile("p.toml", pt) == load_profile(DEMO / "loads" / "battery-charging.toml")
    assert profile_from_dict(tomllib.loads(pt)) == load_profile("p.toml", pt)


def test_uploads_are_checked():
    """An upload is read with the file's own rules: one line naming the file and key; over 1 MB refused."""
    at = fresh()
    up = next(u for u in at.file_uploader if u.label.startswith("…or your machine file"))
    up.set_value(("broken.toml", b"[machine]\npoles = 'four'\n", "application/toml")).run()
    assert not at.exception
    assert any(m.startswith("broken.toml: machine.") for m in errors(at))
    assert at.session_state["machine_origin"] == "demo:charging-set"
    big = b"# padding\n" * 120_000
    up = next(u for u in at.file_uploader if u.label.startswith("…or your machine file"))
    up.set_value(("big.toml", big, "application/toml")).run()
    assert any("big.toml: file:" in m and "at most 1000000" in m for m in errors(at))
    good = (DEMO / "machines" / "welding-set.toml").read_bytes().replace(
        b'label = "Kestrel Ridge welding set WS-2"', b'label = "<b>mine</b>"')
    up = next(u for u in at.file_uploader if u.label.startswith("…or your machine file"))
    up.set_value(("mine.toml", good, "application/toml")).run()
    assert at.session_state["machine_origin"] == "file:mine.toml"
    assert "&lt;b&gt;mine&lt;/b&gt;" in markdown_text(at)


def test_labels_are_inert_on_the_page():
    """A machine label with a heading, a rule, a link, a table bar, a right-to-left override and zero-width marks
    shows as one line of text in 'In use' (regression, issue 8 item 9)."""
    at = fresh()
    up = next(u for u in at.file_uploader if u.label.startswith("…or your machine file"))
    label = '"Shop set\\n# Heading\\n---\\n[x](https://example.invalid) | cell \\u202Eevil\\u200B :red[r] $y$"'
    good = (DEMO / "machines" / "welding-set.toml").read_bytes().replace(
        b'label = "Kestrel Ridge welding set WS-2"', b"label = " + label.encode())
    up.set_value(("odd\u202ename.toml", good, "application/toml")).run()
    assert not at.exception
    assert at.session_state["machine_origin"] == "file:odd\u202ename.toml"
    lines = [m.value for m in at.markdown if "Shop set" in m.value]
    assert lines
    for text in lines:
        assert "\n" not in text and "\u202e" not in text.lower() and "\u200b" not in text
        assert "\\# Heading" in text and "\\[x\\](https\\://example.invalid)" in text
        assert "\\|" in text and "\\$y\\$" in text and "\\:red\\[r\\]" in text
        assert "\\u202e" in text.lower()
    assert any("odd\\u202ename.toml" in shown(t) for t in lines)


@pytest.mark.parametrize("field, value", [("Poles", "9" * 5000), ("Rated voltage [V]", "9" * 5000),
                                          ("Series taps [turns per pole]", "0, " + "9" * 5000),
                                          ("Armature resistance [Ω]", "1e" + "9" * 5000)])
def test_a_number_of_thousands_of_digits_gets_a_line_not_a_traceback(field, value):
    """Regression, issue 8 item 14: integer conversion beyond Python's digit limit happened outside the checks."""
    at = fresh()
    text_field(at, field).input(value)
    button(at, "Use these machine data").click().run()
    assert not at.exception
    msgs = errors(at)
    assert any("at most 400 characters" in m for m in msgs), msgs
    assert options_table(at)["Fit"].iloc[0] == "meets all"


def test_a_job_number_of_thousands_of_digits_gets_a_line():
    at = fresh()
    text_field(at, "Drive speed [rpm]").input("1450, " + "1" * 5000)
    button(at, "Use this job").click().run()
    assert not at.exception
    assert any("drive.speed" in m and "at most 400 characters" in m for m in errors(at))


def test_upload_size_check_before_parsing():
    from supplycfg.page.state import upload_bytes

    class Big:
        name = "huge.toml"
        size = 2_000_000

        def getvalue(self):
            raise AssertionError("read before the size check")

    with pytest.raises(InputError, match="at most 1000000"):
        upload_bytes(Big())


def test_save_into_a_folder_asks_before_overwriting(tmp_path):
    at = fresh()
    at.toggle(key="show_save_form").set_value(True).run()
    text_field(at, "Folder").input(str(tmp_path))
    at.multiselect(key="save_pick").set_value(["sheet.md", "machine.toml"])
    button(at, "Save").click().run()
    names = sorted(p.name for p in tmp_path.iterdir())
    assert len(names) == 2 and any(n.endswith(".md") for n in names)
    sheet = next(p for p in tmp_path.iterdir() if p.suffix == ".md")
    sheet.write_text("kept", encoding="utf-8")
    button(at, "Save").click().run()
    assert any("exists already" in m for m in errors(at))
    assert sheet.read_text(encoding="utf-8") == "kept"
    at.checkbox(key="save_force").check()
    button(at, "Save").click().run()
    assert sheet.read_text(encoding="utf-8").startswith("# Setting sheet")


def test_form_fields_give_back_each_demo_unchanged():
    """What the forms show for a file, applied untouched, is the same machine and job."""
    from supplycfg.profile import profile_to_dict
    from supplycfg.machine import machine_to_dict
    from supplycfg.page import fields
    for path in sorted((DEMO / "machines").glob("*.toml")):
        m = load_machine(path)
        vals = fields.machine_form_values(machine_to_dict(m))
        assert machine_from_dict(fields.machine_tables_from_form(vals), "form") == m
    for path in sorted((DEMO / "loads").glob("*.toml")):
        p = load_profile(path)
        vals = fields.profile_form_values(profile_to_dict(p))
        assert profile_from_dict(fields.profile_tables_from_form(p.kind, vals), "form") == p


def test_form_text_parsing():
    from supplycfg.page import fields
    assert fields.parse_number(" 4 ") == 4 and isinstance(fields.parse_number("4"), int)
    assert fields.parse_number("0.045") == 0.045
    assert fields.parse_number("abc") == "abc"
    assert fields.parse_number("") is None
    assert fields.parse_list("0, 3; 6") == [0, 3, 6]
    assert fields.parse_list("[1400 1500]") == [1400, 1500]
    assert fields.error_field("open_circuit.emf_v[3]") == "open_circuit.table"
    assert fields.error_field("drive.speed_range_rpm") == "drive.speed"
    assert fields.error_field("machine.series_taps[1]") == "machine.series_taps"
    with pytest.raises(InputError, match=r"open_circuit.emf_v\[1\]: is empty"):
        fields.machine_tables_from_form({"occ": {"field current [A]": [0.0, 0.5], "EMF [V]": [3.0, None]}})


def test_page_tables_are_text_never_markup():
    """The page draws its tables as one HTML element each; every cell is escaped text (issue 8 item 9)."""
    from supplycfg.page.outputs import table_html
    out = table_html(("What", "<i>x</i>"), [("<script>alert(1)</script>", "a\u202eb\u200b"), ("**bold**", "$x$")])
    assert "<script" not in out and "<i>" not in out
    assert "&lt;script&gt;" in out and "a\\u202eb\\u200b" in out and "\u202e" not in out
    assert html_table(out) == [["What", "<i>x</i>"], ["<script>alert(1)</script>", "a\\u202eb\\u200b"],
                               ["**bold**", "$x$"]]


def test_options_table_cells_read_as_figures():
    """The options table is static HTML (no data grid): margins to 0.1 %, speeds to the rpm, turns as
    written, and a dash where there is nothing to say (no series winding, no speed, a stop's -inf margin)."""
    from supplycfg.page.outputs import option_cells, table_html
    rows = [{"Rank": 1, "Smallest margin [%]": 3.04, "Series turns": 24.0, "Speed [rpm]": 1447.6, "Fit": "meets all"},
            {"Rank": 2, "Smallest margin [%]": float("-inf"), "Series turns": 0.0, "Speed [rpm]": None,
             "Fit": "not usable (stop)"}]
    assert option_cells(rows) == [["1", "3.0", "24", "1448", "meets all"], ["2", "–", "–", "–", "not usable (stop)"]]
    assert table_html(list(rows[0]), option_cells(rows), table_id="options").startswith(
        '<table class="sc-table" id="options"><thead><tr><th>Rank</th>')


def test_drive_inputs_and_size_section():
    """The job form shows the drive's kind and figures; the page's drive section finds the
    smallest rating (here the booster demo on its fixed drive: the least peak shaft power of a
    feasible setting) and the tooltips of the curves carry speed and shaft power."""
    at = fresh()
    labels = {t.label for t in at.text_input} | {s.label for s in at.selectbox}
    assert {"What turns the generator", "Drive rating [kW] (engine or motor)", "Motor slip at rated load [%]",
            "Friction, windage and core loss at rated speed [W]"} <= labels
    at.radio(key="kind_pick").set_value("booster").run()
    button(at, "Find the smallest drive rating that does the job").click().run()
    assert not at.exception, at.exception
    assert "Smallest drive rating at the shaft" in markdown_text(at)
    specs = [json.dumps(c.proto.spec) for c in at.get("vega_lite_chart")]
    assert any("shaft power [kW]" in sp and "speed [rpm]" in sp for sp in specs)


def test_drive_size_section_names_the_connection_in_trade_words():
    """Regression: the drive section said "Best setting at that rating: long-shunt-differential, ..." (the
    program's id, issue 13 asks for the trade's words on screen); the battery demo's best is a compound."""
    from supplycfg.wording import connection_words
    at = fresh()
    button(at, "Find the smallest drive rating that does the job").click().run()
    assert not at.exception, at.exception
    line = next(x for x in markdown_text(at).splitlines() if x.startswith("Best setting at that rating: "))
    conn = line.split(": ", 1)[1].split(",")[0]
    assert conn in {connection_words(c) for c in ("long-shunt-differential", "short-shunt-differential",
                                                  "long-shunt-cumulative", "short-shunt-cumulative",
                                                  "separate-differential", "separate-cumulative", "shunt")}
    assert "-differential" not in line and "-cumulative" not in line
    # the rating found is fully loaded: the page says to take the next standard size, as `size` does
    assert "choose the next standard rating above it" in " ".join(c.value for c in at.caption)


def test_page_charts_carry_their_rows_in_the_views():
    """The page's chart specs hold their rows in the views that draw them (no named datasets for Streamlit to
    convert), the same rows the chart builders give."""
    from supplycfg.page.state import inline_data
    spec = {"datasets": {"a": [{"x": 1}], "b": [{"x": 2}]},
            "vconcat": [{"layer": [{"data": {"name": "a"}, "mark": "line"}, {"data": {"name": "b"}, "mark": "rule"}]},
                        {"data": {"name": "a"}, "mark": "line"}]}
    out = inline_data(spec)
    assert "datasets" not in out
    assert out["vconcat"][0]["layer"][0]["data"] == {"values": [{"x": 1}]}
    assert out["vconcat"][0]["layer"][1]["data"] == {"values": [{"x": 2}]}
    assert out["vconcat"][1]["data"] == {"values": [{"x": 1}]}
    at = fresh(forms=False)
    for c in at.get("vega_lite_chart"):
        assert '"datasets"' not in c.proto.spec and '"values"' in c.proto.spec and not c.proto.datasets


def test_several_machines_for_the_job_on_the_page():
    """Issue 12: several machine files at once on the page. Folded away on load; with the demo machines
    added, one row per machine from the core's fleet rows, the demo job's own machine able to do it."""
    at = fresh(forms=False)
    assert not any(getattr(c, "label", "") == "Add the demo machines" for c in at.checkbox)
    at.toggle(key="show_fleet").set_value(True).run()
    assert not at.exception, at.exception
    assert any(i.value.startswith("Give machine files") for i in at.info)
    at.checkbox(key="fleet_demos").check().run()
    assert not at.exception, at.exception
    table = next(df.value for df in at.dataframe if "can do it" in df.value.columns)
    assert len(table) == len(list((DEMO / "machines").glob("*.toml")))
    assert "error" not in table.columns
    yes = table[table["can do it"] == "yes"]["machine file"].tolist()
    assert "charging-set.toml" in yes  # the default job is the charging set's battery
    from supplycfg.wording import CONNECTION_WORDS
    # trade words, not program names
    assert all(s.split(",")[0] in CONNECTION_WORDS.values() for s in table["best setting"])
    assert any(m.value.startswith("**") and "machines meet every limit" in m.value for m in at.markdown)
