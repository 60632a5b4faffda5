#include <doctest/doctest.h>

#include <cmath>
#include <string>
#include <thread>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/diffusion.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/species.hpp"
#include "exosieve/thermosphere.hpp"

using namespace exosieve;
using constants::amu;
using constants::G;
using constants::k_B;

namespace {

const double M_planet = constants::M_earth;
const double R_planet = constants::R_earth;

std::vector<Species> named(std::initializer_list<const char*> names) {
    std::vector<Species> out;
    for (const char* n : names)
        out.push_back(species(n));
    return out;
}

// Earth-like inputs (common practice, roughly the mean thermosphere of the standard
// atmospheres): homopause at 120 km with 5e17 m^-3, N2/O2/O = 0.75/0.10/0.15, 360 K there,
// Bates profile to 1000 K with shape 1/(50 km).
Thermosphere earth_like() {
    return Thermosphere(M_planet, R_planet, R_planet + 120e3, 5e17, named({"N2", "O2", "O"}),
                        {0.75, 0.10, 0.15},
                        TemperatureProfile::bates(1000.0, 360.0, 1.0 / 50e3, R_planet + 120e3));
}

// Simpson's rule for integral_a^b f(r) dr with n (even) intervals.
template <class F> double simpson(F f, double a, double b, int n) {
    const double h = (b - a) / n;
    double sum = f(a) + f(b);
    for (int i = 1; i < n; ++i)
        sum += (i % 2 ? 4.0 : 2.0) * f(a + i * h);
    return sum * h / 3.0;
}

// Worked solution of d ln n / dr = -m g / (k T) - (1 + alpha) d ln T / dr by quadrature.
double density_by_quadrature(const Thermosphere& t, std::size_t i, double r, int intervals) {
    const Species& s = t.species()[i];
    const double M = t.planet_mass(), r_h = t.homopause_radius();
    const auto& T = t.profile();
    const double integral =
        simpson([&](double x) { return G * M * s.mass / (k_B * x * x * T(x)); }, r_h, r, intervals);
    return t.mole_fractions()[i] * t.homopause_density() *
           std::pow(T(r_h) / T(r), 1.0 + s.thermal_diffusion_factor) * std::exp(-integral);
}

} // namespace

TEST_CASE("temperature profiles") {
    const auto iso = TemperatureProfile::isothermal(800.0);
    CHECK(iso(7e6) == 800.0);
    CHECK(iso.slope(7e6) == 0.0);
    const double r_b = R_planet + 100e3, s = 1.0 / 40e3;
    const auto bates = TemperatureProfile::bates(1200.0, 200.0, s, r_b);
    // Bates (1959): T(r_b) = T_b, T -> T_inf, dT/dr = s (T_inf - T).
    CHECK(bates(r_b) == doctest::Approx(200.0).epsilon(1e-15));
    CHECK(bates(r_b + 2e6) == doctest::Approx(1200.0).epsilon(1e-15));
    CHECK(bates.slope(r_b + 30e3) == doctest::Approx(s * (1200.0 - bates(r_b + 30e3))));
    CHECK(std::fabs(bates(bates.flat_above()) - 1200.0) <= 1e-15 * 1200.0);
    const auto table = TemperatureProfile::table({1.0e7, 1.1e7, 1.3e7}, {300.0, 500.0, 400.0});
    CHECK(table(0.5e7) == 300.0);
    CHECK(table(1.05e7) == doctest::Approx(400.0));
    CHECK(table(1.2e7) == doctest::Approx(450.0));
    CHECK(table(2e7) == 400.0);
    CHECK(table.slope(1.05e7) == doctest::Approx(200.0 / 1e6));
    CHECK_THROWS_AS(TemperatureProfile::table({1e7, 1e7}, {300.0, 400.0}), InputError);
    CHECK_THROWS_AS(TemperatureProfile::table({1e7, 2e7}, {300.0, -1.0}), InputError);
    CHECK_THROWS_AS(TemperatureProfile::bates(1000.0, 0.0, s, r_b), InputError);
    CHECK_THROWS_AS(TemperatureProfile::isothermal(std::nan("")), InputError);
}

