"""Safety cautions: rules with a severity, a message, what they rest on, and the figures.

A ``stop`` caution makes a setting unfit to offer; ``warn`` and ``note``
travel with it onto the setting sheet. Every rule states its basis; where
none is published it says "common practice". Local codes, the
manufacturers' instructions and licensed practice come first.
"""

import math

from dataclasses import dataclass, field

from .wording import field_words

SEVERITIES = ("stop", "warn", "note")
#: Share of the critical field resistance or speed kept clear of it (issue rule;
#: common practice: a machine near critical may not build up after a stop).
CRITICAL_CLEARANCE = 0.10
#: Drive speed above rated at which overspeed becomes a stop: the 1.2 x
#: overspeed test of IEC 60034-1 is a test, not a working speed (common practice).
OVERSPEED_STOP_FACTOR = 1.2
#: Drive speed above rated that a governed engine or a motor drive reaches at light
#: load within its speed band: a note, not a warning. Governed diesel engines run a
#: few per cent of droop from no load to rated power, induction motors 2-5 % slip
#: (common practice, from memory); 5 % taken.
GOVERNOR_BAND_FRACTION = 0.05


@dataclass(frozen=True)
class Caution:
    """One caution: ``rule`` id, ``severity``, ``message``, ``basis`` and triggering ``figures``."""

    rule: str
    severity: str
    message: str
    basis: str
    figures: dict = field(default_factory=dict)

    def as_dict(self):
        return {"rule": self.rule, "severity": self.severity, "message": self.message,
                "basis": self.basis, "figures": dict(self.figures)}


def caution(rule, severity, message, basis, **figures):
    """A :class:`Caution`; ``figures`` are the values that triggered it."""
    return Caution(rule, severity, message, basis, {k: v for k, v in figures.items()})


#: Share above the rated voltage past which a no-load voltage is worth a note: a shunt generator's
#: regulation is about 5-10 % (common practice, from memory).
NO_LOAD_ABOVE_RATED_FRACTION = 0.10
#: Share above the rated voltage a machine may work at steadily: IEC 60034-1 voltage zone A, +-5 %
#: (from memory).
OVERVOLTAGE_FRACTION = 0.05


def above_rated_words(volts, machine):
    """``'191 V, 19 % above its rated 160 V'``: a voltage against the machine's rating, in words."""
    rated = machine.rated_voltage_v
    return f"{volts:.0f} V, {100 * (volts / rated - 1):.0f} % above its rated {rated:g} V"


