#pragma once
//! \file stellar.hpp
//! The host star's X-ray + EUV (XUV) output over its life, and the flux it delivers to a planet.
//!
//! Saturated-then-decaying history (the shape of Ribas et al. 2005 and Jackson et al. 2012):
//!   L_xuv(t) = R_sat L_bol                        for t <= t_sat,
//!   L_xuv(t) = R_sat L_bol (t / t_sat)^(-beta)    for t >  t_sat,
//! with t the star's age. Flux at orbital distance a: F_xuv = L_xuv / (4 pi a^2).

#include <optional>

namespace exosieve {

//! Parameters of the saturated-then-decaying XUV history; defaults and their sources below.
struct XuvHistory {
    //! Saturated L_xuv / L_bol [1]. Default 1e-3.5 ~ 3.16e-4: the X-ray saturation level
    //! log(L_X/L_bol) ~ -3 to -3.5 of young Sun-like stars (Pizzolato et al. 2003; Jackson et
    //! al. 2012), from memory. The EUV adds to the X-rays, so the XUV level may be up to ~3 times
    //! higher: trust it to a factor ~3.
    double saturation_ratio = 3.1622776601683794e-4;
    //! End of saturation (star's age) [s]. Default 100 Myr (Jackson et al. 2012, Sun-like
    //! stars; from memory, within a factor ~2).
    double saturation_time = 3.15576e15;
    //! Power-law index beta of the decline after saturation [1]. Default 1.23: the fit to the
    //! 1–1180 Angstrom flux of solar analogues by Ribas et al. (2005, ApJ 622, 680), the value
    //! from memory; it reproduces that paper's abstract (the flux was ~2.5 times today's 2.5 Gyr
    //! ago and ~6 times 3.5 Gyr ago) to 7 % (tests/cpp/test_stellar.cpp).
    double decay_index = 1.23;

    //! Throw InputError unless every parameter is finite and > 0.
    void validate() const;
};

//! A host star: mass, bolometric luminosity and XUV history.
class Star {
  public:
    //! mass [kg] (> 0), bolometric luminosity [W] (> 0), XUV history.
    Star(double mass, double luminosity, XuvHistory xuv = {});

    //! Star mass [kg].
    double mass() const { return mass_; }
    //! Bolometric luminosity [W].
    double luminosity() const { return luminosity_; }
    //! XUV history parameters.
    const XuvHistory& xuv() const { return xuv_; }

    //! XUV luminosity [W] at stellar age t [s] (t > 0).
    double xuv_luminosity(double t) const;
    //! ln of the XUV luminosity [ln W] at stellar age t [s] (t > 0): one logarithm, no power.
    double log_xuv_luminosity(double t) const;
    //! The age [s] after saturation at which L_xuv equals `luminosity` [W] (the inverse of the
    //! decline; the saturation time when `luminosity` is at or above the saturated value).
    double age_at_xuv_luminosity(double luminosity) const;

  private:
    double mass_;
    double luminosity_;
    XuvHistory xuv_;
    double log_saturated_;       // ln(R_sat L_bol) [ln W]
    double log_saturation_time_; // ln t_sat [ln s]
};

//! A planet: mass, radius and, for anything driven by its star, the orbit and the star.
class Planet {
  public:
    //! mass [kg] (> 0), radius [m] (> 0); no star.
    Planet(double mass, double radius);
    //! mass [kg], radius [m], semi-major axis [m] (> 0) and host star.
    Planet(double mass, double radius, double semi_major_axis, Star star);

    //! Planet mass [kg].
    double mass() const { return mass_; }
    //! Planet radius [m].
    double radius() const { return radius_; }
    //! True when an orbit and a host star are set.
    bool has_star() const { return star_.has_value(); }
    //! Semi-major axis [m]; InputError when no star is set.
    double semi_major_axis() const;
    //! The host star; InputError when none is set.
    const Star& star() const;

    //! XUV flux at the planet [W m^-2] at stellar age t [s]; InputError when no star is set.
    double xuv_flux(double t) const;
    //! ln of the XUV flux [ln(W m^-2)] at stellar age t [s]; InputError when no star is set.
    double log_xuv_flux(double t) const;
    //! Surface gravity G M / R^2 [m s^-2].
    double surface_gravity() const;

  private:
    double mass_;
    double radius_;
    double semi_major_axis_ = 0.0;
    double log_sphere_area_ = 0.0; // ln(4 pi a^2) [ln m^2]
    std::optional<Star> star_;
};

//! XUV flux [W m^-2] of luminosity `xuv_luminosity` [W] at distance `distance` [m].
double xuv_flux(double xuv_luminosity, double distance);

} // namespace exosieve
