#include "exosieve/batch.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <exception>
#include <limits>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "case_slots.hpp"
#include "exosieve/case_config.hpp"
#include "exosieve/case_sampling.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "table_plan.hpp"
#include "worker_threads.hpp"

namespace exosieve {

using detail::none;
using detail::plan_table;
using detail::read_case;
using detail::TablePlan;

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// The output column (index in o.species) of each of the case's species; InputError for a
// species the batch does not have.
std::vector<std::size_t> output_columns(const CaseSpec& spec, const BatchOptions& o) {
    std::vector<std::size_t> columns;
    for (const Species& sp : spec.species) {
        const auto at = std::find(o.species.begin(), o.species.end(), sp.name);
        if (at == o.species.end())
            throw InputError("species '" + sp.name + "' is not among the batch's species");
        columns.push_back(static_cast<std::size_t>(at - o.species.begin()));
    }
    return columns;
}

// InputError for a sample design the table cannot have.
void check_design(const CaseTable& table, const BatchOptions& o) {
    if (o.design != SampleDesign::Saltelli)
        return;
    if (table_inputs(table).empty())
        throw InputError("design: a Saltelli design needs uncertain inputs, and the case table "
                         "has no '_sigma', '_lnsigma' or '_sigma_upper' column");
    if (o.samples == 0)
        throw InputError("samples: a Saltelli design needs base rows (> 0), got 0");
}

// Errors of rows [begin, end) ("" for a row that can run), checked on up to o.threads threads.
// `o.species` must be set.
std::vector<std::string> check_rows(const CaseTable& table, const BatchOptions& o,
                                    std::size_t begin, std::size_t end) {
    std::vector<std::string> errors(end - begin);
    const std::size_t threads = detail::thread_count(o.threads, (end - begin) / 256 + 1);
    // One plan per thread (it holds scratch space), made here where a failure can still throw.
    std::vector<TablePlan> plans(threads, plan_table(table));
    auto check = [&](std::size_t first, std::size_t stride) {
        TablePlan& plan = plans[first];
        for (std::size_t i = begin + first; i < end; i += stride) {
            std::string& error = errors[i - begin];
            if (!table.row_errors.empty() && !table.row_errors[i].empty()) {
                error = table.row_errors[i];
                continue;
            }
            try {
                const CaseSpec s = read_case(table, plan, i);
                try {
                    output_columns(s, o);
                    build_config(s, o).validate();
                } catch (const InputError& e) {
                    throw InputError(s.label + " (case '" + s.name + "'), " + e.what());
                }
            } catch (const std::exception& e) {
                error = e.what();
            }
        }
    };
    detail::run_on_threads(threads, [&](std::size_t first) { check(first, threads); });
    return errors;
}

} // namespace

std::vector<std::string> check_table(const CaseTable& table, const BatchOptions& options) {
    check_table_columns(table);
    BatchOptions o = options;
    if (o.species.empty())
        o.species = table_species(table);
    o.validate();
    check_design(table, o);
    return check_rows(table, o, 0, table.rows());
}

// --- chunks -----------------------------------------------------------------------------------

void BatchChunk::reset(std::size_t first_row, std::size_t cases, std::size_t species_count,
                       std::size_t time_count, std::size_t sample_count, std::size_t input_count) {
    first = first_row;
    count = cases;
    species = species_count;
    times = time_count;
    samples = sample_count;
    const std::size_t cs = cases * species_count, cts = cs * time_count;
    const std::size_t css = cs * sample_count;
    key.assign(cases, 0);
    name.assign(cases, std::string());
    error.assign(cases, std::string());
    steps.assign(cases, 0);
    for (auto* v : {&planet_mass, &planet_radius, &exobase_radius, &escape_speed, &t_start, &t_end,
                    &temperature_start})
        v->assign(cases, nan);
    exobase_temperature.assign(cases * time_count, nan);
    bulk_jeans_start.assign(cases, nan);
    hydrodynamic_unmodelled.assign(cases, -1);
    stripping_time.assign(cases, nan);
    planet_radius_end.assign(cases, nan);
    retained.assign(cts, nan);
    jeans_parameter.assign(cts, nan);
    for (auto* v : {&mole_fraction, &final_retained, &depletion_time, &efolding_time,
                    &escape_rate_start, &given_loss_start, &jeans_start, &jeans_end})
        v->assign(cs, nan);
    for (auto* v : {&regime_time_jeans, &regime_time_enhanced_jeans, &regime_time_transition,
                    &regime_time_hydrodynamic, &loss_share_jeans, &loss_share_enhanced_jeans,
                    &loss_share_transition, &loss_share_hydrodynamic, &loss_share_energy_limited,
                    &loss_share_given, &non_jeans_loss_share})
        v->assign(cs, nan);
    regime_start.assign(cs, -1);
    sample_retained.assign(css, nan);
    sample_depletion_time.assign(css, nan);
    sample_failed.assign(cases * sample_count, 0);
    sample_error.assign(cases, std::string());
    inputs = input_count;
    sample_input.assign(cases * sample_count * input_count, nan);
    input_uncertain.assign(cases * input_count, 0);
}

