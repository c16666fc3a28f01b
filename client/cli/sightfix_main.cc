// sightfix: the command-line client: `locate` (one image, in process or through the server),
// `describe`, `replay` (a query drive with truth: metrics and report), `compare` (two replays)
// and `pair` (the relative pose of two images).
#include <atomic>
#include <boost/program_options.hpp>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <opencv2/core/utility.hpp>
#include <opencv2/imgcodecs.hpp>
#include <sstream>
#include <string>

#include "client/api/client.h"
#include "client/monitor/gnss_stream.h"
#include "client/eval/route_eval.h"
#include "client/eval/route_report.h"
#include "indexer/map/camera_model.h"
#include "indexer/base/crash_report.h"
#include "indexer/base/geo.h"
#include "indexer/vision/local_features.h"
#include "indexer/base/progress.h"
#include "indexer/base/threads.h"
#include "server/engine/localizer.h"
#include "server/engine/relative_pose.h"
#include "indexer/base/endpoint.h"
#include "server/wire/wire.h"

namespace po = boost::program_options;

namespace {

constexpr char kSafety[] =
    "sightfix is a fallback aid, not a certified navigation source; defer to the vehicle's safety "
    "case and local "
    "regulations.";

int Fail(const std::string& message, int code = 1) {
  std::fprintf(stderr, "sightfix: %s\n", message.c_str());
  return code;
}

sightfix::Result<sightfix::LocalFeatures> Load(const std::string& image_path,
                                               const sightfix::CameraModel& camera) {
  const cv::Mat img = cv::imread(image_path, cv::IMREAD_GRAYSCALE);
  if (img.empty())
    return sightfix::Status::InvalidArgument("cannot read or decode image " + image_path);
  sightfix::Result<sightfix::LocalFeatures> f =
      sightfix::ExtractFeatures(img, &camera, sightfix::FeatureOptions{});
  if (!f.ok()) return sightfix::Status::InvalidArgument(image_path + ": " + f.status().message());
  return f;
}

// Parses a command's flags into *vm. Returns -1 to go on, else the exit code: 0 after --help
// (which prints the options and the safety caution), 2 after a bad flag.
int ParseFlags(int argc, char** argv, const std::string& command,
               const po::options_description& desc, const po::positional_options_description& pos,
               po::variables_map* vm) {
  try {
    po::store(po::command_line_parser(argc, argv).options(desc).positional(pos).run(), *vm);
    po::notify(*vm);
  } catch (const std::exception& e) {
    return Fail(std::string(e.what()) + " (see sightfix " + command + " --help)", 2);
  }
  if (vm->count("help")) {
    std::cout << desc << "\n" << kSafety << "\n";
    return 0;
  }
  return -1;
}

// The flags that choose what answers: a map in this process or a server (and its token).
void AddSourceOptions(po::options_description* desc, std::string* map_dir, std::string* server,
                      std::string* token_file) {
  desc->add_options()("map", po::value(map_dir), "map folder")(
      "server", po::value(server),
      "HOST:PORT of a sightfix-server instead of --map; several, comma-separated, to fail over "
      "between replicas")("token-file", po::value(token_file),
                          "file holding the server's bearer token");
}

int Pair(int argc, char** argv) {
  std::string image_a, image_b, camera_a, camera_b;
  po::options_description desc(
      "sightfix pair: relative pose of two images of one scene (RootSIFT, ratio 0.8 + mutual "
      "check, five-point\n"
      "essential matrix in USAC_MAGSAC). Rotation and the translation's direction only: two views "
      "give no scale.\n\n"
      "Usage: sightfix pair IMAGE_A IMAGE_B --camera A.yml [--camera-b B.yml] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("image-a", po::value(&image_a), "first image")(
      "image-b", po::value(&image_b), "second image")("camera", po::value(&camera_a),
                                                      "calibration of A (OpenCV FileStorage YAML)")(
      "camera-b", po::value(&camera_b), "calibration of B (default: the same as A)")(
      "json", "print JSON on stdout");
  po::positional_options_description pos;
  pos.add("image-a", 1).add("image-b", 1);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "pair", desc, pos, &vm); rc >= 0) return rc;
  if (image_a.empty() || image_b.empty() || camera_a.empty())
    return Fail("pair needs IMAGE_A IMAGE_B and --camera (see sightfix pair --help)", 2);
  auto cam_a = sightfix::LoadCameraModel(camera_a);
  if (!cam_a.ok()) return Fail(cam_a.status().ToString(), 2);
  auto cam_b = camera_b.empty() ? cam_a : sightfix::LoadCameraModel(camera_b);
  if (!cam_b.ok()) return Fail(cam_b.status().ToString(), 2);
  auto fa = Load(image_a, *cam_a), fb = Load(image_b, *cam_b);
  if (!fa.ok()) return Fail(fa.status().ToString(), 2);
  if (!fb.ok()) return Fail(fb.status().ToString(), 2);
  const std::vector<cv::DMatch> matches =
      sightfix::MatchFeatures(*fa, *fb, sightfix::MatchOptions{});
  std::vector<cv::Point2d> na, nb;
  for (const cv::DMatch& m : matches)
    na.push_back(fa->normalized[m.queryIdx]), nb.push_back(fb->normalized[m.trainIdx]);
  sightfix::RelativePoseOptions options;
  options.focal_px = 0.5 * (cam_a->fx + cam_b->fx);
  auto pose = sightfix::EstimateRelativePose(na, nb, options);
  nlohmann::json j;
  j["matches"] = matches.size();
  if (pose.ok()) {
    const cv::Vec3d& t = pose->translation_dir;
    j["rotation_deg"] = pose->rotation_deg;
    j["translation_dir"] = {t[0], t[1], t[2]};
    j["inliers"] = pose->inliers;
    j["median_parallax_deg"] = pose->median_parallax_deg;
    j["translation_reliable"] = pose->translation_reliable;
  } else {
    j["inliers"] = 0;
    j["error"] = pose.status().message();
  }
  if (vm.count("json")) {
    std::cout << j.dump(2) << "\n";
  } else if (pose.ok()) {
    const cv::Vec3d& t = pose->translation_dir;
    std::printf(
        "matches %zu, inliers %d\nrotation %.3f deg\ntranslation direction (A's camera frame, x "
        "right, y down, "
        "z forward) %.4f %.4f %.4f%s\nmedian parallax %.2f deg\n",
        matches.size(), pose->inliers, pose->rotation_deg, t[0], t[1], t[2],
        pose->translation_reliable ? "" : "  (unreliable: too little parallax, near pure rotation)",
        pose->median_parallax_deg);
    std::printf("%s\n", kSafety);
  } else {
    std::printf("matches %zu: no relative pose (%s)\n", matches.size(),
                pose.status().message().c_str());
  }
  return pose.ok() ? 0 : 3;
}

