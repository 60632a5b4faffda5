#include "bindings.hpp"

#include <pybind11/stl.h>

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/case_table.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/inversion.hpp"
#include "exosieve/ocean.hpp"

namespace exosieve::bindings {

namespace {

using A = const DoubleArray&;

template <class T>
py::array_t<T> shaped(const std::vector<T>& data, std::vector<py::ssize_t> shape) {
    py::array_t<T> out(shape);
    std::copy(data.begin(), data.end(), out.mutable_data());
    return out;
}

py::dict result_dict(const InversionResult& r) {
    py::dict d;
    d["status"] = inversion_status_name(r.status);
    d["message"] = r.message;
    d["target"] = r.target;
    d["initial_ratio"] = r.initial_ratio;
    d["ratio"] = r.ratio;
    d["scaled_initial"] = r.scaled_initial;
    d["scaled_lost"] = r.scaled_lost;
    d["species"] = r.species;
    std::vector<bool> scaled(r.scaled.begin(), r.scaled.end());
    d["scaled"] = scaled;
    d["initial_inventory"] = r.initial_inventory;
    d["final_inventory"] = r.final_inventory;
    d["depleted"] = r.depleted;
    d["bracket_low"] = r.bracket_low;
    d["bracket_high"] = r.bracket_high;
    d["ratio_low"] = r.ratio_low;
    d["ratio_high"] = r.ratio_high;
    d["runs"] = r.runs;
    d["planet_radius"] = r.planet_radius;
    return d;
}

py::dict samples_dict(const InversionSamples& s) {
    const auto n = static_cast<py::ssize_t>(s.samples);
    const auto k = static_cast<py::ssize_t>(s.species.size());
    py::dict d;
    d["nominal"] = result_dict(s.nominal);
    d["species"] = s.species;
    d["cancelled"] = s.cancelled;
    d["target"] = shaped(s.target, {n});
    std::vector<std::string> status;
    for (std::int64_t code : s.status)
        status.push_back(inversion_status_name(static_cast<InversionStatus>(code)));
    d["status"] = status;
    d["initial_ratio"] = shaped(s.initial_ratio, {n});
    d["ratio"] = shaped(s.ratio, {n});
    d["scaled_initial"] = shaped(s.scaled_initial, {n});
    d["scaled_lost"] = shaped(s.scaled_lost, {n});
    d["initial_inventory"] = shaped(s.initial_inventory, {n, k});
    d["final_inventory"] = shaped(s.final_inventory, {n, k});
    d["depleted"] = shaped(s.depleted, {n});
    d["bracket_low"] = shaped(s.bracket_low, {n});
    d["bracket_high"] = shaped(s.bracket_high, {n});
    d["ratio_low"] = shaped(s.ratio_low, {n});
    d["ratio_high"] = shaped(s.ratio_high, {n});
    d["runs"] = shaped(s.runs, {n});
    d["planet_radius"] = shaped(s.planet_radius, {n});
    d["message"] = s.message;
    return d;
}

// Runs `run(hooks)` without the GIL; the progress hook takes it to check for signals (Ctrl-C
// cancels, then KeyboardInterrupt) and to call `on_progress(done, total)`, whose False cancels.
template <class Run>
py::dict with_hooks(py::object on_progress, unsigned interval_ms, std::size_t every, Run run) {
    std::unique_ptr<py::error_already_set> failure;
    InversionHooks hooks;
    hooks.progress_interval_ms = interval_ms;
    hooks.progress_every = every;
    hooks.on_progress = progress_hook(on_progress, failure);
    InversionSamples s;
    {
        py::gil_scoped_release release;
        s = run(hooks);
    }
    if (failure)
        throw std::move(*failure);
    return samples_dict(s);
}

MeasuredRatio measured_ratio(const std::string& numerator, const std::string& denominator,
                             double value, double width, bool lognormal, bool relative) {
    MeasuredRatio m;
    m.numerator = numerator;
    m.denominator = denominator;
    m.value = value;
    m.width = width;
    m.distribution = lognormal ? Distribution::LogNormal : Distribution::Normal;
    m.relative = relative;
    return m;
}

InversionOptions inversion_options(std::vector<std::string> scaled, double search_factor,
                                   double inventory_min, double inventory_max, double tolerance,
                                   std::size_t max_runs) {
    InversionOptions o;
    o.scaled = std::move(scaled);
    o.search_factor = search_factor;
    o.inventory_min = inventory_min;
    o.inventory_max = inventory_max;
    o.tolerance = tolerance;
    o.max_runs = max_runs;
    return o;
}

template <class Kernel> void def_ocean(py::module_& m, const char* name, Kernel kernel) {
    m.def(name, [kernel](std::size_t count, A amount, A radius, A density) {
        return with_output(count, [&](double* out) {
            kernel(as_arg(amount), as_arg(radius), as_arg(density), out, count);
        });
    });
}

} // namespace

void bind_inversion(py::module_& m) {
    def_ocean(m, "ocean_depth_to_water", &ocean_depth_to_water);
    def_ocean(m, "water_to_ocean_depth", &water_to_ocean_depth);
    def_ocean(m, "ocean_depth_to_hydrogen", &ocean_depth_to_hydrogen);
    def_ocean(m, "hydrogen_to_ocean_depth", &hydrogen_to_ocean_depth);
    m.attr("DEFAULT_WATER_DENSITY") = default_water_density;
    m.def("water_molecule_mass", &water_molecule_mass, "Mass of one water molecule [kg]");

    m.def(
        "invert_samples",
        [](const EvolutionConfig& config, const std::string& numerator,
           const std::string& denominator, double value, double width, bool lognormal,
           bool relative, std::vector<std::string> scaled, double search_factor,
           double inventory_min, double inventory_max, double tolerance, std::size_t max_runs,
           std::size_t samples, std::uint64_t seed, std::size_t threads, py::object on_progress,
           unsigned interval_ms, std::size_t every) {
            const MeasuredRatio mr =
                measured_ratio(numerator, denominator, value, width, lognormal, relative);
            const InversionOptions o =
                inversion_options(std::move(scaled), search_factor, inventory_min, inventory_max,
                                  tolerance, max_runs);
            InversionSampling sampling{samples, seed, threads};
            return with_hooks(on_progress, interval_ms, every, [&](const InversionHooks& h) {
                return invert_samples(config, mr, o, sampling, h);
            });
        },
        py::kw_only(), py::arg("config"), py::arg("numerator"), py::arg("denominator"),
        py::arg("value"), py::arg("width"), py::arg("lognormal"), py::arg("relative"),
        py::arg("scaled"), py::arg("search_factor"), py::arg("inventory_min"),
        py::arg("inventory_max"), py::arg("tolerance"), py::arg("max_runs"), py::arg("samples"),
        py::arg("seed"), py::arg("threads"), py::arg("on_progress") = py::none(),
        py::arg("progress_interval_ms") = 100, py::arg("progress_every") = 0,
        "Initial inventory reproducing a measured isotope ratio at t_end, nominal and Monte "
        "Carlo over the measured ratio (a dict of results).");

    m.def(
        "invert_case",
        [](const CaseTable& table, std::size_t row, const BatchOptions& batch,
           const std::string& numerator, const std::string& denominator, double value, double width,
           bool lognormal, bool relative, std::vector<std::string> scaled, double search_factor,
           double inventory_min, double inventory_max, double tolerance, std::size_t max_runs,
           std::size_t samples, std::uint64_t seed, std::size_t threads, py::object on_progress,
           unsigned interval_ms, std::size_t every) {
            const MeasuredRatio mr =
                measured_ratio(numerator, denominator, value, width, lognormal, relative);
            const InversionOptions o =
                inversion_options(std::move(scaled), search_factor, inventory_min, inventory_max,
                                  tolerance, max_runs);
            InversionSampling sampling{samples, seed, threads};
            return with_hooks(on_progress, interval_ms, every, [&](const InversionHooks& h) {
                return invert_case(table, row, batch, mr, o, sampling, h);
            });
        },
        py::kw_only(), py::arg("table"), py::arg("row"), py::arg("options"), py::arg("numerator"),
        py::arg("denominator"), py::arg("value"), py::arg("width"), py::arg("lognormal"),
        py::arg("relative"), py::arg("scaled"), py::arg("search_factor"), py::arg("inventory_min"),
        py::arg("inventory_max"), py::arg("tolerance"), py::arg("max_runs"), py::arg("samples"),
        py::arg("seed"), py::arg("threads"), py::arg("on_progress") = py::none(),
        py::arg("progress_interval_ms") = 100, py::arg("progress_every") = 0,
        "Initial inventory reproducing a measured isotope ratio for row `row` of a case table, "
        "nominal and Monte Carlo over every stated uncertainty and the measured ratio.");
}

} // namespace exosieve::bindings
