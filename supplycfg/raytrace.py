"""External characteristics traced along rays from the origin of the (load current, voltage) plane.

When the drive's speed follows the load, a self-excited machine's circuit no
longer separates into ``N(x) = L(Ia)`` (the speed depends on both), so its
external characteristic is traced another way. The curve is the outer
boundary of the region where the circuit residual ``h(V, IL)`` is positive:
at the origin the residual magnetism makes ``h > 0``, and far out the drops
make it negative. Along a ray from the origin at angle ``theta`` (in
per-unit voltage and current) the characteristic is the outermost fall of
``h`` through zero; as ``theta`` runs from 90 degrees (no load) to 0 (short
circuit) the point runs along the whole curve, through the turn-back, as
long as every ray meets it once (the curve is star-shaped from the origin,
as shunt and compound characteristics are). A ray that meets it more than
once is reported. Every ray is bracketed on a grid and refined by bisection,
all rays and candidates at once; a second pass places the samples about evenly
along the curve.
"""

import numpy as np

#: A curve's note where the machine has no no-load point to start from.
NO_BUILD_UP_NOTE = "no built-up no-load point on the searched span"
#: Rays of the first pass (at least; as many as the samples asked for when more). The second pass
#: spaces its samples by the first pass's polyline: with as many rays as samples the spacing stays
#: within about twice its median (measured on the charging set's driven curves), and the first pass,
#: a grid along every ray, costs half what twice as many rays did.
FIRST_RAYS = 161
#: Grid points along each ray before refining the crossing.
RAY_GRID = 257
#: Refinement steps of a crossing.
RAY_STEPS = 60
#: Second pass: grid points across the stretch of a ray between its two first-pass neighbours'
#: crossings, widened by :data:`LOCAL_MARGIN` of them on each side.
LOCAL_GRID = 9
LOCAL_MARGIN = 0.05


def _crossings(residual_fn, refine, rows, theta, rmax, vs, is_):
    """Outermost fall of ``h`` through zero along each ray; NaN where none. Also how many falls."""
    g = np.linspace(0.0, 1.0, RAY_GRID)[None, :]
    r = rmax[:, None] * g
    c, s = np.cos(theta)[:, None], np.sin(theta)[:, None]
    h = residual_fn(rows[:, None], r * s * vs[:, None], r * c * is_[:, None])
    fall = (h[:, :-1] > 0) & (h[:, 1:] <= 0)
    count = fall.sum(axis=1)
    has = count > 0
    j = RAY_GRID - 2 - np.argmax(fall[:, ::-1], axis=1)
    k = np.arange(rows.size)
    a, b = r[k, j], r[k, j + 1]
    c1, s1 = c[:, 0], s[:, 0]

    def hr(rr):
        return residual_fn(rows, rr * s1 * vs, rr * c1 * is_)

    root = np.where(has, refine(hr, a, b, h[k, j], RAY_STEPS), np.nan)
    at_edge = has & (j >= RAY_GRID - 3)
    return root, count, at_edge


def crossings_near(residual_fn, refine, rows, theta, lo, hi, vs, is_):
    """The fall of ``h`` through zero on ``[lo, hi]`` along each ray, where it is the only one there.

    Returns the root and where it holds: ``h(lo) > 0``, ``h(hi) <= 0`` and
    one fall on the grid between; the other rows are NaN and not found.
    """
    g = np.linspace(0.0, 1.0, LOCAL_GRID)[None, :]
    r = lo[:, None] + (hi - lo)[:, None] * g
    c, s = np.cos(theta), np.sin(theta)
    h = residual_fn(rows[:, None], r * (s * vs)[:, None], r * (c * is_)[:, None])
    fall = (h[:, :-1] > 0) & (h[:, 1:] <= 0)
    found = (h[:, 0] > 0) & (h[:, -1] <= 0) & (fall.sum(axis=1) == 1)
    j = np.argmax(fall, axis=1)
    k = np.arange(rows.size)
    root = np.full(rows.size, np.nan)
    if found.any():
        f = np.flatnonzero(found)
        rf, tf = rows[f], theta[f]
        cf, sf = np.cos(tf), np.sin(tf)

        def hr(rr):
            return residual_fn(rf, rr * sf * vs[f], rr * cf * is_[f])

        root[f] = refine(hr, r[f, j[f]], r[f, j[f] + 1], h[k[f], j[f]], RAY_STEPS)
    return root, found


