#include <doctest/doctest.h>

#include <cmath>
#include <string>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/stellar.hpp"

using namespace exosieve;
using constants::Myr;

TEST_CASE("the nominal solar luminosity at 1 au gives the nominal solar constant (IAU 2015 B3)") {
    // IAU 2015 Resolution B3: L_sun = 3.828e26 W and S_sun = 1361 W m^-2 are consistent at 1 au.
    CHECK(xuv_flux(constants::L_sun, constants::au) == doctest::Approx(1361.0).epsilon(1e-3));
}

TEST_CASE("the XUV history is saturated, continuous at t_sat, then a power law") {
    XuvHistory h;
    h.saturation_ratio = 1e-3;
    h.saturation_time = 100 * Myr;
    h.decay_index = 1.5;
    const Star star(constants::M_sun, constants::L_sun, h);
    const double saturated = 1e-3 * constants::L_sun;
    // Worked values of the defining formula.
    CHECK(star.xuv_luminosity(1 * Myr) == doctest::Approx(saturated).epsilon(1e-15));
    CHECK(star.xuv_luminosity(100 * Myr) == doctest::Approx(saturated).epsilon(1e-15));
    CHECK(star.xuv_luminosity(100 * Myr * (1 + 1e-12)) ==
          doctest::Approx(saturated).epsilon(1e-10));
    // (t / t_sat)^-1.5 at t = 10 t_sat: 10^-1.5.
    CHECK(star.xuv_luminosity(1000 * Myr) ==
          doctest::Approx(saturated * std::pow(10.0, -1.5)).epsilon(1e-14));
    // The inverse returns the age.
    CHECK(star.age_at_xuv_luminosity(star.xuv_luminosity(4567 * Myr)) ==
          doctest::Approx(4567 * Myr).epsilon(1e-12));
    CHECK(star.age_at_xuv_luminosity(2 * saturated) == 100 * Myr);
}

TEST_CASE("the default XUV decline reproduces the Sun in Time ratios (Ribas et al. 2005)") {
    // Ribas et al. (2005, ApJ 622, 680), abstract: the 1-1200 Angstrom flux of the Sun was about
    // 2.5 times the present value 2.5 Gyr ago and about 6 times 3.5 Gyr ago. Present solar age
    // 4.56 Gyr (from memory). The abstract rounds, hence a tolerance of 10 %.
    const Star sun(constants::M_sun, constants::L_sun);
    const double now = 4560 * Myr;
    CHECK(sun.xuv_luminosity(now - 2500 * Myr) / sun.xuv_luminosity(now) ==
          doctest::Approx(2.5).epsilon(0.10));
    CHECK(sun.xuv_luminosity(now - 3500 * Myr) / sun.xuv_luminosity(now) ==
          doctest::Approx(6.0).epsilon(0.10));
    // from memory: today's solar 1-1200 Angstrom flux at 1 au is about 4-5 erg cm^-2 s^-1
    // (Ribas et al. 2005), i.e. ~4.5e-3 W m^-2; the default saturation level and time are
    // trusted to factors of ~3 and ~2, so the check is to a factor 3.
    const double f = sun.xuv_luminosity(now) / (4 * constants::pi * constants::au * constants::au);
    CHECK(f > 4.5e-3 / 3);
    CHECK(f < 4.5e-3 * 3);
}

TEST_CASE("the planet's XUV flux is L_xuv / (4 pi a^2)") {
    const Star star(constants::M_sun, constants::L_sun);
    const Planet planet(constants::M_earth, constants::R_earth, 0.5 * constants::au, star);
    const double t = 2000 * Myr;
    CHECK(planet.xuv_flux(t) ==
          doctest::Approx(star.xuv_luminosity(t) /
                          (4 * constants::pi * 0.25 * constants::au * constants::au))
              .epsilon(1e-14));
    // Inverse-square law: half the distance, four times the flux.
    const Planet closer(constants::M_earth, constants::R_earth, 0.25 * constants::au, star);
    CHECK(closer.xuv_flux(t) == doctest::Approx(4 * planet.xuv_flux(t)).epsilon(1e-14));
}

