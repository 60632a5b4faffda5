"""Where the Jeans picture fails: escape regimes by the Jeans parameter, energy-limited
hydrodynamic loss with the Roche-lobe correction, and drag of heavier species [SI units].

:class:`EnergyLimitedEscape` is the hydrodynamic option of :func:`exosieve.evolve`; the array
functions are the core's kernels (``hydrodynamic.hpp``). Arguments accept astropy quantities
where astropy is installed.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import DTypeLike

from . import _core
from ._arrays import FloatOrArray, _finite, _scalar, apply, to_si
from .species import _name

__all__ = [
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
