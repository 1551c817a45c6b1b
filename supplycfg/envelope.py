"""The candidate space of the setting search and its envelope.

A candidate is a base setting (connection, series turns, diverter and the
kind of field control) with a value of that control (rheostat [ohm] or field
current [A]). Every candidate is evaluated at every corner of the job's
envelope (drive speeds x winding temperatures) at once: one circuit row per
(base, corner). The jobs (:mod:`supplycfg.jobs`) compute their limits and
figures on these rows; the generic search ranks the results.

Limits are given as ``name -> (values, limit, 'max'|'min', unit)``; margins
are positive inside a limit.
"""

import math
import warnings
from dataclasses import dataclass

import numpy as np

from .circuit import SEPARATE, USES_SERIES, Setting, allowed_connections, build_circuit
from .readings import preferred_resistance_ohm

#: Grid of field-control values before refinement.
CONTROL_GRID = 13
#: Golden-section steps refining the best control value (0.618**14 ~ 1e-3 of a grid cell).
GOLDEN_STEPS = 12
#: Golden-section steps per evaluation round: every point two steps may visit (3)
#: is scored in one call, so the 12 steps take 6 rounds instead of 12 (the same
#: numbers). Measured on the lighting demo: 1, 2 and 3 steps per round take the
#: same time today (each row's solve, not the round, costs most); rounds count
#: once the engine's per-call cost falls.
GOLDEN_STEPS_PER_ROUND = 2
#: Diverters tried, as multiples of the series-winding resistance in use, each taken at
#: its nearest E12 preferred value (a resistor one can buy or build); none is always tried.
DIVERTER_FACTORS = (0.5, 1.0, 2.0, 4.0)
#: Booster diverters: a finer set, since the diverter is its only trim.
BOOSTER_DIVERTER_FACTORS = tuple(np.round(np.geomspace(0.25, 16.0, 13), 4))
#: Load-line grid and bisection steps while searching, and for the reported figures.
COARSE = {"grid": 33, "steps": 26}
FINE = {"grid": 401, "steps": 60}


def margin(value, limit, kind, unit):
    """Margin of ``value`` against ``limit``: positive inside (``kind`` 'max' or 'min')."""
    m = (limit - value) if kind == "max" else (value - limit)
    frac = m / abs(limit) if limit else m
    return m, frac



@dataclass
class Space:
    """Candidates x envelope corners of one search, with their circuit."""

    machine: object
    profile: object
    bases: list          # (connection, series_turns, diverter_ohm, control)
    corners: list        # (speed, temperature)
    nominal: tuple
    circ: object         # circuit of bases x corners (row = base * nc + corner)

    @property
    def nc(self):
        return len(self.corners)


def control_kind(machine, conn):
    if conn == "series":
        return "none"
    if conn in SEPARATE:
        return "exciter" if machine.excitation_voltage_v is not None else "field-current"
    return "rheostat"


def candidate_bases(machine, profile):
    """(connection, series_turns, diverter_ohm, control) tuples the search tries."""
    conns = list(allowed_connections(machine))
    kind = profile.kind
    if kind == "booster":
        conns = ["series"] if machine.has_series else []
    bases = []
    for conn in conns:
        control = control_kind(machine, conn)
        if conn in USES_SERIES:
            taps = [t for t in machine.series_taps if t > 0]
        else:
            taps = [0.0]
        for tap in taps:
            divs = [None]
            if conn in USES_SERIES and kind in ("welding", "lighting", "booster"):
                rse = machine.series_field_resistance_ohm * tap / machine.series_turns_per_pole
                factors = BOOSTER_DIVERTER_FACTORS if kind == "booster" else DIVERTER_FACTORS
                divs += sorted({preferred_resistance_ohm(f * rse) for f in factors})
            for d in divs:
                bases.append((conn, float(tap), d, control))
    return bases


def envelope_corners(machine, profile):
    speeds = tuple(float(s) for s in profile.speeds_rpm)
    if len(speeds) == 2 and speeds[0] < speeds[1]:
        # the setting is stated at the middle speed, so it is evaluated there too
        speeds = (speeds[0], 0.5 * (speeds[0] + speeds[1]), speeds[1])
    temps = tuple(float(t) for t in profile.temperatures_c) if profile.temperatures_c else \
        (machine.reference_temperature_c,)
    corners = [(s, t) for s in speeds for t in temps]
    nominal = (float(np.mean(speeds)), temps[-1])
    return corners, nominal


