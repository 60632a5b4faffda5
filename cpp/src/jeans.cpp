#include "exosieve/jeans.hpp"

#include <algorithm>
#include <array>
#include <atomic>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "flux_block.hpp"
#include "vector_exp.hpp"

namespace exosieve {

using constants::G;
using constants::k_B;

namespace {

using detail::flux_loop;
using detail::inv_two_sqrt_pi;

void check_lambda_args(double temperature, double mass, double planet_mass, double radius) {
    require_positive("temperature", temperature);
    require_positive("mass", mass);
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
}

void check_flux_args(double density, double temperature, double mass, double planet_mass,
                     double radius) {
    require_non_negative("density", density);
    check_lambda_args(temperature, mass, planet_mass, radius);
}

// Arguments of a 5-input array kernel, processed in blocks whose inputs are contiguous so
// that the inner loops vectorise; broadcast inputs are expanded into a small local buffer.
constexpr std::size_t block = 512;

struct BlockInputs {
    std::array<ArrayArg, 5> args;
    std::array<std::array<double, block>, 5> buffers;

    explicit BlockInputs(std::array<ArrayArg, 5> a) : args(a) {
        for (std::size_t k = 0; k < 5; ++k)
            if (args[k].size == 1)
                buffers[k].fill(args[k].data[0]);
    }
    const double* at(std::size_t k, std::size_t begin) const {
        return args[k].size == 1 ? buffers[k].data() : args[k].data + begin;
    }
};

void check_flux_arrays(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                       ArrayArg radius, std::size_t count);

// kernel(n, T, m, M, r, out, length) on contiguous blocks, in parallel for long arrays. The
// kernel checks its block's inputs in the same pass and returns false for a bad one; then
// nothing is returned and the serial check reports the first offending argument and element.
template <class Kernel>
void run_blocks(std::array<ArrayArg, 5> args, double* out, std::size_t count, Kernel kernel) {
    check_lengths(count, {args[0], args[1], args[2], args[3], args[4]});
    std::atomic<bool> all_valid{true};
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        BlockInputs in(args);
        for (std::size_t b = begin; b < end; b += block) {
            const std::size_t len = std::min(block, end - b);
            if (!kernel(in.at(0, b), in.at(1, b), in.at(2, b), in.at(3, b), in.at(4, b), out + b,
                        len)) {
                all_valid = false;
                return;
            }
        }
    });
    if (!all_valid) {
        check_flux_arrays(args[0], args[1], args[2], args[3], args[4], count);
        throw NumericalError("jeans kernel: block check and argument check disagree");
    }
}

void check_flux_arrays(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                       ArrayArg radius, std::size_t count) {
    check_lengths(count, {density, temperature, mass, planet_mass, radius});
    require_non_negative("density", density);
    require_positive("temperature", temperature);
    require_positive("mass", mass);
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
}

// Jeans parameter G M m / (k T r) [1]; in logarithms where a product over- or underflows, so
// that finite extreme inputs keep a finite parameter.
double safe_lambda(double T, double m, double M, double r) {
    // Every partial product normal: a subnormal k T (T ~ 1e-300 K) loses its digits even
    // when k T r comes out normal again.
    const double gm = G * M, kt = k_B * T;
    const double num = gm * m, den = kt * r;
    if (std::isnormal(gm) && std::isnormal(kt) && std::isnormal(num) && std::isnormal(den)) {
        const double lambda = num / den;
        if (std::isnormal(lambda))
            return lambda;
    }
    return std::exp(std::log(G) + std::log(M) + std::log(m) - std::log(k_B) - std::log(T) -
                    std::log(r));
}

// ln v0 = ln sqrt(2 k T / m), in logarithms so that 2 k T / m cannot overflow.
double log_thermal_speed(double T, double m) {
    return 0.5 * (std::log(2.0 * k_B) + std::log(T) - std::log(m));
}

