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
//  - 95 % intervals (interval_stats.h; nullopt when a figure has no data): Wilson score
//    intervals for refined share, availability, recall@5 and radius95 coverage, reading the
//    queries (fixes) as independent trials, which neighbouring frames are not, so these are
//    optimistic (too narrow); block bootstrap percentile intervals (B = 2000, seed 1) for the
//    median and p95 error and the median |along| and |cross|, a block being the fixes among a run
//    of 10 consecutive queries in the results' order (drive.csv's), so a drive of fewer than 10
//    queries gets a zero-width one;
//  - failure funnel: the stage where each query stopped (FunnelStage, StageOf), counts and shares
//    of all queries with Wilson intervals.
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
  std::array<std::optional<Interval>, kFunnelStageCount> share_ci95;  // Wilson
};

struct ErrorStats {
  int n = 0;
  double median_m = 0, p90_m = 0, p95_m = 0, max_m = 0;
  double median_heading_deg = 0;
  double radius95_coverage = 0, nees_mean = 0;
  double median_abs_along_m = 0, median_abs_cross_m = 0;  // medians of |along|, |cross|
  // 95 % intervals: medians and p95 by block bootstrap, radius95 coverage by Wilson.
  std::optional<Interval> median_m_ci95, p95_m_ci95, radius95_coverage_ci95;
  std::optional<Interval> median_abs_along_m_ci95, median_abs_cross_m_ci95;
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
  double within_0_25m_2deg = 0, within_0_5m_5deg = 0, within_5m_10deg = 0;
  double latency_ms_p50 = 0, latency_ms_p95 = 0, latency_ms_p99 = 0;
  // 95 % intervals of the rates (Wilson) and of the refined fixes' figures (as ErrorStats').
  std::optional<Interval> refined_share_ci95, availability_ci95, recall_at_5_ci95;
  std::optional<Interval> median_error_m_ci95, p95_error_m_ci95, radius95_coverage_ci95;
  std::optional<Interval> median_abs_along_track_m_ci95, median_abs_cross_track_m_ci95;
  std::optional<Interval> recall_at_1_ci95, recall_at_10_ci95;  // Wilson
  std::array<std::optional<Interval>, 3> pose_bin_ci95;         // Wilson, kPoseBins' order
  FunnelCounts funnel;  // every query that ran, in exactly one stage
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
// Over the queries that ran.
RouteSummary Summarize(const std::vector<QueryResult>& results);
// Which intervals are which, in one line for text outputs: Wilson reads queries as independent,
// the block bootstrap respects neighbouring frames; p90 and the maximum have none.
extern const char kIntervalLegend[];

// One line: "N queries: refined X % [lo, hi] (coarse N, none N), availability X % [lo, hi];
// error median X m [lo, hi], p90 ... m, p95 X m [lo, hi], ...; pose fine (0.25 m, 2 deg) X,
// medium (0.5 m, 5 deg) X, rough (5 m, 10 deg) X; ...; [lo, hi]: 95 % intervals", an interval
// "[-]" when its figure has no data.
std::string SummaryLine(const RouteSummary& s);
// " [lo, hi]" with both ends times `scale` printed with `format` (one conversion for a double,
// e.g. "%.1f"); " [-]" when ci is nullopt.
std::string IntervalText(const std::optional<Interval>& ci, double scale, const char* format);
// "retrieval N (X % [lo, hi]), verification ..., pose ..., refined ..., failed_call N (...)".
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
