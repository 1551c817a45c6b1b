"""Connections and solving: the generator's steady state in every connection.

The model follows the project's design note. Every winding acts through the
net mmf per pole, read on the open-circuit characteristic as an equivalent
shunt-field current

    x_w = I_sh + c * I_br,     c = +-N_se * w / N_sh,
    x = x_w - sign(x_w) min(F_ar(|Ia|) / N_sh, |x_w|)

(``w`` the share of the series-branch current ``I_br`` that flows in the
winding when a diverter is fitted; armature reaction weakens the field and
never reverses it) and the terminal voltage is

    V = (n / n_occ) * OCC(x) - Ia * Ra - I_br * R_br - V_b(Ia).

Operating points against a load are found along the load line, where every
current is an explicit function of the terminal voltage; all intersections
are bracketed on a fine grid and refined by vectorised bisection.
External characteristics of self-excited connections are traced exactly
through their turn-back: with the circuit written as ``N(u) = L(Ia)`` (both
one-dimensional functions, one pair for each sign of the windings' field)
the curve is followed piece by piece of monotony.

References
----------
Equivalent-field-current method and generator connections: S. J. Chapman,
*Electric Machinery Fundamentals*, DC generators (from memory); B. L. Theraja,
*A Textbook of Electrical Technology* Vol II, ch. 26-28.
"""

import bisect
import math
import warnings
from dataclasses import dataclass, field, replace

import numpy as np

from .drive import (SPEED_CEILING_SHARE, DriveRows, drive_loading, loss_breakdown, machine_loss_exponent,
                    machine_rotational_loss_w, machine_stray_percent)
from .errors import InputError
from .magnetisation import (ArmatureReaction, OpenCircuitCurve, bounded, copper_resistance_factor,
                            field_after_armature_reaction)
from .raytrace import NO_BUILD_UP_NOTE, trace_on_rays

CONNECTIONS = (
    "separate", "separate-cumulative", "separate-differential", "shunt", "series",
    "long-shunt-cumulative", "short-shunt-cumulative", "long-shunt-differential",
    "short-shunt-differential",
)
SELF_EXCITED = ("shunt", "long-shunt-cumulative", "short-shunt-cumulative",
                "long-shunt-differential", "short-shunt-differential")
SEPARATE = ("separate", "separate-cumulative", "separate-differential")
USES_SERIES = tuple(c for c in CONNECTIONS if c not in ("separate", "shunt"))

#: Brush drop ramps linearly through zero below this share of the rated
#: armature current (design note: keeps the circuit equations continuous).
BRUSH_RAMP_FRACTION = 0.01
#: Currents are searched up to this multiple of the rated armature current.
CURRENT_SPAN_FACTOR = 10.0
#: Grid points along the load line before refining each bracket.
LOAD_LINE_GRID = 4001
#: A load line flatter than this [ohm] is taken as flat (V = v0): it moves the voltage by under 1e-8 V at
#: 10^4 A, and a subnormal slope would overflow the load current read off it (a numerical floor, not a
#: physical value; the files' bounds keep real loads far above it).
LOAD_SLOPE_FLOOR_OHM = 1e-12
#: Times the voltage span of a load-line search is doubled when the machine is still above the load.
SPAN_DOUBLINGS = 4
RUNAWAY_MESSAGE = ("the machine's voltage keeps rising above the load beyond the searched span: the open-circuit "
                   "curve's extension past its last point never bends over; measure the curve further")
BEYOND_SPAN_MESSAGE = ("the machine's highest stable point on this load lies beyond the searched span of 10 x the "
                       "rated armature current: it runs away into an overload")
CURVE_RUNAWAY_NOTE = ("no no-load voltage: the field line stays below the open-circuit curve out to the searched "
                      "span, so the voltage runs away past the measured curve; measure the curve further or add "
                      "field resistance")
#: Curve samples nearer than this share of rated voltage make the fold's parabola exact enough.
FOLD_FINE_SPACING = 1e-2
#: Golden-section steps looking for a residual extremum between two grid points.
EXTREMUM_STEPS = 40
#: A refinement stops once every residual is below this [V].
RESIDUAL_STOP_V = 1e-11
#: Refinement steps of a bracket (half secant, half halving; see refine_bracketed_roots).
BISECTION_STEPS = 40


@dataclass(frozen=True)
class Setting:
    """One way of running the machine.

    Parameters
    ----------
    connection : str
        One of :data:`CONNECTIONS`.
    rheostat_ohm : float, optional
        Field rheostat [ohm] in series with the shunt winding; 0 when omitted.
        For separate excitation it sets the field current from the exciter
        voltage, ``Iexc = Vexc / (Rsh(T) + Rrh)``.
    field_current_a : float, optional
        Separate excitation: the field current [A] directly.
    series_turns : float, optional
        Series turns per pole in use (a tap); default the whole winding.
    diverter_ohm : float, optional
        Diverter resistance [ohm] across the series winding; ``None`` for none.
    speed_rpm : float, optional
        Drive speed [rpm]; default the rated speed.
    winding_temperature_c : float, optional
        Copper temperature [degC]; default the machine's reference temperature.
    """

    connection: str
    rheostat_ohm: float | None = None
    field_current_a: float | None = None
    series_turns: float | None = None
    diverter_ohm: float | None = None
    speed_rpm: float | None = None
    winding_temperature_c: float | None = None

    def describe(self):
        """The setting in plain words, e.g. ``rheostat 30 ohm, 1450 rpm, windings at 75 degC``; the
        connection is named apart (:func:`supplycfg.wording.connection_words` on screens)."""
        parts = []
        if self.field_current_a is not None:
            parts.append(f"field current {self.field_current_a:.4g} A")
        elif self.rheostat_ohm is not None and self.connection != "series":
            parts.append(f"rheostat {self.rheostat_ohm:.4g} ohm")
        if self.series_turns:
            parts.append(f"{self.series_turns:g} series turns")
        if self.diverter_ohm is not None:
            parts.append(f"diverter {self.diverter_ohm:.4g} ohm")
        if self.speed_rpm is not None:
            parts.append(f"{self.speed_rpm:g} rpm")
        if self.winding_temperature_c is not None:
            parts.append(f"windings at {self.winding_temperature_c:g} degC")
        return ", ".join(parts)

    def as_dict(self):
        return {"connection": self.connection, "rheostat_ohm": self.rheostat_ohm,
                "field_current_a": self.field_current_a, "series_turns": self.series_turns,
                "diverter_ohm": self.diverter_ohm, "speed_rpm": self.speed_rpm,
                "winding_temperature_c": self.winding_temperature_c}


def allowed_connections(machine):
    """Connections the machine's windings allow."""
    if machine.has_series:
        return CONNECTIONS
    return ("separate", "shunt")


def check_setting(machine, setting, source="setting", names=None):
    """Complete a setting with its defaults and check it against the machine.

    Parameters
    ----------
    names : dict, optional
        Maps field names to what the person typed (e.g. ``--rheostat-ohm``)
        so the message names the option.

    Returns
    -------
    Setting
        With ``speed_rpm``, ``winding_temperature_c``, ``series_turns`` and
        the rheostat or field current filled in.
    """
    names = names or {}

    def err(key, msg):
        raise InputError(source, names.get(key, key), msg)

    s = setting
    if s.connection not in CONNECTIONS:
        err("connection", f"is {s.connection!r}; allowed: {', '.join(CONNECTIONS)}")
    if s.connection not in allowed_connections(machine):
        err("connection", f"{s.connection!r} needs a series winding, which this machine has not; allowed: {', '.join(allowed_connections(machine))}")
    for key in ("rheostat_ohm", "field_current_a", "series_turns", "diverter_ohm",
                "speed_rpm", "winding_temperature_c"):
        v = getattr(s, key)
        if v is not None and (isinstance(v, bool) or not np.isfinite(float(v))):
            err(key, f"is {v!r}; allowed: a finite number")
    speed = machine.rated_speed_rpm if s.speed_rpm is None else float(s.speed_rpm)
    if not 1 <= speed <= 100_000:  # the bounds of the files' speeds
        err("speed_rpm", f"is {speed:g}; allowed: 1 to 100000 rpm")
    temp = machine.reference_temperature_c if s.winding_temperature_c is None else float(s.winding_temperature_c)
    if not -60 <= temp <= 250:
        err("winding_temperature_c", f"is {temp:g}; allowed: -60 to 250 degC")
    rh, fi = s.rheostat_ohm, s.field_current_a
    if rh is not None and fi is not None:
        err("field_current_a", "given together with the rheostat; allowed: one of the two")
    if s.connection in SEPARATE:
        if fi is None:
            if machine.excitation_voltage_v is None:
                err("field_current_a", "is needed for separate excitation (the machine file gives no excitation_voltage_v)")
            rh = 0.0 if rh is None else rh
        elif fi < 0:
            err("field_current_a", f"is {fi:g}; allowed: >= 0 A")
    else:
        if fi is not None:
            err("field_current_a", f"applies to separate excitation only, not {s.connection!r}; use the rheostat")
        rh = 0.0 if rh is None else rh
    if rh is not None and not 0 <= rh <= machine.rheostat_max_ohm * (1 + 1e-12):
        if machine.rheostat_max_ohm <= 0:
            err("rheostat_ohm", f"is {rh:g}; allowed: 0 only (the machine file gives no field rheostat: "
                                "rheostat_max_ohm = 0)")
        err("rheostat_ohm", f"is {rh:g}; allowed: 0 to {machine.rheostat_max_ohm:g} ohm (the machine's rheostat)")
    nse = s.series_turns
    if s.connection in USES_SERIES:
        if nse is None:
            nse = machine.series_turns_per_pole
        nse = float(nse)
        # a tap is the number of turns the file lists, exactly (decimal rounding aside)
        tap = [t for t in machine.series_taps if abs(nse - t) <= 1e-12 * max(1.0, t)]
        if not tap:
            err("series_turns", f"is {nse!r}; allowed taps: {', '.join(f'{t:g}' for t in machine.series_taps)} "
                "(series turns per pole, as the machine file lists them)")
        nse = tap[0]
        if s.connection == "series" and nse <= 0:
            err("series_turns", "is 0; a series machine needs its series turns")
    else:
        if nse not in (None, 0, 0.0):
            err("series_turns", f"does not apply to {s.connection!r}; allowed: omit it or 0")
        nse = 0.0
    d = s.diverter_ohm
    if d is not None:
        if s.connection not in USES_SERIES:
            err("diverter_ohm", f"does not apply to {s.connection!r} (no series winding in circuit)")
        if not d > 0:
            err("diverter_ohm", f"is {d:g}; allowed: > 0 ohm, or omit for none")
    return replace(s, rheostat_ohm=None if rh is None else float(rh),
                   field_current_a=None if fi is None else float(fi),
                   series_turns=nse, speed_rpm=speed, winding_temperature_c=temp,
                   diverter_ohm=None if d is None else float(d))


# ---------------------------------------------------------------------------
# vectorised circuit parameters
# ---------------------------------------------------------------------------

#: Row parameters a candidate's operating point depends on (with ``nse``, which splits the branch
#: current between the series winding and its diverter in the reported currents): what
#: :meth:`Circuit.take` gives; a circuit's rows also keep ``rsh``, which the field control acts on.
ROW_KEYS = ("kind", "short", "branch", "s", "ra", "rbr", "c", "rf", "x0", "nse")


@dataclass
class Circuit:
    """Per-candidate circuit parameters, each an array of shape (n,)."""

    machine: object
    occ: OpenCircuitCurve
    ar: ArmatureReaction
    settings: list
    kind: np.ndarray          # 0 separate (field fixed), 1 self-excited, 2 series
    short: np.ndarray         # bool: short-shunt
    branch: np.ndarray        # 0 none, 1 branch carries Ia, 2 branch carries IL
    s: np.ndarray             # speed ratio n / n_occ
    ra: np.ndarray            # armature resistance at temperature [ohm]
    rbr: np.ndarray           # series-branch resistance [ohm]
    c: np.ndarray             # equivalent field current per branch ampere [A/A]
    rf: np.ndarray            # shunt field circuit resistance [ohm]
    x0: np.ndarray            # separate excitation current [A]
    vb: float                 # full brush drop [V]
    ir: float                 # brush ramp current [A]
    nsh: float
    imax: float
    nse: np.ndarray = None    # series turns in use
    rsh: np.ndarray = None    # shunt winding alone at temperature [ohm]
    drive: DriveRows = None   # engine or motor: the speed is an unknown of every point (s is its no-load speed)

    @property
    def n(self):
        return len(self.settings)

    def take(self, idx):
        """Parameters for candidate indices ``idx`` (broadcastable)."""
        return {k: getattr(self, k)[idx] for k in ROW_KEYS}

    def without_drive(self):
        """The same rows at the drive's no-load speed, held fixed (no-load voltages, build-up)."""
        if self.drive is None:
            return self
        return replace(self, drive=None)

    def subset(self, idx, rheostat_ohm=None, field_current_a=None, exciter_v=None):
        """A circuit of candidates ``idx`` (repeats allowed) with the field control changed.

        ``rheostat_ohm`` sets the shunt field circuit (self-excited) or, with
        ``exciter_v``, the separate field current ``Vexc / (Rsh + Rrh)``;
        ``field_current_a`` sets a separate field current directly. NaN
        entries leave a candidate's control as it is.
        """
        idx = np.asarray(idx, int)
        arr = {k: getattr(self, k)[idx].copy() for k in ROW_KEYS + ("rsh",)}
        _apply_field_control(arr, rheostat_ohm, field_current_a, exciter_v)
        return Circuit(self.machine, self.occ, self.ar, [self.settings[i] for i in idx.tolist()], arr["kind"],
                       arr["short"], arr["branch"], arr["s"], arr["ra"], arr["rbr"], arr["c"], arr["rf"],
                       arr["x0"], self.vb, self.ir, self.nsh, self.imax, arr["nse"], arr["rsh"],
                       self.drive)


    def params_with_control(self, rheostat_ohm=None, field_current_a=None, exciter_v=None):
        """Parameters of every row (as :meth:`take`) with the field control changed as
        :meth:`subset` changes it, without building a new circuit: a search over one
        control value per row calls this at every step."""
        arr = {k: getattr(self, k) for k in ROW_KEYS + ("rsh",)}
        _apply_field_control(arr, rheostat_ohm, field_current_a, exciter_v)
        del arr["rsh"]
        return arr


def _apply_field_control(arr, rheostat_ohm, field_current_a, exciter_v):
    """Set ``rf`` and ``x0`` of the row parameters ``arr`` (see :meth:`Circuit.subset`); NaN leaves a row as is."""
    if rheostat_ohm is not None:
        r = np.asarray(rheostat_ohm, float)
        ok = np.isfinite(r)
        rf_new = arr["rsh"] + np.where(ok, r, 0.0)
        arr["rf"] = np.where(ok, rf_new, arr["rf"])
        if exciter_v is not None:
            ev = np.asarray(exciter_v, float)
            sep = ok & (arr["kind"] == 0) & np.isfinite(ev)
            arr["x0"] = np.where(sep, np.where(np.isfinite(ev), ev, 0.0) / rf_new, arr["x0"])
    if field_current_a is not None:
        f = np.asarray(field_current_a, float)
        ok = np.isfinite(f) & (arr["kind"] == 0)
        arr["x0"] = np.where(ok, f, arr["x0"])


def build_circuit(machine, settings, drive=None):
    """Check settings and gather their parameters as arrays.

    With ``drive`` an engine or a motor (:class:`supplycfg.drive.Drive`) the
    speed of every row is an unknown solved with each operating point; the
    settings' speeds are then the drive's speed at zero shaft power.
    """
    if drive is not None and drive.coupled:
        top = drive.generator_speeds_rpm()[0]
        settings = [replace(s, speed_rpm=top) for s in settings]
    settings = [check_setting(machine, s) for s in settings]
    occ = machine.open_circuit_curve
    ar = ArmatureReaction.from_machine(machine)
    n = len(settings)
    kind = np.zeros(n, int); short = np.zeros(n, bool); branch = np.zeros(n, int)
    s_ = np.zeros(n); ra = np.zeros(n); rbr = np.zeros(n); c = np.zeros(n)
    rf = np.zeros(n); x0 = np.zeros(n); nse = np.zeros(n); rsh_t = np.zeros(n)
    for i, st in enumerate(settings):
        ct = float(copper_resistance_factor(st.winding_temperature_c, machine.reference_temperature_c))
        s_[i] = st.speed_rpm / machine.occ_speed_rpm
        ra[i] = machine.armature_resistance_ohm * ct
        rsh = machine.shunt_field_resistance_ohm * ct
        rsh_t[i] = rsh
        nse[i] = st.series_turns or 0.0
        rf[i] = rsh + (st.rheostat_ohm or 0.0)
        conn = st.connection
        if conn in USES_SERIES and st.series_turns > 0:
            rse = machine.series_field_resistance_ohm * ct * st.series_turns / machine.series_turns_per_pole
            if st.diverter_ohm is not None:
                rbr[i] = rse * st.diverter_ohm / (rse + st.diverter_ohm)
                w = st.diverter_ohm / (rse + st.diverter_ohm)
            else:
                rbr[i], w = rse, 1.0
            sign = -1.0 if conn.endswith("differential") else 1.0
            c[i] = sign * st.series_turns * w / machine.shunt_turns_per_pole
        if conn in SEPARATE:
            kind[i] = 0
            x0[i] = st.field_current_a if st.field_current_a is not None else machine.excitation_voltage_v / rf[i]
            branch[i] = 0 if conn == "separate" else 2
        elif conn == "series":
            kind[i], branch[i] = 2, 2
        else:
            kind[i] = 1
            if conn.startswith("long"):
                branch[i] = 1
            elif conn.startswith("short"):
                branch[i], short[i] = 2, True
    rows = DriveRows.build(machine, drive) if drive is not None and drive.coupled else None
    return Circuit(machine, occ, ar, settings, kind, short, branch, s_, ra, rbr, c, rf, x0,
                   float(machine.brush_drop_v), BRUSH_RAMP_FRACTION * machine.rated_armature_current_a,
                   float(machine.shunt_turns_per_pole), CURRENT_SPAN_FACTOR * machine.rated_armature_current_a,
                   nse, rsh_t, rows)