namespace {

// One evolution run of case `c` of a chunk: the nominal run (sample < 0) or a Monte Carlo one.
// Returns false when cancelled; throws for a failed run.
// `inputs` are the table's uncertain inputs, `input_slot` their slots in the case (none: absent).
bool run_case(const CaseSpec& spec, long long sample, const BatchOptions& o,
              const std::vector<std::size_t>& column, const std::vector<std::string>& inputs,
              const std::vector<std::size_t>& input_slot, std::size_t c, BatchChunk& out,
              const std::atomic<bool>& cancel) {
    std::optional<EvolutionConfig> built;
    if (sample < 0) {
        built.emplace(build_config(spec, o));
    } else {
        const DesignSample drawn =
            design_sample(spec, o, inputs, static_cast<std::uint64_t>(sample));
        // The inputs are stored before the run, so that a failed run's inputs are kept too.
        const std::size_t at = (c * out.samples + static_cast<std::size_t>(sample)) * out.inputs;
        for (std::size_t k = 0; k < out.inputs; ++k)
            if (input_slot[k] != none)
                out.sample_input[at + k] = drawn.spec.values[input_slot[k]];
        if (!drawn.run)
            return true; // its outputs are those of A's row: left NaN, not run again
        built.emplace(build_config(drawn.spec, o));
    }
    EvolutionConfig& config = *built;
    config.progress = [&cancel](double) { return !cancel.load(std::memory_order_relaxed); };
    config.record_rates = false; // only the first output's rates are read (e-folding times)
    if (sample >= 0)             // a Monte Carlo run reports its end only: no outputs between
        config.t_eval = {config.t_start, config.t_end};
    const EvolutionResult r = evolve(config);
    if (!r.completed)
        return false;
    const std::size_t n = r.species_count(), S = out.species, T = out.times;
    const std::size_t last = r.time_count() - 1;
    if (sample >= 0) {
        const std::size_t base = (c * out.samples + static_cast<std::size_t>(sample)) * S;
        for (std::size_t i = 0; i < n; ++i) {
            out.sample_retained[base + column[i]] =
                r.inventory[last * n + i] / config.initial_inventory[i];
            out.sample_depletion_time[base + column[i]] = r.depletion_time[i];
        }
        return true;
    }
    const Planet& p = config.planet;
    const double r_exo = r.exobase_radius[0];
    out.steps[c] = static_cast<std::int64_t>(r.steps);
    out.planet_mass[c] = p.mass();
    out.planet_radius[c] = p.radius();
    out.exobase_radius[c] = r_exo;
    out.escape_speed[c] = std::sqrt(2.0 * constants::G * p.mass() / r_exo);
    out.t_start[c] = config.t_start;
    out.t_end[c] = config.t_end;
    out.temperature_start[c] = r.exobase_temperature[0];
    // Bulk gas at the start: lambda is linear in the particle mass, so the Jeans parameter of
    // the well-mixed mean mass is the mole-weighted mean of the species' values.
    double x_sum = 0.0, lambda_bulk = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        x_sum += spec.mole_fraction(i);
        lambda_bulk += spec.mole_fraction(i) * r.jeans_parameter[i];
    }
    lambda_bulk /= x_sum;
    out.bulk_jeans_start[c] = lambda_bulk;
    // Hydrodynamic at any time: the well-mixed gas at the start, or the run's bulk regime.
    const bool hydrodynamic_bulk =
        lambda_bulk <= config.thresholds.hydrodynamic ||
        r.bulk_regime_time[static_cast<std::size_t>(Regime::Hydrodynamic)] > 0.0 ||
        r.regime.front() == static_cast<int>(Regime::Hydrodynamic);
    out.hydrodynamic_unmodelled[c] = hydrodynamic_bulk && !config.hydrodynamic.has_value() ? 1 : 0;
    out.stripping_time[c] = r.stripping_time;
    out.planet_radius_end[c] = r.has_envelope() ? r.planet_radius[last] : p.radius();
    // Rows of r at the batch's output times (r holds t_start, the inner times, t_end).
    std::size_t k = 0;
    for (std::size_t j = 0; j < T; ++j) {
        const double t = o.times[j];
        if (t < config.t_start || t > config.t_end)
            continue;
        while (k < last && r.time[k] < t)
            ++k;
        if (r.time[k] != t)
            continue;
        out.exobase_temperature[c * T + j] = r.exobase_temperature[k];
        for (std::size_t i = 0; i < n; ++i) {
            const std::size_t at = (c * T + j) * S + column[i];
            out.retained[at] = r.inventory[k * n + i] / config.initial_inventory[i];
            out.jeans_parameter[at] = r.jeans_parameter[k * n + i];
        }
    }
    for (std::size_t i = 0; i < n; ++i) {
        const std::size_t at = c * S + column[i];
        out.final_retained[at] = r.inventory[last * n + i] / config.initial_inventory[i];
        out.depletion_time[at] = r.depletion_time[i];
        out.efolding_time[at] = r.inventory[i] / r.escape_rate[i];
        out.escape_rate_start[at] = r.escape_rate[i];
        out.given_loss_start[at] = r.given_loss_rate[i];
        out.jeans_start[at] = r.jeans_parameter[i];
        out.jeans_end[at] = r.jeans_parameter[last * n + i];
        out.regime_start[at] =
            static_cast<std::int64_t>(classify_regime(r.jeans_parameter[i], config.thresholds));
        const double parts[6] = {r.regime_loss[i * 4],     r.regime_loss[i * 4 + 1],
                                 r.regime_loss[i * 4 + 2], r.regime_loss[i * 4 + 3],
                                 r.energy_limited_loss[i], r.given_loss[i]};
        const double total = parts[0] + parts[1] + parts[2] + parts[3] + parts[4] + parts[5];
        std::vector<double>* times[4] = {&out.regime_time_jeans, &out.regime_time_enhanced_jeans,
                                         &out.regime_time_transition,
                                         &out.regime_time_hydrodynamic};
        std::vector<double>* shares[6] = {
            &out.loss_share_jeans,          &out.loss_share_enhanced_jeans,
            &out.loss_share_transition,     &out.loss_share_hydrodynamic,
            &out.loss_share_energy_limited, &out.loss_share_given};
        for (std::size_t k = 0; k < 4; ++k)
            (*times[k])[at] = r.regime_time[i * 4 + k];
        for (std::size_t k = 0; k < 6; ++k)
            (*shares[k])[at] = total > 0.0 ? parts[k] / total : 0.0;
        out.non_jeans_loss_share[at] = r.non_jeans_loss_share[i];
    }
    return true;
}

