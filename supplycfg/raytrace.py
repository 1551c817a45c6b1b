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
all rays and candidates at once; a second pass places the samples evenly
along the curve.
"""

import numpy as np

#: Rays of the first pass (at least; twice the samples asked for when more).
FIRST_RAYS = 161
#: Grid points along each ray before refining the crossing.
RAY_GRID = 257
#: Refinement steps of a crossing.
RAY_STEPS = 60
#: Rounds of rays added between neighbours that land far apart or turn sharply (each halves their angle).
REFINE_ROUNDS = 16
#: A turn sharper than this between consecutive samples (cosine of the angle; 30 degrees) gets more rays.
SHARP_TURN_COS = np.cos(np.radians(30.0))
#: Rays closer than this [rad] are not split further.
MIN_RAY_ANGLE = 1e-9


def _crossings(state_fn, refine, rows, theta, rmax, vs, is_):
    """Outermost fall of ``h`` through zero along each ray (per unit, ``vs`` and ``is_`` the bases);
    NaN where none. Also how many falls, and whether the fall is at the ray's end."""
    g = np.linspace(0.0, 1.0, RAY_GRID)[None, :]
    r = rmax[:, None] * g
    c, s = np.cos(theta)[:, None], np.sin(theta)[:, None]
    h = state_fn(rows[:, None], r * s * vs, r * c * is_)["h"]
    fall = (h[:, :-1] > 0) & (h[:, 1:] <= 0)
    count = fall.sum(axis=1)
    has = count > 0
    j = RAY_GRID - 2 - np.argmax(fall[:, ::-1], axis=1)
    k = np.arange(rows.size)
    a, b = r[k, j], r[k, j + 1]
    c1, s1 = c[:, 0], s[:, 0]

    def hr(rr):
        return state_fn(rows, rr * s1 * vs, rr * c1 * is_)["h"]

    root = np.where(has, refine(hr, a, b, h[k, j], RAY_STEPS), np.nan)
    at_edge = has & (j >= RAY_GRID - 3)
    return root, count, at_edge


def trace_on_rays(state_fn, refine, cand, vtop, imax, v_scale, i_scale, points):
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

    k1 = max(FIRST_RAYS, 2 * points)
    th = np.linspace(0.5 * np.pi, 0.0, k1)
    rows = np.repeat(cand, k1)
    theta = np.tile(th, nc)
    root, count, edge = _crossings(state_fn, refine, rows, theta, rays(theta, rows), v_scale, i_scale)
    # where neighbouring rays land far apart along the curve (a sharp breakdown point between
    # them), add rays between them until the samples are close enough
    for _ in range(REFINE_ROUNDS):
        order = np.lexsort((-theta, rows))
        rows, theta, root, count, edge = rows[order], theta[order], root[order], count[order], edge[order]
        il, v = root * np.cos(theta), root * np.sin(theta)
        same = (rows[1:] == rows[:-1]) & np.isfinite(root[1:]) & np.isfinite(root[:-1])
        dil, dv = np.diff(il), np.diff(v)
        step = np.where(same, np.hypot(dil, dv), 0.0)
        total = np.bincount(np.searchsorted(cand, rows[1:]), weights=step, minlength=nc)
        target = total[np.searchsorted(cand, rows[1:])] / (2.0 * points)
        # a sharp turn (the breakdown point) between three samples: its chords cut the corner
        with np.errstate(invalid="ignore", divide="ignore"):
            cos_turn = (dil[1:] * dil[:-1] + dv[1:] * dv[:-1]) / (step[1:] * step[:-1])
        turn = same[1:] & same[:-1] & (cos_turn < SHARP_TURN_COS)
        sharp = np.zeros(step.size, bool)
        sharp[:-1] |= turn
        sharp[1:] |= turn
        narrow = np.abs(np.diff(theta)) < MIN_RAY_ANGLE
        wide = np.flatnonzero(same & ((step > target) | sharp) & ~narrow)
        if not wide.size:
            break
        t_new = 0.5 * (theta[wide] + theta[wide + 1])
        r_new = rows[wide]
        x, c, e = _crossings(state_fn, refine, r_new, t_new, rays(t_new, r_new), v_scale, i_scale)
        rows = np.concatenate([rows, r_new]); theta = np.concatenate([theta, t_new])
        root = np.concatenate([root, x]); count = np.concatenate([count, c]); edge = np.concatenate([edge, e])
    order = np.lexsort((-theta, rows))
    rows, theta, root, count, edge = rows[order], theta[order], root[order], count[order], edge[order]
    states, notes = {}, {}
    sel_rows, sel_theta, owner = [], [], []
    for i in cand:
        sel = rows == i
        rr_all, th_i, cnt, edg = root[sel], theta[sel], count[sel], edge[sel]
        ok = np.isfinite(rr_all)
        note = []
        if not ok[0]:
            states[i], notes[i] = None, "no built-up no-load point on the searched span"
            continue
        # the curve from no load along consecutive rays that meet it
        last = int(np.argmin(ok)) - 1 if not ok.all() else ok.size - 1
        if np.any(cnt[:last + 1] > 1):
            note.append("a ray from the origin meets this curve more than once: its outer boundary is shown")
        if edg[last] or last < ok.size - 1:
            note.append("the curve reaches the searched current span")
        rr, tt = rr_all[:last + 1], th_i[:last + 1]
        il = rr * np.cos(tt); v = rr * np.sin(tt)
        arc = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(il), np.diff(v)))])
        if arc[-1] <= 0:
            t_new = np.full(points, tt[0])
        else:
            t_new = np.interp(np.linspace(0.0, arc[-1], points), arc, tt)
        sel_rows.append(np.full(points, i)); sel_theta.append(t_new); owner.append(i)
        notes[i] = "; ".join(note)
    if sel_rows:
        rows2 = np.concatenate(sel_rows); th2 = np.concatenate(sel_theta)
        root2, _, _ = _crossings(state_fn, refine, rows2, th2, rays(th2, rows2), v_scale, i_scale)
        # a ray of the second pass can only miss where the first found the curve at its edge
        v = root2 * np.sin(th2) * v_scale
        il = root2 * np.cos(th2) * i_scale
        for k, i in enumerate(owner):
            sl = slice(k * points, (k + 1) * points)
            good = np.isfinite(v[sl])
            st = state_fn(rows2[sl][good], v[sl][good], il[sl][good])
            states[i] = st
    return states, notes



