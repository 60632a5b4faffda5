#pragma once
//! \file ocean.hpp
//! Water as a global ocean: the depth d of a global equivalent layer (GEL), liquid water spread
//! evenly over a planet's whole surface, and the number of water molecules or hydrogen atoms it
//! holds,
//!   N_H2O = rho 4 pi R^2 d / m_H2O,   N_H = 2 N_H2O,
//! with R the planet radius [m], rho the density of liquid water [kg m^-3] and m_H2O the mass of
//! a water molecule (the species table's H2O: IUPAC 2021 standard atomic weights, 18.015 u).
//! Hydrogen atoms are counted whatever their isotope (D is hydrogen). The layer's volume is its
//! area times its depth, as the GEL is defined; the spherical shell would hold a relative
//! d/R + (d/R)^2/3 more (4e-4 for 2.7 km on Earth).

#include <cstddef>

#include "exosieve/arrays.hpp"

namespace exosieve {

//! Density of liquid water when none is given [kg m^-3]: 1000 (common practice; pure water is
//! about 999.97 at 4 degrees C and 997.05 at 25 degrees C, from memory).
inline constexpr double default_water_density = 1000.0;

//! Mass of one water molecule [kg]: the H2O of the species registry.
double water_molecule_mass();

//! Water molecules [1] in a global ocean of depth [m] (>= 0) on a planet of radius [m] (> 0),
//! water density [kg m^-3] (> 0).
void ocean_depth_to_water(ArrayArg depth, ArrayArg radius, ArrayArg density, double* out,
                          std::size_t count);

//! Depth of a global ocean [m] holding `molecules` water molecules [1] (>= 0) on a planet of
//! radius [m] (> 0), water density [kg m^-3] (> 0).
void water_to_ocean_depth(ArrayArg molecules, ArrayArg radius, ArrayArg density, double* out,
                          std::size_t count);

//! Hydrogen atoms [1] (two per water molecule) in a global ocean of depth [m] (>= 0) on a planet
//! of radius [m] (> 0), water density [kg m^-3] (> 0).
void ocean_depth_to_hydrogen(ArrayArg depth, ArrayArg radius, ArrayArg density, double* out,
                             std::size_t count);

//! Depth of a global ocean [m] whose water holds `atoms` hydrogen atoms [1] (>= 0) on a planet
//! of radius [m] (> 0), water density [kg m^-3] (> 0).
void hydrogen_to_ocean_depth(ArrayArg atoms, ArrayArg radius, ArrayArg density, double* out,
                             std::size_t count);

} // namespace exosieve
