"""The conventions the README promises, each tried as a user would: array functions that
broadcast and keep numpy's ``out=``/``dtype=`` and the container type of their input; result
files that say which conventions they follow and that xarray, h5py and pandas read as such."""

from __future__ import annotations

import numpy as np
import pytest

import exosieve
from exosieve.constants import AMU, AU, M_EARTH, M_SUN, R_EARTH

H = exosieve.species("H").mass

# --- the hydrodynamic helpers broadcast like every array function -------------------------------

HELPERS = {
    # name: (function, arguments as arrays of three invented planets or single values)
    "roche_lobe_ratio": (
        exosieve.roche_lobe_ratio,
        ([0.5 * M_EARTH, M_EARTH, 5 * M_EARTH], M_SUN, [0.5 * AU, AU, 0.05 * AU], R_EARTH),
    ),
    "energy_limited_mass_loss": (
        exosieve.energy_limited_mass_loss,
        (
            0.15,
            [R_EARTH, 2 * R_EARTH, 3 * R_EARTH],
            1.2 * R_EARTH,
            [1.0, 10.0, 100.0],
            M_EARTH,
            0.8,
        ),
    ),
    "crossover_mass": (
        exosieve.crossover_mass,
        (H, [500.0, 1000.0, 2000.0], [1e14, 1e15, 1e16], 1e21, 9.8, 0.9),
    ),
    "dragged_flux": (
        exosieve.dragged_flux,
        ([2 * AMU, 4 * AMU, 40 * AMU], 0.05, H, 1e16, 0.9, [10 * AMU, 10 * AMU, 30 * AMU]),
    ),
}


@pytest.mark.parametrize("name", sorted(HELPERS))
def test_hydrodynamic_helpers_broadcast_to_their_scalar_values(name):
    function, args = HELPERS[name]
    result = function(*args)
    assert isinstance(result, np.ndarray) and result.shape == (3,)
    for k in range(3):
        scalar = function(*(a[k] if isinstance(a, list) else a for a in args))
        assert isinstance(scalar, float)
        assert result[k] == scalar  # the same C++ formula, element by element
    # Broadcasting over two axes, as numpy does: (2, 1) against (3,) gives (2, 3).
    first = np.asarray(args[0] if isinstance(args[0], list) else [args[0]] * 3)
    column = np.stack([first, first])[:, :1]
    grid = function(column, *args[1:])
    assert grid.shape == (2, 3)
    np.testing.assert_array_equal(grid[1], function(first[0], *args[1:]))


def test_a_bad_element_of_a_helper_is_named_with_its_index():
    with pytest.raises(ValueError, match=r"efficiency must be <= 1, got 1.5 \(element 1\)"):
        exosieve.energy_limited_mass_loss([0.1, 1.5], R_EARTH, R_EARTH, 1.0, M_EARTH)
    with pytest.raises(ValueError, match="arguments do not broadcast together"):
        exosieve.crossover_mass(H, [1.0, 2.0], [1.0, 2.0, 3.0], 1e21, 9.8, 0.5)
