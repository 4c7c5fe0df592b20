"""Numbers and probabilities as people read them (terminal, pages, summaries)."""

from __future__ import annotations

import math


#: Probabilities nearer 0 or 1 than this are limits of the model, not measurements (PairModelSettings.model_limit).
MODEL_LIMIT = 1e-6


def fmt_probability(p: float | None, limit: float | None = None) -> str:
    """A probability for people, at the precision it deserves, never '1' or '0' for a statistical statement.

    Two significant figures of the smaller of p and 1 − p (the model's priors are not known better than
    that), so 0.52, 0.987, 0.99987 and 0.0031. With ``limit`` (the model's limit, e.g. 1e-6), values
    beyond it read "> 0.999999 (limit of the model)" or "< 0.000001 (limit of the model)".
    """
    if p is None or (isinstance(p, float) and math.isnan(p)):
        return "—"
    if limit is not None:
        digits = max(1, round(-math.log10(limit)))
        if p >= 1 - limit:
            return f"> {1 - limit:.{digits}f} (limit of the model)"
        if p <= limit:
            return f"< {limit:.{digits}f} (limit of the model)"
    tail = float(f"{min(p, 1 - p):.1e}")  # two significant figures
    if tail <= 0:
        return "> 0.9999" if p >= 0.5 else "< 0.0001"
    decimals = max(2, 1 - int(math.floor(math.log10(tail))))
    return f"{p:.{decimals}f}"


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


def p_statement(label: str, p: float | None, limit: float | None = None) -> str:
    """'P(physical) = 0.973' or 'P(physical) > 0.999999 (limit of the model)'."""
    text = fmt_probability(p, limit)
    return f"{label} {text}" if text[0] in "<>" else f"{label} = {text}"


def fmt_log10(value: float | None, minus: str = "-") -> str:
    """A term of a verdict's log10 odds, signed: '+5.03', '-0.38', '+1718.8', '+2668'; '—' for none.

    Two decimals below 100 (a term that rounds to 0.00 keeps its sign: it still points one way), fewer above:
    nothing is capped, the number is the one the verdict used or the line gave alone.
    """
    if value is None or not math.isfinite(value):
        return "—"
    if value == 0:
        return "0.00"
    size = abs(value)
    text = f"{value:+.2f}" if size < 100 else f"{value:+.1f}" if size < 1000 else f"{value:+.0f}"
    return text.replace("-", minus)


def fmt_interval(value: float, low: float, high: float) -> str:
    """A value with its interval at the precision the interval sets: '104.7 (101.3 to 108.2)'.

    The decimals give the narrower half-width two significant figures (common practice for quoting
    an uncertainty), at most six; '—' for a value that is not finite.
    """
    if not all(math.isfinite(v) for v in (value, low, high)):
        return fmt_number(value) if math.isfinite(value) else "—"
    half = min(abs(value - low), abs(high - value))
    decimals = 6 if half <= 0 else min(6, max(0, 1 - int(math.floor(math.log10(half)))))
    return f"{value:.{decimals}f} ({low:.{decimals}f} to {high:.{decimals}f})"


def decimals_for(uncertainty: float) -> int | None:
    """Decimals that give an uncertainty two significant figures (common practice), at most 8; None if unusable."""
    if not (isinstance(uncertainty, (int, float)) and math.isfinite(uncertainty) and uncertainty > 0):
        return None
    return min(8, max(0, 1 - int(math.floor(math.log10(uncertainty)))))


def fmt_fixed(value: float, decimals: int) -> str:
    """A number with fixed decimals and a true minus sign (U+2212), never in e-notation."""
    text = f"{value:.{decimals}f}"
    return "\u2212" + text[1:] if text.startswith("-") else text


MINUS = "\u2212"  #: the true minus sign; a hyphen is not one (typographic practice, Unicode U+2212)


def fmt_sig(value: float | None, digits: int = 3) -> str:
    """A number with ``digits`` significant figures in fixed notation and a true minus sign: '13800', '0.0031'.

    For the text people read (explanations), where '1.38e+04' is markup, not a number. Fixed notation for
    |value| in [1e-6, 1e12); beyond that a power of ten with superscripts, '3.2 × 10⁻⁸'. '—' for none or
    not finite. Trailing zeros after the point are dropped, as ``:g`` drops them.
    """
    if value is None or not math.isfinite(value):
        return "—"
    if value == 0:
        return "0"
    size = abs(value)
    rounded = float(f"{size:.{digits - 1}e}")  # the rounding decides the magnitude: 9.996 -> 10.0
    if 1e-6 <= rounded < 1e12:
        decimals = max(0, digits - 1 - int(math.floor(math.log10(rounded))))
        text = f"{rounded:.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
    else:
        mantissa, exponent = f"{rounded:.{digits - 1}e}".split("e")
        if "." in mantissa:
            mantissa = mantissa.rstrip("0").rstrip(".")
        text = f"{mantissa} × 10{superscript(int(exponent))}"
    return (MINUS + text) if value < 0 else text


def fmt_signed(value: float, decimals: int = 2) -> str:
    """A signed number with fixed decimals, '+0.66' or '−0.46', with a true minus sign (never e-notation)."""
    text = f"{value:+.{decimals}f}"
    return text.replace("-", MINUS)


_SUPERSCRIPT = str.maketrans("0123456789-+.", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺·")


def superscript(exponent: int | float | str) -> str:
    """An exponent as superscript characters, '⁻⁸' or '³·⁸', so that 10 to a power reads without markup."""
    return str(exponent).translate(_SUPERSCRIPT)


def plural(n: int, word: str, plural: str | None = None) -> str:
    """'1 detection', '2 detections', '0 searches' (``plural`` when adding 's' is wrong: 'search', 'searches')."""
    return f"{n} {word if n == 1 else (plural or word + 's')}"
