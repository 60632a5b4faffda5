#pragma once
//! \file thermosphere.hpp
//! A thermosphere in diffusive equilibrium above the homopause, its exobase and the escape
//! flux of each species from it.
//!
//! Each species i obeys (thermal-diffusion factor alpha_i, g = G M / r^2)
//!   d ln n_i / dr = -m_i g / (k T) - (1 + alpha_i) d ln T / dr,   n_i(r_h) = x_i n_h,
//! so ln n_i(r) = ln(x_i n_h) - m_i J(r) - (1 + alpha_i) ln(T(r)/T(r_h)) with one
//! species-independent column J(r) = integral_{r_h}^{r} G M / (k r'^2 T(r')) dr'. J has a closed
//! form where T is constant; elsewhere it is integrated once with Boost.Odeint (dopri5) and
//! interpolated between the accepted steps by quintic Hermite polynomials (J, J', J'' known).
//! Temperature profiles: isothermal; Bates (1959) T(r) = T_inf - (T_inf - T_b) exp(-s (r - r_b));
//! a table (linear in r, held at the end values outside it).
//!
//! Exobase: the lowest radius above the homopause where the mean free path 1 / sum_j n_j sigma_j
//! equals the scale height k T / (m_mean g). Found by scanning upward in steps of at most half
//! a scale height of the heaviest species that matters for collisions, then TOMS 748
//! (Alefeld, Potra & Shi 1995) on the first bracket.

#include <cstddef>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/arrays.hpp"
#include "exosieve/diffusion.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/species.hpp"

namespace exosieve {

//! Temperature against radius above the homopause [K].
class TemperatureProfile {
  public:
    //! Which form the profile has.
    enum class Kind { isothermal, bates, table };

    //! Constant temperature [K].
    static TemperatureProfile isothermal(double temperature);
    //! Bates (1959): T_inf - (T_inf - T_b) exp(-shape (r - base_radius)); temperatures [K],
    //! shape [m^-1], base_radius [m]. Valid at r >= base_radius.
    static TemperatureProfile bates(double exobase_temperature, double base_temperature,
                                    double shape, double base_radius);
    //! Table of temperatures [K] at strictly increasing radii [m] (at least two points);
    //! linear between points, held at the end values outside.
    static TemperatureProfile table(std::vector<double> radius, std::vector<double> temperature);

    //! The kind of profile.
    Kind kind() const { return kind_; }
    //! Temperature at radius r [K].
    double operator()(double r) const;
    //! dT/dr at r [K m^-1] (for a table: the slope of the segment holding r, right-sided).
    double slope(double r) const;
    //! Temperature far above: T for isothermal, T_inf for Bates, the last value of a table [K].
    double asymptotic_temperature() const;
    //! Radius above which the temperature equals asymptotic_temperature() to double
    //! precision [m] (0 for isothermal).
    double flat_above() const;
    //! Bates parameters (NaN for other kinds): base temperature [K], shape [m^-1], base [m].
    double base_temperature() const { return base_temperature_; }
    double shape() const { return shape_; }
    double base_radius() const { return base_radius_; }
    //! Table nodes (empty for other kinds): radii [m] and temperatures [K].
    const std::vector<double>& table_radius() const { return radius_; }
    const std::vector<double>& table_temperature() const { return temperature_; }

  private:
    Kind kind_ = Kind::isothermal;
    double asymptotic_ = 0.0;
    double base_temperature_ = 0.0;
    double shape_ = 0.0;
    double base_radius_ = 0.0;
    std::vector<double> radius_;
    std::vector<double> temperature_;
};

//! Whether an exobase exists and, if not, why.
enum class ExobaseStatus {
    found = 0,                      //!< exobase found between the homopause and the outer radius
    collisionless_at_homopause = 1, //!< mean free path exceeds the scale height at the homopause
    none_below_outer_radius = 2     //!< still collisional at the outer radius (hydrodynamic?)
};

//! The exobase of a thermosphere, or the reason there is none.
struct Exobase {
    ExobaseStatus status = ExobaseStatus::found; //!< found, or why not
    std::string message;           //!< human-readable status with the numbers behind it
    double radius = 0.0;           //!< exobase radius [m] (NaN when not found)
    double temperature = 0.0;      //!< temperature there [K] (NaN when not found)
    std::vector<double> densities; //!< number density of each species there [m^-3] (empty if none)
    //! True when status is found.
    bool found() const { return status == ExobaseStatus::found; }
};

//! Diffusive-equilibrium thermosphere of a planet above its homopause.
//! Construction validates and stores the inputs only; the column integral and the exobase are
//! computed on first use and cached (immutable, shared by copies, safe to read from threads).
class Thermosphere {
  public:
    //! planet_mass [kg] and planet_radius [m]; homopause radius [m] and total number density
    //! there [m^-3]; species with their well-mixed homopause mole fractions (>= 0, summing to
    //! one within 1e-6); a temperature profile; the outer bound of the exobase search [m]
    //! (0 means 20 homopause radii).
    Thermosphere(double planet_mass, double planet_radius, double homopause_radius,
                 double homopause_density, std::vector<Species> species,
                 std::vector<double> mole_fractions, TemperatureProfile profile,
                 double outer_radius = 0.0);

