#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "exosieve/batch.hpp"
#include "exosieve/case_config.hpp"
#include "exosieve/case_sampling.hpp"
#include "exosieve/case_table.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/outflow.hpp"
#include "exosieve/random.hpp"
#include "exosieve/sensitivity.hpp"

using namespace exosieve;
using constants::Gyr;
using constants::Myr;

namespace {

const double missing = std::numeric_limits<double>::quiet_NaN();

void set_column(CaseTable& t, const std::string& name, std::vector<double> values) {
    for (auto& [n, v] : t.columns)
        if (n == name) {
            v = std::move(values);
            return;
        }
    t.columns.emplace_back(name, std::move(values));
}

// `rows` Earth-like cases with N2, He and H at a constant exobase temperature rising by row.
CaseTable earthlike(std::size_t rows) {
    CaseTable t;
    std::vector<double> mass, radius, alt, dens, temp, inv, xn2, xhe, xh, msig, tsig;
    for (std::size_t i = 0; i < rows; ++i) {
        t.names.push_back("case " + std::to_string(i));
        mass.push_back(constants::M_earth * (0.5 + 0.1 * static_cast<double>(i % 7)));
        radius.push_back(constants::R_earth);
        alt.push_back(500e3);
        dens.push_back(1e13);
        temp.push_back(800.0 + 150.0 * static_cast<double>(i % 5));
        inv.push_back(1e37);
        xn2.push_back(0.7);
        xhe.push_back(0.25);
        xh.push_back(0.05);
        msig.push_back(0.1 * mass.back());
        tsig.push_back(0.2); // log-normal width of the temperature [1]
    }
    set_column(t, "planet_mass", mass);
    set_column(t, "planet_mass_sigma", msig);
    set_column(t, "planet_radius", radius);
    set_column(t, "exobase_altitude", alt);
    set_column(t, "exobase_density", dens);
    set_column(t, "exobase_temperature", temp);
    set_column(t, "exobase_temperature_lnsigma", tsig);
    set_column(t, "inventory", inv);
    set_column(t, "x_N2", xn2);
    set_column(t, "x_He", xhe);
    set_column(t, "x_H", xh);
    // The exobase composition, given in its own columns (here the bulk one).
    set_column(t, "exobase_x_N2", xn2);
    set_column(t, "exobase_x_He", xhe);
    set_column(t, "exobase_x_H", xh);
    return t;
}

// The bulk fractions of every row of `t` taken as its prescribed exobase's composition.
void bulk_exobase(CaseTable& t) {
    t.text.push_back({"exobase_composition", std::vector<std::string>(t.rows(), "bulk")});
}

// `t` without its exobase_x_ columns, stating that the bulk fractions are the exobase's.
CaseTable with_bulk_exobase(CaseTable t) {
    t.columns.erase(
        std::remove_if(t.columns.begin(), t.columns.end(),
                       [](const auto& c) { return c.first.rfind("exobase_x_", 0) == 0; }),
        t.columns.end());
    bulk_exobase(t);
    return t;
}

BatchOptions options(std::size_t threads, std::size_t samples = 0, std::size_t chunk = 4) {
    BatchOptions o;
    o.t_start = 10 * Myr;
    o.t_end = 4.5 * Gyr;
    o.times = {10 * Myr, 100 * Myr, 1 * Gyr, 4.5 * Gyr};
    o.threads = threads;
    o.samples = samples;
    o.seed = 20261202;
    o.chunk_size = chunk;
    return o;
}

std::vector<BatchChunk> run(const CaseTable& t, const BatchOptions& o,
                            BatchStatus* status = nullptr) {
    std::vector<BatchChunk> chunks;
    BatchHooks hooks;
    hooks.on_chunk = [&](const BatchChunk& c) { chunks.push_back(c); };
    const BatchStatus s = run_batch(t, 0, t.rows(), o, hooks);
    if (status)
        *status = s;
    return chunks;
}

// Bitwise equality with NaN equal to NaN.
bool same(const std::vector<double>& a, const std::vector<double>& b) {
    if (a.size() != b.size())
        return false;
    for (std::size_t i = 0; i < a.size(); ++i)
        if (!(a[i] == b[i] || (std::isnan(a[i]) && std::isnan(b[i]))))
            return false;
    return true;
}

std::vector<double> concat(const std::vector<BatchChunk>& chunks,
                           std::vector<double> BatchChunk::*field) {
    std::vector<double> out;
    for (const BatchChunk& c : chunks)
        out.insert(out.end(), (c.*field).begin(), (c.*field).end());
    return out;
}

} // namespace

TEST_CASE("counter-based streams: reproducible, distinct, with the moments of U(0,1) and N(0,1)") {
    CounterRng a(7, 3, 11), b(7, 3, 11), c(7, 3, 12), d(8, 3, 11);
    const auto x = a.next_bits();
    CHECK(x == b.next_bits());
    CHECK(x != c.next_bits());
    CHECK(x != d.next_bits());
    // Worked analytic moments: U(0,1) has mean 1/2 and variance 1/12; N(0,1) has mean 0,
    // variance 1, and P(|Z| < 1) = erf(1/sqrt 2) = 0.682689... Tolerances are ~5 standard errors
    // of n = 200000 draws.
    const int n = 200000;
    double su = 0, su2 = 0, sz = 0, sz2 = 0, inside = 0;
    CounterRng r(1, 2, 3);
    for (int i = 0; i < n; ++i) {
        const double u = r.uniform();
        REQUIRE(u >= 0.0);
        REQUIRE(u < 1.0);
        su += u;
        su2 += u * u;
        const double z = r.normal();
        sz += z;
        sz2 += z * z;
        inside += std::abs(z) < 1.0;
    }
    CHECK(su / n == doctest::Approx(0.5).epsilon(5 * 0.2887 / std::sqrt(n) / 0.5));
    CHECK(su2 / n - (su / n) * (su / n) == doctest::Approx(1.0 / 12).epsilon(0.01));
    CHECK(std::abs(sz / n) < 5.0 / std::sqrt(n));
    CHECK(sz2 / n == doctest::Approx(1.0).epsilon(5 * std::sqrt(2.0 / n)));
    CHECK(inside / n == doctest::Approx(std::erf(1.0 / std::sqrt(2.0))).epsilon(0.005));
}

TEST_CASE("samples: log-normal median and width, truncated normal stays in range") {
    CaseTable t = earthlike(1);
    set_column(t, "planet_mass_sigma", {2.0 * constants::M_earth}); // wide: truncation matters
    const CaseSpec spec = case_from_table(t, 0);
    REQUIRE(spec.uncertainties.size() == 2);
    const double m0 = spec.value("planet_mass"), T0 = spec.value("exobase_temperature");
    std::vector<double> lnT;
    double below = 0;
    const int n = 20000;
    for (int k = 0; k < n; ++k) {
        const CaseSpec s = sample_case(spec, 5, static_cast<std::uint64_t>(k));
        REQUIRE(s.value("planet_mass") > 0.0);
        lnT.push_back(std::log(s.value("exobase_temperature") / T0));
        below += s.value("exobase_temperature") < T0;
        CHECK(s.value("planet_radius") == spec.value("planet_radius"));
    }
    // Log-normal with median T0 and sigma of ln T = 0.2 (worked analytic: ln T ~ N(ln T0, 0.04)).
    double mean = 0, var = 0;
    for (double v : lnT)
        mean += v / n;
    for (double v : lnT)
        var += (v - mean) * (v - mean) / (n - 1);
    CHECK(std::abs(mean) < 5 * 0.2 / std::sqrt(n));
    CHECK(std::sqrt(var) == doctest::Approx(0.2).epsilon(0.03));
    CHECK(below / n == doctest::Approx(0.5).epsilon(0.03));
    // Same (seed, key, sample): same draw, whatever else was drawn before.
    CHECK(sample_case(spec, 5, 17).value("planet_mass") ==
          sample_case(spec, 5, 17).value("planet_mass"));
    CHECK(sample_case(spec, 5, 17).value("planet_mass") !=
          sample_case(spec, 6, 17).value("planet_mass"));
    CHECK(m0 > 0.0);
}

TEST_CASE("cases carry values by slot: species values follow the species present") {
    CaseTable t = earthlike(2);
    set_column(t, "x_He", {0.25, 0.0}); // row 2 has no helium
    set_column(t, "x_N2", {0.7, 0.95});
    set_column(t, "exobase_x_He", {0.25, 0.0});
    set_column(t, "exobase_x_N2", {0.7, 0.95});
    set_column(t, "x_He_sigma", {0.01, 0.01});
    set_column(t, "inventory_H", {2e35, 3e35});
    set_column(t, "inventory_H_lnsigma", {0.5, 0.5});
    const CaseSpec with = case_from_table(t, 0), without = case_from_table(t, 1);
    const std::size_t P = case_parameters().size(), K = species_parameters().size();
    REQUIRE(with.species.size() == 3);
    REQUIRE(without.species.size() == 2);
    CHECK(with.values.size() == P + K * 3);
    CHECK(without.values.size() == P + K * 2);
    CHECK(without.species[1].name == "H");
    CHECK(without.mole_fraction(1) == 0.05);
    CHECK(without.inventory(1) == 3e35);
    CHECK(std::isnan(without.inventory(0))); // N2's comes from the total
    CHECK(without.value("inventory_H") == 3e35);
    CHECK(std::isnan(without.value("x_He")));
    CHECK(without.named_values().count("x_He") == 0);
    CHECK(with.named_values().at("x_He") == 0.25);
    // The uncertainty of an absent species changes nothing and is not drawn.
    REQUIRE(with.uncertainties.size() == 4);
    REQUIRE(without.uncertainties.size() == 3);
    // A sample moves exactly the slots of its uncertain parameters.
    const CaseSpec drawn = sample_case(without, 11, 2);
    for (std::size_t k = 0; k < drawn.values.size(); ++k) {
        bool uncertain = false;
        for (const Uncertainty& u : without.uncertainties)
            uncertain = uncertain || u.slot == k;
        if (std::isnan(without.values[k]))
            CHECK(std::isnan(drawn.values[k]));
        else if (!uncertain)
            CHECK(drawn.values[k] == without.values[k]);
        else
            CHECK(drawn.values[k] != without.values[k]);
    }
    // The per-species inventory reaches the run; the others share the total by mole fraction.
    BatchOptions o;
    o.t_start = 10 * Myr;
    o.t_end = 1 * Gyr;
    const EvolutionConfig c = build_config(without, o);
    CHECK(c.initial_inventory[1] == 3e35);
    CHECK(c.initial_inventory[0] == doctest::Approx(1e37 * 0.95).epsilon(1e-15));
}

