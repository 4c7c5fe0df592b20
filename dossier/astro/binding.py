"""Likelihood ratio bound : unbound for a measured velocity difference.

Two stars that belong together are either bound, with a true velocity
difference below the escape speed at their separation, or unbound members
of a loose group whose velocity differences follow the group's dispersion
g, necessarily above the escape speed. For a measured difference Δ with a
Gaussian uncertainty σ, these kernels give ln(L_bound / L_unbound) under two
simple models of the true difference v:

* bound: v uniform within the escape speed R (a disc of radius R in the
  plane of the sky; the interval [−R, R] along the line of sight);
* unbound: v Gaussian with dispersion g per axis, restricted to |v| > R.

A measurement with σ ≫ R tells nothing and the ratio tends to 1, so an
uninformative measurement never moves a verdict; a precise difference well
below R favours bound, one well above favours unbound.

Both ratios have closed forms. The product of the two Gaussians (true
velocity under the unbound model, measurement about it) is a Gaussian in Δ of
variance g² + σ² times a Gaussian in v of mean μ = Δ g²/(g² + σ²) and
dispersion τ = gσ/√(g² + σ²) (common practice), so each likelihood is a
Gaussian probability of a disc or an interval:

* planar: L_bound = P(|x| ≤ R) / (πR²) for x ~ N₂(Δ, σ²), the cumulative
  noncentral χ² with 2 degrees of freedom (``scipy.special.chndtr``);
  L_unbound = N₂(Δ; g² + σ²) P(|v| > R) e^(R²/2g²) for v ~ N₂(μ, τ²), a
  Marcum Q-function Q₁(μ/τ, R/τ) (Marcum 1950, IRE Trans. Inf. Theory 6,
  59, from memory): the noncentral χ² survival function of
  ``scipy.stats.ncx2.sf``, accurate far into the tail;
* line of sight: L_bound = [Φ((R−Δ)/σ) − Φ((−R−Δ)/σ)] / 2R and
  L_unbound = N(Δ; 0, √(g² + σ²)) [Φ((−R−μ)/τ) + Φ((μ−R)/τ)] / 2Φ(−R/g),
  all in logs (``scipy.special.log_ndtr``).

Rows where a planar probability is too small to trust (``chndtr`` below
1e-45, near its own cut-off; the survival function below 1e-280) fall back
to the
log-space quadrature of earlier versions: the Rice kernel
exp(−(r² + Δ²)/2σ²) I₀(rΔ/σ²) / (2πσ²) (Rice 1945, Bell Syst. Tech. J. 24,
46) integrated over r by composite Gauss–Legendre quadrature on pieces that
resolve the kernel's peak near r = Δ. Any consistent velocity unit (mas/yr
or km/s) may be used.

Many pairs at once: rows are computed in blocks, so memory stays small, and
each row's value does not depend on the others. Callers that clip the ratio
(the rules clip its log10 at ±99) pass ``beyond``: rows that take the
quadrature and whose ratio is certainly past ±``beyond`` are then settled
from cheap bounds on the two quadratures (see :func:`_planar_side`,
:func:`_line_side`) instead of the quadratures, which cost about a thousand
function evaluations per row; every other row is computed exactly as
without it.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(48)
# Rows per block: the quadratures' temporaries (rows × 11 pieces × 48 nodes) stay a few MB.
_BLOCK = 256
# Rows per block of the cheap bounds that settle clipped rows (arrays that stay in cache).
_SIDE_BLOCK = 16384
# Where the bounds of _planar_side/_line_side are trusted: no overflow or underflow in them or in the quadratures.
_SANE_LOW, _SANE_HIGH = 1e-30, 1e30


def _pieces(lo: NDArray, hi: NDArray, centre: NDArray, width: NDArray) -> NDArray:
    """Sorted piece edges on [lo, hi] that resolve a peak of ``width`` at ``centre``; shape (..., 8)."""
    marks = centre[..., None] + width[..., None] * np.array([-12.0, -4.0, -1.0, 0.0, 1.0, 4.0, 12.0])
    edges = np.concatenate([lo[..., None], np.clip(marks, lo[..., None], hi[..., None]), hi[..., None]], axis=-1)
    return np.sort(edges, axis=-1)


def _log_quad(log_f, edges: NDArray) -> NDArray:
    """ln ∫ f over consecutive edges (Gauss–Legendre on each piece), from ln f, without underflow."""
    a, b = edges[..., :-1, None], edges[..., 1:, None]
    half = 0.5 * (b - a)
    r = a + half * (_NODES + 1.0)
    with np.errstate(divide="ignore"):
        terms = np.log(half * _WEIGHTS) + log_f(r)
    top = np.max(terms, axis=(-2, -1), keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return np.log(np.sum(np.exp(terms - top), axis=(-2, -1))) + top[..., 0, 0]


def _by_rows(closed, rows, side, beyond: float | None, *arrays: ArrayLike):
    """The ratio of every row of the broadcast arrays, in blocks of rows: ``closed(*columns)`` gives
    values and where they hold; the other rows take ``rows(*columns)`` (the quadrature), or, with
    ``beyond``, come back as ±inf where ``side(*columns, beyond)`` settles them. 0-d in, a numpy
    scalar out."""
    cols = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in arrays))
    shape = cols[0].shape
    flat = [c.reshape(-1) for c in cols]
    out = np.empty(flat[0].size)
    held = np.empty(out.size, dtype=bool)
    with np.errstate(all="ignore"):  # rows where the closed form fails (NaN, underflow) are not used
        for start in range(0, out.size, _SIDE_BLOCK):
            block = slice(start, start + _SIDE_BLOCK)
            out[block], held[block] = closed(*(c[block] for c in flat))
    todo = np.flatnonzero(~held)
    if beyond is not None and todo.size:
        with np.errstate(all="ignore"):  # the bounds of unsettled rows (NaN, overflow) are not used
            settled = side(*(c[todo] for c in flat), float(beyond))
        out[todo[settled > 0]] = np.inf
        out[todo[settled < 0]] = -np.inf
        todo = todo[settled == 0]
    for start in range(0, todo.size, _BLOCK):
        k = todo[start:start + _BLOCK]
        out[k] = rows(*(c[k] for c in flat))
    return out.reshape(shape)[()]


def log_lr_bound_planar(delta: ArrayLike, sigma: ArrayLike, radius: ArrayLike, group_sigma: ArrayLike,
                        *, beyond: float | None = None) -> NDArray[np.float64]:
    """ln L_bound/L_unbound for a 2-D (sky-plane) velocity difference.

    Parameters
    ----------
    delta : array_like
        Length of the measured difference vector (e.g. mas/yr).
    sigma : array_like
        Per-axis 1σ uncertainty of the difference (isotropic), same unit.
    radius : array_like
        Escape speed at the projected separation, same unit.
    group_sigma : array_like
        Per-axis dispersion of unbound group members, same unit.
    beyond : float, optional
        Rows whose ln ratio is certainly ≥ ``beyond`` come back as +inf, ≤ −``beyond`` as −inf,
        settled by :func:`_planar_side` without the quadratures; the others are unchanged.
    """
    return _by_rows(_planar_closed, _planar_rows, _planar_side, beyond, delta, sigma, radius, group_sigma)


def _planar_rows(d: NDArray, s: NDArray, R: NDArray, g: NDArray) -> NDArray:
    """:func:`log_lr_bound_planar` of 1-D rows."""
    dd, ss, RR, gg = (x[..., None, None] for x in (d, s, R, g))

    def log_rice(r: NDArray) -> NDArray:
        return -((r - dd) ** 2) / (2 * ss**2) + np.log(special.i0e(r * dd / ss**2)) - np.log(2 * np.pi * ss**2)

    def log_bound(r: NDArray) -> NDArray:
        return np.log(2 * r / RR**2) + log_rice(r)

    def log_unbound(r: NDArray) -> NDArray:
        return np.log(r / gg**2) - (r**2 - RR**2) / (2 * gg**2) + log_rice(r)

    top = np.maximum(R + 12 * g + 12 * s, d + 12 * s)
    zero = np.zeros_like(R)
    # Where the measurement peaks beyond R, each integrand is largest at r = R and falls off within
    # s²/|d − R| of it, which the pieces around d do not resolve: extra edges there.
    inside = _with_marks(_pieces(zero, R, d, s), R, -s * s / np.maximum(d - R, s), zero, R)
    outside = _with_marks(_tail_pieces(R, top, d, s, g), R, s * s / np.maximum(R - d, s), R, top)
    return _log_quad(log_bound, inside) - _log_quad(log_unbound, outside)


def _with_marks(edges: NDArray, start: NDArray, step: NDArray, lo: NDArray, hi: NDArray) -> NDArray:
    """``edges`` with start + step × (1, 4, 12) added (clipped to [lo, hi]), sorted."""
    marks = np.clip(start[..., None] + step[..., None] * np.array([1.0, 4.0, 12.0]), lo[..., None], hi[..., None])
    return np.sort(np.concatenate([edges, marks], axis=-1), axis=-1)


def _tail_pieces(R: NDArray, top: NDArray, centre: NDArray, s: NDArray, g: NDArray) -> NDArray:
    """Edges on [R, top] resolving both the measurement peak and the tail's own scale g above R."""
    edges = _pieces(R, top, centre, s)
    extra = np.clip(R[..., None] + g[..., None] * np.array([0.5, 2.0, 5.0]), R[..., None], top[..., None])
    return np.sort(np.concatenate([edges, extra], axis=-1), axis=-1)


