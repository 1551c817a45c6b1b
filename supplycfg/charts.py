"""Charts of the page and the setting sheet.

Every function returns an Altair chart built from what the core computes; no
function here touches Streamlit. Each chart carries tooltips and a zoom (drag
to pan, wheel to zoom, double-click to reset) through a parameter named
``zoom``; the data travel inline so ``chart.to_dict()`` is self-contained and
exports to SVG with ``vl-convert``.
"""

from dataclasses import replace

import altair as alt
import numpy as np

from .circuit import (SELF_EXCITED, SEPARATE, Load, Setting, check_setting, external_characteristic,
                      operating_points, self_excitation)
from .magnetisation import OpenCircuitCurve, copper_resistance_factor

#: Our own palette: ink for the machine, earth tones for loads and limits.
INK = "#23395b"
SLATE = "#5c6b7a"
COPPER = "#b5651d"
MOSS = "#4f7a28"
PLUM = "#7a3b69"
RUST = "#a4372a"
SAND = "#d9c9a3"
TEAL = "#1d7874"
SERIES_COLOURS = (INK, COPPER, TEAL, PLUM, MOSS, SLATE, RUST)
POINT_SHAPES = ("circle", "square", "triangle-up", "diamond", "cross")
#: Height of each chart [px]; widths follow the page (or the sheet's ``width``).
HEIGHT = 300
#: Fit the width to the page or sheet; the height is the plot's, legend below it.
FIT_WIDTH = alt.AutoSizeParams(type="fit-x", contains="padding")
#: Points along each external characteristic.
CURVE_POINTS = 160


def _f(v, digits=4):
    """Round for chart data: keeps specs small and deterministic."""
    if v is None:
        return None
    v = float(v)
    if not np.isfinite(v):
        return None
    return float(f"{v:.{digits}g}")


def _zoom():
    return alt.selection_interval(bind="scales", name="zoom")


def _colour_scale(labels, colours=None):
    labels = list(dict.fromkeys(labels))
    colours = list(colours or [])
    rng = [colours[i] if i < len(colours) and colours[i] else SERIES_COLOURS[i % len(SERIES_COLOURS)]
           for i in range(len(labels))]
    return alt.Scale(domain=labels, range=rng)


def _legend():
    return alt.Legend(orient="bottom", columns=1, title=None, labelLimit=420, symbolStrokeWidth=3)


class _Sets:
    """Named datasets of one chart: layers refer to them by name, the chart carries them once.

    Keeping the rows out of the layers spares Altair from copying them at
    every step, which keeps a page rerun quick.
    """

    def __init__(self):
        self.data = {}

    def __call__(self, name, rows):
        self.data[name] = rows
        return alt.NamedData(name=name)


def _layered(layers, title, sets, width=None):
    layers = [ly for ly in layers if ly is not None]
    kw = {"width": width} if width is not None else {}
    return alt.LayerChart(layer=layers, datasets=sets.data, title=title, height=HEIGHT, autosize=FIT_WIDTH,
                          resolve=alt.Resolve(scale=alt.ScaleResolveMap(color="shared")), **kw)


# ---------------------------------------------------------------------------
# 1. open-circuit characteristic with the field lines
# ---------------------------------------------------------------------------

