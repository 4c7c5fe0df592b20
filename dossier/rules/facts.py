"""Inputs shared by the rules, derived once per system.

Several rules need the same derived inputs: each component's combined
parallax and distance, its best position and proper motion, a pair's
separation and total mass. They are computed here once, vectorised over the
components of a system, so that rules stay short and never disagree about
an input. Nothing here judges: judging is the rules' job.

Choices (see ``docs/decisions.md``):

* Parallaxes of several sources are combined by inverse-variance weighting
  with the Birge-ratio inflation (:func:`dossier.astro.distance.combine_parallaxes`).
* Proper motion and position come from the single most precise solution
  that has them (proper motions of different epochs are not averaged: an
  unresolved companion makes them differ for real).
* A pair member that is itself a pair is represented, for astrometry, by its
  first member (its primary), and for mass by the sum of its members.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from dossier.astro import angles, distance
from dossier.astro.seeding import seed_from
from dossier.cache import Cache
from dossier.fmt import fmt_fixed, fmt_sig, fmt_signed
from dossier.schema.models import Astrometry, Measured, System
from dossier.schema.settings import Settings


def julian_year(epoch: str) -> float:
    """Julian epoch (years) of an epoch string of the evidence model."""
    return float(julian_years([epoch])[0])


def julian_days(epochs: list[str]) -> np.ndarray:
    """Julian dates of epoch strings (see :func:`julian_years`); JD = 2451545 + 365.25 (J − 2000)."""
    return 2451545.0 + 365.25 * (julian_years(epochs) - 2000.0)


def julian_years(epochs: list[str]) -> np.ndarray:
    """Julian epochs (years) of epoch strings: ``J2016.0``, ``B1950.0``, ISO dates/times (UTC) or
    ``JD2455200.5`` / ``BJD2455200.5`` (a barycentric date is taken at face value: the light-time
    difference, minutes, is immaterial to the orbits weighed here).

    Besselian epochs and calendar dates are converted with ERFA, the IAU SOFA
    routines that astropy.time itself calls (``epb2jd``, ``dtf2d``, ``epj``),
    vectorised over the list and without astropy.time's import cost.
    """
    out = np.empty(len(epochs))
    b_idx, b_val, d_idx, d_parts = [], [], [], []
    for k, e in enumerate(epochs):
        if e.startswith(("JD", "BJD")):
            out[k] = 2000.0 + (float(e.lstrip("BJD")) - 2451545.0) / 365.25  # definition of the Julian epoch
        elif e.startswith("J"):
            out[k] = float(e[1:])
        elif e.startswith("B"):
            b_idx.append(k)
            b_val.append(float(e[1:]))
        else:
            when = dt.datetime.fromisoformat(e)
            d_idx.append(k)
            d_parts.append((when.year, when.month, when.day, when.hour, when.minute,
                            when.second + when.microsecond / 1e6))
    if b_idx or d_idx:
        import erfa

        if b_idx:
            out[b_idx] = erfa.epj(*erfa.epb2jd(np.array(b_val)))
        if d_idx:
            cols = [np.array(c) for c in zip(*d_parts)]
            out[d_idx] = erfa.epj(*erfa.dtf2d("UTC", *cols))
    return out


@dataclass(frozen=True)
class ParallaxSource:
    ref: str
    value: float
    error: float
    epoch: str


@dataclass(frozen=True)
class StarParallax:
    """Combined parallax of one component, mas."""

    sources: tuple[ParallaxSource, ...]
    mean: float
    error: float
    error_inflated: float
    chi2: float
    dof: int
    p_value: float
    birge_ratio: float
    discordant: str | None
    residual_sigma: tuple[float, ...]
    distance_mode_pc: float
    distance_q16_pc: float
    distance_q50_pc: float
    distance_q84_pc: float
    precision: str

    @property
    def fractional_error(self) -> float:
        return self.error_inflated / self.mean if self.mean > 0 else math.inf


@dataclass(frozen=True)
class Motion:
    """Proper motion (mas/yr, RA component × cos δ) of one solution."""

    pmra: float
    pmdec: float
    pmra_error: float
    pmdec_error: float
    ref: str
    correlation: float = float("nan")  # of the pmra and pmdec errors, where the source gives it
    how: str = ""  # what was done to the measured motion (e.g. referred to an unresolved pair's barycentre)


@dataclass(frozen=True)
class Position:
    ra: float
    dec: float
    jyear: float
    ref: str


@dataclass(frozen=True)
class StarFacts:
    id: str
    parallax: StarParallax | None
    position: Position | None
    motion: Motion | None
    radial_velocity: Measured | None
    mass: Measured | None
    magnitudes: dict[str, Measured]
    rv_from_orbit: bool = False


@dataclass(frozen=True)
class PairFacts:
    id: str
    first: str
    second: str
    rho_arcsec: float | None
    theta_deg: float | None
    separation_how: str
    separation_refs: tuple[str, ...]


def _ref(value: Measured, record: Astrometry) -> str:
    return value.ref or record.ref


def _best(entries: list[Astrometry], key) -> Astrometry | None:
    usable = [e for e in entries if key(e) is not None]
    return min(usable, key=key) if usable else None


class SystemFacts:
    """Derived inputs for the rules of one system."""

    def __init__(self, system: System, settings: Settings, length_scale_kpc: float = 1.35, log: tuple = (),
                 cache=None):
        self.system = system
        self.cache = cache
        self.settings = settings
        self.length_scale_kpc = length_scale_kpc
        self.pair_ids = {p.id: p for p in system.pairs}
        self.log = tuple(log)

    @cached_property
    def rv_orbits(self) -> dict[str, RVOrbit]:
        """RV analysis of every pair whose primary (first member) has a radial-velocity series."""
        from dossier.rules.registry import BY_ID, rule_settings

        settings = rule_settings(self.settings.rules, BY_ID["spectroscopic-orbit"])
        out = {}
        for pair in self.system.pairs:
            first = pair.members[0]
            comp = self.system.components.get(first)
            if comp is None or len(comp.radial_velocity_series) < 3:
                continue
            stage = comp.physical.stage if comp.physical else None
            m = comp.physical.mass if comp.physical else None
            mass = None if m is None else (m.value, m.uncertainty or 0.0)
            out[pair.id] = analyse_rv(pair.id, first, list(comp.radial_velocity_series), stage, settings, self.cache,
                                      mass)
        return out

    def systemic_velocity(self, component: str) -> Measured | None:
        """γ of a fitted spectroscopic orbit of this component (or of a pair that resolves it)."""
        for pair in self.system.pairs:
            orbit = self.rv_orbits.get(pair.id)
            if orbit is None or not orbit.detected:
                continue
            if component in (pair.members[0], pair.parent):
                # γ of the reference instrument (the one with most velocities), median and half the 68 %
                # interval of the posterior; other instruments' zero points are fitted offsets from it
                g = orbit.posterior.gamma[orbit.reference_instrument]
                # a derived value, not a source of the evidence: constructed without the source-id check
                return Measured.model_construct(value=float(g.q50), uncertainty=float(g.half_width),
                                                ref=f"fitted orbit of {pair.id}")
        return None

    @cached_property
    def logs(self) -> dict[str, PairLog]:
        """Reduced observing log of every pair that has measures."""
        by_pair: dict[str, list] = {}
        for m in self.log:
            by_pair.setdefault(m.pair, []).append(m)
        pos = self.system.position
        return {pid: reduce_log(ms, pos.ra, pos.dec, self.settings.log, self._orbit_model(pid))
                for pid, ms in sorted(by_pair.items()) if pid in self.pair_ids}

    def visual_orbit(self, pair_id: str):
        """The first published visual orbit of a pair with all Campbell elements, or None."""
        return next((o for o in self.system.orbits if o.pair == pair_id and o.is_visual), None)

    def _orbit_model(self, pair_id: str):
        orbit = self.visual_orbit(pair_id)
        if orbit is None:
            return None
        from dossier.astro import orbit as orbits

        el = (orbit.period_years, orbit.periastron_time.value, orbit.eccentricity.value, orbit.semimajor_axis.value,
              orbit.inclination.value, orbit.node.value, orbit.periastron_argument.value)
        return lambda t: orbits.ephemeris_xy(t, *el)

    @cached_property
    def visual_posteriors(self) -> dict:
        """Posterior of a visual orbit fitted to each pair's log (pair id -> ``OrbitPosterior`` or None).

        Computed once per pair, through the cache, for pairs whose log has at least the orbit-fit
        rule's ``min_nights`` nights and a curved path (``[log] curvature_p``). Pairs with a published
        visual orbit are fitted only when ``refit_published`` is set under ``[rules.orbit-fit]`` or
        ``[rules.orbit-consistency]`` (a fit costs about a second). Priors: the pair parallax and,
        for the total mass, the sum of the component masses (uncertainty doubled, at least 20 %: the
        masses are model-dependent) or a broad log-normal prior (see
        :mod:`dossier.astro.orbit_posterior`).
        """
        from dossier.rules.registry import BY_ID, rule_settings

        fit_settings = rule_settings(self.settings.rules, BY_ID["orbit-fit"])
        refit = bool(fit_settings.refit_published) or bool(
            self.settings.rules.get("orbit-consistency", {}).get("refit_published", False))
        out: dict = {}
        for pid, log in self.logs.items():
            out[pid] = None
            if len(log.mt) < fit_settings.min_nights or not log.is_curved(self.settings.log.curvature_p):
                continue
            if self.visual_orbit(pid) is not None and not refit:
                continue
            out[pid] = visual_posterior(log, self.pair_parallax(pid), self.pair_mass(pid), self.cache)
        return out

    def ephemeris_posterior(self, pair_id: str):
        """Orbits to predict a pair's position from (an ``OrbitPosterior``), or None.

        The posterior fitted to the log when the arc determines the orbit; else draws about the
        published visual orbit (``OrbitPosterior.from_published``); else a partial-arc posterior
        (its bands are wide, honestly); else None. Chosen (and drawn) once per pair: the figures,
        the page's table, the catalogue and the plan all read the same one.
        """
        if pair_id not in self._ephemeris_posteriors:
            self._ephemeris_posteriors[pair_id] = self._choose_ephemeris_posterior(pair_id)
        return self._ephemeris_posteriors[pair_id]

    @cached_property
    def _ephemeris_posteriors(self) -> dict:
        return {}

    def _choose_ephemeris_posterior(self, pair_id: str):
        from dossier.astro import orbit_posterior as op

        fitted = self.visual_posteriors.get(pair_id)
        log = self.logs.get(pair_id)
        status = None
        if fitted is not None and log is not None:
            status = op.adequacy(fitted, log.span_years).status
            if status == "determined":
                return fitted
        published = self.visual_orbit(pair_id)
        if published is not None:
            return published_posterior(published, self.pair_parallax(pair_id))
        return fitted if status == "partial" else None

    # -- components ---------------------------------------------------------

    @cached_property
    def stars(self) -> dict[str, StarFacts]:
        comps = self.system.components
        ids = list(comps)
        sources = {
            cid: tuple(
                ParallaxSource(_ref(a.parallax, a), a.parallax.value, a.parallax.uncertainty, a.epoch)
                for a in comp.astrometry
                if a.parallax is not None
            )
            for cid, comp in comps.items()
        }
        with_plx = [cid for cid in ids if sources[cid]]
        combined: dict[str, StarParallax] = {}
        if with_plx:
            width = max(len(sources[c]) for c in with_plx)
            values = np.full((len(with_plx), width), np.nan)
            errors = np.full((len(with_plx), width), np.nan)
            for row, cid in enumerate(with_plx):
                for col, s in enumerate(sources[cid]):
                    values[row, col], errors[row, col] = s.value, s.error
            c = distance.combine_parallaxes(values, errors)
            mode = distance.edsd_mode(c.mean, c.error_inflated, self.length_scale_kpc)
            quant = distance.edsd_quantiles(c.mean, c.error_inflated, self.length_scale_kpc, q=(0.16, 0.5, 0.84))
            precision = distance.fractional_error_class(c.mean, c.error_inflated)
            for row, cid in enumerate(with_plx):
                k = int(c.discordant[row])
                n = len(sources[cid])
                combined[cid] = StarParallax(
                    sources=sources[cid],
                    mean=float(c.mean[row]),
                    error=float(c.error[row]),
                    error_inflated=float(c.error_inflated[row]),
                    chi2=float(c.chi2[row]),
                    dof=int(c.dof[row]),
                    p_value=float(c.p_value[row]),
                    birge_ratio=float(c.birge_ratio[row]),
                    discordant=sources[cid][k].ref if 0 <= k < n else None,
                    residual_sigma=tuple(float(x) for x in c.residual_sigma[row, :n]),
                    distance_mode_pc=1000.0 * float(mode[row]),
                    distance_q16_pc=1000.0 * float(quant[row, 0]),
                    distance_q50_pc=1000.0 * float(quant[row, 1]),
                    distance_q84_pc=1000.0 * float(quant[row, 2]),
                    precision=str(precision[row]),
                )

        def barycentric(cid: str, motion: Motion, epoch: str) -> Motion:
            """The motion of a component resolved by an inner pair (one unresolved solution of the blend),
            referred to the pair's barycentre: the photocentre's orbital velocity subtracted when a visual
            orbit is published, else its rms added to the errors (:mod:`dossier.astro.hierarchy`)."""
            from dataclasses import replace

            from dossier.astro import hierarchy, stars as stellar

            inner = next((p for p in self.system.pairs if p.parent == cid), None)
            if inner is None:
                return motion
            names = " and ".join(inner.members)
            phys = [comps[m].physical if m in comps else None for m in inner.members]
            if any(ph is None or ph.mass is None for ph in phys):
                return replace(motion, how=f"the photocentre of {names} (unresolved pair {inner.id}): "
                                           "not referred to its barycentre, for want of both masses")
            (m1, s1), (m2, s2) = ((ph.mass.value, ph.mass.uncertainty) for ph in phys)
            common = [b for b in ("V", *sorted(comps[inner.members[0]].magnitudes)) if
                      b in comps[inner.members[0]].magnitudes and b in comps[inner.members[1]].magnitudes]
            if common:
                a, b = (comps[m].magnitudes[common[0]] for m in inner.members)
                dm, sdm, light = b.value - a.value, math.hypot(a.uncertainty, b.uncertainty), f"Δm({common[0]})"
            else:  # bolometric contrast on the main sequence (Tout et al. 1996): an approximation
                lum = stellar.zams_luminosity(np.array([m1, m2]))
                dm, sdm, light = float(-2.5 * np.log10(lum[1] / lum[0])), 0.5, "Δm from main-sequence luminosities"
            t = julian_year(epoch)
            plx = combined.get(cid)
            orbit = next((o for o in self.system.orbits if o.pair == inner.id and o.is_visual), None)
            any_orbit = next((o for o in self.system.orbits if o.pair == inner.id), None)
            if any_orbit is not None:
                period = any_orbit.period_years
            elif plx is not None and plx.mean > 0 and inner.measures:
                rho = max(inner.measures, key=lambda m: julian_year(m.epoch)).rho.value
                period = float(np.sqrt((rho * 1000.0 / plx.mean) ** 3 / (m1 + m2)))  # a ≈ ρ d, Kepler's third law
            else:
                period = None
            if period is not None and period < hierarchy.ASTROMETRIC_SPAN_YR:
                return replace(motion, how=f"the photocentre of {names}: their {fmt_sig(period, 3)} yr orbit averages out of a "
                                           "multi-year astrometric solution; not corrected")
            if orbit is not None:
                el = tuple((float(x.value), float(x.uncertainty)) for x in (
                    orbit.periastron_time, orbit.eccentricity, orbit.semimajor_axis, orbit.inclination, orbit.node,
                    orbit.periastron_argument))
                elements = ((orbit.period_years, orbit.period_years_error), *el)
                seed = seed_from(cid, inner.id, t, m1, s1, m2, s2, dm, sdm, *np.ravel(elements))
                ve, vn, se, sn = hierarchy.photocentre_velocity_draws(np.random.default_rng(seed), 4000, t, (m1, s1),
                                                                      (m2, s2), (dm, sdm), elements)
                ex, ey = math.hypot(motion.pmra_error, se), math.hypot(motion.pmdec_error, sn)
                return replace(motion, pmra=motion.pmra - ve, pmdec=motion.pmdec - vn, pmra_error=ex, pmdec_error=ey,
                               correlation=motion.correlation * motion.pmra_error * motion.pmdec_error / (ex * ey),
                               how=f"referred to the barycentre of {names}: the photocentre's orbital velocity "
                                   f"({fmt_signed(ve, 2)}, {fmt_signed(vn, 2)}) ± ({fmt_fixed(se, 2)}, {fmt_fixed(sn, 2)}) mas/yr at J{fmt_fixed(t, 2)} from the published "
                                   f"orbit of {inner.id} ({orbit.ref}, masses and {light}) was subtracted")
            if period is None or plx is None or plx.mean <= 0:
                return replace(motion, how=f"the photocentre of the unresolved pair {inner.id}: not referred to its "
                                           "barycentre, for want of a period or separation and a parallax")
            a_mas = float(np.cbrt(period**2 * (m1 + m2))) * plx.mean
            v = float(hierarchy.rms_photocentre_velocity(hierarchy.photocentre_factor(m1, m2, dm), a_mas, period))
            ex, ey = math.hypot(motion.pmra_error, v), math.hypot(motion.pmdec_error, v)
            return replace(motion, pmra_error=ex, pmdec_error=ey,
                           correlation=motion.correlation * motion.pmra_error * motion.pmdec_error / (ex * ey),
                           how=f"the photocentre of {names} moves about their barycentre: its rms orbital velocity "
                               f"{fmt_fixed(v, 2)} mas/yr per axis (P ≈ {fmt_sig(period, 3)} yr, masses and {light}) was added in "
                               "quadrature to the errors")

        out = {}
        for cid, comp in comps.items():
            pos = _best(comp.astrometry, lambda a: None if a.ra is None else -julian_year(a.epoch))
            mot = _best(comp.astrometry, lambda a: None if a.pmra is None else a.pmra.uncertainty**2 + a.pmdec.uncertainty**2)
            motion = None
            if mot is not None:
                motion = barycentric(cid, Motion(
                    mot.pmra.value, mot.pmdec.value, mot.pmra.uncertainty, mot.pmdec.uncertainty, _ref(mot.pmra, mot),
                    float("nan") if mot.correlations is None or mot.correlations.pmra_pmdec is None
                    else mot.correlations.pmra_pmdec), mot.epoch)
            phys = comp.physical
            mass = None
            if phys is not None and phys.mass is not None:
                mass = phys.mass if phys.mass.ref else phys.mass.model_copy(update={"ref": phys.ref})
            gamma = self.systemic_velocity(cid)
            out[cid] = StarFacts(
                id=cid,
                parallax=combined.get(cid),
                position=None if pos is None else Position(pos.ra.value, pos.dec.value, julian_year(pos.epoch), _ref(pos.ra, pos)),
                motion=motion,
                radial_velocity=gamma if gamma is not None else comp.radial_velocity,
                rv_from_orbit=gamma is not None,
                mass=mass,
                magnitudes=dict(comp.magnitudes),
            )
        return out

    # -- pairs --------------------------------------------------------------

    def representative(self, member: str) -> str:
        """The component that stands for a member in astrometry (a pair's primary)."""
        seen = set()
        while member in self.pair_ids and member not in self.system.components:
            if member in seen:  # pragma: no cover - the loader refuses cycles of ids
                break
            seen.add(member)
            member = self.pair_ids[member].members[0]
        return member

    def member_mass(self, member: str) -> tuple[float, float, tuple[str, ...]] | None:
        """Mass (value, uncertainty, refs) of a member; a pair's is the sum of its members'."""
        if member in self.system.components:
            m = self.stars[member].mass
            return None if m is None else (m.value, m.uncertainty, (m.ref,) if m.ref else ())
        pair = self.pair_ids.get(member)
        if pair is None:
            return None
        parts = [self.member_mass(m) for m in pair.members]
        if any(p is None for p in parts):
            return None
        return (
            sum(p[0] for p in parts),
            math.sqrt(sum(p[1] ** 2 for p in parts)),
            tuple(r for p in parts for r in p[2]),
        )

    def pair_mass(self, pair_id: str) -> tuple[float, float, tuple[str, ...]] | None:
        return self.member_mass(pair_id)

    @cached_property
    def pairs(self) -> dict[str, PairFacts]:
        out = {}
        for pair in self.system.pairs:
            first, second = (self.representative(m) for m in pair.members)
            a, b = self.stars.get(first), self.stars.get(second)
            rho = theta = None
            how, refs = "", ()
            if a is not None and b is not None and a.position and b.position:
                ra2, dec2 = b.position.ra, b.position.dec
                if b.motion is not None and abs(b.position.jyear - a.position.jyear) > 1e-6:
                    ra2, dec2 = angles.propagate_linear(
                        ra2, dec2, b.motion.pmra, b.motion.pmdec, a.position.jyear - b.position.jyear
                    )
                r, t = angles.separation_pa(a.position.ra, a.position.dec, ra2, dec2)
                rho, theta = float(r), float(t)
                how = f"from the positions of {first} and {second} at epoch J{fmt_fixed(a.position.jyear, 2)}"
                refs = (a.position.ref, b.position.ref)
            elif pair.id in self.logs and (~self.logs[pair.id].flagged).any():
                log = self.logs[pair.id]
                k = int(np.flatnonzero(~log.flagged)[-1])
                rho, theta = float(log.rho[k]), float(log.theta[k])
                how = f"from the latest measure in the observing log ({log.measures[k].epoch})"
                refs = ("observing log",)
            elif pair.measures:
                latest = max(pair.measures, key=lambda m: julian_year(m.epoch))
                rho, theta = latest.rho.value, latest.theta.value
                how = f"from the latest measure of the pair ({latest.epoch})"
                refs = tuple(r for r in (latest.rho.ref or latest.ref,) if r)
            out[pair.id] = PairFacts(pair.id, first, second, rho, theta, how, refs)
        return out

    def pair_parallax(self, pair_id: str) -> tuple[float, float] | None:
        """Parallax (mas) of a pair: the inverse-variance mean of its members' (the best estimate if
        physical), or the first member's when the two disagree by more than 3σ; a pair whose members
        have none takes that of the component it resolves (its ``parent``)."""
        f = self.pairs[pair_id]
        values = [self.stars[m].parallax for m in (f.first, f.second) if self.stars[m].parallax is not None]
        parent = self.pair_ids[pair_id].parent
        if not values and parent is not None:
            # a close pair has no parallax of its own: it shares that of the component it resolves
            star = self.stars.get(self.representative(parent))
            if star is not None and star.parallax is not None:
                values = [star.parallax]
        if not values:
            return None
        if len(values) == 2 and abs(values[0].mean - values[1].mean) > 3 * math.hypot(
            values[0].error_inflated, values[1].error_inflated
        ):
            # the parallaxes disagree: a mean would be nobody's distance; use the first member's
            values = values[:1]
        w = np.array([1 / p.error_inflated**2 for p in values])
        x = np.array([p.mean for p in values])
        return float(np.sum(w * x) / np.sum(w)), float(1 / math.sqrt(np.sum(w)))

    def pair_distance_pc(self, pair_id: str) -> tuple[float, float, float] | None:
        """Distance of a pair (pc): 16, 50, 84 % points of the posterior from the pair parallax."""
        return self._pair_distances[pair_id]

    @cached_property
    def _pair_distances(self) -> dict[str, tuple[float, float, float] | None]:
        ids = list(self.pairs)
        plx = {pid: self.pair_parallax(pid) for pid in ids}
        known = [pid for pid in ids if plx[pid] is not None]
        out: dict[str, tuple[float, float, float] | None] = {pid: None for pid in ids}
        if known:
            q = distance.edsd_quantiles(np.array([plx[p][0] for p in known]), np.array([plx[p][1] for p in known]),
                                        self.length_scale_kpc, q=(0.16, 0.5, 0.84))
            for row, pid in enumerate(known):
                out[pid] = (1000.0 * float(q[row, 0]), 1000.0 * float(q[row, 1]), 1000.0 * float(q[row, 2]))
        return out


# ----------------------------------------------------------------------------
# The observing log, reduced once per pair


@dataclass(frozen=True)
class PairLog:
    """A pair's observing log, reduced: every measure kept, flagged ones with their reason.

    Per measure (log order): ``t`` (Julian years), ``theta`` (deg, precessed to
    J2000), ``rho`` (″), their 1σ uncertainties (given, else the method's
    default), offsets ``x`` (north) and ``y`` (east) with ``sx``, ``sy``, and
    ``flagged``/``reasons`` from a robust fit. Per night (unflagged measures
    only): weighted means ``mt, mx, my, msx, msy`` and counts ``mn``. Fits of
    the nightly means: ``linear`` and ``quadratic`` (None when too few
    nights), and their ``curvature`` test.
    """

    measures: tuple
    t: np.ndarray
    theta: np.ndarray
    rho: np.ndarray
    sigma_theta: np.ndarray
    sigma_rho: np.ndarray
    x: np.ndarray
    y: np.ndarray
    sx: np.ndarray
    sy: np.ndarray
    flagged: np.ndarray
    reasons: tuple
    mt: np.ndarray
    mx: np.ndarray
    my: np.ndarray
    msx: np.ndarray
    msy: np.ndarray
    mn: np.ndarray
    linear: object | None
    quadratic: object | None
    curvature: object | None

    @property
    def span_years(self) -> float:
        return float(self.mt.max() - self.mt.min()) if self.mt.size else 0.0

    def is_curved(self, p_threshold: float) -> bool:
        """Is the path curved: the curvature test's p-value below ``p_threshold`` (``[log] curvature_p``)?"""
        return self.curvature is not None and bool(self.curvature.p_value < p_threshold)


def reduce_log(measures: list, ra: float, dec: float, log_settings, model=None) -> PairLog:
    """Reduce one pair's measures (see :class:`PairLog`).

    ``model(t) -> (x, y)``, when given (a published orbit's ephemeris), is what
    outliers are flagged against; otherwise a robust quadratic (or straight)
    fit of the measures is.
    """
    from dossier.astro import reduction

    t_all = julian_years([m.epoch for m in measures])
    order = np.argsort(t_all, kind="stable")
    ms = [measures[k] for k in order]
    t = t_all[order]
    theta_raw = np.array([m.theta for m in ms])
    of_date = np.array([m.equinox == "date" for m in ms])
    theta = np.where(of_date, reduction.precess_theta(theta_raw, ra, dec, t, 2000.0), theta_raw)
    rho = np.array([m.rho for m in ms])
    defaults = dict(reduction.DEFAULT_METHOD_ERRORS)
    defaults.update({k: reduction.MethodErrors(v.theta_deg, v.rho_arcsec, v.rho_fraction, v.aperture_term)
                     for k, v in log_settings.method_errors.items()})
    st = np.empty(len(ms))
    sr = np.empty(len(ms))
    for k, m in enumerate(ms):  # per measure: methods differ row by row
        a, b = reduction.measure_sigmas(m.rho, np.nan if m.theta_error is None else m.theta_error,
                                        np.nan if m.rho_error is None else m.rho_error, m.method,
                                        np.nan if m.aperture_cm is None else m.aperture_cm, defaults)
        st[k], sr[k] = float(a), float(b)
    x, y, sx, sy = reduction.to_offsets(rho, theta, sr, st)
    flagged = np.zeros(len(ms), dtype=bool)
    reasons: list[str | None] = [None] * len(ms)
    n_epochs = len(np.unique(np.round(t, 3)))
    degree = 2 if n_epochs >= 6 else 1 if n_epochs >= 3 else 0
    if model is not None:
        mx_, my_ = model(t)
        flags, why = reduction.flag_outliers(x - mx_, y - my_, sx, sy, threshold=log_settings.outlier_threshold)
        flagged = np.asarray(flags, dtype=bool)
        reasons = [r.replace("fitted motion", "published orbit") if f else None for r, f in zip(why, flagged)]
    elif degree:
        robust = reduction.fit_motion_robust(t, x, y, sx, sy, degree, threshold=log_settings.outlier_threshold)
        flagged = np.asarray(robust.flags, dtype=bool)
        reasons = [r if f else None for r, f in zip(robust.reasons, flagged)]
    keep = ~flagged
    window = log_settings.group_window_days / 365.25
    if keep.any():
        mt, mx, my, msx, msy, mn, _ = reduction.group_means(t[keep], x[keep], y[keep], sx[keep], sy[keep], window)
    else:
        mt = mx = my = msx = msy = mn = np.array([])
    linear = quadratic = curvature = None
    if len(mt) >= 3:
        linear = reduction.fit_motion(mt, mx, my, msx, msy, 1)
        if len(mt) >= 5:
            quadratic = reduction.fit_motion(mt, mx, my, msx, msy, 2, t0=linear.t0)
            curvature = reduction.curvature_test(linear, quadratic)
    return PairLog(tuple(ms), t, theta, rho, st, sr, x, y, sx, sy, flagged, tuple(reasons),
                   np.asarray(mt), np.asarray(mx), np.asarray(my), np.asarray(msx), np.asarray(msy), np.asarray(mn),
                   linear, quadratic, curvature)


# ----------------------------------------------------------------------------
# Radial-velocity series, analysed once per pair


@dataclass(frozen=True)
class RVOrbit:
    """The radial-velocity series of a pair's primary and what it shows.

    ``status`` is one of ``RV_STATUSES``: ``constant`` / ``possibly variable``
    (the χ² test of ``variability``), ``variable, too few velocities`` (fewer
    than the orbit needs), ``variable, period not determined`` (the search ran
    but a gate failed: ``solution.reasons``) or ``orbit found``. ``solution``
    is the :class:`dossier.astro.spectro.OrbitSolution` whenever the search
    ran; ``fit`` its maximum-likelihood orbit (per-instrument γ, jitter),
    ``posterior`` its emcee summary, ``periodogram`` its periodogram.
    ``detected`` when the status is ``orbit found``. ``jitter`` is the jitter
    expected for the star's stage (km/s), used in the variability test and as
    the prior's median.
    """

    pair: str
    star: str
    jd: np.ndarray
    v: np.ndarray
    sigma: np.ndarray
    refs: tuple
    instruments: tuple
    jitter: float
    variability: object
    solution: object | None
    status: str

    @property
    def detected(self) -> bool:
        return self.status == ORBIT_FOUND

    @property
    def fit(self):
        return None if self.solution is None else self.solution.fit

    @property
    def posterior(self):
        return None if self.solution is None else self.solution.posterior

    @property
    def periodogram(self):
        return None if self.solution is None else self.solution.periodogram

    @property
    def reference_instrument(self) -> int:
        """Index (in ``solution.instruments``) of the instrument whose γ is the systemic velocity: the one
        with most velocities, the first listed on a tie."""
        names = list(self.solution.instruments) if self.solution is not None else [""]
        counts = [sum(1 for x in self.instruments if (x or "") == n) for n in names]
        return int(np.argmax(counts))

    def offsets(self) -> np.ndarray:
        """Per velocity, its instrument's γ minus the reference instrument's (km/s; zeros without a fit)."""
        if self.fit is None:
            return np.zeros(len(self.v))
        names = list(self.solution.instruments)
        g = np.asarray(self.fit.gamma)
        idx = [names.index(x or "") for x in self.instruments]
        return g[idx] - g[self.reference_instrument]

    def epochs_by_ref(self) -> dict[str, list[float]]:
        out: dict[str, list[float]] = {}
        for jd, ref in zip(self.jd, self.refs):
            out.setdefault(ref, []).append(2000.0 + (float(jd) - 2451545.0) / 365.25)
        return out


ORBIT_FOUND = "orbit found"
RV_STATUSES = ("constant", "possibly variable", "variable, too few velocities", "variable, period not determined",
               ORBIT_FOUND)
GIANT_STAGES = frozenset({"giant", "core-helium-burning", "asymptotic-giant", "subgiant"})


def stage_jitter(stage: str | None, settings) -> float:
    """Jitter expected for an evolutionary stage (km/s), from the spectroscopic-orbit rule's settings."""
    if stage == "subgiant":
        return settings.subgiant_jitter_kms
    if stage in ("giant", "core-helium-burning"):
        return settings.giant_jitter_kms
    if stage == "asymptotic-giant":
        return settings.asymptotic_giant_jitter_kms
    return settings.jitter_kms


def analyse_rv(pair_id: str, star_id: str, series: list, stage: str | None, settings, cache=None,
               mass: tuple[float, float] | None = None) -> RVOrbit:
    """Variability test, period search, alias check, Keplerian fit and posterior of one star's RV series.

    ``mass`` is the primary's (value, 1σ) in M☉, for the minimum companion
    mass. The search (:func:`dossier.astro.spectro.solve_orbit`) is cached
    under every input and setting it uses.
    """
    from dossier.astro import spectro

    jd = julian_days([e.epoch for e in series])
    v = np.array([e.velocity.value for e in series])
    sigma = np.array([e.velocity.uncertainty for e in series])
    refs = tuple(e.velocity.ref or e.ref or "" for e in series)
    instruments = tuple(e.instrument or "" for e in series)
    jitter = stage_jitter(stage, settings)
    var = spectro.variability(v, sigma, jitter)
    n_inst = len(set(instruments))
    solution = None
    if var.log10_p >= settings.variable_log_p:
        status = "possibly variable" if var.log10_p < settings.possibly_variable_log_p else "constant"
    elif len(v) < max(settings.min_epochs, 8 + n_inst):  # 5 elements, the γs, the jitter and 2 dof
        status = "variable, too few velocities"
    else:
        options = dict(
            stage_jitter=jitter, jitter_prior_dex=settings.jitter_prior_dex,
            jitter_tolerance=settings.jitter_tolerance, min_period=settings.min_period_days,
            span_multiple=settings.max_period_spans, samples_per_peak=settings.samples_per_peak,
            n_peaks=settings.n_peaks, n_window_peaks=settings.n_window_peaks, max_fap=settings.max_fap,
            alias_delta_bic=settings.alias_delta_bic, min_log10_p_adequacy=settings.min_log10_p_adequacy,
            max_period_rel_error=settings.max_period_rel_error, min_dof=settings.min_dof,
            n_walkers=settings.n_walkers,
            n_steps=settings.n_steps, max_steps=settings.max_steps,
            m1=None if mass is None else float(mass[0]), sigma_m1=0.0 if mass is None else float(mass[1]),
        )

        def compute() -> dict:
            return spectro.solve_orbit(jd, v, sigma, instruments, **options).to_json()

        inputs = {"jd": jd.tolist(), "v": v.tolist(), "sigma": sigma.tolist(), "instruments": list(instruments),
                  "options": options}
        stored = (cache or Cache(None)).get_or_compute("rv-orbit-2", inputs, compute)
        solution = spectro.OrbitSolution.from_json(stored)
        status = ORBIT_FOUND if solution.found else "variable, period not determined"
    return RVOrbit(pair_id, star_id, jd, v, sigma, refs, instruments, jitter, var, solution, status)


# ----------------------------------------------------------------------------
# Visual orbits: posteriors fitted to the log, draws about a published orbit

#: Changes whenever the sampler or its priors change, so that cached posteriors are recomputed.
VISUAL_POSTERIOR_VERSION = "2"
VISUAL_POSTERIOR_SAMPLES = 1000


def visual_posterior(log: PairLog, parallax: tuple[float, float] | None, mass, cache=None):
    """The orbit posterior of one pair's nightly means (``orbit_posterior.posterior``), through the cache."""
    from dossier.astro import orbit_posterior as op

    if mass is not None and mass[0] > 0:
        # component masses come from models: their errors doubled, and at least 20 % (our choice)
        prior = op.MassPrior(float(mass[0]), max(2.0 * float(mass[1]), 0.2 * float(mass[0])), "normal")
    else:
        prior = op.BROAD_MASS_PRIOR
    plx, splx = (None, 0.0) if parallax is None else (float(parallax[0]), float(parallax[1]))
    inputs = {"t": log.mt.tolist(), "x": log.mx.tolist(), "y": log.my.tolist(), "sx": log.msx.tolist(),
              "sy": log.msy.tolist(), "parallax": plx, "sigma_parallax": splx, "mass_prior": list(prior),
              "n": VISUAL_POSTERIOR_SAMPLES, "version": VISUAL_POSTERIOR_VERSION}

    def compute() -> dict:
        post = op.posterior(log.mt, log.mx, log.my, log.msx, log.msy, parallax_mas=plx, sigma_parallax_mas=splx,
                            mass_prior=prior, n_samples=VISUAL_POSTERIOR_SAMPLES)
        return post.to_json()

    stored = (cache or Cache(None)).get_or_compute("visual-orbit-posterior", inputs, compute)
    return op.OrbitPosterior.from_json(stored)


def published_elements(orbit) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """(P, T, e, a, i, Omega, omega) of a published visual orbit and their 1-sigma uncertainties."""
    values = (orbit.period_years, orbit.periastron_time.value, orbit.eccentricity.value, orbit.semimajor_axis.value,
              orbit.inclination.value, orbit.node.value, orbit.periastron_argument.value)
    sigmas = (orbit.period_years_error, orbit.periastron_time.uncertainty, orbit.eccentricity.uncertainty,
              orbit.semimajor_axis.uncertainty, orbit.inclination.uncertainty, orbit.node.uncertainty,
              orbit.periastron_argument.uncertainty)
    return values, sigmas


def published_posterior(orbit, parallax: tuple[float, float] | None, n: int = VISUAL_POSTERIOR_SAMPLES):
    """Gaussian draws about a published visual orbit (``OrbitPosterior.from_published``), seeded from it."""
    from dossier.astro import orbit_posterior as op

    values, sigmas = published_elements(orbit)
    seed = seed_from("published", values, sigmas, orbit.ref, parallax)
    return op.OrbitPosterior.from_published(values, sigmas, n, seed,
                                            parallax_mas=None if parallax is None else parallax[0],
                                            sigma_parallax_mas=0.0 if parallax is None else parallax[1])
