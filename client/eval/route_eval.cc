#include "client/eval/route_eval.h"

#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <cstddef>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <functional>
#include <map>
#include <numeric>
#include <opencv2/imgcodecs.hpp>
#include <optional>
#include <random>

#include "client/eval/integrity.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/route_view.h"
#include "client/eval/street_segments.h"
#include "indexer/base/geo.h"
#include "indexer/base/parallel.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

// Recall@N's radius (Arandjelovic et al. 2016; Torii et al. 2013).
constexpr double kRecallRadiusM = 25.0;
// A refined fix further off than this is wrong (the map-and-engine issue's bound).
constexpr double kWrongRefinedM = 5.0;

// Prior circle centres, drawn before any query runs so they do not depend on thread timing.
std::vector<PriorCircle> NoisyPriors(const std::vector<DriveRow>& rows, const RouteEvalOptions& o) {
  std::mt19937_64 rng(o.seed);
  auto uniform = [&] { return static_cast<double>(rng() >> 11) * 0x1.0p-53; };
  std::vector<PriorCircle> priors;
  for (const DriveRow& r : rows) {
    const double dist = o.prior_max_offset_m * std::sqrt(uniform());  // uniform over the disc
    const double azimuth = 360.0 * uniform();
    const GeodesicDirect c = GeodesicFrom(r.position.lat_deg, r.position.lon_deg, azimuth, dist);
    priors.push_back({c.lat_deg, c.lon_deg, o.prior_radius_m});
  }
  return priors;
}

// The prior of every query under the chosen mode (nullopt: none).
Result<std::vector<std::optional<PriorCircle>>> Priors(const std::vector<DriveRow>& rows,
                                                       const RouteEvalOptions& o) {
  std::vector<std::optional<PriorCircle>> out(rows.size());
  if (o.prior == PriorMode::kNoisy) {
    const std::vector<PriorCircle> p = NoisyPriors(rows, o);
    for (size_t i = 0; i < rows.size(); ++i) out[i] = p[i];
  } else if (o.prior == PriorMode::kGnss) {
    const std::string path =
        o.gnss_csv.empty() ? (fs::path(o.drive_dir) / "gnss.csv").string() : o.gnss_csv;
    Result<std::vector<GnssFix>> gnss = ReadGnssCsv(path);
    if (!gnss.ok()) return gnss.status();
    for (size_t i = 0; i < rows.size(); ++i)
      if (std::optional<GnssFix> g = GnssAt(*gnss, rows[i].timestamp_s))
        out[i] = PriorCircle{g->lat_deg, g->lon_deg, o.gnss_sigmas * g->sigma_h_m};
  }
  return out;
}

Result<std::string> ReadBytes(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::InvalidArgument("cannot read " + path.string());
  return std::string((std::istreambuf_iterator<char>(in)), {});
}

// One query: the call, the gnss-mode retry, timing and scoring.
void RunQuery(const LocateFn& locate, const RouteEvalOptions& o, const fs::path& dir,
              const CameraModel& camera, const std::optional<PriorCircle>& prior, QueryResult* q) {
  q->ran = true;
  q->prior = prior;
  Result<std::string> bytes = ReadBytes(dir / q->truth.image);
  if (!bytes.ok()) {
    q->error = bytes.status().ToString();
    return;
  }
  LocateRequest req;
  req.camera = camera;
  req.capture_time_s = q->truth.timestamp_s;
  req.prior = prior;
  req.integrity = o.integrity;
  const auto t0 = std::chrono::steady_clock::now();
  Result<Fix> fix = locate(req, *bytes);
  if (fix.ok() && fix->quality != FixQuality::kRefined && o.prior == PriorMode::kGnss &&
      o.retry_without_prior && prior) {
    req.prior.reset();
    Result<Fix> again = locate(req, *bytes);
    if (again.ok() && again->quality == FixQuality::kRefined) {
      fix = std::move(again);
      q->retried_without_prior = true;
    }
  }
  q->latency_ms =
      std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
  if (!fix.ok()) {
    q->error = fix.status().ToString();
    return;
  }
  q->fix = std::move(fix).value();
  ScoreQuery(q);
}

