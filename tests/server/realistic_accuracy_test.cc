// The engine end to end on the realistic demo town (demo_route/world_nuisances.h: correlated
// survey error, every calibration slightly off, a changed world, traffic, look-alike stretches,
// an off-map drive, the sun and its shadows, a night drive, the camera's own nuisances): build a
// map from the survey drive, locate every image of the five query drives without a prior, and
// hold the figures to two kinds of bounds.
//
// Regression bounds (RealisticAccuracyTest, in CI): per drive a floor for the refined share, a
// ceiling for the median and p95 error of refined fixes, a band for radius95 coverage and a
// ceiling for the refined fixes more than 5 m off, near what seed 41 measured, each checked on
// seed 43 (both figures beside it). A change that halves the night refined share or makes fixes
// ten times worse fails although nothing else does. The off-map frames of query-offmap (those
// town.json's excursion lists) must get no refined fix and no confidently wrong one. Every
// refined fix more than 5 m off, asked again at a 10 m alert limit, is flagged.
//
// Goals (RealisticAccuracyGoal, label goal, scripts/goals.sh; not met yet, each gap stated in
// DEVELOPERS.md "Realistic world: where the engine falls short"): in every condition zero refined
// fixes more than 5 m off and no confidently wrong fix (error > 3 x radius95, client/eval/
// integrity.h), radius95 coverage within 0.90-0.99, and the median error of refined fixes at
// most 1.2 x the map's own error (the survey poses' horizontal error against survey/truth.csv,
// which the map's points inherit: a map cannot average away an error its whole drive shared).
//
// Seed: SIGHTFIX_ACCURACY_SEED (41 when unset, CI's); 43 checks the regression bounds.
#include <gtest/gtest.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>
#include <set>

#include "client/eval/integrity.h"
#include "client/eval/overbound_record.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/route_eval.h"
#include "demo_route/demo_town.h"
#include "indexer/base/geo.h"
#include "indexer/builder/map_builder.h"
#include "indexer/builder/self_calibration.h"
#include "indexer/builder/staging.h"
#include "indexer/map/camera_model.h"
#include "indexer/map/drive_manifest.h"
#include "server/engine/localizer.h"
#include "tests/lib/accuracy_seed.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

// The drive the overbound is fitted on, after every drive ran (FitOverboundOn).
constexpr const char* kFitDrive = "query-day";
constexpr const char* kDrives[] = {"query-day", "query-dusk", "query-overcast", "query-night",
                                   "query-offmap"};

// The town, its map and every drive's results, made once per process.
class RealisticTown {
 public:
  static RealisticTown& Get() {
    static RealisticTown town;
    return town;
  }
  bool ok() const { return localizer_ != nullptr; }
  const Localizer& localizer() const { return *localizer_; }
  const std::string& root() const { return root_; }
  const std::vector<QueryResult>& Results(const std::string& drive) { return results_[drive]; }
  const RouteSummary& Summary(const std::string& drive) { return summaries_[drive]; }
  const IntegrityFit& fit() const { return fit_; }
  const nlohmann::json& cameras() const { return cameras_; }

 private:
  RealisticTown() {
    root_ = (fs::path(::testing::TempDir()) / ("realistic_accuracy_" + std::to_string(::getpid())))
                .string();
    fs::remove_all(root_);
    demo::DemoOptions town;  // the realistic world, every nuisance group on (the default)
    town.out_dir = root_ + "/town";
    town.seed = AccuracyTownSeed();
    // 600 m: the shortest route whose straight stretches hold the look-alike stretches (twin,
    // terrace, chain shops) besides the off-map side street.
    town.route_length_m = 600;
    std::printf("realistic demo town seed %llu, %.0f m\n",
                static_cast<unsigned long long>(town.seed), town.route_length_m);
    if (!demo::GenerateDemoTown(town).ok()) return;
    BuildOptions b;
    b.drive_dir = town.out_dir + "/survey";
    b.map_dir = root_ + "/map";
    b.progress = false;
    Result<BuildSummary> s = BuildMap(b);
    if (!s.ok()) {
      std::printf("map build failed: %s\n", s.status().ToString().c_str());
      return;
    }
    std::printf("map: %d images, %d tiles, %d points, %.0f s\n", s->images, s->tiles, s->points,
                s->seconds);
    cameras_ = s->cameras;
    auto loc = Localizer::Open(b.map_dir, LocalizerOptions{});  // survey error: correlated
    if (!loc.ok()) return;
    for (const char* drive : kDrives) {
      RouteEvalOptions o;
      o.drive_dir = town.out_dir + "/" + drive;
      o.prior = PriorMode::kNone;
      auto r = RunDrive(**loc, o);
      if (!r.ok()) {
        std::printf("%s: %s\n", drive, r.status().ToString().c_str());
        return;
      }
      results_[drive] = *r;
      summaries_[drive] = Summarize(*r);
      const IntegrityCounts confident =
          CountIntegrity(*r, CutStreetSegments(*r, 50), kConfidentlyWrongFactor);
      std::printf("%s, no prior: %s\n  %s\n  %s\n", drive, SummaryLine(summaries_[drive]).c_str(),
                  IntegrityLine(confident).c_str(),
                  ProtectionLines(summaries_[drive].protection).c_str());
    }
    if (!FitOverboundOn(kFitDrive, town.out_dir, b.map_dir, (*loc)->catalog().map_version)) return;
    localizer_ = std::move(loc).value();
  }

