// Colours and surface noise shared by the demo town's painters (town_painter.h). Colours are
// BGR cv::Scalar values in 0..255; every random choice draws from the caller's Rng, in a fixed
// order, so a painter seeded the same paints the same texels. Not thread-safe per Rng.
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/random.h"

namespace sightfix::demo {

// BGR colour of OpenCV's 8-bit HSV: hue in [0, 180), saturation and value in [0, 1].
cv::Scalar Hsv(double h, double s, double v);

// A random colour: value in [vmin, vmax), saturation in [smin, smax), any hue (drawn in that
// order: value, saturation, hue).
cv::Scalar RandomColour(Rng& r, double smin = 0.2, double smax = 0.9, double vmin = 0.3,
                        double vmax = 0.95);

// The colour scaled by f (darker below 1, lighter above).
inline cv::Scalar Shade(const cv::Scalar& c, double f) {
  return cv::Scalar(c[0] * f, c[1] * f, c[2] * f);
}

// Adds smooth noise of the given feature size (pixels) and amplitude (grey levels) to a BGR
// (CV_8UC3) image.
void AddNoise(cv::Mat& img, Rng& r, double feature_px, double amplitude);

// Dabs `count` discs of radius up to max_r pixels, each the colour under its centre scaled by
// 1 +- strength. BGR (CV_8UC3) images.
void Speckle(cv::Mat& img, Rng& r, int count, double max_r, double strength);

}  // namespace sightfix::demo
