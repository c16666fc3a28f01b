#include "server/engine/place_ambiguity.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <random>

#include "indexer/base/geo.h"
#include "indexer/base/rotation.h"
#include "indexer/map/tile_key.h"

namespace sightfix {
namespace {

// ENU of `tile` -> ENU of `frame`, through WGS84.
cv::Vec3d InFrame(const EnuFrame& frame, const LoadedTile& tile, const cv::Vec3d& p) {
  return &tile.enu == &frame ? p : frame.ToEnu(tile.enu.ToGeo(p));
}

// The reprojection distance (normalized units) of world point w from keypoint q through a
// camera at center; -1 when w lies behind it.
double ReprojectionDistance(const cv::Matx33d& camera_from_world, const cv::Vec3d& center,
                            const cv::Vec3d& w, const cv::Point2d& q) {
  const cv::Vec3d x = camera_from_world * (w - center);
  return x[2] > 0 ? std::hypot(x[0] / x[2] - q.x, x[1] / x[2] - q.y) : -1;
}

}  // namespace

bool AtDistinctPlace(const ReferenceImage& ref, const std::vector<Verified>& verified,
                     double distinct_m) {
  for (const Verified& v : verified) {
    const GeoPoint& p = v.c.tile->data.images[v.c.image].position;
    if (GeodesicBetween(p.lat_deg, p.lon_deg, ref.position.lat_deg, ref.position.lon_deg)
            .distance_m <= distinct_m)
      return false;
  }
  return true;
}

void WeighSupport(const std::vector<cv::Point2d>& query_normalized,
                  const cv::Matx33d& camera_from_world, const cv::Vec3d& center, double threshold,
                  const std::function<cv::Vec3d(const Verified&, int)>& to_frame,
                  std::vector<Verified>* verified) {
  for (Verified& v : *verified) {
    const ReferenceImage& ref = v.c.tile->data.images[v.c.image];
    v.tested = v.agreeing = 0;
    for (auto [qk, rk] : v.matches) {
      const int pid = ref.point_ids[rk];
      if (pid < 0) continue;
      const double d =
          ReprojectionDistance(camera_from_world, center, to_frame(v, pid), query_normalized[qk]);
      if (d < 0) continue;
      ++v.tested;
      v.agreeing += d <= threshold;
    }
  }
}

PlaceEvidence WeighPlaces(const std::vector<Verified>& verified, const cv::Vec3d& center,
                          double distinct_m) {
  PlaceEvidence e;
  for (const Verified& v : verified) {
    const double d = cv::norm(v.center - center);
    const bool agrees =
        v.tested >= kMinTestedMatches ? 2 * v.agreeing >= v.tested : d <= distinct_m;
    if (agrees)
      e.here = std::max(e.here, v.inliers);
    else if (d > distinct_m && v.inliers > e.rival)
      e.rival = v.inliers, e.rival_m = d;
  }
  return e;
}

std::string PlaceEvidence::Describe() const {
  return "a place " + std::to_string(static_cast<int>(rival_m)) + " m away verified with " +
         std::to_string(rival) + " inliers, this one with " + std::to_string(here);
}

std::string PlaceEvidence::DescribeAny() const {
  if (rival >= near_miss) return Describe();
  return "a place " + std::to_string(static_cast<int>(near_miss_m)) + " m away checked with " +
         std::to_string(near_miss) + " inliers (short of verification), this one with " +
         std::to_string(here);
}

void WeighNearMisses(const std::vector<ReferenceUse>& uses, double lat_deg, double lon_deg,
                     double distinct_m, int min_inliers, PlaceEvidence* evidence) {
  for (const ReferenceUse& u : uses) {
    if (!u.checked || u.verified || u.inliers < min_inliers || u.inliers <= evidence->near_miss)
      continue;
    const double d = GeodesicBetween(lat_deg, lon_deg, u.lat_deg, u.lon_deg).distance_m;
    if (d > distinct_m) evidence->near_miss = u.inliers, evidence->near_miss_m = d;
  }
}

bool IsLookAlikeToCheck(const ReferenceImage& t, const std::string& tile, int image, const Fix& fix,
                        const LocateRequest& r, const LocalizerOptions& o) {
  for (const ReferenceUse& u : fix.references)
    if (u.checked && u.tile == tile && u.image_id == image) return false;
  const double lat = t.position.lat_deg, lon = t.position.lon_deg;
  if (GeodesicBetween(fix.lat_deg, fix.lon_deg, lat, lon).distance_m <= o.distinct_place_m)
    return false;
  return !r.prior || GeodesicBetween(r.prior->lat_deg, r.prior->lon_deg, lat, lon).distance_m <=
                         r.prior->radius_m + o.viewing_range_m;
}

std::vector<Candidate> SelectLookAlikes(const std::vector<Candidate>& hits, const Fix& fix,
                                        const LocateRequest& r, const LocalizerOptions& o) {
  std::vector<Candidate> out;
  for (const Candidate& c : hits) {
    if (static_cast<int>(out.size()) >= o.look_alike_checks) break;
    if (IsLookAlikeToCheck(c.tile->data.images[c.image], c.tile->data.key.ToString(), c.image, fix,
                           r, o))
      out.push_back(c);
  }
  return out;
}

std::optional<std::string> LookAlikeReason(const std::vector<ReferenceUse>& uses, const Fix& fix,
                                           int here_inliers, const LocalizerOptions& o) {
  const ReferenceUse* twin = nullptr;
  double twin_m = 0;
  for (const ReferenceUse& u : uses) {
    if (!u.checked || u.inliers < o.min_near_miss_inliers || (twin && u.inliers <= twin->inliers))
      continue;
    const double d = GeodesicBetween(fix.lat_deg, fix.lon_deg, u.lat_deg, u.lon_deg).distance_m;
    if (d > o.distinct_place_m) twin = &u, twin_m = d;
  }
  if (!twin || twin->inliers < o.look_alike_ratio * here_inliers) return std::nullopt;
  return "a look-alike of its strongest reference, " + std::to_string(static_cast<int>(twin_m)) +
         " m away, matched with " + std::to_string(twin->inliers) + " inliers, this place with " +
         std::to_string(here_inliers);
}

std::vector<Candidate> SelectNearby(TileCache& cache, int zoom, const EnuFrame& frame,
                                    const AbsolutePose& pose, const Fix& fix,
                                    const LocalizerOptions& o) {
  const cv::Vec3d& center = pose.center;
  const cv::Vec3d forward = pose.camera_from_world.t() * cv::Vec3d(0, 0, 1);
  struct Near {
    Candidate c;
    cv::Vec3d at;  // in frame
    double m;
  };
  std::vector<Near> near;
  const double cos45 = std::sqrt(0.5), forward_h = std::hypot(forward[0], forward[1]);
  const GeoPoint g = frame.ToGeo(center);
  for (const TileKey& k : TilesTouchingCircle(g.lat_deg, g.lon_deg, o.distinct_place_m, zoom)) {
    const int ordinal = cache.OrdinalOf(k);
    if (ordinal < 0) continue;
    const Result<std::shared_ptr<const LoadedTile>> t = cache.Get(ordinal);
    if (!t.ok()) continue;  // a bad tile: the candidates it held are not checked
    const LoadedTile& tile = **t;
    const std::string key = tile.data.key.ToString();
    for (size_t j = 0; j < tile.data.images.size(); ++j) {
      const cv::Vec3d at = InFrame(frame, tile, tile.image_centers[j]);
      const double m = std::hypot(at[0] - center[0], at[1] - center[1]);
      if (m > o.distinct_place_m || m <= o.nearby_alias_m) continue;
      const cv::Vec3d look = EnuFromCamera(tile.data.images[j].attitude) * cv::Vec3d(0, 0, 1);
      if (look[0] * forward[0] + look[1] * forward[1] <
          cos45 * std::hypot(look[0], look[1]) * forward_h)
        continue;
      const bool checked =
          std::any_of(fix.references.begin(), fix.references.end(), [&](const ReferenceUse& u) {
            return u.checked && u.tile == key && u.image_id == static_cast<int>(j);
          });
      if (!checked) near.push_back({{*t, ordinal, static_cast<int>(j), 0}, at, m});
    }
  }
  std::sort(near.begin(), near.end(), [](const Near& a, const Near& b) { return a.m < b.m; });
  std::vector<Candidate> out;
  std::vector<cv::Vec3d> chosen;
  for (const Near& n : near) {
    if (static_cast<int>(out.size()) >= o.nearby_checks) break;
    if (std::any_of(chosen.begin(), chosen.end(),
                    [&](const cv::Vec3d& c) { return cv::norm(c - n.at) < o.nearby_spacing_m; }))
      continue;
    chosen.push_back(n.at);
    out.push_back(n.c);
  }
  return out;
}

void KeepDisagreeing(const std::vector<cv::Point2d>& query_normalized, const AbsolutePose& fix,
                     const EnuFrame& frame, double threshold, std::vector<Verified>* refs) {
  for (Verified& v : *refs) {
    const LoadedTile& t = *v.c.tile;
    const ReferenceImage& ref = t.data.images[v.c.image];
    v.matches.erase(std::remove_if(v.matches.begin(), v.matches.end(),
                                   [&](const std::pair<int, int>& m) {
                                     const int pid = ref.point_ids[m.second];
                                     if (pid < 0) return true;
                                     const double d = ReprojectionDistance(
                                         fix.camera_from_world, fix.center,
                                         InFrame(frame, t, t.data.points[pid].enu),
                                         query_normalized[m.first]);
                                     return d >= 0 && d <= threshold;
                                   }),
                    v.matches.end());
  }
}

Result<AbsolutePose> NearbyPose(const std::vector<PointCorrespondence>& pts,
                                AbsolutePoseOptions po) {
  po.min_inliers = kNearbyPoseInliers, po.groups.clear(), po.separate_solutions = false;
  po.camera.reset();  // a weaker pose than the fix's: intrinsics held
  return EstimateAbsolutePose(pts, po);
}

std::optional<std::string> NearbyAliasReason(const AbsolutePose* nearby, const AbsolutePose& fix,
                                             const LocalizerOptions& o) {
  if (!nearby) return std::nullopt;
  const cv::Vec3d d = nearby->center - fix.center;
  const double m = std::hypot(d[0], d[1]);
  if (m <= o.nearby_alias_m || nearby->inliers < o.nearby_alias_ratio * fix.inliers)
    return std::nullopt;
  char buf[200];
  std::snprintf(buf, sizeof buf,
                "survey images near the fix put the camera %.1f m away (%d PnP inliers, the fix "
                "%d): a repeated front?",
                m, nearby->inliers, fix.inliers);
  return buf;
}

namespace {

// Whether sliding the camera by `step` either way (rotation held) moves the image of `x` by
// more than `threshold` (normalized image units), or takes it behind the camera.
bool TellsShift(const AbsolutePose& pose, const cv::Vec3d& x, const cv::Vec3d& step,
                double threshold) {
  const cv::Vec3d a = pose.camera_from_world * (x - pose.center);
  for (const cv::Vec3d& s : {step, -step}) {
    const cv::Vec3d b = pose.camera_from_world * (x - pose.center - s);
    if (a[2] <= 0 || b[2] <= 0) continue;
    if (std::hypot(a[0] / a[2] - b[0] / b[2], a[1] / a[2] - b[1] / b[2]) <= threshold) return false;
  }
  return true;
}

}  // namespace

WallSpread SpreadOnWalls(const std::vector<PointCorrespondence>& pts, const AbsolutePose& pose,
                         double shift_m, double threshold) {
  std::vector<cv::Vec3d> in;
  for (size_t i = 0; i < pts.size(); ++i)
    if (pose.inlier_mask[i]) in.push_back(pts[i].world);
  const int n = static_cast<int>(in.size());
  const auto plan = [&](int i) { return cv::Vec2d(in[i][0], in[i][1]); };
  std::vector<std::pair<int, int>> pairs;
  constexpr int kPairs = 4000;
  if (n * (n - 1) / 2 <= kPairs) {
    for (int i = 0; i < n; ++i)
      for (int j = i + 1; j < n; ++j) pairs.emplace_back(i, j);
  } else {
    std::mt19937 rng(1);
    std::uniform_int_distribution<int> pick(0, n - 1);
    while (static_cast<int>(pairs.size()) < kPairs)
      if (const int i = pick(rng), j = pick(rng); i != j) pairs.emplace_back(i, j);
  }
  int best_on = 0, best_i = 0;
  WallSpread best{n, 0, 0};
  cv::Vec2d best_along(0, 0);
  const auto on_wall = [&](int k, int i, const cv::Vec2d& along) {
    return std::fabs((plan(k) - plan(i)).dot(cv::Vec2d(-along[1], along[0]))) <= kWallToleranceM;
  };
  for (const auto& [i, j] : pairs) {
    const cv::Vec2d d = plan(j) - plan(i);
    if (cv::norm(d) < 1) continue;
    const cv::Vec2d along = d / cv::norm(d);
    int on = 0;
    double lo = 0, hi = 0;
    for (int k = 0; k < n; ++k) {
      if (!on_wall(k, i, along)) continue;
      const double t = (plan(k) - plan(i)).dot(along);
      lo = on ? std::min(lo, t) : t, hi = on ? std::max(hi, t) : t, ++on;
    }
    if (on > best_on) best_on = on, best = {n - on, 0, hi - lo}, best_i = i, best_along = along;
  }
  if (best_on == 0) return best;
  const cv::Vec3d step(shift_m * best_along[0], shift_m * best_along[1], 0);
  for (int k = 0; k < n; ++k)
    if (!on_wall(k, best_i, best_along) && !TellsShift(pose, in[k], step, threshold))
      --best.off_wall, ++best.beyond_reach;
  return best;
}

std::optional<std::string> OneWallReason(const WallSpread& w, int inliers,
                                         const LocalizerOptions& o) {
  if (w.off_wall >= o.one_wall_off) return std::nullopt;
  char buf[200];
  std::snprintf(buf, sizeof buf, "%d of %d PnP inliers on one wall (%.1f m of it)",
                inliers - w.off_wall - w.beyond_reach, inliers, w.along_m);
  std::string why = buf;
  if (w.beyond_reach > 0)
    why += ", " + std::to_string(w.beyond_reach) + " off it too far to tell a shift along it";
  return why + ": one front, which a street of one design repeats";
}

int SightSupport(const std::vector<PointCorrespondence>& pts, const AbsolutePose& pose,
                 double shift_m, double threshold) {
  const cv::Matx33d& r = pose.camera_from_world;
  const cv::Vec2d ahead(r(2, 0), r(2, 1));  // the optical axis, level
  if (cv::norm(ahead) < 1e-9) return 0;     // looking straight up or down
  const cv::Vec3d step =
      shift_m * cv::Vec3d(ahead[0] / cv::norm(ahead), ahead[1] / cv::norm(ahead), 0);
  int support = 0;
  for (size_t i = 0; i < pts.size(); ++i)
    support += pose.inlier_mask[i] && TellsShift(pose, pts[i].world, step, threshold);
  return support;
}

std::optional<std::string> SpreadReason(const std::vector<PointCorrespondence>& pts,
                                        const AbsolutePose& pose, double threshold,
                                        const LocalizerOptions& o) {
  if (o.one_wall_off > 0)
    if (auto why =
            OneWallReason(SpreadOnWalls(pts, pose, o.spread_shift_m, threshold), pose.inliers, o))
      return why;
  if (o.min_sight_support <= 0) return std::nullopt;
  const int support = SightSupport(pts, pose, o.spread_shift_m, threshold);
  if (support >= o.min_sight_support) return std::nullopt;
  return std::to_string(support) + " of " + std::to_string(pose.inliers) +
         " PnP inliers place the camera along its line of sight (the rest lie too far ahead " +
         "to move when it does): a few wrong matches could agree on that place by chance";
}

void FlagPlaceAmbiguity(const std::optional<std::string>& why, Fix* fix) {
  if (why) fix->integrity.state = IntegrityState::kPlaceAmbiguity, fix->integrity.detail = *why;
}

std::optional<std::string> AmbiguityReason(const PlaceEvidence& evidence, double ratio) {
  if (!evidence.RivalReaches(ratio)) return std::nullopt;
  return "ambiguous: " + evidence.Describe();
}

}  // namespace sightfix
