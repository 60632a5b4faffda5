#pragma once
//! \file case_sampling.hpp
//! The sample runs of a case: Monte Carlo draws over its stated uncertainties, or the rows of a
//! Saltelli design over the table's uncertain inputs.
//!
//! Monte Carlo: sample j of the case with key k draws its parameters from a counter-based
//! generator seeded by (seed, k, j) alone (SplitMix64 of Steele, Lea & Flood 2014 over a hash of
//! the three), so every figure is independent of the number of threads, of the chunk size and
//! of which machine ran which chunk. Normal draws come from the Box–Muller transform (Box &
//! Muller 1958), written out here so that results do not depend on the standard library.
//! - Normal: X ~ N(value, sigma^2), truncated to the parameter's allowed range by drawing again
//!   (at most 1000 draws; then the sample fails).
//! - Log-normal: ln X ~ N(ln value, s^2): the table value is the median, s the standard
//!   deviation of ln X [1].
//! - Split normal (asymmetric errors, e.g. +0.3/-0.1): the table value is the mode, s_lo and
//!   s_hi the widths below and above it; with probability s_lo/(s_lo + s_hi) the draw is
//!   value - s_lo |z|, else value + s_hi |z| (CounterRng::split_normal), truncated as the normal.
//!
//! Sensitivity designs (SampleDesign::Saltelli): the samples of a case form the Saltelli design
//! of sensitivity.hpp over the table's uncertain inputs (table_inputs()), so that Sobol' indices
//! of every output can be estimated from the stored runs.

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "exosieve/batch_options.hpp"
#include "exosieve/case_table.hpp"

namespace exosieve {

//! Sample `sample` of `spec`: each uncertain parameter drawn in the order of
//! spec.uncertainties from the stream (seed, spec.key, sample). Throws NumericalError when a
//! truncated normal (or split normal) finds no allowed value in 1000 draws.
CaseSpec sample_case(const CaseSpec& spec, std::uint64_t seed, std::uint64_t sample);

//! Sample runs per case: `samples` for Monte Carlo, samples (inputs + 2) for a Saltelli design
//! over `inputs` uncertain inputs.
std::size_t sample_runs(const BatchOptions& options, std::size_t inputs);

//! The inputs of one sample run of a case.
struct DesignSample {
    CaseSpec spec;   //!< the case with its drawn values
    bool run = true; //!< false: an A_B^(i) run whose input i the case holds fixed (= A's run)
};

//! Sample run `run` of `spec` under options.design, with `inputs` = table_inputs() of its table:
//! sample_case(spec, seed, run) for Monte Carlo; for a Saltelli design A's or B's row, or A's
//! row with input i from B's. Throws NumericalError as sample_case() does.
DesignSample design_sample(const CaseSpec& spec, const BatchOptions& options,
                           const std::vector<std::string>& inputs, std::uint64_t run);

} // namespace exosieve
