// Internal to config/: reads the service tables of a parsed TOML document.
#pragma once

#include <string>
#include <string_view>

#include <toml++/toml.h>

#include "config/service_config.h"

namespace tallyd {

// Fills `out` from root's [[source]], [output], [checkpoint], [status] and
// [intake] tables. Returns "" or the first error as "file:line: key: what".
std::string read_service_tables(const toml::table& root, std::string_view source, ServiceConfig& out);

}  // namespace tallyd
