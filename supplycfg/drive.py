"""The drive and the machine's losses: what turns the generator and where the shaft power goes.

A drive turns the generator through a belt or gearing of ``ratio``
(generator speed per drive speed). Three kinds:

- ``fixed``: the speed is given (one speed or a range) whatever the load;
- ``engine``: a governed engine whose speed falls linearly with shaft power,
  from its no-load speed by ``droop_percent`` at its rated power;
- ``motor``: an induction motor whose speed falls linearly with torque from
  synchronous speed by ``rated_slip_percent`` at rated torque; beyond its
  breakdown torque it stalls.

With an engine or a motor the speed is an unknown of every operating point.
The shaft power is

    P = E Ia + P_rot(n) + P_stray,   E = (n / n_occ) OCC(x),

the drive's speed follows from its characteristic at that power and the EMF
follows the speed. At a known terminal voltage and load current every
current and the net mmf ``x`` are known, so the speed solves one scalar
equation, settled by a few vectorised Newton steps
(:meth:`DriveRows.speed_ratio`); the circuit's residual then stays explicit
in the terminal voltage.

Losses by kind: armature copper ``Ia^2 Ra``; series branch (winding and
diverter) ``Ibr^2 Rbr``; brush contact ``Vb(Ia) Ia``; shunt field
``Ish^2 Rf`` (for separate excitation its exciter supplies it, not the
shaft); rotational (friction, windage, core) ``P_rot(n)``; stray load
``s |V IL|``. Shaft power plus exciter power equals output plus every loss.

References
----------
Power stages and efficiency of the DC generator: B. L. Theraja, A. K.
Theraja, *A Textbook of Electrical Technology* Vol II, ch. 26 (power
stages, losses, efficiency; from memory). Conventional stray-load
allowance 1 % of output and rotational loss from a no-load running test:
IEEE Std 113, *Test Procedures for Direct-Current Machines* (from memory).
Governor droop and induction-motor slip: common practice (see the
constants below).
"""

import functools
import math
from dataclasses import dataclass, replace

import numpy as np

from .errors import InputError
from .validate import MAX_SPEED_RPM, MIN_SPEED_RPM, read_pair

#: Kinds of drive in a profile's ``[drive]`` table.
DRIVE_KINDS = ("fixed", "engine", "motor")
#: Generator speed per drive speed when no belt or gearing is given: direct coupling.
DEFAULT_RATIO = 1.0
#: Breakdown (pull-out) torque of a general-purpose cage induction motor: about
#: 200-250 % of rated torque for the sizes of a charging or test set (common
#: practice, from memory; the middle taken).
DEFAULT_BREAKDOWN_TORQUE_PERCENT = 225.0
#: Rotational loss (friction, windage, core) at rated speed when the machine
#: file gives none: DC machines of a few to a hundred kW lose 2-5 % of rated
#: output this way (textbook worked examples of the no-load running test,
#: common practice, from memory; 3 % taken).
DEFAULT_ROTATIONAL_LOSS_FRACTION = 0.03
#: How rotational loss scales with speed, ``(n / n_rated)^k``: at constant flux
#: friction and hysteresis loss go as n, eddy-current loss as n^2, windage as
#: n^3 (textbook loss analysis, from memory); k = 1.5 is our model choice for
#: a machine whose loss is mostly core and friction.
DEFAULT_ROTATIONAL_LOSS_SPEED_EXPONENT = 1.5
#: Stray load loss when not measured: 1 % of output, the conventional allowance
#: of the DC-machine test standards (IEEE Std 113, from memory).
DEFAULT_STRAY_LOAD_LOSS_PERCENT = 1.0
#: Belt or gearing ratios accepted (generator speed per drive speed).
RATIO_RANGE = (0.05, 20.0)
#: Largest drive rating accepted [kW]: far above any set this tool is for.
MAX_RATED_POWER_KW = 1e5
#: Newton steps of the coupled speed, and the residual below which they stop [share of no-load speed].
SPEED_NEWTON_STEPS = 30
#: Open rows at or below this number finish their Newton steps one by one (see DriveRows.speed_ratio).
SPEED_SCALAR_ROWS = 8
SPEED_TOLERANCE = 1e-13
#: The coupled speed is kept within these shares of the drive's no-load speed:
#: below, the set has stalled anyway (flagged), above it is being driven hard by its load.
SPEED_FLOOR_SHARE = 0.02
SPEED_CEILING_SHARE = 3.0


# ---------------------------------------------------------------------------
# loss formulas and drive characteristics (pure functions)
# ---------------------------------------------------------------------------

