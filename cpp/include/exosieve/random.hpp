#pragma once
//! \file random.hpp
//! Counter-based random numbers: every stream is a pure function of three integers (a seed and
//! two counters), so a draw never depends on threads, chunks, machines or the order of work.
//! SplitMix64 (Steele, Lea & Flood 2014) over a hash of the three; normal draws by the
//! Box–Muller transform (Box & Muller 1958), written out here so that results do not depend
//! on the standard library.

#include <cstdint>

namespace exosieve {

//! Counter-based random numbers: one independent stream per (seed, key, index).
class CounterRng {
  public:
    //! The stream `index` of key `key` under `seed` (the batch uses key = case, index = sample).
    CounterRng(std::uint64_t seed, std::uint64_t key, std::uint64_t index);
    //! Next 64 random bits.
    std::uint64_t next_bits();
    //! Uniform in [0, 1) with 53 random bits [1].
    double uniform();
    //! Standard normal N(0, 1) by the Box–Muller transform (two uniforms per draw) [1].
    double normal();
    //! Split normal with mode `mode` and widths `lower` below and `upper` above it (both >= 0,
    //! in the unit of `mode`): with probability lower/(lower + upper) the lower half-normal
    //! mode - lower |z|, else the upper one mode + upper |z| (one uniform, then one normal).
    //! Mean mode + sqrt(2/pi) (upper - lower), variance (1 - 2/pi) (upper - lower)^2 + upper
    //! lower (the split normal's closed form, e.g. Wallis 2014, Stat. Sci. 29:106). Both widths
    //! zero: the mode itself.
    double split_normal(double mode, double lower, double upper);

  private:
    std::uint64_t state_;
};

} // namespace exosieve
