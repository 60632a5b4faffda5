#include "bindings.hpp"

#include "exosieve/errors.hpp"

namespace exosieve::bindings {

void bind_errors(py::module_& m) {
    // Translators are tried newest first, so the base class goes first.
    static py::exception<Error> base(m, "ExosieveError", PyExc_RuntimeError);
    py::register_exception<NumericalError>(m, "NumericalError", base.ptr());
    py::register_exception<InputError>(m, "InputError", PyExc_ValueError);
    // File failures are also OSErrors, as Python code expects of I/O.
    static py::handle file_error = PyErr_NewException(
        "exosieve._core.FileError", py::make_tuple(base, py::handle(PyExc_OSError)).ptr(), nullptr);
    m.attr("FileError") = file_error;
    py::register_exception_translator([](std::exception_ptr p) {
        try {
            if (p)
                std::rethrow_exception(p);
        } catch (const FileError& e) {
            PyErr_SetString(file_error.ptr(), e.what());
        }
    });
}

} // namespace exosieve::bindings
