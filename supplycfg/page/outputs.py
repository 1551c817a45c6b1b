"""The page's outputs: the recommended setting first, the ranked options, the chosen one in detail, its curves and sheet."""

import math
import re
from dataclasses import replace
from datetime import date
from pathlib import Path

import streamlit as st

from .. import STANDING_NOTICE
from ..errors import InputError
from ..files import dumps_json, write_atomic
from ..report import (CARD_PLAN_HEADERS, CHECKLIST_HEADERS, CURRENT_SETTING_HEADERS, DIAL_HEADERS, dial_setting_words, PLAN_HEADERS, SEVERITY_WORDS,
                      card_plan_rows, cautions_pointer, checklist_rows, condition_words, current_setting_rows, cutout_rows,
                      dial_rows, electrode_of, esc,
                      field_reading_text, figure_rows, fmt, broken_limits_text, margin_rows, md_data, md_esc, objective_value,
                      plan_table, ranking_line, ranking_rule, run_rows, run_summary, setting_rows, severity_counts,
                      sheet_markdown, sorted_cautions, status_text)
from ..wording import connection_words, glossary_for, source_text
from . import state

S = st.session_state


def _md(text):
    """Our own sentence as Markdown (file text goes through ``md_data``)."""
    return md_esc(text)


def table_html(headers, rows, table_id=None):
    """A static table as one HTML element, every cell escaped (text, never markup).

    One element per table: st.table renders each cell as its own Markdown
    block, which made the browser take twice as long to draw the page.
    """
    head = "".join(f"<th>{esc(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{esc(c)}</td>" for c in r) + "</tr>" for r in rows)
    ident = f' id="{esc(table_id)}"' if table_id else ""
    return f'<table class="sc-table"{ident}><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


#: How the options table writes its numbers (the rest as they come).
OPTION_CELL_FORMATS = {"Smallest margin [%]": "{:.1f}", "Series turns": "{:g}", "Speed [rpm]": "{:.0f}"}


def option_cells(rows):
    """The cells of :func:`option_rows` as the table shows them: numbers to their figures, none as a dash."""
    def cell(k, v):
        # (a setting with a stop caution has no margin to speak of: -inf)
        if v is None or (k == "Series turns" and v == 0) or (isinstance(v, float) and not math.isfinite(v)):
            return "–"
        return OPTION_CELL_FORMATS[k].format(v) if k in OPTION_CELL_FORMATS else str(v)
    return [[cell(k, v) for k, v in r.items()] for r in rows]


def _table(headers, rows):
    st.markdown(table_html(headers, rows), unsafe_allow_html=True)


def _caution(c):
    body = f"**{SEVERITY_WORDS.get(c.severity, c.severity)}:** {_md(c.message)}\n\n*{_md(source_text(c.basis))}*"
    {"stop": st.error, "warn": st.warning}.get(c.severity, st.info)(body)


# ---------------------------------------------------------------------------
# the answer first
# ---------------------------------------------------------------------------

def card_box():
    """The recommended card's container, keyed ``recommended`` (its place on the page)."""
    return st.container(key="recommended", border=True)


def recommended_card(result, run=None, box=None):
    """The recommended setting (rank 1) in a card keyed ``recommended``: what to set, why, what to check.

    ``box``: the card's container made beforehand (:func:`card_box`), to fill it later in the run.
    """
    o = result.options[0]
    m, p = result.machine, result.profile
    with box if box is not None else card_box():
        if any(c.severity == "stop" for c in result.cautions):
            # the job as given is unsafe whatever the setting: no setting is recommended
            st.subheader("Stop: the job as given is not safe to run", anchor="recommended")
        elif o.feasible:
            st.subheader(f"Recommended: {connection_words(o.setting.connection)}", anchor="recommended")
        else:
            st.subheader("No setting meets every limit", anchor="recommended")
            st.warning(f"**Not ready to use.** The closest option: {_md(status_text(o, len(result.options)))}")
        st.markdown(f"*{_md(ranking_line(result, o))}*")
        for c in sorted_cautions(list(o.cautions) + list(result.cautions)):
            if c.severity == "stop":
                _caution(c)
        _table(("Set", "To"), setting_rows(o, m, p))
        if dial_rows(o):
            st.markdown("**Welding dial**")
            st.caption(md_esc(dial_setting_words(p)))
            _table(DIAL_HEADERS, dial_rows(o))
        elif o.current_settings:
            st.markdown("**Field setting for each end of the welding range**")
            _table(CURRENT_SETTING_HEADERS, current_setting_rows(o))
        if card_plan_rows(o):
            st.markdown("**Charge plan**")
            _table(CARD_PLAN_HEADERS, card_plan_rows(o))
        elif run is not None:
            st.markdown(_md(run_summary(run)))
        st.markdown("**Check at the machine**")
        _table(CHECKLIST_HEADERS[:2], checklist_rows(result, o, run))
        if any(c.severity in ("warn", "note") for c in list(o.cautions) + list(result.cautions)):
            st.caption(md_esc(cautions_pointer(o, result, "under Cautions, further down this page,"))
                       + " The printable sheet has the setting, the wiring and these checks on its first page.")