def brush_drop(armature_current_a, full_drop_v, ramp_current_a, with_slope=False):
    """Total brush contact drop [V], full beyond the ramp current, linear through zero inside.

    References
    ----------
    About 2 V for a pair of carbon brushes (Theraja Vol II Ex 26.4-26.5; common practice).
    """
    ia = np.asarray(armature_current_a, float)
    u = bounded(ia / ramp_current_a, -1.0, 1.0)
    v = full_drop_v * u
    if with_slope:
        return v, np.where(np.abs(ia) < ramp_current_a, full_drop_v / ramp_current_a, 0.0)
    return v


def currents_from_voltage(p, v, il):
    """Shunt, armature and branch currents from terminal voltage and load current."""
    kind, branch = p["kind"], p["branch"]
    # per-row factors first (rows are few beside their points): the same values as
    # (v + il Rbr short) / Rf * (kind == 1), with a pass fewer each
    ish = (v + il * (p["rbr"] * p["short"])) / np.where(kind == 1, p["rf"], np.inf)
    ia = il + ish
    ibr = ia * (branch == 1) + il * (branch == 2)
    # the field current is the shunt's, or the separate excitation's (written over it in place)
    np.copyto(ish, p["x0"], where=kind == 0)
    return ish, ia, ibr


def circuit_residual(circ, p, v, il):
    """The circuit residual ``h`` [V] of :func:`machine_state` alone (what a root search needs).

    The same arithmetic as :func:`machine_state`, so the two agree bit for bit.
    """
    field, ia, ibr = currents_from_voltage(p, v, il)
    x = field_after_armature_reaction(field + p["c"] * ibr, circ.ar.mmf(ia) / circ.nsh)
    occ = circ.occ.emf(x)
    s = p["s"] if circ.drive is None else circ.drive.speed_ratio(p, occ * ia, 0.0, v * il, flags=False)[0]
    return s * occ - ia * p["ra"] - ibr * p["rbr"] - brush_drop(ia, circ.vb, circ.ir) - v


def machine_state(circ, p, v, il):
    """Everything at terminal voltage ``v`` [V] and load current ``il`` [A].

    Returns a dict with the currents, the equivalent field current ``x``, the
    EMF ``e`` at speed and the circuit residual ``h`` [V] (zero on the machine's
    characteristic; negative slope in ``v`` along a load line means stable).
    With a drive (``circ.drive``) the speed is where the drive's characteristic
    meets the shaft power at this point (``speed_rpm``, ``drive_converged``,
    ``drive_unique``); the EMF follows it.
    """
    field, ia, ibr = currents_from_voltage(p, v, il)
    x = field_after_armature_reaction(field + p["c"] * ibr, circ.ar.mmf(ia) / circ.nsh)
    occ = circ.occ.emf(x)
    if circ.drive is None:
        s = p["s"]
    else:
        s, conv, unique = circ.drive.speed_ratio(p, occ * ia, 0.0, v * il)
    e = s * occ
    h = e - ia * p["ra"] - ibr * p["rbr"] - brush_drop(ia, circ.vb, circ.ir) - v
    ish = field * (p["kind"] != 2)
    out = {"terminal_voltage_v": v, "load_current_a": il, "armature_current_a": ia,
           "shunt_field_current_a": ish, "series_field_current_a": ibr * _winding_share(circ, p),
           "series_branch_current_a": ibr, "generated_emf_v": e, "x": x, "h": h}
    if circ.drive is not None:
        out.update(speed_rpm=s * circ.occ.speed_rpm, drive_converged=conv, drive_unique=unique)
    return out


def drive_settled(st):
    """Where the drive's speed equation held at a state of :func:`machine_state` (True without a drive)."""
    if "drive_converged" not in st:
        return True
    return st["drive_converged"] & st["drive_unique"]


def power_flow(circ, p, v, il):
    """Speed, shaft power, losses by kind and efficiency at terminal voltage ``v`` and load current ``il``.

    Returns
    -------
    dict of arrays
        :func:`machine_state`'s keys plus those of
        :func:`supplycfg.drive.loss_breakdown` (``losses_w`` a dict by kind,
        ``shaft_power_w``, ``exciter_power_w``, ``output_w``, ``efficiency``).
        Shaft power plus exciter power equals output plus every loss wherever
        the circuit residual ``h`` is zero.
    """
    st = machine_state(circ, p, v, il)
    if "speed_rpm" not in st:
        st["speed_rpm"] = np.broadcast_to(p["s"] * circ.occ.speed_rpm, np.shape(st["h"]))
    m = circ.machine
    loss_rows = (machine_rotational_loss_w(m), m.rated_speed_rpm, machine_loss_exponent(m),
                 0.01 * machine_stray_percent(m))
    sep = p["kind"] == 0
    field = st["shunt_field_current_a"]
    out = loss_breakdown(st["terminal_voltage_v"], st["load_current_a"], st["armature_current_a"],
                         st["series_branch_current_a"], field, st["generated_emf_v"], st["speed_rpm"],
                         p["ra"], p["rbr"], p["rf"], brush_drop(st["armature_current_a"], circ.vb, circ.ir),
                         sep, loss_rows)
    st.update(out)
    return st


def _winding_share(circ, p):
    """Share of the branch current in the series winding (the rest in the diverter)."""
    nse = p.get("nse")
    if nse is None:
        return 1.0
    return np.abs(p["c"]) * circ.nsh / np.where(nse > 0, nse, np.inf)


def candidate_params(circ, idx):
    """Circuit parameters of candidates ``idx`` as a dict of arrays (with ``idx`` itself)."""
    p = circ.take(idx)
    p["idx"] = idx
    return p


# ---------------------------------------------------------------------------
# loads and operating points
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Load:
    """A load as a line in the (load current, terminal voltage) plane.

    ``V = v0 + slope_ohm * IL`` (resistor: ``v0 = 0``; battery: EMF and
    resistance; welding load line: ``U0`` and ``k``), or a constant current
    ``IL = current_a`` when ``current_a`` is given, or the load current at
    which the armature carries ``armature_current_a`` (full load of a
    self-excited machine: its armature also feeds the shunt field).
    ``source`` marks a load that can drive current into the machine (a
    battery, a forced current); a resistor or an arc cannot.
    """

    v0: float = 0.0
    slope_ohm: float = 0.0
    current_a: float | None = None
    label: str = ""
    source: bool = False
    armature_current_a: float | None = None

    @classmethod
    def resistor(cls, ohm):
        return cls(0.0, float(ohm), None, f"resistor {ohm:g} ohm")

    @classmethod
    def constant_current(cls, amps):
        return cls(0.0, 0.0, float(amps), f"constant current {amps:g} A", source=True)

    @classmethod
    def battery(cls, emf_v, ohm):
        return cls(float(emf_v), float(ohm), None, f"battery {emf_v:g} V, {ohm:g} ohm", source=True)

    @classmethod
    def line(cls, v0, slope_ohm):
        return cls(float(v0), float(slope_ohm), None, f"line {v0:g} V + {slope_ohm:g} ohm")

    @classmethod
    def armature_current(cls, amps):
        return cls(0.0, 0.0, None, f"load with {amps:g} A in the armature", armature_current_a=float(amps))


@dataclass
class OperatingPoints:
    """All intersections of a setting's characteristic with a load.

    Attributes
    ----------
    points : list of dict
        Highest terminal voltage first; each with the curve-point keys,
        ``stable``, ``reversed`` (generated EMF below zero: a reversed
        build-up, design note) and ``back_feeding`` (a source load driving
        current into the machine).
    converged : bool
        False if a bracket could not be refined to the residual tolerance,
        or the machine runs away.
    runaway : bool
        The highest stable point lies beyond the searched span (the voltage
        runs away past the measured curve, or the current would pass 10 x
        rated): the point the machine sits at is unknown.
    """

    points: list
    converged: bool = True
    message: str = ""
    runaway: bool = False

    @property
    def normal(self):
        """The point the machine sits at: the highest stable intersection of normal polarity.

        None when it runs away past the searched span, or when every stable
        intersection is a reversed build-up (never the point the machine is
        said to sit at, design note).
        """
        if self.runaway:
            return None
        for pt in self.points:
            if pt["stable"] and not pt["reversed"]:
                return pt
        return None


POINT_KEYS = ("terminal_voltage_v", "load_current_a", "armature_current_a",
              "shunt_field_current_a", "series_field_current_a", "generated_emf_v")


def nonzero_rows_cols(mask):
    """Row and column indices of the true cells of a 2-D ``mask``, in row-major order (as ``np.nonzero``).

    Through the flat index and ``divmod``: numpy's two-dimensional ``nonzero``
    took ten times as long on the sparse masks of the solvers (measured here
    on a 650 x 2072 mask).
    """
    return np.divmod(np.flatnonzero(mask), max(mask.shape[1], 1))


