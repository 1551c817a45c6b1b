"""The ``supplycfg`` command line.

Every command prints a readable table, or with ``--json`` one JSON object and
nothing else. Bad input gives one line on standard error and exit code 2.
Text from files (labels, names) is shown with every control character as a
visible escape; JSON keeps it exact.
"""

import argparse
import math
import os
import re
import sys
from pathlib import Path
from dataclasses import dataclass, replace

from . import __version__, STANDING_NOTICE
from .errors import InputError
from .bench import MAX_BENCH_REPEAT
from .files import check_output_path, dumps_json
from .text import visible
from .wording import caution_lines, connection_words

SETTING_OPTIONS = {"rheostat_ohm": "--rheostat-ohm", "field_current_a": "--field-current-a",
                   "series_turns": "--series-turns", "diverter_ohm": "--diverter-ohm",
                   "speed_rpm": "--speed-rpm", "winding_temperature_c": "--winding-temperature-c",
                   "connection": "--connection"}


#: Upper bounds of the options that multiply work or output (README, "What it checks").
MAX_CURVE_POINTS = 10_000
MAX_TOP = 1_000
MAX_OPTION_RANK = 1_000
#: Bounds of the EMF equation's inputs: those of the machine file's keys
#: (poles, [winding]) and of any real machine (flux per pole, EMF).
MAX_POLES = 64
MAX_CONDUCTORS = 10_000_000
MAX_PARALLEL_PATHS = 1_000
MAX_FLUX_WB = 100.0
MAX_EMF_V = 1e6
MIN_SPEED_RPM, MAX_SPEED_RPM = 1.0, 100_000.0
#: Bounds of a load given on the command line: far beyond any generator the
#: machine file allows, and small enough that no product of them overflows.
MAX_LOAD_OHM = 1e6
MAX_LOAD_CURRENT_A = 1e6
MAX_LOAD_VOLTAGE_V = 1e5
#: Streamlit settings of the page, passed as flags so that no configuration
#: file of the folder it is started from applies: this computer only, no
#: browser opened, 1 MB uploads, no usage statistics, a minimal toolbar.
PAGE_FLAGS = {"server.address": "127.0.0.1", "server.headless": "true", "server.maxUploadSize": "1",
              "browser.gatherUsageStats": "false", "client.toolbarMode": "minimal"}
DEFAULT_PAGE_PORT = 8501
#: The script Streamlit runs for ``supplycfg page`` (it only calls the page's main()).
PAGE_SCRIPT = Path(__file__).resolve().parent / "page" / "entry.py"
#: A negative number as an option's value (argparse alone takes "-1e3" for an option).
_NEGATIVE_NUMBER = re.compile(r"^-(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$|^-inf(inity)?$", re.IGNORECASE)


class _Parser(argparse.ArgumentParser):
    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = _NEGATIVE_NUMBER

    def error(self, message):
        found = re.match(r"argument ([^:]+): (.*)", message)
        if found:
            raise InputError("command line", found.group(1).split("/")[0], found.group(2))
        raise InputError("command line", self.prog, message)


def _whole(low, high, even=False):
    """An argparse type: a whole number in ``low..high`` (even if asked)."""
    def parse(text):
        try:
            v = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{visible(text[:40])!r} is not a whole number") from None
        if not low <= v <= high:
            raise argparse.ArgumentTypeError(f"{v} is outside {low}..{high}")
        if even and v % 2:
            raise argparse.ArgumentTypeError(f"{v} is odd; allowed: an even whole number {low}..{high}")
        return v
    return parse


def _workers(text):
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if not 1 <= v <= 256:
        raise argparse.ArgumentTypeError(f"{v} is outside 1..256")
    return v


def _number(text):
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{visible(text[:40])!r} is not a number") from None
    if not math.isfinite(v):
        raise argparse.ArgumentTypeError(f"{visible(text[:40])!r} is not a finite number")
    return v


def _number_in(low, high, unit, low_open=False):
    """An argparse type: a finite number in ``[low, high]`` (``(low, high]`` if ``low_open``)."""
    def parse(text):
        v = _number(text)
        if (v <= low if low_open else v < low) or v > high:
            lo = f"> {low:g}" if low_open else f">= {low:g}"
            raise argparse.ArgumentTypeError(f"{v:g} is outside the allowed range: {lo} and <= {high:g} {unit}")
        return v
    return parse


def _add_setting(p, connection_default=None, connection=True):
    if connection:
        p.add_argument("--connection", default=connection_default, required=connection_default is None,
                       help="how the windings are connected: separate, separate-cumulative, separate-differential, "
                            "shunt, series, long-shunt-cumulative, short-shunt-cumulative, long-shunt-differential, "
                            "short-shunt-differential" + ("" if connection_default is None else
                                                           "; omit the whole setting to use the search's best option"))
    g = p.add_mutually_exclusive_group()
    g.add_argument("--rheostat-ohm", type=_number,
                   help="field rheostat in series with the shunt winding [ohm], 0 to the machine's rheostat_max_ohm; "
                        "needed for a self-excited connection (give 0 for none)")
    g.add_argument("--field-current-a", type=_number,
                   help="separate excitation: the field current [A], at most what the machine's exciter drives "
                        "through the field at the winding temperature")
    p.add_argument("--series-turns", type=_number, help="series turns per pole in use: one of the machine's taps, exactly; default the whole series winding")
    p.add_argument("--diverter-ohm", type=_number, help="diverter resistor across the series winding [ohm]; omit for none")
    p.add_argument("--speed-rpm", type=_number_in(MIN_SPEED_RPM, MAX_SPEED_RPM, "rpm"),
                   help="drive speed [rpm]; default the machine's rated speed")
    p.add_argument("--winding-temperature-c", type=_number,
                   help="winding temperature [degC]; default the machine's reference temperature")


