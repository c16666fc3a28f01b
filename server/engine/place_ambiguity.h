// Place ambiguity: where two places look alike (a terrace of identical houses, two streets
// built alike), references at both verify, and a pose at either would carry the small radius
// of a good fix. The engine checks, before calling a fix refined, whether a place distinct from
// the fix's own verified nearly as strongly; if so it answers none with the reason. A reference
// speaks for the fix's place when its map points agree with the fix's pose (most of them
// reproject within the PnP threshold), or, with too few points to tell, when it lies within
// distinct_m of the fix; a rival is a reference that does not and lies farther than distinct_m.
// Aliases closer than distinct_m (a repeated house front a few metres along) are not caught
// (DEVELOPERS.md, "Place ambiguity").
#pragma once

#include <algorithm>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "indexer/map/tile_store.h"
#include "server/engine/absolute_pose.h"
#include "server/engine/localizer.h"
#include "server/engine/verified_reference.h"

namespace sightfix {

// True when `ref` lies more than distinct_m (geodesic, horizontal) from every verified
// reference: a candidate worth verifying past max_verified, as evidence for another place.
bool AtDistinctPlace(const ReferenceImage& ref, const std::vector<Verified>& verified,
                     double distinct_m);

// Sets each reference's tested and agreeing counts: its matches (query keypoint, reference
// keypoint observing a map point), the point taken into the fix's frame by `to_frame`,
// reprojected through camera_from_world and center; agreeing within threshold (normalized
// image units) of the query keypoint.
void WeighSupport(const std::vector<cv::Point2d>& query_normalized,
                  const cv::Matx33d& camera_from_world, const cv::Vec3d& center, double threshold,
                  const std::function<cv::Vec3d(const Verified&, int)>& to_frame,
                  std::vector<Verified>* verified);

// A reference with at least this many tested matches is judged by them, not by its distance.
inline constexpr int kMinTestedMatches = 10;

// With `center` the fix's camera centre in the frame of verified[i].center: the strongest
// reference speaking for the fix's place (here) against the strongest rival, by
// essential-matrix inliers, and how far the rival lies (metres; 0 without one).
struct PlaceEvidence {
  int here = 0, rival = 0;
  double rival_m = 0;
  // The strongest candidate checked but short of verification at a place distinct from the
  // fix (WeighNearMisses); 0 without one.
  int near_miss = 0;
  double near_miss_m = 0;
  // True when rival > 0 and rival >= ratio * here.
  bool RivalReaches(double ratio) const { return rival > 0 && rival >= ratio * here; }
  // The same test on the stronger of the rival and the near miss.
  bool AnyRivalReaches(double ratio) const {
    const int r = std::max(rival, near_miss);
    return r > 0 && r >= ratio * here;
  }
  std::string Describe() const;  // "a place 142 m away verified with 37 inliers, this one with 40"
  std::string DescribeAny()
      const;  // the stronger of the two, "... verified ..." or "... checked ..."
};
PlaceEvidence WeighPlaces(const std::vector<Verified>& verified, const cv::Vec3d& center,
                          double distinct_m);

// Candidates checked but not verified (fewer essential-matrix inliers than verification asks)
// with at least min_inliers, lying more than distinct_m (geodesic) from the fix at lat, lon:
// evidence for another place too weak to withhold a fix, enough to keep it from being used. A
// look-alike stretch's true place often verifies just short of the threshold while its twin
// passes (DEVELOPERS.md, "Integrity").
void WeighNearMisses(const std::vector<ReferenceUse>& uses, double lat_deg, double lon_deg,
                     double distinct_m, int min_inliers, PlaceEvidence* evidence);

// Whether a map image `t` (tile "z/x/y", image index) retrieved as a look-alike of a fix's
// strongest reference is to be checked against the query: not checked already (fix.references),
// more than distinct_place_m from the fix, and within the prior's reach when r has a prior.
bool IsLookAlikeToCheck(const ReferenceImage& t, const std::string& tile, int image, const Fix& fix,
                        const LocateRequest& r, const LocalizerOptions& o);

// Of a reference's own retrieval hits, those IsLookAlikeToCheck keeps, in rank order, at most
// o.look_alike_checks of them.
std::vector<Candidate> SelectLookAlikes(const std::vector<Candidate>& hits, const Fix& fix,
                                        const LocateRequest& r, const LocalizerOptions& o);

// The look-alike check of a fix about to be called usable (LocalizerOptions::look_alike_checks):
// among `uses`, the checks of its strongest reference's look-alikes, the one with the most
// essential-matrix inliers (verified or not) at least min_near_miss_inliers strong and more than
// distinct_place_m from the fix; when it reaches look_alike_ratio x here_inliers (the fix's
// strongest reference), why the fix is not usable, else nullopt.
std::optional<std::string> LookAlikeReason(const std::vector<ReferenceUse>& uses, const Fix& fix,
                                           int here_inliers, const LocalizerOptions& o);

// The nearby check of a fix about to be called usable (LocalizerOptions::nearby_checks): a
// repeated front a few metres along (a terrace of one design) can pull every correspondence of
// the fix's references the same wrong way, so that every check above agrees, while the survey
// images taken at the true place, near the fix but never retrieved, would show it. The
// candidates: survey images of the tiles (at `zoom`) within distinct_place_m of the fix
// (`pose`, solved in `frame`; horizontal distance), facing within 45 deg of its camera, not
// checked already, nearest first, each nearby_spacing_m or more from those chosen before, at
// most nearby_checks.
std::vector<Candidate> SelectNearby(TileCache& cache, int zoom, const EnuFrame& frame,
                                    const AbsolutePose& pose, const Fix& fix,
                                    const LocalizerOptions& o);

// The nearby references' pose needs this many PnP inliers (a single reference gives 10-30).
inline constexpr int kNearbyPoseInliers = 10;

// Drops from each reference's matches those whose map point the fix's pose reprojects within
// threshold (normalized units) of the query keypoint, and those without a point: what agrees
// with the fix is its own evidence, the rest may show another place. (Before the references'
// correspondences are pooled: pooling keeps one correspondence per query keypoint, and a twin's
// would lose to the fix's own.)
void KeepDisagreeing(const std::vector<cv::Point2d>& query_normalized, const AbsolutePose& fix,
                     const EnuFrame& frame, double threshold, std::vector<Verified>* refs);

// The pose of the nearby references' pooled correspondences: po with at least
// kNearbyPoseInliers inliers, intrinsics held (a weaker pose than the fix's), no subsets.
Result<AbsolutePose> NearbyPose(const std::vector<PointCorrespondence>& pts,
                                AbsolutePoseOptions po);

// The pose the nearby references verified against the query give on their own (their
// correspondences pooled; null when none could be solved) against the fix's: when it lies more
// than nearby_alias_m from the fix with nearby_alias_ratio x or more of the fix's PnP inliers,
// why the fix is not usable, else nullopt.
std::optional<std::string> NearbyAliasReason(const AbsolutePose* nearby, const AbsolutePose& fix,
                                             const LocalizerOptions& o);

// A fix's evidence on the walls it saw: its PnP inliers' map points (the fix's frame, z up)
// against the vertical plane that holds the most of them within kWallToleranceM: how many lie
// off it and place the camera along it, how many lie off it beyond reach, and how far those on
// it spread along it (metres). An inlier off the wall places the camera along it when sliding
// the camera shift_m along the wall, either way with its rotation held, moves the inlier's
// image by more than `threshold` (normalized image units): a repeat of the wall shifts the
// position and keeps the rotation, so only such points could tell the repeats apart; a point
// 100 m down the street barely moves. The plane is the best of the lines through pairs of
// points at least 1 m apart (all pairs up to 4000, else 4000 drawn with a fixed seed):
// deterministic.
struct WallSpread {
  int off_wall = 0;
  int beyond_reach = 0;
  double along_m = 0;
};
inline constexpr double kWallToleranceM = 0.5;
WallSpread SpreadOnWalls(const std::vector<PointCorrespondence>& pts, const AbsolutePose& pose,
                         double shift_m, double threshold);

// The one-wall check of a fix about to be called usable (LocalizerOptions::one_wall_off):
// fewer than one_wall_off inliers off one wall placing the camera along it is evidence from one
// front alone. A street of one design repeats it a house along, and nothing else in the scene
// matched to tell the repeats apart. Why the fix is not usable, else nullopt.
std::optional<std::string> OneWallReason(const WallSpread& w, int inliers,
                                         const LocalizerOptions& o);

// How many of a fix's PnP inliers place the camera along its line of sight: sliding the camera
// shift_m forward or back (level, its rotation held) moves the inlier's image by more than
// `threshold` (normalized image units). A front far down the street fixes where the camera
// looks, not how far from it the camera stands: that rests on the nearer inliers alone.
int SightSupport(const std::vector<PointCorrespondence>& pts, const AbsolutePose& pose,
                 double shift_m, double threshold);

// The spread checks of a fix about to be called usable: the one-wall check, then the
// line-of-sight check (fewer than LocalizerOptions::min_sight_support inliers placing the
// camera along its line of sight: a handful of wrong matches could agree on a place there by
// chance, whatever the rest say). Why the fix is not usable, else nullopt.
std::optional<std::string> SpreadReason(const std::vector<PointCorrespondence>& pts,
                                        const AbsolutePose& pose, double threshold,
                                        const LocalizerOptions& o);

// Makes the fix place_ambiguity with the reason, when there is one.
void FlagPlaceAmbiguity(const std::optional<std::string>& why, Fix* fix);

// "ambiguous: " + the evidence when its rival reaches ratio.
std::optional<std::string> AmbiguityReason(const PlaceEvidence& evidence, double ratio);

}  // namespace sightfix
