// What self-calibration made of each calibration file, as the build summary and `inspect` print
// it: one line per file (supplied -> refined focal, k1, k2 with sigmas, boresight, move test), or
// "as supplied" with why. CAMERAS: the map's provenance "cameras" array (staging.h
// CalibrateSurveyCameras). Thread-safe (pure).
#pragma once

#include <nlohmann/json.hpp>
#include <string>

namespace sightfix {

std::string CalibrationLines(const nlohmann::json& cameras);
// A map's provenance (catalog) as `inspect` prints it: the drives as JSON without their cameras,
// then CalibrationLines of each drive's cameras.
std::string DrivesText(const nlohmann::json& provenance);

}  // namespace sightfix
