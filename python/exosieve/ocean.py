"""Water as a global ocean: depth of a global equivalent layer [m] and particles of water.

A global equivalent layer (GEL) is liquid water spread evenly over a planet's whole surface:
depth ``d`` [m] on a planet of radius ``R`` [m] holds ``N_H2O = rho 4 pi R^2 d / m_H2O`` water
molecules and ``N_H = 2 N_H2O`` hydrogen atoms (of any isotope: D counts as hydrogen), with
``rho`` the density of liquid water (default 1000 kg m^-3, common practice) and ``m_H2O`` the
species table's H2O (18.015 u, IUPAC 2021 standard atomic weights). The layer's volume is its
area times its depth, as the GEL is defined; a spherical shell would hold a relative
``d/R + (d/R)^2/3`` more (4e-4 for 2.7 km on Earth). All functions broadcast like numpy ufuncs
and return a float for scalar input.
"""

from __future__ import annotations

import re
from typing import Any

from . import _core
from ._arrays import FloatOrArray, apply

__all__ = [
    "WATER_DENSITY",
    "ocean_depth_to_water",
    "water_to_ocean_depth",
    "ocean_depth_to_hydrogen",
    "hydrogen_to_ocean_depth",
    "hydrogen_atoms",
]

WATER_DENSITY: float = float(_core.DEFAULT_WATER_DENSITY)
"""Density of liquid water used when none is given [kg m^-3]: 1000 (common practice)."""


def _args(
    name: str, amount: Any, unit: str, radius: Any, density: Any
) -> list[tuple[str, Any, str]]:
    return [(name, amount, unit), ("radius", radius, "m"), ("density", density, "kg m-3")]


def ocean_depth_to_water(depth: Any, radius: Any, density: Any = WATER_DENSITY) -> FloatOrArray:
    """Water molecules [1] in a global ocean of ``depth``.

    Parameters
    ----------
    depth : float or array_like
        Depth of the global equivalent layer [m] (>= 0).
    radius : float or array_like
        Planet radius [m] (> 0).
    density : float or array_like, optional
        Density of liquid water [kg m^-3] (> 0); default 1000 (common practice).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> f"{ocean_depth_to_water(2700.0, c.R_EARTH):.3g}"
    '4.61e+46'
    """
    return apply(_core.ocean_depth_to_water, _args("depth", depth, "m", radius, density))


def water_to_ocean_depth(molecules: Any, radius: Any, density: Any = WATER_DENSITY) -> FloatOrArray:
    """Depth [m] of the global ocean that ``molecules`` water molecules make.

    Parameters
    ----------
    molecules : float or array_like
        Water molecules [1] (>= 0).
    radius : float or array_like
        Planet radius [m] (> 0).
    density : float or array_like, optional
        Density of liquid water [kg m^-3] (> 0); default 1000 (common practice).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(water_to_ocean_depth(4.61e46, c.R_EARTH))
    2698
    """
    return apply(_core.water_to_ocean_depth, _args("molecules", molecules, "1", radius, density))


def ocean_depth_to_hydrogen(depth: Any, radius: Any, density: Any = WATER_DENSITY) -> FloatOrArray:
    """Hydrogen atoms [1] (two per water molecule) in a global ocean of ``depth``.

    Parameters
    ----------
    depth : float or array_like
        Depth of the global equivalent layer [m] (>= 0).
    radius : float or array_like
        Planet radius [m] (> 0).
    density : float or array_like, optional
        Density of liquid water [kg m^-3] (> 0); default 1000 (common practice).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> f"{ocean_depth_to_hydrogen(1.0, c.R_EARTH):.3g}"
    '3.42e+43'
    """
    return apply(_core.ocean_depth_to_hydrogen, _args("depth", depth, "m", radius, density))


def hydrogen_to_ocean_depth(atoms: Any, radius: Any, density: Any = WATER_DENSITY) -> FloatOrArray:
    """Depth [m] of the global ocean whose water holds ``atoms`` hydrogen atoms.

    Parameters
    ----------
    atoms : float or array_like
        Hydrogen atoms [1] (>= 0), of any isotope.
    radius : float or array_like
        Planet radius [m] (> 0).
    density : float or array_like, optional
        Density of liquid water [kg m^-3] (> 0); default 1000 (common practice).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(hydrogen_to_ocean_depth(3.42e43, c.R_EARTH), 2)
    1.0
    """
    return apply(_core.hydrogen_to_ocean_depth, _args("atoms", atoms, "1", radius, density))


_ATOM = re.compile(r"(\d*)([A-Z][a-z]?)(\d*)")


def hydrogen_atoms(species: str) -> int:
    """Hydrogen atoms (H or D) in one particle of ``species``, read from its formula.

    A leading number is a mass number ("36Ar", "3He"); a number after an element counts it
    ("H2O": 2, "HD": 2, "CH4": 4, "N2": 0).

    Raises
    ------
    ValueError
        For a name that is not a chemical formula.

    Examples
    --------
    >>> [hydrogen_atoms(s) for s in ("H", "D", "H2", "HD", "H2O", "CH4", "36Ar")]
    [1, 1, 2, 2, 2, 4, 0]
    """
    if not isinstance(species, str) or not species:
        raise ValueError(f"species must be a species name, got {species!r}")
    count, position = 0, 0
    while position < len(species):
        match = _ATOM.match(species, position)
        if match is None or match.end() == position:
            raise ValueError(
                f"species '{species}' is not a chemical formula: cannot count its hydrogen atoms"
            )
        if match.group(2) in ("H", "D"):
            count += int(match.group(3) or 1)
        position = match.end()
    return count
