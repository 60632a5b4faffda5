#include "exosieve/maxwell.hpp"

#include <cmath>
#include <limits>

#include <boost/math/special_functions/gamma.hpp>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"

namespace exosieve {

namespace {

constexpr double two_over_sqrt_pi = 1.1283791670955125739; // 2/sqrt(pi)
constexpr double sqrt_pi = 1.7724538509055160273;

inline double v0_of(double temperature, double mass) {
    return std::sqrt(2.0 * constants::k_B * temperature / mass);
}

// x = v / v0, in logarithms where 2 k T / m under- or overflows (extreme temperatures and
// masses), so that a finite closed form never comes out NaN.
inline double speed_ratio(double speed, double temperature, double mass) {
    const double v0 = v0_of(temperature, mass);
    if (v0 > 0.0 && std::isfinite(v0))
        return speed / v0;
    if (speed == 0.0)
        return 0.0;
    return std::exp(std::log(speed) - 0.5 * (std::log(2.0 * constants::k_B) +
                                             std::log(temperature) - std::log(mass)));
}

// 4/sqrt(pi) x^2 / v0 exp(-x^2) = 4/sqrt(pi) x^3 exp(-x^2) / v; 0 where exp(-x^2) underflows.
inline double pdf_of(double speed, double temperature, double mass) {
    const double v0 = v0_of(temperature, mass);
    if (v0 > 0.0 && std::isfinite(v0)) {
        const double x = speed / v0;
        return x > 28.0 ? 0.0 : 2.0 * two_over_sqrt_pi * x * x / v0 * std::exp(-x * x);
    }
    if (speed == 0.0)
        return 0.0;
    const double x = speed_ratio(speed, temperature, mass);
    return x > 28.0 ? 0.0 : 2.0 * two_over_sqrt_pi * x * x * x * std::exp(-x * x) / speed;
}

void check_tm(double temperature, double mass) {
    require_positive("temperature", temperature);
    require_positive("mass", mass);
}

// exp(x^2) erfc(x) for x >= 25 from its asymptotic series (Abramowitz & Stegun 7.1.23);
// the first omitted term is below 1e-15 relative there.
double scaled_erfc_asymptotic(double x) {
    const double u = 1.0 / (2.0 * x * x);
    double term = 1.0, sum = 1.0;
    for (int k = 1; k <= 8; ++k) {
        term *= -(2.0 * k - 1.0) * u;
        sum += term;
    }
    return sum / (x * sqrt_pi);
}

template <class F> void fill(std::size_t count, double* out, F f) {
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i)
            out[i] = f(i);
    });
}

} // namespace

double tail_fraction(double x) {
    if (x <= 0.0)
        return 1.0;
    if (x >= 28.0) // both terms underflow to 0 (and x exp(-x^2) would be NaN at x = inf)
        return 0.0;
    return std::erfc(x) + two_over_sqrt_pi * x * std::exp(-x * x);
}

double log_tail_fraction(double x) {
    if (std::isinf(x))
        return -std::numeric_limits<double>::infinity();
    if (x < 25.0)
        return std::log(tail_fraction(x));
    return -x * x + std::log(scaled_erfc_asymptotic(x) + two_over_sqrt_pi * x);
}

double most_probable_speed(double temperature, double mass) {
    check_tm(temperature, mass);
    return v0_of(temperature, mass);
}

double mean_speed(double temperature, double mass) {
    return two_over_sqrt_pi * most_probable_speed(temperature, mass);
}

double rms_speed(double temperature, double mass) {
    return std::sqrt(1.5) * most_probable_speed(temperature, mass);
}

double speed_pdf(double speed, double temperature, double mass) {
    require_non_negative("speed", speed);
    check_tm(temperature, mass);
    return pdf_of(speed, temperature, mass);
}

double fraction_faster(double speed, double temperature, double mass) {
    require_non_negative("speed", speed);
    check_tm(temperature, mass);
    return tail_fraction(speed_ratio(speed, temperature, mass));
}

double log_fraction_faster(double speed, double temperature, double mass) {
    require_non_negative("speed", speed);
    check_tm(temperature, mass);
    return log_tail_fraction(speed_ratio(speed, temperature, mass));
}

void most_probable_speed(ArrayArg temperature, ArrayArg mass, double* out, std::size_t count) {
    check_lengths(count, {temperature, mass});
    require_positive("temperature", temperature);
    require_positive("mass", mass);
    fill(count, out, [&](std::size_t i) { return v0_of(temperature[i], mass[i]); });
}

void mean_speed(ArrayArg temperature, ArrayArg mass, double* out, std::size_t count) {
    most_probable_speed(temperature, mass, out, count);
    for (std::size_t i = 0; i < count; ++i)
        out[i] *= two_over_sqrt_pi;
}

void rms_speed(ArrayArg temperature, ArrayArg mass, double* out, std::size_t count) {
    most_probable_speed(temperature, mass, out, count);
    for (std::size_t i = 0; i < count; ++i)
        out[i] *= std::sqrt(1.5);
}

namespace {
void check_speed_args(ArrayArg speed, ArrayArg temperature, ArrayArg mass, std::size_t count) {
    check_lengths(count, {speed, temperature, mass});
    require_non_negative("speed", speed);
    require_positive("temperature", temperature);
    require_positive("mass", mass);
}
} // namespace

void speed_pdf(ArrayArg speed, ArrayArg temperature, ArrayArg mass, double* out,
               std::size_t count) {
    check_speed_args(speed, temperature, mass, count);
    fill(count, out, [&](std::size_t i) { return pdf_of(speed[i], temperature[i], mass[i]); });
}

void fraction_faster(ArrayArg speed, ArrayArg temperature, ArrayArg mass, double* out,
                     std::size_t count) {
    check_speed_args(speed, temperature, mass, count);
    fill(count, out, [&](std::size_t i) {
        return tail_fraction(speed_ratio(speed[i], temperature[i], mass[i]));
    });
}

void log_fraction_faster(ArrayArg speed, ArrayArg temperature, ArrayArg mass, double* out,
                         std::size_t count) {
    check_speed_args(speed, temperature, mass, count);
    fill(count, out, [&](std::size_t i) {
        return log_tail_fraction(speed_ratio(speed[i], temperature[i], mass[i]));
    });
}

} // namespace exosieve
