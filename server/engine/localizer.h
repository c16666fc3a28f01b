// The localization engine: one camera image (and perhaps a coarse prior) in, a fix out.
//
// Stages (DESIGN.md 5; the methods and their sources are in the .cc):
//  1. features: RootSIFT of the query, keypoints undistorted with its calibration;
//  2. candidates: with a prior, the images of the tiles its circle (grown by the viewing range)
//     touches, ranked by each tile's retrieval index; without, the map-wide index; top_k kept;
//  3. verification: query <-> reference matches, five-point essential matrix in USAC_MAGSAC;
//     a reference with min_verified_inliers inliers is verified; at most max_verified;
//  4. metric pose: the verified references' inlier matches whose keypoint observes a map point
//     give 2D-3D correspondences; PnP RANSAC + LM (absolute_pose.h). When those are too few
//     (or PoseMethod::kPair), two verified references are matched with each other and their
//     matches triangulated with their known poses at query time, then the same PnP;
//  5. confidence: the centre's covariance from the solver with the points' covariance
//     propagated, plus the references' survey sigma, times covariance_scale (calibrated on a
//     demo seed the tests do not use; DEVELOPERS.md "Confidence calibration"); radius95 numeric;
//  6. checks: enough inliers, points in front, near its references, heading consistent;
//     a failed check turns the fix coarse with the reason; a rival place verified nearly as
//     strongly as the fix's own (place ambiguity, options below) leaves it with none. A fix outside
//     the prior is reported (outside_prior), not dropped: the prior may come from a spoofed
//     receiver.
//
// Thread safety: Locate may be called concurrently from any number of threads; tiles are
// shared through a thread-safe cache. Library thread pools are pinned per calling thread.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/rotation.h"
#include "indexer/base/status.h"
#include "indexer/map/camera_model.h"
#include "indexer/map/map_store.h"
#include "indexer/vision/local_features.h"
#include "server/engine/absolute_pose.h"
#include "server/engine/protection_levels.h"
#include "server/engine/tile_cache.h"

