#include "exosieve/species.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <mutex>
#include <sstream>

#include "closest_names.hpp"
#include "csv_text.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"

namespace exosieve {

double Species::mass_u() const {
    return mass / constants::amu;
}

void validate(const Species& s) {
    if (s.name.empty())
        throw InputError("species name must not be empty");
    auto at_least = [](double v, double low, bool open) {
        return std::isfinite(v) && (open ? v > low : v >= low);
    };
    if (at_least(s.mass, 0.0, true) && at_least(s.lj_diameter, 0.0, false) &&
        at_least(s.lj_well_depth, 0.0, false) && at_least(s.cross_section, 0.0, false) &&
        std::isfinite(s.thermal_diffusion_factor))
        return; // the messages below are built only for a bad species: runs validate often
    const std::string prefix = "species '" + s.name + "': ";
    require_positive((prefix + "mass").c_str(), s.mass);
    require_non_negative((prefix + "lj_diameter").c_str(), s.lj_diameter);
    require_non_negative((prefix + "lj_well_depth").c_str(), s.lj_well_depth);
    require_non_negative((prefix + "cross_section").c_str(), s.cross_section);
    require_finite((prefix + "thermal_diffusion_factor").c_str(), s.thermal_diffusion_factor);
}

SpeciesRegistry SpeciesRegistry::from_csv(const std::string& csv_text, const std::string& origin) {
    static const std::vector<std::string> required = {"name",
                                                      "mass_u",
                                                      "mass_source",
                                                      "lj_diameter_angstrom",
                                                      "lj_well_depth_K",
                                                      "lj_source",
                                                      "cross_section_m2",
                                                      "cross_section_source",
                                                      "thermal_diffusion_factor",
                                                      "thermal_diffusion_source"};
    SpeciesRegistry registry;
    detail::for_each_csv_row(csv_text, origin, required, [&](const detail::CsvRow& row) {
        Species s;
        s.name = row.field("name");
        s.mass = row.number("mass_u") * constants::amu;
        s.mass_source = row.field("mass_source");
        s.lj_diameter = row.number("lj_diameter_angstrom") * 1e-10;
        s.lj_well_depth = row.number("lj_well_depth_K");
        s.lj_source = row.field("lj_source");
        s.cross_section = row.number("cross_section_m2");
        s.cross_section_source = row.field("cross_section_source");
        s.thermal_diffusion_factor = row.number("thermal_diffusion_factor");
        s.thermal_diffusion_source = row.field("thermal_diffusion_source");
        registry.add(s);
    });
    return registry;
}

const Species& SpeciesRegistry::get(const std::string& name) const {
    {
        std::shared_lock<std::shared_mutex> reading(*lock_);
        const auto it = by_name_.find(name);
        if (it != by_name_.end())
            return *it->second;
    }
    std::string message = "unknown species '" + name + "'";
    const auto near = closest(name);
    if (!near.empty()) {
        message += "; closest names: ";
        for (std::size_t i = 0; i < near.size(); ++i)
            message += (i ? ", " : "") + near[i];
    }
    throw InputError(message);
}

bool SpeciesRegistry::contains(const std::string& name) const {
    std::shared_lock<std::shared_mutex> reading(*lock_);
    return by_name_.count(name) > 0;
}

void SpeciesRegistry::add(const Species& s) {
    validate(s);
    std::unique_lock<std::shared_mutex> writing(*lock_);
    entries_.push_back(s);
    by_name_[s.name] = &entries_.back();
}

std::vector<std::string> SpeciesRegistry::names() const {
    std::shared_lock<std::shared_mutex> reading(*lock_);
    std::vector<std::string> out;
    out.reserve(by_name_.size());
    for (const auto& entry : by_name_)
        out.push_back(entry.first);
    return out;
}

std::vector<std::string> SpeciesRegistry::closest(const std::string& name,
                                                  std::size_t count) const {
    std::vector<std::string> names;
    {
        std::shared_lock<std::shared_mutex> reading(*lock_);
        names.reserve(by_name_.size());
        for (const auto& entry : by_name_)
            names.push_back(entry.first);
    }
    return detail::closest_names(name, names, count);
}

SpeciesRegistry& default_registry() {
    static SpeciesRegistry registry =
        SpeciesRegistry::from_csv(species_table_csv(), "data/species.csv");
    return registry;
}

const Species& species(const std::string& name) {
    return default_registry().get(name);
}

} // namespace exosieve
