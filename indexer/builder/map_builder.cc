#include "indexer/builder/map_builder.h"

#include <faiss/IndexFlatCodes.h>
#include <faiss/IndexIDMap.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>
#include <omp.h>

#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>
#include <optional>
#include <set>

#include "indexer/builder/build_internal.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/base/geo.h"
#include "indexer/base/iso_time.h"
#include "indexer/map/map_lock.h"
#include "indexer/map/map_store.h"
#include "indexer/base/parallel.h"
#include "indexer/base/progress.h"
#include "indexer/base/rotation.h"
#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"

namespace sightfix {
namespace build_internal {

namespace fs = std::filesystem;

double SecondsSince(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

void Say(const BuildOptions& o, const std::string& line) {
  if (o.progress) std::fprintf(stderr, "indexer: %s\n", line.c_str());
}

// The image file of a row.
std::string RowName(const BuildOptions& o, const Survey& s, size_t i) {
  return (fs::path(o.drive_dir) / s.rows[i].image).string();
}

// Where a row came from ("<drive.csv>:<line>", or the image), for messages.
std::string Where(const Survey& s, size_t i) {
  return s.origin.size() > i && !s.origin[i].empty() ? s.origin[i] + ": " : "";
}

// Keeps the rows whose status is OK (all of them unless skip_bad); the first bad one fails the
// build otherwise. Bad rows are listed in *skipped.
Status DropBadRows(const BuildOptions& o, const std::vector<Status>& status, Survey* s,
                   std::vector<std::string>* skipped) {
  Survey kept;
  for (size_t i = 0; i < s->rows.size(); ++i) {
    if (!status[i].ok()) {
      if (!o.skip_bad) return status[i];
      skipped->push_back(status[i].message());
      continue;
    }
    kept.rows.push_back(s->rows[i]);
    kept.attitude_sigma_deg.push_back(s->attitude_sigma_deg[i]);
    if (!s->origin.empty()) kept.origin.push_back(s->origin[i]);
    if (!s->camera_of_row.empty()) kept.camera_of_row.push_back(s->camera_of_row[i]);
    if (!s->features.empty()) kept.features.push_back(std::move(s->features[i]));
  }
  kept.cameras = std::move(s->cameras);
  *s = std::move(kept);
  return Status::Ok();
}

Status LoadCameras(const BuildOptions& o, Survey* s, std::vector<std::string>* skipped) {
  std::map<std::string, int> by_name;
  std::map<std::string, Status> failed;
  std::vector<Status> status(s->rows.size());
  for (size_t i = 0; i < s->rows.size(); ++i) {
    const std::string& name = s->rows[i].camera;
    auto it = by_name.find(name);
    if (it == by_name.end() && !failed.count(name)) {
      Result<CameraModel> cam = LoadCameraModel((fs::path(o.drive_dir) / name).string());
      if (cam.ok()) {
        it = by_name.emplace(name, static_cast<int>(s->cameras.size())).first;
        s->cameras.push_back(*cam);
      } else {
        failed.emplace(name, cam.status());
      }
    }
    if (it == by_name.end()) {
      status[i] = Status(failed.at(name).code(), Where(*s, i) + failed.at(name).message());
      s->camera_of_row.push_back(-1);
    } else {
      s->camera_of_row.push_back(it->second);
    }
  }
  return DropBadRows(o, status, s, skipped);
}

std::string ReadFileBytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary | std::ios::ate);
  if (!in) return {};
  std::string bytes(static_cast<size_t>(in.tellg()), '\0');
  in.seekg(0);
  in.read(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  return in ? bytes : std::string();
}

Status ExtractAll(const BuildOptions& o, Survey* s, std::vector<std::string>* skipped) {
  s->features.resize(s->rows.size());
  std::vector<Status> status(s->rows.size());
  std::vector<std::string> digest(s->rows.size());
  std::unique_ptr<Progress> progress;
  if (o.progress) progress = std::make_unique<Progress>("survey images", s->rows.size());
  ParallelFor(static_cast<int>(s->rows.size()), ThreadCount(o.jobs), [&](int i) {
    const std::string path = RowName(o, *s, i);
    const std::string bytes = ReadFileBytes(path);
    const cv::Mat img = bytes.empty()
                            ? cv::Mat()
                            : cv::imdecode(cv::Mat(1, static_cast<int>(bytes.size()), CV_8U,
                                                   const_cast<char*>(bytes.data())),
                                           cv::IMREAD_GRAYSCALE);
    if (img.empty()) {
      status[i] = Status::InvalidArgument(Where(*s, i) + "cannot read or decode image " + path);
    } else {
      digest[i] = Sha256Hex(bytes.data(), bytes.size());
      Result<LocalFeatures> f = ExtractFeatures(img, &s->cameras[s->camera_of_row[i]], o.features);
      if (f.ok())
        s->features[i] = std::move(f).value();
      else
        status[i] = Status::InvalidArgument(Where(*s, i) + path + ": " + f.status().message());
    }
    if (progress) progress->Advance();
  });
  std::map<std::string, size_t> first_of;  // the same bytes twice: the later row is bad
  for (size_t i = 0; i < s->rows.size(); ++i) {
    if (!status[i].ok()) continue;
    auto [it, fresh] = first_of.emplace(digest[i], i);
    if (!fresh)
      status[i] = Status::InvalidArgument(Where(*s, i) + RowName(o, *s, i) +
                                          " is the same image as " + RowName(o, *s, it->second));
  }
  return DropBadRows(o, status, s, skipped);
}

Result<GlobalDescriptor> TrainModel(const BuildOptions& o, const Survey& s, int* vectors) {
  cv::Mat sample;
  std::vector<cv::Mat> images;
  for (const LocalFeatures& f : s.features) {
    sample.push_back(f.descriptors.rowRange(0, std::min(f.descriptors.rows, o.vocabulary_sample)));
    images.push_back(f.descriptors);
  }
  const int n = static_cast<int>(images.size());
  const int need = o.descriptor.min_pq_training - n;
  const int per_image = need > 0 ? std::min(o.max_crop_views, (need + n - 1) / n) : 0;
  std::vector<cv::Mat> crops;
  for (int i = 0; i < n; ++i) {
    const CameraModel& cam = s.cameras[s.camera_of_row[i]];
    for (cv::Mat& v : CropViews(s.features[i], cam.width_px, cam.height_px, per_image, i))
      crops.push_back(std::move(v));
  }
  *vectors = n + static_cast<int>(crops.size());
  return GlobalDescriptor::Train(sample, images, crops, o.descriptor);
}

// Every image's code under a model.
cv::Mat EncodeAll(const GlobalDescriptor& model, const Survey& s) {
  std::vector<cv::Mat> descriptors;
  for (const LocalFeatures& f : s.features) descriptors.push_back(f.descriptors);
  return model.Encode(model.Whiten(model.VladRows(descriptors)));
}

struct TrainedModel {
  GlobalDescriptor model;
  cv::Mat codes;              // one row per survey row
  std::vector<uint8_t> blob;  // GlobalDescriptor::Serialize
};

// Trains a model on the survey and encodes it; fills the summary's model fields.
Result<TrainedModel> TrainAndEncode(const BuildOptions& o, const Survey& s, BuildSummary* summary) {
  const auto t0 = Clock::now();
  Result<GlobalDescriptor> model = TrainModel(o, s, &summary->training_vectors);
  if (!model.ok()) return model.status();
  TrainedModel t{std::move(model).value(), cv::Mat(), {}};
  t.codes = EncodeAll(t.model, s);
  t.blob = t.model.Serialize();
  summary->model_id = Sha256Hex(t.blob).substr(0, 16);
  summary->codec = t.model.codec_name();
  summary->model_s = SecondsSince(t0);
  return t;
}

struct Posed {
  std::vector<cv::Matx33d> enu_from_camera;
  std::vector<cv::Vec3d> center;
};

std::vector<SurveyView> Views(const Survey& s, const EnuFrame& enu) {
  std::vector<SurveyView> views;
  for (size_t i = 0; i < s.rows.size(); ++i) {
    SurveyView v;
    v.enu_from_camera = EnuFromCamera(s.rows[i].attitude);
    v.center_enu = enu.ToEnu(s.rows[i].position);
    v.sigma_h_m = s.rows[i].sigma_h_m;
    v.focal_px = 0.5 * (s.cameras[s.camera_of_row[i]].fx + s.cameras[s.camera_of_row[i]].fy);
    v.attitude_sigma_deg = s.attitude_sigma_deg[i];
    v.features = &s.features[i];
    views.push_back(v);
  }
  return views;
}

// Tracks, triangulation and bundle adjustment over a survey; fills the summary's structure
// figures and time.
Result<StructureResult> Adjust(const BuildOptions& o, const Survey& s, const EnuFrame& enu,
                               BuildSummary* summary) {
  const auto t0 = Clock::now();
  StructureOptions so = o.structure;
  so.jobs = o.jobs;
  Result<StructureResult> structure = BuildStructure(Views(s, enu), so);
  if (!structure.ok()) return structure.status();
  summary->structure = structure->summary;
  summary->structure_s = SecondsSince(t0);
  return structure;
}

std::vector<uint8_t> IndexBytes(const faiss::Index& index) {
  faiss::VectorIOWriter w;
  faiss::write_index(&index, &w);
  return std::move(w.data);
}

TileData MakeTile(const Built& b, const TileKey& key, const std::vector<int>& rows) {
  TileData t;
  t.key = key;
  t.model_id = b.model_id;
  t.map_version = b.map_version;
  const TileBounds bounds = BoundsOfTile(key);
  double mean_h = 0;
  for (int r : rows) mean_h += b.survey->rows[r].position.height_m / rows.size();
  t.origin = {0.5 * (bounds.south_deg + bounds.north_deg),
              0.5 * (bounds.west_deg + bounds.east_deg), std::round(mean_h)};
  const EnuFrame tile_enu(t.origin);
  t.cameras = b.survey->cameras;
  std::map<int, int> point_index;  // structure point -> tile point
  std::map<std::pair<int, int>, int> point_of;
  for (size_t p = 0; p < b.structure->points.size(); ++p)
    for (auto ob : b.structure->points[p].observations) point_of[ob] = static_cast<int>(p);
  cv::Mat tile_codes;
  for (int r : rows) {
    const DriveRow& row = b.survey->rows[r];
    const LocalFeatures& f = b.survey->features[r];
    ReferenceImage img;
    img.id = static_cast<int>(t.images.size());
    img.name = row.image;
    img.timestamp_s = row.timestamp_s;
    img.position = b.enu->ToGeo(b.structure->center_enu[r]);
    img.attitude = AttitudeFromEnuFromCamera(b.structure->enu_from_camera[r]);
    img.sigma_h_m = row.sigma_h_m;
    img.camera_id = b.survey->camera_of_row[r];
    img.global_code.assign(b.codes.ptr<uint8_t>(r), b.codes.ptr<uint8_t>(r) + b.codes.cols);
    for (const cv::Point2d& n : f.normalized) img.normalized.emplace_back(n);
    img.descriptors = CompactDescriptors(f.descriptors);
    img.point_ids.assign(f.keypoints.size(), -1);
    for (size_t k = 0; k < f.keypoints.size(); ++k) {
      auto it = point_of.find({r, static_cast<int>(k)});
      if (it == point_of.end()) continue;
      auto [slot, fresh] = point_index.emplace(it->second, static_cast<int>(t.points.size()));
      if (fresh) {
        const StructurePoint& sp = b.structure->points[it->second];
        MapPoint mp;
        mp.enu = tile_enu.ToEnu(b.enu->ToGeo(sp.enu));
        mp.covariance = sp.covariance;
        const auto [v, kp] = sp.observations[sp.representative];
        mp.descriptor = CompactDescriptors(b.survey->features[v].descriptors.row(kp));
        mp.observations = static_cast<int>(sp.observations.size());
        t.points.push_back(mp);
      }
      img.point_ids[k] = slot->second;
    }
    tile_codes.push_back(b.codes.row(r));
    t.images.push_back(std::move(img));
  }
  t.retrieval_index = IndexBytes(*b.model->MakeIndex(tile_codes));
  return t;
}

std::string NowIsoUtc() {
  // SOURCE_DATE_EPOCH (reproducible-builds.org): a fixed clock makes two builds of one survey
  // byte-identical, catalog included.
  if (const char* fixed = std::getenv("SOURCE_DATE_EPOCH")) {
    char* end = nullptr;
    const long long t = std::strtoll(fixed, &end, 10);
    if (end != fixed && *end == '\0' && t >= 0) return FormatIsoUtc(static_cast<double>(t));
  }
  return FormatIsoUtc(static_cast<double>(std::chrono::duration_cast<std::chrono::seconds>(
                                              std::chrono::system_clock::now().time_since_epoch())
                                              .count()));
}

nlohmann::json ModelParams(const GlobalDescriptor& g, int training_vectors) {
  const GlobalDescriptorOptions& d = g.options();
  return {{"global", "VLAD+PCA+" + g.codec_name()},
          {"clusters", d.clusters},
          {"pca_dims", d.pca_dims},
          {"pca_epsilon", d.pca_epsilon},
          {"code_bytes", g.code_bytes()},
          {"training_vectors", training_vectors},
          {"local", "rootsift"}};
}

// A tile an `add` leaves alone: its catalog entry and its images' codes (for the global index).
struct CarriedTile {
  CatalogTile entry;
  cv::Mat codes;  // one row per image, in image id order
};

// Fault injection for the crash-safety test: SIGHTFIX_KILL_AT=<point> makes the process kill
// itself with SIGKILL at that point ("tile:N" after the N-th tile file, "catalog" before the
// catalog is switched, "cleanup" after the switch, before old files go).
void MaybeKillAt(const std::string& point) {
  static const char* at = std::getenv("SIGHTFIX_KILL_AT");
  if (at && point == at) std::raise(SIGKILL);
}

std::vector<uint8_t> GlobalIndex(const GlobalDescriptor& model, const cv::Mat& codes,
                                 const std::vector<faiss::Index::idx_t>& ids) {
  // FAISS wraps only an empty index; the codes go in afterwards, already encoded.
  faiss::IndexIDMap global(model.MakeIndex(cv::Mat(0, model.code_bytes(), CV_8U)).release());
  global.own_fields = true;
  auto* inner = dynamic_cast<faiss::IndexFlatCodes*>(global.index);
  inner->codes.assign(codes.ptr<uint8_t>(), codes.ptr<uint8_t>() + codes.total());
  inner->ntotal = global.ntotal = static_cast<faiss::Index::idx_t>(ids.size());
  global.id_map = ids;
  return IndexBytes(global);
}

// Writes the tiles of b's rows (grouped by tile_of_row) under new versioned names, then the
// catalog listing them and the carried tiles, renamed into place last. Fills the byte counts.
Status Publish(const BuildOptions& o, const Built& b, const std::vector<TileKey>& tile_of_row,
               const std::vector<CarriedTile>& carried, Catalog& catalog, BuildSummary* summary) {
  std::map<TileKey, std::vector<int>> by_tile;
  for (size_t r = 0; r < b.survey->rows.size(); ++r)
    by_tile[tile_of_row[r]].push_back(static_cast<int>(r));
  cv::Mat all_codes;
  std::vector<faiss::Index::idx_t> ids;
  double local_bytes = 0, point_bytes = 0, file_bytes = 0;
  int written = 0;
  // On a failure (a full disk, say) this run's files go again: the catalog never named them,
  // and the map stays what it was.
  std::vector<std::string> new_files;
  auto undo = [&new_files](Status s) {
    std::error_code ec;
    for (const std::string& f : new_files) fs::remove(f, ec);
    return s;
  };
  for (const auto& [key, rows] : by_tile) {
    const TileData tile = MakeTile(b, key, rows);
    const std::string rel = TileFileName(key, b.map_version);
    const std::string path = (fs::path(o.map_dir) / rel).string();
    if (Status s = WriteTile(path, tile); !s.ok()) return undo(s);
    new_files.push_back(path);
    MaybeKillAt("tile:" + std::to_string(++written));
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok()) return undo(sha.status());
    const int ordinal = static_cast<int>(catalog.tiles.size());
    catalog.tiles.push_back({key, rel, *sha, static_cast<int>(tile.images.size()),
                             static_cast<int>(tile.points.size()), b.model_id});
    for (const ReferenceImage& img : tile.images) {
      all_codes.push_back(b.codes.row(rows[img.id]));
      ids.push_back(GlobalImageId(ordinal, img.id));
      local_bytes += img.normalized.size() * (sizeof(cv::Point2f) + 128 + sizeof(int32_t));
    }
    point_bytes += tile.points.size() * (3 * 8 + 6 * 4 + 128 + 4);
    file_bytes += fs::file_size(path);
    summary->points += static_cast<int>(tile.points.size());
  }
  for (const CarriedTile& c : carried) {
    const int ordinal = static_cast<int>(catalog.tiles.size());
    catalog.tiles.push_back(c.entry);
    for (int i = 0; i < c.codes.rows; ++i) {
      all_codes.push_back(c.codes.row(i));
      ids.push_back(GlobalImageId(ordinal, i));
    }
  }
  catalog.global_index = GlobalIndex(*b.model, all_codes, ids);
  const double n = std::max<double>(1, b.survey->rows.size());
  summary->tiles = static_cast<int>(catalog.tiles.size());
  summary->global_code_bytes = b.codes.cols;
  summary->local_feature_bytes = local_bytes / n;
  summary->point_bytes = point_bytes / n;
  summary->tile_file_bytes = file_bytes / n;
  MaybeKillAt("catalog");
  Status s = WriteCatalog((fs::path(o.map_dir) / "catalog.sqlite").string(), catalog);
  return s.ok() ? s : undo(s);
}

// After the switch: tile files no catalog entry names (the versions it replaced, leftovers of
// an interrupted run) go.
void RemoveUnlistedTiles(const std::string& map_dir, const Catalog& catalog) {
  MaybeKillAt("cleanup");
  std::set<std::string> listed;
  for (const CatalogTile& t : catalog.tiles)
    listed.insert((fs::path(map_dir) / t.file).lexically_normal().string());
  const fs::path tiles = fs::path(map_dir) / "tiles";
  if (!fs::exists(tiles)) return;
  std::vector<fs::path> stale;
  for (const auto& e : fs::recursive_directory_iterator(tiles))
    if (e.is_regular_file() && !listed.count(e.path().lexically_normal().string()))
      stale.push_back(e.path());
  std::error_code ec;
  for (const fs::path& p : stale) fs::remove(p, ec);
}

nlohmann::json DriveRecord(const BuildOptions& o, const BuildSummary& s) {
  return {{"drive", fs::absolute(o.drive_dir).lexically_normal().string()},
          {"format", s.input_format},
          {"images", s.images},
          {"skipped", s.skipped.size()},
          {"added", NowIsoUtc()}};
}

Result<SurveyRows> ReadSurvey(const BuildOptions& o) {
  SurveySourceOptions so;
  so.dir = o.drive_dir;
  so.format = o.format;
  so.gpx = o.gpx;
  so.camera = o.camera;
  so.max_gap_s = o.max_gap_s;
  so.skip_bad = o.skip_bad;
  return LoadSurveyRows(so);
}

Result<int> NextMapVersion(const BuildOptions& o) {
  const std::string path = (fs::path(o.map_dir) / "catalog.sqlite").string();
  if (!fs::exists(path)) return 1;
  if (!o.overwrite)
    return Status(StatusCode::kFailedPrecondition,
                  o.map_dir + " already holds a map; pass --overwrite to replace it");
  Result<Catalog> old = ReadCatalog(path);
  return old.ok() ? old->map_version + 1 : 1;
}

}  // namespace build_internal

