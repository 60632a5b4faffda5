"""Gas species: masses, Lennard-Jones parameters and cross-sections, with sources.

The registry is read from ``data/species.csv`` (compiled into the core). Unknown names raise
``ValueError`` suggesting the closest registered names.
"""

from __future__ import annotations

from typing import Any

from . import _core

Species = _core.Species


def species(name: str) -> Species:
    """The registered species called ``name``.

    Returns an object with ``.name``, ``.mass`` [kg], ``.mass_u`` [u], ``.lj_diameter`` [m],
    ``.lj_well_depth`` [K], ``.cross_section`` [m^2], ``.thermal_diffusion_factor`` [1] and the
    ``*_source`` of each number.

    Examples
    --------
    >>> species("CO2").mass_u
    44.009
    """
    if isinstance(name, Species):
        return name
    if not isinstance(name, str):
        raise ValueError(f"name must be a species name (str), got {name!r}")
    found: Species = _core.species(name)
    return found


def register_species(
    name: str,
    mass: float,
    lj_diameter: float = 0.0,
    lj_well_depth: float = 0.0,
    cross_section: float = 0.0,
    thermal_diffusion_factor: float = 0.0,
    source: str = "user",
) -> Species:
    """Add (or replace) a species in the process-wide registry and return it.

    Parameters
    ----------
    name : str
        Registry name.
    mass : float
        Particle mass [kg].
    lj_diameter, lj_well_depth : float, optional
        Lennard-Jones diameter [m] and well depth eps/k [K] (needed for diffusion).
    cross_section : float, optional
        Collision cross-section [m^2] (needed to find an exobase).
    thermal_diffusion_factor : float, optional
        Thermal-diffusion factor alpha [1].
    source : str, optional
        Where the numbers come from.

    Examples
    --------
    >>> from exosieve.constants import AMU
    >>> register_species("Xx", 7.0 * AMU).mass_u
    7.0
    """
    from ._arrays import real_number

    numbers = [
        real_number(value, label, unit)
        for value, label, unit in (
            (mass, "mass", "kg"),
            (lj_diameter, "lj_diameter", "m"),
            (lj_well_depth, "lj_well_depth", "K"),
            (cross_section, "cross_section", "m2"),
            (thermal_diffusion_factor, "thermal_diffusion_factor", "1"),
        )
    ]
    s = Species(name, *numbers, source)
    _core.register_species(s)
    return s


def species_names() -> list[str]:
    """All registered species names, sorted.

    Examples
    --------
    >>> "N2" in species_names()
    True
    """
    return list(_core.species_names())


def _name(key: Any) -> str:
    """The name of a species given by name or as a :class:`Species` (a mapping key)."""
    if isinstance(key, _core.Species):
        return str(key.name)
    if not isinstance(key, str):
        raise ValueError(f"species must be given by name (str), got {key!r}")
    return key
