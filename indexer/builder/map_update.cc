// `add` and `retrain` (map_builder.h): the next version of a live map, written beside it under
// new versioned tile names, made live by one catalog switch, then the replaced files removed.
// Until the switch the previous catalog names only previous files, so a crash or an I/O error at
// any point leaves the previous map whole (docs/design.md 4.6); after it, the new map is whole.
#include <faiss/Index.h>

#include <algorithm>
#include <filesystem>
#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <set>

#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"
#include "indexer/builder/build_internal.h"
#include "indexer/builder/map_builder.h"
#include "indexer/builder/staging.h"
#include "indexer/map/map_lock.h"
#include "indexer/map/map_store.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;
using namespace build_internal;

std::string CatalogPath(const std::string& map_dir) {
  return (fs::path(map_dir) / "catalog.sqlite").string();
}

// Best effort: what will not go stays (an unlisted file, removed by the next switch).
void RemoveFiles(Env* env, const std::vector<std::string>& files) {
  for (const std::string& f : files) env->RemoveFile(f);
}

std::string TileNameOf(const std::string& map_dir, const CatalogTile& t) {
  return (fs::path(map_dir) / t.file).string();
}

// Features of a stored image, as the structure step wants them: keypoints back in pixels
// through its calibration, descriptors from the compact bytes.
LocalFeatures StoredFeatures(const ReferenceImage& img, const CameraModel& cam) {
  LocalFeatures f;
  f.type = FeatureType::kRootSift;
  img.descriptors.convertTo(f.descriptors, CV_32F, 1.0 / kRootSiftByteScale);
  for (const cv::Point2f& n : img.normalized) {
    f.normalized.emplace_back(n.x, n.y);
    f.keypoints.emplace_back(cam.Project(cv::Vec3d(n.x, n.y, 1)), 1.0f);
  }
  return f;
}

// A stored image's global code as a 1-row matrix (its own copy).
cv::Mat CodeRow(const ReferenceImage& img) {
  return cv::Mat(1, static_cast<int>(img.global_code.size()), CV_8U,
                 const_cast<uint8_t*>(img.global_code.data()))
      .clone();
}

// Appends a tile's images to a survey (rows, cameras, features) and their codes to *codes.
void AppendTile(const TileData& t, Survey* s, cv::Mat* codes) {
  const int camera_base = static_cast<int>(s->cameras.size());
  for (const CameraModel& c : t.cameras) s->cameras.push_back(c);
  for (const ReferenceImage& img : t.images) {
    DriveRow r;
    r.image = img.name;
    r.timestamp_s = img.timestamp_s;
    r.position = img.position;
    r.attitude = img.attitude;
    r.sigma_h_m = img.sigma_h_m;
    s->rows.push_back(r);
    s->attitude_sigma_deg.push_back(0);
    s->camera_of_row.push_back(camera_base + img.camera_id);
    s->features.push_back(StoredFeatures(img, t.cameras[img.camera_id]));
    codes->push_back(CodeRow(img));
  }
}

// The map's catalog, read under the writer lock (taken here, held by the caller for its run).
Result<Catalog> ExistingCatalog(const BuildOptions& o, std::optional<MapWriterLock>* lock) {
  const std::string path = CatalogPath(o.map_dir);
  if (!o.env->FileExists(path))
    return Status::NotFound("no map in " + o.map_dir + " (no catalog.sqlite)");
  Result<MapWriterLock> held = MapWriterLock::Acquire(o.map_dir);
  if (!held.ok()) return held.status();
  lock->emplace(std::move(held).value());
  return ReadCatalog(path);
}

// ------------------------------------------------------------------------------------- add

// A tile an `add` leaves alone: its catalog entry and its images' codes (for the global index).
struct CarriedTile {
  CatalogTile entry;
  cv::Mat codes;  // one row per image, in image id order
};

// The map-wide index's input: codes (one row per image) and their global ids.
struct GlobalCodes {
  cv::Mat codes;
  std::vector<faiss::Index::idx_t> ids;
};

