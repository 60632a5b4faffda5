"""H/He envelopes of sub-Neptunes: radius against envelope fraction, and envelope loss to a
stripped core [SI units].

Radius (Lopez & Fortney 2014, ApJ 792, 1: their power-law fit to thermal-evolution models of
rock/iron cores with H/He envelopes, 1–20 Earth masses, envelope fractions 0.01–20 %,
0.1–1000 times Earth's flux, 100 Myr–10 Gyr)::

    R_p = R_core + R_env,   R_core = R_E (M_core / M_E)^0.25,
    R_env = 2.06 R_E (M_p/M_E)^-0.21 (f_env/0.05)^0.59 (F_p/F_E)^0.044 (age/5 Gyr)^-0.11

(age exponent -0.18 for enhanced-opacity envelopes). The coefficients are from memory, the
paper's text not at hand: trust ``R_env`` to ~10 %. ``F_E`` is the IAU 2015 B3 nominal solar
irradiance, 1361 W m^-2. The thin radiative atmosphere above the envelope is left out.

Loss: ``dM_env/dt = -eta pi R_p R_xuv^2 F_xuv(t) / (G M_p K)`` (energy-limited) with ``R_p``
following the envelope, integrated by the C++ core (Boost.Odeint, Dormand–Prince 5(4) with dense
output), with an event at the time the envelope is gone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import DTypeLike, NDArray

from . import _core
from ._arrays import FloatOrArray, _scalar, apply, to_si
from .stellar import Star

__all__ = [
    "SOLAR_IRRADIANCE",
    "Envelope",
    "core_radius",
    "envelope_radius",
    "envelope_planet_radius",
    "EnvelopeLoss",
    "envelope_loss",
]

#: IAU 2015 Resolution B3 nominal total solar irradiance [W m^-2]: Earth's incident flux.
SOLAR_IRRADIANCE: float = float(_core.SOLAR_IRRADIANCE)

_OPACITY = {"solar": 0, "enhanced": 1}


def _opacity(opacity: str) -> int:
    if not isinstance(opacity, str) or opacity not in _OPACITY:
        raise ValueError(f"opacity must be 'solar' or 'enhanced', got {opacity!r}")
    return _OPACITY[opacity]


def core_radius(core_mass: Any, *, out: Any = None, dtype: DTypeLike | None = None) -> FloatOrArray:
    """Radius of an Earth-like rock/iron core ``R_E (M_core / M_E)^0.25`` [m] (the scaling of
    Lopez & Fortney 2014; from memory).

    Parameters
    ----------
    core_mass : float or array_like
        Core mass [kg].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(core_radius(16 * c.M_EARTH) / c.R_EARTH, 12)
    2.0
    """
    return apply(_core.core_radius, [("core_mass", core_mass, "kg")], out=out, dtype=dtype)


def envelope_radius(
    envelope_fraction: Any,
    planet_mass: Any,
    incident_flux: Any,
    age: Any,
    opacity: str = "solar",
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Thickness of an H/He envelope [m] (Lopez & Fortney 2014 fit, coefficients from memory).

    Parameters
    ----------
    envelope_fraction : float or array_like
        Envelope mass over planet mass ``f_env`` [1], in [0, 1).
    planet_mass : float or array_like
        Planet mass, core plus envelope [kg].
    incident_flux : float or array_like
        Bolometric flux at the planet [W m^-2].
    age : float or array_like
        Age of the planet [s].
    opacity : {"solar", "enhanced"}, optional
        Envelope opacity: age exponent -0.11 or -0.18.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> r = envelope_radius(0.05, c.M_EARTH, SOLAR_IRRADIANCE, 5 * c.GYR)
    >>> round(r / c.R_EARTH, 12)
    2.06
    """
    return apply(
        _core.envelope_radius,
        [
            ("envelope_fraction", envelope_fraction, "1"),
            ("planet_mass", planet_mass, "kg"),
            ("incident_flux", incident_flux, "W m-2"),
            ("age", age, "s"),
        ],
        _opacity(opacity),
        out=out,
        dtype=dtype,
    )


