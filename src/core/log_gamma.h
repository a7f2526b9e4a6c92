// log |Gamma(x)| without touching shared state.
//
// glibc's lgamma (and so std::lgamma) stores the sign of Gamma(x) in the
// process-wide variable `signgam` on every call. Series judged on several
// threads at once (engine/sharded_engine.h) would all write it: a data race
// (ThreadSanitizer reports it), harmless only by luck since nothing reads
// it. lgamma_r is the same glibc computation (lgamma calls it) with the sign
// returned to the caller, so the values are bit-identical to std::lgamma's.
#pragma once

#include <math.h>

namespace tallyd {

inline double log_gamma(double x) {
  int sign = 0;
  return ::lgamma_r(x, &sign);
}

}  // namespace tallyd
