// A fresh directory under the system's temporary directory for one test,
// removed with everything in it when the object goes out of scope.
#pragma once

#include <filesystem>
#include <fstream>
#include <iterator>
#include <random>
#include <string>
#include <string_view>

#include <catch2/catch.hpp>

namespace tallyd::testing {

class TempDir {
 public:
  explicit TempDir(std::string_view prefix = "tallyd-test") {
    std::random_device random;
    do {
      dir_ = std::filesystem::temp_directory_path() / (std::string(prefix) + "-" + std::to_string(random()));
    } while (!std::filesystem::create_directory(dir_));
  }
  ~TempDir() {
    std::error_code ignored;
    std::filesystem::remove_all(dir_, ignored);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  // Writes `content` to a file in the directory and returns its path.
  std::string write(const std::string& name, std::string_view content) const {
    const std::string p = path(name);
    std::ofstream out(p, std::ios::binary);
    out.write(content.data(), static_cast<std::streamsize>(content.size()));
    REQUIRE(out.good());
    return p;
  }
  std::string path(const std::string& name) const { return (dir_ / name).string(); }
  const std::filesystem::path& root() const { return dir_; }

 private:
  std::filesystem::path dir_;
};

// The whole content of the file at `path` (empty when it cannot be read).
inline std::string read_text(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

}  // namespace tallyd::testing
