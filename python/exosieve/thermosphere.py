"""A thermosphere in diffusive equilibrium above the homopause, its exobase and escape fluxes.

Each species follows ``d ln n_i/dr = -m_i g/(k T) - (1 + alpha_i) d ln T/dr`` from its
well-mixed homopause density ``x_i n_h``, with ``alpha_i`` the species' thermal-diffusion factor
(``data/species.csv``: -0.25 for H and D, -0.38 for He and 3He, 0 for heavier species; negative
values enrich a light gas where the gas is hot): in closed form where the temperature is constant,
integrated with Boost.Odeint otherwise. Temperature profiles: isothermal, Bates (1959)
``T(r) = T_inf - (T_inf - T_h) exp(-s (r - r_h))``, or a table. The exobase is the lowest
radius where the mean free path ``1 / sum_j n_j sigma_j`` equals the scale height
``k T / (m_mean g)``; when there is none, :meth:`Thermosphere.exobase` says why.
"""

from __future__ import annotations

import enum
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from ._arrays import FloatOrArray, to_si
from .diffusion import SpeciesLike, _method, as_composition, as_species
from .jeans import TailLike, _tail


class ExobaseStatus(str, enum.Enum):
    """Whether a thermosphere has an exobase, and if not, why."""

    FOUND = "found"
    #: the mean free path already exceeds the scale height at the homopause
    COLLISIONLESS_AT_HOMOPAUSE = "collisionless_at_homopause"
    #: still collisional at the outer radius: a sign of hydrodynamic outflow
    NONE_BELOW_OUTER_RADIUS = "none_below_outer_radius"


#: Status codes returned by :func:`solve_thermospheres`, in code order.
STATUS_CODES = (
    ExobaseStatus.FOUND,
    ExobaseStatus.COLLISIONLESS_AT_HOMOPAUSE,
    ExobaseStatus.NONE_BELOW_OUTER_RADIUS,
)


@dataclass(frozen=True)
class Exobase:
    """The exobase of a thermosphere.

    Attributes
    ----------
    status : ExobaseStatus
        ``FOUND``, or why there is no exobase.
    message : str
        The status in words, with the numbers behind it.
    radius : float
        Exobase radius from the planet's centre [m] (NaN when there is none).
    temperature : float
        Temperature at the exobase [K] (NaN when there is none).
    densities : Mapping[str, float]
        Number density of each species there [m^-3] (empty when there is none).
    """

    status: ExobaseStatus
    message: str
    radius: float
    temperature: float
    densities: Mapping[str, float] = field(default_factory=dict)

    @property
    def found(self) -> bool:
        """True when the thermosphere has an exobase."""
        return self.status is ExobaseStatus.FOUND


def planet_mass_radius(planet: Any) -> tuple[float, float]:
    """Mass [kg] and radius [m] of ``planet``: an object with ``.mass`` and ``.radius``, or a
    ``(mass, radius)`` pair."""
    if hasattr(planet, "mass") and hasattr(planet, "radius"):
        mass, radius = planet.mass, planet.radius
    elif isinstance(planet, (tuple, list)) and len(planet) == 2:
        mass, radius = planet
    else:
        raise ValueError(
            f"planet must have .mass [kg] and .radius [m] or be a (mass, radius) pair, "
            f"got {planet!r}"
        )
    return _scalar(mass, "planet mass", "kg"), _scalar(radius, "planet radius", "m")


def _scalar(value: Any, name: str, unit: str) -> float:
    array = to_si(value, name, unit)
    if array.size != 1:
        raise ValueError(f"{name} must be a single number, got shape {array.shape}")
    return float(array.reshape(()))


