"""The setting sheet: one option of the search, written for the person at the machine.

Two forms with the same content: Markdown, and a printable HTML page with the
charts inline as SVG (exported by ``vl-convert``, no network). What is needed
at the machine comes first and fits one A4 page when printed: the setting
card (in the trade's words, with the meter readings and their bands, the
welding dial or the charge plan where the search gives them, and one line on
why it ranks where it does), the wiring drawing and a checklist with
Expected, Measured and Initials columns. Figures, margins, cautions, curves,
the machine and the job (in plain words with units) follow.

Labels are data: every text from a file or a form is escaped for the format
it enters (:func:`esc` for HTML, :func:`md_data` for Markdown) after its
hidden characters are made visible, so a label can neither add markup nor
reorder or hide what follows. The sheet carries the tool's version, the date
and the standing notice.
"""

import dataclasses
import datetime as _dt
import html
import math
import re
from pathlib import Path

from . import STANDING_NOTICE, __version__
from .errors import InputError
from .files import write_atomic
from .wording import connection_words, glossary_for, name_words, source_text, visible_text

SEVERITY_ORDER = ("stop", "warn", "note")
SEVERITY_WORDS = {"stop": "STOP", "warn": "Warning", "note": "Note"}
KIND_WORDS = {"battery": "battery charging", "welding": "arc welding", "lighting": "lighting over a feeder",
              "booster": "feeder boosting"}
#: Width of the charts on the printed sheet [px]: fits A4 portrait with margins.
SHEET_CHART_WIDTH = 560
#: Columns of a battery option's charge-plan table.
PLAN_HEADERS = ("Stage", "Field", "Time", "Current", "Volts per cell at its end", "Ends because")

# unit suffixes of figure names, longest first
_UNITS = (("_v_per_a", "V/A"), ("_m3_per_h", "m³/h"), ("_percent", "%"), ("_rpm", "rpm"), ("_ohm", "Ω"), ("_kw", "kW"),
          ("_kwh", "kWh"), ("_ah", "Ah"), ("_a", "A"), ("_v", "V"), ("_h", "h"), ("_c", "°C"))

#: Plain words for the figures the search reports; others are named from their key.
FIGURE_WORDS = {
    "hours_to_full": ("hours to full at {setting}", "h"),
    "hours_to_full_longest": ("hours to full, longest over the speed and temperature range", "h"),
    "ah_charge_factor": ("ampere-hours delivered per ampere-hour stored", "×"),
    "gassing_state_of_charge": ("state of charge where gassing begins (0 to 1)", ""),
    "stages": ("stages of the charge plan", ""),
    "start_charge_current_a": "charging current at the start, {setting}",
    "start_charge_current_cold_a": "charging current at the start, {cold}",
    "start_charge_current_hot_a": "charging current at the start, {hot}",
    "handover_current_a": "current at the hand-over to the finish, {setting}",
    "handover_state_of_charge": ("state of charge at the hand-over (0 to 1)", ""),
    "finish_start_current_a": "current when the finish starts, {setting}",
    "end_charge_current_a": "current at the end of charge, {setting}",
    "end_volts_per_cell": ("volts per cell at the end of charge, {setting}", "V"),
    "end_volts_per_cell_cold": ("volts per cell at the end of charge, {cold}", "V"),
    "handover_volts_per_cell": ("hand-over voltage per cell at the battery's temperature", "V"),
    "gassing_volts_per_cell": ("gassing voltage per cell at the battery's temperature", "V"),
    "highest_volts_per_cell_limit": ("highest cell voltage allowed at the battery's temperature", "V"),
    "ventilation_m3_per_h": "battery-room airflow for this plan (IEC 62485-2)",
    "ventilation_opening_cm2": ("natural-ventilation opening, inlet and outlet each", "cm²"),
    "gas_current_ma_per_ah": ("gas current behind the airflow", "mA/Ah"),
    "cutout_closing_voltage_v": "reverse-current cut-out closes at",
    "cut_in_speed_cold_rpm": "speed at which the cut-out closes, cold windings",
    "cut_in_speed_hot_rpm": "speed at which the cut-out closes, hot windings",
    "standstill_backfeed_current_a": "current a full bank drives back at standstill with no cut-out",
    "start_charge_current_highest_a": "charging current at the start, highest over the range",
    "main_charge_current_highest_a": "main-charge current, highest along the charge and over the range",
    "main_charge_current_lowest_a": "main-charge current, lowest along the charge and over the range",
    "finish_current_highest_a": "current above the hand-over voltage, highest over the range",
    "highest_volts_per_cell": ("volts per cell, highest over the plan and the range", "V"),
    "no_load_voltage_min_v": "no-load voltage, lowest",
    "no_load_voltage_max_v": "no-load voltage, highest",
    "bank_open_circuit_voltage_start_v": "bank rest voltage at the start",
    "bank_open_circuit_voltage_end_v": "bank rest voltage at the end",
    "max_armature_current_a": "armature current, highest",
    "max_working_armature_current_a": "armature current while welding, highest (without a stuck electrode)",
    "min_net_mmf_a": "net field as equivalent field current, lowest",
    "max_net_mmf_a": "net field as equivalent field current, highest",
    "min_generated_emf_v": "generated EMF, lowest",
    "critical_resistance_ratio": ("critical over actual field-circuit resistance, lowest", "×"),
    "critical_speed_ratio": ("speed over critical speed, lowest", "×"),
    "load_voltage_max_v": "load-end voltage, highest",
    "load_voltage_min_v": "load-end voltage, lowest",
    "band_low_v": "lowest voltage allowed",
    "band_high_v": "highest voltage allowed",
    "regulation_band_percent": "spread of the load-end voltage",
    "lamp_light_at_low": ("lamp light at the lowest voltage", "× rated"),
    "lamp_light_at_high": ("lamp light at the highest voltage", "× rated"),
    "lamp_life_at_high": ("lamp life at the highest voltage", "× rated"),
    "lamp_life_at_low": ("lamp life at the lowest voltage", "× rated"),
    "low_end_current_a": "welding current at the low end",
    "high_end_current_a": "welding current at the high end",
    "low_end_current_envelope_min_a": "low-end current over the speed and temperature range, lowest",
    "low_end_current_envelope_max_a": "low-end current over the speed and temperature range, highest",
    "high_end_current_envelope_min_a": "high-end current over the speed and temperature range, lowest",
    "high_end_current_envelope_max_a": "high-end current over the speed and temperature range, highest",
    "low_end_shaft_power_kw": "shaft power at the dial's low end, highest over the speed and temperature range",
    "high_end_shaft_power_kw": "shaft power at the dial's high end, highest over the speed and temperature range",
    "max_no_load_voltage_v": "no-load voltage (mean), highest",
    "no_load_peak_voltage_v": "no-load voltage (peak, with commutator ripple)",
    "no_load_limit_v": "no-load voltage limit (peak)",
    "no_load_mean_limit_v": "no-load voltage limit (mean, site rule)",
    "slope_low_end_v_per_a": "slope of the characteristic at the low end",
    "slope_high_end_v_per_a": "slope of the characteristic at the high end",
    "stuck_electrode_current_a": "stuck-electrode current",
    "duty_equivalent_current_a": "duty-cycle equivalent current (I·√duty: optimistic, the maker's duty rating comes first)",
    "top_speed_rpm": "drive's top speed at the generator shaft (with no load on the drive at all)",
    "min_no_load_voltage_v": "no-load voltage (mean), lowest",
    "no_load_strike_min_v": "no-load voltage an arc needs to strike",
    "tap_changes": ("tap or diverter changes along the welding dial", ""),
    "max_terminal_voltage_v": ("terminal voltage at the job's points, highest", "V"),
    "max_shaft_power_kw": ("shaft power, highest over the job's load points", "kW"),
    "min_speed_rpm": "generator speed under load, lowest",
    "max_speed_rpm": "generator speed under load, highest",
    "min_efficiency_percent": "efficiency of the generator at the job's points, lowest (at the lightest load)",
    "heaviest_point_efficiency_percent": "efficiency of the generator at the job's heaviest point",
    "no_load_speed_rpm": "generator speed at no load",
    "collapsed_load_points": ("load points where the field collapses at the drive's speed", ""),
    "max_drive_loading_percent": "drive loading, highest (shaft power over its rating)",
    "drive_rated_power_kw": ("drive rating", "kW"),
    "max_drive_torque_percent": "motor torque, highest (share of its rated torque)",
    "breakdown_torque_percent": "motor breakdown torque (share of its rated torque)",
    "idle_no_load_voltage_v": "no-load voltage at the engine's idle",
    "idle_builds_up": ("field builds up at the engine's idle (1 yes, 0 no)", ""),
}

#: Plain words for the limits the search checks.
LIMIT_WORDS = {
    "charge_current_max": "main-charge current, highest along the charge, at most the battery's highest",
    "main_charge_current_min": "main-charge current at least the lowest asked",
    "finish_current_max": "current above the hand-over voltage at most the finishing current",
    "end_volts_per_cell": "volts per cell within the chemistry's highest",
    "hours_to_full": "full within the target hours",
    "no_load_above_cutout": "no-load voltage above the cut-out's closing voltage",
    "armature_current_rating": "armature current within rating",
    "load_voltage_high": "load-end voltage not above the band",
    "load_voltage_low": "load-end voltage not below the band",
    "current_low_end": "low end of the welding range reached",
    "current_high_end": "high end of the welding range reached",
    "no_load_peak_voltage": "no-load peak voltage within the standard's limit",
    "no_load_mean_voltage": "no-load voltage within the site limit",
    "characteristic_slope_low": "characteristic the process needs at the low end",
    "characteristic_slope_high": "characteristic the process needs at the high end",
    "stuck_electrode_current": "stuck-electrode current within the peak rating",
    "duty_cycle_heating": "duty-cycle heating within the continuous rating",
    "dial_current": "every welding-dial current reached within 3 % (hot windings; set by the field ammeter, cold too)",
    "no_load_strike_voltage": "no-load voltage high enough to strike an arc",
    "characteristic_slope": "characteristic the process needs on every dial row",
    "arc_stability": "arc stable on every dial row (the machine's slope below the arc line's and the leads')",
    "exciter_supply": "field current within the exciter's reach",
    "solve_not_converged": "the solve converged",
    "stop_caution": "no stop caution",
    "drive_power": "shaft power within the drive's rating",
}


def esc(text):
    """HTML-escape any text from a file or a form; hidden characters shown as escapes."""
    return html.escape(visible_text(text), quote=True)


#: Markdown markup in our own sentences: emphasis, code, links, tables, headings, maths.
_MD_SPECIAL = re.compile(r"([\\`*_\[\]|~#$])")
#: In file text, every mark that can open or close inline markup, a page directive or an autolink (with
#: line breaks shown as escapes no block can start): emphasis, code, links and images, tables, headings,
#: maths, ``:directives:``, ``scheme:`` and ``user@host`` autolinks.
_MD_DATA = re.compile(r"([\\`*_\[\]|~#$:@!^{}])")
_WWW = re.compile(r"(?i)\b(www)\.")


def _html_min(text):
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def md_esc(text):
    """Our own sentences made safe inside Markdown (and a Markdown table cell): no markup, no HTML."""
    return _html_min(_MD_SPECIAL.sub(r"\\\1", visible_text(text)))


