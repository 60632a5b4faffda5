#include "bindings.hpp"

#include <pybind11/stl.h>

#include <cmath>
#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "exosieve/diffusion.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/thermosphere.hpp"

namespace exosieve::bindings {

namespace {

DiffusionMethod method_from(const std::string& name) {
    return diffusion_method_named(name, "method");
}

const char* status_name(ExobaseStatus status) {
    switch (status) {
    case ExobaseStatus::found:
        return "found";
    case ExobaseStatus::collisionless_at_homopause:
        return "collisionless_at_homopause";
    case ExobaseStatus::none_below_outer_radius:
        return "none_below_outer_radius";
    }
    return "unknown";
}

// An empty array stands for "not given" in the bulk entry.
ArrayArg optional_arg(const std::optional<DoubleArray>& a) {
    return a ? as_arg(*a) : ArrayArg{nullptr, 0};
}

} // namespace

void bind_thermosphere(py::module_& m) {
    // ------------------------------------------------------------ diffusion
    m.attr("DIFFUSION_METHODS") =
        py::make_tuple(diffusion_method_name(DiffusionMethod::measured_first),
                       diffusion_method_name(DiffusionMethod::chapman_enskog));
    m.def(
        "binary_diffusion_parameter",
        [](std::size_t count, const Species& a, const Species& b, const DoubleArray& temperature,
           const std::string& method) {
            const DiffusionMethod how = method_from(method);
            return with_output(count, [&](double* out) {
                binary_diffusion_parameter(a, b, as_arg(temperature), out, count, how);
            });
        },
        py::arg("count"), py::arg("species_a"), py::arg("species_b"), py::arg("temperature"),
        py::arg("method"));
    m.def(
        "diffusion_limited_flux",
        [](std::size_t count, const Species& s, const std::vector<Species>& background,
           const std::vector<double>& fractions, const DoubleArray& mixing_ratio,
           const DoubleArray& temperature, const DoubleArray& planet_mass,
           const DoubleArray& radius, const std::string& method) {
            const DiffusionMethod how = method_from(method);
            return with_output(count, [&](double* out) {
                diffusion_limited_flux(s, background, fractions, as_arg(mixing_ratio),
                                       as_arg(temperature), as_arg(planet_mass), as_arg(radius),
                                       out, count, how);
            });
        },
        py::arg("count"), py::arg("species"), py::arg("background"), py::arg("fractions"),
        py::arg("mixing_ratio"), py::arg("temperature"), py::arg("planet_mass"), py::arg("radius"),
        py::arg("method"));
    m.def(
        "coupled_escape_flux",
        [](std::size_t count, const DoubleArray& jeans_flux_eq, const DoubleArray& b,
           const DoubleArray& mixing_ratio, const DoubleArray& beta, const DoubleArray& thickness) {
            return with_output(count, [&](double* out) {
                coupled_escape_flux(as_arg(jeans_flux_eq), as_arg(b), as_arg(mixing_ratio),
                                    as_arg(beta), as_arg(thickness), out, count);
            });
        },
        py::arg("count"), py::arg("jeans_flux_eq"), py::arg("b"), py::arg("mixing_ratio"),
        py::arg("beta"), py::arg("thickness"));
    m.def("neufeld_collision_integral", &neufeld_collision_integral,
          py::arg("reduced_temperature"));
    m.def("diffusion_pairs", []() {
        py::list out;
        for (const DiffusionPair& p : default_diffusion_pairs().pairs())
            out.append(
                py::make_tuple(p.species_a, p.species_b, p.coefficient, p.exponent, p.source));
        return out;
    });
    m.def("diffusion_pairs_csv", []() { return std::string(diffusion_pairs_csv()); });

    // ------------------------------------------------------------ thermosphere
    py::class_<TemperatureProfile>(m, "TemperatureProfile", "Temperature against radius [K]")
        .def_static("isothermal", &TemperatureProfile::isothermal, py::arg("temperature"))
        .def_static("bates", &TemperatureProfile::bates, py::arg("exobase_temperature"),
                    py::arg("base_temperature"), py::arg("shape"), py::arg("base_radius"))
        .def_static("table", &TemperatureProfile::table, py::arg("radius"), py::arg("temperature"))
        .def_property_readonly("kind",
                               [](const TemperatureProfile& p) {
                                   switch (p.kind()) {
                                   case TemperatureProfile::Kind::isothermal:
                                       return "isothermal";
                                   case TemperatureProfile::Kind::bates:
                                       return "bates";
                                   case TemperatureProfile::Kind::table:
                                       return "table";
                                   }
                                   return "unknown";
                               })
        .def("__call__", &TemperatureProfile::operator(), py::arg("radius"));

    py::class_<Exobase>(m, "Exobase", "The exobase of a thermosphere, or why there is none")
        .def_property_readonly("status", [](const Exobase& e) { return status_name(e.status); })
        .def_readonly("message", &Exobase::message)
        .def_readonly("radius", &Exobase::radius)
        .def_readonly("temperature", &Exobase::temperature)
        .def_readonly("densities", &Exobase::densities)
        .def_property_readonly("found", &Exobase::found);

    py::class_<Thermosphere>(m, "Thermosphere", "Diffusive-equilibrium thermosphere [SI]")
        .def(py::init<double, double, double, double, std::vector<Species>, std::vector<double>,
                      TemperatureProfile, double>(),
             py::arg("planet_mass"), py::arg("planet_radius"), py::arg("homopause_radius"),
             py::arg("homopause_density"), py::arg("species"), py::arg("mole_fractions"),
             py::arg("profile"), py::arg("outer_radius"))
        .def_property_readonly("outer_radius", &Thermosphere::outer_radius)
        .def("index", &Thermosphere::index, py::arg("name"))
        .def(
            "set_diffusion_method",
            [](Thermosphere& t, const std::string& method) {
                t.set_diffusion_method(method_from(method));
            },
            py::arg("method"))
        .def("set_tail_depletion", &Thermosphere::set_tail_depletion, py::arg("tail"))
        .def(
            "temperature",
            [](const Thermosphere& t, const DoubleArray& r) {
                const std::size_t count = static_cast<std::size_t>(r.size());
                return with_output(count,
                                   [&](double* out) { t.temperature(r.data(), out, count); });
            },
            py::arg("radius"))
        .def(
            "density",
            [](const Thermosphere& t, std::size_t i, const DoubleArray& r) {
                const std::size_t count = static_cast<std::size_t>(r.size());
                return with_output(count, [&](double* out) { t.density(i, r.data(), out, count); });
            },
            py::arg("index"), py::arg("radius"))
        .def("mean_free_path", &Thermosphere::mean_free_path, py::arg("radius"),
             py::call_guard<py::gil_scoped_release>())
        .def("scale_height", &Thermosphere::scale_height, py::arg("radius"),
             py::call_guard<py::gil_scoped_release>())
        .def("exobase_criterion", &Thermosphere::exobase_criterion, py::arg("radius"),
             py::call_guard<py::gil_scoped_release>())
        .def("exobase",
             [](const Thermosphere& t) {
                 py::gil_scoped_release release;
                 return t.exobase(); // a copy: the Python object owns its data
             })
        .def("escape_flux", &Thermosphere::escape_flux, py::arg("index"),
             py::arg("limit_by_diffusion"), py::call_guard<py::gil_scoped_release>())
        .def("diffusion_limited_flux", &Thermosphere::diffusion_limited_flux, py::arg("index"),
             py::call_guard<py::gil_scoped_release>());

    m.def(
        "solve_thermospheres",
        [](const std::vector<Species>& species, std::size_t count, const DoubleArray& planet_mass,
           const DoubleArray& planet_radius, const DoubleArray& homopause_radius,
           const DoubleArray& homopause_density, const DoubleArray& mole_fractions,
           const DoubleArray& exobase_temperature,
           const std::optional<DoubleArray>& homopause_temperature,
           const std::optional<DoubleArray>& shape, const std::optional<DoubleArray>& outer_radius,
           bool limit_by_diffusion, unsigned threads) {
            const std::size_t n_species = species.size();
            if (mole_fractions.ndim() != 2 ||
                static_cast<std::size_t>(mole_fractions.shape(1)) != n_species)
                throw InputError("mole_fractions must have shape (1 or count, " +
                                 std::to_string(n_species) + ")");
            ThermosphereCases cases;
            cases.planet_mass = as_arg(planet_mass);
            cases.planet_radius = as_arg(planet_radius);
            cases.homopause_radius = as_arg(homopause_radius);
            cases.homopause_density = as_arg(homopause_density);
            cases.mole_fractions = mole_fractions.data();
            cases.fraction_rows = static_cast<std::size_t>(mole_fractions.shape(0));
            cases.exobase_temperature = as_arg(exobase_temperature);
            cases.homopause_temperature = optional_arg(homopause_temperature);
            cases.shape = optional_arg(shape);
            cases.outer_radius = optional_arg(outer_radius);
            const auto n = static_cast<py::ssize_t>(count);
            py::array_t<double> radius(n), temperature(n);
            py::array_t<int> status(n);
            py::array_t<double> flux({n, static_cast<py::ssize_t>(n_species)});
            ThermosphereResults results{radius.mutable_data(), temperature.mutable_data(),
                                        status.mutable_data(), flux.mutable_data()};
            {
                py::gil_scoped_release release;
                solve_thermospheres(species, count, cases, limit_by_diffusion, results, threads);
            }
            return py::make_tuple(radius, temperature, status, flux);
        },
        py::arg("species"), py::arg("count"), py::arg("planet_mass"), py::arg("planet_radius"),
        py::arg("homopause_radius"), py::arg("homopause_density"), py::arg("mole_fractions"),
        py::arg("exobase_temperature"), py::arg("homopause_temperature"), py::arg("shape"),
        py::arg("outer_radius"), py::arg("limit_by_diffusion"), py::arg("threads"));
}

} // namespace exosieve::bindings
