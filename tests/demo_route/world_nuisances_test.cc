// The realistic world's nuisances, checked on the plans (nothing rendered): the survey error has
// the statistics of its drawn Gauss-Markov parameters, multipath jumps stand only in deep
// canyons, the honest sigma_h_m covers the error as a 1-sigma-per-axis figure should and the
// over-optimistic scale shows, calibration errors stay within their ranges, and the time
// offset moves each exposure along the track by speed x offset.
//
// Tolerances come from the estimators' standard errors for a Gaussian AR(1) series of N samples
// with coefficient rho (the formulas and their Monte-Carlo check are in gauss_markov_test.cc:
// Box & Jenkins and Bartlett 1946, from memory):
//   variance:                 SE = sigma^2 sqrt(2 (1 + rho^2) / (N (1 - rho^2)))
//   autocorrelation at lag m: SE = sqrt(((1 + rho^2)(1 - rho^2m) / (1 - rho^2) - 2 m rho^2m) / N)
// and, for the share of samples inside the 1-sigma circle (an even function of a Gaussian
// series, whose autocorrelation at lag m is at most rho^2m by its Hermite expansion: from
// memory), SE <= sqrt(p (1 - p) (1 + rho^2) / (N (1 - rho^2))). Each check allows 4 SE.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <vector>

#include "demo_route/demo_drives.h"
#include "demo_route/survey_error.h"
#include "demo_route/urban_canyon.h"