using namespace build_internal;

nlohmann::json StructureSummaryJson(const StructureSummary& st) {
  return {{"pairs", st.pairs},
          {"matches", st.matches},
          {"epipolar_matches", st.epipolar_matches},
          {"tracks", st.tracks},
          {"observations", st.observations},
          {"ba_initial_rms_px", st.ba_initial_rms_px},
          {"ba_final_rms_px", st.ba_final_rms_px}};
}

bool BuildOptions::Validate(std::string* error) const {
  auto fail = [&](const std::string& m) {
    if (error) *error = m;
    return false;
  };
  if (drive_dir.empty()) return fail("drive_dir is required");
  if (!(max_gap_s > 0)) return fail("max_gap_s must be > 0");
  if (map_dir.empty()) return fail("map_dir is required");
  if (zoom < 10 || zoom > 22) return fail("zoom must be within [10, 22]");
  if (jobs < 0) return fail("jobs must be >= 0");
  if (vocabulary_sample < 10) return fail("vocabulary_sample must be >= 10");
  if (max_crop_views < 0) return fail("max_crop_views must be >= 0");
  if (features.type != FeatureType::kRootSift) return fail("features: the map needs RootSIFT");
  std::string e;
  if (!features.Validate(&e)) return fail("features: " + e);
  if (!descriptor.Validate(&e)) return fail("descriptor: " + e);
  if (!structure.Validate(&e)) return fail("structure: " + e);
  return true;
}

