#include "glm/small_fit.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>

#include "glm/distribution.h"
#include "glm/factor_inverse.h"
#include "glm/wls.h"

namespace tallyd::glm {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

// Means outside this range are left to fit_glm: there w mu^2 / mu can
// overflow or underflow, which its working weights treat specially.
constexpr double kSmallestMean = 1e-150;
constexpr double kLargestMean = 1e150;
// Prior weights outside this range likewise (w mu could leave the doubles).
constexpr double kSmallestWeight = 1e-100;
constexpr double kLargestWeight = 1e100;

// A zero-count record whose eta falls by more than this when the deviance
// settles is running off to mu = 0 (glm/irls.cc, kDriftPerIteration); that
// fit is left to fit_glm, which reports it.
constexpr double kDriftPerIteration = 0.5;

// out[k] = sum_i w_i x0_i xk_i for the M columns x0 = columns[0], ...,
// columns[M - 1]: the weighted column x0 is formed and each of its packets
// used for all M sums while loaded, where M separate dot products would
// load it M times. Eigen's packets (SSE2, AVX or NEON, as compiled), with
// the tail and the lanes summed last: the order of the sums differs from a
// dot product's, by rounding only.
template <int M>
void cross_products_of(const double* w, const double* const* columns, Eigen::Index n, double* out) {
  using Packet = Eigen::internal::packet_traits<double>::type;
  // (unpacket_traits of an SSE packet type drops its vector attribute: harmless, silenced.)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wignored-attributes"
  constexpr Eigen::Index kLanes = Eigen::internal::unpacket_traits<Packet>::size;
#pragma GCC diagnostic pop
  Packet sums[M];
  for (int k = 0; k < M; ++k) sums[k] = Eigen::internal::pset1<Packet>(0.0);
  Eigen::Index i = 0;
  for (; i + kLanes <= n; i += kLanes) {
    const Packet a = Eigen::internal::pmul(Eigen::internal::ploadu<Packet>(w + i),
                                           Eigen::internal::ploadu<Packet>(columns[0] + i));
    for (int k = 0; k < M; ++k)
      sums[k] = Eigen::internal::padd(sums[k], Eigen::internal::pmul(a, Eigen::internal::ploadu<Packet>(columns[k] + i)));
  }
  for (int k = 0; k < M; ++k) {
    double total = Eigen::internal::predux(sums[k]);
    for (Eigen::Index t = i; t < n; ++t) total += w[t] * columns[0][t] * columns[k][t];
    out[k] = total;
  }
}

void cross_products(int m, const double* w, const double* const* columns, Eigen::Index n,
                    double* out) {
  switch (m) {
    case 1: cross_products_of<1>(w, columns, n, out); return;
    case 2: cross_products_of<2>(w, columns, n, out); return;
    case 3: cross_products_of<3>(w, columns, n, out); return;
    case 4: cross_products_of<4>(w, columns, n, out); return;
    case 5: cross_products_of<5>(w, columns, n, out); return;
    case 6: cross_products_of<6>(w, columns, n, out); return;
    case 7: cross_products_of<7>(w, columns, n, out); return;
    case 8: cross_products_of<8>(w, columns, n, out); return;
    default: cross_products_of<SmallFit::kMaxColumns + 1>(w, columns, n, out); return;
  }
}

double relative_change(double dev, double dev_old) {
  return (dev - dev_old) / (std::abs(dev) + 0.1);
}

}  // namespace

bool SmallFit::applies(const FitOptions& o, int p) {
  return (o.family == Family::poisson || o.family == Family::quasipoisson) &&
         o.link == Link::log && p >= 1 && p <= kMaxColumns && !o.null_deviance &&
         o.tolerance > 0 && std::isfinite(o.tolerance) && o.max_iterations >= 1 &&
         o.max_halvings >= 0 && o.alias_tolerance >= 0 &&
         o.alias_tolerance <= WeightedLeastSquares::kNormalOwnRatio;
}