def command_parser():
    top = _Parser(prog="supplycfg", description="Set up a DC generator for a battery, a welding arc or a lighting bus.")
    top.add_argument("--version", action="version", version=f"supplycfg {__version__}")
    sub = top.add_subparsers(dest="command", parser_class=_Parser)

    machine_help = "machine file (TOML): the generator's test curve, resistances, turns and ratings"
    profile_help = "load profile (TOML): the job, its drive speeds and winding temperatures"
    json_help = "print one JSON object instead of the readable text"
    drive_help = ("load profile (TOML) whose [drive] turns the machine: with an engine or a motor the speed "
                  "follows the load (omit --speed-rpm)")

    p = sub.add_parser("curve", help="external characteristic of one setting",
                       description="External characteristic of one setting, from no load to zero volts. "
                                   "regulation_percent = (V_no-load - V_full) / V_full, where full load is the "
                                   "load current at which the armature carries its rated current (for a "
                                   "self-excited connection that is less than the rated armature current by "
                                   "the shunt-field current).")
    p.add_argument("machine", help=machine_help); _add_setting(p)
    p.add_argument("--profile", help=drive_help)
    p.add_argument("--points", type=_whole(2, MAX_CURVE_POINTS), default=40,
                   help=f"points along the curve (2 to {MAX_CURVE_POINTS}; default 40)")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("point", help="operating points of one setting against one load")
    p.add_argument("machine", help=machine_help); _add_setting(p)
    p.add_argument("--profile", help=drive_help)
    ohm = _number_in(0.0, MAX_LOAD_OHM, "ohm")
    volts = _number_in(-MAX_LOAD_VOLTAGE_V, MAX_LOAD_VOLTAGE_V, "V")
    p.add_argument("--load-ohm", type=ohm, help="load: a resistor [ohm]")
    p.add_argument("--load-current-a", type=_number_in(-MAX_LOAD_CURRENT_A, MAX_LOAD_CURRENT_A, "A"),
                   help="load: a constant current [A]")
    p.add_argument("--battery-emf-v", type=volts, help="load: a battery's EMF [V] (with --battery-ohm)")
    p.add_argument("--battery-ohm", type=ohm, help="load: the battery's internal and cable resistance [ohm]")
    p.add_argument("--line-v0", type=volts, help="load: a line V = V0 + k I, its V0 [V] (with --line-slope-ohm)")
    p.add_argument("--line-slope-ohm", type=ohm, help="load: the line's slope k [ohm]")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("buildup", help="self-excitation of the shunt field (or a series machine)")
    p.add_argument("machine", help=machine_help)
    p.add_argument("--connection", default="shunt", help="shunt (default) or series")
    p.add_argument("--rheostat-ohm", type=_number,
                   help="field rheostat [ohm]; without it only the critical field resistance is given")
    p.add_argument("--series-turns", type=_number, help="series machine: series turns per pole in use (a tap); default the whole series winding")
    p.add_argument("--speed-rpm", type=_number_in(MIN_SPEED_RPM, MAX_SPEED_RPM, "rpm"),
                   help="drive speed [rpm]; default the machine's rated speed")
    p.add_argument("--winding-temperature-c", type=_number,
                   help="winding temperature [degC]; default the machine's reference temperature")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("emf", help="the EMF equation E = P*Phi*N*Z/(60*A), either way")
    p.add_argument("--poles", type=_whole(2, MAX_POLES, even=True), required=True, help="number of poles P (even)")
    p.add_argument("--conductors", type=_whole(1, MAX_CONDUCTORS), required=True, help="armature conductors Z")
    p.add_argument("--parallel-paths", type=_whole(2, MAX_PARALLEL_PATHS, even=True), required=True,
                   help="parallel paths A (even: 2 for a wave winding, the pole count or a multiple for lap)")
    p.add_argument("--speed-rpm", type=_number_in(MIN_SPEED_RPM, MAX_SPEED_RPM, "rpm"), required=True,
                   help="speed N [rpm]")
    g = p.add_mutually_exclusive_group(required=True)
    g.add_argument("--flux-wb", type=_number_in(0.0, MAX_FLUX_WB, "Wb"), help="flux per pole [Wb]: gives the EMF")
    g.add_argument("--emf-v", type=_number_in(0.0, MAX_EMF_V, "V"), help="EMF [V]: gives the flux per pole")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("search", help="settings that meet a load profile, ranked")
    p.add_argument("machine", help=machine_help); p.add_argument("profile", help=profile_help)
    p.add_argument("--top", type=_whole(1, MAX_TOP), default=10, help=f"options to print (1 to {MAX_TOP}; default 10)")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("size", help="the smallest drive rating with which some setting meets the job")
    p.add_argument("machine", help=machine_help); p.add_argument("profile", help=profile_help + " (an engine or a motor)")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("charge", help="a battery charge through time")
    p.add_argument("machine", help=machine_help); p.add_argument("profile", help=profile_help + " (a battery job)")
    _add_setting(p, connection_default="")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("sheet", help="write the setting sheet of the best option (HTML or Markdown)")
    p.add_argument("machine", help=machine_help); p.add_argument("profile", help=profile_help)
    p.add_argument("--output", "-o", required=True, help="file to write (.html or .md)")
    p.add_argument("--option", type=_whole(1, MAX_OPTION_RANK), default=None, help="rank of the option (1 = best)")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")

    p = sub.add_parser("fleet", help="which machines of a folder can do one job: a search per machine file")
    p.add_argument("folder", help="folder of machine files (*.toml)")
    p.add_argument("profile", help="the load profile (TOML)")
    p.add_argument("--workers", type=_workers, default=None,
                   help="processes to use (default: every core)")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("cell", help="the battery cell model at one point: voltage, current and its split")
    p.add_argument("chemistry", help="lead-acid-vented, lead-acid-valve-regulated or nickel-cadmium-vented")
    p.add_argument("--soc", type=_number, required=True, help="state of charge, 0 to 1")
    g = p.add_mutually_exclusive_group(required=True)
    g.add_argument("--volts-per-cell", type=_number, help="cell voltage [V]")
    g.add_argument("--current-per-ah", type=_number, help="charging current per Ah of capacity [A/Ah]; 0.1 is C/10")
    p.add_argument("--temperature-c", type=_number, default=25.0, help="cell temperature [degC]; default 25")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("bench", help="time the engine and the search")
    p.add_argument("--repeat", type=_whole(1, MAX_BENCH_REPEAT), default=5,
                   help=f"repeats of each timing (1 to {MAX_BENCH_REPEAT}; default 5)")
    p.add_argument("--json", action="store_true", help=json_help)

    p = sub.add_parser("page", help="start the page in a browser tab on this computer (Streamlit)")
    p.add_argument("--port", type=_whole(1, 65535), default=DEFAULT_PAGE_PORT,
                   help=f"port to listen on (default {DEFAULT_PAGE_PORT})")
    p.add_argument("--address", default=PAGE_FLAGS["server.address"],
                   help="address to listen on (default 127.0.0.1, this computer only)")
    return top


