"""Candidates alike in every row parameter are solved once (``normal_points(..., alike=True)``):
the same numbers, bit for bit, as solving every row, with and without a drive (two routes to one answer)."""

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_array_equal

from supplycfg import circuit
from supplycfg.bench import grid_settings
from supplycfg.machine import load_machine
from supplycfg.profile import load_profile

PROFILES = Path(__file__).resolve().parents[1] / "profiles"


@pytest.mark.parametrize("name, job", [("welding-set", "welding"), ("charging-set", "battery-charging"),
                                       ("lighting-set", "lighting")])
@pytest.mark.parametrize("coupled", [False, True])
def test_alike_rows_solved_once_give_the_same_points(name, job, coupled):
    m = load_machine(PROFILES / "machines" / f"{name}.toml")
    drive = load_profile(PROFILES / "loads" / f"{job}.toml").drive if coupled else None
    settings = grid_settings(m, rheostats=4)
    # every setting three times, shuffled: most rows have twins
    order = np.random.default_rng(7).permutation(np.repeat(np.arange(len(settings)), 3))
    circ = circuit.build_circuit(m, [settings[i] for i in order], drive)
    first, inverse = circuit.identical_rows(circ)
    assert first.size < circ.n
    line = dict(v_of=lambda t: 20.0 + 0.04 * t)
    for kw in (line, dict(il_of=lambda t: np.zeros_like(t))):
        lo, hi = np.zeros(circ.n), np.full(circ.n, circ.imax if "v_of" in kw else 2.0 * m.rated_voltage_v)
        once = circuit.normal_points(circ, lo, hi, alike=True, **kw)
        every = circuit.normal_points(circ, lo, hi, **kw)
        assert set(once) == set(every)
        for k in every:
            assert_array_equal(once[k], every[k], err_msg=k)


def test_identical_rows_tell_signed_zeros_and_ranges_apart():
    """Rows equal in value but not in bits (0.0 and -0.0) stay apart, and an extra column splits rows too."""
    m = load_machine(PROFILES / "machines" / "charging-set.toml")
    s = grid_settings(m, rheostats=2)[0]
    circ = circuit.build_circuit(m, [s] * 4)
    circ.x0[:] = [0.0, -0.0, 0.0, 0.0]
    first, inverse = circuit.identical_rows(circ, np.array([1.0, 1.0, 1.0, 2.0]))
    assert inverse[0] == inverse[2]
    assert len({inverse[0], inverse[1], inverse[3]}) == 3
    assert_array_equal(first[inverse][[0, 2]], [0, 0])


@pytest.mark.parametrize("name, job", [("welding-set", "welding"), ("charging-set", "battery-charging"),
                                       ("lighting-set", "lighting")])
@pytest.mark.parametrize("coupled", [False, True])
@pytest.mark.parametrize("share", [0.05, 0.3, 0.7, 1.0])
def test_scan_from_the_top_gives_the_same_points(name, job, coupled, share):
    """``top_share`` scans the grid's top first and the rest only where no stable point lies there:
    the same points bit for bit as the whole scan, for points high and low in the range, rows with none,
    and rows whose range is doubled (a no-load search whose machine is still above the load at its top)."""
    m = load_machine(PROFILES / "machines" / f"{name}.toml")
    drive = load_profile(PROFILES / "loads" / f"{job}.toml").drive if coupled else None
    settings = grid_settings(m, rheostats=6)
    circ = circuit.build_circuit(m, settings, drive)
    # a rising line whose offset differs by row (the callable reads the rows it is given)
    offset = np.linspace(0.0, 1.6, circ.n) * m.rated_voltage_v
    line = dict(v_of=lambda t, rows=None: (offset if rows is None else offset[rows])[:, None] + 0.04 * t)
    tops = {"v_of": np.full(circ.n, circ.imax),
            # a range too short for some rows: they are doubled, some still above it at the end
            "il_of": np.linspace(0.02, 2.0, circ.n) * m.rated_voltage_v}
    seen = {"found": False, "none": False, "beyond": False}
    for kw in (line, dict(il_of=circuit.zero_load_current)):
        hi = tops[next(iter(kw))]
        lo = np.zeros(circ.n)
        whole = circuit.normal_points(circ, lo, hi, **kw)
        top = circuit.normal_points(circ, lo, hi, top_share=share, **kw)
        for k in whole:
            assert_array_equal(top[k], whole[k], err_msg=k)
        # a coarse grid split at every cell: each point's cell is the one joining the two parts for one split
        coarse = circuit.normal_points(circ, lo, hi, grid=9, **kw)
        for split in range(1, 9):
            top = circuit.normal_points(circ, lo, hi, grid=9, top_share=split / 8, **kw)
            for k in coarse:
                assert_array_equal(top[k], coarse[k], err_msg=f"{k}, split {split}")
        seen["found"] |= bool(whole["found"].any())
        seen["none"] |= bool((~whole["found"] & ~whole["beyond"]).any())
        seen["beyond"] |= bool(whole["beyond"].any())
    assert all(seen.values()), seen


DRIVES = {"fixed speed": None, "engine": "welding", "motor": "battery-charging"}


def _drive(which):
    return None if DRIVES[which] is None else load_profile(PROFILES / "loads" / f"{DRIVES[which]}.toml").drive