  // The overbound fitted on one drive's results and recorded in the map, as `sightfix
  // fit-integrity` does. The drives above ran without it (scale 1): the stricter test.
  bool FitOverboundOn(const std::string& drive, const std::string& town_dir,
                      const std::string& map_dir, int map_version) {
    DriveOverboundOptions o;
    o.map_version = map_version;
    Result<DriveOverbound> fit = FitDriveOverbound(results_[drive], town_dir + "/" + drive, o);
    if (!fit.ok() || !RecordOverbound(map_dir, fit->fit).ok()) {
      std::printf("overbound fit failed: %s\n", fit.status().ToString().c_str());
      return false;
    }
    fit_ = fit->fit;
    std::printf(
        "overbound fitted on %s: K %.3f over %d fixes (left out: %d more than 5 m off, %d "
        "pulled off by one group), set by |z| %.2f\n",
        fit_.drive.c_str(), fit_.overbound_scale, fit_.fixes, fit_.excluded, fit_.faults,
        fit_.binding_z);
    return true;
  }
  ~RealisticTown() {
    localizer_.reset();
    std::error_code ignored;
    fs::remove_all(root_, ignored);
  }

  std::string root_;
  std::unique_ptr<Localizer> localizer_;
  std::map<std::string, std::vector<QueryResult>> results_;
  std::map<std::string, RouteSummary> summaries_;
  IntegrityFit fit_;
  nlohmann::json cameras_;  // the build summary's calibration files, supplied and refined
};

// The images of query-offmap whose truth is off the map (town.json excursion.off_map_frames).
std::set<std::string> OffMapImages(const std::string& town_dir) {
  std::ifstream in(town_dir + "/town.json");
  const nlohmann::json town = nlohmann::json::parse(in);
  auto rows = ReadDriveManifest(town_dir + "/query-offmap/drive.csv");
  std::set<std::string> images;
  if (!rows.ok()) return images;
  for (int k : town.at("excursion").at("off_map_frames").get<std::vector<int>>())
    images.insert((*rows)[k].image);
  return images;
}

// The survey poses' median horizontal error against survey/truth.csv, metres.
double SurveyMedianErrorM(const std::string& town_dir) {
  auto reported = ReadDriveManifest(town_dir + "/survey/drive.csv");
  auto truth = ReadDriveManifest(town_dir + "/survey/truth.csv");
  if (!reported.ok() || !truth.ok() || reported->size() != truth->size()) return -1;
  std::vector<double> e;
  for (size_t k = 0; k < truth->size(); ++k) {
    const GeoPoint &a = (*reported)[k].position, &b = (*truth)[k].position;
    e.push_back(GeodesicBetween(a.lat_deg, a.lon_deg, b.lat_deg, b.lon_deg).distance_m);
  }
  std::nth_element(e.begin(), e.begin() + e.size() / 2, e.end());
  return e[e.size() / 2];
}