TEST_CASE("isothermal densities equal the closed form") {
    // Worked solution (DESIGN 3.3): n_i(r) = x_i n_h exp(-lambda_i(r_h) (1 - r_h / r)).
    const double r_h = R_planet + 100e3, n_h = 1e19, T = 700.0;
    Thermosphere t(M_planet, R_planet, r_h, n_h, named({"N2", "O", "He", "H"}),
                   {0.6, 0.35, 0.04, 0.01}, TemperatureProfile::isothermal(T));
    for (std::size_t i = 0; i < 4; ++i) {
        const double lambda_h = jeans_parameter(T, t.species()[i].mass, M_planet, r_h);
        for (double z : {0.0, 10e3, 250e3, 1e6, 2e7}) {
            const double r = r_h + z;
            CAPTURE(i);
            CAPTURE(z);
            CHECK(t.density(i, r) == doctest::Approx(t.mole_fractions()[i] * n_h *
                                                     std::exp(-lambda_h * (1.0 - r_h / r)))
                                         .epsilon(1e-12));
        }
    }
    CHECK(t.temperature(r_h + 5e5) == T);
}

TEST_CASE("Bates-profile densities equal a quadrature of the diffusive-equilibrium equation") {
    const Thermosphere t = earth_like();
    const double r_h = t.homopause_radius();
    for (std::size_t i = 0; i < 3; ++i)
        for (double z : {1e3, 37e3, 150e3, 400e3, 900e3, 3e6}) {
            CAPTURE(i);
            CAPTURE(z);
            CHECK(t.density(i, r_h + z) ==
                  doctest::Approx(density_by_quadrature(t, i, r_h + z, 20000)).epsilon(1e-9));
        }
    // Far above the homopause the column continues in closed form with T = T_inf.
    const double far = 30 * R_planet;
    CHECK(t.density(2, far) ==
          doctest::Approx(density_by_quadrature(t, 2, far, 400000)).epsilon(1e-7));
}

TEST_CASE("thermal-diffusion factor enters as (T_h / T)^(1 + alpha)") {
    std::vector<Species> list = named({"N2", "He"});
    list[1].thermal_diffusion_factor = -0.38; // He's value in data/species.csv (from memory)
    const double r_h = R_planet + 100e3;
    Thermosphere t(M_planet, R_planet, r_h, 1e19, list, {0.99, 0.01},
                   TemperatureProfile::bates(900.0, 190.0, 1.0 / 30e3, r_h));
    for (double z : {20e3, 200e3, 600e3}) {
        CAPTURE(z);
        CHECK(t.density(1, r_h + z) ==
              doctest::Approx(density_by_quadrature(t, 1, r_h + z, 20000)).epsilon(1e-9));
    }
    // Against alpha = 0, the ratio is (T / T_h)^0.38: a negative alpha enriches He where the
    // gas is hotter, as thermal diffusion does for a light gas in a heavy one.
    std::vector<Species> plain = named({"N2", "He"});
    plain[1].thermal_diffusion_factor = 0.0;
    Thermosphere u(M_planet, R_planet, r_h, 1e19, plain, {0.99, 0.01},
                   TemperatureProfile::bates(900.0, 190.0, 1.0 / 30e3, r_h));
    const double r = r_h + 300e3;
    CHECK(t.density(1, r) / u.density(1, r) ==
          doctest::Approx(std::pow(t.temperature(r) / 190.0, 0.38)).epsilon(1e-10));
    CHECK(t.density(1, r) / u.density(1, r) > 1.7); // (900 K / 190 K)^0.38 = 1.81
}