// Nearest-rank q-th percentile's 95 % interval over street segments; nullopt with fewer than two.
std::optional<Interval> PercentileCi95(const std::vector<std::vector<double>>& blocks, double q) {
  return SegmentBootstrapCi95(
      blocks, [q](const std::vector<double>& sample) { return Percentile(sample, q); });
}

using EntryTest = std::function<bool(size_t)>;

// The medians of |along| and |cross| of the entries `take` selects, with their intervals.
void AlongCrossStats(const std::vector<QueryResult>& results, const StreetCut& cut,
                     const EntryTest& take, ErrorStats* s) {
  const auto along = [&](size_t i) { return std::fabs(results[i].along_track_m); };
  const auto cross = [&](size_t i) { return std::fabs(results[i].cross_track_m); };
  std::vector<double> all_along, all_cross;
  for (size_t i = 0; i < results.size(); ++i)
    if (cut.segment[i] >= 0 && take(i))
      all_along.push_back(along(i)), all_cross.push_back(cross(i));
  s->median_abs_along_m = Percentile(all_along, 0.5);
  s->median_abs_cross_m = Percentile(all_cross, 0.5);
  s->median_abs_along_m_ci95 = PercentileCi95(SegmentBlocks(cut, take, along), 0.5);
  s->median_abs_cross_m_ci95 = PercentileCi95(SegmentBlocks(cut, take, cross), 0.5);
}

// The error figures of the fixes `take` selects among the entries that ran.
ErrorStats Stats(const std::vector<QueryResult>& results, const StreetCut& cut,
                 const EntryTest& take) {
  ErrorStats s;
  std::vector<double> errors, headings;
  int covered = 0, with_nees = 0;
  double nees = 0;
  for (size_t i = 0; i < results.size(); ++i) {
    if (cut.segment[i] < 0 || !take(i)) continue;
    const QueryResult& q = results[i];
    errors.push_back(q.error_m);
    headings.push_back(q.heading_error_deg);
    covered += q.error_m <= q.fix.radius95_m;
    if (q.nees >= 0) nees += q.nees, ++with_nees;
  }
  s.n = static_cast<int>(errors.size());
  if (s.n == 0) return s;
  s.median_m = Percentile(errors, 0.5);
  s.p90_m = Percentile(errors, 0.9);
  s.p95_m = Percentile(errors, 0.95);
  s.max_m = Percentile(errors, 1.0);
  s.median_heading_deg = Percentile(headings, 0.5);
  s.radius95_coverage = static_cast<double>(covered) / s.n;
  s.nees_mean = with_nees ? nees / with_nees : 0;
  const std::vector<std::vector<double>> blocks =
      SegmentBlocks(cut, take, [&](size_t i) { return results[i].error_m; });
  s.median_m_ci95 = PercentileCi95(blocks, 0.5);
  s.p95_m_ci95 = PercentileCi95(blocks, 0.95);
  s.radius95_coverage_ci95 = SegmentShareCi95(
      cut, take, [&](size_t i) { return results[i].error_m <= results[i].fix.radius95_m; });
  AlongCrossStats(results, cut, take, &s);
  return s;
}

// Per street segment: queries, fixes, refined, misleading and the median error of its fixes.
std::vector<SegmentSummary> SegmentSummaries(const std::vector<QueryResult>& results,
                                             const StreetCut& cut) {
  std::map<int, SegmentSummary> by_index;
  std::map<int, std::vector<double>> errors;
  for (size_t i : cut.order) {
    const QueryResult& q = results[i];
    auto [it, fresh] = by_index.try_emplace(cut.segment[i]);
    SegmentSummary& g = it->second;
    if (fresh) g.index = cut.segment[i], g.start_m = cut.driven_m[i];
    g.end_m = cut.driven_m[i];
    ++g.queries;
    if (q.fix.quality == FixQuality::kNone) continue;
    ++g.fixes;
    g.refined += q.fix.quality == FixQuality::kRefined;
    g.misleading += IsMisleading(q, kMisleadingFactor);
    errors[g.index].push_back(q.error_m);
  }
  std::vector<SegmentSummary> out;
  for (auto& [index, g] : by_index) {
    g.availability = static_cast<double>(g.fixes) / g.queries;
    g.refined_share = static_cast<double>(g.refined) / g.queries;
    if (g.fixes) g.median_error_m = Percentile(errors[index], 0.5);
    out.push_back(g);
  }
  return out;
}

