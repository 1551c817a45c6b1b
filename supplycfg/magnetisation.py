"""Magnetisation: the open-circuit characteristic, armature reaction, EMF equation.

All functions take and return numpy arrays; the net magnetomotive force of
every winding is read on the open-circuit characteristic (OCC) as an
equivalent shunt-field current ``x = F / N_sh`` [A] (the equivalent-field-
current method; S. J. Chapman, *Electric Machinery Fundamentals*, DC
generator chapter, from memory).
"""

from dataclasses import dataclass

import numpy as np

#: Inferred absolute zero of resistance for annealed copper [degC]
#: (IEC 60228: alpha20 = 0.00393 /K, i.e. 1/alpha20 - 20 = 234.5).
COPPER_INFERRED_ZERO_C = 234.5


def copper_resistance_factor(temperature_c, reference_temperature_c):
    """Ratio ``R(T) / R(T_ref)`` of a copper winding.

    Parameters
    ----------
    temperature_c, reference_temperature_c : float or array [degC]

    Returns
    -------
    ndarray

    References
    ----------
    IEC 60228 (copper, alpha20 = 0.00393 /K): ``R_T = R_ref (234.5 + T)/(234.5 + T_ref)``.
    """
    t = np.asarray(temperature_c, dtype=float)
    return (COPPER_INFERRED_ZERO_C + t) / (COPPER_INFERRED_ZERO_C + reference_temperature_c)


def emf_from_flux(poles, conductors, parallel_paths, speed_rpm, flux_wb):
    """Generated EMF of a DC armature, ``E = P Phi N Z / (60 A)``.

    Parameters
    ----------
    poles : int
        Number of poles P.
    conductors : int
        Total armature conductors Z.
    parallel_paths : int
        A (= P for a simplex lap winding, 2 for a simplex wave winding).
    speed_rpm : float or array [rpm]
    flux_wb : float or array
        Useful flux per pole [Wb].

    Returns
    -------
    ndarray
        EMF [V].

    References
    ----------
    The EMF equation of the DC machine, e.g. Bakshi & Bakshi, *DC Machines and
    Synchronous Machines*, Ex 1.1; J. Bird, *Electrical Circuit Theory and Technology*, Ch 21.
    """
    return poles * np.asarray(flux_wb, float) * np.asarray(speed_rpm, float) * conductors / (60.0 * parallel_paths)


def flux_from_emf(poles, conductors, parallel_paths, speed_rpm, emf_v):
    """Flux per pole [Wb] that gives ``emf_v`` [V] at ``speed_rpm``: the EMF equation inverted."""
    return np.asarray(emf_v, float) * 60.0 * parallel_paths / (poles * conductors * np.asarray(speed_rpm, float))


