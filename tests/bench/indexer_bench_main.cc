// indexer_bench: the indexer's throughput against bare OpenCV feature extraction of the same
// images in the same run, and map size per kilometre of survey (scripts/bench.sh). Compare
// ratios, not absolute times: a shared machine.
//
// 1. Bare: the OpenCV calls the indexer makes per image, one at a time on one thread: cv::imread
//    (grey), the contrast stretch of dim images (meanStdDev + convertTo), cv::SIFT
//    detectAndCompute with the same feature cap, the RootSIFT arithmetic: images/s.
// 2. sightfix-indexer's build with --jobs 1 and --jobs 2 on the same survey: the feature stage's
//    images/s (read, decode, duplicate check, contrast stretch, SIFT, RootSIFT, undistortion),
//    the structure stage reported apart. Goals: jobs 1 features >= 0.8 x bare; jobs 2 >= 1.5 x
//    jobs 1.
// 3. Map size by part per image and per km of survey (the survey path's length).
//
// Usage: indexer_bench --drive SURVEYDIR --out DIR [--limit N]
#include <boost/program_options.hpp>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <opencv2/core.hpp>
#include <opencv2/features2d.hpp>
#include <opencv2/imgcodecs.hpp>

#include "indexer/base/geo.h"
#include "indexer/base/threads.h"
#include "indexer/builder/map_builder.h"
#include "indexer/map/drive_manifest.h"

namespace po = boost::program_options;
namespace fs = std::filesystem;

int main(int argc, char** argv) {
  std::string drive, out;
  po::options_description desc("indexer_bench --drive SURVEYDIR --out DIR");
  desc.add_options()("drive", po::value(&drive))("out", po::value(&out));
  po::variables_map vm;
  po::store(po::parse_command_line(argc, argv, desc), vm);
  po::notify(vm);
  if (drive.empty() || out.empty())
    return std::fprintf(stderr, "%s\n", "need --drive and --out"), 2;
  sightfix::PinLibraryThreads();
  auto rows = sightfix::ReadDriveManifest(drive + "/drive.csv");
  if (!rows.ok()) return std::fprintf(stderr, "%s\n", rows.status().ToString().c_str()), 1;
  const sightfix::FeatureOptions features;
  auto sift = cv::SIFT::create(features.max_features);
  // Bare extraction, timed before and after the builds (the mean cancels slow drift of a shared
  // machine; both figures are printed).
  auto bare = [&] {
    const auto t0 = std::chrono::steady_clock::now();
    for (const sightfix::DriveRow& r : *rows) {
      cv::Mat img = cv::imread(drive + "/" + r.image, cv::IMREAD_GRAYSCALE);
      // The same OpenCV calls the indexer makes: the contrast stretch of dim images (it changes
      // how many keypoints SIFT finds, so leaving it out would time other work), SIFT, and the
      // RootSIFT arithmetic.
      cv::Scalar mean, stddev;
      cv::meanStdDev(img, mean, stddev);
      if (stddev[0] > 0 && stddev[0] < features.min_contrast_std) {
        const double gain = std::min(features.max_gain, features.min_contrast_std / stddev[0]);
        img.convertTo(img, CV_8U, gain, 128.0 - gain * mean[0]);
      }
      std::vector<cv::KeyPoint> kp;
      cv::Mat d;
      sift->detectAndCompute(img, cv::noArray(), kp, d);
      for (int i = 0; i < d.rows; ++i) {
        cv::Mat row = d.row(i);
        row /= std::max(1e-12, cv::norm(row, cv::NORM_L1));
        cv::sqrt(row, row);
      }
    }
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  };
  const double n = static_cast<double>(rows->size());
  const double bare_before = bare();
  double rate[3] = {0, 0, 0};
  sightfix::BuildSummary last;
  for (int jobs : {1, 2}) {
    sightfix::BuildOptions o;
    o.drive_dir = drive;
    o.map_dir = out + "/map-jobs" + std::to_string(jobs);
    o.jobs = jobs;
    o.overwrite = true;
    o.progress = false;
    auto s = sightfix::BuildMap(o);
    if (!s.ok()) return std::fprintf(stderr, "%s\n", s.status().ToString().c_str()), 1;
    rate[jobs] = n / s->feature_s;
    std::printf(
        "sightfix-indexer --jobs %d: features %.1f s (%.2f images/s), model %.1f s, "
        "structure %.1f s, write %.1f s; whole build %.2f images/s\n",
        jobs, s->feature_s, rate[jobs], s->model_s, s->structure_s, s->write_s, s->images_per_s);
    last = *s;
  }
  const double bare_after = bare();
  const double bare_rate = 2 * n / (bare_before + bare_after);
  std::printf(
      "bare OpenCV (imread, stretch, SIFT, RootSIFT; 1 thread): %.1f s before the builds, %.1f s "
      "after: "
      "%.2f images/s\n",
      bare_before, bare_after, bare_rate);
  std::printf(
      "features: jobs 1 / bare = %.3f (goal >= 0.8); jobs 2 / jobs 1 = %.3f (goal >= 1.5)\n",
      rate[1] / bare_rate, rate[2] / rate[1]);
  double km = 0;
  for (size_t i = 1; i < rows->size(); ++i)
    km +=
        sightfix::GeodesicBetween((*rows)[i - 1].position.lat_deg, (*rows)[i - 1].position.lon_deg,
                                  (*rows)[i].position.lat_deg, (*rows)[i].position.lon_deg)
            .distance_m /
        1000;
  const double per_km = n / km;
  std::printf(
      "survey path %.3f km, %.0f images/km; per image: global code %.0f B, local features "
      "%.0f B, points %.0f B, tile files %.0f B; per km: %.2f MB (codes %.3f MB, local "
      "features %.2f MB, points %.2f MB)\n",
      km, per_km, last.global_code_bytes, last.local_feature_bytes, last.point_bytes,
      last.tile_file_bytes, last.tile_file_bytes * per_km / 1e6,
      last.global_code_bytes * per_km / 1e6, last.local_feature_bytes * per_km / 1e6,
      last.point_bytes * per_km / 1e6);
  return 0;
}
