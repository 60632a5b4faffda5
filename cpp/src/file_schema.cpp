#include "exosieve/file_schema.hpp"

#include "exosieve/errors.hpp"
#include "exosieve/hydrodynamic.hpp"

namespace exosieve {

void set_regime_flags(FileVariable& variable, bool with_none) {
    variable.flag_values.clear();
    variable.flag_meanings.clear();
    if (with_none) {
        variable.flag_values.push_back(-1);
        variable.flag_meanings = "none";
    }
    for (Regime k : all_regimes) {
        variable.flag_values.push_back(static_cast<std::int64_t>(k));
        variable.flag_meanings += (variable.flag_meanings.empty() ? "" : " ");
        variable.flag_meanings += regime_name(k);
    }
    variable.low = static_cast<double>(variable.flag_values.front());
    variable.high = static_cast<double>(variable.flag_values.back());
}

const FileVariable& find_variable(const std::vector<FileVariable>& list, const std::string& name) {
    for (const FileVariable& v : list)
        if (v.name == name)
            return v;
    throw InputError("no file variable named '" + name + "'");
}

} // namespace exosieve
