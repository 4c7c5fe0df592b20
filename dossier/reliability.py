"""How well the verdicts' probabilities are calibrated, on a population of known truth.

``dossier calibrate`` (:mod:`dossier.calibrate`) draws a synthetic
population, screens it, and hands the screened columns to :func:`report`,
which scores them; :func:`write_report` publishes the result as a folder
(``reliability.json``, two reliability diagrams, ``index.html``).

What is measured
----------------
Reliability diagrams and the expected calibration error
    Predicted probabilities are put in equal-width bins on [0, 1] (the last
    bin closed); in each bin the mean prediction is compared with the
    fraction of pairs for which the event is true. The expected calibration
    error is ECE = Σ_b (n_b/N) |mean p_b − observed frequency_b| (Naeini,
    Cooper & Hauskrecht 2015, AAAI, "Obtaining well calibrated
    probabilities using Bayesian binning"). A finite sample has an ECE above
    zero even when perfectly calibrated, so the report gives beside it a
    bootstrap standard error (Efron & Tibshirani 1993, "An Introduction to
    the Bootstrap", ch. 6) and the ECE of a perfectly calibrated classifier
    with the same predictions (the truth drawn as Bernoulli(p)): its mean,
    spread and 95th percentile.
Observed frequencies' intervals
    The Wilson score interval (Wilson 1927, JASA 22, 209) with z = 1, i.e.
    a central 68.27 % interval; it behaves well near 0 and 1 and for small
    counts (Brown, Cai & DasGupta 2001, Statistical Science 16, 101).
Confusion with abstentions
    True class (bound, co-moving, chance) against status (bound, co-moving,
    optical, undetermined). A chance pair is answered correctly by
    "optical"; "undetermined" is an abstention, counted apart, never as a
    wrong answer.
A cut-based baseline
    :func:`baseline_classify` applies the cuts of El-Badry, Rix & Heintz
    2021 (MNRAS 506, 2269) and a common-practice velocity cut; it never
    abstains. The verdict model should make no more wrong definite answers
    than it in any class.

Targets: ECE ≤ 0.02 for P(physical) and for P(bound | physical), at most 5 %
of the pairs undetermined, and per true class no more wrong definite answers
than the baseline.

The population follows the model's own priors, so the report tests the
implementation and the self-consistency of the probabilities; it cannot
show that the priors fit a real sky. The page says so.
"""

from __future__ import annotations

import json
import math
import os
import secrets
import shutil
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from dossier.errors import DossierError

#: The true classes of a synthetic population, and the statuses a verdict can take.
TRUE_CLASSES: tuple[str, ...] = ("bound", "co-moving", "chance")
STATUSES: tuple[str, ...] = ("bound", "co-moving", "optical", "undetermined")
#: The status that answers each true class correctly.
CORRECT_STATUS: dict[str, str] = {"bound": "bound", "co-moving": "co-moving", "chance": "optical"}
#: The true classes that are physical pairs.
PHYSICAL_CLASSES: tuple[str, ...] = ("bound", "co-moving")

DEFAULT_BINS = 10
#: 68.27 %: the probability within ±1σ of a normal distribution, erf(1/√2).
INTERVAL_LEVEL = math.erf(1.0 / math.sqrt(2.0))
INTERVAL_NAME = "Wilson score interval, z = 1 (68.27 %); Wilson 1927, JASA 22, 209"
ECE_REFERENCE = ('Naeini, Cooper & Hauskrecht 2015, AAAI, "Obtaining well calibrated probabilities using '
                 'Bayesian binning"')
BASELINE_REFERENCE = "El-Badry, Rix & Heintz 2021, MNRAS 506, 2269"
N_RESAMPLES = 200
"""Bootstrap resamples, and draws of a perfectly calibrated truth (a standard error to about 5 %)."""

# Targets of a calibration.
ECE_TARGET = 0.02
UNDETERMINED_TARGET = 0.05

