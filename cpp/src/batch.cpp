#include "exosieve/batch.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <exception>
#include <limits>
#include <memory>
#include <mutex>
#include <optional>
#include <set>
#include <thread>
#include <utility>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"

namespace exosieve {

namespace {

constexpr double inf = std::numeric_limits<double>::infinity();
constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// SplitMix64 finaliser (Steele, Lea & Flood 2014): a bijective 64-bit mix.
std::uint64_t mix(std::uint64_t z) {
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

bool ends_with(const std::string& s, const std::string& tail) {
    return s.size() > tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}

bool starts_with(const std::string& s, const std::string& head) {
    return s.size() > head.size() && s.compare(0, head.size(), head) == 0;
}

// Text columns a table may carry besides the numeric ones.
const std::set<std::string>& text_columns() {
    static const std::set<std::string> names{"star", "density_scaling", "comment"};
    return names;
}

std::size_t edit_distance(const std::string& a, const std::string& b) {
    std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
    for (std::size_t j = 0; j <= b.size(); ++j)
        prev[j] = j;
    for (std::size_t i = 1; i <= a.size(); ++i) {
        cur[0] = i;
        for (std::size_t j = 1; j <= b.size(); ++j)
            cur[j] = std::min(
                {prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1)});
        std::swap(prev, cur);
    }
    return prev[b.size()];
}

std::string closest_parameters(const std::string& name) {
    std::vector<std::pair<std::size_t, std::string>> scored;
    for (const CaseParameter& p : case_parameters())
        scored.emplace_back(edit_distance(name, p.name), p.name);
    std::sort(scored.begin(), scored.end());
    std::string out;
    for (std::size_t k = 0; k < 3 && k < scored.size(); ++k)
        out += (k ? ", " : "") + scored[k].second;
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

bool in_range(const CaseParameter& p, double v) {
    if (!std::isfinite(v))
        return false;
    if (p.lower_open ? !(v > p.lower) : !(v >= p.lower))
        return false;
    return v <= p.upper;
}

// Per-species parameter templates.
const CaseParameter& mole_fraction_parameter() {
    static const CaseParameter p{"x_<species>", "1",  "mole fraction at the exobase (0: absent)",
                                 false,         true, 0.0,
                                 false,         inf};
    return p;
}
const CaseParameter& species_inventory_parameter() {
    static const CaseParameter p{"inventory_<species>",
                                 "particles",
                                 "initial inventory of the species",
                                 false,
                                 true,
                                 0.0,
                                 true,
                                 inf};
    return p;
}

// Why the value of `column` cannot be used.
[[noreturn]] void bad_value(const std::string& column, const std::string& what) {
    throw InputError("column '" + column + "': " + what);
}

double required(const CaseSpec& s, const std::string& name, const std::string& why = "") {
    const auto it = s.values.find(name);
    if (it == s.values.end())
        bad_value(name, "no value given" + (why.empty() ? std::string() : " (" + why + ")"));
    return it->second;
}

double optional(const CaseSpec& s, const std::string& name, double fallback) {
    const auto it = s.values.find(name);
    return it == s.values.end() ? fallback : it->second;
}

bool has(const CaseSpec& s, const std::string& name) {
    return s.values.count(name) != 0;
}

} // namespace

// --- random numbers ---------------------------------------------------------------------------

CounterRng::CounterRng(std::uint64_t seed, std::uint64_t case_key, std::uint64_t sample) {
    std::uint64_t h = mix(seed + 0x9e3779b97f4a7c15ULL);
    h = mix(h ^ (case_key + 0x632be59bd9b4e019ULL));
    h = mix(h ^ (sample + 0x8cb92ba72f3d8dd7ULL));
    state_ = h;
}

std::uint64_t CounterRng::next_bits() {
    state_ += 0x9e3779b97f4a7c15ULL;
    return mix(state_);
}

double CounterRng::uniform() {
    return static_cast<double>(next_bits() >> 11) * 0x1.0p-53;
}

double CounterRng::normal() {
    const double u1 = 1.0 - uniform(); // (0, 1]: the logarithm stays finite
    const double u2 = uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * constants::pi * u2);
}

// --- parameters -------------------------------------------------------------------------------

const std::vector<CaseParameter>& case_parameters() {
    // name, unit, meaning, required, uncertain, lower, lower_open, upper
    static const std::vector<CaseParameter> params{
        {"planet_mass", "kg", "planet mass", true, true, 0.0, true, inf},
        {"planet_radius", "m", "planet radius", true, true, 0.0, true, inf},
        {"exobase_altitude", "m", "exobase height above the surface", true, true, 0.0, false, inf},
        {"exobase_density", "m-3", "total number density at the exobase at the start", true, true,
         0.0, true, inf},
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
        {"heating_efficiency", "1", "energy-limited escape on: heating efficiency", false, true,
         0.0, true, 1.0},
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

const CaseParameter* find_case_parameter(const std::string& name) {
    for (const CaseParameter& p : case_parameters())
        if (p.name == name)
            return &p;
    if (starts_with(name, "x_"))
        return &mole_fraction_parameter();
    if (starts_with(name, "inventory_"))
        return &species_inventory_parameter();
    return nullptr;
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
        if (starts_with(name, "x_") && !ends_with(name, "_sigma") && !ends_with(name, "_lnsigma"))
            out.push_back(name.substr(2));
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
        std::string base = name;
        if (ends_with(name, "_lnsigma"))
            base = name.substr(0, name.size() - 8);
        else if (ends_with(name, "_sigma"))
            base = name.substr(0, name.size() - 6);
        const CaseParameter* p = find_case_parameter(base);
        if (!p)
            throw InputError("case table: unknown column '" + name +
                             "' (closest: " + closest_parameters(base) + ")");
        if (starts_with(base, "x_") || starts_with(base, "inventory_")) {
            const std::string sp = base.substr(base.find('_') + 1);
            try {
                default_registry().get(sp);
            } catch (const InputError& e) {
                throw InputError("case table: column '" + name + "': " + e.what());
            }
            if (starts_with(base, "inventory_") && !seen.count("x_" + sp))
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
            if (ends_with(name, "_sigma") && seen.count(base + "_lnsigma"))
                throw InputError("case table: columns '" + name + "' and '" + base +
                                 "_lnsigma' both give the uncertainty of '" + base + "'; keep one");
        }
    }
    for (const CaseParameter& p : case_parameters())
        if (p.required && !seen.count(p.name))
            throw InputError("case table: no column '" + p.name + "' (" + p.meaning + " [" +
                             p.unit + "]); every case needs it");
    if (table_species(table).empty())
        throw InputError("case table: no species: give mole fractions in columns 'x_<species>'");
    std::set<std::string> text_seen;
    for (const auto& [name, values] : table.text) {
        if (!text_columns().count(name))
            throw InputError("case table: unknown text column '" + name +
                             "' (text columns: "
                             "case, star, density_scaling, comment)");
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

CaseSpec case_from_table(const CaseTable& table, std::size_t row) {
    if (row >= table.rows())
        throw InputError("case table: row " + std::to_string(row) + " is past the last row (" +
                         std::to_string(table.rows()) + " rows)");
    CaseSpec s;
    s.name = table.names[row];
    s.label = table.row_label(row);
    s.key = table.first_key + row;
    const std::string where = s.label + " (case '" + s.name + "')";
    try {
        for (const auto& [name, values] : table.columns) {
            const double v = values[row];
            const bool lnsigma = ends_with(name, "_lnsigma");
            const bool sigma = !lnsigma && ends_with(name, "_sigma");
            if (sigma || lnsigma) {
                if (std::isnan(v))
                    continue;
                if (!std::isfinite(v) || v < 0.0)
                    bad_value(name,
                              "an uncertainty must be finite and >= 0, got " + format_value(v));
                const std::string base = name.substr(0, name.size() - (lnsigma ? 8 : 6));
                s.uncertainties.push_back(
                    {base, lnsigma ? Distribution::LogNormal : Distribution::Normal, v});
                continue;
            }
            if (std::isnan(v))
                continue;
            const CaseParameter* p = find_case_parameter(name);
            if (!p)
                bad_value(name, "unknown column");
            if (!in_range(*p, v))
                bad_value(name, "must be " + range_text(*p) + ", got " + format_value(v));
            if (name == "max_steps" && v != std::floor(v))
                bad_value(name, "must be a whole number, got " + format_value(v));
            s.values[name] = v;
        }
        for (const Uncertainty& u : s.uncertainties)
            if (!has(s, u.parameter))
                bad_value(u.parameter, "an uncertainty is given but no value");
        for (const auto& [name, values] : table.columns) {
            if (!starts_with(name, "x_") || ends_with(name, "_sigma") ||
                ends_with(name, "_lnsigma"))
                continue;
            const auto it = s.values.find(name);
            if (it != s.values.end() && it->second > 0.0) {
                // The numbers only: the source texts would be copied with every run.
                Species sp = default_registry().get(name.substr(2));
                sp.mass_source.clear();
                sp.lj_source.clear();
                sp.cross_section_source.clear();
                s.species.push_back(std::move(sp));
            }
        }
        if (s.species.empty())
            throw InputError("no species: every mole fraction 'x_<species>' is zero or empty");
        for (const auto& [name, values] : table.text) {
            if (name != "density_scaling")
                continue;
            const std::string& text = values[row];
            if (text.empty() || text == "inventory")
                s.scaling = DensityScaling::Inventory;
            else if (text == "fixed")
                s.scaling = DensityScaling::Fixed;
            else
                bad_value(name, "'" + text + "' is neither 'inventory' nor 'fixed'");
        }
    } catch (const InputError& e) {
        throw InputError(where + ", " + e.what());
    }
    return s;
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

EvolutionConfig build_config(const CaseSpec& s, const BatchOptions& o) {
    const double mass = required(s, "planet_mass");
    const double radius = required(s, "planet_radius");
    const bool with_star = has(s, "semi_major_axis");
    std::optional<Planet> planet;
    if (with_star) {
        XuvHistory xuv;
        xuv.saturation_ratio = optional(s, "xuv_saturation_ratio", xuv.saturation_ratio);
        xuv.saturation_time = optional(s, "xuv_saturation_time", xuv.saturation_time);
        xuv.decay_index = optional(s, "xuv_decay_index", xuv.decay_index);
        const double star_mass = required(s, "star_mass", "a semi_major_axis needs the star");
        const double luminosity =
            required(s, "star_luminosity", "a semi_major_axis needs the star");
        const Star star(star_mass, luminosity, xuv);
        planet.emplace(mass, radius, s.values.at("semi_major_axis"), star);
    } else {
        planet.emplace(mass, radius);
    }
    EvolutionConfig c(*planet);
    c.record_config = false; // the sweep file records the table and options instead
    const std::size_t n = s.species.size();
    std::vector<std::string> names;
    std::vector<double> x(n);
    double x_sum = 0.0, mean_mass = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        names.push_back(s.species[i].name);
        x[i] = s.values.at("x_" + names[i]);
        x_sum += x[i];
        mean_mass += x[i] * s.species[i].mass;
    }
    mean_mass /= x_sum;
    c.species = s.species;

    // Exobase: prescribed radius and densities n_i = x_i n.
    const double n_exo = required(s, "exobase_density");
    std::vector<double> densities(n);
    for (std::size_t i = 0; i < n; ++i)
        densities[i] = x[i] * n_exo;
    c.exobase = std::make_shared<PrescribedExobase>(radius + required(s, "exobase_altitude"), names,
                                                    densities, s.scaling);

    // Inventories: per species, else the total shared by mole fraction. A surface pressure P
    // holds N = P 4 pi R^2 / (g m_mean) particles, g = G M / R^2 (hydrostatic column).
    double total = nan;
    if (has(s, "inventory") && has(s, "surface_pressure"))
        bad_value("surface_pressure", "give either 'inventory' or 'surface_pressure', not both");
    if (has(s, "inventory"))
        total = s.values.at("inventory");
    if (has(s, "surface_pressure")) {
        const double g = constants::G * mass / (radius * radius);
        total = s.values.at("surface_pressure") * 4.0 * constants::pi * radius * radius /
                (g * mean_mass);
    }
    c.initial_inventory.resize(n);
    for (std::size_t i = 0; i < n; ++i) {
        const auto it = s.values.find("inventory_" + names[i]);
        if (it != s.values.end()) {
            c.initial_inventory[i] = it->second;
        } else {
            if (std::isnan(total))
                bad_value("inventory", "no initial inventory of " + names[i] +
                                           ": give 'inventory', 'surface_pressure' or "
                                           "'inventory_" +
                                           names[i] + "'");
            c.initial_inventory[i] = total * x[i] / x_sum;
        }
    }

    // Span: per case, else the options; the end defaults to the star's present age.
    c.t_start = optional(s, "age_start", o.t_start);
    c.t_end = optional(s, "age_end", optional(s, "star_age", o.t_end));
    if (!(c.t_end > c.t_start))
        bad_value(has(s, "age_end")    ? "age_end"
                  : has(s, "star_age") ? "star_age"
                                       : "age_end",
                  "the end age " + format_value(c.t_end) + " s is not after the start age " +
                      format_value(c.t_start) + " s");

    // Exobase temperature history.
    if (has(s, "temperature_reference")) {
        if (has(s, "exobase_temperature"))
            bad_value("exobase_temperature", "give either 'exobase_temperature' or the XUV law "
                                             "('temperature_reference' ...), not both");
        const std::string why = "the XUV temperature law needs it";
        c.temperature = ExobaseTemperature::xuv_power_law(
            s.values.at("temperature_reference"), required(s, "temperature_reference_flux", why),
            required(s, "temperature_exponent", why), required(s, "temperature_min", why),
            required(s, "temperature_max", why));
    } else {
        const double t0 =
            required(s, "exobase_temperature", "or give the XUV law 'temperature_reference' ...");
        if (has(s, "exobase_temperature_end"))
            c.temperature = ExobaseTemperature::table({c.t_start, c.t_end},
                                                      {t0, s.values.at("exobase_temperature_end")});
        else
            c.temperature = ExobaseTemperature::constant(t0);
    }
    if (has(s, "heating_efficiency")) {
        HydrodynamicOptions h;
        h.efficiency = s.values.at("heating_efficiency");
        h.roche_lobe = with_star;
        c.hydrodynamic = h;
    }
    c.thresholds = o.thresholds;
    c.rtol = optional(s, "rtol", o.rtol);
    c.max_steps =
        static_cast<std::size_t>(optional(s, "max_steps", static_cast<double>(o.max_steps)));
    c.depletion_fraction = o.depletion_fraction;
    c.t_eval = case_times(o, c.t_start, c.t_end);
    return c;
}

CaseSpec sample_case(const CaseSpec& spec, std::uint64_t seed, std::uint64_t sample) {
    CaseSpec s = spec;
    CounterRng rng(seed, spec.key, sample);
    for (const Uncertainty& u : spec.uncertainties) {
        const CaseParameter* p = find_case_parameter(u.parameter);
        const double value = spec.values.at(u.parameter);
        double drawn = value;
        bool found = false;
        for (int k = 0; k < 1000 && !found; ++k) {
            const double z = rng.normal();
            drawn = u.distribution == Distribution::Normal ? value + u.width * z
                                                           : value * std::exp(u.width * z);
            found = in_range(*p, drawn);
        }
        if (!found)
            throw NumericalError("sample " + std::to_string(sample) + ": no value of '" +
                                 u.parameter + "' in its range (" + range_text(*p) +
                                 ") in 1000 draws around " + format_value(value) + " with width " +
                                 format_value(u.width));
        s.values[u.parameter] = drawn;
    }
    return s;
}

namespace {

// Errors of rows [begin, end) ("" for a row that can run), checked on up to o.threads threads.
// `o.species` must be set.
std::vector<std::string> check_rows(const CaseTable& table, const BatchOptions& o,
                                    std::size_t begin, std::size_t end) {
    std::vector<std::string> errors(end - begin);
    const std::size_t hardware = std::max(1u, std::thread::hardware_concurrency());
    const std::size_t threads = std::max<std::size_t>(
        1, std::min<std::size_t>(o.threads ? o.threads : hardware, (end - begin) / 256 + 1));
    auto check = [&](std::size_t first, std::size_t stride) {
        for (std::size_t i = begin + first; i < end; i += stride) {
            std::string& error = errors[i - begin];
            if (!table.row_errors.empty() && !table.row_errors[i].empty()) {
                error = table.row_errors[i];
                continue;
            }
            try {
                const CaseSpec s = case_from_table(table, i);
                try {
                    for (const Species& sp : s.species)
                        if (std::find(o.species.begin(), o.species.end(), sp.name) ==
                            o.species.end())
                            throw InputError("species '" + sp.name +
                                             "' is not among the batch's species");
                    build_config(s, o).validate();
                } catch (const InputError& e) {
                    throw InputError(s.label + " (case '" + s.name + "'), " + e.what());
                }
            } catch (const std::exception& e) {
                error = e.what();
            }
        }
    };
    std::vector<std::thread> pool;
    try {
        for (std::size_t k = 1; k < threads; ++k)
            pool.emplace_back(check, k, threads);
    } catch (...) {
        for (std::thread& t : pool)
            t.join();
        throw;
    }
    check(0, threads);
    for (std::thread& t : pool)
        t.join();
    return errors;
}

} // namespace

std::vector<std::string> check_table(const CaseTable& table, const BatchOptions& options) {
    check_table_columns(table);
    BatchOptions o = options;
    if (o.species.empty())
        o.species = table_species(table);
    o.validate();
    return check_rows(table, o, 0, table.rows());
}

// --- chunks -----------------------------------------------------------------------------------

void BatchChunk::reset(std::size_t first_row, std::size_t cases, std::size_t species_count,
                       std::size_t time_count, std::size_t sample_count) {
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
    retained.assign(cts, nan);
    jeans_parameter.assign(cts, nan);
    for (auto* v : {&mole_fraction, &final_retained, &depletion_time, &efolding_time, &jeans_start,
                    &jeans_end})
        v->assign(cs, nan);
    regime_start.assign(cs, -1);
    sample_retained.assign(css, nan);
    sample_depletion_time.assign(css, nan);
    sample_failed.assign(cases * sample_count, 0);
    sample_error.assign(cases, std::string());
}

namespace {

// One evolution run of case `c` of a chunk: the nominal run (sample < 0) or a Monte Carlo one.
// Returns false when cancelled; throws for a failed run.
bool run_case(const CaseSpec& spec, long long sample, const BatchOptions& o,
              const std::vector<std::size_t>& column, std::size_t c, BatchChunk& out,
              const std::atomic<bool>& cancel) {
    EvolutionConfig config =
        sample < 0 ? build_config(spec, o)
                   : build_config(sample_case(spec, o.seed, static_cast<std::uint64_t>(sample)), o);
    config.progress = [&cancel](double) { return !cancel.load(std::memory_order_relaxed); };
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
        out.jeans_start[at] = r.jeans_parameter[i];
        out.jeans_end[at] = r.jeans_parameter[last * n + i];
        out.regime_start[at] =
            static_cast<std::int64_t>(classify_regime(r.jeans_parameter[i], o.thresholds));
    }
    return true;
}

// A chunk being computed: its results and the cases' specs.
struct Slot {
    BatchChunk out;
    std::vector<CaseSpec> specs;                   // read by the first worker that needs one
    std::unique_ptr<std::once_flag[]> read;        // one per case
    std::vector<std::vector<std::size_t>> columns; // case species -> output species
    std::vector<std::size_t> lowest_failed;        // lowest failed sample per case
    std::size_t remaining = 0;                     // runs not finished
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

    const std::size_t S = o.species.size(), T = o.times.size(), N = o.samples;
    const std::size_t per_case = 1 + N;
    const std::size_t cases = end - begin;
    const std::size_t chunk = o.chunk_size;
    const std::size_t chunks = (cases + chunk - 1) / chunk;
    const std::size_t total_runs = cases * per_case;
    const std::size_t window = std::min(o.chunks_in_flight, std::max<std::size_t>(chunks, 1));
    std::size_t threads = o.threads ? o.threads : std::thread::hardware_concurrency();
    threads = std::max<std::size_t>(1, std::min(threads, std::max<std::size_t>(total_runs, 1)));

    std::vector<Slot> slots(window);
    auto chunk_end_run = [&](std::size_t c) { return std::min((c + 1) * chunk, cases) * per_case; };
    // Opening a chunk only sizes its arrays; its cases are read by the workers (read_case), so
    // that the calling thread stays free for the hooks.
    auto open_chunk = [&](std::size_t c) {
        Slot& s = slots[c % window];
        const std::size_t first = c * chunk, count = std::min(chunk, cases - first);
        s.out.reset(begin + first, count, S, T, N);
        s.specs.assign(count, CaseSpec{});
        s.read.reset(new std::once_flag[count]);
        s.columns.assign(count, {});
        s.lowest_failed.assign(count, std::numeric_limits<std::size_t>::max());
        s.remaining = count * per_case;
        for (std::size_t j = 0; j < count; ++j) {
            s.out.key[j] = table.first_key + begin + first + j;
            s.out.name[j] = table.names[begin + first + j];
        }
    };
    auto read_case = [&](Slot& s, std::size_t j) {
        const std::size_t row = s.out.first + j;
        CaseSpec& spec = s.specs[j];
        if (!table.row_errors.empty() && !table.row_errors[row].empty()) {
            spec.error = table.row_errors[row];
            return;
        }
        try {
            spec = case_from_table(table, row);
            for (const Species& sp : spec.species)
                if (std::find(o.species.begin(), o.species.end(), sp.name) == o.species.end())
                    throw InputError(spec.label + " (case '" + spec.name + "'), species '" +
                                     sp.name + "' is not among the batch's species");
        } catch (const InputError& e) {
            spec = CaseSpec{};
            spec.error = e.what();
            return;
        }
        for (std::size_t i = 0; i < S; ++i) {
            const auto x = spec.values.find("x_" + o.species[i]);
            s.out.mole_fraction[j * S + i] = x == spec.values.end() ? 0.0 : x->second;
        }
        for (const Species& sp : spec.species)
            s.columns[j].push_back(static_cast<std::size_t>(
                std::find(o.species.begin(), o.species.end(), sp.name) - o.species.begin()));
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

    auto worker = [&]() {
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
                std::call_once(s.read[j], read_case, std::ref(s), j);
                const CaseSpec& spec = s.specs[j];
                if (!spec.error.empty()) {
                    failure = spec.error;
                } else {
                    try {
                        finished = run_case(spec, sample, o, s.columns[j], j, s.out, cancel);
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

    std::vector<std::thread> pool;
    auto stop = [&]() {
        {
            std::lock_guard<std::mutex> lock(m);
            cancel.store(true);
        }
        work_cv.notify_all();
        for (std::thread& t : pool)
            if (t.joinable())
                t.join();
    };
    BatchStatus status;
    try {
        for (std::size_t k = 0; k < threads; ++k)
            pool.emplace_back(worker);
        auto last_progress = std::chrono::steady_clock::now();
        const auto interval = std::chrono::milliseconds(hooks.progress_interval_ms);
        auto report = [&]() {
            last_progress = std::chrono::steady_clock::now();
            if (hooks.on_progress && !hooks.on_progress(runs_done.load(), total_runs)) {
                status.cancelled = true;
                return false;
            }
            return true;
        };
        for (std::size_t c = 0; c < chunks && !status.cancelled; ++c) {
            Slot& s = slots[c % window];
            for (;;) {
                {
                    std::unique_lock<std::mutex> lock(m);
                    if (done_cv.wait_until(lock, last_progress + interval,
                                           [&] { return s.remaining == 0; }))
                        break;
                }
                if (!report())
                    break;
            }
            if (status.cancelled)
                break;
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
            if (c + window < chunks) {
                open_chunk(c + window);
                {
                    std::lock_guard<std::mutex> lock(m);
                    window_end = chunk_end_run(c + window);
                }
                work_cv.notify_all();
            }
            if (std::chrono::steady_clock::now() - last_progress >= interval)
                report();
        }
        if (!status.cancelled && hooks.on_progress)
            hooks.on_progress(runs_done.load(), total_runs);
    } catch (...) {
        stop();
        throw;
    }
    stop();
    return status;
}

} // namespace exosieve
