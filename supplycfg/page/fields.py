"""The page's form fields: what each one edits, how typed text becomes TOML tables.

Pure functions (no Streamlit): the form keeps exactly what the person typed;
these turn it into the tables the core's readers check, so every message
comes from the same rules as for a file.
"""

import math
import re
from pathlib import Path

from ..drive import DRIVE_KINDS
from ..errors import InputError
from ..jobs.battery import CHEMISTRIES
from ..jobs.lighting import LAMPS
from ..jobs.welding import ENVIRONMENTS, WELDING_PROCESSES

#: Where the form's messages say the value came from.
FORM = "form"

KIND_LABELS = {"battery": "Charge a battery", "welding": "Feed a welding arc",
               "lighting": "Light lamps over a feeder", "booster": "Boost a feeder"}

# (table, key, label, type, help); type: text | num | num? | list | list? | choice:<name>
MACHINE_FIELDS = (
    ("machine", "label", "Name of the machine", "text", "printed on the setting sheet"),
    ("machine", "poles", "Poles", "num", "an even whole number"),
    ("machine", "rated_voltage_v", "Rated voltage [V]", "num", None),
    ("machine", "rated_armature_current_a", "Rated armature current [A]", "num", "continuous rating"),
    ("machine", "rated_speed_rpm", "Rated speed [rpm]", "num", None),
    ("machine", "peak_armature_current_a", "Peak armature current [A]", "num?",
     "short-time limit; leave blank for twice the rated current"),
    ("machine", "armature_resistance_ohm", "Armature resistance [Ω]", "num", "at the reference temperature"),
    ("machine", "brush_drop_v", "Brush drop, both brushes [V]", "num?", "about 2 V for carbon brushes; blank for none"),
    ("machine", "shunt_field_resistance_ohm", "Shunt field resistance [Ω]", "num", "at the reference temperature"),
    ("machine", "shunt_turns_per_pole", "Shunt turns per pole", "num", None),
    ("machine", "rheostat_max_ohm", "Field rheostat, all in [Ω]", "num", "0 when there is none"),
    ("machine", "excitation_voltage_v", "Exciter voltage [V]", "num?",
     "for separate excitation through the rheostat; blank if there is no exciter"),
    ("machine", "series_field_resistance_ohm", "Series field resistance [Ω]", "num?",
     "whole winding; blank when there is no series winding"),
    ("machine", "series_turns_per_pole", "Series turns per pole", "num?", "blank when there is no series winding"),
    ("machine", "series_taps", "Series taps [turns per pole]", "list?", "e.g. 0, 3, 6; blank for 0 and the whole winding"),
    ("machine", "reference_temperature_c", "Temperature of these resistances [°C]", "num?", "blank for 75 °C"),
    ("open_circuit", "speed_rpm", "Speed of the open-circuit test [rpm]", "num", None),
    ("open_circuit", "interpolation", "Between the test points", "choice:interpolation",
     "monotone-cubic follows the curve smoothly; linear joins the points with straight lines"),
    ("armature_reaction", "demagnetizing_at_per_pole_at_rated", "Armature reaction at rated current [AT per pole]",
     "num?", "used when 'Armature reaction' is 'in proportion to current'"),
    ("winding", "conductors", "Armature conductors", "num?", "optional; with the parallel paths"),
    ("winding", "parallel_paths", "Parallel paths", "num?", "2 for wave, the pole count for lap"),
    ("losses", "rotational_loss_w", "Friction, windage and core loss at rated speed [W]", "num?",
     "from a no-load running test; blank for 3 % of rated output"),
    ("losses", "rotational_loss_speed_exponent", "How that loss grows with speed (exponent)", "num?", "blank for 1.5"),
    ("losses", "stray_load_loss_percent", "Stray load loss [% of output]", "num?", "blank for 1 %"),
)

AR_MODES = {"none": "not given", "linear": "in proportion to current", "table": "from a table"}