def rotational_loss_w(speed_rpm, rated_loss_w, rated_speed_rpm,
                      exponent=DEFAULT_ROTATIONAL_LOSS_SPEED_EXPONENT):
    """Friction, windage and core loss at a speed [W].

    Parameters
    ----------
    speed_rpm : array_like
        Generator speed [rpm].
    rated_loss_w : float
        The loss at rated speed [W] (from a no-load running test).
    rated_speed_rpm : float
        [rpm]
    exponent : float, optional
        ``k`` of ``(n / n_rated)^k``; 1.5 by default (model choice, see
        :data:`DEFAULT_ROTATIONAL_LOSS_SPEED_EXPONENT`).

    Returns
    -------
    ndarray
        ``P_rot = rated_loss (n / n_rated)^k`` [W]; zero at standstill.

    References
    ----------
    Rotational loss from the no-load running test: IEEE Std 113 (from memory).
    """
    n = np.maximum(np.asarray(speed_rpm, float), 0.0)
    return rated_loss_w * (n / rated_speed_rpm) ** exponent


def stray_load_loss_w(output_w, percent=DEFAULT_STRAY_LOAD_LOSS_PERCENT):
    """Stray load loss [W]: a share of the electrical output (its size, whichever way it flows).

    References
    ----------
    Conventional allowance of 1 % of output for DC machines: IEEE Std 113 (from memory).
    """
    return 0.01 * percent * np.abs(np.asarray(output_w, float))


def engine_speed_rpm(shaft_power_w, no_load_speed_rpm, droop_percent, rated_power_kw):
    """Speed of a governed engine with linear droop [rpm, engine shaft].

    ``n = n0 (1 - droop P / P_rated)``: the speed falls by ``droop_percent``
    of its no-load value from no load to rated power.

    Parameters
    ----------
    shaft_power_w : array_like
        Power the engine delivers [W].
    no_load_speed_rpm : float
        Governed speed at zero power [rpm] (high idle).
    droop_percent : float
        Speed fall at rated power [% of no-load speed]; 0 for an isochronous governor.
    rated_power_kw : float
        [kW]

    References
    ----------
    Speed-droop governors, a few per cent from no load to rated power
    (common practice, from memory).
    """
    p = np.asarray(shaft_power_w, float)
    return no_load_speed_rpm * (1.0 - 0.01 * droop_percent * p / (1e3 * rated_power_kw))


def motor_speed_rpm(shaft_power_w, synchronous_speed_rpm, rated_slip_percent, rated_power_kw):
    """Speed of an induction motor whose speed falls linearly with torque [rpm, motor shaft].

    With ``q = n / n_s``, slip ``s_r`` at rated torque and
    ``T / T_r = (P / P_r)(1 - s_r) / q``, the line ``q = 1 - s_r T / T_r``
    gives ``q^2 - q + s_r (1 - s_r) P / P_r = 0``; the upper root is the
    running speed. NaN where no root exists (far past any breakdown torque).

    References
    ----------
    Induction motors: speed falls with torque by the rated slip, 2-5 % for
    the sizes of interest, about linearly up to rated load (common practice).
    """
    p = np.asarray(shaft_power_w, float)
    s = 0.01 * rated_slip_percent
    disc = 1.0 - 4.0 * s * (1.0 - s) * p / (1e3 * rated_power_kw)
    with np.errstate(invalid="ignore"):
        q = 0.5 * (1.0 + np.sqrt(disc))
    return synchronous_speed_rpm * q


def motor_torque_percent(shaft_power_w, speed_rpm, synchronous_speed_rpm, rated_slip_percent, rated_power_kw):
    """Torque of an induction motor as a share of its rated torque [%].

    ``T / T_r = (P / P_r) n_r / n`` with the rated speed ``n_r = n_s (1 - s_r)``.
    """
    p = np.asarray(shaft_power_w, float)
    n_r = synchronous_speed_rpm * (1.0 - 0.01 * rated_slip_percent)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 100.0 * p / (1e3 * rated_power_kw) * n_r / np.asarray(speed_rpm, float)


