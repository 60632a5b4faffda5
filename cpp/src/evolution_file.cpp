#include "exosieve/evolution_file.hpp"

#include <cstdint>
#include <limits>
#include <map>
#include <type_traits>

#include "exosieve/errors.hpp"
#include "exosieve/hdf5_io.hpp"
#include "json_text.hpp"

namespace exosieve {

using detail::Json;
using detail::json_text;

const std::vector<FileCoordinate>& evolution_file_coordinates() {
    static const std::vector<FileCoordinate> list{
        {"time", "s", "time (stellar age)"},
        {"species", "1", "species"},
        {"ratio", "1", "isotope ratio"},
        {"escape_regime", "1", "escape regime by the Jeans parameter"},
    };
    return list;
}

const std::vector<FileVariable>& evolution_file_variables() {
    static const std::vector<FileVariable> list = [] {
        using T = ValueType;
        const std::vector<std::string> ts{"time", "species"}, t{"time"}, s{"species"}, none,
            sr{"species", "escape_regime"};
        auto var = [](std::string name, T type, std::vector<std::string> dims, std::string units,
                      std::string long_name, std::string when = "") {
            FileVariable v;
            v.name = std::move(name);
            v.type = type;
            v.dims = std::move(dims);
            v.units = std::move(units);
            v.long_name = std::move(long_name);
            v.present_when = std::move(when);
            return v;
        };
        std::vector<FileVariable> v{
            var("inventory", T::float64, ts, "1", "number of particles in the inventory"),
            var("escape_rate", T::float64, ts, "s-1", "global escape rate"),
            var("source_rate", T::float64, ts, "s-1", "source rate"),
            var("given_loss_rate", T::float64, ts, "s-1",
                "given (non-thermal or external) loss rate"),
            var("jeans_parameter", T::float64, ts, "1", "Jeans parameter at the exobase"),
            var("exobase_radius", T::float64, t, "m", "exobase radius from the planet's centre"),
            var("exobase_temperature", T::float64, t, "K", "exobase temperature"),
            var("xuv_flux", T::float64, t, "W m-2", "XUV flux at the planet"),
            var("regime", T::int64, t, "1", "escape regime of the bulk gas at the exobase"),
            var("energy_limited", T::int64, t, "1",
                "1 where energy-limited hydrodynamic loss acted"),
            var("isotope_ratio", T::float64, {"time", "ratio"}, "1", "isotope ratio", "ratios"),
            var("depletion_time", T::float64, s, "s",
                "time when the inventory fell below the depletion fraction"),
            var("initial_inventory", T::float64, s, "1", "number of particles at the start"),
            var("species_mass", T::float64, s, "kg", "particle mass"),
            var("regime_time", T::float64, sr, "s",
                "time spent in each regime of the species' own Jeans parameter"),
            var("regime_loss", T::float64, sr, "1",
                "particles lost at the Jeans rate in each regime (energy-limited loss off)"),
            var("energy_limited_loss", T::float64, s, "1",
                "particles lost while energy-limited loss acted"),
            var("given_loss", T::float64, s, "1", "particles lost to the given losses"),
            var("non_jeans_loss_share", T::float64, s, "1",
                "share of the loss taken outside the Jeans picture"),
            var("bulk_regime_time", T::float64, {"escape_regime"}, "s",
                "time the bulk gas (densest species at the exobase) spent in each regime"),
            var("envelope_mass", T::float64, t, "kg", "H/He envelope mass", "envelope"),
            var("planet_radius", T::float64, t, "m",
                "planet radius, core plus envelope (Lopez & Fortney 2014 fit)", "envelope"),
            var("envelope_loss_rate", T::float64, t, "kg s-1", "envelope mass-loss rate",
                "envelope"),
            var("core_mass", T::float64, none, "kg", "core mass", "envelope"),
            var("stripping_time", T::float64, none, "s",
                "stellar age when the envelope is gone (NaN: not stripped)", "envelope"),
            var("steps", T::int64, none, "1", "accepted integration steps"),
            var("rejected_steps", T::int64, none, "1", "rejected integration steps"),
            var("rhs_evaluations", T::int64, none, "1", "evaluations of the right-hand side"),
            var("completed", T::int64, none, "1", "1 when the run reached the end of t_span"),
            var("t_reached", T::float64, none, "s", "last time reached"),
        };
        for (FileVariable& x : v)
            if (x.name == "regime")
                set_regime_flags(x, false);
        return v;
    }();
    return list;
}

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// Every variable of the list with the member of EvolutionResult that holds it: the one place
// that pairs them, for the writer and the reader alike. `visit(name, member)`.
template <class Result, class Visit> void for_each_variable(Result& r, Visit&& visit) {
    visit("inventory", r.inventory);
    visit("escape_rate", r.escape_rate);
    visit("source_rate", r.source_rate);
    visit("given_loss_rate", r.given_loss_rate);
    visit("jeans_parameter", r.jeans_parameter);
    visit("exobase_radius", r.exobase_radius);
    visit("exobase_temperature", r.exobase_temperature);
    visit("xuv_flux", r.xuv_flux);
    visit("regime", r.regime);
    visit("energy_limited", r.energy_limited);
    visit("isotope_ratio", r.isotope_ratio);
    visit("depletion_time", r.depletion_time);
    visit("initial_inventory", r.initial_inventory);
    visit("species_mass", r.species_mass);
    visit("regime_time", r.regime_time);
    visit("regime_loss", r.regime_loss);
    visit("energy_limited_loss", r.energy_limited_loss);
    visit("given_loss", r.given_loss);
    visit("non_jeans_loss_share", r.non_jeans_loss_share);
    visit("bulk_regime_time", r.bulk_regime_time);
    visit("envelope_mass", r.envelope_mass);
    visit("planet_radius", r.planet_radius);
    visit("envelope_loss_rate", r.envelope_loss_rate);
    visit("core_mass", r.core_mass);
    visit("stripping_time", r.stripping_time);
    visit("steps", r.steps);
    visit("rejected_steps", r.rejected_steps);
    visit("rhs_evaluations", r.rhs_evaluations);
    visit("completed", r.completed);
    visit("t_reached", r.t_reached);
}

// Variables that files of earlier versions lack, and what such a file stands for: no given
// loss (0), and an unknown loss ledger (NaN).
const std::map<std::string, double>& added_later() {
    static const std::map<std::string, double> fill{
        {"given_loss_rate", 0.0},     {"regime_time", nan}, {"regime_loss", nan},
        {"energy_limited_loss", nan}, {"given_loss", nan},  {"non_jeans_loss_share", nan},
        {"bulk_regime_time", nan},
    };
    return fill;
}

std::vector<std::string> regime_names() {
    std::vector<std::string> names;
    for (Regime k : all_regimes)
        names.emplace_back(regime_name(k));
    return names;
}

bool present(const FileVariable& v, std::size_t ratios, bool envelope) {
    return !(v.present_when == "ratios" && ratios == 0) &&
           !(v.present_when == "envelope" && !envelope);
}

std::size_t value_count(const FileVariable& v, const std::map<std::string, std::size_t>& sizes) {
    std::size_t count = 1;
    for (const std::string& d : v.dims)
        count *= sizes.at(d);
    return count;
}

// A member as the values of its dataset (float64 or int64), and back.
const std::vector<double>& as_values(const std::vector<double>& values) {
    return values;
}
std::vector<std::int64_t> as_values(const std::vector<int>& values) {
    return std::vector<std::int64_t>(values.begin(), values.end());
}
std::vector<double> as_values(double value) {
    return {value};
}
std::vector<std::int64_t> as_values(std::size_t value) {
    return {static_cast<std::int64_t>(value)};
}
std::vector<std::int64_t> as_values(bool value) {
    return {value ? 1 : 0};
}

// The dataset `name` read as the values its member is written as.
template <class Values> Values read_values(const std::string& path, const std::string& name) {
    if constexpr (std::is_same_v<Values, std::vector<double>>)
        return read_doubles(path, name);
    else
        return read_int64s(path, name);
}

void from_values(const std::vector<double>& values, std::vector<double>& member) {
    member = values;
}
void from_values(const std::vector<std::int64_t>& values, std::vector<int>& member) {
    member.assign(values.begin(), values.end());
}
void from_values(const std::vector<double>& values, double& member) {
    member = values.at(0);
}
void from_values(const std::vector<std::int64_t>& values, std::size_t& member) {
    member = static_cast<std::size_t>(values.at(0));
}
void from_values(const std::vector<std::int64_t>& values, bool& member) {
    member = values.at(0) != 0;
}

} // namespace

