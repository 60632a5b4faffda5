#include "bindings.hpp"

#include <pybind11/stl.h>

#include "exosieve/jeans.hpp"
#include "exosieve/maxwell.hpp"

namespace exosieve::bindings {

namespace {

using A = const DoubleArray&;

// Bind kernel(arg..., out, count) as f(count, arg...) -> 1-D array, and as
// f(count, arg..., out) writing into the caller's array `out` (write_into) and returning it;
// the Python facade broadcasts and flattens, so every argument arrives with length 1 or
// `count`. The kernels named in KERNELS_WRITING_OUT take `out`.
template <class... Args>
void def_plain(py::module_& m, const char* name,
               void (*kernel)(typename std::conditional<true, ArrayArg, Args>::type..., double*,
                              std::size_t)) {
    m.def(name, [kernel](std::size_t count, typename std::conditional<true, A, Args>::type... a) {
        return with_output(count, [&](double* out) { kernel(as_arg(a)..., out, count); });
    });
    m.def(name, [kernel](std::size_t count, typename std::conditional<true, A, Args>::type... a,
                         const py::object& out) {
        return write_into(count, out, [&](double* data) { kernel(as_arg(a)..., data, count); });
    });
}

template <class... Args>
void def_tail(py::module_& m, const char* name,
              void (*kernel)(typename std::conditional<true, ArrayArg, Args>::type..., double*,
                             std::size_t, const TailDepletion&)) {
    m.def(name, [kernel](std::size_t count, typename std::conditional<true, A, Args>::type... a,
                         const TailDepletion& tail) {
        return with_output(count, [&](double* out) { kernel(as_arg(a)..., out, count, tail); });
    });
    m.def(name, [kernel](std::size_t count, typename std::conditional<true, A, Args>::type... a,
                         const TailDepletion& tail, const py::object& out) {
        return write_into(count, out,
                          [&](double* data) { kernel(as_arg(a)..., data, count, tail); });
    });
}

struct X {}; // placeholder type: one per array argument

} // namespace

void bind_kernel(py::module_& m) {
    py::class_<TailDepletion>(m, "TailDepletion",
                              "Multiplier on the Jeans flux: constant, or a table against the "
                              "Jeans parameter (linear, held at the ends)")
        .def(py::init<>())
        .def(py::init<double, bool>(), py::arg("factor"), py::kw_only(),
             py::arg("enhancement") = false)
        .def(py::init<std::vector<double>, std::vector<double>, bool>(), py::arg("jeans_parameter"),
             py::arg("factor"), py::kw_only(), py::arg("enhancement") = false)
        .def("__call__", &TailDepletion::operator(), py::arg("jeans_parameter"))
        .def_property_readonly("is_identity", &TailDepletion::is_identity)
        .def_property_readonly("constant", &TailDepletion::constant)
        .def_property_readonly("table_jeans_parameter", &TailDepletion::table_jeans_parameter)
        .def_property_readonly("table_factor", &TailDepletion::table_factor)
        .def_property_readonly("enhancement", &TailDepletion::enhancement)
        .def(py::pickle(
            [](const TailDepletion& t) {
                return py::make_tuple(t.constant(), t.table_jeans_parameter(), t.table_factor(),
                                      t.enhancement());
            },
            [](const py::tuple& s) {
                auto lambdas = s[1].cast<std::vector<double>>();
                const bool enhancement = s.size() > 3 && s[3].cast<bool>();
                if (lambdas.empty())
                    return TailDepletion(s[0].cast<double>(), enhancement);
                return TailDepletion(lambdas, s[2].cast<std::vector<double>>(), enhancement);
            }));

    def_plain<X, X>(m, "most_probable_speed", &exosieve::most_probable_speed);
    def_plain<X, X>(m, "mean_speed", &exosieve::mean_speed);
    def_plain<X, X>(m, "rms_speed", &exosieve::rms_speed);
    def_plain<X, X, X>(m, "speed_pdf", &exosieve::speed_pdf);
    def_plain<X, X, X>(m, "fraction_faster", &exosieve::fraction_faster);
    def_plain<X, X, X>(m, "log_fraction_faster", &exosieve::log_fraction_faster);
    def_plain<X, X>(m, "escape_speed", &exosieve::escape_speed);
    def_plain<X, X, X, X>(m, "jeans_parameter", &exosieve::jeans_parameter);
    def_tail<X, X, X, X, X>(m, "jeans_flux", &exosieve::jeans_flux);
    def_tail<X, X, X, X, X>(m, "log_jeans_flux", &exosieve::log_jeans_flux);
    def_tail<X, X, X, X, X>(m, "jeans_energy_flux", &exosieve::jeans_energy_flux);
    def_tail<X, X, X, X, X>(m, "jeans_escape_rate", &exosieve::jeans_escape_rate);
    def_tail<X, X, X, X, X>(m, "log_jeans_escape_rate", &exosieve::log_jeans_escape_rate);
    m.attr("KERNELS_WRITING_OUT") = py::make_tuple(
        "most_probable_speed", "mean_speed", "rms_speed", "speed_pdf", "fraction_faster",
        "log_fraction_faster", "escape_speed", "jeans_parameter", "jeans_flux", "log_jeans_flux",
        "jeans_energy_flux", "jeans_escape_rate", "log_jeans_escape_rate");
}

} // namespace exosieve::bindings
