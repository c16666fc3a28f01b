#include "client/route_eval.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <opencv2/imgcodecs.hpp>
#include <random>

#include "indexer/geo.h"
#include "indexer/parallel.h"

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

void Score(QueryResult* q) {
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
  if (f.quality != FixQuality::kRefined) return;
  const double az = g.azimuth1_deg * M_PI / 180;  // error vector east/north
  const cv::Vec2d e(g.distance_m * std::sin(az), g.distance_m * std::cos(az));
  q->nees = (e.t() * f.covariance_en.inv(cv::DECOMP_SVD) * e)(0);
}

}  // namespace

double Percentile(std::vector<double> v, double q) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  const size_t rank = static_cast<size_t>(std::ceil(q * v.size()));
  return v[std::clamp<size_t>(rank, 1, v.size()) - 1];
}

Result<std::vector<QueryResult>> RunDrive(const Localizer& localizer, const RouteEvalOptions& o) {
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
  const std::vector<PriorCircle> priors = NoisyPriors(truth, o);
  std::vector<QueryResult> out(truth.size());
  ParallelFor(static_cast<int>(truth.size()), ThreadCount(o.jobs), [&](int i) {
    QueryResult& q = out[i];
    q.truth = truth[i];
    LocateRequest req;
    req.camera = cameras[truth[i].camera];
    req.capture_time_s = truth[i].timestamp_s;
    req.image = cv::imread((dir / truth[i].image).string(), cv::IMREAD_GRAYSCALE);
    if (o.prior == PriorMode::kNoisy) req.prior = priors[i];
    Result<Fix> fix = req.image.empty()
                          ? Result<Fix>(Status::InvalidArgument("cannot read " + truth[i].image))
                          : localizer.Locate(req);
    if (!fix.ok()) {
      q.error = fix.status().ToString();
      return;
    }
    q.fix = std::move(fix).value();
    Score(&q);
  });
  return out;
}

RouteSummary Summarize(const std::vector<QueryResult>& results) {
  RouteSummary s;
  s.queries = static_cast<int>(results.size());
  if (s.queries == 0) return s;
  std::vector<double> errors, headings, latency;
  int r1 = 0, r5 = 0, r10 = 0, covered = 0, b1 = 0, b2 = 0, b3 = 0;
  double nees = 0;
  for (const QueryResult& q : results) {
    latency.push_back(q.fix.timings.total_ms);
    r1 += q.first_hit_rank >= 1 && q.first_hit_rank <= 1;
    r5 += q.first_hit_rank >= 1 && q.first_hit_rank <= 5;
    r10 += q.first_hit_rank >= 1 && q.first_hit_rank <= 10;
    const FixQuality quality = q.fix.quality;
    s.none += quality == FixQuality::kNone;
    s.coarse += quality == FixQuality::kCoarse;
    if (quality != FixQuality::kRefined) continue;
    ++s.refined;
    errors.push_back(q.error_m);
    headings.push_back(q.heading_error_deg);
    s.wrong_refined += q.error_m > kWrongRefinedM;
    covered += q.error_m <= q.fix.radius95_m;
    nees += q.nees;
    b1 += q.error_m <= 0.25 && q.heading_error_deg <= 2;
    b2 += q.error_m <= 0.5 && q.heading_error_deg <= 5;
    b3 += q.error_m <= 5 && q.heading_error_deg <= 10;
  }
  const double n = s.queries;
  s.refined_share = s.refined / n;
  s.availability = (s.refined + s.coarse) / n;
  s.recall_at_1 = r1 / n, s.recall_at_5 = r5 / n, s.recall_at_10 = r10 / n;
  s.median_error_m = Percentile(errors, 0.5);
  s.p90_error_m = Percentile(errors, 0.9);
  s.p95_error_m = Percentile(errors, 0.95);
  s.max_error_m = Percentile(errors, 1.0);
  s.median_heading_error_deg = Percentile(headings, 0.5);
  s.within_0_25m_2deg = b1 / n, s.within_0_5m_5deg = b2 / n, s.within_5m_10deg = b3 / n;
  s.radius95_coverage = s.refined ? double(covered) / s.refined : 0;
  s.nees_mean = s.refined ? nees / s.refined : 0;
  s.latency_ms_p50 = Percentile(latency, 0.5);
  s.latency_ms_p95 = Percentile(latency, 0.95);
  s.latency_ms_p99 = Percentile(latency, 0.99);
  return s;
}

std::string SummaryLine(const RouteSummary& s) {
  char buf[512];
  std::snprintf(buf, sizeof(buf),
                "%d queries: refined %.1f %% (coarse %d, none %d); error median %.3f m, p90 %.3f "
                "m, p95 %.3f m, max %.3f m; wrong refined %d; heading median %.2f deg; recall@1/5 "
                "%.3f/%.3f; bins %.3f/%.3f/%.3f; radius95 coverage %.3f, NEES %.2f; latency p50 "
                "%.0f ms, p95 %.0f ms",
                s.queries, 100 * s.refined_share, s.coarse, s.none, s.median_error_m, s.p90_error_m,
                s.p95_error_m, s.max_error_m, s.wrong_refined, s.median_heading_error_deg,
                s.recall_at_1, s.recall_at_5, s.within_0_25m_2deg, s.within_0_5m_5deg,
                s.within_5m_10deg, s.radius95_coverage, s.nees_mean, s.latency_ms_p50,
                s.latency_ms_p95);
  return buf;
}

}  // namespace sightfix
