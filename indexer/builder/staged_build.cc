// `build` as four scheduler steps: train, plan, build-tiles, publish (map_builder.h).
//
// Staging layout, all under MAPDIR/staging/:
//   model.bin, model.json          train's model (GlobalDescriptor::Serialize) and its figures
//   plan.json                      plan's default place (any path will do)
//   <plan id>/tiles/z/x/y.vN.sqlite   build-tiles' tile files
//   <plan id>/shard-I-of-N.json    build-tiles' manifest of shard I, written last
// Every file is written to a temporary name, fsynced and renamed, so a reader sees it whole or
// not at all. The plan id is the SHA-256 of the plan's content: a new plan never mixes with the
// shards of an old one.
#include <faiss/index_io.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <map>
#include <opencv2/imgcodecs.hpp>
#include <optional>
#include <set>

#include "indexer/builder/build_internal.h"
#include "indexer/builder/map_builder.h"
#include "indexer/map/map_lock.h"
#include "indexer/base/parallel.h"
#include "indexer/base/progress.h"
#include "indexer/base/rotation.h"
#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;
using json = nlohmann::json;
using namespace build_internal;

constexpr char kPlanFormat[] = "sightfix-build-plan";
constexpr int kPlanFormatVersion = 1;

fs::path StagingDir(const std::string& map_dir) { return fs::path(map_dir) / "staging"; }
fs::path ModelFile(const std::string& map_dir) { return StagingDir(map_dir) / "model.bin"; }
fs::path ModelInfoFile(const std::string& map_dir) { return StagingDir(map_dir) / "model.json"; }

std::string ShardName(int shard, int shards) {
  return "shard-" + std::to_string(shard) + "-of-" + std::to_string(shards) + ".json";
}

Status WriteJson(const fs::path& path, const json& j) {
  const std::string text = j.dump(1) + "\n";
  return WriteFileAtomically(path.string(), text.data(), text.size());
}

Result<json> ReadJson(const fs::path& path, const std::string& what) {
  const std::string text = ReadFileBytes(path.string());
  if (text.empty()) return Status::NotFound("no " + what + " at " + path.string());
  json j = json::parse(text, nullptr, false);
  if (j.is_discarded() || !j.is_object())
    return Status::InvalidArgument(path.string() + " is not a " + what + " (not JSON)");
  return j;
}

std::string HexOf(const uint8_t* p, size_t n) {
  static const char kDigits[] = "0123456789abcdef";
  std::string s(2 * n, '0');
  for (size_t i = 0; i < n; ++i) {
    s[2 * i] = kDigits[p[i] >> 4];
    s[2 * i + 1] = kDigits[p[i] & 15];
  }
  return s;
}

bool BytesOfHex(const std::string& s, uint8_t* out, size_t n) {
  if (s.size() != 2 * n) return false;
  auto nibble = [](char c) {
    return c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
  };
  for (size_t i = 0; i < n; ++i) {
    const int hi = nibble(s[2 * i]), lo = nibble(s[2 * i + 1]);
    if (hi < 0 || lo < 0) return false;
    out[i] = static_cast<uint8_t>(hi * 16 + lo);
  }
  return true;
}

// The survey's rows with their calibrations loaded (bad ones out or fatal, as o.skip_bad says).
Result<Survey> ReadRows(const BuildOptions& o, std::string* input_format,
                        std::vector<std::string>* skipped) {
  Result<SurveyRows> rows = ReadSurvey(o);
  if (!rows.ok()) return rows.status();
  *input_format = SurveyFormatName(rows->format);
  *skipped = rows->problems;
  Survey s;
  s.rows = std::move(rows->rows);
  s.attitude_sigma_deg = std::move(rows->attitude_sigma_deg);
  s.origin = std::move(rows->origin);
  if (Status st = LoadCameras(o, &s, skipped); !st.ok()) return st;
  return s;
}

// Features already extracted in this process (BuildMap), by image name.
using FeatureCache = std::map<std::string, LocalFeatures>;

// ---------------------------------------------------------------------------------- train

