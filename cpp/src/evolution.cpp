#include "exosieve/evolution.hpp"

// Odeint with Eigen: the Eigen adaptor must follow odeint and stays inside this file.
#include <boost/math/tools/toms748_solve.hpp>
#include <boost/numeric/odeint.hpp>
#include <boost/numeric/odeint/external/eigen/eigen.hpp>
#include <boost/numeric/odeint/stepper/rosenbrock4.hpp>

#include <Eigen/Core>

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <memory>

#include "exosieve/constants.hpp"
#include "exosieve/diffusion.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/outflow.hpp"
#include "json_text.hpp"
#include "vector_exp.hpp"

namespace exosieve {

namespace odeint = boost::numeric::odeint;
using State = Eigen::VectorXd;
using constants::G;
using constants::k_B;
using detail::Json;
using detail::json_text;
using detail::json_value;

namespace {

// A trial step over which a species' rate changes by more than this factor is retried shorter.
constexpr double kRateChange = 100.0;
constexpr double inf = std::numeric_limits<double>::infinity();
constexpr double log_inv_two_sqrt_pi = -1.2655121234846454; // ln(1 / (2 sqrt(pi)))
constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// -f_i e^(ln q_i - y_i) of every species, the loss part of dy_i/dt, in one vectorised pass
// (several species per instruction; the exp is vector_exp's, within 2 ulp).
EXOSIEVE_VECTOR_CLONES void loss_derivatives(const double* factor, const double* log_rate,
                                             const double* y, double* out, std::size_t n) {
    for (std::size_t i = 0; i < n; ++i)
        out[i] = -factor[i] * detail::vector_exp(log_rate[i] - y[i]);
}

// (N_i(a) - N_i(b)) / N_i0 = -e^(ya_i - y0_i) (e^(yb_i - ya_i) - 1) of every species over a
// step, for the ledger, likewise vectorised (expm1 keeps the digits of a small fall).
EXOSIEVE_VECTOR_CLONES void step_falls(const double* ya, const double* yb, const double* y0,
                                       double* out, std::size_t n) {
    for (std::size_t i = 0; i < n; ++i)
        out[i] = -detail::vector_exp(ya[i] - y0[i]) * detail::vector_expm1(yb[i] - ya[i]);
}

// e^(y_i) of every species, likewise vectorised: the inventories of an output.
EXOSIEVE_VECTOR_CLONES void exp_each(const double* y, double* out, std::size_t n) {
    for (std::size_t i = 0; i < n; ++i)
        out[i] = detail::vector_exp(y[i]);
}

std::string when(double t) {
    return format_value(t) + " s (" + format_value(t / constants::Myr) + " Myr)";
}

// Tolerance on y_i = ln N_i of the error test below: ln(1 + rtol + atol_i / N_i), the change
// of ln N that an error rtol N_i + atol_i in N_i makes. Not rtol + atol_i / N_i: that allows a
// step of e^(atol_i / N_i) e-folds where N_i is far below atol_i, and an inventory fed by a
// source from there could jump to e^(1e12) particles.
// From x = ln(atol_i / N_i) and e^x (unused beyond 40).
double tolerance_from(double rtol, double x, double exp_x, double y) {
    if (x > 40.0 || x != x)
        return x;
    const double z = rtol + exp_x;
    // ln(1 + z) = z - z^2/2 + z^3/3 - ...: to 3e-7 relative below 1e-3, without a call.
    const double tol = z < 1e-3 ? z * (1.0 - 0.5 * z) : std::log1p(z);
    // Never below what a double resolves in y itself (|y| ~ 1e12 long after depletion).
    return std::max(tol, 8.0 * std::numeric_limits<double>::epsilon() * std::abs(y));
}

double checker_tolerance(double rtol, double log_atol, double y) {
    const double x = log_atol - y;
    return tolerance_from(rtol, x, x > 40.0 ? 0.0 : std::exp(x), y);
}

// e^(min(ln atol_i - y_i, 40)) of every species in one vectorised pass.
EXOSIEVE_VECTOR_CLONES void exp_offsets(const double* log_atol, const double* y, double* out,
                                        std::size_t n) {
    for (std::size_t i = 0; i < n; ++i) {
        const double x = log_atol[i] - y[i];
        out[i] = detail::vector_exp(x < 40.0 ? x : 40.0);
    }
}

// checker_tolerance of every species into out, the exponentials vectorised (two to four per
// species and step before: the error test, the rate-change test and the output test).
void checker_tolerances(double rtol, const double* log_atol, const double* y, double* out,
                        std::size_t n) {
    exp_offsets(log_atol, y, out, n);
    for (std::size_t i = 0; i < n; ++i)
        out[i] = tolerance_from(rtol, log_atol[i] - y[i], out[i], y[i]);
}

// Error test in y = ln N equivalent to |err(N_i)| <= rtol N_i + atol_i, the test of a linear
// integration. Records the species that dominates.
class LogErrorChecker {
  public:
    using value_type = double;
    using algebra_type = odeint::vector_space_algebra;
    using operations_type = odeint::default_operations;

    LogErrorChecker() = default;
    // envelope_atol: absolute tolerance of the envelope state M_env / M_core, the one linear
    // component after the species' ln N (present when the state is longer than log_atol).
    // tolerance: where each test leaves the species' tolerances at y_old (log_atol's size).
    LogErrorChecker(double rtol, const State* log_atol, std::size_t* worst, double* tolerance,
                    double envelope_atol = 0.0)
        : rtol_(rtol), log_atol_(log_atol), worst_(worst), tolerance_(tolerance),
          envelope_atol_(envelope_atol) {}

    template <class Algebra, class StateT, class Deriv, class Err, class Time>
    double error(Algebra&, const StateT& y_old, const Deriv&, Err& y_err, Time) const {
        double largest = 0.0;
        std::size_t index = 0;
        const Eigen::Index n = log_atol_->size();
        checker_tolerances(rtol_, log_atol_->data(), y_old.data(), tolerance_,
                           static_cast<std::size_t>(n));
        for (Eigen::Index i = 0; i < n; ++i) {
            const double tol = tolerance_[i];
            double ratio = std::abs(y_err[i]) / tol;
            if (std::isnan(ratio))
                ratio = inf; // a NaN trial step must be rejected
            if (ratio > largest) {
                largest = ratio;
                index = static_cast<std::size_t>(i);
            }
        }
        if (y_err.size() > n) { // the envelope: |err| <= atol throughout (evolution.hpp)
            double ratio = std::abs(y_err[n]) / envelope_atol_;
            if (std::isnan(ratio))
                ratio = inf;
            if (ratio > largest) {
                largest = ratio;
                index = static_cast<std::size_t>(n);
            }
        }
        if (worst_)
            *worst_ = index;
        return largest;
    }

  private:
    double rtol_ = 1e-8;
    const State* log_atol_ = nullptr;
    std::size_t* worst_ = nullptr;
    double* tolerance_ = nullptr;
    double envelope_atol_ = 0.0;
};

using Dopri5 = odeint::runge_kutta_dopri5<State>;
using Controlled = odeint::controlled_runge_kutta<Dopri5, LogErrorChecker>;

// Switches that change the right-hand side discontinuously; held fixed during a step.
struct Mode {
    bool energy_limited = false;
    bool stripped = false; // the envelope is gone: its mass is held at zero
    std::vector<char> frozen;
    bool operator==(const Mode& o) const {
        return energy_limited == o.energy_limited && stripped == o.stripped && frozen == o.frozen;
    }
};

// Everything the model gives at one (t, y), for output and diagnostics.
struct Snapshot {
    double temperature = 0.0, flux = nan, radius = 0.0;
    double planet_radius = 0.0, envelope_rate = nan; // [m], -dM_env/dt [kg s^-1]
    Regime regime = Regime::Jeans;
    std::vector<double> rate, lambda, source; // Q_i [s^-1], lambda_i [1], S_i [s^-1]
    std::vector<double> given;                // L_i [s^-1], the given losses
};

// The right-hand side and its diagnostics. One per run: scratch buffers make it not shareable.
class Model {
  public:
    explicit Model(const EvolutionConfig& c) : c_(c), n_(c.species.size()) {
        y0_.resize(n_);
        mass_.resize(n_);
        half_log_mass_.resize(n_);
        for (std::size_t i = 0; i < n_; ++i) {
            y0_[i] = std::log(c.initial_inventory[i]);
            mass_[i] = c.species[i].mass;
            half_log_mass_[i] = 0.5 * std::log(mass_[i]);
        }
        state_.log_density.assign(n_, 0.0);
        state_.log_escape_rate.assign(n_, 0.0);
        log_fraction_.resize(n_);
        log_scaled_rate_.resize(n_);
        rate_factor_.resize(n_);
        lambda_.resize(n_);
        needs_flux_ = c.temperature.needs_xuv_flux() || c.hydrodynamic.has_value();
        for (const GivenLoss& g : c.given_losses) {
            has_given_ = has_given_ || !g.is_zero();
            needs_flux_ = needs_flux_ || g.needs_xuv_flux();
        }
        log_area_factor_ = std::log(4.0 * constants::pi);
        planet_mass_ = c.planet.mass();
        planet_radius_ = c.planet.radius();
        if (c.envelope)
            setup_envelope(*c.envelope);
        if (c.hydrodynamic)
            setup_hydrodynamic(*c.hydrodynamic);
        mode_.frozen.assign(n_, 0);
    }

    std::size_t size() const { return n_; }
    // Length of the state: ln N_i of each species, then M_env / M_core with an envelope.
    std::size_t state_size() const { return envelope_ ? n_ + 1 : n_; }
    bool has_envelope() const { return envelope_; }
    double core_mass() const { return core_mass_; }
    // M_env(t_start) / M_core [1].
    double envelope_start() const {
        return envelope_ ? c_.envelope->initial_mass() / core_mass_ : 0.0;
    }
    const std::vector<double>& y0() const { return y0_; }
    const Mode& mode() const { return mode_; }
    void set_mode(const Mode& m) { mode_ = m; }
    std::size_t evaluations() const { return evaluations_; }

    // dy_i/dt = S_i e^(-y_i) - Q_i e^(-y_i), with Q_i = f_i e^(ln q_i) (f_i = 1 + lambda_i for
    // a Jeans flux): no rate overflows, and no logarithm of f_i is taken in the stepping loop.
    void rhs(const State& y, State& dydt, double t) {
        evaluate(t, y, mode_);
        // Without given losses the loop is the one it was before they existed.
        if (has_given_)
            derivatives<true>(y, dydt, t);
        else
            derivatives<false>(y, dydt, t);
        if (envelope_)
            dydt[static_cast<Eigen::Index>(n_)] =
                mode_.stripped ? 0.0 : -envelope_rate_ / core_mass_;
    }

    template <bool Given> void derivatives(const State& y, State& dydt, double t) {
        loss_derivatives(rate_factor_.data(), log_scaled_rate_.data(), y.data(), dydt.data(), n_);
        for (std::size_t i = 0; i < n_; ++i) {
            if (mode_.frozen[i]) {
                dydt[i] = 0.0;
                continue;
            }
            double d = dydt[i];
            if (has_sources_) {
                const double s = c_.sources[i](t);
                if (s > 0.0)
                    d += std::exp(std::log(s) - y[i]);
            }
            if constexpr (Given) {
                const double g = c_.given_losses[i](t, log_flux_);
                if (g > 0.0)
                    d -= std::exp(std::log(g) - y[i]);
            }
            dydt[i] = d;
        }
    }

