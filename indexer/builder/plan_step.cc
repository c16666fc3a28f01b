// plan (map_builder.h): every survey row checked, rows grouped by tile with their context
// frames, tiles dealt to shards by work.
#include <algorithm>
#include <cmath>
#include <map>
#include <memory>

#include "indexer/base/parallel.h"
#include "indexer/base/progress.h"
#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"
#include "indexer/builder/staging.h"

namespace sightfix::staging {
namespace {

namespace fs = std::filesystem;
using namespace build_internal;

using RowsByTile = std::map<TileKey, std::vector<int>>;

json RowJson(const Survey& s, size_t i, const std::string& sha) {
  const DriveRow& r = s.rows[i];
  return {{"image", r.image},
          {"camera", s.camera_of_row[i]},
          {"t", r.timestamp_s},
          {"lat", r.position.lat_deg},
          {"lon", r.position.lon_deg},
          {"h", r.position.height_m},
          {"heading", r.attitude.heading_deg},
          {"pitch", r.attitude.pitch_deg},
          {"roll", r.attitude.roll_deg},
          {"sigma_h", r.sigma_h_m},
          {"attitude_sigma", s.attitude_sigma_deg[i]},
          {"origin", s.origin.size() > i ? s.origin[i] : std::string()},
          {"sha256", sha}};
}

std::string ImagePath(const BuildOptions& o, const Survey& s, size_t i) {
  return (fs::path(o.drive_dir) / s.rows[i].image).string();
}

// Every image readable, none twice (by the SHA-256 of its bytes); bad rows dropped (skip_bad) or
// fatal. *kept_sha: the SHA-256 of each row kept.
Status CheckImages(const BuildOptions& o, Survey* s, std::vector<std::string>* kept_sha,
                   std::vector<std::string>* skipped) {
  const size_t n = s->rows.size();
  std::vector<std::string> sha(n);
  std::vector<Status> status(n);
  std::unique_ptr<Progress> progress;
  if (o.progress) progress = std::make_unique<Progress>("plan: survey images checked", n);
  ParallelFor(static_cast<int>(n), ThreadCount(o.jobs), [&](int i) {
    Result<std::string> digest = Sha256OfFile(ImagePath(o, *s, i));
    if (digest.ok())
      sha[i] = *digest;
    else
      status[i] = Status::InvalidArgument(Where(*s, i) + "cannot read or decode image " +
                                          ImagePath(o, *s, i));
    if (progress) progress->Advance();
  });
  if (progress) progress->Finish();
  std::map<std::string, size_t> first_of;
  for (size_t i = 0; i < n; ++i) {
    if (!status[i].ok()) continue;
    auto [it, fresh] = first_of.emplace(sha[i], i);
    if (!fresh)
      status[i] = Status::InvalidArgument(Where(*s, i) + ImagePath(o, *s, i) +
                                          " is the same image as " + ImagePath(o, *s, it->second));
  }
  for (size_t i = 0; i < n; ++i)
    if (status[i].ok()) kept_sha->push_back(sha[i]);
  return DropBadRows(o, status, s, skipped);
}

// The calibration files, in the order LoadCameras numbered them, with their SHA-256s.
Result<json> CameraFiles(const BuildOptions& o, const Survey& s) {
  std::vector<std::string> camera_file(s.cameras.size());
  for (size_t i = 0; i < s.rows.size(); ++i) camera_file[s.camera_of_row[i]] = s.rows[i].camera;
  json cameras = json::array();
  for (const std::string& f : camera_file) {
    Result<std::string> digest = Sha256OfFile((fs::path(o.drive_dir) / f).string());
    if (!digest.ok()) return digest.status();
    cameras.push_back({{"file", f}, {"sha256", *digest}});
  }
  return cameras;
}

// Own frames by the tile of their surveyed position.
RowsByTile OwnFrames(const BuildOptions& o, const Survey& s) {
  RowsByTile own;
  for (size_t i = 0; i < s.rows.size(); ++i)
    own[TileForPoint(s.rows[i].position.lat_deg, s.rows[i].position.lon_deg, o.zoom)].push_back(
        static_cast<int>(i));
  return own;
}

// Context frames: within margin_m of another tile's bounds (a box in degrees, enough at street
// scale), for the tiles that have own frames.
RowsByTile ContextFrames(const BuildOptions& o, const Survey& s, const RowsByTile& own) {
  RowsByTile context;
  constexpr double kMetresPerDegree = 111320.0;  // common practice, at the equator
  for (size_t i = 0; i < s.rows.size(); ++i) {
    const GeoPoint& p = s.rows[i].position;
    const double dlat = o.margin_m / kMetresPerDegree;
    const double dlon =
        o.margin_m / (kMetresPerDegree * std::max(0.01, std::cos(p.lat_deg * M_PI / 180)));
    const TileKey mine = TileForPoint(p.lat_deg, p.lon_deg, o.zoom);
    const TileKey nw =
        TileForPoint(std::min(85.0, p.lat_deg + dlat), std::max(-180.0, p.lon_deg - dlon), o.zoom);
    const TileKey se =
        TileForPoint(std::max(-85.0, p.lat_deg - dlat), std::min(180.0, p.lon_deg + dlon), o.zoom);
    for (uint32_t x = nw.x; x <= se.x; ++x)
      for (uint32_t y = nw.y; y <= se.y; ++y) {
        const TileKey k{o.zoom, x, y};
        if (k == mine || !own.count(k)) continue;
        const TileBounds b = BoundsOfTile(k);
        if (p.lat_deg < b.south_deg - dlat || p.lat_deg > b.north_deg + dlat ||
            p.lon_deg < b.west_deg - dlon || p.lon_deg > b.east_deg + dlon)
          continue;
        context[k].push_back(static_cast<int>(i));
      }
  }
  return context;
}

// Tiles to shards (1-based), largest work (own plus context frames) first, each to the least
// loaded shard; *images_per_shard gets each shard's work.
std::map<TileKey, int> DealToShards(const RowsByTile& own, RowsByTile& context, int shards,
                                    std::vector<int>* images_per_shard) {
  std::vector<TileKey> by_work;
  for (const auto& [k, rows] : own) by_work.push_back(k);
  auto work = [&](const TileKey& k) { return own.at(k).size() + context[k].size(); };
  std::stable_sort(by_work.begin(), by_work.end(),
                   [&](const TileKey& a, const TileKey& b) { return work(a) > work(b); });
  std::map<TileKey, int> shard_of;
  images_per_shard->assign(shards, 0);
  for (const TileKey& k : by_work) {
    const int least =
        static_cast<int>(std::min_element(images_per_shard->begin(), images_per_shard->end()) -
                         images_per_shard->begin());
    shard_of[k] = least + 1;
    (*images_per_shard)[least] += static_cast<int>(work(k));
  }
  return shard_of;
}

// The plan's jobs, in tile key order.
json Jobs(const RowsByTile& own, RowsByTile& context, const std::map<TileKey, int>& shard_of) {
  json jobs = json::array();
  for (const auto& [k, rows] : own)
    jobs.push_back(
        {{"tile", KeyJson(k)}, {"shard", shard_of.at(k)}, {"rows", rows}, {"context", context[k]}});
  return jobs;
}

}  // namespace

Result<json> PlanImpl(const BuildOptions& o, int shards, PlanSummary* summary,
                      FeatureCache* cache) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (shards < 1) return Status::InvalidArgument("shards must be >= 1");
  if (!(o.margin_m >= 0)) return Status::InvalidArgument("margin_m must be >= 0");
  Result<int> version = NextMapVersion(o);
  if (!version.ok()) return version.status();
  std::string format;
  Result<Survey> read = ReadRows(o, &format, &summary->skipped);
  if (!read.ok()) return read.status();
  Survey s = std::move(read).value();
  std::vector<std::string> kept_sha;
  if (Status st = CheckImages(o, &s, &kept_sha, &summary->skipped); !st.ok()) return st;
  if (s.rows.empty()) return Status::InvalidArgument(o.drive_dir + ": no usable survey image");
  Result<json> files = CameraFiles(o, s);
  if (!files.ok()) return files.status();
  json cameras = std::move(files).value();
  const Stopwatch calibration(o.env);
  if (Status st = CalibrateSurveyCameras(o, s, &cameras, cache); !st.ok()) return st;
  summary->calibration_s = calibration.Seconds();
  const RowsByTile own = OwnFrames(o, s);
  RowsByTile context = ContextFrames(o, s, own);
  const std::map<TileKey, int> shard_of =
      DealToShards(own, context, shards, &summary->images_per_shard);
  json rows = json::array();
  for (size_t i = 0; i < s.rows.size(); ++i) rows.push_back(RowJson(s, i, kept_sha[i]));
  json plan{{"format", kPlanFormat},
            {"format_version", kPlanFormatVersion},
            {"map_dir", fs::absolute(o.map_dir).lexically_normal().string()},
            {"drive", fs::absolute(o.drive_dir).lexically_normal().string()},
            {"input_format", format},
            {"map_version", *version},
            {"created_utc", NowIsoUtc(o.env)},
            {"zoom", o.zoom},
            {"margin_m", o.margin_m},
            {"max_features", o.features.max_features},
            {"skip_bad", o.skip_bad},
            {"shards", shards},
            {"cameras", cameras},
            {"rows", rows},
            {"skipped", summary->skipped},
            {"jobs", Jobs(own, context, shard_of)}};
  const std::string content = plan.dump();
  summary->plan_id = Sha256Hex(content.data(), content.size()).substr(0, 16);
  plan["plan_id"] = summary->plan_id;
  summary->images = static_cast<int>(s.rows.size());
  summary->tiles = static_cast<int>(own.size());
  summary->shards = shards;
  summary->map_version = *version;
  return plan;
}

}  // namespace sightfix::staging

namespace sightfix {

std::string DefaultPlanPath(const std::string& map_dir) {
  return (staging::StagingDir(map_dir) / "plan.json").string();
}

Result<PlanSummary> PlanStep(const BuildOptions& options, const std::string& plan_path,
                             int shards) {
  PlanSummary summary;
  Result<nlohmann::json> plan = staging::PlanImpl(options, shards, &summary);
  if (!plan.ok()) return plan.status();
  if (Status st = staging::WriteJson(options.env, plan_path, *plan); !st.ok()) return st;
  summary.plan_file = plan_path;
  return summary;
}

}  // namespace sightfix