namespace {

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
  const std::string path = (fs::path(o.map_dir) / "catalog.sqlite").string();
  if (!fs::exists(path)) return Status::NotFound("no map in " + o.map_dir + " (no catalog.sqlite)");
  Result<MapWriterLock> held = MapWriterLock::Acquire(o.map_dir);
  if (!held.ok()) return held.status();
  lock->emplace(std::move(held).value());
  return ReadCatalog(path);
}

// The survey of one new drive, ingested and checked as `build` does; names prefixed with the
// drive folder's name so they stay unique across drives.
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
  const std::string label = fs::absolute(o.drive_dir).lexically_normal().filename().string();
  for (DriveRow& r : s.rows) r.image = label + "/" + r.image;
  return s;
}

// Appends survey b's rows to a.
void AppendSurvey(Survey&& b, Survey* a) {
  const int base = static_cast<int>(a->cameras.size());
  for (CameraModel& c : b.cameras) a->cameras.push_back(c);
  for (size_t i = 0; i < b.rows.size(); ++i) {
    a->rows.push_back(b.rows[i]);
    a->attitude_sigma_deg.push_back(b.attitude_sigma_deg[i]);
    a->camera_of_row.push_back(base + b.camera_of_row[i]);
    a->features.push_back(std::move(b.features[i]));
  }
}

