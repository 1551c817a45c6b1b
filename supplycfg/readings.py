"""What a person sets and reads at the machine: meter readings, tolerance bands, diverters, exciters.

The search solves the field control exactly (a rheostat [ohm] or a field
current [A]); nobody sets a rheostat to 0.01 ohm. This module turns an exact
control into

- **readings**: the field current an ammeter in the field circuit shows, at
  cold and at hot windings, the rheostat resistance and its position in per
  cent of travel, rounded to what can be set;
- a **band**: the interval of the control (and of the field current it gives)
  over which every limit of the job still holds, found by scanning and
  bisecting the job's own margins;
- a **diverter** as a resistor one can buy or build (a preferred value, the
  current it carries and the power it must dissipate);
- the **exciter supply** a separately excited field needs.

Where the technician sets the field is the job's choice (at no load for
lighting and booster, at the start of charge for a battery, per dial row for
welding); the job hands the field currents at that point to these functions.
"""

import functools
import math

import numpy as np

from .magnetisation import copper_resistance_factor

#: Significant figures a reading is given to at most: a field ammeter or a
#: rheostat scale is read to about 3 figures (common practice).
READING_FIGURES = 3
#: A reading is never given finer than the band leaves room for: at least this
#: many steps of the last digit fit across the band (model choice).
STEPS_ACROSS_BAND = 5
#: Points scanned from the exact control towards each end of its range before
#: the band's edge is bisected (model choice: catches a limit that breaks and
#: holds again further out).
BAND_SCAN_POINTS = 8
#: Bisection steps refining each edge of a band: the edge is then known to
#: about 1e-6 of the control's range (model choice).
BAND_BISECTION_STEPS = 18
#: Halvings of a band's edge per evaluation round: every point two halvings
#: may visit (3) is evaluated at once, so there are half as many rounds, each a
#: whole batch of re-solves (measured: the battery search with 1, 2, 3 per
#: round, 2.2, 1.3, 1.7 s on a loaded 2-core machine; the same edges each way).
BAND_HALVINGS_PER_ROUND = 2
#: Preferred resistor values per decade, E12 series (IEC 60063, seen): the
#: values a diverter is bought in, or built to with a resistance strip.
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
#: Power ratings a resistor is sold in, a 1-2-5 sequence per decade (common practice).
POWER_RATINGS_PER_DECADE = (1.0, 2.0, 5.0)
#: A power resistor is chosen for at least this multiple of the power it
#: dissipates, so it runs cool enough in still air (common practice).
RESISTOR_DERATING = 1.5


# ---------------------------------------------------------------------------
# rounding to what can be set
# ---------------------------------------------------------------------------

def _pow10_floor(x):
    return 10.0 ** math.floor(math.log10(x))


def settable_step(value, band_width=None):
    """The step a reading is rounded to [same unit as ``value``].

    At most :data:`READING_FIGURES` significant figures of ``value``; coarser
    (a power of ten) where the band is wide enough that the finer digits say
    nothing: at least :data:`STEPS_ACROSS_BAND` steps still fit across it.

    Parameters
    ----------
    value : float
        The exact value.
    band_width : float, optional
        Width of the band the value may move in (same unit).

    Returns
    -------
    float
        A power of ten.
    """
    v = abs(float(value))
    fine = _pow10_floor(v) * 10.0 ** (1 - READING_FIGURES) if v > 0 else None
    coarse = None
    if band_width is not None and math.isfinite(band_width) and band_width > 0:
        coarse = _pow10_floor(band_width / STEPS_ACROSS_BAND)
    if fine is None and coarse is None:
        return 10.0 ** (-READING_FIGURES)
    if fine is None:
        return coarse
    if coarse is None:
        return fine
    return max(fine, coarse)


@functools.lru_cache(maxsize=256)
def _decimals(step):
    # (cached: a search rounds thousands of readings to a handful of steps)
    return max(0, -int(math.floor(math.log10(step) + 1e-9)))


def round_to(value, step, how="nearest"):
    """``value`` rounded to a multiple of ``step``: ``nearest``, ``up`` or ``down``."""
    k = float(value) / step
    if how == "nearest":
        k = round(k)
    elif how == "up":
        k = math.ceil(k - 1e-9)
    elif how == "down":
        k = math.floor(k + 1e-9)
    else:
        raise ValueError(f"how: {how!r}; allowed: nearest, up, down")
    return round(k * step, _decimals(step))


def rounded_band(low, high, value, step=None):
    """A value and its band rounded to what can be set, the band rounded inward.

    Parameters
    ----------
    low, high : float
        The band (exact).
    value : float
        The exact value, inside the band.
    step : float, optional
        The rounding step; default :func:`settable_step` of the band's
        larger end and its width.

    Returns
    -------
    (value, (low, high), step, settable)
        ``settable`` is False when the band is narrower than one step: the
        value and the ends are then rounded to the nearest step (the band
        cannot be held by setting to that precision).
    """
    if step is None:
        step = settable_step(max(abs(low), abs(high)), high - low)
    lo_r, hi_r = round_to(low, step, "up"), round_to(high, step, "down")
    if lo_r > hi_r:
        return round_to(value, step), (round_to(low, step), round_to(high, step)), step, False
    v = min(max(round_to(value, step), lo_r), hi_r)
    return v, (lo_r, hi_r), step, True


