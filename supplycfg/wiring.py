"""The wiring drawing of a setting: how to connect the machine for it, and where the meters go.

:func:`wiring` describes the circuit of a setting as parts in the order the
current meets them (armature, series field with its tap and diverter, shunt
field with its rheostat, exciter, meters, the load of the job) and draws it
as SVG with schemdraw (no network, no matplotlib). The drawing follows the
setting: a long shunt takes its field from the line side of the series
field, a short shunt from the armature's brushes; a differential connection
turns the series field round (its terminals D2-D1 in the current's path, the
polarity dot at the far end), so its field opposes the shunt field.

Terminal letters follow IEC 60034-8 for DC machines (A armature, D series
field, E shunt field, F separately excited field; from memory).
"""

from dataclasses import dataclass

from .wording import connection_words, field_words

#: Where the shunt (or separate) field takes its supply, per connection.
SHUNT_ACROSS = {
    "separate": "exciter", "separate-cumulative": "exciter", "separate-differential": "exciter",
    "shunt": "terminals", "series": None,
    "long-shunt-cumulative": "terminals", "long-shunt-differential": "terminals",
    "short-shunt-cumulative": "armature", "short-shunt-differential": "armature",
}


@dataclass(frozen=True)
class Part:
    """One part of the drawing: ``role`` (what it is) and ``label`` (the words beside it)."""

    role: str
    label: str


@dataclass(frozen=True)
class Wiring:
    """The circuit of one setting.

    Attributes
    ----------
    connection : str
        Connection id.
    parts : tuple of Part
        Every part drawn, main circuit first in the order the current meets
        them, then the field circuit.
    shunt_across : str or None
        Where the shunt field is connected: ``"terminals"`` (shunt, long
        shunt: after the series field), ``"armature"`` (short shunt: at the
        brushes), ``"exciter"`` (separately excited) or None (series).
    series_sense : str or None
        ``"aiding"`` (cumulative: the series field helps the shunt field),
        ``"opposing"`` (differential) or None (no series field in use).
    series_terminals : tuple of str or None
        The series field's terminals in the order the armature current
        passes them: ``("D1", "D2")`` aiding, ``("D2", "D1")`` opposing.
    steps : tuple of str
        The same circuit in words, one connection a line.
    electrode : str
        Welding: the electrode's polarity, ``"+"`` or ``"−"``.
    """

    connection: str
    kind: str
    parts: tuple
    shunt_across: str | None
    series_sense: str | None
    series_terminals: tuple | None
    steps: tuple
    electrode: str = "+"

    def roles(self):
        return [p.role for p in self.parts]

    def part(self, role):
        return next((p for p in self.parts if p.role == role), None)


def _num(v, unit=""):
    if v is None:
        return "–"
    s = f"{float(v):.3g}"
    return f"{s} {unit}".strip()


#: Words beside the load on the drawing (short: the drawing is narrow on a phone).
DRAWN_LOAD_WORDS = {"battery": "battery", "lighting": "lamps", "booster": "loads"}
LOAD_WORDS = {"battery": "battery", "lighting": "lamps at the far end",
              "booster": "loads at the far end"}


#: The welding leads per electrode polarity: (load words, drawn words, the step in words).
WELDING_LEADS = {
    "+": ("arc: electrode (+) to work (−)", "arc, electrode +",
          "+ line through the ammeter and the lead to the electrode; return lead from the work to A2."),
    "−": ("arc: work (+) to electrode (−)", "arc, electrode −",
          "+ line through the ammeter and the lead to the work; the electrode's (torch's) lead to A2 (−): "
          "electrode negative."),
}