TEST_CASE("case tables: mole fractions must sum to one, samples are renormalised") {
    CaseTable t = earthlike(4);
    t.row_labels = {"line 5", "line 6", "line 7", "line 8"};
    // Row 2 sums to 0.95 (a species forgotten); row 3 to 1 + 5e-4, inside the tolerance;
    // row 4 to 1.3.
    set_column(t, "x_N2", {0.7, 0.65, 0.7005, 1.0});
    CHECK_THROWS_WITH_AS(case_from_table(t, 1),
                         doctest::Contains("line 6 (case 'case 1'), mole fractions 'x_<species>' "
                                           "sum to 0.95, not 1 (allowed: within 0.001)"),
                         InputError);
    CHECK_NOTHROW(case_from_table(t, 2));
    const auto errors = check_table(t, options(1));
    REQUIRE(errors.size() == 4);
    CHECK(errors[0].empty());
    CHECK(errors[1].find("sum to 0.95") != std::string::npos);
    CHECK(errors[2].empty());
    CHECK(errors[3].find("line 8 (case 'case 3'), mole fractions 'x_<species>' sum to 1.3") !=
          std::string::npos);
    // Refused before any run, or reported in its chunk with skip_invalid.
    int chunks = 0;
    BatchHooks hooks;
    hooks.on_chunk = [&](const BatchChunk&) { ++chunks; };
    CHECK_THROWS_WITH_AS(run_batch(t, 0, 4, options(1), hooks),
                         doctest::Contains("2 invalid rows\n  line 6"), InputError);
    CHECK(chunks == 0);
    BatchOptions skip = options(1);
    skip.skip_invalid = true;
    BatchStatus st;
    const auto out = run(t, skip, &st);
    CHECK(st.cases_failed == 2);
    CHECK(out[0].error[1].find("sum to 0.95") != std::string::npos);
    CHECK(out[0].error[2].empty());
    // Inside the tolerance, and when the row states that its bulk fractions are the exobase's,
    // densities and the shares of the total inventory use the same normalised fractions
    // (x_i / sum x): both describe one mixture.
    const EvolutionConfig c = build_config(case_from_table(with_bulk_exobase(t), 2), options(1));
    const auto& exo = dynamic_cast<const PrescribedExobase&>(*c.exobase);
    const double sum = 0.7005 + 0.25 + 0.05;
    for (std::size_t i = 0; i < 3; ++i) {
        CAPTURE(i);
        CHECK(exo.densities()[i] / 1e13 ==
              doctest::Approx(c.initial_inventory[i] / 1e37).epsilon(1e-14));
    }
    CHECK(exo.densities()[0] == doctest::Approx(1e13 * 0.7005 / sum).epsilon(1e-14));
    // A sample's drawn fractions need not sum to one: they are renormalised the same way.
    CaseTable u = with_bulk_exobase(earthlike(1));
    set_column(u, "x_He_sigma", {0.05});
    const CaseSpec drawn = sample_case(case_from_table(u, 0), 3, 1);
    REQUIRE(drawn.value("x_He") != 0.25);
    const EvolutionConfig cs = build_config(drawn, options(1));
    const auto& exo_s = dynamic_cast<const PrescribedExobase&>(*cs.exobase);
    double total = 0.0, shares = 0.0;
    for (std::size_t i = 0; i < 3; ++i) {
        total += exo_s.densities()[i];
        shares += cs.initial_inventory[i];
    }
    CHECK(total == doctest::Approx(1e13).epsilon(1e-14));
    CHECK(shares == doctest::Approx(1e37).epsilon(1e-14));
}

TEST_CASE("prescribed exobase: its composition is its own, the inventory takes the bulk one") {
    // Bulk N2 0.78, O 0.219994, He 6e-6 (invented); the exobase O 0.90, N2 0.05, He 0.05.
    CaseTable t;
    t.names = {"own", "own, other exobase", "bulk stated", "none"};
    t.row_labels = {"line 3", "line 4", "line 5", "line 6"};
    auto all = [](double v) { return std::vector<double>(4, v); };
    set_column(t, "planet_mass", all(constants::M_earth));
    set_column(t, "planet_radius", all(constants::R_earth));
    set_column(t, "exobase_altitude", all(500e3));
    set_column(t, "exobase_density", all(1e13));
    set_column(t, "exobase_temperature", all(1000.0));
    set_column(t, "surface_pressure", all(1e5));
    set_column(t, "x_N2", all(0.78));
    set_column(t, "x_O", all(0.219994));
    set_column(t, "x_He", all(6e-6));
    set_column(t, "exobase_x_O", {0.90, 0.50, missing, missing});
    set_column(t, "exobase_x_N2", {0.05, 0.50, missing, missing});
    set_column(t, "exobase_x_He", {0.05, missing, missing, missing}); // empty beside others: 0
    t.text.push_back({"exobase_composition", {"", "", "bulk", ""}});
    const BatchOptions o = options(1);
    const EvolutionConfig own = build_config(case_from_table(t, 0), o);
    const EvolutionConfig other = build_config(case_from_table(t, 1), o);
    const EvolutionConfig bulk = build_config(case_from_table(t, 2), o);
    const auto& exo = dynamic_cast<const PrescribedExobase&>(*own.exobase);
    const auto& exo_other = dynamic_cast<const PrescribedExobase&>(*other.exobase);
    const auto& exo_bulk = dynamic_cast<const PrescribedExobase&>(*bulk.exobase);
    // Species order N2, O, He (the x_ columns).
    CHECK(exo.densities()[1] == doctest::Approx(0.90e13).epsilon(1e-15));
    CHECK(exo.densities()[2] == doctest::Approx(0.05e13).epsilon(1e-15));
    CHECK(exo_other.densities()[2] == 0.0);
    CHECK(exo_bulk.densities()[2] == doctest::Approx(6e-6 * 1e13).epsilon(1e-12));
    // The inventories do not depend on the exobase composition, bit for bit.
    CHECK(own.initial_inventory == other.initial_inventory);
    CHECK(own.initial_inventory == bulk.initial_inventory);
    // Hydrostatic column N = P 4 pi R^2 / (g m_mean), g = G M / R^2 (worked by hand).
    const double m_mean =
        0.78 * species("N2").mass + 0.219994 * species("O").mass + 6e-6 * species("He").mass;
    const double g = constants::G * constants::M_earth / (constants::R_earth * constants::R_earth);
    const double total =
        1e5 * 4.0 * constants::pi * constants::R_earth * constants::R_earth / (g * m_mean);
    CHECK(own.initial_inventory[2] == doctest::Approx(6e-6 * total).epsilon(1e-12));
    // No exobase composition: refused naming the row, the columns and the opt-in.
    const auto errors = check_table(t, o);
    REQUIRE(errors.size() == 4);
    CHECK(errors[0].empty());
    CHECK(errors[1].empty());
    CHECK(errors[2].empty());
    CHECK(errors[3].find("line 6 (case 'none')") != std::string::npos);
    CHECK(errors[3].find("'exobase_x_N2', 'exobase_x_O', 'exobase_x_He'") != std::string::npos);
    CHECK(errors[3].find("'exobase_composition' set to 'bulk'") != std::string::npos);
    // Both at once, a bad opt-in word, an exobase fraction of a species not in the bulk gas,
    // exobase fractions that do not sum to one, and exobase fractions on a thermosphere row.
    CaseTable both = t;
    both.text[0].second[0] = "bulk";
    CHECK_THROWS_WITH_AS(build_config(case_from_table(both, 0), o),
                         doctest::Contains("column 'exobase_composition': 'bulk' takes"),
                         InputError);
    CaseTable word = t;
    word.text[0].second[3] = "exobase";
    CHECK_THROWS_WITH_AS(case_from_table(word, 3),
                         doctest::Contains("line 6 (case 'none'), column 'exobase_composition': "
                                           "'exobase' is not 'bulk'"),
                         InputError);
    CaseTable absent = t;
    set_column(absent, "x_He", {0.0, missing, missing, missing});
    set_column(absent, "x_O", {0.22, 0.219994, 0.219994, 0.219994});
    CHECK_THROWS_WITH_AS(case_from_table(absent, 0),
                         doctest::Contains("column 'exobase_x_He': got 0.05"), InputError);
    CHECK_THROWS_WITH_AS(case_from_table(absent, 0),
                         doctest::Contains("but the species is not in the bulk atmosphere ('x_He' "
                                           "zero or empty)"),
                         InputError);
    CaseTable sum = t;
    set_column(sum, "exobase_x_O", {0.80, 0.50, missing, missing});
    CHECK_THROWS_WITH_AS(case_from_table(sum, 0),
                         doctest::Contains("line 3 (case 'own'), mole fractions "
                                           "'exobase_x_<species>' sum to 0.9"),
                         InputError);
}

