"""Ephemeris chart: predicted position angle and separation of one pair for the coming years.

Two panels share the time axis: θ (degrees) on top, ρ (arcsec) below. Each
shows the median prediction of an orbit posterior as a solid line, the
central 68 % of the sampled orbits as a darker band and the central 95 % as
a lighter one (so the bands read in greyscale by their lightness), and the
latest measures of the log with their error bars, so that a reader sees at
once whether the orbit still runs through the data and how fast the
prediction loosens. θ is drawn on the branch of the median prediction (the
band of a prediction straddling north is continuous), with tick labels
modulo 360°, as on the motion chart.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.figure import Figure

    from dossier.ephemerides import Prediction

_PANEL_IN = 1.9
_GAP_IN = 0.18
_BAND_95 = "#dfe7f1"
_BAND_68 = "#a9bfdc"


def build_ephemeris_chart(prediction: Prediction, measures: Sequence[tuple[float, float, float, float, float]], *,
                          title: str, latest: float | None = None, source: str) -> Figure:
    """The chart as a matplotlib Figure.

    Parameters
    ----------
    prediction : Prediction
        From :func:`dossier.ephemerides.predict`, at increasing epochs.
    measures : sequence of (t, θ, ρ, σθ, σρ)
        Measures to draw (Julian years, degrees, arcsec); may be empty.
    title : str
        Title over the chart.
    latest : float, optional
        Epoch of the latest measure, drawn as a thin vertical line.
    source : str
        What the posterior is (e.g. "published orbit, drawn within its stated
        uncertainties"), for the SVG's description; the caption says it too.
    """
    from dossier.figures.motion_chart import _angle_ticks

    t = np.asarray(prediction.t, dtype=float)
    if t.size < 2 or np.any(np.diff(t) <= 0):
        raise ValueError("the prediction needs two or more increasing epochs. Fix: predict on a time grid.")
    theta = np.unwrap(np.asarray(prediction.theta, dtype=float), period=360.0, axis=1)
    rho = np.asarray(prediction.rho, dtype=float)
    with common.house_style():
        fig = common.new_figure(common.DEFAULT_SIZE_IN[0], common.DEFAULT_SIZE_IN[1])
        ax_t = fig.add_subplot(label="theta")
        ax_r = fig.add_subplot(sharex=ax_t, label="rho")
        for ax, q, column in ((ax_t, theta, 1), (ax_r, rho, 2)):
            ax.grid(True, which="major")
            ax.fill_between(t, q[0], q[4], color=_BAND_95, linewidth=0, label="95 % of orbits", zorder=1)
            ax.fill_between(t, q[1], q[3], color=_BAND_68, linewidth=0, label="68 % of orbits", zorder=2)
            ax.plot(t, q[2], color=common.PRIMARY, linewidth=1.4, label="median", zorder=3)
            if measures:
                m = np.asarray(measures, dtype=float)
                values = m[:, column]
                if column == 1:  # onto the branch of the median prediction at each measure's time
                    centre = np.interp(m[:, 0], t, q[2])
                    values = centre + ((values - centre + 180.0) % 360.0 - 180.0)
                ax.errorbar(m[:, 0], values, yerr=m[:, column + 2], fmt="o", color=common.INK, markersize=3.5,
                            elinewidth=1.0, capsize=2.0, label="measures", zorder=4)
            if latest is not None:
                ax.axvline(latest, color=common.INK_MUTED, linewidth=0.8, linestyle=(0, (2.0, 2.0)), zorder=0,
                           label="latest measure")
        _angle_ticks(ax_t)
        ax_t.set_ylabel("θ (°)")
        ax_r.set_ylabel("ρ (″)")
        ax_r.set_xlabel("epoch (yr)")
        ax_t.tick_params(labelbottom=False)
        lo = min(float(t[0]), min((m[0] for m in measures), default=float(t[0])))
        ax_t.set_xlim(lo - 0.3, float(t[-1]) + 0.3)
        title_text = ax_t.set_title(title)
        handles, labels = ax_r.get_legend_handles_labels()
        legend = fig.legend(handles, labels, loc="upper center", ncols=3)
        common.arrange_column(fig, [ax_t, ax_r], weights=[_PANEL_IN, _PANEL_IN], gaps_in=[_GAP_IN], title=title_text,
                              legend=legend, unit_in=1.0)
        fig.align_ylabels([ax_t, ax_r])
    return fig


def ephemeris_chart(prediction: Prediction, measures: Sequence[tuple[float, float, float, float, float]], *,
                    title: str, source: str, latest: float | None = None, alt: str | None = None) -> str:
    """Draw the ephemeris chart as deterministic SVG text (see :func:`build_ephemeris_chart`)."""
    fig = build_ephemeris_chart(prediction, measures, title=title, latest=latest, source=source)
    description = (f"Predicted θ and ρ from {prediction.t[0]:.1f} to {prediction.t[-1]:.1f} ({source}) with bands "
                   f"holding 68 % and 95 % of {prediction.samples} sampled orbits, and {len(measures)} measures.")
    return common.to_svg(fig, title=title, description=description, alt=alt)
