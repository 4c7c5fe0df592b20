"""Grades of claimed companions (dossier/rules/companion_claims.py) on small invented systems."""

from __future__ import annotations

import math

import pytest

from dossier.engine import weigh_system
from dossier.schema.models import System
from tests.rules import harness


def system(claims, non_detections=()):
    data = harness.simulate("bound", 1).model_dump(exclude_none=True)
    data["components"]["C"] = {}
    data["pairs"].append({"id": "AC", "members": ["A", "C"]})
    data["claims"] = list(claims)
    data["non_detections"] = list(non_detections)
    return System.model_validate(data)


def claim(epoch, rho=0.21, theta=145.0, dm=3.2, band="V", method="speckle-interferometry", ref=harness.REF):
    return {"companion": "C", "around": "A", "method": method, "epoch": epoch, "rho": [rho, 0.02],
            "theta": [theta, 2.0], "delta_mag": [dm, 0.3], "band": band, "ref": ref}


def search(epoch, rho_range=(0.05, 2.0), contrast=6.0, band="H", ref=harness.REF):
    return {"around": "A", "method": "adaptive-optics", "epoch": epoch, "rho_range": list(rho_range),
            "contrast": contrast, "band": band, "ref": ref}


def grade(sys):
    result = weigh_system(sys, harness.settings())
    return next(a for a in result.assessments if a.rule == "companion-claims" and a.subject == "C")


def test_one_detection_and_a_search_that_should_have_seen_it_is_doubtful():
    a = grade(system([claim(1985.4)], [search(2019.6)]))
    assert a.grade == "doubtful" and a.outcome == "against"
    assert any("Not seen by adaptive-optics" in r and "should have been seen" in r for r in a.reasons)
    # the band differs (V against H): the contrast is converted and the probability of detection shown
    assert any("P(detectable) = " in r and "Δm(H) ≈" in r for r in a.reasons)


def test_two_searches_that_should_have_seen_it_refute_it():
    a = grade(system([claim(1985.4)], [search(2019.6), search(2021.3, band="V")]))
    assert a.grade == "refuted"


def test_a_search_too_shallow_or_elsewhere_leaves_a_candidate():
    # same band, contrast 3.0 against a claimed Δm = 3.2 ± 0.3: P(bright enough) ≈ 0.25
    assert grade(system([claim(1985.4)], [search(2019.6, contrast=3.0, band="V")])).grade == "candidate"
    assert grade(system([claim(1985.4)], [search(2019.6, rho_range=(0.3, 2.0))])).grade == "candidate"
    assert grade(system([claim(1985.4)])).grade == "candidate"


def test_independent_detections_with_possible_motion_confirm_it():
    a = grade(system([claim(1985.4), claim(2012.6, theta=150.0, method="adaptive-optics", ref="other-team")]))
    assert a.grade == "confirmed" and a.outcome == "supports"
    assert any("possible for a bound orbit" in r for r in a.reasons)


def test_motion_faster_than_escape_makes_it_doubtful():
    # 0.21″ to the opposite side in one year: far beyond the escape speed of a few-solar-mass pair at
    # ~20 au (Kepler's third law)
    a = grade(system([claim(2010.0), claim(2011.0, theta=325.0, ref="other-team")]))
    assert a.grade == "doubtful"
    assert any("exceeds the escape speed" in r for r in a.reasons)


def test_only_claimed_components_are_graded():
    result = weigh_system(system([claim(1985.4)]), harness.settings())
    graded = {a.subject for a in result.assessments if a.rule == "companion-claims"}
    assert graded == {"C"}


def test_a_companion_expected_to_move_out_of_the_searched_range_is_not_counted_as_missed():
    # 0.21″ around a ~1 M☉ star 30–200 pc away: an orbit of decades to centuries (Kepler's third law); 120 years
    # later it is rarely still within ±10 % of the claimed separation
    a = grade(system([claim(1900.0)], [search(2020.0, rho_range=(0.19, 0.23), band="V")]))
    assert a.grade == "candidate"
    assert any("not counted as missed" in r and "orbital motion" in r for r in a.reasons)


def test_a_same_band_search_well_inside_the_range_is_counted():
    # one year after the claim the companion has barely moved; Δm = 3.2 ± 0.3 against a contrast of 6 in V
    a = grade(system([claim(2018.0)], [search(2019.0, band="V")]))
    assert a.grade == "doubtful"
    r = next(r for r in a.reasons if r.startswith("Not seen by"))
    assert "same band" in r and "P(detectable) = 1.00" in r


def test_the_band_conversion_matches_an_independent_blackbody_computation():
    import re

    from astropy import units as u
    from astropy.modeling.models import BlackBody
    from scipy.optimize import brentq

    from dossier.astro import stars

    sys = system([claim(2018.0)], [search(2019.0)])
    host_mass = sys.components["A"].physical.mass.value

    def zams(m):  # Tout et al. 1996 L and R; T from L = 4πR²σT⁴ in solar units (IAU 2015 B3)
        L, R = float(stars.zams_luminosity(m)), float(stars.zams_radius(m))
        return 5772.0 * (L / R**2) ** 0.25, R

    def contrast(m2, wave_um):  # astropy's Planck law, Bessell, Castelli & Plez (1998) effective wavelengths
        (t1, r1), (t2, r2) = zams(host_mass), zams(m2)
        w = wave_um * u.um
        return -2.5 * math.log10((r2 / r1) ** 2 * float((BlackBody(t2 * u.K)(w) / BlackBody(t1 * u.K)(w)).decompose()))

    m2 = brentq(lambda m: contrast(m, 0.545) - 3.2, 0.1, host_mass)
    want = contrast(m2, 1.63)
    a = grade(sys)
    text = next(r for r in a.reasons if "Δm(H) ≈" in r)
    got = float(re.search(r"Δm\(H\) ≈ ([0-9.]+)", text).group(1))
    # printed to 0.1 mag; the Monte Carlo median (4000 draws, 0.3 mag model and 0.3 mag claim scatter, host mass
    # ± 0.05) moves it by a few hundredths
    assert got == pytest.approx(want, abs=0.15)
