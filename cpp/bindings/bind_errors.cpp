#include "bindings.hpp"

#include "exosieve/errors.hpp"

namespace exosieve::bindings {

void bind_errors(py::module_& m) {
    // Translators are tried newest first, so the base class goes first.
    static py::exception<Error> base(m, "ExosieveError", PyExc_RuntimeError);
    py::register_exception<NumericalError>(m, "NumericalError", base.ptr());
    py::register_exception<InputError>(m, "InputError", PyExc_ValueError);
}

} // namespace exosieve::bindings
