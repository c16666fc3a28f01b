// The parts of a facade that PaintFacade (town_painter.h) places on its wall: windows, shop
// fronts and posters. Each draws onto a BGR (CV_8UC3) facade texture in texel coordinates (row 0
// at the top), with ppm texels per metre, and takes its random choices from the facade's Rng in
// a fixed order, so the same seed paints the same facade. Not thread-safe per Rng.
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/random.h"
#include "demo_route/town_painter.h"

namespace sightfix::demo {

// A window in the rectangle w (frame included): glass with a sky reflection, something behind
// it (curtains, blinds, a plant, a lamp or nothing), zero to two mullions and a sill below.
void PaintWindow(cv::Mat& img, Rng& r, cv::Rect2d w, const cv::Scalar& frame, double ppm);

// A poster filling rectangle p: shapes and a line of invented lettering on a plain ground.
void PaintPoster(cv::Mat& img, Rng& r, cv::Rect2d p, const GlyphSet& glyphs);

// A shop front between columns x0 and x1 on the ground floor (floor_h texels high, at the
// bottom of the image): a lettered sign board, a display window with goods, and a door.
void PaintShopFront(cv::Mat& img, Rng& r, double x0, double x1, double floor_h, double ppm,
                    const GlyphSet& glyphs);

}  // namespace sightfix::demo
