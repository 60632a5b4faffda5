#include "exosieve/case_sampling.hpp"

#include <cmath>
#include <string>

#include "case_slots.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/random.hpp"
#include "exosieve/sensitivity.hpp"

namespace exosieve {

using detail::in_range;
using detail::range_text;

std::size_t sample_runs(const BatchOptions& o, std::size_t inputs) {
    return o.design == SampleDesign::Saltelli ? SaltelliDesign{o.samples, inputs}.runs()
                                              : o.samples;
}

CaseSpec sample_case(const CaseSpec& spec, std::uint64_t seed, std::uint64_t sample) {
    CaseSpec s = spec;
    CounterRng rng(seed, spec.key, sample);
    for (const Uncertainty& u : spec.uncertainties) {
        const CaseParameter* p = u.range ? u.range : find_case_parameter(u.parameter);
        if (!p || u.slot >= spec.values.size())
            throw InputError("uncertainty of '" + u.parameter + "': no such parameter in the case");
        const double value = spec.values[u.slot];
        double drawn = value;
        bool found = false;
        for (int k = 0; k < 1000 && !found; ++k) {
            if (u.distribution == Distribution::SplitNormal) {
                drawn = rng.split_normal(value, u.width_lower, u.width);
            } else {
                const double z = rng.normal();
                drawn = u.distribution == Distribution::Normal ? value + u.width * z
                                                               : value * std::exp(u.width * z);
            }
            found = in_range(*p, drawn);
        }
        if (!found)
            throw NumericalError(
                "sample " + std::to_string(sample) + ": no value of '" + u.parameter +
                "' in its range (" + range_text(*p) + ") in 1000 draws around " +
                format_value(value) + " with width " +
                (u.distribution == Distribution::SplitNormal
                     ? "+" + format_value(u.width) + "/-" + format_value(u.width_lower)
                     : format_value(u.width)));
        s.values[u.slot] = drawn;
    }
    return s;
}

DesignSample design_sample(const CaseSpec& spec, const BatchOptions& o,
                           const std::vector<std::string>& inputs, std::uint64_t run) {
    if (o.design == SampleDesign::MonteCarlo)
        return {sample_case(spec, o.seed, run), true};
    const SaltelliDesign d{o.samples, inputs.size()};
    d.validate();
    if (run >= d.runs())
        throw InputError("sample " + std::to_string(run) + " is past the design's " +
                         std::to_string(d.runs()) + " runs");
    const std::uint64_t row = d.row(run), block = d.block(run);
    if (block <= 1)
        return {sample_case(spec, o.seed, 2 * row + block), true};
    // A_B^(i): A's row with input i from B's row; a case that holds input i fixed has the
    // same inputs as in A, and so the same outputs.
    DesignSample out{sample_case(spec, o.seed, 2 * row), false};
    const std::string& name = inputs[block - 2];
    for (const Uncertainty& u : spec.uncertainties)
        if (u.parameter == name) {
            out.spec.values[u.slot] = sample_case(spec, o.seed, 2 * row + 1).values[u.slot];
            out.run = true;
        }
    return out;
}

} // namespace exosieve
