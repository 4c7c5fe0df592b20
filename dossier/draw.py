"""Draw: the figures of one system, from what the rules derived (never recomputed physics)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dossier.astro import angles
from dossier.engine import SystemResult


@dataclass(frozen=True)
class Figure:
    """One figure of a dossier page.

    ``alt`` is its text alternative for screen readers (WCAG 2.1 SC 1.1.1):
    one to three plain sentences, written from the data the figure plots
    (:mod:`dossier.figures.alt`), and also carried by the SVG itself as its
    ``aria-label`` and ``<title>``. Plain text: escape it where it is used.
    """

    slug: str
    title: str
    caption: str
    svg: str
    alt: str


def _sky_inputs(result: SystemResult):
    from dossier.figures.sky_chart import ChartPair, ChartStar

    facts = result.facts
    placed = {sid: s for sid, s in facts.stars.items() if s.position is not None}
    if len(placed) < 2:
        return None
    origin = next(iter(placed.values()))
    assert origin.position is not None
    stars = []
    for sid, star in placed.items():
        pos = star.position
        assert pos is not None
        ra, dec = pos.ra, pos.dec
        if star.motion is not None and abs(pos.jyear - origin.position.jyear) > 1e-6:
            ra, dec = angles.propagate_linear(ra, dec, star.motion.pmra, star.motion.pmdec, origin.position.jyear - pos.jyear)
        east, north = angles.tangent_offsets(origin.position.ra, origin.position.dec, ra, dec)
        mags = star.magnitudes
        mag = next(iter(mags.values())).value if mags else None
        stars.append(ChartStar(sid, float(east), float(north),
                               star.motion.pmra if star.motion else None, star.motion.pmdec if star.motion else None, mag))
    pairs = []
    for pid, pf in facts.pairs.items():
        if pf.rho_arcsec is None or pf.first not in placed or pf.second not in placed or pf.first == pf.second:
            continue
        pairs.append(ChartPair(pid, pf.first, pf.second, pf.rho_arcsec, pf.theta_deg or 0.0, result.verdicts[pid].status))
    return stars, pairs, origin.position.jyear


def _parallax_rows(result: SystemResult):
    from dossier.figures.parallax_chart import ParallaxRow, ParallaxSource

    rows = []
    for sid, star in result.facts.stars.items():
        plx = star.parallax
        if plx is None:
            continue
        rows.append(ParallaxRow(
            component=sid,
            sources=[ParallaxSource(s.ref, s.value, s.error, s.epoch) for s in plx.sources],
            combined=plx.mean,
            combined_error=plx.error,
            inflated_error=plx.error_inflated,
            discordant_ref=plx.discordant if plx.dof >= 1 and plx.birge_ratio > 1 else None,
        ))
    return rows


def draw_system(result: SystemResult) -> list[Figure]:
    """The figures of one system, in page order; a figure without data is left out."""
    from dossier.figures import alt
    from dossier.figures.parallax_chart import parallax_chart
    from dossier.figures.sky_chart import sky_chart

    sid = result.system.id
    figures = []
    sky = _sky_inputs(result)
    if sky is not None:
        stars, pairs, epoch = sky
        text = alt.sky_chart(sid, stars, pairs)
        figures.append(Figure(
            "sky-chart",
            "Sky chart",
            f"Offsets of the components from {stars[0].id} at epoch J{epoch:.2f}, east to the left; arrows show "
            "each component's proper motion; lines join the pairs, styled by their status.",
            sky_chart(stars, pairs, title=f"{sid}: sky chart", alt=text),
            text,
        ))
    rows = _parallax_rows(result)
    if rows:
        text = alt.parallax_chart(sid, rows)
        figures.append(Figure(
            "parallaxes",
            "Parallaxes",
            "Every parallax source per component with its 1σ error bar; the vertical line and band are the combined "
            "value and its uncertainty (widened by the Birge ratio when the sources disagree).",
            parallax_chart(rows, title=f"{sid}: parallaxes", alt=text),
            text,
        ))
    return figures


def _curved(result: SystemResult, log) -> bool:
    """Is the path drawn (and described) as curved: the one threshold the rules use, ``[log] curvature_p``."""
    return log.is_curved(result.facts.settings.log.curvature_p)


def _log_models(result: SystemResult, pair_id: str, log) -> list[tuple[str, str, np.ndarray, np.ndarray, np.ndarray]]:
    """(label, kind, t, x, y) of the model paths drawn over a pair's log: straight line, quadratic, orbit."""
    from dossier.astro import orbit as orbits

    lo, hi = float(log.t.min()), float(log.t.max())
    pad = 0.05 * max(hi - lo, 1.0)
    t = np.linspace(lo - pad, hi + pad, 400)
    models = []
    if log.linear is not None:
        x, y, _, _ = log.linear.predict(t)
        models.append(("straight line (as an optical pair moves)", "linear", t, x, y))
    if log.quadratic is not None and _curved(result, log):
        x, y, _, _ = log.quadratic.predict(t)
        models.append(("quadratic (curved path)", "quadratic", t, x, y))
    orbit = result.facts.visual_orbit(pair_id)
    if orbit is not None:
        el = (orbit.period_years, orbit.periastron_time.value, orbit.eccentricity.value, orbit.semimajor_axis.value,
              orbit.inclination.value, orbit.node.value, orbit.periastron_argument.value)
        t_orbit = np.linspace(lo - pad, max(hi + pad, lo - pad + el[0]), 800)  # the data span, and a whole period
        x, y = orbits.ephemeris_xy(t_orbit, *el)
        models.append((f"published orbit ({orbit.ref})", "orbit", t_orbit, x, y))
    fitted = next((a for a in result.for_subject(pair_id) if a.rule == "orbit-fit" and a.quantity("orbit_P")), None)
    if fitted is not None:
        el = tuple(fitted.quantity(f"orbit_{k}").value for k in ("P", "T", "e", "a", "i", "node", "omega"))
        t_orbit = np.linspace(lo - pad, max(hi + pad, lo - pad + el[0]), 800)
        x, y = orbits.ephemeris_xy(t_orbit, *el)
        models.append(("orbit fitted to the log", "orbit", t_orbit, x, y))
    return models


