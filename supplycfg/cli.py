"""The ``supplycfg`` command line.

Every command prints a readable table, or with ``--json`` one JSON object and
nothing else. Bad input gives one line on standard error and exit code 2.
"""

import argparse
import sys

from . import __version__, STANDING_NOTICE
from .errors import InputError
from .files import dumps_json

SETTING_OPTIONS = {"rheostat_ohm": "--rheostat-ohm", "field_current_a": "--field-current-a",
                   "series_turns": "--series-turns", "diverter_ohm": "--diverter-ohm",
                   "speed_rpm": "--speed-rpm", "winding_temperature_c": "--winding-temperature-c",
                   "connection": "--connection"}


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        import re
        found = re.match(r"argument ([^:]+): (.*)", message)
        if found:
            raise InputError("command line", found.group(1).split("/")[0], found.group(2))
        raise InputError("command line", self.prog, message)


def _positive_int(text):
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if not 2 <= v <= 100_000:
        raise argparse.ArgumentTypeError(f"{v} is outside 2..100000")
    return v


def _number(text):
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if v != v or v in (float("inf"), float("-inf")):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
    return v


def _add_setting(p, connection_default=None, connection=True):
    if connection:
        p.add_argument("--connection", default=connection_default, required=connection_default is None,
                       help="separate, separate-cumulative, separate-differential, shunt, series, "
                            "long-shunt-cumulative, short-shunt-cumulative, long-shunt-differential, "
                            "short-shunt-differential")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--rheostat-ohm", type=_number, help="field rheostat [ohm]")
    g.add_argument("--field-current-a", type=_number, help="separate excitation field current [A]")
    p.add_argument("--series-turns", type=_number, help="series turns per pole in use (a tap)")
    p.add_argument("--diverter-ohm", type=_number, help="diverter across the series winding [ohm]")
    p.add_argument("--speed-rpm", type=_number, help="drive speed [rpm]; default rated")
    p.add_argument("--winding-temperature-c", type=_number, help="winding temperature [degC]; default reference")


def _parser():
    top = _Parser(prog="supplycfg", description="Set up a DC generator for a battery, a welding arc or a lighting bus.")
    top.add_argument("--version", action="version", version=f"supplycfg {__version__}")
    sub = top.add_subparsers(dest="command", parser_class=_Parser)

    p = sub.add_parser("curve", help="external characteristic of one setting")
    p.add_argument("machine"); _add_setting(p)
    p.add_argument("--profile", help="take the drive from this load profile's [drive] table")
    p.add_argument("--points", type=_positive_int, default=40, help="points along the curve")
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("point", help="operating points of one setting against one load")
    p.add_argument("machine"); _add_setting(p)
    p.add_argument("--profile", help="take the drive from this load profile's [drive] table")
    p.add_argument("--load-ohm", type=_number)
    p.add_argument("--load-current-a", type=_number)
    p.add_argument("--battery-emf-v", type=_number)
    p.add_argument("--battery-ohm", type=_number)
    p.add_argument("--line-v0", type=_number)
    p.add_argument("--line-slope-ohm", type=_number)
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("buildup", help="self-excitation of the shunt field (or a series machine)")
    p.add_argument("machine")
    p.add_argument("--connection", default="shunt", help="shunt (default) or series")
    p.add_argument("--rheostat-ohm", type=_number)
    p.add_argument("--series-turns", type=_number)
    p.add_argument("--speed-rpm", type=_number)
    p.add_argument("--winding-temperature-c", type=_number)
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("emf", help="the EMF equation E = P*Phi*N*Z/(60*A), either way")
    p.add_argument("--poles", type=_positive_int, required=True)
    p.add_argument("--conductors", type=_positive_int, required=True)
    p.add_argument("--parallel-paths", type=_positive_int, required=True)
    p.add_argument("--speed-rpm", type=_number, required=True)
    g = p.add_mutually_exclusive_group(required=True)
    g.add_argument("--flux-wb", type=_number)
    g.add_argument("--emf-v", type=_number)
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("search", help="settings that meet a load profile, ranked")
    p.add_argument("machine"); p.add_argument("profile")
    p.add_argument("--top", type=_positive_int, default=10)
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("size", help="the smallest drive rating with which some setting meets the job")
    p.add_argument("machine"); p.add_argument("profile")
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("charge", help="a battery charge through time")
    p.add_argument("machine"); p.add_argument("profile")
    _add_setting(p, connection_default="")
    p.add_argument("--json", action="store_true")

    p = sub.add_parser("sheet", help="write the setting sheet of the best option (HTML or Markdown)")
    p.add_argument("machine"); p.add_argument("profile")
    p.add_argument("--output", "-o", required=True, help="file to write (.html or .md)")
    p.add_argument("--option", type=_positive_int, default=None, help="rank of the option (1 = best)")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")

    p = sub.add_parser("bench", help="time the engine and the search")
    p.add_argument("--repeat", type=_positive_int, default=5)
    p.add_argument("--json", action="store_true")
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
    from .circuit import check_setting
    return check_setting(machine, setting, "command line", SETTING_OPTIONS)


