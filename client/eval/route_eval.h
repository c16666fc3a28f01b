// Replays a query drive with ground truth through a localizer (in process or through the
// server) and measures it with the field's metrics. The core of `sightfix replay`; tests use it
// for the accuracy goals.
//
// Metrics and sources:
//  - recall@N within 25 m: a query counts when one of its N best retrieval candidates lies
//    within 25 m of the truth (Arandjelovic et al., NetVLAD, CVPR 2016; Torii et al. 2013);
//  - a fix is an answer with a position (refined or coarse); availability = fixes / queries;
//  - horizontal error median, p90, p95, max (nearest-rank percentiles), the medians of its
//    along-track and cross-track parts' magnitudes (the truth's heading defines along), heading
//    error, radius95
//    coverage (share with the truth inside radius95_m) and NEES (mean of e^T S^-1 e with the
//    reported 2x2 covariance S; chi-square with 2 dof when calibrated, so about 2), each over
//    all fixes (`all`) and over refined fixes only (`refined_only`);
//  - wrong refined: refined fixes more than 5 m off (must be 0);
//  - pose bins (0.25 m, 2 deg), (0.5 m, 5 deg), (5 m, 10 deg): share of all queries (Sattler et
//    al., CVPR 2018), named fine, medium and rough here (kPoseBins);
//  - latency: wall time of each call as the caller saw it, p50 / p95 / p99;
//  - 95 % intervals (interval_stats.h; nullopt when a figure has no data), every one read over
//    street segments (street_segments.h: the truth track cut into SummaryOptions::
//    segment_length_m of distance driven), the units taken as independent: a rate (refined
//    share, availability, recall@N, pose bins, funnel shares, radius95 coverage, wrong and
//    misleading shares) by the block bootstrap of its segments' 0/1 outcomes, or by Wilson with
//    one trial per segment when it is 0 or 1 (SegmentShareCi95); the median and p95 error and
//    the median |along| and |cross| by the block bootstrap of the segments' values (B = 2000,
//    seed 1). Each interval carries its method (IntervalTag);
//  - integrity (IntegrityCounts, integrity.h): usable fixes whose error exceeds their radius95
//    (misleading) or 3 x radius95 (confidently wrong), their episodes, and the one-sided
//    Clopper-Pearson 95 % upper bound of the share of segments that hold one;
//  - failure funnel: the stage where each query stopped (FunnelStage, StageOf), counts and shares
//    of all queries with their intervals.
// Thread safety: RunDrive runs `jobs` threads of its own over the LocateFn, which must be
// thread-safe (Localizer::Locate and Client::Locate are).
#pragma once

#include <array>
#include <atomic>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "client/eval/interval_stats.h"
#include "client/monitor/gnss_stream.h"
#include "client/monitor/spoofing_monitor.h"
#include "indexer/base/status.h"
#include "indexer/map/drive_manifest.h"
#include "server/engine/localizer.h"

