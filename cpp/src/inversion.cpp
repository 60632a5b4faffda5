#include "exosieve/inversion.hpp"

#include <boost/math/tools/toms748_solve.hpp>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <cstdio>
#include <exception>
#include <mutex>
#include <optional>
#include <utility>

#include "exosieve/case_config.hpp"
#include "exosieve/case_sampling.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/random.hpp"
#include "worker_threads.hpp"

namespace exosieve {

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();
constexpr double inf = std::numeric_limits<double>::infinity();
// |ln R - ln R_target| is held below this, so that TOMS 748's interpolation stays finite where
// a ratio over- or underflows (ln R of a finite double is within +-745).
constexpr double g_limit = 1e4;
// The measured ratio of sample j comes from the stream of "sample" 2^63 + j of its case, apart
// from the parameter draws of sample_case() (samples below 2^63).
constexpr std::uint64_t ratio_stream = 1ULL << 63;

// Thrown out of a run that a progress hook stopped.
struct RunCancelled {};
// Thrown when an inversion has used its max_runs.
struct RunBudgetSpent {};

std::string g_text(double value) {
    char buffer[32];
    std::snprintf(buffer, sizeof buffer, "%.6g", value);
    return buffer;
}

std::size_t index_of(const std::vector<std::string>& names, const std::string& name,
                     const char* what) {
    for (std::size_t i = 0; i < names.size(); ++i)
        if (names[i] == name)
            return i;
    std::string listed;
    for (const std::string& n : names)
        listed += (listed.empty() ? "" : ", ") + n;
    throw InputError(std::string(what) + " '" + name + "' is not a species of the model (" +
                     listed + ")");
}

// One inversion of one model: the runs at trial inventories, the bracket search, TOMS 748.
class RatioSearch {
  public:
    RatioSearch(const EvolutionConfig& config, const MeasuredRatio& measured,
                const InversionOptions& options)
        : run_(config), options_(options) {
        measured.validate();
        options.validate();
        config.validate();
        for (const Species& s : config.species)
            names_.push_back(s.name);
        num_ = index_of(names_, measured.numerator, "ratio numerator");
        den_ = index_of(names_, measured.denominator, "ratio denominator");
        if (num_ == den_)
            throw InputError("ratio: numerator and denominator are both '" + measured.numerator +
                             "'");
        const std::size_t n = names_.size();
        scaled_.assign(n, 0);
        if (options.scaled.empty()) {
            scaled_[num_] = scaled_[den_] = 1;
        } else {
            for (const std::string& name : options.scaled) {
                const std::size_t i = index_of(names_, name, "scaled species");
                if (scaled_[i])
                    throw InputError("scaled species: '" + name + "' is given twice");
                scaled_[i] = 1;
            }
            if (!scaled_[num_] || !scaled_[den_])
                throw InputError("scaled species must include the ratio's numerator '" +
                                 measured.numerator + "' and denominator '" + measured.denominator +
                                 "'");
        }
        base_ = config.initial_inventory;
        base_atol_ = config.atol;
        nominal_ = 0.0;
        for (std::size_t i = 0; i < n; ++i)
            if (scaled_[i])
                nominal_ += base_[i];
        if (!(nominal_ > 0.0) || !std::isfinite(nominal_))
            throw InputError("the scaled species' total initial inventory must be finite and > "
                             "0, got " +
                             format_value(nominal_));
        for (std::size_t i = 0; i < n; ++i)
            if (scaled_[i])
                scaled_names_ += (scaled_names_.empty() ? "" : ", ") + names_[i];
        initial_ratio_ = base_[num_] / base_[den_];
        target_ = measured.relative ? measured.value * initial_ratio_ : measured.value;
        if (!(target_ > 0.0) || !std::isfinite(target_))
            throw InputError("ratio " + measured.name() + ": the target " + format_value(target_) +
                             " is not finite and > 0");
        log_target_ = std::log(target_);
        const double lo =
            options.inventory_min > 0.0 ? options.inventory_min : nominal_ / options.search_factor;
        const double hi =
            options.inventory_max > 0.0 ? options.inventory_max : nominal_ * options.search_factor;
        if (!(lo < hi) || !std::isfinite(hi))
            throw InputError("the searchable range of the total initial inventory [" +
                             format_value(lo) + ", " + format_value(hi) +
                             "] particles is empty or not finite (inventory_min, inventory_max, "
                             "search_factor)");
        u_lo_ = std::log(lo);
        u_hi_ = std::log(hi);
        ratio_name_ = measured.name();
        // Runs report the end alone, with this ratio and no rates or configuration.
        run_.t_eval = {config.t_end};
        run_.isotope_ratios = {{measured.numerator, measured.denominator}};
        run_.record_config = false;
        run_.record_rates = false;
    }

