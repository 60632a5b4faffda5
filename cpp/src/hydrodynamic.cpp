#include "exosieve/hydrodynamic.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/outflow.hpp"

namespace exosieve {

using constants::G;
using constants::k_B;

const char* regime_name(Regime regime) {
    switch (regime) {
    case Regime::Jeans:
        return "jeans";
    case Regime::EnhancedJeans:
        return "enhanced_jeans";
    case Regime::Transition:
        return "transition";
    case Regime::Hydrodynamic:
        return "hydrodynamic";
    }
    return "unknown";
}

Regime regime_named(const std::string& name) {
    std::string known;
    for (Regime k : all_regimes) {
        if (name == regime_name(k))
            return k;
        known += (known.empty() ? "" : ", ") + std::string(regime_name(k));
    }
    throw InputError("regime: no regime is named '" + name + "' (known: " + known + ")");
}

void RegimeThresholds::validate() const {
    require_positive("hydrodynamic threshold", hydrodynamic);
    require_positive("transition threshold", transition);
    require_positive("enhanced threshold", enhanced);
    if (!(hydrodynamic < transition && transition < enhanced))
        throw InputError("regime thresholds must satisfy hydrodynamic < transition < enhanced, "
                         "got " +
                         format_value(hydrodynamic) + ", " + format_value(transition) + ", " +
                         format_value(enhanced));
}

Regime classify_regime(double lambda, const RegimeThresholds& t) {
    if (lambda > t.enhanced)
        return Regime::Jeans;
    if (lambda > t.transition)
        return Regime::EnhancedJeans;
    if (lambda > t.hydrodynamic)
        return Regime::Transition;
    return Regime::Hydrodynamic;
}

namespace {
// The formulas on checked arguments, shared by the scalar and the array forms.
double roche_ratio_of(double planet_mass, double star_mass, double a, double radius) {
    return a * std::cbrt(planet_mass / (3.0 * star_mass)) / radius;
}

double energy_limited_of(double efficiency, double planet_radius, double xuv_radius,
                         double xuv_flux, double planet_mass, double roche_factor) {
    return efficiency * constants::pi * planet_radius * xuv_radius * xuv_radius * xuv_flux /
           (G * planet_mass * roche_factor);
}

double crossover_of(double light_mass, double temperature, double light_flux, double b,
                    double gravity, double light_mole_fraction) {
    return light_mass + k_B * temperature * light_flux / (b * gravity * light_mole_fraction);
}

double dragged_of(double mass, double mole_fraction, double light_mass, double light_flux,
                  double light_mole_fraction, double crossover) {
    if (!(mass < crossover) || !(crossover > light_mass))
        return 0.0;
    return mole_fraction / light_mole_fraction * light_flux * (crossover - mass) /
           (crossover - light_mass);
}

void check_energy_limited(ArrayArg efficiency, ArrayArg planet_radius, ArrayArg xuv_radius,
                          ArrayArg xuv_flux, ArrayArg planet_mass, ArrayArg roche_factor) {
    require_positive("efficiency", efficiency);
    require_at_most("efficiency", efficiency, 1.0);
    require_positive("planet_radius", planet_radius);
    require_positive("xuv_radius", xuv_radius);
    require_non_negative("xuv_flux", xuv_flux);
    require_positive("planet_mass", planet_mass);
    require_positive("roche_factor", roche_factor);
    require_at_most("roche_factor", roche_factor, 1.0);
}

void check_crossover(ArrayArg light_mass, ArrayArg temperature, ArrayArg light_flux,
                     ArrayArg diffusion_parameter, ArrayArg gravity, ArrayArg light_mole_fraction) {
    require_positive("light_mass", light_mass);
    require_positive("temperature", temperature);
    require_non_negative("light_flux", light_flux);
    require_positive("diffusion_parameter", diffusion_parameter);
    require_positive("gravity", gravity);
    require_positive("light_mole_fraction", light_mole_fraction);
}

void check_dragged(ArrayArg mass, ArrayArg mole_fraction, ArrayArg light_mass, ArrayArg light_flux,
                   ArrayArg light_mole_fraction, ArrayArg crossover) {
    require_positive("mass", mass);
    require_non_negative("mole_fraction", mole_fraction);
    require_positive("light_mass", light_mass);
    require_non_negative("light_flux", light_flux);
    require_positive("light_mole_fraction", light_mole_fraction);
    require_positive("crossover_mass", crossover);
}

ArrayArg one(const double& value) {
    return ArrayArg{&value, 1};
}
} // namespace

double roche_lobe_ratio(double planet_mass, double star_mass, double semi_major_axis,
                        double radius) {
    require_positive("planet_mass", planet_mass);
    require_positive("star_mass", star_mass);
    require_positive("semi_major_axis", semi_major_axis);
    require_positive("radius", radius);
    return roche_ratio_of(planet_mass, star_mass, semi_major_axis, radius);
}

double roche_lobe_factor(double xi) {
    require_finite("roche lobe ratio xi", xi);
    if (!(xi > 1.0))
        throw InputError(
            "roche lobe ratio xi must be > 1 (the planet inside its Roche lobe), got " +
            format_value(xi));
    return 1.0 - 1.5 / xi + 0.5 / (xi * xi * xi);
}

double energy_limited_mass_loss(double efficiency, double planet_radius, double xuv_radius,
                                double xuv_flux, double planet_mass, double roche_factor) {
    check_energy_limited(one(efficiency), one(planet_radius), one(xuv_radius), one(xuv_flux),
                         one(planet_mass), one(roche_factor));
    return energy_limited_of(efficiency, planet_radius, xuv_radius, xuv_flux, planet_mass,
                             roche_factor);
}

double crossover_mass(double light_mass, double temperature, double light_flux,
                      double diffusion_parameter, double gravity, double light_mole_fraction) {
    check_crossover(one(light_mass), one(temperature), one(light_flux), one(diffusion_parameter),
                    one(gravity), one(light_mole_fraction));
    return crossover_of(light_mass, temperature, light_flux, diffusion_parameter, gravity,
                        light_mole_fraction);
}

double dragged_flux(double mass, double mole_fraction, double light_mass, double light_flux,
                    double light_mole_fraction, double crossover) {
    check_dragged(one(mass), one(mole_fraction), one(light_mass), one(light_flux),
                  one(light_mole_fraction), one(crossover));
    return dragged_of(mass, mole_fraction, light_mass, light_flux, light_mole_fraction, crossover);
}

void roche_lobe_ratio(ArrayArg planet_mass, ArrayArg star_mass, ArrayArg semi_major_axis,
                      ArrayArg radius, double* out, std::size_t count) {
    check_lengths(count, {planet_mass, star_mass, semi_major_axis, radius});
    require_positive("planet_mass", planet_mass);
    require_positive("star_mass", star_mass);
    require_positive("semi_major_axis", semi_major_axis);
    require_positive("radius", radius);
    for (std::size_t i = 0; i < count; ++i)
        out[i] = roche_ratio_of(planet_mass[i], star_mass[i], semi_major_axis[i], radius[i]);
}

void energy_limited_mass_loss(ArrayArg efficiency, ArrayArg planet_radius, ArrayArg xuv_radius,
                              ArrayArg xuv_flux, ArrayArg planet_mass, ArrayArg roche_factor,
                              double* out, std::size_t count) {
    check_lengths(count,
                  {efficiency, planet_radius, xuv_radius, xuv_flux, planet_mass, roche_factor});
    check_energy_limited(efficiency, planet_radius, xuv_radius, xuv_flux, planet_mass,
                         roche_factor);
    for (std::size_t i = 0; i < count; ++i)
        out[i] = energy_limited_of(efficiency[i], planet_radius[i], xuv_radius[i], xuv_flux[i],
                                   planet_mass[i], roche_factor[i]);
}

void crossover_mass(ArrayArg light_mass, ArrayArg temperature, ArrayArg light_flux,
                    ArrayArg diffusion_parameter, ArrayArg gravity, ArrayArg light_mole_fraction,
                    double* out, std::size_t count) {
    check_lengths(count, {light_mass, temperature, light_flux, diffusion_parameter, gravity,
                          light_mole_fraction});
    check_crossover(light_mass, temperature, light_flux, diffusion_parameter, gravity,
                    light_mole_fraction);
    for (std::size_t i = 0; i < count; ++i)
        out[i] = crossover_of(light_mass[i], temperature[i], light_flux[i], diffusion_parameter[i],
                              gravity[i], light_mole_fraction[i]);
}

void dragged_flux(ArrayArg mass, ArrayArg mole_fraction, ArrayArg light_mass, ArrayArg light_flux,
                  ArrayArg light_mole_fraction, ArrayArg crossover, double* out,
                  std::size_t count) {
    check_lengths(count,
                  {mass, mole_fraction, light_mass, light_flux, light_mole_fraction, crossover});
    check_dragged(mass, mole_fraction, light_mass, light_flux, light_mole_fraction, crossover);
    for (std::size_t i = 0; i < count; ++i)
        out[i] = dragged_of(mass[i], mole_fraction[i], light_mass[i], light_flux[i],
                            light_mole_fraction[i], crossover[i]);
}

double DiffusionLaw::operator()(double temperature) const {
    return exponent == 0.0 ? coefficient : coefficient * std::pow(temperature, exponent);
}

void partition_mass_loss(double mass_loss, double temperature, double planet_mass,
                         std::size_t escaping, const double* mass, const double* mole_fraction,
                         const double* diffusion_parameter, std::size_t n, double* rates) {
    std::fill(rates, rates + n, 0.0);
    const double m1 = mass[escaping];
    const double x1 = mole_fraction[escaping];
    if (!(mass_loss > 0.0) || !(x1 > 0.0))
        return;
    // Dragged species j: threshold q_j and slope weight w_j = m_j x_j / x_1, so that
    // total(Q1) = m1 Q1 + sum_j w_j max(0, Q1 - q_j).
    struct Dragged {
        std::size_t index;
        double threshold;
        double weight;
    };
    Dragged list[64];
    std::vector<Dragged> heap;
    Dragged* dragged = list;
    if (n > 64) {
        heap.resize(n);
        dragged = heap.data();
    }
    std::size_t count = 0;
    const double scale = 4.0 * constants::pi * G * planet_mass * x1 / (k_B * temperature);
    for (std::size_t j = 0; j < n; ++j) {
        if (j == escaping || !(diffusion_parameter[j] > 0.0) || mass[j] < m1)
            continue;
        if (!(mole_fraction[j] > 0.0))
            continue;
        dragged[count++] = {j, scale * (mass[j] - m1) * diffusion_parameter[j],
                            mass[j] * mole_fraction[j] / x1};
    }
    std::sort(dragged, dragged + count,
              [](const Dragged& a, const Dragged& b) { return a.threshold < b.threshold; });
    // Walk the breakpoints: on [q_k, q_{k+1}] total(Q1) is linear with slope m1 + sum w_j.
    double slope = m1, offset = 0.0; // total(Q1) = slope Q1 - offset on the current piece
    double light = 0.0;
    std::size_t k = 0;
    for (;; ++k) {
        const double end = k < count ? dragged[k].threshold : INFINITY;
        const double total_at_end = slope * end - offset;
        if (!(total_at_end < mass_loss)) {
            light = (mass_loss + offset) / slope;
            break;
        }
        slope += dragged[k].weight;
        offset += dragged[k].weight * dragged[k].threshold;
    }
    rates[escaping] = light;
    for (std::size_t j = 0; j < k; ++j)
        rates[dragged[j].index] =
            mole_fraction[dragged[j].index] / x1 * std::max(0.0, light - dragged[j].threshold);
}

void XuvAbsorption::validate() const {
    require_positive("absorption base_density", base_density);
    require_positive("absorption cross_section", cross_section);
    require_positive("absorption mean_molecular_mass", mean_molecular_mass);
    require_non_negative("absorption temperature", temperature);
}

void RecombinationLimit::validate() const {
    require_positive("recombination temperature", temperature);
    require_positive("recombination_coefficient", recombination_coefficient);
    require_positive("photon_energy", photon_energy);
}

void TransonicWind::validate() const {
    require_positive("transonic temperature", temperature);
    require_positive("transonic base_density", base_density);
    require_non_negative("transonic mean_molecular_mass", mean_molecular_mass);
}

// The defaults of RecombinationLimit are those of the standalone functions.
static_assert(RecombinationLimit{}.temperature == RecombinationDefaults::temperature);
static_assert(RecombinationLimit{}.recombination_coefficient ==
              RecombinationDefaults::recombination_coefficient);
static_assert(RecombinationLimit{}.photon_energy == RecombinationDefaults::photon_energy);

void HydrodynamicOptions::validate() const {
    require_positive("efficiency", efficiency);
    if (efficiency > 1.0)
        throw InputError("efficiency must be <= 1, got " + format_value(efficiency));
    require_non_negative("xuv_radius", xuv_radius);
    for (const auto& [name, law] : diffusion) {
        if (!std::isfinite(law.coefficient) || !(law.coefficient >= 0.0))
            throw InputError("diffusion coefficient of " + name + " must be finite and >= 0, got " +
                             format_value(law.coefficient));
        require_finite(("diffusion exponent of " + name).c_str(), law.exponent);
    }
    if (absorption) {
        absorption->validate();
        if (xuv_radius > 0.0)
            throw InputError("xuv_radius " + format_value(xuv_radius) +
                             " m and an absorption model are both given: choose one");
    }
    if (recombination)
        recombination->validate();
    if (transonic)
        transonic->validate();
}

} // namespace exosieve