// "a,b,c" -> numbers; false unless exactly n finite numbers.
bool ParseNumbers(const std::string& text, size_t n, std::vector<double>* out) {
  out->clear();
  std::stringstream ss(text);
  std::string item;
  while (std::getline(ss, item, ',')) {
    char* end = nullptr;
    const double v = std::strtod(item.c_str(), &end);
    if (item.empty() || *end != '\0' || !std::isfinite(v)) return false;
    out->push_back(v);
  }
  return out->size() == n;
}

nlohmann::json FixJson(const sightfix::Fix& f) {
  nlohmann::json refs = nlohmann::json::array();
  for (const sightfix::ReferenceUse& u : f.references)
    refs.push_back({{"tile", u.tile},
                    {"image", u.name},
                    {"retrieval_distance", u.retrieval_distance},
                    {"matches", u.matches},
                    {"inliers", u.inliers},
                    {"points", u.points},
                    {"verified", u.verified}});
  const sightfix::StageTimings& t = f.timings;
  nlohmann::json j = {{"quality", sightfix::FixQualityName(f.quality)},
                      {"capture_time_s", f.capture_time_s},
                      {"method", f.method},
                      {"references", refs},
                      {"correspondences", f.correspondences},
                      {"pnp_inliers", f.pnp_inliers},
                      {"timings_ms",
                       {{"decode", t.decode_ms},
                        {"features", t.features_ms},
                        {"retrieval", t.retrieval_ms},
                        {"verify", t.verify_ms},
                        {"pose", t.pose_ms},
                        {"total", t.total_ms}}}};
  if (f.quality != sightfix::FixQuality::kNone) {
    j["lat"] = f.lat_deg;
    j["lon"] = f.lon_deg;
    j["height"] = f.height_m;
    j["heading_deg"] = f.heading_deg;
    j["enu_to_camera"] = {f.enu_to_camera.w, f.enu_to_camera.x, f.enu_to_camera.y,
                          f.enu_to_camera.z};
    j["covariance_en_m2"] = {f.covariance_en(0, 0), f.covariance_en(0, 1), f.covariance_en(1, 1)};
    j["radius95_m"] = f.radius95_m;
  }
  if (!f.reason.empty()) j["reason"] = f.reason;
  if (f.prior_distance_m >= 0) {
    j["prior_distance_m"] = f.prior_distance_m;
    j["outside_prior"] = f.outside_prior;
  }
  return j;
}