# ---------------------------------------------------------------------------
# the [drive] table
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Drive:
    """What turns the generator. Field names are the ``[drive]`` keys (speeds of the drive's own shaft).

    ``speeds_rpm`` holds a fixed drive's one speed or ``(low, high)``; the
    other fields are None where they do not apply to ``kind``.
    """

    kind: str = "fixed"
    ratio: float = DEFAULT_RATIO
    speeds_rpm: tuple = ()
    no_load_speed_rpm: float | None = None
    droop_percent: float | None = None
    idle_speed_rpm: float | None = None
    synchronous_speed_rpm: float | None = None
    rated_slip_percent: float | None = None
    breakdown_torque_percent: float | None = None
    rated_power_kw: float | None = None

    @property
    def coupled(self):
        """True when the speed is an unknown of every operating point (engine, motor)."""
        return self.kind != "fixed"

    @property
    def top_speed_rpm(self):
        """Drive-shaft speed at zero shaft power (a fixed drive: its highest speed) [rpm]."""
        if self.kind == "engine":
            return self.no_load_speed_rpm
        if self.kind == "motor":
            return self.synchronous_speed_rpm
        return max(self.speeds_rpm)

    def generator_speeds_rpm(self):
        """Generator speeds of the envelope [rpm]: a fixed drive's speeds, else the no-load speed."""
        if self.coupled:
            return (self.ratio * self.top_speed_rpm,)
        return tuple(self.ratio * s for s in self.speeds_rpm)

    @property
    def idle_generator_speed_rpm(self):
        """Generator speed at the engine's idle [rpm], or None."""
        return None if self.idle_speed_rpm is None else self.ratio * self.idle_speed_rpm

    def with_rating(self, rated_power_kw):
        """The same drive with another rated power [kW]."""
        return replace(self, rated_power_kw=float(rated_power_kw))

    def drive_speed_rpm(self, shaft_power_w):
        """Drive-shaft speed at a shaft power [rpm] (the characteristic itself)."""
        if self.kind == "engine":
            return engine_speed_rpm(shaft_power_w, self.no_load_speed_rpm, self.droop_percent, self.rated_power_kw)
        if self.kind == "motor":
            return motor_speed_rpm(shaft_power_w, self.synchronous_speed_rpm, self.rated_slip_percent,
                                   self.rated_power_kw)
        return np.full_like(np.asarray(shaft_power_w, float), self.top_speed_rpm)

    def describe(self):
        """The drive in plain words."""
        belt = "" if self.ratio == 1 else f", belt or gearing {self.ratio:g} (generator per drive speed)"
        if self.kind == "engine":
            idle = "" if self.idle_speed_rpm is None else f", idle {self.idle_speed_rpm:g} rpm"
            return (f"governed engine, {self.rated_power_kw:g} kW, {self.no_load_speed_rpm:g} rpm at no load, "
                    f"{self.droop_percent:g} % droop{idle}{belt}")
        if self.kind == "motor":
            return (f"induction motor, {self.rated_power_kw:g} kW, {self.synchronous_speed_rpm:g} rpm synchronous, "
                    f"{self.rated_slip_percent:g} % slip at rated load, breakdown at "
                    f"{self.breakdown_torque_percent:g} % of rated torque{belt}")
        sp = " to ".join(f"{s:g}" for s in self.speeds_rpm)
        return f"fixed speed {sp} rpm{belt}"

    def speed_fall_words(self):
        """``(what, cure)``: what lets the speed fall under load (an engine's droop, a motor's slip) and
        the change at the drive that holds it up, in words."""
        if self.kind == "engine":
            return "speed droop", "a governor set for less droop (or isochronous)"
        return "slip", "a motor of less slip"

    def short(self):
        """The drive in a few words for the setting card (the job table gives it in full)."""
        belt = "" if self.ratio == 1 else f", belt {self.ratio:g}"
        if self.kind == "engine":
            return f"engine {self.rated_power_kw:g} kW, {self.no_load_speed_rpm:g} rpm at no load{belt}"
        if self.kind == "motor":
            return f"induction motor {self.rated_power_kw:g} kW, {self.synchronous_speed_rpm:g} rpm synchronous{belt}"
        return self.describe()

    def as_table(self):
        """The ``[drive]`` keys of this drive (without the winding temperatures)."""
        out = {}
        if self.kind != "fixed":
            out["kind"] = self.kind
        if self.ratio != DEFAULT_RATIO:
            out["ratio"] = self.ratio
        if self.kind == "fixed":
            if len(self.speeds_rpm) == 1:
                out["speed_rpm"] = self.speeds_rpm[0]
            else:
                out["speed_range_rpm"] = list(self.speeds_rpm)
        elif self.kind == "engine":
            out.update(no_load_speed_rpm=self.no_load_speed_rpm, droop_percent=self.droop_percent,
                       rated_power_kw=self.rated_power_kw)
            if self.idle_speed_rpm is not None:
                out["idle_speed_rpm"] = self.idle_speed_rpm
        else:
            out.update(synchronous_speed_rpm=self.synchronous_speed_rpm, rated_slip_percent=self.rated_slip_percent,
                       rated_power_kw=self.rated_power_kw, breakdown_torque_percent=self.breakdown_torque_percent)
        return out


#: Smallest drive rating read [kW]: a fractional-horsepower motor of 10 W drives no generator a job needs.
MIN_RATED_POWER_KW = 0.01
#: Lowest rated slip read [%]: large induction motors run at about 0.5 to 1 % slip, small ones at 3 to 6 %
#: (from memory); a slip written as a fraction (0.035 for 3.5 %) falls below it.
MIN_RATED_SLIP_PERCENT = 0.2

