"""Machine data: the DC generator's test curve, resistances, turns and ratings.

A machine file is TOML with the tables ``[machine]``, ``[open_circuit]`` and
the optional ``[armature_reaction]`` and ``[winding]``; see README.md for the
keys. :func:`load_machine` reads and checks one; :func:`machine_to_dict` gives
back the same tables so a saved machine loads unchanged.
"""

import functools
from dataclasses import dataclass, field, asdict

import numpy as np

from .errors import InputError
from .validate import Table, check_tables, read_toml, refuse_unknown_keys, source_name

#: Reference temperature of the stated resistances [degC]; the usual rating
#: temperature for class B/F insulation (IEC 60034-1 reference temperatures).
DEFAULT_REFERENCE_TEMPERATURE_C = 75.0
#: Short-time (commutation) limit as a multiple of the rated armature current:
#: common practice for industrial DC machines (IEC 60034-1 allows 1.5 x for 1 min
#: for generators; welding duty reaches about 2 x briefly).
DEFAULT_PEAK_FACTOR = 2.0
INTERPOLATIONS = ("monotone-cubic", "linear")
# Smallest values accepted for quantities that must be positive: far below any
# real machine's, and large enough that ratios of them stay finite (a value
# such as 1e-320 passes "> 0" but overflows the solver).
_MIN_OHM = 1e-6
#: How far past what its shunt winding can carry (the highest of the rated and the exciter voltage over the
#: winding's resistance) a test's field current may go: the demo machines reach 1.1 to 2.5 times it, a test
#: logged in milliamperes a thousand times (a newcomer's slip, found in review).
OCC_FIELD_CURRENT_FACTOR = 50.0
#: Least share of the rated voltage the open-circuit test must reach (at rated speed): tests are carried to
#: 110-125 % of rated (IEC 60034-4 open-circuit test, recalled, not checked against the text); a curve under
#: a quarter of it is in other units or cut short.
OCC_TOP_SHARE = 0.25
_MIN_CURRENT_A = 1e-3
_MIN_VOLTAGE_V = 0.1
_MIN_SPEED_RPM = 1.0
_MIN_TURNS = 0.01
# Largest open-circuit test values: beyond any machine the other keys allow.
_MAX_FIELD_CURRENT_A = 1e5
_MAX_EMF_V = 1e6

# Upper bounds on what multiplies the work of a search (README, "What it checks"):
# each series tap is a candidate in every connection, with every diverter, at
# every speed and temperature; curve points and table rows enter every grid.
#: Most entries of ``series_taps`` (0 included): a tapped series winding has a handful; the welding
#: dial solves every tap at every row, so 8 keeps a search at the bounds within 5 s.
MAX_SERIES_TAPS = 8
#: Most points of the open-circuit curve: a test has tens, a finely sampled curve hundreds.
MAX_OCC_POINTS = 500
#: Most rows of the armature-reaction table.
MAX_AR_ROWS = 500
#: Smallest step between adjacent field currents of the curve, as a share of
#: the largest: finer steps carry no measurement and their slopes overflow.
MIN_STEP_FRACTION = 1e-6

#: Tables of a machine file, and the keys of each.
MACHINE_TABLES = ("machine", "open_circuit", "armature_reaction", "winding", "losses")
MACHINE_KEYS = ("label", "poles", "rated_speed_rpm", "rated_voltage_v", "rated_armature_current_a",
                "armature_resistance_ohm", "brush_drop_v", "shunt_field_resistance_ohm",
                "shunt_turns_per_pole", "series_field_resistance_ohm", "series_turns_per_pole",
                "series_taps", "rheostat_max_ohm", "excitation_voltage_v", "reference_temperature_c",
                "peak_armature_current_a")
OPEN_CIRCUIT_KEYS = ("speed_rpm", "field_current_a", "emf_v", "interpolation")
ARMATURE_REACTION_KEYS = ("demagnetizing_at_per_pole_at_rated", "armature_current_a", "demagnetizing_at_per_pole")
WINDING_KEYS = ("conductors", "parallel_paths")
LOSSES_KEYS = ("rotational_loss_w", "rotational_loss_speed_exponent", "stray_load_loss_percent")
# Tables every load profile holds: a file with these and none of ours is a
# profile given where the machine belongs.
_PROFILE_TABLES = ("load", "drive", "battery", "welding", "lighting", "booster")


