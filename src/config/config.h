// Reading a tallyd config (TOML). This module is the only user of toml++: it
// fills the options structs of the other modules, overriding only the fields
// the file sets.
//
// Layout:
//   [model]   defaults for every series (series/model_spec.h: ModelSpec)
//   [[model.seasons]] period = "1y", harmonics = 2
//   [alert]   defaults for judging (AlertSpec)
//   [detect]  shift CUSUM and low-count run (detect/detect_spec.h: DetectSpec)
//   [fdr]     Benjamini-Hochberg across series per time step (detect/fdr.h: FdrSpec)
//   [limits]  engine limits (EngineLimits)
//   [[series]] match = "glob", then model.* / alert.* overrides; first match wins
//   [[source]], [output], [checkpoint], [status], [intake]: for `serve` (ServiceConfig)
// Every error names the file, the line and the key, e.g.
//   "monitor.toml:7: model.family: 'poison' is not one of poisson, quasipoisson, negbin".
// Unknown keys are errors (a typo must not silently fall back to a default).
#pragma once

#include <string>
#include <string_view>

#include "config/service_config.h"
#include "core/result.h"
#include "engine/engine.h"
#include "series/model_spec.h"

namespace tallyd {

struct MonitorConfig {
  SettingsTable settings;
  EngineLimits limits;
  detect::FdrSpec fdr;    // [fdr]: control across series per time step (off by default)
  ServiceConfig service;  // used by `serve` only (config/service_config.h)
  std::string source;  // file the config came from ("" for built-in defaults)
};

// Parses TOML text; `source_name` is used in messages.
Result<MonitorConfig> parse_config(std::string_view text, std::string_view source_name);

// Reads and parses a file; a missing or unreadable file is an error naming it.
Result<MonitorConfig> load_config(const std::string& path);

// load_config(path), or the built-in defaults when `path` is empty.
Result<MonitorConfig> load_config_or_defaults(const std::string& path);

}  // namespace tallyd
