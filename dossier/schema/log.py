"""The observing log: one row per measure of a pair's relative position.

A system's log is ``systems/<id>/log.csv``, a plain CSV file with a header
row (column names below) so that a collaboration reviews additions as
ordinary diffs and a spreadsheet opens it. Position angle θ in degrees,
north through east; separation ρ in arcsec. The log is itself a source:
a measure needs no ``ref`` unless it was copied from the literature.

Epochs are stored unambiguously: ``J2019.4123`` (Julian year),
``B1950.512`` (Besselian year) or an ISO date/time ``2019-05-03T22:10``
(UTC). A bare number is refused in the log, because old double-star
measures were customarily given in Besselian years and modern ones in
Julian years: the observer must say which.
"""

from __future__ import annotations

import re
from typing import Literal

from pydantic import Field, field_validator, model_validator

from dossier.schema.models import ID_PATTERN, Model

LOG_FILE = "log.csv"

Method = Literal[
    "eyepiece-micrometer",
    "filar-micrometer",
    "imaging",
    "speckle",
    "lucky-imaging",
    "eyepiece-estimate",
    "literature",
]

#: Methods whose position angles are customarily referred to the equinox of date.
EQUINOX_OF_DATE_METHODS = frozenset({"eyepiece-micrometer", "filar-micrometer", "eyepiece-estimate"})

#: Column order of log.csv; also the order of LogMeasure's fields.
COLUMNS: tuple[str, ...] = (
    "pair",
    "epoch",
    "theta",
    "theta_error",
    "rho",
    "rho_error",
    "delta_mag",
    "band",
    "method",
    "equinox",
    "aperture_cm",
    "observer",
    "site",
    "nights",
    "quality",
    "notes",
    "ref",
)

_LOG_EPOCH = re.compile(r"^(J|B)\d{3,4}(\.\d+)?$")


class LogMeasure(Model):
    """One measure of the relative position of a pair's two members."""

    pair: str = Field(pattern=ID_PATTERN, description="Pair id, as in the evidence file.")
    epoch: str = Field(description="J2019.4123, B1950.512 or an ISO date/time (UTC); never a bare number.")
    theta: float = Field(ge=0, lt=360, description="Position angle, north through east [deg]",
                         json_schema_extra={"unit": "deg"})
    theta_error: float | None = Field(default=None, gt=0, description="1σ uncertainty of θ [deg]; "
                                      "else the method's default weight", json_schema_extra={"unit": "deg"})
    rho: float = Field(gt=0, description="Separation [arcsec]", json_schema_extra={"unit": "arcsec"})
    rho_error: float | None = Field(default=None, gt=0, description="1σ uncertainty of ρ [arcsec]",
                                    json_schema_extra={"unit": "arcsec"})
    delta_mag: float | None = Field(default=None, description="Magnitude difference [mag]",
                                    json_schema_extra={"unit": "mag"})
    band: str | None = None
    method: Method
    equinox: Literal["J2000", "date"] | None = Field(
        default=None,
        description="Equinox θ is referred to; default 'date' for micrometer and eyepiece methods, else 'J2000'.",
    )
    aperture_cm: float | None = Field(default=None, gt=0, description="Telescope aperture [cm]",
                                      json_schema_extra={"unit": "cm"})
    observer: str | None = None
    site: str | None = None
    nights: int | None = Field(default=None, ge=1, description="Number of nights averaged in this measure.")
    quality: str | None = Field(default=None, description="Seeing or quality note, in the observer's words.")
    notes: str | None = None
    ref: str | None = Field(default=None, pattern=ID_PATTERN, description="Source id when copied from the literature.")

    @field_validator("epoch", mode="before")
    @classmethod
    def _epoch(cls, value: object) -> str:
        import datetime as dt

        text = str(value).strip() if value is not None else ""
        if _LOG_EPOCH.match(text):
            return text
        try:
            dt.datetime.fromisoformat(text)
        except ValueError:
            pass
        else:
            return text
        if re.match(r"^\d{3,4}(\.\d+)?$", text):
            raise ValueError(
                f"'{text}' is ambiguous: a Julian or a Besselian year? "
                f"Fix: write J{text} or B{text}"
            )
        raise ValueError(
            f"'{text}' is not an epoch. Fix: write J2019.412, B1950.512 or a date such as 2019-05-03"
        )

    @model_validator(mode="after")
    def _default_equinox(self) -> LogMeasure:
        if self.equinox is None:
            default = "date" if self.method in EQUINOX_OF_DATE_METHODS else "J2000"
            object.__setattr__(self, "equinox", default)
        return self

    def key(self) -> tuple:
        """What makes two measures the same measure (for refusing exact duplicates)."""
        return tuple(getattr(self, c) for c in COLUMNS)