PROFILE_FIELDS = {
    "battery": (
        ("battery", "chemistry", "Battery type", "choice:chemistry", None),
        ("battery", "cells", "Cells in series", "num", None),
        ("battery", "capacity_ah", "Capacity [Ah]", "num", "at the 10-hour rate (5-hour for nickel-cadmium)"),
        ("battery", "state_of_charge", "State of charge at start and end", "list", "two numbers 0 to 1, e.g. 0.2, 1"),
        ("battery", "max_charge_current_a", "Highest charging current [A]", "num", None),
        ("battery", "min_charge_current_a", "Lowest main-charge current [A]", "num?",
         "the main charge keeps at least this until the hand-over; blank for 0"),
        ("battery", "internal_resistance_ohm", "Bank resistance [Ω]", "num?", "blank: from the battery type"),
        ("battery", "cable_resistance_ohm", "Cable resistance, go and return [Ω]", "num?", "blank for 0"),
        ("battery", "temperature_c", "Battery temperature [°C]", "num?", "blank for 25 °C"),
        ("battery", "open_circuit_voltage_per_cell_v", "Rest voltage per cell, empty and full [V]", "list?",
         "blank: from the battery type"),
        ("battery", "charge_voltage_per_cell_v", "Hand-over to the finish, per cell at 25 °C [V]", "num?",
         "blank: the battery type's gassing voltage"),
        ("battery", "finishing_rate_per_h", "Finishing current per Ah [A/Ah]", "num?",
         "0.05 is C/20; blank: from the battery type"),
        ("battery", "target_hours", "Full within [h]", "num?", "blank for 16 h"),
        ("battery", "cutout_closing_volts_per_cell", "Cut-out closes at, per cell [V]", "num?",
         "blank: the full bank's rest voltage + 0.05 V"),
    ),
    "welding": (
        ("welding", "process", "Process", "choice:process", None),
        ("welding", "current_range_a", "Welding current, low and high [A]", "list", "e.g. 60, 180"),
        ("welding", "environment", "Where the welding is done", "choice:environment", None),
        ("welding", "duty_cycle_percent", "Duty cycle [% of 10 minutes]", "num?", "blank for 60 %"),
        ("welding", "cable_resistance_ohm", "Welding leads, go and return [Ω]", "num?", "blank for 0"),
        ("welding", "max_no_load_voltage_v", "Site limit on no-load voltage [V, mean]", "num?",
         "blank: the standard's 113 V peak only"),
    ),
    "lighting": (
        ("lighting", "nominal_voltage_v", "Voltage wanted at the lamps [V]", "num", "at the far end of the feeder"),
        ("lighting", "load_current_a", "Load current, least and most [A]", "list", "e.g. 5, 90"),
        ("lighting", "tolerance_percent", "Tolerance [± %]", "num?", "blank for 5 %"),
        ("lighting", "feeder_resistance_ohm", "Feeder resistance, go and return [Ω]", "num?", "blank for 0"),
        ("lighting", "lamp", "Lamps", "choice:lamp", None),
    ),
    "booster": (
        ("booster", "bus_voltage_v", "Bus voltage [V]", "num", None),
        ("booster", "feeder_resistance_ohm", "Feeder resistance, go and return [Ω]", "num", None),
        ("booster", "load_current_a", "Feeder current, least and most [A]", "list", "e.g. 0, 300"),
        ("booster", "tolerance_percent", "Tolerance at the far end [± %]", "num?", "blank for 5 %"),
    ),
}

