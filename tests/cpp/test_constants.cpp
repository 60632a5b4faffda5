#include <doctest/doctest.h>

#include "exosieve/constants.hpp"

using namespace exosieve::constants;

TEST_CASE("derived masses follow from the IAU 2015 B3 nominal GM and CODATA 2018 G") {
    // IAU 2015 B3 / CODATA 2018: M_E = 3.986004e14 / 6.67430e-11 = 5.9722e24 kg.
    CHECK(M_earth == doctest::Approx(5.9722e24).epsilon(1e-4));
    // Same for Jupiter (1.8981e27 kg) and the Sun (1.9884e30 kg).
    CHECK(M_jupiter == doctest::Approx(1.8981e27).epsilon(1e-4));
    CHECK(M_sun == doctest::Approx(1.9884e30).epsilon(1e-4));
}

TEST_CASE("exact defined constants") {
    CHECK(k_B == 1.380649e-23);  // SI 2019 definition
    CHECK(N_A == 6.02214076e23); // SI 2019 definition
    CHECK(au == 149597870700.0); // IAU 2012 B2
    CHECK(year == 31557600.0);   // Julian year, 365.25 d
    // R = N_A k_B = 8.314462618 J/mol/K (CODATA 2018).
    CHECK(N_A * k_B == doctest::Approx(8.314462618).epsilon(1e-10));
}