    // Regime of the bulk gas (densest species at the exobase) at (t, y).
    Regime regime(double t, const State& y) {
        evaluate(t, y, mode_);
        return bulk_regime_;
    }

    // Regime of each species' own Jeans parameter at (t, y) (hydrodynamic without an exobase).
    void species_regimes(double t, const State& y, std::vector<int>& out) {
        evaluate(t, y, mode_);
        out.resize(n_);
        for (std::size_t i = 0; i < n_; ++i)
            out[i] = static_cast<int>(state_.outflow ? Regime::Hydrodynamic
                                                     : classify_regime(lambda_[i], c_.thresholds));
    }

    // G M / (k T r) at (t, y) [kg^-1], the Jeans parameter per unit particle mass, shared by
    // every species (lambda_i = m_i times it, as evaluated); 0 without an exobase (the outflow
    // lies below every threshold).
    double jeans_scale(double t, const State& y) {
        evaluate(t, y, mode_);
        return jeans_scale_;
    }
    double jeans_scale() const { return jeans_scale_; } //!< of the last evaluation
    double mass(std::size_t i) const { return mass_[i]; }

    // The given loss of species i over [a, b] [particles]. Between the run's stops a tabulated
    // loss is linear (the trapezoid is exact) and the power law in the XUV flux is a power of
    // the age (constant while saturated): Gauss–Legendre with 8 points in ln t, where it is an
    // exponential (measured against the closed form: relative error 2e-16 for t^-1.23 over a
    // factor 100 in age, 3e-11 for t^-3.7 over a factor 10).
    double given_integral(std::size_t i, double a, double b) const {
        if (!has_given_ || c_.given_losses[i].is_zero() || !(b > a))
            return 0.0;
        const GivenLoss& g = c_.given_losses[i];
        if (!g.needs_xuv_flux())
            return 0.5 * (g(a, nan) + g(b, nan)) * (b - a);
        // Gauss–Legendre nodes and weights on [-1, 1], 8 points (the positive half).
        static constexpr double node[4] = {0.1834346424956498, 0.5255324099163290,
                                           0.7966664774136267, 0.9602898564975362};
        static constexpr double weight[4] = {0.3626837833783617, 0.3137066458778869,
                                             0.2223810344533744, 0.1012285362903771};
        auto rule = [&](double mid, double half, auto at) {
            double sum = 0.0;
            for (int k = 0; k < 4; ++k)
                sum += weight[k] * (at(mid - half * node[k]) + at(mid + half * node[k]));
            return sum * half;
        };
        if (!(a > 0.0)) // from age 0: in t
            return rule(0.5 * (a + b), 0.5 * (b - a),
                        [&](double tk) { return g(tk, c_.planet.log_xuv_flux(tk)); });
        const double ua = std::log(a), ub = std::log(b);
        return rule(0.5 * (ua + ub), 0.5 * (ub - ua), [&](double u) {
            const double tk = std::exp(u);
            return g(tk, c_.planet.log_xuv_flux(tk)) * tk;
        });
    }

    // The source of species i over [a, b] [particles]: constant or linear between the stops.
    double source_integral(std::size_t i, double a, double b) const {
        if (!has_sources_ || c_.sources.empty())
            return 0.0;
        return 0.5 * (c_.sources[i](a) + c_.sources[i](b)) * (b - a);
    }

    // All the diagnostics at (t, y) under `mode`.
    // `rates`: false leaves the escape and source rates NaN (not recorded).
    void snapshot(double t, const State& y, const Mode& mode, Snapshot& s, bool rates) {
        evaluate(t, y, mode);
        s.temperature = exobase_temperature_;
        s.flux = needs_flux_ ? std::exp(log_flux_) : nan;
        s.radius = state_.radius;
        s.planet_radius = planet_radius_;
        s.envelope_rate = !rates ? nan : mode.stripped ? 0.0 : envelope_rate_;
        s.regime = bulk_regime_;
        s.rate.resize(n_);
        s.lambda = lambda_;
        s.source.resize(n_);
        s.given.resize(n_);
        for (std::size_t i = 0; i < n_; ++i) {
            if (!rates) {
                s.rate[i] = s.source[i] = s.given[i] = nan;
                continue;
            }
            s.rate[i] = mode.frozen[i] ? 0.0 : rate_factor_[i] * std::exp(log_scaled_rate_[i]);
            s.source[i] = c_.sources.empty() ? 0.0 : c_.sources[i](t);
            s.given[i] = mode.frozen[i] || !has_given_ ? 0.0 : c_.given_losses[i](t, log_flux_);
        }
    }

    // Whether energy-limited loss acts in `regime`.
    bool energy_limited_in(Regime regime) const {
        if (!c_.hydrodynamic)
            return false;
        switch (c_.hydrodynamic->activation) {
        case HydrodynamicActivation::Always:
            return true;
        case HydrodynamicActivation::Transition:
            return regime == Regime::Transition || regime == Regime::Hydrodynamic;
        case HydrodynamicActivation::Hydrodynamic:
            return regime == Regime::Hydrodynamic;
        }
        return false;
    }

    // True when species i's loss vanishes with its inventory under `mode`; otherwise its
    // inventory would reach zero in finite time, where ln N is singular, so it is held at
    // depletion.
    bool loss_follows_inventory(std::size_t i, const State& y, const Mode& mode) {
        for (std::size_t j = 0; j < n_; ++j)
            log_fraction_[j] = y[j] - y0_[j];
        if (!c_.exobase->loss_follows_inventory(i, log_fraction_.data()))
            return false;
        if (!c_.given_losses.empty() && !c_.given_losses[i].is_zero())
            return false; // a given loss does not vanish with the inventory
        return !(mode.energy_limited && i == escaping_);
    }

    // Why a derivative is not finite, for error messages.
    std::string explain(std::size_t i, double t, const State& y) {
        evaluate(t, y, mode_);
        if (i >= n_)
            return "envelope: M_env / M_core = " + format_value(y[static_cast<Eigen::Index>(i)]) +
                   ", planet radius = " + format_value(planet_radius_) +
                   " m, envelope mass-loss rate = " + format_value(envelope_rate_) + " kg s^-1";
        return "species " + c_.species[i].name + ": ln N = " + format_value(y[i]) +
               ", ln Q = " + format_value(log_rate(i)) +
               ", Jeans parameter = " + format_value(lambda_[i]) +
               ", exobase temperature = " + format_value(exobase_temperature_) +
               " K, exobase radius = " + format_value(state_.radius) + " m";
    }

  private:
    // The core, the bolometric flux of the radius fit, and the planet at t_start.
    void setup_envelope(const EnvelopeConfig& e) {
        envelope_ = true;
        core_mass_ = e.core_mass;
        core_radius_ = core_radius(e.core_mass);
        const double a = c_.planet.semi_major_axis();
        bolometric_flux_ = c_.planet.star().luminosity() / (4.0 * constants::pi * a * a);
        update_planet(c_.t_start, envelope_start());
        initial_radius_ = planet_radius_;
    }

    // Planet mass and radius with envelope state x = M_env / M_core at stellar age t.
    void update_planet(double t, double x) {
        const double m_env = x > 0.0 && std::isfinite(x) ? x * core_mass_ : 0.0;
        planet_mass_ = core_mass_ + m_env;
        planet_radius_ = core_radius_ + envelope_radius(m_env / planet_mass_, planet_mass_,
                                                        bolometric_flux_, t, c_.envelope->opacity);
    }

    void setup_hydrodynamic(const HydrodynamicOptions& h) {
        const Planet& p = c_.planet;
        xuv_radius_ = h.xuv_radius > 0.0 ? h.xuv_radius : planet_radius_;
        // An absorbing layer at a fixed temperature has a fixed radius: found once.
        if (h.absorption && h.absorption->temperature > 0.0)
            xuv_radius_ = absorption_radius(h.absorption->temperature);
        roche_ = 1.0;
        if (h.roche_lobe)
            roche_ = roche_lobe_factor(roche_lobe_ratio(planet_mass_, p.star().mass(),
                                                        p.semi_major_axis(), planet_radius_));
        escaping_ = 0;
        if (h.escaping_species.empty()) {
            for (std::size_t i = 1; i < n_; ++i)
                if (mass_[i] < mass_[escaping_])
                    escaping_ = i;
        } else {
            for (std::size_t i = 0; i < n_; ++i)
                if (c_.species[i].name == h.escaping_species)
                    escaping_ = i;
        }
        laws_.assign(n_, DiffusionLaw{});
        listed_.assign(n_, 0);
        for (const auto& [name, law] : h.diffusion)
            for (std::size_t i = 0; i < n_; ++i)
                if (c_.species[i].name == name) {
                    laws_[i] = law;
                    listed_[i] = 1;
                }
        mole_fraction_.resize(n_);
        diffusion_.resize(n_);
        partition_.resize(n_);
    }

    void evaluate(double t, const State& y, const Mode& mode) {
        // The last stage of a Dormand–Prince step is the step's end (first same as last), where
        // regime checks and output ask again: reuse it.
        if (cached_ && t == cached_t_ && mode.energy_limited == cached_energy_limited_ &&
            y == cached_y_)
            return;
        cached_ = false;
        ++evaluations_;
        if (envelope_)
            update_planet(t, y[static_cast<Eigen::Index>(n_)]);
        // In logs: the saturated-then-decaying flux and the power-law temperature take one
        // logarithm and one exponential instead of two powers.
        log_flux_ = needs_flux_ ? c_.planet.log_xuv_flux(t) : nan;
        temperature_ = c_.temperature.at_log_flux(t, log_flux_, &log_temperature_);
        for (std::size_t i = 0; i < n_; ++i)
            log_fraction_[i] = y[i] - y0_[i];
        c_.exobase->evaluate(t, log_fraction_.data(), temperature_, state_);
        if (envelope_) // a prescribed exobase keeps its height above the evolving planet
            state_.radius += planet_radius_ - initial_radius_;
        // No exobase: the gas flows out. Energy-limited loss (regime hydrodynamic) takes over
        // when the option is on; without it the model has nothing to say.
        if (state_.outflow && !c_.hydrodynamic)
            throw NumericalError(state_.outflow_reason +
                                 " (a sign of hydrodynamic outflow: turn on energy-limited "
                                 "escape (the hydrodynamic option), or give a larger "
                                 "outer_radius)");
        const double r = state_.radius;
        exobase_temperature_ = state_.temperature;
        const double kT = k_B * exobase_temperature_;
        const double gm_over_ktr = G * planet_mass_ / (kT * r);
        if (r != area_radius_) { // a prescribed exobase keeps its radius: one logarithm
            area_radius_ = r;
            log_area_ = log_area_factor_ + 2.0 * std::log(r);
        }
        const double log_area = log_area_;
        if (kT != log_kT_at_) { // likewise a constant or clamped temperature
            log_kT_at_ = kT;
            // The power law gives ln T itself where the exobase keeps its temperature.
            half_log_2kT_ = exobase_temperature_ == temperature_ && !std::isnan(log_temperature_)
                                ? 0.5 * (log_2k_ + log_temperature_)
                                : 0.5 * std::log(2.0 * kT);
        }
        const double half_log_2kT = half_log_2kT_;
        jeans_scale_ = state_.outflow ? 0.0 : gm_over_ktr;
        std::size_t densest = 0;
        for (std::size_t i = 0; i < n_; ++i) {
            const double lambda = gm_over_ktr * mass_[i];
            lambda_[i] = lambda;
            if (state_.has_escape_rates) {
                log_scaled_rate_[i] = state_.log_escape_rate[i];
                rate_factor_[i] = 1.0;
            } else {
                // 4 pi r^2 Phi_J = (1 + lambda) e^(ln q), with ln v0 from per-step and
                // per-species halves; the form of log_jeans_flux_unchecked without ln(1 + lambda).
                const double log_v0 = half_log_2kT - half_log_mass_[i];
                const bool finite = lambda < 1e300; // else (1 + lambda) e^(-lambda) is 0
                double log_q =
                    log_area + state_.log_density[i] + log_v0 + log_inv_two_sqrt_pi - lambda;
                if (!c_.tail.is_identity())
                    log_q += std::log(c_.tail(lambda));
                log_scaled_rate_[i] = log_q;
                rate_factor_[i] = finite ? 1.0 + lambda : 1.0;
            }
            if (state_.log_density[i] > state_.log_density[densest])
                densest = i;
        }
        bulk_regime_ = state_.outflow ? Regime::Hydrodynamic
                                      : classify_regime(lambda_[densest], c_.thresholds);
        envelope_rate_ = 0.0;
        if (mode.energy_limited)
            apply_energy_limited(y);
        cached_t_ = t;
        cached_y_ = y;
        cached_energy_limited_ = mode.energy_limited;
        cached_ = true;
    }