std::string TileNameOf(const std::string& map_dir, const CatalogTile& t) {
  return (fs::path(map_dir) / t.file).string();
}

}  // namespace

Result<BuildSummary> AddToMap(const BuildOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  PinLibraryThreads();
  const auto t_start = Clock::now();
  std::optional<MapWriterLock> lock;
  Result<Catalog> old = ExistingCatalog(o, &lock);
  if (!old.ok()) return old.status();
  Result<GlobalDescriptor> model = GlobalDescriptor::Deserialize(old->model_blob);
  if (!model.ok()) return model.status();
  BuildSummary summary;
  summary.map_version = old->map_version + 1;
  summary.model_id = old->model_id;
  summary.codec = model->codec_name();
  auto t0 = Clock::now();
  Result<Survey> fresh = IngestDrive(o, &summary);
  if (!fresh.ok()) return fresh.status();
  summary.images = static_cast<int>(fresh->rows.size());
  summary.feature_s = SecondsSince(t0);

  // Tiles the new drive touches are rebuilt with their old images; the others are carried.
  std::set<TileKey> touched;
  for (const DriveRow& r : fresh->rows)
    touched.insert(TileForPoint(r.position.lat_deg, r.position.lon_deg, old->zoom));
  Survey all;
  cv::Mat codes;
  std::vector<TileKey> tile_of_row;
  std::vector<CarriedTile> carried;
  for (const CatalogTile& ct : old->tiles) {
    Result<TileData> tile = ReadTile(TileNameOf(o.map_dir, ct));
    if (!tile.ok()) return tile.status();
    if (!touched.count(ct.key)) {
      CarriedTile c{ct, cv::Mat()};
      for (const ReferenceImage& img : tile->images) c.codes.push_back(CodeRow(img));
      carried.push_back(std::move(c));
      continue;
    }
    AppendTile(*tile, &all, &codes);
    tile_of_row.resize(all.rows.size(), ct.key);  // old images stay in their tile
  }
  codes.push_back(EncodeAll(*model, *fresh));
  AppendSurvey(std::move(fresh).value(), &all);

  Say(o, "matching, triangulating and adjusting the touched tiles with the new frames");
  const EnuFrame enu(all.rows[0].position);
  Result<StructureResult> structure = Adjust(o, all, enu, &summary);
  if (!structure.ok()) return structure.status();
  // New images go to the tile of their surveyed position: touched by construction, so no
  // carried tile ever gets a second version.
  for (size_t r = tile_of_row.size(); r < all.rows.size(); ++r)
    tile_of_row.push_back(
        TileForPoint(all.rows[r].position.lat_deg, all.rows[r].position.lon_deg, old->zoom));

  t0 = Clock::now();
  Say(o, "writing " + std::to_string(touched.size()) + " touched tiles and the catalog");
  Catalog catalog = *old;
  catalog.map_version = summary.map_version;
  catalog.tiles.clear();
  nlohmann::json provenance = nlohmann::json::parse(old->provenance, nullptr, false);
  if (!provenance.is_object()) provenance = nlohmann::json::object();
  if (!provenance.contains("drives") && provenance.contains("drive")) {  // maps before `add`
    provenance["drives"] = {{{"drive", provenance["drive"]}, {"images", provenance["images"]}}};
    provenance.erase("drive");
    provenance.erase("images");
  }
  provenance["drives"].push_back(DriveRecord(o, summary));
  catalog.provenance = provenance.dump();
  BuildOptions po = o;
  po.zoom = old->zoom;
  const Built built{&all, &*model, old->model_id, codes, &*structure, &enu, summary.map_version};
  if (Status st = Publish(po, built, tile_of_row, carried, catalog, &summary); !st.ok()) return st;
  RemoveUnlistedTiles(o.map_dir, catalog);
  summary.write_s = SecondsSince(t0);
  summary.seconds = SecondsSince(t_start);
  summary.images_per_s = summary.images / std::max(summary.seconds, 1e-9);
  return summary;
}

