"""The pair model's terms against independent computations (dossier/astro/pairmodel.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from dossier.astro import pairmodel as pm
from dossier.schema.settings import PairModelSettings

K = 4.740470463533348  # km/s per mas/yr at 1 kpc: 1 au per Julian year (IAU 2012 au; common practice)


def settings(**kw):
    return PairModelSettings(field_density_per_deg2=800.0, **kw)


def from_space_velocity(v_icrs, ra, dec, d_pc):
    """Proper motion and RV of a star at (ra, dec, d) with ICRS Cartesian velocity v, by astropy."""
    import astropy.units as u
    from astropy.coordinates import ICRS, CartesianDifferential, CartesianRepresentation, SkyCoord

    c = SkyCoord(ra=ra * u.deg, dec=dec * u.deg, distance=d_pc * u.pc, frame="icrs")
    pos = c.cartesian.without_differentials()
    vel = CartesianDifferential(*(np.asarray(v_icrs, float) * u.km / u.s))
    moving = SkyCoord(ICRS(pos.with_differentials(vel)))
    return moving.pm_ra_cosdec.to_value(u.mas / u.yr), moving.pm_dec.to_value(u.mas / u.yr), \
        moving.radial_velocity.to_value(u.km / u.s)


def pair(v1, v2, ra1=120.0, dec1=30.0, rho_deg=600 / 3600, d_pc=100.0, e_plx=0.02, e_pm=0.02, rv=True, **extra):
    ra2, dec2 = ra1, dec1 + rho_deg
    cols = {"ra1": ra1, "dec1": dec1, "ra2": ra2, "dec2": dec2}
    for i, (v, ra, dec) in enumerate(((v1, ra1, dec1), (v2, ra2, dec2)), 1):
        pmra, pmdec, vr = from_space_velocity(v, ra, dec, d_pc)
        cols.update({f"parallax{i}": 1000 / d_pc, f"parallax_error{i}": e_plx, f"pmra{i}": pmra, f"pmdec{i}": pmdec,
                     f"pmra_error{i}": e_pm, f"pmdec_error{i}": e_pm, f"mass{i}": 1.0, f"mass_error{i}": 0.1})
        if rv:
            cols.update({f"rv{i}": vr, f"rv_error{i}": 0.2})
    cols.update(extra)
    return {k: np.atleast_1d(np.asarray(v, float)) for k, v in cols.items()}


def test_the_same_space_velocity_at_two_positions_shows_no_difference_after_perspective():
    # Reference: astropy's own projection of one Cartesian velocity at the two positions (SkyCoord with
    # differentials). 600″ apart at 100 pc with 40 km/s along the line of sight, the raw proper motions differ
    # by more than 0.05 km/s; after the model's perspective correction the difference is zero to rounding.
    # (A precise parallax and no error floor, so that the distance the model uses is the true one: the
    # residual scales with the fractional distance error.)
    v = np.array([-25.0, 31.0, 40.0])
    cols = pair(v, v, e_plx=1e-7)
    raw = K * 0.1 * math.hypot(cols["pmra1"][0] - cols["pmra2"][0], cols["pmdec1"][0] - cols["pmdec2"][0])
    assert raw > 0.05
    r = pm.evaluate(cols, settings(parallax_floor_mas=0.0), 1.35)
    assert r["delta_v_tangential_kms"][0] == pytest.approx(0.0, abs=1e-6)
    assert r["delta_v_radial_kms"][0] == pytest.approx(0.0, abs=1e-6)
    # without radial velocities the field's mean radial velocity stands in, with its spread as an error
    r2 = pm.evaluate(pair(v, v, rv=False), settings(), 1.35)
    assert r2["p_bound_given_physical"][0] > 0.5 and r2["p_physical"][0] > 0.999


def test_field_mean_velocity_is_the_solar_motion_and_drift_seen_through_astropy():
    # Reference: astropy's Galactic frame: the heliocentric mean (−U☉, V_a − V☉, −W☉) (Schönrich et al. 2010;
    # Bensby et al. 2003), turned into ICRS Cartesian by astropy, equals the model's rotation of it
    import astropy.units as u
    from astropy.coordinates import ICRS, CartesianDifferential, CartesianRepresentation, Galactic

    s = settings()
    weights, means, covs = pm.field_moments(s)
    thin = s.field_components[0]
    u_, v_, w_ = s.solar_motion_kms
    gal = np.array([-u_, thin.asymmetric_drift_kms - v_, -w_])
    rep = CartesianRepresentation([1, 0, 0] * u.pc).with_differentials(CartesianDifferential(*(gal * u.km / u.s)))
    icrs = Galactic(rep).transform_to(ICRS()).velocity.d_xyz.to_value(u.km / u.s)
    np.testing.assert_allclose(means[0], icrs, atol=1e-9)
    assert weights.sum() == pytest.approx(1.0)
    # a covariance keeps its trace under a rotation
    assert np.trace(covs[0]) == pytest.approx(thin.sigma_u_kms**2 + thin.sigma_v_kms**2 + thin.sigma_w_kms**2)


def test_field_density_of_a_star_is_the_projected_gaussian_mixture():
    # Reference: scipy.stats.multivariate_normal on the covariance projected by hand onto (east, north, radial)
    from scipy.stats import multivariate_normal

    s = settings()
    weights, means, covs = pm.field_moments(s)
    B = pm._basis(np.array([200.0]), np.array([-40.0]))
    v = np.array([[[12.0, -30.0, 25.0]]])
    meas = np.array([np.array([0.5]), np.array([0.1]), np.array([0.7])])  # mas²/yr²
    kd = np.array([[K * 0.2]])
    got = pm._log_field(v, B, kd, meas, np.array([0.09]), np.array([True]), weights, means, covs)[0, 0]
    want = 0.0
    for w, mu, S in zip(weights, means, covs):
        cov = B[0] @ S @ B[0].T
        cov[:2, :2] += kd[0, 0] ** 2 * np.array([[0.5, 0.1], [0.1, 0.7]])
        cov[2, 2] += 0.09
        want += w * multivariate_normal(B[0] @ mu, cov).pdf(v[0, 0])
    assert got == pytest.approx(math.log(want), rel=1e-10)


def test_orbit_table_projects_like_random_orbits_and_never_exceeds_escape():
    # ⟨s/a⟩ = (π/4)(1 + e²/2) for random orientation and phase (METHODS.md); thermal e has ⟨e²⟩ = 1/2, so
    # ⟨s/a⟩ = 5π/16 = 0.982; a bound relative speed is below escape, v² ≤ 2GM/r ≤ 2GM/s, so u² ≤ 2.
    xi, ut, ur = pm.orbit_table()
    assert xi.mean() == pytest.approx(5 * math.pi / 16, abs=0.02)  # 128 stratified points
    assert np.all(ut**2 + ur**2 <= 2 + 1e-12)


def test_tangential_likelihood_is_the_rice_density():
    # Reference: scipy.stats.rice: a 2-D isotropic Gaussian of per-axis σ about a point at distance ν has
    # |D| ~ Rice(ν/σ) σ, and the density in the plane is that over 2π|D|. One orbit, no smoothing.
    from scipy.stats import rice

    vc, sigma, D = 1.3, 0.4, 0.9
    ut, ur = np.array([0.7]), np.array([0.0])
    logw = np.zeros((1, 1, 1))
    saved = pm.ORBIT_BANDWIDTH
    try:
        pm.ORBIT_BANDWIDTH = 0.0
        got = pm._log_bound(np.array([[D]]), np.array([[0.0]]), np.array([[sigma**2]]), np.array([[1.0]]),
                            np.array([[vc]]), np.array([0.0]), ut, ur, logw, np.array([False]))[0, 0]
    finally:
        pm.ORBIT_BANDWIDTH = saved
    want = rice.pdf(D / sigma, 0.7 * vc / sigma) / sigma / (2 * math.pi * D)
    assert got == pytest.approx(math.log(want), rel=1e-10)


def test_bound_likelihood_integrates_to_one_over_the_plane():
    # Normalisation (a density in the plane): ∫ p(D) 2πD dD = 1, by scipy.integrate.quad
    from scipy.integrate import quad

    xi, ut, ur = pm.orbit_table()
    rate = pm.bound_rate(np.full((1, 1, xi.size), 5000.0) / xi, settings())
    logw = pm._orbit_log_weights(rate)

    def density(d):
        return math.exp(pm._log_bound(np.array([[d]]), np.array([[0.0]]), np.array([[0.05**2]]), np.array([[1.0]]),
                                      np.array([[2.0]]), np.array([0.1]), ut, ur, logw, np.array([False]))[0, 0])

    total, _ = quad(lambda d: density(d) * 2 * math.pi * d, 0, 20, limit=400, points=[0.5, 1, 2, 3])
    assert total == pytest.approx(1.0, abs=2e-4)


def test_parallax_term_is_the_bayes_factor_by_direct_integration():
    # Reference: scipy.integrate.quad of the EDSD prior (Bailer-Jones 2015, PASP 127, 994): physical, one
    # distance (with the depth allowance and the outlier mixture); chance, two independent distances.
    from scipy.integrate import quad

    s = settings()
    L = 1.35
    p1, e1, p2, e2 = 3.2, 0.05, 3.05, 0.06
    cols = {"ra1": 10.0, "dec1": 5.0, "ra2": 10.0, "dec2": 5.0 + 20 / 3600, "parallax1": p1, "parallax_error1": e1,
            "parallax2": p2, "parallax_error2": e2}
    r = pm.evaluate({k: np.array([v]) for k, v in cols.items()}, s, L)
    e1f, e2f = math.hypot(e1, s.parallax_floor_mas), math.hypot(e2, s.parallax_floor_mas)
    depth = ((p1 / e1f**2 + p2 / e2f**2) / (1 / e1f**2 + 1 / e2f**2)) * math.radians(20 / 3600)

    def prior(rk):
        return rk**2 * math.exp(-rk / L) / (2 * L**3)

    def gauss(x, m, s_):
        return math.exp(-0.5 * ((x - m) / s_) ** 2) / (s_ * math.sqrt(2 * math.pi))

    def marginal(p, e):  # the integrand is narrow: integrate over ±12σ in parallax about the measured one
        return quad(lambda rk: prior(rk) * gauss(p, 1 / rk, e), 1 / (p + 12 * e), 1 / (p - 12 * e), limit=200)[0]

    # one distance: N(ϖ1 | 1/r, σ1) N(ϖ2 | 1/r, σ2') = N(Δϖ | 0, √(σ1²+σ2'²)) N(ϖ̄ | 1/r, σ̄) with the depth in Δϖ only
    s_diff = math.sqrt(e1f**2 + e2f**2 + depth**2)
    pbar = (p1 / e1f**2 + p2 / e2f**2) / (1 / e1f**2 + 1 / e2f**2)
    sbar = 1 / math.sqrt(1 / e1f**2 + 1 / e2f**2)
    eps = s.outlier_fraction
    phys = (1 - eps) * gauss(p1 - p2, 0, s_diff) * marginal(pbar, sbar) + eps * marginal(p1, e1f) * marginal(p2, e2f)
    want = math.log10(phys / (marginal(p1, e1f) * marginal(p2, e2f)))
    assert r["parallax_log10"][0] == pytest.approx(want, abs=1e-6)


def test_swapping_the_two_stars_changes_nothing():
    v1, v2 = np.array([10.0, -20.0, 5.0]), np.array([10.4, -19.8, 5.3])
    a = pair(v1, v2, rho_deg=40 / 3600)
    b = {}
    for k, v in a.items():
        b[k[:-1] + {"1": "2", "2": "1"}[k[-1]] if k[-1] in "12" else k] = v
    ra, rb = pm.evaluate(a, settings(), 1.35), pm.evaluate(b, settings(), 1.35)
    for key in ("log_bound", "log_comoving", "log_chance", "prior_log10", "parallax_log10", "motion_log10",
                "binding_motion_log10"):
        assert rb[key][0] == pytest.approx(ra[key][0], rel=1e-9, abs=1e-9), key


def test_a_common_space_velocity_does_not_change_whether_the_pair_is_bound():
    # Adding one space velocity to both stars (projected at each position by astropy) leaves the velocity
    # difference, hence P(bound | physical), unchanged; P(physical) may change, because the field is more or
    # less likely to have stars moving that way (its mean streaming motion and dispersions).
    v1, v2 = np.array([10.0, -20.0, 5.0]), np.array([10.3, -19.6, 5.2])
    extra = np.array([35.0, 12.0, -60.0])
    a = pm.evaluate(pair(v1, v2, rho_deg=30 / 3600), settings(), 1.35)
    b = pm.evaluate(pair(v1 + extra, v2 + extra, rho_deg=30 / 3600), settings(), 1.35)
    # to 1e-4: the model turns proper motions into velocities at its distance nodes, whose fractional error
    # (the parallax's, 0.2 %) times the change of the added velocity's projection over 30″ moves Δv by ~1e-5 km/s
    assert b["p_bound_given_physical"][0] == pytest.approx(a["p_bound_given_physical"][0], abs=1e-4)
    assert b["binding_motion_log10"][0] == pytest.approx(a["binding_motion_log10"][0], abs=1e-4)


def test_an_unresolved_companion_makes_an_excess_velocity_less_surprising_for_a_bound_pair():
    # the mixture term: at 30,000 au a 1 km/s difference is four times the escape speed. With no inner
    # companion possible it rules out a bound orbit; with a known inner binary it is what one expects.
    v1, v2 = np.array([10.0, -20.0, 5.0]), np.array([10.9, -20.5, 5.0])
    none = pm.evaluate(pair(v1, v2, rho_deg=300 / 3600, inner1=0.0, inner2=0.0), settings(), 1.35)
    known = pm.evaluate(pair(v1, v2, rho_deg=300 / 3600, inner1=1.0, inner2=0.0), settings(), 1.35)
    assert none["p_bound_given_physical"][0] < 1e-4
    assert known["p_bound_given_physical"][0] > 0.9


def test_one_bad_number_moves_the_odds_by_at_most_about_one_over_the_outlier_fraction():
    # the robust likelihood: a parallax 500σ off costs about log10(ε), not −10⁵
    s = settings()
    v = np.array([10.0, -20.0, 5.0])
    cols = pair(v, v, rho_deg=20 / 3600)
    cols["parallax2"] = cols["parallax2"] + 500 * 0.02
    r = pm.evaluate(cols, s, 1.35)
    assert r["parallax_log10"][0] == pytest.approx(math.log10(s.outlier_fraction), abs=0.05)


@pytest.mark.parametrize("seed", range(6))
def test_inflating_every_error_never_makes_agreeing_data_more_decisive(seed):
    # For data that agree exactly with a physical pair (one distance, one space velocity), larger errors can
    # only weaken the evidence: the log10 odds physical : chance never grow as every error is multiplied by
    # k ≥ 1, and the motions' bound : co-moving term never moves away from zero. (For data in tension the
    # general statement is false for any Bayesian model: a 3σ disagreement that becomes 1σ is evidence *for*;
    # see docs/decisions.md.)
    rng = np.random.default_rng(seed)
    v = rng.normal(0, 25, 3)
    base = pair(v, v, ra1=rng.uniform(0, 360), dec1=rng.uniform(-70, 70), rho_deg=rng.uniform(5, 600) / 3600,
                d_pc=rng.uniform(30, 400), e_plx=rng.uniform(0.01, 0.1), e_pm=rng.uniform(0.01, 0.1))
    last_odds, last_bind = math.inf, math.inf
    for k in (1.0, 1.5, 2.0, 4.0, 10.0):
        cols = {key: (value * k if "error" in key else value) for key, value in base.items()}
        r = pm.evaluate(cols, settings(parallax_floor_mas=0.0, pm_floor_masyr=0.0, rv_floor_kms=0.0), 1.35)
        odds = r["parallax_log10"][0] + r["motion_log10"][0]
        assert odds <= last_odds + 1e-6, (k, odds, last_odds)
        bind = abs(r["binding_motion_log10"][0])
        assert bind <= last_bind + 1e-6, (k, bind, last_bind)
        last_odds, last_bind = odds, bind
