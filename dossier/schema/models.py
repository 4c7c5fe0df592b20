"""The evidence model: what a system's ``evidence.yaml`` may say.

Units follow ``DESIGN.md``: angles in degrees (position angle north through
east), separations in arcsec, parallax in mas, proper motion in mas/yr with
the RA component multiplied by cos δ, radial velocity in km/s, masses and
radii in solar units (IAU 2015 nominal values), temperatures in K, ages in
Myr. Every field's unit is in its description and in the generated JSON
Schema (``schemas/evidence.schema.json``) under the key ``unit``.

A measured value is written either as ``[value, uncertainty]``, as
``[value, uncertainty, {ref: source-id}]`` or as a mapping
``{value: ..., uncertainty: ..., ref: ...}``. A value without its own ``ref``
takes the ``ref`` of the record it sits in (an astrometry entry, a physical
parameter block); the loader refuses a value that ends up with no source.
"""

from __future__ import annotations

import datetime as dt
import re
from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    GetJsonSchemaHandler,
    WithJsonSchema,
    field_validator,
    model_validator,
)
from pydantic.json_schema import JsonSchemaValue
from pydantic_core import core_schema

ID_PATTERN = r"^[A-Za-z0-9][A-Za-z0-9_.+-]*$"
_EPOCH_RE = re.compile(r"^[JB]\d{3,4}(\.\d+)?$")
_JD_RE = re.compile(r"^B?JD\s?\d{5,7}(\.\d+)?$")