sightfix::Result<std::unique_ptr<sightfix::Client>> ConnectTo(const std::string& server,
                                                              const std::string& token_file) {
  sightfix::ClientOptions co;
  // One HOST:PORT, or several separated by commas: replicas to fail over between.
  size_t start = 0;
  while (start <= server.size()) {
    const size_t comma = std::min(server.find(',', start), server.size());
    const std::string one = server.substr(start, comma - start);
    std::string host;
    int port = 0;
    if (!sightfix::SplitHostPort(one, &host, &port))
      return sightfix::Status::InvalidArgument("--server must look like HOST:PORT[,HOST:PORT...]");
    co.endpoints.push_back(one);
    start = comma + 1;
  }
  if (!token_file.empty()) {
    auto token = sightfix::ReadTokenFile(token_file);
    if (!token.ok()) return token.status();
    co.token = *token;
  }
  return sightfix::Client::Connect(co);
}

int Describe(int argc, char** argv) {
  std::string server, token_file;
  po::options_description desc(
      "sightfix describe: what a sightfix-server serves (map version, model, tiles, uptime).\n\n"
      "Usage: sightfix describe --server HOST:PORT [--token-file F] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("server", po::value(&server),
                                                 "HOST:PORT[,HOST:PORT...]")(
      "token-file", po::value(&token_file), "file holding the server's bearer token")(
      "json", "print JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "describe", desc, {}, &vm); rc >= 0) return rc;
  if (server.empty()) return Fail("describe needs --server HOST:PORT", 2);
  auto client = ConnectTo(server, token_file);
  if (!client.ok()) return Fail(client.status().ToString(), 1);
  auto d = (*client)->Describe(5000);
  if (!d.ok()) return Fail(d.status().ToString(), 1);
  nlohmann::json j = {{"map_version", d->map_version()},
                      {"model_id", d->model_id()},
                      {"tiles", d->tiles()},
                      {"images", d->images()},
                      {"server_version", d->server_version()},
                      {"uptime_s", d->uptime_s()},
                      {"tiles_cached", d->tiles_cached()},
                      {"tiles_checked", d->tiles_checked()},
                      {"bad_tiles", nlohmann::json::array()}};
  for (const auto& b : d->bad_tiles())
    j["bad_tiles"].push_back({{"tile", b.tile()}, {"reason", b.reason()}});
  if (vm.count("json")) {
    std::cout << j.dump(2) << "\n";
  } else {
    std::printf("%s: map version %d (model %s), %d tiles, %d images, %d tiles cached, up %.0f s\n",
                d->server_version().c_str(), d->map_version(), d->model_id().c_str(), d->tiles(),
                d->images(), d->tiles_cached(), d->uptime_s());
    std::printf("tiles checked: %d of %d; unusable: %d\n", d->tiles_checked(), d->tiles(),
                d->bad_tiles_size());
    for (const auto& b : d->bad_tiles())
      std::printf("  %s %s\n", b.tile().c_str(), b.reason().c_str());
  }
  return 0;
}

int Locate(int argc, char** argv) {
  std::string map_dir, server, token_file, image_path, camera_path, prior_text, truth_text;
  std::string method = "auto";
  double heading = NAN;
  int deadline_ms = 10000;
  po::options_description desc(
      "sightfix locate: where one camera image was taken, from a map in this process (--map) or\n"
      "through sightfix-server (--server). Retrieval (prior tiles or the map-wide index),\n"
      "essential-matrix verification, PnP on the map's 3D points, a 95 % confidence radius.\n\n"
      "Usage: sightfix locate (--map MAPDIR | --server HOST:PORT) --image FILE --camera "
      "CAMERA.yml [--prior LAT,LON,RADIUS_M] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help");
  AddSourceOptions(&desc, &map_dir, &server, &token_file);
  desc.add_options()("deadline-ms", po::value(&deadline_ms),
                     "deadline of the call to the server (10000)")("image", po::value(&image_path),
                                                                   "query image (JPEG or PNG)")(
      "camera", po::value(&camera_path), "its calibration (OpenCV FileStorage YAML)")(
      "prior", po::value(&prior_text), "coarse prior circle LAT,LON,RADIUS_M (WGS84 degrees, m)")(
      "heading", po::value(&heading), "coarse heading prior, degrees from north")(
      "method", po::value(&method), "pose method: auto (points, then pair), points or pair")(
      "truth", po::value(&truth_text), "true LAT,LON: also print the horizontal error")(
      "json", "print JSON on stdout");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "locate", desc, {}, &vm); rc >= 0) return rc;
  if ((map_dir.empty() == server.empty()) || image_path.empty() || camera_path.empty())
    return Fail("locate needs --map or --server, --image and --camera (see sightfix locate --help)",
                2);
  sightfix::LocalizerOptions options;
  if (method == "points")
    options.method = sightfix::PoseMethod::kPoints;
  else if (method == "pair")
    options.method = sightfix::PoseMethod::kPair;
  else if (method != "auto")
    return Fail("--method must be auto, points or pair", 2);
  sightfix::LocateRequest req;
  std::vector<double> v;
  if (!prior_text.empty()) {
    if (!ParseNumbers(prior_text, 3, &v)) return Fail("--prior must look like LAT,LON,RADIUS_M", 2);
    req.prior = sightfix::PriorCircle{v[0], v[1], v[2]};
  }
  std::vector<double> truth;
  if (!truth_text.empty() && !ParseNumbers(truth_text, 2, &truth))
    return Fail("--truth must look like LAT,LON", 2);
  if (vm.count("heading")) req.heading_deg = heading;
  auto cam = sightfix::LoadCameraModel(camera_path);
  if (!cam.ok()) return Fail(cam.status().ToString(), 2);
  req.camera = *cam;
  if (!std::filesystem::exists(image_path))
    return Fail("cannot read or decode image " + image_path + " (no such file)", 2);
  sightfix::Result<sightfix::Fix> fix = sightfix::Status::Internal("not run");
  if (!server.empty()) {
    auto client = ConnectTo(server, token_file);
    if (!client.ok()) return Fail(client.status().ToString(), 2);
    std::ifstream in(image_path, std::ios::binary);
    const std::string bytes((std::istreambuf_iterator<char>(in)), {});
    fix = sightfix::FixFromProto(
        (*client)->Locate(sightfix::RequestToProto(bytes, *cam, req), deadline_ms));
    if (!fix.ok())
      return Fail(fix.status().ToString(),
                  fix.status().code() == sightfix::StatusCode::kIoError ? 1 : 2);
  } else {
    auto localizer = sightfix::Localizer::Open(map_dir, options);
    if (!localizer.ok()) return Fail(localizer.status().ToString(), 2);
    req.image = cv::imread(image_path, cv::IMREAD_GRAYSCALE);
    if (req.image.empty()) return Fail("cannot read or decode image " + image_path, 2);
    fix = (*localizer)->Locate(req);
    if (!fix.ok()) return Fail(fix.status().ToString(), 2);
  }
  nlohmann::json j = FixJson(*fix);
  double error_m = -1;
  if (!truth.empty() && fix->quality != sightfix::FixQuality::kNone) {
    error_m = sightfix::GeodesicBetween(truth[0], truth[1], fix->lat_deg, fix->lon_deg).distance_m;
    j["error_m"] = error_m;
  }
  if (vm.count("json")) {
    std::cout << j.dump(2) << "\n";
  } else if (fix->quality == sightfix::FixQuality::kNone) {
    std::printf("no fix: %s\n", fix->reason.c_str());
  } else {
    std::printf("%s fix (%s): %.7f, %.7f, height %.2f m, heading %.1f deg, radius95 %.2f m\n",
                sightfix::FixQualityName(fix->quality), fix->method.c_str(), fix->lat_deg,
                fix->lon_deg, fix->height_m, fix->heading_deg, fix->radius95_m);
    if (!fix->reason.empty()) std::printf("not refined: %s\n", fix->reason.c_str());
    if (fix->outside_prior)
      std::printf("outside the prior: %.1f m from its centre (radius %.1f m)\n",
                  fix->prior_distance_m, req.prior->radius_m);
    if (error_m >= 0) std::printf("error against truth: %.3f m\n", error_m);
    std::printf("%d 2D-3D correspondences, %d inliers; %.0f ms\n%s\n", fix->correspondences,
                fix->pnp_inliers, fix->timings.total_ms, kSafety);
  }
  return fix->quality == sightfix::FixQuality::kNone ? 3 : 0;
}

