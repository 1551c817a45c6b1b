"""Safety cautions: rules with a severity, a message, what they rest on, and the figures.

A ``stop`` caution makes a setting unfit to offer; ``warn`` and ``note``
travel with it onto the setting sheet. Every rule states its basis; where
none is published it says "common practice". Local codes, the
manufacturers' instructions and licensed practice come first.
"""

from dataclasses import dataclass, field

from . import loads

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


def _c(rule, severity, message, basis, **figures):
    return Caution(rule, severity, message, basis, {k: v for k, v in figures.items()})


def option_cautions(machine, profile, setting, f):
    """Cautions of one setting from its figures ``f`` (a dict of named values).

    Keys read (each optional): ``min_net_mmf_a``, ``min_generated_emf_v``,
    ``max_armature_current_a``, ``duty_equivalent_current_a``,
    ``critical_resistance_ratio`` (least ``R_crit / R_field`` over the range),
    ``critical_speed_ratio`` (least ``n / n_crit``), ``end_volts_per_cell``,
    ``gassing_volts_per_cell``, ``ventilation_m3_per_h``,
    ``no_load_peak_voltage_v``, ``no_load_limit_v``, ``top_speed_rpm``.
    """
    out = []
    conn = setting.connection
    turns = setting.series_turns or 0.0
    kind = profile.kind
    if kind == "battery":
        if conn == "series" or (conn.endswith("cumulative") and turns > 0):
            out.append(_c("battery-series-back-current", "stop",
                          "Series turns in circuit with a battery: when the machine slows, the battery drives current back "
                          "through the series field, which weakens or reverses the field and can reverse the machine's "
                          "polarity onto the battery. Use a shunt or separately excited connection with no series turns.",
                          "textbook rule for charging generators (Theraja Vol II ch. 28, from memory); common practice",
                          connection=conn, series_turns=turns))
        out.append(_c("battery-reverse-current", "warn",
                      "Fit a reverse-current cut-out or a blocking diode: if the machine slows or stops, the battery "
                      "drives it as a motor and discharges into it.",
                      "common practice for DC charging sets (reverse-current relay)"))
        out.append(_c("battery-polarity", "note",
                      "Check the machine's polarity with a voltmeter before closing onto the battery: a self-excited "
                      "machine can build up reversed.", "common practice"))
        ev, gv = f.get("end_volts_per_cell"), f.get("gassing_volts_per_cell")
        if ev is not None and gv is not None and ev > gv:
            q = f.get("ventilation_m3_per_h")
            out.append(_c("battery-gassing", "warn",
                          f"The charge finishes at {ev:.3f} V per cell, above the gassing voltage {gv:.2f} V: the cells "
                          f"give off hydrogen and oxygen. Ventilate the battery room (at least {q:.3g} m3/h by the "
                          f"standard's formula), keep flames and sparks away, and do not break battery connections under load.",
                          "IEC 62485-2 ventilation formula Q = 0.05 n Igas C 1e-3 (seen); gassing voltage from the chemistry table",
                          end_volts_per_cell=ev, gassing_volts_per_cell=gv, ventilation_m3_per_h=q))
    if kind == "welding":
        pk, lim = f.get("no_load_peak_voltage_v"), f.get("no_load_limit_v")
        if pk is not None and lim is not None and pk > lim:
            out.append(_c("welding-no-load-voltage", "stop",
                          f"No-load voltage reaches {pk:.1f} V peak, above the {lim:.0f} V limit: a welder touching the "
                          "electrode and the work can get a dangerous shock.",
                          "IEC 60974-1 rated no-load voltage, DC 113 V peak (seen); lower limits as set in the profile",
                          no_load_peak_voltage_v=pk, no_load_limit_v=lim))
        if pk is None and lim is not None:
            out.append(_c("welding-no-load-voltage-unknown", "stop",
                          "The no-load voltage could not be determined at some setting of the range: it runs away "
                          "past the measured open-circuit curve, so it may exceed the limit. Measure the curve "
                          "further before using this setting.",
                          "IEC 60974-1 rated no-load voltage, DC 113 V peak (seen); circuit model (design note)",
                          no_load_limit_v=lim))
        mean, mean_lim = f.get("max_no_load_voltage_v"), f.get("no_load_mean_limit_v")
        if mean is not None and mean_lim is not None and mean > mean_lim:
            out.append(_c("welding-no-load-local-limit", "stop",
                          f"No-load voltage {mean:.1f} V is above the {mean_lim:.0f} V limit set for this job.",
                          "the profile's max_no_load_voltage_v (a local rule, e.g. US 29 CFR 1910.254(b)(3): 100 V DC for manual welding, seen)",
                          max_no_load_voltage_v=mean, limit_v=mean_lim))
        de, rated = f.get("duty_equivalent_current_a"), machine.rated_armature_current_a
        if de is not None and de > rated:
            out.append(_c("welding-duty-cycle", "warn",
                          f"At the top current and the stated duty cycle the armature heats like {de:.0f} A continuous, "
                          f"above its {rated:.0f} A rating: shorten the duty cycle or lower the current. I*sqrt(duty) is "
                          "an upper bound; the maker's duty rating comes first.",
                          "duty cycle over a 10-minute period (IEC 60974-1, seen); I*sqrt(duty) equivalence (rating practice, from memory)",
                          duty_equivalent_current_a=de, rated_armature_current_a=rated))
        if profile.welding.environment == "increased-shock-hazard":
            out.append(_c("welding-increased-hazard", "note",
                          loads.environment("increased-shock-hazard").precautions.capitalize() + ".",
                          "IEC 60974-1 increased hazard of electric shock (seen); measures are common practice"))
    mmf = f.get("min_net_mmf_a")
    if mmf is not None and mmf < 0:
        out.append(_c("reversed-mmf", "warn",
                      "At some operating point the series winding's mmf overcomes the shunt field (net mmf below zero): "
                      "the residual magnetism may be wiped out or reversed, and the machine may not build up next time.",
                      "equivalent-field-current method (design note); common practice", min_net_mmf_a=mmf))
    emf = f.get("min_generated_emf_v")
    if emf is not None and emf < 0:
        out.append(_c("reversed-polarity", "stop",
                      "At some operating point the generated EMF is reversed: the machine's polarity has turned over.",
                      "circuit model (design note)", min_generated_emf_v=emf))
    ia = f.get("max_armature_current_a")
    if ia is not None:
        if ia > machine.peak_current_a:
            out.append(_c("armature-peak", "stop",
                          f"Armature current reaches {ia:.0f} A, above the machine's short-time limit "
                          f"{machine.peak_current_a:.0f} A: commutation fails (sparking, flashover).",
                          "machine file peak_armature_current_a (default 2 x rated, common practice)",
                          max_armature_current_a=ia, peak_armature_current_a=machine.peak_current_a))
        elif ia > machine.rated_armature_current_a * (1 + 1e-9):
            out.append(_c("armature-rating", "warn",
                          f"Armature current reaches {ia:.0f} A, above its continuous rating "
                          f"{machine.rated_armature_current_a:.0f} A: limit the time at this load.",
                          "machine rating plate (continuous rating)", max_armature_current_a=ia))
    rr, sr = f.get("critical_resistance_ratio"), f.get("critical_speed_ratio")
    near = [v for v in (rr, sr) if v is not None and v < 1 + CRITICAL_CLEARANCE]
    if near:
        out.append(_c("near-critical", "warn",
                      "The field circuit is within 10 % of its critical resistance (or the speed within 10 % of critical) "
                      "somewhere in the speed and temperature range: the machine may fail to build up, or collapse on load.",
                      "self-excitation conditions (Theraja Vol II ch. 28; Kosow ch. 3); 10 % clearance is common practice",
                      critical_resistance_ratio=rr, critical_speed_ratio=sr))
    top = f.get("top_speed_rpm")
    if top is not None and top > machine.rated_speed_rpm * (1 + 1e-9):
        sev = "stop" if top > OVERSPEED_STOP_FACTOR * machine.rated_speed_rpm else "warn"
        out.append(_c("overspeed", sev,
                      f"Drive speed {top:.0f} rpm is above the machine's rated {machine.rated_speed_rpm:.0f} rpm: "
                      "commutator and banding are stressed and the voltage rises with speed.",
                      "rating plate; IEC 60034-1 overspeed test is 1.2 x rated for 2 min, a test not a duty (from memory)",
                      top_speed_rpm=top))
    if conn != "series":
        out.append(_c("field-switching", "warn",
                      "Do not open the shunt field circuit while it carries current: its inductance drives a voltage spike "
                      "across the switch and the insulation. Use a field switch with a discharge resistor (or a "
                      "freewheel path) and reduce the field before opening.",
                      "common practice for DC machine field circuits (field discharge resistor)"))
    return out