TEST_CASE("case tables: per-row regime thresholds and drag reach the config") {
    CaseTable t = with_bulk_exobase(earthlike(3));
    set_column(t, "threshold_enhanced", {8.0, missing, 2.0});
    set_column(t, "threshold_hydrodynamic", {1.5, missing, missing});
    set_column(t, "heating_efficiency", {0.1, missing, missing});
    set_column(t, "drag", {0.0, missing, missing});
    set_column(t, "drag_diffusion_He", {1e21, missing, missing});
    set_column(t, "drag_diffusion_exponent_He", {0.7, missing, missing});
    BatchOptions o = options(1);
    o.thresholds.transition = 4.0;
    const EvolutionConfig c = build_config(case_from_table(t, 0), o);
    CHECK(c.thresholds.enhanced == 8.0);
    CHECK(c.thresholds.transition == 4.0); // the sweep's
    CHECK(c.thresholds.hydrodynamic == 1.5);
    REQUIRE(c.hydrodynamic.has_value());
    CHECK_FALSE(c.hydrodynamic->drag);
    REQUIRE(c.hydrodynamic->diffusion.size() == 1);
    CHECK(c.hydrodynamic->diffusion[0].first == "He");
    CHECK(c.hydrodynamic->diffusion[0].second.coefficient == 1e21);
    CHECK(c.hydrodynamic->diffusion[0].second.exponent == 0.7);
    const EvolutionConfig d = build_config(case_from_table(t, 1), o);
    CHECK(d.thresholds.enhanced == 6.0);
    CHECK(d.thresholds.transition == 4.0);
    // Row 3: enhanced 2 below the sweep's transition 4: refused naming the column.
    CHECK_THROWS_WITH_AS(build_config(case_from_table(t, 2), o),
                         doctest::Contains("column 'threshold_enhanced': the row's thresholds"),
                         InputError);
    // Drag columns without energy-limited escape.
    CaseTable u = with_bulk_exobase(earthlike(1));
    set_column(u, "drag", {1.0});
    CHECK_THROWS_WITH_AS(build_config(case_from_table(u, 0), o),
                         doctest::Contains("column 'drag': got 1, but it is for energy-limited"),
                         InputError);
}

TEST_CASE("case tables: columns and rows are checked with the row and the column named") {
    CaseTable t = earthlike(3);
    t.row_labels = {"line 5", "line 6", "line 7"};
    CHECK_NOTHROW(check_table_columns(t));

    CaseTable unknown = t;
    set_column(unknown, "planet_mas", {1, 1, 1});
    CHECK_THROWS_WITH_AS(check_table_columns(unknown),
                         doctest::Contains("unknown column 'planet_mas' (closest: planet_mass"),
                         InputError);
    CaseTable orphan = t;
    set_column(orphan, "star_mass_sigma", {1, 1, 1});
    CHECK_THROWS_WITH_AS(check_table_columns(orphan),
                         doctest::Contains("'star_mass_sigma' has no value column 'star_mass'"),
                         InputError);
    CaseTable fixed_sigma = t;
    set_column(fixed_sigma, "age_end", {1, 1, 1});
    set_column(fixed_sigma, "age_end_sigma", {1, 1, 1});
    CHECK_THROWS_WITH_AS(check_table_columns(fixed_sigma),
                         doctest::Contains("'age_end' cannot be given an uncertainty"), InputError);
    CaseTable no_radius;
    no_radius.names = {"a"};
    no_radius.columns = {{"planet_mass", {1.0}}, {"x_H", {1.0}}};
    CHECK_THROWS_WITH_AS(check_table_columns(no_radius),
                         doctest::Contains("no column 'planet_radius'"), InputError);
    CaseTable species = t;
    set_column(species, "x_N3", {1, 1, 1});
    CHECK_THROWS_WITH_AS(check_table_columns(species), doctest::Contains("'x_N3'"), InputError);

    CaseTable bad = t;
    bad.columns[0].second[1] = -2.0; // planet_mass of the second row
    CHECK_THROWS_WITH_AS(
        case_from_table(bad, 1),
        doctest::Contains("line 6 (case 'case 1'), column 'planet_mass': must be > 0, got -2"),
        InputError);
    // A column given in another unit shows the bad value in it, then in SI.
    CaseTable given = bad;
    given.columns[0].second[1] = -2.0 * constants::M_earth;
    given.given_units["planet_mass"] = {"M_earth", constants::M_earth};
    const std::string as_given = "column 'planet_mass': must be > 0, got -2 M_earth (" +
                                 format_value(-2.0 * constants::M_earth) + " kg)";
    CHECK_THROWS_WITH_AS(case_from_table(given, 1), doctest::Contains(as_given.c_str()),
                         InputError);
    const auto errors = check_table(bad, options(2));
    REQUIRE(errors.size() == 3);
    CHECK(errors[0].empty());
    CHECK(errors[1].find("line 6") != std::string::npos);
    CHECK(errors[2].empty());

    CaseTable empty_temp = t;
    set_column(empty_temp, "exobase_temperature", {1000.0, missing, 900.0});
    set_column(empty_temp, "exobase_temperature_lnsigma", {missing, missing, missing});
    const auto e2 = check_table(empty_temp, options(1));
    CHECK(e2[1].find("line 6 (case 'case 1'), column 'exobase_temperature': no value given") !=
          std::string::npos);

    // Invalid rows stop the batch before any run, unless reported in their chunks.
    int chunks = 0;
    BatchHooks hooks;
    hooks.on_chunk = [&](const BatchChunk&) { ++chunks; };
    CHECK_THROWS_WITH_AS(run_batch(bad, 0, 3, options(1), hooks),
                         doctest::Contains("1 invalid row\n  line 6"), InputError);
    CHECK(chunks == 0);
    BatchOptions skip = options(1);
    skip.skip_invalid = true;
    BatchStatus st;
    const auto out = run(bad, skip, &st);
    CHECK(st.cases_done == 3);
    CHECK(st.cases_failed == 1);
    CHECK(out[0].error[1].find("column 'planet_mass'") != std::string::npos);
    CHECK(std::isnan(out[0].final_retained[1 * 3 + 0]));
    CHECK(std::isfinite(out[0].final_retained[2 * 3 + 0]));

    // Reported rows name the row and the column whether the row or its model is at fault.
    CaseTable starless = t;
    set_column(starless, "semi_major_axis", {missing, constants::au, missing});
    const auto out2 = run(starless, skip, &st);
    CHECK(out2[0].error[1] ==
          "line 6 (case 'case 1'), column 'star_mass': no value given (a semi_major_axis needs "
          "the star)");
    CHECK(check_table(starless, options(1))[1] == out2[0].error[1]);
    BatchOptions fewer = skip;
    fewer.species = {"N2", "He"};
    const auto out3 = run(t, fewer, &st);
    CHECK(st.cases_failed == 3);
    CHECK(out3[0].error[0].find("species 'H' is not among the batch's species") !=
          std::string::npos);
}

TEST_CASE("configs from cases: inventories, temperature histories, spans") {
    CaseTable t = earthlike(1);
    // Worked analytic hydrostatic column: N = P 4 pi R^2 / (g m_mean), g = G M / R^2.
    CaseTable p = t;
    p.columns.erase(std::find_if(p.columns.begin(), p.columns.end(),
                                 [](const auto& c) { return c.first == "inventory"; }));
    set_column(p, "surface_pressure", {1e5});
    set_column(p, "inventory_H", {3e30});
    const BatchOptions o = options(1);
    const EvolutionConfig c = build_config(case_from_table(p, 0), o);
    const double M = p.columns[0].second[0], R = constants::R_earth;
    const double m_mean =
        0.7 * species("N2").mass + 0.25 * species("He").mass + 0.05 * species("H").mass;
    const double N = 1e5 * 4 * constants::pi * R * R / (constants::G * M / (R * R) * m_mean);
    REQUIRE(c.species.size() == 3);
    CHECK(c.initial_inventory[0] == doctest::Approx(0.7 * N).epsilon(1e-14));
    CHECK(c.initial_inventory[1] == doctest::Approx(0.25 * N).epsilon(1e-14));
    CHECK(c.initial_inventory[2] == 3e30);
    CHECK(c.temperature(1 * Gyr, 0.0) == 800.0);
    CHECK(c.t_start == 10 * Myr);
    CHECK(c.t_end == 4.5 * Gyr);
    CHECK(c.t_eval == std::vector<double>{10 * Myr, 100 * Myr, 1 * Gyr, 4.5 * Gyr});

    CaseTable lin = t;
    set_column(lin, "exobase_temperature_end", {400.0});
    set_column(lin, "age_end", {2 * Gyr});
    const EvolutionConfig cl = build_config(case_from_table(lin, 0), o);
    CHECK(cl.t_end == 2 * Gyr);
    CHECK(cl.t_eval == std::vector<double>{10 * Myr, 100 * Myr, 1 * Gyr, 2 * Gyr});
    // Linear from 800 K at 10 Myr to 400 K at 2 Gyr (worked by hand).
    CHECK(cl.temperature(1005 * Myr, 0.0) == doctest::Approx(600.0).epsilon(1e-12));

    CaseTable xuv = t;
    xuv.columns.erase(std::find_if(xuv.columns.begin(), xuv.columns.end(), [](const auto& c) {
        return c.first == "exobase_temperature_lnsigma";
    }));
    xuv.columns.erase(std::find_if(xuv.columns.begin(), xuv.columns.end(),
                                   [](const auto& c) { return c.first == "exobase_temperature"; }));
    set_column(xuv, "temperature_reference", {1000.0});
    set_column(xuv, "temperature_reference_flux", {4.6e-3});
    set_column(xuv, "temperature_exponent", {0.5});
    set_column(xuv, "temperature_min", {300.0});
    set_column(xuv, "temperature_max", {5000.0});
    const CaseSpec no_star = case_from_table(xuv, 0);
    CHECK_THROWS_AS(build_config(no_star, o).validate(), InputError);
    set_column(xuv, "semi_major_axis", {constants::au});
    CHECK_THROWS_WITH_AS(build_config(case_from_table(xuv, 0), o),
                         doctest::Contains("column 'star_mass': no value given"), InputError);
    set_column(xuv, "star_mass", {constants::M_sun});
    set_column(xuv, "star_luminosity", {constants::L_sun});
    const EvolutionConfig cx = build_config(case_from_table(xuv, 0), o);
    CHECK_NOTHROW(cx.validate());
    CHECK(cx.temperature.needs_xuv_flux());
}

