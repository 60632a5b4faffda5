#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/outflow.hpp"

using namespace exosieve;
using constants::G;
using constants::k_B;
using constants::pi;

namespace {
const double kE = std::exp(1.0);
double rel(double a, double b) {
    return std::fabs(a - b) / std::fabs(b);
}
} // namespace

TEST_CASE("Lambert W at its exact values (worked analytic solutions)") {
    // w e^w = x: 0 e^0 = 0, 1 e^1 = e, (-1) e^-1 = -1/e, (-ln 2) e^(-ln 2) = -ln(2)/2,
    // (-2 ln 2) e^(-2 ln 2) = -ln(2)/2.
    CHECK(lambert_w0(0.0) == 0.0);
    CHECK(lambert_w0(kE) == doctest::Approx(1.0).epsilon(1e-15));
    CHECK(lambert_w0(-1.0 / kE) == doctest::Approx(-1.0).epsilon(1e-8));
    CHECK(lambert_wm1(-1.0 / kE) == doctest::Approx(-1.0).epsilon(1e-8));
    const double ln2 = std::log(2.0);
    CHECK(lambert_w0(-ln2 / 2) == doctest::Approx(-ln2).epsilon(1e-15));
    CHECK(lambert_wm1(-ln2 / 2) == doctest::Approx(-2 * ln2).epsilon(1e-15));
    // The omega constant W0(1) = 0.5671432904097838729999686622... (OEIS A030178).
    CHECK(lambert_w0(1.0) == doctest::Approx(0.5671432904097838).epsilon(1e-15));
    CHECK(lambert_w(1.0, 0) == lambert_w0(1.0));
    CHECK(lambert_w(-0.2, -1) == lambert_wm1(-0.2));
}

TEST_CASE("Lambert W solves w e^w = x on both real branches") {
    std::vector<double> xs;
    for (double x = -0.3678794; x < -1e-300; x /= 1.9)
        xs.push_back(x);
    for (double x = 1e-300; x < 1e300; x *= 3.1)
        xs.push_back(x);
    for (double x : xs) {
        const double w = lambert_w0(x);
        CHECK(w >= -1.0);
        if (x > 1e10) // the residual of w e^w is limited to ~eps w there
            CHECK(w + std::log(w) == doctest::Approx(std::log(x)).epsilon(1e-15));
        else
            CHECK(w * std::exp(w) == doctest::Approx(x).epsilon(2e-14));
    }
    for (double x = -0.36787944; x < -1e-300; x /= 1.9) {
        const double w = lambert_wm1(x);
        CHECK(w <= -1.0);
        CHECK(w * std::exp(w) == doctest::Approx(x).epsilon(2e-14));
    }
    // The log form: W_-1(-exp(L)) for L far below the double range of exp.
    for (double l : {-1.0, -1.001, -1.5, -3.0, -40.0, -700.0, -1e4, -1e200}) {
        const double w = lambert_wm1_exp(l);
        CHECK(w <= -1.0);
        CHECK(w + std::log(-w) == doctest::Approx(l).epsilon(1e-15));
        if (l > -700.0)
            CHECK(w == doctest::Approx(lambert_wm1(-std::exp(l))).epsilon(1e-13));
    }
    CHECK_THROWS_WITH_AS(lambert_w0(-0.5), doctest::Contains("x must be >= -1/e"), InputError);
    CHECK_THROWS_WITH_AS(lambert_wm1(0.5), doctest::Contains("x must be < 0"), InputError);
    CHECK_THROWS_WITH_AS(lambert_w(0.5, 1), doctest::Contains("branch must be 0 or -1, got 1"),
                         InputError);
    CHECK_THROWS_WITH_AS(lambert_w0(std::nan("")), doctest::Contains("got nan"), InputError);
}