// A drive's regression bounds, with the figures measured on seed 41 / seed 43 (2026-12-05, the
// maps self-calibrated with the time offset and the rolling shutter) above each row: refined
// share, median and p95 error and radius95 coverage of refined fixes, refined fixes more than 5 m
// off. Floors sit about two binomial standard errors below the lower of the two shares; error
// ceilings at about twice the larger figure; coverage floors about 0.1 below the lower; at most
// two more far-off fixes than either seed had. These catch a broken engine, not a small loss:
// the goals above and scripts/nuisance-costs.sh measure the rest.
struct Regression {
  const char* drive;
  double min_refined_share, max_median_m, max_p95_m, min_coverage, max_coverage;
  int max_wrong_refined;
};
// clang-format off
constexpr Regression kRegression[] = {
  // 0.685 / 0.627; 0.194 / 0.233 m; 0.584 / 0.685 m; 0.970 / 0.979; 0 / 2
  {"query-day", 0.55, 0.5, 1.4, 0.87, 1.0, 4},
  // 0.253 / 0.387; 0.318 / 0.327 m; 1.325 / 0.711 m; 0.950 / 1.000; 0 / 0
  {"query-dusk", 0.18, 0.65, 2.7, 0.85, 1.0, 2},
  // 0.779 / 0.444; 0.200 / 0.255 m; 0.490 / 0.736 m; 0.975 / 1.000; 2 / 0
  {"query-overcast", 0.36, 0.55, 1.5, 0.87, 1.0, 4},
  // 0 / 0 refined (a day map does not serve the night: DEVELOPERS.md, "Realistic world: where
  // the engine falls short"); the bounds below hold it to no wrong fix
  {"query-night", 0.0, 1e9, 1e9, 0.0, 1.0, 2},
  // 0.241 / 0.192 (on-map frames only: OffMapFramesGetNoConfidentFix); 0.264 / 0.216 m;
  // 0.455 / 0.393 m; 1.000 / 1.000; 0 / 0
  {"query-offmap", 0.10, 0.55, 0.95, 0.9, 1.0, 2},
};
// clang-format on

class RealisticAccuracyTest : public ::testing::Test {};
class RealisticAccuracyGoal : public ::testing::Test {};

TEST_F(RealisticAccuracyTest, EveryDriveWithinRegressionBounds) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  for (const Regression& r : kRegression) {
    const RouteSummary& s = t.Summary(r.drive);
    ASSERT_GT(s.queries, 0) << r.drive;
    EXPECT_GE(s.refined_share, r.min_refined_share) << r.drive;
    EXPECT_LE(s.wrong_refined, r.max_wrong_refined) << r.drive;
    if (s.refined == 0) continue;  // no error or coverage to bound
    EXPECT_LE(s.median_error_m, r.max_median_m) << r.drive;
    EXPECT_LE(s.p95_error_m, r.max_p95_m) << r.drive;
    EXPECT_GE(s.radius95_coverage, r.min_coverage) << r.drive;
    EXPECT_LE(s.radius95_coverage, r.max_coverage) << r.drive;
  }
}

TEST_F(RealisticAccuracyTest, OffMapFramesGetNoConfidentFix) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  const std::set<std::string> off = OffMapImages(t.root() + "/town");
  ASSERT_GT(off.size(), 10u);
  int seen = 0;
  for (const QueryResult& q : t.Results("query-offmap")) {
    if (!off.count(q.truth.image)) continue;
    ++seen;
    EXPECT_NE(q.fix.quality, FixQuality::kRefined) << q.truth.image << ": " << q.error_m << " m";
    EXPECT_FALSE(IsMisleading(q, kConfidentlyWrongFactor))
        << q.truth.image << ": " << q.error_m << " m, radius95 " << q.fix.radius95_m;
  }
  EXPECT_EQ(seen, static_cast<int>(off.size()));
}

