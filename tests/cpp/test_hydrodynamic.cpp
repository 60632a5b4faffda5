#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/hydrodynamic.hpp"

using namespace exosieve;
using constants::amu;
using constants::G;
using constants::k_B;

TEST_CASE("regimes at the published thresholds (Volkov et al. 2011: ~6, ~3, ~2.1)") {
    // Volkov et al. (2011, ApJL 729, L24): Jeans-like above ~6, enhanced molecule-by-molecule
    // escape between ~3 and ~6, transition between ~2.1 and ~3, hydrodynamic below ~2.1.
    CHECK(classify_regime(10.0) == Regime::Jeans);
    CHECK(classify_regime(6.0 + 1e-12) == Regime::Jeans);
    CHECK(classify_regime(6.0) == Regime::EnhancedJeans);
    CHECK(classify_regime(4.5) == Regime::EnhancedJeans);
    CHECK(classify_regime(3.0 + 1e-12) == Regime::EnhancedJeans);
    CHECK(classify_regime(3.0) == Regime::Transition);
    CHECK(classify_regime(2.1 + 1e-12) == Regime::Transition);
    CHECK(classify_regime(2.1) == Regime::Hydrodynamic);
    CHECK(classify_regime(0.5) == Regime::Hydrodynamic);
    CHECK(std::string(regime_name(Regime::Transition)) == "transition");
    // Thresholds are parameters.
    RegimeThresholds t;
    t.enhanced = 10.0;
    t.transition = 5.0;
    t.hydrodynamic = 1.0;
    CHECK(classify_regime(8.0, t) == Regime::EnhancedJeans);
    CHECK(classify_regime(1.5, t) == Regime::Transition);
    t.transition = 0.5;
    CHECK_THROWS_WITH_AS(t.validate(), doctest::Contains("hydrodynamic < transition"), InputError);
}

TEST_CASE("Roche-lobe factor limits (Erkaev et al. 2007)") {
    // Worked analytic limits of K(xi) = 1 - 3/(2 xi) + 1/(2 xi^3):
    // K -> 1 far inside the lobe, with 1 - K ~ 3/(2 xi); K -> 0 when the lobe reaches the planet.
    CHECK(roche_lobe_factor(1.0 + 1e-9) == doctest::Approx(0.0).epsilon(1e-8));
    CHECK(roche_lobe_factor(1e6) == doctest::Approx(1.0).epsilon(2e-6));
    const double xi = 1e4;
    // (the next term, -1/(2 xi^3), changes the ratio by 1/(3 xi^2) = 3.3e-9)
    CHECK((1.0 - roche_lobe_factor(xi)) / (1.5 / xi) == doctest::Approx(1.0).epsilon(1e-8));
    // xi = 2: 1 - 3/4 + 1/16 = 0.3125 exactly.
    CHECK(roche_lobe_factor(2.0) == 0.3125);
    // K rises monotonically between the limits.
    double previous = 0.0;
    for (double x = 1.01; x < 100.0; x *= 1.1) {
        CHECK(roche_lobe_factor(x) > previous);
        previous = roche_lobe_factor(x);
    }
    CHECK_THROWS_WITH_AS(roche_lobe_factor(0.9), doctest::Contains("xi must be > 1"), InputError);
}

TEST_CASE("Roche-lobe ratio of the Earth: its Hill radius is ~1.5e9 m (common practice)") {
    // Hill radius a (M/(3 M_sun))^(1/3) of the Earth: about 1.5 million km (common practice).
    const double xi =
        roche_lobe_ratio(constants::M_earth, constants::M_sun, constants::au, constants::R_earth);
    CHECK(xi * constants::R_earth == doctest::Approx(1.4966e9).epsilon(2e-3));
}