#if EXOSIEVE_HAS_TARGETS
EXOSIEVE_TARGET("arch=x86-64-v4")
bool flux_block(const double* n, const double* T, const double* m, const double* M, const double* r,
                double* out, std::size_t len, bool* not_finite) {
    return flux_loop<true>(n, T, m, M, r, out, len, not_finite);
}
EXOSIEVE_TARGET("arch=x86-64-v3")
bool flux_block(const double* n, const double* T, const double* m, const double* M, const double* r,
                double* out, std::size_t len, bool* not_finite) {
    return flux_loop<false>(n, T, m, M, r, out, len, not_finite);
}
EXOSIEVE_TARGET("default")
#endif
bool flux_block(const double* n, const double* T, const double* m, const double* M, const double* r,
                double* out, std::size_t len, bool* not_finite) {
    return flux_loop<false>(n, T, m, M, r, out, len, not_finite);
}

void apply_tail(const TailDepletion& tail, const double* T, const double* m, const double* M,
                const double* r, double* out, std::size_t len) {
    for (std::size_t i = 0; i < len; ++i)
        out[i] *= tail(G * M[i] * m[i] / (k_B * T[i] * r[i]));
}

} // namespace

namespace {
void require_depletion(const char* what, double factor, bool enhancement) {
    if (factor > 1.0 && !enhancement)
        throw InputError(std::string(what) + " must be <= 1 (a depletion of the Jeans flux), got " +
                         format_value(factor) +
                         "; a factor above 1 is an enhancement: give TailDepletion(..., "
                         "enhancement=True) to allow it");
}
} // namespace

TailDepletion::TailDepletion(double factor, bool enhancement)
    : constant_(factor), enhancement_(enhancement) {
    require_positive("tail_depletion", factor);
    require_depletion("tail_depletion", factor, enhancement);
}

TailDepletion::TailDepletion(std::vector<double> jeans_parameter, std::vector<double> factor,
                             bool enhancement)
    : enhancement_(enhancement), lambdas_(std::move(jeans_parameter)), factors_(std::move(factor)) {
    if (lambdas_.size() != factors_.size() || lambdas_.empty())
        throw InputError("tail_depletion table: jeans_parameter and factor must be non-empty and "
                         "of equal length, got " +
                         std::to_string(lambdas_.size()) + " and " +
                         std::to_string(factors_.size()));
    for (std::size_t i = 0; i < lambdas_.size(); ++i) {
        require_finite("tail_depletion jeans_parameter", lambdas_[i]);
        require_positive("tail_depletion factor", factors_[i]);
        require_depletion(("tail_depletion factor[" + std::to_string(i) + "]").c_str(), factors_[i],
                          enhancement);
        if (i > 0 && !(lambdas_[i] > lambdas_[i - 1]))
            throw InputError("tail_depletion jeans_parameter must be strictly increasing, got " +
                             format_value(lambdas_[i]) + " after " + format_value(lambdas_[i - 1]));
    }
}

double TailDepletion::operator()(double lambda) const {
    if (lambdas_.empty())
        return constant_;
    if (lambda <= lambdas_.front())
        return factors_.front();
    if (lambda >= lambdas_.back())
        return factors_.back();
    const auto hi = std::upper_bound(lambdas_.begin(), lambdas_.end(), lambda) - lambdas_.begin();
    const auto lo = hi - 1;
    const double w = (lambda - lambdas_[lo]) / (lambdas_[hi] - lambdas_[lo]);
    return factors_[lo] + w * (factors_[hi] - factors_[lo]);
}

double escape_speed(double planet_mass, double radius) {
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
    return std::sqrt(2.0 * G * planet_mass / radius);
}

double jeans_parameter(double temperature, double mass, double planet_mass, double radius) {
    check_lambda_args(temperature, mass, planet_mass, radius);
    return safe_lambda(temperature, mass, planet_mass, radius);
}

double jeans_flux_unchecked(double density, double v0, double lambda, const TailDepletion& tail) {
    if (!(lambda < 1e300))
        return 0.0;
    const double half = std::exp(-0.5 * lambda); // see flux_block
    return (density * v0 * inv_two_sqrt_pi * (1.0 + lambda) * half) * half * tail(lambda);
}