def refine_bracketed_roots(fun, a, b, fa, steps=BISECTION_STEPS):
    """Vectorised bracketing root refinement of ``fun`` on ``[a, b]`` (``fun(a) = fa``).

    The Illinois variant of regula falsi (Dowell & Jarratt 1971): it keeps a
    bracket like bisection but converges superlinearly; after ``steps // 2``
    updates it falls back to plain halving for the rest, so kinks (linear
    interpolation, the brush-drop ramp) cannot stall it.

    References
    ----------
    M. Dowell, P. Jarratt, "A modified regula falsi method for computing the
    root of an equation", BIT 11 (1971) 168-174.
    """
    a = np.asarray(a, float).copy(); b = np.asarray(b, float).copy()
    fa = np.asarray(fa, float).copy()
    fb = fun(b)
    secant_steps = max(steps // 2, 1)
    if a.ndim == 1 and a.size <= FEW_BRACKETS and a.shape == b.shape == fa.shape == np.shape(fb):
        return _refine_few_brackets(fun, a.tolist(), b.tolist(), fa.tolist(), np.asarray(fb, float).tolist(),
                                    steps, secant_steps)

    def settled(a, b, fb):
        # residuals here are volts: far below the 1e-6 V the results promise
        return (np.abs(fb) <= RESIDUAL_STOP_V) | (np.abs(b - a) <= 1e-15 * np.maximum(1.0, np.abs(b)))

    # a bracket end already on the root (a grid point, a knot) is the answer
    at_a = np.abs(fa) <= RESIDUAL_STOP_V
    b, fb = np.where(at_a, a, b), np.where(at_a, fa, fb)
    done = at_a | settled(a, b, fb)
    for k in range(steps):
        if np.all(done):
            break
        if k < secant_steps:
            den = fb - fa
            with np.errstate(divide="ignore", invalid="ignore"):
                c = b - fb * (b - a) / den
            lo, hi = np.minimum(a, b), np.maximum(a, b)
            # (strictly inside a finite bracket: no NaN or infinity passes)
            c = np.where((c > lo) & (c < hi), c, 0.5 * (a + b))
        else:
            c = 0.5 * (a + b)
        # a settled root stays where it is while the others go on
        c = np.where(done, b, c)
        fc = fun(c)
        flip = (np.signbit(fc) != np.signbit(fb)) & ~done
        a = np.where(flip, b, a)
        fa = np.where(flip, fb, np.where(done, fa, 0.5 * fa) if k < secant_steps else fa)
        b, fb = c, np.where(done, fb, fc)
        done = done | settled(a, b, fb)
    return b


#: Brackets up to which :func:`refine_bracketed_roots` keeps its books in Python floats: a numpy call
#: costs about a microsecond whatever its size, a float operation some tens of nanoseconds
#: (measured here: a single characteristic refines 3 to 9 brackets at a time).
FEW_BRACKETS = 16


def _signbit(x):
    return math.copysign(1.0, x) < 0.0


def _refine_few_brackets(fun, a, b, fa, fb, steps, secant_steps):
    """:func:`refine_bracketed_roots` on a few brackets, bracket by bracket in Python floats.

    The same IEEE operations in the same order as the array route (Python
    floats are doubles rounded to nearest), so the roots are the same bits;
    only ``fun`` is called with an array. A zero denominator, which gives
    the array route an infinite or NaN secant point, takes the halving.
    """
    n = len(a)
    done = [False] * n
    for r in range(n):
        if abs(fa[r]) <= RESIDUAL_STOP_V:  # a bracket end already on the root
            b[r], fb[r] = a[r], fa[r]
        done[r] = _bracket_settled(a[r], b[r], fb[r])
    for k in range(steps):
        if all(done):
            break
        c = list(b)
        for r in range(n):
            if done[r]:
                continue
            ar, br = a[r], b[r]
            if k < secant_steps:
                den = fb[r] - fa[r]
                cr = br - fb[r] * (br - ar) / den if den != 0.0 else math.nan
                lo, hi = (ar, br) if ar <= br else (br, ar)
                c[r] = cr if lo < cr < hi else 0.5 * (ar + br)
            else:
                c[r] = 0.5 * (ar + br)
        fc = np.asarray(fun(np.array(c)), float).tolist()
        for r in range(n):
            if done[r]:
                continue
            if _signbit(fc[r]) != _signbit(fb[r]):
                a[r], fa[r] = b[r], fb[r]
            elif k < secant_steps:
                fa[r] = 0.5 * fa[r]
            b[r], fb[r] = c[r], fc[r]
            done[r] = _bracket_settled(a[r], b[r], fb[r])
    return np.array(b, float)


def _bracket_settled(a, b, fb):
    # as refine_bracketed_roots' settled(): a NaN end is never settled
    return abs(fb) <= RESIDUAL_STOP_V or abs(b - a) <= 1e-15 * (abs(b) if abs(b) > 1.0 else 1.0)


def voltage_span(circ, idx=None):
    """Highest terminal voltage worth searching first for candidates ``idx`` [V].

    The open-circuit curve read at three times its last field current (plus
    the series and separate field), with a fifth more: a machine still above
    its load there is looked for further out before it is called a runaway.
    """
    idx = np.arange(circ.n) if idx is None else idx
    xs = circ.occ.last_field_current_a
    top = circ.occ.emf(3 * xs + np.abs(circ.c[idx]) * circ.imax + circ.x0[idx])
    return 1.2 * circ.s[idx] * top + 1.0


def solve_operating_points(circ, loads, idx=None, grid=LOAD_LINE_GRID, window=None, steps=BISECTION_STEPS):
    """Operating points of candidates ``idx`` against ``loads`` (one load each).

    Parameters
    ----------
    circ : Circuit
    loads : sequence of Load, same length as ``idx``
    idx : array of int, optional
        Candidate index for each load (default ``arange(circ.n)``).
    window : (array, array), optional
        Part of the load line to search, as fractions 0..1 of the full span
        (terminal voltage -top..top, or load current -imax..imax at fixed
        voltage). Negative voltages are searched too: a machine that built up
        reversed drives its load backwards.

    Returns
    -------
    list of OperatingPoints
    """
    idx = np.arange(circ.n) if idx is None else np.asarray(idx, int)
    m = len(idx)
    p = candidate_params(circ, idx[:, None])
    v0 = np.array([ld.v0 for ld in loads], float)[:, None]
    k = np.array([ld.slope_ohm for ld in loads], float)[:, None]
    k = np.where(np.abs(k) < LOAD_SLOPE_FLOOR_OHM, 0.0, k)
    cur = np.array([np.nan if ld.current_a is None else ld.current_a for ld in loads], float)[:, None]
    arm = np.array([np.nan if ld.armature_current_a is None else ld.armature_current_a for ld in loads],
                   float)[:, None]
    source = np.array([ld.source for ld in loads], bool)
    fixed_current = np.isfinite(cur)
    fixed_arm = np.isfinite(arm)
    fixed_voltage = ~fixed_current & ~fixed_arm & (k <= 0)
    vtop = voltage_span(circ, idx)[:, None]
    vtop = np.maximum(vtop, np.where(fixed_current | fixed_arm, 0, v0 + 1.0))
    lin = np.linspace(0.0, 1.0, grid)[None, :]
    if window is None:
        t = np.broadcast_to(lin, (m, grid))
    else:
        w0 = np.minimum(np.maximum(np.asarray(window[0], float), 0.0), 1.0)[:, None]
        w1 = np.minimum(np.maximum(np.asarray(window[1], float), 0.0), 1.0)[:, None]
        t = w0 + (w1 - w0) * lin
    # parameter: terminal voltage in [0, vtop], or load current in [-imax, imax]
    by_current = fixed_voltage

    any_arm = bool(fixed_arm.any())

    def point(tt):
        v = np.where(by_current, v0, (2 * tt - 1) * vtop)
        with np.errstate(divide="ignore", invalid="ignore"):
            il = np.where(fixed_current, cur,
                          np.where(by_current, (2 * tt - 1) * circ.imax, (v - v0) / np.where(k > 0, k, 1.0)))
        if any_arm:  # only rows at a given armature current need it
            il = np.where(fixed_arm, _load_current_at_armature_current(p, v, arm), il)
        return v, il

    def resid(tt):
        v, il = point(tt)
        return circuit_residual(circ, p, v, il)

    h = resid(t)
    # a machine still above the load at the top of the span: widen the span (full searches only)
    runaway = np.zeros(m, bool)
    if window is None:
        for _ in range(SPAN_DOUBLINGS):
            up = (h[:, -1] > 0) & ~by_current[:, 0]
            if not up.any():
                break
            vtop = np.where(up[:, None], 2 * vtop, vtop)
            h = resid(t)
        runaway = (h[:, -1] > 0) & ~by_current[:, 0]
    # stable when the residual falls as the parameter rises (V up, or IL up at fixed V)
    sign_change = np.signbit(h[:, :-1]) != np.signbit(h[:, 1:])
    exact = h[:, :-1] == 0
    rows, cols = nonzero_rows_cols(sign_change | exact)
    a = t[rows, cols]; b = t[rows, cols + 1]; fa = h[rows, cols]
    falling = h[rows, cols + 1] < h[rows, cols]
    out = [[] for _ in range(m)]
    ok = True

    def on_rows(sel):
        pr = {kk: vv[sel, 0] if np.ndim(vv) else vv for kk, vv in p.items()}
        vv0, kk_, cc, fc, bc, vt = (v0[sel, 0], k[sel, 0], cur[sel, 0], fixed_current[sel, 0],
                                    by_current[sel, 0], vtop[sel, 0])
        aa, fa_ = arm[sel, 0], fixed_arm[sel, 0]
        arm_rows = bool(fa_.any())
        slope_k = np.where(kk_ > 0, kk_, 1.0)

        def pt_rows(tt):
            v = np.where(bc, vv0, (2 * tt - 1) * vt)
            with np.errstate(divide="ignore", invalid="ignore"):
                il = np.where(fc, cc, np.where(bc, (2 * tt - 1) * circ.imax, (v - vv0) / slope_k))
            if arm_rows:
                il = np.where(fa_, _load_current_at_armature_current(pr, v, aa), il)
            return v, il

        def res_rows(tt):
            v, il = pt_rows(tt)
            return circuit_residual(circ, pr, v, il)
        return pr, pt_rows, res_rows

    # two intersections closer than a grid step: the residual turns towards zero between
    # samples without changing sign; find that extremum and split it if it crosses
    if grid >= 3:
        d1 = h[:, 1:-1] - h[:, :-2]
        d2 = h[:, 2:] - h[:, 1:-1]
        mid = h[:, 1:-1]
        towards = ((mid > 0) & (d1 < 0) & (d2 > 0)) | ((mid < 0) & (d1 > 0) & (d2 < 0))
        quiet = ~sign_change[:, :-1] & ~sign_change[:, 1:] & ~exact[:, :-1] & ~exact[:, 1:]
        er, ec = nonzero_rows_cols(towards & quiet)
        if er.size:
            _, _, res_e = on_rows(er)
            sgn = np.sign(mid[er, ec])
            lo, hi = t[er, ec], t[er, ec + 2]
            g = (np.sqrt(5) - 1) / 2
            c1 = hi - g * (hi - lo); c2 = lo + g * (hi - lo)
            f1 = sgn * res_e(c1); f2 = sgn * res_e(c2)
            for _ in range(EXTREMUM_STEPS):
                left = f1 < f2
                hi = np.where(left, c2, hi); lo = np.where(left, lo, c1)
                nc = np.where(left, hi - g * (hi - lo), lo + g * (hi - lo))
                fn = sgn * res_e(nc)
                c2, f2, c1, f1 = (np.where(left, c1, nc), np.where(left, f1, fn),
                                  np.where(left, nc, c2), np.where(left, fn, f2))
                if np.all(np.minimum(f1, f2) < 0):
                    break
            tm = np.where(f1 < f2, c1, c2)
            fm = sgn * np.minimum(f1, f2)
            cross = np.sign(fm) == -sgn
            if cross.any():
                er, ec, tm, fm, sgn = er[cross], ec[cross], tm[cross], fm[cross], sgn[cross]
                ha = h[er, ec]
                rows = np.concatenate([rows, er, er]); cols = np.concatenate([cols, ec, ec])
                a = np.concatenate([a, t[er, ec], tm]); b = np.concatenate([b, tm, t[er, ec + 2]])
                fa = np.concatenate([fa, ha, fm])
                falling = np.concatenate([falling, ha > 0, fm > 0])
    beyond = np.zeros(m, bool)
    if rows.size:
        pr, pt_rows, res_rows = on_rows(rows)
        root = refine_bracketed_roots(res_rows, a, b, fa, steps)
        v, il = pt_rows(root)
        st = machine_state(circ, pr, v, il)
        scale = 1e-6 * np.maximum(1.0, np.abs(v))
        good = (np.abs(st["h"]) <= np.maximum(1e-6, scale)) & drive_settled(st)
        ok = bool(np.all(good))
        inside = np.abs(st["armature_current_a"]) <= circ.imax * (1 + 1e-9)
        ext = circ.occ.extrapolated(st["x"])
        rev = st["generated_emf_v"] < 0
        # the highest stable point of normal polarity outside the current span: the machine runs into it
        top_v = np.full(m, -np.inf)
        np.maximum.at(top_v, rows, np.where(falling & ~rev, v, -np.inf))
        top_in = np.full(m, -np.inf)
        np.maximum.at(top_in, rows, np.where(falling & ~rev & inside, v, -np.inf))
        beyond = np.isfinite(top_v) & (top_v > top_in)
        # each point a dict of Python numbers (columns converted once, the same values as float() of each)
        keep = np.flatnonzero(inside)
        cols = [st[kk][keep].tolist() for kk in POINT_KEYS]
        flags = zip(ext[keep].tolist(), falling[keep].tolist(), rev[keep].tolist(), source[rows[keep]].tolist(),
                    st["h"][keep].tolist(), rows[keep].tolist())
        for vals, (e_, f_, r_, s_, h_, row) in zip(zip(*cols), flags):
            d = dict(zip(POINT_KEYS, vals))
            d.update(extrapolated=e_, stable=f_, reversed=r_, back_feeding=bool(s_ and d["load_current_a"] < 0),
                     residual_v=h_)
            out[row].append(d)
    res = []
    for lst, run_r, beyond_r in zip(out, np.asarray(runaway, bool).tolist(), np.asarray(beyond, bool).tolist()):
        if len(lst) > 1:  # (most loads meet a curve once)
            lst.sort(key=lambda d: -d["terminal_voltage_v"])
            lst = _dedupe(lst)
        if run_r:
            res.append(OperatingPoints(lst, False, RUNAWAY_MESSAGE, True))
        elif beyond_r:
            res.append(OperatingPoints(lst, ok, BEYOND_SPAN_MESSAGE, True))
        else:
            res.append(OperatingPoints(lst, ok, "" if ok else "a root did not reach the residual tolerance"))
    return res


def _load_current_at_armature_current(p, v, ia):
    """Load current [A] at terminal voltage ``v`` [V] that puts ``ia`` [A] in the armature.

    Self-excited: ``Ia = IL + (V + IL Rbr [short shunt]) / Rf``; otherwise ``IL = Ia``.
    """
    self_ex = p["kind"] == 1
    rf = np.where(self_ex, p["rf"], 1.0)
    ish_v = np.where(self_ex, v / rf, 0.0)
    gain = 1.0 + np.where(self_ex & p["short"], p["rbr"] / rf, 0.0)
    return (ia - ish_v) / gain


def _dedupe(lst):
    keep = []
    for d in lst:
        if keep and abs(d["terminal_voltage_v"] - keep[-1]["terminal_voltage_v"]) < 1e-9 and \
                abs(d["load_current_a"] - keep[-1]["load_current_a"]) < 1e-9:
            continue
        keep.append(d)
    return keep


def operating_points(machine, setting, load, drive=None):
    """Every operating point of one setting against one load.

    Parameters
    ----------
    machine : Machine
    setting : Setting
    load : Load
    drive : Drive, optional
        An engine or a motor makes the speed an unknown of each point.

    Returns
    -------
    OperatingPoints
        Each point also carries its speed, shaft power, drive loading,
        efficiency and losses by kind (:data:`DRIVE_POINT_KEYS`).
    """
    circ = build_circuit(machine, [setting], drive)
    ops = solve_operating_points(circ, [load])[0]
    if ops.points:
        v = np.array([q["terminal_voltage_v"] for q in ops.points])
        il = np.array([q["load_current_a"] for q in ops.points])
        keys = drive_point_keys(circ, candidate_params(circ, np.zeros(v.size, int)), v, il)
        for j, q in enumerate(ops.points):
            q.update(_point_at(keys, j))
    return ops


#: Keys of the power flow that curves, points and the search's drive points carry.
DRIVE_POINT_KEYS = ("speed_rpm", "shaft_power_kw", "drive_loading_percent", "efficiency", "losses_w")


def drive_point_keys(circ, p, v, il):
    """:data:`DRIVE_POINT_KEYS` (and ``drive_torque_percent``) at terminal voltage ``v`` and load current ``il``.

    ``losses_w`` is a dict of arrays by kind; ``drive_loading_percent`` is NaN
    for a fixed drive (no rating), ``drive_torque_percent`` NaN unless the
    drive is a motor.
    """
    pf = power_flow(circ, p, v, il)
    drive = None if circ.drive is None else circ.drive.drive
    load, torque = drive_loading(drive, pf["shaft_power_w"], pf["speed_rpm"])
    shape = np.shape(pf["shaft_power_w"])
    return {"speed_rpm": np.broadcast_to(pf["speed_rpm"], shape).astype(float),
            "shaft_power_kw": 1e-3 * pf["shaft_power_w"], "drive_loading_percent": load,
            "efficiency": pf["efficiency"], "losses_w": pf["losses_w"], "drive_torque_percent": torque,
            "exciter_power_w": pf["exciter_power_w"]}


def _num(x):
    x = float(x)
    return x if np.isfinite(x) else None


def _point_at(keys, j):
    """One point's drive keys as plain numbers (None where undefined)."""
    out = {}
    for k, val in keys.items():
        out[k] = {kk: _num(vv[j]) for kk, vv in val.items()} if isinstance(val, dict) else _num(val[j])
    return out


# ---------------------------------------------------------------------------
# external characteristics
# ---------------------------------------------------------------------------

@dataclass
class Characteristic:
    """An external characteristic, from no load along the normal branch.

    Arrays follow the curve; scalar figures are ``None`` when undefined
    within the searched span (10 x rated armature current).
    ``regulation_percent`` is ``(V_no-load - V_full) / V_full``, full load
    being the load current at which the armature carries its rated current.
    ``power`` holds the power flow along the curve (:func:`drive_point_keys`:
    speed, shaft power, drive loading, efficiency, losses by kind; NaN where
    undefined).
    """

    setting: Setting
    points: dict
    no_load_voltage_v: float | None
    short_circuit_current_a: float | None
    max_load_current_a: float | None
    regulation_percent: float | None
    extrapolated: bool
    converged: bool = True
    message: str = ""
    notes: list = field(default_factory=list)
    power: dict = field(default_factory=dict)
    #: Per point, whether its solve held (the drive's speed settled there); None: every point did.
    settled: object = None

    def point_list(self):
        """Each point as a dict: the curve-point keys, ``extrapolated``, ``converged`` (its solve held)
        and the power flow (:data:`DRIVE_POINT_KEYS`; None where undefined, e.g. efficiency without output)."""
        n = len(self.points["terminal_voltage_v"])
        out = []
        for i in range(n):
            d = {k: (bool(self.points[k][i]) if k == "extrapolated" else float(self.points[k][i]))
                 for k in POINT_KEYS + ("extrapolated",)}
            d["converged"] = True if self.settled is None else bool(self.settled[i])
            d.update(_point_at(self.power, i))
            out.append(d)
        return out


class SlopeRuns:
    """Slope signs of each row of a grid of values and the runs of equal sign, kept as the sign changes.

    A cell's sign is its slope's; flats take the sign before them, leading
    flats the row's first sign, and a row without a slope reads +1. A run is
    a stretch of cells of one sign. Only the cells where the sign changes
    are kept, not tables for every cell: the rows change sign a few times in
    thousands of cells, and a walk reads a few cells. Read as ``runs[r, c]`` (the sign, float) and
    ``runs.lo[r, c]``, ``runs.hi[r, c]`` (first and last cell of the run
    holding cell ``c`` of row ``r``), arrays broadcasting; ``runs.row(r)``
    for one row. With ``rows`` (a mask) only those rows have runs; the
    others read flat, one run of +1.
    """

    def __init__(self, vals, rows=None):
        m, k = vals.shape[0], vals.shape[1] - 1
        self.shape = (m, k)
        self._k, self._first = k, np.ones(m)
        self._starts, self._run_sign = np.zeros(0, int), np.zeros(0)
        if rows is not None and not rows.any():
            self.lo, self.hi = _RunEnd(self, 0), _RunEnd(self, 1)
            return
        full = np.arange(m) if rows is None else np.flatnonzero(rows)
        merged = np.diff(vals if rows is None else vals[rows], axis=1)
        np.sign(merged, out=merged)
        flat = (merged == 0).any(axis=1)
        if flat.any():
            # flats take the sign before them (leading ones the first sign; a row of flats +1)
            d = merged[flat]
            nz = d != 0
            last = np.maximum.accumulate(np.where(nz, np.arange(k), -1), axis=1)
            d = np.take_along_axis(d, np.where(last < 0, np.argmax(nz, axis=1)[:, None], last), axis=1)
            d[~nz.any(axis=1)] = 1.0
            merged[flat] = d
        # a run starts where the sign differs from the cell before (a NaN differs even from itself)
        er, ec = nonzero_rows_cols(merged[:, 1:] != merged[:, :-1])
        self._first[full] = merged[:, 0]
        self._starts, self._run_sign = full[er] * k + ec + 1, merged[er, ec + 1]
        self.lo, self.hi = _RunEnd(self, 0), _RunEnd(self, 1)

    def _run_index(self, r, c):
        """Per cell: the index of the last run start at or before it (any row), whether that start is in
        the cell's row (else the cell lies in its row's first run), and the row's first flat index.
        (Only with run starts: the readers answer a row without any themselves.)"""
        base = r * self._k
        i = np.searchsorted(self._starts, base + c, side="right") - 1
        mine = (i >= 0) & (self._starts[np.maximum(i, 0)] >= base)
        return i, mine, base

    def __getitem__(self, rc):
        r, c = (np.asarray(x) for x in rc)
        if not self._starts.size:
            return self._first[r] + 0 * c
        i, mine, _ = self._run_index(r, c)
        return np.where(mine, self._run_sign[np.maximum(i, 0)], self._first[r])

    def bounds(self, r, c):
        """First and last cell of the run holding cell ``c`` of row ``r``."""
        r, c = np.asarray(r), np.asarray(c)
        k, st = self._k, self._starts
        if not st.size:
            z = np.zeros(np.broadcast_shapes(r.shape, c.shape), int)
            return z, z + (k - 1)
        i, mine, base = self._run_index(r, c)
        lo = np.where(mine, st[np.maximum(i, 0)] - base, 0)
        # the next start after the cell, if it is in the same row
        nxt = st[np.minimum(i + 1, st.size - 1)]
        hi = np.where((i + 1 < st.size) & (nxt < base + k), nxt - base - 1, k - 1)
        return lo, hi

    def row(self, r):
        """Row ``r`` as :func:`_walk` reads it: ``[c]`` the sign, ``(c)`` the run, ``size``."""
        return _OneRow(self, int(r))


class _RunEnd:
    """``SlopeRuns.lo`` / ``.hi``: one end of the runs, read as ``[r, c]``."""

    def __init__(self, runs, end):
        self.runs, self.end = runs, end

    def __getitem__(self, rc):
        return self.runs.bounds(*rc)[self.end]


class _OneRow:
    """One row of :class:`SlopeRuns` as plain lists (a walk of one curve reads it a cell at a time)."""

    def __init__(self, runs, r):
        k = self.size = runs.shape[1]
        a, b = np.searchsorted(runs._starts, [r * k, (r + 1) * k])
        self._starts = (runs._starts[a:b] - r * k).tolist()
        self._signs = [float(runs._first[r])] + runs._run_sign[a:b].tolist()

    def __getitem__(self, c):
        return self._signs[bisect.bisect_right(self._starts, c)]

    def __call__(self, cell):
        i = bisect.bisect_right(self._starts, cell)
        return (self._starts[i - 1] if i > 0 else 0), (self._starts[i] - 1 if i < len(self._starts) else self.size - 1)


def _grids(circ):
    occ = circ.occ
    xl = occ.last_field_current_a
    span = 3 * xl + np.max(np.abs(circ.c)) * circ.imax + float(circ.ar.mmf(circ.imax)) / circ.nsh \
        + np.max(circ.x0)
    xg = np.unique(np.concatenate([np.linspace(-span, span, 2049), occ.knots()]))
    ig = np.unique(np.concatenate([np.linspace(0, circ.ir, 9),
                                   np.geomspace(circ.ir, circ.imax, 1200),
                                   circ.ar.knots()[circ.ar.knots() < circ.imax]]))
    return xg, ig


def _short_factor(p):
    """``1 - c`` for a short shunt (its series winding carries IL = Ia - Ish), 1 otherwise.

    The circuit is written ``N(u) = L(Ia)`` with both sides multiplied by this
    factor rather than divided by it, so a series winding of as many turns as
    the shunt's (factor 0) or more (negative) needs no special case.
    """
    return 1.0 - p["c"] * p["short"]


def _field_on_side(u, sign):
    """``max(u, 0)`` where ``sign > 0``, else ``min(u, 0)`` (one side when ``sign`` is a number)."""
    if isinstance(sign, float):
        return np.maximum(u, 0.0) if sign > 0 else np.minimum(u, 0.0)
    return np.where(np.asarray(sign) > 0, np.maximum(u, 0.0), np.minimum(u, 0.0))


def _n_fun(circ, p, u, sign=1.0):
    """``N(u) = f s E(x) - rf u`` of the self-excited form on the side ``sign`` of the windings' field.

    ``f`` is :func:`_short_factor`; ``u = x_w - sign F_ar/N_sh``; where
    ``sign x_w >= 0`` the net field is ``x = max(u, 0)`` (sign +1) or
    ``min(u, 0)`` (sign -1): armature reaction brings the field to zero at
    most (design note).
    """
    x = _field_on_side(u, sign)
    return _short_factor(p) * p["s"] * circ.occ.emf(x) - p["rf"] * u


def _l_fun(circ, p, ia, sign=1.0):
    """``L(Ia) = f (Ia Rl + Vb(Ia)) + rf (sign F_ar/N_sh - c Ia)``: the other side of ``N(u) = L(Ia)``."""
    rl = np.where(p["branch"] == 1, p["ra"] + p["rbr"], p["ra"])
    far = circ.ar.mmf(ia) / circ.nsh
    return _short_factor(p) * (ia * rl + brush_drop(ia, circ.vb, circ.ir)) + p["rf"] * (sign * far - p["c"] * ia)


def _state_from_x_ia(circ, p, u, ia, sign=1.0):
    """Terminal quantities of a self-excited candidate at (u, Ia) on the side ``sign``."""
    far = circ.ar.mmf(ia) / circ.nsh
    x = _field_on_side(u, sign)
    # the short shunt's field sits across the armature: Ish Rf = E - Ia Ra - Vb
    # (the mmf balance would divide by 1 - c, zero for equal turns)
    arm_v = p["s"] * circ.occ.emf(x) - ia * p["ra"] - brush_drop(ia, circ.vb, circ.ir)
    ish = np.where(p["short"], arm_v / p["rf"], u + sign * far - p["c"] * ia)
    il = ia - ish
    v = np.where(p["short"], ish * p["rf"] - il * p["rbr"], ish * p["rf"])
    return v, il


def _field_reversal(circ, idx):
    """Where a differential candidate's windings' field passes through zero on its curve.

    There ``x_w = 0``, so ``x = 0`` and ``s E_r = B(Ia)`` with
    ``f B(Ia) = f (Ia Rl + Vb(Ia)) - rf c Ia`` (``f`` the short-shunt factor), rising in ``Ia`` when ``c < 0``: one
    root. Returns ``Ia`` [A] (NaN where the field does not reverse within the
    searched span) and ``F_ar/N_sh`` there.
    """
    ia = np.full(idx.size, np.nan)
    diff = idx[circ.c[idx] < 0]
    if circ.occ.residual_v > 0 and diff.size:
        def balance(rows):
            p = candidate_params(circ, rows)
            a0 = p["s"] * circ.occ.residual_v
            return lambda x: _l_fun(circ, p, x, 1.0) - p["rf"] * circ.ar.mmf(x) / circ.nsh - _short_factor(p) * a0

        reverses = balance(diff)(np.full(diff.size, circ.imax)) > 0
        root = np.full(diff.size, np.nan)
        r = np.flatnonzero(reverses)
        if r.size:
            # only the rows whose field reverses within the span (each row's root is its own)
            b = balance(diff[r])
            lo = np.zeros(r.size)
            root[r] = refine_bracketed_roots(b, lo, np.full(r.size, circ.imax), b(lo), 60)
        ia[circ.c[idx] < 0] = root
    return ia, np.where(np.isfinite(ia), circ.ar.mmf(np.nan_to_num(ia)) / circ.nsh, np.nan)


def _start_cell(grid, at, direction):
    """Grid cell holding ``at`` on the side the walk moves to (``direction`` +1 up, -1 down): one of :func:`start_cells`."""
    return int(start_cells(grid, at, direction))


def _walk(circ, i, xg, ig, ng, lg, sign, lam, n_cell, l_cell, dl, stop_at=None, samples=48, runs=None, kept=None):
    """Walk ``N(u) = L(Ia)`` of one side from ``lam`` in cells ``n_cell``, ``l_cell``, Ia moving ``dl``.

    ``stop_at = (ia, u, lam)``: a point of the curve where the walk must end
    (the windings' field passes zero there). Returns the segments
    ``(lam_a, lam_b, n_lo, n_hi, l_lo, l_hi, sign)``, a note, and the Ia
    direction when the walk reached ``stop_at`` (else None). ``runs = (ng's,
    lg's)`` rows of :class:`SlopeRuns` (``[c]`` a cell's slope sign, ``(c)``
    its run). ``kept``: a list that receives each segment's samples ``(lam,
    x, Ia, V, IL)`` as the walk computes them.
    """
    sn, sl = runs
    n_lo, n_hi = sn(n_cell)
    l_lo, l_hi = sl(l_cell)
    dlam = int(sl[l_lo]) * dl
    dn = dlam * int(sn[n_lo])
    segs = []
    note = ""
    p1 = candidate_params(circ, np.array([i]))
    for _ in range(60):
        e_l = l_hi + 1 if dl > 0 else l_lo
        e_n = n_hi + 1 if dn > 0 else n_lo
        lam_l, lam_n = float(lg[e_l]), float(ng[e_n])
        seg_l = abs(lam_l - lam) <= abs(lam_n - lam)
        lam_end = lam_l if seg_l else lam_n
        reached = False
        if stop_at is not None:
            ia_s, u_s, lam_s = stop_at
            tl = 1e-9 * max(1.0, abs(lam), abs(lam_end))
            tu = 1e-9 * max(1.0, abs(u_s))
            reached = (min(lam, lam_end) - tl <= lam_s <= max(lam, lam_end) + tl
                       and xg[n_lo] - tu <= u_s <= xg[n_hi + 1] + tu
                       and ig[l_lo] - 1e-9 * max(1.0, ia_s) <= ia_s <= ig[l_hi + 1] + 1e-9 * max(1.0, ia_s))
            if reached:
                lam_end = lam_s
        segs.append((lam, lam_end, n_lo, n_hi, l_lo, l_hi, sign))
        # stop once the polyline has reached zero voltage
        lam_p = np.linspace(segs[-1][0], segs[-1][1], samples)
        x_a, ia_a = _invert_approx(xg, ng, ig, lg, segs[-1], lam_p)
        v_a, il_a = _state_from_x_ia(circ, p1, x_a, ia_a, sign)
        if kept is not None:
            kept.append((lam_p, x_a, ia_a, v_a, il_a))
        if np.any(v_a <= 0):
            break
        if reached:
            return segs, "", dl
        lam = lam_end
        if seg_l:
            nxt = e_l if dl > 0 else e_l - 1
            if nxt < 0 or nxt >= sl.size:
                if dl > 0:
                    note = "the curve reaches the searched current span"
                break
            l_lo, l_hi = sl(nxt)
            dlam, dn = -dlam, -dn
        else:
            nxt = e_n if dn > 0 else e_n - 1
            if nxt < 0 or nxt >= sn.size:
                note = "the curve reaches the searched field span"
                break
            n_lo, n_hi = sn(nxt)
            dlam, dl = -dlam, -dl
    return segs, note, None


def no_load_cells(circ, cand, ng, xg):
    """Grid cell of each curve's built-up no-load point, where its walk starts (-1 where none), and why none.

    ``ng`` holds ``N`` on ``xg`` of candidates ``cand``, a row each. The
    stable no-load root is the highest ``x`` where ``N`` crosses zero
    downward; a curve whose ``N`` is still above zero at the grid's end runs
    away past the measured curve.
    """
    runaway = ng[:, -1] > 0
    down = (ng[:, :-1] >= 0) & (ng[:, 1:] < 0)
    first = down & (xg[:-1] >= -1e-12)[None, :]
    k = down.shape[1]
    cell = np.where(first.any(axis=1), k - 1 - np.argmax(first[:, ::-1], axis=1), -1)
    # N falls steadily: its one root (Ia = 0, the series winding opposing) lies at x <= 0
    alone = (cell < 0) & circ.short[cand] & (circ.c[cand] >= 1) & down.any(axis=1)
    cell = np.where(alone, k - 1 - np.argmax(down[:, ::-1], axis=1), cell)
    cell = np.where(runaway, -1, cell)
    why = [CURVE_RUNAWAY_NOTE if r else (NO_BUILD_UP_NOTE if c < 0 else "") for r, c in zip(runaway, cell)]
    return cell, why


def _trace_self_excited(circ, i, xg, ig, fns, reversal=(np.nan, np.nan), samples=48, kept=None):
    """Walk the curve ``N(u) = L(Ia)`` of candidate ``i`` from Ia = 0.

    ``fns[sign] = (N on xg, L on ig, their SlopeRuns rows)`` for either side
    of the windings' field; the walk starts on the positive side at the built-up no-load
    point and, where the field passes zero (``reversal = (Ia, F_ar/N_sh)``,
    differential connections), goes on along the negative side. Returns a
    list of segments ``(lam_a, lam_b, n_lo, n_hi, l_lo, l_hi, sign)`` and a
    note when the walk ended early. ``kept`` receives each segment's samples (see :func:`_walk`).
    """
    ng, lg, runs_p = fns[1]
    ngm, lgm, runs_m = fns[-1]
    cell, note = no_load_cells(circ, np.array([i]), ng[None, :], xg)
    if note[0]:
        return [], note[0]
    ia_r, far_r = reversal
    stop_at = None
    if np.isfinite(ia_r):
        p1 = candidate_params(circ, np.array([i]))
        stop_at = (float(ia_r), -float(far_r), float(_l_fun(circ, p1, np.array([ia_r]), 1.0)[0]))
    segs, note, dl = _walk(circ, i, xg, ig, ng, lg, 1.0, float(lg[0]), int(cell[0]), 0, 1, stop_at, samples,
                           runs_p, kept)
    if dl is None:
        return segs, note
    # the field has passed zero: on along the negative side from the same point. Through the zone
    # where armature reaction holds the net field at zero, x_w = (s E_r - B(Ia)) / g falls only as Ia
    # rises, so Ia goes on rising; with no such zone (no reaction) the curve turns a corner there and
    # goes on into negative field, u = x_w + F_ar/N_sh falling, Ia whichever way that needs.
    lam = float(_l_fun(circ, p1, np.array([ia_r]), -1.0)[0])
    sn, sl = runs_m
    if p1["rf"][0] * far_r > 1e-12 * max(1.0, abs(lam)):
        dl = 1
        l_cell = _start_cell(ig, ia_r, dl)
        dlam = int(sl[l_cell]) * dl
        n_cell = _start_cell(xg, far_r, 1)
        if dlam * int(sn[n_cell]) < 0:
            n_cell = _start_cell(xg, far_r, -1)
    else:
        n_cell = _start_cell(xg, far_r, -1)
        dlam = -int(sn[n_cell])
        dl = dlam * int(sl[_start_cell(ig, ia_r, 1)]) or 1
        l_cell = _start_cell(ig, ia_r, dl)
    more, note, _ = _walk(circ, i, xg, ig, ngm, lgm, -1.0, lam, n_cell, l_cell, dl, None, samples, runs_m, kept)
    return segs + more, note


#: From this many self-excited curves the walks go in lock-step, all curves a segment at a time;
#: fewer go one by one. Measured on the charging set: a lock-step walk's fixed numpy cost per
#: step makes 2-8 curves a third slower, 16 about even, 650 curves (the bench grid) twice as fast.
LOCKSTEP_MIN_CURVES = 24


def run_position(vals, rows, first, last, target, right=False):
    """Bisection in many monotone runs at once.

    ``vals[rows, first..last]`` (grid indices, both ends included) is monotone
    for each element; read in its rising order, returns how many of its
    values lie below ``target`` (``right=False``, as ``searchsorted`` side
    "left") or at or below it (``right=True``), and whether the run rises
    (its last value not below its first).
    """
    rising = ~(vals[rows, last] < vals[rows, first])
    n = last - first + 1
    shape = np.broadcast_shapes(np.shape(target), np.shape(n), np.shape(rows))
    flat = np.ascontiguousarray(vals).reshape(-1)
    # each run read in its rising order: flat index origin + stride * k of its k-th value
    origin = np.broadcast_to(rows * vals.shape[1] + np.where(rising, first, last), shape)
    stride = np.broadcast_to(np.where(rising, 1, -1), shape)
    n = np.broadcast_to(n, shape)
    pos = np.zeros(shape, int)
    step = 1 << (int(np.max(n)).bit_length() - 1) if np.size(n) else 0
    # binary lifting: add each power of two, largest first, while the value before stays below the target
    while step:
        nxt = pos + step
        y = flat.take(origin + stride * (np.minimum(nxt, n) - 1))
        pos += step * ((nxt <= n) & ((y <= target) if right else (y < target)))
        step >>= 1
    return pos, rising


def run_interp(grid, vals, rows, first, last, target):
    """``np.interp(target, run, grid[run])`` on monotone runs of ``vals`` (see :func:`run_position`), many at once."""
    count, rising = run_position(vals, rows, first, last, target, right=True)
    n = last - first + 1
    j = count - 1
    jj = np.minimum(np.maximum(j, 0), n - 2)
    g0 = np.where(rising, first + jj, last - jj)
    g1 = np.where(rising, g0 + 1, g0 - 1)
    y0, y1 = vals[rows, g0], vals[rows, g1]
    x0, x1 = grid[g0], grid[g1]
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (x1 - x0) / (y1 - y0)
        out = slope * (target - y0) + x0
        # as np.interp: from the far end where the near one gives NaN, the cell's value where flat
        out = np.where(np.isnan(out), slope * (target - y1) + x1, out)
    out = np.where(np.isnan(out) & (x0 == x1), x0, out)
    out = np.where(y0 == target, x0, out)
    out = np.where(j < 0, grid[np.where(rising, first, last)], out)
    return np.where(j >= n - 1, grid[np.where(rising, last, first)], out)


def run_cell(grid, vals, rows, first, last, target):
    """Bracketing grid values of ``target`` on monotone runs of ``vals``, many at once (as :func:`_cells`)."""
    count, rising = run_position(vals, rows, first, last, target)
    n = last - first + 1
    jj = np.minimum(np.maximum(count, 1), n - 1)
    ga = np.where(rising, first + jj - 1, last - jj + 1)
    gb = np.where(rising, first + jj, last - jj)
    return grid[ga], grid[gb]


def _walk_lockstep(circ, cand, r, xg, ig, ng, lg, runs, sign, lam, n_cell, l_cell, dl, active, stop=None,
                   samples=48):
    """:func:`_walk` of many curves at once, a segment per step.

    ``cand`` the candidates, ``r`` their rows of ``ng``/``lg`` (``N`` and
    ``L`` on the side ``sign``) and of the run tables ``runs = (sn, sl, (nlo,
    nhi), (llo, lhi))`` (:class:`SlopeRuns` and its ends);
    ``lam``, ``n_cell``, ``l_cell``, ``dl`` where each walk starts; ``active``
    the curves that walk; ``stop = (ia, u, lam)`` where a curve must end (NaN
    for none). Returns the steps as a list of ``(active, n_lo, n_hi, l_lo,
    l_hi, lam, V, IL)`` (``lam``, ``V``, ``IL`` the segment's samples, rows of
    ``samples``), a note code per curve (0 none, 1 the current span reached,
    2 the field span reached) and the curves that reached their stop.
    """
    sn, sl, (nlo, nhi), (llo, lhi) = runs
    p = candidate_params(circ, cand[:, None])
    rr = r[:, None]
    lam = np.asarray(lam, float).copy()
    n_lo, n_hi = nlo[r, n_cell], nhi[r, n_cell]
    l_lo, l_hi = llo[r, l_cell], lhi[r, l_cell]
    dlam = sl[r, l_lo].astype(int) * dl
    dn = dlam * sn[r, n_lo].astype(int)
    note = np.zeros(r.size, int)
    reached_all = np.zeros(r.size, bool)
    steps = []
    for _ in range(60):
        if not active.any():
            break
        e_l = np.where(dl > 0, l_hi + 1, l_lo)
        e_n = np.where(dn > 0, n_hi + 1, n_lo)
        lam_l, lam_n = lg[r, e_l], ng[r, e_n]
        seg_l = np.abs(lam_l - lam) <= np.abs(lam_n - lam)
        lam_end = np.where(seg_l, lam_l, lam_n)
        reached = np.zeros(r.size, bool)
        if stop is not None:
            ia_s, u_s, lam_s = stop
            with np.errstate(invalid="ignore"):
                tl = 1e-9 * np.maximum(np.maximum(1.0, np.abs(lam)), np.abs(lam_end))
                tu = 1e-9 * np.maximum(1.0, np.abs(u_s))
                ti = 1e-9 * np.maximum(1.0, ia_s)
                reached = (active & (np.minimum(lam, lam_end) - tl <= lam_s) & (lam_s <= np.maximum(lam, lam_end) + tl)
                           & (xg[n_lo] - tu <= u_s) & (u_s <= xg[n_hi + 1] + tu)
                           & (ig[l_lo] - ti <= ia_s) & (ia_s <= ig[l_hi + 1] + ti))
            lam_end = np.where(reached, lam_s, lam_end)
        lam_p = np.linspace(lam, lam_end, samples, axis=1)
        x_a = run_interp(xg, ng, rr, n_lo[:, None], n_hi[:, None] + 1, lam_p)
        ia_a = run_interp(ig, lg, rr, l_lo[:, None], l_hi[:, None] + 1, lam_p)
        v_a, il_a = _state_from_x_ia(circ, p, x_a, ia_a, sign)
        steps.append((active.copy(), n_lo, n_hi, l_lo, l_hi, lam_p, v_a, il_a))
        # stop once the polyline has reached zero voltage, or the stop, or the walk leaves the grid
        go = active & ~np.any(v_a <= 0, axis=1)
        reached_all |= go & reached
        go &= ~reached
        lam = np.where(go, lam_end, lam)
        nxt_l = np.where(dl > 0, e_l, e_l - 1)
        nxt_n = np.where(dn > 0, e_n, e_n - 1)
        out_l = (nxt_l < 0) | (nxt_l >= sl.shape[1])
        out_n = (nxt_n < 0) | (nxt_n >= sn.shape[1])
        note = np.where(go & seg_l & out_l & (dl > 0), 1, note)
        note = np.where(go & ~seg_l & out_n, 2, note)
        mv_l = go & seg_l & ~out_l
        mv_n = go & ~seg_l & ~out_n
        cl = np.minimum(np.maximum(nxt_l, 0), sl.shape[1] - 1)
        cn = np.minimum(np.maximum(nxt_n, 0), sn.shape[1] - 1)
        l_lo, l_hi = np.where(mv_l, llo[r, cl], l_lo), np.where(mv_l, lhi[r, cl], l_hi)
        n_lo, n_hi = np.where(mv_n, nlo[r, cn], n_lo), np.where(mv_n, nhi[r, cn], n_hi)
        dlam = np.where(mv_l | mv_n, -dlam, dlam)
        dn = np.where(mv_l, -dn, dn)
        dl = np.where(mv_n, -dl, dl)
        active = mv_l | mv_n
    return steps, note, reached_all


def start_cells(grid, at, direction):
    """Grid cell holding each ``at`` on the side its walk moves to (``direction`` +1 up, -1 down)."""
    k = np.where(direction > 0, np.searchsorted(grid, at, side="right"), np.searchsorted(grid, at, side="left")) - 1
    return np.minimum(np.maximum(k, 0), grid.size - 2)


WALK_NOTES = ("", "the curve reaches the searched current span", "the curve reaches the searched field span")


def _trace_lockstep(circ, slf, rows, xg, ig, sides, tables, reversal, points, samples=48):
    """The curves of candidates ``slf[rows]`` traced in lock-step.

    The same steps as :func:`_trace_self_excited` and the sampling in
    :func:`characteristics_of`, over all curves at once. ``sides[sign] = (N on
    xg, L on ig)`` and ``tables[sign]`` its run tables, rows as ``slf``;
    ``reversal = (Ia, F_ar/N_sh)`` where a differential curve's field passes
    zero (see :func:`_field_reversal`). Returns the picked points ``(cand,
    lam, xa, xb, ia, ib, sign)`` (brackets of ``N(u) = lam`` and ``L(Ia) =
    lam`` on the side ``sign``), a note per candidate and the candidates
    traced to zero volts.
    """
    notes, at_zero = {}, set()
    if rows.size == 0:
        return None, notes, at_zero
    ngp, lgp = sides[1.0]
    cell, why = no_load_cells(circ, slf[rows], ngp[rows], xg)
    for q in np.flatnonzero(cell < 0):
        notes[int(slf[rows[q]])] = why[q]
    ok = cell >= 0
    walk, cell = rows[ok], cell[ok]
    if walk.size == 0:
        return None, notes, at_zero
    cand = slf[walk]
    nw = walk.size
    ia_r, far_r = reversal[0][walk], reversal[1][walk]
    rev = np.isfinite(ia_r)
    ia0, far0 = np.nan_to_num(ia_r), np.nan_to_num(far_r)
    p = candidate_params(circ, cand)
    stop = None
    if rev.any():
        stop = (ia_r, -far_r, np.where(rev, _l_fun(circ, p, ia0, 1.0), np.nan))
    one = np.ones(nw, int)
    steps, code, reached = _walk_lockstep(circ, cand, walk, xg, ig, ngp, lgp, tables[1.0], 1.0, lgp[walk, 0],
                                          cell, np.zeros(nw, int), one, np.ones(nw, bool), stop, samples)
    signs = [1.0] * len(steps)
    if reached.any():
        # the field has passed zero: on along the negative side from the same point (as _trace_self_excited)
        ngm, lgm = sides[-1.0]
        sn_m, sl_m = tables[-1.0][:2]
        lam2 = _l_fun(circ, p, ia0, -1.0)
        turn = p["rf"] * far0 > 1e-12 * np.maximum(1.0, np.abs(lam2))
        l_a = start_cells(ig, ia0, one)
        n_a = start_cells(xg, far0, one)
        flip = sl_m[walk, l_a] * sn_m[walk, n_a] < 0
        n_a = np.where(flip, start_cells(xg, far0, -one), n_a)
        n_b = start_cells(xg, far0, -one)
        dl_b = (-sn_m[walk, n_b] * sl_m[walk, start_cells(ig, ia0, one)]).astype(int)
        dl_b = np.where(dl_b == 0, 1, dl_b)
        n2 = np.where(turn, n_a, n_b)
        dl2 = np.where(turn, 1, dl_b)
        l2 = start_cells(ig, ia0, dl2)
        more, code2, _ = _walk_lockstep(circ, cand, walk, xg, ig, ngm, lgm, tables[-1.0], -1.0, lam2, n2, l2,
                                        dl2, reached.copy(), None, samples)
        code = np.where(reached, code2, code)
        steps += more
        signs += [-1.0] * len(more)
    # each curve's steps in order, first (a curve that went on past its field reversal skips steps between)
    held = np.stack([s[0] for s in steps], axis=1)
    order = np.argsort(~held, axis=1, kind="stable")
    nseg = held.sum(axis=1)
    ar = np.arange(nw)[:, None]
    sign_c = np.asarray(signs)[order]
    n_lo, n_hi, l_lo, l_hi = (np.stack([s[k] for s in steps], axis=1)[ar, order] for k in (1, 2, 3, 4))
    lam_all, va, ila = (np.stack([s[k] for s in steps], axis=1)[ar, order].reshape(nw, -1) for k in (5, 6, 7))
    n_valid = nseg * samples
    col = np.arange(lam_all.shape[1])[None, :]
    valid = col < n_valid[:, None]
    # from the first non-negative load current to the first zero voltage
    nonneg = valid & (ila >= 0)
    start = np.where(nonneg.any(axis=1), np.argmax(nonneg, axis=1), 0)
    zero = valid & (va <= 0) & (col >= start[:, None])
    has_neg = zero.any(axis=1)
    stop = np.where(has_neg, np.argmax(zero, axis=1), n_valid - 1)
    s0 = np.maximum(start - 1, 0)
    ls = stop - s0 + 1
    q = np.arange(int(ls.max()))[None, :]
    take = s0[:, None] + np.minimum(q, ls[:, None] - 1)
    va_s, il_s, lam_s = va[ar, take], ila[ar, take], lam_all[ar, take]
    sid_s = take // samples
    last = ls - 1
    iw = np.arange(nw)
    cut = has_neg & (ls >= 2)
    cut &= (va_s[iw, np.maximum(last - 1, 0)] > 0) & (sid_s[iw, last] == sid_s[iw, np.maximum(last - 1, 0)])
    if cut.any():
        # end the samples where the polyline reaches zero volts, not past it
        c, e = iw[cut], last[cut]
        v1, v2 = va_s[c, e - 1], va_s[c, e]
        w0 = v1 / (v1 - v2)
        lam_s[c, e] = lam_s[c, e - 1] + w0 * (lam_s[c, e] - lam_s[c, e - 1])
        il_s[c, e] = il_s[c, e - 1] + w0 * (il_s[c, e] - il_s[c, e - 1])
        va_s[c, e] = 0.0
        pad = np.minimum(q, last[:, None])
        va_s, il_s, lam_s = va_s[ar, pad], il_s[ar, pad], lam_s[ar, pad]
    # arclength in per-unit terms (nothing added past each curve's last sample)
    dv = np.diff(va_s, axis=1) / circ.machine.rated_voltage_v
    di = np.diff(il_s, axis=1) / circ.machine.rated_armature_current_a
    arc = np.concatenate([np.zeros((nw, 1)), np.cumsum(np.hypot(dv, di), axis=1)], axis=1)
    target = np.linspace(np.zeros(nw), arc[iw, last], points, axis=1)
    cnt, _ = run_position(arc, ar, np.zeros((nw, 1), int), last[:, None], target, right=True)
    j = np.minimum(np.maximum(cnt - 1, 0), np.maximum(last - 1, 0)[:, None])
    j1 = np.minimum(j + 1, last[:, None])
    # interpolate lambda within the same segment only
    same = sid_s[ar, j1] == sid_s[ar, j]
    a_j, a_1 = arc[ar, j], arc[ar, j1]
    w = np.where(a_1 > a_j, (target - a_j) / np.maximum(a_1 - a_j, 1e-300), 0)
    lam_t = np.where(same, lam_s[ar, j] + w * (lam_s[ar, j1] - lam_s[ar, j]), lam_s[ar, j])
    sid_t = sid_s[ar, j]
    sign_t = sign_c[ar, sid_t]
    xa, xb, ia, ib = (np.empty(lam_t.shape) for _ in range(4))
    for sgn in (1.0, -1.0):
        on = sign_t == sgn
        if on.any():
            ng_s, lg_s = sides[sgn]
            rw, pt = nonzero_rows_cols(on)
            sid = sid_t[rw, pt]
            xa[rw, pt], xb[rw, pt] = run_cell(xg, ng_s, walk[rw], n_lo[rw, sid], n_hi[rw, sid] + 1, lam_t[rw, pt])
            ia[rw, pt], ib[rw, pt] = run_cell(ig, lg_s, walk[rw], l_lo[rw, sid], l_hi[rw, sid] + 1, lam_t[rw, pt])
    for c_, code_, z in zip(cand, code, has_neg):
        notes[int(c_)] = WALK_NOTES[code_]
        if z:
            at_zero.add(int(c_))
    cand_t = np.repeat(cand, points)
    return (cand_t, lam_t.ravel(), xa.ravel(), xb.ravel(), ia.ravel(), ib.ravel(), sign_t.ravel()), notes, at_zero


def _invert_approx(xg, ng, ig, lg, seg, lam):
    n_lo, n_hi, l_lo, l_hi = seg[2:6]
    xs, ns = xg[n_lo:n_hi + 2], ng[n_lo:n_hi + 2]
    is_, ls = ig[l_lo:l_hi + 2], lg[l_lo:l_hi + 2]
    if ns[-1] < ns[0]:
        xs, ns = xs[::-1], ns[::-1]
    if ls[-1] < ls[0]:
        is_, ls = is_[::-1], ls[::-1]
    return np.interp(lam, ns, xs), np.interp(lam, ls, is_)


def _cells(grid_x, grid_y, lo, hi, lam):
    """Bracketing cell ends of ``lam`` on the monotone run lo..hi."""
    xs, ys = grid_x[lo:hi + 2], grid_y[lo:hi + 2]
    if ys[-1] < ys[0]:
        xs, ys = xs[::-1], ys[::-1]
    # (np.minimum/np.maximum: np.clip of integers checks their limits at every call)
    j = np.minimum(np.maximum(np.searchsorted(ys, lam), 1), len(ys) - 1)
    return xs[j - 1], xs[j]


def characteristics(machine, settings, points=400, drive=None):
    """External characteristics of many settings in one call.

    Parameters
    ----------
    machine : Machine
    settings : sequence of Setting
    points : int
        Points along each curve, from no load to zero terminal voltage (or
        the searched span of 10 x rated armature current).
    drive : Drive, optional
        An engine or a motor: the speed follows the load along each curve.

    Returns
    -------
    list of Characteristic
        Each point also carries :data:`DRIVE_POINT_KEYS`.
    """
    circ = build_circuit(machine, settings, drive)
    return characteristics_of(circ, points)


def external_characteristic(machine, setting, points=400, drive=None):
    """External characteristic of one setting; see :func:`characteristics`."""
    return characteristics(machine, [setting], points, drive)[0]


#: Points of the dense armature-current grid on which an explicit curve's end (zero volts) is looked
#: for, from zero to the current span; and the shares of it scanned in turn from its start.
EXPLICIT_SCAN_POINTS = 2001
EXPLICIT_SCAN_PARTS = (1 / 8, 1 / 2)


def characteristics_of(circ, points=400):
    n = circ.n
    # --- explicit connections: parameter Ia from 0 ----------------------
    exp = np.flatnonzero(circ.kind != 1)
    if exp.size:
        ia_dense = np.linspace(0, circ.imax, EXPLICIT_SCAN_POINTS)[None, :]
        # the first dense point at or below zero volts, the grid scanned from its start a part at a time:
        # a curve that ends early needs none of the rest (each point the one the whole grid gives)
        first = np.full(exp.size, -1)
        todo = np.arange(exp.size)
        cuts = [0] + [int(round(f * (EXPLICIT_SCAN_POINTS - 1))) for f in EXPLICIT_SCAN_PARTS] + [EXPLICIT_SCAN_POINTS]
        for a, b in zip(cuts[:-1], cuts[1:]):
            if not todo.size:
                break
            below = terminal_voltage_at_armature_current(circ, candidate_params(circ, exp[todo][:, None]),
                                                         ia_dense[:, a:b]) <= 0
            hit = below.any(axis=1)
            first[todo[hit]] = a + below[hit].argmax(axis=1)
            todo = todo[~hit]
        reaches = first >= 0
        first = np.where(reaches, first, ia_dense.shape[1] - 1)
        ia_end = ia_dense[0, first]
        # exact end: bisection between the bracketing dense points
        lo = ia_dense[0, np.maximum(first - 1, 0)]
        has_zero = reaches & (first > 0)
        ia_zero = np.zeros(exp.size)
        z = np.flatnonzero(has_zero)
        if z.size:
            # only the curves that reach zero volts (each row's root is its own; one with no
            # bracket would take every step)
            pz = candidate_params(circ, exp[z])
            f = lambda ia: terminal_voltage_at_armature_current(circ, pz, ia)  # noqa: E731
            ia_zero[z] = refine_bracketed_roots(f, lo[z], ia_end[z], f(lo[z]))
        ia_end = np.where(has_zero, ia_zero, np.where(reaches, 0.0, circ.imax))
        frac = np.linspace(0, 1, points)[None, :]
        ia = ia_end[:, None] * frac
        curves_exp = (exp, ia, has_zero)
    # --- self-excited: walk N(x) = L(Ia) --------------------------------
    slf = np.flatnonzero(circ.kind == 1)
    seg_note = {}
    at_zero = set()  # self-excited curves traced down to zero volts
    ray_states = {}
    if slf.size and circ.drive is not None:
        # the speed follows the load, so N(x) = L(Ia) no longer separates: trace along rays
        m = circ.machine
        ray_states, seg_note = trace_on_rays(
            lambda rows, v, il: machine_state(circ, candidate_params(circ, rows), v, il), refine_bracketed_roots,
            slf,
            voltage_span(circ, slf), circ.imax, m.rated_voltage_v, m.rated_armature_current_a, points,
            residual_fn=lambda rows, v, il: circuit_residual(circ, candidate_params(circ, rows), v, il))
        slf = slf[:0]
    if slf.size:
        xg, ig = _grids(circ)
        ps = candidate_params(circ, slf[:, None])
        ngp = _n_fun(circ, ps, xg[None, :], 1.0)
        if np.any(ngp[:, -1] > 0):
            # a no-load point beyond the grid: look as far out as the load-line solver before calling it a runaway
            xg = np.concatenate([xg, xg[-1] * np.geomspace(1.0, 2.0 ** SPAN_DOUBLINGS, 257)[1:]])
            ngp = _n_fun(circ, ps, xg[None, :], 1.0)
        lgp = _l_fun(circ, ps, ig[None, :], 1.0)
        ia_rev, far_rev = _field_reversal(circ, slf)
        rev = np.isfinite(ia_rev)
        ngm = np.zeros_like(ngp); lgm = np.zeros_like(lgp)
        if rev.any():
            pr = candidate_params(circ, slf[rev][:, None])
            ngm[rev] = _n_fun(circ, pr, xg[None, :], -1.0)
            lgm[rev] = _l_fun(circ, pr, ig[None, :], -1.0)
        pick_cand, pick_lam, pick_xa, pick_xb, pick_ia, pick_ib, pick_sign = [], [], [], [], [], [], []
        # slope signs and their runs for every row at once (the walks read them cell by cell)
        tables = {}
        for sgn_, (ng_, lg_, where_) in ((1.0, (ngp, lgp, None)), (-1.0, (ngm, lgm, rev))):
            # the negative side is walked only where the field reverses: the other rows read flat (one run)
            tn, tl = SlopeRuns(ng_, where_), SlopeRuns(lg_, where_)
            tables[sgn_] = (tn, tl, (tn.lo, tn.hi), (tl.lo, tl.hi))
        # the curves in lock-step when there are enough of them
        lock = np.full(slf.size, slf.size >= LOCKSTEP_MIN_CURVES)
        picked, lock_notes, lock_zero = _trace_lockstep(circ, slf, np.flatnonzero(lock), xg, ig,
                                                        {1.0: (ngp, lgp), -1.0: (ngm, lgm)}, tables,
                                                        (ia_rev, far_rev), points)
        seg_note.update(lock_notes)
        at_zero |= lock_zero
        if picked is not None:
            for lst, arr in zip((pick_cand, pick_lam, pick_xa, pick_xb, pick_ia, pick_ib, pick_sign), picked):
                lst.append(arr)
        for r, i in enumerate(slf):
            if lock[r]:
                continue
            fns = {}
            for sgn_, (ng_, lg_) in ((1.0, (ngp[r], lgp[r])), (-1.0, (ngm[r], lgm[r]))):
                fns[sgn_] = (ng_, lg_, (tables[sgn_][0].row(r), tables[sgn_][1].row(r)))
            kept = []
            segs, note = _trace_self_excited(circ, i, xg, ig, fns, (ia_rev[r], far_rev[r]), kept=kept)
            if not segs:
                seg_note[i] = note
                continue
            # the polyline's samples, as the walk computed them segment by segment (48 each)
            lam_all = np.concatenate([q[0] for q in kept])
            seg_id = np.repeat(np.arange(len(kept)), [q[0].size for q in kept])
            va = np.concatenate([q[3] for q in kept])
            ila = np.concatenate([q[4] for q in kept])
            # from the first non-negative load current to the first zero voltage
            start = int(np.argmax(ila >= 0)) if np.any(ila >= 0) else 0
            neg = np.flatnonzero(va[start:] <= 0)
            stop = start + int(neg[0]) if neg.size else lam_all.size - 1
            sl = slice(max(start - 1, 0), stop + 1)
            va_s, il_s, lam_s, sid_s = va[sl].copy(), ila[sl].copy(), lam_all[sl].copy(), seg_id[sl]
            if neg.size and va_s.size >= 2 and va_s[-2] > 0 and sid_s[-1] == sid_s[-2]:
                # end the samples where the polyline reaches zero volts, not past it
                w0 = va_s[-2] / (va_s[-2] - va_s[-1])
                lam_s[-1] = lam_s[-2] + w0 * (lam_s[-1] - lam_s[-2])
                il_s[-1] = il_s[-2] + w0 * (il_s[-1] - il_s[-2])
                va_s[-1] = 0.0
            # arclength in per-unit terms
            dv = np.diff(va_s) / circ.machine.rated_voltage_v
            di = np.diff(il_s) / circ.machine.rated_armature_current_a
            arc = np.concatenate([[0], np.cumsum(np.hypot(dv, di))])
            target = np.linspace(0, arc[-1], points)
            j = np.minimum(np.maximum(np.searchsorted(arc, target, side="right") - 1, 0), max(arc.size - 2, 0))
            # interpolate lambda within the same segment only
            same = sid_s[np.minimum(j + 1, sid_s.size - 1)] == sid_s[j]
            w = np.where(arc[np.minimum(j + 1, arc.size - 1)] > arc[j],
                         (target - arc[j]) / np.maximum(arc[np.minimum(j + 1, arc.size - 1)] - arc[j], 1e-300), 0)
            lam_t = np.where(same, lam_s[j] + w * (lam_s[np.minimum(j + 1, lam_s.size - 1)] - lam_s[j]), lam_s[j])
            sid_t = sid_s[j]
            for sid in np.unique(sid_t):
                seg = segs[sid]
                ng_s, lg_s = fns[seg[6]][:2]
                msk = sid_t == sid
                xa_, xb_ = _cells(xg, ng_s, seg[2], seg[3], lam_t[msk])
                ia_, ib_ = _cells(ig, lg_s, seg[4], seg[5], lam_t[msk])
                pick_cand.append(np.full(msk.sum(), i)); pick_lam.append(lam_t[msk])
                pick_xa.append(xa_); pick_xb.append(xb_); pick_ia.append(ia_); pick_ib.append(ib_)
                pick_sign.append(np.full(msk.sum(), seg[6]))
            seg_note[i] = note
            if neg.size:
                at_zero.add(int(i))
        if pick_cand:
            cand = np.concatenate(pick_cand); lam = np.concatenate(pick_lam)
            sg = np.concatenate(pick_sign)
            pc = candidate_params(circ, cand)
            xa, xb = np.concatenate(pick_xa), np.concatenate(pick_xb)
            ia_a, ia_b = np.concatenate(pick_ia), np.concatenate(pick_ib)
            fx = lambda xx: _n_fun(circ, pc, xx, sg) - lam
            x = refine_bracketed_roots(fx, xa, xb, fx(xa), 50)
            fi = lambda ii: _l_fun(circ, pc, ii, sg) - lam
            ia_s = refine_bracketed_roots(fi, ia_a, ia_b, fi(ia_a), 50)
            v_s, il_s = _state_from_x_ia(circ, pc, x, ia_s, sg)
    # --- assemble ---------------------------------------------------------
    states, notes = [None] * n, [""] * n
    if exp.size:
        # every explicit curve in one call (rows of Ia, one per candidate)
        ia_e = curves_exp[1]
        st_e = _explicit_state(circ, candidate_params(circ, np.broadcast_to(exp[:, None], ia_e.shape)), ia_e)
        for r, i in enumerate(exp):
            states[i] = {k: (val[r] if np.ndim(val) == 2 else val) for k, val in st_e.items()}
            notes[i] = "" if curves_exp[2][r] else "terminal voltage stays above zero up to the searched span"
    if slf.size and pick_cand:
        # the samples of every traced curve in one call, split by candidate (they are grouped by candidate)
        order = np.argsort(cand, kind="stable")
        cs = cand[order]
        st_s = machine_state(circ, candidate_params(circ, cs), v_s[order], il_s[order])
        first = np.searchsorted(cs, np.arange(n), side="left")
        last = np.searchsorted(cs, np.arange(n), side="right")
    for i in range(n):
        if circ.kind[i] == 1:
            notes[i] = seg_note.get(i, "")
            if i in ray_states:
                states[i] = ray_states[i]
            elif slf.size and pick_cand and last[i] > first[i]:
                sl_i = slice(first[i], last[i])
                vi = st_s["terminal_voltage_v"][sl_i]
                # the curve ends at zero volts (made exact by finish_curves): nothing past it
                below = np.flatnonzero(vi < 0)
                if below.size:
                    sl_i = slice(first[i], first[i] + below[0] + 1)
                states[i] = {k: (val[sl_i] if np.ndim(val) else val) for k, val in st_s.items()}
    wants_sc = [states[i] is not None and short_circuit_wanted(circ, i, states[i], notes[i], i in at_zero)
                for i in range(n)]
    done = [i for i in range(n) if states[i] is not None]
    stack = CurveStack(states, done)
    ops = _refine_batch(circ, stack, wants_sc)
    folds = _refine_folds(circ, stack)
    result = [None] * n
    for i in range(n):
        if states[i] is None:
            result[i] = Characteristic(circ.settings[i], {k: np.zeros(0) for k in POINT_KEYS + ("extrapolated",)},
                                       None, None, None, None, False, False, notes[i], [notes[i]] if notes[i] else [])
    for i, ch in zip(done, finish_curves(circ, stack, notes, ops, folds, wants_sc)):
        result[i] = ch
    if done:
        # the power flow along every curve in one call, split back by candidate
        sizes = [result[i].points["terminal_voltage_v"].size for i in done]
        rows = np.repeat(np.array(done), sizes)
        v = np.concatenate([result[i].points["terminal_voltage_v"] for i in done])
        il = np.concatenate([result[i].points["load_current_a"] for i in done])
        pr = candidate_params(circ, rows)
        power = drive_point_keys(circ, pr, v, il)
        settled = np.ones(v.size, bool)
        if circ.drive is not None:
            settled = np.asarray(drive_settled(machine_state(circ, pr, v, il)), bool)
        ends = np.cumsum([0] + sizes)
        for i, a, b in zip(done, ends[:-1], ends[1:]):
            ch = result[i]
            ch.power = {k: ({kk: vv[a:b] for kk, vv in val.items()} if isinstance(val, dict) else val[a:b])
                        for k, val in power.items()}
            if circ.drive is not None and b > a and not np.all(settled[a:b]):
                ch.settled = settled[a:b].copy()
                if ch.converged:
                    ch.converged, ch.message = False, "the drive's speed did not settle at a point"
    return result


def short_circuit_wanted(circ, i, state, note, at_zero):
    """Whether a curve's end is its short-circuit point (it reaches zero volts), so the exact
    short-circuit current is looked for; a curve still above zero at the end of the span has none."""
    v = state["terminal_voltage_v"]
    ended_at_zero = v.size > 1 and (at_zero or v[-1] <= 1e-6 * max(1.0, abs(v[0])))
    return bool(v.size > 1 and (np.any(v <= 0) or ended_at_zero or (circ.kind[i] != 1 and "stays above" not in note)))


def fold_corner_knots(circ):
    """Where a curve's load current can turn back at a corner: ``(u_knots, ia_knots)``.

    The net field's knots (those of a linear open-circuit curve, and zero,
    where armature reaction meets the windings' field) [A], and the armature
    current's (the armature-reaction table's and the end of the brush-drop
    ramp) [A]. :func:`_fold_kinks` solves the corners inside a fold's samples;
    :func:`interior_peaks` tells, from the same knots, where it can find one.
    """
    occ = circ.occ
    u_knots = occ.field_current_a if occ.interpolation == "linear" else np.zeros(1)
    return u_knots, np.concatenate([circ.ar.knots(), [circ.ir]])


def _fold_kinks(circ, i, st, j, grid=257):
    """Exact curve points near sample ``j`` where the load current may turn back at a corner.

    The load current along a curve is smooth except where the net field
    crosses a knot of a linear open-circuit curve (or zero, where armature
    reaction meets the windings' field), or the armature current crosses a
    knot of the armature-reaction table or the brush-drop ramp. Returns
    ``[(V, IL)]`` of such points between samples ``j - 1`` and ``j + 1``
    (positive side of the windings' field only).
    """
    if circ.kind[i] != 1:
        return []
    sl = slice(j - 1, j + 2)
    v_s, ia_s = st["terminal_voltage_v"][sl], st["armature_current_a"][sl]
    xw = st["shunt_field_current_a"][sl] + circ.c[i] * st["series_branch_current_a"][sl]
    if np.any(xw < 0):
        return []
    u_s = xw - circ.ar.mmf(ia_s) / circ.nsh
    vlo, vhi = float(v_s.min()), float(v_s.max())
    p1 = candidate_params(circ, np.array([i]))
    u_knots, ia_knots = fold_corner_knots(circ)
    u_knots = u_knots[(u_knots >= u_s.min()) & (u_knots <= u_s.max())]
    ia_knots = ia_knots[(ia_knots >= ia_s.min()) & (ia_knots <= ia_s.max())]
    out = []

    def roots(fun, lo, hi):
        t = np.linspace(lo, hi, grid)
        f = fun(t)
        k = np.flatnonzero((np.signbit(f[:-1]) != np.signbit(f[1:])) | (f[:-1] == 0))
        if not k.size:
            return np.zeros(0)
        return refine_bracketed_roots(fun, t[k], t[k + 1], f[k], 80)

    for uk in u_knots:
        lam = float(_n_fun(circ, p1, np.array([uk]))[0])
        for ia in roots(lambda a: _l_fun(circ, p1, a) - lam, 0.0, circ.imax):
            out.append((uk, ia))
    for ik in ia_knots:
        lam = float(_l_fun(circ, p1, np.array([ik]))[0])
        for u in roots(lambda uu: _n_fun(circ, p1, uu) - lam, float(u_s.min()), float(u_s.max())):
            out.append((u, ik))
    pts = []
    for u, ia in out:
        v, il = _state_from_x_ia(circ, p1, np.array([u]), np.array([ia]))
        if vlo <= v[0] <= vhi:
            pts.append((float(v[0]), float(il[0])))
    return pts


class CurveStack:
    """The samples of curves ``rows`` end to end, for the steps that finish them all at once.

    Curve ``q`` (candidate ``rows[q]``) is ``starts[q]:ends[q]`` of every
    column; :meth:`column` concatenates a key's samples once and keeps them
    (read, never written: a step that puts points in works on a copy).
    """

    def __init__(self, states, rows):
        self.states, self.rows = states, list(rows)
        self.sizes = np.array([np.size(states[i]["terminal_voltage_v"]) for i in self.rows], int)
        self.ends = np.cumsum(self.sizes)
        self.starts = self.ends - self.sizes
        self._columns = {}

    def column(self, key):
        """Every curve's ``key`` samples, end to end."""
        if key not in self._columns:
            self._columns[key] = (np.concatenate([self.states[i][key] for i in self.rows]) if self.rows
                                  else np.zeros(0))
        return self._columns[key]

    def first_true(self, flags):
        """Per curve: the index into the columns of its first sample where ``flags`` holds, -1 where none."""
        hit = np.flatnonzero(flags)
        k = np.searchsorted(hit, self.starts)
        at = hit[np.minimum(k, hit.size - 1)] if hit.size else np.zeros(self.starts.size, int)
        return np.where((k < hit.size) & (at < self.ends), at, -1)

    def first_argmax(self, values):
        """Per curve: the index into the columns of its first largest value (its first NaN if it has
        any, as ``np.argmax``); -1 for a curve without samples."""
        some = self.sizes > 0
        if not some.any():
            return np.full(self.sizes.size, -1)
        top = np.full(self.sizes.size, np.nan)
        top[some] = np.maximum.reduceat(values, self.starts[some])
        t = np.repeat(top, self.sizes)
        return self.first_true((values == t) | (np.isnan(values) & np.isnan(t)))


def interior_peaks(circ, stack):
    """The curves whose load current peaks inside their samples (a fold), found over all curves at once.

    Returns ``(rows, j, may_kink)`` for the curves of ``stack`` (a
    :class:`CurveStack`): those of three samples or more whose first largest
    load current (the first NaN if any, as ``argmax``) is not at an end, its
    sample ``j``, and whether :func:`_fold_kinks` can find a corner there (a
    self-excited curve, the windings' field not below zero at the three
    samples, and a knot of the open-circuit curve or of the armature current
    inside their range; the same numbers it tests). Lists of Python ints and bools.
    """
    j = stack.first_argmax(stack.column("load_current_a")) - stack.starts
    inside = (stack.sizes >= 3) & (j > 0) & (j < stack.sizes - 1)
    r, j = np.flatnonzero(inside), j[inside]
    if not r.size:
        return [], [], []
    at = (stack.starts[r] + j)[:, None] + np.arange(-1, 2)[None, :]
    idx = np.asarray(stack.rows)[r]
    ia = stack.column("armature_current_a")[at]
    xw = stack.column("shunt_field_current_a")[at] + circ.c[idx][:, None] * stack.column("series_branch_current_a")[at]
    u = xw - circ.ar.mmf(ia) / circ.nsh
    u_knots, ia_knots = fold_corner_knots(circ)

    def knot_inside(knots, lo, hi):
        return ((knots[None, :] >= lo[:, None]) & (knots[None, :] <= hi[:, None])).any(axis=1)
    may = ((circ.kind[idx] == 1) & ~(xw < 0).any(axis=1)
           & (knot_inside(u_knots, u.min(axis=1), u.max(axis=1)) | knot_inside(ia_knots, ia.min(axis=1), ia.max(axis=1))))
    return idx.tolist(), j.tolist(), may.tolist()


def _refine_folds(circ, stack, iterations=2):
    """Largest load current where a curve turns back (the breakdown point) [A].

    Near the fold the load current is a smooth function of terminal voltage;
    three exact points at fixed voltage give a parabola whose vertex is the
    next estimate, with the spacing cut eightfold each round. Where the
    curve has a corner there (a knot of a linear curve, see
    :func:`_fold_kinks`) the corner is solved exactly and no parabola is
    fitted across it: the maximum is then exact whatever the sampling.
    """
    cand, vg, ig, dv = [], [], [], []
    fine = {}
    kinks = {}
    rows, peak_at, may_kink = interior_peaks(circ, stack)
    for i, j, maybe in zip(rows, peak_at, may_kink):
        st = stack.states[i]
        il, v = st["load_current_a"], st["terminal_voltage_v"]
        vv, yy = v[j - 1:j + 2], il[j - 1:j + 2]
        spacing = np.ptp(vv)
        kk = _fold_kinks(circ, i, st, j) if maybe else []
        if kk:
            # start from the best exact point, corners included
            kinks[i] = np.array([k[0] for k in kk])
            best = max([(float(a), float(b)) for a, b in zip(vv, yy)] + kk, key=lambda q: q[1])
            cand.append(i); vg.append(best[0]); ig.append(best[1])
            dv.append(max(spacing / 8, 1e-6))
            continue
        # vertex of the parabola IL(V) through the three exact samples (unevenly spaced)
        with np.errstate(all="ignore"):
            a2, a1, _ = np.polyfit(vv - vv[1], yy, 2) if np.ptp(vv) > 0 else (0.0, 0.0, 0.0)
        v0 = vv[1] - a1 / (2 * a2) if a2 < 0 else vv[1]
        peak = yy[1] - a1 ** 2 / (4 * a2) if a2 < 0 else yy[1]
        if not (min(vv) <= v0 <= max(vv)) or not yy[1] <= peak <= yy[1] + np.ptp(yy):
            v0, peak = vv[1], yy[1]
        if spacing <= FOLD_FINE_SPACING * circ.machine.rated_voltage_v:
            fine[i] = float(peak)  # dense samples: the parabola is already exact to O(h^3)
            continue
        cand.append(i); vg.append(v0); ig.append(peak)
        dv.append(max(spacing / 8, 1e-6))
    if not cand:
        return fine
    cand = np.array(cand); vs = np.array(vg, float); il_best = np.array(ig, float); d = np.array(dv, float)
    for _ in range(iterations):
        idx = np.repeat(cand, 3)
        vv = (vs[:, None] + d[:, None] * np.array([-1.0, 0.0, 1.0])[None, :]).ravel()
        guess = np.repeat(il_best, 3)
        span = np.repeat(np.maximum(0.02 * il_best, 2 * d), 3)
        y = load_current_at_voltage_near(circ, idx, vv, guess, span).reshape(-1, 3)
        ok = np.isfinite(y).all(axis=1)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ymax = np.nanmax(np.where(np.isfinite(y), y, -np.inf), axis=1)
            jmax = np.argmax(np.where(np.isfinite(y), y, -np.inf), axis=1)
            den = y[:, 0] - 2 * y[:, 1] + y[:, 2]
            shift = 0.5 * d * (y[:, 0] - y[:, 2]) / den
            peak = y[:, 1] - 0.125 * (y[:, 2] - y[:, 0]) ** 2 / den
        # a parabola only where the curve is smooth there: vertex inside, modest rise, no corner
        rise = np.abs(y[:, 1] - np.fmin(y[:, 0], y[:, 2]))
        corner = np.array([bool(np.any(np.abs(kinks[c] - v_c) < d_c)) if c in kinks else False
                           for c, v_c, d_c in zip(cand, vs, d)], bool)
        smooth = ok & (den < 0) & (np.abs(shift) <= d) & (peak <= ymax + rise) & ~corner
        vs = np.where(smooth, vs + np.where(smooth, shift, 0.0), vs + (jmax - 1) * d)
        il_best = np.where(smooth, np.fmax(peak, ymax), np.where(np.isfinite(ymax), np.fmax(ymax, il_best), il_best))
        d = d / 8
    fine.update({int(i): float(x) for i, x in zip(cand, il_best)})
    return fine


def load_current_at_voltage_near(circ, idx, v, guess, span, grid=33):
    """Load current [A] of candidates ``idx`` at terminal voltage ``v`` [V] within ``2 span`` of ``guess`` [A].

    The window is sampled on ``grid`` points (as :func:`solve_operating_points`
    samples it) and the crossing in the cell nearest the guess refined; a
    window with no crossing goes through :func:`solve_operating_points`, whose
    crossing nearest the guess is taken (NaN where there is none).
    """
    imax = circ.imax
    # the window of solve_operating_points' load-current parameter (2t - 1) imax, t = (IL/imax + 1)/2 +- span/imax
    lo = np.maximum(guess - 2 * span, -imax)
    hi = np.minimum(guess + 2 * span, imax)
    il = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, grid)[None, :]
    h = circuit_residual(circ, candidate_params(circ, idx[:, None]), v[:, None], il)
    cross = (np.signbit(h[:, :-1]) != np.signbit(h[:, 1:])) | (h[:, :-1] == 0)
    mid = 0.5 * (il[:, :-1] + il[:, 1:])
    cell = np.argmin(np.where(cross, np.abs(mid - guess[:, None]), np.inf), axis=1)
    one = cross.any(axis=1)
    y = np.full(idx.size, np.nan)
    if one.any():
        r = np.flatnonzero(one)
        pr = candidate_params(circ, idx[r])
        vr = v[r]
        root = refine_bracketed_roots(lambda x: circuit_residual(circ, pr, vr, x), il[r, cell[r]], il[r, cell[r] + 1],
                                      h[r, cell[r]], 24)
        st = machine_state(circ, pr, vr, root)
        good = (np.abs(st["h"]) <= np.maximum(1e-6, 1e-6 * np.abs(vr))) & drive_settled(st) \
            & (np.abs(st["armature_current_a"]) <= imax * (1 + 1e-9))
        y[r] = np.where(good, root, np.nan)
    rest = np.flatnonzero(np.isnan(y))
    if rest.size:
        t = (guess[rest] / imax + 1) / 2
        loads = [Load(float(x), 0.0, None, "fixed voltage") for x in v[rest]]
        res = solve_operating_points(circ, loads, idx[rest], grid=grid,
                                     window=(t - span[rest] / imax, t + span[rest] / imax), steps=24)
        y[rest] = [min((q["load_current_a"] for q in r_.points), key=lambda q: abs(q - g), default=np.nan)
                   for r_, g in zip(res, guess[rest])]
    return y


