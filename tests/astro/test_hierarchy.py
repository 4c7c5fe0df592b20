"""Tests of dossier/astro/hierarchy.py: triple stability, photocentres, blackbody contrasts.

Check values come from outside the module: the published formula evaluated by hand, the periastron form
of the criterion as the authors' N-body routine writes it, an independent orbit integration written here
from the Thiele-Innes formulae of METHODS.md (Heintz 1978, ch. 4), and astropy's BlackBody model.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from astropy import units as u
from astropy.modeling.models import BlackBody

from dossier.astro import hierarchy
from dossier.astro.seeding import seed_from


# --- an independent relative orbit (Heintz 1978, ch. 4; METHODS.md) --------------------------------------

def _kepler(M, e):
    E = np.where(e > 0.8, np.pi, M)
    for _ in range(60):
        E = E - (E - e * np.sin(E) - M) / (1 - e * np.cos(E))
    return E


def _relative_xy(t, P, T, e, a, i, node, omega):
    i, node, omega = np.radians(i), np.radians(node), np.radians(omega)
    A = a * (np.cos(omega) * np.cos(node) - np.sin(omega) * np.sin(node) * np.cos(i))
    B = a * (np.cos(omega) * np.sin(node) + np.sin(omega) * np.cos(node) * np.cos(i))
    F = a * (-np.sin(omega) * np.cos(node) - np.cos(omega) * np.sin(node) * np.cos(i))
    G = a * (-np.sin(omega) * np.sin(node) + np.cos(omega) * np.cos(node) * np.cos(i))
    M = np.mod(2 * np.pi * (t - T) / P, 2 * np.pi)
    E = _kepler(M, e)
    X, Y = np.cos(E) - e, np.sqrt(1 - e**2) * np.sin(E)
    return A * X + F * Y, B * X + G * Y  # north, east


# --- Mardling & Aarseth 2001 -----------------------------------------------------------------------------

def test_critical_ratio_of_a_circular_coplanar_equal_mass_triple():
    # Mardling & Aarseth 2001, MNRAS 321, 398: 2.8 (1 + q)^(2/5) with q = 1/2 for three equal masses, by hand
    assert hierarchy.ma01_critical_ratio(0.5, 0.0, 0.0) == pytest.approx(2.8 * 1.5**0.4, rel=1e-12)
    assert 2.8 * 1.5**0.4 == pytest.approx(3.2930, abs=1e-4)  # hand arithmetic


@pytest.mark.parametrize("q, e, i", [(0.1, 0.0, 0.0), (0.5, 0.3, 45.0), (2.0, 0.7, 120.0), (1.0, 0.95, 180.0)])
def test_critical_ratio_equals_the_periastron_form(q, e, i):
    # the authors' N-body stability routine: R_p/a_in > 2.8 [(1+q)(1+e)/sqrt(1-e)]^0.4 (1 - 0.3 i/pi), R_p = a_out (1-e)
    periastron = 2.8 * ((1 + q) * (1 + e) / math.sqrt(1 - e)) ** 0.4 * (1 - 0.3 * math.radians(i) / math.pi)
    assert hierarchy.ma01_critical_ratio(q, e, i) == pytest.approx(periastron / (1 - e), rel=1e-12)


def test_stable_is_vectorised():
    ok = hierarchy.ma01_stable([1.0, 1.0], [10.0, 3.0], 0.5, 0.0, 0.0)
    assert ok.tolist() == [True, False]  # critical 3.29 (above)


def test_probability_of_stability_from_projected_separations():
    rng = np.random.default_rng(seed_from("test", 1))
    wide = hierarchy.stability_probability(rng, 20000, 0.5, s_in=1.0, s_out=1000.0)
    tight = hierarchy.stability_probability(rng, 20000, 0.5, s_in=1.0, s_out=1.5)
    # a ratio of 1000 fails only for e_out near 1 (critical ratio > 1000 needs 1 - e < ~0.01: P ≈ 2 %, thermal
    # f(e) = 2e); a ratio of 1.5 is below the smallest critical value (2.8 × 0.7 for retrograde circular orbits)
    # unless the projections hide a much larger a_out: rare
    assert wide.probability > 0.95
    assert tight.probability < 0.1


def test_draws_are_reproducible_from_the_seed():
    one = hierarchy.stability_probability(np.random.default_rng(seed_from(1.5, "x")), 5000, 0.3, s_in=1, s_out=8)
    two = hierarchy.stability_probability(np.random.default_rng(seed_from(1.5, "x")), 5000, 0.3, s_in=1, s_out=8)
    assert one.probability == two.probability
    assert seed_from(1.5, "x") != seed_from(1.5, "y")


def test_mutual_inclination_of_coplanar_and_perpendicular_orbits():
    # spherical trigonometry (from memory): same plane → 0°, same node with i 30° and 120° → 90°
    assert hierarchy.mutual_inclination(40.0, 100.0, 40.0, 100.0) == pytest.approx(0.0, abs=1e-6)
    assert hierarchy.mutual_inclination(30.0, 50.0, 120.0, 50.0) == pytest.approx(90.0, abs=1e-9)


# --- photocentres --------------------------------------------------------------------------------------

def test_photocentre_factor_limits():
    # twins: barycentre and photocentre coincide; a dark companion: the photocentre is the primary (B − 0)
    assert hierarchy.photocentre_factor(1.0, 1.0, 0.0) == pytest.approx(0.0, abs=1e-15)
    assert hierarchy.photocentre_factor(1.0, 0.5, 40.0) == pytest.approx(1 / 3, rel=1e-12)
    # Pogson: Δm = 2.5 mag is a flux ratio of 10, β = 1/11
    assert hierarchy.light_fraction(2.5) == pytest.approx(1 / 11, rel=1e-12)


def test_photocentre_velocity_against_an_independent_orbit():
    el = dict(P=40.0, T=2001.3, e=0.45, a=0.35, i=62.0, node=117.0, omega=242.0)
    m1, m2, dm = 1.0, 0.6, 2.2
    big_b, beta = m2 / (m1 + m2), 1 / (1 + 10 ** (0.4 * dm))
    t0 = 2016.0
    t = t0 + np.linspace(-1e-3, 1e-3, 5)
    x, y = _relative_xy(t, **el)
    # each star about the barycentre, light-weighted photocentre (van de Kamp 1967, ch. 13; from memory)
    px = (1 - beta) * (-big_b * x) + beta * ((1 - big_b) * x)
    py = (1 - beta) * (-big_b * y) + beta * ((1 - big_b) * y)
    vn = np.gradient(px, t)[2] * 1000
    ve = np.gradient(py, t)[2] * 1000
    got_e, got_n = hierarchy.photocentre_velocity(t0, hierarchy.photocentre_factor(m1, m2, dm), *el.values())
    # central differences of 5e-4 yr on a 40 yr orbit: relative error ~1e-8; 1e-6 mas/yr allows for it
    assert got_e == pytest.approx(ve, abs=1e-6)
    assert got_n == pytest.approx(vn, abs=1e-6)
    assert abs(got_e) + abs(got_n) > 1.0  # not a trivially small test


def test_rms_photocentre_velocity_against_random_orbits():
    # Monte Carlo over isotropic orientations, uniform times and thermal e with the independent orbit above
    rng = np.random.default_rng(7)
    n = 40000
    P, a = 10.0, 100.0  # yr, mas
    e = np.sqrt(rng.uniform(0, 1, n))
    i = np.degrees(np.arccos(rng.uniform(-1, 1, n)))
    node, omega = rng.uniform(0, 360, n), rng.uniform(0, 360, n)
    t = rng.uniform(0, P, n)
    h = 1e-6 * P
    x1, y1 = _relative_xy(t + h, P, 0.0, e, a, i, node, omega)
    x0, y0 = _relative_xy(t - h, P, 0.0, e, a, i, node, omega)
    vx, vy = (x1 - x0) / (2 * h), (y1 - y0) / (2 * h)
    want = math.sqrt(0.5 * np.mean(vx**2 + vy**2))
    got = float(hierarchy.rms_photocentre_velocity(1.0, a, P))
    # 40,000 draws of a heavy-tailed v² (e up to ~1): a few per cent of sampling scatter
    assert got == pytest.approx(want, rel=0.05)


# --- blackbody contrasts --------------------------------------------------------------------------------

@pytest.mark.parametrize("wave_um", [0.545, 1.63, 2.19])
def test_band_contrast_against_astropy_blackbody(wave_um):
    t1, r1, t2, r2 = 5800.0, 1.0, 3900.0, 0.55
    w = wave_um * u.um
    ratio = (r2 / r1) ** 2 * (BlackBody(t2 * u.K)(w) / BlackBody(t1 * u.K)(w)).decompose().value
    want = -2.5 * math.log10(float(ratio))
    # astropy's constants and ours (c₂ from CODATA 2018) agree to ~1e-9 relative
    assert hierarchy.band_delta_mag(t1, r1, t2, r2, wave_um) == pytest.approx(want, abs=1e-6)


def test_a_cool_companion_has_a_smaller_contrast_in_the_infrared():
    # common practice: a K dwarf next to a G dwarf stands out more in H than in V
    t, r = hierarchy.zams_teff_radius(np.array([1.0, 0.6]))
    dv = hierarchy.band_delta_mag(t[0], r[0], t[1], r[1], hierarchy.BAND_WAVELENGTH_UM["V"])
    dh = hierarchy.band_delta_mag(t[0], r[0], t[1], r[1], hierarchy.BAND_WAVELENGTH_UM["H"])
    assert dh < dv - 0.5


def test_companion_mass_from_its_contrast_inverts_the_contrast():
    t, r = hierarchy.zams_teff_radius(np.array([1.2, 0.6]))
    dm = hierarchy.band_delta_mag(t[0], r[0], t[1], r[1], 0.545)
    mass, clamped = hierarchy.companion_mass_from_delta_mag(dm, 0.545, t[0], r[0])
    # log-linear interpolation on a grid of 241 masses over 3 decades (1.3 % steps): well inside 1 %
    assert mass[0] == pytest.approx(0.6, rel=0.01) and not clamped[0]
    assert hierarchy.companion_mass_from_delta_mag(30.0, 0.545, t[0], r[0])[1][0]  # fainter than any dwarf
