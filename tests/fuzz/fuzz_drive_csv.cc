// libFuzzer target: drive.csv, strict and with bad rows skipped. Invariants: every row returned
// has finite coordinates in range and times that never go back (cameras of a rig may share one);
// line numbers match the rows.
#include <cmath>

#include "indexer/map/drive_manifest.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  const std::string path = fuzz::WriteInput("drive.csv", data, size);
  ReadDriveManifest(path);
  std::vector<std::string> bad;
  std::vector<int> lines;
  auto rows = ReadDriveManifest(path, &bad, &lines);
  if (!rows.ok()) return 0;
  FUZZ_CHECK(lines.size() == rows->size());
  for (size_t i = 0; i < rows->size(); ++i) {
    const DriveRow& r = (*rows)[i];
    FUZZ_CHECK(std::isfinite(r.position.lat_deg) && std::fabs(r.position.lat_deg) <= 90);
    FUZZ_CHECK(std::isfinite(r.position.lon_deg) && std::fabs(r.position.lon_deg) <= 180);
    FUZZ_CHECK(lines[i] >= 2);
    if (i > 0) FUZZ_CHECK(r.timestamp_s >= (*rows)[i - 1].timestamp_s);
  }
  return 0;
}
