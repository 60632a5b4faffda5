#include "exosieve/batch.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <exception>
#include <initializer_list>
#include <limits>
#include <memory>
#include <mutex>
#include <optional>
#include <set>
#include <sstream>
#include <utility>

#include "closest_names.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/outflow.hpp"
#include "exosieve/sensitivity.hpp"
#include "worker_threads.hpp"

namespace exosieve {

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

std::string range_text(const CaseParameter& p) {
    if (p.lower == -inf && p.upper == inf)
        return "finite";
    std::string s;
    if (p.lower != -inf)
        s += (p.lower_open ? "> " : ">= ") + format_value(p.lower);
    if (p.upper != inf)
        s += (s.empty() ? "" : " and ") + std::string("<= ") + format_value(p.upper);
    return s;
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

bool in_range(const CaseParameter& p, double v) {
    if (!std::isfinite(v))
        return false;
    if (p.lower_open ? !(v > p.lower) : !(v >= p.lower))
        return false;
    return v <= p.upper;
}

// Per-species parameters: their index in species_parameters().
constexpr std::size_t x_parameter = 0, inventory_parameter = 1, given_loss_parameter = 2,
                      given_loss_exponent_parameter = 3, exobase_x_parameter = 4,
                      drag_diffusion_parameter = 5, drag_diffusion_exponent_parameter = 6;

// "<prefix><species>" without "<species>".
std::string species_prefix(const CaseParameter& p) {
    return p.name.substr(0, p.name.size() - std::string("<species>").size());
}

// Why the value of `column` cannot be used.
[[noreturn]] void bad_value(const std::string& column, const std::string& what) {
    throw InputError("column '" + column + "': " + what);
}

// What kind of width a column holds, by its suffix (the longest first).
enum class WidthColumn { none, sigma, lnsigma, sigma_upper, sigma_lower };

// The kind of width column `name` is; `base` receives the uncertain parameter's name.
WidthColumn width_column(const std::string& name, std::string* base = nullptr) {
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

bool is_split(WidthColumn w) {
    return w == WidthColumn::sigma_upper || w == WidthColumn::sigma_lower;
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

void BatchOptions::validate() const {
    for (std::size_t k = 0; k < times.size(); ++k) {
        if (!std::isfinite(times[k]) || times[k] < 0.0)
            throw InputError("times[" + std::to_string(k) + "] must be finite and >= 0 [s], got " +
                             format_value(times[k]));
        if (k > 0 && !(times[k] > times[k - 1]))
            throw InputError("times must be strictly increasing, got times[" + std::to_string(k) +
                             "] = " + format_value(times[k]) + " after " +
                             format_value(times[k - 1]));
    }
    if (!std::isfinite(t_start) || t_start < 0.0)
        throw InputError("t_start must be finite and >= 0 [s], got " + format_value(t_start));
    if (!std::isfinite(t_end) || t_end < 0.0)
        throw InputError("t_end must be finite and >= 0 [s], got " + format_value(t_end));
    if (!std::isfinite(rtol) || !(rtol > 0.0) || !(rtol < 1.0))
        throw InputError("rtol must be in (0, 1), got " + format_value(rtol));
    if (max_steps == 0)
        throw InputError("max_steps must be > 0");
    if (!std::isfinite(depletion_fraction) || !(depletion_fraction > 0.0) ||
        !(depletion_fraction < 1.0))
        throw InputError("depletion_fraction must be in (0, 1), got " +
                         format_value(depletion_fraction));
    thresholds.validate();
    if (chunk_size == 0)
        throw InputError("chunk_size must be > 0 [cases]");
    if (chunks_in_flight == 0)
        throw InputError("chunks_in_flight must be >= 1");
    for (std::size_t i = 0; i < species.size(); ++i)
        for (std::size_t j = 0; j < i; ++j)
            if (species[i] == species[j])
                throw InputError("species: '" + species[i] + "' appears twice");
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

std::size_t sample_runs(const BatchOptions& o, std::size_t inputs) {
    return o.design == SampleDesign::Saltelli ? SaltelliDesign{o.samples, inputs}.runs()
                                              : o.samples;
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

// --- cases ------------------------------------------------------------------------------------

namespace {

constexpr std::size_t none = std::numeric_limits<std::size_t>::max();

// Slot of a parameter in CaseSpec::values (its index in case_parameters()).
std::size_t slot_of(const char* name) {
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

const Slots& slots() {
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

const LossSlots& loss_slots() {
    static const LossSlots s;
    return s;
}

// Parameters that are 0 or 1.
bool is_flag(std::size_t slot) {
    return slot == slots().diffusion_limited || slot == loss_slots().chord ||
           slot == loss_slots().recombination_limit || slot == loss_slots().transonic_wind ||
           slot == slots().drag;
}

// What a numeric column of a table holds, worked out once per table instead of once per row.
struct ColumnRole {
    const CaseParameter* parameter = nullptr; // range of the value (or of the value uncertain)
    std::size_t global = none;                // slot of a case parameter, or none
    std::size_t species = none;               // table species of a per-species column
    std::size_t per_species = none;           // its index in species_parameters()
    bool sigma = false, lnsigma = false;      // an uncertainty column
    WidthColumn width = WidthColumn::none;    // which kind of width column
    std::string base;                         // the uncertain parameter's name
    std::size_t value_column = none;          // an uncertainty's value column
    std::size_t partner_column = none;        // a split normal's other width column
};

// The columns of a table read for its rows.
struct TablePlan {
    std::vector<ColumnRole> roles;       // per numeric column
    std::vector<Species> species;        // table species (x_ columns), numbers only
    std::vector<std::size_t> x_column;   // per table species: its x_ column
    std::size_t density_scaling = none;  // text column, or none
    std::size_t diffusion_source = none; // text column, or none
    std::size_t exobase_composition = none, escaping_species = none,
                activation = none;       // text columns, or none
    std::vector<std::size_t> present;    // scratch: table species of the case
    std::vector<std::size_t> case_index; // scratch: table species -> case species, or none
};

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

// Row `row` of `table` as a case; InputError naming the row and the column for a bad value.
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

// The output column (index in o.species) of each of the case's species; InputError for a
// species the batch does not have.
std::vector<std::size_t> output_columns(const CaseSpec& spec, const BatchOptions& o) {
    std::vector<std::size_t> columns;
    for (const Species& sp : spec.species) {
        const auto at = std::find(o.species.begin(), o.species.end(), sp.name);
        if (at == o.species.end())
            throw InputError("species '" + sp.name + "' is not among the batch's species");
        columns.push_back(static_cast<std::size_t>(at - o.species.begin()));
    }
    return columns;
}

} // namespace

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
    TablePlan plan = plan_table(table);
    return read_case(table, plan, row);
}

// --- one case ---------------------------------------------------------------------------------

namespace {

// Output ages of a case: t_start, the batch's times inside (t_start, t_end), t_end.
std::vector<double> case_times(const BatchOptions& o, double t0, double t1) {
    std::vector<double> t{t0};
    for (double x : o.times)
        if (x > t0 && x < t1)
            t.push_back(x);
    t.push_back(t1);
    return t;
}

} // namespace

namespace {

// The options of energy-limited escape (XUV absorption radius, recombination limit, transonic
// wind) and the given losses of case `s`, into `c` (whose hydrodynamic options are set when the
// row has a heating efficiency), as EnergyLimitedEscape(absorption=..., recombination_limit=...,
// transonic_wind=...) and evolve(given_losses=...) build them. mean_mass: the bulk gas's mean
// particle mass [kg].
void add_loss_options(const CaseSpec& s, bool with_star, double mean_mass, EvolutionConfig& c) {
    const LossSlots& k = loss_slots();
    const auto& params = case_parameters();
    auto has = [&](std::size_t slot) { return !std::isnan(s.values[slot]); };
    auto given = [&](std::size_t slot) {
        const CaseParameter& p = params[slot];
        return "got " + format_value(s.values[slot]) + (p.unit == "1" ? "" : " " + p.unit);
    };
    // A column of a model the row does not switch on is refused, naming what would switch it on.
    auto refuse = [&](std::initializer_list<std::size_t> slots, const std::string& model) {
        for (std::size_t slot : slots)
            if (has(slot))
                bad_value(params[slot].name, given(slot) + ", but it is for " + model);
    };
    const bool recombination = has(k.recombination_limit) && s.values[k.recombination_limit] == 1.0;
    const bool transonic = has(k.transonic_wind) && s.values[k.transonic_wind] == 1.0;
    if (c.envelope && recombination)
        bad_value("recombination_limit",
                  "got 1, but the recombination limit is not supported with an envelope "
                  "('core_mass', 'envelope_fraction'): the evolving radius moves the switch "
                  "between the two rates");
    if (c.hydrodynamic) {
        HydrodynamicOptions& h = *c.hydrodynamic;
        if (has(k.cross_section)) {
            XuvAbsorption a;
            a.cross_section = s.values[k.cross_section];
            if (!has(k.base_density))
                bad_value(params[k.base_density].name,
                          "no value given (the XUV absorption radius of "
                          "'xuv_absorption_cross_section' needs it)");
            a.base_density = s.values[k.base_density];
            a.mean_molecular_mass = has(k.molecular_mass) ? s.values[k.molecular_mass] : mean_mass;
            a.temperature =
                has(k.absorption_temperature) ? s.values[k.absorption_temperature] : 0.0;
            a.chord = has(k.chord) && s.values[k.chord] == 1.0;
            if (a.temperature > 0.0) { // the layer's scale height at the planet radius, fixed
                const double height = scale_height(a.temperature, a.mean_molecular_mass,
                                                   c.planet.mass(), c.planet.radius());
                if (!std::isfinite(height) || !(height > 0.0))
                    bad_value(params[k.absorption_temperature].name,
                              given(k.absorption_temperature) +
                                  ", which with a mean molecular "
                                  "mass of " +
                                  format_value(a.mean_molecular_mass) +
                                  " kg gives the absorbing layer a scale height of " +
                                  format_value(height) + " m, not a finite number > 0");
            }
            h.absorption = a;
        } else {
            refuse({k.base_density, k.absorption_temperature, k.molecular_mass, k.chord},
                   "the XUV absorption radius ('xuv_absorption_cross_section'), which this row "
                   "does not give");
        }
        if (recombination) {
            RecombinationLimit r;
            if (has(k.recombination_temperature))
                r.temperature = s.values[k.recombination_temperature];
            if (has(k.recombination_coefficient))
                r.recombination_coefficient = s.values[k.recombination_coefficient];
            if (has(k.photon_energy))
                r.photon_energy = s.values[k.photon_energy];
            h.recombination = r;
        } else {
            refuse({k.recombination_temperature, k.recombination_coefficient, k.photon_energy},
                   "the recombination limit ('recombination_limit' 1), which this row does not "
                   "switch on");
        }
        if (transonic) {
            for (std::size_t slot : {k.transonic_temperature, k.transonic_base_density})
                if (!has(slot))
                    bad_value(params[slot].name,
                              "no value given (the transonic wind of 'transonic_wind' 1 needs it)");
            TransonicWind w;
            w.temperature = s.values[k.transonic_temperature];
            w.base_density = s.values[k.transonic_base_density];
            if (has(k.transonic_molecular_mass))
                w.mean_molecular_mass = s.values[k.transonic_molecular_mass];
            h.transonic = w;
        } else {
            refuse({k.transonic_temperature, k.transonic_base_density, k.transonic_molecular_mass},
                   "the transonic wind ('transonic_wind' 1), which this row does not switch on");
        }
    } else {
        const std::string energy_limited =
            "energy-limited escape ('heating_efficiency'), which this row does not switch on";
        refuse({k.cross_section, k.base_density, k.absorption_temperature, k.molecular_mass,
                k.chord, k.recombination_temperature, k.recombination_coefficient, k.photon_energy,
                k.transonic_temperature, k.transonic_base_density, k.transonic_molecular_mass},
               energy_limited);
        if (recombination)
            bad_value("recombination_limit", "got 1, but it caps " + energy_limited);
        if (transonic)
            bad_value("transonic_wind", "got 1, but it caps " + energy_limited);
    }

    // Given losses: once a species has one, every species gets one (GivenLoss(): none).
    const std::size_t n = s.species.size();
    bool any = false, any_law = false;
    for (std::size_t i = 0; i < n; ++i) {
        any = any || !std::isnan(s.species_value(given_loss_parameter, i));
        any_law = any_law || !std::isnan(s.species_value(given_loss_exponent_parameter, i));
    }
    if (!any_law)
        refuse({k.given_loss_reference_flux},
               "the XUV power law of a given loss ('given_loss_exponent_<species>'), which this "
               "row does not give");
    if (!any && !any_law)
        return;
    c.given_losses.assign(n, GivenLoss());
    for (std::size_t i = 0; i < n; ++i) {
        const std::string& name = s.species[i].name;
        const double rate = s.species_value(given_loss_parameter, i);
        const double exponent = s.species_value(given_loss_exponent_parameter, i);
        if (!std::isnan(exponent)) {
            const std::string column = "given_loss_exponent_" + name;
            if (std::isnan(rate))
                bad_value(column, "got " + format_value(exponent) +
                                      ", but the XUV power law needs "
                                      "its rate at the reference flux, 'given_loss_" +
                                      name + "' [s-1]");
            if (!has(k.given_loss_reference_flux))
                bad_value(params[k.given_loss_reference_flux].name,
                          "no value given (the XUV power law of '" + column + "' needs it)");
            if (!with_star)
                bad_value(column, "got " + format_value(exponent) +
                                      ", but the XUV power law needs the planet's star "
                                      "('semi_major_axis', 'star_mass', 'star_luminosity')");
            c.given_losses[i] =
                GivenLoss::xuv_power_law(rate, s.values[k.given_loss_reference_flux], exponent);
        } else if (!std::isnan(rate)) {
            c.given_losses[i] = GivenLoss(rate);
        }
    }
}

} // namespace

EvolutionConfig build_config(const CaseSpec& s, const BatchOptions& o) {
    const Slots& k = slots();
    const auto& params = case_parameters();
    const std::size_t n = s.species.size();
    const std::size_t expected = params.size() + species_parameters().size() * n;
    if (s.values.size() != expected)
        throw InputError("case '" + s.name + "': " + std::to_string(s.values.size()) +
                         " parameter values for " + std::to_string(n) + " species, expected " +
                         std::to_string(expected));
    auto has = [&](std::size_t slot) { return !std::isnan(s.values[slot]); };
    auto required = [&](std::size_t slot, const char* why = "") {
        if (!has(slot))
            bad_value(params[slot].name,
                      "no value given" + (*why ? std::string(" (") + why + ")" : std::string()));
        return s.values[slot];
    };
    auto optional = [&](std::size_t slot, double fallback) {
        return has(slot) ? s.values[slot] : fallback;
    };
    const bool with_star = has(k.semi_major_axis);
    // An envelope (core_mass, envelope_fraction) gives the planet's mass and radius at the
    // start, as evolve() takes them: M_core / (1 - f) and the fit's radius at the start age.
    const bool with_envelope = has(k.core_mass) || has(k.envelope_fraction);
    std::optional<EnvelopeConfig> envelope;
    if (with_envelope) {
        for (std::size_t slot : {k.planet_mass, k.planet_radius})
            if (has(slot))
                bad_value(params[slot].name, "give either 'planet_mass' and 'planet_radius' or "
                                             "an envelope ('core_mass', 'envelope_fraction'), "
                                             "not both");
        const char* why = "an envelope needs 'core_mass' and 'envelope_fraction'";
        envelope.emplace();
        envelope->core_mass = required(k.core_mass, why);
        envelope->envelope_fraction = required(k.envelope_fraction, why);
        if (!(envelope->envelope_fraction < 1.0))
            bad_value("envelope_fraction",
                      "must be < 1, got " + format_value(envelope->envelope_fraction));
        if (!with_star)
            bad_value("semi_major_axis", "no value given (an envelope needs the star and orbit: "
                                         "its radius takes the bolometric flux, its loss the XUV)");
        if (!has(k.heating_efficiency))
            bad_value("heating_efficiency", "no value given (an envelope is lost at the "
                                            "energy-limited rate)");
    }
    const double t_start = optional(k.age_start, o.t_start);
    std::optional<Planet> planet;
    if (with_star) {
        XuvHistory xuv;
        xuv.saturation_ratio = optional(k.xuv_saturation_ratio, xuv.saturation_ratio);
        xuv.saturation_time = optional(k.xuv_saturation_time, xuv.saturation_time);
        xuv.decay_index = optional(k.xuv_decay_index, xuv.decay_index);
        const char* why = "a semi_major_axis needs the star";
        const double star_mass = required(k.star_mass, why); // star mass first in messages
        const Star star(star_mass, required(k.star_luminosity, why), xuv);
        const double a = s.values[k.semi_major_axis];
        if (envelope) {
            if (!(t_start > 0.0))
                bad_value("age_start", "an envelope needs a start age > 0 (its radius fit "
                                       "takes the age), got " +
                                           format_value(t_start) + " s");
            const double flux = star.luminosity() / (4.0 * constants::pi * a * a);
            planet.emplace(envelope->initial_planet_mass(),
                           envelope_planet_radius(envelope->core_mass, envelope->envelope_fraction,
                                                  flux, t_start),
                           a, star);
        } else {
            planet.emplace(required(k.planet_mass), required(k.planet_radius), a, star);
        }
    } else {
        planet.emplace(required(k.planet_mass), required(k.planet_radius));
    }
    const double mass = planet->mass(), radius = planet->radius();
    EvolutionConfig c(*planet);
    c.envelope = envelope;
    c.record_config = false; // the sweep file records the table and options instead
    std::vector<std::string> names(n);
    double x_sum = 0.0, mean_mass = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        names[i] = s.species[i].name;
        x_sum += s.mole_fraction(i);
        mean_mass += s.mole_fraction(i) * s.species[i].mass;
    }
    mean_mass /= x_sum;
    c.species = s.species;

    const bool thermosphere = has(k.homopause_altitude) || has(k.homopause_density);
    if (thermosphere && with_envelope)
        bad_value("core_mass", "an envelope needs a prescribed exobase ('exobase_altitude', "
                               "'exobase_density'): a thermosphere keeps the planet it was built "
                               "with");
    if (thermosphere) {
        // Thermosphere: x_i (normalised) are the well-mixed homopause fractions; the exobase is
        // found from them at every step, exactly as evolve() does with a Thermosphere.
        for (std::size_t slot : {k.exobase_altitude, k.exobase_density})
            if (has(slot))
                bad_value(params[slot].name,
                          "give either a prescribed exobase ('exobase_altitude', "
                          "'exobase_density') or a thermosphere ('homopause_altitude', "
                          "'homopause_density'), not both");
        if (s.scaling == DensityScaling::Fixed)
            bad_value("density_scaling", "'fixed' is for a prescribed exobase; a thermosphere's "
                                         "densities always follow the inventories");
        // The thermosphere finds the exobase composition from the bulk one: none is given.
        for (std::size_t i = 0; i < n; ++i)
            if (!std::isnan(s.species_value(exobase_x_parameter, i)))
                bad_value("exobase_x_" + s.species[i].name,
                          "is for a prescribed exobase; a thermosphere's exobase composition "
                          "follows from the bulk fractions x_<species> by diffusive separation");
        if (s.exobase_composition_bulk)
            bad_value("exobase_composition",
                      "is for a prescribed exobase; a thermosphere's exobase composition "
                      "follows from the bulk fractions x_<species> by diffusive separation");
        const char* why = "a thermosphere needs both homopause columns";
        const double r_h = radius + required(k.homopause_altitude, why);
        const double n_h = required(k.homopause_density, why);
        std::vector<double> fractions(n);
        for (std::size_t i = 0; i < n; ++i)
            fractions[i] = s.mole_fraction(i) / x_sum;
        // The profile's form; its exobase temperature is replaced by the history at every step.
        TemperatureProfile profile = TemperatureProfile::isothermal(1000.0);
        if (has(k.homopause_temperature) || has(k.bates_shape)) {
            const char* bates = "a Bates profile needs 'homopause_temperature' and 'bates_shape'";
            const double t_h = required(k.homopause_temperature, bates);
            profile = TemperatureProfile::bates(t_h, t_h, required(k.bates_shape, bates), r_h);
        }
        Thermosphere th(mass, radius, r_h, n_h, s.species, std::move(fractions),
                        std::move(profile));
        th.set_diffusion_method(s.diffusion);
        c.exobase = std::make_shared<ThermosphereExobase>(
            th, names, optional(k.diffusion_limited, 1.0) == 1.0, s.diffusion);
    } else {
        // Prescribed exobase: radius and densities n_i = x_i n (x_i normalised, as the
        // inventories).
        for (std::size_t slot : {k.homopause_temperature, k.bates_shape, k.diffusion_limited})
            if (has(slot))
                bad_value(params[slot].name, "is for a thermosphere ('homopause_altitude', "
                                             "'homopause_density'); this row has none");
        if (s.diffusion_given)
            bad_value("diffusion_source", "is for a thermosphere ('homopause_altitude', "
                                          "'homopause_density'); this row has none");
        const char* why = "or describe a thermosphere ('homopause_altitude', 'homopause_density')";
        const double n_exo = required(k.exobase_density, why);
        // The exobase composition: its own columns, or the bulk fractions when the row says so
        // ('exobase_composition' 'bulk'); the bulk fractions alone share the inventory.
        bool own = false;
        double exo_sum = 0.0;
        for (std::size_t i = 0; i < n; ++i)
            if (!std::isnan(s.species_value(exobase_x_parameter, i))) {
                own = true;
                exo_sum += s.species_value(exobase_x_parameter, i);
            }
        if (own && s.exobase_composition_bulk)
            bad_value("exobase_composition",
                      "'bulk' takes the bulk fractions as the exobase composition, but the row "
                      "also gives exobase_x_<species>: keep one");
        if (!own && !s.exobase_composition_bulk) {
            std::string missing;
            for (std::size_t i = 0; i < n; ++i)
                missing +=
                    (missing.empty() ? "'exobase_x_" : ", 'exobase_x_") + s.species[i].name + "'";
            bad_value("exobase_x_<species>",
                      "no exobase composition given: a prescribed exobase needs " + missing +
                          " (its mole fractions at the exobase), or the text column "
                          "'exobase_composition' set to 'bulk' to take the bulk fractions "
                          "x_<species> (which share the inventory) as the exobase's too");
        }
        std::vector<double> densities(n);
        for (std::size_t i = 0; i < n; ++i) {
            const double x_exo = s.species_value(exobase_x_parameter, i);
            densities[i] = own ? (std::isnan(x_exo) ? 0.0 : x_exo / exo_sum * n_exo)
                               : s.mole_fraction(i) / x_sum * n_exo;
        }
        c.exobase =
            std::make_shared<PrescribedExobase>(radius + required(k.exobase_altitude, why),
                                                std::move(names), std::move(densities), s.scaling);
    }

    // Inventories: per species, else the total shared by mole fraction. A surface pressure P
    // holds N = P 4 pi R^2 / (g m_mean) particles, g = G M / R^2 (hydrostatic column).
    double total = nan;
    if (has(k.inventory) && has(k.surface_pressure))
        bad_value("surface_pressure", "give either 'inventory' or 'surface_pressure', not both");
    if (has(k.inventory))
        total = s.values[k.inventory];
    if (has(k.surface_pressure)) {
        const double g = constants::G * mass / (radius * radius);
        total =
            s.values[k.surface_pressure] * 4.0 * constants::pi * radius * radius / (g * mean_mass);
    }
    c.initial_inventory.resize(n);
    for (std::size_t i = 0; i < n; ++i) {
        if (!std::isnan(s.inventory(i))) {
            c.initial_inventory[i] = s.inventory(i);
        } else {
            const std::string& name = s.species[i].name;
            if (std::isnan(total))
                bad_value("inventory", "no initial inventory of " + name +
                                           ": give 'inventory', 'surface_pressure' or "
                                           "'inventory_" +
                                           name + "'");
            c.initial_inventory[i] = total * s.mole_fraction(i) / x_sum;
        }
    }

    // Span: per case, else the options; the end defaults to the star's present age.
    c.t_start = t_start;
    c.t_end = optional(k.age_end, optional(k.star_age, o.t_end));
    if (!(c.t_end > c.t_start))
        bad_value(has(k.age_end)    ? "age_end"
                  : has(k.star_age) ? "star_age"
                                    : "age_end",
                  "the end age " + format_value(c.t_end) + " s is not after the start age " +
                      format_value(c.t_start) + " s");

    // Exobase temperature history.
    if (has(k.temperature_reference)) {
        if (has(k.exobase_temperature))
            bad_value("exobase_temperature", "give either 'exobase_temperature' or the XUV law "
                                             "('temperature_reference' ...), not both");
        const char* why = "the XUV temperature law needs it";
        c.temperature = ExobaseTemperature::xuv_power_law(
            s.values[k.temperature_reference], required(k.temperature_reference_flux, why),
            required(k.temperature_exponent, why), required(k.temperature_min, why),
            required(k.temperature_max, why));
    } else {
        const double t0 =
            required(k.exobase_temperature, "or give the XUV law 'temperature_reference' ...");
        if (has(k.exobase_temperature_end))
            c.temperature = ExobaseTemperature::table({c.t_start, c.t_end},
                                                      {t0, s.values[k.exobase_temperature_end]});
        else
            c.temperature = ExobaseTemperature::constant(t0);
    }
    if (has(k.heating_efficiency)) {
        HydrodynamicOptions h;
        h.efficiency = s.values[k.heating_efficiency];
        h.roche_lobe = with_star;
        h.escaping_species = s.escaping_species;
        h.activation = s.activation;
        h.drag = optional(k.drag, 1.0) == 1.0;
        for (std::size_t i = 0; i < n; ++i) { // listed laws, as EnergyLimitedEscape(diffusion=)
            const double a = s.species_value(drag_diffusion_parameter, i);
            const double e = s.species_value(drag_diffusion_exponent_parameter, i);
            if (!std::isnan(e) && std::isnan(a))
                bad_value("drag_diffusion_exponent_" + s.species[i].name,
                          "got " + format_value(e) + ", but the law needs its coefficient 'drag_" +
                              "diffusion_" + s.species[i].name + "' [m-1 s-1]");
            if (!std::isnan(a))
                h.diffusion.emplace_back(s.species[i].name,
                                         DiffusionLaw{a, std::isnan(e) ? 0.0 : e});
        }
        c.hydrodynamic = h;
    } else {
        const std::string why =
            "energy-limited escape ('heating_efficiency'), which this row does not switch on";
        if (has(k.drag))
            bad_value("drag", "got " + format_value(s.values[k.drag]) + ", but it is for " + why);
        for (std::size_t i = 0; i < n; ++i)
            for (std::size_t q : {drag_diffusion_parameter, drag_diffusion_exponent_parameter})
                if (!std::isnan(s.species_value(q, i)))
                    bad_value(species_prefix(species_parameters()[q]) + s.species[i].name,
                              "got " + format_value(s.species_value(q, i)) + ", but it is for " +
                                  why);
        if (!s.escaping_species.empty())
            bad_value("escaping_species", "'" + s.escaping_species + "', but it is for " + why);
        if (s.activation_given)
            bad_value("energy_limited_activation", "is for " + why);
    }
    add_loss_options(s, with_star, mean_mass, c);
    // Regime thresholds: the row's, each defaulting to the sweep's.
    c.thresholds = o.thresholds;
    c.thresholds.enhanced = optional(k.threshold_enhanced, c.thresholds.enhanced);
    c.thresholds.transition = optional(k.threshold_transition, c.thresholds.transition);
    c.thresholds.hydrodynamic = optional(k.threshold_hydrodynamic, c.thresholds.hydrodynamic);
    try {
        c.thresholds.validate();
    } catch (const InputError& e) {
        const std::size_t given = has(k.threshold_enhanced)     ? k.threshold_enhanced
                                  : has(k.threshold_transition) ? k.threshold_transition
                                                                : k.threshold_hydrodynamic;
        bad_value(params[given].name, std::string("the row's thresholds (the sweep's where a "
                                                  "column is empty): ") +
                                          e.what());
    }
    c.rtol = optional(k.rtol, o.rtol);
    c.max_steps = static_cast<std::size_t>(optional(k.max_steps, static_cast<double>(o.max_steps)));
    c.depletion_fraction = o.depletion_fraction;
    c.t_eval = case_times(o, c.t_start, c.t_end);
    return c;
}

CaseSpec sample_case(const CaseSpec& spec, std::uint64_t seed, std::uint64_t sample) {
    CaseSpec s = spec;
    CounterRng rng(seed, spec.key, sample);
    for (const Uncertainty& u : spec.uncertainties) {
        const CaseParameter* p = u.range ? u.range : find_case_parameter(u.parameter);
        if (!p || u.slot >= spec.values.size())
            throw InputError("uncertainty of '" + u.parameter + "': no such parameter in the case");
        const double value = spec.values[u.slot];
        double drawn = value;
        bool found = false;
        for (int k = 0; k < 1000 && !found; ++k) {
            if (u.distribution == Distribution::SplitNormal) {
                drawn = rng.split_normal(value, u.width_lower, u.width);
            } else {
                const double z = rng.normal();
                drawn = u.distribution == Distribution::Normal ? value + u.width * z
                                                               : value * std::exp(u.width * z);
            }
            found = in_range(*p, drawn);
        }
        if (!found)
            throw NumericalError(
                "sample " + std::to_string(sample) + ": no value of '" + u.parameter +
                "' in its range (" + range_text(*p) + ") in 1000 draws around " +
                format_value(value) + " with width " +
                (u.distribution == Distribution::SplitNormal
                     ? "+" + format_value(u.width) + "/-" + format_value(u.width_lower)
                     : format_value(u.width)));
        s.values[u.slot] = drawn;
    }
    return s;
}

DesignSample design_sample(const CaseSpec& spec, const BatchOptions& o,
                           const std::vector<std::string>& inputs, std::uint64_t run) {
    if (o.design == SampleDesign::MonteCarlo)
        return {sample_case(spec, o.seed, run), true};
    const SaltelliDesign d{o.samples, inputs.size()};
    d.validate();
    if (run >= d.runs())
        throw InputError("sample " + std::to_string(run) + " is past the design's " +
                         std::to_string(d.runs()) + " runs");
    const std::uint64_t row = d.row(run), block = d.block(run);
    if (block <= 1)
        return {sample_case(spec, o.seed, 2 * row + block), true};
    // A_B^(i): A's row with input i from B's row; a case that holds input i fixed has the
    // same inputs as in A, and so the same outputs.
    DesignSample out{sample_case(spec, o.seed, 2 * row), false};
    const std::string& name = inputs[block - 2];
    for (const Uncertainty& u : spec.uncertainties)
        if (u.parameter == name) {
            out.spec.values[u.slot] = sample_case(spec, o.seed, 2 * row + 1).values[u.slot];
            out.run = true;
        }
    return out;
}

namespace {

// InputError for a sample design the table cannot have.
void check_design(const CaseTable& table, const BatchOptions& o) {
    if (o.design != SampleDesign::Saltelli)
        return;
    if (table_inputs(table).empty())
        throw InputError("design: a Saltelli design needs uncertain inputs, and the case table "
                         "has no '_sigma', '_lnsigma' or '_sigma_upper' column");
    if (o.samples == 0)
        throw InputError("samples: a Saltelli design needs base rows (> 0), got 0");
}

// Errors of rows [begin, end) ("" for a row that can run), checked on up to o.threads threads.
// `o.species` must be set.
std::vector<std::string> check_rows(const CaseTable& table, const BatchOptions& o,
                                    std::size_t begin, std::size_t end) {
    std::vector<std::string> errors(end - begin);
    const std::size_t threads = detail::thread_count(o.threads, (end - begin) / 256 + 1);
    // One plan per thread (it holds scratch space), made here where a failure can still throw.
    std::vector<TablePlan> plans(threads, plan_table(table));
    auto check = [&](std::size_t first, std::size_t stride) {
        TablePlan& plan = plans[first];
        for (std::size_t i = begin + first; i < end; i += stride) {
            std::string& error = errors[i - begin];
            if (!table.row_errors.empty() && !table.row_errors[i].empty()) {
                error = table.row_errors[i];
                continue;
            }
            try {
                const CaseSpec s = read_case(table, plan, i);
                try {
                    output_columns(s, o);
                    build_config(s, o).validate();
                } catch (const InputError& e) {
                    throw InputError(s.label + " (case '" + s.name + "'), " + e.what());
                }
            } catch (const std::exception& e) {
                error = e.what();
            }
        }
    };
    detail::run_on_threads(threads, [&](std::size_t first) { check(first, threads); });
    return errors;
}

} // namespace

std::vector<std::string> check_table(const CaseTable& table, const BatchOptions& options) {
    check_table_columns(table);
    BatchOptions o = options;
    if (o.species.empty())
        o.species = table_species(table);
    o.validate();
    check_design(table, o);
    return check_rows(table, o, 0, table.rows());
}

// --- chunks -----------------------------------------------------------------------------------

void BatchChunk::reset(std::size_t first_row, std::size_t cases, std::size_t species_count,
                       std::size_t time_count, std::size_t sample_count, std::size_t input_count) {
    first = first_row;
    count = cases;
    species = species_count;
    times = time_count;
    samples = sample_count;
    const std::size_t cs = cases * species_count, cts = cs * time_count;
    const std::size_t css = cs * sample_count;
    key.assign(cases, 0);
    name.assign(cases, std::string());
    error.assign(cases, std::string());
    steps.assign(cases, 0);
    for (auto* v : {&planet_mass, &planet_radius, &exobase_radius, &escape_speed, &t_start, &t_end,
                    &temperature_start})
        v->assign(cases, nan);
    exobase_temperature.assign(cases * time_count, nan);
    bulk_jeans_start.assign(cases, nan);
    hydrodynamic_unmodelled.assign(cases, -1);
    stripping_time.assign(cases, nan);
    planet_radius_end.assign(cases, nan);
    retained.assign(cts, nan);
    jeans_parameter.assign(cts, nan);
    for (auto* v : {&mole_fraction, &final_retained, &depletion_time, &efolding_time,
                    &escape_rate_start, &given_loss_start, &jeans_start, &jeans_end})
        v->assign(cs, nan);
    for (auto* v : {&regime_time_jeans, &regime_time_enhanced_jeans, &regime_time_transition,
                    &regime_time_hydrodynamic, &loss_share_jeans, &loss_share_enhanced_jeans,
                    &loss_share_transition, &loss_share_hydrodynamic, &loss_share_energy_limited,
                    &loss_share_given, &non_jeans_loss_share})
        v->assign(cs, nan);
    regime_start.assign(cs, -1);
    sample_retained.assign(css, nan);
    sample_depletion_time.assign(css, nan);
    sample_failed.assign(cases * sample_count, 0);
    sample_error.assign(cases, std::string());
    inputs = input_count;
    sample_input.assign(cases * sample_count * input_count, nan);
    input_uncertain.assign(cases * input_count, 0);
}

namespace {

// One evolution run of case `c` of a chunk: the nominal run (sample < 0) or a Monte Carlo one.
// Returns false when cancelled; throws for a failed run.
// `inputs` are the table's uncertain inputs, `input_slot` their slots in the case (none: absent).
bool run_case(const CaseSpec& spec, long long sample, const BatchOptions& o,
              const std::vector<std::size_t>& column, const std::vector<std::string>& inputs,
              const std::vector<std::size_t>& input_slot, std::size_t c, BatchChunk& out,
              const std::atomic<bool>& cancel) {
    std::optional<EvolutionConfig> built;
    if (sample < 0) {
        built.emplace(build_config(spec, o));
    } else {
        const DesignSample drawn =
            design_sample(spec, o, inputs, static_cast<std::uint64_t>(sample));
        // The inputs are stored before the run, so that a failed run's inputs are kept too.
        const std::size_t at = (c * out.samples + static_cast<std::size_t>(sample)) * out.inputs;
        for (std::size_t k = 0; k < out.inputs; ++k)
            if (input_slot[k] != none)
                out.sample_input[at + k] = drawn.spec.values[input_slot[k]];
        if (!drawn.run)
            return true; // its outputs are those of A's row: left NaN, not run again
        built.emplace(build_config(drawn.spec, o));
    }
    EvolutionConfig& config = *built;
    config.progress = [&cancel](double) { return !cancel.load(std::memory_order_relaxed); };
    config.record_rates = false; // only the first output's rates are read (e-folding times)
    if (sample >= 0)             // a Monte Carlo run reports its end only: no outputs between
        config.t_eval = {config.t_start, config.t_end};
    const EvolutionResult r = evolve(config);
    if (!r.completed)
        return false;
    const std::size_t n = r.species_count(), S = out.species, T = out.times;
    const std::size_t last = r.time_count() - 1;
    if (sample >= 0) {
        const std::size_t base = (c * out.samples + static_cast<std::size_t>(sample)) * S;
        for (std::size_t i = 0; i < n; ++i) {
            out.sample_retained[base + column[i]] =
                r.inventory[last * n + i] / config.initial_inventory[i];
            out.sample_depletion_time[base + column[i]] = r.depletion_time[i];
        }
        return true;
    }
    const Planet& p = config.planet;
    const double r_exo = r.exobase_radius[0];
    out.steps[c] = static_cast<std::int64_t>(r.steps);
    out.planet_mass[c] = p.mass();
    out.planet_radius[c] = p.radius();
    out.exobase_radius[c] = r_exo;
    out.escape_speed[c] = std::sqrt(2.0 * constants::G * p.mass() / r_exo);
    out.t_start[c] = config.t_start;
    out.t_end[c] = config.t_end;
    out.temperature_start[c] = r.exobase_temperature[0];
    // Bulk gas at the start: lambda is linear in the particle mass, so the Jeans parameter of
    // the well-mixed mean mass is the mole-weighted mean of the species' values.
    double x_sum = 0.0, lambda_bulk = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        x_sum += spec.mole_fraction(i);
        lambda_bulk += spec.mole_fraction(i) * r.jeans_parameter[i];
    }
    lambda_bulk /= x_sum;
    out.bulk_jeans_start[c] = lambda_bulk;
    // Hydrodynamic at any time: the well-mixed gas at the start, or the run's bulk regime.
    const bool hydrodynamic_bulk =
        lambda_bulk <= config.thresholds.hydrodynamic ||
        r.bulk_regime_time[static_cast<std::size_t>(Regime::Hydrodynamic)] > 0.0 ||
        r.regime.front() == static_cast<int>(Regime::Hydrodynamic);
    out.hydrodynamic_unmodelled[c] = hydrodynamic_bulk && !config.hydrodynamic.has_value() ? 1 : 0;
    out.stripping_time[c] = r.stripping_time;
    out.planet_radius_end[c] = r.has_envelope() ? r.planet_radius[last] : p.radius();
    // Rows of r at the batch's output times (r holds t_start, the inner times, t_end).
    std::size_t k = 0;
    for (std::size_t j = 0; j < T; ++j) {
        const double t = o.times[j];
        if (t < config.t_start || t > config.t_end)
            continue;
        while (k < last && r.time[k] < t)
            ++k;
        if (r.time[k] != t)
            continue;
        out.exobase_temperature[c * T + j] = r.exobase_temperature[k];
        for (std::size_t i = 0; i < n; ++i) {
            const std::size_t at = (c * T + j) * S + column[i];
            out.retained[at] = r.inventory[k * n + i] / config.initial_inventory[i];
            out.jeans_parameter[at] = r.jeans_parameter[k * n + i];
        }
    }
    for (std::size_t i = 0; i < n; ++i) {
        const std::size_t at = c * S + column[i];
        out.final_retained[at] = r.inventory[last * n + i] / config.initial_inventory[i];
        out.depletion_time[at] = r.depletion_time[i];
        out.efolding_time[at] = r.inventory[i] / r.escape_rate[i];
        out.escape_rate_start[at] = r.escape_rate[i];
        out.given_loss_start[at] = r.given_loss_rate[i];
        out.jeans_start[at] = r.jeans_parameter[i];
        out.jeans_end[at] = r.jeans_parameter[last * n + i];
        out.regime_start[at] =
            static_cast<std::int64_t>(classify_regime(r.jeans_parameter[i], config.thresholds));
        const double parts[6] = {r.regime_loss[i * 4],     r.regime_loss[i * 4 + 1],
                                 r.regime_loss[i * 4 + 2], r.regime_loss[i * 4 + 3],
                                 r.energy_limited_loss[i], r.given_loss[i]};
        const double total = parts[0] + parts[1] + parts[2] + parts[3] + parts[4] + parts[5];
        std::vector<double>* times[4] = {&out.regime_time_jeans, &out.regime_time_enhanced_jeans,
                                         &out.regime_time_transition,
                                         &out.regime_time_hydrodynamic};
        std::vector<double>* shares[6] = {
            &out.loss_share_jeans,          &out.loss_share_enhanced_jeans,
            &out.loss_share_transition,     &out.loss_share_hydrodynamic,
            &out.loss_share_energy_limited, &out.loss_share_given};
        for (std::size_t k = 0; k < 4; ++k)
            (*times[k])[at] = r.regime_time[i * 4 + k];
        for (std::size_t k = 0; k < 6; ++k)
            (*shares[k])[at] = total > 0.0 ? parts[k] / total : 0.0;
        out.non_jeans_loss_share[at] = r.non_jeans_loss_share[i];
    }
    return true;
}

// Slot of parameter `name` in spec.values (also a per-species one of a present species), or
// none.
std::size_t value_slot(const CaseSpec& spec, const std::string& name) {
    const auto& params = case_parameters();
    for (std::size_t k = 0; k < params.size(); ++k)
        if (params[k].name == name)
            return k;
    const std::size_t n = spec.species.size();
    std::string sp;
    const std::size_t k = find_species_parameter(name, &sp);
    if (k < species_parameters().size())
        for (std::size_t i = 0; i < n; ++i)
            if (spec.species[i].name == sp)
                return params.size() + k * n + i;
    return none;
}

// A chunk being computed: its results and the cases' specs.
struct Slot {
    BatchChunk out;
    std::vector<CaseSpec> specs;                       // read by the first worker that needs one
    std::unique_ptr<std::once_flag[]> read;            // one per case
    std::vector<std::vector<std::size_t>> columns;     // case species -> output species
    std::vector<std::vector<std::size_t>> input_slots; // table input -> slot in the case
    std::vector<std::size_t> lowest_failed;            // lowest failed sample per case
    std::size_t remaining = 0;                         // runs not finished
};

} // namespace

BatchStatus run_batch(const CaseTable& table, std::size_t begin, std::size_t end,
                      const BatchOptions& options, const BatchHooks& hooks) {
    if (begin > end || end > table.rows())
        throw InputError("run_batch: rows [" + std::to_string(begin) + ", " + std::to_string(end) +
                         ") are not inside the table's " + std::to_string(table.rows()) + " rows");
    BatchOptions o = options;
    if (o.species.empty())
        o.species = table_species(table);
    check_table_columns(table);
    o.validate();

    // Unless invalid rows are to be reported, every row is checked before any run.
    if (!o.skip_invalid) {
        const std::vector<std::string> errors = check_rows(table, o, begin, end);
        std::string listed;
        std::size_t bad = 0;
        for (std::size_t i = begin; i < end; ++i) {
            const std::string& e = errors[i - begin];
            if (e.empty() || (!table.row_errors.empty() && !table.row_errors[i].empty()))
                continue;
            if (bad < 10)
                listed += "\n  " + e;
            ++bad;
        }
        if (bad)
            throw InputError("case table: " + std::to_string(bad) + " invalid row" +
                             (bad > 1 ? "s" : "") + listed + (bad > 10 ? "\n  ..." : ""));
    }

    check_design(table, o);
    const std::vector<std::string> inputs = table_inputs(table);
    const std::size_t K = inputs.size();
    const std::size_t S = o.species.size(), T = o.times.size(), N = sample_runs(o, K);
    const std::size_t per_case = 1 + N;
    const std::size_t cases = end - begin;
    const std::size_t chunk = o.chunk_size;
    const std::size_t chunks = (cases + chunk - 1) / chunk;
    const std::size_t total_runs = cases * per_case;
    const std::size_t window = std::min(o.chunks_in_flight, std::max<std::size_t>(chunks, 1));
    const std::size_t threads =
        detail::thread_count(o.threads, std::max<std::size_t>(total_runs, 1));

    std::vector<Slot> slots(window);
    auto chunk_end_run = [&](std::size_t c) { return std::min((c + 1) * chunk, cases) * per_case; };
    // Opening a chunk only sizes its arrays; its cases are read by the workers (read_slot_case), so
    // that the calling thread stays free for the hooks.
    auto open_chunk = [&](std::size_t c) {
        Slot& s = slots[c % window];
        const std::size_t first = c * chunk, count = std::min(chunk, cases - first);
        s.out.reset(begin + first, count, S, T, N, N > 0 ? K : 0);
        s.specs.assign(count, CaseSpec{});
        s.read.reset(new std::once_flag[count]);
        s.columns.assign(count, {});
        s.input_slots.assign(count, std::vector<std::size_t>(K, none));
        s.lowest_failed.assign(count, std::numeric_limits<std::size_t>::max());
        s.remaining = count * per_case;
        for (std::size_t j = 0; j < count; ++j) {
            s.out.key[j] = table.first_key + begin + first + j;
            s.out.name[j] = table.names[begin + first + j];
        }
    };
    auto read_slot_case = [&](Slot& s, std::size_t j, TablePlan& plan) {
        const std::size_t row = s.out.first + j;
        CaseSpec& spec = s.specs[j];
        if (!table.row_errors.empty() && !table.row_errors[row].empty()) {
            spec.error = table.row_errors[row];
            return;
        }
        try {
            spec = read_case(table, plan, row);
        } catch (const InputError& e) {
            spec = CaseSpec{};
            spec.error = e.what();
            return;
        }
        try {
            s.columns[j] = output_columns(spec, o);
        } catch (const InputError& e) {
            spec.error = spec.label + " (case '" + spec.name + "'), " + e.what();
            return;
        }
        if (N > 0)
            for (std::size_t k = 0; k < K; ++k) {
                s.input_slots[j][k] = value_slot(spec, inputs[k]);
                for (const Uncertainty& u : spec.uncertainties)
                    if (u.parameter == inputs[k])
                        s.out.input_uncertain[j * K + k] = 1;
            }
        std::fill_n(s.out.mole_fraction.begin() + static_cast<std::ptrdiff_t>(j * S), S, 0.0);
        for (std::size_t i = 0; i < spec.species.size(); ++i)
            s.out.mole_fraction[j * S + s.columns[j][i]] = spec.mole_fraction(i);
    };

    std::mutex m;
    std::condition_variable work_cv, done_cv;
    std::size_t next_run = 0, window_end = 0;
    std::atomic<bool> cancel{false};
    std::atomic<std::size_t> runs_done{0};
    for (std::size_t c = 0; c < window && c < chunks; ++c) {
        open_chunk(c);
        window_end = chunk_end_run(c);
    }

    // One plan per worker: it holds scratch space. Made here, where a failure can still throw.
    std::vector<TablePlan> plans(threads, plan_table(table));
    auto worker = [&](TablePlan& plan) {
        for (;;) {
            std::size_t g;
            {
                std::unique_lock<std::mutex> lock(m);
                work_cv.wait(lock, [&] {
                    return cancel.load() || next_run >= total_runs || next_run < window_end;
                });
                if (cancel.load() || next_run >= total_runs)
                    return;
                g = next_run++;
            }
            const std::size_t case_index = g / per_case;
            const long long sample = static_cast<long long>(g % per_case) - 1;
            const std::size_t c = case_index / chunk;
            Slot& s = slots[c % window];
            const std::size_t j = case_index - c * chunk;
            std::string failure;
            bool finished = true;
            try {
                std::call_once(s.read[j], read_slot_case, std::ref(s), j, std::ref(plan));
                const CaseSpec& spec = s.specs[j];
                if (!spec.error.empty()) {
                    failure = spec.error;
                } else {
                    try {
                        finished = run_case(spec, sample, o, s.columns[j], inputs, s.input_slots[j],
                                            j, s.out, cancel);
                    } catch (const InputError& e) {
                        // As check_table() words it: where, then what.
                        failure = spec.label + " (case '" + spec.name + "'), " + e.what();
                    }
                }
            } catch (const std::exception& e) {
                failure = e.what();
            } catch (...) {
                failure = "unknown error";
            }
            if (!finished)
                return; // cancelled
            std::lock_guard<std::mutex> lock(m);
            if (!failure.empty()) {
                if (sample < 0) {
                    s.out.error[j] = failure;
                } else {
                    const auto k = static_cast<std::size_t>(sample);
                    s.out.sample_failed[j * N + k] = 1;
                    if (k < s.lowest_failed[j]) {
                        s.lowest_failed[j] = k;
                        s.out.sample_error[j] = "sample " + std::to_string(k) + ": " + failure;
                    }
                }
            }
            runs_done.fetch_add(1);
            if (--s.remaining == 0)
                done_cv.notify_all();
        }
    };

    // Wakes the workers to return (those in a run stop within a step through its progress hook).
    auto cancel_all = [&]() {
        {
            std::lock_guard<std::mutex> lock(m);
            cancel.store(true);
        }
        work_cv.notify_all();
    };
    BatchStatus status;
    {
        detail::WorkerThreads pool(
            threads, [&](std::size_t k) { worker(plans[k]); }, cancel_all);
        try {
            // Progress by time (about every `interval`, with the runs finished so far) or by count
            // (after every `every`-th chunk handed out, with the runs of the chunks handed out).
            const std::size_t every = hooks.progress_every_chunks;
            auto last_progress = std::chrono::steady_clock::now();
            const auto interval = std::chrono::milliseconds(hooks.progress_interval_ms);
            auto report = [&](std::size_t done) {
                last_progress = std::chrono::steady_clock::now();
                if (hooks.on_progress && !hooks.on_progress(done, total_runs)) {
                    status.cancelled = true;
                    return false;
                }
                return true;
            };
            std::size_t runs_handed_out = 0;
            for (std::size_t c = 0; c < chunks && !status.cancelled; ++c) {
                Slot& s = slots[c % window];
                if (every > 0) {
                    std::unique_lock<std::mutex> lock(m);
                    done_cv.wait(lock, [&] { return s.remaining == 0; });
                } else {
                    for (;;) {
                        {
                            std::unique_lock<std::mutex> lock(m);
                            if (done_cv.wait_until(lock, last_progress + interval,
                                                   [&] { return s.remaining == 0; }))
                                break;
                        }
                        if (!report(runs_done.load()))
                            break;
                    }
                    if (status.cancelled)
                        break;
                }
                // A finished chunk: hand it out, then reuse its slot for the chunk `window` ahead.
                for (std::size_t j = 0; j < s.out.count; ++j) {
                    if (!s.out.error[j].empty())
                        ++status.cases_failed;
                    for (std::size_t k = 0; k < N; ++k)
                        status.samples_failed += s.out.sample_failed[j * N + k];
                }
                if (hooks.on_chunk)
                    hooks.on_chunk(s.out);
                status.cases_done += s.out.count;
                runs_handed_out += s.out.count * per_case;
                if (c + window < chunks) {
                    open_chunk(c + window);
                    {
                        std::lock_guard<std::mutex> lock(m);
                        window_end = chunk_end_run(c + window);
                    }
                    work_cv.notify_all();
                }
                // The last chunk is reported by the call at the end.
                if (c + 1 == chunks)
                    break;
                if (every > 0) {
                    if ((c + 1) % every == 0)
                        report(runs_handed_out);
                } else if (std::chrono::steady_clock::now() - last_progress >= interval) {
                    report(runs_done.load());
                }
            }
            if (!status.cancelled && hooks.on_progress)
                hooks.on_progress(every > 0 ? runs_handed_out : runs_done.load(), total_runs);
        } catch (...) {
            cancel_all(); // the pool's destructor joins the workers
            throw;
        }
        cancel_all();
        pool.join();
    }
    return status;
}

} // namespace exosieve
