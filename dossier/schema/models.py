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

Hostile or mistaken input is refused here with a message and a fix: numbers
must be finite (no ``.nan``/``.inf``) and never booleans, angles and
separations must lie in their ranges, and the epoch of an observation may
not be later than today. Parallaxes are not range-checked: a negative or tiny
parallax is a valid measurement.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
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
#: Longest system id: it names a folder and the files built from it.
MAX_SYSTEM_ID_LENGTH = 64
_EPOCH_RE = re.compile(r"^[JB]\d{3,4}(\.\d+)?$")
_JD_RE = re.compile(r"^B?JD\s?\d{5,7}(\.\d+)?$")


def is_identifier(text: object) -> bool:
    """Whether ``text`` is an id (the whole text: ``re.match`` with ``$`` would let a final newline through)."""
    return isinstance(text, str) and re.fullmatch(ID_PATTERN[1:-1], text) is not None


class Model(BaseModel):
    """Base of every evidence model: unknown keys are errors, values are frozen, numbers are finite."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True, allow_inf_nan=False)


def _not_bool(value: Any) -> Any:
    # pydantic would read true/false as 1.0/0.0: in an evidence file that is always a mistake
    if isinstance(value, bool):
        raise ValueError(f"{str(value).lower()} is not a number. Fix: write a number (true/false are not numbers)")
    return value


#: A float that refuses booleans (and, through the models' configuration, NaN and infinities).
Number = Annotated[float, BeforeValidator(_not_bool)]


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
        try:
            text = f"J{float(value)}"
        except OverflowError:  # an integer beyond any float
            raise ValueError(f"{str(value)[:20]}… is not an epoch. Fix: write J2016.0, B1950.0 or a date such as "
                             "2019-05-03") from None
        if _EPOCH_RE.match(text):
            return text
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


def epoch_year(text: str) -> float | None:
    """An epoch as a Julian year (to a fraction of a day), or ``None`` when it cannot be read.

    J: the number itself; B: through the Julian date, JD = 2415020.31352 +
    365.242198781 (B - 1900) (Lieske 1979, A&A 73, 282); JD/BJD: 2000 +
    (JD - 2451545.0) / 365.25; ISO dates and times are UTC. Precise enough to
    tell whether an epoch is in the future; never used for astrometry.
    """
    text = text.strip()
    try:
        if _EPOCH_RE.match(text):
            number = float(text[1:])
            if text[0] == "J":
                return number
            return 2000.0 + (2415020.31352 + 365.242198781 * (number - 1900.0) - 2451545.0) / 365.25
        if _JD_RE.match(text):
            return 2000.0 + (float(re.sub(r"^B?JD\s?", "", text)) - 2451545.0) / 365.25
        moment = dt.datetime.fromisoformat(text)
    except (ValueError, OverflowError):
        return None
    if moment.tzinfo is not None:
        moment = moment.astimezone(dt.timezone.utc).replace(tzinfo=None)
    days = (moment - dt.datetime(2000, 1, 1, 12)).total_seconds() / 86400.0
    return 2000.0 + days / 365.25


def today_year() -> float:
    """Now (UTC) as a Julian year."""
    now = dt.datetime.now(dt.timezone.utc).replace(tzinfo=None)
    return 2000.0 + (now - dt.datetime(2000, 1, 1, 12)).total_seconds() / 86400.0 / 365.25


def future_epoch_error(text: str) -> str | None:
    """The message (``what. Fix: ...``) when an observation's epoch is later than today, else ``None``.

    A day of grace covers time zones and clocks. A measure dated in the
    future is always a mistake (a wrong year, or J written for B), so the
    loader refuses it rather than warn.
    """
    year = epoch_year(text)
    if year is None or not math.isfinite(year) or year <= today_year() + 1.0 / 365.25:
        return None
    today = dt.datetime.now(dt.timezone.utc).date().isoformat()
    return (f"the epoch {text} is later than today ({today}): an observation cannot be in the future. "
            "Fix: correct the epoch (check the year, and J or B)")


def _not_future(value: str) -> str:
    message = future_epoch_error(value)
    if message is not None:
        raise ValueError(message)
    return value


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

#: The epoch of an observation or measurement: as :data:`Epoch`, and not later than today.
ObservedEpoch = Annotated[Epoch, AfterValidator(_not_future)]


class Measured(Model):
    """A measured value with its 1σ uncertainty and the id of its source."""

    value: Number = Field(description="The value, in the unit of the field it belongs to.")
    uncertainty: Number = Field(gt=0, description="1σ uncertainty, same unit as the value (must be > 0).")
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


def _range(what: str, low: float, high: float, low_open: bool = False, high_open: bool = False,
           hint: str = "") -> AfterValidator:
    """A check that a measured value lies in [low, high] (a bound may be open, and infinite)."""

    def check(value: Measured | None) -> Measured | None:
        if value is None:
            return value
        x = value.value
        too_low = x <= low if low_open else x < low
        too_high = x >= high if high_open else x > high
        if too_low or too_high:
            interval = f"{'(' if low_open else '['}{_g(low)}, {_g(high)}{')' if high_open else ']'}"
            if high == math.inf:
                interval = f"{'greater than' if low_open else 'at least'} {_g(low)}"
            raise ValueError(f"{what} {_g(x)} is out of range: it must be {interval}. Fix: {hint or 'correct the value'}")
        return value

    return AfterValidator(check)


def _g(x: float) -> str:
    return f"{x:g}"


_POSITION_ANGLE = _range("the position angle", 0, 360, high_open=True,
                         hint="give it in degrees from 0 to 360, north through east (add or subtract 360)")
def _positive(what: str, unit: str) -> AfterValidator:
    return _range(f"the {what}", 0, math.inf, low_open=True, hint=f"give a positive number in {unit}")


_SEPARATION = _range("the separation", 0, math.inf, low_open=True, hint="give the separation in arcsec, a positive number")


class SkyPosition(Model):
    """Nominal position of the system, for display and for field queries."""

    ra: Number = Field(ge=0, lt=360, description="Right ascension [deg]", json_schema_extra=_unit("deg"))
    dec: Number = Field(ge=-90, le=90, description="Declination [deg]", json_schema_extra=_unit("deg"))
    frame: Literal["icrs"] = Field(default="icrs", description="Reference frame; only ICRS is supported.")
    epoch: Epoch = "J2016.0"


class Correlations(Model):
    """Correlation coefficients between the astrometric parameters of one solution."""

    parallax_pmra: Annotated[float, Field(ge=-1, le=1), BeforeValidator(_not_bool)] | None = None
    parallax_pmdec: Annotated[float, Field(ge=-1, le=1), BeforeValidator(_not_bool)] | None = None
    pmra_pmdec: Annotated[float, Field(ge=-1, le=1), BeforeValidator(_not_bool)] | None = None
    ra_dec: Annotated[float, Field(ge=-1, le=1), BeforeValidator(_not_bool)] | None = None


class Astrometry(Model):
    """One astrometric solution of one component, from one source."""

    ref: Identifier = Field(description="Source id from references.yaml; the default for every value here.")
    epoch: ObservedEpoch
    ra: Annotated[Measured, _range("the right ascension", 0, 360, high_open=True,
                                   hint="give it in degrees from 0 to 360 (not in hours)")] | None = Field(
        default=None,
        description="Right ascension (ICRS): value in deg, uncertainty in mas multiplied by cos δ [deg, mas]",
        json_schema_extra=_unit("deg (uncertainty in mas)"),
    )
    dec: Annotated[Measured, _range("the declination", -90, 90, hint="give it in degrees from -90 to +90")] | None = Field(
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

    epoch: ObservedEpoch
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
    mass: Annotated[Measured, _positive("mass", "solar masses")] | None = measured("Msun", "Mass")
    teff: Annotated[Measured, _positive("effective temperature", "K")] | None = measured("K", "Effective temperature")
    radius: Annotated[Measured, _positive("radius", "solar radii")] | None = measured("Rsun", "Radius")
    luminosity: Annotated[Measured, _positive("luminosity", "solar luminosities (not log L)")] | None = measured(
        "Lsun", "Luminosity")
    age: Annotated[Measured, _positive("age", "Myr")] | None = measured("Myr", "Age")
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

    epoch: ObservedEpoch
    theta: Annotated[Measured, _POSITION_ANGLE] = Field(
        description="Position angle, north through east [deg]", json_schema_extra=_unit("deg"))
    rho: Annotated[Measured, _SEPARATION] = Field(description="Separation [arcsec]", json_schema_extra=_unit("arcsec"))
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
    epoch: ObservedEpoch
    rho: Annotated[Measured, _SEPARATION] | None = measured("arcsec", "Separation")
    theta: Annotated[Measured, _POSITION_ANGLE] | None = measured("deg", "Position angle")
    delta_mag: Measured | None = measured("mag", "Magnitude difference")
    band: str | None = None
    ref: Identifier


class NonDetection(Model):
    """A search that found nothing, with its sensitivity."""

    around: Identifier
    method: ClaimMethod
    epoch: ObservedEpoch
    rho_range: tuple[Number, Number] = Field(description="Searched separations [arcsec]", json_schema_extra=_unit("arcsec"))
    contrast: Number = Field(description="Faintest Δm detectable in that range [mag]", json_schema_extra=_unit("mag"))
    band: str | None = None
    ref: Identifier

    @field_validator("rho_range")
    @classmethod
    def _separations_not_negative(cls, value: tuple[float, float]) -> tuple[float, float]:
        if min(value) < 0:
            raise ValueError(f"a separation cannot be negative, got [{_g(value[0])}, {_g(value[1])}]. "
                             "Fix: write [smallest, largest] in arcsec, both at least 0")
        return value


class PublishedOrbit(Model):
    """Orbital elements published for a pair.

    Visual orbits use the Campbell elements P, T, e, a, i, Ω, ω;
    spectroscopic orbits P, T, e, ω, K. Give what the source gives.
    """

    pair: Identifier
    kind: Literal["visual", "spectroscopic", "astrometric", "combined"]
    period: Annotated[Measured, _positive("period", "days or years")] = Field(
        description="Period, in period_unit [d or yr]", json_schema_extra={"unit": "d or yr"})
    period_unit: Literal["d", "yr"] = Field(default="d", description="Unit of the period: days or Julian years.")
    periastron_time: Measured | None = measured("yr", "Time of periastron passage T, as a Julian year")
    eccentricity: Annotated[Measured, _range("the eccentricity", 0, 1, high_open=True,
                                             hint="give e from 0 up to (not including) 1")] | None = measured(
        "", "Eccentricity e")
    semimajor_axis: Annotated[Measured, _positive("semimajor axis", "arcsec")] | None = measured(
        "arcsec", "Angular semimajor axis a")
    inclination: Annotated[Measured, _range("the inclination", 0, 180, hint="give i in degrees from 0 to 180")] | None = (
        measured("deg", "Inclination i (< 90° when θ increases with time)"))
    node: Annotated[Measured, _range("the node", 0, 360, high_open=True,
                                     hint="give Ω in degrees from 0 to 360 (add or subtract 360)")] | None = measured(
        "deg", "Position angle of the ascending node Ω")
    periastron_argument: Annotated[Measured, _range("the argument of periastron", 0, 360, high_open=True,
                                                    hint="give ω in degrees from 0 to 360 (add or subtract 360)")] | None = (
        measured("deg", "Argument of periastron ω"))
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
    brighter_than: Number = Field(description="Limiting magnitude [mag]", json_schema_extra=_unit("mag"))
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