# --- The baseline's constants ---------------------------------------------------------------------------
#: 2π/√1000: circular-orbit speed 2π √(M/a) au/yr with a = 1000 θ/ϖ au, times ϖ, in mas/yr for M in Msun,
#: ϖ in mas, θ in arcsec (El-Badry, Rix & Heintz 2021, MNRAS 506, 2269, eq. for Δμ_orbit; their 0.44 is M = 5).
ORBIT_COEFFICIENT = 2.0 * math.pi / math.sqrt(1000.0)
#: km/s per (mas/yr)/mas: 1 au per Julian year in km/s (common practice).
KMS_PER_AU_PER_YR = 4.74047
#: Parallax-consistency factor b beyond CLOSE_ARCSEC and at or below it (El-Badry, Rix & Heintz 2021: close pairs'
#: parallax errors are underestimated).
PARALLAX_SIGMAS_WIDE = 3.0
PARALLAX_SIGMAS_CLOSE = 6.0
CLOSE_ARCSEC = 4.0
#: Proper-motion slack of the bound cut, in σ_Δμ (El-Badry, Rix & Heintz 2021).
MOTION_SIGMAS = 2.0
#: Total mass assumed where a mass is missing (Msun).
DEFAULT_TOTAL_MASS = 2.0
#: Tangential-velocity difference below which an unbound pair is called co-moving (km/s): a common-practice cut,
#: a few times the internal dispersion of a dissolving group, not a published constant.
COMOVING_KMS = 5.0

#: Decimal significant figures kept for floats in the report (the JSON's bytes then do not depend on the last bits).
SIGNIFICANT = 6
FILES = ("reliability.json", "reliability-physical.svg", "reliability-bound-given-physical.svg", "index.html",
         "style.css")
"""Every file a report folder holds."""


# ---------------------------------------------------------------------------------------------------------
# Bins and the expected calibration error