    //! Planet mass [kg].
    double planet_mass() const { return planet_mass_; }
    //! Planet radius [m].
    double planet_radius() const { return planet_radius_; }
    //! Homopause radius [m].
    double homopause_radius() const { return homopause_radius_; }
    //! Total number density at the homopause [m^-3].
    double homopause_density() const { return homopause_density_; }
    //! Outer bound of the exobase search [m].
    double outer_radius() const { return outer_radius_; }
    //! The species, in input order.
    const std::vector<Species>& species() const { return species_; }
    //! Homopause mole fractions, in species order [1].
    const std::vector<double>& mole_fractions() const { return fractions_; }
    //! The temperature profile.
    const TemperatureProfile& profile() const { return profile_; }
    //! Index of the species called `name`; InputError listing the species when absent.
    std::size_t index(const std::string& name) const;

    //! How binary diffusion parameters are estimated for escape_flux (default measured_first).
    void set_diffusion_method(DiffusionMethod method) {
        method_ = method;
        diffusion_.reset(); // built again, with this method, when next needed
    }
    //! Tail-depletion factor applied to the Jeans flux (default none).
    void set_tail_depletion(const TailDepletion& tail) { tail_ = tail; }

    //! Temperature at radius r >= homopause radius [K].
    double temperature(double r) const;
    //! Number density of species i at radius r >= homopause radius [m^-3].
    double density(std::size_t i, double r) const;
    //! Natural log of density(i, r); finite where the density underflows (x_i > 0).
    double log_density(std::size_t i, double r) const;
    //! Densities of every species at r [m^-3] into `out` (length species().size()).
    void densities(double r, double* out) const;
    //! Mean free path 1 / sum_j n_j sigma_j at r [m].
    double mean_free_path(double r) const;
    //! Scale height k T / (m_mean g) of the local mixture at r [m].
    double scale_height(double r) const;
    //! Exobase criterion ln(mean free path / scale height) at r [1]: 0 at the exobase.
    double exobase_criterion(double r) const;

    //! The exobase (computed once, then cached).
    const Exobase& exobase() const;

    //! Jeans flux of species i at the exobase from its diffusive-equilibrium density
    //! [m^-2 s^-1]; NumericalError when there is no exobase.
    double jeans_flux(std::size_t i) const;
    //! Hunten's diffusion-limited flux of species i through the other species, at the
    //! homopause temperature and gravity [m^-2 s^-1]; NaN when i has no background.
    double diffusion_limited_flux(std::size_t i) const;
    //! Escape flux of species i at the exobase [m^-2 s^-1]: the Jeans flux, or with
    //! limit_by_diffusion the coupled diffusion–Jeans flux with z_e = r_exobase - r_homopause,
    //! the other species as background and scale heights at the homopause. A species with no
    //! other species beside it is not diffusion-limited. NumericalError when there is no exobase.
    double escape_flux(std::size_t i, bool limit_by_diffusion = true) const;

    //! Array form of density: species i at `count` radii into `out`.
    void density(std::size_t i, const double* r, double* out, std::size_t count) const;
    //! Array form of temperature.
    void temperature(const double* r, double* out, std::size_t count) const;

