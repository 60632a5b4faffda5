#pragma once
//! \file batch_options.hpp
//! What a batch asks of every case: output species and times, the defaults of the per-case
//! solver columns, the samples and their design, and how the work is scheduled.

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "exosieve/hydrodynamic.hpp"

namespace exosieve {

//! How the Monte Carlo samples of a case are drawn.
enum class SampleDesign : int {
    MonteCarlo = 0, //!< `samples` independent draws: sample j from the stream (seed, key, j)
    //! The Saltelli design over the table's K uncertain inputs with N = `samples` base rows:
    //! N (K + 2) runs laid out as SaltelliDesign (A, B, A_B^(1) ... A_B^(K)); row r of A is
    //! drawn from the stream (seed, key, 2r), of B from (seed, key, 2r + 1).
    Saltelli = 1,
};

//! What the batch asks of every case.
struct BatchOptions {
    std::vector<std::string> species; //!< species of the output (the union of the cases')
    std::vector<double> times;        //!< output stellar ages [s], strictly increasing
    double t_start = 0.0;           //!< start age [s] for cases without age_start (> 0 with a star)
    double t_end = 0.0;             //!< end age [s] for cases without age_end or star_age
    double rtol = 1e-6;             //!< relative tolerance for cases without an rtol column [1]
    std::size_t max_steps = 100000; //!< step budget for cases without a max_steps column
    double depletion_fraction = 1e-3; //!< a species is depleted below this share [1]
    RegimeThresholds thresholds;      //!< regime thresholds of the Jeans parameter [1]
    std::size_t samples = 0; //!< Monte Carlo samples per case, or base rows N of a Saltelli design
    SampleDesign design = SampleDesign::MonteCarlo; //!< how the samples are drawn
    std::uint64_t seed = 0;                         //!< seed of the Monte Carlo streams
    std::size_t threads = 0;                        //!< worker threads (0: all hardware threads)
    std::size_t chunk_size = 256;     //!< cases per chunk handed to the chunk callback (> 0)
    std::size_t chunks_in_flight = 2; //!< chunks computed ahead of the callback (>= 1)
    //! Report invalid rows with their error in their chunk instead of checking every row first
    //! and raising InputError before any run.
    bool skip_invalid = false;

    //! Throw InputError naming the option and its value for anything that cannot run.
    void validate() const;
};

} // namespace exosieve
