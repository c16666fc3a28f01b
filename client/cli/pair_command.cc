// sightfix pair: the relative pose of two images of one scene.
#include <cstdio>
#include <iostream>
#include <opencv2/imgcodecs.hpp>
#include <string>
#include <vector>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
#include "indexer/map/camera_model.h"
#include "indexer/vision/local_features.h"
#include "server/engine/relative_pose.h"

namespace sightfix::cli {
namespace {

struct PairFlags {
  std::string image_a, image_b, camera_a, camera_b;
};

po::options_description PairOptions(PairFlags* f) {
  po::options_description desc(
      "sightfix pair: relative pose of two images of one scene (RootSIFT, ratio 0.8 + mutual "
      "check, five-point\n"
      "essential matrix in USAC_MAGSAC). Rotation and the translation's direction only: two views "
      "give no scale.\n\n"
      "Usage: sightfix pair IMAGE_A IMAGE_B --camera A.yml [--camera-b B.yml] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("image-a", po::value(&f->image_a), "first image")(
      "image-b", po::value(&f->image_b), "second image")(
      "camera", po::value(&f->camera_a), "calibration of A (OpenCV FileStorage YAML)")(
      "camera-b", po::value(&f->camera_b), "calibration of B (default: the same as A)")(
      "json", "print JSON on stdout");
  return desc;
}

Result<LocalFeatures> Load(const std::string& image_path, const CameraModel& camera) {
  const cv::Mat img = cv::imread(image_path, cv::IMREAD_GRAYSCALE);
  if (img.empty()) return Status::InvalidArgument("cannot read or decode image " + image_path);
  Result<LocalFeatures> f = ExtractFeatures(img, &camera, FeatureOptions{});
  if (!f.ok()) return Status::InvalidArgument(image_path + ": " + f.status().message());
  return f;
}

// The two images' features and calibrations; kGoOn or 2 (reported).
struct PairInputs {
  Result<CameraModel> camera_a = Status::Internal("not loaded");
  Result<CameraModel> camera_b = Status::Internal("not loaded");
  Result<LocalFeatures> a = Status::Internal("not loaded");
  Result<LocalFeatures> b = Status::Internal("not loaded");
};

int LoadInputs(const PairFlags& f, PairInputs* in) {
  in->camera_a = LoadCameraModel(f.camera_a);
  if (!in->camera_a.ok()) return Fail(in->camera_a.status().ToString(), 2);
  in->camera_b = f.camera_b.empty() ? in->camera_a : LoadCameraModel(f.camera_b);
  if (!in->camera_b.ok()) return Fail(in->camera_b.status().ToString(), 2);
  in->a = Load(f.image_a, *in->camera_a);
  in->b = Load(f.image_b, *in->camera_b);
  if (!in->a.ok()) return Fail(in->a.status().ToString(), 2);
  if (!in->b.ok()) return Fail(in->b.status().ToString(), 2);
  return kGoOn;
}

nlohmann::json PairJson(size_t matches, const Result<RelativePose>& pose) {
  nlohmann::json j;
  j["matches"] = matches;
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
  return j;
}

void PrintPair(size_t matches, const Result<RelativePose>& pose) {
  if (!pose.ok()) {
    std::printf("matches %zu: no relative pose (%s)\n", matches, pose.status().message().c_str());
    return;
  }
  const cv::Vec3d& t = pose->translation_dir;
  std::printf(
      "matches %zu, inliers %d\nrotation %.3f deg\ntranslation direction (A's camera frame, x "
      "right, y down, z forward) %.4f %.4f %.4f%s\nmedian parallax %.2f deg\n",
      matches, pose->inliers, pose->rotation_deg, t[0], t[1], t[2],
      pose->translation_reliable ? "" : "  (unreliable: too little parallax, near pure rotation)",
      pose->median_parallax_deg);
  std::printf("%s\n", kSafety);
}

}  // namespace

int Pair(int argc, char** argv) {
  PairFlags f;
  const po::options_description desc = PairOptions(&f);
  po::positional_options_description pos;
  pos.add("image-a", 1).add("image-b", 1);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "pair", desc, pos, &vm); rc != kGoOn) return rc;
  if (f.image_a.empty() || f.image_b.empty() || f.camera_a.empty())
    return Fail("pair needs IMAGE_A IMAGE_B and --camera (see sightfix pair --help)", 2);
  PairInputs in;
  if (int rc = LoadInputs(f, &in); rc != kGoOn) return rc;
  const std::vector<cv::DMatch> matches = MatchFeatures(*in.a, *in.b, MatchOptions{});
  std::vector<cv::Point2d> na, nb;
  for (const cv::DMatch& m : matches)
    na.push_back(in.a->normalized[m.queryIdx]), nb.push_back(in.b->normalized[m.trainIdx]);
  RelativePoseOptions options;
  options.focal_px = 0.5 * (in.camera_a->fx + in.camera_b->fx);
  const Result<RelativePose> pose = EstimateRelativePose(na, nb, options);
  if (vm.count("json"))
    std::cout << PairJson(matches.size(), pose).dump(2) << "\n";
  else
    PrintPair(matches.size(), pose);
  return pose.ok() ? 0 : 3;
}

}  // namespace sightfix::cli
