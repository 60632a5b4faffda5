#include "exosieve/errors.hpp"

#include <cmath>
#include <sstream>

namespace exosieve {

std::string format_value(double value) {
    std::ostringstream out;
    out.precision(17);
    out << value;
    return out.str();
}

void require_finite(const char* what, double value) {
    if (!std::isfinite(value))
        throw InputError(std::string(what) + " must be finite, got " + format_value(value));
}

void require_positive(const char* what, double value) {
    if (!std::isfinite(value) || !(value > 0.0))
        throw InputError(std::string(what) + " must be finite and > 0, got " + format_value(value));
}

void require_non_negative(const char* what, double value) {
    if (!std::isfinite(value) || !(value >= 0.0))
        throw InputError(std::string(what) + " must be finite and >= 0, got " +
                         format_value(value));
}

} // namespace exosieve
