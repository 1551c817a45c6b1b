"""The lock-step walk of many self-excited characteristics against the same walk one curve at a time,
and its bisection helpers against numpy's ``searchsorted`` and ``interp`` (closed form: the same
numbers by two routes)."""

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from supplycfg import circuit
from supplycfg.bench import grid_settings
from supplycfg.machine import load_machine

MACHINES = Path(__file__).resolve().parents[1] / "profiles" / "machines"


@pytest.mark.parametrize("name", ["charging-set", "welding-set", "lighting-set", "feeder-booster"])
def test_lockstep_walk_matches_curve_by_curve(monkeypatch, name):
    """Every connection, tap and a spread of rheostat values of a demo machine (differential
    connections whose field reverses included): the same points, notes and figures either way."""
    m = load_machine(MACHINES / f"{name}.toml")
    settings = grid_settings(m, rheostats=7)
    assert sum(s.connection in circuit.SELF_EXCITED for s in settings) >= circuit.LOCKSTEP_MIN_CURVES
    together = circuit.characteristics(m, settings, 60)
    monkeypatch.setattr(circuit, "LOCKSTEP_MIN_CURVES", 10 ** 9)
    alone = circuit.characteristics(m, settings, 60)
    for a, b in zip(together, alone):
        assert a.notes == b.notes and a.converged == b.converged, a.setting
        for k in circuit.POINT_KEYS:
            assert_allclose(a.points[k], b.points[k], rtol=1e-10, atol=1e-9, err_msg=f"{a.setting} {k}")
        for att in ("no_load_voltage_v", "short_circuit_current_a", "max_load_current_a", "regulation_percent"):
            x, y = getattr(a, att), getattr(b, att)
            assert (x is None) == (y is None), (a.setting, att)
            if x is not None:
                assert_allclose(x, y, rtol=1e-10, atol=1e-9, err_msg=f"{a.setting} {att}")


def test_run_helpers_agree_with_numpy():
    """Rising and falling runs with flats, values outside the run and on its knots."""
    rng = np.random.default_rng(7)
    grid = np.linspace(-1.0, 4.0, 41)
    rows, lo, hi, tgt, want_l, want_r, want_i, want_c = [], [], [], [], [], [], [], []
    vals = np.zeros((6, grid.size))
    for r in range(6):
        steps = rng.choice([0.0, 0.5, 1.0, 2.0], grid.size)
        vals[r] = np.cumsum(steps) * (1 if r % 2 else -1)
        a, b = sorted(rng.choice(grid.size, 2, replace=False))
        ys, xs = vals[r, a:b + 1], grid[a:b + 1]
        if ys[-1] < ys[0]:
            ys, xs = ys[::-1], xs[::-1]
        for t in np.concatenate([ys, ys + 0.25, [ys[0] - 3, ys[-1] + 3]]):
            rows.append(r); lo.append(a); hi.append(b); tgt.append(t)
            want_l.append(np.searchsorted(ys, t, "left")); want_r.append(np.searchsorted(ys, t, "right"))
            want_i.append(np.interp(t, ys, xs))
            j = min(max(np.searchsorted(ys, t), 1), ys.size - 1)
            want_c.append((xs[j - 1], xs[j]))
    rows, lo, hi, tgt = map(np.array, (rows, lo, hi, tgt))
    assert_array_equal(circuit.run_position(vals, rows, lo, hi, tgt)[0], want_l)
    assert_array_equal(circuit.run_position(vals, rows, lo, hi, tgt, right=True)[0], want_r)
    assert_allclose(circuit.run_interp(grid, vals, rows, lo, hi, tgt), want_i, rtol=0, atol=1e-12)
    assert_array_equal(np.stack(circuit.run_cell(grid, vals, rows, lo, hi, tgt), axis=1), want_c)


def _signs_of_row(vals):
    """Each cell's slope sign, cell by cell: a flat takes the last sign before it, leading flats the
    row's first sign, a row of flats +1 (a NaN slope is a sign of its own)."""
    d = np.sign(np.diff(vals))
    nz = [c for c in range(d.size) if d[c] != 0]
    out = []
    for c in range(d.size):
        before = [q for q in nz if q <= c]
        out.append(d[before[-1]] if before else (d[nz[0]] if nz else 1.0))
    return np.array(out)


def _run_of(signs, c):
    """First and last cell of the stretch of equal signs holding cell ``c`` (NaN equals nothing)."""
    lo, hi = c, c
    while lo > 0 and signs[lo - 1] == signs[lo]:
        lo -= 1
    while hi < signs.size - 1 and signs[hi + 1] == signs[hi]:
        hi += 1
    return lo, hi