// Slot of parameter `name` in spec.values (also a per-species one of a present species), or
// none.
std::size_t value_slot(const CaseSpec& spec, const std::string& name) {
    const auto& params = case_parameters();
    for (std::size_t k = 0; k < params.size(); ++k)
        if (params[k].name == name)
            return k;
    const std::size_t n = spec.species.size();
    std::string sp;
    const std::size_t k = find_species_parameter(name, &sp);
    if (k < species_parameters().size())
        for (std::size_t i = 0; i < n; ++i)
            if (spec.species[i].name == sp)
                return params.size() + k * n + i;
    return none;
}

// A chunk being computed: its results and the cases' specs.
struct Slot {
    BatchChunk out;
    std::vector<CaseSpec> specs;                       // read by the first worker that needs one
    std::unique_ptr<std::once_flag[]> read;            // one per case
    std::vector<std::vector<std::size_t>> columns;     // case species -> output species
    std::vector<std::vector<std::size_t>> input_slots; // table input -> slot in the case
    std::vector<std::size_t> lowest_failed;            // lowest failed sample per case
    std::size_t remaining = 0;                         // runs not finished
};

} // namespace

BatchStatus run_batch(const CaseTable& table, std::size_t begin, std::size_t end,
                      const BatchOptions& options, const BatchHooks& hooks) {
    if (begin > end || end > table.rows())
        throw InputError("run_batch: rows [" + std::to_string(begin) + ", " + std::to_string(end) +
                         ") are not inside the table's " + std::to_string(table.rows()) + " rows");
    BatchOptions o = options;
    if (o.species.empty())
        o.species = table_species(table);
    check_table_columns(table);
    o.validate();

    // Unless invalid rows are to be reported, every row is checked before any run.
    if (!o.skip_invalid) {
        const std::vector<std::string> errors = check_rows(table, o, begin, end);
        std::string listed;
        std::size_t bad = 0;
        for (std::size_t i = begin; i < end; ++i) {
            const std::string& e = errors[i - begin];
            if (e.empty() || (!table.row_errors.empty() && !table.row_errors[i].empty()))
                continue;
            if (bad < 10)
                listed += "\n  " + e;
            ++bad;
        }
        if (bad)
            throw InputError("case table: " + std::to_string(bad) + " invalid row" +
                             (bad > 1 ? "s" : "") + listed + (bad > 10 ? "\n  ..." : ""));
    }

    check_design(table, o);
    const std::vector<std::string> inputs = table_inputs(table);
    const std::size_t K = inputs.size();
    const std::size_t S = o.species.size(), T = o.times.size(), N = sample_runs(o, K);
    const std::size_t per_case = 1 + N;
    const std::size_t cases = end - begin;
    const std::size_t chunk = o.chunk_size;
    const std::size_t chunks = (cases + chunk - 1) / chunk;
    const std::size_t total_runs = cases * per_case;
    const std::size_t window = std::min(o.chunks_in_flight, std::max<std::size_t>(chunks, 1));
    const std::size_t threads =
        detail::thread_count(o.threads, std::max<std::size_t>(total_runs, 1));

    std::vector<Slot> slots(window);
    auto chunk_end_run = [&](std::size_t c) { return std::min((c + 1) * chunk, cases) * per_case; };
    // Opening a chunk only sizes its arrays; its cases are read by the workers (read_slot_case), so
    // that the calling thread stays free for the hooks.
    auto open_chunk = [&](std::size_t c) {
        Slot& s = slots[c % window];
        const std::size_t first = c * chunk, count = std::min(chunk, cases - first);
        s.out.reset(begin + first, count, S, T, N, N > 0 ? K : 0);
        s.specs.assign(count, CaseSpec{});
        s.read.reset(new std::once_flag[count]);
        s.columns.assign(count, {});
        s.input_slots.assign(count, std::vector<std::size_t>(K, none));
        s.lowest_failed.assign(count, std::numeric_limits<std::size_t>::max());
        s.remaining = count * per_case;
        for (std::size_t j = 0; j < count; ++j) {
            s.out.key[j] = table.first_key + begin + first + j;
            s.out.name[j] = table.names[begin + first + j];
        }
    };
    auto read_slot_case = [&](Slot& s, std::size_t j, TablePlan& plan) {
        const std::size_t row = s.out.first + j;
        CaseSpec& spec = s.specs[j];
        if (!table.row_errors.empty() && !table.row_errors[row].empty()) {
            spec.error = table.row_errors[row];
            return;
        }
        try {
            spec = read_case(table, plan, row);
        } catch (const InputError& e) {
            spec = CaseSpec{};
            spec.error = e.what();
            return;
        }
        try {
            s.columns[j] = output_columns(spec, o);
        } catch (const InputError& e) {
            spec.error = spec.label + " (case '" + spec.name + "'), " + e.what();
            return;
        }
        if (N > 0)
            for (std::size_t k = 0; k < K; ++k) {
                s.input_slots[j][k] = value_slot(spec, inputs[k]);
                for (const Uncertainty& u : spec.uncertainties)
                    if (u.parameter == inputs[k])
                        s.out.input_uncertain[j * K + k] = 1;
            }
        std::fill_n(s.out.mole_fraction.begin() + static_cast<std::ptrdiff_t>(j * S), S, 0.0);
        for (std::size_t i = 0; i < spec.species.size(); ++i)
            s.out.mole_fraction[j * S + s.columns[j][i]] = spec.mole_fraction(i);
    };

    std::mutex m;
    std::condition_variable work_cv, done_cv;
    std::size_t next_run = 0, window_end = 0;
    std::atomic<bool> cancel{false};
    std::atomic<std::size_t> runs_done{0};
    for (std::size_t c = 0; c < window && c < chunks; ++c) {
        open_chunk(c);
        window_end = chunk_end_run(c);
    }

    // One plan per worker: it holds scratch space. Made here, where a failure can still throw.
    std::vector<TablePlan> plans(threads, plan_table(table));
    auto worker = [&](TablePlan& plan) {
        for (;;) {
            std::size_t g;
            {
                std::unique_lock<std::mutex> lock(m);
                work_cv.wait(lock, [&] {
                    return cancel.load() || next_run >= total_runs || next_run < window_end;
                });
                if (cancel.load() || next_run >= total_runs)
                    return;
                g = next_run++;
            }
            const std::size_t case_index = g / per_case;
            const long long sample = static_cast<long long>(g % per_case) - 1;
            const std::size_t c = case_index / chunk;
            Slot& s = slots[c % window];
            const std::size_t j = case_index - c * chunk;
            std::string failure;
            bool finished = true;
            try {
                std::call_once(s.read[j], read_slot_case, std::ref(s), j, std::ref(plan));
                const CaseSpec& spec = s.specs[j];
                if (!spec.error.empty()) {
                    failure = spec.error;
                } else {
                    try {
                        finished = run_case(spec, sample, o, s.columns[j], inputs, s.input_slots[j],
                                            j, s.out, cancel);
                    } catch (const InputError& e) {
                        // As check_table() words it: where, then what.
                        failure = spec.label + " (case '" + spec.name + "'), " + e.what();
                    }
                }
            } catch (const std::exception& e) {
                failure = e.what();
            } catch (...) {
                failure = "unknown error";
            }
            if (!finished)
                return; // cancelled
            std::lock_guard<std::mutex> lock(m);
            if (!failure.empty()) {
                if (sample < 0) {
                    s.out.error[j] = failure;
                } else {
                    const auto k = static_cast<std::size_t>(sample);
                    s.out.sample_failed[j * N + k] = 1;
                    if (k < s.lowest_failed[j]) {
                        s.lowest_failed[j] = k;
                        s.out.sample_error[j] = "sample " + std::to_string(k) + ": " + failure;
                    }
                }
            }
            runs_done.fetch_add(1);
            if (--s.remaining == 0)
                done_cv.notify_all();
        }
    };

    // Wakes the workers to return (those in a run stop within a step through its progress hook).
    auto cancel_all = [&]() {
        {
            std::lock_guard<std::mutex> lock(m);
            cancel.store(true);
        }
        work_cv.notify_all();
    };
    BatchStatus status;
    {
        detail::WorkerThreads pool(
            threads, [&](std::size_t k) { worker(plans[k]); }, cancel_all);
        try {
            // Progress by time (about every `interval`, with the runs finished so far) or by count
            // (after every `every`-th chunk handed out, with the runs of the chunks handed out).
            const std::size_t every = hooks.progress_every_chunks;
            auto last_progress = std::chrono::steady_clock::now();
            const auto interval = std::chrono::milliseconds(hooks.progress_interval_ms);
            auto report = [&](std::size_t done) {
                last_progress = std::chrono::steady_clock::now();
                if (hooks.on_progress && !hooks.on_progress(done, total_runs)) {
                    status.cancelled = true;
                    return false;
                }
                return true;
            };
            std::size_t runs_handed_out = 0;
            for (std::size_t c = 0; c < chunks && !status.cancelled; ++c) {
                Slot& s = slots[c % window];
                if (every > 0) {
                    std::unique_lock<std::mutex> lock(m);
                    done_cv.wait(lock, [&] { return s.remaining == 0; });
                } else {
                    for (;;) {
                        {
                            std::unique_lock<std::mutex> lock(m);
                            if (done_cv.wait_until(lock, last_progress + interval,
                                                   [&] { return s.remaining == 0; }))
                                break;
                        }
                        if (!report(runs_done.load()))
                            break;
                    }
                    if (status.cancelled)
                        break;
                }
                // A finished chunk: hand it out, then reuse its slot for the chunk `window` ahead.
                for (std::size_t j = 0; j < s.out.count; ++j) {
                    if (!s.out.error[j].empty())
                        ++status.cases_failed;
                    for (std::size_t k = 0; k < N; ++k)
                        status.samples_failed += s.out.sample_failed[j * N + k];
                }
                if (hooks.on_chunk)
                    hooks.on_chunk(s.out);
                status.cases_done += s.out.count;
                runs_handed_out += s.out.count * per_case;
                if (c + window < chunks) {
                    open_chunk(c + window);
                    {
                        std::lock_guard<std::mutex> lock(m);
                        window_end = chunk_end_run(c + window);
                    }
                    work_cv.notify_all();
                }
                // The last chunk is reported by the call at the end.
                if (c + 1 == chunks)
                    break;
                if (every > 0) {
                    if ((c + 1) % every == 0)
                        report(runs_handed_out);
                } else if (std::chrono::steady_clock::now() - last_progress >= interval) {
                    report(runs_done.load());
                }
            }
            if (!status.cancelled && hooks.on_progress)
                hooks.on_progress(every > 0 ? runs_handed_out : runs_done.load(), total_runs);
        } catch (...) {
            cancel_all(); // the pool's destructor joins the workers
            throw;
        }
        cancel_all();
        pool.join();
    }
    return status;
}

} // namespace exosieve