def occ_chart(machine, setting=None, temperatures_c=None, width=None):
    """The open-circuit characteristic at the setting's speed with its field-resistance lines.

    Parameters
    ----------
    machine : Machine
    setting : Setting, optional
        The selected setting (default: shunt, rheostat 0, rated speed).
    temperatures_c : sequence of float, optional
        Winding temperatures [°C] to draw the field line at (cold, hot);
        default the setting's temperature.
    width : int, optional
        Fixed width [px] (for the sheet); default the container's.

    Returns
    -------
    alt.LayerChart
        Layers: the curve (dashed where extrapolated), the measured points,
        the field lines (setting cold and hot, the rheostat's extremes, the
        critical line) and the built-up no-load points.

    References
    ----------
    Graphical build-up construction: field-resistance line against the OCC,
    critical resistance as the air-gap line (standard textbook method, e.g.
    Theraja Vol II ch. 28).
    """
    st = check_setting(machine, setting or Setting("shunt"))
    occ = OpenCircuitCurve.from_machine(machine)
    ratio = st.speed_rpm / machine.occ_speed_rpm
    temps = sorted(set(float(t) for t in (temperatures_c or [st.winding_temperature_c])))
    x_last = occ.last_field_current_a
    exc = []  # (label, field current) of separate excitation
    if st.connection in SEPARATE:
        if st.field_current_a is not None:
            exc.append((f"exciter field {st.field_current_a:.3g} A", st.field_current_a))
        elif machine.excitation_voltage_v:
            for t in temps:
                rf = machine.shunt_field_resistance_ohm * float(copper_resistance_factor(
                    t, machine.reference_temperature_c)) + st.rheostat_ohm
                exc.append((f"exciter field {machine.excitation_voltage_v / rf:.3g} A, windings {t:g} °C",
                            machine.excitation_voltage_v / rf))
    exc_a = max((a for _, a in exc), default=0.0)
    x_top = 1.15 * max(x_last, exc_a or 0.0)
    xs = np.linspace(0.0, x_top, 180)
    es = ratio * occ.emf(xs)
    e_top = float(es.max())
    speed_note = f"at {st.speed_rpm:.5g} rpm"
    curve_label = f"open-circuit characteristic {speed_note}"
    curve = [{"series": curve_label, "field_current_a": _f(x), "emf_v": _f(e),
              "extrapolated": "yes" if x > x_last * (1 + 1e-9) else "no", "order": i}
             for i, (x, e) in enumerate(zip(xs, es))]
    # dashed part must join the solid one: repeat the last measured point
    curve.append({"series": curve_label, "field_current_a": _f(x_last), "emf_v": _f(ratio * occ.emf(x_last)),
                  "extrapolated": "yes", "order": -1})
    pts = [{"series": curve_label, "field_current_a": _f(x), "emf_v": _f(ratio * e),
            "measured_at_rpm": _f(machine.occ_speed_rpm, 6)}
           for x, e in zip(machine.occ_field_current_a, machine.occ_emf_v)]

    lines, colours, marks = [], [], []

    def field_line(label, r_ohm, colour):
        if r_ohm <= 0:
            return
        x_end = min(x_top, e_top / r_ohm)
        for j, x in enumerate((0.0, x_end)):
            lines.append({"series": label, "field_current_a": _f(x), "emf_v": _f(r_ohm * x),
                          "resistance_ohm": _f(r_ohm), "order": j})
        colours.append(colour)

    rsh = machine.shunt_field_resistance_ohm
    kt = {t: float(copper_resistance_factor(t, machine.reference_temperature_c)) for t in temps}
    if st.connection in SELF_EXCITED:
        tone = (TEAL, COPPER) if len(temps) > 1 else (COPPER,)
        for t, c in zip(temps, tone):
            r = rsh * kt[t] + st.rheostat_ohm
            lab = f"this setting: field circuit {r:.4g} Ω, windings {t:g} °C"
            field_line(lab, r, c)
            se = self_excitation(machine, st.rheostat_ohm, st.speed_rpm, t)
            if se.no_load_voltage_v is not None:
                marks.append({"series": lab, "point": "built-up no-load point",
                              "field_current_a": _f(se.no_load_voltage_v / se.field_circuit_resistance_ohm),
                              "emf_v": _f(se.no_load_voltage_v),
                              "builds_up": "yes" if se.builds_up else "no: " + "; ".join(se.reasons)})
        r_lo = rsh * kt[temps[0]]
        r_hi = rsh * kt[temps[-1]] + machine.rheostat_max_ohm
        field_line(f"rheostat cut out: {r_lo:.4g} Ω (windings {temps[0]:g} °C)", r_lo, MOSS)
        if machine.rheostat_max_ohm > 0:
            field_line(f"rheostat all in: {r_hi:.4g} Ω (windings {temps[-1]:g} °C)", r_hi, PLUM)
    if st.connection in SELF_EXCITED:
        r_crit = ratio * occ.air_gap_slope()
        field_line(f"critical field resistance {r_crit:.4g} Ω {speed_note}", r_crit, RUST)
    for lab, a in exc:
        marks.append({"series": curve_label, "point": f"no-load point, {lab}", "field_current_a": _f(a),
                      "emf_v": _f(ratio * float(occ.emf(a))), "builds_up": "separately excited"})

    x_title, y_title = "Field current [A]", "EMF / terminal voltage [V]"
    labels = [curve_label] + list(dict.fromkeys(r["series"] for r in lines))
    scale = _colour_scale(labels, [INK] + colours)
    enc_c = alt.Color("series:N", scale=scale, legend=_legend())
    sets = _Sets()
    base = alt.Chart(sets("occ", curve)).mark_line(strokeWidth=2.6, clip=True).encode(
        x=alt.X("field_current_a:Q", title=x_title, scale=alt.Scale(domain=[0, _f(x_top)])),
        y=alt.Y("emf_v:Q", title=y_title, scale=alt.Scale(domain=[0, _f(1.08 * e_top)])),
        color=enc_c, detail=alt.Detail("extrapolated:N"), order=alt.Order("order:Q"),
        strokeDash=alt.StrokeDash("extrapolated:N", legend=None,
                                  scale=alt.Scale(domain=["no", "yes"], range=[[1, 0], [6, 4]])),
        tooltip=[alt.Tooltip("field_current_a:Q", title="field current [A]"),
                 alt.Tooltip("emf_v:Q", title="EMF [V]"),
                 alt.Tooltip("extrapolated:N", title="beyond the measured points")],
    ).add_params(_zoom())
    measured = alt.Chart(sets("measured", pts)).mark_point(filled=True, size=36, shape="diamond").encode(
        x=alt.X("field_current_a:Q"), y=alt.Y("emf_v:Q"), color=enc_c,
        tooltip=[alt.Tooltip("field_current_a:Q", title="field current [A]"),
                 alt.Tooltip("emf_v:Q", title="EMF at this speed [V]"),
                 alt.Tooltip("measured_at_rpm:Q", title="measured at [rpm]")])
    layer_lines = None
    if lines:
        layer_lines = alt.Chart(sets("field_lines", lines)).mark_line(strokeWidth=1.8, clip=True).encode(
            x=alt.X("field_current_a:Q"), y=alt.Y("emf_v:Q"), color=enc_c, detail=alt.Detail("series:N"), order=alt.Order("order:Q"),
            tooltip=[alt.Tooltip("series:N", title="line"),
                     alt.Tooltip("resistance_ohm:Q", title="resistance [ohm]")])
    layer_marks = None
    if marks:
        layer_marks = alt.Chart(sets("no_load", marks)).mark_point(size=130, filled=False, strokeWidth=2.6).encode(
            x=alt.X("field_current_a:Q"), y=alt.Y("emf_v:Q"), color=alt.Color("series:N", scale=scale, legend=None),
            shape=alt.Shape("point:N", legend=_legend(), scale=alt.Scale(range=list(POINT_SHAPES))),
            tooltip=[alt.Tooltip("series:N", title="point"), alt.Tooltip("field_current_a:Q", title="field current [A]"),
                     alt.Tooltip("emf_v:Q", title="no-load voltage [V]"),
                     alt.Tooltip("builds_up:N", title="builds up from residual")])
    return _layered([base, measured, layer_lines, layer_marks],
                    "Open-circuit characteristic and field-circuit lines", sets, width)