# ---------------------------------------------------------------------------
# the ranked options
# ---------------------------------------------------------------------------

def option_rows(result):
    """One row per option, leading with what decides the rank: rank, objective, smallest margin, cautions."""
    rows = []
    kind = result.profile.kind
    for o in result.options:
        s = o.setting
        _, words = objective_value(o, kind)
        rows.append({
            "Rank": o.rank,
            "Objective": words or "–",
            "Smallest margin [%]": round(100.0 * o.smallest_margin, 1),
            "Cautions": severity_counts(o.cautions) or "none",
            "Fit": fit_words(o),
            "Connection": connection_words(s.connection),
            "Series turns": s.series_turns or 0.0,
            "Field": field_reading_text(o),
            "Diverter": "none" if s.diverter_ohm is None else fmt(s.diverter_ohm, "Ω"),
            "Speed [rpm]": s.speed_rpm,
            "Limits broken": broken_limits_text(o.failed) or "none",
        })
    return rows


def fit_words(o):
    """An option's fit in a few words (the table and the picker)."""
    if o.feasible:
        return "meets all, knife-edge" if o.knife_edge else "meets all"
    return "not usable (stop)" if "stop_caution" in o.failed else "near miss"


def picked_option(result, key):
    """The option picked in the table or the list (the first until one is picked), before they are drawn."""
    by_rank = {o.rank: o for o in result.options}
    pick_key = f"pick_{key}"
    if S.get(pick_key) not in by_rank:
        S[pick_key] = result.options[0].rank
    return by_rank[S[pick_key]]


def _option_label(o):
    s = o.setting
    fit = fit_words(o)
    tap = f", {s.series_turns:g} turns" if s.series_turns else ""
    return f"{o.rank} · {connection_words(s.connection)}{tap}, {field_reading_text(o)} · {fit}"


def options_section(result, key):
    st.header("All the settings, ranked", anchor="options")
    n_ok = len([o for o in result.options if o.feasible])
    st.markdown(f"**{n_ok}** of {len(result.options)} settings meet every limit "
                f"({result.candidates_evaluated} candidate evaluations in {result.search_seconds:.2f} s).")
    st.caption(f"How they are ranked: {_md(ranking_rule(result))}")
    for n in result.notes:
        st.warning(_md(n))
    for c in result.cautions:
        if c.severity == "stop":
            _caution(c)
    if not result.options:
        st.warning("No setting to show.")
        return None
    ranks = [o.rank for o in result.options]
    pick_key = f"pick_{key}"
    picked_option(result, key)
    rows = option_rows(result)
    if all(r["Objective"] == "–" for r in rows):  # the core states no objective for this job yet
        for r in rows:
            del r["Objective"]
    # static HTML, not a data grid: the grid's scripts (over a megabyte) were the browser's largest wait
    # on load, and a table whose cells wrap reads better in a narrow window; the list below picks an option
    st.markdown(f'<div class="sc-scroll">{table_html(list(rows[0]), option_cells(rows), table_id="options")}</div>',
                unsafe_allow_html=True)
    by_rank = {o.rank: o for o in result.options}
    st.selectbox("Look at option", ranks, key=pick_key, format_func=lambda r: _option_label(by_rank[r]),
                 help="its details, charts and sheet are shown below")
    with st.expander("What the words mean"):
        st.markdown("\n".join(f"- **{_md(k)}**: {_md(v)}" for k, v in glossary_for(result.profile.kind).items()))
    return by_rank[S[pick_key]]


# ---------------------------------------------------------------------------
# one option in detail
# ---------------------------------------------------------------------------

