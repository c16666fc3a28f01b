// Self-calibration of a survey's cameras (self_calibration.h), once per calibration file over
// the whole drive, before any tile: every tile then uses the same refined camera and boresight.
#include <algorithm>
#include <cmath>
#include <opencv2/calib3d.hpp>

#include "indexer/builder/staging.h"

namespace sightfix::staging {
namespace {

namespace fs = std::filesystem;
using namespace build_internal;

// Rows of camera `cam` the calibration uses: all of them up to calibration_frames, else evenly
// spaced runs of consecutive frames (tracks need neighbours; a run of 40 frames spans a turn).
std::vector<int> CalibrationRows(const BuildOptions& o, const Survey& s, int cam) {
  std::vector<int> rows;
  for (size_t i = 0; i < s.rows.size(); ++i)
    if (s.camera_of_row[i] == cam) rows.push_back(static_cast<int>(i));
  const int cap = o.calibration_frames, n = static_cast<int>(rows.size());
  if (n <= cap) return rows;
  constexpr int kRun = 40;
  const int runs = std::max(1, cap / kRun);
  std::vector<int> picked;
  for (int r = 0; r < runs; ++r) {
    const int start = runs == 1 ? (n - kRun) / 2
                                : static_cast<int>(std::llround(1.0 * (n - kRun) * r / (runs - 1)));
    for (int i = std::max(0, start); i < std::min(n, start + kRun); ++i) picked.push_back(rows[i]);
  }
  picked.erase(std::unique(picked.begin(), picked.end()), picked.end());
  return picked;
}

json Array(const double* v, int n) { return std::vector<double>(v, v + n); }

// No timings: the plan's camera entries reach the catalog's provenance, whose bytes must not
// depend on the machine (slurm_test compares a cluster's map with a one-machine build).
json EstimateJson(const CalibrationEstimate& e) {
  std::vector<bool> estimated(e.estimated.begin(), e.estimated.end());
  return {{"status", "refined"},
          {"refined", CameraJson(e.refined)},
          {"boresight_rad", Array(e.boresight_rad.val, 3)},
          {"parameters",
           std::vector<std::string>(kCalibrationParameterNames, kCalibrationParameterNames + 6)},
          {"covariance", Array(e.covariance.val, 36)},
          {"prior_sigma", Array(e.prior_sigma.data(), 6)},
          {"posterior_sigma", Array(e.posterior_sigma.data(), 6)},
          {"estimated", estimated},
          {"time_offset_s", e.time_offset_s},
          {"time_offset_sigma_s", e.time_offset_sigma_s},
          {"time_offset_prior_sigma_s", e.time_offset_prior_sigma_s},
          {"time_offset_estimated", e.time_offset_estimated},
          {"move_chi2", e.move_chi2},
          {"move_dof", e.move_dof},
          {"move_alarm", e.move_alarm},
          {"frames", e.views},
          {"points", e.points},
          {"observations", e.observations},
          {"rms_before_px", e.rms_before_px},
          {"rms_after_px", e.rms_after_px}};
}

// One camera: its rows' features (into the cache), the views in an ENU frame at the first row,
// the solve.
Result<json> CalibrateCamera(const BuildOptions& o, const Survey& s, int cam, FeatureCache* cache) {
  Survey sub = SubSurvey(s, CalibrationRows(o, s, cam));
  const std::string file = sub.rows.front().camera;
  Say(o, "self-calibration of " + file + ": " + std::to_string(sub.rows.size()) + " frames");
  std::vector<std::string> skipped;  // build-tiles lists bad frames; here they only stay out
  if (Status st = ExtractAll(o, &sub, &skipped, cache); !st.ok()) return st;
  if (sub.rows.empty()) return json{{"status", "supplied"}, {"why", "no usable frame"}};
  const EnuFrame enu(sub.rows.front().position);
  SelfCalibrationOptions so = o.calibration;
  so.tracks.jobs = o.jobs;
  const Result<CalibrationEstimate> e =
      SelfCalibrateDrive(Views(sub, enu), s.cameras[cam], PriorOf(s.cameras[cam]), so);
  if (cache)  // the views borrowed the features until here
    for (size_t k = 0; k < sub.rows.size(); ++k)
      (*cache)[sub.rows[k].image] = std::move(sub.features[k]);
  if (e.ok()) {
    if (e->move_alarm)
      Say(o, "warning: " + file + " moved further than its stated uncertainty allows (chi-square " +
                 std::to_string(e->move_chi2) + " of " + std::to_string(e->move_dof) +
                 " dof): check the calibration file");
    return EstimateJson(*e);
  }
  const StatusCode code = e.status().code();
  if (code != StatusCode::kFailedPrecondition && code != StatusCode::kInvalidArgument)
    return e.status();
  // Too little structure, or a lens the solver does not model: the supplied calibration stays.
  return json{{"status", "supplied"}, {"why", e.status().message()}};
}

}  // namespace

json CameraJson(const CameraModel& c) {
  return {{"width", c.width_px},
          {"height", c.height_px},
          {"fx", c.fx},
          {"fy", c.fy},
          {"cx", c.cx},
          {"cy", c.cy},
          {"distortion", std::vector<double>(c.distortion.begin(), c.distortion.end())},
          {"lens", c.lens == LensModel::kFisheye ? "fisheye" : "pinhole"},
          {"sigma",
           {{"focal_px", c.uncertainty.focal_px},
            {"k1", c.uncertainty.k1},
            {"k2", c.uncertainty.k2},
            {"boresight_deg", c.uncertainty.boresight_deg}}}};
}

Result<CameraModel> CameraOfJson(const json& j) {
  try {
    CameraModel c;
    c.width_px = j.at("width").get<int>(), c.height_px = j.at("height").get<int>();
    c.fx = j.at("fx").get<double>(), c.fy = j.at("fy").get<double>();
    c.cx = j.at("cx").get<double>(), c.cy = j.at("cy").get<double>();
    const std::vector<double> d = j.at("distortion").get<std::vector<double>>();
    if (d.size() != 5) return Status::InvalidArgument("a camera needs 5 distortion values");
    std::copy(d.begin(), d.end(), c.distortion.begin());
    c.lens =
        j.at("lens").get<std::string>() == "fisheye" ? LensModel::kFisheye : LensModel::kPinhole;
    const json& u = j.at("sigma");
    c.uncertainty = {u.at("focal_px").get<double>(), u.at("k1").get<double>(),
                     u.at("k2").get<double>(), u.at("boresight_deg").get<double>()};
    std::string error;
    if (!c.IsValid(&error)) return Status::InvalidArgument("camera: " + error);
    return c;
  } catch (const json::exception& e) {
    return Status::InvalidArgument(std::string("camera: ") + e.what());
  }
}

Status CalibrateSurveyCameras(const BuildOptions& o, const Survey& s, json* cameras,
                              FeatureCache* cache) {
  for (size_t cam = 0; cam < s.cameras.size(); ++cam) {
    json& entry = (*cameras)[cam];
    entry["supplied"] = CameraJson(s.cameras[cam]);
    if (!o.self_calibration) {
      entry["calibration"] = {{"status", "supplied"}, {"why", "self-calibration is off"}};
      continue;
    }
    Result<json> c = CalibrateCamera(o, s, static_cast<int>(cam), cache);
    if (!c.ok()) return c.status();
    entry["calibration"] = *c;
  }
  return Status::Ok();
}

Result<CalibratedCamera> CalibratedCameraOf(const json& entry, const CameraModel& supplied) {
  CalibratedCamera out{supplied, cv::Matx33d::eye(), 0.0};
  if (!entry.contains("calibration")) return out;
  const json& c = entry.at("calibration");
  if (c.value("status", "") != "refined") return out;
  Result<CameraModel> refined = CameraOfJson(c.at("refined"));
  if (!refined.ok()) return refined.status();
  out.camera = *refined;
  out.time_offset_s = c.value("time_offset_s", 0.0);
  if (!std::isfinite(out.time_offset_s) || std::abs(out.time_offset_s) > 1)
    return Status::InvalidArgument("time_offset_s must be a number of seconds within +-1");
  const std::vector<double> b = c.at("boresight_rad").get<std::vector<double>>();
  if (b.size() != 3) return Status::InvalidArgument("boresight_rad needs 3 values");
  cv::Rodrigues(cv::Vec3d(b[0], b[1], b[2]), out.boresight);
  return out;
}

}  // namespace sightfix::staging
