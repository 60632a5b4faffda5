#pragma once
//! \file inversion.hpp
//! The initial inventory that reproduces a measured present-day isotope ratio.
//!
//! The unknown is S, the total initial inventory [particles] of the scaled species (by default
//! the ratio's numerator and denominator, e.g. D and H): every scaled species starts at
//! N_i(t_start) = S w_i, with the weights w_i = N_i / sum_scaled N_j of the model's own initial
//! inventories, so their proportions (and the initial ratio R0) are held. Everything else of the
//! model stays as given: the other species' inventories, sources and given losses [s^-1], and
//! the upper atmosphere at the start (exobase radius and densities, or the thermosphere's
//! homopause). A larger S therefore means the same initial escape drains a larger reservoir, and
//! the ratio R(t_end) = N_num(t_end) / N_den(t_end) moves less far from R0.
//!
//! The root of g(u) = ln R(t_end; S = e^u) - ln R_target is sought in u = ln S:
//! - the searchable range is [S_nominal / f, S_nominal f] (search_factor f), or given bounds;
//! - bracket search: g at u0 = ln S_nominal (clamped into the range), then at
//!   u0 +- ln(10) 2^k for k = 0, 1, 2, ... (1, 2, 4, 8, ... decades, the last one on each side
//!   at the range's end), up and down in turn, until g changes sign between neighbouring points
//!   of one side. That bracket is the one nearest to the nominal inventory: where several
//!   inventories give the target (a non-monotone ratio), this one is found. A bracket with an
//!   end where the numerator or the denominator falls below depletion_fraction of its start is
//!   only a fallback, used when the search finds no other: where a loss does not follow the
//!   inventory (fixed exobase densities, given losses, energy-limited escape) the species is
//!   held at that level, and the ratio there describes the level, not the escape;
//! - refinement by TOMS 748 (Alefeld, Potra & Shi 1995; Boost.Math) until the bracket is
//!   narrower than `tolerance` in u (relative width on S). The reported solution is the
//!   evaluated end of that bracket with the smaller |g|.
//! When g keeps one sign over the whole range, there is no solution there: the result says so
//! (InversionStatus::NoSolution) with the searched range and the ratio at its ends, and throws
//! nothing. An evolution run that fails (NumericalError) ends the search on its side; if that
//! leaves no bracket, the result is InversionStatus::Failed with the run's message.
//!
//! Monte Carlo: sample j draws the model's uncertain parameters as the batch engine does
//! (sample_case(spec, seed, j)) and the measured ratio from the stream (seed, case key,
//! 2^63 + j), apart from the parameters' streams; so every sample is independent of threads and
//! of the other samples.

#include <cstddef>
#include <cstdint>
#include <functional>
#include <limits>
#include <string>
#include <vector>

#include "exosieve/batch_options.hpp"
#include "exosieve/case_table.hpp"
#include "exosieve/evolution.hpp"

namespace exosieve {

//! A measured isotope ratio at the end of the run (the present day).
struct MeasuredRatio {
    std::string numerator;   //!< species of the numerator, e.g. "D"
    std::string denominator; //!< species of the denominator, e.g. "H"
    //! The ratio N_num / N_den at t_end [1] (> 0); with `relative`, the enrichment
    //! R(t_end) / R(t_start) [1].
    double value = 0.0;
    //! Its uncertainty: standard deviation [1] (Normal, draws truncated to > 0 by drawing
    //! again) or standard deviation of ln(value) [1] (LogNormal, value the median); 0: exact.
    double width = 0.0;
    Distribution distribution = Distribution::Normal; //!< shape of the uncertainty
    bool relative = false; //!< value and width are of the enrichment R(t_end)/R(t_start)

