#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/ocean.hpp"

using namespace exosieve;

namespace {

double one(void (*kernel)(ArrayArg, ArrayArg, ArrayArg, double*, std::size_t), double a,
           double radius, double density = default_water_density) {
    double out = 0.0;
    kernel({&a, 1}, {&radius, 1}, {&density, 1}, &out, 1);
    return out;
}

} // namespace

TEST_CASE("ocean: Earth's ocean as a global layer") {
    // Earth's oceans hold about 1.4e21 kg of water, a global layer of about 2.7 km (from
    // memory: within 3%), on the IAU 2015 nominal equatorial radius.
    const double mass = 1.4e21;
    const double molecules = mass / water_molecule_mass();
    const double depth = one(water_to_ocean_depth, molecules, constants::R_earth);
    CHECK(depth == doctest::Approx(2700.0).epsilon(0.03));
    // The layer's volume is its area times its depth: rho 4 pi R^2 d is the mass again.
    CHECK(default_water_density * 4.0 * constants::pi * constants::R_earth * constants::R_earth *
              depth ==
          doctest::Approx(mass).epsilon(1e-14));
    // Water: 18.015 u (IUPAC 2021 standard atomic weights, abridged: 2 x 1.008 + 15.999).
    CHECK(water_molecule_mass() == doctest::Approx((2 * 1.008 + 15.999) * constants::amu));
    // Two hydrogen atoms per molecule, and back.
    CHECK(one(ocean_depth_to_hydrogen, depth, constants::R_earth) ==
          doctest::Approx(2.0 * molecules).epsilon(1e-14));
    CHECK(one(hydrogen_to_ocean_depth, 2.0 * molecules, constants::R_earth) ==
          doctest::Approx(depth).epsilon(1e-14));
    CHECK(one(ocean_depth_to_water, depth, constants::R_earth) ==
          doctest::Approx(molecules).epsilon(1e-14));
}

TEST_CASE("ocean: scaling with radius and density, broadcasting, bad input") {
    const std::vector<double> depth{1.0, 10.0, 100.0};
    const double radius = 2.0 * constants::R_earth, density = 997.0;
    std::vector<double> out(3);
    ocean_depth_to_water({depth.data(), 3}, {&radius, 1}, {&density, 1}, out.data(), 3);
    const double at_earth = one(ocean_depth_to_water, 1.0, constants::R_earth);
    for (std::size_t i = 0; i < 3; ++i)
        CHECK(out[i] ==
              doctest::Approx(depth[i] * 4.0 * at_earth * density / 1000.0).epsilon(1e-14));
    CHECK(one(ocean_depth_to_water, 0.0, constants::R_earth) == 0.0);
    CHECK_THROWS_AS(one(ocean_depth_to_water, -1.0, constants::R_earth), InputError);
    CHECK_THROWS_AS(one(ocean_depth_to_water, 1.0, 0.0), InputError);
    CHECK_THROWS_AS(one(water_to_ocean_depth, 1.0, constants::R_earth, -1.0), InputError);
    CHECK_THROWS_WITH_AS(one(hydrogen_to_ocean_depth, NAN, constants::R_earth),
                         doctest::Contains("atoms"), InputError);
    double a = 1.0, r = constants::R_earth, d = 1000.0;
    std::vector<double> two(2);
    const std::vector<double> radii{r, r};
    CHECK_THROWS_AS(ocean_depth_to_water({&a, 1}, {radii.data(), 2}, {&d, 1}, two.data(), 3),
                    InputError);
}
