#include "exosieve/diffusion.hpp"

#include <algorithm>
#include <cmath>
#include <sstream>

#include "csv_text.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"

namespace exosieve {

using constants::G;
using constants::k_B;
using constants::pi;

namespace {

std::pair<std::string, std::string> key(const std::string& a, const std::string& b) {
    return a < b ? std::make_pair(a, b) : std::make_pair(b, a);
}

// Chapman–Enskog b without argument checks: the inner kernel for loops.
double chapman_enskog_unchecked(const Species& a, const Species& b, double temperature) {
    const double sigma = 0.5 * (a.lj_diameter + b.lj_diameter);
    const double eps = std::sqrt(a.lj_well_depth * b.lj_well_depth);
    const double mu = a.mass * b.mass / (a.mass + b.mass);
    const double omega = neufeld_collision_integral(temperature / eps);
    return 3.0 / (16.0 * sigma * sigma * omega) * std::sqrt(2.0 * k_B * temperature / (pi * mu));
}

void require_lj(const Species& s) {
    if (!(s.lj_diameter > 0.0) || !(s.lj_well_depth > 0.0))
        throw InputError("species '" + s.name + "' has no Lennard-Jones parameters (lj_diameter " +
                         format_value(s.lj_diameter) + " m, lj_well_depth " +
                         format_value(s.lj_well_depth) + " K); add a measured diffusion pair");
}

// b depends on the pair and on T only; the pair table is looked up once per pair.
struct PairEstimate {
    const DiffusionPair* fit = nullptr;
    const Species* a = nullptr;
    const Species* b = nullptr;
    double operator()(double temperature) const {
        return fit ? (*fit)(temperature) : chapman_enskog_unchecked(*a, *b, temperature);
    }
};

PairEstimate pair_estimate(const Species& a, const Species& b, DiffusionMethod method) {
    PairEstimate e;
    e.a = &a;
    e.b = &b;
    if (method == DiffusionMethod::measured_first)
        e.fit = default_diffusion_pairs().find(a.name, b.name);
    if (!e.fit) {
        require_lj(a);
        require_lj(b);
    }
    return e;
}

void check_background(const Species& s, const std::vector<Species>& background,
                      const std::vector<double>& fractions) {
    validate_composition("background", background, fractions);
    for (const Species& other : background)
        if (other.name == s.name)
            throw InputError("background must not contain the diffusing species '" + s.name + "'");
}

} // namespace

const char* diffusion_method_name(DiffusionMethod method) {
    return method == DiffusionMethod::measured_first ? "measured" : "chapman_enskog";
}

DiffusionMethod diffusion_method_named(const std::string& name, const std::string& argument) {
    for (DiffusionMethod m : {DiffusionMethod::measured_first, DiffusionMethod::chapman_enskog})
        if (name == diffusion_method_name(m))
            return m;
    throw InputError(argument + " must be 'measured' or 'chapman_enskog', got '" + name + "'");
}

double neufeld_collision_integral(double reduced_temperature) {
    // Neufeld, Janzen & Aziz (1972), J. Chem. Phys. 57, 1100, as given in Poling,
    // Prausnitz & O'Connell (2001) eq. 11-3.6.
    const double t = reduced_temperature;
    return 1.06036 / std::pow(t, 0.15610) + 0.19300 / std::exp(0.47635 * t) +
           1.03587 / std::exp(1.52996 * t) + 1.76474 / std::exp(3.89411 * t);
}

double DiffusionPair::operator()(double temperature) const {
    return coefficient * std::pow(temperature, exponent);
}

DiffusionPairTable DiffusionPairTable::from_csv(const std::string& csv_text,
                                                const std::string& origin) {
    static const std::vector<std::string> required = {"species_a", "species_b", "A_per_m_per_s",
                                                      "s", "source"};
    DiffusionPairTable table;
    detail::for_each_csv_row(csv_text, origin, required, [&](const detail::CsvRow& row) {
        DiffusionPair pair;
        pair.species_a = row.field("species_a");
        pair.species_b = row.field("species_b");
        pair.coefficient = row.number("A_per_m_per_s");
        pair.exponent = row.number("s");
        pair.source = row.field("source");
        table.add(pair);
    });
    return table;
}

const DiffusionPair* DiffusionPairTable::find(const std::string& a, const std::string& b) const {
    const auto it = by_pair_.find(key(a, b));
    return it == by_pair_.end() ? nullptr : &it->second;
}

void DiffusionPairTable::add(const DiffusionPair& pair) {
    if (pair.species_a.empty() || pair.species_b.empty() || pair.species_a == pair.species_b)
        throw InputError("diffusion pair needs two different species names, got '" +
                         pair.species_a + "' and '" + pair.species_b + "'");
    require_positive("diffusion pair coefficient A", pair.coefficient);
    require_finite("diffusion pair exponent s", pair.exponent);
    by_pair_[key(pair.species_a, pair.species_b)] = pair;
}

std::vector<DiffusionPair> DiffusionPairTable::pairs() const {
    std::vector<DiffusionPair> out;
    out.reserve(by_pair_.size());
    for (const auto& entry : by_pair_)
        out.push_back(entry.second);
    return out;
}

DiffusionPairTable& default_diffusion_pairs() {
    static DiffusionPairTable table =
        DiffusionPairTable::from_csv(diffusion_pairs_csv(), "data/diffusion_pairs.csv");
    return table;
}

double chapman_enskog_diffusion_parameter(const Species& a, const Species& b, double temperature) {
    require_positive("temperature", temperature);
    require_lj(a);
    require_lj(b);
    return chapman_enskog_unchecked(a, b, temperature);
}

double binary_diffusion_parameter(const Species& a, const Species& b, double temperature,
                                  DiffusionMethod method) {
    require_positive("temperature", temperature);
    return pair_estimate(a, b, method)(temperature);
}

void validate_composition(const char* what, const std::vector<Species>& background,
                          const std::vector<double>& fractions) {
    const std::string name(what);
    if (background.empty())
        throw InputError(name + " must name at least one species");
    if (background.size() != fractions.size())
        throw InputError(name + ": " + std::to_string(background.size()) + " species but " +
                         std::to_string(fractions.size()) + " mole fractions");
    double sum = 0.0;
    for (std::size_t j = 0; j < background.size(); ++j) {
        for (std::size_t k = 0; k < j; ++k)
            if (background[k].name == background[j].name)
                throw InputError(name + " names species '" + background[j].name + "' twice");
        const double x = fractions[j];
        if (!std::isfinite(x) || x < 0.0)
            throw InputError(name + " mole fraction of '" + background[j].name +
                             "' must be finite and >= 0, got " + format_value(x));
        sum += x;
    }
    if (!(std::fabs(sum - 1.0) <= 1e-6))
        throw InputError(name + " mole fractions must sum to one (within 1e-6), got " +
                         format_value(sum) + "; divide them by their sum if that is what you mean");
}

double mean_mass(const std::vector<Species>& background, const std::vector<double>& fractions) {
    double m = 0.0;
    for (std::size_t j = 0; j < background.size(); ++j)
        m += fractions[j] * background[j].mass;
    return m;
}

double mixture_diffusion_parameter(const Species& s, const std::vector<Species>& background,
                                   const std::vector<double>& fractions, double temperature,
                                   DiffusionMethod method) {
    require_positive("temperature", temperature);
    check_background(s, background, fractions);
    double inverse = 0.0;
    for (std::size_t j = 0; j < background.size(); ++j)
        if (fractions[j] > 0.0)
            inverse += fractions[j] / pair_estimate(s, background[j], method)(temperature);
    return 1.0 / inverse;
}

double diffusion_limited_flux(const Species& s, const std::vector<Species>& background,
                              const std::vector<double>& fractions, double mixing_ratio,
                              double temperature, double planet_mass, double radius,
                              DiffusionMethod method) {
    double out = 0.0;
    diffusion_limited_flux(s, background, fractions, ArrayArg{&mixing_ratio, 1},
                           ArrayArg{&temperature, 1}, ArrayArg{&planet_mass, 1},
                           ArrayArg{&radius, 1}, &out, 1, method);
    return out;
}

double coupled_escape_flux(double jeans_flux_eq, double b, double mixing_ratio, double beta,
                           double thickness) {
    double out = 0.0;
    coupled_escape_flux(ArrayArg{&jeans_flux_eq, 1}, ArrayArg{&b, 1}, ArrayArg{&mixing_ratio, 1},
                        ArrayArg{&beta, 1}, ArrayArg{&thickness, 1}, &out, 1);
    return out;
}

void binary_diffusion_parameter(const Species& a, const Species& b, ArrayArg temperature,
                                double* out, std::size_t count, DiffusionMethod method) {
    check_lengths(count, {temperature});
    require_positive("temperature", temperature);
    const PairEstimate estimate = pair_estimate(a, b, method);
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i)
            out[i] = estimate(temperature[i]);
    });
}