std::atomic<bool> g_stop{false};
extern "C" void OnInterrupt(int) {
  g_stop = true;
  std::signal(SIGINT, SIG_DFL);  // a second Ctrl-C ends the process at once
}

// "none", "noisy:R" or "gnss" onto the evaluator's options; false when malformed.
bool ParsePriorMode(const std::string& text, sightfix::RouteEvalOptions* o) {
  if (text == "none") {
    o->prior = sightfix::PriorMode::kNone;
    return true;
  }
  if (text == "gnss") {
    o->prior = sightfix::PriorMode::kGnss;
    return true;
  }
  std::vector<double> r;
  if (text.rfind("noisy:", 0) != 0 || !ParseNumbers(text.substr(6), 1, &r) || !(r[0] > 0))
    return false;
  o->prior = sightfix::PriorMode::kNoisy;
  o->prior_radius_m = o->prior_max_offset_m = r[0];  // centre uniformly within R of the truth
  return true;
}

// The optional GNSS stream and spoofing truth of a drive; a file given but unreadable is an
// error, a default one missing is not.
sightfix::Status LoadGnss(const std::string& gnss_path, bool gnss_given,
                          const std::string& spoof_path, bool spoof_given,
                          sightfix::RouteReport* report) {
  namespace fs = std::filesystem;
  if (gnss_given || fs::exists(gnss_path)) {
    auto g = sightfix::ReadGnssCsv(gnss_path);
    if (!g.ok()) return g.status();
    report->gnss = std::move(g).value();
  }
  if (spoof_given || fs::exists(spoof_path)) {
    auto t = sightfix::ReadSpoofingCsv(spoof_path);
    if (!t.ok()) return t.status();
    report->spoof_truth = std::move(t).value();
  }
  return sightfix::Status::Ok();
}

