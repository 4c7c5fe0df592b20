"""Probabilities as people read them (dossier/fmt.py)."""

from __future__ import annotations

import pytest

from dossier.fmt import fmt_probability, p_statement


@pytest.mark.parametrize(("p", "text"), [
    (0.5234, "0.52"), (0.987, "0.987"), (0.99987, "0.99987"), (0.0031, "0.0031"), (0.9, "0.90"), (0.05, "0.050"),
    (0.99899999, "0.9990"),  # 1 − p = 0.00100000001: two significant figures of the smaller tail
])
def test_two_significant_figures_of_the_smaller_tail(p, text):
    # the precision rule of the dossier (common practice for a number whose uncertainty is ~10 %)
    assert fmt_probability(p) == text


def test_beyond_the_models_limit_a_probability_is_a_limit():
    assert fmt_probability(1 - 1e-9, 1e-6) == "> 0.999999 (limit of the model)"
    assert fmt_probability(1e-99, 1e-6) == "< 0.000001 (limit of the model)"
    assert fmt_probability(0.999998, 1e-6) == "0.9999980"
    assert p_statement("P(chance alignment)", 1 - 1e-12, 1e-6) == \
        "P(chance alignment) > 0.999999 (limit of the model)"
    assert p_statement("P(bound)", 0.61, 1e-6) == "P(bound) = 0.61"
    assert fmt_probability(None) == "—" and fmt_probability(float("nan")) == "—"


def test_values_take_the_precision_their_uncertainty_sets():
    # common practice: the uncertainty to two significant figures, the value rounded to match
    from dossier.fmt import decimals_for, fmt_fixed
    from dossier.render.html import fmt_quantity
    from dossier.rules.base import Quantity

    assert decimals_for(3.4) == 1 and decimals_for(0.0582) == 3 and decimals_for(340.0) == 0
    assert decimals_for(0.0) is None and decimals_for(float("nan")) is None
    assert fmt_fixed(-12.5196, 2) == "\u221212.52"
    # a periastron time in JD no longer reads "2.457e+06 ± 3.4"
    assert fmt_quantity(Quantity("T", "Periastron time T", 2457137.6419785, "JD", 3.4)) == "2457137.6 ± 3.4 JD"
    assert fmt_quantity(Quantity("g", "γ", -12.5196, "km/s", 0.0582)) == "\u221212.520 ± 0.058 km/s"
    # an interval sets the decimals by its narrower half
    q = Quantity("P", "Period", 812.4773, "d", None, 811.9493, 813.0153)
    assert fmt_quantity(q) == "812.48 (811.95 to 813.02) d"
