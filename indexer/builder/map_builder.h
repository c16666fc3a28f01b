// Builds a map from one survey drive: `sightfix-indexer build`.
//
// 1. Ingest: the survey in any form survey_source.h reads (drive.csv, rig + INS log, EXIF-tagged
//    JPEGs, JPEGs + GPX track), every row checked: coordinates, times in order, calibration
//    loaded, image read, decoded and checked against its calibration's size, no image twice
//    (SHA-256 of its bytes). The first bad row stops the build before anything is written, with
//    "<file>:<line>: <what>" or the image's path; with skip_bad the bad rows are left out and
//    counted in the summary.
// 2. Local features (RootSIFT, keypoints undistorted), `jobs` images at a time.
// 3. Global descriptor model (global_descriptor.h) trained on the survey, with crop views when the
//    survey alone is under min_pq_training vectors; every image encoded.
// 4. Structure (structure.h): tracks, triangulation, bundle adjustment with the poses as priors.
// 5. Tiles: images grouped by the WebMercatorQuad tile of their camera centre at `zoom`; each
//    tile gets the points its images observe, in its own ENU frame, and its retrieval index.
// 6. Publishing: tile files first (versioned names, fsynced), then the catalog with the model,
//    tile checksums and the map-wide index, renamed into place last.
// Thread safety: one build per map folder at a time.
#pragma once

#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/status.h"
#include "indexer/builder/self_calibration.h"
#include "indexer/builder/structure.h"
#include "indexer/builder/survey_source.h"
#include "indexer/map/tile_key.h"
#include "indexer/vision/global_descriptor.h"
#include "indexer/vision/local_features.h"

