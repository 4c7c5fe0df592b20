"""Parallax agreement of a pair.

Method
    The difference of the members' combined parallaxes, Δϖ = ϖ₁ − ϖ₂, is
    compared with its combined uncertainty σ = √(σ₁² + σ₂²) widened by the
    physical depth a bound pair may have along the line of sight,
    σ_depth = k ϖ ρ (ρ in radians, k = ``depth_factor``). Following El-Badry,
    Rix & Heintz 2021 (MNRAS 506, 2269, §2) the parallaxes agree when
    |Δϖ| < b σ, with b = 3 for ρ > 4″ and b = 6 closer in, where the
    uncertainties of close pairs are underestimated (by the same reasoning,
    σ is doubled inside 4″ for the strength).

Strength
    The log10 Bayes factor physical : optical of the two parallaxes. If
    physical, both stars share one distance r; if optical, each has its own
    distance drawn from the exponentially decreasing space density prior of
    length scale L (Bailer-Jones 2015, PASP 127, 994). Because the product of
    two Gaussians in 1/r is a Gaussian in Δϖ times a Gaussian in the
    weighted mean ϖ̄, the factor is

        B = N(Δϖ | 0, σ) · m(ϖ̄, σ̄) / [m(ϖ₁, σ₁) · m(ϖ₂, σ₂)],

    with m(ϖ, σ) = ∫ N(ϖ | 1/r, σ) p(r) dr the marginal likelihood under the
    prior. Agreement of two precise parallaxes is strong evidence, because a
    random field star rarely has so close a parallax.

Outcome
    ``supports`` when the parallaxes agree by the criterion above,
    ``against`` when they do not.

Insufficient data
    Either member has no parallax.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import distance
from dossier.astro.binary import python_hypot as _hypot  # CPython's math.hypot, bit for bit
from dossier.astro.binary import python_square as _pow2  # CPython's x ** 2, bit for bit
from dossier.fmt import fmt_fixed
from dossier.rules.base import OUTCOME_CODES, Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts

ARCSEC_IN_RAD = math.pi / (180.0 * 3600.0)


class Settings(RuleSettings):
    depth_factor: float = Field(
        default=2.0, ge=0,
        description="Line-of-sight depth allowed to a bound pair, in units of its projected separation.",
    )
    close_separation_arcsec: float = Field(
        default=4.0, gt=0, description="Below this separation the threshold b is 6 instead of 3 (El-Badry et al. 2021)."
    )


_LN10 = math.log(10)
_SQRT_2PI = math.sqrt(2 * math.pi)
#: Pairs per block of the element-wise part: temporaries of this size stay in the cache, which makes
#: 10^6 pairs about twice as fast as whole-array operations.
_BLOCK = 4096
_SUPPORTS, _AGAINST, _INSUFFICIENT = (np.int8(OUTCOME_CODES[k]) for k in ("supports", "against", "insufficient"))
_FLOAT_KEYS = ("strength", "statistic", "delta_parallax", "delta_parallax_uncertainty", "depth_allowance",
               "threshold")


def kernel(parallax1: np.ndarray, parallax_error1: np.ndarray, parallax2: np.ndarray, parallax_error2: np.ndarray,
           rho_arcsec: np.ndarray, settings: Settings, length_scale_kpc: float = 1.35, *,
           with_strength: bool = True) -> dict[str, np.ndarray]:
    """The rule's numbers for many pairs at once; :func:`weigh` calls it with one pair.

    Parameters
    ----------
    parallax1, parallax_error1, parallax2, parallax_error2 : ndarray, shape (n,)
        The members' combined parallaxes and their (Birge-inflated) errors, mas; NaN when missing.
    rho_arcsec : ndarray, shape (n,)
        Separation, arcsec; NaN when unknown (then no depth allowance and the wide-pair threshold).
    settings
        The rule's settings.
    length_scale_kpc
        Length scale L of the distance prior (the distance rule's setting).
    with_strength
        False skips the Bayes factor, whose three marginal likelihoods per pair cost a few
        microseconds for precise parallaxes (Gauss–Hermite) and about 0.4 ms each for imprecise ones
        (a four-thousand-point grid), where everything else takes a fraction of a microsecond:
        ``strength`` is then NaN, the rest unchanged.

    Returns
    -------
    dict of ndarray, shape (n,)
        ``outcome`` (int8, :data:`~dossier.rules.base.OUTCOME_CODES`: supports or against; insufficient
        where a parallax or its error is missing, not finite, or an error is not positive),
        ``strength`` (log10 Bayes factor), ``statistic`` (z = |Δϖ| / σ, in σ), ``delta_parallax`` (mas)
        with ``delta_parallax_uncertainty`` (σ₁ and σ₂ in quadrature, mas), ``depth_allowance`` (mas)
        and ``threshold`` (b, in σ); NaN where insufficient.
    """
    p1, e1, p2, e2, rho = np.broadcast_arrays(*(np.atleast_1d(np.asarray(v, dtype=float)) for v in (
        parallax1, parallax_error1, parallax2, parallax_error2, rho_arcsec)))
    if p1.ndim != 1:
        raise ValueError(f"kernel inputs have shape {p1.shape}. Fix: pass 1-D arrays, one value per pair.")
    n = p1.size
    out = {k: np.empty(n) for k in _FLOAT_KEYS}
    outcome = np.empty(n, dtype=np.int8)
    known = np.empty(n, dtype=bool)
    # what the Bayes factor needs: the weighted mean parallax, the three scaled errors, ln N(Δϖ | 0, σ_bf)
    for_bf = [np.empty(n) for _ in range(5)] if with_strength else None
    close_arcsec = settings.close_separation_arcsec
    with np.errstate(all="ignore"):
        for start in range(0, n, _BLOCK):
            b = slice(start, start + _BLOCK)
            x1, a1, x2, a2, r = p1[b], e1[b], p2[b], e2[b], rho[b]
            ok = np.isfinite(x1) & np.isfinite(x2) & np.isfinite(a1) & np.isfinite(a2) & (a1 > 0) & (a2 > 0)
            known[b] = ok
            diff = x1 - x2
            sigma = _hypot(a1, a2)
            close = r < close_arcsec  # a missing separation counts as wide
            w1, w2 = 1 / _pow2(a1), 1 / _pow2(a2)
            w_sum = w1 + w2
            mean = (w1 * x1 + w2 * x2) / w_sum
            # ``max(mean, 0) * (rho or 0)``: a missing (or zero) separation allows no depth
            depth = settings.depth_factor * np.maximum(mean, 0.0) * np.where(np.isnan(r) | (r == 0), 0.0, r) \
                * ARCSEC_IN_RAD
            sigma_total = _hypot(sigma, depth)
            threshold = np.where(close, 6.0, 3.0)
            consistent = np.abs(diff) < threshold * sigma_total
            outcome[b] = np.where(ok, np.where(consistent, _SUPPORTS, _AGAINST), _INSUFFICIENT)
            for key, value in (("delta_parallax", diff), ("delta_parallax_uncertainty", sigma),
                               ("depth_allowance", depth), ("threshold", threshold),
                               ("statistic", np.abs(diff) / sigma_total)):
                out[key][b] = np.where(ok, value, np.nan)
            if for_bf is not None:
                scale = np.where(close, 2.0, 1.0)
                s_bf = scale * sigma_total
                for_bf[0][b] = mean
                for_bf[1][b] = scale * (1 / np.sqrt(w_sum))
                for_bf[2][b], for_bf[3][b] = scale * a1, scale * a2
                for_bf[4][b] = -0.5 * _pow2(diff / s_bf) - np.log(s_bf * _SQRT_2PI)
        out["strength"].fill(np.nan)
        if for_bf is not None and known.any():
            k = np.flatnonzero(known)
            mean, s_mean, s_1, s_2, log_gauss = (v[k] for v in for_bf)
            log_m = distance.edsd_log_marginal(np.concatenate([mean, p1[k], p2[k]]),
                                               np.concatenate([s_mean, s_1, s_2]), length_scale_kpc)
            m0, m1, m2 = log_m[: k.size], log_m[k.size : 2 * k.size], log_m[2 * k.size :]
            out["strength"][k] = (log_gauss + m0 - m1 - m2) / _LN10
    return {"outcome": outcome, **out}


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    a, b = facts.stars[pair.first].parallax, facts.stars[pair.second].parallax
    missing = [m for m, p in ((pair.first, a), (pair.second, b)) if p is None]
    if missing:
        return RULE.insufficient(subject, f"No parallax for {' and '.join(missing)}.")
    if pair.first == pair.second:
        return RULE.insufficient(subject, f"Both members are represented by {pair.first}; their parallaxes are one.")
    assert a is not None and b is not None
    k = kernel(np.array([a.mean]), np.array([a.error_inflated]), np.array([b.mean]), np.array([b.error_inflated]),
               np.array([np.nan if pair.rho_arcsec is None else pair.rho_arcsec]), settings, facts.length_scale_kpc)
    outcome = int(k["outcome"][0])
    if outcome == OUTCOME_CODES["insufficient"]:
        return RULE.insufficient(subject, f"The parallaxes of {pair.first} and {pair.second} are not usable numbers.")
    diff, sigma = float(k["delta_parallax"][0]), float(k["delta_parallax_uncertainty"][0])
    depth, threshold = float(k["depth_allowance"][0]), float(k["threshold"][0])
    z, strength = float(k["statistic"][0]), float(k["strength"][0])
    quantities = (
        Quantity("delta_parallax", "Parallax difference ϖ₁ − ϖ₂", diff, "mas", sigma),
        Quantity("depth_allowance", "Allowance for physical depth", depth, "mas",
                 how=f"{settings.depth_factor} × ϖ × ρ"),
        Quantity("threshold", "Agreement threshold b", threshold, "σ",
                 how="El-Badry et al. 2021: 6 below 4″, else 3"),
    )
    stat = Quantity("z", "|Δϖ| / σ", z, "σ")
    consistent = outcome == OUTCOME_CODES["supports"]
    if consistent:
        text = (f"The parallaxes of {pair.first} ({fmt_fixed(a.mean, 3)} ± {fmt_fixed(a.error_inflated, 3)} mas) and {pair.second} "
                f"({fmt_fixed(b.mean, 3)} ± {fmt_fixed(b.error_inflated, 3)} mas) agree within {fmt_fixed(z, 1)}σ (threshold {fmt_fixed(threshold, 0)}σ).")
    else:
        text = (f"The parallaxes of {pair.first} ({fmt_fixed(a.mean, 3)} ± {fmt_fixed(a.error_inflated, 3)} mas) and {pair.second} "
                f"({fmt_fixed(b.mean, 3)} ± {fmt_fixed(b.error_inflated, 3)} mas) differ by {fmt_fixed(z, 1)}σ, beyond the {fmt_fixed(threshold, 0)}σ "
                "a physical pair allows.")
    return RULE.assessment(
        subject, "supports" if consistent else "against", text, strength=strength, statistic=stat,
        quantities=quantities, sources=tuple(dict.fromkeys(s.ref for s in a.sources + b.sources)),
    )


RULE = Rule(
    id="parallax-agreement",
    title="Parallax agreement",
    version=2,  # 2: marginal likelihoods of precise parallaxes by Gauss–Hermite quadrature
    subject="pair",
    question="association",
    needs=("a parallax for each member",),
    citation="El-Badry, K., Rix, H.-W. & Heintz, T. M. 2021, MNRAS 506, 2269 (agreement criterion); "
    "Bailer-Jones, C. A. L. 2015, PASP 127, 994 (distance prior of the Bayes factor)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
