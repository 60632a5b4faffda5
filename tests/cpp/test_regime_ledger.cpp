// Time in each escape regime and where each species' loss went (EvolutionResult::regime_time,
// regime_loss, energy_limited_loss, given_loss, non_jeans_loss_share, bulk_regime_time).
#include <doctest/doctest.h>

#include <cmath>
#include <memory>
#include <numeric>
#include <string>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/jeans.hpp"

using namespace exosieve;
using constants::Gyr;
using constants::Myr;

namespace {

const double r_exo = constants::R_earth + 500e3;

EvolutionConfig prescribed(const std::vector<std::string>& names, const std::vector<double>& n0,
                           const std::vector<double>& N0, DensityScaling scaling, double T) {
    EvolutionConfig c(Planet(constants::M_earth, constants::R_earth));
    for (const auto& name : names)
        c.species.push_back(species(name));
    c.initial_inventory = N0;
    c.exobase = std::make_shared<PrescribedExobase>(r_exo, names, n0, scaling);
    c.temperature = ExobaseTemperature::constant(T);
    return c;
}

double rate(const std::string& name, double n, double T) {
    return jeans_escape_rate(n, T, species(name).mass, constants::M_earth, r_exo);
}

// Temperature [K] where species `name` has Jeans parameter `lambda` at the exobase.
double temperature_at(const std::string& name, double lambda) {
    return jeans_parameter(1.0, species(name).mass, constants::M_earth, r_exo) / lambda;
}

// Composite Simpson's rule with m intervals (worked quadrature).
template <class F> double simpson(F f, double a, double b, int m = 20000) {
    const double h = (b - a) / m;
    double s = f(a) + f(b);
    for (int i = 1; i < m; ++i)
        s += (i % 2 ? 4.0 : 2.0) * f(a + i * h);
    return s * h / 3.0;
}

double total_loss(const EvolutionResult& r, std::size_t i) {
    double sum = r.energy_limited_loss[i] + r.given_loss[i];
    for (std::size_t k = 0; k < 4; ++k)
        sum += r.regime_loss[i * 4 + k];
    return sum;
}

} // namespace

TEST_CASE("a linear temperature ramp: the time in each regime ends at the analytic crossings") {
    // T(t) = 1000 K + 4000 K t / Gyr, a fixed exobase radius: lambda_H = G M m / (k T r) crosses
    // 6, 3 and 2.1 (Volkov et al. 2011 thresholds) at T_k = G M m / (lambda_k k r), so at the
    // exact ages t_k = (T_k - 1000 K) / (4000 K) Gyr (worked analytic solution). O stays Jeans.
    // Fixed densities keep H the densest species, so the bulk gas takes H's regimes.
    auto c = prescribed({"H", "O"}, {1e13, 1e10}, {1e50, 1e43}, DensityScaling::Fixed, 1000.0);
    c.temperature = ExobaseTemperature::table({0.0, 1 * Gyr}, {1000.0, 5000.0});
    c.t_end = 1 * Gyr;
    c.rtol = 1e-10;
    const auto r = evolve(c);
    REQUIRE(r.completed);
    auto age = [](double T) { return (T - 1000.0) / 4000.0 * Gyr; };
    const double t6 = age(temperature_at("H", 6.0)), t3 = age(temperature_at("H", 3.0)),
                 t21 = age(temperature_at("H", 2.1));
    REQUIRE(r.regime_time.size() == 8);
    CHECK(r.regime_time[0] == doctest::Approx(t6).epsilon(1e-12));
    CHECK(r.regime_time[1] == doctest::Approx(t3 - t6).epsilon(1e-12));
    CHECK(r.regime_time[2] == doctest::Approx(t21 - t3).epsilon(1e-12));
    CHECK(r.regime_time[3] == doctest::Approx(1 * Gyr - t21).epsilon(1e-12));
    CHECK(r.regime_time[4] == doctest::Approx(1 * Gyr).epsilon(1e-14)); // O: Jeans throughout
    CHECK(r.regime_time[5] + r.regime_time[6] + r.regime_time[7] == 0.0);
    // H is the densest species: the bulk gas takes the same times.
    CHECK(r.bulk_regime_time[0] == doctest::Approx(t6).epsilon(1e-12));
    CHECK(r.bulk_regime_time[3] == doctest::Approx(1 * Gyr - t21).epsilon(1e-12));
    // H's Jeans-regime loss is a part of its whole loss; O loses only in the Jeans regime.
    CHECK(r.non_jeans_loss_share[0] > 0.0);
    CHECK(r.non_jeans_loss_share[0] < 1.0);
    CHECK(r.non_jeans_loss_share[1] == 0.0);
    CHECK(r.energy_limited_loss[0] == 0.0);
    CHECK(r.given_loss[0] == 0.0);
}

