// LocalizerOptions::Validate, LocateRequest::Check and FixQualityName (localizer.h).
#include <cmath>
#include <string>

#include "server/engine/localizer.h"

namespace sightfix {

bool LocalizerOptions::Validate(std::string* error) const {
  auto fail = [&](const std::string& m) {
    if (error) *error = m;
    return false;
  };
  if (top_k < 1 || top_k > 100) return fail("top_k must be within [1, 100]");
  if (max_verified < 1) return fail("max_verified must be >= 1");
  if (min_verified_inliers < 15) return fail("min_verified_inliers must be >= 15");
  if (!(viewing_range_m >= 0)) return fail("viewing_range_m must be >= 0");
  if (!(pnp_threshold_px > 0) || !(pixel_sigma_px > 0))
    return fail("pnp_threshold_px and pixel_sigma_px must be > 0");
  if (min_pnp_inliers < 6) return fail("min_pnp_inliers must be >= 6");
  if (!(covariance_scale > 0)) return fail("covariance_scale must be > 0");
  if (!(coarse_radius_m > 0)) return fail("coarse_radius_m must be > 0");
  if (!(distinct_place_m > 0)) return fail("distinct_place_m must be > 0");
  if (!(ambiguity_ratio >= 0)) return fail("ambiguity_ratio must be >= 0");
  if (!(ambiguity_flag_ratio >= 0)) return fail("ambiguity_flag_ratio must be >= 0");
  if (min_near_miss_inliers < 5) return fail("min_near_miss_inliers must be >= 5");
  if (look_alike_checks < 0 || look_alike_checks > top_k)
    return fail("look_alike_checks must be within [0, top_k]");
  if (!(look_alike_ratio > 0)) return fail("look_alike_ratio must be > 0");
  if (look_alike_depth < 1) return fail("look_alike_depth must be >= 1");
  if (nearby_checks < 0) return fail("nearby_checks must be >= 0");
  if (!(nearby_spacing_m >= 0)) return fail("nearby_spacing_m must be >= 0");
  if (!(nearby_alias_m > 0)) return fail("nearby_alias_m must be > 0");
  if (!(nearby_alias_ratio > 0)) return fail("nearby_alias_ratio must be > 0");
  if (one_wall_off < 0) return fail("one_wall_off must be >= 0");
  if (min_sight_support < 0) return fail("min_sight_support must be >= 0");
  if (!(spread_shift_m > 0)) return fail("spread_shift_m must be > 0");
  if (!(default_alert_limit_m > 0)) return fail("default_alert_limit_m must be > 0");
  std::string p;
  if (!protection.Validate(&p)) return fail("protection: " + p);
  if (!(time_budget_ms >= 0)) return fail("time_budget_ms must be >= 0");
  if (env == nullptr) return fail("env must not be null");
  std::string e;
  if (features.type != FeatureType::kRootSift) return fail("features: maps hold RootSIFT");
  if (!features.Validate(&e)) return fail("features: " + e);
  return true;
}

Status LocateRequest::Check() const {
  std::string error;
  if (!camera.IsValid(&error)) return Status::InvalidArgument("calibration: " + error);
  if (image.empty() && image_bytes.empty() && !features)
    return Status::InvalidArgument("the request has no image and no features");
  if (prior) {
    const PriorCircle& p = *prior;
    if (!std::isfinite(p.lat_deg) || !std::isfinite(p.lon_deg) || std::fabs(p.lat_deg) > 85 ||
        std::fabs(p.lon_deg) > 180)
      return Status::InvalidArgument("prior centre must be finite, |lat| <= 85, |lon| <= 180");
    if (!std::isfinite(p.radius_m) || p.radius_m < 0 || p.radius_m > 100000)
      return Status::InvalidArgument("prior radius_m must be within [0, 100000]");
  }
  if (heading_deg && !std::isfinite(*heading_deg))
    return Status::InvalidArgument("heading_deg must be finite");
  if (std::string e; !integrity.Validate(&e)) return Status::InvalidArgument(e);
  return Status::Ok();
}

const char* FixQualityName(FixQuality q) {
  switch (q) {
    case FixQuality::kRefined:
      return "refined";
    case FixQuality::kCoarse:
      return "coarse";
    default:
      return "none";
  }
}

}  // namespace sightfix
