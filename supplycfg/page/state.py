"""Session state of the page and the cached solves.

The machine and the job in use are kept as their TOML tables (so what the
page shows, saves and solves is exactly what a file would hold); the solves
are cached on the TOML text.
"""

import hashlib

import streamlit as st

from ..errors import InputError
from ..files import dumps_toml
from ..profile import load_profile, profile_from_dict, profile_to_dict
from ..machine import load_machine, machine_from_dict, machine_to_dict
from ..validate import MAX_FILE_BYTES
from . import fields

S = st.session_state


def init():
    """Set up the session once: the battery-charging demo with its charging set."""
    if S.get("ready"):
        return
    S.mver = 0
    S.pver = 0
    S.machine_error = None
    S.profile_error = None
    S.machine_msg = None
    S.profile_msg = None
    mstem, pstem = fields.DEMO_PAIRS[fields.DEFAULT_KIND]
    load_demo_machine(mstem)
    load_demo_profile(pstem)
    S.kind_pick = fields.DEFAULT_KIND
    S.machine_demo = mstem
    S.ready = True


def _set_machine(machine, origin):
    S.machine_tables = machine_to_dict(machine)
    S.machine_origin = origin
    S.machine_error = None
    S.mver = S.get("mver", 0) + 1


def _set_profile(profile, origin):
    S.profile_tables = profile_to_dict(profile)
    S.profile_origin = origin
    S.profile_error = None
    S.kind = profile.kind
    S.pver = S.get("pver", 0) + 1


def load_demo_machine(stem):
    path = fields.demo_machines()[stem]
    _set_machine(load_machine(path), f"demo:{stem}")


def load_demo_profile(stem):
    path = fields.demo_profiles()[stem]
    _set_profile(load_profile(path), f"demo:{stem}")


def upload_bytes(up):
    """Bytes of an upload, refused above the size limit (before any parsing)."""
    size = getattr(up, "size", None)
    if size is not None and size > MAX_FILE_BYTES:
        raise InputError(up.name, "file", f"is {size} bytes; at most {MAX_FILE_BYTES} allowed (1 MB)")
    data = up.getvalue()
    if len(data) > MAX_FILE_BYTES:
        raise InputError(up.name, "file", f"is {len(data)} bytes; at most {MAX_FILE_BYTES} allowed (1 MB)")
    return data


# --- callbacks ---------------------------------------------------------------

def on_machine_demo():
    load_demo_machine(S.machine_demo)
    S.machine_msg = None


def _read_upload(widget_key, reader, msg_key):
    """The uploaded file read by ``reader`` and its name, or (None, None) with the message shown."""
    up = S.get(widget_key)
    if up is None:
        return None, None
    try:
        obj = reader(up.name, text=upload_bytes(up))
    except InputError as e:
        S[msg_key] = ("error", str(e))
        return None, None
    S[msg_key] = None
    return obj, up.name


def on_machine_upload():
    m, name = _read_upload("machine_upload", load_machine, "machine_msg")
    if m is not None:
        _set_machine(m, f"file:{name}")


def on_kind():
    kind = S.kind_pick
    mstem, pstem = fields.DEMO_PAIRS[kind]
    load_demo_profile(pstem)
    S.profile_msg = None
    if str(S.machine_origin).startswith("demo:") and S.machine_origin != f"demo:{mstem}":
        load_demo_machine(mstem)
        S.machine_demo = mstem
        S.machine_msg = ("info", f"Switched to the demo machine paired with this job ({mstem.replace('-', ' ')}).")


def on_profile_upload():
    p, name = _read_upload("profile_upload", load_profile, "profile_msg")
    if p is not None:
        _set_profile(p, f"file:{name}")
        S.kind_pick = p.kind


def machine_form_values():
    """What the machine form holds now, from its widgets."""
    pre = f"m{S.mver}:"
    vals = {k[len(pre):]: v for k, v in S.items() if isinstance(k, str) and k.startswith(pre)}
    for name in ("occ", "ar_table"):
        base = S.get(f"{pre}{name}_base")
        vals[name] = edited_table(base, S.get(f"{pre}{name}"))
    return vals


