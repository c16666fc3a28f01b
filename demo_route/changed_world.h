// What one drive of the demo town sees beyond the town's fixed layout: the parked vehicles
// present, facades changed since the survey (posters, a shop sign, a repaint), the trees'
// season, works sites (a fenced box, a barrier, scaffolding) and the moving traffic
// (traffic.h). The survey sees the town as laid out; in the realistic world each query drive
// draws its own changes from its seed (ChangedWorldRanges), and town.json records them.
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "demo_route/town_layout.h"
#include "demo_route/town_painter.h"
#include "demo_route/traffic.h"
#include "demo_route/world_nuisances.h"

namespace sightfix::demo {

struct FacadeChange {
  enum Kind { kPosters, kShopSign, kRepaint } kind = kPosters;
  int building = 0;      // index into Town::buildings; its street front changes
  uint64_t seed = 0;     // the new paint's
  cv::Vec3d wall_bgr{};  // kRepaint: the new wall colour, 0..255
};

// The trees' canopies: the share of leaf texels kept and a BGR gain on them.
struct TreeSeason {
  std::string name = "summer";  // as the survey saw them
  double leaf_share = 1.0;
  cv::Vec3d tint{1, 1, 1};
  bool changed() const { return leaf_share != 1.0 || tint != cv::Vec3d(1, 1, 1); }
};

// A works site standing on the ground: a box of length x depth x height metres about centre,
// its length along yaw_rad (counter-clockwise from east).
struct WorksSite {
  enum Kind { kFencedBox, kBarrier, kScaffold } kind = kFencedBox;
  cv::Vec2d centre;
  double yaw_rad = 0;
  double length_m = 0, depth_m = 0, height_m = 0;
  int building = -1;  // kScaffold: the building whose front it stands before
  uint64_t seed = 0;
};

struct DriveWorld {
  std::vector<Vehicle> parked;  // present in this drive
  // Against the survey, by vehicle id: gone, re-parked elsewhere along the kerb, new.
  std::vector<int> vehicles_gone, vehicles_moved, vehicles_added;
  std::vector<FacadeChange> facades;
  TreeSeason season;
  std::vector<WorksSite> works;
  bool has_traffic = false;
  TrafficPlan traffic;
};

// The world of drive `index` (0: the survey, which keeps the town as laid out, then one per
// query drive): with changes disabled (the clean world) the parked vehicles of
// VehiclesForVariant(town, variant) only, as before. Otherwise drawn from rng: gone, moved and
// added vehicles, facade changes, the season and works sites. Traffic is planned separately
// (PlanTraffic).
DriveWorld PlanDriveWorld(const Town& town, int index, int variant,
                          const ChangedWorldRanges& ranges, Rng& rng);

// town.json's "changes" object of a drive: every change and where it is.
nlohmann::json ChangesJson(const Town& town, const DriveWorld& world);

// A facade texture (PaintFacade's) as the change leaves it. BGR, kFacadeTexelsPerM; spec is the
// facade's, glyphs the town's.
cv::Mat ApplyFacadeChange(cv::Mat facade, const FacadeChange& change, const FacadeSpec& spec,
                          const GlyphSet& glyphs);

// A canopy texture (PaintCanopy's, BGRA) in another season: leaves thinned in patches by
// `seed`, the rest tinted.
cv::Mat ApplySeason(cv::Mat canopy, const TreeSeason& season, uint64_t seed);

// Textures of works sites (kObjectTexelsPerM): a site fence panel with lettering (BGR), a
// red-and-white barrier board (BGR) and scaffolding (BGRA: tubes and boards on transparent).
cv::Mat PaintSiteFence(double width_m, double height_m, uint64_t seed, const GlyphSet& glyphs);
cv::Mat PaintBarrier(double width_m, double height_m);
cv::Mat PaintScaffold(double width_m, double height_m, uint64_t seed);

}  // namespace sightfix::demo
