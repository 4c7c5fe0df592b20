"""Consistency of a published visual orbit with the observing log and the masses.

Method
    The ephemeris ρ(t), θ(t) of the published Campbell elements (P, T, e,
    a, i, Ω, ω) through the Thiele–Innes constants (Heintz 1978, Double
    Stars, ch. 4) is compared with every measure of the log (O−C in θ and ρ).
    The dynamical total mass a³ / (ϖ³ P²) (Kepler's third law; angles in the
    same unit, P in years) with its propagated uncertainty is compared with
    the sum of the component masses.
    The χ² of the nightly means about the orbit is tested with 2N − 7
    degrees of freedom (N nights; the 7 elements count as fitted, since the
    published orbit was fitted to similar measures) and its p-value given.
    When ``refit_published`` is set (here or under ``[rules.orbit-fit]``),
    the orbit posterior fitted to the log (``SystemFacts.visual_posteriors``)
    is compared with the published elements: each difference in units of the
    combined σ (posterior half-interval and published uncertainty), and
    Δχ² = χ²(published) − χ²(refit) (= ΔBIC, both with 7 parameters).

Strength
    How much better the orbit describes the nightly means than a straight
    line, the path of an unbound pair, in the Schwarz (BIC) approximation:
    (χ²_line − χ²_orbit − (7 − 4) ln 2N) / (2 ln 10), a log10 Bayes factor
    bound : unbound, floored at zero. The published orbit's 7 elements are
    counted as free parameters, since it was fitted to similar data; the
    line has 4 (position and rate in x and y). When the orbit does not fit
    the log within the stated errors (χ² p-value below ``fit_p``) this is
    said, and both χ² are divided by the orbit's χ²/dof before the
    comparison (errors widened by the Birge ratio; Birge 1932, Phys. Rev.
    40, 207), so that underestimated errors neither inflate nor erase it.

Outcome
    ``supports`` when the strength exceeds +0.5, ``neutral`` otherwise. A dynamical mass more than 3σ from the sum of the
    masses is reported in the explanation: the parallax, the masses or the
    orbit is then wrong.

Insufficient data
    No published visual orbit with all seven elements, or fewer than three
    nights of unflagged measures.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from scipy import stats

from dossier.astro import orbit as orbits
from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    decisive: float = Field(default=0.5, gt=0)
    mass_tension_sigma: float = Field(default=3.0, gt=0)
    fit_p: float = Field(default=1e-3, gt=0, lt=1,
                         description="χ² p-value below which the published orbit does not describe the log.")
    refit_published: bool = Field(
        default=False,
        description="Refit the orbit from the log and compare it with the published one (same as "
                    "refit_published under [rules.orbit-fit]; costs about a second a pair).")

ORBIT_PARAMETERS = 7  # the published elements, counted as fitted to similar data
LINE_PARAMETERS = 4  # position and rate in x and y


def wrap(angle: np.ndarray) -> np.ndarray:
    """Angle difference wrapped to (−180°, 180°]."""
    return -((-np.asarray(angle) + 180.0) % 360.0 - 180.0)


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    orbit = facts.visual_orbit(subject)
    if orbit is None:
        return RULE.insufficient(subject, "No published visual orbit with all seven elements.")
    log = facts.logs.get(subject)
    if log is None or log.linear is None:
        return RULE.insufficient(subject, "Fewer than three nights of unflagged measures to compare the orbit with.")
    el = (orbit.period_years, orbit.periastron_time.value, orbit.eccentricity.value, orbit.semimajor_axis.value,
          orbit.inclination.value, orbit.node.value, orbit.periastron_argument.value)
    keep = ~log.flagged
    rho_c, theta_c = orbits.ephemeris(log.t[keep], *el)
    o_c_theta = wrap(log.theta[keep] - theta_c)
    o_c_rho = log.rho[keep] - rho_c
    mx, my = orbits.ephemeris_xy(log.mt, *el)
    chi2_orbit = float(np.sum(((log.mx - mx) / log.msx) ** 2 + ((log.my - my) / log.msy) ** 2))
    chi2_line = float(log.linear.chi2)
    n = 2 * len(log.mt)
    dof = max(n - ORBIT_PARAMETERS, 1)
    p_fit = float(stats.chi2.sf(chi2_orbit, dof))
    fits = p_fit >= settings.fit_p
    # When the orbit leaves more scatter than the stated errors allow, both models are compared with every
    # error widened by the Birge ratio √(χ²/dof) of the orbit (Birge 1932, Phys. Rev. 40, 207), as the
    # parallax sources are: underestimated errors must not turn a good orbit into decisive evidence, nor
    # make it worthless.
    scale = 1.0 if fits else chi2_orbit / dof
    delta_bic = (chi2_orbit - chi2_line) / scale + (ORBIT_PARAMETERS - LINE_PARAMETERS) * math.log(n)
    strength = max(0.0, -delta_bic / (2 * math.log(10)))
    quantities = [
        Quantity("rms_theta", "RMS of O−C in θ", float(np.sqrt(np.mean(o_c_theta**2))), "°",
                 how=f"{int(keep.sum())} unflagged measures"),
        Quantity("rms_rho", "RMS of O−C in ρ", float(np.sqrt(np.mean(o_c_rho**2))), "″"),
        Quantity("chi2_orbit", "χ² of the orbit (nightly means)", chi2_orbit, "", how=f"{n} data"),
        Quantity("chi2_line", "χ² of a straight line", chi2_line, "", how=f"{log.linear.dof} degrees of freedom"),
        Quantity("p_fit", "χ² p-value of the orbit", p_fit, "", how=f"{dof} degrees of freedom (2N − 7)"),
        Quantity("delta_bic", "ΔBIC (orbit − straight line)", delta_bic, "",
                 how="7 against 4 free parameters" + ("" if fits else f", errors × {fmt_sig(math.sqrt(scale), 2)}")),
    ]
    text = (f"The published orbit (P = {fmt_fixed(orbit.period_years, 1)} yr, a = {fmt_fixed(orbit.semimajor_axis.value, 3)}″, "
            f"{orbit.ref}) leaves O−C of {fmt_fixed(quantities[0].value, 2)}° in θ and {fmt_fixed(quantities[1].value, 3)}″ in ρ (RMS) over "
            f"{int(keep.sum())} measures; χ² = {fmt_fixed(chi2_orbit, 0)} for {dof} dof (p = {fmt_sig(p_fit, 2)}) against {fmt_fixed(chi2_line, 0)} for a "
            f"straight line (ΔBIC = {fmt_fixed(delta_bic, 1)}).")
    if not fits:
        text += (f" The orbit leaves more scatter than the measures' stated errors allow (χ²/dof = {fmt_sig(scale, 2)}): "
                 "the errors are underestimated or the orbit needs revising. Against the straight line both are "
                 f"compared with every error widened by the Birge ratio {fmt_sig(math.sqrt(scale), 2)}.")
    refit = settings.refit_published or bool(facts.settings.rules.get("orbit-fit", {}).get("refit_published", False))
    if refit:
        text += _refit_comparison(facts, subject, orbit, chi2_orbit, quantities)
    plx = facts.pair_parallax(subject)
    mass = facts.pair_mass(subject)
    sources = [orbit.ref, "observing log"]
    if plx is not None:
        m_dyn = float(orbits.dynamical_mass(orbit.semimajor_axis.value, plx[0], orbit.period_years))
        s_dyn = float(orbits.dynamical_mass_uncertainty(orbit.semimajor_axis.value, orbit.semimajor_axis.uncertainty,
                                                        plx[0], plx[1], orbit.period_years, orbit.period_years_error))
        quantities.append(Quantity("dynamical_mass", "Dynamical total mass a³/(ϖ³P²)", m_dyn, "M☉", s_dyn,
                                   how=f"ϖ = {fmt_fixed(plx[0], 3)} ± {fmt_fixed(plx[1], 3)} mas"))
        text += f" The dynamical mass is {fmt_fixed(m_dyn, 2)} ± {fmt_fixed(s_dyn, 2)} M☉"
        if mass is not None:
            z = abs(m_dyn - mass[0]) / math.hypot(s_dyn, mass[1])
            quantities.append(Quantity("mass_sum", "Sum of the component masses", mass[0], "M☉", mass[1]))
            quantities.append(Quantity("mass_tension", "Dynamical − summed mass", z, "σ"))
            sources += list(mass[2])
            text += (f", {'consistent with' if z < settings.mass_tension_sigma else 'in tension with'} the sum of "
                     f"the component masses {fmt_fixed(mass[0], 2)} ± {fmt_fixed(mass[1], 2)} M☉ ({fmt_fixed(z, 1)}σ).")
            if z >= settings.mass_tension_sigma:
                text += " The parallax, the masses or the orbit must be wrong."
        else:
            text += "."
    outcome = "supports" if strength > settings.decisive else "neutral"
    return RULE.assessment(subject, outcome, text, strength=strength,
                           statistic=Quantity("delta_chi2", "χ²(line) − χ²(orbit)", chi2_line - chi2_orbit, ""),
                           quantities=tuple(quantities), sources=tuple(dict.fromkeys(sources)))


RULE = Rule(
    id="orbit-consistency",
    title="Published orbit against the log and the masses",
    version=2,
    subject="pair",
    question="binding",
    needs=("a published visual orbit (P, T, e, a, i, Ω, ω)", "measures in the observing log",
           "a parallax and component masses (for the mass check)"),
    citation="Heintz, W. D. 1978, Double Stars, Reidel, ch. 4 (Thiele–Innes ephemeris); Kepler's third law "
    "(dynamical mass); Schwarz, G. 1978, Ann. Stat. 6, 461 (BIC); Blunt, S. et al. 2017, AJ 153, 229 (refit)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)


def _refit_comparison(facts: SystemFacts, subject: str, orbit, chi2_published: float, quantities: list) -> str:
    """Compare the orbit refitted from the log with the published one; appends quantities, returns a sentence."""
    from dossier.rules.facts import published_elements

    post = facts.visual_posteriors.get(subject)
    if post is None or len(post) == 0:
        return " No orbit could be refitted from the log for comparison (too few nights or a straight path)."
    values, sigmas = published_elements(orbit)
    names = ("P", "T", "e", "a", "i", "node", "omega")
    q = {k: post.quantiles(k) for k in names}
    node_pub, omega_pub = values[5], values[6]
    # the visual-orbit ambiguity: (Ω, ω) and (Ω + 180°, ω + 180°) are one orbit; compare with the nearer
    alt = ((node_pub + 180.0) % 360.0, (omega_pub + 180.0) % 360.0)
    d_direct = abs(wrap(q["node"][1] - node_pub)) + abs(wrap(q["omega"][1] - omega_pub))
    d_alt = abs(wrap(q["node"][1] - alt[0])) + abs(wrap(q["omega"][1] - alt[1]))
    if d_alt < d_direct:
        values = (*values[:5], *alt)
    worst = (0.0, "")
    for k, v, s in zip(names, values, sigmas):
        lo, mid, hi = (float(x) for x in q[k])
        diff = float(wrap(mid - v)) if k in ("node", "omega") else mid - v
        z = diff / math.hypot(0.5 * (hi - lo), s)
        quantities.append(Quantity(f"refit_delta_{k}", f"Refit − published {k}", z, "σ",
                                   how=f"refit {fmt_sig(mid, 4)} ({post.method}), published {fmt_sig(v, 4)} ± {fmt_sig(s, 2)}"))
        if abs(z) > abs(worst[0]):
            worst = (z, k)
    chi2_refit = float(np.nanmin(post.chi2))
    d_chi2 = chi2_published - chi2_refit
    quantities.append(Quantity("refit_delta_chi2", "χ²(published) − χ²(refit)", d_chi2, "",
                               how="equal to ΔBIC: both orbits have 7 elements"))
    return (f" Refitted from the log ({post.method}): the elements differ from the published ones by at most "
            f"{fmt_fixed(abs(worst[0]), 1)}σ (in {worst[1]}); Δχ² = ΔBIC = {fmt_fixed(d_chi2, 1)} in favour of the "
            f"{'refit' if d_chi2 > 0 else 'published orbit'}.")
