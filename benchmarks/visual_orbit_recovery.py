"""Coverage of the visual-orbit posterior's intervals on simulated arcs, and its speed.

Run with ``python benchmarks/visual_orbit_recovery.py [trials]``. Orbits are drawn from the
sampler's own priors (e, cos i, omega, periastron phase uniform; a log-uniform; mass from the mass
prior; parallax Gaussian), observed at a few epochs over a short arc with Gaussian errors, and
sampled with ``dossier.astro.orbit_posterior.posterior``. For a correct sampler the 68 % interval of
each element contains the truth in 68 % of the trials (Bayesian calibration: exact on average over
the prior; e.g. Cook, Gelman & Rubin 2006, J. Comput. Graph. Stat. 15, 675; from memory). Prints the
fractions, their binomial standard errors and the time per pair (target: about 2 s), for errors of
50 and 10 mas (or the errors given in mas: ``python benchmarks/visual_orbit_recovery.py 200 10``).

The simulated semimajor axes are log-uniform in [0.5, 2] arcsec (``A_RANGE``), and the sampler is
given that range (``posterior(..., a_range=A_RANGE)``), so that simulation and sampler share one
prior exactly; ``run(..., match_a=False)`` leaves the sampler's default (1/a without bounds).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from dossier.astro import orbit as orbits  # noqa: E402
from dossier.astro import orbit_posterior as op  # noqa: E402

PARALLAX = (20.0, 0.5)  # mas
MASS_PRIOR = op.MassPrior(2.0, 0.3, "normal")  # M_sun
SIGMA = 0.01  # arcsec, per coordinate
A_RANGE = (0.5, 2.0)  # arcsec, log-uniform


def simulate(rng: np.random.Generator) -> tuple[dict, np.ndarray, np.ndarray, np.ndarray]:
    """One orbit drawn from the priors, observed at 6 epochs over 10 yr."""
    e = 0.99 * rng.random()
    i = np.degrees(np.arccos(rng.uniform(-1, 1)))
    omega, node = 360 * rng.random(), 360 * rng.random()
    a = float(np.exp(rng.uniform(np.log(A_RANGE[0]), np.log(A_RANGE[1]))))
    plx = PARALLAX[0] + PARALLAX[1] * rng.standard_normal()
    mass = float(MASS_PRIOR.draw(rng, 1)[0])
    P = float(np.sqrt((1000 * a / plx) ** 3 / mass))
    T = 2015.0 - rng.random() * P
    el = dict(P=P, T=T, e=e, a=a, i=i, node=node, omega=omega)
    t = np.linspace(2010.0, 2020.0, 6)
    x, y = orbits.ephemeris_xy(t, *el.values())
    node_f, omega_f = op._fold(np.array([node]), np.array([omega]))
    el.update(node=float(node_f[0]), omega=float(omega_f[0]), mass=mass)
    return el, t, x + SIGMA * rng.standard_normal(t.size), y + SIGMA * rng.standard_normal(t.size)


def run(trials: int, seed: int = 2026, keys=("P", "e", "a", "i", "mass"), sigma: float | None = None,
        match_a: bool = True) -> dict:
    global SIGMA
    if sigma is not None:
        SIGMA = sigma
    rng = np.random.default_rng(seed)
    hits = {k: 0 for k in keys}
    times, methods = [], {}
    for _ in range(trials):
        el, t, x, y = simulate(rng)
        start = time.perf_counter()
        post = op.posterior(t, x, y, SIGMA, SIGMA, parallax_mas=PARALLAX[0], sigma_parallax_mas=PARALLAX[1],
                            mass_prior=MASS_PRIOR, n_samples=1000, a_range=A_RANGE if match_a else None)
        times.append(time.perf_counter() - start)
        methods[post.method] = methods.get(post.method, 0) + 1
        for k in keys:
            lo, hi = post.quantiles(k, (0.16, 0.84))
            hits[k] += int(lo <= el[k] <= hi)
    return {"fractions": {k: v / trials for k, v in hits.items()}, "times": np.array(times), "methods": methods,
            "trials": trials}


def main() -> int:
    trials = int(sys.argv[1]) if len(sys.argv) > 1 else 100
    sigmas = [float(v) / 1000 for v in sys.argv[2:]] or [0.05, 0.01]
    se = np.sqrt(0.68 * 0.32 / trials)
    for sigma in sigmas:
        out = run(trials, sigma=sigma)
        print(f"{trials} simulated arcs (6 epochs over 10 yr, {1000 * sigma:.0f} mas errors); methods {out['methods']}")
        print(f"{'element':<8} {'68 % interval contains truth':>30}   (expected 0.68 ± {se:.3f})")
        for k, f in out["fractions"].items():
            print(f"{k:<8} {f:30.3f} ± {np.sqrt(f * (1 - f) / trials):.3f}")
        t = out["times"]
        print(f"time per pair: median {np.median(t):.2f} s, mean {t.mean():.2f} s, max {t.max():.2f} s "
              "(target about 2 s)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