def envelope_planet_radius(
    core_mass: Any,
    envelope_fraction: Any,
    incident_flux: Any,
    age: Any,
    opacity: str = "solar",
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Radius of a core with an H/He envelope ``R_core + R_env`` [m], planet mass
    ``M_core / (1 - f_env)``.

    Parameters
    ----------
    core_mass : float or array_like
        Core mass [kg].
    envelope_fraction : float or array_like
        Envelope mass over planet mass [1], in [0, 1).
    incident_flux : float or array_like
        Bolometric flux at the planet [W m^-2].
    age : float or array_like
        Age of the planet [s].
    opacity : {"solar", "enhanced"}, optional
        Envelope opacity of the fit.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> r = envelope_planet_radius(5 * c.M_EARTH, 0.02, 100 * SOLAR_IRRADIANCE, c.GYR)
    >>> round(r / c.R_EARTH, 3)
    2.741
    """
    return apply(
        _core.envelope_planet_radius,
        [
            ("core_mass", core_mass, "kg"),
            ("envelope_fraction", envelope_fraction, "1"),
            ("incident_flux", incident_flux, "W m-2"),
            ("age", age, "s"),
        ],
        _opacity(opacity),
        out=out,
        dtype=dtype,
    )


class Envelope:
    """An H/He envelope on a rock/iron core, for :func:`exosieve.evolve` [SI units].

    With ``evolve(..., envelope=Envelope(...))`` the envelope mass ``M_env`` is integrated with
    the inventories: it is lost at the hydrodynamic mass-loss rate ``Mdot`` of the run's
    :class:`EnergyLimitedEscape` while that acts (by its ``activation``; not in the kinetic
    regimes), and the planet is ``M_p = M_core + M_env`` with radius ``R_core + R_env`` of the
    Lopez & Fortney (2014) fit (:func:`envelope_planet_radius`) at every instant. The run's
    :class:`Planet` then gives only the orbit and the star: its mass and radius are not used.

    Parameters
    ----------
    core_mass : float
        Core mass ``M_core`` [kg] (> 0; astropy quantities are converted).
    envelope_fraction : float
        ``f_env = M_env / M_p`` at the start of the run [1], in [0, 1) (0: a bare core).
    opacity : {"solar", "enhanced"}, optional
        Envelope opacity of the radius fit (age exponent -0.11 or -0.18).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> e = Envelope(5 * c.M_EARTH, 0.02)
    >>> round(e.initial_mass / c.M_EARTH, 6), round(e.initial_planet_mass / c.M_EARTH, 6)
    (0.102041, 5.102041)
    """

    def __init__(self, core_mass: Any, envelope_fraction: Any, opacity: str = "solar") -> None:
        self._core = _core.EnvelopeConfig(
            _scalar(core_mass, "core_mass", "kg"),
            _scalar(envelope_fraction, "envelope_fraction", "1"),
            _opacity(opacity),
        )
        self.opacity = opacity

    @property
    def core_mass(self) -> float:
        """Core mass [kg]."""
        return float(self._core.core_mass)

    @property
    def envelope_fraction(self) -> float:
        """Envelope mass over planet mass at the start [1]."""
        return float(self._core.envelope_fraction)

    @property
    def initial_mass(self) -> float:
        """Envelope mass at the start ``M_core f / (1 - f)`` [kg]."""
        return float(self._core.initial_mass)

    @property
    def initial_planet_mass(self) -> float:
        """Planet mass at the start ``M_core / (1 - f)`` [kg]."""
        return float(self._core.initial_planet_mass)

    def __repr__(self) -> str:
        return (
            f"Envelope(core_mass={self.core_mass!r}, envelope_fraction="
            f"{self.envelope_fraction!r}, opacity={self.opacity!r})"
        )


@dataclass(frozen=True)
class EnvelopeLoss:
    """Result of :func:`envelope_loss`.

    Attributes
    ----------
    times : ndarray
        Output times, as stellar age [s].
    envelope_mass : ndarray
        Envelope mass at each time [kg].
    radius : ndarray
        Planet radius at each time [m].
    mass_loss_rate : ndarray
        Envelope mass-loss rate at each time [kg s^-1].
    stripped : bool
        Whether the envelope is gone by the last time.
    stripping_time : float
        Stellar age at which the envelope is gone [s]; NaN when it is not.
    steps : int
        Accepted integration steps.
    """

    times: NDArray[np.float64]
    envelope_mass: NDArray[np.float64]
    radius: NDArray[np.float64]
    mass_loss_rate: NDArray[np.float64]
    stripped: bool
    stripping_time: float
    steps: int


def envelope_loss(
    core_mass: Any,
    envelope_fraction: float,
    semi_major_axis: Any,
    star: Star,
    times: Any,
    *,
    efficiency: float = 0.15,
    xuv_radius_factor: float = 1.0,
    roche_lobe: bool = False,
    opacity: str = "solar",
    rtol: float = 1e-10,
    atol_fraction: float = 1e-12,
) -> EnvelopeLoss:
    """Loss of an H/He envelope under energy-limited escape, the radius following the envelope.

    ``dM_env/dt = -eta pi R_p (a R_p)^2 F_xuv(t) / (G M_p K)``, ``R_p`` from
    :func:`envelope_planet_radius` at the current envelope fraction and age, ``F_xuv`` from the
    star's XUV history, the incident flux of the radius fit from its bolometric luminosity.

    Parameters
    ----------
    core_mass : float
        Core mass [kg].
    envelope_fraction : float
        Envelope mass over planet mass at ``times[0]`` [1], in [0, 1).
    semi_major_axis : float
        Orbital distance [m].
    star : Star
        The host star (mass, luminosity, XUV history).
    times : array_like
        Output times as stellar age [s], strictly ascending, > 0; the run starts at the first.
    efficiency : float, optional
        Heating efficiency ``eta`` [1], in (0, 1] (default 0.15, common practice).
    xuv_radius_factor : float, optional
        ``a = R_xuv / R_p`` [1], >= 1.
    roche_lobe : bool, optional
        Apply the Roche-lobe factor ``K`` of the evolving radius (Erkaev et al. 2007).
    opacity : {"solar", "enhanced"}, optional
        Envelope opacity of the radius fit.
    rtol : float, optional
        Relative tolerance of the envelope mass [1].
    atol_fraction : float, optional
        Absolute tolerance of the envelope mass, as a fraction of the core mass [1].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> star = Star(c.M_SUN, c.L_SUN, saturation_ratio=1e-3)
    >>> run = envelope_loss(4 * c.M_EARTH, 0.01, 0.05 * c.AU, star, [150 * c.MYR, 10 * c.GYR],
    ...                     efficiency=0.1)
    >>> run.stripped, round(run.stripping_time / c.MYR, 1)
    (True, 218.0)
    """
    if not isinstance(star, Star):
        raise ValueError(f"star must be an exosieve.Star, got {star!r}")
    for name, flag in (("roche_lobe", roche_lobe),):
        if not isinstance(flag, bool):
            raise ValueError(f"{name} must be True or False, got {flag!r}")
    grid = np.atleast_1d(to_si(times, "times", "s"))
    if grid.ndim != 1:
        raise ValueError(f"times must be one-dimensional, got shape {grid.shape}")

    def scalar(value: Any, name: str, unit: str) -> float:
        array = to_si(value, name, unit)
        if array.size != 1:
            raise ValueError(f"{name} must be a single number, got shape {array.shape}")
        number = float(array.reshape(()))
        if math.isnan(number):
            raise ValueError(f"{name} must be a number, got nan")
        return number

    raw = _core.integrate_envelope_loss(
        scalar(core_mass, "core_mass", "kg"),
        scalar(envelope_fraction, "envelope_fraction", "1"),
        scalar(semi_major_axis, "semi_major_axis", "m"),
        star._core,
        grid.tolist(),
        scalar(efficiency, "efficiency", "1"),
        scalar(xuv_radius_factor, "xuv_radius_factor", "1"),
        roche_lobe,
        _opacity(opacity),
        scalar(rtol, "rtol", "1"),
        scalar(atol_fraction, "atol_fraction", "1"),
    )
    return EnvelopeLoss(
        times=np.asarray(raw["times"], dtype=np.float64),
        envelope_mass=np.asarray(raw["envelope_mass"], dtype=np.float64),
        radius=np.asarray(raw["radius"], dtype=np.float64),
        mass_loss_rate=np.asarray(raw["mass_loss_rate"], dtype=np.float64),
        stripped=bool(raw["stripped"]),
        stripping_time=float(raw["stripping_time"]),
        steps=int(raw["steps"]),
    )