void diffusion_limited_flux(const Species& s, const std::vector<Species>& background,
                            const std::vector<double>& fractions, ArrayArg mixing_ratio,
                            ArrayArg temperature, ArrayArg planet_mass, ArrayArg radius,
                            double* out, std::size_t count, DiffusionMethod method) {
    check_lengths(count, {mixing_ratio, temperature, planet_mass, radius});
    check_background(s, background, fractions);
    require_non_negative("mixing_ratio", mixing_ratio);
    for (std::size_t i = 0; i < mixing_ratio.size; ++i)
        if (mixing_ratio.data[i] > 1.0)
            throw InputError("mixing_ratio must be <= 1, got " +
                             format_value(mixing_ratio.data[i]));
    require_positive("temperature", temperature);
    require_positive("planet_mass", planet_mass);
    require_positive("radius", radius);
    std::vector<PairEstimate> estimates;
    std::vector<double> weights;
    for (std::size_t j = 0; j < background.size(); ++j)
        if (fractions[j] > 0.0) {
            estimates.push_back(pair_estimate(s, background[j], method));
            weights.push_back(fractions[j]);
        }
    const double m_a = mean_mass(background, fractions);
    parallel_for(count, [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i) {
            const double T = temperature[i];
            double inverse = 0.0;
            for (std::size_t j = 0; j < estimates.size(); ++j)
                inverse += weights[j] / estimates[j](T);
            const double g = G * planet_mass[i] / (radius[i] * radius[i]);
            // 1/H_a - 1/H_i = (m_a - m_i) g / (k T)
            out[i] = mixing_ratio[i] / inverse * (m_a - s.mass) * g / (k_B * T);
        }
    });
}

