#pragma once
//! \file sensitivity.hpp
//! Variance-based sensitivity analysis: which uncertain input drives the variance of an output.
//!
//! For independent inputs X_1 .. X_K and an output Y = f(X), the first-order index of input i
//! is S_i = Var(E[Y | X_i]) / Var(Y), the share of the variance that X_i causes alone, and the
//! total index ST_i = E[Var(Y | X_~i)] / Var(Y), its share with all its interactions (Sobol'
//! 1993; Homma & Saltelli 1996). S_i <= ST_i; sum S_i = 1 for an additive f.
//!
//! The Saltelli design: two independent N x K sample matrices A and B, and for each input i
//! the matrix A_B^(i), which is A with column i taken from B. The N (K + 2) runs are laid out
//! as the N rows of A, then the N rows of B, then the rows of A_B^(1), ..., A_B^(K). Every run's
//! inputs are a draw from the joint input distribution, so the runs also serve as plain Monte
//! Carlo samples (correlated between blocks, unbiased in each).
//!
//! Estimators (Saltelli et al. 2010, Comput. Phys. Commun. 181, 259, Table 2), with the outputs
//! first centred on the mean of f(A) and f(B) (Sobol' & Levitan 1999), as scipy.stats does:
//! - V    = (1/2N) sum_j (f(A)_j^2 + f(B)_j^2)                        (variance of A and B)
//! - S_i  = (1/N) sum_j f(B)_j (f(A_B^(i))_j - f(A)_j) / V           (Saltelli 2010, (b))
//! - ST_i = (1/2N) sum_j (f(A)_j - f(A_B^(i))_j)^2 / V               (Jansen 1999, (f))
//!
//! Confidence intervals: bootstrap percentile intervals (Efron 1979; Archer, Saltelli & Sobol'
//! 1997) over the N base rows: a replicate draws N rows with replacement and takes the row of
//! A, of B and of every A_B^(i) together, which keeps the design's pairing. Replicates come from
//! CounterRng streams (seed, stream, replicate), so the intervals are the same on any machine.

#include <cstddef>
#include <cstdint>
#include <vector>

namespace exosieve {

//! Layout of a Saltelli design with `base` rows of A and B and `inputs` inputs.
struct SaltelliDesign {
    std::size_t base = 0;   //!< N: rows of A, of B and of each A_B^(i)
    std::size_t inputs = 0; //!< K: uncertain inputs

    //! Runs of the design: N (K + 2).
    std::size_t runs() const { return base * (inputs + 2); }
    //! Block of run `run`: 0 for A, 1 for B, 2 + i for A_B^(i).
    std::size_t block(std::size_t run) const { return run / base; }
    //! Row of run `run` within its block, in [0, N).
    std::size_t row(std::size_t run) const { return run % base; }
    //! True when input `input` of run `run` takes its value from B's row (else from A's).
    bool from_b(std::size_t run, std::size_t input) const {
        const std::size_t b = block(run);
        return b == 1 || b == input + 2;
    }
    //! Throw InputError for N = 0 or K = 0, naming the field.
    void validate() const;
};

//! How sobol_indices() forms its confidence intervals.
struct SobolOptions {
    std::size_t resamples = 1000; //!< bootstrap replicates (0: no intervals, bounds NaN)
    double confidence = 0.95;     //!< two-sided level of the intervals, in (0, 1) [1]
    std::uint64_t seed = 0;       //!< seed of the bootstrap streams
    //! Spread below which the output counts as constant [output unit] (>= 0): with a standard
    //! deviation sqrt(V) not above it, the indices are NaN, since differences of outputs
    //! computed to a tolerance (an integration's rtol) would only share out its noise.
    double resolution = 0.0;

    //! Throw InputError naming the option and its value for anything that cannot be used.
    void validate() const;
};

//! First-order and total Sobol' indices of one output, with bootstrap intervals [1].
//! Entries are NaN for an input whose A_B^(i) block holds no finite output (an input that was
//! not uncertain, or whose runs all failed), and all of them when fewer than 2 rows are usable
//! or the output does not vary (sqrt(V) <= SobolOptions::resolution).
struct SobolIndices {
    std::size_t rows_used = 0; //!< base rows whose A, B and used A_B^(i) outputs are all finite
    double mean = 0.0;         //!< mean of f over the used rows of A and B [output unit]
    double variance = 0.0;     //!< V: variance of f over the used rows of A and B [unit^2]
    std::vector<double> first_order;      //!< S_i [1], one per input
    std::vector<double> total;            //!< ST_i [1]
    std::vector<double> first_order_low;  //!< lower bound of S_i's interval [1]
    std::vector<double> first_order_high; //!< upper bound of S_i's interval [1]
    std::vector<double> total_low;        //!< lower bound of ST_i's interval [1]
    std::vector<double> total_high;       //!< upper bound of ST_i's interval [1]
};

//! Sobol' indices from the N (K + 2) outputs of a Saltelli design, in the design's layout
//! (A, B, A_B^(1), ..., A_B^(K); NaN: a failed or skipped run). A base row with a non-finite
//! output in A, B or any input's block that has a finite output is left out of every estimate.
SobolIndices sobol_indices(const double* outputs, const SaltelliDesign& design,
                           const SobolOptions& options);

//! sobol_indices() of `count` outputs stored one after another (each design.runs() long),
//! on up to `threads` threads (0: all hardware threads); the same results as one at a time.
std::vector<SobolIndices> sobol_indices_many(const double* outputs, std::size_t count,
                                             const SaltelliDesign& design,
                                             const SobolOptions& options, std::size_t threads = 1);

} // namespace exosieve
