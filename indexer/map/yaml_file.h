// Calibration and rig files: YAML as OpenCV's FileStorage writes it (a "%YAML:1.0" first line,
// "!!opencv-matrix" maps of rows, cols, dt and data), read with yaml-cpp rather than with
// FileStorage. FileStorage in OpenCV 4.6 loops forever on some malformed files (three lines were
// enough, found by fuzz_calibration; tests/fuzz/regressions/calibration/) and asks for 16 GiB on
// others; a mapping team's typo must give an error, not a hung indexer.
// Before parsing, a file is refused when it is over 1 MiB or nests deeper than 32 levels
// (yaml-cpp recurses per level). Thread safety: pure functions.
#pragma once

#include <yaml-cpp/yaml.h>

#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

// The document's root mapping; kNotFound when the file cannot be read, kInvalidArgument naming
// the file (and line, where yaml-cpp gives one) otherwise.
Result<YAML::Node> LoadYamlFile(const std::string& path);

// An "!!opencv-matrix" node (or a plain sequence) as row-major doubles; kInvalidArgument when
// rows x cols does not match the data or a value is not a number.
Result<std::vector<double>> YamlMatrix(const YAML::Node& node, const std::string& what, int* rows,
                                       int* cols);

// Scalars: failures come back as kInvalidArgument naming `what`. yaml-cpp accessors may still
// throw YAML::Exception on malformed nodes: callers read a whole file inside one try
// (LoadCameraModel, LoadRig).
Result<double> YamlNumber(const YAML::Node& node, const std::string& what);
Result<std::string> YamlText(const YAML::Node& node, const std::string& what);

}  // namespace sightfix
