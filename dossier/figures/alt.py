"""Text alternatives of the figures, for screen-reader users (WCAG 2.1 success criterion 1.1.1).

Each function here writes the alternative text of one kind of figure from
the very structures its builder draws (never recomputing what the rules
derived): one to three plain sentences that say what kind of chart it is and
what the data show, with the key numbers, and name the system (and pair)
they belong to. The text is short (lists give way to "and N more" beyond
:data:`MAX_CHARS`), deterministic (same inputs, same text) and plain Unicode:
the SVG writer (:func:`dossier.figures.common.to_svg`) escapes it.

Numbers are written as the figure writes them where it labels them (pair
separations and angles, magnitude differences, values with their errors),
otherwise with :mod:`dossier.fmt`; probabilities always with
:func:`dossier.fmt.p_statement`.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common
from dossier.fmt import fmt_number, p_statement

if TYPE_CHECKING:  # pragma: no cover - typing only
    from dossier.figures.detection_map import Detection, SearchLimit
    from dossier.figures.hr_diagram import HRLine, HRStar
    from dossier.figures.motion_chart import MotionSeries
    from dossier.figures.neighbours_chart import MotionPoint
    from dossier.figures.orbit_chart import ChartCurve
    from dossier.figures.parallax_chart import ParallaxRow
    from dossier.figures.rv_chart import RVPoint
    from dossier.figures.sky_chart import ChartPair, ChartStar

MAX_CHARS = 400
"""Length the lists of a text alternative are kept within (the fixed words around them may add a little)."""

RV_TIME_ZERO_JD = 2400000.0
"""The RV chart's times are JD − 2400000 (its default time axis)."""

_STATUS_WORDS = {"bound": "bound", "co-moving": "co-moving", "optical": "optical",
                 "undetermined": "status undetermined"}
_CONTROL = re.compile(r"[\x00-\x1f\x7f\ufffe\uffff]")


def plain(text: str) -> str:
    """One line of text: control characters and runs of white space become one space."""
    return " ".join(_CONTROL.sub(" ", text).split())


# --- shared pieces -----------------------------------------------------------------


def _count(n: int, noun: str, plural: str | None = None) -> str:
    """'1 measure', '42 measures'."""
    return f"{n} {noun}" if n == 1 else f"{n} {plural or noun + 's'}"


def _listing(items: Sequence[str], budget: int, *, sep: str = "; ", more: str = "more") -> str:
    """Join ``items`` while the text stays within ``budget`` characters; the rest become 'and N more'.

    The first item is always kept.
    """
    kept: list[str] = []
    for i, item in enumerate(items):
        rest = len(items) - i - 1
        tail = len(f"{sep}and {rest} {more}") if rest else 0
        if kept and len(sep.join([*kept, item])) + tail > budget:
            break
        kept.append(item)
    text = sep.join(kept)
    left = len(items) - len(kept)
    return f"{text}{sep}and {left} {more}" if left else text


def _names(items: Sequence[str], most: int = 6) -> str:
    """'A', 'A and B', 'A, B and C'; past ``most`` items, the last ones as 'N more'."""
    items = list(items)
    if len(items) > most:
        items = [*items[: most - 1], f"{len(items) - most + 1} more"]
    if len(items) <= 2:
        return " and ".join(items)
    return f"{', '.join(items[:-1])} and {items[-1]}"


def _with_error(value: float, error: float | None, unit: str = "") -> str:
    """'8.521 ± 0.033 mas' (decimals from the error), or the value alone when the error is unknown."""
    suffix = f" {unit}" if unit else ""
    if error is None or not math.isfinite(error) or error <= 0:
        return f"{fmt_number(value)}{suffix}"
    v, e = common.format_with_error(value, error)
    return f"{v} ± {e}{suffix}"


def _arcsec(value: float) -> str:
    return f"{common.format_number(value)}″"


def _year(t: float) -> str:
    return f"{t:.1f}"


def _theta_range(theta: Sequence[float]) -> str:
    """The smallest arc of position angle holding every θ.

    For example 'θ from 62° to 81°', or 'θ from 244° through 0° to 119°' when
    the measures surround north.
    """
    a = np.sort(np.mod(np.asarray(theta, dtype=float), 360.0))
    if a.size == 1 or float(a[-1] - a[0]) == 0.0:
        return f"θ {float(a[0]):.1f}°"
    gaps = np.diff(np.concatenate([a, a[:1] + 360.0]))
    k = int(np.argmax(gaps))  # the largest empty arc runs from a[k] to a[k + 1]
    start, end = float(a[(k + 1) % a.size]), float(a[k])
    span = 360.0 - float(gaps[k])
    decimals = 0 if span >= 10.0 else 1
    low, high = round(start, decimals), round(end, decimals)
    if start > end and low < 360.0 and high > 0.0:  # the arc crosses north
        return f"θ from {low:.{decimals}f}° through 0° to {high:.{decimals}f}°"
    if start > end:  # it only touches north once rounded
        low, high = (0.0, high) if low >= 360.0 else (low, 360.0)
    return f"θ from {low:.{decimals}f}° to {high:.{decimals}f}°"