#: Keys of each kind (besides kind, ratio and winding_temperature_range_c).
KIND_KEYS = {"fixed": ("speed_rpm", "speed_range_rpm"),
             "engine": ("no_load_speed_rpm", "droop_percent", "rated_power_kw", "idle_speed_rpm"),
             "motor": ("synchronous_speed_rpm", "rated_slip_percent", "rated_power_kw", "breakdown_torque_percent")}
#: Every key of a ``[drive]`` table this module reads.
DRIVE_KEYS = ("kind", "ratio") + tuple(dict.fromkeys(k for keys in KIND_KEYS.values() for k in keys))


def read_drive(t, source):
    """The drive of a ``[drive]`` table ``t`` read from ``source``, checked (temperatures are read by the caller).

    Raises
    ------
    InputError
        One line naming the file, the key and what is allowed.
    """
    given = t.has("kind")
    kind = t.text("kind", "fixed", choices=DRIVE_KINDS)
    foreign = [k for k in dict.fromkeys(k for keys in KIND_KEYS.values() for k in keys)
               if k not in KIND_KEYS[kind] and t.has(k)]
    if foreign:
        k = foreign[0]
        owners = " or ".join(repr(o) for o, keys in KIND_KEYS.items() if k in keys)
        if given or any(t.has(own) for own in KIND_KEYS[kind]):
            raise InputError(source, t.key(k), f"applies to kind = {owners} only; this drive is {kind!r} "
                             f"(its keys: {', '.join(KIND_KEYS[kind])})")
        # a forgotten kind is the likelier fault: name the kind the keys given belong to
        fits = [o for o, keys in KIND_KEYS.items() if all(f in keys for f in foreign)] or [owners]
        raise InputError(source, t.key("kind"), f"is not given, so the drive is {kind!r}, which takes "
                         f"{', '.join(KIND_KEYS[kind])}; {', '.join(foreign)} belong to kind = "
                         f"{' or '.join(repr(f) if f in KIND_KEYS else f for f in fits)}: add that line")
    ratio = t.number("ratio", DEFAULT_RATIO, low=RATIO_RANGE[0], high=RATIO_RANGE[1],
                     what="generator speed per drive speed")
    top = MAX_SPEED_RPM / ratio

    def speed(k, default=None, required=True):
        if not required and not t.has(k):
            t.raw(k, None)
            return default
        return t.number(k, low=MIN_SPEED_RPM, high=top, what="a drive speed in rpm")

    if kind == "fixed":
        has_one, has_range = t.has("speed_rpm"), t.has("speed_range_rpm")
        if has_one and has_range:
            raise InputError(source, t.key("speed_range_rpm"), "given together with speed_rpm; allowed: one of the two")
        if has_range:
            t.raw("speed_rpm", None)
            speeds = read_pair(t, "speed_range_rpm", source, low=MIN_SPEED_RPM, high=top)
        else:
            if not has_one:
                raise InputError(source, t.key("speed_rpm"),
                                 "is missing; give speed_rpm, or speed_range_rpm = [low, high] "
                                 "(or kind = 'engine' or 'motor' with its figures)")
            speeds = (speed("speed_rpm"),)
            t.raw("speed_range_rpm", None)
        return Drive(kind="fixed", ratio=ratio, speeds_rpm=tuple(speeds))
    power = t.number("rated_power_kw", low=MIN_RATED_POWER_KW, high=MAX_RATED_POWER_KW, what="kW")
    if kind == "engine":
        n0 = speed("no_load_speed_rpm")
        droop = t.number("droop_percent", low=0, high=25, what="per cent of the no-load speed")
        idle = speed("idle_speed_rpm", required=False)
        if idle is not None and idle >= n0:
            raise InputError(source, t.key("idle_speed_rpm"),
                             f"is {idle:g}; allowed: below no_load_speed_rpm ({n0:g} rpm)")
        return Drive(kind="engine", ratio=ratio, no_load_speed_rpm=n0, droop_percent=droop, idle_speed_rpm=idle,
                     rated_power_kw=power)
    ns = speed("synchronous_speed_rpm")
    slip = t.number("rated_slip_percent", low=MIN_RATED_SLIP_PERCENT, high=20,
                    what="per cent of synchronous speed (3.5 for 3.5 %)")
    bd = t.number("breakdown_torque_percent", DEFAULT_BREAKDOWN_TORQUE_PERCENT, low=100, low_open=True, high=1000,
                  what="per cent of rated torque")
    return Drive(kind="motor", ratio=ratio, synchronous_speed_rpm=ns, rated_slip_percent=slip,
                 breakdown_torque_percent=bd, rated_power_kw=power)


