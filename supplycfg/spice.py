"""ngspice netlists of the generator's equivalent circuit: the tests' independent check and the bench's yardstick.

Nothing here uses the engine's algebra: the circuit is written from its
physical elements and solved by ngspice (Debian package ``ngspice``), a
general-purpose circuit solver. The tests compare the engine's answers with
it; ``supplycfg bench`` times it on the same characteristic as the engine
(:func:`analysis_seconds`).

:func:`generator_netlist` writes a DC generator in one connection as an
equivalent circuit made of its physical elements: resistors for the armature,
the used part of the series winding, its diverter, the shunt winding and its
rheostat; zero-volt sources that sense the shunt-field, series-winding,
armature and load currents; a behavioural source for the brush contact drop;
a behavioural node for the windings' net magnetomotive force per pole (read
as an equivalent shunt-field current) and one for the net field after
armature reaction, which shrinks it towards zero and never past it; and the
generated EMF as a behavioural source reading the open-circuit
characteristic through ngspice's piecewise-linear ``pwl()`` table. Copper
resistances are corrected for temperature by ngspice itself (``tc1`` with
``.temp`` and ``tnom``). One ``.dc`` sweep runs the drive up from
standstill, optionally flashes the field and releases it, then steps the
load; each point starts from the previous one, so a self-excited machine
started on a heavy load stays on its built-up branch of normal polarity.

:func:`run` writes the netlist into a directory, runs ``ngspice -b`` in a
subprocess and reads the ``wrdata`` table back as numpy arrays.

References
----------
ngspice 39 user manual: B sources and their ``pwl`` function, ``.dc``,
``wrdata`` with ``wr_singlescale``/``wr_vecnames``, resistor ``tc1``.
"""

import re
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

import numpy as np

NGSPICE = shutil.which("ngspice")

#: Inferred absolute zero of resistance of annealed copper [degC]
#: (IEC 60228, alpha20 = 0.00393 /K): ``tc1 = 1 / (234.5 + T_ref)`` at ``tnom = T_ref``.
COPPER_INFERRED_ZERO_C = 234.5

#: Vectors read back from every run, in this order.
VECTORS = ("v(pos)", "i(vsl)", "i(vsa)", "i(vsh)", "i(vse)", "v(e)", "v(x)", "v(lv)")
KEYS = ("terminal_voltage_v", "load_current_a", "armature_current_a", "shunt_field_current_a",
        "series_field_current_a", "generated_emf_v", "equivalent_field_current_a", "load_value")
#: Also read back when a drive turns the machine: the speed node and the shaft power.
DRIVE_VECTORS = ("v(sp)", "v(ps)")
DRIVE_KEYS = ("speed_ratio", "shaft_power_w")
#: A drive's speed is held above this share of its no-load speed (the engine's own floor, see
#: supplycfg.drive.SPEED_FLOOR_SHARE); only a stalled set reaches it.
SPEED_FLOOR_SHARE = 0.02


@dataclass(frozen=True)
class DriveModel:
    """A drive as circuit parameters: the speed node ``sp`` (generator speed over the OCC's test speed)
    is a behavioural source of the shaft power node ``ps``.

    ``kind`` is ``"engine"`` (speed linear in power: ``s = s0 (1 - droop P / P_r)``) or ``"motor"``
    (speed linear in torque: with ``q = s / s0``, ``q = 1 - slip T / T_r`` and
    ``T / T_r = (P / P_r)(1 - slip) / q``, written as the upper root of
    ``q^2 - q + slip (1 - slip) P / P_r = 0``). The shaft power is
    ``E Ia + rot (s / s_rated)^exponent + stray |V IL|``.
    """

    kind: str
    s0: float
    rated_w: float
    fraction: float          # droop (engine) or rated slip (motor), as a fraction
    rotational_w: float
    rated_speed_ratio: float
    exponent: float
    stray_fraction: float


class SpiceError(RuntimeError):
    """ngspice failed or wrote no table."""


def num(x):
    """A number as ngspice reads it, to full double precision."""
    return repr(float(x))


def pwl_args(xs, ys):
    """``x0, y0, x1, y1, ...`` for a ``pwl()`` call."""
    return ", ".join(f"{num(a)}, {num(b)}" for a, b in zip(xs, ys))


