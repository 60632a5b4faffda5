"""Global-ocean conversions: depth of a global equivalent layer [m] and particles of water."""

from __future__ import annotations

import doctest
import math

import numpy as np
import pytest
import scipy.constants as sc

import exosieve
from exosieve import ocean

astropy_constants = pytest.importorskip("astropy.constants")

# IUPAC 2021 standard atomic weights (abridged): H 1.008, O 15.999 -> 18.015 g/mol, with
# scipy.constants' Avogadro constant.
WATER_MOLAR_MASS = (2 * 1.008 + 15.999) * 1e-3  # [kg mol^-1]


def test_earths_ocean_is_a_layer_of_about_2_7_km():
    # Earth's oceans: about 1.4e21 kg of water, a global layer of about 2.7 km (from memory:
    # within 3%), on the IAU 2015 nominal radius (astropy.constants.R_earth).
    radius = astropy_constants.R_earth.to_value("m")
    molecules = 1.4e21 / WATER_MOLAR_MASS * sc.Avogadro
    depth = exosieve.water_to_ocean_depth(molecules, radius)
    assert depth == pytest.approx(2700.0, rel=0.03)
    # The layer's mass: rho * 4 pi R^2 * d (to 1e-9: the molar mass constant M_u is 1 g/mol
    # only to 3.5e-10 since the 2019 SI, CODATA 2018).
    assert 1000.0 * 4 * math.pi * radius**2 * depth == pytest.approx(1.4e21, rel=1e-9)
    assert exosieve.ocean_depth_to_hydrogen(depth, radius) == pytest.approx(2 * molecules)
    assert exosieve.hydrogen_to_ocean_depth(2 * molecules, radius) == pytest.approx(depth)


def test_conversions_against_scipy_constants_and_broadcasting():
    depth = np.array([[1.0], [10.0], [2700.0]])
    radius = np.array([0.5, 1.0, 2.0]) * exosieve.constants.R_EARTH
    density = 997.0  # e.g. water at 25 degrees C (from memory)
    molecules = exosieve.ocean_depth_to_water(depth, radius, density)
    expected = density * 4 * math.pi * radius**2 * depth / WATER_MOLAR_MASS * sc.Avogadro
    assert molecules.shape == (3, 3)
    np.testing.assert_allclose(molecules, expected, rtol=1e-9)
    np.testing.assert_allclose(
        exosieve.water_to_ocean_depth(molecules, radius, density), np.broadcast_to(depth, (3, 3)),
        rtol=1e-14,
    )  # fmt: skip
    assert isinstance(exosieve.ocean_depth_to_water(1.0, 6e6), float)
    assert exosieve.WATER_DENSITY == 1000.0
    assert exosieve.ocean_depth_to_water(0.0, 6e6) == 0.0


@pytest.mark.parametrize(
    ("call", "text"),
    [
        (lambda: exosieve.ocean_depth_to_water(-1.0, 6e6), "depth must be finite and >= 0"),
        (lambda: exosieve.water_to_ocean_depth(1e40, 0.0), "radius must be finite and > 0"),
        (lambda: exosieve.hydrogen_to_ocean_depth(1e40, 6e6, -5.0), "density must be finite"),
        (lambda: exosieve.ocean_depth_to_hydrogen(np.nan, 6e6), "depth"),
        (lambda: exosieve.water_to_ocean_depth([1.0, 2.0], [1.0, 2.0, 3.0]), "broadcast"),
    ],
)
def test_bad_input_names_the_argument(call, text):
    with pytest.raises(ValueError, match=text):
        call()


def test_hydrogen_atoms_from_the_formula():
    counts = {"H": 1, "D": 1, "H2": 2, "HD": 2, "H2O": 2, "CH4": 4, "NH3": 3, "He": 0, "36Ar": 0}
    assert {s: exosieve.hydrogen_atoms(s) for s in counts} == counts
    for bad in ("", "h2o", "H2-O", "water"):
        with pytest.raises(ValueError):
            exosieve.hydrogen_atoms(bad)


def test_docstring_examples():
    result = doctest.testmod(ocean)
    assert result.attempted > 0 and result.failed == 0