Result<TrainSummary> TrainImpl(const BuildOptions& o, FeatureCache* cache) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (o.train_images < 1) return Status::InvalidArgument("train_images must be >= 1");
  PinLibraryThreads();
  const auto t0 = Clock::now();
  TrainSummary summary;
  std::string format;
  Result<Survey> all = ReadRows(o, &format, &summary.skipped);
  if (!all.ok()) return all.status();
  summary.survey_images = static_cast<int>(all->rows.size());
  // Evenly spaced: every step-th row.
  const size_t n = all->rows.size();
  const size_t step = std::max<size_t>(1, (n + o.train_images - 1) / o.train_images);
  Survey sample;
  sample.cameras = all->cameras;
  for (size_t i = 0; i < n; i += step) {
    sample.rows.push_back(all->rows[i]);
    sample.attitude_sigma_deg.push_back(all->attitude_sigma_deg[i]);
    sample.origin.push_back(all->origin.empty() ? std::string() : all->origin[i]);
    sample.camera_of_row.push_back(all->camera_of_row[i]);
  }
  Say(o, "train: features of " + std::to_string(sample.rows.size()) + " of " + std::to_string(n) +
             " survey images");
  const auto t_features = Clock::now();
  if (Status st = ExtractAll(o, &sample, &summary.skipped); !st.ok()) return st;
  summary.feature_s = SecondsSince(t_features);
  summary.sampled_images = static_cast<int>(sample.rows.size());
  if (summary.sampled_images <= o.descriptor.pq_subquantizers)
    return Status::InvalidArgument(
        "a map needs more than " + std::to_string(o.descriptor.pq_subquantizers) +
        " survey images, the survey has " + std::to_string(summary.sampled_images) + " usable");
  Say(o, "train: the global descriptor model");
  Result<GlobalDescriptor> model = TrainModel(o, sample, &summary.training_vectors);
  if (!model.ok()) return model.status();
  const std::vector<uint8_t> blob = model->Serialize();
  summary.model_id = Sha256Hex(blob).substr(0, 16);
  summary.codec = model->codec_name();
  summary.model_file = ModelFile(o.map_dir).string();
  if (Status st = WriteFileAtomically(ModelFile(o.map_dir).string(), blob.data(), blob.size());
      !st.ok())
    return st;
  const json info{{"model_id", summary.model_id},
                  {"codec", summary.codec},
                  {"training_vectors", summary.training_vectors},
                  {"params", ModelParams(*model, summary.training_vectors)},
                  {"survey_images", summary.survey_images},
                  {"sampled_images", summary.sampled_images}};
  if (Status st = WriteJson(ModelInfoFile(o.map_dir), info); !st.ok()) return st;
  if (cache)
    for (size_t i = 0; i < sample.rows.size(); ++i)
      (*cache)[sample.rows[i].image] = std::move(sample.features[i]);
  summary.seconds = SecondsSince(t0);
  return summary;
}

// ----------------------------------------------------------------------------------- plan

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

json KeyJson(const TileKey& k) { return {k.zoom, k.x, k.y}; }
TileKey KeyOf(const json& j) {
  TileKey k;
  k.zoom = j.at(0).get<int>();
  k.x = j.at(1).get<uint32_t>();
  k.y = j.at(2).get<uint32_t>();
  return k;
}

