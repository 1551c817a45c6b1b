"""The engine's corners: runaway, unknown figures, folds on a knot, reversed
states, armature reaction at zero field, build-up past the curve, full load.

One regression test (or a few) per defect, each failing on the engine before
its fix. Every expected value is a hand calculation written out in the
docstring from the design note's equations, or a published value named
there.
"""

import math
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from supplycfg.circuit import (Load, Setting, build_circuit, external_characteristic, machine_state,
                               operating_points)
from supplycfg.machine import load_machine, machine_from_dict
from supplycfg.magnetisation import field_after_armature_reaction

PROFILES = Path(__file__).resolve().parent.parent / "profiles"
#: Closed arithmetic (the project's tolerance for it, 0.05 %).
ARITH = 5e-4


def make_machine(machine=None, occ=None, **tables):
    """A machine from TOML-like tables; ``machine`` and ``occ`` update the defaults."""
    m = {"label": "corner check", "poles": 4, "rated_speed_rpm": 1000.0, "rated_voltage_v": 230.0,
         "rated_armature_current_a": 100.0, "armature_resistance_ohm": 0.05,
         "shunt_field_resistance_ohm": 100.0, "shunt_turns_per_pole": 1000.0,
         "rheostat_max_ohm": 200.0}
    m.update(machine or {})
    o = {"speed_rpm": m["rated_speed_rpm"], "field_current_a": [0.0, 0.5, 1.0, 1.5, 2.0],
         "emf_v": [2.0, 100.0, 180.0, 220.0, 240.0], "interpolation": "linear"}
    o.update(occ or {})
    return machine_from_dict({"machine": m, "open_circuit": o, **tables})


def state_at(machine, setting, v, il):
    """The engine's circuit state at a terminal voltage [V] and load current [A]."""
    circ = build_circuit(machine, [setting])
    idx = np.array([0])
    p = dict(circ.take(idx), idx=idx)
    st = machine_state(circ, p, np.array([float(v)]), np.array([float(il)]))
    return {k: float(np.asarray(val)[0]) for k, val in st.items()}


# ---------------------------------------------------------------------------
# armature reaction weakens the field and never reverses it (issue 8, item 5)
# ---------------------------------------------------------------------------

def test_armature_reaction_rule_shrinks_towards_zero():
    """Design note: ``x = x_w - sign(x_w) min(F_ar/Nsh, |x_w|)``. Hand values:
    1.0 A less 0.4 A is 0.6 A; 0.3 A less 0.4 A stops at 0; -1.0 A weakened by
    0.4 A is -0.6 A; no reaction leaves the field as it is; continuous at 0."""
    xw = np.array([1.0, 0.3, -1.0, -0.3, 0.0, 0.7])
    far = np.array([0.4, 0.4, 0.4, 0.4, 0.4, 0.0])
    assert_allclose(field_after_armature_reaction(xw, far), [0.6, 0.0, -0.6, 0.0, 0.0, 0.7], atol=1e-15)
    eps = np.array([-1e-12, 0.0, 1e-12])
    assert np.all(np.abs(field_after_armature_reaction(eps, 1e-3)) == 0.0)


def test_dead_short_of_the_demo_charging_set_reads_the_residual_voltage():
    """Issue 8 item 5 on the demo charging set (shunt, rheostat cut out, rated
    1450 rpm = the curve's speed, windings at 75 degC = reference). On a dead
    short V = 0, so the shunt field carries nothing and armature reaction
    cannot take the net mmf below zero: x = 0 and E = the residual 5.0 V. Hand
    calculation: Ia = (E - Vb) / Ra = (5.0 - 2.0) / 0.22 = 13.636 A (the brush
    drop is full above 1 % of 60 A). The old rule read -0.0x A of net field
    on the mirrored curve and gave about 4.8 A."""
    m = load_machine(PROFILES / "machines" / "charging-set.toml")
    ops = operating_points(m, Setting("shunt", rheostat_ohm=0.0), Load.line(0.0, 0.0))
    pts = [p for p in ops.points if p["load_current_a"] > 0]
    assert len(pts) == 1
    assert_allclose(pts[0]["load_current_a"], 3.0 / 0.22, rtol=1e-9)
    assert_allclose(pts[0]["generated_emf_v"], 5.0, rtol=1e-12)
    ch = external_characteristic(m, Setting("shunt", rheostat_ohm=0.0), 60)
    assert_allclose(ch.short_circuit_current_a, 3.0 / 0.22, rtol=1e-9)


def test_armature_reaction_cannot_reverse_a_weak_separate_field():
    """Theraja Vol II Ex 27.3 (seen): 440 AT per pole at 120 A on 1100 shunt
    turns, i.e. 0.4 A of equivalent field current. With only 0.3 A of separate
    excitation the reaction brings the net field to zero and no further, so
    at 120 A the EMF is the residual 5 V (the old rule read -0.1 A on the
    mirrored curve, 2 x 5 - (5 + 0.1 x 190) = -9 V) and V = 5 - 120 x 0.05 -
    2 = -3 V (hand calculation; 2 V brush drop)."""
    m = make_machine({"shunt_turns_per_pole": 1100.0, "rated_armature_current_a": 120.0,
                      "brush_drop_v": 2.0},
                     {"field_current_a": [0.0, 0.5, 1.0, 1.5, 2.0], "emf_v": [5.0, 100.0, 180.0, 220.0, 240.0]},
                     armature_reaction={"demagnetizing_at_per_pole_at_rated": 440.0})
    pt = operating_points(m, Setting("separate", field_current_a=0.3), Load.constant_current(120.0)).points
    assert len(pt) == 1
    assert_allclose(pt[0]["generated_emf_v"], 5.0, rtol=1e-12)
    assert_allclose(pt[0]["terminal_voltage_v"], 5.0 - 120.0 * 0.05 - 2.0, rtol=1e-9)
    # a field the reaction does not exhaust: 1.5 A less 0.4 A on the linear curve (Theraja 27.3 check)
    st = state_at(m, Setting("separate", field_current_a=1.5), 0.0, 120.0)
    assert_allclose(st["x"], 1.1, rtol=1e-12)


def test_reversed_field_is_weakened_too():
    """Design note: the reaction weakens the field whichever way it points. A
    differential long-shunt state whose series mmf overpowers the shunt field
    (x_w < 0) has its net field brought towards zero, not pushed further
    negative. Hand values: shunt 1.0 A, 80 series turns on 1000 shunt turns
    at Ia = 50 A gives x_w = 1.0 - 4.0 = -3.0 A; 150 AT at 50 A per 1000
    turns is 0.15 A, so x = -2.85 A."""
    m = make_machine({"series_field_resistance_ohm": 0.02, "series_turns_per_pole": 80.0,
                      "rated_armature_current_a": 50.0},
                     armature_reaction={"demagnetizing_at_per_pole_at_rated": 150.0})
    st = state_at(m, Setting("long-shunt-differential", rheostat_ohm=0.0), 100.0, 49.0)
    assert_allclose(st["armature_current_a"], 50.0, rtol=1e-12)
    assert_allclose(st["x"], -2.85, rtol=1e-12)
