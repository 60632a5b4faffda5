"""Bad input: a ValueError that names the argument and the value, before any work."""

import numpy as np
import pytest

import exosieve
from exosieve.constants import M_EARTH, R_EARTH


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"temperature": -10.0}, "temperature must be finite and > 0, got -10"),
        ({"temperature": np.nan}, "temperature must be finite and > 0, got nan"),
        ({"temperature": np.inf}, "temperature must be finite and > 0, got inf"),
        ({"mass": 0.0}, "mass must be finite and > 0, got 0"),
        ({"planet_mass": -1.0}, "planet_mass must be finite and > 0, got -1"),
        ({"radius": 0.0}, "radius must be finite and > 0, got 0"),
        ({"density": -5.0}, "density must be finite and >= 0, got -5"),
    ],
)
def test_flux_rejects_bad_scalars(kwargs, message):
    args = {
        "density": 1e10,
        "temperature": 1000.0,
        "mass": exosieve.species("H").mass,
        "planet_mass": M_EARTH,
        "radius": R_EARTH,
    }
    args.update(kwargs)
    with pytest.raises(ValueError, match=message):
        exosieve.jeans_flux(**args)


def test_array_error_names_the_element():
    T = np.array([300.0, 400.0, -1.0])
    with pytest.raises(
        ValueError, match=r"temperature must be finite and > 0, got -1 \(element 2\)"
    ):
        exosieve.jeans_parameter(T, "H", M_EARTH, R_EARTH)


def test_exceptions_are_value_errors_and_package_errors_are_distinct():
    assert issubclass(exosieve.InputError, ValueError)
    assert issubclass(exosieve.NumericalError, exosieve.ExosieveError)
    assert not issubclass(exosieve.ExosieveError, ValueError)


def test_non_numeric_input():
    with pytest.raises(ValueError, match="temperature must be a number"):
        exosieve.most_probable_speed("hot", 1.0)
    with pytest.raises(ValueError, match="unknown species 'Hx'"):
        exosieve.most_probable_speed(300.0, "Hx")


def test_negative_speed():
    with pytest.raises(ValueError, match="speed must be finite and >= 0, got -3"):
        exosieve.fraction_faster(-3.0, 300.0, "N2")
