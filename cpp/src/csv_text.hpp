#pragma once
// Internal: the small CSV dialect of the data tables compiled into the library
// (comma-separated, double-quoted fields, no embedded newlines).

#include <algorithm>
#include <sstream>
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

//! One data line of a CSV table: where it is ("origin line N") and its fields by column name.
class CsvRow {
  public:
    CsvRow(std::string where, const std::vector<std::string>& header,
           std::vector<std::string> fields)
        : where(std::move(where)), header_(header), fields_(std::move(fields)) {}

    //! Text of `column` (a column the header is known to hold).
    const std::string& field(const std::string& column) const {
        const auto at = std::find(header_.begin(), header_.end(), column) - header_.begin();
        return fields_[static_cast<std::size_t>(at)];
    }
    //! Number in `column`; InputError naming the line and column otherwise.
    double number(const std::string& column) const {
        return parse_number(field(column), where + " column " + column);
    }

    const std::string where; //!< "origin line N", for error messages

  private:
    const std::vector<std::string>& header_;
    std::vector<std::string> fields_;
};

//! Call `row(CsvRow)` for every data line of `text`, skipping blank and '#' lines. The first
//! other line is the header and must hold every `required` column; errors name `origin`, and
//! an InputError thrown by `row` gets the line prefixed.
template <class Row>
void for_each_csv_row(const std::string& text, const std::string& origin,
                      const std::vector<std::string>& required, Row row) {
    std::istringstream in(text);
    std::string line;
    std::vector<std::string> header;
    std::size_t line_number = 0;
    while (std::getline(in, line)) {
        ++line_number;
        if (line.empty() || line[0] == '#' || line.find_first_not_of(" \t\r") == std::string::npos)
            continue;
        auto fields = split_csv_line(line);
        if (header.empty()) {
            header = fields;
            for (const auto& column : required)
                if (std::find(header.begin(), header.end(), column) == header.end())
                    throw InputError(origin + ": missing column '" + column + "'");
            continue;
        }
        const std::string where = origin + " line " + std::to_string(line_number);
        if (fields.size() != header.size())
            throw InputError(where + ": " + std::to_string(fields.size()) + " fields, header has " +
                             std::to_string(header.size()));
        const CsvRow data(where, header, std::move(fields));
        try {
            row(data);
        } catch (const InputError& e) {
            const std::string what = e.what();
            if (what.rfind(where, 0) == 0)
                throw;
            throw InputError(where + ": " + what);
        }
    }
    if (header.empty())
        throw InputError(origin + ": no header line");
}

} // namespace exosieve::detail
