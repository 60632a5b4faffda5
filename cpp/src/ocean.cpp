#include "exosieve/ocean.hpp"

#include "exosieve/constants.hpp"
#include "exosieve/species.hpp"

namespace exosieve {

namespace {

// out_i = in_i * per_unit_i, with per_unit = scale rho 4 pi R^2 / m_H2O or its inverse.
void convert(const char* what, ArrayArg amount, ArrayArg radius, ArrayArg density, double* out,
             std::size_t count, double scale, bool to_depth) {
    check_lengths(count, {amount, radius, density});
    require_non_negative(what, amount);
    require_positive("radius", radius);
    require_positive("density", density);
    const double m = water_molecule_mass();
    const double four_pi = 4.0 * constants::pi;
    for (std::size_t i = 0; i < count; ++i) {
        // Particles per metre of depth.
        const double per_metre = scale * density[i] * four_pi * radius[i] * radius[i] / m;
        out[i] = to_depth ? amount[i] / per_metre : amount[i] * per_metre;
    }
}

} // namespace

double water_molecule_mass() {
    return species("H2O").mass; // looked up each time: the registry may replace H2O
}

void ocean_depth_to_water(ArrayArg depth, ArrayArg radius, ArrayArg density, double* out,
                          std::size_t count) {
    convert("depth", depth, radius, density, out, count, 1.0, false);
}

void water_to_ocean_depth(ArrayArg molecules, ArrayArg radius, ArrayArg density, double* out,
                          std::size_t count) {
    convert("molecules", molecules, radius, density, out, count, 1.0, true);
}

void ocean_depth_to_hydrogen(ArrayArg depth, ArrayArg radius, ArrayArg density, double* out,
                             std::size_t count) {
    convert("depth", depth, radius, density, out, count, 2.0, false);
}

void hydrogen_to_ocean_depth(ArrayArg atoms, ArrayArg radius, ArrayArg density, double* out,
                             std::size_t count) {
    convert("atoms", atoms, radius, density, out, count, 2.0, true);
}

} // namespace exosieve
