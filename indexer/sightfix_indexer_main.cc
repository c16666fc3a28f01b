// sightfix-indexer: turns surveys into a map (`build`) and shows what a map holds (`inspect`),
// whether it is whole (`verify`) and where it covers (`coverage`).
#include <algorithm>
#include <boost/program_options.hpp>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <string>

#include "indexer/base/crash_report.h"
#include "indexer/base/threads.h"
#include "indexer/builder/calibration_lines.h"
#include "indexer/builder/map_builder.h"
#include "indexer/map/map_inspect.h"

namespace po = boost::program_options;

namespace {

int Fail(const std::string& message, int code = 1) {
  std::fprintf(stderr, "sightfix-indexer: %s\n", message.c_str());
  return code;
}

// --self-calibration and --calibration-frames (build, add, plan; README, "Self-calibration").
void AddCalibrationFlags(po::options_description& desc, sightfix::BuildOptions& o,
                         std::string& mode) {
  desc.add_options()("self-calibration", po::value(&mode)->default_value("on"),
                     "on: refine each camera file's focal, k1, k2 and boresight over the drive "
                     "under the uncertainty it states; off: every file as supplied")(
      "calibration-frames", po::value(&o.calibration_frames)->default_value(o.calibration_frames),
      "self-calibration: frames per camera at most");
}

// -1: go on, else the exit code (TakeSurveyFlags validated the rest).
int TakeCalibrationFlags(const std::string& mode, sightfix::BuildOptions& o) {
  o.self_calibration = mode == "on";
  return mode == "on" || mode == "off" ? -1 : Fail("--self-calibration must be on or off", 2);
}

constexpr char kBuildHelp[] =
    "sightfix-indexer build: a map from one survey: drive.csv with geotagged images, a rig\n"
    "(rig.yml + INS log + per-camera image lists), JPEGs with EXIF GPS tags, or JPEGs with a\n"
    "GPX track. RootSIFT features, VLAD+PCA+PQ global codes, triangulated 3D points refined\n"
    "by bundle adjustment, one SQLite file per WebMercatorQuad tile and a catalog. A bad row\n"
    "stops the build before anything is written, unless --skip-bad.\n\n"
    "Usage: sightfix-indexer build --drive DIR --map MAPDIR [options]\n\nOptions";
constexpr char kAddHelp[] =
    "sightfix-indexer add: one more survey into an existing map, with the map's model. Only the\n"
    "tiles its frames fall in are rewritten (their structure re-adjusted with the new frames),\n"
    "under the next map version's names; then one catalog switch. The previous map stays whole\n"
    "and servable until that switch, whatever happens.\n\n"
    "Usage: sightfix-indexer add --drive DIR --map MAPDIR [options]\n\nOptions";

// Flags every command reading a survey shares (build, add, train, plan).
void AddSurveyFlags(po::options_description& desc, sightfix::BuildOptions& o, std::string& format) {
  desc.add_options()("help,h", "show this help")("drive", po::value(&o.drive_dir), "survey folder")(
      "format", po::value(&format)->default_value("auto"),
      "survey form: drive (drive.csv), rig (rig.yml), exif (tagged JPEGs), gpx (JPEGs + a .gpx "
      "track), auto (in that order of what DIR holds)")(
      "gpx", po::value(&o.gpx), "gpx form: the track (default: the one .gpx file in DIR)")(
      "camera", po::value(&o.camera)->default_value("camera.yml"),
      "exif and gpx forms: calibration of every image, in DIR (OpenCV FileStorage YAML)")(
      "max-gap-s", po::value(&o.max_gap_s)->default_value(2.0),
      "gpx and rig forms: widest gap between track or INS points to interpolate across")(
      "skip-bad", "leave bad rows out (each listed, counted) instead of stopping")(
      "map", po::value(&o.map_dir), "map folder (catalog.sqlite, tiles/, staging/)")(
      "jobs", po::value(&o.jobs)->default_value(0), "worker threads (0 = all cores)")(
      "quiet", "no progress on stderr")("json", "print the summary as JSON on stdout");
}

// Parses argv into vm; -1: go on, else the exit code (help printed, or a bad flag).
int ParseFlags(int argc, char** argv, const std::string& command, po::options_description& desc,
               po::variables_map* vm) {
  try {
    po::store(po::command_line_parser(argc, argv).options(desc).run(), *vm);
    po::notify(*vm);
  } catch (const std::exception& e) {
    return Fail(std::string(e.what()) + " (see sightfix-indexer " + command + " --help)", 2);
  }
  if (vm->count("help")) {
    std::cout << desc << "\n";
    return 0;
  }
  return -1;
}

// The survey flags' values into o; -1: go on, else the exit code.
int TakeSurveyFlags(const po::variables_map& vm, const std::string& command,
                    const std::string& format, sightfix::BuildOptions& o) {
  if (o.drive_dir.empty() || o.map_dir.empty())
    return Fail(command + " needs --drive DIR and --map MAPDIR (see --help)", 2);
  o.overwrite = vm.count("overwrite") > 0;
  o.skip_bad = vm.count("skip-bad") > 0;
  o.progress = vm.count("quiet") == 0;
  if (!sightfix::ParseSurveyFormat(format, &o.format))
    return Fail("--format must be auto, drive, rig, exif or gpx", 2);
  std::string error;
  if (!o.Validate(&error)) return Fail(error, 2);
  return -1;
}

// Bad input or a state the user can fix (exit 2), not a failure on the way (exit 1).
bool IsInputError(const sightfix::Status& s) {
  return s.code() == sightfix::StatusCode::kInvalidArgument ||
         s.code() == sightfix::StatusCode::kNotFound ||
         s.code() == sightfix::StatusCode::kFailedPrecondition;
}

int FailStatus(const sightfix::Status& s, const std::string& tail) {
  return Fail(s.ToString() + tail, IsInputError(s) ? 2 : 1);
}

// build and add: one survey in, a map out. add = true: into the existing map.
int Build(int argc, char** argv, bool add) {
  sightfix::BuildOptions o;
  po::options_description desc(add ? kAddHelp : kBuildHelp);
  std::string format = "auto";
  AddSurveyFlags(desc, o, format);
  desc.add_options()("zoom", po::value(&o.zoom)->default_value(sightfix::kDefaultTileZoom),
                     "WebMercatorQuad zoom of the tiles")(
      "max-features", po::value(&o.features.max_features)->default_value(2000),
      "RootSIFT keypoints kept per image")("overwrite", "replace a map already in MAPDIR");
  std::string calibration = "on";
  AddCalibrationFlags(desc, o, calibration);
  po::variables_map vm;
  const std::string command = add ? "add" : "build";
  if (int rc = ParseFlags(argc, argv, command, desc, &vm); rc >= 0) return rc;
  if (int rc = TakeSurveyFlags(vm, command, format, o); rc >= 0) return rc;
  if (int rc = TakeCalibrationFlags(calibration, o); rc >= 0) return rc;
  sightfix::Result<sightfix::BuildSummary> s = add ? sightfix::AddToMap(o) : sightfix::BuildMap(o);
  if (!s.ok()) return FailStatus(s.status(), "\nnothing was written");
  for (const std::string& why : s->skipped) std::fprintf(stderr, "skipped: %s\n", why.c_str());
  if (vm.count("json")) {
    std::cout << sightfix::BuildSummaryJson(*s).dump(2) << "\n";
    return 0;
  }
  if (!s->skipped.empty())
    std::printf("%zu bad rows skipped (listed above on stderr)\n", s->skipped.size());
  std::printf(
      "map %s version %d: %d images in %d tiles, %d 3D points, model %s (%s, %d training "
      "vectors)\n"
      "%.1f s (%.2f images/s): features %.1f s, model %.1f s, structure %.1f s, write %.1f s\n"
      "bytes per image: global code %.0f, local features %.0f, points %.0f (tile files %.0f)\n"
      "bundle adjustment: %d observations, rms %.2f -> %.2f px; self-calibration %.1f s\n",
      o.map_dir.c_str(), s->map_version, s->images, s->tiles, s->points, s->model_id.c_str(),
      s->codec.c_str(), s->training_vectors, s->seconds, s->images_per_s, s->feature_s, s->model_s,
      s->structure_s, s->write_s, s->global_code_bytes, s->local_feature_bytes, s->point_bytes,
      s->tile_file_bytes, s->structure.observations, s->structure.ba_initial_rms_px,
      s->structure.ba_final_rms_px, s->calibration_s);
  std::fputs(sightfix::CalibrationLines(s->cameras).c_str(), stdout);
  return 0;
}

// --- The build as scheduler steps: train, plan, build-tiles, publish (README, "Scaling out").

int Train(int argc, char** argv) {
  sightfix::BuildOptions o;
  std::string format;
  po::options_description desc(
      "sightfix-indexer train: the global descriptor model (VLAD vocabulary, PCA whitening,\n"
      "product quantizer) from at most --train-images evenly spaced survey images, written to\n"
      "MAPDIR/staging/model.bin. One job; the same survey gives the same model bytes.\n\n"
      "Usage: sightfix-indexer train --drive DIR --map MAPDIR [options]\n\nOptions");
  AddSurveyFlags(desc, o, format);
  desc.add_options()("max-features", po::value(&o.features.max_features)->default_value(2000),
                     "RootSIFT keypoints kept per image")(
      "train-images", po::value(&o.train_images)->default_value(o.train_images),
      "survey images the model is trained on, at most (about 1 MB of memory each)")(
      "zoom", po::value(&o.zoom)->default_value(sightfix::kDefaultTileZoom),
      "accepted so train and plan take the same flags; the model does not depend on it")(
      "overwrite", "accepted so train and plan take the same flags; train writes only to staging");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "train", desc, &vm); rc >= 0) return rc;
  if (int rc = TakeSurveyFlags(vm, "train", format, o); rc >= 0) return rc;
  auto s = sightfix::TrainStep(o);
  if (!s.ok()) return FailStatus(s.status(), "");
  for (const std::string& why : s->skipped) std::fprintf(stderr, "skipped: %s\n", why.c_str());
  if (vm.count("json")) {
    std::cout << nlohmann::json{{"model_id", s->model_id},
                                {"codec", s->codec},
                                {"model_file", s->model_file},
                                {"survey_images", s->survey_images},
                                {"sampled_images", s->sampled_images},
                                {"training_vectors", s->training_vectors},
                                {"skipped", s->skipped.size()},
                                {"seconds", s->seconds}}
                     .dump(2)
              << "\n";
    return 0;
  }
  std::printf("model %s (%s, %d training vectors) from %d of %d survey images in %.1f s: %s\n",
              s->model_id.c_str(), s->codec.c_str(), s->training_vectors, s->sampled_images,
              s->survey_images, s->seconds, s->model_file.c_str());
  return 0;
}