def _finite(x):
    return x is not None and math.isfinite(x)


# ---------------------------------------------------------------------------
# the band of a continuous control
# ---------------------------------------------------------------------------

def bisection_tree(a, b, depth):
    """Every point ``depth`` halvings of ``[a, b]`` may visit, in heap order, shape ``(n, 2**depth - 1)``.

    Node 0 is the midpoint; node ``j`` has the halves' midpoints as children
    ``2j + 1`` (the lower half) and ``2j + 2`` (the upper half). Each point is
    computed exactly as a halving reaches it, so walking the tree
    (:func:`walk_bisection_tree`) gives the same numbers as halving round by round.
    """
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    nodes = np.empty(a.shape + (2 ** depth - 1,))
    lows, highs = [a], [b]
    for level in range(depth):
        next_lows, next_highs = [], []
        for k, (lo_, hi_) in enumerate(zip(lows, highs)):
            mid = 0.5 * (lo_ + hi_)
            nodes[..., 2 ** level - 1 + k] = mid
            next_lows += [lo_, mid]
            next_highs += [mid, hi_]
        lows, highs = next_lows, next_highs
    return nodes


def walk_bisection_tree(a, b, holds, depth):
    """``depth`` halvings of ``[a, b]`` with ``holds[:, j]`` known at every node of :func:`bisection_tree`.

    ``a`` stays where the limits hold and ``b`` where they break.
    """
    a = np.asarray(a, float).copy()
    b = np.asarray(b, float).copy()
    j = np.zeros(a.shape, int)
    rows = np.arange(a.size)
    for _ in range(depth):
        mid = 0.5 * (a + b)
        ok = holds[rows, j]
        a = np.where(ok, mid, a)
        b = np.where(ok, b, mid)
        j = 2 * j + np.where(ok, 2, 1)
    return a, b


def bisection_grid_point(a, b, k, depth):
    """Point ``k`` (0 to ``2**depth``) of the grid ``depth`` halvings of ``[a, b]`` reach, computed exactly as a halving does.

    ``k = 0`` is ``a`` and ``k = 2**depth`` is ``b``; every other ``k`` is the
    midpoint of the cell halving reaches it from, so a search that knows the
    edge lies between grid points ``k`` and ``k + 1`` has the numbers that
    :func:`walk_bisection_tree` would give, bit for bit (NaN for a ``k``
    outside the grid). A band edge asks a few points at a time, so they are
    worked one by one in Python floats: the same IEEE operations as numpy's,
    without its per-call cost.
    """
    a, b, k = np.broadcast_arrays(np.asarray(a, float), np.asarray(b, float), np.asarray(k, np.int64))
    top = 2 ** depth
    return np.array([_grid_point(x, y, z, depth, top) for x, y, z in zip(a.ravel().tolist(), b.ravel().tolist(),
                                                                         k.ravel().tolist())], float).reshape(a.shape)


def _grid_point(a, b, k, depth, top):
    """:func:`bisection_grid_point` of one point."""
    if k == 0:
        return a
    if k == top:
        return b
    lo_k, hi_k = 0, top
    for _ in range(depth):
        mid_k = (lo_k + hi_k) // 2
        mid = 0.5 * (a + b)
        if k == mid_k:
            return mid
        if k < mid_k:
            b, hi_k = mid, mid_k
        else:
            a, lo_k = mid, mid_k
    return float("nan")


#: Rounds of the guided search of a band's edge before each round also halves the bracket, so a
#: margin the estimates aim poorly at still ends within ``steps`` more rounds (model choice).
BAND_GUIDED_ROUNDS = 2
#: Each guided round also evaluates a guard point beyond the estimate, at least this share of the way
#: to the bracket's end, so the next round has the edge close on both sides (measured on the battery
#: demo's bands: 1/8, 1/16, 1/32, 1/64 take 4, 4, 3, 3-4 calls each; the guard also goes as far as
#: the estimate moved since the last round, which saves a call on some variants of the demo job).
BAND_GUARD_SHARE = 1.0 / 32
#: Grid points of the first scan point's bracket evaluated with it, as shares of that bracket from
#: ``u0`` (measured as above: 1/4 and 1/16 beat 1/4 to 1/256, 1/8 alone, or none).
BAND_AHEAD_SHARES = (1.0 / 16, 1.0 / 4)


def _band_start(u0, lo, hi, scan):
    """The controls and their range as arrays of one shape, the rows that can have a band, and the scan's
    fractions of the way to each end."""
    u0 = np.asarray(u0, float)
    n = u0.size
    lo = np.broadcast_to(np.asarray(lo, float), (n,))
    hi = np.broadcast_to(np.asarray(hi, float), (n,))
    live = np.isfinite(u0) & np.isfinite(lo) & np.isfinite(hi)
    return u0, lo, hi, live, np.arange(1, scan + 1) / scan