namespace sightfix {

struct BuildOptions {
  std::string drive_dir;  // the survey folder (drive.csv, rig.yml, or JPEGs; survey_source.h)
  SurveyFormat format = SurveyFormat::kAuto;
  std::string gpx;                    // gpx input: the track (default: the one .gpx in drive_dir)
  std::string camera = "camera.yml";  // exif and gpx input: the calibration of every image
  double max_gap_s = 2.0;             // gpx and rig input: widest gap to interpolate across
  bool skip_bad = false;              // leave bad rows out (counted) instead of stopping
  std::string map_dir;
  int zoom = kDefaultTileZoom;
  int jobs = 0;                 // worker threads; 0 = all cores
  bool overwrite = false;       // replace an existing map (its version goes up)
  int vocabulary_sample = 300;  // descriptors per image for the k-means vocabulary
  // Crop views per image, only while under min_pq_training (docs/design.md 4.3): 40 lets surveys of
  // 244 images or more reach the 9 984 vectors of an 8-bit PQ; smaller ones get SQ8 codes.
  int max_crop_views = 40;
  // train: at most this many survey images (evenly spaced) train the model; features of that
  // many images are held in memory at once (about 1 MB each at 2 000 keypoints).
  int train_images = 5000;
  // Structure is solved per tile on its own frames plus the frames within margin_m of its
  // bounds (DEVELOPERS.md, "Scale-out"); 40 m covers the 3 neighbours x 12 m a track can span.
  double margin_m = 40.0;
  bool progress = true;  // progress on stderr
  // Every file the build creates, syncs, renames, lists or removes, and the wall clock it records,
  // go through this Env (borrowed; must outlive the call). SQLite opens its own files. Tests wrap
  // it to inject crashes and I/O errors.
  Env* env = Env::Default();
  FeatureOptions features;
  GlobalDescriptorOptions descriptor;
  StructureOptions structure;
  // Self-calibration (self_calibration.h): each calibration file's focal length, k1, k2 and
  // boresight refined once over the drive before any tile, under the priors the file states (or
  // the documented defaults). Off: every camera as supplied.
  bool self_calibration = true;
  // At most this many frames per camera take part: all of a shorter drive, else evenly spaced
  // runs of 40 consecutive frames (about 0.4 s of adjustment and 1 MB of features per frame).
  int calibration_frames = 400;
  SelfCalibrationOptions calibration;
  // Names the bad field in *error.
  bool Validate(std::string* error) const;
};

struct BuildSummary {
  int images = 0, tiles = 0, points = 0, map_version = 0;
  std::string input_format;
  std::vector<std::string> skipped;  // skip_bad: each bad row left out, with why
  std::string model_id, codec;
  int training_vectors = 0;  // real images plus crop views
  double seconds = 0, images_per_s = 0;
  double feature_s = 0, model_s = 0, structure_s = 0, write_s = 0;
  double calibration_s = 0;  // self-calibration, its frames' features included
  // Bytes per image on disk, by part (averages over the map).
  double global_code_bytes = 0, local_feature_bytes = 0, point_bytes = 0, tile_file_bytes = 0;
  StructureSummary structure;
  // Per calibration file: what the survey supplied and what self-calibration made of it (the
  // plan's camera entries, staging.h CalibrateSurveyCameras).
  nlohmann::json cameras = nlohmann::json::array();
  bool already_published = false;  // publish: the catalog already is this plan's
};

// `build`: plan (one shard), train, build-tiles, publish, in one process; staging files go
// again at the end, whatever happens. Byte for byte the map the four steps make on a cluster.
Result<BuildSummary> BuildMap(const BuildOptions& options);
// The structure figures as JSON (pairs, matches, tracks, observations, bundle adjustment rms).
nlohmann::json StructureSummaryJson(const StructureSummary& s);
// The whole summary as JSON (what `build --json` prints).
nlohmann::json BuildSummaryJson(const BuildSummary& s);

// The build as four steps a batch scheduler can run (DEVELOPERS.md, "Scale-out"). Staging files
// live in MAPDIR/staging/; the live map is touched only by publish, under the writer lock.
//
// train: the global descriptor model from at most train_images evenly spaced survey images,
// written to MAPDIR/staging/model.bin (+ model.json). Same survey, same model bytes.
struct TrainSummary {
  int survey_images = 0, sampled_images = 0, training_vectors = 0;
  std::string model_id, codec, model_file;
  std::vector<std::string> skipped;
  double seconds = 0, feature_s = 0;  // feature_s: of it, extracting the sample's features
};
Result<TrainSummary> TrainStep(const BuildOptions& options);

// plan: every survey row checked (coordinates, calibration, image readable, no image twice by
// SHA-256), rows grouped by tile, each tile's context frames (within margin_m), tiles dealt to
// `shards` shards by work (largest first). Writes the plan file (JSON) at plan_path.
struct PlanSummary {
  std::string plan_file, plan_id;
  int images = 0, tiles = 0, shards = 0, map_version = 0;
  std::vector<int> images_per_shard;  // own plus context frames
  std::vector<std::string> skipped;
  double calibration_s = 0;  // self-calibration, its frames' features included
};
std::string DefaultPlanPath(const std::string& map_dir);
Result<PlanSummary> PlanStep(const BuildOptions& options, const std::string& plan_path, int shards);

// build-tiles: shard `shard` (1..shards) of a plan: features, codes, structure and the tile file
// of each of its tiles, under MAPDIR/staging/<plan id>/, then the shard's manifest (written
// last, atomically). Deterministic and idempotent: a repeat writes the same bytes (tiles and
// manifest); a shard that died left no manifest and is simply run again.
struct ShardSummary {
  int shard = 0, shards = 0, tiles = 0, images = 0, points = 0;
  std::string manifest;
  std::vector<std::string> skipped;
  double seconds = 0, feature_s = 0, structure_s = 0;  // not in the manifest: it stays the same
};
// What build-tiles and publish take besides the plan (the plan fixes everything else).
struct StepOptions {
  int jobs = 0;               // worker threads; 0 = all cores
  bool progress = true;       // progress on stderr
  Env* env = Env::Default();  // as BuildOptions::env
  // Names the bad field in *error.
  bool Validate(std::string* error) const;
};
Result<ShardSummary> BuildTilesStep(const std::string& plan_path, int shard, int shards,
                                    const StepOptions& options);

// publish: checks the plan's every shard (manifest present, same plan, same model, each tile
// file's SHA-256), moves the tiles into the map and switches the catalog in one transaction.
// kFailedPrecondition naming each missing shard; a publish already done says so and changes
// nothing (summary.already_published).
Result<BuildSummary> PublishStep(const std::string& plan_path, const StepOptions& options);

// `add`: one more survey (options.drive_dir) into the map at options.map_dir with the map's own
// model and zoom. Tiles the new frames fall in are rebuilt from their stored images plus the
// new ones (structure re-adjusted together) and written under the next version's names; the
// other tiles are carried as they are; then one catalog switch, then old files go. A crash at
// any point leaves the previous map whole (docs/design.md 4.6).
Result<BuildSummary> AddToMap(const BuildOptions& options);
// `retrain`: a new model trained on every stored image's features (the compact descriptors the
// tiles keep), every tile rewritten with new codes and retrieval index, then the catalog switch;
// the old model serves until that switch. Only map_dir and the model options are used.
Result<BuildSummary> RetrainMap(const BuildOptions& options);

}  // namespace sightfix
