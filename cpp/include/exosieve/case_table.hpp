#pragma once
//! \file case_table.hpp
//! Case tables: the parameters a planet case may carry (names, SI units, allowed ranges, the
//! per-species and text columns), a table of cases in SI columns, and one row read into a
//! CaseSpec.
//!
//! A case is a set of named parameters in SI units (the quantities of a case-table row, e.g.
//! "planet_mass" [kg]) plus its species and the uncertainties of its parameters
//! (case_sampling.hpp draws from them; case_config.hpp turns a case into an EvolutionConfig).

#include <cstddef>
#include <cstdint>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "exosieve/diffusion.hpp"
#include "exosieve/exobase_model.hpp"
#include "exosieve/hydrodynamic.hpp"
#include "exosieve/species.hpp"

namespace exosieve {

//! Shape of a parameter's uncertainty.
enum class Distribution : int {
    Normal = 0,    //!< width is the standard deviation, in the parameter's SI unit
    LogNormal = 1, //!< width is the standard deviation of ln X [1]; the value is the median
    //! width is the upper and width_lower the lower width, in the parameter's SI unit; the
    //! value is the mode
    SplitNormal = 2,
};

//! Parameters a case may carry: name, SI unit, and whether an uncertainty may be given.
struct CaseParameter {
    std::string name;       //!< e.g. "planet_mass"
    std::string unit;       //!< SI unit, e.g. "kg"
    std::string meaning;    //!< one line of documentation
    bool required = false;  //!< every case needs it (per-species: "x_" columns)
    bool uncertain = true;  //!< a _sigma, _lnsigma or _sigma_upper/_sigma_lower pair may be given
    double lower = 0.0;     //!< smallest allowed value
    bool lower_open = true; //!< lower bound excluded
    double upper = 0.0;     //!< largest allowed value (inf: none)
};

//! The uncertainty of one parameter of a case.
struct Uncertainty {
    std::string parameter;                            //!< parameter name, e.g. "planet_mass"
    Distribution distribution = Distribution::Normal; //!< shape
    double width = 0.0;       //!< sigma [SI], sigma of ln X [1], or the upper width [SI] (>= 0)
    double width_lower = 0.0; //!< split normal: the width below the value [SI] (>= 0)
    std::size_t slot = 0;     //!< index of the value in CaseSpec::values
    const CaseParameter* range = nullptr; //!< the parameter's allowed range
};

//! One planet case: SI parameter values by slot, its species and their uncertainties.
//! `values` holds case_parameters() in order (slots 0 .. P-1), then for each per-species
//! parameter k of species_parameters() (k = 0: mole fraction, 1: initial inventory, ...) its
//! value for each entry i of `species` (slot P + k n + i); NaN where not given. Slots instead
//! of names: a sweep reads, samples and builds every case without a string lookup.
struct CaseSpec {
    std::string name;             //!< case label
    std::string label;            //!< where the case comes from, for messages (e.g. "line 7")
    std::uint64_t key = 0;        //!< index of the case in its full table; seeds its samples
    std::vector<Species> species; //!< species present (mole fraction > 0), in table order
    std::vector<double> values;   //!< parameter values [SI] by slot (see above); NaN: not given
    DensityScaling scaling = DensityScaling::Inventory; //!< how exobase densities follow N_i
    //! Binary diffusion parameters of a thermosphere (text column "diffusion_source").
    DiffusionMethod diffusion = DiffusionMethod::measured_first;
    bool diffusion_given = false; //!< the row names a diffusion source
    //! A prescribed exobase takes the bulk fractions x_i as its composition (text column
    //! "exobase_composition" 'bulk'), instead of exobase_x_<species>.
    bool exobase_composition_bulk = false;
    std::string escaping_species; //!< energy-limited: the light escaping species ("": lightest)
    //! Energy-limited: when it replaces Jeans escape (text column "energy_limited_activation").
    HydrodynamicActivation activation = HydrodynamicActivation::Hydrodynamic;
    bool activation_given = false;          //!< the row names an activation
    std::vector<Uncertainty> uncertainties; //!< uncertain parameters, in a fixed order
    std::string error; //!< non-empty: the case is invalid and is reported, not run