def build_space(machine, profile):
    bases = candidate_bases(machine, profile)
    corners, nominal = envelope_corners(machine, profile)
    settings = []
    for conn, tap, d, control in bases:
        for sp, tc in corners:
            kw = {}
            if control == "field-current":
                kw["field_current_a"] = 0.0
            settings.append(Setting(conn, series_turns=tap if conn in USES_SERIES else None, diverter_ohm=d,
                                    speed_rpm=sp, winding_temperature_c=tc, **kw))
    circ = build_circuit(machine, settings, profile.drive) if settings else None
    return Space(machine, profile, bases, corners, nominal, circ)


def control_range(machine, control):
    if control == "field-current":
        return 0.0, float(machine.occ_field_current_a[-1])
    if control == "none":
        return math.nan, math.nan
    return 0.0, float(machine.rheostat_max_ohm)


def expand_candidates(space, base_idx, u, corner_idx=None):
    """Circuit rows for (base, control value) pairs at every corner (or one corner each)."""
    base_idx = np.asarray(base_idx, int)
    u = np.asarray(u, float)
    nc = space.nc
    if corner_idx is None:
        rows = (base_idx[:, None] * nc + np.arange(nc)[None, :]).ravel()
        uu = np.repeat(u, nc)
        bb = np.repeat(base_idx, nc)
    else:
        rows = base_idx * nc + np.asarray(corner_idx, int)
        uu, bb = u, base_idx
    sub = space.circ.subset(rows, *control_of_rows(space, bb)(uu))
    return sub, rows


def control_of_rows(space, base_idx):
    """How control values act on rows of bases ``base_idx``, read once.

    Returns a function of the rows' control values ``u`` giving
    ``(rheostat_ohm, field_current_a, exciter_v)`` as :meth:`Circuit.subset`
    and :meth:`Circuit.params_with_control` take them (NaN where a row's
    control is not of that kind): a search that changes only the field
    control step by step reads the bases once, not at every step.
    """
    base_idx = np.asarray(base_idx, int)
    # the control of each base once, then read per row
    controls = np.array([b[3] for b in space.bases] or [""])
    by_rheostat = ((controls == "rheostat") | (controls == "exciter"))[base_idx]
    by_current = (controls == "field-current")[base_idx]
    ev = space.machine.excitation_voltage_v
    ev = np.full(base_idx.size, np.nan if ev is None else ev)
    return lambda u: (np.where(by_rheostat, u, np.nan), np.where(by_current, u, np.nan), ev)


def worst_over_corners(values, n, nc, how):
    v = np.asarray(values, float).reshape(n, nc)
    if v.size == 0:
        return np.zeros(n)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if how == "max":
            return np.where(np.isnan(v).any(axis=1), np.nan, np.nanmax(v, axis=1))
        return np.where(np.isnan(v).any(axis=1), np.nan, np.nanmin(v, axis=1))



def critical_resistance_ratios(space, sub, n):
    """Least R_crit/R_field and n/n_crit over the envelope (self-excited candidates)."""
    from .circuit import critical_field_resistance_ohm
    rr = critical_field_resistance_ohm(sub) / sub.rf
    return worst_over_corners(rr, n, space.nc, "min")


def smallest_margin_fraction(lim):
    fr = []
    for name, (val, limit, kind, unit) in lim.items():
        _, f = margin(np.asarray(val, float), limit, kind, unit)
        fr.append(np.where(np.isnan(f), -np.inf, f))
    return np.min(np.vstack(fr), axis=0)


