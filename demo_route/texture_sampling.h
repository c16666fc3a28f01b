// Texture lookups of the demo town's renderer: bilinear, trilinear mip-mapped, and the alpha
// test of cut-outs. Inline and allocation-free for the per-sample loops. Texture coordinates
// u, v in [0, 1] (u along the columns, v down the rows); footprints in texels of level 0.
// Colours come back BGR in 0..1. Read-only on the texture; thread-safe.
#pragma once

#include <algorithm>
#include <cmath>
#include <opencv2/core.hpp>

#include "demo_route/shading_math.h"
#include "demo_route/town_painter.h"

namespace sightfix::demo {

// Bilinear sample of an 8-bit BGR or BGRA image at pixel position (x, y), clamped to the
// image; *alpha (if given) gets the alpha of the top-left texel, 1 for BGR.
inline cv::Vec3f Bilinear(const cv::Mat& img, double x, double y, float* alpha) {
  x = std::clamp(x, 0.0, img.cols - 1.001);
  y = std::clamp(y, 0.0, img.rows - 1.001);
  const int x0 = static_cast<int>(x), y0 = static_cast<int>(y);
  const float tx = static_cast<float>(x - x0), ty = static_cast<float>(y - y0);
  const int ch = img.channels();
  const uchar* r0 = img.ptr<uchar>(y0) + x0 * ch;
  const uchar* r1 = img.ptr<uchar>(y0 + 1) + x0 * ch;
  cv::Vec3f out;
  for (int c = 0; c < 3; ++c) {
    const float top = r0[c] + (r0[c + ch] - r0[c]) * tx, bottom = r1[c] + (r1[c + ch] - r1[c]) * tx;
    out[c] = (top + (bottom - top) * ty) / 255.0f;
  }
  if (alpha) *alpha = ch == 4 ? r0[3] / 255.0f : 1.0f;
  return out;
}

// Trilinear mip-mapped sample.
inline cv::Vec3f SampleTexture(const Texture& t, double u, double v, double footprint_texels) {
  const double level =
      std::clamp(std::log2(std::max(footprint_texels, 1e-6)), 0.0, double(t.levels.size() - 1));
  const int l0 = static_cast<int>(level);
  const int l1 = std::min<int>(l0 + 1, t.levels.size() - 1);
  const float f = static_cast<float>(level - l0);
  const cv::Mat& a = t.levels[l0];
  const cv::Vec3f ca = Bilinear(a, u * a.cols - 0.5, v * a.rows - 0.5, nullptr);
  if (f < 1e-3 || l1 == l0) return ca;
  const cv::Mat& b = t.levels[l1];
  return Lerp(ca, Bilinear(b, u * b.cols - 0.5, v * b.rows - 0.5, nullptr), f);
}

// Alpha in [0, 1] of the nearest texel of the mip level for the footprint. REQUIRES: a BGRA
// texture (has_alpha).
inline float SampleAlpha(const Texture& t, double u, double v, double footprint_texels) {
  const int level = std::clamp(static_cast<int>(std::log2(std::max(footprint_texels, 1.0))), 0,
                               int(t.levels.size() - 1));
  const cv::Mat& m = t.levels[level];
  const int x = std::clamp(static_cast<int>(u * m.cols), 0, m.cols - 1);
  const int y = std::clamp(static_cast<int>(v * m.rows), 0, m.rows - 1);
  return m.ptr<uchar>(y)[x * 4 + 3] / 255.0f;
}

}  // namespace sightfix::demo
