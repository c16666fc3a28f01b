#include "indexer/map/drive_manifest.h"

#include <cmath>
#include <cstdio>
#include <fstream>
#include <sstream>

#include "indexer/base/csv.h"
#include "indexer/base/iso_time.h"

namespace sightfix {

const char kDriveManifestHeader[] =
    "image,timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,camera,sigma_h_m";

namespace {

Status ParseRow(const std::vector<std::string>& f, DriveRow* row) {
  if (f.size() != 10)
    return Status::InvalidArgument("expected 10 columns, found " + std::to_string(f.size()));
  if (f[0].empty()) return Status::InvalidArgument("empty image path");
  row->image = f[0];
  Result<double> t = ParseIsoUtc(f[1]);
  if (!t.ok()) return t.status();
  row->timestamp_s = *t;
  const char* names[] = {"lat", "lon", "height", "heading_deg", "pitch_deg", "roll_deg"};
  double* dst[] = {&row->position.lat_deg,     &row->position.lon_deg,   &row->position.height_m,
                   &row->attitude.heading_deg, &row->attitude.pitch_deg, &row->attitude.roll_deg};
  for (int i = 0; i < 6; ++i) {
    if (!ParseCsvNumber(f[2 + i], dst[i]))
      return Status::InvalidArgument(std::string(names[i]) + " is not a finite number: '" +
                                     f[2 + i] + "'");
  }
  if (!IsValidGeoPoint(row->position)) return Status::InvalidArgument("lat/lon out of range");
  if (std::abs(row->attitude.pitch_deg) >= 90 || std::abs(row->attitude.roll_deg) > 180)
    return Status::InvalidArgument(
        "pitch_deg must be within (-90, 90), roll_deg within [-180, 180]");
  row->camera = f[8];
  if (row->camera.empty()) return Status::InvalidArgument("empty camera name");
  if (!ParseCsvNumber(f[9], &row->sigma_h_m) || row->sigma_h_m < 0)
    return Status::InvalidArgument("sigma_h_m must be a non-negative number");
  return Status::Ok();
}

}  // namespace

Status WriteDriveManifest(const std::string& path, const std::vector<DriveRow>& rows) {
  std::ofstream out(path, std::ios::trunc);
  if (!out) return Status::IoError("cannot write " + path);
  out << kDriveManifestHeader << "\n";
  char buf[512];
  for (const DriveRow& r : rows) {
    std::snprintf(buf, sizeof(buf), "%s,%s,%.9f,%.9f,%.4f,%.4f,%.4f,%.4f,%s,%.4f\n",
                  r.image.c_str(), FormatIsoUtc(r.timestamp_s).c_str(), r.position.lat_deg,
                  r.position.lon_deg, r.position.height_m, r.attitude.heading_deg,
                  r.attitude.pitch_deg, r.attitude.roll_deg, r.camera.c_str(), r.sigma_h_m);
    out << buf;
  }
  out.flush();
  return out ? Status::Ok() : Status::IoError("write failed for " + path);
}

Result<std::vector<DriveRow>> ReadDriveManifest(const std::string& path,
                                                std::vector<std::string>* bad_rows,
                                                std::vector<int>* line_numbers) {
  std::ifstream in(path);
  if (!in) return Status::NotFound("cannot open drive manifest " + path);
  std::string line;
  if (!std::getline(in, line)) return Status::InvalidArgument(path + ":1: empty file");
  if (!line.empty() && line.back() == '\r') line.pop_back();
  if (line != kDriveManifestHeader)
    return Status::InvalidArgument(path + ":1: header must be '" +
                                   std::string(kDriveManifestHeader) + "'");
  std::vector<DriveRow> rows;
  for (int line_no = 2; std::getline(in, line); ++line_no) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty()) continue;
    DriveRow row;
    Status s = ParseRow(SplitCsvLine(line), &row);
    if (s.ok() && !rows.empty() && row.timestamp_s < rows.back().timestamp_s)
      s = Status::InvalidArgument("timestamp out of order (before the row above)");
    if (!s.ok()) {
      const std::string what = path + ":" + std::to_string(line_no) + ": " + s.message();
      if (!bad_rows) return Status::InvalidArgument(what);
      bad_rows->push_back(what);
      continue;
    }
    rows.push_back(std::move(row));
    if (line_numbers) line_numbers->push_back(line_no);
  }
  return rows;
}

}  // namespace sightfix