    double jeans_scale_ = 0.0; // G M / (k T r) [kg^-1]: lambda_i = m_i times it; 0: outflow
    double area_radius_ = 0.0, log_area_ = 0.0;   // ln(4 pi r^2) at radius area_radius_
    double log_kT_at_ = 0.0, half_log_2kT_ = 0.0; // ln(2 kT) / 2 at kT = log_kT_at_
    bool cached_ = false;
    bool cached_energy_limited_ = false;
    double cached_t_ = 0.0;
    State cached_y_;

    // Radius of XUV optical depth one of the absorption model at temperature T [K].
    double absorption_radius(double temperature) const {
        const XuvAbsorption& a = *c_.hydrodynamic->absorption;
        const double h =
            scale_height(temperature, a.mean_molecular_mass, planet_mass_, planet_radius_);
        return xuv_absorption_radius(planet_radius_, a.base_density, h, a.cross_section, a.chord);
    }

    // Energy-limited loss of the light species, shared with the species it drags; a dragged
    // species keeps its Jeans rate where that is larger. With the absorption model the XUV is
    // absorbed at its radius (at the exobase temperature unless a temperature is given); with
    // the recombination limit the smaller of the energy-limited and recombination-limited
    // rates applies (xuv_driven_mass_loss, Murray-Clay et al. 2009); with the transonic wind
    // the smaller of that and the wind's rate from its base at the planet radius.
    void apply_energy_limited(const State& y) {
        const HydrodynamicOptions& h = *c_.hydrodynamic;
        double xuv_radius = xuv_radius_, roche = roche_;
        if (h.absorption && (envelope_ || !(h.absorption->temperature > 0.0)))
            xuv_radius = absorption_radius(
                h.absorption->temperature > 0.0 ? h.absorption->temperature : exobase_temperature_);
        if (envelope_) { // the planet's radius and mass evolve: so do R_xuv and K
            if (!h.absorption && !(h.xuv_radius > 0.0))
                xuv_radius = planet_radius_;
            if (h.roche_lobe)
                roche = roche_lobe_factor(roche_lobe_ratio(planet_mass_, c_.planet.star().mass(),
                                                           c_.planet.semi_major_axis(),
                                                           planet_radius_));
        }
        const double flux = std::exp(log_flux_);
        const double driven =
            h.recombination
                ? xuv_driven_mass_loss(h.efficiency, planet_radius_, xuv_radius, flux, planet_mass_,
                                       roche, h.recombination->temperature,
                                       h.recombination->recombination_coefficient,
                                       h.recombination->photon_energy)
                : energy_limited_mass_loss(h.efficiency, planet_radius_, xuv_radius, flux,
                                           planet_mass_, roche);
        const double mass_loss = h.transonic ? std::min(driven, transonic_mass_loss()) : driven;
        envelope_rate_ = mass_loss;
        double y_max = -inf;
        for (std::size_t i = 0; i < n_; ++i)
            y_max = std::max(y_max, y[i]);
        double sum = 0.0;
        for (std::size_t i = 0; i < n_; ++i)
            sum += std::exp(y[i] - y_max);
        for (std::size_t i = 0; i < n_; ++i) {
            mole_fraction_[i] = std::exp(y[i] - y_max) / sum;
            if (listed_[i])
                diffusion_[i] = laws_[i](exobase_temperature_);
            else if (h.drag && i != escaping_ && mass_[i] >= mass_[escaping_])
                diffusion_[i] = binary_diffusion_parameter(c_.species[i], c_.species[escaping_],
                                                           exobase_temperature_);
            else
                diffusion_[i] = 0.0;
        }
        partition_mass_loss(mass_loss, exobase_temperature_, planet_mass_, escaping_, mass_.data(),
                            mole_fraction_.data(), diffusion_.data(), n_, partition_.data());
        for (std::size_t i = 0; i < n_; ++i) {
            const double lp = partition_[i] > 0.0 ? std::log(partition_[i]) : -inf;
            log_scaled_rate_[i] = i == escaping_ ? lp : std::max(log_rate(i), lp);
            rate_factor_[i] = 1.0;
        }
        // A vanishing mole fraction makes the shared rate 0 * inf: rebuild it in logs.
        if (!(mole_fraction_[escaping_] > 0.0))
            log_scaled_rate_[escaping_] = -inf;
    }

    // Mass-loss rate of the transonic wind [kg s^-1] from its base at the planet radius, of the
    // escaping species' mass unless a mean molecular mass is given.
    double transonic_mass_loss() const {
        const TransonicWind& w = *c_.hydrodynamic->transonic;
        const double m = w.mean_molecular_mass > 0.0 ? w.mean_molecular_mass : mass_[escaping_];
        return parker_mass_loss(planet_radius_, w.base_density, w.temperature, m, planet_mass_);
    }

    // ln Q_i of the last evaluation.
    double log_rate(std::size_t i) const { return log_scaled_rate_[i] + std::log(rate_factor_[i]); }

    const EvolutionConfig& c_;
    std::size_t n_;
    std::vector<double> y0_, mass_, half_log_mass_, log_fraction_, lambda_;
    std::vector<double> log_scaled_rate_, rate_factor_; // Q_i = rate_factor_i e^(log_scaled_i)
    ExobaseState state_;
    bool needs_flux_ = false;
    bool has_sources_ = false;
    bool has_given_ = false; // any species has a given loss
    double log_area_factor_ = 0.0;
    double log_flux_ = nan, temperature_ = 0.0, log_temperature_ = nan, exobase_temperature_ = 0.0;
    const double log_2k_ = std::log(2.0 * k_B);
    Regime bulk_regime_ = Regime::Jeans;
    Mode mode_;
    std::size_t evaluations_ = 0;
    // energy-limited option
    double xuv_radius_ = 0.0, roche_ = 1.0;
    std::size_t escaping_ = 0;
    std::vector<DiffusionLaw> laws_;
    std::vector<char> listed_;
    std::vector<double> mole_fraction_, diffusion_, partition_;
    // The planet (evolving with an envelope) and the envelope.
    double planet_mass_ = 0.0, planet_radius_ = 0.0;
    bool envelope_ = false;
    double core_mass_ = 0.0, core_radius_ = 0.0, bolometric_flux_ = 0.0, initial_radius_ = 0.0;
    double envelope_rate_ = 0.0; // -dM_env/dt of the last evaluation [kg s^-1]

  public:
    void enable_sources(bool on) { has_sources_ = on; }

    // True when the energy-limited rate is a fixed function of the XUV flux: energy-limited loss
    // on, no envelope (a fixed planet) and no absorption layer at the evolving exobase
    // temperature.
    bool rate_laws_fixed() const {
        const auto& h = c_.hydrodynamic;
        return h && !envelope_ && !(h->absorption && !(h->absorption->temperature > 0.0));
    }

    // XUV flux [W m^-2] where the recombination limit takes over from the energy-limited rate,
    // where both are fixed functions of the flux (no absorption layer at the evolving exobase
    // temperature); NaN otherwise.
    double recombination_switch_flux() const {
        if (!rate_laws_fixed() || !c_.hydrodynamic->recombination)
            return nan;
        const HydrodynamicOptions& h = *c_.hydrodynamic;
        const RecombinationLimit& r = *h.recombination;
        return recombination_transition_flux(h.efficiency, planet_radius_, xuv_radius_,
                                             planet_mass_, roche_, r.temperature,
                                             r.recombination_coefficient, r.photon_energy);
    }

    // XUV flux [W m^-2] where the transonic wind's rate meets the energy-limited (or XUV-driven)
    // one, where both are fixed (no envelope, no absorption layer at the evolving exobase
    // temperature): the first is constant, the second a F, or min(a F, b F^(1/2)) with the
    // recombination limit; NaN otherwise.
    double transonic_switch_flux() const {
        if (!rate_laws_fixed() || !c_.hydrodynamic->transonic)
            return nan;
        const HydrodynamicOptions& h = *c_.hydrodynamic;
        const double wind = transonic_mass_loss();
        const double a = energy_limited_mass_loss(h.efficiency, planet_radius_, xuv_radius_, 1.0,
                                                  planet_mass_, roche_);
        const double linear = wind / a;
        if (!h.recombination)
            return linear;
        const RecombinationLimit& r = *h.recombination;
        if (!(linear > recombination_switch_flux())) // met on the energy-limited part
            return linear;
        const double b =
            recombination_limited_mass_loss(1.0, planet_mass_, planet_radius_, r.temperature,
                                            r.recombination_coefficient, r.photon_energy);
        return (wind / b) * (wind / b);
    }
};

// The system functor handed to odeint: a pointer, so that copies are cheap.
struct Rhs {
    Model* model;
    void operator()(const State& y, State& dydt, double t) const { model->rhs(y, dydt, t); }
};

// One adaptive step at a time, with dense output on the last accepted step.
class Stepper {
  public:
    virtual ~Stepper() = default;
    //! Try a step of size h from (t, y, dydt). On success fill y_new and dydt_new (at t + h) and
    //! return true; either way set h_next to the next proposed step size.
    virtual bool try_step(double t, const State& y, const State& dydt, double h, State& y_new,
                          State& dydt_new, double& h_next) = 0;
    //! State at tq in [t, t + h] of the last accepted step.
    virtual void dense(double tq, State& out, double t, const State& y, const State& dydt,
                       double t_end, const State& y_new, const State& dydt_new) = 0;
    //! State at tq from a single step of the method from (t, y); false where not offered.
    virtual bool direct(double, State&, double, const State&, const State&) { return false; }
};

// Dormand–Prince 5(4), explicit, with its fourth-order dense output (the default).
class DopriStepper final : public Stepper {
  public:
    DopriStepper(Model& model, const LogErrorChecker& checker)
        : system_{&model}, stepper_(checker), direct_dydt_(model.state_size()) {}