def setting_cautions(machine, setting, f):
    """Cautions of one setting that hold whatever the job, from its figures ``f``.

    Keys read (each optional): ``min_net_mmf_a``, ``min_generated_emf_v``,
    ``max_armature_current_a`` (``max_working_armature_current_a``, where
    given, leaves out a short of a moment such as a stuck electrode for the
    continuous rating), ``critical_resistance_ratio`` (least
    ``R_crit / R_field`` over the range), ``critical_speed_ratio`` (least
    ``n / n_crit``), ``top_speed_rpm``. The jobs add their own
    (:mod:`supplycfg.jobs`).
    """
    out = []
    conn = setting.connection
    mmf = f.get("min_net_mmf_a")
    if mmf is not None and mmf < 0:
        if conn.startswith("separate"):
            # no build-up to lose: the risk is the flux, and the voltage, turning round under load
            said = ("the series and armature mmf overcome the separate field (net mmf below zero): the flux in the "
                    "poles turns round there, the generated voltage falls below the residual and, further on, its "
                    "polarity turns over.")
        else:
            said = (("the armature reaction overcomes the series field" if conn == "series" else
                     "the series and armature mmf overcome the shunt field")
                    + " (net mmf below zero): the residual magnetism may be wiped out or reversed, and the machine "
                      "may not build up next time.")
        out.append(caution("reversed-mmf", "warn", "At some operating point " + said,
                      "equivalent-field-current method (design note); common practice", min_net_mmf_a=mmf))
    emf = f.get("min_generated_emf_v")
    if emf is not None and emf < 0:
        out.append(caution("reversed-polarity", "stop",
                      "At some operating point the generated EMF is reversed: the machine's polarity has turned over.",
                      "circuit model (design note)", min_generated_emf_v=emf))
    ia = f.get("max_armature_current_a")
    # a short of a moment (a stuck electrode) is held to the short-time limit, not to the continuous rating
    iw = ia if f.get("max_working_armature_current_a") is None else f["max_working_armature_current_a"]
    if ia is not None:
        if ia > machine.peak_current_a:
            out.append(caution("armature-peak", "stop",
                          f"Armature current reaches {ia:.0f} A, above the machine's short-time limit "
                          f"{machine.peak_current_a:.0f} A: commutation fails (sparking, flashover).",
                          "machine file peak_armature_current_a (default 2 x rated, common practice)",
                          max_armature_current_a=ia, peak_armature_current_a=machine.peak_current_a))
        elif iw > machine.rated_armature_current_a * (1 + 1e-9):
            out.append(caution("armature-rating", "warn",
                          f"Armature current reaches {iw:.0f} A, above its continuous rating "
                          f"{machine.rated_armature_current_a:.0f} A: limit the time at this load.",
                          "machine rating plate (continuous rating)", max_armature_current_a=iw))
    rr, sr = f.get("critical_resistance_ratio"), f.get("critical_speed_ratio")
    below = [v for v in (rr, sr) if v is not None and v < 1]
    near = [v for v in (rr, sr) if v is not None and v < 1 + CRITICAL_CLEARANCE]
    # a series machine's field circuit is the whole loop through its load
    circuit = "The circuit (load, armature and series field)" if conn == "series" else "The field circuit"
    if below:
        # past the critical point, not near it: no build-up there at all
        cure = ("Close it on a lower load resistance (or raise the speed)" if conn == "series" else
                "Raise the speed (the rheostat is already all out)" if not setting.rheostat_ohm else
                "Lower the field rheostat (or raise the speed)")
        out.append(caution("below-critical", "warn",
                      f"{circuit} is above its critical resistance (or the speed below its critical speed) "
                      f"somewhere in the speed and temperature range (critical over actual {min(below):.2f}): there the "
                      f"machine does not build up: what voltage it gives rests on the residual magnetism alone and "
                      f"wanders with speed and temperature. {cure} until the "
                      f"ratio is above {1 + CRITICAL_CLEARANCE:.1f} everywhere.",
                      "self-excitation conditions (Theraja Vol II ch. 28; Kosow ch. 3); 10 % clearance is common practice",
                      critical_resistance_ratio=rr, critical_speed_ratio=sr))
    elif near:
        out.append(caution("near-critical", "warn",
                      f"{circuit} is within 10 % of its critical resistance (or the speed within 10 % of critical) "
                      "somewhere in the speed and temperature range: the machine may fail to build up, or collapse on load.",
                      "self-excitation conditions (Theraja Vol II ch. 28; Kosow ch. 3); 10 % clearance is common practice",
                      critical_resistance_ratio=rr, critical_speed_ratio=sr))
    vt = f.get("max_terminal_voltage_v")
    if vt is not None and vt > (1 + OVERVOLTAGE_FRACTION) * machine.rated_voltage_v:
        out.append(caution("over-voltage", "warn",
                      f"At the job's points the machine works at up to {above_rated_words(vt, machine)}, past the "
                      f"{100 * OVERVOLTAGE_FRACTION:.0f} % a machine may work at steadily: commutation, insulation "
                      "and the field's heating are rated at the plate voltage. The setting meets the job's limits, "
                      "not the machine's rating: ask the machine's maker before working it there, or use a machine "
                      "rated for the job's voltage.",
                      "rating plate; IEC 60034-1 voltage zone A, rated voltage +-5 % (from memory)",
                      max_terminal_voltage_v=vt, rated_voltage_v=machine.rated_voltage_v))
    vnl = f.get("no_load_voltage_max_v")
    if vnl is not None and vnl > (1 + NO_LOAD_ABOVE_RATED_FRACTION) * machine.rated_voltage_v:
        # a charging set sits at no load before its cut-out closes and whenever it opens (safety review)
        out.append(caution("no-load-high", "warn",
                      f"With the load off the machine gives up to {above_rated_words(vnl, machine)}: "
                      "the field set for the job runs it high at no load, stressing commutator and insulation, and "
                      "anything else left on its terminals sees it. Keep the no-load run short, disconnect other "
                      "loads, and use a voltmeter whose range covers it.",
                      "a shunt generator's no-load voltage is about 5-10 % above its rated (regulation; common "
                      "practice, from memory)", no_load_voltage_max_v=vnl, rated_voltage_v=machine.rated_voltage_v))
    top = f.get("top_speed_rpm")
    rated = machine.rated_speed_rpm
    # a machine that motors its drive at some point of the job (a bank back-feeding it) runs above the drive's
    # top speed: the highest speed is what the rotor sees
    driven = f.get("max_speed_rpm")
    driven = driven if driven is not None and math.isfinite(driven) and top is not None and driven > top else None
    top = driven if driven is not None else top
    if top is not None and top > rated * (1 + 1e-9):
        if top > OVERSPEED_STOP_FACTOR * rated:
            sev, what = "stop", (f"more than {100 * (OVERSPEED_STOP_FACTOR - 1):.0f} % above the machine's rated "
                                 f"{rated:.0f} rpm: the speed of the overspeed test, not a working speed")
        elif top > (1 + GOVERNOR_BAND_FRACTION) * rated:
            sev, what = "warn", (f"above the machine's rated {rated:.0f} rpm by more than a governor's band "
                                 f"({100 * GOVERNOR_BAND_FRACTION:.0f} %): commutator and banding are stressed")
        else:
            sev, what = "note", (f"above the machine's rated {rated:.0f} rpm, within a governor's band "
                                 f"({100 * GOVERNOR_BAND_FRACTION:.0f} %)")
        out.append(caution("overspeed", sev,
                      (f"Driven as a motor at some point of the job, the machine reaches {top:.0f} rpm, " if driven
                       else f"Drive speed {top:.0f} rpm is ") + f"{what}; the voltage rises with speed.",
                      "rating plate; IEC 60034-1 overspeed test 1.2 x rated for 2 min, a test not a duty (from memory); "
                      "governor band of a few per cent for governed engines and motor slip (common practice, from memory)",
                      top_speed_rpm=top))
    if conn != "series":
        out.append(caution("field-switching", "warn",
                      f"Do not open the {field_words(conn)} circuit "
                      "while it carries current: its inductance drives a voltage spike "
                      "across the switch and the insulation. Use a field switch with a discharge resistor (or a "
                      "freewheel path) and reduce the field before opening.",
                      "common practice for DC machine field circuits (field discharge resistor)"))
    return out


