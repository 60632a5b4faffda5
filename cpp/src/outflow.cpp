#include "exosieve/outflow.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/hydrodynamic.hpp"

namespace exosieve {

using constants::G;
using constants::k_B;
using constants::pi;

namespace {

constexpr double kE = 2.718281828459045235360287471352662498;
constexpr double kInvE = 0.367879441171442321595523770161460867;
constexpr double kEps = std::numeric_limits<double>::epsilon();

// Series of W about the branch point in p = sqrt(2 (1 + e x)) (Corless et al. 1996, eq. 4.22);
// p > 0 gives W_0, p < 0 gives W_-1. Used for |p| < 0.01, where the next term is < 1e-20.
double branch_series(double p) {
    static constexpr double c[] = {-1.0,
                                   1.0,
                                   -1.0 / 3.0,
                                   11.0 / 72.0,
                                   -43.0 / 540.0,
                                   769.0 / 17280.0,
                                   -221.0 / 8505.0,
                                   680863.0 / 43545600.0,
                                   -1963.0 / 204120.0};
    double w = c[8];
    for (int k = 7; k >= 0; --k)
        w = w * p + c[k];
    return w;
}

// 1 + e x without the cancellation of forming e x first (e split into two doubles).
double one_plus_ex(double x) {
    constexpr double e_hi = 2.718281828459045;
    constexpr double e_lo = 1.4456468917292502e-16;
    return std::max(0.0, std::fma(e_hi, x, 1.0) + e_lo * x);
}

// Halley iteration on f(w) = w e^w - x (Corless et al. 1996, eq. 5.9).
double halley(double w, double x) {
    for (int i = 0; i < 60; ++i) {
        const double ew = std::exp(w);
        const double f = w * ew - x;
        const double wp1 = w + 1.0;
        if (wp1 == 0.0)
            return w;
        const double step = f / (ew * wp1 - (w + 2.0) * f / (2.0 * wp1));
        w -= step;
        if (std::fabs(step) <= 2.0 * kEps * std::max(1.0, std::fabs(w)))
            break;
    }
    return w;
}

// Halley iteration on g(w) = w + ln|w| - L, the logarithm of |w e^w| = e^L: no overflow for
// large W_0 and no underflow for W_-1 of tiny arguments.
double halley_log(double w, double log_abs_x) {
    for (int i = 0; i < 60; ++i) {
        const double g = w + std::log(std::fabs(w)) - log_abs_x;
        const double g1 = 1.0 + 1.0 / w;
        const double g2 = -1.0 / (w * w);
        const double step = g / g1 / (1.0 - 0.5 * g * g2 / (g1 * g1));
        w -= step;
        if (std::fabs(step) <= 2.0 * kEps * std::fabs(w))
            break;
    }
    return w;
}

void require_branch_domain(double x) {
    if (std::isnan(x) || !(x >= -kInvE))
        throw InputError("x must be >= -1/e (-0.36787944117144233), got " + format_value(x));
}

} // namespace

double lambert_w0(double x) {
    require_branch_domain(x);
    if (std::isinf(x))
        throw InputError("x must be finite, got " + format_value(x));
    if (x == 0.0)
        return 0.0;
    const double q = one_plus_ex(x);
    const double p = std::sqrt(2.0 * q);
    if (p < 0.01)
        return branch_series(p);
    if (std::fabs(x) < 1e-8) // W0(x) = x - x^2 + 3/2 x^3 - ...
        return x * (1.0 - x * (1.0 - 1.5 * x));
    if (x > kE) {
        const double l1 = std::log(x);
        const double l2 = std::log(l1);
        return halley_log(l1 - l2 + l2 / l1, l1);
    }
    // Starting value: branch series near -1/e, Winitzki's (2003) approximation elsewhere.
    double w;
    if (p < 0.5) {
        w = branch_series(p);
    } else {
        const double l = std::log1p(x);
        w = l * (1.0 - std::log1p(l) / (2.0 + l));
    }
    return halley(w, x);
}

double lambert_wm1(double x) {
    require_branch_domain(x);
    if (!(x < 0.0))
        throw InputError("x must be < 0 on the branch W_-1, got " + format_value(x));
    const double q = one_plus_ex(x);
    const double p = std::sqrt(2.0 * q);
    if (p < 0.01)
        return branch_series(-p);
    if (p < 0.5)
        return halley(branch_series(-p), x);
    const double l1 = std::log(-x);
    const double l2 = std::log(-l1);
    return halley_log(l1 - l2 + l2 / l1, l1);
}

double lambert_w(double x, int branch) {
    if (branch == 0)
        return lambert_w0(x);
    if (branch == -1)
        return lambert_wm1(x);
    throw InputError("branch must be 0 or -1, got " + std::to_string(branch));
}

double lambert_wm1_exp(double log_minus_x) {
    const double l = log_minus_x;
    if (std::isnan(l) || !(l <= -1.0))
        throw InputError("log_minus_x must be <= -1 (the argument -exp(L) >= -1/e), got " +
                         format_value(l));
    if (std::isinf(l))
        return -INFINITY;
    const double p = std::sqrt(-2.0 * std::expm1(l + 1.0));
    if (p < 0.01)
        return branch_series(-p);
    if (p < 0.5)
        return halley(branch_series(-p), -std::exp(l));
    const double l2 = std::log(-l);
    return halley_log(l - l2 + l2 / l, l);
}

double isothermal_sound_speed(double temperature, double mean_molecular_mass) {
    require_positive("temperature", temperature);
    require_positive("mean_molecular_mass", mean_molecular_mass);
    return std::sqrt(k_B * temperature / mean_molecular_mass);
}

double sonic_radius(double temperature, double mean_molecular_mass, double planet_mass) {
    require_positive("temperature", temperature);
    require_positive("mean_molecular_mass", mean_molecular_mass);
    require_positive("planet_mass", planet_mass);
    return G * planet_mass * mean_molecular_mass / (2.0 * k_B * temperature);
}

double parker_mach_number(double radius_ratio) {
    const double x = radius_ratio;
    require_positive("radius_ratio", x);
    if (x == 1.0)
        return 1.0;
    // ln D = 3 - 4/x - 4 ln x <= -1, and ln D + 1 = -4 (ln x + 1/x - 1), formed without the
    // cancellation near the sonic point: ln x + 1/x - 1 = log1p(d) - d/(1 + d), d = x - 1.
    const double d = x - 1.0;
    const double log_d_plus_1 =
        std::fabs(d) < 0.5 ? -4.0 * (std::log1p(d) - d / x) : 4.0 - 4.0 / x - 4.0 * std::log(x);
    const double log_d = log_d_plus_1 - 1.0;
    const double p = std::sqrt(-2.0 * std::expm1(log_d_plus_1)); // sqrt(2 (1 - e D))
    double w;
    if (x < 1.0) {
        if (log_d < -40.0) // W0(-D) = -D (1 + D + ...), D < 5e-18
            return std::exp(0.5 * log_d);
        w = p < 0.01 ? branch_series(p) : lambert_w0(-std::exp(log_d));
    } else {
        w = p < 0.01 ? branch_series(-p) : lambert_wm1_exp(log_d);
    }
    return std::sqrt(-w);
}

double parker_wind_speed(double radius, double temperature, double mean_molecular_mass,
                         double planet_mass) {
    require_positive("radius", radius);
    const double rs = sonic_radius(temperature, mean_molecular_mass, planet_mass);
    return isothermal_sound_speed(temperature, mean_molecular_mass) *
           parker_mach_number(radius / rs);
}

double parker_density(double radius, double base_radius, double base_density, double temperature,
                      double mean_molecular_mass, double planet_mass) {
    require_positive("radius", radius);
    require_positive("base_radius", base_radius);
    require_non_negative("base_density", base_density);
    const double rs = sonic_radius(temperature, mean_molecular_mass, planet_mass);
    const double u0 = parker_mach_number(base_radius / rs);
    const double u = parker_mach_number(radius / rs);
    const double ratio = base_radius / radius;
    return base_density * ratio * ratio * (u0 / u);
}

double parker_mass_loss(double base_radius, double base_density, double temperature,
                        double mean_molecular_mass, double planet_mass) {
    require_positive("base_radius", base_radius);
    require_non_negative("base_density", base_density);
    const double cs = isothermal_sound_speed(temperature, mean_molecular_mass);
    const double rs = sonic_radius(temperature, mean_molecular_mass, planet_mass);
    const double u0 = parker_mach_number(base_radius / rs);
    return 4.0 * pi * base_radius * base_radius * base_density * mean_molecular_mass * cs * u0;
}

namespace {

// Recombination-limited rate per sqrt(F) [kg s^-1 (W m^-2)^-1/2], inputs checked by callers.
double recombination_coefficient_b(double planet_mass, double planet_radius, double temperature,
                                   double alpha, double photon_energy) {
    const double cs2 = 2.0 * k_B * temperature / hydrogen_atom_mass; // fully ionised hydrogen
    const double cs = std::sqrt(cs2);
    const double gm = G * planet_mass;
    const double rs = gm / (2.0 * cs2);
    const double h = cs2 * planet_radius * planet_radius / gm;
    const double n_per_sqrt_f = 1.0 / std::sqrt(photon_energy * alpha * h);
    if (!(rs > planet_radius)) // the base is at or beyond the sonic point
        return 4.0 * pi * planet_radius * planet_radius * cs * hydrogen_atom_mass * n_per_sqrt_f;
    const double exponent = gm / (planet_radius * cs2) * (planet_radius / rs - 1.0);
    return 4.0 * pi * rs * rs * cs * hydrogen_atom_mass * n_per_sqrt_f * std::exp(exponent);
}

void check_recombination(double planet_mass, double planet_radius, double temperature, double alpha,
                         double photon_energy) {
    require_positive("planet_mass", planet_mass);
    require_positive("planet_radius", planet_radius);
    require_positive("temperature", temperature);
    require_positive("recombination_coefficient", alpha);
    require_positive("photon_energy", photon_energy);
}

} // namespace

double recombination_limited_mass_loss(double xuv_flux, double planet_mass, double planet_radius,
                                       double temperature, double recombination_coefficient,
                                       double photon_energy) {
    require_non_negative("xuv_flux", xuv_flux);
    check_recombination(planet_mass, planet_radius, temperature, recombination_coefficient,
                        photon_energy);
    return recombination_coefficient_b(planet_mass, planet_radius, temperature,
                                       recombination_coefficient, photon_energy) *
           std::sqrt(xuv_flux);
}

double xuv_driven_mass_loss(double efficiency, double planet_radius, double xuv_radius,
                            double xuv_flux, double planet_mass, double roche_factor,
                            double temperature, double recombination_coefficient,
                            double photon_energy) {
    check_recombination(planet_mass, planet_radius, temperature, recombination_coefficient,
                        photon_energy);
    const double energy = energy_limited_mass_loss(efficiency, planet_radius, xuv_radius, xuv_flux,
                                                   planet_mass, roche_factor);
    const double recombination =
        recombination_limited_mass_loss(xuv_flux, planet_mass, planet_radius, temperature,
                                        recombination_coefficient, photon_energy);
    return std::min(energy, recombination);
}

double recombination_transition_flux(double efficiency, double planet_radius, double xuv_radius,
                                     double planet_mass, double roche_factor, double temperature,
                                     double recombination_coefficient, double photon_energy) {
    check_recombination(planet_mass, planet_radius, temperature, recombination_coefficient,
                        photon_energy);
    const double a = energy_limited_mass_loss(efficiency, planet_radius, xuv_radius, 1.0,
                                              planet_mass, roche_factor);
    const double b = recombination_coefficient_b(planet_mass, planet_radius, temperature,
                                                 recombination_coefficient, photon_energy);
    return (b / a) * (b / a);
}

double scale_height(double temperature, double mean_molecular_mass, double planet_mass,
                    double radius) {
    require_positive("temperature", temperature);
    require_positive("mean_molecular_mass", mean_molecular_mass);
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
    return k_B * temperature * radius * radius / (mean_molecular_mass * G * planet_mass);
}

double xuv_absorption_radius(double base_radius, double base_density, double scale_height_,
                             double cross_section, bool chord) {
    require_positive("base_radius", base_radius);
    require_non_negative("base_density", base_density);
    require_positive("scale_height", scale_height_);
    require_non_negative("cross_section", cross_section);
    const double h = scale_height_;
    const double tau0 = cross_section * base_density * h; // vertical optical depth at r0
    if (!(tau0 > 0.0))
        return base_radius;
    const double log_tau0 = std::log(cross_section) + std::log(base_density) + std::log(h);
    if (!chord)
        return log_tau0 > 0.0 ? base_radius + h * log_tau0 : base_radius;
    // tau_c(r0) = tau0 sqrt(2 pi r0 / H); y = b/H solves y - ln(y)/2 = c, the larger root.
    const double y0 = base_radius / h;
    if (!(log_tau0 + 0.5 * std::log(2.0 * pi * y0) > 0.0))
        return base_radius;
    const double c = log_tau0 + 0.5 * std::log(2.0 * pi) + y0;
    const double w = lambert_wm1_exp(std::log(2.0) - 2.0 * c);
    return std::max(base_radius, -0.5 * h * w);
}

} // namespace exosieve