def detail_section(result, option):
    st.header(f"Option {option.rank} in detail", anchor="detail")
    st.markdown(f"*{_md(status_text(option, len(result.options)))}.* {_md(ranking_line(result, option))}")
    all_c = sorted_cautions(list(option.cautions) + list(result.cautions))
    for c in all_c:
        if c.severity == "stop":
            _caution(c)
    m, p = result.machine, result.profile
    if option is result.options[0]:
        # the card at the top already holds this table: not shown twice on one page
        st.markdown("Set the machine as the card at the top of the results says; here, what the card leaves out.")
    else:
        st.subheader("Set the machine like this")
        _table(("Set", "To"), setting_rows(option, m, p))
    if option.current_settings and not dial_rows(option):
        st.markdown("**Field setting for each end of the welding range**")
        _table(CURRENT_SETTING_HEADERS, current_setting_rows(option))
    if plan_table(option):
        st.markdown(f"**Charge plan** at {_md(condition_words(option)['setting'])}: only the field changes between stages")
        _table(PLAN_HEADERS, plan_table(option))
        _table(("Reverse-current cut-out", "Figure"), cutout_rows(option))
    st.subheader("Wiring")
    svg, steps = state.wiring_of(state.texts()[0], p.kind, option.setting, electrode_of(p))
    with st.container(key="wiring"):
        st.image(svg, caption=f"Wiring: {connection_words(option.setting.connection)}", width="stretch")
    with st.expander("The wiring in words"):
        st.markdown("\n".join(f"{k}. {_md(s)}" for k, s in enumerate(steps, 1)))
    st.subheader("Cautions")
    rest = [c for c in all_c if c.severity != "stop"]
    for c in rest:
        _caution(c)
    if not all_c:
        st.markdown("No caution raised by the rules for this setting.")
    st.markdown(f"**{_md(STANDING_NOTICE)}**")
    st.subheader("What to expect")
    _table(("Figure", "Value"), figure_rows(option))
    st.subheader("Limits and margins")
    _table(("Limit", "Value", "Limit value", "Margin", "Status"),
           [(r[0], r[1], r[2], r[4], r[5]) for r in margin_rows(option)])


def _trim(result, option, key):
    """A hand trim of the field control for the curves (not for the sheet)."""
    m, s = result.machine, option.setting
    if result.profile.kind == "welding" or s.connection == "series":
        return s, None
    if s.field_current_a is not None:
        top = float(m.occ_field_current_a[-1])
        v = st.slider("Exciter field current for these curves [A]", 0.0, top, float(s.field_current_a),
                      step=max(top / 400, 0.001), key=f"trim_{key}_{option.rank}")
        return replace(s, field_current_a=v), f"field current {fmt(v, 'A')} (the option: {fmt(s.field_current_a, 'A')})"
    if m.rheostat_max_ohm <= 0:
        return s, None
    v = st.slider("Field rheostat for these curves [Ω]", 0.0, float(m.rheostat_max_ohm), float(s.rheostat_ohm or 0.0),
                  step=max(m.rheostat_max_ohm / 500, 0.01), key=f"trim_{key}_{option.rank}")
    return replace(s, rheostat_ohm=v), f"rheostat {fmt(v, 'Ω')} (the option: {fmt(s.rheostat_ohm, 'Ω')})"


#: Charts drawn when asked for, with the toggle's words: the cells' charging curves belong to the
#: battery's chemistry, not to the option, and each chart drawn on load costs the browser time.
ON_REQUEST_CHARTS = {"cells": "Show the charging curves of the cells"}


@st.fragment
def curves_section(result, option, run, run_msg, key, texts):
    """The curves; moving the trim reruns this part only, and unchanged charts keep their drawing."""
    st.header("Curves", anchor="curves")
    trimmed, text = _trim(result, option, key)
    if text and trimmed != option.setting:
        st.caption(f"Drawn with the {_md(text)}. The figures, margins, cautions and the sheet are for the option's setting.")
    trim = (trimmed.rheostat_ohm, trimmed.field_current_a)
    specs, err = state.chart_specs(texts[0], texts[1], option.rank, trim)
    if err:
        st.error(md_data(err))
    for name, title, spec in specs:
        if name in ON_REQUEST_CHARTS and not st.toggle(ON_REQUEST_CHARTS[name], key=f"show_{name}"):
            continue
        st.vega_lite_chart(spec, width="stretch", theme=None, key=f"chart_{name}")
        if name == "run" and run is not None:
            _table(("What", "Value"), run_rows(run))
    if result.profile.kind == "battery" and run is None and run_msg:
        st.info(md_data(run_msg))
    st.caption("Drag to pan, scroll to zoom, double-click to reset; point at a line for its values.")