void coupled_escape_flux(ArrayArg jeans_flux_eq, ArrayArg b, ArrayArg mixing_ratio, ArrayArg beta,
                         ArrayArg thickness, double* out, std::size_t count) {
    check_lengths(count, {jeans_flux_eq, b, mixing_ratio, beta, thickness});
    require_non_negative("jeans_flux_eq", jeans_flux_eq);
    require_positive("diffusion_parameter", b);
    require_non_negative("mixing_ratio", mixing_ratio);
    for (std::size_t i = 0; i < beta.size; ++i)
        require_finite("beta", beta.data[i]);
    require_non_negative("thickness", thickness);
    for (std::size_t i = 0; i < count; ++i) {
        const double phi_j = jeans_flux_eq[i];
        if (phi_j == 0.0) {
            out[i] = 0.0;
            continue;
        }
        if (mixing_ratio[i] == 0.0)
            throw InputError("mixing_ratio is 0 but jeans_flux_eq is " + format_value(phi_j) +
                             ": a species with no homopause abundance cannot escape");
        // (1 - exp(-beta z)) / beta, which tends to z as beta -> 0; it is > 0 for either sign.
        const double z = thickness[i], bz = beta[i] * z;
        const double depth = bz == 0.0 ? z : -std::expm1(-bz) / beta[i];
        // Phi_J / Phi_DL * (1 - exp(-beta z)) = Phi_J * depth / (b x)
        out[i] = phi_j / (1.0 + phi_j * depth / (b[i] * mixing_ratio[i]));
    }
}

} // namespace exosieve