def draw_log(result: SystemResult, pair_id: str) -> list[Figure]:
    """The apparent relative orbit and θ, ρ against time of one pair's observing log."""
    from dossier.astro import reduction
    from dossier.figures import alt
    from dossier.figures.motion_chart import ModelCurve, MotionSeries, motion_chart
    from dossier.figures.orbit_chart import ChartCurve, ChartMeasure, orbit_chart

    log = result.facts.logs.get(pair_id)
    if log is None or len(log.t) < 2:
        return []
    pair = result.facts.pair_ids[pair_id]
    measures = [ChartMeasure(float(t), float(x), float(y), bool(f), r)
                for t, x, y, f, r in zip(log.t, log.x, log.y, log.flagged, log.reasons)]
    models = _log_models(result, pair_id, log)
    curves = [ChartCurve(label, tuple(map(float, x)), tuple(map(float, y)), kind) for label, kind, _, x, y in models]
    series = MotionSeries(tuple(map(float, log.t)), tuple(map(float, log.theta)), tuple(map(float, log.rho)),
                          tuple(map(float, log.sigma_theta)), tuple(map(float, log.sigma_rho)),
                          tuple(bool(f) for f in log.flagged))
    model_curves = []
    has_orbit = any(kind == "orbit" for _, kind, _, _, _ in models)
    for label, kind, t, x, y in models:
        if has_orbit and kind != "orbit":
            continue  # beside an orbit, a line or parabola in θ and ρ only obscures the panels
        rho, theta = reduction.to_polar(x, y)
        model_curves.append(ModelCurve(label, tuple(map(float, t)), tuple(map(float, theta)),
                                       tuple(map(float, rho)), kind))
    residual = next((c.label for c in model_curves if c.kind == "orbit"), None) or \
        next((c.label for c in model_curves if c.kind == "linear"), None)
    first, second = pair.members
    sid = result.system.id
    p_curvature = log.curvature.p_value if log.curvature is not None else None
    path_alt = alt.relative_path(sid, pair_id, first, second, series, curves, p_curvature=p_curvature,
                                 curved=_curved(result, log))
    motion_alt = alt.motion(sid, pair_id, series, p_curvature=p_curvature, curved=_curved(result, log),
                            residual_model=residual)
    return [
        Figure(f"orbit-{pair_id}", f"Relative path of {pair_id}",
               f"Measures of {second} relative to {first} (θ precessed to J2000), coloured by epoch, east to the "
               "left; flagged measures are open and listed in the log table; curves are the models weighed.",
               orbit_chart(measures, curves, title=f"{sid} {pair_id}: relative path", primary=first,
                           secondary=second, alt=path_alt),
               path_alt),
        Figure(f"motion-{pair_id}", f"θ and ρ of {pair_id} against time",
               "Position angle and separation of every measure with its 1σ uncertainty (stated, else the method's "
               f"default), and residuals O−C against the {residual or 'model'}.",
               motion_chart(series, model_curves, title=f"{sid} {pair_id}: θ and ρ", residual_model=residual,
                            alt=motion_alt),
               motion_alt),
    ]


