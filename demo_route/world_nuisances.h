// World presets of the demo town: which nuisances of real data a generated town carries, and the
// ranges each drive draws its own nuisance parameters from (the draws are recorded in
// town.json). The clean world has none of them: it is the town the accuracy guards were measured
// on, byte for byte. The realistic world carries the errors and nuisances of real streets: the
// survey's pose error, calibration error, a changed world between drives, traffic, look-alike
// streets and an off-map drive, the camera's own nuisances, the sun's light with cast shadows
// and a night drive. It becomes the default once the accuracy guards are measured on it.
//
// Ranges marked `common practice` are typical figures of the trade for a vehicle survey with a
// GNSS-INS and a factory or field calibration, not measurements of any one system
// (DEVELOPERS.md, "Demo town: decisions", says where each comes from).
#pragma once

#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix::demo {

enum class World { kClean, kRealistic };

// "clean" or "realistic".
const char* WorldName(World world);
// The world named `name` (as WorldName spells it); InvalidArgument naming the choices otherwise.
Result<World> ParseWorld(const std::string& name);

// A closed interval [lo, hi] that a drive draws one value from, uniformly. lo = hi is a fixed
// value.
struct Range {
  double lo = 0, hi = 0;
};

// The survey's reported pose against the truth (survey_error.h has the model).
struct SurveyErrorRanges {
  // Off: the survey's drive.csv is the truth plus 2 cm white noise (the clean world's survey).
  bool enabled = false;
  // Stationary 1-sigma of the east and of the north position error, metres: 0.1-0.3 for an
  // RTK-less GNSS-INS in town (common practice).
  Range sigma_horizontal_m{0.1, 0.3};
  // Stationary 1-sigma of the up error, metres: 0.2-0.5, about twice the horizontal (GNSS
  // geometry, common practice).
  Range sigma_vertical_m{0.2, 0.5};
  // Correlation time of the position error, seconds: 30-120 (common practice).
  Range tau_s{30, 120};
  // Stationary 1-sigma of the heading error, degrees: 0.1-0.2 (a mid-grade INS in motion,
  // common practice), and of pitch and of roll, degrees: 0.02-0.05 (gravity keeps them small).
  Range heading_sigma_deg{0.1, 0.2};
  Range pitch_roll_sigma_deg{0.02, 0.05};
  // Correlation time of the attitude error, seconds.
  Range attitude_tau_s{30, 120};
  // Multipath jumps: where the street is a deep urban canyon (urban_canyon.h: lower facade over
  // facade-to-facade width >= min_aspect_ratio), an extra horizontal offset of offset_m metres in
  // a random direction, held for hold_s seconds (while the canyon lasts), jumps times a drive
  // (whole numbers; fewer where the drive has too little canyon).
  double min_aspect_ratio = 0.85;
  Range offset_m{0.5, 2.0};
  Range hold_s{2, 6};
  Range jumps{2, 4};
};

// The calibration written in camera.yml against the camera rendered with.
struct CalibrationErrorRanges {
  bool enabled = false;
  // |fx'/fx - 1| = |fy'/fy - 1|, the same factor for both, either sign: 0.3-1 % (common
  // practice for a field calibration).
  Range focal_error_fraction{0.003, 0.01};
  // Principal point offset, pixels, in a uniformly random direction: 2-4 (common practice).
  Range principal_point_error_px{2, 4};
  // |k1' - k1|, either sign; and |k2' - k2|, either sign, where the true lens has a k2 term
  // (non-zero k2). Dimensionless: at the corner of a 65-degree lens (normalised radius 0.8)
  // 0.02 in k1 moves a pixel by about 5 px (from the radial model, r^3 k1 f).
  Range k1_error{0.005, 0.02};
  Range k2_error{0.002, 0.01};
  // The image is exposed offset seconds after the time drive.csv gives it: 5-30 ms, a camera
  // triggered without hardware time sync (common practice).
  Range time_offset_s{0.005, 0.030};
};

// Moving traffic (traffic.h). Speeds and gaps are choices for a town street of a 50 km/h zone,
// with the sources named beside each.
struct TrafficRanges {
  bool enabled = false;
  // Each line's speed, m/s, one draw per line and drive: motor traffic 6-12 (22-43 km/h, town
  // traffic below a 50 km/h limit, common practice); cyclists 3.5-6 (13-22 km/h, from memory);
  // walkers 1.1-1.6 (from memory: a typical walking speed is about 1.3 m/s).
  Range motor_speed_mps{6, 12};
  Range cycle_speed_mps{3.5, 6};
  Range walk_speed_mps{1.1, 1.6};
  // Free road between one mover's back and the next one's front on a line, metres, each gap its
  // own draw: motor 3-30 (dense town traffic to light; chosen so that a query drive has frames
  // 10-40 % covered, measured in DEVELOPERS.md), cyclists 40-200, walkers 8-40.
  Range motor_gap_m{3, 30};
  Range cycle_gap_m{40, 200};
  Range walk_gap_m{8, 40};
  // Motor traffic's mix: a share of vans and of buses, the rest cars.
  double van_share = 0.25, bus_share = 0.12;
  // The survey's traffic is lighter (a survey is driven at quiet hours): gaps / this factor.
  double survey_density_scale = 0.3;
};

