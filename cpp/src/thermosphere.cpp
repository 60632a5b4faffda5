#include "exosieve/thermosphere.hpp"

#include <algorithm>
#include <array>
#include <atomic>
#include <cmath>
#include <limits>
#include <mutex>
#include <sstream>

#include <boost/math/tools/toms748_solve.hpp>
#include <boost/numeric/odeint.hpp>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "worker_threads.hpp"

namespace exosieve {

using constants::amu;
using constants::G;
using constants::k_B;

namespace {
constexpr double nan = std::numeric_limits<double>::quiet_NaN();
// Relative departure of the Bates profile from T_inf below which it counts as flat.
constexpr double flat_tolerance = 1e-17;
// Default outer bound of the exobase search, in homopause radii.
constexpr double default_outer_factor = 20.0;
// Integration tolerances for the column integral (dimensionless, per atomic mass unit).
constexpr double column_abs_tol = 1e-11;
constexpr double column_rel_tol = 1e-11;

std::string format_km(double metres) {
    std::ostringstream out;
    out.precision(6);
    out << metres / 1e3 << " km";
    return out.str();
}
} // namespace

// ---------------------------------------------------------------- temperature profiles

TemperatureProfile TemperatureProfile::isothermal(double temperature) {
    require_positive("temperature", temperature);
    TemperatureProfile p;
    p.kind_ = Kind::isothermal;
    p.asymptotic_ = temperature;
    p.base_temperature_ = p.shape_ = p.base_radius_ = nan;
    return p;
}

TemperatureProfile TemperatureProfile::bates(double exobase_temperature, double base_temperature,
                                             double shape, double base_radius) {
    require_positive("exobase_temperature", exobase_temperature);
    require_positive("homopause_temperature", base_temperature);
    require_positive("shape", shape);
    require_positive("homopause_radius", base_radius);
    TemperatureProfile p;
    p.kind_ = Kind::bates;
    p.asymptotic_ = exobase_temperature;
    p.base_temperature_ = base_temperature;
    p.shape_ = shape;
    p.base_radius_ = base_radius;
    return p;
}

TemperatureProfile TemperatureProfile::table(std::vector<double> radius,
                                             std::vector<double> temperature) {
    if (radius.size() != temperature.size() || radius.size() < 2)
        throw InputError("temperature table: radius and temperature need equal lengths of at "
                         "least 2, got " +
                         std::to_string(radius.size()) + " and " +
                         std::to_string(temperature.size()));
    for (std::size_t i = 0; i < radius.size(); ++i) {
        require_positive("temperature table radius", radius[i]);
        require_positive("temperature table temperature", temperature[i]);
        if (i > 0 && !(radius[i] > radius[i - 1]))
            throw InputError("temperature table radius must be strictly increasing, got " +
                             format_value(radius[i]) + " after " + format_value(radius[i - 1]));
    }
    TemperatureProfile p;
    p.kind_ = Kind::table;
    p.asymptotic_ = temperature.back();
    p.base_temperature_ = p.shape_ = p.base_radius_ = nan;
    p.radius_ = std::move(radius);
    p.temperature_ = std::move(temperature);
    return p;
}

double TemperatureProfile::operator()(double r) const {
    switch (kind_) {
    case Kind::isothermal:
        return asymptotic_;
    case Kind::bates:
        return asymptotic_ -
               (asymptotic_ - base_temperature_) * std::exp(-shape_ * (r - base_radius_));
    case Kind::table: {
        if (r <= radius_.front())
            return temperature_.front();
        if (r >= radius_.back())
            return temperature_.back();
        const auto hi = static_cast<std::size_t>(
            std::upper_bound(radius_.begin(), radius_.end(), r) - radius_.begin());
        const std::size_t lo = hi - 1;
        const double w = (r - radius_[lo]) / (radius_[hi] - radius_[lo]);
        return temperature_[lo] + w * (temperature_[hi] - temperature_[lo]);
    }
    }
    return nan;
}

double TemperatureProfile::slope(double r) const {
    switch (kind_) {
    case Kind::isothermal:
        return 0.0;
    case Kind::bates:
        return shape_ * (asymptotic_ - base_temperature_) * std::exp(-shape_ * (r - base_radius_));
    case Kind::table: {
        if (r < radius_.front() || r >= radius_.back())
            return 0.0;
        const auto hi = static_cast<std::size_t>(
            std::upper_bound(radius_.begin(), radius_.end(), r) - radius_.begin());
        const std::size_t lo = hi - 1;
        return (temperature_[hi] - temperature_[lo]) / (radius_[hi] - radius_[lo]);
    }
    }
    return nan;
}

double TemperatureProfile::asymptotic_temperature() const {
    return asymptotic_;
}

double TemperatureProfile::flat_above() const {
    switch (kind_) {
    case Kind::isothermal:
        return 0.0;
    case Kind::bates: {
        const double spread = std::fabs(asymptotic_ - base_temperature_) / asymptotic_;
        if (spread == 0.0)
            return base_radius_;
        return base_radius_ + std::max(0.0, std::log(spread / flat_tolerance)) / shape_;
    }
    case Kind::table:
        return radius_.back();
    }
    return nan;
}

// ---------------------------------------------------------------- column integral

// J(r) per atomic mass unit, u(r) = amu * J(r) (dimensionless), as quintic polynomials in
// t = (r - r_k) / (r_{k+1} - r_k) between accepted integration steps, and the closed form
// u_end + c / T_end (1/r_end - 1/r) above r_end where the temperature is constant.
struct Thermosphere::Column {
    std::vector<double> nodes;                // r_0 = r_h < r_1 < ... < r_end
    std::vector<std::array<double, 6>> coeff; // polynomial coefficients per interval
    double r_end = 0.0;
    double u_end = 0.0;
    double c_over_T_end = 0.0; // amu G M / (k T_end)
};

namespace {

using ColumnState = std::array<double, 1>;

Thermosphere::Column build_column(const TemperatureProfile& profile, double planet_mass,
                                  double r_h) {
    Thermosphere::Column col;
    const double c = amu * G * planet_mass / k_B;
    col.c_over_T_end = c / profile.asymptotic_temperature();
    const double r_end = std::max(r_h, profile.flat_above());
    col.r_end = r_h;
    col.u_end = 0.0;
    if (!(r_end > r_h))
        return col;

    // Segments between kinks of the profile, so that each step sees a smooth integrand.
    std::vector<double> breaks{r_h};
    if (profile.kind() == TemperatureProfile::Kind::table)
        for (double r : profile.table_radius())
            if (r > r_h && r < r_end)
                breaks.push_back(r);
    breaks.push_back(r_end);

    namespace ode = boost::numeric::odeint;
    auto rhs = [&](const ColumnState& /*u*/, ColumnState& du, double r) {
        du[0] = c / (r * r * profile(r));
    };
    std::vector<double> r_steps;
    std::vector<double> u_steps;
    ColumnState u{{0.0}};
    r_steps.push_back(r_h);
    u_steps.push_back(0.0);
    for (std::size_t s = 0; s + 1 < breaks.size(); ++s) {
        const double a = breaks[s], b = breaks[s + 1];
        auto stepper = ode::make_controlled(column_abs_tol, column_rel_tol,
                                            ode::runge_kutta_dopri5<ColumnState>());
        // Start with a step of a fraction of the local temperature scale length.
        const double slope = std::fabs(profile.slope(0.5 * (a + b)));
        double dr = (b - a) / 16.0;
        if (slope > 0.0)
            dr = std::min(dr, 0.05 * profile(a) / slope);
        ode::integrate_adaptive(stepper, rhs, u, a, b, dr, [&](const ColumnState& state, double r) {
            if (r > r_steps.back()) {
                r_steps.push_back(r);
                u_steps.push_back(state[0]);
            }
        });
        r_steps.back() = b; // the last observed step ends exactly at the break
        u_steps.back() = u[0];
    }

    // Hermite data: u' = c / (r^2 T), u'' = -c (2 / (r^3 T) + T' / (r^2 T^2)), with T' taken
    // inside each interval (the table's slope is discontinuous at its nodes).
    col.nodes = r_steps;
    col.coeff.resize(r_steps.size() - 1);
    for (std::size_t k = 0; k + 1 < r_steps.size(); ++k) {
        const double r0 = r_steps[k], r1 = r_steps[k + 1], h = r1 - r0;
        const double mid = 0.5 * (r0 + r1);
        const bool table = profile.kind() == TemperatureProfile::Kind::table;
        auto derivatives = [&](double r, double& d1, double& d2) {
            const double T = profile(r);
            const double dT = table ? profile.slope(mid) : profile.slope(r);
            d1 = c / (r * r * T);
            d2 = -c * (2.0 / (r * r * r * T) + dT / (r * r * T * T));
        };
        double p0, q0, p1, q1;
        derivatives(r0, p0, q0);
        derivatives(r1, p1, q1);
        const double y0 = u_steps[k], dy = u_steps[k + 1] - u_steps[k];
        const double hp0 = h * p0, hp1 = h * p1, hq0 = h * h * q0, hq1 = h * h * q1;
        col.coeff[k] = {y0,
                        hp0,
                        0.5 * hq0,
                        10.0 * dy - 6.0 * hp0 - 4.0 * hp1 - 1.5 * hq0 + 0.5 * hq1,
                        -15.0 * dy + 8.0 * hp0 + 7.0 * hp1 + 1.5 * hq0 - hq1,
                        6.0 * dy - 3.0 * hp0 - 3.0 * hp1 - 0.5 * hq0 + 0.5 * hq1};
    }
    col.r_end = r_steps.back();
    col.u_end = u_steps.back();
    return col;
}

} // namespace

// ---------------------------------------------------------------- thermosphere

Thermosphere::Thermosphere(double planet_mass, double planet_radius, double homopause_radius,
                           double homopause_density, std::vector<Species> species,
                           std::vector<double> mole_fractions, TemperatureProfile profile,
                           double outer_radius)
    : planet_mass_(planet_mass), planet_radius_(planet_radius), homopause_radius_(homopause_radius),
      homopause_density_(homopause_density), outer_radius_(outer_radius),
      species_(std::move(species)), fractions_(std::move(mole_fractions)),
      profile_(std::move(profile)) {
    require_positive("planet_mass", planet_mass_);
    require_positive("planet_radius", planet_radius_);
    require_positive("homopause_radius", homopause_radius_);
    if (homopause_radius_ < planet_radius_)
        throw InputError("homopause_radius " + format_value(homopause_radius_) +
                         " m is below the planet's surface (radius " +
                         format_value(planet_radius_) + " m)");
    require_positive("homopause_density", homopause_density_);
    validate_composition("composition", species_, fractions_);
    for (std::size_t j = 0; j < species_.size(); ++j) {
        validate(species_[j]);
        if (fractions_[j] > 0.0 && !(species_[j].cross_section > 0.0))
            throw InputError("species '" + species_[j].name +
                             "' has no collision cross-section (needed for the mean free path)");
    }
    if (outer_radius_ == 0.0)
        outer_radius_ = default_outer_factor * homopause_radius_;
    require_positive("outer_radius", outer_radius_);
    if (!(outer_radius_ > homopause_radius_))
        throw InputError("outer_radius " + format_value(outer_radius_) +
                         " m must lie above homopause_radius " + format_value(homopause_radius_) +
                         " m");
    if (profile_.kind() == TemperatureProfile::Kind::bates &&
        profile_.base_radius() > homopause_radius_ * (1.0 + 1e-12))
        throw InputError("Bates profile base radius " + format_value(profile_.base_radius()) +
                         " m must not lie above homopause_radius " +
                         format_value(homopause_radius_) + " m");
    homopause_temperature_ = profile_(homopause_radius_);
    log_x_.resize(species_.size());
    for (std::size_t j = 0; j < species_.size(); ++j)
        log_x_[j] = fractions_[j] > 0.0 ? std::log(fractions_[j] * homopause_density_)
                                        : -std::numeric_limits<double>::infinity();
    require_positive("temperature at the homopause", homopause_temperature_);
}

std::size_t Thermosphere::index(const std::string& name) const {
    for (std::size_t i = 0; i < species_.size(); ++i)
        if (species_[i].name == name)
            return i;
    std::string known;
    for (const Species& s : species_)
        known += (known.empty() ? "" : ", ") + s.name;
    throw InputError("species '" + name + "' is not in this thermosphere (it has " + known + ")");
}

void Thermosphere::require_in_range(const char* what, double r) const {
    if (!std::isfinite(r) || r < homopause_radius_ * (1.0 - 1e-15))
        throw InputError(std::string(what) + " " + format_value(r) + " m is below the homopause (" +
                         format_value(homopause_radius_) + " m) or not finite");
}

namespace {
// The value in `slot`, built by build() on first use. Concurrent first uses may both build it;
// they build the same value, and one of them is kept.
template <class T, class Build>
std::shared_ptr<const T> built_once(std::shared_ptr<const T>& slot, Build build) {
    std::shared_ptr<const T> value = std::atomic_load(&slot);
    if (!value) {
        value = std::make_shared<const T>(build());
        std::atomic_store(&slot, value);
    }
    return value;
}
} // namespace

const Thermosphere::Column& Thermosphere::column_cache() const {
    return *shared_column();
}

std::shared_ptr<const Thermosphere::Column> Thermosphere::shared_column() const {
    return built_once(column_,
                      [&] { return build_column(profile_, planet_mass_, homopause_radius_); });
}

void Thermosphere::adopt_column(std::shared_ptr<const Column> column) const {
    std::atomic_store(&column_, std::move(column));
}

std::shared_ptr<const std::vector<double>> Thermosphere::shared_diffusion() const {
    return built_once(diffusion_, [&] {
        const std::size_t n = species_.size();
        std::vector<double> b(n * n, nan);
        for (std::size_t i = 0; i < n; ++i)
            for (std::size_t j = 0; j < n; ++j)
                if (j != i && fractions_[i] > 0.0 && fractions_[j] > 0.0) {
                    try {
                        b[i * n + j] = binary_diffusion_parameter(species_[i], species_[j],
                                                                  homopause_temperature_, method_);
                    } catch (const InputError&) {
                        // No estimate for the pair (left NaN): escape_flux_at asks again, and
                        // says why, only if the pair is needed.
                    }
                }
        return b;
    });
}

void Thermosphere::adopt_diffusion(std::shared_ptr<const std::vector<double>> diffusion) const {
    std::atomic_store(&diffusion_, std::move(diffusion));
}

double Thermosphere::column(double r) const {
    if (profile_.kind() == TemperatureProfile::Kind::isothermal) {
        const double span = 1.0 / homopause_radius_ - 1.0 / r;
        if (!(span > 0.0)) // at the homopause (or NaN): no column, even if 1 / H overflows
            return std::isnan(span) ? span : 0.0;
        return amu * G * planet_mass_ / (k_B * profile_.asymptotic_temperature()) * span;
    }
    if (std::isnan(r))
        return r;
    const Column& col = column_cache();
    // The column grows from 0 at the homopause; NaN from finite inputs is inf - inf, where a
    // near-zero temperature (T ~ 1e-300 K) makes it overflow: beyond the double range.
    auto grown = [](double u) {
        return std::isnan(u) ? std::numeric_limits<double>::infinity() : u;
    };
    if (r >= col.r_end)
        return grown(col.u_end + col.c_over_T_end * (1.0 / col.r_end - 1.0 / r));
    if (col.nodes.size() < 2 || r <= col.nodes.front())
        return 0.0;
    // nodes.front() < r < r_end = nodes.back(): 1 <= hi <= size - 1.
    const auto hi =
        std::min(col.nodes.size() - 1,
                 static_cast<std::size_t>(std::upper_bound(col.nodes.begin(), col.nodes.end(), r) -
                                          col.nodes.begin()));
    const std::size_t k = hi - 1;
    const double t = (r - col.nodes[k]) / (col.nodes[hi] - col.nodes[k]);
    const auto& a = col.coeff[k];
    return grown(a[0] + t * (a[1] + t * (a[2] + t * (a[3] + t * (a[4] + t * a[5])))));
}

double Thermosphere::temperature(double r) const {
    require_in_range("radius", r);
    return profile_(r);
}

double Thermosphere::decay_exponent(std::size_t i, double r) const {
    if (i >= species_.size())
        throw InputError("species index " + std::to_string(i) + " out of range (" +
                         std::to_string(species_.size()) + " species)");
    require_in_range("radius", r);
    const Species& s = species_[i];
    return -s.mass / amu * column(r) -
           (1.0 + s.thermal_diffusion_factor) * std::log(profile_(r) / homopause_temperature_);
}

double Thermosphere::log_density(std::size_t i, double r) const {
    const double exponent = decay_exponent(i, r);
    return log_x_[i] + exponent;
}

double Thermosphere::density(std::size_t i, double r) const {
    const double exponent = decay_exponent(i, r);
    if (fractions_[i] == 0.0)
        return 0.0;
    // x n_h times the decay factor (exact at the homopause); the log form only where the
    // factor alone would underflow.
    if (exponent > -700.0)
        return fractions_[i] * homopause_density_ * std::exp(exponent);
    return std::exp(log_x_[i] + exponent);
}

void Thermosphere::densities(double r, double* out) const {
    for (std::size_t i = 0; i < species_.size(); ++i)
        out[i] = density(i, r);
}

void Thermosphere::density(std::size_t i, const double* r, double* out, std::size_t count) const {
    if (i >= species_.size())
        throw InputError("species index " + std::to_string(i) + " out of range (" +
                         std::to_string(species_.size()) + " species)");
    for (std::size_t k = 0; k < count; ++k)
        require_in_range("radius", r[k]);
    for (std::size_t k = 0; k < count; ++k)
        out[k] = density(i, r[k]);
}

void Thermosphere::temperature(const double* r, double* out, std::size_t count) const {
    for (std::size_t k = 0; k < count; ++k)
        require_in_range("radius", r[k]);
    for (std::size_t k = 0; k < count; ++k)
        out[k] = profile_(r[k]);
}

Thermosphere::Local Thermosphere::local_mixture(double r, std::vector<double>& weights) const {
    const std::size_t count = species_.size();
    weights.resize(count);
    const double u = column(r);
    const double T = profile_(r);
    const double log_T_ratio = std::log(T / homopause_temperature_);
    double top = -std::numeric_limits<double>::infinity();
    for (std::size_t j = 0; j < count; ++j) {
        const Species& s = species_[j];
        weights[j] = fractions_[j] > 0.0 ? log_x_[j] - s.mass / amu * u -
                                               (1.0 + s.thermal_diffusion_factor) * log_T_ratio
                                         : -std::numeric_limits<double>::infinity();
        top = std::max(top, weights[j]);
    }
    double n = 0.0, nm = 0.0, ns = 0.0;
    for (std::size_t j = 0; j < count; ++j) {
        weights[j] = std::exp(weights[j] - top); // relative to the most abundant species
        n += weights[j];
        nm += weights[j] * species_[j].mass;
        ns += weights[j] * species_[j].cross_section;
    }
    Local local;
    local.temperature = T;
    local.log_collision_rate = top + std::log(ns);
    local.mean_mass = nm / n;
    local.heaviest_colliding = 0.0;
    for (std::size_t j = 0; j < count; ++j)
        if (weights[j] * species_[j].cross_section >= 1e-3 * ns)
            local.heaviest_colliding = std::max(local.heaviest_colliding, species_[j].mass);
    local.log_scale_height = std::log(k_B * T * r * r / (G * planet_mass_ * local.mean_mass));
    return local;
}

double Thermosphere::mean_free_path(double r) const {
    require_in_range("radius", r);
    std::vector<double> weights;
    return std::exp(-local_mixture(r, weights).log_collision_rate);
}

double Thermosphere::scale_height(double r) const {
    require_in_range("radius", r);
    std::vector<double> weights;
    return std::exp(local_mixture(r, weights).log_scale_height);
}

double Thermosphere::exobase_criterion(double r) const {
    require_in_range("radius", r);
    std::vector<double> weights;
    const Local local = local_mixture(r, weights);
    return -local.log_collision_rate - local.log_scale_height;
}

Exobase Thermosphere::find_exobase() const {
    const std::size_t count = species_.size();
    const double r_h = homopause_radius_;
    std::vector<double> weights(count);
    // Criterion ln(mfp / H) at r, and the mass setting the local collision scale height.
    auto evaluate = [&](double r, double* heaviest) {
        const Local local = local_mixture(r, weights);
        if (heaviest)
            *heaviest = local.heaviest_colliding;
        return -local.log_collision_rate - local.log_scale_height;
    };

    Exobase e;
    auto none = [&](ExobaseStatus status, std::string message) {
        e.status = status;
        e.message = std::move(message);
        e.radius = e.temperature = nan;
        e.densities.clear();
        return e;
    };

    double heaviest = 0.0;
    double r_lo = r_h;
    double f_lo = evaluate(r_lo, &heaviest);
    if (!(f_lo < 0.0)) {
        std::ostringstream why;
        why.precision(4);
        why << "no exobase: the mean free path is already " << std::exp(f_lo)
            << " scale heights at the homopause (" << format_km(r_h - planet_radius_)
            << " altitude); the gas is collisionless down to the homopause";
        return none(ExobaseStatus::collisionless_at_homopause, why.str());
    }

    // Scan upward until the criterion turns non-negative; steps of half the collision scale
    // height keep a crossing from being stepped over.
    const std::size_t max_steps = 1000000;
    double r_hi = r_lo, f_hi = f_lo;
    std::size_t steps = 0;
    while (true) {
        const double T = profile_(r_lo);
        const double h = k_B * T * r_lo * r_lo / (G * planet_mass_ * heaviest);
        double step = std::min(0.5 * h, 0.1 * r_lo);
        const double dT = std::fabs(profile_.slope(r_lo));
        if (dT > 0.0)
            step = std::min(step, 0.5 * T / dT);
        // A scale height that over- or underflows (extreme masses and radii) falls back to the
        // geometric step, so the scan never steps to a NaN radius.
        if (!(step > 0.0) || !std::isfinite(step))
            step = 0.1 * r_lo;
        r_hi = std::min(r_lo + step, outer_radius_);
        f_hi = evaluate(r_hi, &heaviest);
        if (f_hi >= 0.0)
            break;
        if (r_hi >= outer_radius_) {
            std::ostringstream why;
            why.precision(4);
            why << "no exobase below the outer radius " << format_km(outer_radius_ - planet_radius_)
                << " altitude (" << outer_radius_ / planet_radius_
                << " planet radii): the mean free path there is still only " << std::exp(f_hi)
                << " scale heights; the hydrostatic picture does not close, and an atmosphere "
                   "this extended is probably escaping hydrodynamically";
            return none(ExobaseStatus::none_below_outer_radius, why.str());
        }
        r_lo = r_hi;
        f_lo = f_hi;
        if (++steps > max_steps)
            throw NumericalError("exobase search: no progress after " + std::to_string(steps) +
                                 " steps");
    }

    double r_e = r_hi;
    if (f_hi > 0.0) {
        std::uintmax_t iterations = 200;
        const auto bracket = boost::math::tools::toms748_solve(
            [&](double r) { return evaluate(r, nullptr); }, r_lo, r_hi, f_lo, f_hi,
            [](double a, double b) { return std::fabs(b - a) <= 1e-13 * std::fabs(b); },
            iterations);
        r_e = 0.5 * (bracket.first + bracket.second);
    }
    e.status = ExobaseStatus::found;
    e.radius = r_e;
    e.temperature = profile_(r_e);
    e.densities.resize(count);
    for (std::size_t j = 0; j < count; ++j)
        e.densities[j] = density(j, r_e);
    std::ostringstream what;
    what.precision(6);
    what << "exobase at " << format_km(r_e - planet_radius_) << " altitude, " << e.temperature
         << " K";
    e.message = what.str();
    return e;
}

const Exobase& Thermosphere::exobase() const {
    return *built_once(exobase_, [&] { return find_exobase(); });
}

double Thermosphere::jeans_flux(std::size_t i) const {
    return escape_flux(i, false);
}

double Thermosphere::diffusion_limited_flux(std::size_t i) const {
    if (i >= species_.size())
        throw InputError("species index " + std::to_string(i) + " out of range (" +
                         std::to_string(species_.size()) + " species)");
    std::vector<Species> others;
    std::vector<double> y;
    const double rest = 1.0 - fractions_[i];
    for (std::size_t j = 0; j < species_.size(); ++j)
        if (j != i && fractions_[j] > 0.0) {
            others.push_back(species_[j]);
            y.push_back(fractions_[j]);
        }
    if (others.empty() || !(rest > 0.0))
        return nan;
    double sum = 0.0;
    for (double v : y)
        sum += v;
    for (double& v : y)
        v /= sum; // the background's own composition
    return exosieve::diffusion_limited_flux(species_[i], others, y, fractions_[i],
                                            homopause_temperature_, planet_mass_, homopause_radius_,
                                            method_);
}

double Thermosphere::escape_flux_at(const Exobase& e, std::size_t i,
                                    bool limit_by_diffusion) const {
    const Species& s = species_[i];
    const double T = e.temperature, r = e.radius;
    const double lambda = G * planet_mass_ * s.mass / (k_B * T * r);
    const double v0 = std::sqrt(2.0 * k_B * T / s.mass);
    const double phi_j = jeans_flux_unchecked(e.densities[i], v0, lambda, tail_);
    if (!limit_by_diffusion || phi_j == 0.0)
        return phi_j;

    // Background: the other species, with their share of the homopause mixture.
    double rest = 0.0, m_a = 0.0, inverse_b = 0.0;
    for (std::size_t j = 0; j < species_.size(); ++j)
        if (j != i && fractions_[j] > 0.0)
            rest += fractions_[j];
    if (!(rest > 0.0))
        return phi_j; // a pure gas is not limited by diffusion through itself
    const std::shared_ptr<const std::vector<double>> b = shared_diffusion();
    const std::size_t n = species_.size();
    for (std::size_t j = 0; j < n; ++j)
        if (j != i && fractions_[j] > 0.0) {
            const double y = fractions_[j] / rest;
            m_a += y * species_[j].mass;
            const double b_ij = (*b)[i * n + j];
            inverse_b +=
                y / (std::isnan(b_ij) ? binary_diffusion_parameter(s, species_[j],
                                                                   homopause_temperature_, method_)
                                      : b_ij);
        }
    const double g = G * planet_mass_ / (homopause_radius_ * homopause_radius_);
    const double beta = (m_a - s.mass) * g / (k_B * homopause_temperature_);
    return coupled_escape_flux(phi_j, 1.0 / inverse_b, fractions_[i], beta, r - homopause_radius_);
}

double Thermosphere::escape_flux(std::size_t i, bool limit_by_diffusion) const {
    if (i >= species_.size())
        throw InputError("species index " + std::to_string(i) + " out of range (" +
                         std::to_string(species_.size()) + " species)");
    const Exobase& e = exobase();
    if (!e.found())
        throw NumericalError("escape flux of " + species_[i].name + ": " + e.message);
    return escape_flux_at(e, i, limit_by_diffusion);
}

// ---------------------------------------------------------------- many thermospheres

void solve_thermospheres(const std::vector<Species>& species, std::size_t count,
                         const ThermosphereCases& cases, bool limit_by_diffusion,
                         const ThermosphereResults& results, unsigned threads) {
    const bool bates = cases.homopause_temperature.size > 0 || cases.shape.size > 0;
    if (bates && (cases.homopause_temperature.size == 0 || cases.shape.size == 0))
        throw InputError("homopause_temperature and shape must be given together (Bates "
                         "profile) or both left out (isothermal)");
    check_lengths(count, {cases.planet_mass, cases.planet_radius, cases.homopause_radius,
                          cases.homopause_density, cases.exobase_temperature});
    if (bates)
        check_lengths(count, {cases.homopause_temperature, cases.shape});
    if (cases.outer_radius.size > 0)
        check_lengths(count, {cases.outer_radius});
    if (cases.fraction_rows != 1 && cases.fraction_rows != count)
        throw InputError("mole_fractions has " + std::to_string(cases.fraction_rows) +
                         " rows, expected 1 or " + std::to_string(count));
    if (!cases.mole_fractions)
        throw InputError("mole_fractions missing");
    if (!results.exobase_radius || !results.exobase_temperature || !results.status ||
        !results.escape_flux)
        throw InputError("solve_thermospheres: a result array is missing");
    const std::size_t n_species = species.size();

    auto make = [&](std::size_t i) {
        const double* x = cases.mole_fractions + (cases.fraction_rows == 1 ? 0 : i * n_species);
        const TemperatureProfile profile =
            bates ? TemperatureProfile::bates(cases.exobase_temperature[i],
                                              cases.homopause_temperature[i], cases.shape[i],
                                              cases.homopause_radius[i])
                  : TemperatureProfile::isothermal(cases.exobase_temperature[i]);
        return Thermosphere(cases.planet_mass[i], cases.planet_radius[i], cases.homopause_radius[i],
                            cases.homopause_density[i], species,
                            std::vector<double>(x, x + n_species), profile,
                            cases.outer_radius.size > 0 ? cases.outer_radius[i] : 0.0);
    };
    // Validate every case before any work starts.
    for (std::size_t i = 0; i < count; ++i) {
        try {
            (void)make(i);
        } catch (const InputError& e) {
            throw InputError("case " + std::to_string(i) + ": " + e.what());
        }
    }

    auto work = [&](std::size_t begin, std::size_t end) {
        for (std::size_t i = begin; i < end; ++i) {
            const Thermosphere t = make(i);
            const Exobase& e = t.exobase();
            results.status[i] = static_cast<int>(e.status);
            results.exobase_radius[i] = e.radius;
            results.exobase_temperature[i] = e.temperature;
            for (std::size_t j = 0; j < n_species; ++j)
                results.escape_flux[i * n_species + j] =
                    e.found() ? t.escape_flux(j, limit_by_diffusion) : nan;
        }
    };
    // Each case costs tens of microseconds: threads pay off from a few hundred cases.
    detail::run_in_chunks(count, detail::thread_count(threads, count / 256), work);
}

} // namespace exosieve
