// build-tiles (map_builder.h): one shard of a plan, tile by tile: features, codes, structure,
// the tile file under MAPDIR/staging/<plan id>/, then the shard's manifest, written last.
#include <algorithm>
#include <opencv2/imgcodecs.hpp>
#include <set>

#include "indexer/base/parallel.h"
#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"
#include "indexer/builder/staging.h"

namespace sightfix::staging {
namespace {

namespace fs = std::filesystem;
using namespace build_internal;

// What every tile of a shard shares.
struct ShardContext {
  const Plan* plan;
  BuildOptions o;
  const StagedModel* staged;
  std::vector<CameraModel> cameras;  // as self-calibration left them (staging.h)
  std::vector<cv::Matx33d> boresight;
  std::vector<double> time_offset_s;
  FeatureCache* cache;  // may be null
  fs::path stage;       // MAPDIR/staging/<plan id>
};

// The plan's calibrations, each checked against the SHA-256 the plan recorded, refined where
// self-calibration refined them.
Result<std::vector<CalibratedCamera>> PlanCameras(const Plan& plan) {
  std::vector<CalibratedCamera> cameras;
  for (const json& c : plan.j.at("cameras")) {
    const std::string path = (fs::path(plan.drive) / c.at("file").get<std::string>()).string();
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok()) return sha.status();
    if (*sha != c.at("sha256").get<std::string>())
      return Status(StatusCode::kFailedPrecondition, path + " changed since the plan was made");
    Result<CameraModel> cam = LoadCameraModel(path);
    if (!cam.ok()) return cam.status();
    Result<CalibratedCamera> used = CalibratedCameraOf(c, *cam);
    if (!used.ok())
      return Status::InvalidArgument(path + " in the plan: " + used.status().message());
    cameras.push_back(*used);
  }
  return cameras;
}

DriveRow RowOf(const json& r, std::string* sha, double* attitude_sigma, std::string* origin,
               int* camera) {
  DriveRow d;
  d.image = r.at("image").get<std::string>();
  d.timestamp_s = r.at("t").get<double>();
  d.position = {r.at("lat").get<double>(), r.at("lon").get<double>(), r.at("h").get<double>()};
  d.attitude = {r.at("heading").get<double>(), r.at("pitch").get<double>(),
                r.at("roll").get<double>()};
  d.sigma_h_m = r.at("sigma_h").get<double>();
  *sha = r.at("sha256").get<std::string>();
  *attitude_sigma = r.at("attitude_sigma").get<double>();
  *origin = r.at("origin").get<std::string>();
  *camera = r.at("camera").get<int>();
  return d;
}

// The tile's survey: the plan rows ALL (its frames and context frames in survey order), every
// calibration; *sha gets each row's image SHA-256.
Result<Survey> TileSurvey(const ShardContext& c, const std::vector<int>& all,
                          std::vector<std::string>* sha) {
  const json& rows = c.plan->j.at("rows");
  Survey s;
  s.cameras = c.cameras;
  s.boresight = c.boresight;
  s.time_offset_s = c.time_offset_s;
  sha->resize(all.size());
  for (size_t i = 0; i < all.size(); ++i) {
    if (all[i] < 0 || static_cast<size_t>(all[i]) >= rows.size())
      return Status::InvalidArgument("the plan names row " + std::to_string(all[i]) + ", it has " +
                                     std::to_string(rows.size()));
    double sigma = 0;
    std::string origin;
    int camera = 0;
    s.rows.push_back(RowOf(rows[all[i]], &(*sha)[i], &sigma, &origin, &camera));
    if (camera < 0 || static_cast<size_t>(camera) >= c.cameras.size())
      return Status::InvalidArgument("the plan names camera " + std::to_string(camera));
    s.attitude_sigma_deg.push_back(sigma);
    s.origin.push_back(origin);
    s.camera_of_row.push_back(camera);
  }
  return s;
}

// Row i's features: read (the bytes must be the plan's SHA), decoded and extracted.
Status ExtractRow(const ShardContext& c, const std::string& sha, size_t i, Survey* s) {
  const std::string path = (fs::path(c.plan->drive) / s->rows[i].image).string();
  const std::string bytes = ReadFileBytes(path);
  if (bytes.empty() || Sha256Hex(bytes.data(), bytes.size()) != sha)
    return Status::InvalidArgument(Where(*s, i) +
                                   (bytes.empty() ? "cannot read or decode image " + path
                                                  : path + " changed since the plan was made"));
  const cv::Mat img = cv::imdecode(
      cv::Mat(1, static_cast<int>(bytes.size()), CV_8U, const_cast<char*>(bytes.data())),
      cv::IMREAD_GRAYSCALE);
  if (img.empty())
    return Status::InvalidArgument(Where(*s, i) + "cannot read or decode image " + path);
  Result<LocalFeatures> f = ExtractFeatures(img, &c.cameras[s->camera_of_row[i]], c.o.features);
  if (!f.ok()) return Status::InvalidArgument(Where(*s, i) + path + ": " + f.status().message());
  s->features[i] = std::move(f).value();
  return Status::Ok();
}

// Every row's features, from this process's cache or extracted; a status per row.
std::vector<Status> ExtractTileFeatures(const ShardContext& c, const std::vector<std::string>& sha,
                                        Survey* s) {
  s->features.resize(s->rows.size());
  std::vector<Status> status(s->rows.size());
  ParallelFor(static_cast<int>(s->rows.size()), ThreadCount(c.o.jobs), [&](int i) {
    if (c.cache) {
      auto hit = c.cache->find(s->rows[i].image);
      if (hit != c.cache->end()) {
        // Extracted under the supplied calibration: normalized again under the one in use.
        s->features[i] = hit->second;
        NormalizeKeypoints(&c.cameras[s->camera_of_row[i]], &s->features[i]);
        return;
      }
    }
    status[i] = ExtractRow(c, sha[i], i, s);
  });
  return status;
}

// Bad frames (skip_bad) leave the tile and its structure alike; bad own frames are listed in
// *skipped. Returns the kept own frames' indices into the kept survey.
Result<std::vector<int>> KeepGoodFrames(const ShardContext& c, const std::vector<int>& all,
                                        const std::vector<int>& own,
                                        const std::vector<Status>& status, Survey* s,
                                        std::vector<std::string>* skipped) {
  std::vector<int> own_local;
  Survey kept;
  kept.cameras = std::move(s->cameras);
  kept.boresight = std::move(s->boresight);
  kept.time_offset_s = std::move(s->time_offset_s);
  const std::set<int> own_set(own.begin(), own.end());
  for (size_t i = 0; i < all.size(); ++i) {
    if (!status[i].ok()) {
      if (!c.o.skip_bad) return status[i];
      if (own_set.count(all[i])) skipped->push_back(status[i].message());
      continue;
    }
    if (own_set.count(all[i])) own_local.push_back(static_cast<int>(kept.rows.size()));
    kept.rows.push_back(s->rows[i]);
    kept.attitude_sigma_deg.push_back(s->attitude_sigma_deg[i]);
    kept.origin.push_back(s->origin[i]);
    kept.camera_of_row.push_back(s->camera_of_row[i]);
    kept.features.push_back(std::move(s->features[i]));
  }
  *s = std::move(kept);
  return own_local;
}

// The manifest entry's figures of a written tile (file, SHA-256, codes, byte counts).
Status DescribeTile(const ShardContext& c, const TileData& tile, const std::string& rel,
                    json* entry) {
  const fs::path path = c.stage / rel;
  Result<std::string> file_sha = Sha256OfFile(path.string());
  if (!file_sha.ok()) return file_sha.status();
  Result<uint64_t> file_bytes = c.o.env->FileSize(path.string());
  if (!file_bytes.ok()) return file_bytes.status();
  json image_codes = json::array();
  for (const ReferenceImage& img : tile.images)
    image_codes.push_back(HexOf(img.global_code.data(), img.global_code.size()));
  entry->update({{"file", rel},
                 {"sha256", *file_sha},
                 {"points", tile.points.size()},
                 {"codes", image_codes},
                 {"local_feature_bytes", LocalFeatureBytes(tile)},
                 {"point_bytes", PointBytes(tile)},
                 {"file_bytes", *file_bytes}});
  return Status::Ok();
}

// One job of the plan: its tile file staged and its manifest entry (images 0: every frame bad).
Result<json> BuildTile(const ShardContext& c, const json& job, ShardSummary* summary) {
  const TileKey key = KeyOf(job.at("tile"));
  const std::vector<int> own = job.at("rows").get<std::vector<int>>();
  std::vector<int> all = own;
  for (int r : job.at("context").get<std::vector<int>>()) all.push_back(r);
  std::sort(all.begin(), all.end());
  Say(c.o, "tile " + key.ToString() + ": " + std::to_string(own.size()) + " frames + " +
               std::to_string(all.size() - own.size()) + " context frames");
  std::vector<std::string> sha;
  Result<Survey> read = TileSurvey(c, all, &sha);
  if (!read.ok()) return read.status();
  Survey survey = std::move(read).value();
  Survey* s = &survey;
  const Stopwatch features(c.o.env);
  const std::vector<Status> status = ExtractTileFeatures(c, sha, s);
  const double feature_s = features.Seconds();
  Result<std::vector<int>> own_local = KeepGoodFrames(c, all, own, status, s, &summary->skipped);
  if (!own_local.ok()) return own_local.status();
  json entry{{"tile", KeyJson(key)}, {"images", own_local->size()}};
  if (own_local->empty()) return entry;
  // Every row is encoded, context frames too: FAISS's PCA runs one sgemm over the batch and
  // its last bits depend on the batch, so encoding only the tile's own rows changes its codes.
  const cv::Mat codes = EncodeAll(c.staged->model, *s);
  const EnuFrame enu(s->rows[0].position);
  BuildSummary tile_summary;
  Result<StructureResult> structure = Adjust(c.o, *s, enu, &tile_summary);
  if (!structure.ok()) return structure.status();
  const Built built{s,    &c.staged->model,   c.staged->id, codes, &*structure,
                    &enu, c.plan->map_version};
  const TileData tile = MakeTile(built, key, *own_local);
  const std::string rel = TileFileName(key, c.plan->map_version);
  if (Status st = WriteTile((c.stage / rel).string(), tile, c.o.env); !st.ok()) return st;
  if (Status st = DescribeTile(c, tile, rel, &entry); !st.ok()) return st;
  entry["structure"] = StructureSummaryJson(tile_summary.structure);
  summary->tiles++;
  summary->images += static_cast<int>(own_local->size());
  summary->points += static_cast<int>(tile.points.size());
  summary->feature_s += feature_s;
  summary->structure_s += tile_summary.structure_s;
  return entry;
}

}  // namespace

