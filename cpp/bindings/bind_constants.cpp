#include "bindings.hpp"

#include "exosieve/constants.hpp"

namespace exosieve::bindings {

void bind_constants(py::module_& m) {
    namespace c = exosieve::constants;
    auto k = m.def_submodule("constants", "CODATA 2018 and IAU 2015 B3 values [SI]");
    k.attr("G") = c::G;
    k.attr("K_B") = c::k_B;
    k.attr("AMU") = c::amu;
    k.attr("N_A") = c::N_A;
    k.attr("AU") = c::au;
    k.attr("YEAR") = c::year;
    k.attr("MYR") = c::Myr;
    k.attr("GYR") = c::Gyr;
    k.attr("GM_EARTH") = c::GM_earth;
    k.attr("M_EARTH") = c::M_earth;
    k.attr("R_EARTH") = c::R_earth;
    k.attr("R_EARTH_POLAR") = c::R_earth_polar;
    k.attr("GM_JUPITER") = c::GM_jupiter;
    k.attr("M_JUPITER") = c::M_jupiter;
    k.attr("R_JUPITER") = c::R_jupiter;
    k.attr("R_JUPITER_POLAR") = c::R_jupiter_polar;
    k.attr("GM_SUN") = c::GM_sun;
    k.attr("M_SUN") = c::M_sun;
    k.attr("R_SUN") = c::R_sun;
    k.attr("L_SUN") = c::L_sun;
}

} // namespace exosieve::bindings
