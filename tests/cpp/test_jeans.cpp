#include <doctest/doctest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <vector>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/jeans.hpp"
#include "exosieve/maxwell.hpp"

#include "../../cpp/src/flux_block.hpp"

using namespace exosieve;
using constants::amu;
using constants::G;
using constants::k_B;

namespace {
const double M_planet = constants::M_earth;
const double r_exo = constants::R_earth + 500e3;
const double m_H = 1.008 * amu;
} // namespace

TEST_CASE("escape speed of Earth from the IAU nominal GM and radius (common practice: 11.2 km/s)") {
    CHECK(escape_speed(M_planet, constants::R_earth) == doctest::Approx(11186.0).epsilon(1e-3));
}

TEST_CASE("the Jeans parameter is (v_esc / v0)^2") {
    const double T = 1000.0;
    const double lambda = jeans_parameter(T, m_H, M_planet, r_exo);
    const double ratio = escape_speed(M_planet, r_exo) / most_probable_speed(T, m_H);
    CHECK(lambda == doctest::Approx(ratio * ratio).epsilon(1e-13));
    // from memory (textbook value): H at a 1000 K exobase 500 km up on Earth, lambda near 7.
    CHECK(lambda == doctest::Approx(7.0).epsilon(0.1));
}

TEST_CASE("the Jeans parameter through a subnormal k T keeps its digits") {
    // T = 1e-300 K makes k T subnormal while k T r is normal again (found by the property test
    // in tests/python/test_hostile_values.py); lambda must match its logarithm.
    const double T = 1e-300, m = 1.0, M = 1.0, r = 1501199875790166.0;
    const double log_lambda =
        std::log(G) + std::log(M) + std::log(m) - std::log(k_B) - std::log(T) - std::log(r);
    CHECK(std::log(jeans_parameter(T, m, M, r)) == doctest::Approx(log_lambda).epsilon(1e-13));
}

TEST_CASE("flux equals the closed form and the upward Maxwellian flux above v_esc") {
    const double n = 1e11, T = 1000.0;
    const double v0 = most_probable_speed(T, m_H);
    const double lambda = jeans_parameter(T, m_H, M_planet, r_exo);
    const double closed =
        n * v0 / (2 * std::sqrt(constants::pi)) * (1 + lambda) * std::exp(-lambda);
    CHECK(jeans_flux(n, T, m_H, M_planet, r_exo) == doctest::Approx(closed).epsilon(1e-14));
    // Kinetic theory: the upward flux of particles faster than v_esc through a surface is
    // (n / 4) * integral_{v_esc}^inf v f(v) dv. Simpson's rule up to v_esc + 40 v0.
    const double v_esc = escape_speed(M_planet, r_exo);
    const int steps = 20000;
    const double h = 40.0 * v0 / steps;
    double sum = 0.0;
    for (int i = 0; i <= steps; ++i) {
        const double v = v_esc + i * h;
        const double weight = (i == 0 || i == steps) ? 1.0 : (i % 2 ? 4.0 : 2.0);
        sum += weight * v * speed_pdf(v, T, m_H);
    }
    CHECK(jeans_flux(n, T, m_H, M_planet, r_exo) ==
          doctest::Approx(0.25 * n * sum * h / 3.0).epsilon(1e-10));
}

TEST_CASE("energy flux, escape rate, effusion velocity") {
    const double n = 1e11, T = 1000.0;
    const double flux = jeans_flux(n, T, m_H, M_planet, r_exo);
    const double lambda = jeans_parameter(T, m_H, M_planet, r_exo);
    CHECK(jeans_energy_flux(n, T, m_H, M_planet, r_exo) ==
          doctest::Approx(flux * k_B * T * (lambda * lambda + 2 * lambda + 2) / (lambda + 1)));
    // Energy per escaping particle exceeds the escape energy G M m / r = lambda k T.
    CHECK(jeans_energy_flux(n, T, m_H, M_planet, r_exo) / flux > lambda * k_B * T);
    CHECK(jeans_escape_rate(n, T, m_H, M_planet, r_exo) ==
          doctest::Approx(4 * constants::pi * r_exo * r_exo * flux));
    CHECK(jeans_effusion_velocity(T, m_H, M_planet, r_exo) == doctest::Approx(flux / n));
}

