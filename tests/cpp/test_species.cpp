#include <doctest/doctest.h>

#include <atomic>
#include <string>
#include <thread>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/species.hpp"

using namespace exosieve;

TEST_CASE("the compiled table holds every species the design asks for") {
    for (const char* name :
         {"H",  "D",  "He", "3He", "H2", "HD",   "C",    "N",    "O",  "CH4", "NH3", "H2O",
          "N2", "O2", "CO", "CO2", "Ne", "36Ar", "38Ar", "40Ar", "Ar", "Kr",  "Xe"}) {
        CAPTURE(name);
        const Species& s = species(name);
        CHECK(s.mass > 0.0);
        CHECK(s.lj_diameter > 1e-10);
        CHECK(s.lj_well_depth > 0.0);
        CHECK(s.cross_section > 1e-20);
        CHECK(!s.mass_source.empty());
        CHECK(!s.lj_source.empty());
    }
}

TEST_CASE("masses are sums of standard atomic weights (IUPAC)") {
    // IUPAC 2021 abridged: N 14.007, C 12.011, O 15.999.
    CHECK(species("N2").mass_u() == doctest::Approx(28.014).epsilon(1e-9));
    CHECK(species("CO2").mass_u() == doctest::Approx(44.009).epsilon(1e-9));
    // AME2020: deuterium 2.01410177812 u.
    CHECK(species("D").mass_u() == doctest::Approx(2.01410177812).epsilon(1e-9));
    CHECK(species("H2").mass == doctest::Approx(2 * species("H").mass));
}

TEST_CASE("unknown names suggest the closest ones") {
    try {
        species("CO3");
        FAIL("expected InputError");
    } catch (const InputError& e) {
        const std::string what = e.what();
        CHECK(what.find("unknown species 'CO3'") != std::string::npos);
        CHECK(what.find("CO2") != std::string::npos);
    }
}

TEST_CASE("user species are validated and registered") {
    SpeciesRegistry registry = SpeciesRegistry::from_csv(species_table_csv(), "table");
    Species s;
    s.name = "Xx";
    s.mass = 10 * constants::amu;
    registry.add(s);
    CHECK(registry.contains("Xx"));
    s.mass = -1.0;
    CHECK_THROWS_AS(registry.add(s), InputError);
}

TEST_CASE("species can be replaced while other threads read the registry") {
    SpeciesRegistry registry = SpeciesRegistry::from_csv(species_table_csv(), "table");
    Species s;
    s.name = "Yy";
    s.mass = 1 * constants::amu;
    registry.add(s);
    const Species& before = registry.get("Yy"); // stays valid and unchanged
    std::atomic<bool> stop{false};
    std::atomic<long> odd{0}, reads{0};
    std::vector<std::thread> readers;
    for (int k = 0; k < 2; ++k)
        readers.emplace_back([&] {
            while (!stop.load()) {
                const double m = registry.get("Yy").mass / constants::amu;
                odd += (m != 1.0 && m != 2.0);
                odd += registry.get("N2").name != "N2";
                ++reads;
            }
        });
    for (int k = 0; k < 2000; ++k) {
        s.mass = (k % 2 ? 1.0 : 2.0) * constants::amu;
        registry.add(s);
    }
    while (reads.load() < 1000)
        std::this_thread::yield();
    stop = true;
    for (std::thread& t : readers)
        t.join();
    CHECK(odd.load() == 0);
    CHECK(before.mass == 1 * constants::amu);
    CHECK(registry.get("Yy").mass == 1 * constants::amu); // the last one added (k = 1999)
}

TEST_CASE("malformed tables are refused with the line named") {
    const std::string bad =
        "name,mass_u,mass_source,lj_diameter_angstrom,lj_well_depth_K,lj_source,"
        "cross_section_m2,cross_section_source,thermal_diffusion_factor,thermal_diffusion_source\n"
        "A,abc,s,1,1,s,1e-19,s,0,s\n";
    CHECK_THROWS_WITH_AS(SpeciesRegistry::from_csv(bad, "bad.csv"),
                         doctest::Contains("bad.csv line 2 column mass_u"), InputError);
    CHECK_THROWS_AS(SpeciesRegistry::from_csv("name,mass_u\nA,1\n", "short.csv"), InputError);
}