void PrintReplaySummary(const sightfix::RouteReport& r, const std::string& out) {
  const sightfix::RouteSummary& s = r.summary;
  std::printf("%s%d queries, %d fixes (availability %.3f; refined %d, coarse %d, none %d)\n",
              r.partial ? "PARTIAL (interrupted): " : "", s.queries, s.fixes, s.availability,
              s.refined, s.coarse, s.none);
  std::printf("recall@1/5/10 within 25 m: %.3f / %.3f / %.3f\n", s.recall_at_1, s.recall_at_5,
              s.recall_at_10);
  std::printf(
      "error over fixes: median %.3f m, p90 %.3f m, p95 %.3f m, max %.3f m; refined: "
      "median %.3f m, p95 %.3f m; wrong refined %d\n",
      s.all.median_m, s.all.p90_m, s.all.p95_m, s.all.max_m, s.median_error_m, s.p95_error_m,
      s.wrong_refined);
  std::printf(
      "within (0.25 m, 2 deg) %.3f, (0.5 m, 5 deg) %.3f, (5 m, 10 deg) %.3f; heading "
      "median %.2f deg\n",
      s.within_0_25m_2deg, s.within_0_5m_5deg, s.within_5m_10deg, s.all.median_heading_deg);
  std::printf("radius95 coverage %.3f, NEES %.2f; latency p50 %.0f ms, p95 %.0f ms, p99 %.0f ms\n",
              s.all.radius95_coverage, s.all.nees_mean, s.latency_ms_p50, s.latency_ms_p95,
              s.latency_ms_p99);
  if (r.spoofing) {
    const sightfix::SpoofingScore& sc = r.spoofing->score;
    std::printf("GNSS spoofing monitor: %zu checks, %d of %d spoofed segments flagged",
                r.spoofing->steps.size(), sc.segments_flagged, sc.segments_true);
    if (!sc.detection_delays_s.empty())
      std::printf(" (median delay %.1f s)", sightfix::Percentile(sc.detection_delays_s, 0.5));
    std::printf(", %d false alarms\n", sc.false_alarms);
  }
  std::printf("report: %s/report.html (summary.json, fixes.csv, route.geojson beside it)\n%s\n",
              out.c_str(), kSafety);
}