// Integrity without the overbound (scale 1, the narrowest levels the engine states): on every
// drive no fix flagged usable whose error exceeds a protection level (misleading), and no fix
// flagged usable more than 5 m off: a wrong place (a look-alike stretch, a twin street) is
// either caught or left unusable. A fitted scale K >= 1 widens every level (and the fault
// tests' thresholds with them), so fewer fixes are usable with it; the fit itself is recorded after
// the drives ran and checked for its record (its effect on the engine:
// tests/cli/fit_integrity_test.sh). Seed 41 (CI's) is held out from the development of the place
// and near-miss checks, which seed 43 drove. Measured 2026-12-05, flagged usable at the default
// 2 m limit, every fault hypothesis tested while the rest keeps 10 inliers: seed 41 43 of 279
// protected fixes, seed 43 5 of 235; 0 misleading on both. (With hypotheses tested only while
// the rest kept 25 inliers, weak fixes skipped them all and stated the fault-free level alone:
// 94 and 28 usable.) The floor of 4 usable, under both, keeps the test from passing on an
// engine that flags nothing. Guards the protection levels end to end
// (tests/mutants/mutants.tsv: protection_levels_at_one_sigma).
TEST_F(RealisticAccuracyTest, NoMisleadingFixAtTheNarrowestLevels) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  int protected_fixes = 0, usable = 0, misleading = 0;
  for (const char* drive : kDrives) {
    for (const QueryResult& q : t.Results(drive))
      EXPECT_FALSE(IsFlaggedUsable(q) && q.error_m > 5)
          << drive << " " << q.truth.image << ": usable, " << q.error_m << " m off";
    const ProtectionEvidence& e = t.Summary(drive).protection;
    EXPECT_EQ(e.misleading, 0) << drive << ": " << ProtectionLines(e);
    EXPECT_EQ(e.overbound_scale, 1) << drive;
    protected_fixes += e.protected_fixes, usable += e.usable, misleading += e.misleading;
  }
  std::printf("scale 1: %d protected fixes, %d flagged usable, %d misleading\n", protected_fixes,
              usable, misleading);
  EXPECT_GE(usable, 4);
}

// A wrong place is caught whatever the alert limit: every refined fix more than 5 m off, asked
// again at a 10 m limit (where its levels no longer keep it from use, and the place checks run),
// comes back flagged fault or place ambiguity. Measured 2026-12-05: seed 41, the overcast fix
// 145 m off (the look-alike check); seed 43, the day fixes 14 and 22 m off at the terrace's
// mouth (the nearby check: survey images a few metres along put the camera 14.3 and 21.7 m away
// with 30 and 20 PnP inliers against the fixes' 50 and 33). Replays of all five drives at 10 m
// kept 469 fixes usable on the two seeds, none misleading.
TEST_F(RealisticAccuracyTest, WrongPlacesCaughtAtAWideAlertLimit) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  int asked = 0;
  for (const char* drive : kDrives)
    for (const QueryResult& q : t.Results(drive)) {
      if (q.fix.quality != FixQuality::kRefined || !(q.error_m > 5)) continue;
      const std::string dir = t.root() + "/town/" + drive + "/";
      LocateRequest r;
      r.image = cv::imread(dir + q.truth.image, cv::IMREAD_GRAYSCALE);
      Result<CameraModel> camera = LoadCameraModel(dir + q.truth.camera);
      ASSERT_TRUE(camera.ok()) << camera.status().ToString();
      r.camera = *camera;
      r.integrity.horizontal_alert_limit_m = 10;
      Result<Fix> f = t.localizer().Locate(r);
      ASSERT_TRUE(f.ok()) << f.status().ToString();
      ++asked;
      const IntegrityState s = f->integrity.state;
      EXPECT_TRUE(f->quality != FixQuality::kRefined || s == IntegrityState::kFaultDetected ||
                  s == IntegrityState::kPlaceAmbiguity)
          << drive << " " << q.truth.image << ": " << q.error_m << " m off, at 10 m "
          << IntegrityStateName(s) << " (" << f->integrity.detail << ")";
    }
  std::printf("refined fixes more than 5 m off, asked again at a 10 m alert limit: %d\n", asked);
}

// The overbound fitted on the day drive lands in the map: K >= 1 from at least 20 fixes, the
// drive named, the catalog reading it back. Seed 41's day drive gives K 2.48, set by one fix
// at 5.6 sigma (DEVELOPERS.md, "Integrity: protection levels, first figures").
TEST_F(RealisticAccuracyTest, OverboundFitRecordedInTheMap) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  EXPECT_EQ(t.fit().drive, kFitDrive);
  EXPECT_GE(t.fit().overbound_scale, 1);
  EXPECT_GE(t.fit().fixes, kMinOverboundFixes);
  Result<Catalog> c = ReadCatalog(t.root() + "/map/catalog.sqlite");
  ASSERT_TRUE(c.ok()) << c.status().ToString();
  ASSERT_TRUE(c->integrity_fit.has_value());
  EXPECT_EQ(c->integrity_fit->overbound_scale, t.fit().overbound_scale);
}

