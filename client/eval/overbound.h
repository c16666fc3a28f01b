// The Gaussian overbound of a sample of normalised errors (z = error / stated sigma along an
// axis): the smallest scale K >= 1 such that N(0, K^2) bounds the sample's tail, in the sense of
// CDF overbounding (DeCleene, "Defining pseudorange integrity - overbounding", ION GPS 2000),
// with the sample's own uncertainty: at every observed |z| = x in the upper half of |z|, the
// two-sided Gaussian tail 2Q(x / K) must lie at or above the one-sided Clopper-Pearson upper
// bound (confidence as given) of the share of the sample at or beyond x. The core (below the
// median of |z|) is left to the stated covariance: a handful of near-zero errors says nothing
// of the tails an integrity risk is about. Pure functions; thread-safe.
#pragma once

#include <string>
#include <vector>

#include "client/eval/route_eval.h"
#include "indexer/base/status.h"

namespace sightfix {

struct OverboundFit {
  double scale = 1;  // K >= 1
  int samples = 0;
  double binding_z = 0;  // the |z| whose tail set K (0 when K = 1 binds)
};

// InvalidArgument for an empty sample, a non-finite value or confidence outside (0, 1).
Result<OverboundFit> FitOverbound(const std::vector<double>& z, double confidence = 0.95);

// The normalised errors of a replay's refined fixes: per fix two samples, the error across and
// along the truth's heading over the fix's own sigma on that axis (sqrt(u^T C u), C its
// covariance_en, the one its protection levels start from). Two kinds of fix are not samples of
// the fault-free error model and are left out of z:
//  - a fix more than wrong_m off is a wrong place (the place check's business): `excluded`;
//  - a fix one group pulled off (`faults`): its |z| exceeds kFaultScreenZ on an axis, and the
//    solution without one of its groups (FixIntegrity::separations: a reference's or a quadrant's
//    correspondences) has |z| within kFaultScreenZ on both axes against that subset's own
//    covariance. The truth names the faulty group, as a fault-free data set is screened in
//    satellite navigation before its overbound is fitted. Such a fix is what the protection
//    levels' group terms are for: `fault_scale` is the smallest K at which every one of them
//    lies inside its own protection levels (horizontal, lateral, longitudinal), and the fit's K
//    is never below it (FitDriveOverbound).
inline constexpr double kFaultScreenZ = 3;
struct NormalisedErrors {
  std::vector<double> z;
  int fixes = 0;     // refined fixes read
  int excluded = 0;  // of them, more than wrong_m off
  int faults = 0;    // of them, pulled off by one group (left out of z)
  double fault_scale = 1;
  std::string fault_scale_image;  // the fault whose protection level set fault_scale ("": none)
};
NormalisedErrors NormaliseErrors(const std::vector<QueryResult>& results, double wrong_m = 5);

}  // namespace sightfix
