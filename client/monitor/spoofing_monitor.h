// GNSS spoofing monitor: checks a GNSS receiver's fixes against independent visual fixes.
//
// The test statistic for one pair of fixes taken at one time is the normalized innovation
// squared (Bar-Shalom, Li & Kirubarajan, "Estimation with Applications to Tracking and
// Navigation", 2001, ch. 5.4):
//     NIS = d^T (S_gnss + S_visual)^-1 d,
// d the horizontal difference GNSS - visual (east, north, metres), S_gnss = sigma_h^2 I from
// the receiver's claimed per-axis accuracy, S_visual the visual fix's reported 2x2 covariance.
// With both covariances honest and independent, NIS is chi-square with 2 degrees of freedom.
//
// GNSS errors are correlated in time (multipath, atmosphere: tens of seconds), so single
// exceedances, or counts of consecutive ones, alarm on ordinary slow wander. The decision is a
// one-sided CUSUM (Page, Biometrika 1954) over time:
//     g_k = max(0, g_{k-1} + w_k * (min(NIS_k, reference_nis + max_excess) - reference_nis)),
//     w_k = min(t_k - t_{k-1}, max_step_s)   (the first observation weighs max_step_s),
// alarm while g_k > threshold, raised when g crosses it and cleared when g is back at 0.
// The unit of g is NIS-seconds: what counts is excess evidence per second, not per fix, so the
// rule does not depend on how often visual fixes arrive. reference_nis is the chi-square
// 2-dof 0.999 quantile: honest GNSS crosses it 0.1 % of the time. The cap on the excess per
// second keeps one wrong visual fix from alarming alone: an alarm needs threshold / max_excess
// seconds (2 s by default) of strong evidence, or longer of weak. A visual fix far outside the
// GNSS-derived prior is strong evidence, not an error to drop.
// Parameters and their measured detection rate, delay and false alarms: DEVELOPERS.md
// "GNSS spoofing monitor".
//
// Thread safety: a SpoofingMonitor is not thread-safe; one per vehicle, fed in time order.
#pragma once

#include <opencv2/core.hpp>
#include <string>
#include <vector>

namespace sightfix {

struct SpoofingMonitorOptions {
  // CUSUM reference value k: chi-square 2 dof upper 0.001 quantile, 13.816 (NIST/SEMATECH
  // e-Handbook of Statistical Methods, table 1.3.6.7.4).
  double reference_nis = 13.816;
  // Most excess NIS one second of evidence adds; bounds the weight of one outlying fix.
  double max_excess = 10.0;
  // Alarm threshold h on the CUSUM, NIS-seconds.
  double threshold = 20.0;
  // An observation weighs the time since the previous one, at most this (seconds).
  double max_step_s = 1.0;
  bool Validate(std::string* error) const;
};

struct GnssObservation {
  double time_s = 0;
  double lat_deg = 0, lon_deg = 0;  // WGS84 as reported
  double sigma_h_m = 0;             // claimed 1-sigma per horizontal axis, metres
};

struct VisualObservation {
  double time_s = 0;
  double lat_deg = 0, lon_deg = 0;
  cv::Matx22d covariance_en = cv::Matx22d::zeros();  // east/north, m^2
};

struct MonitorStep {
  double time_s = 0;
  double nis = 0;
  double cusum = 0;           // g after this observation, NIS-seconds
  bool alarm = false;         // alarm state after this observation
  bool alarm_raised = false;  // this observation raised it
  double difference_m = 0;    // |d|, GNSS to visual
};

// d^T S^-1 d for a 2-vector d and a symmetric positive definite 2x2 S.
double NormalizedInnovationSquared(const cv::Vec2d& d, const cv::Matx22d& s);

class SpoofingMonitor {
 public:
  // REQUIRES: options.Validate() is true.
  explicit SpoofingMonitor(const SpoofingMonitorOptions& options = {});
  // One GNSS fix and one visual fix of (nearly) the same time; times must not go back.
  MonitorStep Observe(const GnssObservation& gnss, const VisualObservation& visual);
  bool alarm() const { return alarm_; }
  double cusum() const { return g_; }

 private:
  SpoofingMonitorOptions options_;
  double g_ = 0;
  double last_time_s_ = 0;
  bool started_ = false;
  bool alarm_ = false;
};

// A span of time [start_s, end_s) (Unix seconds or any one clock).
struct TimeSpan {
  double start_s = 0, end_s = 0;
};

// How a monitor's alarms compare with the true spoofed segments.
struct SpoofingScore {
  int segments_true = 0;
  int segments_flagged = 0;                // an alarm raised in [start, end + grace) or already on
  std::vector<double> detection_delays_s;  // per flagged segment: first alarm - start (>= 0)
  std::vector<double> segment_delay_s;     // per segment in start order: delay, or -1 missed
  int false_alarms = 0;                    // alarms raised outside every [start, end + grace)
  double clean_hours = 0;                  // observed time outside every [start, end + grace)
};

// steps: the monitor's output in time order; segments: the true spoofed spans (any order);
// observed: the span the monitor ran over. An alarm raised in [start, end + grace_s) flags that
// segment; an alarm already on when a segment starts flags it with delay 0.
SpoofingScore ScoreAlarms(const std::vector<MonitorStep>& steps, std::vector<TimeSpan> segments,
                          const TimeSpan& observed, double grace_s = 5.0);

}  // namespace sightfix
