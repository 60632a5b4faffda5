"""Physical constants (CODATA 2018) and nominal values (IAU 2015 Resolution B3) [SI].

The numbers live once, in the C++ core; this module re-exports them.

Examples
--------
>>> from exosieve import constants
>>> constants.K_B
1.380649e-23
"""

from ._core import constants as _c

G: float = _c.G  #: Newtonian constant of gravitation [m^3 kg^-1 s^-2] (CODATA 2018)
K_B: float = _c.K_B  #: Boltzmann constant [J K^-1] (exact)
AMU: float = _c.AMU  #: atomic mass constant [kg] (CODATA 2018)
N_A: float = _c.N_A  #: Avogadro constant [mol^-1] (exact)
AU: float = _c.AU  #: astronomical unit [m] (IAU 2012 B2, exact)
YEAR: float = _c.YEAR  #: Julian year [s]
MYR: float = _c.MYR  #: 1e6 Julian years [s]
GYR: float = _c.GYR  #: 1e9 Julian years [s]
GM_EARTH: float = _c.GM_EARTH  #: nominal terrestrial mass parameter [m^3 s^-2] (IAU 2015 B3)
M_EARTH: float = _c.M_EARTH  #: Earth mass GM_EARTH / G [kg]
R_EARTH: float = _c.R_EARTH  #: nominal terrestrial equatorial radius [m] (IAU 2015 B3)
R_EARTH_POLAR: float = _c.R_EARTH_POLAR  #: nominal terrestrial polar radius [m]
GM_JUPITER: float = _c.GM_JUPITER  #: nominal jovian mass parameter [m^3 s^-2]
M_JUPITER: float = _c.M_JUPITER  #: Jupiter mass GM_JUPITER / G [kg]
R_JUPITER: float = _c.R_JUPITER  #: nominal jovian equatorial radius [m]
R_JUPITER_POLAR: float = _c.R_JUPITER_POLAR  #: nominal jovian polar radius [m]
GM_SUN: float = _c.GM_SUN  #: nominal solar mass parameter [m^3 s^-2]
M_SUN: float = _c.M_SUN  #: solar mass GM_SUN / G [kg]
R_SUN: float = _c.R_SUN  #: nominal solar radius [m]
L_SUN: float = _c.L_SUN  #: nominal solar luminosity [W]

__all__ = [
    "G",
    "K_B",
    "AMU",
    "N_A",
    "AU",
    "YEAR",
    "MYR",
    "GYR",
    "GM_EARTH",
    "M_EARTH",
    "R_EARTH",
    "R_EARTH_POLAR",
    "GM_JUPITER",
    "M_JUPITER",
    "R_JUPITER",
    "R_JUPITER_POLAR",
    "GM_SUN",
    "M_SUN",
    "R_SUN",
    "L_SUN",
]