double jeans_flux(double density, double temperature, double mass, double planet_mass,
                  double radius, const TailDepletion& tail) {
    check_flux_args(density, temperature, mass, planet_mass, radius);
    const double lambda = G * planet_mass * mass / (k_B * temperature * radius);
    const double v0 = std::sqrt(2.0 * k_B * temperature / mass);
    return jeans_flux_unchecked(density, v0, lambda, tail);
}

double log_jeans_flux_unchecked(double log_density, double log_v0, double lambda,
                                const TailDepletion& tail) {
    constexpr double log_inv_two_sqrt_pi = -1.2655121234846454; // ln(1 / (2 sqrt(pi)))
    // ln(1 + lambda), not log1p: its rounding error is below 2.3e-16 in absolute terms, which
    // the other terms of the sum (of order 1 and more) absorb, and log is the faster call.
    // ln(1 + lambda) - lambda tends to -lambda: -inf for an infinite lambda, not inf - inf.
    const double decay = lambda < 1e300 ? std::log(1.0 + lambda) - lambda : -lambda;
    double log_flux = log_density + log_v0 + log_inv_two_sqrt_pi + decay;
    if (!tail.is_identity())
        log_flux += std::log(tail(lambda));
    return log_flux;
}

double log_jeans_flux(double density, double temperature, double mass, double planet_mass,
                      double radius, const TailDepletion& tail) {
    check_flux_args(density, temperature, mass, planet_mass, radius);
    const double lambda = safe_lambda(temperature, mass, planet_mass, radius);
    const double log_v0 = log_thermal_speed(temperature, mass);
    return log_jeans_flux_unchecked(std::log(density), log_v0, lambda, tail);
}

double jeans_energy_flux(double density, double temperature, double mass, double planet_mass,
                         double radius, const TailDepletion& tail) {
    const double flux = jeans_flux(density, temperature, mass, planet_mass, radius, tail);
    if (flux == 0.0)
        return 0.0;
    const double lambda = G * planet_mass * mass / (k_B * temperature * radius);
    return flux * k_B * temperature * (lambda * lambda + 2.0 * lambda + 2.0) / (lambda + 1.0);
}

double jeans_escape_rate(double density, double temperature, double mass, double planet_mass,
                         double radius, const TailDepletion& tail) {
    return 4.0 * constants::pi * radius * radius *
           jeans_flux(density, temperature, mass, planet_mass, radius, tail);
}

double log_jeans_escape_rate(double density, double temperature, double mass, double planet_mass,
                             double radius, const TailDepletion& tail) {
    return std::log(4.0 * constants::pi) + 2.0 * std::log(radius) +
           log_jeans_flux(density, temperature, mass, planet_mass, radius, tail);
}

double jeans_effusion_velocity(double temperature, double mass, double planet_mass, double radius,
                               const TailDepletion& tail) {
    return jeans_flux(1.0, temperature, mass, planet_mass, radius, tail);
}

void escape_speed(ArrayArg planet_mass, ArrayArg radius, double* out, std::size_t count) {
    check_lengths(count, {planet_mass, radius});
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
    for (std::size_t i = 0; i < count; ++i)
        out[i] = std::sqrt(2.0 * G * planet_mass[i] / radius[i]);
}

void jeans_parameter(ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass, ArrayArg radius,
                     double* out, std::size_t count) {
    check_lengths(count, {temperature, mass, planet_mass, radius});
    require_positive("temperature", temperature);
    require_positive("mass", mass);
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i)
            out[i] = safe_lambda(temperature[i], mass[i], planet_mass[i], radius[i]);
    });
}

namespace {

// ln of the Jeans flux of element i [ln(m^-2 s^-1)], every factor in logarithms.
double log_flux_at(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                   ArrayArg radius, std::size_t i, const TailDepletion& tail) {
    return log_jeans_flux_unchecked(
        std::log(density[i]), log_thermal_speed(temperature[i], mass[i]),
        safe_lambda(temperature[i], mass[i], planet_mass[i], radius[i]), tail);
}

} // namespace