#: Grid points across the window (3-4 % of the load line's range, centred on the traced curve's exact
#: samples) in which a characteristic's no-load, short-circuit and full-load points are solved. Cells
#: of a thousandth of the range; two crossings inside one are split by the solver's extremum search.
#: 129 points gave the same points to 8e-12 (relative, 1427 demo curves) and took the grid 10 % longer.
EXACT_POINT_WINDOW_GRID = 33


def _refine_batch(circ, stack, wants_sc=None):
    """Exact no-load, short-circuit and full-load points near the samples of each curve of ``stack``
    (a :class:`CurveStack`).

    Full load: the rated current in the armature (the load current is less
    by the shunt-field current of a self-excited connection). The short
    circuit is looked for only where ``wants_sc[i]`` (the curve reaches zero
    volts: :func:`short_circuit_wanted`); elsewhere its entry stays empty.
    """
    m = circ.machine
    rated = m.rated_armature_current_a
    idx, loads, w0, w1, who = [], [], [], [], []
    vtop = voltage_span(circ, np.arange(circ.n)).tolist()
    rows = stack.rows
    out = {i: [None, None, None] for i in range(circ.n)}
    if rows:
        # every curve's first sample, last sample and first sample at rated armature current (each curve
        # has at least its no-load sample)
        v_all = stack.column("terminal_voltage_v")
        il_last = stack.column("load_current_a")[stack.ends - 1].tolist()
        up = stack.first_true(stack.column("armature_current_a") >= rated)
        has_up = (up >= 0).tolist()
        v_first = v_all[stack.starts].tolist()
        v_up = v_all[np.where(up >= 0, up, stack.starts)].tolist()
    for q, i in enumerate(rows):
        guesses = [(Load.constant_current(0.0), (v_first[q] / vtop[i] + 1) / 2, 0.015)]
        if wants_sc is None or wants_sc[i]:
            guesses.append((Load(0.0, 0.0, None, "short circuit"), (il_last[q] / circ.imax + 1) / 2, 0.02))
        else:
            guesses.append(None)
        if has_up[q]:
            guesses.append((Load.armature_current(rated), (v_up[q] / vtop[i] + 1) / 2, 0.015))
        else:
            guesses.append((Load.armature_current(rated), None, None))
        for k, guess in enumerate(guesses):
            if guess is None:
                continue
            ld, g, half = guess
            idx.append(i); loads.append(ld); who.append((i, k))
            if g is None:
                w0.append(0.0); w1.append(1.0)
            else:
                w0.append(g - half); w1.append(g + half)
    if not idx:
        return _with_empty_points(out)
    # refined to rounding: these points are reported, and their power balance holds only as well as h = 0
    res = solve_operating_points(circ, loads, np.array(idx), grid=EXACT_POINT_WINDOW_GRID,
                                 window=(np.array(w0), np.array(w1)), steps=60)
    retry = []
    for (i, k), r, ld, a, b in zip(who, res, loads, w0, w1):
        out[i][k] = r
        if not r.points and (a > 0.0 or b < 1.0):
            retry.append((i, k, ld))
    if retry:
        res2 = solve_operating_points(circ, [r[2] for r in retry], np.array([r[0] for r in retry]))
        for (i, k, _), r in zip(retry, res2):
            out[i][k] = r
    return _with_empty_points(out)


