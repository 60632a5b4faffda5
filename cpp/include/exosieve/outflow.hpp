#pragma once
//! \file outflow.hpp
//! Beyond the energy limit: the isothermal transonic (Parker) wind, recombination-limited escape
//! at high XUV flux and the radius where the XUV is absorbed. SI units throughout.
//!
//! Isothermal transonic wind (Parker 1958, ApJ 128, 664; closed form of Cranmer 2004, Am. J.
//! Phys. 72, 1397). Assumptions: a steady, spherically symmetric, inviscid flow of one ideal gas
//! at one temperature T everywhere (isothermal: heating exactly balances adiabatic cooling),
//! driven by its pressure against the point-mass gravity of the planet alone (no stellar tide,
//! no radiation pressure, no magnetic field), with constant mean molecular mass. With the
//! isothermal sound speed c_s = sqrt(k T / m), the sonic radius r_s = G M / (2 c_s^2), the Mach
//! number u = v / c_s and x = r / r_s, mass and momentum conservation integrate to
//!   u^2 - ln u^2 = 4 ln x + 4 / x - 3,
//! the constant fixed by the transonic (critical) solution through u = 1 at x = 1. Its closed
//! form is u^2 = -W(-D(x)), D(x) = x^-4 exp(3 - 4/x), with the principal branch W_0 below the
//! sonic point (subsonic, accelerating) and the branch W_-1 above it (supersonic).
//! The mass-loss rate is 4 pi r0^2 n0 m v(r0) from a base number density n0 at radius r0.
//!
//! Recombination-limited escape (Murray-Clay, Chiang & Murray 2009, ApJ 693, 23, section 5):
//! at high ionising flux the absorbed energy goes into ionisations balanced by radiative
//! recombinations in a layer of one scale height H at the wind base, so the base ion density is
//! n_+ = sqrt(F_xuv / (h nu_0 alpha_B H)), H = c_s^2 R_p^2 / (G M_p), c_s^2 = 2 k T / m_H (fully
//! ionised hydrogen), and the wind carries
//!   dM/dt = 4 pi r_s^2 c_s m_H n_+ exp[(G M_p / (R_p c_s^2)) (R_p / r_s - 1)],
//! the density at the sonic point being that of an isothermal hydrostatic layer. It scales as
//! F_xuv^(1/2), against F_xuv for the energy-limited rate; the smaller of the two applies.
//!
//! XUV absorption radius: the radius where the XUV optical depth is one in an isothermal,
//! exponential atmosphere n(r) = n0 exp(-(r - r0)/H) with an absorption cross-section sigma.

