#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "../../cpp/src/vector_exp.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/maxwell.hpp"

using namespace exosieve;
using constants::k_B;

namespace {
const double m_N2 = 28.014 * constants::amu;
}

TEST_CASE("characteristic speeds: closed forms and their ratios") {
    const double T = 300.0;
    const double v0 = most_probable_speed(T, m_N2);
    // Worked value: sqrt(2 k 300 K / 28.014 u) = 421.97 m/s.
    CHECK(v0 == doctest::Approx(std::sqrt(2 * k_B * T / m_N2)).epsilon(1e-15));
    CHECK(v0 == doctest::Approx(421.97).epsilon(1e-4));
    CHECK(mean_speed(T, m_N2) / v0 == doctest::Approx(2.0 / std::sqrt(constants::pi)));
    CHECK(rms_speed(T, m_N2) / v0 == doctest::Approx(std::sqrt(1.5)));
}

TEST_CASE("the pdf is normalised and peaks at the most probable speed") {
    const double T = 1000.0, m = constants::amu;
    const double v0 = most_probable_speed(T, m);
    // Trapezoid integral over [0, 8 v0]; the tail beyond is < 1e-26.
    const int n = 20000;
    double sum = 0.0;
    for (int i = 0; i <= n; ++i) {
        const double v = 8.0 * v0 * i / n;
        sum += (i == 0 || i == n ? 0.5 : 1.0) * speed_pdf(v, T, m);
    }
    CHECK(sum * 8.0 * v0 / n == doctest::Approx(1.0).epsilon(1e-9));
    CHECK(speed_pdf(v0, T, m) > speed_pdf(0.99 * v0, T, m));
    CHECK(speed_pdf(v0, T, m) > speed_pdf(1.01 * v0, T, m));
}

TEST_CASE("tail fraction: limits, monotonicity and deep tail") {
    CHECK(tail_fraction(0.0) == 1.0);
    double previous = 1.0;
    for (double x = 0.1; x < 40.0; x += 0.1) {
        const double f = tail_fraction(x);
        CHECK(f >= 0.0);
        CHECK(f <= previous);
        previous = f;
    }
    CHECK(tail_fraction(40.0) == 0.0); // underflows to zero, never NaN
    // Deep-tail log form against the leading asymptotic term 2x/sqrt(pi) exp(-x^2)
    // (1 + 1/(2x^2) + ...): at x = 100 the relative correction is 5e-5.
    const double x = 100.0;
    const double leading = std::log(2.0 * x / std::sqrt(constants::pi)) - x * x;
    CHECK(log_tail_fraction(x) ==
          doctest::Approx(leading + std::log1p(0.5 / (x * x))).epsilon(1e-12));
    // Both branches of the log form meet at x = 25 (slope -50 there, so a step of 1e-10
    // moves the value by 5e-9 of 625).
    CHECK(log_tail_fraction(25.0 - 1e-10) ==
          doctest::Approx(log_tail_fraction(25.0)).epsilon(1e-10));
}

TEST_CASE("bad input names the argument and the value") {
    CHECK_THROWS_WITH_AS(most_probable_speed(-5.0, m_N2),
                         "temperature must be finite and > 0, got -5", InputError);
    CHECK_THROWS_WITH_AS(most_probable_speed(300.0, NAN), "mass must be finite and > 0, got nan",
                         InputError);
    CHECK_THROWS_AS(fraction_faster(-1.0, 300.0, m_N2), InputError);
    std::vector<double> T = {300.0, 0.0};
    std::vector<double> out(2);
    CHECK_THROWS_WITH_AS(
        most_probable_speed(ArrayArg{T.data(), 2}, ArrayArg{&m_N2, 1}, out.data(), 2),
        "temperature must be finite and > 0, got 0 (element 1)", InputError);
}

TEST_CASE("array forms equal the scalar forms and broadcast length-1 arguments") {
    std::vector<double> v = {0.0, 300.0, 1000.0, 5000.0};
    const double T = 700.0;
    std::vector<double> out(v.size());
    fraction_faster(ArrayArg{v.data(), v.size()}, ArrayArg{&T, 1}, ArrayArg{&m_N2, 1}, out.data(),
                    v.size());
    for (std::size_t i = 0; i < v.size(); ++i)
        CHECK(out[i] == doctest::Approx(fraction_faster(v[i], T, m_N2)).epsilon(1e-15));
}

TEST_CASE("the vectorisable exp agrees with std::exp to a few ulp over the double range") {
    for (double x = -745.0; x < 709.0; x += 0.0137) {
        const double ref = std::exp(x);
        const double got = detail::vector_exp(x);
        if (ref >= 2.2250738585072014e-308) {
            CHECK(std::fabs(got - ref) <= 4e-16 * ref);
        } else {
            CHECK(std::fabs(got - ref) <= 1e-323); // subnormal: two units in the last place
        }
    }
    CHECK(detail::vector_exp(-800.0) == 0.0);
    CHECK(std::isinf(detail::vector_exp(800.0)));
    CHECK(std::isnan(detail::vector_exp(NAN)));
}

TEST_CASE("the vectorisable expm1 agrees with std::expm1 to a few ulp, also near 0") {
    // Near 0 on a logarithmic grid of both signs (where e^x - 1 would lose every digit), then
    // across the range on a linear one, through the switch at ln2/2.
    std::size_t checked = 0;
    for (double a = 1e-300; a < 1.0; a *= 1.37)
        for (const double x : {a, -a}) {
            const double ref = std::expm1(x);
            CHECK(std::fabs(detail::vector_expm1(x) - ref) <= 4.5e-16 * std::fabs(ref));
            ++checked;
        }
    for (double x = -40.0; x < 700.0; x += 0.00731) {
        const double ref = std::expm1(x);
        CHECK(std::fabs(detail::vector_expm1(x) - ref) <= 9e-16 * std::fabs(ref));
        ++checked;
    }
    CHECK(checked > 100000);
    CHECK(detail::vector_expm1(0.0) == 0.0);
    CHECK(detail::vector_expm1(-800.0) == -1.0);
    CHECK(std::isnan(detail::vector_expm1(NAN)));
}