@pytest.mark.parametrize("name", ["welding-set", "charging-set", "lighting-set", "feeder-booster"])
@pytest.mark.parametrize("which", list(DRIVES))
def test_residual_below_zero_is_an_upper_bound(name, which):
    """Where ``residual_below_zero`` clears an interval of terminal voltage, the residual is below zero
    at every voltage in it (sampled densely), for every connection, tap and rheostat of a demo machine,
    load currents of either sign and intervals anywhere in the span, at a fixed speed and with the speed
    coupled to an engine or a motor (held under its ceiling); and it clears many intervals high above the
    machine's voltage (the bound is not empty)."""
    m = load_machine(PROFILES / "machines" / f"{name}.toml")
    circ = circuit.build_circuit(m, grid_settings(m, rheostats=5), _drive(which))
    assert circuit.bound_holds(circ)
    rng = np.random.default_rng(11)
    rows = np.repeat(np.arange(circ.n), 40)
    il = rng.uniform(-0.5, 2.0, rows.size) * m.rated_armature_current_a
    v_lo = rng.uniform(0.0, 3.0, rows.size) * m.rated_voltage_v
    v_hi = v_lo + rng.uniform(0.0, 0.3, rows.size) * rng.choice([1.0, 8.0], rows.size) * m.rated_voltage_v
    sure = circuit.residual_below_zero(circ, rows, v_lo, v_hi, il)
    assert (0.2 if which == "fixed speed" else 0.05) < sure.mean() < 0.98
    k = np.flatnonzero(sure)
    v = v_lo[k, None] + (v_hi - v_lo)[k, None] * np.linspace(0.0, 1.0, 41)[None, :]
    h = circuit.circuit_residual(circ, circuit.candidate_params(circ, rows[k, None]), v, il[k, None])
    assert np.all(h < 0)


@pytest.mark.parametrize("name", ["welding-set", "charging-set", "lighting-set", "feeder-booster"])
@pytest.mark.parametrize("which", list(DRIVES))
def test_residual_below_zero_along_a_rising_line(name, which):
    """Along a load line whose voltage and current both rise (a resistor, a welding line), where the bound
    clears an interval of current the residual is below zero at every point of it (sampled densely)."""
    m = load_machine(PROFILES / "machines" / f"{name}.toml")
    circ = circuit.build_circuit(m, grid_settings(m, rheostats=5), _drive(which))
    rng = np.random.default_rng(12)
    rows = np.repeat(np.arange(circ.n), 40)
    ir = m.rated_armature_current_a
    e0 = rng.choice([0.0, 0.2], rows.size) * m.rated_voltage_v          # a cable alone, or a welding line
    r = rng.uniform(0.0, 2.0, rows.size) * m.rated_voltage_v / ir        # up to twice the rated load's resistance
    il_lo = rng.uniform(0.0, 8.0, rows.size) * ir
    il_hi = il_lo + rng.uniform(0.0, 2.0, rows.size) * ir
    sure = circuit.residual_below_zero(circ, rows, e0 + r * il_lo, e0 + r * il_hi, il_lo, il_hi)
    assert 0.05 < sure.mean() < 0.98
    k = np.flatnonzero(sure)
    il = il_lo[k, None] + (il_hi - il_lo)[k, None] * np.linspace(0.0, 1.0, 41)[None, :]
    h = circuit.circuit_residual(circ, circuit.candidate_params(circ, rows[k, None]), e0[k, None] + r[k, None] * il, il)
    assert np.all(h < 0)


@pytest.mark.parametrize("name", ["welding-set", "charging-set"])
@pytest.mark.parametrize("which", list(DRIVES))
def test_cleared_blocks_of_a_rising_line_give_the_same_points(name, which):
    """The stuck electrode's scan (a resistor from zero to the current span) with the blocks the bound
    clears left out gives the points of the whole scan bit for bit, at both grids the welding job uses."""
    m = load_machine(PROFILES / "machines" / f"{name}.toml")
    circ = circuit.build_circuit(m, grid_settings(m, rheostats=6), _drive(which))
    cable = np.linspace(0.02, 2.0, circ.n) * m.rated_voltage_v / m.rated_armature_current_a

    def v_of(t, rows=None):
        return (cable if rows is None else cable[rows])[:, None] * t
    lo, hi = np.zeros(circ.n), np.full(circ.n, circ.imax)
    for grid in (circuit.NORMAL_POINTS_GRID, 33):
        whole = circuit.normal_points(circ, lo, hi, v_of=v_of, grid=grid)
        got = circuit.normal_points(circ, lo, hi, v_of=v_of, grid=grid, top_share=1.0, rising_line=True)
        for k in whole:
            assert_array_equal(got[k], whole[k], err_msg=k)
        assert whole["found"].any()


@pytest.mark.parametrize("name", ["welding-set", "charging-set", "lighting-set", "feeder-booster"])
@pytest.mark.parametrize("share", [0.3, 0.7, 1.0])
def test_cleared_blocks_give_the_same_points(name, share):
    """A fixed load current per row (``fixed_current``): the blocks the bound clears are not evaluated,
    and the points are the same bit for bit as the whole scan's, rows doubled and beyond included."""
    m = load_machine(PROFILES / "machines" / f"{name}.toml")
    circ = circuit.build_circuit(m, grid_settings(m, rheostats=6))
    current = np.linspace(0.0, 1.2, circ.n) * m.rated_armature_current_a

    def il_of(t, rows=None):
        return np.broadcast_to((current if rows is None else current[rows])[:, None], t.shape)
    lo = np.full(circ.n, m.rated_voltage_v / 3)
    hi = np.linspace(0.4, 3.0, circ.n) * m.rated_voltage_v
    whole = circuit.normal_points(circ, lo, hi, il_of=il_of)
    for grid in (circuit.NORMAL_POINTS_GRID, 9):
        ref = whole if grid != 9 else circuit.normal_points(circ, lo, hi, il_of=il_of, grid=9)
        got = circuit.normal_points(circ, lo, hi, il_of=il_of, grid=grid, top_share=share, fixed_current=True)
        for k in ref:
            assert_array_equal(got[k], ref[k], err_msg=k)
    assert whole["found"].any() and (~whole["found"]).any()
