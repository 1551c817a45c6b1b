"""The setting sheet: one option of the search, written for the person at the machine.

Two forms with the same content: Markdown, and a printable HTML page with the
charts inline as SVG (exported by ``vl-convert``, no network). Every text that
comes from a file or a form (labels, names) is escaped, so a label such as
``<script>`` prints as text. The sheet carries the tool's version, the date
and the standing notice.
"""

import datetime as _dt
import html
import math
import re
from pathlib import Path

from . import STANDING_NOTICE, __version__
from .errors import InputError
from .files import write_atomic

SEVERITY_ORDER = ("stop", "warn", "note")
SEVERITY_WORDS = {"stop": "STOP", "warn": "Warning", "note": "Note"}
KIND_WORDS = {"battery": "battery charging", "welding": "arc welding", "lighting": "lighting over a feeder",
              "booster": "feeder boosting"}
#: Width of the charts on the printed sheet [px]: fits A4 portrait with margins.
SHEET_CHART_WIDTH = 560

# unit suffixes of figure names, longest first
_UNITS = (("_v_per_a", "V/A"), ("_m3_per_h", "m³/h"), ("_percent", "%"), ("_rpm", "rpm"), ("_ohm", "Ω"), ("_kw", "kW"),
          ("_kwh", "kWh"), ("_ah", "Ah"), ("_a", "A"), ("_v", "V"), ("_h", "h"), ("_c", "°C"))

#: Plain words for the figures the search reports; others are named from their key.
FIGURE_WORDS = {
    "start_charge_current_a": "charging current at the start (rest-voltage line), highest",
    "start_charge_current_min_a": "charging current at the start (rest-voltage line), lowest",
    "start_charge_current_on_charge_a": "charging current at the start (charging curve), highest",
    "start_charge_current_on_charge_min_a": "charging current at the start (charging curve), lowest",
    "end_charge_current_a": "charging current at the end of charge, lowest",
    "end_volts_per_cell": ("volts per cell at the end of charge, highest", "V"),
    "end_volts_per_cell_limit": ("charge limit per cell at the battery's temperature", "V"),
    "gassing_volts_per_cell": ("gassing voltage per cell", "V"),
    "ventilation_m3_per_h": "battery-room airflow for the boost charge",
    "no_load_voltage_min_v": "no-load voltage, lowest",
    "no_load_voltage_max_v": "no-load voltage, highest",
    "bank_open_circuit_voltage_start_v": "bank rest voltage at the start",
    "bank_open_circuit_voltage_end_v": "bank rest voltage at the end",
    "max_armature_current_a": "armature current, highest",
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
    "max_no_load_voltage_v": "no-load voltage (mean), highest",
    "no_load_peak_voltage_v": "no-load voltage (peak, with commutator ripple)",
    "no_load_limit_v": "no-load voltage limit (peak)",
    "no_load_mean_limit_v": "no-load voltage limit (mean, site rule)",
    "slope_low_end_v_per_a": "slope of the characteristic at the low end",
    "slope_high_end_v_per_a": "slope of the characteristic at the high end",
    "stuck_electrode_current_a": "stuck-electrode current",
    "duty_equivalent_current_a": "duty-cycle equivalent current (an upper bound)",
    "top_speed_rpm": "top drive speed",
    "max_shaft_power_kw": "shaft power at the job's points, highest",
    "min_speed_rpm": "generator speed at the job's points, lowest",
    "max_speed_rpm": "generator speed at the job's points, highest",
    "no_load_speed_rpm": "generator speed at no load",
    "min_efficiency_percent": "efficiency at the job's points, lowest",
    "collapsed_load_points": ("points where the field collapses at the drive's speed", ""),
    "max_drive_loading_percent": "drive loading (shaft power over its rating), highest",
    "drive_rated_power_kw": "drive rating",
    "max_drive_torque_percent": "motor torque over its rated torque, highest",
    "breakdown_torque_percent": "motor breakdown torque",
    "idle_no_load_voltage_v": "no-load voltage at the engine's idle",
    "idle_builds_up": ("shunt field builds up at the engine's idle (1 yes, 0 no)", ""),
}

#: Plain words for the limits the search checks.
LIMIT_WORDS = {
    "start_current_max": "starting current at most the battery's highest",
    "start_current_min": "starting current at least the lowest asked",
    "end_volts_per_cell": "volts per cell at the end within the charge limit",
    "end_current_floor": "still charging at the end of charge",
    "no_load_above_bank": "no-load voltage above the full bank",
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
    "solve_not_converged": "the solve converged",
    "drive_power": "shaft power within the drive's rating",
    "stop_caution": "no stop caution",
}