class Model(BaseModel):
    """Base of every evidence model: unknown keys are errors, values are frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


def _unit(unit: str) -> dict[str, str]:
    return {"unit": unit}


Identifier = Annotated[
    str,
    Field(pattern=ID_PATTERN, description="An identifier of our own: letters, digits, '-', '_', '.', '+'."),
]


def _epoch_before(value: Any) -> Any:
    """Accept ``J2016.0``, ``B1950.0``, a bare Julian year number, or an ISO date."""
    if isinstance(value, bool):
        raise ValueError(f"{value!r} is not an epoch. Fix: write J2016.0, B1950.0 or a date such as 2019-05-03")
    if isinstance(value, (int, float)):
        return f"J{float(value)}"
    if isinstance(value, (dt.date, dt.datetime)):
        return value.isoformat()
    if isinstance(value, str):
        text = value.strip()
        if _EPOCH_RE.match(text):
            return text
        if _JD_RE.match(text):
            return text.replace(" ", "")
        try:
            dt.datetime.fromisoformat(text)
        except ValueError:
            pass
        else:
            return text
    raise ValueError(
        f"{value!r} is not an epoch. Fix: write a Julian year (J2016.0), a Besselian year (B1950.0), "
        "a calendar date (2019-05-03) or a Julian date (JD2455200.5, BJD2455200.5)"
    )


Epoch = Annotated[
    str,
    BeforeValidator(_epoch_before),
    WithJsonSchema(
        {
            "anyOf": [
                {"type": "string", "pattern": r"^[JB]\d{3,4}(\.\d+)?$"},
                {"type": "string", "format": "date"},
                {"type": "string", "format": "date-time"},
                {"type": "string", "pattern": r"^B?JD\s?\d{5,7}(\.\d+)?$"},
                {"type": "number"},
            ],
            "description": "Epoch: Julian year 'J2016.0' (or a bare number, read as a Julian year), Besselian "
            "year 'B1950.0', ISO calendar date/time (UTC), or Julian date 'JD2455200.5' / barycentric 'BJD…'.",
            "examples": ["J2016.0", "B1950.0", "2019-05-03", 1985.42],
        }
    ),
]


class Measured(Model):
    """A measured value with its 1σ uncertainty and the id of its source."""

    value: float = Field(description="The value, in the unit of the field it belongs to.")
    uncertainty: float = Field(gt=0, description="1σ uncertainty, same unit as the value (must be > 0).")
    ref: Identifier | None = Field(
        default=None, description="Source id from references.yaml; defaults to the ref of the enclosing record."
    )

    @model_validator(mode="before")
    @classmethod
    def _from_list(cls, data: Any) -> Any:
        if isinstance(data, (list, tuple)):
            items = list(data)
            ref = None
            if len(items) == 3:
                extra = items.pop()
                if isinstance(extra, dict) and set(extra) == {"ref"}:
                    ref = extra["ref"]
                elif isinstance(extra, str):
                    ref = extra
                else:
                    raise ValueError(
                        "the third item of a measured value must be {ref: source-id}. "
                        "Fix: write [value, uncertainty, {ref: source-id}]"
                    )
            if len(items) != 2:
                raise ValueError(
                    f"a measured value needs a value and an uncertainty, got {len(data)} item(s). "
                    "Fix: write [value, uncertainty] or [value, uncertainty, {ref: source-id}]"
                )
            return {"value": items[0], "uncertainty": items[1], "ref": ref}
        if isinstance(data, (int, float)) and not isinstance(data, bool):
            raise ValueError(
                f"{data} has no uncertainty; every measured value needs one. "
                f"Fix: write [{data}, uncertainty] with the 1-sigma uncertainty"
            )
        return data

    @classmethod
    def __get_pydantic_json_schema__(
        cls, schema: core_schema.CoreSchema, handler: GetJsonSchemaHandler
    ) -> JsonSchemaValue:
        as_object = handler.resolve_ref_schema(handler(schema))
        return {
            "anyOf": [
                {
                    "type": "array",
                    "prefixItems": [
                        {"type": "number"},
                        {"type": "number", "exclusiveMinimum": 0},
                        {"type": "object", "properties": {"ref": {"type": "string"}}, "required": ["ref"],
                         "additionalProperties": False},
                    ],
                    "minItems": 2,
                    "maxItems": 3,
                },
                as_object,
            ],
            "description": "A measured value: [value, uncertainty], [value, uncertainty, {ref: id}] "
            "or {value, uncertainty, ref}.",
        }


def measured(unit: str, description: str) -> Any:
    """Field for an optional measured value with its unit recorded in the schema."""
    return Field(default=None, description=f"{description} [{unit}]", json_schema_extra=_unit(unit))


class SkyPosition(Model):
    """Nominal position of the system, for display and for field queries."""

    ra: float = Field(ge=0, lt=360, description="Right ascension [deg]", json_schema_extra=_unit("deg"))
    dec: float = Field(ge=-90, le=90, description="Declination [deg]", json_schema_extra=_unit("deg"))
    frame: Literal["icrs"] = Field(default="icrs", description="Reference frame; only ICRS is supported.")
    epoch: Epoch = "J2016.0"


class Correlations(Model):
    """Correlation coefficients between the astrometric parameters of one solution."""

    parallax_pmra: float | None = Field(default=None, ge=-1, le=1)
    parallax_pmdec: float | None = Field(default=None, ge=-1, le=1)
    pmra_pmdec: float | None = Field(default=None, ge=-1, le=1)
    ra_dec: float | None = Field(default=None, ge=-1, le=1)


class Astrometry(Model):
    """One astrometric solution of one component, from one source."""

    ref: Identifier = Field(description="Source id from references.yaml; the default for every value here.")
    epoch: Epoch
    ra: Measured | None = Field(
        default=None,
        description="Right ascension (ICRS): value in deg, uncertainty in mas multiplied by cos δ [deg, mas]",
        json_schema_extra=_unit("deg (uncertainty in mas)"),
    )
    dec: Measured | None = Field(
        default=None,
        description="Declination (ICRS): value in deg, uncertainty in mas [deg, mas]",
        json_schema_extra=_unit("deg (uncertainty in mas)"),
    )
    parallax: Measured | None = measured("mas", "Parallax")
    pmra: Measured | None = measured("mas/yr", "Proper motion in RA, multiplied by cos δ")
    pmdec: Measured | None = measured("mas/yr", "Proper motion in declination")
    correlations: Correlations | None = None

    @model_validator(mode="after")
    def _position_both_or_neither(self) -> Astrometry:
        if (self.ra is None) != (self.dec is None):
            raise ValueError("a position needs both ra and dec. Fix: give both, or neither")
        if (self.pmra is None) != (self.pmdec is None):
            raise ValueError("a proper motion needs both pmra and pmdec. Fix: give both, or neither")
        return self


class RadialVelocityEpoch(Model):
    """One radial-velocity measurement of a series (for spectroscopic orbits)."""

    epoch: Epoch
    velocity: Measured = Field(description="Radial velocity [km/s]", json_schema_extra=_unit("km/s"))
    instrument: str | None = None
    ref: Identifier | None = None


Stage = Literal[
    "pre-main-sequence",
    "main-sequence",
    "leaving-main-sequence",
    "subgiant",
    "giant",
    "core-helium-burning",
    "asymptotic-giant",
    "white-dwarf",
    "brown-dwarf",
]


class Physical(Model):
    """Physical parameters of one component."""

    ref: Identifier | None = Field(default=None, description="Default source id for the values below.")
    mass: Measured | None = measured("Msun", "Mass")
    teff: Measured | None = measured("K", "Effective temperature")
    radius: Measured | None = measured("Rsun", "Radius")
    luminosity: Measured | None = measured("Lsun", "Luminosity")
    age: Measured | None = measured("Myr", "Age")
    metallicity: Measured | None = measured("dex", "[Fe/H]")
    extinction_v: Measured | None = measured("mag", "Interstellar extinction A_V")
    stage: Stage | None = Field(default=None, description="Evolutionary stage.")


class Component(Model):
    """One star (or an unresolved sub-system treated as one point of light)."""

    spectral_type: str | None = None
    magnitudes: dict[str, Measured] = Field(
        default_factory=dict, description="Apparent magnitude per photometric band [mag]",
        json_schema_extra=_unit("mag"),
    )
    astrometry: list[Astrometry] = Field(default_factory=list, description="Astrometric solutions, one per source.")
    radial_velocity: Measured | None = measured("km/s", "Radial velocity (single value or systemic)")
    radial_velocity_series: list[RadialVelocityEpoch] = Field(
        default_factory=list, description="Time series of radial velocities (for spectroscopic orbits)."
    )
    physical: Physical | None = None
    note: str | None = Field(default=None, description="One line of Markdown about this component.")

    @field_validator("magnitudes")
    @classmethod
    def _band_names(cls, value: dict[str, Measured]) -> dict[str, Measured]:
        for band in value:
            if not re.match(ID_PATTERN, band):
                raise ValueError(f"{band!r} is not a band name. Fix: use a short name such as V or G")
        return value


class PairMeasure(Model):
    """One measure of a pair's relative position (observing-log slot)."""

    epoch: Epoch
    theta: Measured = Field(description="Position angle, north through east [deg]", json_schema_extra=_unit("deg"))
    rho: Measured = Field(description="Separation [arcsec]", json_schema_extra=_unit("arcsec"))
    method: str | None = None
    ref: Identifier | None = None


