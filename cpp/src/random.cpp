#include "exosieve/random.hpp"

#include <cmath>

#include "exosieve/constants.hpp"

namespace exosieve {

namespace {

// SplitMix64 finaliser (Steele, Lea & Flood 2014): a bijective 64-bit mix.
std::uint64_t mix(std::uint64_t z) {
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

} // namespace

CounterRng::CounterRng(std::uint64_t seed, std::uint64_t key, std::uint64_t index) {
    std::uint64_t h = mix(seed + 0x9e3779b97f4a7c15ULL);
    h = mix(h ^ (key + 0x632be59bd9b4e019ULL));
    h = mix(h ^ (index + 0x8cb92ba72f3d8dd7ULL));
    state_ = h;
}

std::uint64_t CounterRng::next_bits() {
    state_ += 0x9e3779b97f4a7c15ULL;
    return mix(state_);
}

double CounterRng::uniform() {
    return static_cast<double>(next_bits() >> 11) * 0x1.0p-53;
}

double CounterRng::normal() {
    const double u1 = 1.0 - uniform(); // (0, 1]: the logarithm stays finite
    const double u2 = uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * constants::pi * u2);
}

double CounterRng::split_normal(double mode, double lower, double upper) {
    const double total = lower + upper;
    if (!(total > 0.0))
        return mode;
    // The two halves share the density's value at the mode, so each holds its width's share.
    const bool below = uniform() * total < lower;
    const double z = std::abs(normal());
    return below ? mode - lower * z : mode + upper * z;
}

} // namespace exosieve
