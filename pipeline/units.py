"""Breath alcohol concentration units. Storage unit is g/210L.

Source: unit definitions (common practice). 1 g/210 L of breath = 1000 mg / 210 L
= 4.7619 mg/L; 1 mg/L = 100 ug/100 mL.
"""

from __future__ import annotations

import numpy as np

STORAGE_UNIT = "g/210L"
MG_PER_L_PER_G_PER_210L = 1000.0 / 210.0
UG_PER_100ML_PER_G_PER_210L = MG_PER_L_PER_G_PER_210L * 100.0

# Factor that turns a value in the named unit into g/210L. Spellings are normalised first.
TO_STORAGE = {
    "g/210l": 1.0,
    "mg/l": 1.0 / MG_PER_L_PER_G_PER_210L,
    "ug/100ml": 1.0 / UG_PER_100ML_PER_G_PER_210L,
}

_SPELLINGS = {
    "g/210l": "g/210l", "g/210 l": "g/210l", "g210l": "g/210l",
    "mg/l": "mg/l", "mg/ l": "mg/l", "mgl": "mg/l",
    "ug/100ml": "ug/100ml", "µg/100ml": "ug/100ml", "μg/100ml": "ug/100ml",
    "ug/100 ml": "ug/100ml", "µg/100 ml": "ug/100ml", "mcg/100ml": "ug/100ml",
}


def normalise_unit(unit: str) -> str | None:
    """Return the canonical key of a unit spelling, or None when it is not a known unit."""
    return _SPELLINGS.get(unit.strip().lower())


def to_storage(value: float | np.ndarray, unit: str) -> float | np.ndarray:
    """Convert a concentration in `unit` to g/210L.

    Raises:
        KeyError: when `unit` is not a known unit spelling.
    """
    key = normalise_unit(unit)
    if key is None:
        raise KeyError(unit)
    return value * TO_STORAGE[key]


def from_storage(value: float | np.ndarray, unit: str) -> float | np.ndarray:
    """Convert a concentration in g/210L to `unit`."""
    key = normalise_unit(unit)
    if key is None:
        raise KeyError(unit)
    return value / TO_STORAGE[key]