def esc(text):
    """HTML-escape any text from a file or a form."""
    return html.escape("" if text is None else str(text), quote=True)


_MD_SPECIAL = re.compile(r"([\\`*_\[\]|~])")


def md_esc(text):
    """Text safe inside Markdown (and inside a Markdown table cell): no markup, no HTML."""
    return _MD_SPECIAL.sub(r"\\\1", html.escape("" if text is None else str(text), quote=False))


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


def figure_rows(option):
    """``[(words, value text)]`` of an option's figures."""
    rows = []
    for k, v in option.figures.items():
        words, unit = figure_label(k)
        rows.append((words, fmt(v, unit)))
    return rows


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


def setting_rows(option, machine, profile):
    """``[(what, how)]`` describing the setting."""
    s = option.setting
    taps = ", ".join(f"{t:g}" for t in machine.series_taps) if machine.has_series else ""
    rows = [("Connection", s.connection)]
    if machine.has_series:
        rows.append(("Series turns per pole in use", f"{(s.series_turns or 0):g} (taps: {taps})"))
    if option.current_settings and s.connection != "series":
        ends = current_setting_rows(option)
        rows.append(("Field", "; ".join(f"{f} for {cur}" for cur, f, _, _ in ends)))
    else:
        rows.append(("Field", field_control_text(option, machine)))
    if machine.has_series:
        rows.append(("Diverter across the series winding", "none" if s.diverter_ohm is None else fmt(s.diverter_ohm, "Ω")))
    rows += drive_rows(option, profile)
    temps = profile.temperatures_c
    rows.append(("Winding temperature", f"{fmt(temps[0])} to {fmt(temps[1], '°C')}" if temps
                 else fmt(machine.reference_temperature_c, "°C (the machine's reference)")))
    return rows


def drive_rows(option, profile):
    """``[(what, how)]`` of the drive: its speed (fixed), or its figures and the tachometer checks."""
    d = profile.drive
    speeds = tuple(profile.speeds_rpm)
    if not d.coupled:
        sp = fmt(speeds[0], "rpm") if len(speeds) == 1 else f"{fmt(speeds[0])} to {fmt(speeds[1], 'rpm')}"
        rows = [("Drive speed (generator shaft)", sp)]
        if d.ratio != 1:
            rows.append(("Drive", d.describe()))
        return rows
    f = option.figures
    rows = [("Drive", d.describe())]
    nl, lo, kw = f.get("no_load_speed_rpm"), f.get("min_speed_rpm"), f.get("max_shaft_power_kw")
    rows.append(("Tachometer check, generator shaft at no load", "about " + fmt(nl, "rpm")))
    heavy = "about " + fmt(lo, "rpm")
    if kw is not None:
        heavy += f" ({fmt(kw, 'kW')} at the shaft)"
    rows.append(("Tachometer check, generator shaft at the heaviest point of the job", heavy))
    if d.ratio != 1 and nl is not None and lo is not None:
        rows.append((f"The same at the {d.kind}'s own shaft", f"about {fmt(nl / d.ratio, 'rpm')} and {fmt(lo / d.ratio, 'rpm')}"))
    return rows


def current_setting_rows(option):
    """Welding: ``[(current, field setting, arc-side voltage, no-load voltage)]`` per end of the range."""
    rows = []
    for cs in option.current_settings or []:
        if option.setting.connection == "series":
            f = "series winding only"
        elif _given(cs.get("field_current_a")):
            f = f"exciter field {fmt(cs['field_current_a'], 'A')}"
        else:
            f = f"rheostat {fmt(cs.get('rheostat_ohm'), 'Ω')}"
        if cs.get("reachable") is False:
            f += " (end of its range: target not reached)"
        rows.append((fmt(cs.get("current_a"), "A"), f, fmt(cs.get("terminal_voltage_v"), "V"),
                     fmt(cs.get("no_load_voltage_v"), "V")))
    return rows


def _given(v):
    return v is not None and not (isinstance(v, float) and not math.isfinite(v))


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
        return f"option {option.rank}{of}: meets every limit (least margin {fmt(100 * option.smallest_margin, '%')})"
    broken = ", ".join(limit_label(n) for n in option.failed)
    return f"option {option.rank}{of}: near miss, breaks: {broken}"


