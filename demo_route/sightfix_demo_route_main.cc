// sightfix-demo-route: generates the procedural demo town with its survey and query drives.
#include <algorithm>
#include <boost/program_options.hpp>
#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>
#include <optional>

#include "demo_route/demo_town.h"
#include "indexer/base/crash_report.h"

namespace po = boost::program_options;

namespace {

using sightfix::demo::DemoOptions;
using sightfix::demo::DemoSummary;

// The flags, bound to *o, the image size text *size, the export list *exports and the world
// name *world.
po::options_description Describe(DemoOptions* o, std::string* size, std::string* exports,
                                 std::string* world, std::string* nuisances) {
  po::options_description desc(
      "sightfix-demo-route: generate the demo town (an invented place), its survey drive and its "
      "query drives\n"
      "with exact ground truth, GNSS streams with spoofed segments, town.json and a contact "
      "sheet.\n\n"
      "Usage: sightfix-demo-route --out DIR [options]\n\nOptions");
  desc.add_options()("help,h", "show this help")(
      "out", po::value(&o->out_dir),
      "output folder (its survey/ and query-*/ folders are replaced)")(
      "seed", po::value(&o->seed)->default_value(o->seed), "world seed: same seed, same bytes")(
      "route-length-m", po::value(&o->route_length_m)->default_value(o->route_length_m),
      "survey route length, metres")("image-size", po::value(size)->default_value(*size),
                                     "survey camera image size WxH")(
      "survey-spacing-m", po::value(&o->survey_spacing_m)->default_value(o->survey_spacing_m),
      "survey frame spacing")("query-spacing-m",
                              po::value(&o->query_spacing_m)->default_value(o->query_spacing_m),
                              "query frame spacing (jittered)")(
      "supersample", po::value(&o->supersample)->default_value(o->supersample),
      "anti-aliasing factor 1..4")("jobs", po::value(&o->jobs)->default_value(0),
                                   "render threads (0 = all cores); output does not depend on it")(
      "export", po::value(exports),
      "also write the survey as survey-exif/ (EXIF-tagged JPEGs) and/or survey-gpx/ (JPEGs + "
      "track.gpx): exif, gpx or exif,gpx")(
      "world", po::value(world)->default_value(*world),
      "clean: exact calibrations, a 2 cm survey (the town the accuracy figures were measured "
      "on); realistic: survey pose error (correlated drift, heading error, multipath jumps in deep "
      "street canyons; truth in survey/truth.csv), calibration error in every camera.yml (truth "
      "in camera-truth.yml), a camera time offset, a changed world, traffic, look-alike streets, "
      "an off-map drive (query-offmap), the sun's true position with cast shadows, a night "
      "drive (query-night) and the camera's own nuisances (motion blur, rolling shutter, "
      "exposure steps, vignetting, shot and read noise, JPEG quality by drive, query cameras "
      "mounted at another height and pitch), the default; clean: the easy town the clean-world "
      "regression guards were measured on")(
      "nuisances", po::value(nuisances),
      "realistic world only: keep only these nuisance groups on, comma-separated, from survey "
      "(pose error), calibration (camera.yml error and time offset), changes (parked vehicles, "
      "posters, repaints, works, season between drives), traffic (moving vehicles and people), "
      "aliasing (look-alike stretches and the off-map drive), camera (motion blur, rolling "
      "shutter, "
      "exposure steps, vignetting, sensor noise, JPEG quality, remounted query cameras), light "
      "(the sun by the SPA, cast shadows, the "
      "night drive); default "
      "all, so that each one's "
      "cost can be measured alone")(
      "survey-sigma-scale", po::value(&o->survey_sigma_scale)->default_value(1.0),
      "multiplies the survey's reported sigma_h_m (its receiver's honest 1-sigma); < 1 makes it "
      "over-optimistic; must be > 0 and <= 10")("json", "print the summary as JSON on stdout");
  return desc;
}

// The items of a comma-separated list (none for an empty text).
std::vector<std::string> SplitList(const std::string& text) {
  std::vector<std::string> items;
  for (size_t start = 0; start <= text.size() && !text.empty();) {
    const size_t comma = std::min(text.find(',', start), text.size());
    items.push_back(text.substr(start, comma - start));
    start = comma + 1;
  }
  return items;
}

// Sets the export flags of *o from "exif", "gpx" or "exif,gpx"; false on any other item.
bool ParseExports(std::string exports, DemoOptions* o) {
  for (std::string item; !exports.empty();) {
    const size_t comma = exports.find(',');
    item = exports.substr(0, comma);
    exports = comma == std::string::npos ? "" : exports.substr(comma + 1);
    if (item == "exif")
      o->export_exif = true;
    else if (item == "gpx")
      o->export_gpx = true;
    else
      return false;
  }
  return true;
}

// Fills *o and *json from the command line; an exit code if the program should stop here
// (help shown: 0; bad flags, reported on stderr: 2).
std::optional<int> ParseCommandLine(int argc, char** argv, DemoOptions* o, bool* json) {
  std::string exports, world = sightfix::demo::WorldName(o->world), nuisances;
  std::string size = "640x480";
  const po::options_description desc = Describe(o, &size, &exports, &world, &nuisances);
  po::variables_map vm;
  try {
    po::store(po::parse_command_line(argc, argv, desc), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "sightfix-demo-route: %s\n(see --help)\n", e.what());
    return 2;
  }
  if (vm.count("help")) {
    std::cout << desc << "\n";
    return 0;
  }
  if (std::sscanf(size.c_str(), "%dx%d", &o->image_width, &o->image_height) != 2) {
    std::fprintf(stderr, "sightfix-demo-route: --image-size must look like 640x480, got '%s'\n",
                 size.c_str());
    return 2;
  }
  if (!ParseExports(exports, o)) {
    std::fprintf(stderr, "sightfix-demo-route: --export takes exif, gpx or exif,gpx\n");
    return 2;
  }
  const sightfix::Result<sightfix::demo::World> parsed = sightfix::demo::ParseWorld(world);
  if (!parsed.ok()) {
    std::fprintf(stderr, "sightfix-demo-route: --%s\n", parsed.status().message().c_str());
    return 2;
  }
  o->world = *parsed;
  if (vm.count("nuisances")) {
    o->nuisances = SplitList(nuisances);
    if (o->nuisances.empty()) {
      std::fprintf(stderr, "sightfix-demo-route: --nuisances needs at least one group\n");
      return 2;
    }
  }
  *json = vm.count("json") > 0;
  return std::nullopt;
}

void PrintJson(const DemoOptions& o, const DemoSummary& s) {
  nlohmann::json j = {
      {"out", o.out_dir},
      {"seed", o.seed},
      {"world", sightfix::demo::WorldName(o.world)},
      {"nuisances", o.world == sightfix::demo::World::kClean
                        ? std::vector<std::string>{}
                        : sightfix::demo::EnabledNuisanceGroups(sightfix::demo::NuisancesFor(o))},
      {"route_length_m", o.route_length_m},
      {"buildings", s.buildings},
      {"vehicles", s.vehicles},
      {"poles", s.poles},
      {"trees", s.trees},
      {"render_s", s.render_s},
      {"total_s", s.total_s},
      {"contact_sheet", s.contact_sheet}};
  for (const auto& d : s.drives) j["drives"][d.name] = d.images;
  std::cout << j.dump(2) << "\n";
}

void PrintText(const DemoOptions& o, const DemoSummary& s) {
  std::printf("demo town (seed %llu, route %.0f m, %s world) written to %s\n",
              static_cast<unsigned long long>(o.seed), o.route_length_m,
              sightfix::demo::WorldName(o.world), o.out_dir.c_str());
  std::printf("  %d buildings, %d parked vehicles, %d poles, %d trees\n", s.buildings, s.vehicles,
              s.poles, s.trees);
  int total = 0;
  for (const auto& d : s.drives) {
    std::printf("  %-15s %5d images\n", d.name.c_str(), d.images);
    total += d.images;
  }
  std::printf("  %d images rendered in %.1f s (%.1f s in all)\n", total, s.render_s, s.total_s);
  std::printf("  contact sheet: %s\n", s.contact_sheet.c_str());
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::InstallCrashReport("sightfix-demo-route");
  DemoOptions o;
  bool json = false;
  if (std::optional<int> exit_code = ParseCommandLine(argc, argv, &o, &json)) return *exit_code;
  std::string error;
  if (!o.Validate(&error)) {
    std::fprintf(stderr, "sightfix-demo-route: %s (see --help)\n", error.c_str());
    return 2;
  }
  sightfix::Result<DemoSummary> r = sightfix::demo::GenerateDemoTown(o);
  if (!r.ok()) {
    std::fprintf(stderr, "sightfix-demo-route: %s\n", r.status().ToString().c_str());
    return 1;
  }
  if (json)
    PrintJson(o, *r);
  else
    PrintText(o, *r);
  return 0;
}
