// Cross-checks of fit_glm against R's glm and MASS's glm.nb (Debian packages
// r-base-core, r-cran-mass). The values are computed live by
// tests/reference/make_reference.R into TALLYD_REFERENCE_DIR before these
// tests run (the ctest fixture r_reference); see that script for the file
// layout. Every case here is tagged [R].
#include "glm/fit.h"

#include "glm/small_fit.h"
#include "glm/wls.h"

#include <cmath>
#include <fstream>
#include <limits>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

namespace {

using tallyd::glm::Family;
using tallyd::glm::FitOptions;
using tallyd::glm::FitResult;
using tallyd::glm::FitStatus;
using tallyd::glm::Link;

// Tolerances asked of the comparison with R.
constexpr double kTightRel = 1e-6;  // coefficients, deviances, AIC
constexpr double kLooseRel = 1e-4;  // standard errors, dispersion, theta
// Floor for values that are 0 in exact arithmetic (e.g. Dobson's treatment
// effects, which R reports as ~1e-15).
constexpr double kZeroFloor = 1e-10;

std::vector<std::vector<std::string>> read_csv(const std::string& name) {
  const std::string path = std::string(TALLYD_REFERENCE_DIR) + "/" + name;
  std::ifstream in(path);
  INFO("reading " << path << " (written by tests/reference/make_reference.R)");
  REQUIRE(in.good());
  std::vector<std::vector<std::string>> rows;
  std::string line;
  while (std::getline(in, line)) {
    std::vector<std::string> fields;
    std::stringstream ss(line);
    std::string field;
    while (std::getline(ss, field, ',')) fields.push_back(field);
    rows.push_back(fields);
  }
  REQUIRE(rows.size() >= 2);
  return rows;
}

double to_number(const std::string& text) {
  if (text == "NA") return std::numeric_limits<double>::quiet_NaN();
  return std::stod(text);
}

// One exported R fit: the design it saw and what it reported.
struct RCase {
  Eigen::MatrixXd X;
  Eigen::VectorXd y, offset, weight;
  std::vector<std::string> terms;
  Eigen::VectorXd estimate, std_error;  // NaN where R aliased the column
  std::map<std::string, double> summary;
};

std::map<std::string, double> read_summary(const std::string& name) {
  std::map<std::string, double> out;
  const auto rows = read_csv(name + "_summary.csv");
  for (std::size_t i = 1; i < rows.size(); ++i) out[rows[i].at(0)] = to_number(rows[i].at(1));
  return out;
}

RCase load_case(const std::string& name) {
  RCase c;
  const auto data = read_csv(name + "_data.csv");
  const auto n = static_cast<Eigen::Index>(data.size() - 1);
  const auto p = static_cast<Eigen::Index>(data[0].size() - 3);
  c.X.resize(n, p);
  c.y.resize(n);
  c.offset.resize(n);
  c.weight.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    const auto& row = data[static_cast<std::size_t>(i + 1)];
    REQUIRE(static_cast<Eigen::Index>(row.size()) == p + 3);
    c.y(i) = to_number(row[0]);
    c.offset(i) = to_number(row[1]);
    c.weight(i) = to_number(row[2]);
    for (Eigen::Index j = 0; j < p; ++j) {
      c.X(i, j) = to_number(row[static_cast<std::size_t>(j + 3)]);
    }
  }
  const auto coef = read_csv(name + "_coef.csv");
  REQUIRE(static_cast<Eigen::Index>(coef.size() - 1) == p);
  c.estimate.resize(p);
  c.std_error.resize(p);
  for (Eigen::Index j = 0; j < p; ++j) {
    const auto& row = coef[static_cast<std::size_t>(j + 1)];
    c.terms.push_back(row.at(0));
    c.estimate(j) = to_number(row.at(1));
    c.std_error(j) = to_number(row.at(2));
  }
  c.summary = read_summary(name);
  return c;
}