TEST_CASE("batch: exponential loss as in the analytic solution, outputs per case and species") {
    // Worked analytic solution: constant temperature, densities following the inventory:
    // N(t) = N0 exp(-Q0 (t - t0) / N0), with Q0 the Jeans escape rate at the start.
    CaseTable t = earthlike(2);
    BatchOptions o = options(2);
    o.rtol = 1e-10;
    const auto chunks = run(t, o);
    REQUIRE(chunks.size() == 1);
    const BatchChunk& c = chunks[0];
    CHECK(c.species == 3);
    CHECK(c.times == 4);
    for (std::size_t k = 0; k < 2; ++k) {
        CHECK(c.error[k].empty());
        const double M = t.columns[0].second[k], T = t.columns[5].second[k];
        const double r = constants::R_earth + 500e3;
        const double n_He = 0.25 * 1e13, N_He = 0.25 * 1e37;
        const double Q0 = jeans_escape_rate(n_He, T, species("He").mass, M, r);
        const double expected = std::exp(-Q0 * (4.5 * Gyr - 10 * Myr) / N_He);
        CHECK(c.final_retained[k * 3 + 1] == doctest::Approx(expected).epsilon(1e-8));
        CHECK(c.efolding_time[k * 3 + 1] == doctest::Approx(N_He / Q0).epsilon(1e-12));
        const double lambda = jeans_parameter(T, species("H").mass, M, r);
        CHECK(c.jeans_start[k * 3 + 2] == doctest::Approx(lambda).epsilon(1e-12));
        CHECK(c.jeans_end[k * 3 + 2] == doctest::Approx(lambda).epsilon(1e-12));
        CHECK(c.regime_start[k * 3 + 2] ==
              static_cast<int>(classify_regime(lambda, RegimeThresholds{})));
        CHECK(c.escape_speed[k] == doctest::Approx(std::sqrt(2 * constants::G * M / r)));
        CHECK(c.retained[(k * 4 + 0) * 3 + 1] ==
              doctest::Approx(1.0).epsilon(1e-13)); // exp(ln N) / N
        CHECK(c.retained[(k * 4 + 3) * 3 + 1] == c.final_retained[k * 3 + 1]);
        CHECK(c.exobase_temperature[k * 4 + 2] == T);
        CHECK(c.temperature_start[k] == T);
        CHECK(c.mole_fraction[k * 3 + 1] == 0.25);
    }
}

TEST_CASE("batch: same results for any thread count and chunk size, in table order") {
    const CaseTable t = earthlike(9);
    const auto one = run(t, options(1, 6, 4));
    const auto three = run(t, options(3, 6, 2));
    const auto single = run(t, options(2, 6, 100));
    REQUIRE(one.size() == 3);
    REQUIRE(three.size() == 5);
    REQUIRE(single.size() == 1);
    std::size_t first = 0;
    for (const BatchChunk& c : three) {
        CHECK(c.first == first);
        first += c.count;
    }
    for (auto field :
         {&BatchChunk::final_retained, &BatchChunk::sample_retained,
          &BatchChunk::sample_depletion_time, &BatchChunk::retained, &BatchChunk::depletion_time}) {
        CHECK(same(concat(one, field), concat(three, field)));
        CHECK(same(concat(one, field), concat(single, field)));
    }
    // The samples differ from one another and from the nominal run.
    const auto s = concat(one, &BatchChunk::sample_retained);
    const auto nominal = concat(one, &BatchChunk::final_retained);
    std::size_t partial = 0;
    for (std::size_t k = 0; k < 9; ++k) {
        if (!(nominal[k * 3 + 1] > 1e-6 && nominal[k * 3 + 1] < 1 - 1e-6))
            continue;
        ++partial; // He partly lost: its samples spread around the nominal figure
        CHECK(s[(k * 6 + 0) * 3 + 1] != s[(k * 6 + 1) * 3 + 1]);
        CHECK(s[(k * 6 + 0) * 3 + 1] != nominal[k * 3 + 1]);
    }
    CHECK(partial > 0);
    // Each result equals a single evolve() of the same config.
    const CaseSpec spec = case_from_table(t, 4);
    EvolutionConfig cfg = build_config(spec, options(1));
    const EvolutionResult r = evolve(cfg);
    CHECK(one[1].final_retained[0 * 3 + 2] ==
          r.inventory[(r.time_count() - 1) * 3 + 2] / cfg.initial_inventory[2]);
    EvolutionConfig sampled = build_config(sample_case(spec, 20261202, 3), options(1));
    const EvolutionResult rs = evolve(sampled);
    CHECK(one[1].sample_retained[(0 * 6 + 3) * 3 + 2] ==
          rs.inventory[(rs.time_count() - 1) * 3 + 2] / sampled.initial_inventory[2]);
}

TEST_CASE("batch: a case that fails numerically is reported and the others complete") {
    CaseTable t = earthlike(5);
    std::vector<double> budget(5, missing);
    budget[2] = 2; // two steps cannot cover 4.5 Gyr
    set_column(t, "max_steps", budget);
    BatchStatus st;
    const auto out = run(t, options(2, 3, 2), &st);
    CHECK(st.cases_done == 5);
    CHECK(st.cases_failed == 1);
    CHECK(st.samples_failed == 3);
    CHECK(out[1].error[0].find("no progress: max_steps = 2") != std::string::npos);
    CHECK(out[1].sample_error[0].find("sample 0: no progress") != std::string::npos);
    CHECK(std::isnan(out[1].final_retained[0]));
    for (std::size_t k : {0, 1})
        for (std::size_t j = 0; j < out[k == 0 ? 0 : 2].count; ++j)
            CHECK(out[k == 0 ? 0 : 2].error[j].empty());
    CHECK(std::isfinite(out[2].final_retained[0]));
}

TEST_CASE("batch: progress by count comes after every k-th chunk and at the end") {
    const CaseTable t = earthlike(40); // 8 chunks of 5 cases, 21 runs per case
    const std::size_t per_chunk = 5 * 21;
    for (std::size_t threads : {1, 2}) {
        std::vector<std::size_t> reported, handed_at_call;
        std::size_t handed = 0;
        BatchHooks hooks;
        hooks.progress_every_chunks = 3;
        hooks.on_chunk = [&](const BatchChunk& c) { handed += c.count; };
        hooks.on_progress = [&](std::size_t done, std::size_t total) {
            CHECK(total == 40 * 21);
            reported.push_back(done);
            handed_at_call.push_back(handed);
            return true;
        };
        const BatchStatus st = run_batch(t, 0, t.rows(), options(threads, 20, 5), hooks);
        CAPTURE(threads);
        CHECK(!st.cancelled);
        CHECK(st.cases_done == 40);
        CHECK(reported == std::vector<std::size_t>{3 * per_chunk, 6 * per_chunk, 8 * per_chunk});
        CHECK(handed_at_call == std::vector<std::size_t>{15, 30, 40});
    }
}

TEST_CASE("batch: cancelling keeps the chunks handed out") {
    const CaseTable t = earthlike(40);
    for (std::size_t threads : {1, 2}) {
        // By count: false at the 3rd call, made after every 2nd chunk, keeps exactly 6 chunks.
        std::size_t handed = 0, calls = 0;
        BatchHooks hooks;
        hooks.progress_every_chunks = 2;
        hooks.on_chunk = [&](const BatchChunk& c) { handed += c.count; };
        hooks.on_progress = [&](std::size_t, std::size_t) { return ++calls < 3; };
        const BatchStatus st = run_batch(t, 0, t.rows(), options(threads, 20, 5), hooks);
        CAPTURE(threads);
        CHECK(st.cancelled);
        CHECK(calls == 3);
        CHECK(st.cases_done == 30);
        CHECK(handed == 30);
    }
    // By time: whenever the call that cancels comes, what was handed out stays handed out.
    std::size_t handed = 0, calls = 0;
    BatchHooks hooks;
    hooks.progress_interval_ms = 1;
    hooks.on_chunk = [&](const BatchChunk& c) { handed += c.count; };
    hooks.on_progress = [&](std::size_t done, std::size_t total) {
        ++calls;
        CHECK(done <= total);
        return false;
    };
    const BatchStatus st = run_batch(t, 0, t.rows(), options(2, 20, 5), hooks);
    CHECK(calls >= 1);
    CHECK(st.cases_done == handed);
    CHECK(handed % 5 == 0);
    CHECK(st.cancelled == (handed < 40));

    BatchHooks failing;
    failing.on_chunk = [](const BatchChunk& c) {
        if (c.first >= 10)
            throw FileError("disk full");
    };
    CHECK_THROWS_WITH_AS(run_batch(t, 0, t.rows(), options(2, 0, 5), failing), "disk full",
                         FileError);
}

