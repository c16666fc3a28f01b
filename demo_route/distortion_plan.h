// How the demo town's renderer (town_renderer.h) images through a distorting lens: an ideal
// pinhole canvas large enough to cover every output pixel, and the remap table from output
// pixels to canvas pixels, exact to the camera model (cv::remap with these maps puts a world
// point where cv::projectPoints does).
#pragma once

#include <memory>
#include <opencv2/core.hpp>

#include "indexer/map/camera_model.h"

namespace sightfix::demo {

struct DistortionPlan {
  cv::Matx33d canvas_k;  // canvas intrinsics: the camera's focal lengths, a shifted centre
  cv::Size canvas_size;  // the normalized extent of the output pixels plus a 3 px margin
  cv::Mat map_x, map_y;  // CV_32F, output size: canvas position of each output pixel
};

// The plan for a camera with distortion. Plans are computed once per distinct camera (all of
// its parameters) and cached for the life of the process; thread-safe.
std::shared_ptr<const DistortionPlan> PlanFor(const CameraModel& camera);

}  // namespace sightfix::demo