TEST_CASE("tabulated profile: densities equal a quadrature over the same piecewise-linear T") {
    const double r_h = R_planet + 110e3;
    const std::vector<double> radius = {r_h - 10e3, r_h + 40e3, r_h + 100e3, r_h + 250e3,
                                        r_h + 600e3};
    const std::vector<double> temperature = {240.0, 500.0, 800.0, 950.0, 1000.0};
    Thermosphere t(M_planet, R_planet, r_h, 1e18, named({"N2", "O", "He"}), {0.8, 0.19, 0.01},
                   TemperatureProfile::table(radius, temperature));
    for (std::size_t i = 0; i < 3; ++i)
        for (double z : {20e3, 40e3, 90e3, 400e3, 800e3}) {
            CAPTURE(i);
            CAPTURE(z);
            // Simpson is exact only within segments: integrate segment by segment.
            const double r = r_h + z;
            std::vector<double> cuts{r_h};
            for (double node : radius)
                if (node > r_h && node < r)
                    cuts.push_back(node);
            cuts.push_back(r);
            double integral = 0.0;
            for (std::size_t c = 0; c + 1 < cuts.size(); ++c)
                integral += simpson(
                    [&](double x) {
                        return G * M_planet * t.species()[i].mass /
                               (k_B * x * x * t.temperature(x));
                    },
                    cuts[c], cuts[c + 1], 4000);
            // (T_h / T)^(1 + alpha): He carries its thermal-diffusion factor.
            const double expected = t.mole_fractions()[i] * 1e18 *
                                    std::pow(t.temperature(r_h) / t.temperature(r),
                                             1.0 + t.species()[i].thermal_diffusion_factor) *
                                    std::exp(-integral);
            CHECK(t.density(i, r) == doctest::Approx(expected).epsilon(1e-9));
        }
}

TEST_CASE("Earth-like thermosphere: exobase near 500 km (common practice)") {
    const Thermosphere t = earth_like();
    const Exobase& e = t.exobase();
    REQUIRE(e.found());
    const double altitude = e.radius - R_planet;
    MESSAGE("Earth-like exobase at " << altitude / 1e3 << " km, " << e.temperature << " K");
    // Common practice: Earth's exobase lies near 500 km (400-700 km with solar activity).
    CHECK(altitude > 400e3);
    CHECK(altitude < 650e3);
    CHECK(e.temperature == doctest::Approx(1000.0).epsilon(1e-2));
    // O dominates there.
    CHECK(e.densities[2] > e.densities[0]);
    CHECK(e.densities[2] > e.densities[1]);
    CHECK(e.message.find("exobase at") != std::string::npos);
}

TEST_CASE("the exobase criterion holds at the radius found and fails everywhere below") {
    for (const Thermosphere& t :
         {earth_like(),
          Thermosphere(M_planet, R_planet, R_planet + 100e3, 1e19, named({"N2", "O", "He", "H"}),
                       {0.7, 0.29, 0.009999, 0.000001}, TemperatureProfile::isothermal(1200.0))}) {
        const Exobase& e = t.exobase();
        REQUIRE(e.found());
        // mean free path = scale height, both computed here from the densities found.
        double collisions = 0.0, n = 0.0, nm = 0.0;
        for (std::size_t j = 0; j < t.species().size(); ++j) {
            collisions += e.densities[j] * t.species()[j].cross_section;
            n += e.densities[j];
            nm += e.densities[j] * t.species()[j].mass;
        }
        const double h = k_B * e.temperature * e.radius * e.radius / (G * t.planet_mass() * nm / n);
        CHECK(1.0 / collisions == doctest::Approx(h).epsilon(1e-10));
        CHECK(std::fabs(t.exobase_criterion(e.radius)) < 1e-10);
        CHECK(t.mean_free_path(e.radius) ==
              doctest::Approx(t.scale_height(e.radius)).epsilon(1e-10));
        for (int k = 0; k < 2000; ++k) {
            const double r = t.homopause_radius() + (e.radius - t.homopause_radius()) * k / 2000.0;
            CHECK(t.exobase_criterion(r) < 0.0);
        }
    }
}