Result<json> PlanImpl(const BuildOptions& o, int shards, PlanSummary* summary) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (shards < 1) return Status::InvalidArgument("shards must be >= 1");
  if (!(o.margin_m >= 0)) return Status::InvalidArgument("margin_m must be >= 0");
  Result<int> version = NextMapVersion(o);
  if (!version.ok()) return version.status();
  std::string format;
  Result<Survey> read = ReadRows(o, &format, &summary->skipped);
  if (!read.ok()) return read.status();
  Survey survey = std::move(read).value();
  Survey* s = &survey;

  // Every image readable, none twice (by the SHA-256 of its bytes).
  const size_t n = s->rows.size();
  std::vector<std::string> sha(n);
  std::vector<Status> status(n);
  std::unique_ptr<Progress> progress;
  if (o.progress) progress = std::make_unique<Progress>("plan: survey images checked", n);
  ParallelFor(static_cast<int>(n), ThreadCount(o.jobs), [&](int i) {
    const std::string path = (fs::path(o.drive_dir) / s->rows[i].image).string();
    Result<std::string> digest = Sha256OfFile(path);
    if (digest.ok())
      sha[i] = *digest;
    else
      status[i] = Status::InvalidArgument(Where(*s, i) + "cannot read or decode image " + path);
    if (progress) progress->Advance();
  });
  if (progress) progress->Finish();
  std::map<std::string, size_t> first_of;
  for (size_t i = 0; i < n; ++i) {
    if (!status[i].ok()) continue;
    auto [it, fresh] = first_of.emplace(sha[i], i);
    if (!fresh)
      status[i] = Status::InvalidArgument(
          Where(*s, i) + (fs::path(o.drive_dir) / s->rows[i].image).string() +
          " is the same image as " + (fs::path(o.drive_dir) / s->rows[it->second].image).string());
  }
  std::vector<std::string> kept_sha;
  for (size_t i = 0; i < n; ++i)
    if (status[i].ok()) kept_sha.push_back(sha[i]);
  if (Status st = DropBadRows(o, status, s, &summary->skipped); !st.ok()) return st;
  if (s->rows.empty()) return Status::InvalidArgument(o.drive_dir + ": no usable survey image");

  // The calibration files, in the order LoadCameras numbered them.
  std::vector<std::string> camera_file(s->cameras.size());
  for (size_t i = 0; i < s->rows.size(); ++i) camera_file[s->camera_of_row[i]] = s->rows[i].camera;
  json cameras = json::array();
  for (const std::string& f : camera_file) {
    Result<std::string> digest = Sha256OfFile((fs::path(o.drive_dir) / f).string());
    if (!digest.ok()) return digest.status();
    cameras.push_back({{"file", f}, {"sha256", *digest}});
  }

  // Own frames by the tile of their surveyed position; context frames within margin_m of a
  // tile's bounds (a box in degrees, enough at street scale).
  std::map<TileKey, std::vector<int>> own;
  for (size_t i = 0; i < s->rows.size(); ++i)
    own[TileForPoint(s->rows[i].position.lat_deg, s->rows[i].position.lon_deg, o.zoom)].push_back(
        static_cast<int>(i));
  std::map<TileKey, std::vector<int>> context;
  constexpr double kMetresPerDegree = 111320.0;  // common practice, at the equator
  for (size_t i = 0; i < s->rows.size(); ++i) {
    const GeoPoint& p = s->rows[i].position;
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

  // Tiles to shards, largest work first, each to the least loaded shard.
  std::vector<TileKey> keys;
  for (const auto& [k, rows] : own) keys.push_back(k);
  auto work = [&](const TileKey& k) { return own[k].size() + context[k].size(); };
  std::vector<TileKey> by_work = keys;
  std::stable_sort(by_work.begin(), by_work.end(),
                   [&](const TileKey& a, const TileKey& b) { return work(a) > work(b); });
  std::map<TileKey, int> shard_of;
  summary->images_per_shard.assign(shards, 0);
  for (const TileKey& k : by_work) {
    const int least = static_cast<int>(
        std::min_element(summary->images_per_shard.begin(), summary->images_per_shard.end()) -
        summary->images_per_shard.begin());
    shard_of[k] = least + 1;
    summary->images_per_shard[least] += static_cast<int>(work(k));
  }

  json rows = json::array();
  for (size_t i = 0; i < s->rows.size(); ++i) rows.push_back(RowJson(*s, i, kept_sha[i]));
  json jobs = json::array();
  for (const TileKey& k : keys)
    jobs.push_back(
        {{"tile", KeyJson(k)}, {"shard", shard_of[k]}, {"rows", own[k]}, {"context", context[k]}});
  json plan{{"format", kPlanFormat},
            {"format_version", kPlanFormatVersion},
            {"map_dir", fs::absolute(o.map_dir).lexically_normal().string()},
            {"drive", fs::absolute(o.drive_dir).lexically_normal().string()},
            {"input_format", format},
            {"map_version", *version},
            {"created_utc", NowIsoUtc()},
            {"zoom", o.zoom},
            {"margin_m", o.margin_m},
            {"max_features", o.features.max_features},
            {"skip_bad", o.skip_bad},
            {"shards", shards},
            {"cameras", cameras},
            {"rows", rows},
            {"skipped", summary->skipped},
            {"jobs", jobs}};
  const std::string content = plan.dump();
  summary->plan_id = Sha256Hex(content.data(), content.size()).substr(0, 16);
  plan["plan_id"] = summary->plan_id;
  summary->images = static_cast<int>(s->rows.size());
  summary->tiles = static_cast<int>(keys.size());
  summary->shards = shards;
  summary->map_version = *version;
  return plan;
}

// ---------------------------------------------------------------------------- build-tiles

struct Plan {
  json j;
  std::string id, map_dir, drive;
  int shards = 0, map_version = 0;
};

Result<Plan> LoadPlan(const std::string& path) {
  Result<json> j = ReadJson(path, "build plan");
  if (!j.ok()) return j.status();
  if (j->value("format", "") != kPlanFormat || j->value("format_version", 0) != kPlanFormatVersion)
    return Status::InvalidArgument(path + " is not a sightfix build plan of format version " +
                                   std::to_string(kPlanFormatVersion));
  Plan p;
  try {
    p.id = j->at("plan_id").get<std::string>();
    p.map_dir = j->at("map_dir").get<std::string>();
    p.drive = j->at("drive").get<std::string>();
    p.shards = j->at("shards").get<int>();
    p.map_version = j->at("map_version").get<int>();
    j->at("rows").get_ref<const json::array_t&>();
    j->at("jobs").get_ref<const json::array_t&>();
  } catch (const std::exception& e) {
    return Status::InvalidArgument(path + ": " + e.what());
  }
  p.j = std::move(j).value();
  return p;
}

