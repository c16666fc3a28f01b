// Renders the demo town through a calibrated camera: true perspective, occlusion by a depth
// buffer, mip-mapped textures, a procedural road surface and sky, and lens distortion applied
// exactly by the camera model (an ideal pinhole image is rendered, then resampled at the
// undistorted position of every output pixel). Output pixels follow OpenCV's convention, so a
// world point lands where cv::projectPoints puts it (tested to 0.5 px).
//
// Thread safety: a TownScene is immutable after construction except for its lazily painted
// textures, which are guarded; Render may run concurrently on one scene.
#pragma once

#include <array>
#include <memory>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/changed_world.h"
#include "demo_route/town_layout.h"
#include "demo_route/town_painter.h"
#include "indexer/map/camera_model.h"

namespace sightfix::demo {

class GroundSurface;  // ground_surface.h
class StreetLamps;    // night_light.h
class SunShadowMap;   // sun_shadow.h

// A textured parallelogram: origin + u * u_axis + v * v_axis for u, v in [0, 1]; texture row 0
// at v = 0. Metres, ENU.
struct Quad {
  cv::Vec3d origin, u_axis, v_axis;
  int texture = -1;
  double brightness = 1.0;  // material reflectance factor
  bool two_sided = false;   // drawn from behind too (cut-outs); else only from its outward side
  cv::Vec3d centre;         // bounding sphere, for culling
  double radius = 0;
  int emission = -1;  // texture of light the surface gives off (lit windows), added at night
};

// Light and atmosphere of one drive.
struct Appearance {
  cv::Vec3d sun_dir{0.5, -0.5, 0.7};       // unit vector towards the sun, ENU
  double sun = 0.55;                       // direct light on a surface facing the sun
  double ambient = 0.6;                    // sky light on every surface
  cv::Vec3d sky_horizon{0.93, 0.86, 0.8};  // BGR, 0..1
  cv::Vec3d sky_zenith{0.85, 0.6, 0.4};
  cv::Vec3d haze{0.9, 0.85, 0.8};
  double haze_m = 450;  // distance at which haze reaches 1 - 1/e
  double cloud = 0.12;  // contrast of the soft cloud layer
  // The realistic world's light (sun_light.h, sun_shadow.h, night_light.h); the defaults leave
  // it out, so a look without them renders as before, byte for byte.
  bool cast_shadows = false;  // sun shadows from a shadow map (when sun > 0 and the sun is up)
  double shadow_texel_m = 0.1, shadow_range_m = 160;
  double window_glow = 0;          // times the facades' lit-window light (TownScene's share)
  double lamp_intensity = 0;       // street lamps (StreetLamps::Irradiance)
  double headlight_intensity = 0;  // the camera car's low beams (Headlights)
  bool vehicle_lamps = false;      // moving vehicles' lamps and their glare (vehicle_lights.h)
  cv::Vec3d lamp_colour{0.62, 0.85, 1.0}, headlight_colour{0.95, 0.97, 1.0};  // BGR
};

struct CameraPose {
  cv::Vec3d position;           // ENU metres
  cv::Matx33d camera_from_enu;  // rotation, v_cam = R (v_enu - position)
};

struct RenderOptions {
  int supersample = 2;       // render at this factor and average down (anti-aliasing)
  double max_range_m = 300;  // objects beyond this are not drawn (haze hides the cut)
  double near_m = 0.05;
  double time_s = 0;           // drive time: where the variant's moving objects are
  bool moving_objects = true;  // false: leave them out (tests compare with and without)
  bool inverse_depth = false;  // also fill RenderedView::inverse_depth
};

// A rendered view and the share of its pixels (area, after the lens) that moving objects cover.
struct RenderedView {
  cv::Mat image;  // as TownScene::Render
  double moving_share = 0;
  // Where RenderOptions::inverse_depth: CV_32F, the image's size, 1 / z (camera-frame depth, 1/m)
  // averaged over each pixel's samples and resampled through the lens like the image; 0 for sky.
  cv::Mat inverse_depth;
};

class TownScene {
 public:
  // vehicle_variants: the vehicles present in each drive variant (index = variant).
  TownScene(const Town& town, const std::vector<std::vector<Vehicle>>& vehicle_variants);
  // worlds: what each drive variant sees (changed_world.h; index = variant): parked vehicles,
  // changed facades and trees, works sites and moving traffic. Borrows town.
  // lit_window_share > 0: each upper-floor window of a street front is lit, with that chance
  // (its own seeded draw), in the light facades give off at night (Appearance::window_glow).
  TownScene(const Town& town, const std::vector<DriveWorld>& worlds, double lit_window_share = 0);
  ~TownScene();

