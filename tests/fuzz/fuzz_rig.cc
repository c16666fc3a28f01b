// libFuzzer target: a rig. The first byte picks the file the rest of the input replaces:
// rig.yml (then the whole survey is composed from it), or the INS log ins.csv; the other files
// of a small valid two-camera rig stay in place. Invariant: composed rows are in time order with
// positions in range.
#include <cmath>

#include "indexer/builder/rig.h"
#include "tests/fuzz/fuzz_input.h"

namespace {

const char kRig[] =
    "%YAML:1.0\n---\nins: ins.csv\ncameras:\n"
    "  - name: front\n    calibration: cam.yml\n    images: front.csv\n"
    "    lever_arm_m: [0.0, 0.0, 1.2]\n    boresight_deg: [0.0, 0.0, 0.0]\n    time_offset_s: 0.1\n"
    "  - name: right\n    calibration: cam.yml\n    images: right.csv\n"
    "    lever_arm_m: [0.5, 0.0, 1.2]\n    boresight_deg: [90.0, 0.0, 0.0]\n    time_offset_s: "
    "0.0\n";
const char kIns[] =
    "timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,sigma_h_m\n"
    "2026-05-04T09:00:00Z,44.0000,-40.0,50,10,0,0,0.02\n"
    "2026-05-04T09:00:01Z,44.0001,-40.0,52,20,0,0,0.02\n"
    "2026-05-04T09:00:05Z,44.0002,-40.0,52,20,0,0,0.02\n";
const char kCam[] =
    "%YAML:1.0\n---\nimage_width: 64\nimage_height: 48\n"
    "camera_matrix: !!opencv-matrix\n  rows: 3\n  cols: 3\n  dt: d\n  data: [50, 0, 32, 0, 50, 24, "
    "0, 0, 1]\n"
    "distortion_coefficients: !!opencv-matrix\n  rows: 1\n  cols: 5\n  dt: d\n  data: [0, 0, 0, 0, "
    "0]\n";

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  if (size < 1) return 0;
  static const bool once = [] {
    fuzz::WriteText("cam.yml", kCam);
    fuzz::WriteText(
        "front.csv",
        "image,timestamp\nf0.jpg,2026-05-04T09:00:00.400Z\nf1.jpg,2026-05-04T09:00:03Z\n");
    fuzz::WriteText("right.csv", "image,timestamp\nr0.jpg,2026-05-04T09:00:00.500Z\n");
    return true;
  }();
  (void)once;
  const bool rig_file = data[0] & 1;
  fuzz::WriteText(rig_file ? "ins.csv" : "rig.yml", rig_file ? kIns : kRig);
  const std::string path = fuzz::WriteInput(rig_file ? "rig.yml" : "ins.csv", data + 1, size - 1);
  if (!rig_file) {
    auto log = ReadInsLog(path);
    if (log.ok() && !log->empty()) InsPoseAt(*log, log->front().time_s + 0.5, 2);
  }
  auto rig = LoadRig(fuzz::Dir() + "/rig.yml");
  if (!rig.ok()) return 0;
  std::vector<std::string> problems;
  auto rows = RigSurvey(*rig, 2, true, &problems);
  if (!rows.ok()) return 0;
  for (size_t i = 0; i < rows->size(); ++i) {
    FUZZ_CHECK(std::isfinite((*rows)[i].position.lat_deg) &&
               std::fabs((*rows)[i].position.lat_deg) <= 90.000001);
    if (i > 0) FUZZ_CHECK((*rows)[i].timestamp_s >= (*rows)[i - 1].timestamp_s);
  }
  return 0;
}
