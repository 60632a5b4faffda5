#include <doctest/doctest.h>

#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/envelope.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/outflow.hpp"
#include "exosieve/thermosphere.hpp"

using namespace exosieve;
using constants::Gyr;
using constants::M_earth;
using constants::Myr;
using constants::R_earth;

namespace {

// An invented sub-Neptune: a 4 Earth-mass core with an H/He envelope, 0.05 au from a Sun-like
// star saturated at L_xuv / L_bol = 1e-3 until 100 Myr.
const double core = 4 * M_earth, orbit = 0.05 * constants::au;

Star sunlike() {
    XuvHistory xuv;
    xuv.saturation_ratio = 1e-3;
    return Star(constants::M_sun, constants::L_sun, xuv);
}

double bolometric_flux() {
    return constants::L_sun / (4 * constants::pi * orbit * orbit);
}

// The species part kept trivial: one species (H) at a prescribed exobase 500 km above the
// planet, its density fixed, energy-limited loss throughout (efficiency 0.1, XUV absorbed at
// the planet radius): the envelope then obeys integrate_envelope_loss's equation.
EvolutionConfig sub_neptune(double fraction, double t0, double t1, double rtol) {
    EvolutionConfig c(Planet(M_earth, R_earth, orbit, sunlike())); // mass, radius: not used
    c.species = {species("H")};
    c.initial_inventory = {1e52};
    const double r0 = envelope_planet_radius(core, fraction, bolometric_flux(), t0);
    c.exobase =
        std::make_shared<PrescribedExobase>(r0 + 500e3, std::vector<std::string>{"H"},
                                            std::vector<double>{1e12}, DensityScaling::Fixed);
    c.temperature = ExobaseTemperature::constant(3000.0);
    HydrodynamicOptions h;
    h.efficiency = 0.1;
    h.roche_lobe = false;
    h.activation = HydrodynamicActivation::Always;
    c.hydrodynamic = h;
    EnvelopeConfig e;
    e.core_mass = core;
    e.envelope_fraction = fraction;
    c.envelope = e;
    c.t_start = t0;
    c.t_end = t1;
    c.rtol = rtol;
    return c;
}

EnvelopeLossResult reference(const EvolutionConfig& c, double rtol) {
    EnvelopeLossOptions o;
    o.efficiency = c.hydrodynamic->efficiency;
    o.roche_lobe = c.hydrodynamic->roche_lobe;
    o.rtol = rtol;
    o.atol_fraction = 1e-14;
    return integrate_envelope_loss(core, c.envelope->envelope_fraction, orbit, sunlike(), c.t_eval,
                                   o);
}

} // namespace

TEST_CASE("an envelope in evolve() is lost as integrate_envelope_loss loses it, to 1e-8") {
    for (bool roche : {false, true}) {
        CAPTURE(roche);
        // From 10 Myr, across the end of saturation (100 Myr), to stripping at a few 100 Myr.
        EvolutionConfig c = sub_neptune(0.02, 10 * Myr, 10 * Gyr, 1e-11);
        c.hydrodynamic->efficiency = 0.02;
        c.hydrodynamic->roche_lobe = roche;
        c.t_eval = {10 * Myr, 50 * Myr, 100 * Myr, 150 * Myr, 300 * Myr, 600 * Myr, 10 * Gyr};
        const EvolutionResult r = evolve(c);
        const EnvelopeLossResult ref = reference(c, 1e-12);
        REQUIRE(r.has_envelope());
        REQUIRE(ref.stripped);
        MESSAGE("stripping " << r.stripping_time / Myr << " Myr, relative difference "
                             << (r.stripping_time - ref.stripping_time) / ref.stripping_time
                             << " from the reference; " << r.steps << " steps");
        CHECK(r.stripping_time == doctest::Approx(ref.stripping_time).epsilon(1e-8));
        REQUIRE(r.envelope_mass.size() == c.t_eval.size());
        for (std::size_t k = 0; k < c.t_eval.size(); ++k) {
            CAPTURE(k);
            if (ref.envelope_mass[k] > 0.0) {
                CHECK(r.envelope_mass[k] == doctest::Approx(ref.envelope_mass[k]).epsilon(1e-8));
                CHECK(r.envelope_loss_rate[k] ==
                      doctest::Approx(ref.mass_loss_rate[k]).epsilon(1e-8));
            } else {
                CHECK(r.envelope_mass[k] == 0.0);
            }
            CHECK(r.planet_radius[k] == doctest::Approx(ref.radius[k]).epsilon(1e-8));
        }
        CHECK(r.envelope_mass[0] == doctest::Approx(core * 0.02 / 0.98).epsilon(1e-15));
    }
}

