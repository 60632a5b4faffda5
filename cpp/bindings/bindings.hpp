#pragma once
// One bind_<area> function per binding file; module.cpp only calls them.

#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>

#include <cstddef>
#include <cstdint>
#include <functional>
#include <memory>
#include <string>

#include "exosieve/arrays.hpp"
#include "exosieve/errors.hpp"

namespace exosieve::bindings {

namespace py = pybind11;

// str, bytes or os.PathLike -> str (file-system encoding).
inline std::string fspath(const py::handle& path) {
    return py::module_::import("os").attr("fsdecode")(path).cast<std::string>();
}

//! A progress hook (runs done, runs total) -> keep going, for engines that run without the GIL:
//! takes the GIL, turns a pending signal (Ctrl-C) or an exception of `on_progress` into
//! `failure` (raised by the caller once the engine has stopped) and stops; `on_progress(done,
//! total)` returning False stops too. `on_progress` may be None.
inline std::function<bool(std::size_t, std::size_t)>
progress_hook(const py::object& on_progress, std::unique_ptr<py::error_already_set>& failure) {
    return [&on_progress, &failure](std::size_t done, std::size_t total) {
        py::gil_scoped_acquire gil;
        if (PyErr_CheckSignals() != 0) {
            failure = std::make_unique<py::error_already_set>();
            return false;
        }
        try {
            if (!on_progress.is_none()) {
                py::object keep = on_progress(done, total);
                if (!keep.is_none() && !py::cast<bool>(keep))
                    return false;
            }
        } catch (py::error_already_set& e) {
            failure = std::make_unique<py::error_already_set>(std::move(e));
            return false;
        }
        return true;
    };
}

//! A C-contiguous float64 array; other dtypes and layouts are converted on the way in.
using DoubleArray = py::array_t<double, py::array::c_style | py::array::forcecast>;

//! View a contiguous array as a kernel argument (length 1 broadcasts).
inline ArrayArg as_arg(const DoubleArray& a) {
    return ArrayArg{a.data(), static_cast<std::size_t>(a.size())};
}

//! Allocate a 1-D result of length `count` and fill it with `fill(out)` without the GIL.
template <class Fill> py::array_t<double> with_output(std::size_t count, Fill fill) {
    py::array_t<double> out(static_cast<py::ssize_t>(count));
    double* data = out.mutable_data();
    {
        py::gil_scoped_release release;
        fill(data);
    }
    return out;
}

//! Fill the caller's `out` with `fill(data)` without the GIL and return it: the kernel writes
//! straight into the array's buffer. `out` must be a writeable, aligned, C-contiguous float64
//! numpy array of `count` elements; anything else is refused (InputError naming `out` and what
//! it is), never converted, since results written into a converted copy would be lost.
template <class Fill> py::object write_into(std::size_t count, const py::object& out, Fill fill) {
    if (!py::isinstance<py::array>(out))
        throw InputError("out must be a numpy array, got " +
                         std::string(py::str(py::type::handle_of(out).attr("__name__"))));
    auto a = py::reinterpret_borrow<py::array>(out);
    auto shape_of = [&a] { return std::string(py::str(a.attr("shape"))); };
    if (!a.dtype().is(py::dtype::of<double>()))
        throw InputError("out must be a float64 array to be written in place, got dtype " +
                         std::string(py::str(a.dtype())));
    if (!(a.flags() & py::array::c_style))
        throw InputError("out must be C-contiguous to be written in place, got shape " +
                         shape_of() + " with strides " + std::string(py::str(a.attr("strides"))));
    if (!a.writeable())
        throw InputError("out must be writeable, got a read-only array");
    if (static_cast<std::size_t>(a.size()) != count)
        throw InputError("out must hold " + std::to_string(count) + " values, got shape " +
                         shape_of());
    double* data = static_cast<double*>(a.mutable_data());
    if (reinterpret_cast<std::uintptr_t>(data) % alignof(double) != 0)
        throw InputError("out must be aligned to 8 bytes, got an unaligned array");
    {
        py::gil_scoped_release release;
        fill(data);
    }
    return out;
}

void bind_errors(py::module_& m);
void bind_constants(py::module_& m);
void bind_species(py::module_& m);
void bind_kernel(py::module_& m);
void bind_evolution(py::module_& m);
void bind_outflow(py::module_& m);
void bind_thermosphere(py::module_& m);
void bind_hdf5_io(py::module_& m);
void bind_batch(py::module_& m);
void bind_sensitivity(py::module_& m);
void bind_inversion(py::module_& m);
void bind_file_schema(py::module_& m);

} // namespace exosieve::bindings