bool close(double ours, double theirs, double rel) {
  return std::abs(ours - theirs) <= rel * std::max(std::abs(theirs), kZeroFloor / rel);
}

// The same convergence criterion as the R reference (glm.control epsilon).
constexpr double kRTolerance = 1e-12;

FitResult fit_case(const RCase& c, Family family, Link link) {
  FitOptions options;
  options.family = family;
  options.link = link;
  options.tolerance = kRTolerance;
  return tallyd::glm::fit_glm(c.X, c.y, c.offset, c.weight, options, nullptr, true);
}

// Coefficients, standard errors, deviances, AIC, dispersion and degrees of
// freedom of `fit` against R's `c`.
void check_against_r(const FitResult& fit, const RCase& c) {
  INFO("note: " << fit.note);
  REQUIRE(fit.status == FitStatus::ok);
  for (Eigen::Index j = 0; j < c.X.cols(); ++j) {
    INFO("term " << c.terms[static_cast<std::size_t>(j)] << ": ours " << fit.coefficients(j)
                 << " R " << c.estimate(j));
    if (std::isnan(c.estimate(j))) {
      CHECK(fit.aliased[static_cast<std::size_t>(j)]);
      CHECK(fit.coefficients(j) == 0);
      continue;
    }
    CHECK_FALSE(fit.aliased[static_cast<std::size_t>(j)]);
    CHECK(close(fit.coefficients(j), c.estimate(j), kTightRel));
    const double se = std::sqrt(fit.covariance(j, j));
    INFO("standard error: ours " << se << " R " << c.std_error(j));
    CHECK(close(se, c.std_error(j), kLooseRel));
  }
  INFO("deviance " << fit.deviance << " null " << fit.null_deviance << " aic " << fit.aic
                   << " dispersion " << fit.dispersion);
  CHECK(close(fit.deviance, c.summary.at("deviance"), kTightRel));
  CHECK(close(fit.null_deviance, c.summary.at("null_deviance"), kTightRel));
  if (std::isnan(c.summary.at("aic"))) {
    CHECK(std::isnan(fit.aic));
  } else {
    CHECK(close(fit.aic, c.summary.at("aic"), kTightRel));
    CHECK(close(fit.log_likelihood, c.summary.at("log_likelihood"), kTightRel));
  }
  CHECK(close(fit.dispersion, c.summary.at("dispersion"), kLooseRel));
  CHECK(fit.df_residual == static_cast<int>(c.summary.at("df_residual")));
  CHECK(fit.rank == static_cast<int>(c.summary.at("rank")));
}

// Coefficients (tight) and standard errors (loose) of `fit` against R's `c`,
// for a case with no aliased term.
void check_estimates(const FitResult& fit, const RCase& c) {
  for (Eigen::Index j = 0; j < c.X.cols(); ++j) {
    INFO("term " << c.terms[static_cast<std::size_t>(j)] << ": ours " << fit.coefficients(j)
                 << " R " << c.estimate(j));
    CHECK(close(fit.coefficients(j), c.estimate(j), kTightRel));
    CHECK(close(std::sqrt(fit.covariance(j, j)), c.std_error(j), kLooseRel));
  }
}

// The refit's fast path (glm/small_fit.h, log link, R's tolerance, no null
// deviance) on case `c` from `start`: it must accept the fit.
FitResult small_fit_case(const RCase& c, Family family, const Eigen::VectorXd& start) {
  FitOptions options;
  options.family = family;
  options.link = Link::log;
  options.tolerance = kRTolerance;
  options.null_deviance = false;
  tallyd::glm::SmallFit small;
  small.use(c.X, c.y, c.offset);
  FitResult fit;
  REQUIRE(small.fit(c.weight, options, start, fit));
  REQUIRE(fit.status == FitStatus::ok);
  return fit;
}

}  // namespace

// McCullagh and Nelder (1989, section 6.3.2) ship damage data, MASS::ships
// with service > 0; reference: R glm(poisson, offset log(service)).
TEST_CASE("Poisson with offset matches R on the ship-damage data", "[R][glm]") {
  const RCase c = load_case("ships_poisson");
  check_against_r(fit_case(c, Family::poisson, Link::log), c);
}