TEST_CASE("a light minor species makes the criterion non-monotonic: the lowest crossing wins") {
    // O with 0.1 % H at 1000 K: the criterion crosses zero near 430 km, turns collisional again
    // where H takes over (the mean mass, and with it the scale height, changes 16-fold) and
    // crosses once more above 1000 km.
    Thermosphere t(M_planet, R_planet, R_planet + 120e3, 1e16, named({"O", "H"}), {0.999, 0.001},
                   TemperatureProfile::isothermal(1000.0));
    const Exobase& e = t.exobase();
    REQUIRE(e.found());
    // the precondition of this test: collisional again higher up
    bool collisional_above = false;
    for (double z = 0; z < 2e6; z += 5e3)
        collisional_above = collisional_above || t.exobase_criterion(e.radius + 50e3 + z) < 0.0;
    CHECK(collisional_above);
    for (int k = 0; k < 4000; ++k) {
        const double r = t.homopause_radius() + (e.radius - t.homopause_radius()) * k / 4000.0;
        CHECK(t.exobase_criterion(r) < 0.0);
    }
    CHECK(std::fabs(t.exobase_criterion(e.radius)) < 1e-10);
    CHECK((e.radius - R_planet) / 1e3 == doctest::Approx(433.0).epsilon(0.01));
}

TEST_CASE("tenuous Mars-like thermosphere") {
    // Mars (from memory): GM = 4.2828e13 m^3 s^-2, mean radius 3389.5 km; CO2/O thermosphere,
    // homopause near 125 km, exobase near 200 km and 200-300 K (common practice).
    const double M = 4.2828e13 / G, R = 3389.5e3, r_h = R + 125e3;
    Thermosphere t(M, R, r_h, 2e16, named({"CO2", "O", "N2"}), {0.9, 0.07, 0.03},
                   TemperatureProfile::bates(250.0, 150.0, 1.0 / 20e3, r_h));
    const Exobase& e = t.exobase();
    REQUIRE(e.found());
    MESSAGE("Mars-like exobase at " << (e.radius - R) / 1e3 << " km");
    CHECK(e.radius - R > 150e3);
    CHECK(e.radius - R < 260e3);
}

TEST_CASE("no exobase: collisionless at the homopause, or none below the outer radius") {
    // So thin that the mean free path exceeds the scale height right at the homopause.
    Thermosphere thin(M_planet, R_planet, R_planet + 100e3, 1e10, named({"N2", "O"}), {0.5, 0.5},
                      TemperatureProfile::isothermal(500.0));
    const Exobase& a = thin.exobase();
    CHECK(a.status == ExobaseStatus::collisionless_at_homopause);
    CHECK(!a.found());
    CHECK(std::isnan(a.radius));
    CHECK(a.densities.empty());
    CHECK(a.message.find("collisionless down to the homopause") != std::string::npos);
    CHECK_THROWS_AS(thin.escape_flux(0), NumericalError);

    // A hot, light envelope on a low-density planet (invented, sub-Neptune-like: 5 Earth
    // masses, 2.5 Earth radii, H/He at 5000 K): lambda(H) ~ 3, the density levels off and
    // the gas stays collisional out to the outer radius.
    const double R = 2.5 * R_planet;
    Thermosphere hot(5 * M_planet, R, R * 1.05, 1e18, named({"H", "He"}), {0.9, 0.1},
                     TemperatureProfile::isothermal(5000.0));
    const Exobase& b = hot.exobase();
    CHECK(b.status == ExobaseStatus::none_below_outer_radius);
    CHECK(b.message.find("hydrodynamically") != std::string::npos);
    CHECK(hot.outer_radius() == doctest::Approx(20 * R * 1.05));
    try {
        hot.escape_flux(0);
        FAIL("expected NumericalError");
    } catch (const NumericalError& err) {
        CHECK(std::string(err.what()).find("no exobase below the outer radius") !=
              std::string::npos);
    }
}