def _setting_from(args, names=SETTING_OPTIONS):
    from .circuit import Setting
    return Setting(args.connection, rheostat_ohm=getattr(args, "rheostat_ohm", None),
                   field_current_a=getattr(args, "field_current_a", None),
                   series_turns=getattr(args, "series_turns", None),
                   diverter_ohm=getattr(args, "diverter_ohm", None),
                   speed_rpm=getattr(args, "speed_rpm", None),
                   winding_temperature_c=getattr(args, "winding_temperature_c", None))


def _checked(machine, setting):
    from .circuit import SELF_EXCITED, check_setting
    from .readings import exciter_field_current_max_a
    st = check_setting(machine, setting, "command line", SETTING_OPTIONS)
    if setting.connection in SELF_EXCITED and setting.rheostat_ohm is None:
        raise InputError("command line", "--rheostat-ohm", f"is needed for the self-excited connection "
                         f"{setting.connection!r}: give the field rheostat in ohm (0 for none)")
    if setting.field_current_a is not None:
        top = exciter_field_current_max_a(machine, st.winding_temperature_c)
        if top is not None and st.field_current_a > top * (1 + 1e-9):
            raise InputError("command line", "--field-current-a",
                             f"is {st.field_current_a:g}; allowed: at most {top:.3g} A, what the machine's "
                             f"{machine.excitation_voltage_v:g} V exciter drives through the field at "
                             f"{st.winding_temperature_c:g} degC")
    return st


def _drive(args, setting):
    """``(profile, drive, setting)``: the profile of ``--profile`` and its drive (None and None without
    one), and the setting with a fixed drive's speed."""
    if not getattr(args, "profile", None):
        return None, None, setting
    from dataclasses import replace
    from .profile import load_profile
    profile = load_profile(args.profile)
    drive = profile.drive
    if drive.coupled:
        if setting.speed_rpm is not None:
            raise InputError("command line", "--speed-rpm", f"is given with a profile whose drive is {'an' if drive.kind == 'engine' else 'a'} {drive.kind}: "
                             "its speed follows the load; allowed: omit --speed-rpm")
        return profile, drive, replace(setting, speed_rpm=drive.generator_speeds_rpm()[0])
    if setting.speed_rpm is None:
        speeds = drive.generator_speeds_rpm()
        setting = replace(setting, speed_rpm=0.5 * (min(speeds) + max(speeds)))
    return profile, drive, setting


def _job_no_load_cautions(profile, machine, setting, no_load_voltage_v):
    """A welding profile's no-load checks of the setting given (none for other jobs or no profile)."""
    if profile is None or profile.kind != "welding":
        return []
    from .jobs.welding import no_load_cautions
    return no_load_cautions(machine, profile, setting, no_load_voltage_v)


#: Plain words and units of the operating-point keys in text tables.
POINT_WORDS = {"load_current_a": "load current [A]", "terminal_voltage_v": "terminal voltage [V]",
               "armature_current_a": "armature current [A]", "shunt_field_current_a": "shunt field current [A]",
               "series_field_current_a": "series field current [A]", "generated_emf_v": "generated EMF [V]",
               "stable": "stable", "extrapolated": "beyond the measured curve", "state": "state", "converged": "solved",
               "speed_rpm": "speed [rpm]", "shaft_power_kw": "shaft power [kW]", "efficiency": "efficiency"}


