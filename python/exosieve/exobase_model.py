"""The exobase for :func:`exosieve.evolve`: exobase temperature histories and the prescribed
exobase [SI units].

Thin descriptions; the numbers are checked and used by the C++ core (``exobase_model.hpp``).
A :class:`exosieve.Thermosphere` is the other exobase model. Arguments accept astropy
quantities where astropy is installed.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

from numpy.typing import ArrayLike

from . import _core
from ._arrays import _finite, _finite_vector, _scalar
from .species import _name

__all__ = ["TabulatedTemperature", "XuvTemperature", "PrescribedExobase"]


class TabulatedTemperature:
    """Exobase temperature from a table: linear in time between points, held at the end values
    outside them.

    Parameters
    ----------
    times : array_like
        Strictly increasing times (stellar age) [s].
    temperatures : array_like
        Exobase temperatures [K] (> 0).

    Examples
    --------
    >>> T = TabulatedTemperature([0.0, 10.0], [1000.0, 2000.0])
    >>> T(5.0), T(50.0)
    (1500.0, 2000.0)
    """

    def __init__(self, times: ArrayLike, temperatures: ArrayLike) -> None:
        self.times = _finite_vector(times, "times", "s")
        self.temperatures = _finite_vector(temperatures, "temperatures", "K")
        self._core = _core.ExobaseTemperature.table(self.times, self.temperatures)

    def __call__(self, t: float) -> float:
        """Temperature [K] at time ``t`` [s]."""
        return float(self._core(_finite(t, "t", "s")))

    def __repr__(self) -> str:
        return f"TabulatedTemperature(times={self.times!r}, temperatures={self.temperatures!r})"

    def __reduce__(self) -> tuple[Any, ...]:
        return (TabulatedTemperature, (self.times, self.temperatures))


class XuvTemperature:
    """Exobase temperature driven by the planet's XUV flux:
    ``T = T_ref (F_xuv / F_ref)^exponent`` clamped to ``[minimum, maximum]``.

    Parameters
    ----------
    reference_temperature : float
        ``T_ref`` [K].
    reference_flux : float
        ``F_ref`` [W m^-2].
    exponent : float
        Power-law exponent [1].
    minimum, maximum : float
        Clamp [K].

    Examples
    --------
    >>> XuvTemperature(1000.0, 1e-3, 0.5, 500.0, 5000.0).temperature(4e-3)
    2000.0
    """

    def __init__(
        self,
        reference_temperature: Any,
        reference_flux: Any,
        exponent: float,
        minimum: Any,
        maximum: Any,
    ) -> None:
        self.reference_temperature = _scalar(reference_temperature, "reference_temperature", "K")
        self.reference_flux = _scalar(reference_flux, "reference_flux", "W m-2")
        self.exponent = _scalar(exponent, "exponent", "1")
        self.minimum = _scalar(minimum, "minimum", "K")
        self.maximum = _scalar(maximum, "maximum", "K")
        self._core = _core.ExobaseTemperature.xuv_power_law(
            self.reference_temperature,
            self.reference_flux,
            self.exponent,
            self.minimum,
            self.maximum,
        )

    def __reduce__(self) -> tuple[Any, ...]:
        return (
            XuvTemperature,
            (
                self.reference_temperature,
                self.reference_flux,
                self.exponent,
                self.minimum,
                self.maximum,
            ),
        )

    def temperature(self, xuv_flux: float) -> float:
        """Temperature [K] at XUV flux ``xuv_flux`` [W m^-2]."""
        flux = _finite(xuv_flux, "xuv_flux", "W m-2")
        if flux < 0.0:
            raise ValueError(f"xuv_flux must be finite and >= 0 [W m-2], got {flux!r}")
        return float(self._core(0.0, flux))

    def __repr__(self) -> str:
        return (
            f"XuvTemperature({self.reference_temperature!r}, {self.reference_flux!r}, "
            f"{self.exponent!r}, {self.minimum!r}, {self.maximum!r})"
        )


TemperatureLike = float | TabulatedTemperature | XuvTemperature | Callable[[float], float]


def temperature_history(temperature: Any) -> Any:
    """The core history for a float, a table, an XUV power law or a callable ``t -> T``."""
    if isinstance(temperature, (TabulatedTemperature, XuvTemperature)):
        return temperature._core
    if isinstance(temperature, _core.ExobaseTemperature):
        return temperature
    if callable(temperature) and not hasattr(temperature, "unit"):
        return _core.ExobaseTemperature.callable(temperature, repr(temperature))
    return _core.ExobaseTemperature.constant(_scalar(temperature, "exobase temperature", "K"))


class PrescribedExobase:
    """An exobase at a prescribed radius with prescribed densities.

    Parameters
    ----------
    radius : float
        Exobase radius from the planet's centre [m].
    temperature : float, TabulatedTemperature, XuvTemperature or callable
        Exobase temperature [K]: a constant, a table against time, a clamped power law in the
        XUV flux, or a Python callable ``t [s] -> T [K]`` (single runs only).
    densities : mapping of str to float
        Number density of each species at the exobase at the start [m^-3].
    scaling : {"inventory", "fixed"}
        ``"inventory"``: each density follows its species' inventory, ``n_i = n_i0 N_i/N_i0``;
        ``"fixed"``: densities are held. A species whose fixed density outlives its inventory is
        held at the depletion level from its depletion time on.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> exo = PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11, "O": 1e13})
    >>> exo.scaling
    'inventory'
    """

    def __init__(
        self,
        radius: Any,
        temperature: TemperatureLike,
        densities: Mapping[str, Any],
        scaling: str = "inventory",
    ) -> None:
        if scaling not in ("inventory", "fixed"):
            raise ValueError(f"scaling must be 'inventory' or 'fixed', got {scaling!r}")
        if not isinstance(densities, Mapping) or not densities:
            raise ValueError(
                f"densities must be a non-empty mapping of species to m^-3, got {densities!r}"
            )
        self.radius = _finite(radius, "exobase radius", "m")
        if not self.radius > 0.0:
            raise ValueError(f"exobase radius must be > 0 [m], got {self.radius!r}")
        self.temperature = temperature
        self.densities = {}
        for key, value in densities.items():
            label = f"density of {_name(key)}"
            density = _finite(value, label, "m-3")
            if density < 0.0:
                raise ValueError(f"{label} must be >= 0 [m-3], got {density!r}")
            self.densities[_name(key)] = density
        self.scaling = scaling
        self._history = temperature_history(temperature)

    def __reduce__(self) -> tuple[Any, ...]:
        return (PrescribedExobase, (self.radius, self.temperature, self.densities, self.scaling))

    def _core_model(self, species: Sequence[str]) -> Any:
        missing = [s for s in species if s not in self.densities]
        if missing:
            raise ValueError(f"densities: no exobase density for {', '.join(missing)}")
        extra = [s for s in self.densities if s not in species]
        if extra:
            raise ValueError(f"densities: {', '.join(extra)} not in the inventory")
        return _core.PrescribedExobase(
            self.radius,
            list(species),
            [self.densities[s] for s in species],
            getattr(_core.DensityScaling, self.scaling),
        )

    def __repr__(self) -> str:
        return (
            f"PrescribedExobase(radius={self.radius!r}, temperature={self.temperature!r}, "
            f"densities={self.densities!r}, scaling={self.scaling!r})"
        )
