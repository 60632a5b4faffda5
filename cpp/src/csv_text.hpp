#pragma once
// Internal: the small CSV dialect of the data tables compiled into the library
// (comma-separated, double-quoted fields, no embedded newlines).

#include <stdexcept>
#include <string>
#include <vector>

#include "exosieve/errors.hpp"

namespace exosieve::detail {

// Split one CSV line, honouring double-quoted fields (no embedded newlines).
inline std::vector<std::string> split_csv_line(const std::string& line) {
    std::vector<std::string> fields;
    std::string field;
    bool quoted = false;
    for (std::size_t i = 0; i < line.size(); ++i) {
        const char c = line[i];
        if (quoted) {
            if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
                field += '"';
                ++i;
            } else if (c == '"') {
                quoted = false;
            } else {
                field += c;
            }
        } else if (c == '"') {
            quoted = true;
        } else if (c == ',') {
            fields.push_back(field);
            field.clear();
        } else if (c != '\r') {
            field += c;
        }
    }
    fields.push_back(field);
    return fields;
}

inline double parse_number(const std::string& text, const std::string& where) {
    try {
        std::size_t used = 0;
        const double v = std::stod(text, &used);
        if (used != text.size())
            throw std::invalid_argument(text);
        return v;
    } catch (const std::exception&) {
        throw InputError(where + ": '" + text + "' is not a number");
    }
}

} // namespace exosieve::detail