def log_lr_bound_line(delta: ArrayLike, sigma: ArrayLike, radius: ArrayLike, group_sigma: ArrayLike,
                      *, beyond: float | None = None) -> NDArray[np.float64]:
    """ln L_bound/L_unbound for a 1-D (line-of-sight) velocity difference; arguments as the planar form
    (``beyond`` settled by :func:`_line_side`)."""
    return _by_rows(_line_closed, _line_rows, _line_side, beyond, delta, sigma, radius, group_sigma)


def _line_closed_form(ad: NDArray, s: NDArray, R: NDArray, g: NDArray) -> tuple[NDArray, NDArray]:
    """ln L_bound of the line-of-sight model (closed form) and ln of the normalisation of the unbound density."""
    # ln[Φ(a) − Φ(b)] with a = (R − |d|)/s > b = (−R − |d|)/s, stable when both are tiny
    la, lb = special.log_ndtr((R - ad) / s), special.log_ndtr((-R - ad) / s)
    log_l_b = la + np.log1p(-np.exp(lb - la)) - np.log(2 * R)
    # density of |v| on (R, ∞): φ(v/g) / (g Φ(−R/g)), written via logs for R ≫ g
    log_norm = -special.log_ndtr(-R / g) - np.log(g) - 0.5 * np.log(2 * np.pi)
    return log_l_b, log_norm