def job_current_cautions(machine, load_current_a, what="load"):
    """Where the job itself asks more current than the machine can carry, whatever the setting.

    A lighting feeder or a series booster carries the job's load current
    (the armature at least that much): above the continuous rating the
    machine is too small for the job's full load (a warning: no setting cures
    it), above the short-time limit it cannot carry it at all (a stop).

    Parameters
    ----------
    machine : Machine
    load_current_a : float
        The job's heaviest load current [A].
    what : str, optional
        The load in words (``"load"``, ``"feeder current"``).

    Returns
    -------
    list of Caution
    """
    i = float(load_current_a)
    rated, peak = machine.rated_armature_current_a, machine.peak_current_a
    if i > peak:
        return [caution("job-above-peak", "stop",
                        f"The job's heaviest {what}, {i:g} A, is above the machine's short-time limit of {peak:.0f} A "
                        f"(continuous rating {rated:g} A): the machine is too small for this job at any setting "
                        "(commutation fails: sparking, flashover). Use a machine rated for at least "
                        f"{i:g} A, or share the load with another set.",
                        "machine file rated and peak_armature_current_a (peak default 2 x rated, common practice)",
                        load_current_a=i, peak_armature_current_a=peak, rated_armature_current_a=rated)]
    if i > rated * (1 + 1e-9):
        return [caution("job-above-rating", "warn",
                        f"The job's heaviest {what}, {i:g} A, is {100 * (i / rated - 1):.0f} % above the machine's "
                        f"continuous rating of {rated:g} A: no setting changes that, the machine is too small for "
                        "the job's full load. Carry the heaviest load only for short times (the machine's "
                        f"short-time limit is {peak:.0f} A), share it with another set, or use a machine rated for "
                        f"at least {i:g} A.",
                        "machine rating plate (continuous rating); the job's load current",
                        load_current_a=i, rated_armature_current_a=rated)]
    return []