TEST_CASE("monotonic: flux rises with temperature and falls with mass") {
    double previous = 0.0;
    for (double T = 200.0; T < 5000.0; T *= 1.1) {
        const double f = jeans_flux(1e12, T, 16 * amu, M_planet, r_exo);
        CHECK(f > previous);
        previous = f;
    }
    CHECK(jeans_flux(1e12, 1000, 2 * amu, M_planet, r_exo) >
          jeans_flux(1e12, 1000, 4 * amu, M_planet, r_exo));
}

TEST_CASE("deep tail: flux underflows to 0, the log form stays finite") {
    const double T = 50.0, m = 131.293 * amu;
    const double lambda = jeans_parameter(T, m, M_planet, constants::R_earth);
    CHECK(lambda > 1e4);
    CHECK(jeans_flux(1e15, T, m, M_planet, constants::R_earth) == 0.0);
    const double log_flux = log_jeans_flux(1e15, T, m, M_planet, constants::R_earth);
    CHECK(std::isfinite(log_flux));
    const double v0 = most_probable_speed(T, m);
    CHECK(log_flux == doctest::Approx(std::log(1e15 * v0 / (2 * std::sqrt(constants::pi))) +
                                      std::log1p(lambda) - lambda));
    // Away from underflow the two forms agree.
    CHECK(std::exp(log_jeans_flux(1e11, 1000, m_H, M_planet, r_exo)) ==
          doctest::Approx(jeans_flux(1e11, 1000, m_H, M_planet, r_exo)).epsilon(1e-12));
    // An absurdly cold gas: lambda overflows to inf, flux is 0 and not NaN.
    CHECK(jeans_flux(1.0, 1e-300, m, M_planet, 1.0) == 0.0);
}

TEST_CASE("tail depletion: constant and tabulated factors") {
    const double n = 1e11, T = 1000.0;
    const double plain = jeans_flux(n, T, m_H, M_planet, r_exo);
    CHECK(jeans_flux(n, T, m_H, M_planet, r_exo, TailDepletion(0.7)) ==
          doctest::Approx(0.7 * plain));
    TailDepletion table({2.0, 10.0}, {0.5, 0.9});
    CHECK(table(0.0) == 0.5);
    CHECK(table(6.0) == doctest::Approx(0.7));
    CHECK(table(20.0) == 0.9);
    const double lambda = jeans_parameter(T, m_H, M_planet, r_exo);
    CHECK(jeans_flux(n, T, m_H, M_planet, r_exo, table) == doctest::Approx(table(lambda) * plain));
    CHECK_THROWS_AS(TailDepletion({2.0, 1.0}, {0.5, 0.9}), InputError);
    CHECK_THROWS_AS(TailDepletion(0.0), InputError);
    // A factor above 1 is an enhancement, refused unless said so.
    CHECK_THROWS_WITH_AS(TailDepletion(1.5), doctest::Contains("got 1.5"), InputError);
    CHECK_THROWS_AS(TailDepletion({2.0, 10.0}, {0.5, 1.2}), InputError);
    CHECK(TailDepletion(1.5, true)(3.0) == 1.5);
    CHECK(TailDepletion({2.0, 10.0}, {1.0, 2.0}, true)(6.0) == doctest::Approx(1.5));
}

