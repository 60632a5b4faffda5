#include <doctest/doctest.h>

#include <atomic>
#include <cmath>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/outflow.hpp"
#include "exosieve/thermosphere.hpp"

using namespace exosieve;
using constants::Gyr;
using constants::Myr;

namespace {

const double r_exo = constants::R_earth + 500e3;

// An Earth-mass planet with a prescribed exobase 500 km up.
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

std::size_t col(const EvolutionResult& r, std::size_t k, std::size_t i) {
    return k * r.species_count() + i;
}

} // namespace

TEST_CASE("exponential decay when densities follow the inventory at constant temperature") {
    // Worked analytic solution: dN/dt = -(Q0/N0) N, so N(t) = N0 exp(-Q0 t / N0).
    const double T = 1000.0, n0 = 1e11;
    const double Q0 = rate("H", n0, T);
    const double N0 = Q0 * 1.0 * Gyr; // e-folding time 1 Gyr
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T);
    c.t_start = 0.0;
    c.t_end = 8 * Gyr;
    c.rtol = 1e-10;
    c.depletion_fraction = 1e-3;
    for (int k = 0; k <= 50; ++k)
        c.t_eval.push_back(0.1 * k * Gyr);
    const auto r = evolve(c);
    REQUIRE(r.completed);
    REQUIRE(r.time_count() == 51);
    for (std::size_t k = 0; k < r.time_count(); ++k) {
        const double exact = N0 * std::exp(-Q0 * r.time[k] / N0);
        CHECK(r.inventory[k] == doctest::Approx(exact).epsilon(1e-9));
        CHECK(r.escape_rate[k] == doctest::Approx(Q0 * exact / N0).epsilon(1e-9));
    }
    // In ln N the solution is linear: a handful of steps, whatever the span.
    CHECK(r.steps < 20);
    CHECK(r.rejected_steps == 0);
    // Depletion when N = 1e-3 N0: t = ln(1000) Gyr.
    CHECK(r.depletion_time[0] == doctest::Approx(std::log(1000.0) * Gyr).epsilon(1e-9));
    CHECK(r.exobase_temperature[3] == T);
    CHECK(r.exobase_radius[3] == r_exo);
}

TEST_CASE("linear loss and the depletion time when densities are fixed") {
    // Worked analytic solution: dN/dt = -Q0, N(t) = N0 - Q0 t; N = f N0 at t = (1 - f) N0 / Q0.
    const double T = 1000.0, n0 = 1e11, f = 1e-3;
    const double Q0 = rate("H", n0, T);
    const double N0 = Q0 * 2.0 * Gyr;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Fixed, T);
    c.t_end = 3 * Gyr;
    c.rtol = 1e-9;
    c.depletion_fraction = f;
    for (int k = 0; k <= 30; ++k)
        c.t_eval.push_back(0.1 * k * Gyr);
    const auto r = evolve(c);
    REQUIRE(r.completed);
    const double t_dep = (1 - f) * N0 / Q0;
    CHECK(r.depletion_time[0] == doctest::Approx(t_dep).epsilon(1e-9));
    for (std::size_t k = 0; k < r.time_count(); ++k) {
        CAPTURE(r.time[k]);
        if (r.time[k] < t_dep) {
            CHECK(r.inventory[k] == doctest::Approx(N0 - Q0 * r.time[k]).epsilon(1e-8));
            CHECK(r.escape_rate[k] == doctest::Approx(Q0).epsilon(1e-12));
        } else {
            // After depletion a fixed density cannot be fed: the species is held and stops.
            CHECK(r.inventory[k] == doctest::Approx(f * N0).epsilon(1e-8));
            CHECK(r.escape_rate[k] == 0.0);
        }
    }
}

TEST_CASE("piecewise behaviour under a temperature table") {
    // Temperature held at 900 K until 1 Gyr, linear to 1200 K at 2 Gyr, held after (the table's
    // definition). Densities follow the inventory, so ln N(t) = ln N0 - integral of k(T(t)) dt
    // with k(T) = Q(n0, T) / N0: exactly linear in t outside the ramp. Reference for the ramp:
    // composite Simpson's rule with 20000 intervals (worked quadrature).
    const double n0 = 1e11, T1 = 900.0, T2 = 1200.0;
    const double N0 = rate("H", n0, T2) * 3.0 * Gyr;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T1);
    c.temperature = ExobaseTemperature::table({1 * Gyr, 2 * Gyr}, {T1, T2});
    c.t_end = 4 * Gyr;
    c.rtol = 1e-10;
    c.t_eval = {0.5 * Gyr, 1 * Gyr, 1.5 * Gyr, 2 * Gyr, 3 * Gyr, 4 * Gyr};
    const auto r = evolve(c);
    auto k = [&](double T) { return rate("H", n0, T) / N0; };
    auto ramp = [&](double t_end) { // integral of k(T(t)) over [1 Gyr, t_end]
        const int m = 20000;
        const double a = 1 * Gyr, h = (t_end - a) / m;
        double s = 0.0;
        for (int i = 0; i <= m; ++i) {
            const double t = a + i * h;
            const double w = (i == 0 || i == m) ? 1 : (i % 2 ? 4 : 2);
            s += w * k(T1 + (T2 - T1) * (t - a) / Gyr);
        }
        return s * h / 3.0;
    };
    const double full_ramp = ramp(2 * Gyr);
    const std::vector<double> expected_log = {
        -k(T1) * 0.5 * Gyr,
        -k(T1) * 1.0 * Gyr,
        -k(T1) * 1.0 * Gyr - ramp(1.5 * Gyr),
        -k(T1) * 1.0 * Gyr - full_ramp,
        -k(T1) * 1.0 * Gyr - full_ramp - k(T2) * 1.0 * Gyr,
        -k(T1) * 1.0 * Gyr - full_ramp - k(T2) * 2.0 * Gyr,
    };
    REQUIRE(r.time_count() == expected_log.size());
    for (std::size_t i = 0; i < expected_log.size(); ++i) {
        CAPTURE(r.time[i]);
        CHECK(std::log(r.inventory[i] / N0) == doctest::Approx(expected_log[i]).epsilon(1e-9));
    }
    CHECK(r.exobase_temperature[2] == doctest::Approx(1050.0).epsilon(1e-14));
}

