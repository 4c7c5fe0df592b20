"""Recovery of simulated single-lined spectroscopic binaries by ``dossier.astro.spectro.solve_orbit``.

Run with ``python benchmarks/rv_orbit_recovery.py [--n 200] [--seed 0]``. Each
system is drawn from its own seeded generator, so a run is reproducible and
any one system can be rerun alone (``simulate(k, seed)``). Reports:

* the fraction of systems whose period is reported as found;
* among those, the fraction within 1 % of the true period (must be 100 %);
* the fraction of 68 % posterior intervals that contain the truth for P, K
  and e (target 68 ± 5 %);
* the time per system.

The simulated population (invented; realistic, not a published census):

* period log-uniform from 1 d to 10 yr;
* primary 0.7–2.5 M☉, mass ratio uniform 0.1–1, isotropic inclination,
  K from Kepler's third law (astropy's G and M☉);
* eccentricity: circular-ish below 10 d (|N(0, 0.05)|: tides circularise
  short orbits), N(0.3, 0.15) clipped to [0, 0.85] up to 1000 d, and
  f(e) = 2e (capped at 0.9) beyond (Duquennoy & Mayor 1991, A&A 248, 485;
  from memory);
* 10–40 epochs over 1–8 observing seasons of ~7 months, in clumps of 1–4
  consecutive nights at a similar time of night (so the spectral window has
  daily, monthly and yearly peaks);
* errors 0.05–1 km/s (log-uniform per system, ±20 % per epoch);
* 30 % observed with two instruments, the second with a zero point offset by
  up to ±0.5 km/s;
* 20 % giants (stage jitter 0.05 km/s, true jitter log-normal about it,
  0.2 dex), the rest dwarfs (0.005 km/s).

The pipeline is that of ``dossier.rules.facts.analyse_rv``: the variability
test (log10 p < -4) and at least 8 + n_instruments velocities, then
``solve_orbit`` with its default settings.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from dossier.astro import spectro  # noqa: E402

DWARF_JITTER, GIANT_JITTER = 0.005, 0.05  # the spectroscopic-orbit rule's defaults, km/s


@dataclass(frozen=True)
class Simulated:
    t: np.ndarray
    v: np.ndarray
    sigma: np.ndarray
    instrument: tuple
    stage_jitter: float
    P: float
    K: float
    e: float
    omega: float
    T: float


def _k_semi_amplitude(P_days: float, m1: float, m2: float, sin_i: float, e: float) -> float:
    """K (km/s) from Kepler's third law with astropy's G and M_sun (an independent route from f(M))."""
    from astropy import constants as const

    P = P_days * 86400.0
    G_M = const.G.value * const.M_sun.value
    return float((2 * np.pi * G_M / P) ** (1 / 3) * m2 * sin_i / (m1 + m2) ** (2 / 3) / np.sqrt(1 - e * e) / 1000)


def simulate(k: int, seed: int = 0) -> Simulated:
    rng = np.random.default_rng([seed, k])
    P = float(10 ** rng.uniform(0.0, np.log10(3652.5)))
    m1, q = rng.uniform(0.7, 2.5), rng.uniform(0.1, 1.0)
    sin_i = float(np.sqrt(1 - rng.uniform(0, 1) ** 2))
    if P < 10:
        e = min(abs(rng.normal(0, 0.05)), 0.3)
    elif P < 1000:
        e = float(np.clip(rng.normal(0.3, 0.15), 0.0, 0.85))
    else:
        e = float(min(np.sqrt(rng.uniform()), 0.9))
    K = _k_semi_amplitude(P, m1, q * m1, sin_i, e)
    omega, gamma = rng.uniform(0, 360), rng.normal(0, 30)
    # sampling: seasons of ~210 d each year, clumps of consecutive nights
    n = int(rng.integers(10, 41))
    seasons = int(rng.integers(1, 9))
    start = 2455000.0 + rng.uniform(0, 365)
    nights = []
    while len(nights) < n:
        season = int(rng.integers(0, seasons))
        night0 = np.floor(start + 365.25 * season + rng.uniform(0, 210))
        for j in range(int(rng.integers(1, 5))):
            nights.append(night0 + j)
    nights = np.sort(np.array(nights[:n]))
    t = nights + rng.uniform(0.55, 0.85) + rng.normal(0, 0.03, n)  # a similar time of night
    T = float(t.min() + rng.uniform(0, P))
    sig0 = 10 ** rng.uniform(np.log10(0.05), 0.0)
    sigma = sig0 * rng.uniform(0.8, 1.2, n)
    giant = rng.uniform() < 0.2
    stage = GIANT_JITTER if giant else DWARF_JITTER
    true_jitter = stage * 10 ** rng.normal(0, 0.2)
    two = rng.uniform() < 0.3
    inst = np.where(two & (t > np.median(t)), "second", "first")
    offset = np.where(inst == "second", rng.uniform(-0.5, 0.5), 0.0)
    v = (spectro.rv_model(t, P, K, e, omega, T, gamma) + offset
         + rng.normal(0, 1, n) * np.sqrt(sigma**2 + true_jitter**2))
    return Simulated(t, v, sigma, tuple(inst), stage, P, K, e, omega, T)


def analyse(sim: Simulated) -> spectro.OrbitSolution | None:
    """The pipeline of ``analyse_rv``: None where the series is not variable or too short."""
    var = spectro.variability(sim.v, sim.sigma, sim.stage_jitter)
    n_inst = len(set(sim.instrument))
    if var.log10_p >= -4.0 or sim.t.size < max(9, 8 + n_inst):
        return None
    return spectro.solve_orbit(sim.t, sim.v, sim.sigma, sim.instrument, stage_jitter=sim.stage_jitter)


def run(n: int, seed: int = 0, echo=print) -> dict:
    found = within = 0
    cover = {"P": 0, "K": 0, "e": 0}
    times = []
    wrong = []
    for k in range(n):
        sim = simulate(k, seed)
        t0 = time.perf_counter()
        sol = analyse(sim)
        times.append(time.perf_counter() - t0)
        if sol is None or not sol.found:
            continue
        found += 1
        post = sol.posterior
        ok = abs(post.P.q50 / sim.P - 1) < 0.01
        within += ok
        if not ok:
            wrong.append((k, sim.P, post.P.q50))
        for name, truth in (("P", sim.P), ("K", sim.K), ("e", sim.e)):
            iv = getattr(post, name)
            cover[name] += iv.q16 <= truth <= iv.q84
    return {"n": n, "found": found, "within": within, "cover": cover, "times": np.array(times), "wrong": wrong}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=200)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args(argv)
    r = run(args.n, args.seed)
    f = max(r["found"], 1)
    print(f"systems                         {r['n']}")
    print(f"period reported as found        {r['found']} ({100 * r['found'] / r['n']:.1f} %)")
    print(f"  of those within 1 % of truth  {r['within']} ({100 * r['within'] / f:.1f} %; must be 100 %)")
    for name in ("P", "K", "e"):
        print(f"  68 % interval holds true {name}    {100 * r['cover'][name] / f:.1f} % (target 68 ± 5 %)")
    t = r["times"]
    print(f"time per system                 median {np.median(t):.2f} s, mean {t.mean():.2f} s, max {t.max():.2f} s")
    for k, truth, got in r["wrong"]:
        print(f"WRONG PERIOD: system {k}: true {truth:.5g} d, reported {got:.5g} d")
    return 1 if r["wrong"] else 0


if __name__ == "__main__":
    raise SystemExit(main())