TEST_CASE("array kernels: equal to scalar forms, broadcast, threaded for long arrays") {
    const std::size_t count = 300000; // long enough for the threaded path
    std::vector<double> T(count), out(count), log_out(count);
    for (std::size_t i = 0; i < count; ++i)
        T[i] = 200.0 + 5000.0 * i / count;
    const double n = 1e12, m = 4.002602 * amu;
    jeans_flux(ArrayArg{&n, 1}, ArrayArg{T.data(), count}, ArrayArg{&m, 1}, ArrayArg{&M_planet, 1},
               ArrayArg{&r_exo, 1}, out.data(), count);
    log_jeans_flux(ArrayArg{&n, 1}, ArrayArg{T.data(), count}, ArrayArg{&m, 1},
                   ArrayArg{&M_planet, 1}, ArrayArg{&r_exo, 1}, log_out.data(), count);
    for (std::size_t i = 0; i < count; i += 997) {
        const double ref = jeans_flux(n, T[i], m, M_planet, r_exo);
        CHECK(out[i] == doctest::Approx(ref).epsilon(1e-14));
        CHECK(log_out[i] == doctest::Approx(std::log(ref)).epsilon(1e-13));
    }
    std::vector<double> bad_density = {1.0, -1.0};
    CHECK_THROWS_WITH_AS(jeans_flux(ArrayArg{bad_density.data(), 2}, ArrayArg{T.data(), 2},
                                    ArrayArg{&m, 1}, ArrayArg{&M_planet, 1}, ArrayArg{&r_exo, 1},
                                    out.data(), 2),
                         "density must be finite and >= 0, got -1 (element 1)", InputError);
    CHECK_THROWS_AS(jeans_flux(ArrayArg{T.data(), 3}, ArrayArg{T.data(), 2}, ArrayArg{&m, 1},
                               ArrayArg{&M_planet, 1}, ArrayArg{&r_exo, 1}, out.data(), 2),
                    InputError);
}

TEST_CASE("flux block: the bit-pattern checks give the comparisons' verdicts and the same fluxes") {
    // Each form is compiled for one instruction set in jeans.cpp; here both run on this CPU.
    const double big = std::numeric_limits<double>::max();
    const double tiny = std::numeric_limits<double>::denorm_min();
    const double nan = std::numeric_limits<double>::quiet_NaN();
    const double inf = std::numeric_limits<double>::infinity();
    const std::vector<double> specials = {0.0, -0.0, tiny, -tiny, 1e-300, big,  -big,
                                          inf, -inf, nan,  -nan,  1.0,    -1.0, 2.5e-308};
    const double typical[5] = {1e12, 1000.0, m_H, M_planet, r_exo};
    std::size_t valid = 0, invalid = 0, overflowing = 0;
    for (std::size_t k = 0; k < 5; ++k)
        for (double special : specials) {
            // The special value in the middle of a block of typical inputs.
            constexpr std::size_t len = 37, at = 17;
            std::vector<std::vector<double>> in(5);
            for (std::size_t j = 0; j < 5; ++j)
                in[j].assign(len, typical[j]);
            in[k][at] = special;
            std::vector<double> by_bits(len), by_comparisons(len);
            bool bits_not_finite = false, comparisons_not_finite = false;
            const bool bits_ok =
                detail::flux_loop<true>(in[0].data(), in[1].data(), in[2].data(), in[3].data(),
                                        in[4].data(), by_bits.data(), len, &bits_not_finite);
            const bool comparisons_ok = detail::flux_loop<false>(
                in[0].data(), in[1].data(), in[2].data(), in[3].data(), in[4].data(),
                by_comparisons.data(), len, &comparisons_not_finite);
            CAPTURE(k);
            CAPTURE(special);
            CHECK(bits_ok == comparisons_ok);
            // The rule itself: density finite and >= 0, the others finite and > 0.
            const bool rule =
                k == 0 ? special >= 0.0 && special <= big : special > 0.0 && special <= big;
            CHECK(bits_ok == rule);
            CHECK(bits_not_finite == comparisons_not_finite);
            CHECK(std::memcmp(by_bits.data(), by_comparisons.data(), len * sizeof(double)) == 0);
            (rule ? valid : invalid) += 1;
            overflowing += bits_not_finite ? 1 : 0;
        }
    CHECK(valid == 27);
    CHECK(invalid == 43);
    CHECK(overflowing > 0); // e.g. a density of DBL_MAX: the linear form overflows
}
