"""The triple-stability rule (dossier/rules/triple_stability.py) and the barycentric proper motions of
unresolved inner pairs (dossier/rules/facts.py), on the seeded harness with an inner pair added."""

from __future__ import annotations

import pytest

from dossier.engine import weigh_system
from dossier.rules import verdict
from dossier.rules.facts import SystemFacts
from dossier.schema.models import System
from tests.rules import harness


def base():
    return harness.simulate("bound", 3).model_dump(exclude_none=True)


def triple(inner_over_outer: float, masses=True, orbit=None):
    """The harness pair AB with A resolved into Aa-Ab at a fraction of AB's separation."""
    data = base()
    sys0 = System.model_validate(data)
    rho_out = SystemFacts(sys0, harness.settings()).pairs["AB"].rho_arcsec
    phys = lambda m: {"physical": {"ref": harness.REF, "mass": [m, 0.05]}, "magnitudes": {"V": [8.0 + 4 * (1 - m), 0.05, {"ref": harness.REF}]}}
    data["components"]["Aa"] = phys(0.8) if masses else {}
    data["components"]["Ab"] = phys(0.5) if masses else {}
    data["pairs"].append({"id": "Aa-Ab", "members": ["Aa", "Ab"], "parent": "A",
                          "measures": [{"epoch": "J2015.0", "rho": [rho_out * inner_over_outer, 0.01],
                                        "theta": [40.0, 1.0], "ref": harness.REF}]})
    if orbit is not None:
        data["orbits"] = [orbit]
    return System.model_validate(data)


def assessment(system):
    result = weigh_system(system, harness.settings())
    return result, next(a for a in result.assessments if a.rule == "triple-stability" and a.subject == "AB")


def test_a_triple_as_tight_as_its_inner_pair_is_reported_unstable():
    # s_out/s_in = 1.3: below the Mardling & Aarseth (2001, MNRAS 321, 398) critical ratio ≥ ~2 for almost every
    # orbit drawn
    _, a = assessment(triple(1 / 1.3))
    assert a.outcome == "against" and a.question == "context" and a.strength is None
    assert a.probability < 0.05 and "unstable" in a.explanation


def test_a_wide_hierarchy_is_stable():
    _, a = assessment(triple(1 / 300))
    assert a.outcome == "neutral" and a.probability > 0.9  # fails only for e_out near 1 (thermal e)


def test_missing_masses_give_insufficient_data():
    _, a = assessment(triple(0.01, masses=False))
    assert a.outcome == "insufficient" and "mass" in a.explanation


def test_pairs_without_an_inner_pair_are_not_weighed():
    result = weigh_system(System.model_validate(base()), harness.settings())
    assert not any(a.rule == "triple-stability" for a in result.assessments)


def test_the_stability_never_enters_the_membership_odds():
    result, a = assessment(triple(1 / 1.3))
    without = [x for x in result.assessments if x.subject == "AB" and x is not a]
    s = harness.settings().verdict
    v1 = verdict.combine("AB", without + [a], s)
    v2 = verdict.combine("AB", without, s)
    assert (v1.status, v1.probability, v1.log10_odds) == (v2.status, v2.probability, v2.log10_odds)


def test_the_draw_is_reproducible():
    assert assessment(triple(1 / 3))[1].probability == assessment(triple(1 / 3))[1].probability


# --- proper motion of an unresolved inner pair ------------------------------------------------------------

def test_a_system_without_inner_pairs_keeps_its_measured_motions():
    sys0 = System.model_validate(base())
    for cid, star in SystemFacts(sys0, harness.settings()).stars.items():
        a = sys0.components[cid].astrometry[0]
        assert (star.motion.pmra, star.motion.pmdec, star.motion.pmra_error, star.motion.pmdec_error) == (
            a.pmra.value, a.pmdec.value, a.pmra.uncertainty, a.pmdec.uncertainty)
        assert star.motion.how == ""


def test_an_inner_pair_without_orbit_inflates_the_errors_by_the_rms_photocentre_motion():
    sys0 = System.model_validate(base())
    sys1 = triple(1 / 20)
    m0 = SystemFacts(sys0, harness.settings()).stars["A"].motion
    m1 = SystemFacts(sys1, harness.settings()).stars["A"].motion
    assert (m1.pmra, m1.pmdec) == (m0.pmra, m0.pmdec)
    assert m1.pmra_error > m0.pmra_error and "added in quadrature" in m1.how
    # B is no inner pair: untouched
    b0, b1 = (SystemFacts(s, harness.settings()).stars["B"].motion for s in (sys0, sys1))
    assert (b1.pmra, b1.pmdec, b1.pmra_error, b1.pmdec_error, b1.how) == (b0.pmra, b0.pmdec, b0.pmra_error,
                                                                          b0.pmdec_error, b0.how)


def test_a_published_visual_orbit_refers_the_motion_to_the_barycentre():
    from dossier.astro import hierarchy

    orbit = {"pair": "Aa-Ab", "kind": "visual", "ref": harness.REF, "period": [60.0, 0.5], "period_unit": "yr",
             "periastron_time": [2001.0, 0.2], "eccentricity": [0.3, 0.01], "semimajor_axis": [0.3, 0.005],
             "inclination": [50.0, 1.0], "node": [100.0, 1.0], "periastron_argument": [200.0, 1.0]}
    sys1 = triple(1 / 20, orbit=orbit)
    m0 = SystemFacts(System.model_validate(base()), harness.settings()).stars["A"].motion
    m1 = SystemFacts(sys1, harness.settings()).stars["A"].motion
    # the expected shift: the photocentre velocity of the central elements (the Monte Carlo mean is close to it)
    dm = 4 * (0.8 - 0.5)
    ve, vn = hierarchy.photocentre_velocity(2016.0, hierarchy.photocentre_factor(0.8, 0.5, dm), 60.0, 2001.0, 0.3, 0.3,
                                            50.0, 100.0, 200.0)
    assert m0.pmra - m1.pmra == pytest.approx(float(ve), abs=0.05)  # 0.05 mas/yr: Monte Carlo of 4000 draws
    assert m0.pmdec - m1.pmdec == pytest.approx(float(vn), abs=0.05)
    assert m1.pmra_error > m0.pmra_error and "subtracted" in m1.how
