"""The catalog fields of a grade: one table that the store, the importer, the ranking,
the command line and the dashboard read.

A new catalog field is one entry here (and, because the library stores each field in a
column of its own, one numbered migration in :mod:`engine.library.migrations`).

Examples
--------
>>> FIELDS["hardness"].unit
'Shore A'
>>> FIELDS["poisson_ratio"].accepts([0.3, 0.5, 0.6]).tolist()
[True, True, False]
>>> [f.name for f in number_fields()][:3]
['density', 'price', 'hardness']
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from engine.base.units import ABSOLUTE_ZERO_C

MODES = ("tensile", "shear")  # the modulus a grade's data give: E (tensile) or G (shear)


@dataclass(frozen=True)
class CatalogField:
    """One catalog column.

    ``kind`` is "text", "choice" (one of ``choices``) or "number". A number lies between
    ``low`` and ``high`` (either may be open, either may be absent), in ``unit`` as
    stored; ``header_unit`` is the unit the importer expects in a column header
    ("temperature" takes any temperature unit and converts it to °C). ``rule`` is the
    importer's reason for a rejected value, ``accepted`` what a catalog edit accepts,
    ``label`` the dashboard's column title and ``json_name`` the key in the command
    line's JSON.
    """

    name: str
    kind: str
    label: str
    unit: str | None = None
    header_unit: str | None = None
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    required: bool = False
    choices: tuple[str, ...] = ()
    rule: str = ""
    accepted: str = "text"
    json_name: str = ""

    def __post_init__(self) -> None:
        if not self.json_name:
            object.__setattr__(self, "json_name", self.name)

    def accepts(self, values) -> np.ndarray:
        """Which of ``values`` (numbers, NaN for blank) this field accepts; blanks pass."""
        v = np.asarray(values, dtype=float)
        ok = np.ones(v.shape, dtype=bool)
        with np.errstate(invalid="ignore"):
            if self.low is not None:
                ok &= (v > self.low) if self.low_open else (v >= self.low)
            if self.high is not None:
                ok &= (v < self.high) if self.high_open else (v <= self.high)
        return ok | np.isnan(v)


def _temperature(name: str, label: str, json_name: str) -> CatalogField:
    return CatalogField(
        name,
        "number",
        label,
        unit="degC",
        header_unit="temperature",
        low=ABSOLUTE_ZERO_C,
        rule="temperature below absolute zero",
        accepted="a temperature above absolute zero [degC]",
        json_name=json_name,
    )


CATALOG: tuple[CatalogField, ...] = (
    CatalogField("name", "text", "name", required=True, accepted="non-blank text"),
    CatalogField(
        "mode", "choice", "mode", required=True, choices=MODES, accepted="tensile or shear"
    ),
    CatalogField("supplier", "text", "supplier"),
    CatalogField("family", "text", "family"),
    CatalogField(
        "density",
        "number",
        "density [kg/m3]",
        unit="kg/m3",
        header_unit="kg/m3",
        low=0.0,
        low_open=True,
        rule="density must be positive",
        accepted="a positive density [kg/m3]",
        json_name="density_kg_m3",
    ),
    CatalogField(
        "price",
        "number",
        "price [per kg]",
        unit="per kg",
        header_unit="per kg",
        low=0.0,
        rule="price must not be negative",
        accepted="a price of zero or more",
        json_name="price_per_kg",
    ),
    CatalogField(
        "hardness",
        "number",
        "hardness [Shore A]",
        unit="Shore A",
        header_unit="Shore A",
        low=0.0,
        high=100.0,
        rule="Shore A hardness lies between 0 and 100",
        accepted="a Shore A hardness between 0 and 100",
        json_name="hardness_shore_a",
    ),
    _temperature("service_min", "service from [degC]", "service_min_C"),
    _temperature("service_max", "service to [degC]", "service_max_C"),
    CatalogField(
        "poisson_ratio",
        "number",
        "Poisson's ratio",
        low=-1.0,
        high=0.5,
        low_open=True,
        rule="Poisson's ratio lies in (-1, 0.5]",
        accepted="a Poisson's ratio in (-1, 0.5]",
    ),
    CatalogField(
        "bulk_modulus",
        "number",
        "bulk modulus [MPa]",
        unit="MPa",
        header_unit="MPa",
        low=0.0,
        low_open=True,
        rule="bulk modulus must be positive",
        accepted="a positive bulk modulus [MPa]",
        json_name="bulk_modulus_MPa",
    ),
    CatalogField("notes", "text", "notes"),
)
FIELDS: dict[str, CatalogField] = {f.name: f for f in CATALOG}
FIELD_NAMES: tuple[str, ...] = tuple(FIELDS)


def number_fields() -> tuple[CatalogField, ...]:
    """The numeric catalog fields, in table order."""
    return tuple(f for f in CATALOG if f.kind == "number")


def text_fields() -> tuple[CatalogField, ...]:
    """The optional free-text catalog fields, in table order."""
    return tuple(f for f in CATALOG if f.kind == "text" and not f.required)
