"""Chart builders, tested apart from the page through their Vega-Lite specs."""

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from supplycfg import charts
from supplycfg.circuit import Setting, check_setting, external_characteristic
from supplycfg.jobs.welding import conventional_load_voltage
from supplycfg.profile import load_profile
from supplycfg.jobs import battery
from supplycfg.jobs.battery import open_circuit_voltage_per_cell
from supplycfg.machine import load_machine
from supplycfg.magnetisation import OpenCircuitCurve, copper_resistance_factor

DEMO = Path(__file__).resolve().parent.parent / "profiles"


def machine(stem):
    return load_machine(DEMO / "machines" / f"{stem}.toml")


def profile(stem):
    return load_profile(DEMO / "loads" / f"{stem}.toml")


def rows(spec, name):
    return spec["datasets"][name]


def marks(spec):
    return [ly["mark"]["type"] for ly in spec["layer"]]


def series(spec, name, label_start):
    return [r for r in rows(spec, name) if r["series"].startswith(label_start)]


@pytest.fixture(scope="module")
def charging():
    return machine("charging-set"), profile("battery-charging")


def test_occ_chart_layers_and_zoom(charging):
    """The OCC chart has the curve, the measured points, the field lines and the no-load points, with a zoom."""
    m, p = charging
    spec = charts.occ_chart(m, Setting("shunt", rheostat_ohm=30.0), p.temperatures_c).to_dict()
    assert marks(spec) == ["line", "point", "line", "point"]
    zoom = spec["params"][0]
    assert (zoom["name"], zoom["bind"]) == ("zoom", "scales")
    for layer in spec["layer"]:
        assert "tooltip" in layer["encoding"]
    measured = rows(spec, "measured")
    assert_allclose([r["emf_v"] for r in measured], m.occ_emf_v, rtol=1e-4)
    labels = {r["series"] for r in rows(spec, "field_lines")}
    for t in p.temperatures_c:
        assert any(lab.startswith("this setting") and f"{t:g} °C" in lab for lab in labels)
    assert any(lab.startswith("rheostat cut out") for lab in labels)
    assert any(lab.startswith("rheostat all in") for lab in labels)
    assert any(lab.startswith("critical field resistance") for lab in labels)


def test_occ_chart_field_lines_are_the_field_resistance(charging):
    """Each field line has slope R_sh(T) + R_rh, with copper corrected as (234.5 + T)/(234.5 + T_ref).

    Source: IEC 60228 copper temperature coefficient; the field-resistance line
    of the graphical build-up construction (Theraja Vol II ch. 28).
    """
    m, p = charging
    rh = 30.0
    spec = charts.occ_chart(m, Setting("shunt", rheostat_ohm=rh), p.temperatures_c).to_dict()
    for t in p.temperatures_c:
        line = [r for r in series(spec, "field_lines", "this setting") if f"{t:g} °C" in r["series"]]
        end = max(line, key=lambda r: r["field_current_a"])
        r_expect = m.shunt_field_resistance_ohm * float(copper_resistance_factor(t, m.reference_temperature_c)) + rh
        assert_allclose(end["emf_v"] / end["field_current_a"], r_expect, rtol=2e-3)
    crit = series(spec, "field_lines", "critical")
    end = max(crit, key=lambda r: r["field_current_a"])
    chords = np.diff(m.occ_emf_v) / np.diff(m.occ_field_current_a)
    assert_allclose(end["emf_v"] / end["field_current_a"], chords.max(), rtol=2e-3)


def test_occ_chart_no_load_point_is_the_intersection(charging):
    """The built-up no-load point lies on the curve and on its field line (the textbook graphical method)."""
    m, p = charging
    rh = 30.0
    spec = charts.occ_chart(m, Setting("shunt", rheostat_ohm=rh), p.temperatures_c).to_dict()
    occ = OpenCircuitCurve.from_machine(m)
    pts = rows(spec, "no_load")
    assert len(pts) == 2
    for pt in pts:
        # V = E(I_f) - I_f R_a - brush drop, nearly E at no load: within 1.5 %
        assert_allclose(pt["emf_v"], float(occ.emf(pt["field_current_a"])), rtol=1.5e-2)
        t = next(t for t in p.temperatures_c if f"{t:g} °C" in pt["series"])
        r = m.shunt_field_resistance_ohm * float(copper_resistance_factor(t, m.reference_temperature_c)) + rh
        assert_allclose(pt["emf_v"] / pt["field_current_a"], r, rtol=1e-3)


