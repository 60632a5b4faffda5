#pragma once
//! \file diffusion.hpp
//! Molecular diffusion through a background gas: binary diffusion parameters, the
//! diffusion-limited flux and the flux coupled to Jeans escape at the exobase.
//!
//! Binary diffusion parameter b = n D [m^-1 s^-1], Chapman–Enskog first approximation with a
//! Lennard-Jones potential (Hirschfelder, Curtiss & Bird 1954):
//!   b = 3 / (16 sigma_12^2 Omega_D(T*)) sqrt(2 k T / (pi mu)),
//!   sigma_12 = (sigma_1 + sigma_2) / 2, eps_12 = sqrt(eps_1 eps_2), T* = T / eps_12,
//! with Omega_D from the fit of Neufeld, Janzen & Aziz (1972). Measured fits b = A T^s
//! (data/diffusion_pairs.csv) override it where a pair is tabulated.
//! In a mixture, Blanc's law: 1 / b_i = sum_j y_j / b_ij over the background mole fractions y_j.
//!
//! Diffusion-limited flux (Hunten 1973): Phi_DL = b x_i (1/H_a - 1/H_i), H = k T / (m g).
//! Coupled flux through an isothermal, plane-parallel layer of thickness z_e with Jeans
//! effusion at its top (constant-flux solution of the diffusion equation):
//!   Phi = Phi_J,eq / (1 + (Phi_J,eq / Phi_DL) (1 - exp(-beta z_e))),  beta = 1/H_a - 1/H_i.

#include <map>
#include <string>
#include <utility>
#include <vector>

#include "exosieve/arrays.hpp"
#include "exosieve/species.hpp"

namespace exosieve {

//! Neufeld et al. (1972) fit to the Lennard-Jones diffusion collision integral Omega_D [1]
//! at reduced temperature T* = k T / eps (fit range 0.3 <= T* <= 100, about 0.1 % error).
double neufeld_collision_integral(double reduced_temperature);

//! Which estimate of a binary diffusion parameter to use.
enum class DiffusionMethod {
    measured_first, //!< the measured A T^s fit where the pair is tabulated, else Chapman–Enskog
    chapman_enskog  //!< always the Chapman–Enskog first approximation
};

//! The method's name in arguments, case tables and files: "measured" or "chapman_enskog".
const char* diffusion_method_name(DiffusionMethod method);

//! The method called `name`; InputError naming `argument` and the value for any other name.
DiffusionMethod diffusion_method_named(const std::string& name, const std::string& argument);

//! A measured fit b = A T^s for one unordered species pair.
struct DiffusionPair {
    std::string species_a;  //!< first species name
    std::string species_b;  //!< second species name
    double coefficient = 0; //!< A [m^-1 s^-1 K^-s]
    double exponent = 0;    //!< s [1]
    std::string source;     //!< where the fit comes from

    //! b at `temperature` [K] in m^-1 s^-1.
    double operator()(double temperature) const;
};

//! Unordered pair -> measured fit; loaded from data/diffusion_pairs.csv.
class DiffusionPairTable {
  public:
    //! Parse CSV text with columns species_a, species_b, A_per_m_per_s, s, source.
    static DiffusionPairTable from_csv(const std::string& csv_text, const std::string& origin);
    //! The fit for the pair (a, b) in either order, or nullptr.
    const DiffusionPair* find(const std::string& a, const std::string& b) const;
    //! Add or replace a fit (A > 0 finite, s finite, two different names).
    void add(const DiffusionPair& pair);
    //! All fits, sorted by pair.
    std::vector<DiffusionPair> pairs() const;

  private:
    std::map<std::pair<std::string, std::string>, DiffusionPair> by_pair_;
};

//! The process-wide table, built from the copy of data/diffusion_pairs.csv in the library.
DiffusionPairTable& default_diffusion_pairs();

//! The text of data/diffusion_pairs.csv as compiled into the library.
const char* diffusion_pairs_csv();

//! Chapman–Enskog first-approximation b = n D [m^-1 s^-1] of the pair at `temperature` [K].
double chapman_enskog_diffusion_parameter(const Species& a, const Species& b, double temperature);

//! Binary diffusion parameter b = n D [m^-1 s^-1] of the pair at `temperature` [K].
double binary_diffusion_parameter(const Species& a, const Species& b, double temperature,
                                  DiffusionMethod method = DiffusionMethod::measured_first);

//! Throw InputError unless `fractions` matches `background` in length, every fraction is
//! finite and >= 0 and they sum to one within 1e-6 (no renormalisation). `what` names it.
void validate_composition(const char* what, const std::vector<Species>& background,
                          const std::vector<double>& fractions);

//! Mole-fraction weighted mean particle mass of a mixture [kg] (fractions validated).
double mean_mass(const std::vector<Species>& background, const std::vector<double>& fractions);

//! Diffusion parameter of `s` through a mixture by Blanc's law [m^-1 s^-1]:
//! 1 / b = sum_j y_j / b_sj; species equal to `s` are not allowed in the background.
double mixture_diffusion_parameter(const Species& s, const std::vector<Species>& background,
                                   const std::vector<double>& fractions, double temperature,
                                   DiffusionMethod method = DiffusionMethod::measured_first);

//! Hunten (1973) diffusion-limited flux [m^-2 s^-1] of `s` with mole fraction
//! `mixing_ratio` at the homopause, radius `radius` [m] of a planet of mass `planet_mass` [kg],
//! through `background` (mole fractions summing to one) at `temperature` [K].
//! Negative for a species heavier than the background (it cannot rise by diffusion).
double diffusion_limited_flux(const Species& s, const std::vector<Species>& background,
                              const std::vector<double>& fractions, double mixing_ratio,
                              double temperature, double planet_mass, double radius,
                              DiffusionMethod method = DiffusionMethod::measured_first);

//! Coupled diffusion–Jeans flux [m^-2 s^-1] (see the file comment) from the Jeans flux at the
//! diffusive-equilibrium exobase density `jeans_flux_eq` [m^-2 s^-1], diffusion parameter `b`
//! [m^-1 s^-1], homopause mole fraction `mixing_ratio` [1], beta = 1/H_a - 1/H_i [m^-1]
//! (any sign; beta -> 0 taken with expm1) and layer thickness `thickness` [m].
double coupled_escape_flux(double jeans_flux_eq, double b, double mixing_ratio, double beta,
                           double thickness);

//! Array forms: arguments of length 1 or `count`, results in `out` (length `count`).
void binary_diffusion_parameter(const Species& a, const Species& b, ArrayArg temperature,
                                double* out, std::size_t count,
                                DiffusionMethod method = DiffusionMethod::measured_first);
void diffusion_limited_flux(const Species& s, const std::vector<Species>& background,
                            const std::vector<double>& fractions, ArrayArg mixing_ratio,
                            ArrayArg temperature, ArrayArg planet_mass, ArrayArg radius,
                            double* out, std::size_t count,
                            DiffusionMethod method = DiffusionMethod::measured_first);
void coupled_escape_flux(ArrayArg jeans_flux_eq, ArrayArg b, ArrayArg mixing_ratio, ArrayArg beta,
                         ArrayArg thickness, double* out, std::size_t count);

} // namespace exosieve
