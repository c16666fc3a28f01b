#include "demo_route/look_alikes.h"

#include <algorithm>
#include <cmath>

#include "demo_route/random.h"
#include "demo_route/street_placement.h"

namespace sightfix::demo {
namespace {

constexpr double kRunMarginM = 6.0;        // a stretch keeps this clear of the route's turns
constexpr double kExcursionLengthM = 150;  // the side street, from the route's centreline
// Its own buildings start this far along it: nearer, the route's corner buildings' side walls
// line it, and a forward camera on the route would see the side street's first facades.
constexpr double kExcursionBuildingsFromM = 35;
constexpr double kTerraceHouseM = 7.2;  // width of a terrace house
constexpr double kTwinMaxM = 100, kTerraceMaxM = 130, kChainMaxM = 100;
constexpr double kFrontLateralMinM = 10.0;  // a front this far from the centreline ...
constexpr double kFrontLateralMaxM = 16.5;  // ... to this far faces the route (setback <= 2.8)

cv::Vec2d Perp(const cv::Vec2d& t) { return {-t[1], t[0]}; }  // left normal

template <typename T, typename Pred>
void EraseIf(std::vector<T>* v, Pred pred) {
  v->erase(std::remove_if(v->begin(), v->end(), pred), v->end());
}

// A straight stretch of the route: [from, to] metres of arc length, heading t.
struct Run {
  double from = 0, to = 0;
  cv::Vec2d t;
  double length() const { return to - from; }
};

// The route's straight stretches (axis-aligned segments in a row), each shrunk by kRunMarginM
// where it meets a turn or a curve.
std::vector<Run> StraightRuns(const Polyline& route) {
  std::vector<Run> runs;
  const auto& pts = route.points();
  const auto& arc = route.arc();
  auto axis = [](const cv::Vec2d& d) {
    const double n = cv::norm(d);
    return n > 0 && (std::abs(d[0]) / n > 1 - 1e-9 || std::abs(d[1]) / n > 1 - 1e-9);
  };
  for (size_t i = 1; i < pts.size(); ++i) {
    const cv::Vec2d d = pts[i] - pts[i - 1];
    if (!axis(d)) continue;
    const cv::Vec2d t = d / cv::norm(d);
    if (!runs.empty() && runs.back().to == arc[i - 1] && cv::norm(runs.back().t - t) < 1e-9) {
      runs.back().to = arc[i];
    } else {
      runs.push_back({arc[i - 1], arc[i], t});
    }
  }
  std::vector<Run> out;
  for (Run r : runs) {
    if (r.from > 0) r.from += kRunMarginM;  // the route's start runs on straight
    if (r.to < route.length()) r.to -= kRunMarginM;
    if (r.length() > 0) out.push_back(r);
  }
  return out;
}

// A building's front in a run's frame: along the run from its start, and to the right of it.
struct FrontInRun {
  double along_lo, along_hi, lateral;
};

FrontInRun FrontOf(const Building& b, const cv::Vec2d& origin, const cv::Vec2d& t) {
  const cv::Vec2d a = b.footprint[b.front_edge], c = b.footprint[(b.front_edge + 1) % 4];
  const cv::Vec2d right = -Perp(t);
  const double u0 = (a - origin).dot(t), u1 = (c - origin).dot(t);
  return {std::min(u0, u1), std::max(u0, u1), ((a + c) / 2 - origin).dot(right)};
}

// Whether b's front faces the route along [0, length] of the stretch at origin, heading t:
// overlapping it (whole = false) or lying within it (whole = true).
bool FrontOnStretch(const Building& b, const cv::Vec2d& origin, const cv::Vec2d& t, double length,
                    bool whole) {
  const FrontInRun f = FrontOf(b, origin, t);
  const double lat = std::abs(f.lateral);
  if (lat < kFrontLateralMinM || lat > kFrontLateralMaxM) return false;
  if (whole) return f.along_lo >= -0.01 && f.along_hi <= length + 0.01;
  return f.along_hi > 0 && f.along_lo < length;
}

void RemoveFrontsOnStretch(Town* town, const cv::Vec2d& origin, const cv::Vec2d& t, double length) {
  EraseIf(&town->buildings,
          [&](const Building& b) { return FrontOnStretch(b, origin, t, length, false); });
}

// Repeats the buildings fronting [a.from, a.from + length] at [b.from, b.from + length].
int PlaceTwins(Town* town, const Run& a, const Run& b, double length) {
  const cv::Vec2d oa = town->route.At(a.from), ob = town->route.At(b.from);
  std::vector<Building> copies;
  for (const Building& x : town->buildings) {
    if (!FrontOnStretch(x, oa, a.t, length, true)) continue;
    Building y = x;
    for (int i = 0; i < 4; ++i) {
      const cv::Vec2d d = x.footprint[i] - oa;
      y.footprint[i] = ob + d.dot(a.t) * b.t + d.dot(Perp(a.t)) * Perp(b.t);
    }
    copies.push_back(y);
  }
  RemoveFrontsOnStretch(town, ob, b.t, length);
  int placed = 0;
  for (const Building& y : copies) {
    if (!FootprintFits(*town, y.footprint)) continue;
    town->buildings.push_back(y);
    ++placed;
  }
  return 2 * placed;  // the originals and their copies
}

// Terrace houses along both sides of [run.from, run.from + length], one design per side.
int PlaceTerrace(Town* town, const Run& run, double length, Rng& rng) {
  const cv::Vec2d origin = town->route.At(run.from), right = -Perp(run.t);
  RemoveFrontsOnStretch(town, origin, run.t, length);
  int placed = 0;
  for (int side : {+1, -1}) {
    const uint64_t design = rng.Next();
    const int floors = rng.Int(3, 4);
    const double height_m = floors * 3.1 + 0.8, off = StreetSection::kFacadeM + 0.3;
    for (double u = 0; u + kTerraceHouseM <= length + 1e-9; u += kTerraceHouseM) {
      const cv::Vec2d q0 = origin + u * run.t + side * off * right;
      const cv::Vec2d q1 = q0 + kTerraceHouseM * run.t;
      Building b;
      b.footprint = side > 0 ? FrontFootprint(q1, q0, 11.0, &b.front_edge)
                             : FrontFootprint(q0, q1, 11.0, &b.front_edge);
      b.floors = floors;
      b.height_m = height_m;
      b.seed = design;
      b.facade.residential = true;
      if (rng.Chance(0.25)) b.facade.door_tint = rng.Int(0, 3);
      if (!FootprintFits(*town, b.footprint)) continue;
      town->buildings.push_back(b);
      ++placed;
    }
  }
  return placed;
}

int PlaceChainShops(Town* town, const Run& run, double length, Rng& rng) {
  const cv::Vec2d origin = town->route.At(run.from);
  const uint64_t chain = rng.Next() | 1;  // never 0: 0 means no chain
  int n = 0;
  for (Building& b : town->buildings) {
    if (!FrontOnStretch(b, origin, run.t, length, true)) continue;
    b.facade.chain_shop_seed = chain;
    ++n;
  }
  return n;
}

LookAlikeStretch Stretch(LookAlikeStretch::Kind kind, const Run& r, double length, int n) {
  LookAlikeStretch s;
  s.kind = kind;
  s.route_from_m = r.from;
  s.route_to_m = r.from + length;
  s.buildings = n;
  return s;
}

// The runs left for look-alikes: long enough, and clear of the excursion's mouth.
std::vector<Run> FreeRuns(const Town& town) {
  std::vector<Run> out;
  for (const Run& r : StraightRuns(town.route)) {
    const double m = town.excursion.mouth_route_m;
    if (town.has_excursion && m > r.from - 40 && m < r.to + 40) continue;
    if (r.length() >= 40) out.push_back(r);
  }
  return out;
}

const char* KindName(LookAlikeStretch::Kind k) {
  switch (k) {
    case LookAlikeStretch::kTerrace:
      return "terrace";
    case LookAlikeStretch::kChainShops:
      return "chain_shops";
    default:
      return "twin";
  }
}

// The drive's path: the route from 0 to the turn, a quarter turn of the route's radius to the
// right, then the side street to 10 m short of its end; points every 0.5 m.
Polyline ExcursionPath(const Town& town, double mouth_m, const cv::Vec2d& t, const cv::Vec2d& dir) {
  const double r = town.options.turn_radius_m;
  std::vector<cv::Vec2d> pts;
  for (double s = 0; s < mouth_m - r; s += 0.5) pts.push_back(town.route.At(s));
  const cv::Vec2d j = town.route.At(mouth_m), c = j - r * t + r * dir;
  const int n = static_cast<int>(std::ceil(M_PI / 2 * r / 0.5));
  for (int i = 0; i <= n; ++i) {
    const double th = M_PI / 2 * i / n;
    pts.push_back(c - r * std::cos(th) * dir + r * std::sin(th) * t);
  }
  for (double u = r + 0.5; u <= kExcursionLengthM - 10; u += 0.5) pts.push_back(j + u * dir);
  return Polyline(pts);
}

// Removes what stands in the mouth of a side street at route arc length m (heading t, street
// direction dir): buildings in its corridor, and poles, trees and vehicles on that kerb.
void ClearMouth(Town* town, double m, const cv::Vec2d& t, const cv::Vec2d& dir) {
  const cv::Vec2d j = town->route.At(m);
  const double half = StreetSection::kFacadeM - 0.1, far = kExcursionLengthM + 20;
  const std::array<cv::Vec2d, 4> corridor{j + half * t, j - half * t, j - half * t + far * dir,
                                          j + half * t + far * dir};
  EraseIf(&town->buildings,
          [&](const Building& b) { return FootprintsOverlap(b.footprint, corridor); });
  auto in_mouth = [&](const cv::Vec2d& p) {
    return std::abs((p - j).dot(t)) < half + 3 && (p - j).dot(dir) > 0;
  };
  EraseIf(&town->poles, [&](const Pole& p) { return in_mouth(p.base); });
  EraseIf(&town->trees, [&](const Tree& p) { return in_mouth(p.base); });
  EraseIf(&town->vehicles, [&](const Vehicle& p) { return in_mouth(p.centre); });
}

}  // namespace

void AddExcursionStreet(Town* town) {
  const std::vector<Run> runs = StraightRuns(town->route);
  if (runs.empty() || runs.front().from > 0 || runs.front().to < 45) return;
  const Run& run = runs.front();
  // Mid-stretch: 25 m or more of kerb on each side of the mouth, at most 60 m along.
  const double m = std::clamp(run.to - 25 - StreetSection::kFacadeM, 35.0, 60.0);
  const cv::Vec2d dir = -Perp(run.t);  // to the right of travel
  ClearMouth(town, m, run.t, dir);
  const cv::Vec2d j = town->route.At(m);
  town->streets.push_back({Polyline({j, j + kExcursionLengthM * dir}), false});
  const int street = static_cast<int>(town->streets.size()) - 1;
  const size_t first_new = town->buildings.size();
  Rng rng(HashSeed(town->options.seed, 0x657863));
  CloseStreetEnd(town, j + kExcursionLengthM * dir, dir, rng);
  PlaceBuildingsAlong(town, street, rng, kExcursionBuildingsFromM);
  for (size_t i = first_new; i < town->buildings.size(); ++i) town->buildings[i].off_map = true;
  PlaceStreetPolesAndTrees(town, street, true, rng);
  town->has_excursion = true;
  town->excursion.street = street;
  town->excursion.mouth_route_m = m;
  town->excursion.path = ExcursionPath(*town, m, run.t, dir);
  town->excursion.path_mouth_m = m - town->options.turn_radius_m;
}

void AddLookAlikes(Town* town) {
  Rng rng(HashSeed(town->options.seed, 0x6c6f6f6b));
  std::vector<Run> runs = FreeRuns(*town);
  // Twins: the first two runs of one heading, 60 m or longer.
  for (size_t a = 0; a < runs.size(); ++a) {
    size_t b = a + 1;
    while (b < runs.size() && cv::norm(runs[b].t - runs[a].t) > 1e-9) ++b;
    if (b == runs.size() || std::min(runs[a].length(), runs[b].length()) < 60) continue;
    const double len = std::min({runs[a].length(), runs[b].length(), kTwinMaxM});
    LookAlikeStretch s =
        Stretch(LookAlikeStretch::kTwin, runs[b], len, PlaceTwins(town, runs[a], runs[b], len));
    s.mirrors_from_m = runs[a].from, s.mirrors_to_m = runs[a].from + len;
    town->look_alikes.push_back(s);
    runs.erase(runs.begin() + b);
    runs.erase(runs.begin() + a);
    break;
  }
  std::sort(runs.begin(), runs.end(),
            [](const Run& x, const Run& y) { return x.length() > y.length(); });
  if (!runs.empty() && runs[0].length() >= 60) {
    const double len = std::min(runs[0].length(), kTerraceMaxM);
    const int n = PlaceTerrace(town, runs[0], len, rng);
    town->look_alikes.push_back(Stretch(LookAlikeStretch::kTerrace, runs[0], len, n));
    runs.erase(runs.begin());
  }
  if (!runs.empty()) {
    const double len = std::min(runs[0].length(), kChainMaxM);
    const int n = PlaceChainShops(town, runs[0], len, rng);
    town->look_alikes.push_back(Stretch(LookAlikeStretch::kChainShops, runs[0], len, n));
  }
}

double DistanceToRoute(const Town& town, const cv::Vec2d& p) {
  const auto& pts = town.route.points();
  double best = 1e18;
  for (size_t i = 1; i < pts.size(); ++i) {
    const cv::Vec2d ab = pts[i] - pts[i - 1];
    const double len2 = ab.dot(ab);
    const double u = len2 > 0 ? std::clamp((p - pts[i - 1]).dot(ab) / len2, 0.0, 1.0) : 0.0;
    best = std::min(best, cv::norm(p - (pts[i - 1] + u * ab)));
  }
  return best;
}

std::vector<int> OffMapFrames(const Town& town, const std::vector<Frame>& frames) {
  std::vector<int> out;
  for (size_t k = 0; k < frames.size(); ++k) {
    const cv::Vec2d p(frames[k].position[0], frames[k].position[1]);
    if (DistanceToRoute(town, p) >= town.excursion.off_map_min_m) out.push_back(int(k));
  }
  return out;
}

nlohmann::json LookAlikesJson(const Town& town) {
  if (town.look_alikes.empty()) return nullptr;
  nlohmann::json j = nlohmann::json::array();
  for (const LookAlikeStretch& s : town.look_alikes) {
    nlohmann::json x = {{"kind", KindName(s.kind)},
                        {"route_from_m", s.route_from_m},
                        {"route_to_m", s.route_to_m},
                        {"sides", "both"},
                        {"buildings", s.buildings}};
    if (s.kind == LookAlikeStretch::kTwin)
      x["mirrors"] = {{"route_from_m", s.mirrors_from_m}, {"route_to_m", s.mirrors_to_m}};
    j.push_back(x);
  }
  return j;
}

nlohmann::json ExcursionJson(const Town& town, const std::string& drive_name,
                             const std::vector<Frame>& offmap_drive) {
  if (!town.has_excursion) return nullptr;
  const Excursion& e = town.excursion;
  const auto& c = town.streets[e.street].centre.points();
  return {{"street_enu_m", {{c.front()[0], c.front()[1]}, {c.back()[0], c.back()[1]}}},
          {"mouth_route_m", e.mouth_route_m},
          {"side", "right of travel"},
          {"off_map_min_distance_m", e.off_map_min_m},
          {"drive", drive_name},
          {"off_map_frames", OffMapFrames(town, offmap_drive)},
          {"note",
           "a frame is off the map when its true position is at least off_map_min_distance_m "
           "from the surveyed route's centreline; the survey never drives the street"}};
}

}  // namespace sightfix::demo
