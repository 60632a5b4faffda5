#pragma once
// Internal: an exp() that the compiler can vectorise (no calls, no branches), so the
// array kernels run several lanes at a time. Accurate to about 2 ulp over the whole
// double range; exact 0 below -745.2 and +inf above 709.8; NaN stays NaN.

#include <cstdint>
#include <cstring>

// A hot array loop compiled three times, for x86-64-v4 (AVX-512: 8 lanes), x86-64-v3 (AVX2: 4
// lanes) and the baseline (SSE2: 2 lanes), the CPU choosing at load time (GCC function
// multi-versioning), so that a portable build runs as many lanes as the CPU has (measured on
// jeans_flux with AVX-512 against AVX2: 1.3x the elements per second). GCC contracts a * b + c
// into one fused multiply-add where the CPU has one, even under -std=c++17, so the AVX2 and
// AVX-512 clones can differ from the baseline in the last bits (within the few ulp the tests
// allow against the scalar forms); turning contraction off cost a quarter of jeans_flux's
// elements per second (measured on 1e6 and 1e7). Not under ThreadSanitizer: the clones' resolver
// runs while the program is relocated, before the sanitizer's runtime is up, and crashes it.
// EXOSIEVE_TARGET(level) marks one version of a function written out per level (a loop whose
// best form differs between instruction sets), with the same GCC dispatch.
#if defined(__GNUC__) && !defined(__clang__) && defined(__x86_64__) && defined(__linux__) &&       \
    !defined(__SANITIZE_THREAD__)
#define EXOSIEVE_VECTOR_CLONES                                                                     \
    __attribute__((target_clones("arch=x86-64-v4", "arch=x86-64-v3", "default")))
#define EXOSIEVE_HAS_TARGETS 1
#define EXOSIEVE_TARGET(level) __attribute__((target(level)))
#else
#define EXOSIEVE_VECTOR_CLONES
#define EXOSIEVE_HAS_TARGETS 0
#endif

namespace exosieve::detail {

inline std::uint64_t double_to_bits(double d) {
    std::uint64_t bits;
    std::memcpy(&bits, &d, sizeof bits);
    return bits;
}

inline double bits_to_double(std::uint64_t bits) {
    double d;
    std::memcpy(&d, &bits, sizeof d);
    return d;
}

// e^r - 1 on |r| <= ln2/2 by its Taylor series to r^13 / 13! (truncation error < 1e-17
// relative), as r (1 + r q(r)). q is evaluated by Estrin's scheme (pairs, then powers r^2, r^4):
// a dependency chain of 5 operations instead of Horner's 22, so that the kernels are not bound
// by the latency of one lane; its rounding is damped by r^2 <= 0.12, so the last two steps,
// written out as Horner's, keep the result within 2 ulp.
inline double exp_series_minus_one(double r) {
    const double r2 = r * r, r4 = r2 * r2;
    const double a0 = 0.5 + r * (1.0 / 6.0), a1 = 1.0 / 24.0 + r * (1.0 / 120.0);
    const double a2 = 1.0 / 720.0 + r * (1.0 / 5040.0);
    const double a3 = 1.0 / 40320.0 + r * (1.0 / 362880.0);
    const double a4 = 1.0 / 3628800.0 + r * (1.0 / 39916800.0);
    const double a5 = 1.0 / 479001600.0 + r * (1.0 / 6227020800.0);
    const double b0 = a0 + r2 * a1, b1 = a2 + r2 * a3, b2 = a4 + r2 * a5;
    const double q = b0 + r4 * (b1 + r4 * b2);
    return r * (1.0 + r * q);
}

inline double vector_exp(double x) {
    constexpr double log2e = 1.4426950408889634;
    constexpr double ln2_hi = 6.93147180369123816490e-01;
    constexpr double ln2_lo = 1.90821492927058770002e-10;
    // Clamp so that 2^k stays representable as a product of two normal scale factors.
    const double xc = x < -746.0 ? -746.0 : (x > 710.0 ? 710.0 : x);
    // Round x / ln2 to the nearest integer k with the 1.5 * 2^52 shifter: k sits in the low
    // bits of t, so no float-to-int conversion (which SSE2 cannot vectorise) is needed.
    constexpr double shifter = 6755399441055744.0; // 1.5 * 2^52
    const double t = xc * log2e + shifter;
    const double kf = t - shifter;
    const double r = (xc - kf * ln2_hi) - kf * ln2_lo; // |r| <= ln2/2
    const double p = 1.0 + exp_series_minus_one(r);
    // 2^k as 2^k1 * 2^k2 with both halves normal, so subnormal results come out right.
    std::uint64_t t_bits;
    std::memcpy(&t_bits, &t, sizeof t);
    std::uint64_t shifter_bits;
    std::memcpy(&shifter_bits, &shifter, sizeof shifter);
    const std::uint64_t k_biased = t_bits - shifter_bits + 2048; // k + 2048, in [972, 3072]
    const std::uint64_t k1_biased = k_biased >> 1;               // floor(k / 2) + 1024
    const std::uint64_t k2_biased = k_biased - k1_biased;        // k - floor(k / 2) + 1024
    const double s1 = bits_to_double((k1_biased - 1) << 52);     // 2^(k1), biased by 1023
    const double s2 = bits_to_double((k2_biased - 1) << 52);
    const double y = p * s1 * s2;
    return x != x ? x : y;
}

// e^x - 1, branch-free like vector_exp: for |x| <= ln2/2 the series of vector_exp without its
// leading 1, x (1 + x q(x)), which keeps full relative precision as x -> 0; beyond, e^x - 1,
// where |e^x - 1| >= 0.29 and the subtraction costs at most 2 bits. Within 4 ulp of
// std::expm1 (checked in test_maxwell.cpp).
inline double vector_expm1(double x) {
    const double small = exp_series_minus_one(x);
    const double large = vector_exp(x) - 1.0;
    return (x >= -0.34657359027997264) & (x <= 0.34657359027997264) ? small : large;
}

} // namespace exosieve::detail