void SmallFit::use(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                   const Eigen::VectorXd& offset) {
  X_ = &X;
  y_ = &y;
  offset_ = &offset;
  has_estimate_ = false;
  const Eigen::Index n = X.rows();
  // x * 0 is 0 for every finite x and NaN for inf and NaN: one vectorised
  // sum per array says whether all are finite.
  const auto finite = [](const auto& a) { return (a.array() * 0.0).sum() == 0.0; };
  design_ok_ = y.size() == n && offset.size() == n && finite(X) && finite(offset) && finite(y) &&
               (y.array() >= 0).all();
  // log y once for every fit of this design (irls.cc does it once per fit),
  // and once per distinct small count: a window holds a few dozen.
  constexpr int kTable = 256;
  std::array<double, kTable> table;
  table.fill(-1.0);  // log k >= 0 for every count k >= 1: -1 is "not yet"
  log_y_.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    const double count = y(i);
    if (!(count > 0)) {
      log_y_(i) = 0.0;
    } else if (count < kTable && count == std::floor(count)) {
      double& slot = table[static_cast<std::size_t>(count)];
      if (slot < 0) slot = std::log(count);
      log_y_(i) = slot;
    } else {
      log_y_(i) = std::log(count);
    }
  }
}

bool SmallFit::estimate_at(const Eigen::VectorXd& coefficients) const {
  if (!has_estimate_ || coefficients.size() != X_->cols()) return false;
  for (Eigen::Index j = 0; j < X_->cols(); ++j) {
    if (coefficients(j) != estimate_[static_cast<std::size_t>(j)]) return false;
  }
  return true;
}

void SmallFit::pass(const Column& beta, const Eigen::VectorXd& weights, bool reuse, Sums& s) {
  const Eigen::MatrixXd& X = *X_;
  const Eigen::VectorXd& y = *y_;
  const Eigen::VectorXd& offset = *offset_;
  const Eigen::Index n = X.rows();
  const auto p = static_cast<int>(X.cols());
  s.valid = false;
  s.odd = false;
  if (reuse) {
    eta_next_ = eta_;
    mu_next_ = mu_;
  } else {
    const Eigen::Map<const Eigen::VectorXd> b(beta.data(), p);
    eta_next_.noalias() = X * b;
    eta_next_ += offset;
    // The validity test of glm/irls.cc's means_from (finite eta, mu > 0),
    // with Eigen's packet exp (two or more records per instruction; within
    // an ulp or two of std::exp). It keeps exp(eta) within about
    // [1e-308, 1e308] where std::exp gives 0 or infinity: such means are
    // outside [kSmallestMean, kLargestMean] and left to fit_glm below.
    if (!eta_next_.allFinite()) return;
    mu_next_ = eta_next_.array().exp();
  }
  double dev = 0;
  for (Eigen::Index i = 0; i < n; ++i) {
    const double m = mu_next_(i);
    if (!(m > kSmallestMean && m < kLargestMean)) {
      s.odd = true;
      return;
    }
    // Poisson deviance with log mu = eta and log y taken once (irls.cc).
    const double unit = y(i) <= 0 ? 2 * m : 2 * (y(i) * (log_y_(i) - eta_next_(i)) - (y(i) - m));
    dev += weights(i) * unit;
  }
  // Log link: d mu / d eta = mu and V(mu) = mu, so the working weight is
  // w mu and the working response eta - offset + (y - mu) / mu. Whole
  // columns at a time, so that the products run two or more records per
  // instruction.
  working_ = weights.cwiseProduct(mu_next_);
  response_ = (eta_next_ - offset).array() + (y - mu_next_).array() / mu_next_.array();
  // Row j of X'WX (from the diagonal) and X'Wz in one sweep over the records.
  std::array<const double*, kMaxColumns + 1> columns{};
  for (int k = 0; k < p; ++k) columns[static_cast<std::size_t>(k)] = X.col(k).data();
  columns[static_cast<std::size_t>(p)] = response_.data();
  std::array<double, kMaxColumns + 1> row{};
  for (int j = 0; j < p; ++j) {
    cross_products(p + 1 - j, working_.data(), columns.data() + j, n, row.data());
    for (int k = j; k < p; ++k)
      s.gram[static_cast<std::size_t>(j * kMaxColumns + k)] = row[static_cast<std::size_t>(k - j)];
    s.rhs[static_cast<std::size_t>(j)] = row[static_cast<std::size_t>(p - j)];
  }
  s.valid = true;
  s.deviance = dev;
}