def test_occ_chart_speed_and_extrapolation(charging):
    """At twice the test speed the curve doubles (E proportional to n at constant flux); beyond the last point it is
    a dashed series of its own, in the legend."""
    m, _ = charging
    spec = charts.occ_chart(m, Setting("shunt", speed_rpm=2 * m.occ_speed_rpm)).to_dict()
    measured = rows(spec, "measured")
    assert_allclose([r["emf_v"] for r in measured], 2 * np.asarray(m.occ_emf_v), rtol=1e-4)
    curve = rows(spec, "occ")
    beyond = [r for r in curve if r["field_current_a"] > m.occ_field_current_a[-1] * 1.001]
    assert beyond and all(r["extrapolated"] == "yes" for r in beyond)
    inside = [r for r in curve if r["field_current_a"] < m.occ_field_current_a[-1] * 0.999]
    assert all(r["extrapolated"] == "no" for r in inside)
    assert all(r["series"].endswith("beyond the test points") for r in beyond)
    dash = spec["layer"][0]["encoding"]["strokeDash"]
    assert dash["field"] == "series"
    styles = dict(zip(dash["scale"]["domain"], dash["scale"]["range"]))
    assert styles["open-circuit characteristic"] == charts.SOLID
    assert styles["open-circuit characteristic: beyond the test points"] != charts.SOLID
    # the two parts join at the last measured point
    ext = [r for r in curve if r["series"].endswith("beyond the test points")]
    assert_allclose(min(r["field_current_a"] for r in ext), m.occ_field_current_a[-1], rtol=1e-3)


def test_occ_chart_other_connections():
    """Series and separately excited settings draw without field lines of their own."""
    m = machine("welding-set")
    for st in (Setting("series", series_turns=12), Setting("separate", field_current_a=1.0),
               Setting("separate-differential", rheostat_ohm=10.0, series_turns=5)):
        spec = charts.occ_chart(m, st, (20, 75)).to_dict()
        assert marks(spec)[:2] == ["line", "point"]
    spec = charts.occ_chart(m, Setting("separate", field_current_a=1.0)).to_dict()
    assert [r["field_current_a"] for r in rows(spec, "no_load")] == [1.0]


def test_characteristic_chart_generic():
    """Bands, curves, loads and points each become a layer with its encodings."""
    ch = external_characteristic(machine("charging-set"), Setting("shunt", rheostat_ohm=30.0), 50)
    spec = charts.characteristic_chart(
        [{"label": "machine", "rows": charts.curve_rows("machine", ch)}],
        [{"label": "load", "load_current_a": [0, 50], "terminal_voltage_v": [100, 110]}],
        [{"label": "needed", "i_min": 10, "i_max": 30, "v_min": 100, "v_max": 140}],
        [{"label": "point", "curve": "machine", "load_current_a": 20, "terminal_voltage_v": 170}],
        x_domain=(0, 60), y_domain=(0, 200)).to_dict()
    assert marks(spec) == ["rect", "line", "line", "point"]
    assert spec["layer"][0]["encoding"]["x"]["scale"]["domain"] == [0, 60]
    assert len(rows(spec, "curves")) == 50
    assert rows(spec, "bands")[0]["v_max"] == 140
    assert rows(spec, "points")[0]["series"] == "machine"
    assert spec["layer"][3]["encoding"]["shape"]["field"] == "point"


def test_battery_chart_start_point_on_the_battery_line(charging):
    """The start-of-charge point satisfies V = n E_cell(SOC) + I (R_bank + R_cable) (the battery load line);
    on the charging curve (the cell model) the start and end points lie below it; the hand-over line sits
    at cells x the temperature-corrected hand-over voltage."""
    m, p = charging
    st = check_setting(m, Setting("shunt", rheostat_ohm=70.0))
    spec = charts.battery_chart(m, p, st).to_dict()
    assert marks(spec) == ["rect", "line", "line", "point"]
    b = p.battery
    e0 = b.cells * float(open_circuit_voltage_per_cell(b.chemistry, b.state_of_charge[0],
                                                       b.open_circuit_voltage_per_cell_v))
    r = b.internal_resistance_ohm + b.cable_resistance_ohm
    starts = [pt for pt in rows(spec, "points") if pt["point"] == "start of charge, battery at rest"]
    assert len(starts) == 2
    for pt in starts:
        assert_allclose(pt["terminal_voltage_v"], e0 + r * pt["load_current_a"], rtol=1e-3)
    on_charge = [pt for pt in rows(spec, "points") if pt["point"] == "start of charge, battery on charge"]
    ends = [pt for pt in rows(spec, "points") if pt["point"] == "end of charge"]
    assert len(on_charge) == len(ends) == 2
    assert all(c["load_current_a"] < s["load_current_a"] for c, s in zip(on_charge, starts))
    assert all(e["load_current_a"] < c["load_current_a"] for e, c in zip(ends, on_charge))
    for pt in on_charge:
        want = float(battery.bank_voltage_v(b, b.state_of_charge[0], pt["load_current_a"]))
        assert_allclose(pt["terminal_voltage_v"], want, rtol=2e-3)
    handover = [r for r in rows(spec, "loads") if r["series"].startswith("hand-over")]
    assert_allclose(handover[0]["terminal_voltage_v"], b.cells * battery.handover_volts_per_cell(b), rtol=1e-3)