// Self-calibration of a new drive's cameras as `build` does it (staging.h), on the features
// ingest extracted: the refined cameras and boresights replace the supplied ones and the
// keypoints are undistorted again through them. The old drives keep theirs: their tiles hold
// the refined cameras and attitudes with the boresight applied.
Status CalibrateDrive(const BuildOptions& o, Survey* s, BuildSummary* summary) {
  const Stopwatch watch(o.env);
  FeatureCache cache;
  for (size_t i = 0; i < s->rows.size(); ++i) cache[s->rows[i].image] = std::move(s->features[i]);
  summary->cameras = nlohmann::json::array();
  for (size_t c = 0; c < s->cameras.size(); ++c) summary->cameras.push_back(nlohmann::json{});
  const Status st = staging::CalibrateSurveyCameras(o, *s, &summary->cameras, &cache);
  for (size_t i = 0; i < s->rows.size(); ++i) s->features[i] = std::move(cache[s->rows[i].image]);
  if (!st.ok()) return st;
  for (size_t c = 0; c < s->cameras.size(); ++c) {
    Result<staging::CalibratedCamera> cal =
        staging::CalibratedCameraOf(summary->cameras[c], s->cameras[c]);
    if (!cal.ok()) return cal.status();
    s->cameras[c] = cal->camera;
    s->boresight.push_back(cal->boresight);
    s->time_offset_s.push_back(cal->time_offset_s);
  }
  for (size_t i = 0; i < s->rows.size(); ++i)
    NormalizeKeypoints(&s->cameras[s->camera_of_row[i]], &s->features[i]);
  summary->calibration_s = watch.Seconds();
  return Status::Ok();
}

// The survey of one new drive, ingested, checked and self-calibrated as `build` does; names
// prefixed with the drive folder's name so they stay unique across drives.
Result<Survey> IngestDrive(const BuildOptions& o, BuildSummary* summary) {
  Survey s;
  Result<SurveyRows> rows = ReadSurvey(o);
  if (!rows.ok()) return rows.status();
  summary->input_format = SurveyFormatName(rows->format);
  summary->skipped = rows->problems;
  s.rows = std::move(rows->rows);
  s.attitude_sigma_deg = std::move(rows->attitude_sigma_deg);
  s.origin = std::move(rows->origin);
  if (Status st = LoadCameras(o, &s, &summary->skipped); !st.ok()) return st;
  if (Status st = ExtractAll(o, &s, &summary->skipped); !st.ok()) return st;
  if (s.rows.empty()) return Status::InvalidArgument(o.drive_dir + ": no usable survey image");
  if (Status st = CalibrateDrive(o, &s, summary); !st.ok()) return st;
  const std::string label = fs::absolute(o.drive_dir).lexically_normal().filename().string();
  for (DriveRow& r : s.rows) r.image = label + "/" + r.image;
  return s;
}

// Appends survey b's rows to a.
void AppendSurvey(Survey&& b, Survey* a) {
  const int base = static_cast<int>(a->cameras.size());
  if (!a->boresight.empty() || !b.boresight.empty()) {  // empty means identity for all
    a->boresight.resize(base, cv::Matx33d::eye());
    b.boresight.resize(b.cameras.size(), cv::Matx33d::eye());
    a->boresight.insert(a->boresight.end(), b.boresight.begin(), b.boresight.end());
  }
  // The map's frames already sit at their images' times (their tiles hold the moved poses).
  if (!a->time_offset_s.empty() || !b.time_offset_s.empty()) {
    a->time_offset_s.resize(base, 0.0);
    b.time_offset_s.resize(b.cameras.size(), 0.0);
    a->time_offset_s.insert(a->time_offset_s.end(), b.time_offset_s.begin(), b.time_offset_s.end());
  }
  for (CameraModel& c : b.cameras) a->cameras.push_back(c);
  for (size_t i = 0; i < b.rows.size(); ++i) {
    a->rows.push_back(b.rows[i]);
    a->attitude_sigma_deg.push_back(b.attitude_sigma_deg[i]);
    a->camera_of_row.push_back(base + b.camera_of_row[i]);
    a->features.push_back(std::move(b.features[i]));
  }
}

// The old map split by an add: the stored images of the touched tiles (rows of *all, their codes
// in *codes, each row's tile in *tile_of_row) and the carried tiles as they are.
struct SplitMap {
  Survey all;
  cv::Mat codes;
  std::vector<TileKey> tile_of_row;
  std::vector<CarriedTile> carried;
};