def md_data(text):
    """Text from a file or a form (a label, a file name, a message quoting them) as inert Markdown.

    Every hidden character becomes a visible escape (line breaks included, so
    no heading or list can start), every mark that could open markup is
    backslash-escaped (no emphasis, link, autolink, table cell, heading,
    maths or page directive) and ``& < >`` become HTML entities.
    """
    s = _MD_DATA.sub(r"\\\1", visible_text(text))
    return _html_min(_WWW.sub(r"\1\\.", s))


def fmt(value, unit=""):
    """A number as a technician reads it; '–' for none."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        v = float(value)
        if not math.isfinite(v):
            return "–"
        if abs(v) < 1e-9:
            v = 0.0  # rounding noise of the solvers, not a figure
        s = f"{v:.0f}" if abs(v) >= 1000 else f"{v:.4g}"
    else:
        s = str(value)
    return f"{s} {unit}".strip()


def figure_label(key):
    """(words, unit) of a figure name."""
    w = FIGURE_WORDS.get(key)
    if isinstance(w, tuple):
        return w
    unit = ""
    for suf, u in _UNITS:
        if key.endswith(suf):
            unit = u
            if w is None:
                key = key[: -len(suf)]
            break
    return (w or key.replace("_", " ")), unit


def limit_label(name):
    return LIMIT_WORDS.get(name, name.replace("_", " "))


#: How a broken limit reads after "breaks" where its name, said as the rule, would read backwards
#: ("breaks: no stop caution").
BROKEN_WORDS = {
    "stop_caution": "carries a stop caution",
    "solve_not_converged": "the solve did not converge",
}


#: Each stop caution in a few words, for a row that has room for no more (a fleet row).
STOP_WORDS = {
    "overspeed": "overspeed", "armature-peak": "armature current past its short-time limit",
    "drive-overload": "engine past its short overload", "drive-stall": "motor stalls",
    "drive-collapse": "field collapses at the drive's speed", "reversed-polarity": "reversed polarity",
    "reversed-build-up": "builds up reversed", "runaway": "no operating point",
    "battery-back-feed": "the bank back-feeds the machine", "battery-series-back-current": "series turns with a battery",
    "battery-temperature": "bank too hot to charge", "welding-no-load-voltage": "no-load voltage above the standard's limit",
    "welding-no-load-local-limit": "no-load voltage above the site limit",
    "welding-no-load-voltage-unknown": "no-load voltage unknown",
    "welding-stuck-electrode": "stuck-electrode current past the short-time limit",
    "job-above-peak": "the job's load past the machine's short-time limit: machine too small",
}


def broken_limits_text(failed, stops=()):
    """The limits an option breaks, in words, joined by commas ('' for none); ``stops`` (the rules of its
    stop cautions) are named after 'carries a stop caution'."""
    words = []
    for n in failed:
        w = BROKEN_WORDS.get(n) or limit_label(n)
        if n == "stop_caution" and stops:
            w += " (" + ", ".join(dict.fromkeys(STOP_WORDS.get(r, r.replace("-", " ")) for r in stops)) + ")"
        words.append(w)
    return ", ".join(words)


def speed_words(cond):
    """A condition's speed in words: the speed itself, or on an engine or a motor its top speed.

    The top speed is the drive's at zero shaft power; the generator's own no-load
    speed is a little lower (its rotational losses load the drive).
    """
    sp = fmt(cond["speed_rpm"], "rpm")
    kind = cond.get("drive")
    return f"the {kind}'s speed under load (top speed {sp})" if kind else sp


def condition_words(option):
    """Plain words for the conditions an option's figures hold at (``{setting}``, ``{cold}``, ``{hot}``)."""
    conds = (getattr(option, "extras", None) or {}).get("conditions") or {}
    words = {"setting": "the setting's speed and winding temperature", "cold": "cold windings, top speed",
             "hot": "hot windings, lowest speed"}
    for k, c in conds.items():
        words[k] = f"{speed_words(c)}, windings {fmt(c['winding_temperature_c'], '°C')}"
    return words


def figure_rows(option):
    """``[(words, value text)]`` of an option's figures, each labelled with the conditions it holds at."""
    rows = []
    at = condition_words(option)
    for k, v in option.figures.items():
        if v is None:
            continue  # a figure that does not apply to this setting (the idle of an engine on a motor drive)
        words, unit = figure_label(k)
        row = (words.format(**at) if "{" in words else words, fmt(v, unit))
        # two corners that coincide (hot windings at the nominal speed) read the same: say it once
        if row not in rows:
            rows.append(row)
    return rows


def plan_table(option):
    """``[(stage, field, time, current, end volts per cell, ends because)]`` of a battery option's plan."""
    from .jobs.battery import plan_rows
    return plan_rows((getattr(option, "extras", None) or {}).get("plan") or [], ohm="Ω")


def cutout_rows(option):
    """``[(what, value)]`` of the reverse-current cut-out figures of a battery option."""
    f = option.figures
    if "cutout_closing_voltage_v" not in f:
        return []
    return [("Cut-out closes at", fmt(f.get("cutout_closing_voltage_v"), "V")),
            ("Machine reaches it at", f"{fmt(f.get('cut_in_speed_cold_rpm'), 'rpm')} cold, "
                                      f"{fmt(f.get('cut_in_speed_hot_rpm'), 'rpm')} hot"),
            ("Back-feed at standstill without a cut-out", fmt(f.get("standstill_backfeed_current_a"), "A"))]


def _unit_words(unit):
    return {"ohm": "Ω", "fraction": "%"}.get(unit, unit)


def margin_rows(option):
    """``[(limit words, value, limit, margin, inside %, status)]`` of an option's margins."""
    rows = []
    for name, m in option.margins.items():
        unit = m.get("unit", "")
        scale = 100.0 if unit == "fraction" else 1.0
        u = _unit_words(unit)
        val = m.get("value")
        lim = m.get("limit")
        mar = m.get("margin")
        frac = m.get("fraction")
        rows.append((limit_label(name), fmt(None if val is None else val * scale, u),
                     fmt(None if lim is None else lim * scale, u),
                     fmt(None if mar is None else mar * scale, u),
                     fmt(None if frac is None else 100.0 * frac, "%"),
                     "inside" if frac is not None and frac >= 0 else "broken"))
    return rows


def field_control_text(option, machine=None):
    """How the field is set: rheostat, exciter field current, or the series winding alone."""
    s = option.setting
    if s.connection == "series":
        return "series winding only (no shunt field)"
    if s.field_current_a is not None:
        return f"exciter field current {fmt(s.field_current_a, 'A')}"
    if s.connection.startswith("separate"):
        ev = getattr(machine, "excitation_voltage_v", None)
        src = f" on the {fmt(ev, 'V')} exciter" if ev else ""
        return f"field rheostat {fmt(s.rheostat_ohm, 'Ω')}{src}"
    return f"field rheostat {fmt(s.rheostat_ohm, 'Ω')}"


def low_end_readings(option):
    """The meter readings an option is set by, and whether they are a welding dial's: ``(readings, on_dial)``.

    The option's own ``readings``, or for a welding option its dial's first
    row (the low end of the range); ``({}, ...)`` where it has none.
    """
    r = _mapping(option_value(option, "readings"))
    dial = option_value(option, "dial") or []
    if not r and dial:
        r = _mapping(_mapping(dial[0]).get("readings"))
    return r, bool(dial)


def field_reading_text(option):
    """The field as set at the machine, rounded to what can be set: ``rheostat 30.7 Ω, reads 0.99 A hot``.

    The readings of :func:`low_end_readings`; the exact setting where there are none.
    """
    r, on_dial = low_end_readings(option)
    if option.setting.connection == "series" or not r:
        return field_control_text(option).replace("field rheostat", "rheostat").replace("exciter field current", "field")
    hot = _mapping(r.get("field_current_a")).get("hot")
    where = " (dial's low end)" if on_dial else ""
    if _given(r.get("rheostat_ohm")):
        return f"rheostat {fmt(r['rheostat_ohm'], 'Ω')}" + (f", reads {fmt(hot, 'A')} hot" if _given(hot) else "") + where
    return (f"field {fmt(hot, 'A')} hot" if _given(hot) else field_control_text(option)) + where


def field_source_text(option, machine=None):
    """Where the field is fed from, without a value (the readings give the values)."""
    s = option.setting
    if s.connection == "series":
        return "series winding only (no shunt field)"
    if s.connection.startswith("separate"):
        ev = getattr(machine, "excitation_voltage_v", None)
        return f"from the {fmt(ev, 'V')} exciter through the rheostat" if ev else "from a separate field supply"
    return "shunt field through the rheostat"


def option_value(option, key):
    """An option's ``readings``, ``band``, ``dial``, ``plan`` (or any key of its JSON), None where it has none.

    The meter readings with their bands, the welding dial and the charge
    plan are the core's (the search states them per option); the sheet and
    the page only show them.
    """
    v = getattr(option, key, None)
    if v is None and hasattr(option, "as_dict"):
        try:
            v = option.as_dict().get(key)
        except Exception:  # an option that cannot say: shown without it
            v = None
    return v


def _mapping(x):
    if x is None or isinstance(x, dict):
        return x or {}
    return x.as_dict() if hasattr(x, "as_dict") else dict(vars(x))


def _pair_text(pair, unit, digits=3):
    if not isinstance(pair, (list, tuple)) or len(pair) != 2 or not all(_given(v) for v in pair):
        return None
    return f"{_round(pair[0], digits)} to {_round(pair[1], digits)} {unit}"


def _round(v, digits=3):
    """A reading as it can be set: ``digits`` significant figures."""
    return f"{float(v):.{digits}g}"


def window_words(pair, digits=3):
    """A reading's window in few words, e.g. ``'keep 1.33–1.48'`` (the reading beside it gives the unit)."""
    return f"keep {_round(pair[0], digits)}–{_round(pair[1], digits)}"


def field_window_text(band, digits=3, hot_first=False):
    """The field ammeter's window in words: ``'1.28 to 1.35 A cold, 1.13 to 1.2 A hot'`` where the band has
    one per temperature, else the one window (None with none)."""
    from .readings import field_windows
    windows = field_windows(band)
    parts = [(_pair_text(w, "A", digits), k) for k, w in (windows[::-1] if hot_first else windows)]
    parts = [f"{t} {k}".strip() for t, k in parts if t]
    return ", ".join(parts) or None


def readings_rows(option, readings=None, band=None):
    """``[(what, how)]``: the field ammeter's readings, the rheostat and their bands, where the core gives them."""
    r = _mapping(option_value(option, "readings") if readings is None else readings)
    b = _mapping(option_value(option, "band") if band is None else band)
    rows = []
    fc = r.get("field_current_a")
    if isinstance(fc, dict) and any(_given(fc.get(k)) for k in ("cold", "hot")):
        from .readings import field_windows
        windows = dict(field_windows(b))
        if "cold" in windows:
            # each reading with its own temperature's window beside it
            parts = [f"{_round(fc[k])} A {k}" + (f" ({window_words(windows[k])})" if k in windows else "")
                     for k in ("cold", "hot") if _given(fc.get(k))]
            rows.append(("Field ammeter reads", ", ".join(parts)))
        else:
            parts = [f"{_round(fc[k])} A {k}" for k in ("cold", "hot") if _given(fc.get(k))]
            keep = field_window_text(b)
            rows.append(("Field ammeter reads", ", ".join(parts) + (f"; set it within {keep}" if keep else "")))
    elif _given(fc):
        keep = _pair_text(b.get("field_current_a"), "A")
        rows.append(("Field ammeter reads", f"{_round(fc)} A" + (f"; set it within {keep}" if keep else "")))
    rh = r.get("rheostat_ohm")
    if _given(rh):
        travel = r.get("rheostat_travel_percent")
        keep = _pair_text(b.get("rheostat_ohm"), "Ω")
        rows.append(("Field rheostat", f"{_round(rh)} Ω" + (f" ({_round(travel, 2)} % of its travel)" if _given(travel) else "")
                     + (f"; every limit holds from {keep}" if keep else "")))
    return rows