    bool try_step(double t, const State& y, const State& dydt, double h, State& y_new,
                  State& dydt_new, double& h_next) override {
        double t_try = t;
        h_next = h;
        return stepper_.try_step(system_, y, dydt, t_try, y_new, dydt_new, h_next) ==
               odeint::success;
    }
    void dense(double tq, State& out, double t, const State& y, const State& dydt, double t_end,
               const State& y_new, const State& dydt_new) override {
        stepper_.stepper().calc_state(tq, out, y, dydt, t, y_new, dydt_new, t_end);
    }
    bool direct(double tq, State& out, double t, const State& y, const State& dydt) override {
        // A separate stepper: the dense output reads the stages the last step left behind.
        direct_.do_step(system_, y, dydt, t, out, direct_dydt_, tq - t);
        return true;
    }

  private:
    Rhs system_;
    Controlled stepper_;
    Dopri5 direct_;
    State direct_dydt_;
};

// Rosenbrock 4(3) (Odeint's rosenbrock4), linearly implicit, with a Jacobian by finite
// differences: for stiff balances such as a source against a fast loss, where the explicit pair
// is held to steps of the relaxation time. Time is carried as an extra state s = t / scale
// (s' = 1 / scale): measured on dy/dt = -k(t), Odeint's rosenbrock4 with the time derivative
// df/dt took 8842 steps and reached only 3e-4 at a tolerance of 1e-8, the autonomous form 174
// steps and 1e-10.
class RosenbrockStepper final : public Stepper {
  public:
    using Vector = boost::numeric::ublas::vector<double>;
    using Matrix = boost::numeric::ublas::matrix<double>;

    RosenbrockStepper(Model& model, const LogErrorChecker& checker, std::size_t n)
        : model_(model), checker_(checker), n_(n), x_(n + 1), x_new_(n + 1), x_err_(n + 1),
          f0_(n + 1), f1_(n + 1), old_(n + 1), new_(n + 1), probe_x_(n + 1), probe_(n), deriv_(n),
          err_(n) {}

    bool try_step(double t, const State& y, const State&, double h, State& y_new, State& dydt_new,
                  double& h_next) override {
        const double scale = std::max(std::abs(t), h);
        for (std::size_t i = 0; i < n_; ++i)
            x_[i] = y[index(i)];
        x_[n_] = t / scale;
        auto rhs = [this, scale](const Vector& x, Vector& dxdt, double) {
            for (std::size_t i = 0; i < n_; ++i)
                probe_[index(i)] = x[i];
            model_.rhs(probe_, deriv_, x[n_] * scale);
            for (std::size_t i = 0; i < n_; ++i)
                dxdt[i] = deriv_[index(i)];
            dxdt[n_] = 1.0 / scale;
        };
        auto jacobian = [this, &rhs](const Vector& x, Matrix& J, double time, Vector& dfdt) {
            rhs(x, f0_, time);
            Vector xp = x;
            for (std::size_t j = 0; j <= n_; ++j) {
                const double delta = 1e-7 * std::max(1.0, std::abs(x[j]));
                xp[j] = x[j] + delta;
                rhs(xp, f1_, time);
                for (std::size_t i = 0; i <= n_; ++i)
                    J(i, j) = (f1_[i] - f0_[i]) / delta;
                xp[j] = x[j];
            }
            for (std::size_t i = 0; i <= n_; ++i)
                dfdt[i] = 0.0; // autonomous
        };
        stepper_.do_step(std::make_pair(rhs, jacobian), x_, t, x_new_, h, x_err_);
        for (std::size_t i = 0; i < n_; ++i) {
            y_new[index(i)] = x_new_[i];
            err_[index(i)] = x_err_[i];
        }
        odeint::vector_space_algebra algebra;
        const double e = checker_.error(algebra, y, y, err_, h);
        if (!(e <= 1.0)) {
            h_next = h * std::max(0.2, 0.9 * std::pow(e, -1.0 / 3.0));
            return false;
        }
        h_next = h * std::min(5.0, 0.9 * std::pow(std::max(e, 1e-10), -0.25));
        stepper_.prepare_dense_output();
        old_ = x_;
        new_ = x_new_;
        model_.rhs(y_new, dydt_new, t + h);
        return true;
    }
    void dense(double tq, State& out, double t, const State&, const State&, double t_end,
               const State&, const State&) override {
        stepper_.calc_state(tq, probe_x_, old_, t, new_, t_end);
        for (std::size_t i = 0; i < n_; ++i)
            out[index(i)] = probe_x_[i];
    }

  private:
    static Eigen::Index index(std::size_t i) { return static_cast<Eigen::Index>(i); }

    Model& model_;
    LogErrorChecker checker_;
    std::size_t n_;
    odeint::rosenbrock4<double> stepper_;
    Vector x_, x_new_, x_err_, f0_, f1_, old_, new_, probe_x_;
    State probe_, deriv_, err_;
};

// Collects the output time series.
class Recorder {
  public:
    Recorder(EvolutionResult& r, std::size_t n,
             const std::vector<std::pair<std::size_t, std::size_t>>& ratios)
        : r_(r), n_(n), ratios_(ratios) {}

    void reserve(std::size_t times) {
        r_.time.reserve(times);
        for (auto* v : {&r_.inventory, &r_.escape_rate, &r_.source_rate, &r_.given_loss_rate,
                        &r_.jeans_parameter})
            v->reserve(times * n_);
        for (auto* v : {&r_.exobase_radius, &r_.exobase_temperature, &r_.xuv_flux})
            v->reserve(times);
        r_.regime.reserve(times);
        r_.energy_limited.reserve(times);
        if (r_.has_envelope())
            for (auto* v : {&r_.envelope_mass, &r_.planet_radius, &r_.envelope_loss_rate})
                v->reserve(times);
        r_.isotope_ratio.reserve(times * ratios_.size());
    }

    void record(double t, const State& y, const Snapshot& s, bool energy_limited) {
        r_.time.push_back(t);
        const std::size_t at = r_.inventory.size();
        r_.inventory.resize(at + n_);
        exp_each(y.data(), r_.inventory.data() + at, n_);
        for (std::size_t i = 0; i < n_; ++i) {
            r_.escape_rate.push_back(s.rate[i]);
            r_.source_rate.push_back(s.source[i]);
            r_.given_loss_rate.push_back(s.given[i]);
            r_.jeans_parameter.push_back(s.lambda[i]);
        }
        r_.exobase_radius.push_back(s.radius);
        r_.exobase_temperature.push_back(s.temperature);
        r_.xuv_flux.push_back(s.flux);
        r_.regime.push_back(static_cast<int>(s.regime));
        r_.energy_limited.push_back(energy_limited ? 1 : 0);
        for (const auto& [a, b] : ratios_)
            r_.isotope_ratio.push_back(std::exp(y[a] - y[b]));
        if (r_.has_envelope()) {
            const double x = y[static_cast<Eigen::Index>(n_)];
            r_.envelope_mass.push_back(x > 0.0 ? x * r_.core_mass : 0.0);
            r_.planet_radius.push_back(s.planet_radius);
            r_.envelope_loss_rate.push_back(s.envelope_rate);
        }
    }

  private:
    EvolutionResult& r_;
    std::size_t n_;
    const std::vector<std::pair<std::size_t, std::size_t>>& ratios_;
};

std::size_t index_of(const std::vector<Species>& species, const std::string& name,
                     const char* what) {
    for (std::size_t i = 0; i < species.size(); ++i)
        if (species[i].name == name)
            return i;
    std::string names;
    for (const Species& s : species)
        names += (names.empty() ? "" : ", ") + s.name;
    throw InputError(std::string(what) + " '" + name + "' is not among the species (" + names +
                     ")");
}

// Bisection for the first time in [lo, hi] where `changed(t)` holds (it holds at hi, not at
// lo), to the resolution of doubles.
template <class Pred> double locate(double lo, double hi, Pred changed) {
    for (int k = 0;
         k < 200 && hi - lo > 4.0 * std::numeric_limits<double>::epsilon() * std::abs(hi); ++k) {
        const double mid = 0.5 * (lo + hi);
        if (mid <= lo || mid >= hi)
            break;
        if (changed(mid))
            hi = mid;
        else
            lo = mid;
    }
    return hi;
}

// The first time in [lo, hi] where the smooth `level(t)` falls below zero (>= 0 at lo, < 0 at
// hi), by TOMS 748 (Alefeld, Potra & Shi 1995): about 8 evaluations of the dense output where
// bisection to the same resolution takes about 50. Returns a time where level < 0.
template <class Level> double locate_crossing(double lo, double hi, Level level) {
    const double f_lo = level(lo), f_hi = level(hi);
    if (!(f_lo > 0.0) || !(f_hi < 0.0))
        return locate(lo, hi, [&](double t) { return level(t) < 0.0; });
    std::uintmax_t iterations = 100;
    const auto bracket = boost::math::tools::toms748_solve(
        level, lo, hi, f_lo, f_hi, boost::math::tools::eps_tolerance<double>(50), iterations);
    return level(bracket.second) < 0.0
               ? bracket.second
               : locate(bracket.second, hi, [&](double t) { return level(t) < 0.0; });
}

// The scale G M / (k T r) of the Jeans parameters at times within a step (every evaluation
// made while locating regime changes), so that the changes of several species, which are
// crossings of the same smooth function at different levels, share their evaluations: each
// search starts from the tightest bracket known.
class ScaleProbes {
  public:
    void reset(double t0, double u0, double t1, double u1) { points_.assign({{t0, u0}, {t1, u1}}); }
    void add(double t, double u) {
        auto at = std::lower_bound(points_.begin(), points_.end(), std::make_pair(t, -inf));
        if (at == points_.end() || at->first != t)
            points_.insert(at, {t, u});
    }
    // The first time in [from, end of step] where m u(t) - threshold changes sign from >= 0
    // (`down`) or from <= 0 (up), by TOMS 748 from the tightest known bracket; `scale(t)`
    // evaluates u (and is recorded).
    template <class Scale>
    double locate(double from, double m, double threshold, bool down, Scale scale) {
        auto level = [&](double u) { return down ? m * u - threshold : threshold - m * u; };
        std::size_t lo = 0;
        while (lo + 1 < points_.size() && points_[lo + 1].first <= from)
            ++lo;
        if (lo + 1 >= points_.size()) // from the step's end: nothing left to search
            return points_.back().first;
        std::size_t hi = lo + 1;
        while (hi + 1 < points_.size() && level(points_[hi].second) >= 0.0)
            ++hi;
        double a = std::max(from, points_[hi - 1].first), b = points_[hi].first;
        double fa = level(a == points_[hi - 1].first ? points_[hi - 1].second : scale(a));
        const double fb = level(points_[hi].second);
        if (!(fa >= 0.0) || !(fb < 0.0)) // not bracketed (a change that returns): the end
            return b;
        if (fa == 0.0)
            return a;
        std::uintmax_t iterations = 100;
        auto f = [&](double t) {
            const double u = scale(t);
            add(t, u);
            return level(u);
        };
        const auto bracket = boost::math::tools::toms748_solve(
            f, a, b, fa, fb, boost::math::tools::eps_tolerance<double>(50), iterations);
        return bracket.second;
    }

