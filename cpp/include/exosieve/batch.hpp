#pragma once
//! \file batch.hpp
//! Many planet cases at once: a case table turned into evolution runs, Monte Carlo samples over
//! the stated uncertainties, a pool of threads, and results handed out chunk by chunk in table
//! order so that a sweep of any length streams to disk in constant memory.
//!
//! A case is a set of named parameters in SI units (the quantities of a case-table row, e.g.
//! "planet_mass" [kg]) plus its species. build_config() turns it into an EvolutionConfig.
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
//! of every output can be estimated from the stored runs. Every sample's drawn inputs are
//! stored next to its outputs ("sample_input"), in either design.

#include <array>
#include <cstddef>
#include <cstdint>
#include <functional>
#include <map>
#include <string>
#include <vector>

#include "exosieve/evolution.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/random.hpp"
#include "exosieve/species.hpp"

namespace exosieve {

//! Shape of a parameter's uncertainty.
enum class Distribution : int {
    Normal = 0,    //!< width is the standard deviation, in the parameter's SI unit
    LogNormal = 1, //!< width is the standard deviation of ln X [1]; the value is the median
    //! width is the upper and width_lower the lower width, in the parameter's SI unit; the
    //! value is the mode
    SplitNormal = 2,
};

//! How the Monte Carlo samples of a case are drawn.
enum class SampleDesign : int {
    MonteCarlo = 0, //!< `samples` independent draws: sample j from the stream (seed, key, j)
    //! The Saltelli design over the table's K uncertain inputs with N = `samples` base rows:
    //! N (K + 2) runs laid out as SaltelliDesign (A, B, A_B^(1) ... A_B^(K)); row r of A is
    //! drawn from the stream (seed, key, 2r), of B from (seed, key, 2r + 1).
    Saltelli = 1,
};

//! Parameters a case may carry: name, SI unit, and whether an uncertainty may be given.
struct CaseParameter {
    std::string name;       //!< e.g. "planet_mass"
    std::string unit;       //!< SI unit, e.g. "kg"
    std::string meaning;    //!< one line of documentation
    bool required = false;  //!< every case needs it (per-species: "x_" columns)
    bool uncertain = true;  //!< a _sigma, _lnsigma or _sigma_upper/_sigma_lower pair may be given
    double lower = 0.0;     //!< smallest allowed value
    bool lower_open = true; //!< lower bound excluded
    double upper = 0.0;     //!< largest allowed value (inf: none)
};

//! The uncertainty of one parameter of a case.
struct Uncertainty {
    std::string parameter;                            //!< parameter name, e.g. "planet_mass"
    Distribution distribution = Distribution::Normal; //!< shape
    double width = 0.0;       //!< sigma [SI], sigma of ln X [1], or the upper width [SI] (>= 0)
    double width_lower = 0.0; //!< split normal: the width below the value [SI] (>= 0)
    std::size_t slot = 0;     //!< index of the value in CaseSpec::values
    const CaseParameter* range = nullptr; //!< the parameter's allowed range
};

//! One planet case: SI parameter values by slot, its species and their uncertainties.
//! `values` holds case_parameters() in order (slots 0 .. P-1), then for each per-species
//! parameter k of species_parameters() (k = 0: mole fraction, 1: initial inventory, ...) its
//! value for each entry i of `species` (slot P + k n + i); NaN where not given. Slots instead
//! of names: a sweep reads, samples and builds every case without a string lookup.
struct CaseSpec {
    std::string name;             //!< case label
    std::string label;            //!< where the case comes from, for messages (e.g. "line 7")
    std::uint64_t key = 0;        //!< index of the case in its full table; seeds its samples
    std::vector<Species> species; //!< species present (mole fraction > 0), in table order
    std::vector<double> values;   //!< parameter values [SI] by slot (see above); NaN: not given
    DensityScaling scaling = DensityScaling::Inventory; //!< how exobase densities follow N_i
    //! Binary diffusion parameters of a thermosphere (text column "diffusion_source").
    DiffusionMethod diffusion = DiffusionMethod::measured_first;
    bool diffusion_given = false; //!< the row names a diffusion source
    //! A prescribed exobase takes the bulk fractions x_i as its composition (text column
    //! "exobase_composition" 'bulk'), instead of exobase_x_<species>.
    bool exobase_composition_bulk = false;
    std::string escaping_species; //!< energy-limited: the light escaping species ("": lightest)
    //! Energy-limited: when it replaces Jeans escape (text column "energy_limited_activation").
    HydrodynamicActivation activation = HydrodynamicActivation::Hydrodynamic;
    bool activation_given = false;          //!< the row names an activation
    std::vector<Uncertainty> uncertainties; //!< uncertain parameters, in a fixed order
    std::string error; //!< non-empty: the case is invalid and is reported, not run

