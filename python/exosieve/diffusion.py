"""Molecular diffusion through a background gas [SI units].

Binary diffusion parameter ``b = n D`` [m^-1 s^-1] from the Chapman–Enskog first
approximation with Lennard-Jones parameters and the Neufeld et al. (1972) collision integral,
overridden by measured ``b = A T^s`` fits where ``data/diffusion_pairs.csv`` has the pair;
Blanc's law in mixtures; Hunten's (1973) diffusion-limited flux
``Phi_DL = b x_i (1/H_a - 1/H_i)``; and the flux coupled to Jeans escape at the exobase,
``Phi = Phi_J,eq / (1 + (Phi_J,eq / Phi_DL) (1 - exp(-beta z_e)))``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, NamedTuple

from numpy.typing import DTypeLike

from . import _core
from ._arrays import FloatOrArray, apply, to_si
from .species import Species, species

SpeciesLike = str | Species
BackgroundLike = str | Species | Mapping[Any, float]

_METHODS: tuple[str, ...] = tuple(_core.DIFFUSION_METHODS)


def as_species(value: Any, name: str) -> Species:
    """The species ``value`` names (a registry name or a :class:`Species`)."""
    if isinstance(value, Species):
        return value
    if isinstance(value, str):
        return species(value)
    raise ValueError(f"{name} must be a species name or a Species, got {value!r}")


def _label(key: Any) -> str:
    return repr(key.name if isinstance(key, Species) else key)


def as_composition(value: Any, name: str) -> tuple[list[Species], list[float]]:
    """Species and mole fractions of a gas: one species, or a mapping species -> fraction.

    The fractions are checked (>= 0, summing to one within 1e-6) by the core; they are not
    renormalised.
    """
    if isinstance(value, (str, Species)):
        return [as_species(value, name)], [1.0]
    if isinstance(value, Mapping):
        members = [as_species(key, f"{name} key") for key in value]
        fractions = []
        for key, fraction in value.items():
            label = f"{name} mole fraction of {_label(key)}"
            array = to_si(fraction, label, "")
            if array.size != 1:
                raise ValueError(f"{label} must be a single number, got shape {array.shape}")
            fractions.append(float(array.reshape(())))
        return members, fractions
    raise ValueError(
        f"{name} must be a species name, a Species or a mapping of species to mole fractions, "
        f"got {value!r}"
    )


def _method(method: str) -> str:
    if method not in _METHODS:
        raise ValueError(f"method must be one of {_METHODS}, got {method!r}")
    return method


def binary_diffusion_parameter(
    species_a: SpeciesLike,
    species_b: SpeciesLike,
    temperature: Any,
    *,
    method: str = "measured",
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Binary diffusion parameter ``b = n D`` of a gas pair [m^-1 s^-1].

    The diffusion coefficient at total number density ``n`` is ``D = b / n`` [m^2 s^-1].

    Parameters
    ----------
    species_a, species_b : str or Species
        The two gases.
    temperature : float or array_like
        Temperature [K]; broadcasts.
    method : {"measured", "chapman_enskog"}, optional
        ``"measured"`` (default) uses a measured ``A T^s`` fit where one is tabulated
        (:func:`diffusion_pairs`) and the Chapman–Enskog estimate otherwise;
        ``"chapman_enskog"`` always uses the estimate.

    Examples
    --------
    >>> from exosieve.constants import K_B
    >>> b = binary_diffusion_parameter("He", "N2", 298.0)
    >>> round(b * K_B * 298.0 / 101325.0 * 1e4, 2)  # D at 1 atm [cm^2 s^-1]
    0.69
    """
    a = as_species(species_a, "species_a")
    b = as_species(species_b, "species_b")
    how = _method(method)
    return apply(
        lambda count, t: _core.binary_diffusion_parameter(count, a, b, t, how),
        [("temperature", temperature, "K")],
        out=out,
        dtype=dtype,
    )


