// engine_bench: what the engine costs, against the bare library calls it makes, on the same data
// in the same run (scripts/bench.sh). Compare ratios, not absolute times: a shared machine.
//
// 1. Per query (one at a time, one thread): the engine's stage timings, then the bare OpenCV
//    sequence on the same image and the same references: imread, SIFT detectAndCompute (with the
//    RootSIFT arithmetic),
//    per checked reference BFMatcher knnMatch + reverse match, findEssentialMat (USAC_MAGSAC) +
//    recoverPose, and solvePnPRansac + solvePnPRefineLM on the 2D-3D pairs those matches give.
//    Overhead = engine total / bare total (goal: at most 1.25).
// 2. Retrieval over a synthetic 100 000-image set encoded with the map's model: the map-wide
//    index (PQ, asymmetric distance), the per-tile path (a prior touching 4 tiles of 300 images),
//    and exact search over the uncompressed vectors (faiss::IndexFlatL2), in ms per query.
//
// Usage: engine_bench --map MAPDIR --drive QUERYDIR [--limit N] [--synthetic N]
#include <faiss/IndexFlat.h>

#include <boost/program_options.hpp>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <map>
#include <opencv2/calib3d.hpp>
#include <opencv2/features2d.hpp>
#include <opencv2/imgcodecs.hpp>
#include <random>

#include "client/eval/route_eval.h"
#include "indexer/base/threads.h"
#include "indexer/map/map_store.h"
#include "indexer/vision/global_descriptor.h"

namespace po = boost::program_options;
namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