def _line_rows(d: NDArray, s: NDArray, R: NDArray, g: NDArray) -> NDArray:
    """:func:`log_lr_bound_line` of 1-D rows."""
    ad = np.abs(d)  # both models are symmetric in the sign of the difference
    log_l_b, log_norm = _line_closed_form(ad, s, R, g)
    dd, ss, gg, nn = (x[..., None, None] for x in (ad, s, g, log_norm))

    def log_unbound(v: NDArray) -> NDArray:
        near = -((dd - v) ** 2) / (2 * ss**2)
        far = -((dd + v) ** 2) / (2 * ss**2)
        log_gauss = np.logaddexp(near, far) - np.log(2 * ss * np.sqrt(2 * np.pi))
        return nn - v**2 / (2 * gg**2) + log_gauss

    top = np.maximum(R + 12 * g + 12 * s, ad + 12 * s)
    return log_l_b - _log_quad(log_unbound, _tail_pieces(R, top, ad, s, g))


# Below these a planar probability is left to the quadrature (its logarithm may have lost digits).
_TINY = 1e-280
_CHNDTR_LOW = 1e-45


def _marcum_q(a: NDArray, b: NDArray) -> NDArray:
    """Q₁(a, b) = P(|y| > b) for a 2-D unit Gaussian y centred a away: the survival function of the
    noncentral χ² with 2 degrees of freedom at b² and noncentrality a², as ``scipy.stats.ncx2.sf``
    computes it (Boost's, accurate far into the tail); its ufunc is taken directly, because importing
    ``scipy.stats`` costs about a second, more than a whole ``dossier weigh``."""
    global _NCX2_SF
    if _NCX2_SF is None:
        try:
            from scipy.special._ufuncs import _ncx2_sf as sf  # what scipy.stats.ncx2.sf calls
        except ImportError:  # a SciPy that moved it: the public, slower-to-import route
            from scipy.stats import ncx2

            sf = ncx2.sf
        _NCX2_SF = sf
    a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
    # Near b = 0 the survival function is 1 minus a tiny CDF, which the CDF gives accurately, while
    # Boost's series overflows its gamma function there for a large noncentrality (found by hypothesis).
    small = b < 1e-2
    out = np.empty(a.shape)
    out[small] = 1.0 - special.chndtr(b[small] ** 2, 2.0, a[small] ** 2)
    out[~small] = _NCX2_SF(b[~small] ** 2, 2.0, a[~small] ** 2)
    return out