@dataclass(frozen=True)
class Machine:
    """A DC generator's data, in SI units, resistances at ``reference_temperature_c``."""

    label: str
    poles: int
    rated_speed_rpm: float
    rated_voltage_v: float
    rated_armature_current_a: float
    armature_resistance_ohm: float
    shunt_field_resistance_ohm: float
    shunt_turns_per_pole: float
    rheostat_max_ohm: float
    occ_speed_rpm: float
    occ_field_current_a: tuple
    occ_emf_v: tuple
    brush_drop_v: float = 0.0
    series_field_resistance_ohm: float | None = None
    series_turns_per_pole: float | None = None
    series_taps: tuple = (0,)
    excitation_voltage_v: float | None = None
    reference_temperature_c: float = DEFAULT_REFERENCE_TEMPERATURE_C
    peak_armature_current_a: float | None = None
    occ_interpolation: str = "monotone-cubic"
    ar_at_per_pole_at_rated: float | None = None
    ar_table_current_a: tuple | None = None
    ar_table_at_per_pole: tuple | None = None
    winding_conductors: int | None = None
    winding_parallel_paths: int | None = None
    rotational_loss_w: float | None = None
    rotational_loss_speed_exponent: float | None = None
    stray_load_loss_percent: float | None = None
    source: str = field(default="machine", compare=False)

    @functools.cached_property
    def open_circuit_curve(self):
        """The open-circuit characteristic as the engine reads it
        (:class:`supplycfg.magnetisation.OpenCircuitCurve`), built once: a machine's data are frozen
        (tuples), and every circuit, chart and search step of one machine reads the same curve."""
        from .magnetisation import OpenCircuitCurve
        return OpenCircuitCurve.from_machine(self)

    @property
    def has_series(self):
        return self.series_turns_per_pole is not None and self.series_turns_per_pole > 0

    @property
    def peak_current_a(self):
        if self.peak_armature_current_a is not None:
            return self.peak_armature_current_a
        return DEFAULT_PEAK_FACTOR * self.rated_armature_current_a

    @property
    def residual_voltage_v(self):
        return self.occ_emf_v[0]


def load_machine(path, text=None):
    """Read and check a machine file.

    Parameters
    ----------
    path : str or Path
        The file (its name is used in messages).
    text : str or bytes, optional
        The file's content, when already in memory.

    Returns
    -------
    Machine

    Raises
    ------
    InputError
        One line naming the file, the key and what is allowed.
    """
    data = read_toml(path, text)
    return machine_from_dict(data, source_name(path))