class Pair(Model):
    """Two members (components or pairs) whose relation is weighed."""

    id: Identifier
    members: tuple[Identifier, Identifier] = Field(description="The two members: component ids or pair ids.")
    parent: Identifier | None = Field(
        default=None, description="The component or pair this pair resolves (for hierarchies)."
    )
    measures: list[PairMeasure] = Field(default_factory=list, description="Relative-position measures.")
    note: str | None = None


ClaimMethod = Literal[
    "spectroscopy",
    "speckle-interferometry",
    "adaptive-optics",
    "lucky-imaging",
    "occultation",
    "astrometric-acceleration",
    "direct-imaging",
    "interferometry",
]


class Claim(Model):
    """A claimed detection of a companion."""

    companion: Identifier = Field(description="Component id of the claimed companion.")
    around: Identifier | None = Field(default=None, description="Component it was found around.")
    method: ClaimMethod
    epoch: Epoch
    rho: Measured | None = measured("arcsec", "Separation")
    theta: Measured | None = measured("deg", "Position angle")
    delta_mag: Measured | None = measured("mag", "Magnitude difference")
    band: str | None = None
    ref: Identifier


class NonDetection(Model):
    """A search that found nothing, with its sensitivity."""

    around: Identifier
    method: ClaimMethod
    epoch: Epoch
    rho_range: tuple[float, float] = Field(description="Searched separations [arcsec]", json_schema_extra=_unit("arcsec"))
    contrast: float = Field(description="Faintest Δm detectable in that range [mag]", json_schema_extra=_unit("mag"))
    band: str | None = None
    ref: Identifier