def wiring(machine, setting, kind, electrode="+"):
    """The circuit of ``setting`` on ``machine`` for a job of ``kind``.

    Parameters
    ----------
    machine : Machine
    setting : Setting
        The setting (connection, series turns in use, diverter, rheostat or
        field current).
    kind : str
        ``"battery"``, ``"welding"``, ``"lighting"`` or ``"booster"``.
    electrode : str, optional
        Welding: the electrode's polarity, ``"+"`` or ``"−"`` (the process's
        ``electrode_polarity``: TIG runs electrode negative).

    Returns
    -------
    Wiring
    """
    conn = setting.connection
    uses_series = conn not in ("separate", "shunt")
    across = SHUNT_ACROSS[conn]
    parts = []
    steps = []
    if kind == "booster":
        parts.append(Part("bus", "DC bus (+ and −)"))
        # the line current must leave the booster by its + brush towards the feeder for its EMF to add
        steps.append("From the bus's + bar to the booster's A2 (−) brush, so that its EMF adds to the bus voltage.")
    parts.append(Part("armature", "armature A1 (+) / A2 (−)"))
    sense, terms = None, None
    if uses_series:
        turns = setting.series_turns if setting.series_turns is not None else machine.series_turns_per_pole
        sense = "opposing" if conn.endswith("differential") else "aiding"
        terms = ("D2", "D1") if sense == "opposing" else ("D1", "D2")
        tap = f"{turns:g} of {machine.series_turns_per_pole:g} turns per pole"
        parts.append(Part("series-field", f"series field {terms[0]}→{terms[1]}, tap {tap}, "
                                          f"{'opposing (differential)' if sense == 'opposing' else 'aiding'}"))
        if setting.diverter_ohm is not None:
            parts.append(Part("diverter", f"diverter {_num(setting.diverter_ohm, 'Ω')} across the series field"))
    field_source = None
    if across in ("terminals", "armature"):
        field_source = "brushes A1–A2" if across == "armature" else "line terminals (after the series field)" \
            if uses_series else "line terminals"
    elif across == "exciter":
        ev = machine.excitation_voltage_v
        if setting.field_current_a is not None or ev is None:
            parts.append(Part("exciter", "field supply set to " + (_num(setting.field_current_a, "A")
                                                                   if setting.field_current_a is not None else "its current")))
        else:
            parts.append(Part("exciter", f"exciter {_num(ev, 'V')}"))
    if across is not None:
        parts.append(Part("field-ammeter", "field ammeter"))
        if not (across == "exciter" and (setting.field_current_a is not None or machine.excitation_voltage_v is None)):
            parts.append(Part("rheostat", f"field rheostat {_num(setting.rheostat_ohm or 0.0, 'Ω')} "
                                          f"(0–{_num(machine.rheostat_max_ohm, 'Ω')})"))
        letters = "E1–E2"
        parts.append(Part("shunt-field", f"{field_words(conn)} {letters}"))
    parts.append(Part("voltmeter", "voltmeter"))
    if kind == "battery":
        parts.append(Part("cut-out", "reverse-current cut-out"))
        parts.append(Part("line-ammeter", "charging current"))
        # the bank's fault current is the plant's largest: broken and isolated at the battery end
        parts.append(Part("fuse", "fuse or DC breaker"))
        parts.append(Part("isolator", "battery isolating switch"))
    elif kind == "welding":
        parts.append(Part("line-ammeter", "welding current"))
    if kind in ("lighting", "booster"):
        parts.append(Part("feeder", "feeder"))
    parts.append(Part("load", WELDING_LEADS[electrode][0] if kind == "welding" else LOAD_WORDS[kind]))

    # the circuit in words
    if uses_series:
        a, b = terms
        div = f" (diverter {_num(setting.diverter_ohm, 'Ω')} across {a}–{b})" if setting.diverter_ohm is not None else ""
        line = "the feeder's + line" if kind == "booster" else "the + line"
        steps.append(f"A1 (+) to series field {a}; series field {b} to {line}{div}."
                     + (f" Turned round against the {field_words(conn)}: differential."
                        if sense == "opposing" else ""))
    else:
        steps.append("A1 (+) to the + line." if kind != "booster" else "A1 to the feeder.")
    if across in ("terminals", "armature"):
        steps.append(f"Shunt field E1–E2 with the field ammeter and the rheostat in series, across the {field_source}.")
    elif across == "exciter":
        # the machine file has one field winding besides the series one: its terminals stay E1–E2 when it
        # is fed separately (F1–F2 marks a winding built for separate excitation, IEC 60034-8, from memory)
        steps.append("Shunt winding E1–E2, fed as a separate field: with the field ammeter"
                     + (" and the rheostat" if any(p.role == "rheostat" for p in parts) else "")
                     + " on its own supply, not connected to the armature circuit.")
    if kind == "battery":
        steps.append("+ line through the reverse-current cut-out and the ammeter to the battery's +, with a fuse "
                     "(or DC breaker) and an isolating switch at the battery end; the battery's − to A2 (−). "
                     "Check polarity before closing.")
    elif kind == "welding":
        steps.append(WELDING_LEADS[electrode][2])
    elif kind == "lighting":
        steps.append("+ and − lines along the feeder to the lamps.")
    else:
        steps.append("Booster in the + line between the bus and the feeder; the feeder to the loads at the far end.")
    steps.append("Voltmeter across the machine's line terminals." if kind != "booster"
                 else "Voltmeter across the far end of the feeder.")
    return Wiring(conn, kind, tuple(parts), across, sense, terms, tuple(steps), electrode)


# ---------------------------------------------------------------------------
# the drawing
# ---------------------------------------------------------------------------