DRIVE_FIELDS = (
    ("load", "label", "Name of the job", "text", "printed on the setting sheet"),
    ("drive", "kind", "What turns the generator", "choice:drive_kind",
     "fixed: a set speed; engine: governed, slows with power; motor: induction, slows with torque"),
    ("drive", "speed", "Drive speed [rpm]", "list?",
     "a fixed drive: one speed, or the lowest and highest: 1400, 1500; blank for an engine or a motor"),
    ("drive", "ratio", "Belt or gearing [generator rpm per drive rpm]", "num?", "blank for direct coupling"),
    ("drive", "rated_power_kw", "Drive rating [kW] (engine or motor)", "num?", None),
    ("drive", "no_load_speed_rpm", "Engine speed at no load [rpm]", "num?", "the governor's high idle"),
    ("drive", "droop_percent", "Engine droop [%]", "num?", "speed fall from no load to rated power"),
    ("drive", "idle_speed_rpm", "Engine idle [rpm]", "num?", "optional; checked as a note"),
    ("drive", "synchronous_speed_rpm", "Motor synchronous speed [rpm]", "num?", "1500 for 4 poles on 50 Hz"),
    ("drive", "rated_slip_percent", "Motor slip at rated load [%]", "num?", None),
    ("drive", "breakdown_torque_percent", "Motor breakdown torque [% of rated]", "num?", "blank for 225 %"),
    ("drive", "winding_temperature_range_c", "Winding temperature, cold and hot [°C]", "list?",
     "blank: the machine's reference temperature"),
)

CHOICES = {"interpolation": ("monotone-cubic", "linear"), "drive_kind": DRIVE_KINDS, "chemistry": tuple(CHEMISTRIES),
           "process": tuple(WELDING_PROCESSES), "environment": tuple(ENVIRONMENTS), "lamp": tuple(LAMPS)}

#: Demo pairs: each job kind with its demo machine (file stems under profiles/).
DEMO_PAIRS = {"battery": ("charging-set", "battery-charging"), "welding": ("welding-set", "welding"),
              "lighting": ("lighting-set", "lighting"), "booster": ("feeder-booster", "booster")}
DEFAULT_KIND = "battery"


#: The drive's figures besides its kind, speed and winding temperatures (each a plain number).
DRIVE_FIGURES = ("ratio", "rated_power_kw", "no_load_speed_rpm", "droop_percent", "idle_speed_rpm",
                 "synchronous_speed_rpm", "rated_slip_percent", "breakdown_torque_percent")


def demo_folder():
    """The demo files: the package's copy if installed with one, else the repository's ``profiles``."""
    here = Path(__file__).resolve().parent.parent
    for cand in (here / "demo", here.parent / "profiles"):
        if (cand / "machines").is_dir() and (cand / "loads").is_dir():
            return cand
    return here.parent / "profiles"


def demo_machines():
    """``{stem: path}`` of the demo machines, sorted."""
    return {p.stem: p for p in sorted((demo_folder() / "machines").glob("*.toml"))}


def demo_profiles():
    return {p.stem: p for p in sorted((demo_folder() / "loads").glob("*.toml"))}


# ---------------------------------------------------------------------------
# values <-> text
# ---------------------------------------------------------------------------

def to_text(v):
    """What a field shows for a value from a table."""
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (list, tuple)):
        return ", ".join(to_text(x) for x in v)
    if isinstance(v, float):
        return format(v, ".12g")
    return str(v)


_INT = re.compile(r"[+-]?\d+")
#: Longest number a field takes [characters]: far beyond any float (about 1e308) written out, short
#: enough that converting it costs nothing (Python refuses integers past 4300 digits anyway).
MAX_NUMBER_CHARS = 400


class NumberTooLong(ValueError):
    """A typed number with more characters than :data:`MAX_NUMBER_CHARS`."""

    def __init__(self, chars):
        super().__init__(f"{chars} characters")
        self.chars = chars


def parse_number(text):
    """Typed text as a number; text that is not one stays text (the reader then names the rule).

    Raises
    ------
    NumberTooLong
        For a number longer than :data:`MAX_NUMBER_CHARS` (thousands of
        digits): the form names the field and what is allowed.
    """
    s = text.strip()
    if s == "":
        return None
    if len(s) > MAX_NUMBER_CHARS:
        raise NumberTooLong(len(s))
    if _INT.fullmatch(s):
        return int(s)
    try:
        return float(s)  # nan and inf pass: the reader names them
    except ValueError:
        return s


def parse_list(text):
    """'0, 3, 6' (commas, semicolons or spaces) as a list; blank as None."""
    s = text.strip().strip("[]")
    if s == "":
        return None
    return [parse_number(p) for p in re.split(r"[,;\s]+", s) if p != ""]