TEST_CASE("the Rayleigh law R/R0 = f^(alpha - 1) for D against H") {
    // Rayleigh fractionation (worked analytic solution): with both losses proportional to the
    // inventories, f = N_H/N_H0 = exp(-k_H t) and N_D/N_D0 = f^alpha, alpha = k_D / k_H, so the
    // D/H ratio relative to its start is f^(alpha - 1).
    const double T = 1500.0;
    const std::vector<double> n0 = {1e11, 1e7};
    const double N_H0 = rate("H", n0[0], T) * 1.0 * Gyr;
    const std::vector<double> N0 = {N_H0, N_H0 * 1e-4};
    auto c = prescribed({"H", "D"}, n0, N0, DensityScaling::Inventory, T);
    c.t_end = 4 * Gyr;
    c.rtol = 1e-10;
    c.isotope_ratios = default_isotope_ratios({"H", "D"});
    REQUIRE(c.isotope_ratios.size() == 1);
    const auto r = evolve(c);
    REQUIRE(r.ratio_names.size() == 1);
    CHECK(r.ratio_names[0] == "D/H");
    const double alpha = (rate("D", n0[1], T) / N0[1]) / (rate("H", n0[0], T) / N0[0]);
    CHECK(alpha < 1.0); // D escapes less efficiently
    for (std::size_t k = 1; k < r.time_count(); ++k) {
        const double f = r.inventory[col(r, k, 0)] / N0[0];
        const double ratio0 = N0[1] / N0[0];
        CHECK(r.isotope_ratio[k] / ratio0 == doctest::Approx(std::pow(f, alpha - 1)).epsilon(1e-8));
    }
    // Enrichment at the end: H fell by e^-4, so D/H rose by e^(4 (1 - alpha)).
    CHECK(r.isotope_ratio.back() / (N0[1] / N0[0]) ==
          doctest::Approx(std::exp(4.0 * (1 - alpha))).epsilon(1e-8));
}

TEST_CASE("a species gone in 1e4 yr beside one lasting 10 Gyr costs no more steps") {
    // Stiffness check: e-folding times 1e4 yr and 10 Gyr in one run over 10 Gyr under a
    // temperature that varies. Reference: the exact exponential of the slow species at
    // constant temperature (worked analytic solution), then a varying-temperature run compared
    // to one with the slow species alone.
    const double T = 1000.0;
    const std::vector<double> n0 = {1e11, 1e11};
    const std::vector<double> N0 = {rate("H", n0[0], T) * 1e4 * constants::year,
                                    rate("O", n0[1], T) * 10 * Gyr};
    auto c = prescribed({"H", "O"}, n0, N0, DensityScaling::Inventory, T);
    c.t_end = 10 * Gyr;
    c.rtol = 1e-8;
    auto r = evolve(c);
    CHECK(r.steps < 30);
    CHECK(r.inventory.back() == doctest::Approx(N0[1] * std::exp(-1.0)).epsilon(1e-7));
    CHECK(r.depletion_time[0] ==
          doctest::Approx(std::log(1000.0) * 1e4 * constants::year).epsilon(1e-7));
    // Now with a temperature that falls over the run (1e4 yr to 10 Gyr).
    c.temperature = ExobaseTemperature::table({0.0, 10 * Gyr}, {1000.0, 700.0});
    c.t_start = 1e4 * constants::year;
    r = evolve(c);
    auto alone = prescribed({"O"}, {n0[1]}, {N0[1]}, DensityScaling::Inventory, T);
    alone.temperature = c.temperature;
    alone.t_start = c.t_start;
    alone.t_end = c.t_end;
    alone.rtol = c.rtol;
    const auto r1 = evolve(alone);
    MESSAGE("two species: " << r.steps << " steps (" << r.rejected_steps
                            << " rejected); slow species alone: " << r1.steps << " steps");
    CHECK(r.steps <= r1.steps + 10);
    CHECK(r.inventory.back() == doctest::Approx(r1.inventory.back()).epsilon(1e-7));
    // The fast species went far below 1e-308 of its start and stayed finite in logs.
    CHECK(r.inventory[col(r, r.time_count() - 1, 0)] == 0.0);
    CHECK(std::isfinite(r.escape_rate[col(r, r.time_count() - 1, 0)]));
}

TEST_CASE("outgassing: a constant source balances a proportional loss") {
    // dN/dt = S - k N: N(t) = S/k + (N0 - S/k) exp(-k t) (worked analytic solution).
    const double T = 1000.0, n0 = 1e11;
    const double Q0 = rate("H", n0, T);
    const double N0 = Q0 * 1.0 * Gyr, k = Q0 / N0, S = 0.3 * Q0;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T);
    c.sources = {SourceRate(S)};
    c.t_end = 5 * Gyr;
    c.rtol = 1e-10;
    c.t_eval = {1 * Gyr, 2 * Gyr, 5 * Gyr};
    const auto r = evolve(c);
    for (std::size_t i = 0; i < 3; ++i) {
        const double t = r.time[i];
        CHECK(r.inventory[i] ==
              doctest::Approx(S / k + (N0 - S / k) * std::exp(-k * t)).epsilon(1e-9));
        CHECK(r.source_rate[i] == S);
    }
}

