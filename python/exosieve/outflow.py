"""Beyond the energy limit: the isothermal transonic (Parker) wind, recombination-limited escape
and the XUV absorption radius [SI units].

Isothermal transonic wind (Parker 1958, ApJ 128, 664; the Lambert-W closed form of Cranmer
2004, Am. J. Phys. 72, 1397). Assumed: a steady, spherically symmetric, inviscid wind of one
ideal gas at one temperature, driven by its own pressure against the point-mass gravity of the
planet alone (no stellar tide, radiation pressure or magnetic field), with constant mean
molecular mass. With ``c_s = sqrt(k T / m)``, ``r_s = G M / (2 c_s^2)``, ``u = v / c_s`` and
``x = r / r_s`` the critical (transonic) solution is ``u^2 - ln u^2 = 4 ln x + 4/x - 3``, in
closed form ``u^2 = -W(-x^-4 exp(3 - 4/x))`` with the branch ``W_0`` below the sonic point and
``W_-1`` above it.

Recombination-limited escape (Murray-Clay, Chiang & Murray 2009, ApJ 693, 23): at high
ionising flux, ionisations balance radiative recombinations at the wind base, so the rate grows
as ``F_xuv^(1/2)`` instead of the energy-limited ``F_xuv``. :func:`xuv_driven_mass_loss` takes
the smaller of the two.

XUV absorption radius: where the XUV optical depth of an isothermal exponential atmosphere is
one; pass it as ``xuv_radius`` to :func:`exosieve.energy_limited_mass_loss` or
:class:`exosieve.EnergyLimitedEscape`.

All functions broadcast like numpy ufuncs, return a float for scalar input and release the GIL
while they compute.
"""

from __future__ import annotations

from typing import Any

from numpy.typing import DTypeLike

from . import _core
from ._arrays import FloatOrArray, apply

__all__ = [
    "HYDROGEN_ATOM_MASS",
    "RECOMBINATION_TEMPERATURE",
    "RECOMBINATION_COEFFICIENT",
    "RECOMBINATION_PHOTON_ENERGY",
    "lambert_w",
    "isothermal_sound_speed",
    "sonic_radius",
    "parker_mach_number",
    "parker_wind_speed",
    "parker_density",
    "parker_mass_loss",
    "recombination_limited_mass_loss",
    "xuv_driven_mass_loss",
    "recombination_transition_flux",
    "scale_height",
    "xuv_absorption_radius",
]

#: Mass of the hydrogen atom 1H [kg] (AME2020: 1.00782503223 u).
HYDROGEN_ATOM_MASS: float = float(_core.HYDROGEN_ATOM_MASS)
#: Default wind temperature of recombination-limited escape [K] (~1e4 K, Murray-Clay et al.
#: 2009; common practice).
RECOMBINATION_TEMPERATURE: float = float(_core.RECOMBINATION_TEMPERATURE)
#: Default case B recombination coefficient of hydrogen at 1e4 K [m^3 s^-1]
#: (2.59e-13 cm^3 s^-1, Osterbrock & Ferland 2006; from memory, within 5 %).
RECOMBINATION_COEFFICIENT: float = float(_core.RECOMBINATION_COEFFICIENT)
#: Default mean ionising photon energy [J] (20 eV, Murray-Clay et al. 2009; from memory).
RECOMBINATION_PHOTON_ENERGY: float = float(_core.RECOMBINATION_PHOTON_ENERGY)


