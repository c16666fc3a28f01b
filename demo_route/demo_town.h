// Generates the demo town on disk: a survey drive and three query drives with truth, GNSS
// streams with spoofed segments, town.json (every parameter, so a world can be regenerated
// exactly) and a contact sheet. Same options (any jobs count) give the same bytes.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "demo_route/town_layout.h"
#include "demo_route/world_nuisances.h"
#include "indexer/base/status.h"

namespace sightfix::demo {

struct DemoOptions {
  std::string out_dir;
  uint64_t seed = 1;
  double route_length_m = 1000;               // survey route, one direction
  int image_width = 640, image_height = 480;  // survey camera; query-overcast has its own
  double survey_spacing_m = 2.0;
  double query_spacing_m = 5.0;
  int supersample = 2;
  int jobs = 0;  // render threads; 0 = all cores
  // Also write the survey as a mapping team might have it: survey-exif/ (JPEGs with EXIF GPS
  // tags: position, altitude above sea level, direction, accuracy, time) and survey-gpx/ (JPEGs
  // with EXIF times only, plus track.gpx: the survey's path at 10 Hz).
  bool export_exif = false, export_gpx = false;
  // Which nuisances of real data the town carries (world_nuisances.h). Realistic by default;
  // clean keeps the easy town the clean-world regression guards were measured on, byte for byte.
  World world = World::kRealistic;
  // Realistic world only: the nuisance groups left on (world_nuisances.h KeepNuisanceGroups);
  // empty, all of them.
  std::vector<std::string> nuisances;
  // The survey's drive.csv sigma_h_m is its receiver's honest 1-sigma times this, > 0 and <= 10;
  // below 1 the receiver is over-optimistic.
  double survey_sigma_scale = 1.0;

  // Names the bad field in *error.
  bool Validate(std::string* error) const;
};

struct DriveSummary {
  std::string name;
  int images = 0;
};

struct DemoSummary {
  std::vector<DriveSummary> drives;
  int buildings = 0, vehicles = 0, poles = 0, trees = 0;
  double render_s = 0, total_s = 0;
  std::string contact_sheet;
};

Result<DemoSummary> GenerateDemoTown(const DemoOptions& options);

// The nuisances of options.world with only options.nuisances left on (all when empty) and the
// survey's sigma scale. REQUIRES: options.Validate() holds.
WorldNuisances NuisancesFor(const DemoOptions& options);

// The layout options GenerateDemoTown builds its town with: seed and route length from options;
// in the realistic world also the look-alike stretches and the excursion (look_alikes.h).
TownOptions TownOptionsFor(const DemoOptions& options);

}  // namespace sightfix::demo
