#include "indexer/builder/structure.h"

#include <ceres/ceres.h>
#include <ceres/rotation.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <map>
#include <numeric>
#include <thread>

#include "indexer/base/parallel.h"
#include "indexer/base/rotation.h"

namespace sightfix {
namespace {

constexpr double kDegToRad = M_PI / 180.0;

double SecondsSince(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

struct ViewPair {
  int a, b;
};

std::vector<ViewPair> NeighbourPairs(const std::vector<SurveyView>& views,
                                     const StructureOptions& o) {
  std::vector<ViewPair> pairs;
  for (int a = 0; a < static_cast<int>(views.size()); ++a) {
    int taken = 0;
    // Look a little past max_neighbours frames: a skipped one (stopped vehicle) should not cut
    // the chain.
    for (int b = a + 1; b < static_cast<int>(views.size()) && b <= a + 2 * o.max_neighbours &&
                        taken < o.max_neighbours;
         ++b) {
      if (cv::norm(views[a].center_enu - views[b].center_enu) > o.max_neighbour_m) continue;
      const double dh = WrapDeg180(AttitudeFromEnuFromCamera(views[a].enu_from_camera).heading_deg -
                                   AttitudeFromEnuFromCamera(views[b].enu_from_camera).heading_deg);
      if (std::fabs(dh) > o.max_heading_diff_deg) continue;
      pairs.push_back({a, b});
      ++taken;
    }
  }
  return pairs;
}

// Sampson distance of x_a <-> x_b under E (normalized coordinates).
double Sampson(const cv::Matx33d& e, const cv::Point2d& pa, const cv::Point2d& pb) {
  const cv::Vec3d xa(pa.x, pa.y, 1), xb(pb.x, pb.y, 1);
  const cv::Vec3d ex = e * xa, etx = e.t() * xb;
  const double num = xb.dot(ex);
  const double den = ex[0] * ex[0] + ex[1] * ex[1] + etx[0] * etx[0] + etx[1] * etx[1];
  return den > 0 ? std::fabs(num) / std::sqrt(den) : 1e9;
}

cv::Matx33d Skew(const cv::Vec3d& t) { return {0, -t[2], t[1], t[2], 0, -t[0], -t[1], t[0], 0}; }

std::vector<cv::DMatch> EpipolarMatches(const SurveyView& a, const SurveyView& b,
                                        const StructureOptions& o, int* raw) {
  const std::vector<cv::DMatch> m = MatchFeatures(*a.features, *b.features, MatchOptions{});
  *raw = static_cast<int>(m.size());
  // x_b = R (x_a-world) + t with camera_from_enu rotations: R = Rb Ra^T, t = Rb (Ca - Cb).
  const cv::Matx33d ra = a.enu_from_camera.t(), rb = b.enu_from_camera.t();
  const cv::Matx33d e = Skew(rb * (a.center_enu - b.center_enu)) * (rb * ra.t());
  const double tol = o.epipolar_px / (0.5 * (a.focal_px + b.focal_px));
  std::vector<cv::DMatch> kept;
  for (const cv::DMatch& d : m)
    if (Sampson(e, a.features->normalized[d.queryIdx], b.features->normalized[d.trainIdx]) < tol)
      kept.push_back(d);
  return kept;
}

class UnionFind {
 public:
  explicit UnionFind(size_t n) : parent_(n) { std::iota(parent_.begin(), parent_.end(), 0); }
  size_t Find(size_t x) {
    while (parent_[x] != x) x = parent_[x] = parent_[parent_[x]];
    return x;
  }
  void Join(size_t a, size_t b) {
    a = Find(a), b = Find(b);
    if (a != b) parent_[std::max(a, b)] = std::min(a, b);  // deterministic roots
  }

 private:
  std::vector<size_t> parent_;
};

using Track = std::vector<std::pair<int, int>>;  // (view, keypoint)

std::vector<Track> BuildTracks(const std::vector<SurveyView>& views,
                               const std::vector<ViewPair>& pairs,
                               const std::vector<std::vector<cv::DMatch>>& matches) {
  std::vector<size_t> offset(views.size() + 1, 0);
  for (size_t v = 0; v < views.size(); ++v)
    offset[v + 1] = offset[v] + views[v].features->keypoints.size();
  UnionFind uf(offset.back());
  for (size_t p = 0; p < pairs.size(); ++p)
    for (const cv::DMatch& d : matches[p])
      uf.Join(offset[pairs[p].a] + d.queryIdx, offset[pairs[p].b] + d.trainIdx);
  std::map<size_t, Track> by_root;
  for (size_t p = 0; p < pairs.size(); ++p)
    for (const cv::DMatch& d : matches[p]) {
      by_root[uf.Find(offset[pairs[p].a] + d.queryIdx)];  // mark the root as matched
    }
  for (size_t v = 0; v < views.size(); ++v)
    for (size_t k = 0; k < views[v].features->keypoints.size(); ++k) {
      auto it = by_root.find(uf.Find(offset[v] + k));
      if (it != by_root.end()) it->second.push_back({static_cast<int>(v), static_cast<int>(k)});
    }
  std::vector<Track> tracks;
  for (auto& [root, track] : by_root) {
    bool repeated = false;  // two keypoints of one view: ambiguous
    for (size_t i = 1; i < track.size(); ++i) repeated |= track[i].first == track[i - 1].first;
    if (!repeated && track.size() >= 2) tracks.push_back(std::move(track));
  }
  return tracks;
}

// Reprojection error in pixels of X in view v at keypoint k.
double ReprojPx(const SurveyView& view, const cv::Matx33d& cam_from_enu, const cv::Vec3d& center,
                const cv::Vec3d& x, int k) {
  const cv::Vec3d p = cam_from_enu * (x - center);
  if (p[2] <= 1e-6) return 1e9;
  const cv::Point2d& n = view.features->normalized[k];
  return view.focal_px * std::hypot(p[0] / p[2] - n.x, p[1] / p[2] - n.y);
}

// Triangulates a track, dropping the worst observation while any exceeds max_reproj_px.
// Returns false when fewer than two observations or too shallow an angle remain.
bool TriangulateTrack(const std::vector<SurveyView>& views, const StructureOptions& o, Track* track,
                      cv::Vec3d* x) {
  while (track->size() >= 2) {
    std::vector<cv::Matx33d> rot;
    std::vector<cv::Vec3d> centers;
    std::vector<cv::Point2d> obs;
    for (auto [v, k] : *track) {
      rot.push_back(views[v].enu_from_camera.t());
      centers.push_back(views[v].center_enu);
      obs.push_back(views[v].features->normalized[k]);
    }
    *x = TriangulateLinear(rot, centers, obs);
    size_t worst = 0;
    double worst_px = 0;
    for (size_t i = 0; i < track->size(); ++i) {
      const double e =
          ReprojPx(views[(*track)[i].first], rot[i], centers[i], *x, (*track)[i].second);
      if (e > worst_px) worst_px = e, worst = i;
    }
    if (worst_px <= o.max_reproj_px) return MaxRayAngleDeg(centers, *x) >= o.min_triangulation_deg;
    track->erase(track->begin() + worst);
  }
  return false;
}

// Residual of one observation: pixels / pixel_sigma. The camera is its survey rotation R0
// (camera_from_enu) turned by a small angle-axis delta, and a free centre.
struct ReprojectionCost {
  ReprojectionCost(const cv::Matx33d& r0, const cv::Point2d& obs, double scale)
      : r0_(r0), obs_(obs), scale_(scale) {}
  template <typename T>
  bool operator()(const T* delta, const T* center, const T* point, T* residual) const {
    T d[3] = {point[0] - center[0], point[1] - center[1], point[2] - center[2]};
    T p0[3];
    for (int i = 0; i < 3; ++i)
      p0[i] = T(r0_(i, 0)) * d[0] + T(r0_(i, 1)) * d[1] + T(r0_(i, 2)) * d[2];
    T p[3];
    ceres::AngleAxisRotatePoint(delta, p0, p);
    residual[0] = (p[0] / p[2] - T(obs_.x)) * T(scale_);
    residual[1] = (p[1] / p[2] - T(obs_.y)) * T(scale_);
    return true;
  }
  cv::Matx33d r0_;
  cv::Point2d obs_;
  double scale_;  // focal / pixel sigma
};

struct PosePriorCost {
  PosePriorCost(const cv::Vec3d& c0, double sigma_m, double sigma_rad)
      : c0_(c0), sigma_m_(sigma_m), sigma_rad_(sigma_rad) {}
  template <typename T>
  bool operator()(const T* delta, const T* center, T* residual) const {
    for (int i = 0; i < 3; ++i) {
      residual[i] = delta[i] / T(sigma_rad_);
      residual[3 + i] = (center[i] - T(c0_[i])) / T(sigma_m_);
    }
    return true;
  }
  cv::Vec3d c0_;
  double sigma_m_, sigma_rad_;
};

cv::Matx33d AngleAxisMatrix(const double* delta) {
  double r[9];
  ceres::AngleAxisToRotationMatrix(delta, ceres::RowMajorAdapter3x3(r));
  return cv::Matx33d(r);
}

struct AdjustResult {
  double initial_rms_px = 0, final_rms_px = 0;
};

AdjustResult Adjust(const std::vector<SurveyView>& views, const StructureOptions& o,
                    std::vector<Track>& tracks, std::vector<cv::Vec3d>& points,
                    std::vector<cv::Matx33d>& cam_from_enu, std::vector<cv::Vec3d>& centers) {
  const size_t nv = views.size();
  std::vector<std::array<double, 3>> delta(nv, {0, 0, 0});
  std::vector<std::array<double, 3>> c(nv);
  for (size_t v = 0; v < nv; ++v) c[v] = {centers[v][0], centers[v][1], centers[v][2]};
  ceres::Problem problem;
  for (size_t t = 0; t < tracks.size(); ++t)
    for (auto [v, k] : tracks[t]) {
      auto* cost = new ceres::AutoDiffCostFunction<ReprojectionCost, 2, 3, 3, 3>(
          new ReprojectionCost(cam_from_enu[v], views[v].features->normalized[k],
                               views[v].focal_px / o.pixel_sigma_px));
      problem.AddResidualBlock(cost, new ceres::HuberLoss(2.0), delta[v].data(), c[v].data(),
                               points[t].val);
    }
  for (size_t v = 0; v < nv; ++v) {
    if (!problem.HasParameterBlock(delta[v].data())) continue;
    if (views[v].sigma_h_m <= 0) {
      problem.SetParameterBlockConstant(delta[v].data());
      problem.SetParameterBlockConstant(c[v].data());
      continue;
    }
    problem.AddResidualBlock(
        new ceres::AutoDiffCostFunction<PosePriorCost, 6, 3, 3>(new PosePriorCost(
            centers[v], views[v].sigma_h_m,
            (views[v].attitude_sigma_deg > 0 ? views[v].attitude_sigma_deg : o.attitude_sigma_deg) *
                kDegToRad)),
        nullptr, delta[v].data(), c[v].data());
  }
  ceres::Solver::Options so;
  so.linear_solver_type = ceres::SPARSE_SCHUR;
  so.sparse_linear_algebra_library_type = ceres::EIGEN_SPARSE;
  so.max_num_iterations = o.ba_max_iterations;
  // One thread: Ceres sums the Schur complement in thread order, so more threads change the
  // last bits of the result, and tiles must be byte-identical whatever --jobs is
  // (docs/design.md 4.6).
  so.num_threads = 1;
  so.logging_type = ceres::SILENT;
  ceres::Solver::Summary summary;
  ceres::Solve(so, &problem, &summary);
  size_t n_obs = 0;
  for (const Track& t : tracks) n_obs += t.size();
  AdjustResult r;
  // Ceres' cost is 1/2 sum rho(r^2) over all blocks; near the optimum most residuals are small,
  // so this reads as an RMS in pixels (priors included, a small share).
  r.initial_rms_px = o.pixel_sigma_px * std::sqrt(2 * summary.initial_cost / (2.0 * n_obs));
  r.final_rms_px = o.pixel_sigma_px * std::sqrt(2 * summary.final_cost / (2.0 * n_obs));
  for (size_t v = 0; v < nv; ++v) {
    cam_from_enu[v] = AngleAxisMatrix(delta[v].data()) * cam_from_enu[v];
    centers[v] = cv::Vec3d(c[v][0], c[v][1], c[v][2]);
  }
  return r;
}

cv::Matx33d PointCovariance(const std::vector<SurveyView>& views, const StructureOptions& o,
                            const Track& track, const cv::Vec3d& x,
                            const std::vector<cv::Matx33d>& cam_from_enu,
                            const std::vector<cv::Vec3d>& centers) {
  std::vector<cv::Matx33d> r;
  std::vector<cv::Vec3d> c;
  std::vector<double> f;
  for (auto [v, k] : track)
    r.push_back(cam_from_enu[v]), c.push_back(centers[v]), f.push_back(views[v].focal_px);
  return TriangulationCovariance(r, c, f, x, o.pixel_sigma_px);
}

// Index into the track of the observation whose descriptor is closest to all others.
int MedoidObservation(const std::vector<SurveyView>& views, const Track& track) {
  int best = 0;
  double best_sum = 1e18;
  for (size_t i = 0; i < track.size(); ++i) {
    const cv::Mat di = views[track[i].first].features->descriptors.row(track[i].second);
    double sum = 0;
    for (size_t j = 0; j < track.size(); ++j)
      sum += cv::norm(di, views[track[j].first].features->descriptors.row(track[j].second));
    if (sum < best_sum) best_sum = sum, best = static_cast<int>(i);
  }
  return best;
}

}  // namespace

bool StructureOptions::Validate(std::string* error) const {
  auto fail = [&](const char* m) {
    if (error) *error = m;
    return false;
  };
  if (max_neighbours < 1) return fail("max_neighbours must be >= 1");
  if (!(max_neighbour_m > 0)) return fail("max_neighbour_m must be > 0");
  if (!(epipolar_px > 0) || !(max_reproj_px > 0) || !(pixel_sigma_px > 0))
    return fail("epipolar_px, max_reproj_px and pixel_sigma_px must be > 0");
  if (!(min_triangulation_deg >= 0 && min_triangulation_deg < 90))
    return fail("min_triangulation_deg must be within [0, 90)");
  if (!(attitude_sigma_deg > 0)) return fail("attitude_sigma_deg must be > 0");
  if (ba_max_iterations < 0) return fail("ba_max_iterations must be >= 0");
  return true;
}

Result<StructureResult> BuildStructure(const std::vector<SurveyView>& views,
                                       const StructureOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  for (size_t v = 0; v < views.size(); ++v)
    if (!views[v].features || views[v].features->type != FeatureType::kRootSift)
      return Status::InvalidArgument("view " + std::to_string(v) + " has no RootSIFT features");
  StructureResult out;
  StructureSummary& s = out.summary;
  auto t0 = std::chrono::steady_clock::now();
  const std::vector<ViewPair> pairs = NeighbourPairs(views, o);
  std::vector<std::vector<cv::DMatch>> matches(pairs.size());
  std::vector<int> raw(pairs.size());
  ParallelFor(static_cast<int>(pairs.size()), ThreadCount(o.jobs), [&](int p) {
    matches[p] = EpipolarMatches(views[pairs[p].a], views[pairs[p].b], o, &raw[p]);
  });
  s.pairs = static_cast<int>(pairs.size());
  for (size_t p = 0; p < pairs.size(); ++p)
    s.matches += raw[p], s.epipolar_matches += static_cast<int>(matches[p].size());
  s.match_s = SecondsSince(t0);

  t0 = std::chrono::steady_clock::now();
  std::vector<Track> tracks = BuildTracks(views, pairs, matches);
  s.tracks = static_cast<int>(tracks.size());
  std::vector<cv::Vec3d> points;
  std::vector<Track> kept;
  for (Track& t : tracks) {
    cv::Vec3d x;
    if (TriangulateTrack(views, o, &t, &x)) points.push_back(x), kept.push_back(std::move(t));
  }
  s.triangulate_s = SecondsSince(t0);

  t0 = std::chrono::steady_clock::now();
  out.enu_from_camera.resize(views.size());
  std::vector<cv::Matx33d> cam_from_enu(views.size());
  out.center_enu.resize(views.size());
  for (size_t v = 0; v < views.size(); ++v)
    cam_from_enu[v] = views[v].enu_from_camera.t(), out.center_enu[v] = views[v].center_enu;
  if (!kept.empty() && o.ba_max_iterations > 0) {
    const AdjustResult ar = Adjust(views, o, kept, points, cam_from_enu, out.center_enu);
    s.ba_initial_rms_px = ar.initial_rms_px, s.ba_final_rms_px = ar.final_rms_px;
  }
  for (size_t v = 0; v < views.size(); ++v) out.enu_from_camera[v] = cam_from_enu[v].t();
  for (size_t t = 0; t < kept.size(); ++t) {
    Track& track = kept[t];
    // Observations the adjustment could not fit stay out of the point's evidence.
    track.erase(std::remove_if(track.begin(), track.end(),
                               [&](const std::pair<int, int>& ob) {
                                 return ReprojPx(views[ob.first], cam_from_enu[ob.first],
                                                 out.center_enu[ob.first], points[t],
                                                 ob.second) > o.max_reproj_px;
                               }),
                track.end());
    if (track.size() < 2) continue;
    StructurePoint p;
    p.enu = points[t];
    p.covariance = PointCovariance(views, o, track, points[t], cam_from_enu, out.center_enu);
    p.observations = track;
    p.representative = MedoidObservation(views, track);
    s.observations += static_cast<int>(track.size());
    out.points.push_back(std::move(p));
  }
  s.points = static_cast<int>(out.points.size());
  s.adjust_s = SecondsSince(t0);
  return out;
}

}  // namespace sightfix