// The options a plan fixes, for the shared build code.
BuildOptions OptionsOf(const Plan& p, int jobs, bool progress) {
  BuildOptions o;
  o.drive_dir = p.drive;
  o.map_dir = p.map_dir;
  o.zoom = p.j.at("zoom").get<int>();
  o.margin_m = p.j.at("margin_m").get<double>();
  o.features.max_features = p.j.at("max_features").get<int>();
  o.skip_bad = p.j.at("skip_bad").get<bool>();
  o.jobs = jobs;
  o.progress = progress;
  return o;
}

struct StagedModel {
  GlobalDescriptor model;
  std::string id;
  json info;
  std::vector<uint8_t> blob;
};

Result<StagedModel> LoadStagedModel(const std::string& map_dir) {
  const std::string bytes = ReadFileBytes(ModelFile(map_dir).string());
  if (bytes.empty())
    return Status(StatusCode::kFailedPrecondition,
                  "no trained model at " + ModelFile(map_dir).string() + " (run train first)");
  std::vector<uint8_t> blob(bytes.begin(), bytes.end());
  Result<GlobalDescriptor> model = GlobalDescriptor::Deserialize(blob);
  if (!model.ok()) return model.status();
  Result<json> info = ReadJson(ModelInfoFile(map_dir), "model summary");
  if (!info.ok()) return info.status();
  StagedModel m{std::move(model).value(), Sha256Hex(blob).substr(0, 16), std::move(info).value(),
                std::move(blob)};
  if (m.info.value("model_id", "") != m.id)
    return Status(
        StatusCode::kFailedPrecondition,
        ModelInfoFile(map_dir).string() + " does not describe " + ModelFile(map_dir).string());
  return m;
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

Result<ShardSummary> BuildTilesImpl(const Plan& plan, int shard, int shards, int jobs,
                                    bool progress, FeatureCache* cache) {
  if (shards != plan.shards)
    return Status::InvalidArgument("the plan has " + std::to_string(plan.shards) + " shards, not " +
                                   std::to_string(shards));
  if (shard < 1 || shard > shards)
    return Status::InvalidArgument("shard must be within 1.." + std::to_string(shards));
  PinLibraryThreads();
  const auto t0 = Clock::now();
  const BuildOptions o = OptionsOf(plan, jobs, progress);
  Result<StagedModel> staged = LoadStagedModel(plan.map_dir);
  if (!staged.ok()) return staged.status();
  std::vector<CameraModel> cameras;
  for (const json& c : plan.j.at("cameras")) {
    const std::string path = (fs::path(plan.drive) / c.at("file").get<std::string>()).string();
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok()) return sha.status();
    if (*sha != c.at("sha256").get<std::string>())
      return Status(StatusCode::kFailedPrecondition, path + " changed since the plan was made");
    Result<CameraModel> cam = LoadCameraModel(path);
    if (!cam.ok()) return cam.status();
    cameras.push_back(*cam);
  }
  const json& rows = plan.j.at("rows");
  const fs::path stage = StagingDir(plan.map_dir) / plan.id;
  ShardSummary summary;
  summary.shard = shard;
  summary.shards = shards;
  json tiles = json::array();
  std::vector<const json*> mine;
  for (const json& job : plan.j.at("jobs"))
    if (job.at("shard").get<int>() == shard) mine.push_back(&job);
  int written = 0;
  for (const json* job : mine) {
    const TileKey key = KeyOf(job->at("tile"));
    std::vector<int> own = job->at("rows").get<std::vector<int>>();
    std::vector<int> all = own;
    for (int r : job->at("context").get<std::vector<int>>()) all.push_back(r);
    std::sort(all.begin(), all.end());
    Say(o, "tile " + key.ToString() + ": " + std::to_string(own.size()) + " frames + " +
               std::to_string(all.size() - own.size()) + " context frames");
    // The tile's survey: its frames and context frames in survey order, every calibration.
    Survey s;
    s.cameras = cameras;
    std::vector<std::string> sha(all.size());
    for (size_t i = 0; i < all.size(); ++i) {
      if (all[i] < 0 || static_cast<size_t>(all[i]) >= rows.size())
        return Status::InvalidArgument("the plan names row " + std::to_string(all[i]) +
                                       ", it has " + std::to_string(rows.size()));
      double sigma = 0;
      std::string origin;
      int camera = 0;
      s.rows.push_back(RowOf(rows[all[i]], &sha[i], &sigma, &origin, &camera));
      if (camera < 0 || static_cast<size_t>(camera) >= cameras.size())
        return Status::InvalidArgument("the plan names camera " + std::to_string(camera));
      s.attitude_sigma_deg.push_back(sigma);
      s.origin.push_back(origin);
      s.camera_of_row.push_back(camera);
    }
    // Features: from this process's cache, else read (the bytes must be the plan's) and extract.
    auto t_features = Clock::now();
    s.features.resize(all.size());
    std::vector<Status> status(all.size());
    ParallelFor(static_cast<int>(all.size()), ThreadCount(jobs), [&](int i) {
      if (cache) {
        auto hit = cache->find(s.rows[i].image);
        if (hit != cache->end()) {
          s.features[i] = hit->second;
          return;
        }
      }
      const std::string path = (fs::path(plan.drive) / s.rows[i].image).string();
      const std::string bytes = ReadFileBytes(path);
      if (bytes.empty() || Sha256Hex(bytes.data(), bytes.size()) != sha[i]) {
        status[i] = Status::InvalidArgument(
            Where(s, i) + (bytes.empty() ? "cannot read or decode image " + path
                                         : path + " changed since the plan was made"));
        return;
      }
      const cv::Mat img = cv::imdecode(
          cv::Mat(1, static_cast<int>(bytes.size()), CV_8U, const_cast<char*>(bytes.data())),
          cv::IMREAD_GRAYSCALE);
      if (img.empty()) {
        status[i] = Status::InvalidArgument(Where(s, i) + "cannot read or decode image " + path);
        return;
      }
      Result<LocalFeatures> f = ExtractFeatures(img, &cameras[s.camera_of_row[i]], o.features);
      if (f.ok())
        s.features[i] = std::move(f).value();
      else
        status[i] = Status::InvalidArgument(Where(s, i) + path + ": " + f.status().message());
    });
    const double feature_s = SecondsSince(t_features);
    // Bad frames (skip_bad) leave the tile and its structure alike.
    std::vector<int> own_local;
    {
      Survey kept;
      kept.cameras = std::move(s.cameras);
      std::set<int> own_set(own.begin(), own.end());
      for (size_t i = 0; i < all.size(); ++i) {
        if (!status[i].ok()) {
          if (!o.skip_bad) return status[i];
          if (own_set.count(all[i])) summary.skipped.push_back(status[i].message());
          continue;
        }
        if (own_set.count(all[i])) own_local.push_back(static_cast<int>(kept.rows.size()));
        kept.rows.push_back(s.rows[i]);
        kept.attitude_sigma_deg.push_back(s.attitude_sigma_deg[i]);
        kept.origin.push_back(s.origin[i]);
        kept.camera_of_row.push_back(s.camera_of_row[i]);
        kept.features.push_back(std::move(s.features[i]));
      }
      s = std::move(kept);
    }
    json entry{{"tile", KeyJson(key)}, {"images", own_local.size()}};
    if (own_local.empty()) {  // every frame bad: no tile
      tiles.push_back(entry);
      continue;
    }
    // Every row is encoded, context frames too: FAISS's PCA runs one sgemm over the batch and
    // its last bits depend on the batch, so encoding only the tile's own rows changes its codes.
    const cv::Mat codes = EncodeAll(staged->model, s);
    const EnuFrame enu(s.rows[0].position);
    BuildSummary tile_summary;
    Result<StructureResult> structure = Adjust(o, s, enu, &tile_summary);
    if (!structure.ok()) return structure.status();
    const Built built{&s, &staged->model, staged->id, codes, &*structure, &enu, plan.map_version};
    const TileData tile = MakeTile(built, key, own_local);
    const std::string rel = TileFileName(key, plan.map_version);
    const fs::path path = stage / rel;
    std::error_code ec;
    fs::create_directories(path.parent_path(), ec);
    if (Status st = WriteTile(path.string(), tile); !st.ok()) return st;
    MaybeKillAt("tile:" + std::to_string(++written));
    Result<std::string> file_sha = Sha256OfFile(path.string());
    if (!file_sha.ok()) return file_sha.status();
    json image_codes = json::array();
    double local_bytes = 0;
    for (const ReferenceImage& img : tile.images) {
      image_codes.push_back(HexOf(img.global_code.data(), img.global_code.size()));
      local_bytes += img.normalized.size() * (sizeof(cv::Point2f) + 128 + sizeof(int32_t));
    }
    entry.update({{"file", rel},
                  {"sha256", *file_sha},
                  {"points", tile.points.size()},
                  {"codes", image_codes},
                  {"local_feature_bytes", local_bytes},
                  {"point_bytes", tile.points.size() * (3 * 8 + 6 * 4 + 128 + 4.0)},
                  {"file_bytes", fs::file_size(path)},
                  {"structure", StructureSummaryJson(tile_summary.structure)}});
    tiles.push_back(entry);
    summary.tiles++;
    summary.images += static_cast<int>(own_local.size());
    summary.points += static_cast<int>(tile.points.size());
    summary.feature_s += feature_s;
    summary.structure_s += tile_summary.structure_s;
  }
  const json manifest{{"plan_id", plan.id},     {"shard", shard}, {"shards", shards},
                      {"model_id", staged->id}, {"tiles", tiles}, {"skipped", summary.skipped}};
  summary.manifest = (stage / ShardName(shard, shards)).string();
  if (Status st = WriteJson(summary.manifest, manifest); !st.ok()) return st;
  summary.seconds = SecondsSince(t0);
  return summary;
}

