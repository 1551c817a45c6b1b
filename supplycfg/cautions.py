"""Safety cautions: rules with a severity, a message, what they rest on, and the figures.

A ``stop`` caution makes a setting unfit to offer; ``warn`` and ``note``
travel with it onto the setting sheet. Every rule states its basis; where
none is published it says "common practice". Local codes, the
manufacturers' instructions and licensed practice come first.
"""

from dataclasses import dataclass, field

SEVERITIES = ("stop", "warn", "note")
#: Share of the critical field resistance or speed kept clear of it (issue rule;
#: common practice: a machine near critical may not build up after a stop).
CRITICAL_CLEARANCE = 0.10
#: Drive speed above rated at which overspeed becomes a stop: the 1.2 x
#: overspeed test of IEC 60034-1 is a test, not a working speed (common practice).
OVERSPEED_STOP_FACTOR = 1.2


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


def setting_cautions(machine, setting, f):
    """Cautions of one setting that hold whatever the job, from its figures ``f``.

    Keys read (each optional): ``min_net_mmf_a``, ``min_generated_emf_v``,
    ``max_armature_current_a``, ``critical_resistance_ratio`` (least
    ``R_crit / R_field`` over the range), ``critical_speed_ratio`` (least
    ``n / n_crit``), ``top_speed_rpm``. The jobs add their own
    (:mod:`supplycfg.jobs`).
    """
    out = []
    conn = setting.connection
    mmf = f.get("min_net_mmf_a")
    if mmf is not None and mmf < 0:
        out.append(caution("reversed-mmf", "warn",
                      "At some operating point the series and armature mmf overcome the shunt field (net mmf below zero): "
                      "the residual magnetism may be wiped out or reversed, and the machine may not build up next time.",
                      "equivalent-field-current method (design note); common practice", min_net_mmf_a=mmf))
    emf = f.get("min_generated_emf_v")
    if emf is not None and emf < 0:
        out.append(caution("reversed-polarity", "stop",
                      "At some operating point the generated EMF is reversed: the machine's polarity has turned over.",
                      "circuit model (design note)", min_generated_emf_v=emf))
    ia = f.get("max_armature_current_a")
    if ia is not None:
        if ia > machine.peak_current_a:
            out.append(caution("armature-peak", "stop",
                          f"Armature current reaches {ia:.0f} A, above the machine's short-time limit "
                          f"{machine.peak_current_a:.0f} A: commutation fails (sparking, flashover).",
                          "machine file peak_armature_current_a (default 2 x rated, common practice)",
                          max_armature_current_a=ia, peak_armature_current_a=machine.peak_current_a))
        elif ia > machine.rated_armature_current_a * (1 + 1e-9):
            out.append(caution("armature-rating", "warn",
                          f"Armature current reaches {ia:.0f} A, above its continuous rating "
                          f"{machine.rated_armature_current_a:.0f} A: limit the time at this load.",
                          "machine rating plate (continuous rating)", max_armature_current_a=ia))
    rr, sr = f.get("critical_resistance_ratio"), f.get("critical_speed_ratio")
    near = [v for v in (rr, sr) if v is not None and v < 1 + CRITICAL_CLEARANCE]
    if near:
        out.append(caution("near-critical", "warn",
                      "The field circuit is within 10 % of its critical resistance (or the speed within 10 % of critical) "
                      "somewhere in the speed and temperature range: the machine may fail to build up, or collapse on load.",
                      "self-excitation conditions (Theraja Vol II ch. 28; Kosow ch. 3); 10 % clearance is common practice",
                      critical_resistance_ratio=rr, critical_speed_ratio=sr))
    top = f.get("top_speed_rpm")
    if top is not None and top > machine.rated_speed_rpm * (1 + 1e-9):
        sev = "stop" if top > OVERSPEED_STOP_FACTOR * machine.rated_speed_rpm else "warn"
        out.append(caution("overspeed", sev,
                      f"Drive speed {top:.0f} rpm is above the machine's rated {machine.rated_speed_rpm:.0f} rpm: "
                      "commutator and banding are stressed and the voltage rises with speed.",
                      "rating plate; IEC 60034-1 overspeed test is 1.2 x rated for 2 min, a test not a duty (from memory)",
                      top_speed_rpm=top))
    if conn != "series":
        out.append(caution("field-switching", "warn",
                      "Do not open the shunt field circuit while it carries current: its inductance drives a voltage spike "
                      "across the switch and the insulation. Use a field switch with a discharge resistor (or a "
                      "freewheel path) and reduce the field before opening.",
                      "common practice for DC machine field circuits (field discharge resistor)"))
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
    tq, bd = f.get("max_drive_torque_percent"), f.get("breakdown_torque_percent")
    if tq is not None and bd is not None and tq > bd:
        out.append(caution("drive-stall", "stop",
                      f"The motor would need {tq:.0f} % of its rated torque, above its breakdown torque of {bd:.0f} %: "
                      "it stalls (its protection trips, or it overheats).",
                      "induction-motor breakdown torque (the profile's breakdown_torque_percent; default 200-250 % "
                      "of rated torque, common practice, from memory)",
                      max_drive_torque_percent=tq, breakdown_torque_percent=bd))
    col = f.get("collapsed_load_points")
    if col is not None and col > 0:
        out.append(caution("drive-collapse", "stop",
                      "At the speed the drive falls to under load the self-excited field cannot hold a stable "
                      "loaded point: the voltage collapses.",
                      "self-excitation below critical speed, with the drive's speed solved at the load "
                      "(Theraja Vol II ch. 28; design note)", collapsed_load_points=col))
    lo, top = f.get("min_speed_rpm"), f.get("top_speed_rpm")
    if lo is not None and top is not None:
        kw = f.get("max_shaft_power_kw")
        out.append(caution("drive-speed", "note",
                      f"The {drive.kind} slows with load: about {top:.0f} rpm at the generator with no load, down to "
                      f"{lo:.0f} rpm at the heaviest point of the job"
                      + (f" ({kw:.3g} kW at the shaft)" if kw is not None else "")
                      + ". Every figure is at the speed the drive falls to; check it with a tachometer.",
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
                      "critical speed of self-excitation (Theraja Vol II ch. 28); engine idle from the profile",
                      idle_no_load_voltage_v=vi, idle_builds_up=bi))
    return out
