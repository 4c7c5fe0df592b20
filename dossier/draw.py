"""Draw: the figures of one system, from what the rules derived (never recomputed physics)."""

from __future__ import annotations

from dataclasses import dataclass

from dossier.astro import angles
from dossier.engine import SystemResult


@dataclass(frozen=True)
class Figure:
    """One figure of a dossier page."""

    slug: str
    title: str
    caption: str
    svg: str


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
    from dossier.figures.parallax_chart import parallax_chart
    from dossier.figures.sky_chart import sky_chart

    figures = []
    sky = _sky_inputs(result)
    if sky is not None:
        stars, pairs, epoch = sky
        figures.append(Figure(
            "sky-chart",
            "Sky chart",
            f"Offsets of the components from {stars[0].id} at epoch J{epoch:.2f}, east to the left; arrows show "
            "each component's proper motion; lines join the pairs, styled by their status.",
            sky_chart(stars, pairs, title=f"{result.system.id}: sky chart"),
        ))
    rows = _parallax_rows(result)
    if rows:
        figures.append(Figure(
            "parallaxes",
            "Parallaxes",
            "Every parallax source per component with its 1σ error bar; the vertical line and band are the combined "
            "value and its uncertainty (widened by the Birge ratio when the sources disagree).",
            parallax_chart(rows, title=f"{result.system.id}: parallaxes"),
        ))
    return figures
