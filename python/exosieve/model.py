"""Model objects for :func:`exosieve.evolve`: star, planet, exobase temperature, exobase models,
sources and the energy-limited hydrodynamic option [SI units].

Everything here is a thin description; the numbers are checked and used by the C++ core.
Arguments accept astropy quantities where astropy is installed.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, DTypeLike, NDArray

from . import _core
from ._arrays import FloatOrArray, apply, to_si

__all__ = [
    "Star",
    "Planet",
    "TabulatedTemperature",
    "XuvTemperature",
    "PrescribedExobase",
    "TabulatedSource",
    "EnergyLimitedEscape",
    "RegimeThresholds",
    "REGIMES",
    "classify_regime",
    "roche_lobe_ratio",
    "roche_lobe_factor",
    "energy_limited_mass_loss",
    "crossover_mass",
    "dragged_flux",
]

#: Regime codes used in results: 0 Jeans, 1 enhanced Jeans, 2 transition, 3 hydrodynamic.
REGIMES: tuple[str, ...] = tuple(_core.REGIMES)

_DEFAULT_XUV = _core.XuvHistory()


def _scalar(value: Any, name: str, unit: str) -> float:
    if type(value) is float:  # the common case, no conversion needed
        return value
    array = to_si(value, name, unit)
    if array.ndim != 0 and array.size != 1:
        raise ValueError(f"{name} must be a single number, got an array of shape {array.shape}")
    return float(array.reshape(()))


def _vector(value: Any, name: str, unit: str) -> NDArray[np.float64]:
    if isinstance(value, (list, tuple)) and any(hasattr(v, "unit") for v in value):
        value = [to_si(v, name, unit) for v in value]  # e.g. (10 * u.Myr, 1 * u.Gyr)
    array = np.atleast_1d(to_si(value, name, unit))
    if array.ndim != 1:
        raise ValueError(f"{name} must be one-dimensional, got shape {array.shape}")
    return np.ascontiguousarray(array)


def _finite(value: Any, name: str, unit: str) -> float:
    number = _scalar(value, name, unit)
    if not math.isfinite(number):
        raise ValueError(f"{name} must be finite [{unit}], got {number!r}")
    return number


def _finite_vector(value: Any, name: str, unit: str) -> NDArray[np.float64]:
    array = _vector(value, name, unit)
    bad = np.flatnonzero(~np.isfinite(array))
    if bad.size:
        raise ValueError(
            f"{name} must be finite [{unit}], got {float(array[bad[0]])!r} (element {bad[0]})"
        )
    return array


def _map(
    function: Callable[[NDArray[np.float64]], NDArray[np.float64]], value: Any, name: str, unit: str
) -> FloatOrArray:
    array = to_si(value, name, unit)
    out = function(np.ascontiguousarray(array).reshape(-1)).reshape(array.shape)
    return float(out) if array.ndim == 0 else out


class Star:
    """A host star and its XUV (X-ray + EUV) history.

    ``L_xuv(t) = R_sat L_bol`` up to the saturation time ``t_sat``, then
    ``R_sat L_bol (t / t_sat)^(-beta)`` (the shape of Ribas et al. 2005 and Jackson et al. 2012),
    with ``t`` the star's age.

    Parameters
    ----------
    mass : float
        Stellar mass [kg].
    luminosity : float
        Bolometric luminosity [W].
    saturation_ratio : float, optional
        Saturated ``L_xuv / L_bol`` [1]. Default ``10**-3.5``: the X-ray saturation level
        ``log(L_X/L_bol) ~ -3 to -3.5`` of young Sun-like stars (Pizzolato et al. 2003;
        Jackson et al. 2012), from memory; with the EUV the XUV level may be up to ~3 times
        higher, so trust it to a factor ~3.
    saturation_time : float, optional
        End of saturation, as stellar age [s]. Default 100 Myr (Jackson et al. 2012, Sun-like
        stars; from memory, within a factor ~2).
    decay_index : float, optional
        ``beta`` of the decline after saturation [1]. Default 1.23, the fit to the 1–1180 Å
        flux of solar analogues by Ribas et al. (2005, ApJ 622, 680), from memory; it
        reproduces the ratios stated in that paper's abstract (2.5 times today's flux 2.5 Gyr
        ago, 6 times 3.5 Gyr ago) to 7 %.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> sun_like = Star(c.M_SUN, c.L_SUN, saturation_ratio=1e-3, decay_index=1.5)
    >>> f"{sun_like.xuv_luminosity(1e3 * c.MYR) / c.L_SUN:.3e}"
    '3.162e-05'
    """

    def __init__(
        self,
        mass: Any,
        luminosity: Any,
        saturation_ratio: float = _DEFAULT_XUV.saturation_ratio,
        saturation_time: Any = _DEFAULT_XUV.saturation_time,
        decay_index: float = _DEFAULT_XUV.decay_index,
    ) -> None:
        xuv = _core.XuvHistory(
            _scalar(saturation_ratio, "saturation_ratio", "1"),
            _scalar(saturation_time, "saturation_time", "s"),
            _scalar(decay_index, "decay_index", "1"),
        )
        self._core = _core.Star(
            _scalar(mass, "star mass", "kg"), _scalar(luminosity, "star luminosity", "W"), xuv
        )

    @property
    def mass(self) -> float:
        """Stellar mass [kg]."""
        return float(self._core.mass)

    @property
    def luminosity(self) -> float:
        """Bolometric luminosity [W]."""
        return float(self._core.luminosity)

    @property
    def saturation_ratio(self) -> float:
        """Saturated ``L_xuv / L_bol`` [1]."""
        return float(self._core.xuv.saturation_ratio)

    @property
    def saturation_time(self) -> float:
        """End of XUV saturation (stellar age) [s]."""
        return float(self._core.xuv.saturation_time)

    @property
    def decay_index(self) -> float:
        """Power-law index of the XUV decline after saturation [1]."""
        return float(self._core.xuv.decay_index)

    def xuv_luminosity(self, t: Any) -> FloatOrArray:
        """XUV luminosity [W] at stellar age ``t`` [s] (float or array)."""
        return _map(self._core.xuv_luminosity, t, "t", "s")

    def __repr__(self) -> str:
        return (
            f"Star(mass={self.mass:.6g}, luminosity={self.luminosity:.6g}, "
            f"saturation_ratio={self.saturation_ratio:.6g}, "
            f"saturation_time={self.saturation_time:.6g}, decay_index={self.decay_index:.6g})"
        )

    def __reduce__(self) -> tuple[Any, ...]:
        return (
            Star,
            (
                self.mass,
                self.luminosity,
                self.saturation_ratio,
                self.saturation_time,
                self.decay_index,
            ),
        )


class Planet:
    """A planet; with an orbit and a star it also knows its XUV flux.

    Parameters
    ----------
    mass : float
        Planet mass [kg].
    radius : float
        Planet radius [m].
    semi_major_axis : float, optional
        Orbital semi-major axis [m]; needed with ``star`` for anything XUV-driven.
    star : Star, optional
        The host star.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> p = Planet(c.M_EARTH, c.R_EARTH, c.AU, Star(c.M_SUN, c.L_SUN))
    >>> round(p.xuv_flux(10 * c.MYR) / (c.L_SUN / (4 * 3.141592653589793 * c.AU**2)), 6)
    0.000316
    """

    def __init__(
        self, mass: Any, radius: Any, semi_major_axis: Any = None, star: Star | None = None
    ) -> None:
        m = _scalar(mass, "planet mass", "kg")
        r = _scalar(radius, "planet radius", "m")
        if (semi_major_axis is None) != (star is None):
            raise ValueError("give both semi_major_axis and star, or neither")
        self.star: Star | None = star
        if star is None:
            self._core = _core.Planet(m, r)
        else:
            if not isinstance(star, Star):
                raise ValueError(f"star must be an exosieve.Star, got {star!r}")
            self._core = _core.Planet(
                m, r, _scalar(semi_major_axis, "semi_major_axis", "m"), star._core
            )

    @property
    def mass(self) -> float:
        """Planet mass [kg]."""
        return float(self._core.mass)

    @property
    def radius(self) -> float:
        """Planet radius [m]."""
        return float(self._core.radius)

    @property
    def semi_major_axis(self) -> float | None:
        """Semi-major axis [m], or None."""
        return float(self._core.semi_major_axis) if self.star is not None else None

    def xuv_flux(self, t: Any) -> FloatOrArray:
        """XUV flux at the planet ``L_xuv(t) / (4 pi a^2)`` [W m^-2] at stellar age ``t`` [s]."""
        return _map(self._core.xuv_flux, t, "t", "s")

    def __repr__(self) -> str:
        orbit = (
            ""
            if self.star is None
            else f", semi_major_axis={self.semi_major_axis:.6g}, star={self.star!r}"
        )
        return f"Planet(mass={self.mass:.6g}, radius={self.radius:.6g}{orbit})"

    def __reduce__(self) -> tuple[Any, ...]:
        return (Planet, (self.mass, self.radius, self.semi_major_axis, self.star))


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


class TabulatedSource:
    """A source (e.g. outgassing) against time [s^-1]: linear between points, held at the ends.

    Parameters
    ----------
    times : array_like
        Strictly increasing times [s].
    rates : array_like
        Source rates [particles s^-1] (>= 0).

    Examples
    --------
    >>> TabulatedSource([0.0, 1e16], [1e27, 0.0])(5e15)
    5e+26
    """

    def __init__(self, times: ArrayLike, rates: ArrayLike) -> None:
        self.times = _finite_vector(times, "times", "s")
        self.rates = _finite_vector(rates, "rates", "s-1")
        self._core = _core.SourceRate(self.times, self.rates)

    def __call__(self, t: float) -> float:
        """Rate [s^-1] at time ``t`` [s]."""
        return float(self._core(_finite(t, "t", "s")))

    def __repr__(self) -> str:
        return f"TabulatedSource(times={self.times!r}, rates={self.rates!r})"

    def __reduce__(self) -> tuple[Any, ...]:
        return (TabulatedSource, (self.times, self.rates))


def source_rate(value: Any, name: str) -> Any:
    """The core source for a float rate [s^-1], a TabulatedSource or a (times, rates) pair."""
    if isinstance(value, TabulatedSource):
        return value._core
    if isinstance(value, tuple) and len(value) == 2:
        return TabulatedSource(*value)._core
    rate = _scalar(value, f"source of {name}", "s-1")
    if not (math.isfinite(rate) and rate >= 0.0):
        raise ValueError(f"source of {name} must be finite and >= 0 [s^-1], got {rate!r}")
    return _core.SourceRate(rate)


class GivenLoss:
    """A loss of one species that the user gives [particles s^-1], beyond thermal escape.

    For non-thermal escape (photochemical escape, ion pick-up, sputtering), which exosieve does
    not model, or any loss measured or modelled elsewhere. :func:`exosieve.evolve` adds it to the
    thermal (Jeans or hydrodynamic) loss, ``dN/dt = S - Q - L``, and reports it apart, as
    ``result.given_loss_rate``. It does not vanish with the inventory, so a species with a given
    loss is held at its depletion level once it reaches it.

    Build one with ``GivenLoss(rate)`` (constant [s^-1]), :meth:`table` or :meth:`xuv_power_law`.

    Examples
    --------
    >>> GivenLoss(1e25)(0.0)
    1e+25
    >>> GivenLoss.table([0.0, 1e16], [1e26, 0.0])(5e15)
    5e+25
    >>> f"{GivenLoss.xuv_power_law(1e26, 1.0, 0.5)(0.0, xuv_flux=4.0):.6g}"
    '2e+26'
    """

    def __init__(self, rate: float) -> None:
        value = _finite(rate, "given loss rate", "s-1")
        if not value >= 0.0:
            raise ValueError(f"given loss rate must be >= 0 [s^-1], got {value!r}")
        self.kind = "constant"
        self.parameters: dict[str, Any] = {"rate": value}
        self._core = _core.GivenLoss(value)

    @classmethod
    def table(cls, times: ArrayLike, rates: ArrayLike) -> GivenLoss:
        """Rates [s^-1] (>= 0) against strictly increasing times [s], linear between points and
        held at the ends."""
        t = _finite_vector(times, "times", "s")
        r = _finite_vector(rates, "rates", "s-1")
        self = cls.__new__(cls)
        self.kind = "table"
        self.parameters = {"times": t, "rates": r}
        self._core = _core.GivenLoss(t, r)
        return self

    @classmethod
    def xuv_power_law(
        cls, reference_rate: float, reference_flux: float, exponent: float
    ) -> GivenLoss:
        """``L = reference_rate (F_xuv / reference_flux)^exponent``: reference_rate [s^-1]
        (>= 0) at reference_flux [W m^-2] (> 0), exponent [1]. Needs the planet's star."""
        rate = _finite(reference_rate, "reference_rate", "s-1")
        flux = _finite(reference_flux, "reference_flux", "W m-2")
        p = _finite(exponent, "exponent", "1")
        self = cls.__new__(cls)
        self.kind = "xuv_power_law"
        self.parameters = {"reference_rate": rate, "reference_flux": flux, "exponent": p}
        self._core = _core.GivenLoss.xuv_power_law(rate, flux, p)
        return self

    def __call__(self, t: float, xuv_flux: float = 0.0) -> float:
        """Rate [s^-1] at time ``t`` [s] and XUV flux ``xuv_flux`` [W m^-2] (power law only)."""
        return float(self._core(_finite(t, "t", "s"), _finite(xuv_flux, "xuv_flux", "W m-2")))

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.parameters.items())
        return f"GivenLoss.{self.kind}({args})" if self.kind != "constant" else f"GivenLoss({args})"

    def __reduce__(self) -> tuple[Any, ...]:
        if self.kind == "constant":
            return (GivenLoss, (self.parameters["rate"],))
        return (getattr(GivenLoss, self.kind), tuple(self.parameters.values()))


