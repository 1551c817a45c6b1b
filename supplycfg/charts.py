"""Charts of the page and the setting sheet.

Every function returns an Altair chart built from what the core computes; no
function here touches Streamlit. Each chart carries tooltips and a zoom (drag
to pan, wheel to zoom, double-click to reset) through a parameter named
``zoom``; the data travel inline so :func:`chart_spec` is self-contained and
exports to SVG with ``vl-convert``.

Every limit is a labelled line or band in a legend; lines differ by dash
pattern as well as colour (a palette published for colour-blind readers);
the chosen option is drawn bold and other options thin and grey; the axes
fit the data; all text is dark on white (contrast above 4.5:1).
"""

import copy
from dataclasses import replace

import altair as alt
import numpy as np

from .circuit import (SELF_EXCITED, SEPARATE, Load, Setting, characteristics, check_setting,
                      operating_points, self_excitation)
from .magnetisation import copper_resistance_factor
from .wording import connection_words

#: Line colours: the Okabe-Ito palette, published to stay distinct for readers with any common
#: colour-vision deficiency (Okabe & Ito 2008, "Color Universal Design"); its yellow is left out
#: (too pale on white).
BLUE = "#0072B2"
VERMILLION = "#D55E00"
GREEN = "#009E73"
PURPLE = "#CC79A7"
ORANGE = "#E69F00"
SKY = "#56B4E9"
BLACK = "#000000"
#: Muted lines (other options, the rheostat's extremes): a mid grey.
GREY = "#767676"
#: The required band's fill (with its opacity it stays light behind the lines).
SAND = "#E69F00"
#: Text and axes: contrast 16:1 on white (WCAG 2.1 asks at least 4.5:1 for text).
TEXT = "#1b1f24"
#: Grid lines (not text).
GRID = "#dde1e6"
SERIES_COLOURS = (BLUE, VERMILLION, GREEN, PURPLE, ORANGE, SKY, BLACK)
#: Dash patterns [on, off px]: solid for the machine, each limit or load line its own pattern,
#: so lines differ by more than colour.
SOLID = [1, 0]
DASHES = {"long": [8, 4], "short": [3, 3], "dot": [1.5, 3], "dash-dot": [8, 3, 2, 3], "long-short": [12, 4, 4, 4],
          "dense": [5, 2]}
#: Line widths [px]: the chosen option bold, others muted.
BOLD, NORMAL, THIN = 3.0, 1.8, 1.3
POINT_SHAPES = ("circle", "square", "triangle-up", "diamond", "cross")
#: Height of each chart's plot [px]; widths follow the page (or the sheet's ``width``).
HEIGHT = 280
#: Fit the width to the page or sheet; the height is the plot's, legend below it.
FIT_WIDTH = alt.AutoSizeParams(type="fit-x", contains="padding")
#: Points along each external characteristic.
CURVE_POINTS = 160
#: Text style of every chart: dark on white, sizes a phone can read.
CHART_CONFIG = {
    "font": "DejaVu Sans, Helvetica, Arial, sans-serif",
    "axis": {"labelColor": TEXT, "titleColor": TEXT, "domainColor": TEXT, "tickColor": TEXT, "gridColor": GRID,
             "labelFontSize": 11, "titleFontSize": 12, "titleFontWeight": "normal"},
    "legend": {"labelColor": TEXT, "titleColor": TEXT, "labelFontSize": 11, "labelLimit": 0, "symbolStrokeWidth": 2.5,
               "symbolSize": 300, "orient": "bottom", "direction": "vertical", "columns": 1, "rowPadding": 3},
    "title": {"color": TEXT, "subtitleColor": TEXT, "fontSize": 13, "subtitleFontSize": 11, "anchor": "start",
              "limit": 0, "fontWeight": "bold"},
    "view": {"stroke": GRID},
    "background": "#ffffff",
}


#: Several legends below a chart stack one above the other (a Vega legend-layout setting that
#: Altair's schema does not know, so it is added to the finished spec by :func:`chart_spec`).
LEGEND_LAYOUT = {"bottom": {"anchor": "start", "direction": "vertical", "margin": 6}}


def chart_spec(chart, validate=True, thin=False):
    """The Vega-Lite spec of a chart, legends stacked: what the page and the sheet draw.

    ``thin=True`` leaves out the points of each line that the eye cannot
    tell from the straight path between their neighbours (:func:`thin_lines`):
    the browser draws the page's charts in a fraction of the time.
    """
    # The rows go round Altair's walk: it checks every value of every row against its classes,
    # most of a page rerun's drawing time, and the rows are plain numbers and words already.
    rows = alt.Undefined if isinstance(chart, LayeredChart) else getattr(chart, "datasets", alt.Undefined)
    if rows is not alt.Undefined:
        chart.datasets = alt.Undefined
        try:
            spec = chart.to_dict(validate=validate)
        finally:
            chart.datasets = rows
        spec["datasets"] = plain_datasets(rows)
    else:
        spec = chart.to_dict(validate=validate)
    spec.setdefault("config", {}).setdefault("legend", {})["layout"] = LEGEND_LAYOUT
    if thin:
        thin_lines(spec)
    return spec


def plain_datasets(datasets):
    """Named datasets as Altair writes them: numpy scalars in the rows as Python numbers."""
    return {name: [{k: v.item() if isinstance(v, np.generic) else v for k, v in r.items()} for r in rows]
            for name, rows in datasets.items()}


#: Farthest a thinned line may stray from the line through every computed point, as a share of each
#: axis's span: 0.1 % is under a third of a pixel on a 280 px plot, still under a pixel zoomed in 3x.
DRAW_TOLERANCE = 1e-3