def _drive(args, setting):
    """The drive of ``--profile`` (None without one), and the setting with a fixed drive's speed."""
    if not getattr(args, "profile", None):
        return None, setting
    from dataclasses import replace
    from .profile import load_profile
    drive = load_profile(args.profile).drive
    if drive.coupled:
        if setting.speed_rpm is not None:
            raise InputError("command line", "--speed-rpm", f"is given with a profile whose drive is {'an' if drive.kind == 'engine' else 'a'} {drive.kind}: "
                             "its speed follows the load; allowed: omit --speed-rpm")
        return drive, replace(setting, speed_rpm=drive.generator_speeds_rpm()[0])
    if setting.speed_rpm is None:
        speeds = drive.generator_speeds_rpm()
        setting = replace(setting, speed_rpm=0.5 * (min(speeds) + max(speeds)))
    return drive, setting


def table(rows, headers, fmt=None):
    """Plain fixed-width table."""
    fmt = fmt or {}
    cells = [[_cell(r.get(h), fmt.get(h)) for h in headers] for r in rows]
    widths = [max(len(h), *(len(c[i]) for c in cells)) if cells else len(h) for i, h in enumerate(headers)]
    out = ["  ".join(h.rjust(w) for h, w in zip(headers, widths)),
           "  ".join("-" * w for w in widths)]
    out += ["  ".join(c.rjust(w) for c, w in zip(row, widths)) for row in cells]
    return "\n".join(out)


def _cell(v, f):
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        return format(v, f or ".4g")
    return str(v)


def _fmt(v, unit="", f=".4g"):
    return "-" if v is None else f"{v:{f}} {unit}".strip()


def cmd_curve(args, out):
    from .circuit import external_characteristic
    from .machine import load_machine
    m = load_machine(args.machine)
    drive, st0 = _drive(args, _setting_from(args))
    st = _checked(m, st0)
    c = external_characteristic(m, st, args.points, drive)
    st = c.setting
    res = {"setting": st.as_dict(), "points": c.point_list(), "no_load_voltage_v": c.no_load_voltage_v,
           "short_circuit_current_a": c.short_circuit_current_a, "max_load_current_a": c.max_load_current_a,
           "regulation_percent": c.regulation_percent, "extrapolated": c.extrapolated,
           "converged": c.converged, "notes": c.notes}
    if args.json:
        return res
    lines = [f"{m.label or args.machine}: {st.connection}, {st.describe()}",
             f"no-load voltage {_fmt(c.no_load_voltage_v, 'V')}; short-circuit current {_fmt(c.short_circuit_current_a, 'A')}; "
             f"largest load current {_fmt(c.max_load_current_a, 'A')}; regulation at rated current {_fmt(c.regulation_percent, '%', '.3g')}",
             ""]
    rows = c.point_list()
    if drive is not None:
        lines.insert(1, f"drive: {drive.describe()}")
    lines.append(table(rows, ["load_current_a", "terminal_voltage_v", "armature_current_a", "shunt_field_current_a",
                              "series_field_current_a", "generated_emf_v", "speed_rpm", "shaft_power_kw",
                              "efficiency", "extrapolated"]))
    lines += _notes(c.notes, c.extrapolated, c.converged)
    return "\n".join(lines)