    InversionResult run() {
        InversionResult r;
        r.species = names_;
        r.scaled = scaled_;
        r.target = target_;
        r.initial_ratio = initial_ratio_;
        r.planet_radius = run_.planet.radius();
        r.initial_inventory.assign(names_.size(), nan);
        r.final_inventory.assign(names_.size(), nan);
        try {
            search(r);
        } catch (const RunCancelled&) {
            r.status = InversionStatus::Cancelled;
            r.message = "cancelled";
        }
        r.runs = runs_;
        return r;
    }

  private:
    struct Point {
        double u = nan, g = nan, ratio = nan;
        std::vector<double> final_inventory;
        bool depleted = false;
    };

    // The run at S = e^u. Throws NumericalError for a failed run, RunCancelled when stopped.
    Point evaluate(double u) {
        if (runs_ >= options_.max_runs)
            throw RunBudgetSpent{};
        const double factor = std::exp(u) / nominal_; // the scale of every scaled inventory
        for (std::size_t i = 0; i < base_.size(); ++i) {
            run_.initial_inventory[i] = scaled_[i] ? base_[i] * factor : base_[i]; // as solved()
            if (!base_atol_.empty())
                run_.atol[i] = scaled_[i] ? base_atol_[i] * factor : base_atol_[i];
        }
        ++runs_;
        EvolutionResult e;
        try {
            e = evolve(run_);
        } catch (const InputError& err) {
            // Only the inventories changed since the nominal config passed its checks.
            throw NumericalError(err.what());
        }
        if (!e.completed)
            throw RunCancelled{};
        Point p;
        p.u = u;
        p.ratio = e.isotope_ratio.back();
        if (std::isnan(p.ratio) || p.ratio < 0.0)
            throw NumericalError("the ratio " + ratio_name_ + " at t_end is " +
                                 format_value(p.ratio));
        const double g = p.ratio > 0.0 ? std::log(p.ratio) - log_target_ : -inf;
        p.g = std::clamp(g, -g_limit, g_limit);
        const std::size_t n = e.species_count(), last = e.time_count() - 1;
        p.final_inventory.assign(e.inventory.begin() + static_cast<std::ptrdiff_t>(last * n),
                                 e.inventory.end());
        p.depleted = !std::isnan(e.depletion_time[num_]) || !std::isnan(e.depletion_time[den_]);
        return p;
    }

    static int sign(double g) { return g > 0.0 ? 1 : (g < 0.0 ? -1 : 0); }

    void solved(InversionResult& r, const Point& a, const Point& b) {
        const Point& best = std::abs(a.g) <= std::abs(b.g) ? a : b;
        const double S = std::exp(best.u);
        r.status = InversionStatus::Solved;
        r.scaled_initial = S; // the sum of the scaled inventories, up to their rounding
        r.scaled_lost = 0.0;
        for (std::size_t i = 0; i < names_.size(); ++i) {
            r.initial_inventory[i] = scaled_[i] ? base_[i] * (S / nominal_) : base_[i];
            r.final_inventory[i] = best.final_inventory[i];
            if (scaled_[i])
                r.scaled_lost += r.initial_inventory[i] - r.final_inventory[i];
        }
        r.ratio = best.ratio;
        r.depleted = best.depleted;
        const Point& low = a.u <= b.u ? a : b;
        const Point& high = a.u <= b.u ? b : a;
        r.bracket_low = std::exp(low.u);
        r.bracket_high = std::exp(high.u);
        r.ratio_low = low.ratio;
        r.ratio_high = high.ratio;
        if (best.depleted)
            r.message = "the solution depletes " + names_[num_] + " or " + names_[den_] +
                        " (below depletion_fraction of its start by t_end): where its loss "
                        "does not follow the inventory it is held there, and the ratio then "
                        "describes that level";
    }

