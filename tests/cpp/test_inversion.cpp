#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <memory>
#include <string>
#include <vector>

#include "exosieve/case_sampling.hpp"
#include "exosieve/case_table.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/evolution.hpp"
#include "exosieve/inversion.hpp"

using namespace exosieve;
using constants::Gyr;
using constants::Myr;

namespace {

// An invented planet (0.8 Earth masses, 0.9 Earth radii) with a prescribed exobase 400 km up at
// a constant 900 K, H and D, densities following each inventory (DensityScaling::Inventory),
// and D/H at the start R0 in the reservoir and at the exobase alike.
const double planet_mass = 0.8 * constants::M_earth;
const double planet_radius = 0.9 * constants::R_earth;
const double r_exo = planet_radius + 400e3;
const double T_exo = 900.0;
const double n_H = 1e11;
const double R0 = 1.5e-4;
const double span = 4.0 * Gyr;

// Jeans escape rate 4 pi r^2 n v0 / (2 sqrt(pi)) (1 + lambda) e^-lambda [s^-1] (Jeans 1925;
// Chamberlain 1963), written out here apart from the library's kernel.
double jeans_rate(double n, double T, double m, double M, double r) {
    const double v0 = std::sqrt(2.0 * constants::k_B * T / m);
    const double lambda = constants::G * M * m / (constants::k_B * T * r);
    return 4.0 * constants::pi * r * r * n * v0 / (2.0 * std::sqrt(constants::pi)) *
           (1.0 + lambda) * std::exp(-lambda);
}

// Escape rates at the start A_i [s^-1]: fixed by the exobase, whatever the inventory.
const double A_H = jeans_rate(n_H, T_exo, species("H").mass, planet_mass, r_exo);
const double A_D = jeans_rate(R0 * n_H, T_exo, species("D").mass, planet_mass, r_exo);
// Rate constants k_i = A_i / N_i(t_start), so N_i = N_i0 exp(-k_i t): Rayleigh distillation
// with the constant fractionation factor alpha = k_D / k_H = (A_D / D0) / (A_H / H0)
// = A_D / (A_H R0) (the flux ratio over the reservoir ratio), R/R0 = (N_H/N_H0)^(alpha - 1).
const double alpha = A_D / (A_H * R0);

// The exact inverse: R/R0 = E at t needs N_H/N_H0 = f = E^(1/(alpha - 1)), and
// f = exp(-A_H t / H0), so H0 = A_H t (1 - alpha) / ln E and S = H0 + D0 = H0 (1 + R0).
double exact_total(double enrichment, double t = span) {
    return A_H * t * (1.0 - alpha) / std::log(enrichment) * (1.0 + R0);
}

// The forward closed form: D/H at t for a total initial inventory S of H and D.
double exact_ratio(double S, double t = span) {
    const double H0 = S / (1.0 + R0);
    return R0 * std::exp(A_H * (1.0 - alpha) * t / H0);
}

EvolutionConfig model(double total, double rtol = 1e-10) {
    EvolutionConfig c(Planet(planet_mass, planet_radius));
    c.species = {species("H"), species("D")};
    const double H0 = total / (1.0 + R0);
    c.initial_inventory = {H0, R0 * H0};
    c.exobase = std::make_shared<PrescribedExobase>(r_exo, std::vector<std::string>{"H", "D"},
                                                    std::vector<double>{n_H, R0 * n_H},
                                                    DensityScaling::Inventory);
    c.temperature = ExobaseTemperature::constant(T_exo);
    c.t_start = 0.0;
    c.t_end = span;
    c.rtol = rtol;
    return c;
}

MeasuredRatio measured(double value, double width = 0.0) {
    MeasuredRatio m;
    m.numerator = "D";
    m.denominator = "H";
    m.value = value;
    m.width = width;
    return m;
}

} // namespace

