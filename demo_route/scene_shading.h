// Shading pass of the demo town's renderer (town_renderer.h): turns a VisibilityBuffer
// (quad_raster.h) into the output image. Sky: a horizon-to-zenith gradient with a soft cloud
// layer. Ground and quads: texture (filtered for the sample's footprint) times sun and sky
// light (the sun's share kept where its shadow map says so; street lamps and headlights at
// night), lit windows' own light, then haze with distance.
//
// With supersampling, a block of ss x ss samples that all see the same surface is shaded once
// at the block centre; blocks that straddle an edge shade every sample and average them.
// Surface coordinates are recomputed from the ray, so no per-sample texture coordinates are
// stored. Reads only; thread-safe on distinct outputs.
#pragma once

#include <cstdint>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/ground_surface.h"
#include "demo_route/night_light.h"
#include "demo_route/quad_raster.h"
#include "demo_route/sun_shadow.h"
#include "demo_route/town_renderer.h"

namespace sightfix::demo {

// What shading one view reads; everything borrowed, to outlive the ShadeCanvas call.
struct ShadingInputs {
  const CameraPose* pose = nullptr;
  const Appearance* look = nullptr;
  const std::vector<QuadRaster>* rasters = nullptr;  // the ids >= 0 of the buffer index these
  const GroundSurface* ground = nullptr;
  uint32_t cloud_seed = 0;
  // The realistic world's light; null leaves each out. shadows: the sun's shadow map (direct
  // sunlight times SunShadowMap::Lit); textures: the bank Quad::emission refers to (read when
  // look->window_glow > 0); lamps and headlights: night lights, added to the sun and sky.
  const SunShadowMap* shadows = nullptr;
  const TextureBank* textures = nullptr;
  const StreetLamps* lamps = nullptr;
  const Headlights* headlights = nullptr;
};

// Linear-light BGR output (CV_32FC3, (width / ss) x (height / ss)) of a canvas with intrinsics
// k whose samples the buffer holds, ss x ss samples per output pixel.
cv::Mat3f ShadeCanvas(const ShadingInputs& in, const VisibilityBuffer& vis, const cv::Matx33d& k,
                      int ss);

}  // namespace sightfix::demo
