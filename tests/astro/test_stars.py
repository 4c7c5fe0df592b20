"""Tests for dossier.astro.stars.

Outside sources of the check values:

* IAU 2015 Resolutions B2 and B3, through astropy.constants (iau2015): L☉,
  R☉, GM☉, L0, σ_SB, G, M☉.
* Torres 2010, AJ 140, 1158: V☉ = −26.76 (abstract) and M_bol☉ = 4.73 on
  Flower's BC scale (§3); the branches of Flower's BC_V join to within a few
  hundredths of a magnitude (METHODS.md, "Luminosity").
* The output of the authors' own SSE code (Hurley, Pols & Tout) as printed in
  AMUSE's SSE tests (amusecode/amuse, src/amuse_sse/tests/test_sse.py), run
  at Z = 0.02: ZAMS L and R of 1 M☉ (hex floats) and R of 2 and 3 M☉; t_MS of
  1 M☉ (hex float); the main-sequence time steps of 1, 2 and 3 M☉, which SSE
  sets to pts1 t_MS with pts1 = 0.05 (SSE deltat.f: "dtm = pts1*tm"); the
  ages at which a 5 M☉ star changes type (Hertzsprung gap 104.0 Myr, giant
  branch 104.4, core helium burning 104.7, AGB 120.1); a 30 M☉ star still on
  the main sequence at 5.8 Myr and burning helium at 6.0 Myr.
* Hurley, Pols & Tout 2000, MNRAS 315, 543, eqs. (1)–(3) and (6) evaluated by
  hand; METHODS.md for the rule of thumb's factor of 2.

No value is taken from the code under test.
"""

from __future__ import annotations

import numpy as np
import pytest
from astropy import constants as const
from astropy import units as u
from hypothesis import given, settings
from hypothesis import strategies as st

from dossier.astro import stars
from dossier.astro.stars import (
    STAGES,
    age_interval,
    bolometric_correction_v,
    coeval_overlap,
    luminosity_from_magnitude,
    luminosity_from_radius_teff,
    m_fgb,
    m_hef,
    m_hook,
    ms_fraction_x,
    ms_hook_fraction,
    t_bgb,
    t_he,
    t_hei,
    t_hei_end,
    t_hook,
    t_kh_zams,
    t_ms,
    t_ms_rule_of_thumb,
    zams_luminosity,
    zams_radius,
)

# ---------------------------------------------------------------- constants


def test_literal_constants_match_astropy_iau2015() -> None:
    # IAU 2015 B3 and B2 nominal values, CODATA 2018 G (reference: astropy.constants)
    assert stars.L_SUN_W == const.L_sun.si.value
    assert stars.R_SUN_M == const.R_sun.si.value
    assert stars.GM_SUN_M3_S2 == const.GM_sun.si.value
    assert stars.L0_W == const.L_bol0.si.value
    assert stars.G_SI == const.G.si.value
    assert stars.JULIAN_YEAR_S == (1 * u.yr).to_value(u.s)  # astropy's yr is the Julian year


def test_nominal_teff_is_consistent_with_stefan_boltzmann() -> None:
    # IAU 2015 B3: T☉ = 5772 K is (L☉ / 4πR☉²σ)^1/4 rounded to 1 K (reference: astropy σ_SB)
    t_eff = (const.L_sun / (4 * np.pi * const.R_sun**2 * const.sigma_sb)) ** 0.25
    assert t_eff.to_value(u.K) == pytest.approx(stars.T_SUN_K, abs=0.5)


def test_mbol_sun_is_the_iau_b2_value() -> None:
    # IAU 2015 B2: M_bol☉ = −2.5 log10(L☉/L0) = 4.74 (to 0.01 mag)
    assert -2.5 * np.log10((const.L_sun / const.L_bol0).si.value) == pytest.approx(stars.MBOL_SUN, abs=0.001)
    assert stars.MBOL_SUN_TORRES == 4.73  # Torres 2010, §3


# ---------------------------------------------------------------- luminosity


def test_one_solar_radius_at_5772_k_is_one_solar_luminosity_exactly() -> None:
    # IAU 2015 B3: nominal values, so exactly 1
    assert luminosity_from_radius_teff(1.0, 5772.0) == 1.0


