// Per-pixel arithmetic of the demo town's renderer: lattice hashes, smooth value noise,
// band-limited noise and box-filtered stripes. All inline and allocation-free: they run once
// or more per rendered sample, in the -O3 loops of town_renderer.cc, ground_surface.cc and
// scene_shading.cc. Pure functions, thread-safe.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <opencv2/core.hpp>

namespace sightfix::demo {

// 32-bit hash of a lattice point and a seed.
inline uint32_t Hash2(int32_t x, int32_t y, uint32_t seed) {
  uint32_t h = static_cast<uint32_t>(x) * 0x8da6b343u ^ static_cast<uint32_t>(y) * 0xd8163841u ^
               seed * 0xcb1ab31fu;
  h ^= h >> 13;
  h *= 0x5bd1e995u;
  return h ^ (h >> 15);
}

// The lattice hash as a number in [0, 1).
inline float HashUnit(int32_t x, int32_t y, uint32_t seed) {
  return (Hash2(x, y, seed) & 0xffffff) / 16777216.0f;
}

// Smooth value noise in [0, 1) at unit lattice spacing.
inline float ValueNoise(double x, double y, uint32_t seed) {
  const int32_t ix = static_cast<int32_t>(x) - (x < 0), iy = static_cast<int32_t>(y) - (y < 0);
  const float tx = static_cast<float>(x - ix), ty = static_cast<float>(y - iy);
  const float sx = tx * tx * (3 - 2 * tx), sy = ty * ty * (3 - 2 * ty);
  const float a = HashUnit(ix, iy, seed), b = HashUnit(ix + 1, iy, seed);
  const float c = HashUnit(ix, iy + 1, seed), d = HashUnit(ix + 1, iy + 1, seed);
  return (a + (b - a) * sx) + ((c + (d - c) * sx) - (a + (b - a) * sx)) * sy;
}

// Band-limited noise about 0: `octaves` octaves from base_scale down, each half the scale and
// 0.6 times the amplitude; octaves finer than the pixel footprint (same unit as x, y and the
// scale) fade out instead of aliasing.
inline float Fbm(double x, double y, double footprint, double base_scale, int octaves,
                 uint32_t seed) {
  float sum = 0, norm = 0, amp = 1;
  double scale = base_scale;
  for (int i = 0; i < octaves; ++i, scale *= 0.5, amp *= 0.6f) {
    const float fade = static_cast<float>(std::clamp(2.0 - 2.0 * footprint / scale, 0.0, 1.0));
    norm += amp;
    sum += amp * (fade > 0 ? fade * (ValueNoise(x / scale, y / scale, seed + i) - 0.5f) : 0.0f);
  }
  return sum / norm;
}

// Coverage in [0, 1] of a stripe |d| < half_width for a pixel of the given footprint (box
// filter); d, half_width and footprint in one unit.
inline float Stripe(double d, double half_width, double footprint) {
  const double w = std::max(footprint, 1e-3);
  return static_cast<float>(std::clamp((half_width - std::abs(d)) / w + 0.5, 0.0, 1.0));
}

inline cv::Vec3f Lerp(const cv::Vec3f& a, const cv::Vec3f& b, float t) { return a + (b - a) * t; }

}  // namespace sightfix::demo