def edited_table(base, state):
    """The data editor's table: its starting columns with the person's edits applied."""
    if base is None:
        return {}
    cols = {k: list(v) for k, v in base.items()}
    names = list(cols)
    n = len(cols[names[0]]) if names else 0
    if not state:
        return cols
    edited = state.get("edited_rows", {}) if isinstance(state, dict) else {}
    added = state.get("added_rows", []) if isinstance(state, dict) else []
    deleted = set(state.get("deleted_rows", [])) if isinstance(state, dict) else set()
    for r, change in edited.items():
        r = int(r)
        for c, v in change.items():
            if c in cols and r < n:
                cols[c][r] = v
    keep = [i for i in range(n) if i not in deleted]
    cols = {c: [cols[c][i] for i in keep] for c in names}
    for row in added:
        for c in names:
            cols[c].append(row.get(c))
    return cols


def _internal(exc):
    line = f"internal error, please report it: {type(exc).__name__}: {str(exc)[:200]}"
    return {"key": "", "message": line, "line": line}


def _apply_form(which, tables_of, read, write, version):
    """Read one form into its tables: on success they are the data in use and the form starts again
    from them (its ``version`` key moves on); on bad input one line at the form, nothing lost."""
    try:
        data = read(tables_of(), fields.FORM)
    except InputError as e:
        S[f"{which}_error"] = {"key": e.key, "message": e.message, "line": str(e)}
        return
    except Exception as e:  # a fault of ours: one line at the form, never a traceback
        S[f"{which}_error"] = _internal(e)
        return
    S[f"{which}_tables"] = write(data)
    S[f"{which}_origin"] = "edited on this page"
    S[f"{which}_error"] = None
    S[f"{which}_msg"] = None
    S[version] += 1


def on_machine_apply():
    _apply_form("machine", lambda: fields.machine_tables_from_form(machine_form_values()),
                machine_from_dict, machine_to_dict, "mver")


def profile_form_values():
    pre = f"p{S.pver}:"
    return {k[len(pre):]: v for k, v in S.items() if isinstance(k, str) and k.startswith(pre)}


def on_profile_apply():
    _apply_form("profile", lambda: fields.profile_tables_from_form(S.kind, profile_form_values()),
                profile_from_dict, profile_to_dict, "pver")


# --- solves ------------------------------------------------------------------

def texts():
    """TOML text of the machine and the job in use (the cache keys)."""
    return dumps_toml(S.machine_tables), dumps_toml(S.profile_tables)


def digest(*parts):
    return hashlib.sha1("\x00".join(parts).encode("utf-8")).hexdigest()[:12]


@st.cache_data(max_entries=64, show_spinner="Searching the settings...")
def solve(machine_toml, profile_toml):
    """``(SearchResult, None)`` or ``(None, message)`` for the two TOML texts."""
    from ..search import search
    try:
        m = load_machine("machine.toml", machine_toml)
        p = load_profile("profile.toml", profile_toml)
        return search(m, p), None
    except InputError as e:
        return None, str(e)
    except Exception as e:  # a fault of ours: one line, never a traceback on the page
        return None, f"internal error, please report it: {type(e).__name__}: {e}"


@st.cache_data(max_entries=16, show_spinner="Trying drive ratings...")
def size(machine_toml, profile_toml):
    """``(SizeResult, None)`` or ``(None, message)``: the smallest drive rating for the job."""
    from ..sizing import required_drive_rating
    try:
        return required_drive_rating(load_machine("machine.toml", machine_toml),
                                     load_profile("profile.toml", profile_toml)), None
    except InputError as e:
        return None, str(e)
    except Exception as e:
        return None, f"internal error sizing the drive, please report it: {type(e).__name__}: {e}"


@st.cache_data(max_entries=64, show_spinner="Running the charge...")
def charge(machine_toml, profile_toml, rank):
    """The charge run of option ``rank``: ``(ChargeRun or None, message or None)``."""
    res, err = solve(machine_toml, profile_toml)
    if res is None or res.profile.kind != "battery":
        return None, err
    try:
        from ..simulation import charge_run_for_option
    except ImportError:
        return None, "the charge run is not available in this version"
    opt = next((o for o in res.options if o.rank == rank), None)
    if opt is None:
        return None, None
    try:
        return charge_run_for_option(res.machine, res.profile, opt), None
    except InputError as e:
        return None, str(e)
    except Exception as e:
        return None, f"internal error in the charge run, please report it: {type(e).__name__}: {e}"