namespace sightfix {

enum class PriorMode {
  kNone,   // global relocalization
  kNoisy,  // a circle around the truth, centre drawn uniformly within prior_max_offset_m
  kGnss,   // the drive's GNSS stream with its claimed accuracy, spoofed spans included
};

// Runs one request: `request` has camera, time and prior set; `image_bytes` is the encoded
// query image as read from disk. Must be thread-safe.
using LocateFn =
    std::function<Result<Fix>(const LocateRequest& request, const std::string& image_bytes)>;

// The in-process LocateFn: decodes the bytes (8-bit grey) and calls localizer.Locate.
LocateFn InProcess(const Localizer& localizer);

struct RouteEvalOptions {
  std::string drive_dir;  // holds drive.csv (truth) and the calibration it names
  PriorMode prior = PriorMode::kNoisy;
  double prior_radius_m = 150;      // noisy: the circle's radius
  double prior_max_offset_m = 100;  // noisy: centre drawn uniformly within this of the truth
  std::string gnss_csv;             // gnss: the stream; default drive_dir/gnss.csv
  // gnss: the circle's radius is this many claimed per-axis sigmas: sqrt(-2 ln 0.05) = 2.4477
  // holds 95 % of a circular 2D Gaussian (common practice).
  double gnss_sigmas = 2.4477;
  // gnss: a query the GNSS prior leaves without a refined fix is asked again without a prior,
  // as a vehicle stack would when its receiver may be lying.
  bool retry_without_prior = true;
  uint64_t seed = 1;
  // The alert limits every query asks its fix to be judged at (0: the map's default, 2 m). The
  // place checks run only for fixes usable at them, so availability at a wider limit is an
  // upper bound (ProtectionEvidence::checked_at_m).
  IntegrityRequest integrity;
  int limit = 0;                            // first N queries only; 0 = all
  int jobs = 0;                             // queries in flight; 0 = all cores
  const std::atomic<bool>* stop = nullptr;  // when set to true, no new query starts
  std::function<void()> on_query_done;      // called after each query (any thread)
};

struct QueryResult {
  bool ran = false;  // false: stopped before this query started
  DriveRow truth;
  Fix fix;
  double latency_ms = 0;  // wall time of the call(s), as the caller saw it
  std::optional<PriorCircle> prior;
  bool retried_without_prior = false;  // gnss mode: the answer is the retry's
  double error_m = -1;                 // horizontal, when a fix came back
  double heading_error_deg = -1;
  // The horizontal error split along the truth's heading (drive.csv heading_deg) when a fix came
  // back: along_track_m > 0 ahead of the truth in that direction, cross_track_m > 0 to its right
  // (metres, local east/north plane; along^2 + cross^2 = error_m^2).
  double along_track_m = 0, cross_track_m = 0;
  double nees = -1;         // fixes with a covariance
  int first_hit_rank = -1;  // rank (1-based) of the first candidate within 25 m, -1 none
  std::string error;        // the localizer refused the request or the call failed
};

// Where a query stopped, in the engine's order (candidates, verification, pose). The stages
// read only what the fix reports, so a query whose truth lies off the mapped streets counts as a
// retrieval failure: the evaluator does not know the map's coverage, and off-map is not a stage.
enum class FunnelStage {
  kRetrieval,     // no retrieval candidate within 25 m of the truth among those returned
  kVerification,  // a candidate within 25 m, but no candidate verified
  kPose,          // a candidate verified, but the fix is not refined (coarse or none)
  kRefined,       // a refined fix (whatever its candidates)
  kFailedCall,    // the call failed or was refused (QueryResult::error): no answer to read
};
inline constexpr int kFunnelStageCount = 5;
// "retrieval", "verification", "pose", "refined", "failed_call": fixes.csv's `stage` and the
// keys of summary.json's `funnel`.
const char* FunnelStageName(FunnelStage stage);
// The stage of a query that ran, from q.error, q.fix (quality, references' verified flags) and
// q.first_hit_rank (ScoreQuery). Checked in this order: failed call, refined, retrieval,
// verification, pose.
FunnelStage StageOf(const QueryResult& q);

struct FunnelCounts {
  std::array<int, kFunnelStageCount> count{};     // queries per stage, by FunnelStage's value
  std::array<double, kFunnelStageCount> share{};  // count / queries
  std::array<std::optional<Interval>, kFunnelStageCount> share_ci95;  // per segment
};

struct ErrorStats {
  int n = 0;
  double median_m = 0, p90_m = 0, p95_m = 0, max_m = 0;
  double median_heading_deg = 0;
  double radius95_coverage = 0, nees_mean = 0;
  double median_abs_along_m = 0, median_abs_cross_m = 0;  // medians of |along|, |cross|
  // 95 % intervals over street segments (see the top of this file).
  std::optional<Interval> median_m_ci95, p95_m_ci95, radius95_coverage_ci95;
  std::optional<Interval> median_abs_along_m_ci95, median_abs_cross_m_ci95;
};

// Integrity evidence at one bound (integrity.h): a usable fix (one with a stated radius95_m > 0)
// is misleading when its error exceeds bound_factor x radius95_m.
struct IntegrityCounts {
  double bound_factor = 1;
  int usable_fixes = 0, misleading_fixes = 0;
  // Maximal runs of misleading fixes among the usable fixes in time order (a usable fix within
  // its bound ends a run; queries without a usable fix neither end nor extend one).
  int episodes = 0, longest_episode = 0;
  // The independent trials: street segments holding a usable fix; and of those, the ones that
  // hold a misleading fix.
  int segments = 0, misleading_segments = 0;
  double fix_share = 0;                    // misleading_fixes / usable_fixes
  std::optional<Interval> fix_share_ci95;  // per segment (SegmentShareCi95)
  // One-sided Clopper-Pearson 95 % upper bound of misleading_segments / segments: with 95 %
  // confidence, at most this share of street segments holds a misleading fix. nullopt for no
  // segment.
  std::optional<double> segment_share_upper95;
};

// The alert limits availability is reported at, metres.
inline constexpr std::array<double, 4> kAlertLimitsM = {1, 2, 5, 10};

// Protection-level evidence at the fixes' own flag (protection_evidence.h says how it counts).
struct ProtectionEvidence {
  int queries = 0, protected_fixes = 0, usable = 0;
  int misleading = 0, hazardous = 0;
  int false_alerts = 0, within_levels = 0;  // of protected fixes: flagged but within; within
  std::array<double, kAlertLimitsM.size()> availability{};  // per kAlertLimitsM, of queries
  // The narrowest horizontal alert limit the protected fixes were judged at (0: none). The
  // place checks ran only for fixes usable at it: availability at a wider limit counts fixes
  // those checks never saw, an upper bound.
  double checked_at_m = 0;
  int episodes = 0;                // runs of consecutive misleading fixes
  double longest_unflagged_s = 0;  // time to alert's worst case
  int segments = 0, misleading_segments = 0;
  std::optional<double> segment_share_upper95;  // Clopper-Pearson, one-sided 95 %
  // The largest overbound the fixes carried and the drive it was fitted on ("": none fitted),
  // so a report says whether its drive is held out from the fit.
  double overbound_scale = 1;
  std::string overbound_drive;
};

// One street segment's figures, for the report's table and strip.
struct SegmentSummary {
  int index = 0;                  // StreetCut::segment
  double start_m = 0, end_m = 0;  // distance driven at its first and last query
  int queries = 0, fixes = 0, refined = 0;
  int misleading = 0;  // fixes beyond their radius95
  double availability = 0, refined_share = 0;
  double median_error_m = -1;  // over its fixes; -1 without a fix
};

struct SummaryOptions {
  // The street segments' length, metres of distance driven. 50 m: about a block face of the
  // demo town and 10 frames at its 5 m query spacing, long enough that a hard stretch (a
  // look-alike facade, a dark corner) mostly stays inside one segment, short enough that a
  // 1 km drive gives about 20 segments for the bootstrap (DEVELOPERS.md "Evaluator: decisions"
  // has the measured correlation).
  double segment_length_m = 50;
  // InvalidArgument naming the field unless segment_length_m is finite and > 0.
  Status Validate() const;
};

struct RouteSummary {
  int queries = 0, fixes = 0, refined = 0, coarse = 0, none = 0, failed_calls = 0;
  double refined_share = 0, availability = 0;
  double recall_at_1 = 0, recall_at_5 = 0, recall_at_10 = 0;
  ErrorStats all;  // over every fix
  // Over refined fixes (the accuracy goals' figures).
  double median_error_m = 0, p90_error_m = 0, p95_error_m = 0, max_error_m = 0;
  double median_heading_error_deg = 0;
  double radius95_coverage = 0, nees_mean = 0;
  double median_abs_along_track_m = 0, median_abs_cross_track_m = 0;
  int wrong_refined = 0;
  double wrong_refined_share = 0;  // of refined fixes
  double within_0_25m_2deg = 0, within_0_5m_5deg = 0, within_5m_10deg = 0;
  double latency_ms_p50 = 0, latency_ms_p95 = 0, latency_ms_p99 = 0;
  // 95 % intervals of the rates and of the refined fixes' figures (as ErrorStats'), per segment.
  std::optional<Interval> refined_share_ci95, availability_ci95, recall_at_5_ci95;
  std::optional<Interval> median_error_m_ci95, p95_error_m_ci95, radius95_coverage_ci95;
  std::optional<Interval> median_abs_along_track_m_ci95, median_abs_cross_track_m_ci95;
  std::optional<Interval> recall_at_1_ci95, recall_at_10_ci95, wrong_refined_share_ci95;
  std::array<std::optional<Interval>, 3> pose_bin_ci95;  // kPoseBins' order
  FunnelCounts funnel;  // every query that ran, in exactly one stage
  // The street segments the intervals read (SummaryOptions), in driving order.
  double segment_length_m = 0;
  std::vector<SegmentSummary> segments;
  IntegrityCounts misleading;         // error > radius95
  IntegrityCounts confidently_wrong;  // error > 3 x radius95
  ProtectionEvidence protection;      // at the fixes' protection levels and flag
};

// The three pose bins of Sattler et al. (CVPR 2018) under names of our own, finest first: a
// query counts in a bin when its fix lies within both bounds of the truth. Text outputs name a
// bin by its label; summary.json keeps the key.
struct PoseBin {
  const char* name;         // "fine", "medium", "rough"
  const char* summary_key;  // e.g. "within_0_25m_2deg"
  double max_error_m;       // horizontal
  double max_heading_error_deg;
};
inline constexpr PoseBin kPoseBins[3] = {{"fine", "within_0_25m_2deg", 0.25, 2},
                                         {"medium", "within_0_5m_5deg", 0.5, 5},
                                         {"rough", "within_5m_10deg", 5, 10}};
// "fine (0.25 m, 2 deg)": the name and the bounds.
std::string PoseBinLabel(const PoseBin& bin);
// The shares of all queries in each bin of s, in kPoseBins' order.
std::array<double, 3> PoseBinShares(const RouteSummary& s);

// Nearest-rank percentile (0 < q <= 1) of values; 0 for none.
double Percentile(std::vector<double> values, double q);

Result<std::vector<QueryResult>> RunDrive(const LocateFn& locate, const RouteEvalOptions& options);
Result<std::vector<QueryResult>> RunDrive(const Localizer& localizer,
                                          const RouteEvalOptions& options);
// Fills error_m, heading_error_deg, nees and first_hit_rank of q from q->truth and q->fix.
void ScoreQuery(QueryResult* q);
// Below this many street segments text outputs warn that the intervals are rough
// (interval_stats.h BlockBootstrapInterval: with fewer than about 20 blocks they run narrow).
inline constexpr int kFewSegments = 20;

// Over the queries that ran. REQUIRES: options.Validate() is OK.
RouteSummary Summarize(const std::vector<QueryResult>& results, const SummaryOptions& options = {});
// Which intervals are which, in one line for text outputs: the tags IntervalTag prints, the
// units (street segments), that p90 and the maximum have none.
std::string IntervalLegend(const RouteSummary& s);
// The method of an interval as text outputs print it beside the interval: "seg" (block
// bootstrap over street segments), "W" (Wilson, one trial per segment), "CP" (Clopper-Pearson);
// "" otherwise.
const char* IntervalTag(const Interval& ci);

// One line: "N queries: refined X % [lo, hi] seg (coarse N, none N), availability X % [lo, hi] seg;
// error median X m [lo, hi], p90 ... m, p95 X m [lo, hi], ...; pose fine (0.25 m, 2 deg) X,
// medium (0.5 m, 5 deg) X, rough (5 m, 10 deg) X; ...; misleading N of N usable (N episodes,
// N of N segments, bound X); confidently wrong ...; [lo, hi]: 95 % intervals", an interval
// "[-]" when its figure has no data.
std::string SummaryLine(const RouteSummary& s);
// " [lo, hi] TAG" with both ends times `scale` printed with `format` (one conversion for a
// double, e.g. "%.1f") and IntervalTag's tag (none when empty); " [-]" when ci is nullopt.
std::string IntervalText(const std::optional<Interval>& ci, double scale, const char* format);
// "retrieval N (X % [lo, hi] seg), verification ..., pose ..., refined ..., failed_call N (...)".
std::string FunnelLine(const FunnelCounts& f);

// The spoofing monitor over a replayed drive: each refined fix against the GNSS fix of its
// time, in time order; scored against the true spoofed spans.
struct SpoofingRun {
  std::vector<MonitorStep> steps;
  SpoofingScore score;
  std::vector<SpoofedSpan> scored;  // the true spans the replay covered, in start order (as scored)
};
SpoofingRun MonitorDrive(const std::vector<QueryResult>& results, const std::vector<GnssFix>& gnss,
                         const std::vector<SpoofedSpan>& truth,
                         const SpoofingMonitorOptions& options = {});

}  // namespace sightfix