bool SmallFit::factor(const Sums& s) {
  // wls.cc's solve_normal: Cholesky in column order, each pivot checked
  // against its column's own squared norm before it is used.
  const auto p = static_cast<int>(X_->cols());
  const auto at = [](int row, int col) { return static_cast<std::size_t>(row * kMaxColumns + col); };
  double largest = 0;
  for (int j = 0; j < p; ++j) largest = std::max(largest, s.gram[at(j, j)]);
  if (!(largest > 0) || !std::isfinite(largest)) return false;
  const double own_ratio2 = WeightedLeastSquares::kNormalOwnRatio * WeightedLeastSquares::kNormalOwnRatio;
  for (int j = 0; j < p; ++j) {
    const double own = s.gram[at(j, j)];
    if (!(own > own_ratio2 * largest)) return false;
    double pivot = own;
    for (int k = 0; k < j; ++k) pivot -= chol_[at(j, k)] * chol_[at(j, k)];
    if (!(pivot > WeightedLeastSquares::kNormalPivotRatio * own)) return false;
    const double l = std::sqrt(pivot);
    chol_[at(j, j)] = l;
    for (int i = j + 1; i < p; ++i) {
      double v = s.gram[at(j, i)];  // X'WX(i, j), kept in the upper triangle
      for (int k = 0; k < j; ++k) v -= chol_[at(i, k)] * chol_[at(j, k)];
      chol_[at(i, j)] = v / l;
    }
  }
  return true;
}

void SmallFit::solve(const Sums& s, double* beta) const {
  const auto p = static_cast<int>(X_->cols());
  const auto at = [](int row, int col) { return static_cast<std::size_t>(row * kMaxColumns + col); };
  for (int j = 0; j < p; ++j) {  // L v = X'Wz
    double v = s.rhs[static_cast<std::size_t>(j)];
    for (int k = 0; k < j; ++k) v -= chol_[at(j, k)] * beta[k];
    beta[j] = v / chol_[at(j, j)];
  }
  for (int j = p - 1; j >= 0; --j) {  // L' b = v
    double v = beta[j];
    for (int k = j + 1; k < p; ++k) v -= chol_[at(k, j)] * beta[k];
    beta[j] = v / chol_[at(j, j)];
  }
}

