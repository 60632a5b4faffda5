#pragma once
//! \file arrays.hpp
//! Array arguments that broadcast a single value, and a simple parallel loop.

#include <cstddef>
#include <functional>

namespace exosieve {

//! A read-only array argument of length 1 (broadcast) or of the loop length.
struct ArrayArg {
    const double* data; //!< first element
    std::size_t size;   //!< 1 (broadcast) or the loop length

    //! Element i, or the single value when broadcast.
    double operator[](std::size_t i) const { return data[size == 1 ? 0 : i]; }
};

//! Throw InputError unless every argument has length 1 or `count`.
void check_lengths(std::size_t count, std::initializer_list<ArrayArg> args);

//! Throw InputError naming `what` and the first offending element unless all are finite and > 0.
void require_positive(const char* what, ArrayArg values);

//! Throw InputError naming `what` and the first offending element unless all are finite and >= 0.
void require_non_negative(const char* what, ArrayArg values);

//! Throw InputError naming `what` and the first offending element unless all are <= `limit`
//! (NaN fails); the message gives `limit` as "must be <= limit".
void require_at_most(const char* what, ArrayArg values, double limit);

//! Run body(begin, end) over [0, count) split across hardware threads when count is large.
void parallel_for(std::size_t count, const std::function<void(std::size_t, std::size_t)>& body);

} // namespace exosieve