def short_circuit_cautions(machine, armature_current_a, at_least=False):
    """Where a traced characteristic runs on to a short circuit past the machine's short-time limit: a note
    that the machine and its leads must be protected against it (the curve is not a working point).
    ``at_least``: the curve stopped at the end of its span before the short circuit."""
    ia = armature_current_a
    if ia is None or not ia > machine.peak_current_a:
        return []
    return [caution("short-circuit-protection", "note",
                    f"Run on to a short circuit, the armature current reaches {'at least ' if at_least else ''}"
                    f"{ia:.0f} A, above the machine's "
                    f"short-time limit {machine.peak_current_a:.0f} A: protect the machine and its leads with a "
                    "breaker or fuses that clear a short at the terminals.",
                    "machine file peak_armature_current_a (default 2 x rated, common practice); circuit model",
                    short_circuit_armature_current_a=ia, peak_armature_current_a=machine.peak_current_a)]


def operating_point_cautions(ops):
    """Cautions of the operating points of one setting on one load (``OperatingPoints``).

    A reversed build-up (generated EMF below zero) is a ``stop``; a source
    load driving current into the machine (back-feeding) a ``warn``; a
    machine whose highest stable point lies beyond the searched span (it
    runs away) a ``stop``.
    """
    out = []
    rev = [p for p in ops.points if p.get("reversed")]
    normal = ops.normal
    if rev and normal is not None and not normal.get("reversed"):
        # the machine sits at its normal point: the reversed state is where it would be had it built up the
        # wrong way round, which the polarity check before closing catches
        p = next((q for q in rev if q["stable"]), rev[0])
        out.append(caution("reversed-state", "note",
                      f"A reversed state also exists at {p['terminal_voltage_v']:.4g} V (generated EMF "
                      f"{p['generated_emf_v']:.4g} V): the machine is there only if it built up with reversed polarity. "
                      "Check the polarity with a voltmeter before closing onto the load.",
                      "reversed states (design note); polarity check: common practice",
                      terminal_voltage_v=p["terminal_voltage_v"], generated_emf_v=p["generated_emf_v"]))
    elif rev:
        p = next((q for q in rev if q["stable"]), rev[0])
        out.append(caution("reversed-build-up", "stop",
                      f"At {p['terminal_voltage_v']:.4g} V the generated EMF is {p['generated_emf_v']:.4g} V: that "
                      "state is the machine built up with reversed polarity. If the machine is found there, stop it "
                      "and restore the polarity (flash the field from a separate supply the right way round) "
                      "before connecting a load.",
                      "reversed states (design note); flashing the field: common practice",
                      terminal_voltage_v=p["terminal_voltage_v"], generated_emf_v=p["generated_emf_v"]))
    back = [p for p in ops.points if p.get("back_feeding") and not p.get("reversed")]
    if back:
        p = next((q for q in back if q["stable"]), back[0])
        # an unstable state is not where the machine sits: it is where it goes if pushed past it
        at = (f"At {p['terminal_voltage_v']:.4g} V the load drives" if p["stable"] else
              f"If the speed or the field falls, the machine can be pushed to an unstable state at "
              f"{p['terminal_voltage_v']:.4g} V where the load drives")
        out.append(caution("back-feeding", "warn",
                      f"{at} {-p['load_current_a']:.4g} A back into the "
                      "machine, which runs as a motor and discharges the source: fit a reverse-current cut-out or "
                      "a blocking diode.",
                      "common practice for DC charging sets (reverse-current relay)",
                      terminal_voltage_v=p["terminal_voltage_v"], load_current_a=p["load_current_a"]))
    if ops.runaway:
        out.append(caution("runaway", "stop",
                      f"No operating point can be given: {ops.message}. Do not close onto this load with this "
                      "setting.", "circuit model (design note: the highest stable intersection)"))
    return out

