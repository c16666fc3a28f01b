#include "indexer/map/camera_model.h"

#include <cmath>

#include "indexer/map/yaml_file.h"

namespace sightfix {

bool CameraModel::IsValid(std::string* error) const {
  auto fail = [&](const char* what) {
    if (error) *error = what;
    return false;
  };
  if (width_px <= 0 || height_px <= 0) return fail("image_width/image_height must be positive");
  if (!(fx > 0) || !(fy > 0) || !std::isfinite(fx) || !std::isfinite(fy))
    return fail("camera_matrix focal lengths must be positive and finite");
  if (!(cx >= 0 && cx < width_px && cy >= 0 && cy < height_px))
    return fail("camera_matrix principal point lies outside the image");
  for (double d : distortion)
    if (!std::isfinite(d)) return fail("distortion_coefficients must be finite");
  const CalibrationUncertainty& u = uncertainty;
  for (double v : {u.focal_px, u.k1, u.k2, u.boresight_deg})
    if (!(std::isfinite(v) && v >= 0)) return fail("calibration sigmas must be finite and >= 0");
  if (!(readout_s >= 0 && readout_s <= kMaxReadoutS))
    return fail("rolling_shutter_readout_ms must be 0 to 200");
  return true;
}

bool CameraModel::HasDistortion() const {
  for (double d : distortion)
    if (d != 0) return true;
  return false;
}

cv::Point2d CameraModel::Distort(const cv::Point2d& p) const {
  if (lens == LensModel::kFisheye) {
    const auto& [k1, k2, k3, k4, unused] = distortion;
    const double r = std::hypot(p.x, p.y);
    if (r < 1e-15) return p;
    const double t = std::atan(r), t2 = t * t;
    const double td = t * (1 + t2 * (k1 + t2 * (k2 + t2 * (k3 + t2 * k4))));
    return {p.x * td / r, p.y * td / r};
  }
  const auto& [k1, k2, p1, p2, k3] = distortion;
  const double x = p.x, y = p.y, r2 = x * x + y * y;
  const double radial = 1 + r2 * (k1 + r2 * (k2 + r2 * k3));
  return {x * radial + 2 * p1 * x * y + p2 * (r2 + 2 * x * x),
          y * radial + p1 * (r2 + 2 * y * y) + 2 * p2 * x * y};
}

cv::Point2d CameraModel::Undistort(const cv::Point2d& target) const {
  if (!HasDistortion()) return target;
  cv::Point2d p = target;
  for (int iter = 0; iter < 50; ++iter) {
    // Newton step with a numeric Jacobian: robust and exact enough for a 2x2 system.
    const cv::Point2d f = Distort(p) - target;
    if (std::abs(f.x) + std::abs(f.y) < 1e-14) break;
    const double h = 1e-7;
    const cv::Point2d dx = (Distort({p.x + h, p.y}) - Distort(p)) / h;
    const cv::Point2d dy = (Distort({p.x, p.y + h}) - Distort(p)) / h;
    const double det = dx.x * dy.y - dy.x * dx.y;
    if (std::abs(det) < 1e-12) break;
    p.x -= (f.x * dy.y - dy.x * f.y) / det;
    p.y -= (dx.x * f.y - f.x * dx.y) / det;
  }
  return p;
}

cv::Point2d CameraModel::Project(const cv::Vec3d& pc) const {
  const cv::Point2d d = Distort({pc[0] / pc[2], pc[1] / pc[2]});
  return {fx * d.x + cx, fy * d.y + cy};
}

cv::Point2d CameraModel::PixelToNormalized(const cv::Point2d& pixel) const {
  return Undistort({(pixel.x - cx) / fx, (pixel.y - cy) / fy});
}

namespace {

// The optional uncertainty keys: each a finite number >= 0 where present.
Status ReadUncertainty(const YAML::Node& fs, CalibrationUncertainty* u) {
  const std::pair<const char*, double*> keys[] = {{"focal_length_sigma_px", &u->focal_px},
                                                  {"k1_sigma", &u->k1},
                                                  {"k2_sigma", &u->k2},
                                                  {"boresight_sigma_deg", &u->boresight_deg}};
  for (const auto& [key, out] : keys) {
    if (!fs[key]) continue;
    Result<double> v = YamlNumber(fs[key], key);
    if (!v.ok()) return v.status();
    if (!std::isfinite(*v) || *v < 0)
      return Status::InvalidArgument(std::string(key) + " must be a finite number >= 0");
    *out = *v;
  }
  return Status::Ok();
}

Result<CameraModel> ReadCalibration(const std::string& path) {
  // yaml-cpp, not cv::FileStorage: indexer/map/yaml_file.h says why.
  Result<YAML::Node> doc = LoadYamlFile(path);
  if (!doc.ok())
    return doc.status().code() == StatusCode::kNotFound
               ? Status::NotFound("cannot open calibration file " + path)
               : doc.status();
  const YAML::Node& fs = *doc;
  auto fail = [&](const Status& s) { return Status::InvalidArgument(path + ": " + s.message()); };
  CameraModel cam;
  Result<double> w = YamlNumber(fs["image_width"], "image_width");
  Result<double> h = YamlNumber(fs["image_height"], "image_height");
  if (!w.ok()) return fail(w.status());
  if (!h.ok()) return fail(h.status());
  if (*w < 1 || *w > 100000 || *h < 1 || *h > 100000 || *w != std::floor(*w) ||
      *h != std::floor(*h))
    return Status::InvalidArgument(
        path + ": image_width and image_height must be whole numbers of pixels");
  cam.width_px = static_cast<int>(*w);
  cam.height_px = static_cast<int>(*h);
  int rows = 0, cols = 0;
  Result<std::vector<double>> k = YamlMatrix(fs["camera_matrix"], "camera_matrix", &rows, &cols);
  if (!k.ok()) return fail(k.status());
  if (rows != 3 || cols != 3) return Status::InvalidArgument(path + ": camera_matrix must be 3x3");
  cam.fx = (*k)[0];
  cam.fy = (*k)[4];
  cam.cx = (*k)[2];
  cam.cy = (*k)[5];
  std::vector<double> d;
  if (fs["distortion_coefficients"]) {
    Result<std::vector<double>> dd =
        YamlMatrix(fs["distortion_coefficients"], "distortion_coefficients", nullptr, nullptr);
    if (!dd.ok()) return fail(dd.status());
    d = *dd;
  }
  std::string model;
  if (fs["distortion_model"]) {
    Result<std::string> m = YamlText(fs["distortion_model"], "distortion_model");
    if (!m.ok()) return fail(m.status());
    model = *m;
  }
  double fisheye_flag = 0;
  if (fs["fisheye_model"]) {
    Result<double> f = YamlNumber(fs["fisheye_model"], "fisheye_model");
    if (!f.ok()) return fail(f.status());
    fisheye_flag = *f;
  }
  if (model == "fisheye" || fisheye_flag != 0) {
    cam.lens = LensModel::kFisheye;
    if (d.size() != 4)
      return Status::InvalidArgument(path +
                                     ": a fisheye calibration needs 4 distortion_coefficients");
    for (int i = 0; i < 4; ++i) cam.distortion[i] = d[i];
  } else if (!model.empty() && model != "pinhole") {
    return Status::InvalidArgument(path + ": distortion_model must be pinhole or fisheye");
  } else if (!d.empty()) {
    const int n = static_cast<int>(d.size());
    if (n != 4 && n != 5 && n != 8)
      return Status::InvalidArgument(path + ": distortion_coefficients must have 4, 5 or 8 values");
    if (n == 8 && (d[5] != 0 || d[6] != 0 || d[7] != 0))
      return Status::InvalidArgument(path + ": the rational model (k4..k6) is not supported");
    for (int i = 0; i < std::min(n, 5); ++i) cam.distortion[i] = d[i];
  }
  Status u = ReadUncertainty(fs, &cam.uncertainty);
  if (!u.ok()) return fail(u);
  if (fs["rolling_shutter_readout_ms"]) {
    Result<double> r = YamlNumber(fs["rolling_shutter_readout_ms"], "rolling_shutter_readout_ms");
    if (!r.ok()) return fail(r.status());
    cam.readout_s = *r / 1000;
  }
  std::string error;
  if (!cam.IsValid(&error)) return Status::InvalidArgument(path + ": " + error);
  return cam;
}

}  // namespace

CalibrationUncertainty UncertaintyOrDefault(const CameraModel& c) {
  CalibrationUncertainty u = c.uncertainty;
  if (!(u.focal_px > 0)) u.focal_px = 0.01 * c.fx;
  if (!(u.k1 > 0)) u.k1 = 0.03;
  if (!(u.k2 > 0)) u.k2 = c.distortion[1] != 0 ? 0.01 : 0.0;
  if (!(u.boresight_deg > 0)) u.boresight_deg = 0.5;
  return u;
}

Result<CameraModel> LoadCameraModel(const std::string& path) {
  try {
    return ReadCalibration(path);
  } catch (const std::exception& e) {  // a yaml-cpp accessor on a malformed node
    return Status::InvalidArgument(path + ": unreadable calibration: " + e.what());
  }
}

Status SaveCameraModel(const CameraModel& cam, const std::string& path) {
  try {
    cv::FileStorage fs(path, cv::FileStorage::WRITE);
    if (!fs.isOpened()) return Status::IoError("cannot write " + path);
    fs << "image_width" << cam.width_px << "image_height" << cam.height_px;
    fs << "camera_matrix" << cv::Mat(cam.K());
    const bool fisheye = cam.lens == LensModel::kFisheye;
    if (fisheye)
      fs << "distortion_model"
         << "fisheye";
    fs << "distortion_coefficients"
       << cv::Mat(1, fisheye ? 4 : 5, CV_64F, const_cast<double*>(cam.distortion.data()));
    const CalibrationUncertainty& u = cam.uncertainty;
    if (u.focal_px > 0) fs << "focal_length_sigma_px" << u.focal_px;
    if (u.k1 > 0) fs << "k1_sigma" << u.k1;
    if (u.k2 > 0) fs << "k2_sigma" << u.k2;
    if (u.boresight_deg > 0) fs << "boresight_sigma_deg" << u.boresight_deg;
    if (cam.readout_s > 0) fs << "rolling_shutter_readout_ms" << cam.readout_s * 1000;
    return Status::Ok();
  } catch (const cv::Exception& e) {
    return Status::IoError("cannot write " + path + ": " + e.what());
  }
}

}  // namespace sightfix