TEST_CASE("a regime change is located where the bulk Jeans parameter crosses its threshold") {
    // H dominates; the temperature ramps 1000 -> 2000 K over 1 Gyr. lambda_H = G M m / (k T r)
    // crosses 6 (Volkov et al. 2011 threshold) where T = G M m / (6 k r): an exact time on the
    // linear table.
    auto c = prescribed({"H", "O"}, {1e13, 1e10}, {1e45, 1e42}, DensityScaling::Inventory, 1000.0);
    c.temperature = ExobaseTemperature::table({0.0, 1 * Gyr}, {1000.0, 2000.0});
    c.t_end = 1 * Gyr;
    const auto r = evolve(c);
    const double T6 = jeans_parameter(1.0, species("H").mass, constants::M_earth, r_exo) / 6.0;
    const double t6 = (T6 - 1000.0) / 1000.0 * Gyr;
    REQUIRE(r.regime_changes.size() >= 1);
    CHECK(r.regime_changes[0].from == Regime::Jeans);
    CHECK(r.regime_changes[0].to == Regime::EnhancedJeans);
    CHECK(r.regime_changes[0].time == doctest::Approx(t6).epsilon(1e-12));
    CHECK(r.regime.front() == static_cast<int>(Regime::Jeans));
}

TEST_CASE("energy-limited loss during saturation: linear loss of the light species") {
    // During saturation the XUV flux is constant, so with 'always' the light species loses
    // dM/dt / m_H per second (Watson et al. 1981 energy-limited rate; worked analytic solution)
    // while a heavy undragged species keeps its (negligible) Jeans rate.
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
    h.roche_lobe = true;
    h.drag = false;
    c.hydrodynamic = h;
    c.t_start = 10 * Myr;
    c.t_end = 90 * Myr;
    c.rtol = 1e-10;
    c.t_eval = {10 * Myr, 50 * Myr, 90 * Myr};
    const auto r = evolve(c);
    const double K = roche_lobe_factor(
        roche_lobe_ratio(planet.mass(), star.mass(), planet.semi_major_axis(), planet.radius()));
    const double mdot = energy_limited_mass_loss(0.15, planet.radius(), planet.radius(),
                                                 planet.xuv_flux(50 * Myr), planet.mass(), K);
    const double q = mdot / species("H").mass;
    CHECK(r.inventory[col(r, 1, 0)] == doctest::Approx(1e48 - q * 40 * Myr).epsilon(1e-9));
    CHECK(r.inventory[col(r, 2, 0)] == doctest::Approx(1e48 - q * 80 * Myr).epsilon(1e-9));
    CHECK(r.escape_rate[col(r, 1, 0)] == doctest::Approx(q).epsilon(1e-12));
    CHECK(r.energy_limited[1] == 1);
}

TEST_CASE("energy-limited loss with drag conserves the mass budget") {
    // Sum over species of m_i dN_i/dt equals -dM/dt (Hunten, Pepin & Walker 1987 partition of the
    // Watson et al. 1981 rate), during saturation at constant flux: total mass lost = dM/dt * t.
    XuvHistory x;
    x.saturation_time = 100 * Myr;
    const Star star(constants::M_sun, constants::L_sun, x);
    const Planet planet(constants::M_earth, constants::R_earth, constants::au, star);
    EvolutionConfig c(planet);
    c.species = {species("H"), species("O"), species("CO2")};
    c.initial_inventory = {4e47, 1e47, 1e45};
    c.exobase = std::make_shared<PrescribedExobase>(
        r_exo, std::vector<std::string>{"H", "O", "CO2"}, std::vector<double>{1e10, 1e9, 1e8},
        DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(3000.0);
    HydrodynamicOptions h;
    h.activation = HydrodynamicActivation::Always;
    h.roche_lobe = false;
    h.diffusion = {{"O", DiffusionLaw{4.8e19, 0.75}}, {"CO2", DiffusionLaw{8.4e19, 0.6}}};
    c.hydrodynamic = h;
    c.t_start = 1 * Myr;
    c.t_end = 50 * Myr;
    c.rtol = 1e-10;
    const auto r = evolve(c);
    const double mdot = energy_limited_mass_loss(h.efficiency, planet.radius(), planet.radius(),
                                                 planet.xuv_flux(10 * Myr), planet.mass());
    double lost = 0.0;
    for (std::size_t i = 0; i < 3; ++i)
        lost += c.species[i].mass *
                (c.initial_inventory[i] - r.inventory[col(r, r.time_count() - 1, i)]);
    // Jeans escape of O and CO2 at 3000 K is many orders below the dragged rates here.
    CHECK(lost == doctest::Approx(mdot * 49 * Myr).epsilon(1e-7));
    const std::size_t last = r.time_count() - 1;
    CHECK(r.escape_rate[col(r, last, 1)] > 0.0); // O is dragged
}

TEST_CASE("bad input raises InputError naming the argument before any step") {
    auto base = [] {
        auto c = prescribed({"H"}, {1e11}, {1e35}, DensityScaling::Inventory, 1000.0);
        c.t_end = 1 * Gyr;
        return c;
    };
    auto c = base();
    c.initial_inventory = {-5.0};
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("inventory of H"), InputError);
    c = base();
    c.t_eval = {0.0, 2 * Gyr};
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("outside t_span"), InputError);
    c = base();
    c.t_eval = {0.5 * Gyr, 0.2 * Gyr};
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("strictly increasing"), InputError);
    c = base();
    c.t_end = -1.0;
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("t_span"), InputError);
    c = base();
    std::atomic<int> calls{0};
    c.temperature = ExobaseTemperature::callable(
        [&](double) {
            ++calls;
            return std::nan("");
        },
        "test");
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("callable returned nan"), InputError);
    CHECK(calls == 1); // found at the first evaluation
    c = base();
    c.temperature = ExobaseTemperature::xuv_power_law(1000, 1, 0.5, 500, 3000);
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("semi_major_axis and star"), InputError);
    c = base();
    c.exobase =
        std::make_shared<PrescribedExobase>(0.5 * constants::R_earth, std::vector<std::string>{"H"},
                                            std::vector<double>{1e11}, DensityScaling::Inventory);
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("below the planet's surface"), InputError);
}

