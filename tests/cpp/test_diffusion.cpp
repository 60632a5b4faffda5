#include <doctest/doctest.h>

#include <cmath>
#include <string>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/diffusion.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/species.hpp"

using namespace exosieve;
using constants::amu;
using constants::G;
using constants::k_B;

namespace {
constexpr double atm = 101325.0; // Pa, standard atmosphere (exact by definition)

// D [m^2 s^-1] at pressure p [Pa] from b = n D with n = p / (k T).
double coefficient_at(double b, double temperature, double pressure) {
    return b * k_B * temperature / pressure;
}
} // namespace

TEST_CASE("Neufeld fit reproduces the tabulated collision integral") {
    // Hirschfelder, Curtiss & Bird (1954) table of Omega^(1,1)* (from memory). Mid-range the
    // fit matches to about 0.1 %; at the ends of the fit range (T* = 0.3 and 100) the recalled
    // values differ by up to 0.7 %, so those get a 1 % tolerance.
    const double table[][3] = {{0.3, 2.662, 1e-2},   {0.5, 2.066, 2e-3},  {1.0, 1.439, 2e-3},
                               {2.0, 1.075, 2e-3},   {5.0, 0.8422, 2e-3}, {10.0, 0.7424, 2e-3},
                               {100.0, 0.5130, 1e-2}};
    for (const auto& row : table) {
        CAPTURE(row[0]);
        CHECK(neufeld_collision_integral(row[0]) == doctest::Approx(row[1]).epsilon(row[2]));
    }
    // Monotonic decrease over the fit range.
    for (double t = 0.3; t < 100.0; t *= 1.1)
        CHECK(neufeld_collision_integral(t * 1.1) < neufeld_collision_integral(t));
}

TEST_CASE("Chapman–Enskog b agrees with the textbook D formula") {
    // Poling, Prausnitz & O'Connell (2001) eq. 11-3.2: D [cm^2/s] =
    // 0.00266 T^1.5 / (P[bar] M_AB^0.5 sigma[A]^2 Omega_D), M_AB = 2 / (1/M_A + 1/M_B) [g/mol].
    // The constant 0.00266 is rounded to three digits, hence the 0.5 % tolerance.
    const Species& a = species("He");
    const Species& b = species("N2");
    const double T = 350.0;
    const double sigma = 0.5 * (a.lj_diameter + b.lj_diameter) * 1e10;
    const double omega =
        neufeld_collision_integral(T / std::sqrt(a.lj_well_depth * b.lj_well_depth));
    const double m_ab = 2.0 / (1.0 / a.mass_u() + 1.0 / b.mass_u());
    const double d_cm2 =
        0.00266 * std::pow(T, 1.5) / (1.01325 * std::sqrt(m_ab) * sigma * sigma * omega);
    const double d = coefficient_at(chapman_enskog_diffusion_parameter(a, b, T), T, atm);
    CHECK(d * 1e4 == doctest::Approx(d_cm2).epsilon(5e-3));
}

TEST_CASE("binary diffusion coefficients at 1 atm near room temperature (handbook)") {
    // Cussler, Diffusion (1997) Table 5.1-1 / CRC Handbook gas diffusion table, D in cm^2 s^-1
    // at 1 atm (from memory). Chapman–Enskog with Lennard-Jones parameters is known to be
    // good to about 5-10 % (Poling et al. 2001); tolerance 10 %.
    struct Row {
        const char* a;
        const char* b;
        double T, d_cm2;
    };
    for (const Row& row : {Row{"H2", "N2", 298.0, 0.78}, Row{"He", "N2", 298.0, 0.687},
                           Row{"O2", "N2", 293.0, 0.20}, Row{"CO2", "N2", 298.0, 0.165}}) {
        CAPTURE(row.a);
        CAPTURE(row.b);
        const double ce = chapman_enskog_diffusion_parameter(species(row.a), species(row.b), row.T);
        CHECK(coefficient_at(ce, row.T, atm) * 1e4 == doctest::Approx(row.d_cm2).epsilon(0.10));
        const double best = binary_diffusion_parameter(species(row.a), species(row.b), row.T);
        CHECK(coefficient_at(best, row.T, atm) * 1e4 == doctest::Approx(row.d_cm2).epsilon(0.10));
    }
}

