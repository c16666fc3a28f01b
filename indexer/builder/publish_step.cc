// publish (map_builder.h): every shard of a plan checked, the staged tiles moved into the map,
// then the one catalog switch; the replaced tile files and the plan's staging folder go after.
#include <algorithm>
#include <optional>
#include <set>

#include "indexer/base/sha256.h"
#include "indexer/builder/staging.h"
#include "indexer/map/map_lock.h"
#include "indexer/map/map_store.h"

namespace sightfix::staging {
namespace {

namespace fs = std::filesystem;
using namespace build_internal;

using Moves = std::vector<std::pair<fs::path, fs::path>>;  // staged -> live
using EntryByTile = std::map<std::vector<int>, json>;      // tile key -> manifest entry

struct PublishContext {
  const Plan* plan;
  std::string plan_path;
  BuildOptions o;
  fs::path stage;  // MAPDIR/staging/<plan id>
  std::string catalog_path;
};

// The live catalog against the plan: *done when this plan is published already (summary filled);
// kFailedPrecondition when the map moved on since the plan was made.
Status CheckLiveMap(const PublishContext& c, bool* done, BuildSummary* summary) {
  Env* env = c.o.env;
  *done = false;
  if (!env->FileExists(c.catalog_path)) return Status::Ok();
  Result<Catalog> live = ReadCatalog(c.catalog_path);
  if (live.ok() && live->map_version == c.plan->map_version && !env->FileExists(c.stage.string())) {
    *done = true;
    summary->already_published = true;
    summary->model_id = live->model_id;
    summary->tiles = static_cast<int>(live->tiles.size());
    return Status::Ok();
  }
  if (live.ok() && live->map_version != c.plan->map_version - 1)
    return Status(StatusCode::kFailedPrecondition,
                  c.plan->map_dir + " is at map version " + std::to_string(live->map_version) +
                      "; the plan " + c.plan_path + " was made for version " +
                      std::to_string(c.plan->map_version - 1) + ": make a new plan");
  return Status::Ok();
}

// Every shard's manifest, from this plan and this model, its tiles into *entry_of and its
// skipped rows (once each) into *skipped; kFailedPrecondition naming each shard missing.
Status ReadManifests(const PublishContext& c, const StagedModel& staged, EntryByTile* entry_of,
                     std::vector<std::string>* skipped) {
  const Plan& plan = *c.plan;
  std::vector<std::string> missing;
  std::set<std::string> seen(skipped->begin(), skipped->end());
  for (int shard = 1; shard <= plan.shards; ++shard) {
    const fs::path path = c.stage / ShardName(shard, plan.shards);
    const std::string label = "shard " + std::to_string(shard) + "/" + std::to_string(plan.shards);
    Result<json> m = ReadJson(c.o.env, path, "shard manifest");
    if (!m.ok()) {
      missing.push_back(label + " (no " + path.string() + ")");
    } else if (m->value("plan_id", "") != plan.id) {
      missing.push_back(label + " (" + path.string() + " is from another plan)");
    } else if (m->value("model_id", "") != staged.id) {
      missing.push_back(label + " (built with model " + m->value("model_id", "") +
                        ", the staged model is " + staged.id + ": train ran again since)");
    } else {
      for (const json& t : m->at("tiles")) (*entry_of)[t.at("tile").get<std::vector<int>>()] = t;
      for (const json& why : m->at("skipped"))
        if (seen.insert(why.get<std::string>()).second) skipped->push_back(why.get<std::string>());
    }
  }
  if (missing.empty()) return Status::Ok();
  std::string list;
  for (const std::string& m : missing) list += "\n  " + m;
  return Status(StatusCode::kFailedPrecondition,
                std::to_string(missing.size()) + " of " + std::to_string(plan.shards) +
                    " shards of plan " + plan.id + " have not finished:" + list +
                    "\nrun each with: sightfix-indexer build-tiles --plan " + c.plan_path +
                    " --shard I/" + std::to_string(plan.shards));
}

// What the catalog is assembled from, tile by tile.
struct Assembly {
  Catalog catalog;
  cv::Mat all_codes;
  std::vector<faiss::Index::idx_t> ids;
  Moves moves;
  double local_bytes = 0, point_bytes = 0, file_bytes = 0, ba_initial = 0, ba_final = 0;
};

// The tile file of entry E checked against its SHA-256 (staged, or already moved by an earlier
// publish that failed later); its move planned.
Status CheckTileFile(const PublishContext& c, const json& e, Assembly* a) {
  const std::string rel = e.at("file").get<std::string>();
  const fs::path from = c.stage / rel, to = fs::path(c.plan->map_dir) / rel;
  const bool staged = c.o.env->FileExists(from.string());
  Result<std::string> actual = Sha256OfFile(staged ? from.string() : to.string());
  if (!actual.ok() || *actual != e.at("sha256").get<std::string>())
    return Status(StatusCode::kCorrupt,
                  (staged ? from : to).string() +
                      (actual.ok() ? " does not match its shard manifest (SHA-256)"
                                   : " is missing: run its shard again"));
  if (staged) a->moves.emplace_back(from, to);
  return Status::Ok();
}

// The codes of entry E's images (hex in the manifest) onto the map-wide index's input.
Status AddCodes(const json& e, const TileKey& key, int ordinal, int code_bytes, Assembly* a) {
  const int images = e.at("images").get<int>();
  const json& codes = e.at("codes");
  if (static_cast<int>(codes.size()) != images)
    return Status(StatusCode::kCorrupt, "the manifest of tile " + key.ToString() + " lists " +
                                            std::to_string(codes.size()) + " codes for " +
                                            std::to_string(images) + " images");
  for (int i = 0; i < images; ++i) {
    cv::Mat row(1, code_bytes, CV_8U);
    if (!BytesOfHex(codes[i].get<std::string>(), row.ptr<uint8_t>(), code_bytes))
      return Status(StatusCode::kCorrupt, "bad code in the manifest of tile " + key.ToString());
    a->all_codes.push_back(row);
    a->ids.push_back(GlobalImageId(ordinal, i));
  }
  return Status::Ok();
}

// Entry E's figures into the summary (images, points, structure, bytes).
void AddFigures(const json& e, Assembly* a, BuildSummary* summary) {
  const int points = e.at("points").get<int>();
  summary->images += e.at("images").get<int>();
  summary->points += points;
  a->local_bytes += e.at("local_feature_bytes").get<double>();
  a->point_bytes += e.at("point_bytes").get<double>();
  a->file_bytes += e.at("file_bytes").get<double>();
  const json& st = e.at("structure");
  StructureSummary& sum = summary->structure;
  sum.pairs += st.at("pairs").get<int>();
  sum.matches += st.at("matches").get<int>();
  sum.epipolar_matches += st.at("epipolar_matches").get<int>();
  sum.tracks += st.at("tracks").get<int>();
  sum.observations += st.at("observations").get<int>();
  sum.points += points;
  const double w = st.at("observations").get<double>();
  a->ba_initial += w * st.at("ba_initial_rms_px").get<double>();
  a->ba_final += w * st.at("ba_final_rms_px").get<double>();
}

// The catalog's tiles in key order, each file checked against its shard's manifest.
Status AssembleTiles(const PublishContext& c, const StagedModel& staged,
                     const EntryByTile& entry_of, Assembly* a, BuildSummary* summary) {
  for (const json& job : c.plan->j.at("jobs")) {
    const TileKey key = KeyOf(job.at("tile"));
    auto it = entry_of.find(job.at("tile").get<std::vector<int>>());
    if (it == entry_of.end())
      return Status(StatusCode::kFailedPrecondition,
                    "shard " + std::to_string(job.at("shard").get<int>()) + "/" +
                        std::to_string(c.plan->shards) + " has no tile " + key.ToString());
    const json& e = it->second;
    if (e.at("images").get<int>() == 0) continue;  // every frame of it was bad (skip_bad)
    if (Status s = CheckTileFile(c, e, a); !s.ok()) return s;
    const int ordinal = static_cast<int>(a->catalog.tiles.size());
    a->catalog.tiles.push_back({key, e.at("file").get<std::string>(),
                                e.at("sha256").get<std::string>(), e.at("images").get<int>(),
                                e.at("points").get<int>(), staged.id});
    if (Status s = AddCodes(e, key, ordinal, staged.model.code_bytes(), a); !s.ok()) return s;
    AddFigures(e, a, summary);
  }
  if (a->catalog.tiles.empty()) return Status::InvalidArgument("no tile has a usable survey image");
  return Status::Ok();
}

// The catalog's header (model, version, provenance, map-wide index) and the summary's totals.
void FinishCatalog(const PublishContext& c, const StagedModel& staged,
                   const std::vector<std::string>& skipped, Assembly* a, BuildSummary* summary) {
  Catalog& catalog = a->catalog;
  catalog.map_version = c.plan->map_version;
  catalog.zoom = c.o.zoom;
  catalog.model_id = staged.id;
  catalog.model_params = staged.info.at("params").dump();
  catalog.model_blob = staged.blob;
  catalog.created_utc = c.plan->j.at("created_utc").get<std::string>();
  const int observations = std::max(1, summary->structure.observations);
  summary->structure.ba_initial_rms_px = a->ba_initial / observations;
  summary->structure.ba_final_rms_px = a->ba_final / observations;
  summary->tiles = static_cast<int>(catalog.tiles.size());
  summary->skipped = skipped;
  summary->input_format = c.plan->j.at("input_format").get<std::string>();
  summary->model_id = staged.id;
  summary->codec = staged.info.at("codec").get<std::string>();
  summary->training_vectors = staged.info.at("training_vectors").get<int>();
  summary->cameras = c.plan->j.at("cameras");
  const json drive{{"drive", c.plan->drive},       {"format", summary->input_format},
                   {"images", summary->images},    {"skipped", skipped.size()},
                   {"added", catalog.created_utc}, {"cameras", summary->cameras}};
  catalog.provenance = json{
      {"drives", {drive}},
      {"max_features", c.o.features.max_features},
      {"zoom", c.o.zoom}}.dump();
  catalog.global_index = GlobalIndex(staged.model, a->all_codes, a->ids);
  const double n = std::max(1, summary->images);
  summary->global_code_bytes = staged.model.code_bytes();
  summary->local_feature_bytes = a->local_bytes / n;
  summary->point_bytes = a->point_bytes / n;
  summary->tile_file_bytes = a->file_bytes / n;
}

// Tiles into the map (renames on one file system), then the one catalog switch. On a failure
// the tiles go back to staging and the map is as it was.
Status MoveAndSwitch(const PublishContext& c, const Assembly& a) {
  Env* env = c.o.env;
  Moves done;
  auto undo = [&](Status s) {
    for (const auto& [from, to] : done) env->RenameFile(to.string(), from.string());
    return s;
  };
  for (const auto& [from, to] : a.moves) {
    Status s = env->CreateDirectories(to.parent_path().string());
    if (s.ok()) s = env->RenameFile(from.string(), to.string());
    if (!s.ok()) return undo(s);
    done.emplace_back(from, to);
  }
  if (Status s = WriteCatalog(c.catalog_path, a.catalog, env); !s.ok()) return undo(s);
  return Status::Ok();
}

}  // namespace

Result<BuildSummary> PublishImpl(const Plan& plan, const std::string& plan_path,
                                 const StepOptions& step, bool locked) {
  if (std::string error; !step.Validate(&error)) return Status::InvalidArgument(error);
  const Stopwatch total(step.env);
  const PublishContext c{&plan, plan_path, OptionsOf(plan, step),
                         StagingDir(plan.map_dir) / plan.id,
                         (fs::path(plan.map_dir) / "catalog.sqlite").string()};
  std::optional<MapWriterLock> lock;
  if (!locked) {
    step.env->CreateDirectories(plan.map_dir);
    Result<MapWriterLock> held = MapWriterLock::Acquire(plan.map_dir);
    if (!held.ok()) return held.status();
    lock.emplace(std::move(held).value());
  }
  BuildSummary summary;
  summary.map_version = plan.map_version;
  bool done = false;
  if (Status s = CheckLiveMap(c, &done, &summary); !s.ok() || done) {
    if (!s.ok()) return s;
    return summary;
  }
  Result<StagedModel> staged = LoadStagedModel(step.env, plan.map_dir);
  if (!staged.ok()) return staged.status();
  EntryByTile entry_of;
  std::vector<std::string> skipped = plan.j.at("skipped").get<std::vector<std::string>>();
  if (Status s = ReadManifests(c, *staged, &entry_of, &skipped); !s.ok()) return s;
  Assembly a;
  if (Status s = AssembleTiles(c, *staged, entry_of, &a, &summary); !s.ok()) return s;
  FinishCatalog(c, *staged, skipped, &a, &summary);
  Say(c.o, "publish: " + std::to_string(summary.tiles) + " tiles, " +
               std::to_string(summary.images) + " images, map version " +
               std::to_string(plan.map_version));
  if (Status s = MoveAndSwitch(c, a); !s.ok()) return s;
  RemoveUnlistedTiles(step.env, plan.map_dir, a.catalog);
  step.env->RemoveTree(c.stage.string());
  summary.write_s = total.Seconds();
  summary.seconds = summary.write_s;
  return summary;
}

}  // namespace sightfix::staging

namespace sightfix {

Result<BuildSummary> PublishStep(const std::string& plan_path, const StepOptions& options) {
  Result<staging::Plan> plan = staging::LoadPlan(options.env, plan_path);
  if (!plan.ok()) return plan.status();
  return staging::PublishImpl(*plan, plan_path, options, false);
}

}  // namespace sightfix
