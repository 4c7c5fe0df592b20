"""Tests for dossier.population: the synthetic population of known truth.

Every statistical check compares a sample statistic with its analytic value
within a few standard errors (4 unless said), computed from the sample size:
a false failure is then rarer than 1 in 10⁴ per check, and the seeds are fixed.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import G
from astropy.coordinates import SkyCoord

from dossier import population
from dossier.population import (
    draw_companions,
    draw_field_velocities,
    draw_orbit_elements,
    draw_population,
    expected_companions_per_primary,
    keplerian_state,
    population_summary,
    solve_kepler,
)
from dossier.schema.settings import PairModelSettings
from dossier.screen import FIELDS

N_SE = 4.0
#: km/s per au/yr (common practice, 4.74047).
K_KMS = 4.74047
#: ICRS → Galactic rotation (rows: Galactic x, y, z axes in ICRS), the 1997 astrometric-catalogue matrix A_G, from
#: memory. astropy defines the Galactic axes from the B1950 pole instead; the two agree to about 1e-7 rad.
A_G = np.array([[-0.0548755604162154, -0.8734370902348850, -0.4838350155487132],
                [+0.4941094278755837, -0.4448296299600112, +0.7469822444972189],
                [-0.8676661490190047, -0.1980763734312015, +0.4559837761750669]])
TRUTH = ("true_class", "true_inner1", "true_inner2", "true_distance1_pc", "true_distance2_pc", "true_semimajor_au")


@pytest.fixture(scope="module")
def pop() -> dict[str, np.ndarray]:
    """A small population with the default priors and preselection."""
    return draw_population(400, seed=7)


@pytest.fixture(scope="module")
def pop_all() -> dict[str, np.ndarray]:
    """Every pair kept (no preselection), few chance neighbours, many physical companions."""
    s = PairModelSettings(bound_rate_per_decade=1.0, comoving_rate_per_decade=2.0)
    return draw_population(800, seed=8, settings=s, preselect_sigma=math.inf, field_density_range=(30.0, 30.0))


def test_same_seed_same_population() -> None:
    a, b = draw_population(60, seed=3), draw_population(60, seed=3)
    assert a.keys() == b.keys()
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)
    c = draw_population(60, seed=4)
    assert len(c["pair_id"]) != len(a["pair_id"]) or not np.array_equal(c["ra1"], a["ra1"])


def test_columns_and_units(pop: dict[str, np.ndarray]) -> None:
    inputs = [name for name, _, _ in FIELDS if name not in ("inner1", "inner2")]
    for key in (*inputs, *TRUTH):
        assert key in pop, key
    n = len(pop["pair_id"])
    assert n > 100 and all(len(v) == n for v in pop.values())
    assert pop["pair_id"][0] == "sim-000001" and len(set(pop["pair_id"])) == n
    assert set(pop["true_class"]) <= {"bound", "co-moving", "chance"}
    for i in (1, 2):
        assert np.all((pop[f"ra{i}"] >= 0) & (pop[f"ra{i}"] < 360) & (np.abs(pop[f"dec{i}"]) <= 90))
        e_plx = pop[f"parallax_error{i}"]
        assert np.all(e_plx >= 0.015)
        np.testing.assert_allclose(pop[f"pmra_error{i}"], 1.1 * e_plx, rtol=1e-12)
        np.testing.assert_allclose(pop[f"pmdec_error{i}"], 1.1 * e_plx, rtol=1e-12)
        # error model (common practice): 0.02 mas at magnitude 12, × 10^(0.2 Δmag), at least 0.015 mas
        np.testing.assert_allclose(e_plx, np.maximum(0.02 * 10 ** (0.2 * (pop[f"mag{i}"] - 12)), 0.015), rtol=1e-12)
        has_rv = np.isfinite(pop[f"rv{i}"])
        assert np.array_equal(has_rv, np.isfinite(pop[f"rv_error{i}"]))
        assert np.all(pop[f"mag{i}"][has_rv] < 13) and np.all(pop[f"rv_error{i}"][has_rv] >= 0.2)
        np.testing.assert_allclose(pop[f"mass_error{i}"], 0.1 * pop[f"mass{i}"], rtol=1e-12)
        assert np.all(np.abs(pop[f"pmra_pmdec_corr{i}"]) <= 0.3)
        # parallax in mas of a distance in pc: ϖ = 1000/d, within the noise (≤ 8σ with the close-pair factor 2)
        sd = np.hypot(e_plx, 0.01) * 2.0
        assert np.all(np.abs(pop[f"parallax{i}"] - 1000.0 / pop[f"true_distance{i}_pc"]) < 8 * sd)
    assert np.all((pop["field_density"] >= 50) & (pop["field_density"] <= 3000))
    # a primary is one star: the same position, distance and density in all its rows
    for key in ("ra1", "dec1", "true_distance1_pc", "field_density", "mass1", "mag1"):
        first = {}
        for k, x in zip(pop["true_primary"], pop[key]):
            assert first.setdefault(k, x) == x, key
    # separations in range, by astropy's SkyCoord.separation (reference library); 1e-6″ allows for rounding
    rho = SkyCoord(pop["ra1"] * u.deg, pop["dec1"] * u.deg).separation(
        SkyCoord(pop["ra2"] * u.deg, pop["dec2"] * u.deg)).arcsec
    assert np.all((rho > 1.0 - 1e-6) & (rho < 300.0 + 1e-6))
    # the preselection, with the reported errors
    dplx = np.abs(pop["parallax1"] - pop["parallax2"])
    assert np.all(dplx < 5.0 * np.hypot(pop["parallax_error1"], pop["parallax_error2"]))
    bound = pop["true_class"] == "bound"
    assert np.all(np.isfinite(pop["true_semimajor_au"][bound])) and np.all(np.isnan(pop["true_semimajor_au"][~bound]))
    summary = population_summary(pop)
    assert summary["pairs"] == n and sum(summary["by_class"].values()) == n
    assert sum(summary["by_inner"].values()) == n


def test_noise_follows_the_error_model(pop_all: dict[str, np.ndarray]) -> None:
    """Pulls (measured − true)/σ have unit dispersion, and the proper-motion pulls the stated correlation."""
    s = PairModelSettings()
    close = np.where(SkyCoord(pop_all["ra1"] * u.deg, pop_all["dec1"] * u.deg).separation(
        SkyCoord(pop_all["ra2"] * u.deg, pop_all["dec2"] * u.deg)).arcsec < s.close_separation_arcsec, 2.0, 1.0)
    pulls, products, corrs = [], [], []
    for i in (2,):  # star 2 is a different star in every row, so its pulls are independent
        sd_plx = np.hypot(pop_all[f"parallax_error{i}"], s.parallax_floor_mas) * close
        pulls.append((pop_all[f"parallax{i}"] - 1000.0 / pop_all[f"true_distance{i}_pc"]) / sd_plx)
        sd_pm = np.hypot(pop_all[f"pmra_error{i}"], s.pm_floor_masyr) * close
        z_ra = (pop_all[f"pmra{i}"] - pop_all[f"true_pmra{i}"]) / sd_pm
        z_dec = (pop_all[f"pmdec{i}"] - pop_all[f"true_pmdec{i}"]) / sd_pm
        pulls += [z_ra, z_dec]
        products.append(z_ra * z_dec)
        corrs.append(pop_all[f"pmra_pmdec_corr{i}"])
        rv = np.isfinite(pop_all[f"rv{i}"])
        pulls.append((pop_all[f"rv{i}"][rv] - pop_all[f"true_rv{i}"][rv])
                     / (np.hypot(pop_all[f"rv_error{i}"][rv], s.rv_floor_kms) * close[rv]))
    for z in pulls:
        # the sample variance of N unit normals has standard error √(2/N)
        assert abs(np.var(z) - 1.0) < N_SE * math.sqrt(2.0 / z.size)
    # E[z_ra z_dec] = ρ; Var(z_ra z_dec) = 1 + ρ² ≤ 1.09
    diff = np.concatenate(products) - np.concatenate(corrs)
    assert abs(diff.mean()) < N_SE * math.sqrt(1.09 / diff.size)


def test_projection_against_direct_vectors() -> None:
    """True proper motions and RVs against μ = v·ê/(4.74047 d), v_r = v·r̂ (common practice), at each star's own
    position. The velocity is rotated to ICRS with the matrix A_G; agreement to 1e-6 of the speed allows for the
    1e-7 rad between the two definitions of the Galactic axes and the 6 digits of 4.74047."""
    s = PairModelSettings(inner_fraction=0.0, bound_rate_per_decade=1.0)
    cols = draw_population(100, seed=5, settings=s, field_density_range=(50.0, 50.0))
    assert np.sum(cols["true_class"] == "bound") > 10
    for i in (1, 2):
        ra, dec = np.radians(cols[f"ra{i}"]), np.radians(cols[f"dec{i}"])
        r_hat = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
        e_hat = np.array([-np.sin(ra), np.cos(ra), np.zeros_like(ra)])
        n_hat = np.array([-np.sin(dec) * np.cos(ra), -np.sin(dec) * np.sin(ra), np.cos(dec)])
        v_gal = np.array([cols[f"true_{c}{i}_kms"] for c in "uvw"])
        v = A_G.T @ v_gal
        d = cols[f"true_distance{i}_pc"]
        speed = np.linalg.norm(v, axis=0)
        tol_pm = 1e-6 * speed * 1000.0 / (K_KMS * d)
        assert np.all(np.abs(cols[f"true_pmra{i}"] - 1000.0 * np.sum(v * e_hat, 0) / (K_KMS * d)) < tol_pm)
        assert np.all(np.abs(cols[f"true_pmdec{i}"] - 1000.0 * np.sum(v * n_hat, 0) / (K_KMS * d)) < tol_pm)
        assert np.all(np.abs(cols[f"true_rv{i}"] - np.sum(v * r_hat, 0)) < 1e-6 * speed)


def test_bound_pairs_are_bound(pop_all: dict[str, np.ndarray]) -> None:
    """Relative speed below escape √(2GM/r), and the vis-viva law v² = GM (2/r − 1/a) gives back a (textbook),
    with astropy's G. Positions come back from (ra, dec, distance): 1e-6 relative covers their rounding."""
    b = pop_all["true_class"] == "bound"
    assert b.sum() > 50

    def xyz(i: int) -> np.ndarray:
        ra, dec = np.radians(pop_all[f"ra{i}"][b]), np.radians(pop_all[f"dec{i}"][b])
        d = pop_all[f"true_distance{i}_pc"][b] * (u.pc.to(u.au))
        return d * np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])

    r = np.linalg.norm(xyz(2) - xyz(1), axis=0)  # au
    v = np.linalg.norm(np.array([pop_all[f"true_{c}2_kms"][b] - pop_all[f"true_{c}1_kms"][b] for c in "uvw"]), axis=0)
    gm = (G * pop_all["true_total_mass_msun"][b] * u.Msun).to_value(u.km**3 / u.s**2)
    r_km = r * u.au.to(u.km)
    assert np.all(v < np.sqrt(2.0 * gm / r_km))
    a_km = 1.0 / (2.0 / r_km - v**2 / gm)
    np.testing.assert_allclose(a_km * u.km.to(u.au), pop_all["true_semimajor_au"][b], rtol=1e-6)