def trace_on_rays(state_fn, refine, cand, vtop, imax, v_scale, i_scale, points, residual_fn=None):
    """Sample the characteristics of candidates ``cand`` from no load to short circuit.

    Parameters
    ----------
    state_fn : callable
        ``state_fn(rows, v, il)`` -> dict with the circuit residual ``h`` [V]
        and the curve-point keys, broadcasting over arrays of rows.
    refine : callable
        ``refine(f, a, b, f(a), steps)``: a vectorised bracketing root refiner.
    cand : array of int
        Candidate rows.
    vtop : array
        Highest terminal voltage worth searching per candidate [V].
    imax : float
        Largest load current searched [A].
    v_scale, i_scale : float
        Per-unit bases of voltage and current (rated values).
    points : int
        Samples per curve.
    residual_fn : callable, optional
        ``residual_fn(rows, v, il)`` -> ``h`` alone, as ``state_fn`` gives it
        (the crossings need nothing else); default taken from ``state_fn``.

    Returns
    -------
    (states, notes)
        ``states[i]`` a dict of arrays along the curve (None where no curve
        was found) and ``notes[i]`` a string.
    """
    cand = np.asarray(cand, int)
    nc = cand.size
    vt_of = np.zeros(int(cand.max()) + 1 if nc else 0)
    vt_of[cand] = np.asarray(vtop, float)

    def rays(theta_rows, rows):
        """Length of each ray inside the searched box (per unit)."""
        s, c = np.sin(theta_rows), np.cos(theta_rows)
        rv = np.where(s > 1e-12, vt_of[rows] / (v_scale * np.maximum(s, 1e-12)), np.inf)
        ri = np.where(c > 1e-12, imax / (i_scale * np.maximum(c, 1e-12)), np.inf)
        return np.minimum(rv, ri)

    k1 = max(FIRST_RAYS, points)
    th = np.linspace(0.5 * np.pi, 0.0, k1)
    rows = np.repeat(cand, k1)
    theta = np.tile(th, nc)
    vs = np.full(rows.size, v_scale); is_ = np.full(rows.size, i_scale)
    if residual_fn is None:
        residual_fn = lambda rows, v, il: state_fn(rows, v, il)["h"]  # noqa: E731
    root, count, edge = _crossings(residual_fn, refine, rows, theta, rays(theta, rows), vs, is_)
    root = root.reshape(nc, k1); count = count.reshape(nc, k1); edge = edge.reshape(nc, k1)
    states, notes = {}, {}
    sel_rows, sel_theta, owner = [], [], []
    sel_near, sel_lo, sel_hi = [], [], []
    for r, i in enumerate(cand):
        ok = np.isfinite(root[r])
        note = []
        if not ok[0]:
            states[i], notes[i] = None, NO_BUILD_UP_NOTE
            continue
        # the curve from no load along consecutive rays that meet it
        last = int(np.argmin(ok)) - 1 if not ok.all() else k1 - 1
        if np.any(count[r, :last + 1] > 1):
            note.append("a ray from the origin meets this curve more than once: its outer boundary is shown")
        if edge[r, last] or last < k1 - 1:
            note.append("the curve reaches the searched current span")
        rr, tt = root[r, :last + 1], th[:last + 1]
        il = rr * np.cos(tt); v = rr * np.sin(tt)
        arc = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(il), np.diff(v)))])
        if arc[-1] <= 0:
            t_new = np.full(points, tt[0])
        else:
            t_new = np.interp(np.linspace(0.0, arc[-1], points), arc, tt)
        # where both first-pass neighbours met the curve once, inside the box, the new ray's crossing
        # lies between theirs (the curve is continuous): look there first
        if last > 0:
            tr, rr_up = tt[::-1], rr[::-1]
            one = (count[r, :last + 1] == 1)[::-1] & ~edge[r, :last + 1][::-1]
            k = np.clip(np.searchsorted(tr, t_new), 1, last)
            near = one[k - 1] & one[k]
            lo_r = np.minimum(rr_up[k - 1], rr_up[k]) * (1.0 - LOCAL_MARGIN)
            hi_r = np.maximum(rr_up[k - 1], rr_up[k]) * (1.0 + LOCAL_MARGIN)
        else:
            near = np.zeros(points, bool); lo_r = hi_r = np.zeros(points)
        sel_rows.append(np.full(points, i)); sel_theta.append(t_new); owner.append(i)
        sel_near.append(near); sel_lo.append(lo_r); sel_hi.append(hi_r)
        notes[i] = "; ".join(note)
    if sel_rows:
        rows2 = np.concatenate(sel_rows); th2 = np.concatenate(sel_theta)
        vs2 = np.full(rows2.size, v_scale); is2 = np.full(rows2.size, i_scale)
        rmax2 = rays(th2, rows2)
        near = np.concatenate(sel_near)
        root2 = np.full(rows2.size, np.nan)
        if near.any():
            nn = np.flatnonzero(near)
            hi2 = np.minimum(np.concatenate(sel_hi)[nn], rmax2[nn])
            got, found = crossings_near(residual_fn, refine, rows2[nn], th2[nn], np.concatenate(sel_lo)[nn], hi2,
                                         vs2[nn], is2[nn])
            root2[nn[found]] = got[found]
            near[nn[~found]] = False
        far = np.flatnonzero(~near)
        if far.size:
            root2[far], _, _ = _crossings(residual_fn, refine, rows2[far], th2[far], rmax2[far], vs2[far], is2[far])
        # a ray of the second pass can only miss where the first found the curve at its edge
        v = root2 * np.sin(th2) * v_scale
        il = root2 * np.cos(th2) * i_scale
        for k, i in enumerate(owner):
            sl = slice(k * points, (k + 1) * points)
            good = np.isfinite(v[sl])
            st = state_fn(rows2[sl][good], v[sl][good], il[sl][good])
            states[i] = st
    return states, notes

