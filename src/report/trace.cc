#include "report/trace.h"

#include <cmath>
#include <limits>

#include "series/design.h"

namespace tallyd::report {

bool SeriesTrace::exposure_varies() const {
  for (const TracePoint& p : points)
    if (p.exposure != points.front().exposure) return true;
  return false;
}

void TraceCollector::add(const Observation& obs, const IngestResult& r) {
  SeriesTrace& t = traces_[obs.series];
  if (t.id.empty()) t.id = obs.series;
  TracePoint p;
  p.time = obs.time;
  p.count = obs.count;
  p.exposure = obs.exposure;
  if (r.kind == IngestResult::Kind::judged && r.prediction) {
    p.judged = true;
    p.expected = r.prediction->bounds.expected;
    p.lower = r.prediction->bounds.lower;
    p.upper = r.prediction->bounds.upper;
  }
  if (r.alert) {
    p.flag = r.alert->side == AlertSide::high ? 1 : -1;
    (p.flag > 0 ? t.alerts_high : t.alerts_low) += 1;
  }
  t.points.push_back(p);
}

std::vector<SeriesTrace> TraceCollector::finish(const Engine& engine) {
  std::vector<SeriesTrace> out;
  out.reserve(traces_.size());
  for (auto& [id, trace] : traces_) {
    if (const SeriesModel* m = engine.find(id)) {
      const SeriesSettings& s = m->settings();
      trace.family = std::string(glm::to_string(s.model.family));
      trace.alpha = s.alert.alpha;
      if (!m->has_fit()) {
        trace.fit_status = "not fitted";
      } else {
        const ModelFit& f = m->fit();
        trace.fit_status = f.status == glm::FitStatus::ok ? "ok"
                           : f.status == glm::FitStatus::failed ? "failed: " + f.note
                                                                : "not converged: " + f.note;
        const std::vector<std::string> names = coefficient_names(s.model);
        for (Eigen::Index i = 0; i < f.coefficients().size(); ++i) {
          CoefficientRow row;
          if (i < static_cast<Eigen::Index>(names.size())) {
            row.name = names[i];
          } else {
            row.name = 'x';
            row.name += std::to_string(i);
          }
          row.estimate = f.coefficients()(i);
          const bool aliased = static_cast<std::size_t>(i) < f.aliased_count() && f.aliased(static_cast<std::size_t>(i));
          row.std_error = aliased ? std::numeric_limits<double>::quiet_NaN() : std::sqrt(f.covariance()(i, i));
          trace.coefficients.push_back(row);
        }
        trace.dispersion = f.dispersion;
        trace.theta = f.theta;
      }
    }
    out.push_back(std::move(trace));
  }
  traces_.clear();
  return out;
}

}  // namespace tallyd::report