EPHEMERIS_YEARS = 30.0
"""Years after a pair's latest measure that its ephemeris chart and table cover."""


def ephemeris_span(result: SystemResult, pair_id: str) -> tuple[float, float]:
    """(start, end) in Julian years of a pair's ephemeris: from its latest measure (else the system's) onwards.

    Built from the evidence alone, never from the clock, so that a rebuild is
    byte for byte the same.
    """
    log = result.facts.logs.get(pair_id)
    if log is not None and len(log.t):
        start = float(log.t.max())
    else:
        seen = [float(lg.t.max()) for lg in result.facts.logs.values() if len(lg.t)]
        start = max(seen) if seen else 2000.0
    return start, start + EPHEMERIS_YEARS


def draw_ephemeris(result: SystemResult, pair_id: str) -> list[Figure]:
    """Predicted θ and ρ of one pair for the years after its latest measure, with 68 % and 95 % bands."""
    from dossier.ephemerides import describe, predict
    from dossier.figures import alt
    from dossier.figures.ephemeris_chart import ephemeris_chart

    posterior = result.facts.ephemeris_posterior(pair_id)
    if posterior is None:
        return []
    start, end = ephemeris_span(result, pair_id)
    log = result.facts.logs.get(pair_id)
    measures = []
    first = start - 10.0
    if log is not None:
        keep = (~log.flagged) & (log.t >= start - 10.0)
        measures = [(float(t), float(th), float(r), float(st), float(sr)) for t, th, r, st, sr in
                    zip(log.t[keep], log.theta[keep], log.rho[keep], log.sigma_theta[keep], log.sigma_rho[keep])]
        first = min([first, *(m[0] for m in measures)])
    prediction = predict(posterior, np.linspace(first, end, 241))
    sid = result.system.id
    source = describe(posterior)
    text = alt.ephemeris(sid, pair_id, prediction, source=source, start=start)
    return [Figure(f"ephemeris-{pair_id}", f"Predicted position of {pair_id}",
                   f"θ and ρ predicted from the {source} for {EPHEMERIS_YEARS:.0f} years after the latest measure: "
                   "the line is the median of the sampled orbits, the bands hold 68 % and 95 % of them; the "
                   "unflagged measures of the last ten years are drawn with their 1σ errors.",
                   ephemeris_chart(prediction, measures, title=f"{sid} {pair_id}: predicted position", source=source,
                                   latest=start, alt=text),
                   text)]