namespace {

double Ms(Clock::time_point t0) {
  return std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
}

struct Bare {
  double decode = 0, sift = 0, match = 0, essential = 0, pnp = 0;
  double Total() const { return decode + sift + match + essential + pnp; }
};

// The bare calls on one query and the references the engine checked.
Bare BareSequence(const std::string& image_path, const sightfix::CameraModel& cam,
                  const sightfix::Fix& fix,
                  const std::map<std::string, sightfix::TileData>& tiles) {
  Bare b;
  auto t0 = Clock::now();
  const cv::Mat img = cv::imread(image_path, cv::IMREAD_GRAYSCALE);
  b.decode = Ms(t0);
  t0 = Clock::now();
  std::vector<cv::KeyPoint> kp;
  cv::Mat desc;
  cv::SIFT::create(2000)->detectAndCompute(img, cv::noArray(), kp, desc);
  for (int i = 0; i < desc.rows; ++i) {  // RootSIFT, as the map stores
    cv::Mat row = desc.row(i);
    row /= std::max(cv::norm(row, cv::NORM_L1), 1e-12);
    cv::sqrt(row, row);
  }
  b.sift = Ms(t0);
  std::vector<cv::Point2f> qpx;
  for (const cv::KeyPoint& k : kp) qpx.push_back(k.pt);
  std::vector<cv::Point2f> qn;
  cv::undistortPoints(qpx, qn, cam.K(),
                      std::vector<double>(cam.distortion.begin(), cam.distortion.end()));
  std::vector<cv::Point3d> obj;
  std::vector<cv::Point2d> im;
  for (const sightfix::ReferenceUse& u : fix.references) {
    if (!u.checked) continue;
    const sightfix::TileData& t = tiles.at(u.tile);
    const sightfix::ReferenceImage& ref = t.images[u.image_id];
    const cv::Mat rd = sightfix::ExpandDescriptors(ref.descriptors);
    t0 = Clock::now();
    cv::BFMatcher bf(cv::NORM_L2);
    std::vector<std::vector<cv::DMatch>> knn;
    std::vector<cv::DMatch> back;
    bf.knnMatch(desc, rd, knn, 2);
    bf.match(rd, desc, back);
    b.match += Ms(t0);
    std::vector<cv::Point2d> a, c;
    std::vector<int> ref_kp;
    for (const auto& m : knn)
      if (m.size() == 2 && m[0].distance < 0.8 * m[1].distance) {
        a.push_back(qn[m[0].queryIdx]);
        c.push_back(ref.normalized[m[0].trainIdx]);
        ref_kp.push_back(m[0].trainIdx);
      }
    if (a.size() < 5) continue;
    t0 = Clock::now();
    cv::Mat mask;
    const cv::Mat e = cv::findEssentialMat(a, c, cv::Mat::eye(3, 3, CV_64F), cv::USAC_MAGSAC, 0.999,
                                           1.0 / cam.fx, mask);
    if (e.rows == 3) {
      cv::Mat r, tr;
      cv::recoverPose(e, a, c, cv::Mat::eye(3, 3, CV_64F), r, tr, mask);
    }
    b.essential += Ms(t0);
    if (!u.verified) continue;
    for (size_t i = 0; i < a.size(); ++i) {
      const int pid = ref.point_ids[ref_kp[i]];
      if (pid < 0) continue;
      const cv::Vec3d& p = t.points[pid].enu;
      obj.emplace_back(p[0], p[1], p[2]);
      im.push_back(a[i]);
    }
  }
  if (obj.size() >= 6) {
    t0 = Clock::now();
    cv::Mat rvec, tvec;
    std::vector<int> inl;
    cv::solvePnPRansac(obj, im, cv::Matx33d::eye(), cv::noArray(), rvec, tvec, false, 2000,
                       3.0f / static_cast<float>(cam.fx), 0.9999, inl, cv::SOLVEPNP_EPNP);
    if (inl.size() >= 6) {
      std::vector<cv::Point3d> o2;
      std::vector<cv::Point2d> i2;
      for (int i : inl) o2.push_back(obj[i]), i2.push_back(im[i]);
      cv::solvePnPRefineLM(o2, i2, cv::Matx33d::eye(), cv::noArray(), rvec, tvec);
    }
    b.pnp = Ms(t0);
  }
  return b;
}

void RetrievalBench(const sightfix::GlobalDescriptor& model, int n) {
  std::mt19937_64 rng(11);
  std::normal_distribution<float> n01;
  const int d = model.options().pca_dims;
  cv::Mat db(n, d, CV_32F), q(100, d, CV_32F);
  for (float *p = db.ptr<float>(), *e = p + db.total(); p < e; ++p) *p = n01(rng);
  for (int i = 0; i < q.rows; ++i)  // queries near database rows, as real revisits are
    for (int j = 0; j < d; ++j) q.at<float>(i, j) = db.at<float>(i * 7, j) + 0.5f * n01(rng);
  const cv::Mat codes = model.Encode(db);
  auto time_search = [&](faiss::Index& index, int queries) {
    std::vector<float> dist(8);
    std::vector<faiss::Index::idx_t> ids(8);
    const auto t0 = Clock::now();
    for (int i = 0; i < queries; ++i)
      index.search(1, q.ptr<float>(i % q.rows), 8, dist.data(), ids.data());
    return Ms(t0) / queries;
  };
  auto global = model.MakeIndex(codes);
  const double global_ms = time_search(*global, 100);
  double tiles_ms = 0;  // a prior touching 4 tiles of 300 images: four small searches
  std::vector<std::unique_ptr<faiss::Index>> tiles;
  for (int t = 0; t < 4; ++t)
    tiles.push_back(model.MakeIndex(codes.rowRange(t * 300, t * 300 + 300)));
  for (auto& t : tiles) tiles_ms += time_search(*t, 100);
  faiss::IndexFlatL2 exact(d);
  exact.add(n, db.ptr<float>());
  const double exact_ms = time_search(exact, 20);
  std::printf(
      "retrieval over %d synthetic images (%s, %d B/image): map-wide index %.2f ms/query; "
      "prior path (4 tiles x 300 images) %.3f ms/query; exact search over uncompressed vectors "
      "(IndexFlatL2, %d B/image) %.2f ms/query\n",
      n, model.codec_name().c_str(), model.code_bytes(), global_ms, tiles_ms,
      static_cast<int>(d * sizeof(float)), exact_ms);
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::PinLibraryThreads();
  std::string map_dir, drive;
  int limit = 40, synthetic = 100000;
  po::options_description desc("engine_bench: engine cost against the bare library calls");
  desc.add_options()("help,h", "show this help")("map", po::value(&map_dir), "map folder")(
      "drive", po::value(&drive), "query drive folder")("limit", po::value(&limit), "queries")(
      "synthetic", po::value(&synthetic), "images in the retrieval benchmark");
  po::variables_map vm;
  po::store(po::parse_command_line(argc, argv, desc), vm);
  po::notify(vm);
  if (vm.count("help") || map_dir.empty() || drive.empty()) {
    std::cout << desc << "\n";
    return vm.count("help") ? 0 : 2;
  }
  auto loc = sightfix::Localizer::Open(map_dir, sightfix::LocalizerOptions{});
  if (!loc.ok()) return std::fprintf(stderr, "%s\n", loc.status().ToString().c_str()), 1;
  std::map<std::string, sightfix::TileData> tiles;
  for (const sightfix::CatalogTile& t : (*loc)->catalog().tiles)
    tiles[t.key.ToString()] = *sightfix::ReadTile(map_dir + "/" + t.file);
  sightfix::RouteEvalOptions eo;
  eo.drive_dir = drive;
  eo.limit = limit;
  eo.jobs = 1;  // one query at a time: latency, not throughput
  auto results = sightfix::RunDrive(**loc, eo);
  if (!results.ok()) return std::fprintf(stderr, "%s\n", results.status().ToString().c_str()), 1;
  auto cam = sightfix::LoadCameraModel(drive + "/camera.yml");
  std::vector<double> total, features, retrieval, verify, pose, bare_total, ratio;
  Bare bare_sum;
  for (const sightfix::QueryResult& q : *results) {
    const sightfix::StageTimings& t = q.fix.timings;
    const Bare b = BareSequence(drive + "/" + q.truth.image, *cam, q.fix, tiles);
    // The engine's figure excludes the read from disk (RunDrive reads the image before the
    // call), so the bare figure does too.
    const double engine_ms = t.total_ms, bare_ms = b.Total() - b.decode;
    total.push_back(engine_ms), features.push_back(t.features_ms);
    retrieval.push_back(t.retrieval_ms), verify.push_back(t.verify_ms), pose.push_back(t.pose_ms);
    bare_total.push_back(bare_ms);
    bare_sum.sift += b.sift, bare_sum.match += b.match, bare_sum.essential += b.essential,
        bare_sum.pnp += b.pnp;
  }
  using sightfix::Percentile;
  const double n = static_cast<double>(results->size());
  double engine_sum = 0, bare_all = 0;
  for (size_t i = 0; i < total.size(); ++i) engine_sum += total[i], bare_all += bare_total[i];
  std::printf("%zu queries of %s, one at a time\n", results->size(), drive.c_str());
  std::printf(
      "engine ms  p50 %.0f  p95 %.0f  (features p50 %.0f, retrieval %.1f, verify %.0f, pose "
      "%.1f)\n",
      Percentile(total, 0.5), Percentile(total, 0.95), Percentile(features, 0.5),
      Percentile(retrieval, 0.5), Percentile(verify, 0.5), Percentile(pose, 0.5));
  std::printf(
      "bare calls ms  p50 %.0f  p95 %.0f  (mean: SIFT %.0f, matching %.0f, essential %.0f, PnP "
      "%.1f)\n",
      Percentile(bare_total, 0.5), Percentile(bare_total, 0.95), bare_sum.sift / n,
      bare_sum.match / n, bare_sum.essential / n, bare_sum.pnp / n);
  std::printf("overhead: engine / bare = %.3f (goal <= 1.25)\n", engine_sum / bare_all);
  RetrievalBench(*sightfix::GlobalDescriptor::Deserialize((*loc)->catalog().model_blob), synthetic);
  return 0;
}