def lambert_w(
    x: Any, branch: int = 0, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Real branches of the Lambert W function: the solution ``w`` of ``w e^w = x`` [1].

    Parameters
    ----------
    x : float or array_like
        Argument [1]: ``x >= -1/e`` on the principal branch, ``-1/e <= x < 0`` on ``W_-1``.
    branch : int, optional
        0 (principal, ``w >= -1``) or -1 (lower, ``w <= -1``).

    Examples
    --------
    >>> f"{lambert_w(1.0):.12f}"  # the omega constant
    '0.567143290410'
    >>> f"{lambert_w(-0.5 * 0.6931471805599453, branch=-1):.12f}"  # -2 ln 2
    '-1.386294361120'
    """
    if isinstance(branch, bool) or not isinstance(branch, int) or branch not in (0, -1):
        raise ValueError(f"branch must be 0 or -1, got {branch!r}")
    return apply(_core.lambert_w, [("x", x, "1")], branch, out=out, dtype=dtype)


def isothermal_sound_speed(
    temperature: Any, mean_molecular_mass: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Isothermal sound speed ``sqrt(k T / m)`` [m s^-1].

    Parameters
    ----------
    temperature : float or array_like
        Gas temperature [K].
    mean_molecular_mass : float or array_like
        Mean mass per particle [kg] (``m_H / 2`` for fully ionised hydrogen).

    Examples
    --------
    >>> round(isothermal_sound_speed(1e4, HYDROGEN_ATOM_MASS / 2))
    12845
    """
    return apply(
        _core.isothermal_sound_speed,
        [("temperature", temperature, "K"), ("mean_molecular_mass", mean_molecular_mass, "kg")],
        out=out,
        dtype=dtype,
    )


def sonic_radius(
    temperature: Any,
    mean_molecular_mass: Any,
    planet_mass: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Sonic radius of the isothermal wind ``r_s = G M / (2 c_s^2)`` [m].

    Parameters
    ----------
    temperature : float or array_like
        Wind temperature [K].
    mean_molecular_mass : float or array_like
        Mean mass per particle [kg].
    planet_mass : float or array_like
        Planet mass [kg].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(sonic_radius(5000.0, 2.3 * c.AMU, 5 * c.M_EARTH) / c.R_EARTH, 2)
    8.64
    """
    return apply(
        _core.sonic_radius,
        [
            ("temperature", temperature, "K"),
            ("mean_molecular_mass", mean_molecular_mass, "kg"),
            ("planet_mass", planet_mass, "kg"),
        ],
        out=out,
        dtype=dtype,
    )


def parker_mach_number(
    radius_ratio: Any, *, out: Any = None, dtype: DTypeLike | None = None
) -> FloatOrArray:
    """Mach number ``u = v / c_s`` of the transonic isothermal wind at ``x = r / r_s`` [1].

    ``u^2 = -W_0(-D)`` for ``x <= 1`` and ``-W_-1(-D)`` for ``x > 1``,
    ``D = x^-4 exp(3 - 4/x)`` (Cranmer 2004).

    Parameters
    ----------
    radius_ratio : float or array_like
        ``r / r_s`` [1], > 0.

    Examples
    --------
    >>> parker_mach_number(1.0)
    1.0
    >>> round(parker_mach_number(10.0), 6)
    2.963643
    """
    return apply(
        _core.parker_mach_number, [("radius_ratio", radius_ratio, "1")], out=out, dtype=dtype
    )


def _wind_args(temperature: Any, mean_molecular_mass: Any, planet_mass: Any) -> list[Any]:
    return [
        ("temperature", temperature, "K"),
        ("mean_molecular_mass", mean_molecular_mass, "kg"),
        ("planet_mass", planet_mass, "kg"),
    ]


def parker_wind_speed(
    radius: Any,
    temperature: Any,
    mean_molecular_mass: Any,
    planet_mass: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Speed of the transonic isothermal wind [m s^-1] at ``radius``.

    Parameters
    ----------
    radius : float or array_like
        Distance from the planet's centre [m].
    temperature : float or array_like
        Wind temperature [K].
    mean_molecular_mass : float or array_like
        Mean mass per particle [kg].
    planet_mass : float or array_like
        Planet mass [kg].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> rs = sonic_radius(1e4, HYDROGEN_ATOM_MASS / 2, c.M_JUPITER)
    >>> round(parker_wind_speed(rs, 1e4, HYDROGEN_ATOM_MASS / 2, c.M_JUPITER))
    12845
    """
    return apply(
        _core.parker_wind_speed,
        [("radius", radius, "m"), *_wind_args(temperature, mean_molecular_mass, planet_mass)],
        out=out,
        dtype=dtype,
    )


def parker_density(
    radius: Any,
    base_radius: Any,
    base_density: Any,
    temperature: Any,
    mean_molecular_mass: Any,
    planet_mass: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Number density of the transonic wind [m^-3] at ``radius``, from ``n r^2 v`` constant.

    Parameters
    ----------
    radius : float or array_like
        Distance from the planet's centre [m].
    base_radius : float or array_like
        Radius of the wind base [m].
    base_density : float or array_like
        Number density at the base [m^-3].
    temperature, mean_molecular_mass, planet_mass : float or array_like
        Wind temperature [K], mean mass per particle [kg], planet mass [kg].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> n = parker_density(3e8, 1e8, 1e17, 1e4, HYDROGEN_ATOM_MASS / 2, c.M_JUPITER)
    >>> f"{n:.4e}"
    '4.5025e+14'
    """
    return apply(
        _core.parker_density,
        [
            ("radius", radius, "m"),
            ("base_radius", base_radius, "m"),
            ("base_density", base_density, "m-3"),
            *_wind_args(temperature, mean_molecular_mass, planet_mass),
        ],
        out=out,
        dtype=dtype,
    )


def parker_mass_loss(
    base_radius: Any,
    base_density: Any,
    temperature: Any,
    mean_molecular_mass: Any,
    planet_mass: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Mass-loss rate of the transonic isothermal wind ``4 pi r0^2 n0 m v(r0)`` [kg s^-1].

    A base at or above the sonic point (base Jeans parameter ``G M m / (k T r0) <= 2``) lies on
    the supersonic branch.

    Parameters
    ----------
    base_radius : float or array_like
        Radius of the wind base ``r0`` [m].
    base_density : float or array_like
        Number density at the base ``n0`` [m^-3].
    temperature : float or array_like
        Wind temperature [K].
    mean_molecular_mass : float or array_like
        Mean mass per particle ``m`` [kg].
    planet_mass : float or array_like
        Planet mass [kg].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> f"{parker_mass_loss(2 * c.R_EARTH, 1e17, 5000.0, 2.3 * c.AMU, 5 * c.M_EARTH):.4e}"
    '4.8980e+07'
    """
    return apply(
        _core.parker_mass_loss,
        [
            ("base_radius", base_radius, "m"),
            ("base_density", base_density, "m-3"),
            *_wind_args(temperature, mean_molecular_mass, planet_mass),
        ],
        out=out,
        dtype=dtype,
    )


def _recombination_args(
    temperature: Any, recombination_coefficient: Any, photon_energy: Any
) -> list[Any]:
    return [
        ("temperature", temperature, "K"),
        ("recombination_coefficient", recombination_coefficient, "m3 s-1"),
        ("photon_energy", photon_energy, "J"),
    ]


def recombination_limited_mass_loss(
    xuv_flux: Any,
    planet_mass: Any,
    planet_radius: Any,
    temperature: Any = RECOMBINATION_TEMPERATURE,
    recombination_coefficient: Any = RECOMBINATION_COEFFICIENT,
    photon_energy: Any = RECOMBINATION_PHOTON_ENERGY,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Recombination-limited mass-loss rate [kg s^-1] (Murray-Clay, Chiang & Murray 2009).

    ``4 pi r_s^2 c_s m_H n_+ exp[(G M_p / (R_p c_s^2)) (R_p / r_s - 1)]`` with the base ion
    density from ionisation–recombination balance in one scale height
    ``n_+ = sqrt(F / (h nu_0 alpha_B H))``, ``H = c_s^2 R_p^2 / (G M_p)``,
    ``c_s^2 = 2 k T / m_H`` (fully ionised hydrogen) and ``r_s = G M_p / (2 c_s^2)``. Grows as
    ``F^(1/2)``. With the sonic point below the base (``r_s <= R_p``) the base is taken as the
    sonic point.

    Parameters
    ----------
    xuv_flux : float or array_like
        Ionising (EUV) flux at the planet [W m^-2].
    planet_mass : float or array_like
        Planet mass [kg].
    planet_radius : float or array_like
        Radius of the wind base [m].
    temperature : float or array_like, optional
        Wind temperature [K]; default 1e4 K.
    recombination_coefficient : float or array_like, optional
        Case B recombination coefficient ``alpha_B`` [m^3 s^-1]; default 2.59e-19 (1e4 K).
    photon_energy : float or array_like, optional
        Mean ionising photon energy ``h nu_0`` [J]; default 20 eV.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> rate = recombination_limited_mass_loss(500.0, 0.7 * c.M_JUPITER, 1e8)
    >>> f"{rate * 1e3:.2e} g/s"
    '3.80e+12 g/s'
    """
    return apply(
        _core.recombination_limited_mass_loss,
        [
            ("xuv_flux", xuv_flux, "W m-2"),
            ("planet_mass", planet_mass, "kg"),
            ("planet_radius", planet_radius, "m"),
            *_recombination_args(temperature, recombination_coefficient, photon_energy),
        ],
        out=out,
        dtype=dtype,
    )


def xuv_driven_mass_loss(
    efficiency: Any,
    planet_radius: Any,
    xuv_radius: Any,
    xuv_flux: Any,
    planet_mass: Any,
    roche_factor: Any = 1.0,
    temperature: Any = RECOMBINATION_TEMPERATURE,
    recombination_coefficient: Any = RECOMBINATION_COEFFICIENT,
    photon_energy: Any = RECOMBINATION_PHOTON_ENERGY,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """XUV-driven mass-loss rate [kg s^-1]: the smaller of the energy-limited and the
    recombination-limited rates (Murray-Clay, Chiang & Murray 2009).

    ``~F`` at low flux, ``~F^(1/2)`` above :func:`recombination_transition_flux`. The switch is
    sharp (continuous in the rate, with a kink in its slope); Murray-Clay et al.'s simulations
    show a smooth hand-over, with local exponents ~0.9 below and ~0.6 above ~10 W m^-2.

    Parameters
    ----------
    efficiency : float or array_like
        Heating efficiency of the energy-limited rate [1], in (0, 1].
    planet_radius : float or array_like
        Planet radius [m]; also the base of the recombination-limited wind.
    xuv_radius : float or array_like
        Radius where the XUV is absorbed [m] (e.g. :func:`xuv_absorption_radius`).
    xuv_flux : float or array_like
        XUV flux at the planet [W m^-2].
    planet_mass : float or array_like
        Planet mass [kg].
    roche_factor : float or array_like, optional
        Roche-lobe factor ``K`` of the energy-limited rate [1], in (0, 1].
    temperature, recombination_coefficient, photon_energy : float or array_like, optional
        As in :func:`recombination_limited_mass_loss` [K], [m^3 s^-1], [J].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> low = xuv_driven_mass_loss(0.3, 1e8, 1e8, 0.45, 0.7 * c.M_JUPITER)
    >>> f"{low * 1e3:.2e} g/s"
    '4.78e+09 g/s'
    """
    return apply(
        _core.xuv_driven_mass_loss,
        [
            ("efficiency", efficiency, "1"),
            ("planet_radius", planet_radius, "m"),
            ("xuv_radius", xuv_radius, "m"),
            ("xuv_flux", xuv_flux, "W m-2"),
            ("planet_mass", planet_mass, "kg"),
            ("roche_factor", roche_factor, "1"),
            *_recombination_args(temperature, recombination_coefficient, photon_energy),
        ],
        out=out,
        dtype=dtype,
    )


def recombination_transition_flux(
    efficiency: Any,
    planet_radius: Any,
    xuv_radius: Any,
    planet_mass: Any,
    roche_factor: Any = 1.0,
    temperature: Any = RECOMBINATION_TEMPERATURE,
    recombination_coefficient: Any = RECOMBINATION_COEFFICIENT,
    photon_energy: Any = RECOMBINATION_PHOTON_ENERGY,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """XUV flux [W m^-2] at which the energy-limited and recombination-limited rates are equal.

    Arguments as in :func:`xuv_driven_mass_loss`, without the flux.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(recombination_transition_flux(1.0, 1e8, 1e8, 0.7 * c.M_JUPITER), 1)
    23.0
    """
    return apply(
        _core.recombination_transition_flux,
        [
            ("efficiency", efficiency, "1"),
            ("planet_radius", planet_radius, "m"),
            ("xuv_radius", xuv_radius, "m"),
            ("planet_mass", planet_mass, "kg"),
            ("roche_factor", roche_factor, "1"),
            *_recombination_args(temperature, recombination_coefficient, photon_energy),
        ],
        out=out,
        dtype=dtype,
    )


def scale_height(
    temperature: Any,
    mean_molecular_mass: Any,
    planet_mass: Any,
    radius: Any,
    *,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Pressure scale height ``k T r^2 / (m G M)`` [m] of an isothermal atmosphere.

    Parameters
    ----------
    temperature : float or array_like
        Temperature [K].
    mean_molecular_mass : float or array_like
        Mean mass per particle [kg].
    planet_mass : float or array_like
        Planet mass [kg].
    radius : float or array_like
        Distance from the planet's centre [m].

    Examples
    --------
    >>> from exosieve import constants as c
    >>> round(scale_height(288.0, 28.97 * c.AMU, c.M_EARTH, c.R_EARTH) / 1e3, 2)  # km
    8.44
    """
    return apply(
        _core.scale_height,
        [
            ("temperature", temperature, "K"),
            ("mean_molecular_mass", mean_molecular_mass, "kg"),
            ("planet_mass", planet_mass, "kg"),
            ("radius", radius, "m"),
        ],
        out=out,
        dtype=dtype,
    )


def xuv_absorption_radius(
    base_radius: Any,
    base_density: Any,
    scale_height: Any,
    cross_section: Any,
    *,
    chord: bool = False,
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Radius [m] where the XUV optical depth of an exponential atmosphere is one.

    The atmosphere is ``n(r) = n0 exp(-(r - r0)/H)`` (isothermal, constant scale height). The
    vertical optical depth ``tau(r) = sigma n0 H exp(-(r - r0)/H)`` is one at
    ``r = r0 + H ln(sigma n0 H)``. With ``chord=True`` the optical depth along a grazing ray of
    impact parameter ``b``, ``tau(b) sqrt(2 pi b / H)`` (the chord through a spherical shell,
    Fortney 2005, from memory), is set to one: ``b = -(H/2) W_-1(-2 exp(-2 c))``,
    ``c = ln(sigma n0 H sqrt(2 pi)) + r0/H``. An optically thin base gives ``r0``.

    Parameters
    ----------
    base_radius : float or array_like
        Reference radius ``r0`` [m].
    base_density : float or array_like
        Number density of the absorbers at ``r0`` [m^-3].
    scale_height : float or array_like
        Density scale height ``H`` [m] (:func:`scale_height`).
    cross_section : float or array_like
        XUV absorption cross-section ``sigma`` [m^2] (e.g. ~6e-22 m^2 for H at 13.6 eV).
    chord : bool, optional
        Use the grazing-ray (chord) optical depth instead of the vertical one.

    Examples
    --------
    >>> from exosieve import constants as c
    >>> r = xuv_absorption_radius(2 * c.R_EARTH, 1e19, 5e5, 6e-22)
    >>> round((r - 2 * c.R_EARTH) / 5e5, 4)  # scale heights above the base
    8.0064
    """
    if not isinstance(chord, bool):
        raise ValueError(f"chord must be True or False, got {chord!r}")
    return apply(
        _core.xuv_absorption_radius,
        [
            ("base_radius", base_radius, "m"),
            ("base_density", base_density, "m-3"),
            ("scale_height", scale_height, "m"),
            ("cross_section", cross_section, "m2"),
        ],
        chord,
        out=out,
        dtype=dtype,
    )