def _with_empty_points(out):
    """Entries left unsolved (no short circuit looked for, say) as operating points with none."""
    for ops in out.values():
        for k, o in enumerate(ops):
            if o is None:
                ops[k] = OperatingPoints([])
    return out


def terminal_voltage_at_armature_current(circ, p, ia):
    """Terminal voltage [V] at armature current ``ia`` [A] of a connection whose field does not
    depend on the terminal voltage (separate excitation, series)."""
    x = field_after_armature_reaction(p["x0"] * (p["kind"] == 0) + p["c"] * ia, circ.ar.mmf(ia) / circ.nsh)
    rl = p["ra"] + np.where(p["branch"] > 0, p["rbr"], 0.0)
    occ = circ.occ.emf(x)
    drops = ia * rl + brush_drop(ia, circ.vb, circ.ir)
    if circ.drive is None:
        s = p["s"]
    else:
        # no shunt current here: IL = Ia, so the output (s OCC - drops) Ia is linear in the speed
        s = circ.drive.speed_ratio(p, occ * ia, occ * ia, -drops * ia, flags=False)[0]
    return s * occ - drops


def _explicit_state(circ, p, ia):
    v = terminal_voltage_at_armature_current(circ, p, ia)
    return machine_state(circ, p, v, ia)


def finish_curves(circ, stack, notes, ops, folds, wants_sc):
    """Characteristics of the curves of ``stack`` (a :class:`CurveStack`), the exact points put in.

    Each curve's samples hold the :data:`POINT_KEYS` and the field ``x``;
    ``ops[i]`` are its exact no-load, short-circuit and full-load points
    (:func:`_refine_batch`), ``folds`` the refined breakdown currents
    (:func:`_refine_folds`), ``wants_sc[i]`` as :func:`short_circuit_wanted`
    said. All curves' samples are worked in one array (each curve's points
    are its slice of it); only the choice among each curve's few exact points
    is made curve by curve, in Python numbers.
    """
    rows, sizes, starts, ends = stack.rows, stack.sizes, stack.starts, stack.ends
    if not rows:
        return []
    m = circ.machine
    # copies: the exact points are put into them, and each curve keeps its slice
    pts = {k: stack.column(k).astype(float) for k in POINT_KEYS}
    pts["extrapolated"] = circ.occ.extrapolated(stack.column("x"))
    ne = sizes > 0
    # the traced ends, before the exact points replace them
    last = np.maximum(ends - 1, 0)
    v_first = pts["terminal_voltage_v"][starts[ne]].tolist()
    il_first = pts["load_current_a"][starts[ne]].tolist()
    il_last = pts["load_current_a"][last[ne]].tolist()
    at, nl_of, sc_of = {}, [None] * len(rows), [None] * len(rows)
    for q, r in enumerate(np.flatnonzero(ne).tolist()):
        i = rows[r]
        nl_of[r] = nl = _nearest(ops[i][0].points, v_first[q], il_first[q])
        if nl is not None:
            at[int(starts[r])] = nl
        if wants_sc[i]:
            sc_of[r] = cand = _nearest(ops[i][1].points, 0.0, il_last[q])
            if cand is not None:
                at[int(last[r])] = cand  # after the no-load point: a one-point curve ends short-circuited
    if at:
        where = np.fromiter(at, int, len(at))
        for k in POINT_KEYS + ("extrapolated",):
            pts[k][where] = [d[k] for d in at.values()]
    v, ilp, ia = pts["terminal_voltage_v"], pts["load_current_a"], pts["armature_current_a"]
    # per curve: the first largest load current, any point at or below zero volts, any extrapolated
    # point, the first sample at rated armature current
    peak = stack.first_argmax(ilp)
    any_low = stack.first_true(v <= 0) >= 0
    any_ext = stack.first_true(pts["extrapolated"]) >= 0
    c_up = stack.first_true(ia >= m.rated_armature_current_a)
    has_up = c_up >= 0
    # the samples the choices below read, as Python numbers
    peak_il = ilp[np.where(peak >= 0, peak, 0)].tolist() if v.size else [math.nan] * len(rows)
    peak_at = (peak - starts).tolist()
    c_at = np.where(has_up, c_up, 0)
    near = [x.tolist() for x in (v[np.minimum(np.maximum(c_at - 1, starts), v.size - 1)], v[c_at], ilp[c_at])] if v.size else [[]] * 3
    out = []
    for r, i in enumerate(rows):
        a, n_i = int(starts[r]), int(sizes[r])
        note = notes[i]
        sc = sc_of[r]["load_current_a"] if sc_of[r] is not None else None
        imax = None
        if n_i >= 3:
            j = peak_at[r]
            fold = folds.get(i)
            imax = fold if (0 < j < n_i - 1 and fold is not None) else peak_il[r]
        if sc is None and not any_low[r]:
            imax = None if "span" in note else imax
        nl = nl_of[r]
        vnl = nl["terminal_voltage_v"] if nl is not None else None
        reg = None
        if vnl is not None and has_up[r]:
            # full load: the first point along the curve from no load where the armature carries its rated
            # current; the exact point between the samples that bracket it, else the nearest one
            vv = [near[1][r]] if int(c_up[r]) == a else [near[0][r], near[1][r]]
            hi_, lo_ = (max(vv), min(vv)) if not any(x != x for x in vv) else (math.nan, math.nan)
            tol = 1e-9 * max(1.0, abs(hi_))
            between = [q for q in ops[i][2].points if lo_ - tol <= q["terminal_voltage_v"] <= hi_ + tol]
            vr = _nearest(between or ops[i][2].points, near[1][r], near[2][r])
            if vr is not None and vr["terminal_voltage_v"] > 0:
                reg = 100.0 * (vnl - vr["terminal_voltage_v"]) / vr["terminal_voltage_v"]
        conv = all(o.converged for o in ops[i])
        out.append(Characteristic(circ.settings[i], {k: val[a:a + n_i] for k, val in pts.items()}, vnl, sc,
                                  float(imax) if imax is not None else None, reg, bool(any_ext[r]), conv,
                                  "" if conv else "a point did not converge", [note] if note else []))
    return out


