// A small corpus of hostile inputs for the memory-checked (ASan + UBSan) run of the C++ tests:
// NaN times, one-point tables, extreme planets, huge sources and extreme loss columns of case
// tables. Each case must either give a
// defined answer or throw the library's own error, and never read outside its buffers.
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/batch.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/maxwell.hpp"
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

TEST_CASE("exobase() at extreme temperatures, masses, densities and homopause heights") {
    // The exobase scan evaluates the column integral (Thermosphere::column) at every radius it
    // tries; where a scale height over- or underflows the scan once stepped to a NaN radius,
    // and the column's node search then read past the end of its node table. Each case must
    // find an exobase with finite values or report why not (or refuse the input), and stay
    // inside its buffers (checked by the ASan + UBSan run).
    Species light = species("H"), heavy = species("N2");
    std::size_t tried = 0, found = 0, not_found = 0, scanned = 0, refused = 0;
    for (const double mass_factor : {1e-30, 1.0, 1e30}) {
        Species a = light, b = heavy;
        a.mass *= mass_factor;
        b.mass *= mass_factor;
        const std::vector<Species> gas{b, a};
        for (const double temperature : {1e-300, 1e-20, 3.0, 1e3, 1e20, 1e300}) {
            for (const double planet_mass : {1e-300, 1e-20, 6e24, 1e300}) {
                for (const double density : {1e-300, 1e10, 1e300}) {
                    for (const double radius : {1e-200, 6.4e6, 1e200}) {
                        for (const double lift : {1.0, 1.0 + 1e-15, 1e6}) {
                            const double homopause = radius * lift;
                            // Here the scan runs up to its million steps (~0.1 s each
                            // case): only the Earth-mass planet at the surface is kept.
                            if ((temperature < 1e-200 || density > 1e200) &&
                                !(mass_factor == 1.0 && planet_mass == 6e24 && lift == 1.0))
                                continue;
                            for (int kind = 0; kind < 3; ++kind) {
                                CAPTURE(mass_factor);
                                CAPTURE(temperature);
                                CAPTURE(planet_mass);
                                CAPTURE(density);
                                CAPTURE(radius);
                                CAPTURE(lift);
                                CAPTURE(kind);
                                ++tried;
                                try {
                                    const TemperatureProfile profile =
                                        kind == 0 ? TemperatureProfile::isothermal(temperature)
                                        : kind == 1
                                            ? TemperatureProfile::bates(
                                                  temperature, 0.5 * temperature,
                                                  1.0 / (0.01 * homopause), homopause)
                                            : TemperatureProfile::table(
                                                  {homopause, 1.5 * homopause, 3.0 * homopause},
                                                  {0.2 * temperature, temperature, temperature});
                                    const Thermosphere t(planet_mass, radius, homopause, density,
                                                         gas, {0.9, 0.1}, profile);
                                    const Exobase& e = t.exobase();
                                    if (e.found()) {
                                        ++found;
                                        CHECK(std::isfinite(e.radius));
                                        CHECK(e.radius >= homopause);
                                        CHECK(e.radius <= t.outer_radius());
                                        CHECK(std::isfinite(e.temperature));
                                        CHECK(e.temperature > 0.0);
                                        REQUIRE(e.densities.size() == 2);
                                        for (double n : e.densities)
                                            CHECK((std::isfinite(n) && n >= 0.0));
                                    } else {
                                        ++not_found;
                                        scanned +=
                                            e.status == ExobaseStatus::none_below_outer_radius;
                                        CHECK_FALSE(e.message.empty());
                                        CHECK(std::isnan(e.radius));
                                    }
                                } catch (const InputError&) {
                                    ++refused;
                                } catch (const NumericalError&) {
                                    ++refused;
                                }
                            }
                        }
                    }
                }
            }
        }
    }
    MESSAGE("extreme thermospheres: " << tried << " tried, " << found << " exobases found, "
                                      << not_found << " reported as not found (" << scanned
                                      << " after scanning to the outer radius), " << refused
                                      << " refused");
    CHECK(found > 0);
    CHECK(scanned > 0);
    CHECK(found + not_found + refused == tried);
}

TEST_CASE("Maxwell tail and pdf where 2 k T / m under- or overflows give no NaN") {
    // v0 = sqrt(2 k T / m) underflows to 0 at T = 5e-324 K: x = v / v0 is then taken in
    // logarithms; the fraction faster and the pdf underflow to 0, the log fraction to -inf
    // (its closed form, -x^2 with x ~ 4e162, is beyond the double range).
    const double m = species("H").mass;
    for (const double T : {5e-324, 1e-310, 1e-300}) {
        CAPTURE(T);
        CHECK(fraction_faster(1e3, T, m) == 0.0);
        CHECK(speed_pdf(1e3, T, m) == 0.0);
        CHECK(speed_pdf(0.0, T, m) == 0.0);
        CHECK_FALSE(std::isnan(log_fraction_faster(1e3, T, m)));
        CHECK(log_fraction_faster(1e3, T, m) < -1e300);
        CHECK(fraction_faster(0.0, T, m) == 1.0);
    }
    // A speed so high that x^2 overflows at an ordinary temperature.
    CHECK(speed_pdf(1e300, 1000.0, m) == 0.0);
    CHECK(fraction_faster(1e300, 1000.0, m) == 0.0);
    CHECK(log_fraction_faster(1e300, 1000.0, m) == -pinf);
    // Huge temperatures: v0 overflows, x is tiny and the tail is all the gas.
    CHECK(fraction_faster(1e3, 1e300, 1e-300) == 1.0);
    CHECK(std::isfinite(speed_pdf(1e3, 1e300, 1e-300)));
}