def test_luminosity_from_radius_teff_against_astropy_stefan_boltzmann() -> None:
    # reference: astropy σ_SB, R☉, L☉; the nominal T☉ agrees to ~1e-5 (IAU 2015 B3)
    R = np.array([0.5, 1.0, 2.3, 11.0])
    T = np.array([3900.0, 5772.0, 8100.0, 4400.0])
    ref = (4 * np.pi * (R * const.R_sun) ** 2 * const.sigma_sb * (T * u.K) ** 4 / const.L_sun).si.value
    assert luminosity_from_radius_teff(R, T) == pytest.approx(ref, rel=1e-4)


def test_bc_of_the_sun_matches_torres_pairing() -> None:
    # Torres 2010: V☉ = −26.76 and M_bol☉ = 4.73 on Flower's scale, so BC_V☉ = 4.73 − M_V☉,
    # with M_V☉ = V☉ − 5 log10(1 au / 10 pc) (astropy's au and pc)
    m_v_sun = -26.76 - 5 * np.log10((1 * u.au / (10 * u.pc)).si.value)
    bc_sun_torres = 4.73 - m_v_sun
    assert bc_sun_torres == pytest.approx(-0.082, abs=0.001)
    res = bolometric_correction_v(5772.0)
    assert res.bc == pytest.approx(bc_sun_torres, abs=0.01)
    assert not res.clamped


@pytest.mark.parametrize("edge", [3.70, 3.90])
def test_bc_branches_nearly_join(edge: float) -> None:
    # METHODS.md / Torres 2010: the three polynomials jump by ~0.02 mag at their boundaries;
    # a misprinted coefficient would make the jump large.
    below = bolometric_correction_v(10 ** (edge - 1e-9)).bc
    above = bolometric_correction_v(10**edge).bc
    assert abs(above - below) < 0.03


@pytest.mark.parametrize("teff, expected", [(4000.0, -1.2), (30000.0, -2.9)])
def test_bc_rough_values_from_memory(teff: float, expected: float) -> None:
    # from memory: Flower 1996 Table 3 gives about −1.2 mag near 4000 K and about −2.9 mag near
    # 30,000 K (loose tolerance: these are recollections, not transcriptions)
    assert bolometric_correction_v(teff).bc == pytest.approx(expected, abs=0.2)


def test_bc_clamps_and_flags_outside_the_calibrated_range() -> None:
    res = bolometric_correction_v([2500.0, 3300.0, 50000.0, 80000.0, np.nan])
    assert res.clamped.tolist() == [True, False, False, True, False]
    assert res.bc[0] == res.bc[1] and res.bc[2] == res.bc[3]
    assert np.isnan(res.bc[4])


def test_luminosity_of_the_sun_from_its_apparent_magnitude() -> None:
    # Torres 2010: V☉ = −26.76 with Flower's BC and M_bol☉ = 4.73 gives 1 L☉ (to the ~0.01 mag of BC☉)
    d_sun_pc = (1 * u.au / u.pc).si.value
    bc = bolometric_correction_v(5772.0).bc
    L = luminosity_from_magnitude(-26.76, d_sun_pc, bc, mbol_sun=stars.MBOL_SUN_TORRES)
    assert L == pytest.approx(1.0, rel=0.01)


def test_luminosity_from_magnitude_on_the_iau_b2_scale() -> None:
    # IAU 2015 B2: L = L0 10^(−0.4 M_bol); with M_bol☉ = 4.74 this agrees to the 0.0007 mag rounding
    m, d, bc, a = np.array([8.2, 11.5]), np.array([25.0, 410.0]), np.array([-0.3, -1.1]), np.array([0.0, 0.4])
    mbol = m - 5 * np.log10(d / 10) - a + bc  # distance modulus (definition)
    ref = (const.L_bol0 * 10 ** (-0.4 * mbol) / const.L_sun).si.value
    assert luminosity_from_magnitude(m, d, bc, a) == pytest.approx(ref, rel=1e-3)


def test_luminosity_from_magnitude_definitions() -> None:
    # Pogson's scale: at 10 pc with no BC or extinction, M_bol = m; 2.5 mag is a factor 10
    assert luminosity_from_magnitude(4.74, 10.0, 0.0) == pytest.approx(1.0, rel=1e-15)
    assert luminosity_from_magnitude(4.74, 10.0, 0.0, A_V=2.5) == pytest.approx(10.0, rel=1e-14)
    assert luminosity_from_magnitude(4.74, 100.0, 0.0) == pytest.approx(100.0, rel=1e-14)


# ---------------------------------------------------------------- ZAMS (Tout et al. 1996)


