"""Chance alignment: how likely is an unrelated star this bright this close?

Method
    With Σ the surface density of field stars at least as bright as the
    companion (from the system's field-density table, or the project's), the
    number of unrelated stars expected within the separation ρ is
    λ = π ρ² Σ, and the probability of at least one is
    P_chance = 1 − exp(−λ) (Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111).
    The companion is the fainter member in the first band of the table that
    both the table and the member have.

Strength
    P_chance alone is not the probability that the pair is optical: that
    also depends on how common physical companions are. The strength is the
    log10 ratio of the separation densities of physical and optical
    companions at ρ: physical companions spread about evenly in log
    separation, f per decade (``companion_rate_per_decade``, about 0.1 for
    solar-type stars near the peak of the separation distribution; Raghavan
    et al. 2010, ApJS 190, 1; from memory), optical ones as dλ/dρ = 2πρΣ, so
    the ratio is f / (2 ln 10 · λ). This term plays the role of the prior
    odds in the verdict.

Outcome
    ``supports`` when the strength is above +0.5, ``against`` below −0.5,
    ``neutral`` between.

Insufficient data
    No separation (or a separation of zero), no density table, or no
    magnitude of the fainter member in a band of the table.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import chance
from dossier.astro.binary import python_square
from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import OUTCOME_CODES, OUTCOME_NAMES, Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    companion_rate_per_decade: float = Field(
        default=0.1, gt=0, lt=10, description="Physical companions per star per decade of separation."
    )
    decisive: float = Field(default=0.5, gt=0)


_FLOAT_KEYS = ("strength", "statistic", "density", "expected", "p_chance")


def kernel(rho_arcsec: np.ndarray, magnitude: np.ndarray, settings: Settings, length_scale_kpc: float = 1.35, *,
           table_magnitudes: np.ndarray, table_densities: np.ndarray,
           table_density_errors: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """The rule's numbers for many pairs at once; :func:`weigh` calls it with one pair.

    Parameters
    ----------
    rho_arcsec : ndarray, shape (n,)
        Separation, arcsec; NaN when unknown.
    magnitude : ndarray, shape (n,)
        The companion's (fainter member's) magnitude in the band of the table; NaN when unknown.
    settings
        The rule's settings.
    length_scale_kpc
        Not used: accepted so that every rule's kernel is called alike.
    table_magnitudes, table_densities : ndarray, shape (k,)
        One band's field-density table: limiting magnitudes and stars per square degree brighter
        than each (any order; sorted here, as :func:`weigh` sorts the rows). Empty: insufficient
        everywhere. Interpolated by :func:`dossier.astro.chance.density_at_magnitude`, which
        raises ``ValueError`` for repeated magnitudes or densities that are not positive.
    table_density_errors : ndarray, shape (k,), optional
        The densities' 1σ uncertainties; when given, the largest relative one scales the
        ``*_uncertainty`` results, as in the assessment's quantities.

    Returns
    -------
    dict of ndarray, shape (n,)
        ``outcome`` (int8, :data:`~dossier.rules.base.OUTCOME_CODES`; insufficient where ρ or the
        magnitude is missing or not finite, the table is empty, or λ = 0, e.g. ρ = 0),
        ``strength`` (log10 ratio of physical to optical companion densities at ρ), ``statistic``
        and ``p_chance`` (P_chance), ``density`` (Σ, deg⁻²), ``expected`` (λ) and ``extrapolated``
        (bool: the magnitude lies outside the table); NaN where insufficient. With
        ``table_density_errors``: ``density_uncertainty``, ``expected_uncertainty`` and
        ``p_chance_uncertainty`` too.
    """
    rho, mag = np.broadcast_arrays(*(np.atleast_1d(np.asarray(v, dtype=float)) for v in (rho_arcsec, magnitude)))
    if rho.ndim != 1:
        raise ValueError(f"kernel inputs have shape {rho.shape}. Fix: pass 1-D arrays, one value per pair.")
    tm = np.asarray(table_magnitudes, dtype=float).ravel()
    td = np.asarray(table_densities, dtype=float).ravel()
    n = rho.size
    out = {k: np.full(n, np.nan) for k in _FLOAT_KEYS}
    extrapolated = np.zeros(n, dtype=bool)
    usable = np.zeros(n, dtype=bool)
    rel_err = np.nan
    if tm.size:
        order = np.argsort(tm, kind="stable")
        tm, td = tm[order], td[order]
        if table_density_errors is not None:
            rel_err = float(np.max(np.asarray(table_density_errors, dtype=float).ravel()[order] / td))
        known = np.isfinite(rho) & np.isfinite(mag)
        with np.errstate(all="ignore"):
            density_deg, extrap = chance.density_at_magnitude(mag, tm, td)
            sigma_arcsec = chance.per_sq_deg_to_per_sq_arcsec(density_deg)
            # Python's rho**2 (C pow) for λ, numpy's square inside chance_alignment_probability: as before
            lam = math.pi * python_square(rho) * sigma_arcsec
            p = chance.chance_alignment_probability(rho, sigma_arcsec)
            strength = np.log10(settings.companion_rate_per_decade / (2 * math.log(10) * lam))
        usable = known & (lam > 0)
        extrapolated = np.asarray(extrap, dtype=bool) & usable
        for key, value in (("strength", strength), ("statistic", p), ("density", density_deg), ("expected", lam),
                           ("p_chance", p)):
            out[key] = np.where(usable, value, np.nan)
    outcome = np.select([out["strength"] > settings.decisive, out["strength"] < -settings.decisive],
                        [OUTCOME_CODES["supports"], OUTCOME_CODES["against"]], OUTCOME_CODES["neutral"]).astype(np.int8)
    outcome[~usable] = OUTCOME_CODES["insufficient"]
    result = {"outcome": outcome, **out, "extrapolated": extrapolated}
    if table_density_errors is not None:
        for key in ("density", "expected", "p_chance"):
            result[f"{key}_uncertainty"] = out[key] * rel_err
    return result


def density_table(facts: SystemFacts, subject: str) -> tuple[str, float, list] | str:
    """(band, the fainter member's magnitude, the table's rows of that band sorted by magnitude) for a pair,
    or the reason there is none."""
    pair = facts.pairs[subject]
    table = facts.system.field_density or facts.settings.field_density
    if not table:
        return "No field-star density: give field_density in the evidence or dossier.toml."
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    for band in dict.fromkeys(row.band for row in table):
        if band in a.magnitudes and band in b.magnitudes:
            break
    else:
        return "The members have no magnitude in a band of the field-density table."
    faint = a if a.magnitudes[band].value > b.magnitudes[band].value else b
    rows = sorted((r for r in table if r.band == band), key=lambda r: r.brighter_than)
    return band, faint.magnitudes[band].value, rows


def density_at(mag: float, rows: list) -> float:
    """Field stars per square degree brighter than ``mag``, interpolated in the table (as :func:`kernel` does)."""
    density, _ = chance.density_at_magnitude(np.array([mag]), np.array([r.brighter_than for r in rows], float),
                                             np.array([r.per_square_degree.value for r in rows], float))
    return float(np.asarray(density)[0])


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    if pair.rho_arcsec is None:
        return RULE.insufficient(subject, "No separation.")
    found = density_table(facts, subject)
    if isinstance(found, str):
        return RULE.insufficient(subject, found)
    band, mag, rows = found
    k = kernel(np.array([pair.rho_arcsec]), np.array([mag]), settings, facts.length_scale_kpc,
               table_magnitudes=np.array([r.brighter_than for r in rows]),
               table_densities=np.array([r.per_square_degree.value for r in rows]),
               table_density_errors=np.array([r.per_square_degree.uncertainty for r in rows]))
    outcome = int(k["outcome"][0])
    if outcome == OUTCOME_CODES["insufficient"]:
        return RULE.insufficient(subject, f"No expected number of unrelated stars within ρ = "
                                 f"{fmt_fixed(pair.rho_arcsec, 2)}″: the separation is zero, or it or the companion's "
                                 "magnitude is not a number.")
    density_deg, lam, p = float(k["density"][0]), float(k["expected"][0]), float(k["p_chance"][0])
    strength = float(k["strength"][0])
    text = (f"With {fmt_sig(density_deg, 3)} stars per square degree brighter than {band} = {fmt_fixed(mag, 2)}, an unrelated star "
            f"within {fmt_fixed(pair.rho_arcsec, 2)}″ has probability {fmt_sig(p, 2)}; physical companions are {fmt_sig(10**strength, 2)} times "
            "as dense as optical ones at this separation.")
    if bool(k["extrapolated"][0]):
        text += " The density was extrapolated beyond the table."
    refs = [r.per_square_degree.ref or r.ref for r in rows]
    p_err = float(k["p_chance_uncertainty"][0])
    return RULE.assessment(
        subject, OUTCOME_NAMES[outcome + 2], text, strength=strength,
        statistic=Quantity("p_chance", "P(chance alignment)", p, "", p_err),
        quantities=(
            Quantity("density", f"Field stars brighter than {band} = {fmt_fixed(mag, 2)}", density_deg, "deg⁻²",
                     float(k["density_uncertainty"][0])),
            Quantity("expected", "Expected unrelated stars within ρ (λ)", lam, "",
                     float(k["expected_uncertainty"][0])),
            Quantity("p_chance", "P(chance alignment)", p, "", p_err, how="1 − exp(−π ρ² Σ)"),
        ),
        sources=tuple(dict.fromkeys(r for r in refs if r)),
    )


RULE = Rule(
    id="chance-alignment",
    title="Chance alignment",
    version=1,
    subject="pair",
    question="association",
    needs=("the separation", "a field-star density table", "the companion's magnitude"),
    citation="Bloom, J. S., Kulkarni, S. R. & Djorgovski, S. G. 2002, AJ 123, 1111",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