def given_loss(value: Any, name: str) -> Any:
    """The core given loss for a float rate [s^-1], a GivenLoss or a (times, rates) pair."""
    if isinstance(value, GivenLoss):
        return value._core
    if isinstance(value, tuple) and len(value) == 2:
        return GivenLoss.table(*value)._core
    rate = _scalar(value, f"given loss of {name}", "s-1")
    if not (math.isfinite(rate) and rate >= 0.0):
        raise ValueError(f"given loss of {name} must be finite and >= 0 [s^-1], got {rate!r}")
    return _core.GivenLoss(rate)


DiffusionLike = float | tuple[float, float]


class EnergyLimitedEscape:
    """Energy-limited hydrodynamic escape with drag of heavier species.

    Mass-loss rate ``dM/dt = eta pi R_p R_xuv^2 F_xuv / (G M_p K)`` (Watson et al. 1981) with the
    Roche-lobe factor ``K = 1 - 3/(2 xi) + 1/(2 xi^3)``, ``xi = a (M_p/(3 M_star))^(1/3)/R_p``
    (Erkaev et al. 2007). The mass leaves as the light escaping species and the heavier species
    it drags: ``F_i = (x_i/x_1) F_1 (m_c - m_i)/(m_c - m_1)`` below the crossover mass
    ``m_c = m_1 + k T F_1/(b g x_1)`` (Hunten, Pepin & Walker 1987), the budget shared so that
    the total mass rate equals ``dM/dt``. Species without a diffusion law are not dragged and
    keep their Jeans rate.

    Parameters
    ----------
    efficiency : float, optional
        Heating efficiency ``eta`` [1] in (0, 1]; default 0.15 (common practice: 0.1–0.3).
    xuv_radius : float, optional
        Radius where the XUV is absorbed [m]; default the planet radius.
    roche_lobe : bool, optional
        Apply the Roche-lobe factor (default True; needs the star and the orbit).
    escaping_species : str, optional
        The light escaping species; default the lightest in the inventory.
    activation : {"hydrodynamic", "transition", "always"}, optional
        When it replaces Jeans escape: while the bulk regime (by the Jeans parameter of the
        densest species at the exobase) is hydrodynamic (default), transition or hydrodynamic,
        or throughout. An evolving thermosphere with no exobase (collisional out to its outer
        radius) counts as hydrodynamic.
    diffusion : mapping of str to float or (float, float), optional
        Binary diffusion parameter ``b`` of each dragged species in the light gas
        [m^-1 s^-1]: a constant, or ``(A, s)`` for ``b = A (T / 1 K)^s``.
    absorption : mapping, optional
        Absorb the XUV at the radius where its optical depth is one in an isothermal,
        exponential atmosphere above the planet radius (``exosieve.xuv_absorption_radius``),
        instead of at ``xuv_radius`` (give one or the other): keys ``base_density`` [m^-3] at
        the planet radius, ``cross_section`` [m^2], ``mean_molecular_mass`` [kg] and optionally
        ``temperature`` [K] (default: the exobase temperature at each instant) and ``chord``
        (optical depth along a grazing chord, default False). The scale height is taken at the
        planet radius.
    recombination_limit : bool or mapping, optional
        Cap the energy-limited rate by the recombination-limited rate of Murray-Clay, Chiang &
        Murray (2009) (``exosieve.xuv_driven_mass_loss``: the smaller of the two, with the
        planet radius as the wind base). True takes its defaults; a mapping may set
        ``temperature`` [K], ``recombination_coefficient`` [m^3 s^-1] and ``photon_energy`` [J].
    transonic_wind : mapping, optional
        Cap the rate (energy-limited, or with ``recombination_limit`` the smaller of the two)
        by that of an isothermal transonic (Parker) wind from a base at the planet radius (the
        evolving radius with an envelope; ``exosieve.parker_mass_loss``): the smaller applies,
        since the wind carries no more than its base supplies and the XUV energy bounds what
        any wind lifts. Keys ``temperature`` [K] and ``base_density`` [m^-3] (both needed, held
        fixed) and optionally ``mean_molecular_mass`` [kg] (default: the escaping species'
        mass). Assumes a steady, spherically symmetric, isothermal wind of one gas in the
        planet's gravity alone.
    drag : bool, optional
        Drag heavier species (default True): those without a ``diffusion`` law with the
        library's binary diffusion parameter in the light gas (measured fit, else
        Chapman–Enskog). False drags only the species listed in ``diffusion``; the others keep
        their Jeans rate.

    Examples
    --------
    >>> EnergyLimitedEscape(efficiency=0.1, diffusion={"O": (4.8e19, 0.75)}).activation
    'hydrodynamic'
    """

    def __init__(
        self,
        efficiency: float = 0.15,
        xuv_radius: Any = None,
        roche_lobe: bool = True,
        escaping_species: str | None = None,
        activation: str = "hydrodynamic",
        diffusion: Mapping[str, DiffusionLike] | None = None,
        absorption: Mapping[str, Any] | None = None,
        recombination_limit: bool | Mapping[str, float] = False,
        transonic_wind: Mapping[str, float] | None = None,
        drag: bool = True,
    ) -> None:
        if activation not in ("hydrodynamic", "transition", "always"):
            raise ValueError(
                f"activation must be 'hydrodynamic', 'transition' or 'always', got {activation!r}"
            )
        self.efficiency = _scalar(efficiency, "efficiency", "1")
        self.xuv_radius = None if xuv_radius is None else _scalar(xuv_radius, "xuv_radius", "m")
        self.roche_lobe = bool(roche_lobe)
        self.escaping_species = escaping_species
        self.activation = activation
        if not isinstance(drag, (bool, np.bool_)):
            raise ValueError(f"drag must be True or False, got {drag!r}")
        self.drag = bool(drag)
        self.diffusion: dict[str, tuple[float, float]] = {}
        for name, law in (diffusion or {}).items():
            if isinstance(law, tuple):
                a, s = law
            else:
                a, s = law, 0.0
            self.diffusion[_name(name)] = (
                _scalar(a, f"diffusion coefficient of {name}", "m-1 s-1"),
                float(s),
            )
        self.absorption: dict[str, Any] | None = None
        core_absorption = None
        if absorption is not None:
            if not isinstance(absorption, Mapping):
                raise ValueError(f"absorption must be a mapping, got {absorption!r}")
            known = {"base_density", "cross_section", "mean_molecular_mass", "temperature", "chord"}
            unknown = sorted(set(absorption) - known)
            if unknown:
                raise ValueError(
                    f"absorption: unknown keys {unknown}; known: {', '.join(sorted(known))}"
                )
            missing = sorted(
                {"base_density", "cross_section", "mean_molecular_mass"} - set(absorption)
            )
            if missing:
                raise ValueError(f"absorption: missing {', '.join(missing)}")
            self.absorption = {
                "base_density": _scalar(absorption["base_density"], "base_density", "m-3"),
                "cross_section": _scalar(absorption["cross_section"], "cross_section", "m2"),
                "mean_molecular_mass": _scalar(
                    absorption["mean_molecular_mass"], "mean_molecular_mass", "kg"
                ),
                "temperature": _scalar(absorption.get("temperature", 0.0), "temperature", "K"),
                "chord": bool(absorption.get("chord", False)),
            }
            core_absorption = _core.XuvAbsorption(**self.absorption)
        self.recombination_limit: dict[str, float] | None = None
        core_recombination = None
        if isinstance(recombination_limit, Mapping):
            known = {"temperature", "recombination_coefficient", "photon_energy"}
            unknown = sorted(set(recombination_limit) - known)
            if unknown:
                raise ValueError(
                    f"recombination_limit: unknown keys {unknown}; "
                    f"known: {', '.join(sorted(known))}"
                )
            units = {
                "temperature": "K",
                "recombination_coefficient": "m3 s-1",
                "photon_energy": "J",
            }
            self.recombination_limit = {
                k: _scalar(v, k, units[k]) for k, v in recombination_limit.items()
            }
            core_recombination = _core.RecombinationLimit(**self.recombination_limit)
        elif recombination_limit is True:
            self.recombination_limit = {}
            core_recombination = _core.RecombinationLimit()
        elif recombination_limit is not False:
            raise ValueError(
                f"recombination_limit must be True, False or a mapping, got {recombination_limit!r}"
            )
        self.transonic_wind: dict[str, float] | None = None
        core_wind = None
        if transonic_wind is not None:
            if not isinstance(transonic_wind, Mapping):
                raise ValueError(f"transonic_wind must be a mapping, got {transonic_wind!r}")
            wind_units = {"temperature": "K", "base_density": "m-3", "mean_molecular_mass": "kg"}
            unknown = sorted(set(transonic_wind) - set(wind_units))
            if unknown:
                raise ValueError(
                    f"transonic_wind: unknown keys {unknown}; "
                    f"known: {', '.join(sorted(wind_units))}"
                )
            missing = sorted({"temperature", "base_density"} - set(transonic_wind))
            if missing:
                raise ValueError(f"transonic_wind: missing {', '.join(missing)}")
            self.transonic_wind = {
                k: _scalar(v, k, wind_units[k]) for k, v in transonic_wind.items()
            }
            core_wind = _core.TransonicWind(**self.transonic_wind)
        self._core = _core.HydrodynamicOptions(
            self.efficiency,
            0.0 if self.xuv_radius is None else self.xuv_radius,
            self.roche_lobe,
            escaping_species or "",
            getattr(_core.HydrodynamicActivation, activation),
            [(k, _core.DiffusionLaw(a, s)) for k, (a, s) in self.diffusion.items()],
            core_absorption,
            core_recombination,
            core_wind,
            self.drag,
        )

    def __reduce__(self) -> tuple[Any, ...]:
        return (
            EnergyLimitedEscape,
            (
                self.efficiency,
                self.xuv_radius,
                self.roche_lobe,
                self.escaping_species,
                self.activation,
                self.diffusion,
                self.absorption,
                False if self.recombination_limit is None else self.recombination_limit or True,
                self.transonic_wind,
                self.drag,
            ),
        )

    def __repr__(self) -> str:
        return (
            f"EnergyLimitedEscape(efficiency={self.efficiency!r}, "
            f"xuv_radius={self.xuv_radius!r}, roche_lobe={self.roche_lobe!r}, "
            f"escaping_species={self.escaping_species!r}, activation={self.activation!r}, "
            f"diffusion={self.diffusion!r}, absorption={self.absorption!r}, "
            f"recombination_limit={self.recombination_limit!r}, "
            f"transonic_wind={self.transonic_wind!r}, drag={self.drag!r})"
        )