@dataclass(frozen=True)
class LoadSweep:
    """A load stepped through ``values`` along one ``.dc`` sweep.

    ``kind`` is ``"conductance"`` (values in [S], a current ``V * G``),
    ``"current"`` (a current sink, values in [A]) or ``"battery"`` (values the
    battery EMF [V], in series with ``battery_ohm`` [ohm]). ``substeps`` sweep
    points lie between adjacent values; only the values themselves are kept.

    The sweep first runs the drive up from standstill (``run_up_steps``
    steps, the EMF scaled from zero, where the circuit's only solution is all
    currents zero) with the load at ``values[0]``. ``flash_a`` [A], when
    given, flashes the field meanwhile: an extra equivalent field current of
    that size, released to zero over ``flash_steps`` steps once at speed, so
    the sweep starts from the built-up state of normal polarity.
    """

    kind: str
    values: tuple
    battery_ohm: float = 0.0
    substeps: int = 4
    flash_a: float | None = None
    flash_steps: int = 20
    run_up_steps: int = 20

    def path(self):
        """Sweep nodes at ``t = 0, 1, ...``: speed share, flash [A], load value; rows kept."""
        vals = np.asarray(self.values, float)
        nr = self.run_up_steps
        nf = self.flash_steps if self.flash_a else 0
        f0 = self.flash_a or 0.0
        speed = np.concatenate([np.linspace(0.0, 1.0, nr + 1), np.ones(nf + vals.size - 1)])
        flash = np.concatenate([np.full(nr, f0), np.linspace(f0, 0.0, nf + 1), np.zeros(vals.size - 1)])
        load = np.concatenate([np.full(nr + nf, vals[0]), vals])
        return speed, flash, load, nr + nf + np.arange(vals.size)


def occ_table(machine):
    """The OCC with its reversed-flux mirror ``E(-x) = 2 E_r - E(x)`` [A], [V].

    ngspice's ``pwl()`` continues its end segments linearly, which is the
    chord extrapolation of the design note on both sides.
    """
    x = np.asarray(machine.occ_field_current_a, float)
    e = np.asarray(machine.occ_emf_v, float)
    er = e[0]
    xs = np.concatenate([-x[:0:-1], x])
    es = np.concatenate([2 * er - e[:0:-1], e])
    return xs, es


