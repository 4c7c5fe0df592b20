"""The status colours stay apart for readers with colour-vision deficiencies.

Each status badge also carries its word, so colour is never the only cue
(WCAG 2.1, success criterion 1.4.1); the colours should still differ for
every reader. Contrast of text on the badges is checked in the browser by
axe-core (tests/test_browser.py).
"""

from __future__ import annotations

import itertools
import re

import numpy as np
import pytest

from tests.conftest import REPO

STYLE = (REPO / "templates/assets/style.css").read_text(encoding="utf-8")
STATUSES = ("bound", "comoving", "optical", "undetermined")
#: Smallest CAM02-UCS colour difference between two statuses, for every kind of reader. A ΔE of about 10 or
#: more is clearly visible side by side (common practice for categorical palettes; from memory).
MIN_DELTA_E = 15.0


def palette() -> dict[str, np.ndarray]:
    found = dict(re.findall(r"--([a-z]+):\s*(#[0-9a-fA-F]{6});", STYLE))
    return {s: np.array([int(found[s][i:i + 2], 16) for i in (1, 3, 5)]) / 255 for s in STATUSES}


@pytest.mark.parametrize("cvd", [None, "deuteranomaly", "protanomaly", "tritanomaly"])
def test_status_colours_differ_under_colour_vision_deficiency(cvd):
    # colorspacious simulates full-severity dichromacy with the model of Machado, Oliveira & Fernandes 2009,
    # IEEE TVCG 15, 1291, and measures ΔE in CAM02-UCS (Luo, Cui & Li 2006, Color Res. Appl. 31, 320).
    from colorspacious import cspace_convert, deltaE

    colours = palette()
    if cvd is not None:
        space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        colours = {k: np.clip(cspace_convert(v, space, "sRGB1"), 0, 1) for k, v in colours.items()}
    for a, b in itertools.combinations(STATUSES, 2):
        assert float(deltaE(colours[a], colours[b], input_space="sRGB1")) >= MIN_DELTA_E, (cvd, a, b)
