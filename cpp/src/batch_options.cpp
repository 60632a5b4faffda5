#include "exosieve/batch_options.hpp"

#include <cmath>
#include <string>

#include "exosieve/errors.hpp"

namespace exosieve {

void BatchOptions::validate() const {
    for (std::size_t k = 0; k < times.size(); ++k) {
        if (!std::isfinite(times[k]) || times[k] < 0.0)
            throw InputError("times[" + std::to_string(k) + "] must be finite and >= 0 [s], got " +
                             format_value(times[k]));
        if (k > 0 && !(times[k] > times[k - 1]))
            throw InputError("times must be strictly increasing, got times[" + std::to_string(k) +
                             "] = " + format_value(times[k]) + " after " +
                             format_value(times[k - 1]));
    }
    if (!std::isfinite(t_start) || t_start < 0.0)
        throw InputError("t_start must be finite and >= 0 [s], got " + format_value(t_start));
    if (!std::isfinite(t_end) || t_end < 0.0)
        throw InputError("t_end must be finite and >= 0 [s], got " + format_value(t_end));
    if (!std::isfinite(rtol) || !(rtol > 0.0) || !(rtol < 1.0))
        throw InputError("rtol must be in (0, 1), got " + format_value(rtol));
    if (max_steps == 0)
        throw InputError("max_steps must be > 0");
    if (!std::isfinite(depletion_fraction) || !(depletion_fraction > 0.0) ||
        !(depletion_fraction < 1.0))
        throw InputError("depletion_fraction must be in (0, 1), got " +
                         format_value(depletion_fraction));
    thresholds.validate();
    if (chunk_size == 0)
        throw InputError("chunk_size must be > 0 [cases]");
    if (chunks_in_flight == 0)
        throw InputError("chunks_in_flight must be >= 1");
    for (std::size_t i = 0; i < species.size(); ++i)
        for (std::size_t j = 0; j < i; ++j)
            if (species[i] == species[j])
                throw InputError("species: '" + species[i] + "' appears twice");
}

} // namespace exosieve
