#include "exosieve/envelope.hpp"

#include <boost/numeric/odeint.hpp>

#include <array>
#include <cmath>
#include <limits>
#include <string>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/stellar.hpp"

namespace exosieve {

using constants::G;
using constants::M_earth;
using constants::pi;
using constants::R_earth;

namespace odeint = boost::numeric::odeint;

namespace {

// Lopez & Fortney (2014) fit (coefficients from memory; see envelope.hpp).
constexpr double kEnvelopeScale = 2.06;        // R_env at the reference point [R_E]
constexpr double kMassExponent = -0.21;        // on M_p / M_E
constexpr double kFractionExponent = 0.59;     // on f_env / 5 %
constexpr double kFluxExponent = 0.044;        // on F_p / F_E
constexpr double kAgeExponentSolar = -0.11;    // on age / 5 Gyr, solar metallicity
constexpr double kAgeExponentEnhanced = -0.18; // enhanced opacity
constexpr double kReferenceFraction = 0.05;
constexpr double kReferenceAge = 5.0 * constants::Gyr;

double age_exponent(EnvelopeOpacity opacity) {
    return opacity == EnvelopeOpacity::Enhanced ? kAgeExponentEnhanced : kAgeExponentSolar;
}

// The fit without input checks; envelope_fraction >= 0.
double envelope_radius_unchecked(double f, double planet_mass, double flux, double age,
                                 EnvelopeOpacity opacity) {
    if (!(f > 0.0))
        return 0.0;
    return kEnvelopeScale * R_earth * std::pow(planet_mass / M_earth, kMassExponent) *
           std::pow(f / kReferenceFraction, kFractionExponent) *
           std::pow(flux / solar_irradiance, kFluxExponent) *
           std::pow(age / kReferenceAge, age_exponent(opacity));
}

void require_opacity(EnvelopeOpacity opacity) {
    if (opacity != EnvelopeOpacity::Solar && opacity != EnvelopeOpacity::Enhanced)
        throw InputError("opacity must be solar (0) or enhanced (1), got " +
                         std::to_string(static_cast<int>(opacity)));
}

void require_fraction(double f) {
    require_non_negative("envelope_fraction", f);
    if (!(f < 1.0))
        throw InputError("envelope_fraction must be < 1, got " + format_value(f));
}

using State = std::array<double, 1>;
constexpr double kEps = std::numeric_limits<double>::epsilon();

// Right-hand side dM_env/dt on one smooth piece of the XUV history: F_xuv = f0 (t/t0)^-beta
// (beta = 0 while saturated). The piece's formula is used beyond its end too, so that a step
// overshooting the end stays smooth; the state at the end comes from the dense output.
struct EnvelopeSystem {
    double core_mass;
    double incident_flux;
    double semi_major_axis;
    double star_mass;
    double flux0, time0, beta;
    const EnvelopeLossOptions* options;

    double xuv_flux(double t) const {
        return beta == 0.0 ? flux0 : flux0 * std::pow(t / time0, -beta);
    }

    double radius(double envelope, double t) const {
        const double m_env = envelope > 0.0 ? envelope : 0.0;
        const double mp = core_mass + m_env;
        return core_radius(core_mass) +
               envelope_radius_unchecked(m_env / mp, mp, incident_flux, t, options->opacity);
    }

    double mass_loss(double envelope, double t) const {
        const double m_env = envelope > 0.0 ? envelope : 0.0;
        const double mp = core_mass + m_env;
        const double rp = radius(envelope, t);
        double k = 1.0;
        if (options->roche_lobe)
            k = roche_lobe_factor(roche_lobe_ratio(mp, star_mass, semi_major_axis, rp));
        const double rx = options->xuv_radius_factor * rp;
        return options->efficiency * pi * rp * rx * rx * xuv_flux(t) / (G * mp * k);
    }