TEST_CASE("inversion: Rayleigh distillation with a constant fractionation factor, exact inverse") {
    // Worked analytic solution (above): alpha < 1, D is kept better than H.
    REQUIRE(alpha > 0.0);
    REQUIRE(alpha < 0.1);
    for (double enrichment : {1.05, 3.0, 40.0}) {
        CAPTURE(enrichment);
        const double exact = exact_total(enrichment);
        for (double start : {1e-3, 1.0, 1e4}) { // nominal inventory far below, at, far above
            CAPTURE(start);
            const InversionResult r =
                invert_ratio(model(start * exact), measured(enrichment * R0), {});
            REQUIRE(r.status == InversionStatus::Solved);
            CHECK(r.message.empty());
            CHECK(r.scaled_initial == doctest::Approx(exact).epsilon(1e-6));
            CHECK(r.bracket_low <= r.bracket_high);
            CHECK(r.bracket_high / r.bracket_low - 1.0 < 2e-9);
            CHECK(r.ratio == doctest::Approx(enrichment * R0).epsilon(1e-7));
            CHECK(r.initial_ratio == doctest::Approx(R0).epsilon(1e-14));
            // The proportions are held: D0 / H0 = R0.
            CHECK(r.initial_inventory[1] / r.initial_inventory[0] ==
                  doctest::Approx(R0).epsilon(1e-14));
            // The Rayleigh law itself at the solution: R/R0 = (N_H/N_H0)^(alpha - 1).
            const double f = r.final_inventory[0] / r.initial_inventory[0];
            CHECK(std::pow(f, alpha - 1.0) == doctest::Approx(enrichment).epsilon(1e-7));
            // Lost: H0 (1 - e^(-k_H t)) + D0 (1 - e^(-k_D t)).
            const double H0 = exact / (1.0 + R0), D0 = R0 * H0;
            const double lost =
                H0 * -std::expm1(-A_H / H0 * span) + D0 * -std::expm1(-A_D / D0 * span);
            CHECK(r.scaled_lost == doctest::Approx(lost).epsilon(1e-6));
            CHECK(r.runs < 60);
            CHECK_FALSE(r.depleted);
        }
    }
}

TEST_CASE("inversion: the measured value as an enrichment R(t_end)/R(t_start)") {
    MeasuredRatio m = measured(3.0);
    m.relative = true;
    const InversionResult r = invert_ratio(model(1e40), m, {});
    REQUIRE(r.status == InversionStatus::Solved);
    CHECK(r.target == doctest::Approx(3.0 * R0).epsilon(1e-14));
    CHECK(r.scaled_initial == doctest::Approx(exact_total(3.0)).epsilon(1e-6));
}

TEST_CASE("inversion: no solution is reported with the bracket and the ratio at its ends") {
    const double S3 = exact_total(3.0);
    SUBCASE("a ratio below the start: D/H only rises under this loss") {
        const InversionResult r = invert_ratio(model(S3), measured(0.5 * R0), {});
        CHECK(r.status == InversionStatus::NoSolution);
        // The whole searchable range [S/1e10, S 1e10] was searched.
        CHECK(r.bracket_low == doctest::Approx(S3 / 1e10).epsilon(1e-12));
        CHECK(r.bracket_high == doctest::Approx(S3 * 1e10).epsilon(1e-12));
        CHECK(r.ratio_high == doctest::Approx(exact_ratio(r.bracket_high)).epsilon(1e-9));
        CHECK(r.ratio_low > 0.5 * R0); // e^(1e10 ln 3) R0: beyond the double range
        CHECK(std::isnan(r.scaled_initial));
        CHECK(std::isnan(r.ratio));
        CHECK(r.message.find("no solution") != std::string::npos);
        CHECK(r.message.find("above it") != std::string::npos);
    }
    SUBCASE("an enrichment out of reach above a given lower bound of the inventory") {
        InversionOptions o;
        o.inventory_min = 0.5 * S3; // at most 3^2 = 9-fold in this range
        o.inventory_max = 1e3 * S3;
        const InversionResult r = invert_ratio(model(S3), measured(27.0 * R0), o);
        CHECK(r.status == InversionStatus::NoSolution);
        CHECK(r.bracket_low == doctest::Approx(0.5 * S3).epsilon(1e-12));
        CHECK(r.bracket_high == doctest::Approx(1e3 * S3).epsilon(1e-12));
        CHECK(r.ratio_low == doctest::Approx(9.0 * R0).epsilon(1e-7));
        CHECK(r.ratio_high == doctest::Approx(exact_ratio(1e3 * S3)).epsilon(1e-9));
        CHECK(r.message.find("below it") != std::string::npos);
    }
    SUBCASE("a run that fails is a failure with its message, not an exception") {
        EvolutionConfig c = model(S3);
        c.max_steps = 1;
        const InversionResult r = invert_ratio(c, measured(3.0 * R0), {});
        CHECK(r.status == InversionStatus::Failed);
        CHECK(r.message.find("nominal") != std::string::npos);
        CHECK(r.runs == 1);
    }
    SUBCASE("the run budget") {
        InversionOptions o;
        o.max_runs = 3;
        const InversionResult r = invert_ratio(model(1e-9 * S3), measured(3.0 * R0), o);
        CHECK(r.status == InversionStatus::Failed);
        CHECK(r.runs == 3);
        CHECK(r.message.find("max_runs") != std::string::npos);
    }
}