def test_battery_chart_agrees_with_the_search(charging):
    """The chart's start points on the charging curve are the search's start currents, cold and hot
    (the same setting, the same cell model; the chart reads them off its traced curve: 2 %)."""
    from supplycfg.search import search
    m, p = charging
    opt = search(m, p).options[0]
    pts = rows(charts.battery_chart(m, p, opt.setting).to_dict(), "points")
    f = opt.figures
    cur = [pt["load_current_a"] for pt in pts if pt["point"] == "start of charge, battery on charge"]
    assert_allclose([max(cur), min(cur)], [f["start_charge_current_cold_a"], f["start_charge_current_hot_a"]],
                    rtol=2e-2)


def test_battery_chart_draws_the_finish(charging):
    """With the plan's finish setting the chart draws its characteristic too."""
    m, p = charging
    st = check_setting(m, Setting("long-shunt-differential", series_turns=24, rheostat_ohm=21.0))
    fin = check_setting(m, Setting("long-shunt-differential", series_turns=24, rheostat_ohm=43.0))
    labels = {r["series"] for r in rows(charts.battery_chart(m, p, st, finish_setting=fin).to_dict(), "curves")}
    assert any(lab.startswith("machine, finish") for lab in labels)


def test_charging_curves_chart_draws_the_cores_points():
    """The family of charging curves: one line per rate with the points the core computed, and the
    gassing and highest cell voltages as rules."""
    fam = battery.charging_curves("lead-acid-vented", 25.0)
    spec = charts.charging_curves_chart(fam).to_dict()
    assert marks(spec) == ["line", "rule"]
    data = rows(spec, "curves")
    c10 = [r for r in data if r["series"].startswith("C/10")]
    assert_allclose([r["volts_per_cell"] for r in c10], fam["curves"][1]["volts_per_cell"], rtol=1e-3)
    levels = rows(spec, "levels")
    assert_allclose([r["v"] for r in levels], [2.38, 2.7], rtol=1e-4)


def test_welding_chart_points_on_the_conventional_load_line():
    """Arc points lie on U = 20 V + 0.04 V/A x I (+ leads) for manual metal arc.

    Source: IEC 60974-1 conventional load voltage.
    """
    from supplycfg.search import search
    m, p = machine("welding-set"), profile("welding")
    res = search(m, p)
    opt = res.options[0]
    spec = charts.welding_chart(m, p, opt).to_dict()
    pts = rows(spec, "points")
    assert len(pts) == 2
    for pt in pts:
        u = float(conventional_load_voltage("manual-metal-arc", pt["load_current_a"])) \
            + pt["load_current_a"] * p.welding.cable_resistance_ohm
        assert_allclose(pt["terminal_voltage_v"], u, rtol=1e-3)
        assert_allclose(u, 20.0 + (0.04 + p.welding.cable_resistance_ohm) * pt["load_current_a"], rtol=1e-9)
    band = rows(spec, "bands")[0]
    assert (band["i_min"], band["i_max"]) == tuple(p.welding.current_range_a)
    assert len({r["series"] for r in rows(spec, "curves")}) == 2


@pytest.mark.parametrize("stems", [("lighting-set", "lighting"), ("feeder-booster", "booster")])
def test_load_end_chart_band(stems):
    """The band is nominal +- tolerance over the current range; one curve per speed and temperature."""
    m, p = machine(stems[0]), profile(stems[1])
    st = Setting("series", series_turns=10) if p.kind == "booster" else Setting("shunt", rheostat_ohm=20.0)
    spec = charts.load_end_chart(m, p, st).to_dict()
    job = p.job
    nominal = job.nominal_voltage_v if p.kind == "lighting" else job.bus_voltage_v
    band = rows(spec, "bands")[0]
    assert_allclose([band["v_min"], band["v_max"]],
                    [nominal * (1 - job.tolerance_percent / 100), nominal * (1 + job.tolerance_percent / 100)],
                    rtol=1e-3)
    n_curves = len(p.speeds_rpm) * len(p.temperatures_c)
    assert len({r["series"] for r in rows(spec, "curves")}) == n_curves


