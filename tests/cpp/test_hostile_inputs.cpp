// A small corpus of hostile inputs for the memory-checked (ASan + UBSan) run of the C++ tests:
// NaN times, one-point tables, extreme planets and huge sources. Each case must either give a
// defined answer or throw the library's own error, and never read outside its buffers.
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/species.hpp"
#include "exosieve/thermosphere.hpp"

using namespace exosieve;

namespace {

const double qnan = std::numeric_limits<double>::quiet_NaN();
const double pinf = std::numeric_limits<double>::infinity();

// Runs an evolution and accepts only a finished run with finite outputs or the library's own
// errors.
void evolve_finite_or_refused(const EvolutionConfig& c) {
    try {
        const EvolutionResult r = evolve(c);
        for (double v : r.inventory)
            CHECK(std::isfinite(v));
        for (double v : r.source_rate)
            CHECK(std::isfinite(v));
        for (double v : r.escape_rate)
            CHECK(std::isfinite(v));
    } catch (const InputError&) {
    } catch (const NumericalError&) {
    }
}

EvolutionConfig one_species(double t_end) {
    const double r_exo = constants::R_earth + 500e3;
    EvolutionConfig c(Planet(constants::M_earth, constants::R_earth));
    c.species.push_back(species("H"));
    c.initial_inventory = {1e30};
    c.exobase = std::make_shared<PrescribedExobase>(
        r_exo, std::vector<std::string>{"H"}, std::vector<double>{1e11}, DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(1000.0);
    c.t_start = 0.0;
    c.t_end = t_end;
    return c;
}

} // namespace

TEST_CASE("time tables at a NaN time give NaN, for any table length") {
    for (const std::vector<double>& times :
         {std::vector<double>{5.0}, std::vector<double>{0.0, 10.0},
          std::vector<double>{0.0, 1.0, 2.0, 3.0}}) {
        const std::vector<double> values(times.size(), 7.0);
        const TimeTable table(times, values, "test table");
        CHECK(std::isnan(table(qnan)));
        CHECK(table(-pinf) == 7.0);
        CHECK(table(pinf) == 7.0);
        const SourceRate source(times, values);
        CHECK(std::isnan(source(qnan)));
        const auto history = ExobaseTemperature::table(times, values);
        CHECK(std::isnan(history(qnan, 0.0)));
    }
}

TEST_CASE("evolve with one-point and huge tabulated sources") {
    const double Gyr = constants::Gyr;
    for (const double rate : {0.0, 1.0, 1e30, 1e200, 1e300, 1.7e308}) {
        CAPTURE(rate);
        for (const std::vector<double>& times :
             {std::vector<double>{0.0}, std::vector<double>{0.5 * Gyr},
              std::vector<double>{0.0, 1.0 * Gyr}, std::vector<double>{-1e300, 1e300}}) {
            CAPTURE(times.size());
            EvolutionConfig c = one_species(1.0 * Gyr);
            c.sources = {SourceRate(times, std::vector<double>(times.size(), rate))};
            c.t_eval = {0.0, 0.25 * Gyr, 0.5 * Gyr, 1.0 * Gyr};
            evolve_finite_or_refused(c);
            c.stepper = StepperKind::Dopri5;
            c.max_steps = 20000;
            evolve_finite_or_refused(c);
        }
    }
}

TEST_CASE("the exobase of extreme planets is found or refused, never read out of bounds") {
    const std::vector<Species> gas{species("N2"), species("H")};
    const std::vector<double> fractions{0.9, 0.1};
    for (const double mass : {1e-30, 1e10, 6e24, 1e40, 1e300}) {
        for (const double radius : {1e-3, 1.0, 6.4e6, 1e20, 1e150, 1e300}) {
            for (const double density : {1e-30, 1e18, 1e300}) {
                CAPTURE(mass);
                CAPTURE(radius);
                CAPTURE(density);
                for (int kind = 0; kind < 3; ++kind) {
                    try {
                        const TemperatureProfile profile =
                            kind == 0   ? TemperatureProfile::isothermal(1000.0)
                            : kind == 1 ? TemperatureProfile::bates(1000.0, 200.0,
                                                                    1.0 / (0.01 * radius), radius)
                                        : TemperatureProfile::table({radius, 1.5 * radius},
                                                                    {200.0, 1000.0});
                        const Thermosphere t(mass, radius, radius, density, gas, fractions,
                                             profile);
                        const Exobase& e = t.exobase();
                        if (e.found()) {
                            CHECK(std::isfinite(e.radius));
                            CHECK(e.radius >= radius);
                        }
                    } catch (const InputError&) {
                    } catch (const NumericalError&) {
                    }
                }
            }
        }
    }
}
