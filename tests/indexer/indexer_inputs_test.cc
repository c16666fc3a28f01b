// The indexer's inputs against outside references: EXIF GPS tags written by the exiv2
// command-line tool (Debian package exiv2), EGM96 undulations at NGA's test points, GPX
// interpolation worked by hand, rig poses through cv::projectPoints, RootSIFT against the
// Hellinger kernel (Arandjelovic & Zisserman, CVPR 2012), and the survey loader's messages.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <opencv2/calib3d.hpp>
#include <opencv2/features2d.hpp>
#include <opencv2/imgcodecs.hpp>

#include "indexer/base/iso_time.h"
#include "indexer/builder/exif_gps.h"
#include "indexer/builder/geoid.h"
#include "indexer/builder/gpx_track.h"
#include "indexer/builder/rig.h"
#include "indexer/builder/survey_source.h"
#include "indexer/map/camera_model.h"
#include "indexer/vision/local_features.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

fs::path TempDir(const std::string& name) {
  const fs::path d = fs::temp_directory_path() / ("sightfix_inputs_" + name);
  fs::remove_all(d);
  fs::create_directories(d);
  return d;
}

void WriteText(const fs::path& p, const std::string& text) { std::ofstream(p) << text; }

// A small grey JPEG (no EXIF).
void WriteJpeg(const fs::path& p) {
  cv::Mat img(48, 64, CV_8UC1);
  cv::randu(img, 0, 255);
  ASSERT_TRUE(cv::imwrite(p.string(), img));
}

int Shell(const std::string& command) {
  return std::system((command + " >/dev/null 2>&1").c_str());
}

TEST(ExifGpsTest, ReadsWhatTheExiv2ToolWrote) {
  // Tags set with the exiv2 command-line tool (the reference writer), then read back.
  const fs::path dir = TempDir("exif"), jpg = dir / "a.jpg";
  WriteJpeg(jpg);
  ASSERT_EQ(Shell("exiv2 -M'set Exif.GPSInfo.GPSLatitudeRef N' "
                  "-M'set Exif.GPSInfo.GPSLatitude 44/1 0/1 1234567/1000000' "
                  "-M'set Exif.GPSInfo.GPSLongitudeRef W' "
                  "-M'set Exif.GPSInfo.GPSLongitude 39/1 59/1 58765432/1000000' "
                  "-M'set Exif.GPSInfo.GPSAltitudeRef 0' "
                  "-M'set Exif.GPSInfo.GPSAltitude 3812/100' "
                  "-M'set Exif.GPSInfo.GPSImgDirectionRef T' "
                  "-M'set Exif.GPSInfo.GPSImgDirection 27125/100' "
                  "-M'set Exif.Photo.DateTimeOriginal 2026:05:04 09:00:01' "
                  "-M'set Exif.Photo.SubSecTimeOriginal 250' "
                  "-M'set Exif.Photo.OffsetTimeOriginal +02:00' " +
                  jpg.string()),
            0)
      << "exiv2 command-line tool missing (scripts/deps.sh installs it)";
  Result<ExifGps> g = ReadExifGps(jpg.string());
  ASSERT_TRUE(g.ok()) << g.status().ToString();
  EXPECT_NEAR(g->lat_deg, 44 + 1.234567 / 3600, 1e-10);  // 44 deg 0 min 1.234567 s N
  EXPECT_NEAR(g->lon_deg, -(39 + 59 / 60.0 + 58.765432 / 3600), 1e-10);  // W is negative
  EXPECT_NEAR(g->altitude_msl_m, 38.12, 1e-9);
  ASSERT_TRUE(g->img_direction_deg.has_value());
  EXPECT_NEAR(*g->img_direction_deg, 271.25, 1e-9);
  // 09:00:01.250 at +02:00 is 07:00:01.250 UTC, 1777878001.25 s after the Unix epoch (python3
  // datetime.fromisoformat("2026-05-04T09:00:01.250+02:00").timestamp(); GNU date -u -d
  // 2026-05-04T07:00:01Z +%s gives 1777878001).
  EXPECT_NEAR(g->time_s, 1777878001.25, 1e-6);

  // Below sea level (GPSAltitudeRef 1), and the time from the GPS stamps alone (UTC).
  ASSERT_EQ(Shell("exiv2 -M'set Exif.GPSInfo.GPSAltitudeRef 1' "
                  "-M'del Exif.Photo.OffsetTimeOriginal' "
                  "-M'set Exif.GPSInfo.GPSDateStamp 2026:05:04' "
                  "-M'set Exif.GPSInfo.GPSTimeStamp 7/1 0/1 2/1' " +
                  jpg.string()),
            0);
  g = ReadExifGps(jpg.string());
  ASSERT_TRUE(g.ok()) << g.status().ToString();
  EXPECT_NEAR(g->altitude_msl_m, -38.12, 1e-9);
  // 2026-05-04T07:00:02Z is 1777878002 s (python3 datetime; GNU date -u -d ... +%s agrees).
  EXPECT_NEAR(g->time_s, 1777878002.0, 1e-6);

  // Magnetic direction is refused: its declination is not known here.
  ASSERT_EQ(Shell("exiv2 -M'set Exif.GPSInfo.GPSImgDirectionRef M' " + jpg.string()), 0);
  g = ReadExifGps(jpg.string());
  EXPECT_FALSE(g.ok());
  EXPECT_NE(g.status().message().find("magnetic"), std::string::npos);
}