TEST_CASE("inversion: bad input is refused before any run") {
    const EvolutionConfig c = model(1e40);
    auto refused = [&](const MeasuredRatio& m, const InversionOptions& o, const char* text) {
        CAPTURE(text);
        try {
            invert_ratio(c, m, o);
            FAIL("not refused");
        } catch (const InputError& e) {
            CHECK(std::string(e.what()).find(text) != std::string::npos);
        }
    };
    InversionOptions o;
    refused(measured(-1.0), o, "measured ratio");
    refused(measured(std::numeric_limits<double>::quiet_NaN()), o, "measured ratio");
    refused(measured(1e-4, -1.0), o, "width");
    MeasuredRatio m = measured(1e-4);
    m.numerator = "He";
    refused(m, o, "'He' is not a species of the model (H, D)");
    m.numerator = "H";
    refused(m, o, "both 'H'");
    o.scaled = {"H"};
    refused(measured(1e-4), o, "must include");
    o.scaled = {"H", "D", "H"};
    refused(measured(1e-4), o, "given twice");
    o = {};
    o.search_factor = 1.0;
    refused(measured(1e-4), o, "search_factor");
    o = {};
    o.inventory_min = 2e40;
    o.inventory_max = 1e40;
    refused(measured(1e-4), o, "inventory_min");
    o = {};
    o.tolerance = 0.0;
    refused(measured(1e-4), o, "tolerance");
    o = {};
    o.max_runs = 1;
    refused(measured(1e-4), o, "max_runs");
}

TEST_CASE("inversion: Monte Carlo over the measured ratio, each sample the exact inverse") {
    const double S3 = exact_total(3.0);
    InversionSampling sampling;
    sampling.samples = 24;
    sampling.seed = 7;
    sampling.threads = 2;
    const MeasuredRatio m = measured(3.0 * R0, 0.4 * R0);
    const InversionSamples a = invert_samples(model(S3), m, {}, sampling);
    REQUIRE(a.samples == 24);
    CHECK(a.nominal.status == InversionStatus::Solved);
    CHECK(a.nominal.scaled_initial == doctest::Approx(S3).epsilon(1e-6));
    for (std::size_t j = 0; j < a.samples; ++j) {
        CAPTURE(j);
        REQUIRE(a.status[j] == static_cast<std::int64_t>(InversionStatus::Solved));
        CHECK(a.target[j] > 0.0);
        CHECK(a.scaled_initial[j] == doctest::Approx(exact_total(a.target[j] / R0)).epsilon(1e-6));
        CHECK(a.initial_inventory[2 * j] + a.initial_inventory[2 * j + 1] ==
              doctest::Approx(a.scaled_initial[j]).epsilon(1e-14));
        CHECK(a.message[j].empty());
    }
    // The draws spread: not all one value.
    CHECK(a.target[0] != a.target[1]);
    // Thread-count independent and reproducible.
    sampling.threads = 1;
    const InversionSamples b = invert_samples(model(S3), m, {}, sampling);
    CHECK(b.target == a.target);
    CHECK(b.scaled_initial == a.scaled_initial);
    CHECK(b.scaled_lost == a.scaled_lost);
    // Another seed, other draws.
    sampling.seed = 8;
    const InversionSamples c = invert_samples(model(S3), m, {}, sampling);
    CHECK(c.target != a.target);
}

TEST_CASE("inversion: progress by count, and cancelling keeps exactly the first k m") {
    const double S3 = exact_total(3.0);
    InversionSampling sampling;
    sampling.samples = 11;
    sampling.threads = 2;
    const MeasuredRatio m = measured(3.0 * R0, 0.2 * R0);
    std::vector<std::size_t> calls;
    InversionHooks hooks;
    hooks.progress_every = 4;
    hooks.on_progress = [&](std::size_t done, std::size_t total) {
        CHECK(total == 12);
        calls.push_back(done);
        return true;
    };
    const InversionSamples all = invert_samples(model(S3), m, {}, sampling, hooks);
    CHECK(calls == std::vector<std::size_t>{4, 8, 12});
    CHECK_FALSE(all.cancelled);
    calls.clear();
    hooks.on_progress = [&](std::size_t done, std::size_t) {
        calls.push_back(done);
        return calls.size() < 2; // cancel at the second call
    };
    const InversionSamples part = invert_samples(model(S3), m, {}, sampling, hooks);
    CHECK(calls == std::vector<std::size_t>{4, 8});
    CHECK(part.cancelled);
    // The nominal inversion and samples 0..6 are kept, as in the full run; the rest are not.
    CHECK(part.nominal.scaled_initial == all.nominal.scaled_initial);
    for (std::size_t j = 0; j < 11; ++j) {
        CAPTURE(j);
        if (j < 7) {
            CHECK(part.status[j] == static_cast<std::int64_t>(InversionStatus::Solved));
            CHECK(part.scaled_initial[j] == all.scaled_initial[j]);
        } else {
            CHECK(part.status[j] == static_cast<std::int64_t>(InversionStatus::Cancelled));
            CHECK(std::isnan(part.scaled_initial[j]));
        }
    }
}

