"""The page's inputs: the machine and the job, each from a demo, a file or a form."""

import streamlit as st

from ..jobs import KINDS
from ..report import md_data
from . import fields, state

S = st.session_state
#: Largest upload the page takes [MB]; the readers refuse more than 1 MB too.
UPLOAD_LIMIT_MB = 1


def _origin_text(origin):
    """Where the data in use came from, as Markdown: file names are data."""
    if origin.startswith("demo:"):
        return f"demo file {md_data(origin[5:])}.toml"
    if origin.startswith("file:"):
        return f"your file {md_data(origin[5:])}"
    return md_data(origin)


def _field_error(err, fid):
    if err and fields.error_field(err["key"]) == fid:
        st.error(md_data(err["message"]), icon=None)
        return True
    return False


def _text_field(pre, fid, label, help_text, value, err, choices=None):
    key = f"{pre}{fid}"
    if choices is not None:
        if key not in S:
            S[key] = value if value in choices else choices[0]
        st.selectbox(label, choices, key=key, help=help_text)
    else:
        if key not in S:
            S[key] = value
        st.text_input(label, key=key, help=help_text)
    return _field_error(err, fid)


def in_use_text():
    """'Machine: … · Job: …' with the labels as inert text."""
    m = S.machine_tables["machine"].get("label") or "(no name)"
    j = S.profile_tables["load"].get("label") or "(no name)"
    return (f"**Machine:** {md_data(m)} ({_origin_text(S.machine_origin)}) · "
            f"**Job:** {md_data(j)} ({fields.KIND_LABELS[S.kind].lower()}, {_origin_text(S.profile_origin)})")


def sidebar_picks():
    """The quick choices, aside: the job, a demo machine, your own files."""
    st.header("Machine and job")
    st.radio("What must the machine do?", KINDS, key="kind_pick", format_func=fields.KIND_LABELS.get,
             on_change=state.on_kind)
    st.file_uploader(f"Your job file (.toml, up to {UPLOAD_LIMIT_MB} MB)", type=["toml"], key="profile_upload",
                     on_change=state.on_profile_upload, max_upload_size=UPLOAD_LIMIT_MB)
    _message(S.profile_msg)
    demos = fields.demo_machines()
    st.selectbox("Demo machine", list(demos), key="machine_demo", on_change=state.on_machine_demo,
                 format_func=lambda s: s.replace("-", " "))
    st.file_uploader(f"…or your machine file (.toml, up to {UPLOAD_LIMIT_MB} MB)", type=["toml"],
                     key="machine_upload", on_change=state.on_machine_upload, max_upload_size=UPLOAD_LIMIT_MB)
    _message(S.machine_msg)
    st.caption("Every value can be seen and changed under *The machine and the job in detail* at the foot of the page.")


def machine_section():
    st.subheader("The machine", anchor="machine")
    label = S.machine_tables["machine"].get("label") or "(no name)"
    st.markdown(f"In use: **{md_data(label)}**, from {_origin_text(S.machine_origin)}.")
    err = S.machine_error
    # the form is drawn only when asked for: its forty fields and two tables cost the browser time on load
    if err:
        S.show_machine_form = True
    if st.toggle("See or change the machine data", key="show_machine_form"):
        _machine_form(err)


def _message(msg):
    if msg:
        level, text = msg
        (st.error if level == "error" else st.info)(md_data(text))


