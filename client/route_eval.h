// Replays a query drive with ground truth through the engine (in process) and measures it with
// the field's metrics. The core of the evaluator; tests use it for the accuracy goals.
//
// Metrics and sources:
//  - recall@N within 25 m: a query counts when one of its N best retrieval candidates lies
//    within 25 m of the truth (Arandjelovic et al., NetVLAD, CVPR 2016; Torii et al. 2013);
//  - horizontal error of refined fixes: median, p90, p95, max (nearest-rank percentiles);
//  - wrong refined: refined fixes more than 5 m off (must be 0);
//  - pose bins (0.25 m, 2 deg), (0.5 m, 5 deg), (5 m, 10 deg) over all queries (Sattler et al.,
//    CVPR 2018);
//  - radius95 coverage: share of refined fixes with the truth inside radius95_m;
//  - NEES: mean of e^T S^-1 e over refined fixes with the reported 2x2 covariance S (a
//    chi-square of 2 dof when calibrated, so about 2).
// Thread safety: RunDrive runs `jobs` threads of its own over one Localizer.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "indexer/drive_manifest.h"
#include "indexer/status.h"
#include "server/localizer.h"

namespace sightfix {

enum class PriorMode { kNone, kNoisy };

struct RouteEvalOptions {
  std::string drive_dir;  // holds drive.csv (truth) and the calibration it names
  PriorMode prior = PriorMode::kNoisy;
  double prior_radius_m = 150;      // noisy: the circle's radius
  double prior_max_offset_m = 100;  // noisy: centre drawn uniformly within this of the truth
  uint64_t seed = 1;
  int limit = 0;  // first N queries only; 0 = all
  int jobs = 0;   // queries in flight; 0 = all cores
};

struct QueryResult {
  DriveRow truth;
  Fix fix;
  double error_m = -1;  // horizontal, when a fix came back
  double heading_error_deg = -1;
  double nees = -1;         // refined fixes only
  int first_hit_rank = -1;  // rank (1-based) of the first candidate within 25 m, -1 none
  std::string error;        // the engine refused the request
};

struct RouteSummary {
  int queries = 0, refined = 0, coarse = 0, none = 0;
  double refined_share = 0, availability = 0;
  double recall_at_1 = 0, recall_at_5 = 0, recall_at_10 = 0;
  double median_error_m = 0, p90_error_m = 0, p95_error_m = 0, max_error_m = 0;
  int wrong_refined = 0;
  double median_heading_error_deg = 0;
  double within_0_25m_2deg = 0, within_0_5m_5deg = 0, within_5m_10deg = 0;
  double radius95_coverage = 0, nees_mean = 0;
  double latency_ms_p50 = 0, latency_ms_p95 = 0, latency_ms_p99 = 0;
};

// Nearest-rank percentile (0 < q <= 1) of values; 0 for none.
double Percentile(std::vector<double> values, double q);

Result<std::vector<QueryResult>> RunDrive(const Localizer& localizer,
                                          const RouteEvalOptions& options);
RouteSummary Summarize(const std::vector<QueryResult>& results);
// One line: "N queries: refined X %, median ... m, p95 ... m, ...".
std::string SummaryLine(const RouteSummary& s);

}  // namespace sightfix