def point_columns(connection, columns):
    """The point table's ``columns`` for a connection, less a field it does not have (a series machine
    has no shunt field; a plain shunt or separately excited one no series field in circuit)."""
    from .circuit import USES_SERIES
    gone = {"shunt_field_current_a"} if connection == "series" else set()
    if connection not in USES_SERIES:
        gone.add("series_field_current_a")
    return [c for c in columns if c not in gone]


def point_words(connection):
    """:data:`POINT_WORDS` for a connection: the field column names the field it has (separate or shunt)."""
    from .wording import field_words
    return dict(POINT_WORDS, shunt_field_current_a=f"{field_words(connection)} current [A]")


def _critical_ratio(machine, st):
    """R_crit / R_field of a self-excited setting at its speed and temperature (None otherwise)."""
    from .circuit import SELF_EXCITED, build_circuit, critical_field_resistance_ohm
    if st.connection not in SELF_EXCITED or st.rheostat_ohm is None:
        return None
    circ = build_circuit(machine, [st])
    return float(critical_field_resistance_ohm(circ)[0] / circ.rf[0])


def _setting_figures(machine, st):
    f = {"top_speed_rpm": st.speed_rpm}
    rr = _critical_ratio(machine, st)
    if rr is not None:
        f["critical_resistance_ratio"] = rr
    return f


def table(rows, headers, fmt=None, names=None):
    """Plain fixed-width table; ``names`` gives each key's heading (words and unit)."""
    fmt = fmt or {}
    cells = [[_cell(r.get(h), fmt.get(h)) for h in headers] for r in rows]
    heads = [(names or {}).get(h, h) for h in headers]
    widths = [max(len(h), *(len(c[i]) for c in cells)) if cells else len(h) for i, h in enumerate(heads)]
    out = ["  ".join(h.rjust(w) for h, w in zip(heads, widths)),
           "  ".join("-" * w for w in widths)]
    out += ["  ".join(c.rjust(w) for c, w in zip(row, widths)) for row in cells]
    return "\n".join(out)


def _cell(v, f):
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        # (+ 0.0 turns a negative zero, which reads as a sign of something, into zero)
        return format(v + 0.0, f or ".4g")
    return str(v)


def _name(machine, args):
    """The machine's label, or the file as given, with hidden characters made visible."""
    return visible(machine.label or args.machine)


def _fmt(v, unit="", f=".4g"):
    return "-" if v is None else f"{v:{f}} {unit}".strip()


def cmd_curve(args, out):
    from .cautions import drive_overload_cautions, short_circuit_cautions
    from .circuit import external_characteristic
    from .machine import load_machine
    m = load_machine(args.machine)
    prof, drive, st0 = _drive(args, _setting_from(args))
    st = _checked(m, st0)
    c = external_characteristic(m, st, args.points, drive)
    from .jobs import command_cautions
    f = _setting_figures(m, st)
    pts = c.point_list()
    peak = None
    if pts:
        # the curve runs on to a short circuit: past the rating is its shape, not a working point; the
        # short-circuit current is a matter for the protection
        peak = max(abs(p["armature_current_a"]) for p in pts)
        f["min_generated_emf_v"] = min(p["generated_emf_v"] for p in pts)
    # with a job's profile its rules apply to the setting, and its cautions of the job as a whole (a hot bank)
    # (the battery's setting rules as `point` applies them to a battery load: the plan's are `charge`'s)
    load = "battery" if prof is not None and prof.kind == "battery" else None
    cautions = (command_cautions(m, st, f, load=load) + short_circuit_cautions(m, peak, c.short_circuit_current_a is None)
                + _job_cautions(m, prof))
    # (the curve runs on to short circuit: the drive is judged up to the machine's own rating)
    rated = [p for p in pts if abs(p["armature_current_a"]) <= m.rated_armature_current_a]
    power = [p["shaft_power_kw"] for p in rated if p.get("shaft_power_kw") is not None]
    torque = [p["drive_torque_percent"] for p in rated if _finite(p.get("drive_torque_percent"))]
    cautions += drive_overload_cautions(drive, max(power) if power else None,
                                        "up to the machine's rated armature current", max(torque) if torque else None)
    cautions += _job_no_load_cautions(prof, m, st, c.no_load_voltage_v)
    if prof is not None and prof.kind == "welding":
        from .jobs.welding import stuck_electrode_cautions
        cautions += stuck_electrode_cautions(m, prof, [p["load_current_a"] for p in pts],
                                             [p["terminal_voltage_v"] for p in pts],
                                             [p["armature_current_a"] for p in pts])
    # a series machine gives only its residual voltage with no load: a regulation from there means nothing
    series = st.connection == "series"
    regulation = None if series else c.regulation_percent
    res = {"setting": st.as_dict(), "points": pts, "no_load_voltage_v": c.no_load_voltage_v,
           "short_circuit_current_a": c.short_circuit_current_a, "max_load_current_a": c.max_load_current_a,
           "regulation_percent": regulation, "extrapolated": c.extrapolated,
           "converged": c.converged, "notes": c.notes, "cautions": [x.as_dict() for x in cautions],
           "notice": STANDING_NOTICE}
    if args.json:
        return res
    lines = [f"{_name(m, args)}: {connection_words(st.connection)}, {st.describe()}",
             f"no-load voltage {_fmt(c.no_load_voltage_v, 'V')}; short-circuit current {_fmt(c.short_circuit_current_a, 'A')}; "
             f"largest load current {_fmt(c.max_load_current_a, 'A')}; "
             + ("no regulation figure for a series connection: with no load current it gives only its residual "
                "voltage, and its voltage rises with the load (see the table)" if series else
                f"regulation to full load (rated armature current) {_fmt(regulation, '%', '.3g')}"
                + (" (negative: the voltage rises with load)" if regulation is not None and regulation < 0 else "")
                + (f" (none: the load current never passes {c.max_load_current_a:.4g} A, so the armature never "
                   f"carries its rated {m.rated_armature_current_a:g} A on this curve)"
                   if regulation is None and c.max_load_current_a is not None
                   and (peak or 0.0) < m.rated_armature_current_a
                   else "")),
             ""]
    rows = c.point_list()
    if drive is not None:
        lines.insert(1, f"drive: {drive.describe()}")
    lines.append(table(rows, point_columns(st.connection, [
        "load_current_a", "terminal_voltage_v", "armature_current_a", "shunt_field_current_a",
        "series_field_current_a", "generated_emf_v", "speed_rpm", "shaft_power_kw", "efficiency", "extrapolated"])
        + (["converged"] if not all(r["converged"] for r in rows) else []), names=point_words(st.connection)))
    lines += _notes(c.notes, c.extrapolated, c.converged, rows)
    lines += caution_lines(cautions)
    return "\n".join(lines)