// The shares of all queries and their intervals: refined, availability, recall@N, pose bins,
// funnel stages; and the wrong share of refined fixes.
void Rates(const std::vector<QueryResult>& results, const StreetCut& cut, RouteSummary* s) {
  const EntryTest ran = [&](size_t i) { return results[i].ran; };
  const auto share = [&](const EntryTest& success) { return SegmentShareCi95(cut, ran, success); };
  const auto recall = [&](int n) {
    return share([&results, n](size_t i) {
      return results[i].first_hit_rank >= 1 && results[i].first_hit_rank <= n;
    });
  };
  s->refined_share_ci95 =
      share([&](size_t i) { return results[i].fix.quality == FixQuality::kRefined; });
  s->availability_ci95 =
      share([&](size_t i) { return results[i].fix.quality != FixQuality::kNone; });
  s->recall_at_1_ci95 = recall(1), s->recall_at_5_ci95 = recall(5);
  s->recall_at_10_ci95 = recall(10);
  for (size_t k = 0; k < s->pose_bin_ci95.size(); ++k)
    s->pose_bin_ci95[k] = share([&results, k](size_t i) {
      const QueryResult& q = results[i];
      return q.fix.quality != FixQuality::kNone && q.error_m <= kPoseBins[k].max_error_m &&
             q.heading_error_deg <= kPoseBins[k].max_heading_error_deg;
    });
  for (int k = 0; k < kFunnelStageCount; ++k)
    s->funnel.share_ci95[k] =
        share([&results, k](size_t i) { return static_cast<int>(StageOf(results[i])) == k; });
  s->wrong_refined_share_ci95 = SegmentShareCi95(
      cut,
      [&](size_t i) { return results[i].ran && results[i].fix.quality == FixQuality::kRefined; },
      [&](size_t i) { return results[i].error_m > kWrongRefinedM; });
}

}  // namespace

void ScoreQuery(QueryResult* q) {
  const Fix& f = q->fix;
  for (size_t i = 0; i < f.references.size() && q->first_hit_rank < 0; ++i)
    if (GeodesicBetween(q->truth.position.lat_deg, q->truth.position.lon_deg,
                        f.references[i].lat_deg, f.references[i].lon_deg)
            .distance_m <= kRecallRadiusM)
      q->first_hit_rank = static_cast<int>(i) + 1;
  if (f.quality == FixQuality::kNone) return;
  const GeodesicInverse g =
      GeodesicBetween(q->truth.position.lat_deg, q->truth.position.lon_deg, f.lat_deg, f.lon_deg);
  q->error_m = g.distance_m;
  q->heading_error_deg = std::fabs(WrapDeg180(f.heading_deg - q->truth.attitude.heading_deg));
  const double az = g.azimuth1_deg * M_PI / 180;  // error vector east/north
  const cv::Vec2d e(g.distance_m * std::sin(az), g.distance_m * std::cos(az));
  // Unit vectors of the truth's heading (clockwise from north): ahead (sin h, cos h) and to its
  // right (cos h, -sin h).
  const double h = q->truth.attitude.heading_deg * M_PI / 180;
  q->along_track_m = e[0] * std::sin(h) + e[1] * std::cos(h);
  q->cross_track_m = e[0] * std::cos(h) - e[1] * std::sin(h);
  if (cv::determinant(f.covariance_en) <= 0) return;
  q->nees = NormalizedInnovationSquared(e, f.covariance_en);
}

const char* FunnelStageName(FunnelStage stage) {
  switch (stage) {
    case FunnelStage::kRetrieval:
      return "retrieval";
    case FunnelStage::kVerification:
      return "verification";
    case FunnelStage::kPose:
      return "pose";
    case FunnelStage::kRefined:
      return "refined";
    case FunnelStage::kFailedCall:
      return "failed_call";
  }
  return "?";
}

FunnelStage StageOf(const QueryResult& q) {
  if (!q.error.empty()) return FunnelStage::kFailedCall;
  if (q.fix.quality == FixQuality::kRefined) return FunnelStage::kRefined;
  if (q.first_hit_rank < 1) return FunnelStage::kRetrieval;
  const std::vector<ReferenceUse>& refs = q.fix.references;
  if (std::none_of(refs.begin(), refs.end(), [](const ReferenceUse& u) { return u.verified; }))
    return FunnelStage::kVerification;
  return FunnelStage::kPose;
}

