#include "exosieve/case_config.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "case_slots.hpp"
#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/outflow.hpp"

namespace exosieve {

using detail::bad_value;
using detail::drag_diffusion_exponent_parameter;
using detail::drag_diffusion_parameter;
using detail::exobase_x_parameter;
using detail::given_loss_exponent_parameter;
using detail::given_loss_parameter;
using detail::loss_slots;
using detail::LossSlots;
using detail::none;
using detail::slots;
using detail::Slots;
using detail::species_prefix;

namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

// Output ages of a case: t_start, the batch's times inside (t_start, t_end), t_end.
std::vector<double> case_times(const BatchOptions& o, double t0, double t1) {
    std::vector<double> t{t0};
    for (double x : o.times)
        if (x > t0 && x < t1)
            t.push_back(x);
    t.push_back(t1);
    return t;
}

// The options of energy-limited escape (XUV absorption radius, recombination limit, transonic
// wind) and the given losses of case `s`, into `c` (whose hydrodynamic options are set when the
// row has a heating efficiency), as EnergyLimitedEscape(absorption=..., recombination_limit=...,
// transonic_wind=...) and evolve(given_losses=...) build them. mean_mass: the bulk gas's mean
// particle mass [kg].
void add_loss_options(const CaseSpec& s, bool with_star, double mean_mass, EvolutionConfig& c) {
    const LossSlots& k = loss_slots();
    const auto& params = case_parameters();
    auto has = [&](std::size_t slot) { return !std::isnan(s.values[slot]); };
    auto given = [&](std::size_t slot) {
        const CaseParameter& p = params[slot];
        return "got " + format_value(s.values[slot]) + (p.unit == "1" ? "" : " " + p.unit);
    };
    // A column of a model the row does not switch on is refused, naming what would switch it on.
    auto refuse = [&](std::initializer_list<std::size_t> slots, const std::string& model) {
        for (std::size_t slot : slots)
            if (has(slot))
                bad_value(params[slot].name, given(slot) + ", but it is for " + model);
    };
    const bool recombination = has(k.recombination_limit) && s.values[k.recombination_limit] == 1.0;
    const bool transonic = has(k.transonic_wind) && s.values[k.transonic_wind] == 1.0;
    if (c.envelope && recombination)
        bad_value("recombination_limit",
                  "got 1, but the recombination limit is not supported with an envelope "
                  "('core_mass', 'envelope_fraction'): the evolving radius moves the switch "
                  "between the two rates");
    if (c.hydrodynamic) {
        HydrodynamicOptions& h = *c.hydrodynamic;
        if (has(k.cross_section)) {
            XuvAbsorption a;
            a.cross_section = s.values[k.cross_section];
            if (!has(k.base_density))
                bad_value(params[k.base_density].name,
                          "no value given (the XUV absorption radius of "
                          "'xuv_absorption_cross_section' needs it)");
            a.base_density = s.values[k.base_density];
            a.mean_molecular_mass = has(k.molecular_mass) ? s.values[k.molecular_mass] : mean_mass;
            a.temperature =
                has(k.absorption_temperature) ? s.values[k.absorption_temperature] : 0.0;
            a.chord = has(k.chord) && s.values[k.chord] == 1.0;
            if (a.temperature > 0.0) { // the layer's scale height at the planet radius, fixed
                const double height = scale_height(a.temperature, a.mean_molecular_mass,
                                                   c.planet.mass(), c.planet.radius());
                if (!std::isfinite(height) || !(height > 0.0))
                    bad_value(params[k.absorption_temperature].name,
                              given(k.absorption_temperature) +
                                  ", which with a mean molecular "
                                  "mass of " +
                                  format_value(a.mean_molecular_mass) +
                                  " kg gives the absorbing layer a scale height of " +
                                  format_value(height) + " m, not a finite number > 0");
            }
            h.absorption = a;
        } else {
            refuse({k.base_density, k.absorption_temperature, k.molecular_mass, k.chord},
                   "the XUV absorption radius ('xuv_absorption_cross_section'), which this row "
                   "does not give");
        }
        if (recombination) {
            RecombinationLimit r;
            if (has(k.recombination_temperature))
                r.temperature = s.values[k.recombination_temperature];
            if (has(k.recombination_coefficient))
                r.recombination_coefficient = s.values[k.recombination_coefficient];
            if (has(k.photon_energy))
                r.photon_energy = s.values[k.photon_energy];
            h.recombination = r;
        } else {
            refuse({k.recombination_temperature, k.recombination_coefficient, k.photon_energy},
                   "the recombination limit ('recombination_limit' 1), which this row does not "
                   "switch on");
        }
        if (transonic) {
            for (std::size_t slot : {k.transonic_temperature, k.transonic_base_density})
                if (!has(slot))
                    bad_value(params[slot].name,
                              "no value given (the transonic wind of 'transonic_wind' 1 needs it)");
            TransonicWind w;
            w.temperature = s.values[k.transonic_temperature];
            w.base_density = s.values[k.transonic_base_density];
            if (has(k.transonic_molecular_mass))
                w.mean_molecular_mass = s.values[k.transonic_molecular_mass];
            h.transonic = w;
        } else {
            refuse({k.transonic_temperature, k.transonic_base_density, k.transonic_molecular_mass},
                   "the transonic wind ('transonic_wind' 1), which this row does not switch on");
        }
    } else {
        const std::string energy_limited =
            "energy-limited escape ('heating_efficiency'), which this row does not switch on";
        refuse({k.cross_section, k.base_density, k.absorption_temperature, k.molecular_mass,
                k.chord, k.recombination_temperature, k.recombination_coefficient, k.photon_energy,
                k.transonic_temperature, k.transonic_base_density, k.transonic_molecular_mass},
               energy_limited);
        if (recombination)
            bad_value("recombination_limit", "got 1, but it caps " + energy_limited);
        if (transonic)
            bad_value("transonic_wind", "got 1, but it caps " + energy_limited);
    }

    // Given losses: once a species has one, every species gets one (GivenLoss(): none).
    const std::size_t n = s.species.size();
    bool any = false, any_law = false;
    for (std::size_t i = 0; i < n; ++i) {
        any = any || !std::isnan(s.species_value(given_loss_parameter, i));
        any_law = any_law || !std::isnan(s.species_value(given_loss_exponent_parameter, i));
    }
    if (!any_law)
        refuse({k.given_loss_reference_flux},
               "the XUV power law of a given loss ('given_loss_exponent_<species>'), which this "
               "row does not give");
    if (!any && !any_law)
        return;
    c.given_losses.assign(n, GivenLoss());
    for (std::size_t i = 0; i < n; ++i) {
        const std::string& name = s.species[i].name;
        const double rate = s.species_value(given_loss_parameter, i);
        const double exponent = s.species_value(given_loss_exponent_parameter, i);
        if (!std::isnan(exponent)) {
            const std::string column = "given_loss_exponent_" + name;
            if (std::isnan(rate))
                bad_value(column, "got " + format_value(exponent) +
                                      ", but the XUV power law needs "
                                      "its rate at the reference flux, 'given_loss_" +
                                      name + "' [s-1]");
            if (!has(k.given_loss_reference_flux))
                bad_value(params[k.given_loss_reference_flux].name,
                          "no value given (the XUV power law of '" + column + "' needs it)");
            if (!with_star)
                bad_value(column, "got " + format_value(exponent) +
                                      ", but the XUV power law needs the planet's star "
                                      "('semi_major_axis', 'star_mass', 'star_luminosity')");
            c.given_losses[i] =
                GivenLoss::xuv_power_law(rate, s.values[k.given_loss_reference_flux], exponent);
        } else if (!std::isnan(rate)) {
            c.given_losses[i] = GivenLoss(rate);
        }
    }
}

} // namespace