TEST_CASE("stars and planets reject impossible values, naming them") {
    CHECK_THROWS_WITH_AS(Star(-1.0, constants::L_sun), doctest::Contains("star mass"), InputError);
    XuvHistory h;
    h.decay_index = std::nan("");
    CHECK_THROWS_WITH_AS(Star(constants::M_sun, constants::L_sun, h),
                         doctest::Contains("decay_index"), InputError);
    CHECK_THROWS_WITH_AS(Planet(constants::M_earth, 0.0), doctest::Contains("planet radius"),
                         InputError);
    const Planet lone(constants::M_earth, constants::R_earth);
    CHECK_THROWS_WITH_AS(lone.xuv_flux(Myr), doctest::Contains("semi_major_axis"), InputError);
}

TEST_CASE("temperature tables are linear between points and held outside them") {
    const auto h = ExobaseTemperature::table({10.0, 20.0, 40.0}, {1000.0, 2000.0, 1500.0});
    CHECK(h(0.0, 0.0) == 1000.0);
    CHECK(h(10.0, 0.0) == 1000.0);
    CHECK(h(15.0, 0.0) == doctest::Approx(1500.0).epsilon(1e-15));
    CHECK(h(30.0, 0.0) == doctest::Approx(1750.0).epsilon(1e-15));
    CHECK(h(40.0, 0.0) == 1500.0);
    CHECK(h(1e9, 0.0) == 1500.0);
    const Planet p(constants::M_earth, constants::R_earth);
    const auto stops = h.breakpoints(p, 12.0, 100.0);
    REQUIRE(stops.size() == 2);
    CHECK(stops[0] == 20.0);
    CHECK(stops[1] == 40.0);
}

TEST_CASE("temperature tables must increase in time and hold positive temperatures") {
    CHECK_THROWS_WITH_AS(ExobaseTemperature::table({0.0, 2.0, 1.0}, {900.0, 900.0, 900.0}),
                         doctest::Contains("strictly increasing"), InputError);
    CHECK_THROWS_WITH_AS(ExobaseTemperature::table({0.0, 1.0}, {900.0, -5.0}),
                         doctest::Contains("temperatures[1]"), InputError);
    CHECK_THROWS_AS(ExobaseTemperature::table({0.0, 1.0}, {900.0}), InputError);
}

TEST_CASE("the XUV power law is clamped and its clamp switches are breakpoints") {
    const auto h = ExobaseTemperature::xuv_power_law(1000.0, 1.0, 0.5, 600.0, 3000.0);
    CHECK(h(0.0, 1.0) == doctest::Approx(1000.0).epsilon(1e-15));
    CHECK(h(0.0, 4.0) == doctest::Approx(2000.0).epsilon(1e-15)); // 1000 * 4^0.5
    CHECK(h(0.0, 100.0) == 3000.0);                               // clamped above
    CHECK(h(0.0, 0.01) == 600.0);                                 // clamped below
    XuvHistory x;
    x.saturation_ratio = 1e-3;
    x.saturation_time = 100 * Myr;
    x.decay_index = 1.2;
    const Star star(constants::M_sun, constants::L_sun, x);
    const Planet p(constants::M_earth, constants::R_earth, constants::au, star);
    const auto stops = h.breakpoints(p, 1 * Myr, 1e5 * Myr);
    REQUIRE(!stops.empty());
    for (double t : stops) {
        const double T = 1000.0 * std::sqrt(p.xuv_flux(t) / 1.0);
        CHECK((std::abs(T - 600.0) < 1e-8 * 600.0 || std::abs(T - 3000.0) < 1e-8 * 3000.0));
    }
    CHECK_THROWS_AS(ExobaseTemperature::xuv_power_law(1000.0, 1.0, 0.5, 900.0, 800.0), InputError);
}

TEST_CASE("a temperature callable that returns NaN is a clear error") {
    const auto h = ExobaseTemperature::callable([](double) { return std::nan(""); }, "broken");
    CHECK_THROWS_WITH_AS(h(5.0, 0.0), doctest::Contains("callable returned nan"), InputError);
    CHECK(!h.thread_safe());
}