TEST_CASE("after stripping the planet is the bare core: radius, exobase and Jeans parameter") {
    EvolutionConfig c = sub_neptune(0.01, 150 * Myr, 3 * Gyr, 1e-9);
    c.t_eval = {150 * Myr, 3 * Gyr};
    const EvolutionResult r = evolve(c);
    REQUIRE(!std::isnan(r.stripping_time));
    CHECK(r.stripping_time > 150 * Myr);
    CHECK(r.stripping_time < 3 * Gyr);
    const double r0 = envelope_planet_radius(core, 0.01, bolometric_flux(), 150 * Myr);
    const double rc = core_radius(core);
    CHECK(r.planet_radius[0] == doctest::Approx(r0).epsilon(1e-15));
    CHECK(r.planet_radius[1] == doctest::Approx(rc).epsilon(1e-15));
    CHECK(r.envelope_mass[1] == 0.0);
    CHECK(r.envelope_loss_rate[1] == 0.0);
    // The exobase keeps its 500 km above the planet; the Jeans parameter takes the planet mass
    // (G M m / (k T r), the definition).
    CHECK(r.exobase_radius[0] == doctest::Approx(r0 + 500e3).epsilon(1e-14));
    CHECK(r.exobase_radius[1] == doctest::Approx(rc + 500e3).epsilon(1e-14));
    const double m_h = species("H").mass, kT = constants::k_B * 3000.0;
    CHECK(r.jeans_parameter[0] ==
          doctest::Approx(constants::G * (core / 0.99) * m_h / (kT * (r0 + 500e3))).epsilon(1e-14));
    CHECK(r.jeans_parameter[1] ==
          doctest::Approx(constants::G * core * m_h / (kT * (rc + 500e3))).epsilon(1e-14));
    // Energy-limited loss of the bare core: eta pi R_c^3 F_xuv / (G M_c), all in H atoms.
    const double f_xuv = sunlike().xuv_luminosity(3 * Gyr) / (4 * constants::pi * orbit * orbit);
    CHECK(r.escape_rate[1] ==
          doctest::Approx(energy_limited_mass_loss(0.1, rc, rc, f_xuv, core) / m_h).epsilon(1e-12));
}