TEST_CASE("escape fluxes: Jeans at the exobase, and the coupled diffusion-Jeans flux") {
    // Earth-like with trace H and He (common practice: H escapes near the diffusion limit).
    const double r_h = R_planet + 100e3;
    Thermosphere t(M_planet, R_planet, r_h, 1e19, named({"N2", "O2", "O", "He", "H"}),
                   {0.78, 0.18, 0.04 - 5.3e-6, 5e-6, 3e-7},
                   TemperatureProfile::bates(1000.0, 190.0, 1.0 / 40e3, r_h));
    const Exobase& e = t.exobase();
    REQUIRE(e.found());
    const std::size_t h = t.index("H");
    const double lambda = G * M_planet * t.species()[h].mass / (k_B * e.temperature * e.radius);
    const double v0 = std::sqrt(2 * k_B * e.temperature / t.species()[h].mass);
    // Jeans flux from the exobase density (DESIGN 3.2).
    CHECK(t.escape_flux(h, false) ==
          doctest::Approx(exosieve::jeans_flux(e.densities[h], e.temperature, t.species()[h].mass,
                                               M_planet, e.radius))
              .epsilon(1e-13));
    CHECK(t.jeans_flux(h) == doctest::Approx(e.densities[h] * v0 / (2 * std::sqrt(constants::pi)) *
                                             (1 + lambda) * std::exp(-lambda)));
    // Coupled flux (DESIGN 3.4) from the parts named in the issue.
    const double phi_j = t.escape_flux(h, false);
    const double phi_dl = t.diffusion_limited_flux(h);
    const double coupled = t.escape_flux(h, true);
    CHECK(coupled < phi_j);
    CHECK(coupled < phi_dl);
    double rest = 0.0, m_a = 0.0, inverse_b = 0.0;
    for (std::size_t j = 0; j < 4; ++j)
        rest += t.mole_fractions()[j];
    for (std::size_t j = 0; j < 4; ++j) {
        m_a += t.mole_fractions()[j] / rest * t.species()[j].mass;
        inverse_b += t.mole_fractions()[j] / rest /
                     binary_diffusion_parameter(t.species()[h], t.species()[j], 190.0);
    }
    const double g = G * M_planet / (r_h * r_h);
    const double beta = (m_a - t.species()[h].mass) * g / (k_B * 190.0);
    CHECK(phi_dl == doctest::Approx(3e-7 / inverse_b * beta).epsilon(1e-12));
    CHECK(coupled ==
          doctest::Approx(phi_j / (1 + phi_j / phi_dl * (1 - std::exp(-beta * (e.radius - r_h)))))
              .epsilon(1e-12));
    // Heavy species: the coupled flux hardly differs from the Jeans flux, which is tiny.
    const std::size_t o = t.index("O");
    CHECK(t.escape_flux(o, true) == doctest::Approx(t.escape_flux(o, false)).epsilon(1e-6));
    // A pure gas has no background to diffuse through: the Jeans flux.
    Thermosphere pure(M_planet, R_planet, r_h, 1e19, named({"O"}), {1.0},
                      TemperatureProfile::isothermal(1000.0));
    CHECK(pure.escape_flux(0, true) == pure.escape_flux(0, false));
    CHECK(std::isnan(pure.diffusion_limited_flux(0)));
}

TEST_CASE("copies share the cache and concurrent first use is safe") {
    const Thermosphere t = earth_like();
    std::vector<double> radii(4);
    std::vector<std::thread> pool;
    for (std::size_t k = 0; k < radii.size(); ++k)
        pool.emplace_back([&, k] { radii[k] = t.exobase().radius; });
    for (auto& th : pool)
        th.join();
    for (double r : radii)
        CHECK(r == radii[0]);
    const Thermosphere copy = t;
    CHECK(&copy.exobase() == &t.exobase());
}