TEST_CASE("a run that cannot progress says where and why") {
    auto c = prescribed({"H"}, {1e11}, {1e30}, DensityScaling::Fixed, 1000.0);
    c.temperature = ExobaseTemperature::table({0.0, 1 * Gyr}, {800.0, 1500.0});
    c.t_end = 1 * Gyr;
    c.max_steps = 3;
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("max_steps = 3"), NumericalError);
}

TEST_CASE("the progress hook can stop a run and the results so far are kept") {
    auto c = prescribed({"H"}, {1e11}, {1e35}, DensityScaling::Inventory, 1000.0);
    c.temperature = ExobaseTemperature::table({0.0, 1 * Gyr}, {800.0, 1500.0});
    c.t_end = 1 * Gyr;
    int calls = 0;
    c.progress = [&](double) { return ++calls < 3; };
    const auto r = evolve(c);
    CHECK(!r.completed);
    CHECK(calls == 3);
    CHECK(r.t_reached < c.t_end);
    CHECK(r.time.back() == r.t_reached);
}

TEST_CASE("runs in parallel threads give identical results") {
    auto c = prescribed({"H", "D", "O"}, {1e11, 1e7, 1e12}, {1e36, 1e32, 1e38},
                        DensityScaling::Inventory, 1000.0);
    c.temperature = ExobaseTemperature::table({0.0, 4 * Gyr}, {1500.0, 900.0});
    c.t_end = 4 * Gyr;
    const auto reference = evolve(c);
    std::vector<EvolutionResult> results(4);
    std::vector<std::thread> threads;
    for (auto& slot : results)
        threads.emplace_back([&c, &slot] { slot = evolve(c); });
    for (auto& t : threads)
        t.join();
    for (const auto& r : results) {
        CHECK(r.inventory == reference.inventory);
        CHECK(r.steps == reference.steps);
    }
}

TEST_CASE("a thermosphere's minor species decays exponentially when its share follows it") {
    // Worked analytic solution: a trace of H (x = 1e-10) in an N2 thermosphere at constant
    // temperature. Its exobase density is proportional to its mole fraction, which follows its
    // inventory, while the N2-made exobase hardly moves: dN/dt = -k N with k the escape rate at
    // the start over N0, so ln(N/N0) = -k t (to the ~1e-8 by which the trace moves the exobase:
    // H's long scale height makes a 1e-7 trace shift it by 3e-5).
    const double T = 900.0, N_H = 1e33;
    const Planet planet(constants::M_earth, constants::R_earth);
    const Thermosphere th(planet.mass(), planet.radius(), constants::R_earth + 100e3, 1e19,
                          {species("N2"), species("H")}, {1.0 - 1e-10, 1e-10},
                          TemperatureProfile::isothermal(T));
    REQUIRE(th.exobase().found());
    const double r = th.exobase().radius;
    const double k = 4 * constants::pi * r * r * th.escape_flux(1, false) / N_H;
    EvolutionConfig c(planet);
    c.species = {species("N2"), species("H")};
    c.initial_inventory = {1e43, N_H};
    c.exobase =
        std::make_shared<ThermosphereExobase>(th, std::vector<std::string>{"N2", "H"}, false);
    c.temperature = ExobaseTemperature::constant(T);
    c.t_end = 3.0 / k;
    c.rtol = 1e-10;
    c.t_eval = {1.0 / k, 2.0 / k, 3.0 / k};
    const auto res = evolve(c);
    for (std::size_t j = 0; j < 3; ++j)
        CHECK(std::log(res.inventory[col(res, j, 1)] / N_H) ==
              doctest::Approx(-(j + 1.0)).epsilon(1e-6));
    CHECK(res.exobase_radius[0] == doctest::Approx(r).epsilon(1e-6));
    CHECK(res.exobase_temperature[0] == doctest::Approx(T).epsilon(1e-12));
    MESSAGE("thermosphere run: " << res.steps << " steps, " << res.rhs_evaluations
                                 << " evaluations");
}

TEST_CASE("a thermosphere exobase reuses its column integral and diffusion parameters at a "
          "repeated temperature, bit for bit") {
    // Two models that differ only in their Bates shape, evaluated in turn at the same
    // temperatures on one thread: each must give what a model of its own, fresh on its own
    // thread (an empty cache), gives; the cache is keyed by the model. The escape rates are
    // the coupled diffusion-Jeans ones, so they also read the diffusion parameters.
    const Planet planet(constants::M_earth, constants::R_earth);
    const double r_h = constants::R_earth + 120e3;
    auto model = [&](double shape) {
        const Thermosphere th(planet.mass(), planet.radius(), r_h, 3e18,
                              {species("N2"), species("O"), species("H")}, {0.8, 0.2 - 1e-5, 1e-5},
                              TemperatureProfile::bates(1000.0, 360.0, shape, r_h));
        return ThermosphereExobase(th, {"N2", "O", "H"}, true);
    };
    const ThermosphereExobase a = model(1.0 / 50e3), b = model(1.0 / 30e3);
    const double log_fraction[3] = {0.0, -0.1, -2.0};
    auto state = [&](const ThermosphereExobase& m, double T) {
        ExobaseState s;
        s.log_density.resize(3);
        s.log_escape_rate.resize(3);
        m.evaluate(0.0, log_fraction, T, s);
        return s;
    };
    auto fresh = [&](const ThermosphereExobase& m, double T) {
        ExobaseState s;
        std::thread([&] { s = state(m, T); }).join();
        return s;
    };
    std::size_t compared = 0;
    for (const double T : {1200.0, 1200.0, 900.0, 1200.0})
        for (const ThermosphereExobase* m : {&a, &b, &a}) {
            const ExobaseState got = state(*m, T), want = fresh(*m, T);
            CHECK(got.radius == want.radius);
            CHECK(got.log_escape_rate == want.log_escape_rate);
            CHECK(got.log_density == want.log_density);
            ++compared;
        }
    CHECK(compared == 12);
    // The two shapes give different exobases: a shared column would have shown above.
    CHECK(state(a, 1200.0).radius != state(b, 1200.0).radius);
}