LocateFn InProcess(const Localizer& localizer) {
  return [&localizer](const LocateRequest& request, const std::string& bytes) -> Result<Fix> {
    LocateRequest req = request;
    req.image = cv::imdecode(
        cv::Mat(1, static_cast<int>(bytes.size()), CV_8U, const_cast<char*>(bytes.data())),
        cv::IMREAD_GRAYSCALE);
    if (req.image.empty()) return Status::InvalidArgument("cannot decode the image");
    return localizer.Locate(req);
  };
}

double Percentile(std::vector<double> v, double q) {
  if (v.empty()) return 0;
  // The rank-th smallest; nth_element keeps the bootstrap's thousands of calls linear.
  const size_t rank = std::clamp<size_t>(static_cast<size_t>(std::ceil(q * v.size())), 1, v.size());
  std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(rank - 1), v.end());
  return v[rank - 1];
}

Result<std::vector<QueryResult>> RunDrive(const LocateFn& locate, const RouteEvalOptions& o) {
  const fs::path dir(o.drive_dir);
  Result<std::vector<DriveRow>> rows = ReadDriveManifest((dir / "drive.csv").string());
  if (!rows.ok()) return rows.status();
  std::vector<DriveRow> truth = std::move(rows).value();
  if (o.limit > 0 && static_cast<int>(truth.size()) > o.limit) truth.resize(o.limit);
  std::map<std::string, CameraModel> cameras;
  for (const DriveRow& r : truth)
    if (!cameras.count(r.camera)) {
      Result<CameraModel> c = LoadCameraModel((dir / r.camera).string());
      if (!c.ok()) return c.status();
      cameras[r.camera] = *c;
    }
  Result<std::vector<std::optional<PriorCircle>>> priors = Priors(truth, o);
  if (!priors.ok()) return priors.status();
  std::vector<QueryResult> out(truth.size());
  ParallelFor(static_cast<int>(truth.size()), ThreadCount(o.jobs), [&](int i) {
    if (o.stop && o.stop->load()) return;
    out[i].truth = truth[i];
    RunQuery(locate, o, dir, cameras.at(truth[i].camera), (*priors)[i], &out[i]);
    if (o.on_query_done) o.on_query_done();
  });
  return out;
}

Result<std::vector<QueryResult>> RunDrive(const Localizer& localizer, const RouteEvalOptions& o) {
  return RunDrive(InProcess(localizer), o);
}

Status SummaryOptions::Validate() const {
  if (!(std::isfinite(segment_length_m) && segment_length_m > 0))
    return Status::InvalidArgument("SummaryOptions.segment_length_m must be finite and > 0");
  return Status::Ok();
}