    void search(InversionResult& r) {
        const double u0 = std::clamp(std::log(nominal_), u_lo_, u_hi_);
        Point start;
        try {
            start = evaluate(u0);
        } catch (const NumericalError& e) {
            r.status = InversionStatus::Failed;
            r.message = "the run at the nominal total initial inventory " +
                        format_value(std::exp(u0)) + " of " + scaled_names_ +
                        " failed: " + e.what();
            return;
        }
        if (start.g == 0.0)
            return solved(r, start, start);
        // Each side: its last point, whether it can go on, and why it stopped early.
        struct Side {
            Point last;
            bool open = true;
            std::string failure;
        } up{start, u0 < u_hi_, {}}, down{start, u0 > u_lo_, {}};
        // A bracket with an end that depletes a ratio species is kept only as a fallback: where
        // a loss does not follow the inventory the species is held at its depletion level
        // there, and the ratio describes that level (a root of no physical meaning).
        std::optional<std::pair<Point, Point>> clean, fallback;
        double step = std::log(10.0);
        bool spent = false;
        while (!clean && !spent && (up.open || down.open)) {
            for (int direction : {1, -1}) {
                Side& side = direction > 0 ? up : down;
                if (!side.open || clean)
                    continue;
                const double u =
                    direction > 0 ? std::min(u0 + step, u_hi_) : std::max(u0 - step, u_lo_);
                try {
                    Point p = evaluate(u);
                    if (sign(p.g) != sign(side.last.g)) {
                        if (!p.depleted && !side.last.depleted) {
                            clean = std::make_pair(side.last, p);
                        } else {
                            if (!fallback) // before the bisection, which may spend the budget
                                fallback = std::make_pair(side.last, p);
                            if (p.depleted != side.last.depleted)
                                clean = undepleted_part(side.last, p);
                        }
                    }
                    side.last = std::move(p);
                    side.open = direction > 0 ? u < u_hi_ : u > u_lo_;
                } catch (const NumericalError& e) {
                    side.open = false;
                    side.failure = "the run at " + format_value(std::exp(u)) +
                                   " particles failed: " + e.what();
                } catch (const RunBudgetSpent&) {
                    spent = true;
                    break;
                }
            }
            step *= 2.0;
        }
        const auto& bracket = clean ? clean : fallback;
        if (!bracket && spent) {
            unsolved(r, down.last, up.last, "", "");
            r.status = InversionStatus::Failed;
            r.message = "no bracket within max_runs = " + std::to_string(options_.max_runs) +
                        " evolution runs: " + r.message;
            return;
        }
        if (!bracket) {
            unsolved(r, down.last, up.last, down.failure, up.failure);
            return;
        }
        refine(r, bracket->first, bracket->second);
    }

    // A sign change between a point that depletes a ratio species and one that does not may
    // come from the depleted part alone. Bisection on depletion towards the boundary (to 1e-6
    // in ln S) looks for a sign change among the points that deplete nothing; none: nullopt.
    std::optional<std::pair<Point, Point>> undepleted_part(const Point& x, const Point& y) {
        Point kept = x.depleted ? y : x;
        double depleted_u = x.depleted ? x.u : y.u;
        try {
            while (std::abs(kept.u - depleted_u) > 1e-6) {
                Point p = evaluate(0.5 * (kept.u + depleted_u));
                if (p.depleted) {
                    depleted_u = p.u;
                } else if (sign(p.g) != sign(kept.g)) {
                    return std::make_pair(std::move(p), kept);
                } else {
                    kept = std::move(p);
                }
            }
        } catch (const NumericalError&) {
            // the bracket with the depleted end stays the fallback
        }
        return std::nullopt;
    }

