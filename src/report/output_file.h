// Writing a whole text file (a report, a picture, a rows file) at once.
#pragma once

#include <string>
#include <string_view>

#include "core/result.h"

namespace tallyd::report {

// Writes `text` to `path`, replacing it. Fails with a message naming the
// path and `what` ("the report", "the rows file") when it cannot be written.
Status write_output_file(const std::string& path, std::string_view text, std::string_view what);

}  // namespace tallyd::report
