"""A spectroscopic companion read from the primary's radial-velocity series.

Method
    Variability: χ² of the velocities about their weighted mean with N−1
    degrees of freedom, each uncertainty widened in quadrature by the jitter
    expected for the star's evolutionary stage; log10 p below −4 is variable
    and between −4 and −1.3 possibly variable, the thresholds used by Maxted
    et al. 2001, MNRAS 326, 1391 (from memory).

    A variable series with enough velocities is searched for a period
    (:func:`dossier.astro.spectro.solve_orbit`): a generalised Lomb–Scargle
    periodogram (Lomb 1976, Ap&SS 39, 447; Scargle 1982, ApJ 263, 835;
    Zechmeister & Kürster 2009, A&A 496, 577) from ``min_period_days`` to
    ``max_period_spans`` times the time span, with the false-alarm probability
    of its highest peak by Baluev 2008, MNRAS 385, 1279; Keplerian fits from
    the highest peaks and from the aliases of the top peak through the peaks of
    the spectral window (Dawson & Fabrycky 2010, ApJ 722, 937), each with one
    systemic velocity γ per instrument and a jitter fitted by maximum
    likelihood under a log-normal prior centred on the stage's jitter; then a
    posterior with emcee (Foreman-Mackey et al. 2013, PASP 125, 306) for
    16/50/84 % intervals of P, K, e, ω, T, γ per instrument, the mass function
    f(M) = 1.0361×10⁻⁷ (1 − e²)^3/2 K³ P M☉ and the minimum companion mass
    (the primary's mass error propagated; Hilditch 2001, An Introduction to
    Close Binary Stars, CUP, ch. 2).

    A period is **found** only when all of these hold: the top peak's
    false-alarm probability is below ``max_fap``; no fit at another period
    (an alias or another peak) comes within ``alias_delta_bic`` of the best;
    the best fit is adequate, log10 p of its χ² with the errors widened by
    ``jitter_tolerance`` × the stage jitter at least ``min_log10_p_adequacy``
    (so a fitted jitter far above the stage's fails), with at least
    ``min_dof`` degrees of freedom left so that the test has power; the
    posterior sampler converged; and the posterior period is precise to
    ``max_period_rel_error`` (68 % half-width). Otherwise the
    series is "variable, period not determined" and the candidate periods are
    listed with their false-alarm probabilities.

    The systemic velocity used by the rules that compare the primary with
    wider companions is the posterior γ of the instrument with most velocities.

Stage jitter (settings, km/s)
    ``jitter_kms`` (dwarfs and every other stage) 0.005: a few m/s for
    inactive dwarfs (Wright 2005, PASP 117, 657; from memory).
    ``subgiant_jitter_kms`` 0.01: subgiants, a few to ten m/s (Wright 2005;
    from memory). ``giant_jitter_kms`` 0.05 (giants, core-helium-burning) and
    ``asymptotic_giant_jitter_kms`` 0.2: the scatter of giants grows as the
    surface gravity falls, from tens of m/s near log g ≈ 3 to hundreds of m/s
    below log g ≈ 2 (Hekker et al. 2008, A&A 480, 215; values from memory:
    verify).

Strength
    Only for a found orbit: the log10 Bayes factor of the orbit over a
    constant velocity in the Schwarz (BIC) approximation,
    (BIC_constant − BIC_orbit)/(2 ln 10), with BIC = −2 ln L_max + k ln N,
    k = 5 + n_instruments + 1 for the orbit (P, K, e, ω, T, one γ per
    instrument, the jitter) and n_instruments + 1 for the constant velocity;
    floored at zero. It counts for both association and binding.

Outcome
    ``supports`` when a period is found and the strength exceeds
    ``decisive``; ``neutral`` otherwise (constant, possibly variable, too few
    velocities, or variable with the period not determined: the candidates
    are listed).

Insufficient data
    Fewer than three velocities of the pair's primary.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    variable_log_p: float = Field(default=-4.0, lt=0, description="log10 p below which a series is variable.")
    possibly_variable_log_p: float = Field(default=-1.3, lt=0)
    # Stage jitter, km/s (see the module docstring for the sources).
    jitter_kms: float = Field(default=0.005, gt=0, description="Jitter of dwarfs and other stages (km/s); "
                              "a few m/s, Wright 2005, PASP 117, 657.")
    subgiant_jitter_kms: float = Field(default=0.01, gt=0, description="Jitter of subgiants (km/s); Wright 2005.")
    giant_jitter_kms: float = Field(default=0.05, gt=0, description="Jitter of giants and core-helium-burning "
                                    "stars (km/s); tens of m/s, Hekker et al. 2008, A&A 480, 215.")
    asymptotic_giant_jitter_kms: float = Field(default=0.2, gt=0, description="Jitter of asymptotic-giant-branch "
                                               "stars (km/s); hundreds of m/s, Hekker et al. 2008.")
    jitter_prior_dex: float = Field(default=1.0, gt=0, description="Width (dex) of the log-normal jitter prior.")
    jitter_tolerance: float = Field(default=3.0, ge=1, description="Adequacy allows this multiple of the "
                                    "stage jitter.")
    min_epochs: int = Field(default=9, ge=8, description="Velocities needed for a period search (and at least "
                            "8 + the number of instruments).")
    min_period_days: float = Field(default=0.5, gt=0, description="Shortest period searched (d).")
    max_period_spans: float = Field(default=3.0, gt=0, description="Longest period searched, in time spans.")
    samples_per_peak: int = Field(default=10, ge=3, description="Frequency samples per periodogram peak width.")
    n_peaks: int = Field(default=5, ge=1, description="Periodogram peaks fitted as candidates.")
    n_window_peaks: int = Field(default=3, ge=0, description="Spectral-window peaks whose aliases are fitted.")
    # 1 %, not 0.1 %: Baluev's bound is for a sinusoid, and an eccentric orbit sampled a score of times gets
    # a far weaker peak than its Keplerian fit deserves (the demo's e = 0.31 orbit: FAP 0.006, χ² 14 for 11
    # dof); the alias, adequacy and precision gates guard against wrong periods (benchmarks/rv_orbit_recovery.py).
    max_fap: float = Field(default=1e-2, gt=0, lt=1, description="Largest false-alarm probability of a period.")
    alias_delta_bic: float = Field(default=10.0, ge=0, description="A rival period within this ΔBIC makes the "
                                   "period ambiguous (10: 'very strong', Kass & Raftery 1995, JASA 90, 773).")
    min_log10_p_adequacy: float = Field(default=-3.0, lt=0, description="Smallest log10 p of the best fit's χ².")
    max_period_rel_error: float = Field(default=0.003, gt=0, description="Largest 68 % half-width of the "
                                        "period over the period.")
    min_dof: int = Field(default=5, ge=1, description="Degrees of freedom a found orbit must leave: with fewer, an "
                         "eccentric orbit at a wrong period can pass through nearly every velocity.")
    n_walkers: int = Field(default=32, ge=16)
    n_steps: int = Field(default=1800, ge=100, description="emcee steps per run.")
    max_steps: int = Field(default=3600, ge=100, description="emcee steps in all, when not yet converged.")
    decisive: float = Field(default=0.5, gt=0)


def applies(facts: SystemFacts, subject: str) -> bool:
    return subject in facts.rv_orbits


def _interval_quantity(name: str, label: str, iv, unit: str, how: str = "") -> Quantity:
    return Quantity(name, label, float(iv.q50), unit, float(iv.half_width), low=float(iv.q16), high=float(iv.q84),
                    how=how or "median and 16–84 % interval of the posterior")


def _fmt(iv, digits: int = 3) -> str:
    return f"{fmt_sig(iv.q50, digits)} (−{fmt_sig(iv.minus, 2)}/+{fmt_sig(iv.plus, 2)})"


def _candidates_text(solution) -> str:
    parts = [f"{fmt_sig(c.period, 5)} d (FAP {fmt_sig(c.fap, 2)})" for c in solution.candidates[:4]]
    return "; candidate periods: " + ", ".join(parts) if parts else ""


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    orbit = facts.rv_orbits.get(subject)
    if orbit is None:
        return RULE.insufficient(subject, "The pair's primary has fewer than three radial velocities.")
    var = orbit.variability
    n = len(orbit.v)
    quantities = [Quantity("log10_p", "log10 p of a constant velocity", float(var.log10_p), "",
                           how=f"χ² = {fmt_fixed(var.chi2, 1)} for {var.dof} dof, jitter {fmt_sig(orbit.jitter, 6)} km/s")]
    sources = tuple(sorted(set(orbit.refs) - {""}))
    solution = orbit.solution
    if solution is None:
        reason = {"constant": "constant within the errors", "possibly variable": "possibly variable",
                  "variable, too few velocities": "variable, but too few for a period search"}[orbit.status]
        text = f"The {n} velocities of {orbit.star} are {reason} (log10 p = {fmt_fixed(var.log10_p, 1)})."
        return RULE.assessment(subject, "neutral", text, strength=0.0, quantities=tuple(quantities), sources=sources)
    quantities.append(Quantity("fap", "False-alarm probability of the highest peak", float(solution.fap), "",
                               how="Baluev 2008, MNRAS 385, 1279"))
    if not orbit.detected:
        for k, c in enumerate(solution.candidates[:5]):
            quantities.append(Quantity(f"candidate_{k + 1}", f"Candidate period {k + 1}", float(c.period), "d",
                                       how=f"{c.kind}; FAP {fmt_sig(c.fap, 2)}; ΔBIC {fmt_fixed(c.delta_bic, 1)}"))
        text = (f"The {n} velocities of {orbit.star} vary (log10 p = {fmt_fixed(var.log10_p, 1)}), but the period is not "
                f"determined: " + "; ".join(solution.reasons) + _candidates_text(solution) + ".")
        return RULE.assessment(subject, "neutral", text, strength=0.0, quantities=tuple(quantities), sources=sources)

    post, fit = solution.posterior, solution.fit
    names = solution.instruments
    for key, label, unit in (("P", "Period P", "d"), ("K", "Semi-amplitude K", "km/s"), ("e", "Eccentricity e", ""),
                             ("omega", "Argument of periastron ω", "°"), ("T", "Periastron time T", "JD")):
        quantities.append(_interval_quantity(f"orbit_{key}", label, getattr(post, key), unit))
    ref = orbit.reference_instrument
    for k, (name, g) in enumerate(zip(names, post.gamma)):
        suffix = "" if k == ref else f"_{name or 'default'}"
        quantities.append(_interval_quantity(f"orbit_gamma{suffix}", f"Systemic velocity γ ({name or 'default'})",
                                             g, "km/s"))
    quantities.append(_interval_quantity("jitter", "Jitter", post.jitter, "km/s",
                                         how=f"prior median {fmt_sig(orbit.jitter, 6)} km/s for the star's stage"))
    quantities.append(_interval_quantity("mass_function", "Mass function f(M)", post.mass_function, "M☉"))
    g = post.gamma[ref]
    text = (f"The {n} velocities of {orbit.star} vary with a period of {_fmt(post.P, 6)} d "
            f"(false-alarm probability {fmt_sig(solution.fap, 1)}; K = {_fmt(post.K)} km/s, e = {_fmt(post.e, 2)}, "
            f"γ = {_fmt(g, 4)} km/s); f(M) = {_fmt(post.mass_function)} M☉")
    if post.m2_min is not None:
        primary = facts.stars[orbit.star].mass
        quantities.append(_interval_quantity("m2_min", "Minimum companion mass", post.m2_min, "M☉",
                                             how=f"for a primary of {fmt_fixed(primary.value, 2)} ± {fmt_fixed(primary.uncertainty, 2)} M☉"))
        text += f", so the companion has at least {_fmt(post.m2_min)} M☉"
    text += ". Values are medians with 68 % intervals"
    text += "." if post.converged else (f"; the sampler had not converged (chain {post.n_steps} steps, "
                                        f"autocorrelation time {fmt_fixed(post.tau_max, 0)}), so the intervals are rough.")
    published = next((o for o in facts.system.orbits if o.pair == subject and o.kind in ("spectroscopic", "combined")),
                     None)
    if published is not None:
        p_pub = published.period.value * (365.25 if published.period_unit == "yr" else 1.0)
        s_pub = published.period.uncertainty * (365.25 if published.period_unit == "yr" else 1.0)
        z = abs(post.P.q50 - p_pub) / math.hypot(post.P.half_width, s_pub)
        quantities.append(Quantity("period_vs_published", "Period − published period", z, "σ"))
        text += (f" The published period ({published.ref}, {fmt_fixed(p_pub, 1)} d) "
                 + ("agrees" if z < 3 else "differs") + f" ({fmt_fixed(z, 1)}σ).")
        sources = tuple(dict.fromkeys((*sources, published.ref)))
    strength = max(0.0, float(solution.log10_bayes_factor))
    outcome = "supports" if strength > settings.decisive else "neutral"
    return RULE.assessment(subject, outcome, text, strength=strength, quantities=tuple(quantities),
                           statistic=Quantity("rms", "RMS of the residuals", float(fit.rms), "km/s",
                                              how=f"χ² = {fmt_fixed(fit.chi2, 1)} for {fit.dof} dof with the fitted jitter"),
                           sources=sources)


RULE = Rule(
    id="spectroscopic-orbit",
    title="Spectroscopic orbit from radial velocities",
    version=2,
    subject="pair",
    question="orbit",
    needs=("a radial-velocity series of the pair's primary", "the primary's mass (for the minimum companion mass)"),
    citation="Maxted, P. F. L. et al. 2001, MNRAS 326, 1391 (variability thresholds); Lomb 1976, Ap&SS 39, 447 and "
    "Scargle 1982, ApJ 263, 835 (periodogram); Baluev 2008, MNRAS 385, 1279 (false-alarm probability); Dawson & "
    "Fabrycky 2010, ApJ 722, 937 (aliases); Foreman-Mackey et al. 2013, PASP 125, 306 (emcee); Hekker et al. 2008, "
    "A&A 480, 215 (jitter of giants); Hilditch, R. W. 2001, An Introduction to Close Binary Stars, CUP, ch. 2 "
    "(Keplerian orbit, mass function)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