#: Where the field ammeter's reading of a setting is taken, per job (the welding dial says it per row): a
#: self-excited charging set's field follows the bank's voltage, so its reading is the one on charge.
READING_WHERE = {"battery": "on charge at the start", "lighting": "at no load",
                 "booster": "at no load"}


def setting_rows(option, machine, profile):
    """``[(what, how)]`` describing the setting, in the trade's words, with the meter readings where given."""
    s = option.setting
    rows = [("Connection", connection_words(s.connection))]
    uses_series = s.connection not in ("separate", "shunt")
    if machine.has_series:
        taps = ", ".join(f"{t:g}" for t in machine.series_taps)
        if uses_series:
            turns = s.series_turns if s.series_turns is not None else machine.series_turns_per_pole
            rows.append(("Series field tap", f"{turns:g} of {machine.series_turns_per_pole:g} turns per pole "
                                             f"(taps: {taps})"))
            rows.append(("Diverter (across the series field)",
                         "none" if s.diverter_ohm is None else fmt(s.diverter_ohm, "Ω")))
        else:
            rows.append(("Series field", "not in circuit"))
    readings = readings_rows(option)
    if option.current_settings and s.connection != "series" and not option_value(option, "dial"):
        ends = current_setting_rows(option)
        rows.append(("Field", "; ".join(f"{f} for {cur}" for cur, f, _, _ in ends)))
    elif readings or option_value(option, "dial"):
        rows.append(("Field", field_source_text(option, machine) + (": set it by the dial below"
                                                                    if option_value(option, "dial") else "")))
    else:
        rows.append(("Field", field_control_text(option, machine)))
    where = READING_WHERE.get(profile.kind)
    rows += [(f"{what} {where}" if where and what == "Field ammeter reads" else what, how) for what, how in readings]
    rows += drive_rows(option, profile)
    temps = profile.temperatures_c
    rows.append(("Winding temperature", f"{fmt(temps[0])} to {fmt(temps[1], '°C')}" if temps
                 else fmt(machine.reference_temperature_c, "°C (the machine's reference)")))
    return rows


def drive_rows(option, profile):
    """``[(what, how)]`` of the drive on the setting card: its speed (fixed) or what it is (an engine or a
    motor: the tachometer readings to expect are in the checklist)."""
    d = profile.drive
    speeds = tuple(profile.speeds_rpm)
    if not d.coupled:
        sp = fmt(speeds[0], "rpm") if len(speeds) == 1 else f"{fmt(speeds[0])} to {fmt(speeds[1], 'rpm')}"
        return [("Drive speed", sp)]
    return [("Drive", d.short())]


def current_setting_rows(option):
    """Welding: ``[(current, field setting, terminal voltage, no-load voltage)]`` per end of the range."""
    rows = []
    for cs in option.current_settings or []:
        if option.setting.connection == "series":
            f = "series winding only"
        elif _given(cs.get("field_current_a")):
            f = f"exciter field {fmt(cs['field_current_a'], 'A')}"
        else:
            f = f"rheostat {fmt(cs.get('rheostat_ohm'), 'Ω')}"
        if _given(cs.get("series_turns")):
            f = f"tap {cs['series_turns']:g} turns, " + f
        if cs.get("reachable") is False:
            f += " (end of its range: target not reached)"
        rows.append((fmt(cs.get("current_a"), "A"), f, fmt(cs.get("terminal_voltage_v"), "V"),
                     fmt(cs.get("no_load_voltage_v"), "V")))
    return rows


CURRENT_SETTING_HEADERS = ("Welding current", "Field", "Terminal voltage (arc and leads)", "No-load voltage")
DIAL_HEADERS = ("Current", "Tap [turns]", "Diverter", "Field", "No-load voltage", "Stuck electrode, cold")
#: How the welder sets a dial row: by the field ammeter, the rheostat's ohms only a start (with cold windings
#: the ohms give more current; the ammeter's reading gives the row's current whatever the temperature).
DIAL_SETTING_WORDS = ("Set the tap (and diverter) with the arc out, then turn the rheostat until the field ammeter "
                      "reads the row's value at no load, whatever the winding temperature: the ohms are where to "
                      "start (set by them on a cold machine, the current comes out higher). On an exciter of fixed voltage "
                      "the field current falls as the field warms (by about a tenth from cold to hot): read the ammeter "
                      "again once the set is warm and bring it back to the row's value. Stuck-electrode currents "
                      "(a short through the leads) are with cold windings, the worst case.")
#: Added for a flat (constant-voltage) process: the wire feed sets the current, the field the voltage.
FLAT_DIAL_WORDS = ("For a flat process (metal inert gas) the wire feed sets the current: a row's current is where the "
                   "wire feed puts the arc, and its field reading sets the voltage (the terminal column).")


def dial_setting_words(profile, short=False):
    """The welding dial's words for the job's process: how to set a row, and for a flat process what the
    row's current means."""
    words = DIAL_SETTING_SHORT if short else DIAL_SETTING_WORDS
    from .jobs.welding import welding_process
    job = getattr(profile, "welding", None)
    if job is not None and welding_process(job.process).characteristic == "flat":
        words += " " + FLAT_DIAL_WORDS
    return words


#: The same, short, for the printed card's first page.
DIAL_SETTING_SHORT = ("Set each row by the field ammeter at no load, taps only with the arc out; the ohms are a start; "
                      "read the ammeter again once the set is warm.")


def dial_rows(option):
    """Welding dial rows the core gives: current, tap, diverter, field reading or rheostat, no-load voltage."""
    out = []
    for row in option_value(option, "dial") or []:
        r = _mapping(row)
        if option.setting.connection == "series":
            field = "series winding only"
        elif option.setting.connection.startswith("separate") and _given(r.get("field_current_a")) \
                and not _given(r.get("rheostat_ohm")):
            field = f"{_round(r['field_current_a'])} A"
        else:
            # the ammeter's reading first: it is what the row is set by (the ohms are a start)
            ohm = f"about {_round(r['rheostat_ohm'])} Ω" if _given(r.get("rheostat_ohm")) else ""
            if _given(r.get("field_current_a")):
                field = f"reads {_round(r['field_current_a'])} A" + (f" ({ohm})" if ohm else "")
            else:
                field = ohm or "–"
        nl = fmt(r.get("no_load_voltage_v"), "V")
        if _given(r.get("no_load_voltage_max_v")):
            nl += f" (up to {fmt(r['no_load_voltage_max_v'], 'V')})"
        out.append((fmt(r.get("current_a"), "A"), fmt(r.get("series_turns")),
                    "none" if r.get("diverter_ohm") is None else fmt(r.get("diverter_ohm"), "Ω"),
                    field, nl, fmt(r.get("short_circuit_current_a"), "A")))
    return out


def dial_card_rows(option):
    """The dial as the card shows it: ``(headers, rows)`` of current, tap, (diverter,) field, no-load voltage."""
    rows = [_mapping(r) for r in option_value(option, "dial") or []]
    with_div = any(r.get("diverter_ohm") is not None for r in rows)
    heads = ("Current", "Tap") + (("Diverter",) if with_div else ()) + ("Field", "No-load V (worst)")
    out = []
    for r, full in zip(rows, dial_rows(option)):
        field = full[3].replace("reads ", "").replace("(about ", "(≈")
        nl = fmt(r.get("no_load_voltage_v"))
        if _given(r.get("no_load_voltage_max_v")):
            nl += f" ({fmt(r['no_load_voltage_max_v'])})"
        out.append((full[0], full[1]) + ((full[2],) if with_div else ()) + (field, nl))
    return heads, out


CARD_PLAN_HEADERS = ("Stage", "Hours", "Field", "Current, start to end", "Ends")


def card_plan_rows(option):
    """Charge plan rows the core gives: each stage's time, field setting, current and why it ends."""
    out = []
    plan = option_value(option, "plan") or []
    two = len(plan) == 2
    for k, st in enumerate(plan, 1):
        st = _mapping(st)
        setting = _mapping(st.get("setting"))
        # stage 1's readings are the card's own rows above; a later stage gives its own, short (the card
        # must leave page 1 room for the checklist); a stage without readings shows its setting
        field = []
        if k == 1 and st.get("readings") and readings_rows(option):
            field = ["as set above"]
        elif st.get("readings"):
            field = [compact_reading_text(st.get("readings"), st.get("band"))]
        if not field:
            if _given(setting.get("field_current_a")):
                field = [f"field current {fmt(setting['field_current_a'], 'A')}"]
            elif _given(setting.get("rheostat_ohm")):
                field = [f"rheostat {fmt(setting['rheostat_ohm'], 'Ω')}"]
        rise = stage_field_rise_text(st, short=True)
        if rise:
            field.append(rise)
        why = STAGE_END_WORDS.get(str(st.get("ends_because") or ""), str(st.get("ends_because") or ""))
        ends = " ".join(x for x in (why, f"at {fmt(st.get('end_volts_per_cell'), 'V per cell')}"
                                    if _given(st.get("end_volts_per_cell")) else "") if x)
        if two and k == 1 and _given(st.get("end_terminal_voltage_v")):
            ends += f" (voltmeter about {fmt(st['end_terminal_voltage_v'], 'V')})"
        name = ("main charge" if k == 1 else "finish") if two else f"stage {k}"
        out.append((f"{k}: {name}", f"{fmt(st.get('from_h'))} to {fmt(st.get('to_h'), 'h')}", "; ".join(field) or "–",
                    f"{fmt(st.get('start_current_a'), 'A')} to {fmt(st.get('end_current_a'), 'A')}", ends or "–"))
    return out


#: Why a stage ends, in the card's few words (the plan's and the charge run's codes).
STAGE_END_WORDS = {"handover-voltage": "hand over to the finish", "end-state-of-charge": "full",
                   "stalled": "the current stalls", "end-soc": "full", "voltage-limit": "at the highest cell voltage",
                   "current-floor": "the current stalls", "time-cap": "the run's time cap",
                   "no-operating-point": "the machine loses its operating point"}


def stage_field_rise_text(stage, short=False):
    """What the field ammeter does along a charge stage on a self-excited machine ('' where it holds);
    ``short`` for the card's table.

    The shunt field hangs on the terminals, so its current follows the bank's
    voltage up as the cells charge; an attendant who sees it rise must not
    turn it back.
    """
    a, b = _mapping(stage).get("start_field_current_a"), _mapping(stage).get("end_field_current_a")
    if not (_given(a) and _given(b)) or abs(b - a) <= 0.02 * abs(a):
        return ""
    way = "rises" if b > a else "falls"
    if short:
        return f"the ammeter {way} to about {_round(b)} A: leave it"
    return f"the field ammeter {way} to about {_round(b)} A as the bank's voltage {way}: leave the field as set"


