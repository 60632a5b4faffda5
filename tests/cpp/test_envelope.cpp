#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/envelope.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/stellar.hpp"

using namespace exosieve;
using constants::G;
using constants::Gyr;
using constants::M_earth;
using constants::Myr;
using constants::pi;
using constants::R_earth;

TEST_CASE("core radius R_E (M/M_E)^0.25 (Lopez & Fortney 2014, from memory)") {
    CHECK(core_radius(M_earth) == doctest::Approx(R_earth).epsilon(1e-15));
    CHECK(core_radius(16 * M_earth) == doctest::Approx(2 * R_earth).epsilon(1e-15));
    CHECK_THROWS_WITH_AS(core_radius(-1.0), doctest::Contains("core_mass must be finite and > 0"),
                         InputError);
}

TEST_CASE("envelope radius: the Lopez & Fortney (2014) power law (coefficients from memory)") {
    // The fit's reference point: 2.06 R_E at 1 M_E, 5 %, Earth's flux, 5 Gyr.
    CHECK(envelope_radius(0.05, M_earth, solar_irradiance, 5 * Gyr) ==
          doctest::Approx(2.06 * R_earth).epsilon(1e-14));
    const double base = envelope_radius(0.02, 5 * M_earth, 100 * solar_irradiance, 1 * Gyr);
    // Exponents by finite ratios: -0.21 (mass), 0.59 (fraction), 0.044 (flux), -0.11 (age).
    auto ratio = [&](double f, double m, double s, double t) {
        return std::log(envelope_radius(f, m, s, t) / base) / std::log(2.0);
    };
    CHECK(ratio(0.02, 10 * M_earth, 100 * solar_irradiance, 1 * Gyr) ==
          doctest::Approx(-0.21).epsilon(1e-12));
    CHECK(ratio(0.04, 5 * M_earth, 100 * solar_irradiance, 1 * Gyr) ==
          doctest::Approx(0.59).epsilon(1e-12));
    CHECK(ratio(0.02, 5 * M_earth, 200 * solar_irradiance, 1 * Gyr) ==
          doctest::Approx(0.044).epsilon(1e-12));
    CHECK(ratio(0.02, 5 * M_earth, 100 * solar_irradiance, 2 * Gyr) ==
          doctest::Approx(-0.11).epsilon(1e-12));
    CHECK(std::log(envelope_radius(0.02, 5 * M_earth, 100 * solar_irradiance, 2 * Gyr,
                                   EnvelopeOpacity::Enhanced) /
                   envelope_radius(0.02, 5 * M_earth, 100 * solar_irradiance, 1 * Gyr,
                                   EnvelopeOpacity::Enhanced)) /
              std::log(2.0) ==
          doctest::Approx(-0.18).epsilon(1e-12));
    CHECK(envelope_radius(0.0, 5 * M_earth, solar_irradiance, Gyr) == 0.0);
    // Planet radius: core plus envelope, with M_p = M_core / (1 - f).
    const double mc = 6 * M_earth;
    CHECK(envelope_planet_radius(mc, 0.03, 50 * solar_irradiance, 3 * Gyr) ==
          doctest::Approx(core_radius(mc) +
                          envelope_radius(0.03, mc / 0.97, 50 * solar_irradiance, 3 * Gyr))
              .epsilon(1e-15));
    CHECK_THROWS_WITH_AS(envelope_radius(1.0, M_earth, 1.0, 1.0),
                         doctest::Contains("envelope_fraction must be < 1, got 1"), InputError);
    CHECK_THROWS_WITH_AS(envelope_radius(0.1, M_earth, 0.0, 1.0),
                         doctest::Contains("incident_flux must be finite and > 0, got 0"),
                         InputError);
}