TEST(ExifGpsTest, OurWriterRoundTripsAndTheToolAgrees) {
  const fs::path dir = TempDir("exif_rt"), jpg = dir / "b.jpg";
  WriteJpeg(jpg);
  ExifGps in;
  in.lat_deg = -33.8567844, in.lon_deg = 151.2152967, in.altitude_msl_m = 12.345;
  in.img_direction_deg = 359.5;
  in.h_error_m = 0.02;
  // 2026-05-04T12:34:56.789Z (python3 datetime.fromtimestamp(1777898096.789, timezone.utc)).
  in.time_s = 1777898096.789;
  ASSERT_TRUE(WriteExifGps(jpg.string(), in).ok());
  Result<ExifGps> out = ReadExifGps(jpg.string());
  ASSERT_TRUE(out.ok()) << out.status().ToString();
  EXPECT_NEAR(out->lat_deg, in.lat_deg, 1e-9);  // microsecond of arc: 3 cm
  EXPECT_NEAR(out->lon_deg, in.lon_deg, 1e-9);
  EXPECT_NEAR(out->altitude_msl_m, in.altitude_msl_m, 1e-3);
  EXPECT_NEAR(*out->img_direction_deg, 359.5, 1e-4);
  EXPECT_NEAR(*out->h_error_m, 0.02, 1e-3);
  EXPECT_NEAR(out->time_s, 1777898096.789, 1e-3);
  // The exiv2 tool reads the same latitude reference, altitude and UTC wall time back.
  const fs::path dump = dir / "dump.txt";
  ASSERT_EQ(std::system(("exiv2 -pt -K Exif.GPSInfo.GPSLatitudeRef -K Exif.GPSInfo.GPSAltitude "
                         "-K Exif.Photo.DateTimeOriginal -K Exif.Photo.SubSecTimeOriginal " +
                         jpg.string() + " > " + dump.string())
                            .c_str()),
            0);
  std::ifstream f(dump);
  const std::string text((std::istreambuf_iterator<char>(f)), {});
  EXPECT_NE(text.find("South"), std::string::npos) << text;
  EXPECT_NE(text.find("12.3 m"), std::string::npos) << text;
  EXPECT_NE(text.find("2026:05:04 12:34:56"), std::string::npos) << text;
  EXPECT_NE(text.find("  789\n"), std::string::npos) << text;  // SubSecTimeOriginal
}

TEST(ExifGpsTest, BlocksWithoutGpsOrExifAreNamed) {
  const fs::path dir = TempDir("exif_bad"), jpg = dir / "c.jpg";
  WriteJpeg(jpg);
  Result<ExifGps> g = ReadExifGps(jpg.string());
  ASSERT_FALSE(g.ok());
  EXPECT_NE(g.status().message().find("c.jpg: no EXIF block"), std::string::npos)
      << g.status().message();
  ASSERT_EQ(Shell("exiv2 -M'set Exif.Photo.DateTimeOriginal 2026:05:04 09:00:01' " + jpg.string()),
            0);
  g = ReadExifGps(jpg.string());
  ASSERT_FALSE(g.ok());
  EXPECT_NE(g.status().message().find("without a GPS position"), std::string::npos);
}