// Self-calibration on the demo world (docs/design.md 4.4.1): the survey camera refined from its
// delivered camera.yml, against the renderer's camera-truth.yml and town.json's time offset.
// Focal length and k1 within 3 posterior sigma of the truth, the focal's sigma under 0.7 px, the
// time offset within 3 ms (its sigma is optimistic: the survey's correlated pose error is not in
// it). Measured 2026-12-05: seed 41 f 0.5 sigma (0.26 px), k1 1.9 sigma, dt 1.2 ms off; seed 43
// f 1.9 sigma (0.35 px), k1 2.1 sigma, dt 2.3 ms off (3.8 sigma). Left out, the rolling shutter
// puts seed 41's f 4.6 sigma and dt 4.8 ms off (tests/mutants/mutants.tsv:
// rolling_shutter_ignored).
TEST_F(RealisticAccuracyTest, SurveyCameraRefinedTowardItsTruth) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  ASSERT_EQ(t.cameras().size(), 1u);
  const nlohmann::json& cal = t.cameras()[0].at("calibration");
  ASSERT_EQ(cal.at("status"), "refined") << cal.dump();
  const std::string town = t.root() + "/town";
  const Result<CameraModel> truth = LoadCameraModel(town + "/survey/camera-truth.yml");
  ASSERT_TRUE(truth.ok()) << truth.status().ToString();
  std::ifstream in(town + "/town.json");
  const double true_dt = nlohmann::json::parse(in)
                             .at("drives")
                             .at("survey")
                             .at("calibration_error")
                             .at("time_offset_s")
                             .get<double>();
  const std::vector<double> sigma = cal.at("posterior_sigma").get<std::vector<double>>();
  const double f = cal.at("refined").at("fx").get<double>();
  const double k1 = cal.at("refined").at("distortion").at(0).get<double>();
  const double dt = cal.at("time_offset_s").get<double>();
  std::printf(
      "survey camera: f %.2f px (truth %.2f, sigma %.2f), k1 %.4f (truth %.4f, sigma %.4f), "
      "time offset %.1f ms (truth %.1f, sigma %.1f)\n",
      f, truth->fx, sigma[kFocal], k1, truth->distortion[0], sigma[kK1], 1e3 * dt, 1e3 * true_dt,
      1e3 * cal.at("time_offset_sigma_s").get<double>());
  EXPECT_LT(sigma[kFocal], 0.7);
  EXPECT_LT(std::abs(f - truth->fx), 3 * sigma[kFocal]);
  EXPECT_LT(std::abs(k1 - truth->distortion[0]), 3 * sigma[kK1]);
  EXPECT_TRUE(cal.at("time_offset_estimated").get<bool>());
  EXPECT_LT(std::abs(dt - true_dt), 0.003);
}

// The survey as two drives of one camera: its drive.csv with the first half's rows naming
// cam-a.yml and the rest cam-b.yml, both copies of camera.yml; images linked, not copied.
std::string SurveyInHalves(const std::string& root) {
  const fs::path survey = fs::path(root) / "town" / "survey", out = fs::path(root) / "halves";
  fs::create_directories(out);
  fs::copy_file(survey / "camera.yml", out / "cam-a.yml", fs::copy_options::overwrite_existing);
  fs::copy_file(survey / "camera.yml", out / "cam-b.yml", fs::copy_options::overwrite_existing);
  fs::create_directory_symlink(survey / "images", out / "images");
  std::ifstream in(survey / "drive.csv");
  std::vector<std::string> lines;
  for (std::string line; std::getline(in, line);) lines.push_back(line);
  std::ofstream csv(out / "drive.csv");
  csv << lines[0] << "\n";
  const std::string from = ",camera.yml,";
  for (size_t i = 1; i < lines.size(); ++i) {
    std::string row = lines[i];
    const size_t at = row.find(from);
    if (at != std::string::npos)
      row.replace(at, from.size(), 2 * i <= lines.size() ? ",cam-a.yml," : ",cam-b.yml,");
    csv << row << "\n";
  }
  return out.string();
}