def stage_current_rise_text(stage):
    """A note where the charging current rises along a stage ('' where it tapers, as a battery shop expects).

    On a self-excited machine whose field works on the straight part of its
    curve the EMF grows with the bank's voltage faster than the bank's own
    voltage: the current climbs instead of tapering.
    """
    a, b = _mapping(stage).get("start_current_a"), _mapping(stage).get("end_current_a")
    if not (_given(a) and _given(b)) or b <= a * 1.02:
        return ""
    return (f"the charging current rises from {_round(a)} to {_round(b)} A along this stage, not tapering: the field "
            "works on the straight part of its curve and grows with the bank's voltage faster than the bank's own "
            "voltage rises; watch the ammeter against the bank's highest current")


def compact_reading_text(readings, band=None):
    """A stage's field setting in few words: rheostat, the ammeter's hot (cold) reading and its band."""
    r, b = _mapping(readings), _mapping(band)
    fc = _mapping(r.get("field_current_a"))
    parts = []
    if _given(r.get("rheostat_ohm")):
        parts.append(f"rheostat {_round(r['rheostat_ohm'])} Ω")
    from .readings import field_windows
    windows = dict(field_windows(b))
    if "hot" in windows and _given(fc.get("hot")):
        # each reading with its own temperature's window
        parts.append(f"ammeter {_round(fc['hot'])} A hot ({window_words(windows['hot'])})"
                     + (f", {_round(fc['cold'])} A cold ({window_words(windows['cold'])})"
                        if _given(fc.get("cold")) else ""))
        return ", ".join(parts)
    if _given(fc.get("hot")):
        parts.append(f"ammeter {_round(fc['hot'])} A hot" + (f" ({_round(fc['cold'])} cold)" if _given(fc.get("cold")) else ""))
    keep = field_window_text(b, hot_first=True)
    text = ", ".join(parts)
    return text + (f"; set within {keep}" if keep else "")


