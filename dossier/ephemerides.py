"""Ephemerides drawn from an orbit posterior: where the companion will be, how sure that is, and when to look.

An orbit posterior (:mod:`dossier.astro.orbit_posterior`: samples of the
Campbell elements, from a fit to the log or drawn about a published orbit's
stated uncertainties) is turned into predicted separations ρ and position
angles θ at chosen epochs, each as the median with the central 68 % and 95 %
of the samples. Position angles are summarised about the circular mean of
the samples, so that a prediction straddling north reads 359° to 1°, not
1° to 359°.

Two derived epochs help plan observations:

best resolved
    the epoch of the largest median separation in the coming years;
most informative
    the epoch at which one measure would remove the largest fraction of the
    posterior variance of ln P. In the linear-Gaussian approximation a
    measure z = (x, y) with error σ_m removes c^T (S + σ_m² I)^−1 c of
    Var(ln P), where c is the covariance of ln P with the predicted position
    and S the covariance of the predicted position, both over the samples
    (the conditional variance of a Gaussian; the criterion of Bayesian
    optimal design, Lindley, D. V. 1956, Ann. Math. Stat. 27, 986; Chaloner
    & Verdinelli 1995, Stat. Sci. 10, 273; from memory). Unlike the spread
    of the positions, which only grows with time, this peaks where the
    position says most about the orbit.

The observed-minus-computed (O−C) of a measure is taken against the median
prediction and expressed in units of the combined uncertainty of the
measure and of the prediction, so that an orbit with broad posteriors is not
called contradicted by a measure that it merely failed to pin down.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["Outlook", "Prediction", "describe", "o_minus_c", "outlook", "period_gain", "predict", "table"]

#: Quantiles reported for every prediction: 2.5, 16, 50, 84 and 97.5 %.
QUANTILES = (0.025, 0.16, 0.5, 0.84, 0.975)


_SOURCES = {
    "importance": "orbits fitted to the log (importance sampling)",
    "ofti": "orbits fitted to the log (rejection sampling)",
    "mcmc": "orbits fitted to the log (Markov chain Monte Carlo)",
    "published": "published orbit, drawn within its stated uncertainties",
}


def describe(posterior) -> str:
    """Where a posterior's orbits come from, in words for a caption or a table."""
    return _SOURCES.get(posterior.method, posterior.method)


@dataclass(frozen=True)
class Prediction:
    """Predicted relative positions at epochs ``t`` (Julian years).

    ``rho`` and ``theta`` have shape (5, N): the quantiles :data:`QUANTILES`
    of the samples at each epoch (arcsec; degrees, in [0, 360) for the
    median, the others on the median's branch so that lower ≤ median ≤
    upper). ``spread`` is the root-mean-square distance of the sampled
    positions from their mean on the sky (arcsec), the one-number size of
    the prediction's uncertainty.
    """

    t: NDArray[np.float64]
    rho: NDArray[np.float64]
    theta: NDArray[np.float64]
    spread: NDArray[np.float64]
    samples: int


def predict(posterior, epochs: ArrayLike) -> Prediction:
    """Quantiles of ρ and θ of the posterior's orbits at ``epochs`` (Julian years).

    Parameters
    ----------
    posterior : OrbitPosterior
        Samples of the Campbell elements (:mod:`dossier.astro.orbit_posterior`).
    epochs : array_like, shape (N,)
        Julian years.
    """
    t = np.atleast_1d(np.asarray(epochs, dtype=float))
    x, y = posterior.xy(t)  # (K, N)
    rho = np.hypot(x, y)
    theta = np.degrees(np.arctan2(y, x))
    # circular mean direction of the samples at each epoch; deviations on (−180°, 180°]
    centre = np.degrees(np.arctan2(np.mean(np.sin(np.radians(theta)), axis=0),
                                   np.mean(np.cos(np.radians(theta)), axis=0)))
    dev = (theta - centre + 180.0) % 360.0 - 180.0
    q = np.asarray(QUANTILES)
    theta_q = centre + np.quantile(dev, q, axis=0)
    shift = np.floor(theta_q[2] / 360.0) * 360.0  # median into [0, 360), the others with it
    spread = np.sqrt(np.var(x, axis=0) + np.var(y, axis=0))
    return Prediction(t, np.quantile(rho, q, axis=0), theta_q - shift, spread, int(x.shape[0]))


@dataclass(frozen=True)
class Outlook:
    """What the posterior says about the coming years; epochs in Julian years, separations in arcsec.

    ``period_gain`` is, per epoch of ``prediction``, the fraction of the
    posterior variance of ln P one typical measure then would remove;
    ``most_informative`` the epoch where it peaks; ``spread_over_measure``
    the spread of the predicted positions at the start over a typical
    measure's size.
    """

    prediction: Prediction
    best_resolved: float
    best_resolved_rho: float
    most_informative: float
    spread_over_measure: float
    period_gain: NDArray[np.float64]