TEST_CASE("Parker wind: the transonic solution of u^2 - ln u^2 = 4 ln x + 4/x - 3") {
    // Parker (1958); Cranmer (2004), eq. for the critical solution.
    CHECK(parker_mach_number(1.0) == 1.0);
    double previous = 0.0;
    for (double x = 0.05; x < 1e6; x *= 1.07) {
        const double u = parker_mach_number(x);
        CHECK(u > previous); // accelerating everywhere
        previous = u;
        CHECK((x < 1.0 ? u < 1.0 : u > 1.0));
        const double lhs = u * u - std::log(u * u);
        const double rhs = 4.0 * std::log(x) + 4.0 / x - 3.0;
        CHECK(lhs == doctest::Approx(rhs).epsilon(1e-13));
    }
    // Through the sonic point: u = 1 + (x - 1) + O((x-1)^2) (the slope du/dx = 1 of the
    // critical solution, from the wind equation by l'Hopital's rule).
    for (double d : {1e-3, 1e-5, 1e-7}) {
        CHECK(parker_mach_number(1.0 + d) - 1.0 == doctest::Approx(d).epsilon(2 * d + 1e-8));
        CHECK(1.0 - parker_mach_number(1.0 - d) == doctest::Approx(d).epsilon(2 * d + 1e-8));
    }
    // Deep below the sonic point the flow is hydrostatic: u -> x^-2 exp(3/2 - 2/x).
    for (double x : {0.05, 0.02, 0.01, 0.001}) {
        const double expected = std::exp(1.5 - 2.0 / x) / (x * x);
        CHECK(parker_mach_number(x) == doctest::Approx(expected).epsilon(1e-12));
    }
    CHECK_THROWS_WITH_AS(parker_mach_number(-1.0), doctest::Contains("radius_ratio"), InputError);
}

TEST_CASE("Parker wind: sound speed, sonic radius, constant mass flux") {
    const double t = 8000.0, m = 1.3 * constants::amu, mp = 8.0 * constants::M_earth;
    const double cs = isothermal_sound_speed(t, m);
    CHECK(cs == doctest::Approx(std::sqrt(k_B * t / m)));
    const double rs = sonic_radius(t, m, mp);
    CHECK(rs == doctest::Approx(G * mp / (2 * cs * cs)).epsilon(1e-15));
    CHECK(parker_wind_speed(rs, t, m, mp) == doctest::Approx(cs).epsilon(1e-15));
    // Mass conservation: 4 pi r^2 n(r) m v(r) is the same at every radius.
    const double r0 = 0.2 * rs, n0 = 1e18;
    const double mdot = parker_mass_loss(r0, n0, t, m, mp);
    for (double r : {0.3 * rs, rs, 4.0 * rs, 100.0 * rs}) {
        const double n = parker_density(r, r0, n0, t, m, mp);
        CHECK(4 * pi * r * r * n * m * parker_wind_speed(r, t, m, mp) ==
              doctest::Approx(mdot).epsilon(1e-13));
    }
    CHECK(parker_mass_loss(r0, 0.0, t, m, mp) == 0.0);
    CHECK_THROWS_WITH_AS(parker_mass_loss(r0, -1.0, t, m, mp),
                         doctest::Contains("base_density must be finite and >= 0, got -1"),
                         InputError);
    CHECK_THROWS_WITH_AS(parker_mass_loss(r0, n0, 0.0, m, mp),
                         doctest::Contains("temperature must be finite and > 0, got 0"),
                         InputError);
}

