"""`dossier plan`: ranking by need, and observable windows checked point by point with astropy."""

from __future__ import annotations

import datetime as dt
import math

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.engine import weigh_project
from dossier.errors import DossierError
from dossier.plan import Site, plan, score_pair
from dossier.schema.loader import load_project
from tests.conftest import DEMO

SITE = Site(48.2, 11.6, 520.0)
DATE = dt.date(2026, 12, 2)


@pytest.fixture(scope="module")
def targets():
    return plan(weigh_project(load_project(DEMO)), SITE, DATE)


def altitudes(when: dt.datetime, ra: float, dec: float) -> tuple[float, float]:
    """Target and Sun altitude at one instant, computed directly with astropy (reference library)."""
    from astropy import units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_sun
    from astropy.time import Time
    from astropy.utils import iers

    with iers.conf.set_temp("auto_download", False), iers.conf.set_temp("auto_max_age", None):
        t = Time(when)
        frame = AltAz(obstime=t, location=EarthLocation(lat=SITE.latitude_deg * u.deg, lon=SITE.longitude_deg * u.deg,
                                                        height=SITE.height_m * u.m))
        star = SkyCoord(ra * u.deg, dec * u.deg).transform_to(frame).alt.deg
        sun = get_sun(t).transform_to(frame).alt.deg
    return float(star), float(sun)


def test_windows_are_dark_and_high(targets):
    positions = {s.id: s.position for s in load_project(DEMO).systems.values()}
    checked = 0
    for target in targets:
        w = target.window
        if not w.observable:
            continue
        pos = positions[target.system]
        for when in (w.start, w.end):
            star, sun = altitudes(when, pos.ra, pos.dec)
            assert star > 30.0 - 0.1 and sun < -12.0 + 0.1, (target.pair, when, star, sun)
        # five minutes outside the window, one of the two conditions fails (the 5-minute grid)
        star, sun = altitudes(w.end + dt.timedelta(minutes=6), pos.ra, pos.dec)
        assert star <= 30.0 or sun >= -12.0
        checked += 1
    assert checked >= 3


def test_a_target_that_never_rises_high_is_not_proposed_for_tonight(targets):
    # alder-4 at dec −41° never rises above 90 − 48.2 − 41.2 = 0.6° at latitude 48.2° (spherical astronomy)
    alder = next(t for t in targets if t.system == "alder-4")
    assert not alder.window.observable
    assert alder.window.max_altitude_deg < 1.0


def test_ranking_by_expected_change(targets):
    scores = [t.score for t in targets]
    assert scores == sorted(scores, reverse=True)
    ba_bb = next(t for t in targets if t.pair == "Ba-Bb")
    assert "published orbit" in ba_bb.reason


def test_score_is_years_times_rate_in_units_of_a_good_measure():
    # common practice: a change of 0.5° in θ or 1 % in ρ is worth a new measure
    score, reason = score_pair(2026.0, 2016.0, 2.0, theta_rate=0.2, rho_rate=0.001)
    assert score == pytest.approx(max(10 * 0.2 / 0.5, 10 * 0.001 / 0.02))
    assert score_pair(2026.0, None, 1.0, 0.1, 0.1)[0] == math.inf


def test_bad_site_is_a_clear_message():
    with pytest.raises(DossierError, match="is not LAT,LON,HEIGHT"):
        Site.parse("48.2;11.6")
    result = CliRunner().invoke(cli, ["plan", str(DEMO), "--site", "95,10,0", "--date", "2026-12-02"])
    assert result.exit_code == 2
    assert "latitude must be within ±90°" in result.output


def test_plan_command_prints_the_caution():
    result = CliRunner().invoke(cli, ["plan", str(DEMO), "--site", "48.2,11.6,520", "--date", "2026-12-02"],
                                env={"COLUMNS": "200"})
    assert result.exit_code == 0, result.output
    assert "Ba-Bb" in result.output
    assert "looking at the Sun through any optical aid blinds" in result.output
