"""Neighbours and closest approach on the demo's hierarchical system (heron-1)."""

from __future__ import annotations

import math

import pytest

from dossier.engine import weigh_project
from dossier.schema.loader import load_project
from tests.conftest import DEMO


@pytest.fixture(scope="module")
def heron():
    return weigh_project(load_project(DEMO), use_cache=False)["heron-1"]


def find(result, rule):
    return next(a for a in result.assessments if a.rule == rule)


def test_closest_approach_follows_the_linear_formulas(heron):
    # Bailer-Jones 2015, A&A 575, A35: t = −d v_r / v², d_min = d v_t / v; 1 pc/(km/s) = 0.977792 Myr
    a = find(heron, "closest-approach")
    star = heron.facts.stars["A"]
    d = 1000.0 / star.parallax.mean
    vt = 4.740470463533348 * math.hypot(star.motion.pmra, star.motion.pmdec) * d / 1000.0
    vr = star.radial_velocity.value
    v2 = vr**2 + vt**2
    assert a.quantity("time").value == pytest.approx(-d * vr / v2 * 0.977792, rel=0.01)
    assert a.quantity("distance").value == pytest.approx(d * vt / math.sqrt(v2), rel=0.01)


def test_peak_magnitude_uses_the_light_of_the_physical_components_only(heron):
    # flux sum of A and B (D, the background star, is excluded by its parallax); m + 5 log10(d_min/d)
    a = find(heron, "closest-approach")
    mags = [heron.facts.stars[c].magnitudes["V"].value for c in ("A", "B")]
    combined = -2.5 * math.log10(sum(10 ** (-0.4 * m) for m in mags))
    d = 1000.0 / heron.facts.stars["A"].parallax.mean
    expected = combined + 5 * math.log10(a.quantity("distance").value / d)
    assert a.quantity("peak_magnitude").value == pytest.approx(expected, abs=1e-9)
    assert "A, B" in a.quantity("peak_magnitude").how


def test_neighbours_sharing_the_motion_are_found(heron):
    a = find(heron, "neighbours")
    assert a.quantity("sharing").value == 2
    lines = {line.split(":")[0]: line for line in a.reasons}
    assert lines["field-1"].endswith("shares the motion.")
    assert lines["field-3"].endswith("moves differently.")
    assert "no radial velocity" in lines["field-4"]


def test_space_velocity_of_each_component_matches_astropy(heron):
    # an independent astropy call (reference library): ICRS → Galactic, Cartesian differentials
    from astropy import units as u
    from astropy.coordinates import CartesianDifferential, CartesianRepresentation, SkyCoord

    a = next(x for x in heron.assessments if x.rule == "space-velocity" and x.subject == "B")
    s = heron.facts.stars["B"]
    c = SkyCoord(ra=s.position.ra * u.deg, dec=s.position.dec * u.deg,
                 distance=(1000.0 / s.parallax.mean) * u.pc, pm_ra_cosdec=s.motion.pmra * u.mas / u.yr,
                 pm_dec=s.motion.pmdec * u.mas / u.yr, radial_velocity=s.radial_velocity.value * u.km / u.s)
    g = c.galactic
    g.representation_type, g.differential_type = CartesianRepresentation, CartesianDifferential
    expected = [g.velocity.d_x.to_value(u.km / u.s), g.velocity.d_y.to_value(u.km / u.s),
                g.velocity.d_z.to_value(u.km / u.s)]
    got = [a.quantity(k) for k in ("U", "V", "W")]
    for q, e in zip(got, expected):
        assert abs(q.value - e) < 3 * q.uncertainty / (4000 ** 0.5) + 1e-3  # Monte Carlo mean of 4000 samples
    # the giant's velocity is the systemic γ of the spectroscopic orbit
    assert "systemic γ" in next(x for x in heron.assessments if x.rule == "space-velocity" and x.subject == "A").explanation
