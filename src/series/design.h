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

}  // namespace tallyd