TEST_CASE("the loss in each regime is the exact quadrature of the rate up to the crossing") {
    // Densities follow the inventory: ln N(t) = ln N0 - I(t), I(t) the integral of
    // k(T(t)) = Q(n0, T(t)) / N0 (worked solution; I by Simpson's rule). H crosses lambda = 6 at
    // t6: its Jeans-regime loss is N0 (1 - e^(-I(t6))), the enhanced one N0 (e^(-I(t6)) -
    // e^(-I(t_end))). The parts sum to the inventory's fall N0 - N(t_end).
    const double n0 = 1e11, T1 = 1000.0, T2 = 2000.0;
    const double N0 = rate("H", n0, T2) * 3.0 * Gyr;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T1);
    c.temperature = ExobaseTemperature::table({0.0, 1 * Gyr}, {T1, T2});
    c.t_end = 1 * Gyr;
    c.rtol = 1e-10;
    c.t_eval = {0.0, 1 * Gyr};
    const auto r = evolve(c);
    const double t6 = (temperature_at("H", 6.0) - T1) / (T2 - T1) * Gyr;
    auto k = [&](double t) { return rate("H", n0, T1 + (T2 - T1) * t / Gyr) / N0; };
    const double I6 = simpson(k, 0.0, t6), I1 = I6 + simpson(k, t6, 1 * Gyr);
    CHECK(r.regime_time[0] == doctest::Approx(t6).epsilon(1e-12));
    CHECK(r.regime_time[1] == doctest::Approx(1 * Gyr - t6).epsilon(1e-12));
    // To the accuracy of the inventories (README: 10 rtol of N0), which the parts inherit.
    CHECK(std::abs(r.regime_loss[0] + N0 * std::expm1(-I6)) < 10 * c.rtol * N0);
    CHECK(std::abs(r.regime_loss[1] - N0 * (std::exp(-I6) - std::exp(-I1))) < 10 * c.rtol * N0);
    const double fall = N0 - r.inventory[1];
    CHECK(total_loss(r, 0) == doctest::Approx(fall).epsilon(1e-12));
    CHECK(r.non_jeans_loss_share[0] == doctest::Approx(r.regime_loss[1] / fall).epsilon(1e-12));
}

TEST_CASE("a case wholly in the Jeans regime takes none of its loss outside the Jeans picture") {
    // lambda_H = 7.0 at 1000 K, 500 km above the Earth's surface: above 6 (Jeans) throughout.
    const double n0 = 1e11, T = 1000.0;
    REQUIRE(jeans_parameter(T, species("H").mass, constants::M_earth, r_exo) > 6.0);
    const double N0 = rate("H", n0, T) * 1.0 * Gyr;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T);
    c.t_start = 10 * Myr;
    c.t_end = 4 * Gyr;
    const auto r = evolve(c);
    CHECK(r.non_jeans_loss_share[0] == 0.0);
    CHECK(r.regime_time[0] == doctest::Approx(c.t_end - c.t_start).epsilon(1e-14));
    CHECK(r.regime_time[1] + r.regime_time[2] + r.regime_time[3] == 0.0);
    CHECK(r.bulk_regime_time[0] == doctest::Approx(c.t_end - c.t_start).epsilon(1e-14));
    // Exponential decay, N0 e^(-t/Gyr) (worked solution): the Jeans loss is all of it.
    const double exact = -N0 * std::expm1(-(c.t_end - c.t_start) / Gyr);
    CHECK(r.regime_loss[0] == doctest::Approx(exact).epsilon(1e-6));
}

