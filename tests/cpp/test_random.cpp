#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>

#include "exosieve/constants.hpp"
#include "exosieve/random.hpp"

using namespace exosieve;

namespace {

// Moments and the distribution function of a split normal with mode m and widths lo below and
// hi above it, in closed form (the two-piece normal of Wallis 2014, Stat. Sci. 29:106,
// doi:10.1214/13-STS417; John 1982 from memory). The formulas are re-derived in the comments
// below and checked against quadrature of the density in tests/python/test_archive.py.
struct SplitNormalForm {
    double m, lo, hi;
    // E[X] = m + sqrt(2/pi) (hi - lo): each half-normal's mean |z| is sqrt(2/pi).
    double mean() const { return m + std::sqrt(2.0 / constants::pi) * (hi - lo); }
    // Var X = (1 - 2/pi) (hi - lo)^2 + hi lo.
    double variance() const {
        return (1.0 - 2.0 / constants::pi) * (hi - lo) * (hi - lo) + hi * lo;
    }
    // F(x): 2 lo/(lo+hi) Phi((x-m)/lo) below the mode, lo/(lo+hi) + 2 hi/(lo+hi) (Phi((x-m)/hi)
    // - 1/2) above it.
    double cdf(double x) const {
        const auto phi = [](double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); };
        const double s = lo + hi;
        return x < m ? 2.0 * lo / s * phi((x - m) / lo)
                     : lo / s + 2.0 * hi / s * (phi((x - m) / hi) - 0.5);
    }
};

} // namespace

TEST_CASE("split normal: sample mean, variance and distribution function against the closed "
          "form") {
    const SplitNormalForm cases[] = {{10.0, 1.0, 3.0}, {-2.0, 0.5, 0.1}, {0.0, 2.0, 2.0}};
    const int n = 200000;
    for (const SplitNormalForm& f : cases) {
        CAPTURE(f.lo);
        CAPTURE(f.hi);
        double sum = 0.0, sum2 = 0.0;
        const double at[] = {f.m - 1.5 * f.lo, f.m - 0.3 * f.lo, f.m, f.m + 0.4 * f.hi,
                             f.m + 2.0 * f.hi};
        double below[5] = {0, 0, 0, 0, 0};
        for (int j = 0; j < n; ++j) {
            CounterRng rng(7, 3, static_cast<std::uint64_t>(j));
            const double x = rng.split_normal(f.m, f.lo, f.hi);
            sum += x;
            sum2 += x * x;
            for (int k = 0; k < 5; ++k)
                below[k] += x < at[k];
        }
        const double mean = sum / n, var = sum2 / n - mean * mean;
        // Tolerances: 5 standard errors of each estimate; the variance's is sqrt((k - 1)/n)
        // sigma^2 with the kurtosis k, taken as 4 (3 for a normal; these shapes are near it).
        CHECK(std::abs(mean - f.mean()) < 5.0 * std::sqrt(f.variance() / n));
        CHECK(std::abs(var - f.variance()) < 5.0 * std::sqrt(3.0 / n) * f.variance());
        for (int k = 0; k < 5; ++k) {
            const double p = f.cdf(at[k]);
            CHECK(std::abs(below[k] / n - p) < 5.0 * std::sqrt(p * (1 - p) / n) + 1e-12);
        }
    }
}

TEST_CASE("split normal: limits and reproducibility") {
    CounterRng a(1, 2, 3), b(1, 2, 3);
    CHECK(a.split_normal(4.0, 0.3, 0.7) == b.split_normal(4.0, 0.3, 0.7));
    CounterRng c(1, 2, 3);
    CHECK(c.split_normal(4.0, 0.0, 0.0) == 4.0); // no width: the mode itself
    // One width zero: a half-normal on the other side only.
    for (std::uint64_t j = 0; j < 1000; ++j) {
        CounterRng up(9, 0, j), down(9, 1, j);
        CHECK(up.split_normal(1.0, 0.0, 2.0) >= 1.0);
        CHECK(down.split_normal(1.0, 2.0, 0.0) <= 1.0);
    }
}
