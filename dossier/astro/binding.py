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

The planar integrals are done in polar coordinates: averaging the 2-D
Gaussian over the direction of v gives the Rice kernel
exp(−(r² + Δ²)/2σ²) I₀(rΔ/σ²) / (2πσ²) (Rice 1945, Bell Syst. Tech. J. 24,
46), and the remaining radial integral is done by composite Gauss–Legendre
quadrature on pieces that resolve the kernel's peak near r = Δ. Any
consistent velocity unit (mas/yr or km/s) may be used.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(48)


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


def log_lr_bound_planar(delta: ArrayLike, sigma: ArrayLike, radius: ArrayLike, group_sigma: ArrayLike) -> NDArray[np.float64]:
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
    """
    d, s, R, g = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (delta, sigma, radius, group_sigma)))
    dd, ss, RR, gg = (x[..., None, None] for x in (d, s, R, g))

    def log_rice(r: NDArray) -> NDArray:
        return -((r - dd) ** 2) / (2 * ss**2) + np.log(special.i0e(r * dd / ss**2)) - np.log(2 * np.pi * ss**2)

    def log_bound(r: NDArray) -> NDArray:
        return np.log(2 * r / RR**2) + log_rice(r)

    def log_unbound(r: NDArray) -> NDArray:
        return np.log(r / gg**2) - (r**2 - RR**2) / (2 * gg**2) + log_rice(r)

    top = np.maximum(R + 12 * g + 12 * s, d + 12 * s)
    return _log_quad(log_bound, _pieces(np.zeros_like(R), R, d, s)) - _log_quad(log_unbound, _tail_pieces(R, top, d, s, g))


def _tail_pieces(R: NDArray, top: NDArray, centre: NDArray, s: NDArray, g: NDArray) -> NDArray:
    """Edges on [R, top] resolving both the measurement peak and the tail's own scale g above R."""
    edges = _pieces(R, top, centre, s)
    extra = np.clip(R[..., None] + g[..., None] * np.array([0.5, 2.0, 5.0]), R[..., None], top[..., None])
    return np.sort(np.concatenate([edges, extra], axis=-1), axis=-1)


def log_lr_bound_line(delta: ArrayLike, sigma: ArrayLike, radius: ArrayLike, group_sigma: ArrayLike) -> NDArray[np.float64]:
    """ln L_bound/L_unbound for a 1-D (line-of-sight) velocity difference; arguments as the planar form."""
    d, s, R, g = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (delta, sigma, radius, group_sigma)))
    ad = np.abs(d)  # both models are symmetric in the sign of the difference
    # ln[Φ(a) − Φ(b)] with a = (R − |d|)/s > b = (−R − |d|)/s, stable when both are tiny
    la, lb = special.log_ndtr((R - ad) / s), special.log_ndtr((-R - ad) / s)
    log_l_b = la + np.log1p(-np.exp(lb - la)) - np.log(2 * R)
    # density of |v| on (R, ∞): φ(v/g) / (g Φ(−R/g)), written via logs for R ≫ g
    log_norm = -special.log_ndtr(-R / g) - np.log(g) - 0.5 * np.log(2 * np.pi)
    dd, ss, gg, nn = (x[..., None, None] for x in (ad, s, g, log_norm))

    def log_unbound(v: NDArray) -> NDArray:
        near = -((dd - v) ** 2) / (2 * ss**2)
        far = -((dd + v) ** 2) / (2 * ss**2)
        log_gauss = np.logaddexp(near, far) - np.log(2 * ss * np.sqrt(2 * np.pi))
        return nn - v**2 / (2 * gg**2) + log_gauss

    top = np.maximum(R + 12 * g + 12 * s, ad + 12 * s)
    return log_l_b - _log_quad(log_unbound, _tail_pieces(R, top, ad, s, g))
