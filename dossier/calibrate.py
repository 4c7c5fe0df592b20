"""``dossier calibrate``: check the verdicts' probabilities on a synthetic population of known truth.

The population (:func:`dossier.population.draw_population`) is drawn by code
written apart from the pair model, from the priors of ``[pair_model]``; it is
screened with the same :func:`dossier.screen.screen_table` as any table of
pairs, and :mod:`dossier.reliability` compares the probabilities with the
truth: reliability diagrams and expected calibration errors of P(physical)
and P(bound | physical), the confusion table with abstentions, and a
cut-based classifier on the same pairs. Written as a folder (``index.html``,
``reliability.json``, figures), atomically.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

#: Length scale of the distance prior of the population and of the model in a calibration (kpc): a
#: sample of the solar neighbourhood, whose pairs are close enough for their motions to tell.
DEFAULT_LENGTH_SCALE_KPC = 0.25


def calibration_settings(settings, length_scale_kpc: float):
    """The settings with the distance prior's length scale of the population (the model must share it)."""
    rules = dict(settings.rules)
    rules["distance"] = {**rules.get("distance", {}), "length_scale_kpc": length_scale_kpc}
    return settings.model_copy(update={"rules": rules})


def run(n_primaries: int, seed: int, settings, length_scale_kpc: float = DEFAULT_LENGTH_SCALE_KPC,
        progress=None) -> tuple[dict, dict[str, np.ndarray]]:
    """Draw, screen and score a population; return the report and the screened columns."""
    from dossier import population, reliability
    from dossier.screen import NUMERIC, Table, screen_table

    settings = calibration_settings(settings, length_scale_kpc)
    cols = population.draw_population(n_primaries, seed, settings.pair_model, length_scale_kpc=length_scale_kpc)
    n = len(cols["pair_id"])
    out: dict[str, list[np.ndarray]] = {}
    chunk = 20_000
    for start in range(0, n, chunk):
        part = slice(start, start + chunk)
        table = Table(np.asarray(cols["pair_id"][part]),
                      {k: np.asarray(cols[k][part], float) if k in cols else np.full(len(cols["pair_id"][part]), np.nan)
                       for k in NUMERIC})
        for key, value in screen_table(table, settings).items():
            out.setdefault(key, []).append(np.asarray(value))
        if progress is not None:
            progress(min(chunk, n - start))
    screened = {k: np.concatenate(v) for k, v in out.items()}
    merged = {**cols, **{k: v for k, v in screened.items() if k != "pair_id"}}
    summary = {
        "length_scale_kpc": length_scale_kpc,
        "pair_model": settings.pair_model.model_dump(mode="json"),
        "verdict": settings.verdict.model_dump(mode="json"),
    }
    report = reliability.report(merged, settings_summary=summary, seed=seed, n_primaries=n_primaries)
    return report, merged


def calibrate(out: Path, n_primaries: int, seed: int, settings, length_scale_kpc: float = DEFAULT_LENGTH_SCALE_KPC,
              progress=None) -> dict:
    """Run a calibration and write its report folder ``out``; return the report."""
    from dossier import reliability

    report, _ = run(n_primaries, seed, settings, length_scale_kpc, progress)
    reliability.write_report(Path(out), report)
    return report