def test_keplerian_state_energy() -> None:
    """Every drawn orbit has negative energy and obeys vis-viva (astropy's G)."""
    rng = np.random.default_rng(2)
    n = 5000
    a = 10 ** rng.uniform(0, 6, n)
    mass = rng.uniform(0.2, 6.0, n)
    r, v = keplerian_state(a, draw_orbit_elements(rng, n), mass)
    gm = (G * mass * u.Msun).to_value(u.km**3 / u.s**2)
    r_km = np.linalg.norm(r, axis=0) * u.au.to(u.km)
    v2 = np.sum(v**2, axis=0)
    assert np.all(0.5 * v2 - gm / r_km < 0)
    np.testing.assert_allclose(v2, gm * (2 / r_km - 1 / (a * u.au.to(u.km))), rtol=1e-9)


def test_kepler_equation_is_solved() -> None:
    rng = np.random.default_rng(3)
    m, e = rng.uniform(0, 2 * math.pi, 10_000), rng.uniform(0, 0.9999, 10_000)
    big_e = solve_kepler(m, e)
    assert np.max(np.abs(big_e - e * np.sin(big_e) - m)) < 1e-12


def test_thermal_eccentricities() -> None:
    """f(e) = 2e (Jeans 1919, MNRAS 79, 408): mean ∫2e·e de = 2/3, variance 1/2 − 4/9 = 1/18."""
    e = draw_orbit_elements(np.random.default_rng(4), 20_000)["e"]
    assert abs(e.mean() - 2 / 3) < N_SE * math.sqrt(1 / 18 / e.size)
    assert np.all((e >= 0) & (e < 1))


