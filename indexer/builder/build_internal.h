// Pieces of the map builder shared by map_update.cc (add, retrain) and the staged build (build and
// its scheduler steps: staging.h). Not a public interface: only the builder's own files include
// it. Every OS call goes through the Env of the options or the one passed.
#pragma once

#include <faiss/Index.h>

#include <map>
#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/geo.h"
#include "indexer/base/status.h"
#include "indexer/builder/map_builder.h"
#include "indexer/builder/structure.h"
#include "indexer/builder/survey_source.h"
#include "indexer/map/camera_model.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/map/map_store.h"
#include "indexer/map/tile_key.h"
#include "indexer/vision/global_descriptor.h"
#include "indexer/vision/local_features.h"

namespace sightfix::build_internal {

// Seconds since construction, on the Env's monotonic clock.
class Stopwatch {
 public:
  explicit Stopwatch(Env* env) : env_(env), start_us_(env->NowMicros()) {}
  double Seconds() const { return (env_->NowMicros() - start_us_) * 1e-6; }

 private:
  Env* env_;
  int64_t start_us_;
};

// A progress line on stderr when o.progress.
void Say(const BuildOptions& o, const std::string& line);

struct Survey {
  std::vector<DriveRow> rows;
  std::vector<double> attitude_sigma_deg;  // per row; 0 = the structure's default
  std::vector<std::string> origin;         // per row: where it came from, for messages
  std::vector<CameraModel> cameras;        // distinct calibrations
  std::vector<int> camera_of_row;
  std::vector<LocalFeatures> features;
  // Per camera: the boresight self-calibration found (camera as mounted from the camera the INS
  // attitude implies); empty = identity for all.
  std::vector<cv::Matx33d> boresight;
  // Per camera: its time offset (self_calibration.h), seconds; empty = 0 for all. Views() moves
  // each row to the pose of its image's time.
  std::vector<double> time_offset_s;
};

// Features already extracted in this process (BuildMap), by image name, under the survey's
// calibrations as supplied.
using FeatureCache = std::map<std::string, LocalFeatures>;

// The rows ROWS of ALL (calibrations, attitude sigmas, origins too), without features.
Survey SubSurvey(const Survey& all, const std::vector<int>& rows);

// Where row i came from, as a message prefix ("<drive.csv>:<line>: "), or "".
std::string Where(const Survey& s, size_t i);
// Keeps the rows whose status is OK; the first bad one fails the step unless o.skip_bad, then
// each is listed in *skipped.
Status DropBadRows(const BuildOptions& o, const std::vector<Status>& status, Survey* s,
                   std::vector<std::string>* skipped);
// Loads each row's calibration (drive_dir/camera); bad rows fail or, with skip_bad, go to *skipped.
Status LoadCameras(const BuildOptions& o, Survey* s, std::vector<std::string>* skipped);
// Reads, decodes and checks every row's image and extracts its features; the same image twice
// is a bad row. Bad rows as LoadCameras. Rows whose image CACHE (may be null) holds are taken
// from it as they are: checked when they went in (BuildMap's plan checks every image).
Status ExtractAll(const BuildOptions& o, Survey* s, std::vector<std::string>* skipped,
                  const FeatureCache* cache = nullptr);
std::string ReadFileBytes(const std::string& path);
// The model from a survey's features (crop views while under min_pq_training); *vectors gets
// the number of training vectors.
Result<GlobalDescriptor> TrainModel(const BuildOptions& o, const Survey& s, int* vectors);
// Every row's code under a model.
cv::Mat EncodeAll(const GlobalDescriptor& model, const Survey& s);
// Every row as a structure view in ENU frame `enu`, with the vehicle's motion from the same
// camera's neighbouring rows within a second (RowMotion), the boresight applied and the row moved
// by its camera's time offset (centre + velocity dt, turned by yaw rate dt); features borrowed.
std::vector<SurveyView> Views(const Survey& s, const EnuFrame& enu);
// Tracks, triangulation and bundle adjustment; fills the summary's structure figures and time.
Result<StructureResult> Adjust(const BuildOptions& o, const Survey& s, const EnuFrame& enu,
                               BuildSummary* summary);
std::vector<uint8_t> IndexBytes(const faiss::Index& index);

// Everything a tile is cut from.
struct Built {
  const Survey* survey;
  const GlobalDescriptor* model;
  std::string model_id;
  cv::Mat codes;  // one row per survey row
  const StructureResult* structure;
  const EnuFrame* enu;  // the structure's frame
  int map_version;
};
// The tile of the survey rows `rows` (in that order), with the points they observe.
TileData MakeTile(const Built& b, const TileKey& key, const std::vector<int>& rows);

// The Env's wall clock as ISO 8601 UTC, or SOURCE_DATE_EPOCH when set.
std::string NowIsoUtc(Env* env);
nlohmann::json ModelParams(const GlobalDescriptor& g, int training_vectors);
// The map-wide index over codes (one row per image) with the given ids.
std::vector<uint8_t> GlobalIndex(const GlobalDescriptor& model, const cv::Mat& codes,
                                 const std::vector<faiss::Index::idx_t>& ids);
// Bytes a tile's local features (keypoint, descriptor, point id) and its points take on disk, as
// the summaries report them.
double LocalFeatureBytes(const TileData& t);
double PointBytes(const TileData& t);
// Tile files under map_dir/tiles no catalog entry names go (after a switch: the versions it
// replaced, leftovers of an interrupted run). Best effort: a file that will not go stays.
void RemoveUnlistedTiles(Env* env, const std::string& map_dir, const Catalog& catalog);
Result<SurveyRows> ReadSurvey(const BuildOptions& o);
// 1 for a new map; the next version with overwrite; kFailedPrecondition otherwise.
Result<int> NextMapVersion(const BuildOptions& o);

}  // namespace sightfix::build_internal