int Replay(int argc, char** argv) {
  std::string map_dir, server, token_file, drive, out, prior = "noisy:150", gnss_path, spoof_path;
  int limit = 0, jobs = 2, deadline_ms = 30000;
  uint64_t seed = 1;
  po::options_description desc(
      "sightfix replay: sends every query image of a drive with ground truth (drive.csv) to a\n"
      "map (in this process) or a sightfix-server, and measures the answers with the field's\n"
      "metrics: recall@1/5/10 within 25 m, error percentiles, pose bins (0.25 m, 2 deg) (0.5 m,\n"
      "5 deg) (5 m, 10 deg), radius95 coverage, NEES, latency; and runs the GNSS spoofing\n"
      "monitor over the drive's gnss.csv. Writes summary.json, fixes.csv, route.geojson and\n"
      "report.html into --out. Ctrl-C stops early and still writes what ran, marked partial.\n\n"
      "Usage: sightfix replay (--server HOST:PORT | --map MAPDIR) --drive QUERYDIR --out "
      "REPORTDIR\n       [--prior none|noisy:RADIUS_M|gnss] [--gnss FILE] [--limit N] [--seed N]"
      "\n\nOptions");
  desc.add_options()("help,h", "show this help");
  AddSourceOptions(&desc, &map_dir, &server, &token_file);
  desc.add_options()("drive", po::value(&drive),
                     "query drive folder (drive.csv with truth, images, calibration)")(
      "out", po::value(&out), "report folder (created; files in it are replaced)")(
      "prior", po::value(&prior),
      "none: no prior (global); noisy:R: circle of radius R m centred uniformly within R of the "
      "truth; gnss: circle from the drive's GNSS stream, 2.45 claimed sigmas (95 %), a query "
      "left without a refined fix asked again without prior (default noisy:150)")(
      "gnss", po::value(&gnss_path), "GNSS stream (default QUERYDIR/gnss.csv when present)")(
      "spoofing", po::value(&spoof_path),
      "true spoofed spans, to score the monitor (default QUERYDIR/spoofing.csv when present)")(
      "limit", po::value(&limit), "first N queries only (0: all)")(
      "seed", po::value(&seed), "seed of the noisy prior's centres (1)")("jobs", po::value(&jobs),
                                                                         "queries in flight (2)")(
      "deadline-ms", po::value(&deadline_ms), "deadline of each call to the server (30000)")(
      "json", "print summary.json on stdout instead of the text summary");
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "replay", desc, {}, &vm); rc >= 0) return rc;
  if (map_dir.empty() == server.empty() || drive.empty() || out.empty())
    return Fail("replay needs --map or --server, --drive and --out (see sightfix replay --help)",
                2);
  sightfix::RouteEvalOptions o;
  o.drive_dir = drive;
  o.seed = seed;
  o.limit = limit;
  o.jobs = std::max(1, jobs);
  if (!ParsePriorMode(prior, &o)) return Fail("--prior must be none, noisy:RADIUS_M or gnss", 2);
  const bool gnss_given = vm.count("gnss") > 0, spoof_given = vm.count("spoofing") > 0;
  if (!gnss_given) gnss_path = drive + "/gnss.csv";
  if (!spoof_given) spoof_path = drive + "/spoofing.csv";
  o.gnss_csv = gnss_path;
  sightfix::RouteReport report;
  report.drive_dir = drive;
  report.prior = prior;
  report.seed = seed;
  if (sightfix::Status s = LoadGnss(gnss_path, gnss_given, spoof_path, spoof_given, &report);
      !s.ok())
    return Fail(s.ToString(), 2);
  if (o.prior == sightfix::PriorMode::kGnss && report.gnss.empty())
    return Fail("--prior gnss needs a GNSS stream: " + gnss_path + " is missing", 2);
  auto rows = sightfix::ReadDriveManifest(drive + "/drive.csv");
  if (!rows.ok()) return Fail(rows.status().ToString(), 2);
  const long total = limit > 0 ? std::min<long>(limit, rows->size()) : rows->size();

  std::unique_ptr<sightfix::Client> client;
  std::unique_ptr<sightfix::Localizer> localizer;
  sightfix::LocateFn locate;
  if (!server.empty()) {
    auto c = ConnectTo(server, token_file);
    if (!c.ok()) return Fail(c.status().ToString(), 1);
    client = std::move(c).value();
    auto d = client->Describe(5000);
    if (!d.ok()) return Fail(d.status().ToString(), 1);
    report.map_version = d->map_version();
    report.model_id = d->model_id();
    report.source = "server " + server;
    locate = [&client, deadline_ms](const sightfix::LocateRequest& req, const std::string& bytes) {
      return sightfix::FixFromProto(
          client->Locate(sightfix::RequestToProto(bytes, req.camera, req), deadline_ms));
    };
  } else {
    auto l = sightfix::Localizer::Open(map_dir, sightfix::LocalizerOptions{});
    if (!l.ok()) return Fail(l.status().ToString(), 2);
    localizer = std::move(l).value();
    report.map_version = localizer->catalog().map_version;
    report.model_id = localizer->catalog().model_id;
    report.source = "map " + map_dir;
    locate = sightfix::InProcess(*localizer);
  }
  std::signal(SIGINT, OnInterrupt);
  o.stop = &g_stop;
  sightfix::Progress progress("queries", total);
  o.on_query_done = [&progress] { progress.Advance(); };
  auto results = sightfix::RunDrive(locate, o);
  progress.Finish();
  std::signal(SIGINT, SIG_DFL);
  if (!results.ok()) return Fail(results.status().ToString(), 2);
  report.partial = g_stop.load();
  report.results = std::move(results).value();
  report.summary = sightfix::Summarize(report.results);
  if (!report.gnss.empty())
    report.spoofing =
        sightfix::MonitorDrive(report.results, report.gnss, report.spoof_truth, report.monitor);
  if (sightfix::Status s = sightfix::WriteRouteReport(report, out); !s.ok())
    return Fail(s.ToString(), 1);
  if (vm.count("json"))
    std::cout << sightfix::SummaryJson(report).dump(2) << "\n";
  else
    PrintReplaySummary(report, out);
  if (report.summary.failed_calls > 0)
    std::fprintf(stderr, "sightfix: %d calls failed (see the reason column of fixes.csv)\n",
                 report.summary.failed_calls);
  return report.partial ? 130 : 0;
}