TEST(GeoidTest, Egm96AtNgaTestPoints) {
  // NGA's EGM96 test points (values from memory, as docs/design.md 9 lists them); the 15-minute
  // grid with bilinear interpolation is within a few centimetres of the spherical-harmonic values
  // at these points, so 0.1 m is the tolerance.
  auto geoid = Geoid::OpenEgm96();
  ASSERT_TRUE(geoid.ok()) << geoid.status().ToString();
  EXPECT_NEAR((*geoid)->Undulation(38.6281550, 269.7791550 - 360), -31.628, 0.1);
  EXPECT_NEAR((*geoid)->Undulation(-14.6212170, 305.0211140 - 360), -2.969, 0.1);
  EXPECT_NEAR((*geoid)->Undulation(46.8743190, 102.4487290), -43.575, 0.1);
  const double n = (*geoid)->Undulation(44, -40);
  EXPECT_NEAR((*geoid)->EllipsoidalFromMsl(44, -40, 100), 100 + n, 1e-9);
  EXPECT_NEAR((*geoid)->MslFromEllipsoidal(44, -40, 100 + n), 100, 1e-9);
}

const char kGpxHead[] =
    "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
    "<gpx version=\"1.1\" creator=\"sightfix test\" xmlns=\"http://www.topografix.com/GPX/1/1\">\n"
    "<trk><trkseg>\n";

TEST(GpxTrackTest, InterpolationMatchesHandComputation) {
  // Two points on the meridian 40 W, 0.001 deg of latitude and 10 s apart; at 2.5 s the
  // fraction is 0.25. Hand computation: latitude 44 + 0.25 * 0.001 = 44.00025 (the meridian
  // arc is linear in latitude to 1e-12 deg over 0.001 deg), elevation 10 + 0.25 * (20 - 10) =
  // 12.5 m, course 0 (due north).
  const fs::path dir = TempDir("gpx");
  WriteText(dir / "t.gpx", std::string(kGpxHead) +
                               "<trkpt lat=\"44.000\" lon=\"-40.0\"><ele>10</ele>"
                               "<time>2026-05-04T09:00:00Z</time></trkpt>\n"
                               "<trkpt lat=\"44.001\" lon=\"-40.0\"><ele>20</ele>"
                               "<time>2026-05-04T09:00:10.000Z</time></trkpt>\n"
                               "<trkpt lat=\"44.002\" lon=\"-40.0\"><ele>20</ele>"
                               "<time>2026-05-04T09:00:30Z</time></trkpt>\n"
                               "</trkseg></trk></gpx>\n");
  auto track = ReadGpxTrack((dir / "t.gpx").string());
  ASSERT_TRUE(track.ok()) << track.status().ToString();
  ASSERT_EQ(track->size(), 3u);
  const double t0 = *ParseIsoUtc("2026-05-04T09:00:00Z");
  auto s = TrackAt(*track, t0 + 2.5, 15);
  ASSERT_TRUE(s.ok()) << s.status().ToString();
  EXPECT_NEAR(s->lat_deg, 44.00025, 1e-9);
  EXPECT_NEAR(s->lon_deg, -40.0, 1e-12);
  EXPECT_NEAR(s->ele_m, 12.5, 1e-9);
  EXPECT_NEAR(std::remainder(s->course_deg, 360.0), 0.0, 1e-9);
  // A gap wider than the limit (20 s between the 2nd and 3rd points, limit 15 s) is an error
  // that says so; outside the track too.
  auto gap = TrackAt(*track, t0 + 20, 15);
  ASSERT_FALSE(gap.ok());
  EXPECT_NE(gap.status().message().find("gap of 20"), std::string::npos) << gap.status().message();
  EXPECT_FALSE(TrackAt(*track, t0 - 1, 15).ok());
  // On a track point the position is that point's, whatever gap follows it.
  auto on = TrackAt(*track, t0 + 10, 15);
  ASSERT_TRUE(on.ok()) << on.status().ToString();
  EXPECT_NEAR(on->lat_deg, 44.001, 1e-12);
  EXPECT_NEAR(on->ele_m, 20, 1e-12);
}

