// The scene (quads and their lazily painted textures, by kind of object) and the render's
// stages: visibility (quad_raster.h), shading (scene_shading.h), lens (distortion_plan.h).
#include "demo_route/town_renderer.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <opencv2/imgproc.hpp>

#include "demo_route/distortion_plan.h"
#include "demo_route/ground_surface.h"
#include "demo_route/night_light.h"
#include "demo_route/quad_raster.h"
#include "demo_route/random.h"
#include "demo_route/scene_shading.h"
#include "demo_route/sun_shadow.h"
#include "demo_route/vehicle_lights.h"

namespace sightfix::demo {
namespace {

// Four texture ids of one material, for the walls of a box with no top.
std::array<int, 5> Walls(int texture) { return {texture, texture, texture, texture, texture}; }

// Square footprint of half-width hw about c, counter-clockwise.
std::array<cv::Vec2d, 4> SquareFootprint(const cv::Vec2d& c, double hw) {
  const cv::Vec2d dx(hw, 0), dy(0, hw);
  return {c - dx - dy, c + dx - dy, c + dx + dy, c - dx + dy};
}

// Sets up and rasterizes every quad of `quads` that may be seen, appending its raster (the
// index the buffer's ids refer to) to *rasters. Paints the textures of the quads it reaches.
void RasterizeQuads(const std::vector<Quad>& quads, const TextureBank& textures,
                    const std::vector<int>& swaps, const CameraPose& pose, const cv::Matx33d& k,
                    const RenderOptions& options, std::vector<QuadRaster>* rasters,
                    VisibilityBuffer* vis) {
  const cv::Vec3d forward = pose.camera_from_enu.t() * cv::Vec3d(0, 0, 1);
  for (const Quad& q : quads) {
    if (!MayBeVisible(q, pose, forward, options.max_range_m)) continue;
    QuadRaster qr;
    cv::Rect box;
    if (!SetUpQuadRaster(q, pose, k, vis->depth.size(), options.near_m, &qr, &box)) continue;
    qr.texture = &textures.Get(q.texture < int(swaps.size()) ? swaps[q.texture] : q.texture);
    RasterizeQuad(qr, box, k, options.near_m, static_cast<int>(rasters->size()), vis);
    rasters->push_back(qr);
  }
}

// Renders at `ss` times the resolution then averages ss x ss blocks. The high-resolution
// principal point is ss * c + (ss - 1) / 2 so that pixel centres line up exactly.
cv::Matx33d Supersampled(const cv::Matx33d& k, int ss) {
  return cv::Matx33d(k(0, 0) * ss, 0, k(0, 2) * ss + (ss - 1) / 2.0, 0, k(1, 1) * ss,
                     k(1, 2) * ss + (ss - 1) / 2.0, 0, 0, 1);
}

// The variants of a town whose drives differ only in their parked vehicles.
std::vector<DriveWorld> ParkedOnly(const std::vector<std::vector<Vehicle>>& variants) {
  std::vector<DriveWorld> worlds(variants.size());
  for (size_t i = 0; i < variants.size(); ++i) worlds[i].parked = variants[i];
  return worlds;
}

// Footprint of a box of length x depth about c, its length along yaw, counter-clockwise.
std::array<cv::Vec2d, 4> BoxFootprint(const cv::Vec2d& c, double yaw, double length, double depth) {
  const cv::Vec2d ax(std::cos(yaw), std::sin(yaw)), ay(-ax[1], ax[0]);
  const cv::Vec2d hx = ax * (length / 2), hy = ay * (depth / 2);
  return {c - hx - hy, c + hx - hy, c + hx + hy, c - hx + hy};
}

}  // namespace

Quad MakeQuad(const cv::Vec3d& origin, const cv::Vec3d& u_axis, const cv::Vec3d& v_axis,
              int texture, double brightness) {
  Quad q;
  q.origin = origin;
  q.u_axis = u_axis;
  q.v_axis = v_axis;
  q.texture = texture;
  q.brightness = brightness;
  q.centre = origin + 0.5 * (u_axis + v_axis);
  q.radius = 0.5 * std::max(cv::norm(u_axis + v_axis), cv::norm(u_axis - v_axis));
  return q;
}

TownScene::TownScene(const Town& town, const std::vector<std::vector<Vehicle>>& variants)
    : TownScene(town, ParkedOnly(variants)) {}

TownScene::TownScene(const Town& town, const std::vector<DriveWorld>& worlds,
                     double lit_window_share)
    : town_(town),
      glyphs_(town.options.seed),
      ground_(std::make_unique<GroundSurface>(town)),
      lamps_(std::make_unique<StreetLamps>(town)) {
  AddBuildings(town);
  AddPoles(town);
  AddTrees(town);
  AddVehicles(town, worlds);
  AddChanges(worlds);
  if (lit_window_share > 0) AddWindowLights(town, lit_window_share);
}

// AddBuildings came first and gave each building its four walls in order, so building i's
// street front is quad 4 i + front_edge.
void TownScene::AddWindowLights(const Town& town, double lit_window_share) {
  const GlyphSet* glyphs = &glyphs_;
  for (size_t i = 0, f = 0; i < town.buildings.size(); ++i, ++f) {
    const FacadeSpec spec = facade_specs_[f];
    const int id = textures_.Add(
        [spec, glyphs, lit_window_share] {
          return PaintLitWindows(spec, *glyphs, lit_window_share);
        },
        kFacadeTexelsPerM);
    quads_[4 * i + town.buildings[i].front_edge].emission = id;
  }
}

std::unique_ptr<SunShadowMap> TownScene::ShadowsFor(const CameraPose& pose, const cv::Matx33d& k,
                                                    cv::Size size, const Appearance& look,
                                                    int variant,
                                                    const std::vector<int>& swaps) const {
  const cv::Vec3d forward = pose.camera_from_enu.t() * cv::Vec3d(0, 0, 1);
  const double half_fov = std::atan(std::max(k(0, 2), size.width - k(0, 2)) / k(0, 0));
  double tallest_m = 0;
  for (const Building& b : town_.buildings) tallest_m = std::max(tallest_m, b.height_m);
  const cv::Rect2d region = SunShadowMap::RegionFor(look.sun_dir, pose.position, forward, half_fov,
                                                    look.shadow_range_m, tallest_m);
  // At most 4096 texels a side (the wedge of a 160 m range needs about 2000 at 0.1 m).
  const double texel = std::max(look.shadow_texel_m, std::max(region.width, region.height) / 4096);
  auto map = std::make_unique<SunShadowMap>(look.sun_dir, region, texel);
  auto add = [&](const std::vector<Quad>& quads) {
    for (const Quad& q : quads) {
      // Only cut-outs (two-sided: canopies, sign panels) need their texture, for its alpha.
      const int id = q.texture < int(swaps.size()) ? swaps[q.texture] : q.texture;
      map->AddQuad(q, q.two_sided ? &textures_.Get(id) : nullptr);
    }
  };
  add(quads_);
  if (variant < int(vehicle_quads_.size())) add(vehicle_quads_[variant]);
  return map;
}

TownScene::~TownScene() = default;

// Buildings: the front edge painted as a facade, the other walls plain; no roof.
void TownScene::AddBuildings(const Town& town) {
  const GlyphSet* glyphs = &glyphs_;
  for (const Building& b : town.buildings) {
    std::array<int, 5> tex{};
    for (int e = 0; e < 4; ++e) {
      const double w = cv::norm(b.footprint[(e + 1) % 4] - b.footprint[e]);
      const uint64_t seed = HashSeed(b.seed, e);
      if (e == b.front_edge) {
        const FacadeSpec spec{w, b.height_m, b.floors, seed, b.facade};
        tex[e] =
            textures_.Add([spec, glyphs] { return PaintFacade(spec, *glyphs); }, kFacadeTexelsPerM);
        facade_specs_.push_back(spec);
        facade_textures_.push_back(tex[e]);
      } else {
        const double h = b.height_m;
        tex[e] =
            textures_.Add([w, h, seed] { return PaintPlainWall(w, h, seed); }, kPlainTexelsPerM);
      }
    }
    tex[4] = -1;
    AddBox(b.footprint, 0.0, b.height_m, tex, 1.0, &quads_);
  }
}

// Poles: a metal post; lamps get an arm over the road, sign posts a two-sided panel.
void TownScene::AddPoles(const Town& town) {
  const GlyphSet* glyphs = &glyphs_;
  for (const Pole& p : town.poles) {
    const int metal = textures_.Add([s = p.seed] { return PaintMetal(s); }, 8 / 0.16);
    AddBox(SquareFootprint(p.base, p.kind == Pole::kLamp ? 0.08 : 0.04), 0, p.height_m,
           Walls(metal), 1.0, &quads_);
    const cv::Vec2d f(std::cos(p.facing_rad), std::sin(p.facing_rad)), side(-f[1], f[0]);
    if (p.kind == Pole::kLamp) {  // arm with a lamp head over the road
      const cv::Vec2d a = p.base, b = p.base + 1.6 * f;
      AddBox({a - 0.06 * side, b - 0.06 * side, b + 0.06 * side, a + 0.06 * side},
             p.height_m - 0.15, p.height_m, Walls(metal), 1.0, &quads_);
    } else {  // sign panel, seen from both sides (the back in plain metal)
      const int face =
          textures_.Add([s = p.seed, glyphs] { return PaintSign(s, *glyphs); }, kObjectTexelsPerM);
      const cv::Vec2d c = p.base + 0.06 * f;
      const cv::Vec3d o(c[0] + 0.35 * side[0], c[1] + 0.35 * side[1], p.height_m + 0.35);
      quads_.push_back(
          MakeQuad(o, cv::Vec3d(-0.7 * side[0], -0.7 * side[1], 0), {0, 0, -0.7}, face));
      quads_.back().two_sided = true;
    }
  }
}

// Trees: a bark trunk and a canopy of two crossed cut-out quads.
void TownScene::AddTrees(const Town& town) {
  for (const Tree& t : town.trees) {
    const int bark = textures_.Add([s = t.seed] { return PaintBark(s); }, 16 / 0.3);
    AddBox(SquareFootprint(t.base, 0.13), 0, t.trunk_height_m + 0.5, Walls(bark), 1.0, &quads_);
    const int leaves =
        textures_.Add([s = t.seed] { return PaintCanopy(s); }, 128 / (2 * t.canopy_radius_m));
    canopy_textures_.push_back(leaves);
    const double r = t.canopy_radius_m, top = t.trunk_height_m + 2 * r;
    for (double a : {0.3, 0.3 + M_PI / 2}) {
      const cv::Vec3d u(2 * r * std::cos(a), 2 * r * std::sin(a), 0);
      quads_.push_back(
          MakeQuad(cv::Vec3d(t.base[0], t.base[1], top) - 0.5 * u, u, {0, 0, -2 * r}, leaves));
      quads_.back().two_sided = true;
    }
  }
}

// Vehicles: textures per vehicle (by id: the town's, then those new in a variant), quads per
// drive variant.
void TownScene::AddVehicles(const Town& town, const std::vector<DriveWorld>& worlds) {
  const GlyphSet* glyphs = &glyphs_;
  std::map<int, std::array<int, 5>> vehicle_tex;
  auto add_textures = [&](const Vehicle& v) {
    std::array<int, 5> tex{};
    for (int face = 0; face < 5; ++face) {
      const double len = face < 2 ? v.length_m : v.width_m, h = face == 4 ? v.length_m : v.height_m;
      tex[face] = textures_.Add(
          [len, h, s = v.seed, face, glyphs] { return PaintVehicle(len, h, s, face, *glyphs); },
          kObjectTexelsPerM);
    }
    vehicle_tex[v.id] = tex;
  };
  for (const Vehicle& v : town.vehicles) add_textures(v);
  for (const DriveWorld& world : worlds)
    for (const Vehicle& v : world.parked)
      if (!vehicle_tex.count(v.id)) add_textures(v);
  for (const DriveWorld& world : worlds) {
    std::vector<Quad> quads;
    for (const Vehicle& v : world.parked) {
      const auto& t = vehicle_tex.at(v.id);
      // Edges: 0 right side, 1 front, 2 left side, 3 back (counter-clockwise from the rear right).
      AddBox(BoxFootprint(v.centre, v.yaw_rad, v.length_m, v.width_m), 0.25, 0.25 + v.height_m,
             {t[0], t[2], t[1], t[3], t[4]}, 1.0, &quads);
    }
    vehicle_quads_.push_back(std::move(quads));
  }
}

// Changed facades and canopies swap in their own textures; works sites join the variant's
// quads; each mover gets five textures (vehicles painted as parked ones, figures cut out).
void TownScene::AddChanges(const std::vector<DriveWorld>& worlds) {
  const GlyphSet* glyphs = &glyphs_;
  for (size_t i = 0; i < worlds.size(); ++i) {
    const DriveWorld& w = worlds[i];
    std::vector<int> swaps;
    auto swap = [&](int from, int to) {
      if (int(swaps.size()) <= from) {
        const int n = static_cast<int>(swaps.size());
        swaps.resize(from + 1);
        for (int k = n; k <= from; ++k) swaps[k] = k;
      }
      swaps[from] = to;
    };
    for (const FacadeChange& c : w.facades) {
      const FacadeSpec spec = facade_specs_[c.building];
      swap(facade_textures_[c.building], textures_.Add(
                                             [spec, c, glyphs] {
                                               return ApplyFacadeChange(PaintFacade(spec, *glyphs),
                                                                        c, spec, *glyphs);
                                             },
                                             kFacadeTexelsPerM));
    }
    if (w.season.changed())
      for (size_t t = 0; t < town_.trees.size(); ++t) {
        const Tree& tree = town_.trees[t];
        swap(canopy_textures_[t], textures_.Add(
                                      [s = tree.seed, season = w.season, i] {
                                        return ApplySeason(PaintCanopy(s), season,
                                                           HashSeed(s, 0x736561, i));
                                      },
                                      128 / (2 * tree.canopy_radius_m)));
      }
    texture_swaps_.push_back(std::move(swaps));
    for (const WorksSite& site : w.works) AddWorks(site, &vehicle_quads_[i]);
    movers_.push_back(w.traffic.movers);
    std::vector<std::array<int, 5>> tex;
    for (const Mover& m : w.traffic.movers) {
      std::array<int, 5> t{};
      const bool figure = m.kind == MoverKind::kCyclist || m.kind == MoverKind::kPedestrian;
      for (int face = 0; face < 5; ++face) {
        const double len = face < 2 ? m.length_m : m.width_m,
                     h = face == 4 ? m.length_m : m.height_m;
        t[face] = figure
                      ? textures_.Add([k = m.kind, len, h, s = m.seed,
                                       face] { return PaintFigure(k, len, h, s, face); },
                                      kObjectTexelsPerM)
                      : textures_.Add([len, h, s = m.seed, face,
                                       glyphs] { return PaintVehicle(len, h, s, face, *glyphs); },
                                      kObjectTexelsPerM);
      }
      tex.push_back(t);
    }
    mover_textures_.push_back(std::move(tex));
  }
}

// A fenced box (fence panels all round), a barrier (a striped board on a thin box) or
// scaffolding (one cut-out plane before the facade, seen from both sides).
void TownScene::AddWorks(const WorksSite& site, std::vector<Quad>* out) {
  const GlyphSet* glyphs = &glyphs_;
  if (site.kind == WorksSite::kScaffold) {
    const int tex = textures_.Add(
        [w = site.length_m, h = site.height_m, s = site.seed] { return PaintScaffold(w, h, s); },
        kObjectTexelsPerM / 4);
    const cv::Vec2d ax(std::cos(site.yaw_rad), std::sin(site.yaw_rad));
    const cv::Vec2d a = site.centre - ax * (site.length_m / 2);
    out->push_back(MakeQuad({a[0], a[1], site.height_m},
                            {ax[0] * site.length_m, ax[1] * site.length_m, 0},
                            {0, 0, -site.height_m}, tex));
    out->back().two_sided = true;
    return;
  }
  const bool box = site.kind == WorksSite::kFencedBox;
  std::array<int, 5> tex{};
  for (int e = 0; e < 4; ++e) {
    const double w = e % 2 == 0 ? site.length_m : site.depth_m;
    tex[e] = box ? textures_.Add([w, h = site.height_m, s = HashSeed(site.seed, e),
                                  glyphs] { return PaintSiteFence(w, h, s, *glyphs); },
                                 kObjectTexelsPerM)
                 : textures_.Add([w, h = site.height_m] { return PaintBarrier(w, h); },
                                 kObjectTexelsPerM);
  }
  tex[4] = -1;
  AddBox(BoxFootprint(site.centre, site.yaw_rad, site.length_m, site.depth_m), 0.0, site.height_m,
         tex, 1.0, out);
}

std::vector<Quad> TownScene::MovingQuads(int variant, double time_s) const {
  std::vector<Quad> quads;
  if (variant >= int(movers_.size())) return quads;
  const std::vector<Mover>& movers = movers_[variant];
  for (size_t i = 0; i < movers.size(); ++i) {
    const Mover& m = movers[i];
    cv::Vec2d c;
    double yaw;
    if (!MoverPlacement(town_.route, m, time_s, &c, &yaw)) continue;
    const bool figure = m.kind == MoverKind::kCyclist || m.kind == MoverKind::kPedestrian;
    const auto& t = mover_textures_[variant][i];
    AddBox(BoxFootprint(c, yaw, m.length_m, m.width_m), figure ? 0.0 : 0.25,
           (figure ? 0.0 : 0.25) + m.height_m, {t[0], t[2], t[1], t[3], t[4]}, 1.0, &quads);
  }
  return quads;
}

int TownScene::AddTexture(cv::Mat image, double texels_per_m) {
  return textures_.Add([image] { return image; }, texels_per_m);
}

void TownScene::AddQuad(const Quad& q) { quads_.push_back(q); }

void TownScene::AddBox(const std::array<cv::Vec2d, 4>& fp, double z0, double z1,
                       const std::array<int, 5>& textures, double brightness,
                       std::vector<Quad>* out) {
  for (int e = 0; e < 4; ++e) {
    const cv::Vec2d a = fp[e], b = fp[(e + 1) % 4];
    out->push_back(MakeQuad({a[0], a[1], z1}, {b[0] - a[0], b[1] - a[1], 0}, {0, 0, z0 - z1},
                            textures[e], brightness));
  }
  if (textures[4] >= 0) {
    const cv::Vec3d o(fp[3][0], fp[3][1], z1);
    out->push_back(MakeQuad(o, cv::Vec3d(fp[0][0] - fp[3][0], fp[0][1] - fp[3][1], 0),
                            cv::Vec3d(fp[2][0] - fp[3][0], fp[2][1] - fp[3][1], 0), textures[4],
                            brightness));
  }
}

cv::Mat TownScene::RenderPinhole(const CameraPose& pose, const cv::Matx33d& k, cv::Size size,
                                 int ss, const Appearance& look, int variant,
                                 const RenderOptions& options, cv::Mat* moving,
                                 cv::Mat* inverse_depth) const {
  VisibilityBuffer vis(size);
  RasterizeGround(pose, k, options.max_range_m, &vis);  // the ground first, then the quads
  std::vector<QuadRaster> rasters;
  static const std::vector<int> kNoSwaps;
  const std::vector<int>& swaps =
      variant < int(texture_swaps_.size()) ? texture_swaps_[variant] : kNoSwaps;
  RasterizeQuads(quads_, textures_, swaps, pose, k, options, &rasters, &vis);
  if (variant < int(vehicle_quads_.size()))
    RasterizeQuads(vehicle_quads_[variant], textures_, swaps, pose, k, options, &rasters, &vis);
  // Moving objects last: every sample whose id is at least first_moving sees one.
  const int first_moving = static_cast<int>(rasters.size());
  const std::vector<Quad> moving_quads =
      options.moving_objects ? MovingQuads(variant, options.time_s) : std::vector<Quad>();
  RasterizeQuads(moving_quads, textures_, swaps, pose, k, options, &rasters, &vis);
  if (rasters.size() > size_t(first_moving)) {
    cv::Mat1f covered;
    cv::Mat(vis.id >= first_moving).convertTo(covered, CV_32F, 1.0 / 255);
    cv::resize(covered, *moving, size / ss, 0, 0, cv::INTER_AREA);  // exact ss x ss means
  } else {
    *moving = cv::Mat::zeros(size / ss, CV_32F);
  }
  if (inverse_depth) {  // 1 / inf = 0 for the sky; a pixel's flow is linear in 1 / depth
    cv::Mat1f inverse;
    cv::divide(1.0, vis.depth, inverse);
    cv::resize(inverse, *inverse_depth, size / ss, 0, 0, cv::INTER_AREA);
  }
  ShadingInputs in;
  in.pose = &pose;
  in.look = &look;
  in.rasters = &rasters;
  in.ground = ground_.get();
  in.cloud_seed = static_cast<uint32_t>(HashSeed(town_.options.seed, 0x636c64));
  std::unique_ptr<SunShadowMap> shadows;
  if (look.cast_shadows && look.sun > 0 && look.sun_dir[2] > 0.01)
    shadows = ShadowsFor(pose, k, size, look, variant, swaps);
  in.shadows = shadows.get();
  in.textures = &textures_;
  in.lamps = look.lamp_intensity > 0 ? lamps_.get() : nullptr;
  std::unique_ptr<Headlights> beams;
  if (look.headlight_intensity > 0)
    beams =
        std::make_unique<Headlights>(pose.position, pose.camera_from_enu.t() * cv::Vec3d(0, 0, 1),
                                     look.headlight_intensity, look.headlight_colour);
  in.headlights = beams.get();
  cv::Mat3f image = ShadeCanvas(in, vis, k, ss);
  if (look.vehicle_lamps && options.moving_objects && variant < int(movers_.size())) {
    const VehicleLampModel model;
    AddLampGlare(VehicleLampsAt(town_.route, movers_[variant], options.time_s, model), pose, k, ss,
                 vis.depth, model, &image);
  }
  return image;
}

cv::Mat TownScene::Render(const CameraPose& pose, const CameraModel& camera, const Appearance& look,
                          int variant, const RenderOptions& options) const {
  return RenderView(pose, camera, look, variant, options).image;
}

RenderedView TownScene::RenderView(const CameraPose& pose, const CameraModel& camera,
                                   const Appearance& look, int variant,
                                   const RenderOptions& options) const {
  const int ss = std::max(1, options.supersample);
  cv::Matx33d k = camera.K();
  cv::Size size(camera.width_px, camera.height_px);
  std::shared_ptr<const DistortionPlan> plan;
  if (camera.HasDistortion()) {
    plan = PlanFor(camera);
    k = plan->canvas_k;
    size = plan->canvas_size;
  }
  RenderedView view;
  cv::Mat moving;
  view.image = RenderPinhole(pose, Supersampled(k, ss), size * ss, ss, look, variant, options,
                             &moving, options.inverse_depth ? &view.inverse_depth : nullptr);
  if (plan) {  // the lens resamples the coverage as it does the image
    cv::Mat out;
    cv::remap(view.image, out, plan->map_x, plan->map_y, cv::INTER_LINEAR, cv::BORDER_REPLICATE);
    view.image = out;
    cv::remap(moving, out, plan->map_x, plan->map_y, cv::INTER_LINEAR, cv::BORDER_REPLICATE);
    moving = out;
    if (options.inverse_depth) {
      cv::Mat inverse;  // not `out`: it shares `moving`'s buffer now
      cv::remap(view.inverse_depth, inverse, plan->map_x, plan->map_y, cv::INTER_LINEAR,
                cv::BORDER_REPLICATE);
      view.inverse_depth = inverse;
    }
  }
  view.moving_share = cv::mean(moving)[0];
  return view;
}

}  // namespace sightfix::demo
