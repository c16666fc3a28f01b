// Tile and catalog files: what is written is read back whole; damaged files are refused with a
// message naming the file; writes leave no temporary file behind.
#include "indexer/map/map_store.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

namespace sightfix {
namespace {

namespace fs = std::filesystem;

TileData SampleTile() {
  TileData t;
  t.key = TileForPoint(44.0, -40.0, 17);
  t.origin = {44.0, -40.0, 41.0};
  t.model_id = "0123456789abcdef";
  t.map_version = 3;
  t.cameras.push_back({640,
                       480,
                       500,
                       501,
                       319.5,
                       239.5,
                       {-0.1, 0.01, 0.001, -0.001, 0.0},
                       LensModel::kPinhole,
                       {0.25, 0.002, 0.003, 0.04}});
  t.cameras.push_back({1280,
                       960,
                       330,
                       331,
                       640.5,
                       479.5,
                       {0.02, -0.01, 0.004, -0.001, 0.0},
                       LensModel::kFisheye,
                       {}});
  for (int i = 0; i < 3; ++i) {
    ReferenceImage r;
    r.id = i;
    r.name = "images/00000" + std::to_string(i) + ".jpg";
    r.timestamp_s = 1.7e9 + i;
    r.position = {44.0 + i * 1e-5, -40.0, 41.5};
    r.attitude = {90.0 + i, 0.5, -0.25};
    r.sigma_h_m = 0.02;
    r.global_code.assign(32, static_cast<uint8_t>(i));
    r.normalized = {{0.1f, -0.2f}, {0.3f, 0.4f}};
    r.descriptors = cv::Mat(2, 128, CV_8U, cv::Scalar(i + 1));
    r.point_ids = {i == 0 ? 0 : -1, 1};
    t.images.push_back(r);
  }
  for (int i = 0; i < 2; ++i) {
    MapPoint p;
    p.enu = {1.0 + i, 2.0, 3.0};
    p.covariance = cv::Matx33d(1e-4, 1e-5, 0, 1e-5, 2e-4, 0, 0, 0, 3e-4);
    p.descriptor = cv::Mat(1, 128, CV_8U, cv::Scalar(7));
    p.observations = 4 + i;
    t.points.push_back(p);
  }
  t.retrieval_index = {1, 2, 3, 4};
  return t;
}

TEST(MapStoreTest, TileRoundTrip) {
  const std::string path = ::testing::TempDir() + "/store/" + TileFileName(SampleTile().key, 3);
  ASSERT_TRUE(WriteTile(path, SampleTile()).ok());
  EXPECT_FALSE(fs::exists(path + ".tmp"));
  auto t = ReadTile(path);
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  const TileData want = SampleTile();
  EXPECT_EQ(t->key, want.key);
  EXPECT_EQ(t->model_id, want.model_id);
  EXPECT_EQ(t->map_version, 3);
  EXPECT_DOUBLE_EQ(t->origin.lat_deg, 44.0);
  ASSERT_EQ(t->cameras.size(), 2u);
  EXPECT_DOUBLE_EQ(t->cameras[0].distortion[2], 0.001);
  EXPECT_EQ(t->cameras[0].lens, LensModel::kPinhole);
  EXPECT_EQ(t->cameras[1].lens, LensModel::kFisheye);  // the lens model survives the tile
  // so does the calibration's remaining uncertainty (self-calibration's posterior)
  EXPECT_DOUBLE_EQ(t->cameras[0].uncertainty.focal_px, 0.25);
  EXPECT_DOUBLE_EQ(t->cameras[0].uncertainty.k1, 0.002);
  EXPECT_DOUBLE_EQ(t->cameras[0].uncertainty.k2, 0.003);
  EXPECT_DOUBLE_EQ(t->cameras[0].uncertainty.boresight_deg, 0.04);
  EXPECT_EQ(t->cameras[1].uncertainty.focal_px, 0);  // unstated stays unstated
  EXPECT_DOUBLE_EQ(t->cameras[1].distortion[3], -0.001);
  ASSERT_EQ(t->images.size(), 3u);
  for (int i = 0; i < 3; ++i) {
    EXPECT_EQ(t->images[i].name, want.images[i].name);
    EXPECT_DOUBLE_EQ(t->images[i].attitude.heading_deg, 90.0 + i);
    EXPECT_EQ(t->images[i].global_code, want.images[i].global_code);
    EXPECT_EQ(t->images[i].point_ids, want.images[i].point_ids);
    EXPECT_EQ(cv::norm(t->images[i].descriptors, want.images[i].descriptors, cv::NORM_L1), 0);
    EXPECT_FLOAT_EQ(t->images[i].normalized[1].y, 0.4f);
  }
  ASSERT_EQ(t->points.size(), 2u);
  EXPECT_DOUBLE_EQ(t->points[1].enu[0], 2.0);
  EXPECT_NEAR(t->points[0].covariance(1, 1), 2e-4, 1e-10);
  EXPECT_NEAR(t->points[0].covariance(1, 0), 1e-5, 1e-11);
  EXPECT_EQ(t->points[1].observations, 5);
  EXPECT_EQ(t->retrieval_index, want.retrieval_index);
}

// Every scalar of an image row comes back in its own field: each value is distinct from every
// other (latitude -33.86 against longitude 151.22, heading, pitch and roll of different sizes
// and signs), so two columns written or read in each other's place cannot pass unnoticed.
TEST(MapStoreTest, ImageRowFieldsKeepTheirColumns) {
  TileData tile = SampleTile();
  ReferenceImage& r = tile.images[2];
  r.timestamp_s = 1777885200.25;
  r.position = {-33.8567844, 151.2152967, 12.345};
  r.attitude = {271.25, -3.5, 1.75};
  r.sigma_h_m = 0.035;
  r.camera_id = 1;
  const std::string path = ::testing::TempDir() + "/store/row_fields.sqlite";
  ASSERT_TRUE(WriteTile(path, tile).ok());
  auto t = ReadTile(path);
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  ASSERT_EQ(t->images.size(), 3u);
  for (int i = 0; i < 3; ++i) {
    const ReferenceImage& got = t->images[i];
    const ReferenceImage& want = tile.images[i];
    EXPECT_EQ(got.id, want.id) << i;
    EXPECT_EQ(got.name, want.name) << i;
    EXPECT_DOUBLE_EQ(got.timestamp_s, want.timestamp_s) << i;
    EXPECT_DOUBLE_EQ(got.position.lat_deg, want.position.lat_deg) << i;
    EXPECT_DOUBLE_EQ(got.position.lon_deg, want.position.lon_deg) << i;
    EXPECT_DOUBLE_EQ(got.position.height_m, want.position.height_m) << i;
    EXPECT_DOUBLE_EQ(got.attitude.heading_deg, want.attitude.heading_deg) << i;
    EXPECT_DOUBLE_EQ(got.attitude.pitch_deg, want.attitude.pitch_deg) << i;
    EXPECT_DOUBLE_EQ(got.attitude.roll_deg, want.attitude.roll_deg) << i;
    EXPECT_DOUBLE_EQ(got.sigma_h_m, want.sigma_h_m) << i;
    EXPECT_EQ(got.camera_id, want.camera_id) << i;
  }
}

TEST(MapStoreTest, CatalogRoundTrip) {
  Catalog c;
  c.map_version = 2;
  c.model_id = "feedbeef00112233";
  c.model_params = R"({"clusters":64})";
  c.model_blob = {9, 8, 7};
  c.tiles.push_back({TileKey{17, 5, 6}, "tiles/17/5/6-v2.sqlite", "ab", 10, 20, c.model_id});
  c.global_index = {1, 1};
  c.created_utc = "2026-01-01T00:00:00Z";
  const std::string path = ::testing::TempDir() + "/store/catalog.sqlite";
  ASSERT_TRUE(WriteCatalog(path, c).ok());
  auto r = ReadCatalog(path);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_EQ(r->map_version, 2);
  EXPECT_EQ(r->model_blob, c.model_blob);
  ASSERT_EQ(r->tiles.size(), 1u);
  EXPECT_EQ(r->tiles[0].key, (TileKey{17, 5, 6}));
  EXPECT_EQ(r->tiles[0].points, 20);
  EXPECT_EQ(r->global_index, c.global_index);
  EXPECT_EQ(GlobalImageId(3, 7) >> 32, 3);
  EXPECT_EQ(ImageIdOf(GlobalImageId(3, 7)), 7);
  EXPECT_EQ(TileOrdinalOf(GlobalImageId(3, 7)), 3);
  EXPECT_FALSE(r->integrity_fit.has_value());  // none until fit-integrity writes one
}

// The integrity overbound's record: written only once fitted, read back whole; a record that
// is not the fit's JSON, or a scale below 1, makes the catalog corrupt rather than quietly
// shrinking every protection level.
TEST(MapStoreTest, IntegrityFitRoundTripAndRefusal) {
  Catalog c;
  c.model_id = "feedbeef00112233";
  c.model_blob = {1};
  IntegrityFit f;
  f.overbound_scale = 1.25, f.drive = "query-dusk", f.drive_sha256 = "ab12";
  f.fixes = 48, f.excluded = 2, f.faults = 1, f.binding_z = 2.5, f.confidence = 0.9,
  f.map_version = 3;
  f.fitted_utc = "2026-12-04T00:00:00.000Z";
  c.integrity_fit = f;
  const std::string path = ::testing::TempDir() + "/store_fit/catalog.sqlite";
  ASSERT_TRUE(WriteCatalog(path, c).ok());
  auto r = ReadCatalog(path);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  ASSERT_TRUE(r->integrity_fit.has_value());
  EXPECT_EQ(r->integrity_fit->overbound_scale, 1.25);
  EXPECT_EQ(r->integrity_fit->drive, "query-dusk");
  EXPECT_EQ(r->integrity_fit->drive_sha256, "ab12");
  EXPECT_EQ(r->integrity_fit->fixes, 48);
  EXPECT_EQ(r->integrity_fit->excluded, 2);
  EXPECT_EQ(r->integrity_fit->faults, 1);
  EXPECT_EQ(r->integrity_fit->binding_z, 2.5);
  EXPECT_EQ(r->integrity_fit->confidence, 0.9);
  EXPECT_EQ(r->integrity_fit->map_version, 3);
  EXPECT_EQ(r->integrity_fit->fitted_utc, f.fitted_utc);
  // A record written before the fault screen existed (no "faults") reads as none screened.
  Result<IntegrityFit> older = ParseIntegrityFit(R"({"overbound_scale": 1.5, "drive": "d"})", path);
  ASSERT_TRUE(older.ok());
  EXPECT_EQ(older->faults, 0);
  c.integrity_fit->overbound_scale = 0.8;
  ASSERT_TRUE(WriteCatalog(path, c).ok());
  EXPECT_EQ(ReadCatalog(path).status().code(), StatusCode::kCorrupt);
}

TEST(MapStoreTest, DamagedFilesAreRefusedByName) {
  const std::string dir = ::testing::TempDir() + "/store_bad";
  fs::create_directories(dir);
  std::ofstream(dir + "/junk.sqlite") << "this is not a database";
  auto t = ReadTile(dir + "/junk.sqlite");
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.status().message().find("junk.sqlite"), std::string::npos);
  EXPECT_EQ(ReadTile(dir + "/none.sqlite").status().code(), StatusCode::kNotFound);
  EXPECT_EQ(ReadCatalog(dir + "/none.sqlite").status().code(), StatusCode::kNotFound);
  TileData bad = SampleTile();
  bad.images[1].point_ids.pop_back();  // arrays disagree: refused before anything is written
  EXPECT_FALSE(WriteTile(dir + "/bad.sqlite", bad).ok());
  EXPECT_FALSE(fs::exists(dir + "/bad.sqlite"));
}

}  // namespace
}  // namespace sightfix
