#pragma once
//! \file batch.hpp
//! Many planet cases at once: the rows of a case table (case_table.hpp) run with their samples
//! (case_sampling.hpp) on a pool of threads, and results handed out chunk by chunk in table
//! order so that a sweep of any length streams to disk in constant memory. Every sample's drawn
//! inputs are stored next to its outputs ("sample_input"), in either design. Results do not
//! depend on the number of threads or the chunk size.

#include <cstddef>
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "exosieve/batch_options.hpp"
#include "exosieve/case_table.hpp"

namespace exosieve {

//! Per row: "" when the case can run, else the error naming the row and column. Checks the
//! columns first (throwing for those), then each row's values and its evolution config.
std::vector<std::string> check_table(const CaseTable& table, const BatchOptions& options);

//! Results of one chunk of consecutive cases (S species, T times, N samples; row-major).
//! Entries of species a case does not have, and of times outside its span, are NaN.
struct BatchChunk {
    std::size_t first = 0;                   //!< row of the first case in the table
    std::size_t count = 0;                   //!< cases in the chunk
    std::size_t species = 0;                 //!< S
    std::size_t times = 0;                   //!< T
    std::size_t samples = 0;                 //!< N
    std::vector<std::uint64_t> key;          //!< case key [case]
    std::vector<std::string> name;           //!< case label [case]
    std::vector<std::string> error;          //!< "" or why the nominal run failed [case]
    std::vector<std::int64_t> steps;         //!< accepted steps of the nominal run [case]
    std::vector<double> planet_mass;         //!< [kg] [case]
    std::vector<double> planet_radius;       //!< [m] [case]
    std::vector<double> exobase_radius;      //!< [m] [case]
    std::vector<double> escape_speed;        //!< escape speed at the exobase [m s^-1] [case]
    std::vector<double> t_start;             //!< start age [s] [case]
    std::vector<double> t_end;               //!< end age [s] [case]
    std::vector<double> temperature_start;   //!< exobase temperature at t_start [K] [case]
    std::vector<double> mole_fraction;       //!< bulk x_i [1], 0: absent [case x species]
    std::vector<double> exobase_temperature; //!< [K] [case x time]
    std::vector<double> retained;            //!< N_i(t) / N_i(t_start) [1] [case x time x species]
    std::vector<double> jeans_parameter;     //!< lambda_i(t) [1] [case x time x species]
    std::vector<double> final_retained;      //!< N_i(t_end) / N_i(t_start) [1] [case x species]
    std::vector<double> depletion_time;      //!< age of depletion [s], NaN: none [case x species]
    std::vector<double> efolding_time;       //!< N_i / Q_i at t_start [s] [case x species]
    std::vector<double> escape_rate_start;   //!< thermal Q_i at t_start [s^-1] [case x species]
    //! Given (non-thermal or external) loss L_i at t_start [s^-1], 0: none [case x species]
    std::vector<double> given_loss_start;
    std::vector<double> jeans_start; //!< lambda_i(t_start) [1] [case x species]
    std::vector<double> jeans_end;   //!< lambda_i(t_end) [1] [case x species]
    std::vector<std::int64_t>
        regime_start; //!< Regime of lambda_i(t_start), -1: none [case x species]
    //! Jeans parameter of the bulk (well-mixed) gas at the exobase at t_start: the mean
    //! particle mass of the x_i mixture [1] [case]
    std::vector<double> bulk_jeans_start;
    //! 1 where the case has no energy-limited model (no heating efficiency) and its bulk gas is
    //! hydrodynamic at some time: the well-mixed gas starts at or below the hydrodynamic
    //! threshold, or the densest species at the exobase (the run's bulk regime) reaches it at
    //! any time of the run; its Jeans results then do not describe its loss. 0 otherwise; -1
    //! where the nominal run did not finish [case]
    std::vector<std::int64_t> hydrodynamic_unmodelled;
    //! Stellar age when the envelope is gone [s]; NaN: not stripped, or no envelope [case]
    std::vector<double> stripping_time;
    //! Planet radius at the end [m]: with an envelope, the core and what is left of it [case]
    std::vector<double> planet_radius_end;
    //! Time in each regime of the species' own Jeans parameter [s] (as
    //! EvolutionResult::regime_time) [case x species] each
    std::vector<double> regime_time_jeans, regime_time_enhanced_jeans, regime_time_transition,
        regime_time_hydrodynamic;
    //! Shares of the loss [1]: at the Jeans rate in each regime, while energy-limited loss
    //! acted, to the given losses (EvolutionResult's parts over their sum; 0 where nothing was
    //! lost) [case x species] each
    std::vector<double> loss_share_jeans, loss_share_enhanced_jeans, loss_share_transition,
        loss_share_hydrodynamic, loss_share_energy_limited, loss_share_given;
    std::vector<double> non_jeans_loss_share; //!< 1 - loss_share_jeans [1] [case x species]
    std::vector<double> sample_retained; //!< N_i(t_end)/N_i(t_start) [1] [case x sample x species]
    std::vector<double> sample_depletion_time; //!< [s] [case x sample x species]
    std::vector<std::int64_t> sample_failed;   //!< 1 where the sample run failed [case x sample]
    std::vector<std::string> sample_error;     //!< error of the lowest failed sample [case]
    std::size_t inputs = 0;                    //!< K: uncertain inputs of the table
    //! Value of each input in each sample run [SI unit of the input], NaN where the case lacks
    //! it or its draw failed [case x sample x input]
    std::vector<double> sample_input;
    //! 1 where the case's input is drawn, 0 where it is held at its table value [case x input]
    std::vector<std::int64_t> input_uncertain;