def _job_cautions(machine, profile):
    """The cautions of a profile's job as a whole (whatever the setting), or none without a profile."""
    if profile is None:
        return []
    from .jobs import profile_cautions
    return profile_cautions(machine, profile)


def _finite(x):
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _notes(notes, extrapolated, converged, points=None):
    out = []
    for n in notes:
        out.append(f"note: {n}")
    if extrapolated:
        where = ""
        beyond = [p for p in points or [] if p.get("extrapolated")]
        if beyond:
            where = f" (the first at {abs(beyond[0]['load_current_a']):.4g} A of load current)"
        out.append(f"note: the points marked{where} read the open-circuit curve beyond its last measured point, "
                   "carried on along its last chord; real iron saturates further, so the voltages and currents "
                   "there are overstated: measure the curve further before relying on them")
    if not converged:
        bad = [] if points is None else [p for p in points if not p.get("converged", True)]
        if bad:
            out.append(f"warning: {len(bad)} point{'s' if len(bad) != 1 else ''} did not converge (marked 'no' under "
                       "'solved'): their figures are not trustworthy")
        else:
            out.append("warning: the solve did not converge everywhere (an exact point of the curve: no-load, "
                       "short circuit or the largest load current); treat the figures as not trustworthy")
    return [""] + out if out else out




