"""GUM building blocks and one worked example reproduced from a published uncertainty guide."""

import json
import math
from pathlib import Path

import pytest

from pipeline.standards.gum import (combine_in_quadrature, combined_standard_uncertainty,
                                    effective_degrees_of_freedom, expanded_uncertainty, make_component,
                                    normal_u_from_expanded, rectangular_u, triangular_u)

QUAM_A1 = json.loads((Path(__file__).parent / "reference" / "standards_quam_a1.json").read_text())


@pytest.mark.parametrize("half_width", [0.0005, 0.2, 1.0])
def test_rectangular_distribution(half_width):
    # JCGM 100:2008 (GUM) 4.3.7: a rectangular distribution of half-width a has u = a / sqrt(3).
    assert rectangular_u(half_width) == pytest.approx(half_width / math.sqrt(3), rel=1e-12)


def test_rectangular_matches_its_variance():
    # JCGM 100:2008 4.3.7, eq. (7): u^2 = a^2 / 3 for a rectangle of width 2a (the second moment of U(-a, a)).
    a = 0.0005
    assert rectangular_u(a) ** 2 == pytest.approx(a * a / 3, rel=1e-12)


def test_triangular_distribution():
    # JCGM 100:2008 4.3.9: a symmetric triangular distribution of half-width a has u = a / sqrt(6).
    assert triangular_u(0.1) == pytest.approx(0.040825, abs=1e-6)


def test_quadrature_and_k2():
    # JCGM 100:2008 5.1.2 (uncorrelated inputs: u_c^2 = sum (c_i u_i)^2) and 6.2.1 (U = k u_c).
    assert combine_in_quadrature([0.3, 0.4]) == pytest.approx(0.5, rel=1e-12)
    components = [make_component("a", 0.3, sensitivity=-1.0), make_component("b", 0.2, sensitivity=2.0)]
    assert combined_standard_uncertainty(components) == pytest.approx(0.5, rel=1e-12)
    # JCGM 100:2008 6.3.3: k = 2 gives an interval of about 95 % for a normal distribution.
    assert expanded_uncertainty(0.5, 2.0) == pytest.approx(1.0, rel=1e-12)


def test_certificate_expanded_to_standard():
    # JCGM 100:2008 4.3.3: a certificate's U with coverage factor k gives u = U / k.
    assert normal_u_from_expanded(0.002, 2.0) == pytest.approx(0.001, rel=1e-12)


def test_welch_satterthwaite_single_type_a():
    # JCGM 100:2008 G.4.1, eq. (G.2b): with one type A input of nu dof and no other input, nu_eff = nu.
    assert effective_degrees_of_freedom([make_component("a", 0.1, evaluation="A", degrees_of_freedom=9)]) \
        == pytest.approx(9.0, rel=1e-12)


def _quam_a1_budget():
    inputs = QUAM_A1["inputs"]
    vol = inputs["volume_ml"]
    u_volume = combine_in_quadrature([triangular_u(vol["calibration_half_width"]),
                                      rectangular_u(vol["temperature_half_width"]),
                                      vol["repeatability_sd"]])
    m, p, v = inputs["mass_mg"]["value"], inputs["purity"]["value"], vol["value"]
    c = 1000 * m * p / v
    components = [
        make_component("purity", rectangular_u(inputs["purity"]["half_width"]), sensitivity=1000 * m / v),
        make_component("mass", inputs["mass_mg"]["published_u"], sensitivity=1000 * p / v),
        # The guide carries u(V) rounded to 0.07 mL into the combination.
        make_component("volume", vol["published_u"], sensitivity=-1000 * m * p / v ** 2),
    ]
    return c, u_volume, components


def test_quam_example_a1_calibration_standard():
    c, u_volume, components = _quam_a1_budget()
    published = QUAM_A1["published"]
    # EURACHEM/CITAC QUAM, Example A1, Table A1.1: c_Cd = 1002.7 mg/L.
    assert round(c, 1) == published["c_mg_per_l"]
    # QUAM Example A1, Table A1.1: u(P) = 0.000058 (rectangular, 0.0001 / sqrt(3)).
    assert rectangular_u(QUAM_A1["inputs"]["purity"]["half_width"]) == pytest.approx(
        QUAM_A1["inputs"]["purity"]["published_u"], abs=5e-7)
    # QUAM Example A1, volume components and Table A1.1: u(V) = 0.07 mL from triangular 0.1/sqrt(6), rectangular 0.084/sqrt(3), s 0.02.
    assert round(u_volume, 2) == QUAM_A1["inputs"]["volume_ml"]["published_u"]
    uc = combined_standard_uncertainty(components)
    # QUAM Example A1, Table A1.1: u_c(c_Cd) = 0.9 mg/L, relative 0.0009.
    assert round(uc, 1) == published["u_c_mg_per_l"]
    assert round(uc / c, 4) == published["relative_u"]
    # QUAM Example A1, expanded uncertainty: U = 2 x 0.9 = 1.8 mg/L (the guide doubles the rounded u_c).
    assert 2 * round(uc, 1) == pytest.approx(published["expanded_k2_mg_per_l"])
    assert expanded_uncertainty(uc) == pytest.approx(2 * uc)