TEST_CASE("energy-limited loss: worked example with its arithmetic") {
    // Invented planet: M_p = 5 M_earth, R_p = R_xuv = 2 R_earth, F_xuv = 10 W m^-2, eta = 0.15.
    //   R_p^3            = (1.27562e7 m)^3                  = 2.075697e21 m^3
    //   eta pi R_p^3 F   = 0.15 * 3.141593 * 2.075697e21 * 10 = 9.781492e21 W m
    //   G M_p            = 5 * 3.986004e14 (IAU 2015 B3)     = 1.993002e15 m^3 s^-2
    //   dM/dt            = 9.781492e21 / 1.993002e15         = 4.907919e6 kg s^-1
    const double Mp = 5 * constants::M_earth, Rp = 2 * constants::R_earth;
    CHECK(energy_limited_mass_loss(0.15, Rp, Rp, 10.0, Mp) ==
          doctest::Approx(4.907919e6).epsilon(1e-6));
    // With K(xi = 2) = 0.3125 the loss grows by 1/0.3125 = 3.2.
    CHECK(energy_limited_mass_loss(0.15, Rp, Rp, 10.0, Mp, roche_lobe_factor(2.0)) ==
          doctest::Approx(3.2 * 4.907919e6).epsilon(1e-6));
    // It scales as R_xuv^2.
    CHECK(energy_limited_mass_loss(0.15, Rp, 1.5 * Rp, 10.0, Mp) ==
          doctest::Approx(2.25 * 4.907919e6).epsilon(1e-6));
    CHECK_THROWS_WITH_AS(energy_limited_mass_loss(1.5, Rp, Rp, 10.0, Mp),
                         doctest::Contains("efficiency"), InputError);
}

TEST_CASE("crossover mass and dragged flux (Hunten, Pepin & Walker 1987)") {
    const double m1 = 1.008 * amu, T = 1000.0, b = 1e21, g = 9.8, x1 = 0.9, F1 = 1e16;
    const double mc = crossover_mass(m1, T, F1, b, g, x1);
    // m_c = m_1 + k T F_1 / (b g x_1), worked by hand:
    //   k T F_1 = 1.380649e-23 * 1000 * 1e16 = 1.380649e-4;  b g x_1 = 1e21 * 9.8 * 0.9 = 8.82e21
    //   m_c - m_1 = 1.565362e-26 kg = 9.4267 u
    CHECK((mc - m1) == doctest::Approx(1.380649e-4 / 8.82e21).epsilon(1e-12));
    CHECK((mc - m1) / amu == doctest::Approx(9.4267).epsilon(1e-4));
    // A species at the crossover mass is not dragged; a light one almost follows the flow.
    CHECK(dragged_flux(mc, 0.1, m1, F1, x1, mc) == 0.0);
    CHECK(dragged_flux(2 * mc, 0.1, m1, F1, x1, mc) == 0.0);
    const double m2 = 4.0026 * amu;
    CHECK(dragged_flux(m2, 0.1, m1, F1, x1, mc) ==
          doctest::Approx(0.1 / 0.9 * F1 * (mc - m2) / (mc - m1)).epsilon(1e-14));
    // Limit of a very strong flow (m_c -> infinity): F_i -> (x_i / x_1) F_1.
    const double F_big = 1e30;
    const double mc_big = crossover_mass(m1, T, F_big, b, g, x1);
    CHECK(dragged_flux(m2, 0.1, m1, F_big, x1, mc_big) ==
          doctest::Approx(0.1 / 0.9 * F_big).epsilon(1e-9));
}

TEST_CASE("sharing an energy-limited mass loss conserves mass and matches the HPW fluxes") {
    const double Mp = constants::M_earth, T = 2000.0;
    const std::vector<double> mass = {1.008 * amu, 4.0026 * amu, 15.999 * amu, 39.95 * amu};
    const std::vector<double> x = {0.7, 0.2, 0.09, 0.01};
    const std::vector<double> b = {0.0, 1.5e21, 1.0e21, 0.8e21};
    std::vector<double> rates(4);
    for (double mdot : {1e3, 1e5, 1e7, 1e9}) {
        CAPTURE(mdot);
        partition_mass_loss(mdot, T, Mp, 0, mass.data(), x.data(), b.data(), 4, rates.data());
        double total = 0.0;
        for (int i = 0; i < 4; ++i)
            total += mass[i] * rates[i];
        CHECK(total == doctest::Approx(mdot).epsilon(1e-12)); // conservation of mass
        // Each dragged rate agrees with the per-area HPW formula at any radius (here R_earth).
        const double r = constants::R_earth, area = 4 * constants::pi * r * r, g = G * Mp / (r * r);
        const double F1 = rates[0] / area;
        for (int i = 1; i < 4; ++i) {
            const double mc = crossover_mass(mass[0], T, F1, b[i], g, x[0]);
            CHECK(rates[i] ==
                  doctest::Approx(area * dragged_flux(mass[i], x[i], mass[0], F1, x[0], mc))
                      .epsilon(1e-9)
                      .scale(1e-300));
        }
    }
    // Without drag all the mass leaves as the light species.
    const std::vector<double> none = {0.0, 0.0, 0.0, 0.0};
    partition_mass_loss(1e6, T, Mp, 0, mass.data(), x.data(), none.data(), 4, rates.data());
    CHECK(rates[0] == doctest::Approx(1e6 / mass[0]).epsilon(1e-15));
    CHECK(rates[1] == 0.0);
}