def parse_field(kind, text, key="value"):
    """A form field's text as the value its table takes; ``key`` names it in the message of a number too long."""
    if kind == "text" or kind.startswith("choice"):
        return text
    try:
        if kind.startswith("list"):
            return parse_list(text)
        return parse_number(text)
    except NumberTooLong as e:
        raise InputError(FORM, key, f"has a number of {e.chars} characters; allowed: a number of at most "
                                    f"{MAX_NUMBER_CHARS} characters (ordinary numbers, e.g. 0.045 or 1.2e3)") from None


def field_id(table, key):
    return f"{table}.{key}"


def error_field(error_key):
    """The form field an error key points at: indices dropped, speed keys joined."""
    base = re.sub(r"\[\d+\]$", "", str(error_key))
    if base in ("drive.speed_rpm", "drive.speed_range_rpm"):
        return "drive.speed"
    if base.startswith("open_circuit.field_current_a") or base.startswith("open_circuit.emf_v"):
        return "open_circuit.table"
    if base in ("armature_reaction.armature_current_a", "armature_reaction.demagnetizing_at_per_pole"):
        return "armature_reaction.table"
    return base


# ---------------------------------------------------------------------------
# tables -> form values and back
# ---------------------------------------------------------------------------

def machine_form_values(tables):
    """``{field id: text}`` plus the OCC and armature-reaction tables, from machine TOML tables."""
    vals = {}
    for table, key, _, kind, _ in MACHINE_FIELDS:
        vals[field_id(table, key)] = to_text(tables.get(table, {}).get(key))
    if vals["open_circuit.interpolation"] == "":
        vals["open_circuit.interpolation"] = "monotone-cubic"
    oc = tables.get("open_circuit", {})
    vals["occ"] = {"field current [A]": [float(x) for x in oc.get("field_current_a", [])],
                   "EMF [V]": [float(x) for x in oc.get("emf_v", [])]}
    ar = tables.get("armature_reaction", {})
    if "armature_current_a" in ar:
        mode = "table"
    elif "demagnetizing_at_per_pole_at_rated" in ar:
        mode = "linear"
    else:
        mode = "none"
    vals["ar_mode"] = mode
    vals["ar_table"] = {"armature current [A]": [float(x) for x in ar.get("armature_current_a", [0.0])],
                        "demagnetising [AT per pole]": [float(x) for x in ar.get("demagnetizing_at_per_pole", [0.0])]}
    return vals


def _columns(table, names, table_key, keys):
    """Two editor columns as lists, rows with both cells empty dropped; an empty cell is an error."""
    cols = [list(table.get(n, [])) for n in names]
    n = max((len(c) for c in cols), default=0)
    cols = [c + [None] * (n - len(c)) for c in cols]
    out = [[], []]
    for i in range(n):
        a, b = cols[0][i], cols[1][i]
        if _blank(a) and _blank(b):
            continue
        for j, v in enumerate((a, b)):
            if _blank(v):
                raise InputError(FORM, f"{table_key}.{keys[j]}[{len(out[j])}]",
                                 "is empty; allowed: a number in every cell of the table")
        out[0].append(_num(a, f"{table_key}.{keys[0]}[{len(out[0])}]"))
        out[1].append(_num(b, f"{table_key}.{keys[1]}[{len(out[1])}]"))
    return out


def _blank(v):
    return v is None or (isinstance(v, float) and math.isnan(v)) or (isinstance(v, str) and not v.strip())


def _num(v, key="value"):
    if isinstance(v, str):
        return parse_field("num", v, key)
    if isinstance(v, bool):
        return v
    if isinstance(v, int):
        return v
    return float(v)