    //! Size every array for `cases` cases, filled with NaN, -1, 0 or "" as documented.
    void reset(std::size_t first_row, std::size_t cases, std::size_t species_count,
               std::size_t time_count, std::size_t sample_count, std::size_t input_count = 0);
};

//! Hooks of run_batch(), all called on the calling thread.
struct BatchHooks {
    //! Receives each finished chunk, in table order; may throw to stop the batch.
    std::function<void(const BatchChunk&)> on_chunk;
    //! Called with evolution runs done and in total (one run per case plus one per sample),
    //! on the schedule set by `progress_every_chunks`, and once at the end; returning false
    //! cancels (the call at the end cannot). May throw to stop.
    std::function<bool(std::size_t runs_done, std::size_t runs_total)> on_progress;
    //! Milliseconds between progress calls while `progress_every_chunks` is 0 [ms].
    unsigned progress_interval_ms = 100;
    //! 0: on_progress about every `progress_interval_ms`, with the runs finished so far.
    //! k > 0: on_progress right after every k-th chunk handed to on_chunk instead, with the
    //! runs of the chunks handed out: a schedule set by counts alone, the same on any machine
    //! and thread count [chunks].
    std::size_t progress_every_chunks = 0;
};

//! What run_batch() did.
struct BatchStatus {
    std::size_t cases_done = 0;     //!< cases handed to on_chunk
    std::size_t cases_failed = 0;   //!< of those, cases whose nominal run failed or was invalid
    std::size_t samples_failed = 0; //!< failed sample runs in those cases
    bool cancelled = false;         //!< stopped by on_progress before the end
};

//! Run rows [begin, end) of `table` on options.threads threads and hand the results to
//! hooks.on_chunk chunk by chunk, in order. Unless options.skip_invalid, every row is checked
//! first and an invalid one raises InputError (listing up to ten) before any run; with it, an
//! invalid row is reported with its error (naming the row and the column) in its chunk. Rows
//! with a preset row error are always reported with it. A run that fails numerically is
//! reported in its chunk and every other run completes.
//! Cancelling (on_progress returns false) stops the workers within one integration step; the
//! chunks handed out before stay handed out (with `progress_every_chunks` = k, cancelling at
//! the m-th call keeps exactly the first k m chunks). An exception from a hook stops the batch
//! and is rethrown after the workers have stopped.
BatchStatus run_batch(const CaseTable& table, std::size_t begin, std::size_t end,
                      const BatchOptions& options, const BatchHooks& hooks);

} // namespace exosieve
