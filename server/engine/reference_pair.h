// Inside the engine (not installed): the query-time pair fallback of localizer.h, stage 4. When
// the map's 3D points give too few correspondences, two verified references are matched with
// each other and their matches triangulated with the references' known poses (DESIGN.md 5.3);
// the query keypoints matched to those give 2D-3D correspondences for the same PnP.
// Thread-safe (pure function).
#pragma once

#include <vector>

#include "indexer/vision/local_features.h"
#include "server/engine/absolute_pose.h"
#include "server/engine/verified_reference.h"

namespace sightfix {

// Correspondences from the pair of `verified` with the widest baseline (at least
// min_baseline_m metres; none when no pair reaches it). Each triangulated point keeps only
// rays at least 2 degrees apart, in front of both references, reprojecting within 2 px; its
// covariance is the triangulation's with pixel_sigma_px keypoint noise. World frame: the
// references' (Verified::center, camera_from_frame).
std::vector<PointCorrespondence> PairCorrespondences(const LocalFeatures& query,
                                                     const std::vector<Verified>& verified,
                                                     double min_baseline_m, double pixel_sigma_px);

}  // namespace sightfix
