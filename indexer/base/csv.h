// The small CSV dialect of sightfix's files (drive.csv, gnss.csv, spoofing.csv): comma-separated,
// no quoting, one header row. Thread-safe (pure functions).
#pragma once

#include <fstream>
#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

// Fields of one line; a trailing comma gives a trailing empty field.
std::vector<std::string> SplitCsvLine(const std::string& line);
// A whole field as a finite number; false for empty, partial ("1.5x") or non-finite text.
bool ParseCsvNumber(const std::string& field, double* value);

// Reads a CSV whose first line must be `header`, handing each non-empty line's fields to
// parse(fields, &row, rows_so_far), which returns a Status naming what is wrong. kNotFound when
// the file cannot be opened; the first failure is kInvalidArgument "<path>:<line>: <what>".
template <typename Row, typename Parse>
Result<std::vector<Row>> ReadCsvRows(const std::string& path, const std::string& header,
                                     Parse parse) {
  std::ifstream in(path);
  if (!in) return Status::NotFound("cannot open " + path);
  std::string line;
  std::getline(in, line);
  if (!line.empty() && line.back() == '\r') line.pop_back();
  if (line != header) return Status::InvalidArgument(path + ":1: header must be '" + header + "'");
  std::vector<Row> rows;
  for (int n = 2; std::getline(in, line); ++n) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty()) continue;
    Row row;
    if (Status s = parse(SplitCsvLine(line), &row, rows); !s.ok())
      return Status::InvalidArgument(path + ":" + std::to_string(n) + ": " + s.message());
    rows.push_back(row);
  }
  return rows;
}

}  // namespace sightfix
