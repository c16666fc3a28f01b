// The GNSS spoofing monitor (client/monitor/spoofing_monitor.h): the NIS and the CUSUM rule against
// hand computations, alarm scoring, and the detection study over seeded synthetic drives.
#include "client/monitor/spoofing_monitor.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <random>
#include <vector>

#include "indexer/base/geo.h"

namespace sightfix {
namespace {

constexpr double kLat = 44.0, kLon = -40.0;  // an invented place in open water

// A GNSS fix displaced (east, north) metres from the visual fix at (kLat, kLon).
GnssObservation GnssAt(double t, double east, double north, double sigma) {
  const double d = std::hypot(east, north), az = std::atan2(east, north) * 180 / M_PI;
  const GeodesicDirect p = GeodesicFrom(kLat, kLon, az, d);
  return {t, p.lat_deg, p.lon_deg, sigma};
}

VisualObservation VisualAt(double t, const cv::Matx22d& cov = cv::Matx22d::zeros()) {
  return {t, kLat, kLon, cov};
}

TEST(SpoofingMonitorTest, NisMatchesHandComputation) {
  // d = (3, 4), S = diag(3, 4): 9/3 + 16/4 = 7 (hand computation).
  EXPECT_NEAR(NormalizedInnovationSquared({3, 4}, cv::Matx22d(3, 0, 0, 4)), 7.0, 1e-12);
  // d = (1, 1), S = [[2, 1], [1, 2]]: S^-1 = [[2, -1], [-1, 2]] / 3, so (2 - 2 + 2) / 3 = 2/3.
  EXPECT_NEAR(NormalizedInnovationSquared({1, 1}, cv::Matx22d(2, 1, 1, 2)), 2.0 / 3, 1e-12);
  // Through the monitor: GNSS sigma 1.5 m per axis (2.25 m^2) plus the visual covariance
  // diag(0.75, 1.75) gives S = diag(3, 4); a 3 m east, 4 m north difference again gives 7.
  SpoofingMonitor m;
  const MonitorStep s = m.Observe(GnssAt(0, 3, 4, 1.5), VisualAt(0, cv::Matx22d(0.75, 0, 0, 1.75)));
  EXPECT_NEAR(s.nis, 7.0, 1e-6);
  EXPECT_NEAR(s.difference_m, 5.0, 1e-6);
}

TEST(SpoofingMonitorTest, CusumFollowsTheWrittenRule) {
  // Defaults: k = 13.816, excess cap 10, threshold 20, step cap 1 s. With sigma 1 m and an
  // exact visual fix, NIS = d^2, so d = sqrt(NIS). Hand computation, step by step:
  //  t=0   (w 1, first)   NIS 20  -> g = 20 - 13.816                 =  6.184
  //  t=1   (w 1)          NIS 40  -> capped 23.816, g = 6.184 + 10   = 16.184
  //  t=1.5 (w 0.5)        NIS 30  -> capped, g = 16.184 + 5          = 21.184 > 20: alarm raised
  //  t=3.5 (w 2 -> 1)     NIS 0.816 -> g = 21.184 - 13              =  8.184, alarm stays on
  //  t=4.5 (w 1)          NIS 0   -> g = max(0, 8.184 - 13.816)     =  0, alarm cleared
  SpoofingMonitor m;
  const double times[] = {0, 1, 1.5, 3.5, 4.5}, nis[] = {20, 40, 30, 0.816, 0};
  const double g[] = {6.184, 16.184, 21.184, 8.184, 0};
  const bool alarm[] = {false, false, true, true, false};
  for (int i = 0; i < 5; ++i) {
    const MonitorStep s =
        m.Observe(GnssAt(times[i], std::sqrt(nis[i]), 0, 1.0), VisualAt(times[i]));
    EXPECT_NEAR(s.nis, nis[i], 1e-6) << i;
    EXPECT_NEAR(s.cusum, g[i], 1e-6) << i;
    EXPECT_EQ(s.alarm, alarm[i]) << i;
    EXPECT_EQ(s.alarm_raised, i == 2) << i;
  }
}

TEST(SpoofingMonitorTest, OneWrongVisualFixCannotAlarmAlone) {
  SpoofingMonitor m;
  for (int i = 0; i < 100; ++i) {
    const double d = i == 50 ? 500.0 : 0.5;  // one visual fix 500 m off, the rest honest
    EXPECT_FALSE(m.Observe(GnssAt(i * 0.5, d, 0, 1.5), VisualAt(i * 0.5)).alarm) << i;
  }
}

TEST(SpoofingMonitorTest, ScoreAlarmsCountsSegmentsDelaysAndFalseAlarms) {
  // Alarms raised at 12 s (in segment [10, 40)), 44 s (inside the 5 s grace of the same: not a
  // second detection, not false), 100 s (no segment: false); the alarm is still on when the
  // segment [200, 230) starts (flagged at delay 0); segment [300, 330) never flagged.
  std::vector<MonitorStep> steps;
  auto step = [&](double t, bool raised, bool on) {
    MonitorStep s;
    s.time_s = t, s.alarm_raised = raised, s.alarm = on;
    steps.push_back(s);
  };
  step(5, false, false), step(12, true, true), step(30, false, false), step(44, true, true);
  step(50, false, false), step(100, true, true), step(110, false, false), step(190, true, true);
  step(210, false, true), step(260, false, false), step(310, false, false);
  const SpoofingScore s = ScoreAlarms(steps, {{300, 330}, {10, 40}, {200, 230}}, {0, 3600}, 5.0);
  EXPECT_EQ(s.segments_true, 3);
  EXPECT_EQ(s.segments_flagged, 2);
  ASSERT_EQ(s.detection_delays_s.size(), 2u);
  EXPECT_DOUBLE_EQ(s.detection_delays_s[0], 2.0);
  EXPECT_DOUBLE_EQ(s.detection_delays_s[1], 0.0);
  EXPECT_EQ(s.false_alarms, 2);             // at 100 s and at 190 s
  ASSERT_EQ(s.segment_delay_s.size(), 3u);  // in start order: [10, 40), [200, 230), [300, 330)
  EXPECT_DOUBLE_EQ(s.segment_delay_s[0], 2.0);
  EXPECT_DOUBLE_EQ(s.segment_delay_s[1], 0.0);
  EXPECT_DOUBLE_EQ(s.segment_delay_s[2], -1.0);
  EXPECT_NEAR(s.clean_hours, (3600 - 3 * 35) / 3600.0, 1e-12);
}

// ---- The detection study over synthetic drives ----
//
// Model of a drive (each parameter drawn per seed, so the monitor meets a spread of receivers
// and of visual availability):
//  - GNSS error: first-order Gauss-Markov per horizontal axis, correlation time tau 10-60 s,
//    true sigma 0.7-1.0 times the claimed 1.5 m (receivers state their accuracy somewhat
//    conservatively; from memory, typical of automotive single-frequency receivers);
//  - visual fixes at 1-2 Hz, 50-100 % of them available, each with its reported covariance
//    (sigma 3-10 cm per axis, the engine's refined fixes on the demo town) and an error drawn
//    from it; 0.5 % of them wrong by 5-50 m while reporting the same small covariance;
//  - a spoofed segment: from its start, the reported position is dragged along a random bearing
//    at a constant rate drawn log-uniformly from 0.3 to 5 m/s.
struct DriveModel {
  double tau_s, truth_over_claimed, claimed_sigma = 1.5, visual_hz, availability, visual_sigma;
};

DriveModel DrawModel(std::mt19937_64& rng) {
  std::uniform_real_distribution<double> u(0, 1);
  DriveModel m;
  m.tau_s = 10 + 50 * u(rng);
  m.truth_over_claimed = 0.7 + 0.3 * u(rng);
  m.visual_hz = 1 + u(rng);
  m.availability = 0.5 + 0.5 * u(rng);
  m.visual_sigma = 0.03 + 0.07 * u(rng);
  return m;
}

struct Spoof {
  double start_s = -1, rate_mps = 0, bearing_rad = 0;
};

// Runs the monitor over `duration_s` of one drive; returns its steps.
std::vector<MonitorStep> SimulateDrive(uint64_t seed, double duration_s, const Spoof& spoof) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> n01(0, 1);
  std::uniform_real_distribution<double> u(0, 1);
  const DriveModel m = DrawModel(rng);
  const double dt = 1 / m.visual_hz, phi = std::exp(-dt / m.tau_s), q = std::sqrt(1 - phi * phi);
  const double sg = m.truth_over_claimed * m.claimed_sigma;
  double ge = sg * n01(rng), gn = sg * n01(rng);  // stationary start
  const double vv = m.visual_sigma * m.visual_sigma;
  SpoofingMonitor monitor;
  std::vector<MonitorStep> steps;
  for (double t = 0; t < duration_s; t += dt) {
    ge = phi * ge + q * sg * n01(rng);
    gn = phi * gn + q * sg * n01(rng);
    if (u(rng) > m.availability) continue;  // no visual fix this time
    double ve = m.visual_sigma * n01(rng), vn = m.visual_sigma * n01(rng);
    if (u(rng) < 0.005) {  // a wrong visual fix
      const double d = 5 + 45 * u(rng), b = 2 * M_PI * u(rng);
      ve += d * std::sin(b), vn += d * std::cos(b);
    }
    double se = 0, sn = 0;
    if (spoof.start_s >= 0 && t >= spoof.start_s) {
      const double drag = spoof.rate_mps * (t - spoof.start_s);
      se = drag * std::sin(spoof.bearing_rad), sn = drag * std::cos(spoof.bearing_rad);
    }
    // Visual fix at (ve, vn) from the truth; GNSS at (ge + se, gn + sn): the difference is what
    // the monitor sees.
    steps.push_back(monitor.Observe(GnssAt(t, ge + se - ve, gn + sn - vn, m.claimed_sigma),
                                    VisualAt(t, cv::Matx22d(vv, 0, 0, vv))));
  }
  return steps;
}

TEST(SpoofingMonitorTest, ReferenceIsTheChiSquareTwoDofQuantile) {
  // NIST/SEMATECH e-Handbook of Statistical Methods, table 1.3.6.7.4: the chi-square upper
  // 0.001 point for 2 degrees of freedom is 13.816.
  const double reference = SpoofingMonitorOptions{}.reference_nis;
  EXPECT_NEAR(reference, 13.816, 5e-4);
  // Independently: chi-square with 2 dof is the exponential law of mean 2, P(X > x) = exp(-x/2),
  // so the upper 0.001 point is -2 ln(0.001) = 13.8155 (closed form; scipy.stats.chi2.ppf(0.999,
  // 2) gives the same where python3-scipy is installed).
  EXPECT_NEAR(reference, -2 * std::log(0.001), 5e-4);
  EXPECT_NEAR(std::exp(-reference / 2), 0.001, 1e-6);
}

struct StudyResult {
  int segments = 0, flagged = 0, within_30 = 0, false_alarms = 0;
  std::vector<double> delays_s;  // of the flagged segments
  double clean_hours = 0;
};

// Clean driving: 20 drives of one hour (seeds 1-20).
void RunCleanDrives(StudyResult* r) {
  for (uint64_t seed = 1; seed <= 20; ++seed) {
    const std::vector<MonitorStep> steps = SimulateDrive(seed, 3600, {});
    const SpoofingScore s = ScoreAlarms(steps, {}, {0, 3600});
    r->false_alarms += s.false_alarms, r->clean_hours += s.clean_hours;
  }
}

// Attacks: 40 drives of 10 minutes (seeds 101-140; segments drawn from seed 2026), each with
// one segment starting at 300-420 s and lasting to the end.
void RunAttackDrives(StudyResult* r) {
  std::mt19937_64 rng(2026);
  std::uniform_real_distribution<double> u(0, 1);
  for (uint64_t seed = 101; seed <= 140; ++seed) {
    Spoof spoof;
    spoof.start_s = 300 + 120 * u(rng);
    spoof.rate_mps = 0.3 * std::pow(5 / 0.3, u(rng));  // log-uniform 0.3-5 m/s
    spoof.bearing_rad = 2 * M_PI * u(rng);
    const std::vector<MonitorStep> steps = SimulateDrive(seed, 600, spoof);
    const SpoofingScore s = ScoreAlarms(steps, {{spoof.start_s, 600}}, {0, 600});
    ++r->segments;
    r->false_alarms += s.false_alarms, r->clean_hours += s.clean_hours;
    if (s.segments_flagged == 0) {
      std::printf("  segment at %.2f m/s not flagged\n", spoof.rate_mps);
      continue;
    }
    ASSERT_EQ(s.detection_delays_s.size(), 1u) << "seed " << seed;
    const double delay_s = s.detection_delays_s[0];
    ++r->flagged;
    r->delays_s.push_back(delay_s);
    r->within_30 += delay_s <= 30;
    if (delay_s > 30)
      std::printf("  segment at %.2f m/s flagged late: %.1f s\n", spoof.rate_mps, delay_s);
  }
}

TEST(SpoofingMonitorTest, DetectsSeededSpoofingWithinThirtySecondsAndRarelyFalseAlarms) {
  StudyResult r;
  RunCleanDrives(&r);
  ASSERT_NO_FATAL_FAILURE(RunAttackDrives(&r));
  ASSERT_EQ(r.segments, 40);
  ASSERT_FALSE(r.delays_s.empty()) << "no segment flagged";
  std::sort(r.delays_s.begin(), r.delays_s.end());
  const double median_s = r.delays_s[r.delays_s.size() / 2], max_s = r.delays_s.back();
  const double per_hour = r.false_alarms / r.clean_hours;
  std::printf(
      "spoofing study: %d segments, %d flagged, %d within 30 s; delay median %.1f s, "
      "max %.1f s; %d false alarms in %.1f clean hours (%.2f per hour)\n",
      r.segments, r.flagged, r.within_30, median_s, max_s, r.false_alarms, r.clean_hours, per_hour);
  // Goals (DEVELOPERS.md "GNSS spoofing monitor"): >= 95 % of attacks flagged within 30 s, at
  // most 1 false alarm per hour. Measured on these seeds (gcc 12, libstdc++): 40 of 40 flagged,
  // all 40 within 30 s, delay median 8.1 s, max 24.0 s; 2 false alarms in 24.1 clean hours
  // (0.08 per hour), as the README states. The bounds keep what was measured: every attack
  // flagged within 30 s, the median delay at most 12 s, at most 2 false alarms.
  EXPECT_EQ(r.flagged, 40);
  EXPECT_EQ(r.within_30, 40);
  EXPECT_LE(max_s, 30.0);
  EXPECT_LE(median_s, 12.0);
  EXPECT_GE(r.clean_hours, 24.0);  // 20 clean hours plus the attack drives' clean minutes
  EXPECT_LE(r.false_alarms, 2);
  EXPECT_LE(per_hour, 1.0);
}

}  // namespace
}  // namespace sightfix