class Thermosphere:
    """Diffusive-equilibrium thermosphere above the homopause of a planet.

    Parameters
    ----------
    planet : object or (float, float)
        Anything with ``.mass`` [kg] and ``.radius`` [m], or a ``(mass, radius)`` pair.
    homopause_radius : float
        Homopause radius from the planet's centre [m]; not below the surface.
    homopause_density : float
        Total number density at the homopause [m^-3].
    composition : Mapping[str or Species, float]
        Well-mixed mole fractions at the homopause, each >= 0 and summing to one within 1e-6
        (they are not renormalised).
    exobase_temperature : float, optional
        Temperature of the isothermal thermosphere, or ``T_inf`` of the Bates profile [K].
    homopause_temperature : float, optional
        ``T_h`` of the Bates profile [K]; None (default) for an isothermal thermosphere.
    shape : float, optional
        Bates shape parameter ``s`` [m^-1]; required with ``homopause_temperature``.
    temperature_table : (array_like, array_like), optional
        Instead of the above: radii [m] (strictly increasing) and temperatures [K], linear in
        between and held at the end values outside.
    outer_radius : float, optional
        Outer bound of the exobase search [m]; default 20 homopause radii.
    diffusion_method : {"measured", "chapman_enskog"}, optional
        Binary diffusion parameters for :meth:`escape_flux` (see
        :func:`exosieve.binary_diffusion_parameter`).
    tail_depletion : float, tuple or TailDepletion, optional
        Multiplier on the Jeans flux (see :func:`exosieve.jeans_flux`).

    Examples
    --------
    >>> from exosieve import constants as c
    >>> t = Thermosphere((c.M_EARTH, c.R_EARTH), c.R_EARTH + 120e3, 5e17,
    ...                  {"N2": 0.75, "O2": 0.10, "O": 0.15}, 1000.0,
    ...                  homopause_temperature=360.0, shape=1 / 50e3)
    >>> e = t.exobase()
    >>> e.status.value, round((e.radius - c.R_EARTH) / 1e3)
    ('found', 425)
    >>> f"{t.density('O', e.radius):.2e}"
    '5.47e+13'
    """

    def __init__(
        self,
        planet: Any,
        homopause_radius: Any,
        homopause_density: Any,
        composition: Mapping[Any, float],
        exobase_temperature: Any = None,
        homopause_temperature: Any = None,
        shape: Any = None,
        *,
        temperature_table: tuple[Any, Any] | None = None,
        outer_radius: Any = None,
        diffusion_method: str = "measured",
        tail_depletion: TailLike = 1.0,
    ) -> None:
        mass, radius = planet_mass_radius(planet)
        r_h = _scalar(homopause_radius, "homopause_radius", "m")
        n_h = _scalar(homopause_density, "homopause_density", "m-3")
        if not isinstance(composition, Mapping):
            raise ValueError(
                f"composition must be a mapping of species to mole fractions, got {composition!r}"
            )
        members, fractions = as_composition(composition, "composition")
        profile = self._profile(
            r_h, exobase_temperature, homopause_temperature, shape, temperature_table
        )
        outer = 0.0 if outer_radius is None else _scalar(outer_radius, "outer_radius", "m")
        if outer_radius is not None and not outer > 0.0:
            raise ValueError(f"outer_radius must be finite and > 0, got {outer}")
        self._core = _core.Thermosphere(mass, radius, r_h, n_h, members, fractions, profile, outer)
        self._core.set_diffusion_method(_method(diffusion_method))
        self._core.set_tail_depletion(_tail(tail_depletion))
        self._names = tuple(s.name for s in members)
        self._fractions = dict(zip(self._names, fractions, strict=True))
        self._planet = (mass, radius)
        self._args = (
            (mass, radius),
            r_h,
            n_h,
            dict(zip(members, fractions, strict=True)),  # Species keys: unregistered ones too
            exobase_temperature,
            homopause_temperature,
            shape,
        )
        self._kwargs = {
            "temperature_table": temperature_table,
            "outer_radius": outer_radius,
            "diffusion_method": diffusion_method,
            "tail_depletion": tail_depletion,
        }
        self._homopause_radius = r_h
        self._homopause_density = n_h
        self._profile_kind = profile.kind

    @staticmethod
    def _profile(
        r_h: float, t_exo: Any, t_h: Any, shape: Any, table: tuple[Any, Any] | None
    ) -> Any:
        if table is not None:
            if t_exo is not None or t_h is not None or shape is not None:
                raise ValueError(
                    "give either temperature_table or exobase_temperature (with "
                    "homopause_temperature and shape for the Bates profile), not both"
                )
            try:
                radii, temperatures = table
            except (TypeError, ValueError) as err:
                raise ValueError(
                    "temperature_table must be a pair (radii [m], temperatures [K])"
                ) from err
            r = to_si(radii, "temperature_table radii", "m").reshape(-1)
            t = to_si(temperatures, "temperature_table temperatures", "K").reshape(-1)
            return _core.TemperatureProfile.table(r.tolist(), t.tolist())
        if t_exo is None:
            raise ValueError("exobase_temperature is required (or give temperature_table)")
        t_inf = _scalar(t_exo, "exobase_temperature", "K")
        if t_h is None and shape is None:
            return _core.TemperatureProfile.isothermal(t_inf)
        if t_h is None:
            raise ValueError("shape is given but homopause_temperature is not (Bates profile)")
        if shape is None:
            raise ValueError(
                "homopause_temperature is given but shape is not: the Bates profile needs both"
            )
        return _core.TemperatureProfile.bates(
            t_inf, _scalar(t_h, "homopause_temperature", "K"), _scalar(shape, "shape", "m-1"), r_h
        )

    def __reduce__(self) -> tuple[Any, ...]:
        return (_rebuild, (self._args, self._kwargs))

    def __repr__(self) -> str:
        parts = ", ".join(f"{k}={v:g}" for k, v in self._fractions.items())
        return (
            f"Thermosphere({self._profile_kind}, homopause_radius={self._homopause_radius:g} m, "
            f"homopause_density={self._homopause_density:g} m^-3, {parts})"
        )

    @property
    def species(self) -> tuple[str, ...]:
        """Species names, in the order of ``composition``."""
        return self._names

    @property
    def mole_fractions(self) -> dict[str, float]:
        """Homopause mole fractions [1]."""
        return dict(self._fractions)

    @property
    def planet_mass(self) -> float:
        """Planet mass [kg]."""
        return self._planet[0]

    @property
    def planet_radius(self) -> float:
        """Planet radius [m]."""
        return self._planet[1]

    @property
    def homopause_radius(self) -> float:
        """Homopause radius [m]."""
        return self._homopause_radius

    @property
    def homopause_density(self) -> float:
        """Total number density at the homopause [m^-3]."""
        return self._homopause_density

    @property
    def outer_radius(self) -> float:
        """Outer bound of the exobase search [m]."""
        return float(self._core.outer_radius)

    @property
    def profile_kind(self) -> str:
        """``"isothermal"``, ``"bates"`` or ``"table"``."""
        return str(self._profile_kind)

    def _index(self, species: SpeciesLike) -> int:
        name = species.name if isinstance(species, _core.Species) else species
        if not isinstance(name, str):
            raise ValueError(f"species must be a name or a Species, got {species!r}")
        if name not in self._names:
            as_species(name, "species")  # unknown names: the registry's message, suggestions
        return int(self._core.index(name))

    def _radii(self, radius: Any) -> tuple[NDArray[np.float64], tuple[int, ...]]:
        r = to_si(radius, "radius", "m")
        return np.ascontiguousarray(r, dtype=np.float64).reshape(-1), r.shape

    def temperature(self, radius: Any) -> FloatOrArray:
        """Temperature [K] at ``radius`` [m] (at or above the homopause); broadcasts.

        Examples
        --------
        >>> from exosieve import constants as c
        >>> t = Thermosphere((c.M_EARTH, c.R_EARTH), c.R_EARTH + 1e5, 1e19, {"N2": 1.0}, 900.0)
        >>> t.temperature(c.R_EARTH + 3e5)
        900.0
        """
        flat, shape = self._radii(radius)
        out = self._core.temperature(flat).reshape(shape)
        return float(out) if shape == () else out

    def density(self, species: SpeciesLike, radius: Any) -> FloatOrArray:
        """Number density [m^-3] of ``species`` at ``radius`` [m]; broadcasts over radius.

        Examples
        --------
        >>> from exosieve import constants as c
        >>> t = Thermosphere((c.M_EARTH, c.R_EARTH), c.R_EARTH + 1e5, 1e19, {"N2": 1.0}, 900.0)
        >>> t.density("N2", c.R_EARTH + 1e5)
        1e+19
        """
        i = self._index(species)
        flat, shape = self._radii(radius)
        out = self._core.density(i, flat).reshape(shape)
        return float(out) if shape == () else out

    def exobase(self) -> Exobase:
        """The exobase: the lowest radius where the mean free path equals the scale height.

        Computed once and cached. When there is none, ``status`` says why and ``radius`` is NaN.

        Examples
        --------
        >>> from exosieve import constants as c
        >>> t = Thermosphere((c.M_EARTH, c.R_EARTH), c.R_EARTH + 1e5, 1e10, {"N2": 1.0}, 900.0)
        >>> t.exobase().status.value
        'collisionless_at_homopause'
        """
        e = self._core.exobase()
        return Exobase(
            status=ExobaseStatus(e.status),
            message=e.message,
            radius=float(e.radius),
            temperature=float(e.temperature),
            densities=dict(zip(self._names, e.densities, strict=False)),
        )

    def escape_flux(self, species: SpeciesLike, limit_by_diffusion: bool = True) -> float:
        """Escape flux of ``species`` at the exobase [m^-2 s^-1].

        The Jeans flux from the diffusive-equilibrium exobase density, or with
        ``limit_by_diffusion`` (default) the coupled diffusion–Jeans flux
        ``Phi_J,eq / (1 + (Phi_J,eq / Phi_DL) (1 - exp(-beta z_e)))`` with
        ``z_e`` = exobase minus homopause radius, the other species as background and the
        scale heights at the homopause. A lone species is not diffusion-limited.

        Raises
        ------
        exosieve.NumericalError
            When there is no exobase (the message says why).

        Examples
        --------
        >>> from exosieve import constants as c
        >>> t = Thermosphere((c.M_EARTH, c.R_EARTH), c.R_EARTH + 1e5, 1e19,
        ...                  {"N2": 0.78, "O2": 0.18, "O": 0.039999, "H": 1e-6}, 1000.0,
        ...                  homopause_temperature=190.0, shape=1 / 40e3)
        >>> jeans = t.escape_flux("H", limit_by_diffusion=False)
        >>> coupled = t.escape_flux("H")
        >>> coupled < jeans, coupled < t.diffusion_limited_flux("H")
        (True, True)
        """
        return float(self._core.escape_flux(self._index(species), bool(limit_by_diffusion)))

    def diffusion_limited_flux(self, species: SpeciesLike) -> float:
        """Hunten's diffusion-limited flux of ``species`` through the others [m^-2 s^-1].

        At the homopause temperature and gravity; NaN for a lone species.
        """
        return float(self._core.diffusion_limited_flux(self._index(species)))