TEST_CASE("no exobase in a hot thermosphere: energy-limited loss until an exobase forms") {
    // The hot H/He envelope of the thermosphere tests (invented sub-Neptune: 5 Earth masses,
    // 2.5 Earth radii), cooling from 5000 K to 300 K while its star is saturated. Down to about
    // 600 K the gas is collisional out to the outer bound: no exobase, hydrodynamic outflow.
    const double R = 2.5 * constants::R_earth, M = 5 * constants::M_earth;
    XuvHistory x;
    x.saturation_time = 100 * Myr;
    const Star star(constants::M_sun, constants::L_sun, x);
    const Planet planet(M, R, 0.1 * constants::au, star);
    const Thermosphere th(M, R, R * 1.05, 1e18, {species("H"), species("He")}, {0.9, 0.1},
                          TemperatureProfile::isothermal(5000.0));
    REQUIRE(th.exobase().status == ExobaseStatus::none_below_outer_radius);
    EvolutionConfig c(planet);
    c.species = {species("H"), species("He")};
    c.initial_inventory = {1e51, 1e50};
    c.exobase =
        std::make_shared<ThermosphereExobase>(th, std::vector<std::string>{"H", "He"}, false);
    c.t_start = 10 * Myr;
    c.t_end = 60 * Myr;
    c.temperature = ExobaseTemperature::table({c.t_start, c.t_end}, {5000.0, 300.0});
    c.t_eval = {10 * Myr, 60 * Myr};
    c.rtol = 1e-8;

    // Without energy-limited escape the model cannot go on, and says why.
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("no exobase at t ="), NumericalError);
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("energy-limited"), NumericalError);

    HydrodynamicOptions h;
    h.efficiency = 0.15;
    h.roche_lobe = false;
    h.drag = false;
    c.hydrodynamic = h;
    const EvolutionResult r = evolve(c);
    CHECK(r.completed);
    CHECK(r.regime[0] == static_cast<int>(Regime::Hydrodynamic));
    CHECK(r.energy_limited[0] == 1);
    // Watson et al. (1981) by hand, R_xuv = R, no Roche factor: dM/dt = eta pi R^3 F / (G M),
    // all of it H (no drag); F = R_sat L_sun / (4 pi a^2) during saturation.
    const double F = x.saturation_ratio * constants::L_sun /
                     (4 * constants::pi * (0.1 * constants::au) * (0.1 * constants::au));
    const double q = 0.15 * constants::pi * R * R * R * F / (constants::G * M) / species("H").mass;
    CHECK(r.escape_rate[col(r, 0, 0)] == doctest::Approx(q).epsilon(1e-12));
    // Cooling, an exobase forms below the outer bound: Jeans escape takes over from there.
    REQUIRE(!r.regime_changes.empty());
    CHECK(r.regime_changes.front().from == Regime::Hydrodynamic);
    CHECK(r.regime_changes.front().time > c.t_start);
    CHECK(r.regime_changes.front().time < c.t_end);
    CHECK(r.energy_limited[1] == 0);
    CHECK(r.regime[1] != static_cast<int>(Regime::Hydrodynamic));
    CHECK(r.exobase_radius[1] < r.exobase_radius[0]); // below the outer bound now
    CHECK(r.exobase_radius[0] == doctest::Approx(th.outer_radius()).epsilon(1e-12));
    // H lost: at most the energy-limited rate over the whole span.
    const double lost = c.initial_inventory[0] - r.inventory[col(r, 1, 0)];
    CHECK(lost > 0.0);
    CHECK(lost < q * (c.t_end - c.t_start));
    MESSAGE("outflow ends at " << r.regime_changes.front().time / Myr << " Myr, T = "
                               << 5000.0 - 4700.0 * (r.regime_changes.front().time - c.t_start) /
                                               (c.t_end - c.t_start)
                               << " K");
}

TEST_CASE("a thermosphere of one species loses it at a constant rate, held at depletion") {
    // With a single species its mole fraction stays 1, so the homopause density and the exobase
    // are fixed and the loss is constant: N(t) = N0 - Q t (worked analytic solution), and the
    // species is held from its depletion time (1 - f) N0 / Q on.
    const double T = 1200.0;
    const Planet planet(constants::M_earth, constants::R_earth);
    const Thermosphere th(planet.mass(), planet.radius(), constants::R_earth + 100e3, 1e18,
                          {species("O")}, {1.0}, TemperatureProfile::isothermal(T));
    REQUIRE(th.exobase().found());
    const double r = th.exobase().radius;
    const double Q = 4 * constants::pi * r * r * th.escape_flux(0, true);
    const double N0 = Q * 1 * Gyr;
    EvolutionConfig c(planet);
    c.species = {species("O")};
    c.initial_inventory = {N0};
    c.exobase = std::make_shared<ThermosphereExobase>(th, std::vector<std::string>{"O"}, true);
    c.temperature = ExobaseTemperature::constant(T);
    c.t_end = 2 * Gyr;
    c.rtol = 1e-10;
    c.t_eval = {0.5 * Gyr, 1.5 * Gyr};
    const auto res = evolve(c);
    CHECK(res.inventory[0] == doctest::Approx(N0 - Q * 0.5 * Gyr).epsilon(1e-8));
    CHECK(res.depletion_time[0] == doctest::Approx((1 - 1e-3) * Gyr).epsilon(1e-8));
    CHECK(res.inventory[1] == doctest::Approx(1e-3 * N0).epsilon(1e-8));
}

