"""A spectroscopic companion read from the primary's radial-velocity series.

Method
    Variability: χ² of the velocities about their weighted mean with N−1
    degrees of freedom, each uncertainty widened in quadrature by a jitter
    term (``giant_jitter_kms`` for giants, whose surfaces oscillate); log10 p
    below −4 is variable and between −4 and −1.3 possibly variable, the
    thresholds used by Maxted et al. 2001, MNRAS 326, 1391 (from memory).
    A variable series is searched for a period with astropy's Lomb–Scargle
    periodogram (Lomb 1976, Ap&SS 39, 447; Scargle 1982, ApJ 263, 835) and
    fitted with a Keplerian orbit (P, K, e, ω, T, γ; least squares from
    several starting periods). The mass function
    f(M) = 1.0361×10⁻⁷ (1 − e²)^3/2 K³ P M☉ (K in km/s, P in days) gives the
    minimum companion mass for the primary's mass (Hilditch 2001, An
    Introduction to Close Binary Stars, CUP, ch. 2). The fitted γ replaces the
    primary's single radial velocity in the rules that compare it with wider
    companions.

Strength
    Periodic motion about a common centre shows a physical, bound pair. The
    strength is the log10 Bayes factor of the orbit over a constant velocity
    in the Schwarz approximation, (χ²_constant − χ²_orbit − 5 ln N)/(2 ln 10),
    floored at zero; it counts for both association and binding.

Outcome
    ``supports`` when an orbit is fitted and the strength exceeds +0.5;
    ``neutral`` for a constant or possibly variable series.

Insufficient data
    Fewer than three velocities of the pair's primary.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    variable_log_p: float = Field(default=-4.0, lt=0, description="log10 p below which a series is variable.")
    possibly_variable_log_p: float = Field(default=-1.3, lt=0)
    jitter_kms: float = Field(default=0.0, ge=0, description="Jitter added in quadrature for dwarfs (km/s).")
    giant_jitter_kms: float = Field(
        default=0.05, ge=0, description="Jitter for giants and subgiants (km/s); oscillations of tens of m/s."
    )
    min_epochs: int = Field(default=8, ge=6, description="Velocities needed for an orbit fit.")
    decisive: float = Field(default=0.5, gt=0)


def applies(facts: SystemFacts, subject: str) -> bool:
    return subject in facts.rv_orbits


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from dossier.astro import spectro

    orbit = facts.rv_orbits.get(subject)
    if orbit is None:
        return RULE.insufficient(subject, "The pair's primary has fewer than three radial velocities.")
    var = orbit.variability
    n = len(orbit.v)
    quantities = [Quantity("log10_p", "log10 p of a constant velocity", float(var.log10_p), "",
                           how=f"χ² = {var.chi2:.1f} for {var.dof} dof, jitter {orbit.jitter:g} km/s")]
    sources = tuple(sorted(set(orbit.refs) - {""}))
    if orbit.fit is None:
        kind = "possibly variable" if var.log10_p < settings.possibly_variable_log_p else "constant"
        text = (f"The {n} velocities of {orbit.star} are {kind} (log10 p = {var.log10_p:.1f}); "
                + ("too few for an orbit." if n < settings.min_epochs else "no orbit is fitted."))
        return RULE.assessment(subject, "neutral", text, strength=0.0, quantities=tuple(quantities), sources=sources)
    fit = orbit.fit
    if not orbit.detected:
        return RULE.assessment(subject, "neutral", f"The {n} velocities of {orbit.star} vary (log10 p = "
                               f"{var.log10_p:.1f}) but no orbit fit converged.", strength=0.0,
                               quantities=tuple(quantities), sources=sources)
    for key, label, unit in (("P", "Period P", "d"), ("K", "Semi-amplitude K", "km/s"), ("e", "Eccentricity e", ""),
                             ("omega", "Argument of periastron ω", "°"), ("T", "Periastron time T", "JD"),
                             ("gamma", "Systemic velocity γ", "km/s")):
        quantities.append(Quantity(f"orbit_{key}", label, float(getattr(fit, key)), unit,
                                   float(getattr(fit, f"sigma_{key}"))))
    f_m = float(spectro.mass_function(fit.P, fit.K, fit.e))
    s_f = float(spectro.mass_function_uncertainty(fit.P, fit.sigma_P, fit.K, fit.sigma_K, fit.e, fit.sigma_e))
    quantities.append(Quantity("mass_function", "Mass function f(M)", f_m, "M☉", s_f))
    text = (f"The {n} velocities of {orbit.star} vary (log10 p = {var.log10_p:.1f}) with a period of "
            f"{fit.P:.1f} ± {fit.sigma_P:.1f} d (K = {fit.K:.2f} km/s, e = {fit.e:.2f}, γ = {fit.gamma:.2f} ± "
            f"{fit.sigma_gamma:.2f} km/s); f(M) = {f_m:.3g} M☉")
    primary = facts.stars[orbit.star].mass
    if primary is not None:
        m2 = float(spectro.minimum_companion_mass(f_m, primary.value))
        quantities.append(Quantity("m2_min", "Minimum companion mass", m2, "M☉",
                                   how=f"for a primary of {primary.value:.2f} M☉"))
        text += f", so the companion has at least {m2:.2f} M☉"
    text += "."
    published = next((o for o in facts.system.orbits if o.pair == subject and o.kind in ("spectroscopic", "combined")),
                     None)
    if published is not None:
        p_pub = published.period.value * (365.25 if published.period_unit == "yr" else 1.0)
        s_pub = published.period.uncertainty * (365.25 if published.period_unit == "yr" else 1.0)
        z = abs(fit.P - p_pub) / math.hypot(fit.sigma_P, s_pub)
        quantities.append(Quantity("period_vs_published", "Period − published period", z, "σ"))
        text += (f" The published period ({published.ref}, {p_pub:.1f} d) "
                 + ("agrees" if z < 3 else "differs") + f" ({z:.1f}σ).")
        sources = tuple(dict.fromkeys((*sources, published.ref)))
    chi2_const = float(var.chi2)
    strength = max(0.0, (chi2_const - float(fit.chi2) - 5 * math.log(n)) / (2 * math.log(10)))
    outcome = "supports" if strength > settings.decisive else "neutral"
    return RULE.assessment(subject, outcome, text, strength=strength, quantities=tuple(quantities),
                           statistic=Quantity("rms", "RMS of the residuals", float(fit.rms), "km/s"), sources=sources)


RULE = Rule(
    id="spectroscopic-orbit",
    title="Spectroscopic orbit from radial velocities",
    version=1,
    subject="pair",
    question="orbit",
    needs=("a radial-velocity series of the pair's primary", "the primary's mass (for the minimum companion mass)"),
    citation="Maxted, P. F. L. et al. 2001, MNRAS 326, 1391 (variability thresholds); Lomb 1976, Ap&SS 39, 447 and "
    "Scargle 1982, ApJ 263, 835 (periodogram); Hilditch, R. W. 2001, An Introduction to Close Binary Stars, CUP, "
    "ch. 2 (Keplerian orbit, mass function)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