TEST(GpxTrackTest, BadTracksNameThePoint) {
  const fs::path dir = TempDir("gpx_bad");
  WriteText(dir / "order.gpx",
            std::string(kGpxHead) +
                "<trkpt lat=\"44\" lon=\"-40\"><time>2026-05-04T09:00:10Z</time></trkpt>\n"
                "<trkpt lat=\"44\" lon=\"-40\"><time>2026-05-04T09:00:05Z</time></trkpt>\n"
                "</trkseg></trk></gpx>\n");
  auto t = ReadGpxTrack((dir / "order.gpx").string());
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.status().message().find("track point 2: time does not increase"), std::string::npos);
  WriteText(dir / "notime.gpx",
            std::string(kGpxHead) + "<trkpt lat=\"44\" lon=\"-40\"/>\n</trkseg></trk></gpx>\n");
  t = ReadGpxTrack((dir / "notime.gpx").string());
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.status().message().find("track point 1: no <time>"), std::string::npos);
  WriteText(dir / "broken.gpx", "<gpx><trk>");
  EXPECT_FALSE(ReadGpxTrack((dir / "broken.gpx").string()).ok());
}

TEST(RigTest, PointsSeenByTwoCamerasLandWhereProjectPointsPutsThem) {
  // Vehicle at 44 N 40 W heading 30 deg, level. Front camera: 1.2 m ahead of the INS, boresight
  // zero; right camera: 0.8 m to the right, boresight heading 90 (looking right). Body frame:
  // x right, y down, z forward (rig.h). A point 5 m right and 5 m ahead of the INS, at its
  // height, is seen by both. Hand computation in each camera's frame (f = 500, c = (320, 240)):
  //  front: (x, y, z) = (5, 0, 5 - 1.2) -> u = 320 + 500 * 5 / 3.8
  //  right: looking along body +x, its x axis is body -z: (x, y, z) = (-5, 0, 5 - 0.8)
  //         -> u = 320 + 500 * (-5) / 4.2; v = 240 for both.
  InsPose body;
  body.position = {44, -40, 50};
  body.attitude = {30, 0, 0};
  RigCamera front{"front", "f.yml", "f.csv", {0, 0, 1.2}, {0, 0, 0}, 0};
  RigCamera right{"right", "r.yml", "r.csv", {0.8, 0, 0}, {90, 0, 0}, 0};
  const cv::Matx33d k(500, 0, 320, 0, 500, 240, 0, 0, 1);
  const EnuFrame enu(body.position);
  const cv::Matx33d enu_body = EnuFromCamera(body.attitude);
  const cv::Vec3d point = enu_body * cv::Vec3d(5, 0, 5);  // ENU, from the INS
  const double expected_u[] = {320 + 500 * 5 / 3.8, 320 - 500 * 5 / 4.2};
  int i = 0;
  for (const RigCamera* cam : {&front, &right}) {
    const InsPose pose = CameraPose(body, *cam);
    const cv::Matx33d cam_from_enu = EnuFromCamera(pose.attitude).t();
    const cv::Vec3d centre = enu.ToEnu(pose.position);
    cv::Vec3d rvec;
    cv::Rodrigues(cam_from_enu, rvec);
    const cv::Vec3d tvec = -(cam_from_enu * centre);
    std::vector<cv::Point2d> px;
    cv::projectPoints(std::vector<cv::Point3d>{cv::Point3d(point)}, rvec, tvec, k, cv::noArray(),
                      px);
    EXPECT_NEAR(px[0].x, expected_u[i], 1e-6) << cam->name;
    EXPECT_NEAR(px[0].y, 240, 1e-6) << cam->name;
    ++i;
  }
  // Pitch and roll of the vehicle carry over to both cameras: the front camera keeps the body's
  // attitude, the right one turns with it.
  body.attitude = {30, 3, -2};
  const InsPose f = CameraPose(body, front);
  EXPECT_NEAR(f.attitude.heading_deg, 30, 1e-9);
  EXPECT_NEAR(f.attitude.pitch_deg, 3, 1e-9);
  EXPECT_NEAR(f.attitude.roll_deg, -2, 1e-9);
}