TEST_CASE("an evolving thermosphere refuses a tabulated profile and another planet") {
    const Thermosphere table(
        constants::M_earth, constants::R_earth, constants::R_earth + 100e3, 1e18, {species("O")},
        {1.0},
        TemperatureProfile::table({constants::R_earth + 100e3, constants::R_earth + 500e3},
                                  {500.0, 1000.0}));
    CHECK_THROWS_WITH_AS(ThermosphereExobase(table, {"O"}, true), doctest::Contains("table"),
                         InputError);
    const Thermosphere th(constants::M_earth, constants::R_earth, constants::R_earth + 100e3, 1e18,
                          {species("O")}, {1.0}, TemperatureProfile::isothermal(1000.0));
    CHECK_THROWS_AS(ThermosphereExobase(th, {"H"}, true), InputError);
    EvolutionConfig c(Planet(2 * constants::M_earth, constants::R_earth));
    c.species = {species("O")};
    c.initial_inventory = {1e40};
    c.exobase = std::make_shared<ThermosphereExobase>(th, std::vector<std::string>{"O"}, true);
    c.t_end = Gyr;
    CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains("is not the evolving planet"), InputError);
}

TEST_CASE("a source balancing a fast loss: Rosenbrock4 takes few steps, to the tolerance") {
    // dN/dt = S - k N with e-folding 1e4 yr over 10 Gyr: N(t) = S/k + (N0 - S/k) exp(-k t)
    // (worked analytic solution). Stiff: the explicit pair is held to steps of ~1/k.
    const double T = 1000.0, n0 = 1e11;
    const double Q0 = rate("H", n0, T);
    const double N0 = Q0 * 1e4 * constants::year, k = Q0 / N0, S = 0.5 * Q0;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T);
    c.sources = {SourceRate(S)};
    c.t_end = 10 * Gyr;
    c.rtol = 1e-8;
    c.t_eval = {1e3 * constants::year, 1e4 * constants::year, 1 * Gyr, 10 * Gyr};
    c.max_steps = 10000000;
    const auto implicit = evolve(c); // the default picks Rosenbrock4 when there are sources
    CHECK(implicit.stepper == "rosenbrock4");
    for (std::size_t j = 0; j < 4; ++j) {
        const double t = implicit.time[j];
        CHECK(implicit.inventory[j] ==
              doctest::Approx(S / k + (N0 - S / k) * std::exp(-k * t)).epsilon(1e-7));
    }
    CHECK(implicit.steps < 1000);
    c.stepper = StepperKind::Dopri5;
    const auto explicit_ = evolve(c);
    CHECK(explicit_.stepper == "dopri5");
    CHECK(explicit_.inventory.back() == doctest::Approx(implicit.inventory.back()).epsilon(1e-7));
    MESSAGE("source against a 1e4-yr loss over 10 Gyr: rosenbrock4 "
            << implicit.steps << " steps, dopri5 " << explicit_.steps << " steps");
    CHECK(explicit_.steps > 50 * implicit.steps);
}

TEST_CASE("Rosenbrock4 reproduces the analytic solutions of Dopri5's tests") {
    // Same worked solutions as above: exponential decay and linear loss with depletion.
    const double T = 1000.0, n0 = 1e11;
    const double Q0 = rate("H", n0, T);
    auto c = prescribed({"H"}, {n0}, {Q0 * Gyr}, DensityScaling::Inventory, T);
    c.stepper = StepperKind::Rosenbrock4;
    c.t_end = 8 * Gyr;
    c.rtol = 1e-10;
    c.t_eval = {1 * Gyr, 5 * Gyr};
    auto r = evolve(c);
    CHECK(r.inventory[0] == doctest::Approx(Q0 * Gyr * std::exp(-1.0)).epsilon(1e-9));
    CHECK(r.inventory[1] == doctest::Approx(Q0 * Gyr * std::exp(-5.0)).epsilon(1e-9));
    CHECK(r.depletion_time[0] == doctest::Approx(std::log(1000.0) * Gyr).epsilon(1e-9));
    auto f = prescribed({"H"}, {n0}, {2 * Q0 * Gyr}, DensityScaling::Fixed, T);
    f.stepper = StepperKind::Rosenbrock4;
    f.t_end = 3 * Gyr;
    f.rtol = 1e-10;
    f.t_eval = {1 * Gyr, 2.5 * Gyr};
    r = evolve(f);
    // ln(N0 - Q t) bends sharply towards depletion: global error ~13 rtol here (measured).
    CHECK(r.inventory[0] == doctest::Approx(Q0 * Gyr).epsilon(1e-8));
    CHECK(r.depletion_time[0] == doctest::Approx((1 - 1e-3) * 2 * Gyr).epsilon(1e-8));
    CHECK(r.inventory[1] == doctest::Approx(1e-3 * 2 * Q0 * Gyr).epsilon(1e-9));
}

