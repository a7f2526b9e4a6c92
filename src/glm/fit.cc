#include "glm/fit.h"

#include <cmath>
#include <limits>
#include <string>
#include <utility>
#include <vector>

#include <fmt/format.h>

#include "glm/distribution.h"
#include "glm/irls.h"
#include "glm/negbin.h"
#include "glm/wls.h"

namespace tallyd::glm {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
// A fitted mean below this fraction of the mean count is reported as at the
// boundary mu = 0 (sqrt and identity links).
constexpr double kBoundaryMean = 1e-8;

void add_note(std::string& note, const std::string& text) {
  if (!note.empty()) note += "; ";
  note += text;
}

// Copies of the records a fit uses, made only when some are left out.
struct RecordCopies {
  Eigen::MatrixXd X;
  Eigen::VectorXd y, offset, w;
};

// The records a fit uses: positive prior weight and finite, valid values.
// The references point at the caller's arrays when every record is used
// (the usual case, which then costs no copy), else at a RecordCopies.
struct UsedRecords {
  const Eigen::MatrixXd& X;
  const Eigen::VectorXd& y;
  const Eigen::VectorXd& offset;
  const Eigen::VectorXd& w;
  std::vector<Eigen::Index> row;  // index in the caller's arrays
  int invalid = 0;                // left out for bad values
  Eigen::Index first_invalid = -1;
};

bool record_is_valid(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                     const Eigen::VectorXd& offset, const Eigen::VectorXd& weights,
                     Eigen::Index i) {
  return std::isfinite(weights(i)) && weights(i) > 0 && std::isfinite(y(i)) && y(i) >= 0 &&
         std::isfinite(offset(i)) && X.row(i).allFinite();
}

UsedRecords select_records(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                           const Eigen::VectorXd& offset, const Eigen::VectorXd& weights,
                           RecordCopies& copies) {
  std::vector<Eigen::Index> rows;
  rows.reserve(static_cast<std::size_t>(X.rows()));
  // The usual case, checked column-wise at once: every record is used.
  if (X.allFinite() && y.allFinite() && offset.allFinite() && weights.allFinite() &&
      (y.array() >= 0).all() && (weights.array() > 0).all()) {
    for (Eigen::Index i = 0; i < X.rows(); ++i) rows.push_back(i);
    return UsedRecords{X, y, offset, weights, std::move(rows), 0, -1};
  }
  int invalid = 0;
  Eigen::Index first_invalid = -1;
  for (Eigen::Index i = 0; i < X.rows(); ++i) {
    if (weights(i) == 0) continue;  // left out by the caller: its values do not matter
    if (!record_is_valid(X, y, offset, weights, i)) {
      if (first_invalid < 0) first_invalid = i;
      ++invalid;
      continue;
    }
    rows.push_back(i);
  }
  const auto n = static_cast<Eigen::Index>(rows.size());
  if (n == X.rows()) return UsedRecords{X, y, offset, weights, std::move(rows), invalid, first_invalid};
  copies.X.resize(n, X.cols());
  copies.y.resize(n);
  copies.offset.resize(n);
  copies.w.resize(n);
  for (Eigen::Index k = 0; k < n; ++k) {
    const Eigen::Index i = rows[static_cast<std::size_t>(k)];
    copies.X.row(k) = X.row(i);
    copies.y(k) = y(i);
    copies.offset(k) = offset(i);
    copies.w(k) = weights(i);
  }
  return UsedRecords{copies.X, copies.y, copies.offset, copies.w, std::move(rows), invalid,
                     first_invalid};
}

// Sizes every vector of a result for p columns, with nothing estimated.
FitResult empty_result(Eigen::Index p, const FitOptions& options) {
  FitResult r;
  r.status = FitStatus::failed;
  r.coefficients = Eigen::VectorXd::Zero(p);
  r.aliased.assign(static_cast<std::size_t>(p), true);
  r.covariance = Eigen::MatrixXd::Zero(p, p);
  r.deviance = kNaN;
  r.null_deviance = kNaN;
  r.log_likelihood = kNaN;
  r.aic = kNaN;
  r.dispersion = options.family == Family::quasipoisson ? kNaN : 1.0;
  r.theta = kInf;
  r.theta_std_error = kNaN;
  return r;
}

// Why `options` cannot be used, or "" when they can.
std::string check_options(const FitOptions& o) {
  if (!(o.tolerance > 0) || !std::isfinite(o.tolerance)) return "tolerance must be positive";
  if (o.max_iterations < 1) return "max_iterations must be at least 1";
  if (o.max_halvings < 0) return "max_halvings must not be negative";
  if (!(o.alias_tolerance >= 0 && o.alias_tolerance < 1)) return "alias_tolerance must be in [0, 1)";
  if (!(o.theta_max > 0)) return "theta_max must be positive";
  return "";
}

std::string describe_stop(const IrlsOutcome& fit, int max_iterations) {
  switch (fit.stop) {
    case IrlsStop::converged: return "";
    case IrlsStop::iteration_limit:
      return fmt::format("IRLS did not converge in {} iterations", max_iterations);
    case IrlsStop::no_valid_step:
      return "step-halving found no coefficients giving valid means (mu > 0, finite deviance)";
    case IrlsStop::deviance_stuck:
      return "step-halving could not stop the deviance from rising; the last iterate is kept";
    case IrlsStop::rank_zero:
      return "no estimable column: every column is zero or aliased on the records used";
  }
  return "";
}

// Notes (and status) for fitted means at 0: an MLE at infinity under the
// log link, or on the edge of the valid region under sqrt and identity.
void note_edges(const IrlsOutcome& fit, const UsedRecords& u, Link link, FitResult& r) {
  if (fit.drifting_records > 0) {
    r.status = FitStatus::not_converged;
    const Eigen::Index first = u.row[static_cast<std::size_t>(fit.first_drifting)];
    add_note(r.note, fmt::format("the fitted mean of {} zero-count record(s) (first: record {}) "
                                 "runs to 0: the MLE lies at infinity and the coefficients "
                                 "along that direction are arbitrary",
                                 fit.drifting_records, first));
  }
  if (link == Link::log) return;
  // The sqrt and identity links reach mu = 0 at finite coefficients: an MLE
  // on the edge of the valid region (R's glm.fit gives up there). Step-
  // halving keeps mu > 0, so the fit is usable; the note says where it sits.
  const double edge = kBoundaryMean * u.w.dot(u.y) / u.w.sum();
  int at_edge = 0;
  Eigen::Index first = -1;
  for (Eigen::Index i = 0; i < fit.mu.size(); ++i) {
    if (fit.mu(i) < edge) {
      if (first < 0) first = i;
      ++at_edge;
    }
  }
  if (at_edge > 0) {
    add_note(r.note, fmt::format("the fitted mean of {} record(s) (first: record {}) is at the "
                                 "boundary 0 of the {} link",
                                 at_edge, u.row[static_cast<std::size_t>(first)], to_string(link)));
  }
}

// Coefficients, aliasing, deviance, likelihood, AIC, dispersion, covariance
// and theta of a fit that has coefficients. `wls` holds the factorisation
// of the fit's last IRLS step.
void summarise(const IrlsOutcome& fit, const UsedRecords& u, const FitOptions& options,
               const Distribution& dist, const WeightedLeastSquares& wls, FitResult& r) {
  const Eigen::Index p = fit.beta.size();
  r.coefficients = fit.beta;
  r.aliased = wls.aliased();
  r.rank = fit.rank;
  r.df_residual = r.n - r.rank;
  std::string dropped;
  for (Eigen::Index j = 0; j < p; ++j) {
    if (!r.aliased[static_cast<std::size_t>(j)]) continue;
    r.coefficients(j) = 0;  // IRLS already has 0 here; stated for the reader
    dropped += (dropped.empty() ? "" : ", ") + std::to_string(j);
  }
  if (!dropped.empty()) {
    add_note(r.note, fmt::format("column(s) {} aliased and dropped (coefficient 0)", dropped));
  }

  r.deviance = fit.deviance;
  if (options.family == Family::quasipoisson) {
    r.log_likelihood = kNaN;
    r.aic = kNaN;
    if (r.df_residual > 0) {
      r.dispersion = pearson_chi2(dist, u.y, fit.mu, u.w) / r.df_residual;
    } else {
      r.dispersion = kNaN;
      r.status = FitStatus::failed;
      add_note(r.note, "no residual degrees of freedom: the quasi-Poisson dispersion cannot "
                       "be estimated");
    }
  } else {
    r.log_likelihood = log_likelihood(dist, u.y, fit.mu, u.w);
    // MASS glm.nb counts theta as a parameter, also at the Poisson limit.
    const int extra = options.family == Family::negbin ? 1 : 0;
    r.aic = -2 * r.log_likelihood + 2.0 * (r.rank + extra);
    r.dispersion = 1;
  }

  // The information at the estimate itself: R's summary.glm reuses the
  // factorisation of the last IRLS step, whose weights are one step old
  // (a relative difference of ~1e-8 in the standard errors). Should the
  // aliasing decided at the final weights differ, that step's is kept.
  Eigen::VectorXd sqrt_w;
  sqrt_working_weights(options.link, dist, fit.eta, fit.mu, u.w, sqrt_w);
  WeightedLeastSquares at_estimate;
  at_estimate.solve(u.X, Eigen::VectorXd::Zero(u.y.size()), sqrt_w, options.alias_tolerance);
  const WeightedLeastSquares& information =
      at_estimate.aliased() == wls.aliased() ? at_estimate : wls;
  r.covariance = information.unscaled_covariance() * r.dispersion;

  if (options.family != Family::negbin) return;
  if (r.theta_at_limit) {
    r.theta = kInf;
    r.theta_std_error = kNaN;
    add_note(r.note, fmt::format("theta runs past theta_max = {:g}: the data show no "
                                 "overdispersion, so the fit is the Poisson limit",
                                 options.theta_max));
  } else {
    r.theta = dist.theta;
    const double info = theta_information(u.y, fit.mu, u.w, dist.theta);
    r.theta_std_error = info > 0 ? 1 / std::sqrt(info) : kNaN;
    if (!(info > 0)) add_note(r.note, "the observed information in theta is not positive");
  }
}

// Deviance of the model with the intercept (column 0) and the offset only,
// at the same distribution; with no intercept, the deviance at eta = offset
// (as R's glm.fit computes null.deviance).
double null_deviance(const UsedRecords& u, const IrlsSettings& settings, bool has_intercept,
                     WeightedLeastSquares& wls) {
  const Distribution& dist = settings.distribution;
  if (!has_intercept) {
    Eigen::VectorXd mu(u.y.size());
    for (Eigen::Index i = 0; i < mu.size(); ++i) mu(i) = link_inv(settings.link, u.offset(i));
    return deviance(dist, u.y, mu, u.w);
  }
  const Eigen::MatrixXd intercept = u.X.leftCols(1);
  // Under the log link the Poisson intercept-only MLE has a closed form:
  // exp(b) sum w exp(offset) = sum w y. It is exact for Poisson and a close
  // start for NB2. Scaled by the column-0 value in case it is not 1.
  Eigen::VectorXd start(1);
  const double c = u.X(0, 0);
  start(0) = std::log(u.w.dot(u.y) / u.w.dot(u.offset.array().exp().matrix())) / c;
  const bool use_start = settings.link == Link::log && std::isfinite(start(0));
  const IrlsOutcome fit =
      run_irls(intercept, u.y, u.offset, u.w, settings, use_start ? &start : nullptr, nullptr, wls);
  return fit.has_coefficients ? fit.deviance : kNaN;
}

}  // namespace