def _nearest(points, v, il):
    if not points or v is None:
        return None
    return min(points, key=lambda d: abs(d["terminal_voltage_v"] - v) + abs(d["load_current_a"] - il))


# ---------------------------------------------------------------------------
# self-excitation
# ---------------------------------------------------------------------------

@dataclass
class SelfExcitation:
    """Build-up of the shunt field at no load (design note definitions).

    ``reasons`` say why it does not build up from residual; ``runaway`` (with
    ``notes``) that it builds up past the measured curve, so its no-load
    voltage is unknown (``None``).
    """

    setting: Setting
    field_circuit_resistance_ohm: float
    critical_field_resistance_ohm: float
    critical_speed_rpm: float
    builds_up: bool
    no_load_voltage_v: float | None
    stall_voltage_v: float | None
    reasons: list
    no_load_points: list
    converged: bool = True
    runaway: bool = False
    notes: list = field(default_factory=list)
    residual_voltage_v: float | None = None  # the open-circuit curve at zero field, at this speed [V]

    @property
    def stays_near_residual(self):
        """True when the only stable no-load point is where a build-up from residual stops: flashing the
        field does not raise it (past the critical resistance or below the critical speed)."""
        return (not self.builds_up and not self.runaway and self.stall_voltage_v is not None
                and self.no_load_voltage_v is not None
                and self.no_load_voltage_v <= self.stall_voltage_v + 1e-6 * max(1.0, self.stall_voltage_v))

    @property
    def extrapolated(self):
        """True when the held no-load point needed the OCC beyond its last measured point."""
        return any(p["extrapolated"] for p in self.no_load_points
                   if self.no_load_voltage_v is not None and p["terminal_voltage_v"] == self.no_load_voltage_v)