def test_companion_counts_match_the_integrated_rates() -> None:
    """Bound and co-moving counts per primary, before any cut, against the rates integrated by hand: for the
    defaults, 0.06 × [1/(4 ln10) + log10(300) + (1 − (200/3)^−0.6)/(0.6 ln10) + (200/3)^−0.6/(4 ln10)] and
    0.02 × [1/(3 ln10) + log10 5 + 1/(4 ln10)]; Poisson standard errors."""
    s = PairModelSettings()
    ln10 = math.log(10)
    tail = (2e5 / 3e3) ** -0.6
    by_hand = {"bound": 0.06 * (1 / (4 * ln10) + math.log10(300) + (1 - tail) / (0.6 * ln10) + tail / (4 * ln10)),
               "co-moving": 0.02 * (1 / (3 * ln10) + math.log10(5) + 1 / (4 * ln10))}
    expected = expected_companions_per_primary(s)
    for kind, value in by_hand.items():
        assert expected[kind] == pytest.approx(value, rel=1e-12)
    n = 200_000
    drawn = draw_companions(np.random.default_rng(5), n, s)
    for kind, (owner, sep) in drawn.items():
        mu = expected[kind] * n
        assert abs(owner.size - mu) < N_SE * math.sqrt(mu), kind
        assert np.all(np.diff(owner) >= 0) and np.all(sep > 0)
    # the flat part of the bound prior holds log10(300) / (total decades) of the draws (binomial error)
    a = drawn["bound"][1]
    p = 0.06 * math.log10(300) / expected["bound"]
    frac = np.mean((a >= 10) & (a <= 3000))
    assert abs(frac - p) < N_SE * math.sqrt(p * (1 - p) / a.size)