    void unsolved(InversionResult& r, const Point& low, const Point& high,
                  const std::string& low_failure, const std::string& high_failure) {
        r.bracket_low = std::exp(low.u);
        r.bracket_high = std::exp(high.u);
        r.ratio_low = low.ratio;
        r.ratio_high = high.ratio;
        const std::string range = "for total initial inventories of " + scaled_names_ + " from " +
                                  g_text(r.bracket_low) + " to " + g_text(r.bracket_high) +
                                  " particles";
        const std::string ends = "the ratio " + ratio_name_ + " at t_end is " + g_text(low.ratio) +
                                 " at the low end and " + g_text(high.ratio) + " at the high end";
        if (low_failure.empty() && high_failure.empty()) {
            r.status = InversionStatus::NoSolution;
            r.message = "no solution: " + ends + " " + range + ", never " + g_text(target_) + " (" +
                        (low.g > 0.0 ? "above" : "below") + " it at each of the " +
                        std::to_string(runs_) + " inventories tried)";
            return;
        }
        r.status = InversionStatus::Failed;
        r.message = "no bracket: " + ends + " " + range + ", where the search had to stop: " +
                    (low_failure.empty() ? "" : "below, " + low_failure) +
                    (low_failure.empty() || high_failure.empty() ? "" : "; ") +
                    (high_failure.empty() ? "" : "above, " + high_failure);
    }

    void refine(InversionResult& r, Point a, Point b) {
        if (a.u > b.u)
            std::swap(a, b);
        if (a.g == 0.0 || b.g == 0.0)
            return solved(r, a, b.g == 0.0 ? b : a);
        // TOMS 748 sees g alone; the points it evaluated are kept, so that the final bracket's
        // ends come with their runs.
        std::vector<Point> seen{a, b};
        auto g = [&](double u) {
            Point p = evaluate(u);
            const double value = p.g;
            seen.push_back(std::move(p));
            return value;
        };
        const double tolerance = options_.tolerance;
        auto narrow = [tolerance](double x, double y) { return std::abs(y - x) <= tolerance; };
        std::uintmax_t iterations = options_.max_runs;
        double lo = a.u, hi = b.u;
        std::string failure;
        try {
            const auto found =
                boost::math::tools::toms748_solve(g, a.u, b.u, a.g, b.g, narrow, iterations);
            lo = found.first;
            hi = found.second;
        } catch (const RunBudgetSpent&) {
            narrowest(seen, lo, hi); // a root is still bracketed, only more widely
        } catch (const std::exception& e) {
            failure = e.what();
        }
        if (!failure.empty()) {
            // The narrowest sign change seen is the bracket reported.
            narrowest(seen, lo, hi);
            r.status = InversionStatus::Failed;
            r.bracket_low = std::exp(lo);
            r.bracket_high = std::exp(hi);
            r.ratio_low = point_at(seen, lo).ratio;
            r.ratio_high = point_at(seen, hi).ratio;
            r.message = "refining the bracket [" + g_text(r.bracket_low) + ", " +
                        g_text(r.bracket_high) + "] particles of " + scaled_names_ +
                        ", a run failed: " + failure;
            return;
        }
        const Point& pa = point_at(seen, lo);
        const Point& pb = point_at(seen, hi);
        solved(r, pa, pb);
        if (!(hi - lo <= tolerance) && r.message.empty())
            r.message = "the bracket is wider than the tolerance: max_runs = " +
                        std::to_string(options_.max_runs) + " evolution runs were spent";
    }

    // The evaluated point at u (TOMS 748 returns evaluated ends, or a root it hit exactly).
    static const Point& point_at(const std::vector<Point>& seen, double u) {
        const Point* best = &seen.front();
        for (const Point& p : seen)
            if (std::abs(p.u - u) < std::abs(best->u - u))
                best = &p;
        return *best;
    }