// summary.json of a report folder (or the file itself).
sightfix::Result<nlohmann::json> ReadSummary(const std::string& path) {
  const std::string file = std::filesystem::is_directory(path) ? path + "/summary.json" : path;
  std::ifstream in(file);
  if (!in) return sightfix::Status::NotFound("cannot open " + file);
  try {
    return nlohmann::json::parse(in);
  } catch (const std::exception& e) {
    return sightfix::Status::InvalidArgument(file + ": not JSON: " + e.what());
  }
}

int Compare(int argc, char** argv) {
  std::string a, b;
  po::options_description desc(
      "sightfix compare: two replay summaries side by side with their differences (B - A), for\n"
      "A/B tests of maps and configurations.\n\n"
      "Usage: sightfix compare REPORTDIR_A REPORTDIR_B\n\nOptions");
  desc.add_options()("help,h", "show this help")("a", po::value(&a), "report folder A")(
      "b", po::value(&b), "report folder B");
  po::positional_options_description pos;
  pos.add("a", 1).add("b", 1);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "compare", desc, pos, &vm); rc >= 0) return rc;
  if (a.empty() || b.empty()) return Fail("compare needs two report folders", 2);
  auto ja = ReadSummary(a), jb = ReadSummary(b);
  if (!ja.ok()) return Fail(ja.status().ToString(), 2);
  if (!jb.ok()) return Fail(jb.status().ToString(), 2);
  std::printf("A: %s\nB: %s\n\n%s", a.c_str(), b.c_str(),
              sightfix::CompareSummaries(*ja, *jb, "A", "B").c_str());
  return 0;
}