# ---------------------------------------------------------------------------
# 2. external characteristic against the load
# ---------------------------------------------------------------------------

def curve_rows(label, characteristic, x_key="load_current_a", y_key="terminal_voltage_v", transform=None):
    """Chart rows of one characteristic (``transform(il, v) -> v_plot`` for load-end voltage)."""
    p = characteristic.points
    il = np.asarray(p[x_key], float)
    v = np.asarray(p[y_key], float)
    if transform is not None:
        v = transform(il, v)
    ext = np.asarray(p.get("extrapolated", np.zeros(il.size, bool)), bool)
    nan = np.full(il.size, np.nan)
    flow = getattr(characteristic, "power", None) or {}
    speed = np.asarray(flow.get("speed_rpm", nan), float)
    shaft = np.asarray(flow.get("shaft_power_kw", nan), float)
    return [{"series": label, "load_current_a": _f(a), "terminal_voltage_v": _f(b),
             "extrapolated": "yes" if e else "no", "order": i, "speed_rpm": _f(n), "shaft_power_kw": _f(w)}
            for i, (a, b, e, n, w) in enumerate(zip(il, v, ext, speed, shaft)) if np.isfinite(a) and np.isfinite(b)]


def characteristic_chart(curves, loads=(), bands=(), points=(), title="External characteristic and the load",
                         x_title="Load current [A]", y_title="Terminal voltage [V]", width=None,
                         x_domain=None, y_domain=None):
    """Machine curves, load lines, required bands and operating points in one chart.

    Parameters
    ----------
    curves : list of dict
        ``{"label", "rows"}`` with rows from :func:`curve_rows`, optionally ``"colour"``.
    loads : list of dict
        ``{"label", "load_current_a": [...], "terminal_voltage_v": [...]}`` (a polyline).
    bands : list of dict
        ``{"label", "i_min", "i_max", "v_min", "v_max"}``: what the job needs.
    points : list of dict
        ``{"label", "load_current_a", "terminal_voltage_v", "stable"}``, optionally
        ``"curve"``: the label of the curve it lies on (its colour); the label
        goes to the shape legend.
    x_domain, y_domain : (float, float), optional
        The first view; zoom and pan reach the rest.

    Returns
    -------
    alt.LayerChart
    """
    labels, colours = [], []
    rows = []
    for j, c in enumerate(curves):
        labels.append(c["label"]); colours.append(c.get("colour"))
        rows += [dict(r, series=c["label"], kind="machine") for r in c["rows"]]
    lrows = []
    for c in loads:
        labels.append(c["label"]); colours.append(c.get("colour", SLATE))
        lrows += [{"series": c["label"], "load_current_a": _f(a), "terminal_voltage_v": _f(b), "order": i}
                  for i, (a, b) in enumerate(zip(c["load_current_a"], c["terminal_voltage_v"]))]
    brows = [{"series": b["label"], "i_min": _f(b["i_min"]), "i_max": _f(b["i_max"]),
              "v_min": _f(b["v_min"]), "v_max": _f(b["v_max"])} for b in bands]
    prow = [{"series": p.get("curve") or p["label"], "point": p["label"], "load_current_a": _f(p["load_current_a"]),
             "terminal_voltage_v": _f(p["terminal_voltage_v"]),
             "stable": "stable" if p.get("stable", True) else "unstable (not used)"} for p in points]
    for p in prow:
        if p["series"] not in labels:
            labels.append(p["series"]); colours.append(RUST)
    scale = _colour_scale(labels, colours)
    col = alt.Color("series:N", scale=scale, legend=_legend())
    xs = alt.Scale(domain=list(x_domain)) if x_domain else alt.Undefined
    ys = alt.Scale(domain=list(y_domain)) if y_domain else alt.Undefined
    xq = alt.X("load_current_a:Q", title=x_title, scale=xs)
    yq = alt.Y("terminal_voltage_v:Q", title=y_title, scale=ys)
    layers = []
    sets = _Sets()
    if brows:
        layers.append(alt.Chart(sets("bands", brows)).mark_rect(opacity=0.35, color=SAND).encode(
            x=alt.X("i_min:Q", title=x_title, scale=xs), x2=alt.X2("i_max:Q"),
            y=alt.Y("v_min:Q", title=y_title, scale=ys), y2=alt.Y2("v_max:Q"),
            tooltip=[alt.Tooltip("series:N", title="required"), alt.Tooltip("i_min:Q", title="from [A]"),
                     alt.Tooltip("i_max:Q", title="to [A]"), alt.Tooltip("v_min:Q", title="lowest [V]"),
                     alt.Tooltip("v_max:Q", title="highest [V]")]))
    if rows:
        layers.append(alt.Chart(sets("curves", rows)).mark_line(strokeWidth=2.4, clip=True).encode(
            x=xq, y=yq, color=col, detail=alt.Detail("series:N"), order=alt.Order("order:Q"),
            strokeDash=alt.StrokeDash("extrapolated:N", legend=None,
                                      scale=alt.Scale(domain=["no", "yes"], range=[[1, 0], [6, 4]])),
            tooltip=[alt.Tooltip("series:N", title="curve"), alt.Tooltip("load_current_a:Q", title="load current [A]"),
                     alt.Tooltip("terminal_voltage_v:Q", title="voltage [V]"),
                     alt.Tooltip("speed_rpm:Q", title="speed [rpm]"),
                     alt.Tooltip("shaft_power_kw:Q", title="shaft power [kW]"),
                     alt.Tooltip("extrapolated:N", title="beyond the measured OCC")]))
    if lrows:
        layers.append(alt.Chart(sets("loads", lrows)).mark_line(strokeWidth=1.6, strokeDash=[2, 2],
                                                                   clip=True).encode(
            x=xq, y=yq, color=col, detail=alt.Detail("series:N"), order=alt.Order("order:Q"),
            tooltip=[alt.Tooltip("series:N", title="load"), alt.Tooltip("load_current_a:Q", title="current [A]"),
                     alt.Tooltip("terminal_voltage_v:Q", title="voltage [V]")]))
    if prow:
        layers.append(alt.Chart(sets("points", prow)).mark_point(size=130, filled=True).encode(
            x=xq, y=yq, color=alt.Color("series:N", scale=scale, legend=None),
            shape=alt.Shape("point:N", legend=_legend(), scale=alt.Scale(range=list(POINT_SHAPES))),
            opacity=alt.Opacity("stable:N", legend=None,
                                scale=alt.Scale(domain=["stable", "unstable (not used)"], range=[1.0, 0.35])),
            tooltip=[alt.Tooltip("point:N", title="operating point"), alt.Tooltip("series:N", title="on"),
                     alt.Tooltip("load_current_a:Q", title="current [A]"),
                     alt.Tooltip("terminal_voltage_v:Q", title="voltage [V]"),
                     alt.Tooltip("stable:N", title="stability")]))
    if not layers:
        layers.append(alt.Chart(sets("empty", [{"load_current_a": 0, "terminal_voltage_v": 0}])).mark_point(
            opacity=0).encode(x=xq, y=yq))
    layers[0] = layers[0].add_params(_zoom())
    return _layered(layers, title, sets, width)


