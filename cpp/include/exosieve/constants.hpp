#pragma once
//! \file constants.hpp
//! Physical constants (CODATA 2018) and astronomical nominal values (IAU 2015 B3), SI units.

namespace exosieve::constants {

//! Pi.
inline constexpr double pi = 3.141592653589793238462643383279502884;

// CODATA 2018 recommended values (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
//! Newtonian constant of gravitation [m^3 kg^-1 s^-2].
inline constexpr double G = 6.67430e-11;
//! Boltzmann constant [J K^-1] (exact).
inline constexpr double k_B = 1.380649e-23;
//! Atomic mass constant m_u = 1 u [kg].
inline constexpr double amu = 1.66053906660e-27;
//! Avogadro constant [mol^-1] (exact).
inline constexpr double N_A = 6.02214076e23;

// IAU 2015 Resolution B3 nominal values.
//! Nominal terrestrial mass parameter (GM)_E [m^3 s^-2].
inline constexpr double GM_earth = 3.986004e14;
//! Nominal terrestrial equatorial radius [m].
inline constexpr double R_earth = 6.3781e6;
//! Nominal terrestrial polar radius [m].
inline constexpr double R_earth_polar = 6.3568e6;
//! Nominal jovian mass parameter (GM)_J [m^3 s^-2].
inline constexpr double GM_jupiter = 1.2668653e17;
//! Nominal jovian equatorial radius [m].
inline constexpr double R_jupiter = 7.1492e7;
//! Nominal jovian polar radius [m].
inline constexpr double R_jupiter_polar = 6.6854e7;
//! Nominal solar mass parameter (GM)_sun [m^3 s^-2].
inline constexpr double GM_sun = 1.3271244e20;
//! Nominal solar radius [m].
inline constexpr double R_sun = 6.957e8;
//! Nominal solar luminosity [W].
inline constexpr double L_sun = 3.828e26;

//! Earth mass (GM)_E / G [kg].
inline constexpr double M_earth = GM_earth / G;
//! Jupiter mass (GM)_J / G [kg].
inline constexpr double M_jupiter = GM_jupiter / G;
//! Solar mass (GM)_sun / G [kg].
inline constexpr double M_sun = GM_sun / G;

//! Astronomical unit (IAU 2012 Resolution B2) [m] (exact).
inline constexpr double au = 149597870700.0;
//! Julian year [s] (exact: 365.25 d of 86400 s).
inline constexpr double year = 365.25 * 86400.0;
//! One million Julian years [s].
inline constexpr double Myr = 1e6 * year;
//! One billion Julian years [s].
inline constexpr double Gyr = 1e9 * year;

} // namespace exosieve::constants