#: Overload an engine can give beyond its rating: 10 % for one hour in twelve (ISO 3046-1 overload power,
#: from memory); past it the governor is at full fuel and the engine bogs down.
ENGINE_OVERLOAD_FACTOR = 1.10


def motor_stall_cautions(torque_percent, breakdown_percent):
    """A ``stop`` where a motor would need more than its breakdown torque [% of rated]: it stalls, and no
    operating point worked out past it exists."""
    tq, bd = torque_percent, breakdown_percent
    if tq is None or bd is None or not tq > bd:
        return []
    return [caution("drive-stall", "stop",
                    f"The motor would need {tq:.0f} % of its rated torque, above its breakdown torque of {bd:.0f} %: "
                    "it stalls (its protection trips, or it overheats); the speed and voltage worked out there do "
                    "not exist.",
                    "induction-motor breakdown torque (the profile's breakdown_torque_percent; default 200-250 % "
                    "of rated torque, common practice, from memory)",
                    max_drive_torque_percent=tq, breakdown_torque_percent=bd)]


def drive_overload_cautions(drive, kw, where="at the heaviest point", torque_percent=None):
    """Cautions where the shaft power ``kw`` [kW] passes the drive's rating (none for a fixed speed);
    ``where`` says which point it is.

    A motor past its rating runs hot (``warn``; past its breakdown torque it
    stalls, see :func:`drive_cautions`); an engine gives at most its overload
    (``ENGINE_OVERLOAD_FACTOR``): within it a ``warn``, past it a ``stop``.
    """
    out = []
    if drive is None or not drive.coupled:
        return out
    if drive.kind == "motor":
        out += motor_stall_cautions(torque_percent, drive.breakdown_torque_percent)
    rating = drive.rated_power_kw
    if kw is None or not rating or not kw > rating * (1 + 1e-9):
        return out
    share = f"{kw:.3g} kW at the shaft {where}, {100 * kw / rating:.0f} % of its rated {rating:g} kW"
    if drive.kind == "motor":
        out.append(caution("drive-overload", "warn",
                      f"The motor must give {share}: it runs hot and its protection trips, and it slips further. "
                      "Use a larger motor or a lighter setting.",
                      "the profile's rated_power_kw (rating plate, continuous duty)",
                      max_shaft_power_kw=kw, rated_power_kw=rating))
    elif kw > ENGINE_OVERLOAD_FACTOR * rating:
        out.append(caution("drive-overload", "stop",
                      f"The engine must give {share}, past the {100 * (ENGINE_OVERLOAD_FACTOR - 1):.0f} % overload an "
                      "engine can give: at full fuel it bogs down and stalls, and the figures at that point do not "
                      "hold. Use a larger engine or a lighter setting.",
                      "the profile's rated_power_kw; ISO 3046-1 overload power, 110 % for one hour in twelve "
                      "(from memory)", max_shaft_power_kw=kw, rated_power_kw=rating))
    else:
        out.append(caution("drive-overload", "warn",
                      f"The engine must give {share}: inside its short overload only, for at most an hour in twelve. "
                      "Use a larger engine or a lighter setting for steady work.",
                      "the profile's rated_power_kw; ISO 3046-1 overload power, 110 % for one hour in twelve "
                      "(from memory)", max_shaft_power_kw=kw, rated_power_kw=rating))
    return out