// Same data; reference: R glm(quasipoisson), dispersion = Pearson chi^2 / df.
TEST_CASE("quasi-Poisson dispersion matches R on the ship-damage data", "[R][glm]") {
  const RCase c = load_case("ships_quasipoisson");
  const FitResult fit = fit_case(c, Family::quasipoisson, Link::log);
  check_against_r(fit, c);
  CHECK(std::isnan(fit.log_likelihood));
}

// MASS::Insurance (ordered factors: polynomial contrasts in the design);
// reference: R glm(poisson, offset log(Holders)).
TEST_CASE("Poisson with offset matches R on the Insurance claims data", "[R][glm]") {
  const RCase c = load_case("insurance_poisson");
  check_against_r(fit_case(c, Family::poisson, Link::log), c);
}

// Dobson (1990, p. 93) trial counts, as in R's ?glm example; reference: R
// glm(poisson) with the log, sqrt and identity links.
TEST_CASE("Dobson's trial counts match R under the log, sqrt and identity links", "[R][glm]") {
  for (const auto& [name, link] : {std::pair{"dobson_log", Link::log},
                                   std::pair{"dobson_sqrt", Link::sqrt},
                                   std::pair{"dobson_identity", Link::identity}}) {
    SECTION(name) {
      const RCase c = load_case(name);
      check_against_r(fit_case(c, Family::poisson, link), c);
    }
  }
}

// The refit's fast path (glm/small_fit.h) on the same counts, from a cold
// warm start (all coefficients 0); reference: R glm(poisson), log link.
// It computes no null deviance; the rest must match R as fit_glm does.
TEST_CASE("the small-p fast path matches R on Dobson's trial counts", "[R][glm]") {
  const RCase c = load_case("dobson_log");
  const FitResult fit = small_fit_case(c, Family::poisson, Eigen::VectorXd::Zero(c.X.cols()));
  check_estimates(fit, c);
  CHECK(close(fit.deviance, c.summary.at("deviance"), kTightRel));
  CHECK(close(fit.aic, c.summary.at("aic"), kTightRel));
  CHECK(close(fit.log_likelihood, c.summary.at("log_likelihood"), kTightRel));
  CHECK(fit.df_residual == static_cast<int>(c.summary.at("df_residual")));
}

// A young series' window (the first 40 days of R's datasets::airquality,
// Chambers et al. 1983, daily maximum temperature; trend, annual and weekly
// pairs as series/design.h builds them), where the columns fail the normal
// equations' bounds and the fast path steps by the QR; reference: R
// glm(quasipoisson), tests/reference/make_reference.R case (g).
TEST_CASE("the small-p fast path matches R on a young window that needs the QR", "[R][glm]") {
  const RCase c = load_case("young_window_quasipoisson");
  tallyd::glm::WeightedLeastSquares wls;
  const Eigen::Index n = c.X.rows();
  REQUIRE(wls.solve(c.X, Eigen::VectorXd::Zero(n), Eigen::VectorXd::Ones(n), 1e-9) == 6);
  REQUIRE_FALSE(wls.used_normal_equations());
  // A warm start as a refit has one: the log of the mean count, the rest 0.
  Eigen::VectorXd start = Eigen::VectorXd::Zero(c.X.cols());
  start(0) = std::log(c.y.mean());
  const FitResult fit = small_fit_case(c, Family::quasipoisson, start);
  check_estimates(fit, c);
  CHECK(close(fit.deviance, c.summary.at("deviance"), kTightRel));
  CHECK(close(fit.dispersion, c.summary.at("dispersion"), kLooseRel));
  CHECK(fit.df_residual == static_cast<int>(c.summary.at("df_residual")));
}