def _given(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def sorted_cautions(cautions):
    return sorted(cautions, key=lambda c: SEVERITY_ORDER.index(c.severity) if c.severity in SEVERITY_ORDER else 9)


def severity_counts(cautions):
    """'1 stop, 2 warn' style summary; '' when none."""
    counts = {s: 0 for s in SEVERITY_ORDER}
    for c in cautions:
        counts[c.severity] = counts.get(c.severity, 0) + 1
    return ", ".join(f"{n} {s}" for s, n in counts.items() if n)


def status_text(option, total=None):
    of = f" of {total}" if total else ""
    if option.feasible:
        edge = ", only on a knife-edge (its band is narrower than the meters can set it)" \
            if getattr(option, "knife_edge", False) else ""
        return (f"option {option.rank}{of}: meets every limit (smallest margin "
                f"{fmt(100 * option.smallest_margin, '%')}){edge}")
    return f"option {option.rank}{of}: near miss, breaks: {broken_limits_text(option.failed)}"


# --- the ranking, stated ---------------------------------------------------

#: The rule the search ranks by today, in words (search.search sorts this way); a result that states
#: its own rule (``ranking_rule``) is shown with that instead.
RANKING_RULE = ("Settings that meet every limit come first, the one whose tightest limit keeps the largest margin "
                "first; the near misses follow, the least broken first. A setting with a stop caution never counts "
                "as meeting the limits.")


def ranking_rule(result):
    """The stated ranking rule of a result, without its own "Ranking:" lead (shown after a heading that says it)."""
    rule = getattr(result, "ranking_rule", None)
    if rule is None and hasattr(result, "as_dict"):
        try:
            rule = result.as_dict().get("ranking_rule")
        except Exception:
            rule = None
    if isinstance(rule, dict):
        rule = rule.get("text") or rule.get("rule")
    rule = str(rule) if rule else RANKING_RULE
    # shown after a heading of its own ("Ranked by:"), the rule's own "Ranking:" would say it twice
    if rule.startswith("Ranking: "):
        rule = rule[len("Ranking: "):]
        rule = rule[:1].upper() + rule[1:]
    return rule


def objective_value(option, kind):
    """``(value, words)`` of the job's objective for an option, from the core's figures; (None, None) if not given.

    Battery: hours to full; welding: tap changes along the dial; lighting and
    booster: the smallest margin on the voltage band.
    """
    f = option.figures or {}
    obj = option_value(option, "objective")
    if isinstance(obj, dict) and _given(obj.get("value")):
        return float(obj["value"]), f"{fmt(obj['value'], obj.get('unit', ''))} {obj.get('name', '')}".strip()
    if kind == "battery" and _given(f.get("hours_to_full")):
        return float(f["hours_to_full"]), f"{fmt(f['hours_to_full'], 'h')} to full"
    if kind == "welding":
        dial = [_mapping(r) for r in option_value(option, "dial") or []]
        if dial:
            # a diverter swapped is a stop to re-link the machine as a tap change is (the core counts both)
            taps = [(r.get("series_turns"), r.get("diverter_ohm")) for r in dial]
            n = sum(1 for a, b in zip(taps, taps[1:]) if a != b)
            return float(n), f"{n} tap or diverter change{'s' if n != 1 else ''}"
        return None, None
    if kind in ("lighting", "booster"):
        band = [m.get("fraction") for k, m in (option.margins or {}).items() if k.startswith("load_voltage")]
        band = [b for b in band if _given(b)]
        if band:
            return min(band), f"band margin {100 * min(band):.3g} %"
    return None, None


#: What the better objective is, per job, for the ranking line's tie that the objective settles.
BETTER_OBJECTIVE_WORDS = {"battery": "the quicker charge", "welding": "the dial with fewer tap or diverter changes",
                          "lighting": "the wider band margin", "booster": "the wider band margin"}


#: The simpler rig in words, by what :func:`supplycfg.search.tie_break` says tells two rigs apart.
RIG_WORDS = {"diverter": "no diverter", "series turns": "fewer series turns in circuit",
             "exciter": "no exciter needed"}


def _tie_decider(why, winner, loser):
    """What settles a tie for ``winner`` over ``loser`` where it is a margin or the rig (None otherwise)."""
    if why == "margin":
        return (f"the larger least margin: {100 * winner.smallest_margin:.1f} % against "
                f"{100 * loser.smallest_margin:.1f} %")
    return f"the simpler rig ({RIG_WORDS[why]})" if why in RIG_WORDS else None


def ranking_line(result, option):
    """One line: why this option stands where it does under the stated rule."""
    said = option_value(option, "rank_reason")
    if said:
        return str(said)
    kind = result.profile.kind
    feasible = [o for o in result.options if o.feasible]
    if not option.feasible:
        if any(c.severity == "stop" for c in option.cautions):
            return "Not usable: it carries a stop caution (see the cautions)."
        if "stop_caution" in option.failed:
            return "Not usable: the job carries a stop whatever the setting (see the cautions); for reference only."
        broken = broken_limits_text(option.failed)
        if not feasible:
            return f"No setting meets every limit; this one comes closest by the rule and breaks: {broken}."
        return f"A near miss: it breaks {broken}."
    others = [o for o in feasible if o is not option]
    if getattr(option, "knife_edge", False):
        # the rule reads only figures and limits (a fleet row or a trial rating has no bands): the mark says it
        settable = [o for o in feasible if not getattr(o, "knife_edge", False)]
        other = (f"option {settable[0].rank} is the first one can set" if settable else
                 "no setting that meets every limit can be set by the meters")
        return (f"Meets every limit, ranked {option.rank} of {len(feasible)}, but only on a knife-edge: its band is "
                f"narrower than the meters can set it, so at the machine it is likely to miss; {other}.")
    _, words = objective_value(option, kind)
    margin = fmt(100 * option.smallest_margin, "%")
    if not others:
        return f"The only setting that meets every limit; its tightest limit keeps a margin of {margin}."
    if option is feasible[0]:
        nxt = others[0]
        _, nwords = objective_value(nxt, kind)
        if not (words and nwords):
            return (f"Ranked first of {len(feasible)} settings that meet every limit: its tightest limit keeps "
                    f"{margin} margin (next, option {nxt.rank}: {fmt(100 * nxt.smallest_margin, '%')}).")
        from .search import OBJECTIVE_TIE_FRACTION, tie_break
        why = tie_break(option, nxt)
        head = f"Ranked first of {len(feasible)} settings that meet every limit: {words}"
        if why == "objective":
            return f"{head} (next, option {nxt.rank}: {nwords})."
        tie = f"; option {nxt.rank} ({nwords}) is within {100 * OBJECTIVE_TIE_FRACTION:g} %, a tie, and "
        tied = f", as option {nxt.rank}; the tie goes to " if option.objective == nxt.objective \
            else f"{tie}the tie goes to "
        if why == "objective-in-tie":
            return (f"{head}{tie}with equally simple rigs and least margins alike to 0.1 % ({100 * option.smallest_margin:.1f} %) "
                    f"{BETTER_OBJECTIVE_WORDS.get(kind, 'the better objective')} ranks first.")
        if why == "order":
            return f"{head}{tied}neither: they are alike by every rule, listed in a fixed order."
        return f"{head}{tied}{_tie_decider(why, option, nxt)}."
    best = feasible[0]
    head = f"Meets every limit; ranked {option.rank} of {len(feasible)}"
    _, bwords = objective_value(best, kind)
    if not (words and bwords):
        return (f"{head}: its tightest limit keeps {margin} margin "
                f"(option {best.rank}: {fmt(100 * best.smallest_margin, '%')}).")
    from .search import tie_break
    why = tie_break(best, option)
    if why == "objective":
        return f"{head}: {words} against option {best.rank}'s {bwords}."
    tie = f"{head}: {words}, a tie with option {best.rank} ({bwords}), "
    if why == "objective-in-tie":
        return (f"{tie}alike in rig and least margin; option {best.rank} has "
                f"{BETTER_OBJECTIVE_WORDS.get(kind, 'the better objective')}.")
    if why == "order":
        return f"{tie}alike by every rule; listed in a fixed order."
    return f"{tie}which {'keeps' if why == 'margin' else 'has'} {_tie_decider(why, best, option)}."


# --- checks at the machine ---------------------------------------------------

CHECKLIST_HEADERS = ("Check", "Expected", "Measured", "Initials")


def _spans(lo, hi):
    """Both ends given and apart by more than rounding noise."""
    return _given(lo) and _given(hi) and abs(float(hi) - float(lo)) > 1e-9 * max(1.0, abs(float(hi)))


def _range_text(lo, hi, unit):
    if _spans(lo, hi):
        return f"{fmt(lo)} to {fmt(hi, unit)}"
    if _given(hi) or _given(lo):
        return fmt(hi if _given(hi) else lo, unit)
    return None


def _caution_figure(result, option, rule, key):
    for c in list(option.cautions) + list(result.cautions):
        if c.rule == rule and _given((c.figures or {}).get(key)):
            return c.figures[key]
    return None


def electrode_of(profile):
    """The welding electrode's polarity of a profile's process (``"+"`` or ``"−"``), ``"+"`` for other jobs."""
    w = getattr(profile, "welding", None)
    if w is None:
        return "+"
    from .jobs.welding import welding_process
    return welding_process(w.process).electrode_polarity


#: What the polarity check expects, per job (the welding leads as the wiring drawing puts them).
POLARITY_WORDS = {None: "machine + to load +", "battery": "machine + to battery +",
                  "booster": "booster adds to the bus voltage",
                  "welding": "electrode lead on + and work lead on −, or as the electrode's maker asks"}
#: The welding leads' polarity check per process (or per polarity), as the wiring drawing puts them.
WELDING_POLARITY_WORDS = {
    ("manual-metal-arc", "+"): POLARITY_WORDS["welding"],
    ("tungsten-inert-gas", "−"): "torch (tungsten) lead on − and work lead on +: on + the tungsten melts",
    ("metal-inert-gas", "+"): "wire (torch) lead on + and work lead on −",
    "+": "electrode lead on + and work lead on −",
    "−": "electrode lead on − and work lead on +",
}


def booster_polarity_check_text(option):
    """What a booster's polarity check expects: the voltage across it at the job's first load above zero.

    A series booster gives only its residual voltage with no line current, whichever way its series field
    is connected, so a check before closing cannot tell; with a first small load on the feeder a right
    connection reads + towards the feeder and rises with the load, a reversed one bucks.
    """
    pts = [_mapping(p) for p in (getattr(option, "drive_points", None) or [])]
    pts = [p for p in pts if _given(p.get("load_current_a")) and p["load_current_a"] > 0
           and _given(p.get("terminal_voltage_v"))]
    first = min((p["load_current_a"] for p in pts), default=None)
    volts = [p["terminal_voltage_v"] for p in pts if p["load_current_a"] == first]
    at = (f"at about {fmt(first, 'A')} on the feeder: + on the feeder side, {_range_text(min(volts), max(volts), 'V')}, "
          if volts else "with a first small load on the feeder: + on the feeder side, ")
    return (at + "rising with the load (adds to the bus). Reads − or falls: the series field is reversed and the "
            "booster bucks: take the load off, stop, swap the series field's leads")


def checklist_rows(result, option, run=None):
    """``[(check, expected)]`` to tick off at the machine, for the job; the sheet adds Measured and Initials."""
    p, o = result.profile, option
    f, s = o.figures or {}, o.setting
    kind = p.kind
    note = "note the reading"
    polarity = POLARITY_WORDS.get(kind, POLARITY_WORDS[None])
    if kind == "welding":
        e = electrode_of(p)
        polarity = WELDING_POLARITY_WORDS.get((p.welding.process, e), WELDING_POLARITY_WORDS[e])
    rows = [("Polarity checked with a voltmeter before closing onto the load", polarity)]
    if kind == "booster":
        rows = [("Polarity: voltmeter across the booster at a first light load", booster_polarity_check_text(o))]
    lo, hi = f.get("no_load_voltage_min_v"), f.get("no_load_voltage_max_v")
    nl = _range_text(lo, hi, "V")
    if _spans(lo, hi):
        nl += " over speed and winding temperature"
    if kind == "welding":
        ends = [cs for cs in o.current_settings or [] if _given(cs.get("no_load_voltage_v"))]
        # over every row of the dial: a tap change mid-range can put the highest no-load voltage inside it
        dial_nl = [_mapping(r) for r in option_value(o, "dial") or []]
        dial_nl = [r for r in dial_nl if _given(r.get("no_load_voltage_v")) and _given(r.get("current_a"))]
        if dial_nl:
            ends = [min(dial_nl, key=lambda r: r["no_load_voltage_v"]),
                    max(dial_nl, key=lambda r: r["no_load_voltage_v"])]
        if len(ends) == 2 and all(_given(cs.get("current_a")) for cs in ends):
            nl = " to ".join(f"{fmt(cs['no_load_voltage_v'], 'V')} at the {fmt(cs['current_a'], 'A')} setting"
                             for cs in ends)
        elif ends:
            volts = [cs["no_load_voltage_v"] for cs in ends]
            nl = _range_text(min(volts), max(volts), "V")
        else:
            nl = fmt(f.get("max_no_load_voltage_v"), "V")
    if kind == "battery":
        # the battery's isolator open: an automatic cut-out would close onto the bank as the set runs up;
        # closed at the full no-load voltage the isolator would throw the whole difference onto the bank
        rows.append(("No-load voltage, isolator open; closing onto the bank",
                     (_range_text(lo, hi, "V") or note) + "; " + battery_closing_text(p.battery, o)))
    elif kind != "booster":
        rows.append(("No-load voltage at speed, load off", nl or note))
    fr = [how for what, how in readings_rows(o) if what == "Field ammeter reads"]
    dial_hot = [_mapping(_mapping(_mapping(r).get("readings")).get("field_current_a")).get("hot")
                for r in option_value(o, "dial") or []]
    dial_hot = [h for h in dial_hot if _given(h)]
    if fr:
        field = fr[0] + ("; on charge (at no load it reads more)" if kind == "battery" else "")
    elif dial_hot:
        field = f"as the dial's row: {_range_text(min(dial_hot), max(dial_hot), 'A')} with hot windings"
    elif s.connection == "series":
        top = f.get("max_armature_current_a")
        field = ("no shunt field; the series field carries the load current, up to " + fmt(top, "A")
                 if _given(top) else "no shunt field")
    elif s.field_current_a is not None:
        field = fmt(s.field_current_a, "A")
    else:
        field = note
    rows.append(("Field ammeter, on charge at the start" if kind == "battery"
                 else "Field current on the field ammeter", field))
    if kind == "battery":
        hot, cold = f.get("start_charge_current_hot_a"), f.get("start_charge_current_cold_a")
        if _spans(hot, cold):
            start = f"{fmt(hot, 'A')} with hot windings, {fmt(cold, 'A')} cold"
        else:
            start = fmt(f.get("start_charge_current_a"), "A") if _given(f.get("start_charge_current_a")) else note
        rows.append(("Charging current at the start", start))
        plan = [_mapping(x) for x in option_value(o, "plan") or []]
        if len(plan) == 2:
            rows.append(("Hand-over to the finish", handover_check_text(plan)))
        if plan:
            rows.append((END_OF_CHARGE_CHECK.get(p.battery.chemistry, END_OF_CHARGE_CHECK[None]),
                         end_of_charge_text(plan[-1], p.battery)))
    elif kind == "welding":
        rows.append(("Short-circuit current (electrode stuck), at the top setting",
                     f"up to {fmt(f['stuck_electrode_current_a'], 'A')} with cold windings (less when warm)"
                     if _given(f.get("stuck_electrode_current_a")) else note))
    else:
        rows.append(("Voltage at the far end, light load and full load",
                     _range_text(f.get("load_voltage_min_v"), f.get("load_voltage_max_v"), "V") or note))
    speeds = tuple(p.speeds_rpm)
    if p.drive.coupled:
        # an engine or a motor: the speed falls with the load, so two readings
        nl_rpm, lo_rpm = f.get("no_load_speed_rpm"), f.get("min_speed_rpm")
        # one row, two readings: the sheet's first page has no line to spare
        rows.append(("Drive speed on the tachometer (generator shaft)",
                     (f"about {fmt(nl_rpm, 'rpm')}" if _given(nl_rpm) else fmt(speeds[0], "rpm")) + " load off; "
                     + (f"about {fmt(lo_rpm, 'rpm')}" if _given(lo_rpm) else note) + " at the heaviest point of the job"))
    else:
        rows.append(("Drive speed on the tachometer",
                     fmt(speeds[0], "rpm") if len(speeds) == 1 else f"{fmt(speeds[0])} to {fmt(speeds[1], 'rpm')}"))
    if kind == "battery":
        close = f.get("cutout_closing_voltage_v")
        per_cell = getattr(p.battery, "cutout_closing_volts_per_cell", None)
        if not _given(close) and _given(per_cell):
            close = per_cell * p.battery.cells
        if _given(close):
            cut = f"fitted; closes at {fmt(close, 'V')}"
        elif _given(f.get("bank_open_circuit_voltage_end_v")):
            cut = f"fitted; closes above {fmt(f['bank_open_circuit_voltage_end_v'], 'V')} (the full bank at rest)"
        else:
            cut = "fitted"
        rows.append(("Reverse-current cut-out fitted, its closing voltage", cut))
        vent = _mapping(option_value(o, "ventilation")).get("airflow_m3_per_h")
        if not _given(vent):
            vent = f.get("ventilation_m3_per_h")
        if not _given(vent):
            vent = _caution_figure(result, o, "battery-ventilation", "ventilation_m3_per_h")
        rows.append(("Battery-room ventilation running", f"at least {fmt(vent, 'm³/h')}" if _given(vent) else "running"))
        rows.append(("Pilot-cell temperature, at the start and hourly in the finish",
                     battery_temperature_check_text(p.battery)))
    if kind == "welding":
        rows.append(("No-load voltage against the limits", no_load_limit_text(o.margins) or note))
        rows.append(("No tap change under load", "taps and diverter changed only with the arc out"))
    if kind == "booster":
        # a tripped drive leaves the line current in the booster: it motors (booster-drive-trip caution)
        rows.append(("Drive-trip interlock (bypass switch across the booster or line contactor)",
                     "fitted; tried once with the feeder off load"))
    if s.connection != "series":
        rows.append(("Field discharge path fitted", "fitted (discharge resistor or freewheel path)"))
    return rows


def battery_closing_text(job, option):
    """How to close onto the bank after the no-load check: the voltmeter brought down to just above the
    cut-out's closing voltage with the rheostat, then the isolator closed and the field brought back.

    At the full no-load voltage the difference to the bank's rest voltage drives a surge limited only by
    the bank, the leads and the armature (common practice: close a charging set onto its battery with the
    voltage just above the battery's).
    """
    from .jobs.battery import cutout_closing_voltage_v
    close = cutout_closing_voltage_v(job)
    r = _mapping(option_value(option, "readings"))
    back = f"back to {_round(r['rheostat_ohm'])} Ω" if _given(r.get("rheostat_ohm")) else "back to the setting"
    return (f"to close: rheostat up to about {fmt(close + 2.0, 'V')} (cut-out {fmt(close, 'V')}), close the "
            f"isolator, {back}")


#: How far the bank's temperature may read from the plan's before the plan is made again [degC]: 5 degC
#: moves a lead-acid hand-over voltage by about 0.02 V per cell, near 1 % (common practice).
BATTERY_TEMPERATURE_CHECK_C = 5.0


def battery_temperature_check_text(job):
    """The checklist's expected battery temperature: the plan's, how far a reading may be off, and where
    the charge stops (the job's temperature caution's limit)."""
    from .jobs.battery import CHARGE_STOP_TEMPERATURE_C, chemistry
    from .jobs.battery import CHARGE_START_MAX_TEMPERATURE_C
    shift = abs(chemistry(job.chemistry).temperature_coefficient_v_per_c) * BATTERY_TEMPERATURE_CHECK_C
    start = CHARGE_START_MAX_TEMPERATURE_C[job.chemistry]
    if job.temperature_c > start:
        # the job's caution says to let it cool first: the plan at this temperature is not the one to run
        return (f"planned at {fmt(job.temperature_c, '°C')}, above {fmt(start, '°C')}: let the bank cool first, then "
                f"plan again at its temperature; stop at {fmt(CHARGE_STOP_TEMPERATURE_C[job.chemistry], '°C')}")
    return (f"{fmt(job.temperature_c, '°C')} at the start as planned; {fmt(BATTERY_TEMPERATURE_CHECK_C, '°C')} off "
            f"moves the hand-over {fmt(shift, 'V')} per cell: plan again; "
            f"stop at {fmt(CHARGE_STOP_TEMPERATURE_C[job.chemistry], '°C')}")


#: How a battery shop tells the end of charge (common practice): readings steady over three hours.
END_OF_CHARGE_CHECK = {
    "lead-acid-vented": "End of charge: voltage and gravity steady over 3 hourly readings",
    None: "End of charge: voltage steady over 3 hourly readings",
}


def end_of_charge_text(stage, job=None):
    """The checklist's expected end of charge: where the plan calls the bank full (the last voltmeter
    reading, per cell, and when), then on until the readings hold, since the model's full is not the
    steady readings a shop ends on; for vented lead-acid the gravity then (rest volts - 0.84)."""
    v, vpc, t = stage.get("end_terminal_voltage_v"), stage.get("end_volts_per_cell"), stage.get("to_h")
    parts = []
    if _given(v):
        parts.append(f"full by the plan at about {fmt(v, 'V')}"
                     + (f" ({fmt(vpc, 'V per cell')})" if _given(vpc) else "")
                     + (f", {fmt(t, 'h')}" if _given(t) else ""))
    elif _given(t):
        parts.append(f"full by the plan at about {fmt(t, 'h')}")
    if not parts:
        return "note the readings"
    parts.append("charge on until steady")
    if job is not None and job.chemistry == "lead-acid-vented":
        from .jobs.battery import LEAD_ACID_REST_OFFSET_V, open_circuit_voltage_per_cell, chemistry
        full = float(open_circuit_voltage_per_cell(chemistry(job.chemistry), 1.0, job.open_circuit_voltage_per_cell_v))
        sg = full - LEAD_ACID_REST_OFFSET_V
        read = sg - HYDROMETER_SG_PER_C * (job.temperature_c - 25.0)
        if abs(job.temperature_c - 25.0) >= HYDROMETER_CORRECT_FROM_C:
            # a hydrometer in cold acid reads high, in warm acid low: the shop reads it uncorrected
            parts.append(f"gravity then about {read:.3f} as read at {fmt(job.temperature_c, '°C')} "
                         f"({sg:.2f} at 25 °C)")
        else:
            parts.append(f"gravity then about {sg:.2f}")
    return "; ".join(parts)


#: Change of a lead-acid electrolyte's specific gravity per degC, falling as it warms (hydrometer
#: correction, about 0.0007 per degC: common practice, recalled).
HYDROMETER_SG_PER_C = 0.0007
#: Distance from 25 degC [degC] from which the checklist gives the gravity as read at the bank's
#: temperature: below it the correction is under 0.002, finer than a hydrometer reads.
HYDROMETER_CORRECT_FROM_C = 3.0


def handover_check_text(plan):
    """The checklist's expected hand-over of a two-stage charge: the voltmeter reading that calls it,
    then the finish's field and the current it must not pass."""
    main, fin = plan
    parts = []
    v, vpc = main.get("end_terminal_voltage_v"), main.get("end_volts_per_cell")
    if _given(v):
        parts.append(f"voltmeter about {fmt(v, 'V')}" + (f" ({fmt(vpc, 'V per cell')})" if _given(vpc) else ""))
    rd = _mapping(fin.get("readings"))
    fc = _mapping(rd.get("field_current_a"))
    then = []
    if _given(rd.get("rheostat_ohm")):
        then.append(f"rheostat {_round(rd['rheostat_ohm'])} Ω")
    if _given(fc.get("hot")):
        then.append(f"ammeter {_round(fc['hot'])} A hot")
    if _given(fin.get("start_current_a")):
        then.append(f"about {_round(fin['start_current_a'], 2)} A")
    if then:
        parts.append("then " + ", ".join(then))
    return "; ".join(parts) or "note the reading"


#: The welding no-load limits in the checklist's words, in the order said (the margins' names of the welding job).
NO_LOAD_LIMIT_WORDS = (("no_load_mean_voltage", "mean"), ("no_load_peak_voltage", "peak"),
                       ("no_load_strike_voltage", "to strike an arc"))


def no_load_limit_text(margins):
    """The welding set's no-load voltages against their limits, e.g. ``mean 86.67 V ≤ 100 V; ...``.

    Each upper limit against the highest no-load voltage over the dial and
    the envelope, the strike minimum against the lowest; '' when the margins
    carry none of them.
    """
    parts = []
    for name, words in NO_LOAD_LIMIT_WORDS:
        m = _mapping((margins or {}).get(name))
        if not (_given(m.get("value")) and _given(m.get("limit"))):
            continue
        # a broken limit is said as broken: the Expected column is what a technician ticks against
        broken = m.get("fraction") is not None and m["fraction"] < 0
        if m.get("kind") == "min":
            parts.append(f"lowest {fmt(m['value'], 'V')} BELOW the {fmt(m['limit'], 'V')} needed {words}" if broken
                         else f"lowest {fmt(m['value'], 'V')} ≥ {fmt(m['limit'], 'V')} {words}")
        else:
            parts.append(f"{words} {fmt(m['value'], 'V')} ABOVE the {fmt(m['limit'], 'V')} limit" if broken
                         else f"{words} {fmt(m['value'], 'V')} ≤ {fmt(m['limit'], 'V')}")
    return "; ".join(parts)


def job_rows(profile):
    """``[(what, value with unit)]`` of the job, in plain words."""
    p = profile
    rows = []
    sp = tuple(p.speeds_rpm)
    if p.drive.coupled:
        rows.append(("Drive", p.drive.describe()))
        rows.append(("Drive speed", f"falls with the load (generator shaft) from {fmt(sp[0], 'rpm')}"))
    else:
        rows.append(("Drive speed", fmt(sp[0], "rpm") if len(sp) == 1 else f"{fmt(sp[0])} to {fmt(sp[1], 'rpm')}"))
    if p.temperatures_c:
        rows.append(("Winding temperature, cold to hot", f"{fmt(p.temperatures_c[0])} to {fmt(p.temperatures_c[1], '°C')}"))
    job = p.job
    for fld in dataclasses.fields(job):
        v = getattr(job, fld.name)
        if v is None:
            continue
        words, unit = JOB_WORDS.get(fld.name) or figure_label(fld.name)
        if fld.name == "state_of_charge" and isinstance(v, (list, tuple)):
            text = " to ".join(fmt(100 * float(x), "%") for x in v)
        elif isinstance(v, (list, tuple)):
            text = f"{' to '.join(fmt(x) for x in v)} {unit}".strip()
        elif isinstance(v, str):
            text = name_words(v)
        else:
            text = fmt(v, unit)
        rows.append((words[:1].upper() + words[1:], text))
    return rows


#: Plain words and units of the job tables' keys; a key not listed is named from itself and its unit suffix.
JOB_WORDS = {
    "chemistry": ("battery type", ""), "cells": ("cells in series", ""), "capacity_ah": ("capacity", "Ah"),
    "state_of_charge": ("state of charge, start to end", "%"),
    "max_charge_current_a": ("highest charging current", "A"), "min_charge_current_a": ("lowest main-charge current", "A"),
    "internal_resistance_ohm": ("bank resistance", "Ω"), "cable_resistance_ohm": ("cable resistance, go and return", "Ω"),
    "temperature_c": ("battery temperature", "°C"),
    "open_circuit_voltage_per_cell_v": ("rest voltage per cell, empty to full", "V"),
    "charge_voltage_per_cell_v": ("charge limit per cell at 25 °C", "V"),
    "process": ("welding process", ""), "current_range_a": ("welding current wanted", "A"),
    "environment": ("where the welding is done", ""), "duty_cycle_percent": ("duty cycle", "% of 10 minutes"),
    "max_no_load_voltage_v": ("site limit on no-load voltage", "V"),
    "nominal_voltage_v": ("voltage wanted at the lamps", "V"), "load_current_a": ("load current, least to most", "A"),
    "tolerance_percent": ("tolerance, plus or minus", "%"), "feeder_resistance_ohm": ("feeder resistance, go and return", "Ω"),
    "lamp": ("lamps", ""), "bus_voltage_v": ("bus voltage", "V"),
}


def machine_rows(machine):
    m = machine
    rows = [("Rated", f"{fmt(m.rated_voltage_v, 'V')}, {fmt(m.rated_armature_current_a, 'A')}, "
                      f"{fmt(m.rated_speed_rpm, 'rpm')}, {m.poles} poles"),
            ("Armature resistance", fmt(m.armature_resistance_ohm, "Ω") + f" at {fmt(m.reference_temperature_c, '°C')}"),
            ("Brush drop", fmt(m.brush_drop_v, "V")),
            ("Shunt field", f"{fmt(m.shunt_field_resistance_ohm, 'Ω')}, {fmt(m.shunt_turns_per_pole)} turns per pole"),
            ("Field rheostat", f"0 to {fmt(m.rheostat_max_ohm, 'Ω')}")]
    if m.has_series:
        rows.append(("Series field", f"{fmt(m.series_field_resistance_ohm, 'Ω')}, "
                                     f"{fmt(m.series_turns_per_pole)} turns per pole"))
    if m.excitation_voltage_v is not None:
        rows.append(("Exciter", fmt(m.excitation_voltage_v, "V")))
    rows.append(("Peak armature current", fmt(m.peak_current_a, "A")))
    rows.append(("Open-circuit test", f"{len(m.occ_field_current_a)} points at {fmt(m.occ_speed_rpm, 'rpm')}, "
                                      f"residual {fmt(m.residual_voltage_v, 'V')}"))
    return rows


def run_rows(run):
    """``[(what, value)]`` of a charge run."""
    if run is None:
        return []
    cond = (getattr(run, "conditions", None) or {}).get("setting")
    rows = [("Duration", fmt(run.duration_h, "h")), ("Stops because", str(run.stop_reason))]
    if cond:
        rows.append(("Run at", f"{speed_words(cond)}, windings {fmt(cond['winding_temperature_c'], '°C')}"))
    hours = getattr(run, "hours_to_full", None)
    rows.append(("Hours to full", fmt(hours, "h") if hours is not None else
                 f"not within the target of {fmt(getattr(run, 'target_hours', None), 'h')}"))
    if len(run.time_h):
        rows += [("State of charge at the end", fmt(100 * float(run.state_of_charge[-1]), "%")),
                 ("Delivered", f"{fmt(float(run.ah[-1]), 'Ah')}, {fmt(float(run.kwh[-1]), 'kWh')}"),
                 ("Ampere-hours delivered per ampere-hour stored", fmt(getattr(run, "ah_charge_factor", None))),
                 ("Highest volts per cell", fmt(float(max(run.volts_per_cell)), "V")),
                 ("Current at the start and end", f"{fmt(float(run.current_a[0]), 'A')} and "
                                                 f"{fmt(float(run.current_a[-1]), 'A')}")]
    gs = getattr(run, "gassing_state_of_charge", None)
    if gs is not None:
        rows.append(("Gassing from", fmt(100 * gs, "% charge")))
    if run.limit_volts_per_cell is not None:
        rows.append(("Highest cell voltage allowed", fmt(run.limit_volts_per_cell, "V")))
    vent = getattr(run, "ventilation", None) or {}
    if vent:
        rows.append(("Battery-room airflow", f"{fmt(vent.get('airflow_m3_per_h'), 'm³/h')} (opening "
                                             f"{fmt(vent.get('opening_cm2'), 'cm²')})"))
    return rows


def run_summary(run):
    """One line for the card: how long the charge takes with this setting and why it stops."""
    if run is None:
        return None
    return f"Charge with this one setting: {fmt(run.duration_h, 'h')}, stops because {run.stop_reason}."


def _option(result, rank):
    if not result.options:
        raise InputError("search", "options", "none: this machine has no connection for this job")
    if rank is None:
        return result.options[0]
    for o in result.options:
        if o.rank == rank:
            return o
    raise InputError("command line", "--option", f"is {rank}; allowed: 1 to {len(result.options)}")


def _date(date):
    return (date or _dt.date.today()).isoformat() if not isinstance(date, str) else date


def cautions_pointer(option, result, where="under Cautions, later in this sheet,"):
    """One line: how many warnings and notes the setting and the job carry, and where to read them."""
    counts = {}
    for c in list(option.cautions) + list(result.cautions):
        if c.severity != "stop":
            counts[c.severity] = counts.get(c.severity, 0) + 1
    if not counts:
        return "No warning or note raised by the rules for this setting."
    words = {"warn": ("warning", "warnings"), "note": ("note", "notes")}
    parts = [f"{n} {words.get(k, (k, k))[n != 1]}" for k, n in counts.items()]
    them = "it" if sum(counts.values()) == 1 else "them"
    return f"Cautions: {' and '.join(parts)}; read {them} {where} before starting."


# ---------------------------------------------------------------------------
# Markdown
# ---------------------------------------------------------------------------

def _md_table(headers, rows):
    out = ["| " + " | ".join(md_esc(h) for h in headers) + " |",
           "|" + "|".join("---" for _ in headers) + "|"]
    out += ["| " + " | ".join(md_esc(c) for c in r) + " |" for r in rows]
    return out


def _md_cautions(cautions):
    out = []
    for c in sorted_cautions(cautions):
        out.append(f"- **{SEVERITY_WORDS.get(c.severity, c.severity)}**: {md_esc(c.message)}  ")
        out.append(f"  {md_esc(source_text(c.basis))}")
    return out


def sheet_markdown(result, rank=None, run=None, date=None):
    """The setting sheet of option ``rank`` (default the best) as Markdown.

    The part for the machine comes first (the setting, the wiring in words,
    the checks with Expected, Measured and Initials columns); figures,
    margins, cautions, the machine and the job follow.

    Parameters
    ----------
    result : SearchResult
    rank : int, optional
    run : ChargeRun, optional
        The charge run of the option (battery jobs).
    date : datetime.date or str, optional
        Date printed on the sheet; default today.
    """
    from .wiring import wiring
    m, p = result.machine, result.profile
    o = _option(result, rank)
    stops = [c for c in list(o.cautions) + list(result.cautions) if c.severity == "stop"]
    lines = [f"# Setting sheet: {md_data(m.label or 'machine')}", "",
             f"**Job:** {md_data(p.label or p.kind)} ({KIND_WORDS.get(p.kind, p.kind)})  ",
             f"**Chosen:** {md_esc(status_text(o, len(result.options)))}  ",
             f"**Made by:** supplycfg {__version__} on {_date(date)}  ",
             f"**Ranked by:** {md_esc(ranking_rule(result))}", ""]
    if stops:
        lines += ["## STOP: do not use this setting as it stands", ""] + _md_cautions(stops) + [""]
    lines += [f"## {card_heading(o)}", "", f"*{md_esc(ranking_line(result, o))}*", ""]
    lines += [f"- {md_esc(n[0].upper() + n[1:])}." for n in search_notes_for(result, o)]
    lines += [""] if search_notes_for(result, o) else []
    lines += _md_table(("What", "Setting"), setting_rows(o, m, p)) + [""]
    if dial_rows(o):
        lines += ["### Welding dial", "", md_esc(dial_setting_words(p)), ""] + _md_table(DIAL_HEADERS, dial_rows(o)) + [""]
    elif o.current_settings:
        lines += ["### Field setting for each end of the welding range", ""]
        lines += _md_table(CURRENT_SETTING_HEADERS, current_setting_rows(o)) + [""]
    if plan_table(o):
        lines += ["### Charge plan", "", f"At {md_esc(condition_words(o)['setting'])}; only the field changes "
                  "between stages.", ""]
        lines += _md_table(CARD_PLAN_HEADERS, card_plan_rows(o)) + [""]
    elif run is not None:
        lines += [md_esc(run_summary(run)), ""]
    w = wiring(m, o.setting, p.kind, electrode_of(p))
    lines += ["## Wiring", ""] + [f"{k}. {md_esc(step)}" for k, step in enumerate(w.steps, 1)] + [""]
    lines += ["## Check at the machine", ""]
    lines += _md_table(CHECKLIST_HEADERS, [(c, e, "", "") for c, e in checklist_rows(result, o, run)]) + [""]
    lines += [md_esc(cautions_pointer(o, result, "below")), "", f"*{md_esc(STANDING_NOTICE)}*", "", "---", ""]
    if plan_table(o):
        lines += ["## Charge plan in full", ""] + _md_table(PLAN_HEADERS, plan_table(o)) + [""]
        lines += _md_table(("Reverse-current cut-out", "Figure"), cutout_rows(o)) + [""]
    lines += ["## What to expect", ""] + _md_table(("Figure", "Value"), figure_rows(o)) + [""]
    lines += ["## Limits and margins", ""]
    lines += _md_table(("Limit", "Value", "Limit value", "Margin", "Margin of limit", "Status"), margin_rows(o)) + [""]
    lines += ["How the settings are ranked: " + md_esc(ranking_rule(result)), ""]
    if run is not None:
        lines += ["## Charge run", ""] + _md_table(("What", "Value"), run_rows(run)) + [""]
    lines += ["## Cautions", ""]
    if o.cautions:
        lines += ["Of this setting:", ""] + _md_cautions(o.cautions) + [""]
    if result.cautions:
        lines += ["Of the job as a whole:", ""] + _md_cautions(result.cautions) + [""]
    if not o.cautions and not result.cautions:
        lines += ["None raised by the rules for this setting.", ""]
    lines += ["## The machine", ""] + _md_table(("What", "Data"), machine_rows(m)) + [""]
    lines += ["## The job", ""] + _md_table(("What", "Value"), job_rows(p)) + [""]
    lines += ["## Words used here", ""] + [f"- **{md_esc(k)}**: {md_esc(v)}" for k, v in glossary_for(p.kind, o.setting.connection).items()] + [""]
    lines += ["---", "", f"**{md_esc(STANDING_NOTICE)}**", ""]
    return "\n".join(lines)


# ---------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------

_CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: #1b2430; margin: 0 auto;
       max-width: 46rem; padding: 1rem; line-height: 1.35; }