// Two drives of the same camera agree (docs/design.md 4.4.1): each half of the survey (300 frames
// through different corners) calibrated on its own gives the same focal length and k1 within 3
// sigma of their difference. The boresight and the time offset are printed, not held to it: each
// half's boresight also takes up that half's share of the survey's correlated heading error.
// Measured 2026-12-05 on seed 41 (the indexer on the same split): f 500.25 +- 0.26 and 500.09 +-
// 0.23 (0.5 sigma apart), k1 0.0010 +- 0.0010 and 0.0018 +- 0.0008 (0.6 sigma), time offset 15.3
// and 16.8 ms (+- 0.5), boresight about y 0.13 and 0.28 deg (+- 0.03).
TEST_F(RealisticAccuracyTest, TwoHalvesOfTheSurveyAgree) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  BuildOptions o;
  o.drive_dir = SurveyInHalves(t.root());
  o.progress = false;
  std::string format;
  std::vector<std::string> skipped;
  Result<build_internal::Survey> s = staging::ReadRows(o, &format, &skipped);
  ASSERT_TRUE(s.ok()) << s.status().ToString();
  ASSERT_EQ(s->cameras.size(), 2u);
  nlohmann::json cameras = nlohmann::json::array({nlohmann::json::object(), {}});
  ASSERT_TRUE(staging::CalibrateSurveyCameras(o, *s, &cameras, nullptr).ok());
  double f[2], k1[2], f_sigma[2], k1_sigma[2];
  for (int h = 0; h < 2; ++h) {
    const nlohmann::json& c = cameras[h].at("calibration");
    ASSERT_EQ(c.at("status"), "refined") << c.dump();
    EXPECT_TRUE(c.at("estimated").at(kFocal).get<bool>()) << "half " << h + 1 << ": f held";
    EXPECT_TRUE(c.at("estimated").at(kK1).get<bool>()) << "half " << h + 1 << ": k1 held";
    const std::vector<double> sigma = c.at("posterior_sigma").get<std::vector<double>>();
    const std::vector<double> bore = c.at("boresight_rad").get<std::vector<double>>();
    f[h] = c.at("refined").at("fx").get<double>(), f_sigma[h] = sigma[kFocal];
    k1[h] = c.at("refined").at("distortion").at(0).get<double>(), k1_sigma[h] = sigma[kK1];
    std::printf(
        "half %d: f %.2f +- %.2f px, k1 %.4f +- %.4f, time offset %.1f ms, boresight %.3f "
        "%.3f %.3f deg\n",
        h + 1, f[h], f_sigma[h], k1[h], k1_sigma[h], 1e3 * c.at("time_offset_s").get<double>(),
        bore[0] * 180 / M_PI, bore[1] * 180 / M_PI, bore[2] * 180 / M_PI);
  }
  EXPECT_LT(std::abs(f[0] - f[1]), 3 * std::hypot(f_sigma[0], f_sigma[1]));
  EXPECT_LT(std::abs(k1[0] - k1[1]), 3 * std::hypot(k1_sigma[0], k1_sigma[1]));
}

TEST_F(RealisticAccuracyGoal, NoFixFarOffOrConfidentlyWrong) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  for (const char* drive : kDrives) {
    EXPECT_EQ(t.Summary(drive).wrong_refined, 0) << drive;
    for (const QueryResult& q : t.Results(drive))
      EXPECT_FALSE(IsMisleading(q, kConfidentlyWrongFactor))
          << drive << " " << q.truth.image << ": " << q.error_m << " m, radius95 "
          << q.fix.radius95_m;
  }
}

// The aliasing goal at any alert limit: a wrong place (a refined fix more than 5 m off) must be
// caught as a fault or a rival place, not merely kept from use because its protection level
// happens to exceed a 2 m alert limit (at 5 m it would be flagged usable, misleading and
// hazardous). Not met yet (2026-12-05): seed 43's two day fixes 14 and 22 m off (HPL 2.3 and
// 2.4 m) are caught only by the limit; their true places were never among the candidates
// (docs/design.md 5.6: the map's own look-alike list, next). Seed 41's two overcast fixes 145 m
// off, once caught only by the limit, are flagged place ambiguity since the time offset and the
// rolling shutter are in the map's calibration.
TEST_F(RealisticAccuracyGoal, RadiusCoversAndErrorNearTheMapsOwn) {
  RealisticTown& t = RealisticTown::Get();
  ASSERT_TRUE(t.ok());
  const double map_error_m = SurveyMedianErrorM(t.root() + "/town");
  ASSERT_GT(map_error_m, 0);
  std::printf("survey poses' median error against truth.csv: %.3f m\n", map_error_m);
  for (const char* drive : kDrives) {
    const RouteSummary& s = t.Summary(drive);
    if (s.refined == 0) continue;
    EXPECT_GE(s.radius95_coverage, 0.90) << drive;
    EXPECT_LE(s.radius95_coverage, 0.99) << drive;
    EXPECT_LE(s.median_error_m, 1.2 * map_error_m) << drive;
  }
}

}  // namespace
}  // namespace sightfix