# ---------------------------------------------------------------------------
# the machine's losses
# ---------------------------------------------------------------------------

def machine_rotational_loss_w(machine):
    """Rotational loss at rated speed [W]: the machine file's, or the default share of rated output."""
    if getattr(machine, "rotational_loss_w", None) is not None:
        return float(machine.rotational_loss_w)
    return DEFAULT_ROTATIONAL_LOSS_FRACTION * machine.rated_voltage_v * machine.rated_armature_current_a


def machine_loss_exponent(machine):
    v = getattr(machine, "rotational_loss_speed_exponent", None)
    return DEFAULT_ROTATIONAL_LOSS_SPEED_EXPONENT if v is None else float(v)


def machine_stray_percent(machine):
    v = getattr(machine, "stray_load_loss_percent", None)
    return DEFAULT_STRAY_LOAD_LOSS_PERCENT if v is None else float(v)


# ---------------------------------------------------------------------------
# the coupled speed, vectorised
# ---------------------------------------------------------------------------

def newton_speed_step(s, f, df, s0, lo, hi):
    """One Newton step of the drive equation ``f(s) = 0`` from speed ratios ``s``, kept in ``[lo, hi]``.

    Where the slope ``df`` is not positive the step is a tenth of ``s0``
    towards the root's side instead (the equation falls there, so Newton
    would go the wrong way).
    """
    ok = df > 0
    if ok.all():
        step = f / df
    else:
        step = f / np.where(ok, df, 1.0)
        if isinstance(step, np.ndarray):
            # the fallback on the few rows that need it (the same values as a where over every row)
            bad = ~ok
            step[bad] = np.where(f[bad] > 0, 0.1, -0.1) * s0
        else:
            step = np.where(ok, step, np.where(f > 0, 0.1, -0.1) * s0)
    out = s - step
    if not isinstance(out, np.ndarray):
        return np.minimum(np.maximum(out, lo), hi)
    # (in place: the same values, without two more arrays)
    np.maximum(out, lo, out=out)
    return np.minimum(out, hi, out=out)


@functools.lru_cache(maxsize=64)  # (every coupled solve asks it; a search has one drive and bounds)
def newton_fallback_end(s0, lo, hi):
    """Speed ratio where :data:`SPEED_NEWTON_STEPS` fallback steps of :func:`newton_speed_step` from
    ``s0`` end when each goes up by a tenth of ``s0`` (a slope <= 0 below a negative residual), held
    in ``[lo, hi]``: the ceiling when they reach it. The same float steps, taken once."""
    up = s0
    for _ in range(SPEED_NEWTON_STEPS):
        up = min(max(up - (-0.1 * s0), lo), hi)
    return up


