// What `tallyd serve` reads besides the model: its sources, outputs,
// checkpoint, status endpoint and intake limits. Filled by config/ from the
// tables [[source]], [output], [checkpoint], [status] and [intake]
// (docs/config.md); defaults below.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "core/time.h"

namespace tallyd {

enum class SourceKind : std::uint8_t {
  follow,  // a file or glob of files, followed as they grow, rotate or appear
  tcp,     // a listener; each connection sends newline-delimited CSV (header first) or JSON Lines
  udp,     // a listener; one record per datagram
  stdin_,  // the process's standard input
};

struct SourceConfig {
  std::string name;                 // for messages and status; default "<kind>-<index>"
  SourceKind kind = SourceKind::follow;
  std::string path;                 // follow: a path or a glob ('*', '?', '[...]')
  std::string address = "127.0.0.1";  // tcp/udp: address to bind
  std::uint16_t port = 0;           // tcp/udp: port; 0 = any free port (see serve --ports-file)
  // udp: "jsonl" (default), or "csv" with `columns` as the header of every datagram.
  std::string format;
  std::string columns;
};

struct ServiceConfig {
  std::vector<SourceConfig> sources;
  std::string alerts_path = "alerts.jsonl";  // [output] alerts: the JSON Lines alert log
  std::string text_path;                     // [output] text: human-readable alert lines; "" = none
  std::string checkpoint_path = "tallyd.checkpoint";  // [checkpoint] path
  Seconds checkpoint_every{30};              // [checkpoint] every
  bool status_enabled = true;                // [status] enabled
  std::string status_address = "127.0.0.1";  // [status] address
  std::uint16_t status_port = 0;             // [status] port; 0 = any free port
  std::size_t max_line_bytes = 64 * 1024;    // [intake] longest line accepted
  std::size_t max_connections = 64;          // [intake] open TCP connections over all listeners
  std::size_t max_datagram_bytes = 8192;     // [intake] longest datagram accepted
  std::uint32_t poll_ms = 200;               // [intake] how often followed files are checked
  // [intake] clock: "data" (false, default) - held records are released and
  // silence is found only as record times advance, so serving a file equals
  // replaying it; "wall" (true) - also every poll_ms from the system clock,
  // which catches a whole network going quiet but breaks that identity.
  bool wall_clock = false;
};

}  // namespace tallyd