def setting_curve(machine, setting, points=CURVE_POINTS, drive=None):
    """The external characteristic of ``setting`` (checked) on ``drive``, for charts."""
    return external_characteristic(machine, check_setting(machine, setting), points, drive)


def _temperatures(profile, machine):
    return tuple(profile.temperatures_c) if profile.temperatures_c else (machine.reference_temperature_c,)


def _speeds(profile):
    return tuple(profile.speeds_rpm)


# --- battery ---------------------------------------------------------------

def battery_lines(profile, i_top):
    """Battery lines: rest voltage at the start, the charging curves at the start and end, the limit.

    Returns
    -------
    (loads, bands, start_load, on_charge)
        ``start_load`` is the :class:`~supplycfg.circuit.Load` of the start
        state of charge (rest voltage plus bank and cable resistance);
        ``on_charge(soc)`` gives the bank's voltage on charge at the machine
        ``V(I)`` (the chemistry's charging-voltage model plus cable).
    """
    from .jobs import battery as ld
    b = profile.battery
    chem = ld.chemistry(b.chemistry)
    s0, s1 = b.state_of_charge
    r = b.internal_resistance_ohm + b.cable_resistance_ohm
    e0 = b.cells * float(ld.open_circuit_voltage_per_cell(chem, s0, b.open_circuit_voltage_per_cell_v))
    # the model's own cell resistance is replaced by the profile's bank resistance
    rc_model = chem.resistance_ohm_ah / b.capacity_ah

    def on_charge(soc):
        def v(i):
            i = np.asarray(i, float)
            ip = np.maximum(i, 0.0)
            cell = ld.charging_voltage_per_cell(chem, soc, ip / b.capacity_ah, b.temperature_c,
                                                b.open_circuit_voltage_per_cell_v) - ip * rc_model
            return b.cells * cell + i * r
        return v

    cur = np.linspace(0.0, i_top, 60)
    start = {"label": f"battery at rest, {s0:.0%} charge: {e0:.4g} V + {r:.3g} Ω x I", "colour": MOSS,
             "load_current_a": [0.0, i_top], "terminal_voltage_v": [e0, e0 + r * i_top]}
    start_c = {"label": f"battery on charge at {s0:.0%}", "colour": TEAL,
               "load_current_a": list(cur), "terminal_voltage_v": list(on_charge(s0)(cur))}
    end = {"label": f"battery on charge at {s1:.0%}", "colour": PLUM,
           "load_current_a": list(cur), "terminal_voltage_v": list(on_charge(s1)(cur))}
    vlim = b.cells * float(ld.charge_voltage_limit_per_cell(chem, b.temperature_c, b.charge_voltage_per_cell_v))
    limit = {"label": f"charge limit {vlim / b.cells:.3g} V per cell ({vlim:.4g} V)", "colour": RUST,
             "load_current_a": [0.0, i_top], "terminal_voltage_v": [vlim, vlim]}
    band = {"label": f"starting current {b.min_charge_current_a:g} to {b.max_charge_current_a:g} A",
            "i_min": b.min_charge_current_a, "i_max": b.max_charge_current_a,
            "v_min": e0, "v_max": vlim}
    return [start, start_c, end, limit], [band], Load.battery(e0, r), on_charge