def test_zams_one_solar_mass_matches_sse_output() -> None:
    # SSE output printed in AMUSE's test_sse.py (Z = 0.02, age 1e-6 Myr, i.e. at the ZAMS):
    # L = 0x1.653b1b2d0333bp-1 ≈ 0.6977, R = 0x1.c6c8a1c793bcep-1 ≈ 0.8882
    assert zams_luminosity(1.0) == pytest.approx(float.fromhex("0x1.653b1b2d0333bp-1"), rel=1e-6)
    assert zams_radius(1.0) == pytest.approx(float.fromhex("0x1.c6c8a1c793bcep-1"), rel=1e-6)
    assert zams_luminosity(1.0) == pytest.approx(0.698, abs=5e-4)  # the brief's "about 0.698"
    assert zams_radius(1.0) == pytest.approx(0.888, abs=5e-4)


def test_zams_radii_match_sse_output() -> None:
    # AMUSE test_sse.py TestSSE.test11: SSE radii at age 0 for 1, 2, 3 M☉, Z = 0.02
    assert zams_radius([1.0, 2.0, 3.0]) == pytest.approx([0.8882494502, 1.610210385, 1.979134445], rel=1e-8)


def test_zams_is_vectorised_over_mass_and_metallicity() -> None:
    M = np.array([[0.5], [1.0]])
    Z = np.array([0.001, 0.02])
    L = zams_luminosity(M, Z)
    assert L.shape == (2, 2)
    assert L[1, 1] == pytest.approx(float(zams_luminosity(1.0, 0.02)), rel=1e-15)
    assert np.isnan(zams_radius([-1.0, 0.0])).all()


# ---------------------------------------------------------------- lifetimes (Hurley et al. 2000)


def test_t_ms_one_solar_mass_matches_sse_output() -> None:
    # AMUSE test_sse.py: SSE's t_ms for 1 M☉, Z = 0.02 = 0x1.57d90abe54643p+13 Myr ≈ 11003 Myr
    assert t_ms(1.0) == pytest.approx(float.fromhex("0x1.57d90abe54643p+13"), rel=1e-7)
    # from memory: the Sun's main-sequence lifetime is about 10 Gyr
    assert t_ms(1.0) == pytest.approx(1.0e4, rel=0.15)


def test_t_ms_matches_sse_main_sequence_time_steps() -> None:
    # AMUSE test_sse.py: MS time steps 550.1565, 58.2081, 18.8768 Myr for 1, 2, 3 M☉ at Z = 0.02;
    # SSE deltat.f sets dtm = pts1 * tm on the main sequence, pts1 = 0.05
    steps = np.array([550.1565, 58.2081, 18.8768])
    assert t_ms([1.0, 2.0, 3.0]) == pytest.approx(steps / 0.05, rel=2e-5)


def test_five_solar_mass_phase_times_match_sse_output() -> None:
    # AMUSE test_sse.py TestSSE.test1: a 5 M☉ star (Z = 0.02) enters the Hertzsprung gap at 104.0 Myr,
    # the giant branch at 104.4, core helium burning at 104.7 and the AGB at 120.1 (printed to 0.1 Myr)
    assert t_ms(5.0) == pytest.approx(104.0, abs=0.1)
    assert t_bgb(5.0) == pytest.approx(104.4, abs=0.1)
    assert t_hei(5.0) == pytest.approx(104.7, abs=0.1)
    assert t_hei_end(5.0) == pytest.approx(120.1, abs=0.1)
    assert t_he(5.0) == pytest.approx(120.1 - 104.7, abs=0.2)


def test_thirty_solar_masses_leaves_the_main_sequence_between_5_8_and_6_myr() -> None:
    # AMUSE test_sse.py TestSSE.test19: main sequence at 5.8 Myr, core helium burning at 6.0 Myr
    assert 5.8 < t_ms(30.0) < 6.0
    assert 5.8 < t_hei(30.0) < 6.0


def test_transition_masses_by_hand() -> None:
    # Hurley et al. 2000 eqs. (1)–(3) at Z = 0.02 (ζ = 0), by hand; eq. (3) in the paper's form
    assert m_hook(0.02) == pytest.approx(1.0185, rel=1e-12)
    assert m_hef(0.02) == pytest.approx(1.995, rel=1e-12)
    for Z in (1e-4, 1e-3, 0.004, 0.02, 0.03):
        paper = 13.048 * (Z / 0.02) ** 0.06 / (1 + 0.0012 * (0.02 / Z) ** 1.27)
        # the paper rounds 16.5 × 0.02^0.06 to 13.048 and 0.005^1.27 = 0.001195 to 0.0012
        assert m_fgb(Z) == pytest.approx(paper, rel=3e-3)