RouteSummary Summarize(const std::vector<QueryResult>& results, const SummaryOptions& options) {
  RouteSummary s;
  s.segment_length_m = options.segment_length_m;
  const StreetCut cut = CutStreetSegments(results, options.segment_length_m);
  std::vector<double> latency;
  int r1 = 0, r5 = 0, r10 = 0;
  std::array<int, 3> in_bin{};
  for (const QueryResult& q : results) {
    if (!q.ran) continue;
    ++s.queries;
    ++s.funnel.count[static_cast<int>(StageOf(q))];
    latency.push_back(q.latency_ms);
    if (!q.error.empty()) ++s.failed_calls;
    r1 += q.first_hit_rank >= 1 && q.first_hit_rank <= 1;
    r5 += q.first_hit_rank >= 1 && q.first_hit_rank <= 5;
    r10 += q.first_hit_rank >= 1 && q.first_hit_rank <= 10;
    const FixQuality quality = q.fix.quality;
    s.none += quality == FixQuality::kNone;
    if (quality == FixQuality::kNone) continue;
    ++s.fixes;
    for (size_t k = 0; k < in_bin.size(); ++k)
      in_bin[k] += q.error_m <= kPoseBins[k].max_error_m &&
                   q.heading_error_deg <= kPoseBins[k].max_heading_error_deg;
    s.coarse += quality == FixQuality::kCoarse;
    s.refined += quality == FixQuality::kRefined;
    s.wrong_refined += quality == FixQuality::kRefined && q.error_m > kWrongRefinedM;
  }
  if (s.queries == 0) return s;
  const double n = s.queries;
  s.refined_share = s.refined / n;
  s.availability = s.fixes / n;
  s.recall_at_1 = r1 / n, s.recall_at_5 = r5 / n, s.recall_at_10 = r10 / n;
  if (s.refined) s.wrong_refined_share = static_cast<double>(s.wrong_refined) / s.refined;
  for (int k = 0; k < kFunnelStageCount; ++k) s.funnel.share[k] = s.funnel.count[k] / n;
  Rates(results, cut, &s);
  s.all =
      Stats(results, cut, [&](size_t i) { return results[i].fix.quality != FixQuality::kNone; });
  const ErrorStats r =
      Stats(results, cut, [&](size_t i) { return results[i].fix.quality == FixQuality::kRefined; });
  s.median_error_m = r.median_m, s.p90_error_m = r.p90_m, s.p95_error_m = r.p95_m;
  s.max_error_m = r.max_m, s.median_heading_error_deg = r.median_heading_deg;
  s.radius95_coverage = r.radius95_coverage, s.nees_mean = r.nees_mean;
  s.median_error_m_ci95 = r.median_m_ci95, s.p95_error_m_ci95 = r.p95_m_ci95;
  s.radius95_coverage_ci95 = r.radius95_coverage_ci95;
  s.median_abs_along_track_m = r.median_abs_along_m;
  s.median_abs_cross_track_m = r.median_abs_cross_m;
  s.median_abs_along_track_m_ci95 = r.median_abs_along_m_ci95;
  s.median_abs_cross_track_m_ci95 = r.median_abs_cross_m_ci95;
  s.within_0_25m_2deg = in_bin[0] / n, s.within_0_5m_5deg = in_bin[1] / n;
  s.within_5m_10deg = in_bin[2] / n;
  s.latency_ms_p50 = Percentile(latency, 0.5);
  s.latency_ms_p95 = Percentile(latency, 0.95);
  s.latency_ms_p99 = Percentile(latency, 0.99);
  s.segments = SegmentSummaries(results, cut);
  s.misleading = CountIntegrity(results, cut, kMisleadingFactor);
  s.confidently_wrong = CountIntegrity(results, cut, kConfidentlyWrongFactor);
  s.protection = CountProtection(results, cut);
  return s;
}

SpoofingRun MonitorDrive(const std::vector<QueryResult>& results, const std::vector<GnssFix>& gnss,
                         const std::vector<SpoofedSpan>& truth,
                         const SpoofingMonitorOptions& options) {
  std::vector<const QueryResult*> order;
  for (const QueryResult& q : results)
    if (q.ran && q.fix.quality == FixQuality::kRefined) order.push_back(&q);
  std::sort(order.begin(), order.end(), [](const QueryResult* a, const QueryResult* b) {
    return a->truth.timestamp_s < b->truth.timestamp_s;
  });
  SpoofingMonitor monitor(options);
  SpoofingRun run;
  for (const QueryResult* q : order) {
    const std::optional<GnssFix> g = GnssAt(gnss, q->truth.timestamp_s);
    if (!g) continue;
    run.steps.push_back(monitor.Observe(
        {g->time_s, g->lat_deg, g->lon_deg, g->sigma_h_m},
        {q->truth.timestamp_s, q->fix.lat_deg, q->fix.lon_deg, q->fix.covariance_en}));
  }
  // The replay may cover part of the drive (--limit, Ctrl-C): score the span it covered.
  TimeSpan observed{HUGE_VAL, -HUGE_VAL};
  for (const QueryResult& q : results)
    if (q.ran)
      observed = {std::min(observed.start_s, q.truth.timestamp_s),
                  std::max(observed.end_s, q.truth.timestamp_s)};
  std::vector<TimeSpan> spans;
  for (const SpoofedSpan& s : truth)
    if (s.span.start_s < observed.end_s && s.span.end_s > observed.start_s) {
      run.scored.push_back(s);
      spans.push_back(s.span);
    }
  std::sort(run.scored.begin(), run.scored.end(), [](const SpoofedSpan& a, const SpoofedSpan& b) {
    return a.span.start_s < b.span.start_s;
  });
  if (observed.end_s < observed.start_s) observed = {};
  run.score = ScoreAlarms(run.steps, spans, observed);
  return run;
}

}  // namespace sightfix
