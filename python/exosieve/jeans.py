"""Jeans (thermal) escape from an exobase [SI units] (Jeans 1925; Chamberlain 1963).

``lambda = G M m / (k T r) = (v_esc / v0)^2`` and
``Phi_J = n v0 / (2 sqrt(pi)) (1 + lambda) exp(-lambda)`` [m^-2 s^-1]. All functions broadcast
their arguments as numpy does, return a float for scalar input, take numpy's keyword-only
``out=`` and ``dtype=``, give pandas, xarray and dask arguments back in their container (see the
README), and release the GIL while they compute.
The flux functions take an optional ``tail_depletion``: a constant factor, a
``(jeans_parameters, factors)`` table (linear in lambda, held at the ends), or a
:class:`TailDepletion`. Factors are at most 1 (a depleted tail); a factor above 1 is an
enhancement and is refused unless given as ``TailDepletion(factor, enhancement=True)`` (or a
table with ``enhancement=True``).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from numpy.typing import DTypeLike

from . import _core
from ._arrays import FloatOrArray, apply, to_si

TailDepletion = _core.TailDepletion
TailLike = float | TailDepletion | tuple[Sequence[float], Sequence[float]]


def _tail(tail_depletion: TailLike) -> TailDepletion:
    if isinstance(tail_depletion, TailDepletion):
        return tail_depletion
    if isinstance(tail_depletion, tuple):
        lambdas, factors = tail_depletion
        return TailDepletion(
            to_si(lambdas, "tail_depletion jeans_parameters", "1").reshape(-1).tolist(),
            to_si(factors, "tail_depletion factors", "1").reshape(-1).tolist(),
        )
    factor = to_si(tail_depletion, "tail_depletion", "1")
    if factor.size != 1:
        raise ValueError(f"tail_depletion must be a single number, got shape {factor.shape}")
    return TailDepletion(float(factor.reshape(())))


def _flux_args(
    density: Any, temperature: Any, mass: Any, planet_mass: Any, radius: Any
) -> list[tuple[str, Any, str]]:
    return [
        ("density", density, "m-3"),
        ("temperature", temperature, "K"),
        ("mass", mass, "kg"),
        ("planet_mass", planet_mass, "kg"),
        ("radius", radius, "m"),
    ]


def escape_speed(
    planet_mass: Any, radius: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Escape speed ``sqrt(2 G M / r)`` [m s^-1].

    Parameters
    ----------
    planet_mass : float or array_like
        Planet mass [kg].
    radius : float or array_like
        Distance from the planet's centre [m].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(escape_speed(c.M_EARTH, c.R_EARTH))
    11180
    """
    return apply(
        _core.escape_speed,
        [("planet_mass", planet_mass, "kg"), ("radius", radius, "m")],
        out=out,
        dtype=dtype,
    )


def jeans_parameter(
    temperature: Any,
    mass: Any,
    planet_mass: Any,
    radius: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Jeans parameter ``lambda = G M m / (k T r)`` [1]: escape energy over ``k T``.

    Parameters
    ----------
    temperature : float or array_like
        Exobase temperature [K].
    mass : float, array_like, str or Species
        Particle mass [kg] or a species.
    planet_mass : float or array_like
        Planet mass [kg].
    radius : float or array_like
        Exobase radius from the planet's centre [m].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(jeans_parameter(1000.0, "H", c.M_EARTH, c.R_EARTH + 500e3), 2)
    7.02
    """
    return apply(
        _core.jeans_parameter,
        _flux_args(1.0, temperature, mass, planet_mass, radius)[1:],
        out=out,
        dtype=dtype,
    )


def jeans_flux(
    density: Any,
    temperature: Any,
    mass: Any,
    planet_mass: Any,
    radius: Any,
    tail_depletion: TailLike = 1.0,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Jeans escape flux at the exobase [m^-2 s^-1].

    Parameters
    ----------
    density : float or array_like
        Number density of the species at the exobase [m^-3].
    temperature, mass, planet_mass, radius
        As in :func:`jeans_parameter`.
    tail_depletion : float, tuple or TailDepletion, optional
        Multiplier on the flux for a depleted Maxwellian tail (default 1).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> f"{jeans_flux(1e11, 1000.0, 'H', c.M_EARTH, c.R_EARTH + 500e3):.3e}"
    '8.181e+11'
    """
    return apply(
        _core.jeans_flux,
        _flux_args(density, temperature, mass, planet_mass, radius),
        _tail(tail_depletion),
        out=out,
        dtype=dtype,
    )


def log_jeans_flux(
    density: Any,
    temperature: Any,
    mass: Any,
    planet_mass: Any,
    radius: Any,
    tail_depletion: TailLike = 1.0,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Natural log of :func:`jeans_flux` (of the flux in m^-2 s^-1); finite where it underflows.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> log_jeans_flux(1e15, 50.0, "Xe", c.M_EARTH, c.R_EARTH) < -1e4
    True
    """
    return apply(
        _core.log_jeans_flux,
        _flux_args(density, temperature, mass, planet_mass, radius),
        _tail(tail_depletion),
        out=out,
        dtype=dtype,
    )


def jeans_energy_flux(
    density: Any,
    temperature: Any,
    mass: Any,
    planet_mass: Any,
    radius: Any,
    tail_depletion: TailLike = 1.0,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Kinetic-energy flux carried away by escaping particles [W m^-2].

    ``Phi_J k T (lambda^2 + 2 lambda + 2) / (lambda + 1)``; arguments as :func:`jeans_flux`.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> jeans_energy_flux(1e11, 1000.0, "H", c.M_EARTH, c.R_EARTH + 500e3) > 0
    True
    """
    return apply(
        _core.jeans_energy_flux,
        _flux_args(density, temperature, mass, planet_mass, radius),
        _tail(tail_depletion),
        out=out,
        dtype=dtype,
    )


def jeans_escape_rate(
    density: Any,
    temperature: Any,
    mass: Any,
    planet_mass: Any,
    radius: Any,
    tail_depletion: TailLike = 1.0,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Global escape rate ``4 pi r^2 Phi_J`` [s^-1]; arguments as :func:`jeans_flux`.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> f"{jeans_escape_rate(1e11, 1000.0, 'H', c.M_EARTH, c.R_EARTH + 500e3):.3e}"
    '4.864e+26'
    """
    return apply(
        _core.jeans_escape_rate,
        _flux_args(density, temperature, mass, planet_mass, radius),
        _tail(tail_depletion),
        out=out,
        dtype=dtype,
    )


def log_jeans_escape_rate(
    density: Any,
    temperature: Any,
    mass: Any,
    planet_mass: Any,
    radius: Any,
    tail_depletion: TailLike = 1.0,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Natural log of :func:`jeans_escape_rate` (of the rate in s^-1).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> log_jeans_escape_rate(1e15, 50.0, "Xe", c.M_EARTH, c.R_EARTH) < -1e4
    True
    """
    return apply(
        _core.log_jeans_escape_rate,
        _flux_args(density, temperature, mass, planet_mass, radius),
        _tail(tail_depletion),
        out=out,
        dtype=dtype,
    )