def machine_tables_from_form(vals):
    """Machine TOML tables from the form's values (blank fields omitted)."""
    t = {"machine": {}, "open_circuit": {}}
    for table, key, _, kind, _ in MACHINE_FIELDS:
        if table in ("armature_reaction", "winding", "losses"):
            continue
        v = parse_field(kind, vals.get(field_id(table, key), ""), field_id(table, key))
        if v is None or (kind == "text" and v == "" and key != "label"):
            continue
        t[table][key] = v
    fc, ev = _columns(vals.get("occ", {}), ("field current [A]", "EMF [V]"), "open_circuit",
                      ("field_current_a", "emf_v"))
    t["open_circuit"]["field_current_a"] = fc
    t["open_circuit"]["emf_v"] = ev
    mode = vals.get("ar_mode", "none")
    if mode == "linear":
        v = parse_field("num", vals.get("armature_reaction.demagnetizing_at_per_pole_at_rated", ""),
                        "armature_reaction.demagnetizing_at_per_pole_at_rated")
        t["armature_reaction"] = {} if v is None else {"demagnetizing_at_per_pole_at_rated": v}
    elif mode == "table":
        ia, at = _columns(vals.get("ar_table", {}), ("armature current [A]", "demagnetising [AT per pole]"),
                          "armature_reaction", ("armature_current_a", "demagnetizing_at_per_pole"))
        t["armature_reaction"] = {"armature_current_a": ia, "demagnetizing_at_per_pole": at}
    w = {}
    for key in ("conductors", "parallel_paths"):
        v = parse_field("num", vals.get(field_id("winding", key), ""), field_id("winding", key))
        if v is not None:
            w[key] = v
    if w:
        t["winding"] = w
    ls = {}
    for key in ("rotational_loss_w", "rotational_loss_speed_exponent", "stray_load_loss_percent"):
        v = parse_field("num?", vals.get(field_id("losses", key), ""), field_id("losses", key))
        if v is not None:
            ls[key] = v
    if ls:
        t["losses"] = ls
    return t


def profile_form_values(tables):
    """``{field id: text}`` of a profile's tables (all kinds' fields, the others blank)."""
    vals = {}
    drive = tables.get("drive", {})
    speed = drive.get("speed_range_rpm", drive.get("speed_rpm"))
    vals["load.label"] = to_text(tables.get("load", {}).get("label", ""))
    vals["drive.speed"] = to_text(speed)
    vals["drive.winding_temperature_range_c"] = to_text(drive.get("winding_temperature_range_c"))
    vals["drive.kind"] = to_text(drive.get("kind", "fixed"))
    for key in DRIVE_FIGURES:
        vals[field_id("drive", key)] = to_text(drive.get(key))
    for kind, specs in PROFILE_FIELDS.items():
        for table, key, _, ftype, _ in specs:
            v = tables.get(table, {}).get(key)
            if v is None and ftype.startswith("choice"):
                v = CHOICES[ftype.split(":")[1]][0]
            vals[field_id(table, key)] = to_text(v)
    return vals


def profile_tables_from_form(kind, vals):
    """Profile TOML tables of ``kind`` from the form's values."""
    t = {"load": {"kind": kind, "label": vals.get("load.label", "")}, "drive": {}, kind: {}}
    dk = vals.get("drive.kind", "fixed") or "fixed"
    if dk != "fixed":
        t["drive"]["kind"] = dk
    for key in DRIVE_FIGURES:
        v = parse_field("num?", vals.get(field_id("drive", key), ""), field_id("drive", key))
        if v is not None:
            t["drive"][key] = v
    sp = parse_field("list", vals.get("drive.speed", ""), "drive.speed")
    if sp is not None:
        if len(sp) == 1:
            t["drive"]["speed_rpm"] = sp[0]
        else:
            t["drive"]["speed_range_rpm"] = sp
    tr = parse_field("list", vals.get("drive.winding_temperature_range_c", ""), "drive.winding_temperature_range_c")
    if tr is not None:
        t["drive"]["winding_temperature_range_c"] = tr
    for table, key, _, ftype, _ in PROFILE_FIELDS[kind]:
        v = parse_field(ftype, vals.get(field_id(table, key), ""), field_id(table, key))
        if v is None:
            continue
        t[table][key] = v
    return t