  // Extra quads (tests add markers); texture = AddTexture result.
  int AddTexture(cv::Mat image, double texels_per_m);
  void AddQuad(const Quad& q);

  // Linear-light BGR image (CV_32FC3, 0..1-ish) of the view, `variant` choosing the vehicles.
  cv::Mat Render(const CameraPose& pose, const CameraModel& camera, const Appearance& look,
                 int variant, const RenderOptions& options = {}) const;
  // The same image with the share of it that the variant's moving objects cover at
  // options.time_s (0 where it has none or options.moving_objects is false).
  RenderedView RenderView(const CameraPose& pose, const CameraModel& camera, const Appearance& look,
                          int variant, const RenderOptions& options = {}) const;

  size_t quad_count() const { return quads_.size(); }

 private:
  // The scene's quads and their textures, by kind of object (the constructor's parts).
  void AddBuildings(const Town& town);
  void AddPoles(const Town& town);
  void AddTrees(const Town& town);
  void AddVehicles(const Town& town, const std::vector<DriveWorld>& worlds);
  // Per variant: changed facades and canopies (texture swaps), works sites, traffic textures.
  void AddChanges(const std::vector<DriveWorld>& worlds);
  void AddWorks(const WorksSite& site, std::vector<Quad>* out);
  // Walls of a box on a counter-clockwise footprint, textured from the outside; textures[4] is
  // the top (none when negative).
  static void AddBox(const std::array<cv::Vec2d, 4>& fp, double z0, double z1,
                     const std::array<int, 5>& textures, double brightness, std::vector<Quad>* out);
  // Registers each street front's lit-window texture as its quad's emission (last, so every
  // other texture keeps its id).
  void AddWindowLights(const Town& town, double lit_window_share);
  // The sun's shadow map over what the view sees (sun_shadow.h): static quads and the variant's
  // parked vehicles and works (movers cast none: moving_world_test counts the pixels they
  // cover by leaving them out).
  std::unique_ptr<SunShadowMap> ShadowsFor(const CameraPose& pose, const cv::Matx33d& k,
                                           cv::Size size, const Appearance& look, int variant,
                                           const std::vector<int>& swaps) const;
  // The boxes of the variant's movers at time_s.
  std::vector<Quad> MovingQuads(int variant, double time_s) const;
  // Renders ss x ss samples per output pixel on the high-resolution canvas (k, size) and returns
  // the output image (size / ss); *moving the share of each output pixel that moving objects
  // cover (CV_32F, same size); *inverse_depth, unless null, the mean 1 / depth of each's samples.
  cv::Mat RenderPinhole(const CameraPose& pose, const cv::Matx33d& k, cv::Size size, int ss,
                        const Appearance& look, int variant, const RenderOptions& options,
                        cv::Mat* moving, cv::Mat* inverse_depth) const;

  const Town& town_;
  GlyphSet glyphs_;
  TextureBank textures_;
  std::vector<Quad> quads_;                             // buildings, poles, trees, markers
  std::vector<std::vector<Quad>> vehicle_quads_;        // per variant: parked vehicles, works sites
  std::vector<FacadeSpec> facade_specs_;                // per building: its street front
  std::vector<int> facade_textures_, canopy_textures_;  // per building, per tree
  std::vector<std::vector<int>> texture_swaps_;  // per variant: texture id -> id drawn instead
  std::vector<std::vector<Mover>> movers_;       // per variant
  std::vector<std::vector<std::array<int, 5>>> mover_textures_;  // per variant, per mover
  std::unique_ptr<GroundSurface> ground_;
  std::unique_ptr<StreetLamps> lamps_;
};

Quad MakeQuad(const cv::Vec3d& origin, const cv::Vec3d& u_axis, const cv::Vec3d& v_axis,
              int texture, double brightness = 1.0);

}  // namespace sightfix::demo