    // The narrowest pair of neighbouring evaluated points with a sign change.
    static void narrowest(std::vector<Point> seen, double& lo, double& hi) {
        std::sort(seen.begin(), seen.end(),
                  [](const Point& x, const Point& y) { return x.u < y.u; });
        double width = inf;
        for (std::size_t k = 1; k < seen.size(); ++k)
            if (sign(seen[k - 1].g) != sign(seen[k].g) && seen[k].u - seen[k - 1].u < width) {
                width = seen[k].u - seen[k - 1].u;
                lo = seen[k - 1].u;
                hi = seen[k].u;
            }
    }

    EvolutionConfig run_;
    InversionOptions options_;
    std::vector<std::string> names_;
    std::string scaled_names_, ratio_name_;
    std::size_t num_ = 0, den_ = 0;
    std::vector<char> scaled_;
    std::vector<double> base_, base_atol_;
    double nominal_ = 0.0, initial_ratio_ = nan, target_ = nan, log_target_ = nan;
    double u_lo_ = 0.0, u_hi_ = 0.0;
    std::size_t runs_ = 0;
};

// The measured ratio of sample j: the value, or a draw around it.
double draw_measured(const MeasuredRatio& m, std::uint64_t seed, std::uint64_t key,
                     std::uint64_t sample) {
    if (m.width == 0.0)
        return m.value;
    CounterRng rng(seed, key, ratio_stream + sample);
    for (int k = 0; k < 1000; ++k) {
        const double z = rng.normal();
        const double v = m.distribution == Distribution::Normal ? m.value + m.width * z
                                                                : m.value * std::exp(m.width * z);
        if (v > 0.0 && std::isfinite(v))
            return v;
    }
    throw NumericalError("sample " + std::to_string(sample) + ": no measured " + m.name() +
                         " > 0 in 1000 draws around " + format_value(m.value) + " with width " +
                         format_value(m.width));
}

// Runs make(j) for j = 0 (nominal) .. samples on a pool and collects the results in order.
// make(j, cancel) returns the inversion of task j; an exception becomes a failed task.
template <class Make>
InversionSamples run_pool(std::size_t samples, std::size_t threads, const InversionHooks& hooks,
                          const std::vector<std::string>& species, Make make) {
    const std::size_t total = samples + 1;
    std::vector<InversionResult> results(total);
    std::vector<double> targets(total, nan);
    std::vector<char> done(total, 0);
    std::mutex m;
    std::condition_variable cv;
    std::size_t next = 0, prefix = 0, finished = 0;
    std::atomic<bool> cancel{false};
    auto worker = [&]() {
        for (;;) {
            std::size_t j;
            {
                std::lock_guard<std::mutex> lock(m);
                if (cancel.load() || next >= total)
                    return;
                j = next++;
            }
            InversionResult r;
            double target = nan;
            try {
                r = make(j, cancel, target);
            } catch (const std::exception& e) {
                // A sample whose draws cannot run: reported, the others go on.
                r = InversionResult{};
                r.status = InversionStatus::Failed;
                r.message = e.what();
            } catch (...) {
                // Reported too: the calling thread waits for every task to be done.
                r = InversionResult{};
                r.status = InversionStatus::Failed;
                r.message = "unknown error";
            }
            std::lock_guard<std::mutex> lock(m);
            results[j] = std::move(r);
            targets[j] = target;
            done[j] = 1;
            ++finished;
            while (prefix < total && done[prefix])
                ++prefix;
            cv.notify_all();
        }
    };
    threads = detail::thread_count(threads, total);
    bool cancelled = false;
    std::size_t kept = total;
    {
        detail::WorkerThreads pool(
            threads, [&](std::size_t) { worker(); }, [&] { cancel.store(true); });
        try {
            const std::size_t every = hooks.progress_every;
            if (every > 0) {
                for (std::size_t mark = std::min(every, total);;
                     mark = std::min(mark + every, total)) {
                    {
                        std::unique_lock<std::mutex> lock(m);
                        cv.wait(lock, [&] { return prefix >= mark; });
                    }
                    if (mark == total)
                        break;
                    if (hooks.on_progress && !hooks.on_progress(mark, total)) {
                        cancelled = true;
                        kept = mark;
                        break;
                    }
                }
            } else {
                const auto interval = std::chrono::milliseconds(hooks.progress_interval_ms);
                for (;;) {
                    std::size_t count;
                    {
                        std::unique_lock<std::mutex> lock(m);
                        if (cv.wait_for(lock, interval, [&] { return finished == total; }))
                            break;
                        count = finished;
                    }
                    if (hooks.on_progress && !hooks.on_progress(count, total)) {
                        cancelled = true;
                        break;
                    }
                }
            }
        } catch (...) {
            cancel.store(true); // the pool's destructor joins the workers, which now stop
            throw;
        }
        cancel.store(true);
        pool.join();
    }
    if (!cancelled && hooks.on_progress)
        hooks.on_progress(total, total);

    InversionSamples out;
    out.species = species;
    out.samples = samples;
    out.cancelled = cancelled;
    const std::size_t n = species.size();
    for (std::size_t j = 0; j < total; ++j)
        if (!done[j] || j >= kept) {
            results[j] = InversionResult{};
            results[j].message = "cancelled";
            targets[j] = nan;
        }
    out.nominal = results[0];
    out.target.assign(samples, nan);
    out.status.assign(samples, static_cast<std::int64_t>(InversionStatus::Cancelled));
    for (auto* v :
         {&out.initial_ratio, &out.ratio, &out.scaled_initial, &out.scaled_lost, &out.bracket_low,
          &out.bracket_high, &out.ratio_low, &out.ratio_high, &out.planet_radius})
        v->assign(samples, nan);
    out.initial_inventory.assign(samples * n, nan);
    out.final_inventory.assign(samples * n, nan);
    out.depleted.assign(samples, 0);
    out.runs.assign(samples, 0);
    out.message.assign(samples, "");
    for (std::size_t k = 0; k < samples; ++k) {
        const InversionResult& r = results[k + 1];
        out.target[k] = targets[k + 1];
        out.status[k] = static_cast<std::int64_t>(r.status);
        out.initial_ratio[k] = r.initial_ratio;
        out.ratio[k] = r.ratio;
        out.scaled_initial[k] = r.scaled_initial;
        out.scaled_lost[k] = r.scaled_lost;
        out.bracket_low[k] = r.bracket_low;
        out.bracket_high[k] = r.bracket_high;
        out.ratio_low[k] = r.ratio_low;
        out.ratio_high[k] = r.ratio_high;
        out.depleted[k] = r.depleted ? 1 : 0;
        out.runs[k] = static_cast<std::int64_t>(r.runs);
        out.planet_radius[k] = r.planet_radius;
        out.message[k] = r.status == InversionStatus::Solved ? "" : r.message;
        if (r.initial_inventory.size() == n)
            for (std::size_t i = 0; i < n; ++i) {
                out.initial_inventory[k * n + i] = r.initial_inventory[i];
                out.final_inventory[k * n + i] = r.final_inventory[i];
            }
    }
    return out;
}

} // namespace