TEST_CASE("many thermospheres at once equal one by one") {
    const std::vector<Species> list = named({"N2", "O", "He", "H"});
    const std::size_t count = 600; // enough for the threaded path
    std::vector<double> t_exo(count), n_h(count), x(count * 4);
    for (std::size_t i = 0; i < count; ++i) {
        t_exo[i] = 500.0 + 10.0 * static_cast<double>(i % 150);
        n_h[i] = i % 97 == 0 ? 1e9 : 1e18 * (1.0 + static_cast<double>(i % 7)); // some have none
        const double xh = 1e-6 * (1 + i % 5), xhe = 1e-5;
        x[4 * i + 0] = 0.8;
        x[4 * i + 1] = 0.2 - xh - xhe;
        x[4 * i + 2] = xhe;
        x[4 * i + 3] = xh;
    }
    const double M = M_planet, R = R_planet, r_h = R_planet + 110e3, t_h = 250.0, s = 1.0 / 35e3;
    ThermosphereCases cases;
    cases.planet_mass = {&M, 1};
    cases.planet_radius = {&R, 1};
    cases.homopause_radius = {&r_h, 1};
    cases.homopause_density = {n_h.data(), count};
    cases.mole_fractions = x.data();
    cases.fraction_rows = count;
    cases.exobase_temperature = {t_exo.data(), count};
    cases.homopause_temperature = {&t_h, 1};
    cases.shape = {&s, 1};
    std::vector<double> radius(count), temp(count), flux(count * 4);
    std::vector<int> status(count);
    ThermosphereResults results{radius.data(), temp.data(), status.data(), flux.data()};
    solve_thermospheres(list, count, cases, true, results);
    std::size_t missing = 0;
    for (std::size_t i = 0; i < count; ++i) {
        Thermosphere t(M, R, r_h, n_h[i], list,
                       {x[4 * i], x[4 * i + 1], x[4 * i + 2], x[4 * i + 3]},
                       TemperatureProfile::bates(t_exo[i], t_h, s, r_h));
        const Exobase& e = t.exobase();
        CHECK(status[i] == static_cast<int>(e.status));
        if (!e.found()) {
            ++missing;
            CHECK(std::isnan(radius[i]));
            CHECK(std::isnan(flux[4 * i]));
            continue;
        }
        CHECK(radius[i] == e.radius);
        CHECK(temp[i] == e.temperature);
        for (std::size_t j = 0; j < 4; ++j)
            CHECK(flux[4 * i + j] == t.escape_flux(j, true));
    }
    CHECK(missing == 7); // the cases with n_h = 1e9 (i = 0, 97, ..., 582)
    // Single-threaded gives the same numbers.
    std::vector<double> radius1(count), temp1(count), flux1(count * 4);
    std::vector<int> status1(count);
    solve_thermospheres(
        list, count, cases, true,
        ThermosphereResults{radius1.data(), temp1.data(), status1.data(), flux1.data()}, 1);
    for (std::size_t i = 0; i < count; ++i)
        if (status1[i] == 0)
            CHECK(radius1[i] == radius[i]);
    // Bad input is reported with its case number before any work.
    n_h[123] = -1.0;
    try {
        solve_thermospheres(list, count, cases, true, results);
        FAIL("expected InputError");
    } catch (const InputError& err) {
        CHECK(std::string(err.what())
                  .find("case 123: homopause_density must be finite and > 0, got -1") !=
              std::string::npos);
    }
}