def test_chance_counts_match_the_density(pop_all: dict[str, np.ndarray]) -> None:
    """Chance neighbours: Poisson of mean π (ρmax² − ρmin²) Σ per primary (Σ fixed), before preselection."""
    mu = 800 * math.pi * (300.0**2 - 1.0**2) / 3600.0**2 * 30.0
    assert mu == pytest.approx(800 * expected_companions_per_primary(field_density_range=(30.0, 30.0))["chance"])
    n = np.sum(pop_all["true_class"] == "chance")
    assert abs(n - mu) < N_SE * math.sqrt(mu)
    # uniform in area: ρ² uniform on [ρmin², ρmax²], so the median of ρ² is halfway (binomial error of a median)
    c = pop_all["true_class"] == "chance"
    rho2 = SkyCoord(pop_all["ra1"][c] * u.deg, pop_all["dec1"][c] * u.deg).separation(
        SkyCoord(pop_all["ra2"][c] * u.deg, pop_all["dec2"][c] * u.deg)).arcsec ** 2
    assert abs(np.mean(rho2 < (300.0**2 + 1.0) / 2) - 0.5) < N_SE * math.sqrt(0.25 / rho2.size)


def test_comoving_velocity_spread(pop_all: dict[str, np.ndarray]) -> None:
    """The velocity difference of a co-moving pair is Gaussian with comoving_dispersion_kms (1 km/s) per axis;
    standard error of a variance σ²√(2/N)."""
    c = pop_all["true_class"] == "co-moving"
    dv = np.concatenate([pop_all[f"true_{a}2_kms"][c] - pop_all[f"true_{a}1_kms"][c] for a in "uvw"])
    assert dv.size > 150
    assert abs(np.mean(dv**2) - 1.0) < N_SE * math.sqrt(2.0 / dv.size)
    assert abs(dv.mean()) < N_SE / math.sqrt(dv.size)