TEST_CASE("batch: a block of rows keeps its keys, so a resumed sweep draws the same samples") {
    const CaseTable t = earthlike(6);
    const auto whole = run(t, options(2, 4, 3));
    std::vector<BatchChunk> tail;
    BatchHooks hooks;
    hooks.on_chunk = [&](const BatchChunk& c) { tail.push_back(c); };
    run_batch(t, 3, 6, options(1, 4, 3), hooks);
    REQUIRE(tail.size() == 1);
    CHECK(tail[0].first == 3);
    CHECK(tail[0].key == whole[1].key);
    CHECK(same(tail[0].sample_retained, whole[1].sample_retained));
    CHECK_THROWS_AS(run_batch(t, 4, 7, options(1), hooks), InputError);
}

namespace {

// Three invented planets with a thermosphere above a 100 km homopause, N2, O, He and H well
// mixed: row 0 isothermal, row 1 Bates, row 2 Bates without diffusion limiting.
CaseTable thermosphere_table() {
    CaseTable t;
    t.names = {"iso", "bates", "bates jeans only"};
    const double M = 0.8 * constants::M_earth;
    set_column(t, "planet_mass", {M, M, M});
    set_column(t, "planet_radius",
               {0.95 * constants::R_earth, 0.95 * constants::R_earth, 0.95 * constants::R_earth});
    set_column(t, "homopause_altitude", {100e3, 100e3, 100e3});
    set_column(t, "homopause_density", {1e19, 1e19, 1e19});
    set_column(t, "homopause_temperature", {missing, 200.0, 200.0});
    set_column(t, "bates_shape", {missing, 1.0 / 40e3, 1.0 / 40e3});
    set_column(t, "diffusion_limited", {missing, 1.0, 0.0});
    set_column(t, "exobase_temperature", {900.0, 1100.0, 1100.0});
    set_column(t, "surface_pressure", {1e5, 1e5, 1e5});
    set_column(t, "x_N2", {0.78, 0.78, 0.78});
    set_column(t, "x_O", {0.219989, 0.219989, 0.219989});
    set_column(t, "x_He", {1e-5, 1e-5, 1e-5});
    set_column(t, "x_H", {1e-6, 1e-6, 1e-6});
    return t;
}

} // namespace

TEST_CASE("thermosphere rows: the exobase model evolve() builds from the same Thermosphere") {
    const CaseTable t = thermosphere_table();
    const BatchOptions o = options(1);
    const std::vector<std::string> names{"N2", "O", "He", "H"};
    const std::vector<Species> sp{species("N2"), species("O"), species("He"), species("H")};
    const std::vector<double> x{0.78, 0.219989, 1e-5, 1e-6};
    const double M = 0.8 * constants::M_earth, R = 0.95 * constants::R_earth;
    for (std::size_t row = 0; row < 3; ++row) {
        CAPTURE(row);
        const EvolutionConfig c = build_config(case_from_table(t, row), o);
        REQUIRE(dynamic_cast<const ThermosphereExobase*>(c.exobase.get()) != nullptr);
        const TemperatureProfile profile =
            row == 0 ? TemperatureProfile::isothermal(900.0)
                     : TemperatureProfile::bates(1100.0, 200.0, 1.0 / 40e3, R + 100e3);
        const Thermosphere th(M, R, R + 100e3, 1e19, sp, x, profile);
        const ThermosphereExobase direct(th, names, row != 2);
        ExobaseState a, b;
        for (ExobaseState* s : {&a, &b}) {
            s->log_density.assign(4, 0.0);
            s->log_escape_rate.assign(4, 0.0);
        }
        const std::vector<double> lf{0.0, -0.1, -0.5, -2.0};
        const double T = row == 0 ? 900.0 : 1100.0;
        c.exobase->evaluate(o.t_start, lf.data(), T, a);
        direct.evaluate(o.t_start, lf.data(), T, b);
        CHECK(a.radius == b.radius);
        CHECK(a.has_escape_rates == b.has_escape_rates);
        CHECK(same(a.log_density, b.log_density));
        CHECK(same(a.log_escape_rate, b.log_escape_rate));
        CHECK(c.exobase->to_json() == direct.to_json());
    }
    // The batch's retained fractions are those of evolve() with the hand-built model.
    const std::vector<BatchChunk> chunks = run(t, o);
    REQUIRE(chunks.size() == 1);
    const BatchChunk& out = chunks[0];
    for (std::size_t row = 0; row < 3; ++row) {
        CAPTURE(row);
        INFO(out.error[row]);
        REQUIRE(out.error[row].empty());
        EvolutionConfig c{Planet(M, R)};
        c.species = sp;
        const double g = constants::G * M / (R * R);
        double m_mean = 0.0;
        for (std::size_t i = 0; i < 4; ++i)
            m_mean += x[i] * sp[i].mass;
        const double N = 1e5 * 4 * constants::pi * R * R / (g * m_mean);
        for (std::size_t i = 0; i < 4; ++i)
            c.initial_inventory.push_back(N * x[i]);
        const TemperatureProfile profile =
            row == 0 ? TemperatureProfile::isothermal(900.0)
                     : TemperatureProfile::bates(1100.0, 200.0, 1.0 / 40e3, R + 100e3);
        c.exobase = std::make_shared<ThermosphereExobase>(
            Thermosphere(M, R, R + 100e3, 1e19, sp, x, profile), names, row != 2);
        c.temperature = ExobaseTemperature::constant(row == 0 ? 900.0 : 1100.0);
        c.t_start = o.t_start;
        c.t_end = o.t_end;
        c.t_eval = o.times;
        c.rtol = o.rtol;
        const EvolutionResult r = evolve(c);
        REQUIRE(r.time_count() == 4);
        for (std::size_t j = 0; j < 4; ++j)
            for (std::size_t i = 0; i < 4; ++i)
                CHECK(out.retained[(row * 4 + j) * 4 + i] ==
                      doctest::Approx(r.inventory[j * 4 + i] / r.inventory[i]).epsilon(1e-14));
        CHECK(out.exobase_radius[row] == r.exobase_radius[0]);
    }
    // Diffusion limiting slows the loss of hydrogen (the supply from below caps it).
    INFO(out.depletion_time[1 * 4 + 3], " ", out.depletion_time[2 * 4 + 3]);
    CHECK(out.depletion_time[1 * 4 + 3] > out.depletion_time[2 * 4 + 3]);
}

TEST_CASE("thermosphere rows: isothermal exobase altitude as the analytic scale-height result") {
    // Worked analytic solution, one gas, isothermal, g = G M / r^2:
    // n(r) = n_h exp(-(G M m / k T) (1/r_h - 1/r)), H(r) = k T r^2 / (G M m); the exobase is
    // where the mean free path 1 / (n sigma) equals H, solved here by bisection.
    CaseTable t;
    t.names = {"nitrogen"};
    const double M = constants::M_earth, R = constants::R_earth, T = 1000.0, n_h = 1e19;
    const double r_h = R + 100e3;
    set_column(t, "planet_mass", {M});
    set_column(t, "planet_radius", {R});
    set_column(t, "homopause_altitude", {100e3});
    set_column(t, "homopause_density", {n_h});
    set_column(t, "exobase_temperature", {T});
    set_column(t, "inventory", {1e40});
    set_column(t, "x_N2", {1.0});
    const std::vector<BatchChunk> chunks = run(t, options(1));
    REQUIRE(chunks[0].error[0].empty());
    const Species& n2 = species("N2");
    const double a = constants::G * M * n2.mass / (constants::k_B * T);
    auto f = [&](double r) {
        return std::log(n_h * n2.cross_section) - a * (1.0 / r_h - 1.0 / r) + std::log(r * r / a);
    };
    double lo = r_h, hi = 2.0 * r_h;
    REQUIRE(f(lo) > 0.0);
    REQUIRE(f(hi) < 0.0);
    for (int k = 0; k < 200; ++k) {
        const double mid = 0.5 * (lo + hi);
        (f(mid) > 0.0 ? lo : hi) = mid;
    }
    CHECK(chunks[0].exobase_radius[0] == doctest::Approx(0.5 * (lo + hi)).epsilon(1e-9));
    CHECK(chunks[0].hydrodynamic_unmodelled[0] == 0);
    CHECK(chunks[0].bulk_jeans_start[0] ==
          doctest::Approx(chunks[0].jeans_start[0]).epsilon(1e-15));
}

