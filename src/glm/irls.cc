#include "glm/irls.h"

#include <cmath>
#include <limits>

namespace tallyd::glm {
namespace {

// mu = g^{-1}(eta); false as soon as one eta gives no usable mean.
bool means_from(Link link, const Eigen::VectorXd& eta, Eigen::VectorXd& mu) {
  if (link == Link::log) {
    // valid_eta and link_inv, with one exp instead of two (the same values).
    for (Eigen::Index i = 0; i < eta.size(); ++i) {
      const double m = std::exp(eta(i));
      if (!std::isfinite(eta(i)) || !(m > 0)) return false;
      mu(i) = m;
    }
    return true;
  }
  for (Eigen::Index i = 0; i < eta.size(); ++i) {
    if (!valid_eta(link, eta(i))) return false;
    mu(i) = link_inv(link, eta(i));
  }
  return true;
}

// A valid coefficient vector to step back to when the first step from
// mu = y + 0.1 leaves the valid region and there are no coefficients yet:
// the "constant-rate" fit that uses one column only, all other coefficients
// 0. The column must be positive on every record (an intercept, or an
// intercept scaled by exposure or its square root, as series/design.h does
// for the identity and sqrt links), and constant under the log link. Its
// coefficient matches the total count:
//   log      b = log(sum w y / sum w exp(offset)) / c
//   identity b = (sum w y - sum w offset) / sum w c
//   sqrt     b = sqrt(sum w y / sum w c^2)        (offset 0 only)
// False when no column qualifies or the result is still invalid somewhere.
bool constant_mean_fit(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                       const Eigen::VectorXd& offset, const Eigen::VectorXd& w, Link link,
                       Eigen::VectorXd& beta, Eigen::VectorXd& eta, Eigen::VectorXd& mu) {
  if (X.rows() == 0) return false;
  const double wy = w.dot(y);
  for (Eigen::Index j = 0; j < X.cols(); ++j) {
    const Eigen::VectorXd c = X.col(j);
    if ((c.array() <= 0).any()) continue;
    double b = std::numeric_limits<double>::quiet_NaN();
    switch (link) {
      case Link::log:
        if ((c.array() != c(0)).any()) continue;
        b = std::log(wy / w.dot(offset.array().exp().matrix())) / c(0);
        break;
      case Link::identity:
        b = (wy - w.dot(offset)) / w.dot(c);
        break;
      case Link::sqrt:
        if ((offset.array() != 0).any()) continue;
        b = std::sqrt(wy / w.dot(c.cwiseProduct(c)));
        break;
    }
    if (!std::isfinite(b)) continue;
    beta.setZero();
    beta(j) = b;
    eta.noalias() = X * beta;
    eta += offset;
    if (means_from(link, eta, mu)) return true;
  }
  return false;
}

double relative_change(double dev, double dev_old) {
  return (dev - dev_old) / (std::abs(dev) + 0.1);
}

// A zero-count record whose eta falls by more than this in the step where
// the deviance settles is taken to be running off to mu = 0. Under the log
// link such a record's working response is eta - 1, so a free direction
// moves it by about 1 per iteration; a genuine optimum moves it by ~0.
constexpr double kDriftPerIteration = 0.5;

}  // namespace

void sqrt_working_weights(Link link, const Distribution& dist, const Eigen::VectorXd& eta,
                          const Eigen::VectorXd& mu, const Eigen::VectorXd& w,
                          Eigen::VectorXd& sqrt_w) {
  sqrt_w.resize(eta.size());
  for (Eigen::Index i = 0; i < eta.size(); ++i) {
    // Under the log link mu_eta(eta) is exp(eta), which mu already holds.
    const double d = link == Link::log ? mu(i) : mu_eta(link, eta(i));
    sqrt_w(i) = std::sqrt(w(i) * d * d / dist.variance(mu(i)));
    if (!std::isfinite(sqrt_w(i))) sqrt_w(i) = 0;
  }
}

IrlsOutcome run_irls(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                     const Eigen::VectorXd& offset, const Eigen::VectorXd& w,
                     const IrlsSettings& settings, const Eigen::VectorXd* start_beta,
                     const Eigen::VectorXd* start_eta, WeightedLeastSquares& wls) {
  const Eigen::Index n = X.rows();
  const Eigen::Index p = X.cols();
  const Link link = settings.link;
  const Distribution& dist = settings.distribution;

  IrlsOutcome out;
  // The accepted iterate. `consistent` says whether eta = X beta + offset;
  // it is false only before the first step when starting from y + 0.1 or
  // from a given eta.
  Eigen::VectorXd beta = Eigen::VectorXd::Zero(p);
  Eigen::VectorXd eta(n);
  Eigen::VectorXd mu(n);
  bool consistent = false;
  bool started = false;
  // Whether mu(i) == exp(eta(i)) exactly (log link), so that d mu / d eta
  // can be read from mu instead of a second exp: true except at the y + 0.1
  // start, where eta = log(mu) and exp(eta) may differ from mu in the last bit.
  bool mu_is_exp_eta = false;
  if (start_beta != nullptr && start_beta->size() == p && start_beta->allFinite()) {
    eta.noalias() = X * *start_beta;
    eta += offset;
    if (means_from(link, eta, mu)) {
      beta = *start_beta;
      consistent = true;
      started = true;
    }
  }
  if (!started && start_eta != nullptr && start_eta->size() == n) {
    eta = *start_eta;
    started = means_from(link, eta, mu);
  }
  mu_is_exp_eta = started;
  if (!started) {
    for (Eigen::Index i = 0; i < n; ++i) {
      mu(i) = y(i) + 0.1;
      eta(i) = link_fun(link, mu(i));
    }
  }
  // Poisson noise under the log link: log(mu) is eta, so the deviance terms
  // y log(y / mu) are y (log y - eta), with log y taken once per fit rather
  // than a log per record at every iteration and step-halving. Same value to
  // rounding (~1e-14 relative), far inside the 1e-10 tolerance.
  const bool log_poisson = link == Link::log && dist.is_poisson();
  Eigen::VectorXd log_y;
  if (log_poisson) {
    log_y.resize(n);
    for (Eigen::Index i = 0; i < n; ++i) log_y(i) = y(i) > 0 ? std::log(y(i)) : 0.0;
  }
  const auto deviance_at = [&](const Eigen::VectorXd& e, const Eigen::VectorXd& m) {
    if (!log_poisson) return deviance(dist, y, m, w);
    double sum = 0;
    for (Eigen::Index i = 0; i < n; ++i) {
      const double unit = y(i) <= 0 ? 2 * m(i) : 2 * (y(i) * (log_y(i) - e(i)) - (y(i) - m(i)));
      sum += w(i) * unit;
    }
    return sum;
  };
  double dev_old = deviance_at(eta, mu);

  Eigen::VectorXd z(n);
  Eigen::VectorXd sqrt_w(n);
  Eigen::VectorXd beta_new(p);
  Eigen::VectorXd eta_new(n);
  Eigen::VectorXd mu_new(n);
  out.stop = IrlsStop::iteration_limit;
  for (int iter = 1; iter <= settings.max_iterations; ++iter) {
    out.iterations = iter;
    for (Eigen::Index i = 0; i < n; ++i) {
      // sqrt_working_weights and the working response share d mu / d eta
      // (the same arithmetic as calling it, with one link derivative per record).
      const double d = link == Link::log && mu_is_exp_eta ? mu(i) : mu_eta(link, eta(i));
      sqrt_w(i) = std::sqrt(w(i) * d * d / dist.variance(mu(i)));
      if (!std::isfinite(sqrt_w(i))) sqrt_w(i) = 0;
      z(i) = eta(i) - offset(i) + (y(i) - mu(i)) / d;
      // A mean so small that mu_eta underflows carries no information; R's
      // glm.fit drops such records from the step ("good" cases) as well.
      if (!std::isfinite(z(i))) {
        z(i) = 0;
        sqrt_w(i) = 0;
      }
      if (sqrt_w(i) == 0) z(i) = 0;
    }
    if (wls.solve(X, z, sqrt_w, settings.alias_tolerance) == 0) {
      out.stop = IrlsStop::rank_zero;
      break;
    }
    beta_new = wls.coefficients();
    eta_new.noalias() = X * beta_new;
    eta_new += offset;
    bool valid = means_from(link, eta_new, mu_new);
    double dev = valid ? deviance_at(eta_new, mu_new) : std::numeric_limits<double>::quiet_NaN();
    if ((!valid || !std::isfinite(dev)) && !consistent) {
      // With the sqrt and identity links the first full step from y + 0.1
      // can put a mean at or below 0, and there are no coefficients to step
      // back to yet (R's glm.fit stops here and asks for starting values).
      // Step back towards the constant-mean fit instead, when there is one.
      if (!constant_mean_fit(X, y, offset, w, link, beta, eta, mu)) {
        out.stop = IrlsStop::no_valid_step;
        break;
      }
      consistent = true;
      mu_is_exp_eta = true;
      dev_old = deviance_at(eta, mu);
    }

    // Step-halving towards the previous coefficients. With the sqrt and
    // identity links a full step can put a mean at or below 0; any link can
    // overshoot and raise the deviance. The rise is only judged against a
    // real fit: the deviance at y + 0.1 is near the saturated one and says
    // nothing about the first step.
    const auto rises = [&](double d) {
      return consistent && relative_change(d, dev_old) >= settings.tolerance;
    };
    for (int h = 0; h < settings.max_halvings && (!valid || !std::isfinite(dev) || rises(dev));
         ++h) {
      beta_new = 0.5 * (beta_new + beta);
      eta_new.noalias() = X * beta_new;
      eta_new += offset;
      valid = means_from(link, eta_new, mu_new);
      dev = valid ? deviance_at(eta_new, mu_new) : std::numeric_limits<double>::quiet_NaN();
    }
    if (!valid || !std::isfinite(dev)) {
      out.stop = IrlsStop::no_valid_step;
      break;
    }
    if (rises(dev)) {
      out.stop = IrlsStop::deviance_stuck;
      break;
    }

    const bool settled = std::abs(relative_change(dev, dev_old)) < settings.tolerance;
    if (settled && link == Link::log) {
      out.drifting_records = 0;
      out.first_drifting = -1;
      for (Eigen::Index i = 0; i < n; ++i) {
        if (y(i) == 0 && eta_new(i) - eta(i) < -kDriftPerIteration) {
          if (out.first_drifting < 0) out.first_drifting = i;
          ++out.drifting_records;
        }
      }
    }
    beta.swap(beta_new);
    eta.swap(eta_new);
    mu.swap(mu_new);
    dev_old = dev;
    consistent = true;
    mu_is_exp_eta = true;
    if (settled) {
      out.stop = IrlsStop::converged;
      break;
    }
  }

  out.has_coefficients = consistent;
  out.beta = std::move(beta);
  out.eta = std::move(eta);
  out.mu = std::move(mu);
  out.deviance = dev_old;
  out.rank = wls.rank();
  return out;
}

}  // namespace tallyd::glm