    void operator()(const State& x, State& dxdt, double t) const { dxdt[0] = -mass_loss(x[0], t); }
};

} // namespace

double core_radius(double core_mass) {
    require_positive("core_mass", core_mass);
    return R_earth * std::pow(core_mass / M_earth, 0.25);
}

double envelope_radius(double envelope_fraction, double planet_mass, double incident_flux,
                       double age, EnvelopeOpacity opacity) {
    require_fraction(envelope_fraction);
    require_positive("planet_mass", planet_mass);
    require_positive("incident_flux", incident_flux);
    require_positive("age", age);
    require_opacity(opacity);
    return envelope_radius_unchecked(envelope_fraction, planet_mass, incident_flux, age, opacity);
}

double envelope_planet_radius(double core_mass, double envelope_fraction, double incident_flux,
                              double age, EnvelopeOpacity opacity) {
    require_positive("core_mass", core_mass);
    require_fraction(envelope_fraction);
    const double planet_mass = core_mass / (1.0 - envelope_fraction);
    return core_radius(core_mass) +
           envelope_radius(envelope_fraction, planet_mass, incident_flux, age, opacity);
}

void EnvelopeLossOptions::validate() const {
    require_positive("efficiency", efficiency);
    if (efficiency > 1.0)
        throw InputError("efficiency must be <= 1, got " + format_value(efficiency));
    require_positive("xuv_radius_factor", xuv_radius_factor);
    if (xuv_radius_factor < 1.0)
        throw InputError("xuv_radius_factor must be >= 1, got " + format_value(xuv_radius_factor));
    require_opacity(opacity);
    require_positive("rtol", rtol);
    require_positive("atol_fraction", atol_fraction);
}

EnvelopeLossResult integrate_envelope_loss(double core_mass, double envelope_fraction,
                                           double semi_major_axis, const Star& star,
                                           const std::vector<double>& times,
                                           const EnvelopeLossOptions& options) {
    require_positive("core_mass", core_mass);
    require_fraction(envelope_fraction);
    require_positive("semi_major_axis", semi_major_axis);
    options.validate();
    if (times.empty())
        throw InputError("times must hold at least one time, got none");
    for (std::size_t i = 0; i < times.size(); ++i) {
        if (!std::isfinite(times[i]) || !(times[i] > 0.0))
            throw InputError("times must be finite and > 0, got " + format_value(times[i]) +
                             " (element " + std::to_string(i) + ")");
        if (i > 0 && !(times[i] > times[i - 1]))
            throw InputError("times must be strictly ascending, got " + format_value(times[i]) +
                             " after " + format_value(times[i - 1]) + " (element " +
                             std::to_string(i) + ")");
    }

    const double sphere = 4.0 * pi * semi_major_axis * semi_major_axis;
    const XuvHistory& xuv = star.xuv();
    const double saturated_flux = xuv.saturation_ratio * star.luminosity() / sphere;

    EnvelopeSystem sys{core_mass,
                       star.luminosity() / sphere,
                       semi_major_axis,
                       star.mass(),
                       saturated_flux,
                       xuv.saturation_time,
                       0.0,
                       &options};
    if (options.roche_lobe) // refuse a planet filling its Roche lobe before any work
        (void)sys.mass_loss(core_mass * envelope_fraction / (1.0 - envelope_fraction), times[0]);

    EnvelopeLossResult result;
    result.times = times;
    result.envelope_mass.assign(times.size(), 0.0);
    result.radius.assign(times.size(), 0.0);
    result.mass_loss_rate.assign(times.size(), 0.0);
    result.stripping_time = std::numeric_limits<double>::quiet_NaN();

    const double t_start = times.front();
    const double t_end = times.back();
    const double m_env0 = core_mass * envelope_fraction / (1.0 - envelope_fraction);
    std::size_t next = 0; // next output
    auto record = [&](std::size_t i, double m_env) {
        const double m = m_env > 0.0 ? m_env : 0.0;
        result.envelope_mass[i] = m;
        result.radius[i] = sys.radius(m, times[i]);
        result.mass_loss_rate[i] = m > 0.0 ? sys.mass_loss(m, times[i]) : 0.0;
    };
    if (!(m_env0 > 0.0)) {
        result.stripped = true;
        result.stripping_time = t_start;
        for (std::size_t i = 0; i < times.size(); ++i)
            record(i, 0.0);
        return result;
    }
    record(next++, m_env0);

    // Pieces of the XUV history: saturated up to t_sat, then the power-law decline.
    double pieces[3] = {t_start, t_end, t_end};
    int piece_count = 1;
    if (t_start < xuv.saturation_time && xuv.saturation_time < t_end) {
        pieces[1] = xuv.saturation_time;
        piece_count = 2;
    }
    const double atol = options.atol_fraction * core_mass;
    State x{m_env0};
    double t = t_start;
    for (int piece = 0; piece < piece_count && !result.stripped; ++piece) {
        const double end = pieces[piece + 1];
        sys.beta = t >= xuv.saturation_time ? xuv.decay_index : 0.0;
        auto stepper =
            odeint::make_dense_output(atol, options.rtol, odeint::runge_kutta_dopri5<State>());
        const double rate0 = sys.mass_loss(x[0], t);
        const double span = end - t;
        double dt = std::min(span, 1e-3 * x[0] / std::max(rate0, 1e-300));
        dt = std::max(dt, 1e-12 * span);
        stepper.initialize(x, t, dt);
        while (true) {
            const auto [t0, t1] = stepper.do_step(sys);
            ++result.steps;
            // The state at the end of the step, or at the piece's end inside it.
            const double t_hi = std::min(t1, end);
            State x_hi = stepper.current_state();
            if (t1 > end)
                stepper.calc_state(end, x_hi);
            if (x_hi[0] <= 0.0) { // the envelope is gone within [t0, t_hi]: bisect the output
                double lo = t0, hi = t_hi;
                State xm;
                for (int it = 0; it < 200 && hi - lo > 4.0 * kEps * hi; ++it) {
                    const double mid = 0.5 * (lo + hi);
                    stepper.calc_state(mid, xm);
                    (xm[0] > 0.0 ? lo : hi) = mid;
                }
                result.stripped = true;
                result.stripping_time = 0.5 * (lo + hi);
            }
            const double t_stop = result.stripped ? result.stripping_time : std::min(t1, end);
            while (next < times.size() && times[next] <= t_stop) {
                State xo;
                stepper.calc_state(times[next], xo);
                record(next++, xo[0]);
            }
            if (result.stripped)
                break;
            if (t1 >= end) {
                x = x_hi;
                t = end;
                break;
            }
            if (result.steps > 1000000)
                throw NumericalError("envelope loss: more than 1e6 steps (stalled at t = " +
                                     format_value(t1) + " s)");
        }
    }
    for (; next < times.size(); ++next)
        record(next, result.stripped ? 0.0 : x[0]);
    return result;
}

} // namespace exosieve