// -------------------------------------------------------------------------------- publish

Result<BuildSummary> PublishImpl(const Plan& plan, const std::string& plan_path, bool progress,
                                 bool locked) {
  const auto t0 = Clock::now();
  BuildOptions o = OptionsOf(plan, 1, progress);
  std::optional<MapWriterLock> lock;
  if (!locked) {
    std::error_code ec;
    fs::create_directories(plan.map_dir, ec);
    Result<MapWriterLock> held = MapWriterLock::Acquire(plan.map_dir);
    if (!held.ok()) return held.status();
    lock.emplace(std::move(held).value());
  }
  BuildSummary summary;
  summary.map_version = plan.map_version;
  const fs::path stage = StagingDir(plan.map_dir) / plan.id;
  const std::string catalog_path = (fs::path(plan.map_dir) / "catalog.sqlite").string();
  if (fs::exists(catalog_path)) {
    Result<Catalog> live = ReadCatalog(catalog_path);
    if (live.ok() && live->map_version == plan.map_version && !fs::exists(stage)) {
      summary.already_published = true;
      summary.model_id = live->model_id;
      summary.tiles = static_cast<int>(live->tiles.size());
      return summary;
    }
    if (live.ok() && live->map_version != plan.map_version - 1)
      return Status(StatusCode::kFailedPrecondition,
                    plan.map_dir + " is at map version " + std::to_string(live->map_version) +
                        "; the plan " + plan_path + " was made for version " +
                        std::to_string(plan.map_version - 1) + ": make a new plan");
  }
  Result<StagedModel> staged = LoadStagedModel(plan.map_dir);
  if (!staged.ok()) return staged.status();

  // Every shard's manifest, from this plan and this model.
  std::vector<std::string> missing;
  std::map<std::vector<int>, json> entry_of;  // tile key -> manifest entry
  std::vector<std::string> skipped = plan.j.at("skipped").get<std::vector<std::string>>();
  std::set<std::string> seen(skipped.begin(), skipped.end());
  for (int shard = 1; shard <= plan.shards; ++shard) {
    const fs::path path = stage / ShardName(shard, plan.shards);
    const std::string label = "shard " + std::to_string(shard) + "/" + std::to_string(plan.shards);
    Result<json> m = ReadJson(path, "shard manifest");
    if (!m.ok()) {
      missing.push_back(label + " (no " + path.string() + ")");
      continue;
    }
    if (m->value("plan_id", "") != plan.id) {
      missing.push_back(label + " (" + path.string() + " is from another plan)");
      continue;
    }
    if (m->value("model_id", "") != staged->id) {
      missing.push_back(label + " (built with model " + m->value("model_id", "") +
                        ", the staged model is " + staged->id + ": train ran again since)");
      continue;
    }
    for (const json& t : m->at("tiles")) entry_of[t.at("tile").get<std::vector<int>>()] = t;
    for (const json& why : m->at("skipped"))
      if (seen.insert(why.get<std::string>()).second) skipped.push_back(why.get<std::string>());
  }
  if (!missing.empty()) {
    std::string list;
    for (const std::string& m : missing) list += "\n  " + m;
    return Status(StatusCode::kFailedPrecondition,
                  std::to_string(missing.size()) + " of " + std::to_string(plan.shards) +
                      " shards of plan " + plan.id + " have not finished:" + list +
                      "\nrun each with: sightfix-indexer build-tiles --plan " + plan_path +
                      " --shard I/" + std::to_string(plan.shards));
  }

  // The catalog: tiles in key order, each file checked against its shard's manifest.
  Catalog catalog;
  catalog.map_version = plan.map_version;
  catalog.zoom = o.zoom;
  catalog.model_id = staged->id;
  catalog.model_params = staged->info.at("params").dump();
  catalog.model_blob = staged->blob;
  catalog.created_utc = plan.j.at("created_utc").get<std::string>();
  cv::Mat all_codes;
  std::vector<faiss::Index::idx_t> ids;
  std::vector<std::pair<fs::path, fs::path>> moves;  // staged -> live
  double local_bytes = 0, point_bytes = 0, file_bytes = 0, ba_initial = 0, ba_final = 0;
  const int code_bytes = staged->model.code_bytes();
  for (const json& job : plan.j.at("jobs")) {
    const std::vector<int> key = job.at("tile").get<std::vector<int>>();
    auto it = entry_of.find(key);
    const TileKey tk = KeyOf(job.at("tile"));
    if (it == entry_of.end())
      return Status(StatusCode::kFailedPrecondition,
                    "shard " + std::to_string(job.at("shard").get<int>()) + "/" +
                        std::to_string(plan.shards) + " has no tile " + tk.ToString());
    const json& e = it->second;
    if (e.at("images").get<int>() == 0) continue;  // every frame of it was bad (skip_bad)
    const std::string rel = e.at("file").get<std::string>();
    const std::string sha = e.at("sha256").get<std::string>();
    fs::path from = stage / rel, to = fs::path(plan.map_dir) / rel;
    Result<std::string> actual = Sha256OfFile(fs::exists(from) ? from.string() : to.string());
    if (!actual.ok() || *actual != sha)
      return Status(StatusCode::kCorrupt,
                    (fs::exists(from) ? from : to).string() +
                        (actual.ok() ? " does not match its shard manifest (SHA-256)"
                                     : " is missing: run its shard again"));
    if (fs::exists(from)) moves.emplace_back(from, to);
    const int ordinal = static_cast<int>(catalog.tiles.size());
    const int images = e.at("images").get<int>();
    const int points = e.at("points").get<int>();
    catalog.tiles.push_back({tk, rel, sha, images, points, staged->id});
    const json& codes = e.at("codes");
    if (static_cast<int>(codes.size()) != images)
      return Status(StatusCode::kCorrupt, "the manifest of tile " + tk.ToString() + " lists " +
                                              std::to_string(codes.size()) + " codes for " +
                                              std::to_string(images) + " images");
    for (int i = 0; i < images; ++i) {
      cv::Mat row(1, code_bytes, CV_8U);
      if (!BytesOfHex(codes[i].get<std::string>(), row.ptr<uint8_t>(), code_bytes))
        return Status(StatusCode::kCorrupt, "bad code in the manifest of tile " + tk.ToString());
      all_codes.push_back(row);
      ids.push_back(GlobalImageId(ordinal, i));
    }
    summary.images += images;
    summary.points += points;
    local_bytes += e.at("local_feature_bytes").get<double>();
    point_bytes += e.at("point_bytes").get<double>();
    file_bytes += e.at("file_bytes").get<double>();
    const json& st = e.at("structure");
    StructureSummary& sum = summary.structure;
    sum.pairs += st.at("pairs").get<int>();
    sum.matches += st.at("matches").get<int>();
    sum.epipolar_matches += st.at("epipolar_matches").get<int>();
    sum.tracks += st.at("tracks").get<int>();
    sum.observations += st.at("observations").get<int>();
    sum.points += points;
    const double w = st.at("observations").get<double>();
    ba_initial += w * st.at("ba_initial_rms_px").get<double>();
    ba_final += w * st.at("ba_final_rms_px").get<double>();
  }
  if (catalog.tiles.empty()) return Status::InvalidArgument("no tile has a usable survey image");
  summary.structure.ba_initial_rms_px = ba_initial / std::max(1, summary.structure.observations);
  summary.structure.ba_final_rms_px = ba_final / std::max(1, summary.structure.observations);
  summary.tiles = static_cast<int>(catalog.tiles.size());
  summary.skipped = skipped;
  summary.input_format = plan.j.at("input_format").get<std::string>();
  summary.model_id = staged->id;
  summary.codec = staged->info.at("codec").get<std::string>();
  summary.training_vectors = staged->info.at("training_vectors").get<int>();
  const json drive{{"drive", plan.drive},
                   {"format", summary.input_format},
                   {"images", summary.images},
                   {"skipped", skipped.size()},
                   {"added", catalog.created_utc}};
  catalog.provenance =
      json{{"drives", {drive}}, {"max_features", o.features.max_features}, {"zoom", o.zoom}}.dump();
  catalog.global_index = GlobalIndex(staged->model, all_codes, ids);
  const double n = std::max(1, summary.images);
  summary.global_code_bytes = code_bytes;
  summary.local_feature_bytes = local_bytes / n;
  summary.point_bytes = point_bytes / n;
  summary.tile_file_bytes = file_bytes / n;

  // Tiles into the map (renames on one file system), then the one catalog switch. On a failure
  // the tiles go back to staging and the map is as it was.
  Say(o, "publish: " + std::to_string(summary.tiles) + " tiles, " + std::to_string(summary.images) +
             " images, map version " + std::to_string(plan.map_version));
  std::vector<std::pair<fs::path, fs::path>> done;
  auto undo = [&](Status s) {
    std::error_code ec;
    for (const auto& [from, to] : done) fs::rename(to, from, ec);
    return s;
  };
  for (const auto& [from, to] : moves) {
    std::error_code ec;
    fs::create_directories(to.parent_path(), ec);
    fs::rename(from, to, ec);
    if (ec)
      return undo(Status::IoError("cannot move " + from.string() + " to " + to.string() + ": " +
                                  ec.message()));
    done.emplace_back(from, to);
  }
  MaybeKillAt("catalog");
  if (Status st = WriteCatalog(catalog_path, catalog); !st.ok()) return undo(st);
  RemoveUnlistedTiles(plan.map_dir, catalog);
  std::error_code ec;
  fs::remove_all(stage, ec);
  summary.write_s = SecondsSince(t0);
  summary.seconds = summary.write_s;
  return summary;
}

}  // namespace