def test_slope_runs_match_one_row_at_a_time():
    """``SlopeRuns`` keeps only the sign changes: every cell's sign and run read from it are those
    worked out cell by cell on the row alone, with flats (leading, inner, whole rows), NaN slopes and
    rows left out by a mask (one flat run of +1)."""
    rng = np.random.default_rng(12)
    for trial in range(400):
        m, k = int(rng.integers(1, 6)), int(rng.integers(2, 40))
        v = np.cumsum(rng.choice([-1.0, 0.0, 1.0], size=(m, k + 1), p=[0.3, 0.4, 0.3]), axis=1)
        if trial % 3 == 0:
            v[rng.random(v.shape) < 0.1] = np.nan
        v[0] = 3.0 if trial % 5 == 0 else v[0]
        mask = None if trial % 2 else rng.random(m) < 0.6
        runs = circuit.SlopeRuns(v, mask)
        rows, cells = np.meshgrid(np.arange(m), np.arange(k), indexing="ij")
        sign, lo, hi = runs[rows, cells], runs.lo[rows, cells], runs.hi[rows, cells]
        for r in range(m):
            if mask is not None and not mask[r]:
                assert_array_equal(sign[r], 1.0)
                assert_array_equal(lo[r], 0)
                assert_array_equal(hi[r], k - 1)
                continue
            want = _signs_of_row(v[r])
            one = runs.row(r)
            assert_array_equal(sign[r], want)
            assert_array_equal([one[c] for c in range(k)], want)
            for c in range(k):
                assert (int(lo[r, c]), int(hi[r, c])) == _run_of(want, c) == one(c), (trial, r, c)


def test_nonzero_rows_cols_is_numpys_nonzero():
    """The solvers' row and column indices of a mask are numpy's, in the same order, empty shapes included."""
    rng = np.random.default_rng(5)
    for shape in ((1, 1), (3, 0), (0, 4), (7, 13), (40, 2072)):
        for share in (0.0, 0.001, 0.5, 1.0):
            mask = rng.random(shape) < share
            got, want = circuit.nonzero_rows_cols(mask), np.nonzero(mask)
            for g, w in zip(got, want):
                assert g.dtype == w.dtype
                np.testing.assert_array_equal(g, w)


def test_interior_peaks_are_argmax_per_curve():
    """The folds' peaks found over all curves at once are each curve's ``np.argmax`` (the first NaN if any),
    kept only inside its samples; short curves and missing ones are skipped; only a self-excited curve
    may have a corner there. The stack's first sample where a condition holds is ``np.flatnonzero``'s."""
    m = load_machine(Path(__file__).resolve().parents[1] / "profiles" / "machines" / "charging-set.toml")
    circ = circuit.build_circuit(m, grid_settings(m, rheostats=3))
    rng = np.random.default_rng(8)
    states = []
    for i in range(circ.n):
        size = int(rng.choice([0, 1, 2, 3, 4, 30]))
        il = rng.normal(size=size)
        if size and i % 5 == 0:
            il[rng.integers(size)] = np.nan
        if size and i % 7 == 0:
            il[:] = 1.0  # ties: the first
        states.append(None if i % 11 == 0 else {
            "load_current_a": il, "terminal_voltage_v": rng.uniform(0, 100, size),
            "armature_current_a": rng.uniform(0, 50, size), "shunt_field_current_a": rng.uniform(0, 2, size),
            "series_branch_current_a": rng.uniform(0, 50, size)})
    stack = circuit.CurveStack(states, [i for i, s in enumerate(states) if s is not None])
    rows, js, may = circuit.interior_peaks(circ, stack)
    want = [(i, int(np.argmax(s["load_current_a"]))) for i, s in enumerate(states)
            if s is not None and s["load_current_a"].size >= 3
            and 0 < int(np.argmax(s["load_current_a"])) < s["load_current_a"].size - 1]
    assert list(zip(rows, js)) == want and len(want) > 10
    assert all(circ.kind[i] == 1 for i, m_ in zip(rows, may) if m_)
    # the first sample where a condition holds, per curve (-1 where none)
    first = stack.first_true(stack.column("armature_current_a") >= 25.0)
    for q, i in enumerate(stack.rows):
        hit = np.flatnonzero(states[i]["armature_current_a"] >= 25.0)
        assert first[q] == (stack.starts[q] + hit[0] if hit.size else -1)