EvolutionConfig build_config(const CaseSpec& s, const BatchOptions& o) {
    const Slots& k = slots();
    const auto& params = case_parameters();
    const std::size_t n = s.species.size();
    const std::size_t expected = params.size() + species_parameters().size() * n;
    if (s.values.size() != expected)
        throw InputError("case '" + s.name + "': " + std::to_string(s.values.size()) +
                         " parameter values for " + std::to_string(n) + " species, expected " +
                         std::to_string(expected));
    auto has = [&](std::size_t slot) { return !std::isnan(s.values[slot]); };
    auto required = [&](std::size_t slot, const char* why = "") {
        if (!has(slot))
            bad_value(params[slot].name,
                      "no value given" + (*why ? std::string(" (") + why + ")" : std::string()));
        return s.values[slot];
    };
    auto optional = [&](std::size_t slot, double fallback) {
        return has(slot) ? s.values[slot] : fallback;
    };
    const bool with_star = has(k.semi_major_axis);
    // An envelope (core_mass, envelope_fraction) gives the planet's mass and radius at the
    // start, as evolve() takes them: M_core / (1 - f) and the fit's radius at the start age.
    const bool with_envelope = has(k.core_mass) || has(k.envelope_fraction);
    std::optional<EnvelopeConfig> envelope;
    if (with_envelope) {
        for (std::size_t slot : {k.planet_mass, k.planet_radius})
            if (has(slot))
                bad_value(params[slot].name, "give either 'planet_mass' and 'planet_radius' or "
                                             "an envelope ('core_mass', 'envelope_fraction'), "
                                             "not both");
        const char* why = "an envelope needs 'core_mass' and 'envelope_fraction'";
        envelope.emplace();
        envelope->core_mass = required(k.core_mass, why);
        envelope->envelope_fraction = required(k.envelope_fraction, why);
        if (!(envelope->envelope_fraction < 1.0))
            bad_value("envelope_fraction",
                      "must be < 1, got " + format_value(envelope->envelope_fraction));
        if (!with_star)
            bad_value("semi_major_axis", "no value given (an envelope needs the star and orbit: "
                                         "its radius takes the bolometric flux, its loss the XUV)");
        if (!has(k.heating_efficiency))
            bad_value("heating_efficiency", "no value given (an envelope is lost at the "
                                            "energy-limited rate)");
    }
    const double t_start = optional(k.age_start, o.t_start);
    std::optional<Planet> planet;
    if (with_star) {
        XuvHistory xuv;
        xuv.saturation_ratio = optional(k.xuv_saturation_ratio, xuv.saturation_ratio);
        xuv.saturation_time = optional(k.xuv_saturation_time, xuv.saturation_time);
        xuv.decay_index = optional(k.xuv_decay_index, xuv.decay_index);
        const char* why = "a semi_major_axis needs the star";
        const double star_mass = required(k.star_mass, why); // star mass first in messages
        const Star star(star_mass, required(k.star_luminosity, why), xuv);
        const double a = s.values[k.semi_major_axis];
        if (envelope) {
            if (!(t_start > 0.0))
                bad_value("age_start", "an envelope needs a start age > 0 (its radius fit "
                                       "takes the age), got " +
                                           format_value(t_start) + " s");
            const double flux = star.luminosity() / (4.0 * constants::pi * a * a);
            planet.emplace(envelope->initial_planet_mass(),
                           envelope_planet_radius(envelope->core_mass, envelope->envelope_fraction,
                                                  flux, t_start),
                           a, star);
        } else {
            planet.emplace(required(k.planet_mass), required(k.planet_radius), a, star);
        }
    } else {
        planet.emplace(required(k.planet_mass), required(k.planet_radius));
    }
    const double mass = planet->mass(), radius = planet->radius();
    EvolutionConfig c(*planet);
    c.envelope = envelope;
    c.record_config = false; // the sweep file records the table and options instead
    std::vector<std::string> names(n);
    double x_sum = 0.0, mean_mass = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
        names[i] = s.species[i].name;
        x_sum += s.mole_fraction(i);
        mean_mass += s.mole_fraction(i) * s.species[i].mass;
    }
    mean_mass /= x_sum;
    c.species = s.species;

    const bool thermosphere = has(k.homopause_altitude) || has(k.homopause_density);
    if (thermosphere && with_envelope)
        bad_value("core_mass", "an envelope needs a prescribed exobase ('exobase_altitude', "
                               "'exobase_density'): a thermosphere keeps the planet it was built "
                               "with");
    if (thermosphere) {
        // Thermosphere: x_i (normalised) are the well-mixed homopause fractions; the exobase is
        // found from them at every step, exactly as evolve() does with a Thermosphere.
        for (std::size_t slot : {k.exobase_altitude, k.exobase_density})
            if (has(slot))
                bad_value(params[slot].name,
                          "give either a prescribed exobase ('exobase_altitude', "
                          "'exobase_density') or a thermosphere ('homopause_altitude', "
                          "'homopause_density'), not both");
        if (s.scaling == DensityScaling::Fixed)
            bad_value("density_scaling", "'fixed' is for a prescribed exobase; a thermosphere's "
                                         "densities always follow the inventories");
        // The thermosphere finds the exobase composition from the bulk one: none is given.
        for (std::size_t i = 0; i < n; ++i)
            if (!std::isnan(s.species_value(exobase_x_parameter, i)))
                bad_value("exobase_x_" + s.species[i].name,
                          "is for a prescribed exobase; a thermosphere's exobase composition "
                          "follows from the bulk fractions x_<species> by diffusive separation");
        if (s.exobase_composition_bulk)
            bad_value("exobase_composition",
                      "is for a prescribed exobase; a thermosphere's exobase composition "
                      "follows from the bulk fractions x_<species> by diffusive separation");
        const char* why = "a thermosphere needs both homopause columns";
        const double r_h = radius + required(k.homopause_altitude, why);
        const double n_h = required(k.homopause_density, why);
        std::vector<double> fractions(n);
        for (std::size_t i = 0; i < n; ++i)
            fractions[i] = s.mole_fraction(i) / x_sum;
        // The profile's form; its exobase temperature is replaced by the history at every step.
        TemperatureProfile profile = TemperatureProfile::isothermal(1000.0);
        if (has(k.homopause_temperature) || has(k.bates_shape)) {
            const char* bates = "a Bates profile needs 'homopause_temperature' and 'bates_shape'";
            const double t_h = required(k.homopause_temperature, bates);
            profile = TemperatureProfile::bates(t_h, t_h, required(k.bates_shape, bates), r_h);
        }
        Thermosphere th(mass, radius, r_h, n_h, s.species, std::move(fractions),
                        std::move(profile));
        th.set_diffusion_method(s.diffusion);
        c.exobase = std::make_shared<ThermosphereExobase>(
            th, names, optional(k.diffusion_limited, 1.0) == 1.0, s.diffusion);
    } else {
        // Prescribed exobase: radius and densities n_i = x_i n (x_i normalised, as the
        // inventories).
        for (std::size_t slot : {k.homopause_temperature, k.bates_shape, k.diffusion_limited})
            if (has(slot))
                bad_value(params[slot].name, "is for a thermosphere ('homopause_altitude', "
                                             "'homopause_density'); this row has none");
        if (s.diffusion_given)
            bad_value("diffusion_source", "is for a thermosphere ('homopause_altitude', "
                                          "'homopause_density'); this row has none");
        const char* why = "or describe a thermosphere ('homopause_altitude', 'homopause_density')";
        const double n_exo = required(k.exobase_density, why);
        // The exobase composition: its own columns, or the bulk fractions when the row says so
        // ('exobase_composition' 'bulk'); the bulk fractions alone share the inventory.
        bool own = false;
        double exo_sum = 0.0;
        for (std::size_t i = 0; i < n; ++i)
            if (!std::isnan(s.species_value(exobase_x_parameter, i))) {
                own = true;
                exo_sum += s.species_value(exobase_x_parameter, i);
            }
        if (own && s.exobase_composition_bulk)
            bad_value("exobase_composition",
                      "'bulk' takes the bulk fractions as the exobase composition, but the row "
                      "also gives exobase_x_<species>: keep one");
        if (!own && !s.exobase_composition_bulk) {
            std::string missing;
            for (std::size_t i = 0; i < n; ++i)
                missing +=
                    (missing.empty() ? "'exobase_x_" : ", 'exobase_x_") + s.species[i].name + "'";
            bad_value("exobase_x_<species>",
                      "no exobase composition given: a prescribed exobase needs " + missing +
                          " (its mole fractions at the exobase), or the text column "
                          "'exobase_composition' set to 'bulk' to take the bulk fractions "
                          "x_<species> (which share the inventory) as the exobase's too");
        }
        std::vector<double> densities(n);
        for (std::size_t i = 0; i < n; ++i) {
            const double x_exo = s.species_value(exobase_x_parameter, i);
            densities[i] = own ? (std::isnan(x_exo) ? 0.0 : x_exo / exo_sum * n_exo)
                               : s.mole_fraction(i) / x_sum * n_exo;
        }
        c.exobase =
            std::make_shared<PrescribedExobase>(radius + required(k.exobase_altitude, why),
                                                std::move(names), std::move(densities), s.scaling);
    }

    // Inventories: per species, else the total shared by mole fraction. A surface pressure P
    // holds N = P 4 pi R^2 / (g m_mean) particles, g = G M / R^2 (hydrostatic column).
    double total = nan;
    if (has(k.inventory) && has(k.surface_pressure))
        bad_value("surface_pressure", "give either 'inventory' or 'surface_pressure', not both");
    if (has(k.inventory))
        total = s.values[k.inventory];
    if (has(k.surface_pressure)) {
        const double g = constants::G * mass / (radius * radius);
        total =
            s.values[k.surface_pressure] * 4.0 * constants::pi * radius * radius / (g * mean_mass);
    }
    c.initial_inventory.resize(n);
    for (std::size_t i = 0; i < n; ++i) {
        if (!std::isnan(s.inventory(i))) {
            c.initial_inventory[i] = s.inventory(i);
        } else {
            const std::string& name = s.species[i].name;
            if (std::isnan(total))
                bad_value("inventory", "no initial inventory of " + name +
                                           ": give 'inventory', 'surface_pressure' or "
                                           "'inventory_" +
                                           name + "'");
            c.initial_inventory[i] = total * s.mole_fraction(i) / x_sum;
        }
    }

    // Span: per case, else the options; the end defaults to the star's present age.
    c.t_start = t_start;
    c.t_end = optional(k.age_end, optional(k.star_age, o.t_end));
    if (!(c.t_end > c.t_start))
        bad_value(has(k.age_end)    ? "age_end"
                  : has(k.star_age) ? "star_age"
                                    : "age_end",
                  "the end age " + format_value(c.t_end) + " s is not after the start age " +
                      format_value(c.t_start) + " s");

    // Exobase temperature history.
    if (has(k.temperature_reference)) {
        if (has(k.exobase_temperature))
            bad_value("exobase_temperature", "give either 'exobase_temperature' or the XUV law "
                                             "('temperature_reference' ...), not both");
        const char* why = "the XUV temperature law needs it";
        c.temperature = ExobaseTemperature::xuv_power_law(
            s.values[k.temperature_reference], required(k.temperature_reference_flux, why),
            required(k.temperature_exponent, why), required(k.temperature_min, why),
            required(k.temperature_max, why));
    } else {
        const double t0 =
            required(k.exobase_temperature, "or give the XUV law 'temperature_reference' ...");
        if (has(k.exobase_temperature_end))
            c.temperature = ExobaseTemperature::table({c.t_start, c.t_end},
                                                      {t0, s.values[k.exobase_temperature_end]});
        else
            c.temperature = ExobaseTemperature::constant(t0);
    }
    if (has(k.heating_efficiency)) {
        HydrodynamicOptions h;
        h.efficiency = s.values[k.heating_efficiency];
        h.roche_lobe = with_star;
        h.escaping_species = s.escaping_species;
        h.activation = s.activation;
        h.drag = optional(k.drag, 1.0) == 1.0;
        for (std::size_t i = 0; i < n; ++i) { // listed laws, as EnergyLimitedEscape(diffusion=)
            const double a = s.species_value(drag_diffusion_parameter, i);
            const double e = s.species_value(drag_diffusion_exponent_parameter, i);
            if (!std::isnan(e) && std::isnan(a))
                bad_value("drag_diffusion_exponent_" + s.species[i].name,
                          "got " + format_value(e) + ", but the law needs its coefficient 'drag_" +
                              "diffusion_" + s.species[i].name + "' [m-1 s-1]");
            if (!std::isnan(a))
                h.diffusion.emplace_back(s.species[i].name,
                                         DiffusionLaw{a, std::isnan(e) ? 0.0 : e});
        }
        c.hydrodynamic = h;
    } else {
        const std::string why =
            "energy-limited escape ('heating_efficiency'), which this row does not switch on";
        if (has(k.drag))
            bad_value("drag", "got " + format_value(s.values[k.drag]) + ", but it is for " + why);
        for (std::size_t i = 0; i < n; ++i)
            for (std::size_t q : {drag_diffusion_parameter, drag_diffusion_exponent_parameter})
                if (!std::isnan(s.species_value(q, i)))
                    bad_value(species_prefix(species_parameters()[q]) + s.species[i].name,
                              "got " + format_value(s.species_value(q, i)) + ", but it is for " +
                                  why);
        if (!s.escaping_species.empty())
            bad_value("escaping_species", "'" + s.escaping_species + "', but it is for " + why);
        if (s.activation_given)
            bad_value("energy_limited_activation", "is for " + why);
    }
    add_loss_options(s, with_star, mean_mass, c);
    // Regime thresholds: the row's, each defaulting to the sweep's.
    c.thresholds = o.thresholds;
    c.thresholds.enhanced = optional(k.threshold_enhanced, c.thresholds.enhanced);
    c.thresholds.transition = optional(k.threshold_transition, c.thresholds.transition);
    c.thresholds.hydrodynamic = optional(k.threshold_hydrodynamic, c.thresholds.hydrodynamic);
    try {
        c.thresholds.validate();
    } catch (const InputError& e) {
        const std::size_t given = has(k.threshold_enhanced)     ? k.threshold_enhanced
                                  : has(k.threshold_transition) ? k.threshold_transition
                                                                : k.threshold_hydrodynamic;
        bad_value(params[given].name, std::string("the row's thresholds (the sweep's where a "
                                                  "column is empty): ") +
                                          e.what());
    }
    c.rtol = optional(k.rtol, o.rtol);
    c.max_steps = static_cast<std::size_t>(optional(k.max_steps, static_cast<double>(o.max_steps)));
    c.depletion_fraction = o.depletion_fraction;
    c.t_eval = case_times(o, c.t_start, c.t_end);
    return c;
}

} // namespace exosieve