std::string DefaultPlanPath(const std::string& map_dir) {
  return (StagingDir(map_dir) / "plan.json").string();
}

Result<TrainSummary> TrainStep(const BuildOptions& options) { return TrainImpl(options, nullptr); }

Result<PlanSummary> PlanStep(const BuildOptions& options, const std::string& plan_path,
                             int shards) {
  PlanSummary summary;
  Result<json> plan = PlanImpl(options, shards, &summary);
  if (!plan.ok()) return plan.status();
  if (Status st = WriteJson(plan_path, *plan); !st.ok()) return st;
  summary.plan_file = plan_path;
  return summary;
}

Result<ShardSummary> BuildTilesStep(const std::string& plan_path, int shard, int shards, int jobs,
                                    bool progress) {
  Result<Plan> plan = LoadPlan(plan_path);
  if (!plan.ok()) return plan.status();
  return BuildTilesImpl(*plan, shard, shards, jobs, progress, nullptr);
}

Result<BuildSummary> PublishStep(const std::string& plan_path, bool progress) {
  Result<Plan> plan = LoadPlan(plan_path);
  if (!plan.ok()) return plan.status();
  return PublishImpl(*plan, plan_path, progress, false);
}

Result<BuildSummary> BuildMap(const BuildOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  PinLibraryThreads();  // DEVELOPERS.md, Threads
  const auto t_start = Clock::now();
  std::error_code ec;
  fs::create_directories(o.map_dir, ec);
  Result<MapWriterLock> lock = MapWriterLock::Acquire(o.map_dir);
  if (!lock.ok()) return lock.status();
  const fs::path staging = StagingDir(o.map_dir);
  const bool staging_was_there = fs::exists(staging);
  std::optional<std::string> plan_id;
  // Whatever happens, this run's staging files go.
  auto clean = [&](auto result) {
    std::error_code ec2;
    fs::remove(ModelFile(o.map_dir), ec2);
    fs::remove(ModelInfoFile(o.map_dir), ec2);
    fs::remove(staging / "build-plan.json", ec2);
    if (plan_id) fs::remove_all(staging / *plan_id, ec2);
    if (!staging_was_there) fs::remove(staging, ec2);  // only if empty
    return result;
  };
  PlanSummary planned;
  Result<json> plan_json = PlanImpl(o, 1, &planned);
  if (!plan_json.ok()) return clean(Result<BuildSummary>(plan_json.status()));
  plan_id = planned.plan_id;
  const std::string plan_path = (staging / "build-plan.json").string();
  if (Status st = WriteJson(plan_path, *plan_json); !st.ok())
    return clean(Result<BuildSummary>(st));
  Plan plan{std::move(plan_json).value(),
            planned.plan_id,
            fs::absolute(o.map_dir).lexically_normal().string(),
            fs::absolute(o.drive_dir).lexically_normal().string(),
            1,
            planned.map_version};

  FeatureCache cache;
  Result<TrainSummary> trained = TrainImpl(o, &cache);
  if (!trained.ok()) return clean(Result<BuildSummary>(trained.status()));
  Say(o, "matching neighbouring frames, triangulating, bundle adjustment, tile by tile");
  Result<ShardSummary> shard = BuildTilesImpl(plan, 1, 1, o.jobs, o.progress, &cache);
  if (!shard.ok()) return clean(Result<BuildSummary>(shard.status()));
  cache.clear();
  Result<BuildSummary> published = PublishImpl(plan, plan_path, o.progress, true);
  if (!published.ok()) return clean(published);
  BuildSummary summary = std::move(published).value();
  summary.model_s = trained->seconds - trained->feature_s;
  summary.feature_s = trained->feature_s + shard->feature_s;  // the shard reuses the sample's
  summary.structure_s = shard->structure_s;
  summary.seconds = SecondsSince(t_start);
  summary.images_per_s = summary.images / std::max(summary.seconds, 1e-9);
  return clean(Result<BuildSummary>(summary));
}

}  // namespace sightfix
