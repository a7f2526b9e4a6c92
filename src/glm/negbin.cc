#include "glm/negbin.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace tallyd::glm {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

double moment_theta(const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                    const Eigen::VectorXd& w) {
  double excess = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) {
    const double r = y(i) / mu(i) - 1;
    excess += w(i) * r * r;
  }
  return w.sum() / excess;  // +inf when every y equals its mean
}

}  // namespace

ThetaSearch find_theta(const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                       const Eigen::VectorXd& w, double theta_start, double theta_max,
                       double tolerance, int max_iterations) {
  ThetaSearch out;
  double th = (theta_start > 0 && std::isfinite(theta_start)) ? theta_start
                                                                : moment_theta(y, mu, w);
  if (!(th > 0)) th = 1;
  th = std::min(th, theta_max);
  for (int it = 1; it <= max_iterations; ++it) {
    out.iterations = it;
    const double score = theta_score(y, mu, w, th);
    const double info = theta_information(y, mu, w, th);
    if (!std::isfinite(score) || !std::isfinite(info)) break;
    double next = 0;
    if (info > 0) {
      next = th + score / info;
    } else {
      // Not locally concave: Newton would head the wrong way, so move by a
      // factor of 2 in the direction the likelihood rises.
      next = score > 0 ? 2 * th : 0.5 * th;
    }
    // theta.ml takes |theta| after an overshoot below 0; shrinking by a
    // factor of 10 keeps theta positive without jumping past the optimum.
    if (!(next > 0)) next = 0.1 * th;
    if (next >= theta_max) {
      // Far from the optimum Newton grows theta by about half each step
      // (the log-likelihood behaves like a + b / theta), so reaching
      // theta_max means the optimum is beyond it unless the score says so.
      if (theta_score(y, mu, w, theta_max) >= 0) {
        out.theta = theta_max;
        out.at_limit = true;
        out.converged = true;
        return out;
      }
      next = std::sqrt(th * theta_max);
    }
    const double step = std::abs(next - th);
    th = next;
    if (step <= tolerance * th) {
      out.converged = true;
      break;
    }
  }
  out.theta = th;
  return out;
}

NegbinOutcome fit_negbin(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                         const Eigen::VectorXd& offset, const Eigen::VectorXd& w,
                         IrlsSettings settings, const Eigen::VectorXd* start_beta,
                         double start_theta, double theta_max, WeightedLeastSquares& wls) {
  NegbinOutcome out;
  const bool warm = start_theta > 0 && std::isfinite(start_theta) && start_theta < theta_max;
  settings.distribution.theta = warm ? start_theta : kInf;
  out.fit = run_irls(X, y, offset, w, settings, start_beta, nullptr, wls);
  out.iterations = out.fit.iterations;
  out.theta = settings.distribution.theta;

  // MASS glm.nb's yardstick for the change in log-likelihood.
  const double scale = std::sqrt(2.0 * std::max<double>(1.0, static_cast<double>(y.size()) -
                                                                 out.fit.rank));
  double loglik_old = std::numeric_limits<double>::quiet_NaN();
  for (int outer = 1; outer <= settings.max_iterations; ++outer) {
    if (!out.fit.has_coefficients) return out;
    const ThetaSearch search =
        find_theta(y, out.fit.mu, w, out.theta, theta_max, settings.tolerance,
                   settings.max_iterations);
    if (search.at_limit) {
      if (std::isinf(out.theta)) {
        // The Poisson fit itself says theta = infinity: that is the answer.
        out.at_limit = true;
        out.converged = out.fit.stop == IrlsStop::converged;
        return out;
      }
      // Finish on the Poisson fit and ask again there.
      settings.distribution.theta = kInf;
    } else {
      const Distribution at_new{search.theta};
      const double loglik = log_likelihood(at_new, y, out.fit.mu, w);
      const bool theta_settled =
          std::isfinite(out.theta) &&
          std::abs(search.theta - out.theta) <= settings.tolerance * search.theta;
      const bool loglik_settled = std::abs(loglik - loglik_old) / scale <= settings.tolerance;
      if (search.converged && theta_settled && loglik_settled) {
        out.converged = out.fit.stop == IrlsStop::converged;
        return out;
      }
      loglik_old = loglik;
      settings.distribution.theta = search.theta;
    }
    const Eigen::VectorXd eta = out.fit.eta;
    out.fit = run_irls(X, y, offset, w, settings, nullptr, &eta, wls);
    out.iterations += out.fit.iterations;
    out.theta = settings.distribution.theta;
  }
  return out;
}

}  // namespace tallyd::glm