TEST_CASE("a constant given loss: its share is G t over the whole loss, the shares sum to 1") {
    // dN/dt = -k N - G (worked solution N(t) = (N0 + G/k) e^(-k t) - G/k), stopped before
    // depletion: the given part is G t exactly (the trapezoid of a constant), the thermal part
    // N0 - N(t) - G t, and together they are the inventory's fall.
    const double T = 1000.0, n0 = 1e11;
    const double Q0 = rate("H", n0, T);
    const double N0 = Q0 * 1.0 * Gyr;
    const double k = Q0 / N0, G = 0.5 * Q0, t_end = 0.8 * Gyr; // depleted at 1.1 Gyr
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T);
    c.given_losses = {GivenLoss(G)};
    c.t_end = t_end;
    c.rtol = 1e-10;
    const auto r = evolve(c);
    const double n_end = (N0 + G / k) * std::exp(-k * t_end) - G / k;
    CHECK(r.given_loss[0] == doctest::Approx(G * t_end).epsilon(1e-13));
    CHECK(r.regime_loss[0] == doctest::Approx(N0 - n_end - G * t_end).epsilon(1e-9));
    const double total = total_loss(r, 0);
    CHECK(total == doctest::Approx(N0 - n_end).epsilon(1e-9));
    const double shares = (r.regime_loss[0] + r.given_loss[0]) / total;
    CHECK(shares == doctest::Approx(1.0).epsilon(1e-15));
    CHECK(r.non_jeans_loss_share[0] == doctest::Approx(G * t_end / (N0 - n_end)).epsilon(1e-9));
}

TEST_CASE("a power-law given loss in the XUV flux: its quadrature against the closed form") {
    // L = L_ref (F/F_ref) with F = F_sat (t/t_sat)^(-beta) after saturation (XuvHistory), so
    // the given loss over [t_sat, t1] is L_sat t_sat (1 - (t1/t_sat)^(1 - beta)) / (beta - 1)
    // (worked analytic integral). The densities are fixed, so the thermal loss is Q0 t exactly.
    const Star star(constants::M_sun, constants::L_sun);
    const Planet planet(constants::M_earth, constants::R_earth, constants::au, star);
    const double n0 = 1e11, T = 1000.0, t_sat = star.xuv().saturation_time;
    const double beta = star.xuv().decay_index, f_sat = planet.xuv_flux(t_sat);
    EvolutionConfig c(planet);
    c.species = {species("H")};
    const double Q0 = rate("H", n0, T);
    c.initial_inventory = {Q0 * 100 * Gyr};
    c.exobase = std::make_shared<PrescribedExobase>(r_exo, std::vector<std::string>{"H"},
                                                    std::vector<double>{n0}, DensityScaling::Fixed);
    c.temperature = ExobaseTemperature::constant(T);
    const double l_sat = 0.5 * Q0;
    c.given_losses = {GivenLoss::xuv_power_law(l_sat, f_sat, 1.0)};
    c.t_start = t_sat;
    c.t_end = 10 * Gyr;
    c.rtol = 1e-10;
    const auto r = evolve(c);
    const double exact =
        l_sat * t_sat * (1.0 - std::pow(c.t_end / t_sat, 1.0 - beta)) / (beta - 1.0);
    CHECK(r.given_loss[0] == doctest::Approx(exact).epsilon(1e-10));
    CHECK(r.regime_loss[0] == doctest::Approx(Q0 * (c.t_end - t_sat)).epsilon(1e-8));
}