void write_result(const EvolutionResult& r, const std::string& path) {
    const std::size_t nr = r.ratio_names.size();
    const std::vector<std::string> regimes = regime_names();
    const std::map<std::string, std::size_t> sizes{{"time", r.time_count()},
                                                   {"species", r.species_count()},
                                                   {"ratio", nr},
                                                   {"escape_regime", regimes.size()}};
    ResultWriter w(path, r.config);
    const std::map<std::string, const std::vector<std::string>*> labels{
        {"species", &r.species}, {"ratio", &r.ratio_names}, {"escape_regime", &regimes}};
    for (const FileCoordinate& c : evolution_file_coordinates()) {
        if (c.name == "time")
            w.add_coordinate(c.name, r.time, c.units, c.long_name);
        else if (c.name != "ratio" || nr > 0)
            w.add_coordinate(c.name, *labels.at(c.name), c.long_name);
    }
    // Every variable of the list, with its data, or none when the run lacks its condition.
    for_each_variable(r, [&](const std::string& name, const auto& member) {
        const FileVariable& v = find_variable(evolution_file_variables(), name);
        if (!present(v, nr, r.has_envelope()))
            return;
        const auto& data = as_values(member);
        const std::size_t want = value_count(v, sizes);
        if (data.size() != want)
            throw InputError("result " + name + " has " + std::to_string(data.size()) +
                             " values, expected " + std::to_string(want));
        w.add_variable(name, v.dims, data, v.units, v.long_name);
        if (!v.flag_values.empty()) {
            w.set_attribute(name, "flag_values", v.flag_values);
            w.set_attribute(name, "flag_meanings", v.flag_meanings);
        }
    });
    Json changes = Json::array();
    for (const RegimeChange& c : r.regime_changes)
        changes.push_back(
            {{"time_s", c.time}, {"from", regime_name(c.from)}, {"to", regime_name(c.to)}});
    w.set_attribute("regime_changes", json_text(changes));
    w.set_attribute("title", "exosieve evolution result");
    w.set_attribute("Conventions", result_file_conventions);
    w.set_attribute("stepper", r.stepper);
    w.commit();
}