TEST_CASE("a constant given loss on top of a proportional loss: the exact solution") {
    // Worked analytic solution: dN/dt = -k N - G gives N(t) = (N0 + G/k) e^(-k t) - G/k,
    // depleted (N = f N0) at t_d = ln((N0 + G/k) / (f N0 + G/k)) / k and held there after.
    const double T = 1000.0, n0 = 1e11, f = 1e-3;
    const double Q0 = rate("H", n0, T);
    const double N0 = Q0 * 1.0 * Gyr;
    const double k = Q0 / N0, G = 0.5 * Q0;
    auto c = prescribed({"H"}, {n0}, {N0}, DensityScaling::Inventory, T);
    c.given_losses = {GivenLoss(G)};
    c.t_end = 10 * Gyr;
    c.rtol = 1e-10;
    c.depletion_fraction = f;
    for (int i = 0; i <= 20; ++i)
        c.t_eval.push_back(0.5 * i * Gyr);
    const auto r = evolve(c);
    const double t_d = std::log((N0 + G / k) / (f * N0 + G / k)) / k;
    CHECK(r.depletion_time[0] == doctest::Approx(t_d).epsilon(1e-8));
    for (std::size_t i = 0; i < r.time_count(); ++i) {
        const double t = r.time[i];
        if (t < t_d) {
            const double exact = (N0 + G / k) * std::exp(-k * t) - G / k;
            CHECK(std::abs(r.inventory[i] - exact) < 1e-9 * (exact + G / k));
            CHECK(r.escape_rate[i] == doctest::Approx(k * r.inventory[i]).epsilon(1e-9));
            CHECK(r.given_loss_rate[i] == G);
        } else {
            CHECK(r.inventory[i] == doctest::Approx(f * N0).epsilon(1e-8));
            CHECK(r.given_loss_rate[i] == 0.0);
        }
    }
}

TEST_CASE("given losses: bad input and their forms") {
    CHECK_THROWS_AS(GivenLoss(-1.0), InputError);
    CHECK_THROWS_AS(GivenLoss({0.0, 1.0}, {1.0, -1.0}), InputError);
    CHECK_THROWS_AS(GivenLoss::xuv_power_law(1.0, 0.0, 1.0), InputError);
    CHECK(GivenLoss({0.0, 2.0}, {0.0, 4.0})(1.0, 0.0) == doctest::Approx(2.0));
    // L_ref (F / F_ref)^p at F = 4 F_ref, p = 1.5: 8 L_ref (worked by hand).
    const auto law = GivenLoss::xuv_power_law(3.0, 2.0, 1.5);
    CHECK(law(0.0, std::log(8.0)) == doctest::Approx(24.0).epsilon(1e-14));
    CHECK(law.needs_xuv_flux());
    CHECK(GivenLoss().is_zero());
    auto c = prescribed({"H"}, {1e11}, {1e30}, DensityScaling::Inventory, 1000.0);
    c.t_end = Gyr;
    c.given_losses = {GivenLoss(1.0), GivenLoss(1.0)};
    CHECK_THROWS_WITH_AS(c.validate(), doctest::Contains("given_losses"), InputError);
    c.given_losses = {law};
    CHECK_THROWS_WITH_AS(c.validate(), doctest::Contains("needs the planet's semi_major_axis"),
                         InputError);
}

