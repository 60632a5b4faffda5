#pragma once
//! \file exobase_model.hpp
//! What the evolution needs from the upper atmosphere at each instant: the exobase radius and the
//! species' densities there, given the exobase temperature and how much of each inventory is
//! left. Also the histories that drive it: the exobase temperature and tables against time.

#include <cstddef>
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "exosieve/diffusion.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/stellar.hpp"
#include "exosieve/thermosphere.hpp"

namespace exosieve {

//! Values against strictly increasing times: linear between points, held at the end values
//! outside them.
class TimeTable {
  public:
    TimeTable() = default;
    //! times [s] strictly increasing and finite; values finite. `what` names the table in errors.
    TimeTable(std::vector<double> times, std::vector<double> values, const std::string& what);

    //! Value at time t [s].
    double operator()(double t) const;
    //! Table times [s].
    const std::vector<double>& times() const { return times_; }
    //! Table values.
    const std::vector<double>& values() const { return values_; }
    //! True when the table has no points.
    bool empty() const { return times_.empty(); }

  private:
    std::vector<double> times_;
    std::vector<double> values_;
};

//! Exobase temperature against time: constant, tabulated, a clamped power law in the planet's
//! XUV flux, or a user callable.
class ExobaseTemperature {
  public:
    //! The kind of history.
    enum class Kind { Constant, Table, XuvPowerLaw, Callable };

    //! Constant temperature [K] (500 K when default-constructed).
    ExobaseTemperature() = default;
    //! Constant temperature [K] (> 0).
    static ExobaseTemperature constant(double temperature);
    //! Temperatures [K] (> 0) against strictly increasing times [s]; linear, held at the ends.
    static ExobaseTemperature table(std::vector<double> times, std::vector<double> temperatures);
    //! T = T_ref (F_xuv / F_ref)^gamma clamped to [minimum, maximum]; temperatures [K], reference
    //! flux [W m^-2], gamma [1] finite, 0 < minimum <= maximum.
    static ExobaseTemperature xuv_power_law(double reference_temperature, double reference_flux,
                                            double exponent, double minimum, double maximum);
    //! A callable t [s] -> T [K]. Not thread-safe in general: single runs only. `description`
    //! goes into the model configuration.
    static ExobaseTemperature callable(std::function<double(double)> function,
                                       std::string description);

    //! Temperature [K] at time t [s], given the planet's XUV flux [W m^-2] (ignored unless
    //! Kind::XuvPowerLaw). A callable's non-finite or non-positive value raises InputError.
    double operator()(double t, double xuv_flux) const;
    //! The same from ln of the XUV flux [ln(W m^-2)]: the power law is then one exponential.
    //! When `log_temperature` is given, it receives ln T where the power law gives it without a
    //! logarithm (inside its clamps), NaN otherwise.
    double at_log_flux(double t, double log_xuv_flux, double* log_temperature = nullptr) const;
    //! Kind of history.
    Kind kind() const { return kind_; }
    //! True when the value depends on the XUV flux.
    bool needs_xuv_flux() const { return kind_ == Kind::XuvPowerLaw; }
    //! True unless a callable (which may hold an interpreter lock or state).
    bool thread_safe() const { return kind_ != Kind::Callable; }
    //! Times in (t0, t1) where the history has a kink (table points, clamp switches).
    std::vector<double> breakpoints(const Planet& planet, double t0, double t1) const;
    //! JSON description of the history.
    std::string to_json() const;

    double constant_value() const { return constant_; }      //!< Kind::Constant [K]
    const TimeTable& table_values() const { return table_; } //!< Kind::Table
    double reference_temperature() const { return t_ref_; }  //!< Kind::XuvPowerLaw [K]
    double reference_flux() const { return f_ref_; }         //!< Kind::XuvPowerLaw [W m^-2]
    double exponent() const { return gamma_; }               //!< Kind::XuvPowerLaw [1]
    double minimum() const { return t_min_; }                //!< Kind::XuvPowerLaw [K]
    double maximum() const { return t_max_; }                //!< Kind::XuvPowerLaw [K]

