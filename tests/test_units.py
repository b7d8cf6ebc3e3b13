"""Unit conversions among g/210L, mg/L and ug/100mL."""

import numpy as np
import pytest

from pipeline.units import from_storage, normalise_unit, to_storage


@pytest.mark.parametrize(("value", "unit", "expected_g210"), [
    # Source: unit definitions, common practice: 1 g/210 L = 1000 mg / 210 L = 4.7619 mg/L.
    (0.380952, "mg/L", 0.080),
    # Source: unit definitions, common practice: 1 mg/L = 100 ug/100 mL, so 0.080 g/210L = 38.0952 ug/100mL.
    (38.0952, "ug/100mL", 0.080),
    (0.080, "g/210L", 0.080),
    # Source: ../shared/reference/published-check-values.md: 1 g/210 L = 476.19 ug/100 mL.
    (476.19, "µg/100 mL", 1.0),
])
def test_to_storage_matches_unit_definitions(value, unit, expected_g210):
    assert to_storage(value, unit) == pytest.approx(expected_g210, rel=2e-6)


def test_round_trip_is_exact_to_float_precision():
    values = np.array([0.0, 0.02, 0.08, 0.16, 0.5])
    for unit in ("g/210L", "mg/L", "ug/100mL"):
        np.testing.assert_allclose(to_storage(from_storage(values, unit), unit), values, rtol=1e-12)


def test_unknown_unit_is_reported():
    assert normalise_unit("g/dL") is None
    with pytest.raises(KeyError):
        to_storage(0.08, "g/dL")