TEST_CASE("case-table loss columns at the ends of the double range: refused or a defined run") {
    // One column at a time takes each extreme value in a row of an invented hydrogen-helium
    // sub-Neptune with every loss option (given losses, energy-limited loss with the XUV
    // absorption radius and the recombination limit); every row is reported with an error, or
    // runs to finite retained fractions.
    const std::vector<std::pair<std::string, double>> row{
        {"planet_mass", 5 * constants::M_earth},
        {"planet_radius", 2.5 * constants::R_earth},
        {"exobase_altitude", 0.25 * constants::R_earth},
        {"exobase_density", 1e13},
        {"exobase_temperature", 8000.0},
        {"semi_major_axis", 0.3 * constants::au},
        {"star_mass", 0.8 * constants::M_sun},
        {"star_luminosity", 0.4 * constants::L_sun},
        {"inventory", 3e50},
        {"x_H", 0.9},
        {"x_He", 0.1},
        {"given_loss_H", 1e30},
        {"given_loss_He", 1e31},
        {"given_loss_exponent_He", 0.5},
        {"given_loss_reference_flux", 0.25},
        {"heating_efficiency", 0.2},
        {"xuv_absorption_cross_section", 6e-22},
        {"xuv_absorption_base_density", 1e19},
        {"xuv_absorption_temperature", 900.0},
        {"xuv_absorption_molecular_mass", 2.3 * constants::amu},
        {"xuv_absorption_chord", 1.0},
        {"recombination_limit", 1.0},
        {"recombination_temperature", 9000.0},
        {"recombination_coefficient", 3e-19},
        {"recombination_photon_energy", 3e-18},
    };
    const double dmax = std::numeric_limits<double>::max();
    const double dmin = std::numeric_limits<double>::denorm_min();
    const std::vector<double> extremes{dmax,  -dmax, 1e300, 1e-300, dmin,
                                       -dmin, 0.0,   -0.0,  pinf,   -pinf};
    CaseTable t;
    for (std::size_t c = 11; c < row.size(); ++c)
        for (double v : extremes)
            t.names.push_back(row[c].first + " = " + format_value(v));
    const std::size_t n = t.names.size();
    for (std::size_t c = 0; c < row.size(); ++c) {
        std::vector<double> values(n, row[c].second);
        if (c >= 11)
            for (std::size_t e = 0; e < extremes.size(); ++e)
                values[(c - 11) * extremes.size() + e] = extremes[e];
        t.columns.emplace_back(row[c].first, std::move(values));
    }
    t.text.push_back({"exobase_composition", std::vector<std::string>(n, "bulk")});
    BatchOptions o;
    o.t_start = 10 * constants::Myr;
    o.t_end = 4.5 * constants::Gyr;
    o.times = {100 * constants::Myr, 1 * constants::Gyr};
    o.threads = 2;
    o.chunk_size = 16;
    o.skip_invalid = true;
    std::size_t refused = 0, failed = 0, ran = 0;
    BatchHooks hooks;
    hooks.on_chunk = [&](const BatchChunk& chunk) {
        for (std::size_t j = 0; j < chunk.count; ++j) {
            CAPTURE(chunk.name[j]);
            const std::string& e = chunk.error[j];
            if (e.find("column '") != std::string::npos) {
                ++refused;
            } else if (!e.empty()) {
                ++failed;
                // Only a given loss beyond the double range fails here: the integrator's own
                // error says the rate of change is not finite.
                CHECK(e.find("not finite") != std::string::npos);
                CHECK(chunk.name[j].rfind("given_loss", 0) == 0);
            } else {
                ++ran;
                for (std::size_t i = 0; i < chunk.species; ++i) {
                    const double f = chunk.final_retained[j * chunk.species + i];
                    CHECK((std::isfinite(f) && f >= 0.0 && f <= 1.001));
                }
            }
        }
    };
    const BatchStatus status = run_batch(t, 0, n, o, hooks);
    CHECK(status.cases_done == n);
    MESSAGE("extreme loss columns: " << n << " rows, " << refused << " refused naming a column, "
                                     << failed << " failed in their run, " << ran << " ran");
    CHECK(refused > 0);
    CHECK(ran > 0);
    CHECK(refused + failed + ran == n);
}