TEST_CASE("inversion: a case-table row, every stated uncertainty drawn, each sample exact") {
    // The model above as a row: densities n_i = x_i n, inventories shared by x_i, so that
    // D/H = x_D / x_H at the start in the reservoir and at the exobase.
    const double x_D = R0 / (1.0 + R0), x_H = 1.0 / (1.0 + R0);
    const double S3 = exact_total(3.0);
    CaseTable t;
    t.names = {"invented"};
    t.columns = {{"planet_mass", {planet_mass}},
                 {"planet_mass_sigma", {0.03 * planet_mass}},
                 {"planet_radius", {planet_radius}},
                 {"exobase_altitude", {400e3}},
                 {"exobase_density", {n_H / x_H}},
                 {"exobase_temperature", {T_exo}},
                 {"exobase_temperature_sigma", {20.0}},
                 {"inventory", {0.01 * S3}},
                 {"age_start", {0.0}},
                 {"age_end", {span}},
                 {"rtol", {1e-10}},
                 {"x_H", {x_H}},
                 {"x_D", {x_D}}};
    t.text.push_back({"exobase_composition", {"bulk"}});
    BatchOptions batch;
    batch.species = {"H", "D"};
    batch.times = {span};
    const CaseSpec spec = case_from_table(t, 0);
    InversionSampling sampling;
    sampling.samples = 12;
    sampling.seed = 11;
    sampling.threads = 2;
    const InversionSamples s = invert_case(spec, batch, measured(3.0 * R0, 0.3 * R0), {}, sampling);
    REQUIRE(s.nominal.status == InversionStatus::Solved);
    CHECK(s.nominal.scaled_initial == doctest::Approx(S3).epsilon(1e-6));
    for (std::size_t j = 0; j < s.samples; ++j) {
        CAPTURE(j);
        REQUIRE(s.status[j] == static_cast<std::int64_t>(InversionStatus::Solved));
        // The closed form at the sample's own draws of mass and temperature.
        const CaseSpec d = sample_case(spec, sampling.seed, j);
        const double M = d.value("planet_mass"), T = d.value("exobase_temperature");
        CHECK(M != planet_mass);
        CHECK(T != T_exo);
        const double a_H = jeans_rate(n_H, T, species("H").mass, M, r_exo);
        const double a_D = jeans_rate(R0 * n_H, T, species("D").mass, M, r_exo);
        const double al = a_D / (a_H * R0);
        const double exact = a_H * span * (1.0 - al) / std::log(s.target[j] / R0) * (1.0 + R0);
        CHECK(s.scaled_initial[j] == doctest::Approx(exact).epsilon(1e-6));
    }
    // A ratio species the case does not have is refused before any run, naming it.
    CHECK_THROWS_AS(invert_case(
                        spec, batch,
                        [] {
                            MeasuredRatio m = measured(1e-4);
                            m.numerator = "3He";
                            return m;
                        }(),
                        {}, sampling),
                    InputError);
}

TEST_CASE("inversion: fixed densities, the physical root beside the depletion-held branch") {
    // Worked analytic solution: fixed densities give constant rates A_i, N_i = N_i0 - A_i t, so
    // R = (R0 H0 - A_D t) / (H0 - A_H t) and H0 = (R A_H - A_D) t / (R - R0). Below
    // H0 = A_H t / (1 - 1e-3) H is held at its depletion level and R(H0) turns back; a search
    // started there brackets that branch too. The root reported is the physical one.
    for (double enrichment : {1.5, 100.0, 900.0}) {
        CAPTURE(enrichment);
        const double target = enrichment * R0;
        const double H0 = (target * A_H - A_D) * span / (target - R0);
        for (double start : {1e-3, 1e3}) {
            CAPTURE(start);
            EvolutionConfig c = model(start * H0 * (1.0 + R0));
            c.exobase = std::make_shared<PrescribedExobase>(
                r_exo, std::vector<std::string>{"H", "D"}, std::vector<double>{n_H, R0 * n_H},
                DensityScaling::Fixed);
            const InversionResult r = invert_ratio(c, measured(target), {});
            REQUIRE(r.status == InversionStatus::Solved);
            CHECK_FALSE(r.depleted);
            CHECK(r.scaled_initial == doctest::Approx(H0 * (1.0 + R0)).epsilon(1e-6));
        }
    }
}