bool SmallFit::qr(double alias_tolerance, double* beta) {
  // glm/wls.cc's QR of diag(sqrt(w mu)) X, for a design it keeps whole:
  // Householder reflections in column order, each column checked against
  // the same two aliasing bounds first; a column failing them is left to
  // fit_glm. The factor R is kept as L = R' (rows signed so that its
  // diagonal is positive: L L' = X'WX), the solve is R b = Q' sqrt(w mu) z.
  const Eigen::MatrixXd& X = *X_;
  const Eigen::Index n = X.rows();
  const auto p = static_cast<int>(X.cols());
  qr_a_.resize(n, p);
  qr_b_.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    const double root = std::sqrt(working_(i));
    qr_b_(i) = root * response_(i);
    for (int j = 0; j < p; ++j) qr_a_(i, j) = root * X(i, j);
  }
  Column own{};
  double largest = 0;
  for (int j = 0; j < p; ++j) {
    own[static_cast<std::size_t>(j)] = qr_a_.col(j).norm();
    largest = std::max(largest, own[static_cast<std::size_t>(j)]);
  }
  const auto at = [](int row, int col) { return static_cast<std::size_t>(row * kMaxColumns + col); };
  Column sign{};
  for (int j = 0; j < p; ++j) {
    double* a = qr_a_.col(j).data();
    const double norm = own[static_cast<std::size_t>(j)];
    if (!(norm > alias_tolerance * largest)) return false;
    const Eigen::Index m = n - j - 1;  // a[j + 1 ..], the reflector's tail
    const Eigen::Map<const Eigen::VectorXd> tail(a + j + 1, m);
    const double below = tail.squaredNorm();
    const double rest = std::sqrt(a[j] * a[j] + below);
    if (!(rest > alias_tolerance * norm)) return false;
    // v = a[j ..] - r e_1 with r = -sign(a[j]) |a[j ..]| (no cancellation);
    // H c = c - 2 v (v'c) / (v'v).
    const double r = a[j] >= 0 ? -rest : rest;
    const double v0 = a[j] - r;
    const double scale = 2 / (v0 * v0 + below);
    const auto reflect = [&](double* c) {
      Eigen::Map<Eigen::VectorXd> rest_of_c(c + j + 1, m);
      const double f = (v0 * c[j] + tail.dot(rest_of_c)) * scale;
      c[j] -= f * v0;
      rest_of_c -= f * tail;
    };
    for (int c = j + 1; c < p; ++c) reflect(qr_a_.col(c).data());
    reflect(qr_b_.data());
    a[j] = r;
    sign[static_cast<std::size_t>(j)] = r > 0 ? 1.0 : -1.0;
  }
  for (int j = 0; j < p; ++j) {
    for (int c = j; c < p; ++c) chol_[at(c, j)] = sign[static_cast<std::size_t>(j)] * qr_a_(j, c);
  }
  if (beta == nullptr) return true;
  for (int j = p - 1; j >= 0; --j) {  // R b = Q'b, back substitution
    double v = qr_b_(j);
    for (int k = j + 1; k < p; ++k) v -= qr_a_(j, k) * beta[k];
    beta[j] = v / qr_a_(j, j);
  }
  return true;
}

bool SmallFit::step(const Sums& s, double alias_tolerance, double* beta) {
  if (factor(s)) {
    solve(s, beta);
    return true;
  }
  return qr(alias_tolerance, beta);
}

void SmallFit::covariance_from_factor(double dispersion, Eigen::MatrixXd& covariance) const {
  const auto lower = [this](Eigen::Index i, Eigen::Index j) {
    return chol_[static_cast<std::size_t>(i * kMaxColumns + j)];
  };
  scaled_inverse_from_factor(lower, X_->cols(), dispersion, covariance);
}

