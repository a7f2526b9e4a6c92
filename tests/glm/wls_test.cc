#include "glm/wls.h"

#include <cmath>

#include <catch2/catch.hpp>

namespace {

using tallyd::glm::WeightedLeastSquares;

// A daily design as series/design.h builds it: intercept, trend in years
// since `origin_years`, an annual and a weekly harmonic pair.
Eigen::MatrixXd daily_design(int rows, double origin_years) {
  Eigen::MatrixXd X(rows, 6);
  for (int i = 0; i < rows; ++i) {
    const double year = 2 * M_PI * i / 365.25, week = 2 * M_PI * i / 7.0;
    X.row(i) << 1.0, origin_years + i / 365.25, std::sin(year), std::cos(year), std::sin(week),
        std::cos(week);
  }
  return X;
}

// Invented working response and weights with the spread of an IRLS step.
void step_data(int rows, Eigen::VectorXd& z, Eigen::VectorXd& sqrt_w) {
  z.resize(rows);
  sqrt_w.resize(rows);
  for (int i = 0; i < rows; ++i) {
    z(i) = 2.0 + 0.4 * std::sin(0.37 * i) + 0.1 * std::cos(1.3 * i);
    sqrt_w(i) = std::sqrt(3.0 + 40.0 * (0.5 + 0.5 * std::sin(0.11 * i)));
  }
}

}  // namespace

// The normal equations and the QR solve the same least-squares problem
// (common practice); on a well-conditioned design they must agree to near
// machine precision, coefficients and (X'WX)^-1 alike.
TEST_CASE("normal equations agree with the QR on a well-conditioned design", "[glm]") {
  const int n = 365;
  const Eigen::MatrixXd X = daily_design(n, 0.5);
  Eigen::VectorXd z, sqrt_w;
  step_data(n, z, sqrt_w);

  WeightedLeastSquares fast;
  REQUIRE(fast.solve(X, z, sqrt_w, 1e-9) == 6);
  CHECK(fast.used_normal_equations());
  // An alias tolerance above kNormalOwnRatio forces the QR.
  WeightedLeastSquares qr;
  REQUIRE(qr.solve(X, z, sqrt_w, 1e-3) == 6);
  CHECK_FALSE(qr.used_normal_equations());

  for (int j = 0; j < 6; ++j) {
    INFO("column " << j);
    CHECK(fast.coefficients()(j) == Approx(qr.coefficients()(j)).epsilon(1e-11).margin(1e-12));
  }
  const Eigen::MatrixXd a = fast.unscaled_covariance(), b = qr.unscaled_covariance();
  CHECK((a - b).cwiseAbs().maxCoeff() <= 1e-11 * b.cwiseAbs().maxCoeff());

  // And both solve the normal equations themselves (the definition of the
  // least-squares solution): X'W(z - X b) = 0.
  const Eigen::VectorXd w = sqrt_w.cwiseProduct(sqrt_w);
  const Eigen::VectorXd residual = z - X * fast.coefficients();
  const Eigen::VectorXd gradient = X.transpose() * w.cwiseProduct(residual);
  CHECK(gradient.cwiseAbs().maxCoeff() <= 1e-9 * (X.transpose() * w.cwiseProduct(z)).cwiseAbs().maxCoeff());
}

// Simple linear regression has a closed form (common practice): slope
// sum w (x - xbar)(z - zbar) / sum w (x - xbar)^2.
TEST_CASE("normal equations give the closed-form weighted regression line", "[glm]") {
  const int n = 20;
  Eigen::MatrixXd X(n, 2);
  Eigen::VectorXd z(n), sqrt_w(n);
  for (int i = 0; i < n; ++i) {
    X(i, 0) = 1;
    X(i, 1) = i;
    z(i) = 3 + 0.5 * i + (i % 3 == 0 ? 0.7 : -0.2);
    sqrt_w(i) = 1 + 0.1 * i;
  }
  const Eigen::VectorXd w = sqrt_w.cwiseProduct(sqrt_w);
  const double xbar = w.dot(X.col(1)) / w.sum(), zbar = w.dot(z) / w.sum();
  double sxz = 0, sxx = 0;
  for (int i = 0; i < n; ++i) {
    sxz += w(i) * (X(i, 1) - xbar) * (z(i) - zbar);
    sxx += w(i) * (X(i, 1) - xbar) * (X(i, 1) - xbar);
  }
  WeightedLeastSquares fast;
  REQUIRE(fast.solve(X, z, sqrt_w, 1e-9) == 2);
  CHECK(fast.used_normal_equations());
  CHECK(fast.coefficients()(1) == Approx(sxz / sxx).epsilon(1e-12));
  CHECK(fast.coefficients()(0) == Approx(zbar - xbar * sxz / sxx).epsilon(1e-12));
  // Var(slope) / phi = 1 / sxx.
  CHECK(fast.unscaled_covariance()(1, 1) == Approx(1 / sxx).epsilon(1e-12));
}

TEST_CASE("poorly determined columns go to the QR, which decides the aliasing", "[glm]") {
  const int n = 365;
  Eigen::VectorXd z, sqrt_w;
  step_data(n, z, sqrt_w);

  SECTION("a collinear column: aliased by the QR, as before") {
    Eigen::MatrixXd X = daily_design(n, 0.5);
    X.col(5) = 2.0 * X.col(2);
    WeightedLeastSquares wls;
    CHECK(wls.solve(X, z, sqrt_w, 1e-9) == 5);
    CHECK_FALSE(wls.used_normal_equations());
    CHECK(wls.aliased()[5]);
  }
  SECTION("a trend far from its origin: the pivot bound fails, the QR solves") {
    // One year of records 60 years after the origin: the trend's part not
    // explained by the intercept is 0.29 / 60 of its norm, a pivot ratio
    // of ~2e-5, below kNormalPivotRatio.
    const Eigen::MatrixXd X = daily_design(n, 60.0);
    WeightedLeastSquares wls;
    CHECK(wls.solve(X, z, sqrt_w, 1e-9) == 6);
    CHECK_FALSE(wls.used_normal_equations());
  }
  SECTION("a column that is ~0 everywhere: aliased by the QR") {
    Eigen::MatrixXd X = daily_design(n, 0.5);
    X.col(4) *= 1e-12;
    WeightedLeastSquares wls;
    CHECK(wls.solve(X, z, sqrt_w, 1e-9) == 5);
    CHECK_FALSE(wls.used_normal_equations());
    CHECK(wls.aliased()[4]);
  }
}