TEST_CASE("an envelope kept, a bare core from the start, and a loss switched by the regime") {
    // Farther out the envelope is kept: mass falling, no stripping time.
    EvolutionConfig kept = sub_neptune(0.05, 150 * Myr, 5 * Gyr, 1e-9);
    kept.planet = Planet(M_earth, R_earth, 0.5 * constants::au, sunlike());
    kept.t_eval = {150 * Myr, 1 * Gyr, 5 * Gyr};
    const EvolutionResult r = evolve(kept);
    CHECK(std::isnan(r.stripping_time));
    CHECK(r.envelope_mass[2] < r.envelope_mass[1]);
    CHECK(r.envelope_mass[1] < r.envelope_mass[0]);
    CHECK(r.planet_radius[2] < r.planet_radius[0]);
    // f_env = 0: the core alone, stripped at the start.
    EvolutionConfig bare = sub_neptune(0.0, 150 * Myr, 1 * Gyr, 1e-9);
    bare.t_eval = {150 * Myr, 1 * Gyr};
    const EvolutionResult b = evolve(bare);
    CHECK(b.stripping_time == 150 * Myr);
    CHECK(b.envelope_mass == std::vector<double>{0.0, 0.0});
    CHECK(b.planet_radius[1] == doctest::Approx(core_radius(core)).epsilon(1e-15));
    // Energy-limited loss only while the bulk gas is hydrodynamic: at 300 K the H Jeans
    // parameter is far above the threshold, so the envelope keeps its mass exactly.
    EvolutionConfig cold = sub_neptune(0.02, 150 * Myr, 1 * Gyr, 1e-9);
    cold.hydrodynamic->activation = HydrodynamicActivation::Hydrodynamic;
    cold.temperature = ExobaseTemperature::constant(300.0);
    cold.t_eval = {150 * Myr, 1 * Gyr};
    const EvolutionResult k = evolve(cold);
    CHECK(k.envelope_mass[1] == k.envelope_mass[0]);
    CHECK(k.envelope_loss_rate[0] == 0.0);
    CHECK(k.planet_radius[1] < k.planet_radius[0]); // the envelope still cools and contracts
    // A run without an envelope records none.
    EvolutionConfig plain = sub_neptune(0.02, 150 * Myr, 1 * Gyr, 1e-9);
    plain.envelope.reset();
    plain.planet = Planet(core, 2 * R_earth, orbit, sunlike());
    plain.exobase =
        std::make_shared<PrescribedExobase>(2 * R_earth + 500e3, std::vector<std::string>{"H"},
                                            std::vector<double>{1e12}, DensityScaling::Fixed);
    const EvolutionResult p = evolve(plain);
    CHECK_FALSE(p.has_envelope());
    CHECK(p.envelope_mass.empty());
    CHECK(p.planet_radius.empty());
}

TEST_CASE("envelope accuracy: every output within 10 rtol of the reference") {
    // The accuracy rule of the inventories, |err| <= 10 (rtol M_env + atol), with the envelope's
    // atol = rtol depletion_fraction M_env(start); the reference at rtol 1e-13.
    for (double rtol : {1e-4, 1e-6, 1e-8, 1e-10}) {
        CAPTURE(rtol);
        EvolutionConfig c = sub_neptune(0.03, 20 * Myr, 10 * Gyr, rtol);
        c.t_eval = {20 * Myr,  60 * Myr,  100 * Myr, 140 * Myr, 200 * Myr,
                    300 * Myr, 400 * Myr, 600 * Myr, 10 * Gyr};
        const EvolutionResult r = evolve(c);
        const EnvelopeLossResult ref = reference(c, 1e-13);
        const double atol = rtol * c.depletion_fraction * ref.envelope_mass[0];
        REQUIRE(ref.stripped);
        CHECK(std::abs(r.stripping_time - ref.stripping_time) <= 10 * rtol * ref.stripping_time);
        for (std::size_t k = 0; k < c.t_eval.size(); ++k) {
            CAPTURE(k);
            CHECK(std::abs(r.envelope_mass[k] - ref.envelope_mass[k]) <=
                  10 * (rtol * ref.envelope_mass[k] + atol));
        }
    }
}

