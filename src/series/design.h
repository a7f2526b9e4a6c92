// The design row of one record: the columns of the linear predictor.
//
// Columns, in order: intercept; trend (years since the series' origin) when
// enabled; for each season, sin and cos of each harmonic; the covariates in
// spec order. Exposure enters so that the mean is proportional to exposure
// under every link:
//   log      eta = x'b + log(exposure)            (offset)
//   sqrt     eta = sqrt(exposure) * x'b            (row scaled, no offset)
//   identity eta = exposure * x'b                  (row scaled, no offset)
// so b always describes the rate per unit of exposure.
#pragma once

#include <string>
#include <vector>

#include <Eigen/Dense>

#include "core/time.h"
#include "series/model_spec.h"

namespace tallyd {

// A writable design row: a plain row vector or a row of a column-major matrix.
using RowRef = Eigen::Ref<Eigen::RowVectorXd, 0, Eigen::InnerStride<>>;

// Column names: "intercept", "trend", "season_1y_sin1", "season_1y_cos1", ..., covariate names.
std::vector<std::string> coefficient_names(const ModelSpec& spec);

// Number of columns the spec produces.
int coefficient_count(const ModelSpec& spec);

struct DesignInput {
  TimePoint time;
  TimePoint origin;                    // the series' first accepted record (trend zero)
  double exposure = 1;                 // > 0
  const double* covariates = nullptr;  // spec.covariates.size() values, in spec order
};

// Writes the row into `row` (resized to coefficient_count) and returns the offset.
double design_row(const ModelSpec& spec, const DesignInput& in, RowRef row);

// The seasonal columns alone (sin and cos of each harmonic of each season,
// in row order): season_column_count values written to `out`. They depend on
// the record's time only, so a series can compute them once per record and
// keep them for its refits; most of design_row's cost is here.
int season_column_count(const ModelSpec& spec);
void season_columns(const ModelSpec& spec, TimePoint time, double* out);
// design_row with the seasonal columns given (as season_columns wrote them):
// the same row and offset, bit for bit, without the sin/cos.
double design_row(const ModelSpec& spec, const DesignInput& in, const double* seasons, RowRef row);

}  // namespace tallyd