namespace sightfix::demo {
namespace {

constexpr double kStandardErrors = 4;
// 1 - exp(-k^2 / 2): the share of a circular 2-D Gaussian within k sigma of its centre
// (chi-square with 2 degrees of freedom; common practice): 39.35 % at k = 1, 11.75 % at 0.5.
double InsideShare(double k) { return -std::expm1(-k * k / 2); }

double VarianceSe(double sigma, double rho, double n) {
  return sigma * sigma * std::sqrt(2 * (1 + rho * rho) / (n * (1 - rho * rho)));
}

double AutocorrelationSe(double rho, int lag, double n) {
  const double rho_2m = std::pow(rho, 2 * lag);
  return std::sqrt(((1 + rho * rho) * (1 - rho_2m) / (1 - rho * rho) - 2 * lag * rho_2m) / n);
}

// Sample variance (known zero mean) and lag-m autocorrelation of one series.
void Measure(const std::vector<double>& x, int lag, double* variance, double* autocorrelation) {
  double sum_squares = 0, lagged = 0;
  for (size_t k = 0; k < x.size(); ++k) {
    sum_squares += x[k] * x[k];
    if (k + lag < x.size()) lagged += x[k] * x[k + lag];
  }
  *variance = sum_squares / x.size();
  *autocorrelation = lagged / sum_squares;
}

// Checks one error series (sampled every dt_s) against sigma and tau at lag 1 and lag ~tau.
void CheckAxis(const char* name, const std::vector<double>& x, double sigma, double tau_s,
               double dt_s) {
  const double n = x.size(), rho = std::exp(-dt_s / tau_s);
  const int lag_tau = static_cast<int>(std::lround(tau_s / dt_s));
  double variance, r1, r_tau;
  Measure(x, 1, &variance, &r1);
  Measure(x, lag_tau, &variance, &r_tau);
  const double se_var = VarianceSe(sigma, rho, n), se1 = AutocorrelationSe(rho, 1, n),
               se_tau = AutocorrelationSe(rho, lag_tau, n);
  EXPECT_NEAR(variance, sigma * sigma, kStandardErrors * se_var) << name;
  EXPECT_NEAR(r1, rho, kStandardErrors * se1) << name;
  EXPECT_NEAR(r_tau, std::pow(rho, lag_tau), kStandardErrors * se_tau) << name;
  std::printf("%-8s sd %.4f (drawn %.4f), variance %+.2f SE, lag 1 %+.2f SE, lag %d %+.2f SE\n",
              name, std::sqrt(variance), sigma, (variance - sigma * sigma) / se_var,
              (r1 - rho) / se1, lag_tau, (r_tau - std::pow(rho, lag_tau)) / se_tau);
}

const CanyonTest kNoCanyon = [](double) { return false; };

// A long synthetic survey (no canyon, so no jumps) sampled every second: per-axis standard
// deviation and autocorrelation of the position and attitude errors against the draw.
void CheckLongSeries(uint64_t seed) {
  Rng rng(seed);
  const SurveyErrorDraw draw = DrawSurveyError(SurveyErrorRanges{}, rng);
  constexpr double kDt = 1.0;
  std::vector<double> times;
  for (double t = 0; t < 300000; t += kDt) times.push_back(t);
  const std::vector<SurveyError> e = SimulateSurveyError(draw, {}, kNoCanyon, times);
  std::vector<double> axes[6];
  for (const SurveyError& s : e) {
    for (int i = 0; i < 3; ++i) axes[i].push_back(s.position_m[i]);
    axes[3].push_back(s.heading_deg), axes[4].push_back(s.pitch_deg), axes[5].push_back(s.roll_deg);
    ASSERT_FALSE(s.multipath);
    ASSERT_EQ(s.sigma_h_m, draw.sigma_horizontal_m);
  }
  std::printf(
      "seed %llu: sigma_h %.3f m, sigma_v %.3f m, tau %.1f s, heading %.3f deg, "
      "pitch/roll %.3f deg, attitude tau %.1f s\n",
      static_cast<unsigned long long>(seed), draw.sigma_horizontal_m, draw.sigma_vertical_m,
      draw.tau_s, draw.heading_sigma_deg, draw.pitch_roll_sigma_deg, draw.attitude_tau_s);
  CheckAxis("east", axes[0], draw.sigma_horizontal_m, draw.tau_s, kDt);
  CheckAxis("north", axes[1], draw.sigma_horizontal_m, draw.tau_s, kDt);
  CheckAxis("up", axes[2], draw.sigma_vertical_m, draw.tau_s, kDt);
  CheckAxis("heading", axes[3], draw.heading_sigma_deg, draw.attitude_tau_s, kDt);
  CheckAxis("pitch", axes[4], draw.pitch_roll_sigma_deg, draw.attitude_tau_s, kDt);
  CheckAxis("roll", axes[5], draw.pitch_roll_sigma_deg, draw.attitude_tau_s, kDt);

  // The honest sigma, and half of it (an over-optimistic receiver), against the chi-square share.
  const double rho = std::exp(-kDt / draw.tau_s), n = e.size();
  for (double scale : {1.0, 0.5}) {
    int inside = 0;
    for (const SurveyError& s : e)
      inside += std::hypot(s.position_m[0], s.position_m[1]) <= scale * s.sigma_h_m;
    const double p = InsideShare(scale), share = inside / n;
    const double se = std::sqrt(p * (1 - p) * (1 + rho * rho) / (n * (1 - rho * rho)));
    EXPECT_NEAR(share, p, kStandardErrors * se) << "scale " << scale;
    std::printf("inside %.1f x sigma_h: %.2f %% (chi-square 2 dof: %.2f %%, %+.2f SE)\n", scale,
                100 * share, 100 * p, (share - p) / se);
  }
}

TEST(WorldNuisancesTest, SurveyErrorHasItsDrawnStatistics) { CheckLongSeries(11); }
TEST(WorldNuisancesTest, SurveyErrorHasItsDrawnStatisticsOtherSeed) { CheckLongSeries(12); }

// Every draw stays within its documented range.
TEST(WorldNuisancesTest, DrawsStayWithinTheirRanges) {
  const SurveyErrorRanges s;
  const CalibrationErrorRanges c;
  CameraModel pinhole, fleet;
  pinhole.fx = pinhole.fy = 500;
  fleet.fx = 445, fleet.fy = 447, fleet.distortion = {-0.22, 0.05, 4e-4, -3e-4, 0.0};
  Rng rng(3);
  for (int i = 0; i < 2000; ++i) {
    const SurveyErrorDraw d = DrawSurveyError(s, rng);
    EXPECT_TRUE(d.sigma_horizontal_m >= 0.1 && d.sigma_horizontal_m <= 0.3);
    EXPECT_TRUE(d.sigma_vertical_m >= 0.2 && d.sigma_vertical_m <= 0.5);
    EXPECT_TRUE(d.tau_s >= 30 && d.tau_s <= 120 && d.attitude_tau_s >= 30 &&
                d.attitude_tau_s <= 120);
    EXPECT_TRUE(d.heading_sigma_deg >= 0.1 && d.heading_sigma_deg <= 0.2);
    for (const CameraModel& truth : {pinhole, fleet}) {
      const CalibrationError e = DrawCalibrationError(c, truth, rng);
      EXPECT_TRUE(std::abs(e.focal_scale - 1) >= 0.003 && std::abs(e.focal_scale - 1) <= 0.01);
      const double pp = cv::norm(e.principal_point_px);
      EXPECT_TRUE(pp >= 2 - 1e-12 && pp <= 4 + 1e-12) << pp;
      EXPECT_TRUE(std::abs(e.k1) >= 0.005 && std::abs(e.k1) <= 0.02);
      if (truth.distortion[1] == 0)
        EXPECT_EQ(e.k2, 0.0);
      else
        EXPECT_TRUE(std::abs(e.k2) >= 0.002 && std::abs(e.k2) <= 0.01);
      EXPECT_TRUE(e.time_offset_s >= 0.005 && e.time_offset_s <= 0.030);
      const CameraModel w = WithCalibrationError(truth, e);
      EXPECT_DOUBLE_EQ(w.fx / truth.fx, e.focal_scale);
      EXPECT_DOUBLE_EQ(w.fy / truth.fy, e.focal_scale);
    }
  }
}

// A hand-built street: facades 8 m to the left (20 m high) and 14 m to the right (25 m high) of
// a point travelling north: W = 22 m, H = 20 m (the lower), H / W = 0.909. Without the right
// building the canyon is open.
TEST(WorldNuisancesTest, CanyonAspectRatioOfAHandBuiltStreet) {
  Town town;
  Building left, right;
  left.footprint = {cv::Vec2d(-20, -10), cv::Vec2d(-8, -10), cv::Vec2d(-8, 10), cv::Vec2d(-20, 10)};
  left.height_m = 20;
  right.footprint = {cv::Vec2d(14, -10), cv::Vec2d(30, -10), cv::Vec2d(30, 10), cv::Vec2d(14, 10)};
  right.height_m = 25;
  town.buildings = {left, right};
  const Canyon c = CanyonAt(town, {0, 0}, {0, 3});
  EXPECT_NEAR(c.left_m, 8, 1e-12);
  EXPECT_NEAR(c.right_m, 14, 1e-12);
  EXPECT_NEAR(c.aspect_ratio, 20.0 / 22.0, 1e-12);
  // Travelling south swaps the sides, not the ratio; past the buildings' ends it is open.
  EXPECT_NEAR(CanyonAt(town, {0, 0}, {0, -1}).left_m, 14, 1e-12);
  EXPECT_EQ(CanyonAt(town, {0, 11}, {0, 1}).aspect_ratio, 0);
  town.buildings.pop_back();
  EXPECT_EQ(CanyonAt(town, {0, 0}, {0, 1}).aspect_ratio, 0);
}

// The demo town of seed `seed` (route 1 km), planned in the realistic world.
struct PlannedTown {
  Town town;
  std::vector<PlannedDrive> drives;
};

PlannedTown Plan(uint64_t seed, double sigma_scale = 1.0) {
  DemoOptions o;
  o.out_dir = "unused";
  o.seed = seed;
  o.world = World::kRealistic;
  o.survey_sigma_scale = sigma_scale;
  PlannedTown p;
  TownOptions t;
  t.seed = seed, t.route_length_m = o.route_length_m;
  p.town = BuildTown(t);
  p.drives = PlanDrives(p.town, o);
  return p;
}

// Multipath shows only at frames whose true position stands in a canyon meeting the criterion,
// and each jump adds at most offset_m.hi; the honest sigma grows there.
TEST(WorldNuisancesTest, JumpsOnlyInDeepCanyons) {
  int jump_frames = 0, canyon_frames = 0, frames = 0;
  for (uint64_t seed : {41, 43}) {
    const PlannedTown p = Plan(seed);
    const PlannedDrive& s = p.drives[0];
    ASSERT_TRUE(s.survey_error_model);
    const CanyonTest canyon = DriveCanyonTest(p.town, s, s.canyon_min_aspect_ratio);
    const std::vector<SurveyError> plain = SimulateSurveyError(s.survey_draw, {}, kNoCanyon, [&] {
      std::vector<double> t;
      for (const Frame& f : s.truth) t.push_back(f.time_s);
      return t;
    }());
    for (size_t k = 0; k < s.truth.size(); ++k, ++frames) {
      const SurveyError& e = s.survey_errors[k];
      const bool deep = canyon(s.truth[k].time_s);
      canyon_frames += deep;
      if (!e.multipath) {
        EXPECT_EQ(e.position_m, plain[k].position_m);
        continue;
      }
      ++jump_frames;
      EXPECT_TRUE(deep) << "seed " << seed << " frame " << k;
      const double jump = cv::norm(e.position_m - plain[k].position_m);
      EXPECT_TRUE(jump >= 0.5 - 1e-9 && jump <= 2.0 + 1e-9) << jump;
      EXPECT_GT(e.sigma_h_m, s.survey_draw.sigma_horizontal_m);
    }
  }
  std::printf("seeds 41 and 43: %d of %d survey frames in deep canyons, %d with a jump\n",
              canyon_frames, frames, jump_frames);
  EXPECT_GT(jump_frames, 0);
  EXPECT_LT(jump_frames, canyon_frames);
}

// The reported sigma_h_m is the honest one times survey_sigma_scale, exactly.
TEST(WorldNuisancesTest, SigmaScaleMakesTheReceiverOverOptimistic) {
  const PlannedTown honest = Plan(41), optimistic = Plan(41, 0.5);
  const PlannedDrive &a = honest.drives[0], &b = optimistic.drives[0];
  ASSERT_EQ(a.reported_sigma_h_m.size(), b.reported_sigma_h_m.size());
  for (size_t k = 0; k < a.reported_sigma_h_m.size(); ++k) {
    EXPECT_EQ(a.reported_sigma_h_m[k], a.survey_errors[k].sigma_h_m);
    EXPECT_DOUBLE_EQ(b.reported_sigma_h_m[k], 0.5 * a.reported_sigma_h_m[k]);
    EXPECT_EQ(a.reported[k].position, b.reported[k].position);
  }
}

// Each exposure is its frame moved along the track by speed x offset, where the drive runs
// straight and steady for 2 s either side (a quarter of the frames at least) (in turns the lane's
// radius differs from the centreline's, along which the plan sets the speed): along-track within
// 0.1 mm, across within the lane wander's lateral drift over that step (wander_m 2 pi / 80 m per
// metre); the image time is the frame's plus the offset.
void CheckTimeOffset(const PlannedTown& p, const PlannedDrive& d, uint64_t seed) {
  const double offset = d.calibration_error.time_offset_s, step_m = d.plan.speed_mps * offset;
  ASSERT_TRUE(offset >= 0.005 && offset <= 0.03);
  int checked = 0;
  double worst_along = 0;
  for (size_t k = 0; k < d.truth.size(); ++k) {
    const Frame &f = d.truth[k], &g = d.exposure[k];
    EXPECT_DOUBLE_EQ(g.time_s, f.time_s + offset);
    // Straight: the planned heading the same (0.01 deg) at each second of t -2 .. t + 2 s (an
    // S-curve's inflection has equal headings at its ends only), moving 4 s x speed.
    const Frame a = PoseAtTime(p.town.route, d.passes, d.plan, f.time_s - 2);
    bool straight = true;
    for (double dt = -1; dt <= 2; ++dt) {
      const Frame b = PoseAtTime(p.town.route, d.passes, d.plan, f.time_s + dt);
      straight =
          straight &&
          std::abs(std::remainder(a.attitude.heading_deg - b.attitude.heading_deg, 360.0)) < 0.01 &&
          std::abs(cv::norm(b.position - a.position) - (dt + 2) * d.plan.speed_mps) < 0.05;
    }
    if (!straight) continue;
    ++checked;
    const double t = a.attitude.heading_deg * M_PI / 180;
    const cv::Vec3d step = g.position - f.position;
    const double along = step[0] * std::sin(t) + step[1] * std::cos(t);
    const double across = -step[0] * std::cos(t) + step[1] * std::sin(t);
    worst_along = std::max(worst_along, std::abs(along - step_m));
    EXPECT_NEAR(along, step_m, 1e-4) << d.condition.name << " " << k;
    EXPECT_LE(std::abs(across),
              d.plan.speed_mps * offset * d.passes[0].wander_m * 2 * M_PI / 80 + 1e-6)
        << d.condition.name << " " << k;
    EXPECT_EQ(step[2], 0);
  }
  EXPECT_GT(checked, static_cast<int>(d.truth.size() / 4)) << d.condition.name;
  std::printf(
      "seed %llu %-15s offset %4.1f ms, speed x offset %.3f m, %d of %zu frames on "
      "straights, worst along-track deviation %.1e m\n",
      static_cast<unsigned long long>(seed), d.condition.name.c_str(), 1e3 * offset, step_m,
      checked, d.truth.size(), worst_along);
}

TEST(WorldNuisancesTest, TimeOffsetMovesExposuresAlongTheTrack) {
  for (uint64_t seed : {41, 43}) {
    const PlannedTown p = Plan(seed);
    for (const PlannedDrive& d : p.drives) CheckTimeOffset(p, d, seed);
  }
}

// In a corner each exposure is also turned by the path's yaw rate times the offset (0.2-0.8 deg
// at the towns' 9-10 deg per 2 m): the image is taken from a camera that has turned on, as a real
// one has. Reference rate: the planned headings 0.5 s either side of the frame (a wider span than
// the renderer's 0.25 s, so the check is not the code's own arithmetic). Frames turning 5-45
// deg/s (a corner, not a turn-round between passes) never turn against the rate; those inside the
// corner (turning in the half second before and after) turn on average by rate x offset within
// 20 % (the polyline's headings step at its vertices: measured 0.88-1.01 on seeds 41 and 43).
TEST(WorldNuisancesTest, TimeOffsetTurnsExposuresInCorners) {
  for (uint64_t seed : {41, 43}) {
    const PlannedTown p = Plan(seed);
    for (const PlannedDrive& d : p.drives) {
      const double offset = d.calibration_error.time_offset_s;
      if (offset == 0) continue;
      double sum_ratio = 0, worst_deg = 0;
      int corners = 0;
      for (size_t k = 0; k < d.truth.size(); ++k) {
        const Frame &f = d.truth[k], &g = d.exposure[k];
        const Frame a = PoseAtTime(p.town.route, d.passes, d.plan, f.time_s - 0.5);
        const Frame b = PoseAtTime(p.town.route, d.passes, d.plan, f.time_s + 0.5);
        const double rate = std::remainder(b.attitude.heading_deg - a.attitude.heading_deg, 360.0);
        if (std::abs(rate) < 5 || std::abs(rate) > 45) continue;
        const double turn = std::remainder(g.attitude.heading_deg - f.attitude.heading_deg, 360.0);
        EXPECT_GT(turn * rate, -1e-9) << d.condition.name << " frame " << k;
        // Inside the corner: turning over the half second before the frame and the one after.
        const double in = std::remainder(f.attitude.heading_deg - a.attitude.heading_deg, 360.0);
        const double out = std::remainder(b.attitude.heading_deg - f.attitude.heading_deg, 360.0);
        if (in * rate <= 0 || out * rate <= 0) continue;
        ++corners;
        sum_ratio += turn / (rate * offset);
        worst_deg = std::max(worst_deg, std::abs(turn - rate * offset));
      }
      if (corners == 0) continue;
      const double mean_ratio = sum_ratio / corners;
      std::printf(
          "seed %llu %-15s %d corner frames, turn / (rate x offset) %.3f on average, "
          "worst difference %.3f deg\n",
          static_cast<unsigned long long>(seed), d.condition.name.c_str(), corners, mean_ratio,
          worst_deg);
      EXPECT_NEAR(mean_ratio, 1.0, 0.2) << d.condition.name;
    }
  }
}

// --nuisances: each group alone switches on exactly its own part of the realistic world, and
// the plans follow (a survey-only world's query cameras are exact, a calibration-only world's
// survey is the clean one's); names are checked.
TEST(WorldNuisancesTest, NuisanceGroupsSwitchAlone) {
  const std::vector<std::string> all = NuisanceGroupNames();
  ASSERT_EQ(all, (std::vector<std::string>{"survey", "calibration", "changes", "traffic",
                                           "aliasing", "camera", "light"}));
  EXPECT_EQ(EnabledNuisanceGroups(NuisancesForWorld(World::kRealistic)), all);
  EXPECT_TRUE(EnabledNuisanceGroups(NuisancesForWorld(World::kClean)).empty());
  for (const std::string& group : all) {
    WorldNuisances n = NuisancesForWorld(World::kRealistic);
    ASSERT_TRUE(KeepNuisanceGroups({group}, &n).ok()) << group;
    EXPECT_EQ(EnabledNuisanceGroups(n), std::vector<std::string>{group});
  }
  WorldNuisances n = NuisancesForWorld(World::kRealistic);
  EXPECT_TRUE(KeepNuisanceGroups({}, &n).ok());
  EXPECT_EQ(EnabledNuisanceGroups(n), all);
  EXPECT_FALSE(KeepNuisanceGroups({"fog"}, &n).ok());
  EXPECT_FALSE(KeepNuisanceGroups({"traffic", "traffic"}, &n).ok());
  WorldNuisances clean = NuisancesForWorld(World::kClean);
  EXPECT_FALSE(KeepNuisanceGroups({"survey"}, &clean).ok());

  DemoOptions o;
  o.out_dir = "unused";
  o.route_length_m = 200;
  o.world = World::kRealistic;
  o.nuisances = {"survey"};
  const Town town = BuildTown(TownOptionsFor(o));
  EXPECT_TRUE(town.look_alikes.empty());
  std::vector<PlannedDrive> drives = PlanDrives(town, o);
  ASSERT_GE(drives.size(), 2u);
  EXPECT_TRUE(drives[0].survey_error_model);
  for (const PlannedDrive& d : drives) {
    EXPECT_FALSE(d.calibration_error_model) << d.condition.name;
    EXPECT_FALSE(d.world.has_traffic) << d.condition.name;
  }
  o.nuisances = {"calibration"};
  drives = PlanDrives(BuildTown(TownOptionsFor(o)), o);
  EXPECT_FALSE(drives[0].survey_error_model);
  for (const PlannedDrive& d : drives) EXPECT_TRUE(d.calibration_error_model) << d.condition.name;
}

}  // namespace
}  // namespace sightfix::demo
