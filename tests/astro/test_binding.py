"""Likelihood ratio bound : unbound, against direct numerical integration with scipy."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, special, stats

from dossier.astro import binding
from dossier.astro.binding import log_lr_bound_line, log_lr_bound_planar


def direct_planar(d, s, R, g):
    """The two 2-D likelihoods by scipy.integrate.dblquad over the plane in polar coordinates (reference;
    no Bessel function, no hand-made quadrature)."""
    def meas(r, phi):
        return np.exp(-((r * np.cos(phi) - d) ** 2 + (r * np.sin(phi)) ** 2) / (2 * s * s)) / (2 * np.pi * s * s)

    l_b = integrate.dblquad(lambda phi, r: r * meas(r, phi) / (np.pi * R * R), 0, R, 0, 2 * np.pi, epsabs=1e-14)[0]
    top = R + d + 14 * (g + s)
    l_u = integrate.dblquad(
        lambda phi, r: r * meas(r, phi) * np.exp(-(r * r - R * R) / (2 * g * g)) / (2 * np.pi * g * g),
        R, top, 0, 2 * np.pi, epsabs=1e-14)[0]
    return np.log(l_b / l_u)


def direct_line(d, s, R, g):
    """The 1-D likelihoods with scipy.stats and scipy.integrate.quad (reference)."""
    l_b = (stats.norm.cdf((R - d) / s) - stats.norm.cdf((-R - d) / s)) / (2 * R)
    l_u = integrate.quad(lambda v: stats.norm.pdf(d, v, s) * stats.norm.pdf(v, 0, g), R, 40, limit=400)[0]
    l_u += integrate.quad(lambda v: stats.norm.pdf(d, v, s) * stats.norm.pdf(v, 0, g), -40, -R, limit=400)[0]
    return np.log(l_b / (l_u / (2 * stats.norm.sf(R / g))))


@pytest.mark.parametrize("d, s, R, g", [(1.1, 0.3, 2.0, 1.5), (0.2, 0.5, 1.0, 1.0), (3.0, 0.8, 2.0, 1.0),
                                        (0.5, 2.0, 1.0, 3.0)])
def test_planar_matches_cartesian_integration(d, s, R, g):
    assert log_lr_bound_planar(d, s, R, g) == pytest.approx(direct_planar(d, s, R, g), abs=2e-5)


@pytest.mark.parametrize("d, s, R, g", [(1.1, 0.3, 2.0, 1.5), (-0.4, 0.2, 1.0, 1.0), (3.0, 0.8, 2.0, 1.0),
                                        (0.5, 2.0, 1.0, 3.0)])
def test_line_matches_quadrature(d, s, R, g):
    assert log_lr_bound_line(d, s, R, g) == pytest.approx(direct_line(d, s, R, g), abs=1e-9)


def test_an_uninformative_measurement_tells_nothing():
    # σ ≫ R and σ ≫ g: both models predict the same broad Gaussian, ratio → 1 (limit of the formulas above)
    assert abs(float(log_lr_bound_line(0.3, 200.0, 0.2, 1.0))) < 1e-3
    assert abs(float(log_lr_bound_planar(0.3, 200.0, 0.2, 1.0))) < 1e-3


def test_far_outside_escape_stays_finite_and_decisive():
    # no underflow to -inf or nan: the log-space quadrature keeps the tails
    values = np.array([log_lr_bound_planar(94.0, 0.05, 6.0, 1.0), log_lr_bound_line(70.0, 0.7, 2.0, 1.0)])
    assert np.all(np.isfinite(values)) and np.all(values < -1000)


def test_vectorised_over_pairs():
    d = np.array([0.1, 1.0, 3.0])
    one_by_one = [float(log_lr_bound_planar(x, 0.2, 2.0, 1.0)) for x in d]
    np.testing.assert_allclose(log_lr_bound_planar(d, 0.2, 2.0, 1.0), one_by_one, rtol=1e-12)


def radial_planar(d, s, R, g):
    """ln L_b − ln L_u by scipy.integrate.quad of the radial integrals over the Rice kernel (Rice 1945, Bell Syst.
    Tech. J. 24, 46), scaled by the integrand's largest value so that ratios far from 1 do not underflow; break
    points at the kernel's own scales near R (reference)."""
    def log_kernel(r):
        return -((r - d) ** 2) / (2 * s * s) + np.log(special.i0e(r * d / (s * s))) - np.log(2 * np.pi * s * s)

    def log_bound(r):
        return np.log(2 * r / (R * R)) + log_kernel(r)

    def log_unbound(r):
        return np.log(r / (g * g)) - (r * r - R * R) / (2 * g * g) + log_kernel(r)

    def log_integral(log_f, lo, hi, points):
        points = sorted({x for x in points if lo < x < hi})
        grid = np.concatenate([np.linspace(lo, hi, 20001)[1:-1], points])
        top = np.max(log_f(grid))
        pieces = [lo, *points, hi]
        value = sum(integrate.quad(lambda r: np.exp(log_f(r) - top), a, b, epsabs=0, epsrel=1e-12, limit=500)[0]
                    for a, b in zip(pieces[:-1], pieces[1:]))
        return top + np.log(value)

    near = s * s / max(abs(R - d), s)  # the integrands' scale at R when the peak d lies beyond it
    marks = [d + k * s for k in (-10, -3, 0, 3, 10)] + [R + k * near for k in (-40, -4, -1, 1, 4, 40)]
    top = max(R + 14 * (g + s), d + 14 * s)
    return log_integral(log_bound, 0.0, R, marks) - log_integral(log_unbound, R, top, marks)


