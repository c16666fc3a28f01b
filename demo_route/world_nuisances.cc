#include "demo_route/world_nuisances.h"

#include <algorithm>
#include <cmath>

namespace sightfix::demo {
namespace {

// InvalidArgument "<field> = [lo, hi]: ..." unless 0 <= lo <= hi, both finite, and lo > 0 when
// positive is set.
Status CheckRange(const char* field, const Range& r, bool positive = false) {
  const bool ok = std::isfinite(r.lo) && std::isfinite(r.hi) && r.lo <= r.hi &&
                  (positive ? r.lo > 0 : r.lo >= 0);
  if (ok) return Status::Ok();
  return Status::InvalidArgument(std::string("WorldNuisances.") + field + " = [" +
                                 std::to_string(r.lo) + ", " + std::to_string(r.hi) +
                                 "]: must be finite with " + (positive ? "0 < lo" : "0 <= lo") +
                                 " <= hi");
}

Status CheckSurvey(const SurveyErrorRanges& s) {
  for (const Status& st :
       {CheckRange("survey.sigma_horizontal_m", s.sigma_horizontal_m),
        CheckRange("survey.sigma_vertical_m", s.sigma_vertical_m),
        CheckRange("survey.tau_s", s.tau_s, true),
        CheckRange("survey.heading_sigma_deg", s.heading_sigma_deg),
        CheckRange("survey.pitch_roll_sigma_deg", s.pitch_roll_sigma_deg),
        CheckRange("survey.attitude_tau_s", s.attitude_tau_s, true),
        CheckRange("survey.offset_m", s.offset_m), CheckRange("survey.hold_s", s.hold_s, true),
        CheckRange("survey.jumps", s.jumps)})
    if (!st.ok()) return st;
  if (!(s.min_aspect_ratio > 0 && std::isfinite(s.min_aspect_ratio)))
    return Status::InvalidArgument("WorldNuisances.survey.min_aspect_ratio must be > 0");
  return Status::Ok();
}

Status CheckCalibration(const CalibrationErrorRanges& c) {
  for (const Status& st :
       {CheckRange("calibration.focal_error_fraction", c.focal_error_fraction),
        CheckRange("calibration.principal_point_error_px", c.principal_point_error_px),
        CheckRange("calibration.k1_error", c.k1_error),
        CheckRange("calibration.k2_error", c.k2_error),
        CheckRange("calibration.time_offset_s", c.time_offset_s)})
    if (!st.ok()) return st;
  if (c.focal_error_fraction.hi >= 0.5)
    return Status::InvalidArgument("WorldNuisances.calibration.focal_error_fraction must be < 0.5");
  return Status::Ok();
}

Status CheckTraffic(const TrafficRanges& t) {
  for (const Status& st : {CheckRange("traffic.motor_speed_mps", t.motor_speed_mps, true),
                           CheckRange("traffic.cycle_speed_mps", t.cycle_speed_mps, true),
                           CheckRange("traffic.walk_speed_mps", t.walk_speed_mps, true),
                           CheckRange("traffic.motor_gap_m", t.motor_gap_m, true),
                           CheckRange("traffic.cycle_gap_m", t.cycle_gap_m, true),
                           CheckRange("traffic.walk_gap_m", t.walk_gap_m, true)})
    if (!st.ok()) return st;
  if (!(t.survey_density_scale > 0 && t.survey_density_scale <= 1))
    return Status::InvalidArgument("WorldNuisances.traffic.survey_density_scale must be in (0, 1]");
  return Status::Ok();
}

Status CheckCamera(const CameraNuisanceRanges& c) {
  for (const Status& st :
       {CheckRange("camera.sunlit.exposure_ms", c.sunlit.exposure_ms),
        CheckRange("camera.sunlit.full_scale_electrons", c.sunlit.full_scale_electrons, true),
        CheckRange("camera.overcast.exposure_ms", c.overcast.exposure_ms),
        CheckRange("camera.overcast.full_scale_electrons", c.overcast.full_scale_electrons, true),
        CheckRange("camera.dusk.exposure_ms", c.dusk.exposure_ms),
        CheckRange("camera.dusk.full_scale_electrons", c.dusk.full_scale_electrons, true),
        CheckRange("camera.read_noise_electrons", c.read_noise_electrons),
        CheckRange("camera.readout_ms", c.readout_ms),
        CheckRange("camera.exposure_steps_per_min", c.exposure_steps_per_min),
        CheckRange("camera.vignetting_strength", c.vignetting_strength),
        CheckRange("camera.survey_jpeg_quality", c.survey_jpeg_quality, true),
        CheckRange("camera.query_jpeg_quality", c.query_jpeg_quality, true),
        CheckRange("camera.mount_height_offset_m", c.mount_height_offset_m),
        CheckRange("camera.mount_pitch_deg", c.mount_pitch_deg)})
    if (!st.ok()) return st;
  if (!(c.global_shutter_share >= 0 && c.global_shutter_share <= 1))
    return Status::InvalidArgument("WorldNuisances.camera.global_shutter_share must be in [0, 1]");
  if (!(c.exposure_step_ev > 0 && c.max_exposure_offset_ev >= c.exposure_step_ev &&
        std::isfinite(c.max_exposure_offset_ev)))
    return Status::InvalidArgument(
        "WorldNuisances.camera.exposure_step_ev must be > 0 and <= max_exposure_offset_ev");
  if (c.vignetting_strength.hi > 1)
    return Status::InvalidArgument("WorldNuisances.camera.vignetting_strength must be <= 1");
  if (c.survey_jpeg_quality.hi > 100 || c.query_jpeg_quality.hi > 100)
    return Status::InvalidArgument("WorldNuisances.camera.*_jpeg_quality must be within [1, 100]");
  if (c.mount_pitch_deg.hi >= 30)
    return Status::InvalidArgument("WorldNuisances.camera.mount_pitch_deg must be < 30");
  return Status::Ok();
}

Status CheckLight(const LightRanges& l) {
  auto fail = [](const char* m) {
    return Status::InvalidArgument(std::string("WorldNuisances.light.") + m);
  };
  if (!(l.shadow_texel_m >= 0.01 && l.shadow_texel_m <= 2))
    return fail("shadow_texel_m must be in [0.01, 2]");
  if (!(l.shadow_range_m >= 10 && l.shadow_range_m <= 1000))
    return fail("shadow_range_m must be in [10, 1000]");
  if (!(l.night_offset_s >= 0 && l.night_offset_s <= 30 * 86400))
    return fail("night_offset_s must be in [0, 30 days]");
  if (!(l.dusk_offset_s >= 0 && l.dusk_offset_s <= 30 * 86400))
    return fail("dusk_offset_s must be in [0, 30 days]");
  if (!(l.night_sky_light >= 0 && l.night_sky_light <= 1))
    return fail("night_sky_light must be in [0, 1]");
  if (!(l.lit_window_share >= 0 && l.lit_window_share <= 1))
    return fail("lit_window_share must be in [0, 1]");
  if (!(l.lamp_intensity >= 0 && l.lamp_intensity < 1e4))
    return fail("lamp_intensity must be in [0, 1e4)");
  if (!(l.headlight_intensity >= 0 && l.headlight_intensity < 1e4))
    return fail("headlight_intensity must be in [0, 1e4)");
  return Status::Ok();
}

}  // namespace

const char* WorldName(World world) { return world == World::kClean ? "clean" : "realistic"; }

Result<World> ParseWorld(const std::string& name) {
  for (World w : {World::kClean, World::kRealistic})
    if (name == WorldName(w)) return w;
  return Status::InvalidArgument("world must be clean or realistic, got '" + name + "'");
}

Status WorldNuisances::Validate() const {
  if (!(survey_sigma_scale > 0 && std::isfinite(survey_sigma_scale)))
    return Status::InvalidArgument("WorldNuisances.survey_sigma_scale = " +
                                   std::to_string(survey_sigma_scale) + ": must be > 0 and finite");
  if (Status s = CheckSurvey(survey); !s.ok()) return s;
  if (Status s = CheckTraffic(traffic); !s.ok()) return s;
  if (Status s = CheckLight(light); !s.ok()) return s;
  if (Status s = CheckRange("changes.vehicle_moved_m", changes.vehicle_moved_m); !s.ok()) return s;
  if (Status s = CheckRange("changes.works_per_100m", changes.works_per_100m); !s.ok()) return s;
  if (Status s = CheckCamera(camera); !s.ok()) return s;
  return CheckCalibration(calibration);
}

WorldNuisances NuisancesForWorld(World world) {
  WorldNuisances n;
  n.world = world;
  n.survey.enabled = n.calibration.enabled = world == World::kRealistic;
  n.changes.enabled = n.traffic.enabled = world == World::kRealistic;
  n.camera.enabled = world == World::kRealistic;
  n.aliasing = world == World::kRealistic;
  n.light.enabled = world == World::kRealistic;
  return n;
}

namespace {

// The switch of each group, in NuisanceGroupNames order.
std::vector<std::pair<std::string, bool*>> GroupSwitches(WorldNuisances* n) {
  return {{"survey", &n->survey.enabled},   {"calibration", &n->calibration.enabled},
          {"changes", &n->changes.enabled}, {"traffic", &n->traffic.enabled},
          {"aliasing", &n->aliasing},       {"camera", &n->camera.enabled},
          {"light", &n->light.enabled}};
}

}  // namespace

std::vector<std::string> NuisanceGroupNames() {
  WorldNuisances n;
  std::vector<std::string> names;
  for (const auto& [name, on] : GroupSwitches(&n)) names.push_back(name);
  return names;
}

std::vector<std::string> EnabledNuisanceGroups(const WorldNuisances& n) {
  WorldNuisances copy = n;
  std::vector<std::string> names;
  for (const auto& [name, on] : GroupSwitches(&copy))
    if (*on) names.push_back(name);
  return names;
}

Status KeepNuisanceGroups(const std::vector<std::string>& names, WorldNuisances* n) {
  if (names.empty()) return Status::Ok();
  if (n->world != World::kRealistic)
    return Status::InvalidArgument("nuisance groups apply to the realistic world only");
  std::string choices;
  for (const std::string& g : NuisanceGroupNames()) choices += (choices.empty() ? "" : ", ") + g;
  for (size_t i = 0; i < names.size(); ++i) {
    const std::vector<std::string> all = NuisanceGroupNames();
    if (std::find(all.begin(), all.end(), names[i]) == all.end())
      return Status::InvalidArgument("unknown nuisance group '" + names[i] + "' (choose from " +
                                     choices + ")");
    if (std::find(names.begin(), names.begin() + i, names[i]) != names.begin() + i)
      return Status::InvalidArgument("nuisance group '" + names[i] + "' named twice");
  }
  for (auto& [name, on] : GroupSwitches(n))
    *on = std::find(names.begin(), names.end(), name) != names.end();
  return Status::Ok();
}

}  // namespace sightfix::demo
