#include "exosieve/exobase_model.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "exosieve/errors.hpp"
#include "json_text.hpp"

namespace exosieve {

using detail::json_array;
using detail::json_number;
using detail::JsonObject;

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
    if (t <= times_.front()) return values_.front();
    if (t >= times_.back()) return values_.back();
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
    h.gamma_ = exponent;
    h.t_min_ = minimum;
    h.t_max_ = maximum;
    return h;
}

ExobaseTemperature ExobaseTemperature::callable(std::function<double(double)> function,
                                                std::string description) {
    if (!function) throw InputError("exobase temperature callable is empty");
    ExobaseTemperature h;
    h.kind_ = Kind::Callable;
    h.function_ = std::move(function);
    h.description_ = std::move(description);
    return h;
}

double ExobaseTemperature::operator()(double t, double xuv_flux) const {
    switch (kind_) {
    case Kind::Constant: return constant_;
    case Kind::Table: return table_(t);
    case Kind::XuvPowerLaw: {
        const double T = t_ref_ * std::pow(xuv_flux / f_ref_, gamma_);
        return std::min(t_max_, std::max(t_min_, T));
    }
    case Kind::Callable: {
        const double T = function_(t);
        if (!std::isfinite(T) || !(T > 0.0))
            throw InputError("exobase temperature callable returned " + format_value(T) +
                             " at t = " + format_value(t) + " s; it must return a finite "
                             "temperature > 0 [K]");
        return T;
    }
    }
    return constant_;
}

std::vector<double> ExobaseTemperature::breakpoints(const Planet& planet, double t0,
                                                    double t1) const {
    std::vector<double> out;
    if (kind_ == Kind::Table) {
        for (double t : table_.times())
            if (t > t0 && t < t1) out.push_back(t);
    } else if (kind_ == Kind::XuvPowerLaw && planet.has_star() && gamma_ != 0.0) {
        // The flux falls monotonically after saturation, so each clamp switches at most once.
        const double distance = planet.semi_major_axis();
        const double area = 4.0 * 3.141592653589793 * distance * distance;
        for (double T : {t_min_, t_max_}) {
            const double flux = f_ref_ * std::pow(T / t_ref_, 1.0 / gamma_);
            if (!(flux > 0.0) || !std::isfinite(flux)) continue;
            const double t = planet.star().age_at_xuv_luminosity(flux * area);
            if (t > t0 && t < t1 && t > planet.star().xuv().saturation_time) out.push_back(t);
        }
    }
    std::sort(out.begin(), out.end());
    return out;
}

std::string ExobaseTemperature::to_json() const {
    JsonObject o;
    switch (kind_) {
    case Kind::Constant: o.string("kind", "constant").number("temperature_K", constant_); break;
    case Kind::Table:
        o.string("kind", "table")
            .add("times_s", json_array(table_.times()))
            .add("temperatures_K", json_array(table_.values()));
        break;
    case Kind::XuvPowerLaw:
        o.string("kind", "xuv_power_law")
            .number("reference_temperature_K", t_ref_)
            .number("reference_flux_W_m2", f_ref_)
            .number("exponent", gamma_)
            .number("minimum_K", t_min_)
            .number("maximum_K", t_max_);
        break;
    case Kind::Callable: o.string("kind", "callable").string("description", description_); break;
    }
    return o.str();
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
        require_non_negative(("exobase density of " + species_[i]).c_str(), densities_[i]);
        log_densities_[i] = densities_[i] > 0.0 ? std::log(densities_[i])
                                                : -std::numeric_limits<double>::infinity();
    }
}

void PrescribedExobase::evaluate(double, const double* log_fraction, double,
                                 ExobaseState& out) const {
    out.radius = radius_;
    out.has_escape_rates = false;
    const std::size_t n = log_densities_.size();
    if (scaling_ == DensityScaling::Inventory)
        for (std::size_t i = 0; i < n; ++i) out.log_density[i] = log_densities_[i] + log_fraction[i];
    else
        for (std::size_t i = 0; i < n; ++i) out.log_density[i] = log_densities_[i];
}

void PrescribedExobase::check(const Planet& planet) const {
    if (radius_ < planet.radius())
        throw InputError("exobase radius " + format_value(radius_) +
                         " m is below the planet's surface (radius " +
                         format_value(planet.radius()) + " m)");
}

std::string PrescribedExobase::to_json() const {
    return JsonObject()
        .string("kind", "prescribed")
        .number("radius_m", radius_)
        .add("species", json_array(species_))
        .add("densities_m3", json_array(densities_))
        .string("scaling", scaling_ == DensityScaling::Inventory ? "inventory" : "fixed")
        .str();
}

} // namespace exosieve