// The world that changes between the survey and each query drive (changed_world.h). The survey
// sees the town as laid out; each query drive draws its own changes. Shares are of the items the
// survey saw, each item drawn on its own.
struct ChangedWorldRanges {
  bool enabled = false;
  // Parked vehicles: gone, re-parked along the kerb by moved_m (either way), and new ones
  // parked in gaps (a share of the survey's count). Kerbside spaces of a town street turn over
  // within hours (common practice), so a drive hours or months later sees many changes.
  double vehicle_gone_share = 0.25, vehicle_moved_share = 0.25, vehicle_added_share = 0.2;
  Range vehicle_moved_m{1.5, 6.0};
  // Facades along the route: new posters pasted on the poster band, a new shop sign, or the
  // wall repainted (its dominant colour replaced).
  double poster_share = 0.15, shop_sign_share = 0.08, repaint_share = 0.06;
  // Works: sites per 100 m of route, each a fenced box or a barrier in the parking strip, or
  // scaffolding in front of a facade.
  Range works_per_100m{0.4, 1.0};
};

// What one light level asks of the camera (camera_nuisances.h, LightLevelOf picks the level).
struct CameraLightRanges {
  Range exposure_ms;           // exposure time, milliseconds
  Range full_scale_electrons;  // electrons a pixel holds at full scale at the camera's gain
};

// The camera's own nuisances (camera_nuisances.h has the models), each drawn per drive.
struct CameraNuisanceRanges {
  bool enabled = false;
  // Exposure time t = N^2 / 2^EV at f/4 and a gain of ISO 100, EV from the exposure value table
  // (common practice, values from memory): a sunlit street with shaded facades EV 12-14 ->
  // 1-4 ms; heavy to bright overcast EV 10.7-12.4 -> 3-10 ms; low sun at dusk EV 9.3-10.6 ->
  // 10-25 ms (the auto-exposure caps the time there and raises the gain). Full scale at base
  // gain: 6 000-12 000 electrons (a small-pixel CMOS sensor's full well, common practice, from
  // memory); the gain raised 2x at overcast and 4-8x at dusk divides it.
  CameraLightRanges sunlit{{1, 4}, {6000, 12000}};
  CameraLightRanges overcast{{3, 10}, {3000, 6000}};
  CameraLightRanges dusk{{10, 25}, {800, 2500}};
  // Read noise, electrons rms: 2-6 (CMOS, common practice, from memory).
  Range read_noise_electrons{2, 6};
  // A drive's camera has a global shutter with this chance, else a rolling shutter whose rows
  // are read out over readout_ms (first row to last: 10-30 ms, a CMOS sensor read at 30 to 90
  // frames a second, common practice).
  double global_shutter_share = 0.25;
  Range readout_ms{10, 30};
  // Auto-exposure steps: the exposure jumps by +-exposure_step_ev (1/3 EV, the step cameras
  // adjust exposure in, common practice) now and then, held until the next step; per minute of
  // drive, at least one a drive; the running offset kept within +-max_exposure_offset_ev.
  Range exposure_steps_per_min{0.5, 2};
  double exposure_step_ev = 1.0 / 3;
  double max_exposure_offset_ev = 1.0;
  // Vignetting: relative illumination 1 - s (1 - cos^4 theta) at field angle theta (the cos^4
  // law, common practice); s 0.3-0.8, a corner 0.3 to 1 EV darker on a 65-degree lens.
  Range vignetting_strength{0.3, 0.8};
  // JPEG quality 1-100 (libjpeg's scale): a survey camera saves finely, dashcams and phones of a
  // fleet coarser (common practice, from memory).
  Range survey_jpeg_quality{88, 95};
  Range query_jpeg_quality{60, 90};
  // Query vehicles carry their camera higher or lower than the survey's by 0.3-0.6 m (either
  // way: a hatchback's dash at 0.9 m to a van's at 2.1 m) and pitched by 2-5 degrees (either
  // way), each query drive its own.
  Range mount_height_offset_m{0.3, 0.6};
  Range mount_pitch_deg{2, 5};
};

