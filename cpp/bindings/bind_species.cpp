#include "bindings.hpp"

#include <pybind11/stl.h>

#include "exosieve/constants.hpp"
#include "exosieve/species.hpp"

namespace exosieve::bindings {

void bind_species(py::module_& m) {
    py::class_<Species>(m, "Species", "A gas species and its properties [SI]")
        .def(py::init([](const std::string& name, double mass, double lj_diameter,
                         double lj_well_depth, double cross_section,
                         double thermal_diffusion_factor, const std::string& source) {
                 Species s;
                 s.name = name;
                 s.mass = mass;
                 s.lj_diameter = lj_diameter;
                 s.lj_well_depth = lj_well_depth;
                 s.cross_section = cross_section;
                 s.thermal_diffusion_factor = thermal_diffusion_factor;
                 s.mass_source = s.lj_source = s.cross_section_source = s.thermal_diffusion_source =
                     source;
                 validate(s);
                 return s;
             }),
             py::arg("name"), py::arg("mass"), py::arg("lj_diameter") = 0.0,
             py::arg("lj_well_depth") = 0.0, py::arg("cross_section") = 0.0,
             py::arg("thermal_diffusion_factor") = 0.0, py::arg("source") = "user")
        .def_readonly("name", &Species::name, "Registry name")
        .def_readonly("mass", &Species::mass, "Particle mass [kg]")
        .def_property_readonly("mass_u", &Species::mass_u, "Particle mass [u]")
        .def_readonly("lj_diameter", &Species::lj_diameter, "Lennard-Jones diameter [m]")
        .def_readonly("lj_well_depth", &Species::lj_well_depth,
                      "Lennard-Jones well depth eps/k [K]")
        .def_readonly("cross_section", &Species::cross_section, "Collision cross-section [m^2]")
        .def_readonly("thermal_diffusion_factor", &Species::thermal_diffusion_factor,
                      "Thermal-diffusion factor alpha [1]")
        .def_readonly("mass_source", &Species::mass_source)
        .def_readonly("lj_source", &Species::lj_source)
        .def_readonly("cross_section_source", &Species::cross_section_source)
        .def_readonly("thermal_diffusion_source", &Species::thermal_diffusion_source)
        .def("__repr__",
             [](const Species& s) {
                 return "Species(name='" + s.name + "', mass=" + std::to_string(s.mass_u()) + " u)";
             })
        .def(py::pickle(
            [](const Species& s) {
                return py::make_tuple(s.name, s.mass, s.lj_diameter, s.lj_well_depth,
                                      s.cross_section, s.thermal_diffusion_factor, s.mass_source,
                                      s.lj_source, s.cross_section_source,
                                      s.thermal_diffusion_source);
            },
            [](const py::tuple& t) {
                Species s;
                s.name = t[0].cast<std::string>();
                s.mass = t[1].cast<double>();
                s.lj_diameter = t[2].cast<double>();
                s.lj_well_depth = t[3].cast<double>();
                s.cross_section = t[4].cast<double>();
                s.thermal_diffusion_factor = t[5].cast<double>();
                s.mass_source = t[6].cast<std::string>();
                s.lj_source = t[7].cast<std::string>();
                s.cross_section_source = t[8].cast<std::string>();
                s.thermal_diffusion_source = t[9].cast<std::string>();
                return s;
            }));

    m.def(
        "species", [](const std::string& name) { return exosieve::species(name); },
        py::arg("name"));
    m.def(
        "register_species", [](const Species& s) { default_registry().add(s); },
        py::arg("species"));
    m.def("species_names", []() { return default_registry().names(); });
    m.def("species_table_csv", []() { return std::string(species_table_csv()); });
}

} // namespace exosieve::bindings
