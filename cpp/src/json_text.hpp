#pragma once
// Internal: JSON text of model configurations, through nlohmann-json. Objects keep their keys in
// the order written (ordered_json), so a configuration reads top-down as the model is built.

#include <string>

#include <nlohmann/json.hpp>

namespace exosieve::detail {

using Json = nlohmann::ordered_json;

// Compact text. Non-finite numbers have no JSON form and become null; bytes that are not UTF-8
// (a name passed in from C++) are replaced rather than refused.
inline std::string json_text(const Json& value) {
    return value.dump(-1, ' ', false, Json::error_handler_t::replace);
}

// A configuration already in text form (a component's to_json()), as a value to nest.
inline Json json_value(const std::string& text) {
    return Json::parse(text);
}

} // namespace exosieve::detail
