#include "engine/output_lines.h"

#include "alert/alert_format.h"

namespace tallyd {
namespace {

void add(const Alert& a, std::vector<OutputLine>& out) { out.push_back(OutputLine{alert_json(a), alert_text(a), true}); }

}  // namespace

std::vector<OutputLine> output_lines(const IngestResult& r) {
  std::vector<OutputLine> out;
  for (const Alert& a : r.released) add(a, out);
  if (r.alert) add(*r.alert, out);
  for (const Alert& a : r.detector_alerts) add(a, out);
  for (const EpisodeEnd& e : r.closed) out.push_back(OutputLine{episode_end_json(e), episode_end_text(e), false});
  return out;
}

std::vector<OutputLine> output_lines(const Released& rel) {
  std::vector<OutputLine> out = output_lines(rel.silence);
  if (rel.result.rejection) return out;
  if (rel.result.recovery) add(*rel.result.recovery, out);
  for (OutputLine& l : output_lines(rel.result)) out.push_back(std::move(l));
  return out;
}

std::vector<OutputLine> output_lines(const std::vector<Alert>& alerts) {
  std::vector<OutputLine> out;
  for (const Alert& a : alerts) add(a, out);
  return out;
}

}  // namespace tallyd