Status SplitByTouch(const BuildOptions& o, const Catalog& old, const std::set<TileKey>& touched,
                    SplitMap* split) {
  for (const CatalogTile& ct : old.tiles) {
    Result<TileData> tile = ReadTile(TileNameOf(o.map_dir, ct));
    if (!tile.ok()) return tile.status();
    if (!touched.count(ct.key)) {
      CarriedTile c{ct, cv::Mat()};
      for (const ReferenceImage& img : tile->images) c.codes.push_back(CodeRow(img));
      split->carried.push_back(std::move(c));
      continue;
    }
    AppendTile(*tile, &split->all, &split->codes);
    split->tile_of_row.resize(split->all.rows.size(), ct.key);  // old images stay in their tile
  }
  return Status::Ok();
}

nlohmann::json DriveRecord(const BuildOptions& o, const BuildSummary& s) {
  return {{"drive", fs::absolute(o.drive_dir).lexically_normal().string()},
          {"format", s.input_format},
          {"images", s.images},
          {"skipped", s.skipped.size()},
          {"added", NowIsoUtc(o.env)},
          {"cameras", s.cameras}};
}

// The old provenance with this drive appended (maps before `add` recorded one drive inline).
std::string AddedProvenance(const BuildOptions& o, const Catalog& old, const BuildSummary& s) {
  nlohmann::json provenance = nlohmann::json::parse(old.provenance, nullptr, false);
  if (!provenance.is_object()) provenance = nlohmann::json::object();
  if (!provenance.contains("drives") && provenance.contains("drive")) {
    provenance["drives"] = {{{"drive", provenance["drive"]}, {"images", provenance["images"]}}};
    provenance.erase("drive");
    provenance.erase("images");
  }
  provenance["drives"].push_back(DriveRecord(o, s));
  return provenance.dump();
}

// Writes the tiles of b's rows (grouped by tile_of_row) under new versioned names, lists them in
// *catalog and their codes in *global; *written gets each file made. Fills the byte counts.
Status WriteTouchedTiles(const BuildOptions& o, const Built& b,
                         const std::vector<TileKey>& tile_of_row, Catalog* catalog,
                         GlobalCodes* global, BuildSummary* summary,
                         std::vector<std::string>* written) {
  std::map<TileKey, std::vector<int>> by_tile;
  for (size_t r = 0; r < b.survey->rows.size(); ++r)
    by_tile[tile_of_row[r]].push_back(static_cast<int>(r));
  double local_bytes = 0, point_bytes = 0, file_bytes = 0;
  for (const auto& [key, rows] : by_tile) {
    const TileData tile = MakeTile(b, key, rows);
    const std::string rel = TileFileName(key, b.map_version);
    const std::string path = (fs::path(o.map_dir) / rel).string();
    if (Status s = WriteTile(path, tile, o.env); !s.ok()) return s;
    written->push_back(path);
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok()) return sha.status();
    Result<uint64_t> size = o.env->FileSize(path);
    if (!size.ok()) return size.status();
    const int ordinal = static_cast<int>(catalog->tiles.size());
    catalog->tiles.push_back({key, rel, *sha, static_cast<int>(tile.images.size()),
                              static_cast<int>(tile.points.size()), b.model_id});
    for (const ReferenceImage& img : tile.images) {
      global->codes.push_back(b.codes.row(rows[img.id]));
      global->ids.push_back(GlobalImageId(ordinal, img.id));
    }
    local_bytes += LocalFeatureBytes(tile);
    point_bytes += PointBytes(tile);
    file_bytes += static_cast<double>(*size);
    summary->points += static_cast<int>(tile.points.size());
  }
  const double n = std::max<double>(1, b.survey->rows.size());
  summary->local_feature_bytes = local_bytes / n;
  summary->point_bytes = point_bytes / n;
  summary->tile_file_bytes = file_bytes / n;
  return Status::Ok();
}

// The touched tiles written, then the catalog listing them and the carried tiles, renamed into
// place last. On a failure (a full disk, say) this run's files go again: the catalog never named
// them, and the map stays what it was.
Status Publish(const BuildOptions& o, const Built& b, const SplitMap& split, Catalog* catalog,
               BuildSummary* summary) {
  GlobalCodes global;
  std::vector<std::string> written;
  auto undo = [&](Status s) {
    RemoveFiles(o.env, written);
    return s;
  };
  if (Status s = WriteTouchedTiles(o, b, split.tile_of_row, catalog, &global, summary, &written);
      !s.ok())
    return undo(s);
  for (const CarriedTile& c : split.carried) {
    const int ordinal = static_cast<int>(catalog->tiles.size());
    catalog->tiles.push_back(c.entry);
    for (int i = 0; i < c.codes.rows; ++i) {
      global.codes.push_back(c.codes.row(i));
      global.ids.push_back(GlobalImageId(ordinal, i));
    }
  }
  catalog->global_index = GlobalIndex(*b.model, global.codes, global.ids);
  summary->tiles = static_cast<int>(catalog->tiles.size());
  summary->global_code_bytes = b.codes.cols;
  Status s = WriteCatalog(CatalogPath(o.map_dir), *catalog, o.env);
  return s.ok() ? s : undo(s);
}

