"""The page's outputs: the options, the chosen one in detail, its cautions, curves and sheet."""

import re
from dataclasses import replace
from datetime import date
from pathlib import Path

import streamlit as st

from .. import STANDING_NOTICE
from ..errors import InputError
from ..files import dumps_json, write_atomic
from ..report import (SEVERITY_WORDS, current_setting_rows, figure_rows, field_control_text, fmt, limit_label,
                      margin_rows, md_esc, run_rows, setting_rows, severity_counts,
                      sheet_markdown, sorted_cautions, status_text)
from . import state

S = st.session_state


def _md(text):
    return md_esc(text).replace("$", "\\$")


def option_rows(result):
    """One row per option for the ranked table."""
    rows = []
    for o in result.options:
        s = o.setting
        rows.append({
            "Rank": o.rank,
            "Fit": "meets all" if o.feasible else "near miss",
            "Connection": s.connection,
            "Series turns": s.series_turns or 0.0,
            "Field": field_control_text(o).replace("field rheostat", "rheostat").replace("exciter field current", "field"),
            "Diverter": "none" if s.diverter_ohm is None else fmt(s.diverter_ohm, "Ω"),
            "Speed [rpm]": s.speed_rpm,
            "Least margin [%]": round(100.0 * o.smallest_margin, 2),
            "Cautions": severity_counts(o.cautions) or "none",
            "Limits broken": ", ".join(limit_label(n) for n in o.failed),
        })
    return rows


def _option_label(o):
    s = o.setting
    fit = "meets all" if o.feasible else "near miss"
    tap = f", {s.series_turns:g} turns" if s.series_turns else ""
    return f"{o.rank} · {s.connection}{tap}, {field_control_text(o)} · {fit}"


def options_section(result, key):
    st.header("3 · Settings for this job", anchor="options")
    n_ok = len([o for o in result.options if o.feasible])
    st.markdown(f"**{n_ok}** of {len(result.options)} settings meet every limit "
                f"({result.candidates_evaluated} candidate evaluations in {result.search_seconds:.2f} s).")
    for n in result.notes:
        st.warning(_md(n))
    job_stops = [c for c in result.cautions if c.severity == "stop"]
    for c in job_stops:
        _caution(c)
    if not result.options:
        st.warning("No setting to show.")
        return None
    ranks = [o.rank for o in result.options]
    pick_key = f"pick_{key}"
    table_key = f"table_{key}"
    if pick_key not in S:
        S[pick_key] = ranks[0]

    def on_table():
        sel = S.get(table_key)
        rows = (sel or {}).get("selection", {}).get("rows", []) if isinstance(sel, dict) else \
            getattr(getattr(sel, "selection", None), "rows", [])
        if rows:
            S[pick_key] = ranks[rows[0]]

    st.dataframe(option_rows(result), key=table_key, on_select=on_table, selection_mode="single-row",
                 hide_index=True, height=min(38 + 35 * len(ranks), 320),
                 column_config={
                     "Rank": st.column_config.NumberColumn("Rank", width="small"),
                     "Series turns": st.column_config.NumberColumn("Series turns", format="%g"),
                     "Speed [rpm]": st.column_config.NumberColumn("Speed [rpm]", format="%.0f"),
                     "Least margin [%]": st.column_config.NumberColumn("Least margin [%]", format="%.1f",
                                                                       help="the smallest margin over every limit, "
                                                                            "as a share of that limit"),
                 })
    by_rank = {o.rank: o for o in result.options}
    st.selectbox("Look at option", ranks, key=pick_key, format_func=lambda r: _option_label(by_rank[r]),
                 help="or pick a row of the table")
    return by_rank[S[pick_key]]


def _caution(c):
    body = f"**{SEVERITY_WORDS.get(c.severity, c.severity)}:** {_md(c.message)}\n\n*Rests on:* {_md(c.basis)}"
    {"stop": st.error, "warn": st.warning}.get(c.severity, st.info)(body)


def _table(headers, rows):
    st.table([dict(zip(headers, r)) for r in rows])


