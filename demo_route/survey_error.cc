#include "demo_route/survey_error.h"

#include <algorithm>
#include <cmath>

#include "demo_route/gauss_markov.h"

namespace sightfix::demo {
namespace {

double Draw(const Range& r, Rng& rng) { return rng.Uniform(r.lo, r.hi); }

// The Gauss-Markov process of one draw: position (east, north, up) or attitude (pitch, roll,
// heading: the process's "horizontal" sigma serves pitch and roll, its "vertical" one heading).
GaussMarkovError Process(const SurveyErrorDraw& d, bool attitude) {
  GaussMarkovOptions o;
  o.sigma_horizontal_m = attitude ? d.pitch_roll_sigma_deg : d.sigma_horizontal_m;
  o.sigma_vertical_m = attitude ? d.heading_sigma_deg : d.sigma_vertical_m;
  o.tau_s = attitude ? d.attitude_tau_s : d.tau_s;
  o.dt_s = kSurveyErrorStepS;
  o.seed = HashSeed(d.seed, attitude ? 2 : 1);
  Result<GaussMarkovError> p = GaussMarkovError::Create(o);
  return std::move(*p);  // the ranges were validated: sigmas >= 0, tau > 0
}

bool Overlaps(const std::vector<MultipathJump>& jumps, double start, double hold) {
  for (const MultipathJump& j : jumps)
    if (start < j.start_s + j.hold_s + 1 && j.start_s < start + hold + 1) return true;
  return false;
}

// The jump held at t where the canyon lasts, or null.
const MultipathJump* HeldJump(const std::vector<MultipathJump>& jumps, const CanyonTest& in_canyon,
                              double t) {
  for (const MultipathJump& j : jumps)
    if (t >= j.start_s && t < j.start_s + j.hold_s) return in_canyon(t) ? &j : nullptr;
  return nullptr;
}

}  // namespace

SurveyErrorDraw DrawSurveyError(const SurveyErrorRanges& r, Rng& rng) {
  SurveyErrorDraw d;
  d.sigma_horizontal_m = Draw(r.sigma_horizontal_m, rng);
  d.sigma_vertical_m = Draw(r.sigma_vertical_m, rng);
  d.tau_s = Draw(r.tau_s, rng);
  d.heading_sigma_deg = Draw(r.heading_sigma_deg, rng);
  d.pitch_roll_sigma_deg = Draw(r.pitch_roll_sigma_deg, rng);
  d.attitude_tau_s = Draw(r.attitude_tau_s, rng);
  d.seed = rng.Next();
  return d;
}

std::vector<MultipathJump> PlanMultipathJumps(const SurveyErrorRanges& r, double duration_s,
                                              const CanyonTest& in_canyon, Rng& rng) {
  std::vector<double> starts;
  for (double t = 0; t <= duration_s; t += 1)
    if (in_canyon(t)) starts.push_back(t);
  const int count =
      rng.Int(static_cast<int>(std::lround(r.jumps.lo)), static_cast<int>(std::lround(r.jumps.hi)));
  std::vector<MultipathJump> jumps;
  for (int attempt = 0;
       attempt < 20 * count && !starts.empty() && static_cast<int>(jumps.size()) < count;
       ++attempt) {
    MultipathJump j;
    j.start_s = starts[rng.Int(0, static_cast<int>(starts.size()) - 1)];
    j.hold_s = Draw(r.hold_s, rng);
    const double magnitude = Draw(r.offset_m, rng), bearing = rng.Uniform(0, 2 * M_PI);
    j.offset_m = magnitude * cv::Vec2d(std::sin(bearing), std::cos(bearing));
    if (!Overlaps(jumps, j.start_s, j.hold_s)) jumps.push_back(j);
  }
  std::sort(jumps.begin(), jumps.end(),
            [](const MultipathJump& a, const MultipathJump& b) { return a.start_s < b.start_s; });
  return jumps;
}

std::vector<SurveyError> SimulateSurveyError(const SurveyErrorDraw& draw,
                                             const std::vector<MultipathJump>& jumps,
                                             const CanyonTest& in_canyon,
                                             const std::vector<double>& times_s) {
  GaussMarkovError position = Process(draw, false), attitude = Process(draw, true);
  cv::Vec3d p = position.Next(), a = attitude.Next();  // grid sample 0
  long step = 0;
  std::vector<SurveyError> out;
  out.reserve(times_s.size());
  for (double t : times_s) {
    for (const long k = std::lround(t / kSurveyErrorStepS); step < k; ++step)
      p = position.Next(), a = attitude.Next();
    SurveyError e;
    e.position_m = p;
    e.pitch_deg = a[0], e.roll_deg = a[1], e.heading_deg = a[2];
    e.sigma_h_m = draw.sigma_horizontal_m;
    if (const MultipathJump* j = HeldJump(jumps, in_canyon, t)) {
      e.position_m += cv::Vec3d(j->offset_m[0], j->offset_m[1], 0);
      e.sigma_h_m = std::sqrt(e.sigma_h_m * e.sigma_h_m + j->offset_m.dot(j->offset_m) / 2);
      e.multipath = true;
    }
    out.push_back(e);
  }
  return out;
}

}  // namespace sightfix::demo