def _pchip_end_slope(h0, h1, m0, m1):
    """One-sided three-point end slope, limited to keep the shape (Moler, pchiptx.m)."""
    d = ((2 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
    if np.sign(d) != np.sign(m0):
        return 0.0
    if np.sign(m0) != np.sign(m1) and abs(d) > 3 * abs(m0):
        return 3 * m0
    return d


def pchip_slopes(x, y):
    """Knot slopes dy/dx of the monotone piecewise-cubic Hermite interpolant.

    Interior slopes are the weighted harmonic mean of the neighbouring chords
    (zero where the chords differ in sign or one is flat); the end slopes are
    one-sided three-point estimates limited to keep the shape. The same
    slopes as ``scipy.interpolate.PchipInterpolator``, without importing
    scipy (about half a second of every command's start).

    Parameters
    ----------
    x : array_like
        Knots, strictly increasing.
    y : array_like
        Values at the knots.

    Returns
    -------
    ndarray
        Slopes at the knots [unit of y per unit of x].

    References
    ----------
    F. N. Fritsch and R. E. Carlson, "Monotone piecewise cubic
    interpolation", SIAM J. Numer. Anal. 17 (1980) 238-246; F. N. Fritsch and
    J. Butland, "A method for constructing local monotone piecewise cubic
    interpolants", SIAM J. Sci. Stat. Comput. 5 (1984) 300-304; C. Moler,
    *Numerical Computing with MATLAB*, section 3.6 (end slopes).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    h = np.diff(x)
    m = np.diff(y) / h
    if y.size == 2:
        return np.array([m[0], m[0]])
    d = np.zeros_like(y)
    w1 = 2 * h[1:] + h[:-1]
    w2 = h[1:] + 2 * h[:-1]
    flat = (np.sign(m[1:]) != np.sign(m[:-1])) | (m[1:] == 0) | (m[:-1] == 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        whmean = (w1 / m[:-1] + w2 / m[1:]) / (w1 + w2)
    d[1:-1] = np.where(flat, 0.0, 1.0 / np.where(flat, 1.0, whmean))
    d[0] = _pchip_end_slope(h[0], h[1], m[0], m[1])
    d[-1] = _pchip_end_slope(h[-1], h[-2], m[-1], m[-2])
    return d


def hermite_coefficients(x, y, slopes):
    """Cubic coefficients per interval, highest power first, in ``t = x - x_k``.

    Returns a ``(4, len(x) - 1)`` array: ``y = ((c0 t + c1) t + c2) t + c3``
    on interval ``k`` (the layout of scipy's ``PPoly``).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    dx = np.diff(x)
    chord = np.diff(y) / dx
    t = (slopes[:-1] + slopes[1:] - 2 * chord) / dx
    return np.stack((t / dx, (chord - slopes[:-1]) / dx - t, slopes[:-1], y[:-1]))


#: Up to this many knots an interval is found by counting the knots at or below each value
#: (a pass per knot, each cheaper than a binary search's step per value); beyond, by binary search.
COUNT_KNOTS_UP_TO = 24


def interval_index(knots, values):
    """Number of ``knots`` (sorted) at or below each value: ``searchsorted(knots, values, "right")``.

    Found by counting for a few knots (all of them less those above: a NaN, above none, goes
    last as in a binary search).
    """
    values = np.asarray(values, float)
    # (a count costs about a microsecond per knot besides its passes: small arrays search)
    if knots.size > COUNT_KNOTS_UP_TO or values.size < 160 * knots.size:
        return np.searchsorted(knots, values, side="right")
    idx = np.full(values.shape, knots.size, np.uint8)
    for k in knots:
        np.subtract(idx, values < k, out=idx, casting="unsafe")
    return idx


@dataclass(frozen=True)
class OpenCircuitCurve:
    """The OCC at its test speed, evaluable at any equivalent field current.

    Interpolation is shape preserving (PCHIP, Fritsch & Carlson 1980) or
    linear; beyond the last point the chord of the last two points continues
    it; below zero the flux reverses, ``E(-x) = 2 E_r - E(x)``.
    """

    field_current_a: np.ndarray
    emf_v: np.ndarray
    speed_rpm: float
    interpolation: str = "monotone-cubic"

    @classmethod
    def from_machine(cls, m):
        return cls(np.asarray(m.occ_field_current_a, float), np.asarray(m.occ_emf_v, float),
                   float(m.occ_speed_rpm), m.occ_interpolation)

    def __post_init__(self):
        x, y = self.field_current_a, self.emf_v
        object.__setattr__(self, "_xl", float(x[-1]))
        object.__setattr__(self, "_yl", float(y[-1]))
        object.__setattr__(self, "_chord", float((y[-1] - y[-2]) / (x[-1] - x[-2])))
        if self.interpolation == "linear":
            object.__setattr__(self, "_cubic", False)
        else:
            c = hermite_coefficients(x, y, pchip_slopes(x, y))
            object.__setattr__(self, "_cubic", True)
            # cubic coefficients per interval, highest power first
            object.__setattr__(self, "_ct", tuple(np.ascontiguousarray(row) for row in c))
        object.__setattr__(self, "_slopes", np.diff(y) / np.diff(x))
        # interval starts, then the chord's extension as one more interval from the last point: it takes
        # over just past it (the next float up), where the curve itself ends
        object.__setattr__(self, "_inner", np.append(x[1:-1], np.nextafter(self._xl, np.inf)))
        object.__setattr__(self, "_start", np.append(x[:-1], self._xl))
        object.__setattr__(self, "_slopes_ext", np.append(self._slopes, self._chord))
        object.__setattr__(self, "_emf_ext", np.append(y[:-1], self._yl))
        if self._cubic:
            # rows (c0, c1, c2, c3) per interval; the extension is the line yl + chord t
            ext = np.array([[0.0], [0.0], [self._chord], [self._yl]])
            object.__setattr__(self, "_table", tuple(np.ascontiguousarray(r) for r in np.hstack([np.array(self._ct), ext])))
            # one row per interval (start, c0..c3): one gather reads all of an interval
            packed = np.stack([self._start, *self._table], axis=1)
        else:
            packed = np.stack([self._start, self._slopes_ext, self._emf_ext], axis=1)
        object.__setattr__(self, "_packed", np.ascontiguousarray(packed))

    @property
    def residual_v(self):
        return float(self.emf_v[0])

    @property
    def last_field_current_a(self):
        return self._xl

    def _base(self, ax, slope=True):
        """EMF and (if asked) slope for ``ax >= 0`` at the test speed.

        Beyond the last point the chord continues the curve: it is stored as
        one more interval (starting just past the last point), so one lookup
        serves both and no second pass picks the extension out.
        """
        inner = self._inner
        if inner.size > COUNT_KNOTS_UP_TO or ax.size < 160 * inner.size:
            idx = np.searchsorted(inner, ax, side="right")  # (small arrays: fewer calls)
        else:
            idx = interval_index(inner, ax)
        if idx.ndim:
            row = self._packed.take(idx, axis=0)
            start = row[..., 0]
        else:
            row = self._packed[idx]
            start = row[0]
        t = ax - start
        if not self._cubic:
            de = row[..., 1]
            e = row[..., 2] + de * t
            return e, de
        a0, a1, a2, a3 = row[..., 1], row[..., 2], row[..., 3], row[..., 4]
        e = ((a0 * t + a1) * t + a2) * t + a3
        de = ((3 * a0 * t + 2 * a1) * t + a2) if slope else None
        return e, de

    def emf(self, x, with_slope=False):
        """EMF [V] at the test speed for equivalent field current ``x`` [A].

        Parameters
        ----------
        x : array_like [A]
        with_slope : bool
            Also return dE/dx [V/A].
        """
        x = np.asarray(x, dtype=float)
        e, de = self._base(np.abs(x), with_slope)
        if x.size and not np.minimum.reduce(x, axis=None) >= 0:  # (a NaN takes this way, as in the where)
            e = np.where(x >= 0, e, 2.0 * self.residual_v - e)
        else:
            e = np.asarray(e)
        return (e, de) if with_slope else e

    def extrapolated(self, x):
        """True where ``x`` lies beyond the measured curve (either sign)."""
        return np.abs(np.asarray(x, float)) > self._xl * (1 + 1e-9)

    def air_gap_slope(self):
        """Slope of the air-gap line [V/A] at the test speed: the steepest chord between neighbouring
        measured points, leaving out a chord more than :data:`AIR_GAP_SPIKE_FACTOR` times as steep as
        each of its neighbours.

        Such a chord is a reading error, not the iron: two readings taken close
        together, one of them a few volts off, make a chord far steeper than
        the curve on either side, while a curve's slope changes smoothly.
        """
        s = np.diff(self.emf_v) / np.diff(self.field_current_a)
        if s.size < 2:
            return float(s.max())
        # the steeper neighbour of each chord (an end chord has one)
        nb = np.maximum(np.concatenate([[-np.inf], s[:-1]]), np.concatenate([s[1:], [-np.inf]]))
        keep = ~(s > AIR_GAP_SPIKE_FACTOR * np.maximum(nb, 0.0))
        return float(s[keep].max() if keep.any() else s.max())

    def knots(self):
        """Measured field currents and their mirrors, for exact grids [A]."""
        x = self.field_current_a
        return np.concatenate([-x[::-1], x[1:]])


#: A chord this many times as steep as both its neighbours does not set the air-gap line: a measured curve's
#: slope changes by some per cent from one step to the next, while one reading 3 V off (a class-1
#: voltmeter's error on its 300 V range, IEC 60051-2 classes, from memory) over a 0.01 A step makes a chord
#: of 300 V/A between chords of 215 and 158 V/A (a reviewer's variant of the lighting set).
AIR_GAP_SPIKE_FACTOR = 1.25

#: Below this many values ``np.minimum(np.maximum(...))`` beats ``np.clip`` (whose Python layers
#: cost more than a second pass over a small array).
CLIP_UFUNC_BELOW = 4096


def bounded(x, lo, hi):
    """Array ``x`` held within ``[lo, hi]``, NaN kept: ``np.clip`` for large arrays, two ufuncs for
    small ones (the same values either way)."""
    if x.size < CLIP_UFUNC_BELOW:
        return np.minimum(np.maximum(x, lo), hi)
    return np.clip(x, lo, hi)


def field_after_armature_reaction(winding_field_a, reaction_field_a):
    """Net equivalent field current [A] once armature reaction has weakened the windings' field.

    ``x = x_w - sign(x_w) min(F_ar / N_sh, |x_w|)``: the demagnetising mmf
    reduces the size of the windings' net mmf whichever way it points and
    can at most bring it to zero, never reverse it (it acts through
    saturation and cross-magnetisation, which shrink the flux, not turn it
    over). Continuous through ``x_w = 0``.

    Parameters
    ----------
    winding_field_a : array_like
        Net mmf per pole of the windings ``x_w`` (shunt +- series) as an
        equivalent shunt-field current [A].
    reaction_field_a : array_like
        Demagnetising mmf per pole ``F_ar(|Ia|) / N_sh`` [A], >= 0.

    Returns
    -------
    ndarray
        ``x`` [A], of the sign of ``x_w`` or zero.

    References
    ----------
    Equivalent-field-current method (Chapman, DC generator chapter, from
    memory); the rule for its sign is the project's design note.
    """
    xw = np.asarray(winding_field_a, float)
    r = np.asarray(reaction_field_a, float)
    # the same as sign(xw) max(|xw| - r, 0) (zero carries no sign), in three passes instead of five
    return xw - bounded(xw, -r, r)


@dataclass(frozen=True)
class ArmatureReaction:
    """Demagnetising mmf ``F_ar(|Ia|)`` [AT/pole]: linear or a table.

    It weakens the windings' field and never reverses it: see
    :func:`field_after_armature_reaction`.

    References
    ----------
    Equivalent-field-current treatment of armature reaction (Chapman, DC
    generator chapter, from memory; Theraja Vol II Ex 27.3 for a computed value).
    """

    per_amp: float = 0.0
    table_current_a: np.ndarray | None = None
    table_at: np.ndarray | None = None

    def __post_init__(self):
        if self.table_current_a is not None:
            # the table's end chord and its slopes, once (every solve step reads them)
            xi, fi = self.table_current_a, self.table_at
            chord = (fi[-1] - fi[-2]) / (xi[-1] - xi[-2])
            object.__setattr__(self, "_chord", chord)
            object.__setattr__(self, "_slopes", np.append(np.diff(fi) / np.diff(xi), chord))
            object.__setattr__(self, "_inner", np.ascontiguousarray(xi[1:]))

    @classmethod
    def from_machine(cls, m):
        if m.ar_at_per_pole_at_rated is not None:
            return cls(per_amp=m.ar_at_per_pole_at_rated / m.rated_armature_current_a)
        if m.ar_table_current_a is not None:
            return cls(table_current_a=np.asarray(m.ar_table_current_a, float),
                       table_at=np.asarray(m.ar_table_at_per_pole, float))
        return cls()

    def mmf(self, armature_current_a, with_slope=False):
        """Demagnetising ampere-turns per pole at ``Ia`` (acts on ``|Ia|``)."""
        ia = np.asarray(armature_current_a, float)
        a = np.abs(ia)
        if self.table_current_a is None:
            f = self.per_amp * a
            if not with_slope:
                return f
            d = np.full_like(a, self.per_amp)
        else:
            xi, fi = self.table_current_a, self.table_at
            # past the table np.interp holds its last value: the end chord adds on from there (zero before)
            f = np.interp(a, xi, fi) + self._chord * np.maximum(a - xi[-1], 0.0)
            if not with_slope:
                return f
            # the row of each current: searching from the second entry gives 0 .. n-1 with no clipping
            d = self._slopes[np.searchsorted(self._inner, a, side="right")]
        d = d * np.sign(ia)
        return (f, d) if with_slope else f

    def knots(self):
        if self.table_current_a is None:
            return np.zeros(0)
        return self.table_current_a[1:]