bool SmallFit::fit(const Eigen::VectorXd& weights, const FitOptions& options,
                   const Eigen::VectorXd& start, FitResult& out) {
  if (X_ == nullptr) return false;
  const Eigen::MatrixXd& X = *X_;
  const Eigen::VectorXd& y = *y_;
  const auto p = static_cast<int>(X.cols());
  const Eigen::Index n = X.rows();
  const bool reuse = has_estimate_ && estimate_at(start);
  has_estimate_ = false;
  if (!applies(options, p) || start.size() != p || !start.allFinite() || n <= p ||
      weights.size() != n) {
    return false;
  }
  // fit_glm's record selection and its all-zero check, done here by giving
  // up: every record must be used as it is.
  if (!design_ok_ || !(weights.array() >= kSmallestWeight).all() ||
      !(weights.array() <= kLargestWeight).all() || !(weights.dot(y) > 0)) {
    return false;
  }

  Column beta{};
  Column beta_new{};
  for (int j = 0; j < p; ++j) beta[static_cast<std::size_t>(j)] = start(j);
  Sums current;
  pass(beta, weights, reuse, current);
  // A start with invalid means: fit_glm starts from y + 0.1 instead.
  if (current.odd || !current.valid || !std::isfinite(current.deviance)) return false;
  eta_.swap(eta_next_);
  mu_.swap(mu_next_);

  double dev_old = current.deviance;
  const double tolerance = options.tolerance;
  const auto rises = [&](double dev) { return relative_change(dev, dev_old) >= tolerance; };
  int iterations = 0;
  bool converged = false;
  Sums next;
  for (int iter = 1; iter <= options.max_iterations; ++iter) {
    iterations = iter;
    if (!step(current, options.alias_tolerance, beta_new.data())) return false;  // the QR aliased a column: fit_glm
    pass(beta_new, weights, false, next);
    if (next.odd) return false;
    const auto usable = [&] { return next.valid && std::isfinite(next.deviance); };
    for (int h = 0; h < options.max_halvings && (!usable() || rises(next.deviance)); ++h) {
      for (int j = 0; j < p; ++j) {
        const auto k = static_cast<std::size_t>(j);
        beta_new[k] = 0.5 * (beta_new[k] + beta[k]);
      }
      pass(beta_new, weights, false, next);
      if (next.odd) return false;
    }
    if (!usable() || rises(next.deviance)) return false;
    const bool settled = std::abs(relative_change(next.deviance, dev_old)) < tolerance;
    if (settled) {
      for (Eigen::Index i = 0; i < n; ++i) {
        if (y(i) == 0 && eta_next_(i) - eta_(i) < -kDriftPerIteration) return false;
      }
    }
    beta = beta_new;
    eta_.swap(eta_next_);
    mu_.swap(mu_next_);
    dev_old = next.deviance;
    current = next;
    if (settled) {
      converged = true;
      break;
    }
  }
  if (!converged) return false;
  // The information at the estimate: X'WX at the final means, which the
  // last pass has summed (or, for a column failing the normal-equations
  // bounds, the QR of the weighted design at those means, as fit_glm takes
  // it then).
  if (!factor(current) && !qr(options.alias_tolerance, nullptr)) return false;
  const int df = static_cast<int>(n) - p;
  const bool quasi = options.family == Family::quasipoisson;
  // glm/distribution.cc's pearson_chi2 at the final means.
  const double dispersion =
      quasi ? (weights.array() * (y - mu_).array().square() / mu_.array()).sum() / df : 1.0;

  out.status = FitStatus::ok;
  out.note.clear();
  out.coefficients.resize(p);
  for (int j = 0; j < p; ++j) out.coefficients(j) = beta[static_cast<std::size_t>(j)];
  out.aliased.assign(static_cast<std::size_t>(p), false);
  covariance_from_factor(dispersion, out.covariance);
  out.deviance = dev_old;
  out.null_deviance = kNaN;
  if (quasi) {
    out.log_likelihood = kNaN;
    out.aic = kNaN;
  } else {
    const Distribution poisson;
    out.log_likelihood = log_likelihood(poisson, y, mu_, weights);
    out.aic = -2 * out.log_likelihood + 2.0 * p;
  }
  out.dispersion = dispersion;
  out.theta = kInf;
  out.theta_at_limit = false;
  out.theta_std_error = kNaN;
  out.rank = p;
  out.df_residual = df;
  out.n = static_cast<int>(n);
  out.iterations = iterations;
  has_estimate_ = true;
  estimate_ = beta;
  return true;
}

FitResult fit_fast_or_general(SmallFit& small, const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                              const Eigen::VectorXd& offset, const Eigen::VectorXd& weights,
                              const FitOptions& options, const Eigen::VectorXd* start) {
  if (start != nullptr && SmallFit::applies(options, static_cast<int>(X.cols()))) {
    FitResult result;
    if (small.fit(weights, options, *start, result)) return result;
  }
  return fit_glm(X, y, offset, weights, options, start, true);
}

}  // namespace tallyd::glm