def generator_netlist(machine, setting, sweep, title="dc generator", drive=None, repeat=1, timed=False):
    """ngspice netlist of ``machine`` run with ``setting`` against ``sweep``.

    Parameters
    ----------
    machine : supplycfg.machine.Machine
    setting : supplycfg.circuit.Setting
        Defaults are filled in from the machine data here (rated speed,
        reference temperature, no rheostat, the whole series winding).
    sweep : LoadSweep
    drive : DriveModel, optional
        The speed becomes a circuit node solved with everything else.
    repeat : int
        Times the sweep is solved in the one run.
    timed : bool
        Print ngspice's resource use, with the total analysis time of the run.

    Returns
    -------
    str
        The netlist; the sweep node ``t`` steps through :meth:`LoadSweep.path`.
    """
    m, s = machine, setting
    conn = s.connection
    nse = m.series_turns_per_pole if s.series_turns is None else s.series_turns
    uses_series = conn not in ("separate", "shunt") and nse > 0
    has_shunt = conn != "series"
    self_field = has_shunt and not conn.startswith("separate")
    speed = m.rated_speed_rpm if s.speed_rpm is None else s.speed_rpm
    temp = m.reference_temperature_c if s.winding_temperature_c is None else s.winding_temperature_c
    tc1 = 1.0 / (COPPER_INFERRED_ZERO_C + m.reference_temperature_c)
    copper = f"tc1={num(tc1)}"
    nsh = m.shunt_turns_per_pole
    L = [f"* {title}: {conn}",
         f".options tnom={num(m.reference_temperature_c)} reltol=1e-6",
         f".temp {num(temp)}"]
    # armature: EMF, resistance, brush contact, current sensor, out at node ap
    xs, es = occ_table(m)
    ratio = speed / m.occ_speed_rpm
    L.append(f"BE e 0 V = v(sp) * pwl(v(x), {pwl_args(xs, es)})")
    L.append(f"RA e a1 {num(m.armature_resistance_ohm)} {copper}")
    ramp = 0.01 * m.rated_armature_current_a  # design note: full drop beyond 1 % of rated current
    if m.brush_drop_v > 0:
        L.append(f"BBR a1 a2 V = {num(m.brush_drop_v)} * max(-1, min(1, i(vsa) / {num(ramp)}))")
    else:
        L.append("VBR a1 a2 0")
    L.append("VSA a2 ap 0")
    # series branch between ap and pos, or none
    if uses_series:
        rse = m.series_field_resistance_ohm * nse / m.series_turns_per_pole
        L.append("VSE ap s1 0")
        L.append(f"RSE s1 pos {num(rse)} {copper}")
        if s.diverter_ohm is not None:
            L.append(f"RDIV ap pos {num(s.diverter_ohm)}")
        sign = -1.0 if conn.endswith("differential") else 1.0
        series_mmf = f" + {num(sign * nse / nsh)} * i(vse)"
    else:
        L.append("VLINK ap pos 0")
        L.append("VSE nse 0 0")  # idle sensor: no series winding in circuit
        L.append("RNSE nse 0 1")
        series_mmf = ""
    # shunt field: separately fed, or across the terminals (long) or the armature (short)
    rheo = s.rheostat_ohm or 0.0
    if has_shunt:
        if not self_field:
            if s.field_current_a is not None:
                L.append(f"IEXC 0 f0 DC {num(s.field_current_a)}")
            else:
                L.append(f"VEXC f0 0 DC {num(m.excitation_voltage_v)}")
            top = "f0"
        else:
            top = "ap" if conn.startswith("short") else "pos"
        L.append(f"VSH {top} f1 0")
        if rheo > 0:
            L.append(f"RSH f1 f2 {num(m.shunt_field_resistance_ohm)} {copper}")
            L.append(f"RRH f2 0 {num(rheo)}")
        else:
            L.append(f"RSH f1 0 {num(m.shunt_field_resistance_ohm)} {copper}")
        shunt_mmf = "i(vsh)"
    else:
        L.append("VSH nsh 0 0")  # idle sensor: no shunt field in circuit
        L.append("RNSH nsh 0 1")
        shunt_mmf = "0"
    # net mmf per pole as an equivalent shunt-field current [A]: the windings' mmf at node xw,
    # then armature reaction shrinking it towards zero and never past it (design note)
    L.append(f"BXW xw 0 V = {shunt_mmf}{series_mmf} + v(fl)")
    if m.ar_at_per_pole_at_rated is not None:
        ar = f"{num(m.ar_at_per_pole_at_rated / m.rated_armature_current_a / nsh)} * abs(i(vsa))"
    elif m.ar_table_current_a is not None:
        ar = f"pwl(abs(i(vsa)), {pwl_args(m.ar_table_current_a, m.ar_table_at_per_pole)}) / {num(nsh)}"
    else:
        ar = None
    if ar is None:
        L.append("BX x 0 V = v(xw)")
    else:
        L.append(f"BX x 0 V = sgn(v(xw)) * max(abs(v(xw)) - {ar}, 0)")
    # run-up, field flash and load, stepped by the sweep node t
    run_up, flash, load, _ = sweep.path()
    ts = np.arange(load.size, dtype=float)
    L.append("VT t 0 DC 0")
    if drive is None:
        L.append(f"BSP sp 0 V = pwl(v(t), {pwl_args(ts, run_up * ratio)})")
    else:
        d = drive
        L.append(f"BRU ru 0 V = pwl(v(t), {pwl_args(ts, run_up)})")
        L.append(f"BPS ps 0 V = v(e) * i(vsa) + {num(d.rotational_w)} * pwr(max(v(sp), 0) / "
                 f"{num(d.rated_speed_ratio)}, {num(d.exponent)}) + {num(d.stray_fraction)} * abs(v(pos) * i(vsl))")
        floor = num(SPEED_FLOOR_SHARE)
        if d.kind == "engine":
            share = f"max({floor}, 1 - {num(d.fraction / d.rated_w)} * v(ps))"
        else:
            c = d.fraction * (1 - d.fraction) / d.rated_w
            share = f"max({floor}, 0.5 * (1 + sqrt(max(1 - {num(4 * c)} * v(ps), 0))))"
        L.append(f"BSP sp 0 V = v(ru) * {num(d.s0)} * {share}")
    L.append(f"BLV lv 0 V = pwl(v(t), {pwl_args(ts, load)})")
    L.append(f"BFL fl 0 V = pwl(v(t), {pwl_args(ts, flash)})")
    L.append("VSL pos l1 0")
    if sweep.kind == "conductance":
        L.append("BL l1 0 I = v(l1) * v(lv)")
    elif sweep.kind == "current":
        L.append("BL l1 0 I = v(lv)")
    elif sweep.kind == "battery":
        L.append(f"RB l1 l2 {num(sweep.battery_ohm)}")
        L.append("BBAT l2 0 V = v(lv)")
    else:
        raise ValueError(f"unknown load kind {sweep.kind!r}")
    step = 1.0 / sweep.substeps
    L += [".control",
          "option numdgt=10",
          "set wr_singlescale",
          "set wr_vecnames",
          *[f"dc VT 0 {num(load.size - 1)} {num(step)}"] * int(repeat),
          "wrdata out.txt " + " ".join(VECTORS + (DRIVE_VECTORS if drive is not None else ())),
          *(["rusage everything"] if timed else []),
          "quit",  # leave with status 0 (batch mode without .print otherwise ends with 1)
          ".endc",
          ".end"]
    return "\n".join(L) + "\n"


