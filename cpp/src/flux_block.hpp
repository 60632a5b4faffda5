#pragma once
// Internal: the Jeans flux of a contiguous block of inputs and their checks, in one
// vectorisable pass; jeans.cpp compiles it once per instruction set.

#include <cmath>
#include <cstddef>
#include <cstdint>
#include <limits>

#include "exosieve/constants.hpp"
#include "vector_exp.hpp"

namespace exosieve::detail {

constexpr double inv_two_sqrt_pi = 0.28209479177387814347; // 1 / (2 sqrt(pi))

// Jeans flux on a contiguous block without the tail factor, with the block's checks in the same
// pass over its inputs (branch-free, so that it vectorises). Returns false when a value is
// invalid: density finite and >= 0, the other four finite and > 0. `*not_finite` is set when a
// flux came out inf or NaN, which a product of the linear form does for finite extreme inputs.
// BitChecks: the checks on the values' bit patterns, as unsigned 64-bit maxima, instead of ten
// floating-point comparisons; the same verdicts, and faster only where the CPU has 64-bit
// unsigned maxima (AVX-512: 1.4x the elements per second measured on this loop; 0.8x under
// AVX2, which emulates them).
template <bool BitChecks>
inline __attribute__((always_inline)) bool
flux_loop(const double* n, const double* T, const double* m, const double* M, const double* r,
          double* out, std::size_t len, bool* not_finite) {
    constexpr double big = std::numeric_limits<double>::max();
    // The bits of DBL_MAX; a positive finite x has bits(x) - 1 below it (unsigned: +0 wraps
    // to the top), and |x|'s bits reach 0x7FF0... only for inf and NaN.
    constexpr std::uint64_t max_bits = 0x7FEFFFFFFFFFFFFFull, inf_bits = 0x7FF0000000000000ull;
    double bad = 0.0, overflowed = 0.0;
    std::uint64_t worst = 0, density_bad = 0, flux_worst = 0;
    for (std::size_t i = 0; i < len; ++i) {
        if constexpr (BitChecks) {
            const std::uint64_t a = detail::double_to_bits(T[i]) - 1,
                                b = detail::double_to_bits(m[i]) - 1,
                                c = detail::double_to_bits(M[i]) - 1,
                                d = detail::double_to_bits(r[i]) - 1;
            const std::uint64_t ab = a > b ? a : b, cd = c > d ? c : d, w = ab > cd ? ab : cd;
            worst = worst > w ? worst : w;
            const std::uint64_t u = detail::double_to_bits(n[i]); // +0 and -0 pass
            density_bad |= (u > max_bits) & ((u << 1) != 0) ? 1 : 0;
        } else {
            const bool ok = (n[i] >= 0.0) & (n[i] <= big) & (T[i] > 0.0) & (T[i] <= big) &
                            (m[i] > 0.0) & (m[i] <= big) & (M[i] > 0.0) & (M[i] <= big) &
                            (r[i] > 0.0) & (r[i] <= big);
            bad += ok ? 0.0 : 1.0;
        }
        const double kT = constants::k_B * T[i];
        const double lambda = constants::G * M[i] * m[i] / (kT * r[i]);
        const double v0 = std::sqrt(2.0 * kT / m[i]);
        // lambda beyond ~1e300 would make (1 + lambda) * exp(-lambda) = inf * 0.
        const double lam = lambda < 1e300 ? lambda : 1e300;
        // exp(-lambda) as a square applied to the prefactor one factor at a time: the result
        // keeps full precision where exp(-lambda) alone would be subnormal (lambda > 708).
        const double half = detail::vector_exp(-0.5 * lam);
        const double flux = (n[i] * v0 * inv_two_sqrt_pi * (1.0 + lam) * half) * half;
        out[i] = flux;
        if constexpr (BitChecks) {
            const std::uint64_t f = detail::double_to_bits(flux) & ~(1ull << 63);
            flux_worst = flux_worst > f ? flux_worst : f;
        } else {
            overflowed += std::abs(flux) <= big ? 0.0 : 1.0; // inf or NaN
        }
    }
    if constexpr (BitChecks) {
        *not_finite = flux_worst >= inf_bits;
        return worst < max_bits && density_bad == 0;
    }
    *not_finite = overflowed != 0.0;
    return bad == 0.0;
}

} // namespace exosieve::detail
