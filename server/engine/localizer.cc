#include "server/engine/localizer.h"

#include <faiss/Index.h>
#include <faiss/impl/FaissException.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <opencv2/imgcodecs.hpp>
#include <set>

#include "indexer/base/geo.h"
#include "indexer/base/parallel.h"
#include "indexer/base/threads.h"
#include "indexer/map/tile_key.h"
#include "indexer/vision/global_descriptor.h"
#include "server/engine/confidence.h"
#include "server/engine/fix_integrity.h"
#include "server/engine/map_uncertainty.h"
#include "server/engine/place_ambiguity.h"
#include "server/engine/reference_pair.h"
#include "server/engine/relative_pose.h"
#include "server/engine/verified_reference.h"

namespace sightfix {
namespace {

using Clock = std::chrono::steady_clock;
double MsSince(Clock::time_point t0) {
  return std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
}

// sqrt(5.991): chi-square 2 dof, 95 % (NIST/SEMATECH e-Handbook 1.3.6.7.4); a round Gaussian
// with sigma = r / this has radius95 r.
constexpr double kRound95 = 2.447746830680816;

// ENU of tile `from` -> ENU of `frame`, through WGS84.
cv::Vec3d ToFrame(const EnuFrame& frame, const LoadedTile& from, const cv::Vec3d& p) {
  if (&frame == &from.enu) return p;
  return frame.ToEnu(from.enu.ToGeo(p));
}

double HeadingDiffDeg(double a, double b) { return std::fabs(WrapDeg180(a - b)); }

}  // namespace

struct Localizer::Impl {
  LocalizerOptions o;
  Catalog catalog;
  std::unique_ptr<GlobalDescriptor> model;
  std::unique_ptr<faiss::Index> global;
  std::unique_ptr<TileCache> cache;

