#pragma once
//! \file file_schema.hpp
//! What a variable of a result file is, written once for every writer and reader: its name,
//! element type, dimensions, units, long name, valid range and CF flags. The lists themselves
//! are in evolution_file.hpp (single runs) and sweep_file.hpp (sweeps); Python builds its
//! declarations, readers and xarray views from them through `_core`.

#include <cstdint>
#include <limits>
#include <string>
#include <vector>

#include "exosieve/hdf5_io.hpp"

namespace exosieve {

//! One variable of a result file.
struct FileVariable {
    std::string name;                    //!< dataset name, e.g. "retained_fraction"
    ValueType type = ValueType::float64; //!< float64, int64 or string
    std::vector<std::string> dims;       //!< dimensions (in sweep files: after `case`)
    std::string units;                   //!< CF units ("1": dimensionless or a code)
    std::string long_name;               //!< what it holds, in words
    //! Valid range, checked when a file is read back (NaN: unchecked); a value outside it can
    //! only come from a damaged file. NaN values themselves mark "missing" and pass.
    double low = std::numeric_limits<double>::quiet_NaN();
    double high = std::numeric_limits<double>::quiet_NaN(); //!< upper end of the valid range
    std::vector<std::int64_t> flag_values;                  //!< CF flag codes (empty: none)
    std::string flag_meanings;                              //!< one word per flag code
    //! When the file has the variable: "" always, else the condition's name (e.g. "envelope")
    std::string present_when;
};

//! One coordinate (dimension) of a result file.
struct FileCoordinate {
    std::string name;      //!< e.g. "time"
    std::string units;     //!< CF units
    std::string long_name; //!< what it holds
};

//! Give a regime code variable CF flags: the code of every Regime and its name (with
//! `with_none`, first -1 for "none"); its valid range becomes that of the codes.
void set_regime_flags(FileVariable& variable, bool with_none);

//! The variable named `name` in `list`; InputError naming it if absent.
const FileVariable& find_variable(const std::vector<FileVariable>& list, const std::string& name);

} // namespace exosieve
