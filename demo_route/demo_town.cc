#include "demo_route/demo_town.h"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <mutex>
#include <opencv2/imgcodecs.hpp>
#include <thread>

#include "demo_route/demo_drives.h"
#include "demo_route/demo_outputs.h"
#include "demo_route/random.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/geo.h"
#include "indexer/base/progress.h"
#include "indexer/base/rotation.h"
#include "indexer/base/threads.h"

namespace sightfix::demo {
namespace fs = std::filesystem;
namespace {

// Empties out/<drive>/ and creates its images/ folder, for every drive.
Status PrepareDriveFolders(const fs::path& out, const std::vector<PlannedDrive>& drives) {
  std::error_code ec;
  for (const PlannedDrive& d : drives) {
    fs::remove_all(out / d.condition.name, ec);
    fs::create_directories(out / d.condition.name / "images", ec);
    if (ec)
      return Status::IoError("cannot create " + (out / d.condition.name).string() + ": " +
                             ec.message());
  }
  return Status::Ok();
}

// One image to render: frame `index` of drive `drive_index` (the scene's variant).
struct RenderJob {
  const PlannedDrive* drive;
  size_t drive_index;
  size_t index;
};

// Renders, finishes and writes one image, its moving objects' share into *moving_share; false
// if the JPEG cannot be written.
bool RenderImage(const TownScene& scene, const RenderJob& job, const DemoOptions& o,
                 const fs::path& out, double* moving_share, std::string* failure) {
  const PlannedDrive& d = *job.drive;
  const Frame& f = d.exposure[job.index];
  const CameraPose pose{f.position, EnuFromCamera(f.attitude).t()};
  RenderOptions render;
  render.supersample = o.supersample;
  render.time_s = f.time_s;  // the exposure's: where moving objects are
  render.inverse_depth = d.camera_nuisance_model;
  const RenderedView view =
      scene.RenderView(pose, d.camera, d.condition.look, static_cast<int>(job.drive_index), render);
  *moving_share = view.moving_share;
  const cv::Mat linear =
      d.camera_nuisance_model
          ? ApplyCameraNuisances(view, d.camera, d.camera_draw, d.camera_motion[job.index],
                                 f.time_s, HashSeed(o.seed, 0x736e73, job.drive_index, job.index))
          : view.image;
  const cv::Mat img =
      FinishImage(linear, d.condition, HashSeed(o.seed, 0x696d67, d.condition.variant, job.index));
  const fs::path path = out / d.condition.name / DriveImageName(job.index);
  if (cv::imwrite(path.string(), img, {cv::IMWRITE_JPEG_QUALITY, d.condition.jpeg_quality}))
    return true;
  *failure = "cannot write " + path.string();
  return false;
}

// Renders every image of every drive on o.jobs threads (0: one per core), images taken in
// turn from one queue; each image depends only on its own inputs, so the bytes do not depend
// on the thread count. Returns the rendering time in seconds; (*moving_shares)[drive][image]
// the share of each image that moving objects cover.
Result<double> RenderImages(const TownScene& scene, const std::vector<PlannedDrive>& drives,
                            const DemoOptions& o, const fs::path& out,
                            std::vector<std::vector<double>>* moving_shares) {
  std::vector<RenderJob> jobs;
  std::vector<double*> shares;
  moving_shares->assign(drives.size(), {});
  for (size_t i = 0; i < drives.size(); ++i) {
    (*moving_shares)[i].assign(drives[i].exposure.size(), 0.0);
    for (size_t k = 0; k < drives[i].exposure.size(); ++k) {
      jobs.push_back({&drives[i], i, k});
      shares.push_back(&(*moving_shares)[i][k]);
    }
  }
  const int threads = o.jobs > 0 ? o.jobs : std::max(1u, std::thread::hardware_concurrency());
  std::atomic<size_t> next{0};
  std::atomic<bool> failed{false};
  std::string failure;
  std::mutex failure_mu;
  Progress progress("rendering images", static_cast<long>(jobs.size()));
  auto worker = [&] {
    for (size_t j; !failed && (j = next++) < jobs.size();) {
      std::string why;
      if (!RenderImage(scene, jobs[j], o, out, shares[j], &why)) {
        std::lock_guard<std::mutex> lock(failure_mu);
        failure = why;
        failed = true;
      }
      progress.Advance();
    }
  };
  std::vector<std::thread> pool;
  for (int i = 0; i < threads; ++i) pool.emplace_back(worker);
  for (std::thread& t : pool) t.join();
  progress.Finish();
  if (failed) return Status::IoError(failure);
  return progress.ElapsedS();
}

// Everything but the images: drive files, the optional photo exports, town.json and the
// contact sheet; the drives' image counts into *summary.
Status WriteOutputs(const DemoOptions& o, const Town& town, const std::vector<PlannedDrive>& drives,
                    const std::vector<std::vector<double>>& moving_shares, const fs::path& out,
                    DemoSummary* summary) {
  const EnuFrame enu(kTownOrigin);
  for (size_t i = 0; i < drives.size(); ++i) {
    const PlannedDrive& d = drives[i];
    Status s = WriteDriveFiles(d, enu, out / d.condition.name);
    if (s.ok() && d.world.has_traffic)
      s = WriteOcclusionCsv(moving_shares[i], out / d.condition.name);
    if (!s.ok()) return s;
    summary->drives.push_back({d.condition.name, static_cast<int>(d.truth.size())});
  }
  for (bool photos : {true, false})
    if (photos ? o.export_exif : o.export_gpx)
      if (Status s = ExportPhotoSurvey(drives[0], town, enu, out, photos); !s.ok()) return s;
  std::ofstream(out / "town.json") << TownJson(o, town, drives).dump(2) << "\n";
  WriteContactSheet(out, drives);
  summary->contact_sheet = (out / "contact_sheet.png").string();
  return Status::Ok();
}

}  // namespace

bool DemoOptions::Validate(std::string* error) const {
  auto fail = [&](const char* m) { return *error = m, false; };
  if (out_dir.empty()) return fail("--out is required");
  if (!(route_length_m >= 100 && route_length_m <= 20000))
    return fail("--route-length-m must be within [100, 20000]");
  if (image_width < 160 || image_height < 120 || image_width > 4096 || image_height > 4096)
    return fail("--image-size must be between 160x120 and 4096x4096");
  if (!(survey_spacing_m >= 0.5 && survey_spacing_m <= 20))
    return fail("survey spacing must be within [0.5, 20] m");
  if (!(query_spacing_m >= 0.5 && query_spacing_m <= 50))
    return fail("query spacing must be within [0.5, 50] m");
  if (supersample < 1 || supersample > 4) return fail("--supersample must be 1..4");
  if (jobs < 0) return fail("--jobs must be >= 0");
  if (!(survey_sigma_scale > 0 && survey_sigma_scale <= 10))
    return fail("--survey-sigma-scale must be > 0 and <= 10");
  WorldNuisances n = NuisancesForWorld(world);
  if (Status s = KeepNuisanceGroups(nuisances, &n); !s.ok())
    return *error = "--nuisances: " + s.message(), false;
  return true;
}

WorldNuisances NuisancesFor(const DemoOptions& o) {
  WorldNuisances n = NuisancesForWorld(o.world);
  KeepNuisanceGroups(o.nuisances, &n);  // checked by Validate
  n.survey_sigma_scale = o.survey_sigma_scale;
  return n;
}

TownOptions TownOptionsFor(const DemoOptions& o) {
  TownOptions t;
  t.seed = o.seed;
  t.route_length_m = o.route_length_m;
  t.look_alikes = t.excursion = NuisancesFor(o).aliasing;
  return t;
}

Result<DemoSummary> GenerateDemoTown(const DemoOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  const auto t_start = std::chrono::steady_clock::now();
  PinLibraryThreads();  // we parallelise across images ourselves
  const Town town = BuildTown(TownOptionsFor(o));
  const std::vector<PlannedDrive> drives = PlanDrives(town, o);
  std::vector<DriveWorld> worlds;  // the scene's variant = the drive's index
  for (const PlannedDrive& d : drives) worlds.push_back(d.world);
  const LightRanges light = NuisancesForWorld(o.world).light;
  const TownScene scene(town, worlds, light.enabled ? light.lit_window_share : 0.0);

  const fs::path out(o.out_dir);
  if (Status s = PrepareDriveFolders(out, drives); !s.ok()) return s;
  std::vector<std::vector<double>> moving_shares;
  const Result<double> render_s = RenderImages(scene, drives, o, out, &moving_shares);
  if (!render_s.ok()) return render_s.status();
  DemoSummary summary;
  if (Status s = WriteOutputs(o, town, drives, moving_shares, out, &summary); !s.ok()) return s;
  summary.buildings = static_cast<int>(town.buildings.size());
  summary.vehicles = static_cast<int>(town.vehicles.size());
  summary.poles = static_cast<int>(town.poles.size());
  summary.trees = static_cast<int>(town.trees.size());
  summary.render_s = *render_s;
  summary.total_s =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count();
  return summary;
}

}  // namespace sightfix::demo