TEST_CASE("thermosphere rows: refused with the columns named") {
    const BatchOptions o = options(1);
    CaseTable both = thermosphere_table();
    set_column(both, "exobase_altitude", {500e3, missing, missing});
    CHECK_THROWS_WITH_AS(
        build_config(case_from_table(both, 0), o),
        doctest::Contains("column 'exobase_altitude': give either a prescribed exobase "
                          "('exobase_altitude', 'exobase_density') or a thermosphere"),
        InputError);
    CHECK_NOTHROW(build_config(case_from_table(both, 1), o));
    CaseTable half = thermosphere_table();
    set_column(half, "homopause_density", {missing, 1e19, 1e19});
    CHECK_THROWS_WITH_AS(build_config(case_from_table(half, 0), o),
                         doctest::Contains("column 'homopause_density': no value given"),
                         InputError);
    CaseTable shape = thermosphere_table();
    set_column(shape, "bates_shape", {missing, missing, 1.0 / 40e3});
    CHECK_THROWS_WITH_AS(build_config(case_from_table(shape, 1), o),
                         doctest::Contains("column 'bates_shape': no value given"), InputError);
    CaseTable flag = thermosphere_table();
    set_column(flag, "diffusion_limited", {0.5, 1.0, 0.0});
    CHECK_THROWS_WITH_AS(case_from_table(flag, 0),
                         doctest::Contains("column 'diffusion_limited': must be 0 or 1, got 0.5"),
                         InputError);
    CaseTable source = thermosphere_table();
    source.text.push_back({"diffusion_source", {"chapman_enskog", "", "guess"}});
    CHECK(case_from_table(source, 0).diffusion == DiffusionMethod::chapman_enskog);
    CHECK(case_from_table(source, 1).diffusion == DiffusionMethod::measured_first);
    CHECK_THROWS_WITH_AS(case_from_table(source, 2),
                         doctest::Contains("column 'diffusion_source' must be 'measured' or "
                                           "'chapman_enskog', got 'guess'"),
                         InputError);
    // Thermosphere columns on a prescribed row.
    CaseTable prescribed = earthlike(1);
    set_column(prescribed, "diffusion_limited", {1.0});
    CHECK_THROWS_WITH_AS(build_config(case_from_table(prescribed, 0), o),
                         doctest::Contains("column 'diffusion_limited': is for a thermosphere"),
                         InputError);
    CaseTable neither = earthlike(1);
    neither.columns.erase(std::find_if(neither.columns.begin(), neither.columns.end(),
                                       [](const auto& c) { return c.first == "exobase_density"; }));
    CHECK_THROWS_WITH_AS(build_config(case_from_table(neither, 0), o),
                         doctest::Contains("column 'exobase_density': no value given (or describe "
                                           "a thermosphere"),
                         InputError);
}

TEST_CASE("batch: bulk gas at or below the hydrodynamic threshold without a heating efficiency is "
          "flagged") {
    // lambda = G M m / (k T r) of pure H at 1.5 Earth radii of an Earth mass, the temperature
    // worked by hand for lambda = 1.5: below the hydrodynamic threshold 2.1 (Volkov et al. 2011).
    CaseTable t;
    t.names = {"hot hydrogen", "hot hydrogen, energy limited", "cool"};
    const double M = constants::M_earth, R = constants::R_earth;
    const double r = R + 0.5 * R, m = species("H").mass;
    const double T_hot = constants::G * M * m / (constants::k_B * r) / 1.5; // lambda = 1.5
    set_column(t, "planet_mass", {M, M, M});
    set_column(t, "planet_radius", {R, R, R});
    set_column(t, "exobase_altitude", {0.5 * R, 0.5 * R, 0.5 * R});
    bulk_exobase(t);
    set_column(t, "exobase_density", {1e12, 1e12, 1e12});
    set_column(t, "exobase_temperature", {T_hot, T_hot, 800.0});
    set_column(t, "heating_efficiency", {missing, 0.15, missing});
    set_column(t, "semi_major_axis", {constants::au, constants::au, constants::au});
    set_column(t, "star_mass", {constants::M_sun, constants::M_sun, constants::M_sun});
    set_column(t, "star_luminosity", {constants::L_sun, constants::L_sun, constants::L_sun});
    set_column(t, "inventory", {1e40, 1e40, 1e40});
    set_column(t, "x_H", {1.0, 1.0, 1.0});
    const std::vector<BatchChunk> chunks = run(t, options(1));
    const BatchChunk& c = chunks[0];
    for (std::size_t k = 0; k < 3; ++k)
        REQUIRE(c.error[k].empty());
    CHECK(c.bulk_jeans_start[0] == doctest::Approx(1.5).epsilon(1e-12));
    CHECK(c.hydrodynamic_unmodelled == std::vector<std::int64_t>{1, 0, 0});
}

TEST_CASE("batch: a Saltelli design stores each run's drawn inputs next to its outputs") {
    CaseTable t = earthlike(5);
    // Row 2 holds the planet mass fixed (no width): its A_B^(mass) runs equal A's and are not run.
    for (auto& [name, values] : t.columns)
        if (name == "planet_mass_sigma")
            values[2] = missing;
    CHECK(table_inputs(t) == std::vector<std::string>{"planet_mass", "exobase_temperature"});
    BatchOptions o = options(2, 6, 2);
    o.design = SampleDesign::Saltelli;
    CHECK(sample_runs(o, 2) == 24);
    const auto chunks = run(t, o);
    const SaltelliDesign d{6, 2};
    std::size_t temperature_slot = 0;
    while (case_parameters()[temperature_slot].name != "exobase_temperature")
        ++temperature_slot;
    for (const BatchChunk& c : chunks) {
        REQUIRE(c.samples == 24);
        REQUIRE(c.inputs == 2);
        for (std::size_t j = 0; j < c.count; ++j) {
            const std::size_t row = c.first + j;
            CAPTURE(row);
            const CaseSpec spec = case_from_table(t, row);
            CHECK(c.input_uncertain[j * 2 + 0] == (row == 2 ? 0 : 1));
            CHECK(c.input_uncertain[j * 2 + 1] == 1);
            for (std::size_t run = 0; run < d.runs(); ++run) {
                CAPTURE(run);
                const double* x = &c.sample_input[(j * 24 + run) * 2];
                // A's row r is the Monte Carlo draw 2r, B's row r the draw 2r + 1.
                const CaseSpec a = sample_case(spec, o.seed, 2 * d.row(run));
                const CaseSpec b = sample_case(spec, o.seed, 2 * d.row(run) + 1);
                CHECK(x[0] == (d.from_b(run, 0) ? b : a).value("planet_mass"));
                CHECK(x[1] == (d.from_b(run, 1) ? b : a).value("exobase_temperature"));
                const double he = c.sample_retained[(j * 24 + run) * 3 + 1];
                const bool skipped = row == 2 && d.block(run) == 2;
                CHECK(std::isnan(he) == skipped);
                CHECK(c.sample_failed[j * 24 + run] == 0);
                if (skipped)
                    continue;
                // The stored outputs are those of a single run with the stored inputs.
                CaseSpec drawn = spec;
                drawn.values[0] = x[0];
                drawn.values[temperature_slot] = x[1];
                if (run % 7 == 0) {
                    EvolutionConfig cfg = build_config(drawn, o);
                    cfg.t_eval = {cfg.t_start, cfg.t_end};
                    const EvolutionResult r = evolve(cfg);
                    CHECK(he ==
                          r.inventory[(r.time_count() - 1) * 3 + 1] / cfg.initial_inventory[1]);
                }
            }
        }
    }
    // The same on one thread and in one chunk.
    BatchOptions o1 = options(1, 6, 100);
    o1.design = SampleDesign::Saltelli;
    const auto single = run(t, o1);
    for (auto field :
         {&BatchChunk::sample_input, &BatchChunk::sample_retained, &BatchChunk::final_retained})
        CHECK(same(concat(chunks, field), concat(single, field)));
    // Monte Carlo runs store their inputs too: draw j is sample_case(spec, seed, j).
    const auto mc = run(t, options(1, 3, 100));
    REQUIRE(mc[0].inputs == 2);
    const CaseSpec spec4 = case_from_table(t, 4);
    CHECK(mc[0].sample_input[(4 * 3 + 1) * 2 + 1] ==
          sample_case(spec4, 20261202, 1).value("exobase_temperature"));
    // Refused: no uncertain input, no base rows.
    CaseTable fixed = earthlike(2);
    fixed.columns.erase(
        std::remove_if(fixed.columns.begin(), fixed.columns.end(),
                       [](const auto& c) { return c.first.find("sigma") != std::string::npos; }),
        fixed.columns.end());
    BatchHooks hooks;
    CHECK_THROWS_WITH_AS(run_batch(fixed, 0, 2, o, hooks),
                         "design: a Saltelli design needs uncertain inputs, and the case table has "
                         "no '_sigma', '_lnsigma' or '_sigma_upper' column",
                         InputError);
    o.samples = 0;
    CHECK_THROWS_WITH_AS(check_table(t, o),
                         "samples: a Saltelli design needs base rows (> 0), got 0", InputError);
}

