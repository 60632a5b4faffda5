#include "bindings.hpp"

#include <pybind11/stl.h>

#include <cmath>

#include "exosieve/evolution_file.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/sweep_file.hpp"

namespace exosieve::bindings {

namespace {

// A file variable as a dict: name, dtype ("float64", "int64" or "str"), dims, units,
// long_name, range ((low, high) or None), flag_values, flag_meanings, present_when.
py::dict variable_dict(const FileVariable& v) {
    py::dict d;
    d["name"] = v.name;
    d["dtype"] = v.type == ValueType::float64 ? "float64"
                 : v.type == ValueType::int64 ? "int64"
                                              : "str";
    d["dims"] = v.dims;
    d["units"] = v.units;
    d["long_name"] = v.long_name;
    if (std::isnan(v.low))
        d["range"] = py::none();
    else
        d["range"] = py::make_tuple(v.low, v.high);
    d["flag_values"] = v.flag_values;
    d["flag_meanings"] = v.flag_meanings;
    d["present_when"] = v.present_when;
    return d;
}

py::list coordinate_list(const std::vector<FileCoordinate>& list) {
    py::list out;
    for (const FileCoordinate& c : list) {
        py::dict d;
        d["name"] = c.name;
        d["units"] = c.units;
        d["long_name"] = c.long_name;
        out.append(d);
    }
    return out;
}

} // namespace

void bind_file_schema(py::module_& m) {
    m.def(
        "evolution_file_variables",
        [] {
            py::list out;
            for (const FileVariable& v : evolution_file_variables())
                out.append(variable_dict(v));
            return out;
        },
        "Variables of an evolution result file, in file order: dicts with name, dtype "
        "('float64', 'int64', 'str'), dims, units, long_name, range, flag_values, "
        "flag_meanings and present_when ('', 'ratios' or 'envelope')");
    m.def(
        "evolution_file_coordinates", [] { return coordinate_list(evolution_file_coordinates()); },
        "Coordinates of an evolution result file: dicts with name, units, long_name");
    m.def(
        "sweep_file_variables",
        [] {
            py::list out;
            for (const SweepVariable& v : sweep_file_variables())
                out.append(variable_dict(v.file));
            return out;
        },
        "Case variables of a sweep file besides case and row, in file order (dims after "
        "`case`): dicts as evolution_file_variables() gives, present_when '', 'samples' or "
        "'inputs'");
    m.def(
        "sweep_file_coordinates", [] { return coordinate_list(sweep_file_coordinates()); },
        "Coordinates of a sweep file (case, row, species, time, sample, input) and input_unit: "
        "dicts with name, units, long_name");
    py::list regimes;
    for (Regime k : all_regimes)
        regimes.append(regime_name(k));
    m.attr("REGIMES") = py::tuple(regimes);
}

} // namespace exosieve::bindings
