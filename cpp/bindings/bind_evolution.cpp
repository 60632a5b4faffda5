#include "bindings.hpp"

#include <pybind11/functional.h>
#include <pybind11/stl.h>

#include <chrono>
#include <cmath>
#include <cstdint>
#include <limits>
#include <memory>
#include <optional>

#include "exosieve/errors.hpp"
#include "exosieve/evolution_file.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/stellar.hpp"

namespace exosieve::bindings {

namespace {

// A Python callable kept alive by C++ objects that may be copied or destroyed without the GIL.
struct PythonCallable {
    py::object function;
    explicit PythonCallable(py::object f) : function(std::move(f)) {}
    ~PythonCallable() {
        py::gil_scoped_acquire gil;
        function = py::object();
    }
};

// A 2-D (rows x cols) float64 copy of row-major data.
py::array_t<double> matrix(const std::vector<double>& data, std::size_t rows, std::size_t cols) {
    py::array_t<double> out({static_cast<py::ssize_t>(rows), static_cast<py::ssize_t>(cols)});
    std::copy(data.begin(), data.end(), out.mutable_data());
    return out;
}

py::array_t<double> vector(const std::vector<double>& data) {
    py::array_t<double> out(static_cast<py::ssize_t>(data.size()));
    std::copy(data.begin(), data.end(), out.mutable_data());
    return out;
}

std::vector<double> to_vector(const DoubleArray& a) {
    return std::vector<double>(a.data(), a.data() + a.size());
}

// Apply a scalar function elementwise (the facade broadcasts; the loop runs here, in C++).
template <class F> py::array_t<double> map(const DoubleArray& in, F f) {
    py::array_t<double> out(in.size());
    const double* x = in.data();
    double* y = out.mutable_data();
    for (py::ssize_t i = 0; i < in.size(); ++i)
        y[i] = f(x[i]);
    return out;
}

} // namespace

void bind_evolution(py::module_& m) {
    // --- stellar -------------------------------------------------------------------------
    py::class_<XuvHistory>(m, "XuvHistory", "Saturated-then-decaying XUV history parameters")
        .def(py::init([](double ratio, double time, double index) {
                 XuvHistory h;
                 h.saturation_ratio = ratio;
                 h.saturation_time = time;
                 h.decay_index = index;
                 h.validate();
                 return h;
             }),
             py::arg("saturation_ratio") = XuvHistory{}.saturation_ratio,
             py::arg("saturation_time") = XuvHistory{}.saturation_time,
             py::arg("decay_index") = XuvHistory{}.decay_index)
        .def_readonly("saturation_ratio", &XuvHistory::saturation_ratio, "L_xuv / L_bol [1]")
        .def_readonly("saturation_time", &XuvHistory::saturation_time, "[s]")
        .def_readonly("decay_index", &XuvHistory::decay_index, "[1]");

    py::class_<Star>(m, "Star", "Host star: mass, luminosity, XUV history [SI]")
        .def(py::init<double, double, XuvHistory>(), py::arg("mass"), py::arg("luminosity"),
             py::arg("xuv") = XuvHistory{})
        .def_property_readonly("mass", &Star::mass)
        .def_property_readonly("luminosity", &Star::luminosity)
        .def_property_readonly("xuv", &Star::xuv)
        .def(
            "xuv_luminosity",
            [](const Star& s, const DoubleArray& t) {
                return map(t, [&](double x) { return s.xuv_luminosity(x); });
            },
            py::arg("t"))
        .def(py::pickle(
            [](const Star& s) {
                const XuvHistory& x = s.xuv();
                return py::make_tuple(s.mass(), s.luminosity(), x.saturation_ratio,
                                      x.saturation_time, x.decay_index);
            },
            [](const py::tuple& t) {
                XuvHistory x;
                x.saturation_ratio = t[2].cast<double>();
                x.saturation_time = t[3].cast<double>();
                x.decay_index = t[4].cast<double>();
                return Star(t[0].cast<double>(), t[1].cast<double>(), x);
            }));

    py::class_<Planet>(m, "Planet", "A planet, with its orbit and star when given [SI]")
        .def(py::init<double, double>(), py::arg("mass"), py::arg("radius"))
        .def(py::init<double, double, double, Star>(), py::arg("mass"), py::arg("radius"),
             py::arg("semi_major_axis"), py::arg("star"))
        .def_property_readonly("mass", &Planet::mass)
        .def_property_readonly("radius", &Planet::radius)
        .def_property_readonly("has_star", &Planet::has_star)
        .def_property_readonly("semi_major_axis", &Planet::semi_major_axis)
        .def_property_readonly("star", &Planet::star)
        .def_property_readonly("surface_gravity", &Planet::surface_gravity)
        .def(
            "xuv_flux",
            [](const Planet& p, const DoubleArray& t) {
                return map(t, [&](double x) { return p.xuv_flux(x); });
            },
            py::arg("t"));

    // --- hydrodynamic ----------------------------------------------------------------------
    py::class_<RegimeThresholds>(m, "RegimeThresholds", "Jeans-parameter regime thresholds [1]")
        .def(py::init([](double enhanced, double transition, double hydrodynamic) {
                 RegimeThresholds t;
                 t.enhanced = enhanced;
                 t.transition = transition;
                 t.hydrodynamic = hydrodynamic;
                 t.validate();
                 return t;
             }),
             py::arg("enhanced") = 6.0, py::arg("transition") = 3.0, py::arg("hydrodynamic") = 2.1)
        .def(py::pickle(
            [](const RegimeThresholds& t) {
                return py::make_tuple(t.enhanced, t.transition, t.hydrodynamic);
            },
            [](const py::tuple& s) {
                RegimeThresholds t;
                t.enhanced = s[0].cast<double>();
                t.transition = s[1].cast<double>();
                t.hydrodynamic = s[2].cast<double>();
                t.validate();
                return t;
            }))
        .def_readonly("enhanced", &RegimeThresholds::enhanced)
        .def_readonly("transition", &RegimeThresholds::transition)
        .def_readonly("hydrodynamic", &RegimeThresholds::hydrodynamic);

    m.def(
        "classify_regime",
        [](const DoubleArray& lambda, const RegimeThresholds& t) {
            py::array_t<std::int64_t> out(lambda.size());
            for (py::ssize_t i = 0; i < lambda.size(); ++i)
                out.mutable_data()[i] =
                    static_cast<std::int64_t>(classify_regime(lambda.data()[i], t));
            return out;
        },
        py::arg("jeans_parameter"), py::arg("thresholds"));
    m.def("regime_name", [](int code) {
        if (code < 0 || code > 3)
            throw InputError("regime code must be 0..3, got " + std::to_string(code));
        return std::string(regime_name(static_cast<Regime>(code)));
    });
    // The hydrodynamic helpers as array kernels: f(count, arg...) -> 1-D array; the Python
    // facade broadcasts and flattens, so every argument arrives with length 1 or `count`.
    using A = const DoubleArray&;
    m.def("roche_lobe_ratio", [](std::size_t n, A mp, A ms, A a, A r) {
        return with_output(n, [&](double* out) {
            roche_lobe_ratio(as_arg(mp), as_arg(ms), as_arg(a), as_arg(r), out, n);
        });
    });
    m.def(
        "roche_lobe_factor",
        [](const DoubleArray& xi) {
            return map(xi, [](double x) { return roche_lobe_factor(x); });
        },
        py::arg("xi"));
    m.def("energy_limited_mass_loss", [](std::size_t n, A eta, A rp, A rx, A f, A mp, A k) {
        return with_output(n, [&](double* out) {
            energy_limited_mass_loss(as_arg(eta), as_arg(rp), as_arg(rx), as_arg(f), as_arg(mp),
                                     as_arg(k), out, n);
        });
    });
    m.def("crossover_mass", [](std::size_t n, A m1, A t, A f1, A b, A g, A x1) {
        return with_output(n, [&](double* out) {
            crossover_mass(as_arg(m1), as_arg(t), as_arg(f1), as_arg(b), as_arg(g), as_arg(x1), out,
                           n);
        });
    });
    m.def("dragged_flux", [](std::size_t n, A mi, A xi, A m1, A f1, A x1, A mc) {
        return with_output(n, [&](double* out) {
            dragged_flux(as_arg(mi), as_arg(xi), as_arg(m1), as_arg(f1), as_arg(x1), as_arg(mc),
                         out, n);
        });
    });

    py::enum_<HydrodynamicActivation>(m, "HydrodynamicActivation")
        .value("hydrodynamic", HydrodynamicActivation::Hydrodynamic)
        .value("transition", HydrodynamicActivation::Transition)
        .value("always", HydrodynamicActivation::Always);

    py::class_<DiffusionLaw>(m, "DiffusionLaw", "b(T) = A T^s [m^-1 s^-1]")
        .def(py::init([](double a, double s) {
                 return DiffusionLaw{a, s};
             }),
             py::arg("coefficient"), py::arg("exponent") = 0.0)
        .def_readonly("coefficient", &DiffusionLaw::coefficient)
        .def_readonly("exponent", &DiffusionLaw::exponent)
        .def("__call__", &DiffusionLaw::operator(), py::arg("temperature"));

    py::class_<XuvAbsorption>(m, "XuvAbsorption",
                              "Radius of XUV optical depth one of an exponential atmosphere [SI]")
        .def(py::init([](double n0, double sigma, double mu, double temperature, bool chord) {
                 XuvAbsorption a;
                 a.base_density = n0;
                 a.cross_section = sigma;
                 a.mean_molecular_mass = mu;
                 a.temperature = temperature;
                 a.chord = chord;
                 a.validate();
                 return a;
             }),
             py::arg("base_density"), py::arg("cross_section"), py::arg("mean_molecular_mass"),
             py::arg("temperature") = 0.0, py::arg("chord") = false)
        .def_readonly("base_density", &XuvAbsorption::base_density)
        .def_readonly("cross_section", &XuvAbsorption::cross_section)
        .def_readonly("mean_molecular_mass", &XuvAbsorption::mean_molecular_mass)
        .def_readonly("temperature", &XuvAbsorption::temperature)
        .def_readonly("chord", &XuvAbsorption::chord);

    py::class_<RecombinationLimit>(m, "RecombinationLimit",
                                   "Recombination-limited cap on energy-limited loss [SI]")
        .def(py::init([](double temperature, double alpha, double photon_energy) {
                 RecombinationLimit r;
                 r.temperature = temperature;
                 r.recombination_coefficient = alpha;
                 r.photon_energy = photon_energy;
                 r.validate();
                 return r;
             }),
             py::arg("temperature") = RecombinationLimit{}.temperature,
             py::arg("recombination_coefficient") = RecombinationLimit{}.recombination_coefficient,
             py::arg("photon_energy") = RecombinationLimit{}.photon_energy)
        .def_readonly("temperature", &RecombinationLimit::temperature)
        .def_readonly("recombination_coefficient", &RecombinationLimit::recombination_coefficient)
        .def_readonly("photon_energy", &RecombinationLimit::photon_energy);

    py::class_<TransonicWind>(m, "TransonicWind",
                              "Transonic (Parker) wind cap on energy-limited loss [SI]")
        .def(py::init([](double temperature, double base_density, double mean_molecular_mass) {
                 TransonicWind w;
                 w.temperature = temperature;
                 w.base_density = base_density;
                 w.mean_molecular_mass = mean_molecular_mass;
                 w.validate();
                 return w;
             }),
             py::arg("temperature"), py::arg("base_density"), py::arg("mean_molecular_mass") = 0.0)
        .def_readonly("temperature", &TransonicWind::temperature)
        .def_readonly("base_density", &TransonicWind::base_density)
        .def_readonly("mean_molecular_mass", &TransonicWind::mean_molecular_mass);

    py::class_<HydrodynamicOptions>(m, "HydrodynamicOptions")
        .def(py::init([](double efficiency, double xuv_radius, bool roche_lobe,
                         const std::string& escaping, HydrodynamicActivation activation,
                         std::vector<std::pair<std::string, DiffusionLaw>> diffusion,
                         std::optional<XuvAbsorption> absorption,
                         std::optional<RecombinationLimit> recombination,
                         std::optional<TransonicWind> transonic, bool drag) {
                 HydrodynamicOptions h;
                 h.drag = drag;
                 h.absorption = absorption;
                 h.recombination = recombination;
                 h.transonic = transonic;
                 h.efficiency = efficiency;
                 h.xuv_radius = xuv_radius;
                 h.roche_lobe = roche_lobe;
                 h.escaping_species = escaping;
                 h.activation = activation;
                 h.diffusion = std::move(diffusion);
                 h.validate();
                 return h;
             }),
             py::arg("efficiency"), py::arg("xuv_radius"), py::arg("roche_lobe"),
             py::arg("escaping_species"), py::arg("activation"), py::arg("diffusion"),
             py::arg("absorption") = py::none(), py::arg("recombination") = py::none(),
             py::arg("transonic") = py::none(), py::arg("drag") = true)
        .def_readonly("efficiency", &HydrodynamicOptions::efficiency)
        .def_readonly("xuv_radius", &HydrodynamicOptions::xuv_radius)
        .def_readonly("roche_lobe", &HydrodynamicOptions::roche_lobe)
        .def_readonly("escaping_species", &HydrodynamicOptions::escaping_species)
        .def_readonly("activation", &HydrodynamicOptions::activation)
        .def_readonly("diffusion", &HydrodynamicOptions::diffusion)
        .def_readonly("absorption", &HydrodynamicOptions::absorption)
        .def_readonly("recombination", &HydrodynamicOptions::recombination)
        .def_readonly("transonic", &HydrodynamicOptions::transonic)
        .def_readonly("drag", &HydrodynamicOptions::drag);

    // --- exobase models and histories -----------------------------------------------------------
    py::class_<ExobaseTemperature>(m, "ExobaseTemperature", "Exobase temperature history")
        .def_static("constant", &ExobaseTemperature::constant, py::arg("temperature"))
        .def_static(
            "table",
            [](const DoubleArray& times, const DoubleArray& temps) {
                return ExobaseTemperature::table(to_vector(times), to_vector(temps));
            },
            py::arg("times"), py::arg("temperatures"))
        .def_static("xuv_power_law", &ExobaseTemperature::xuv_power_law,
                    py::arg("reference_temperature"), py::arg("reference_flux"),
                    py::arg("exponent"), py::arg("minimum"), py::arg("maximum"))
        .def_static(
            "callable",
            [](py::object function, const std::string& description) {
                if (!PyCallable_Check(function.ptr()))
                    throw InputError("exobase temperature: expected a callable, got " +
                                     py::repr(function).cast<std::string>());
                auto holder = std::make_shared<PythonCallable>(std::move(function));
                return ExobaseTemperature::callable(
                    [holder](double t) -> double {
                        py::gil_scoped_acquire gil;
                        py::object value = holder->function(t);
                        try {
                            return py::cast<double>(value);
                        } catch (const py::cast_error&) {
                            throw InputError("exobase temperature callable returned " +
                                             py::repr(value).cast<std::string>() + " at t = " +
                                             format_value(t) + " s; it must return a number [K]");
                        }
                    },
                    description);
            },
            py::arg("function"), py::arg("description"))
        .def("__call__", &ExobaseTemperature::operator(), py::arg("t"), py::arg("xuv_flux") = 0.0)
        .def_property_readonly("thread_safe", &ExobaseTemperature::thread_safe)
        .def_property_readonly("needs_xuv_flux", &ExobaseTemperature::needs_xuv_flux)
        .def("to_json", &ExobaseTemperature::to_json);

    py::class_<ExobaseModel, std::shared_ptr<ExobaseModel>>(m, "ExobaseModel")
        .def_property_readonly("species_names", &ExobaseModel::species_names)
        .def("to_json", &ExobaseModel::to_json);

    py::enum_<DensityScaling>(m, "DensityScaling")
        .value("inventory", DensityScaling::Inventory)
        .value("fixed", DensityScaling::Fixed);

    py::class_<PrescribedExobase, ExobaseModel, std::shared_ptr<PrescribedExobase>>(
        m, "PrescribedExobase")
        .def(py::init<double, std::vector<std::string>, std::vector<double>, DensityScaling>(),
             py::arg("radius"), py::arg("species"), py::arg("densities"), py::arg("scaling"));

    py::class_<ThermosphereExobase, ExobaseModel, std::shared_ptr<ThermosphereExobase>>(
        m, "ThermosphereExobase",
        "A Thermosphere whose composition follows the inventories and whose exobase "
        "temperature follows the history")
        .def(py::init([](const Thermosphere& t, const std::vector<std::string>& species,
                         bool limit_by_diffusion, const std::string& method,
                         const TailDepletion& tail) {
                 return std::make_shared<ThermosphereExobase>(
                     t, species, limit_by_diffusion,
                     diffusion_method_named(method, "diffusion method"), tail);
             }),
             py::arg("thermosphere"), py::arg("species"), py::arg("limit_by_diffusion"),
             py::arg("method"), py::arg("tail"))
        .def(
            "at",
            [](const ThermosphereExobase& e, double temperature, const DoubleArray& log_fraction) {
                if (static_cast<std::size_t>(log_fraction.size()) != e.species_names().size())
                    throw InputError("log_fraction: need one value per species");
                return e.at(temperature, log_fraction.data());
            },
            py::arg("temperature"), py::arg("log_fraction"));

    py::class_<SourceRate>(m, "SourceRate", "Source of one species [s^-1]")
        .def(py::init<>())
        .def(py::init<double>(), py::arg("rate"))
        .def(py::init([](const DoubleArray& times, const DoubleArray& rates) {
                 return SourceRate(to_vector(times), to_vector(rates));
             }),
             py::arg("times"), py::arg("rates"))
        .def("__call__", &SourceRate::operator(), py::arg("t"))
        .def("to_json", &SourceRate::to_json);

    py::class_<GivenLoss>(m, "GivenLoss", "A loss of one species given by the user [s^-1]")
        .def(py::init<>())
        .def(py::init<double>(), py::arg("rate"))
        .def(py::init([](const DoubleArray& times, const DoubleArray& rates) {
                 return GivenLoss(to_vector(times), to_vector(rates));
             }),
             py::arg("times"), py::arg("rates"))
        .def_static("xuv_power_law", &GivenLoss::xuv_power_law, py::arg("reference_rate"),
                    py::arg("reference_flux"), py::arg("exponent"))
        .def(
            "__call__",
            [](const GivenLoss& g, double t, double xuv_flux) {
                return g(t, xuv_flux > 0.0 ? std::log(xuv_flux)
                                           : -std::numeric_limits<double>::infinity());
            },
            py::arg("t"), py::arg("xuv_flux") = 0.0)
        .def_property_readonly("needs_xuv_flux", &GivenLoss::needs_xuv_flux)
        .def_property_readonly("is_zero", &GivenLoss::is_zero)
        .def("to_json", &GivenLoss::to_json);

    // --- evolution ---------------------------------------------------------------------------
    py::enum_<StepperKind> stepper_kind(m, "StepperKind");
    for (StepperKind k : {StepperKind::Auto, StepperKind::Dopri5, StepperKind::Rosenbrock4})
        stepper_kind.value(stepper_name(k), k);

    py::class_<EnvelopeConfig>(m, "EnvelopeConfig",
                               "H/He envelope on a rock/iron core for evolve() [SI]")
        .def(py::init([](double core_mass, double envelope_fraction, int opacity) {
                 EnvelopeConfig e;
                 e.core_mass = core_mass;
                 e.envelope_fraction = envelope_fraction;
                 e.opacity = static_cast<EnvelopeOpacity>(opacity);
                 e.validate();
                 return e;
             }),
             py::arg("core_mass"), py::arg("envelope_fraction"), py::arg("opacity") = 0)
        .def_readonly("core_mass", &EnvelopeConfig::core_mass)
        .def_readonly("envelope_fraction", &EnvelopeConfig::envelope_fraction)
        .def_property_readonly("opacity",
                               [](const EnvelopeConfig& e) { return static_cast<int>(e.opacity); })
        .def_property_readonly("initial_mass", &EnvelopeConfig::initial_mass)
        .def_property_readonly("initial_planet_mass", &EnvelopeConfig::initial_planet_mass);

    py::class_<EvolutionConfig>(m, "EvolutionConfig", "Everything one run needs (plain data)")
        .def(py::init<Planet>(), py::arg("planet"))
        .def_readwrite("planet", &EvolutionConfig::planet)
        .def_readwrite("species", &EvolutionConfig::species)
        .def_readwrite("initial_inventory", &EvolutionConfig::initial_inventory)
        .def_property(
            "exobase",
            [](const EvolutionConfig& c) {
                return std::const_pointer_cast<ExobaseModel>(c.exobase);
            },
            [](EvolutionConfig& c, std::shared_ptr<ExobaseModel> e) { c.exobase = std::move(e); })
        .def_readwrite("temperature", &EvolutionConfig::temperature)
        .def_readwrite("sources", &EvolutionConfig::sources)
        .def_readwrite("given_losses", &EvolutionConfig::given_losses)
        .def_readwrite("hydrodynamic", &EvolutionConfig::hydrodynamic)
        .def_readwrite("envelope", &EvolutionConfig::envelope)
        .def_readwrite("thresholds", &EvolutionConfig::thresholds)
        .def_readwrite("tail", &EvolutionConfig::tail)
        .def_readwrite("t_start", &EvolutionConfig::t_start)
        .def_readwrite("t_end", &EvolutionConfig::t_end)
        .def_property(
            "t_eval", [](const EvolutionConfig& c) { return vector(c.t_eval); },
            [](EvolutionConfig& c, const DoubleArray& t) { c.t_eval = to_vector(t); })
        .def_readwrite("rtol", &EvolutionConfig::rtol)
        .def_readwrite("atol", &EvolutionConfig::atol)
        .def_readwrite("depletion_fraction", &EvolutionConfig::depletion_fraction)
        .def_readwrite("max_steps", &EvolutionConfig::max_steps)
        .def_readwrite("stepper", &EvolutionConfig::stepper)
        .def_readwrite("isotope_ratios", &EvolutionConfig::isotope_ratios)
        .def_property_readonly("thread_safe",
                               [](const EvolutionConfig& c) { return c.temperature.thread_safe(); })
        .def("validate", &EvolutionConfig::validate)
        .def("to_json", &EvolutionConfig::to_json);

    m.def("default_isotope_ratios", &default_isotope_ratios, py::arg("species"));

    py::class_<RegimeChange>(m, "RegimeChange")
        .def_readonly("time", &RegimeChange::time)
        .def_property_readonly("from_regime",
                               [](const RegimeChange& c) { return static_cast<int>(c.from); })
        .def_property_readonly("to_regime",
                               [](const RegimeChange& c) { return static_cast<int>(c.to); });

    py::class_<EvolutionResult>(m, "EvolutionResult", "Raw output of evolve() [SI]")
        .def_readonly("species", &EvolutionResult::species)
        .def_readonly("ratio_names", &EvolutionResult::ratio_names)
        .def_property_readonly("time", [](const EvolutionResult& r) { return vector(r.time); })
        .def_property_readonly("inventory",
                               [](const EvolutionResult& r) {
                                   return matrix(r.inventory, r.time_count(), r.species_count());
                               })
        .def_property_readonly("escape_rate",
                               [](const EvolutionResult& r) {
                                   return matrix(r.escape_rate, r.time_count(), r.species_count());
                               })
        .def_property_readonly("source_rate",
                               [](const EvolutionResult& r) {
                                   return matrix(r.source_rate, r.time_count(), r.species_count());
                               })
        .def_property_readonly("given_loss_rate",
                               [](const EvolutionResult& r) {
                                   return matrix(r.given_loss_rate, r.time_count(),
                                                 r.species_count());
                               })
        .def_property_readonly("jeans_parameter",
                               [](const EvolutionResult& r) {
                                   return matrix(r.jeans_parameter, r.time_count(),
                                                 r.species_count());
                               })
        .def_property_readonly("isotope_ratio",
                               [](const EvolutionResult& r) {
                                   return matrix(r.isotope_ratio, r.time_count(),
                                                 r.ratio_names.size());
                               })
        .def_property_readonly("exobase_radius",
                               [](const EvolutionResult& r) { return vector(r.exobase_radius); })
        .def_property_readonly(
            "exobase_temperature",
            [](const EvolutionResult& r) { return vector(r.exobase_temperature); })
        .def_property_readonly("xuv_flux",
                               [](const EvolutionResult& r) { return vector(r.xuv_flux); })
        .def_property_readonly("regime",
                               [](const EvolutionResult& r) {
                                   py::array_t<std::int64_t> out(r.regime.size());
                                   std::copy(r.regime.begin(), r.regime.end(), out.mutable_data());
                                   return out;
                               })
        .def_property_readonly("energy_limited",
                               [](const EvolutionResult& r) {
                                   py::array_t<std::int64_t> out(r.energy_limited.size());
                                   std::copy(r.energy_limited.begin(), r.energy_limited.end(),
                                             out.mutable_data());
                                   return out;
                               })
        .def_property_readonly("depletion_time",
                               [](const EvolutionResult& r) { return vector(r.depletion_time); })
        .def_property_readonly("has_envelope", &EvolutionResult::has_envelope)
        .def_property_readonly("envelope_mass",
                               [](const EvolutionResult& r) { return vector(r.envelope_mass); })
        .def_property_readonly("planet_radius",
                               [](const EvolutionResult& r) { return vector(r.planet_radius); })
        .def_property_readonly(
            "envelope_loss_rate",
            [](const EvolutionResult& r) { return vector(r.envelope_loss_rate); })
        .def_readonly("core_mass", &EvolutionResult::core_mass)
        .def_readonly("stripping_time", &EvolutionResult::stripping_time)
        .def_readonly("regime_changes", &EvolutionResult::regime_changes)
        .def_readonly("steps", &EvolutionResult::steps)
        .def_readonly("rejected_steps", &EvolutionResult::rejected_steps)
        .def_readonly("rhs_evaluations", &EvolutionResult::rhs_evaluations)
        .def_readonly("stepper", &EvolutionResult::stepper)
        .def_readonly("completed", &EvolutionResult::completed)
        .def_readonly("t_reached", &EvolutionResult::t_reached)
        .def_readonly("config", &EvolutionResult::config)
        .def_property_readonly("initial_inventory",
                               [](const EvolutionResult& r) { return vector(r.initial_inventory); })
        .def_property_readonly("species_mass",
                               [](const EvolutionResult& r) { return vector(r.species_mass); })
        .def_property_readonly(
            "regime_time",
            [](const EvolutionResult& r) { return matrix(r.regime_time, r.species_count(), 4); })
        .def_property_readonly(
            "regime_loss",
            [](const EvolutionResult& r) { return matrix(r.regime_loss, r.species_count(), 4); })
        .def_property_readonly(
            "energy_limited_loss",
            [](const EvolutionResult& r) { return vector(r.energy_limited_loss); })
        .def_property_readonly("given_loss",
                               [](const EvolutionResult& r) { return vector(r.given_loss); })
        .def_property_readonly(
            "non_jeans_loss_share",
            [](const EvolutionResult& r) { return vector(r.non_jeans_loss_share); })
        .def_property_readonly("bulk_regime_time",
                               [](const EvolutionResult& r) { return vector(r.bulk_regime_time); })
        .def("write", &write_result, py::arg("path"), py::call_guard<py::gil_scoped_release>());

    // Write a result given as a mapping of its fields (from a fresh run or a reopened file).
    m.def(
        "write_result",
        [](const std::string& path, const py::dict& f) {
            auto doubles = [&](const char* key) { return to_vector(f[key].cast<DoubleArray>()); };
            auto ints = [&](const char* key) {
                auto a =
                    f[key]
                        .cast<
                            py::array_t<std::int64_t, py::array::c_style | py::array::forcecast>>();
                return std::vector<int>(a.data(), a.data() + a.size());
            };
            EvolutionResult r;
            r.species = f["species"].cast<std::vector<std::string>>();
            r.ratio_names = f["ratio_names"].cast<std::vector<std::string>>();
            r.time = doubles("time");
            r.inventory = doubles("inventory");
            r.escape_rate = doubles("escape_rate");
            r.source_rate = doubles("source_rate");
            r.given_loss_rate = doubles("given_loss_rate");
            r.jeans_parameter = doubles("jeans_parameter");
            r.isotope_ratio = doubles("isotope_ratio");
            r.exobase_radius = doubles("exobase_radius");
            r.exobase_temperature = doubles("exobase_temperature");
            r.xuv_flux = doubles("xuv_flux");
            r.regime = ints("regime");
            r.energy_limited = ints("energy_limited");
            r.depletion_time = doubles("depletion_time");
            r.initial_inventory = doubles("initial_inventory");
            r.species_mass = doubles("species_mass");
            r.regime_time = doubles("regime_time");
            r.regime_loss = doubles("regime_loss");
            r.energy_limited_loss = doubles("energy_limited_loss");
            r.given_loss = doubles("given_loss");
            r.non_jeans_loss_share = doubles("non_jeans_loss_share");
            r.bulk_regime_time = doubles("bulk_regime_time");
            if (f.contains("core_mass")) { // a run with an envelope
                r.core_mass = f["core_mass"].cast<double>();
                r.stripping_time = f["stripping_time"].cast<double>();
                r.envelope_mass = doubles("envelope_mass");
                r.planet_radius = doubles("planet_radius");
                r.envelope_loss_rate = doubles("envelope_loss_rate");
            }
            r.steps = f["steps"].cast<std::size_t>();
            r.rejected_steps = f["rejected_steps"].cast<std::size_t>();
            r.rhs_evaluations = f["rhs_evaluations"].cast<std::size_t>();
            r.completed = f["completed"].cast<bool>();
            r.t_reached = f["t_reached"].cast<double>();
            r.config = f["config"].cast<std::string>();
            r.stepper = f["stepper"].cast<std::string>();
            for (const auto& c : f["regime_changes"].cast<py::list>()) {
                const auto t = c.cast<py::tuple>();
                r.regime_changes.push_back({t[0].cast<double>(),
                                            regime_named(t[1].cast<std::string>()),
                                            regime_named(t[2].cast<std::string>())});
            }
            py::gil_scoped_release release;
            write_result(r, path);
        },
        py::arg("path"), py::arg("fields"));
    m.def(
        "read_result",
        [](const py::handle& path) {
            const std::string p = fspath(path);
            py::gil_scoped_release release;
            return read_result(p);
        },
        py::arg("path"), "Read an evolution result file (write_result's inverse).");

    // Runs without the GIL. At every progress call it takes the GIL to check for signals
    // (Ctrl-C stops the run and raises KeyboardInterrupt) and to call `progress(t)`, whose
    // False stops it. Progress calls come about every 50 ms (progress_every = 0, for
    // interactive use) or after every `progress_every`-th accepted step: a schedule set by the
    // step count alone, the same on any machine.
    m.def(
        "evolve",
        [](EvolutionConfig& config, py::object progress, std::size_t progress_every) {
            using clock = std::chrono::steady_clock;
            auto last = clock::now();
            std::size_t steps = 0;
            auto due = [&]() {
                if (progress_every > 0)
                    return ++steps % progress_every == 0;
                const auto now = clock::now();
                if (now - last < std::chrono::milliseconds(50))
                    return false;
                last = now;
                return true;
            };
            bool interrupted = false;
            std::unique_ptr<py::error_already_set> progress_error;
            config.progress = [&](double t) {
                if (!due())
                    return true;
                py::gil_scoped_acquire gil;
                if (PyErr_CheckSignals() != 0) {
                    interrupted = true;
                    return false;
                }
                if (!progress.is_none()) {
                    try {
                        py::object keep = progress(t);
                        if (!keep.is_none() && !py::cast<bool>(keep))
                            return false;
                    } catch (py::error_already_set& e) {
                        progress_error = std::make_unique<py::error_already_set>(std::move(e));
                        return false;
                    }
                }
                return true;
            };
            EvolutionResult result;
            try {
                py::gil_scoped_release release;
                result = evolve(config);
            } catch (...) {
                config.progress = nullptr;
                throw;
            }
            config.progress = nullptr;
            if (interrupted)
                throw py::error_already_set();
            if (progress_error)
                throw std::move(*progress_error);
            return result;
        },
        py::arg("config"), py::arg("progress") = py::none(), py::arg("progress_every") = 0,
        "Run an evolution. `progress(t)` [s] is called about every 50 ms, or after every "
        "`progress_every`-th accepted step when that is > 0 [steps]; signals are checked at "
        "each call; returning False stops the run.");
}

} // namespace exosieve::bindings
