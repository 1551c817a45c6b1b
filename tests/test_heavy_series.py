"""A series winding of as many turns as the shunt winding, or more (issue 8 item 12).

The engine refused a short-shunt setting whose series turns were not fewer
than the shunt turns. Nothing physical forbids such a machine: the rule came
from the way the solver wrote the short-shunt circuit, ``N(x) = L(Ia)`` divided
by ``1 - c`` (``c`` the series turns over the shunt turns), which is zero for
equal turns. The circuit is now written multiplied by ``1 - c`` instead, so
the limit is gone. Checks: the characteristic's points lie on the engine's
load-line solutions (a separate formulation that never divides by ``1 - c``),
its no-load point is the plain shunt machine's (no current in a short shunt's
series winding at no load), and ngspice, an independent circuit solver,
solves the same circuit to the same points.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from supplycfg import cli
from supplycfg.circuit import Load, Setting, external_characteristic, operating_points
from supplycfg.machine import machine_from_dict
from supplycfg.search import search
from supplycfg.profile import profile_from_dict

try:
    from . import spice
except ImportError:
    import spice

# Invented small test set: 100 shunt turns per pole and a series winding of
# 150 turns tapped at 50 (c = 0.5), 100 (c = 1) and 150 (c = 1.5).
MACHINE = {
    "machine": {"label": "small set with a heavy series winding", "poles": 2, "rated_speed_rpm": 1500,
                "rated_voltage_v": 100, "rated_armature_current_a": 1.0, "armature_resistance_ohm": 5.0,
                "shunt_field_resistance_ohm": 120, "shunt_turns_per_pole": 100,
                "series_field_resistance_ohm": 2.0, "series_turns_per_pole": 150,
                "series_taps": [0, 50, 100, 150], "rheostat_max_ohm": 200},
    "open_circuit": {"speed_rpm": 1500, "field_current_a": [0.0, 0.2, 0.4, 0.6, 0.8, 1.0, 1.4, 2.0, 3.0],
                     "emf_v": [4.0, 40.0, 75.0, 100.0, 115.0, 124.0, 134.0, 142.0, 148.0],
                     "interpolation": "linear"},
}
SETTINGS = [Setting(conn, rheostat_ohm=20.0, series_turns=t)
            for conn in ("short-shunt-cumulative", "short-shunt-differential") for t in (100.0, 150.0)]


@pytest.fixture(scope="module")
def machine():
    return machine_from_dict(MACHINE, "heavy.toml")


def test_file_with_series_turns_not_fewer_than_shunt_turns_is_accepted(machine, tmp_path, capsys):
    """The machine file loads and every short-shunt tap is a valid setting on the command line."""
    from supplycfg.files import dumps_toml
    path = tmp_path / "heavy.toml"
    path.write_text(dumps_toml(MACHINE), encoding="utf-8")
    for conn in ("short-shunt-cumulative", "short-shunt-differential"):
        assert cli.main(["curve", str(path), "--connection", conn, "--series-turns", "100", "--rheostat-ohm", "20", "--points", "5"]) == 0
    out, err = capsys.readouterr()
    assert err == "" and "series_turns" not in out


@pytest.mark.parametrize("setting", SETTINGS, ids=lambda s: f"{s.connection}-{s.series_turns:g}")
def test_characteristic_lies_on_load_line_solutions(machine, setting):
    """Each characteristic point is an operating point of the load-line solver at its load current
    (a formulation that never divides by 1 - c), within 1e-6 V; the curve starts at the
    shunt machine's no-load point."""
    c = external_characteristic(machine, setting, 40)
    assert c.converged and len(c.point_list()) == 40
    shunt = external_characteristic(machine, Setting("shunt", rheostat_ohm=20.0), 10)
    assert_allclose(c.no_load_voltage_v, shunt.no_load_voltage_v, rtol=1e-9)
    for p in c.point_list()[::4]:
        ops = operating_points(machine, setting, Load.constant_current(p["load_current_a"]))
        assert min(abs(q["terminal_voltage_v"] - p["terminal_voltage_v"]) for q in ops.points) < 1e-6


def test_search_offers_heavy_series_taps_without_an_error(machine):
    """The search walks every tap of every connection; no setting is refused on the way."""
    profile = profile_from_dict({"load": {"kind": "lighting", "label": "test bench lamps"},
                                 "drive": {"speed_rpm": 1500},
                                 "lighting": {"nominal_voltage_v": 110.0, "load_current_a": [0.1, 0.8]}}, "bench.toml")
    res = search(machine, profile)
    tried = {(o.setting.connection, o.setting.series_turns) for o in res.options}
    # options with identical figures are merged; the others they stand for count as tried
    tried |= {(o.setting.connection, s["series_turns"]) for o in res.options for s in o.same_as}
    assert ("short-shunt-cumulative", 150.0) in tried and ("short-shunt-differential", 100.0) in tried


@pytest.mark.skipif(spice.NGSPICE is None, reason="ngspice is not installed (Debian package 'ngspice')")
@pytest.mark.parametrize("setting", SETTINGS, ids=lambda s: f"{s.connection}-{s.series_turns:g}")
def test_characteristic_matches_ngspice(machine, setting, tmp_path):
    """Source: ngspice 39 batch solve of the equivalent circuit (``tests/spice.py``), an
    independent general-purpose circuit solver; the load conductance is swept from a
    little beyond the heaviest point down through each point's ``IL / V`` with the
    field flashed first (from a much heavier load the strongest cumulative winding
    drives ngspice's start past its step control). Within 0.2 %, as the other
    ngspice checks."""
    curve = external_characteristic(machine, setting, 60).points
    v, il = curve["terminal_voltage_v"], curve["load_current_a"]
    keep = np.flatnonzero((v > 1.0) & (il > 0))[::6]
    assert keep.size >= 5
    g = il[keep] / v[keep]
    path = tuple(np.unique(np.concatenate([np.geomspace(1.2 * g.max(), g.min(), 40), g]))[::-1])
    res = spice.solve(machine, setting, spice.LoadSweep("conductance", path, flash_a=5.0), tmp_path, "heavy")
    rows = np.array([int(np.argmin(np.abs(res["load_value"] - gi))) for gi in g])
    for k in ("terminal_voltage_v", "load_current_a", "armature_current_a", "shunt_field_current_a",
              "series_field_current_a", "generated_emf_v"):
        assert_allclose(curve[k][keep], res[k][rows], rtol=2e-3, atol=1e-6, err_msg=k)