#: ngspice's line with the analysis time of every analysis of the run (``rusage``).
ANALYSIS_TIME = re.compile(r"Total analysis time \(seconds\) = ([0-9.eE+-]+)")


def run(netlist, workdir, name="circuit", output=None):
    """Run ``netlist`` with ``ngspice -b`` in ``workdir``; return its table.

    Returns
    -------
    dict of ndarray
        The sweep value ``t`` and one array per :data:`KEYS`.

    Raises
    ------
    SpiceError
        When ngspice is missing, fails, or writes no table.

    ``output``, a list, receives ngspice's printed text when given.
    """
    if NGSPICE is None:
        raise SpiceError("ngspice is not installed")
    workdir = Path(workdir) / name
    workdir.mkdir(parents=True, exist_ok=True)
    cir = workdir / f"{name}.cir"
    out = workdir / "out.txt"
    cir.write_text(netlist)
    proc = subprocess.run([NGSPICE, "-b", cir.name], cwd=workdir, capture_output=True,
                          text=True, timeout=60)
    text = proc.stdout + proc.stderr
    if output is not None:
        output.append(text)
    trouble = [ln for ln in text.splitlines()
               if any(w in ln.lower() for w in ("error", "abort"))]
    if proc.returncode != 0 or trouble or not out.exists():
        tail = "\n".join((trouble or text.splitlines())[-20:])
        raise SpiceError(f"ngspice failed ({proc.returncode}) on {cir.name}:\n{tail}")
    lines = out.read_text().split("\n")
    header = lines[0].split()
    names = dict(zip(VECTORS + DRIVE_VECTORS, KEYS + DRIVE_KEYS))
    if len(header) not in (len(VECTORS) + 1, len(VECTORS) + len(DRIVE_VECTORS) + 1) or \
            any(h.lower() not in names for h in header[1:]):
        raise SpiceError(f"unexpected wrdata header {header!r}")
    data = np.loadtxt(lines[1:], ndmin=2)
    res = {"t": data[:, 0]}
    res.update({names[h.lower()]: data[:, i + 1] for i, h in enumerate(header[1:])})
    return res


def solve(machine, setting, sweep, workdir, name="circuit", drive=None):
    """Run the generator circuit (on ``drive``, a :class:`DriveModel`); keep the rows at the sweep's own values.

    Returns
    -------
    dict of ndarray
        One entry per value of ``sweep.values``, in the sweep's order.
    """
    res = run(generator_netlist(machine, setting, sweep, name, drive), workdir, name)
    rows = sweep.path()[3]
    keep = np.array([int(np.argmin(np.abs(res["t"] - k))) for k in rows])
    if np.any(np.abs(res["t"][keep] - rows) > 1e-6):
        raise SpiceError(f"{name}: the sweep did not reach every value")
    return {k: v[keep] for k, v in res.items()}


def heavy_to_light(conductances_s, heavy_s=50.0, fill=10):
    """Load conductances [S] from a heavy load (where the circuit has one solution) down through every target.

    ``fill`` geometric points lead from ``heavy_s`` to the heaviest target and
    keep the first steps of the continuation small; the targets follow in
    falling order, no load (0 S) last.
    """
    targets = np.asarray(conductances_s, float)
    top = targets.max()
    lead = np.geomspace(max(heavy_s, 2 * top), top, fill + 1)[:-1] if top > 0 else np.zeros(0)
    return tuple(np.concatenate([lead, np.unique(targets)[::-1]]))


def characteristic_by_ngspice(machine, setting, conductances_s, workdir, repeat=20, flash_a=None):
    """A self-excited machine's points at the load conductances ``conductances_s`` [S], and ngspice's time.

    The sweep runs from a heavy load down to no load with one sweep point
    per conductance (a run-up of the drive first), solved ``repeat`` times in
    one ngspice run; the time is ngspice's own total analysis time over the
    solves divided by ``repeat``: the analysis without the process start
    and the netlist parsing.

    Returns
    -------
    (dict of ndarray, float)
        The rows at ``conductances_s`` (as :func:`solve`, in the order of the
        sweep, heavy load first) and the analysis time of one sweep [s].
    """
    sweep = LoadSweep("conductance", heavy_to_light(conductances_s), substeps=1, flash_a=flash_a,
                      run_up_steps=10, flash_steps=10)
    text = []
    res = run(generator_netlist(machine, setting, sweep, "characteristic", repeat=repeat, timed=True), workdir,
              "characteristic", output=text)
    found = ANALYSIS_TIME.search(text[0])
    if found is None:
        raise SpiceError("ngspice printed no analysis time")
    rows = sweep.path()[3]
    keep = np.array([int(np.argmin(np.abs(res["t"] - k))) for k in rows])
    return {k: v[keep] for k, v in res.items()}, float(found.group(1)) / repeat