TEST_CASE("energy-limited loss at the XUV absorption radius, capped by recombination") {
    // During saturation the flux is constant, so the light species loses Mdot / m_H per second
    // with Mdot the standalone xuv_driven_mass_loss at the radius of xuv_absorption_radius
    // (outflow.hpp; worked: linear loss).
    XuvHistory x;
    x.saturation_time = 100 * Myr;
    const Star star(constants::M_sun, constants::L_sun, x);
    const Planet planet(5 * constants::M_earth, 2.5 * constants::R_earth, 0.02 * constants::au,
                        star);
    EvolutionConfig c(planet);
    c.species = {species("H")};
    c.initial_inventory = {1e52};
    c.exobase =
        std::make_shared<PrescribedExobase>(1.1 * planet.radius(), std::vector<std::string>{"H"},
                                            std::vector<double>{1e13}, DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(3000.0);
    HydrodynamicOptions h;
    h.activation = HydrodynamicActivation::Always;
    h.roche_lobe = false;
    XuvAbsorption a;
    a.base_density = 1e17;
    a.cross_section = 2e-22;
    a.mean_molecular_mass = 2.3 * 1.66053906660e-27;
    h.absorption = a; // at the exobase temperature, 3000 K
    h.recombination = RecombinationLimit{};
    c.hydrodynamic = h;
    c.t_start = 10 * Myr;
    c.t_end = 90 * Myr;
    c.rtol = 1e-10;
    c.t_eval = {10 * Myr, 90 * Myr};
    const auto r = evolve(c);
    const double H = scale_height(3000.0, a.mean_molecular_mass, planet.mass(), planet.radius());
    const double r_xuv = xuv_absorption_radius(planet.radius(), a.base_density, H, a.cross_section);
    CHECK(r_xuv > 1.05 * planet.radius());
    const double F = planet.xuv_flux(50 * Myr);
    const double mdot = xuv_driven_mass_loss(0.15, planet.radius(), r_xuv, F, planet.mass(), 1.0);
    const double limited = energy_limited_mass_loss(0.15, planet.radius(), r_xuv, F, planet.mass());
    CHECK(mdot < 0.9 * limited); // the cap acts
    const double q = mdot / species("H").mass;
    CHECK(r.escape_rate[0] == doctest::Approx(q).epsilon(1e-12));
    CHECK(r.inventory[1] == doctest::Approx(1e52 - q * 80 * Myr).epsilon(1e-9));
    h.xuv_radius = 2.0 * planet.radius();
    CHECK_THROWS_AS(h.validate(), InputError); // a radius and an absorption model
}

namespace {

// A sub-Neptune-like invented planet losing hydrogen at the rate of energy-limited escape,
// optionally capped by a transonic wind; densities irrelevant (activation always).
EvolutionConfig wind_config(std::optional<TransonicWind> wind, double t_end, bool recombination,
                            double n0 = 1e50) {
    XuvHistory x;
    x.saturation_time = 100 * Myr;
    const Star star(constants::M_sun, constants::L_sun, x);
    const Planet planet(5 * constants::M_earth, 2.5 * constants::R_earth, 0.02 * constants::au,
                        star);
    EvolutionConfig c(planet);
    c.species = {species("H")};
    c.initial_inventory = {n0};
    c.exobase =
        std::make_shared<PrescribedExobase>(1.1 * planet.radius(), std::vector<std::string>{"H"},
                                            std::vector<double>{1e13}, DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(3000.0);
    HydrodynamicOptions h;
    h.activation = HydrodynamicActivation::Always;
    h.roche_lobe = false;
    if (recombination)
        h.recombination = RecombinationLimit{};
    h.transonic = wind;
    c.hydrodynamic = h;
    c.t_start = 10 * Myr;
    c.t_end = t_end;
    c.rtol = 1e-10;
    for (int k = 0; k <= 40; ++k)
        c.t_eval.push_back(c.t_start + (t_end - c.t_start) * k / 40.0);
    return c;
}

} // namespace

TEST_CASE("transonic wind: the smaller rate throughout gives linear loss at the Parker rate") {
    // Worked: a constant wind rate Mdot takes dN/dt = -Mdot / m_H from the single escaping
    // species, N(t) = N0 - Mdot (t - t0) / m_H, while the energy-limited rate stays larger
    // (the flux falls after 100 Myr, still above the crossing at 2 Gyr).
    TransonicWind w;
    w.temperature = 5000.0;
    w.base_density = 1e13;
    const auto c = wind_config(w, 2 * Gyr, false);
    const Planet& p = c.planet;
    const double m = species("H").mass;
    const double mdot = parker_mass_loss(p.radius(), w.base_density, w.temperature, m, p.mass());
    const double el_end =
        energy_limited_mass_loss(0.15, p.radius(), p.radius(), p.xuv_flux(2 * Gyr), p.mass());
    CHECK(mdot < 0.5 * el_end);
    const auto r = evolve(c);
    for (std::size_t k = 0; k < r.time_count(); ++k) {
        CHECK(r.escape_rate[k] * m == doctest::Approx(mdot).epsilon(1e-14));
        CHECK(r.inventory[k] ==
              doctest::Approx(1e50 - mdot * (r.time[k] - c.t_start) / m).epsilon(10 * c.rtol));
    }
    CHECK(r.inventory.back() < 0.95e50); // a measurable share of the inventory is lost
    // The given mean molecular mass replaces the escaping species' mass.
    w.mean_molecular_mass = 2.0 * m;
    const auto r2 = evolve(wind_config(w, 2 * Gyr, false));
    CHECK(r2.escape_rate[0] * m ==
          doctest::Approx(parker_mass_loss(p.radius(), 1e13, 5000.0, 2.0 * m, p.mass()))
              .epsilon(1e-14));
}

TEST_CASE("transonic wind: a larger wind rate leaves energy-limited loss unchanged") {
    TransonicWind w;
    w.temperature = 5000.0;
    w.base_density = 1e25; // the wind could carry far more than the XUV lifts
    for (bool recombination : {false, true}) {
        const auto with = evolve(wind_config(w, 2 * Gyr, recombination));
        const auto without = evolve(wind_config(std::nullopt, 2 * Gyr, recombination));
        REQUIRE(with.time_count() == without.time_count());
        for (std::size_t k = 0; k < with.time_count(); ++k) {
            CHECK(with.inventory[k] == without.inventory[k]);
            CHECK(with.escape_rate[k] == without.escape_rate[k]);
        }
    }
}

TEST_CASE("transonic wind: the switch to energy-limited loss after saturation") {
    // Worked: the wind rate P applies until the energy-limited rate a F(t) falls to it at t_s,
    // F(t) = F_sat (t / t_sat)^-beta after saturation; then
    // N(t) = N(t_s) - a F_sat t_sat^beta (t^(1-beta) - t_s^(1-beta)) / ((1 - beta) m_H).
    TransonicWind w;
    w.temperature = 5000.0;
    w.base_density = 3e15;
    const auto c = wind_config(w, 3 * Gyr, false, 1e52);
    const Planet& p = c.planet;
    const double m = species("H").mass;
    const double P = parker_mass_loss(p.radius(), 3e15, 5000.0, m, p.mass());
    const double a = energy_limited_mass_loss(0.15, p.radius(), p.radius(), 1.0, p.mass());
    const double t_sat = 100 * Myr, beta = 1.23, f_sat = p.xuv_flux(t_sat);
    const double t_s = t_sat * std::pow(P / (a * f_sat), -1.0 / beta);
    REQUIRE(t_s > 200 * Myr);
    REQUIRE(t_s < 2 * Gyr);
    const auto r = evolve(c);
    const double n_s = 1e52 - P * (t_s - c.t_start) / m;
    for (std::size_t k = 0; k < r.time_count(); ++k) {
        const double t = r.time[k];
        const double exact = t <= t_s
                                 ? 1e52 - P * (t - c.t_start) / m
                                 : n_s - a * f_sat * std::pow(t_sat, beta) *
                                             (std::pow(t, 1 - beta) - std::pow(t_s, 1 - beta)) /
                                             ((1 - beta) * m);
        CHECK(r.inventory[k] == doctest::Approx(exact).epsilon(10 * c.rtol));
    }
    CHECK(r.inventory.back() < 0.9e52); // both laws take a measurable share
}

TEST_CASE("transonic wind: bad inputs refused by name") {
    const auto expect = [](TransonicWind w, const char* text) {
        auto c = wind_config(w, Gyr, false);
        CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains(text), InputError);
    };
    TransonicWind w;
    w.temperature = 5000.0;
    w.base_density = 1e13;
    auto bad = w;
    bad.temperature = 0.0;
    expect(bad, "transonic temperature must be finite and > 0, got 0");
    bad = w;
    bad.base_density = -1.0;
    expect(bad, "transonic base_density must be finite and > 0, got -1");
    bad = w;
    bad.mean_molecular_mass = std::nan("");
    expect(bad, "transonic mean_molecular_mass must be finite and >= 0, got nan");
}
