"""Luminosity and co-evality rules on the demo's hierarchical system (heron-1)."""

from __future__ import annotations

import math

import pytest

from dossier.engine import weigh_project
from dossier.schema.loader import load_project
from tests.conftest import DEMO


@pytest.fixture(scope="module")
def heron():
    return weigh_project(load_project(DEMO), use_cache=False)["heron-1"]


def find(result, rule, subject):
    return next(a for a in result.assessments if a.rule == rule and a.subject == subject)


def test_luminosity_from_radius_is_stefan_boltzmann(heron):
    # L = R² (T/5772 K)⁴ (IAU 2015 Resolution B3)
    a = find(heron, "luminosity", "Aa")
    phys = heron.system.components["Aa"].physical
    expected = phys.radius.value**2 * (phys.teff.value / 5772.0) ** 4
    assert a.quantity("L_radius").value == pytest.approx(expected, rel=1e-12)


def test_luminosity_from_magnitude_uses_the_parent_distance(heron):
    # M_bol = m − 5 log10(d/10) + BC, L = 10^(−0.4 (M_bol − 4.74)) (IAU 2015 B2); Aa takes A's parallax
    a = find(heron, "luminosity", "Aa")
    bc = a.quantity("bc_v").value
    d = 1000.0 / heron.facts.stars["A"].parallax.mean
    m = heron.system.components["Aa"].magnitudes["V"].value
    expected = 10 ** (-0.4 * (m - 5 * math.log10(d / 10) + bc - 4.74))
    assert a.quantity("L_magnitude").value == pytest.approx(expected, rel=1e-9)
    assert a.quantity("agreement").value < 3  # the demo's radius and photometry are consistent


def test_coevality_of_the_wide_pair_uses_every_resolved_star(heron):
    a = find(heron, "coevality", "AB")
    assert {line.split(" ")[0] for line in a.reasons} == {"Aa", "Ab", "Ba", "Bb"}
    common = a.quantity("common_age")
    # the core-helium-burning giant fixes the age; the dwarfs allow it (Hurley, Pols & Tout 2000 lifetimes)
    giant = next(line for line in a.reasons if line.startswith("Aa"))
    assert f"{common.low:.4g}" in giant and f"{common.high:.4g}" in giant
    # two main-sequence intervals as wide as the disc's age carry no information (strength 0)
    assert find(heron, "coevality", "Ba-Bb").strength == 0.0
