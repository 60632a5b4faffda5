#include "exosieve/evolution_file.hpp"

#include <cstdint>
#include <map>

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

std::vector<std::int64_t> as_int64(const std::vector<int>& values) {
    return std::vector<std::int64_t>(values.begin(), values.end());
}

std::vector<std::int64_t> one(std::size_t value) {
    return {static_cast<std::int64_t>(value)};
}

} // namespace

void write_result(const EvolutionResult& r, const std::string& path) {
    const std::size_t nr = r.ratio_names.size();
    std::vector<std::string> regimes;
    for (Regime k : all_regimes)
        regimes.emplace_back(regime_name(k));
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
    auto put = [&](const std::string& name, const auto& data) {
        const FileVariable& v = find_variable(evolution_file_variables(), name);
        if ((v.present_when == "ratios" && nr == 0) ||
            (v.present_when == "envelope" && !r.has_envelope()))
            return;
        std::size_t want = 1;
        for (const std::string& d : v.dims)
            want *= sizes.at(d);
        if (data.size() != want)
            throw InputError("result " + name + " has " + std::to_string(data.size()) +
                             " values, expected " + std::to_string(want));
        w.add_variable(name, v.dims, data, v.units, v.long_name);
        if (!v.flag_values.empty()) {
            w.set_attribute(name, "flag_values", v.flag_values);
            w.set_attribute(name, "flag_meanings", v.flag_meanings);
        }
    };
    put("inventory", r.inventory);
    put("escape_rate", r.escape_rate);
    put("source_rate", r.source_rate);
    put("given_loss_rate", r.given_loss_rate);
    put("jeans_parameter", r.jeans_parameter);
    put("exobase_radius", r.exobase_radius);
    put("exobase_temperature", r.exobase_temperature);
    put("xuv_flux", r.xuv_flux);
    put("regime", as_int64(r.regime));
    put("energy_limited", as_int64(r.energy_limited));
    put("isotope_ratio", r.isotope_ratio);
    put("depletion_time", r.depletion_time);
    put("initial_inventory", r.initial_inventory);
    put("species_mass", r.species_mass);
    put("regime_time", r.regime_time);
    put("regime_loss", r.regime_loss);
    put("energy_limited_loss", r.energy_limited_loss);
    put("given_loss", r.given_loss);
    put("non_jeans_loss_share", r.non_jeans_loss_share);
    put("bulk_regime_time", r.bulk_regime_time);
    put("envelope_mass", r.envelope_mass);
    put("planet_radius", r.planet_radius);
    put("envelope_loss_rate", r.envelope_loss_rate);
    put("core_mass", std::vector<double>{r.core_mass});
    put("stripping_time", std::vector<double>{r.stripping_time});
    put("steps", one(r.steps));
    put("rejected_steps", one(r.rejected_steps));
    put("rhs_evaluations", one(r.rhs_evaluations));
    put("completed", one(r.completed ? 1 : 0));
    put("t_reached", std::vector<double>{r.t_reached});
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

} // namespace exosieve