void MeasuredRatio::validate() const {
    if (numerator.empty() || denominator.empty())
        throw InputError("ratio: give both species, e.g. 'D/H', got '" + name() + "'");
    const char* what = relative ? "measured enrichment" : "measured ratio";
    require_positive(what, value);
    require_non_negative(relative ? "measured enrichment width" : "measured ratio width", width);
}

void InversionOptions::validate() const {
    if (!std::isfinite(search_factor) || !(search_factor > 1.0))
        throw InputError("search_factor must be finite and > 1, got " +
                         format_value(search_factor));
    require_non_negative("inventory_min", inventory_min);
    require_non_negative("inventory_max", inventory_max);
    if (inventory_min > 0.0 && inventory_max > 0.0 && !(inventory_min < inventory_max))
        throw InputError("inventory_min " + format_value(inventory_min) +
                         " must be below inventory_max " + format_value(inventory_max));
    if (!(tolerance > 0.0 && tolerance < 1.0))
        throw InputError("tolerance must be in (0, 1), got " + format_value(tolerance));
    if (max_runs < 2)
        throw InputError("max_runs must be >= 2, got " + std::to_string(max_runs));
}

const char* inversion_status_name(InversionStatus status) {
    switch (status) {
    case InversionStatus::Solved:
        return "solved";
    case InversionStatus::NoSolution:
        return "no_solution";
    case InversionStatus::Failed:
        return "failed";
    case InversionStatus::Cancelled:
        return "cancelled";
    }
    return "unknown";
}

