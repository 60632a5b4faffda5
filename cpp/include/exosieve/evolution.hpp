#pragma once
//! \file evolution.hpp
//! Loss of each species' inventory over time:
//!   dN_i/dt = S_i(t) - Q_i(t, N),
//! with Q_i the global escape rate (Jeans escape from the exobase model, or energy-limited
//! hydrodynamic loss shared with dragged species) and S_i a source (outgassing).
//!
//! With an envelope (EvolutionConfig::envelope) the planet is a rock/iron core under an H/He
//! envelope whose mass M_env is one more state, lost at the hydrodynamic mass-loss rate:
//!   dM_env/dt = -Mdot(t, M_p, R_p) while energy-limited loss acts, 0 otherwise,
//! with M_p = M_core + M_env and R_p = R_core + R_env(f_env, M_p, F_bol, t) (Lopez & Fortney
//! 2014, envelope.hpp), f_env = M_env / M_p. Mdot is the energy-limited rate of the
//! hydrodynamic option (its XUV radius the evolving R_p unless a fixed radius or the absorption
//! model is given; the Roche-lobe factor of the evolving M_p and R_p). The Jeans parameters
//! take the evolving M_p, and a prescribed exobase keeps its height above the evolving R_p.
//! Not coupled: Jeans escape of the envelope in the kinetic regimes (not taken from M_env), a
//! Thermosphere (refused: it keeps the planet it was built with) and the recombination limit
//! (refused: the evolving radius moves its switch, which the integrator stops at otherwise).
//! An event locates the time M_env reaches zero; the planet is the bare core after it.
//! M_env / M_core is integrated linearly (it reaches zero in a finite time) to the absolute
//! tolerance rtol depletion_fraction M_env(t_start) throughout: an error made while the
//! envelope is large stays as it shrinks, so a relative test would leave a small remnant
//! inaccurate; this one keeps it to rtol relative down to depletion_fraction of the start.
//!
//! Integrated in y_i = ln N_i with Boost.Odeint's Dormand–Prince 5(4) pair under step-size
//! control, with its dense output for requested times and events. In ln N a species whose loss
//! follows its inventory obeys dy_i/dt = S_i e^(-y_i) - k_i(t): no stiffness however fast it is
//! lost, and inventories far below 1e-308 of the start stay representable. The error test is
//! the one of a linear-N integration with tolerances (rtol, atol_i):
//! |err(y_i)| <= rtol + atol_i / N_i.

#include <cmath>
#include <cstddef>
#include <functional>
#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "exosieve/envelope.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/species.hpp"
#include "exosieve/stellar.hpp"

namespace exosieve {

//! A species source [s^-1]: constant, or a table against time (linear, held at the ends).
class SourceRate {
  public:
    //! No source.
    SourceRate() = default;
    //! Constant rate [s^-1] (>= 0).
    explicit SourceRate(double rate);
    //! Rates [s^-1] (>= 0) against strictly increasing times [s].
    SourceRate(std::vector<double> times, std::vector<double> rates);

    //! Rate [s^-1] at time t [s].
    double operator()(double t) const { return table_.empty() ? rate_ : table_(t); }
    //! True when the rate is zero at all times.
    bool is_zero() const { return table_.empty() && rate_ == 0.0; }
    //! The table (empty for a constant rate).
    const TimeTable& table() const { return table_; }
    //! JSON description.
    std::string to_json() const;

  private:
    double rate_ = 0.0;
    TimeTable table_;
};

//! A loss of one species that the user gives [particles s^-1], beyond thermal escape: non-thermal
//! (photochemical escape, ion pick-up, sputtering) or external (measured or modelled elsewhere).
//! Added to the thermal escape rate: dN_i/dt = S_i - Q_i - L_i(t). Constant, a table against
//! time (linear, held at the ends) or a power law in the planet's XUV flux,
//! L = L_ref (F_xuv / F_ref)^p. It does not vanish with the inventory, so a species with a given
//! loss is held at its depletion level once it reaches it.
class GivenLoss {
  public:
    //! The kind of loss.
    enum class Kind { None, Constant, Table, XuvPowerLaw };

    //! No loss.
    GivenLoss() = default;
    //! Constant rate [s^-1] (finite, >= 0).
    explicit GivenLoss(double rate);
    //! Rates [s^-1] (finite, >= 0) against strictly increasing times [s].
    GivenLoss(std::vector<double> times, std::vector<double> rates);
    //! L_ref (F_xuv / F_ref)^p: reference_rate L_ref [s^-1] (>= 0), reference_flux F_ref
    //! [W m^-2] (> 0), exponent p [1] (finite). Needs the planet's star.
    static GivenLoss xuv_power_law(double reference_rate, double reference_flux, double exponent);

