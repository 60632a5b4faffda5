#pragma once
// Internal: "closest names" suggestions for a misspelt name, by edit distance. One home for the
// species registry and the case-table columns.

#include <algorithm>
#include <cctype>
#include <cstddef>
#include <string>
#include <utility>
#include <vector>

namespace exosieve::detail {

// Levenshtein distance, letters compared without case (so "he" is 0 from "He").
inline std::size_t edit_distance(const std::string& a, const std::string& b) {
    std::vector<std::size_t> row(b.size() + 1);
    for (std::size_t j = 0; j <= b.size(); ++j)
        row[j] = j;
    for (std::size_t i = 1; i <= a.size(); ++i) {
        std::size_t diagonal = row[0];
        row[0] = i;
        for (std::size_t j = 1; j <= b.size(); ++j) {
            const std::size_t above = row[j];
            const bool same = std::tolower(static_cast<unsigned char>(a[i - 1])) ==
                              std::tolower(static_cast<unsigned char>(b[j - 1]));
            row[j] = std::min({row[j] + 1, row[j - 1] + 1, diagonal + (same ? 0 : 1)});
            diagonal = above;
        }
    }
    return row[b.size()];
}

// The `count` candidates closest to `name`, nearest first; ties keep the candidates' order.
inline std::vector<std::string> closest_names(const std::string& name,
                                              const std::vector<std::string>& candidates,
                                              std::size_t count) {
    std::vector<std::pair<std::size_t, std::size_t>> scored; // (distance, index)
    scored.reserve(candidates.size());
    for (std::size_t k = 0; k < candidates.size(); ++k)
        scored.emplace_back(edit_distance(name, candidates[k]), k);
    std::stable_sort(scored.begin(), scored.end(),
                     [](const auto& x, const auto& y) { return x.first < y.first; });
    std::vector<std::string> out;
    for (std::size_t k = 0; k < scored.size() && k < count; ++k)
        out.push_back(candidates[scored[k].second]);
    return out;
}

} // namespace exosieve::detail
