// sightfix locate: where one camera image was taken, from a map in this process or through a
// sightfix-server.
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <iterator>
#include <opencv2/imgcodecs.hpp>
#include <string>
#include <vector>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
#include "indexer/base/geo.h"
#include "indexer/map/camera_model.h"
#include "server/wire/wire.h"

namespace sightfix::cli {
namespace {

struct LocateFlags {
  SourceFlags source;
  std::string image_path, camera_path, prior_text, truth_text, alert_limits_text;
  double integrity_risk = 0;
  std::string method = "auto";
  double heading_deg = NAN;
};

po::options_description LocateOptions(LocateFlags* f) {
  f->source.deadline_ms = 10000;
  po::options_description desc(
      "sightfix locate: where one camera image was taken, from a map in this process (--map) or\n"
      "through sightfix-server (--server). Retrieval (prior tiles or the map-wide index),\n"
      "essential-matrix verification, PnP on the map's 3D points, a 95 % confidence radius.\n\n"
      "Usage: sightfix locate (--map MAPDIR | --server HOST:PORT) --image FILE --camera "
      "CAMERA.yml [--prior LAT,LON,RADIUS_M] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help");
  AddSourceOptions(&desc, &f->source);
  desc.add_options()("deadline-ms", po::value(&f->source.deadline_ms),
                     "deadline of the call to the server (10000; with --server only)")(
      "image", po::value(&f->image_path), "query image (JPEG or PNG)")(
      "camera", po::value(&f->camera_path), "its calibration (OpenCV FileStorage YAML)")(
      "prior", po::value(&f->prior_text),
      "coarse prior circle LAT,LON,RADIUS_M (WGS84 degrees, m)")(
      "heading", po::value(&f->heading_deg), "coarse heading prior, degrees from north")(
      "integrity-risk", po::value(&f->integrity_risk),
      "risk per fix the protection levels are stated at, in (0, 0.5) (default: the map "
      "server's, 1e-3)")("alert-limits", po::value(&f->alert_limits_text),
                         "H[,LATERAL,LONGITUDINAL] metres: the fix is usable only with its "
                         "protection levels within them (default 2 m horizontal; 0 = not checked)")(
      "method", po::value(&f->method),
      "pose method: auto (points, then pair), points or pair (with --map only: a "
      "server chooses its own)")("truth", po::value(&f->truth_text),
                                 "true LAT,LON: also print the horizontal error")(
      "json", "print JSON on stdout");
  return desc;
}

// --method onto the engine's options. A server chooses its pose method itself: the flag is
// refused there rather than dropped. Returns kGoOn or 2.
int ParseMethod(const LocateFlags& f, const po::variables_map& vm, LocalizerOptions* options) {
  if (f.method == "points")
    options->method = PoseMethod::kPoints;
  else if (f.method == "pair")
    options->method = PoseMethod::kPair;
  else if (f.method != "auto")
    return Fail("--method must be auto, points or pair", 2);
  if (vm.count("method") && !f.source.server.empty())
    return Fail("--method applies to --map only: a sightfix-server chooses the pose method itself",
                2);
  return kGoOn;
}

// The request (prior, heading, calibration) and the truth from the flags. Returns kGoOn or 2.
int ParseRequest(const LocateFlags& f, const po::variables_map& vm, LocateRequest* req,
                 std::vector<double>* truth) {
  std::vector<double> v;
  if (!f.prior_text.empty()) {
    if (!ParseNumbers(f.prior_text, 3, &v))
      return Fail("--prior must look like LAT,LON,RADIUS_M", 2);
    req->prior = PriorCircle{v[0], v[1], v[2]};
  }
  if (!f.truth_text.empty() && !ParseNumbers(f.truth_text, 2, truth))
    return Fail("--truth must look like LAT,LON", 2);
  if (vm.count("heading")) req->heading_deg = f.heading_deg;
  if (!f.alert_limits_text.empty() && !ParseAlertLimits(f.alert_limits_text, &req->integrity))
    return Fail(kAlertLimitsForm, 2);
  if (vm.count("integrity-risk") && !(f.integrity_risk > 0))
    return Fail("--integrity-risk must lie in (0, 0.5)", 2);
  req->integrity.integrity_risk = f.integrity_risk;
  if (std::string e; !req->integrity.Validate(&e))
    return Fail("--integrity-risk/--alert-limits: " + e, 2);
  Result<CameraModel> camera = LoadCameraModel(f.camera_path);
  if (!camera.ok()) return Fail(camera.status().ToString(), 2);
  req->camera = *camera;
  if (!std::filesystem::exists(f.image_path))
    return Fail("cannot read or decode image " + f.image_path + " (no such file)", 2);
  return kGoOn;
}

// The fix through the server: 1 when the server cannot be reached, 2 for other failures.
int LocateThroughServer(const LocateFlags& f, const LocateRequest& req, Fix* fix) {
  auto client = ConnectTo(f.source);
  if (!client.ok()) return Fail(client.status().ToString(), 2);
  std::ifstream in(f.image_path, std::ios::binary);
  const std::string bytes((std::istreambuf_iterator<char>(in)), {});
  Result<Fix> answer =
      FixFromProto((*client)->Locate(RequestToProto(bytes, req.camera, req), f.source.deadline_ms));
  if (!answer.ok())
    return Fail(answer.status().ToString(), answer.status().code() == StatusCode::kIoError ? 1 : 2);
  *fix = std::move(answer).value();
  return kGoOn;
}

int LocateInProcess(const LocateFlags& f, const LocalizerOptions& options, LocateRequest req,
                    Fix* fix) {
  auto localizer = Localizer::Open(f.source.map_dir, options);
  if (!localizer.ok()) return Fail(localizer.status().ToString(), 2);
  req.image = cv::imread(f.image_path, cv::IMREAD_GRAYSCALE);
  if (req.image.empty()) return Fail("cannot read or decode image " + f.image_path, 2);
  Result<Fix> answer = (*localizer)->Locate(req);
  if (!answer.ok()) return Fail(answer.status().ToString(), 2);
  *fix = std::move(answer).value();
  return kGoOn;
}

void PrintFix(const Fix& fix, const LocateRequest& req, double error_m) {
  if (fix.quality == FixQuality::kNone) {
    std::printf("no fix: %s\n", fix.reason.c_str());
    return;
  }
  std::printf("%s fix (%s): %.7f, %.7f, height %.2f m, heading %.1f deg, radius95 %.2f m\n",
              FixQualityName(fix.quality), fix.method.c_str(), fix.lat_deg, fix.lon_deg,
              fix.height_m, fix.heading_deg, fix.radius95_m);
  if (!fix.reason.empty()) std::printf("not refined: %s\n", fix.reason.c_str());
  if (fix.outside_prior)
    std::printf("outside the prior: %.1f m from its centre (radius %.1f m)\n", fix.prior_distance_m,
                req.prior->radius_m);
  if (error_m >= 0) std::printf("error against truth: %.3f m\n", error_m);
  std::printf("%s\n", IntegrityLine(fix.integrity).c_str());
  std::printf("%d 2D-3D correspondences, %d inliers; %.0f ms\n%s\n", fix.correspondences,
              fix.pnp_inliers, fix.timings.total_ms, kSafety);
}

// The answer on stdout, as JSON or text, with the error against the truth when one was given.
void ReportFix(const Fix& fix, const LocateRequest& req, const std::vector<double>& truth,
               bool json) {
  nlohmann::json j = FixJson(fix);
  double error_m = -1;
  if (!truth.empty() && fix.quality != FixQuality::kNone) {
    error_m = GeodesicBetween(truth[0], truth[1], fix.lat_deg, fix.lon_deg).distance_m;
    j["error_m"] = error_m;
  }
  if (json)
    std::cout << j.dump(2) << "\n";
  else
    PrintFix(fix, req, error_m);
}

}  // namespace

int Locate(int argc, char** argv) {
  LocateFlags f;
  const po::options_description desc = LocateOptions(&f);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "locate", desc, {}, &vm); rc != kGoOn) return rc;
  if (f.source.map_dir.empty() == f.source.server.empty() || f.image_path.empty() ||
      f.camera_path.empty())
    return Fail("locate needs --map or --server, --image and --camera (see sightfix locate --help)",
                2);
  LocalizerOptions options;
  LocateRequest req;
  std::vector<double> truth;
  if (int rc = RefuseServerFlagsWithMap(f.source, vm); rc != kGoOn) return rc;
  if (int rc = ParseMethod(f, vm, &options); rc != kGoOn) return rc;
  if (int rc = ParseRequest(f, vm, &req, &truth); rc != kGoOn) return rc;
  Fix fix;
  const int rc = f.source.server.empty() ? LocateInProcess(f, options, req, &fix)
                                         : LocateThroughServer(f, req, &fix);
  if (rc != kGoOn) return rc;
  ReportFix(fix, req, truth, vm.count("json") > 0);
  return fix.quality == FixQuality::kNone ? 3 : 0;
}

}  // namespace sightfix::cli
