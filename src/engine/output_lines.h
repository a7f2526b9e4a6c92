// What the engine's results add to an alert log, shared by `replay` and
// `serve` so that both write the same lines in the same order.
#pragma once

#include <string>
#include <vector>

#include "engine/engine.h"

namespace tallyd {

// One line of the alert log.
struct OutputLine {
  std::string json;    // JSON Lines object (alert/alert_format.h), without '\n'
  std::string text;    // the human-readable twin
  bool alert = true;   // false for an episode's closing line (not an alert)
};

// The lines of one ingest result, in the order they are written: alerts
// released by the control across series, the record's bound alert, its
// detector alerts, then the episodes it closed. Empty for most records.
std::vector<OutputLine> output_lines(const IngestResult& r);

// The lines of one record released by Engine::offer, in order: the silence
// alerts raised as the clock reached it, then (unless it was refused) its
// recovery line (detect/silence.h) and output_lines(rel.result).
std::vector<OutputLine> output_lines(const Released& rel);

// The lines of alerts returned outside ingest (Engine::flush, the silence
// alerts of OfferResult::silence), in order.
std::vector<OutputLine> output_lines(const std::vector<Alert>& alerts);

}  // namespace tallyd