// --------------------------------------------------------------------------------- retrain

struct TrainedModel {
  GlobalDescriptor model;
  cv::Mat codes;              // one row per survey row
  std::vector<uint8_t> blob;  // GlobalDescriptor::Serialize
};

// Trains a model on the survey and encodes it; fills the summary's model fields.
Result<TrainedModel> TrainAndEncode(const BuildOptions& o, const Survey& s, BuildSummary* summary) {
  const Stopwatch watch(o.env);
  Result<GlobalDescriptor> model = TrainModel(o, s, &summary->training_vectors);
  if (!model.ok()) return model.status();
  TrainedModel t{std::move(model).value(), cv::Mat(), {}};
  t.codes = EncodeAll(t.model, s);
  t.blob = t.model.Serialize();
  summary->model_id = Sha256Hex(t.blob).substr(0, 16);
  summary->codec = t.model.codec_name();
  summary->model_s = watch.Seconds();
  return t;
}

// Every tile of the map read, its images appended to *all and their codes to *codes.
Status ReadAllTiles(const BuildOptions& o, const Catalog& old, Survey* all, cv::Mat* codes,
                    std::vector<TileData>* tiles) {
  for (const CatalogTile& ct : old.tiles) {
    Result<TileData> tile = ReadTile(TileNameOf(o.map_dir, ct));
    if (!tile.ok()) return tile.status();
    AppendTile(*tile, all, codes);
    tiles->push_back(std::move(tile).value());
  }
  return Status::Ok();
}

// Every tile rewritten under the new version with the trained model's codes and retrieval
// index, listed in *catalog; the map-wide ids in *ids; *written gets each file made.
Status RewriteTiles(const BuildOptions& o, const TrainedModel& trained,
                    std::vector<TileData>* tiles, Catalog* catalog, BuildSummary* summary,
                    std::vector<faiss::Index::idx_t>* ids, std::vector<std::string>* written) {
  const cv::Mat& codes = trained.codes;
  int row = 0;
  for (TileData& t : *tiles) {
    const cv::Mat tile_codes = codes.rowRange(row, row + static_cast<int>(t.images.size()));
    for (size_t i = 0; i < t.images.size(); ++i) {
      t.images[i].global_code.assign(tile_codes.ptr<uint8_t>(i),
                                     tile_codes.ptr<uint8_t>(i) + codes.cols);
      ids->push_back(GlobalImageId(static_cast<int>(catalog->tiles.size()), static_cast<int>(i)));
    }
    row += static_cast<int>(t.images.size());
    t.model_id = summary->model_id;
    t.map_version = summary->map_version;
    t.retrieval_index = IndexBytes(*trained.model.MakeIndex(tile_codes));
    const std::string rel = TileFileName(t.key, summary->map_version);
    const std::string path = (fs::path(o.map_dir) / rel).string();
    if (Status s = WriteTile(path, t, o.env); !s.ok()) return s;
    written->push_back(path);
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok()) return sha.status();
    catalog->tiles.push_back({t.key, rel, *sha, static_cast<int>(t.images.size()),
                              static_cast<int>(t.points.size()), summary->model_id});
    summary->points += static_cast<int>(t.points.size());
  }
  return Status::Ok();
}

}  // namespace

