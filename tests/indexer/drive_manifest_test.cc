#include "indexer/map/drive_manifest.h"

#include <gtest/gtest.h>

#include <fstream>
#include <iterator>
#include <string>

#include "indexer/base/iso_time.h"

namespace sightfix {
namespace {

TEST(IsoTimeTest, FormatAndParse) {
  // 2026-05-04T09:00:00Z is 1777885200 s after the Unix epoch: python3 datetime
  // (datetime.fromisoformat("2026-05-04T09:00:00+00:00").timestamp() = 1777885200.0) and GNU date
  // (date -u -d 2026-05-04T09:00:00Z +%s = 1777885200) agree. 11:00:01.25 at +02:00 is
  // 1777885201.25 by python3 datetime.
  Result<double> t = ParseIsoUtc("2026-05-04T09:00:00Z");
  ASSERT_TRUE(t.ok());
  EXPECT_EQ(*t, 1777885200.0);
  EXPECT_EQ(FormatIsoUtc(*t), "2026-05-04T09:00:00.000Z");
  EXPECT_EQ(FormatIsoUtc(1777885200.0), "2026-05-04T09:00:00.000Z");
  EXPECT_NEAR(*ParseIsoUtc("2026-05-04T11:00:01.25+02:00"), 1777885201.25, 1e-6);
  EXPECT_NEAR(*ParseIsoUtc("2026-05-04T11:00:01.25+02:00") - *t, 1.25, 1e-9);
  EXPECT_EQ(FormatIsoUtc(*t + 0.0004), "2026-05-04T09:00:00.000Z");
  EXPECT_EQ(FormatIsoUtc(0), "1970-01-01T00:00:00.000Z");
  EXPECT_FALSE(ParseIsoUtc("2026-13-04T09:00:00Z").ok());
  EXPECT_FALSE(ParseIsoUtc("2026-05-04 09:00:00").ok());
}

TEST(DriveManifestTest, RoundTrip) {
  const std::string path = ::testing::TempDir() + "/drive_roundtrip.csv";
  DriveRow row;
  row.image = "images/000001.jpg";
  row.timestamp_s = 1777885200.5;
  row.position = {44.000123456, -39.999876543, 41.5};
  row.attitude = {271.25, 1.5, -0.25};
  row.camera = "camera.yml";
  row.sigma_h_m = 0.02;
  ASSERT_TRUE(WriteDriveManifest(path, {row, row}).ok());
  Result<std::vector<DriveRow>> rows = ReadDriveManifest(path);
  ASSERT_TRUE(rows.ok()) << rows.status().ToString();
  ASSERT_EQ(rows->size(), 2u);
  EXPECT_EQ((*rows)[1].image, row.image);
  EXPECT_NEAR((*rows)[1].position.lat_deg, row.position.lat_deg, 1e-9);
  EXPECT_NEAR((*rows)[1].attitude.heading_deg, 271.25, 1e-9);
  EXPECT_NEAR((*rows)[1].timestamp_s, row.timestamp_s, 1e-6);
  // The file holds the time as ISO 8601 UTC: 1777885200.5 s is 2026-05-04T09:00:00.500Z
  // (python3 datetime.fromtimestamp(1777885200.5, timezone.utc)).
  std::ifstream f(path);
  const std::string text((std::istreambuf_iterator<char>(f)), {});
  EXPECT_NE(text.find(",2026-05-04T09:00:00.500Z,"), std::string::npos) << text;
}

TEST(DriveManifestTest, BadRowNamesFileAndLine) {
  const std::string path = ::testing::TempDir() + "/drive_bad.csv";
  std::ofstream(path) << kDriveManifestHeader << "\n"
                      << "a.jpg,2026-05-04T09:00:00Z,44,-40,1,0,0,0,camera.yml,0.02\n"
                      << "b.jpg,2026-05-04T09:00:01Z,nan,-40,1,0,0,0,camera.yml,0.02\n";
  Result<std::vector<DriveRow>> rows = ReadDriveManifest(path);
  ASSERT_FALSE(rows.ok());
  EXPECT_NE(rows.status().message().find("drive_bad.csv:3: lat"), std::string::npos)
      << rows.status().message();
  std::ofstream(path) << kDriveManifestHeader << "\n"
                      << "a.jpg,2026-05-04T09:00:00Z,95,-40,1,0,0,0,camera.yml,0.02\n";
  EXPECT_NE(ReadDriveManifest(path).status().message().find(":2: lat/lon out of range"),
            std::string::npos);
}

}  // namespace
}  // namespace sightfix