// Dobson (1990, p. 93) counts with prior weights (one of them 0); reference:
// R glm(poisson, weights = c(1, 2, 1, 0, 1, 1, 3, 1, 1)).
TEST_CASE("prior weights, one zero, match R", "[R][glm]") {
  const RCase c = load_case("dobson_weighted");
  const FitResult fit = fit_case(c, Family::poisson, Link::log);
  check_against_r(fit, c);
  CHECK(fit.n == 8);
}

// Dobson (1990, p. 93) counts plus a column equal to outcome2 + treatment2;
// reference: R glm reports that column as NA (aliased).
TEST_CASE("an aliased column is dropped as R drops it", "[R][glm]") {
  const RCase c = load_case("dobson_aliased");
  const FitResult fit = fit_case(c, Family::poisson, Link::log);
  check_against_r(fit, c);
  CHECK(fit.note.find("column(s) 5 aliased") != std::string::npos);
  CHECK(fit.covariance.allFinite());
}

// Venables and Ripley (2002, section 7.4), MASS::quine, Days ~ Eth + Sex +
// Age + Lrn; reference: MASS glm.nb (theta by ML, SE from theta.ml).
TEST_CASE("negative binomial theta matches MASS glm.nb on the quine data", "[R][glm]") {
  const RCase c = load_case("quine_negbin");
  const FitResult fit = fit_case(c, Family::negbin, Link::log);
  check_against_r(fit, c);
  INFO("theta " << fit.theta << " +- " << fit.theta_std_error);
  CHECK_FALSE(fit.theta_at_limit);
  CHECK(close(fit.theta, c.summary.at("theta"), kLooseRel));
  CHECK(close(fit.theta_std_error, c.summary.at("theta_se"), kLooseRel));

  SECTION("a warm start from the answer converges at once to the same fit") {
    FitOptions options;
    options.family = Family::negbin;
    options.tolerance = kRTolerance;
    options.start_theta = fit.theta;
    const FitResult warm =
        tallyd::glm::fit_glm(c.X, c.y, c.offset, c.weight, options, &fit.coefficients, true);
    check_against_r(warm, c);
    CHECK(close(warm.theta, c.summary.at("theta"), kLooseRel));
    CHECK(warm.iterations < fit.iterations);
  }
}

// The no-overdispersion cases: MASS glm.nb's theta runs off on ships
// (McCullagh and Nelder 1989, section 6.3.2) and on MASS::Insurance. tallyd
// must report the Poisson limit, with R's Poisson fit as the reference.
TEST_CASE("negative binomial at the Poisson limit gives R's Poisson fit", "[R][glm]") {
  for (const std::string base : {"ships", "insurance"}) {
    SECTION(base) {
      const RCase c = load_case(base + "_poisson");
      const FitResult fit = fit_case(c, Family::negbin, Link::log);
      INFO("note: " << fit.note);
      REQUIRE(fit.status == FitStatus::ok);
      CHECK(fit.theta_at_limit);
      CHECK(std::isinf(fit.theta));
      CHECK(std::isnan(fit.theta_std_error));
      CHECK(fit.note.find("no overdispersion") != std::string::npos);
      for (Eigen::Index j = 0; j < c.X.cols(); ++j) {
        CHECK(close(fit.coefficients(j), c.estimate(j), kTightRel));
        CHECK(close(std::sqrt(fit.covariance(j, j)), c.std_error(j), kLooseRel));
      }
      CHECK(close(fit.deviance, c.summary.at("deviance"), kTightRel));
      CHECK(close(fit.null_deviance, c.summary.at("null_deviance"), kTightRel));
      // MASS glm.nb counts theta as a parameter: Poisson AIC + 2.
      CHECK(close(fit.aic, c.summary.at("aic") + 2, kTightRel));

      // What R's glm.nb itself reached: an error (NA) or a theta far beyond
      // any overdispersion worth the name; it never settles at a moderate value.
      const double r_theta = read_summary(base + "_negbin").at("r_theta");
      CHECK((std::isnan(r_theta) || r_theta > 1e4));
    }
  }
}