  Result<LocalFeatures> Features(const LocateRequest& r, StageTimings* t) const;
  std::vector<Candidate> Candidates(const cv::Mat& query, const LocateRequest& r,
                                    std::string* note) const;
  std::vector<Candidate> FromPrior(const cv::Mat& query, const PriorCircle& p,
                                   std::string* note) const;
  // The map-wide index's first k (default top_k) for the query descriptor.
  std::vector<Candidate> FromGlobal(const cv::Mat& query, std::string* note, int k = 0) const;
  // A candidate with fewer matches than min_matches can reach no use: its essential matrix is
  // not estimated (inliers 0).
  std::vector<Verified> Verify(const LocalFeatures& q, const std::vector<Candidate>& cands,
                               const CameraModel& cam, Clock::time_point start,
                               std::vector<ReferenceUse>* uses, int min_matches = 0) const;
  std::vector<PointCorrespondence> FromPoints(const LocalFeatures& q,
                                              const std::vector<Verified>& v, const EnuFrame& f,
                                              std::vector<ReferenceUse>* uses,
                                              std::vector<int>* groups) const;
  void Finish(const AbsolutePose& pose, const std::vector<PointCorrespondence>& pts,
              const std::vector<Verified>& v, const EnuFrame& frame, const IntegrityRequest& ir,
              Fix* fix) const;
  void Coarse(const std::vector<Verified>& v, const std::string& reason, Fix* fix) const;
  // A usable fix's look-alike check (LocalizerOptions::look_alike_checks).
  void CheckLookAlikes(const LocalFeatures& q, const LocateRequest& r,
                       const std::vector<Verified>& verified, Fix* fix) const;
  // A usable fix's nearby check (LocalizerOptions::nearby_checks); po: the fix's pose options.
  void CheckNearby(const LocalFeatures& q, const LocateRequest& r, const EnuFrame& frame,
                   AbsolutePoseOptions po, const AbsolutePose& pose, Fix* fix) const;
  // REQUIRES: !verified->empty(). Sets each reference's centre and rotation in the frame of
  // the first, then the fix.
  void Pose(const LocalFeatures& q, const LocateRequest& r, const std::string& note,
            std::vector<Verified>* verified, Fix* fix) const;
};

Localizer::Localizer(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Localizer::~Localizer() = default;
const Catalog& Localizer::catalog() const { return impl_->catalog; }
const LocalizerOptions& Localizer::options() const { return impl_->o; }
int Localizer::tiles_cached() const { return impl_->cache->cached_tiles(); }
Status Localizer::CheckTile(int ordinal) const { return impl_->cache->Check(ordinal); }
std::vector<TileProblem> Localizer::TileProblems() const { return impl_->cache->Problems(); }
int Localizer::tiles_checked() const { return impl_->cache->checked_tiles(); }

std::optional<CameraModel> Localizer::TileCamera(const std::string& tile, int index) const {
  for (size_t i = 0; i < impl_->catalog.tiles.size(); ++i) {
    if (impl_->catalog.tiles[i].key.ToString() != tile) continue;
    auto loaded = impl_->cache->Get(static_cast<int>(i));
    if (!loaded.ok() || index < 0 || index >= static_cast<int>((*loaded)->data.cameras.size()))
      return std::nullopt;
    return (*loaded)->data.cameras[index];
  }
  return std::nullopt;
}

Result<std::unique_ptr<Localizer>> Localizer::Open(const std::string& map_dir,
                                                   const LocalizerOptions& options) {
  std::string error;
  if (!options.Validate(&error)) return Status::InvalidArgument(error);
  PinLibraryThreads();
  // Callers run Locate from several threads at once (the service's workers, replay jobs).
  MakeOpenCvExpressionSingletons();
  auto impl = std::make_unique<Impl>();
  impl->o = options;
  Result<Catalog> catalog = ReadCatalog(map_dir + "/catalog.sqlite");
  if (!catalog.ok()) return catalog.status();
  impl->catalog = std::move(catalog).value();
  if (const auto& fit = impl->catalog.integrity_fit;
      fit && fit->overbound_scale >= impl->o.protection.overbound_scale) {
    impl->o.protection.overbound_scale = fit->overbound_scale;
    impl->o.protection.overbound_drive = fit->drive;
  }
  Result<GlobalDescriptor> model = GlobalDescriptor::Deserialize(impl->catalog.model_blob);
  if (!model.ok()) return model.status();
  impl->model = std::make_unique<GlobalDescriptor>(std::move(model).value());
  try {
    faiss::VectorIOReader reader;
    reader.data = impl->catalog.global_index;
    impl->global.reset(faiss::read_index(&reader));
  } catch (const faiss::FaissException& e) {
    return Status::Corrupt(map_dir + ": global index unreadable: " + e.what());
  }
  impl->cache = std::make_unique<TileCache>(map_dir, impl->catalog.tiles, options.tile_cache_bytes,
                                            options.env);
  return std::unique_ptr<Localizer>(new Localizer(std::move(impl)));
}

Result<LocalFeatures> Localizer::Impl::Features(const LocateRequest& r, StageTimings* t) const {
  if (r.features) return *r.features;
  auto t0 = Clock::now();
  cv::Mat img = r.image;
  if (img.empty()) {
    try {
      img = cv::imdecode(r.image_bytes, cv::IMREAD_GRAYSCALE);
    } catch (const cv::Exception&) {
      img.release();
    }
    if (img.empty()) return Status::InvalidArgument("image bytes are not a decodable JPEG or PNG");
  }
  if (img.depth() != CV_8U) return Status::InvalidArgument("image must be 8-bit");
  t->decode_ms = MsSince(t0);
  t0 = Clock::now();
  Result<LocalFeatures> f = ExtractFeatures(img, &r.camera, o.features);
  t->features_ms = MsSince(t0);
  return f;
}

std::vector<Candidate> Localizer::Impl::Candidates(const cv::Mat& q, const LocateRequest& r,
                                                   std::string* note) const {
  std::vector<Candidate> c = r.prior ? FromPrior(q, *r.prior, note) : FromGlobal(q, note);
  if (r.heading_deg) {  // a reference facing away from the query shows another scene
    c.erase(std::remove_if(c.begin(), c.end(),
                           [&](const Candidate& k) {
                             return HeadingDiffDeg(
                                        k.tile->data.images[k.image].attitude.heading_deg,
                                        *r.heading_deg) > 90;
                           }),
            c.end());
  }
  std::stable_sort(c.begin(), c.end(),
                   [](const Candidate& a, const Candidate& b) { return a.distance < b.distance; });
  if (static_cast<int>(c.size()) > o.top_k) c.resize(o.top_k);
  return c;
}

std::vector<Candidate> Localizer::Impl::FromPrior(const cv::Mat& q, const PriorCircle& p,
                                                  std::string* note) const {
  const double reach = p.radius_m + o.viewing_range_m;
  std::vector<Candidate> out;
  for (const TileKey& key : TilesTouchingCircle(p.lat_deg, p.lon_deg, reach, catalog.zoom)) {
    const int ordinal = cache->OrdinalOf(key);
    if (ordinal < 0) continue;
    auto tile = cache->Get(ordinal);
    if (!tile.ok()) {  // a bad tile is skipped and named; the rest still serves
      *note += "tile " + key.ToString() + " skipped: " + tile.status().message() + "; ";
      continue;
    }
    const LoadedTile& t = **tile;
    const int k = static_cast<int>(std::min<faiss::Index::idx_t>(t.index->ntotal, 4 * o.top_k));
    std::vector<float> dist(k);
    std::vector<faiss::Index::idx_t> ids(k);
    t.index->search(1, q.ptr<float>(), k, dist.data(), ids.data());
    const cv::Vec3d centre = t.enu.ToEnu({p.lat_deg, p.lon_deg, t.data.origin.height_m});
    for (int i = 0; i < k; ++i) {
      if (ids[i] < 0) continue;
      const cv::Vec3d d = t.image_centers[ids[i]] - centre;
      if (std::hypot(d[0], d[1]) > reach) continue;
      out.push_back({*tile, ordinal, static_cast<int>(ids[i]), dist[i]});
    }
  }
  return out;
}

std::vector<Candidate> Localizer::Impl::FromGlobal(const cv::Mat& q, std::string* note,
                                                   int k_wanted) const {
  const int k = static_cast<int>(
      std::min<faiss::Index::idx_t>(global->ntotal, k_wanted > 0 ? k_wanted : o.top_k));
  std::vector<float> dist(k);
  std::vector<faiss::Index::idx_t> ids(k);
  if (k > 0) global->search(1, q.ptr<float>(), k, dist.data(), ids.data());
  std::vector<Candidate> out;
  for (int i = 0; i < k; ++i) {
    if (ids[i] < 0) continue;
    const int ordinal = TileOrdinalOf(ids[i]);
    auto tile = cache->Get(ordinal);
    if (!tile.ok()) {
      *note += "tile skipped: " + tile.status().message() + "; ";
      continue;
    }
    out.push_back({*tile, ordinal, ImageIdOf(ids[i]), dist[i]});
  }
  return out;
}

std::vector<Verified> Localizer::Impl::Verify(const LocalFeatures& q,
                                              const std::vector<Candidate>& cands,
                                              const CameraModel& cam, Clock::time_point start,
                                              std::vector<ReferenceUse>* uses,
                                              int min_matches) const {
  std::vector<Verified> out;
  RelativePoseOptions ro;
  ro.focal_px = 0.5 * (cam.fx + cam.fy);
  // Past max_verified: a candidate at a place distinct from every verified one is checked (a
  // rival place?); once two distinct places have verified, every candidate is, so that both
  // places' evidence is weighed alike (place_ambiguity.h).
  bool two_places = false;
  for (const Candidate& c : cands) {
    const ReferenceImage& ref = c.tile->data.images[c.image];
    ReferenceUse use{c.tile->data.key.ToString(), c.image,   ref.name, ref.position.lat_deg,
                     ref.position.lon_deg,        c.distance};
    const bool elsewhere = !out.empty() && AtDistinctPlace(ref, out, o.distinct_place_m);
    const bool full = static_cast<int>(out.size()) >= o.max_verified;
    if ((full && !two_places && !elsewhere) ||
        (o.time_budget_ms > 0 && MsSince(start) > o.time_budget_ms)) {
      uses->push_back(use);  // ranked, not checked
      continue;
    }
    use.checked = true;
    const LocalFeatures rf = ReferenceFeatures(ref);
    const std::vector<cv::DMatch> m = MatchFeatures(q, rf, MatchOptions{});
    use.matches = static_cast<int>(m.size());
    if (use.matches < min_matches) {
      uses->push_back(use);
      continue;
    }
    std::vector<cv::Point2d> a, b;
    for (const cv::DMatch& d : m)
      a.push_back(q.normalized[d.queryIdx]), b.push_back(rf.normalized[d.trainIdx]);
    Result<RelativePose> rp = EstimateRelativePose(a, b, ro);
    if (rp.ok()) use.inliers = rp->inliers;
    if (rp.ok() && rp->inliers >= o.min_verified_inliers) {
      use.verified = true;
      Verified v{c, {}, {}, {}, rp->inliers};
      two_places = two_places || elsewhere;
      // Every ratio-test match, not only the essential matrix's inliers: its 1 px threshold
      // drops good matches at low counts, and PnP's own RANSAC removes the wrong ones.
      for (const cv::DMatch& d : m) v.matches.push_back({d.queryIdx, d.trainIdx});
      out.push_back(std::move(v));
    }
    uses->push_back(use);
  }
  return out;
}

std::vector<PointCorrespondence> Localizer::Impl::FromPoints(const LocalFeatures& q,
                                                             const std::vector<Verified>& verified,
                                                             const EnuFrame& frame,
                                                             std::vector<ReferenceUse>* uses,
                                                             std::vector<int>* groups) const {
  std::vector<PointCorrespondence> out;
  std::set<std::pair<int, int>> seen_points;
  std::set<int> seen_query;
  for (size_t i = 0; i < verified.size(); ++i) {
    const Verified& v = verified[i];
    const ReferenceImage& ref = v.c.tile->data.images[v.c.image];
    int given = 0;
    for (auto [qk, rk] : v.matches) {
      const int pid = ref.point_ids[rk];
      if (pid < 0 || seen_query.count(qk) || !seen_points.insert({v.c.ordinal, pid}).second)
        continue;
      seen_query.insert(qk);
      const MapPoint& p = v.c.tile->data.points[pid];
      out.push_back({ToFrame(frame, *v.c.tile, p.enu), p.covariance, q.normalized[qk],
                     std::max(2, p.observations)});
      groups->push_back(static_cast<int>(i));
      ++given;
    }
    for (ReferenceUse& u : *uses)
      if (u.tile == v.c.tile->data.key.ToString() && u.image_id == v.c.image) u.points = given;
  }
  return out;
}

void Localizer::Impl::Coarse(const std::vector<Verified>& v, const std::string& reason,
                             Fix* fix) const {
  fix->reason = reason;
  if (v.empty()) return;  // quality stays none
  const ReferenceImage& ref = v.front().c.tile->data.images[v.front().c.image];
  fix->quality = FixQuality::kCoarse;
  fix->method = "retrieval";
  fix->lat_deg = ref.position.lat_deg, fix->lon_deg = ref.position.lon_deg;
  fix->height_m = ref.position.height_m;
  fix->heading_deg = ref.attitude.heading_deg;
  fix->enu_to_camera = QuaternionFromRotation(EnuFromCamera(ref.attitude).t());
  const double s = o.coarse_radius_m / kRound95;
  fix->covariance_en = cv::Matx22d(s * s, 0, 0, s * s);
  fix->radius95_m = o.coarse_radius_m;
}

void Localizer::Impl::Finish(const AbsolutePose& pose, const std::vector<PointCorrespondence>& pts,
                             const std::vector<Verified>& verified, const EnuFrame& frame,
                             const IntegrityRequest& ir, Fix* fix) const {
  const GeoPoint g = frame.ToGeo(pose.center);
  const cv::Matx33d enu_from_camera = pose.camera_from_world.t();
  const double heading = AttitudeFromEnuFromCamera(enu_from_camera).heading_deg;
  double nearest = 1e18, nearest_heading_diff = 0;
  for (const Verified& v : verified) {
    const ReferenceImage& ref = v.c.tile->data.images[v.c.image];
    const double d = cv::norm(v.center - pose.center);
    if (d < nearest)
      nearest = d, nearest_heading_diff = HeadingDiffDeg(heading, ref.attitude.heading_deg);
  }
  const double map_var = SurveyVariance(pose, pts, verified, o.survey_error) +
                         MapCalibrationVariance(pose, pts, verified);
  for (ReferenceUse& u : fix->references)
    for (const Verified& v : verified)
      if (u.tile == v.c.tile->data.key.ToString() && u.image_id == v.c.image)
        u.distance_m = cv::norm(v.center - pose.center);
  if (nearest > o.max_fix_to_reference_m)
    return Coarse(
        verified,
        "pose " + std::to_string(int(nearest)) + " m from its nearest reference (check failed)",
        fix);
  if (nearest_heading_diff > o.max_heading_diff_deg)
    return Coarse(verified,
                  "heading differs from the references' by " +
                      std::to_string(int(nearest_heading_diff)) + " deg (check failed)",
                  fix);
  const PlaceEvidence places = WeighPlaces(verified, pose.center, o.distinct_place_m);
  if (auto why = AmbiguityReason(places, o.ambiguity_ratio)) {
    fix->reason = *why;
    return;  // quality none: one of two look-alike places, not known which
  }
  fix->quality = FixQuality::kRefined;
  fix->reason.clear();
  fix->lat_deg = g.lat_deg, fix->lon_deg = g.lon_deg, fix->height_m = g.height_m;
  fix->heading_deg = heading;
  fix->enu_to_camera = QuaternionFromRotation(pose.camera_from_world);
  // Symmetric by construction (the solver's product may differ in the last bit; the wire
  // carries one off-diagonal term).
  const double en = 0.5 * (pose.center_covariance(0, 1) + pose.center_covariance(1, 0));
  const cv::Matx22d h(pose.center_covariance(0, 0), en, en, pose.center_covariance(1, 1));
  fix->covariance_en = (h + cv::Matx22d::eye() * map_var) * o.covariance_scale;
  fix->radius95_m = Radius95(fix->covariance_en);
  fix->pnp_inliers = pose.inliers;
  fix->rms_px = pose.rms_px;
  fix->query_intrinsics = pose.intrinsics;
  std::vector<std::string> names;
  for (const Verified& v : verified) names.push_back(v.c.tile->data.images[v.c.image].name);
  fix->integrity = AssessIntegrity(pose, *fix, map_var, names, places, o, ir);
}

void Localizer::Impl::CheckLookAlikes(const LocalFeatures& q, const LocateRequest& r,
                                      const std::vector<Verified>& verified, Fix* fix) const {
  const Verified& best =
      *std::max_element(verified.begin(), verified.end(),
                        [](const Verified& a, const Verified& b) { return a.inliers < b.inliers; });
  const ReferenceImage& ref = best.c.tile->data.images[best.c.image];
  std::string note;
  const std::vector<Candidate> twins =
      SelectLookAlikes(FromGlobal(model->Whiten(model->Vlad(ExpandDescriptors(ref.descriptors))),
                                  &note, o.look_alike_depth),
                       *fix, r, o);
  std::vector<ReferenceUse> uses;
  // Inliers never outnumber matches: a look-alike with fewer than the flag needs is let be.
  Verify(q, twins, r.camera, Clock::now(), &uses,
         static_cast<int>(std::ceil(o.look_alike_ratio * best.inliers)));
  FlagPlaceAmbiguity(LookAlikeReason(uses, *fix, best.inliers, o), fix);
  fix->references.insert(fix->references.end(), uses.begin(), uses.end());
}

void Localizer::Impl::CheckNearby(const LocalFeatures& q, const LocateRequest& r,
                                  const EnuFrame& frame, AbsolutePoseOptions po,
                                  const AbsolutePose& pose, Fix* fix) const {
  std::vector<ReferenceUse> uses;
  std::vector<Verified> found;  // one at a time: Verify stops after max_verified
  for (const Candidate& c : SelectNearby(*cache, catalog.zoom, frame, pose, *fix, o))
    for (Verified& v : Verify(q, {c}, r.camera, Clock::now(), &uses)) found.push_back(std::move(v));
  KeepDisagreeing(q.normalized, pose, frame, po.threshold_px / po.focal_px, &found);
  std::vector<int> groups;
  const Result<AbsolutePose> nearby = NearbyPose(FromPoints(q, found, frame, &uses, &groups), po);
  FlagPlaceAmbiguity(NearbyAliasReason(nearby.ok() ? &*nearby : nullptr, pose, o), fix);
  fix->references.insert(fix->references.end(), uses.begin(), uses.end());
}

// Stage 4 and on: the metric pose from the map's points, else from a reference pair (as
// o.method allows), then the checks; coarse with the reasons when no pose passes.
void Localizer::Impl::Pose(const LocalFeatures& q, const LocateRequest& r, const std::string& note,
                           std::vector<Verified>* verified, Fix* fix) const {
  const CameraModel& camera = r.camera;
  const EnuFrame& frame = verified->front().c.tile->enu;
  for (Verified& v : *verified) {
    const ReferenceImage& ref = v.c.tile->data.images[v.c.image];
    v.center = ToFrame(frame, *v.c.tile, v.c.tile->image_centers[v.c.image]);
    v.camera_from_frame = EnuFromCamera(ref.attitude).t();
  }
  AbsolutePoseOptions po;
  po.focal_px = 0.5 * (camera.fx + camera.fy);
  po.threshold_px = o.pnp_threshold_px;
  po.min_inliers = o.min_pnp_inliers;
  po.pixel_sigma_px = o.pixel_sigma_px;
  if (o.estimate_query_intrinsics) po.camera = camera;
  Result<AbsolutePose> pose = Status(StatusCode::kFailedPrecondition, "no pose method ran");
  std::vector<PointCorrespondence> pts;
  std::string why;
  if (o.method != PoseMethod::kPair) {
    pts = FromPoints(q, *verified, frame, &fix->references, &po.groups);
    fix->correspondences = static_cast<int>(pts.size());
    pose = EstimateAbsolutePose(pts, po);
    fix->method = "points";
    if (!pose.ok()) why = "map points: " + pose.status().message();
  }
  if (!pose.ok() && o.method != PoseMethod::kPoints) {
    pts = PairCorrespondences(q, *verified, o.min_pair_baseline_m, o.pixel_sigma_px);
    po.groups.clear();
    fix->correspondences = static_cast<int>(pts.size());
    pose = EstimateAbsolutePose(pts, po);
    fix->method = "pair";
    if (!pose.ok())
      why += (why.empty() ? "" : "; ") + std::string("reference pair: ") +
             (verified->size() < 2 ? "one verified reference" : pose.status().message());
  }
  if (pose.ok()) {
    WeighSupport(
        q.normalized, pose->camera_from_world, pose->center, po.threshold_px / po.focal_px,
        [&](const Verified& v, int pid) {
          return ToFrame(frame, *v.c.tile, v.c.tile->data.points[pid].enu);
        },
        verified);
    Finish(*pose, pts, *verified, frame, r.integrity, fix);
    if (fix->integrity.usable())
      FlagPlaceAmbiguity(SpreadReason(pts, *pose, po.threshold_px / po.focal_px, o), fix);
    if (fix->integrity.usable() && o.look_alike_checks > 0) CheckLookAlikes(q, r, *verified, fix);
    if (fix->integrity.usable() && o.nearby_checks > 0) CheckNearby(q, r, frame, po, *pose, fix);
  } else
    Coarse(*verified, note + why, fix);
}

Result<Fix> Localizer::Locate(const LocateRequest& r) const {
  const Impl& m = *impl_;
  const auto start = Clock::now();
  PinLibraryThreads();
  if (Status s = r.Check(); !s.ok()) return s;
  Fix fix;
  fix.capture_time_s = r.capture_time_s;
  Result<LocalFeatures> q = m.Features(r, &fix.timings);
  if (!q.ok()) return Status::InvalidArgument(q.status().message());
  auto t0 = Clock::now();
  const cv::Mat qv = m.model->Whiten(m.model->Vlad(q->descriptors));
  std::string note;
  const std::vector<Candidate> cands = m.Candidates(qv, r, &note);
  fix.timings.retrieval_ms = MsSince(t0);
  t0 = Clock::now();
  std::vector<Verified> verified = m.Verify(*q, cands, r.camera, start, &fix.references);
  fix.timings.verify_ms = MsSince(t0);
  t0 = Clock::now();
  if (verified.empty()) {
    m.Coarse(verified,
             note + (cands.empty() ? "no map images near the prior"
                                   : "no candidate passed geometric verification"),
             &fix);
  } else {
    m.Pose(*q, r, note, &verified, &fix);
  }
  fix.timings.pose_ms = MsSince(t0);
  if (r.prior && fix.quality != FixQuality::kNone) {
    fix.prior_distance_m =
        GeodesicBetween(r.prior->lat_deg, r.prior->lon_deg, fix.lat_deg, fix.lon_deg).distance_m;
    fix.outside_prior = fix.prior_distance_m > r.prior->radius_m;
  }
  fix.timings.total_ms = MsSince(start);
  return fix;
}

}  // namespace sightfix
