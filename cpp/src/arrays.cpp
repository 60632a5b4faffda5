#include "exosieve/arrays.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "exosieve/errors.hpp"
#include "worker_threads.hpp"

namespace exosieve {

void check_lengths(std::size_t count, std::initializer_list<ArrayArg> args) {
    std::size_t position = 0;
    for (const ArrayArg& a : args) {
        if (a.size != 1 && a.size != count)
            throw InputError("array argument " + std::to_string(position) + " has length " +
                             std::to_string(a.size) + ", expected 1 or " + std::to_string(count));
        ++position;
    }
}

namespace {
// Branch-free scan (vectorises); the element-by-element search runs only on failure.
template <class Ok> bool all_of(ArrayArg values, Ok ok) {
    double bad = 0.0;
    for (std::size_t i = 0; i < values.size; ++i)
        bad += ok(values.data[i]) ? 0.0 : 1.0;
    return bad == 0.0;
}

template <class Ok> void require_each(const char* what, ArrayArg values, Ok ok, const char* rule) {
    if (all_of(values, ok))
        return;
    for (std::size_t i = 0; i < values.size; ++i) {
        const double v = values.data[i];
        if (!ok(v)) {
            std::string where = values.size == 1 ? "" : " (element " + std::to_string(i) + ")";
            throw InputError(std::string(what) + " must be finite and " + rule + ", got " +
                             format_value(v) + where);
        }
    }
}
} // namespace

void require_positive(const char* what, ArrayArg values) {
    constexpr double big = std::numeric_limits<double>::max();
    require_each(
        what, values, [](double v) { return (v > 0.0) & (v <= big); }, "> 0");
}

void require_non_negative(const char* what, ArrayArg values) {
    constexpr double big = std::numeric_limits<double>::max();
    require_each(
        what, values, [](double v) { return (v >= 0.0) & (v <= big); }, ">= 0");
}

void require_at_most(const char* what, ArrayArg values, double limit) {
    if (all_of(values, [limit](double v) { return v <= limit; }))
        return;
    for (std::size_t i = 0; i < values.size; ++i) {
        const double v = values.data[i];
        if (!(v <= limit)) {
            std::string where = values.size == 1 ? "" : " (element " + std::to_string(i) + ")";
            throw InputError(std::string(what) + " must be <= " + format_value(limit) + ", got " +
                             format_value(v) + where);
        }
    }
}

void parallel_for(std::size_t count, const std::function<void(std::size_t, std::size_t)>& body) {
    // Threads pay off only when each one gets a few hundred microseconds of work.
    constexpr std::size_t min_per_thread = 1u << 16;
    detail::run_in_chunks(count, detail::thread_count(0, count / min_per_thread), body);
}

} // namespace exosieve