def cmd_point(args, out):
    from .cautions import drive_overload_cautions, operating_point_cautions
    from .circuit import Load, operating_points
    from .machine import load_machine
    given = {k: getattr(args, k) for k in ("load_ohm", "load_current_a", "battery_emf_v", "battery_ohm",
                                           "line_v0", "line_slope_ohm") if getattr(args, k) is not None}
    kinds = []
    if "load_ohm" in given: kinds.append("resistor")
    if "load_current_a" in given: kinds.append("current")
    if "battery_emf_v" in given or "battery_ohm" in given: kinds.append("battery")
    if "line_v0" in given or "line_slope_ohm" in given: kinds.append("line")
    if len(kinds) != 1:
        raise InputError("command line", "load", "give exactly one load: --load-ohm R, --load-current-a I, "
                         "--battery-emf-v E --battery-ohm r, or --line-v0 U0 --line-slope-ohm k")
    kind = kinds[0]
    if kind == "resistor":
        load = Load.resistor(given["load_ohm"])
    elif kind == "current":
        load = Load.constant_current(given["load_current_a"])
    elif kind == "battery":
        for k, opt in (("battery_emf_v", "--battery-emf-v"), ("battery_ohm", "--battery-ohm")):
            if k not in given:
                raise InputError("command line", opt, "is missing; a battery load needs --battery-emf-v and --battery-ohm")
        if given["battery_emf_v"] < 0:
            # the likeliest reason for a negative EMF: the bank connected the other way round
            raise InputError("command line", "--battery-emf-v", f"is {given['battery_emf_v']:g}; allowed: 0 or more "
                             "(the bank's EMF, + to the machine's +); a bank connected the other way round is a "
                             "wiring fault: check the polarity before closing")
        load = Load.battery(given["battery_emf_v"], given["battery_ohm"])
    else:
        for k, opt in (("line_v0", "--line-v0"), ("line_slope_ohm", "--line-slope-ohm")):
            if k not in given:
                raise InputError("command line", opt, "is missing; a line load needs --line-v0 and --line-slope-ohm")
        load = Load.line(given["line_v0"], given["line_slope_ohm"])
    m = load_machine(args.machine)
    prof, drive, st0 = _drive(args, _setting_from(args))
    st = _checked(m, st0)
    ops = operating_points(m, st, load, drive)
    normal = ops.normal
    pts = []
    for p in ops.points:
        d = {k: v for k, v in p.items() if k != "residual_v"}
        d["state"] = _point_state(p, p is normal)
        pts.append(d)
    from .jobs import command_cautions
    f = _setting_figures(m, st)
    if st.connection == "series" and kind == "resistor":
        from .circuit import series_critical_ratio
        f["critical_resistance_ratio"] = series_critical_ratio(m, st, given["load_ohm"])
    if normal is not None:
        f["max_armature_current_a"] = abs(normal["armature_current_a"])
        f["min_generated_emf_v"] = normal["generated_emf_v"]
    cautions = command_cautions(m, st, f, load=kind) + operating_point_cautions(ops) + _job_cautions(m, prof)
    if normal is not None:
        tq = normal.get("drive_torque_percent")
        cautions += drive_overload_cautions(drive, normal.get("shaft_power_kw"), torque_percent=tq if _finite(tq) else None)
    if prof is not None and prof.kind == "welding":
        nl = operating_points(m, st, Load.constant_current(0.0), drive).normal
        cautions += _job_no_load_cautions(prof, m, st, None if nl is None else nl["terminal_voltage_v"])
    res = {"setting": st.as_dict(), "load": load.label, "operating_points": pts,
           "sits_at": None if normal is None else ops.points.index(normal), "runaway": ops.runaway,
           "message": ops.message or ("" if pts else "no operating point: the characteristic does not meet this load"),
           "cautions": [c.as_dict() for c in cautions], "converged": ops.converged, "notice": STANDING_NOTICE}
    if args.json:
        return res
    lines = [f"{_name(m, args)}: {connection_words(st.connection)}, {st.describe()}; load: {load.label}", ""]
    if pts:
        lines.append(table(pts, point_columns(st.connection, [
            "terminal_voltage_v", "load_current_a", "armature_current_a", "shunt_field_current_a",
            "series_field_current_a", "generated_emf_v", "speed_rpm", "shaft_power_kw", "efficiency", "extrapolated",
            "state"]), names=point_words(st.connection)))
        lines.append("")
    if normal is not None and any(c.rule == "drive-stall" for c in cautions):
        lines.append("The marked point is where the machine would sit, but the motor stalls before it gets there "
                     "(see the stop below): no working point on this load.")
    elif normal is not None:
        lines.append("The machine sits at the highest stable point of normal polarity; the others are listed, not used.")
    if kind == "battery":
        # search and charge put the bank on the chemistry's cell model, whose voltage on charge is above rest
        lines.append("The battery here is a fixed EMF behind a resistance; search and charge use the chemistry's "
                     "cell model, whose voltage on charge lies above its rest voltage (give that voltage as the EMF "
                     "to compare).")
    if normal is None:
        if ops.runaway:
            lines.append(f"no operating point the machine sits at: {ops.message}")
        elif pts:
            lines.append("no stable operating point of normal polarity on this load")
        else:
            lines.append("no operating point: the characteristic does not meet this load")
    if not ops.converged and not ops.runaway:
        lines.append("warning: a point did not converge; " + ops.message)
    lines += caution_lines(cautions)
    return "\n".join(lines)


def _point_state(p, is_normal):
    """One word or two for an operating point: which one the machine sits at, and why the others are not."""
    if p["reversed"]:
        # a reversed state the machine can hold is a reversed build-up; an unstable one only divides the branches
        return "reversed build-up" if p["stable"] else "reversed, unstable"
    if is_normal:
        return "sits here, back-feeding" if p["back_feeding"] else "sits here"
    if not p["stable"]:
        return "unstable"
    return "stable, back-feeding" if p["back_feeding"] else "stable, not reached"