EvolutionResult read_result(const std::string& path) {
    EvolutionResult r;
    r.time = read_doubles(path, "time");
    r.species = read_strings(path, "species");
    if (has_dataset(path, "ratio"))
        r.ratio_names = read_strings(path, "ratio");
    const bool envelope = has_dataset(path, "core_mass");
    const std::map<std::string, std::size_t> sizes{{"time", r.time_count()},
                                                   {"species", r.species_count()},
                                                   {"ratio", r.ratio_names.size()},
                                                   {"escape_regime", regime_names().size()}};
    for_each_variable(r, [&](const std::string& name, auto& member) {
        const FileVariable& v = find_variable(evolution_file_variables(), name);
        if (!present(v, r.ratio_names.size(), envelope))
            return;
        const std::size_t want = value_count(v, sizes);
        using Values = std::decay_t<decltype(as_values(member))>;
        const auto fill = added_later().find(name);
        if (fill != added_later().end() && !has_dataset(path, name)) {
            if constexpr (std::is_same_v<Values, std::vector<double>>) // all of them are
                from_values(Values(want, fill->second), member);
            return;
        }
        const Values values = read_values<Values>(path, name);
        if (values.size() != want)
            throw InputError("result file " + path + ": " + name + " has " +
                             std::to_string(values.size()) + " values, expected " +
                             std::to_string(want));
        from_values(values, member);
    });
    r.config = read_attribute(path, "", "config");
    if (has_attribute(path, "", "stepper"))
        r.stepper = read_attribute(path, "", "stepper");
    if (has_attribute(path, "", "regime_changes"))
        for (const Json& c : Json::parse(read_attribute(path, "", "regime_changes")))
            r.regime_changes.push_back({c.at("time_s").get<double>(),
                                        regime_named(c.at("from").get<std::string>()),
                                        regime_named(c.at("to").get<std::string>())});
    return r;
}

} // namespace exosieve
