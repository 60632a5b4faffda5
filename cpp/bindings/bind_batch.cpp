#include "bindings.hpp"

#include <pybind11/stl.h>

#include <chrono>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "exosieve/background_appender.hpp"
#include "exosieve/batch.hpp"
#include "exosieve/case_config.hpp"
#include "exosieve/case_sampling.hpp"
#include "exosieve/case_table.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/sweep_file.hpp"

namespace exosieve::bindings {

namespace {

// Thrown through run_batch() when a Python hook raised; the Python error is kept aside.
struct PythonHookFailed {};

template <class T>
py::array_t<T> shaped(const std::vector<T>& data, std::vector<py::ssize_t> shape) {
    py::array_t<T> out(shape);
    std::copy(data.begin(), data.end(), out.mutable_data());
    return out;
}

py::array strings(const std::vector<std::string>& data) {
    py::list items;
    for (const std::string& s : data)
        items.append(py::str(s));
    return py::module_::import("numpy").attr("array")(items, py::arg("dtype") = "object");
}

// A chunk as the case variables of a result file, shaped (case, ...).
py::dict chunk_dict(const BatchChunk& c) {
    const auto n = static_cast<py::ssize_t>(c.count);
    py::dict d;
    d["case"] = strings(c.name);
    d["row"] = shaped(std::vector<std::int64_t>(c.key.begin(), c.key.end()), {n});
    for (const ChunkVariable& v : chunk_variables(c)) {
        std::vector<py::ssize_t> shape{n};
        for (std::size_t size : v.trailing)
            shape.push_back(static_cast<py::ssize_t>(size));
        if (v.f)
            d[v.name] = shaped(*v.f, shape);
        else if (v.i)
            d[v.name] = shaped(*v.i, shape);
        else
            d[v.name] = strings(*v.s);
    }
    return d;
}

std::vector<double> to_vector(const DoubleArray& a) {
    return std::vector<double>(a.data(), a.data() + a.size());
}

} // namespace

void bind_batch(py::module_& m) {
    py::class_<CaseTable>(m, "CaseTable", "A case table in SI units (built by exosieve.cases)")
        .def(py::init<>())
        .def_readwrite("names", &CaseTable::names)
        .def_readwrite("row_labels", &CaseTable::row_labels)
        .def_readwrite("row_errors", &CaseTable::row_errors)
        .def_readwrite("first_key", &CaseTable::first_key)
        .def(
            "add_column",
            [](CaseTable& t, const std::string& name, const DoubleArray& values) {
                t.columns.emplace_back(name, to_vector(values));
            },
            py::arg("name"), py::arg("values"))
        .def(
            "set_given_unit",
            [](CaseTable& t, const std::string& name, const std::string& unit, double si) {
                t.given_units[name] = {unit, si};
            },
            py::arg("name"), py::arg("unit"), py::arg("si_value"),
            "Show the values of column `name` in messages in `unit`, worth `si_value` in SI")
        .def(
            "add_text",
            [](CaseTable& t, const std::string& name, std::vector<std::string> values) {
                t.text.emplace_back(name, std::move(values));
            },
            py::arg("name"), py::arg("values"))
        .def_property_readonly("column_names",
                               [](const CaseTable& t) {
                                   std::vector<std::string> names;
                                   for (const auto& c : t.columns)
                                       names.push_back(c.first);
                                   return names;
                               })
        .def_property_readonly("rows", &CaseTable::rows)
        .def_property_readonly("species", &table_species)
        .def_property_readonly("inputs", &table_inputs,
                               "Uncertain inputs: parameters with a _sigma or _lnsigma column");

    py::class_<BatchOptions>(m, "BatchOptions", "What a batch asks of every case [SI]")
        .def(
            py::init([](std::vector<std::string> species, const DoubleArray& times, double t_start,
                        double t_end, double rtol, std::size_t max_steps, double depletion_fraction,
                        const RegimeThresholds& thresholds, std::size_t samples, std::uint64_t seed,
                        std::size_t threads, std::size_t chunk_size, std::size_t chunks_in_flight,
                        bool skip_invalid, const std::string& design) {
                BatchOptions o;
                o.species = std::move(species);
                o.times = to_vector(times);
                o.t_start = t_start;
                o.t_end = t_end;
                o.rtol = rtol;
                o.max_steps = max_steps;
                o.depletion_fraction = depletion_fraction;
                o.thresholds = thresholds;
                o.samples = samples;
                o.seed = seed;
                o.threads = threads;
                o.chunk_size = chunk_size;
                o.chunks_in_flight = chunks_in_flight;
                o.skip_invalid = skip_invalid;
                if (design == "saltelli")
                    o.design = SampleDesign::Saltelli;
                else if (design != "monte_carlo")
                    throw InputError("design must be 'monte_carlo' or 'saltelli', got '" + design +
                                     "'");
                o.validate();
                return o;
            }),
            py::kw_only(), py::arg("species"), py::arg("times"), py::arg("t_start"),
            py::arg("t_end"), py::arg("rtol"), py::arg("max_steps"), py::arg("depletion_fraction"),
            py::arg("thresholds"), py::arg("samples"), py::arg("seed"), py::arg("threads"),
            py::arg("chunk_size"), py::arg("chunks_in_flight") = 2, py::arg("skip_invalid") = false,
            py::arg("design") = "monte_carlo")
        .def_readonly("species", &BatchOptions::species)
        .def_readonly("samples", &BatchOptions::samples)
        .def_readonly("seed", &BatchOptions::seed)
        .def_readonly("threads", &BatchOptions::threads)
        .def_readonly("chunk_size", &BatchOptions::chunk_size)
        .def_property_readonly("design",
                               [](const BatchOptions& o) {
                                   return o.design == SampleDesign::Saltelli ? "saltelli"
                                                                             : "monte_carlo";
                               })
        .def("sample_runs", &sample_runs, py::arg("inputs"),
             "Sample runs per case of this design over `inputs` uncertain inputs.");

    m.def(
        "case_parameters",
        []() {
            py::list out;
            for (const CaseParameter& p : case_parameters())
                out.append(py::make_tuple(p.name, p.unit, p.meaning, p.required, p.uncertain));
            return out;
        },
        "Parameters a case may carry: (name, SI unit, meaning, required, uncertain).");

    m.def(
        "species_parameters",
        []() {
            py::list out;
            for (const CaseParameter& p : species_parameters())
                out.append(py::make_tuple(p.name, p.unit, p.meaning, p.required, p.uncertain));
            return out;
        },
        "Per-species parameters, columns '<prefix><species>', in slot order: (name as "
        "'<prefix><species>', SI unit, meaning, required, uncertain).");

    m.def(
        "case_text_columns",
        []() {
            py::list out;
            for (const CaseTextColumn& t : case_text_columns())
                out.append(py::make_tuple(t.name, t.meaning));
            return out;
        },
        "Text columns a case table may carry, 'case' first: (name, meaning).");

    m.def(
        "case_parameter_groups",
        []() {
            py::list out;
            for (const CaseParameterGroup& g : case_parameter_groups())
                out.append(py::make_tuple(g.heading, g.first, g.species));
            return out;
        },
        "Groups of the parameters: (heading, first parameter of case_parameters() in the group, "
        "per-species parameters listed with it).");

    m.def(
        "check_case_table",
        [](const CaseTable& t, const BatchOptions& o) {
            py::gil_scoped_release release;
            return check_table(t, o);
        },
        py::arg("table"), py::arg("options"));

    m.def(
        "case_values",
        [](const CaseTable& t, std::size_t row, std::uint64_t seed, long long sample) {
            const CaseSpec s = case_from_table(t, row);
            const CaseSpec d =
                sample < 0 ? s : sample_case(s, seed, static_cast<std::uint64_t>(sample));
            return d.named_values();
        },
        py::arg("table"), py::arg("row"), py::arg("seed") = 0, py::arg("sample") = -1,
        "Parameters [SI] of a row, or of its Monte Carlo sample `sample` under `seed`.");

    m.def(
        "case_config",
        [](const CaseTable& t, std::size_t row, const BatchOptions& o, long long sample) {
            const CaseSpec s = case_from_table(t, row);
            const CaseSpec d =
                sample < 0 ? s : sample_case(s, o.seed, static_cast<std::uint64_t>(sample));
            return build_config(d, o);
        },
        py::arg("table"), py::arg("row"), py::arg("options"), py::arg("sample") = -1,
        "The EvolutionConfig of a row (or of one of its samples), as the batch runs it.");

    // Runs without the GIL; the hooks take it. Every progress call also checks for signals, so
    // Ctrl-C cancels the batch: the chunks handed out stay handed out, then KeyboardInterrupt.
    // Progress calls come about every `progress_interval_ms`, or after every
    // `progress_every_chunks`-th chunk handed out when that is > 0 (a count-set schedule).
    m.def(
        "run_batch",
        [](const CaseTable& table, std::size_t begin, std::size_t end, const BatchOptions& o,
           py::object on_chunk, py::object on_progress, unsigned interval_ms,
           std::size_t every_chunks) {
            std::unique_ptr<py::error_already_set> failure;
            BatchHooks hooks;
            hooks.progress_interval_ms = interval_ms;
            hooks.progress_every_chunks = every_chunks;
            // A sweep file takes the chunks' rows straight from C++, without the interpreter,
            // on a writer thread: the calling thread only copies a chunk's rows into the queue.
            // Every progress call and the return wait until the chunks handed out are on disk,
            // so rows reported (or read by a progress hook) are stored, as with direct appends.
            std::optional<BackgroundAppender> writer;
            if (py::isinstance<ResultAppender>(on_chunk))
                writer.emplace(on_chunk.cast<ResultAppender&>());
            hooks.on_chunk = [&](const BatchChunk& c) {
                if (writer) {
                    RowBlock rows = writer->spare();
                    chunk_rows(c, rows);
                    writer->push(std::move(rows));
                    return;
                }
                py::gil_scoped_acquire gil;
                try {
                    if (!on_chunk.is_none())
                        on_chunk(chunk_dict(c));
                } catch (py::error_already_set& e) {
                    failure = std::make_unique<py::error_already_set>(std::move(e));
                    throw PythonHookFailed{};
                }
            };
            auto report = progress_hook(on_progress, failure);
            hooks.on_progress = [&](std::size_t done, std::size_t total) {
                if (writer)
                    writer->drain();
                return report(done, total);
            };
            BatchStatus status;
            try {
                py::gil_scoped_release release;
                try {
                    status = run_batch(table, begin, end, o, hooks);
                } catch (...) {
                    // The chunks handed out before the failure are kept, as direct appends
                    // would have kept them; the failure itself is what the caller sees.
                    if (writer)
                        try {
                            writer->drain();
                        } catch (...) {
                        }
                    throw;
                }
                if (writer)
                    writer->drain();
            } catch (const PythonHookFailed&) {
            }
            if (failure)
                throw std::move(*failure);
            py::dict d;
            d["cases_done"] = status.cases_done;
            d["cases_failed"] = status.cases_failed;
            d["samples_failed"] = status.samples_failed;
            d["cancelled"] = status.cancelled;
            return d;
        },
        py::arg("table"), py::arg("begin"), py::arg("end"), py::arg("options"), py::arg("on_chunk"),
        py::arg("on_progress") = py::none(), py::arg("progress_interval_ms") = 100,
        py::arg("progress_every_chunks") = 0,
        "Run rows [begin, end) of a case table. `on_chunk` receives each finished chunk in table "
        "order: a callable gets a dict of arrays, a ResultAppender gets the rows appended "
        "directly. `on_progress(runs_done, runs_total)` is called about every "
        "`progress_interval_ms` [ms] with the runs finished, or, when `progress_every_chunks` "
        "> 0, after every such number of chunks handed out [chunks] with their runs; signals "
        "are checked at each call, and returning False cancels.");
}

} // namespace exosieve::bindings
