// Inside the engine (not installed): a refined fix's integrity (localizer.h FixIntegrity) from
// its pose's solution separation (absolute_pose.h PoseSubset), the map's own uncertainty and the
// evidence for a rival place (place_ambiguity.h).
#pragma once

#include <string>
#include <vector>

#include "server/engine/absolute_pose.h"
#include "server/engine/localizer.h"
#include "server/engine/place_ambiguity.h"

namespace sightfix {

// fix: a refined fix with its covariance_en and heading set; map_variance the per-axis variance
// of the map's terms (m^2, before covariance_scale: map_uncertainty.h), which every subset
// solution shares; group_names[label] names the groups of AbsolutePoseOptions::groups.
// REQUIRES: r.Validate(), o.Validate().
FixIntegrity AssessIntegrity(const AbsolutePose& pose, const Fix& fix, double map_variance,
                             const std::vector<std::string>& group_names,
                             const PlaceEvidence& places, const LocalizerOptions& o,
                             const IntegrityRequest& r);

}  // namespace sightfix
