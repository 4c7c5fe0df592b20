"""Proper-motion difference against the largest motion of a bound orbit.

Method
    A bound pair of total mass M at projected separation θ and parallax ϖ
    cannot show a relative proper motion larger than its orbital speed
    allows. For a circular orbit seen face-on at the projected separation,
    Δμ_orbit = 0.1987 √(M/M☉) (ϖ/mas)^1.5 (θ/″)^−0.5 mas/yr (El-Badry, Rix &
    Heintz 2021, MNRAS 506, 2269, eq. 1, there for M = 5 M☉ where the
    coefficient is 0.44; written here for any mass), and no bound orbit at
    all can exceed the escape value √2 Δμ_orbit. The uncertainty of Δμ is
    their σ_Δμ (same paper). Accepted as consistent with a bound orbit when
    Δμ < Δμ_orbit + 2σ_Δμ, the paper's criterion.

Strength
    The log10 likelihood ratio bound : unbound of the measured Δμ
    (:mod:`dossier.astro.binding`): bound pairs have a true difference
    anywhere within the escape value, unbound members of a loose group one
    above it, drawn from the group's dispersion ``group_dispersion_kms``.
    A Δμ measured less precisely than the escape value gives a ratio near 1.
    This line alone: the verdict does not multiply it in, because the pair
    model (``pair-model``) weighs the same motions jointly, with unresolved
    companions allowed for.
    Projection makes the test one-sided: the true 3-D speed and separation
    can only make a bound orbit harder, so passing it is necessary, not
    sufficient.

Outcome
    ``supports`` when the strength is above +0.5 (and the El-Badry et al.
    criterion Δμ < Δμ_orbit + 2σ_Δμ is reported beside it); ``against``
    below −0.5; ``neutral`` between.

Insufficient data
    A member lacks a proper motion, the pair lacks a parallax, a
    separation or a total mass.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray
from pydantic import Field

from dossier.astro import binary, binding
from dossier.astro.binary import python_square
from dossier.fmt import fmt_fixed
from dossier.rules.base import (
    OUTCOME_CODES,
    OUTCOME_NAMES,
    Assessment,
    Quantity,
    Rule,
    RuleSettings,
    columns,
    unfilled,
)
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    acceptance_sigma: float = Field(default=2.0, gt=0, description="The '+2σ' of the El-Badry et al. criterion.")
    group_dispersion_kms: float = Field(
        default=1.0, gt=0, description="Per-axis velocity dispersion of unbound group members (km/s)."
    )
    decisive: float = Field(default=0.5, gt=0, description="|strength| above which the outcome is not neutral.")


STRENGTH_LIMIT = 99.0
# ln ratios beyond ±99 ln 10 are clipped to ±99 anyway: the binding kernels may settle them without quadrature.
LN_STRENGTH_LIMIT = STRENGTH_LIMIT * math.log(10)


def binding_strength(log_lr: NDArray) -> tuple[NDArray, NDArray]:
    """log10 likelihood ratios (clipped to ±99 for display and JSON) and P(bound) at even prior odds.

    As the scalar ``max(-99, min(99, x))`` did, a NaN ratio becomes +99.
    """
    x = log_lr / math.log(10)
    strength = np.where(np.isnan(x), STRENGTH_LIMIT, np.clip(x, -STRENGTH_LIMIT, STRENGTH_LIMIT))
    return strength, 1.0 / (1.0 + 10.0 ** (-strength))


def outcome_codes(strength: NDArray, decisive: float) -> NDArray:
    """Outcome codes (:data:`~dossier.rules.base.OUTCOME_CODES`) of binding strengths."""
    return np.where(strength > decisive, OUTCOME_CODES["supports"],
                    np.where(strength < -decisive, OUTCOME_CODES["against"], OUTCOME_CODES["neutral"])).astype(np.int8)


KERNEL_KEYS = ("outcome", "strength", "statistic", "delta_pm", "delta_pm_uncertainty", "orbit_limit",
               "escape_limit", "p_bound", "within_limit")


def kernel(pmra1: ArrayLike, pmra_error1: ArrayLike, pmdec1: ArrayLike, pmdec_error1: ArrayLike,
           pmra2: ArrayLike, pmra_error2: ArrayLike, pmdec2: ArrayLike, pmdec_error2: ArrayLike,
           separation_arcsec: ArrayLike, parallax_mas: ArrayLike, total_mass_msun: ArrayLike,
           settings: Settings) -> dict[str, NDArray]:
    """The rule's numbers for many pairs at once.

    Parameters
    ----------
    pmra1, pmra_error1, pmdec1, pmdec_error1, pmra2, pmra_error2, pmdec2, pmdec_error2 : array_like
        Proper motions of the two members and their 1σ errors, mas/yr (RA component × cos δ).
    separation_arcsec : array_like
        Separation of the pair, arcsec.
    parallax_mas : array_like
        Parallax of the pair, mas (``SystemFacts.pair_parallax``).
    total_mass_msun : array_like
        Total mass of the pair, solar masses.
    settings : Settings
        The rule's settings.

    All of one shape (or broadcastable); NaN means missing.

    Returns
    -------
    dict of ndarray
        ``outcome`` (int8, :data:`~dossier.rules.base.OUTCOME_CODES`; −2 where an input is NaN),
        ``strength`` (log10 likelihood ratio bound : unbound, clipped to ±99), ``statistic``
        (Δμ / Δμ_orbit), ``delta_pm`` and ``delta_pm_uncertainty`` (Δμ and σ_Δμ, mas/yr),
        ``orbit_limit`` and ``escape_limit`` (mas/yr), ``p_bound`` (P(bound) at even odds) and
        ``within_limit`` (bool: Δμ < Δμ_orbit + acceptance_sigma σ_Δμ); NaN (False) where insufficient.
    """
    cols, complete = columns(pmra1, pmra_error1, pmdec1, pmdec_error1, pmra2, pmra_error2, pmdec2, pmdec_error2,
                             separation_arcsec, parallax_mas, total_mass_msun)
    with np.errstate(invalid="ignore"):
        # no orbital speed without a distance and a mass: a parallax ≤ 0 (valid data of a distant star) or
        # a mass ≤ 0 leaves the test undecided instead of dividing by zero or reading NaN as "bound"
        complete = complete & (cols[9] > 0) & (cols[10] > 0)
    out = unfilled(complete.shape, KERNEL_KEYS[1:-1])
    out["within_limit"] = np.zeros(complete.shape, dtype=bool)
    if not complete.any():
        return out
    rows = ... if complete.all() else complete  # every pair complete: views, no copies
    ra1, era1, dec1, edec1, ra2, era2, dec2, edec2, rho, plx, mass = (c[rows] for c in cols)
    d_ra, d_dec = ra1 - ra2, dec1 - dec2
    var_ra = python_square(era1) + python_square(era2)
    var_dec = python_square(edec1) + python_square(edec2)
    dmu = binary.python_hypot(d_ra, d_dec)
    sigma = binary.sigma_delta_mu(d_ra, d_dec, var_ra, var_dec)
    orbit = binary.delta_mu_orbit(mass, plx, rho)
    escape = binary.delta_mu_escape(mass, plx, rho)
    d_kpc = 1.0 / plx
    group = settings.group_dispersion_kms / (binary.KM_S_PER_AU_YR * d_kpc)
    sigma_axis = np.sqrt((var_ra + var_dec) / 2)
    strength, p_bound = binding_strength(binding.log_lr_bound_planar(dmu, sigma_axis, escape, group,
                                                                     beyond=LN_STRENGTH_LIMIT))
    for name, value in (("outcome", outcome_codes(strength, settings.decisive)), ("strength", strength),
                        ("statistic", dmu / orbit), ("delta_pm", dmu), ("delta_pm_uncertainty", sigma),
                        ("orbit_limit", orbit), ("escape_limit", escape), ("p_bound", p_bound),
                        ("within_limit", dmu < orbit + settings.acceptance_sigma * sigma)):
        out[name][rows] = value
    return out


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    missing = [f"proper motion of {s.id}" for s in (a, b) if s.motion is None]
    plx = facts.pair_parallax(subject)
    mass = facts.pair_mass(subject)
    if plx is None:
        missing.append("parallax")
    if pair.rho_arcsec is None:
        missing.append("separation")
    if mass is None:
        missing.append("total mass")
    if missing:
        return RULE.insufficient(subject, f"Needs {', '.join(missing)}.")
    if pair.first == pair.second:
        return RULE.insufficient(subject, f"Both members are represented by {pair.first}.")
    assert a.motion and b.motion and plx and mass and pair.rho_arcsec
    one = kernel(*([v] for v in (a.motion.pmra, a.motion.pmra_error, a.motion.pmdec, a.motion.pmdec_error,
                                 b.motion.pmra, b.motion.pmra_error, b.motion.pmdec, b.motion.pmdec_error,
                                 pair.rho_arcsec, plx[0], mass[0])), settings=settings)
    if one["outcome"][0] == OUTCOME_CODES["insufficient"]:
        return RULE.insufficient(subject, "Needs a positive parallax and total mass (a parallax ≤ 0 gives no "
                                          "distance to scale the orbital motion), and proper motions and a "
                                          "separation that are numbers.")
    if one["orbit_limit"][0] == 0.0:
        raise ZeroDivisionError("float division by zero")  # as the scalar formulas did: the rule fails
    dmu, sigma, orbit, escape, strength, p_bound = (
        float(one[k][0]) for k in ("delta_pm", "delta_pm_uncertainty", "orbit_limit", "escape_limit", "strength",
                                   "p_bound"))
    outcome = OUTCOME_NAMES[int(one["outcome"][0]) + 2]
    el_badry = bool(one["within_limit"][0])
    text = (f"Δμ = {fmt_fixed(dmu, 3)} ± {fmt_fixed(sigma, 3)} mas/yr against {fmt_fixed(orbit, 3)} mas/yr for a circular orbit of {fmt_fixed(mass[0], 2)} M☉ "
            f"at {fmt_fixed(pair.rho_arcsec, 2)}″ and {fmt_fixed(escape, 3)} mas/yr for escape: "
            + ("within the El-Badry et al. limit." if el_badry else "beyond the El-Badry et al. limit.")
            + " A diagnostic: the verdict weighs the motions in the pair model, which allows for unresolved companions.")
    quantities = (
        Quantity("delta_pm", "Proper-motion difference Δμ", dmu, "mas/yr", sigma, how="σ_Δμ of El-Badry et al. 2021"),
        Quantity("orbit_limit", "Largest circular-orbit Δμ", orbit, "mas/yr",
                 how=f"M = {fmt_fixed(mass[0], 2)} M☉, ϖ = {fmt_fixed(plx[0], 3)} mas, θ = {fmt_fixed(pair.rho_arcsec, 3)}″"),
        Quantity("escape_limit", "Escape Δμ", escape, "mas/yr", how="√2 × the circular limit"),
        Quantity("p_bound", "P(bound) from this line alone, even prior", p_bound, ""),
    )
    return RULE.assessment(
        subject, outcome, text, strength=strength, probability=p_bound,
        statistic=Quantity("ratio", "Δμ / Δμ_orbit", float(one["statistic"][0]), ""), quantities=quantities,
        sources=tuple(dict.fromkeys((a.motion.ref, b.motion.ref, *mass[2]))),
    )


RULE = Rule(
    id="proper-motion-orbit",
    title="Proper motion against a bound orbit",
    version=2,  # 2: likelihood ratio in closed form (noncentral χ², Marcum Q)
    subject="pair",
    question="binding",
    needs=("a proper motion for each member", "a parallax", "the separation", "the total mass"),
    citation="El-Badry, K., Rix, H.-W. & Heintz, T. M. 2021, MNRAS 506, 2269",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
