// The evolution result file: read_result is write_result's inverse, member by member and bit
// for bit, and files of earlier versions read as what they stand for.
#include <doctest/doctest.h>

#include <hdf5.h>

#include <cmath>
#include <cstring>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/evolution_file.hpp"
#include "exosieve/hdf5_io.hpp"
#include "temp_dir.hpp"

using namespace exosieve;

namespace {

bool same_bits(const std::vector<double>& a, const std::vector<double>& b) {
    return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(double)) == 0;
}

// H and D over a cooling exobase: H crosses regimes (regime changes), D/H is a ratio.
EvolutionResult cooling_run() {
    const Star star(constants::M_sun, constants::L_sun);
    EvolutionConfig c(Planet(constants::M_earth, constants::R_earth, constants::au, star));
    c.species = {species("H"), species("D")};
    c.initial_inventory = {1e44, 1.5e40};
    c.exobase = std::make_shared<PrescribedExobase>(
        constants::R_earth + 500e3, std::vector<std::string>{"H", "D"},
        std::vector<double>{1e12, 1.5e8}, DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::table({0.0, 4.5 * constants::Gyr}, {3000.0, 900.0});
    c.isotope_ratios = default_isotope_ratios({"H", "D"});
    c.t_start = 10 * constants::Myr;
    c.t_end = 4.5 * constants::Gyr;
    return evolve(c);
}

void remove_dataset(const std::string& path, const char* name) {
    const hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    REQUIRE(file >= 0);
    CHECK(H5Ldelete(file, name, H5P_DEFAULT) >= 0);
    H5Fclose(file);
}

} // namespace

TEST_CASE("evolution files: a run read back equals the run, every member bit for bit") {
    const EvolutionResult run = cooling_run();
    REQUIRE(!run.regime_changes.empty());
    REQUIRE(run.ratio_names == std::vector<std::string>{"D/H"});
    TempDir dir;
    const std::string path = dir.file("run.h5");
    write_result(run, path);
    const EvolutionResult back = read_result(path);
    CHECK(back.species == run.species);
    CHECK(back.ratio_names == run.ratio_names);
    for (const auto& [a, b] : {std::pair{&back.time, &run.time},
                               {&back.inventory, &run.inventory},
                               {&back.escape_rate, &run.escape_rate},
                               {&back.source_rate, &run.source_rate},
                               {&back.given_loss_rate, &run.given_loss_rate},
                               {&back.jeans_parameter, &run.jeans_parameter},
                               {&back.exobase_radius, &run.exobase_radius},
                               {&back.exobase_temperature, &run.exobase_temperature},
                               {&back.xuv_flux, &run.xuv_flux},
                               {&back.isotope_ratio, &run.isotope_ratio},
                               {&back.depletion_time, &run.depletion_time},
                               {&back.initial_inventory, &run.initial_inventory},
                               {&back.species_mass, &run.species_mass},
                               {&back.regime_time, &run.regime_time},
                               {&back.regime_loss, &run.regime_loss},
                               {&back.energy_limited_loss, &run.energy_limited_loss},
                               {&back.given_loss, &run.given_loss},
                               {&back.non_jeans_loss_share, &run.non_jeans_loss_share},
                               {&back.bulk_regime_time, &run.bulk_regime_time}})
        CHECK(same_bits(*a, *b));
    CHECK(back.regime == run.regime);
    CHECK(back.energy_limited == run.energy_limited);
    REQUIRE(back.regime_changes.size() == run.regime_changes.size());
    for (std::size_t k = 0; k < run.regime_changes.size(); ++k) {
        CHECK(back.regime_changes[k].time == run.regime_changes[k].time);
        CHECK(back.regime_changes[k].from == run.regime_changes[k].from);
        CHECK(back.regime_changes[k].to == run.regime_changes[k].to);
    }
    CHECK(back.steps == run.steps);
    CHECK(back.rejected_steps == run.rejected_steps);
    CHECK(back.rhs_evaluations == run.rhs_evaluations);
    CHECK(back.completed == run.completed);
    CHECK(back.t_reached == run.t_reached);
    CHECK(back.stepper == run.stepper);
    CHECK(back.config == run.config);
    CHECK(!back.has_envelope());
}

TEST_CASE("evolution files: a file of an earlier version reads as no given loss, unknown ledger") {
    const EvolutionResult run = cooling_run();
    TempDir dir;
    const std::string path = dir.file("old.h5");
    write_result(run, path);
    for (const char* name : {"given_loss_rate", "regime_time", "regime_loss", "energy_limited_loss",
                             "given_loss", "non_jeans_loss_share", "bulk_regime_time"})
        remove_dataset(path, name);
    const EvolutionResult back = read_result(path);
    REQUIRE(back.given_loss_rate.size() == run.given_loss_rate.size());
    for (double v : back.given_loss_rate)
        CHECK(v == 0.0);
    REQUIRE(back.regime_time.size() == run.regime_time.size());
    for (double v : back.regime_time)
        CHECK(std::isnan(v));
    CHECK(back.bulk_regime_time.size() == 4);
    CHECK(same_bits(back.inventory, run.inventory));
}

TEST_CASE("evolution files: a file without a variable the list requires is refused by name") {
    TempDir dir;
    const std::string path = dir.file("broken.h5");
    write_result(cooling_run(), path);
    remove_dataset(path, "escape_rate");
    CHECK_THROWS_WITH_AS(read_result(path), doctest::Contains("escape_rate"), InputError);
}
