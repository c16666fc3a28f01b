// The demo town's ground as the renderer shades it (the plane z = 0, ENU metres): asphalt with
// lane markings, stones and oil spots on the carriageway and parking strips, kerbs, paving
// slabs on the sidewalks, green verges beyond. Every street's cross-section (StreetSection)
// is measured from the nearest centreline segment, found through a grid of 4 m cells.
//
// Immutable after construction; Colour is thread-safe.
#pragma once

#include <cstdint>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/town_layout.h"

namespace sightfix::demo {

class GroundSurface {
 public:
  explicit GroundSurface(const Town& town);

  // Linear-light BGR colour (0..1) of the ground at (x, y), filtered for a pixel footprint of
  // fp metres on the ground.
  cv::Vec3f Colour(double x, double y, double fp) const;

 private:
  struct Segment {
    cv::Vec2d a, b;
    double s0;  // arc length of a along its street
  };
  static constexpr double kCellM = 4.0;

  void IndexSegments(const cv::Vec2d& mn, const cv::Vec2d& mx);
  // Unsigned distance to the nearest centreline and arc length along it; false off-street.
  bool Nearest(double x, double y, double* d, double* s) const;
  // Carriageway and parking strip, d < StreetSection::kParkingM from the centreline at arc s.
  cv::Vec3f Asphalt(double x, double y, double d, double s, double fp, float grain) const;
  // Factor on the asphalt's grey for a sparse round stone or oil spot at (x, y); 1 for none.
  float StoneFactor(double x, double y, double fp) const;
  // Coverage of the lane markings (centre line, lane dashes, edge line, parking bay marks).
  static float MarkingCoverage(double d, double s, double fp, bool parking);
  // Sidewalk paving slabs, 0.6 m, aligned with the street.
  cv::Vec3f Paving(double d, double s, double fp, float grain) const;

  std::vector<Segment> segments_;
  cv::Vec2d lo_;  // corner of the cell grid
  int nx_ = 0, ny_ = 0;
  std::vector<std::vector<int>> cells_;  // row-major, segment indices within reach of each cell
  uint32_t seed_;
};

}  // namespace sightfix::demo