@dataclass
class DriveRows:
    """A coupled drive and the machine's losses, as a circuit uses them.

    Speeds are speed ratios ``s = n / n_occ`` of the generator. ``s0`` is the
    ratio at zero shaft power; ``k`` [1/W] the droop coefficient (engine:
    ``droop / P_r``; motor: ``s_r (1 - s_r) / P_r``); ``motor`` makes the
    speed linear in torque instead of power. One drive turns every row of a
    circuit, so these are scalars.
    """

    drive: Drive
    s0: float
    k: float
    motor: bool
    rot_w: float
    rot_s: float
    rot_exp: float
    stray: float

    @classmethod
    def build(cls, machine, drive):
        """The coupling of ``machine`` turned by ``drive`` (an engine or a motor)."""
        n_occ = float(machine.occ_speed_rpm)
        s0 = drive.ratio * drive.top_speed_rpm / n_occ
        pr = 1e3 * drive.rated_power_kw
        if drive.kind == "engine":
            k = 0.01 * drive.droop_percent / pr
        else:
            sl = 0.01 * drive.rated_slip_percent
            k = sl * (1.0 - sl) / pr
        return cls(drive, s0, k, drive.kind == "motor", machine_rotational_loss_w(machine),
                   machine.rated_speed_rpm / n_occ, machine_loss_exponent(machine),
                   0.01 * machine_stray_percent(machine))

    def rotational_w(self, s):
        """Rotational loss [W] at speed ratio ``s`` (> 0), and its derivative in ``s``."""
        x = s / self.rot_s
        k = self.rot_exp
        if k == 1.5:
            p = self.rot_w * x * np.sqrt(x)
        elif k == 1.0:
            p = self.rot_w * x
        elif k == 2.0:
            p = self.rot_w * x * x
        else:
            p = self.rot_w * x ** k
        return p, k * p / s

    def speed_ratio(self, p, a, b, c, flags=True):
        """Generator speed ratio where the drive's characteristic meets the shaft power.

        The shaft power as a function of the speed ratio ``s`` is
        ``P(s) = a s + P_rot(s) + stray |b s + c|`` [W] (``a = OCC(x) Ia``,
        and the output ``V IL = b s + c``). The drive gives
        ``s = s0 - s0 k P(s)`` (engine) or ``s = s0 - s0 k P(s) s0 / s``
        (motor); Newton steps from ``s0``, each row stopping once its
        equation holds to ``SPEED_TOLERANCE`` of ``s0``.

        Parameters
        ----------
        p : dict
            Row parameters (unused: one drive turns every row).
        a, b, c : array_like
            [W]
        flags : bool
            Also return ``converged`` and ``unique``; False gives None for
            both (a residual needs the speed alone, and the last slope is
            then not evaluated).

        Returns
        -------
        (s, converged, unique)
            ``converged`` where the drive equation holds to 1e-12 of
            ``s0``; ``unique`` where its residual rises with speed at the
            root (one solution nearby; a falling residual means another
            speed may also balance).
        """
        s0 = self.s0
        if np.ndim(b) == 0 and b == 0:
            # no output term linear in the speed (the common call): skip broadcasting a zero array
            a, c = np.broadcast_arrays(np.asarray(a, float), np.asarray(c, float))
            b, linear_out = 0.0, False
        else:
            a, b, c = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float), np.asarray(c, float))
            linear_out = np.any(b != 0)
        lo, hi = SPEED_FLOOR_SHARE * s0, SPEED_CEILING_SHARE * s0
        out_c = self.stray * np.abs(c)
        tol = SPEED_TOLERANCE * s0
        if not linear_out and self.rot_exp == 1.5:
            return self._speed_ratio_sqrt(a, out_c, lo, hi, tol, flags)
        s = np.full(a.shape, s0)
        f, df = self._residual(s, a, b, c, out_c, linear_out)
        for _ in range(SPEED_NEWTON_STEPS):
            open_ = ~(np.abs(f) <= tol)
            if not open_.any():
                break
            # Newton goes on only where the drive equation does not hold yet (a few rows can take
            # every step, e.g. held at the speed floor): the settled rows keep their speed. Rows are
            # gathered only once few remain open (gathers of most rows would cost memory and time).
            few = np.count_nonzero(open_) * 4 < open_.size
            rows = np.nonzero(open_) if few else None
            fs, dfs, ss = (f, df, s) if rows is None else (f[rows], df[rows], s[rows])
            ss = newton_speed_step(ss, fs, dfs, s0, lo, hi)
            del fs, dfs  # free before the next residual (peak memory at large inputs)
            if rows is None:
                s = np.where(open_, ss, s)
                del ss, open_
                f, df = self._residual(s, a, b, c, out_c, linear_out)
            else:
                s[rows] = ss
                f[rows], df[rows] = self._residual(ss, a[rows], b[rows] if linear_out else b, c[rows],
                                                   out_c[rows], linear_out)
        return s, np.abs(f) <= 1e-12 * s0, df > 0

    def _speed_ratio_sqrt(self, a, out_c, lo, hi, tol, flags):
        """:meth:`speed_ratio` for the common case: no output term linear in the speed, and
        rotational loss as ``s^1.5``. The same Newton steps and stop test, with the drive
        equation gathered into a few coefficients per row so that each step costs few passes:
        engine ``f = s (A + R sqrt(s)) + C``, motor ``f = s + A + R sqrt(s) + C / s``."""
        s0 = self.s0
        g = s0 * self.k
        rc = self.rot_w / self.rot_s ** 1.5  # P_rot = rc s^1.5
        motor = self.motor
        if motor:
            gm = g * s0
            aa = gm * a - s0
            cc = gm * out_c
            rr = gm * rc
        else:
            aa = 1.0 + g * a
            cc = g * out_c - s0
            rr = g * rc

        def fun(s, sq):
            if motor:
                return s + aa + rr * sq + cc / s
            return s * (aa + rr * sq) + cc

        def slope(s, sq, rows):
            if motor:
                return 1.0 + (0.5 * rr) / sq - cc[rows] / (s * s)
            return aa[rows] + (1.5 * rr) * sq

        sq0 = float(np.sqrt(s0))
        f = fun(s0, sq0)
        s = np.full(a.shape, s0)
        sq = None  # sqrt(s), once s is not s0 everywhere
        idx = None  # flat indices of the rows still open, once few remain (then worked on alone)
        moved = None  # rows whose speed moved at the last step (one that did not stays put from then on)
        up = newton_fallback_end(s0, lo, hi)
        bad = np.isnan(f)
        if bad.any():
            # rows of undefined power (NaN a or c) never settle: Newton's steps would take them where
            # these lines put them at once (NaN where the slope is still defined, else up to the ceiling)
            # (the motor's slope holds the power itself, so it is undefined there too)
            s[bad] = up if motor else np.where(slope(s0, sq0, slice(None))[bad] > 0, np.nan, up)
            sq = np.sqrt(s)
            moved = ~bad
        else:
            bad = None
        climb_margin = 1e-9  # far above rounding: these rows' tests come out the same at every step
        sq_hi = float(np.sqrt(hi))
        # (fmin skips NaN as nanmin does, without its copy and warning)
        if not motor and a.size and np.fmin.reduce(aa, axis=None) + (1.5 * rr) * sq_hi <= -climb_margin:
            # an engine driven so hard (a large negative E Ia) that the equation's slope stays below
            # zero up to the ceiling: its residual only falls as the speed rises, so from a negative
            # residual every step is the fallback's, up to the ceiling
            climb = (aa + (1.5 * rr) * sq_hi <= -climb_margin) & (f <= -climb_margin)
            if climb.any():
                s[climb] = up
                if sq is None:
                    sq = np.full(a.shape, sq0)
                sq[climb] = np.sqrt(up)
                f[climb] = up * (aa[climb] + rr * np.sqrt(up)) + cc[climb]
                moved = ~climb if moved is None else moved & ~climb
        for step_no in range(SPEED_NEWTON_STEPS):
            if idx is None:
                open_ = ~(np.abs(f) <= tol)
                if moved is not None:
                    open_ &= moved
                n_open = np.count_nonzero(open_)
                if n_open == 0:
                    break
                if n_open * 4 >= open_.size:
                    # most rows open: whole arrays, the settled rows keep their speed
                    dfs = slope(s, sq0 if sq is None else sq, slice(None))
                    ss = newton_speed_step(s, f, dfs, s0, lo, hi)
                    del dfs  # free before the next residual (peak memory at large inputs)
                    sqs = np.sqrt(ss)
                    if n_open < open_.size:
                        ss = np.where(open_, ss, s)
                        sqs = np.where(open_, sqs, sq0 if sq is None else sq)
                    moved = open_ & (ss != s)  # (a settled row never opens again: its residual stays)
                    s, sq = ss, sqs
                    del ss, sqs, open_
                    f = fun(s, sq)
                    continue
                # few open: gather them once; the settled rows never change again
                if sq is None:
                    sq = np.full(a.shape, sq0)
                idx = np.flatnonzero(open_)
                del open_
                s_f, sq_f, f_f = s.reshape(-1), sq.reshape(-1), f.reshape(-1)
                so, fo = s_f[idx], f_f[idx]
                ao, co = aa.reshape(-1)[idx], cc.reshape(-1)[idx]
            else:
                keep = ~(np.abs(fo) <= tol)
                if not keep.any():
                    break
                if not keep.all():
                    idx, so, fo, ao, co = idx[keep], so[keep], fo[keep], ao[keep], co[keep]
            if idx.size <= SPEED_SCALAR_ROWS:
                # the last few rows one by one in plain floats (the same operations in the same
                # order): array calls on a handful of values cost far more than the arithmetic
                self._finish_rows(idx, so, fo, ao, co, rr, lo, hi, tol, SPEED_NEWTON_STEPS - step_no,
                                  s_f, sq_f, f_f)
                break
            sqo = np.sqrt(so)
            dfs = 1.0 + (0.5 * rr) / sqo - co / (so * so) if motor else ao + (1.5 * rr) * sqo
            sn = newton_speed_step(so, fo, dfs, s0, lo, hi)
            sqn = np.sqrt(sn)
            fo = sn + ao + rr * sqn + co / sn if motor else sn * (ao + rr * sqn) + co
            s_f[idx], sq_f[idx], f_f[idx] = sn, sqn, fo
            # a row whose speed did not move stays where it is at every later step: drop it
            moved = sn != so
            so = sn
            if not moved.all():
                idx, so, fo, ao, co = idx[moved], so[moved], fo[moved], ao[moved], co[moved]
                if not idx.size:
                    break
        if not flags:
            return s, None, None
        df = slope(s, np.sqrt(s) if sq is None else sq, slice(None))
        unique = df > 0
        if bad is not None:
            unique &= ~bad  # the slope of a row of undefined power is undefined too
        return s, np.abs(f) <= 1e-12 * s0, unique

    def _finish_rows(self, idx, so, fo, ao, co, rr, lo, hi, tol, steps, s_f, sq_f, f_f):
        """Newton steps of :meth:`_speed_ratio_sqrt` for a few open rows, each on its own in floats."""
        s0, motor = self.s0, self.motor
        for j, k in enumerate(idx.tolist()):
            s, f, a, c = float(so[j]), float(fo[j]), float(ao[j]), float(co[j])
            for _ in range(steps):
                sq = math.sqrt(s)
                d = 1.0 + (0.5 * rr) / sq - c / (s * s) if motor else a + (1.5 * rr) * sq
                step = f / d if d > 0 else (0.1 if f > 0 else -0.1) * s0
                sn = min(max(s - step, lo), hi)
                sqn = math.sqrt(sn)
                f = sn + a + rr * sqn + c / sn if motor else sn * (a + rr * sqn) + c
                s_f[k], sq_f[k], f_f[k] = sn, sqn, f
                if sn == s or abs(f) <= tol:  # stays put, or settled
                    break
                s = sn

    def _residual(self, s, a, b, c, out_c, linear_out):
        rot, drot = self.rotational_w(s)
        if linear_out:
            out = b * s + c
            pw = a * s + rot + self.stray * np.abs(out)
            dpw = a + drot + self.stray * np.sign(out) * b
        else:
            pw = a * s + rot + out_c
            dpw = a + drot
        g = self.s0 * self.k
        if self.motor:
            r = self.s0 / s
            return s - self.s0 + g * pw * r, 1.0 + g * r * (dpw - pw / s)
        return s - self.s0 + g * pw, 1.0 + g * dpw