def machine_from_dict(data, source="machine"):
    """Build a :class:`Machine` from parsed TOML tables, checking every rule."""
    check_tables(data, source, MACHINE_TABLES, "machine file", _PROFILE_TABLES, "load profile")
    refuse_unknown_keys(data, source, {"machine": MACHINE_KEYS, "open_circuit": OPEN_CIRCUIT_KEYS,
                                       "armature_reaction": ARMATURE_REACTION_KEYS, "winding": WINDING_KEYS,
                                       "losses": LOSSES_KEYS})
    m = Table(data.get("machine"), source, "machine", keys=MACHINE_KEYS)
    kw = {"source": source}
    kw["label"] = m.text("label", "")
    kw["poles"] = m.integer("poles", low=2, high=64)
    if kw["poles"] % 2:
        raise InputError(source, "machine.poles", f"is {kw['poles']}; allowed: an even whole number >= 2")
    kw["rated_speed_rpm"] = m.number("rated_speed_rpm", low=_MIN_SPEED_RPM, high=100_000)
    kw["rated_voltage_v"] = m.number("rated_voltage_v", low=_MIN_VOLTAGE_V, high=100_000)
    kw["rated_armature_current_a"] = m.number("rated_armature_current_a", low=_MIN_CURRENT_A, high=1e6)
    kw["armature_resistance_ohm"] = m.number("armature_resistance_ohm", low=_MIN_OHM, high=1e4)
    kw["brush_drop_v"] = m.number("brush_drop_v", 0.0, low=0, high=20)
    kw["shunt_field_resistance_ohm"] = m.number("shunt_field_resistance_ohm", low=_MIN_OHM, high=1e6)
    kw["shunt_turns_per_pole"] = m.number("shunt_turns_per_pole", low=_MIN_TURNS, high=1e6)
    rse = m.number("series_field_resistance_ohm", None, low=_MIN_OHM, high=1e3)
    nse = m.number("series_turns_per_pole", None, low=_MIN_TURNS, high=1e4)
    if (rse is None) != (nse is None):
        missing = "series_turns_per_pole" if nse is None else "series_field_resistance_ohm"
        raise InputError(source, f"machine.{missing}", "is missing; give both series keys or neither")
    kw["series_field_resistance_ohm"], kw["series_turns_per_pole"] = rse, nse
    taps = m.numbers("series_taps", None, low=0, max_len=MAX_SERIES_TAPS)
    if taps is None:
        taps = (0.0, nse) if nse is not None else (0.0,)
    else:
        if nse is None:
            raise InputError(source, "machine.series_taps", "given without a series winding; add series_turns_per_pole and series_field_resistance_ohm")
        for i, t in enumerate(taps):
            if t > nse:
                raise InputError(source, f"machine.series_taps[{i}]", f"is {t:g}; allowed: 0 to series_turns_per_pole ({nse:g})")
            if 0 < t < _MIN_TURNS:
                # a tap is turns brought out to the terminal box: as many as the winding's own least
                raise InputError(source, f"machine.series_taps[{i}]", f"is {t:g}; allowed: 0 or {_MIN_TURNS:g} to "
                                 f"series_turns_per_pole ({nse:g})")
        if len(set(taps)) != len(taps):
            raise InputError(source, "machine.series_taps", "repeats a value; list each tap once")
        taps = tuple(sorted(taps))
    kw["series_taps"] = tuple(float(t) for t in taps)
    kw["rheostat_max_ohm"] = m.number("rheostat_max_ohm", low=0, high=1e7)
    kw["excitation_voltage_v"] = m.number("excitation_voltage_v", None, low=_MIN_VOLTAGE_V, high=1e5)
    kw["reference_temperature_c"] = m.number("reference_temperature_c", DEFAULT_REFERENCE_TEMPERATURE_C, low=-60, high=250)
    kw["peak_armature_current_a"] = m.number("peak_armature_current_a", None, low=0, low_open=True, high=1e7)
    m.finish()
    if kw["peak_armature_current_a"] is not None and kw["peak_armature_current_a"] < kw["rated_armature_current_a"]:
        raise InputError(source, "machine.peak_armature_current_a", "is below rated_armature_current_a; allowed: at least the continuous rating")

    o = Table(data.get("open_circuit"), source, "open_circuit", keys=OPEN_CIRCUIT_KEYS)
    kw["occ_speed_rpm"] = o.number("speed_rpm", low=_MIN_SPEED_RPM, high=100_000)
    fc = o.numbers("field_current_a", low=0, high=_MAX_FIELD_CURRENT_A, min_len=4, max_len=MAX_OCC_POINTS)
    ev = o.numbers("emf_v", low=0, high=_MAX_EMF_V, min_len=4, max_len=MAX_OCC_POINTS)
    kw["occ_interpolation"] = o.text("interpolation", "monotone-cubic", choices=INTERPOLATIONS)
    o.finish()
    if len(fc) != len(ev):
        raise InputError(source, "open_circuit.emf_v", f"has {len(ev)} values but field_current_a has {len(fc)}; allowed: equal lengths")
    if fc[0] != 0:
        raise InputError(source, "open_circuit.field_current_a[0]", f"is {fc[0]:g}; allowed: the curve starts at 0 A (the residual voltage)")
    d = np.diff(fc)
    if np.any(d <= 0):
        i = int(np.argmax(d <= 0)) + 1
        raise InputError(source, f"open_circuit.field_current_a[{i}]", f"is {fc[i]:g} after {fc[i-1]:g}; allowed: strictly increasing values")
    _check_steps(fc, source, "open_circuit.field_current_a", "the curve")
    d = np.diff(ev)
    if np.any(d < 0):
        i = int(np.argmax(d < 0)) + 1
        raise InputError(source, f"open_circuit.emf_v[{i}]", f"is {ev[i]:g} after {ev[i-1]:g}; allowed: non-decreasing values (the curve never falls)")
    if ev[-1] <= ev[0]:
        raise InputError(source, "open_circuit.emf_v", "is flat; allowed: a curve that rises with field current")
    kw["occ_field_current_a"], kw["occ_emf_v"] = fc, ev
    # a test read in milliamperes (a thousand times too large) passes every check above: the shunt winding
    # could never carry such a current from any voltage the machine has
    top = ev[-1] * kw["rated_speed_rpm"] / kw["occ_speed_rpm"]
    if top < OCC_TOP_SHARE * kw["rated_voltage_v"]:
        # a curve that never comes near the rated voltage is in other units (kV, or scaled) or was cut short
        raise InputError(source, "open_circuit.emf_v",
                         f"tops out at {ev[-1]:g} V ({top:.3g} V at the rated speed), under a quarter of the rated "
                         f"{kw['rated_voltage_v']:g} V; allowed: volts, from a test carried to about the rated voltage")
    volts = max(kw["rated_voltage_v"], kw["excitation_voltage_v"] or 0.0)
    can = volts / kw["shunt_field_resistance_ohm"]
    if fc[-1] > OCC_FIELD_CURRENT_FACTOR * can:
        raise InputError(source, "open_circuit.field_current_a",
                         f"reaches {fc[-1]:g} A, but the shunt winding ({kw['shunt_field_resistance_ohm']:g} ohm) "
                         f"carries at most {can:.3g} A from {volts:g} V; allowed: amperes (not milliamperes), at most "
                         f"{OCC_FIELD_CURRENT_FACTOR:g} times that")

    if "armature_reaction" in data:
        a = Table(data["armature_reaction"], source, "armature_reaction", keys=ARMATURE_REACTION_KEYS)
        lin = a.number("demagnetizing_at_per_pole_at_rated", None, low=0, high=1e7)
        tab_i = a.numbers("armature_current_a", None, low=0, high=1e7, min_len=2, max_len=MAX_AR_ROWS)
        tab_f = a.numbers("demagnetizing_at_per_pole", None, low=0, high=1e7, min_len=2, max_len=MAX_AR_ROWS)
        a.finish()
        if lin is not None and (tab_i is not None or tab_f is not None):
            raise InputError(source, "armature_reaction", "gives both forms; allowed: demagnetizing_at_per_pole_at_rated, or the table armature_current_a with demagnetizing_at_per_pole")
        if (tab_i is None) != (tab_f is None):
            raise InputError(source, "armature_reaction.demagnetizing_at_per_pole" if tab_f is None else "armature_reaction.armature_current_a", "is missing; the table needs both lists")
        if tab_i is not None:
            if len(tab_i) != len(tab_f):
                raise InputError(source, "armature_reaction.demagnetizing_at_per_pole", f"has {len(tab_f)} values but armature_current_a has {len(tab_i)}; allowed: equal lengths")
            for name, vals, unit in (("armature_current_a", tab_i, "A"), ("demagnetizing_at_per_pole", tab_f, "AT")):
                if vals[0] != 0:
                    raise InputError(source, f"armature_reaction.{name}[0]",
                                     f"is {vals[0]:g} {unit}; allowed: 0 (the table starts at 0 A, 0 AT)")
            d = np.diff(tab_i)
            if np.any(d <= 0):
                i = int(np.argmax(d <= 0)) + 1
                raise InputError(source, f"armature_reaction.armature_current_a[{i}]",
                                 f"is {tab_i[i]:g} after {tab_i[i-1]:g}; allowed: strictly increasing values")
            _check_steps(tab_i, source, "armature_reaction.armature_current_a", "the table")
            d = np.diff(tab_f)
            if np.any(d < 0):
                i = int(np.argmax(d < 0)) + 1
                raise InputError(source, f"armature_reaction.demagnetizing_at_per_pole[{i}]",
                                 f"is {tab_f[i]:g} after {tab_f[i-1]:g}; allowed: non-decreasing values")
        if lin is None and tab_i is None:
            raise InputError(source, "armature_reaction", "is empty; give demagnetizing_at_per_pole_at_rated or the table")
        kw["ar_at_per_pole_at_rated"] = lin
        kw["ar_table_current_a"], kw["ar_table_at_per_pole"] = tab_i, tab_f

    if "winding" in data:
        w = Table(data["winding"], source, "winding", keys=WINDING_KEYS)
        kw["winding_conductors"] = w.integer("conductors", low=1, high=10_000_000)
        kw["winding_parallel_paths"] = w.integer("parallel_paths", low=2, high=1000)
        w.finish()
        if kw["winding_parallel_paths"] % 2:
            raise InputError(source, "winding.parallel_paths", f"is {kw['winding_parallel_paths']}; allowed: an even number (2 for wave, the pole count or a multiple for lap)")
    if "losses" in data:
        ls = Table(data["losses"], source, "losses", keys=LOSSES_KEYS)
        # defaults and their sources: supplycfg.drive
        kw["rotational_loss_w"] = ls.number("rotational_loss_w", None, low=0, high=1e8, what="watts at rated speed")
        kw["rotational_loss_speed_exponent"] = ls.number("rotational_loss_speed_exponent", None, low=0, high=4)
        kw["stray_load_loss_percent"] = ls.number("stray_load_loss_percent", None, low=0, high=20,
                                                  what="per cent of output")
        ls.finish()
    return Machine(**kw)