TEST_CASE("thermosphere: bad input names the argument and the value") {
    auto message = [](auto&& call) -> std::string {
        try {
            call();
        } catch (const InputError& e) {
            return e.what();
        }
        return "no exception";
    };
    const auto iso = TemperatureProfile::isothermal(800.0);
    const auto list = named({"N2", "O"});
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet - 1e3, 1e18, list, {0.5, 0.5}, iso);
          }).find("below the planet's surface") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, list, {0.6, 0.5}, iso);
          }).find("mole fractions must sum to one (within 1e-6), got 1.1") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, list, {1.5, -0.5}, iso);
          }).find("mole fraction of 'O' must be finite and >= 0, got -0.5") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 0.0, list, {0.5, 0.5}, iso);
          }).find("homopause_density must be finite and > 0, got 0") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(-M_planet, R_planet, R_planet + 1e5, 1e18, list, {0.5, 0.5}, iso);
          }).find("planet_mass") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, list, {0.5}, iso);
          }).find("2 species but 1 mole fractions") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, named({"O", "O"}), {0.5, 0.5},
                           iso);
          }).find("twice") != std::string::npos);
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, list, {0.5, 0.5},
                           TemperatureProfile::bates(1000, 200, 1e-5, R_planet + 2e5));
          }).find("base radius") != std::string::npos);
    CHECK(
        message([&] {
            Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, list, {0.5, 0.5}, iso, R_planet);
        }).find("outer_radius") != std::string::npos);
    std::vector<Species> bare = list;
    bare[1].cross_section = 0.0;
    CHECK(message([&] {
              Thermosphere(M_planet, R_planet, R_planet + 1e5, 1e18, bare, {0.5, 0.5}, iso);
          }).find("'O' has no collision cross-section") != std::string::npos);
    CHECK(message([] {
              TemperatureProfile::isothermal(-3.0);
          }).find("temperature must be finite and > 0, got -3") != std::string::npos);
    Thermosphere t(M_planet, R_planet, R_planet + 1e5, 1e18, list, {0.5, 0.5}, iso);
    CHECK(message([&] { t.density(0, R_planet); }).find("below the homopause") !=
          std::string::npos);
    CHECK(message([&] { t.density(5, R_planet + 2e5); }).find("out of range") != std::string::npos);
    CHECK(message([&] { t.index("He"); }).find("it has N2, O") != std::string::npos);
    CHECK(message([] { species("Oxygen"); }).find("unknown species") != std::string::npos);
}

TEST_CASE("a pair without a diffusion estimate fails only the fluxes that need it") {
    // Two invented heavy species without Lennard-Jones parameters, each with a measured fit
    // against N2 (invented values, added to the process-wide table under names of their own)
    // but none between them. N2's coupled flux needs only its pairs with them; their own fluxes
    // are 0 (lambda in the thousands) and need no pair; a flux through the missing pair says
    // why it cannot.
    auto heavy = [](const char* name) {
        Species s = species("N2");
        s.name = name;
        s.mass = 500.0 * amu;
        s.lj_diameter = s.lj_well_depth = 0.0;
        return s;
    };
    const Species a = heavy("Xheavy_a"), b = heavy("Xheavy_b");
    default_diffusion_pairs().add({"N2", a.name, 5e19, 0.7, "invented for this test"});
    default_diffusion_pairs().add({"N2", b.name, 5e19, 0.7, "invented for this test"});
    const double r_h = constants::R_earth + 120e3;
    const Thermosphere th(constants::M_earth, constants::R_earth, r_h, 3e18, {species("N2"), a, b},
                          {0.98, 0.01, 0.01}, TemperatureProfile::isothermal(900.0));
    REQUIRE(th.exobase().found());
    CHECK(th.escape_flux(0, true) > 0.0);
    CHECK(th.escape_flux(0, true) <= th.escape_flux(0, false));
    CHECK(th.escape_flux(1, true) == 0.0);
    CHECK_THROWS_WITH_AS(binary_diffusion_parameter(a, b, 900.0),
                         doctest::Contains("Lennard-Jones"), InputError);
}