  private:
    std::vector<std::pair<double, double>> points_;
};

// Where each species' time and loss went: the time in each regime, and its loss split into the
// Jeans formula's in each regime, energy-limited loss and given loss. Losses are kept as
// fractions of N_i(t_start) while running; over a stretch [a, b] of one regime and one mode the
// loss is N_i(a) - N_i(b) plus the source over it (exact for the integrated inventories, so
// the parts sum to the inventory's fall), the given loss its quadrature (at most the whole).
class RegimeLedger {
  public:
    static constexpr std::size_t regimes = 4;

    RegimeLedger(std::size_t n, const std::vector<double>& y0)
        : n_(n), y0_(y0), inverse_n0_(n), time_(n * regimes, 0.0), loss_(n * regimes, 0.0),
          energy_(n, 0.0), given_(n, 0.0), bulk_(regimes, 0.0), regime_(n, 0) {
        for (std::size_t i = 0; i < n; ++i)
            inverse_n0_[i] = std::exp(-y0[i]);
    }

    std::vector<int>& regime() { return regime_; } //!< each species' regime now
    std::vector<double>& bulk_time() { return bulk_; }

    // Species i spent [a, b] in `regime`, ln N going from ya to yb; `source` and `given` are its
    // source and given loss over the stretch [particles].
    void add(std::size_t i, int regime, bool energy_limited, double a, double b, double ya,
             double yb, double source, double given) {
        const double fall = -std::exp(ya - y0_[i]) * std::expm1(yb - ya); // (N(a) - N(b)) / N0
        add_fall(i, regime, energy_limited, a, b, fall, source, given);
    }

    // As add(), with the fall (N(a) - N(b)) / N0 given (step_falls: every species at once).
    void add_fall(std::size_t i, int regime, bool energy_limited, double a, double b, double fall,
                  double source, double given) {
        time_[i * regimes + static_cast<std::size_t>(regime)] += b - a;
        const double scale = inverse_n0_[i];
        const double total = std::max(0.0, fall + source * scale);
        const double given_part = std::min(total, given * scale);
        const double thermal = total - given_part;
        given_[i] += given_part;
        if (energy_limited)
            energy_[i] += thermal;
        else
            loss_[i * regimes + static_cast<std::size_t>(regime)] += thermal;
    }

    // Fill the result's fields (losses in particles).
    void finish(EvolutionResult& r) const {
        r.regime_time = time_;
        r.regime_loss.resize(n_ * regimes);
        r.energy_limited_loss.resize(n_);
        r.given_loss.resize(n_);
        r.non_jeans_loss_share.resize(n_);
        for (std::size_t i = 0; i < n_; ++i) {
            const double n0 = std::exp(y0_[i]);
            double total = energy_[i] + given_[i];
            for (std::size_t k = 0; k < regimes; ++k) {
                r.regime_loss[i * regimes + k] = loss_[i * regimes + k] * n0;
                total += loss_[i * regimes + k];
            }
            r.energy_limited_loss[i] = energy_[i] * n0;
            r.given_loss[i] = given_[i] * n0;
            r.non_jeans_loss_share[i] = total > 0.0 ? (total - loss_[i * regimes]) / total : 0.0;
        }
        r.bulk_regime_time = bulk_;
    }