def test_load_end_chart_is_terminal_voltage_less_feeder_drop():
    """Lighting: load-end voltage = terminal voltage - I x R_feeder at each curve point."""
    m, p = machine("lighting-set"), profile("lighting")
    st = check_setting(m, Setting("shunt", rheostat_ohm=20.0, winding_temperature_c=40.0))
    ch = charts.setting_curves(m, [st])[0]
    spec = charts.load_end_chart(m, p, st).to_dict()
    cold = [r for r in rows(spec, "curves") if "40 °C" in r["series"]]
    il = np.asarray(ch.points["load_current_a"])
    v = np.asarray(ch.points["terminal_voltage_v"])
    for r in cold[1:20]:
        j = int(np.argmin(np.abs(il - r["load_current_a"])))
        assert_allclose(r["terminal_voltage_v"], v[j] - il[j] * p.lighting.feeder_resistance_ohm, rtol=1e-3)


def test_charge_run_chart_panels():
    """Three panels against time; the volts-per-cell panel carries the highest cell voltage and the hand-over."""
    class Run:
        time_h = np.linspace(0, 10, 50)
        current_a = np.linspace(30, 5, 50)
        bank_voltage_v = np.linspace(125, 140, 50)
        volts_per_cell = bank_voltage_v / 60
        state_of_charge = np.linspace(0.2, 1.0, 50)
        ah = np.cumsum(current_a) * 0.2
        kwh = ah * 0.13
        stop_reason = "the end state of charge was reached"
        duration_h = 10.0
        limit_volts_per_cell = 2.7
        handover_volts_per_cell = 2.38
        gassing_volts_per_cell = 2.37
        start_state_of_charge = 0.2

    spec = charts.charge_run_chart(Run()).to_dict()
    assert len(spec["vconcat"]) == 3
    params = spec.get("params") or spec["vconcat"][0]["params"]
    assert params[0]["name"] == "zoom"
    limit = rows(spec, "limit")
    assert_allclose([r["limit"] for r in limit], [2.7, 2.38])
    assert len(rows(spec, "run")) == 50
    assert "10 h" in spec["title"]["text"]
    # both limits labelled in the legend, each with its own dash pattern
    labels = {r["series"] for r in rows(spec, "limit")}
    assert labels == {"highest cell voltage 2.7 V", "hand-over to the finish (gassing) 2.38 V per cell"}
    enc = spec["vconcat"][1]["layer"][1]["encoding"]
    dashes = dict(zip(enc["strokeDash"]["scale"]["domain"], enc["strokeDash"]["scale"]["range"]))
    assert len({tuple(dashes[lab]) for lab in labels}) == 2 and all(dashes[lab] != charts.SOLID for lab in labels)
    assert enc["strokeDash"].get("legend", {}) is not None
    # regression: the current axis ended at the largest current (a main charge held at 19.9 A ran along the top
    # edge of a 0-20 A axis); it now leaves headroom above it
    cur = spec["vconcat"][0]
    y = (cur.get("encoding") or next(lay for lay in cur["layer"] if "current_a" in str(lay["encoding"]["y"]))["encoding"])["y"]
    lo, hi = y["scale"]["domain"]
    assert lo == 0 and hi >= 1.1 * Run.current_a.max()


def test_charge_run_chart_draws_the_plan_stages():
    """Where the core gives the charge plan's stages, each is a shaded, labelled span on every panel."""
    class Run:
        time_h = np.linspace(0, 10, 50)
        current_a = np.linspace(30, 5, 50)
        bank_voltage_v = np.linspace(125, 140, 50)
        volts_per_cell = bank_voltage_v / 60
        state_of_charge = np.linspace(0.2, 1.0, 50)
        ah = np.cumsum(current_a) * 0.2
        duration_h = 10.0
        limit_volts_per_cell = 2.4
        stages = [{"from_h": 0.0, "to_h": 7.5, "ends_because": "gassing voltage reached"},
                  {"from_h": 7.5, "to_h": 10.0, "ends_because": "end state of charge reached"}]

    spec = charts.charge_run_chart(Run()).to_dict()
    st = rows(spec, "stages")
    assert [r["band"] for r in st] == ["stage 1: 0 to 7.5 h", "stage 2: 7.5 to 10 h"]
    assert all(panel["layer"][0]["mark"]["type"] == "rect" for panel in spec["vconcat"])


def test_charts_export_to_svg(charging):
    """Every chart of an option exports to SVG with vl-convert (no network)."""
    import vl_convert as vlc
    m, p = charging
    from supplycfg.search import search
    res = search(m, p)
    out = charts.option_charts(m, p, res.options[0])
    assert [k for k, _, _ in out] == ["occ", "load", "cells"]
    for _, _, ch in out:
        svg = vlc.vegalite_to_svg(ch.to_dict())
        assert svg.lstrip().startswith("<svg") or "<svg" in svg[:200]


