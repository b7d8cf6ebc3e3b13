"""Expected values of reference standards: the formulas the view `check_results_live` applies.

Kept in Python for tests, for the uncertainty budget's sensitivity coefficients and for
one-off calculations; the view computes the same thing in SQL over all checks.
"""

from __future__ import annotations

import math

# Dubowski (1979), J. Anal. Toxicol. 3:177-182: K_a/w x 10^3 = 0.04145 exp(0.06583 T), T in deg C.
DUBOWSKI_A = 0.04145e-3
DUBOWSKI_B = 0.06583
# ICAO Doc 7488 / ISO 2533 standard atmosphere, troposphere.
ISA_SEA_LEVEL_KPA = 101.325
ISA_LAPSE_FACTOR = 2.25577e-5   # per metre
ISA_EXPONENT = 5.25588
# 1 g/210L of breath = 1/210 g per litre of air.
LITRES_PER_BREATH_UNIT = 210.0


def air_water_partition(temperature_c: float) -> float:
    """Ethanol air/water partition coefficient K_a/w (g/L air per g/L water) at a temperature.

    Source: Dubowski (1979), "Breath-alcohol simulators: scientific basis and actual performance".
    """
    return DUBOWSKI_A * math.exp(DUBOWSKI_B * temperature_c)


def vapour_from_solution(solution_g_per_100ml: float, temperature_c: float) -> float:
    """Headspace vapour concentration in g/210L over a simulator solution, by Dubowski's equation."""
    solution_g_per_l = solution_g_per_100ml * 10.0
    return solution_g_per_l * air_water_partition(temperature_c) * LITRES_PER_BREATH_UNIT


def temperature_factor(temperature_c: float, nominal_c: float = 34.0, coefficient: float = DUBOWSKI_B) -> float:
    """Factor scaling a wet-bath lot value certified at nominal_c to the logged temperature.

    Source: Dubowski (1979); the pre-exponential constant cancels in the ratio.
    """
    return math.exp(coefficient * (temperature_c - nominal_c))


def standard_atmosphere_pressure(elevation_m: float) -> float:
    """Barometric pressure in kPa at a geopotential elevation in the ICAO/ISO 2533 troposphere."""
    return ISA_SEA_LEVEL_KPA * (1.0 - ISA_LAPSE_FACTOR * elevation_m) ** ISA_EXPONENT


def pressure_factor(pressure_kpa: float, reference_kpa: float = ISA_SEA_LEVEL_KPA) -> float:
    """Ideal-gas factor for a dry-gas standard certified at the reference pressure."""
    return pressure_kpa / reference_kpa


def expected_wet_bath(lot_value: float, temperature_c: float, nominal_c: float = 34.0,
                      coefficient: float = DUBOWSKI_B) -> float:
    """Expected reading of a wet-bath check: lot value scaled from nominal_c to temperature_c."""
    return lot_value * temperature_factor(temperature_c, nominal_c, coefficient)


def expected_dry_gas(lot_value: float, pressure_kpa: float, reference_kpa: float = ISA_SEA_LEVEL_KPA) -> float:
    """Expected reading of a dry-gas check at a barometric pressure (instrument not compensating)."""
    return lot_value * pressure_factor(pressure_kpa, reference_kpa)
