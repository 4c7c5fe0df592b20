"""``dossier plan``: which pairs most need a measure tonight, and when each can be observed.

Priority
    How far the pair may be from where we would otherwise assume, in units
    of a typical good measure (``theta_step_deg`` in θ and
    ``rho_step_fraction`` of ρ; defaults 0.5° and 1 %, common practice).
    When the pair has an orbit posterior (fitted to the log, or drawn about
    a published orbit's stated uncertainties; :mod:`dossier.ephemerides`)
    the score is the spread of the predicted positions tonight over that
    measure size: a measure tells most where the orbits still allowed by the
    data disagree most. The plan also says when the pair is best resolved
    (largest predicted separation in the next 20 years) and when one measure
    would narrow the period's posterior most
    (:func:`dossier.ephemerides.period_gain`). Without a posterior the score is the expected change of
    the relative position since the last measure: years since then times the
    rate of change of θ and ρ (from the motion fitted to the log, else from
    the members' relative proper motion), the larger of the two. A pair
    never measured comes first.

Window
    The times of the night when the pair is above ``min_altitude_deg`` while
    the Sun is below ``sun_altitude_deg`` (nautical twilight, −12°, by
    default), computed with astropy's AltAz frame at 5-minute steps. Earth
    orientation comes from the IERS tables shipped with astropy: nothing is
    downloaded. The planner proposes only targets in a dark sky, far from the
    Sun: looking at the Sun through any optical aid blinds.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass

import numpy as np

from dossier.errors import DossierError


@dataclass(frozen=True)
class Site:
    latitude_deg: float
    longitude_deg: float
    height_m: float

    @classmethod
    def parse(cls, text: str) -> Site:
        parts = [p.strip() for p in text.split(",")]
        try:
            lat, lon, height = (float(p) for p in parts)
        except ValueError:
            raise DossierError(f"--site '{text}' is not LAT,LON,HEIGHT. Fix: write e.g. --site 51.5,-0.1,45 "
                               "(degrees north, degrees east, metres).") from None
        if not -90 <= lat <= 90 or not -180 <= lon <= 360:
            raise DossierError(f"--site '{text}': latitude must be within ±90° and longitude within −180…360°. "
                               "Fix: give degrees north, degrees east, metres.")
        return cls(lat, lon, height)


@dataclass(frozen=True)
class Window:
    start: dt.datetime | None
    end: dt.datetime | None
    max_altitude_deg: float
    sun_separation_deg: float

    @property
    def observable(self) -> bool:
        return self.start is not None


def night_grid(site: Site, date: dt.date, step_minutes: float = 5.0):
    """UTC times from local noon of ``date`` to local noon of the next day (local by longitude)."""
    from astropy import units as u
    from astropy.time import Time

    noon_utc = dt.datetime.combine(date, dt.time(12, 0)) - dt.timedelta(hours=site.longitude_deg / 15.0)
    start = Time(noon_utc.replace(tzinfo=None), scale="utc")
    n = int(round(24 * 60 / step_minutes)) + 1
    return start + np.arange(n) * step_minutes * u.min


def windows(site: Site, date: dt.date, ra_deg: np.ndarray, dec_deg: np.ndarray, *, min_altitude_deg: float = 30.0,
            sun_altitude_deg: float = -12.0) -> list[Window]:
    """The observable window of each target on the night starting on ``date`` (vectorised over targets)."""
    from astropy import units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_sun
    from astropy.utils import iers

    import warnings

    times = night_grid(site, date)
    location = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg, height=site.height_m * u.m)
    frame = AltAz(obstime=times, location=location)
    # offline: the IERS tables shipped with astropy, never a download; beyond them UT1−UTC is
    # extrapolated, an error of well under a second of time, immaterial for an observing window
    with iers.conf.set_temp("auto_download", False), iers.conf.set_temp("auto_max_age", None), \
            iers.conf.set_temp("iers_degraded_accuracy", "warn"), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # degraded-accuracy notes for dates beyond the shipped tables
        sun = get_sun(times)
        sun_alt = sun.transform_to(frame).alt.deg
        targets = SkyCoord(ra=np.atleast_1d(ra_deg) * u.deg, dec=np.atleast_1d(dec_deg) * u.deg)
        alt = targets[:, None].transform_to(frame[None, :]).alt.deg
        sun_sep = np.array([float(np.min(sun.separation(t).deg)) for t in targets])
    dark = sun_alt < sun_altitude_deg
    out = []
    for k in range(alt.shape[0]):
        ok = dark & (alt[k] > min_altitude_deg)
        if not ok.any():
            out.append(Window(None, None, float(np.max(np.where(dark, alt[k], -90))), sun_sep[k]))
            continue
        idx = np.flatnonzero(ok)
        # the longest contiguous stretch
        breaks = np.flatnonzero(np.diff(idx) > 1)
        runs = np.split(idx, breaks + 1)
        run = max(runs, key=len)
        t0, t1 = times[run[0]].to_datetime(), times[run[-1]].to_datetime()
        out.append(Window(t0, t1, float(np.max(alt[k][ok])), sun_sep[k]))
    return out


@dataclass(frozen=True)
class Target:
    system: str
    pair: str
    last_epoch: float | None
    years_since: float | None
    theta_rate_deg_yr: float | None
    rho_rate_arcsec_yr: float | None
    rho_arcsec: float | None
    score: float
    reason: str
    window: Window | None = None
    best_resolved: float | None = None
    best_resolved_rho: float | None = None
    most_informative: float | None = None


def score_pair(now_yr: float, last_yr: float | None, rho: float | None, theta_rate: float | None,
               rho_rate: float | None, theta_step_deg: float = 0.5, rho_step_fraction: float = 0.01) -> tuple[float, str]:
    """Priority score and its reason (see the module docstring)."""
    if last_yr is None:
        return math.inf, "never measured"
    years = max(0.0, now_yr - last_yr)
    if theta_rate is None or rho_rate is None or rho is None:
        return years / 10.0, f"{years:.1f} yr since the last measure; its motion is unknown"
    d_theta = years * abs(theta_rate)
    d_rho = years * abs(rho_rate)
    score = max(d_theta / theta_step_deg, d_rho / (rho_step_fraction * rho))
    return score, (f"{years:.1f} yr since the last measure: expected change {d_theta:.2f}° in θ and "
                   f"{d_rho:.3f}″ in ρ")


def _rates(result, pair_id: str, now_yr: float) -> tuple[float | None, float | None, float | None, str]:
    """θ rate (deg/yr), ρ rate (″/yr), ρ, and where they came from."""
    # (a pair with an orbit, fitted or published, is planned from its posterior instead: see plan)
    facts = result.facts
    log = facts.logs.get(pair_id)
    if log is not None and log.linear is not None:
        x, y, _, _ = log.linear.predict(np.array([now_yr]))
        vx, vy = log.linear.coef_x[1], log.linear.coef_y[1]
        x, y = float(x[0]), float(y[0])
        rho = math.hypot(x, y)
        return math.degrees((x * vy - y * vx) / rho**2), (x * vx + y * vy) / rho, rho, "motion fitted to the log"
    pair = facts.pairs[pair_id]
    a, b = facts.stars.get(pair.first), facts.stars.get(pair.second)
    if pair.rho_arcsec and a and b and a.motion and b.motion and pair.first != pair.second:
        th = math.radians(pair.theta_deg or 0.0)
        x, y = pair.rho_arcsec * math.cos(th), pair.rho_arcsec * math.sin(th)
        vx, vy = (b.motion.pmdec - a.motion.pmdec) / 1000, (b.motion.pmra - a.motion.pmra) / 1000
        rho = pair.rho_arcsec
        return math.degrees((x * vy - y * vx) / rho**2), (x * vx + y * vy) / rho, rho, "relative proper motion"
    return None, None, pair.rho_arcsec, "no motion known"


def plan(results: dict, site: Site, date: dt.date, *, min_altitude_deg: float = 30.0, limit: int = 20) -> list[Target]:
    """Pairs ranked by need of a measure, with their windows on the night of ``date``."""
    from dossier.rules.facts import julian_years

    now_yr = float(julian_years([date.isoformat()])[0])
    targets = []
    for sid, result in results.items():
        for pair in result.system.pairs:
            log = result.facts.logs.get(pair.id)
            last = float(log.t.max()) if log is not None else None
            extra = {}
            posterior = result.facts.ephemeris_posterior(pair.id)
            if posterior is not None:
                from dossier.ephemerides import describe, outlook

                look = outlook(posterior, now_yr)
                theta_rate = rho_rate = None
                rho = float(look.prediction.rho[2][0])
                score = look.spread_over_measure
                gain = look.period_gain
                reason = (f"predicted positions spread over {look.prediction.spread[0]:.3g}″ tonight, "
                          f"{score:.1f} times a good measure; a measure now would narrow ln P's variance by "
                          f"{100 * gain[0]:.0f} %, most ({100 * gain.max():.0f} %) around {look.most_informative:.0f}; "
                          f"widest in {look.best_resolved:.0f} (ρ = {look.best_resolved_rho:.2f}″)")
                source = describe(posterior)
                extra = {"best_resolved": look.best_resolved, "best_resolved_rho": look.best_resolved_rho,
                         "most_informative": look.most_informative}
            else:
                theta_rate, rho_rate, rho, source = _rates(result, pair.id, now_yr)
                if rho is None and last is None:
                    continue  # nothing known of where to look
                score, reason = score_pair(now_yr, last, rho, theta_rate, rho_rate)
            targets.append(Target(sid, pair.id, last, None if last is None else now_yr - last, theta_rate, rho_rate,
                                  rho, score, f"{reason} ({source})", **extra))
    targets.sort(key=lambda t: (-t.score, t.system, t.pair))
    targets = targets[:limit]
    if targets:
        pos = {sid: r.system.position for sid, r in results.items()}
        ws = windows(site, date, np.array([pos[t.system].ra for t in targets]),
                     np.array([pos[t.system].dec for t in targets]), min_altitude_deg=min_altitude_deg)
        targets = [Target(**{**t.__dict__, "window": w}) for t, w in zip(targets, ws)]
    return targets