TEST(RigTest, InsInterpolationAndSurveyRows) {
  // INS log at 1 Hz: heading 10 -> 20 deg over one second; halfway the slerp gives 15 (hand),
  // and the position is halfway along the geodesic.
  const fs::path dir = TempDir("rig");
  WriteText(dir / "ins.csv",
            "timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,sigma_h_m\n"
            "2026-05-04T09:00:00Z,44.0000,-40.0,50,10,0,0,0.02\n"
            "2026-05-04T09:00:01Z,44.0001,-40.0,52,20,0,0,0.02\n"
            "2026-05-04T09:00:05Z,44.0002,-40.0,52,20,0,0,0.02\n");
  WriteText(dir / "front.csv",
            "image,timestamp\nf0.jpg,2026-05-04T09:00:00.400Z\nf1.jpg,2026-05-04T09:00:03Z\n");
  WriteText(dir / "rig.yml",
            "%YAML:1.0\n---\nins: ins.csv\ncameras:\n"
            "  - name: front\n    calibration: front.yml\n    images: front.csv\n"
            "    lever_arm_m: [0.0, 0.0, 0.0]\n    boresight_deg: [0.0, 0.0, 0.0]\n"
            "    time_offset_s: 0.1\n");
  auto log = ReadInsLog((dir / "ins.csv").string());
  ASSERT_TRUE(log.ok()) << log.status().ToString();
  auto mid = InsPoseAt(*log, *ParseIsoUtc("2026-05-04T09:00:00.5Z"), 2);
  ASSERT_TRUE(mid.ok());
  EXPECT_NEAR(mid->attitude.heading_deg, 15, 1e-9);
  EXPECT_NEAR(mid->position.lat_deg, 44.00005, 1e-9);
  EXPECT_NEAR(mid->position.height_m, 51, 1e-9);
  auto rig = LoadRig((dir / "rig.yml").string());
  ASSERT_TRUE(rig.ok()) << rig.status().ToString();
  std::vector<std::string> problems;
  // f1 at 3.1 s falls in the 4 s gap of the log: an error naming the list and its line...
  auto rows = RigSurvey(*rig, 2.0, false, &problems);
  ASSERT_FALSE(rows.ok());
  EXPECT_NE(rows.status().message().find("front.csv:3"), std::string::npos)
      << rows.status().message();
  // ...or, skipping bad rows, one row at 0.5 s INS time (0.4 s camera time + 0.1 s offset).
  rows = RigSurvey(*rig, 2.0, true, &problems);
  ASSERT_TRUE(rows.ok());
  ASSERT_EQ(rows->size(), 1u);
  EXPECT_EQ(problems.size(), 1u);
  EXPECT_NEAR((*rows)[0].attitude.heading_deg, 15, 1e-9);
  EXPECT_EQ((*rows)[0].camera, "front.yml");
  // A time on a logged pose needs no interpolation, even next to a gap (5 s, after a 4 s gap).
  auto last = InsPoseAt(*log, *ParseIsoUtc("2026-05-04T09:00:05Z"), 2);
  ASSERT_TRUE(last.ok()) << last.status().ToString();
  EXPECT_NEAR(last->position.lat_deg, 44.0002, 1e-12);
}

TEST(RootSiftTest, EuclideanDistanceIsTheHellingerKernel) {
  // Arandjelovic & Zisserman (CVPR 2012), section 3: for L1-normalised SIFT x, y and RootSIFT
  // r = sqrt(x), ||r(x) - r(y)||^2 = 2 - 2 H(x, y), H the Hellinger kernel sum_i sqrt(x_i y_i).
  // Real SIFT descriptors of the graffiti image (Debian opencv-doc).
  const cv::Mat img =
      cv::imread("/usr/share/doc/opencv-doc/examples/data/graf1.png", cv::IMREAD_GRAYSCALE);
  ASSERT_FALSE(img.empty()) << "opencv-doc missing (scripts/deps.sh installs it)";
  std::vector<cv::KeyPoint> kp;
  cv::Mat sift;
  cv::SIFT::create(200)->detectAndCompute(img, cv::noArray(), kp, sift);
  ASSERT_GE(sift.rows, 100);
  cv::Mat root = sift.clone();
  ToRootSift(root);
  for (int i = 0; i + 1 < 100; ++i) {
    const cv::Mat x = sift.row(i) / cv::norm(sift.row(i), cv::NORM_L1);
    const cv::Mat y = sift.row(i + 1) / cv::norm(sift.row(i + 1), cv::NORM_L1);
    cv::Mat xy;
    cv::sqrt(x.mul(y), xy);
    const double hellinger = cv::sum(xy)[0];
    const double d2 = std::pow(cv::norm(root.row(i), root.row(i + 1), cv::NORM_L2), 2);
    EXPECT_NEAR(d2, 2 - 2 * hellinger, 1e-5) << i;
  }
}