def _value_range(values: Sequence[float], *, digits: int = 3) -> tuple[str, str]:
    """Lowest and highest value with enough significant figures to tell them apart (up to 6)."""
    low, high = float(np.min(values)), float(np.max(values))
    for d in range(digits, 7):
        a, b = fmt_number(low, d), fmt_number(high, d)
        if a != b or low == high:
            break
    return a, b


# --- sky and parallaxes --------------------------------------------------------------


def sky_chart(subject: str, stars: Sequence[ChartStar], pairs: Sequence[ChartPair]) -> str:
    """Sky chart: the centre star, each pair's separation, position angle and status.

    Parameters
    ----------
    subject : str
        The system id.
    stars, pairs : sequences of ChartStar and ChartPair
        As passed to :func:`dossier.figures.sky_chart.sky_chart` (the first
        star at the centre).
    """
    centre = stars[0].id
    items = []
    for pair in pairs:
        words = "at position angle" if not items else "at"
        items.append(f"{pair.second} {_arcsec(pair.rho_arcsec)} from {pair.first} {words} "
                     f"{pair.theta_deg:.1f}° (pair {pair.id}, {_STATUS_WORDS.get(pair.status, pair.status)})")
    if items:
        text = f"Sky chart of {subject}, centred on {centre}: {_listing(items, MAX_CHARS - 80, more='more pairs')}."
    else:
        text = f"Sky chart of {subject}: {_count(len(stars), 'star')} about {centre}, no pair with a separation."
    moving = [s.id for s in stars if s.pm_ra is not None and s.pm_dec is not None]
    if moving:
        text += " Arrows show proper motions."
    return plain(text)


def parallax_chart(subject: str, rows: Sequence[ParallaxRow]) -> str:
    """Parallax chart: each component's combined parallax with its uncertainty, and the source that deviates.

    Parameters
    ----------
    subject : str
        The system id.
    rows : sequence of ParallaxRow
        As passed to :func:`dossier.figures.parallax_chart.parallax_chart`.
    """
    items = []
    for row in rows:
        sources = _count(len(row.sources), "source")
        if row.combined is None:
            values = ", ".join(_with_error(s.parallax, s.error) for s in row.sources)
            items.append(f"{row.component} {values} mas, not combined" if values else f"{row.component} none measured")
            continue
        text = f"{row.component} {_with_error(row.combined, row.combined_error, 'mas')} from {sources}"
        odd = next((s for s in row.sources if s.ref == row.discordant_ref), None)
        widened = row.inflated_error is not None and (
            row.combined_error is None or not math.isclose(row.inflated_error, row.combined_error, rel_tol=1e-9))
        deviates = f"{odd.ref}, at {_with_error(odd.parallax, odd.error, 'mas')}, deviates" if odd else ""
        if widened:
            _, error = common.format_with_error(row.combined, row.inflated_error)
            text += f" (error widened to ± {error} mas" + (f" because {deviates})" if odd else ")")
        elif odd:
            text += f" ({deviates})"
        items.append(text)
    return plain(f"Parallax chart of {subject}: {_listing(items, MAX_CHARS - 30, more='more components')}.")


# --- the observing log ------------------------------------------------------------------


def _log_facts(series: MotionSeries) -> str:
    t = np.asarray(series.t, dtype=float)
    flagged = int(np.count_nonzero(np.asarray(series.flagged, dtype=bool)))
    rho_low, rho_high = _value_range(series.rho)
    return (f"{_count(len(t), 'measure')} from {_year(float(t.min()))} to {_year(float(t.max()))}"
            + (f" ({flagged} flagged)" if flagged else "")
            + f"; {_theta_range(series.theta)}, ρ from {rho_low}″ to {rho_high}″")


def _curvature(p_curvature: float | None, curved: bool) -> str:
    if p_curvature is None:
        return "Too few nights to test whether the path curves."
    if curved:
        return f"The path curves: a straight path is ruled out ({p_statement('p', p_curvature)})."
    return f"No significant curvature ({p_statement('p', p_curvature)}): the path is straight within the errors."