TEST_CASE("an XUV temperature history: the age H leaves the enhanced regime, in closed form") {
    // T = T_ref (F/F_ref)^gamma with F = F_sat (t/t_sat)^(-beta) after saturation: lambda_H
    // reaches 6 where T = T6, i.e. at t6 = t_sat (F_sat/F6)^(1/beta) with F6 = F_ref
    // (T6/T_ref)^(1/gamma) (worked analytic solution). H cools from enhanced into Jeans.
    const Star star(constants::M_sun, constants::L_sun);
    const Planet planet(constants::M_earth, constants::R_earth, constants::au, star);
    const double t_sat = star.xuv().saturation_time, beta = star.xuv().decay_index;
    const double f_sat = planet.xuv_flux(t_sat), f_ref = planet.xuv_flux(4.5 * Gyr);
    const double T_ref = 100.0, gamma = 0.6; // 1660 K at t_sat, 55 K at 10 Gyr: no clamp
    EvolutionConfig c(planet);
    c.species = {species("H"), species("O")};
    c.initial_inventory = {1e48, 1e46};
    c.exobase = std::make_shared<PrescribedExobase>(r_exo, std::vector<std::string>{"H", "O"},
                                                    std::vector<double>{1e12, 1e10},
                                                    DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::xuv_power_law(T_ref, f_ref, gamma, 50.0, 5000.0);
    c.t_start = t_sat;
    c.t_end = 10 * Gyr;
    const auto r = evolve(c);
    const double T6 = temperature_at("H", 6.0);
    REQUIRE(T_ref * std::pow(f_sat / f_ref, gamma) > T6); // enhanced at the start
    REQUIRE(T_ref * std::pow(f_sat / f_ref, gamma) < temperature_at("H", 3.0));
    const double f6 = f_ref * std::pow(T6 / T_ref, 1.0 / gamma);
    const double t6 = t_sat * std::pow(f_sat / f6, 1.0 / beta);
    CHECK(r.regime_time[1] == doctest::Approx(t6 - t_sat).epsilon(1e-11));
    CHECK(r.regime_time[0] == doctest::Approx(c.t_end - t6).epsilon(1e-11));
    CHECK(r.regime_time[0] + r.regime_time[1] ==
          doctest::Approx(c.t_end - c.t_start).epsilon(1e-14));
    CHECK(r.non_jeans_loss_share[0] > 0.0);
}

TEST_CASE("energy-limited loss: the light species' whole loss is outside the Jeans picture") {
    // During saturation with activation 'always' H loses q = dM/dt / m_H per second (Watson et
    // al. 1981 energy-limited rate; worked analytic solution), all of it energy-limited.
    XuvHistory x;
    x.saturation_time = 100 * Myr;
    const Star star(constants::M_sun, constants::L_sun, x);
    const Planet planet(constants::M_earth, constants::R_earth, constants::au, star);
    EvolutionConfig c(planet);
    c.species = {species("H"), species("CO2")};
    c.initial_inventory = {1e48, 1e46};
    c.exobase = std::make_shared<PrescribedExobase>(r_exo, std::vector<std::string>{"H", "CO2"},
                                                    std::vector<double>{1e10, 1e13},
                                                    DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(800.0);
    HydrodynamicOptions h;
    h.efficiency = 0.15;
    h.activation = HydrodynamicActivation::Always;
    h.roche_lobe = false;
    h.drag = false;
    c.hydrodynamic = h;
    c.t_start = 10 * Myr;
    c.t_end = 90 * Myr;
    c.rtol = 1e-10;
    const auto r = evolve(c);
    const double mdot = energy_limited_mass_loss(0.15, planet.radius(), planet.radius(),
                                                 planet.xuv_flux(50 * Myr), planet.mass());
    CHECK(r.energy_limited_loss[0] ==
          doctest::Approx(mdot / species("H").mass * 80 * Myr).epsilon(1e-9));
    CHECK(r.non_jeans_loss_share[0] == 1.0);
    CHECK(r.regime_loss[0] == 0.0);
    // H's own regime is still recorded: lambda_H at 800 K is above 6.
    CHECK(r.regime_time[0] == doctest::Approx(80 * Myr).epsilon(1e-14));
}
