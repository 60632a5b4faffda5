#include "exosieve/case_table.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <set>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "case_slots.hpp"
#include "closest_names.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/outflow.hpp"
#include "table_plan.hpp"

namespace exosieve {

using detail::bad_value;
using detail::ColumnRole;
using detail::exobase_x_parameter;
using detail::in_range;
using detail::inventory_parameter;
using detail::is_split;
using detail::loss_slots;
using detail::none;
using detail::range_text;
using detail::slots;
using detail::species_prefix;
using detail::TablePlan;
using detail::width_column;
using detail::WidthColumn;
using detail::x_parameter;

namespace {

constexpr double inf = std::numeric_limits<double>::infinity();
constexpr double nan = std::numeric_limits<double>::quiet_NaN();

bool ends_with(const std::string& s, const std::string& tail) {
    return s.size() > tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}

bool starts_with(const std::string& s, const std::string& head) {
    return s.size() > head.size() && s.compare(0, head.size(), head) == 0;
}

// Text columns a table may carry besides the numeric ones (case_text_columns()).
const std::set<std::string>& text_columns() {
    static const std::set<std::string> names = [] {
        std::set<std::string> out;
        for (const CaseTextColumn& t : case_text_columns())
            if (t.name != "case")
                out.insert(t.name);
        return out;
    }();
    return names;
}

// The text columns as one list for messages.
std::string text_column_list() {
    std::string out;
    for (const CaseTextColumn& t : case_text_columns())
        out += (out.empty() ? "" : ", ") + t.name;
    return out;
}

std::string closest_parameters(const std::string& name) {
    std::vector<std::string> names;
    for (const CaseParameter& p : case_parameters())
        names.push_back(p.name);
    std::string out;
    for (const std::string& near : detail::closest_names(name, names, 3))
        out += (out.empty() ? "" : ", ") + near;
    return out;
}

// A table value for messages: as given ("-1 M_earth (-5.97e+24 kg)") when the column has a
// unit other than SI, else in SI ("-5.97e+24 kg"; a bare number for unit "1").
std::string shown_value(const CaseTable& table, const std::string& column, const std::string& si,
                        double v) {
    const std::string in_si = format_value(v) + (si.empty() || si == "1" ? "" : " " + si);
    const auto given = table.given_units.find(column);
    if (given == table.given_units.end() || given->second.second == 1.0 ||
        !(given->second.second > 0.0))
        return in_si;
    return format_value(v / given->second.second) + " " + given->second.first + " (" + in_si + ")";
}

// Parameters that are 0 or 1.
bool is_flag(std::size_t slot) {
    return slot == slots().diffusion_limited || slot == loss_slots().chord ||
           slot == loss_slots().recombination_limit || slot == loss_slots().transonic_wind ||
           slot == slots().drag;
}

} // namespace

// --- parameters -------------------------------------------------------------------------------

const std::vector<CaseParameter>& case_parameters() {
    // A default for the documentation, to 6 digits.
    auto shown = [](double v) {
        std::ostringstream out;
        out << v;
        return out.str();
    };
    // name, unit, meaning, required, uncertain, lower, lower_open, upper
    static const std::vector<CaseParameter> params{
        {"planet_mass", "kg", "planet mass (or give core_mass and envelope_fraction)", true, true,
         0.0, true, inf},
        {"planet_radius", "m", "planet radius (or give core_mass and envelope_fraction)", true,
         true, 0.0, true, inf},
        {"core_mass", "kg",
         "envelope: rock/iron core mass, instead of planet_mass and planet_radius (the envelope "
         "gives them, evolving)",
         false, true, 0.0, true, inf},
        {"envelope_fraction", "1",
         "envelope: H/He envelope mass over planet mass at the start, in [0, 1) (radius: Lopez & "
         "Fortney 2014 fit; needs the star and heating_efficiency)",
         false, true, 0.0, false, 1.0},
        {"exobase_altitude", "m",
         "prescribed exobase: height above the surface (or give a thermosphere)", false, true, 0.0,
         false, inf},
        {"exobase_density", "m-3", "prescribed exobase: total number density at the start", false,
         true, 0.0, true, inf},
        {"homopause_altitude", "m",
         "thermosphere: homopause height above the surface (the exobase is found each step)", false,
         true, 0.0, false, inf},
        {"homopause_density", "m-3", "thermosphere: total number density at the homopause", false,
         true, 0.0, true, inf},
        {"homopause_temperature", "K",
         "thermosphere: Bates profile base temperature at the homopause (without: isothermal at "
         "the exobase temperature)",
         false, true, 0.0, true, inf},
        {"bates_shape", "m-1", "thermosphere: Bates profile shape parameter s", false, true, 0.0,
         true, inf},
        {"diffusion_limited", "1",
         "thermosphere: 1 (default) couples Jeans escape to diffusion from the homopause, 0 Jeans "
         "only",
         false, false, 0.0, false, 1.0},
        {"exobase_temperature", "K", "exobase temperature (constant, or at the start)", false, true,
         0.0, true, inf},
        {"exobase_temperature_end", "K",
         "exobase temperature at the end (linear in time from the start value)", false, true, 0.0,
         true, inf},
        {"temperature_reference", "K", "T_ref of T = T_ref (F_xuv/F_ref)^gamma", false, true, 0.0,
         true, inf},
        {"temperature_reference_flux", "W m-2", "F_ref of the XUV temperature law", false, true,
         0.0, true, inf},
        {"temperature_exponent", "1", "gamma of the XUV temperature law", false, true, -inf, true,
         inf},
        {"temperature_min", "K", "lower clamp of the XUV temperature law", false, true, 0.0, true,
         inf},
        {"temperature_max", "K", "upper clamp of the XUV temperature law", false, true, 0.0, true,
         inf},
        {"semi_major_axis", "m", "orbital semi-major axis (with a star)", false, true, 0.0, true,
         inf},
        {"star_mass", "kg", "host star mass", false, true, 0.0, true, inf},
        {"star_luminosity", "W", "host star bolometric luminosity", false, true, 0.0, true, inf},
        {"xuv_saturation_ratio", "1", "saturated L_xuv / L_bol", false, true, 0.0, true, inf},
        {"xuv_saturation_time", "s", "end of XUV saturation (stellar age)", false, true, 0.0, true,
         inf},
        {"xuv_decay_index", "1", "power-law index of the XUV decline", false, true, 0.0, true, inf},
        {"threshold_enhanced", "1",
         "Jeans parameter below which escape is enhanced Jeans (default: the sweep's, 6)", false,
         false, 0.0, true, inf},
        {"threshold_transition", "1",
         "Jeans parameter below which escape is in transition (default: the sweep's, 3)", false,
         false, 0.0, true, inf},
        {"threshold_hydrodynamic", "1",
         "Jeans parameter at or below which the gas is hydrodynamic (default: the sweep's, 2.1)",
         false, false, 0.0, true, inf},
        {"heating_efficiency", "1", "energy-limited escape on: heating efficiency", false, true,
         0.0, true, 1.0},
        {"xuv_absorption_cross_section", "m2",
         "energy-limited: the XUV is absorbed where its optical depth is one instead of at the "
         "planet radius; absorption cross-section",
         false, true, 0.0, true, inf},
        {"xuv_absorption_base_density", "m-3",
         "XUV absorption radius: number density of the absorbing gas at the planet radius", false,
         true, 0.0, true, inf},
        {"xuv_absorption_temperature", "K",
         "XUV absorption radius: temperature of the absorbing layer (default: the exobase "
         "temperature at each instant)",
         false, true, 0.0, true, inf},
        {"xuv_absorption_molecular_mass", "kg",
         "XUV absorption radius: mean molecular mass of the absorbing gas (default: the bulk "
         "gas's, from the mole fractions)",
         false, true, 0.0, true, inf},
        {"xuv_absorption_chord", "1",
         "XUV absorption radius: 1 takes the optical depth along a grazing chord, 0 (default) "
         "vertically",
         false, false, 0.0, false, 1.0},
        {"recombination_limit", "1",
         "energy-limited: 1 caps the rate by the recombination-limited rate (Murray-Clay et al. "
         "2009), 0 (default) does not",
         false, false, 0.0, false, 1.0},
        {"recombination_temperature", "K",
         "recombination limit: wind temperature (default " +
             shown(RecombinationDefaults::temperature) + " K)",
         false, true, 0.0, true, inf},
        {"recombination_coefficient", "m3 s-1",
         "recombination limit: case B recombination coefficient (default " +
             shown(RecombinationDefaults::recombination_coefficient) + " m3 s-1)",
         false, true, 0.0, true, inf},
        {"recombination_photon_energy", "J",
         "recombination limit: mean energy of the ionising photons (default " +
             shown(RecombinationDefaults::photon_energy / electron_volt) + " eV)",
         false, true, 0.0, true, inf},
        {"transonic_wind", "1",
         "energy-limited: 1 caps the rate by that of an isothermal transonic (Parker) wind from "
         "the planet radius, 0 (default) does not",
         false, false, 0.0, false, 1.0},
        {"transonic_temperature", "K", "transonic wind: temperature (needed with the wind)", false,
         true, 0.0, true, inf},
        {"transonic_base_density", "m-3",
         "transonic wind: number density at its base, the planet radius (needed with the wind)",
         false, true, 0.0, true, inf},
        {"transonic_molecular_mass", "kg",
         "transonic wind: mean molecular mass (default: the escaping species' mass)", false, true,
         0.0, true, inf},
        {"drag", "1",
         "energy-limited: 1 (default) the escaping gas drags heavier species below the crossover "
         "mass (Hunten, Pepin & Walker 1987), 0 only those with a drag_diffusion_<species>",
         false, false, 0.0, false, 1.0},
        {"given_loss_reference_flux", "W m-2",
         "F_ref of the given losses' XUV power law L = L_ref (F_xuv/F_ref)^p "
         "(given_loss_exponent_<species>)",
         false, true, 0.0, true, inf},
        {"inventory", "particles", "total initial inventory, shared by mole fraction", false, true,
         0.0, true, inf},
        {"surface_pressure", "Pa",
         "total initial inventory as surface pressure, shared by mole fraction", false, true, 0.0,
         true, inf},
        {"age_start", "s", "stellar age at the start of the run", false, false, 0.0, false, inf},
        {"age_end", "s", "stellar age at the end of the run", false, false, 0.0, true, inf},
        {"star_age", "s", "present stellar age (end of the run without age_end)", false, false, 0.0,
         true, inf},
        {"rtol", "1", "relative tolerance of the integration", false, false, 0.0, true, 0.1},
        {"max_steps", "1", "step budget of the integration", false, false, 1.0, false, 1e15},
    };
    return params;
}

const std::vector<CaseParameter>& species_parameters() {
    // In slot order (x_parameter, inventory_parameter, ... above).
    static const std::vector<CaseParameter> params{
        {"x_<species>", "1",
         "bulk (well-mixed) mole fraction: shares the inventory, the homopause composition of a "
         "thermosphere (0: absent)",
         false, true, 0.0, false, inf},
        {"inventory_<species>", "particles", "initial inventory of the species", false, true, 0.0,
         true, inf},
        {"given_loss_<species>", "s-1",
         "loss given beyond thermal escape (non-thermal or external), added to it: constant, or "
         "L_ref of the XUV power law with given_loss_exponent_<species>",
         false, true, 0.0, false, inf},
        {"given_loss_exponent_<species>", "1",
         "exponent p of the species' given loss L = L_ref (F_xuv/given_loss_reference_flux)^p "
         "(needs the star)",
         false, true, -inf, true, inf},
        {"exobase_x_<species>", "1",
         "prescribed exobase: mole fraction at the exobase (empty beside others: 0); never an "
         "inventory share",
         false, true, 0.0, false, inf},
        {"drag_diffusion_<species>", "m-1 s-1",
         "energy-limited drag: binary diffusion parameter b = A (T / 1 K)^s of the species in the "
         "escaping gas, its A (0: not dragged; default: the library's)",
         false, true, 0.0, false, inf},
        {"drag_diffusion_exponent_<species>", "1",
         "energy-limited drag: exponent s of drag_diffusion_<species> (default 0)", false, true,
         -inf, true, inf},
    };
    return params;
}

const std::vector<CaseTextColumn>& case_text_columns() {
    static const std::vector<CaseTextColumn> columns{
        {"case", "label of the case (the first column)"},
        {"star", "free text (the host star's name)"},
        {"density_scaling",
         "prescribed exobase: 'inventory' (densities follow each inventory; default) or 'fixed'"},
        {"exobase_composition",
         "prescribed exobase: 'bulk' states that the bulk fractions x_<species> are also the "
         "exobase composition (instead of exobase_x_<species>)"},
        {"diffusion_source",
         "thermosphere: 'measured' (fits where tabulated, else Chapman-Enskog; default) or "
         "'chapman_enskog'"},
        {"escaping_species", "energy-limited: the light escaping species (default: the lightest)"},
        {"energy_limited_activation",
         "energy-limited: when it replaces Jeans escape: 'hydrodynamic' (default), 'transition' "
         "(transition or hydrodynamic) or 'always'"},
        {"comment", "free text, ignored"},
    };
    return columns;
}

std::size_t find_species_parameter(const std::string& column, std::string* species) {
    const auto& params = species_parameters();
    std::size_t best = params.size(), best_length = 0;
    for (std::size_t k = 0; k < params.size(); ++k) {
        const std::string prefix = species_prefix(params[k]);
        if (starts_with(column, prefix) && prefix.size() > best_length) {
            best = k;
            best_length = prefix.size();
        }
    }
    if (species)
        *species = best < params.size() ? column.substr(best_length) : std::string();
    return best;
}

const CaseParameter* find_case_parameter(const std::string& name) {
    for (const CaseParameter& p : case_parameters())
        if (p.name == name)
            return &p;
    const std::size_t k = find_species_parameter(name);
    return k < species_parameters().size() ? &species_parameters()[k] : nullptr;
}

const std::vector<CaseParameterGroup>& case_parameter_groups() {
    static const std::vector<CaseParameterGroup> groups{
        {"planet", "planet_mass", {}},
        {"upper atmosphere, one of two kinds: a prescribed exobase",
         "exobase_altitude",
         {"exobase_x_<species>"}},
        {"upper atmosphere, one of two kinds: a thermosphere (the exobase found each step)",
         "homopause_altitude",
         {}},
        {"exobase temperature history", "exobase_temperature", {}},
        {"orbit and host star (XUV history)", "semi_major_axis", {}},
        {"escape regimes: thresholds of the Jeans parameter at the exobase",
         "threshold_enhanced",
         {}},
        {"energy-limited hydrodynamic escape",
         "heating_efficiency",
         {"drag_diffusion_<species>", "drag_diffusion_exponent_<species>"}},
        {"losses given beyond thermal escape (non-thermal or external)",
         "given_loss_reference_flux",
         {"given_loss_<species>", "given_loss_exponent_<species>"}},
        {"bulk atmosphere: composition and initial inventory",
         "inventory",
         {"x_<species>", "inventory_<species>"}},
        {"span and solver", "age_start", {}},
    };
    return groups;
}

// --- tables -----------------------------------------------------------------------------------

std::string CaseTable::row_label(std::size_t i) const {
    if (i < row_labels.size() && !row_labels[i].empty())
        return row_labels[i];
    return "row " + std::to_string(i + 1);
}

std::vector<std::string> table_species(const CaseTable& table) {
    std::vector<std::string> out;
    for (const auto& [name, values] : table.columns)
        if (starts_with(name, "x_") && width_column(name) == WidthColumn::none)
            out.push_back(name.substr(2));
    return out;
}

std::vector<std::string> table_inputs(const CaseTable& table) {
    std::vector<std::string> out;
    for (const auto& [name, values] : table.columns) {
        std::string base;
        // A split normal's two columns are one input.
        if (width_column(name, &base) != WidthColumn::none &&
            std::find(out.begin(), out.end(), base) == out.end())
            out.push_back(base);
    }
    return out;
}

void check_table_columns(const CaseTable& table) {
    const std::size_t n = table.rows();
    if (!table.row_labels.empty() && table.row_labels.size() != n)
        throw InputError("case table: " + std::to_string(table.row_labels.size()) +
                         " row labels for " + std::to_string(n) + " rows");
    if (!table.row_errors.empty() && table.row_errors.size() != n)
        throw InputError("case table: " + std::to_string(table.row_errors.size()) +
                         " row errors for " + std::to_string(n) + " rows");
    std::set<std::string> seen;
    for (const auto& [name, values] : table.columns) {
        if (!seen.insert(name).second)
            throw InputError("case table: column '" + name + "' appears twice");
        if (values.size() != n)
            throw InputError("case table: column '" + name + "' has " +
                             std::to_string(values.size()) + " values for " + std::to_string(n) +
                             " rows");
    }
    for (const auto& [name, values] : table.columns) {
        std::string base;
        const WidthColumn width = width_column(name, &base);
        const CaseParameter* p = find_case_parameter(base);
        if (!p)
            throw InputError("case table: unknown column '" + name +
                             "' (closest: " + closest_parameters(base) + ")");
        std::string sp;
        const std::size_t per_species = find_species_parameter(base, &sp);
        // A name of case_parameters() (given_loss_reference_flux) is not per species.
        if (per_species < species_parameters().size() && p == &species_parameters()[per_species]) {
            try {
                default_registry().get(sp);
            } catch (const InputError& e) {
                throw InputError("case table: column '" + name + "': " + e.what());
            }
            if (per_species != x_parameter && !seen.count("x_" + sp))
                throw InputError("case table: column '" + name + "' needs the column 'x_" + sp +
                                 "'");
        }
        if (base != name) {
            if (!p->uncertain)
                throw InputError("case table: column '" + name + "': '" + base +
                                 "' cannot be given an uncertainty");
            if (!seen.count(base))
                throw InputError("case table: column '" + name + "' has no value column '" + base +
                                 "'");
            if (width == WidthColumn::sigma && seen.count(base + "_lnsigma"))
                throw InputError("case table: columns '" + name + "' and '" + base +
                                 "_lnsigma' both give the uncertainty of '" + base + "'; keep one");
            if (is_split(width)) {
                for (const char* other : {"_sigma", "_lnsigma"})
                    if (seen.count(base + other))
                        throw InputError("case table: columns '" + name + "' and '" + base + other +
                                         "' both give the uncertainty of '" + base + "'; keep one");
                const std::string partner =
                    base + (width == WidthColumn::sigma_upper ? "_sigma_lower" : "_sigma_upper");
                if (!seen.count(partner))
                    throw InputError("case table: column '" + name + "' needs the column '" +
                                     partner + "' (a split normal has a width on each side)");
            }
        }
    }
    // A table with an envelope column may leave planet_mass and planet_radius to its rows.
    const bool envelope_columns = seen.count("core_mass") || seen.count("envelope_fraction");
    for (const CaseParameter& p : case_parameters())
        if (p.required && !seen.count(p.name) &&
            !(envelope_columns && (p.name == "planet_mass" || p.name == "planet_radius")))
            throw InputError("case table: no column '" + p.name + "' (" + p.meaning + " [" +
                             p.unit + "]); every case needs it");
    if (table_species(table).empty())
        throw InputError("case table: no species: give mole fractions in columns 'x_<species>'");
    std::set<std::string> text_seen;
    for (const auto& [name, values] : table.text) {
        if (!text_columns().count(name))
            throw InputError("case table: unknown text column '" + name +
                             "' (text columns: " + text_column_list() + ")");
        if (!text_seen.insert(name).second)
            throw InputError("case table: column '" + name + "' appears twice");
        if (seen.count(name))
            throw InputError("case table: column '" + name + "' appears twice");
        if (values.size() != n)
            throw InputError("case table: column '" + name + "' has " +
                             std::to_string(values.size()) + " values for " + std::to_string(n) +
                             " rows");
    }
}

// --- reading a row ----------------------------------------------------------------------------

namespace detail {

WidthColumn width_column(const std::string& name, std::string* base) {
    static const std::pair<const char*, WidthColumn> suffixes[] = {
        {"_sigma_upper", WidthColumn::sigma_upper},
        {"_sigma_lower", WidthColumn::sigma_lower},
        {"_lnsigma", WidthColumn::lnsigma},
        {"_sigma", WidthColumn::sigma}};
    for (const auto& [suffix, kind] : suffixes)
        if (ends_with(name, suffix)) {
            if (base)
                *base = name.substr(0, name.size() - std::string(suffix).size());
            return kind;
        }
    if (base)
        *base = name;
    return WidthColumn::none;
}

TablePlan plan_table(const CaseTable& table) {
    TablePlan plan;
    const auto& params = case_parameters();
    std::vector<std::string> species_names;
    auto species_index = [&](const std::string& name) {
        for (std::size_t k = 0; k < species_names.size(); ++k)
            if (species_names[k] == name)
                return k;
        return none;
    };
    for (const auto& [name, values] : table.columns)
        if (starts_with(name, "x_") && width_column(name) == WidthColumn::none) {
            species_names.push_back(name.substr(2));
            // The numbers only: the source texts would be copied with every run.
            Species sp = default_registry().get(species_names.back());
            sp.mass_source.clear();
            sp.lj_source.clear();
            sp.cross_section_source.clear();
            sp.thermal_diffusion_source.clear();
            plan.species.push_back(std::move(sp));
        }
    plan.x_column.assign(species_names.size(), none);
    for (std::size_t c = 0; c < table.columns.size(); ++c) {
        const std::string& name = table.columns[c].first;
        ColumnRole role;
        role.width = width_column(name, &role.base);
        role.lnsigma = role.width == WidthColumn::lnsigma;
        role.sigma = role.width != WidthColumn::none && !role.lnsigma;
        for (std::size_t k = 0; k < params.size(); ++k)
            if (params[k].name == role.base)
                role.global = k;
        role.parameter =
            role.global != none ? &params[role.global] : find_case_parameter(role.base);
        if (role.global == none && role.parameter) {
            std::string sp;
            role.per_species = find_species_parameter(role.base, &sp);
            role.species = species_index(sp);
            if (role.per_species == x_parameter && !role.sigma && !role.lnsigma)
                plan.x_column[role.species] = c;
        }
        plan.roles.push_back(std::move(role));
    }
    for (ColumnRole& role : plan.roles)
        if (role.sigma || role.lnsigma) {
            const std::string partner =
                role.base +
                (role.width == WidthColumn::sigma_upper ? "_sigma_lower" : "_sigma_upper");
            for (std::size_t b = 0; b < table.columns.size(); ++b) {
                if (table.columns[b].first == role.base)
                    role.value_column = b;
                if (is_split(role.width) && table.columns[b].first == partner)
                    role.partner_column = b;
            }
        }
    for (std::size_t c = 0; c < table.text.size(); ++c)
        if (table.text[c].first == "density_scaling")
            plan.density_scaling = c;
        else if (table.text[c].first == "diffusion_source")
            plan.diffusion_source = c;
        else if (table.text[c].first == "exobase_composition")
            plan.exobase_composition = c;
        else if (table.text[c].first == "escaping_species")
            plan.escaping_species = c;
        else if (table.text[c].first == "energy_limited_activation")
            plan.activation = c;
    return plan;
}

CaseSpec read_case(const CaseTable& table, TablePlan& plan, std::size_t row) {
    const std::size_t P = case_parameters().size(), S = plan.species.size();
    const std::size_t K = species_parameters().size();
    CaseSpec s;
    s.name = table.names[row];
    s.key = table.first_key + row;
    try {
        // Species present: mole fraction > 0, in table order.
        plan.present.clear();
        plan.case_index.assign(S, none);
        for (std::size_t k = 0; k < S; ++k) {
            const double x = table.columns[plan.x_column[k]].second[row];
            if (x > 0.0) {
                plan.case_index[k] = plan.present.size();
                plan.present.push_back(k);
            }
        }
        const std::size_t n = plan.present.size();
        s.values.assign(P + K * n, nan);
        auto slot = [&](const ColumnRole& r) {
            if (r.global != none)
                return r.global;
            const std::size_t i = plan.case_index[r.species];
            return i == none ? none : P + r.per_species * n + i;
        };
        for (std::size_t c = 0; c < plan.roles.size(); ++c) {
            const ColumnRole& r = plan.roles[c];
            const std::string& name = table.columns[c].first;
            const double v = table.columns[c].second[row];
            if (std::isnan(v))
                continue;
            if (r.sigma || r.lnsigma) {
                if (!std::isfinite(v) || v < 0.0)
                    bad_value(name,
                              "an uncertainty must be finite and >= 0, got " +
                                  shown_value(table, name,
                                              r.lnsigma || !r.parameter ? "1" : r.parameter->unit,
                                              v));
                if (r.value_column == none || std::isnan(table.columns[r.value_column].second[row]))
                    bad_value(r.base, "an uncertainty is given but no value");
                const std::size_t k = slot(r);
                if (is_split(r.width)) {
                    // Both widths checked here; the upper column records the draw.
                    if (r.partner_column == none)
                        bad_value(name, "a split normal needs both '_sigma_upper' and "
                                        "'_sigma_lower' columns");
                    const std::string& other = table.columns[r.partner_column].first;
                    const double w = table.columns[r.partner_column].second[row];
                    if (std::isnan(w))
                        bad_value(other, "a split normal needs both widths, and '" + name +
                                             "' is given but this is empty");
                    if (r.width == WidthColumn::sigma_upper && k != none)
                        s.uncertainties.push_back(
                            {r.base, Distribution::SplitNormal, v, w, k, r.parameter});
                    continue;
                }
                if (k != none) // the uncertainty of an absent species changes nothing
                    s.uncertainties.push_back(
                        {r.base, r.lnsigma ? Distribution::LogNormal : Distribution::Normal, v, 0.0,
                         k, r.parameter});
                continue;
            }
            if (!r.parameter)
                bad_value(name, "unknown column");
            if (r.global != none && is_flag(r.global) && v != 0.0 && v != 1.0)
                bad_value(name, "must be 0 or 1, got " + format_value(v));
            if (!in_range(*r.parameter, v))
                bad_value(name, "must be " + range_text(*r.parameter) + ", got " +
                                    shown_value(table, name, r.parameter->unit, v));
            if (r.global == slots().max_steps && v != std::floor(v))
                bad_value(name, "must be a whole number, got " + format_value(v));
            const std::size_t k = slot(r);
            if (k != none)
                s.values[k] = v;
            else if (r.per_species == exobase_x_parameter && v > 0.0)
                bad_value(name, "got " + format_value(v) +
                                    ", but the species is not in the bulk "
                                    "atmosphere ('x_" +
                                    name.substr(10) +
                                    "' zero or empty): give it "
                                    "a bulk fraction too");
        }
        if (n == 0)
            throw InputError("no species: every mole fraction 'x_<species>' is zero or empty");
        auto check_sum = [&](std::size_t k, const char* columns) {
            double sum = 0.0;
            for (std::size_t i = 0; i < n; ++i)
                if (!std::isnan(s.values[P + k * n + i]))
                    sum += s.values[P + k * n + i];
            if (!(std::abs(sum - 1.0) <= mole_fraction_sum_tolerance)) {
                std::ostringstream text;
                text.precision(12);
                text << sum;
                throw InputError(std::string("mole fractions '") + columns + "' sum to " +
                                 text.str() + ", not 1 (allowed: within " +
                                 format_value(mole_fraction_sum_tolerance) + ")");
            }
        };
        check_sum(x_parameter, "x_<species>");
        bool exobase_fractions = false;
        for (std::size_t i = 0; i < n; ++i)
            exobase_fractions =
                exobase_fractions || !std::isnan(s.values[P + exobase_x_parameter * n + i]);
        if (exobase_fractions) // beside given ones, an empty cell is 0 at the exobase
            check_sum(exobase_x_parameter, "exobase_x_<species>");
        s.species.reserve(n);
        for (std::size_t k : plan.present)
            s.species.push_back(plan.species[k]);
        if (plan.density_scaling != none) {
            const std::string& text = table.text[plan.density_scaling].second[row];
            if (text.empty() || text == "inventory")
                s.scaling = DensityScaling::Inventory;
            else if (text == "fixed")
                s.scaling = DensityScaling::Fixed;
            else
                bad_value("density_scaling", "'" + text + "' is neither 'inventory' nor 'fixed'");
        }
        if (plan.diffusion_source != none) {
            const std::string& text = table.text[plan.diffusion_source].second[row];
            s.diffusion_given = !text.empty();
            s.diffusion = text.empty() ? DiffusionMethod::measured_first
                                       : diffusion_method_named(text, "column 'diffusion_source'");
        }
        if (plan.exobase_composition != none) {
            const std::string& text = table.text[plan.exobase_composition].second[row];
            if (text == "bulk")
                s.exobase_composition_bulk = true;
            else if (!text.empty())
                bad_value("exobase_composition",
                          "'" + text +
                              "' is not 'bulk' (the only value: the bulk fractions "
                              "x_<species> are also the exobase composition; or leave it empty "
                              "and give exobase_x_<species>)");
        }
        if (plan.escaping_species != none) {
            s.escaping_species = table.text[plan.escaping_species].second[row];
            bool found = s.escaping_species.empty();
            for (const Species& sp : s.species)
                found = found || sp.name == s.escaping_species;
            if (!found)
                bad_value("escaping_species", "'" + s.escaping_species +
                                                  "' is not a species of this row (a species "
                                                  "with x_<species> > 0)");
        }
        if (plan.activation != none) {
            const std::string& text = table.text[plan.activation].second[row];
            s.activation_given = !text.empty();
            if (text.empty() || text == "hydrodynamic")
                s.activation = HydrodynamicActivation::Hydrodynamic;
            else if (text == "transition")
                s.activation = HydrodynamicActivation::Transition;
            else if (text == "always")
                s.activation = HydrodynamicActivation::Always;
            else
                bad_value("energy_limited_activation",
                          "'" + text + "' is not 'hydrodynamic', 'transition' or 'always'");
        }
    } catch (const InputError& e) {
        throw InputError(table.row_label(row) + " (case '" + s.name + "'), " + e.what());
    }
    s.label = table.row_label(row);
    return s;
}

} // namespace detail

double CaseSpec::species_value(std::size_t k, std::size_t i) const {
    return values.at(case_parameters().size() + k * species.size() + i);
}

double CaseSpec::mole_fraction(std::size_t i) const {
    return species_value(x_parameter, i);
}

double CaseSpec::inventory(std::size_t i) const {
    return species_value(inventory_parameter, i);
}

double CaseSpec::value(const std::string& name) const {
    const auto& params = case_parameters();
    for (std::size_t k = 0; k < params.size(); ++k)
        if (params[k].name == name)
            return k < values.size() ? values[k] : nan;
    std::string sp;
    const std::size_t k = find_species_parameter(name, &sp);
    for (std::size_t i = 0; i < species.size() && k < species_parameters().size(); ++i)
        if (species[i].name == sp)
            return species_value(k, i);
    return nan;
}

std::map<std::string, double> CaseSpec::named_values() const {
    std::map<std::string, double> out;
    const auto& params = case_parameters();
    for (std::size_t k = 0; k < params.size() && k < values.size(); ++k)
        if (!std::isnan(values[k]))
            out[params[k].name] = values[k];
    const auto& per_species = species_parameters();
    for (std::size_t k = 0; k < per_species.size(); ++k)
        for (std::size_t i = 0; i < species.size(); ++i)
            if (!std::isnan(species_value(k, i)))
                out[species_prefix(per_species[k]) + species[i].name] = species_value(k, i);
    return out;
}

CaseSpec case_from_table(const CaseTable& table, std::size_t row) {
    if (row >= table.rows())
        throw InputError("case table: row " + std::to_string(row) + " is past the last row (" +
                         std::to_string(table.rows()) + " rows)");
    TablePlan plan = detail::plan_table(table);
    return detail::read_case(table, plan, row);
}

} // namespace exosieve
