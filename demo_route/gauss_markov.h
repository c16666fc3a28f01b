// A survey's position error as a first-order Gauss-Markov process: exponentially correlated
// noise, one independent process per ENU axis (Brown & Hwang, Introduction to Random Signals and
// Applied Kalman Filtering, 4th ed., Wiley 2012: the first-order Gauss-Markov process of
// chapter 2 and its discrete-time model of chapter 3; chapters from memory, not rechecked).
// Sampled every dt seconds with correlation time tau:
//   x[k+1] = rho x[k] + sigma sqrt(1 - rho^2) w[k],  rho = exp(-dt / tau),  w[k] ~ N(0, 1),
// and a stationary start x[0] = sigma w, so every sample has variance sigma^2 and
// E[x[k] x[k+m]] = sigma^2 exp(-m dt / tau) (autocorrelation exp(-|lag| / tau)).
//
// Determinism: the normals come from the demo's own xoshiro256** stream and Box-Muller
// (demo_route/random.h Rng::Normal), not from std:: distributions (whose algorithms differ
// between standard libraries), so a seed gives the same series everywhere, up to the last-bit
// rounding of the C library's log and cos. Not thread-safe: one process per thread or drive.
#pragma once

#include <cstdint>
#include <opencv2/core.hpp>

#include "demo_route/random.h"
#include "indexer/base/status.h"

namespace sightfix::demo {

struct GaussMarkovOptions {
  // Stationary standard deviation of the east and of the north error (each, not combined), and
  // of the up error, metres; >= 0 (0 gives an exact survey on that axis). The defaults are
  // illustrative of a GNSS-INS survey (vertical error about twice the horizontal, the usual
  // proportion of GNSS geometry), not measured.
  double sigma_horizontal_m = 0.3;
  double sigma_vertical_m = 0.6;
  // Correlation time, seconds, > 0: after tau the error keeps exp(-1) of its correlation. Longer
  // tau makes slower, smoother drifts (the default: about a minute, a few streets at town speed).
  double tau_s = 60;
  // Sample interval, seconds, > 0 (the default: 10 Hz, the survey track's rate).
  double dt_s = 0.1;
  uint64_t seed = 1;
  // InvalidArgument naming the field: a sigma < 0, tau_s <= 0, dt_s <= 0, or any not finite.
  Status Validate() const;
};

class GaussMarkovError {
 public:
  // Fails (InvalidArgument) when options.Validate() does.
  static Result<GaussMarkovError> Create(const GaussMarkovOptions& options);

  // The next sample (east, north, up), metres: the first call returns the stationary start
  // x[0], each later call the sample dt_s after the previous one.
  cv::Vec3d Next();

  // exp(-dt / tau), the correlation of consecutive samples.
  double rho() const { return rho_; }

 private:
  explicit GaussMarkovError(const GaussMarkovOptions& options);

  cv::Vec3d sigma_m_;  // east, north, up
  double rho_;
  double drive_scale_;  // sqrt(1 - rho^2)
  Rng rng_;
  cv::Vec3d state_m_;
  bool started_ = false;
};

}  // namespace sightfix::demo
