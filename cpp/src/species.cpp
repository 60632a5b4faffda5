#include "exosieve/species.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <sstream>

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
    const std::string prefix = "species '" + s.name + "': ";
    require_positive((prefix + "mass").c_str(), s.mass);
    require_non_negative((prefix + "lj_diameter").c_str(), s.lj_diameter);
    require_non_negative((prefix + "lj_well_depth").c_str(), s.lj_well_depth);
    require_non_negative((prefix + "cross_section").c_str(), s.cross_section);
    require_finite((prefix + "thermal_diffusion_factor").c_str(), s.thermal_diffusion_factor);
}

namespace {

using detail::parse_number;
using detail::split_csv_line;

std::size_t edit_distance(const std::string& a, const std::string& b) {
    std::vector<std::size_t> row(b.size() + 1);
    for (std::size_t j = 0; j <= b.size(); ++j)
        row[j] = j;
    for (std::size_t i = 1; i <= a.size(); ++i) {
        std::size_t diagonal = row[0];
        row[0] = i;
        for (std::size_t j = 1; j <= b.size(); ++j) {
            const std::size_t above = row[j];
            const bool same = std::tolower(static_cast<unsigned char>(a[i - 1])) ==
                              std::tolower(static_cast<unsigned char>(b[j - 1]));
            row[j] = std::min({row[j] + 1, row[j - 1] + 1, diagonal + (same ? 0 : 1)});
            diagonal = above;
        }
    }
    return row[b.size()];
}

} // namespace

SpeciesRegistry SpeciesRegistry::from_csv(const std::string& csv_text, const std::string& origin) {
    static const std::vector<std::string> required = {"name",
                                                      "mass_u",
                                                      "mass_source",
                                                      "lj_diameter_angstrom",
                                                      "lj_well_depth_K",
                                                      "lj_source",
                                                      "cross_section_m2",
                                                      "cross_section_source",
                                                      "thermal_diffusion_factor"};
    SpeciesRegistry registry;
    std::istringstream in(csv_text);
    std::string line;
    std::vector<std::string> header;
    std::size_t line_number = 0;
    while (std::getline(in, line)) {
        ++line_number;
        if (line.empty() || line[0] == '#' || line.find_first_not_of(" \t\r") == std::string::npos)
            continue;
        auto fields = split_csv_line(line);
        if (header.empty()) {
            header = fields;
            for (const auto& column : required)
                if (std::find(header.begin(), header.end(), column) == header.end())
                    throw InputError(origin + ": missing column '" + column + "'");
            continue;
        }
        const std::string where = origin + " line " + std::to_string(line_number);
        if (fields.size() != header.size())
            throw InputError(where + ": " + std::to_string(fields.size()) + " fields, header has " +
                             std::to_string(header.size()));
        auto field = [&](const std::string& column) -> const std::string& {
            const auto at = std::find(header.begin(), header.end(), column) - header.begin();
            return fields[static_cast<std::size_t>(at)];
        };
        auto number = [&](const std::string& column) {
            return parse_number(field(column), where + " column " + column);
        };
        Species s;
        s.name = field("name");
        s.mass = number("mass_u") * constants::amu;
        s.mass_source = field("mass_source");
        s.lj_diameter = number("lj_diameter_angstrom") * 1e-10;
        s.lj_well_depth = number("lj_well_depth_K");
        s.lj_source = field("lj_source");
        s.cross_section = number("cross_section_m2");
        s.cross_section_source = field("cross_section_source");
        s.thermal_diffusion_factor = number("thermal_diffusion_factor");
        try {
            registry.add(s);
        } catch (const InputError& e) {
            throw InputError(where + ": " + e.what());
        }
    }
    if (header.empty())
        throw InputError(origin + ": no header line");
    return registry;
}

const Species& SpeciesRegistry::get(const std::string& name) const {
    const auto it = by_name_.find(name);
    if (it != by_name_.end())
        return it->second;
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
    return by_name_.count(name) > 0;
}

void SpeciesRegistry::add(const Species& s) {
    validate(s);
    by_name_[s.name] = s;
}

std::vector<std::string> SpeciesRegistry::names() const {
    std::vector<std::string> out;
    out.reserve(by_name_.size());
    for (const auto& entry : by_name_)
        out.push_back(entry.first);
    return out;
}

std::vector<std::string> SpeciesRegistry::closest(const std::string& name,
                                                  std::size_t count) const {
    std::vector<std::pair<std::size_t, std::string>> scored;
    for (const auto& entry : by_name_)
        scored.emplace_back(edit_distance(name, entry.first), entry.first);
    std::stable_sort(scored.begin(), scored.end(),
                     [](const auto& a, const auto& b) { return a.first < b.first; });
    std::vector<std::string> out;
    for (std::size_t i = 0; i < scored.size() && i < count; ++i)
        out.push_back(scored[i].second);
    return out;
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