def crossing(characteristic, v_load):
    """First point where the characteristic (from no load) meets ``v_load(IL)`` from above.

    Returns ``(load_current_a, terminal_voltage_v)`` or None.
    """
    p = characteristic.points
    il = np.asarray(p["load_current_a"], float)
    v = np.asarray(p["terminal_voltage_v"], float)
    d = v - v_load(il)
    idx = np.flatnonzero((d[:-1] > 0) & (d[1:] <= 0))
    if not idx.size:
        return None
    j = int(idx[0])
    w = d[j] / (d[j] - d[j + 1])
    return float(il[j] + w * (il[j + 1] - il[j])), float(v[j] + w * (v[j + 1] - v[j]))


def battery_chart(machine, profile, setting, width=None):
    """External characteristic of the setting (cold and hot windings) against the battery.

    Operating points: the charge at the start (rest-voltage line) and at the
    end state of charge (charging-voltage model), on each curve.
    """
    b = profile.battery
    temps = _temperatures(profile, machine)
    curves, chars = [], []
    for j, t in enumerate(temps):
        ch = setting_curve(machine, replace(setting, winding_temperature_c=t), drive=profile.drive)
        lab = f"machine, windings {t:g} °C"
        chars.append((t, lab, ch))
        curves.append({"label": lab, "colour": (INK, COPPER)[j % 2], "rows": curve_rows(lab, ch)})
    i_top = 1.6 * b.max_charge_current_a
    lines, bands, start, on_charge = battery_lines(profile, i_top)
    pts = []
    s0, s1 = b.state_of_charge
    for t, lab, ch in chars:
        op = operating_points(machine, replace(setting, winding_temperature_c=t), start, profile.drive).normal
        if op is not None:
            pts.append({"label": "start of charge, battery at rest", "curve": lab,
                        "load_current_a": op["load_current_a"], "terminal_voltage_v": op["terminal_voltage_v"]})
        for soc, what in ((s0, "start of charge, battery on charge"), (s1, "end of charge")):
            hit = crossing(ch, on_charge(soc))
            if hit is not None:
                pts.append({"label": what, "curve": lab, "load_current_a": hit[0], "terminal_voltage_v": hit[1]})
    i_view = max([i_top] + [1.3 * p["load_current_a"] for p in pts])
    v_view = 1.15 * max([lines[0]["terminal_voltage_v"][-1], lines[3]["terminal_voltage_v"][0]] +
                        [c.no_load_voltage_v or 0.0 for _, _, c in chars])
    return characteristic_chart(curves, lines, bands, pts, "Machine against the battery", width=width,
                                x_domain=(0, _f(i_view)), y_domain=(0, _f(v_view)))