TEST_CASE("measured pairs override Chapman–Enskog, in either order") {
    const DiffusionPair* fit = default_diffusion_pairs().find("N2", "H2");
    REQUIRE(fit != nullptr);
    CHECK(fit == default_diffusion_pairs().find("H2", "N2"));
    const double T = 700.0;
    CHECK(binary_diffusion_parameter(species("H2"), species("N2"), T) ==
          doctest::Approx(fit->coefficient * std::pow(T, fit->exponent)).epsilon(1e-14));
    CHECK(binary_diffusion_parameter(species("N2"), species("H2"), T) ==
          binary_diffusion_parameter(species("H2"), species("N2"), T));
    CHECK(binary_diffusion_parameter(species("H2"), species("N2"), T,
                                     DiffusionMethod::chapman_enskog) ==
          chapman_enskog_diffusion_parameter(species("H2"), species("N2"), T));
    // Every tabulated fit is within 30 % of the Lennard-Jones estimate at 300-1000 K: a check
    // that no value in data/diffusion_pairs.csv is badly mistyped.
    for (const DiffusionPair& p : default_diffusion_pairs().pairs())
        for (double t : {300.0, 1000.0}) {
            CAPTURE(p.species_a);
            CAPTURE(p.species_b);
            const double ratio = p(t) / chapman_enskog_diffusion_parameter(species(p.species_a),
                                                                           species(p.species_b), t);
            CHECK(ratio > 0.77);
            CHECK(ratio < 1.3);
        }
    CHECK(default_diffusion_pairs().find("He", "Xe") == nullptr);
}

TEST_CASE("b = n D scales as T^0.5 / Omega_D at fixed pressure-independent form") {
    // Kinetic theory: b does not depend on density; D at fixed T is inversely proportional to p.
    const Species& a = species("O");
    const Species& b = species("Ar");
    const double b1 = chapman_enskog_diffusion_parameter(a, b, 400.0);
    const double b2 = chapman_enskog_diffusion_parameter(a, b, 1600.0);
    const double eps = std::sqrt(a.lj_well_depth * b.lj_well_depth);
    CHECK(b2 / b1 == doctest::Approx(2.0 * neufeld_collision_integral(400.0 / eps) /
                                     neufeld_collision_integral(1600.0 / eps))
                         .epsilon(1e-13));
}

TEST_CASE("Blanc's law") {
    const Species& h = species("H");
    const double T = 500.0;
    // One background species: the binary value.
    CHECK(mixture_diffusion_parameter(h, {species("N2")}, {1.0}, T) ==
          doctest::Approx(binary_diffusion_parameter(h, species("N2"), T)).epsilon(1e-14));
    // Two: the mole-fraction weighted harmonic mean (Blanc 1908).
    const double b1 = binary_diffusion_parameter(h, species("N2"), T);
    const double b2 = binary_diffusion_parameter(h, species("O"), T);
    CHECK(mixture_diffusion_parameter(h, {species("N2"), species("O")}, {0.25, 0.75}, T) ==
          doctest::Approx(1.0 / (0.25 / b1 + 0.75 / b2)).epsilon(1e-14));
    // A zero fraction does not count.
    CHECK(mixture_diffusion_parameter(h, {species("N2"), species("Xe")}, {1.0, 0.0}, T) ==
          doctest::Approx(b1).epsilon(1e-14));
}

TEST_CASE("diffusion-limited flux (Hunten 1973)") {
    const Species& h2 = species("H2");
    const double T = 250.0, M = constants::M_earth, r = constants::R_earth + 100e3;
    const double x = 1e-5;
    const double b = binary_diffusion_parameter(h2, species("N2"), T);
    const double g = G * M / (r * r);
    const double h_a = k_B * T / (species("N2").mass * g), h_i = k_B * T / (h2.mass * g);
    CHECK(diffusion_limited_flux(h2, {species("N2")}, {1.0}, x, T, M, r) ==
          doctest::Approx(b * x * (1 / h_a - 1 / h_i)).epsilon(1e-13));
    // A species heavier than the background cannot diffuse up: negative.
    CHECK(diffusion_limited_flux(species("Ar"), {species("N2")}, {1.0}, x, T, M, r) < 0.0);
    // Nearly equal masses (CO in N2): hardly any separation, flux proportional to m_a - m_i.
    const Species& co = species("CO");
    const double b_co = binary_diffusion_parameter(co, species("N2"), T);
    CHECK(diffusion_limited_flux(co, {species("N2")}, {1.0}, x, T, M, r) ==
          doctest::Approx(b_co * x * (species("N2").mass - co.mass) * g / (k_B * T)).epsilon(1e-9));
}