#: Steps of the homotopy from the fixed-speed curve to the curve on the drive.
HOMOTOPY_STEPS = 12
#: Half-width of the search along each point's normal, per unit of rated voltage and current.
NORMAL_WINDOW = 0.25
#: Grid along the normal before refining.
NORMAL_GRID = 51


def follow_along_normals(state_fn, refine, curves, v_scale, i_scale, steps=HOMOTOPY_STEPS):
    """Carry sampled curves from ``lam = 0`` to ``lam = 1`` of a family ``h_lam(V, IL) = 0``.

    For curves that are not star-shaped from the origin (a ray meets them
    twice, or they end at the origin because the machine has no residual
    voltage) the samples of the fixed-speed curve (``lam = 0``, walked
    exactly) are moved, in ``steps`` small steps of ``lam``, along the
    normal of the current polyline to the nearest root of the next member.
    Every point of every curve moves at once.

    Parameters
    ----------
    state_fn : callable
        ``state_fn(lam, rows, v, il)`` -> dict with the residual ``h`` [V].
    refine : callable
        ``refine(f, a, b, f(a), steps)``: a vectorised bracketing root refiner.
    curves : dict
        ``{row: (il, v)}`` samples in order along each curve [A], [V].

    Returns
    -------
    dict
        ``{row: (il, v, lost)}`` at ``lam = 1``; ``lost`` counts samples
        whose root could not be followed (dropped).
    """
    rows_l, pts, owner = [], [], []
    for i, (il, v) in curves.items():
        il, v = np.asarray(il, float), np.asarray(v, float)
        rows_l.append(np.full(il.size, i)); owner.append((i, il.size))
        pts.append(np.c_[il / i_scale, v / v_scale])
    if not pts:
        return {}
    rows = np.concatenate(rows_l)
    p = np.concatenate(pts)
    alive = np.isfinite(p).all(axis=1)
    t = np.linspace(-NORMAL_WINDOW, NORMAL_WINDOW, NORMAL_GRID)
    for j in range(1, steps + 1):
        lam = j / steps
        nrm = np.zeros_like(p)
        start = 0
        for i, n in owner:
            q = p[start:start + n]
            ok = alive[start:start + n]
            tan = np.zeros_like(q)
            if ok.sum() >= 2:
                idx = np.flatnonzero(ok)
                tan[idx] = np.gradient(q[idx], axis=0)
            nrm[start:start + n] = np.c_[-tan[:, 1], tan[:, 0]]
            start += n
        length = np.hypot(nrm[:, 0], nrm[:, 1])
        nrm = np.where(length[:, None] > 0, nrm / np.where(length > 0, length, 1.0)[:, None], [0.0, 1.0])
        live = np.flatnonzero(alive)
        if not live.size:
            break
        q = p[live][:, None, :] + t[None, :, None] * nrm[live][:, None, :]
        h = state_fn(lam, rows[live][:, None], q[..., 1] * v_scale, q[..., 0] * i_scale)["h"]
        change = np.signbit(h[:, :-1]) != np.signbit(h[:, 1:])
        dist = np.where(change, np.abs(0.5 * (t[:-1] + t[1:]))[None, :], np.inf)
        c = np.argmin(dist, axis=1)
        found = np.isfinite(dist[np.arange(live.size), c])
        r_live, n_live, p_live = rows[live], nrm[live], p[live]

        def hr(tt):
            qq = p_live + tt[:, None] * n_live
            return state_fn(lam, r_live, qq[:, 1] * v_scale, qq[:, 0] * i_scale)["h"]

        a, b = t[c], t[c + 1]
        root = refine(hr, a, b, h[np.arange(live.size), c], 40)
        p[live] = np.where(found[:, None], p_live + root[:, None] * n_live, np.nan)
        alive[live] = found
    out = {}
    start = 0
    for i, n in owner:
        q, ok = p[start:start + n], alive[start:start + n]
        out[i] = (q[ok, 0] * i_scale, q[ok, 1] * v_scale, int(n - ok.sum()))
        start += n
    return out
