// The small CSV dialect of sightfix's files (drive.csv, gnss.csv, spoofing.csv): comma-separated,
// no quoting, one header row. Thread-safe (pure functions).
#pragma once

#include <string>
#include <vector>

namespace sightfix {

// Fields of one line; a trailing comma gives a trailing empty field.
std::vector<std::string> SplitCsvLine(const std::string& line);
// A whole field as a finite number; false for empty, partial ("1.5x") or non-finite text.
bool ParseCsvNumber(const std::string& field, double* value);

}  // namespace sightfix
