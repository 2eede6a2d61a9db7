"""Units at the edges: parse a bracketed header unit and convert to the internal units.

Internal units (see the glossary in DEVELOPERS.md): temperature [degC], frequency [Hz],
modulus [Pa]. The command line and JSON use degC, Hz and MPa.
"""

from __future__ import annotations

import re

import numpy as np

ABSOLUTE_ZERO_C = -273.15
PSI_IN_PA = 6894.757293168361  # 1 lbf/in^2 (NIST SP 811, exact by definition of lbf and inch)

TEMPERATURE_UNITS = ("degC", "K", "degF")
FREQUENCY_UNITS = ("Hz", "rad/s")
MODULUS_UNITS = {"Pa": 1.0, "kPa": 1e3, "MPa": 1e6, "GPa": 1e9, "psi": PSI_IN_PA}

# Spellings seen in instrument exports, mapped onto the canonical unit names above.
_ALIASES = {
    "°c": "degC",
    "degc": "degC",
    "c": "degC",
    "celsius": "degC",
    "k": "K",
    "kelvin": "K",
    "°f": "degF",
    "degf": "degF",
    "f": "degF",
    "hz": "Hz",
    "rad/s": "rad/s",
    "rad s-1": "rad/s",
    "rad/sec": "rad/s",
    "pa": "Pa",
    "kpa": "kPa",
    "mpa": "MPa",
    "gpa": "GPa",
    "psi": "psi",
}

_HEADER = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*(?:\[(?P<unit>[^\[\]]*)\])?\s*$")


def split_header(header: str) -> tuple[str, str | None]:
    """Split ``'storage_modulus [MPa]'`` into ``('storage_modulus', 'MPa')``.

    The name is lower-cased and stripped; the unit is returned as written (or None).
    """
    match = _HEADER.match(str(header))
    if match is None:
        return str(header).strip().lower(), None
    unit = match.group("unit")
    return match.group("name").strip().lower(), (unit.strip() if unit is not None else None)


def canonical_unit(unit: str) -> str | None:
    """Canonical spelling of a unit, or None when it is not one we know."""
    key = unit.strip()
    if key in MODULUS_UNITS or key in TEMPERATURE_UNITS or key in FREQUENCY_UNITS:
        return key
    return _ALIASES.get(key.lower())


def temperature_to_c(values, unit: str) -> np.ndarray:
    """Convert temperatures to degC. ``unit`` is one of TEMPERATURE_UNITS."""
    values = np.asarray(values, dtype=float)
    if unit == "degC":
        return values
    if unit == "K":
        return values + ABSOLUTE_ZERO_C
    if unit == "degF":
        return (values - 32.0) * (5.0 / 9.0)
    raise ValueError(
        f"unknown temperature unit {unit!r}; use one of {', '.join(TEMPERATURE_UNITS)}"
    )


def frequency_to_hz(values, unit: str) -> np.ndarray:
    """Convert frequencies to Hz. ``unit`` is one of FREQUENCY_UNITS."""
    values = np.asarray(values, dtype=float)
    if unit == "Hz":
        return values
    if unit == "rad/s":
        return values / (2.0 * np.pi)
    raise ValueError(f"unknown frequency unit {unit!r}; use one of {', '.join(FREQUENCY_UNITS)}")


def modulus_to_pa(values, unit: str) -> np.ndarray:
    """Convert moduli to Pa. ``unit`` is one of MODULUS_UNITS."""
    try:
        factor = MODULUS_UNITS[unit]
    except KeyError:
        raise ValueError(
            f"unknown modulus unit {unit!r}; use one of {', '.join(MODULUS_UNITS)}"
        ) from None
    return np.asarray(values, dtype=float) * factor


def c_to_k(temperature_c):
    """degC to kelvin."""
    return np.asarray(temperature_c, dtype=float) - ABSOLUTE_ZERO_C


# -- catalog units ------------------------------------------------------------------------

POUND_IN_KG = 0.45359237  # international avoirdupois pound (NIST SP 811, exact)
FOOT_IN_M = 0.3048  # international foot (NIST SP 811, exact)
# Density to kg/m3: the factor per unit
DENSITY_UNITS = {"kg/m3": 1.0, "g/cm3": 1000.0, "lb/ft3": POUND_IN_KG / FOOT_IN_M**3}
# Price basis to "per kg": the factor that turns a price per unit into a price per kg
PRICE_UNITS = {"per kg": 1.0, "per tonne": 1e-3, "per lb": 1.0 / POUND_IN_KG}
HARDNESS_UNITS = ("Shore A",)

_DENSITY_ALIASES = {
    "kg/m3": "kg/m3",
    "kg/m^3": "kg/m3",
    "kg/m³": "kg/m3",
    "kg m-3": "kg/m3",
    "g/cm3": "g/cm3",
    "g/cm^3": "g/cm3",
    "g/cm³": "g/cm3",
    "g/cc": "g/cm3",
    "g/ml": "g/cm3",
    "g cm-3": "g/cm3",
    "lb/ft3": "lb/ft3",
    "lb/ft^3": "lb/ft3",
    "lb/ft³": "lb/ft3",
    "lb/cu ft": "lb/ft3",
    "pcf": "lb/ft3",
}
_PRICE_BASIS = {"kg": "per kg", "tonne": "per tonne", "t": "per tonne", "lb": "per lb"}
# "per kg", "/kg", "EUR/kg", "USD per tonne", "$/lb": an optional currency, then the basis
_PRICE = re.compile(r"^\s*(?:[^\s/\d]{1,4}\s*)?(?:/|per\s+)\s*(?P<basis>[a-z]+)\s*$")


def density_unit(unit: str) -> str | None:
    """Canonical density unit (a key of DENSITY_UNITS), or None when unknown."""
    return _DENSITY_ALIASES.get(unit.strip().lower().replace(" / ", "/"))


def price_unit(unit: str) -> str | None:
    """Canonical price basis (a key of PRICE_UNITS), or None when unknown.

    >>> price_unit("EUR/kg"), price_unit("per tonne"), price_unit("per m")
    ('per kg', 'per tonne', None)
    """
    match = _PRICE.match(unit.strip().lower())
    return _PRICE_BASIS.get(match.group("basis")) if match else None


def hardness_unit(unit: str) -> str | None:
    """Canonical hardness scale (one of HARDNESS_UNITS), or None for any other scale."""
    key = "".join(unit.replace("_", "").replace("-", "").split()).lower()
    return "Shore A" if key in ("shorea", "sha") else None
