#pragma once
//! \file jeans.hpp
//! Jeans (thermal) escape from an exobase (Jeans 1925; Chamberlain 1963).
//!
//! lambda = G M m / (k T r) = (v_esc / v0)^2,
//! Phi_J  = n v0 / (2 sqrt(pi)) (1 + lambda) exp(-lambda)        [m^-2 s^-1],
//! E_J    = Phi_J k T (lambda^2 + 2 lambda + 2) / (lambda + 1)   [W m^-2],
//! Q_J    = 4 pi r^2 Phi_J                                       [s^-1].
//! Every flux is multiplied by an optional tail-depletion factor (default 1).

#include <vector>

#include "exosieve/arrays.hpp"

namespace exosieve {

//! Multiplier on the Jeans flux for a Maxwellian tail depleted by escape.
//! Either a constant or a table against the Jeans parameter (linear, held at the ends).
//! A depletion is a factor <= 1; a factor above 1 (an enhancement over the Jeans rate) is
//! refused unless `enhancement` is true.
class TailDepletion {
  public:
    //! No depletion: factor 1.
    TailDepletion() = default;
    //! Constant factor (finite, > 0; <= 1 unless `enhancement`).
    explicit TailDepletion(double factor, bool enhancement = false);
    //! Table of factors (finite, > 0; <= 1 unless `enhancement`) against strictly increasing
    //! Jeans parameters.
    TailDepletion(std::vector<double> jeans_parameter, std::vector<double> factor,
                  bool enhancement = false);

    //! Factor at Jeans parameter `lambda` [1].
    double operator()(double lambda) const;
    //! True when the factor is 1 everywhere.
    bool is_identity() const { return lambdas_.empty() && constant_ == 1.0; }

    const std::vector<double>& table_jeans_parameter() const { return lambdas_; }
    const std::vector<double>& table_factor() const { return factors_; }
    double constant() const { return constant_; }
    //! True when factors above 1 were allowed.
    bool enhancement() const { return enhancement_; }

  private:
    double constant_ = 1.0;
    bool enhancement_ = false;
    std::vector<double> lambdas_;
    std::vector<double> factors_;
};

//! Escape speed sqrt(2 G M / r) [m s^-1]; planet_mass [kg], radius [m].
double escape_speed(double planet_mass, double radius);
//! Jeans parameter lambda = G M m / (k T r) [1].
double jeans_parameter(double temperature, double mass, double planet_mass, double radius);
//! Jeans escape flux [m^-2 s^-1] for number density `density` [m^-3] at the exobase.
double jeans_flux(double density, double temperature, double mass, double planet_mass,
                  double radius, const TailDepletion& tail = {});
//! Natural log of jeans_flux (ln of m^-2 s^-1); finite where the flux underflows (n > 0).
double log_jeans_flux(double density, double temperature, double mass, double planet_mass,
                      double radius, const TailDepletion& tail = {});
//! Kinetic-energy flux carried by escaping particles [W m^-2].
double jeans_energy_flux(double density, double temperature, double mass, double planet_mass,
                         double radius, const TailDepletion& tail = {});
//! Global escape rate 4 pi r^2 Phi_J [s^-1].
double jeans_escape_rate(double density, double temperature, double mass, double planet_mass,
                         double radius, const TailDepletion& tail = {});
//! Natural log of jeans_escape_rate (ln of s^-1).
double log_jeans_escape_rate(double density, double temperature, double mass, double planet_mass,
                             double radius, const TailDepletion& tail = {});
//! Effusion velocity Phi_J / n [m s^-1].
double jeans_effusion_velocity(double temperature, double mass, double planet_mass, double radius,
                               const TailDepletion& tail = {});

//! Jeans flux from an already validated Jeans parameter and most probable speed (no checks):
//! the inner kernel for models that loop over many evaluations.
double jeans_flux_unchecked(double density, double v0, double lambda, const TailDepletion& tail);
//! Natural log of the Jeans flux (ln of m^-2 s^-1) from ln n [ln m^-3], ln v0 [ln m s^-1] and
//! lambda (no checks): finite wherever the flux itself underflows.
double log_jeans_flux_unchecked(double log_density, double log_v0, double lambda,
                                const TailDepletion& tail);

//! Array forms: each argument has length 1 or `count`; results go to `out` (length `count`).
void escape_speed(ArrayArg planet_mass, ArrayArg radius, double* out, std::size_t count);
void jeans_parameter(ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass, ArrayArg radius,
                     double* out, std::size_t count);
void jeans_flux(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                ArrayArg radius, double* out, std::size_t count, const TailDepletion& tail = {});
void log_jeans_flux(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                    ArrayArg radius, double* out, std::size_t count,
                    const TailDepletion& tail = {});
void jeans_energy_flux(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                       ArrayArg radius, double* out, std::size_t count,
                       const TailDepletion& tail = {});
void jeans_escape_rate(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                       ArrayArg radius, double* out, std::size_t count,
                       const TailDepletion& tail = {});
void log_jeans_escape_rate(ArrayArg density, ArrayArg temperature, ArrayArg mass,
                           ArrayArg planet_mass, ArrayArg radius, double* out, std::size_t count,
                           const TailDepletion& tail = {});

} // namespace exosieve