def test_field_mean_velocity() -> None:
    """Mean heliocentric (U, V, W) = −solar motion + (0, fraction-weighted asymmetric drift, 0) (Schönrich et al.
    2010; Bensby et al. 2003); the standard error from the mixture's variance."""
    s = PairModelSettings()
    n = 200_000
    v = draw_field_velocities(np.random.default_rng(6), n, s)
    w = np.array([c.fraction for c in s.field_components])
    w /= w.sum()
    drift = np.array([c.asymmetric_drift_kms for c in s.field_components])
    sig = np.array([[c.sigma_u_kms, c.sigma_v_kms, c.sigma_w_kms] for c in s.field_components])
    mean = -np.asarray(s.solar_motion_kms) + np.array([0.0, w @ drift, 0.0])
    var = w @ sig**2 + np.array([0.0, w @ drift**2 - (w @ drift) ** 2, 0.0])
    assert np.all(np.abs(v.mean(axis=1) - mean) < N_SE * np.sqrt(var / n))
    # the expected mean by hand for the defaults: V = −12.24 + (0.94·−15 + 0.06·−46 + 0.0015·−220)/1.0015
    assert mean[1] == pytest.approx(-12.24 + (0.94 * -15 + 0.06 * -46 + 0.0015 * -220) / 1.0015, rel=1e-12)


def test_radial_velocities_for_bright_stars(pop_all: dict[str, np.ndarray]) -> None:
    """An RV with probability 0.6 for mag < 13 (the error model, common practice); binomial standard error."""
    bright = pop_all["mag2"] < 13
    has = np.isfinite(pop_all["rv2"][bright])
    assert abs(has.mean() - 0.6) < N_SE * math.sqrt(0.24 / has.size)
    assert not np.any(np.isfinite(pop_all["rv2"][~bright]))


def test_inner_fraction(pop_all: dict[str, np.ndarray]) -> None:
    """Each star hides a companion with probability inner_fraction (0.25); binomial standard errors. Primaries are
    counted once each."""
    _, first = np.unique(pop_all["true_primary"], return_index=True)
    for flags in (pop_all["true_inner1"][first], pop_all["true_inner2"]):
        assert abs(flags.mean() - 0.25) < N_SE * math.sqrt(0.25 * 0.75 / flags.size)


def test_inner_companion_motion() -> None:
    """The visible star moves at f · (2π G M / P)^(1/3) (Kepler's third law, textbook); the photocentre's mean motion
    over the baseline T is |f − β| · 2a |sin(πT/P)| / T (chord of a circle), zero for twins (f = β = 1/2)."""
    rng = np.random.default_rng(9)
    s = PairModelSettings(inner_fraction=0.999)
    m_vis = rng.uniform(0.5, 2.5, 3000)
    inner = population._draw_inner(rng, m_vis, s)
    v_photo, v_vis = population._inner_motion(inner, m_vis, 3.0)
    has, m_in, p_yr = inner["has"], inner["m_in"], inner["period_yr"]
    assert np.all((p_yr >= 1 / 365.25 * (1 - 1e-12)) & (p_yr <= 1e5 / 365.25 * (1 + 1e-12)))
    mass = m_vis + m_in
    f, beta = m_in / mass, m_in**4 / (m_vis**4 + m_in**4)
    gm = (G * mass * u.Msun).to_value(u.km**3 / u.s**2)
    v_rel = np.cbrt(2 * math.pi * gm / (p_yr * u.yr.to(u.s)))
    np.testing.assert_allclose(np.linalg.norm(v_vis, axis=0)[has], (f * v_rel)[has], rtol=1e-9)
    a_km = v_rel * p_yr * u.yr.to(u.s) / (2 * math.pi)
    chord = np.abs(f - beta) * 2 * a_km * np.abs(np.sin(math.pi * 3.0 / p_yr)) / (3.0 * u.yr.to(u.s))
    np.testing.assert_allclose(np.linalg.norm(v_photo, axis=0)[has], chord[has], rtol=1e-9, atol=1e-12)
    assert np.all(np.linalg.norm(v_vis, axis=0)[~has] == 0)
    twins = population._inner_motion({**inner, "m_in": m_vis}, m_vis, 3.0)[0]
    assert np.max(np.abs(twins)) < 1e-9


def test_bad_arguments_are_refused() -> None:
    with pytest.raises(ValueError, match="Fix:"):
        draw_population(10, 1, rho_min_arcsec=5.0, rho_max_arcsec=2.0)
    with pytest.raises(ValueError, match="Fix:"):
        draw_population(10, 1, PairModelSettings(bound_min_au=5000.0))