    //! Rate [s^-1] at time t [s], with ln F_xuv [ln W m^-2] at t (used by the power law only).
    double operator()(double t, double log_flux) const {
        switch (kind_) {
        case Kind::None:
            return 0.0;
        case Kind::Constant:
            return rate_;
        case Kind::Table:
            return table_(t);
        case Kind::XuvPowerLaw:
            return rate_ > 0.0 ? std::exp(log_rate_ + exponent_ * (log_flux - log_flux_ref_)) : 0.0;
        }
        return 0.0;
    }
    //! The kind of loss.
    Kind kind() const { return kind_; }
    //! True when the rate is zero at all times.
    bool is_zero() const { return kind_ == Kind::None || (kind_ != Kind::Table && rate_ == 0.0); }
    //! True when the rate depends on the XUV flux.
    bool needs_xuv_flux() const { return kind_ == Kind::XuvPowerLaw; }
    //! The table (empty unless tabulated).
    const TimeTable& table() const { return table_; }
    //! JSON description.
    std::string to_json() const;

  private:
    Kind kind_ = Kind::None;
    double rate_ = 0.0, log_rate_ = 0.0, log_flux_ref_ = 0.0, exponent_ = 0.0;
    TimeTable table_;
};

//! Which Odeint stepper integrates ln N.
enum class StepperKind : int {
    Auto = 0,       //!< Rosenbrock4 when any species has a source, else Dopri5 (default)
    Dopri5 = 1,     //!< explicit Dormand–Prince 5(4): fastest for losses, however fast
    Rosenbrock4 = 2 //!< linearly implicit Rosenbrock 4(3): for stiff source–loss balances
};

//! The stepper's name in arguments and files: "auto", "dopri5" or "rosenbrock4".
const char* stepper_name(StepperKind kind);

//! An H/He envelope on a rock/iron core, for evolve(): radius R_core + R_env of the Lopez &
//! Fortney (2014) fit (envelope.hpp), mass lost at the hydrodynamic mass-loss rate.
struct EnvelopeConfig {
    double core_mass = 0.0;         //!< M_core [kg] (> 0)
    double envelope_fraction = 0.0; //!< f_env = M_env / M_p at t_start [1], in [0, 1)
    EnvelopeOpacity opacity = EnvelopeOpacity::Solar; //!< opacity of the radius fit

    //! Throw InputError naming the argument and value for a value out of range.
    void validate() const;
    //! Envelope mass M_core f_env / (1 - f_env) at t_start [kg].
    double initial_mass() const {
        return core_mass * envelope_fraction / (1.0 - envelope_fraction);
    }
    //! Planet mass M_core / (1 - f_env) at t_start [kg].
    double initial_planet_mass() const { return core_mass / (1.0 - envelope_fraction); }
};

//! Everything one run needs; plain data, no interpreter objects, so runs can go in parallel.
struct EvolutionConfig {
    //! Start from a planet; fill in the rest before calling evolve().
    explicit EvolutionConfig(Planet p) : planet(std::move(p)) {}

    Planet planet;                         //!< the planet (and its star, for XUV-driven models)
    std::vector<Species> species;          //!< the species, in the exobase model's order
    std::vector<double> initial_inventory; //!< N_i(t_start) [particles] (> 0)
    std::shared_ptr<const ExobaseModel> exobase; //!< exobase radius and densities
    ExobaseTemperature temperature;              //!< exobase temperature history
    std::vector<SourceRate> sources;             //!< empty or one per species [s^-1]
    std::vector<GivenLoss> given_losses;         //!< empty or one per species: losses given [s^-1]
    std::optional<HydrodynamicOptions> hydrodynamic; //!< energy-limited loss with drag
    RegimeThresholds thresholds;                     //!< Jeans-parameter regime thresholds
    //! An H/He envelope whose mass and radius evolve with its loss; the planet's own mass and
    //! radius are then not used (the envelope gives them at every instant). Needs the planet's
    //! star, the hydrodynamic option and a PrescribedExobase.
    std::optional<EnvelopeConfig> envelope;
    TailDepletion tail;         //!< factor on every Jeans flux
    double t_start = 0.0;       //!< start time (stellar age) [s]
    double t_end = 0.0;         //!< end time [s] (> t_start)
    std::vector<double> t_eval; //!< output times [s]; empty: every step
    double rtol = 1e-8;         //!< relative tolerance on each N_i [1]
    //! Absolute tolerance on each N_i [particles]; empty: rtol * depletion_fraction * N_i(t_start).
    std::vector<double> atol;
    double depletion_fraction = 1e-3; //!< a species is depleted below this share of N_i(t_start)
    std::size_t max_steps = 100000;   //!< accepted + rejected steps before giving up
    StepperKind stepper = StepperKind::Auto; //!< the Odeint stepper
    //! Isotope ratios to report, (numerator, denominator) species names.
    std::vector<std::pair<std::string, std::string>> isotope_ratios;
    //! Put the model's JSON into EvolutionResult::config (batches that keep no per-run
    //! configuration switch it off: formatting it costs about as much as a short run).
    bool record_config = true;
    //! Record the escape and source rates at every output time; false: at the first only, NaN
    //! after (batches read no more).
    bool record_rates = true;
    //! Called after every accepted step with the time [s]; returning false stops the run.
    std::function<bool(double)> progress;