Result<ShardSummary> BuildTilesImpl(const Plan& plan, int shard, int shards,
                                    const StepOptions& step, FeatureCache* cache) {
  if (shards != plan.shards)
    return Status::InvalidArgument("the plan has " + std::to_string(plan.shards) + " shards, not " +
                                   std::to_string(shards));
  if (shard < 1 || shard > shards)
    return Status::InvalidArgument("shard must be within 1.." + std::to_string(shards));
  if (std::string error; !step.Validate(&error)) return Status::InvalidArgument(error);
  PinLibraryThreads();
  const Stopwatch total(step.env);
  Result<StagedModel> staged = LoadStagedModel(step.env, plan.map_dir);
  if (!staged.ok()) return staged.status();
  Result<std::vector<CalibratedCamera>> cameras = PlanCameras(plan);
  if (!cameras.ok()) return cameras.status();
  ShardContext c{};
  c.plan = &plan, c.o = OptionsOf(plan, step), c.staged = &*staged, c.cache = cache;
  c.stage = StagingDir(plan.map_dir) / plan.id;
  for (const CalibratedCamera& cam : *cameras) {
    c.cameras.push_back(cam.camera), c.boresight.push_back(cam.boresight);
    c.time_offset_s.push_back(cam.time_offset_s);
  }
  ShardSummary summary;
  summary.shard = shard;
  summary.shards = shards;
  json tiles = json::array();
  for (const json& job : plan.j.at("jobs")) {
    if (job.at("shard").get<int>() != shard) continue;
    Result<json> entry = BuildTile(c, job, &summary);
    if (!entry.ok()) return entry.status();
    tiles.push_back(std::move(entry).value());
  }
  const json manifest{{"plan_id", plan.id},     {"shard", shard}, {"shards", shards},
                      {"model_id", staged->id}, {"tiles", tiles}, {"skipped", summary.skipped}};
  summary.manifest = (c.stage / ShardName(shard, shards)).string();
  if (Status st = WriteJson(step.env, summary.manifest, manifest); !st.ok()) return st;
  summary.seconds = total.Seconds();
  return summary;
}

}  // namespace sightfix::staging

namespace sightfix {

Result<ShardSummary> BuildTilesStep(const std::string& plan_path, int shard, int shards,
                                    const StepOptions& options) {
  Result<staging::Plan> plan = staging::LoadPlan(options.env, plan_path);
  if (!plan.ok()) return plan.status();
  return staging::BuildTilesImpl(*plan, shard, shards, options, nullptr);
}

}  // namespace sightfix
