#include "server/wire/wire.h"

#include <cmath>

namespace sightfix {
namespace {

int Be16(const std::string& b, size_t i) {
  return (static_cast<uint8_t>(b[i]) << 8) | static_cast<uint8_t>(b[i + 1]);
}

std::optional<std::pair<int, int>> JpegDimensions(const std::string& b) {
  size_t i = 2;  // after SOI
  while (i + 4 <= b.size()) {
    if (static_cast<uint8_t>(b[i]) != 0xff) return std::nullopt;
    const uint8_t marker = static_cast<uint8_t>(b[i + 1]);
    if (marker == 0xff) {  // fill byte
      ++i;
      continue;
    }
    const int len = Be16(b, i + 2);
    // SOF0..SOF15 carry the frame size, except DHT (C4), JPG (C8) and DAC (CC).
    if (marker >= 0xc0 && marker <= 0xcf && marker != 0xc4 && marker != 0xc8 && marker != 0xcc) {
      if (i + 9 > b.size()) return std::nullopt;
      return std::make_pair(Be16(b, i + 7), Be16(b, i + 5));
    }
    if (len < 2) return std::nullopt;
    i += 2 + len;
  }
  return std::nullopt;
}

}  // namespace

std::optional<std::pair<int, int>> ImageDimensions(const std::string& b) {
  static const char kPng[] = "\x89PNG\r\n\x1a\n";
  if (b.size() >= 24 && b.compare(0, 8, kPng, 8) == 0 && b.compare(12, 4, "IHDR") == 0) {
    auto be32 = [&](size_t i) { return (Be16(b, i) << 16) | Be16(b, i + 2); };
    return std::make_pair(be32(16), be32(20));
  }
  if (b.size() >= 4 && static_cast<uint8_t>(b[0]) == 0xff && static_cast<uint8_t>(b[1]) == 0xd8)
    return JpegDimensions(b);
  return std::nullopt;
}

v1::Calibration CalibrationToProto(const CameraModel& c) {
  v1::Calibration p;
  p.set_width(c.width_px);
  p.set_height(c.height_px);
  p.set_fx(c.fx), p.set_fy(c.fy), p.set_cx(c.cx), p.set_cy(c.cy);
  const bool fisheye = c.lens == LensModel::kFisheye;
  for (int i = 0; i < (fisheye ? 4 : 5); ++i) p.add_distortion(c.distortion[i]);
  p.set_fisheye(fisheye);
  p.set_focal_length_sigma_px(c.uncertainty.focal_px);
  p.set_k1_sigma(c.uncertainty.k1);
  return p;
}

Result<CameraModel> CalibrationFromProto(const v1::Calibration& p) {
  CameraModel c;
  c.width_px = static_cast<int>(std::min<uint32_t>(p.width(), 1 << 20));
  c.height_px = static_cast<int>(std::min<uint32_t>(p.height(), 1 << 20));
  c.fx = p.fx(), c.fy = p.fy(), c.cx = p.cx(), c.cy = p.cy();
  c.lens = p.fisheye() ? LensModel::kFisheye : LensModel::kPinhole;
  if (p.distortion_size() > (p.fisheye() ? 4 : 5))
    return Status::InvalidArgument("calibration: too many distortion coefficients");
  for (int i = 0; i < p.distortion_size(); ++i) c.distortion[i] = p.distortion(i);
  c.uncertainty.focal_px = p.focal_length_sigma_px();
  c.uncertainty.k1 = p.k1_sigma();
  std::string error;
  if (!c.IsValid(&error)) return Status::InvalidArgument("calibration: " + error);
  return c;
}

Result<LocateRequest> RequestFromProto(const v1::LocateRequest& r, const CalibrationLookup& lookup,
                                       int64_t max_pixels) {
  LocateRequest out;
  if (!r.calibration_id().empty()) {
    std::optional<CameraModel> c = lookup(r.calibration_id());
    if (!c) return Status::NotFound("unknown calibration id '" + r.calibration_id() + "'");
    out.camera = *c;
  } else if (r.has_calibration()) {
    Result<CameraModel> c = CalibrationFromProto(r.calibration());
    if (!c.ok()) return c.status();
    out.camera = *c;
  } else {
    return Status::InvalidArgument("the request has neither calibration nor calibration_id");
  }
  if (!r.image().empty()) {
    const auto size = ImageDimensions(r.image());
    if (!size) return Status::InvalidArgument("image is not a JPEG or PNG, or its header is cut");
    const int64_t pixels = int64_t(size->first) * size->second;
    if (pixels <= 0) return Status::InvalidArgument("image header claims zero size");
    if (pixels > max_pixels)
      return Status::InvalidArgument("image header claims " + std::to_string(size->first) + "x" +
                                     std::to_string(size->second) + ", over the " +
                                     std::to_string(max_pixels) + "-pixel cap");
    if (size->first != out.camera.width_px || size->second != out.camera.height_px)
      return Status::InvalidArgument("image is " + std::to_string(size->first) + "x" +
                                     std::to_string(size->second) + " but the calibration is for " +
                                     std::to_string(out.camera.width_px) + "x" +
                                     std::to_string(out.camera.height_px));
    out.image_bytes.assign(r.image().begin(), r.image().end());
  } else if (r.has_features()) {
    const v1::Features& f = r.features();
    const size_t n = static_cast<size_t>(f.normalized_xy_size()) / 2;
    if (f.normalized_xy_size() % 2 != 0 || f.descriptors().size() != n * 128 || n > 100000)
      return Status::InvalidArgument(
          "features: normalized_xy must hold 2n numbers and "
          "descriptors n x 128 bytes (n <= 100000)");
    auto lf = std::make_shared<LocalFeatures>();
    for (size_t i = 0; i < n; ++i) {
      const double x = f.normalized_xy(2 * i), y = f.normalized_xy(2 * i + 1);
      if (!std::isfinite(x) || !std::isfinite(y))
        return Status::InvalidArgument("features: non-finite coordinate");
      lf->normalized.emplace_back(x, y);
    }
    cv::Mat bytes(static_cast<int>(n), 128, CV_8U, const_cast<char*>(f.descriptors().data()));
    lf->descriptors = ExpandDescriptors(bytes);
    out.features = std::move(lf);
  } else {
    return Status::InvalidArgument("the request has neither image nor features");
  }
  out.capture_time_s = r.capture_time_s();
  if (r.has_prior())
    out.prior = PriorCircle{r.prior().lat_deg(), r.prior().lon_deg(), r.prior().radius_m()};
  if (r.has_heading()) out.heading_deg = r.heading_deg();
  const v1::IntegrityRequest& ir = r.integrity();
  out.integrity = {ir.integrity_risk(), ir.horizontal_alert_limit_m(), ir.lateral_alert_limit_m(),
                   ir.longitudinal_alert_limit_m()};
  return out;
}

v1::LocateRequest RequestToProto(const std::string& image_bytes, const CameraModel& camera,
                                 const LocateRequest& fields) {
  v1::LocateRequest r;
  r.set_image(image_bytes);
  *r.mutable_calibration() = CalibrationToProto(camera);
  r.set_capture_time_s(fields.capture_time_s);
  if (fields.prior) {
    r.mutable_prior()->set_lat_deg(fields.prior->lat_deg);
    r.mutable_prior()->set_lon_deg(fields.prior->lon_deg);
    r.mutable_prior()->set_radius_m(fields.prior->radius_m);
  }
  if (fields.heading_deg) r.set_has_heading(true), r.set_heading_deg(*fields.heading_deg);
  const IntegrityRequest& ir = fields.integrity;
  if (ir.integrity_risk != 0 || ir.horizontal_alert_limit_m != 0 || ir.lateral_alert_limit_m != 0 ||
      ir.longitudinal_alert_limit_m != 0) {
    v1::IntegrityRequest* w = r.mutable_integrity();
    w->set_integrity_risk(ir.integrity_risk);
    w->set_horizontal_alert_limit_m(ir.horizontal_alert_limit_m);
    w->set_lateral_alert_limit_m(ir.lateral_alert_limit_m);
    w->set_longitudinal_alert_limit_m(ir.longitudinal_alert_limit_m);
  }
  return r;
}

v1::Fix FixToProto(const Fix& f) {
  v1::Fix p;
  p.set_quality(static_cast<v1::Fix::Quality>(f.quality));
  p.set_capture_time_s(f.capture_time_s);
  p.set_lat_deg(f.lat_deg), p.set_lon_deg(f.lon_deg), p.set_height_m(f.height_m);
  p.set_heading_deg(f.heading_deg);
  for (double q : {f.enu_to_camera.w, f.enu_to_camera.x, f.enu_to_camera.y, f.enu_to_camera.z})
    p.add_enu_to_camera(q);
  for (double c : {f.covariance_en(0, 0), f.covariance_en(0, 1), f.covariance_en(1, 1)})
    p.add_covariance_en(c);
  p.set_radius95_m(f.radius95_m);
  p.set_method(f.method);
  p.set_correspondences(f.correspondences);
  p.set_pnp_inliers(f.pnp_inliers);
  for (const ReferenceUse& u : f.references) {
    v1::ReferenceUse* r = p.add_references();
    r->set_tile(u.tile), r->set_image(u.name), r->set_lat_deg(u.lat_deg);
    r->set_lon_deg(u.lon_deg), r->set_matches(u.matches), r->set_inliers(u.inliers);
    r->set_points(u.points), r->set_verified(u.verified);
  }
  v1::StageTimings* t = p.mutable_timings();
  t->set_decode_ms(f.timings.decode_ms), t->set_features_ms(f.timings.features_ms);
  t->set_retrieval_ms(f.timings.retrieval_ms), t->set_verify_ms(f.timings.verify_ms);
  t->set_pose_ms(f.timings.pose_ms), t->set_total_ms(f.timings.total_ms);
  p.set_reason(f.reason);
  p.set_outside_prior(f.outside_prior);
  p.set_prior_distance_m(f.prior_distance_m);
  const IntrinsicsChange& c = f.query_intrinsics;
  v1::QueryCamera* q = p.mutable_query_camera();
  q->set_focal_scale(c.focal_scale), q->set_focal_scale_sigma(c.focal_scale_sigma);
  q->set_k1_change(c.k1_change), q->set_k1_change_sigma(c.k1_change_sigma);
  const FixIntegrity& i = f.integrity;
  v1::Integrity* w = p.mutable_integrity();
  w->set_state(static_cast<v1::Integrity::State>(i.state));
  w->set_horizontal_pl_m(i.horizontal_pl_m), w->set_lateral_pl_m(i.lateral_pl_m);
  w->set_longitudinal_pl_m(i.longitudinal_pl_m), w->set_integrity_risk(i.integrity_risk);
  w->set_horizontal_alert_limit_m(i.horizontal_alert_limit_m);
  w->set_lateral_alert_limit_m(i.lateral_alert_limit_m);
  w->set_longitudinal_alert_limit_m(i.longitudinal_alert_limit_m);
  w->set_overbound_scale(i.overbound_scale), w->set_hypotheses(i.hypotheses);
  w->set_hypotheses_skipped(i.hypotheses_skipped), w->set_max_test_ratio(i.max_test_ratio);
  w->set_detail(i.detail), w->set_overbound_drive(i.overbound_drive);
  return p;
}

Fix FixFromProto(const v1::Fix& p) {
  Fix f;
  f.quality = static_cast<FixQuality>(p.quality());
  f.capture_time_s = p.capture_time_s();
  f.lat_deg = p.lat_deg(), f.lon_deg = p.lon_deg(), f.height_m = p.height_m();
  f.heading_deg = p.heading_deg();
  if (p.enu_to_camera_size() == 4)
    f.enu_to_camera = {p.enu_to_camera(0), p.enu_to_camera(1), p.enu_to_camera(2),
                       p.enu_to_camera(3)};
  if (p.covariance_en_size() == 3)
    f.covariance_en =
        cv::Matx22d(p.covariance_en(0), p.covariance_en(1), p.covariance_en(1), p.covariance_en(2));
  f.radius95_m = p.radius95_m();
  f.method = p.method();
  f.correspondences = p.correspondences();
  f.pnp_inliers = p.pnp_inliers();
  for (const v1::ReferenceUse& r : p.references()) {
    ReferenceUse u;
    u.tile = r.tile(), u.name = r.image(), u.lat_deg = r.lat_deg(), u.lon_deg = r.lon_deg();
    u.matches = r.matches(), u.inliers = r.inliers(), u.points = r.points();
    u.verified = r.verified();
    f.references.push_back(u);
  }
  const v1::StageTimings& t = p.timings();
  f.timings = {t.decode_ms(), t.features_ms(), t.retrieval_ms(),
               t.verify_ms(), t.pose_ms(),     t.total_ms()};
  f.reason = p.reason();
  f.outside_prior = p.outside_prior();
  f.prior_distance_m = p.prior_distance_m();
  const v1::QueryCamera& q = p.query_camera();
  f.query_intrinsics = {q.focal_scale(), q.focal_scale_sigma(), q.k1_change(), q.k1_change_sigma()};
  const v1::Integrity& w = p.integrity();
  FixIntegrity& i = f.integrity;
  // A state this build does not know reads as unavailable: never usable by default.
  i.state = v1::Integrity::State_IsValid(w.state()) ? static_cast<IntegrityState>(w.state())
                                                    : IntegrityState::kUnavailable;
  i.horizontal_pl_m = w.horizontal_pl_m(), i.lateral_pl_m = w.lateral_pl_m();
  i.longitudinal_pl_m = w.longitudinal_pl_m(), i.integrity_risk = w.integrity_risk();
  i.horizontal_alert_limit_m = w.horizontal_alert_limit_m();
  i.lateral_alert_limit_m = w.lateral_alert_limit_m();
  i.longitudinal_alert_limit_m = w.longitudinal_alert_limit_m();
  i.overbound_scale = w.overbound_scale(), i.hypotheses = w.hypotheses();
  i.hypotheses_skipped = w.hypotheses_skipped(), i.max_test_ratio = w.max_test_ratio();
  i.detail = w.detail(), i.overbound_drive = w.overbound_drive();
  return f;
}

Result<Fix> FixFromProto(const Result<v1::Fix>& fix) {
  if (!fix.ok()) return fix.status();
  return FixFromProto(*fix);
}

}  // namespace sightfix