# --- welding ---------------------------------------------------------------

def welding_load_line(profile, i_top):
    """The process's conventional load line, seen at the machine (plus cable drop)."""
    from .jobs import welding as ld
    w = profile.welding
    cur = np.linspace(0.0, i_top, 40)
    v = ld.conventional_load_voltage(w.process, cur) + cur * w.cable_resistance_ohm
    return {"label": f"{w.process} load line at the machine (with the leads)", "colour": SLATE,
            "load_current_a": list(cur), "terminal_voltage_v": list(v)}


def _end_settings(option):
    """Settings of the two ends of a welding option's range (or the option's own)."""
    out = []
    for cs in option.current_settings or []:
        kw = {k: float(cs[k]) for k in ("rheostat_ohm", "field_current_a")
              if cs.get(k) is not None and np.isfinite(cs[k])}
        out.append((cs.get("current_a"), replace(option.setting, rheostat_ohm=kw.get("rheostat_ohm"),
                                                  field_current_a=kw.get("field_current_a"))))
    return out or [(None, option.setting)]


def _weld_line_load(profile):
    from .jobs import welding as ld
    w = profile.welding
    proc = ld.welding_process(w.process)
    return Load.line(proc.load_line_offset_v, proc.load_line_slope_v_per_a + w.cable_resistance_ohm)