namespace sightfix {

enum class PoseMethod {
  kAuto,    // 3D points, then the query-time pair when the points are too few
  kPoints,  // 3D points only
  kPair,    // query-time triangulation of two references only
};

// How the map's survey poses err (the survey term of the confidence, localizer.cc).
enum class SurveyError {
  kCorrelated,  // a drift shared by neighbouring frames: real GNSS/INS surveys
  kWhite,       // independent per frame: the clean demo town's 2 cm
};

struct LocalizerOptions {
  int top_k = 8;         // retrieval candidates verified at most
  int max_verified = 3;  // stop verifying after this many pass
  // Essential-matrix inliers of a verified reference. Low on purpose: a wrong reference still
  // has to give min_pnp_inliers consistent 2D-3D correspondences, a far stronger test (the
  // foreign-town test holds it to zero wrong fixes).
  int min_verified_inliers = 20;
  double viewing_range_m = 50;  // a camera sees what lies this far ahead (candidate margin)
  PoseMethod method = PoseMethod::kAuto;
  double pnp_threshold_px = 3.0;
  int min_pnp_inliers = 25;
  double pixel_sigma_px = 1.0;
  // The metric pose also estimates the query camera's focal length and k1 under the priors of
  // its stated uncertainty (absolute_pose.h); false holds them exact.
  bool estimate_query_intrinsics = true;
  // Multiplies the horizontal covariance (solver plus survey term). Calibrated on demo seed 5,
  // which no test uses: over its 172 refined fixes, the 95th percentile of (error / radius95)^2
  // at scale 1 was 1.86 (day 65 fixes, dusk 37, overcast 70; mean 0.52 / 0.51 / 0.55, so one
  // scale fits all three). DEVELOPERS.md "Confidence calibration" has the command.
  double covariance_scale = 1.9;
  SurveyError survey_error = SurveyError::kCorrelated;
  double max_fix_to_reference_m = 30;  // check: a fix this far from every reference is suspect
  double max_heading_diff_deg = 60;    // check: against the nearest verified reference
  // Place ambiguity: references this far apart show distinct places. Once max_verified have
  // passed, verification goes on through the remaining candidates at a place distinct from
  // every verified one, until one passes; a pose whose own place has a distinct rival with at
  // least ambiguity_ratio of its best reference's inliers is no fix (reason "ambiguous"):
  // where two places look alike, the answer is none rather than one of them with a small radius.
  double distinct_place_m = 30;
  double ambiguity_ratio = 0.5;  // 0 would call every rival decisive; > 1 disables the check
  // A rival place with at least this share of the fix's inliers (below ambiguity_ratio, which
  // withholds the fix) leaves the fix refined but not usable (FixIntegrity, kPlaceAmbiguity).
  double ambiguity_flag_ratio = 0.25;
  // A candidate checked but short of verification counts towards that flag (not towards
  // withholding) with at least this many essential-matrix inliers (place_ambiguity.h).
  int min_near_miss_inliers = 12;
  // Before a fix is called usable, its strongest reference is itself retrieved against the
  // map, and up to look_alike_checks of its look-alikes at other places (more than
  // distinct_place_m from the fix; within the prior's reach when there is one) are checked
  // against the query: one matching with look_alike_ratio or more of the fix's best inliers
  // makes the fix place_ambiguity. It finds the twin whose true place the query's own retrieval
  // missed. The ratio is high because the look-alikes are chosen for resembling the fix's own
  // reference: a reference 30-45 m along the street shares much of its view and often matches
  // with 0.3-0.8 of the inliers (DEVELOPERS.md, "Integrity"). 0 checks turn it off.
  int look_alike_checks = 5;
  double look_alike_ratio = 0.85;
  // How deep the reference's own retrieval goes: past its neighbours along the street (a
  // survey image every 2 m leaves some 30 within distinct_place_m, in both directions).
  int look_alike_depth = 64;
  // Then up to nearby_checks survey images within distinct_place_m of the fix (farther than
  // nearby_alias_m), facing its way, at least nearby_spacing_m apart, are checked against the
  // query, and the pose their matches the fix does not explain give alone is solved (at least
  // kNearbyPoseInliers inliers): one more than nearby_alias_m from the fix with
  // nearby_alias_ratio or more of the fix's PnP inliers makes it place_ambiguity. It catches an
  // alias nearer than distinct_place_m (a terrace of one design): seed 43's two day fixes 14
  // and 22 m off got poses 14.3 and 21.7 m away at 0.60 and 0.61 (docs/design.md 5.6). 0 checks
  // turn it off.
  int nearby_checks = 8;
  double nearby_spacing_m = 6;
  double nearby_alias_m = 3;
  double nearby_alias_ratio = 0.5;
  // First of all, the one-wall check (place_ambiguity.h OneWallReason): fewer than
  // one_wall_off PnP inliers off the one wall that holds the rest is evidence from one front,
  // which a street of one design repeats. Seed 103's overcast fix 14.2 m off at a terrace had
  // all its 27 on one wall, seed 107's 7.1 m off 29 of its 31; 6 of the 248 fixes usable at
  // 10 m on seed 103's lit drives had fewer than 3 off (docs/design.md 5.6). 0 turns it off.
  int one_wall_off = 3;
  // An inlier off the wall counts when sliding the camera spread_shift_m along the wall
  // moves its image by more than pnp_threshold_px: seed 112's overcast fix 8.1 m off had 7 of
  // its 26 off the wall, every one over 100 m away (docs/design.md 5.6).
  double spread_shift_m = 3;
  // Then fewer than min_sight_support PnP inliers that move in the image when the camera slides
  // spread_shift_m along its line of sight (place_ambiguity.h SightSupport) makes the fix
  // place_ambiguity: how far down the street it stands rests on a handful of matches. 10, the
  // floor a subset solution needs (AbsolutePoseOptions::min_subset_inliers): seed 109's day fix
  // 7.6 m off had 5 of 29; of 1 137 fixes usable at 10 m on seeds 103, 107, 109 and 112, 5 had
  // fewer than 10 (docs/design.md 5.6). 0 turns it off.
  int min_sight_support = 10;
  // Integrity (protection_levels.h): the default risk, the false-alert budget and the CDF
  // overbound. A request may ask for another risk. The map's fitted overbound (catalog.h
  // IntegrityFit) replaces overbound_scale where it is larger; the fixes then name its drive.
  ProtectionParameters protection;
  // The horizontal alert limit a request that states none is judged at, metres.
  double default_alert_limit_m = 2;
  double min_pair_baseline_m = 1.5;  // pair fallback: references closer give weak geometry
  double coarse_radius_m = 50;       // radius95 of a coarse (retrieval-only) fix
  double time_budget_ms = 0;         // > 0: stop verifying new candidates past this
  size_t tile_cache_bytes = size_t(2) << 30;
  // Reads the tile files for their SHA-256 check (tile_cache.h). Borrowed, not owned: must
  // outlive every Localizer opened with these options. Default: the real file system.
  Env* env = Env::Default();
  FeatureOptions features;
  bool Validate(std::string* error) const;
};

struct PriorCircle {
  double lat_deg = 0, lon_deg = 0, radius_m = 0;
};

// What a caller asks of a fix's integrity: the risk its protection levels are stated at (0: the
// server's, LocalizerOptions::protection) and the alert limits, metres, at which it is usable (0:
// not checked; a horizontal limit of 0 means LocalizerOptions::default_alert_limit_m).
struct IntegrityRequest {
  double integrity_risk = 0;
  double horizontal_alert_limit_m = 0, lateral_alert_limit_m = 0, longitudinal_alert_limit_m = 0;
  bool Validate(std::string* error) const;  // risk in [0, 0.5), limits finite and >= 0
};

struct LocateRequest {
  // One of: a decoded 8-bit image, encoded JPEG/PNG bytes, or precomputed RootSIFT features
  // (keypoints' `normalized` must be undistorted with `camera`).
  cv::Mat image;
  std::vector<uint8_t> image_bytes;
  std::shared_ptr<const LocalFeatures> features;
  CameraModel camera;
  double capture_time_s = 0;  // Unix seconds, echoed in the fix
  std::optional<PriorCircle> prior;
  std::optional<double> heading_deg;  // coarse heading prior: candidates facing away are skipped
  IntegrityRequest integrity;
  // InvalidArgument naming the first bad field (calibration, no image, prior, heading, integrity).
  Status Check() const;
};

// Whether a fix may be used where its error must stay within the alert limits.
enum class IntegrityState {
  kUnavailable,     // not refined: no protection levels
  kUsable,          // protection levels within every alert limit, no fault seen
  kOverAlertLimit,  // a protection level exceeds its alert limit
  kFaultDetected,   // a group of correspondences pulls the fix away (solution separation)
  kPlaceAmbiguity,  // another place verified (or checked with min_near_miss_inliers) with
                    // ambiguity_flag_ratio of this one's inliers
};
const char* IntegrityStateName(IntegrityState s);  // "unavailable", "usable", ...

struct FixIntegrity {
  IntegrityState state = IntegrityState::kUnavailable;
  bool usable() const { return state == IntegrityState::kUsable; }
  // Protection levels, metres (0 when unavailable), at integrity_risk.
  double horizontal_pl_m = 0, lateral_pl_m = 0, longitudinal_pl_m = 0;
  double integrity_risk = 0;
  double horizontal_alert_limit_m = 0, lateral_alert_limit_m = 0, longitudinal_alert_limit_m = 0;
  double overbound_scale = 1;
  std::string overbound_drive;                 // the drive it was fitted on (empty: none)
  int hypotheses = 0, hypotheses_skipped = 0;  // fault hypotheses tested and too large to test
  double max_test_ratio = 0;                   // solution separation: 1 is the threshold
  std::string detail;                          // why not usable
  // The fault hypotheses' subset solutions (sigmas not multiplied by the overbound scale). In
  // process only, not on the wire: the overbound fit reads them to tell a fix that one group
  // pulled off from a tail of the fault-free error model (overbound.h NormaliseErrors).
  std::vector<SeparatedSolution> separations;
};

enum class FixQuality { kNone, kCoarse, kRefined };
const char* FixQualityName(FixQuality q);  // "none", "coarse", "refined"

struct ReferenceUse {
  std::string tile;  // "z/x/y"
  int image_id = 0;
  std::string name;
  double lat_deg = 0, lon_deg = 0;  // the reference's camera centre
  float retrieval_distance = 0;     // rank order: candidates are listed best first
  bool checked = false;             // verification ran on it (false: ranked, not needed)
  int matches = 0, inliers = 0;     // essential-matrix verification
  int points = 0;                   // 2D-3D correspondences it gave
  bool verified = false;
  double distance_m = 0;  // from the fix (or -1 without one)
};

struct StageTimings {
  double decode_ms = 0, features_ms = 0, retrieval_ms = 0, verify_ms = 0, pose_ms = 0, total_ms = 0;
};

struct Fix {
  FixQuality quality = FixQuality::kNone;
  double capture_time_s = 0;
  double lat_deg = 0, lon_deg = 0, height_m = 0;     // WGS84, ellipsoidal height
  double heading_deg = 0;                            // clockwise from true north
  Quaternion enu_to_camera;                          // rotates ENU vectors into the camera frame
  cv::Matx22d covariance_en = cv::Matx22d::zeros();  // east/north, m^2
  double radius95_m = 0;
  std::string method;  // "points", "pair", "retrieval" or empty
  int correspondences = 0, pnp_inliers = 0;
  double rms_px = 0;
  IntrinsicsChange query_intrinsics;  // as the metric pose estimated them (refined fixes)
  FixIntegrity integrity;
  std::vector<ReferenceUse> references;  // every retrieval candidate, best first
  StageTimings timings;
  std::string reason;  // why not refined (empty when refined)
  bool outside_prior = false;
  double prior_distance_m = -1;  // fix to prior centre, when a prior was given
};

class Localizer {
 public:
  // Opens the map (catalog, model, global index); tiles load on first use.
  static Result<std::unique_ptr<Localizer>> Open(const std::string& map_dir,
                                                 const LocalizerOptions& options);
  ~Localizer();

  // kInvalidArgument for bad input (no image, undecodable, size not the calibration's, bad
  // prior); otherwise a Fix, whose quality says how far it got.
  Result<Fix> Locate(const LocateRequest& request) const;

  const Catalog& catalog() const;
  const LocalizerOptions& options() const;
  int tiles_cached() const;  // tiles in memory now
  // Health of the map's files (server/engine/tile_cache.h): checks one tile's file without loading
  // it, lists the tiles refused so far, counts the tiles checked.
  Status CheckTile(int ordinal) const;
  std::vector<TileProblem> TileProblems() const;
  int tiles_checked() const;
  // Calibration `index` of the tile "z/x/y", through the tile cache; nullopt when unknown.
  // Loads the tile when it is not in memory (blocks for the file's read and check, like
  // Locate): call it from a worker thread, not from an event loop's.
  std::optional<CameraModel> TileCamera(const std::string& tile, int index) const;

 private:
  struct Impl;
  explicit Localizer(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace sightfix
