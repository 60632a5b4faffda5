"""The host star and its XUV (X-ray + EUV) history, and the planet that receives it [SI units].

Thin descriptions for :func:`exosieve.evolve` and the envelope models; the numbers are checked
and used by the C++ core (``stellar.hpp``). Arguments accept astropy quantities where astropy
is installed.
"""

from __future__ import annotations

from typing import Any

from . import _core
from ._arrays import FloatOrArray, _map, _scalar

__all__ = ["Star", "Planet"]

_DEFAULT_XUV = _core.XuvHistory()


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