def _machine_form(err):
    pre = f"m{S.mver}:"
    vals = fields.machine_form_values(S.machine_tables)
    with st.form(f"machine_form_{S.mver}", border=False):
        if err:
            st.error(f"Not applied: {md_data(err['line'])}")
        groups = (("Ratings", ("machine.label", "machine.poles", "machine.rated_voltage_v",
                               "machine.rated_armature_current_a", "machine.rated_speed_rpm",
                               "machine.peak_armature_current_a")),
                  ("Armature and shunt field", ("machine.armature_resistance_ohm", "machine.brush_drop_v",
                                                "machine.shunt_field_resistance_ohm", "machine.shunt_turns_per_pole",
                                                "machine.rheostat_max_ohm", "machine.excitation_voltage_v",
                                                "machine.reference_temperature_c")),
                  ("Series winding", ("machine.series_field_resistance_ohm", "machine.series_turns_per_pole",
                                      "machine.series_taps")),
                  ("Open-circuit test", ("open_circuit.speed_rpm", "open_circuit.interpolation")),
                  ("Losses (optional; blank for the defaults)", ("losses.rotational_loss_w",
                                                                 "losses.rotational_loss_speed_exponent",
                                                                 "losses.stray_load_loss_percent")))
        spec = {fields.field_id(t, k): (lab, kind, hlp) for t, k, lab, kind, hlp in fields.MACHINE_FIELDS}
        for title, ids in groups:
            st.markdown(f"**{title}**")
            cols = st.columns(2)
            for j, fid in enumerate(ids):
                lab, kind, hlp = spec[fid]
                with cols[j % 2]:
                    choices = fields.CHOICES[kind.split(":")[1]] if kind.startswith("choice") else None
                    _text_field(pre, fid, lab, hlp, vals[fid], err, choices)
        st.caption("Open-circuit test points: EMF against shunt-field current, starting at 0 A (the residual voltage). "
                   "Add or delete rows at the table's edge.")
        S[f"{pre}occ_base"] = vals["occ"]
        st.data_editor(vals["occ"], key=f"{pre}occ", num_rows="dynamic", hide_index=True,
                       column_config={c: st.column_config.NumberColumn(c, format="%.4g") for c in vals["occ"]})
        _field_error(err, "open_circuit.table")
        st.markdown("**Armature reaction and winding**")
        key = f"{pre}ar_mode"
        if key not in S:
            S[key] = vals["ar_mode"]
        st.selectbox("Armature reaction", list(fields.AR_MODES), key=key, format_func=fields.AR_MODES.get)
        _field_error(err, "armature_reaction")
        lab, kind, hlp = spec["armature_reaction.demagnetizing_at_per_pole_at_rated"]
        _text_field(pre, "armature_reaction.demagnetizing_at_per_pole_at_rated", lab, hlp,
                    vals["armature_reaction.demagnetizing_at_per_pole_at_rated"], err)
        st.caption("Armature-reaction table (used when 'from a table' is chosen): starts at 0 A, 0 AT.")
        S[f"{pre}ar_table_base"] = vals["ar_table"]
        st.data_editor(vals["ar_table"], key=f"{pre}ar_table", num_rows="dynamic", hide_index=True,
                       column_config={c: st.column_config.NumberColumn(c, format="%.4g") for c in vals["ar_table"]})
        _field_error(err, "armature_reaction.table")
        cols = st.columns(2)
        for j, fid in enumerate(("winding.conductors", "winding.parallel_paths")):
            lab, kind, hlp = spec[fid]
            with cols[j]:
                _text_field(pre, fid, lab, hlp, vals[fid], err)
        _field_error(err, "winding")
        st.form_submit_button("Use these machine data", type="primary", on_click=state.on_machine_apply)


def job_section():
    st.subheader("The job", anchor="job")
    label = S.profile_tables["load"].get("label") or "(no name)"
    st.markdown(f"In use: **{md_data(label)}** ({fields.KIND_LABELS[S.kind].lower()}), "
                f"from {_origin_text(S.profile_origin)}.")
    err = S.profile_error
    if err:
        S.show_profile_form = True
    if st.toggle("See or change what the load needs", key="show_profile_form"):
        _profile_form(err)


def _profile_form(err):
    pre = f"p{S.pver}:"
    vals = fields.profile_form_values(S.profile_tables)
    with st.form(f"profile_form_{S.pver}", border=False):
        if err:
            st.error(f"Not applied: {md_data(err['line'])}")
        specs = fields.DRIVE_FIELDS + fields.PROFILE_FIELDS[S.kind]
        cols = st.columns(2)
        for j, (table, key, lab, kind, hlp) in enumerate(specs):
            fid = fields.field_id(table, key)
            with cols[j % 2]:
                choices = fields.CHOICES[kind.split(":")[1]] if kind.startswith("choice") else None
                _text_field(pre, fid, lab, hlp, vals.get(fid, ""), err, choices)
        for t in ("load", "drive", S.kind):
            _field_error(err, t)
        st.form_submit_button("Use this job", type="primary", on_click=state.on_profile_apply)