namespace {

// The same equations, integrated by a classical fixed-step Runge–Kutta 4 (an independent
// integrator): returns the time the envelope reaches zero, by linear interpolation.
double rk4_stripping_time(double mc, double f0, double a, const Star& star, double t0, double t1,
                          double eta, int n) {
    const double sphere = 4 * pi * a * a;
    const double fbol = star.luminosity() / sphere;
    auto rate = [&](double m_env, double t) {
        const double m = m_env > 0 ? m_env : 0.0;
        const double mp = mc + m;
        const double rp = core_radius(mc) + envelope_radius(m / mp, mp, fbol, t);
        return -eta * pi * rp * rp * rp * (star.xuv_luminosity(t) / sphere) / (G * mp);
    };
    double m = mc * f0 / (1 - f0), t = t0;
    const double h = (t1 - t0) / n;
    for (int i = 0; i < n; ++i) {
        const double k1 = rate(m, t), k2 = rate(m + 0.5 * h * k1, t + 0.5 * h);
        const double k3 = rate(m + 0.5 * h * k2, t + 0.5 * h), k4 = rate(m + h * k3, t + h);
        const double next = m + h / 6 * (k1 + 2 * k2 + 2 * k3 + k4);
        if (next <= 0)
            return t + h * m / (m - next);
        m = next;
        t += h;
    }
    return NAN;
}

} // namespace

TEST_CASE("envelope loss: stripping time against an independent fixed-step RK4") {
    // An invented sub-Neptune: 4 Earth-mass core, 1 % envelope, 0.05 AU from a Sun-like star,
    // saturated until 100 Myr. Starting after saturation keeps the RK4 step off the kink.
    XuvHistory xuv;
    xuv.saturation_ratio = 1e-3;
    const Star star(constants::M_sun, constants::L_sun, xuv);
    const double mc = 4 * M_earth, f0 = 0.01, a = 0.05 * constants::au;
    EnvelopeLossOptions options;
    options.efficiency = 0.1;
    std::vector<double> times = {150 * Myr, 500 * Myr, 10 * Gyr};
    const auto result = integrate_envelope_loss(mc, f0, a, star, times, options);
    REQUIRE(result.stripped);
    const double reference = rk4_stripping_time(mc, f0, a, star, 150 * Myr, 10 * Gyr, 0.1, 200000);
    MESSAGE("stripping time " << result.stripping_time / Myr << " Myr, relative difference "
                              << (result.stripping_time - reference) / reference
                              << " from RK4; steps " << result.steps);
    CHECK(result.stripping_time == doctest::Approx(reference).epsilon(1e-6));
    CHECK(result.envelope_mass[0] == doctest::Approx(mc * f0 / (1 - f0)));
    CHECK(result.envelope_mass.back() == 0.0);
    CHECK(result.radius.back() == doctest::Approx(core_radius(mc)).epsilon(1e-15));
    CHECK(result.mass_loss_rate.back() == 0.0);
    // A heavier envelope at a wider orbit is kept: no event, mass still decreasing.
    const auto kept = integrate_envelope_loss(mc, 0.05, 1.0 * constants::au, star, times, options);
    CHECK_FALSE(kept.stripped);
    CHECK(std::isnan(kept.stripping_time));
    CHECK(kept.envelope_mass[2] < kept.envelope_mass[1]);
    CHECK(kept.envelope_mass[1] < kept.envelope_mass[0]);
    CHECK(kept.radius[2] < kept.radius[0]);
    // Crossing the end of saturation: the same planet from 10 Myr (the kink inside the span).
    std::vector<double> early = {10 * Myr, 10 * Gyr};
    const auto crossing = integrate_envelope_loss(mc, 0.2, a, star, early, options);
    CHECK(crossing.stripped);
    CHECK(crossing.stripping_time > 10 * Myr);
    CHECK_THROWS_WITH_AS(integrate_envelope_loss(mc, f0, a, star, {2.0, 1.0}, options),
                         doctest::Contains("times must be strictly ascending"), InputError);
    options.efficiency = 2.0;
    CHECK_THROWS_WITH_AS(integrate_envelope_loss(mc, f0, a, star, times, options),
                         doctest::Contains("efficiency must be <= 1, got 2"), InputError);
}