def job_rows(profile):
    """``[(key, value)]`` of the job table, values as written in the profile."""
    from .profile import profile_to_dict
    d = profile_to_dict(profile)
    rows = []
    for table in ("drive", profile.kind):
        for k, v in d.get(table, {}).items():
            rows.append((f"{table}.{k}", ", ".join(fmt(x) for x in v) if isinstance(v, (list, tuple)) else fmt(v)))
    return rows


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
    rows = [("Duration", fmt(run.duration_h, "h")), ("Stops because", str(run.stop_reason))]
    if len(run.time_h):
        rows += [("State of charge at the end", fmt(100 * float(run.state_of_charge[-1]), "%")),
                 ("Delivered", f"{fmt(float(run.ah[-1]), 'Ah')}, {fmt(float(run.kwh[-1]), 'kWh')}"),
                 ("Highest volts per cell", fmt(float(max(run.volts_per_cell)), "V")),
                 ("Current at the start and end", f"{fmt(float(run.current_a[0]), 'A')} and "
                                                 f"{fmt(float(run.current_a[-1]), 'A')}")]
    if run.limit_volts_per_cell is not None:
        rows.append(("Charge limit per cell", fmt(run.limit_volts_per_cell, "V")))
    return rows


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
        out.append(f"  Rests on: {md_esc(c.basis)}")
    return out


def sheet_markdown(result, rank=None, run=None, date=None):
    """The setting sheet of option ``rank`` (default the best) as Markdown.

    Parameters
    ----------
    result : SearchResult
    rank : int, optional
    run : ChargeRun, optional
        The charge run of the option (battery jobs).
    date : datetime.date or str, optional
        Date printed on the sheet; default today.
    """
    m, p = result.machine, result.profile
    o = _option(result, rank)
    stops = [c for c in list(o.cautions) + list(result.cautions) if c.severity == "stop"]
    lines = [f"# Setting sheet: {md_esc(m.label or 'machine')}", "",
             f"**Job:** {md_esc(p.label or p.kind)} ({KIND_WORDS.get(p.kind, p.kind)})  ",
             f"**Chosen:** {md_esc(status_text(o, len(result.options)))}  ",
             f"**Made by:** supplycfg {__version__} on {_date(date)}", ""]
    if stops:
        lines += ["## STOP: do not use this setting as it stands", ""] + _md_cautions(stops) + [""]
    lines += ["## Set the machine like this", ""] + _md_table(("What", "Setting"), setting_rows(o, m, p)) + [""]
    if o.current_settings:
        lines += ["### Field setting for each end of the welding range", ""]
        lines += _md_table(("Welding current", "Field", "Arc-side voltage", "No-load voltage"),
                           current_setting_rows(o)) + [""]
    lines += ["## What to expect", ""] + _md_table(("Figure", "Value"), figure_rows(o)) + [""]
    lines += ["## Limits and margins", ""]
    lines += _md_table(("Limit", "Value", "Limit value", "Margin", "Margin of limit", "Status"), margin_rows(o)) + [""]
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
    lines += ["## The job", ""] + _md_table(("Key", "Value"), job_rows(p)) + [""]
    lines += ["---", "", f"**{md_esc(STANDING_NOTICE)}**", ""]
    return "\n".join(lines)


# ---------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------

_CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: #1b2430; margin: 0 auto;
       max-width: 46rem; padding: 1rem; line-height: 1.4; }