    //! Bulk (well-mixed) mole fraction [1] of species `i` of `species`.
    double mole_fraction(std::size_t i) const;
    //! Initial inventory [particles] of species `i` of `species`; NaN when not given.
    double inventory(std::size_t i) const;
    //! Value [SI] of per-species parameter `k` (index in species_parameters()) of species `i`
    //! of `species`; NaN when not given.
    double species_value(std::size_t k, std::size_t i) const;
    //! Value [SI] of parameter `name` (also a per-species one, e.g. "x_He", of a present
    //! species); NaN when not given.
    double value(const std::string& name) const;
    //! Every given parameter [SI] by name.
    std::map<std::string, double> named_values() const;
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

//! The parameters of a case, in documentation order; the per-species ones are in
//! species_parameters().
const std::vector<CaseParameter>& case_parameters();

//! Per-species parameters, in slot order: a column "<prefix><species>" for a species of the
//! table, the name here being "<prefix><species>": "x_<species>" (bulk, well-mixed mole fraction
//! [1]: the shares of a total inventory and the homopause composition of a thermosphere),
//! "inventory_<species>" (initial inventory [particles]), "given_loss_<species>" (a loss given
//! beyond thermal escape [s^-1]: constant, or L_ref of an XUV power law),
//! "given_loss_exponent_<species>" (that law's exponent p [1]), "exobase_x_<species>" (mole
//! fraction at a prescribed exobase [1], never an inventory share),
//! "drag_diffusion_<species>" and "drag_diffusion_exponent_<species>" (A [m^-1 s^-1] and s [1]
//! of the binary diffusion law b = A (T / 1 K)^s of a species dragged by energy-limited escape).
//! Every one but "x_" needs the species' "x_" column.
const std::vector<CaseParameter>& species_parameters();

//! A text column of a case table: its name and what it holds.
struct CaseTextColumn {
    std::string name;    //!< e.g. "density_scaling"
    std::string meaning; //!< one line of documentation, with the values it takes
};

//! The text columns a case table may carry, "case" first.
const std::vector<CaseTextColumn>& case_text_columns();

//! Index in species_parameters() of the per-species column `column` (the longest prefix that
//! matches, so "given_loss_exponent_H" is an exponent), its species going to `species`;
//! species_parameters().size() when `column` is not per species.
std::size_t find_species_parameter(const std::string& column, std::string* species = nullptr);

//! A heading under which the parameters are listed (`exosieve columns`): those of
//! case_parameters() from `first` up to the next group's first, then the per-species
//! parameters named in `species` (e.g. "given_loss_<species>").
struct CaseParameterGroup {
    std::string heading;              //!< what the parameters describe
    std::string first;                //!< the group's first parameter in case_parameters()
    std::vector<std::string> species; //!< per-species parameters listed with the group
};

//! The groups of the parameters, in documentation order.
const std::vector<CaseParameterGroup>& case_parameter_groups();

//! Largest |sum - 1| of a case's mole fractions "x_<species>" (and of its exobase fractions
//! "exobase_x_<species>", when given) [1]. A row whose fractions sum further from one is refused
//! (InputError naming the row and the sum; with skip_invalid the row is reported instead).
constexpr double mole_fraction_sum_tolerance = 1e-3;

//! The allowed range of parameter `name` (also a per-species one, e.g. "x_He"); nullptr when
//! unknown.
const CaseParameter* find_case_parameter(const std::string& name);

//! A case table in SI: numeric columns by parameter name (NaN: not given for that row), text
//! columns, one label per row for messages. Column "<name>_sigma" holds a normal standard
//! deviation [SI], "<name>_lnsigma" a log-normal width [1], and the pair "<name>_sigma_upper",
//! "<name>_sigma_lower" the widths above and below the value of a split normal [SI].
struct CaseTable {
    std::vector<std::string> names;      //!< case labels, one per row
    std::vector<std::string> row_labels; //!< e.g. "line 7" or "row 3"; empty: "row <i+1>"
    std::vector<std::string> row_errors; //!< empty, or per row: a parse error ("" if none)
    std::uint64_t first_key = 0;         //!< key of row 0 (its index in the full table)
    std::vector<std::pair<std::string, std::vector<double>>> columns;   //!< name -> SI values
    std::vector<std::pair<std::string, std::vector<std::string>>> text; //!< name -> text
    //! Numeric column name -> the unit its values were given in and that unit's SI value
    //! (e.g. "M_earth", 5.97e24 kg), so that messages show a bad value as given; without an
    //! entry a column's values are shown in SI.
    std::map<std::string, std::pair<std::string, double>> given_units;

