"""One jinja environment over ``templates/``, with the filters the pages use."""

from __future__ import annotations

import re
from functools import lru_cache
from pathlib import Path

from dossier.fmt import MINUS, decimals_for, fmt_fixed, fmt_log10, fmt_number, fmt_probability, fmt_sig
from dossier.render.terms import labelled
from dossier.rules.base import OUTCOME_WORDS

PACKAGE_TEMPLATES = Path(__file__).resolve().parent.parent / "_templates"
SOURCE_TEMPLATES = Path(__file__).resolve().parent.parent.parent / "templates"


def templates_dir() -> Path:
    """``templates/`` of a source checkout (editable install), else the copy inside the wheel."""
    for candidate in (SOURCE_TEMPLATES, PACKAGE_TEMPLATES):
        if (candidate / "system.html").is_file():
            return candidate
    raise FileNotFoundError("the page templates are missing from this installation; reinstall dossier")


def page_number(value: float | None, digits: int = 4) -> str:
    """:func:`dossier.fmt.fmt_number` for a page: never e-notation ('3.2 × 10⁻⁸' beyond fixed notation's
    range, see :func:`dossier.fmt.fmt_sig`), and a true minus sign."""
    text = fmt_number(value, digits)
    if "e" in text:
        text = fmt_sig(value, digits)
    return MINUS + text[1:] if text.startswith("-") else text


def fmt_quantity(q, limit: float | None = None) -> str:
    """'value ± uncertainty unit' or 'value (low–high) unit'.

    A probability without an uncertainty ("P(bound) from this line alone") is written as the verdict's are:
    with ``limit`` (the model's), nearer 0 or 1 than it reads as the limit of the model, never 1e-99.
    """
    if q.value is None:
        return "—"
    if limit is not None and q.label.startswith("P(") and not q.unit and q.uncertainty is None:
        return fmt_probability(q.value, limit)
    # the value at the precision its uncertainty (or the narrower half of its interval) sets, the
    # uncertainty to two significant figures (common practice): "2457137.6 ± 3.4", never "2.457e+06 ± 3.4"
    spread = q.uncertainty
    if spread is None and q.low is not None and q.high is not None:
        spread = min(abs(q.value - q.low), abs(q.high - q.value))
    decimals = decimals_for(spread) if spread is not None else None
    if decimals is None:
        text = page_number(q.value)
        if q.uncertainty is not None:
            text += f" ± {page_number(q.uncertainty, 2)}"
        if q.low is not None and q.high is not None:
            text += f" ({page_number(q.low)} to {page_number(q.high)})"
    else:
        text = fmt_fixed(q.value, decimals)
        if q.uncertainty is not None:
            text += f" ± {fmt_fixed(q.uncertainty, decimals)}"
        if q.low is not None and q.high is not None:
            text += f" ({fmt_fixed(q.low, decimals)} to {fmt_fixed(q.high, decimals)})"
    if q.unit:
        text += f" {q.unit}"
    return text


_WEB_URL = re.compile(r"https?://[^\x00-\x20\x7f]+", re.IGNORECASE)


def is_web_url(url: object) -> bool:
    """Whether a URL of the evidence may become a link: ``http(s)://`` with no white space or control character.

    Anything else (``javascript:``, ``data:``, ``vbscript:``, a relative path,
    a scheme hidden behind spaces or tabs, which browsers strip) is shown as
    text only: a reference's ``url`` is free text from many hands.
    """
    return isinstance(url, str) and _WEB_URL.fullmatch(url) is not None


_PROBABILITY_FIELD = re.compile(r"\.p_(bound|comoving|chance|physical|bound_given_physical)$")


def fmt_derived(row, limit: float | None = None) -> str:
    """A derived value of the provenance table: a probability as :func:`fmt_quantity` writes it."""
    if row.value is None:
        return "—"
    if limit is not None and _PROBABILITY_FIELD.search(row.field) and not row.unit and row.uncertainty is None:
        return fmt_probability(row.value, limit)
    text = page_number(row.value)
    if row.uncertainty is not None:
        text += f" ± {page_number(row.uncertainty, 2)}"
    return f"{text} {row.unit}"


def _as_written(value: float) -> str:
    """A measured number with the digits it was given (Python's shortest repr), a true minus sign, no e-notation."""
    text = repr(float(value)) if not isinstance(value, int) else str(value)
    if "e" in text or "E" in text:
        text = fmt_sig(float(value), 6)
    if text.endswith(".0") and isinstance(value, int):
        text = text[:-2]
    return MINUS + text[1:] if text.startswith("-") else text


_SPLIT_UNIT = re.compile(r"^(?P<value>[^(]+?)\s*\(uncertainty in (?P<error>[^)]+)\)$")


def fmt_measured_row(row) -> str:
    """A measured value of the provenance table as its source gave it: '201.3171123° ± 0.06 mas' (each part in
    its own unit where the schema gives two), '−39.6 ± 0.7 mas/yr'."""
    if row.value is None:
        return "—"
    unit = row.unit or ""
    split = _SPLIT_UNIT.match(unit)
    value_unit, error_unit = (split["value"], split["error"]) if split else (unit, unit)
    value_unit = "°" if value_unit == "deg" else value_unit
    error_unit = "°" if error_unit == "deg" else error_unit
    sep = "" if value_unit == "°" else " "
    text = f"{_as_written(row.value)}{sep}{value_unit}".rstrip() if split else _as_written(row.value)
    if row.uncertainty is not None:
        esep = "" if error_unit == "°" else " "
        text += f" ± {_as_written(row.uncertainty)}" + (f"{esep}{error_unit}" if split else "")
    if not split and unit:
        text += f" {unit}"
    return text


def fmt_strength(value: float | None) -> str:
    if value is None:
        return ""
    if abs(value) >= 99:
        return "≥ +99" if value > 0 else "≤ −99"
    return f"{value:+.2f}".replace("-", "−")


def fmt_measured(m) -> str:
    if m is None:
        return "—"
    return f"{page_number(m.value)} ± {page_number(m.uncertainty, 2)}"


@lru_cache(maxsize=1)
def environment():
    from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

    env = Environment(
        loader=FileSystemLoader(str(templates_dir())),
        autoescape=select_autoescape(["html"]),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(
        probability=fmt_probability,  # {{ p | probability(model_limit) }}
        labelled=labelled,  # {{ p | labelled("P(bound)", model_limit) }}
        log10=lambda x: fmt_log10(x, minus="−"),
        number=fmt_number,
        measured_row=fmt_measured_row,
        quantity=fmt_quantity,  # {{ q | quantity(model_limit) }}
        derived=fmt_derived,
        strength=fmt_strength,
        measured=fmt_measured,
        outcome_words=lambda o: OUTCOME_WORDS[o],
    )
    env.tests["web_url"] = is_web_url
    return env


def render_page(template: str, **context) -> str:
    return environment().get_template(template).render(**context)
