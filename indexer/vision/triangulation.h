// Triangulation primitives shared by the builder (survey structure) and the engine (the
// query-time pair fallback). Cameras are given as (camera_from_enu rotation, centre in ENU
// metres); observations are undistorted normalized image coordinates. Thread-safe (pure).
#pragma once

#include <opencv2/core.hpp>
#include <vector>

namespace sightfix {

// Linear multi-view triangulation (DLT) of one point from normalized observations of cameras
// given as (camera_from_enu rotation, centre).
cv::Vec3d TriangulateLinear(const std::vector<cv::Matx33d>& camera_from_enu,
                            const std::vector<cv::Vec3d>& centers,
                            const std::vector<cv::Point2d>& normalized);

// Covariance (m^2) of a point x seen by cameras (camera_from_enu, centre, focal in pixels) with
// keypoint noise pixel_sigma_px: (sum J^T J)^-1, J the 2x3 derivative of each projection.
cv::Matx33d TriangulationCovariance(const std::vector<cv::Matx33d>& camera_from_enu,
                                    const std::vector<cv::Vec3d>& centers,
                                    const std::vector<double>& focal_px, const cv::Vec3d& x,
                                    double pixel_sigma_px);

// Largest angle in degrees between the rays from `centers` to x.
double MaxRayAngleDeg(const std::vector<cv::Vec3d>& centers, const cv::Vec3d& x);

}  // namespace sightfix
