#pragma once
// Internal: where a case's values live in CaseSpec::values (the slots of the parameters the
// reader and the builder name) and what the case-table reader, the config builder and the
// sampler share about a value (its allowed range, the error naming its column).

#include <cmath>
#include <cstddef>
#include <limits>
#include <stdexcept>
#include <string>

#include "exosieve/case_table.hpp"
#include "exosieve/errors.hpp"

namespace exosieve::detail {

// No slot, column or species.
inline constexpr std::size_t none = std::numeric_limits<std::size_t>::max();

// Per-species parameters: their index in species_parameters().
inline constexpr std::size_t x_parameter = 0, inventory_parameter = 1, given_loss_parameter = 2,
                             given_loss_exponent_parameter = 3, exobase_x_parameter = 4,
                             drag_diffusion_parameter = 5, drag_diffusion_exponent_parameter = 6;

// "<prefix><species>" without "<species>".
inline std::string species_prefix(const CaseParameter& p) {
    return p.name.substr(0, p.name.size() - std::string("<species>").size());
}

// Why the value of `column` cannot be used.
[[noreturn]] inline void bad_value(const std::string& column, const std::string& what) {
    throw InputError("column '" + column + "': " + what);
}

// The allowed range of `p` for messages, e.g. "> 0 and <= 1".
inline std::string range_text(const CaseParameter& p) {
    constexpr double inf = std::numeric_limits<double>::infinity();
    if (p.lower == -inf && p.upper == inf)
        return "finite";
    std::string s;
    if (p.lower != -inf)
        s += (p.lower_open ? "> " : ">= ") + format_value(p.lower);
    if (p.upper != inf)
        s += (s.empty() ? "" : " and ") + std::string("<= ") + format_value(p.upper);
    return s;
}

// Whether `v` is inside the allowed range of `p`.
inline bool in_range(const CaseParameter& p, double v) {
    if (!std::isfinite(v))
        return false;
    if (p.lower_open ? !(v > p.lower) : !(v >= p.lower))
        return false;
    return v <= p.upper;
}

// Slot of a parameter in CaseSpec::values (its index in case_parameters()).
inline std::size_t slot_of(const char* name) {
    const auto& params = case_parameters();
    for (std::size_t k = 0; k < params.size(); ++k)
        if (params[k].name == name)
            return k;
    throw std::logic_error(std::string("no case parameter '") + name + "'");
}

// Slots of the parameters build_config() reads, looked up once.
struct Slots {
    std::size_t planet_mass = slot_of("planet_mass"), planet_radius = slot_of("planet_radius"),
                core_mass = slot_of("core_mass"), envelope_fraction = slot_of("envelope_fraction"),
                exobase_altitude = slot_of("exobase_altitude"),
                exobase_density = slot_of("exobase_density"),
                homopause_altitude = slot_of("homopause_altitude"),
                homopause_density = slot_of("homopause_density"),
                homopause_temperature = slot_of("homopause_temperature"),
                bates_shape = slot_of("bates_shape"),
                diffusion_limited = slot_of("diffusion_limited"),
                exobase_temperature = slot_of("exobase_temperature"),
                exobase_temperature_end = slot_of("exobase_temperature_end"),
                temperature_reference = slot_of("temperature_reference"),
                temperature_reference_flux = slot_of("temperature_reference_flux"),
                temperature_exponent = slot_of("temperature_exponent"),
                temperature_min = slot_of("temperature_min"),
                temperature_max = slot_of("temperature_max"),
                semi_major_axis = slot_of("semi_major_axis"), star_mass = slot_of("star_mass"),
                star_luminosity = slot_of("star_luminosity"),
                xuv_saturation_ratio = slot_of("xuv_saturation_ratio"),
                xuv_saturation_time = slot_of("xuv_saturation_time"),
                xuv_decay_index = slot_of("xuv_decay_index"),
                heating_efficiency = slot_of("heating_efficiency"),
                inventory = slot_of("inventory"), surface_pressure = slot_of("surface_pressure"),
                age_start = slot_of("age_start"), age_end = slot_of("age_end"),
                star_age = slot_of("star_age"), rtol = slot_of("rtol"),
                max_steps = slot_of("max_steps"),
                threshold_enhanced = slot_of("threshold_enhanced"),
                threshold_transition = slot_of("threshold_transition"),
                threshold_hydrodynamic = slot_of("threshold_hydrodynamic"), drag = slot_of("drag");
};

inline const Slots& slots() {
    static const Slots s;
    return s;
}

// Slots of the options of energy-limited escape and of the given losses' reference flux.
struct LossSlots {
    std::size_t cross_section = slot_of("xuv_absorption_cross_section"),
                base_density = slot_of("xuv_absorption_base_density"),
                absorption_temperature = slot_of("xuv_absorption_temperature"),
                molecular_mass = slot_of("xuv_absorption_molecular_mass"),
                chord = slot_of("xuv_absorption_chord"),
                recombination_limit = slot_of("recombination_limit"),
                recombination_temperature = slot_of("recombination_temperature"),
                recombination_coefficient = slot_of("recombination_coefficient"),
                photon_energy = slot_of("recombination_photon_energy"),
                transonic_wind = slot_of("transonic_wind"),
                transonic_temperature = slot_of("transonic_temperature"),
                transonic_base_density = slot_of("transonic_base_density"),
                transonic_molecular_mass = slot_of("transonic_molecular_mass"),
                given_loss_reference_flux = slot_of("given_loss_reference_flux");
};

inline const LossSlots& loss_slots() {
    static const LossSlots s;
    return s;
}

} // namespace exosieve::detail