TEST_CASE("coupled flux: limits, beta -> 0, and the constant-flux diffusion equation") {
    const double b = 1e21, x = 1e-4, z = 4e5;
    // Jeans-limited: Phi_J << Phi_DL.
    {
        const double beta = 1.0 / 7e3, phi_dl = b * x * beta, phi_j = 1e-6 * phi_dl;
        CHECK(coupled_escape_flux(phi_j, b, x, beta, z) == doctest::Approx(phi_j).epsilon(2e-6));
    }
    // Diffusion-limited: Phi_J >> Phi_DL and a thick layer.
    {
        const double beta = 1.0 / 7e3, phi_dl = b * x * beta, phi_j = 1e6 * phi_dl;
        CHECK(coupled_escape_flux(phi_j, b, x, beta, z) == doctest::Approx(phi_dl).epsilon(2e-6));
    }
    // beta -> 0: (1 - exp(-beta z)) / beta -> z, continuous through 0 from both sides.
    {
        const double phi_j = 1e12;
        const double limit = phi_j / (1 + phi_j * z / (b * x));
        CHECK(coupled_escape_flux(phi_j, b, x, 0.0, z) == doctest::Approx(limit).epsilon(1e-15));
        CHECK(coupled_escape_flux(phi_j, b, x, 1e-14, z) == doctest::Approx(limit).epsilon(1e-8));
        CHECK(coupled_escape_flux(phi_j, b, x, -1e-14, z) == doctest::Approx(limit).epsilon(1e-8));
    }
    // Worked solution check: with f = n_i / n_a the flux obeys Phi = -b (df/dz - beta f);
    // integrate it upward with RK4 from f(0) = x for the returned Phi, and the top boundary
    // Phi = v_J n_a(z_e) f(z_e) (Jeans effusion) must hold.
    {
        // Background density at z = 0 and effusion velocity chosen so that Phi_J,eq ~ Phi_DL.
        const double beta = 1.0 / 3e4, h_a = 5e4;
        const double n_a0 = 4e12, v_j = 50.0;
        const double n_a_top = n_a0 * std::exp(-z / h_a);
        const double phi_j = v_j * n_a_top * x * std::exp(beta * z); // at equilibrium density
        const double phi = coupled_escape_flux(phi_j, b, x, beta, z);
        // neither limit applies here
        CHECK(phi < 0.9 * phi_j);
        CHECK(phi < 0.9 * b * x * beta);
        const int steps = 20000;
        const double dz = z / steps;
        double f = x;
        auto rate = [&](double value) { return beta * value - phi / b; };
        for (int k = 0; k < steps; ++k) {
            const double k1 = rate(f), k2 = rate(f + 0.5 * dz * k1), k3 = rate(f + 0.5 * dz * k2),
                         k4 = rate(f + dz * k3);
            f += dz / 6 * (k1 + 2 * k2 + 2 * k3 + k4);
        }
        CHECK(v_j * n_a_top * f == doctest::Approx(phi).epsilon(1e-9));
    }
    // Heavier than the background (beta < 0): still between 0 and the Jeans flux.
    {
        const double phi = coupled_escape_flux(1e10, b, x, -1.0 / 2e4, z);
        CHECK(phi > 0.0);
        CHECK(phi < 1e10);
    }
    CHECK(coupled_escape_flux(0.0, b, x, 1e-4, z) == 0.0);
}

TEST_CASE("diffusion: bad input names the argument and the value") {
    auto message = [](auto&& call) -> std::string {
        try {
            call();
        } catch (const InputError& e) {
            return e.what();
        }
        return "no exception";
    };
    CHECK(message([] {
              binary_diffusion_parameter(species("H"), species("N2"), -5.0);
          }).find("temperature must be finite and > 0, got -5") != std::string::npos);
    CHECK(message([] {
              binary_diffusion_parameter(species("H"), species("N2"), 0.0);
          }).find("temperature") != std::string::npos);
    CHECK(message([] {
              mixture_diffusion_parameter(species("H"), {species("N2"), species("O2")}, {0.7, 0.2},
                                          300.0);
          }).find("sum to one") != std::string::npos);
    CHECK(message([] {
              mixture_diffusion_parameter(species("H"), {species("N2"), species("O2")}, {1.2, -0.2},
                                          300.0);
          }).find("'O2' must be finite and >= 0, got -0.2") != std::string::npos);
    CHECK(message([] {
              mixture_diffusion_parameter(species("H"), {species("H")}, {1.0}, 300.0);
          }).find("must not contain") != std::string::npos);
    CHECK(message([] {
              diffusion_limited_flux(species("H"), {species("N2")}, {1.0}, 1.5, 300.0,
                                     constants::M_earth, constants::R_earth);
          }).find("mixing_ratio must be <= 1, got 1.5") != std::string::npos);
    Species bare;
    bare.name = "X";
    bare.mass = 10 * amu;
    CHECK(message([&] {
              chapman_enskog_diffusion_parameter(bare, species("N2"), 300.0);
          }).find("no Lennard-Jones parameters") != std::string::npos);
    CHECK_THROWS_AS(DiffusionPairTable::from_csv("species_a,species_b,A_per_m_per_s,s,source\n"
                                                 "H,N2,-1,0.7,x\n",
                                                 "test"),
                    InputError);
}
