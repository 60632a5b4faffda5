#include "bindings.hpp"

#include <cstdint>
#include <vector>

#include "exosieve/errors.hpp"
#include "exosieve/sensitivity.hpp"

namespace exosieve::bindings {

void bind_sensitivity(py::module_& m) {
    // Outputs (count, N (K + 2)) in the design's layout; results as arrays (count, K) and
    // (count,), computed without the GIL.
    m.def(
        "sobol_indices",
        [](const DoubleArray& outputs, std::size_t base, std::size_t inputs, std::size_t resamples,
           double confidence, std::uint64_t seed, std::size_t threads, double resolution) {
            const SaltelliDesign d{base, inputs};
            d.validate();
            SobolOptions o;
            o.resamples = resamples;
            o.confidence = confidence;
            o.seed = seed;
            o.resolution = resolution;
            o.validate();
            if (outputs.ndim() != 2 || static_cast<std::size_t>(outputs.shape(1)) != d.runs())
                throw InputError("outputs must have shape (count, " + std::to_string(d.runs()) +
                                 ") for " + std::to_string(base) + " base rows and " +
                                 std::to_string(inputs) + " inputs");
            const auto count = static_cast<std::size_t>(outputs.shape(0));
            std::vector<SobolIndices> r;
            {
                py::gil_scoped_release release;
                r = sobol_indices_many(outputs.data(), count, d, o, threads);
            }
            const auto n = static_cast<py::ssize_t>(count), k = static_cast<py::ssize_t>(inputs);
            py::dict out;
            auto per_input = [&](const char* name, std::vector<double> SobolIndices::*field) {
                py::array_t<double> a({n, k});
                double* p = a.mutable_data();
                for (std::size_t c = 0; c < count; ++c)
                    for (std::size_t i = 0; i < inputs; ++i)
                        p[c * inputs + i] = (r[c].*field)[i];
                out[name] = a;
            };
            per_input("first_order", &SobolIndices::first_order);
            per_input("first_order_low", &SobolIndices::first_order_low);
            per_input("first_order_high", &SobolIndices::first_order_high);
            per_input("total", &SobolIndices::total);
            per_input("total_low", &SobolIndices::total_low);
            per_input("total_high", &SobolIndices::total_high);
            py::array_t<double> mean(n), variance(n);
            py::array_t<std::int64_t> rows(n);
            for (std::size_t c = 0; c < count; ++c) {
                mean.mutable_data()[c] = r[c].mean;
                variance.mutable_data()[c] = r[c].variance;
                rows.mutable_data()[c] = static_cast<std::int64_t>(r[c].rows_used);
            }
            out["mean"] = mean;
            out["variance"] = variance;
            out["rows_used"] = rows;
            return out;
        },
        py::arg("outputs"), py::arg("base"), py::arg("inputs"), py::arg("resamples") = 1000,
        py::arg("confidence") = 0.95, py::arg("seed") = 0, py::arg("threads") = 0,
        py::arg("resolution") = 0.0,
        "First-order and total Sobol' indices with bootstrap intervals of `count` outputs of a "
        "Saltelli design, shape (count, base (inputs + 2)).");
}

} // namespace exosieve::bindings