TEST_CASE("Recombination-limited escape: F^(1/2), the hydrostatic base, the transition") {
    // Murray-Clay, Chiang & Murray (2009): rate ~ F^(1/2); energy-limited ~ F.
    const double mp = 0.7 * constants::M_jupiter, rp = 1e8;
    const double f = 10.0;
    const double r1 = recombination_limited_mass_loss(f, mp, rp);
    CHECK(recombination_limited_mass_loss(4 * f, mp, rp) / r1 == doctest::Approx(2.0));
    CHECK(recombination_limited_mass_loss(0.0, mp, rp) == 0.0);
    // The formula is the transonic wind with a hydrostatic subsonic layer; the exact Parker
    // solution from the same base gives exp(-1/2) of it for a deep base (worked analytic
    // limit: rho_s/rho_0 = x0^2 u(x0) -> exp(3/2 - 2/x0) against exp(2 - 2/x0)).
    const double t = 1e4, alpha = RecombinationDefaults::recombination_coefficient;
    const double e0 = RecombinationDefaults::photon_energy;
    const double cs2 = 2 * k_B * t / hydrogen_atom_mass;
    const double h = cs2 * rp * rp / (G * mp);
    const double n_plus = std::sqrt(f / (e0 * alpha * h));
    const double mu = hydrogen_atom_mass / 2; // mean particle mass of ionised hydrogen
    const double parker = parker_mass_loss(rp, n_plus, t, mu, mp) * 2; // ion mass m_H = 2 mu
    const double x0 = rp / sonic_radius(t, mu, mp);
    const double d0 = std::exp(3.0 - 4.0 / x0) / std::pow(x0, 4); // the O(D) correction
    CHECK(parker / r1 == doctest::Approx(std::exp(-0.5)).epsilon(d0));
    CHECK(parker / r1 > std::exp(-0.5));
    // The transition flux: the two rates are equal there; the smaller applies on either side.
    const double eta = 0.3;
    const double ft = recombination_transition_flux(eta, rp, rp, mp);
    CHECK(energy_limited_mass_loss(eta, rp, rp, ft, mp) ==
          doctest::Approx(recombination_limited_mass_loss(ft, mp, rp)).epsilon(1e-12));
    CHECK(xuv_driven_mass_loss(eta, rp, rp, ft / 100, mp) ==
          energy_limited_mass_loss(eta, rp, rp, ft / 100, mp));
    CHECK(xuv_driven_mass_loss(eta, rp, rp, ft * 100, mp) ==
          recombination_limited_mass_loss(ft * 100, mp, rp));
    // Continuous where the sonic point reaches the base.
    const double rs = G * mp / (2 * cs2);
    CHECK(recombination_limited_mass_loss(f, mp, rs * (1 - 1e-9)) ==
          doctest::Approx(recombination_limited_mass_loss(f, mp, rs * (1 + 1e-9))).epsilon(1e-7));
    CHECK_THROWS_WITH_AS(recombination_limited_mass_loss(-1.0, mp, rp),
                         doctest::Contains("xuv_flux must be finite and >= 0, got -1"), InputError);
    CHECK_THROWS_WITH_AS(recombination_limited_mass_loss(f, mp, rp, 1e4, 0.0),
                         doctest::Contains("recombination_coefficient"), InputError);
}

TEST_CASE("XUV absorption radius: optical depth one (worked analytic solution)") {
    const double r0 = 7e6, n0 = 1e19, h = 2e5, sigma = 1e-22;
    const double r = xuv_absorption_radius(r0, n0, h, sigma);
    CHECK(sigma * n0 * h * std::exp(-(r - r0) / h) == doctest::Approx(1.0).epsilon(1e-13));
    const double b = xuv_absorption_radius(r0, n0, h, sigma, true);
    CHECK(b > r);
    CHECK(sigma * n0 * h * std::exp(-(b - r0) / h) * std::sqrt(2 * pi * b / h) ==
          doctest::Approx(1.0).epsilon(1e-12));
    // r0/H = 3e4: exp(-2 r0/H) underflows, the log form of W_-1 carries it.
    const double b2 = xuv_absorption_radius(r0, n0, r0 / 3e4, sigma, true);
    CHECK(sigma * n0 * (r0 / 3e4) * std::exp(-(b2 - r0) / (r0 / 3e4)) *
              std::sqrt(2 * pi * b2 / (r0 / 3e4)) ==
          doctest::Approx(1.0).epsilon(1e-10));
    // An optically thin base absorbs at the base.
    CHECK(xuv_absorption_radius(r0, 1.0, h, sigma) == r0);
    CHECK(xuv_absorption_radius(r0, 0.0, h, sigma, true) == r0);
    CHECK(scale_height(1000.0, 2 * constants::amu, constants::M_earth, constants::R_earth) ==
          doctest::Approx(k_B * 1000.0 * constants::R_earth * constants::R_earth /
                          (2 * constants::amu * constants::GM_earth)));
    CHECK_THROWS_WITH_AS(xuv_absorption_radius(r0, n0, -1.0, sigma),
                         doctest::Contains("scale_height must be finite and > 0, got -1"),
                         InputError);
}
