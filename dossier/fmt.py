"""Numbers and probabilities as people read them (terminal, pages, summaries)."""

from __future__ import annotations

import math


def fmt_probability(p: float | None) -> str:
    """A probability for people: never '1' or '0' for a statistical statement."""
    if p is None:
        return "—"
    if p >= 0.9999:
        return "> 0.9999"
    if p <= 0.0001:
        return "< 0.0001"
    if 0.01 <= p <= 0.99:
        return f"{p:.3f}"
    return f"{p:.4f}"


def fmt_number(value: float | None, digits: int = 4) -> str:
    """A number with ``digits`` significant figures, without exponent for everyday magnitudes."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "—"
    if value == 0:
        return "0"
    size = abs(value)
    if 1e-3 <= size < 1e6:
        decimals = max(0, digits - 1 - int(math.floor(math.log10(size))))
        return f"{value:.{decimals}f}"
    return f"{value:.{digits - 1}e}"


def p_statement(label: str, p: float | None) -> str:
    """'P(physical) = 0.973' or 'P(physical) > 0.9999'."""
    text = fmt_probability(p)
    return f"{label} {text}" if text[0] in "<>" else f"{label} = {text}"