def _band_by_root(margin_of, u0, lo, hi, scan, steps, per_round, m0):
    """:func:`control_band` with each edge found by a guided search on the bisection's grid (``refine="root"``).

    The scan stops at its first point that breaks a limit (the points past it
    never decide the bracket); the points :data:`BAND_AHEAD_SHARES` of the
    way to the first scan point come in the same call. In the bracket, each
    round evaluates the two grid points either side of an estimate of the
    edge, and a guard point beyond it: the estimate is the first crossing of
    the limits that break at the bracket's far end, each by a parabola
    through its sign change and a neighbouring point (regula falsi where that
    fails). Once a point that holds and one that breaks are neighbours on the
    grid of ``steps`` halvings (:func:`bisection_grid_point`), the lower is
    the edge that halving reaches wherever the limits break only once inside
    the bracket. An edge whose points contradict that (a point that holds
    beyond one that breaks) is halved as :func:`control_band` does, from its
    bracket.

    ``margin_of`` may return every limit's margin (shape ``(limits, n)``):
    the estimates then follow each limit, the decisions their smallest.
    """
    u0, lo, hi, live, frac = _band_start(u0, lo, hi, scan)
    n = u0.size
    known = m0 is not None
    if known:
        m0 = np.asarray(m0, float)
        m0 = np.array(np.broadcast_to(m0 if m0.ndim == 2 else m0[None, :], (m0.shape[0] if m0.ndim == 2 else 1, n)))
        live &= np.min(m0, axis=0) >= 0
    edges = [np.where(live, end, np.nan) for end in (lo, hi)]
    state = {}
    for i in np.flatnonzero(live):
        for side, end in enumerate((lo, hi)):
            if end[i] != u0[i]:
                state[(int(i), side)] = {"phase": "scan", "end": float(end[i])}
    first = True
    while state:
        asks = []  # (candidate, value, edge or None, kind, index)
        if first and not known:
            asks += [(int(i), u0[i], None, "u0", int(i)) for i in np.flatnonzero(live)]
        for key, st in state.items():
            i = key[0]
            if st["phase"] == "scan":
                js = [0] if first else list(range(1, scan))
                asks += [(i, p, key, "scan", j) for j, p in zip(js, u0[i] + (st["end"] - u0[i]) * frac[js])]
                if first:
                    # the edge usually lies before the first scan point: points of that bracket's grid
                    # come in the same call, for the guided search
                    g1 = u0[i] + (st["end"] - u0[i]) * frac[0]
                    ks = _ahead_points(steps)
                    asks += [(i, u, key, "ahead", k) for k, u in zip(ks, bisection_grid_point(u0[i], g1, ks, steps))]
            elif st["phase"] == "root":
                ks = _guided_points(st)
                asks += [(i, u, key, "root", k) for k, u in zip(ks, st["grid"](ks))]
            else:
                st["depth"] = min(max(1, int(per_round)), steps - st["done"])
                tree = bisection_tree(np.array([st["a"]]), np.array([st["b"]]), st["depth"])[0]
                asks += [(i, p, key, "tree", j) for j, p in enumerate(tree)]
        m = np.asarray(margin_of(np.array([q[0] for q in asks], int), np.array([q[1] for q in asks], float)), float)
        m = m if m.ndim == 2 else m[None, :]
        got = {}
        for col, (i, u, key, what, j) in enumerate(asks):
            if key is None:
                if m0 is None:
                    m0 = np.full((m.shape[0], n), np.nan)
                m0[:, i] = m[:, col]
            else:
                got.setdefault(key, []).append((what, j, u, m[:, col]))
        if first and not known:
            live &= np.min(m0, axis=0) >= 0
            edges = [np.where(live, e, np.nan) for e in edges]
            state = {k: v for k, v in state.items() if live[k[0]]}
        first = False
        for key in list(state):
            st, (i, side) = state[key], key
            ahead = [r[1:] for r in got.get(key, []) if r[0] == "ahead"]
            res = sorted((r[1:] for r in got.get(key, []) if r[0] != "ahead"), key=lambda r: r[0])
            if st["phase"] == "scan":
                bad = [r for r in res if not np.min(r[2]) >= 0]
                if bad:
                    j = bad[0][0]
                    good = [r for r in res if r[0] == j - 1]
                    g, mg = (good[0][1], good[0][2]) if good else ((u0[i], m0[:, i]) if j == 0 else (st["g"], st["mg"]))
                    _start_guided(st, g, mg, bad[0][1], bad[0][2], steps)
                    if j == 0 and ahead and not _guided_update(st, sorted(ahead, key=lambda r: r[0]), count=False):
                        st.update(phase="bisect", a=st["g0"], b=st["b0"], done=0)
                    elif st["phase"] == "root" and st["khi"] - st["klo"] == 1:
                        edges[side][i] = st["grid"]([st["klo"]])[0]
                        del state[key]
                elif res[-1][0] == scan - 1:
                    edges[side][i] = st["end"]
                    del state[key]
                else:
                    st["g"], st["mg"] = res[-1][1], res[-1][2]
            elif st["phase"] == "root":
                if not _guided_update(st, res):
                    # the points contradict one crossing: halve the bracket as the bisection does
                    st.update(phase="bisect", a=st["g0"], b=st["b0"], done=0)
                elif st["khi"] - st["klo"] == 1:
                    edges[side][i] = st["grid"]([st["klo"]])[0]
                    del state[key]
            else:
                holds = np.array([[np.min(r[2]) >= 0 for r in res]])
                a, b = walk_bisection_tree(np.array([st["a"]]), np.array([st["b"]]), holds, st["depth"])
                st["a"], st["b"], st["done"] = float(a[0]), float(b[0]), st["done"] + st["depth"]
                if st["done"] >= steps:
                    edges[side][i] = st["a"]
                    del state[key]
    low = np.fmin(edges[0], edges[1])
    high = np.fmax(edges[0], edges[1])
    return np.where(live, low, np.nan), np.where(live, high, np.nan)