def _notes(notes, extrapolated, converged):
    out = []
    for n in notes:
        out.append(f"note: {n}")
    if extrapolated:
        out.append("note: some points needed the open-circuit curve beyond its last measured point (extrapolated)")
    if not converged:
        out.append("warning: a point did not converge; the figures marked are not trustworthy")
    return [""] + out if out else out




def cmd_point(args, out):
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
        if given["load_ohm"] < 0:
            raise InputError("command line", "--load-ohm", f"is {given['load_ohm']:g}; allowed: >= 0 ohm")
        load = Load.resistor(given["load_ohm"])
    elif kind == "current":
        load = Load.constant_current(given["load_current_a"])
    elif kind == "battery":
        for k, opt in (("battery_emf_v", "--battery-emf-v"), ("battery_ohm", "--battery-ohm")):
            if k not in given:
                raise InputError("command line", opt, "is missing; a battery load needs --battery-emf-v and --battery-ohm")
        if given["battery_ohm"] < 0:
            raise InputError("command line", "--battery-ohm", "allowed: >= 0 ohm")
        load = Load.battery(given["battery_emf_v"], given["battery_ohm"])
    else:
        for k, opt in (("line_v0", "--line-v0"), ("line_slope_ohm", "--line-slope-ohm")):
            if k not in given:
                raise InputError("command line", opt, "is missing; a line load needs --line-v0 and --line-slope-ohm")
        if given["line_slope_ohm"] < 0:
            raise InputError("command line", "--line-slope-ohm", "allowed: >= 0 ohm")
        load = Load.line(given["line_v0"], given["line_slope_ohm"])
    m = load_machine(args.machine)
    drive, st0 = _drive(args, _setting_from(args))
    st = _checked(m, st0)
    ops = operating_points(m, st, load, drive)
    pts = [{k: v for k, v in p.items() if k != "residual_v"} for p in ops.points]
    res = {"setting": st.as_dict(), "load": load.label, "operating_points": pts, "converged": ops.converged}
    if args.json:
        return res
    lines = [f"{m.label or args.machine}: {st.connection}, {st.describe()}; load: {load.label}", ""]
    if pts:
        lines.append(table(pts, ["terminal_voltage_v", "load_current_a", "armature_current_a", "shunt_field_current_a",
                                 "series_field_current_a", "generated_emf_v", "speed_rpm", "shaft_power_kw",
                                 "efficiency", "stable", "extrapolated"]))
        lines.append("")
        lines.append("The machine sits at the highest stable point; unstable points are listed, not used.")
        if any(p["load_current_a"] < 0 for p in pts):
            lines.append("caution: a negative load current means the load drives the machine (back-feeding); "
                         "fit a reverse-current cut-out or blocking diode.")
    else:
        lines.append("no operating point: the characteristic does not meet this load")
    if not ops.converged:
        lines.append("warning: a point did not converge; " + ops.message)
    return "\n".join(lines)


