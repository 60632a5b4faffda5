"""Maxwell–Boltzmann speed distribution [SI units].

With ``v0 = sqrt(2 k T / m)`` the most probable speed and ``x = v / v0`` the speed pdf is
``f(v) = 4/sqrt(pi) v^2 / v0^3 exp(-x^2)`` and the fraction faster than ``v`` is
``erfc(x) + 2/sqrt(pi) x exp(-x^2)``. All functions broadcast their arguments as numpy does,
return a float for scalar input, take numpy's keyword-only ``out=`` and ``dtype=``, and give
pandas, xarray and dask arguments back in their container (see the README).
"""

from __future__ import annotations

from typing import Any

from numpy.typing import DTypeLike

from . import _core
from ._arrays import FloatOrArray, apply


def most_probable_speed(
    temperature: Any, mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Most probable speed ``v0 = sqrt(2 k T / m)`` [m s^-1].

    Parameters
    ----------
    temperature : float or array_like
        Gas temperature [K].
    mass : float, array_like, str or Species
        Particle mass [kg], or a species (name) whose mass is used.

    Examples
    --------
    >>> round(most_probable_speed(1000.0, "H"))
    4062
    """
    return apply(
        _core.most_probable_speed,
        [("temperature", temperature, "K"), ("mass", mass, "kg")],
        out=out,
        dtype=dtype,
    )


def mean_speed(
    temperature: Any, mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Mean speed ``2 v0 / sqrt(pi)`` [m s^-1]; arguments as :func:`most_probable_speed`.

    Examples
    --------
    >>> round(mean_speed(300.0, "N2"))
    476
    """
    return apply(
        _core.mean_speed,
        [("temperature", temperature, "K"), ("mass", mass, "kg")],
        out=out,
        dtype=dtype,
    )


def rms_speed(
    temperature: Any, mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Root-mean-square speed ``sqrt(3/2) v0`` [m s^-1]; arguments as :func:`most_probable_speed`.

    Examples
    --------
    >>> round(rms_speed(300.0, "N2"))
    517
    """
    return apply(
        _core.rms_speed,
        [("temperature", temperature, "K"), ("mass", mass, "kg")],
        out=out,
        dtype=dtype,
    )


def speed_pdf(
    speed: Any, temperature: Any, mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Probability density of the particle speed [s m^-1].

    Parameters
    ----------
    speed : float or array_like
        Speed [m s^-1], >= 0.
    temperature : float or array_like
        Gas temperature [K].
    mass : float, array_like, str or Species
        Particle mass [kg] or a species.

    Examples
    --------
    >>> import numpy as np
    >>> v = np.linspace(0.0, 3000.0, 4)
    >>> speed_pdf(v, 300.0, "N2").shape
    (4,)
    """
    return apply(
        _core.speed_pdf,
        [("speed", speed, "m/s"), ("temperature", temperature, "K"), ("mass", mass, "kg")],
        out=out,
        dtype=dtype,
    )


def fraction_faster(
    speed: Any, temperature: Any, mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Fraction of particles faster than ``speed`` [1]; no cancellation in the deep tail.

    Arguments as :func:`speed_pdf`.

    Examples
    --------
    >>> fraction_faster(0.0, 300.0, "N2")
    1.0
    """
    return apply(
        _core.fraction_faster,
        [("speed", speed, "m/s"), ("temperature", temperature, "K"), ("mass", mass, "kg")],
        out=out,
        dtype=dtype,
    )


def log_fraction_faster(
    speed: Any, temperature: Any, mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Natural log of :func:`fraction_faster`; finite where the fraction underflows to 0.

    Examples
    --------
    >>> log_fraction_faster(11_186.0, 300.0, "Xe") < -700
    True
    """
    return apply(
        _core.log_fraction_faster,
        [("speed", speed, "m/s"), ("temperature", temperature, "K"), ("mass", mass, "kg")],
        out=out,
        dtype=dtype,
    )