def test_chart_specs_are_deterministic(charging):
    """The same inputs give the same spec (named parameters, rounded data)."""
    m, p = charging
    st = Setting("shunt", rheostat_ohm=40.0)
    assert charts.occ_chart(m, st, p.temperatures_c).to_dict() == charts.occ_chart(m, st, p.temperatures_c).to_dict()
    fam = battery.charging_curves("nickel-cadmium-vented", 30.0)
    assert charts.charging_curves_chart(fam).to_dict() == charts.charging_curves_chart(fam).to_dict()
    a = charts.battery_chart(m, p, replace(st)).to_dict()
    b = charts.battery_chart(m, p, replace(st)).to_dict()
    assert a == b


@pytest.mark.parametrize("stems", [("charging-set", "battery-charging"), ("welding-set", "welding"),
                                   ("lighting-set", "lighting"), ("feeder-booster", "booster")])
def test_every_connection_the_search_offers_draws(stems):
    """One option of each connection found for each demo job draws all its charts (feasible or not)."""
    from supplycfg.report import other_tap_options
    from supplycfg.search import search
    m, p = machine(stems[0]), profile(stems[1])
    res = search(m, p)
    seen = {}
    for o in res.options:
        seen.setdefault((o.setting.connection, o.feasible), o)
    for o in seen.values():
        out = charts.option_charts(m, p, o, other_tap_options(res, o))
        for _, _, ch in out:
            spec = ch.to_dict(validate=False)
            assert spec["datasets"]


def _legend_styles(layer):
    enc = layer["encoding"]
    dom = enc["strokeDash"]["scale"]["domain"]
    return {k: (c, d, w) for k, c, d, w in zip(dom, enc["color"]["scale"]["range"], enc["strokeDash"]["scale"]["range"],
                                                 enc["strokeWidth"]["scale"]["range"])}


def _job_specs(stems):
    from supplycfg.report import other_tap_options
    from supplycfg.search import search
    m, p = machine(stems[0]), profile(stems[1])
    res = search(m, p)
    o = res.options[0]
    return m, p, o, {k: charts.chart_spec(ch) for k, _, ch in charts.option_charts(m, p, o, other_tap_options(res, o))}


@pytest.mark.parametrize("stems", [("charging-set", "battery-charging"), ("welding-set", "welding"),
                                   ("lighting-set", "lighting"), ("feeder-booster", "booster")])
def test_every_limit_is_a_labelled_line_with_a_dash(stems):
    """Each load and limit line is in the legend with a dash pattern of its own; each band has a legend entry;
    colours come from the colour-blind-safe palette (or grey); the chosen option is drawn bolder than others."""
    m, p, o, specs = _job_specs(stems)
    spec = specs["load"]
    line_layers = [ly for ly in spec["layer"] if ly["mark"]["type"] == "line"]
    styles = _legend_styles(line_layers[0])
    palette = set(charts.SERIES_COLOURS) | {charts.GREY}
    assert all(c in palette for c, _, _ in styles.values())
    assert all(ly["encoding"]["strokeDash"].get("legend", {}) is not None for ly in line_layers)
    for r in rows(spec, "loads") if "loads" in spec["datasets"] else []:
        colour, dash, _ = styles[r["series"]]
        assert dash != charts.SOLID, r["series"]
    dashes = [tuple(styles[s][1]) for s in {r["series"] for r in rows(spec, "loads")}] if "loads" in spec["datasets"] else []
    assert len(dashes) == len(set(dashes)), "two limit lines share a dash pattern"
    bands = rows(spec, "bands")
    rect = next(ly for ly in spec["layer"] if ly["mark"]["type"] == "rect")
    assert rect["encoding"]["fill"]["legend"] is not None
    assert {b["band"] for b in bands} == set(rect["encoding"]["fill"]["scale"]["domain"])
    chosen = [w for lab, (_, _, w) in styles.items() if not lab.startswith("other tap")]
    others = [w for lab, (_, _, w) in styles.items() if lab.startswith("other tap")]
    assert all(w < max(chosen) for w in others)


def test_welding_chart_draws_the_no_load_limits():
    """The no-load limits the search checks (IEC 60974-1 113 V peak; the job's site limit) are labelled lines."""
    m, p, o, specs = _job_specs(("welding-set", "welding"))
    lines = {r["series"]: r["terminal_voltage_v"] for r in rows(specs["load"], "loads")}
    peak = o.margins["no_load_peak_voltage"]["limit"]
    assert any(lab.startswith("no-load limit") and v == pytest.approx(peak) for lab, v in lines.items())
    if "no_load_mean_voltage" in o.margins:
        site = o.margins["no_load_mean_voltage"]["limit"]
        assert any(lab.startswith("site no-load limit") and v == pytest.approx(site) for lab, v in lines.items())
    top = specs["load"]["layer"][0]["encoding"]["y"]["scale"]["domain"][1]
    assert top > peak, "the limit must be inside the view"