InversionResult invert_ratio(const EvolutionConfig& config, const MeasuredRatio& measured,
                             const InversionOptions& options) {
    RatioSearch search(config, measured, options);
    return search.run();
}

InversionSamples invert_samples(const EvolutionConfig& config, const MeasuredRatio& measured,
                                const InversionOptions& options, const InversionSampling& sampling,
                                const InversionHooks& hooks) {
    RatioSearch check(config, measured, options); // InputError here, before any run
    std::vector<std::string> names;
    for (const Species& s : config.species)
        names.push_back(s.name);
    const std::size_t threads = config.temperature.thread_safe() ? sampling.threads : 1;
    return run_pool(sampling.samples, threads, hooks, names,
                    [&](std::size_t j, const std::atomic<bool>& cancel, double& target) {
                        MeasuredRatio m = measured;
                        if (j > 0)
                            m.value = draw_measured(measured, sampling.seed, 0, j - 1);
                        if (!m.relative)
                            target = m.value;
                        EvolutionConfig c = config;
                        c.progress = [&cancel](double) { return !cancel.load(); };
                        InversionResult r = RatioSearch(c, m, options).run();
                        target = r.target;
                        return r;
                    });
}

InversionSamples invert_case(const CaseSpec& spec, const BatchOptions& batch,
                             const MeasuredRatio& measured, const InversionOptions& options,
                             const InversionSampling& sampling, const InversionHooks& hooks) {
    if (!spec.error.empty())
        throw InputError(spec.error);
    EvolutionConfig nominal = [&] {
        try {
            return build_config(spec, batch);
        } catch (const InputError& e) {
            throw InputError(spec.label + " (case '" + spec.name + "'), " + e.what());
        }
    }();
    try {
        RatioSearch check(nominal, measured, options); // InputError here, before any run
    } catch (const InputError& e) {
        throw InputError(spec.label + " (case '" + spec.name + "'), " + e.what());
    }
    std::vector<std::string> names;
    for (const Species& s : spec.species)
        names.push_back(s.name);
    return run_pool(sampling.samples, sampling.threads, hooks, names,
                    [&](std::size_t j, const std::atomic<bool>& cancel, double& target) {
                        MeasuredRatio m = measured;
                        if (j > 0)
                            m.value = draw_measured(measured, sampling.seed, spec.key, j - 1);
                        if (!m.relative)
                            target = m.value;
                        EvolutionConfig c =
                            j == 0 ? nominal
                                   : build_config(sample_case(spec, sampling.seed, j - 1), batch);
                        c.progress = [&cancel](double) { return !cancel.load(); };
                        InversionResult r = RatioSearch(c, m, options).run();
                        target = r.target;
                        return r;
                    });
}

InversionSamples invert_case(const CaseTable& table, std::size_t row, const BatchOptions& batch,
                             const MeasuredRatio& measured, const InversionOptions& options,
                             const InversionSampling& sampling, const InversionHooks& hooks) {
    if (row < table.row_errors.size() && !table.row_errors[row].empty())
        throw InputError(table.row_errors[row]);
    check_table_columns(table);
    const CaseSpec spec = case_from_table(table, row);
    BatchOptions b = batch;
    if (b.species.empty())
        b.species = table_species(table);
    return invert_case(spec, b, measured, options, sampling, hooks);
}

} // namespace exosieve
