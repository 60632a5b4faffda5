#pragma once
//! \file envelope.hpp
//! H/He envelopes of sub-Neptunes: the radius as a function of envelope mass fraction (Lopez &
//! Fortney 2014), and the loss of the envelope under energy-limited escape with the radius
//! following the envelope, to the time the envelope is gone. SI units throughout.
//!
//! Mass–radius–envelope relation (Lopez & Fortney 2014, ApJ 792, 1, their analytic fit to
//! thermal-evolution models of rock/iron cores with solar-composition H/He envelopes, valid for
//! 1–20 Earth masses, envelope fractions 0.01–20 %, incident fluxes 0.1–1000 times Earth's and
//! ages 100 Myr–10 Gyr, the ranges stated in the paper's abstract):
//!   R_env = 2.06 R_E (M_p/M_E)^-0.21 (f_env/0.05)^0.59 (F_p/F_E)^0.044 (age/5 Gyr)^-0.11,
//! age exponent -0.18 for enhanced-opacity envelopes; R_p = R_core + R_env, the thin radiative
//! atmosphere above the envelope left out. Coefficients from memory (the paper's text was not
//! at hand): trust R_env to ~10 %. Core radius R_core = R_E (M_core/M_E)^0.25 for an Earth-like
//! rock/iron composition (the scaling Lopez & Fortney 2014 use, after Fortney et al. 2007; from
//! memory). F_E is the IAU 2015 B3 nominal total solar irradiance, 1361 W m^-2.
//!
//! Envelope loss: dM_env/dt = -eta pi R_p^3 F_xuv(t) / (G M_p K) (energy-limited with the XUV
//! absorbed at the evolving planet radius times a fixed factor), M_p = M_core + M_env,
//! f_env = M_env / M_p, the star's XUV history (stellar.hpp), the bolometric flux at the orbit
//! for F_p. Integrated with Boost.Odeint (dense-output Dormand–Prince 5(4)); an event finds the
//! time the envelope mass reaches zero.

#include <vector>

namespace exosieve {

class Star;

//! IAU 2015 Resolution B3 nominal total solar irradiance [W m^-2]: Earth's incident flux F_E.
inline constexpr double solar_irradiance = 1361.0;

//! Envelope opacity of the Lopez & Fortney (2014) fit: sets the age exponent.
enum class EnvelopeOpacity : int {
    Solar = 0,    //!< solar metallicity: age exponent -0.11
    Enhanced = 1, //!< enhanced opacity: age exponent -0.18
};

//! Core radius R_E (M_core / M_E)^0.25 [m] of an Earth-like rock/iron core; core_mass [kg].
double core_radius(double core_mass);

//! Envelope thickness of the Lopez & Fortney (2014) fit [m]; envelope_fraction f_env =
//! M_env / M_p in [0, 1) [1], planet_mass M_p [kg], incident (bolometric) flux [W m^-2],
//! age [s].
double envelope_radius(double envelope_fraction, double planet_mass, double incident_flux,
                       double age, EnvelopeOpacity opacity = EnvelopeOpacity::Solar);

//! Planet radius R_core + R_env [m] of a core of `core_mass` [kg] with an envelope that is
//! `envelope_fraction` [1] of the planet's mass; incident_flux [W m^-2], age [s].
double envelope_planet_radius(double core_mass, double envelope_fraction, double incident_flux,
                              double age, EnvelopeOpacity opacity = EnvelopeOpacity::Solar);

//! Options of the envelope-loss integration.
struct EnvelopeLossOptions {
    double efficiency = 0.15;       //!< heating efficiency eta [1] in (0, 1] (common practice)
    double xuv_radius_factor = 1.0; //!< R_xuv / R_p [1] (>= 1)
    bool roche_lobe = false;        //!< apply the Roche-lobe factor K of the evolving radius
    EnvelopeOpacity opacity = EnvelopeOpacity::Solar; //!< opacity of the radius fit
    double rtol = 1e-10;          //!< relative tolerance of the envelope mass [1]
    double atol_fraction = 1e-12; //!< absolute tolerance as a fraction of the core mass [1]

    //! Throw InputError for a parameter out of range.
    void validate() const;
};

//! Result of an envelope-loss integration.
struct EnvelopeLossResult {
    std::vector<double> times;          //!< requested output times (stellar age) [s]
    std::vector<double> envelope_mass;  //!< envelope mass at each time [kg]
    std::vector<double> radius;         //!< planet radius at each time [m]
    std::vector<double> mass_loss_rate; //!< envelope mass-loss rate at each time [kg s^-1]
    bool stripped = false;              //!< true when the envelope is gone by the last time
    double stripping_time = 0.0;        //!< stellar age when it is gone [s] (NaN if never)
    long steps = 0;                     //!< accepted steps
};

//! Integrate the loss of an H/He envelope from stellar age `times[0]` to `times.back()` [s]
//! (ascending, > 0): a core of `core_mass` [kg] with `envelope_fraction` [1] of the planet's
//! mass in its envelope at `times[0]`, at `semi_major_axis` [m] from `star`.
EnvelopeLossResult integrate_envelope_loss(double core_mass, double envelope_fraction,
                                           double semi_major_axis, const Star& star,
                                           const std::vector<double>& times,
                                           const EnvelopeLossOptions& options = {});

} // namespace exosieve