def test_welding_strike_minimum_drawn_at_the_limit():
    """The strike minimum the core states (the margin's limit: 50 V for manual metal arc, common practice, the
    profile's ``min_no_load_voltage_v``) is its own labelled line. Regression: the line was drawn and labelled at
    the option's own lowest no-load voltage (the figure ``min_no_load_voltage_v``, 51.56 V on the demo)."""
    from supplycfg.search import search
    m, p = machine("welding-set"), profile("welding")
    o = search(m, p).options[0]
    assert o.figures["min_no_load_voltage_v"] != 50.0
    spec = charts.welding_chart(m, p, o).to_dict()
    strike = [r for r in rows(spec, "loads") if r["series"].startswith("strike minimum")]
    assert strike and strike[0]["series"].startswith("strike minimum 50 V")
    assert_allclose([r["terminal_voltage_v"] for r in strike], 50.0, rtol=0, atol=1e-12)
    # without the margin the line still comes from the profile's strike minimum
    o2 = replace(o, margins={k: v for k, v in o.margins.items() if k != "no_load_strike_voltage"},
                 figures={k: v for k, v in o.figures.items() if k != "no_load_strike_min_v"})
    spec = charts.welding_chart(m, p, o2).to_dict()
    assert any(r["series"].startswith("strike minimum 50 V") for r in rows(spec, "loads"))


def test_battery_chart_axis_fits_the_battery_and_draws_gassing(charging):
    """The voltage axis starts near the battery's voltages (not at 0) and the gassing line is drawn."""
    from supplycfg.search import search
    m, p = charging
    o = search(m, p).options[0]
    spec = charts.battery_chart(m, p, o.setting, figures=o.figures).to_dict()
    lo, hi = spec["layer"][0]["encoding"]["y"]["scale"]["domain"]
    rest = min(r["terminal_voltage_v"] for r in rows(spec, "loads") if r["series"].startswith("battery at rest"))
    assert 0.8 * rest < lo < rest
    gas = [r for r in rows(spec, "loads") if r["series"].startswith("gassing voltage")]
    assert_allclose(gas[0]["terminal_voltage_v"], o.figures["gassing_volts_per_cell"] * p.battery.cells, rtol=1e-3)
    assert hi > gas[0]["terminal_voltage_v"]


def _luminance(hex_colour):
    rgb = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def contrast(a, b):
    """WCAG 2.1 contrast ratio of two colours (source: WCAG 2.1, 'contrast ratio' definition)."""
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_chart_text_contrast_at_least_4_5():
    """Axis, legend and title text reach WCAG 2.1 AA contrast (4.5:1) on the chart's white background."""
    assert_allclose(contrast("#767676", "#ffffff"), 4.54, atol=0.01)  # WCAG's own borderline grey
    _, _, _, specs = _job_specs(("charging-set", "battery-charging"))
    for spec in specs.values():
        cfg = spec["config"]
        bg = cfg["background"]
        for colour in (cfg["axis"]["labelColor"], cfg["axis"]["titleColor"], cfg["legend"]["labelColor"],
                       cfg["title"]["color"], cfg["title"]["subtitleColor"]):
            assert contrast(colour, bg) >= 4.5
        assert cfg["legend"]["labelLimit"] == 0 and cfg["title"]["limit"] == 0  # nothing cut short


def _distance_to_polyline(px, py, xs, ys):
    """Shortest distance of a point to a polyline (closed form of the point-segment distance)."""
    best = np.inf
    for (ax, ay, bx, by) in zip(xs[:-1], ys[:-1], xs[1:], ys[1:]):
        dx, dy = bx - ax, by - ay
        t = 0.0 if dx == dy == 0 else min(1.0, max(0.0, ((px - ax) * dx + (py - ay) * dy) / (dx * dx + dy * dy)))
        best = min(best, float(np.hypot(px - ax - t * dx, py - ay - t * dy)))
    return best


def test_polyline_keep_drops_straight_runs_and_stays_within_the_tolerance():
    """Points on a straight line go (only the ends stay); on a curve every left-out point lies within the
    tolerance of the kept polyline (Douglas & Peucker 1973, the distance checked in closed form)."""
    x = np.linspace(0.0, 1.0, 50)
    assert charts.polyline_keep(x, 2 * x + 1, 1e-9).tolist() == [0, 49]
    y = 1 - np.exp(-4 * x)
    keep = charts.polyline_keep(x, y, 1e-3)
    assert keep[0] == 0 and keep[-1] == 49 and 3 < len(keep) < 50
    for i in range(50):
        assert _distance_to_polyline(x[i], y[i], x[keep], y[keep]) <= 1e-3 + 1e-12
    # a curve that turns back keeps its turn
    t = np.linspace(0, np.pi, 40)
    keep = charts.polyline_keep(np.sin(t), np.cos(t), 1e-3)
    assert 20 in keep or 19 in keep