h1 { font-size: 1.5rem; margin: 0 0 .3rem; border-bottom: 3px solid #23395b; padding-bottom: .3rem; }
h2 { font-size: 1.15rem; margin: 1.4rem 0 .4rem; color: #23395b; }
h3 { font-size: 1rem; margin: 1rem 0 .3rem; }
.meta { color: #4a5563; font-size: .92rem; }
.wrap { overflow-x: auto; }
table { border-collapse: collapse; width: 100%; font-size: .9rem; }
th, td { border: 1px solid #c9cfd6; padding: .25rem .45rem; text-align: left; vertical-align: top; }
th { background: #eef1f4; }
td.num { text-align: right; white-space: nowrap; }
.setting td:first-child { width: 40%; }
.setting td:last-child { font-weight: bold; font-size: 1rem; }
.caution { border-left: 6px solid #5c6b7a; padding: .35rem .6rem; margin: .45rem 0; background: #f6f7f9; }
.caution.stop { border-left-color: #a4372a; background: #fbeeec; }
.caution.warn { border-left-color: #b5651d; background: #fdf5ec; }
.caution .sev { font-weight: bold; text-transform: uppercase; letter-spacing: .03em; margin-right: .4rem; }
.caution .basis { display: block; color: #4a5563; font-size: .85rem; }
.broken { color: #a4372a; font-weight: bold; }
.chart { margin: .8rem 0; break-inside: avoid; page-break-inside: avoid; }
.chart svg { max-width: 100%; height: auto; }
.notice { margin-top: 1.6rem; padding: .6rem .8rem; border: 2px solid #23395b; font-weight: bold; }
.tick { display: inline-block; width: 1.1rem; height: 1.1rem; border: 1.5px solid #1b2430; vertical-align: middle; }
@page { size: A4; margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  table, .caution { break-inside: avoid; page-break-inside: avoid; }
}
"""


def _html_table(headers, rows, cls="", numeric=()):
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
    return f'<div class="wrap"><table class="{cls}">{thead}<tbody>{"".join(body)}</tbody></table></div>'


def _html_cautions(cautions):
    out = []
    for c in sorted_cautions(cautions):
        out.append(f'<div class="caution {esc(c.severity)}"><span class="sev">{esc(SEVERITY_WORDS.get(c.severity, c.severity))}</span>'
                   f'{esc(c.message)}<span class="basis">Rests on: {esc(c.basis)}</span></div>')
    return "\n".join(out)


def chart_svgs(result, option, run=None, other_taps=(), width=SHEET_CHART_WIDTH):
    """``[(title, svg text)]`` of the option's charts, exported with vl-convert."""
    import vl_convert as vlc
    from .charts import option_charts
    out = []
    for _, title, ch in option_charts(result.machine, result.profile, option, other_taps, run, width):
        svg = vlc.vegalite_to_svg(ch.to_dict())
        out.append((title, _clean_svg(svg)))
    return out


def _clean_svg(svg):
    """Inline-ready SVG: no XML prolog, no scripts or event handlers (none are expected)."""
    svg = re.sub(r"^\s*<\?xml[^>]*>\s*", "", svg)
    svg = re.sub(r"<script.*?</script>", "", svg, flags=re.S | re.I)
    return re.sub(r"\son[a-z]+\s*=\s*\"[^\"]*\"", "", svg, flags=re.I)


def other_tap_options(result, option):
    """The best option of each other series tap of the same connection (welding charts)."""
    seen, out = {option.setting.series_turns}, []
    for o in result.options:
        if o.setting.connection == option.setting.connection and o.setting.series_turns not in seen \
                and o.setting.diverter_ohm is None:
            seen.add(o.setting.series_turns)
            out.append(o)
    return out[:3]


def sheet_html(result, rank=None, run=None, date=None, charts=True, svgs=None):
    """The setting sheet of option ``rank`` (default the best) as one printable HTML page.

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
             f"<h1>{esc(title)}</h1>",
             f'<p class="meta"><b>Job:</b> {esc(p.label or p.kind)} ({esc(KIND_WORDS.get(p.kind, p.kind))})<br>'
             f"<b>Chosen:</b> {esc(status_text(o, len(result.options)))}<br>"
             f"<b>Made by:</b> supplycfg {esc(__version__)} on {esc(_date(date))}</p>"]
    if stops:
        parts += ["<h2>STOP: do not use this setting as it stands</h2>", _html_cautions(stops)]
    parts += ["<h2>Set the machine like this</h2>", _html_table((), setting_rows(o, m, p), "setting")]
    if o.current_settings:
        parts += ["<h3>Field setting for each end of the welding range</h3>",
                  _html_table(("Welding current", "Field", "Arc-side voltage", "No-load voltage"),
                              current_setting_rows(o), numeric=(0, 2, 3))]
    parts += ["<h2>What to expect</h2>", _html_table(("Figure", "Value"), figure_rows(o), numeric=(1,))]
    parts += ["<h2>Limits and margins</h2>",
              _html_table(("Limit", "Value", "Limit value", "Margin", "Margin of limit", "Status"), margin_rows(o),
                          numeric=(1, 2, 3, 4))]
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
    parts += ["<h2>The job</h2>", _html_table(("Key", "Value"), job_rows(p))]
    parts += ["<h2>Checked at the machine</h2>",
              _html_table(("Before closing onto the load", "Done"),
                          [("Polarity checked with a meter", ""), ("Connection and tap as above", ""),
                           ("Field set as above, speed at the figure above", "")]),
              f'<p class="notice">{esc(STANDING_NOTICE)}</p>', "</body></html>"]
    return "\n".join(parts)


# ---------------------------------------------------------------------------
# from files (the ``supplycfg sheet`` command)
# ---------------------------------------------------------------------------

def charge_run_for(result, option):
    """The option's charge run for battery jobs, or None (other jobs, or no simulation module)."""
    if result.profile.kind != "battery":
        return None
    try:
        from .simulation import charge_run
    except ImportError:
        return None
    return charge_run(result.machine, result.profile, option.setting)


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
