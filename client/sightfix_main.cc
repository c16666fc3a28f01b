// sightfix: the command-line client. So far: `pair`, the relative pose of two images.
#include <boost/program_options.hpp>
#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>
#include <opencv2/core/utility.hpp>
#include <opencv2/imgcodecs.hpp>
#include <string>

#include "indexer/camera_model.h"
#include "indexer/local_features.h"
#include "server/relative_pose.h"

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
  try {
    po::store(po::command_line_parser(argc, argv).options(desc).positional(pos).run(), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    return Fail(std::string(e.what()) + " (see sightfix pair --help)", 2);
  }
  if (vm.count("help")) {
    std::cout << desc << "\n";
    return 0;
  }
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

void Usage() {
  std::printf(
      "sightfix: visual localization client\n\nUsage: sightfix COMMAND [options]\n\nCommands:\n"
      "  pair IMAGE_A IMAGE_B --camera A.yml [--camera-b B.yml] [--json]   relative pose of two "
      "images\n\n"
      "sightfix COMMAND --help tells more.\n%s\n",
      kSafety);
}

}  // namespace

int main(int argc, char** argv) {
  cv::setNumThreads(1);
  if (argc < 2 || std::string(argv[1]) == "--help" || std::string(argv[1]) == "-h") {
    Usage();
    return argc < 2 ? 2 : 0;
  }
  const std::string command = argv[1];
  if (command == "pair") return Pair(argc - 1, argv + 1);
  Usage();
  return Fail("unknown command '" + command + "'", 2);
}
