// PQ keeps retrieval: recall@1 of the product-quantized index against exact search
// (faiss::IndexFlatL2, the reference) on the same whitened VLADs of the demo town, with query-
// drive images (never trained on) as queries. Recall@1: the top-ranked survey frame lies within
// 25 m of the query's true position (Arandjelovic et al., NetVLAD, CVPR 2016; Torii et al. 2013).
// Goal (map-and-engine issue): PQ recall@1 >= 0.95 of exact.
#include "indexer/vision/global_descriptor.h"

#include <faiss/IndexFlat.h>
#include <gtest/gtest.h>
#include <unistd.h>

#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <opencv2/imgcodecs.hpp>

#include "demo_route/demo_town.h"
#include "indexer/base/geo.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/vision/local_features.h"

namespace sightfix {
namespace {
namespace fs = std::filesystem;

struct Drive {
  std::vector<DriveRow> rows;
  std::vector<cv::Mat> descriptors;
  std::vector<LocalFeatures> features;
  int width = 0, height = 0;
};

Drive LoadDrive(const fs::path& dir) {
  Drive d;
  auto rows = ReadDriveManifest((dir / "drive.csv").string());
  auto cam = LoadCameraModel((dir / "camera.yml").string());
  EXPECT_TRUE(rows.ok() && cam.ok());
  d.rows = *rows;
  d.width = cam->width_px, d.height = cam->height_px;
  for (const DriveRow& r : d.rows) {
    auto f = ExtractFeatures(cv::imread((dir / r.image).string(), cv::IMREAD_GRAYSCALE), &*cam,
                             FeatureOptions{});
    EXPECT_TRUE(f.ok());
    d.descriptors.push_back(f->descriptors);
    d.features.push_back(*f);
  }
  return d;
}

// The demo town's seed: SIGHTFIX_RECALL_SEED, 31 when unset (CI's). Another seed checks that the
// recall floors below were not fitted to seed 31's draws.
int TownSeed() {
  const char* s = std::getenv("SIGHTFIX_RECALL_SEED");
  return s != nullptr && *s != '\0' ? std::atoi(s) : 31;
}

// A training set without structure: `image_count` images of 50 uniform random descriptors each,
// and `sample` all of them.
void RandomTrainingSet(uint64_t seed, int image_count, cv::Mat* sample,
                       std::vector<cv::Mat>* images) {
  cv::RNG rng(seed);
  *sample = cv::Mat(image_count * 50, 128, CV_32F);
  rng.fill(*sample, cv::RNG::UNIFORM, 0.0f, 0.3f);
  for (int i = 0; i < image_count; ++i)
    images->push_back(sample->rowRange(i * 50, i * 50 + 50).clone());
}

// 8 clusters, 32 PCA dimensions, 8 PQ subquantizers: a model small enough for those sets.
GlobalDescriptorOptions SmallModelOptions() {
  GlobalDescriptorOptions o;
  o.clusters = 8;
  o.pca_dims = 32;
  o.pq_subquantizers = 8;
  return o;
}

TEST(GlobalDescriptorTest, ProductQuantizationKeepsRecallOfExactSearch) {
  demo::DemoOptions o;
  o.world = demo::World::kClean;  // the recall figures were measured on it
  // One folder per process (two runs on one machine must not share a town), removed at the end.
  o.out_dir =
      (fs::path(::testing::TempDir()) / ("global_town_" + std::to_string(::getpid()))).string();
  fs::remove_all(o.out_dir);
  struct Cleanup {
    std::string dir;
    ~Cleanup() {
      std::error_code ignored;
      fs::remove_all(dir, ignored);
    }
  } cleanup{o.out_dir};
  o.seed = TownSeed();
  std::printf("demo town seed %d\n", static_cast<int>(o.seed));
  o.route_length_m = 300;
  ASSERT_TRUE(demo::GenerateDemoTown(o).ok());
  const Drive survey = LoadDrive(fs::path(o.out_dir) / "survey");
  std::vector<Drive> queries;
  for (const char* q : {"query-day", "query-dusk", "query-overcast"})
    queries.push_back(LoadDrive(fs::path(o.out_dir) / q));

  cv::Mat sample;  // up to 300 descriptors of every survey image
  for (const cv::Mat& d : survey.descriptors)
    sample.push_back(d.rowRange(0, std::min(d.rows, 300)));
  // As the indexer does for small surveys: up to 40 crop views per image bring the PQ training set
  // past FAISS's 39 x 256 (docs/design.md 4.3).
  std::vector<cv::Mat> augmented;
  for (size_t i = 0; i < survey.features.size(); ++i)
    for (cv::Mat& v : CropViews(survey.features[i], survey.width, survey.height, 40, i))
      augmented.push_back(v);
  GlobalDescriptorOptions options;
  auto g = GlobalDescriptor::Train(sample, survey.descriptors, augmented, options);
  ASSERT_TRUE(g.ok()) << g.status().ToString();
  EXPECT_EQ(g->codec_name(), "PQ32x8");
  EXPECT_EQ(g->code_bytes(), 32);
  // The model survives its own serialization: same codes after a round trip.
  auto copy = GlobalDescriptor::Deserialize(g->Serialize());
  ASSERT_TRUE(copy.ok()) << copy.status().ToString();

  cv::Mat db_vlad;
  for (const cv::Mat& d : survey.descriptors) db_vlad.push_back(g->Vlad(d));
  const cv::Mat db = g->Whiten(db_vlad);
  const cv::Mat codes = g->Encode(db);
  EXPECT_EQ(cv::norm(codes, copy->Encode(copy->Whiten(db_vlad)), cv::NORM_L1), 0.0);
  faiss::IndexFlatL2 exact(db.cols);
  exact.add(db.rows, db.ptr<float>());

  const EnuFrame enu(survey.rows[0].position);
  std::vector<cv::Vec3d> db_pos;
  for (const DriveRow& r : survey.rows) db_pos.push_back(enu.ToEnu(r.position));
  int n = 0, hit_exact = 0, hit_pq = 0;
  for (const Drive& q : queries) {
    cv::Mat qv;
    for (const cv::Mat& d : q.descriptors) qv.push_back(g->Vlad(d));
    const cv::Mat qw = g->Whiten(qv);
    std::vector<float> dist(qw.rows);
    std::vector<faiss::Index::idx_t> top(qw.rows);
    exact.search(qw.rows, qw.ptr<float>(), 1, dist.data(), top.data());
    const auto pq_top = g->SearchCodes(codes, qw, 1);
    for (int i = 0; i < qw.rows; ++i) {
      const cv::Vec3d truth = enu.ToEnu(q.rows[i].position);
      hit_exact += cv::norm(db_pos[top[i]] - truth) <= 25.0;
      hit_pq += cv::norm(db_pos[pq_top[i][0]] - truth) <= 25.0;
      ++n;
    }
  }
  const double r_exact = double(hit_exact) / n, r_pq = double(hit_pq) / n;
  std::printf(
      "%d queries (day, dusk, overcast), %d survey images: recall@1 within 25 m exact %.3f, PQ "
      "%.3f "
      "(ratio %.3f), %d bytes per image\n",
      n, db.rows, r_exact, r_pq, r_pq / r_exact, g->code_bytes());
  // Regression floors: exact recall@1 measured 0.582 on seed 31, 0.741 on seed 37, floor 0.55;
  // PQ recall@1 measured 0.655 on seed 31, 0.811 on seed 37, floor 0.62.
  EXPECT_GE(r_exact, 0.55);
  EXPECT_GE(r_pq, 0.62);
  EXPECT_GE(r_pq, 0.95 * r_exact);
}

// With a small epsilon the whitening leaves every kept principal component of the training VLADs
// the same variance: whitening is y = L^-1/2 U^T (x - mean), unit covariance by construction
// (Bishop, Pattern Recognition and Machine Learning, 2006, section 12.1.3; the section number
// from memory). Plain PCA would leave the components their eigenvalues' spread. (The default
// epsilon, 100 x the mean eigenvalue, is close to plain PCA by design, so the retrieval test above
// cannot tell whitened from not.)
TEST(GlobalDescriptorTest, WhiteningEqualisesTheComponentVariances) {
  cv::Mat sample;
  std::vector<cv::Mat> images;
  RandomTrainingSet(11, 80, &sample, &images);
  GlobalDescriptorOptions o = SmallModelOptions();
  o.pca_epsilon = 0.001f;
  auto g = GlobalDescriptor::Train(sample, images, {}, o);
  ASSERT_TRUE(g.ok()) << g.status().ToString();
  cv::Mat v;
  for (const cv::Mat& d : images) v.push_back(g->Vlad(d));
  const cv::Mat w = g->Whiten(v);
  ASSERT_EQ(w.cols, 32);
  double lowest = 1e300, highest = 0;
  for (int c = 0; c < w.cols; ++c) {
    cv::Scalar mean, sd;
    cv::meanStdDev(w.col(c), mean, sd);
    lowest = std::min(lowest, sd[0] * sd[0]);
    highest = std::max(highest, sd[0] * sd[0]);
  }
  std::printf("whitened component variances %.4g to %.4g (ratio %.3f)\n", lowest, highest,
              highest / lowest);
  // Measured ratio 1.000 on RNG seeds 11 and 12, 1.47 with plain PCA (seed 11); bound 1.05.
  EXPECT_LT(highest / lowest, 1.05);
}

TEST(GlobalDescriptorTest, RejectsTooFewTrainingImages) {
  cv::Mat sample(1000, 128, CV_32F, cv::Scalar(0.1f));
  auto g = GlobalDescriptor::Train(sample, std::vector<cv::Mat>(10, sample), {},
                                   GlobalDescriptorOptions{});
  ASSERT_FALSE(g.ok());
  EXPECT_NE(g.status().message().find("more than 32 images"), std::string::npos);
  GlobalDescriptorOptions bad;
  bad.pq_subquantizers = 30;
  std::string error;
  EXPECT_FALSE(bad.Validate(&error));
  EXPECT_NE(error.find("divide"), std::string::npos);
}

TEST(GlobalDescriptorTest, SmallTrainingSetFallsBackToScalarQuantizer) {
  cv::Mat sample;
  std::vector<cv::Mat> images;
  RandomTrainingSet(7, 40, &sample, &images);
  GlobalDescriptorOptions o = SmallModelOptions();
  auto g = GlobalDescriptor::Train(sample, images, {}, o);
  ASSERT_TRUE(g.ok()) << g.status().ToString();
  EXPECT_EQ(g->codec_name(), "SQ8");  // 40 < 9 984 training vectors
  EXPECT_EQ(g->code_bytes(), 32);     // one byte per whitened dimension
  cv::Mat v;
  for (const cv::Mat& d : images) v.push_back(g->Vlad(d));
  const cv::Mat w = g->Whiten(v);
  const auto top = g->SearchCodes(g->Encode(w), w, 1);
  int self = 0;
  for (int i = 0; i < w.rows; ++i) self += top[i][0] == i;
  EXPECT_EQ(self, w.rows);  // every image finds itself first
  EXPECT_FALSE(GlobalDescriptor::Deserialize({1, 2, 3}).ok());
  // 40 images span at most 39 PCA directions: asking for 256 keeps 32 (a multiple of 8).
  GlobalDescriptorOptions wide = o;
  wide.pca_dims = 256;
  auto narrow = GlobalDescriptor::Train(sample, images, {}, wide);
  ASSERT_TRUE(narrow.ok()) << narrow.status().ToString();
  EXPECT_EQ(narrow->options().pca_dims, 32);
  EXPECT_EQ(narrow->Whiten(v).cols, 32);
}

}  // namespace
}  // namespace sightfix