def _check(p: np.ndarray, truth: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    p = np.asarray(p, dtype=float).ravel()
    truth = np.asarray(truth).ravel()
    if p.shape != truth.shape:
        raise ValueError(f"{p.size} probabilities but {truth.size} truths. Fix: pass one truth per probability.")
    if not np.all(np.isfinite(p)) or np.any((p < 0.0) | (p > 1.0)):
        raise ValueError("probabilities must be finite and within [0, 1]. Fix: drop NaN values first.")
    return p, truth.astype(bool)


def bin_index(p: np.ndarray, n_bins: int = DEFAULT_BINS) -> np.ndarray:
    """The bin of each probability among ``n_bins`` equal-width bins on [0, 1].

    Bin k holds edges[k] ≤ p < edges[k + 1] with ``edges = np.linspace(0, 1, n_bins + 1)``, and the last bin
    also holds p = 1 (closed on the right).

    Parameters
    ----------
    p : array_like
        Probabilities in [0, 1].
    n_bins : int
        Number of bins.

    Returns
    -------
    numpy.ndarray of int
        Bin index of each value, 0 to ``n_bins - 1``.
    """
    if n_bins < 1:
        raise ValueError(f"n_bins is {n_bins}. Fix: use at least one bin.")
    edges = np.linspace(0.0, 1.0, n_bins + 1)
    return np.clip(np.searchsorted(edges, np.asarray(p, dtype=float), side="right") - 1, 0, n_bins - 1)


def wilson_interval(k: np.ndarray, n: np.ndarray, z: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """The Wilson score interval of a binomial proportion (Wilson 1927, JASA 22, 209).

    Parameters
    ----------
    k, n : array_like
        Successes and trials; where n = 0 both ends are NaN.
    z : float
        Half-width in standard normal deviates: 1 gives the central 68.27 % interval.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Lower and upper ends, within [0, 1].
    """
    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        phat = k / n
        denominator = 1.0 + z**2 / n
        centre = (phat + z**2 / (2.0 * n)) / denominator
        half = z * np.sqrt(phat * (1.0 - phat) / n + z**2 / (4.0 * n**2)) / denominator
        # The interval always holds k/n; min/max only undo rounding at k = 0 and k = n.
        low = np.where(n > 0, np.clip(np.minimum(centre - half, phat), 0.0, 1.0), np.nan)
        high = np.where(n > 0, np.clip(np.maximum(centre + half, phat), 0.0, 1.0), np.nan)
    return low, high


def reliability_bins(p: np.ndarray, truth: np.ndarray, n_bins: int = DEFAULT_BINS) -> dict[str, Any]:
    """The reliability diagram's bins: counts, mean prediction, observed frequency and its interval.

    Parameters
    ----------
    p : array_like
        Predicted probabilities, finite and within [0, 1].
    truth : array_like of bool
        Whether the predicted event is true, one per probability.
    n_bins : int
        Number of equal-width bins on [0, 1] (see :func:`bin_index`).

    Returns
    -------
    dict
        ``n_bins``; ``edges`` (n_bins + 1); per bin (arrays of n_bins): ``count``, ``positives`` (pairs for
        which the event is true), ``mean_predicted`` and ``observed_frequency`` (NaN in an empty bin), and
        ``interval_low``, ``interval_high`` (the 68.27 % Wilson interval of the observed frequency, NaN in an
        empty bin); ``interval``, naming the interval.
    """
    p, truth = _check(p, truth)
    index = bin_index(p, n_bins)
    count = np.bincount(index, minlength=n_bins)
    positives = np.bincount(index, weights=truth.astype(float), minlength=n_bins).round().astype(int)
    sums = np.bincount(index, weights=p, minlength=n_bins)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = np.where(count > 0, sums / count, np.nan)
        observed = np.where(count > 0, positives / count, np.nan)
    low, high = wilson_interval(positives, count)
    return {
        "n_bins": int(n_bins),
        "edges": np.linspace(0.0, 1.0, n_bins + 1),
        "count": count,
        "positives": positives,
        "mean_predicted": mean,
        "observed_frequency": observed,
        "interval_low": low,
        "interval_high": high,
        "interval": INTERVAL_NAME,
    }


def _ece(index: np.ndarray, p: np.ndarray, truth: np.ndarray, n_bins: int) -> float:
    """ECE from precomputed bin indices: Σ_b |Σ_{i∈b} (p_i − y_i)| / N (the same sum as n_b/N |mean − freq|)."""
    if p.size == 0:
        return math.nan
    residual = np.bincount(index, weights=p - truth, minlength=n_bins)
    return float(np.abs(residual).sum() / p.size)


def expected_calibration_error(p: np.ndarray, truth: np.ndarray, n_bins: int = DEFAULT_BINS) -> float:
    """Expected calibration error, ECE = Σ_b (n_b/N) |mean p_b − observed frequency_b|.

    Naeini, Cooper & Hauskrecht 2015, AAAI, "Obtaining well calibrated probabilities using Bayesian
    binning", with equal-width bins on [0, 1] (:func:`bin_index`).

    Parameters
    ----------
    p : array_like
        Predicted probabilities, finite and within [0, 1].
    truth : array_like of bool
        Whether the predicted event is true.
    n_bins : int
        Number of bins.

    Returns
    -------
    float
        The ECE, in [0, 1]; NaN for an empty sample.
    """
    p, truth = _check(p, truth)
    return _ece(bin_index(p, n_bins), p, truth.astype(float), n_bins)


def ece_summary(p: np.ndarray, truth: np.ndarray, n_bins: int = DEFAULT_BINS, *, n_resamples: int = N_RESAMPLES,
                seed: int = 0) -> dict[str, Any]:
    """The ECE with its sampling noise, and the ECE a perfectly calibrated classifier would show.

    Parameters
    ----------
    p : array_like
        Predicted probabilities, finite and within [0, 1].
    truth : array_like of bool
        Whether the predicted event is true.
    n_bins : int
        Number of bins.
    n_resamples : int
        Bootstrap resamples, and draws of a calibrated truth.
    seed : int
        Seed of both (:func:`numpy.random.default_rng`): same input, same numbers.

    Returns
    -------
    dict
        ``n``, ``n_bins``, ``n_resamples``; ``ece``; ``bootstrap_error``: standard deviation of the ECE over
        bootstrap resamples of the pairs (Efron & Tibshirani 1993, ch. 6); ``calibrated_mean``,
        ``calibrated_sd``, ``calibrated_p95``: mean, standard deviation and 95th percentile of the ECE when
        the truth is drawn as Bernoulli(p), i.e. of a classifier calibrated by construction with these very
        predictions; ``beyond_noise``: whether the ECE exceeds that 95th percentile. Floats are NaN (and
        ``beyond_noise`` None) for an empty sample.
    """
    p, truth = _check(p, truth)
    y = truth.astype(float)
    n = p.size
    out: dict[str, Any] = {"n": int(n), "n_bins": int(n_bins), "n_resamples": int(n_resamples),
                           "ece": math.nan, "bootstrap_error": math.nan, "calibrated_mean": math.nan,
                           "calibrated_sd": math.nan, "calibrated_p95": math.nan, "beyond_noise": None}
    if n == 0:
        return out
    index = bin_index(p, n_bins)
    ece = _ece(index, p, y, n_bins)
    rng = np.random.default_rng([seed, 0x5EED])
    boot = np.empty(n_resamples)
    calibrated = np.empty(n_resamples)
    for r in range(n_resamples):
        pick = rng.integers(0, n, n)
        boot[r] = _ece(index[pick], p[pick], y[pick], n_bins)
    for r in range(n_resamples):
        calibrated[r] = _ece(index, p, (rng.random(n) < p).astype(float), n_bins)
    p95 = float(np.quantile(calibrated, 0.95))
    out.update(ece=ece, bootstrap_error=float(np.std(boot, ddof=1)) if n_resamples > 1 else math.nan,
               calibrated_mean=float(calibrated.mean()),
               calibrated_sd=float(np.std(calibrated, ddof=1)) if n_resamples > 1 else math.nan,
               calibrated_p95=p95, beyond_noise=bool(ece > p95))
    return out


# ---------------------------------------------------------------------------------------------------------
# The cut-based baseline


def separation_arcsec(ra1: np.ndarray, dec1: np.ndarray, ra2: np.ndarray, dec2: np.ndarray) -> np.ndarray:
    """Angular separation (arcsec) of positions in degrees, by the Vincenty form of the haversine (exact at all
    separations; common practice, as in astropy's ``angular_separation``)."""
    r1, d1, r2, d2 = (np.radians(np.asarray(a, dtype=float)) for a in (ra1, dec1, ra2, dec2))
    dra = r2 - r1
    num = np.hypot(np.cos(d2) * np.sin(dra), np.cos(d1) * np.sin(d2) - np.sin(d1) * np.cos(d2) * np.cos(dra))
    den = np.sin(d1) * np.sin(d2) + np.cos(d1) * np.cos(d2) * np.cos(dra)
    return np.degrees(np.arctan2(num, den)) * 3600.0


def baseline_classify(columns: Mapping[str, np.ndarray]) -> np.ndarray:
    """A cut-based classifier after El-Badry, Rix & Heintz 2021 (MNRAS 506, 2269); it never abstains.

    In order:

    1. *optical* if the parallaxes disagree, |ϖ1 − ϖ2| ≥ b √(σ1² + σ2²), with b = 3 for ρ > 4″ and b = 6 for
       ρ ≤ 4″ (close pairs' parallax errors are underestimated);
    2. else *bound* if Δμ < Δμ_orbit + 2 σ_Δμ, with Δμ_orbit = (2π/√1000) √(M/Msun) (ϖ/mas)^1.5 (ρ/″)^−0.5
       mas/yr, the largest proper-motion difference of a circular orbit at the projected separation
       (0.198692 × ...; M = mass1 + mass2, or 2 Msun where that sum is missing; ϖ the inverse-variance mean
       parallax) and σ_Δμ² = [(σ²μα*,1 + σ²μα*,2) Δμα*² + (σ²μδ,1 + σ²μδ,2) Δμδ²] / Δμ²;
    3. else *co-moving* if the tangential velocity difference 4.74047 Δμ/ϖ is below 5 km/s (a common-practice
       cut, not the paper's);
    4. else *optical*.

    Δμ is the raw difference of the proper motions (no perspective correction), as in the paper. A pair
    missing a parallax, a parallax error or a proper motion, or whose mean parallax is not positive, fails
    the cuts it cannot pass and ends *optical* (a cut-based search keeps only pairs with full astrometry).

    Parameters
    ----------
    columns : mapping of str to array_like
        ``ra1, dec1, ra2, dec2`` (deg), ``parallax1, parallax_error1, parallax2, parallax_error2`` (mas),
        ``pmra1, pmra_error1, pmdec1, pmdec_error1, pmra2, pmra_error2, pmdec2, pmdec_error2`` (mas/yr,
        RA component times cos δ), ``mass1, mass2`` (Msun, NaN where unknown).

    Returns
    -------
    numpy.ndarray of str
        ``"bound"``, ``"co-moving"`` or ``"optical"`` for each pair.
    """
    c = {k: np.asarray(columns[k], dtype=float) for k in (
        "ra1", "dec1", "ra2", "dec2", "parallax1", "parallax_error1", "parallax2", "parallax_error2",
        "pmra1", "pmra_error1", "pmdec1", "pmdec_error1", "pmra2", "pmra_error2", "pmdec2", "pmdec_error2",
        "mass1", "mass2")}
    rho = separation_arcsec(c["ra1"], c["dec1"], c["ra2"], c["dec2"])
    with np.errstate(divide="ignore", invalid="ignore"):
        e1, e2 = c["parallax_error1"], c["parallax_error2"]
        b = np.where(rho > CLOSE_ARCSEC, PARALLAX_SIGMAS_WIDE, PARALLAX_SIGMAS_CLOSE)
        # NaN compares False: a pair whose parallaxes cannot be compared is not let through.
        parallax_ok = np.abs(c["parallax1"] - c["parallax2"]) < b * np.hypot(e1, e2)
        w1, w2 = 1.0 / e1**2, 1.0 / e2**2
        plx = (w1 * c["parallax1"] + w2 * c["parallax2"]) / (w1 + w2)
        plx = np.where(plx > 0.0, plx, np.nan)

        d_ra = c["pmra1"] - c["pmra2"]
        d_dec = c["pmdec1"] - c["pmdec2"]
        dmu = np.hypot(d_ra, d_dec)
        var = ((c["pmra_error1"] ** 2 + c["pmra_error2"] ** 2) * d_ra**2
               + (c["pmdec_error1"] ** 2 + c["pmdec_error2"] ** 2) * d_dec**2) / dmu**2
        # At Δμ = 0 σ_Δμ is 0/0, but any finite value passes the bound cut there: take 0.
        sigma = np.sqrt(np.where(dmu > 0.0, var, 0.0))
        mass = c["mass1"] + c["mass2"]
        mass = np.where(np.isfinite(mass), mass, DEFAULT_TOTAL_MASS)
        orbit = ORBIT_COEFFICIENT * np.sqrt(mass) * plx**1.5 / np.sqrt(rho)
        bound = parallax_ok & (dmu < orbit + MOTION_SIGMAS * sigma)
        comoving = parallax_ok & ~bound & (KMS_PER_AU_PER_YR * dmu / plx < COMOVING_KMS)
    return np.where(bound, "bound", np.where(comoving, "co-moving", "optical"))


# ---------------------------------------------------------------------------------------------------------
# Confusion with abstentions


def confusion(true_class: np.ndarray, status: np.ndarray) -> dict[str, Any]:
    """The confusion table of true class against status, with abstentions apart.

    Parameters
    ----------
    true_class : array_like of str
        ``"bound"``, ``"co-moving"`` or ``"chance"``.
    status : array_like of str
        ``"bound"``, ``"co-moving"``, ``"optical"`` or ``"undetermined"``.

    Returns
    -------
    dict
        ``rows`` (the true classes) and ``columns`` (the statuses), in order; ``counts[row][column]``;
        ``per_class[row]``: ``total``, ``correct`` (the status that answers the class: "optical" for
        "chance"), ``wrong`` (a definite status other than that) and ``abstained`` ("undetermined").

    Raises
    ------
    ValueError
        When a class or status is not one of those.
    """
    true_class = np.asarray(true_class).astype(str).ravel()
    status = np.asarray(status).astype(str).ravel()
    if true_class.shape != status.shape:
        raise ValueError(f"{true_class.size} true classes but {status.size} statuses. Fix: pass one of each per pair.")
    for values, known, what in ((true_class, TRUE_CLASSES, "true class"), (status, STATUSES, "status")):
        odd = sorted({str(v) for v in np.unique(values)} - set(known))
        if odd:
            raise ValueError(f"unknown {what} {odd[0]!r}. Fix: use one of: {', '.join(known)}.")
    counts = {row: {col: int(np.count_nonzero((true_class == row) & (status == col))) for col in STATUSES}
              for row in TRUE_CLASSES}
    per_class = {}
    for row in TRUE_CLASSES:
        total = sum(counts[row].values())
        correct = counts[row][CORRECT_STATUS[row]]
        abstained = counts[row]["undetermined"]
        per_class[row] = {"total": total, "correct": correct, "abstained": abstained,
                          "wrong": total - correct - abstained}
    return {"rows": list(TRUE_CLASSES), "columns": list(STATUSES), "counts": counts, "per_class": per_class}


# ---------------------------------------------------------------------------------------------------------
# The report


def jsonable(value: Any) -> Any:
    """A copy of ``value`` that :func:`json.dumps` writes the same way every time, without NaN.

    numpy scalars and arrays become Python numbers and lists; floats keep :data:`SIGNIFICANT` significant
    figures; NaN and infinities become None (JSON null); tuples become lists; mapping keys become strings.
    """
    if isinstance(value, Mapping):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        x = float(value)
        if not math.isfinite(x):
            return None
        return float(f"{x:.{SIGNIFICANT}g}") if x != 0.0 else 0.0
    if value is None or isinstance(value, str):
        return value
    if isinstance(value, Path):
        return value.as_posix()
    raise TypeError(f"cannot write {type(value).__name__} into the report. Fix: pass numbers, strings, lists "
                    "and dicts only.")


def _probability_block(p: np.ndarray, truth: np.ndarray, *, label: str, event: str, over: str,
                       seed: int) -> dict[str, Any]:
    """Reliability and ECE of one probability, skipping NaN predictions (counted)."""
    p = np.asarray(p, dtype=float)
    keep = np.isfinite(p)
    bins = reliability_bins(p[keep], truth[keep])
    return {
        "label": label,
        "event": event,
        "over": over,
        "pairs": int(p.size),
        "used": int(keep.sum()),
        "skipped_nan": int((~keep).sum()),
        "bins": bins,
        "ece": ece_summary(p[keep], truth[keep], seed=seed),
    }


def _p_bound_given_physical(columns: Mapping[str, np.ndarray]) -> np.ndarray:
    """P(bound | physical): the screen's own column when present, else P(bound) / P(physical)."""
    if "p_bound_given_physical" in columns:
        return np.asarray(columns["p_bound_given_physical"], dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(columns["p_bound"], dtype=float) / np.asarray(columns["p_physical"], dtype=float)


def _target(key: str, name: str, value: float | int | None, limit: float | int, target: str) -> dict[str, Any]:
    met = value is not None and math.isfinite(float(value)) and value <= limit
    return {"id": key, "name": name, "value": value, "limit": limit, "target": target, "met": bool(met)}


def report(columns: dict[str, np.ndarray], *, settings_summary: dict, seed: int, n_primaries: int) -> dict[str, Any]:
    """Score a screened synthetic population: the JSON-ready calibration report.

    Parameters
    ----------
    columns : dict of str to numpy.ndarray
        The screened population: ``true_class``, ``p_physical``, ``p_bound`` (and, when present,
        ``p_bound_given_physical``, which is used for P(bound | physical); otherwise P(bound)/P(physical)),
        ``status``, and the input columns that :func:`baseline_classify` reads.
    settings_summary : dict
        The settings the population was drawn and screened with (JSON-ready), copied into the report.
    seed : int
        The population's seed; the bootstrap and the calibrated draws are seeded from it.
    n_primaries : int
        Primary stars drawn.

    Returns
    -------
    dict
        Plain Python numbers, strings, lists and dicts, without NaN (null instead), floats to
        :data:`SIGNIFICANT` significant figures: ``population``, ``physical`` and
        ``bound_given_physical`` (each: counts, ``bins``, ``ece``), ``undetermined``, ``confusion``
        (``model`` and ``baseline``), ``wrong_by_class``, ``targets`` (``id``, ``name``, ``value``,
        ``limit``, ``target``, ``met``), ``all_met``, ``methods``, ``settings``.
    """
    true_class = np.asarray(columns["true_class"]).astype(str)
    status = np.asarray(columns["status"]).astype(str)
    n = int(true_class.size)
    physical_truth = np.isin(true_class, PHYSICAL_CLASSES)
    physical = _probability_block(np.asarray(columns["p_physical"], dtype=float), physical_truth,
                                  label="P(physical)", event="the pair is physical (bound or co-moving)",
                                  over="all pairs", seed=seed)
    bound_p = _p_bound_given_physical(columns)[physical_truth]
    bound = _probability_block(bound_p, true_class[physical_truth] == "bound",
                               label="P(bound | physical)", event="the pair is bound",
                               over="the truly physical pairs", seed=seed + 1)

    model = confusion(true_class, status)
    baseline = confusion(true_class, baseline_classify(columns))
    undetermined = int(np.count_nonzero(status == "undetermined"))
    fraction = undetermined / n if n else math.nan
    wrong = {c: {"model": model["per_class"][c]["wrong"], "baseline": baseline["per_class"][c]["wrong"]}
             for c in TRUE_CLASSES}

    targets = [
        _target("ece-physical", "ECE of P(physical)", physical["ece"]["ece"], ECE_TARGET, f"≤ {ECE_TARGET}"),
        _target("ece-bound-given-physical", "ECE of P(bound | physical)", bound["ece"]["ece"], ECE_TARGET,
                f"≤ {ECE_TARGET}"),
        _target("undetermined", "Fraction of pairs undetermined", fraction, UNDETERMINED_TARGET,
                f"≤ {UNDETERMINED_TARGET}"),
    ]
    for c in TRUE_CLASSES:
        limit = wrong[c]["baseline"]
        targets.append(_target(f"wrong-{c}", f"Wrong definite answers, true class {c}", wrong[c]["model"], limit,
                               f"≤ {limit} (the baseline's)"))

    result = {
        "format": "dossier calibration report",
        "format_version": 1,
        "population": {
            "synthetic": True,
            "seed": int(seed),
            "primaries": int(n_primaries),
            "pairs": n,
            "by_class": {c: int(np.count_nonzero(true_class == c)) for c in TRUE_CLASSES},
        },
        "physical": physical,
        "bound_given_physical": bound,
        "undetermined": {"count": undetermined, "fraction": fraction},
        "confusion": {"model": model, "baseline": baseline},
        "wrong_by_class": wrong,
        "targets": targets,
        "all_met": all(t["met"] for t in targets),
        "methods": {
            "ece": ECE_REFERENCE,
            "bins": f"{DEFAULT_BINS} equal-width bins on [0, 1], the last closed",
            "interval": INTERVAL_NAME,
            "bootstrap": (f"{N_RESAMPLES} bootstrap resamples of the pairs (standard error of the ECE); "
                          f"{N_RESAMPLES} draws of the truth as Bernoulli(p) (the ECE of a perfectly "
                          "calibrated classifier with the same predictions); seeded from the population's seed"),
            "baseline": (f"cuts after {BASELINE_REFERENCE}: parallaxes within b√(σ1²+σ2²), b = 3 beyond 4″ and "
                         "6 within; bound if Δμ < Δμ_orbit + 2σ_Δμ (circular orbit, total mass or 2 Msun); "
                         "else co-moving if 4.74047 Δμ/ϖ < 5 km/s (common practice); else optical; never "
                         "abstains"),
        },
        "settings": settings_summary,
    }
    return jsonable(result)


def dumps(report_: dict) -> str:
    """The report as JSON text: sorted keys, two-space indent, UTF-8 text, no NaN, a final newline."""
    return json.dumps(jsonable(report_), sort_keys=True, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# ---------------------------------------------------------------------------------------------------------
# Writing the folder


_PAGES = {
    "physical": ("reliability-physical.svg", "physical"),
    "bound_given_physical": ("reliability-bound-given-physical.svg", "bound given physical"),
}


def _figures(report_: dict) -> dict[str, tuple[str, str]]:
    """Each probability's diagram: file name -> (SVG text, alt text)."""
    from dossier.figures.reliability_chart import ReliabilityPoints, reliability_alt, reliability_chart

    out = {}
    for key, (name, _) in _PAGES.items():
        block = report_[key]
        points = ReliabilityPoints.from_report(block["bins"])
        alt = reliability_alt(points, subject=f"{block['label']} over {block['over']}", ece=block["ece"]["ece"],
                              ece_error=block["ece"]["bootstrap_error"])
        out[name] = (reliability_chart(points, title=f"Reliability of {block['label']}", alt=alt), alt)
    return out


def _with_error(value: float | None, error: float | None) -> str:
    """'0.0123 ± 0.0021' (decimals from the error), or the value alone, or '—'."""
    from dossier.figures.common import format_with_error
    from dossier.fmt import fmt_number

    if value is None:
        return "—"
    if error is None or not error > 0:
        return fmt_number(value, 2)
    v, e = format_with_error(value, error)
    return f"{v} ± {e}"


def _shown(target: dict) -> str:
    """A target's value as the page writes it: a percentage, a count or an ECE."""
    from dossier.fmt import fmt_number

    value = target["value"]
    if value is None:
        return "—"
    if target["id"] == "undetermined":
        return f"{fmt_number(100.0 * value, 2)} %"
    if isinstance(value, int):
        return str(value)
    return fmt_number(value, 2)


def render_page(report_: dict, figures: dict[str, tuple[str, str]]) -> str:
    """The report's ``index.html`` (``templates/reliability.html``), from the report and its drawn figures.

    Parameters
    ----------
    report_ : dict
        As returned by :func:`report`.
    figures : dict of str to (str, str)
        File name of each diagram -> (SVG text, its text alternative).

    Returns
    -------
    str
        The page: one file that needs only ``style.css`` beside it.
    """
    from dossier import __version__
    from dossier.fmt import fmt_number
    from dossier.render.html import render_page as render

    blocks = []
    for key, (name, _) in _PAGES.items():
        block = report_[key]
        ece = block["ece"]
        svg, alt = figures[name]
        bins = block["bins"]
        rows = [{"low": bins["edges"][i], "high": bins["edges"][i + 1], "count": bins["count"][i],
                 "positives": bins["positives"][i], "mean": bins["mean_predicted"][i],
                 "observed": bins["observed_frequency"][i], "interval_low": bins["interval_low"][i],
                 "interval_high": bins["interval_high"][i]} for i in range(len(bins["count"]))]
        calibrated = _with_error(ece["calibrated_mean"], ece["calibrated_sd"])
        if ece["calibrated_p95"] is not None:
            calibrated += f" (95th percentile {fmt_number(ece['calibrated_p95'], 2)})"
        if ece["beyond_noise"] is None:
            reading = "no pairs"
        elif ece["beyond_noise"]:
            reading = "larger than 95 % of perfectly calibrated draws: miscalibration beyond sampling noise"
        else:
            reading = "within the range of a perfectly calibrated classifier: sampling noise"
        blocks.append({"id": f"reliability-{key.replace('_', '-')}", "block": block, "svg": svg, "alt": alt,
                       "file": name, "rows": rows, "ece": _with_error(ece["ece"], ece["bootstrap_error"]),
                       "calibrated": calibrated, "reading": reading})
    targets = [{**t, "shown": _shown(t),
                "required": f"≤ {fmt_number(100.0 * t['limit'], 2)} %" if t["id"] == "undetermined" else t["target"]}
               for t in report_["targets"]]
    missed = [t for t in targets if not t["met"]]
    return render("reliability.html", report=report_, blocks=blocks, targets=targets, missed=missed,
                  version=__version__, tables=[("model", "The verdict model"), ("baseline", "The cut-based baseline")],
                  settings_json=json.dumps(report_.get("settings"), sort_keys=True, indent=2, ensure_ascii=False))


def _replaceable(folder: Path) -> None:
    """Refuse to replace anything but a missing folder, an empty one, or an earlier report."""
    if not os.path.lexists(folder):
        return
    if not folder.is_dir() or folder.is_symlink():
        raise DossierError(f"{folder} exists and is not a folder. Fix: choose a new folder for the report.")
    if any(folder.iterdir()) and not (folder / "reliability.json").is_file():
        raise DossierError(f"{folder} holds files that are not a calibration report; it would be replaced as a "
                           "whole. Fix: choose a new or empty folder.")


def write_report(folder: Path, report: dict) -> None:
    """Write the report folder in one step: ``reliability.json``, the two diagrams, ``index.html``, ``style.css``.

    Everything is written into a new sibling folder (``.<name>.partial-<pid>-<random>``) and flushed to disk;
    only then does it take the place of ``folder`` (swapped in atomically where the system allows, see
    :func:`dossier.durable.exchange`, else by two renames). If anything fails before, ``folder`` is left as
    it was and the partial folder removed: never half a report.

    Parameters
    ----------
    folder : pathlib.Path
        Where the report goes. An existing folder is replaced as a whole, but only when it is empty or holds
        an earlier report (a ``reliability.json``).
    report : dict
        As returned by :func:`report`.

    Raises
    ------
    DossierError
        When ``folder`` is a file or a folder of other things.
    """
    from dossier.durable import fsync_path, fsync_tree, swap_in
    from dossier.render.html import templates_dir

    folder = Path(folder).resolve()
    _replaceable(folder)
    folder.parent.mkdir(parents=True, exist_ok=True)
    staging = folder.with_name(f".{folder.name}.partial-{os.getpid()}-{secrets.token_hex(4)}")
    staging.mkdir()
    previous: Path | None = None
    try:
        (staging / "reliability.json").write_text(dumps(report), encoding="utf-8")
        figures = _figures(report)
        for name, (svg, _) in sorted(figures.items()):
            (staging / name).write_text(svg + "\n", encoding="utf-8")
        shutil.copyfile(templates_dir() / "assets" / "style.css", staging / "style.css")
        (staging / "index.html").write_text(render_page(report, figures), encoding="utf-8")
        fsync_tree(staging)
        _replaceable(folder)  # again: the folder may have changed while the report was written
        previous = swap_in(staging, folder,
                           folder.with_name(f".{folder.name}.previous-{os.getpid()}-{secrets.token_hex(4)}"))
        fsync_path(folder.parent, folder=True)
    finally:
        for leftover in (staging, previous):
            if leftover is not None and os.path.lexists(leftover):
                shutil.rmtree(leftover, ignore_errors=True)
