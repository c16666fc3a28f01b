// sightfix fit-integrity: fits the Gaussian overbound of a map's fix errors on a drive with
// truth and records it in the map (catalog.h IntegrityFit), where the engine applies it to every
// protection level (docs/design.md 5.6).
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
#include "client/eval/overbound_record.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/route_eval.h"
#include "indexer/base/progress.h"
#include "indexer/map/catalog.h"
#include "indexer/map/map_lock.h"

namespace sightfix::cli {
namespace {

namespace fs = std::filesystem;

struct FitFlags {
  std::string map_dir, drive, prior = "noisy:150";
  int limit = 0, jobs = 2;
  uint64_t seed = 1;
  double wrong_m = 5, confidence = 0.95;
  bool dry_run = false, json = false;
};

po::options_description FitOptions(FitFlags* f) {
  po::options_description desc(
      "sightfix fit-integrity: replays a drive with ground truth (drive.csv) through a map in\n"
      "this process, takes each refined fix's error across and along the truth's heading over\n"
      "the fix's own sigma on that axis, and fits the smallest scale K >= 1 whose Gaussian tail\n"
      "bounds those normalised errors' tail (a CDF overbound, DeCleene 2000, with the sample's\n"
      "Clopper-Pearson uncertainty). K is recorded in the map with the drive's name; the engine\n"
      "then multiplies every sigma behind a protection level by it, and every fix and replay\n"
      "report names the drive. Fixes more than --wrong-m off are faults (a wrong place), not\n"
      "samples of the error model: they are left out and counted. So is a fix one group of\n"
      "its correspondences pulled off (beyond 3 sigma, back within 3 without that group): the\n"
      "levels' fault terms answer for it, and K never drops below what keeps it inside its\n"
      "own levels. A fit replaces the map's last one. Measure coverage and integrity\n"
      "afterwards on drives the fit did not see.\n\n"
      "Usage: sightfix fit-integrity --map MAPDIR --drive QUERYDIR [--prior none|noisy:R]\n"
      "       [--limit N] [--seed N] [--jobs N] [--wrong-m M] [--confidence C] [--dry-run]\n"
      "       [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help")("map", po::value(&f->map_dir),
                                                 "map folder (the fit is written into it)")(
      "drive", po::value(&f->drive), "drive folder with truth (drive.csv, images, calibration)")(
      "prior", po::value(&f->prior),
      "none: no prior; noisy:R: circle of radius R m centred uniformly within R of the truth "
      "(default noisy:150)")("limit", po::value(&f->limit), "first N queries only (0: all)")(
      "seed", po::value(&f->seed), "seed of the noisy prior's centres (1)")(
      "jobs", po::value(&f->jobs), "queries in flight (2)")(
      "wrong-m", po::value(&f->wrong_m),
      "a refined fix farther than this from the truth is a fault, left out of the fit (5)")(
      "confidence", po::value(&f->confidence),
      "confidence of the Clopper-Pearson bound on the tail (0.95)")(
      "dry-run", po::bool_switch(&f->dry_run), "fit and print, leave the map as it is")(
      "json", po::bool_switch(&f->json), "print the fit as JSON instead of text");
  return desc;
}

int CheckFlags(const FitFlags& f, const po::variables_map& vm, RouteEvalOptions* o) {
  if (f.map_dir.empty() || f.drive.empty())
    return Fail("fit-integrity needs --map and --drive (see sightfix fit-integrity --help)", 2);
  if (!ParsePriorMode(f.prior, o) || o->prior == PriorMode::kGnss)
    return Fail("--prior must be none or noisy:RADIUS_M", 2);
  if (vm.count("seed") && o->prior != PriorMode::kNoisy)
    return Fail("--seed applies to --prior noisy:R only: the other modes draw nothing", 2);
  if (!(f.wrong_m > 0)) return Fail("--wrong-m must be a number of metres > 0", 2);
  if (!(f.confidence > 0 && f.confidence < 1)) return Fail("--confidence must lie in (0, 1)", 2);
  if (f.limit < 0 || f.jobs < 1) return Fail("--limit must be >= 0 and --jobs >= 1", 2);
  o->drive_dir = f.drive, o->seed = f.seed, o->limit = f.limit, o->jobs = f.jobs;
  return kGoOn;
}

nlohmann::json FitJson(const IntegrityFit& fit, const NormalisedErrors& e, int queries,
                       bool written) {
  return {{"overbound_scale", fit.overbound_scale},
          {"binding_z", fit.binding_z},
          {"confidence", fit.confidence},
          {"drive", fit.drive},
          {"drive_sha256", fit.drive_sha256},
          {"queries", queries},
          {"refined_fixes", e.fixes},
          {"excluded_wrong", e.excluded},
          {"excluded_group_faults", e.faults},
          {"group_fault_scale", e.fault_scale},
          {"samples", e.z.size()},
          {"map_version", fit.map_version},
          {"written", written}};
}

void PrintFit(const IntegrityFit& fit, const NormalisedErrors& e, int queries, double wrong_m,
              const std::string& map_dir, bool written) {
  std::vector<double> a;
  for (double z : e.z) a.push_back(std::fabs(z));
  std::sort(a.begin(), a.end());
  std::printf(
      "drive %s (drive.csv sha256 %.16s): %d queries, %d refined fixes, %d more than "
      "%g m off left out (wrong places: the place check's business, not the error model)\n",
      fit.drive.c_str(), fit.drive_sha256.c_str(), queries, e.fixes, e.excluded, wrong_m);
  if (e.faults > 0 && e.fault_scale_image.empty())
    std::printf(
        "%d more pulled off by one group (beyond |z| %g, back within it without that group) "
        "left out: each inside its protection levels at K = 1\n",
        e.faults, kFaultScreenZ);
  else if (e.faults > 0)
    std::printf(
        "%d more pulled off by one group (beyond |z| %g, back within it without that group) "
        "left out: inside their protection levels from K = %.3f (set by %s)\n",
        e.faults, kFaultScreenZ, e.fault_scale, e.fault_scale_image.c_str());
  std::printf(
      "normalised errors (across and along): %zu samples, |z| median %.2f, p95 %.2f, "
      "max %.2f\n",
      a.size(), a[a.size() / 2], a[std::min(a.size() - 1, a.size() * 95 / 100)], a.back());
  std::printf("overbound scale K = %.3f", fit.overbound_scale);
  if (fit.binding_z > 0)
    std::printf(" (set by the tail at |z| = %.2f, Clopper-Pearson %g %%)", fit.binding_z,
                100 * fit.confidence);
  else if (e.faults > 0 && fit.overbound_scale == e.fault_scale && e.fault_scale > 1)
    std::printf(" (set by %s, a group's fault its levels must hold)", e.fault_scale_image.c_str());
  else
    std::printf(" (the stated sigmas already bound the tail)");
  std::printf("\n");
  if (written)
    std::printf(
        "recorded in %s/catalog.sqlite (map version %d): protection levels now use "
        "sigma x %.3f and name drive %s; measure them on other drives\n",
        map_dir.c_str(), fit.map_version, fit.overbound_scale, fit.drive.c_str());
  else
    std::printf("dry run: the map is unchanged\n");
  std::printf("%s\n", kSafety);
}

// Replays the drive through the map and fits; returns kGoOn or the exit code.
int ReplayAndFit(const FitFlags& f, RouteEvalOptions* o, DriveOverbound* fitted, int* queries) {
  auto localizer = Localizer::Open(f.map_dir, LocalizerOptions{});
  if (!localizer.ok()) return Fail(localizer.status().ToString(), 2);
  Result<std::vector<DriveRow>> rows = ReadDriveManifest(f.drive + "/drive.csv");
  if (!rows.ok()) return Fail(rows.status().ToString(), 2);
  const long total = f.limit > 0 ? std::min<long>(f.limit, rows->size()) : rows->size();
  Progress progress("queries", total);
  o->on_query_done = [&progress] { progress.Advance(); };
  Result<std::vector<QueryResult>> results = RunDrive(InProcess(**localizer), *o);
  progress.Finish();
  if (!results.ok()) return Fail(results.status().ToString(), 2);
  *queries = static_cast<int>(total);
  DriveOverboundOptions options;
  options.wrong_m = f.wrong_m, options.confidence = f.confidence;
  options.map_version = (*localizer)->catalog().map_version;
  Result<DriveOverbound> fit = FitDriveOverbound(*results, f.drive, options);
  if (!fit.ok()) return Fail(fit.status().ToString(), 1);
  *fitted = std::move(fit).value();
  return kGoOn;
}

}  // namespace

int FitIntegrity(int argc, char** argv) {
  FitFlags f;
  const po::options_description desc = FitOptions(&f);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "fit-integrity", desc, {}, &vm); rc != kGoOn) return rc;
  RouteEvalOptions o;
  if (int rc = CheckFlags(f, vm, &o); rc != kGoOn) return rc;
  const std::string catalog_path = f.map_dir + "/catalog.sqlite";
  if (!fs::exists(catalog_path)) return Fail("no map in " + f.map_dir + " (no catalog.sqlite)", 2);
  // Held from the replay to the write: no build or add changes the map under the fit.
  std::optional<MapWriterLock> lock;
  if (!f.dry_run) {
    Result<MapWriterLock> l = MapWriterLock::Acquire(f.map_dir);
    if (!l.ok()) return Fail(l.status().ToString(), 1);
    lock.emplace(std::move(l).value());
  }
  DriveOverbound fitted;
  int queries = 0;
  if (int rc = ReplayAndFit(f, &o, &fitted, &queries); rc != kGoOn) return rc;
  if (!f.dry_run)
    if (Status s = RecordOverbound(f.map_dir, fitted.fit); !s.ok()) return Fail(s.ToString(), 1);
  if (f.json)
    std::cout << FitJson(fitted.fit, fitted.errors, queries, !f.dry_run).dump(2) << "\n";
  else
    PrintFit(fitted.fit, fitted.errors, queries, f.wrong_m, f.map_dir, !f.dry_run);
  return 0;
}

}  // namespace sightfix::cli