def golden_section_steps(a, b, c, d, fc, fd, depth, score):
    """``depth`` golden-section steps (maximising) of brackets ``[a, b]`` with inner points ``c < d``.

    Every point the ``depth`` steps may visit (``2**depth - 1`` per row: the
    next point is known, each later one depends on one comparison) is scored
    in one call of ``score``; the steps then follow the comparisons. The
    numbers are those of taking one step per call, bit for bit.

    Parameters
    ----------
    a, b, c, d : ndarray
        Brackets and their inner points, per row.
    fc, fd : ndarray
        Scores at ``c`` and ``d``.
    depth : int
    score : callable
        ``score(points)`` with ``points`` of shape ``(rows, k)`` -> scores of that shape.

    Returns
    -------
    (a, b, c, d, fc, fd, evaluated)
        The state after the steps and the points scored.

    References
    ----------
    J. Kiefer, "Sequential minimax search for a maximum", Proc. AMS 4 (1953)
    502-506 (golden-section search).
    """
    g = (math.sqrt(5) - 1) / 2
    n = a.size
    nodes = 2 ** depth - 1
    # node 0 is the next step, known now; node j's children 2j+1 and 2j+2 follow it when
    # the comparison after it keeps the lower part (c scores at least d) or the upper part
    A, B, C, D, P = (np.empty((n, nodes)) for _ in range(5))
    for j in range(nodes):
        if j == 0:
            pa, pb, pc, pd = a, b, c, d
            left = fc >= fd
        else:
            p = (j - 1) // 2
            pa, pb, pc, pd = A[:, p], B[:, p], C[:, p], D[:, p]
            left = np.full(n, j == 2 * p + 1)
        nb_ = np.where(left, pd, pb)
        na_ = np.where(left, pa, pc)
        new = np.where(left, nb_ - g * (nb_ - na_), na_ + g * (nb_ - na_))
        A[:, j], B[:, j], P[:, j] = na_, nb_, new
        D[:, j], C[:, j] = np.where(left, pc, new), np.where(left, new, pd)
    S = np.asarray(score(P), float)
    rows = np.arange(n)
    j = np.zeros(n, int)
    for k in range(depth):
        left = fc >= fd
        if k:
            j = 2 * j + np.where(left, 1, 2)
        fn = S[rows, j]
        fd, fc = np.where(left, fc, fn), np.where(left, fn, fd)
    return A[rows, j], B[rows, j], C[rows, j], D[rows, j], fc, fd, n * nodes


def optimise_control(space, job):
    """Best control value per base: grid, then golden-section on the smallest margin.

    The grid is one round; the golden-section steps run several per round
    (:func:`golden_section_steps`), with the numbers of one step per round.
    """
    nb = len(space.bases)
    lo = np.array([control_range(space.machine, b[3])[0] for b in space.bases])
    hi = np.array([control_range(space.machine, b[3])[1] for b in space.bases])
    fixed = np.isnan(lo)
    grid = np.linspace(0, 1, CONTROL_GRID)
    bi = np.repeat(np.arange(nb), CONTROL_GRID)
    uu = np.where(np.repeat(fixed, CONTROL_GRID), np.nan, np.repeat(lo, CONTROL_GRID) +
                  np.repeat(hi - lo, CONTROL_GRID) * np.tile(grid, nb))
    lim, _ = job(space, bi, uu)
    score = smallest_margin_fraction(lim).reshape(nb, CONTROL_GRID)
    j = np.argmax(score, axis=1)
    evaluated = bi.size * space.nc
    # golden-section inside the neighbouring cells
    step = (hi - lo) / (CONTROL_GRID - 1)
    cen = lo + j * step
    a = np.where(fixed, np.nan, np.maximum(lo, cen - step))
    b = np.where(fixed, np.nan, np.minimum(hi, cen + step))
    g = (math.sqrt(5) - 1) / 2
    live = ~fixed
    best_u = np.where(fixed, np.nan, cen)
    best_s = score[np.arange(nb), j]
    if live.any():
        idx = np.flatnonzero(live)
        a_, b_ = a[idx], b[idx]
        c_ = b_ - g * (b_ - a_); d_ = a_ + g * (b_ - a_)
        both = smallest_margin_fraction(job(space, np.concatenate([idx, idx]), np.concatenate([c_, d_]))[0])
        fc, fd = both[:idx.size], both[idx.size:]
        evaluated += 2 * idx.size * space.nc
        done = 0
        while done < GOLDEN_STEPS:
            depth = min(GOLDEN_STEPS_PER_ROUND, GOLDEN_STEPS - done)
            a_, b_, c_, d_, fc, fd, n_eval = golden_section_steps(
                a_, b_, c_, d_, fc, fd, depth,
                lambda pts: smallest_margin_fraction(job(space, np.repeat(idx, pts.shape[1]), pts.ravel())[0])
                .reshape(pts.shape))
            evaluated += n_eval * space.nc
            done += depth
        cand_u = np.where(fc >= fd, c_, d_)
        cand_s = np.maximum(fc, fd)
        better = cand_s > best_s[idx]
        best_u[idx] = np.where(better, cand_u, best_u[idx])
    return best_u, evaluated