def operating_point_cautions(ops):
    """Cautions of the operating points of one setting on one load (``OperatingPoints``).

    A reversed build-up (generated EMF below zero) is a ``stop``; a source
    load driving current into the machine (back-feeding) a ``warn``; a
    machine whose highest stable point lies beyond the searched span (it
    runs away) a ``stop``.
    """
    out = []
    rev = [p for p in ops.points if p.get("reversed")]
    if rev:
        p = next((q for q in rev if q["stable"]), rev[0])
        out.append(_c("reversed-build-up", "stop",
                      f"At {p['terminal_voltage_v']:.4g} V the generated EMF is {p['generated_emf_v']:.4g} V: that "
                      "state is the machine built up with reversed polarity. If the machine is found there, stop it "
                      "and restore the polarity (flash the field from a separate supply the right way round) "
                      "before connecting a load.",
                      "reversed states (design note); flashing the field: common practice",
                      terminal_voltage_v=p["terminal_voltage_v"], generated_emf_v=p["generated_emf_v"]))
    back = [p for p in ops.points if p.get("back_feeding") and not p.get("reversed")]
    if back:
        p = next((q for q in back if q["stable"]), back[0])
        out.append(_c("back-feeding", "warn",
                      f"At {p['terminal_voltage_v']:.4g} V the load drives {-p['load_current_a']:.4g} A back into the "
                      "machine, which runs as a motor and discharges the source: fit a reverse-current cut-out or "
                      "a blocking diode.",
                      "common practice for DC charging sets (reverse-current relay)",
                      terminal_voltage_v=p["terminal_voltage_v"], load_current_a=p["load_current_a"]))
    if ops.runaway:
        out.append(_c("runaway", "stop",
                      f"No operating point can be given: {ops.message}. Do not close onto this load with this "
                      "setting.", "circuit model (design note: the highest stable intersection)"))
    return out