def test_x_and_mu_by_hand() -> None:
    # Hurley et al. 2000 eq. (6): x = max(0.95, min(0.95 − 0.03(ζ + 0.30103), 0.99))
    assert ms_fraction_x(0.02) == 0.95
    assert ms_fraction_x(1e-4) == pytest.approx(0.99)
    zeta = np.log10(0.001 / 0.02)
    assert ms_fraction_x(0.001) == pytest.approx(0.95 - 0.03 * (zeta + 0.30103), rel=1e-12)
    # eq. (7) at Z = 0.02 with Appendix A's ζ⁰ terms a6 = 19.49814, a7 = 4.903830 (the larger term at 1 M☉)
    assert ms_hook_fraction(1.0) == pytest.approx(1 - 0.01 * 19.49814, rel=1e-12)
    assert ms_hook_fraction(100.0) >= 0.5
    assert t_hook(3.0) == pytest.approx(ms_hook_fraction(3.0) * t_bgb(3.0), rel=1e-14)


def test_rule_of_thumb_within_a_factor_of_two_between_1_and_10_msun() -> None:
    # METHODS.md: t ≈ 10 Gyr M^−2.5 is within a factor ~2 of the fits between 1 and 10 M☉
    M = np.geomspace(1.0, 10.0, 60)
    ratio = t_ms_rule_of_thumb(M) / t_ms(M)
    assert np.all((ratio > 0.5) & (ratio < 2.0))
    assert t_ms_rule_of_thumb(1.0) == 1.0e4  # the rule itself


@settings(max_examples=200, deadline=None)
@given(M=st.floats(0.1, 100.0), logz=st.floats(-4.0, np.log10(0.03)))
def test_phases_come_in_order(M: float, logz: float) -> None:
    # Hurley et al. 2000 §5: main sequence, then Hertzsprung gap to the BGB, then helium ignition,
    # then core helium burning
    Z = 10.0**logz
    assert 0 < t_ms(M, Z) <= t_bgb(M, Z) <= t_hei(M, Z) < t_hei_end(M, Z)
    assert t_he(M, Z) > 0


def test_masses_above_100_are_evaluated_at_100_as_in_sse() -> None:
    # SSE star.f: "if(mass0.gt.100.d0) mass = 100.d0"
    assert t_ms(150.0) == t_ms(100.0)
    assert t_hei_end(150.0) == t_hei_end(100.0)


# ---------------------------------------------------------------- ages


def test_kelvin_helmholtz_time_against_astropy_constants() -> None:
    # t_KH = G M² / (R L) with astropy's G, M☉, R☉, L☉ (reference) and the ZAMS R, L
    M = np.array([0.3, 1.0, 8.0])
    ref = (const.G * (M * const.M_sun) ** 2 / (zams_radius(M) * const.R_sun * zams_luminosity(M) * const.L_sun))
    assert t_kh_zams(M) == pytest.approx(ref.to_value(u.Myr), rel=1e-6)


def test_main_sequence_upper_bound_falls_with_mass() -> None:
    M = np.geomspace(0.3, 60.0, 40)
    high = age_interval(M, 0.0, "main-sequence").high
    assert np.all(np.diff(high) < 0)
    assert np.all(age_interval(M, 0.0, "main-sequence").low == 0.0)


@pytest.mark.parametrize("stage", STAGES)
def test_interval_widens_with_the_mass_error(stage: str) -> None:
    # a lower mass lives longer: M − 2σ pushes the upper edge up, M + 2σ the lower edge down
    M = np.array([0.9, 2.5, 7.0])
    narrow = age_interval(M, 0.0, stage)
    wide = age_interval(M, 0.1 * M, stage)
    wider = age_interval(M, 0.2 * M, stage)
    assert np.all(narrow.low <= narrow.high)
    assert np.all((wider.low <= wide.low) & (wide.low <= narrow.low))
    assert np.all((wider.high >= wide.high) & (wide.high >= narrow.high))
    if stage not in ("pre-main-sequence", "main-sequence"):
        assert np.all(wide.low < narrow.low)
    assert np.all(wide.high > narrow.high)