def period_gain(posterior, epochs: ArrayLike, sigma_measure: ArrayLike) -> NDArray[np.float64]:
    """Fraction of Var(ln P) one measure of error ``sigma_measure`` (arcsec, per axis) at each epoch would remove.

    Linear-Gaussian approximation over the samples (see the module docstring): c^T (S + σ² I)^−1 c / Var(ln P).
    Zero where the samples do not vary in P.
    """
    t = np.atleast_1d(np.asarray(epochs, dtype=float))
    x, y = posterior.xy(t)  # (K, N)
    lnp = np.log(np.asarray(posterior.P, dtype=float))
    var_p = float(np.var(lnp))
    if not var_p > 0:
        return np.zeros(t.size)
    d = lnp - lnp.mean()
    dx, dy = x - x.mean(axis=0), y - y.mean(axis=0)
    cx, cy = d @ dx / d.size, d @ dy / d.size
    s2 = np.broadcast_to(np.asarray(sigma_measure, dtype=float) ** 2, t.shape)
    sxx, syy, sxy = np.mean(dx * dx, axis=0) + s2, np.mean(dy * dy, axis=0) + s2, np.mean(dx * dy, axis=0)
    det = sxx * syy - sxy**2
    quad = (cx * cx * syy - 2.0 * cx * cy * sxy + cy * cy * sxx) / det
    return quad / var_p


def outlook(posterior, start_yr: float, years: float = 20.0, step_yr: float = 0.25, *,
            rho_step_fraction: float = 0.01, theta_step_deg: float = 0.5) -> Outlook:
    """Predictions from ``start_yr`` for ``years`` at ``step_yr``, with the best-resolved and most informative epochs.

    A typical good measure has uncertainty ``rho_step_fraction`` of ρ in
    separation and ``theta_step_deg`` in position angle (common practice for
    micrometer and speckle measures; the defaults are those of ``dossier
    plan``); its size on the sky is taken as the larger of the two at the
    median predicted separation.
    """
    if not (years > 0 and step_yr > 0):
        raise ValueError("years and step_yr must be > 0. Fix: give a positive span and step in years.")
    t = start_yr + np.arange(0.0, years + 0.5 * step_yr, step_yr)
    p = predict(posterior, t)
    rho = p.rho[2]
    measure = np.maximum(rho_step_fraction * rho, rho * math.radians(theta_step_deg))
    ratio = p.spread / np.maximum(measure, 1e-9)
    gain = period_gain(posterior, t, measure)
    k_res, k_inf = int(np.argmax(rho)), int(np.argmax(gain))
    return Outlook(p, float(t[k_res]), float(rho[k_res]), float(t[k_inf]), float(ratio[0]), gain)


def o_minus_c(posterior, t: ArrayLike, rho: ArrayLike, theta: ArrayLike, sigma_rho: ArrayLike,
              sigma_theta: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """O−C of measures against the posterior's median prediction.

    Returns
    -------
    d_theta, d_rho, z : ndarray
        Position-angle residual (degrees, wrapped to (−180°, 180°]),
        separation residual (arcsec), and the 2-D residual in units of the
        combined uncertainty: z² = Δθ² / (σ_θ² + s_θ²) + Δρ² / (σ_ρ² + s_ρ²),
        with s the half-width of the prediction's central 68 % interval.
    """
    p = predict(posterior, t)
    d_theta = (np.asarray(theta, dtype=float) - p.theta[2] + 180.0) % 360.0 - 180.0
    d_rho = np.asarray(rho, dtype=float) - p.rho[2]
    s_theta = 0.5 * (p.theta[3] - p.theta[1])
    s_rho = 0.5 * (p.rho[3] - p.rho[1])
    z = np.sqrt(d_theta**2 / (np.asarray(sigma_theta, dtype=float) ** 2 + s_theta**2)
                + d_rho**2 / (np.asarray(sigma_rho, dtype=float) ** 2 + s_rho**2))
    return d_theta, d_rho, z


@dataclass(frozen=True)
class EphemerisRow:
    """One line of an ephemeris table, formatted at the precision its interval sets."""

    epoch: float
    theta: str
    rho: str


def table(posterior, start_yr: float, years: float = 30.0, step_yr: float = 5.0) -> tuple[list[EphemerisRow], Outlook]:
    """Rows every ``step_yr`` from ``start_yr`` (median and 68 % interval of θ and ρ), and the outlook over the span."""
    from dossier.fmt import fmt_interval

    look = outlook(posterior, start_yr, years)
    epochs = start_yr + np.arange(0.0, years + 0.5 * step_yr, step_yr)
    p = predict(posterior, epochs)
    rows = [EphemerisRow(float(t), fmt_interval(float(p.theta[2, k]), float(p.theta[1, k]), float(p.theta[3, k])),
                         fmt_interval(float(p.rho[2, k]), float(p.rho[1, k]), float(p.rho[3, k])))
            for k, t in enumerate(epochs)]
    return rows, look
