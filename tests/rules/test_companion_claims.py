"""Grades of claimed companions (dossier/rules/companion_claims.py) on small invented systems."""

from __future__ import annotations

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
    # the band differs (V against H): the 1 mag margin is stated (common practice)
    assert any("allowing 1.0 mag for the different band" in r for r in a.reasons)


def test_two_searches_that_should_have_seen_it_refute_it():
    a = grade(system([claim(1985.4)], [search(2019.6), search(2021.3, band="V")]))
    assert a.grade == "refuted"


def test_a_search_too_shallow_or_elsewhere_leaves_a_candidate():
    assert grade(system([claim(1985.4)], [search(2019.6, contrast=3.8)])).grade == "candidate"  # 3.2 + 1 > 3.8
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