// Light (sun_light.h): the sun where the Reda & Andreas SPA puts it at each drive's time, cast
// shadows from it, and a night drive lit by windows, street lamps and headlights. Fixed values,
// not draws: the drives' times already differ, and so does their light.
struct LightRanges {
  bool enabled = false;
  // Shadow map (sun_shadow.h): ground texel in metres, and how far from the camera shadows are
  // drawn (beyond, haze and the pixel footprint hide them). 0.1 m is about a pixel's footprint
  // 20 m ahead at 320x240 with supersampling 2 (2 x 250 px focal: 20 / 500 = 0.04 m) to 50 m;
  // DEVELOPERS.md has the cost.
  double shadow_texel_m = 0.1;
  double shadow_range_m = 160;
  // query-night: its start, seconds after the survey's (2026-05-05T01:30Z, 22:50 local solar
  // time at 40 W: the sun 20 degrees or more below the horizon, astronomical night), and the
  // share of upper-floor windows lit, each window its own draw (an evening in a residential
  // street: from memory, a third or so).
  double night_offset_s = 16.5 * 3600;
  double lit_window_share = 0.3;
  // query-dusk's start after the survey's: 21:15Z, the sun 4.7 degrees up in the west-north-west
  // (the clean world's 10.5 h puts it 23 degrees up: afternoon, not dusk).
  double dusk_offset_s = 12.25 * 3600;
  // Sky light of a night over a town (SkyLight's floor, Appearance::ambient units): dim enough
  // that unlit walls sit near the noise.
  double night_sky_light = 0.03;
  // Street lamps and the query car's low beams (night_light.h), as irradiance on a surface
  // facing the light at 1 m (Appearance::sun's units): a lamp 7 m up gives 70 / 49 = 1.4 under
  // itself, a sunlit road's 1.0 (0.6 + 0.55 sin 45 deg) or so, falling to 0.09 14 m away; the
  // low beams, 0.7 m up, give the road 1500 x 0.7 / 15^3 x 0.93 = 0.29 15 m ahead and 0.1 at
  // 25 m. Chosen by eye on seed 5 (pools, not a lit street; the road lit ahead).
  double lamp_intensity = 70;
  double headlight_intensity = 1500;
};

struct WorldNuisances {
  World world = World::kClean;
  LightRanges light;
  SurveyErrorRanges survey;
  CalibrationErrorRanges calibration;
  ChangedWorldRanges changes;
  TrafficRanges traffic;
  CameraNuisanceRanges camera;
  // Perceptual aliasing: the look-alike stretches (twins, a terrace, chain shops) and the
  // off-map excursion with its query drive (look_alikes.h).
  bool aliasing = false;
  // The survey's drive.csv sigma_h_m is the receiver's honest 1-sigma times this factor; < 1 is
  // an over-optimistic receiver. > 0 (DemoOptions::survey_sigma_scale fills it).
  double survey_sigma_scale = 1.0;

  // InvalidArgument naming the field: a range with lo > hi, a negative or non-finite bound, a
  // time offset or correlation time <= 0 where enabled, survey_sigma_scale <= 0; a camera share
  // outside [0, 1], a JPEG quality outside [1, 100], a vignetting strength above 1; a light
  // parameter out of its range.
  Status Validate() const;
};

// The nuisances of a preset, with every range at its documented default.
WorldNuisances NuisancesForWorld(World world);

// The realistic world's nuisances come in groups that can be switched on alone, so that what
// each costs the engine can be measured (a clean town, each group alone, all of them):
//   survey       the survey's pose error (drift, heading error, multipath jumps)
//   calibration  every camera.yml's calibration error and the camera time offset
//   changes      the world changed between the survey and each query drive
//   traffic      moving traffic on every drive
//   aliasing     look-alike stretches and the off-map excursion (adds query-offmap)
//   camera       the camera's own: motion blur, rolling shutter, exposure steps, vignetting,
//                sensor noise, JPEG quality by drive, remounted query cameras
//   light        the sun by the SPA at each drive's time, cast shadows, the night drive
//                (adds query-night)
// In the order above.
std::vector<std::string> NuisanceGroupNames();
// The groups of *n that are on, in NuisanceGroupNames order.
std::vector<std::string> EnabledNuisanceGroups(const WorldNuisances& n);
// Leaves on only the groups named (each at most once; an empty list leaves *n as it is).
// InvalidArgument naming the unknown or repeated group and the choices, or when *n is not the
// realistic world's (the clean world has none to choose from).
Status KeepNuisanceGroups(const std::vector<std::string>& names, WorldNuisances* n);

}  // namespace sightfix::demo