def profile_cautions(machine, profile):
    """Cautions of the job as a whole, whatever the setting."""
    out = []
    if profile.kind == "battery":
        b = profile.battery
        chem = loads.chemistry(b.chemistry)
        q = float(loads.ventilation_airflow_m3_per_h(b.cells, b.capacity_ah, chem.gas_current_boost_ma_per_ah))
        out.append(_c("battery-ventilation", "warn",
                      f"Charging releases hydrogen. Ventilate the battery room for boost charging: at least {q:.3g} m3/h "
                      f"(natural ventilation opening about {float(loads.ventilation_opening_cm2(q)):.0f} cm2). No smoking, "
                      "flames or sparks near the cells; wear eye protection.",
                      "IEC 62485-2 ventilation formula (seen)", ventilation_m3_per_h=q))
    if profile.kind == "welding":
        out.append(_c("welding-no-load-rule", "note",
                      "The open-circuit voltage of a DC welding source must not exceed 113 V peak in any environment; "
                      "local rules may set less (e.g. 100 V DC for manual welding in the US).",
                      "IEC 60974-1 (seen); US 29 CFR 1910.254(b)(3) (seen)"))
    if profile.kind == "booster":
        out.append(_c("booster-series", "note",
                      "A series booster carries the whole feeder current: check its rating and that the feeder "
                      "protection covers it; never open the series circuit under load.", "common practice"))
    return out