def draw_spectroscopic(result: SystemResult, pair_id: str) -> list[Figure]:
    """RV curve with the fitted orbit and residuals, and the periodogram, of one pair's primary."""
    from dossier.astro import spectro
    from dossier.figures import alt
    from dossier.figures.rv_chart import RVModel, RVPoint, periodogram_chart, rv_chart

    orbit = result.facts.rv_orbits.get(pair_id)
    if orbit is None:
        return []
    # each instrument's fitted zero point is moved onto the reference instrument's before plotting
    shift = orbit.offsets() if orbit.detected else np.zeros(len(orbit.v))
    points = [RVPoint(float(t) - 2400000.0, float(v - d), float(s), inst or None, ref or None)
              for t, v, d, s, inst, ref in zip(orbit.jd, orbit.v, shift, orbit.sigma, orbit.instruments, orbit.refs)]
    model = None
    elements = {}
    if orbit.fit is not None and orbit.detected:
        f = orbit.fit
        t = np.linspace(orbit.jd.min() - 0.05 * np.ptp(orbit.jd), orbit.jd.max() + 0.05 * np.ptp(orbit.jd), 1500)
        v = spectro.rv_model(t, f.P, f.K, f.e, f.omega, f.T, f.gamma[orbit.reference_instrument])
        model = RVModel(tuple(map(float, t - 2400000.0)), tuple(map(float, v)), "fitted Keplerian orbit",
                        float(f.P), float(f.T) - 2400000.0)
        # best fit ± the posterior's 68 % half-width
        elements = {"period": (float(f.P), float(f.sigma_P)), "semi_amplitude": (float(f.K), float(f.sigma_K))}
    sid = result.system.id
    rv_alt = alt.rv_chart(sid, pair_id, orbit.star, points, period=elements.get("period"),
                          semi_amplitude=elements.get("semi_amplitude"))
    figures = [Figure(f"rv-{pair_id}", f"Radial velocities of {orbit.star}",
                      f"Velocities of {orbit.star} against time and folded on the fitted period, with the Keplerian "
                      "orbit and the residuals; markers by instrument and source; each instrument's fitted zero "
                      "point is moved onto that of the instrument with most velocities.",
                      rv_chart(points, model, title=f"{sid} {orbit.star}: radial velocities", alt=rv_alt),
                      rv_alt)]
    if orbit.periodogram is not None:
        freq, power, best, fap = orbit.periodogram
        period = tuple(map(float, 1.0 / np.asarray(freq)))
        fap = float(fap) if np.isfinite(fap) else None
        pg_alt = alt.periodogram(sid, pair_id, orbit.star, period, best_period=float(best), fap=fap)
        figures.append(Figure(f"periodogram-{pair_id}", f"Periodogram of {orbit.star}",
                              "Lomb–Scargle power against trial period; the best period is marked with its "
                              "false-alarm probability.",
                              periodogram_chart(period, tuple(map(float, power)), best_period=float(best), fap=fap,
                                                title=f"{sid} {orbit.star}: periodogram", alt=pg_alt),
                              pg_alt))
    return figures


def draw_detections(result: SystemResult) -> list[Figure]:
    """Separation against contrast: every imaging claim and every search's sensitivity."""
    from dossier.figures import alt
    from dossier.figures.detection_map import Detection, SearchLimit, detection_map

    system = result.system
    claims = [c for c in system.claims if c.rho is not None]
    if not claims and not system.non_detections:
        return []
    detections = [Detection(c.companion, c.method, c.epoch, c.rho.value, c.delta_mag.value if c.delta_mag else None,
                            c.band, c.ref) for c in claims]
    limits = [SearchLimit(n.method, n.epoch, n.rho_range[0], n.rho_range[1], n.contrast, n.band, n.ref)
              for n in system.non_detections]
    text = alt.detection_map(system.id, detections, limits)
    return [Figure("detection-map", "Detections and searches",
                   "Separation against magnitude difference: each claimed detection, and for each search that found "
                   "nothing the region where a companion would have been seen.",
                   detection_map(detections, limits, title=f"{system.id}: detections and searches", alt=text),
                   text)]


