#include "indexer/builder/rig.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <opencv2/calib3d.hpp>
#include <opencv2/core/persistence.hpp>

#include "indexer/base/csv.h"
#include "indexer/base/iso_time.h"
#include "indexer/map/yaml_file.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

cv::Matx33d Slerp(const cv::Matx33d& a, const cv::Matx33d& b, double u) {
  cv::Vec3d w;
  cv::Rodrigues(cv::Mat(a.t() * b), w);
  cv::Matx33d step;
  cv::Rodrigues(u * w, step);
  return a * step;
}

Status ParseInsRow(const std::vector<std::string>& f, InsPose* p,
                   const std::vector<InsPose>& prev) {
  if (f.size() != 8)
    return Status::InvalidArgument("expected 8 columns, found " + std::to_string(f.size()));
  Result<double> t = ParseIsoUtc(f[0]);
  if (!t.ok()) return t.status();
  p->time_s = *t;
  double* dst[] = {&p->position.lat_deg,   &p->position.lon_deg,
                   &p->position.height_m,  &p->attitude.heading_deg,
                   &p->attitude.pitch_deg, &p->attitude.roll_deg,
                   &p->sigma_h_m};
  for (int i = 0; i < 7; ++i)
    if (!ParseCsvNumber(f[1 + i], dst[i]))
      return Status::InvalidArgument("column " + std::to_string(i + 2) + " is not a number");
  if (std::fabs(p->position.lat_deg) > 90 || std::fabs(p->position.lon_deg) > 180)
    return Status::InvalidArgument("latitude or longitude out of range");
  if (p->sigma_h_m < 0) return Status::InvalidArgument("sigma_h_m must be >= 0");
  if (!prev.empty() && p->time_s <= prev.back().time_s)
    return Status::InvalidArgument("timestamps out of order");
  return Status::Ok();
}

struct TimedImage {
  std::string image;
  double time_s = 0;
};

Result<Rig> ReadRig(const std::string& path) {
  Rig rig;
  rig.dir = fs::path(path).parent_path().string();
  Result<YAML::Node> doc = LoadYamlFile(path);  // not cv::FileStorage: indexer/map/yaml_file.h
  if (!doc.ok())
    return doc.status().code() == StatusCode::kNotFound
               ? Status::NotFound("cannot open rig file " + path)
               : doc.status();
  Result<std::string> ins = YamlText((*doc)["ins"], "ins");
  if (!ins.ok() || ins->empty())
    return Status::InvalidArgument(path + ": no 'ins' (the INS pose log)");
  rig.ins = *ins;
  const YAML::Node cams = (*doc)["cameras"];
  if (!cams || !cams.IsSequence() || cams.size() == 0)
    return Status::InvalidArgument(path + ": no 'cameras' list");
  for (size_t i = 0; i < cams.size(); ++i) {
    const YAML::Node c = cams[i];
    RigCamera cam;
    const std::string where = path + ": camera " + std::to_string(i + 1) + ": ";
    if (!c.IsMap()) return Status::InvalidArgument(where + "must be a mapping");
    for (auto [key, out] : {std::pair<const char*, std::string*>{"name", &cam.name},
                            {"calibration", &cam.calibration},
                            {"images", &cam.images}}) {
      Result<std::string> v = YamlText(c[key], key);
      if (!v.ok() || v->empty())
        return Status::InvalidArgument(where + "needs name, calibration and images");
      *out = *v;
    }
    int rows = 0, cols = 0;
    Result<std::vector<double>> arm = YamlMatrix(c["lever_arm_m"], "lever_arm_m", &rows, &cols);
    Result<std::vector<double>> bore =
        YamlMatrix(c["boresight_deg"], "boresight_deg", &rows, &cols);
    if (!arm.ok() || !bore.ok() || arm->size() != 3 || bore->size() != 3)
      return Status::InvalidArgument(where + "lever_arm_m and boresight_deg need 3 numbers");
    if (c["time_offset_s"]) {
      Result<double> t = YamlNumber(c["time_offset_s"], "time_offset_s");
      if (!t.ok()) return Status::InvalidArgument(where + t.status().message());
      cam.time_offset_s = *t;
    }
    cam.lever_arm_m = {(*arm)[0], (*arm)[1], (*arm)[2]};
    cam.boresight = {(*bore)[0], (*bore)[1], (*bore)[2]};
    rig.cameras.push_back(cam);
  }
  return rig;
}

}  // namespace

Result<Rig> LoadRig(const std::string& path) {
  try {
    return ReadRig(path);
  } catch (const std::exception& e) {  // a yaml-cpp accessor on a malformed node
    return Status::InvalidArgument(path + ": unreadable rig file: " + e.what());
  }
}