def drive_size_section(result, machine_toml, profile_toml):
    """The smallest drive rating with which some setting meets the job (on request: a few searches)."""
    st.subheader("The drive this job needs")
    d = result.profile.drive
    st.markdown(f"Drive in the job: {_md(d.describe())}.")
    if not st.button("Find the smallest drive rating that does the job", key="size_go"):
        return
    res, err = state.size(machine_toml, profile_toml)
    if res is None:
        st.error(_md(err))
        return
    if res.required_drive_kw is None:
        st.warning(_md("; ".join(res.notes) or "no rating makes this job feasible"))
        return
    if d.coupled:
        st.markdown(f"**{_md(d.kind.capitalize())} rating to choose: {res.rating_to_choose_kw:g} kW** "
                    f"({_md(res.rating_to_choose_words)}; the least that meets the job is "
                    f"{fmt(res.required_drive_kw, 'kW')}, found to 1 %; the job gives {fmt(d.rated_power_kw, 'kW')})")
    else:
        st.markdown(f"**Smallest drive rating at the shaft: {fmt(res.required_drive_kw, 'kW')}**")
    o = res.option
    st.markdown(f"Best setting at that rating: {_md(connection_words(o.setting.connection))}, "
                f"{_md(o.setting.describe())}; "
                f"peak shaft power {fmt(o.figures.get('max_shaft_power_kw'), 'kW')}, speed down to "
                f"{fmt(o.figures.get('min_speed_rpm'), 'rpm')}.")
    for n in res.notes:
        st.caption(_md(n))
    from ..sizing import rating_margin_note
    st.caption(_md(rating_margin_note(o, d)))


def _slug(text):
    s = re.sub(r"[^a-z0-9]+", "-", str(text).lower()).strip("-")
    return s[:40] or "machine"


def downloads_section(result, option, run, key, machine_toml, profile_toml):
    st.header("Take it to the machine", anchor="sheet")
    st.markdown("The printable sheet puts the setting, the wiring and the checks on its first A4 page.")
    md_key = f"{key}:{option.rank}:{date.today().isoformat()}:md"
    if S.get("sheet_markdown_key") != md_key:
        S["sheet_markdown"] = sheet_markdown(result, option.rank, run)
        S["sheet_markdown_key"] = md_key
    md = S["sheet_markdown"]
    base = f"{_slug(result.machine.label)}-option-{option.rank}"
    html_key = f"{key}:{option.rank}:{date.today().isoformat()}"  # the sheet prints its date
    res, rank = result, option.rank
    files = {
        "sheet.html": (f"setting-sheet-{base}.html", lambda: state.sheet_html_cached(html_key, res, rank, run),
                       "text/html", "Setting sheet to print (.html)"),
        "sheet.md": (f"setting-sheet-{base}.md", md, "text/markdown", "Setting sheet as text (.md)"),
        "result.json": (f"search-{_slug(result.machine.label)}.json", lambda: dumps_json(res.as_dict()),
                        "application/json", "Search result (.json)"),
        "machine.toml": (f"{_slug(result.machine.label)}.toml", machine_toml, "application/toml",
                         "Machine data (.toml)"),
        "profile.toml": (f"job-{_slug(result.profile.label or result.profile.kind)}.toml", profile_toml,
                         "application/toml", "Job (.toml)"),
    }
    cols = st.columns(2)
    for j, (k, (name, data, mime, label)) in enumerate(files.items()):
        with cols[j % 2]:
            # a sheet built on click shows a spinner in its button while the charts are exported
            st.download_button(label, data=data, file_name=name, mime=mime, key=f"dl_{k}",
                               type="primary" if k == "sheet.html" else "secondary", on_click="ignore")
    # drawn when asked for, like the forms at the foot: its four widgets cost the browser time on load
    if st.toggle("Save them into a folder on this computer", key="show_save_form"):
        _save_form(files)


def _save_form(files):
    folder = st.text_input("Folder", value=str(Path.cwd()), key="save_folder")
    picked = st.multiselect("Files", list(files), default=["sheet.html", "machine.toml", "profile.toml"],
                            format_func=lambda k: files[k][0], key="save_pick")
    overwrite = st.checkbox("Replace files that already exist", key="save_force",
                            help="left unticked, an existing file is never overwritten")
    if st.button("Save", key="save_go"):
        msgs = []
        with st.spinner("Writing the files..."):
            for k in picked:
                name, data, _, _ = files[k]
                text = data() if callable(data) else data
                try:
                    path = write_atomic(Path(folder) / name, text, force=overwrite)
                    msgs.append(("ok", f"saved {path}"))
                except InputError as e:
                    msg = e.message
                    if "exists already" in msg:
                        msg = "exists already; tick 'Replace files that already exist' to overwrite it"
                    msgs.append(("error", f"{e.source}: {msg}"))
                except OSError as e:
                    msgs.append(("error", f"{name}: cannot be written ({e.strerror or e})"))
        S["save_messages"] = msgs
    for level, text in S.get("save_messages", []):
        (st.success if level == "ok" else st.error)(md_data(text))