def cmd_buildup(args, out):
    from .circuit import self_excitation, series_critical_resistance_ohm
    from .machine import load_machine
    m = load_machine(args.machine)
    if args.connection == "series":
        if args.rheostat_ohm is not None:
            raise InputError("command line", "--rheostat-ohm", "does not apply to a series machine")
        r = series_critical_resistance_ohm(m, args.series_turns, args.speed_rpm, args.winding_temperature_c)
        res = {"connection": "series", "critical_circuit_resistance_ohm": r}
        if args.json:
            return res
        return (f"{m.label or args.machine}: series connection\n"
                f"critical circuit resistance {r:.4g} ohm: the machine builds up only on a closed circuit "
                "(armature, series field and load) of lower total resistance")
    if args.connection != "shunt":
        raise InputError("command line", "--connection", f"is {args.connection!r}; allowed: shunt, series")
    if args.series_turns is not None:
        raise InputError("command line", "--series-turns", "applies to --connection series only")
    se = self_excitation(m, args.rheostat_ohm, args.speed_rpm, args.winding_temperature_c)
    res = {"connection": "shunt", "setting": se.setting.as_dict(),
           "field_circuit_resistance_ohm": se.field_circuit_resistance_ohm,
           "critical_field_resistance_ohm": se.critical_field_resistance_ohm,
           "critical_speed_rpm": se.critical_speed_rpm, "builds_up": se.builds_up,
           "no_load_voltage_v": se.no_load_voltage_v, "stall_voltage_v": se.stall_voltage_v,
           "reasons": se.reasons, "extrapolated": se.extrapolated, "converged": se.converged}
    if args.json:
        return res
    lines = [f"{m.label or args.machine}: shunt field at no load, {se.setting.describe()}",
             f"field circuit {se.field_circuit_resistance_ohm:.4g} ohm; critical {se.critical_field_resistance_ohm:.4g} ohm at this speed; "
             f"critical speed {se.critical_speed_rpm:.5g} rpm",
             f"builds up from residual: {'yes' if se.builds_up else 'no'}",
             f"no-load voltage once built up (or flashed): {_fmt(se.no_load_voltage_v, 'V')}"]
    if se.stall_voltage_v is not None:
        lines.append(f"a build-up from residual stops near {se.stall_voltage_v:.4g} V")
    if se.extrapolated:
        lines.append("note: the no-load point lies beyond the last measured point of the open-circuit curve (extrapolated)")
    for r in se.reasons:
        lines.append(f"- {r}")
    return "\n".join(lines)


def cmd_emf(args, out):
    from .magnetisation import emf_from_flux, flux_from_emf
    if args.flux_wb is not None:
        if args.flux_wb < 0:
            raise InputError("command line", "--flux-wb", "allowed: >= 0 Wb")
        flux = args.flux_wb
        emf = float(emf_from_flux(args.poles, args.conductors, args.parallel_paths, args.speed_rpm, flux))
    else:
        emf = args.emf_v
        if args.speed_rpm <= 0:
            raise InputError("command line", "--speed-rpm", "allowed: > 0 rpm")
        flux = float(flux_from_emf(args.poles, args.conductors, args.parallel_paths, args.speed_rpm, emf))
    if args.speed_rpm <= 0:
        raise InputError("command line", "--speed-rpm", "allowed: > 0 rpm")
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
    run = charge_from_files(args.machine, args.profile, setting, names=SETTING_OPTIONS)
    if args.json:
        return run.as_dict()
    return charge_text(run)


def cmd_sheet(args, out):
    from .report import sheet_from_files
    path = sheet_from_files(args.machine, args.profile, args.output, args.option, args.force)
    return f"wrote {path}"


def cmd_bench(args, out):
    from .bench import run_bench, bench_text
    res = run_bench(args.repeat)
    return res if args.json else bench_text(res)


COMMANDS = {"curve": cmd_curve, "point": cmd_point, "buildup": cmd_buildup, "emf": cmd_emf,
            "search": cmd_search, "size": cmd_size, "charge": cmd_charge, "sheet": cmd_sheet, "bench": cmd_bench}


def main(argv=None):
    out = sys.stdout
    try:
        args = _parser().parse_args(argv)
        if not args.command:
            _parser().print_help(out)
            return 2
        res = COMMANDS[args.command](args, out)
        if isinstance(res, str):
            print(res, file=out)
        else:
            print(dumps_json(res), file=out)
        if args.command in ("curve", "point", "buildup", "search", "size", "charge") and isinstance(res, str):
            print(f"\n{STANDING_NOTICE}", file=out)
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
        print(f"supplycfg: internal error, please report it: {type(exc).__name__}: {exc}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