    //! Throw InputError naming the field and value for anything that cannot be measured.
    void validate() const;
    //! "numerator/denominator".
    std::string name() const { return numerator + "/" + denominator; }
};

//! How the initial inventory is scaled and its root sought.
struct InversionOptions {
    //! Species scaled together (their initial proportions held); empty: the numerator and the
    //! denominator. Must hold both.
    std::vector<std::string> scaled;
    //! Searchable range of S: [S_nominal / f, S_nominal f] [1] (finite, > 1).
    double search_factor = 1e10;
    //! Lower bound of S [particles]; 0: S_nominal / search_factor.
    double inventory_min = 0.0;
    //! Upper bound of S [particles]; 0: S_nominal search_factor.
    double inventory_max = 0.0;
    //! Width of the final bracket in ln S [1] (its relative width on S), in (0, 1). The
    //! solution's accuracy is also bounded by the runs' rtol over |d ln R / d ln S|.
    double tolerance = 1e-9;
    //! Evolution runs allowed for one inversion (bracket search and refinement) (>= 2).
    std::size_t max_runs = 200;

    //! Throw InputError naming the option and value for anything that cannot run.
    void validate() const;
};

//! How an inversion ended.
enum class InversionStatus : int {
    Solved = 0,     //!< an inventory reproducing the ratio, within the tolerance
    NoSolution = 1, //!< the ratio does not reach the target anywhere in the searchable range
    Failed = 2,     //!< an evolution run failed where the search needed it (see the message)
    Cancelled = 3,  //!< stopped by a progress hook, or never run
};

//! Name of a status: "solved", "no_solution", "failed", "cancelled".
const char* inversion_status_name(InversionStatus status);

//! Outcome of one inversion. Inventories are NaN unless solved.
struct InversionResult {
    InversionStatus status = InversionStatus::Cancelled; //!< how it ended
    //! Why it is not solved, in words (the target, the range, the ratio at its ends, a failed
    //! run's message); when solved, empty or a warning (a ratio species depleted).
    std::string message;
    double target = std::numeric_limits<double>::quiet_NaN();        //!< R sought at t_end [1]
    double initial_ratio = std::numeric_limits<double>::quiet_NaN(); //!< R0 at t_start [1]
    double ratio = std::numeric_limits<double>::quiet_NaN(); //!< R(t_end) of the solution [1]
    //! S of the solution: total initial inventory of the scaled species [particles].
    double scaled_initial = std::numeric_limits<double>::quiet_NaN();
    //! Their loss by t_end: sum over the scaled species of N_i(t_start) - N_i(t_end)
    //! [particles].
    double scaled_lost = std::numeric_limits<double>::quiet_NaN();
    std::vector<std::string> species;      //!< the model's species
    std::vector<char> scaled;              //!< per species: 1 where scaled
    std::vector<double> initial_inventory; //!< per species: N_i(t_start) [particles]
    std::vector<double> final_inventory;   //!< per species: N_i(t_end) [particles]
    //! The numerator or the denominator fell below depletion_fraction of its start in the
    //! solution's run (a loss that does not follow the inventory then holds it there).
    bool depleted = false;
    //! Solved: the final bracket on S [particles]. Otherwise: the extreme inventories searched.
    double bracket_low = std::numeric_limits<double>::quiet_NaN();
    double bracket_high = std::numeric_limits<double>::quiet_NaN(); //!< see bracket_low
    double ratio_low = std::numeric_limits<double>::quiet_NaN();    //!< R(t_end) at bracket_low
    double ratio_high = std::numeric_limits<double>::quiet_NaN();   //!< R(t_end) at bracket_high
    std::size_t runs = 0;                                           //!< evolution runs made
    //! The planet's radius [m] (e.g. to express water as a global ocean).
    double planet_radius = std::numeric_limits<double>::quiet_NaN();
};

//! The initial inventory of `config` that gives `measured.value` at config.t_end (the width is
//! not used). Throws InputError (before any run) for a bad config, measured ratio or options;
//! every other outcome is in the result. The config's progress hook is passed to every run
//! (returning false cancels: InversionStatus::Cancelled).
InversionResult invert_ratio(const EvolutionConfig& config, const MeasuredRatio& measured,
                             const InversionOptions& options);

//! Samples, seed and threads of a Monte Carlo inversion.
struct InversionSampling {
    std::size_t samples = 0; //!< Monte Carlo samples (0: the nominal inversion only)
    std::uint64_t seed = 0;  //!< seed of the streams
    std::size_t threads = 0; //!< worker threads (0: all hardware threads)
};

//! Hooks of a Monte Carlo inversion, called on the calling thread.
struct InversionHooks {
    //! Called with inversions done and in total (the nominal one and one per sample) on the
    //! schedule below, and once at the end; returning false cancels (the call at the end
    //! cannot). May throw to stop.
    std::function<bool(std::size_t done, std::size_t total)> on_progress;
    //! Milliseconds between progress calls while `progress_every` is 0 [ms].
    unsigned progress_interval_ms = 100;
    //! k > 0: call on_progress when the first k m inversions (in order) are done, with k m,
    //! for m = 1, 2, ...: a schedule set by counts alone. Cancelling at the m-th call keeps
    //! exactly the first k m inversions (the nominal one and k m - 1 samples).
    std::size_t progress_every = 0;
};

//! Nominal and Monte Carlo inversions (S samples, n species; row-major arrays).
struct InversionSamples {
    InversionResult nominal;               //!< the model as given, the measured value as given
    std::vector<std::string> species;      //!< the model's species (n)
    std::size_t samples = 0;               //!< S
    std::vector<double> target;            //!< drawn R sought at t_end [1] [sample]
    std::vector<std::int64_t> status;      //!< InversionStatus [sample]
    std::vector<double> initial_ratio;     //!< R0 of the sample [1] [sample]
    std::vector<double> ratio;             //!< R(t_end) of the solution [1] [sample]
    std::vector<double> scaled_initial;    //!< S [particles] [sample]
    std::vector<double> scaled_lost;       //!< loss of the scaled species [particles] [sample]
    std::vector<double> initial_inventory; //!< N_i(t_start) [particles] [sample x species]
    std::vector<double> final_inventory;   //!< N_i(t_end) [particles] [sample x species]
    std::vector<std::int64_t> depleted;    //!< 1 where a ratio species depleted [sample]
    std::vector<double> bracket_low;       //!< [particles] [sample]
    std::vector<double> bracket_high;      //!< [particles] [sample]
    std::vector<double> ratio_low;         //!< [1] [sample]
    std::vector<double> ratio_high;        //!< [1] [sample]
    std::vector<std::int64_t> runs;        //!< evolution runs [sample]
    std::vector<double> planet_radius;     //!< the sample's planet radius [m] [sample]
    std::vector<std::string> message;      //!< "" or why not solved [sample]
    bool cancelled = false;                //!< stopped by on_progress before the end
};

//! Invert one model: the nominal inversion and `sampling.samples` Monte Carlo ones, in which
//! the measured ratio alone is drawn (the model has no stated uncertainties). A config whose
//! temperature history is not thread-safe runs on one worker. InputError before any run for bad
//! input.
InversionSamples invert_samples(const EvolutionConfig& config, const MeasuredRatio& measured,
                                const InversionOptions& options, const InversionSampling& sampling,
                                const InversionHooks& hooks = {});

//! Invert one case of a case table: the nominal inversion of build_config(spec, batch) and
//! `sampling.samples` Monte Carlo ones, each drawing every stated uncertainty of the case
//! (sample_case(spec, sampling.seed, j)) and the measured ratio. Each run's output is its end
//! alone. A sample whose draws cannot run is reported as failed with the reason. InputError
//! before any run for a bad case (naming its row and column) or bad input.
InversionSamples invert_case(const CaseSpec& spec, const BatchOptions& batch,
                             const MeasuredRatio& measured, const InversionOptions& options,
                             const InversionSampling& sampling, const InversionHooks& hooks = {});

//! Invert row `row` of a case table: the row's own error or the table's column check raises
//! InputError first; `batch.species` empty means every species the table names.
InversionSamples invert_case(const CaseTable& table, std::size_t row, const BatchOptions& batch,
                             const MeasuredRatio& measured, const InversionOptions& options,
                             const InversionSampling& sampling, const InversionHooks& hooks = {});

} // namespace exosieve
