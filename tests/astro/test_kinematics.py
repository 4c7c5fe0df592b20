"""Tests for dossier.astro.kinematics.

References, named beside each check: astropy (reference library) for the
Galactic frame, through a Galactic frame with ``representation_type`` and
``differential_type`` set explicitly, astropy's ``Distance(parallax=...)`` and
its units; the Galactic pole and centre in ICRS as defined by the IAU (1958)
system transferred to ICRS (from memory); scipy.optimize.minimize_scalar on
straight-line motion built in the test; scipy.stats (truncnorm, norm, maxwell,
kstest) for the sampling; plane geometry for hand values.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import CartesianDifferential, CartesianRepresentation, Distance, Galactic, SkyCoord
from scipy import optimize, stats

from dossier.astro.kinematics import (
    MYR_PER_PC_PER_KMS,
    _positive_normal,
    closest_approach,
    peak_magnitude,
    separation_3d,
    space_velocity,
    velocity_difference,
)

# The north Galactic pole and the Galactic centre (l = b = 0) in ICRS, as the
# IAU (1958) Galactic system is transferred to ICRS (from memory).
# astropy's Galactic frame puts them within 0.03 arcsec of these.
NGP_RA, NGP_DEC = 192.85948, 27.12825
GC_RA, GC_DEC = 266.40499, -28.93617


def _random_stars(rng: np.random.Generator, n: int) -> dict[str, np.ndarray]:
    return {
        "ra": rng.uniform(0.0, 360.0, n),
        "dec": np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n))),
        "parallax": rng.uniform(2.0, 200.0, n),
        "pmra": rng.normal(0.0, 300.0, n),
        "pmdec": rng.normal(0.0, 300.0, n),
        "rv": rng.normal(0.0, 40.0, n),
    }


def _astropy_uvw(ra, dec, parallax, pmra, pmdec, rv) -> np.ndarray:
    """Reference: astropy's Galactic frame with its representation and
    differential types set explicitly to Cartesian (not the ``velocity``
    shorthand that the code under test uses)."""
    ra, dec, parallax, pmra, pmdec, rv = np.broadcast_arrays(*np.atleast_1d(ra, dec, parallax, pmra, pmdec, rv))
    icrs = SkyCoord(
        ra=ra * u.deg,
        dec=dec * u.deg,
        distance=Distance(parallax=parallax * u.mas),
        pm_ra_cosdec=pmra * u.mas / u.yr,
        pm_dec=pmdec * u.mas / u.yr,
        radial_velocity=rv * u.km / u.s,
        frame="icrs",
    )
    gal = icrs.transform_to(Galactic())
    # Set explicitly: astropy's Galactic frame then names the Cartesian velocity
    # components U, V, W (its own labels for these axes).
    gal.representation_type = CartesianRepresentation
    gal.differential_type = CartesianDifferential
    return np.stack([gal.U.to_value(u.km / u.s), gal.V.to_value(u.km / u.s), gal.W.to_value(u.km / u.s)], axis=-1)


# ------------------------------------------------------------------ constants


def test_myr_per_pc_per_kms_matches_astropy_units() -> None:
    # Reference: astropy.units (IAU 2015 B2 parsec, Julian year).
    ref = (1.0 * u.pc / (u.km / u.s)).to_value(u.Myr)
    assert MYR_PER_PC_PER_KMS == pytest.approx(ref, rel=1e-14)
    # The value quoted in METHODS.md for Bailer-Jones 2015, A&A 575, A35.
    assert MYR_PER_PC_PER_KMS == pytest.approx(0.977792, abs=5e-7)


# -------------------------------------------------------------- space velocity


def test_uvw_nominal_matches_astropy_galactic_cartesian_differential() -> None:
    stars = _random_stars(np.random.default_rng(21), 300)
    res = space_velocity(**stars, parallax_error=0.0, pmra_error=0.0, pmdec_error=0.0, rv_error=0.0, n_samples=3)
    ref = _astropy_uvw(**stars)
    # Reference: astropy Galactic frame with differential_type=CartesianDifferential.
    np.testing.assert_allclose(res.nominal, ref, rtol=0, atol=1e-9)
    # Zero errors: every sample is the nominal value.
    np.testing.assert_allclose(res.samples, np.broadcast_to(ref[:, None, :], res.samples.shape), rtol=0, atol=1e-9)
    np.testing.assert_allclose(res.std, 0.0, atol=1e-9)


@pytest.mark.parametrize("rv", [-37.5, 12.0])
def test_star_at_north_galactic_pole_moving_radially_has_w_equal_rv(rv: float) -> None:
    # Reference: the IAU Galactic pole in ICRS (from memory); geometry: a purely
    # radial motion at the pole is along +z of the Galactic axes.
    res = space_velocity(NGP_RA, NGP_DEC, 20.0, 0.0, 0.0, rv, 0.0, 0.0, 0.0, 0.0, n_samples=2)
    U, V, W = res.nominal
    assert W == pytest.approx(rv, rel=1e-10)
    assert abs(U) < 1e-6 * abs(rv) and abs(V) < 1e-6 * abs(rv)  # pole offset of astropy's frame: 0.011"


def test_star_at_galactic_centre_moving_radially_has_u_equal_rv() -> None:
    # Reference: the IAU Galactic centre in ICRS (from memory); U points to l = b = 0.
    res = space_velocity(GC_RA, GC_DEC, 0.2, 0.0, 0.0, -25.0, 0.0, 0.0, 0.0, 0.0, n_samples=2)
    U, V, W = res.nominal
    assert U == pytest.approx(-25.0, rel=1e-10)
    assert abs(V) < 1e-5 and abs(W) < 1e-5


def test_uvw_rv_error_alone_at_the_pole_goes_into_w() -> None:
    # Geometry: only W depends on rv there, with unit slope, so std(W) = rv_error.
    res = space_velocity(NGP_RA, NGP_DEC, 50.0, 0.0, 0.0, 10.0, 0.0, 0.0, 0.0, 2.0, n_samples=100_000, rng=5)
    assert res.std[2] == pytest.approx(2.0, rel=1e-2)  # MC: relative error of a std ~ 1/sqrt(2n)
    assert res.mean[2] == pytest.approx(10.0, abs=0.03)
    assert res.std[0] < 1e-5 and res.std[1] < 1e-5


def test_uvw_monte_carlo_mean_converges_to_nominal_for_tiny_errors() -> None:
    stars = _random_stars(np.random.default_rng(22), 20)
    errors = {
        "parallax_error": 1e-6 * stars["parallax"],
        "pmra_error": np.full(20, 1e-4),
        "pmdec_error": np.full(20, 1e-4),
        "rv_error": np.full(20, 1e-4),
    }
    res = space_velocity(**stars, **errors, n_samples=500, rng=1)
    ref = _astropy_uvw(**stars)  # reference: astropy, as above
    np.testing.assert_allclose(res.mean, ref, rtol=1e-6, atol=1e-5)
    np.testing.assert_allclose(res.nominal, ref, rtol=0, atol=1e-9)


def test_uvw_covariance_matches_linear_propagation_through_astropy() -> None:
    # Reference: first-order propagation J S J^T, with the Jacobian J taken by
    # central differences of the independent astropy transformation above.
    x0 = np.array([5.0, 120.0, -45.0, 8.0])  # parallax, pmra, pmdec, rv
    sig = np.array([0.05, 0.5, 0.5, 0.3])  # 1 % parallax error: nearly linear
    ra, dec = 75.0, -40.0
    J = np.empty((3, 4))
    for k in range(4):
        h = np.zeros(4)
        h[k] = 1e-3 * sig[k]
        J[:, k] = (_astropy_uvw(ra, dec, *(x0 + h))[0] - _astropy_uvw(ra, dec, *(x0 - h))[0]) / (2 * h[k])
    cov_ref = J @ np.diag(sig**2) @ J.T
    res = space_velocity(ra, dec, *x0, *sig, n_samples=40_000, rng=7)
    np.testing.assert_allclose(res.covariance, np.cov(res.samples.T), rtol=1e-12)  # reference: numpy.cov
    np.testing.assert_allclose(res.std, np.sqrt(np.diag(cov_ref)), rtol=0.03)
    corr = res.covariance / np.outer(res.std, res.std)
    corr_ref = cov_ref / np.outer(np.sqrt(np.diag(cov_ref)), np.sqrt(np.diag(cov_ref)))
    np.testing.assert_allclose(corr, corr_ref, atol=0.03)


def test_uvw_broadcasts_over_stars() -> None:
    res = space_velocity(
        np.array([[10.0], [200.0]]), 5.0, np.array([1.0, 2.0, 3.0]), 1.0, 2.0, 3.0, 0.1, 0.1, 0.1, 0.1, n_samples=50
    )
    assert res.nominal.shape == (2, 3, 3)
    assert res.mean.shape == (2, 3, 3) and res.std.shape == (2, 3, 3)
    assert res.covariance.shape == (2, 3, 3, 3)
    assert res.samples.shape == (2, 3, 50, 3)


def test_uvw_seeded_and_reproducible() -> None:
    args = (10.0, 20.0, 1.0, 3.0, -4.0, 5.0, 0.2, 0.1, 0.1, 1.0)
    a = space_velocity(*args, n_samples=100, rng=3)
    b = space_velocity(*args, n_samples=100, rng=np.random.default_rng(3))
    np.testing.assert_array_equal(a.samples, b.samples)
    c = space_velocity(*args, n_samples=100, rng=4)
    assert not np.array_equal(a.samples, c.samples)


def test_negative_parallax_with_error_gives_finite_samples() -> None:
    res = space_velocity(30.0, 10.0, -0.5, 1.0, 1.0, 10.0, 1.0, 0.1, 0.1, 1.0, n_samples=2000)
    assert np.all(np.isfinite(res.samples))
    assert np.all(np.isnan(res.nominal))  # no distance from the value itself


def test_nonpositive_parallax_without_error_gives_nan() -> None:
    res = space_velocity(30.0, 10.0, np.array([0.0, -1.0, 2.0]), 1.0, 1.0, 10.0, 0.0, 0.1, 0.1, 1.0, n_samples=10)
    assert np.all(np.isnan(res.samples[:2])) and np.all(np.isfinite(res.samples[2]))


def test_negative_error_is_refused_with_a_fix() -> None:
    with pytest.raises(ValueError, match=r"negative or NaN uncertainty in rv_error\. Fix: give standard errors >= 0"):
        space_velocity(0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.1, 0.1, 0.1, -1.0)


@pytest.mark.parametrize(("mu", "sigma"), [(1.0, 0.5), (0.2, 1.0), (-3.0, 1.0), (-30.0, 2.0)])
def test_truncated_parallax_sampler_against_scipy_truncnorm(mu: float, sigma: float) -> None:
    x = _positive_normal(np.array(mu), np.array(sigma), 20_000, np.random.default_rng(8))
    assert np.all(x > 0.0)
    # Reference: scipy.stats.truncnorm, the normal truncated to (0, inf).
    ref = stats.truncnorm(a=-mu / sigma, b=np.inf, loc=mu, scale=sigma)
    assert stats.kstest(x, ref.cdf).pvalue > 0.01


# ------------------------------------------------------- velocity difference


def test_velocity_difference_hand_value() -> None:
    # Geometry: a (3, 4, 0) km/s difference has length 5 km/s.
    a = np.zeros((10, 3))
    b = np.tile([3.0, -4.0, 0.0], (10, 1))
    res = velocity_difference(a, b)
    assert res.median == pytest.approx(5.0) and res.p16 == pytest.approx(5.0) and res.p84 == pytest.approx(5.0)


def test_velocity_difference_of_identical_gaussian_stars_is_maxwellian() -> None:
    # Reference: scipy.stats.maxwell. The difference of two independent
    # isotropic Gaussians of sigma s each is isotropic with sigma s*sqrt(2), and
    # its length follows a Maxwell distribution of that scale.
    rng = np.random.default_rng(9)
    s, n = 1.5, 200_000
    a = rng.normal(0.0, s, (n, 3)) + [10.0, -5.0, 2.0]
    b = rng.normal(0.0, s, (n, 3)) + [10.0, -5.0, 2.0]
    res = velocity_difference(a, b)
    ref = stats.maxwell(scale=s * np.sqrt(2.0))
    assert res.median == pytest.approx(ref.ppf(0.50), rel=5e-3)
    assert res.p16 == pytest.approx(ref.ppf(0.16), rel=5e-3)
    assert res.p84 == pytest.approx(ref.ppf(0.84), rel=5e-3)


def test_velocity_difference_from_space_velocity_samples() -> None:
    pmra, rv = np.array([5.0, 7.0]), np.array([1.0, -2.0])
    a = space_velocity(10.0, 20.0, 10.0, pmra, 3.0, rv, 0.0, 0.0, 0.0, 0.0, n_samples=4)
    res = velocity_difference(a.samples[0], a.samples[1])
    ref = _astropy_uvw(10.0, 20.0, 10.0, pmra, 3.0, rv)  # reference: astropy, as above
    assert res.median == pytest.approx(np.linalg.norm(ref[0] - ref[1]), rel=1e-10)


def test_velocity_difference_refuses_wrong_shape() -> None:
    with pytest.raises(ValueError, match=r"Fix: give arrays of shape \(\.\.\., n_samples, 3\) in km/s\."):
        velocity_difference(np.zeros((5, 2)), np.zeros((5, 2)))


# -------------------------------------------------------------- 3-D separation


def test_separation_3d_matches_astropy() -> None:
    rng = np.random.default_rng(31)
    n = 1000
    ra1, ra2 = rng.uniform(0, 360, n), rng.uniform(0, 360, n)
    dec1 = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    dec2 = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    d1, d2 = rng.uniform(1, 1000, n), rng.uniform(1, 1000, n)
    got = separation_3d(ra1, dec1, d1, ra2, dec2, d2)
    # Reference: astropy SkyCoord.separation_3d.
    ref = SkyCoord(ra1 * u.deg, dec1 * u.deg, d1 * u.pc).separation_3d(SkyCoord(ra2 * u.deg, dec2 * u.deg, d2 * u.pc))
    np.testing.assert_allclose(got, ref.to_value(u.pc), rtol=1e-10)


def test_separation_3d_close_pair_at_nearly_equal_distances() -> None:
    # A wide binary: 2" apart at 100 pc, 0.001 pc apart in depth.
    rng = np.random.default_rng(32)
    n = 200
    ra1, dec1 = rng.uniform(0, 360, n), rng.uniform(-80, 80, n)
    ra2 = ra1 + 2.0 / 3600.0 / np.cos(np.radians(dec1))
    got = separation_3d(ra1, dec1, 100.0, ra2, dec1, 100.001)
    ref = SkyCoord(ra1 * u.deg, dec1 * u.deg, 100.0 * u.pc).separation_3d(
        SkyCoord(ra2 * u.deg, dec1 * u.deg, 100.001 * u.pc)
    )  # reference: astropy SkyCoord.separation_3d (Cartesian difference)
    np.testing.assert_allclose(got, ref.to_value(u.pc), rtol=1e-7)


def test_separation_3d_hand_value() -> None:
    # Geometry: 90 degrees apart at 3 and 4 pc, the hypotenuse is 5 pc.
    assert separation_3d(0.0, 0.0, 3.0, 90.0, 0.0, 4.0) == pytest.approx(5.0, rel=1e-14)


# ---------------------------------------------------------- closest approach


def _numerical_encounter(ra, dec, parallax, pmra, pmdec, rv) -> tuple[float, float]:
    """Reference: straight-line motion r(t) = r0 + v t in ICRS Cartesian axes from
    astropy, with |r(t)| minimised by scipy.optimize.minimize_scalar."""
    c = SkyCoord(
        ra=ra * u.deg,
        dec=dec * u.deg,
        distance=Distance(parallax=parallax * u.mas),
        pm_ra_cosdec=pmra * u.mas / u.yr,
        pm_dec=pmdec * u.mas / u.yr,
        radial_velocity=rv * u.km / u.s,
        frame="icrs",
    )
    r0 = c.cartesian.xyz.to_value(u.pc)
    v = c.velocity.d_xyz.to_value(u.pc / u.Myr)
    d0, speed = np.linalg.norm(r0), np.linalg.norm(v)
    span = 2.0 * d0 / speed  # the minimum is within d0/speed of now
    res = optimize.minimize_scalar(
        lambda t: np.linalg.norm(r0 + v * t), bounds=(-span, span), method="bounded", options={"xatol": 1e-12 * span}
    )
    return float(res.x), float(res.fun)


def test_closest_approach_matches_numerical_minimisation() -> None:
    rng = np.random.default_rng(41)
    stars = _random_stars(rng, 40)
    enc = closest_approach(stars["parallax"], stars["pmra"], stars["pmdec"], stars["rv"], 0, 0, 0, 0, n_samples=2)
    assert np.any(enc.time_myr.nominal < 0) and np.any(enc.time_myr.nominal > 0)
    for i in range(40):
        t_ref, d_ref = _numerical_encounter(*(stars[k][i] for k in ("ra", "dec", "parallax", "pmra", "pmdec", "rv")))
        assert enc.time_myr.nominal[i] == pytest.approx(t_ref, rel=1e-6, abs=1e-9)
        assert enc.distance_pc.nominal[i] == pytest.approx(d_ref, rel=1e-7)


def test_closest_approach_speed_is_astropy_space_speed() -> None:
    stars = _random_stars(np.random.default_rng(42), 50)
    enc = closest_approach(stars["parallax"], stars["pmra"], stars["pmdec"], stars["rv"], 0, 0, 0, 0, n_samples=2)
    # Reference: astropy (the length of the Galactic velocity vector).
    np.testing.assert_allclose(enc.speed_kms.nominal, np.linalg.norm(_astropy_uvw(**stars), axis=-1), rtol=1e-9)


def test_closest_approach_hand_values() -> None:
    # Geometry: 10 pc away, approaching at 10 km/s with no proper motion: it
    # arrives (d_min = 0) after 1 pc/(km/s) = 0.977792 Myr.
    enc = closest_approach(100.0, 0.0, 0.0, -10.0, 0, 0, 0, 0, n_samples=2)
    assert enc.time_myr.nominal == pytest.approx(0.977792, abs=5e-7)
    assert enc.distance_pc.nominal == pytest.approx(0.0, abs=1e-12)
    # Purely tangential motion: closest now, at the present distance.
    enc = closest_approach(100.0, 30.0, 40.0, 0.0, 0, 0, 0, 0, n_samples=2)
    assert enc.time_myr.nominal == 0.0 and enc.distance_pc.nominal == pytest.approx(10.0, rel=1e-14)
    # At rest relative to the Sun: closest now.
    enc = closest_approach(100.0, 0.0, 0.0, 0.0, 0, 0, 0, 0, n_samples=2)
    assert enc.time_myr.nominal == 0.0 and enc.distance_pc.nominal == pytest.approx(10.0, rel=1e-14)


def test_closest_approach_monte_carlo_converges_to_nominal_for_tiny_errors() -> None:
    stars = _random_stars(np.random.default_rng(43), 20)
    values = (stars["parallax"], stars["pmra"], stars["pmdec"], stars["rv"])
    enc = closest_approach(*values, 1e-7 * stars["parallax"], 1e-6, 1e-6, 1e-6, n_samples=400, rng=2)
    for q in (enc.time_myr, enc.distance_pc, enc.speed_kms):
        np.testing.assert_allclose(q.median, q.nominal, rtol=1e-5, atol=1e-9)
        assert np.all(q.p16 <= q.median) and np.all(q.median <= q.p84)


def test_closest_approach_percentiles_for_radial_velocity_errors() -> None:
    # Reference: with no proper motion t = -d / v_r, monotonic in v_r, so its
    # percentiles are those of the normal v_r mapped through it
    # (scipy.stats.norm.ppf for the 16 % and 84 % points).
    d, vr, s = 50.0, -20.0, 2.0
    enc = closest_approach(20.0, 0.0, 0.0, vr, 0.0, 0.0, 0.0, s, n_samples=200_000, rng=11)
    k = (1.0 * u.pc / (u.km / u.s)).to_value(u.Myr)  # astropy units
    z = stats.norm.ppf(0.84)
    assert enc.time_myr.median == pytest.approx(-d / vr * k, rel=2e-3)
    # t increases with v_r, so the 16 % point of t comes from the 16 % point of v_r.
    assert enc.time_myr.p16 == pytest.approx(-d / (vr - z * s) * k, rel=2e-3)
    assert enc.time_myr.p84 == pytest.approx(-d / (vr + z * s) * k, rel=2e-3)
    assert enc.samples.shape == (200_000, 3)


# ---------------------------------------------------------- peak magnitude


def test_peak_magnitude_inverse_square_law() -> None:
    # Reference: Pogson's magnitudes, m2 - m1 = 5 log10(d2 / d1) for the
    # inverse-square law (distance modulus).
    assert peak_magnitude(8.0, 10.0, 1.0) == pytest.approx(3.0, rel=1e-14)
    assert peak_magnitude(8.0, 10.0, 10.0) == pytest.approx(8.0, rel=1e-14)
    np.testing.assert_allclose(peak_magnitude([5.0, 6.0], 100.0, [100.0, 1.0]), [5.0, -4.0], rtol=1e-14)
