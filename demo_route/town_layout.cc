#include "demo_route/town_layout.h"

#include <algorithm>
#include <cmath>

#include "demo_route/look_alikes.h"
#include "demo_route/random.h"
#include "demo_route/street_placement.h"

namespace sightfix::demo {
namespace {

constexpr double kSampleM = 0.5;     // sampling of the route centreline
constexpr double kCurveStepM = 2.0;  // street centrelines along the S-curve (3 mm chord error)

cv::Vec2d Perp(const cv::Vec2d& t) { return {-t[1], t[0]}; }  // left normal

double SegmentDistance(const cv::Vec2d& p, const cv::Vec2d& a, const cv::Vec2d& b) {
  const cv::Vec2d ab = b - a;
  const double len2 = ab.dot(ab);
  const double t = len2 > 0 ? std::clamp((p - a).dot(ab) / len2, 0.0, 1.0) : 0.0;
  return cv::norm(p - (a + t * ab));
}

// One leg of the staircase route, from junction to junction, before the turns are rounded.
struct Leg {
  cv::Vec2d start, dir;
  double length = 0;
  bool s_curve = false;
  double curve_offset = 0;
  // Points from start to end, every kSampleM along curves.
  std::vector<cv::Vec2d> Points(double curve_length) const {
    if (!s_curve) return {start, start + length * dir};
    std::vector<cv::Vec2d> pts;
    const cv::Vec2d side = -Perp(dir);  // shift to the right of travel
    const double lead = (length - curve_length) / 2;
    pts.push_back(start);
    for (double t = 0; t <= curve_length + 1e-9; t += kCurveStepM) {
      const double shift = curve_offset * (1 - std::cos(M_PI * t / curve_length)) / 2;
      pts.push_back(start + (lead + t) * dir + shift * side);
    }
    pts.push_back(start + length * dir + curve_offset * side);
    return pts;
  }
  cv::Vec2d End(double curve_length) const { return Points(curve_length).back(); }
};

std::vector<cv::Vec2d> Resample(const std::vector<cv::Vec2d>& pts) {
  std::vector<cv::Vec2d> out{pts.front()};
  for (size_t i = 1; i < pts.size(); ++i) {
    const cv::Vec2d d = pts[i] - pts[i - 1];
    const int n = std::max(1, static_cast<int>(std::ceil(cv::norm(d) / kSampleM)));
    for (int k = 1; k <= n; ++k) out.push_back(pts[i - 1] + d * (double(k) / n));
  }
  return out;
}

// The route's centreline: legs joined by quarter-circle turns of radius r at each junction.
std::vector<cv::Vec2d> RoundedRoute(const std::vector<Leg>& legs, double r, double curve_len) {
  std::vector<cv::Vec2d> out;
  for (size_t k = 0; k < legs.size(); ++k) {
    const Polyline leg(Resample(legs[k].Points(curve_len)));
    const double from = k == 0 ? 0.0 : r, to = leg.length() - (k + 1 < legs.size() ? r : 0.0);
    for (double s = from; s < to; s += kSampleM) out.push_back(leg.At(s));
    out.push_back(leg.At(to));
    if (k + 1 == legs.size()) break;
    const cv::Vec2d d1 = legs[k].dir, d2 = legs[k + 1].dir, j = legs[k + 1].start;
    const cv::Vec2d c = j - r * d1 + r * d2;
    const int n = static_cast<int>(std::ceil(M_PI / 2 * r / kSampleM));
    for (int i = 1; i < n; ++i) {
      const double th = M_PI / 2 * i / n;
      out.push_back(c - r * std::cos(th) * d2 + r * std::sin(th) * d1);
    }
  }
  return out;
}

std::vector<Leg> PlanLegs(const TownOptions& o, Rng& rng) {
  std::vector<Leg> legs;
  cv::Vec2d at(0, 0);
  double total = 0;
  const cv::Vec2d east(1, 0), north(0, 1);
  while (total < o.route_length_m + 80 || legs.size() < 2) {
    Leg leg;
    leg.start = at;
    leg.dir = legs.size() % 2 == 0 ? east : north;
    leg.s_curve = legs.size() == 1;
    leg.curve_offset = leg.s_curve ? o.curve_offset_m : 0;
    leg.length = leg.s_curve ? o.curve_length_m + 40 : rng.Uniform(85, 135);
    legs.push_back(leg);
    at = leg.End(o.curve_length_m);
    total += leg.length;
  }
  return legs;
}

bool PointInConvex(const std::array<cv::Vec2d, 4>& q, const cv::Vec2d& p) {
  for (int i = 0; i < 4; ++i) {
    const cv::Vec2d e = q[(i + 1) % 4] - q[i], w = p - q[i];
    if (e[0] * w[1] - e[1] * w[0] < 0) return false;
  }
  return true;
}

}  // namespace

bool FootprintsOverlap(const std::array<cv::Vec2d, 4>& a, const std::array<cv::Vec2d, 4>& b) {
  for (const auto* poly : {&a, &b}) {
    for (int i = 0; i < 4; ++i) {
      const cv::Vec2d axis = Perp((*poly)[(i + 1) % 4] - (*poly)[i]);
      const double n = cv::norm(axis);
      if (n < 1e-9) continue;
      double amin = 1e18, amax = -1e18, bmin = 1e18, bmax = -1e18;
      for (const cv::Vec2d& p : a)
        amin = std::min(amin, p.dot(axis) / n), amax = std::max(amax, p.dot(axis) / n);
      for (const cv::Vec2d& p : b)
        bmin = std::min(bmin, p.dot(axis) / n), bmax = std::max(bmax, p.dot(axis) / n);
      if (amax <= bmin + 0.05 || bmax <= amin + 0.05) return false;
    }
  }
  return true;
}

bool FootprintFits(const Town& town, const std::array<cv::Vec2d, 4>& fp) {
  for (int i = 0; i < 4; ++i) {
    const cv::Vec2d a = fp[i], b = fp[(i + 1) % 4];
    const int n = static_cast<int>(std::ceil(cv::norm(b - a) / 0.7));
    for (int k = 0; k <= n; ++k) {
      if (DistanceToStreets(town, a + (b - a) * (double(k) / n)) < StreetSection::kFacadeM - 0.05)
        return false;
    }
  }
  for (const Building& other : town.buildings)
    if (FootprintsOverlap(fp, other.footprint)) return false;
  return true;
}

bool TryAddBuilding(Town* town, const std::array<cv::Vec2d, 4>& fp, int front_edge, Rng& rng) {
  if (!FootprintFits(*town, fp)) return false;
  Building b;
  b.footprint = fp;
  b.front_edge = front_edge;
  b.floors = rng.Int(4, 7);
  const double storey_m = rng.Uniform(3.0, 3.5), roof_m = rng.Uniform(0.3, 1.2);
  b.height_m = b.floors * storey_m + roof_m;
  b.seed = rng.Next();
  town->buildings.push_back(b);
  return true;
}

std::array<cv::Vec2d, 4> FrontFootprint(const cv::Vec2d& a, const cv::Vec2d& b, double depth,
                                        int* front) {
  const cv::Vec2d along = (b - a) / cv::norm(b - a);
  const cv::Vec2d back = Perp(along) * depth;  // away from the street (left of a->b)
  // Counter-clockwise: the front edge a -> b has the street (the exterior) on its right.
  *front = 0;
  return {a, b, b + back, a + back};
}

void PlaceBuildingsAlong(Town* town, int street, Rng& rng, double from_m) {
  const Polyline c = town->streets[street].centre;
  for (int side : {+1, -1}) {
    double s = from_m;
    while (s < c.length() - 6) {
      const double w = std::min(rng.Uniform(8, 22), c.length() - s);
      const double setback = rng.Uniform(0.0, 1.2), depth = rng.Uniform(10, 16);
      cv::Vec2d t0, t1;
      const cv::Vec2d p0 = c.At(s, &t0), p1 = c.At(s + w, &t1);
      // On curves a straight front cuts the chord's sagitta into the sidewalk: step it back.
      bool placed = false;
      for (double extra = 0; extra <= 1.6 && !placed && w >= 6; extra += 0.8) {
        const double off = StreetSection::kFacadeM + setback + extra;
        // Right side (side +1) is on the right of travel: normal -Perp(t).
        const cv::Vec2d q0 = p0 - side * off * Perp(t0), q1 = p1 - side * off * Perp(t1);
        int front = 0;
        // Seen from the street, the right-side front runs q1 -> q0 left to right.
        const auto fp = side > 0 ? FrontFootprint(q1, q0, depth, &front)
                                 : FrontFootprint(q0, q1, depth, &front);
        placed = TryAddBuilding(town, fp, front, rng);
      }
      if (placed) {
        s += w + (rng.Chance(0.15) ? rng.Uniform(3, 6) : rng.Uniform(0, 1.5));
      } else {
        s += 1.5;
      }
    }
  }
}

// A facade across the far end of a street, so a view down it ends in buildings.
void CloseStreetEnd(Town* town, const cv::Vec2d& end, const cv::Vec2d& dir, Rng& rng) {
  const cv::Vec2d across = -Perp(dir);  // viewer's right looking along dir
  const cv::Vec2d a = end + 1.0 * dir - 14 * across, b = end + 1.0 * dir + 14 * across;
  int front = 0;
  const auto fp = FrontFootprint(a, b, 12, &front);
  // The street itself ends here, so test overlap only (the front stands on the road end).
  for (const Building& o : town->buildings)
    if (FootprintsOverlap(fp, o.footprint)) return;
  Building bl;
  bl.footprint = fp;
  bl.front_edge = front;
  bl.floors = rng.Int(3, 5);
  bl.height_m = bl.floors * 3.3 + 0.8;
  bl.seed = rng.Next();
  town->buildings.push_back(bl);
}

namespace {

bool InsideBuilding(const Town& town, const cv::Vec2d& p) {
  for (const Building& b : town.buildings)
    if (PointInConvex(b.footprint, p)) return true;
  return false;
}

bool ClearOfCarriageways(const Town& town, const std::vector<cv::Vec2d>& pts, double min_m) {
  for (const cv::Vec2d& p : pts)
    if (DistanceToStreets(town, p) < min_m) return false;
  return true;
}

// One side of a street: +1 the right of travel along the centreline, -1 the left.
struct StreetSide {
  const Polyline& centre;
  int side;
  // The point off metres from the centreline at arc length s, on this side; *t gets the
  // street's direction there.
  cv::Vec2d At(double s, double off, cv::Vec2d* t) const {
    const cv::Vec2d p = centre.At(s, t);
    return cv::Vec2d(p - side * off * Perp(*t));
  }
};

// Cars and vans parked in the strip along one side, a slot every 5.4-7.6 m, about half taken;
// a vehicle that would reach into the carriageway is left out.
void ParkVehicles(Town* town, const StreetSide& street, Rng& rng, int* vehicle_id) {
  for (double s = rng.Uniform(2, 6); s < street.centre.length() - 3; s += rng.Uniform(5.4, 7.6)) {
    if (!rng.Chance(0.55)) continue;
    cv::Vec2d t;
    Vehicle v;
    v.centre = street.At(s, 7.0, &t);
    const bool van = rng.Chance(0.15);
    v.length_m = van ? rng.Uniform(5.0, 5.6) : rng.Uniform(3.9, 4.8);
    v.width_m = van ? 2.0 : rng.Uniform(1.72, 1.9);
    v.height_m = van ? rng.Uniform(2.0, 2.4) : rng.Uniform(1.4, 1.65);
    v.yaw_rad = std::atan2(t[1], t[0]) + (street.side < 0 ? M_PI : 0.0);
    const cv::Vec2d ax = t * (v.length_m / 2), ay = Perp(t) * (v.width_m / 2);
    if (!ClearOfCarriageways(
            *town, {v.centre + ax + ay, v.centre + ax - ay, v.centre - ax + ay, v.centre - ax - ay},
            StreetSection::kCarriagewayM + 0.05))
      continue;
    v.id = (*vehicle_id)++;
    v.seed = rng.Next();
    town->vehicles.push_back(v);
  }
}

// A row of poles on one side: the first at U(first), then every U(step) metres; metres.
struct PoleRow {
  Pole::Kind kind;
  double first_lo, first_hi, step_lo, step_hi, offset_m, height_lo, height_hi;
};

// Lamps: the arm reaches over the road. Signs: they face the traffic on their side. Poles that
// would stand too near a street (at a junction) are left out.
void PlacePoleRow(Town* town, const StreetSide& street, const PoleRow& row, Rng& rng) {
  for (double s = rng.Uniform(row.first_lo, row.first_hi); s < street.centre.length() - 2;
       s += rng.Uniform(row.step_lo, row.step_hi)) {
    cv::Vec2d t;
    Pole p;
    p.kind = row.kind;
    p.base = street.At(s, row.offset_m, &t);
    p.height_m = rng.Uniform(row.height_lo, row.height_hi);
    const cv::Vec2d f =
        row.kind == Pole::kLamp ? cv::Vec2d(street.side * Perp(t)) : cv::Vec2d(-street.side * t);
    p.facing_rad = std::atan2(f[1], f[0]);
    p.seed = rng.Next();
    if (DistanceToStreets(*town, p.base) > 8.3) town->poles.push_back(p);
  }
}

// Street trees along one side, every 11-17 m, clear of poles, streets and buildings.
void PlantTrees(Town* town, const StreetSide& street, Rng& rng) {
  for (double s = rng.Uniform(4, 10); s < street.centre.length() - 2; s += rng.Uniform(11, 17)) {
    cv::Vec2d t;
    Tree tr;
    tr.base = street.At(s, 9.4, &t);
    tr.trunk_height_m = rng.Uniform(2.2, 3.2);
    tr.canopy_radius_m = rng.Uniform(1.6, 2.4);
    tr.seed = rng.Next();
    bool near_pole = false;
    for (const Pole& p : town->poles) near_pole |= cv::norm(p.base - tr.base) < 1.8;
    if (!near_pole && DistanceToStreets(*town, tr.base) > 9.0 && !InsideBuilding(*town, tr.base))
      town->trees.push_back(tr);
  }
}

// Per street, on each side in turn: parked vehicles, lamps, signs and (on avenues, about two
// streets in three) trees.
void PlaceStreetFurniture(Town* town, Rng& rng) {
  int vehicle_id = 0;
  for (size_t si = 0; si < town->streets.size(); ++si) {
    const Polyline& c = town->streets[si].centre;
    const bool avenue = rng.Chance(0.65);  // trees on this street
    for (int side : {+1, -1}) {
      const StreetSide street{c, side};
      ParkVehicles(town, street, rng, &vehicle_id);
      PlacePoleRow(town, street, {Pole::kLamp, 3, 15, 24, 32, 8.6, 5.5, 7.0}, rng);
      PlacePoleRow(town, street, {Pole::kSign, 10, 40, 30, 55, 8.9, 2.4, 3.0}, rng);
      if (avenue) PlantTrees(town, street, rng);
    }
  }
}

}  // namespace

void PlaceStreetPolesAndTrees(Town* town, int street_index, bool trees, Rng& rng) {
  const Polyline c = town->streets[street_index].centre;
  for (int side : {+1, -1}) {
    const StreetSide street{c, side};
    PlacePoleRow(town, street, {Pole::kLamp, 3, 15, 24, 32, 8.6, 5.5, 7.0}, rng);
    PlacePoleRow(town, street, {Pole::kSign, 10, 40, 30, 55, 8.9, 2.4, 3.0}, rng);
    if (trees) PlantTrees(town, street, rng);
  }
}

Polyline::Polyline(std::vector<cv::Vec2d> points) : points_(std::move(points)) {
  arc_.resize(points_.size());
  for (size_t i = 0; i < points_.size(); ++i)
    arc_[i] = i == 0 ? 0.0 : arc_[i - 1] + cv::norm(points_[i] - points_[i - 1]);
}

cv::Vec2d Polyline::At(double s, cv::Vec2d* tangent) const {
  s = std::clamp(s, 0.0, length());
  size_t i = std::upper_bound(arc_.begin(), arc_.end(), s) - arc_.begin();
  i = std::clamp<size_t>(i, 1, points_.size() - 1);
  const double seg = arc_[i] - arc_[i - 1];
  const double t = seg > 0 ? (s - arc_[i - 1]) / seg : 0.0;
  const cv::Vec2d d = points_[i] - points_[i - 1];
  if (tangent) *tangent = seg > 0 ? d / seg : cv::Vec2d(1, 0);
  return points_[i - 1] + t * d;
}

double DistanceToStreets(const Town& town, const cv::Vec2d& p, int* street) {
  double best = 1e18;
  for (size_t si = 0; si < town.streets.size(); ++si) {
    const auto& pts = town.streets[si].centre.points();
    for (size_t i = 1; i < pts.size(); ++i) {
      const double d = SegmentDistance(p, pts[i - 1], pts[i]);
      if (d < best) {
        best = d;
        if (street) *street = static_cast<int>(si);
      }
    }
  }
  return best;
}

Town BuildTown(const TownOptions& options) {
  Town town;
  town.options = options;
  Rng rng(HashSeed(options.seed, 0x70776e));
  const std::vector<Leg> legs = PlanLegs(options, rng);
  const Polyline full(RoundedRoute(legs, options.turn_radius_m, options.curve_length_m));
  std::vector<cv::Vec2d> route_pts;
  for (double s = 0; s < options.route_length_m; s += kSampleM) route_pts.push_back(full.At(s));
  route_pts.push_back(full.At(options.route_length_m));
  town.route = Polyline(route_pts);

  // Streets: each leg, run 8 m into its junctions; the first leg also 40 m before the route.
  for (size_t k = 0; k < legs.size(); ++k) {
    std::vector<cv::Vec2d> pts = legs[k].Points(options.curve_length_m);
    pts.front() -= legs[k].dir * (k == 0 ? 40.0 : 8.0);
    pts.back() += legs[k].dir * 8.0;
    town.streets.push_back({Polyline(pts), true});
  }
  // Stubs: the arms of each junction that the route does not take.
  std::vector<std::pair<cv::Vec2d, cv::Vec2d>> ends;  // (end point, direction) of dead ends
  for (size_t k = 1; k < legs.size(); ++k) {
    const cv::Vec2d j = legs[k].start;
    for (const cv::Vec2d& arm : {legs[k - 1].dir, cv::Vec2d(-legs[k].dir)}) {
      town.streets.push_back({Polyline({j, j + options.stub_length_m * arm}), false});
      ends.emplace_back(j + options.stub_length_m * arm, arm);
    }
  }
  const Polyline& first = town.streets.front().centre;
  ends.emplace_back(first.points().front(), -legs[0].dir);

  for (const auto& [end, dir] : ends) CloseStreetEnd(&town, end, dir, rng);
  for (size_t si = 0; si < town.streets.size(); ++si)
    PlaceBuildingsAlong(&town, static_cast<int>(si), rng);
  PlaceStreetFurniture(&town, rng);
  if (options.excursion) AddExcursionStreet(&town);
  if (options.look_alikes) AddLookAlikes(&town);
  return town;
}

std::vector<Vehicle> VehiclesForVariant(const Town& town, int variant) {
  if (variant == 0) return town.vehicles;
  std::vector<Vehicle> out;
  for (const Vehicle& v : town.vehicles) {
    Rng r(HashSeed(v.seed, static_cast<uint64_t>(variant)));
    const double roll = r.Unit();
    if (roll < 0.15) continue;  // left between drives
    Vehicle moved = v;
    if (roll < 0.40) {  // re-parked a little along the kerb
      const double shift = r.Uniform(-2.5, 2.5);
      moved.centre += shift * cv::Vec2d(std::cos(v.yaw_rad), std::sin(v.yaw_rad));
    }
    out.push_back(moved);
  }
  return out;
}

}  // namespace sightfix::demo
