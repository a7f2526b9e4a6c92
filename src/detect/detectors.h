// The detectors that run after the single-count bound, on the same
// prediction: the sustained-shift CUSUM (both sides) and the low-count run.
//
// All per-series detector state lives in DetectorState, a plain struct with
// explicit fields and no caches, so a checkpoint can save it field by field
// and a restored series continues exactly as an uninterrupted one.
// Deterministic: the same records in the same order give the same alerts.
#pragma once

#include <cstdint>
#include <vector>

#include "alert/alert.h"
#include "core/observation.h"
#include "detect/detect_spec.h"
#include "detect/shift_cusum.h"
#include "series/series_model.h"

namespace tallyd::detect {

// Everything a series' detectors remember between records.
struct DetectorState {
  double shift_high = 0;            // CUSUM statistic for a rate increase, in nats (>= 0)
  double shift_low = 0;             // CUSUM statistic for a rate decrease, in nats (>= 0)
  double run_log_probability = 0;   // log of the product of P(Y <= c) over the current run of low records (<= 0)
  std::uint32_t run_records = 0;    // records in the current run of low records
};

// What the prediction says about the in-control counts: the predictive
// mean, the fitted noise (NB2 size theta; quasi-Poisson phi), and, under the
// log link, the variance of the fitted log mean (eta_variance), which the
// CUSUM's limit allows for (see shift_cusum.h, InControl); `dispersion_df`
// is the fit's residual degrees of freedom (glm::FitResult::df_residual),
// kept only for a quasi-Poisson noise (0: phi taken as known).
InControl in_control_of(const Prediction& prediction, double dispersion_df = 0);

// The in-control count law the CUSUM scores counts against: NB2 (or
// Poisson) with the predictive mean and variance, scored_law(in_control_of).
// The variance is the fitted noise's (Poisson mu; NB2 mu + mu^2 / theta;
// quasi-Poisson phi mu) plus, under the log link, the spread of the mean from
// the coefficients' uncertainty, mu^2 (exp(eta_variance) - 1).
CountLaw law_of(const Prediction& prediction);

// Updates `state` with the judged record and returns the alerts it raises
// (detector "shift" on either side, "low_run" on the low side), in that
// order. Sides follow settings.alert.direction; detectors switched off in
// settings.detect leave their fields untouched. `limits` is the value cache
// of CUSUM decision limits; `dispersion_df` as for in_control_of. Never
// throws on data.
std::vector<Alert> run_detectors(DetectorState& state, const Observation& obs, const Prediction& prediction,
                                 const SeriesSettings& settings, LimitTable& limits, double dispersion_df = 0);

// Labels written in the alert's "detector" field.
inline constexpr const char* kShiftLabel = "shift";
inline constexpr const char* kLowRunLabel = "low_run";

}  // namespace tallyd::detect