def test_thinned_page_charts_keep_the_core_points_and_every_legend(charging):
    """Thinning leaves out rows only: every row kept is the core's own, the ends of each line stay, points and
    limit lines are untouched, and the legends are the same."""
    from supplycfg.search import search
    m, p = charging
    o = search(m, p).options[0]
    for _, _, ch in charts.option_charts(m, p, o):
        full, thin = charts.chart_spec(ch), charts.chart_spec(ch, thin=True)
        assert {k: v for k, v in full.items() if k != "datasets"} == {k: v for k, v in thin.items() if k != "datasets"}
        for name, rows_full in full["datasets"].items():
            rows_thin = thin["datasets"][name]
            assert all(r in rows_full for r in rows_thin)
            assert {r.get("series") for r in rows_thin} == {r.get("series") for r in rows_full}
            if name in ("measured", "no_load", "points", "bands", "levels", "limit", "stages"):
                assert rows_thin == rows_full
        assert sum(map(len, thin["datasets"].values())) < sum(map(len, full["datasets"].values()))
    spec = charts.chart_spec(charts.occ_chart(m, o.setting), thin=True)
    xs = [r["field_current_a"] for r in spec["datasets"]["occ"]]
    assert xs[0] == 0.0


def test_chart_spec_writes_the_rows_as_altair_would():
    """The rows go round Altair's walk (page speed): the spec must not change by it.

    Reference: Altair's own ``to_dict`` of the same chart with its rows in it.
    """
    import altair as alt
    rows_ = [{"x": np.float64(1.5), "y": np.int64(2), "series": "a"}, {"x": 2.0, "y": float("nan"), "series": "a"}]
    ch = alt.LayerChart(layer=[alt.Chart(alt.NamedData(name="d")).mark_line().encode(x="x:Q", y="y:Q")],
                        datasets={"d": rows_})
    want = ch.to_dict(validate=False)
    got = charts.chart_spec(ch, validate=False)
    assert got["datasets"]["d"][0] == {"x": 1.5, "y": 2, "series": "a"}
    assert type(got["datasets"]["d"][0]["x"]) is float and type(got["datasets"]["d"][0]["y"]) is int
    assert np.isnan(got["datasets"]["d"][1]["y"])
    got.pop("config"), want.pop("config", None)
    assert got.keys() == want.keys() and got["layer"] == want["layer"]
    assert ch["datasets"] is not alt.Undefined  # the chart keeps its rows


def test_setting_curves_in_one_solve_equal_one_by_one(charging):
    """A chart's corners solved together (page speed) give the curves solved one by one (same engine)."""
    m, p = charging
    base = Setting(connection="shunt", rheostat_ohm=30.0, speed_rpm=1450.0)
    wanted = [replace(base, winding_temperature_c=t) for t in (20.0, 75.0)] + [replace(base, rheostat_ohm=45.0)]
    together = charts.setting_curves(m, wanted, drive=p.drive)
    for s, ch in zip(wanted, together):
        alone = external_characteristic(m, check_setting(m, s), charts.CURVE_POINTS, p.drive)
        v1 = np.asarray(ch.points["terminal_voltage_v"], float)
        v2 = np.asarray(alone.points["terminal_voltage_v"], float)
        assert_allclose(v1, v2, rtol=1e-9, atol=1e-9)


def test_layered_chart_spec_is_altairs_own(charging):
    """A layered chart's spec, built without Altair's layer chart (page speed), is the one Altair's
    ``LayerChart`` writes for the same layers with the zoom on the first, the view's name aside.

    Reference: Altair's own ``to_dict``.
    """
    import json
    import re
    import altair as alt
    m, p = charging
    st = Setting("shunt", rheostat_ohm=30.0)
    for ch in (charts.occ_chart(m, st, p.temperatures_c), charts.battery_chart(m, p, st)):
        assert isinstance(ch, charts.LayeredChart)
        layers = [ch.layers[0].add_params(alt.selection_interval(bind="scales", name="zoom"))] + ch.layers[1:]
        want = alt.LayerChart(layer=layers, datasets=ch.datasets, **ch.top).to_dict()
        got = ch.to_dict()
        norm = lambda spec: re.sub(r'"view_[0-9a-f]+_0"', f'"{charts.ZOOM_VIEW}"', json.dumps(spec, sort_keys=True))
        assert norm(got) == norm(want)


def test_layered_chart_spec_is_checked_against_the_schema(charging):
    """``to_dict(validate=True)`` refuses a spec that Vega-Lite's schema does not allow (as Altair's would)."""
    m, p = charging
    ch = charts.occ_chart(m, Setting("shunt", rheostat_ohm=30.0))
    ch.top["height"] = "tall"
    with pytest.raises(Exception, match="height|tall"):
        ch.to_dict(validate=True)
    ch.to_dict(validate=False)  # the page's path does not check


