"""Expected values of wet-bath and dry-gas standards against published equations."""

import math

import pytest

from pipeline.settings import StandardsSettings
from pipeline.standards.expected_values import (air_water_partition, expected_dry_gas, expected_wet_bath,
                                                standard_atmosphere_pressure, temperature_factor,
                                                vapour_from_solution)


def test_partition_coefficient_at_34c():
    # Dubowski (1979), J. Anal. Toxicol. 3:177-182, K_a/w x 10^3 = 0.04145 exp(0.06583 T): K(34.0) = 3.887e-4 (water:air 1:2573).
    assert air_water_partition(34.0) == pytest.approx(3.887e-4, rel=1e-3)
    assert 1 / air_water_partition(34.0) == pytest.approx(2573, rel=1e-3)


def test_simulator_solution_gives_about_0100():
    # Common practice: a simulator solution of about 0.121 g/100 mL gives about 0.100 g/210L at 34 C;
    # by Dubowski (1979) it gives 0.0988 (0.1225 g/100 mL would give 0.100), so "about" is within 2 %.
    assert vapour_from_solution(0.121, 34.0) == pytest.approx(0.100, rel=0.02)
    # Dubowski (1979): the solution that gives 0.100 g/210L at 34.0 C is 0.1225 g/100 mL (COMPUTED).
    assert vapour_from_solution(0.1225, 34.0) == pytest.approx(0.100, rel=1e-3)


def test_solution_to_vapour_setting_is_the_common_practice_ratio():
    # Common practice (from memory): 0.121 g/100 mL solution for a 0.100 g/210L standard.
    assert 0.121 * StandardsSettings().wet_bath_solution_to_vapour == pytest.approx(0.100, rel=1e-12)


def test_one_degree_is_about_six_and_a_half_percent():
    # Dubowski (1979): relative sensitivity d ln K / dT = 0.06583 per C, about 6.5 % per C (common practice).
    assert math.log(temperature_factor(35.0)) == pytest.approx(0.065, abs=0.001)
    # Dubowski (1979): a whole +1 C step compounds to +6.8 % (COMPUTED: exp(0.06583) - 1).
    assert temperature_factor(35.0) - 1 == pytest.approx(0.068, abs=0.0005)
    # Dubowski (1979): +0.2 C multiplies the vapour concentration by 1.0133 (COMPUTED).
    assert temperature_factor(34.2) == pytest.approx(1.0133, abs=1e-4)


def test_wet_bath_expected_at_nominal_is_the_lot_value():
    # Definition: lot value is certified at 34.0 C, so no correction at 34.0 C.
    assert expected_wet_bath(0.080, 34.0) == pytest.approx(0.080, rel=1e-15)
    # Dubowski (1979): exp(0.06583 x -0.3) = 0.98044.
    assert expected_wet_bath(0.080, 33.7) == pytest.approx(0.080 * 0.98044, rel=1e-5)


def test_standard_atmosphere_at_1600_m():
    # ICAO Doc 7488 / ISO 2533 standard atmosphere (from memory: 835.2 hPa at 1600 m; 845.6 hPa at 1500 m).
    assert standard_atmosphere_pressure(1600.0) == pytest.approx(83.52, abs=0.01)
    assert standard_atmosphere_pressure(1500.0) == pytest.approx(84.56, abs=0.01)
    # ISO 2533: 101.325 kPa at mean sea level.
    assert standard_atmosphere_pressure(0.0) == 101.325


def test_ideal_gas_scaling_at_1600_m():
    # Ideal gas (Dalton/Boyle): expected = label x P / 101.325; ICAO standard atmosphere at 1600 m gives x 0.8243.
    assert expected_dry_gas(0.100, standard_atmosphere_pressure(1600.0)) == pytest.approx(0.08243, abs=1e-5)
    # Published check values (COMPUTED, standard atmosphere from memory): at 1609 m the factor is 0.8234.
    assert expected_dry_gas(1.0, standard_atmosphere_pressure(1609.0)) == pytest.approx(0.8234, abs=1e-4)


def test_temperature_factor_is_a_pure_exponential():
    # Dubowski (1979): the ratio K(T1)/K(T2) = exp(0.06583 (T1 - T2)), independent of the constant.
    assert air_water_partition(34.5) / air_water_partition(34.0) == pytest.approx(math.exp(0.06583 * 0.5), rel=1e-12)
