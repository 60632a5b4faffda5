#include "exosieve/sensitivity.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "exosieve/errors.hpp"
#include "exosieve/random.hpp"
#include "worker_threads.hpp"

namespace exosieve {

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// Key of the bootstrap streams: apart from the batch's (case, sample) streams under one seed.
constexpr std::uint64_t bootstrap_key = 0xb0075742a9ULL;

// Point estimates of V, S_i and ST_i over `rows` (base rows, repeats allowed).
struct Estimate {
    double mean = nan, variance = nan;
    std::vector<double> s, st;
};

void estimate(const double* y, const SaltelliDesign& d, const std::vector<char>& active,
              const std::vector<std::size_t>& rows, double resolution, Estimate& e) {
    const std::size_t N = d.base, K = d.inputs;
    const double n = static_cast<double>(rows.size());
    const double* a = y;
    const double* b = y + N;
    double sum = 0.0;
    for (std::size_t j : rows)
        sum += a[j] + b[j];
    const double mean = sum / (2.0 * n);
    double squares = 0.0;
    for (std::size_t j : rows) {
        const double fa = a[j] - mean, fb = b[j] - mean;
        squares += fa * fa + fb * fb;
    }
    const double v = squares / (2.0 * n);
    e.mean = mean;
    e.variance = v;
    e.s.assign(K, nan);
    e.st.assign(K, nan);
    if (!(v > 0.0) || !(std::sqrt(v) > resolution))
        return;
    for (std::size_t i = 0; i < K; ++i) {
        if (!active[i])
            continue;
        const double* ab = y + (2 + i) * N;
        double first = 0.0, total = 0.0;
        for (std::size_t j : rows) {
            // Centring cancels in the differences; it matters only in the factor f(B).
            const double diff = ab[j] - a[j];
            first += (b[j] - mean) * diff;
            total += diff * diff;
        }
        e.s[i] = first / n / v;
        e.st[i] = total / (2.0 * n) / v;
    }
}

// Quantile q of the finite values in `x` (sorted in place), linear between order statistics as
// numpy.quantile's default; NaN with fewer than two finite values.
double quantile(std::vector<double>& x, double q) {
    x.erase(std::remove_if(x.begin(), x.end(), [](double v) { return !std::isfinite(v); }),
            x.end());
    if (x.size() < 2)
        return nan;
    std::sort(x.begin(), x.end());
    const double at = q * static_cast<double>(x.size() - 1);
    const auto k = static_cast<std::size_t>(std::floor(at));
    if (k + 1 >= x.size())
        return x.back();
    return x[k] + (at - static_cast<double>(k)) * (x[k + 1] - x[k]);
}

} // namespace

void SaltelliDesign::validate() const {
    if (base == 0)
        throw InputError("base must be > 0 [rows of A and B], got 0");
    if (inputs == 0)
        throw InputError("inputs must be > 0 [uncertain inputs], got 0");
}

void SobolOptions::validate() const {
    if (!std::isfinite(confidence) || !(confidence > 0.0) || !(confidence < 1.0))
        throw InputError("confidence must be in (0, 1), got " + format_value(confidence));
    if (!std::isfinite(resolution) || resolution < 0.0)
        throw InputError("resolution must be finite and >= 0 [output unit], got " +
                         format_value(resolution));
}

SobolIndices sobol_indices(const double* y, const SaltelliDesign& d, const SobolOptions& o) {
    d.validate();
    o.validate();
    const std::size_t N = d.base, K = d.inputs;
    SobolIndices out;
    out.first_order.assign(K, nan);
    out.total.assign(K, nan);
    out.first_order_low.assign(K, nan);
    out.first_order_high.assign(K, nan);
    out.total_low.assign(K, nan);
    out.total_high.assign(K, nan);
    out.mean = nan;
    out.variance = nan;

    // An input block without any finite output was not run (or failed throughout).
    std::vector<char> active(K, 0);
    for (std::size_t i = 0; i < K; ++i)
        for (std::size_t j = 0; j < N && !active[i]; ++j)
            active[i] = std::isfinite(y[(2 + i) * N + j]) ? 1 : 0;
    std::vector<std::size_t> used;
    for (std::size_t j = 0; j < N; ++j) {
        bool ok = std::isfinite(y[j]) && std::isfinite(y[N + j]);
        for (std::size_t i = 0; i < K && ok; ++i)
            ok = !active[i] || std::isfinite(y[(2 + i) * N + j]);
        if (ok)
            used.push_back(j);
    }
    out.rows_used = used.size();
    if (used.size() < 2)
        return out;
    Estimate e;
    estimate(y, d, active, used, o.resolution, e);
    out.mean = e.mean;
    out.variance = e.variance;
    out.first_order = e.s;
    out.total = e.st;
    if (o.resamples == 0 || !(e.variance > 0.0) || !(std::sqrt(e.variance) > o.resolution))
        return out;

    std::vector<std::vector<double>> s_draws(K), st_draws(K);
    for (std::size_t i = 0; i < K; ++i) {
        s_draws[i].reserve(o.resamples);
        st_draws[i].reserve(o.resamples);
    }
    std::vector<std::size_t> rows(used.size());
    const double n = static_cast<double>(used.size());
    for (std::size_t r = 0; r < o.resamples; ++r) {
        CounterRng rng(o.seed, bootstrap_key, r);
        for (std::size_t& j : rows)
            j = used[std::min(used.size() - 1, static_cast<std::size_t>(rng.uniform() * n))];
        estimate(y, d, active, rows, o.resolution, e);
        for (std::size_t i = 0; i < K; ++i) {
            s_draws[i].push_back(e.s[i]);
            st_draws[i].push_back(e.st[i]);
        }
    }
    const double lo = 0.5 * (1.0 - o.confidence), hi = 0.5 * (1.0 + o.confidence);
    for (std::size_t i = 0; i < K; ++i) {
        if (!active[i])
            continue;
        out.first_order_low[i] = quantile(s_draws[i], lo);
        out.first_order_high[i] = quantile(s_draws[i], hi);
        out.total_low[i] = quantile(st_draws[i], lo);
        out.total_high[i] = quantile(st_draws[i], hi);
    }
    return out;
}

std::vector<SobolIndices> sobol_indices_many(const double* y, std::size_t count,
                                             const SaltelliDesign& d, const SobolOptions& o,
                                             std::size_t threads) {
    d.validate();
    o.validate();
    std::vector<SobolIndices> out(count);
    threads = detail::thread_count(threads, count);
    const std::size_t runs = d.runs();
    detail::run_on_threads(threads, [&](std::size_t first) {
        for (std::size_t k = first; k < count; k += threads)
            out[k] = sobol_indices(y + k * runs, d, o);
    });
    return out;
}

} // namespace exosieve