def test_other_taps_on_the_welding_chart_are_other_taps():
    """Regression: the welding demo's chart drew "other tap: 3 turns, rheostat 10.3 Ω, for 180 A", the chosen
    option's own tap and curve, from an option that starts on 8 turns and changes to 3 along its dial. Each
    other-tap curve is drawn at a tap the chosen option uses at neither end, and no tap twice."""
    from supplycfg.report import high_end_tap, other_tap_options
    from supplycfg.search import search
    res = search(machine("welding-set"), profile("welding"))
    o = res.options[0]
    own = {cs["series_turns"] for cs in o.current_settings} | {o.setting.series_turns}
    taps = [high_end_tap(x) for x in other_tap_options(res, o)]
    assert taps and not own & set(taps) and len(taps) == len(set(taps))
    assert any(high_end_tap(x) != x.setting.series_turns for x in res.options), "the demo has a dial that changes tap"


@pytest.mark.parametrize("stems", [("charging-set", "battery-charging"), ("welding-set", "welding"),
                                   ("lighting-set", "lighting"), ("feeder-booster", "booster")])
def test_no_two_lines_of_a_chart_look_alike(stems):
    """Regression: the battery chart drew the plan's finish curve and the battery at rest both green with the same
    long dashes (issue 13: lines told apart by dash pattern as well as colour). Within each chart of the demo's
    best option, no two legend entries share both colour and dash."""
    *_, specs = _job_specs(stems)
    for name, spec in specs.items():
        seen = {}
        layers = spec.get("layer") or [lay for part in spec.get("vconcat", []) for lay in part.get("layer", [])]
        for layer in layers:
            if "strokeDash" not in layer.get("encoding", {}):
                continue
            enc = layer["encoding"]
            for label, colour, dash in zip(enc["strokeDash"]["scale"]["domain"], enc["color"]["scale"]["range"],
                                           enc["strokeDash"]["scale"]["range"]):
                seen.setdefault((colour, tuple(dash)), set()).add(label)
        alike = {k: v for k, v in seen.items() if len(v) > 1}
        assert not alike, (name, alike)


@pytest.mark.parametrize("setting, subtitle", [
    (Setting("shunt", rheostat_ohm=30.0), "with the field-circuit lines"),
    (Setting("separate", field_current_a=1.0), "with the no-load points"),
    (Setting("series", series_turns=24), None),
])
def test_occ_chart_subtitle_says_what_is_drawn(charging, setting, subtitle):
    """Regression: the series booster's chart promised "the field-circuit lines" it has none of (no shunt
    field); a separately excited set shows its no-load points instead."""
    m, p = charging
    spec = charts.occ_chart(m, setting, p.temperatures_c).to_dict()
    sub = spec["title"]["subtitle"]
    sub = " ".join(sub) if isinstance(sub, list) else sub
    if subtitle is None:
        assert "with the" not in sub
    else:
        assert sub.startswith(subtitle)
    assert ("field-circuit lines" in sub) == bool(spec["datasets"].get("field_lines"))


def test_occ_chart_names_a_stalled_no_load_point(charging):
    """Twin of the buildup regression: with the rheostat all in (field circuit past critical, Theraja Vol II
    ch. 28) the point the chart marks is the one near the residual, and it is not called built up."""
    m, p = charging
    spec = charts.occ_chart(m, Setting("shunt", rheostat_ohm=m.rheostat_max_ohm), p.temperatures_c).to_dict()
    names = {pt["point"] for pt in rows(spec, "no_load")}
    assert names == {"no-load point held by the residual (no build-up)"}
    spec = charts.occ_chart(m, Setting("shunt", rheostat_ohm=30.0), p.temperatures_c).to_dict()
    assert {pt["point"] for pt in rows(spec, "no_load")} == {"built-up no-load point"}


def test_charge_run_chart_gives_the_hours_as_the_card_does():
    """Regression: the chart's title and stage bands read "14.5 h" and "6.43 to 14.5 h" beside a card and
    a table giving 14.55 h: the same four significant figures everywhere."""
    try:
        from .builders import demo
    except ImportError:
        from builders import demo
    from supplycfg.simulation import charge_run_for_option
    m, p, res = demo("battery")
    run = charge_run_for_option(m, p, res.options[0])
    spec = charts.charge_run_chart(run, 500, res.options[0].extras["plan"]).to_dict()
    text = json.dumps(spec)
    assert f"Charge run: {run.duration_h:.4g} h" in text and f"{run.duration_h:.4g} h" == "14.55 h"
