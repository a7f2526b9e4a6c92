#include "report/output_file.h"

#include <fmt/format.h>

#include <fstream>

namespace tallyd::report {

Status write_output_file(const std::string& path, std::string_view text, std::string_view what) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  if (!out) return Error{fmt::format("{}: cannot write {}", path, what)};
  out.write(text.data(), static_cast<std::streamsize>(text.size()));
  out.flush();
  if (!out) return Error{fmt::format("{}: writing {} failed", path, what)};
  return Ok{};
}

}  // namespace tallyd::report