def critical_field_resistance_ohm(circ, s=None):
    """Critical resistance of the shunt field circuit [ohm] of every row (NaN where not self-excited).

    The air-gap line's slope at the row's speed ratio ``s`` (default its
    own); in a long shunt the series field carries the shunt current at no
    load, so the build-up sees ``Nsh Ish (1 + c)``: a cumulative winding
    raises the critical resistance, a differential one lowers it (``c`` is
    the series field per branch ampere, diverter share and sense included).
    The armature's own few tenths of an ohm in the field loop are left out, as
    the textbook statement leaves them.

    References
    ----------
    Critical field resistance as the slope of the air-gap line: Theraja Vol II
    ch. 28 (from memory); the series field's share in a long shunt from the
    same mmf balance.
    """
    s = circ.s if s is None else s
    aid = 1.0 + np.where(circ.branch == 1, circ.c, 0.0)
    return np.where(circ.kind == 1, s * circ.occ.air_gap_slope() * aid, np.nan)


def self_excitation(machine, rheostat_ohm=None, speed_rpm=None, winding_temperature_c=None):
    """Whether the shunt field builds up, and the voltages it reaches.

    Parameters
    ----------
    machine : Machine
    rheostat_ohm : float, optional
        Field rheostat [ohm]; 0 when omitted.
    speed_rpm : float, optional
        Drive speed [rpm]; rated when omitted.
    winding_temperature_c : float, optional
        Copper temperature [degC]; reference when omitted.

    Returns
    -------
    SelfExcitation
        Critical field resistance: the steepest chord between adjacent
        measured OCC points scaled by speed (the air-gap line); critical speed
        ``n_occ (Rsh(T) + Rrh) / R_crit(n_occ)``; the no-load voltage is the
        highest stable no-load intersection; a build-up from residual stops at
        the lowest one.

    References
    ----------
    Build-up conditions of the self-excited generator (residual magnetism,
    field aiding it, resistance below critical, speed above critical):
    standard textbook statements, e.g. Theraja Vol II ch. 28; Kosow ch. 3.
    """
    st = check_setting(machine, Setting("shunt", rheostat_ohm=rheostat_ohm, speed_rpm=speed_rpm,
                                        winding_temperature_c=winding_temperature_c))
    circ = build_circuit(machine, [st])
    ops = solve_operating_points(circ, [Load.constant_current(0.0)])[0]
    rf = float(circ.rf[0])
    slope = circ.occ.air_gap_slope()
    rcrit = float(circ.s[0] * slope)
    ncrit = float(machine.occ_speed_rpm * rf / slope)
    # the residual magnetism sets the polarity: a build-up rises from zero, never into reverse
    pts = [p for p in ops.points if p["terminal_voltage_v"] >= 0]
    stable = [p for p in pts if p["stable"]]
    # running away, the machine holds no point we can name: its no-load voltage is unknown
    vnl = stable[0]["terminal_voltage_v"] if stable and not ops.runaway else None
    reasons, notes = [], []
    er = circ.occ.residual_v
    if ops.runaway:
        notes.append("the field line never meets the open-circuit curve again: the voltage runs away past the "
                     "last measured point, so no no-load voltage can be given; measure the curve further or add "
                     "field resistance")
    if er <= 0:
        reasons.append("no residual voltage: the field must be flashed from a separate supply before it can build up")
    if rf >= rcrit:
        # the winding alone may be past critical: then no rheostat setting helps, only speed
        room = rcrit - (rf - (st.rheostat_ohm or 0.0))
        cure = (f"set the rheostat below {room:.4g} ohm" if room > 0 else
                f"the shunt winding alone is above it, so only a speed above {ncrit:.5g} rpm builds it up")
        reasons.append(f"field-circuit resistance {rf:.4g} ohm is at or above the critical {rcrit:.4g} ohm at "
                       f"{st.speed_rpm:.5g} rpm: {cure}")
    if st.speed_rpm <= ncrit:
        reasons.append(f"speed {st.speed_rpm:.5g} rpm is at or below the critical {ncrit:.5g} rpm for this field circuit")
    stall = None
    if stable and er > 0:
        low = stable[-1]
        if ops.runaway or (vnl is not None and low["terminal_voltage_v"] < vnl - 1e-6 * max(1.0, vnl)):
            stall = low["terminal_voltage_v"]
            above = [p for p in pts if p["terminal_voltage_v"] > stall and not p["stable"]]
            i1 = low["shunt_field_current_a"]
            i2 = above[-1]["shunt_field_current_a"] if above else float("nan")
            if rf < rcrit:
                reasons.append(f"the field line lies above the curve between {i1:.4g} A and {i2:.4g} A of field "
                               f"current: the build-up stops near {stall:.4g} V; flash the field or lower the resistance")
        elif reasons:
            stall = low["terminal_voltage_v"]
    if er <= 0:
        stall = None
    builds = not reasons
    if builds:
        stall = None
    return SelfExcitation(st, rf, rcrit, ncrit, builds, vnl, stall, reasons, pts,
                          ops.converged or ops.runaway, ops.runaway, notes, float(circ.s[0] * er))


