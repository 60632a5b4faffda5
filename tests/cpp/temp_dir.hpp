#pragma once
// Test helper: a fresh directory under the system temporary directory, removed afterwards.

#include <filesystem>
#include <random>
#include <string>
#include <system_error>
#include <vector>

#include <unistd.h>

struct TempDir {
    std::filesystem::path path;
    TempDir() {
        std::random_device random;
        path = std::filesystem::temp_directory_path() /
               ("exosieve-h5-" + std::to_string(::getpid()) + "-" + std::to_string(random()));
        std::filesystem::create_directories(path);
    }
    ~TempDir() {
        std::error_code ec;
        std::filesystem::remove_all(path, ec);
    }
    std::string file(const std::string& name) const { return (path / name).string(); }
    std::vector<std::string> entries() const {
        std::vector<std::string> names;
        for (const auto& e : std::filesystem::directory_iterator(path))
            names.push_back(e.path().filename().string());
        return names;
    }
};
