#include "demo_route/changed_world.h"

#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>

#include "demo_route/facade_elements.h"
#include "demo_route/paint_primitives.h"
#include "demo_route/random.h"
#include "demo_route/town_painter.h"

namespace sightfix::demo {
namespace {

// Parking strip centre and the barrier's line (its lane side), metres from the centreline.
constexpr double kParkingCentreM = 7.0, kBarrierLineM = 6.4;
// Scaffolding stands this far in front of its facade (pedestrians keep to 9.95 +- 0.23 m).
constexpr double kScaffoldGapM = 0.3;
// A facade counts as on the route when its front's middle is this near an on-route street.
constexpr double kOnRouteFacadeM = 14.0;

// The seasons a query drive may see, the survey's summer being the fourth.
const TreeSeason kSeasons[] = {{"late summer", 0.85, {0.85, 1.0, 1.12}},
                               {"autumn", 0.6, {0.45, 0.85, 1.45}},
                               {"late autumn", 0.3, {0.5, 0.7, 1.1}}};

// The outward normal and middle of building b's street front.
void FrontOf(const Building& b, cv::Vec2d* middle, cv::Vec2d* outward, double* width_m) {
  const cv::Vec2d a = b.footprint[b.front_edge], c = b.footprint[(b.front_edge + 1) % 4];
  *width_m = cv::norm(c - a);
  *middle = 0.5 * (a + c);
  *outward = cv::Vec2d(c[1] - a[1], a[0] - c[0]) / *width_m;  // right of a ccw edge
}

std::vector<int> FacadesOnRoute(const Town& town) {
  std::vector<int> out;
  for (size_t i = 0; i < town.buildings.size(); ++i) {
    cv::Vec2d m, n;
    double w;
    FrontOf(town.buildings[i], &m, &n, &w);
    int street = -1;
    if (DistanceToStreets(town, m, &street) < kOnRouteFacadeM && street >= 0 &&
        town.streets[street].on_route)
      out.push_back(static_cast<int>(i));
  }
  return out;
}

// Whether a box of half-length hl about c (along axis) overlaps vehicle v along the kerb.
bool Overlaps(const Vehicle& v, const cv::Vec2d& c, double hl, double margin) {
  return cv::norm(v.centre - c) < hl + v.length_m / 2 + margin;
}

bool ClearOfAll(const std::vector<Vehicle>& vs, const Vehicle& x, int skip_id) {
  for (const Vehicle& v : vs)
    if (v.id != skip_id && Overlaps(v, x.centre, x.length_m / 2, 0.6)) return false;
  return true;
}

// Gone, moved and added parked vehicles, from the survey's set.
void ChangeParking(const Town& town, const ChangedWorldRanges& r, Rng& rng, DriveWorld* w) {
  int next_id = 0;
  for (const Vehicle& v : town.vehicles) next_id = std::max(next_id, v.id + 1);
  for (const Vehicle& v : town.vehicles) {
    const double u = rng.Unit();
    const double shift =
        rng.Uniform(r.vehicle_moved_m.lo, r.vehicle_moved_m.hi) * (rng.Chance(0.5) ? 1 : -1);
    if (u < r.vehicle_gone_share) {
      w->vehicles_gone.push_back(v.id);
      continue;
    }
    Vehicle moved = v;
    if (u < r.vehicle_gone_share + r.vehicle_moved_share) {
      moved.centre += shift * cv::Vec2d(std::cos(v.yaw_rad), std::sin(v.yaw_rad));
      if (ClearOfAll(w->parked, moved, v.id))
        w->vehicles_moved.push_back(v.id);
      else
        moved = v;
    }
    w->parked.push_back(moved);
  }
  // New vehicles park one car length or two beyond a present one, where that is clear.
  const int want = static_cast<int>(std::lround(r.vehicle_added_share * town.vehicles.size()));
  for (int tries = 0;
       tries < 8 * want && int(w->vehicles_added.size()) < want && !w->parked.empty(); ++tries) {
    const Vehicle& near = w->parked[rng.Int(0, static_cast<int>(w->parked.size()) - 1)];
    Vehicle x = near;
    x.id = next_id;
    x.seed = rng.Next();
    x.length_m = rng.Uniform(3.8, 4.8);
    const double step = (near.length_m + x.length_m) / 2 + rng.Uniform(0.8, 2.5);
    x.centre +=
        (rng.Chance(0.5) ? step : -step) * cv::Vec2d(std::cos(x.yaw_rad), std::sin(x.yaw_rad));
    if (DistanceToStreets(town, x.centre) < kParkingCentreM - 0.5 || !ClearOfAll(w->parked, x, -1))
      continue;
    w->parked.push_back(x);
    w->vehicles_added.push_back(next_id++);
  }
}

void ChangeFacades(const Town& town, const ChangedWorldRanges& r, Rng& rng, DriveWorld* w) {
  for (int b : FacadesOnRoute(town)) {
    const double u = rng.Unit();
    FacadeChange c;
    c.building = b;
    c.seed = rng.Next();
    if (u < r.poster_share)
      c.kind = FacadeChange::kPosters;
    else if (u < r.poster_share + r.shop_sign_share)
      c.kind = FacadeChange::kShopSign;
    else if (u < r.poster_share + r.shop_sign_share + r.repaint_share)
      c.kind = FacadeChange::kRepaint;
    else
      continue;
    const cv::Scalar wall =
        Hsv(rng.Uniform(0, 180), rng.Uniform(0.1, 0.55), rng.Uniform(0.45, 0.9));
    c.wall_bgr = {wall[0], wall[1], wall[2]};
    w->facades.push_back(c);
  }
}

// A fenced box or barrier in the parking strip (parked vehicles there leave), or scaffolding
// before a facade on the route.
void AddWorks(const Town& town, const ChangedWorldRanges& r, Rng& rng, DriveWorld* w) {
  const double L = town.route.length();
  const int n = static_cast<int>(
      std::lround(rng.Uniform(r.works_per_100m.lo, r.works_per_100m.hi) * L / 100));
  const std::vector<int> fronts = FacadesOnRoute(town);
  for (int i = 0; i < n; ++i) {
    WorksSite site;
    site.kind = static_cast<WorksSite::Kind>(rng.Int(0, 2));
    site.seed = rng.Next();
    if (site.kind == WorksSite::kScaffold) {
      if (fronts.empty()) continue;
      site.building = fronts[rng.Int(0, static_cast<int>(fronts.size()) - 1)];
      const Building& b = town.buildings[site.building];
      cv::Vec2d m, out;
      double width;
      FrontOf(b, &m, &out, &width);
      site.length_m = width * rng.Uniform(0.4, 0.9);
      const cv::Vec2d along(-out[1], out[0]);
      site.centre =
          m + out * kScaffoldGapM + along * rng.Uniform(-0.5, 0.5) * (width - site.length_m);
      site.yaw_rad = std::atan2(along[1], along[0]);
      site.height_m = b.height_m;
      w->works.push_back(site);
      continue;
    }
    cv::Vec2d t;
    const double s = rng.Uniform(0, L), side = rng.Chance(0.5) ? 1 : -1;
    const cv::Vec2d c = town.route.At(s, &t), right(t[1], -t[0]);
    const bool box = site.kind == WorksSite::kFencedBox;
    site.centre = c + side * (box ? kParkingCentreM : kBarrierLineM) * right;
    site.yaw_rad = std::atan2(t[1], t[0]);
    site.length_m = box ? rng.Uniform(3, 6) : rng.Uniform(2, 3.5);
    site.depth_m = box ? 1.6 : 0.15;
    site.height_m = box ? 2.0 : 1.0;
    if (DistanceToStreets(town, site.centre) < (box ? kParkingCentreM : kBarrierLineM) - 0.3)
      continue;  // a junction: another street's carriageway
    std::vector<Vehicle> kept;
    for (const Vehicle& v : w->parked)
      if (Overlaps(v, site.centre, site.length_m / 2, 0.5))
        w->vehicles_gone.push_back(v.id);
      else
        kept.push_back(v);
    w->parked = std::move(kept);
    w->works.push_back(site);
  }
}

nlohmann::json Xy(const cv::Vec2d& p) { return {p[0], p[1]}; }

const char* FacadeKindName(FacadeChange::Kind k) {
  return k == FacadeChange::kPosters    ? "posters"
         : k == FacadeChange::kShopSign ? "shop_sign"
                                        : "repaint";
}

const char* WorksKindName(WorksSite::Kind k) {
  return k == WorksSite::kFencedBox ? "fenced_box"
         : k == WorksSite::kBarrier ? "barrier"
                                    : "scaffold";
}

}  // namespace

DriveWorld PlanDriveWorld(const Town& town, int index, int variant, const ChangedWorldRanges& r,
                          Rng& rng) {
  DriveWorld w;
  if (!r.enabled || index == 0) {
    w.parked = VehiclesForVariant(town, r.enabled ? 0 : variant);
    return w;
  }
  ChangeParking(town, r, rng, &w);
  ChangeFacades(town, r, rng, &w);
  w.season = kSeasons[rng.Int(0, 2)];
  AddWorks(town, r, rng, &w);
  std::sort(w.vehicles_gone.begin(), w.vehicles_gone.end());
  return w;
}

nlohmann::json ChangesJson(const Town& town, const DriveWorld& w) {
  nlohmann::json j;
  j["reference"] = "the survey's world: the town as laid out, summer trees, no works";
  j["parked_vehicles"] = {{"present", w.parked.size()},
                          {"gone_ids", w.vehicles_gone},
                          {"moved", nlohmann::json::array()},
                          {"added", nlohmann::json::array()}};
  for (const Vehicle& v : w.parked) {
    const bool moved = std::count(w.vehicles_moved.begin(), w.vehicles_moved.end(), v.id) > 0;
    const bool added = std::count(w.vehicles_added.begin(), w.vehicles_added.end(), v.id) > 0;
    if (moved || added)
      j["parked_vehicles"][moved ? "moved" : "added"].push_back(
          {{"id", v.id},
           {"centre_en_m", Xy(v.centre)},
           {"size_m", {v.length_m, v.width_m, v.height_m}}});
  }
  j["facades"] = nlohmann::json::array();
  for (const FacadeChange& c : w.facades) {
    cv::Vec2d m, n;
    double width;
    FrontOf(town.buildings[c.building], &m, &n, &width);
    nlohmann::json f = {{"building", c.building},
                        {"kind", FacadeKindName(c.kind)},
                        {"front_middle_en_m", Xy(m)},
                        {"front_width_m", width}};
    if (c.kind == FacadeChange::kRepaint)
      f["wall_bgr"] = {c.wall_bgr[0], c.wall_bgr[1], c.wall_bgr[2]};
    j["facades"].push_back(f);
  }
  j["trees"] = {{"season", w.season.name},
                {"leaf_share", w.season.leaf_share},
                {"tint_bgr", {w.season.tint[0], w.season.tint[1], w.season.tint[2]}}};
  j["works"] = nlohmann::json::array();
  for (const WorksSite& s : w.works) {
    nlohmann::json o = {{"kind", WorksKindName(s.kind)},
                        {"centre_en_m", Xy(s.centre)},
                        {"yaw_deg", s.yaw_rad * 180 / M_PI},
                        {"size_m", {s.length_m, s.depth_m, s.height_m}}};
    if (s.building >= 0) o["building"] = s.building;
    j["works"].push_back(o);
  }
  return j;
}

cv::Mat ApplyFacadeChange(cv::Mat img, const FacadeChange& c, const FacadeSpec& spec,
                          const GlyphSet& glyphs) {
  constexpr double ppm = kFacadeTexelsPerM;
  Rng r(c.seed);
  if (c.kind == FacadeChange::kPosters) {  // on the poster band, 1.4-2.4 m up
    for (int i = 0, n = r.Int(2, 4); i < n; ++i) {
      const double pw = r.Uniform(0.5, 0.9) * ppm;
      const double up = r.Uniform(1.6, 2.4), px = r.Uniform(0, std::max(1.0, img.cols - pw));
      PaintPoster(img, r, cv::Rect2d(px, img.rows - up * ppm, pw, pw * 1.4), glyphs);
    }
  } else if (c.kind == FacadeChange::kShopSign) {  // a board at the ground floor's top
    const double floor_h = (spec.height_m - 0.6) / std::max(1, spec.floors) * ppm;
    const double w = r.Uniform(0.5, 0.95) * (img.cols - 0.6 * ppm),
                 x = r.Uniform(0.3 * ppm, img.cols - 0.3 * ppm - w);
    const cv::Rect2d board(x, std::max(0.0, img.rows - floor_h + 0.05 * ppm), w, 0.6 * ppm);
    const cv::Scalar ground = RandomColour(r, 0.4, 0.95, 0.25, 0.9);
    cv::rectangle(img, board, ground, -1);
    glyphs.DrawText(img, {board.x + 0.2 * ppm, board.y + 0.12 * ppm}, 0.36 * ppm,
                    std::max(2, int(w / (0.45 * ppm))), r.Next(),
                    Shade(ground, ground[2] > 128 ? 0.25 : 3.0), 3);
  } else {  // repaint: texels near the wall's dominant colour take the new colour's shade
    std::vector<cv::Mat> ch;
    cv::split(img, ch);
    cv::Vec3d median;
    for (int k = 0; k < 3; ++k) {
      std::vector<uchar> v(ch[k].begin<uchar>(), ch[k].end<uchar>());
      std::nth_element(v.begin(), v.begin() + v.size() / 2, v.end());
      median[k] = std::max<double>(1, v[v.size() / 2]);
    }
    img.forEach<cv::Vec3b>([&](cv::Vec3b& p, const int*) {
      const double d =
          std::abs(p[0] - median[0]) + std::abs(p[1] - median[1]) + std::abs(p[2] - median[2]);
      if (d > 90) return;
      for (int k = 0; k < 3; ++k) p[k] = cv::saturate_cast<uchar>(p[k] * c.wall_bgr[k] / median[k]);
    });
  }
  return img;
}

cv::Mat ApplySeason(cv::Mat canopy, const TreeSeason& season, uint64_t seed) {
  Rng r(seed);
  cv::Mat1f noise(12, 12);
  for (float& x : noise) x = static_cast<float>(r.Unit());
  cv::resize(noise, noise, canopy.size(), 0, 0, cv::INTER_LINEAR);
  for (int y = 0; y < canopy.rows; ++y)
    for (int x = 0; x < canopy.cols; ++x) {
      cv::Vec4b& p = canopy.at<cv::Vec4b>(y, x);
      if (p[3] == 0) continue;
      if (noise(y, x) >= season.leaf_share) {
        p[3] = 0;
        continue;
      }
      for (int k = 0; k < 3; ++k) p[k] = cv::saturate_cast<uchar>(p[k] * season.tint[k]);
    }
  return canopy;
}

cv::Mat PaintSiteFence(double width_m, double height_m, uint64_t seed, const GlyphSet& glyphs) {
  Rng r(seed);
  const double ppm = kObjectTexelsPerM;
  cv::Mat img(std::max(4, int(height_m * ppm)), std::max(4, int(width_m * ppm)), CV_8UC3);
  const cv::Scalar ground =
      r.Chance(0.5) ? Hsv(r.Uniform(50, 80), 0.6, 0.35) : cv::Scalar(225, 225, 220);
  img.setTo(ground);
  AddNoise(img, r, 0.5 * ppm, 6);
  for (double x = 0; x < img.cols; x += 2.0 * ppm)
    cv::line(img, {int(x), 0}, {int(x), img.rows}, cv::Scalar(90, 90, 90), 3);
  const cv::Scalar ink = ground[1] > 150 ? cv::Scalar(40, 40, 180) : cv::Scalar(235, 235, 235);
  glyphs.DrawText(img, {0.3 * ppm, 0.5 * ppm}, 0.3 * ppm, std::max(2, int(width_m / 0.45)),
                  r.Next(), ink, 3);
  return img;
}

cv::Mat PaintBarrier(double width_m, double height_m) {
  const double ppm = kObjectTexelsPerM;
  cv::Mat img(std::max(4, int(height_m * ppm)), std::max(4, int(width_m * ppm)), CV_8UC3,
              cv::Scalar(70, 70, 70));
  const int board = static_cast<int>(0.25 * ppm), top = static_cast<int>(0.1 * ppm);
  cv::Mat stripes = img(cv::Rect(0, top, img.cols, std::min(board, img.rows - top)));
  for (int x = 0; x < stripes.cols; ++x)
    for (int y = 0; y < stripes.rows; ++y)
      stripes.at<cv::Vec3b>(y, x) =
          ((x + y) / int(0.2 * ppm)) % 2 ? cv::Vec3b(40, 40, 210) : cv::Vec3b(240, 240, 240);
  return img;
}

cv::Mat PaintScaffold(double width_m, double height_m, uint64_t seed) {
  Rng r(seed);
  const double ppm = kObjectTexelsPerM / 4;  // tubes need few texels
  cv::Mat img(std::max(4, int(height_m * ppm)), std::max(4, int(width_m * ppm)), CV_8UC4,
              cv::Scalar(0, 0, 0, 0));
  const cv::Scalar tube(150, 155, 160, 255), board(60, 110, 150, 255);
  const double bay = r.Uniform(1.8, 2.5) * ppm, lift = 2.0 * ppm;
  for (double x = 0; x < img.cols; x += bay)
    cv::line(img, {int(x), 0}, {int(x), img.rows}, tube, 2);
  cv::line(img, {img.cols - 1, 0}, {img.cols - 1, img.rows}, tube, 2);
  for (double y = img.rows - 1; y > 0; y -= lift) {
    cv::rectangle(img, cv::Rect2d(0, y - 0.25 * ppm, img.cols, 0.25 * ppm), board, -1);
    cv::line(img, {0, int(y - lift)}, {img.cols, int(y)}, tube, 1);
  }
  return img;
}

}  // namespace sightfix::demo