def cmd_buildup(args, out):
    from .circuit import Setting, build_circuit, check_setting, self_excitation, series_critical_resistance_ohm
    from .jobs import command_cautions
    from .machine import load_machine
    m = load_machine(args.machine)
    if args.connection == "series":
        if args.rheostat_ohm is not None:
            raise InputError("command line", "--rheostat-ohm", "does not apply to a series machine")
        # checked first: a bad option is named as typed (--series-turns), not by its field
        st = check_setting(m, Setting("series", series_turns=args.series_turns, speed_rpm=args.speed_rpm,
                                      winding_temperature_c=args.winding_temperature_c), "command line", SETTING_OPTIONS)
        r = series_critical_resistance_ohm(m, args.series_turns, args.speed_rpm, args.winding_temperature_c)
        cautions = command_cautions(m, st, _setting_figures(m, st))
        circ = build_circuit(m, [st])
        # what the user can choose is the load: the circuit's critical value less the machine's own windings
        r_load = r - float(circ.ra[0]) - float(circ.rbr[0])
        res = {"connection": "series", "setting": st.as_dict(), "critical_circuit_resistance_ohm": r,
               "critical_load_resistance_ohm": r_load, "cautions": [x.as_dict() for x in cautions],
               "notice": STANDING_NOTICE}
        if args.json:
            return res
        return "\n".join([f"{_name(m, args)}: series connection, {st.describe()}",
                          f"critical circuit resistance {r:.4g} ohm at this speed: the machine builds up only on a "
                          "closed circuit (armature, series field and load) of lower total resistance",
                          f"critical load resistance {r_load:.4g} ohm (the circuit's less the armature and the series "
                          "field at this temperature): a load of more than that does not build it up"]
                         + caution_lines(cautions))
    if args.connection != "shunt":
        raise InputError("command line", "--connection", f"is {args.connection!r}; allowed: shunt, series")
    if args.series_turns is not None:
        raise InputError("command line", "--series-turns", "applies to --connection series only")
    given = args.rheostat_ohm is not None
    check_setting(m, Setting("shunt", rheostat_ohm=args.rheostat_ohm if given else 0.0, speed_rpm=args.speed_rpm,
                             winding_temperature_c=args.winding_temperature_c), "command line", SETTING_OPTIONS)
    # without a rheostat only what does not depend on it is stated
    se = self_excitation(m, args.rheostat_ohm if given else 0.0, args.speed_rpm, args.winding_temperature_c)
    st = se.setting if given else replace(se.setting, rheostat_ohm=None)
    cautions = command_cautions(m, se.setting if given else st, _setting_figures(m, st))
    res = {"connection": "shunt", "setting": st.as_dict(),
           "field_circuit_resistance_ohm": se.field_circuit_resistance_ohm if given else None,
           "critical_field_resistance_ohm": se.critical_field_resistance_ohm,
           "critical_speed_rpm": se.critical_speed_rpm if given else None,
           "builds_up": se.builds_up if given else None,
           "no_load_voltage_v": se.no_load_voltage_v if given else None,
           "stall_voltage_v": se.stall_voltage_v if given else None,
           "reasons": se.reasons if given else [], "runaway": se.runaway if given else None,
           "notes": se.notes if given else [], "extrapolated": se.extrapolated if given else None,
           "converged": se.converged, "cautions": [x.as_dict() for x in cautions], "notice": STANDING_NOTICE}
    if args.json:
        return res
    if not given:
        return "\n".join([f"{_name(m, args)}: shunt field at no load, {st.describe()}",
                          f"critical field-circuit resistance {se.critical_field_resistance_ohm:.4g} ohm at this speed: "
                          "the field circuit (winding and rheostat) must stay below it to build up",
                          "give --rheostat-ohm for the build-up, the no-load voltage and the critical speed"]
                         + caution_lines(cautions))
    lines = [f"{_name(m, args)}: shunt field at no load, {se.setting.describe()}",
             f"field circuit {se.field_circuit_resistance_ohm:.4g} ohm; critical {se.critical_field_resistance_ohm:.4g} ohm at this speed; "
             + (f"critical speed {se.critical_speed_rpm:.5g} rpm" if se.critical_speed_rpm <= MAX_SPEED_RPM else
                f"critical speed above {MAX_SPEED_RPM:.0f} rpm: no drive builds this field circuit up"),
             f"builds up from residual: {'yes' if se.builds_up else 'no'}"
             + (" (and runs away past the measured curve)" if se.runaway and se.builds_up else "")]
    near_residual = se.stays_near_residual
    if near_residual:
        lines.append(f"no-load voltage: about {se.no_load_voltage_v:.4g} V, held up by the residual magnetism alone "
                     f"(residual {se.residual_voltage_v:.3g} V): not a working voltage, it wanders with speed, "
                     "temperature and the residual; flashing the field does not help, it falls back there")
    else:
        lines.append("no-load voltage once built up (or flashed): "
                     + ("unknown: the voltage runs away" if se.runaway else _fmt(se.no_load_voltage_v, 'V')))
    if se.stall_voltage_v is not None and not near_residual:
        lines.append(f"a build-up from residual stops near {se.stall_voltage_v:.4g} V")
    if se.extrapolated:
        lines.append("note: the no-load point lies beyond the last measured point of the open-circuit curve (extrapolated)")
    for r in se.reasons:
        lines.append(f"- {r}")
    for n in se.notes:
        lines.append(f"note: {n}")
    lines += caution_lines(cautions)
    return "\n".join(lines)


def cmd_emf(args, out):
    from .magnetisation import emf_from_flux, flux_from_emf
    if args.parallel_paths > args.conductors:
        raise InputError("command line", "--parallel-paths", f"is {args.parallel_paths}; allowed: at most the "
                         f"number of conductors ({args.conductors}): each path holds at least one")
    if args.flux_wb is not None:
        flux = args.flux_wb
        emf = float(emf_from_flux(args.poles, args.conductors, args.parallel_paths, args.speed_rpm, flux))
    else:
        emf = args.emf_v
        flux = float(flux_from_emf(args.poles, args.conductors, args.parallel_paths, args.speed_rpm, emf))
    res = {"emf_v": emf, "flux_wb": flux, "poles": args.poles, "conductors": args.conductors,
           "parallel_paths": args.parallel_paths, "speed_rpm": args.speed_rpm}
    if args.json:
        return res
    return (f"E = P*Phi*N*Z/(60*A) with P={args.poles}, Z={args.conductors}, A={args.parallel_paths}, "
            f"N={args.speed_rpm:g} rpm\nemf {emf:.6g} V, flux per pole {flux:.6g} Wb")


def cmd_search(args, out):
    from .search import search_machine_profile, search_text
    res = search_machine_profile(args.machine, args.profile)
    if args.json:
        d = res.as_dict()
        d["options"] = d["options"][: args.top]
        return d
    return search_text(res, args.top)


def cmd_size(args, out):
    from .machine import load_machine
    from .profile import load_profile
    from .sizing import required_drive_rating, size_text
    res = required_drive_rating(load_machine(args.machine), load_profile(args.profile))
    return res.as_dict() if args.json else size_text(res)