void Usage() {
  std::printf(
      "sightfix: visual localization client\n\nUsage: sightfix COMMAND [options]\n\nCommands:\n"
      "  locate --map MAPDIR --image FILE --camera CAMERA.yml [--prior LAT,LON,RADIUS_M] [--json]\n"
      "      where one image was taken, against a map, in this process\n"
      "  locate --server HOST:PORT --image FILE --camera CAMERA.yml [...]\n"
      "      the same through sightfix-server\n"
      "  describe --server HOST:PORT [--json]\n"
      "      what a server serves\n"
      "  replay (--map MAPDIR | --server HOST:PORT) --drive QUERYDIR --out REPORTDIR [--prior "
      "none|noisy:R|gnss]\n"
      "      replays a query drive with truth: metrics, GNSS spoofing monitor, report.html\n"
      "  compare REPORTDIR_A REPORTDIR_B\n"
      "      two replay summaries side by side\n"
      "  pair IMAGE_A IMAGE_B --camera A.yml [--camera-b B.yml] [--json]\n"
      "      relative pose of two images\n\n"
      "sightfix COMMAND --help tells more.\n%s\n",
      kSafety);
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::InstallCrashReport("sightfix");
  sightfix::PinLibraryThreads();
  if (argc < 2 || std::string(argv[1]) == "--help" || std::string(argv[1]) == "-h") {
    Usage();
    return argc < 2 ? 2 : 0;
  }
  const std::string command = argv[1];
  if (command == "pair") return Pair(argc - 1, argv + 1);
  if (command == "locate") return Locate(argc - 1, argv + 1);
  if (command == "describe") return Describe(argc - 1, argv + 1);
  if (command == "replay") return Replay(argc - 1, argv + 1);
  if (command == "compare") return Compare(argc - 1, argv + 1);
  Usage();
  return Fail("unknown command '" + command + "'", 2);
}