TEST_CASE("bad envelope input raises InputError naming the argument before any step") {
    int calls = 0;
    auto expect = [&](EvolutionConfig c, const char* message) {
        c.t_eval.clear();
        c.progress = [&calls](double) { return ++calls > 0; };
        CHECK_THROWS_WITH_AS(evolve(c), doctest::Contains(message), InputError);
    };
    const EvolutionConfig good = sub_neptune(0.02, 150 * Myr, 1 * Gyr, 1e-8);
    EvolutionConfig c = good;
    c.envelope->core_mass = 0.0;
    expect(c, "envelope core_mass must be finite and > 0 [kg], got 0");
    c.envelope->core_mass = -3.0;
    expect(c, "envelope core_mass must be finite and > 0 [kg], got -3");
    c = good;
    c.envelope->envelope_fraction = 1.0;
    expect(c, "envelope envelope_fraction must be in [0, 1) [1], got 1");
    c.envelope->envelope_fraction = -0.25;
    expect(c, "envelope envelope_fraction must be in [0, 1) [1], got -0.25");
    c.envelope->envelope_fraction = NAN;
    expect(c, "envelope envelope_fraction must be in [0, 1) [1], got nan");
    c = good;
    c.planet = Planet(M_earth, R_earth);
    expect(c, "an envelope needs the planet's semi_major_axis and star");
    c = good;
    c.hydrodynamic.reset();
    expect(c, "an envelope is lost at the hydrodynamic mass-loss rate");
    c = good;
    c.hydrodynamic->recombination = RecombinationLimit{};
    expect(c, "an envelope with the recombination limit is not supported");
    c = good;
    c.envelope->opacity = static_cast<EnvelopeOpacity>(7);
    expect(c, "envelope opacity must be solar (0) or enhanced (1), got 7");
    c = good;
    c.exobase = std::make_shared<PrescribedExobase>(
        core_radius(core) + 100e3, std::vector<std::string>{"H"}, std::vector<double>{1e12},
        DensityScaling::Fixed);
    expect(c, "is below the planet's surface"); // below R_core + R_env at the start
    c = good;
    const Thermosphere th(core, 2 * R_earth, 2 * R_earth + 200e3, 1e17, {species("H")}, {1.0},
                          TemperatureProfile::isothermal(1000.0));
    c.exobase = std::make_shared<ThermosphereExobase>(th, std::vector<std::string>{"H"}, false);
    expect(c, "an envelope needs a prescribed exobase");
    CHECK(calls == 0);
}

TEST_CASE("an envelope lost through a transonic wind from the evolving radius") {
    // The wind's base is the evolving planet radius: at every output the envelope's loss rate is
    // the smaller of the energy-limited rate and parker_mass_loss (outflow.hpp) at the radius
    // and mass of that output. The two meet at a time the evolving radius sets, not marked as a
    // kink: the step control must keep each output within 10 rtol of a run at rtol 1e-12.
    TransonicWind w;
    w.temperature = 5000.0;
    w.base_density = 1.5e15;
    const double m = species("H").mass;
    auto run = [&](double rtol) {
        EvolutionConfig c = sub_neptune(0.03, 20 * Myr, 10 * Gyr, rtol);
        c.hydrodynamic->efficiency = 0.02;
        c.hydrodynamic->transonic = w;
        c.t_eval.clear();
        for (int k = 0; k <= 30; ++k)
            c.t_eval.push_back(20 * Myr * std::pow(500.0, k / 30.0));
        return evolve(c);
    };
    const EvolutionResult r = run(1e-12);
    const Star star = sunlike();
    int wind_smaller = 0, energy_smaller = 0;
    for (std::size_t k = 0; k < r.time_count(); ++k) {
        if (!(r.envelope_mass[k] > 0.0))
            continue;
        CAPTURE(k);
        const double mass = core + r.envelope_mass[k], radius = r.planet_radius[k];
        const double flux = star.xuv_luminosity(r.time[k]) / (4 * constants::pi * orbit * orbit);
        const double el = energy_limited_mass_loss(0.02, radius, radius, flux, mass);
        const double wind = parker_mass_loss(radius, w.base_density, w.temperature, m, mass);
        (wind < el ? wind_smaller : energy_smaller) += 1;
        CHECK(r.envelope_loss_rate[k] == doctest::Approx(std::min(el, wind)).epsilon(1e-12));
    }
    CHECK(wind_smaller >= 3); // both laws act during the run
    CHECK(energy_smaller >= 3);
    for (double rtol : {1e-6, 1e-8}) {
        CAPTURE(rtol);
        const EvolutionResult coarse = run(rtol);
        const double atol = rtol * 1e-3 * r.envelope_mass[0]; // depletion_fraction 1e-3
        for (std::size_t k = 0; k < r.time_count(); ++k) {
            CAPTURE(k);
            CHECK(std::abs(coarse.envelope_mass[k] - r.envelope_mass[k]) <=
                  10 * (rtol * r.envelope_mass[k] + atol));
        }
    }
}