_NCX2_SF = None


def _planar_closed(d: NDArray, s: NDArray, R: NDArray, g: NDArray) -> tuple[NDArray, NDArray]:
    """:func:`log_lr_bound_planar` in closed form (module notes), and where it holds."""
    a, b = d / s, R / s
    p_in = special.chndtr(b * b, 2, a * a)
    var = g * g + s * s
    tau = g * s / np.sqrt(var)
    centre, edge = d * g * g / var / tau, R / tau
    p_out = _marcum_q(centre, edge)
    log_l_b = np.log(p_in) - np.log(np.pi * R * R)
    log_l_u = -np.log(2 * np.pi * var) - d * d / (2 * var) + np.log(p_out) + R * R / (2 * g * g)
    value = log_l_b - log_l_u
    # chndtr loses its accuracy below about 1e-50 and returns exactly 0 further down (tests/astro/test_binding.py)
    trusted = (p_in >= _CHNDTR_LOW) & (p_out >= _TINY)
    return value, _sane(d, s, R, g) & trusted & np.isfinite(value)


def _line_closed(d: NDArray, s: NDArray, R: NDArray, g: NDArray) -> tuple[NDArray, NDArray]:
    """:func:`log_lr_bound_line` in closed form (module notes), and where it holds."""
    ad = np.abs(d)
    log_l_b, _ = _line_closed_form(ad, s, R, g)
    var = g * g + s * s
    tau = g * s / np.sqrt(var)
    mu = ad * g * g / var
    log_tails = np.logaddexp(special.log_ndtr((-R - mu) / tau), special.log_ndtr((mu - R) / tau))
    log_l_u = (-0.5 * np.log(2 * np.pi * var) - ad * ad / (2 * var) + log_tails
               - np.log(2.0) - special.log_ndtr(-R / g))
    value = log_l_b - log_l_u
    return value, _sane(ad, s, R, g) & np.isfinite(value)


# ----------------------------------------------------------------------------
# Rows settled without the quadratures
#
# Each bound is one on the quadrature as computed above, not only on the integral: the
# Gauss–Legendre weights are positive and sum to each piece's length, so a piece contributes
# at most its length times the integrand's largest value on it, and at least its length times
# the smallest; the whole sum is at least that of any one piece. The integrands are bounded
# with i0e(x) = e^(−x) I₀(x) ≤ 1 and decreasing for x ≥ 0 (its derivative is e^(−x)(I₁ − I₀) < 0:
# I₀′ = I₁ and the integral forms of I₀, I₁; Abramowitz & Stegun 1964, 9.6.27 and 9.6.19, from
# memory), r/g² e^(−(r²−R²)/2g²) ≤ max(R, g)/g² for r ≥ R (its maximum is at r = g), and the
# pieces named are pieces of _pieces/_tail_pieces (their edges recomputed with the same
# operations). The margin covers rounding: 1 in ln plus 1e-9 of the largest exponent involved,
# far above the errors of either computation. Rows outside _sane (overflow, NaN, a negative
# escape speed) are never settled.


def _sane(d: NDArray, s: NDArray, R: NDArray, g: NDArray) -> NDArray:
    inside = [(x >= _SANE_LOW) & (x <= _SANE_HIGH) for x in (s, R, g)]
    return (d >= 0) & (d <= _SANE_HIGH) & inside[0] & inside[1] & inside[2]


def _below(d: NDArray, s: NDArray, R: NDArray, g: NDArray) -> NDArray:
    """Lower edge of the tail piece that ends at ``d`` (for d > R): the largest edge of _tail_pieces below d."""
    a = np.maximum(d - s, R)
    for k in (0.5, 2.0, 5.0):
        edge = R + g * k
        a = np.where(edge < d, np.maximum(a, edge), a)
    return a


def _settled(sign: int, value: NDArray, scale: NDArray, limit: float) -> NDArray:
    """``sign`` where ``sign × value`` (a bound on the ln ratio) is certainly ≥ limit, else 0 (int8)."""
    margin = 1.0 + 1e-9 * scale
    beyond = np.isfinite(value) & np.isfinite(margin) & (sign * value >= limit + margin)
    return np.where(beyond, sign, 0).astype(np.int8)