void jeans_flux(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                ArrayArg radius, double* out, std::size_t count, const TailDepletion& tail) {
    run_blocks({density, temperature, mass, planet_mass, radius}, out, count,
               [&](const double* n, const double* T, const double* m, const double* M,
                   const double* r, double* o, std::size_t len) {
                   bool not_finite = false;
                   if (!flux_block(n, T, m, M, r, o, len, &not_finite))
                       return false;
                   if (!tail.is_identity()) {
                       apply_tail(tail, T, m, M, r, o, len);
                       not_finite = true; // scan again below: the factor may have overflowed
                   }
                   // Where a product of the linear form over- or underflowed into inf or NaN
                   // (finite extreme inputs), the exponential of the log form: finite wherever
                   // the flux is. Found while the block is in cache, not in a second pass.
                   if (not_finite)
                       for (std::size_t j = 0; j < len; ++j)
                           if (!std::isfinite(o[j])) {
                               const auto i = static_cast<std::size_t>(o - out) + j;
                               o[j] = std::exp(log_flux_at(density, temperature, mass, planet_mass,
                                                           radius, i, tail));
                           }
                   return true;
               });
}

void log_jeans_flux(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                    ArrayArg radius, double* out, std::size_t count, const TailDepletion& tail) {
    check_flux_arrays(density, temperature, mass, planet_mass, radius, count);
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i) {
            const double lambda = safe_lambda(temperature[i], mass[i], planet_mass[i], radius[i]);
            const double log_v0 = log_thermal_speed(temperature[i], mass[i]);
            out[i] = log_jeans_flux_unchecked(std::log(density[i]), log_v0, lambda, tail);
        }
    });
}

void jeans_energy_flux(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                       ArrayArg radius, double* out, std::size_t count, const TailDepletion& tail) {
    jeans_flux(density, temperature, mass, planet_mass, radius, out, count, tail);
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i) {
            if (out[i] == 0.0)
                continue;
            const double kT = k_B * temperature[i];
            const double lambda = safe_lambda(temperature[i], mass[i], planet_mass[i], radius[i]);
            // (lambda^2 + 2 lambda + 2) / (lambda + 1) = (lambda + 1) + 1 / (lambda + 1)
            const double energy = kT * ((lambda + 1.0) + 1.0 / (lambda + 1.0));
            out[i] *= energy;
            if (!std::isfinite(out[i]))
                out[i] =
                    std::exp(log_flux_at(density, temperature, mass, planet_mass, radius, i, tail) +
                             std::log(kT) + std::log((lambda + 1.0) + 1.0 / (lambda + 1.0)));
        }
    });
}

void jeans_escape_rate(ArrayArg density, ArrayArg temperature, ArrayArg mass, ArrayArg planet_mass,
                       ArrayArg radius, double* out, std::size_t count, const TailDepletion& tail) {
    jeans_flux(density, temperature, mass, planet_mass, radius, out, count, tail);
    for (std::size_t i = 0; i < count; ++i) {
        out[i] *= 4.0 * constants::pi * radius[i] * radius[i];
        if (!std::isfinite(out[i]))
            out[i] =
                std::exp(log_flux_at(density, temperature, mass, planet_mass, radius, i, tail) +
                         std::log(4.0 * constants::pi) + 2.0 * std::log(radius[i]));
    }
}

void log_jeans_escape_rate(ArrayArg density, ArrayArg temperature, ArrayArg mass,
                           ArrayArg planet_mass, ArrayArg radius, double* out, std::size_t count,
                           const TailDepletion& tail) {
    log_jeans_flux(density, temperature, mass, planet_mass, radius, out, count, tail);
    for (std::size_t i = 0; i < count; ++i)
        out[i] += std::log(4.0 * constants::pi) + 2.0 * std::log(radius[i]);
}

} // namespace exosieve
