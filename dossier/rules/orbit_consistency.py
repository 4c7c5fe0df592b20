"""Consistency of a published visual orbit with the observing log and the masses.

Method
    The ephemeris ρ(t), θ(t) of the published Campbell elements (P, T, e,
    a, i, Ω, ω) through the Thiele–Innes constants (Heintz 1978, Double
    Stars, ch. 4) is compared with every measure of the log (O−C in θ and ρ).
    The dynamical total mass a³ / (ϖ³ P²) (Kepler's third law; angles in the
    same unit, P in years) with its propagated uncertainty is compared with
    the sum of the component masses.

Strength
    How much better the orbit describes the nightly means than a straight
    line, the path of an unbound pair: (χ²_line − χ²_orbit) / (2 ln 10), a
    log10 likelihood ratio bound : unbound, floored at zero. The published
    orbit was fitted to part of the same measures, so no penalty is
    credited to it for having no free parameters here.

Outcome
    ``supports`` when the strength exceeds +0.5, ``neutral`` otherwise. A
    dynamical mass more than 3σ from the sum of the masses is reported in
    the explanation: the parallax, the masses or the orbit is then wrong.

Insufficient data
    No published visual orbit with all seven elements, or fewer than three
    nights of unflagged measures.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import orbit as orbits
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    decisive: float = Field(default=0.5, gt=0)
    mass_tension_sigma: float = Field(default=3.0, gt=0)


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
    strength = max(0.0, (chi2_line - chi2_orbit) / (2 * math.log(10)))
    n = 2 * len(log.mt)
    quantities = [
        Quantity("rms_theta", "RMS of O−C in θ", float(np.sqrt(np.mean(o_c_theta**2))), "°",
                 how=f"{int(keep.sum())} unflagged measures"),
        Quantity("rms_rho", "RMS of O−C in ρ", float(np.sqrt(np.mean(o_c_rho**2))), "″"),
        Quantity("chi2_orbit", "χ² of the orbit (nightly means)", chi2_orbit, "", how=f"{n} data"),
        Quantity("chi2_line", "χ² of a straight line", chi2_line, "", how=f"{log.linear.dof} degrees of freedom"),
    ]
    text = (f"The published orbit (P = {orbit.period_years:.1f} yr, a = {orbit.semimajor_axis.value:.3f}″, "
            f"{orbit.ref}) leaves O−C of {quantities[0].value:.2f}° in θ and {quantities[1].value:.3f}″ in ρ (RMS) over "
            f"{int(keep.sum())} measures; χ² = {chi2_orbit:.0f} against {chi2_line:.0f} for a straight line.")
    plx = facts.pair_parallax(subject)
    mass = facts.pair_mass(subject)
    sources = [orbit.ref, "observing log"]
    if plx is not None:
        m_dyn = float(orbits.dynamical_mass(orbit.semimajor_axis.value, plx[0], orbit.period_years))
        s_dyn = float(orbits.dynamical_mass_uncertainty(orbit.semimajor_axis.value, orbit.semimajor_axis.uncertainty,
                                                        plx[0], plx[1], orbit.period_years, orbit.period_years_error))
        quantities.append(Quantity("dynamical_mass", "Dynamical total mass a³/(ϖ³P²)", m_dyn, "M☉", s_dyn,
                                   how=f"ϖ = {plx[0]:.3f} ± {plx[1]:.3f} mas"))
        text += f" The dynamical mass is {m_dyn:.2f} ± {s_dyn:.2f} M☉"
        if mass is not None:
            z = abs(m_dyn - mass[0]) / math.hypot(s_dyn, mass[1])
            quantities.append(Quantity("mass_sum", "Sum of the component masses", mass[0], "M☉", mass[1]))
            quantities.append(Quantity("mass_tension", "Dynamical − summed mass", z, "σ"))
            sources += list(mass[2])
            text += (f", {'consistent with' if z < settings.mass_tension_sigma else 'in tension with'} the sum of "
                     f"the component masses {mass[0]:.2f} ± {mass[1]:.2f} M☉ ({z:.1f}σ).")
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
    version=1,
    subject="pair",
    question="binding",
    needs=("a published visual orbit (P, T, e, a, i, Ω, ω)", "measures in the observing log",
           "a parallax and component masses (for the mass check)"),
    citation="Heintz, W. D. 1978, Double Stars, Reidel, ch. 4 (Thiele–Innes ephemeris); Kepler's third law "
    "(dynamical mass)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
