#include "server/engine/fix_integrity.h"

#include <cmath>
#include <cstdio>

namespace sightfix {
namespace {

std::string SubsetName(const PoseSubset& s, const std::vector<std::string>& group_names) {
  static const char* kQuadrants[] = {"upper-left", "upper-right", "lower-left", "lower-right"};
  if (s.kind == PoseSubset::Kind::kQuadrant) return std::string("quadrant ") + kQuadrants[s.index];
  if (s.index < static_cast<int>(group_names.size())) return "reference " + group_names[s.index];
  return "group " + std::to_string(s.index);
}

std::vector<SeparatedSolution> Separations(const AbsolutePose& pose, double map_variance,
                                           double scale, const std::vector<std::string>& names) {
  std::vector<SeparatedSolution> out;
  for (const PoseSubset& s : pose.subsets) {
    SeparatedSolution g;
    g.name = SubsetName(s, names);
    g.shift_en = {s.center_shift[0], s.center_shift[1]};
    g.shift_covariance = s.shift_covariance.get_minor<2, 2>(0, 0) * scale;
    g.covariance =
        (s.center_covariance.get_minor<2, 2>(0, 0) + cv::Matx22d::eye() * map_variance) * scale;
    out.push_back(g);
  }
  return out;
}

// The first protection level over its alert limit (0: not checked), or empty.
std::string OverLimit(const FixIntegrity& f) {
  const struct {
    const char* name;
    double level, limit;
  } checks[] = {{"horizontal", f.horizontal_pl_m, f.horizontal_alert_limit_m},
                {"lateral", f.lateral_pl_m, f.lateral_alert_limit_m},
                {"longitudinal", f.longitudinal_pl_m, f.longitudinal_alert_limit_m}};
  for (const auto& c : checks) {
    if (c.limit <= 0 || c.level <= c.limit) continue;
    char buf[128];
    std::snprintf(buf, sizeof buf, "%s protection level %.2f m exceeds the %.2f m alert limit",
                  c.name, c.level, c.limit);
    return buf;
  }
  return "";
}

PlaceEvidence WithNearMisses(PlaceEvidence places, const Fix& fix, const LocalizerOptions& o) {
  WeighNearMisses(fix.references, fix.lat_deg, fix.lon_deg, o.distinct_place_m,
                  o.min_near_miss_inliers, &places);
  return places;
}

}  // namespace

const char* IntegrityStateName(IntegrityState s) {
  switch (s) {
    case IntegrityState::kUnavailable:
      return "unavailable";
    case IntegrityState::kUsable:
      return "usable";
    case IntegrityState::kOverAlertLimit:
      return "over_alert_limit";
    case IntegrityState::kFaultDetected:
      return "fault_detected";
    case IntegrityState::kPlaceAmbiguity:
      return "place_ambiguity";
  }
  return "unavailable";
}

bool IntegrityRequest::Validate(std::string* error) const {
  const char* what = nullptr;
  if (!(std::isfinite(integrity_risk) && integrity_risk >= 0 && integrity_risk < 0.5))
    what = "integrity_risk must lie in [0, 0.5) (0: the server's default)";
  for (double limit : {horizontal_alert_limit_m, lateral_alert_limit_m, longitudinal_alert_limit_m})
    if (!(std::isfinite(limit) && limit >= 0))
      what = "alert limits must be finite and >= 0 metres (0: not checked)";
  if (what && error) *error = what;
  return what == nullptr;
}

FixIntegrity AssessIntegrity(const AbsolutePose& pose, const Fix& fix, double map_variance,
                             const std::vector<std::string>& group_names,
                             const PlaceEvidence& places, const LocalizerOptions& o,
                             const IntegrityRequest& r) {
  ProtectionParameters p = o.protection;
  if (r.integrity_risk > 0) p.integrity_risk = r.integrity_risk;
  FixIntegrity f;
  f.separations = Separations(pose, map_variance, o.covariance_scale, group_names);
  const ProtectionLevels pl =
      ComputeProtectionLevels(fix.covariance_en, fix.heading_deg, f.separations, p);
  f.horizontal_pl_m = pl.horizontal_m, f.lateral_pl_m = pl.lateral_m;
  f.longitudinal_pl_m = pl.longitudinal_m;
  f.integrity_risk = p.integrity_risk;
  f.horizontal_alert_limit_m =
      r.horizontal_alert_limit_m > 0 ? r.horizontal_alert_limit_m : o.default_alert_limit_m;
  f.lateral_alert_limit_m = r.lateral_alert_limit_m;
  f.longitudinal_alert_limit_m = r.longitudinal_alert_limit_m;
  f.overbound_scale = p.overbound_scale, f.overbound_drive = p.overbound_drive;
  f.hypotheses = pl.hypotheses, f.hypotheses_skipped = pose.subsets_skipped;
  f.max_test_ratio = pl.max_test_ratio;
  if (pl.fault_detected) {
    f.state = IntegrityState::kFaultDetected, f.detail = pl.fault;
  } else if (PlaceEvidence all = WithNearMisses(places, fix, o);
             all.AnyRivalReaches(o.ambiguity_flag_ratio)) {
    f.state = IntegrityState::kPlaceAmbiguity, f.detail = all.DescribeAny();
  } else if (std::string over = OverLimit(f); !over.empty()) {
    f.state = IntegrityState::kOverAlertLimit, f.detail = over;
  } else {
    f.state = IntegrityState::kUsable;
  }
  return f;
}

}  // namespace sightfix