namespace {

// Invented hot sub-Neptunes of hydrogen and helium around a K star (prescribed exobase at
// 8000 K: the bulk gas is hydrodynamic, lambda_H ~ 1.7), each row with one of the loss options:
// 0 given losses (constant for H, XUV power law for He), 1 energy-limited with the XUV
// absorption radius at a given temperature and the recombination limit with its defaults,
// 2 the absorption radius at the exobase temperature along a chord with the bulk gas's mean
// mass, and the recombination limit with its own constants.
const double loss_mass = 5 * constants::M_earth, loss_radius = 2.5 * constants::R_earth;
const double loss_reference_flux = 0.25; // [W m^-2]

CaseTable loss_table() {
    CaseTable t;
    t.names = {"given losses", "absorption, recombination", "chord, recombination constants"};
    auto all = [](double v) { return std::vector<double>{v, v, v}; };
    set_column(t, "planet_mass", all(loss_mass));
    set_column(t, "planet_radius", all(loss_radius));
    set_column(t, "exobase_altitude", all(0.1 * loss_radius));
    bulk_exobase(t);
    set_column(t, "exobase_density", all(1e13));
    set_column(t, "exobase_temperature", {1500.0, 8000.0, 8000.0});
    set_column(t, "semi_major_axis", all(0.3 * constants::au));
    set_column(t, "star_mass", all(0.8 * constants::M_sun));
    set_column(t, "star_luminosity", all(0.4 * constants::L_sun));
    set_column(t, "inventory", all(3e50));
    set_column(t, "x_H", all(0.9));
    set_column(t, "x_He", all(0.1));
    set_column(t, "given_loss_H", {1e33, missing, missing});
    set_column(t, "given_loss_He", {2e32, missing, missing});
    set_column(t, "given_loss_exponent_He", {1.2, missing, missing});
    set_column(t, "given_loss_reference_flux", {loss_reference_flux, missing, missing});
    set_column(t, "heating_efficiency", {missing, 0.15, 0.2});
    set_column(t, "xuv_absorption_cross_section", {missing, 2e-22, 6e-22});
    set_column(t, "xuv_absorption_base_density", {missing, 1e17, 1e19});
    set_column(t, "xuv_absorption_temperature", {missing, 1000.0, missing});
    set_column(t, "xuv_absorption_molecular_mass", {missing, 2.3 * constants::amu, missing});
    set_column(t, "xuv_absorption_chord", {missing, 0.0, 1.0});
    set_column(t, "recombination_limit", {0.0, 1.0, 1.0});
    set_column(t, "recombination_temperature", {missing, missing, 8000.0});
    set_column(t, "recombination_coefficient", {missing, missing, 3e-19});
    set_column(t, "recombination_photon_energy", {missing, missing, 15 * electron_volt});
    return t;
}

// The model of row `row` of loss_table(), built by hand as evolve() builds it from its options.
EvolutionConfig loss_config(std::size_t row, const BatchOptions& o) {
    const Star star(0.8 * constants::M_sun, 0.4 * constants::L_sun, XuvHistory{});
    EvolutionConfig c{Planet(loss_mass, loss_radius, 0.3 * constants::au, star)};
    c.species = {species("H"), species("He")};
    c.initial_inventory = {3e50 * 0.9, 3e50 * 0.1};
    c.exobase = std::make_shared<PrescribedExobase>(
        1.1 * loss_radius, std::vector<std::string>{"H", "He"},
        std::vector<double>{0.9 * 1e13, 0.1 * 1e13}, DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(row == 0 ? 1500.0 : 8000.0);
    if (row == 0) {
        c.given_losses = {GivenLoss(1e33),
                          GivenLoss::xuv_power_law(2e32, loss_reference_flux, 1.2)};
    } else {
        HydrodynamicOptions h;
        h.efficiency = row == 1 ? 0.15 : 0.2;
        h.roche_lobe = true;
        XuvAbsorption a;
        if (row == 1) {
            a.cross_section = 2e-22;
            a.base_density = 1e17;
            a.temperature = 1000.0;
            a.mean_molecular_mass = 2.3 * constants::amu;
        } else {
            a.cross_section = 6e-22;
            a.base_density = 1e19;
            a.mean_molecular_mass = 0.9 * species("H").mass + 0.1 * species("He").mass;
            a.chord = true;
        }
        h.absorption = a;
        RecombinationLimit r;
        if (row == 2) {
            r.temperature = 8000.0;
            r.recombination_coefficient = 3e-19;
            r.photon_energy = 15 * electron_volt;
        }
        h.recombination = r;
        c.hydrodynamic = h;
    }
    c.t_start = o.t_start;
    c.t_end = o.t_end;
    c.t_eval = o.times;
    c.rtol = o.rtol;
    c.record_config = false;
    return c;
}

} // namespace

TEST_CASE("loss rows: given losses, absorption radius and recombination limit as evolve() has "
          "them") {
    const CaseTable t = loss_table();
    const BatchOptions o = options(2);
    const std::vector<BatchChunk> chunks = run(t, o);
    REQUIRE(chunks.size() == 1);
    const BatchChunk& out = chunks[0];
    for (std::size_t row = 0; row < 3; ++row) {
        CAPTURE(row);
        INFO(out.error[row]);
        REQUIRE(out.error[row].empty());
        const EvolutionConfig hand = loss_config(row, o);
        // The whole model (planet, species, exobase, temperature, given losses, energy-limited
        // options with their absorption and recombination settings, span, tolerances).
        CHECK(build_config(case_from_table(t, row), o).to_json() == hand.to_json());
        const EvolutionResult r = evolve(hand);
        REQUIRE(r.time_count() == 4);
        for (std::size_t j = 0; j < 4; ++j)
            for (std::size_t i = 0; i < 2; ++i)
                CHECK(out.retained[(row * 4 + j) * 2 + i] ==
                      r.inventory[j * 2 + i] / hand.initial_inventory[i]);
        for (std::size_t i = 0; i < 2; ++i) {
            CHECK(out.escape_rate_start[row * 2 + i] == r.escape_rate[i]);
            CHECK(out.given_loss_start[row * 2 + i] == r.given_loss_rate[i]);
        }
    }
    // The given losses are those asked for: constant, and L_ref (F/F_ref)^p at the start.
    const EvolutionConfig given = loss_config(0, o);
    const double flux = given.planet.xuv_flux(o.t_start);
    CHECK(out.given_loss_start[0] == 1e33);
    CHECK(out.given_loss_start[1] ==
          doctest::Approx(2e32 * std::pow(flux / loss_reference_flux, 1.2)).epsilon(1e-13));
    CHECK(out.given_loss_start[2 * 2] == 0.0); // rows without given losses report none
    // They take a visible share of the loss: without them more H is left.
    EvolutionConfig thermal = given;
    thermal.given_losses.clear();
    const EvolutionResult plain = evolve(thermal);
    CHECK(out.final_retained[0] < 0.99 * plain.inventory[3 * 2] / plain.inventory[0]);
    // The options act: at the start the H rate of row 1 is not the plain energy-limited one
    // (XUV absorbed at the planet radius, no cap), which the same row without them gives.
    EvolutionConfig bare = loss_config(1, o);
    bare.hydrodynamic->absorption.reset();
    bare.hydrodynamic->recombination.reset();
    bare.t_eval = {o.t_start};
    const EvolutionResult energy_limited = evolve(bare);
    CHECK(std::abs(out.escape_rate_start[2] / energy_limited.escape_rate[0] - 1.0) > 0.05);
}

TEST_CASE("loss rows: given-loss and energy-limited columns take uncertainties") {
    CaseTable t = loss_table();
    set_column(t, "given_loss_H_lnsigma", {0.3, missing, missing});
    set_column(t, "given_loss_exponent_He_sigma", {0.1, missing, missing});
    set_column(t, "xuv_absorption_cross_section_lnsigma", {missing, 0.2, missing});
    const CaseSpec s = case_from_table(t, 0), e = case_from_table(t, 1);
    REQUIRE(s.uncertainties.size() == 2);
    REQUIRE(e.uncertainties.size() == 1);
    const CaseSpec drawn = sample_case(s, 5, 0);
    CHECK(drawn.value("given_loss_H") != 1e33);
    CHECK(drawn.value("given_loss_H") > 0.0);
    CHECK(drawn.value("given_loss_exponent_He") != 1.2);
    CHECK(drawn.value("given_loss_He") == 2e32);
    CHECK(sample_case(e, 5, 0).value("xuv_absorption_cross_section") != 2e-22);
    CHECK(s.named_values().at("given_loss_exponent_He") == 1.2);
    CaseTable flag = loss_table();
    set_column(flag, "recombination_limit_sigma", {0.1, 0.1, 0.1});
    CHECK_THROWS_WITH_AS(check_table_columns(flag),
                         doctest::Contains("'recombination_limit' cannot be given an uncertainty"),
                         InputError);
}

TEST_CASE("loss rows: bad values are refused naming the row, the column and the value") {
    const BatchOptions o = options(1);
    struct Bad {
        const char* column;
        std::vector<double> values;
        const char* message;
    };
    const std::vector<Bad> bad{
        {"given_loss_H",
         {-1.0, missing, missing},
         "column 'given_loss_H': must be >= 0, got -1 s-1"},
        {"xuv_absorption_cross_section",
         {missing, 0.0, 6e-22},
         "column 'xuv_absorption_cross_section': must be > 0, got 0 m2"},
        {"xuv_absorption_cross_section",
         {1e-22, 2e-22, 6e-22},
         "column 'xuv_absorption_cross_section': got 1e-22 m2, but it is for energy-limited "
         "escape ('heating_efficiency')"},
        {"xuv_absorption_base_density",
         {missing, -1.0, 1e19},
         "column 'xuv_absorption_base_density': must be > 0, got -1 m-3"},
        {"xuv_absorption_temperature",
         {missing, 0.0, missing},
         "column 'xuv_absorption_temperature': must be > 0, got 0 K"},
        {"xuv_absorption_chord",
         {missing, 0.5, 1.0},
         "column 'xuv_absorption_chord': must be 0 or 1, got 0.5"},
        {"recombination_limit",
         {1.0, 1.0, 1.0},
         "column 'recombination_limit': got 1, but it caps energy-limited escape"},
        {"recombination_limit",
         {0.0, 2.0, 1.0},
         "column 'recombination_limit': must be 0 or 1, got 2"},
        {"recombination_coefficient",
         {missing, -1.0, 3e-19},
         "column 'recombination_coefficient': must be > 0, got -1 m3 s-1"},
        {"recombination_photon_energy",
         {missing, std::numeric_limits<double>::infinity(), 15 * electron_volt},
         "column 'recombination_photon_energy': must be > 0, got inf J"},
        {"given_loss_reference_flux",
         {0.0, missing, missing},
         "column 'given_loss_reference_flux': must be > 0, got 0 W m-2"},
    };
    for (const Bad& b : bad) {
        CAPTURE(b.column);
        CaseTable t = loss_table();
        t.row_labels = {"line 4", "line 5", "line 6"};
        set_column(t, b.column, b.values);
        const auto errors = check_table(t, o);
        std::size_t refused = 0;
        for (std::size_t row = 0; row < 3; ++row)
            if (!errors[row].empty()) {
                INFO(errors[row]);
                CHECK(errors[row].find(t.row_label(row) + " (case '" + t.names[row] + "'), " +
                                       b.message) == 0);
                ++refused;
            }
        CHECK(refused == 1);
        // Before any run.
        int chunks = 0;
        BatchHooks hooks;
        hooks.on_chunk = [&](const BatchChunk&) { ++chunks; };
        CHECK_THROWS_WITH_AS(run_batch(t, 0, 3, o, hooks), doctest::Contains(b.message),
                             InputError);
        CHECK(chunks == 0);
    }
    // Combinations: a power law without its reference flux or without a star, a reference flux
    // without a power law, sub-options without the option that uses them.
    auto error_of = [&](CaseTable t, std::size_t row) { return check_table(t, o)[row]; };
    CaseTable no_flux = loss_table();
    set_column(no_flux, "given_loss_reference_flux", {missing, missing, missing});
    CHECK(error_of(no_flux, 0) ==
          "row 1 (case 'given losses'), column 'given_loss_reference_flux': "
          "no value given (the XUV power law of 'given_loss_exponent_He' "
          "needs it)");
    CaseTable no_star = loss_table();
    set_column(no_star, "semi_major_axis", {missing, 0.3 * constants::au, 0.3 * constants::au});
    CHECK(error_of(no_star, 0)
              .find("column 'given_loss_exponent_He': got 1.2, but the XUV power "
                    "law needs the planet's star") != std::string::npos);
    CaseTable flux_only = loss_table();
    set_column(flux_only, "given_loss_exponent_He", {missing, missing, missing});
    CHECK(error_of(flux_only, 0)
              .find("column 'given_loss_reference_flux': got 0.25 W m-2, but it "
                    "is for the XUV power law of a given loss") != std::string::npos);
    CaseTable no_rate = loss_table();
    set_column(no_rate, "given_loss_He", {missing, missing, missing});
    CHECK(error_of(no_rate, 0)
              .find("column 'given_loss_exponent_He': got 1.2, but the XUV power "
                    "law needs its rate at the reference flux, 'given_loss_He' "
                    "[s-1]") != std::string::npos);
    CaseTable no_density = loss_table();
    set_column(no_density, "xuv_absorption_base_density", {missing, missing, 1e19});
    CHECK(error_of(no_density, 1)
              .find("column 'xuv_absorption_base_density': no value given (the "
                    "XUV absorption radius of "
                    "'xuv_absorption_cross_section' needs it)") != std::string::npos);
    CaseTable chord_alone = loss_table();
    set_column(chord_alone, "xuv_absorption_cross_section", {missing, 2e-22, missing});
    CHECK(error_of(chord_alone, 2)
              .find("column 'xuv_absorption_base_density': got 1e+19 m-3, but "
                    "it is for the XUV absorption radius") != std::string::npos);
    CaseTable constants_alone = loss_table();
    set_column(constants_alone, "recombination_limit", {0.0, 1.0, 0.0});
    CHECK(error_of(constants_alone, 2)
              .find("column 'recombination_temperature': got 8000 K, but it is for the "
                    "recombination limit ('recombination_limit' 1)") != std::string::npos);
    // Per-species columns name a known species of the table.
    CaseTable unknown = loss_table();
    set_column(unknown, "given_loss_N3", {1.0, 1.0, 1.0});
    CHECK_THROWS_WITH_AS(check_table_columns(unknown), doctest::Contains("'given_loss_N3'"),
                         InputError);
    CaseTable absent = loss_table();
    set_column(absent, "given_loss_O", {1.0, 1.0, 1.0});
    CHECK_THROWS_WITH_AS(check_table_columns(absent),
                         doctest::Contains("column 'given_loss_O' needs the column 'x_O'"),
                         InputError);
}

TEST_CASE("case parameters: every one in exactly one group, per-species names by longest prefix") {
    const auto& params = case_parameters();
    const auto& groups = case_parameter_groups();
    REQUIRE_FALSE(groups.empty());
    CHECK(groups.front().first == params.front().name);
    std::size_t last = 0;
    for (std::size_t g = 0; g < groups.size(); ++g) {
        const auto at = std::find_if(params.begin(), params.end(), [&](const CaseParameter& p) {
            return p.name == groups[g].first;
        });
        REQUIRE(at != params.end());
        const auto index = static_cast<std::size_t>(at - params.begin());
        CHECK((g == 0 || index > last));
        last = index;
    }
    for (const CaseParameter& p : species_parameters()) {
        std::size_t listed = 0;
        for (const CaseParameterGroup& g : groups)
            listed +=
                static_cast<std::size_t>(std::count(g.species.begin(), g.species.end(), p.name));
        CHECK(listed == 1);
    }
    std::string sp;
    CHECK(find_species_parameter("given_loss_exponent_He", &sp) == 3);
    CHECK(sp == "He");
    CHECK(find_species_parameter("given_loss_He", &sp) == 2);
    CHECK(sp == "He");
    CHECK(find_species_parameter("x_CO2", &sp) == 0);
    CHECK(find_species_parameter("planet_mass") == species_parameters().size());
    // A name of case_parameters() is found there first.
    REQUIRE(find_case_parameter("given_loss_reference_flux") != nullptr);
    CHECK(find_case_parameter("given_loss_reference_flux")->unit == "W m-2");
    CHECK(find_case_parameter("given_loss_exponent_H")->unit == "1");
}

TEST_CASE("split-normal columns: drawn around the mode, one input, bad widths refused") {
    CaseTable t = earthlike(3);
    const double m = constants::M_earth;
    set_column(t, "planet_mass_sigma_upper", {0.3 * m, 0.0, missing});
    set_column(t, "planet_mass_sigma_lower", {0.1 * m, 0.0, missing});
    // A table cannot give both a normal and a split normal for one quantity.
    CHECK_THROWS_WITH_AS(check_table_columns(t),
                         doctest::Contains("'planet_mass_sigma' both give the uncertainty"),
                         InputError);
    t.columns.erase(std::find_if(t.columns.begin(), t.columns.end(),
                                 [](const auto& c) { return c.first == "planet_mass_sigma"; }));
    check_table_columns(t);
    const std::vector<std::string> inputs = table_inputs(t);
    CHECK(std::count(inputs.begin(), inputs.end(), "planet_mass") == 1);
    const CaseSpec spec = case_from_table(t, 0);
    REQUIRE(spec.uncertainties.size() == 2);
    const Uncertainty& u = spec.uncertainties[1];
    CHECK(u.distribution == Distribution::SplitNormal);
    CHECK(u.width == 0.3 * m);
    CHECK(u.width_lower == 0.1 * m);
    // Mean of the draws against the split normal's closed form mode + sqrt(2/pi) (hi - lo)
    // (Wallis 2014, Stat. Sci. 29:106; re-derived in test_random.cpp); no truncation
    // here: the lower tail stays far above zero.
    const double m0 = spec.value("planet_mass");
    const int n = 40000;
    double sum = 0.0;
    for (int j = 0; j < n; ++j)
        sum += sample_case(spec, 3, static_cast<std::uint64_t>(j)).value("planet_mass");
    const double hi = 0.3 * m, lo = 0.1 * m;
    const double sd = std::sqrt((1 - 2 / constants::pi) * (hi - lo) * (hi - lo) + hi * lo);
    CHECK(std::abs(sum / n - (m0 + std::sqrt(2 / constants::pi) * (hi - lo))) <
          5 * sd / std::sqrt(n));
    // Zero widths hold the value (an uncertainty of width 0); an empty pair draws nothing.
    CHECK(sample_case(case_from_table(t, 1), 3, 5).value("planet_mass") ==
          case_from_table(t, 1).value("planet_mass"));
    CHECK(case_from_table(t, 2).uncertainties.size() == 1);
    // One width without the other, a negative width, one column of the pair alone.
    CaseTable half = t;
    set_column(half, "planet_mass_sigma_lower", {missing, 0.0, missing});
    CHECK_THROWS_WITH_AS(case_from_table(half, 0),
                         doctest::Contains("column 'planet_mass_sigma_lower': a split normal "
                                           "needs both widths"),
                         InputError);
    CaseTable negative = t;
    set_column(negative, "planet_mass_sigma_lower", {-0.1 * m, 0.0, missing});
    CHECK_THROWS_WITH_AS(case_from_table(negative, 0),
                         doctest::Contains("row 1 (case 'case 0'), column "
                                           "'planet_mass_sigma_lower': an uncertainty must be "
                                           "finite and >= 0"),
                         InputError);
    CaseTable alone = t;
    alone.columns.erase(std::find_if(alone.columns.begin(), alone.columns.end(), [](const auto& c) {
        return c.first == "planet_mass_sigma_lower";
    }));
    CHECK_THROWS_WITH_AS(check_table_columns(alone),
                         doctest::Contains("needs the column 'planet_mass_sigma_lower'"),
                         InputError);
    // Per-species quantities take the pair too, and the x_ column stays a species.
    CaseTable per_species = t;
    set_column(per_species, "x_He_sigma_upper", {0.02, 0.02, 0.02});
    set_column(per_species, "x_He_sigma_lower", {0.01, 0.01, 0.01});
    check_table_columns(per_species);
    CHECK(table_species(per_species) == std::vector<std::string>{"N2", "He", "H"});
}