Result<BuildSummary> RetrainMap(const BuildOptions& o) {
  PinLibraryThreads();
  const auto t_start = Clock::now();
  std::optional<MapWriterLock> lock;
  Result<Catalog> old = ExistingCatalog(o, &lock);
  if (!old.ok()) return old.status();
  Survey all;
  cv::Mat old_codes;
  std::vector<TileData> tiles;
  for (const CatalogTile& ct : old->tiles) {
    Result<TileData> tile = ReadTile(TileNameOf(o.map_dir, ct));
    if (!tile.ok()) return tile.status();
    AppendTile(*tile, &all, &old_codes);
    tiles.push_back(std::move(tile).value());
  }
  BuildSummary summary;
  summary.images = static_cast<int>(all.rows.size());
  summary.map_version = old->map_version + 1;
  Say(o, "training a new global descriptor model on " + std::to_string(summary.images) + " images");
  Result<TrainedModel> trained = TrainAndEncode(o, all, &summary);
  if (!trained.ok()) return trained.status();
  const GlobalDescriptor* model = &trained->model;
  const cv::Mat& codes = trained->codes;
  const std::vector<uint8_t>& blob = trained->blob;

  auto t0 = Clock::now();
  Say(o, "rewriting every tile with the new codes");
  Catalog catalog = *old;
  catalog.map_version = summary.map_version;
  catalog.model_id = summary.model_id;
  catalog.model_blob = blob;
  catalog.model_params = ModelParams(*model, summary.training_vectors).dump();
  catalog.tiles.clear();
  std::vector<faiss::Index::idx_t> ids;
  int row = 0, written = 0;
  for (TileData& t : tiles) {
    const cv::Mat tile_codes = codes.rowRange(row, row + static_cast<int>(t.images.size()));
    for (size_t i = 0; i < t.images.size(); ++i) {
      t.images[i].global_code.assign(tile_codes.ptr<uint8_t>(i),
                                     tile_codes.ptr<uint8_t>(i) + codes.cols);
      ids.push_back(GlobalImageId(static_cast<int>(catalog.tiles.size()), static_cast<int>(i)));
    }
    row += static_cast<int>(t.images.size());
    t.model_id = summary.model_id;
    t.map_version = summary.map_version;
    t.retrieval_index = IndexBytes(*model->MakeIndex(tile_codes));
    const std::string rel = TileFileName(t.key, summary.map_version);
    const std::string path = (fs::path(o.map_dir) / rel).string();
    if (Status s = WriteTile(path, t); !s.ok()) return s;
    MaybeKillAt("tile:" + std::to_string(++written));
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok()) return sha.status();
    catalog.tiles.push_back({t.key, rel, *sha, static_cast<int>(t.images.size()),
                             static_cast<int>(t.points.size()), summary.model_id});
    summary.points += static_cast<int>(t.points.size());
  }
  summary.tiles = static_cast<int>(catalog.tiles.size());
  catalog.global_index = GlobalIndex(*model, codes, ids);
  MaybeKillAt("catalog");
  if (Status s = WriteCatalog((fs::path(o.map_dir) / "catalog.sqlite").string(), catalog); !s.ok())
    return s;
  RemoveUnlistedTiles(o.map_dir, catalog);
  summary.write_s = SecondsSince(t0);
  summary.seconds = SecondsSince(t_start);
  summary.images_per_s = summary.images / std::max(summary.seconds, 1e-9);
  return summary;
}

}  // namespace sightfix