def welding_chart(machine, profile, option, other_taps=(), width=None):
    """Characteristics at each end of the current range (and of other taps) with the load line.

    Drawn at the option's speed and winding temperature, where its field
    settings were solved; the arc points are the machine's operating points on
    the conventional load line (straight part, below 600 A).

    Parameters
    ----------
    option : search Option
        The selected option, with ``current_settings`` for both ends.
    other_taps : sequence of Option
        One option per other series tap, drawn at their high-end setting.
    """
    w = profile.welding
    lo, hi = w.current_range_a
    curves, pts = [], []
    i_max = 1.3 * hi
    line = _weld_line_load(profile)
    for j, (target, st) in enumerate(_end_settings(option)):
        st = check_setting(machine, st)
        ch = setting_curve(machine, st, drive=profile.drive)
        lab = (f"set for {target:g} A: " if target is not None else "") + _tap_text(st)
        curves.append({"label": lab, "colour": (INK, COPPER)[j % 2], "rows": curve_rows(lab, ch)})
        if ch.short_circuit_current_a:
            i_max = max(i_max, 1.05 * ch.short_circuit_current_a)
        op = operating_points(machine, st, line, profile.drive).normal
        if op is not None:
            pts.append({"label": "arc operating point", "curve": lab, "load_current_a": op["load_current_a"],
                        "terminal_voltage_v": op["terminal_voltage_v"]})
    for k, opt in enumerate(other_taps):
        target, st = _end_settings(opt)[-1]
        ch = setting_curve(machine, st, drive=profile.drive)
        lab = f"other tap, {_tap_text(check_setting(machine, st))}" + (f", set for {target:g} A" if target else "")
        curves.append({"label": lab, "colour": (TEAL, PLUM, MOSS, SLATE)[k % 4], "rows": curve_rows(lab, ch)})
    v_hi = max([r["terminal_voltage_v"] or 0.0 for c in curves for r in c["rows"]] or [80.0])
    band = {"label": f"welding current wanted: {lo:g} to {hi:g} A", "i_min": lo, "i_max": hi,
            "v_min": 0.0, "v_max": _f(1.05 * v_hi)}
    return characteristic_chart(curves, [welding_load_line(profile, i_max)], [band], pts,
                                "Welding characteristics and the arc load line", width=width,
                                x_domain=(0, _f(i_max)), y_domain=(0, _f(1.1 * v_hi)))


def _tap_text(st):
    parts = [st.connection]
    if st.series_turns:
        parts.append(f"{st.series_turns:g} series turns")
    if st.field_current_a is not None:
        parts.append(f"field {st.field_current_a:.3g} A")
    elif st.rheostat_ohm is not None:
        parts.append(f"rheostat {st.rheostat_ohm:.3g} Ω")
    return ", ".join(parts)


# --- lighting and booster: load-end voltage --------------------------------

def load_end_chart(machine, profile, setting, width=None):
    """Load-end voltage against load current over the speed and temperature range, with the band.

    Lighting: ``V_load = V - IL R_feeder``; booster: ``V_load = V_bus + V_booster(IL) - IL R_feeder``.
    """
    kind = profile.kind
    job = profile.job
    lo, hi = job.load_current_a
    tol = job.tolerance_percent / 100.0
    nominal = job.nominal_voltage_v if kind == "lighting" else job.bus_voltage_v
    rfd = job.feeder_resistance_ohm
    curves = []
    combos = [(n, t) for n in sorted(set(_speeds(profile))) for t in sorted(set(_temperatures(profile, machine)))]
    tones = (INK, COPPER, TEAL, PLUM, MOSS, SLATE)
    for j, (n, t) in enumerate(combos):
        ch = setting_curve(machine, replace(setting, speed_rpm=n, winding_temperature_c=t), drive=profile.drive)
        if kind == "lighting":
            tf = lambda il, v: v - il * rfd
        else:
            tf = lambda il, v, vb=job.bus_voltage_v: vb + v - il * rfd
        lab = f"load end at {n:.5g} rpm, windings {t:g} °C"
        rows = [r for r in curve_rows(lab, ch, transform=tf)
                if r["load_current_a"] is not None and r["load_current_a"] <= 1.25 * max(hi, 1.0)
                and r["load_current_a"] >= -1e-9]
        curves.append({"label": lab, "colour": tones[j % len(tones)], "rows": rows})
    band = {"label": f"needed: {nominal:.4g} V +- {job.tolerance_percent:g} % from {lo:g} to {hi:g} A",
            "i_min": lo, "i_max": hi, "v_min": nominal * (1 - tol), "v_max": nominal * (1 + tol)}
    title = "Voltage at the lamps" if kind == "lighting" else "Voltage at the far end of the boosted feeder"
    loads_ = []
    if kind == "booster":
        loads_.append({"label": f"feeder without booster: {nominal:.4g} V - {rfd:g} Ω x I", "colour": SLATE,
                       "load_current_a": [0.0, 1.25 * hi], "terminal_voltage_v": [nominal, nominal - 1.25 * hi * rfd]})
    inside = [r["terminal_voltage_v"] for c in curves for r in c["rows"]
              if r["terminal_voltage_v"] is not None and lo <= r["load_current_a"] <= hi]
    pad = max(tol * nominal, 1.0)
    y_lo = min([band["v_min"] - pad] + [v - 0.3 * pad for v in inside])
    y_hi = max([band["v_max"] + pad] + [v + 0.3 * pad for v in inside])
    return characteristic_chart(curves, loads_, [band], (), title, y_title="Load-end voltage [V]", width=width,
                                x_domain=(0, _f(1.1 * max(hi, 1.0))), y_domain=(_f(max(y_lo, 0.0)), _f(y_hi)))