Result<BuildSummary> AddToMap(const BuildOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  PinLibraryThreads();
  const Stopwatch total(o.env);
  std::optional<MapWriterLock> lock;
  Result<Catalog> old = ExistingCatalog(o, &lock);
  if (!old.ok()) return old.status();
  Result<GlobalDescriptor> model = GlobalDescriptor::Deserialize(old->model_blob);
  if (!model.ok()) return model.status();
  BuildSummary summary;
  summary.map_version = old->map_version + 1;
  summary.model_id = old->model_id;
  summary.codec = model->codec_name();
  const Stopwatch ingest(o.env);
  Result<Survey> fresh = IngestDrive(o, &summary);
  if (!fresh.ok()) return fresh.status();
  summary.images = static_cast<int>(fresh->rows.size());
  summary.feature_s = ingest.Seconds() - summary.calibration_s;

  // Tiles the new drive touches are rebuilt with their old images; the others are carried.
  std::set<TileKey> touched;
  for (const DriveRow& r : fresh->rows)
    touched.insert(TileForPoint(r.position.lat_deg, r.position.lon_deg, old->zoom));
  SplitMap split;
  if (Status s = SplitByTouch(o, *old, touched, &split); !s.ok()) return s;
  split.codes.push_back(EncodeAll(*model, *fresh));
  AppendSurvey(std::move(fresh).value(), &split.all);
  Say(o, "matching, triangulating and adjusting the touched tiles with the new frames");
  const Survey& all = split.all;
  const EnuFrame enu(all.rows[0].position);
  Result<StructureResult> structure = Adjust(o, all, enu, &summary);
  if (!structure.ok()) return structure.status();
  // New images go to the tile of their surveyed position: touched by construction, so no
  // carried tile ever gets a second version.
  for (size_t r = split.tile_of_row.size(); r < all.rows.size(); ++r)
    split.tile_of_row.push_back(
        TileForPoint(all.rows[r].position.lat_deg, all.rows[r].position.lon_deg, old->zoom));

  const Stopwatch write(o.env);
  Say(o, "writing " + std::to_string(touched.size()) + " touched tiles and the catalog");
  Catalog catalog = *old;
  catalog.map_version = summary.map_version;
  catalog.tiles.clear();
  catalog.provenance = AddedProvenance(o, *old, summary);
  const Built built{&all,        &*model, old->model_id,      split.codes,
                    &*structure, &enu,    summary.map_version};
  if (Status st = Publish(o, built, split, &catalog, &summary); !st.ok()) return st;
  RemoveUnlistedTiles(o.env, o.map_dir, catalog);
  summary.write_s = write.Seconds();
  summary.seconds = total.Seconds();
  summary.images_per_s = summary.images / std::max(summary.seconds, 1e-9);
  return summary;
}

Result<BuildSummary> RetrainMap(const BuildOptions& o) {
  if (o.env == nullptr) return Status::InvalidArgument("env must not be null");
  PinLibraryThreads();
  const Stopwatch total(o.env);
  std::optional<MapWriterLock> lock;
  Result<Catalog> old = ExistingCatalog(o, &lock);
  if (!old.ok()) return old.status();
  Survey all;
  cv::Mat old_codes;
  std::vector<TileData> tiles;
  if (Status s = ReadAllTiles(o, *old, &all, &old_codes, &tiles); !s.ok()) return s;
  BuildSummary summary;
  summary.images = static_cast<int>(all.rows.size());
  summary.map_version = old->map_version + 1;
  Say(o, "training a new global descriptor model on " + std::to_string(summary.images) + " images");
  Result<TrainedModel> trained = TrainAndEncode(o, all, &summary);
  if (!trained.ok()) return trained.status();

  const Stopwatch write(o.env);
  Say(o, "rewriting every tile with the new codes");
  Catalog catalog = *old;
  catalog.map_version = summary.map_version;
  catalog.model_id = summary.model_id;
  catalog.model_blob = trained->blob;
  catalog.model_params = ModelParams(trained->model, summary.training_vectors).dump();
  catalog.tiles.clear();
  std::vector<faiss::Index::idx_t> ids;
  std::vector<std::string> written;  // on a failure they go again, as in add
  Status s = RewriteTiles(o, *trained, &tiles, &catalog, &summary, &ids, &written);
  if (s.ok()) {
    summary.tiles = static_cast<int>(catalog.tiles.size());
    catalog.global_index = GlobalIndex(trained->model, trained->codes, ids);
    s = WriteCatalog(CatalogPath(o.map_dir), catalog, o.env);
  }
  if (!s.ok()) {
    RemoveFiles(o.env, written);
    return s;
  }
  RemoveUnlistedTiles(o.env, o.map_dir, catalog);
  summary.write_s = write.Seconds();
  summary.seconds = total.Seconds();
  summary.images_per_s = summary.images / std::max(summary.seconds, 1e-9);
  return summary;
}

}  // namespace sightfix