def cmd_charge(args, out):
    from .simulation import charge_from_files, charge_text
    if not args.connection:
        for key, opt in SETTING_OPTIONS.items():
            if key != "connection" and getattr(args, key, None) is not None:
                raise InputError("command line", opt, "needs --connection too; give the whole setting, or none "
                                 "to charge on the search's best option")
    setting = _setting_from(args) if args.connection else None
    if setting is not None:
        from .machine import load_machine
        _checked(load_machine(args.machine), setting)
    run = charge_from_files(args.machine, args.profile, setting, names=SETTING_OPTIONS)
    if args.json:
        return run.as_dict()
    return charge_text(run)


def cmd_sheet(args, out):
    from .report import sheet_from_files
    # before the search: a name or folder that cannot be written fails in a moment, not after it
    check_output_path(args.output, args.force)
    path = sheet_from_files(args.machine, args.profile, args.output, args.option, args.force)
    return f"wrote {visible(path)}"


def cmd_fleet(args, out):
    from .fleet import fleet_search, fleet_text
    from .profile import load_profile
    res = fleet_search(args.folder, load_profile(args.profile), args.workers)
    shown = res.as_dict() if args.json else fleet_text(res)
    if res.machines and all(r.error is not None for r in res.machines):
        # no answer to the question asked: the rows (each file's error) are printed, and the exit says so
        return Refused(shown, InputError(str(args.folder), "folder",
                                         "no machine file in it could be read; each row above says why"))
    return shown


def cmd_cell(args, out):
    from .jobs.battery import cell_point
    res = cell_point(args.chemistry, args.soc, args.volts_per_cell, args.current_per_ah, args.temperature_c)
    if args.json:
        return res
    sf = res["stored_fraction"]
    return "\n".join([
        f"{res['chemistry']} at {100 * res['state_of_charge']:g} % charge, {res['temperature_c']:g} degC",
        f"cell voltage {res['volts_per_cell']:.4f} V (rest voltage {res['rest_volts_per_cell']:.3f} V)",
        f"current {res['current_a_per_ah']:.4g} A per Ah: stored {res['stored_a_per_ah']:.4g} A per Ah, "
        f"gas {res['gas_a_per_ah']:.4g} A per Ah"
        + ("" if sf is None else f" ({100 * sf:.1f} % stored)"),
        f"gassing voltage {res['gassing_volts_per_cell']:.3f} V, highest cell voltage {res['highest_volts_per_cell']:.3f} V "
        "at this temperature"] + [f"note: {n}" for n in res["notes"]])


def cmd_bench(args, out):
    from .bench import run_bench, bench_text
    res = run_bench(args.repeat)
    return res if args.json else bench_text(res)


def page_command(port=DEFAULT_PAGE_PORT, address=None):
    """The command that serves the page with the package's own Streamlit settings.

    Every setting is a command-line flag, which Streamlit ranks above any
    ``.streamlit/config.toml`` of the folder it starts in.
    """
    flags = dict(PAGE_FLAGS, **({"server.address": address} if address else {}))
    flags["server.port"] = str(port)
    argv = [sys.executable, "-m", "streamlit", "run", str(PAGE_SCRIPT)]
    for k, v in flags.items():
        argv += [f"--{k}", v]
    return argv


def cmd_page(args, out):
    argv = page_command(args.port, args.address)
    out.flush()
    sys.stderr.flush()
    if os.name == "posix":
        os.execv(argv[0], argv)  # the server takes this process's place: one process to stop
    import subprocess
    return subprocess.call(argv)


@dataclass
class Refused:
    """A command's output that is printed in full, then refused with one line on standard error (exit 2)."""

    output: object
    error: InputError


COMMANDS = {"curve": cmd_curve, "point": cmd_point, "buildup": cmd_buildup, "emf": cmd_emf,
            "search": cmd_search, "size": cmd_size, "charge": cmd_charge, "sheet": cmd_sheet, "fleet": cmd_fleet,
            "cell": cmd_cell, "bench": cmd_bench, "page": cmd_page}


def main(argv=None):
    out = sys.stdout
    try:
        parser = command_parser()
        args = parser.parse_args(argv)
        if not args.command:
            parser.print_usage(sys.stderr)
            print("supplycfg: command line: command: is missing; give one of "
                  f"{', '.join(COMMANDS)} (supplycfg --help says more)", file=sys.stderr)
            return 2
        res = COMMANDS[args.command](args, out)
        refused = res.error if isinstance(res, Refused) else None
        res = res.output if isinstance(res, Refused) else res
        if isinstance(res, int):
            return res
        if isinstance(res, str):
            print(visible(res, keep_newlines=True), file=out)
        else:
            print(dumps_json(res), file=out)
        if args.command in ("curve", "point", "buildup", "search", "size", "charge", "fleet") and isinstance(res, str):
            print(f"\n{STANDING_NOTICE}", file=out)
        if refused is not None:
            out.flush()
            print(f"supplycfg: {refused}", file=sys.stderr)
            return 2
        return 0
    except InputError as exc:
        print(f"supplycfg: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("supplycfg: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # a fault of ours: one line, never a traceback
        text = visible(" ".join(str(exc).split()))
        print(f"supplycfg: internal error, please report it: {type(exc).__name__}: {text}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
