// The staged build's shared pieces (map_builder.h: train, plan, build-tiles, publish; BuildMap
// runs all four in one process). Not a public interface.
//
// Staging layout, all under MAPDIR/staging/:
//   model.bin, model.json          train's model (GlobalDescriptor::Serialize) and its figures
//   plan.json                      plan's default place (any path will do)
//   <plan id>/tiles/z/x/y.vN.sqlite   build-tiles' tile files
//   <plan id>/shard-I-of-N.json    build-tiles' manifest of shard I, written last
// Every file is written to a temporary name, fsynced and renamed (through the Env), so a reader
// sees it whole or not at all. The plan id is the SHA-256 of the plan's content: a new plan never
// mixes with the shards of an old one.
#pragma once

#include <filesystem>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/status.h"
#include "indexer/builder/build_internal.h"
#include "indexer/builder/map_builder.h"
#include "indexer/map/tile_key.h"
#include "indexer/vision/global_descriptor.h"

namespace sightfix::staging {

using json = nlohmann::json;
using build_internal::Survey;

std::filesystem::path StagingDir(const std::string& map_dir);
std::filesystem::path ModelFile(const std::string& map_dir);
std::filesystem::path ModelInfoFile(const std::string& map_dir);
// "shard-I-of-N.json"
std::string ShardName(int shard, int shards);

// J as indented text (one space), whole or not at all.
Status WriteJson(Env* env, const std::filesystem::path& path, const json& j);
// A JSON object; kNotFound without the file (or empty), kInvalidArgument naming WHAT otherwise.
Result<json> ReadJson(Env* env, const std::filesystem::path& path, const std::string& what);

// Lower-case hex of N bytes, and back (false unless S is exactly 2N hex digits).
std::string HexOf(const uint8_t* p, size_t n);
bool BytesOfHex(const std::string& s, uint8_t* out, size_t n);

// A tile key as the plan stores it: [zoom, x, y].
json KeyJson(const TileKey& k);
TileKey KeyOf(const json& j);

using build_internal::FeatureCache;

// The survey's rows with their calibrations loaded (bad ones out or fatal, as o.skip_bad says).
Result<Survey> ReadRows(const BuildOptions& o, std::string* input_format,
                        std::vector<std::string>* skipped);

// What a plan file says it is.
constexpr char kPlanFormat[] = "sightfix-build-plan";
constexpr int kPlanFormatVersion = 1;

// A plan file, read and its required fields checked.
struct Plan {
  json j;
  std::string id, map_dir, drive;
  int shards = 0, map_version = 0;
};
Result<Plan> LoadPlan(Env* env, const std::string& path);
// The options a plan fixes, for the shared build code.
BuildOptions OptionsOf(const Plan& p, const StepOptions& step);

// train's model as staged: the model, its id (SHA-256 of the blob, 16 hex digits), model.json.
struct StagedModel {
  GlobalDescriptor model;
  std::string id;
  json info;
  std::vector<uint8_t> blob;
};
// kFailedPrecondition when train has not run or model.json describes another model.
Result<StagedModel> LoadStagedModel(Env* env, const std::string& map_dir);

// A camera as the plan stores it (pixels; sigma as CalibrationUncertainty), and back.
json CameraJson(const CameraModel& c);
Result<CameraModel> CameraOfJson(const json& j);
// Self-calibration (self_calibration.h) of each calibration file over the whole drive:
// (*cameras)[i], the plan's entry of camera i, gets "supplied" (the file's camera) and
// "calibration": status "refined" with the refined camera, boresight, covariance, sigmas, move
// test and figures, or status "supplied" with why (self-calibration off, too little structure, a
// fisheye lens). CACHE (may be null) gets the features it extracted. Fails only on I/O.
Status CalibrateSurveyCameras(const BuildOptions& o, const Survey& s, json* cameras,
                              FeatureCache* cache);
// The camera a plan entry says to use: the refined one, its boresight and time offset where
// calibrated (a plan without a time offset: 0), else the supplied one, the identity and 0.
struct CalibratedCamera {
  CameraModel camera;
  cv::Matx33d boresight;     // camera as mounted from the camera the INS attitude implies
  double time_offset_s = 0;  // the image's time minus its row's (self_calibration.h)
};
Result<CalibratedCamera> CalibratedCameraOf(const json& entry, const CameraModel& supplied);

// The four steps (map_builder.h), each with what BuildMap shares between them in one process.
// CACHE (may be null): plan fills it with self-calibration's features, train takes those and
// adds the rest of its sample, build-tiles takes them from it.
Result<TrainSummary> TrainImpl(const BuildOptions& o, FeatureCache* cache);
// The plan as JSON, with its id; *summary filled. CACHE (may be null): self-calibration's
// features.
Result<json> PlanImpl(const BuildOptions& o, int shards, PlanSummary* summary,
                      FeatureCache* cache = nullptr);
Result<ShardSummary> BuildTilesImpl(const Plan& plan, int shard, int shards,
                                    const StepOptions& step, FeatureCache* cache);
// LOCKED: the caller holds the map's writer lock already.
Result<BuildSummary> PublishImpl(const Plan& plan, const std::string& plan_path,
                                 const StepOptions& step, bool locked);

}  // namespace sightfix::staging