namespace exosieve {

//! Mass of the hydrogen atom 1H [kg]: 1.00782503223 u (AME2020, Wang et al. 2021).
inline constexpr double hydrogen_atom_mass = 1.00782503223 * 1.66053906660e-27;
//! Electronvolt [J] (exact in the 2019 SI).
inline constexpr double electron_volt = 1.602176634e-19;

//! Defaults of recombination-limited escape (Murray-Clay, Chiang & Murray 2009).
struct RecombinationDefaults {
    //! Wind temperature [K]: ~1e4 K, where photoionisation heating and Lyman-alpha cooling
    //! balance (Murray-Clay et al. 2009; common practice).
    static constexpr double temperature = 1e4;
    //! Case B recombination coefficient of hydrogen at 1e4 K [m^3 s^-1]: 2.59e-13 cm^3 s^-1
    //! (Osterbrock & Ferland 2006, Table 2.1; from memory, within 5 %).
    static constexpr double recombination_coefficient = 2.59e-19;
    //! Mean energy of the ionising photons [J]: 20 eV, the value of Murray-Clay et al. (2009)
    //! (from memory).
    static constexpr double photon_energy = 20.0 * electron_volt;
};

//! Principal branch W_0(x) of the Lambert W function, x >= -1/e [1]: the solution w >= -1 of
//! w e^w = x. Halley iteration (Corless et al. 1996, Adv. Comput. Math. 5, 329), the branch-point
//! series near x = -1/e.
double lambert_w0(double x);

//! Lower real branch W_-1(x) of the Lambert W function, -1/e <= x < 0 [1]: the solution
//! w <= -1 of w e^w = x.
double lambert_wm1(double x);

//! W_k(x) for branch k = 0 or k = -1 [1].
double lambert_w(double x, int branch);

//! W_-1(-exp(L)) for L <= -1 [1], without forming exp(L): stays accurate where exp(L)
//! underflows (solves w + ln(-w) = L).
double lambert_wm1_exp(double log_minus_x);

//! Isothermal sound speed c_s = sqrt(k T / m) [m s^-1]; temperature [K], mean_molecular_mass
//! [kg].
double isothermal_sound_speed(double temperature, double mean_molecular_mass);

//! Sonic radius of the isothermal wind r_s = G M / (2 c_s^2) [m]; temperature [K],
//! mean_molecular_mass [kg], planet_mass [kg].
double sonic_radius(double temperature, double mean_molecular_mass, double planet_mass);

//! Mach number u = v / c_s of the transonic isothermal wind at x = r / r_s [1]
//! (Cranmer 2004): sqrt(-W_0(-D)) for x <= 1, sqrt(-W_-1(-D)) for x > 1, D = x^-4 exp(3 - 4/x).
double parker_mach_number(double radius_ratio);

//! Speed of the transonic isothermal wind [m s^-1] at `radius` [m]; temperature [K],
//! mean_molecular_mass [kg], planet_mass [kg].
double parker_wind_speed(double radius, double temperature, double mean_molecular_mass,
                         double planet_mass);

//! Number density of the transonic wind [m^-3] at `radius` [m] given `base_density` [m^-3] at
//! `base_radius` [m] (mass conservation: n r^2 v constant); temperature [K],
//! mean_molecular_mass [kg], planet_mass [kg].
double parker_density(double radius, double base_radius, double base_density, double temperature,
                      double mean_molecular_mass, double planet_mass);

//! Mass-loss rate of the transonic isothermal wind 4 pi r0^2 n0 m v(r0) [kg s^-1];
//! base_radius r0 [m], base_density n0 [m^-3], temperature [K], mean_molecular_mass m [kg],
//! planet_mass [kg]. A base at or above the sonic point (base Jeans parameter
//! G M m / (k T r0) <= 2) lies on the supersonic branch.
double parker_mass_loss(double base_radius, double base_density, double temperature,
                        double mean_molecular_mass, double planet_mass);

//! Recombination-limited mass-loss rate [kg s^-1] (Murray-Clay, Chiang & Murray 2009):
//! 4 pi r_s^2 c_s m_H n_+ exp[(G M_p/(R_p c_s^2)) (R_p/r_s - 1)], n_+ = sqrt(F/(h nu_0 alpha_B
//! H)). xuv_flux [W m^-2] (ionising), planet_mass [kg], planet_radius [m] (the wind base),
//! temperature [K], recombination_coefficient alpha_B [m^3 s^-1], photon_energy h nu_0 [J].
//! When the sonic point lies below the base (r_s <= R_p) the base is taken as the sonic point:
//! 4 pi R_p^2 c_s m_H n_+ (continuous at r_s = R_p).
double recombination_limited_mass_loss(
    double xuv_flux, double planet_mass, double planet_radius,
    double temperature = RecombinationDefaults::temperature,
    double recombination_coefficient = RecombinationDefaults::recombination_coefficient,
    double photon_energy = RecombinationDefaults::photon_energy);

//! XUV-driven mass-loss rate [kg s^-1]: the smaller of the energy-limited rate
//! (energy_limited_mass_loss, hydrodynamic.hpp) and the recombination-limited rate, so
//! ~F_xuv at low flux and ~F_xuv^(1/2) at high flux (Murray-Clay et al. 2009). Arguments as
//! there; the recombination-limited rate uses planet_radius as its base.
double xuv_driven_mass_loss(
    double efficiency, double planet_radius, double xuv_radius, double xuv_flux, double planet_mass,
    double roche_factor = 1.0, double temperature = RecombinationDefaults::temperature,
    double recombination_coefficient = RecombinationDefaults::recombination_coefficient,
    double photon_energy = RecombinationDefaults::photon_energy);

//! XUV flux [W m^-2] at which the energy-limited and recombination-limited rates are equal:
//! the energy-limited rate is a F, the recombination-limited one b F^(1/2), so F = (b/a)^2.
//! Arguments as in xuv_driven_mass_loss, without the flux.
double recombination_transition_flux(
    double efficiency, double planet_radius, double xuv_radius, double planet_mass,
    double roche_factor = 1.0, double temperature = RecombinationDefaults::temperature,
    double recombination_coefficient = RecombinationDefaults::recombination_coefficient,
    double photon_energy = RecombinationDefaults::photon_energy);

//! Pressure scale height k T r^2 / (m G M) [m] of an isothermal atmosphere at `radius` [m];
//! temperature [K], mean_molecular_mass [kg], planet_mass [kg].
double scale_height(double temperature, double mean_molecular_mass, double planet_mass,
                    double radius);

//! Radius [m] where the XUV optical depth of an exponential atmosphere
//! n(r) = n0 exp(-(r - r0)/H) is one. Vertical (plane-parallel) optical depth:
//!   tau(r) = sigma n0 H exp(-(r - r0)/H) = 1  ->  r = r0 + H ln(sigma n0 H).
//! With `chord` the optical depth along a grazing ray of impact parameter b,
//! tau_c(b) = tau(b) sqrt(2 pi b / H) (the chord through a spherical shell: Fortney 2005, MNRAS
//! 364, 649, from memory), is set to one: b = -(H/2) W_-1(-2 exp(-2 c)),
//! c = ln(sigma n0 H sqrt(2 pi)) + r0/H. Where the base is already optically thin (tau <= 1 at
//! r0) the result is r0. base_radius r0 [m], base_density n0 [m^-3], scale_height H [m],
//! cross_section sigma [m^2].
double xuv_absorption_radius(double base_radius, double base_density, double scale_height,
                             double cross_section, bool chord = false);

} // namespace exosieve