def inline_data(spec):
    """The spec with each named dataset written into the views that draw it (in place).

    Streamlit turns named datasets into Arrow tables on every run and the
    browser turns them back into rows; rows written in the views travel in
    the spec as they are.
    """
    sets = spec.pop("datasets", None) or {}

    def walk(view):
        data = view.get("data")
        if isinstance(data, dict) and data.get("name") in sets:
            view["data"] = {"values": sets[data["name"]]}
        for key in ("layer", "vconcat", "hconcat", "concat"):
            for sub in view.get(key) or []:
                walk(sub)

    for key in ("layer", "vconcat", "hconcat", "concat"):
        for sub in spec.get(key) or []:
            walk(sub)
    return spec


def _option_specs(machine_toml, profile_toml, rank, trim, only):
    """Specs ``[(name, title, spec)]`` of the charts ``only`` of option ``rank`` drawn with ``trim``."""
    from dataclasses import replace
    from .. import charts
    from ..report import other_tap_options
    res, err = solve(machine_toml, profile_toml)
    if res is None:
        return [], err
    opt = next((o for o in res.options if o.rank == rank), None)
    if opt is None:
        return [], None
    shown = opt if trim is None else replace(opt, setting=replace(opt.setting, rheostat_ohm=trim[0],
                                                                   field_current_a=trim[1]))
    run, _ = charge(machine_toml, profile_toml, rank) if res.profile.kind == "battery" else (None, None)
    taps = other_tap_options(res, opt) if res.profile.kind == "welding" else ()
    try:
        out = charts.option_charts(res.machine, res.profile, shown, taps, run, only=only)
        return [(name, title, inline_data(charts.chart_spec(ch, validate=False, thin=True)))
                for name, title, ch in out], None
    except InputError as e:
        return [], str(e)
    except Exception as e:
        return [], f"internal error drawing the curves, please report it: {type(e).__name__}: {e}"


@st.cache_data(max_entries=64, show_spinner="Drawing the curves...")
def setting_free_specs(machine_toml, profile_toml, rank):
    """The option's charts that do not change with the field trim (the charge run, the cells' curves)."""
    from ..charts import SETTING_FREE_CHARTS
    return _option_specs(machine_toml, profile_toml, rank, None, SETTING_FREE_CHARTS)


@st.cache_data(max_entries=256, show_spinner="Drawing the curves...")
def setting_specs(machine_toml, profile_toml, rank, trim):
    """The option's charts drawn with the field control ``trim``."""
    from ..charts import CHART_ORDER, SETTING_FREE_CHARTS
    return _option_specs(machine_toml, profile_toml, rank, trim,
                         tuple(k for k in CHART_ORDER if k not in SETTING_FREE_CHARTS))


def chart_specs(machine_toml, profile_toml, rank, trim):
    """Vega-Lite specs ``[(name, title, spec)]`` of option ``rank`` with the field control ``trim``.

    ``trim`` is ``(rheostat_ohm, field_current_a)`` for the curves of the
    machine; the charge run always follows the option's own setting. Moving
    the trim redraws only the charts that depend on it.
    """
    from ..charts import CHART_ORDER
    drawn, err = setting_specs(machine_toml, profile_toml, rank, trim)
    if err:
        return drawn, err
    fixed, err = setting_free_specs(machine_toml, profile_toml, rank)
    return sorted(drawn + fixed, key=lambda item: CHART_ORDER.index(item[0])), err


@st.cache_data(max_entries=64, show_spinner=False)
def wiring_of(machine_toml, kind, setting, electrode="+"):
    """The wiring drawing of a setting: ``(svg, steps in words)``; ``electrode`` the welding electrode's polarity."""
    from ..wiring import wiring, wiring_svg
    m = load_machine("machine.toml", machine_toml)
    w = wiring(m, setting, kind, electrode)
    return wiring_svg(w), list(w.steps)


_HTML_CACHE = {}


def sheet_html_cached(key, result, rank, run):
    """The printable sheet, built once per (inputs, option): exporting charts takes a moment."""
    from ..report import sheet_html
    if key not in _HTML_CACHE:
        if len(_HTML_CACHE) > 16:
            _HTML_CACHE.clear()
        _HTML_CACHE[key] = sheet_html(result, rank, run)
    return _HTML_CACHE[key]