def _check_steps(currents, source, key, what):
    """Refuse a largest current below 1 mA, or steps too small to compute slopes with."""
    top = currents[-1]
    if top < _MIN_CURRENT_A:
        raise InputError(source, f"{key}[{len(currents) - 1}]", f"is {top:g} A, the largest of {what}; "
                         f"allowed: at least {_MIN_CURRENT_A:g} A")
    d = np.diff(currents)
    small = d < MIN_STEP_FRACTION * top
    if np.any(small):
        i = int(np.argmax(small)) + 1
        raise InputError(source, f"{key}[{i}]", f"is {currents[i]:g} after {currents[i-1]:g}: a step of {d[i-1]:.3g} A; "
                         f"allowed: steps of at least {MIN_STEP_FRACTION:g} of the largest value ({top:g} A)")


def machine_to_dict(m):
    """The machine's TOML tables; ``machine_from_dict`` of it gives ``m`` back."""
    mach = {"label": m.label, "poles": m.poles, "rated_speed_rpm": m.rated_speed_rpm,
            "rated_voltage_v": m.rated_voltage_v,
            "rated_armature_current_a": m.rated_armature_current_a,
            "armature_resistance_ohm": m.armature_resistance_ohm,
            "brush_drop_v": m.brush_drop_v,
            "shunt_field_resistance_ohm": m.shunt_field_resistance_ohm,
            "shunt_turns_per_pole": m.shunt_turns_per_pole}
    if m.series_turns_per_pole is not None:
        mach["series_field_resistance_ohm"] = m.series_field_resistance_ohm
        mach["series_turns_per_pole"] = m.series_turns_per_pole
        mach["series_taps"] = list(m.series_taps)
    mach["rheostat_max_ohm"] = m.rheostat_max_ohm
    if m.excitation_voltage_v is not None:
        mach["excitation_voltage_v"] = m.excitation_voltage_v
    mach["reference_temperature_c"] = m.reference_temperature_c
    if m.peak_armature_current_a is not None:
        mach["peak_armature_current_a"] = m.peak_armature_current_a
    out = {"machine": mach,
           "open_circuit": {"speed_rpm": m.occ_speed_rpm,
                            "field_current_a": list(m.occ_field_current_a),
                            "emf_v": list(m.occ_emf_v),
                            "interpolation": m.occ_interpolation}}
    if m.ar_at_per_pole_at_rated is not None:
        out["armature_reaction"] = {"demagnetizing_at_per_pole_at_rated": m.ar_at_per_pole_at_rated}
    elif m.ar_table_current_a is not None:
        out["armature_reaction"] = {"armature_current_a": list(m.ar_table_current_a),
                                    "demagnetizing_at_per_pole": list(m.ar_table_at_per_pole)}
    losses = {k: getattr(m, k) for k in ("rotational_loss_w", "rotational_loss_speed_exponent",
                                         "stray_load_loss_percent") if getattr(m, k) is not None}
    if losses:
        out["losses"] = losses
    if m.winding_conductors is not None:
        out["winding"] = {"conductors": m.winding_conductors,
                          "parallel_paths": m.winding_parallel_paths}
    return out


def machine_summary(m):
    """Plain dict of the machine's data for reports (JSON-safe)."""
    d = asdict(m)
    d.pop("source", None)
    return {k: (list(v) if isinstance(v, tuple) else v) for k, v in d.items()}