    struct Column; //!< cached column integral (defined in the source file)
    //! The column integral, built on first use; shared, so that a thermosphere with the same
    //! planet, homopause radius and temperature profile can adopt it.
    std::shared_ptr<const Column> shared_column() const;
    //! Use `column`, the shared_column() of a thermosphere with the same planet mass, homopause
    //! radius and temperature profile (the column depends on nothing else), instead of
    //! building it again.
    void adopt_column(std::shared_ptr<const Column> column) const;
    //! b_ij = n D_ij of every pair of present species at the homopause temperature
    //! [m^-1 s^-1], row i the background of species i in the coupled flux (NaN where either is
    //! absent or the pair has no estimate); built on first use, shared like the column.
    std::shared_ptr<const std::vector<double>> shared_diffusion() const;
    //! Use the shared_diffusion() of a thermosphere with the same species present, diffusion
    //! method and homopause temperature instead of computing it again.
    void adopt_diffusion(std::shared_ptr<const std::vector<double>> diffusion) const;

  private:
    // Sums over the species at one radius, taken in log space so that nothing underflows.
    struct Local {
        double temperature;        // [K]
        double log_collision_rate; // ln sum_j n_j sigma_j [ln m^-1]
        double log_scale_height;   // ln k T / (m_mean g) [ln m]
        double mean_mass;          // [kg]
        double heaviest_colliding; // heaviest species with >= 1e-3 of the collisions [kg]
    };
    Local local_mixture(double r, std::vector<double>& weights) const;
    void require_in_range(const char* what, double r) const;
    // ln(n_i(r) / n_i(r_h)) after checking i and r.
    double decay_exponent(std::size_t i, double r) const;
    double column(double r) const; // J(r) in units of 1/amu (dimensionless per atomic mass unit)
    const Column& column_cache() const;
    Exobase find_exobase() const;
    double escape_flux_at(const Exobase& e, std::size_t i, bool limit_by_diffusion) const;

    double planet_mass_, planet_radius_, homopause_radius_, homopause_density_, outer_radius_;
    std::vector<Species> species_;
    std::vector<double> fractions_;
    std::vector<double> log_x_; // ln(x_i n_h), -inf where x_i = 0
    TemperatureProfile profile_;
    DiffusionMethod method_ = DiffusionMethod::measured_first;
    TailDepletion tail_;
    double homopause_temperature_ = 0.0;
    mutable std::shared_ptr<const Column> column_;
    mutable std::shared_ptr<const std::vector<double>> diffusion_; // see shared_diffusion
    mutable std::shared_ptr<const Exobase> exobase_;
};

//! Inputs of many thermospheres sharing one species list. Each ArrayArg has length 1
//! (shared) or the case count; homopause_temperature and shape empty (size 0) means
//! isothermal at exobase_temperature; outer_radius empty means the default.
struct ThermosphereCases {
    ArrayArg planet_mass{nullptr, 0};           //!< [kg]
    ArrayArg planet_radius{nullptr, 0};         //!< [m]
    ArrayArg homopause_radius{nullptr, 0};      //!< [m]
    ArrayArg homopause_density{nullptr, 0};     //!< [m^-3]
    const double* mole_fractions = nullptr;     //!< rows of species.size() fractions, row-major
    std::size_t fraction_rows = 0;              //!< 1 (shared) or the case count
    ArrayArg exobase_temperature{nullptr, 0};   //!< Bates T_inf or the isothermal T [K]
    ArrayArg homopause_temperature{nullptr, 0}; //!< Bates base temperature [K], or empty
    ArrayArg shape{nullptr, 0};                 //!< Bates shape [m^-1], or empty
    ArrayArg outer_radius{nullptr, 0};          //!< outer bound of the exobase search [m], or empty
};

//! Where the results of solve_thermospheres go (caller-allocated).
struct ThermosphereResults {
    double* exobase_radius = nullptr;      //!< [m], NaN when none (length count)
    double* exobase_temperature = nullptr; //!< [K], NaN when none (length count)
    int* status = nullptr;                 //!< ExobaseStatus as int (length count)
    double* escape_flux = nullptr;         //!< [m^-2 s^-1], NaN when none (count x species)
};

//! Exobase and per-species escape fluxes of `count` thermospheres (all inputs validated first,
//! InputError naming the case). `threads` 0 uses the hardware concurrency.
void solve_thermospheres(const std::vector<Species>& species, std::size_t count,
                         const ThermosphereCases& cases, bool limit_by_diffusion,
                         const ThermosphereResults& results, unsigned threads = 0);

} // namespace exosieve