def polyline_keep(x, y, tolerance):
    """Indices of the vertices to keep so the polyline through them stays within ``tolerance`` of every vertex.

    The Ramer-Douglas-Peucker split: keep both ends, then the vertex farthest
    from the segment between the kept ones while it lies farther than
    ``tolerance`` (distance to the segment, so a curve that turns back is kept).

    Parameters
    ----------
    x, y : array_like
        Vertices in drawing units (each axis scaled by its span).
    tolerance : float
        Largest distance of a left-out vertex from the kept polyline, same units.

    Returns
    -------
    numpy.ndarray of int
        Ascending indices, the first and the last included.

    References
    ----------
    Douglas, D. H. & Peucker, T. K. (1973), "Algorithms for the reduction of
    the number of points required to represent a digitized line or its
    caricature", The Canadian Cartographer 10(2), 112-122.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    n = x.size
    if n <= 2:
        return np.arange(n)
    keep = np.zeros(n, bool)
    keep[[0, -1]] = True
    todo = [(0, n - 1)]
    while todo:
        a, b = todo.pop()
        if b - a < 2:
            continue
        dx, dy = x[b] - x[a], y[b] - y[a]
        px, py = x[a + 1:b] - x[a], y[a + 1:b] - y[a]
        length2 = dx * dx + dy * dy
        t = np.clip((px * dx + py * dy) / length2, 0.0, 1.0) if length2 > 0 else 0.0
        d = np.hypot(px - t * dx, py - t * dy)
        k = int(np.argmax(d))
        if d[k] > tolerance:
            m = a + 1 + k
            keep[m] = True
            todo += [(a, m), (m, b)]
    return np.flatnonzero(keep)


def _line_layers(spec, data=None):
    """``(dataset name, layer)`` of every line layer of a spec (layers and concatenations walked)."""
    own = spec.get("data")
    data = own.get("name", data) if isinstance(own, dict) else data
    mark = spec.get("mark")
    if (mark.get("type") if isinstance(mark, dict) else mark) == "line" and data is not None:
        yield data, spec
    for key in ("layer", "vconcat", "hconcat", "concat"):
        for sub in spec.get(key) or []:
            yield from _line_layers(sub, data)


def _span(rows, field, encoding):
    dom = ((encoding.get(field) or {}).get("scale") or {}).get("domain")
    if isinstance(dom, list) and len(dom) == 2 and all(isinstance(v, (int, float)) for v in dom):
        return abs(dom[1] - dom[0]) or 1.0
    vals = [r.get((encoding.get(field) or {}).get("field")) for r in rows]
    vals = [v for v in vals if isinstance(v, (int, float))]
    return (max(vals) - min(vals)) or 1.0 if vals else 1.0


def thin_lines(spec, tolerance=DRAW_TOLERANCE):
    """Leave out of a spec's named datasets the rows no line needs to look the same (in place).

    Each line layer's rows are split by series (and by gaps where a value is
    missing), put in their drawing order and thinned with
    :func:`polyline_keep` on the axis spans (the scale's domain where the
    chart sets one, else the data's). A row stays if any line layer keeps it
    or a layer other than a line draws it. Nothing is computed: the rows kept
    are the core's own points, unchanged.
    """
    sets = spec.get("datasets") or {}
    layers = list(_line_layers(spec))
    used_by_lines = {name for name, _ in layers}
    others = set()

    def other_data(s, data=None):
        own = s.get("data")
        data = own.get("name", data) if isinstance(own, dict) else data
        mark = s.get("mark")
        if mark is not None and (mark.get("type") if isinstance(mark, dict) else mark) != "line" and data:
            others.add(data)
        for key in ("layer", "vconcat", "hconcat", "concat"):
            for sub in s.get(key) or []:
                other_data(sub, data)

    other_data(spec)
    keep = {name: set() for name in used_by_lines}
    for name, layer in layers:
        rows = sets.get(name)
        if not rows:
            continue
        enc = layer.get("encoding") or {}
        xf, yf = (enc.get("x") or {}).get("field"), (enc.get("y") or {}).get("field")
        if xf is None or yf is None:
            keep[name].update(range(len(rows)))
            continue
        xs, ys = _span(rows, "x", enc), _span(rows, "y", enc)
        of = (enc.get("order") or {}).get("field")
        groups = {}
        for i, r in enumerate(rows):
            groups.setdefault(r.get("series"), []).append(i)
        for idx in groups.values():
            if of is not None:
                idx = sorted(idx, key=lambda i: (rows[i].get(of) is None, rows[i].get(of)))
            run = []
            for i in idx + [None]:
                r = None if i is None else rows[i]
                if r is not None and isinstance(r.get(xf), (int, float)) and isinstance(r.get(yf), (int, float)):
                    run.append(i)
                    continue
                if run:  # a missing value breaks the line: thin each piece on its own
                    k = polyline_keep([rows[j][xf] / xs for j in run], [rows[j][yf] / ys for j in run], tolerance)
                    keep[name].update(run[j] for j in k)
                    run = []
                if i is not None:
                    keep[name].add(i)
    for name, kept in keep.items():
        if name in others or name not in sets:
            continue
        sets[name] = [r for i, r in enumerate(sets[name]) if i in kept]
    return spec


def _f(v, digits=4):
    """Round for chart data: keeps specs small and deterministic."""
    if v is None:
        return None
    v = float(v)
    if not np.isfinite(v):
        return None
    return float(f"{v:.{digits}g}")


class _Styles:
    """Colour, dash, width and opacity per series label: one legend shows them all."""

    def __init__(self):
        self.items = {}

    def add(self, label, colour=None, dash=None, width=NORMAL, muted=False):
        if label in self.items:
            return label
        colour = colour or SERIES_COLOURS[len(self.items) % len(SERIES_COLOURS)]
        self.items[label] = (GREY if muted and colour is None else colour, dash or SOLID,
                             THIN if muted else width, 0.7 if muted else 1.0)
        return label

    def _scale(self, j):
        labels = list(self.items)
        return alt.Scale(domain=labels, range=[self.items[k][j] for k in labels])

    def encodings(self, legend=True):
        """color, strokeDash, strokeWidth and opacity on ``series``, merged into one legend."""
        leg = _legend() if legend else None
        return {"color": alt.Color("series:N", scale=self._scale(0), legend=leg),
                "strokeDash": alt.StrokeDash("series:N", scale=self._scale(1), legend=leg),
                "strokeWidth": alt.StrokeWidth("series:N", scale=self._scale(2), legend=leg),
                "opacity": alt.Opacity("series:N", scale=self._scale(3), legend=leg)}

    def colour(self, legend=False):
        return alt.Color("series:N", scale=self._scale(0), legend=_legend() if legend else None)


def _legend():
    return alt.Legend(orient="bottom", columns=1, title=None, labelLimit=0, symbolType="stroke", symbolSize=500)


def _band_fill(labels):
    """The required bands' fill, with a legend entry of their own (a square)."""
    return alt.Fill("band:N", scale=alt.Scale(domain=list(labels), range=[SAND] * len(labels)),
                    legend=alt.Legend(orient="bottom", title=None, labelLimit=0, symbolType="square",
                                      symbolOpacity=0.35, symbolSize=200))


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


def split_extrapolated(rows, ext_label):
    """Rows of one curve with the extrapolated part relabelled ``ext_label`` (its own legend entry).

    The last measured point is repeated under ``ext_label`` so the two parts
    join.
    """
    out = []
    for r in sorted(rows, key=lambda r: r["order"]):
        if r["extrapolated"] == "yes":
            if out and out[-1]["extrapolated"] == "no":
                out.append(dict(out[-1], series=ext_label))
            out.append(dict(r, series=ext_label))
        else:
            out.append(r)
    return out


def _title(text, subtitle=None):
    return alt.TitleParams(text=text, subtitle=subtitle) if subtitle else text


#: Name of the view that carries a layered chart's zoom (the chart's first layer).
ZOOM_VIEW = "view_zoom"


class LayeredChart:
    """Layers over one pair of axes with a zoom, their rows kept once: what :func:`_layered` builds.

    Altair's own layer chart copies every layer deeply, and again on each
    ``to_dict``, to lift selection parameters to the top: most of a page
    rerun's drawing time. Here each layer is turned into its spec once and
    the zoom is written at the top as Vega-Lite has it (``params`` with
    ``views`` naming the first layer). ``to_dict`` gives the same spec as
    Altair's, the view's name aside.
    """

    def __init__(self, layers, datasets, top):
        self.layers, self.datasets, self.top = layers, datasets, top

    def to_dict(self, validate=True):
        """The Vega-Lite spec (checked against Altair's schema when ``validate``)."""
        layer = [ly.to_dict(validate=False, context={"top_level": False}) for ly in self.layers]
        layer[0]["name"] = ZOOM_VIEW
        spec = {"$schema": alt.SCHEMA_URL, "layer": layer,
                "params": [{"name": "zoom", "select": {"type": "interval"}, "bind": "scales", "views": [ZOOM_VIEW]}],
                **{k: (v.to_dict(validate=False) if isinstance(v, alt.SchemaBase) else copy.deepcopy(v))
                   for k, v in self.top.items()}}
        theme = alt.theme.get()
        if theme is not None:
            spec = alt.utils.update_nested(theme(), spec, copy=True)
        if self.datasets:
            spec["datasets"] = plain_datasets(self.datasets)
        if validate:
            alt.LayerChart.validate(spec)
        return spec


def _layered(layers, title, sets, width=None):
    """The layers as one chart with a zoom on the first (:class:`LayeredChart`)."""
    layers = [ly for ly in layers if ly is not None]
    top = {"title": title, "height": HEIGHT, "autosize": FIT_WIDTH, "config": CHART_CONFIG}
    if width is not None:
        top["width"] = width
    return LayeredChart(layers, sets.data, top)


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
    occ = machine.open_circuit_curve
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
    rsh = machine.shunt_field_resistance_ohm
    kt = {t: float(copper_resistance_factor(t, machine.reference_temperature_c)) for t in temps}
    ses = {t: self_excitation(machine, st.rheostat_ohm, st.speed_rpm, t) for t in temps} \
        if st.connection in SELF_EXCITED else {}
    # the axis reaches every built-up no-load point, even one past the measured curve
    x_nl = max((se.no_load_voltage_v / se.field_circuit_resistance_ohm for se in ses.values()
                if se.no_load_voltage_v is not None), default=0.0)
    x_top = 1.15 * max(x_last, exc_a or 0.0, x_nl)
    xs = np.union1d(np.linspace(0.0, x_top, 180), [x_last])
    es = ratio * occ.emf(xs)
    e_top = float(es.max())
    speed_note = f"at {st.speed_rpm:.5g} rpm"
    curve_label = "open-circuit characteristic"
    curve = [{"series": curve_label, "field_current_a": _f(x), "emf_v": _f(e),
              "extrapolated": "yes" if x > x_last * (1 + 1e-9) else "no", "order": i}
             for i, (x, e) in enumerate(zip(xs, es))]
    # the part beyond the test is its own series (dashed, in the legend), from the last measured point
    ext_label = f"{curve_label}: beyond the test points"
    curve = split_extrapolated(curve, ext_label)
    pts = [{"series": curve_label, "field_current_a": _f(x), "emf_v": _f(ratio * e),
            "measured_at_rpm": _f(machine.occ_speed_rpm, 6)}
           for x, e in zip(machine.occ_field_current_a, machine.occ_emf_v)]

    styles = _Styles()
    styles.add(curve_label, BLUE, SOLID, BOLD)
    if any(r["series"] == ext_label for r in curve):
        styles.add(ext_label, BLUE, DASHES["short"], NORMAL)
    lines, marks = [], []

    def field_line(label, r_ohm, colour, dash, width=NORMAL, muted=False):
        if r_ohm <= 0:
            return
        x_end = min(x_top, e_top / r_ohm)
        for j, x in enumerate((0.0, x_end)):
            lines.append({"series": label, "field_current_a": _f(x), "emf_v": _f(r_ohm * x),
                          "resistance_ohm": _f(r_ohm), "order": j})
        styles.add(label, colour, dash, width, muted)

    if st.connection in SELF_EXCITED:
        tones = ((VERMILLION, DASHES["long"]), (GREEN, DASHES["dash-dot"]))
        for t, (c, dash) in zip(temps, tones if len(temps) > 1 else tones[:1]):
            r = rsh * kt[t] + st.rheostat_ohm
            lab = f"this setting: {r:.4g} Ω field circuit, {t:g} °C"
            field_line(lab, r, c, dash, BOLD)
            se = ses[t]
            if se.no_load_voltage_v is not None:
                # past critical the held point rests on the residual magnetism, not a built-up one
                marks.append({"series": lab, "point": ("no-load point held by the residual (no build-up)"
                                                       if se.stays_near_residual else "built-up no-load point"),
                              "field_current_a": _f(se.no_load_voltage_v / se.field_circuit_resistance_ohm),
                              "emf_v": _f(se.no_load_voltage_v),
                              "builds_up": "yes" if se.builds_up else "no: " + "; ".join(se.reasons)})
        r_lo = rsh * kt[temps[0]]
        r_hi = rsh * kt[temps[-1]] + machine.rheostat_max_ohm
        field_line(f"rheostat cut out: {r_lo:.4g} Ω ({temps[0]:g} °C)", r_lo, GREY, DASHES["short"], muted=True)
        if machine.rheostat_max_ohm > 0:
            field_line(f"rheostat all in: {r_hi:.4g} Ω ({temps[-1]:g} °C)", r_hi, GREY, DASHES["dot"], muted=True)
    if st.connection in SELF_EXCITED:
        r_crit = ratio * occ.air_gap_slope()
        field_line(f"critical field resistance {r_crit:.4g} Ω", r_crit, PURPLE, DASHES["long-short"])
    for lab, a in exc:
        marks.append({"series": curve_label, "point": f"no-load point, {lab}", "field_current_a": _f(a),
                      "emf_v": _f(ratio * float(occ.emf(a))), "builds_up": "separately excited"})

    x_title, y_title = "Field current [A]", "EMF / terminal voltage [V]"
    enc = styles.encodings()
    sets = _Sets()
    base = alt.Chart(sets("occ", curve)).mark_line(clip=True).encode(
        x=alt.X("field_current_a:Q", title=x_title, scale=alt.Scale(domain=[0, _f(x_top)])),
        y=alt.Y("emf_v:Q", title=y_title, scale=alt.Scale(domain=[0, _f(1.08 * e_top)])),
        detail=alt.Detail("series:N"), order=alt.Order("order:Q"),
        tooltip=[alt.Tooltip("field_current_a:Q", title="field current [A]"),
                 alt.Tooltip("emf_v:Q", title="EMF [V]"),
                 alt.Tooltip("extrapolated:N", title="beyond the measured points")], **enc,
    )
    measured = alt.Chart(sets("measured", pts)).mark_point(filled=True, size=36, shape="diamond").encode(
        x=alt.X("field_current_a:Q"), y=alt.Y("emf_v:Q"), color=styles.colour(),
        tooltip=[alt.Tooltip("field_current_a:Q", title="field current [A]"),
                 alt.Tooltip("emf_v:Q", title="EMF at this speed [V]"),
                 alt.Tooltip("measured_at_rpm:Q", title="measured at [rpm]")])
    layer_lines = None
    if lines:
        layer_lines = alt.Chart(sets("field_lines", lines)).mark_line(clip=True).encode(
            x=alt.X("field_current_a:Q"), y=alt.Y("emf_v:Q"), detail=alt.Detail("series:N"),
            order=alt.Order("order:Q"),
            tooltip=[alt.Tooltip("series:N", title="line"),
                     alt.Tooltip("resistance_ohm:Q", title="resistance [ohm]")], **enc)
    layer_marks = None
    if marks:
        layer_marks = alt.Chart(sets("no_load", marks)).mark_point(size=130, filled=False, strokeWidth=2.6).encode(
            x=alt.X("field_current_a:Q"), y=alt.Y("emf_v:Q"), color=styles.colour(),
            shape=alt.Shape("point:N", legend=alt.Legend(orient="bottom", title=None, labelLimit=0),
                            scale=alt.Scale(range=list(POINT_SHAPES))),
            tooltip=[alt.Tooltip("series:N", title="point"), alt.Tooltip("field_current_a:Q", title="field current [A]"),
                     alt.Tooltip("emf_v:Q", title="no-load voltage [V]"),
                     alt.Tooltip("builds_up:N", title="builds up from residual")])
    return _layered([base, measured, layer_lines, layer_marks],
                    _title("Open-circuit characteristic",
                           # a series or separately excited set has no field-circuit line to draw
                           f"with the field-circuit lines, {speed_note}" if lines else
                           f"with the no-load points, {speed_note}" if marks else speed_note), sets, width)


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
    """Machine curves, load and limit lines, required bands and operating points in one chart.

    Parameters
    ----------
    curves : list of dict
        ``{"label", "rows"}`` with rows from :func:`curve_rows`; optionally
        ``"colour"``, ``"dash"``, ``"width"`` and ``"muted"`` (another
        option, drawn thin and grey-toned). Extrapolated parts get their own
        legend entry.
    loads : list of dict
        ``{"label", "load_current_a": [...], "terminal_voltage_v": [...]}`` (a
        polyline: a load line or a limit), optionally ``"colour"``, ``"dash"``.
    bands : list of dict
        ``{"label", "i_min", "i_max", "v_min", "v_max"}``: what the job needs,
        shaded, with a legend entry of its own.
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
    styles = _Styles()
    rows = []
    for c in curves:
        ext = f"{c['label']}: extrapolated"
        part = split_extrapolated([dict(r, series=c["label"]) for r in c["rows"]], ext)
        styles.add(c["label"], c.get("colour"), c.get("dash", SOLID), c.get("width", BOLD), c.get("muted", False))
        if any(r["series"] == ext for r in part):
            styles.add(ext, c.get("colour"), DASHES["dot"], NORMAL, c.get("muted", False))
        rows += [dict(r, kind="machine") for r in part]
    lrows = []
    dash_cycle = [DASHES[k] for k in ("long", "short", "dash-dot", "dot", "long-short", "dense")]
    for j, c in enumerate(loads):
        styles.add(c["label"], c.get("colour", BLACK), c.get("dash", dash_cycle[j % len(dash_cycle)]),
                   c.get("width", NORMAL))
        lrows += [{"series": c["label"], "load_current_a": _f(a), "terminal_voltage_v": _f(b), "order": i}
                  for i, (a, b) in enumerate(zip(c["load_current_a"], c["terminal_voltage_v"]))]
    brows = [{"band": b["label"], "i_min": _f(b["i_min"]), "i_max": _f(b["i_max"]),
              "v_min": _f(b["v_min"]), "v_max": _f(b["v_max"])} for b in bands]
    prow = [{"series": p.get("curve") or p["label"], "point": p["label"], "load_current_a": _f(p["load_current_a"]),
             "terminal_voltage_v": _f(p["terminal_voltage_v"]),
             "stable": "stable" if p.get("stable", True) else "unstable (not used)"} for p in points]
    for p in prow:
        styles.add(p["series"], VERMILLION)
    enc = styles.encodings()
    xs = alt.Scale(domain=list(x_domain)) if x_domain else alt.Undefined
    ys = alt.Scale(domain=list(y_domain)) if y_domain else alt.Undefined
    xq = alt.X("load_current_a:Q", title=x_title, scale=xs)
    yq = alt.Y("terminal_voltage_v:Q", title=y_title, scale=ys)
    layers = []
    sets = _Sets()
    if brows:
        layers.append(alt.Chart(sets("bands", brows)).mark_rect(opacity=0.22).encode(
            x=alt.X("i_min:Q", title=x_title, scale=xs), x2=alt.X2("i_max:Q"),
            y=alt.Y("v_min:Q", title=y_title, scale=ys), y2=alt.Y2("v_max:Q"),
            fill=_band_fill([b["band"] for b in brows]),
            tooltip=[alt.Tooltip("band:N", title="required"), alt.Tooltip("i_min:Q", title="from [A]"),
                     alt.Tooltip("i_max:Q", title="to [A]"), alt.Tooltip("v_min:Q", title="lowest [V]"),
                     alt.Tooltip("v_max:Q", title="highest [V]")]))
    if rows:
        layers.append(alt.Chart(sets("curves", rows)).mark_line(clip=True).encode(
            x=xq, y=yq, detail=alt.Detail("series:N"), order=alt.Order("order:Q"),
            tooltip=[alt.Tooltip("series:N", title="curve"), alt.Tooltip("load_current_a:Q", title="load current [A]"),
                     alt.Tooltip("terminal_voltage_v:Q", title="voltage [V]"),
                     alt.Tooltip("speed_rpm:Q", title="speed [rpm]"),
                     alt.Tooltip("shaft_power_kw:Q", title="shaft power [kW]"),
                     alt.Tooltip("extrapolated:N", title="beyond the measured OCC")], **enc))
    if lrows:
        layers.append(alt.Chart(sets("loads", lrows)).mark_line(clip=True).encode(
            x=xq, y=yq, detail=alt.Detail("series:N"), order=alt.Order("order:Q"),
            tooltip=[alt.Tooltip("series:N", title="line"), alt.Tooltip("load_current_a:Q", title="current [A]"),
                     alt.Tooltip("terminal_voltage_v:Q", title="voltage [V]")], **enc))
    if prow:
        layers.append(alt.Chart(sets("points", prow)).mark_point(size=110, filled=True).encode(
            x=xq, y=yq, color=styles.colour(),
            shape=alt.Shape("point:N", legend=alt.Legend(orient="bottom", title=None, labelLimit=0),
                            scale=alt.Scale(range=list(POINT_SHAPES))),
            fillOpacity=alt.FillOpacity("stable:N", legend=None,
                                        scale=alt.Scale(domain=["stable", "unstable (not used)"], range=[1.0, 0.2])),
            tooltip=[alt.Tooltip("point:N", title="operating point"), alt.Tooltip("series:N", title="on"),
                     alt.Tooltip("load_current_a:Q", title="current [A]"),
                     alt.Tooltip("terminal_voltage_v:Q", title="voltage [V]"),
                     alt.Tooltip("stable:N", title="stability")]))
    if not layers:
        layers.append(alt.Chart(sets("empty", [{"load_current_a": 0, "terminal_voltage_v": 0}])).mark_point(
            opacity=0).encode(x=xq, y=yq))
    return _layered(layers, title, sets, width)


def setting_curves(machine, settings, points=CURVE_POINTS, drive=None):
    """The external characteristics of several settings (checked) in one solve: a chart's corners
    share the engine's fixed cost per call."""
    return characteristics(machine, [check_setting(machine, s) for s in settings], points, drive)


def _temperatures(profile, machine):
    return tuple(profile.temperatures_c) if profile.temperatures_c else (machine.reference_temperature_c,)


def _speeds(profile):
    return tuple(profile.speeds_rpm)


# --- battery ---------------------------------------------------------------

def battery_lines(profile, i_top):
    """Battery lines: rest voltage at the start, the charging curves at the start and end, the hand-over voltage.

    Returns
    -------
    (loads, bands, start_load, on_charge)
        ``start_load`` is the :class:`~supplycfg.circuit.Load` of the start
        state of charge (rest voltage plus bank and cable resistance);
        ``on_charge(soc)`` gives the bank's voltage on charge at the machine
        ``V(I)`` (:func:`supplycfg.jobs.battery.bank_voltage_v`).
    """
    from .jobs import battery as ld
    b = profile.battery
    chem = ld.chemistry(b.chemistry)
    s0, s1 = b.state_of_charge
    r = b.internal_resistance_ohm + b.cable_resistance_ohm
    e0 = b.cells * float(ld.open_circuit_voltage_per_cell(chem, s0, b.open_circuit_voltage_per_cell_v))

    def on_charge(soc):
        return lambda i: ld.bank_voltage_v(b, soc, i)

    cur = np.linspace(0.0, i_top, 60)
    # black: the finish curve of the plan is green with long dashes on the same chart
    start = {"label": f"battery at rest, {s0:.0%} charged", "colour": BLACK, "dash": DASHES["long"],
             "load_current_a": [0.0, i_top], "terminal_voltage_v": [e0, e0 + r * i_top]}
    start_c = {"label": f"battery on charge, {s0:.0%} charged", "colour": SKY, "dash": DASHES["dash-dot"],
               "load_current_a": list(cur), "terminal_voltage_v": list(on_charge(s0)(cur))}
    end = {"label": f"battery on charge, {s1:.0%} charged", "colour": PURPLE, "dash": DASHES["dot"],
           "load_current_a": list(cur), "terminal_voltage_v": list(on_charge(s1)(cur))}
    vho = b.cells * ld.handover_volts_per_cell(b)
    limit = {"label": f"hand-over to the finish {vho / b.cells:.3g} V per cell ({vho:.4g} V)", "colour": BLACK,
             "dash": DASHES["long-short"], "load_current_a": [0.0, i_top], "terminal_voltage_v": [vho, vho]}
    band = {"label": f"main charge wanted: {b.min_charge_current_a:g} to {b.max_charge_current_a:g} A",
            "i_min": b.min_charge_current_a, "i_max": b.max_charge_current_a,
            "v_min": e0, "v_max": vho}
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


def battery_chart(machine, profile, setting, width=None, figures=None, finish_setting=None):
    """External characteristic of the setting (cold and hot windings) against the battery.

    Operating points: the charge at the start (rest-voltage line) and at the
    end state of charge (charging-voltage model), on each curve. With the
    option's ``figures``, the gassing voltage of the bank is drawn as a limit
    line too. The voltage axis starts near the battery's voltages, not at 0.
    With ``finish_setting`` (the plan's second stage) its curve at the
    setting's own temperature is drawn too.
    """
    b = profile.battery
    temps = _temperatures(profile, machine)
    curves, chars = [], []
    wanted = [replace(setting, winding_temperature_c=t) for t in temps]
    if finish_setting is not None:
        wanted.append(finish_setting)
    solved = setting_curves(machine, wanted, drive=profile.drive)
    for j, t in enumerate(temps):
        ch = solved[j]
        lab = f"machine, main charge, windings {t:g} °C"
        chars.append((t, lab, ch))
        curves.append({"label": lab, "colour": (BLUE, VERMILLION)[j % 2], "dash": SOLID if j == 0 else DASHES["dense"],
                       "rows": curve_rows(lab, ch)})
    if finish_setting is not None:
        ch = solved[-1]
        lab = f"machine, finish, windings {ch.setting.winding_temperature_c:g} °C"
        curves.append({"label": lab, "colour": GREEN, "dash": DASHES["long"], "rows": curve_rows(lab, ch)})
    i_top = 1.6 * b.max_charge_current_a
    lines, bands, start, on_charge = battery_lines(profile, i_top)
    gas = (figures or {}).get("gassing_volts_per_cell")
    if gas is not None and np.isfinite(gas):
        vg = float(gas) * b.cells
        lines.append({"label": f"gassing voltage {gas:.3g} V per cell ({vg:.4g} V)", "colour": VERMILLION,
                      "dash": DASHES["short"], "load_current_a": [0.0, i_top], "terminal_voltage_v": [vg, vg]})
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
    # the view: the battery's lines, the operating points and the machine's no-load voltages, a little
    # padded; a curve falling below it past the charging range is clipped at the bottom edge
    seen = [v for ln in lines for v in ln["terminal_voltage_v"]] + [p["terminal_voltage_v"] for p in pts]
    seen += [r["terminal_voltage_v"] for c in curves for r in c["rows"][:1] if r["terminal_voltage_v"] is not None]
    v_lo, v_hi = min(seen), max(seen)
    pad = 0.06 * (v_hi - v_lo) + 1e-9
    return characteristic_chart(curves, lines, bands, pts, "Machine against the battery", width=width,
                                x_domain=(0, _f(i_view)), y_domain=(_f(max(0.0, v_lo - pad)), _f(v_hi + pad)))


# --- welding ---------------------------------------------------------------

def welding_load_line(profile, i_top):
    """The process's conventional load line, seen at the machine (plus cable drop)."""
    from .jobs import welding as ld
    w = profile.welding
    cur = np.linspace(0.0, i_top, 40)
    v = ld.conventional_load_voltage(w.process, cur) + cur * w.cable_resistance_ohm
    from .wording import name_words
    return {"label": f"{name_words(w.process)} load line (with the leads)", "colour": BLACK, "dash": DASHES["long"],
            "load_current_a": list(cur), "terminal_voltage_v": list(v)}


def _end_settings(option):
    """Settings of the two ends of a welding option's range (or the option's own)."""
    out = []
    for cs in option.current_settings or []:
        kw = {k: float(cs[k]) for k in ("rheostat_ohm", "field_current_a")
              if cs.get(k) is not None and np.isfinite(cs[k])}
        # each end of a welding dial may sit on its own tap and diverter
        taps = {k: cs[k] for k in ("series_turns", "diverter_ohm") if k in cs}
        out.append((cs.get("current_a"), replace(option.setting, rheostat_ohm=kw.get("rheostat_ohm"),
                                                  field_current_a=kw.get("field_current_a"), **taps)))
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
    ends = [(target, check_setting(machine, st)) for target, st in _end_settings(option)]
    tap_ends = [(target, check_setting(machine, st)) for target, st in (_end_settings(opt)[-1] for opt in other_taps)]
    solved = setting_curves(machine, [st for _, st in ends] + [st for _, st in tap_ends], drive=profile.drive)
    for j, (target, st) in enumerate(ends):
        ch = solved[j]
        lab = (f"set for {target:g} A: " if target is not None else "") + _tap_text(st)
        curves.append({"label": lab, "colour": (BLUE, VERMILLION)[j % 2], "dash": SOLID if j == 0 else DASHES["dense"],
                       "rows": curve_rows(lab, ch)})
        if ch.short_circuit_current_a:
            i_max = max(i_max, 1.05 * ch.short_circuit_current_a)
        op = operating_points(machine, st, line, profile.drive).normal
        if op is not None:
            pts.append({"label": "arc operating point", "curve": lab, "load_current_a": op["load_current_a"],
                        "terminal_voltage_v": op["terminal_voltage_v"]})
    for k, (target, st) in enumerate(tap_ends):
        ch = solved[len(ends) + k]
        lab = f"other tap: {_tap_text(st)}" + (f", for {target:g} A" if target else "")
        curves.append({"label": lab, "colour": GREY, "muted": True,
                       "dash": (DASHES["short"], DASHES["dot"], DASHES["dash-dot"], DASHES["long"])[k % 4],
                       "rows": curve_rows(lab, ch)})
    v_hi = max([r["terminal_voltage_v"] or 0.0 for c in curves for r in c["rows"]] or [80.0])
    limits = []
    for value, label, colour, dash in welding_limit_lines(option, profile):
        limits.append({"label": label, "colour": colour, "dash": dash,
                       "load_current_a": [0.0, _f(i_max)], "terminal_voltage_v": [value, value]})
    v_top = max([v_hi] + [ln["terminal_voltage_v"][0] for ln in limits])
    band = {"label": f"welding current wanted: {lo:g} to {hi:g} A", "i_min": lo, "i_max": hi,
            "v_min": 0.0, "v_max": _f(1.05 * v_top)}
    return characteristic_chart(curves, [welding_load_line(profile, i_max)] + limits, [band], pts,
                                _title("Welding characteristics and the arc load line",
                                       connection_words(option.setting.connection)), width=width,
                                x_domain=(0, _f(i_max)), y_domain=(0, _f(1.08 * v_top)))


def welding_limit_lines(option, profile):
    """``[(volts, label, colour, dash)]``: the no-load limits and the strike minimum the core states.

    Read from the option's margins and figures (and the job's strike
    minimum where the profile gives one); nothing is computed here.
    """
    out = []
    m, f = option.margins or {}, option.figures or {}
    peak = (m.get("no_load_peak_voltage") or {}).get("limit", f.get("no_load_limit_v"))
    if peak is not None:
        out.append((float(peak), f"no-load limit {float(peak):.4g} V (peak, with ripple)", VERMILLION, DASHES["short"]))
    mean = (m.get("no_load_mean_voltage") or {}).get("limit", f.get("no_load_mean_limit_v"))
    if mean is not None:
        out.append((float(mean), f"site no-load limit {float(mean):.4g} V", PURPLE, DASHES["long-short"]))
    # the strike minimum is a limit: the margin's, the figure that states it, or the profile's key
    # (``min_no_load_voltage_v`` of the figures is the option's own lowest no-load voltage, not the limit)
    strike = (m.get("no_load_strike_voltage") or {}).get("limit", f.get("no_load_strike_min_v"))
    if strike is None:
        strike = getattr(getattr(profile, "welding", None), "min_no_load_voltage_v", None)
    strike = None if strike is None else float(strike)
    if strike is not None and np.isfinite(strike):
        out.append((strike, f"strike minimum {strike:.4g} V (no load)", GREEN, DASHES["dot"]))
    return [o for o in out if np.isfinite(o[0])]


def _tap_text(st):
    """Short words for a welding curve: series turns and field control (the connection is in the subtitle)."""
    parts = []
    if st.series_turns:
        parts.append(f"{st.series_turns:g} turns")
    if st.diverter_ohm is not None:
        parts.append(f"diverter {st.diverter_ohm:.3g} Ω")
    if st.field_current_a is not None:
        parts.append(f"field {st.field_current_a:.3g} A")
    elif st.rheostat_ohm is not None and st.connection != "series":
        parts.append(f"rheostat {st.rheostat_ohm:.3g} Ω")
    return ", ".join(parts) or "series winding only"


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
    tones = (BLUE, VERMILLION, GREEN, PURPLE, ORANGE, SKY)
    dashes = (SOLID, DASHES["dense"], DASHES["dash-dot"], DASHES["long"], DASHES["short"], DASHES["dot"])
    solved = setting_curves(machine, [replace(setting, speed_rpm=n, winding_temperature_c=t) for n, t in combos],
                            drive=profile.drive)
    for j, (n, t) in enumerate(combos):
        ch = solved[j]
        if kind == "lighting":
            tf = lambda il, v: v - il * rfd
        else:
            tf = lambda il, v, vb=job.bus_voltage_v: vb + v - il * rfd
        lab = f"at {n:.5g} rpm, windings {t:g} °C"
        rows = [r for r in curve_rows(lab, ch, transform=tf)
                if r["load_current_a"] is not None and r["load_current_a"] <= 1.25 * max(hi, 1.0)
                and r["load_current_a"] >= -1e-9]
        curves.append({"label": lab, "colour": tones[j % len(tones)], "dash": dashes[j % len(dashes)], "rows": rows})
    band = {"label": f"band wanted: {nominal:.4g} V ± {job.tolerance_percent:g} %, {lo:g} to {hi:g} A",
            "i_min": lo, "i_max": hi, "v_min": nominal * (1 - tol), "v_max": nominal * (1 + tol)}
    title = "Voltage at the lamps" if kind == "lighting" else "Voltage at the far end of the boosted feeder"
    loads_ = []
    if kind == "booster":
        loads_.append({"label": f"feeder without booster: {nominal:.4g} V − {rfd:g} Ω × I", "colour": BLACK,
                       "load_current_a": [0.0, 1.25 * hi], "terminal_voltage_v": [nominal, nominal - 1.25 * hi * rfd]})
    inside = [r["terminal_voltage_v"] for c in curves for r in c["rows"]
              if r["terminal_voltage_v"] is not None and lo <= r["load_current_a"] <= hi]
    pad = max(tol * nominal, 1.0)
    y_lo = min([band["v_min"] - pad] + [v - 0.3 * pad for v in inside])
    y_hi = max([band["v_max"] + pad] + [v + 0.3 * pad for v in inside])
    return characteristic_chart(curves, loads_, [band], (), title, y_title="Load-end voltage [V]", width=width,
                                x_domain=(0, _f(1.1 * max(hi, 1.0))), y_domain=(_f(max(y_lo, 0.0)), _f(y_hi)))


def charging_curves_chart(family, width=None):
    """The family of constant-current charging curves: volts per cell against state of charge, with the
    gassing voltage and the highest cell voltage.

    Parameters
    ----------
    family : dict
        From :func:`supplycfg.jobs.battery.charging_curves` (the core computes every point).
    """
    s = family["state_of_charge"]
    rows = []
    for c in family["curves"]:
        lab = f"{c['label']} ({c['rate_per_h']:g} A per Ah)"
        rows += [{"series": lab, "state_of_charge_pct": _f(100 * si), "volts_per_cell": _f(v),
                  "stored_pct": _f(None if sf is None else 100 * sf)}
                 for si, v, sf in zip(s, c["volts_per_cell"], c["stored_fraction"])]
    labels = list(dict.fromkeys(r["series"] for r in rows))
    sets = _Sets()
    x = alt.X("state_of_charge_pct:Q", title="State of charge [%]", scale=alt.Scale(domain=[0, 100]))
    colour = alt.Color("series:N", scale=alt.Scale(domain=labels, range=[BLUE, VERMILLION, GREEN, PURPLE][:len(labels)]),
                       legend=_legend())
    dash = alt.StrokeDash("series:N", scale=alt.Scale(domain=labels, range=[SOLID, DASHES["long"], DASHES["dot"],
                                                                               DASHES["dash-dot"]][:len(labels)]),
                          legend=_legend())
    curves = alt.Chart(sets("curves", rows)).mark_line(strokeWidth=2.2).encode(
        x=x, y=alt.Y("volts_per_cell:Q", title="Volts per cell", scale=alt.Scale(zero=False)), color=colour,
        strokeDash=dash,
        tooltip=[alt.Tooltip("series:N", title="current"), alt.Tooltip("state_of_charge_pct:Q", title="charge [%]"),
                 alt.Tooltip("volts_per_cell:Q", title="volts per cell"),
                 alt.Tooltip("stored_pct:Q", title="stored [% of current]")])
    lines = [{"label": f"gassing voltage {family['gassing_volts_per_cell']:.3f} V", "v": _f(family["gassing_volts_per_cell"])},
             {"label": f"highest cell voltage {family['highest_volts_per_cell']:.3f} V", "v": _f(family["highest_volts_per_cell"])}]
    rules = alt.Chart(sets("levels", lines)).mark_rule(color=BLACK, strokeDash=DASHES["long-short"], strokeWidth=1.6).encode(
        y=alt.Y("v:Q"), tooltip=[alt.Tooltip("label:N", title="level")])
    from .wording import name_words
    title = f"Charging curves of {name_words(family['chemistry'])} at {family['temperature_c']:g} °C"
    return _layered([curves, rules], title, sets, width)


# ---------------------------------------------------------------------------
# 3. the charge run
# ---------------------------------------------------------------------------

def _mapping(x):
    """A stage given as a dict or as an object with ``as_dict``."""
    if isinstance(x, dict):
        return x
    return x.as_dict() if hasattr(x, "as_dict") else vars(x)


def charge_run_chart(run, width=None, stages=None):
    """Charging current, volts per cell (with its limits) and state of charge against time.

    Parameters
    ----------
    run : ChargeRun
        From :func:`supplycfg.simulation.charge_run`.
    stages : list, optional
        The charge plan's stages (``from_h``, ``to_h``, ...), shaded in every
        panel; default ``run.stages`` where the run has them.
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
    h = int(HEIGHT * 0.5)
    stages = stages if stages is not None else getattr(run, "stages", None)
    srows = []
    for k, st in enumerate(stages or [], 1):
        st = _mapping(st)
        a, b = st.get("from_h"), st.get("to_h")
        if a is None or b is None:
            continue
        srows.append({"band": f"stage {k}: {float(a):.4g} to {float(b):.4g} h", "from_h": _f(a), "to_h": _f(b),
                      "ends_because": str(st.get("ends_because") or "")})
    shade = None
    if srows:
        tones = [SKY, ORANGE, GREEN, PURPLE]
        labels = [r["band"] for r in srows]
        shade = alt.Chart(sets("stages", srows)).mark_rect(opacity=0.16).encode(
            x=alt.X("from_h:Q"), x2=alt.X2("to_h:Q"),
            fill=alt.Fill("band:N", scale=alt.Scale(domain=labels, range=[tones[i % 4] for i in range(len(labels))]),
                          legend=alt.Legend(orient="bottom", title=None, labelLimit=0, symbolType="square",
                                            symbolOpacity=0.4, columns=1)),
            tooltip=[alt.Tooltip("band:N", title="stage"), alt.Tooltip("ends_because:N", title="ends because")])

    def panel(layer):
        return alt.layer(shade, layer) if shade is not None else layer

    zoom = alt.selection_interval(bind="scales", encodings=["x"], name="zoom")
    # headroom above the largest current: a main charge held near its limit otherwise runs along the top edge
    given = [r["current_a"] for r in rows if r.get("current_a") is not None and np.isfinite(r["current_a"])]
    i_lo, i_hi = min(given + [0.0]), max(given + [0.0])
    span = max(i_hi - i_lo, 1e-9)
    cur = alt.Chart(data).mark_line(color=BLUE, strokeWidth=2.2).encode(
        x=x, y=alt.Y("current_a:Q", title="Current [A]",
                     scale=alt.Scale(domain=[_f(i_lo - 0.12 * span * (i_lo < 0)), _f(i_hi + 0.12 * span)], nice=False)),
        tooltip=tips).add_params(zoom)
    styles = _Styles()
    styles.add("volts per cell", BLUE, SOLID, 2.2)
    lim = []
    if run.limit_volts_per_cell is not None and np.isfinite(run.limit_volts_per_cell):
        lab = styles.add(f"highest cell voltage {run.limit_volts_per_cell:.3g} V", BLACK, DASHES["long-short"])
        lim.append({"series": lab, "limit": _f(run.limit_volts_per_cell)})
    # the plan hands over to the finish at the (temperature-corrected) gassing voltage
    gas = getattr(run, "handover_volts_per_cell", None)
    if gas is None:
        gas = getattr(run, "gassing_volts_per_cell", None)
    if gas is not None and np.isfinite(gas):
        lab = styles.add(f"hand-over to the finish (gassing) {gas:.3g} V per cell", VERMILLION, DASHES["short"])
        lim.append({"series": lab, "limit": _f(gas)})
    enc = styles.encodings()
    vrows = [dict(r, series="volts per cell") for r in rows]
    vpc = alt.Chart(sets("volts", vrows)).mark_line().encode(
        x=x, y=alt.Y("volts_per_cell:Q", title="Volts per cell", scale=alt.Scale(zero=False)), tooltip=tips, **enc)
    layers = [vpc]
    if lim:
        layers.append(alt.Chart(sets("limit", lim)).mark_rule().encode(
            y=alt.Y("limit:Q"), tooltip=[alt.Tooltip("series:N", title="limit")], **enc))
    vpc = alt.layer(*layers)
    soc = alt.Chart(data).mark_line(color=GREEN, strokeWidth=2.2).encode(
        x=x, y=alt.Y("state_of_charge_pct:Q", title="State of charge [%]",
                     scale=alt.Scale(domain=[_f(100 * run.start_state_of_charge, 3) if hasattr(run, "start_state_of_charge")
                                             else 0, 100], zero=False)),
        tooltip=tips)
    panels = [panel(cur).properties(height=h), panel(vpc).properties(height=h), panel(soc).properties(height=h)]
    if width is not None:
        panels = [p.properties(width=width) for p in panels]
    title = _title(f"Charge run: {run.duration_h:.4g} h", "current, volts per cell and state of charge")
    return alt.VConcatChart(vconcat=panels, datasets=sets.data, spacing=8, title=title, autosize=FIT_WIDTH,
                            config=CHART_CONFIG,
                            resolve=alt.Resolve(scale=alt.ScaleResolveMap(x="shared", fill="shared")))


#: Charts of an option in page order.
CHART_ORDER = ("occ", "load", "run", "cells")
#: Charts that do not depend on the field setting drawn (the charge run follows the option's own
#: plan, the cells' curves only the chemistry): a page that trims the field need not redraw them.
SETTING_FREE_CHARTS = ("run", "cells")


def option_charts(machine, profile, option, other_taps=(), run=None, width=None, only=None):
    """The charts of one option for its job: ``[(key, title, chart), ...]`` in :data:`CHART_ORDER`.

    ``only``, a collection of keys, builds those charts alone. Altair's check
    of each part as it is made is off here (a fifth of the page's drawing
    time); :func:`chart_spec` checks the whole spec where it is asked to.
    """
    with alt.utils.schemapi.debug_mode(False):
        return _option_charts(machine, profile, option, other_taps, run, width, only)


def _option_charts(machine, profile, option, other_taps, run, width, only):
    want = (lambda k: True) if only is None else (lambda k: k in only)
    temps = _temperatures(profile, machine)
    st = check_setting(machine, option.setting)
    out = []
    if want("occ"):
        out.append(("occ", "Open-circuit characteristic", occ_chart(machine, st, temps, width)))
    if profile.kind == "battery":
        from .jobs import battery as ld
        if want("load"):
            fin = (getattr(option, "extras", None) or {}).get("finish_setting")
            fin = None if fin is None else Setting(**fin)
            out.append(("load", "Against the battery", battery_chart(machine, profile, st, width, option.figures, fin)))
        if run is not None and want("run"):
            plan = (getattr(option, "extras", None) or {}).get("plan")
            out.append(("run", "Charge run", charge_run_chart(run, width, plan if plan else None)))
        if want("cells"):
            b = profile.battery
            family = ld.charging_curves(b.chemistry, b.temperature_c, ocv_range=b.open_circuit_voltage_per_cell_v)
            out.append(("cells", "Charging curves of the cells", charging_curves_chart(family, width)))
    elif profile.kind == "welding":
        if want("load"):
            out.append(("load", "Welding characteristics", welding_chart(machine, profile, option, other_taps, width)))
    elif want("load"):
        out.append(("load", "Load-end voltage", load_end_chart(machine, profile, st, width)))
    return out
