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


def _decimals(step):
    return max(0, -int(math.floor(math.log10(step) + 1e-9)))


def round_to(value, step, how="nearest"):
    """``value`` rounded to a multiple of ``step``: ``nearest``, ``up`` or ``down``."""
    k = float(value) / step
    k = {"nearest": round(k), "up": math.ceil(k - 1e-9), "down": math.floor(k + 1e-9)}[how]
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


def control_band(margin_of, u0, lo, hi, scan=BAND_SCAN_POINTS, steps=BAND_BISECTION_STEPS,
                 per_round=BAND_HALVINGS_PER_ROUND):
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
    u0 : array_like
        The exact control of each candidate (inside its band).
    lo, hi : array_like
        The control's range (the rheostat's 0 and its maximum, say).
    per_round : int
        Halvings per call of ``margin_of`` (``2**per_round - 1`` points per edge).

    Returns
    -------
    (low, high) : ndarrays
        The band's ends; NaN where ``u0`` itself breaks a limit. An end equal
        to ``lo`` or ``hi`` means the limits hold up to the end of the range.
    """
    u0 = np.asarray(u0, float)
    n = u0.size
    lo = np.broadcast_to(np.asarray(lo, float), (n,))
    hi = np.broadcast_to(np.asarray(hi, float), (n,))
    live = np.isfinite(u0) & np.isfinite(lo) & np.isfinite(hi)
    frac = np.arange(1, scan + 1) / scan
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


def readings_and_band(control, u, field_cold, field_hot, band_u=None, band_field=None, rheostat_max_ohm=None):
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

    Returns
    -------
    (readings, band) : dicts, or (None, None) with no field control
        Readings are rounded to what can be set and lie inside the band,
        whose ends are rounded inward; ``band["control_exact"]`` keeps the
        exact interval of the control for a re-solve.
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
        for name, val in (("cold", field_cold), ("hot", field_hot)):
            if _finite(val):
                fc[name], fb, _, ok = rounded_band(lo_f, hi_f, val, step)
                settable &= ok
        band["field_current_a"] = list(rounded_band(lo_f, hi_f, lo_f, step)[1])
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


def option_advice(space, evaluate, u, limits, setting_field, res=None, scan=BAND_SCAN_POINTS,
                  steps=BAND_BISECTION_STEPS):
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

    Returns
    -------
    (list of dict, int)
        One ``{"readings", "band"}`` per base, and the candidate evaluations spent.
    """
    from .envelope import control_range, smallest_margin_fraction
    nb = len(space.bases)
    bases = np.arange(nb)
    controls = [b[3] for b in space.bases]
    lo = np.array([control_range(space.machine, c)[0] for c in controls])
    hi = np.array([control_range(space.machine, c)[1] for c in controls])
    ok = smallest_margin_fraction(limits) >= 0
    u = np.asarray(u, float)
    uu = np.where(ok, u, np.nan)
    count = [0]

    def margin_of(k, val):
        count[0] += len(k) * space.nc
        lim = evaluate(space, bases[k], val, **({} if res is None else {"res": res}))[0]
        return smallest_margin_fraction(lim)

    band_lo, band_hi = control_band(margin_of, uu, lo, hi, scan, steps)
    have = np.isfinite(band_lo)
    # field currents at the exact control and at both ends of the band
    c0, h0 = field_at_corners(setting_field(space, bases, np.where(np.isfinite(u), u, lo)), nb,
                              space.corners, space.nominal)
    cl, hl = field_at_corners(setting_field(space, bases, np.where(have, band_lo, lo)), nb,
                              space.corners, space.nominal)
    ch, hh = field_at_corners(setting_field(space, bases, np.where(have, band_hi, lo)), nb,
                              space.corners, space.nominal)
    count[0] += 3 * nb * space.nc
    out = []
    for i in range(nb):
        ctl = controls[i]
        band_u = band_field = None
        if have[i]:
            band_u = (band_lo[i], band_hi[i])
            # the weak end's reading with hot windings, the strong end's with cold ones
            band_field = (hh[i], cl[i]) if weak_end_is_high(ctl) else (hl[i], ch[i])
        r, b = readings_and_band(ctl, float(u[i]), float(c0[i]), float(h0[i]), band_u, band_field,
                                 space.machine.rheostat_max_ohm)
        out.append({"readings": r, "band": b})
    return out, count[0]


# ---------------------------------------------------------------------------
# diverters and exciters
# ---------------------------------------------------------------------------

def preferred_resistance_ohm(ohm):
    """The E12 preferred value (IEC 60063) nearest to ``ohm`` on a log scale [ohm]."""
    x = float(ohm)
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