@pytest.mark.parametrize("d, s, R, g", [
    (1.1, 0.3, 2.0, 1.5), (0.2, 0.5, 1.0, 1.0), (3.0, 0.8, 2.0, 1.0), (0.5, 2.0, 1.0, 3.0),
    (0.1019, 0.001294, 0.1285, 3.225),  # a precise difference just inside R: the unbound integrand lives in 2e-5 of R
    (2.646, 0.7788, 2.777, 0.1706),  # R ≫ g: a chndtr value near its cut-off, so the quadrature is used
    (31.75, 9.611, 0.02161, 0.04638),  # a disc far smaller than σ
])
def test_planar_closed_form_against_radial_quadrature(d, s, R, g):
    # the closed form to 1e-9; rows it leaves to the Gauss–Legendre quadrature to 1e-7
    _, held = binding._planar_closed(*(np.array([x]) for x in (d, s, R, g)))
    tol = 1e-9 if held[0] else 1e-7
    assert log_lr_bound_planar(d, s, R, g) == pytest.approx(radial_planar(d, s, R, g), rel=tol, abs=tol)


@pytest.mark.parametrize("a, b", [(3.0, 1.0), (0.3, 2.0), (12.0, 3.0), (16.0, 4.0), (0.7, 13.0), (40.0, 30.0)])
def test_chndtr_above_the_cut_off_matches_quadrature(a, b):
    # Reference: scipy.integrate.quad of the Rice density (Rice 1945, Bell Syst. Tech. J. 24, 46) over [0, b]:
    # P(|y| ≤ b) for a 2-D unit Gaussian centred a away, which the closed form takes from scipy.special.chndtr.
    def rice(r):
        return r * np.exp(-0.5 * (r - a) ** 2) * special.i0e(r * a)

    expected = integrate.quad(rice, 0, b, points=[x for x in (a - 3, a, a + 3) if 0 < x < b] or None,
                              epsabs=0, epsrel=1e-13, limit=500)[0]
    value = special.chndtr(b * b, 2, a * a)
    assert value >= binding._CHNDTR_LOW
    assert value == pytest.approx(expected, rel=1e-11)


def test_marcum_q_far_into_the_tail_matches_quadrature():
    # Q₁(a, b) = P(|y| > b) for a 2-D unit Gaussian centred a away (Marcum 1950, IRE Trans. Inf. Theory 6, 59,
    # from memory), against scipy.integrate.quad of the Rice density over [b, b + 40] (reference), down to 1e-94.
    for a, b in ((1.0, 2.0), (3.0, 1.0), (10.0, 12.0), (6.0, 14.0), (78.748, 99.304)):
        def rice(r):
            return r * np.exp(-0.5 * (r - a) ** 2) * special.i0e(r * a)

        expected = integrate.quad(rice, b, b + 40, points=[b + 0.01, b + 0.1, b + 1], epsabs=0, epsrel=1e-13,
                                  limit=500)[0]
        assert binding._marcum_q(np.array(a), np.array(b)) == pytest.approx(expected, rel=1e-11)


def test_marcum_q_near_zero_radius_with_a_large_offset():
    # Found by hypothesis: Boost's noncentral chi-square survival function overflows its gamma function for
    # b ~ 1e-4 and a ~ 18; the CDF route gives 1 - tiny. Reference: scipy.stats.ncx2.sf where it works.
    from scipy.stats import ncx2

    from dossier.astro.binding import _marcum_q

    q = _marcum_q(np.array([18.42681049, 1.0, 0.0]), np.array([1.69338976e-04, 0.009, 1.41421356]))
    assert np.all(np.isfinite(q)) and np.all((q >= 0) & (q <= 1))
    assert q[0] == pytest.approx(1.0, abs=1e-12)
    assert q[1:] == pytest.approx(ncx2.sf(np.array([0.009, 1.41421356]) ** 2, 2, np.array([1.0, 0.0]) ** 2), rel=1e-9)