h1 { font-size: 1.3rem; margin: 0 0 .2rem; border-bottom: 3px solid #1f4e79; padding-bottom: .25rem; }
h2 { font-size: 1.1rem; margin: 1.1rem 0 .35rem; color: #1f4e79; }
h3 { font-size: .98rem; margin: .7rem 0 .25rem; }
.meta { color: #3d4754; font-size: .9rem; margin: .2rem 0 .4rem; }
.wrap { overflow-x: auto; }
table { border-collapse: collapse; width: 100%; font-size: .88rem; }
th, td { border: 1px solid #b9c1ca; padding: .2rem .4rem; text-align: left; vertical-align: top; }
th { background: #eef1f4; }
td.num { text-align: right; white-space: nowrap; }
.card { border: 2px solid #1f4e79; border-radius: 6px; padding: .3rem .7rem .6rem; margin: .5rem 0; }
.card h2 { margin-top: .3rem; }
.why { margin: .1rem 0 .4rem; font-style: italic; }
.why.small { font-size: .75rem; margin: 0 0 .2rem; line-height: 1.25; }
.setting td:first-child { width: 42%; }
.setting td:last-child { font-weight: bold; }
.top { display: grid; grid-template-columns: minmax(0, 11fr) minmax(0, 9fr); gap: .6rem; align-items: start; }
table.compact td { white-space: nowrap; }
.halves { display: grid; grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); gap: .5rem; align-items: start; }
.wiring { margin: 0; text-align: center; }
.wiring svg { width: 100%; height: auto; max-height: 62mm; }
.wiring.large svg { max-height: 110mm; }
.steps { font-size: .9rem; margin: .3rem 0 .6rem; padding-left: 1.4rem; }
@media screen and (max-width: 700px) { .top, .halves { grid-template-columns: minmax(0, 1fr); } }
#checklist td:nth-child(3) { width: 15%; }
#checklist td:nth-child(4) { width: 8%; }
#checklist td { height: 1.35rem; }
.pointer { font-weight: bold; }
.caution { border-left: 6px solid #5c6b7a; padding: .3rem .6rem; margin: .4rem 0; background: #f6f7f9; }
.caution.stop { border-left-color: #a4372a; background: #fbeeec; }
.caution.warn { border-left-color: #9a5a12; background: #fdf5ec; }
.caution .sev { font-weight: bold; text-transform: uppercase; letter-spacing: .03em; margin-right: .4rem; }
.caution .basis { display: block; color: #3d4754; font-size: .85rem; }
.broken { color: #a4372a; font-weight: bold; }
.chart { margin: .8rem 0; break-inside: avoid; page-break-inside: avoid; }
.chart svg { max-width: 100%; height: auto; }
.notice { margin-top: 1.2rem; padding: .5rem .7rem; border: 2px solid #1f4e79; font-weight: bold; }
.notice.small { margin-top: .4rem; padding: .25rem .5rem; font-size: .8rem; font-weight: normal; }
.later { break-before: page; page-break-before: always; }
dl.glossary dt { font-weight: bold; } dl.glossary dd { margin: 0 0 .3rem 1rem; }
@page { size: A4; margin: 8mm 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 9.5pt; }
  .first table { font-size: 8pt; }
  .first th, .first td { padding: .12rem .35rem; }
  #checklist td { height: 1.1rem; }
  .first h2 { margin: .45rem 0 .2rem; }
  .first .notice { break-inside: avoid; page-break-inside: avoid; }
  h2 { break-after: avoid; page-break-after: avoid; }
  table, .caution, .card, .wiring { break-inside: avoid; page-break-inside: avoid; }
}
"""


def _html_table(headers, rows, cls="", numeric=(), table_id=None):
    head = "".join(f"<th>{esc(h)}</th>" for h in headers)
    body = []
    for r in rows:
        cells = []
        for j, c in enumerate(r):
            klass = ' class="num"' if j in numeric else ""
            if headers and headers[-1] == "Status" and j == len(r) - 1 and c == "broken":
                klass = ' class="broken"'
            cells.append(f"<td{klass}>{esc(c)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    thead = f"<thead><tr>{head}</tr></thead>" if headers else ""
    ident = f' id="{esc(table_id)}"' if table_id else ""
    return f'<div class="wrap"><table{ident} class="{cls}">{thead}<tbody>{"".join(body)}</tbody></table></div>'


def _html_cautions(cautions):
    out = []
    for c in sorted_cautions(cautions):
        out.append(f'<div class="caution {esc(c.severity)}"><span class="sev">{esc(SEVERITY_WORDS.get(c.severity, c.severity))}</span>'
                   f'{esc(c.message)}<span class="basis">{esc(source_text(c.basis))}</span></div>')
    return "\n".join(out)


def chart_svgs(result, option, run=None, other_taps=(), width=SHEET_CHART_WIDTH):
    """``[(title, svg text)]`` of the option's charts, exported with vl-convert."""
    import vl_convert as vlc
    from .charts import chart_spec, option_charts
    out = []
    for _, title, ch in option_charts(result.machine, result.profile, option, other_taps, run, width):
        svg = vlc.vegalite_to_svg(chart_spec(ch))
        out.append((title, _clean_svg(svg)))
    return out


def _clean_svg(svg):
    """Inline-ready SVG: no XML prolog, no scripts or event handlers (none are expected)."""
    svg = re.sub(r"^\s*<\?xml[^>]*>\s*", "", svg)
    svg = re.sub(r"<script.*?</script>", "", svg, flags=re.S | re.I)
    return re.sub(r"\son[a-z]+\s*=\s*\"[^\"]*\"", "", svg, flags=re.I)


def wiring_svg_for(result, option):
    """The wiring drawing of an option as inline SVG."""
    from .wiring import wiring, wiring_svg
    return _clean_svg(wiring_svg(wiring(result.machine, option.setting, result.profile.kind,
                                        electrode_of(result.profile))))


def high_end_tap(option):
    """The series turns an option uses at the top of its range (a welding dial may change tap along it)."""
    ends = [cs for cs in option.current_settings or [] if cs.get("series_turns") is not None]
    return ends[-1]["series_turns"] if ends else option.setting.series_turns


def other_tap_options(result, option):
    """The best option of each other series tap of the same connection (welding charts).

    Keyed by the tap each is drawn at, its high end: an option that starts
    on another tap and changes to one the chosen option uses is not another tap.
    """
    seen = {option.setting.series_turns, high_end_tap(option)}
    out = []
    for o in result.options:
        tap = high_end_tap(o)
        if o.setting.connection == option.setting.connection and tap not in seen and o.setting.diverter_ohm is None:
            seen.add(tap)
            out.append(o)
    return out[:3]


def search_notes_for(result, option):
    """The search's notes a near miss's card carries (why nothing fits, what would: a larger drive, a
    warm start); none on a setting that meets the job."""
    from .search import NO_FIT_NOTE
    if option.feasible:
        return []
    return [str(n) for n in getattr(result, "notes", None) or [] if str(n).strip() and n != NO_FIT_NOTE]


def card_heading(option):
    """The setting card's heading: a near miss is not a setting to make, and says so first."""
    if getattr(option, "knife_edge", False):
        return "Set the machine like this, if you can: only on a knife-edge"
    if option.feasible:
        return "Set the machine like this"
    return "Does not meet the job: the nearest miss, for reference only"


def card_html(result, option, run=None, wiring_svg=None):
    """The setting card: what to set, why it ranks where it does, the wiring beside it, the dial or the plan."""
    m, p, o = result.machine, result.profile, option
    parts = ['<div class="card" id="setting-card">', f"<h2>{esc(card_heading(o))}</h2>",
             f'<p class="why">{esc(ranking_line(result, o))}</p>']
    parts += [f'<p class="why small">{esc(n[0].upper() + n[1:])}.</p>' for n in search_notes_for(result, o)]
    parts += ['<div class="top">',
             _html_table((), setting_rows(o, m, p), "setting")]
    if wiring_svg is not None:
        parts += ['<div class="wiring" role="img" aria-label="Wiring of the chosen connection">', wiring_svg, "</div>"]
    parts.append("</div>")
    dial = dial_rows(o)
    if dial:
        # on the card: what to set per current, in two halves side by side; the full dial is on a later page
        heads, short = dial_card_rows(o)
        half = (len(short) + 1) // 2 if len(short) > 7 else len(short)
        halves = [short[:half], short[half:]] if half < len(short) else [short]
        parts += ["<h3>Welding dial</h3>", f'<p class="small">{esc(dial_setting_words(result.profile, short=True))}</p>', '<div class="halves">']
        parts += [_html_table(heads, h, "dial compact", numeric=(0, 1)) for h in halves]
        parts.append("</div>")
    elif o.current_settings:
        parts += ["<h3>Field setting for each end of the welding range</h3>",
                  _html_table(CURRENT_SETTING_HEADERS, current_setting_rows(o), numeric=(0, 2, 3))]
    if card_plan_rows(o):
        parts += ["<h3>Charge plan</h3>", _html_table(CARD_PLAN_HEADERS, card_plan_rows(o), "plan")]
    elif run is not None:
        parts.append(f"<p>{esc(run_summary(run))}</p>")
    parts.append("</div>")
    return "\n".join(parts)


def checklist_html(result, option, run=None):
    rows = [(c, e, "", "") for c, e in checklist_rows(result, option, run)]
    return _html_table(CHECKLIST_HEADERS, rows, "checklist", table_id="checklist")


def sheet_html(result, rank=None, run=None, date=None, charts=True, svgs=None):
    """The setting sheet of option ``rank`` (default the best) as one printable HTML page.

    Page 1 (A4) holds what is needed at the machine: the setting card, the
    wiring drawing and the checklist (Expected, Measured, Initials); the
    figures, margins, cautions, curves, the machine and the job follow on
    the next pages.

    Parameters
    ----------
    result : SearchResult
    rank : int, optional
    run : ChargeRun, optional
    date : datetime.date or str, optional
    charts : bool
        Include the charts as inline SVG.
    svgs : list of (title, svg), optional
        Charts already exported (the page caches them).
    """
    m, p = result.machine, result.profile
    o = _option(result, rank)
    stops = [c for c in list(o.cautions) + list(result.cautions) if c.severity == "stop"]
    title = f"Setting sheet: {m.label or 'machine'}"
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width, initial-scale=1">',
             f"<title>{esc(title)}</title><style>{_CSS}</style></head><body>",
             '<section class="first">',
             f"<h1>{esc(title)}</h1>",
             f'<p class="meta"><b>Job:</b> {esc(p.label or p.kind)} ({esc(KIND_WORDS.get(p.kind, p.kind))}) · '
             f"<b>Chosen:</b> {esc(status_text(o, len(result.options)))} · "
             f"<b>Made by:</b> supplycfg {esc(__version__)} on {esc(_date(date))}</p>"]
    if stops:
        parts += ["<h2>STOP: do not use this setting as it stands</h2>", _html_cautions(stops)]
    from .wiring import wiring
    svg = wiring_svg_for(result, o)
    parts.append(card_html(result, o, run, svg))
    parts += ["<h2>Check at the machine</h2>", checklist_html(result, o, run),
              # the pointer and the notice in one box: page 1 of a battery sheet has room for no more
              f'<p class="notice small"><span class="pointer">{esc(cautions_pointer(o, result))}</span> '
              f'{esc(STANDING_NOTICE)}</p>', "</section>"]
    parts.append('<section class="later">')
    # the card's drawing prints small beside the setting: here at full width, with the steps in words
    steps = wiring(m, o.setting, p.kind, electrode_of(p)).steps
    parts += ["<h2>Wiring</h2>",
              f'<div class="wiring large" role="img" aria-label="Wiring of the chosen connection, full width">{svg}</div>',
              '<ol class="steps">' + "".join(f"<li>{esc(st)}</li>" for st in steps) + "</ol>"]
    if dial_rows(o):
        parts += ["<h2>Welding dial in full</h2>", _html_table(DIAL_HEADERS, dial_rows(o), "dial", numeric=(0, 1))]
    if plan_table(o):
        parts += ["<h2>Charge plan</h2>",
                  f"<p>At {esc(condition_words(o)['setting'])}; only the field changes between stages.</p>",
                  _html_table(PLAN_HEADERS, plan_table(o)),
                  _html_table(("Reverse-current cut-out", "Figure"), cutout_rows(o))]
    parts += ["<p><b>Ranked by:</b> " + esc(ranking_rule(result)) + "</p>"]
    parts += ["<h2>What to expect</h2>",
              _html_table(("Figure", "Value"), figure_rows(o), numeric=(1,))]
    parts += ["<h2>Limits and margins</h2>",
              _html_table(("Limit", "Value", "Limit value", "Margin", "Margin of limit", "Status"), margin_rows(o),
                          numeric=(1, 2, 3, 4)),
              f"<p><b>How the settings are ranked:</b> {esc(ranking_rule(result))}</p>"]
    if run is not None:
        parts += ["<h2>Charge run</h2>", _html_table(("What", "Value"), run_rows(run))]
    parts.append("<h2>Cautions</h2>")
    if o.cautions:
        parts += ["<h3>Of this setting</h3>", _html_cautions(o.cautions)]
    if result.cautions:
        parts += ["<h3>Of the job as a whole</h3>", _html_cautions(result.cautions)]
    if not o.cautions and not result.cautions:
        parts.append("<p>None raised by the rules for this setting.</p>")
    if charts:
        if svgs is None:
            svgs = chart_svgs(result, o, run, other_tap_options(result, o) if p.kind == "welding" else ())
        parts.append("<h2>Curves</h2>")
        for t, svg in svgs:
            parts.append(f'<figure class="chart" aria-label="{esc(t)}">{svg}</figure>')
    parts += ["<h2>The machine</h2>", _html_table(("What", "Data"), machine_rows(m))]
    parts += ["<h2>The job</h2>", _html_table(("What", "Value"), job_rows(p))]
    parts += ["<h2>Words used here</h2>", '<dl class="glossary">'
              + "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in glossary_for(result.profile.kind, o.setting.connection).items()) + "</dl>"]
    parts += [f'<p class="notice">{esc(STANDING_NOTICE)}</p>', "</section>", "</body></html>"]
    return "\n".join(parts)


# ---------------------------------------------------------------------------
# from files (the ``supplycfg sheet`` command)
# ---------------------------------------------------------------------------

def charge_run_for(result, option):
    """The option's charge run for battery jobs, or None (other jobs, or no simulation module)."""
    if result.profile.kind != "battery":
        return None
    try:
        from .simulation import charge_run_for_option
    except ImportError:
        return None
    return charge_run_for_option(result.machine, result.profile, option)


def sheet_from_files(machine_path, profile_path, output_path, option_rank=None, force=False):
    """Search and write the setting sheet of one option (``.html`` or ``.md`` by the file name).

    Parameters
    ----------
    machine_path, profile_path : str or Path
    output_path : str or Path
        Ends in ``.html``/``.htm`` (printable page with charts) or ``.md``.
    option_rank : int, optional
        Rank of the option (1 = best); default the best.
    force : bool
        Overwrite an existing file.

    Returns
    -------
    Path
    """
    from .profile import load_profile
    from .machine import load_machine
    from .search import search
    out = Path(output_path)
    suffix = out.suffix.lower()
    if suffix not in (".html", ".htm", ".md", ".markdown"):
        raise InputError("command line", "--output", f"is {out.name!r}; allowed: a file name ending .html or .md")
    if out.exists() and not force:
        raise InputError(out.name, "output", "exists already; pass --force to overwrite it")
    m = load_machine(machine_path)
    p = load_profile(profile_path)
    res = search(m, p)
    o = _option(res, option_rank)
    run = charge_run_for(res, o)
    text = sheet_html(res, o.rank, run) if suffix in (".html", ".htm") else sheet_markdown(res, o.rank, run)
    return write_atomic(out, text, force)