def diffusion_limited_flux(
    species: SpeciesLike,
    background: BackgroundLike,
    mixing_ratio: Any,
    temperature: Any,
    planet_mass: Any,
    radius: Any,
    *,
    method: str = "measured",
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Diffusion-limited upward flux of a species through a background gas [m^-2 s^-1].

    Hunten (1973): ``Phi_DL = b x (1/H_a - 1/H_i)`` with ``H = k T / (m g)``, ``g = G M / r^2``;
    ``b`` by Blanc's law over the background. Negative for a species heavier than the
    background.

    Parameters
    ----------
    species : str or Species
        The diffusing gas.
    background : str, Species or mapping
        The background gas, or a mapping of species to mole fractions summing to one.
    mixing_ratio : float or array_like
        Mole fraction of ``species`` at the homopause [1].
    temperature : float or array_like
        Homopause temperature [K].
    planet_mass : float or array_like
        Planet mass [kg].
    radius : float or array_like
        Homopause radius from the planet's centre [m].
    method : {"measured", "chapman_enskog"}, optional
        As in :func:`binary_diffusion_parameter`.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> air = {"N2": 0.78, "O2": 0.21, "Ar": 0.01}
    >>> flux = diffusion_limited_flux("H2", air, 1e-5, 200.0, c.M_EARTH, c.R_EARTH + 100e3)
    >>> f"{flux * 1e-4:.1e}"  # [cm^-2 s^-1]
    '2.2e+08'
    """
    s = as_species(species, "species")
    members, fractions = as_composition(background, "background")
    how = _method(method)
    return apply(
        lambda count, *a: _core.diffusion_limited_flux(count, s, members, fractions, *a, how),
        [
            ("mixing_ratio", mixing_ratio, ""),
            ("temperature", temperature, "K"),
            ("planet_mass", planet_mass, "kg"),
            ("radius", radius, "m"),
        ],
        out=out,
        dtype=dtype,
    )


def coupled_escape_flux(
    jeans_flux_eq: Any,
    diffusion_parameter: Any,
    mixing_ratio: Any,
    beta: Any,
    thickness: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Escape flux limited by both diffusion and Jeans effusion [m^-2 s^-1].

    The constant-flux solution of the diffusion equation through an isothermal, plane-parallel
    layer of thickness ``z_e`` with Jeans effusion at its top:
    ``Phi = Phi_J,eq / (1 + (Phi_J,eq / Phi_DL) (1 - exp(-beta z_e)))``, ``Phi_DL = b x beta``;
    the ``beta -> 0`` limit is taken with ``expm1``.

    Parameters
    ----------
    jeans_flux_eq : float or array_like
        Jeans flux at the diffusive-equilibrium exobase density [m^-2 s^-1].
    diffusion_parameter : float or array_like
        ``b = n D`` through the background [m^-1 s^-1].
    mixing_ratio : float or array_like
        Mole fraction at the bottom of the layer (the homopause) [1].
    beta : float or array_like
        ``1/H_a - 1/H_i`` [m^-1], any sign.
    thickness : float or array_like
        Layer thickness ``z_e`` (exobase minus homopause radius) [m].

    Examples
    --------
    >>> phi_dl = 1e21 * 1e-5 / 7e3
    >>> round(coupled_escape_flux(1e-3 * phi_dl, 1e21, 1e-5, 1 / 7e3, 4e5) / (1e-3 * phi_dl), 4)
    0.999
    """
    return apply(
        _core.coupled_escape_flux,
        [
            ("jeans_flux_eq", jeans_flux_eq, "m-2 s-1"),
            ("diffusion_parameter", diffusion_parameter, "m-1 s-1"),
            ("mixing_ratio", mixing_ratio, ""),
            ("beta", beta, "m-1"),
            ("thickness", thickness, "m"),
        ],
        out=out,
        dtype=dtype,
    )


class DiffusionPair(NamedTuple):
    """A measured fit ``b = A T^s`` [m^-1 s^-1] for one species pair."""

    species_a: str
    species_b: str
    A: float
    s: float
    source: str


def diffusion_pairs() -> list[DiffusionPair]:
    """The measured binary diffusion fits that override the Chapman–Enskog estimate.

    Examples
    --------
    >>> any(p.species_a == "H2" and p.species_b == "N2" for p in diffusion_pairs())
    True
    """
    return [DiffusionPair(*row) for row in _core.diffusion_pairs()]
