// Writes the binary seeds of the fuzz corpora (frames and a tiny tile); the text seeds (CSV,
// GPX, YAML) are written by hand. Run once by scripts/fuzz.sh --make-seeds; its output is
// checked in under tests/fuzz/corpus/.  Usage: fuzz_make_seeds CORPUS_DIR
#include <faiss/IndexFlat.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>

#include <filesystem>
#include <fstream>
#include <opencv2/imgcodecs.hpp>

#include "indexer/map/map_store.h"
#include "proto/frame_codec.h"

namespace fs = std::filesystem;
using namespace sightfix;

void Write(const fs::path& p, const std::string& bytes) {
  fs::create_directories(p.parent_path());
  std::ofstream(p, std::ios::binary) << bytes;
}

int main(int argc, char** argv) {
  if (argc != 2) return 2;
  const fs::path out = argv[1];
  // Frames: Describe, ListTiles, and Locate calls with a tiny JPEG and PNG.
  v1::Envelope e;
  e.set_call_id(1);
  e.set_method("Describe");
  Write(out / "frame/describe", EncodeFrame(e));
  e.set_method("ListTiles");
  e.set_token("0123456789abcdef0123");
  Write(out / "frame/listtiles_token", EncodeFrame(e));
  cv::Mat img(48, 64, CV_8U);
  cv::randu(img, 0, 255);
  std::vector<uchar> jpg, png;
  cv::imencode(".jpg", img, jpg);
  cv::imencode(".png", img, png);
  v1::LocateRequest r;
  r.set_image(std::string(jpg.begin(), jpg.end()));
  r.set_calibration_id("18/1/1#0");
  r.mutable_prior()->set_lat_deg(44);
  r.mutable_prior()->set_lon_deg(-40);
  r.mutable_prior()->set_radius_m(50);
  e.set_method("Locate");
  e.set_body(r.SerializeAsString());
  Write(out / "frame/locate_jpeg_prior", EncodeFrame(e));
  r.set_image(std::string(png.begin(), png.end()));
  r.clear_prior();
  r.clear_calibration_id();
  v1::Calibration* c = r.mutable_calibration();
  c->set_width(64), c->set_height(48), c->set_fx(50), c->set_fy(50), c->set_cx(32), c->set_cy(24);
  e.set_body(r.SerializeAsString());
  Write(out / "frame/locate_png_calibration", EncodeFrame(e));
  c->set_focal_length_sigma_px(0.5), c->set_k1_sigma(0.01);
  e.set_body(r.SerializeAsString());
  Write(out / "frame/locate_png_calibration_sigmas", EncodeFrame(e));
  v1::IntegrityRequest* integrity = r.mutable_integrity();
  integrity->set_integrity_risk(1e-4), integrity->set_horizontal_alert_limit_m(2);
  integrity->set_lateral_alert_limit_m(0.5), integrity->set_longitudinal_alert_limit_m(1);
  e.set_body(r.SerializeAsString());
  Write(out / "frame/locate_png_integrity", EncodeFrame(e));

  // A tile with one camera, two images of three keypoints, two points.
  TileData t;
  t.key = {18, 1, 1};
  t.origin = {44, -40, 50};
  t.model_id = "seed";
  t.map_version = 1;
  CameraModel cam;
  cam.width_px = 64, cam.height_px = 48, cam.fx = cam.fy = 50, cam.cx = 32, cam.cy = 24;
  t.cameras.push_back(cam);
  for (int i = 0; i < 2; ++i) {
    ReferenceImage im;
    im.id = i;
    im.name = "images/00000" + std::to_string(i) + ".jpg";
    im.timestamp_s = 1.7e9 + i;
    im.position = {44 + i * 1e-5, -40, 50};
    im.sigma_h_m = 0.05;
    im.global_code = {1, 2, 3, 4};
    im.normalized = {{0.1f, 0.2f}, {-0.1f, 0.05f}, {0.3f, -0.2f}};
    im.descriptors = cv::Mat(3, 128, CV_8U, cv::Scalar(7 + i));
    im.point_ids = {0, 1, -1};
    t.images.push_back(im);
  }
  for (int i = 0; i < 2; ++i) {
    MapPoint p;
    p.enu = {1.0 * i, 10, 1};
    p.covariance = cv::Matx33d::eye() * 0.01;
    p.descriptor = cv::Mat(1, 128, CV_8U, cv::Scalar(9));
    p.observations = 2;
    t.points.push_back(p);
  }
  faiss::IndexFlatL2 flat(4);
  const float v[8] = {0, 1, 2, 3, 4, 5, 6, 7};
  flat.add(2, v);
  faiss::VectorIOWriter w;
  faiss::write_index(&flat, &w);
  t.retrieval_index = w.data;
  const fs::path tile = out / "tile/tiny.sqlite";
  fs::create_directories(tile.parent_path());
  if (!WriteTile(tile.string(), t).ok()) return 1;
  return 0;
}
