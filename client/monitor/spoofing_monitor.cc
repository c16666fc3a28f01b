#include "client/monitor/spoofing_monitor.h"

#include <algorithm>
#include <cmath>

#include "indexer/base/geo.h"

namespace sightfix {

bool SpoofingMonitorOptions::Validate(std::string* error) const {
  auto fail = [&](const char* what) {
    if (error) *error = what;
    return false;
  };
  if (!(reference_nis > 0)) return fail("reference_nis must be > 0");
  if (!(max_excess > 0)) return fail("max_excess must be > 0");
  if (!(threshold > 0)) return fail("threshold must be > 0");
  if (!(max_step_s > 0)) return fail("max_step_s must be > 0");
  return true;
}

double NormalizedInnovationSquared(const cv::Vec2d& d, const cv::Matx22d& s) {
  const double det = s(0, 0) * s(1, 1) - s(0, 1) * s(1, 0);
  // Inverse of a 2x2 written out: the adjugate over the determinant.
  return (d[0] * d[0] * s(1, 1) - d[0] * d[1] * (s(0, 1) + s(1, 0)) + d[1] * d[1] * s(0, 0)) / det;
}

SpoofingMonitor::SpoofingMonitor(const SpoofingMonitorOptions& options) : options_(options) {}

MonitorStep SpoofingMonitor::Observe(const GnssObservation& gnss, const VisualObservation& v) {
  const GeodesicInverse g = GeodesicBetween(v.lat_deg, v.lon_deg, gnss.lat_deg, gnss.lon_deg);
  const double az = g.azimuth1_deg * M_PI / 180;
  const cv::Vec2d d(g.distance_m * std::sin(az), g.distance_m * std::cos(az));
  const double var = gnss.sigma_h_m * gnss.sigma_h_m;
  const cv::Matx22d s = v.covariance_en + cv::Matx22d(var, 0, 0, var);
  MonitorStep step;
  step.time_s = gnss.time_s;
  step.difference_m = g.distance_m;
  step.nis = NormalizedInnovationSquared(d, s);
  const double w = started_ ? std::clamp(gnss.time_s - last_time_s_, 0.0, options_.max_step_s)
                            : options_.max_step_s;
  const double capped = std::min(step.nis, options_.reference_nis + options_.max_excess);
  g_ = std::max(0.0, g_ + w * (capped - options_.reference_nis));
  started_ = true;
  last_time_s_ = gnss.time_s;
  if (!alarm_ && g_ > options_.threshold) alarm_ = step.alarm_raised = true;
  if (alarm_ && g_ == 0) alarm_ = false;
  step.cusum = g_;
  step.alarm = alarm_;
  return step;
}

SpoofingScore ScoreAlarms(const std::vector<MonitorStep>& steps, std::vector<TimeSpan> segments,
                          const TimeSpan& observed, double grace_s) {
  std::sort(segments.begin(), segments.end(),
            [](const TimeSpan& a, const TimeSpan& b) { return a.start_s < b.start_s; });
  SpoofingScore score;
  score.segments_true = static_cast<int>(segments.size());
  auto owner = [&](double t) -> int {  // the segment an alarm at t belongs to, or -1
    for (size_t i = 0; i < segments.size(); ++i)
      if (t >= segments[i].start_s && t < segments[i].end_s + grace_s) return static_cast<int>(i);
    return -1;
  };
  std::vector<double> first_alarm(segments.size(), -1);
  bool on = false;  // alarm state before the current step
  size_t seg_seen = 0;
  for (const MonitorStep& s : steps) {
    // A segment starting while the alarm is already on counts as flagged at once.
    for (; seg_seen < segments.size() && segments[seg_seen].start_s <= s.time_s; ++seg_seen)
      if (on && first_alarm[seg_seen] < 0) first_alarm[seg_seen] = segments[seg_seen].start_s;
    if (s.alarm_raised) {
      const int i = owner(s.time_s);
      if (i < 0)
        ++score.false_alarms;
      else if (first_alarm[i] < 0)
        first_alarm[i] = s.time_s;
    }
    on = s.alarm;
  }
  double spoiled_s = 0;
  for (size_t i = 0; i < segments.size(); ++i) {
    const double a = std::max(segments[i].start_s, observed.start_s);
    const double b = std::min(segments[i].end_s + grace_s, observed.end_s);
    spoiled_s += std::max(0.0, b - a);
    score.segment_delay_s.push_back(first_alarm[i] < 0 ? -1 : first_alarm[i] - segments[i].start_s);
    if (first_alarm[i] < 0) continue;
    ++score.segments_flagged;
    score.detection_delays_s.push_back(first_alarm[i] - segments[i].start_s);
  }
  score.clean_hours = std::max(0.0, observed.end_s - observed.start_s - spoiled_s) / 3600.0;
  return score;
}

}  // namespace sightfix