def RegimeThresholds(
    enhanced: float = 6.0,
    transition: float = 3.0,  # noqa: N802
    hydrodynamic: float = 2.1,
) -> Any:
    """Jeans-parameter thresholds between escape regimes [1].

    Defaults from the kinetic simulations of Volkov et al. (2011, ApJL 729, L24): Jeans-like
    escape above ~6, enhanced molecule-by-molecule escape down to ~3, transition down to ~2.1,
    hydrodynamic outflow below.

    Examples
    --------
    >>> RegimeThresholds().transition
    3.0
    """
    return _core.RegimeThresholds(
        _finite(enhanced, "enhanced", "1"),
        _finite(transition, "transition", "1"),
        _finite(hydrodynamic, "hydrodynamic", "1"),
    )


def as_thresholds(value: Any, name: str = "thresholds") -> Any:
    """The thresholds ``value`` stands for: a :func:`RegimeThresholds`, a sequence
    (enhanced, transition, hydrodynamic) [1], or None for the defaults; every entry point that
    takes thresholds reads them here, so each accepts both forms."""
    if value is None:
        return _core.RegimeThresholds()
    if isinstance(value, _core.RegimeThresholds):
        return value
    if isinstance(value, (str, bytes)) or not hasattr(value, "__len__") or len(value) != 3:
        raise ValueError(
            f"{name} must be an exosieve.RegimeThresholds or a sequence (enhanced, transition, "
            f"hydrodynamic) of Jeans parameters [1], got {value!r}"
        )
    return RegimeThresholds(*value)


