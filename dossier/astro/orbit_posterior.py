"""Posterior distributions of visual-orbit elements: honest uncertainties for short and long arcs.

Three samplers give one result type, :class:`OrbitPosterior` (equal-length
arrays of P, T, e, a, i, Omega, omega and the total mass):

* ``sample_importance`` (what ``posterior`` uses): adaptive importance sampling
  over (ln P, e, periastron phase) only. Given those three the positions are
  linear in the Thiele-Innes constants A, B, F, G, whose conditional likelihood
  is Gaussian: they are drawn from it, and each draw gets the exact weight
  prior x likelihood / proposal, with the geometric prior (and the mass prior)
  carried into (A, B, F, G) by its Jacobian. Calibrated on simulated arcs of
  every length (``benchmarks/visual_orbit_recovery.py``).

* ``sample_ofti``: the rejection sampler "Orbits For The Impatient" (OFTI) of
  Blunt, S. et al. 2017, AJ 153, 229, for arcs that cover a small part of the
  orbit. Draws of (e, cos i, omega, periastron phase) from the prior are
  scaled in a and rotated in Omega so that each passes through a position
  drawn from the error ellipse of one reference measure; the period follows
  from a, the parallax and a mass prior (Kepler's third law); a draw is kept
  with probability exp(-(chi2 - chi2_min) / 2). Same prior as the importance
  sampler; no longer used by ``posterior`` (it accepts too few draws once the
  errors are small against the motion; kept as an independent check).
* ``sample_mcmc``: an affine-invariant ensemble sampler (emcee; Foreman-Mackey
  et al. 2013, PASP 125, 306) started around the least-squares orbit of
  ``dossier.astro.orbit.fit_orbit`` or across given draws, run until the chain
  is 50 autocorrelation times long (or a warning); ``posterior``'s fallback.

``posterior`` picks one and records which in ``method``; ``adequacy`` says
in plain words whether the data determine the orbit, from the posterior
distribution of the fraction of the period the data span.

Conventions as in :mod:`dossier.astro.orbit`: x north, y east (arcsec),
epochs in Julian years, angles in degrees, parallax in mas, masses in solar
masses. Every sampler is seeded from a SHA-256 hash of its inputs
(``seed_from``), so the same data give the same draws, byte for byte.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from typing import Any, Mapping, NamedTuple, Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from dossier.astro import orbit as orbits
from dossier.astro.binary import solve_kepler
from dossier.astro.seeding import seed_from

__all__ = [
    "Adequacy",
    "MassPrior",
    "OrbitPosterior",
    "adequacy",
    "posterior",
    "sample_importance",
    "sample_mcmc",
    "sample_ofti",
]

ELEMENTS = ("P", "T", "e", "a", "i", "node", "omega")
_TWO_PI = 2.0 * np.pi
# Eccentricities are sampled in [0, _E_MAX): keeps sqrt(1 - e^2) and Kepler's equation well conditioned.
_E_MAX = 0.99
# Draws of highest weight that OFTI keeps (``return_best``), e.g. to start the ensemble sampler.
_N_BEST = 64
# From this fraction of the least-squares period on, the data determine the orbit well enough that
# ``posterior`` leaves the mass prior out (the mass is then the dynamical one). The name is historical:
# such arcs went to the ensemble sampler before the importance sampler.
MCMC_COVERAGE = 0.5
# Least effective sample size of the importance sampler, as a fraction of the draws wanted, below which
# ``posterior`` hands over to the ensemble sampler.
_MIN_ESS = 0.2


class MassPrior(NamedTuple):
    """Prior of the total mass (solar masses): ``normal`` (truncated at 0) or ``lognormal`` (sigma in ln M)."""

    median: float
    sigma: float
    kind: str = "normal"

    def draw(self, rng: np.random.Generator, n: int) -> NDArray[np.float64]:
        if self.kind == "lognormal":
            return self.median * np.exp(self.sigma * rng.standard_normal(n))
        m = self.median + self.sigma * rng.standard_normal(n)
        bad = m <= 0
        while bad.any():  # truncation at zero by redrawing (exact for a truncated normal)
            m[bad] = self.median + self.sigma * rng.standard_normal(int(bad.sum()))
            bad = m <= 0
        return m


#: A broad prior for pairs whose component masses are unknown: median 1.5 M_sun, a factor e^0.7 = 2 either
#: way at 1 sigma (our choice; it covers late-K dwarf pairs to early-A pairs at 2 sigma).
BROAD_MASS_PRIOR = MassPrior(1.5, 0.7, "lognormal")


def _generator(seed: Any) -> np.random.Generator:
    if isinstance(seed, np.random.Generator):
        return seed
    return np.random.default_rng(seed)


def _xy(t: NDArray[np.float64], P, T, e, a, i, node, omega) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """North and east offsets (Thiele-Innes; Heintz 1978, ch. 4) with the fast Kepler solver."""
    E = solve_kepler(_TWO_PI * (t - T) / P, e)
    X, Y = np.cos(E) - e, np.sqrt(1.0 - e**2) * np.sin(E)
    A, B, F, G = orbits.thiele_innes(a, i, node, omega)
    return A * X + F * Y, B * X + G * Y


def _fold(node: NDArray[np.float64], omega: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """(Omega, omega) with Omega in [0, 180): (Omega + 180, omega + 180) is the same visual orbit (Heintz 1978)."""
    node = np.mod(node, 360.0)
    flip = node >= 180.0
    return np.where(flip, node - 180.0, node), np.mod(np.where(flip, omega + 180.0, omega), 360.0)


def _wrap(d: NDArray[np.float64]) -> NDArray[np.float64]:
    """Angle differences wrapped to [-180, 180)."""
    return np.mod(np.asarray(d, dtype=float) + 180.0, 360.0) - 180.0


@dataclass(frozen=True)
class OrbitPosterior:
    """Draws from the posterior of a visual orbit; all arrays of one length.

    ``P`` (yr), ``T`` (Julian yr), ``e``, ``a`` (arcsec), ``i``, ``node`` (Omega in [0, 180)), ``omega``
    (deg), ``mass`` (total dynamical mass, M_sun; NaN without a parallax), ``chi2`` (of each draw
    against the data it was drawn from; NaN for a published orbit), ``method`` ("importance", "ofti",
    "mcmc" or "published"), ``n_data`` (number of x and y values fitted, 2 per night) and ``draws``
    (proposals weighed by the importance sampler, prior draws tried by OFTI, steps times walkers for MCMC).
    """

    P: NDArray[np.float64]
    T: NDArray[np.float64]
    e: NDArray[np.float64]
    a: NDArray[np.float64]
    i: NDArray[np.float64]
    node: NDArray[np.float64]
    omega: NDArray[np.float64]
    mass: NDArray[np.float64]
    chi2: NDArray[np.float64]
    method: str
    n_data: int = 0
    draws: int = 0

    def __len__(self) -> int:
        return int(np.size(self.P))

    def quantiles(self, name: str, q: Sequence[float] = (0.16, 0.5, 0.84)) -> NDArray[np.float64]:
        """Quantiles of one element (``P``, ``T``, ``e``, ``a``, ``i``, ``node``, ``omega``, ``mass``, ``chi2``).

        Angles are taken as they are stored (Omega in [0, 180), omega in [0, 360)); a posterior that
        straddles 0/360 in omega has a wide interval, which is honest for a visual orbit alone.
        """
        values = np.asarray(getattr(self, name), dtype=float)
        if values.size == 0 or not np.isfinite(values).any():
            return np.full(len(q), np.nan)
        return np.quantile(values[np.isfinite(values)], q)

    def coverage(self, span_yr: float) -> NDArray[np.float64]:
        """Posterior draws of the fraction of the period spanned by the data, span / P."""
        return float(span_yr) / np.asarray(self.P, dtype=float)

    def xy(self, epochs_yr: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """North and east offsets of every draw at the epochs, arcsec, shape (len(self), N)."""
        t = np.atleast_1d(np.asarray(epochs_yr, dtype=float))[None, :]
        col = {k: np.asarray(getattr(self, k), dtype=float)[:, None] for k in ELEMENTS}
        return _xy(t, col["P"], col["T"], col["e"], col["a"], col["i"], col["node"], col["omega"])

    # -- storage ---------------------------------------------------------------

    def to_json(self) -> dict:
        out: dict[str, Any] = {f.name: getattr(self, f.name) for f in fields(self)}
        for k in (*ELEMENTS, "mass", "chi2"):
            out[k] = [float(v) for v in np.asarray(out[k], dtype=float)]
        return out

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> OrbitPosterior:
        arrays = {k: np.asarray(data[k], dtype=float) for k in (*ELEMENTS, "mass", "chi2")}
        return cls(**arrays, method=str(data["method"]), n_data=int(data.get("n_data", 0)),
                   draws=int(data.get("draws", 0)))

    # -- a published orbit -------------------------------------------------------

    @classmethod
    def from_published(
        cls,
        elements: Mapping[str, float] | Sequence[float],
        sigmas: Mapping[str, float | None] | Sequence[float | None] | None,
        n: int = 1000,
        seed: Any = 0,
        *,
        parallax_mas: float | None = None,
        sigma_parallax_mas: float = 0.0,
    ) -> OrbitPosterior:
        """Gaussian draws about a published orbit, so that it gets ephemeris bands too.

        Parameters
        ----------
        elements : mapping or sequence
            P (yr), T (yr), e, a (arcsec), i, Omega, omega (deg), by name or in that order.
        sigmas : mapping or sequence or None
            Their 1-sigma uncertainties; an element without one (None, 0 or NaN) is held fixed.
        n : int
            Number of draws.
        seed : int, SeedSequence or Generator
        parallax_mas, sigma_parallax_mas : float, optional
            For the dynamical mass of every draw (NaN without a parallax).

        Notes
        -----
        Independent Gaussians (published correlations are rarely given): e is truncated to [0, 1) and
        P, a to > 0 by redrawing the values outside. This ignores the correlations between the
        elements (P with T and a, usually), so the bands are wider than the published fit's own.
        """
        rng = _generator(seed)
        el = dict(elements) if isinstance(elements, Mapping) else dict(zip(ELEMENTS, elements))
        if sigmas is None:
            sg: dict[str, float | None] = {}
        else:
            sg = dict(sigmas) if isinstance(sigmas, Mapping) else dict(zip(ELEMENTS, sigmas))
        out: dict[str, NDArray[np.float64]] = {}
        bounds = {"P": (0.0, np.inf), "a": (0.0, np.inf), "e": (-1e-300, 1.0)}
        for k in ELEMENTS:
            v, s = float(el[k]), sg.get(k)
            if s is None or not np.isfinite(s) or s <= 0:
                out[k] = np.full(n, v)
                continue
            draw = v + float(s) * rng.standard_normal(n)
            lo, hi = bounds.get(k, (-np.inf, np.inf))
            for _ in range(1000):
                bad = (draw <= lo) | (draw >= hi) if k != "e" else (draw < 0) | (draw >= 1)
                if not bad.any():
                    break
                draw[bad] = v + float(s) * rng.standard_normal(int(bad.sum()))
            out[k] = draw
        out["node"], out["omega"] = _fold(out["node"], out["omega"])
        mass = np.full(n, np.nan)
        if parallax_mas is not None and parallax_mas > 0:
            plx = parallax_mas + (sigma_parallax_mas or 0.0) * rng.standard_normal(n)
            plx = np.where(plx > 0, plx, np.nan)
            mass = orbits.dynamical_mass(out["a"], plx, out["P"])
        return cls(**out, mass=mass, chi2=np.full(n, np.nan), method="published", n_data=0, draws=n)


def _check(t, x, y, sx, sy):
    arrays = [np.asarray(v, dtype=float) for v in (t, x, y)]
    t_, x_, y_ = arrays
    if t_.ndim != 1 or x_.shape != t_.shape or y_.shape != t_.shape:
        raise ValueError("t, x and y must be 1-D of one length. Fix: pass one nightly mean per element.")
    sx_ = np.broadcast_to(np.asarray(sx, dtype=float), t_.shape).copy()
    sy_ = np.broadcast_to(np.asarray(sy, dtype=float), t_.shape).copy()
    if not (np.all(sx_ > 0) and np.all(sy_ > 0)):
        raise ValueError("uncertainties sx, sy must be > 0. Fix: give the 1-sigma errors in arcsec.")
    if t_.size < 2 or float(t_.max() - t_.min()) <= 0:
        raise ValueError("need measures at two or more epochs. Fix: give a longer observing log.")
    return t_, x_, y_, sx_, sy_


def _chi2(x_m, y_m, x, y, sx, sy) -> NDArray[np.float64]:
    return np.sum(((x_m - x) / sx) ** 2 + ((y_m - y) / sy) ** 2, axis=-1)


def sample_ofti(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    *,
    parallax_mas: float | None = None,
    sigma_parallax_mas: float = 0.0,
    mass_prior: MassPrior | tuple = BROAD_MASS_PRIOR,
    n_samples: int = 1000,
    seed: Any = None,
    max_draws: int = 2_000_000,
    batch: int = 20_000,
    period_range: tuple[float, float] | None = None,
    give_up: bool = True,
    return_best: bool = False,
) -> OrbitPosterior:
    """Orbits For The Impatient: rejection sampling of visual orbits (Blunt et al. 2017, AJ 153, 229, sect. 2).

    Parameters
    ----------
    t, x, y, sx, sy : array_like
        Epochs (Julian yr) and north/east offsets with 1-sigma errors (arcsec), e.g. nightly means.
    parallax_mas, sigma_parallax_mas : float, optional
        Parallax of the pair (mas). With it, P follows from a, the parallax and the mass prior
        (P^2 = a_au^3 / M); without it, P is drawn log-uniform over ``period_range`` and the mass is NaN.
    mass_prior : MassPrior or (median, sigma)
        Prior of the total mass, M_sun.
    n_samples : int
        Accepted orbits wanted.
    seed : int, SeedSequence or Generator, optional
        Default: ``seed_from`` the inputs.
    max_draws : int
        Give up after this many prior draws and return what was accepted (check ``len``).
    batch : int
        Draws per vectorised batch.
    give_up : bool
        Stop after ten batches when the acceptance so far projects fewer than half of ``n_samples``
        within ``max_draws`` (an arc too informative for rejection sampling; ``sample_importance``
        handles such arcs).
    return_best : bool
        Also return the draws of highest weight (a dict of arrays: the elements, ``plx``, ``mass``,
        ``lw``), e.g. to start the ensemble sampler across the posterior (``sample_mcmc(starts=...)``).
    period_range : (float, float), optional
        Bounds of the log-uniform period prior when there is no parallax; default (span / 4, 1000 span).

    Notes
    -----
    Priors: e uniform in [0, 0.99), cos i uniform in [-1, 1], omega and Omega uniform, the periastron
    phase at the reference epoch uniform, a log-uniform (1/a), parallax Gaussian, mass from
    ``mass_prior``. The reference epoch is the nightly mean with the smallest error ellipse. Each draw
    of (e, i, omega, phase) with a = 1, Omega = 0 is scaled and rotated so that it passes through a
    position drawn from the reference measure's error ellipse (the "scale-and-rotate" step). For
    the 1/a prior the density of that proposal is the reference likelihood times a rho_0^2 da dOmega
    (polar coordinates), so the exact weight of a draw is L(other epochs) / rho_ref^2 with rho_ref the
    drawn separation; it is kept when u < that weight over its maximum (the paper's
    exp(-(chi2 - chi2_min) / 2) with the reference epoch left out of chi2, as its likelihood is
    already in the proposal, and the 1/rho_ref^2 factor, within a few per cent of constant). The
    maximum is the running one over all draws; kept draws are re-tested when it rises, so the result
    is the same as with the final maximum from the start.
    """
    t_, x_, y_, sx_, sy_ = _check(t, x, y, sx, sy)
    mp = mass_prior if isinstance(mass_prior, MassPrior) else MassPrior(*mass_prior)
    span = float(t_.max() - t_.min())
    if seed is None:
        seed = seed_from("ofti", t_, x_, y_, sx_, sy_, parallax_mas, sigma_parallax_mas, tuple(mp), n_samples)
    rng = _generator(seed)
    # reference: the nightly mean nearest the middle of the arc among those with an error ellipse at most
    # twice the smallest (the middle halves the lever arm over which a wrong velocity shows)
    area = sx_ * sy_
    good = np.flatnonzero(area <= 2.0 * area.min())
    ref = int(good[np.argmin(np.abs(t_[good] - 0.5 * (t_.max() + t_.min())))])
    others = np.arange(t_.size) != ref
    t_o, x_o, y_o, sx_o, sy_o = (v[others] for v in (t_, x_, y_, sx_, sy_))
    # the epoch farthest from the reference first: a cheap lower bound of chi2 for early rejection
    far = int(np.argmax(np.abs(t_o - t_[ref]))) if t_o.size else 0
    lo_P, hi_P = period_range or (max(span / 4.0, 1e-3), 1000.0 * max(span, 1e-3))
    with_plx = parallax_mas is not None and parallax_mas > 0
    kept: list[dict[str, NDArray[np.float64]]] = []
    best_pool: dict[str, NDArray[np.float64]] = {}
    best = -np.inf  # running maximum of the log weight
    draws = 0
    n_kept = 0
    while n_kept < n_samples and draws < max_draws:
        n = min(batch, max_draws - draws)
        draws += n
        e = _E_MAX * rng.random(n)
        cos_i = rng.uniform(-1.0, 1.0, n)
        i = np.degrees(np.arccos(cos_i))
        omega = 360.0 * rng.random(n)
        tau = rng.random(n)  # mean anomaly at the reference epoch, in turns
        # unit orbit (a = 1, Omega = 0) at the reference epoch: P drops out of the phase
        E = solve_kepler(_TWO_PI * tau, e)
        X, Y = np.cos(E) - e, np.sqrt(1.0 - e**2) * np.sin(E)
        A, B, F, G = orbits.thiele_innes(1.0, i, 0.0, omega)
        x0, y0 = A * X + F * Y, B * X + G * Y
        # a position drawn from the reference measure's error ellipse
        xr = x_[ref] + sx_[ref] * rng.standard_normal(n)
        yr = y_[ref] + sy_[ref] * rng.standard_normal(n)
        rho_r = np.hypot(xr, yr)
        a = rho_r / np.hypot(x0, y0)
        node = np.degrees(np.arctan2(yr, xr) - np.arctan2(y0, x0))
        if with_plx:
            plx = parallax_mas + sigma_parallax_mas * rng.standard_normal(n)
            plx = np.where(plx > 0, plx, np.nan)
            mass = mp.draw(rng, n)
            P = np.sqrt((1000.0 * a / plx) ** 3 / mass)
        else:
            P = np.exp(rng.uniform(math.log(lo_P), math.log(hi_P), n))
            mass = np.full(n, np.nan)
            plx = np.full(n, np.nan)
        T = t_[ref] - tau * P
        lw_fixed = -2.0 * np.log(rho_r)
        logu = np.log(rng.random(n))
        ok = np.isfinite(P) & np.isfinite(a)
        if t_o.size:
            # stage 1: one epoch gives chi2_part <= chi2_rest; reject what fails even then
            xm, ym = _xy(t_o[far], P, T, e, a, i, node, omega)
            part = ((xm - x_o[far]) / sx_o[far]) ** 2 + ((ym - y_o[far]) / sy_o[far]) ** 2
            ok &= logu < (-0.5 * part + lw_fixed) - best if np.isfinite(best) else ok
        idx = np.flatnonzero(ok)
        if idx.size == 0:
            continue
        sel = {k: v[idx] for k, v in dict(P=P, T=T, e=e, a=a, i=i, node=node, omega=omega, mass=mass,
                                           plx=plx, logu=logu, lw_fixed=lw_fixed).items()}
        if t_o.size:
            xm, ym = _xy(t_o[None, :], *(sel[k][:, None] for k in ELEMENTS))
            chi2_rest = _chi2(xm, ym, x_o, y_o, sx_o, sy_o)
        else:
            chi2_rest = np.zeros(idx.size)
        lw = -0.5 * chi2_rest + sel["lw_fixed"]
        top = np.argsort(lw)[-_N_BEST:]
        pool = {k: np.concatenate([best_pool.get(k, np.array([])), sel[k][top]]) for k in (*ELEMENTS, "plx", "mass")}
        pool_lw = np.concatenate([best_pool.get("lw", np.array([])), lw[top]])
        order = np.argsort(pool_lw)[-_N_BEST:]
        best_pool = {k: v[order] for k, v in pool.items()}
        best_pool["lw"] = pool_lw[order]
        if lw.max() > best:
            best = float(lw.max())
            # re-test the draws kept so far against the higher maximum
            kept = [{k: v[m] for k, v in c.items()} for c in kept
                    for m in [c["logu"] < c["lw"] - best]]
        sel["lw"] = lw
        sel["chi2_rest"] = chi2_rest
        keep = sel["logu"] < lw - best
        kept.append({k: v[keep] for k, v in sel.items()})
        n_kept = sum(c["P"].size for c in kept)
        if give_up and draws >= 10 * batch and n_kept * (max_draws / draws) < 0.5 * n_samples:
            break  # on course for fewer than half the draws wanted: not worth the time
    cat = {k: np.concatenate([c[k] for c in kept]) if kept else np.array([]) for k in
           (*ELEMENTS, "mass", "chi2_rest")}
    cat = {k: v[:n_samples] for k, v in cat.items()}
    node_f, omega_f = _fold(cat["node"], cat["omega"])
    # chi2 against every epoch, the reference included
    if cat["P"].size:
        xr_m, yr_m = _xy(t_[ref], cat["P"], cat["T"], cat["e"], cat["a"], cat["i"], node_f, omega_f)
        chi2 = cat["chi2_rest"] + ((xr_m - x_[ref]) / sx_[ref]) ** 2 + ((yr_m - y_[ref]) / sy_[ref]) ** 2
    else:
        chi2 = np.array([])
    post = OrbitPosterior(P=cat["P"], T=cat["T"], e=cat["e"], a=cat["a"], i=cat["i"], node=node_f, omega=omega_f,
                          mass=cat["mass"], chi2=chi2, method="ofti", n_data=2 * t_.size, draws=draws)
    return (post, best_pool) if return_best else post


def sample_mcmc(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    *,
    start: orbits.OrbitFit | None = None,
    starts: Mapping[str, NDArray[np.float64]] | None = None,
    parallax_mas: float | None = None,
    sigma_parallax_mas: float = 0.0,
    mass_prior: MassPrior | tuple | None = None,
    n_samples: int = 1000,
    seed: Any = None,
    n_walkers: int = 32,
    n_burn: int = 500,
    n_steps: int = 800,
) -> OrbitPosterior:
    """Posterior of a visual orbit by emcee's ensemble sampler.

    Parameters are those of ``sample_ofti``, and:

    start : OrbitFit, optional
        Least-squares orbit the walkers start around (``fit_orbit`` is called when neither ``start``
        nor ``starts`` is given).
    starts : dict of arrays, optional
        Orbits to start the walkers from instead (draws spread over the posterior: the importance
        sampler's, or OFTI's best).
    mass_prior : MassPrior or (median, sigma), optional
        With a parallax, the prior of the total mass that ``sample_ofti`` uses; None: no mass prior.

    Notes
    -----
    Parameters: ln P, the periastron phase at the middle epoch (turns), sqrt(e) cos omega,
    sqrt(e) sin omega, cos i, Omega (rad), ln a, and with a parallax the parallax itself (Gaussian
    prior). Flat priors in the first seven give the priors of ``sample_ofti`` (e and omega uniform,
    cos i uniform, a log-uniform) with P log-uniform in [span / 10, 1000 span]. With ``mass_prior``
    the prior of ln P becomes that of the mass M = a^3 / (parallax^3 P^2) it implies,
    p_M(M) |dM / d ln P| = 2 M p_M(M), the same joint prior as OFTI's; without it (long arcs, where
    the data fix P and a) the mass is the dynamical one and stays independent of the component
    masses it is compared with. Affine-invariant stretch move (Goodman & Weare 2010, Comm. App.
    Math. Comp. Sci. 5, 65; Foreman-Mackey et al. 2013, PASP 125, 306), seeded from the inputs. After
    burn-in the chain is doubled (up to three times) until it is 50 integrated autocorrelation times
    long (emcee's ``get_autocorr_time``; the length emcee's documentation recommends); if it is still
    shorter, a RuntimeWarning says the chain has not converged. Walkers started from ``starts`` (draws
    across the posterior) are not gathered around the best one after the first half of the burn-in.
    """
    import emcee

    t_, x_, y_, sx_, sy_ = _check(t, x, y, sx, sy)
    mp = None if mass_prior is None else (mass_prior if isinstance(mass_prior, MassPrior) else MassPrior(*mass_prior))
    with_plx = parallax_mas is not None and parallax_mas > 0
    if seed is None:
        seed = seed_from("mcmc", t_, x_, y_, sx_, sy_, parallax_mas, sigma_parallax_mas,
                         None if mp is None else tuple(mp), n_samples)
    rng = _generator(seed)
    span = float(t_.max() - t_.min())
    tm = 0.5 * float(t_.max() + t_.min())
    lnP_lo, lnP_hi = math.log(span / 10.0), math.log(1000.0 * span)
    ndim = 8 if with_plx else 7
    splx = max(float(sigma_parallax_mas or 0.0), 1e-6 * float(parallax_mas or 1.0))

    def unpack(p):
        lnP, phi, h, k, ci, node_r, lna = p.T[:7]
        P = np.exp(lnP)
        return dict(P=P, T=tm - np.mod(phi, 1.0) * P, e=h * h + k * k, a=np.exp(lna),
                    i=np.degrees(np.arccos(np.clip(ci, -1, 1))), node=np.degrees(node_r),
                    omega=np.degrees(np.arctan2(k, h)))

    def log_mass_prior(M):
        if mp.kind == "lognormal":
            return -0.5 * (np.log(M / mp.median) / mp.sigma) ** 2  # density in ln M: the 2 M p_M(M) of the notes
        return np.where(M > 0, -0.5 * ((M - mp.median) / mp.sigma) ** 2 + np.log(np.maximum(M, 1e-300)), -np.inf)

    def log_prob(p):
        p = np.atleast_2d(p)
        el = unpack(p)
        good = (p[:, 0] > lnP_lo) & (p[:, 0] < lnP_hi) & (el["e"] < _E_MAX) & (np.abs(p[:, 4]) < 1.0)
        if with_plx:
            good &= p[:, 7] > 0
        out = np.full(p.shape[0], -np.inf)
        if good.any():
            xm, ym = _xy(t_[None, :], *(el[k][good][:, None] for k in ELEMENTS))
            lp = -0.5 * _chi2(xm, ym, x_, y_, sx_, sy_)
            if with_plx:
                plx = p[good, 7]
                lp = lp - 0.5 * ((plx - parallax_mas) / splx) ** 2
                if mp is not None:
                    lp = lp + log_mass_prior((1000.0 * el["a"][good] / plx) ** 3 / el["P"][good] ** 2)
            out[good] = lp
        return out

    def to_params(P, T, e, a, i, node, omega, plx):
        e = np.clip(e, 1e-6, 0.95)
        w = np.radians(omega)
        cols = [np.log(P), np.mod((tm - T) / P, 1.0), np.sqrt(e) * np.cos(w), np.sqrt(e) * np.sin(w),
                np.clip(np.cos(np.radians(i)), -0.999, 0.999), np.radians(node), np.log(a)]
        if with_plx:
            cols.append(plx)
        return np.column_stack(cols)

    if starts is not None and np.size(starts["P"]) >= 2:
        k = np.arange(n_walkers) % np.size(starts["P"])
        plx0 = starts["plx"][k] if with_plx else None
        if with_plx:
            plx0 = np.where(np.isfinite(plx0), plx0, parallax_mas)
        ball = to_params(*(np.asarray(starts[n])[k] for n in ELEMENTS), plx0)
        # walkers that share a start are moved apart a little
        ball = ball + 1e-4 * rng.standard_normal(ball.shape) * np.maximum(np.abs(ball), 1e-2)
    else:
        fit = start if start is not None else orbits.fit_orbit(t_, x_, y_, sx_, sy_)

        def finite(v, default):
            return v if np.isfinite(v) and v > 0 else default

        p0 = to_params(*(np.array([getattr(fit, n)]) for n in ELEMENTS),
                       np.array([parallax_mas]) if with_plx else None)[0]
        # a small ball: a tenth of the least-squares sigmas, with floors where they are undetermined
        scale = 0.1 * np.array([
            min(finite(fit.sigma_P / fit.P, 0.01), 0.1), min(finite(fit.sigma_T / fit.P, 0.01), 0.1),
            min(finite(fit.sigma_e, 0.01), 0.05), min(finite(fit.sigma_e, 0.01), 0.05),
            min(finite(math.radians(fit.sigma_i), 0.01), 0.1), min(finite(math.radians(fit.sigma_node), 0.01), 0.1),
            min(finite(fit.sigma_a / fit.a, 0.01), 0.1)] + ([splx] if with_plx else []))
        ball = p0 + scale * rng.standard_normal((n_walkers, ndim))
    ball[:, 4] = np.clip(ball[:, 4], -0.999, 0.999)
    sampler = emcee.EnsembleSampler(n_walkers, ndim, log_prob, vectorize=True)
    sampler.random_state = np.random.RandomState(int(rng.integers(2**32))).get_state()
    if starts is None:
        # from one least-squares orbit: burn-in in two halves; after the first, walkers left in poor modes
        # are restarted in a small ball around the best walker (a common practice; from memory)
        state = sampler.run_mcmc(ball, n_burn // 2, progress=False)
        best_k = int(np.argmax(state.log_prob))
        spread = np.std(state.coords, axis=0)
        ball = state.coords[best_k] + 0.05 * spread * rng.standard_normal((n_walkers, ndim))
        ball[:, 4] = np.clip(ball[:, 4], -0.999, 0.999)
        sampler.reset()
        burn = n_burn - n_burn // 2
    else:
        # started across the posterior (the importance sampler's draws): no collapse onto one walker,
        # which would drop the other modes
        burn = n_burn
    state = sampler.run_mcmc(ball, burn + n_steps, progress=False)
    # convergence: the chain after burn-in should be at least 50 integrated autocorrelation times long
    # (Foreman-Mackey et al. 2013; emcee's documentation); extend it up to four times, else warn
    def autocorr_time() -> float:  # the longest over the parameters; inf when undefined (a walker stuck)
        with np.errstate(divide="ignore", invalid="ignore"):
            tau = sampler.get_autocorr_time(discard=burn, tol=0)
        return float(np.max(tau)) if np.all(np.isfinite(tau)) else math.inf

    total = n_steps
    for _ in range(3):
        tau = autocorr_time()
        if total >= 50 * tau:
            break
        state = sampler.run_mcmc(state, total, progress=False)
        total *= 2
    else:
        tau = autocorr_time()
    if total < 50 * tau:
        import warnings

        warnings.warn(f"ensemble sampler not converged: {total} steps after burn-in, autocorrelation time {tau:.0f} "
                      f"steps (want 50 times as many steps)", RuntimeWarning, stacklevel=2)
    chain = sampler.get_chain(discard=burn, flat=True)
    n_steps = total
    pick = np.linspace(0, chain.shape[0] - 1, min(n_samples, chain.shape[0])).astype(int)
    chain = chain[pick]
    el = unpack(chain)
    node_f, omega_f = _fold(el["node"], el["omega"])
    xm, ym = _xy(t_[None, :], *(v[:, None] for v in (el["P"], el["T"], el["e"], el["a"], el["i"], node_f, omega_f)))
    chi2 = _chi2(xm, ym, x_, y_, sx_, sy_)
    mass = np.full(len(pick), np.nan)
    if with_plx:
        mass = orbits.dynamical_mass(el["a"], chain[:, 7], el["P"])
    return OrbitPosterior(P=el["P"], T=el["T"], e=el["e"], a=el["a"], i=el["i"], node=node_f, omega=omega_f,
                          mass=mass, chi2=chi2, method="mcmc", n_data=2 * t_.size,
                          draws=n_walkers * (n_burn + n_steps))


def posterior(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    *,
    parallax_mas: float | None = None,
    sigma_parallax_mas: float = 0.0,
    mass_prior: MassPrior | tuple = BROAD_MASS_PRIOR,
    n_samples: int = 1000,
    max_draws: int = 1_000_000,
    a_range: tuple[float, float] | None = None,
) -> OrbitPosterior:
    """The posterior of a visual orbit: importance sampling (``sample_importance``), for short and long arcs.

    The least-squares orbit (``fit_orbit``) is computed first, to start the proposal. When it converged
    and the data span at least ``MCMC_COVERAGE`` (half) of its period the mass prior is left out (P
    log-uniform; the mass is then the dynamical one, independent of the component masses it is compared
    with); otherwise OFTI's priors, mass prior included. Should the importance sampler reach an effective
    sample size below a fifth of ``n_samples`` within ``max_draws`` draws, the ensemble sampler
    (``sample_mcmc``) takes over, its walkers started at the importance sampler's draws. ``method`` says
    which ("importance" or "mcmc"). Seeded from the inputs. ``a_range`` bounds the log-uniform prior
    of a (arcsec; default unbounded) for the importance sampler, e.g. to match a simulation's prior.
    """
    t_, x_, y_, sx_, sy_ = _check(t, x, y, sx, sy)
    mp = mass_prior if isinstance(mass_prior, MassPrior) else MassPrior(*mass_prior)
    seq = seed_from("posterior", t_, x_, y_, sx_, sy_, parallax_mas, sigma_parallax_mas, tuple(mp), n_samples,
                    max_draws, *(() if a_range is None else (tuple(a_range),)))
    s_is, s_mcmc = seq.spawn(2)
    fit = None
    if t_.size >= 4:
        try:
            fit = orbits.fit_orbit(t_, x_, y_, sx_, sy_)
        except ValueError:
            fit = None
    usable = fit is not None and np.isfinite(fit.chi2) and fit.P > 0 and fit.a > 0
    mp_used = None if usable and fit.coverage >= MCMC_COVERAGE else mp
    common = dict(parallax_mas=parallax_mas, sigma_parallax_mas=sigma_parallax_mas, n_samples=n_samples,
                  mass_prior=mp_used)
    post, ess = _importance(t_, x_, y_, sx_, sy_, start=fit if usable else None, seed=s_is, max_draws=max_draws,
                            a_range=a_range, **common)
    if ess >= _MIN_ESS * n_samples or len(post) < 8:
        return post
    starts = {k: getattr(post, k) for k in ELEMENTS}
    with_plx = parallax_mas is not None and parallax_mas > 0
    starts["plx"] = (1000.0 * post.a / np.cbrt(post.mass * post.P**2) if with_plx
                     else np.full(len(post), np.nan))
    return sample_mcmc(t_, x_, y_, sx_, sy_, starts=starts, seed=s_mcmc, **common)


class Adequacy(NamedTuple):
    """Whether the data determine the orbit (see ``adequacy``)."""

    status: str  # "determined", "partial" or "too-short"
    text: str
    prob_coverage: float  # posterior probability that the data span >= min_coverage of the period
    coverage_q: tuple[float, float, float]  # 16, 50, 84 % points of span / P
    period_q: tuple[float, float, float]  # 16, 50, 84 % points of P, yr
    width: float  # (P84 - P16) / P50

    @property
    def determined(self) -> bool:
        return self.status == "determined"


def adequacy(
    post: OrbitPosterior,
    span_yr: float,
    *,
    min_coverage: float = 0.3,
    max_width: float = 0.2,
    confidence: float = 0.9,
) -> Adequacy:
    """Does the arc determine the orbit? Judged from the posterior's phase coverage.

    Parameters
    ----------
    post : OrbitPosterior
    span_yr : float
        Time spanned by the data, years.
    min_coverage : float
        Fraction of the period the data must span.
    max_width : float
        Largest fractional width (P84 - P16) / P50 of the period for an orbit called determined.
    confidence : float
        Posterior probability of span / P >= min_coverage needed for "determined".

    Returns
    -------
    Adequacy
        "determined" (orbit determined) when P(span / P >= min_coverage) >= confidence and the period
        interval is narrower than ``max_width``; "partial" (the period constrained only within an
        interval) when P(span / P >= min_coverage) >= 0.5 or the period interval is narrower than a
        factor of two either way; otherwise "too-short". A data span of a whole period or more gives
        P(span / P >= min_coverage) near 1, so a full revolution is never "too-short".
    """
    if len(post) < 50:  # too few draws to read a period interval from
        nan3 = (math.nan, math.nan, math.nan)
        return Adequacy("too-short", "arc too short to constrain an orbit", 0.0, nan3, nan3, math.inf)
    cov = post.coverage(span_yr)
    prob = float(np.mean(cov >= min_coverage))
    cq = tuple(float(v) for v in np.quantile(cov, (0.16, 0.5, 0.84)))
    pq = tuple(float(v) for v in post.quantiles("P"))
    width = (pq[2] - pq[0]) / pq[1]
    if prob >= confidence and width <= max_width:
        return Adequacy("determined", "orbit determined", prob, cq, pq, width)
    if prob >= 0.5 or pq[2] / pq[0] <= 4.0:
        text = f"partial arc: period constrained only within {pq[0]:.3g}–{pq[2]:.3g} yr (68 %)"
        return Adequacy("partial", text, prob, cq, pq, width)
    return Adequacy("too-short", "arc too short to constrain an orbit", prob, cq, pq, width)


# -- importance sampling with the Thiele-Innes constants marginalised ----------------------------------------

# Draws per batch of the importance sampler.
_IS_BATCH = 40_000
# Draws of the Thiele-Innes constants per draw of (ln P, e, phase): their prior (mass prior included) is
# averaged over them, which tames the weights when that prior is narrower than the data's Gaussian.
_IS_INNER = 8
# Cells per axis of the grid proposal, the share of the grid's probability spread evenly over its cells,
# and the least width of the grid per axis (ln P, e, phase).
_GRID_BINS = 24
_GRID_FLOOR = 0.05
_GRID_MIN_WIDTH = (0.01, 0.005, 0.002)
# Share of every proposal kept on the broad box over (ln P, e, phase): keeps the weights bounded
# (a "defensive" mixture; Hesterberg 1995, Technometrics 37, 185; from memory).
_IS_DEFENSIVE = 0.1


class _LnKPrior:
    """Prior of ln K, K = M parallax^3 (M_sun mas^3), so that P^2 = (1000 a)^3 / K for a in arcsec.

    The density of ln K is that of ln M convolved with that of 3 ln parallax, tabulated on a grid by
    quadrature over the parallax; ``draw_parallax`` samples the parallax given K from the tabulated
    conditional p(parallax) p_lnM(ln K - 3 ln parallax).
    """

    def __init__(self, mp: MassPrior, plx: float, splx: float) -> None:
        self.mp = mp
        if splx > 0:
            self.nodes = plx + splx * np.linspace(-6.0, 6.0, 241)
            self.nodes = self.nodes[self.nodes > 0]
            self.lw_nodes = -0.5 * ((self.nodes - plx) / splx) ** 2
        else:
            self.nodes, self.lw_nodes = np.array([plx]), np.array([0.0])
        if mp.kind == "lognormal":
            lo, hi = math.log(mp.median) - 9 * mp.sigma, math.log(mp.median) + 9 * mp.sigma
        else:
            lo = math.log(max(mp.median - 9 * mp.sigma, 1e-4 * mp.median))
            hi = math.log(mp.median + 9 * mp.sigma)
        lp = 3.0 * np.log(self.nodes)
        self.grid = np.linspace(lo + lp.min(), hi + lp.max(), 4000)
        dens = np.exp(self.lw_nodes[None, :] + self.log_p_lnM(self.grid[:, None] - lp[None, :])).sum(axis=1)
        dens /= np.trapezoid(dens, self.grid) if hasattr(np, "trapezoid") else np.trapz(dens, self.grid)
        with np.errstate(divide="ignore"):
            self.log_dens = np.log(dens)

    def log_p_lnM(self, lnM: NDArray[np.float64]) -> NDArray[np.float64]:
        """Log density of ln M (unnormalised)."""
        if self.mp.kind == "lognormal":
            return -0.5 * ((lnM - math.log(self.mp.median)) / self.mp.sigma) ** 2
        M = np.exp(lnM)
        return -0.5 * ((M - self.mp.median) / self.mp.sigma) ** 2 + lnM

    def __call__(self, lnK: NDArray[np.float64]) -> NDArray[np.float64]:
        out = np.interp(lnK, self.grid, self.log_dens, left=-np.inf, right=-np.inf)
        return np.where(np.isfinite(out), out, -np.inf)

    def draw_parallax(self, rng: np.random.Generator, lnK: NDArray[np.float64]) -> NDArray[np.float64]:
        if self.nodes.size == 1:
            return np.full(lnK.size, self.nodes[0])
        lp = self.lw_nodes[None, :] + self.log_p_lnM(lnK[:, None] - 3.0 * np.log(self.nodes)[None, :])
        p = np.exp(lp - lp.max(axis=1, keepdims=True))
        cdf = np.cumsum(p, axis=1)
        cdf /= cdf[:, -1:]
        u = rng.random(lnK.size)
        k = np.minimum((cdf < u[:, None]).sum(axis=1), self.nodes.size - 1)
        step = self.nodes[1] - self.nodes[0]
        return self.nodes[k] + step * (rng.random(lnK.size) - 0.5)  # spread within the grid cell


def _conditional_thiele_innes(t, x, y, wx, wy, lnP, e, phi, t_ref, rng, m):
    """Given (ln P, e, phase at t_ref), ``m`` draws of (A, B, F, G) from their Gaussian conditional.

    The model x = A X + F Y, y = B X + G Y is linear in the Thiele-Innes constants (Heintz 1978, ch. 4),
    so under a flat prior in them their conditional posterior is Gaussian: per coordinate a 2 x 2
    weighted least-squares problem. Returns A, B, F, G and the chi2 of every draw (shape (n, m)) and the
    log of the likelihood integrated over A, B, F, G (-chi2_min / 2 + ln sqrt(det Cov), constants dropped).
    """
    P = np.exp(lnP)
    E = solve_kepler(_TWO_PI * (phi[:, None] + (t[None, :] - t_ref) / P[:, None]), e[:, None])
    X = np.cos(E) - e[:, None]
    Y = np.sqrt(1.0 - e[:, None] ** 2) * np.sin(E)
    out = []
    log_ev = np.zeros(lnP.size)
    chi2 = np.zeros((lnP.size, m))
    for d, w in ((x, wx), (y, wy)):
        Sxx, Sxy, Syy = (X * X) @ w, (X * Y) @ w, (Y * Y) @ w
        b1, b2 = X @ (w * d), Y @ (w * d)
        det = Sxx * Syy - Sxy * Sxy
        with np.errstate(divide="ignore", invalid="ignore"):
            det = np.where(det > 0, det, np.nan)
            u = (Syy * b1 - Sxy * b2) / det
            v = (Sxx * b2 - Sxy * b1) / det
            chi2_min = float(np.sum(w * d * d)) - (u * b1 + v * b2)
            # covariance [[Syy, -Sxy], [-Sxy, Sxx]] / det, and its Cholesky factor
            l11 = np.sqrt(Syy / det)
            l21 = -Sxy / det / l11
            l22 = np.sqrt(np.maximum(Sxx / det - l21 * l21, 0.0))
        n1, n2 = rng.standard_normal((lnP.size, m)), rng.standard_normal((lnP.size, m))
        out.append((u[:, None] + l11[:, None] * n1, v[:, None] + l21[:, None] * n1 + l22[:, None] * n2))
        with np.errstate(invalid="ignore"):
            log_ev += -0.5 * chi2_min - 0.5 * np.log(det)
        chi2 += chi2_min[:, None] + n1 * n1 + n2 * n2
    (A, F), (B, G) = out
    return A, B, F, G, chi2, np.where(np.isfinite(log_ev), log_ev, -np.inf)


def _circular_offset(phi, centre):
    """Phase differences wrapped to [-0.5, 0.5) turn."""
    return np.mod(phi - centre + 0.5, 1.0) - 0.5


class _Proposal:
    """Proposal over z = (ln P, e, phase): the prior box mixed with a piecewise-constant density on a grid.

    The grid covers a sub-box (the phase as an offset from ``centre``, so that a sub-box may straddle
    phase 0); its cell probabilities come from weighted draws. Sampling picks a cell, then a uniform
    point in it; the density is O(1) to evaluate. The prior box has share ``box_share`` (all of it
    before the first adaptation): the proposal is positive wherever the prior is.
    """

    def __init__(self, lo, hi, grid_lo=None, grid_hi=None, probs=None, centre=0.0, box_share=1.0):
        self.lo, self.hi = np.asarray(lo, float), np.asarray(hi, float)
        self.log_vol = float(np.sum(np.log(self.hi - self.lo)))
        self.probs = probs
        self.box_share = box_share if probs is not None else 1.0
        if probs is not None:
            self.glo, self.ghi, self.centre = np.asarray(grid_lo, float), np.asarray(grid_hi, float), centre
            self.nb = np.array(probs.shape)
            self.step = (self.ghi - self.glo) / self.nb
            self.flat = probs.ravel() / probs.sum()
            self.cdf = np.cumsum(self.flat)
            self.cdf[-1] = 1.0
            self.cell_log_vol = float(np.sum(np.log(self.step)))

    def _to_grid(self, z):
        g = z.copy()
        g[:, 2] = _circular_offset(z[:, 2], self.centre)
        return g

    def draw(self, rng, n):
        z = self.lo + (self.hi - self.lo) * rng.random((n, 3))
        if self.probs is not None:
            on = rng.random(n) >= self.box_share
            m = int(on.sum())
            cell = np.searchsorted(self.cdf, rng.random(m), side="right").clip(0, self.flat.size - 1)
            ijk = np.column_stack(np.unravel_index(cell, tuple(self.nb)))
            g = self.glo + (ijk + rng.random((m, 3))) * self.step
            g[:, 2] = np.mod(g[:, 2] + self.centre, 1.0)
            z[on] = g
        return z

    def log_pdf(self, z):
        inside = np.all((z >= self.lo) & (z < self.hi), axis=1)
        dens = np.where(inside, self.box_share * np.exp(-self.log_vol), 0.0)
        if self.probs is not None:
            g = self._to_grid(z)
            ijk = np.floor((g - self.glo) / self.step).astype(np.int64)
            ok = np.all((ijk >= 0) & (ijk < self.nb), axis=1)
            cell = np.ravel_multi_index(tuple(np.where(ok[:, None], ijk, 0).T), tuple(self.nb))
            dens = dens + np.where(ok, (1.0 - self.box_share) * self.flat[cell] * np.exp(-self.cell_log_vol), 0.0)
        with np.errstate(divide="ignore"):
            return np.log(dens)


def _ess(lw):
    w = np.exp(lw - lw.max())
    return float(w.sum() ** 2 / np.sum(w * w))


def _importance(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    *,
    parallax_mas: float | None = None,
    sigma_parallax_mas: float = 0.0,
    mass_prior: MassPrior | tuple | None = BROAD_MASS_PRIOR,
    n_samples: int = 1000,
    seed: Any = None,
    max_draws: int = 1_000_000,
    period_range: tuple[float, float] | None = None,
    start: orbits.OrbitFit | None = None,
    min_ess: float | None = None,
    a_range: tuple[float, float] | None = None,
) -> tuple[OrbitPosterior, float]:
    """Posterior of a visual orbit by adaptive importance sampling with the Thiele-Innes constants marginalised.

    Returns the posterior (``method`` "importance") and the effective sample size of its weighted draws.

    Parameters are those of ``sample_ofti``, and:

    mass_prior : MassPrior or (median, sigma) or None
        With a parallax, the prior of the total mass; None: P log-uniform and the mass the dynamical one.
    start : OrbitFit, optional
        A least-squares orbit: the first proposal puts a kernel there.
    min_ess : float, optional
        Effective sample size wanted (default ``n_samples``); the sampler stops adapting and drawing once
        it is reached or after ``max_draws``. The result's length is always ``n_samples``; check ``draws``.
    a_range : (float, float), optional
        Bounds of the log-uniform prior of a (arcsec); default none (1/a on (0, inf), as OFTI).

    Notes
    -----
    Given (P, e, periastron phase) the positions are linear in the Thiele-Innes constants A, B, F, G,
    whose conditional likelihood is Gaussian (two 2 x 2 least-squares problems). Each draw takes
    z = (ln P, e, phase of the mean anomaly at the middle of the arc) from a proposal q(z), then A, B, F,
    G from that Gaussian, and gets the exact importance weight prior x likelihood / proposal, i.e.
    prior(z, A, B, F, G) x L_max(z) x 4 pi^2 sqrt(det Cov(z)) / q(z). The prior is that of ``sample_ofti``
    (e uniform in [0, 0.99), cos i, Omega, omega and the phase uniform, a log-uniform, the parallax Gaussian,
    the mass from ``mass_prior``) written in (z, A, B, F, G): the Jacobian of (A, B, F, G) with respect
    to (a, cos i, Omega, omega) is a^3 sin^2 i (checked numerically in the tests), so the density is
    1 / (a^4 sin^2 i) = 1 / (a^4 - (AG - BF)^2); with a mass prior the period's prior density in ln P
    is 2 p(ln K), K = M parallax^3 = (1000 a)^3 / P^2 (parallax marginalised by quadrature; each
    draw's parallax is then drawn from its conditional given K). The period is restricted to
    ``period_range`` (default span / 20 to 2000 span) and a to ``a_range``.

    For each z, ``_IS_INNER`` draws of (A, B, F, G) are made; the weight uses their mean prior (an
    unbiased estimate of the prior's conditional mean) and one of them is kept with probability in
    proportion to its prior, a properly weighted pair (Liu 2001, Monte Carlo Strategies in Scientific
    Computing, ch. 2; from memory): this tames the weights when the mass prior is narrower in a than
    the data's Gaussian. The proposal of z starts as the prior box (half of it a box around ``start``)
    and is refitted after every batch of ``_IS_BATCH`` draws to all weighted draws so far: a
    piecewise-constant density on a 24^3 grid over their 99.9 % range (padded, smoothed, with a floor),
    mixed with the prior box (share ``_IS_DEFENSIVE``, which keeps every weight bounded). Every draw is
    weighted against the mixture of all proposals used so far (adaptive multiple importance sampling;
    Cornuet et al. 2012, Scand. J. Stat. 39, 798; from memory), until the effective sample size
    reaches ``min_ess``. The weighted draws are then resampled systematically to ``n_samples``. The
    weights are exact for each proposal; reusing adapted proposals in the mixture is consistent, with
    a bias that vanishes as the draws grow (Cornuet et al.), far below the Monte Carlo error here.
    """
    t_, x_, y_, sx_, sy_ = _check(t, x, y, sx, sy)
    mp = None if mass_prior is None else (mass_prior if isinstance(mass_prior, MassPrior) else MassPrior(*mass_prior))
    with_plx = parallax_mas is not None and parallax_mas > 0
    use_mass = with_plx and mp is not None
    splx = float(sigma_parallax_mas or 0.0) if with_plx else 0.0
    if seed is None:
        seed = seed_from("importance", t_, x_, y_, sx_, sy_, parallax_mas, sigma_parallax_mas,
                         None if mp is None else tuple(mp), n_samples, max_draws, period_range, a_range)
    rng = _generator(seed)
    want = float(min_ess if min_ess is not None else n_samples)
    span = float(t_.max() - t_.min())
    t_ref = 0.5 * float(t_.max() + t_.min())
    lo_P, hi_P = period_range or (span / 20.0, 2000.0 * span)
    lo = np.array([math.log(lo_P), 0.0, 0.0])
    hi = np.array([math.log(hi_P), _E_MAX, 1.0])
    wx, wy = 1.0 / sx_**2, 1.0 / sy_**2
    lnK_prior = _LnKPrior(mp, float(parallax_mas), splx) if use_mass else None

    def evaluate(z):
        lnP, e, phi = z[:, 0], z[:, 1], z[:, 2]
        ok = (e >= 0) & (e < _E_MAX) & (lnP >= lo[0]) & (lnP < hi[0])
        e_c = np.clip(e, 0.0, _E_MAX)
        A, B, F, G, chi2, log_ev = _conditional_thiele_innes(t_, x_, y_, wx, wy, lnP, e_c, phi, t_ref, rng, _IS_INNER)
        w_ = A * G - B * F
        u_ = 0.5 * (A * A + B * B + F * F + G * G)
        a2 = u_ + np.sqrt(np.maximum(u_ * u_ - w_ * w_, 0.0))
        with np.errstate(divide="ignore", invalid="ignore"):
            lp = -np.log(a2 * a2 - w_ * w_)  # 1 / (a^4 sin^2 i)
            if use_mass:
                lp = lp + lnK_prior(1.5 * np.log(1000.0**2 * a2) - 2.0 * lnP[:, None])
        if a_range is not None:
            lp = np.where((a2 >= a_range[0] ** 2) & (a2 <= a_range[1] ** 2), lp, -np.inf)
        lp = np.where(np.isfinite(lp), lp, -np.inf)
        # the prior averaged over the inner draws (an unbiased estimate of its conditional mean), and one
        # inner draw picked in proportion to it: a properly weighted pair (z, A, B, F, G)
        top = lp.max(axis=1)
        safe = np.where(np.isfinite(top), top, 0.0)
        p = np.exp(lp - safe[:, None])
        s = p.sum(axis=1)
        with np.errstate(divide="ignore"):
            lw = np.where(ok & (s > 0), safe + np.log(s / _IS_INNER) + log_ev, -np.inf)
        c = np.cumsum(p, axis=1)
        j = np.minimum((c < (rng.random(lnP.size) * s)[:, None]).sum(axis=1), _IS_INNER - 1)
        r = np.arange(lnP.size)
        lw = np.where(np.isfinite(lw), lw, -np.inf)
        return dict(lnP=lnP, e=e_c, phi=phi, A=A[r, j], B=B[r, j], F=F[r, j], G=G[r, j], chi2=chi2[r, j]), lw

    def adapted(cat, lw):
        """A grid proposal from weighted draws (see _Proposal)."""
        w = np.exp(lw - lw.max())
        w /= w.sum()
        z = np.column_stack([cat["lnP"], cat["e"], cat["phi"]])
        centre = math.atan2(float(w @ np.sin(_TWO_PI * z[:, 2])), float(w @ np.cos(_TWO_PI * z[:, 2]))) / _TWO_PI
        z[:, 2] = _circular_offset(z[:, 2], centre)
        glo, ghi = np.empty(3), np.empty(3)
        bounds = [(lo[0], hi[0]), (0.0, _E_MAX), (-0.5, 0.5)]
        for d in range(3):
            order = np.argsort(z[:, d])
            c = np.cumsum(w[order])
            q_lo = z[order[min(np.searchsorted(c, 5e-4), c.size - 1)], d]
            q_hi = z[order[min(np.searchsorted(c, 1 - 5e-4), c.size - 1)], d]
            pad = 0.25 * (q_hi - q_lo) + _GRID_MIN_WIDTH[d]
            glo[d], ghi[d] = max(q_lo - pad, bounds[d][0]), min(q_hi + pad, bounds[d][1])
        for d in range(3):  # at least the least width, inside the bounds
            if ghi[d] - glo[d] < _GRID_MIN_WIDTH[d]:
                mid = min(max(0.5 * (glo[d] + ghi[d]), bounds[d][0] + _GRID_MIN_WIDTH[d]),
                          bounds[d][1] - _GRID_MIN_WIDTH[d])
                glo[d], ghi[d] = mid - 0.5 * _GRID_MIN_WIDTH[d], mid + 0.5 * _GRID_MIN_WIDTH[d]
        if ghi[2] - glo[2] > 0.8:
            glo[2], ghi[2] = -0.5, 0.5
        nb = _GRID_BINS
        ijk = np.floor((z - glo) / ((ghi - glo) / nb)).astype(np.int64)
        ok = np.all((ijk >= 0) & (ijk < nb), axis=1)
        hist = np.zeros((nb, nb, nb))
        np.add.at(hist, tuple(ijk[ok].T), w[ok])
        # spread every cell's weight over its neighbours (the proposal's tails), then a floor
        smooth = hist.copy()
        for d in range(3):
            s = smooth.copy()
            lo_sl, hi_sl = [slice(None)] * 3, [slice(None)] * 3
            lo_sl[d], hi_sl[d] = slice(1, None), slice(None, -1)
            s[tuple(lo_sl)] += 0.5 * smooth[tuple(hi_sl)]
            s[tuple(hi_sl)] += 0.5 * smooth[tuple(lo_sl)]
            smooth = s
        smooth = smooth / smooth.sum()
        probs = (1.0 - _GRID_FLOOR) * smooth + _GRID_FLOOR / smooth.size
        return _Proposal(lo, hi, glo, ghi, probs, centre, box_share=_IS_DEFENSIVE)

    if start is not None and lo[0] + 0.05 < math.log(max(start.P, 1e-300)) < hi[0] - 0.05 and np.isfinite(start.T):
        # a first proposal around the least-squares orbit (half of it), with a generous width
        z0 = np.array([math.log(start.P), min(max(start.e, 0.0), _E_MAX - 1e-3),
                       np.mod((t_ref - start.T) / start.P, 1.0)])
        half = np.array([0.3, 0.15, 0.1])
        glo = np.maximum([z0[0] - half[0], z0[1] - half[1], -half[2]], [lo[0], 0.0, -0.5])
        ghi = np.minimum([z0[0] + half[0], z0[1] + half[1], half[2]], [hi[0], _E_MAX, 0.5])
        prop = _Proposal(lo, hi, glo, ghi, np.ones((1, 1, 1)), z0[2], box_share=0.5)
    else:
        prop = _Proposal(lo, hi)
    # Adaptive multiple importance sampling (AMIS; Cornuet et al. 2012, Scand. J. Stat. 39, 798; from
    # memory): every draw so far is weighted against the mixture of all proposals used (the "balance
    # heuristic", Veach & Guibas 1995), and the next proposal is fitted to all of them.
    draws = 0
    props: list[tuple[_Proposal, int]] = []
    cats: list[dict] = []
    zs: list[NDArray[np.float64]] = []
    lts: list[NDArray[np.float64]] = []
    lqs: list[NDArray[np.float64]] = []  # log of sum_t n_t q_t(z) for the draws of each batch
    lw = np.array([-np.inf])
    while draws < max_draws:
        n = min(_IS_BATCH, max_draws - draws)
        z = prop.draw(rng, n)
        cat, lt = evaluate(z)
        lq_new = np.full(n, -np.inf)
        for p_old, n_old in props:
            lq_new = np.logaddexp(lq_new, math.log(n_old) + p_old.log_pdf(z))
        lqs = [np.logaddexp(lq, math.log(n) + prop.log_pdf(z_old)) for lq, z_old in zip(lqs, zs)]
        lqs.append(np.logaddexp(lq_new, math.log(n) + prop.log_pdf(z)))
        props.append((prop, n))
        cats.append(cat)
        zs.append(z)
        lts.append(lt)
        draws += n
        lw = np.concatenate(lts) - np.concatenate(lqs) + math.log(draws)
        lw = np.where(np.isnan(lw), -np.inf, lw)
        if not np.isfinite(lw).any():
            prop = _Proposal(lo, hi)
            continue
        if _ess(lw) >= want:
            break
        prop = adapted({k: np.concatenate([c[k] for c in cats]) for k in ("lnP", "e", "phi")}, lw)
    cat = {k: np.concatenate([c[k] for c in cats]) for k in cats[0]} if cats else {}
    ess = _ess(lw) if np.isfinite(lw).any() else 0.0
    if np.isfinite(lw).any():
        w = np.exp(lw - lw.max())
        idx = _systematic(rng, w / w.sum(), n_samples)
        idx = idx[rng.permutation(idx.size)]
    else:
        idx = np.array([], dtype=int)
    names = ("lnP", "e", "phi", "A", "B", "F", "G", "chi2")
    sel = {k: np.asarray(cat[k])[idx] if cat else np.array([]) for k in names}
    a, inc, node, omega = orbits.campbell_from_thiele_innes(sel["A"], sel["B"], sel["F"], sel["G"])
    P = np.exp(sel["lnP"])
    T = t_ref - sel["phi"] * P
    if use_mass:
        lnK = 3.0 * np.log(1000.0 * a) - 2.0 * sel["lnP"]
        plx = lnK_prior.draw_parallax(rng, lnK)
        mass = orbits.dynamical_mass(a, plx, P)
    elif with_plx:
        plx = parallax_mas + splx * rng.standard_normal(idx.size)
        plx = np.where(plx > 0, plx, np.nan)
        mass = orbits.dynamical_mass(a, plx, P)
    else:
        mass = np.full(idx.size, np.nan)
    return OrbitPosterior(P=P, T=T, e=sel["e"], a=np.asarray(a, float), i=np.asarray(inc, float),
                          node=np.asarray(node, float), omega=np.asarray(omega, float), mass=np.asarray(mass, float),
                          chi2=sel["chi2"], method="importance", n_data=2 * t_.size, draws=draws), ess


def _systematic(rng: np.random.Generator, w: NDArray[np.float64], n: int) -> NDArray[np.int64]:
    """Systematic resampling: n indices with expected counts n w (w normalised)."""
    c = np.cumsum(w)
    c[-1] = 1.0
    return np.searchsorted(c, (rng.random() + np.arange(n)) / n, side="right").clip(0, w.size - 1)


def sample_importance(*args: Any, **kwargs: Any) -> OrbitPosterior:
    """Posterior of a visual orbit by adaptive importance sampling, the Thiele-Innes constants marginalised.

    The parameters and the method are those of ``_importance``; this returns only the posterior
    (``posterior`` also reads the effective sample size).
    """
    return _importance(*args, **kwargs)[0]
