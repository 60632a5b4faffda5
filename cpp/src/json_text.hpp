#pragma once
// Internal: just enough JSON writing for model configurations (no parsing).

#include <charconv>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

namespace exosieve::detail {

inline std::string json_string(const std::string& value) {
    std::string out = "\"";
    for (const char c : value) {
        switch (c) {
        case '"':
            out += "\\\"";
            break;
        case '\\':
            out += "\\\\";
            break;
        case '\n':
            out += "\\n";
            break;
        case '\t':
            out += "\\t";
            break;
        case '\r':
            out += "\\r";
            break;
        default:
            if (static_cast<unsigned char>(c) < 0x20) {
                char buf[8];
                std::snprintf(buf, sizeof buf, "\\u%04x", c);
                out += buf;
            } else {
                out += c;
            }
        }
    }
    return out + "\"";
}

// Shortest text that reads back to the same double; non-finite numbers have no JSON form: null.
inline std::string json_number(double value) {
    if (!std::isfinite(value))
        return "null";
    char buf[32];
    const auto end = std::to_chars(buf, buf + sizeof buf, value).ptr;
    return std::string(buf, end);
}

inline std::string json_array(const std::vector<double>& values) {
    std::string out = "[";
    for (std::size_t i = 0; i < values.size(); ++i)
        out += (i ? ", " : "") + json_number(values[i]);
    return out + "]";
}

inline std::string json_array(const std::vector<std::string>& values) {
    std::string out = "[";
    for (std::size_t i = 0; i < values.size(); ++i)
        out += (i ? ", " : "") + json_string(values[i]);
    return out + "]";
}

// {"a": 1, "b": ...} from already-encoded values.
class JsonObject {
  public:
    JsonObject& add(const std::string& key, const std::string& encoded) {
        text_ += (text_.size() > 1 ? ", " : "") + json_string(key) + ": " + encoded;
        return *this;
    }
    JsonObject& number(const std::string& key, double value) {
        return add(key, json_number(value));
    }
    JsonObject& string(const std::string& key, const std::string& value) {
        return add(key, json_string(value));
    }
    std::string str() const { return text_ + "}"; }

  private:
    std::string text_ = "{";
};

} // namespace exosieve::detail