def relative_path(subject: str, pair: str, primary: str, secondary: str, series: MotionSeries,
                  curves: Sequence[ChartCurve], *, p_curvature: float | None, curved: bool) -> str:
    """Relative-path chart: number of measures, time span, θ and ρ ranges, whether the path curves, models drawn.

    Parameters
    ----------
    subject, pair : str
        The system and pair ids.
    primary, secondary : str
        The pair's members.
    series : MotionSeries
        The measures (θ, ρ, epochs, flags), as the θ and ρ chart gets them.
    curves : sequence of ChartCurve
        The models drawn over the measures.
    p_curvature : float or None
        p-value of the curvature test (None when there were too few nights).
    curved : bool
        Whether the figure treats the path as curved (draws the quadratic).
    """
    words = {"linear": "a straight line", "quadratic": "a curved (quadratic) path"}
    drawn = list(dict.fromkeys(words.get(c.kind, f"the {c.label}") for c in curves))
    text = (f"Path of {secondary} relative to {primary} in {subject} (pair {pair}): {_log_facts(series)}. "
            + _curvature(p_curvature, curved))
    if drawn:
        text += f" Drawn over the measures: {_names(drawn)}."
    return plain(text)


def motion(subject: str, pair: str, series: MotionSeries, *, p_curvature: float | None, curved: bool,
           residual_model: str | None) -> str:
    """θ and ρ against time: number of measures, time span, ranges, curvature, and the residuals' model.

    Parameters are as for :func:`relative_path`; ``residual_model`` is the
    label of the model the residual panels are computed against (or None).
    """
    text = f"θ and ρ against time for {subject} pair {pair}: {_log_facts(series)}. {_curvature(p_curvature, curved)}"
    if residual_model:
        text += f" Residuals against the {residual_model}."
    return plain(text)


def ephemeris(subject: str, pair: str, prediction, *, source: str, start: float) -> str:
    """Ephemeris chart: the predicted θ and ρ at the start and end of the span, with their 68 % intervals.

    ``prediction`` is a :class:`dossier.ephemerides.Prediction`; ``start``
    is the epoch from which the coming years are described.
    """
    k0 = int(np.searchsorted(prediction.t, start))
    k0 = min(k0, len(prediction.t) - 1)
    parts = []
    for k in (k0, len(prediction.t) - 1):
        th, rh = prediction.theta[:, k], prediction.rho[:, k]
        parts.append(f"in {_year(float(prediction.t[k]))} θ = {th[2] % 360:.1f}° ({th[1] % 360:.1f}° to "
                     f"{th[3] % 360:.1f}°) and ρ = {_arcsec(float(rh[2]))} ({_arcsec(float(rh[1]))} to "
                     f"{_arcsec(float(rh[3]))})")
    return plain(f"Predicted position of {subject} pair {pair} from the {source}, with the central 68 % of "
                 f"{prediction.samples} sampled orbits: {parts[0]}; {parts[1]}.")


# --- radial velocities and claims ----------------------------------------------------------


def rv_chart(subject: str, pair: str, star: str, points: Sequence[RVPoint], *,
             period: tuple[float, float] | None, semi_amplitude: tuple[float, float] | None) -> str:
    """Radial-velocity chart: number of velocities and their span, and the fitted period and semi-amplitude.

    Parameters
    ----------
    subject, pair, star : str
        The system, the pair, and the star whose velocities these are.
    points : sequence of RVPoint
        As passed to :func:`dossier.figures.rv_chart.rv_chart` (times JD − 2400000).
    period, semi_amplitude : (float, float) or None
        The fitted orbit's period (d) and semi-amplitude (km/s) with their
        1-sigma errors; None when no orbit is drawn.
    """
    t = np.asarray([p.t for p in points], dtype=float)
    years = 2000.0 + (t + RV_TIME_ZERO_JD - 2451545.0) / 365.25  # J2000.0 = JD 2451545.0, Julian years
    v_low, v_high = _value_range([p.v for p in points])
    sources = len({(p.instrument, p.ref) for p in points})
    count = _count(len(points), "velocity", "velocities")
    text = (f"Radial-velocity chart of {star} in {subject} (pair {pair}): {count}"
            f" from {_count(sources, 'source')} between {_year(float(years.min()))} and {_year(float(years.max()))}"
            f", ranging from {v_low} to {v_high} km/s")
    if period is not None and semi_amplitude is not None:
        text += (f". The fitted Keplerian orbit has period {_with_error(*period, 'd')} and semi-amplitude "
                 f"{_with_error(*semi_amplitude, 'km/s')}; a second panel folds the velocities on that period.")
    else:
        text += "; no orbit is drawn."
    return plain(text)


