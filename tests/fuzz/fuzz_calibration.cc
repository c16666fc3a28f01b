// libFuzzer target: a calibration file (OpenCV FileStorage YAML, pinhole or fisheye), read as the
// indexer reads it (indexer/map/yaml_file.h). Invariant: a calibration that loads is valid.
#include <cmath>

#include "indexer/map/camera_model.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  auto cam = LoadCameraModel(fuzz::WriteInput("camera.yml", data, size));
  if (!cam.ok()) return 0;
  FUZZ_CHECK(cam->IsValid(nullptr));
  return 0;
}
