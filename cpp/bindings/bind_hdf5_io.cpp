#include "bindings.hpp"

#include <pybind11/stl.h>

#include <cstdint>
#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "exosieve/errors.hpp"
#include "exosieve/hdf5_io.hpp"

namespace exosieve::bindings {

namespace {

using Int64Array = py::array_t<std::int64_t, py::array::c_style | py::array::forcecast>;

// A str is kept, anything else (a dict) is written as JSON.
std::string config_text(const py::handle& config) {
    if (py::isinstance<py::str>(config))
        return config.cast<std::string>();
    return py::module_::import("json")
        .attr("dumps")(config, py::arg("sort_keys") = true)
        .cast<std::string>();
}

py::array as_array(const py::handle& values) {
    return py::module_::import("numpy").attr("asarray")(values);
}

std::vector<std::size_t> shape_of(const py::array& a) {
    return std::vector<std::size_t>(a.shape(), a.shape() + a.ndim());
}

std::string shape_text(const std::vector<std::size_t>& shape) {
    std::string text = "(";
    for (std::size_t i = 0; i < shape.size(); ++i)
        text += (i ? ", " : "") + std::to_string(shape[i]);
    return text + (shape.size() == 1 ? ",)" : ")");
}

std::string dtype_text(const py::array& a) {
    return py::str(a.dtype()).cast<std::string>();
}

ValueType kind_of(const py::dtype& dtype, const std::string& what) {
    switch (dtype.kind()) {
    case 'f':
        return ValueType::float64;
    case 'i':
    case 'u':
    case 'b':
        return ValueType::int64;
    case 'U':
    case 'S':
    case 'O':
        return ValueType::string;
    default:
        throw InputError(what + ": unsupported dtype " + py::str(dtype).cast<std::string>() +
                         " (use float, integer or str)");
    }
}

ValueType kind_of(const py::array& a, const std::string& what) {
    return kind_of(a.dtype(), what);
}

// A dtype-like (float, "int64", np.float64, str) -> element type of a case variable.
ValueType kind_of_dtype(const py::handle& dtype, const std::string& what) {
    return kind_of(py::dtype::from_args(py::reinterpret_borrow<py::object>(dtype)), what);
}

Int64Array as_int64(const py::array& a, const std::string& what) {
    if (a.dtype().kind() == 'u' && a.dtype().itemsize() >= 8 && a.size() > 0 &&
        py::int_(a.attr("max")()).cast<unsigned long long>() >
            static_cast<unsigned long long>(std::numeric_limits<std::int64_t>::max()))
        throw InputError(what + ": values exceed the int64 range");
    return Int64Array::ensure(a);
}

// Flattened (C order) strings; bytes are decoded as UTF-8.
std::vector<std::string> as_strings(const py::array& a, const std::string& what) {
    const py::list items = a.attr("ravel")().attr("tolist")();
    std::vector<std::string> out;
    out.reserve(items.size());
    for (std::size_t i = 0; i < items.size(); ++i) {
        const py::handle item = items[i];
        if (py::isinstance<py::str>(item))
            out.push_back(item.cast<std::string>());
        else if (py::isinstance<py::bytes>(item))
            out.push_back(item.attr("decode")("utf-8").cast<std::string>());
        else
            throw InputError(what + ": element " + std::to_string(i) + " is " +
                             py::str(py::type::of(item).attr("__name__")).cast<std::string>() +
                             ", not a string");
    }
    return out;
}

std::string numeric_units(const std::string& name, const std::optional<std::string>& units) {
    if (!units)
        throw InputError("coordinate '" + name + "': units are required for numeric values");
    return *units;
}

template <class T> py::array shaped(std::vector<T> values, const std::vector<std::size_t>& shape) {
    auto* owner = new std::vector<T>(std::move(values));
    py::capsule free(owner, [](void* p) { delete static_cast<std::vector<T>*>(p); });
    return py::array_t<T>(std::vector<py::ssize_t>(shape.begin(), shape.end()), owner->data(),
                          free);
}

void add_coordinate(ResultWriter& w, const std::string& name, const py::handle& values,
                    const std::string& long_name, const std::optional<std::string>& units) {
    const py::array a = as_array(values);
    const std::string what = "coordinate '" + name + "'";
    if (a.ndim() != 1)
        throw InputError(what + " must be 1-D, got shape " + shape_text(shape_of(a)));
    switch (kind_of(a, what)) {
    case ValueType::float64: {
        const DoubleArray d = DoubleArray::ensure(a);
        const std::string u = numeric_units(name, units);
        py::gil_scoped_release release;
        w.add_coordinate(name, d.data(), static_cast<std::size_t>(d.size()), u, long_name);
        break;
    }
    case ValueType::int64: {
        const Int64Array i = as_int64(a, what);
        const std::string u = numeric_units(name, units);
        py::gil_scoped_release release;
        w.add_coordinate(name, i.data(), static_cast<std::size_t>(i.size()), u, long_name);
        break;
    }
    case ValueType::string: {
        if (units && *units != "1")
            throw InputError(what + ": string coordinates carry units '1', got '" + *units + "'");
        const std::vector<std::string> s = as_strings(a, what);
        py::gil_scoped_release release;
        w.add_coordinate(name, s, long_name);
        break;
    }
    }
}

void add_variable(ResultWriter& w, const std::string& name, const std::vector<std::string>& dims,
                  const py::handle& data, const std::string& units, const std::string& long_name) {
    const py::array a = as_array(data);
    const std::string what = "variable '" + name + "'";
    const std::vector<std::size_t> want = w.shape_of(name, dims);
    if (shape_of(a) != want) {
        std::string dim_text = "(";
        for (std::size_t i = 0; i < dims.size(); ++i)
            dim_text += (i ? ", " : "") + dims[i] + "=" + std::to_string(want[i]);
        throw InputError(what + ": data has shape " + shape_text(shape_of(a)) + " but dimensions " +
                         dim_text + ") need " + shape_text(want));
    }
    switch (kind_of(a, what)) {
    case ValueType::float64: {
        const DoubleArray d = DoubleArray::ensure(a);
        py::gil_scoped_release release;
        w.add_variable(name, dims, d.data(), static_cast<std::size_t>(d.size()), units, long_name);
        break;
    }
    case ValueType::int64: {
        const Int64Array i = as_int64(a, what);
        py::gil_scoped_release release;
        w.add_variable(name, dims, i.data(), static_cast<std::size_t>(i.size()), units, long_name);
        break;
    }
    case ValueType::string: {
        const std::vector<std::string> s = as_strings(a, what);
        py::gil_scoped_release release;
        w.add_variable(name, dims, s, units, long_name);
        break;
    }
    }
}

void append(ResultAppender& appender, const py::handle& columns) {
    std::vector<std::pair<std::string, py::array>> arrays;
    for (const py::handle item : columns.attr("items")()) {
        const py::tuple pair = py::reinterpret_borrow<py::tuple>(item);
        arrays.emplace_back(pair[0].cast<std::string>(), as_array(pair[1]));
    }
    if (arrays.empty())
        throw InputError("row block is empty: give an array for every case variable");
    std::optional<std::size_t> rows;
    std::string first;
    for (const auto& [name, a] : arrays) {
        const std::string what = "row block: '" + name + "'";
        if (a.ndim() == 0)
            throw InputError(what + " is a scalar; it needs a leading case axis");
        const std::vector<std::size_t> want = appender.row_shape(name);
        const std::vector<std::size_t> got = shape_of(a);
        if (!rows) {
            rows = got[0];
            first = name;
        } else if (got[0] != *rows) {
            throw InputError(what + " has " + std::to_string(got[0]) + " rows, '" + first +
                             "' has " + std::to_string(*rows));
        }
        if (std::vector<std::size_t>(got.begin() + 1, got.end()) != want)
            throw InputError(what + " has shape " + shape_text(got) +
                             "; each row must have shape " + shape_text(want));
    }
    RowBlock block(*rows);
    for (const auto& [name, a] : arrays) {
        const std::string what = "row block: '" + name + "'";
        const ValueType stored = appender.type_of(name);
        const ValueType given = kind_of(a, what);
        if (stored == ValueType::string && given != ValueType::string)
            throw InputError(what + " holds " + dtype_text(a) + " values; the file stores strings");
        if (stored != ValueType::string && given == ValueType::string)
            throw InputError(what + " holds strings; the file stores numbers");
        if (stored == ValueType::int64 && given == ValueType::float64)
            throw InputError(what + " holds " + dtype_text(a) +
                             " values; the file stores int64 (convert explicitly)");
        switch (stored) {
        case ValueType::float64: {
            const DoubleArray d = DoubleArray::ensure(a);
            block.set(name, d.data(), static_cast<std::size_t>(d.size()));
            break;
        }
        case ValueType::int64: {
            const Int64Array i = as_int64(a, what);
            block.set(name, i.data(), static_cast<std::size_t>(i.size()));
            break;
        }
        case ValueType::string:
            block.set(name, as_strings(a, what));
            break;
        }
    }
    py::gil_scoped_release release;
    appender.append(block);
}

} // namespace

void bind_hdf5_io(py::module_& m) {
    m.attr("RESULT_FILE_CONVENTIONS") = result_file_conventions;
    py::class_<ResultWriter>(
        m, "ResultWriter",
        "Builds one HDF5 result file (readable by h5py and xarray) under a temporary name and "
        "moves it over `path` atomically on commit(); discard() or an exception inside a `with` "
        "block leaves `path` as it was.")
        .def(py::init([](const py::handle& path, const py::handle& config) {
                 const std::string p = fspath(path), c = config_text(config);
                 py::gil_scoped_release release;
                 return std::make_unique<ResultWriter>(p, c);
             }),
             py::arg("path"), py::arg("config"),
             "Start a file that replaces `path` on commit(); `config` (JSON text or a dict) "
             "becomes the global attribute 'config'.")
        .def("add_coordinate", &add_coordinate, py::arg("name"), py::arg("values"), py::kw_only(),
             py::arg("long_name"), py::arg("units") = py::none(),
             "Coordinate `name` (also its dimension) from 1-D float, integer or str values; "
             "numeric coordinates need `units`, string coordinates get units '1'.")
        .def("add_variable", &add_variable, py::arg("name"), py::arg("dims"), py::arg("data"),
             py::kw_only(), py::arg("units"), py::arg("long_name"),
             "Variable over existing dimensions `dims`; `data` must have exactly their shape "
             "(float -> float64, integer -> int64, str -> UTF-8).")
        .def(
            "add_case_variable",
            [](ResultWriter& w, const std::string& name, const py::handle& dtype,
               const std::vector<std::string>& dims, const std::string& units,
               const std::string& long_name) {
                const ValueType type = kind_of_dtype(dtype, "case variable '" + name + "'");
                py::gil_scoped_release release;
                w.add_case_variable(name, type, dims, units, long_name);
            },
            py::arg("name"), py::arg("dtype"), py::arg("dims") = std::vector<std::string>{},
            py::kw_only(), py::arg("units"), py::arg("long_name"),
            "Variable along the appendable dimension 'case' (then `dims`), filled later by a "
            "ResultAppender; `dtype` is float, int or str.")
        .def(
            "label_cases",
            [](ResultWriter& w, const std::string& long_name) {
                py::gil_scoped_release release;
                w.label_cases(long_name);
            },
            py::kw_only(), py::arg("long_name"),
            "Make the coordinate 'case' hold text labels (every appended block sets 'case'; "
            "xarray then selects rows with .sel(case=label)) and the row numbers the int64 "
            "case variable 'row'. Call before the first add_case_variable.")
        .def(
            "set_attribute",
            [](ResultWriter& w, const std::string& name, const py::handle& value,
               const std::string& dataset) {
                if (py::isinstance<py::str>(value))
                    return w.set_attribute(dataset, name, value.cast<std::string>());
                std::vector<std::int64_t> numbers;
                try {
                    numbers = value.cast<std::vector<std::int64_t>>();
                } catch (const py::cast_error&) {
                    throw InputError("attribute '" + name +
                                     "' must be a str or a sequence of integers, got " +
                                     py::repr(value).cast<std::string>());
                }
                w.set_attribute(dataset, name, numbers);
            },
            py::arg("name"), py::arg("value"), py::kw_only(), py::arg("dataset") = "/",
            "String attribute, or int64 array attribute from a sequence of integers (e.g. CF "
            "flag_values), on the file (default) or on dataset `dataset`.")
        .def("commit", &ResultWriter::commit, py::call_guard<py::gil_scoped_release>(),
             "Close, fsync and rename the file over the target.")
        .def("discard", &ResultWriter::discard, py::call_guard<py::gil_scoped_release>(),
             "Give up: remove the temporary file; the target is left as it was.")
        .def_property_readonly("is_open", &ResultWriter::is_open,
                               "True until commit() or discard()")
        .def_property_readonly("path", &ResultWriter::path, "The target path")
        .def(
            "__enter__", [](ResultWriter& w) -> ResultWriter& { return w; },
            py::return_value_policy::reference)
        .def("__exit__",
             [](ResultWriter& w, const py::handle& type, const py::handle&, const py::handle&) {
                 if (!w.is_open())
                     return false;
                 py::gil_scoped_release release;
                 if (type.is_none())
                     w.commit();
                 else
                     w.discard();
                 return false;
             });

    py::class_<ResultAppender>(
        m, "ResultAppender",
        "Appends blocks of rows along 'case' to a result file. Each append() writes and fsyncs "
        "the rows, then raises the global attribute 'completed'; reopening a file cuts off rows "
        "past 'completed' (an interrupted block), so they are written again.")
        .def(py::init([](ResultWriter& schema) {
                 py::gil_scoped_release release;
                 return std::make_unique<ResultAppender>(std::move(schema));
             }),
             py::arg("schema"),
             "Commit `schema` (a ResultWriter with case variables; it is used up) and open the "
             "new file for appending.")
        .def(py::init([](const py::handle& path) {
                 const std::string p = fspath(path);
                 py::gil_scoped_release release;
                 return std::make_unique<ResultAppender>(p);
             }),
             py::arg("path"), "Reopen an appendable file to continue it.")
        .def("append", &append, py::arg("columns"),
             "Append rows: `columns` maps every case variable to an array of shape "
             "(rows, *row_shape); 'case' is optional (default: row numbers).")
        .def_property_readonly("completed", &ResultAppender::completed,
                               "Rows that are complete on disk [cases]")
        .def_property_readonly("discarded_rows", &ResultAppender::discarded_rows,
                               "Rows of an interrupted block cut off on reopening [cases]")
        .def_property_readonly("repaired", &ResultAppender::repaired,
                               "True if reopening repaired what a kill left: the file's end "
                               "of allocation, or a last chunk failing its checksum whose "
                               "finished rows match the hash stored with 'completed'")
        .def_property_readonly("case_variables", &ResultAppender::case_variables,
                               "Names of the case variables ('case' included)")
        .def(
            "row_shape",
            [](const ResultAppender& a, const std::string& name) {
                const auto s = a.row_shape(name);
                return py::tuple(py::cast(s));
            },
            py::arg("name"), "Shape of one row of case variable `name`")
        .def_property_readonly("path", &ResultAppender::path, "The file path")
        .def("close", &ResultAppender::close, py::call_guard<py::gil_scoped_release>(),
             "Close the file (appending afterwards raises).")
        .def(
            "__enter__", [](ResultAppender& a) -> ResultAppender& { return a; },
            py::return_value_policy::reference)
        .def("__exit__",
             [](ResultAppender& a, const py::handle&, const py::handle&, const py::handle&) {
                 py::gil_scoped_release release;
                 a.close();
                 return false;
             });

    m.def(
        "read_doubles",
        [](const py::handle& path, const std::string& dataset) {
            const std::string p = fspath(path);
            std::vector<std::size_t> shape;
            std::vector<double> values;
            {
                py::gil_scoped_release release;
                values = read_doubles(p, dataset, &shape);
            }
            return shaped(std::move(values), shape);
        },
        py::arg("path"), py::arg("dataset"), "Read a float64 dataset as an array.");
    m.def(
        "read_int64s",
        [](const py::handle& path, const std::string& dataset) {
            const std::string p = fspath(path);
            std::vector<std::size_t> shape;
            std::vector<std::int64_t> values;
            {
                py::gil_scoped_release release;
                values = read_int64s(p, dataset, &shape);
            }
            return shaped(std::move(values), shape);
        },
        py::arg("path"), py::arg("dataset"), "Read an integer dataset as an int64 array.");
    m.def(
        "read_strings",
        [](const py::handle& path, const std::string& dataset) {
            const std::string p = fspath(path);
            std::vector<std::size_t> shape;
            std::vector<std::string> values;
            {
                py::gil_scoped_release release;
                values = read_strings(p, dataset, &shape);
            }
            py::array flat = py::module_::import("numpy").attr("array")(py::cast(values),
                                                                        py::arg("dtype") = "U");
            return py::array(flat.attr("reshape")(py::tuple(py::cast(shape))));
        },
        py::arg("path"), py::arg("dataset"), "Read a string dataset as an array of str.");
    m.def(
        "read_attribute",
        [](const py::handle& path, const std::string& object, const std::string& name) {
            const std::string p = fspath(path);
            py::gil_scoped_release release;
            return read_attribute(p, object, name);
        },
        py::arg("path"), py::arg("object"), py::arg("name"),
        "Read a string attribute of the file ('/') or of a dataset.");
    m.def(
        "read_int_attribute",
        [](const py::handle& path, const std::string& object, const std::string& name) {
            const std::string p = fspath(path);
            py::gil_scoped_release release;
            return read_int_attribute(p, object, name);
        },
        py::arg("path"), py::arg("object"), py::arg("name"),
        "Read an integer attribute of the file ('/') or of a dataset.");
    m.def(
        "has_dataset",
        [](const py::handle& path, const std::string& dataset) {
            const std::string p = fspath(path);
            py::gil_scoped_release release;
            return has_dataset(p, dataset);
        },
        py::arg("path"), py::arg("dataset"), "True if the file holds a dataset named `dataset`.");
    m.def(
        "read_dimensions",
        [](const py::handle& path, const std::string& dataset) {
            const std::string p = fspath(path);
            py::gil_scoped_release release;
            return read_dimensions(p, dataset);
        },
        py::arg("path"), py::arg("dataset"),
        "Names of the dimensions of `dataset` (from its attached dimension scales).");
    m.def(
        "file_is_locked",
        [](const py::handle& path) {
            const std::string p = fspath(path);
            return file_is_locked(p);
        },
        py::arg("path"),
        "True if another open file holds a lock on `path` (a sweep is writing it).");
}

} // namespace exosieve::bindings