def test_exact_mass_gives_the_phase_boundaries() -> None:
    M = 2.5
    assert age_interval(M, 0.0, "main-sequence").high == pytest.approx(t_ms(M), rel=1e-12)
    sub = age_interval(M, 0.0, "subgiant")
    assert (float(sub.low), float(sub.high)) == pytest.approx((float(t_ms(M)), float(t_bgb(M))), rel=1e-12)
    assert age_interval(M, 0.0, "leaving-main-sequence") == sub
    cheb = age_interval(M, 0.0, "core-helium-burning")
    assert (float(cheb.low), float(cheb.high)) == pytest.approx((float(t_hei(M)), float(t_hei_end(M))), rel=1e-12)
    giant = age_interval(M, 0.0, "giant")
    assert giant.low == pytest.approx(t_bgb(M), rel=1e-12)
    assert giant.high == pytest.approx((1 + stars.AGB_ALLOWANCE) * t_hei_end(M), rel=1e-12)
    assert age_interval(M, 0.0, "asymptotic-giant").low == pytest.approx(t_hei_end(M), rel=1e-12)
    assert age_interval(M, 0.0, "pre-main-sequence").high == pytest.approx(t_kh_zams(M), rel=1e-12)


def test_age_interval_is_vectorised_over_stars_and_stages() -> None:
    M = np.array([1.0, 1.3, 0.8])
    sig = np.array([0.05, 0.1, 0.0])
    stage = ["subgiant", "giant", "main-sequence"]
    both = age_interval(M, sig, stage)
    for i in range(3):
        one = age_interval(M[i], sig[i], stage[i])
        assert (both.low[i], both.high[i]) == pytest.approx((float(one.low), float(one.high)), rel=1e-14)
    assert np.isnan(age_interval([np.nan, -1.0], 0.1, "giant").low).all()


def test_unknown_stage_names_the_known_ones() -> None:
    with pytest.raises(ValueError) as err:
        age_interval(1.0, 0.1, "red-dwarf")
    assert str(err.value) == ("unknown evolutionary stage 'red-dwarf'. Did you mean one of: pre-main-sequence, "
                              "main-sequence, leaving-main-sequence, subgiant, giant, core-helium-burning, "
                              "asymptotic-giant?")


# ---------------------------------------------------------------- coevality


def test_overlapping_intervals() -> None:
    res = coeval_overlap([0.0, 800.0, 500.0], [1200.0, 1500.0, 1000.0])
    assert res.consistent
    assert (res.common_low, res.common_high) == (800.0, 1000.0)
    assert res.gap_myr == 0.0 and res.gap_dex == 0.0


def test_disjoint_intervals_measure_the_gap() -> None:
    # hand values: the oldest lower bound is 400 Myr, the youngest upper bound 200 Myr: a factor 2
    res = coeval_overlap([0.0, 400.0], [200.0, 900.0])
    assert not res.consistent
    assert np.isnan(res.common_low) and np.isnan(res.common_high)
    assert res.gap_myr == 200.0
    assert res.gap_dex == pytest.approx(np.log10(2.0), rel=1e-14)
    assert (res.oldest_low, res.youngest_high) == (1, 0)


def test_coeval_overlap_over_many_systems_ignores_missing_stars() -> None:
    lows = np.array([[0.0, 5.0, np.nan], [10.0, 0.0, 30.0]])
    highs = np.array([[10.0, 8.0, np.nan], [20.0, 25.0, 40.0]])
    res = coeval_overlap(lows, highs)
    assert res.consistent.tolist() == [True, False]
    assert res.common_low[0] == 5.0 and res.common_high[0] == 8.0
    assert res.gap_myr[1] == 10.0


def test_an_evolved_star_and_a_main_sequence_companion() -> None:
    # end to end: a 3 M☉ giant and a 1 M☉ main-sequence companion can be coeval; a 3 M☉ main-sequence
    # star and a 1 M☉ giant cannot (the giant must be older than a 1 M☉ main-sequence lifetime, ~10 Gyr,
    # far beyond the 3 M☉ main-sequence lifetime)
    ok = age_interval([3.0, 1.0], [0.1, 0.05], ["giant", "main-sequence"])
    assert coeval_overlap(ok.low, ok.high).consistent
    bad = age_interval([3.0, 1.0], [0.1, 0.05], ["main-sequence", "giant"])
    res = coeval_overlap(bad.low, bad.high)
    assert not res.consistent and res.gap_dex > 1.0