int Plan(int argc, char** argv) {
  sightfix::BuildOptions o;
  std::string format, plan;
  int shards = 1;
  po::options_description desc(
      "sightfix-indexer plan: checks every survey row (coordinates, calibration, image readable,\n"
      "no image twice), groups the frames by tile with the context frames each tile's structure\n"
      "needs, and deals the tiles to N shards by work. Writes the plan (JSON) that build-tiles "
      "and\n"
      "publish read.\n\n"
      "Usage: sightfix-indexer plan --drive DIR --map MAPDIR --shards N [--plan FILE] [options]\n\n"
      "Options");
  AddSurveyFlags(desc, o, format);
  desc.add_options()("shards", po::value(&shards)->default_value(1),
                     "number of tile shards (jobs)")(
      "plan", po::value(&plan), "plan file to write (default MAPDIR/staging/plan.json)")(
      "zoom", po::value(&o.zoom)->default_value(sightfix::kDefaultTileZoom),
      "WebMercatorQuad zoom of the tiles")("max-features",
                                           po::value(&o.features.max_features)->default_value(2000),
                                           "RootSIFT keypoints kept per image")(
      "margin-m", po::value(&o.margin_m)->default_value(o.margin_m),
      "context frames: those within this distance of a tile's bounds join its structure")(
      "overwrite", "the plan replaces the map already in MAPDIR when published");
  std::string calibration = "on";
  AddCalibrationFlags(desc, o, calibration);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "plan", desc, &vm); rc >= 0) return rc;
  if (int rc = TakeSurveyFlags(vm, "plan", format, o); rc >= 0) return rc;
  if (int rc = TakeCalibrationFlags(calibration, o); rc >= 0) return rc;
  if (shards < 1) return Fail("--shards must be >= 1", 2);
  if (plan.empty()) plan = sightfix::DefaultPlanPath(o.map_dir);
  auto s = sightfix::PlanStep(o, plan, shards);
  if (!s.ok()) return FailStatus(s.status(), "");
  for (const std::string& why : s->skipped) std::fprintf(stderr, "skipped: %s\n", why.c_str());
  if (vm.count("json")) {
    std::cout << nlohmann::json{{"plan", s->plan_file},
                                {"plan_id", s->plan_id},
                                {"images", s->images},
                                {"tiles", s->tiles},
                                {"shards", s->shards},
                                {"map_version", s->map_version},
                                {"frames_per_shard", s->images_per_shard},
                                {"skipped", s->skipped.size()}}
                     .dump(2)
              << "\n";
    return 0;
  }
  std::printf("plan %s (%s): %d images in %d tiles, %d shards, map version %d\n",
              s->plan_file.c_str(), s->plan_id.c_str(), s->images, s->tiles, s->shards,
              s->map_version);
  std::printf("frames per shard (own + context):");
  for (int n : s->images_per_shard) std::printf(" %d", n);
  std::printf("\nnext: sightfix-indexer build-tiles --plan %s --shard I/%d, for I = 1..%d\n",
              s->plan_file.c_str(), s->shards, s->shards);
  return 0;
}

