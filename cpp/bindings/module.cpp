#include "bindings.hpp"

PYBIND11_MODULE(_core, m) {
    m.doc() =
        "exosieve compiled core: Maxwell–Boltzmann speeds, Jeans escape and models (SI units)";
    m.attr("__version__") = EXOSIEVE_VERSION;
    namespace b = exosieve::bindings;
    b::bind_errors(m);
    b::bind_constants(m);
    b::bind_species(m);
    b::bind_kernel(m);
    b::bind_evolution(m);
    b::bind_outflow(m);
    b::bind_thermosphere(m);
    b::bind_hdf5_io(m);
    b::bind_batch(m);
    b::bind_sensitivity(m);
    b::bind_inversion(m);
    b::bind_file_schema(m);
}