class PublishedOrbit(Model):
    """Orbital elements published for a pair.

    Visual orbits use the Campbell elements P, T, e, a, i, Ω, ω;
    spectroscopic orbits P, T, e, ω, K. Give what the source gives.
    """

    pair: Identifier
    kind: Literal["visual", "spectroscopic", "astrometric", "combined"]
    period: Measured = Field(description="Period, in period_unit [d or yr]", json_schema_extra={"unit": "d or yr"})
    period_unit: Literal["d", "yr"] = Field(default="d", description="Unit of the period: days or Julian years.")
    periastron_time: Measured | None = measured("yr", "Time of periastron passage T, as a Julian year")
    eccentricity: Measured | None = measured("", "Eccentricity e")
    semimajor_axis: Measured | None = measured("arcsec", "Angular semimajor axis a")
    inclination: Measured | None = measured("deg", "Inclination i (< 90° when θ increases with time)")
    node: Measured | None = measured("deg", "Position angle of the ascending node Ω")
    periastron_argument: Measured | None = measured("deg", "Argument of periastron ω")
    semi_amplitude: Measured | None = measured("km/s", "Velocity semi-amplitude K")
    ref: Identifier

    @property
    def period_years(self) -> float:
        return self.period.value / 365.25 if self.period_unit == "d" else self.period.value

    @property
    def period_years_error(self) -> float:
        return self.period.uncertainty / 365.25 if self.period_unit == "d" else self.period.uncertainty

    @property
    def is_visual(self) -> bool:
        needed = (self.periastron_time, self.eccentricity, self.semimajor_axis, self.inclination, self.node,
                  self.periastron_argument)
        return self.kind in ("visual", "combined") and all(x is not None for x in needed)


class Neighbour(Model):
    """A star near the system whose motion is compared with it (slot)."""

    id: Identifier
    astrometry: list[Astrometry] = Field(default_factory=list)
    radial_velocity: Measured | None = measured("km/s", "Radial velocity")
    magnitudes: dict[str, Measured] = Field(default_factory=dict)


class Review(Model):
    """A reviewer's decision on this system's evidence."""

    by: str
    on: dt.date
    decision: Literal["approve", "request-changes", "comment"]
    comment: str = ""


class FieldDensity(Model):
    """Cumulative surface density of field stars at least as bright as a magnitude."""

    band: str
    brighter_than: float = Field(description="Limiting magnitude [mag]", json_schema_extra=_unit("mag"))
    per_square_degree: Measured = Field(
        description="Number of stars per square degree brighter than the limit [deg^-2]",
        json_schema_extra=_unit("deg^-2"),
    )
    ref: Identifier | None = None


class System(Model):
    """One system's evidence: the content of ``systems/<id>/evidence.yaml``."""

    id: Identifier = Field(description="The system id; must equal its folder name.")
    title: str
    position: SkyPosition
    components: dict[str, Component] = Field(
        description="Components by id, primary first.", min_length=1
    )
    pairs: list[Pair] = Field(default_factory=list)
    field_density: list[FieldDensity] = Field(
        default_factory=list, description="Field-star density table; defaults to the project's."
    )
    claims: list[Claim] = Field(default_factory=list)
    non_detections: list[NonDetection] = Field(default_factory=list)
    orbits: list[PublishedOrbit] = Field(default_factory=list)
    neighbours: list[Neighbour] = Field(default_factory=list)
    reviews: list[Review] = Field(default_factory=list)
    notes: str = Field(default="", description="Markdown (raw HTML is not rendered).")

    @field_validator("components")
    @classmethod
    def _component_ids(cls, value: dict[str, Component]) -> dict[str, Component]:
        for name in value:
            if not re.match(ID_PATTERN, str(name)):
                raise ValueError(f"{name!r} is not a component id. Fix: use letters, digits, '-', '_' or '.'")
        return value

    @property
    def primary(self) -> str:
        return next(iter(self.components))


class Reference(Model):
    """One source cited by the evidence."""

    citation: str = Field(description="Full citation: authors, year, title or journal, volume, page.")
    doi: str | None = Field(default=None, pattern=r"^10\.\d{4,9}/\S+$")
    url: str | None = None
    consulted: dt.date | None = Field(default=None, description="Date the source was consulted.")
    note: str | None = None
