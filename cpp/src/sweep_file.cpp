#include "exosieve/sweep_file.hpp"

#include <cmath>
#include <limits>
#include <map>

namespace exosieve {

const std::vector<FileCoordinate>& sweep_file_coordinates() {
    static const std::vector<FileCoordinate> list{
        {"case", "1", "planet case (the table's case column)"},
        {"row", "1", "row of the case table"},
        {"species", "1", "species"},
        {"time", "s", "stellar age"},
        {"sample", "1", "Monte Carlo sample"},
        {"input", "1", "uncertain input"},
        {"input_unit", "1", "SI unit of the input's values in sample_input"},
    };
    return list;
}

namespace {

constexpr double inf = std::numeric_limits<double>::infinity();
using Dims = std::vector<std::string>;

struct Entry {
    SweepVariable v;
    // Valid range [low, high] of a number (NaN, NaN: unchecked); the condition of presence.
    Entry& range(double low, double high) {
        v.file.low = low;
        v.file.high = high;
        return *this;
    }
    Entry& when(const char* condition) {
        v.file.present_when = condition;
        return *this;
    }
};

Entry entry(const char* name, ValueType type, Dims dims, const char* units, const char* long_name) {
    Entry e;
    e.v.file.name = name;
    e.v.file.type = type;
    e.v.file.dims = std::move(dims);
    e.v.file.units = units;
    e.v.file.long_name = long_name;
    return e;
}

Entry real(const char* name, std::vector<double> BatchChunk::*member, Dims dims, const char* units,
           const char* long_name) {
    Entry e = entry(name, ValueType::float64, std::move(dims), units, long_name);
    e.v.f = member;
    return e.range(0, inf); // every float of a sweep file is a non-negative quantity
}

Entry integer(const char* name, std::vector<std::int64_t> BatchChunk::*member, Dims dims,
              const char* units, const char* long_name) {
    Entry e = entry(name, ValueType::int64, std::move(dims), units, long_name);
    e.v.i = member;
    return e;
}

Entry text(const char* name, std::vector<std::string> BatchChunk::*member, const char* long_name) {
    Entry e = entry(name, ValueType::string, {}, "1", long_name);
    e.v.s = member;
    return e;
}

std::vector<SweepVariable> build_list() {
    using C = BatchChunk;
    const Dims none, s{"species"}, t{"time"}, ts{"time", "species"};
    // Retained fractions may exceed 1 by the integration tolerance (case tables have no sources).
    const double retained_max = 1.001;
    std::vector<Entry> e{
        text("error", &C::error,
             "why the row is invalid or its nominal run failed (empty: it ran)"),
        integer("steps", &C::steps, none, "1", "accepted integration steps of the nominal run")
            .range(0, inf),
        real("planet_mass", &C::planet_mass, none, "kg",
             "planet mass (with an envelope: at the start)"),
        real("planet_radius", &C::planet_radius, none, "m",
             "planet radius (with an envelope: at the start)"),
        real("exobase_radius", &C::exobase_radius, none, "m",
             "exobase radius from the planet's centre"),
        real("escape_speed", &C::escape_speed, none, "m s-1", "escape speed at the exobase"),
        real("age_start", &C::t_start, none, "s", "stellar age at the start of the run"),
        real("age_end", &C::t_end, none, "s", "stellar age at the end of the run"),
        real("exobase_temperature_start", &C::temperature_start, none, "K",
             "exobase temperature at the start"),
        real("mole_fraction", &C::mole_fraction, s, "1",
             "bulk (well-mixed) mole fraction (0: absent)")
            .range(0, 1),
        real("exobase_temperature", &C::exobase_temperature, t, "K", "exobase temperature"),
        real("retained_fraction", &C::retained, ts, "1",
             "inventory left, N(t) / N(start) (NaN outside the run)")
            .range(0, retained_max),
        real("jeans_parameter", &C::jeans_parameter, ts, "1", "Jeans parameter at the exobase"),
        real("final_retained_fraction", &C::final_retained, s, "1",
             "inventory left at the end, N(end) / N(start)")
            .range(0, retained_max),
        real("depletion_time", &C::depletion_time, s, "s",
             "stellar age when the inventory fell below the depletion fraction (NaN: never)"),
        real("efolding_time", &C::efolding_time, s, "s",
             "thermal loss e-folding time N / Q at the start"),
        real("escape_rate_start", &C::escape_rate_start, s, "s-1",
             "thermal (Jeans or hydrodynamic) escape rate Q at the start"),
        real("given_loss_rate_start", &C::given_loss_start, s, "s-1",
             "given (non-thermal or external) loss rate at the start, added to the thermal one "
             "(0: none)"),
        real("jeans_parameter_start", &C::jeans_start, s, "1", "Jeans parameter at the start"),
        real("jeans_parameter_end", &C::jeans_end, s, "1", "Jeans parameter at the end"),
        integer("regime_start", &C::regime_start, s, "1",
                "escape regime of the species at the start: 0 Jeans, 1 enhanced Jeans, "
                "2 transition, 3 hydrodynamic (-1: none)"),
        real("bulk_jeans_parameter_start", &C::bulk_jeans_start, none, "1",
             "Jeans parameter of the bulk (well-mixed) gas at the exobase at the start"),
        integer("hydrodynamic_unmodelled", &C::hydrodynamic_unmodelled, none, "1",
                "1: the case has no heating efficiency and its bulk gas is hydrodynamic at some "
                "time (the well-mixed gas at the start, or the densest species at the exobase "
                "at any time), so its Jeans results do not describe its loss (0: no; -1: not "
                "run)")
            .range(-1, 1),
        real("stripping_time", &C::stripping_time, none, "s",
             "stellar age when the H/He envelope is gone (NaN: not stripped, or no envelope)"),
        real("planet_radius_end", &C::planet_radius_end, none, "m",
             "planet radius at the end (with an envelope: the core and what is left of it)"),
        // Where the time and the loss went (EvolutionResult::regime_time and its loss parts).
        real("regime_time_jeans", &C::regime_time_jeans, s, "s",
             "time spent in the jeans regime of the species' own Jeans parameter"),
        real("regime_time_enhanced_jeans", &C::regime_time_enhanced_jeans, s, "s",
             "time spent in the enhanced_jeans regime of the species' own Jeans parameter"),
        real("regime_time_transition", &C::regime_time_transition, s, "s",
             "time spent in the transition regime of the species' own Jeans parameter"),
        real("regime_time_hydrodynamic", &C::regime_time_hydrodynamic, s, "s",
             "time spent in the hydrodynamic regime of the species' own Jeans parameter"),
        real("loss_share_jeans", &C::loss_share_jeans, s, "1",
             "share of the loss taken at the Jeans rate in the jeans regime")
            .range(0, 1),
        real("loss_share_enhanced_jeans", &C::loss_share_enhanced_jeans, s, "1",
             "share of the loss taken at the Jeans rate in the enhanced_jeans regime")
            .range(0, 1),
        real("loss_share_transition", &C::loss_share_transition, s, "1",
             "share of the loss taken at the Jeans rate in the transition regime")
            .range(0, 1),
        real("loss_share_hydrodynamic", &C::loss_share_hydrodynamic, s, "1",
             "share of the loss taken at the Jeans rate in the hydrodynamic regime")
            .range(0, 1),
        real("loss_share_energy_limited", &C::loss_share_energy_limited, s, "1",
             "share of the loss taken while energy-limited loss acted")
            .range(0, 1),
        real("loss_share_given", &C::loss_share_given, s, "1",
             "share of the loss taken by the given losses")
            .range(0, 1),
        real("non_jeans_loss_share", &C::non_jeans_loss_share, s, "1",
             "share of the loss taken outside the Jeans picture (all but loss_share_jeans; 0: "
             "nothing lost)")
            .range(0, 1),
        real("sample_retained_fraction", &C::sample_retained, {"sample", "species"}, "1",
             "inventory left at the end in each Monte Carlo sample")
            .range(0, retained_max)
            .when("samples"),
        real("sample_depletion_time", &C::sample_depletion_time, {"sample", "species"}, "s",
             "stellar age of depletion in each Monte Carlo sample (NaN: never)")
            .when("samples"),
        integer("sample_failed", &C::sample_failed, {"sample"}, "1",
                "1 where the Monte Carlo run failed")
            .range(0, 1)
            .when("samples"),
        text("sample_error", &C::sample_error, "error of the lowest-numbered failed sample")
            .when("samples"),
        // Every sample's drawn inputs, along `input` (SI units in the variable input_unit).
        real("sample_input", &C::sample_input, {"sample", "input"},
             "SI unit of each input (see input_unit)",
             "value of each uncertain input in each sample run, mole fractions as drawn (before "
             "they are divided by their sum; NaN: the case lacks the input or its draw failed)")
            .range(std::nan(""), std::nan(""))
            .when("inputs"),
        integer("input_uncertain", &C::input_uncertain, {"input"}, "1",
                "1: the case draws the input from its uncertainty; 0: held at its table value")
            .range(0, 1)
            .when("inputs"),
    };
    std::vector<SweepVariable> list;
    for (Entry& x : e) {
        if (x.v.file.name == "regime_start")
            set_regime_flags(x.v.file, true);
        list.push_back(std::move(x.v));
    }
    return list;
}

} // namespace

const std::vector<SweepVariable>& sweep_file_variables() {
    static const std::vector<SweepVariable> list = build_list();
    return list;
}

std::vector<ChunkVariable> chunk_variables(const BatchChunk& c) {
    const std::map<std::string, std::size_t> sizes{
        {"species", c.species}, {"time", c.times}, {"sample", c.samples}, {"input", c.inputs}};
    std::vector<ChunkVariable> out;
    for (const SweepVariable& v : sweep_file_variables()) {
        const std::string& when = v.file.present_when;
        if ((when == "samples" && c.samples == 0) ||
            (when == "inputs" && (c.samples == 0 || c.inputs == 0)))
            continue;
        ChunkVariable x{v.file.name.c_str(), {}};
        for (const std::string& d : v.file.dims)
            x.trailing.push_back(sizes.at(d));
        if (v.f)
            x.f = &(c.*v.f);
        else if (v.i)
            x.i = &(c.*v.i);
        else
            x.s = &(c.*v.s);
        out.push_back(std::move(x));
    }
    return out;
}

void chunk_rows(const BatchChunk& c, RowBlock& b) {
    b.reset(c.count);
    b.set("case", c.name.data(), c.name.size()); // the labels: xarray selects .sel(case=name)
    const std::vector<std::int64_t> rows(c.key.begin(), c.key.end());
    b.set("row", rows.data(), rows.size());
    for (const ChunkVariable& v : chunk_variables(c)) {
        if (v.f)
            b.set(v.name, v.f->data(), v.f->size());
        else if (v.i)
            b.set(v.name, v.i->data(), v.i->size());
        else
            b.set(v.name, v.s->data(), v.s->size());
    }
}

RowBlock chunk_rows(const BatchChunk& c) {
    RowBlock b(c.count);
    chunk_rows(c, b);
    return b;
}

} // namespace exosieve