def loss_breakdown(v, il, ia, ibr, ish, e, speed_rpm, ra, rbr, rf, brush_v, excited_separately, rows):
    """Power flow of operating points: shaft power, losses by kind, efficiency.

    Parameters
    ----------
    v, il, ia, ibr, ish, e : array_like
        Terminal voltage [V], load, armature, series-branch and shunt-field
        currents [A], generated EMF [V].
    speed_rpm : array_like
        Generator speed [rpm].
    ra, rbr, rf : array_like
        Armature, series-branch and shunt-field-circuit resistances [ohm].
    brush_v : array_like
        Brush contact drop [V].
    excited_separately : array_like of bool
        Where the shunt field is fed by its exciter (its power is not on the shaft).
    rows : (rated_loss_w, rated_speed_rpm, exponent, stray_fraction)
        The machine's rotational and stray loss data.

    Returns
    -------
    dict
        ``losses_w`` (a dict of arrays by kind), ``shaft_power_w``
        (``E Ia + P_rot + P_stray``), ``exciter_power_w``, ``output_w``
        (``V IL``) and ``efficiency`` (output over shaft plus exciter power;
        NaN unless both are positive).

    References
    ----------
    Power stages of a DC generator: Theraja Vol II ch. 26 (from memory);
    stray load allowance IEEE Std 113 (from memory).
    """
    rot_w, rated_rpm, exponent, stray = rows
    v, il, ia, ibr, ish, e = (np.asarray(q, float) for q in (v, il, ia, ibr, ish, e))
    losses = {
        "armature_copper": ia ** 2 * ra,
        "series_branch": ibr ** 2 * rbr,
        "brush_contact": brush_v * ia,
        "field_circuit": ish ** 2 * rf,  # the shunt or separate field and its rheostat
        "rotational": rotational_loss_w(speed_rpm, rot_w, rated_rpm, exponent),
        "stray_load": stray * np.abs(v * il),
    }
    losses = {k: np.broadcast_to(val, v.shape).astype(float) for k, val in losses.items()}
    exciter = np.where(excited_separately, losses["field_circuit"], 0.0)
    shaft = e * ia + losses["rotational"] + losses["stray_load"]
    out = v * il
    inp = shaft + exciter
    with np.errstate(divide="ignore", invalid="ignore"):
        eff = np.where((out > 0) & (inp > 0), out / np.where(inp > 0, inp, 1.0), np.nan)
    return {"losses_w": losses, "shaft_power_w": shaft, "exciter_power_w": exciter, "output_w": out,
            "efficiency": eff}


def drive_loading(drive, shaft_power_w, speed_rpm):
    """Shaft power as a share of the drive's rating, and (motor) torque as a share of rated torque [%].

    Returns ``(loading_percent, torque_percent)``; NaN where they do not apply
    (a fixed drive has no rating; an engine no torque limit).
    """
    p = np.asarray(shaft_power_w, float)
    if drive is None or drive.rated_power_kw is None:
        return np.full(p.shape, np.nan), np.full(p.shape, np.nan)
    load = 100.0 * p / (1e3 * drive.rated_power_kw)
    if drive.kind != "motor":
        return load, np.full(p.shape, np.nan)
    n_drive = np.asarray(speed_rpm, float) / drive.ratio
    return load, motor_torque_percent(p, n_drive, drive.synchronous_speed_rpm, drive.rated_slip_percent,
                                      drive.rated_power_kw)

