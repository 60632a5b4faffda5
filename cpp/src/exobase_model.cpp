#include "exosieve/exobase_model.hpp"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <limits>

#include "exosieve/errors.hpp"
#include "json_text.hpp"

namespace exosieve {

using detail::Json;
using detail::json_text;

TimeTable::TimeTable(std::vector<double> times, std::vector<double> values, const std::string& what)
    : times_(std::move(times)), values_(std::move(values)) {
    if (times_.empty() || times_.size() != values_.size())
        throw InputError(what + ": times and values must be non-empty and of equal length, got " +
                         std::to_string(times_.size()) + " and " + std::to_string(values_.size()));
    for (std::size_t i = 0; i < times_.size(); ++i) {
        if (!std::isfinite(times_[i]))
            throw InputError(what + ": times[" + std::to_string(i) + "] must be finite, got " +
                             format_value(times_[i]));
        if (!std::isfinite(values_[i]))
            throw InputError(what + ": values[" + std::to_string(i) + "] must be finite, got " +
                             format_value(values_[i]));
        if (i > 0 && !(times_[i] > times_[i - 1]))
            throw InputError(what + ": times must be strictly increasing, got times[" +
                             std::to_string(i) + "] = " + format_value(times_[i]) +
                             " after times[" + std::to_string(i - 1) +
                             "] = " + format_value(times_[i - 1]));
    }
}

double TimeTable::operator()(double t) const {
    if (std::isnan(t))
        return t; // no interval holds NaN: a search would run past the end
    if (t <= times_.front())
        return values_.front();
    if (t >= times_.back())
        return values_.back();
    const std::size_t hi = std::upper_bound(times_.begin(), times_.end(), t) - times_.begin();
    const std::size_t lo = hi - 1;
    const double w = (t - times_[lo]) / (times_[hi] - times_[lo]);
    return values_[lo] + w * (values_[hi] - values_[lo]);
}

ExobaseTemperature ExobaseTemperature::constant(double temperature) {
    require_positive("exobase temperature", temperature);
    ExobaseTemperature h;
    h.kind_ = Kind::Constant;
    h.constant_ = temperature;
    return h;
}

ExobaseTemperature ExobaseTemperature::table(std::vector<double> times,
                                             std::vector<double> temperatures) {
    for (std::size_t i = 0; i < temperatures.size(); ++i)
        if (!std::isfinite(temperatures[i]) || !(temperatures[i] > 0.0))
            throw InputError("exobase temperature table: temperatures[" + std::to_string(i) +
                             "] must be finite and > 0, got " + format_value(temperatures[i]));
    ExobaseTemperature h;
    h.kind_ = Kind::Table;
    h.table_ = TimeTable(std::move(times), std::move(temperatures), "exobase temperature table");
    return h;
}

ExobaseTemperature ExobaseTemperature::xuv_power_law(double reference_temperature,
                                                     double reference_flux, double exponent,
                                                     double minimum, double maximum) {
    require_positive("reference_temperature", reference_temperature);
    require_positive("reference_flux", reference_flux);
    require_finite("exponent", exponent);
    require_positive("minimum temperature", minimum);
    require_positive("maximum temperature", maximum);
    if (!(minimum <= maximum))
        throw InputError("minimum temperature must not exceed maximum temperature, got " +
                         format_value(minimum) + " > " + format_value(maximum));
    ExobaseTemperature h;
    h.kind_ = Kind::XuvPowerLaw;
    h.t_ref_ = reference_temperature;
    h.f_ref_ = reference_flux;
    h.log_f_ref_ = std::log(reference_flux);
    h.log_t_ref_ = std::log(reference_temperature);
    h.gamma_ = exponent;
    h.t_min_ = minimum;
    h.t_max_ = maximum;
    return h;
}

ExobaseTemperature ExobaseTemperature::callable(std::function<double(double)> function,
                                                std::string description) {
    if (!function)
        throw InputError("exobase temperature callable is empty");
    ExobaseTemperature h;
    h.kind_ = Kind::Callable;
    h.function_ = std::move(function);
    h.description_ = std::move(description);
    return h;
}

double ExobaseTemperature::operator()(double t, double xuv_flux) const {
    switch (kind_) {
    case Kind::Constant:
        return constant_;
    case Kind::Table:
        return table_(t);
    case Kind::XuvPowerLaw:
        return at_log_flux(t, xuv_flux > 0.0 ? std::log(xuv_flux)
                                             : -std::numeric_limits<double>::infinity());
    case Kind::Callable: {
        const double T = function_(t);
        if (!std::isfinite(T) || !(T > 0.0))
            throw InputError("exobase temperature callable returned " + format_value(T) +
                             " at t = " + format_value(t) +
                             " s; it must return a finite "
                             "temperature > 0 [K]");
        return T;
    }
    }
    return constant_;
}

double ExobaseTemperature::at_log_flux(double t, double log_xuv_flux,
                                       double* log_temperature) const {
    if (log_temperature)
        *log_temperature = std::numeric_limits<double>::quiet_NaN();
    if (kind_ != Kind::XuvPowerLaw)
        return (*this)(t, std::exp(log_xuv_flux));
    // T_ref (F / F_ref)^gamma as T_ref exp(gamma (ln F - ln F_ref)); gamma = 0 stays T_ref
    // even for F = 0.
    if (gamma_ == 0.0)
        return std::min(t_max_, std::max(t_min_, t_ref_));
    const double log_ratio = gamma_ * (log_xuv_flux - log_f_ref_);
    const double T = t_ref_ * std::exp(log_ratio);
    if (!(T > t_min_)) // as min(t_max, max(t_min, T)) before
        return std::min(t_max_, t_min_);
    if (T >= t_max_)
        return t_max_;
    if (log_temperature)
        *log_temperature = log_t_ref_ + log_ratio;
    return T;
}

std::vector<double> ExobaseTemperature::breakpoints(const Planet& planet, double t0,
                                                    double t1) const {
    std::vector<double> out;
    if (kind_ == Kind::Table) {
        for (double t : table_.times())
            if (t > t0 && t < t1)
                out.push_back(t);
    } else if (kind_ == Kind::XuvPowerLaw && planet.has_star() && gamma_ != 0.0) {
        // The flux falls monotonically after saturation, so each clamp switches at most once.
        const double distance = planet.semi_major_axis();
        const double area = 4.0 * 3.141592653589793 * distance * distance;
        for (double T : {t_min_, t_max_}) {
            const double flux = f_ref_ * std::pow(T / t_ref_, 1.0 / gamma_);
            if (!(flux > 0.0) || !std::isfinite(flux))
                continue;
            const double t = planet.star().age_at_xuv_luminosity(flux * area);
            if (t > t0 && t < t1 && t > planet.star().xuv().saturation_time)
                out.push_back(t);
        }
    }
    std::sort(out.begin(), out.end());
    return out;
}

std::string ExobaseTemperature::to_json() const {
    switch (kind_) {
    case Kind::Constant:
        return json_text({{"kind", "constant"}, {"temperature_K", constant_}});
    case Kind::Table:
        return json_text(
            {{"kind", "table"}, {"times_s", table_.times()}, {"temperatures_K", table_.values()}});
    case Kind::XuvPowerLaw:
        return json_text({{"kind", "xuv_power_law"},
                          {"reference_temperature_K", t_ref_},
                          {"reference_flux_W_m2", f_ref_},
                          {"exponent", gamma_},
                          {"minimum_K", t_min_},
                          {"maximum_K", t_max_}});
    case Kind::Callable:
        return json_text({{"kind", "callable"}, {"description", description_}});
    }
    return "null";
}

PrescribedExobase::PrescribedExobase(double radius, std::vector<std::string> species,
                                     std::vector<double> densities, DensityScaling scaling)
    : radius_(radius), species_(std::move(species)), densities_(std::move(densities)),
      scaling_(scaling) {
    require_positive("exobase radius", radius);
    if (species_.size() != densities_.size() || species_.empty())
        throw InputError("exobase densities: need one density per species, got " +
                         std::to_string(densities_.size()) + " densities for " +
                         std::to_string(species_.size()) + " species");
    log_densities_.resize(densities_.size());
    for (std::size_t i = 0; i < densities_.size(); ++i) {
        if (!std::isfinite(densities_[i]) || !(densities_[i] >= 0.0))
            require_non_negative(("exobase density of " + species_[i]).c_str(), densities_[i]);
        log_densities_[i] = densities_[i] > 0.0 ? std::log(densities_[i])
                                                : -std::numeric_limits<double>::infinity();
    }
}

void PrescribedExobase::evaluate(double, const double* log_fraction, double temperature,
                                 ExobaseState& out) const {
    out.radius = radius_;
    out.temperature = temperature;
    out.has_escape_rates = false;
    out.outflow = false;
    const std::size_t n = log_densities_.size();
    if (scaling_ == DensityScaling::Inventory)
        for (std::size_t i = 0; i < n; ++i)
            out.log_density[i] = log_densities_[i] + log_fraction[i];
    else
        for (std::size_t i = 0; i < n; ++i)
            out.log_density[i] = log_densities_[i];
}

void PrescribedExobase::check(const Planet& planet) const {
    if (radius_ < planet.radius())
        throw InputError("exobase radius " + format_value(radius_) +
                         " m is below the planet's surface (radius " +
                         format_value(planet.radius()) + " m)");
}

std::string PrescribedExobase::to_json() const {
    return json_text({{"kind", "prescribed"},
                      {"radius_m", radius_},
                      {"species", species_},
                      {"densities_m3", densities_},
                      {"scaling", scaling_ == DensityScaling::Inventory ? "inventory" : "fixed"}});
}

namespace {
std::uint64_t next_model_id() {
    static std::atomic<std::uint64_t> count{0};
    return ++count;
}

// The column integral and the diffusion parameters at the homopause of a ThermosphereExobase's
// thermospheres depend on the temperature alone (the species present and everything else are
// the model's), and the temperature holds its value over long stretches (saturated or
// clamped): each thread keeps the last ones it built (measured on the thermosphere sweep:
// building the column took about 40% of the time, the diffusion parameters 6%).
struct LastTables {
    std::uint64_t model = 0; // the id_ of the model that built them
    double temperature = 0.0;
    std::shared_ptr<const Thermosphere::Column> column;
    std::shared_ptr<const std::vector<double>> diffusion;
};
LastTables& last_tables() {
    thread_local LastTables last;
    return last;
}
} // namespace

ThermosphereExobase::ThermosphereExobase(const Thermosphere& initial,
                                         const std::vector<std::string>& species,
                                         bool limit_by_diffusion, DiffusionMethod method,
                                         TailDepletion tail)
    : planet_mass_(initial.planet_mass()), planet_radius_(initial.planet_radius()),
      homopause_radius_(initial.homopause_radius()),
      homopause_density_(initial.homopause_density()), outer_radius_(initial.outer_radius()),
      id_(next_model_id()), names_(species), kind_(initial.profile().kind()),
      limit_by_diffusion_(limit_by_diffusion), method_(method), tail_(std::move(tail)) {
    if (species.size() != initial.species().size())
        throw InputError("the thermosphere has " + std::to_string(initial.species().size()) +
                         " species but the inventory has " + std::to_string(species.size()));
    for (const std::string& name : species) {
        const std::size_t i = initial.index(name); // InputError listing the species if absent
        species_.push_back(initial.species()[i]);
        const double x = initial.mole_fractions()[i];
        log_x0_.push_back(x > 0.0 ? std::log(x) : -std::numeric_limits<double>::infinity());
    }
    const TemperatureProfile& p = initial.profile();
    if (kind_ == TemperatureProfile::Kind::table)
        throw InputError("an evolving thermosphere needs an isothermal or Bates temperature "
                         "profile (its exobase temperature follows the history); got a table");
    if (kind_ == TemperatureProfile::Kind::bates) {
        base_temperature_ = p.base_temperature();
        shape_ = p.shape();
        base_radius_ = p.base_radius();
    }
}

namespace {

// Smallest mole fraction given to the thermosphere: a trace's density and flux are linear in its
// mole fraction, so rarer traces are solved at this fraction and scaled back in logs (their
// effect on the exobase, <= 1e-30, is below double precision). This keeps ln Q_i exact where
// the fluxes themselves would underflow.
constexpr double smallest_fraction = 1e-30;

// ln x_i from ln x_i0 + ln(N_i/N_i0), normalised.
void log_mole_fractions(const std::vector<double>& log_x0, const double* log_fraction,
                        std::vector<double>& out) {
    const std::size_t n = log_x0.size();
    out.resize(n);
    double top = -std::numeric_limits<double>::infinity();
    for (std::size_t i = 0; i < n; ++i)
        top = std::max(top, out[i] = log_x0[i] + log_fraction[i]);
    double sum = 0.0;
    for (std::size_t i = 0; i < n; ++i)
        sum += std::exp(out[i] - top);
    const double log_sum = top + std::log(sum);
    for (std::size_t i = 0; i < n; ++i)
        out[i] -= log_sum;
}

} // namespace

Thermosphere ThermosphereExobase::at(double temperature, const double* log_fraction) const {
    std::vector<double> lx;
    log_mole_fractions(log_x0_, log_fraction, lx);
    std::vector<double> x(lx.size());
    double sum = 0.0;
    for (std::size_t i = 0; i < lx.size(); ++i)
        sum += (x[i] = std::isinf(lx[i]) ? 0.0 : std::max(std::exp(lx[i]), smallest_fraction));
    for (double& v : x)
        v /= sum;
    TemperatureProfile profile =
        kind_ == TemperatureProfile::Kind::bates
            ? TemperatureProfile::bates(temperature, base_temperature_, shape_, base_radius_)
            : TemperatureProfile::isothermal(temperature);
    Thermosphere th(planet_mass_, planet_radius_, homopause_radius_, homopause_density_, species_,
                    std::move(x), std::move(profile), outer_radius_);
    th.set_diffusion_method(method_);
    th.set_tail_depletion(tail_);
    const LastTables& last = last_tables();
    if (last.model == id_ && last.temperature == temperature) {
        if (last.column)
            th.adopt_column(last.column);
        if (last.diffusion)
            th.adopt_diffusion(last.diffusion);
    }
    return th;
}

void ThermosphereExobase::evaluate(double t, const double* log_fraction, double temperature,
                                   ExobaseState& out) const {
    const Thermosphere th = at(temperature, log_fraction);
    const Exobase& e = th.exobase();
    LastTables& last = last_tables();
    if (last.model != id_ || last.temperature != temperature) {
        last.column = th.shared_column(); // built by exobase() above
        last.diffusion = nullptr;         // kept below once the fluxes have built it
        last.model = id_;
        last.temperature = temperature;
    }
    const std::size_t n = species_.size();
    // ln(x_i / x_i used): 0 except for traces solved at smallest_fraction.
    std::vector<double> lx;
    log_mole_fractions(log_x0_, log_fraction, lx);
    std::vector<double> shift(n, 0.0);
    for (std::size_t i = 0; i < n; ++i) {
        const double used = th.mole_fractions()[i];
        if (used > 0.0)
            shift[i] = lx[i] - std::log(used);
    }
    // No exobase found: Jeans rates from the state at `radius`.
    auto jeans_at = [&](double radius) {
        out.radius = radius;
        out.temperature = th.temperature(radius);
        out.has_escape_rates = false;
        for (std::size_t i = 0; i < n; ++i)
            out.log_density[i] = th.log_density(i, radius) + shift[i];
    };
    out.outflow = e.status == ExobaseStatus::none_below_outer_radius;
    if (out.outflow) {
        // Collisional out to the outer bound: the gas flows out. The evolution hands over to
        // energy-limited loss, or stops with the reason; the state at the outer bound serves
        // its regime and the Jeans rates of the species the outflow does not carry.
        out.outflow_reason = "no exobase at t = " + format_value(t) + " s: " + e.message;
        jeans_at(outer_radius_);
        return;
    }
    if (e.status == ExobaseStatus::collisionless_at_homopause) {
        jeans_at(homopause_radius_); // collisionless down to the homopause: escape from there
        return;
    }
    out.radius = e.radius;
    out.temperature = e.temperature;
    out.has_escape_rates = true;
    const double log_area = std::log(4.0 * 3.141592653589793 * e.radius * e.radius);
    for (std::size_t i = 0; i < n; ++i) {
        out.log_density[i] = th.log_density(i, e.radius) + shift[i];
        const double flux = th.escape_flux(i, limit_by_diffusion_);
        out.log_escape_rate[i] = flux > 0.0 ? log_area + std::log(flux) + shift[i]
                                            : -std::numeric_limits<double>::infinity();
    }
    if (limit_by_diffusion_ && !last.diffusion)
        last.diffusion = th.shared_diffusion();
}

bool ThermosphereExobase::loss_follows_inventory(std::size_t i, const double* log_fraction) const {
    double top = -std::numeric_limits<double>::infinity();
    for (std::size_t j = 0; j < log_x0_.size(); ++j)
        top = std::max(top, log_x0_[j] + log_fraction[j]);
    double sum = 0.0;
    for (std::size_t j = 0; j < log_x0_.size(); ++j)
        sum += std::exp(log_x0_[j] + log_fraction[j] - top);
    return std::exp(log_x0_[i] + log_fraction[i] - top) / sum < 0.5;
}

void ThermosphereExobase::check(const Planet& planet) const {
    auto differ = [](double a, double b) { return std::abs(a - b) > 1e-12 * std::abs(b); };
    if (differ(planet_mass_, planet.mass()) || differ(planet_radius_, planet.radius()))
        throw InputError("the thermosphere's planet (mass " + format_value(planet_mass_) +
                         " kg, radius " + format_value(planet_radius_) +
                         " m) is not the evolving planet (mass " + format_value(planet.mass()) +
                         " kg, radius " + format_value(planet.radius()) + " m)");
}

std::string ThermosphereExobase::to_json() const {
    std::vector<double> x0;
    for (double lx : log_x0_)
        x0.push_back(std::exp(lx));
    Json o = {{"kind", "thermosphere"},
              {"homopause_radius_m", homopause_radius_},
              {"homopause_density_m-3", homopause_density_},
              {"outer_radius_m", outer_radius_},
              {"species", names_},
              {"initial_mole_fractions", x0},
              {"profile", kind_ == TemperatureProfile::Kind::bates ? "bates" : "isothermal"}};
    if (kind_ == TemperatureProfile::Kind::bates) {
        o["base_temperature_K"] = base_temperature_;
        o["shape_m-1"] = shape_;
        o["base_radius_m"] = base_radius_;
    }
    o["limit_by_diffusion"] = limit_by_diffusion_;
    o["diffusion_method"] = diffusion_method_name(method_);
    if (!tail_.is_identity())
        o["tail_depletion"] = "set";
    return json_text(o);
}

} // namespace exosieve
