#include "demo_route/gauss_markov.h"

#include <cmath>
#include <string>

namespace sightfix::demo {
namespace {

// InvalidArgument "GaussMarkovOptions.<field> = <value> ..." unless ok (false for NaN too).
Status Require(bool ok, const char* field, double value, const char* rule) {
  if (ok) return Status::Ok();
  return Status::InvalidArgument(std::string("GaussMarkovOptions.") + field + " = " +
                                 std::to_string(value) + ": must be " + rule);
}

}  // namespace

Status GaussMarkovOptions::Validate() const {
  for (const Status& s :
       {Require(sigma_horizontal_m >= 0 && std::isfinite(sigma_horizontal_m), "sigma_horizontal_m",
                sigma_horizontal_m, ">= 0 and finite"),
        Require(sigma_vertical_m >= 0 && std::isfinite(sigma_vertical_m), "sigma_vertical_m",
                sigma_vertical_m, ">= 0 and finite"),
        Require(tau_s > 0 && std::isfinite(tau_s), "tau_s", tau_s, "> 0 and finite"),
        Require(dt_s > 0 && std::isfinite(dt_s), "dt_s", dt_s, "> 0 and finite")}) {
    if (!s.ok()) return s;
  }
  return Status::Ok();
}

Result<GaussMarkovError> GaussMarkovError::Create(const GaussMarkovOptions& options) {
  if (Status s = options.Validate(); !s.ok()) return s;
  return GaussMarkovError(options);
}

GaussMarkovError::GaussMarkovError(const GaussMarkovOptions& options)
    : sigma_m_(options.sigma_horizontal_m, options.sigma_horizontal_m, options.sigma_vertical_m),
      rho_(std::exp(-options.dt_s / options.tau_s)),
      // 1 - rho^2 = -expm1(-2 dt / tau), exact also when dt << tau.
      drive_scale_(std::sqrt(-std::expm1(-2.0 * options.dt_s / options.tau_s))),
      rng_(options.seed) {}

cv::Vec3d GaussMarkovError::Next() {
  // One normal per axis per step, east then north then up, so a seed fixes the whole series.
  for (int axis = 0; axis < 3; ++axis) {
    const double w = rng_.Normal();
    state_m_[axis] =
        started_ ? rho_ * state_m_[axis] + drive_scale_ * sigma_m_[axis] * w : sigma_m_[axis] * w;
  }
  started_ = true;
  return state_m_;
}

}  // namespace sightfix::demo