def _start_guided(st, g, mg, b, mb, steps):
    """An edge's guided search from its bracket: ``g`` holds (margins ``mg``), ``b`` breaks (``mb``)."""
    g0, b0 = float(g), float(b)
    st.update(phase="root", g0=g0, b0=b0, klo=0, khi=2 ** steps, rounds=0,
              seen={0: np.asarray(mg, float), 2 ** steps: np.asarray(mb, float)},
              grid=lambda ks: bisection_grid_point(np.full(len(ks), g0), np.full(len(ks), b0), ks, steps))


def _quadratic_root(pts, a, b):
    """The root in ``[a, b]`` of the parabola through three ``(x, y)`` points; None if not exactly one."""
    (x0, y0), (x1, y1), (x2, y2) = pts
    if len({x0, x1, x2}) < 3:
        return None
    d01 = (y1 - y0) / (x1 - x0)
    d12 = (y2 - y1) / (x2 - x1)
    c2 = (d12 - d01) / (x2 - x0)
    # in s = x - x1: y = y1 + c1 s + c2 s^2
    c1 = d01 + c2 * (x1 - x0)
    if c2 == 0.0 or abs(c2) * (b - a) ** 2 < 1e-12 * (abs(c1) * (b - a) + abs(y1)):
        roots = [x1 - y1 / c1] if c1 != 0.0 else []
    else:
        disc = c1 * c1 - 4.0 * c2 * y1
        if disc < 0:
            return None
        q = -0.5 * (c1 + math.copysign(math.sqrt(disc), c1))
        roots = [x1 + r for r in ((q / c2) if c2 else None, (y1 / q) if q else None) if r is not None]
    inside = [r for r in roots if a <= r <= b]
    return inside[0] if len(inside) == 1 else None


def _limit_crossing(ks, vs):
    """Grid index where one limit's margins ``vs`` (at sorted indices ``ks``, first >= 0, last < 0)
    first cross zero: a parabola through its sign change and a neighbouring point, or regula
    falsi on the change where that fails, or the change's middle."""
    j = next(q for q in range(len(vs)) if not vs[q] >= 0)
    a, b = ks[j - 1], ks[j]
    if not (np.isfinite(vs[j - 1]) and np.isfinite(vs[j])):
        return 0.5 * (a + b)
    pts = [(ks[q], vs[q]) for q in range(len(vs))]
    triples = []
    if j >= 2 and np.isfinite(vs[j - 2]):
        triples.append((b - a + a - ks[j - 2], [pts[j - 2], pts[j - 1], pts[j]]))
    if j + 1 < len(vs) and np.isfinite(vs[j + 1]):
        triples.append((ks[j + 1] - a, [pts[j - 1], pts[j], pts[j + 1]]))
    for _, tri in sorted(triples, key=lambda t: t[0]):
        t = _quadratic_root(tri, a, b)
        if t is not None:
            return t
    if vs[j - 1] != vs[j]:
        return b - vs[j] * (b - a) / (vs[j] - vs[j - 1])
    return 0.5 * (a + b)