def series_critical_resistance_ohm(machine, series_turns=None, speed_rpm=None, winding_temperature_c=None):
    """Total circuit resistance [ohm] below which a series machine builds up.

    The air-gap slope of the curve in series-field current: the OCC's
    steepest measured chord times ``N_se / N_sh`` and the speed ratio.

    References
    ----------
    Series generator build-up on a closed circuit below its critical
    resistance: standard textbook statement (Theraja Vol II ch. 28).
    """
    st = check_setting(machine, Setting("series", series_turns=series_turns, speed_rpm=speed_rpm,
                                        winding_temperature_c=winding_temperature_c))
    occ = machine.open_circuit_curve
    return float(occ.air_gap_slope() * st.series_turns / machine.shunt_turns_per_pole
                 * st.speed_rpm / machine.occ_speed_rpm)


def series_critical_ratio(machine, setting, load_ohm):
    """Critical over actual circuit resistance of a series machine closed on a resistor (below 1: no build-up).

    The critical resistance is the air-gap slope of the curve per series-branch
    ampere (with a diverter, the share of the branch current its winding
    carries) at the setting's speed; the circuit is the load, the armature and
    the series branch at the setting's temperature, as in
    :func:`series_critical_resistance_ohm` (the brushes' drop is left out: its
    ramp through zero only keeps the equations continuous).

    Parameters
    ----------
    machine : Machine
    setting : Setting
        A series connection.
    load_ohm : float
        The load resistor [ohm].

    References
    ----------
    Series generator build-up on a closed circuit below its critical
    resistance: standard textbook statement (Theraja Vol II ch. 28).
    """
    circ = build_circuit(machine, [setting])
    slope = circ.occ.air_gap_slope() * abs(float(circ.c[0])) * float(circ.s[0])
    circuit = load_ohm + float(circ.ra[0]) + float(circ.rbr[0])
    return slope / circuit if circuit > 0 else float("inf")


#: Grid points along a load curve where :func:`normal_points` looks for crossings, unless told.
NORMAL_POINTS_GRID = 97


def load_curve_points(lo, hi, frac):
    """The load curve's parameter at fractions ``frac`` of ``[lo, hi]``: ``lo + (hi - lo) frac``.

    Every scan of :func:`normal_points` computes its grid points this one
    way (arrays broadcasting), so a scan in parts has the whole grid's
    values bit for bit.
    """
    return lo + (hi - lo) * frac


def normal_points(circ, lo, hi, v_of=None, il_of=None, grid=NORMAL_POINTS_GRID, steps=44, vi_of=None, alike=False,
                  top_share=None, fixed_current=False, rising_line=False):
    """The point each candidate sits at along a load curve: the highest stable intersection.

    The load curve is parameterised by ``t`` in ``[lo, hi]`` (arrays, one per
    candidate): with ``v_of`` the load current is ``t`` and the terminal
    voltage ``v_of(t)`` (a rising load curve such as a battery); with
    ``il_of`` the terminal voltage is ``t`` and the load current ``il_of(t)``
    (e.g. a constant current); with ``vi_of`` both come from ``t``,
    ``(V, IL) = vi_of(t)``, each rising with ``t`` (a battery given by its
    cells' internal voltage). The callables get arrays shaped like
    ``(n, k)`` and must broadcast over candidates.

    Returns
    -------
    dict of arrays
        The curve-point keys, ``x`` (equivalent field current), ``found``
        (bool), ``beyond`` (bool: the machine is still above the load at the
        end of the range, so its highest stable point lies further out or it
        runs away; with ``il_of`` the voltage range is first widened up to
        ``2**SPAN_DOUBLINGS`` times), ``reversed`` (bool: generated EMF
        below zero) and ``converged`` (bool); NaN where no stable point
        exists or it lies beyond the range.

    With ``alike`` the load curve is one function of ``t`` for every
    candidate (the callables do not depend on which row they are given):
    candidates equal in every row parameter and in ``lo``, ``hi`` are then
    solved once. Each row's point is found on its own, so the answers are
    the same bit for bit; a search's dial rows and band ends repeat many.

    With ``top_share`` (a fraction of the grid) the top of the grid is
    scanned first, and the rest only for the rows with no stable crossing
    there: the same grid points and the same bracket, so the same answers
    bit for bit, from fewer evaluations where the points sit high in the
    range (a battery's, parameterised by its internal voltage). The
    callables then also take ``rows``, the candidates of ``t``'s rows
    (``None`` for all). With ``fixed_current`` as well (``il_of`` gives each
    row one load current, whatever the voltage) the top share's blocks of
    grid points where the residual provably stays below zero
    (:func:`residual_below_zero`) are not evaluated: no stable crossing can
    lie there, and the others are evaluated as before. ``rising_line`` does
    the same along a ``v_of`` whose voltage never falls as the current
    rises (a resistor such as a welding cable on a stuck electrode).
    """
    n = circ.n
    lo = np.broadcast_to(np.asarray(lo, float), (n,))
    hi = np.broadcast_to(np.asarray(hi, float), (n,))
    if alike:
        first, inverse = identical_rows(circ, lo, hi)
        if first.size < n:
            r = normal_points(circ.subset(first), lo[first], hi[first], v_of, il_of, grid, steps, vi_of,
                              top_share=top_share, fixed_current=fixed_current, rising_line=rising_line)
            return {k: v[inverse] for k, v in r.items()}
    lin = np.linspace(0.0, 1.0, grid)[None, :]

    def vi(tt, rows=None):
        more = {} if rows is None else {"rows": rows}
        if vi_of is not None:
            return vi_of(tt, **more)
        if v_of is not None:
            return v_of(tt, **more), tt
        return tt, il_of(tt, **more)

    rows = np.arange(n)
    if top_share is not None:
        below = None
        if fixed_current and il_of is not None and bound_holds(circ):
            il_row = np.asarray(il_of(np.zeros((n, 1))), float)[:, 0]
            below = lambda r, va, vb: residual_below_zero(circ, r, va, vb, il_row[r])  # noqa: E731
        elif rising_line and v_of is not None and bound_holds(circ):
            def below(r, ta, tb):
                va, vb = v_of(ta, rows=r[:, 0]), v_of(tb, rows=r[:, 0])
                # (a block whose voltage falls is not cleared, whatever the caller said of the line)
                return residual_below_zero(circ, r, va, vb, ta, tb) & (vb >= va)
        j, fa, beyond, found, hi = highest_stable_cell_from_top(circ, lo, hi, lin[0], vi, top_share,
                                                                SPAN_DOUBLINGS if il_of is not None else 0, below)
    else:
        p = candidate_params(circ, rows[:, None])
        t = load_curve_points(lo[:, None], hi[:, None], lin)
        v, il = vi(t)
        h = circuit_residual(circ, p, v, il)
        # along the voltage: a machine still above the load at the top is looked for further out
        for _ in range(SPAN_DOUBLINGS if il_of is not None else 0):
            up = h[:, -1] > 0
            if not up.any():
                break
            hi = np.where(up, lo + 2.0 * (hi - lo), hi)
            t = load_curve_points(lo[:, None], hi[:, None], lin)
            v, il = vi(t)
            h = circuit_residual(circ, p, v, il)
        beyond = h[:, -1] > 0
        stable = (h[:, :-1] > 0) & (h[:, 1:] <= 0)
        found = stable.any(axis=1) & ~beyond
        j = grid - 2 - np.argmax(stable[:, ::-1], axis=1)
        fa = h[rows, j]
    a, b = load_curve_points(lo, hi, lin[0, j]), load_curve_points(lo, hi, lin[0, j + 1])
    p1 = candidate_params(circ, rows)

    def v_i1(tt):
        if vi_of is not None:
            vv, ii = vi_of(tt[:, None])
            return vv[:, 0], ii[:, 0]
        if v_of is not None:
            return v_of(tt[:, None])[:, 0], tt
        return tt, il_of(tt[:, None])[:, 0]

    def res(tt):
        vv, ii = v_i1(tt)
        return circuit_residual(circ, p1, vv, ii)

    # rows without a stable point get an empty bracket, so they do not hold up the refinement
    root = refine_bracketed_roots(res, np.where(found, a, b), b, fa, steps)
    vv, ii = v_i1(root)
    st = machine_state(circ, p1, vv, ii)
    out = {k: np.where(found, st[k], np.nan) for k in POINT_KEYS + ("x",)}
    out["found"] = found
    out["beyond"] = beyond
    out["reversed"] = found & (st["generated_emf_v"] < 0)
    out["converged"] = ~found | ((np.abs(st["h"]) <= 1e-6 * np.maximum(1.0, np.abs(vv))) & drive_settled(st))
    return out


def highest_stable_cell_from_top(circ, lo, hi, lin, vi, top_share, doublings=0, below=None):
    """:func:`normal_points`' scan with its ``top_share``: the highest stable cell of each row's grid.

    With ``doublings`` the range of a row still above the load at its top
    is first doubled as the whole scan does, deciding by the top point
    alone. Then the grid's top share is evaluated for every row; a row
    whose highest stable crossing lies there needs no more, since none
    above it was missed. The other rows (and those with none at all) have
    the rest of the grid evaluated. Each grid point is computed as the
    whole grid computes it and each row's residual is its own, so the cells
    and their residuals are the same bit for bit. Returns ``(j, h_j,
    beyond, found, hi)`` as the whole scan gives them (``j = grid - 2``
    where there is no stable cell; ``hi`` after the doublings). With
    ``below(rows, v_lo, v_hi)`` (True where the residual provably stays below
    zero between two grid points) the top share's blocks of
    :data:`BOUND_BLOCK_POINTS` points where it holds are not evaluated: a
    stable cell starts above zero, so none starts there, and a cell ending
    there needs only the sign of its end. (A row with no stable cell then
    has a placeholder for ``h_j``; its empty bracket never reads it.)
    """
    n, grid = lo.size, lin.size
    rows = np.arange(n)
    if doublings:
        h_end = circuit_residual(circ, candidate_params(circ, rows[:, None]),
                                 *vi(load_curve_points(lo[:, None], hi[:, None], lin[None, -1:])))[:, 0]
        for _ in range(doublings):
            up = np.flatnonzero(h_end > 0)
            if not up.size:
                break
            hi = hi.copy()
            hi[up] = lo[up] + 2.0 * (hi[up] - lo[up])
            h_end[up] = circuit_residual(circ, candidate_params(circ, up[:, None]),
                                         *vi(load_curve_points(lo[up, None], hi[up, None], lin[None, -1:]),
                                             rows=up))[:, 0]
    k0 = grid - 1 - min(max(1, int(round(top_share * (grid - 1)))), grid - 1)
    if below is None:
        t = load_curve_points(lo[:, None], hi[:, None], lin[None, k0:])
        h = circuit_residual(circ, candidate_params(circ, rows[:, None]), *vi(t))
    else:
        first = np.arange(k0, grid, BOUND_BLOCK_POINTS)
        last = np.minimum(first + BOUND_BLOCK_POINTS - 1, grid - 1)
        sure = below(rows[:, None], load_curve_points(lo[:, None], hi[:, None], lin[None, first]),
                     load_curve_points(lo[:, None], hi[:, None], lin[None, last]))
        # the points of the other blocks; a placeholder below zero elsewhere
        r_idx, c_idx = nonzero_rows_cols(~np.repeat(sure, last - first + 1, axis=1))
        h = np.full((n, grid - k0), -1.0)
        if r_idx.size:
            tt = load_curve_points(lo[r_idx], hi[r_idx], lin[k0 + c_idx])[:, None]
            h[r_idx, c_idx] = circuit_residual(circ, candidate_params(circ, r_idx[:, None]),
                                               *vi(tt, rows=r_idx))[:, 0]
    beyond = h[:, -1] > 0
    stable = (h[:, :-1] > 0) & (h[:, 1:] <= 0)
    top = stable.any(axis=1)
    j = grid - 2 - np.argmax(stable[:, ::-1], axis=1)
    fa = h[rows, j - k0]
    low = np.flatnonzero(~top & ~beyond)
    if low.size and k0 > 0:
        # the rest of the grid, and the cell that joins it to the top
        tl = load_curve_points(lo[low, None], hi[low, None], lin[None, :k0])
        hl = np.concatenate([circuit_residual(circ, candidate_params(circ, low[:, None]), *vi(tl, rows=low)),
                             h[low, :1]], axis=1)
        sl = (hl[:, :-1] > 0) & (hl[:, 1:] <= 0)
        some = sl.any(axis=1)
        jl = k0 - 1 - np.argmax(sl[:, ::-1], axis=1)
        hit = low[some]
        j[hit] = jl[some]
        fa[hit] = hl[some, jl[some]]
        top[hit] = True
    return j, fa, beyond, top & ~beyond, hi


#: Grid points in a block that :func:`residual_below_zero` clears at once.
BOUND_BLOCK_POINTS = 6


def bound_holds(circ):
    """Whether :func:`residual_below_zero` may be used on ``circ``: an open-circuit curve that never
    falls, armature reaction that only demagnetises, resistances, brush drop and speeds that are not
    negative (every machine file's; checked, not assumed), and with a drive a speed held below a
    known ceiling (:data:`supplycfg.drive.SPEED_CEILING_SHARE` of its no-load speed)."""
    ar = circ.ar
    ar_ok = ar.per_amp >= 0 if ar.table_current_a is None else bool(
        np.all(np.asarray(ar.table_at) >= 0) and np.all(np.diff(ar.table_at) >= 0))
    drive_ok = circ.drive is None or bool(np.isfinite(circ.drive.s0) and circ.drive.s0 > 0)
    return bool(ar_ok and drive_ok and np.all(np.diff(circ.occ.emf_v) >= 0) and circ.vb >= 0 and circ.ir > 0
                and circ.nsh > 0 and np.all(circ.ra >= 0) and np.all(circ.rbr >= 0) and np.all(circ.s >= 0)
                and np.all((circ.kind != 1) | (circ.rf > 0)))


def speed_ceiling(circ, p):
    """Highest speed ratio a residual of ``circ`` may be computed at: the row's own without a drive; with
    one, the ceiling its coupled speed is held under (the solve keeps every step within it)."""
    if circ.drive is None:
        return p["s"]
    return SPEED_CEILING_SHARE * circ.drive.s0


def residual_below_zero(circ, rows, v_lo, v_hi, il_lo, il_hi=None):
    """True where the circuit residual [V] stays below zero between the points ``(v_lo, il_lo)`` and
    ``(v_hi, il_hi)`` of a load curve along which the terminal voltage and the load current both rise
    or stay (per row; see :func:`bound_holds`); ``il_hi`` defaults to ``il_lo`` (a fixed load current).

    Every current rises with the terminal voltage and the load current (the
    shunt field's, the armature's, the series branch's) or stays, so the
    drops and the voltage together are least at the low end; the windings'
    net field is at most the shunt field at the high end plus the larger of
    the series field's two ends, armature reaction only weakens it towards
    zero, and the open-circuit curve never falls, so the EMF at the test
    speed is at most the curve's value there, and at most :func:`speed_ceiling`
    times it at speed. The residual is at most the difference; a margin far
    above rounding makes the computed residuals fall below zero too.
    """
    p = candidate_params(circ, rows)
    il_hi = il_lo if il_hi is None else il_hi
    _, ia_lo, ibr_lo = currents_from_voltage(p, v_lo, il_lo)
    f_hi, _, ibr_hi = currents_from_voltage(p, v_hi, il_hi)
    xw_up = f_hi + np.maximum(p["c"] * ibr_lo, p["c"] * ibr_hi)
    e_up = speed_ceiling(circ, p) * circ.occ.emf(np.maximum(xw_up, 0.0))
    drops = ia_lo * p["ra"] + ibr_lo * p["rbr"] + brush_drop(ia_lo, circ.vb, circ.ir) + v_lo
    with np.errstate(invalid="ignore"):
        return e_up - drops < -1e-9 * (np.abs(e_up) + np.abs(drops) + 1.0)


def identical_rows(circ, *columns):
    """First row of each set of candidates equal bit for bit in :data:`ROW_KEYS` and ``columns``.

    Returns ``(first, inverse)``, ``first[inverse]`` being the row that
    stands for each row (``np.unique`` on the rows' bytes, so ``0.0`` and
    ``-0.0``, or NaNs of other bits, stay apart).
    """
    cols = [np.asarray(getattr(circ, k), float) for k in ROW_KEYS if getattr(circ, k) is not None]
    table = np.ascontiguousarray(np.stack(cols + [np.broadcast_to(np.asarray(c, float), (circ.n,)) for c in columns],
                                          axis=1))
    raw = table.view(np.dtype((np.void, table.dtype.itemsize * table.shape[1]))).ravel()
    _, first, inverse = np.unique(raw, return_index=True, return_inverse=True)
    return first, inverse.ravel()


#: Share of the no-load grid (zero to :func:`voltage_span`) that :func:`no_load_voltages` scans
#: first, from its top: the span is generous, so most no-load points sit in its lower half; any
#: share gives the same points, this one the fewest evaluations on the demo jobs (measured).
NO_LOAD_SCAN_TOP_SHARE = 0.5


def zero_load_current(t, rows=None):
    """No load: zero load current [A] at every point ``t`` of a :func:`normal_points` grid."""
    return np.zeros_like(t)


def no_load_voltages(circ, grid=NORMAL_POINTS_GRID):
    """Terminal voltage at zero load current for every candidate [V].

    NaN where there is none, or where the voltage runs away past the
    searched span (the no-load voltage is then unknown, not small). With a
    drive, at its no-load (highest) speed: the voltage limits hold there.
    """
    circ = circ.without_drive()
    top = voltage_span(circ, np.arange(circ.n))
    r = normal_points(circ, np.zeros(circ.n), top, il_of=zero_load_current, grid=grid, alike=True,
                      top_share=NO_LOAD_SCAN_TOP_SHARE)
    return r["terminal_voltage_v"]


def current_at_voltage(circ, v_target, lo, hi, grid=NORMAL_POINTS_GRID):
    """Load current [A] at which each candidate's characteristic passes ``v_target`` [V]
    on the normal branch (the largest such current below the fold)."""
    vt = np.broadcast_to(np.asarray(v_target, float), (circ.n,))
    return normal_points(circ, lo, hi, v_of=lambda t: np.broadcast_to(vt[:, None], t.shape) + 0 * t, grid=grid)