def _rebuild(args: tuple[Any, ...], kwargs: dict[str, Any]) -> Thermosphere:
    return Thermosphere(*args, **kwargs)


@dataclass(frozen=True)
class ThermosphereSolutions:
    """Exobases and escape fluxes of many thermospheres (see :func:`solve_thermospheres`).

    Attributes
    ----------
    exobase_radius : ndarray
        [m], NaN where there is no exobase.
    exobase_temperature : ndarray
        [K], NaN where there is no exobase.
    status : ndarray of int
        Codes into :data:`STATUS_CODES` (0 found, 1 collisionless at the homopause,
        2 none below the outer radius).
    escape_flux : dict[str, ndarray]
        Escape flux of each species [m^-2 s^-1], NaN where there is no exobase.
    """

    exobase_radius: NDArray[np.float64]
    exobase_temperature: NDArray[np.float64]
    status: NDArray[np.int32]
    escape_flux: dict[str, NDArray[np.float64]]

    @property
    def found(self) -> NDArray[np.bool_]:
        """True where an exobase was found."""
        return np.asarray(self.status == 0, dtype=bool)


def solve_thermospheres(
    planet_mass: Any,
    planet_radius: Any,
    homopause_radius: Any,
    homopause_density: Any,
    composition: Mapping[Any, Any],
    exobase_temperature: Any,
    homopause_temperature: Any = None,
    shape: Any = None,
    *,
    outer_radius: Any = None,
    limit_by_diffusion: bool = True,
    threads: int = 0,
) -> ThermosphereSolutions:
    """Exobase and per-species escape fluxes of many thermospheres in one C++ call.

    Every numeric argument broadcasts against the others (and against the mole-fraction
    arrays); results have the broadcast shape. Each case is the :class:`Thermosphere` with
    those inputs. All cases are checked before any work starts.

    Parameters
    ----------
    planet_mass, planet_radius : float or array_like
        [kg], [m].
    homopause_radius, homopause_density : float or array_like
        [m], [m^-3].
    composition : Mapping[str or Species, float or array_like]
        Homopause mole fractions of each species (each case's must sum to one).
    exobase_temperature : float or array_like
        Isothermal temperature or Bates ``T_inf`` [K].
    homopause_temperature, shape : float or array_like, optional
        Bates ``T_h`` [K] and ``s`` [m^-1]; both None (default) for isothermal cases.
    outer_radius : float or array_like, optional
        Outer bound of the exobase search [m] (default 20 homopause radii).
    limit_by_diffusion : bool, optional
        Coupled diffusion–Jeans fluxes (default) or plain Jeans fluxes.
    threads : int, optional
        Worker threads; 0 (default) uses all cores.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> out = solve_thermospheres(c.M_EARTH, c.R_EARTH, c.R_EARTH + 120e3, 5e17,
    ...                           {"N2": 0.75, "O2": 0.10, "O": 0.15}, [800.0, 1000.0, 1200.0],
    ...                           homopause_temperature=360.0, shape=1 / 50e3)
    >>> [round(z) for z in (out.exobase_radius - c.R_EARTH) / 1e3]
    [362, 425, 492]
    """
    if isinstance(threads, bool) or not isinstance(threads, int) or threads < 0:
        raise ValueError(f"threads must be an integer >= 0, got {threads!r}")
    if not isinstance(composition, Mapping) or not composition:
        raise ValueError(
            f"composition must be a non-empty mapping of species to mole fractions, "
            f"got {composition!r}"
        )
    if (homopause_temperature is None) != (shape is None):
        raise ValueError(
            "homopause_temperature and shape must be given together (Bates profile) or both "
            "left out (isothermal)"
        )
    members = [as_species(key, "composition key") for key in composition]
    named: list[tuple[str, Any, str]] = [
        ("planet_mass", planet_mass, "kg"),
        ("planet_radius", planet_radius, "m"),
        ("homopause_radius", homopause_radius, "m"),
        ("homopause_density", homopause_density, "m-3"),
        ("exobase_temperature", exobase_temperature, "K"),
    ]
    if homopause_temperature is not None:
        named += [("homopause_temperature", homopause_temperature, "K"), ("shape", shape, "m-1")]
    if outer_radius is not None:
        named.append(("outer_radius", outer_radius, "m"))
    arrays = {name: to_si(value, name, unit) for name, value, unit in named}
    fractions = [
        to_si(value, f"composition mole fraction of {s.name}", "")
        for s, value in zip(members, composition.values(), strict=True)
    ]
    try:
        shape_out = np.broadcast_shapes(
            *(a.shape for a in arrays.values()), *(f.shape for f in fractions)
        )
    except ValueError as err:
        raise ValueError(f"arguments do not broadcast together: {err}") from err
    count = int(np.prod(shape_out, dtype=np.int64))

    def flat(a: NDArray[np.float64]) -> NDArray[np.float64]:
        if a.size == 1:
            return np.ascontiguousarray(a, dtype=np.float64).reshape(1)
        return np.ascontiguousarray(np.broadcast_to(a, shape_out), dtype=np.float64).reshape(-1)

    if all(f.size == 1 for f in fractions):
        x = np.array([[float(f.reshape(())) for f in fractions]], dtype=np.float64)
    else:
        x = np.stack([np.broadcast_to(f, shape_out).reshape(-1) for f in fractions], axis=1)
        x = np.ascontiguousarray(x, dtype=np.float64)
    radius, temperature, status, flux = _core.solve_thermospheres(
        members,
        count,
        flat(arrays["planet_mass"]),
        flat(arrays["planet_radius"]),
        flat(arrays["homopause_radius"]),
        flat(arrays["homopause_density"]),
        x,
        flat(arrays["exobase_temperature"]),
        flat(arrays["homopause_temperature"]) if "homopause_temperature" in arrays else None,
        flat(arrays["shape"]) if "shape" in arrays else None,
        flat(arrays["outer_radius"]) if "outer_radius" in arrays else None,
        bool(limit_by_diffusion),
        int(threads),
    )
    return ThermosphereSolutions(
        exobase_radius=radius.reshape(shape_out),
        exobase_temperature=temperature.reshape(shape_out),
        status=status.reshape(shape_out),
        escape_flux={s.name: flux[:, j].reshape(shape_out) for j, s in enumerate(members)},
    )
