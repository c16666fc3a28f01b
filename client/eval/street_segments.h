// Street segments of a replayed drive: the truth track cut, by distance driven, into pieces of
// one length. They are the evaluator's independent units: the blocks of every bootstrap interval
// (route_eval.h) and the trials of the integrity bound (integrity.h).
//
// Why by distance driven and not by time or by query count: a localizer's errors follow the
// place (the facades in view, the survey images near it), so two frames taken at the same
// place are alike whether the car stopped there or drove past; distance measures how far the
// view has changed. Why one fixed length and not route legs: the demo drives and most logs do
// not mark legs, fixed lengths give equal-weight blocks, and the length can be set per run
// (sightfix replay --segment-m). Limits: a drive that passes one street twice gets two
// segments for it, which share the map there, so they are not fully independent; an error
// episode that straddles a boundary is split over two segments.
// Pure functions; thread-compatible.
#pragma once

#include <cstddef>
#include <functional>
#include <optional>
#include <vector>

#include "client/eval/interval_stats.h"
#include "client/eval/route_eval.h"

namespace sightfix {

// The cut of the results of one drive (RunDrive's, in any order), index by index.
struct StreetCut {
  double length_m = 0;
  // Per entry: its segment, floor(driven_m / length_m), so segment k covers distances driven in
  // [k L, (k + 1) L); -1 for a query that did not run. A stretch with no query (frames further
  // apart than L) has no segment, so the indices that occur need not be consecutive.
  std::vector<int> segment;
  // Per entry: the distance driven along the truth track (geodesic between consecutive true
  // positions of the queries that ran, in time order) from the first query that ran; 0 when it
  // did not run.
  std::vector<double> driven_m;
  // The distinct segments that hold a query, ascending.
  std::vector<int> segments;
  // The entries that ran, in time order (truth timestamps; ties in results' order).
  std::vector<size_t> order;
};

// REQUIRES: length_m > 0 and finite (SummaryOptions::Validate checks it). Queries with equal
// timestamps keep their order in results.
StreetCut CutStreetSegments(const std::vector<QueryResult>& results, double length_m);

// value(i) of every entry i of the results that ran and for which take(i) holds, one block per
// segment that has such an entry, in segment order: the blocks of BlockBootstrapInterval.
std::vector<std::vector<double>> SegmentBlocks(const StreetCut& cut,
                                               const std::function<bool(size_t)>& take,
                                               const std::function<double(size_t)>& value);

// Below this many segments a bootstrap interval is not computed (nullopt): one block resamples
// to itself. BlockBootstrapInterval's note applies above it: with fewer than about 20 blocks the
// interval is rough and tends to be too narrow (text outputs say so, route_eval.h).
inline constexpr int kMinBootstrapSegments = 2;

// The 95 % interval of a share: the trials are the entries i that ran with trial(i), the
// successes those of them with success(i), all read per street segment.
//  - 0 < successes < trials, at least kMinBootstrapSegments segments with a trial: the block
//    bootstrap percentile interval (BlockBootstrapInterval, B = 2000, seed 1) of the share, each
//    segment's 0/1 outcomes one block (method kBlockBootstrap);
//  - a share of 0 or 1: every resample gives the same share, so the bootstrap cannot say how
//    sure it is; the Wilson interval with one trial per segment, 0 of S or S of S, S the
//    segments with a trial (method kWilson): as if each segment were one independent trial,
//    which a segment whose frames all agree is at least;
//  - nullopt when there is no trial, or one segment and a share strictly between 0 and 1.
std::optional<Interval> SegmentShareCi95(const StreetCut& cut,
                                         const std::function<bool(size_t)>& trial,
                                         const std::function<bool(size_t)>& success);

// The block bootstrap 95 % interval of a statistic of values grouped by segment (SegmentBlocks);
// nullopt with fewer than kMinBootstrapSegments blocks.
std::optional<Interval> SegmentBootstrapCi95(const std::vector<std::vector<double>>& blocks,
                                             const SampleStatistic& statistic);

}  // namespace sightfix