  private:
    Kind kind_ = Kind::Constant;
    double constant_ = 500.0;
    TimeTable table_;
    double t_ref_ = 0.0, f_ref_ = 0.0, gamma_ = 0.0, t_min_ = 0.0, t_max_ = 0.0;
    double log_f_ref_ = 0.0;
    double log_t_ref_ = 0.0;
    std::function<double(double)> function_;
    std::string description_;
};

//! The exobase at one instant, filled by an ExobaseModel.
struct ExobaseState {
    double radius = 0.0;      //!< exobase radius from the planet's centre [m]
    double temperature = 0.0; //!< temperature at the exobase [K]
    //! ln of each species' number density at the exobase (ln of m^-3); -inf for none.
    std::vector<double> log_density;
    //! When true, log_escape_rate holds the model's own global escape rates (e.g. limited by
    //! diffusion) and the Jeans rates from log_density are not used.
    bool has_escape_rates = false;
    //! ln of each species' global escape rate (ln of s^-1), used when has_escape_rates.
    std::vector<double> log_escape_rate;
    //! True when the gas stays collisional out to the model's outer bound: no exobase, the
    //! atmosphere flows out hydrodynamically. radius, temperature and log_density are then
    //! those at the outer bound, and outflow_reason says what was found.
    bool outflow = false;
    std::string outflow_reason; //!< why there is no exobase (set with outflow)
};

//! An upper-atmosphere model: exobase radius and densities from the exobase temperature and the
//! remaining share of each inventory. Implementations must be immutable after construction so
//! that many runs can share one model across threads.
class ExobaseModel {
  public:
    virtual ~ExobaseModel() = default;
    //! Species names, in the order of every per-species array.
    virtual const std::vector<std::string>& species_names() const = 0;
    //! Fill `out` (vectors already sized to the species count) at time t [s] with exobase
    //! temperature [K]; log_fraction[i] = ln(N_i / N_i(t_start)).
    virtual void evaluate(double t, const double* log_fraction, double temperature,
                          ExobaseState& out) const = 0;
    //! True when species i's escape rate vanishes with its inventory near the state
    //! log_fraction (so that ln N_i can follow it down); false when the rate is held whatever is
    //! left, and the inventory would reach zero in finite time.
    virtual bool loss_follows_inventory(std::size_t i, const double* log_fraction) const = 0;
    //! Throw InputError when the model does not fit the planet (e.g. exobase below the surface).
    virtual void check(const Planet& planet) const = 0;
    //! JSON description of the model.
    virtual std::string to_json() const = 0;
};

//! How prescribed exobase densities change as the inventories are lost.
enum class DensityScaling {
    Inventory, //!< n_i = n_i0 N_i / N_i0: each density follows its species' inventory
    Fixed,     //!< n_i = n_i0 whatever is left
};

//! Exobase at a prescribed radius with prescribed densities (fixed or following the inventory).
class PrescribedExobase final : public ExobaseModel {
  public:
    //! radius [m] (> 0), densities n_i0 [m^-3] (>= 0) of the named species.
    PrescribedExobase(double radius, std::vector<std::string> species,
                      std::vector<double> densities, DensityScaling scaling);

    const std::vector<std::string>& species_names() const override { return species_; }
    void evaluate(double t, const double* log_fraction, double temperature,
                  ExobaseState& out) const override;
    bool loss_follows_inventory(std::size_t, const double*) const override {
        return scaling_ == DensityScaling::Inventory;
    }
    void check(const Planet& planet) const override;
    std::string to_json() const override;

    double radius() const { return radius_; }                           //!< exobase radius [m]
    const std::vector<double>& densities() const { return densities_; } //!< n_i0 [m^-3]
    DensityScaling scaling() const { return scaling_; }                 //!< density scaling

  private:
    double radius_;
    std::vector<std::string> species_;
    std::vector<double> densities_;
    std::vector<double> log_densities_;
    DensityScaling scaling_;
};

//! A diffusive-equilibrium Thermosphere whose composition follows the inventories and whose
//! exobase temperature follows the history. At each instant: homopause mole fractions
//! x_i = x_i0 (N_i/N_i0) / sum_j x_j0 (N_j/N_j0) at the fixed homopause radius and density;
//! an isothermal profile at the exobase temperature T(t), or a Bates (1959) profile with
//! T_inf = T(t) and its base temperature and shape held. Escape rates are the thermosphere's
//! (Jeans, coupled to diffusion when asked) over the exobase sphere. Where the thermosphere is
//! collisionless down to the homopause, the exobase is the homopause; where it is collisional up
//! to the outer radius there is no exobase: the state reports outflow (the gas flows out
//! hydrodynamically), with the temperature and densities at the outer radius. evolve() then
//! applies energy-limited loss when its hydrodynamic option is on, and stops with
//! NumericalError saying why otherwise.
class ThermosphereExobase final : public ExobaseModel {
  public:
    //! `initial` sets the planet, homopause, species, x_i0 and the profile's form (isothermal or
    //! Bates; a tabulated profile is refused); `species` gives the evolution's species order
    //! (the same species as `initial`'s); diffusion method and tail depletion for the fluxes.
    ThermosphereExobase(const Thermosphere& initial, const std::vector<std::string>& species,
                        bool limit_by_diffusion,
                        DiffusionMethod method = DiffusionMethod::measured_first,
                        TailDepletion tail = {});

    const std::vector<std::string>& species_names() const override { return names_; }
    void evaluate(double t, const double* log_fraction, double temperature,
                  ExobaseState& out) const override;
    //! True while the species' homopause mole fraction is below 1/2: its density then falls
    //! nearly in proportion to its inventory (d ln n_i / d ln N_i = 1 - x_i at fixed exobase).
    bool loss_follows_inventory(std::size_t i, const double* log_fraction) const override;
    void check(const Planet& planet) const override;
    std::string to_json() const override;

    //! The thermosphere at one instant (exobase temperature [K], ln(N_i/N_i0) per species).
    Thermosphere at(double temperature, const double* log_fraction) const;

  private:
    double planet_mass_, planet_radius_, homopause_radius_, homopause_density_, outer_radius_;
    std::uint64_t id_; // tells this model's cached tables (exobase_model.cpp) from another's
    std::vector<Species> species_;
    std::vector<std::string> names_;
    std::vector<double> log_x0_;
    TemperatureProfile::Kind kind_;
    double base_temperature_ = 0.0, shape_ = 0.0, base_radius_ = 0.0;
    bool limit_by_diffusion_;
    DiffusionMethod method_;
    TailDepletion tail_;
};

} // namespace exosieve