def _guided_points(st):
    """Grid indices a round evaluates for one edge: the neighbours of the estimated edge, a guard
    point beyond it (so the next round has the edge close on both sides), and the bracket's middle
    after :data:`BAND_GUIDED_ROUNDS` rounds."""
    klo, khi = st["klo"], st["khi"]
    ks = sorted(k for k in st["seen"] if klo <= k <= khi)
    vals = np.array([st["seen"][k] for k in ks])
    ts = [_limit_crossing(ks, vals[:, li]) for li in range(vals.shape[1]) if not vals[-1, li] >= 0]
    t = min(ts) if ts else 0.5 * (klo + khi)
    kf = min(max(int(math.floor(t)), klo), khi - 1)
    pts = {kf, kf + 1}
    # the guard goes the way the estimate moved since the last round (it creeps up on the edge; at
    # first to the wider side), a share of the way to the bracket's end or as far as the estimate
    # moved, at most half way
    moved = t - st["t"] if "t" in st else 0.0
    st["t"] = t
    up = moved > 0 if moved else khi - t >= t - klo
    room = khi - t if up else t - klo
    reach = max(1.0, min(max(BAND_GUARD_SHARE * room, abs(moved)), 0.5 * room))
    pts.add(int(math.ceil(t + reach)) if up else int(math.floor(t - reach)))
    if st["rounds"] >= BAND_GUIDED_ROUNDS:
        pts.add((klo + khi) // 2)
    return sorted(p for p in pts if klo < p < khi)


def _ahead_points(steps):
    """Grid indices evaluated with the first scan point (:data:`BAND_AHEAD_SHARES` of its bracket)."""
    top = 2 ** steps
    return sorted({min(max(int(round(f * top)), 1), top - 1) for f in BAND_AHEAD_SHARES})


def _guided_update(st, res, count=True):
    """Narrow an edge's bracket by a round's points; False where they contradict one crossing."""
    st["rounds"] += int(count)
    hold = [r[0] for r in res if np.min(r[2]) >= 0]
    brk = [r[0] for r in res if not np.min(r[2]) >= 0]
    if hold and brk and max(hold) > min(brk):
        return False
    for k, _, v in res:
        st["seen"][k] = np.asarray(v, float)
    st["klo"] = max([st["klo"]] + hold)
    st["khi"] = min([st["khi"]] + brk)
    return True


def control_band(margin_of, u0, lo, hi, scan=BAND_SCAN_POINTS, steps=BAND_BISECTION_STEPS,
                 per_round=BAND_HALVINGS_PER_ROUND, refine="bisection", m0=None):
    """Interval of a control around ``u0`` over which every limit holds.

    The limits are checked at ``u0`` and at ``scan`` points towards each end
    of the range; the first point that breaks a limit and the last that holds
    bracket the edge, which ``steps`` halvings refine. Both ends are
    refined together, ``per_round`` halvings in each call of ``margin_of``
    (every point they may visit at once), so the calls are few and the
    edges the same as halving one step per call.

    Parameters
    ----------
    margin_of : callable
        ``margin_of(k, u)`` -> smallest margin (fraction, positive inside) of
        candidates ``k`` (indices into ``u0``) at control values ``u``;
        NaN counts as broken. Each row's answer must not depend on the others.
        With ``refine="root"`` it may return every limit's margin instead,
        shape ``(limits, len(k))``.
    u0 : array_like
        The exact control of each candidate (inside its band).
    lo, hi : array_like
        The control's range (the rheostat's 0 and its maximum, say).
    per_round : int
        Halvings per call of ``margin_of`` (``2**per_round - 1`` points per edge).
    refine : str
        ``bisection`` (every halving, as above) or ``root``: the same edges
        wherever the limits break once inside an edge's bracket, from a few
        guided points per edge (:func:`_band_by_root`); fewer and smaller calls.
    m0 : array_like, optional
        The margins at ``u0`` where already known, shaped as ``margin_of``
        answers (one row per limit, or one row); ``refine="root"`` then does
        not evaluate them again.

    Returns
    -------
    (low, high) : ndarrays
        The band's ends; NaN where ``u0`` itself breaks a limit. An end equal
        to ``lo`` or ``hi`` means the limits hold up to the end of the range.
    """
    if refine == "root":
        return _band_by_root(margin_of, u0, lo, hi, scan, steps, per_round, m0)
    u0, lo, hi, live, frac = _band_start(u0, lo, hi, scan)
    n = u0.size
    # one call: the exact control and the scan towards both ends
    idx = [np.flatnonzero(live & (end != u0)) for end in (lo, hi)]
    pts = [u0[i, None] + (end[i] - u0[i])[:, None] * frac[None, :] for i, end in zip(idx, (lo, hi))]
    k0 = np.flatnonzero(live)
    if k0.size:
        m = margin_of(np.concatenate([k0, np.repeat(idx[0], scan), np.repeat(idx[1], scan)]),
                      np.concatenate([u0[k0], pts[0].ravel(), pts[1].ravel()]))
        m0 = np.full(n, np.nan)
        m0[k0] = m[:k0.size]
        live &= m0 >= 0
        m_scan = [m[k0.size: k0.size + pts[0].size].reshape(idx[0].size, scan),
                  m[k0.size + pts[0].size:].reshape(idx[1].size, scan)]
    else:
        m_scan = [np.zeros((0, scan)), np.zeros((0, scan))]
    # the bracket of each edge from the scan
    edges, brackets = [], []
    for end, i, p, ms in zip((lo, hi), idx, pts, m_scan):
        edge = np.where(live, end, np.nan)
        keep = live[i]
        i, p, ms = i[keep], p[keep], ms[keep]
        bad = ~(ms >= 0)
        any_bad = bad.any(axis=1)
        first = np.argmax(bad, axis=1)
        rows = np.arange(i.size)
        good = np.where(first > 0, p[rows, np.maximum(first - 1, 0)], u0[i])
        badu = p[rows, first]
        edges.append(edge)
        brackets.append((i[any_bad], good[any_bad], badu[any_bad]))
    # halve both ends' brackets together, several halvings per call
    kk = np.concatenate([brackets[0][0], brackets[1][0]])
    a = np.concatenate([brackets[0][1], brackets[1][1]])
    b = np.concatenate([brackets[0][2], brackets[1][2]])
    done = 0
    while done < steps and kk.size:
        depth = min(max(1, int(per_round)), steps - done)
        tree = bisection_tree(a, b, depth)
        width = tree.shape[1]
        holds = (margin_of(np.repeat(kk, width), tree.ravel()) >= 0).reshape(kk.size, width)
        a, b = walk_bisection_tree(a, b, holds, depth)
        done += depth
    n_lo = brackets[0][0].size
    edges[0][brackets[0][0]] = a[:n_lo]
    edges[1][brackets[1][0]] = a[n_lo:]
    low = np.fmin(edges[0], edges[1])
    high = np.fmax(edges[0], edges[1])
    return np.where(live, low, np.nan), np.where(live, high, np.nan)


# ---------------------------------------------------------------------------
# readings and band of one option
# ---------------------------------------------------------------------------

def weak_end_is_high(control):
    """True when a larger control value weakens the field (a rheostat); False for a field current."""
    return control in ("rheostat", "exciter")


def readings_and_band(control, u, field_cold, field_hot, band_u=None, band_field=None, rheostat_max_ohm=None,
                      band_field_cold=None, band_field_hot=None):
    """The ``readings`` and ``band`` of one option (or one welding dial row) for its JSON.

    Parameters
    ----------
    control : str
        ``rheostat`` (self-excited), ``exciter`` (separate excitation through
        a rheostat on the exciter), ``field-current`` (separate excitation
        set as a current) or ``none`` (series: no field control).
    u : float
        The exact control [ohm or A].
    field_cold, field_hot : float
        Field current at the setting point with cold and with hot windings [A].
    band_u : (float, float), optional
        The control's band (exact); None when the option breaks a limit.
    band_field : (float, float), optional
        Field current at the weak end of the band with hot windings and at
        the strong end with cold windings [A].
    rheostat_max_ohm : float, optional
        The rheostat's full resistance, for the position in per cent of travel.
    band_field_cold, band_field_hot : (float, float), optional
        Field current at the two ends of the band with cold and with hot
        windings [A]: the ammeter's window at each temperature. With the
        rheostat left as set the reading falls as the windings warm, so one
        window from the hot weak end to the cold strong end would let a cold
        reading sit where the hot one belongs.

    Returns
    -------
    (readings, band) : dicts, or (None, None) with no field control
        Readings are rounded to what can be set and lie inside the band,
        whose ends are rounded inward; ``band["control_exact"]`` keeps the
        exact interval of the control for a re-solve; ``band["field_current_a"]``
        spans both temperatures, ``band["field_current_cold_a"]`` and
        ``band["field_current_hot_a"]`` (where given) are the windows at each.
    """
    if control == "none" or not _finite(u):
        return None, None
    have_band = band_u is not None and all(_finite(x) for x in band_u)
    have_field_band = have_band and band_field is not None and all(_finite(x) for x in band_field)
    settable = True
    band = {"control_exact": [float(band_u[0]), float(band_u[1])]} if have_band else None
    # field current: one step for the readings and the band
    known = [x for x in (field_cold, field_hot) if _finite(x)]
    fc = {"cold": None, "hot": None}
    if have_field_band:
        lo_f, hi_f = float(min(band_field)), float(max(band_field))
        step = settable_step(max(abs(lo_f), abs(hi_f)), hi_f - lo_f)
        band["field_current_a"] = list(rounded_band(lo_f, hi_f, lo_f, step)[1])
        windows = {"cold": band_field_cold, "hot": band_field_hot}
        for name, val in (("cold", field_cold), ("hot", field_hot)):
            if not _finite(val):
                continue
            w = windows[name]
            if w is not None and all(_finite(x) for x in w):
                # each reading inside its own temperature's window, rounded with the band's one step
                fc[name], wb, _, ok = rounded_band(float(min(w)), float(max(w)), val, step)
                band[f"field_current_{name}_a"] = [wb[0], wb[1]]
            else:
                fc[name], _, _, ok = rounded_band(lo_f, hi_f, val, step)
            settable &= ok
    else:
        if known:
            step = settable_step(max(abs(x) for x in known))
            for name, val in (("cold", field_cold), ("hot", field_hot)):
                if _finite(val):
                    fc[name] = round_to(val, step)
        if band is not None:
            band["field_current_a"] = None
    readings = {"field_current_a": fc, "rheostat_ohm": None, "rheostat_travel_percent": None}
    if control in ("rheostat", "exciter"):
        if have_band:
            rv, rb, step, ok = rounded_band(band_u[0], band_u[1], u)
            settable &= ok
            band["rheostat_ohm"] = [rb[0], rb[1]]
        else:
            step = settable_step(u)
            rv = round_to(u, step)
        readings["rheostat_ohm"] = rv
        if rheostat_max_ohm:
            # whole per cent of travel unless the rheostat's step is finer than that
            pct_step = 1.0 if 100.0 * step / rheostat_max_ohm >= 1.0 else 0.1
            readings["rheostat_travel_percent"] = round_to(100.0 * rv / rheostat_max_ohm, pct_step)
    elif band is not None:
        band["rheostat_ohm"] = None
    readings["settable"] = bool(settable) if have_band else None
    return readings, band


def field_windows(band):
    """The field ammeter's windows of a ``band`` (as :func:`readings_and_band` gives it), for words.

    Returns
    -------
    list of (str, [float, float])
        ``[("cold", window), ("hot", window)]`` where the band has one per
        temperature and they differ; else ``[("", window)]`` with the one
        window over both; ``[]`` with none.
    """
    b = band or {}
    cold, hot = b.get("field_current_cold_a"), b.get("field_current_hot_a")
    if cold and hot and list(cold) != list(hot):
        return [("cold", list(cold)), ("hot", list(hot))]
    one = cold or b.get("field_current_a")
    return [("", list(one))] if one else []


def field_at_corners(values, n, corners, nominal):
    """Field currents per candidate at the nominal speed with the coldest and the hottest windings.

    Parameters
    ----------
    values : array_like
        Field current at every (candidate, corner) row, shape (n * nc,).
    corners : list of (speed, temperature)
    nominal : (speed, temperature)

    Returns
    -------
    (cold, hot) : ndarrays of shape (n,)
    """
    v = np.asarray(values, float).reshape(n, len(corners))
    temps = [c[1] for c in corners]
    speeds = [c[0] for c in corners]
    sp = min(speeds, key=lambda s: abs(s - nominal[0]))
    cold = min(k for k in range(len(corners)) if corners[k][0] == sp and temps[k] == min(temps))
    hot = max(k for k in range(len(corners)) if corners[k][0] == sp and temps[k] == max(temps))
    return v[:, cold], v[:, hot]


def no_load_field_current_a(circ, no_load_v):
    """Field current an ammeter shows at no load [A] for every candidate of ``circ``.

    Separate excitation: the exciter's (or the given) field current;
    self-excited: the no-load voltage over the field circuit's resistance;
    series: NaN (no shunt field).
    """
    v = np.asarray(no_load_v, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(circ.kind == 0, circ.x0, np.where(circ.kind == 1, v / circ.rf, np.nan))


def no_load_setting_field(space, base_idx, u):
    """Field current at no load [A] at every corner of candidates ``(base, control)``.

    Where the technician sets the field of a lighting set or a booster: the
    machine running, the load off.
    """
    from .circuit import no_load_voltages
    from .envelope import expand_candidates
    sub, _ = expand_candidates(space, base_idx, u)
    return no_load_field_current_a(sub, no_load_voltages(sub))


def limit_margin_fractions(limits):
    """Margin fraction of every limit, shape ``(limits, candidates)``; NaN counts as broken (-inf).

    Their smallest over the limits is :func:`supplycfg.envelope.smallest_margin_fraction`.
    """
    from .envelope import margin
    rows = []
    for name, (val, limit, kind, unit) in limits.items():
        _, f = margin(np.asarray(val, float), limit, kind, unit)
        rows.append(np.where(np.isnan(f), -np.inf, f))
    return np.vstack(rows)


def option_advice(space, evaluate, u, limits, setting_field, res=None, scan=BAND_SCAN_POINTS,
                  steps=BAND_BISECTION_STEPS, refine="bisection"):
    """Readings and band of every candidate of a search whose control is continuous.

    Parameters
    ----------
    space : envelope.Space
    evaluate : callable
        The job's ``evaluate(space, base_idx, u[, res])`` -> (limits, figures).
    u : ndarray
        The exact control of each base.
    limits : dict
        The limits at ``u`` (to skip candidates that break one).
    setting_field : callable
        ``setting_field(space, base_idx, u)`` -> field current [A] at the
        point where the technician sets the field, at every corner
        (shape (n * nc,)).
    res : dict, optional
        Solver resolution passed to ``evaluate``.
    refine : str
        How :func:`control_band` refines the band's edges (``bisection`` or
        ``root``; with ``root`` the margins at ``u`` are taken from ``limits``).

    Returns
    -------
    (list of dict, int)
        One ``{"readings", "band"}`` per base, and the candidate evaluations spent.
    """
    from .envelope import control_range
    nb = len(space.bases)
    bases = np.arange(nb)
    controls = [b[3] for b in space.bases]
    lo = np.array([control_range(space.machine, c)[0] for c in controls])
    hi = np.array([control_range(space.machine, c)[1] for c in controls])
    m_at_u = limit_margin_fractions(limits)
    ok = np.min(m_at_u, axis=0) >= 0
    u = np.asarray(u, float)
    uu = np.where(ok, u, np.nan)
    count = [0]

    def margin_of(k, val):
        count[0] += len(k) * space.nc
        lim = evaluate(space, bases[k], val, **({} if res is None else {"res": res}))[0]
        m = limit_margin_fractions(lim)
        # the guided search aims at each limit's own crossing; halving needs the smallest only
        return m if refine == "root" else np.min(m, axis=0)

    band_lo, band_hi = control_band(margin_of, uu, lo, hi, scan, steps, refine=refine,
                                    m0=m_at_u if refine == "root" else None)
    have = np.isfinite(band_lo)
    # field currents at the exact control and at both ends of the band (of the bases with one), in
    # one solve: each row's operating point is its own
    hv = np.flatnonzero(have)
    cold, hot = field_at_corners(setting_field(space, np.concatenate([bases, hv, hv]),
                                               np.concatenate([np.where(np.isfinite(u), u, lo), band_lo[hv],
                                                               band_hi[hv]])),
                                 nb + 2 * hv.size, space.corners, space.nominal)
    c0, h0 = cold[:nb], hot[:nb]
    cl, hl, ch, hh = (np.full(nb, np.nan) for _ in range(4))
    cl[hv], hl[hv] = cold[nb:nb + hv.size], hot[nb:nb + hv.size]
    ch[hv], hh[hv] = cold[nb + hv.size:], hot[nb + hv.size:]
    count[0] += (nb + 2 * hv.size) * space.nc
    out = []
    for i in range(nb):
        ctl = controls[i]
        band_u = band_field = None
        if have[i]:
            band_u = (band_lo[i], band_hi[i])
            # the weak end's reading with hot windings, the strong end's with cold ones
            band_field = (hh[i], cl[i]) if weak_end_is_high(ctl) else (hl[i], ch[i])
        r, b = readings_and_band(ctl, float(u[i]), float(c0[i]), float(h0[i]), band_u, band_field,
                                 space.machine.rheostat_max_ohm,
                                 *(((cl[i], ch[i]), (hl[i], hh[i])) if have[i] else ()))
        out.append({"readings": r, "band": b})
    return out, count[0]


# ---------------------------------------------------------------------------
# diverters and exciters
# ---------------------------------------------------------------------------

def preferred_resistance_ohm(ohm):
    """The E12 preferred value (IEC 60063) nearest to ``ohm`` on a log scale [ohm]."""
    return nearest_e12_ohm(float(ohm))


@functools.lru_cache(maxsize=4096)  # a search asks for the same few values again and again
def nearest_e12_ohm(x):
    """:func:`preferred_resistance_ohm` of a float ``x`` [ohm]."""
    if not x > 0:
        raise ValueError("a resistance must be positive")
    dec = math.floor(math.log10(x))
    cands = [m * 10.0 ** d for d in (dec - 1, dec, dec + 1) for m in E12]
    best = min(cands, key=lambda c: abs(math.log(c / x)))
    return float(f"{best:.2g}")


def power_rating_w(power_w):
    """The smallest power rating of the 1-2-5 sequence at least ``RESISTOR_DERATING`` x ``power_w`` [W]."""
    need = max(float(power_w), 0.0) * RESISTOR_DERATING
    if need <= 0:
        return 1.0
    dec = math.floor(math.log10(need))
    for d in (dec, dec + 1):
        for m in POWER_RATINGS_PER_DECADE:
            r = m * 10.0 ** d
            if r >= need * (1 - 1e-12):
                return float(f"{r:.3g}")
    return float(10.0 ** (dec + 1))


def diverter_rating(machine, series_turns, diverter_ohm, branch_current_a, temperature_c):
    """What a diverter carries and dissipates, and the resistor to buy or build.

    Parameters
    ----------
    machine : Machine
    series_turns : float
        Series turns per pole in use.
    diverter_ohm : float
        The diverter [ohm].
    branch_current_a : float
        Highest current of the series branch (winding and diverter together) [A].
    temperature_c : float
        Hottest winding temperature [degC]: the warmer winding pushes more
        current into the diverter.

    Returns
    -------
    dict or None
        ``resistance_ohm``, ``current_a``, ``power_w``, ``rating_w`` (the
        smallest 1-2-5 rating with 1.5 x headroom), ``share_percent`` of the
        branch current; None when no diverter is fitted.

    References
    ----------
    Current division between series winding and diverter: Kosow Ex 3-8,
    Theraja Ex 28.16 (seen).
    """
    if diverter_ohm is None or not series_turns:
        return None
    ct = float(copper_resistance_factor(temperature_c, machine.reference_temperature_c))
    rse = machine.series_field_resistance_ohm * ct * series_turns / machine.series_turns_per_pole
    share = rse / (rse + diverter_ohm)
    i = abs(float(branch_current_a)) * share if _finite(branch_current_a) else None
    p = None if i is None else i * i * diverter_ohm
    return {"resistance_ohm": float(diverter_ohm), "current_a": None if i is None else round(i, 1),
            "power_w": None if p is None else float(f"{p:.3g}"),
            "rating_w": None if p is None else power_rating_w(p), "share_percent": round(100.0 * share, 1)}


def field_resistance_ohm(machine, temperature_c):
    """The shunt winding's resistance at ``temperature_c`` [ohm] (copper law, design note)."""
    return machine.shunt_field_resistance_ohm * float(
        copper_resistance_factor(temperature_c, machine.reference_temperature_c))


def exciter_field_current_max_a(machine, temperature_c):
    """Largest field current the machine's exciter drives through the field at ``temperature_c`` [A].

    ``Vexc / Rsh(T)`` with the rheostat at zero; None when the machine file
    gives no exciter.
    """
    if machine.excitation_voltage_v is None:
        return None
    return machine.excitation_voltage_v / field_resistance_ohm(machine, temperature_c)


def exciter_supply(machine, control, u, hot_temperature_c):
    """The exciter supply a separately excited option needs, at the hottest winding.

    Parameters
    ----------
    control : str
        ``exciter`` (a rheostat ``u`` [ohm] on the machine's exciter) or
        ``field-current`` (``u`` the field current [A]).
    u : float
    hot_temperature_c : float
        Hottest winding of the envelope, where a supply drives the least.

    Returns
    -------
    dict or None
        ``voltage_v`` and ``power_w`` needed at the hot field,
        ``field_current_a``, ``available_voltage_v`` (None without an
        exciter) and ``reaches`` (the exciter drives that current).
    """
    if control not in ("exciter", "field-current") or not _finite(u):
        return None
    r_hot = field_resistance_ohm(machine, hot_temperature_c)
    ev = machine.excitation_voltage_v
    if control == "exciter":
        i = ev / (r_hot + u)
        v, p = ev, ev * i
    else:
        i = u
        v, p = i * r_hot, i * i * r_hot
    reaches = ev is not None and ev >= v * (1 - 1e-9)
    return {"voltage_v": float(f"{v:.3g}"), "power_w": float(f"{p:.3g}"), "field_current_a": float(f"{i:.3g}"),
            "available_voltage_v": ev, "reaches": bool(reaches)}