int BuildTiles(int argc, char** argv) {
  std::string plan, shard;
  int jobs = 0;
  po::options_description desc(
      "sightfix-indexer build-tiles: one shard of a plan: features, global codes, structure and\n"
      "the tile file of each of its tiles, in MAPDIR/staging/, then the shard's manifest.\n"
      "Deterministic and safe to repeat; a shard that died is simply run again.\n\n"
      "Usage: sightfix-indexer build-tiles --plan FILE --shard I/N [--jobs N]\n\nOptions");
  desc.add_options()("help,h", "show this help")("plan", po::value(&plan), "the plan file")(
      "shard", po::value(&shard), "which shard, as I/N with I in 1..N (N as planned)")(
      "jobs", po::value(&jobs)->default_value(0), "worker threads (0 = all cores)")(
      "quiet", "no progress on stderr")("json", "print the summary as JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "build-tiles", desc, &vm); rc >= 0) return rc;
  int i = 0, n = 0;
  char tail = 0;
  if (plan.empty() || std::sscanf(shard.c_str(), "%d/%d%c", &i, &n, &tail) != 2)
    return Fail("build-tiles needs --plan FILE and --shard I/N (see --help)", 2);
  if (jobs < 0) return Fail("--jobs must be >= 0", 2);
  sightfix::StepOptions step;
  step.jobs = jobs;
  step.progress = vm.count("quiet") == 0;
  auto s = sightfix::BuildTilesStep(plan, i, n, step);
  if (!s.ok())
    return FailStatus(s.status(),
                      IsInputError(s.status()) ? "" : "\nthe shard left no manifest; run it again");
  for (const std::string& why : s->skipped) std::fprintf(stderr, "skipped: %s\n", why.c_str());
  if (vm.count("json")) {
    std::cout << nlohmann::json{{"shard", s->shard},
                                {"shards", s->shards},
                                {"tiles", s->tiles},
                                {"images", s->images},
                                {"points", s->points},
                                {"manifest", s->manifest},
                                {"skipped", s->skipped.size()},
                                {"seconds", s->seconds}}
                     .dump(2)
              << "\n";
    return 0;
  }
  std::printf("shard %d/%d: %d tiles, %d images, %d 3D points in %.1f s; %s\n", s->shard, s->shards,
              s->tiles, s->images, s->points, s->seconds, s->manifest.c_str());
  return 0;
}

int Publish(int argc, char** argv) {
  std::string plan;
  po::options_description desc(
      "sightfix-indexer publish: checks every shard of a plan (manifest present, same plan and\n"
      "model, every tile file's SHA-256), moves the tiles into the map and switches the catalog\n"
      "in one transaction. Refuses a plan with a missing shard and names it. Safe to repeat.\n\n"
      "Usage: sightfix-indexer publish --plan FILE [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("plan", po::value(&plan), "the plan file")(
      "quiet", "no progress on stderr")("json", "print the summary as JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "publish", desc, &vm); rc >= 0) return rc;
  if (plan.empty()) return Fail("publish needs --plan FILE (see --help)", 2);
  sightfix::StepOptions step;
  step.progress = vm.count("quiet") == 0;
  auto s = sightfix::PublishStep(plan, step);
  if (!s.ok()) return FailStatus(s.status(), "\nthe map was not changed");
  if (vm.count("json")) {
    nlohmann::json j = sightfix::BuildSummaryJson(*s);
    j["already_published"] = s->already_published;
    std::cout << j.dump(2) << "\n";
    return 0;
  }
  if (s->already_published) {
    std::printf("plan %s is already published (map version %d, %d tiles); nothing to do\n",
                plan.c_str(), s->map_version, s->tiles);
    return 0;
  }
  std::printf("published map version %d: %d images in %d tiles, %d 3D points, model %s (%s)\n",
              s->map_version, s->images, s->tiles, s->points, s->model_id.c_str(),
              s->codec.c_str());
  return 0;
}

int Inspect(int argc, char** argv) {
  std::string map_dir;
  po::options_description desc(
      "sightfix-indexer inspect: what a map holds: tiles, images, points, drives, model id and\n"
      "parameters, bytes per image by part, coverage extent, date range.\n\n"
      "Usage: sightfix-indexer inspect --map MAPDIR [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("map", po::value(&map_dir), "map folder")(
      "json", "print JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "inspect", desc, &vm); rc >= 0) return rc;
  if (map_dir.empty()) return Fail("inspect needs --map MAPDIR", 2);
  auto j = sightfix::InspectMap(map_dir);
  if (!j.ok()) return Fail(j.status().ToString(), 2);
  if (vm.count("json")) {
    std::cout << j->dump(2) << "\n";
    return 0;
  }
  const auto& b = (*j)["bytes_per_image"];
  std::printf("map %s, version %d (format %d, zoom %d, created %s)\n", map_dir.c_str(),
              (*j)["map_version"].get<int>(), (*j)["format_version"].get<int>(),
              (*j)["zoom"].get<int>(), (*j)["created"].get<std::string>().c_str());
  std::printf("%d tiles, %d images, %d points; model %s: %s\n", (*j)["tiles"].get<int>(),
              (*j)["images"].get<int>(), (*j)["points"].get<int>(),
              (*j)["model_id"].get<std::string>().c_str(), (*j)["model"].dump().c_str());
  std::cout << sightfix::DrivesText((*j)["drives"]) << sightfix::IntegrityFitText(*j);
  std::printf(
      "bytes per image: global code %.0f, local features %.0f, points %.0f (tile files %.0f)\n",
      b["global_code"].get<double>(), b["local_features"].get<double>(), b["points"].get<double>(),
      b["tile_files"].get<double>());
  if (j->contains("extent"))
    std::printf("extent: lat %.6f..%.6f, lon %.6f..%.6f; images dated %s .. %s\n",
                (*j)["extent"]["south"].get<double>(), (*j)["extent"]["north"].get<double>(),
                (*j)["extent"]["west"].get<double>(), (*j)["extent"]["east"].get<double>(),
                (*j)["dates"]["first"].get<std::string>().c_str(),
                (*j)["dates"]["last"].get<std::string>().c_str());
  return 0;
}

int Verify(int argc, char** argv) {
  std::string map_dir;
  po::options_description desc(
      "sightfix-indexer verify: checks a map: catalog, every tile's checksum and schema, counts,\n"
      "retrieval indexes, model ids, the map-wide index. Names every bad tile; exit 0 only when\n"
      "the map is whole, 1 when not.\n\n"
      "Usage: sightfix-indexer verify --map MAPDIR [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("map", po::value(&map_dir), "map folder")(
      "json", "print JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "verify", desc, &vm); rc >= 0) return rc;
  if (map_dir.empty()) return Fail("verify needs --map MAPDIR", 2);
  const sightfix::VerifyReport r = sightfix::VerifyMap(map_dir);
  if (vm.count("json")) {
    nlohmann::json problems = nlohmann::json::array();
    for (const auto& p : r.problems)
      problems.push_back({{"tile", p.tile}, {"file", p.file}, {"problem", p.what}});
    std::cout << nlohmann::json{{"whole", r.whole()},
                                {"tiles", r.tiles},
                                {"tiles_ok", r.tiles_ok},
                                {"images", r.images},
                                {"problems", problems}}
                     .dump(2)
              << "\n";
  } else {
    for (const auto& p : r.problems)
      std::printf("BAD %s (%s): %s\n", p.tile.c_str(), p.file.c_str(), p.what.c_str());
    std::printf("%s: %d of %d tiles whole, %d images%s\n", map_dir.c_str(), r.tiles_ok, r.tiles,
                r.images, r.whole() ? "; the map is whole" : "; the map is NOT whole");
  }
  return r.whole() ? 0 : 1;
}

int Coverage(int argc, char** argv) {
  std::string map_dir, out;
  po::options_description desc(
      "sightfix-indexer coverage: where a map covers, as RFC 7946 GeoJSON: tile polygons with\n"
      "image and point counts and point density, survey tracks.\n\n"
      "Usage: sightfix-indexer coverage --map MAPDIR --out FILE.geojson [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("map", po::value(&map_dir), "map folder")(
      "out", po::value(&out), "GeoJSON file to write")("json", "print a JSON summary on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "coverage", desc, &vm); rc >= 0) return rc;
  if (map_dir.empty() || out.empty()) return Fail("coverage needs --map MAPDIR and --out FILE", 2);
  auto j = sightfix::CoverageGeoJson(map_dir);
  if (!j.ok()) return Fail(j.status().ToString(), 2);
  std::ofstream f(out);
  f << j->dump() << "\n";
  if (!f.flush()) return Fail("cannot write " + out, 1);
  int tiles = 0, tracks = 0;
  for (const auto& feature : (*j)["features"])
    (feature["properties"]["kind"] == "tile" ? tiles : tracks)++;
  if (vm.count("json"))
    std::cout << nlohmann::json{{"out", out}, {"tiles", tiles}, {"tracks", tracks}}.dump(2) << "\n";
  else
    std::printf("%s: %d tile polygons, %d survey tracks\n", out.c_str(), tiles, tracks);
  return 0;
}

int Retrain(int argc, char** argv) {
  sightfix::BuildOptions o;
  po::options_description desc(
      "sightfix-indexer retrain: a new global descriptor model from every image of the map (the\n"
      "features its tiles keep), every tile rewritten with new codes under the next version's\n"
      "names, then one catalog switch; the old model serves until then.\n\n"
      "Usage: sightfix-indexer retrain --map MAPDIR [--jobs N] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("map", po::value(&o.map_dir), "map folder")(
      "jobs", po::value(&o.jobs)->default_value(0), "worker threads (0 = all cores)")(
      "quiet", "no progress on stderr")("json", "print the summary as JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "retrain", desc, &vm); rc >= 0) return rc;
  if (o.map_dir.empty()) return Fail("retrain needs --map MAPDIR", 2);
  o.progress = vm.count("quiet") == 0;
  sightfix::Result<sightfix::BuildSummary> s = sightfix::RetrainMap(o);
  if (!s.ok()) return Fail(s.status().ToString() + "\nthe map was not changed", 1);
  if (vm.count("json")) {
    std::cout << sightfix::BuildSummaryJson(*s).dump(2) << "\n";
    return 0;
  }
  std::printf(
      "map %s version %d: new model %s (%s, %d training vectors) over %d images in %d "
      "tiles; %.1f s\n",
      o.map_dir.c_str(), s->map_version, s->model_id.c_str(), s->codec.c_str(), s->training_vectors,
      s->images, s->tiles, s->seconds);
  return 0;
}

void Usage() {
  std::printf(
      "sightfix-indexer: builds sightfix maps from survey drives\n\n"
      "Usage: sightfix-indexer COMMAND [options]\n\nCommands:\n"
      "  build --drive DIR --map MAPDIR      a new map from one survey (drive.csv, rig, EXIF, "
      "GPX)\n"
      "  add --drive DIR --map MAPDIR        one more survey into a map (touched tiles only)\n"
      "  retrain --map MAPDIR                a new model from all of the map's images\n"
      "  train --drive DIR --map MAPDIR      build, step 1 of 4 on a cluster: the model\n"
      "  plan --drive DIR --map MAPDIR --shards N   step 2: the tile jobs, dealt to N shards\n"
      "  build-tiles --plan FILE --shard I/N step 3: one shard's tiles (independent jobs)\n"
      "  publish --plan FILE                 step 4: checks every shard, switches the catalog\n"
      "  inspect --map MAPDIR [--json]       what a map holds\n"
      "  verify --map MAPDIR [--json]        checks a map; names every bad tile\n"
      "  coverage --map MAPDIR --out F.geojson   tile polygons and survey tracks\n\n"
      "sightfix-indexer COMMAND --help tells more.\n");
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::InstallCrashReport("sightfix-indexer");
  sightfix::PinLibraryThreads();  // DEVELOPERS.md, Threads: we parallelise across images ourselves
  if (argc < 2 || std::string(argv[1]) == "--help" || std::string(argv[1]) == "-h") {
    Usage();
    return argc < 2 ? 2 : 0;
  }
  const std::string command = argv[1];
  if (command == "build") return Build(argc - 1, argv + 1, false);
  if (command == "add") return Build(argc - 1, argv + 1, true);
  if (command == "retrain") return Retrain(argc - 1, argv + 1);
  if (command == "train") return Train(argc - 1, argv + 1);
  if (command == "plan") return Plan(argc - 1, argv + 1);
  if (command == "build-tiles") return BuildTiles(argc - 1, argv + 1);
  if (command == "publish") return Publish(argc - 1, argv + 1);
  if (command == "inspect") return Inspect(argc - 1, argv + 1);
  if (command == "verify") return Verify(argc - 1, argv + 1);
  if (command == "coverage") return Coverage(argc - 1, argv + 1);
  Usage();
  return Fail("unknown command '" + command + "'", 2);
}
