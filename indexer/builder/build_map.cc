// build (map_builder.h): plan (one shard), train, build-tiles and publish in one process, under
// the map's writer lock, sharing the training sample's features; this run's staging files go
// again at the end, whatever happens.
#include <algorithm>
#include <optional>

#include "indexer/base/threads.h"
#include "indexer/builder/staging.h"
#include "indexer/map/map_lock.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;
using namespace build_internal;
using namespace staging;

// The staging files of one BuildMap run, removed by Clean().
class RunStaging {
 public:
  RunStaging(Env* env, const std::string& map_dir)
      : env_(env), map_dir_(map_dir), was_there_(env->FileExists(StagingDir(map_dir).string())) {}
  std::string PlanPath() const { return (StagingDir(map_dir_) / "build-plan.json").string(); }
  void SetPlanId(const std::string& id) { plan_id_ = id; }

  // The model, the plan, the plan's folder; the staging folder too when this run made it and it
  // is empty now.
  void Clean() const {
    const fs::path staging = StagingDir(map_dir_);
    env_->RemoveFile(ModelFile(map_dir_).string());
    env_->RemoveFile(ModelInfoFile(map_dir_).string());
    env_->RemoveFile(PlanPath());
    if (plan_id_) env_->RemoveTree((staging / *plan_id_).string());
    if (was_there_) return;
    Result<std::vector<std::string>> left = env_->ListDirectory(staging.string(), false);
    if (left.ok() && left->empty()) env_->RemoveTree(staging.string());
  }

 private:
  Env* env_;
  std::string map_dir_;
  bool was_there_;
  std::optional<std::string> plan_id_;
};

// The four steps in order; *staging learns the plan id as soon as there is one.
Result<BuildSummary> RunSteps(const BuildOptions& o, RunStaging* staging) {
  PlanSummary planned;
  FeatureCache cache;
  Result<json> plan_json = PlanImpl(o, 1, &planned, &cache);
  if (!plan_json.ok()) return plan_json.status();
  staging->SetPlanId(planned.plan_id);
  if (Status st = WriteJson(o.env, staging->PlanPath(), *plan_json); !st.ok()) return st;
  const Plan plan{std::move(plan_json).value(),
                  planned.plan_id,
                  fs::absolute(o.map_dir).lexically_normal().string(),
                  fs::absolute(o.drive_dir).lexically_normal().string(),
                  1,
                  planned.map_version};
  const StepOptions step{o.jobs, o.progress, o.env};
  Result<TrainSummary> trained = TrainImpl(o, &cache);
  if (!trained.ok()) return trained.status();
  Say(o, "matching neighbouring frames, triangulating, bundle adjustment, tile by tile");
  Result<ShardSummary> shard = BuildTilesImpl(plan, 1, 1, step, &cache);
  if (!shard.ok()) return shard.status();
  cache.clear();
  Result<BuildSummary> published = PublishImpl(plan, staging->PlanPath(), step, true);
  if (!published.ok()) return published;
  BuildSummary summary = std::move(published).value();
  summary.model_s = trained->seconds - trained->feature_s;
  summary.feature_s = trained->feature_s + shard->feature_s;  // the shard reuses the sample's
  summary.structure_s = shard->structure_s;
  summary.calibration_s = planned.calibration_s;
  return summary;
}

}  // namespace

Result<BuildSummary> BuildMap(const BuildOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  PinLibraryThreads();  // DEVELOPERS.md, Threads
  const Stopwatch total(o.env);
  o.env->CreateDirectories(o.map_dir);
  Result<MapWriterLock> lock = MapWriterLock::Acquire(o.map_dir);
  if (!lock.ok()) return lock.status();
  RunStaging staging(o.env, o.map_dir);
  Result<BuildSummary> summary = RunSteps(o, &staging);
  staging.Clean();
  if (!summary.ok()) return summary;
  summary->seconds = total.Seconds();
  summary->images_per_s = summary->images / std::max(summary->seconds, 1e-9);
  return summary;
}

}  // namespace sightfix