def draw_stars(result: SystemResult) -> list[Figure]:
    """HR diagram of the components with the zero-age main sequence and points of equal lifetime."""
    from dossier.astro import stars
    from dossier.figures import alt
    from dossier.figures.hr_diagram import HRLine, HRStar, hr_diagram

    points = []
    for a in result.assessments:
        if a.rule != "luminosity":
            continue
        q = a.quantity("L_radius") or a.quantity("L_magnitude")
        phys = result.system.components[a.subject].physical
        if q is None or q.value is None or phys is None or phys.teff is None:
            continue
        s = q.uncertainty or 0.0
        points.append(HRStar(a.subject, phys.teff.value, phys.teff.uncertainty, q.value, max(q.value - s, q.value / 10),
                             q.value + s, phys.stage))
    if not points:
        return []
    masses = np.geomspace(0.1, 30.0, 200)
    lum, rad = stars.zams_luminosity(masses), stars.zams_radius(masses)
    teff = 5772.0 * (lum / rad**2) ** 0.25  # Stefan–Boltzmann in IAU 2015 nominal units
    lines = [HRLine("zero-age main sequence (Tout et al. 1996)", tuple(map(float, teff)), tuple(map(float, lum)), "zams")]
    t_ms = stars.t_ms(masses)
    for target, text in ((100.0, "100 Myr"), (1000.0, "1 Gyr"), (10000.0, "10 Gyr")):
        k = int(np.argmin(np.abs(np.log(t_ms / target))))
        # schematic: a star of this mass brightens by about a factor 2 on the main sequence (common practice)
        lines.append(HRLine(f"main-sequence life {text} ({masses[k]:.2g} M☉)", (float(teff[k]), float(teff[k]) * 0.95),
                            (float(lum[k]), 2 * float(lum[k])), "isochrone"))
    text = alt.hr_diagram(result.system.id, points, lines)
    return [Figure("hr-diagram", "Hertzsprung–Russell diagram",
                   "Components with their temperature and luminosity (from radius and temperature where known, else "
                   "from magnitude and distance), the zero-age main sequence of Tout et al. 1996 at solar metallicity, "
                   "and, schematically, where stars whose main-sequence life lasts 100 Myr, 1 Gyr and 10 Gyr start.",
                   hr_diagram(points, lines, title=f"{result.system.id}: HR diagram", alt=text),
                   text)]


def draw_neighbours(result: SystemResult) -> list[Figure]:
    """Proper motions (and U, V) of the system's primary and its neighbours."""
    from dossier.figures import alt
    from dossier.figures.neighbours_chart import MotionPoint, neighbours_chart

    a = next((x for x in result.assessments if x.rule == "neighbours" and x.outcome != "insufficient"), None)
    if a is None:
        return []
    star = result.facts.stars[a.subject]
    points = [MotionPoint(a.subject, star.motion.pmra, star.motion.pmdec,
                          max(star.motion.pmra_error, star.motion.pmdec_error), True, None)]
    velocities = [(a.subject, a.quantity("U").value, a.quantity("V").value, a.quantity("U").uncertainty,
                   a.quantity("V").uncertainty)]
    for n in result.system.neighbours:
        pm, share = a.quantity(f"pm_{n.id}"), a.quantity(f"shares_{n.id}")
        if pm is None:
            continue
        shares = None if share is None or not np.isfinite(share.value) else bool(share.value)
        points.append(MotionPoint(n.id, pm.low, pm.high, pm.uncertainty, False, shares))
        u, v = a.quantity(f"U_{n.id}"), a.quantity(f"V_{n.id}")
        if u is not None and v is not None:
            velocities.append((n.id, u.value, v.value, u.uncertainty, v.uncertainty))
    text = alt.neighbours_chart(result.system.id, points, velocities=len(velocities))
    return [Figure("neighbours", "Motion of the neighbours",
                   "Proper motions of the system's primary and of its neighbours, coloured by whether they share its "
                   "space motion; right, the U and V velocities where radial velocities are known.",
                   neighbours_chart(points, title=f"{result.system.id}: neighbours", velocity_points=velocities,
                                    alt=text),
                   text)]
