#pragma once
// Internal: what each column of a case table holds, worked out once per table (TablePlan), and
// reading a row with it; shared by case_from_table() and the batch engine.

#include <cstddef>
#include <string>
#include <vector>

#include "case_slots.hpp"
#include "exosieve/case_table.hpp"
#include "exosieve/species.hpp"

namespace exosieve::detail {

// What kind of width a column holds, by its suffix (the longest first).
enum class WidthColumn { none, sigma, lnsigma, sigma_upper, sigma_lower };

// The kind of width column `name` is; `base` receives the uncertain parameter's name.
WidthColumn width_column(const std::string& name, std::string* base = nullptr);

// A split normal's width column.
inline bool is_split(WidthColumn w) {
    return w == WidthColumn::sigma_upper || w == WidthColumn::sigma_lower;
}

// What a numeric column of a table holds, worked out once per table instead of once per row.
struct ColumnRole {
    const CaseParameter* parameter = nullptr; // range of the value (or of the value uncertain)
    std::size_t global = none;                // slot of a case parameter, or none
    std::size_t species = none;               // table species of a per-species column
    std::size_t per_species = none;           // its index in species_parameters()
    bool sigma = false, lnsigma = false;      // an uncertainty column
    WidthColumn width = WidthColumn::none;    // which kind of width column
    std::string base;                         // the uncertain parameter's name
    std::size_t value_column = none;          // an uncertainty's value column
    std::size_t partner_column = none;        // a split normal's other width column
};

// The columns of a table read for its rows.
struct TablePlan {
    std::vector<ColumnRole> roles;       // per numeric column
    std::vector<Species> species;        // table species (x_ columns), numbers only
    std::vector<std::size_t> x_column;   // per table species: its x_ column
    std::size_t density_scaling = none;  // text column, or none
    std::size_t diffusion_source = none; // text column, or none
    std::size_t exobase_composition = none, escaping_species = none,
                activation = none;       // text columns, or none
    std::vector<std::size_t> present;    // scratch: table species of the case
    std::vector<std::size_t> case_index; // scratch: table species -> case species, or none
};

// The plan of `table` (it holds scratch space: one per thread).
TablePlan plan_table(const CaseTable& table);

// Row `row` of `table` as a case; InputError naming the row and the column for a bad value.
CaseSpec read_case(const CaseTable& table, TablePlan& plan, std::size_t row);

} // namespace exosieve::detail