  private:
    std::size_t n_;
    std::vector<double> y0_, inverse_n0_, time_, loss_, energy_, given_, bulk_; // 1/N0 = e^(-y0)
    std::vector<int> regime_;
};

// Jeans-parameter bounds of regime k: it holds lambda in (lower, upper].
double regime_lower(int k, const RegimeThresholds& th) {
    const double lower[4] = {th.enhanced, th.transition, th.hydrodynamic, -inf};
    return lower[k];
}
double regime_upper(int k, const RegimeThresholds& th) {
    const double upper[4] = {inf, th.enhanced, th.transition, th.hydrodynamic};
    return upper[k];
}

} // namespace

SourceRate::SourceRate(double rate) : rate_(rate) {
    require_non_negative("source rate", rate);
}

SourceRate::SourceRate(std::vector<double> times, std::vector<double> rates) {
    for (std::size_t i = 0; i < rates.size(); ++i)
        if (!std::isfinite(rates[i]) || !(rates[i] >= 0.0))
            throw InputError("source table: rates[" + std::to_string(i) +
                             "] must be finite and >= 0, got " + format_value(rates[i]));
    table_ = TimeTable(std::move(times), std::move(rates), "source table");
}

std::string SourceRate::to_json() const {
    if (table_.empty())
        return json_text({{"kind", "constant"}, {"rate_s-1", rate_}});
    return json_text(
        {{"kind", "table"}, {"times_s", table_.times()}, {"rates_s-1", table_.values()}});
}

GivenLoss::GivenLoss(double rate) : kind_(Kind::Constant), rate_(rate) {
    require_finite("given loss rate", rate);
    require_non_negative("given loss rate", rate);
}

GivenLoss::GivenLoss(std::vector<double> times, std::vector<double> rates) : kind_(Kind::Table) {
    for (std::size_t i = 0; i < rates.size(); ++i)
        if (!std::isfinite(rates[i]) || !(rates[i] >= 0.0))
            throw InputError("given loss table: rates[" + std::to_string(i) +
                             "] must be finite and >= 0 [s^-1], got " + format_value(rates[i]));
    table_ = TimeTable(std::move(times), std::move(rates), "given loss table");
}

GivenLoss GivenLoss::xuv_power_law(double reference_rate, double reference_flux, double exponent) {
    require_finite("given loss reference_rate", reference_rate);
    require_non_negative("given loss reference_rate", reference_rate);
    require_finite("given loss reference_flux", reference_flux);
    require_positive("given loss reference_flux", reference_flux);
    require_finite("given loss exponent", exponent);
    GivenLoss g;
    g.kind_ = Kind::XuvPowerLaw;
    g.rate_ = reference_rate;
    g.log_rate_ = reference_rate > 0.0 ? std::log(reference_rate) : 0.0;
    g.log_flux_ref_ = std::log(reference_flux);
    g.exponent_ = exponent;
    return g;
}

std::string GivenLoss::to_json() const {
    switch (kind_) {
    case Kind::None:
        return json_text({{"kind", "none"}});
    case Kind::Constant:
        return json_text({{"kind", "constant"}, {"rate_s-1", rate_}});
    case Kind::Table:
        return json_text(
            {{"kind", "table"}, {"times_s", table_.times()}, {"rates_s-1", table_.values()}});
    case Kind::XuvPowerLaw:
        return json_text({{"kind", "xuv_power_law"},
                          {"reference_rate_s-1", rate_},
                          {"reference_flux_W_m-2", std::exp(log_flux_ref_)},
                          {"exponent", exponent_}});
    }
    return "null";
}

void EnvelopeConfig::validate() const {
    if (!std::isfinite(core_mass) || !(core_mass > 0.0))
        throw InputError("envelope core_mass must be finite and > 0 [kg], got " +
                         format_value(core_mass));
    if (!std::isfinite(envelope_fraction) || !(envelope_fraction >= 0.0) ||
        !(envelope_fraction < 1.0))
        throw InputError("envelope envelope_fraction must be in [0, 1) [1], got " +
                         format_value(envelope_fraction));
    if (opacity != EnvelopeOpacity::Solar && opacity != EnvelopeOpacity::Enhanced)
        throw InputError("envelope opacity must be solar (0) or enhanced (1), got " +
                         std::to_string(static_cast<int>(opacity)));
}

void EvolutionConfig::validate() const {
    const std::size_t n = species.size();
    if (n == 0)
        throw InputError("inventory: at least one species is needed");
    if (!exobase)
        throw InputError("exobase: no exobase model given");
    const auto& names = exobase->species_names();
    if (names.size() != n)
        throw InputError("exobase model has " + std::to_string(names.size()) +
                         " species but the inventory has " + std::to_string(n));
    for (std::size_t i = 0; i < n; ++i) {
        if (names[i] != species[i].name)
            throw InputError("exobase model species[" + std::to_string(i) + "] is '" + names[i] +
                             "' but the inventory's is '" + species[i].name + "'");
        exosieve::validate(species[i]);
        for (std::size_t j = 0; j < i; ++j)
            if (species[j].name == species[i].name)
                throw InputError("inventory: species '" + species[i].name + "' appears twice");
    }
    if (initial_inventory.size() != n)
        throw InputError("inventory: need one value per species, got " +
                         std::to_string(initial_inventory.size()) + " for " + std::to_string(n));
    for (std::size_t i = 0; i < n; ++i) {
        const double v = initial_inventory[i];
        if (!std::isfinite(v) || !(v > 0.0))
            throw InputError("inventory of " + species[i].name +
                             " must be finite and > 0 "
                             "[particles], got " +
                             format_value(v) +
                             (v == 0.0 ? " (the inventory is integrated in logarithms: give a "
                                         "small positive value for a species that starts absent)"
                                       : ""));
    }
    require_finite("t_span start", t_start);
    require_finite("t_span end", t_end);
    if (!(t_start >= 0.0))
        throw InputError("t_span start must be >= 0 [s], got " + format_value(t_start));
    if (!(t_end > t_start))
        throw InputError("t_span must be increasing: end " + format_value(t_end) +
                         " s is not after start " + format_value(t_start) + " s");
    for (std::size_t k = 0; k < t_eval.size(); ++k) {
        const double t = t_eval[k];
        if (!std::isfinite(t) || t < t_start || t > t_end)
            throw InputError("t_eval[" + std::to_string(k) + "] = " + format_value(t) +
                             " s is outside t_span [" + format_value(t_start) + ", " +
                             format_value(t_end) + "] s");
        if (k > 0 && !(t > t_eval[k - 1]))
            throw InputError("t_eval must be strictly increasing, got t_eval[" + std::to_string(k) +
                             "] = " + format_value(t) + " after " + format_value(t_eval[k - 1]));
    }
    if (!std::isfinite(rtol) || !(rtol > 0.0) || !(rtol < 1.0))
        throw InputError("rtol must be finite and in (0, 1), got " + format_value(rtol));
    if (rtol < 1e-13)
        throw InputError("rtol below 1e-13 cannot be met in double precision, got " +
                         format_value(rtol));
    if (!atol.empty() && atol.size() != n)
        throw InputError("atol: need one value per species or none, got " +
                         std::to_string(atol.size()) + " for " + std::to_string(n));
    for (std::size_t i = 0; i < atol.size(); ++i)
        require_positive(("atol of " + species[i].name).c_str(), atol[i]);
    if (!std::isfinite(depletion_fraction) || !(depletion_fraction > 0.0) ||
        !(depletion_fraction < 1.0))
        throw InputError("depletion_fraction must be in (0, 1), got " +
                         format_value(depletion_fraction));
    if (max_steps == 0)
        throw InputError("max_steps must be > 0");
    if (!sources.empty() && sources.size() != n)
        throw InputError("sources: need one per species or none, got " +
                         std::to_string(sources.size()) + " for " + std::to_string(n));
    if (!given_losses.empty() && given_losses.size() != n)
        throw InputError("given_losses: need one per species or none, got " +
                         std::to_string(given_losses.size()) + " for " + std::to_string(n));
    bool given_needs_flux = false;
    for (const GivenLoss& g : given_losses)
        given_needs_flux = given_needs_flux || g.needs_xuv_flux();
    thresholds.validate();
    // With an envelope the planet at t_start is the core and its envelope: the checks of the
    // exobase, the XUV radius and the Roche lobe below take that planet.
    std::optional<Planet> with_envelope;
    if (envelope) {
        envelope->validate();
        if (!planet.has_star())
            throw InputError("an envelope needs the planet's semi_major_axis and star (its "
                             "radius fit takes the bolometric flux, its loss the XUV flux)");
        if (!hydrodynamic)
            throw InputError("an envelope is lost at the hydrodynamic mass-loss rate: give the "
                             "hydrodynamic option (energy-limited escape)");
        if (hydrodynamic->recombination)
            throw InputError("an envelope with the recombination limit is not supported: the "
                             "evolving radius moves the switch between the two rates");
        if (!dynamic_cast<const PrescribedExobase*>(exobase.get()))
            throw InputError("an envelope needs a prescribed exobase: a thermosphere keeps the "
                             "planet mass and radius it was built with");
        if (!(t_start > 0.0))
            throw InputError("t_span start must be > 0 (a stellar age) with an envelope, got " +
                             format_value(t_start));
        const double a = planet.semi_major_axis();
        const double flux = planet.star().luminosity() / (4.0 * constants::pi * a * a);
        with_envelope.emplace(envelope->initial_planet_mass(),
                              envelope_planet_radius(envelope->core_mass,
                                                     envelope->envelope_fraction, flux, t_start,
                                                     envelope->opacity),
                              a, planet.star());
    }
    const Planet& start = with_envelope ? *with_envelope : planet;
    exobase->check(start);
    const bool needs_flux =
        temperature.needs_xuv_flux() || hydrodynamic.has_value() || given_needs_flux;
    if (needs_flux && !planet.has_star())
        throw InputError(std::string(temperature.needs_xuv_flux() ? "an XUV-driven exobase "
                                                                    "temperature"
                                     : hydrodynamic.has_value()
                                         ? "the hydrodynamic option"
                                         : "a given loss following the XUV flux") +
                         " needs the planet's semi_major_axis and star");
    if (needs_flux && !(t_start > 0.0))
        throw InputError("t_span start must be > 0 (a stellar age) when the XUV flux is used, "
                         "got " +
                         format_value(t_start));
    if (hydrodynamic) {
        hydrodynamic->validate();
        if (!hydrodynamic->escaping_species.empty())
            index_of(species, hydrodynamic->escaping_species, "escaping species");
        for (const auto& d : hydrodynamic->diffusion)
            index_of(species, d.first, "dragged species");
        if (hydrodynamic->xuv_radius > 0.0 && hydrodynamic->xuv_radius < start.radius())
            throw InputError("xuv_radius " + format_value(hydrodynamic->xuv_radius) +
                             " m is below the planet radius " + format_value(start.radius()) +
                             " m");
        if (hydrodynamic->roche_lobe)
            roche_lobe_factor(roche_lobe_ratio(start.mass(), start.star().mass(),
                                               start.semi_major_axis(), start.radius()));
    }
    for (const auto& [a, b] : isotope_ratios) {
        index_of(species, a, "isotope ratio numerator");
        index_of(species, b, "isotope ratio denominator");
    }
}

std::string EvolutionConfig::to_json() const {
    // With an envelope the planet is the core and its envelope, at the start.
    double mass = planet.mass(), radius = planet.radius();
    if (envelope && planet.has_star() && t_start > 0.0) {
        try {
            const double a = planet.semi_major_axis();
            mass = envelope->initial_planet_mass();
            radius =
                envelope_planet_radius(envelope->core_mass, envelope->envelope_fraction,
                                       planet.star().luminosity() / (4.0 * constants::pi * a * a),
                                       t_start, envelope->opacity);
        } catch (const InputError&) { // an invalid envelope: validate() says why
        }
    }
    Json planet_json = {{"mass_kg", mass}, {"radius_m", radius}};
    if (planet.has_star()) {
        const Star& s = planet.star();
        planet_json["semi_major_axis_m"] = planet.semi_major_axis();
        planet_json["star"] = {{"mass_kg", s.mass()},
                               {"luminosity_W", s.luminosity()},
                               {"xuv_saturation_ratio", s.xuv().saturation_ratio},
                               {"xuv_saturation_time_s", s.xuv().saturation_time},
                               {"xuv_decay_index", s.xuv().decay_index}};
    }
    std::vector<std::string> names;
    std::vector<double> masses;
    for (const Species& s : species) {
        names.push_back(s.name);
        masses.push_back(s.mass);
    }
    Json o = {{"model", "exosieve.evolve"},
              {"version", EXOSIEVE_VERSION},
              {"planet", planet_json},
              {"species", names},
              {"species_mass_kg", masses},
              {"initial_inventory", initial_inventory},
              {"exobase", exobase ? json_value(exobase->to_json()) : Json()},
              {"exobase_temperature", json_value(temperature.to_json())}};
    if (!given_losses.empty()) {
        Json given = Json::object();
        for (std::size_t i = 0; i < given_losses.size(); ++i)
            if (!given_losses[i].is_zero())
                given[species[i].name] = json_value(given_losses[i].to_json());
        o["given_losses"] = given;
    }
    if (!sources.empty()) {
        Json src = Json::object();
        for (std::size_t i = 0; i < sources.size(); ++i)
            if (!sources[i].is_zero())
                src[species[i].name] = json_value(sources[i].to_json());
        o["sources"] = src;
    }
    if (hydrodynamic) {
        const HydrodynamicOptions& h = *hydrodynamic;
        Json diff = Json::object();
        for (const auto& [name, law] : h.diffusion)
            diff[name] = {{"coefficient_m-1_s-1", law.coefficient},
                          {"temperature_exponent", law.exponent}};
        const char* act = h.activation == HydrodynamicActivation::Always       ? "always"
                          : h.activation == HydrodynamicActivation::Transition ? "transition"
                                                                               : "hydrodynamic";
        Json hj = {{"efficiency", h.efficiency}};
        if (h.absorption) {
            const XuvAbsorption& a = *h.absorption;
            hj["absorption"] = {{"base_density_m-3", a.base_density},
                                {"cross_section_m2", a.cross_section},
                                {"mean_molecular_mass_kg", a.mean_molecular_mass},
                                {"temperature_K", a.temperature},
                                {"chord", a.chord}};
        } else {
            if (h.xuv_radius > 0.0 || !envelope)
                hj["xuv_radius_m"] = h.xuv_radius > 0.0 ? h.xuv_radius : planet.radius();
            else
                hj["xuv_radius"] = "the evolving planet radius";
        }
        if (h.recombination)
            hj["recombination_limit"] = {
                {"temperature_K", h.recombination->temperature},
                {"recombination_coefficient_m3_s-1", h.recombination->recombination_coefficient},
                {"photon_energy_J", h.recombination->photon_energy}};
        if (h.transonic) {
            Json w = {{"temperature_K", h.transonic->temperature},
                      {"base_density_m-3", h.transonic->base_density}};
            if (h.transonic->mean_molecular_mass > 0.0)
                w["mean_molecular_mass_kg"] = h.transonic->mean_molecular_mass;
            else
                w["mean_molecular_mass"] = "the escaping species' mass";
            w["base_radius"] = "the planet radius";
            hj["transonic_wind"] = w;
        }
        hj["roche_lobe"] = h.roche_lobe;
        hj["drag"] = h.drag;
        hj["escaping_species"] = h.escaping_species;
        hj["activation"] = act;
        hj["diffusion"] = diff;
        o["hydrodynamic"] = hj;
    }
    if (envelope)
        o["envelope"] = {
            {"core_mass_kg", envelope->core_mass},
            {"envelope_fraction", envelope->envelope_fraction},
            {"opacity", envelope->opacity == EnvelopeOpacity::Enhanced ? "enhanced" : "solar"},
            {"radius", "Lopez & Fortney (2014) fit"}};
    o["regime_thresholds"] = {{"enhanced", thresholds.enhanced},
                              {"transition", thresholds.transition},
                              {"hydrodynamic", thresholds.hydrodynamic}};
    if (!tail.is_identity()) {
        if (tail.table_jeans_parameter().empty())
            o["tail_depletion"] = tail.constant();
        else
            o["tail_depletion"] = {{"jeans_parameter", tail.table_jeans_parameter()},
                                   {"factor", tail.table_factor()}};
    }
    std::vector<std::string> ratio_names;
    for (const auto& [a, b] : isotope_ratios)
        ratio_names.push_back(a + "/" + b);
    o["t_span_s"] = {t_start, t_end};
    o["rtol"] = rtol;
    o["atol"] = atol.empty() ? Json() : Json(atol);
    o["depletion_fraction"] = depletion_fraction;
    o["max_steps"] = max_steps;
    o["isotope_ratios"] = ratio_names;
    o["stepper"] = stepper_name(stepper);
    o["integrator"] = "Boost.Odeint on ln N with dense output";
    return json_text(o);
}

std::vector<std::pair<std::string, std::string>>
default_isotope_ratios(const std::vector<std::string>& species) {
    static const std::pair<const char*, const char*> known[] = {
        {"D", "H"}, {"HD", "H2"}, {"3He", "He"}, {"36Ar", "38Ar"}, {"40Ar", "36Ar"}};
    std::vector<std::pair<std::string, std::string>> out;
    auto has = [&](const char* name) {
        return std::find(species.begin(), species.end(), name) != species.end();
    };
    for (const auto& [a, b] : known)
        if (has(a) && has(b))
            out.emplace_back(a, b);
    return out;
}

const char* stepper_name(StepperKind kind) {
    switch (kind) {
    case StepperKind::Dopri5:
        return "dopri5";
    case StepperKind::Rosenbrock4:
        return "rosenbrock4";
    case StepperKind::Auto:
        break;
    }
    return "auto";
}

EvolutionResult evolve(const EvolutionConfig& c) {
    c.validate();
    const std::size_t n = c.species.size();
    Model model(c);
    bool any_source = false;
    for (const SourceRate& s : c.sources)
        any_source = any_source || !s.is_zero();
    model.enable_sources(any_source);

    EvolutionResult r;
    for (const Species& s : c.species)
        r.species.push_back(s.name);
    std::vector<std::pair<std::size_t, std::size_t>> ratios;
    for (const auto& [a, b] : c.isotope_ratios) {
        ratios.emplace_back(index_of(c.species, a, "isotope ratio numerator"),
                            index_of(c.species, b, "isotope ratio denominator"));
        r.ratio_names.push_back(a + "/" + b);
    }
    r.depletion_time.assign(n, nan);
    r.initial_inventory = c.initial_inventory;
    for (const Species& s : c.species)
        r.species_mass.push_back(s.mass);
    if (c.record_config)
        r.config = c.to_json();
    // With an envelope the state has one more component, after the species: M_env / M_core.
    const bool envelope = model.has_envelope();
    const std::size_t n_state = model.state_size();
    const auto env = static_cast<Eigen::Index>(n); // its index
    if (envelope)
        r.core_mass = model.core_mass();
    Recorder recorder(r, n, ratios);
    if (!c.t_eval.empty())
        recorder.reserve(c.t_eval.size());

    // Tolerances in logs, and the depletion level of each species.
    State log_atol(n);
    std::vector<double> log_depleted(n);
    for (std::size_t i = 0; i < n; ++i) {
        // In logs: rtol * depletion_fraction * N0 can underflow to 0 for tiny factors.
        log_atol[i] = c.atol.empty()
                          ? std::log(c.rtol) + std::log(c.depletion_fraction) + model.y0()[i]
                          : std::log(c.atol[i]);
        log_depleted[i] = std::log(c.depletion_fraction) + model.y0()[i];
    }

    // Times where a history has a kink: no step straddles them.
    std::vector<double> stops = c.temperature.breakpoints(c.planet, c.t_start, c.t_end);
    for (const SourceRate& s : c.sources)
        for (double t : s.table().times())
            if (t > c.t_start && t < c.t_end)
                stops.push_back(t);
    bool given_needs_flux = false;
    for (const GivenLoss& g : c.given_losses) {
        given_needs_flux = given_needs_flux || g.needs_xuv_flux();
        for (double t : g.table().times())
            if (t > c.t_start && t < c.t_end)
                stops.push_back(t);
    }
    if ((c.temperature.needs_xuv_flux() || c.hydrodynamic || given_needs_flux) &&
        c.planet.has_star()) {
        const double ts = c.planet.star().xuv().saturation_time;
        if (ts > c.t_start && ts < c.t_end)
            stops.push_back(ts);
    }
    // A switch of the rate's law at an XUV flux [W m^-2] is a kink where the flux crosses it
    // (once, after saturation, the flux falling monotonically): the recombination limit taking
    // over, and the transonic wind's rate meeting the XUV-driven one.
    for (const double flux : {model.recombination_switch_flux(), model.transonic_switch_flux()}) {
        if (!(flux > 0.0 && std::isfinite(flux)))
            continue;
        const double a = c.planet.semi_major_axis();
        const double ts = c.planet.star().age_at_xuv_luminosity(flux * 4.0 * constants::pi * a * a);
        if (ts > c.t_start && ts < c.t_end && ts > c.planet.star().xuv().saturation_time)
            stops.push_back(ts);
    }
    std::sort(stops.begin(), stops.end());
    stops.erase(std::unique(stops.begin(), stops.end()), stops.end());
    stops.push_back(c.t_end);

    double t = c.t_start;
    // Zero-filled: a step that fails part-way (non-finite rates) must not leave values unset.
    State y = State::Zero(n_state), dydt = State::Zero(n_state), y_new = State::Zero(n_state),
          dydt_new = State::Zero(n_state), y_probe = State::Zero(n_state);
    for (std::size_t i = 0; i < n; ++i)
        y[i] = model.y0()[i];
    // Tolerance of the envelope state, absolute throughout: rtol of its share depletion_fraction
    // (an error made while the envelope is large stays as it shrinks; measured against
    // solve_ivp, a test relative to M_env left the last outputs before stripping at 13x rtol).
    double envelope_atol = 0.0;
    if (envelope) {
        y[env] = model.envelope_start();
        envelope_atol = c.rtol * c.depletion_fraction * (y[env] > 0.0 ? y[env] : 1.0);
    }

    Mode mode;
    mode.frozen.assign(n, 0);
    if (envelope && !(y[env] > 0.0)) { // a bare core from the start
        mode.stripped = true;
        r.stripping_time = c.t_start;
    }
    model.set_mode(mode);
    Regime regime = model.regime(t, y); // also probes a callable temperature before any step
    mode.energy_limited = model.energy_limited_in(regime);
    model.set_mode(mode);
    RegimeLedger ledger(n, model.y0());
    model.species_regimes(t, y, ledger.regime());
    double scale_start = model.jeans_scale(); // G M / (k T r) at the step's start
    ScaleProbes probes;
    std::vector<int> regimes_end(n, 0);
    State y_ledger = State::Zero(n_state);
    model.rhs(y, dydt, t);
    for (std::size_t i = 0; i < n; ++i)
        if (!std::isfinite(dydt[i]))
            throw NumericalError("the initial rate of change is not finite at t = " + when(t) +
                                 ": " + model.explain(i, t, y));

    Snapshot snap;
    std::size_t next_eval = 0;
    // Without a source a species only loses: dy_i/dt <= 0, so its exact ln N never rises. The
    // interpolant and (rarely) a step can overshoot by about their error; projecting them onto
    // the non-increasing values (between the step's ends, and not above the previous output)
    // keeps the outputs monotone and cannot move them further from the exact solution, which
    // lies in that set.
    std::vector<char> monotone(n, 1);
    for (std::size_t i = 0; i < c.sources.size(); ++i)
        monotone[i] = c.sources[i].is_zero() ? 1 : 0;
    State y_recorded = y, y_out(n_state);
    auto record = [&](double time, const State& state) {
        y_out = state;
        for (std::size_t i = 0; i < n; ++i)
            if (monotone[i])
                y_out[i] = std::min(y_out[i], y_recorded[i]);
        if (envelope) // the envelope only loses
            y_out[env] = std::max(0.0, std::min(y_out[env], y_recorded[env]));
        y_recorded = y_out;
        model.snapshot(time, y_out, mode, snap, c.record_rates || r.time.empty());
        recorder.record(time, y_out, snap, mode.energy_limited);
    };
    if (c.t_eval.empty()) {
        record(t, y);
    } else if (c.t_eval[0] == t) {
        record(t, y);
        next_eval = 1;
    }

    // First step. In ln N a loss alone gives dy/dt = -k(t): the local error of a step h comes
    // from how k varies, on the time scale T of the histories (the stellar age, or the span),
    // and is about |dy/dt| T (h/T)^6 for the fifth-order pair. The first step is where that is
    // a tenth of the tolerance for every species; the controller corrects it from there (a
    // smaller fixed fraction of T cost ~4 steps of growth at up to 5x each).
    double scale = c.t_end - c.t_start;
    if (c.t_start > 0.0)
        scale = std::min(scale, c.t_start);
    double dt = scale;
    for (std::size_t i = 0; i < n; ++i) {
        const double change = std::abs(dydt[i]) * scale; // e-folds over T
        const double tol = checker_tolerance(c.rtol, log_atol[i], y[i]);
        if (change > 0.0)
            dt = std::min(dt, scale * std::pow(0.1 * tol / change, 1.0 / 6.0));
    }
    if (envelope) {
        const double change = std::abs(dydt[env]) * scale;
        if (change > 0.0)
            dt = std::min(dt, scale * std::pow(0.1 * envelope_atol / change, 1.0 / 6.0));
    }

    // After a kink (and at the start) the rates may change on a time scale that the step-size
    // controller has not seen: the step it proposes was sized on the smooth stretch before, and
    // a Dormand–Prince error estimate on a step many times longer than that scale can be small
    // while the step is wrong (measured: one step from 3.0 to 9.1 Gyr after the temperature left
    // its upper clamp erred by 57x rtol). So the rate of change of each species' rate is
    // measured on a short probe step, d ln|dy_i/dt| / dt = 1/tau_i, and the step is sized with
    // the same error model as the first step, on the scale tau_i: |dy_i/dt| tau_i (h/tau_i)^6
    // at a tenth of the tolerance. One right-hand-side evaluation per kink.
    State y_kink = State::Zero(n_state), dydt_kink = State::Zero(n_state);
    auto step_after_kink = [&](double proposal) {
        const double delta = 1e-4 * proposal;
        y_kink = y + delta * dydt;
        model.rhs(y_kink, dydt_kink, t + delta);
        double h = proposal;
        for (std::size_t i = 0; i < n_state; ++i) {
            const auto k = static_cast<Eigen::Index>(i);
            const double rate = std::abs(dydt[k]);
            const double change = std::abs(dydt_kink[k] - dydt[k]);
            if (!(rate > 0.0) || !(change > 0.0) || !std::isfinite(change))
                continue;
            const double tau = delta * rate / change;
            const double tol = i < n ? checker_tolerance(c.rtol, log_atol[k], y[k]) : envelope_atol;
            h = std::min(h, tau * std::pow(0.1 * tol / (rate * tau), 1.0 / 6.0));
        }
        return h;
    };
    dt = step_after_kink(dt);

    std::size_t worst = 0;
    // The species' tolerances at the start of the last trial step (the checker's), and at its
    // end, for the tests on an accepted step below.
    std::vector<double> start_tolerance(n, 0.0), end_tolerance(n, 0.0);
    const LogErrorChecker checker(c.rtol, &log_atol, &worst, start_tolerance.data(), envelope_atol);
    std::unique_ptr<Stepper> stepper;
    // Measured (DEVELOPERS.md): in ln N a loss alone is not stiff and Dopri5 takes the fewest
    // steps; a source balancing a fast loss is, and Rosenbrock4 then takes ~1e3x fewer.
    const bool implicit =
        c.stepper == StepperKind::Rosenbrock4 || (c.stepper == StepperKind::Auto && any_source);
    r.stepper = stepper_name(implicit ? StepperKind::Rosenbrock4 : StepperKind::Dopri5);
    if (implicit)
        stepper = std::make_unique<RosenbrockStepper>(model, checker, n_state);
    else
        stepper = std::make_unique<DopriStepper>(model, checker);
    std::size_t stop_index = 0;
    std::size_t consecutive_rejections = 0;
    const double span = c.t_end - c.t_start;

    // |ln(Q_i(t + h) / Q_i(t))| of the trial step, largest over the species without a source
    // whose ln N changes by more than its tolerance in it.
    auto largest_rate_ratio = [&]() { // max over species of max(b/a, a/b), 1 for none
        double largest = 1.0;
        for (std::size_t i = 0; i < n; ++i) {
            if (!monotone[i] || !(std::abs(y_new[i] - y[i]) > start_tolerance[i]))
                continue;
            const double a = std::abs(dydt[i]), b = std::abs(dydt_new[i]);
            if (a > 0.0 && b > 0.0)
                largest = std::max(largest, std::max(b / a, a / b));
        }
        return largest;
    };
    // What limits the step, for messages: a species' ln N or the envelope mass.
    auto limited_by = [&](std::size_t k) {
        return k < n ? "ln N[" + c.species[k].name + "]" : std::string("the envelope mass");
    };
    std::vector<double> depleted_at(n, nan), step_tolerance(n, 0.0), falls(n, 0.0);
    std::vector<char> freeze(n, 0);
    Mode next_mode = mode;
    while (t < c.t_end) {
        if (r.steps + r.rejected_steps >= c.max_steps)
            throw NumericalError(
                "no progress: max_steps = " + std::to_string(c.max_steps) + " steps used (" +
                std::to_string(r.rejected_steps) + " rejected) and only t = " + when(t) +
                " of t_span end " + when(c.t_end) + " reached; step size " + format_value(dt) +
                " s, limited by the error of " + limited_by(worst) + " (" +
                model.explain(worst, t, y) + "); raise max_steps or loosen rtol/atol");
        const double t_stop = stops[stop_index];
        const bool landing = dt >= t_stop - t;
        const double h_planned = landing ? t_stop - t : dt;
        double h = h_planned;
        bool accepted = stepper->try_step(t, y, dydt, h_planned, y_new, dydt_new, h);
        if (accepted && !(y_new.allFinite() && dydt_new.allFinite())) {
            accepted = false; // an error estimate can pass a step that ran off to infinity
            h = 0.2 * h_planned;
        }
        if (!accepted) {
            ++r.rejected_steps;
            ++consecutive_rejections;
            dt = h;
            if (consecutive_rejections > 50 ||
                dt < 8.0 * std::numeric_limits<double>::epsilon() * std::max(std::abs(t), span)) {
                std::string why = "the error of " + limited_by(worst) + " stays above tolerance";
                for (std::size_t i = 0; i < n; ++i)
                    if (!std::isfinite(y_new[i]) || !std::isfinite(dydt_new[i])) {
                        why = "the rate of change of " + c.species[i].name +
                              " is not finite within the step";
                        worst = i;
                        break;
                    }
                throw NumericalError("no progress at t = " + when(t) + ": the step size fell to " +
                                     format_value(dt) + " s after " +
                                     std::to_string(consecutive_rejections) + " rejected steps; " +
                                     why + " (" + model.explain(worst, t, y) + ")");
            }
            continue;
        }
        // The embedded error estimate holds while the rates vary little over a step; over a
        // step where a rate that matters changes by more than a factor kRateChange both of its
        // solutions can be wrong alike (measured on steep temperature falls: up to 4x rtol in
        // one step that the estimate passed). Such a step is retried shorter; a rate that jumps
        // (no shorter step helps) is let through after a few tries.
        const double rate_ratio = largest_rate_ratio();
        if (rate_ratio > kRateChange && consecutive_rejections < 8) {
            ++r.rejected_steps;
            ++consecutive_rejections;
            dt = h_planned * std::max(0.2, 0.7 * std::log(kRateChange) / std::log(rate_ratio));
            continue;
        }
        consecutive_rejections = 0;
        ++r.steps;
        bool overshoot = false;
        for (std::size_t i = 0; i < n; ++i)
            if (monotone[i] && y_new[i] > y[i]) {
                y_new[i] = y[i];
                overshoot = true;
            }
        if (envelope && y_new[env] > y[env]) {
            y_new[env] = y[env];
            overshoot = true;
        }
        if (overshoot)
            model.rhs(y_new, dydt_new, t + h_planned);
        const double t_step_end = t + h_planned; // the end used by the interpolant
        const double t_new = landing ? t_stop : t_step_end;
        // h now holds the controller's proposal; a step cut short to land on a stop keeps the
        // larger step it had planned.
        dt = landing ? std::max(h, dt) : h;

        auto dense = [&](double tq, State& out) {
            stepper->dense(tq, out, t, y, dydt, t_step_end, y_new, dydt_new);
            for (std::size_t i = 0; i < n; ++i)
                if (monotone[i])
                    out[i] = std::clamp(out[i], y_new[i], y[i]);
            if (envelope)
                out[env] = std::clamp(out[env], y_new[env], y[env]);
        };
        // An output inside the step. Dopri5's interpolant is of fourth order, one below the
        // step, and on a step where the rates change much it errs by several tolerances
        // (measured: 9x rtol on a steep temperature fall, with the step's ends within 0.6x).
        // Where it departs from the cubic Hermite interpolant of the step's ends by more than
        // the tolerance, the output instead comes from one step of the method from the step's
        // start, as accurate as an accepted step; elsewhere the interpolant is kept (measured:
        // 2 such steps in 130 evaluations of a typical case).
        // The tolerance of the Hermite test, once per step: the smaller of its ends' (it falls as
        // N grows, and an output lies between the ends but for a source's rare overshoot).
        bool step_tolerance_set = false;
        auto output = [&](double tq, State& out) {
            if (!step_tolerance_set) {
                checker_tolerances(c.rtol, log_atol.data(), y_new.data(), end_tolerance.data(), n);
                for (std::size_t i = 0; i < n; ++i)
                    step_tolerance[i] = std::min(start_tolerance[i], end_tolerance[i]);
                step_tolerance_set = true;
            }
            dense(tq, out);
            const double span_h = t_step_end - t, s = (tq - t) / span_h;
            const double h00 = (2.0 * s - 3.0) * s * s + 1.0, h10 = ((s - 2.0) * s + 1.0) * s,
                         h01 = (3.0 - 2.0 * s) * s * s, h11 = (s - 1.0) * s * s;
            bool departs = false;
            for (std::size_t i = 0; i < n && !departs; ++i) {
                const double hermite = h00 * y[i] + h10 * span_h * dydt[i] + h01 * y_new[i] +
                                       h11 * span_h * dydt_new[i];
                departs = std::abs(hermite - out[i]) > step_tolerance[i];
            }
            if (envelope && !departs) {
                const double hermite = h00 * y[env] + h10 * span_h * dydt[env] + h01 * y_new[env] +
                                       h11 * span_h * dydt_new[env];
                departs = std::abs(hermite - out[env]) > envelope_atol;
            }
            if (departs && stepper->direct(tq, out, t, y, dydt)) {
                for (std::size_t i = 0; i < n; ++i)
                    if (monotone[i])
                        out[i] = std::clamp(out[i], y_new[i], y[i]);
                if (envelope)
                    out[env] = std::clamp(out[env], y_new[env], y[env]);
            }
        };

        // Events inside (t, t_new]: depletion (a mode change when the species' loss does not
        // follow its inventory) and regime changes (a mode change when they switch the
        // energy-limited option).
        double t_cut = t_new;
        next_mode = mode; // assigned, not built: its buffer is kept from step to step
        std::fill(depleted_at.begin(), depleted_at.end(), nan);
        std::fill(freeze.begin(), freeze.end(), 0);
        for (std::size_t i = 0; i < n; ++i) {
            if (!std::isnan(r.depletion_time[i]) || !(y_new[i] < log_depleted[i]))
                continue;
            depleted_at[i] = locate_crossing(t, t_new, [&](double tq) {
                dense(tq, y_probe);
                return y_probe[i] - log_depleted[i];
            });
            dense(depleted_at[i], y_probe);
            if (!model.loss_follows_inventory(i, y_probe, mode)) {
                freeze[i] = 1;
                t_cut = std::min(t_cut, depleted_at[i]);
            }
        }
        // The envelope is gone where its mass crosses zero (located on the dense output).
        double stripped_at = nan;
        if (envelope && !mode.stripped && !(y_new[env] > 0.0)) {
            stripped_at = locate_crossing(t, t_new, [&](double tq) {
                dense(tq, y_probe);
                return y_probe[env];
            });
            t_cut = std::min(t_cut, stripped_at);
        }
        const Regime regime_new = model.regime(t_new, y_new);
        double regime_time = nan;
        Regime regime_after = regime_new;
        if (regime_new != regime) {
            regime_time = locate(t, t_new, [&](double tq) {
                dense(tq, y_probe);
                return model.regime(tq, y_probe) != regime;
            });
            dense(regime_time, y_probe);
            regime_after = model.regime(regime_time, y_probe);
            if (model.energy_limited_in(regime_after) != mode.energy_limited && regime_time < t_cut)
                t_cut = regime_time;
        }
        const Regime bulk_before = regime;
        // Apply the events at or before t_cut.
        for (std::size_t i = 0; i < n; ++i)
            if (!std::isnan(depleted_at[i]) && depleted_at[i] <= t_cut) {
                r.depletion_time[i] = depleted_at[i];
                if (freeze[i])
                    next_mode.frozen[i] = 1;
            }
        if (!std::isnan(regime_time) && regime_time <= t_cut) {
            r.regime_changes.push_back({regime_time, regime, regime_after});
            regime = regime_after;
            next_mode.energy_limited = model.energy_limited_in(regime);
        }
        if (!std::isnan(stripped_at) && stripped_at <= t_cut) {
            r.stripping_time = stripped_at;
            next_mode.stripped = true;
        }
        // Time in each regime and where the loss went over [t, t_cut]: the bulk gas's from its
        // located change, each species' from its own changes, located on the dense output.
        if (regime != bulk_before) {
            ledger.bulk_time()[static_cast<std::size_t>(bulk_before)] += regime_time - t;
            ledger.bulk_time()[static_cast<std::size_t>(regime)] += t_cut - regime_time;
        } else {
            ledger.bulk_time()[static_cast<std::size_t>(regime)] += t_cut - t;
        }
        const State* y_end = &y_new;
        if (t_cut < t_new) {
            dense(t_cut, y_ledger);
            y_end = &y_ledger;
        }
        model.species_regimes(t_cut, *y_end, regimes_end);
        const double scale_end = model.jeans_scale();
        step_falls(y.data(), y_end->data(), model.y0().data(), falls.data(), n);
        bool probed = false;
        for (std::size_t i = 0; i < n; ++i) {
            int from = ledger.regime()[i];
            const int to = regimes_end[i];
            if (from == to) { // the whole step in one regime: its fall from the vectorised pass
                ledger.add_fall(i, from, mode.energy_limited, t, t_cut, falls[i],
                                model.source_integral(i, t, t_cut),
                                model.given_integral(i, t, t_cut));
                continue;
            }
            double a = t, ya = y[i];
            for (int change = 0; from != to && change < 4; ++change) {
                if (!probed) {
                    probes.reset(t, scale_start, t_cut, scale_end);
                    probed = true;
                }
                const bool down = to > from; // toward smaller Jeans parameters
                const double threshold =
                    down ? regime_lower(from, c.thresholds) : regime_upper(from, c.thresholds);
                const double tc = probes.locate(a, model.mass(i), threshold, down, [&](double tq) {
                    dense(tq, y_probe);
                    return model.jeans_scale(tq, y_probe);
                });
                dense(tc, y_probe);
                ledger.add(i, from, mode.energy_limited, a, tc, ya, y_probe[i],
                           model.source_integral(i, a, tc), model.given_integral(i, a, tc));
                a = tc;
                ya = y_probe[i];
                from += down ? 1 : -1;
            }
            ledger.add(i, from, mode.energy_limited, a, t_cut, ya, (*y_end)[i],
                       model.source_integral(i, a, t_cut), model.given_integral(i, a, t_cut));
            ledger.regime()[i] = to;
        }
        scale_start = scale_end;
        // Output inside (t, t_cut].
        while (next_eval < c.t_eval.size() && c.t_eval[next_eval] <= t_cut) {
            const double te = c.t_eval[next_eval];
            if (te == t_new && t_cut == t_new) {
                record(te, y_new);
            } else {
                output(te, y_probe);
                record(te, y_probe);
            }
            ++next_eval;
        }
        if (t_cut < t_new) {
            dense(t_cut, y_probe);
            y = y_probe;
            if (next_mode.stripped)
                y[env] = 0.0; // the bare core from here on
            t = t_cut;
            if (c.t_eval.empty())
                record(t, y);
            mode = next_mode;
            model.set_mode(mode);
            model.rhs(y, dydt, t);
            dt = step_after_kink(dt);
        } else {
            y.swap(y_new);
            dydt.swap(dydt_new);
            if (next_mode.stripped && !mode.stripped)
                y[env] = 0.0;
            t = t_new;
            if (c.t_eval.empty())
                record(t, y);
            bool kink = landing && t < c.t_end;
            if (landing)
                ++stop_index;
            if (!(next_mode == mode)) {
                mode = next_mode;
                model.set_mode(mode);
                model.rhs(y, dydt, t);
                kink = true;
            }
            if (kink)
                dt = step_after_kink(dt);
        }
        if (c.progress && !c.progress(t)) {
            r.t_reached = t;
            r.completed = false;
            r.rhs_evaluations = model.evaluations();
            ledger.finish(r);
            return r;
        }
    }
    ledger.finish(r);
    r.t_reached = t;
    r.completed = true;
    r.rhs_evaluations = model.evaluations();
    return r;
}

} // namespace exosieve