# ---------------------------------------------------------------------------
# 3. the charge run
# ---------------------------------------------------------------------------

def charge_run_chart(run, width=None):
    """Charging current, volts per cell (with the limit) and state of charge against time.

    Parameters
    ----------
    run : ChargeRun
        From :func:`supplycfg.simulation.charge_run`.
    """
    t = np.asarray(run.time_h, float)
    step = max(1, t.size // 200)
    idx = np.r_[np.arange(0, t.size, step), t.size - 1] if t.size else np.zeros(0, int)
    idx = np.unique(idx)
    rows = [{"time_h": _f(t[i]), "current_a": _f(run.current_a[i]), "volts_per_cell": _f(run.volts_per_cell[i]),
             "state_of_charge_pct": _f(100 * run.state_of_charge[i]), "ah": _f(run.ah[i]),
             "bank_voltage_v": _f(run.bank_voltage_v[i])} for i in idx]
    sets = _Sets()
    data = sets("run", rows)
    x = alt.X("time_h:Q", title="Time [h]")
    tips = [alt.Tooltip("time_h:Q", title="time [h]"), alt.Tooltip("current_a:Q", title="current [A]"),
            alt.Tooltip("volts_per_cell:Q", title="volts per cell"), alt.Tooltip("bank_voltage_v:Q", title="bank [V]"),
            alt.Tooltip("state_of_charge_pct:Q", title="state of charge [%]"), alt.Tooltip("ah:Q", title="delivered [Ah]")]
    h = int(HEIGHT * 0.55)
    zoom = alt.selection_interval(bind="scales", encodings=["x"], name="zoom")
    cur = alt.Chart(data).mark_line(color=INK, strokeWidth=2.2).encode(
        x=x, y=alt.Y("current_a:Q", title="Current [A]"), tooltip=tips).add_params(zoom).properties(height=h)
    vpc = alt.Chart(data).mark_line(color=COPPER, strokeWidth=2.2).encode(
        x=x, y=alt.Y("volts_per_cell:Q", title="Volts per cell", scale=alt.Scale(zero=False)), tooltip=tips)
    layers = [vpc]
    if run.limit_volts_per_cell is not None:
        lim = [{"limit": _f(run.limit_volts_per_cell), "label": f"charge limit {run.limit_volts_per_cell:.3g} V"}]
        layers.append(alt.Chart(sets("limit", lim)).mark_rule(color=RUST, strokeDash=[5, 3], strokeWidth=1.6).encode(
            y=alt.Y("limit:Q"), tooltip=[alt.Tooltip("label:N", title="limit")]))
    vpc = alt.layer(*layers).properties(height=h)
    soc = alt.Chart(data).mark_line(color=MOSS, strokeWidth=2.2).encode(
        x=x, y=alt.Y("state_of_charge_pct:Q", title="State of charge [%]", scale=alt.Scale(domain=[0, 100])),
        tooltip=tips).properties(height=h)
    panels = [cur, vpc, soc]
    if width is not None:
        panels = [p.properties(width=width) for p in panels]
    title = f"Charge run: {run.duration_h:.3g} h, stops because {run.stop_reason}"
    return alt.VConcatChart(vconcat=panels, datasets=sets.data, spacing=8, title=title, autosize=FIT_WIDTH,
                            resolve=alt.Resolve(scale=alt.ScaleResolveMap(x="shared")))


def option_charts(machine, profile, option, other_taps=(), run=None, width=None):
    """The charts of one option for its job: ``[(key, title, chart), ...]``."""
    temps = _temperatures(profile, machine)
    st = check_setting(machine, option.setting)
    out = [("occ", "Open-circuit characteristic", occ_chart(machine, st, temps, width))]
    if profile.kind == "battery":
        out.append(("load", "Against the battery", battery_chart(machine, profile, st, width)))
        if run is not None:
            out.append(("run", "Charge run", charge_run_chart(run, width)))
    elif profile.kind == "welding":
        out.append(("load", "Welding characteristics", welding_chart(machine, profile, option, other_taps, width)))
    else:
        out.append(("load", "Load-end voltage", load_end_chart(machine, profile, st, width)))
    return out
