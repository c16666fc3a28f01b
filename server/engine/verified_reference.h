// Inside the engine (not installed): a retrieval candidate and a verified reference, as the
// localizer's stages hand them to each other (localizer.cc, reference_pair.cc).
#pragma once

#include <memory>
#include <utility>
#include <vector>

#include "indexer/map/map_store.h"
#include "indexer/vision/local_features.h"
#include "server/engine/tile_cache.h"

namespace sightfix {

// A map image retrieval ranked for the query.
struct Candidate {
  std::shared_ptr<const LoadedTile> tile;  // holds the image alive
  int ordinal = 0;                         // the tile's, in the catalog
  int image = 0;                           // index into tile->data.images
  float distance = 0;                      // retrieval distance, smaller is nearer
};

// A verified reference: its candidate and the query <-> reference inlier matches.
struct Verified {
  Candidate c;
  std::vector<std::pair<int, int>> matches;  // (query keypoint, reference keypoint), ratio test
  cv::Matx33d camera_from_frame;             // reference pose in the query's frame
  cv::Vec3d center;                          // reference camera centre, query's frame, metres
  int inliers = 0;                           // essential-matrix inliers
  // Of its matches whose keypoint observes a map point: how many were reprojected through the
  // fix's pose (in front of it), and how many of those fell within the PnP threshold.
  int tested = 0, agreeing = 0;
};

// A reference image's stored features, expanded for matching.
inline LocalFeatures ReferenceFeatures(const ReferenceImage& r) {
  LocalFeatures f;
  f.descriptors = ExpandDescriptors(r.descriptors);
  f.normalized.assign(r.normalized.begin(), r.normalized.end());
  return f;
}

}  // namespace sightfix