    //! Bulk (well-mixed) mole fraction [1] of species `i` of `species`.
    double mole_fraction(std::size_t i) const;
    //! Initial inventory [particles] of species `i` of `species`; NaN when not given.
    double inventory(std::size_t i) const;
    //! Value [SI] of per-species parameter `k` (index in species_parameters()) of species `i`
    //! of `species`; NaN when not given.
    double species_value(std::size_t k, std::size_t i) const;
    //! Value [SI] of parameter `name` (also a per-species one, e.g. "x_He", of a present
    //! species); NaN when not given.
    double value(const std::string& name) const;
    //! Every given parameter [SI] by name.
    std::map<std::string, double> named_values() const;
};

//! The parameters of a case, in documentation order; the per-species ones are in
//! species_parameters().
const std::vector<CaseParameter>& case_parameters();

//! Per-species parameters, in slot order: a column "<prefix><species>" for a species of the
//! table, the name here being "<prefix><species>": "x_<species>" (bulk, well-mixed mole fraction
//! [1]: the shares of a total inventory and the homopause composition of a thermosphere),
//! "inventory_<species>" (initial inventory [particles]), "given_loss_<species>" (a loss given
//! beyond thermal escape [s^-1]: constant, or L_ref of an XUV power law),
//! "given_loss_exponent_<species>" (that law's exponent p [1]), "exobase_x_<species>" (mole
//! fraction at a prescribed exobase [1], never an inventory share),
//! "drag_diffusion_<species>" and "drag_diffusion_exponent_<species>" (A [m^-1 s^-1] and s [1]
//! of the binary diffusion law b = A (T / 1 K)^s of a species dragged by energy-limited escape).
//! Every one but "x_" needs the species' "x_" column.
const std::vector<CaseParameter>& species_parameters();

//! A text column of a case table: its name and what it holds.
struct CaseTextColumn {
    std::string name;    //!< e.g. "density_scaling"
    std::string meaning; //!< one line of documentation, with the values it takes
};

//! The text columns a case table may carry, "case" first.
const std::vector<CaseTextColumn>& case_text_columns();

//! Index in species_parameters() of the per-species column `column` (the longest prefix that
//! matches, so "given_loss_exponent_H" is an exponent), its species going to `species`;
//! species_parameters().size() when `column` is not per species.
std::size_t find_species_parameter(const std::string& column, std::string* species = nullptr);

//! A heading under which the parameters are listed (`exosieve columns`): those of
//! case_parameters() from `first` up to the next group's first, then the per-species
//! parameters named in `species` (e.g. "given_loss_<species>").
struct CaseParameterGroup {
    std::string heading;              //!< what the parameters describe
    std::string first;                //!< the group's first parameter in case_parameters()
    std::vector<std::string> species; //!< per-species parameters listed with the group
};

//! The groups of the parameters, in documentation order.
const std::vector<CaseParameterGroup>& case_parameter_groups();

//! Largest |sum - 1| of a case's mole fractions "x_<species>" (and of its exobase fractions
//! "exobase_x_<species>", when given) [1]. A row whose fractions sum further from one is refused
//! (InputError naming the row and the sum; with skip_invalid the row is reported instead).
constexpr double mole_fraction_sum_tolerance = 1e-3;

//! The allowed range of parameter `name` (also a per-species one, e.g. "x_He"); nullptr when
//! unknown.
const CaseParameter* find_case_parameter(const std::string& name);

//! A case table in SI: numeric columns by parameter name (NaN: not given for that row), text
//! columns, one label per row for messages. Column "<name>_sigma" holds a normal standard
//! deviation [SI], "<name>_lnsigma" a log-normal width [1], and the pair "<name>_sigma_upper",
//! "<name>_sigma_lower" the widths above and below the value of a split normal [SI].
struct CaseTable {
    std::vector<std::string> names;      //!< case labels, one per row
    std::vector<std::string> row_labels; //!< e.g. "line 7" or "row 3"; empty: "row <i+1>"
    std::vector<std::string> row_errors; //!< empty, or per row: a parse error ("" if none)
    std::uint64_t first_key = 0;         //!< key of row 0 (its index in the full table)
    std::vector<std::pair<std::string, std::vector<double>>> columns;   //!< name -> SI values
    std::vector<std::pair<std::string, std::vector<std::string>>> text; //!< name -> text
    //! Numeric column name -> the unit its values were given in and that unit's SI value
    //! (e.g. "M_earth", 5.97e24 kg), so that messages show a bad value as given; without an
    //! entry a column's values are shown in SI.
    std::map<std::string, std::pair<std::string, double>> given_units;

    //! Number of rows.
    std::size_t rows() const { return names.size(); }
    //! Label of row `i` for messages.
    std::string row_label(std::size_t i) const;
};

//! Throw InputError for a table whose columns cannot be read at all (unknown or duplicate
//! column, sigma without its value column, columns of unequal length, no species).
void check_table_columns(const CaseTable& table);

//! The case in row `row` of `table`. Throws InputError naming the row and the column for a
//! value that is missing or out of range (the spec's `error` is not used).
CaseSpec case_from_table(const CaseTable& table, std::size_t row);

//! Species of a table in column order ("x_<species>" columns).
std::vector<std::string> table_species(const CaseTable& table);

//! Uncertain inputs of a table: the parameters with a "_sigma", "_lnsigma" or split-normal
//! ("_sigma_upper", "_sigma_lower") column, in the order of their first such column (e.g.
//! "planet_mass", "x_He"). A row without a width for one of them holds it fixed.
std::vector<std::string> table_inputs(const CaseTable& table);

} // namespace exosieve