def drive_cautions(machine, drive, f):
    """Cautions of the drive that turns the set (an engine or a motor), from a setting's figures ``f``.

    Keys read (each optional): ``max_drive_torque_percent``,
    ``breakdown_torque_percent``, ``collapsed_load_points``,
    ``min_speed_rpm``, ``max_shaft_power_kw``, ``idle_no_load_voltage_v``,
    ``idle_builds_up``.
    """
    out = []
    if drive is None or not drive.coupled:
        return out
    f = {k: v for k, v in f.items() if v is not None and not (isinstance(v, float) and not math.isfinite(v))}
    out += motor_stall_cautions(f.get("max_drive_torque_percent"), f.get("breakdown_torque_percent"))
    col = f.get("collapsed_load_points")
    if col is not None and col > 0:
        out.append(caution("drive-collapse", "stop",
                      "At the speed the drive falls to under load the self-excited field cannot hold a stable "
                      "loaded point: the voltage collapses.",
                      "self-excitation below critical speed, with the drive's speed solved at the load "
                      "(Theraja Vol II ch. 28; design note)", collapsed_load_points=col))
    kw = f.get("max_shaft_power_kw")
    out += drive_overload_cautions(drive, kw)
    lo, top = f.get("min_speed_rpm"), f.get("top_speed_rpm")
    if lo is not None and top is not None:
        hi_ = f.get("max_speed_rpm")
        driven = hi_ is not None and hi_ > top * (1 + 1e-6)
        out.append(caution("drive-speed", "note",
                      (f"The {drive.kind} is driven faster than at no load: up to {hi_:.0f} rpm at the generator "
                       f"against {top:.0f} rpm with no load, the machine running as a motor at some point of the job"
                       if driven else
                       f"The {drive.kind} slows with load: about {f.get('no_load_speed_rpm', top):.0f} rpm at the "
                       "generator with the load off, down to "
                       f"{lo:.0f} rpm at the heaviest point of the job")
                      + (f" ({kw:.3g} kW at the shaft)" if kw is not None else "")
                      + f". Every figure is at the speed the drive {'settles at' if driven else 'falls to'}; check it with a "
                        "tachometer.",
                      "drive characteristic from the profile (engine droop or motor slip; common practice)",
                      top_speed_rpm=top, min_speed_rpm=lo))
    vi, bi = f.get("idle_no_load_voltage_v"), f.get("idle_builds_up")
    if drive.idle_speed_rpm is not None and (vi is not None or bi is not None):
        words = [f"At the engine's idle ({drive.idle_generator_speed_rpm:.0f} rpm at the generator)"]
        if bi is not None:
            words.append("the shunt field builds up" if bi >= 1 else
                         "the shunt field does not build up (below its critical speed)")
        if vi is not None:
            words.append(f"the no-load voltage is about {vi:.0f} V")
        out.append(caution("drive-idle", "note", ", ".join(words[:1]) + " " + " and ".join(words[1:]) +
                      "; no limit is checked at idle.",
                      ("critical speed of self-excitation (Theraja Vol II ch. 28)" if bi is not None
                       else "EMF proportional to speed at a given field, E = k Phi n (Theraja Vol II ch. 26, from memory)")
                      + "; engine idle from the profile",
                      idle_no_load_voltage_v=vi, idle_builds_up=bi))
    return out
