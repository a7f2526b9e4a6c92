// Options of the detectors that run beside the single-count bound: the
// sustained-shift CUSUM and the low-count run. Filled by config/ (`[detect]`
// and `[[series]] detect.*`); see docs/detection.md and docs/config.md.
#pragma once

#include <cstdint>

namespace tallyd {

// How the shift CUSUM's decision limit allows for the error of the fitted
// mean (see detect/shift_cusum.h, InControl, and docs/detection.md):
// fresh: the counts' law at each record is the predictive mixture over the
//        error, drawn afresh every record (the one-step prediction errors of
//        a model refitted every record are close to independent);
// held:  the error is drawn once and held over a whole run (an upper bound on
//        its persistence: it ignores that the refits learn the counts).
enum class ShiftError { fresh, held };

struct DetectSpec {
  // Sustained shift: two one-sided CUSUMs of log-likelihood ratios (Lucas
  // 1985 for Poisson counts, the NB2 analogue for overdispersed series), for
  // a rate multiplied by `shift_factor` (high side) or by 1 / shift_factor
  // (low side). Sides follow alert.direction.
  bool shift = false;               // run the shift CUSUM
  double shift_factor = 2.0;        // rate ratio to detect, > 1 (dimensionless)
  double shift_arl_records = 500;   // target in-control average run length ARL0, in judged records, per side
  ShiftError shift_error = ShiftError::fresh;  // how the limit allows for the fitted mean's error
  // Low-count run: a record is "low" when its count is at or below its low
  // threshold c (the largest count with P(Y <= c) <= low_run_quantile, or 0);
  // an alert is raised when the product of P(Y <= c) over the current run of
  // low records falls to low_run_alpha or below.
  bool low_run = false;             // run the low-count run detector
  double low_run_quantile = 0.1;    // predictive quantile that makes a record "low", in (0, 0.5]
  double low_run_alpha = 0.001;     // joint probability of the run that raises an alert, in (0, 0.5)
  // Silence (detect/silence.h): a series' usual interval is the median of its
  // last `silence_window` gaps between records; once it has at least
  // `silence_min_gaps` gaps, no record for more than silence_multiple usual
  // intervals raises one silence alert, and its next record a recovery line.
  bool silence = false;                // watch the series for silence
  double silence_multiple = 3.0;       // how many usual intervals without a record make it silent, in (1, 1000]
  std::uint32_t silence_min_gaps = 5;  // gaps learned before the series is watched, in [2, 1000]
  std::uint32_t silence_window = 15;   // most recent gaps the median is taken over, in [silence_min_gaps, 1000]
};

}  // namespace tallyd
