"""Project settings: the content of ``dossier.toml``.

Every threshold a rule or the verdict uses lives here with its published
default, so that a collaboration can re-tune it and the dossier can show it.
Rule-specific settings are tables ``[rules.<rule-id>]`` validated against the
settings model each rule declares (see :mod:`dossier.rules.base`).
"""

from __future__ import annotations

from typing import Any

from pydantic import Field

from dossier.schema.log import Method
from dossier.schema.models import FieldDensity, Model


class ProjectInfo(Model):
    """Who publishes the dossiers, and where."""

    title: str
    base_url: str = Field(default="", description="Public address of the built site (for links and citations).")
    authors: list[str] = Field(default_factory=list)
    description: str = ""


class VerdictSettings(Model):
    """How a pair's assessments are combined into a status.

    See :mod:`dossier.rules.verdict` for the method. Thresholds are
    probabilities; ``max_strength`` caps the log10 odds any one line of
    evidence may contribute, a guard against models of the field population
    that are too confident in their tails.
    """

    prior_log10_odds: float = Field(
        default=0.0, description="log10 prior odds physical:optical before any evidence (0 = even)."
    )
    physical_threshold: float = Field(default=0.99, gt=0.5, lt=1)
    optical_threshold: float = Field(default=0.01, gt=0, lt=0.5)
    prior_bound_log10_odds: float = Field(
        default=0.0, description="log10 prior odds bound:unbound for a physical pair before any motion test."
    )
    bound_threshold: float = Field(
        default=0.9, gt=0.5, lt=1, description="P(bound | physical) needed to call a pair bound."
    )
    unbound_threshold: float = Field(
        default=0.1, gt=0, lt=0.5, description="At or below this P(bound | physical), a physical pair is co-moving."
    )
    max_strength: float = Field(default=4.0, gt=0, description="Cap on |log10 odds| from any one assessment.")


class MethodErrorSetting(Model):
    """Typical uncertainties of one method of measure: σρ = hypot(rho_arcsec, rho_fraction × ρ)."""

    theta_deg: float = Field(gt=0)
    rho_arcsec: float = Field(ge=0)
    rho_fraction: float = Field(ge=0)
    aperture_term: bool = Field(default=False, description="Inflate near the resolution limit 11.6″/D(cm).")


class LogSettings(Model):
    """How the observing log is reduced (see dossier/astro/reduction.py)."""

    group_window_days: float = Field(
        default=1.0, gt=0, description="Measures of one pair within this span are averaged into one (a night)."
    )
    outlier_threshold: float = Field(
        default=3.5, gt=0, description="Robust normalised residual above which a measure is flagged (never deleted)."
    )
    method_errors: dict[Method, MethodErrorSetting] = Field(
        default_factory=dict,
        description="Per-method uncertainties for measures that give none; overrides the built-in defaults.",
    )


class ReleaseSettings(Model):
    """What ``dossier release`` asks before it freezes a system's dossier (see dossier/release.py)."""

    required_approvals: int = Field(
        default=0, ge=0,
        description="Approving reviews (under 'reviews:' in the evidence, new since the previous release, one per "
                    "reviewer) needed before a release is allowed.",
    )


class LimitSettings(Model):
    """Largest input files Dossier reads: a larger file is refused, unread, with a message."""

    # A guard against a wrong or damaged file eating memory and minutes: YAML with positions parses at a
    # few hundred kB/s and the log at about 1 MB/s, so the defaults are far above any real evidence file or
    # observing log (tens of kB) and far below what would stall a check.

    max_yaml_mb: float = Field(
        default=1.0, gt=0, description="Largest evidence.yaml or references.yaml, in MB (10^6 bytes)."
    )
    max_log_mb: float = Field(default=5.0, gt=0, description="Largest observing log (log.csv), in MB (10^6 bytes).")


class Settings(Model):
    """The whole ``dossier.toml``."""

    project: ProjectInfo
    field_density: list[FieldDensity] = Field(
        default_factory=list, description="Default field-star density table for systems that give none."
    )
    verdict: VerdictSettings = Field(default_factory=VerdictSettings)
    log: LogSettings = Field(default_factory=LogSettings)
    release: ReleaseSettings = Field(default_factory=ReleaseSettings)
    limits: LimitSettings = Field(default_factory=LimitSettings)
    rules: dict[str, dict[str, Any]] = Field(
        default_factory=dict, description="Per-rule settings tables, keyed by rule id; 'enabled = false' switches a rule off."
    )
