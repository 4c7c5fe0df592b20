"""Projected separation, statistical semimajor axis and period.

Method
    The projected separation is s = ρ d (au, with ρ in arcsec and d in pc).
    The ratio s/a is not a constant: for random orientation and orbital
    phase it has a broad distribution, whose mean is (π/4)(1 + e²/2)
    (isotropic orientation gives ⟨sin⟩ = π/4, the time-averaged radius is
    a(1 + e²/2); textbook results). The often-quoted a ≈ 1.26 s is the
    median of one such distribution (Fischer & Marcy 1992, ApJ 396, 178;
    from memory). Here the distribution is sampled by Monte Carlo: random
    orientation, phase and eccentricity (``eccentricity``: thermal f(e) = 2e
    by default), with the distance and mass drawn from their uncertainties;
    a = s / (s/a) and P = √(a³/M) by Kepler's third law (years, au, M☉).

Outcome
    Always ``neutral``: these are context, quoted as medians with 16–84 %
    ranges.

Insufficient data
    No separation or no distance; without a total mass the period is
    omitted.
"""

from __future__ import annotations

import numpy as np
from pydantic import Field

from dossier.astro import binary
from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    eccentricity: str | float = Field(
        default="thermal", description="'thermal' (f(e) = 2e), 'uniform', or one eccentricity for all orbits."
    )
    samples: int = Field(default=10000, ge=1000, le=2_000_000)
    seed: int = Field(default=20260101, description="Seed of the Monte Carlo, fixed so that dossiers rebuild byte for byte.")


def _split_normal(rng: np.random.Generator, q16: float, q50: float, q84: float, n: int) -> np.ndarray:
    """Samples of a two-piece normal with the given 16/50/84 % points (a quantile-matched approximation)."""
    z = rng.standard_normal(n)
    return np.where(z < 0, q50 + z * (q50 - q16), q50 + z * (q84 - q50))


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    dist = facts.pair_distance_pc(subject)
    if pair.rho_arcsec is None:
        return RULE.insufficient(subject, "No separation: neither positions of both members nor a measure of the pair.")
    if dist is None:
        return RULE.insufficient(subject, "No parallax for either member, so no distance.")
    rng = np.random.default_rng(settings.seed)
    n = settings.samples
    d = _split_normal(rng, *dist, n)
    d = d[d > 0]
    s = pair.rho_arcsec * d
    e = binary.sample_eccentricity(rng, s.size, settings.eccentricity)
    ratio = binary.projected_separation_ratio(rng, s.size, e)
    a = s / ratio
    s16, s50, s84 = np.percentile(s, [16, 50, 84])
    a16, a50, a84 = np.percentile(a, [16, 50, 84])
    quantities = [
        Quantity("projected_separation", "Projected separation s", float(s50), "au",
                 low=float(s16), high=float(s84), how=f"ρ = {fmt_fixed(pair.rho_arcsec, 3)}″ × distance"),
        Quantity("semimajor_axis", "Semimajor axis a (statistical)", float(a50), "au", low=float(a16), high=float(a84),
                 how=f"Monte Carlo over orientation, phase and e ({settings.eccentricity})"),
        Quantity("a_over_s", "Median a/s", float(np.median(1 / ratio)), ""),
    ]
    mass = facts.pair_mass(subject)
    text = f"The projected separation is {fmt_fixed(s50, 0)} au (16–84 %: {fmt_fixed(s16, 0)}–{fmt_fixed(s84, 0)}); the semimajor axis is likely {fmt_fixed(a16, 0)}–{fmt_fixed(a84, 0)} au"
    sources = list(pair.separation_refs)
    if mass is not None:
        m = rng.normal(mass[0], mass[1], s.size)
        good = m > 0
        period = binary.kepler_period_yr(a[good], m[good])
        p16, p50, p84 = np.percentile(period, [16, 50, 84])
        quantities.append(Quantity("period", "Orbital period (statistical)", float(p50), "yr", low=float(p16),
                                   high=float(p84), how=f"Kepler's third law, M = {fmt_fixed(mass[0], 2)} ± {fmt_fixed(mass[1], 2)} M☉"))
        text += f", and the period {_years(p16)}–{_years(p84)} (median {_years(p50)})."
        sources += list(mass[2])
    else:
        text += "; without a total mass there is no period estimate."
    return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities), sources=tuple(dict.fromkeys(sources)))


def _years(p: float) -> str:
    if p >= 1e6:
        return f"{fmt_sig(p / 1e6, 2)} Myr"
    if p >= 1e3:
        return f"{fmt_sig(p / 1e3, 2)} kyr"
    return f"{fmt_sig(p, 3)} yr"


RULE = Rule(
    id="separation-period",
    title="Projected separation and period",
    version=1,
    subject="pair",
    question="context",
    needs=("the separation", "a parallax", "the total mass (for the period)"),
    citation="Kepler's third law; statistical a/s by Monte Carlo over random orbits (cf. Fischer, D. A. & Marcy, G. W. "
    "1992, ApJ 396, 178)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