std::string_view to_string(FitStatus s) {
  switch (s) {
    case FitStatus::ok: return "ok";
    case FitStatus::not_converged: return "not_converged";
    case FitStatus::failed: return "failed";
  }
  return "unknown";
}

FitResult fit_glm(const Eigen::MatrixXd& X, const Eigen::VectorXd& y, const Eigen::VectorXd& offset,
                  const Eigen::VectorXd& weights, const FitOptions& options,
                  const Eigen::VectorXd* start, bool has_intercept) {
  const Eigen::Index p = X.cols();
  FitResult r = empty_result(p, options);
  if (y.size() != X.rows() || offset.size() != X.rows() || weights.size() != X.rows()) {
    r.note = fmt::format("shape mismatch: X has {} rows, y {}, offset {}, weights {}", X.rows(),
                         y.size(), offset.size(), weights.size());
    return r;
  }
  if (p == 0) {
    r.note = "the design has no columns";
    return r;
  }
  if (const std::string bad = check_options(options); !bad.empty()) {
    r.note = "invalid options: " + bad;
    return r;
  }

  RecordCopies copies;
  const UsedRecords u = select_records(X, y, offset, weights, copies);
  if (u.invalid > 0) {
    add_note(r.note, fmt::format("{} record(s) with a non-finite or negative value left out "
                                 "(first: record {})",
                                 u.invalid, u.first_invalid));
  }
  r.n = static_cast<int>(u.row.size());
  if (r.n == 0) {
    add_note(r.note, "no record with positive weight and valid values");
    return r;
  }
  if (u.w.dot(u.y) == 0) {
    // The MLE of every mean is 0: under the log link the intercept runs to
    // -infinity, and IRLS would stop at an arbitrary large negative value.
    add_note(r.note, fmt::format("all {} counts are zero: the fitted mean is 0 and no finite "
                                 "coefficients exist",
                                 r.n));
    return r;
  }
  if (start != nullptr && start->size() != p) {
    add_note(r.note, fmt::format("start coefficients ignored (length {}, expected {})",
                                 start->size(), p));
    start = nullptr;
  }

  IrlsSettings settings;
  settings.link = options.link;
  settings.tolerance = options.tolerance;
  settings.max_iterations = options.max_iterations;
  settings.max_halvings = options.max_halvings;
  settings.alias_tolerance = options.alias_tolerance;

  WeightedLeastSquares wls;
  IrlsOutcome fit;
  bool converged = false;
  if (options.family == Family::negbin) {
    NegbinOutcome nb = fit_negbin(u.X, u.y, u.offset, u.w, settings, start, options.start_theta,
                                  options.theta_max, wls);
    fit = std::move(nb.fit);
    settings.distribution.theta = nb.theta;
    converged = nb.converged;
    r.iterations = nb.iterations;
    r.theta_at_limit = nb.at_limit || std::isinf(nb.theta);
    if (!converged && fit.stop == IrlsStop::converged) {
      add_note(r.note, "theta and the coefficients did not settle together within the "
                       "iteration limit");
    }
  } else {
    fit = run_irls(u.X, u.y, u.offset, u.w, settings, start, nullptr, wls);
    converged = fit.stop == IrlsStop::converged;
    r.iterations = fit.iterations;
  }

  const std::string stop_note = describe_stop(fit, options.max_iterations);
  if (!stop_note.empty()) add_note(r.note, stop_note);
  if (!fit.has_coefficients || fit.rank == 0) return r;

  r.status = converged ? FitStatus::ok : FitStatus::not_converged;
  note_edges(fit, u, options.link, r);
  summarise(fit, u, options, settings.distribution, wls, r);

  if (options.null_deviance) {
    r.null_deviance = null_deviance(u, settings, has_intercept, wls);
  } else {
    r.null_deviance = kNaN;
  }
  return r;
}

}  // namespace tallyd::glm