TEST_CASE("array forms of the hydrodynamic helpers: the scalar forms element by element") {
    // Invented planets: the array form of each helper gives, for every element, exactly what
    // the scalar form gives, with length-1 arguments broadcast.
    const double Mp[] = {0.5 * constants::M_earth, constants::M_earth, 5 * constants::M_earth};
    const double Rp[] = {0.8 * constants::R_earth, constants::R_earth, 2 * constants::R_earth};
    const double Ms = constants::M_sun, a = constants::au, eta = 0.15, F = 10.0, K = 0.5;
    double out[3];
    roche_lobe_ratio(ArrayArg{Mp, 3}, ArrayArg{&Ms, 1}, ArrayArg{&a, 1}, ArrayArg{Rp, 3}, out, 3);
    for (int i = 0; i < 3; ++i)
        CHECK(out[i] == roche_lobe_ratio(Mp[i], Ms, a, Rp[i]));
    energy_limited_mass_loss(ArrayArg{&eta, 1}, ArrayArg{Rp, 3}, ArrayArg{Rp, 3}, ArrayArg{&F, 1},
                             ArrayArg{Mp, 3}, ArrayArg{&K, 1}, out, 3);
    for (int i = 0; i < 3; ++i)
        CHECK(out[i] == energy_limited_mass_loss(eta, Rp[i], Rp[i], F, Mp[i], K));
    const double m1 = 1.008 * amu, T = 1000.0, b = 1e21, g = 9.8, x1 = 0.9;
    const double F1[] = {0.0, 1e14, 1e16};
    crossover_mass(ArrayArg{&m1, 1}, ArrayArg{&T, 1}, ArrayArg{F1, 3}, ArrayArg{&b, 1},
                   ArrayArg{&g, 1}, ArrayArg{&x1, 1}, out, 3);
    for (int i = 0; i < 3; ++i)
        CHECK(out[i] == crossover_mass(m1, T, F1[i], b, g, x1));
    const double mass[] = {2 * amu, 4 * amu, 40 * amu}, x = 0.05, mc = 10 * amu, f = 1e16;
    dragged_flux(ArrayArg{mass, 3}, ArrayArg{&x, 1}, ArrayArg{&m1, 1}, ArrayArg{&f, 1},
                 ArrayArg{&x1, 1}, ArrayArg{&mc, 1}, out, 3);
    for (int i = 0; i < 3; ++i)
        CHECK(out[i] == dragged_flux(mass[i], x, m1, f, x1, mc));
    CHECK(out[2] == 0.0); // heavier than the crossover mass: not dragged
    // A bad element is named, with its index, before anything is computed.
    const double efficiencies[] = {0.1, 0.2, 1.5};
    CHECK_THROWS_WITH_AS(
        energy_limited_mass_loss(ArrayArg{efficiencies, 3}, ArrayArg{Rp, 3}, ArrayArg{Rp, 3},
                                 ArrayArg{&F, 1}, ArrayArg{Mp, 3}, ArrayArg{&K, 1}, out, 3),
        doctest::Contains("efficiency must be <= 1, got 1.5 (element 2)"), InputError);
    const double fractions[] = {0.5, -0.5, 0.2};
    CHECK_THROWS_WITH_AS(dragged_flux(ArrayArg{mass, 3}, ArrayArg{fractions, 3}, ArrayArg{&m1, 1},
                                      ArrayArg{&f, 1}, ArrayArg{&x1, 1}, ArrayArg{&mc, 1}, out, 3),
                         doctest::Contains("mole_fraction must be finite and >= 0, got -0.5 "
                                           "(element 1)"),
                         InputError);
    CHECK_THROWS_AS(roche_lobe_ratio(ArrayArg{Mp, 3}, ArrayArg{&Ms, 1}, ArrayArg{&a, 1},
                                     ArrayArg{Rp, 2}, out, 3),
                    InputError); // lengths that do not broadcast
}