TEST(FisheyeTest, ProjectionMatchesCvFisheyeAndFilesLoad) {
  // Reference implementation: cv::fisheye::projectPoints (OpenCV's equidistant model).
  CameraModel cam;
  cam.lens = LensModel::kFisheye;
  cam.width_px = 1280, cam.height_px = 960;
  cam.fx = 330, cam.fy = 331, cam.cx = 640.5, cam.cy = 479.5;
  cam.distortion = {0.02, -0.01, 0.004, -0.001, 0};
  std::vector<cv::Point3d> pts;
  for (double x = -2; x <= 2; x += 0.5)
    for (double y = -1.5; y <= 1.5; y += 0.5) pts.emplace_back(x, y, 1.0 + 0.1 * x * x);
  std::vector<cv::Point2d> ref;
  cv::fisheye::projectPoints(pts, ref, cv::Vec3d(0, 0, 0), cv::Vec3d(0, 0, 0), cam.K(),
                             cv::Vec4d(0.02, -0.01, 0.004, -0.001));
  for (size_t i = 0; i < pts.size(); ++i) {
    const cv::Point2d p = cam.Project(cv::Vec3d(pts[i].x, pts[i].y, pts[i].z));
    EXPECT_NEAR(p.x, ref[i].x, 1e-6) << i;
    EXPECT_NEAR(p.y, ref[i].y, 1e-6) << i;
    const cv::Point2d n = cam.PixelToNormalized(p);  // back to the ray
    EXPECT_NEAR(n.x, pts[i].x / pts[i].z, 1e-8) << i;
    EXPECT_NEAR(n.y, pts[i].y / pts[i].z, 1e-8) << i;
  }
  // Files: our key and OpenCV's sample's key both mean fisheye; 5 coefficients do not.
  const fs::path dir = TempDir("fisheye");
  ASSERT_TRUE(SaveCameraModel(cam, (dir / "a.yml").string()).ok());
  auto a = LoadCameraModel((dir / "a.yml").string());
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a->lens, LensModel::kFisheye);
  EXPECT_DOUBLE_EQ(a->distortion[3], -0.001);
  WriteText(dir / "b.yml",
            "%YAML:1.0\n---\nimage_width: 1280\nimage_height: 960\nfisheye_model: 1\n"
            "camera_matrix: !!opencv-matrix\n   rows: 3\n   cols: 3\n   dt: d\n"
            "   data: [ 330., 0., 640.5, 0., 331., 479.5, 0., 0., 1. ]\n"
            "distortion_coefficients: !!opencv-matrix\n   rows: 4\n   cols: 1\n   dt: d\n"
            "   data: [ 0.02, -0.01, 0.004, -0.001 ]\n");
  auto b = LoadCameraModel((dir / "b.yml").string());
  ASSERT_TRUE(b.ok()) << b.status().ToString();
  EXPECT_EQ(b->lens, LensModel::kFisheye);
  WriteText(dir / "c.yml",
            "%YAML:1.0\n---\nimage_width: 1280\nimage_height: 960\ndistortion_model: fisheye\n"
            "camera_matrix: !!opencv-matrix\n   rows: 3\n   cols: 3\n   dt: d\n"
            "   data: [ 330., 0., 640.5, 0., 331., 479.5, 0., 0., 1. ]\n"
            "distortion_coefficients: !!opencv-matrix\n   rows: 1\n   cols: 5\n   dt: d\n"
            "   data: [ 0.02, -0.01, 0.004, -0.001, 0. ]\n");
  EXPECT_FALSE(LoadCameraModel((dir / "c.yml").string()).ok());
}

}  // namespace
}  // namespace sightfix