Result<std::vector<InsPose>> ReadInsLog(const std::string& path) {
  return ReadCsvRows<InsPose>(
      path, "timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,sigma_h_m", ParseInsRow);
}

Result<InsPose> InsPoseAt(const std::vector<InsPose>& log, double t, double max_gap_s) {
  if (log.size() < 2 || t < log.front().time_s || t > log.back().time_s)
    return Status::InvalidArgument("time " + FormatIsoUtc(t) + " lies outside the INS log");
  size_t hi = 1;
  while (log[hi].time_s < t) ++hi;
  if (log[hi].time_s == t) return log[hi];  // on a sample: no gap to bridge
  const InsPose& a = log[hi - 1];
  const InsPose& b = log[hi];
  if (b.time_s - a.time_s > max_gap_s)
    return Status::InvalidArgument("time " + FormatIsoUtc(t) + " falls in a gap of " +
                                   std::to_string(b.time_s - a.time_s) + " s in the INS log");
  const double u = (t - a.time_s) / (b.time_s - a.time_s);
  const GeodesicInverse g = GeodesicBetween(a.position.lat_deg, a.position.lon_deg,
                                            b.position.lat_deg, b.position.lon_deg);
  const GeodesicDirect p =
      GeodesicFrom(a.position.lat_deg, a.position.lon_deg, g.azimuth1_deg, u * g.distance_m);
  InsPose out;
  out.time_s = t;
  out.position = {p.lat_deg, p.lon_deg,
                  a.position.height_m + u * (b.position.height_m - a.position.height_m)};
  out.attitude =
      AttitudeFromEnuFromCamera(Slerp(EnuFromCamera(a.attitude), EnuFromCamera(b.attitude), u));
  out.sigma_h_m = std::max(a.sigma_h_m, b.sigma_h_m);
  return out;
}

InsPose CameraPose(const InsPose& body, const RigCamera& camera) {
  const cv::Matx33d enu_body = EnuFromCamera(body.attitude);
  const cv::Matx33d body_cam = EnuFromCamera(Attitude{}).t() * EnuFromCamera(camera.boresight);
  const EnuFrame local(body.position);
  InsPose out = body;
  out.position = local.ToGeo(enu_body * camera.lever_arm_m);
  out.attitude = AttitudeFromEnuFromCamera(enu_body * body_cam);
  return out;
}

Result<std::vector<DriveRow>> RigSurvey(const Rig& rig, double max_gap_s, bool skip_bad,
                                        std::vector<std::string>* problems) {
  const fs::path dir(rig.dir);
  Result<std::vector<InsPose>> log = ReadInsLog((dir / rig.ins).string());
  if (!log.ok()) return log.status();
  std::vector<DriveRow> rows;
  for (const RigCamera& cam : rig.cameras) {
    const std::string list = (dir / cam.images).string();
    auto parse = [](const std::vector<std::string>& f, TimedImage* r,
                    const std::vector<TimedImage>&) {
      if (f.size() != 2)
        return Status::InvalidArgument("expected 2 columns, found " + std::to_string(f.size()));
      Result<double> t = ParseIsoUtc(f[1]);
      if (!t.ok()) return t.status();
      r->image = f[0], r->time_s = *t;
      return f[0].empty() ? Status::InvalidArgument("empty image path") : Status::Ok();
    };
    Result<std::vector<TimedImage>> images =
        ReadCsvRows<TimedImage>(list, "image,timestamp", parse);
    if (!images.ok()) return images.status();
    for (size_t i = 0; i < images->size(); ++i) {
      const TimedImage& im = (*images)[i];
      Result<InsPose> body = InsPoseAt(*log, im.time_s + cam.time_offset_s, max_gap_s);
      if (!body.ok()) {
        const std::string what =
            list + ":" + std::to_string(i + 2) + ": " + body.status().message();
        if (!skip_bad) return Status::InvalidArgument(what);
        problems->push_back(what);
        continue;
      }
      const InsPose pose = CameraPose(*body, cam);
      DriveRow r;
      r.image = im.image;
      r.timestamp_s = pose.time_s;
      r.position = pose.position;
      r.attitude = pose.attitude;
      r.camera = cam.calibration;
      r.sigma_h_m = pose.sigma_h_m;
      rows.push_back(r);
    }
  }
  std::stable_sort(rows.begin(), rows.end(), [](const DriveRow& a, const DriveRow& b) {
    return a.timestamp_s < b.timestamp_s;
  });
  return rows;
}

}  // namespace sightfix