    //! Throw InputError naming the argument and value for anything that cannot run.
    void validate() const;
    //! JSON description of the whole model (without t_eval and the callbacks).
    std::string to_json() const;
};

//! A regime change located during a run.
struct RegimeChange {
    double time; //!< [s]
    Regime from; //!< regime before
    Regime to;   //!< regime after
};

//! Output of evolve(): time series (row-major, time x species) and diagnostics. escape_rate is
//! the thermal (Jeans or hydrodynamic) loss alone; given_loss_rate holds the given losses.
struct EvolutionResult {
    std::vector<std::string> species;         //!< species names
    std::vector<double> time;                 //!< output times [s]
    std::vector<double> inventory;            //!< N_i [particles], time x species
    std::vector<double> escape_rate;          //!< Q_i [s^-1], time x species
    std::vector<double> source_rate;          //!< S_i [s^-1], time x species
    std::vector<double> given_loss_rate;      //!< L_i, the given losses [s^-1], time x species
    std::vector<double> jeans_parameter;      //!< lambda_i at the exobase [1], time x species
    std::vector<double> exobase_radius;       //!< [m], per time
    std::vector<double> exobase_temperature;  //!< [K], per time
    std::vector<double> xuv_flux;             //!< [W m^-2], per time (NaN without a star)
    std::vector<int> regime;                  //!< Regime code, per time
    std::vector<int> energy_limited;          //!< 1 where energy-limited loss acted, per time
    std::vector<std::string> ratio_names;     //!< e.g. "D/H"
    std::vector<double> isotope_ratio;        //!< time x ratio [1]
    std::vector<double> depletion_time;       //!< per species [s]; NaN where not reached
    std::vector<double> initial_inventory;    //!< per species [particles]
    std::vector<double> species_mass;         //!< per species [kg]
    std::vector<RegimeChange> regime_changes; //!< located regime changes
    // Where the time and the loss went, per species (regime order: Regime codes 0..3). A
    // species' regime is that of its own Jeans parameter at the exobase (hydrodynamic where the
    // exobase model finds no exobase); its changes are located on the dense output.
    //! Time species i spent in regime k [s], species x regime (each row sums to the span run).
    std::vector<double> regime_time;
    //! Thermal loss of the Jeans formula while species i was in regime k and energy-limited
    //! loss did not act [particles], species x regime.
    std::vector<double> regime_loss;
    //! Thermal loss while energy-limited loss acted (the escaping species' share of the
    //! energy-limited rate, or a dragged species' rate) [particles], per species.
    std::vector<double> energy_limited_loss;
    std::vector<double> given_loss; //!< loss to the given losses [particles], per species
    //! Share of the loss taken outside the Jeans picture [1], per species:
    //! 1 - regime_loss[Jeans] / (sum of regime_loss + energy_limited_loss + given_loss),
    //! 0 where nothing was lost.
    std::vector<double> non_jeans_loss_share;
    //! Time the bulk gas (the densest species at the exobase, as in `regime`) spent in each
    //! regime [s], per regime.
    std::vector<double> bulk_regime_time;
    // With an envelope only (empty or NaN without one):
    std::vector<double> envelope_mass;      //!< M_env [kg], per time
    std::vector<double> planet_radius;      //!< R_p = R_core + R_env [m], per time
    std::vector<double> envelope_loss_rate; //!< -dM_env/dt [kg s^-1], per time
    double core_mass = std::numeric_limits<double>::quiet_NaN(); //!< M_core [kg]
    //! Stellar age when the envelope is gone [s]; NaN where it is not (or without one).
    double stripping_time = std::numeric_limits<double>::quiet_NaN();
    std::size_t steps = 0;           //!< accepted steps
    std::size_t rejected_steps = 0;  //!< rejected steps
    std::size_t rhs_evaluations = 0; //!< right-hand-side evaluations
    std::string stepper;             //!< the stepper used: "dopri5" or "rosenbrock4"
    bool completed = false;          //!< false when stopped by the progress hook
    double t_reached = 0.0;          //!< last time reached [s]
    std::string config;              //!< JSON of the model

    std::size_t time_count() const { return time.size(); }       //!< output times
    std::size_t species_count() const { return species.size(); } //!< species
    bool has_envelope() const { return !std::isnan(core_mass); } //!< run with an envelope
};

//! Integrate the inventories from t_start to t_end. Thread-safe for configs whose temperature
//! history is thread-safe; throws InputError for bad input (before any step) and
//! NumericalError when the run cannot make progress (saying where and why).
EvolutionResult evolve(const EvolutionConfig& config);

//! Default isotope ratios present among `species`: D/H, HD/H2, 3He/He, 36Ar/38Ar, 40Ar/36Ar.
std::vector<std::pair<std::string, std::string>>
default_isotope_ratios(const std::vector<std::string>& species);

} // namespace exosieve
