#include "glm/family.h"

#include <cmath>
#include <limits>

namespace tallyd::glm {

std::string_view to_string(Family f) {
  switch (f) {
    case Family::poisson: return "poisson";
    case Family::quasipoisson: return "quasipoisson";
    case Family::negbin: return "negbin";
  }
  return "unknown";
}

std::string_view to_string(Link l) {
  switch (l) {
    case Link::log: return "log";
    case Link::sqrt: return "sqrt";
    case Link::identity: return "identity";
  }
  return "unknown";
}

std::optional<Family> parse_family(std::string_view text) {
  for (Family f : {Family::poisson, Family::quasipoisson, Family::negbin}) {
    if (text == to_string(f)) return f;
  }
  return std::nullopt;
}

std::optional<Link> parse_link(std::string_view text) {
  for (Link l : {Link::log, Link::sqrt, Link::identity}) {
    if (text == to_string(l)) return l;
  }
  return std::nullopt;
}

double link_fun(Link link, double mu) {
  switch (link) {
    case Link::log: return std::log(mu);
    case Link::sqrt: return std::sqrt(mu);
    case Link::identity: return mu;
  }
  return std::numeric_limits<double>::quiet_NaN();
}

double link_inv(Link link, double eta) {
  switch (link) {
    // R's poisson()$linkinv keeps exp(eta) at least DBL_EPSILON so that the
    // working weights never vanish; we do not clamp, so that a mean that
    // runs to 0 stays visible to the divergence check in the IRLS loop.
    case Link::log: return std::exp(eta);
    case Link::sqrt: return eta > 0 ? eta * eta : 0.0;
    case Link::identity: return eta > 0 ? eta : 0.0;
  }
  return std::numeric_limits<double>::quiet_NaN();
}

double mu_eta(Link link, double eta) {
  switch (link) {
    case Link::log: return std::exp(eta);
    case Link::sqrt: return 2.0 * eta;
    case Link::identity: return 1.0;
  }
  return std::numeric_limits<double>::quiet_NaN();
}

bool valid_eta(Link link, double eta) {
  if (!std::isfinite(eta)) return false;
  switch (link) {
    // exp(eta) underflows to 0 below about -745: such a mean is unusable too.
    case Link::log: return std::exp(eta) > 0;
    case Link::sqrt: return eta > 0;
    case Link::identity: return eta > 0;
  }
  return false;
}

}  // namespace tallyd::glm
