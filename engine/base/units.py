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
