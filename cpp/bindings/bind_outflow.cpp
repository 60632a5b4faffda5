#include "bindings.hpp"

#include <pybind11/stl.h>

#include <string>
#include <vector>

#include "exosieve/envelope.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/outflow.hpp"
#include "exosieve/stellar.hpp"

namespace exosieve::bindings {

namespace {

using A = const DoubleArray&;

double at(const DoubleArray& a, std::size_t i) {
    return a.data()[a.size() == 1 ? 0 : i];
}

// Evaluate f elementwise over `count` broadcast elements (each array of length 1 or count),
// without the GIL; an InputError names the element it came from.
template <class F, class... Arrays>
py::array_t<double> broadcast(std::size_t count, F f, const Arrays&... arrays) {
    for (std::size_t size : {static_cast<std::size_t>(arrays.size())...})
        if (size != 1 && size != count)
            throw InputError("argument of length " + std::to_string(size) +
                             " does not broadcast to " + std::to_string(count));
    return with_output(count, [&](double* out) {
        for (std::size_t i = 0; i < count; ++i) {
            try {
                out[i] = f(at(arrays, i)...);
            } catch (const InputError& e) {
                if (count == 1)
                    throw;
                throw InputError(std::string(e.what()) + " (element " + std::to_string(i) + ")");
            }
        }
    });
}

EnvelopeOpacity opacity_of(int code) {
    if (code != 0 && code != 1)
        throw InputError("opacity must be 'solar' or 'enhanced' (0 or 1), got " +
                         std::to_string(code));
    return static_cast<EnvelopeOpacity>(code);
}

py::array_t<double> to_array(const std::vector<double>& v) {
    py::array_t<double> out(static_cast<py::ssize_t>(v.size()));
    std::copy(v.begin(), v.end(), out.mutable_data());
    return out;
}

} // namespace

void bind_outflow(py::module_& m) {
    // --- Lambert W and the isothermal transonic wind ---------------------------------------
    m.def("lambert_w", [](std::size_t n, A x, int branch) {
        if (branch != 0 && branch != -1)
            throw InputError("branch must be 0 or -1, got " + std::to_string(branch));
        return broadcast(
            n, [branch](double v) { return lambert_w(v, branch); }, x);
    });
    m.def("lambert_wm1_exp", [](std::size_t n, A l) { return broadcast(n, &lambert_wm1_exp, l); });
    m.def("isothermal_sound_speed",
          [](std::size_t n, A t, A mu) { return broadcast(n, &isothermal_sound_speed, t, mu); });
    m.def("sonic_radius",
          [](std::size_t n, A t, A mu, A mp) { return broadcast(n, &sonic_radius, t, mu, mp); });
    m.def("parker_mach_number",
          [](std::size_t n, A x) { return broadcast(n, &parker_mach_number, x); });
    m.def("parker_wind_speed", [](std::size_t n, A r, A t, A mu, A mp) {
        return broadcast(n, &parker_wind_speed, r, t, mu, mp);
    });
    m.def("parker_density", [](std::size_t n, A r, A r0, A n0, A t, A mu, A mp) {
        return broadcast(n, &parker_density, r, r0, n0, t, mu, mp);
    });
    m.def("parker_mass_loss", [](std::size_t n, A r0, A n0, A t, A mu, A mp) {
        return broadcast(n, &parker_mass_loss, r0, n0, t, mu, mp);
    });

    // --- recombination-limited escape and the XUV absorption radius ------------------------
    m.def("recombination_limited_mass_loss", [](std::size_t n, A f, A mp, A rp, A t, A alpha, A e) {
        return broadcast(n, &recombination_limited_mass_loss, f, mp, rp, t, alpha, e);
    });
    m.def("xuv_driven_mass_loss",
          [](std::size_t n, A eta, A rp, A rx, A f, A mp, A k, A t, A alpha, A e) {
              return broadcast(n, &xuv_driven_mass_loss, eta, rp, rx, f, mp, k, t, alpha, e);
          });
    m.def("recombination_transition_flux",
          [](std::size_t n, A eta, A rp, A rx, A mp, A k, A t, A alpha, A e) {
              return broadcast(n, &recombination_transition_flux, eta, rp, rx, mp, k, t, alpha, e);
          });
    m.def("scale_height", [](std::size_t n, A t, A mu, A mp, A r) {
        return broadcast(n, &scale_height, t, mu, mp, r);
    });
    m.def("xuv_absorption_radius", [](std::size_t n, A r0, A n0, A h, A sigma, bool chord) {
        return broadcast(
            n,
            [chord](double a, double b, double c, double d) {
                return xuv_absorption_radius(a, b, c, d, chord);
            },
            r0, n0, h, sigma);
    });
    m.attr("HYDROGEN_ATOM_MASS") = hydrogen_atom_mass;
    m.attr("ELECTRON_VOLT") = electron_volt;
    m.attr("RECOMBINATION_TEMPERATURE") = RecombinationDefaults::temperature;
    m.attr("RECOMBINATION_COEFFICIENT") = RecombinationDefaults::recombination_coefficient;
    m.attr("RECOMBINATION_PHOTON_ENERGY") = RecombinationDefaults::photon_energy;

    // --- H/He envelopes ----------------------------------------------------------------------
    m.attr("SOLAR_IRRADIANCE") = solar_irradiance;
    m.def("core_radius", [](std::size_t n, A mc) { return broadcast(n, &core_radius, mc); });
    m.def("envelope_radius", [](std::size_t n, A f, A mp, A s, A t, int opacity) {
        const EnvelopeOpacity o = opacity_of(opacity);
        return broadcast(
            n,
            [o](double a, double b, double c, double d) { return envelope_radius(a, b, c, d, o); },
            f, mp, s, t);
    });
    m.def("envelope_planet_radius", [](std::size_t n, A mc, A f, A s, A t, int opacity) {
        const EnvelopeOpacity o = opacity_of(opacity);
        return broadcast(
            n,
            [o](double a, double b, double c, double d) {
                return envelope_planet_radius(a, b, c, d, o);
            },
            mc, f, s, t);
    });
    m.def(
        "integrate_envelope_loss",
        [](double core_mass, double envelope_fraction, double semi_major_axis, const Star& star,
           const std::vector<double>& times, double efficiency, double xuv_radius_factor,
           bool roche_lobe, int opacity, double rtol, double atol_fraction) {
            EnvelopeLossOptions o;
            o.efficiency = efficiency;
            o.xuv_radius_factor = xuv_radius_factor;
            o.roche_lobe = roche_lobe;
            o.opacity = opacity_of(opacity);
            o.rtol = rtol;
            o.atol_fraction = atol_fraction;
            EnvelopeLossResult r;
            {
                py::gil_scoped_release release;
                r = integrate_envelope_loss(core_mass, envelope_fraction, semi_major_axis, star,
                                            times, o);
            }
            py::dict out;
            out["times"] = to_array(r.times);
            out["envelope_mass"] = to_array(r.envelope_mass);
            out["radius"] = to_array(r.radius);
            out["mass_loss_rate"] = to_array(r.mass_loss_rate);
            out["stripped"] = r.stripped;
            out["stripping_time"] = r.stripping_time;
            out["steps"] = r.steps;
            return out;
        },
        py::arg("core_mass"), py::arg("envelope_fraction"), py::arg("semi_major_axis"),
        py::arg("star"), py::arg("times"), py::arg("efficiency"), py::arg("xuv_radius_factor"),
        py::arg("roche_lobe"), py::arg("opacity"), py::arg("rtol"), py::arg("atol_fraction"));
}

} // namespace exosieve::bindings