def _planar_side(d: NDArray, s: NDArray, R: NDArray, g: NDArray, limit: float) -> NDArray:
    """−1 / +1 where :func:`_planar_rows` is certainly ≤ −limit / ≥ limit, 0 where it must be computed.

    ln(2πσ²), common to both integrands, cancels and is left out.
    """
    out = np.zeros(d.shape, dtype=np.int8)
    sane = _sane(d, s, R, g)
    k = np.flatnonzero(sane & (d > R))
    if k.size:  # against: L_b ≤ R (all its weight) × 2/R × e^(−(d−R)²/2σ²); L_u ≥ its piece [a, d]
        d_, s_, R_, g_ = d[k], s[k], R[k], g[k]
        top = np.maximum(R_ + 12 * g_ + 12 * s_, d_ + 12 * s_)
        a = _below(d_, s_, R_, g_)
        upper = (np.log(2.0) - (d_ - R_) ** 2 / (2 * s_**2)
                 - (np.log((d_ - a) * a / g_**2) - (d_**2 - R_**2) / (2 * g_**2) - (d_ - a) ** 2 / (2 * s_**2)
                    + np.log(special.i0e(d_ * d_ / s_**2))))
        out[k] = _settled(-1, upper, (d_**2 + R_**2 + top**2) * (0.5 / g_**2 + 0.5 / s_**2), limit)
    k = np.flatnonzero(sane & (d < R))
    if k.size:  # supports: L_b ≥ piece [d, b1] or [b1, b2]; L_u ≤ (top − R)·max(R,g)/g² e^(−(R−d)²/2σ²)
        d_, s_, R_, g_ = d[k], s[k], R[k], g[k]
        top = np.maximum(R_ + 12 * g_ + 12 * s_, d_ + 12 * s_)
        b1, b2 = np.minimum(d_ + s_, R_), np.minimum(d_ + 4 * s_, R_)
        first = (np.log((b1 - d_) * 2 * d_ / R_**2) - (b1 - d_) ** 2 / (2 * s_**2)
                 + np.log(special.i0e(b1 * d_ / s_**2)))
        second = (np.log((b2 - b1) * 2 * b1 / R_**2) - (b2 - d_) ** 2 / (2 * s_**2)
                  + np.log(special.i0e(b2 * d_ / s_**2)))
        lower = np.fmax(first, second) - (np.log((top - R_) * np.maximum(R_, g_) / g_**2)
                                          - (R_ - d_) ** 2 / (2 * s_**2))
        out[k] = _settled(1, lower, (d_**2 + R_**2 + top**2) * (0.5 / g_**2 + 0.5 / s_**2), limit)
    return out


def _line_side(d: NDArray, s: NDArray, R: NDArray, g: NDArray, limit: float) -> NDArray:
    """−1 / +1 where :func:`_line_rows` is certainly ≤ −limit / ≥ limit, 0 where it must be computed.

    L_b is the closed form itself, computed as there; only the tail quadrature of L_u is bounded.
    """
    out = np.zeros(d.shape, dtype=np.int8)
    ad = np.abs(d)
    sane = _sane(ad, s, R, g)
    for sign, k in ((-1, np.flatnonzero(sane & (ad > R))), (1, np.flatnonzero(sane & (ad < R)))):
        if not k.size:
            continue
        d_, s_, R_, g_ = ad[k], s[k], R[k], g[k]
        log_l_b, log_norm = _line_closed_form(d_, s_, R_, g_)
        top = np.maximum(R_ + 12 * g_ + 12 * s_, d_ + 12 * s_)
        common = log_norm - np.log(2 * s_ * np.sqrt(2 * np.pi))
        if sign < 0:  # against: the unbound tail ≥ its piece [a, |d|], where the Gaussian pair ≥ its nearer term
            a = _below(d_, s_, R_, g_)
            value = log_l_b - (np.log(d_ - a) + common - d_**2 / (2 * g_**2) - (d_ - a) ** 2 / (2 * s_**2))
        else:  # supports: on [R, top] the pair of Gaussians ≤ 2 × the nearer one ≤ 2 e^(−(R−|d|)²/2σ²)
            value = log_l_b - (np.log(2 * (top - R_)) + common - R_**2 / (2 * g_**2) - (R_ - d_) ** 2 / (2 * s_**2))
        scale = (d_**2 + R_**2 + top**2) * (0.5 / g_**2 + 0.5 / s_**2) + np.abs(log_l_b) + np.abs(log_norm)
        out[k] = _settled(sign, value, scale, limit)
    return out