def periodogram(subject: str, pair: str, star: str, period: Sequence[float], *, best_period: float | None,
                fap: float | None) -> str:
    """Periodogram: the range of trial periods, the best period and its false-alarm probability."""
    low, high = min(period), max(period)
    text = (f"Periodogram of the radial velocities of {star} in {subject} (pair {pair}), trial periods from "
            f"{fmt_number(low, 3)} to {fmt_number(high, 3)} d")
    if best_period is None:
        return plain(text + ": no peak is marked.")
    text += f": the highest peak is at {fmt_number(best_period)} d"
    if fap is not None:
        text += f", {p_statement('false-alarm probability', fap)}"
    return plain(text + ".")


def _mag(value: float) -> str:
    """As the detection map writes magnitudes: 6.0, 3.25."""
    text = f"{value:.2f}"
    return text[:-1] if text.endswith("0") else text


def detection_map(subject: str, detections: Sequence[Detection], limits: Sequence[SearchLimit]) -> str:
    """Detection map: each claimed detection (separation, magnitude difference) and each search's reach."""
    from dossier.figures.detection_map import limits_containing

    found = []
    for d in detections:
        text = f"{d.companion} claimed at {d.rho:g}″"
        if d.delta_mag is not None:
            text += f", magnitude difference {_mag(d.delta_mag)}" + (f" in {d.band}" if d.band else "")
        text += f" ({d.method}, {d.epoch})"
        inside = [limits[i] for i in limits_containing(d, limits)]
        if inside:
            text += ", inside the reach of the " + _names([f"{s.method} search of {s.epoch}" for s in inside])
        found.append(text)
    searched = [f"the {s.method} search of {s.epoch} saw nothing from {s.rho_min:g}″ to {s.rho_max:g}″ down to "
                f"magnitude difference {_mag(s.contrast)}" + (f" in {s.band}" if s.band else "") for s in limits]
    text = (f"Detection map of {subject}, separation against magnitude difference: "
            f"{_count(len(detections), 'claimed detection')} and {_count(len(limits), 'search', 'searches')} "
            "without detection.")
    if found:
        text += f" {_listing(found, (MAX_CHARS - len(text)) // 2 if searched else MAX_CHARS - len(text))}."
    if searched:
        listed = _listing(searched, max(80, MAX_CHARS - len(text) - 2), more="more searches")
        text += f" T{listed[1:]}."
    return plain(text)


# --- the stars ----------------------------------------------------------------------------


def hr_diagram(subject: str, stars: Sequence[HRStar], lines: Sequence[HRLine]) -> str:
    """HR diagram: each star's effective temperature and luminosity, and the reference lines drawn."""
    items = []
    for s in stars:
        stage = f" ({s.label_extra})" if s.label_extra else ""
        items.append(f"{s.id} at {s.teff:.0f} K and {fmt_number(s.luminosity, 3)} solar luminosities{stage}")
    kinds = {line.kind for line in lines}
    drawn = [words for kind, words in (("zams", "the zero-age main sequence"),
                                       ("isochrone", "lines of equal main-sequence lifetime")) if kind in kinds]
    head = f"HR diagram of {subject}, luminosity against effective temperature"
    if drawn:
        head += f", with {_names(drawn)}"
    return plain(f"{head}: {_listing(items, MAX_CHARS - len(head) - 3, more='more stars')}.")


def neighbours_chart(subject: str, points: Sequence[MotionPoint], *, velocities: int = 0) -> str:
    """Neighbours chart: the system's proper motion and which neighbours share its space motion.

    Parameters
    ----------
    subject : str
        The system id.
    points : sequence of MotionPoint
        As passed to :func:`dossier.figures.neighbours_chart.neighbours_chart`.
    velocities : int
        Number of stars in the U, V panel (0 when there is none).
    """
    own = next(p for p in points if p.is_system)
    east = f"{fmt_number(abs(own.pmra), 3)} mas/yr {'east' if own.pmra >= 0 else 'west'}"
    north = f"{fmt_number(abs(own.pmdec), 3)} mas/yr {'north' if own.pmdec >= 0 else 'south'}"
    text = f"Proper-motion chart of {subject}: {own.id} moves {east} and {north}"
    others = [p for p in points if not p.is_system]
    share = [p.id for p in others if p.shares_motion is True]
    apart = [p.id for p in others if p.shares_motion is False]
    unjudged = [p.id for p in others if p.shares_motion is None]
    said = []
    if share:
        said.append(f"{_names(share)} {'shares' if len(share) == 1 else 'share'} its space motion")
    if apart:
        said.append(f"{_names(apart)} {'does' if len(apart) == 1 else 'do'} not"
                    + ("" if share else " share its space motion"))
    if unjudged:
        said.append(f"{_names(unjudged)} {'is' if len(unjudged) == 1 else 'are'} not judged")
    text += "; " + ("; ".join(said) if said else "no neighbour is compared") + "."
    if velocities:
        text += f" A second panel shows U against V for {_count(velocities, 'star')}."
    return plain(text)