    //! Number of rows.
    std::size_t rows() const { return names.size(); }
    //! Label of row `i` for messages.
    std::string row_label(std::size_t i) const;
};

//! Throw InputError for a table whose columns cannot be read at all (unknown or duplicate
//! column, sigma without its value column, columns of unequal length, no species).
void check_table_columns(const CaseTable& table);

//! The case in row `row` of `table`. Throws InputError naming the row and the column for a
//! value that is missing or out of range (the spec's `error` is not used).
CaseSpec case_from_table(const CaseTable& table, std::size_t row);

//! Per row: "" when the case can run, else the error naming the row and column. Checks the
//! columns first (throwing for those), then each row's values and its evolution config.
std::vector<std::string> check_table(const CaseTable& table, const BatchOptions& options);

//! The evolution config of a case (parameters as given; no sampling). Throws InputError naming
//! the parameter for missing or out-of-range values. The upper atmosphere is either a
//! PrescribedExobase (exobase_altitude, exobase_density) or, when homopause_altitude or
//! homopause_density is given, a ThermosphereExobase built as evolve() builds it from a
//! Thermosphere: x_i the homopause fractions, isothermal or (homopause_temperature,
//! bates_shape) Bates, diffusion_limited (default 1) and diffusion_source; giving both kinds
//! is refused. An envelope (core_mass, envelope_fraction, instead of planet_mass and
//! planet_radius) becomes EvolutionConfig::envelope, the planet at the start being the core
//! and its envelope at the start age. Exobase densities and shares of a total
//! inventory both use the mole fractions divided by their sum (a sample's drawn fractions are
//! renormalised this way).
//! heating_efficiency switches on energy-limited loss (HydrodynamicOptions, the Roche-lobe
//! factor with a star), with the XUV absorbed at the radius of optical depth one when
//! xuv_absorption_cross_section is given (XuvAbsorption: xuv_absorption_base_density,
//! xuv_absorption_temperature or the exobase temperature, xuv_absorption_molecular_mass or the
//! bulk gas's mean, xuv_absorption_chord) and capped by the recombination-limited rate when
//! recombination_limit is 1 (RecombinationLimit, its defaults or the recombination_ columns).
//! given_loss_<species> gives that species a GivenLoss: constant, or with
//! given_loss_exponent_<species> the XUV power law L_ref (F_xuv/given_loss_reference_flux)^p;
//! species without one get GivenLoss() (none), and a row with none leaves given_losses empty.
EvolutionConfig build_config(const CaseSpec& spec, const BatchOptions& options);

//! Sample `sample` of `spec`: each uncertain parameter drawn in the order of
//! spec.uncertainties from the stream (seed, spec.key, sample). Throws NumericalError when a
//! truncated normal (or split normal) finds no allowed value in 1000 draws.
CaseSpec sample_case(const CaseSpec& spec, std::uint64_t seed, std::uint64_t sample);

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

//! Species of a table in column order ("x_<species>" columns).
std::vector<std::string> table_species(const CaseTable& table);

//! Uncertain inputs of a table: the parameters with a "_sigma", "_lnsigma" or split-normal
//! ("_sigma_upper", "_sigma_lower") column, in the order of their first such column (e.g.
//! "planet_mass", "x_He"). A row without a width for one of them holds it fixed.
std::vector<std::string> table_inputs(const CaseTable& table);

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
