// sightfix-indexer: turns survey drives into a map. So far: `build`.
#include <boost/program_options.hpp>
#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>
#include <opencv2/core/utility.hpp>
#include <string>

#include "indexer/map_builder.h"

namespace po = boost::program_options;

namespace {

int Fail(const std::string& message, int code = 1) {
  std::fprintf(stderr, "sightfix-indexer: %s\n", message.c_str());
  return code;
}

nlohmann::json SummaryJson(const sightfix::BuildSummary& s) {
  const sightfix::StructureSummary& st = s.structure;
  return {{"images", s.images},
          {"tiles", s.tiles},
          {"points", s.points},
          {"map_version", s.map_version},
          {"model_id", s.model_id},
          {"codec", s.codec},
          {"training_vectors", s.training_vectors},
          {"seconds", s.seconds},
          {"images_per_s", s.images_per_s},
          {"stage_s",
           {{"features", s.feature_s},
            {"model", s.model_s},
            {"structure", s.structure_s},
            {"write", s.write_s}}},
          {"bytes_per_image",
           {{"global_code", s.global_code_bytes},
            {"local_features", s.local_feature_bytes},
            {"points", s.point_bytes},
            {"tile_file", s.tile_file_bytes}}},
          {"structure",
           {{"pairs", st.pairs},
            {"matches", st.matches},
            {"epipolar_matches", st.epipolar_matches},
            {"tracks", st.tracks},
            {"observations", st.observations},
            {"ba_initial_rms_px", st.ba_initial_rms_px},
            {"ba_final_rms_px", st.ba_final_rms_px}}}};
}

int Build(int argc, char** argv) {
  sightfix::BuildOptions o;
  po::options_description desc(
      "sightfix-indexer build: a map from one survey drive (drive.csv with geotagged images and\n"
      "their calibration). RootSIFT features, VLAD+PCA+PQ global codes, triangulated 3D points\n"
      "refined by bundle adjustment, one SQLite file per WebMercatorQuad tile and a catalog.\n\n"
      "Usage: sightfix-indexer build --drive DIR --map MAPDIR [options]\n\nOptions");
  desc.add_options()("help,h", "show this help")("drive", po::value(&o.drive_dir),
                                                 "survey folder holding drive.csv")(
      "map", po::value(&o.map_dir), "map folder to write (catalog.sqlite, tiles/)")(
      "jobs", po::value(&o.jobs)->default_value(0), "worker threads (0 = all cores)")(
      "zoom", po::value(&o.zoom)->default_value(sightfix::kDefaultTileZoom),
      "WebMercatorQuad zoom of the tiles")(
      "max-features", po::value(&o.features.max_features)->default_value(2000),
      "RootSIFT keypoints kept per image")("overwrite", "replace a map already in MAPDIR")(
      "quiet", "no progress on stderr")("json", "print the summary as JSON on stdout");
  po::variables_map vm;
  try {
    po::store(po::command_line_parser(argc, argv).options(desc).run(), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    return Fail(std::string(e.what()) + " (see sightfix-indexer build --help)", 2);
  }
  if (vm.count("help")) {
    std::cout << desc << "\n";
    return 0;
  }
  if (o.drive_dir.empty() || o.map_dir.empty())
    return Fail("build needs --drive DIR and --map MAPDIR (see sightfix-indexer build --help)", 2);
  o.overwrite = vm.count("overwrite") > 0;
  o.progress = vm.count("quiet") == 0;
  std::string error;
  if (!o.Validate(&error)) return Fail(error, 2);
  sightfix::Result<sightfix::BuildSummary> s = sightfix::BuildMap(o);
  if (!s.ok()) {
    const bool input = s.status().code() == sightfix::StatusCode::kInvalidArgument ||
                       s.status().code() == sightfix::StatusCode::kNotFound ||
                       s.status().code() == sightfix::StatusCode::kFailedPrecondition;
    return Fail(s.status().ToString() + "\nnothing was written", input ? 2 : 1);
  }
  if (vm.count("json")) {
    std::cout << SummaryJson(*s).dump(2) << "\n";
    return 0;
  }
  std::printf(
      "map %s version %d: %d images in %d tiles, %d 3D points, model %s (%s, %d training "
      "vectors)\n"
      "%.1f s (%.2f images/s): features %.1f s, model %.1f s, structure %.1f s, write %.1f s\n"
      "bytes per image: global code %.0f, local features %.0f, points %.0f (tile files %.0f)\n"
      "bundle adjustment: %d observations, rms %.2f -> %.2f px\n",
      o.map_dir.c_str(), s->map_version, s->images, s->tiles, s->points, s->model_id.c_str(),
      s->codec.c_str(), s->training_vectors, s->seconds, s->images_per_s, s->feature_s, s->model_s,
      s->structure_s, s->write_s, s->global_code_bytes, s->local_feature_bytes, s->point_bytes,
      s->tile_file_bytes, s->structure.observations, s->structure.ba_initial_rms_px,
      s->structure.ba_final_rms_px);
  return 0;
}

void Usage() {
  std::printf(
      "sightfix-indexer: builds sightfix maps from survey drives\n\n"
      "Usage: sightfix-indexer COMMAND [options]\n\nCommands:\n"
      "  build --drive DIR --map MAPDIR   a new map from one survey drive\n\n"
      "sightfix-indexer COMMAND --help tells more.\n");
}

}  // namespace

int main(int argc, char** argv) {
  cv::setNumThreads(1);  // DEVELOPERS.md, Threads: we parallelise across images ourselves
  if (argc < 2 || std::string(argv[1]) == "--help" || std::string(argv[1]) == "-h") {
    Usage();
    return argc < 2 ? 2 : 0;
  }
  const std::string command = argv[1];
  if (command == "build") return Build(argc - 1, argv + 1);
  Usage();
  return Fail("unknown command '" + command + "'", 2);
}