def classify_regime(jeans_parameter: Any, thresholds: Any = None) -> Any:
    """Regime code (0 Jeans, 1 enhanced Jeans, 2 transition, 3 hydrodynamic; see
    :data:`REGIMES`) of each Jeans parameter [1]; an int for scalar input.

    Examples
    --------
    >>> [REGIMES[k] for k in classify_regime([10.0, 4.0, 2.5, 1.0])]
    ['jeans', 'enhanced_jeans', 'transition', 'hydrodynamic']
    """
    lam = to_si(jeans_parameter, "jeans_parameter", "1")
    bad = np.flatnonzero(~(np.isfinite(lam) & (lam >= 0.0)).reshape(-1))
    if bad.size:
        where = f" (element {bad[0]})" if lam.ndim else ""
        value = float(lam.reshape(-1)[bad[0]])
        raise ValueError(f"jeans_parameter must be finite and >= 0, got {value!r}{where}")
    codes = _core.classify_regime(
        np.ascontiguousarray(lam).reshape(-1), thresholds or _core.RegimeThresholds()
    ).reshape(lam.shape)
    return int(codes) if lam.ndim == 0 else codes


def roche_lobe_ratio(
    planet_mass: Any,
    star_mass: Any,
    semi_major_axis: Any,
    radius: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """``xi = a (M_p / (3 M_star))^(1/3) / R_p`` [1] (Erkaev et al. 2007).

    Parameters
    ----------
    planet_mass, star_mass : float or array_like
        Masses of the planet and of its star [kg].
    semi_major_axis : float or array_like
        Orbital distance [m].
    radius : float or array_like
        Planet radius [m].

    Arguments broadcast against each other like numpy arrays (as all array functions do).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(roche_lobe_ratio(c.M_EARTH, c.M_SUN, c.AU, c.R_EARTH), 1)
    234.6
    """
    return apply(
        _core.roche_lobe_ratio,
        [
            ("planet_mass", planet_mass, "kg"),
            ("star_mass", star_mass, "kg"),
            ("semi_major_axis", semi_major_axis, "m"),
            ("radius", radius, "m"),
        ],
        species_argument=None,
        out=out,
        dtype=dtype,
    )


def roche_lobe_factor(xi: Any, *, out: Any = None, dtype: DTypeLike | None = None) -> FloatOrArray:
    """Roche-lobe factor ``K(xi) = 1 - 3/(2 xi) + 1/(2 xi^3)`` [1] (Erkaev et al. 2007), xi > 1.

    Examples
    --------
    >>> roche_lobe_factor(2.0)
    0.3125
    """
    return apply(
        lambda count, x: _core.roche_lobe_factor(x),
        [("xi", xi, "1")],
        species_argument=None,
        out=out,
        dtype=dtype,
    )


def energy_limited_mass_loss(
    efficiency: Any,
    planet_radius: Any,
    xuv_radius: Any,
    xuv_flux: Any,
    planet_mass: Any,
    roche_factor: Any = 1.0,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Energy-limited mass-loss rate ``eta pi R_p R_xuv^2 F_xuv / (G M_p K)`` [kg s^-1]
    (Watson et al. 1981; Erkaev et al. 2007).

    Parameters
    ----------
    efficiency : float or array_like
        Heating efficiency ``eta`` [1], in (0, 1].
    planet_radius, xuv_radius : float or array_like
        Planet radius and the radius where the XUV is absorbed [m].
    xuv_flux : float or array_like
        XUV flux at the planet [W m^-2].
    planet_mass : float or array_like
        Planet mass [kg].
    roche_factor : float or array_like, optional
        Roche-lobe factor ``K`` [1], in (0, 1] (default 1: no correction).

    Arguments broadcast against each other like numpy arrays.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> f"{energy_limited_mass_loss(0.15, 2 * c.R_EARTH, 2 * c.R_EARTH, 10.0, 5 * c.M_EARTH):.4e}"
    '4.9079e+06'
    >>> energy_limited_mass_loss(0.15, c.R_EARTH, c.R_EARTH, [1.0, 10.0], c.M_EARTH).shape
    (2,)
    """
    return apply(
        _core.energy_limited_mass_loss,
        [
            ("efficiency", efficiency, "1"),
            ("planet_radius", planet_radius, "m"),
            ("xuv_radius", xuv_radius, "m"),
            ("xuv_flux", xuv_flux, "W m-2"),
            ("planet_mass", planet_mass, "kg"),
            ("roche_factor", roche_factor, "1"),
        ],
        species_argument=None,
        out=out,
        dtype=dtype,
    )


def crossover_mass(
    light_mass: Any,
    temperature: Any,
    light_flux: Any,
    diffusion_parameter: Any,
    gravity: Any,
    light_mole_fraction: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Crossover mass ``m_1 + k T F_1 / (b g x_1)`` [kg] (Hunten, Pepin & Walker 1987).

    Parameters
    ----------
    light_mass : float or array_like
        Mass of the escaping light species [kg].
    temperature : float or array_like
        Temperature [K].
    light_flux : float or array_like
        Escape flux of the light species [m^-2 s^-1].
    diffusion_parameter : float or array_like
        Binary diffusion parameter ``b`` of the heavy species in the light one [m^-1 s^-1].
    gravity : float or array_like
        Gravitational acceleration [m s^-2].
    light_mole_fraction : float or array_like
        Mole fraction of the light species [1].

    Arguments broadcast against each other like numpy arrays.

    Examples
    --------
    >>> from exosieve.constants import AMU
    >>> bool(crossover_mass(AMU, 1000.0, [0.0, 1e16], 1e21, 9.8, 0.5)[0] == AMU)
    True
    """
    return apply(
        _core.crossover_mass,
        [
            ("light_mass", light_mass, "kg"),
            ("temperature", temperature, "K"),
            ("light_flux", light_flux, "m-2 s-1"),
            ("diffusion_parameter", diffusion_parameter, "m-1 s-1"),
            ("gravity", gravity, "m s-2"),
            ("light_mole_fraction", light_mole_fraction, "1"),
        ],
        species_argument=None,
        out=out,
        dtype=dtype,
    )


def dragged_flux(
    mass: Any,
    mole_fraction: Any,
    light_mass: Any,
    light_flux: Any,
    light_mole_fraction: Any,
    crossover_mass: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Flux of a species dragged by the light one [m^-2 s^-1] (Hunten, Pepin & Walker 1987):
    ``(x_i/x_1) F_1 (m_c - m_i)/(m_c - m_1)`` below the crossover mass, else 0.

    Parameters
    ----------
    mass, mole_fraction : float or array_like
        Mass [kg] and mole fraction [1] of the dragged species.
    light_mass, light_flux, light_mole_fraction : float or array_like
        Mass [kg], escape flux [m^-2 s^-1] and mole fraction [1] of the light species.
    crossover_mass : float or array_like
        Crossover mass [kg] (:func:`crossover_mass`).

    Arguments broadcast against each other like numpy arrays.

    Examples
    --------
    >>> from exosieve.constants import AMU
    >>> [f"{f:.4e}" for f in dragged_flux([2 * AMU, 20 * AMU], 0.1, AMU, 1e12, 0.5, 10 * AMU)]
    ['1.7778e+11', '0.0000e+00']
    """
    return apply(
        _core.dragged_flux,
        [
            ("mass", mass, "kg"),
            ("mole_fraction", mole_fraction, "1"),
            ("light_mass", light_mass, "kg"),
            ("light_flux", light_flux, "m-2 s-1"),
            ("light_mole_fraction", light_mole_fraction, "1"),
            ("crossover_mass", crossover_mass, "kg"),
        ],
        species_argument=None,
        out=out,
        dtype=dtype,
    )


def _name(key: Any) -> str:
    if isinstance(key, _core.Species):
        return str(key.name)
    if not isinstance(key, str):
        raise ValueError(f"species must be given by name (str), got {key!r}")
    return key