#: Size of the drawing's labels, and of its title and brush marks [schemdraw font units]: the drawing is
#: printed some 80 mm wide beside the setting table, where these come out about 5 pt.
LABEL_SIZE = 17
NOTE_SIZE = 16
#: Height between the + and − lines [drawing units].
RAIL = 6.0
#: Spacing of the vertical branches [drawing units].
STEP = 3.0


def wiring_svg(w, title=None):
    """The drawing of a :class:`Wiring` as SVG text (schemdraw's SVG backend).

    Parameters
    ----------
    w : Wiring
    title : str, optional
        A caption drawn above the circuit; default the connection's trade name.

    Returns
    -------
    str
        An ``<svg>`` element, without an XML prolog.
    """
    import schemdraw
    import schemdraw.elements as elm
    schemdraw.use("svg")
    roles = w.roles()
    label = {p.role: p.label for p in w.parts}
    d = schemdraw.Drawing(show=False)
    d.config(unit=2.0, fontsize=LABEL_SIZE, font="sans-serif", lw=1.4, margin=0.6)
    top, bot = RAIL, 0.0
    x = 0.0

    def vertical(x, items):
        """Stack ``items`` (element factories with labels) from the + line down to the − line."""
        seg = (top - bot) / len(items)
        y = top
        for make, text in items:
            e = make().at((x, y)).down().length(seg)
            if text:
                e = e.label(text, loc="bottom", ofst=0.15, fontsize=LABEL_SIZE)
            d.add(e)
            y -= seg

    def series_field(x0):
        """The series field on the + line from x0, diverter above it; returns the end x."""
        a, b = w.series_terminals
        coil = elm.Inductor2(loops=4).at((x0, top)).right().length(STEP)
        d.add(coil.label(f"{a}      {b}", loc="bottom", ofst=0.1, fontsize=LABEL_SIZE))
        # polarity dot at D1: current entering both dotted ends magnetises the same way
        d.add(elm.Dot(radius=0.09).at((x0 + (0.3 if a == "D1" else STEP - 0.3), top + 0.45)))
        y_text = top + 0.95
        if "diverter" in roles:
            d.add(elm.Line().at((x0, top)).up().length(1.2))
            d.add(elm.ResistorIEC().at((x0, top + 1.2)).right().length(STEP).label("diverter", loc="top", fontsize=LABEL_SIZE))
            d.add(elm.Line().at((x0 + STEP, top + 1.2)).down().length(1.2))
            y_text = top + 2.75
        d.add(elm.Label().at((x0 + STEP / 2, y_text)).label(
            "series field, " + ("OPPOSING" if w.series_sense == "opposing" else "aiding"), fontsize=LABEL_SIZE))
        return x0 + STEP

    def shunt_branch(x):
        d.add(elm.Dot().at((x, top)))
        d.add(elm.Dot().at((x, bot)))
        items = [(lambda: elm.MeterA(), "field A")]
        if "rheostat" in roles:
            items.append((lambda: elm.ResistorVarIEC(), "rheostat"))
        items.append((lambda: elm.Inductor2(loops=3), "E1–E2"))
        vertical(x, items)
        # polarity dot at E1
        d.add(elm.Dot(radius=0.09).at((x - 0.45, top - (len(items) - 1) * (top - bot) / len(items) - 0.3)))

    # the source side
    if w.kind == "booster":
        d.add(elm.SourceV().at((x, bot)).up().length(top - bot).label("DC bus", loc="top", ofst=0.2))
        d.add(elm.Line().at((x, top)).right().length(1.0))
        x += 1.0
        d.add(elm.Source().at((x, top)).right().length(STEP).label("A2 −  booster  A1 +", loc="bottom", fontsize=LABEL_SIZE))
        x += STEP
    else:
        d.add(elm.Source().at((x, bot)).up().length(top - bot).label("G", loc="center", fontsize=LABEL_SIZE))
        d.add(elm.Label().at((x + 0.25, top - 0.9)).label("A1 +", halign="left", fontsize=NOTE_SIZE))
        d.add(elm.Label().at((x + 0.25, bot + 0.9)).label("A2 −", halign="left", fontsize=NOTE_SIZE))
    if w.shunt_across == "armature":
        x += STEP * 0.8
        d.add(elm.Line().at((0, top)).right().length(x))
        shunt_branch(x)
    if w.series_sense is not None:
        x0 = x
        if x0 == 0.0:
            d.add(elm.Line().at((0, top)).right().length(0.8))
            x0 = 0.8
        x = series_field(x0)
    if w.shunt_across == "terminals":
        d.add(elm.Line().at((x, top)).right().length(STEP * 0.8))
        x += STEP * 0.8
        shunt_branch(x)
    # voltmeter across the line terminals
    if w.kind != "booster":
        # wide enough for the rheostat's label beside a shunt branch just before it
        gap = STEP * (1.3 if w.shunt_across == "terminals" else 0.8)
        d.add(elm.Line().at((x, top)).right().length(gap))
        x += gap
        d.add(elm.Dot().at((x, top)))
        d.add(elm.Dot().at((x, bot)))
        vertical(x, [(lambda: elm.Line(), None), (lambda: elm.MeterV(), "V"), (lambda: elm.Line(), None)])
    # the line towards the load
    if "cut-out" in roles:
        d.add(elm.Switch().at((x, top)).right().length(STEP).label("cut-out", loc="top", fontsize=LABEL_SIZE))
        x += STEP
    if "line-ammeter" in roles:
        d.add(elm.MeterA().at((x, top)).right().length(STEP).label("A", loc="top", fontsize=LABEL_SIZE))
        x += STEP
    if "fuse" in roles:
        d.add(elm.FuseIEC().at((x, top)).right().length(STEP * 0.8).label("fuse", loc="top", fontsize=LABEL_SIZE))
        x += STEP * 0.8
    if "isolator" in roles:
        d.add(elm.Switch().at((x, top)).right().length(STEP * 0.8).label("isolator", loc="top", fontsize=LABEL_SIZE))
        x += STEP * 0.8
    if "feeder" in roles:
        d.add(elm.ResistorIEC().at((x, top)).right().length(STEP).label("feeder", loc="top", fontsize=LABEL_SIZE))
        x += STEP
    tail = 2.6 if w.kind == "booster" else 1.0
    d.add(elm.Line().at((x, top)).right().length(tail))
    x += tail
    if w.kind == "battery":
        load = elm.Battery().at((x, top)).down().length(top - bot).reverse()
    elif w.kind == "welding":
        load = elm.SparkGap().at((x, top)).down().length(top - bot)
    elif w.kind == "lighting":
        load = elm.Lamp().at((x, top)).down().length(top - bot)
    else:
        load = elm.ResistorIEC().at((x, top)).down().length(top - bot)
    drawn = WELDING_LEADS[w.electrode][1] if w.kind == "welding" else DRAWN_LOAD_WORDS[w.kind]
    d.add(load.label(drawn, loc="bottom", ofst=0.2, fontsize=LABEL_SIZE))
    if w.kind == "booster":
        d.add(elm.Dot().at((x - 1.8, top)))
        d.add(elm.MeterV().at((x - 1.8, top)).down().length(top - bot).label("V", loc="top", fontsize=LABEL_SIZE))
        d.add(elm.Dot().at((x - 1.8, bot)))
    d.add(elm.Line().at((x, bot)).to((0, bot)))
    # the separately excited field, on its own circuit beside the machine
    if w.shunt_across == "exciter":
        y0, y1 = top - 0.8, bot + 0.8
        xs = -1.4 - STEP * (2 if "rheostat" in roles else 1) - 0.6
        d.add(elm.SourceV().at((xs, y1)).up().length(y0 - y1).label(label.get("exciter", "field supply"),
                                                                    loc="bottom", ofst=0.3, fontsize=LABEL_SIZE))
        xx = xs
        d.add(elm.MeterA().at((xx, y0)).right().length(STEP).label("field A", loc="top", fontsize=LABEL_SIZE))
        xx += STEP
        if "rheostat" in roles:
            d.add(elm.ResistorVarIEC().at((xx, y0)).right().length(STEP).label("rheostat", loc="top", fontsize=LABEL_SIZE))
            xx += STEP
        d.add(elm.Line().at((xx, y0)).right().length(0.6))
        xx += 0.6
        d.add(elm.Inductor2(loops=3).at((xx, y0)).down().length(y0 - y1).label("E1–E2", loc="top", fontsize=LABEL_SIZE))
        d.add(elm.Dot(radius=0.09).at((xx - 0.45, y0 - 0.3)))
        d.add(elm.Line().at((xx, y1)).to((xs, y1)))
    left = -1.4 - STEP * (2 if "rheostat" in roles else 1) - 0.6 if w.shunt_across == "exciter" else -1.0
    d.add(elm.Label().at((left, top + (3.75 if "diverter" in roles else 2.0))).label(
        title if title is not None else connection_words(w.connection)
        + (" booster in the feeder" if w.kind == "booster" else ""), halign="left", fontsize=NOTE_SIZE))
    svg = d.get_imagedata("svg")
    svg = svg.decode("utf-8") if isinstance(svg, bytes) else svg
    start = svg.find("<svg")
    return svg[start:] if start > 0 else svg
