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
    probabilities; the priors of the hypotheses are those of the pair model
    (``[pair_model]``).
    """

    physical_threshold: float = Field(default=0.99, gt=0.5, lt=1)
    optical_threshold: float = Field(default=0.01, gt=0, lt=0.5)
    bound_threshold: float = Field(
        default=0.9, gt=0.5, lt=1, description="P(bound | physical) needed to call a pair bound."
    )
    unbound_threshold: float = Field(
        default=0.1, gt=0, lt=0.5, description="At or below this P(bound | physical), a physical pair is co-moving."
    )
    line_outlier_fraction: float = Field(
        default=1.0e-3, gt=0, lt=0.5,
        description="Chance that an independent line of evidence (the log, an orbit, ages) is wrong in a way its own "
                    "errors miss; it then carries no information, so no one line moves the odds by more than 1/this.")


class FieldComponent(Model):
    """One component of the field's velocity distribution: a Gaussian in (U, V, W) relative to the LSR."""

    name: str
    fraction: float = Field(gt=0, le=1, description="Share of field stars in this component.")
    sigma_u_kms: float = Field(gt=0, description="Dispersion towards the Galactic centre (km/s).")
    sigma_v_kms: float = Field(gt=0, description="Dispersion in the direction of rotation (km/s).")
    sigma_w_kms: float = Field(gt=0, description="Dispersion towards the north Galactic pole (km/s).")
    asymmetric_drift_kms: float = Field(description="Mean V relative to the LSR (km/s, negative: lagging).")


#: Bensby, Feltzing & Lundström 2003, A&A 410, 527, Table 1: thin disc, thick disc, halo.
FIELD_COMPONENTS = (
    FieldComponent(name="thin disc", fraction=0.94, sigma_u_kms=35, sigma_v_kms=20, sigma_w_kms=16,
                   asymmetric_drift_kms=-15),
    FieldComponent(name="thick disc", fraction=0.06, sigma_u_kms=67, sigma_v_kms=38, sigma_w_kms=35,
                   asymmetric_drift_kms=-46),
    FieldComponent(name="halo", fraction=0.0015, sigma_u_kms=160, sigma_v_kms=90, sigma_w_kms=90,
                   asymmetric_drift_kms=-220),
)


class PairModelSettings(Model):
    """The priors and error model of the pair model (see :mod:`dossier.astro.pairmodel`).

    Every default is documented with its source on the "How verdicts are
    computed" page (``docs/verdicts.md``); the calibration population
    (``dossier calibrate``) is drawn from the same priors.
    """

    # bound companions: number per star per decade of semimajor axis
    bound_rate_per_decade: float = Field(
        default=0.06, gt=0, description="Bound companions per star per decade of semimajor axis below the break.")
    bound_break_au: float = Field(default=3000.0, gt=0, description="Semimajor axis where the power law steepens (au).")
    bound_slope: float = Field(
        default=-0.6, le=0, description="d log N / d log a beyond the break (El-Badry & Rix 2018: dN/ds ∝ s^-1.6).")
    bound_min_au: float = Field(default=10.0, gt=0, description="Below this semimajor axis (au) the rate tapers as (a/min)^4: companions too close to resolve.")
    bound_max_au: float = Field(default=2.0e5, gt=0, description="Beyond this semimajor axis (au), about 1 pc, the rate tapers as (a/max)^-4: tidal disruption.")
    # co-moving, unbound companions
    comoving_rate_per_decade: float = Field(
        default=0.02, ge=0, description="Co-moving unbound companions per star per decade of 3-D separation, at and beyond comoving_scale_au.")
    comoving_scale_au: float = Field(
        default=2.0e5, gt=0,
        description="Below this 3-D separation (about 1 pc) the co-moving rate falls as (s/scale)^3: co-natal stars "
                    "spread with a uniform space density, dN ∝ s² ds.")
    comoving_max_au: float = Field(default=1.0e6, gt=0, description="Beyond this 3-D separation (au) the co-moving rate tapers as (s/max)^-4.")
    comoving_dispersion_kms: float = Field(
        default=1.0, gt=0, description="Per-axis dispersion of the velocity difference of a co-moving, unbound pair (km/s).")
    # the field
    solar_motion_kms: tuple[float, float, float] = Field(
        default=(11.1, 12.24, 7.25), description="(U, V, W) of the Sun relative to the LSR (km/s; Schönrich et al. 2010).")
    field_components: tuple[FieldComponent, ...] = Field(
        default=FIELD_COMPONENTS, description="Velocity ellipsoids of the field (Bensby et al. 2003, Table 1).")
    field_density_per_deg2: float | None = Field(
        default=None, gt=0,
        description="Field stars per square degree for pairs whose input gives no density and no table applies.")
    # unresolved inner companions
    inner_fraction: float = Field(
        default=0.25, ge=0, lt=1, description="Chance that a component hides an unresolved companion that moves it.")
    inner_log10_period_days: tuple[float, float] = Field(
        default=(5.03, 2.28), description="Mean and dispersion of log10 P (days) of inner companions (Raghavan et al. 2010).")
    inner_max_period_days: float = Field(default=1.0e5, gt=0, description="Longest inner period still unresolved (days).")
    astrometric_baseline_yr: float = Field(
        default=3.0, gt=0, description="Time span a catalogue proper motion averages over (years).")
    # error model
    parallax_floor_mas: float = Field(default=0.01, ge=0, description="Added in quadrature to every parallax error (mas).")
    pm_floor_masyr: float = Field(default=0.01, ge=0, description="Added in quadrature to every proper-motion error (mas/yr).")
    rv_floor_kms: float = Field(default=0.1, ge=0, description="Added in quadrature to every radial-velocity error (km/s).")
    error_inflation: float = Field(default=1.0, ge=1, description="Every catalogue error is multiplied by this.")
    close_separation_arcsec: float = Field(default=4.0, ge=0, description="Below this separation, errors are inflated more.")
    close_inflation: float = Field(
        default=2.0, ge=1, description="Error factor below close_separation_arcsec (El-Badry et al. 2021).")
    outlier_fraction: float = Field(
        default=1.0e-5, gt=0, lt=0.5, description="Chance that a star's parallax or motion is wrong beyond its error bar (a blend, a mismatch).")
    model_limit: float = Field(
        default=1.0e-6, gt=0, lt=0.01,
        description="Probabilities nearer 0 or 1 than this are shown as limited by the model.")


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
    curvature_p: float = Field(
        default=1e-3, gt=0, lt=1,
        description="p-value of the curvature test (F-test, quadratic against straight path) below which a log's "
                    "path is called curved: by the relative-motion rule, and before the orbit-fit rule tries an orbit.",
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
    pair_model: PairModelSettings = Field(default_factory=PairModelSettings)
    log: LogSettings = Field(default_factory=LogSettings)
    release: ReleaseSettings = Field(default_factory=ReleaseSettings)
    limits: LimitSettings = Field(default_factory=LimitSettings)
    rules: dict[str, dict[str, Any]] = Field(
        default_factory=dict, description="Per-rule settings tables, keyed by rule id; 'enabled = false' switches a rule off."
    )
