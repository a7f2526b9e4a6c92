// The Benjamini-Hochberg (1995) step-up procedure, and the per-time-step
// gate that applies it across series.
#pragma once

#include <cstdint>
#include <optional>
#include <vector>

#include "alert/alert.h"
#include "bounds/predictive.h"
#include "core/observation.h"
#include "core/time.h"
#include "series/model_spec.h"

namespace tallyd::detect {

// Benjamini and Hochberg (1995): with the m p-values sorted, p_(1) <= ... <=
// p_(m), reject the k smallest, k the largest i with p_(i) <= i q / m.
// Returns, for each input in input order, the BH-adjusted p-value
// min over j >= rank of (m p_(j) / j), capped at 1 (as R's p.adjust "BH");
// p-value i is rejected exactly when adjusted[i] <= q. Ties keep input order.
std::vector<double> bh_adjust(const std::vector<double>& p_values);

// Options of control across series (config table [fdr]).
struct FdrSpec {
  bool enabled = false;    // when false, every count is judged alone at alert.alpha
  double rate = 0.05;      // q: the false discovery rate per time step, in (0, 0.5)
  Seconds step{7 * 86400}; // time-step length; steps are [k * step, (k + 1) * step) in UTC epoch seconds
  // `serve` only (replay closes the last step at the end of its feeds): the
  // open step is released once the wall clock is release_delay past its end
  // and no line has been read for release_idle (daemon/step_release.h).
  Seconds release_delay{86400};
  Seconds release_idle{60};
};

// One judged record waiting for its time step to close: the alert it would
// raise (side, bounds, counts), with p_value its one-sided tail probability
// on that side (both sides watched: twice the smaller tail, capped at 1).
struct FdrCandidate {
  Alert alert;
};

// The candidate for a judged record: the side with the smaller tail among
// those `spec.direction` watches; p_value that tail, doubled (capped at 1)
// when both sides are watched.
FdrCandidate fdr_candidate(const Observation& obs, const bounds::Bounds& b, const AlertSpec& spec);

// Everything the gate remembers; plain, for checkpoints.
struct FdrState {
  std::optional<std::int64_t> open_step;  // index of the step being collected
  std::vector<FdrCandidate> pending;       // judged records of the open step, in arrival order
  std::optional<std::int64_t> closed_through;  // the latest step already closed
};

// The step index of a time: floor(epoch seconds / step).
std::int64_t step_of(TimePoint time, Seconds step);

// Offers a judged record at `time` to the gate. When the record belongs to a
// later step than the open one, the open step is closed first: BH at
// spec.rate over all its candidates, and the rejected ones are returned as
// alerts (detector "bound_fdr", alpha the BH threshold i q / m of the largest
// rejected rank, statistic the adjusted p-value), in arrival order. A record
// of a step already closed (a late record) is decided alone against
// q / known_series (Bonferroni over the series, conservative).
std::vector<Alert> fdr_offer(FdrState& state, const FdrSpec& spec, const FdrCandidate& candidate,
                             std::size_t known_series);

// A record at `time` that is not judged (warming up) still shows that time
// has moved on: closes the open step when `time` is in a later step, and
// returns its alerts.
std::vector<Alert> fdr_tick(FdrState& state, const FdrSpec& spec, TimePoint time);

// Closes the open step (end of a replay, or a service that knows no more
// records of that step can come) and returns its alerts.
std::vector<Alert> fdr_close(FdrState& state, const FdrSpec& spec);

inline constexpr const char* kFdrLabel = "bound_fdr";

}  // namespace tallyd::detect