def detail_section(result, option):
    st.header(f"4 · Option {option.rank} in detail", anchor="detail")
    st.markdown(f"*{_md(status_text(option, len(result.options)))}*")
    all_c = sorted_cautions(list(option.cautions) + list(result.cautions))
    for c in all_c:
        if c.severity == "stop":
            _caution(c)
    m, p = result.machine, result.profile
    st.subheader("Set the machine like this")
    _table(("What", "Setting"), setting_rows(option, m, p))
    if option.current_settings:
        st.markdown("**Field setting for each end of the welding range**")
        _table(("Welding current", "Field", "Arc-side voltage", "No-load voltage"), current_setting_rows(option))
    st.subheader("Cautions")
    rest = [c for c in all_c if c.severity != "stop"]
    for c in rest:
        _caution(c)
    if not all_c:
        st.markdown("No caution raised by the rules for this setting.")
    st.markdown(f"**{_md(STANDING_NOTICE)}**")
    c1, c2 = st.columns(2)
    with c1:
        st.subheader("What to expect")
        _table(("Figure", "Value"), figure_rows(option))
    with c2:
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


def curves_section(result, option, run, run_msg, key, texts):
    st.header("5 · Curves", anchor="curves")
    trimmed, text = _trim(result, option, key)
    if text and trimmed != option.setting:
        st.caption(f"Drawn with the {_md(text)}. The figures, margins, cautions and the sheet are for the option's setting.")
    trim = (trimmed.rheostat_ohm, trimmed.field_current_a)
    specs, err = state.chart_specs(texts[0], texts[1], option.rank, trim)
    if err:
        st.error(_md(err))
    for name, title, spec in specs:
        st.vega_lite_chart(spec, width="stretch")
        if name == "run" and run is not None:
            _table(("What", "Value"), run_rows(run))
    if result.profile.kind == "battery" and run is None and run_msg:
        st.info(_md(run_msg))
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
    what = f"{d.kind} rating" if d.coupled else "drive rating at the shaft"
    st.markdown(f"**Smallest {what}: {fmt(res.required_drive_kw, 'kW')}**"
                + (f" (the job gives {fmt(d.rated_power_kw, 'kW')})" if d.coupled else ""))
    o = res.option
    st.markdown(f"Best setting at that rating: {_md(o.setting.describe(with_connection=True))}; "
                f"peak shaft power {fmt(o.figures.get('max_shaft_power_kw'), 'kW')}, speed down to "
                f"{fmt(o.figures.get('min_speed_rpm'), 'rpm')}.")
    for n in res.notes:
        st.caption(_md(n))


def _slug(text):
    s = re.sub(r"[^a-z0-9]+", "-", str(text).lower()).strip("-")
    return s[:40] or "machine"


def downloads_section(result, option, run, key, machine_toml, profile_toml):
    st.header("6 · Take it to the machine", anchor="sheet")
    md = sheet_markdown(result, option.rank, run)
    S["sheet_markdown"] = md
    base = f"{_slug(result.machine.label)}-option-{option.rank}"
    html_key = f"{key}:{option.rank}:{date.today().isoformat()}"  # the sheet prints its date
    res, rank = result, option.rank
    files = {
        "sheet.html": (f"setting-sheet-{base}.html", lambda: state.sheet_html_cached(html_key, res, rank, run),
                       "text/html", "Setting sheet to print (.html)"),
        "sheet.md": (f"setting-sheet-{base}.md", md, "text/markdown", "Setting sheet as text (.md)"),
        "result.json": (f"search-{_slug(result.machine.label)}.json", dumps_json(result.as_dict()),
                        "application/json", "Search result (.json)"),
        "machine.toml": (f"{_slug(result.machine.label)}.toml", machine_toml, "application/toml",
                         "Machine data (.toml)"),
        "profile.toml": (f"job-{_slug(result.profile.label or result.profile.kind)}.toml", profile_toml,
                         "application/toml", "Job (.toml)"),
    }
    cols = st.columns(2)
    for j, (k, (name, data, mime, label)) in enumerate(files.items()):
        with cols[j % 2]:
            st.download_button(label, data=data, file_name=name, mime=mime, key=f"dl_{k}",
                               type="primary" if k == "sheet.html" else "secondary", on_click="ignore")
    with st.expander("Save them into a folder on this computer"):
        _save_form(files)


def _save_form(files):
    folder = st.text_input("Folder", value=str(Path.cwd()), key="save_folder")
    picked = st.multiselect("Files", list(files), default=["sheet.html", "machine.toml", "profile.toml"],
                            format_func=lambda k: files[k][0], key="save_pick")
    overwrite = st.checkbox("Replace files that already exist", key="save_force",
                            help="left unticked, an existing file is never overwritten")
    if st.button("Save", key="save_go"):
        msgs = []
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
        (st.success if level == "ok" else st.error)(_md(text))
