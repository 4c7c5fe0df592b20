"""Likelihood ratio bound : unbound, against direct numerical integration with scipy."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, stats

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
    assert log_lr_bound_line(d, s, R, g) == pytest.approx(direct_line(d, s, R, g), abs=1e-7)


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
