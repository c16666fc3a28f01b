#include "indexer/builder/map_builder.h"

#include <faiss/IndexFlatCodes.h>
#include <faiss/IndexIDMap.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>
#include <omp.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>
#include <set>

#include "indexer/base/geo.h"
#include "indexer/base/iso_time.h"
#include "indexer/base/parallel.h"
#include "indexer/base/progress.h"
#include "indexer/base/rotation.h"
#include "indexer/base/sha256.h"
#include "indexer/base/threads.h"
#include "indexer/builder/build_internal.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/map/map_store.h"

namespace sightfix {
namespace build_internal {

namespace fs = std::filesystem;

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

Status ExtractAll(const BuildOptions& o, Survey* s, std::vector<std::string>* skipped,
                  const FeatureCache* cache) {
  s->features.resize(s->rows.size());
  std::vector<Status> status(s->rows.size());
  std::vector<std::string> digest(s->rows.size());  // empty for cached rows
  std::unique_ptr<Progress> progress;
  if (o.progress) progress = std::make_unique<Progress>("survey images", s->rows.size());
  ParallelFor(static_cast<int>(s->rows.size()), ThreadCount(o.jobs), [&](int i) {
    if (cache) {
      auto hit = cache->find(s->rows[i].image);
      if (hit != cache->end()) {
        s->features[i] = hit->second;
        if (progress) progress->Advance();
        return;
      }
    }
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
    if (!status[i].ok() || digest[i].empty()) continue;
    auto [it, fresh] = first_of.emplace(digest[i], i);
    if (!fresh)
      status[i] = Status::InvalidArgument(Where(*s, i) + RowName(o, *s, i) +
                                          " is the same image as " + RowName(o, *s, it->second));
  }
  return DropBadRows(o, status, s, skipped);
}

Survey SubSurvey(const Survey& all, const std::vector<int>& rows) {
  Survey sub;
  sub.cameras = all.cameras;
  sub.boresight = all.boresight;
  sub.time_offset_s = all.time_offset_s;
  for (int i : rows) {
    sub.rows.push_back(all.rows[i]);
    sub.attitude_sigma_deg.push_back(all.attitude_sigma_deg[i]);
    sub.origin.push_back(all.origin.empty() ? std::string() : all.origin[i]);
    sub.camera_of_row.push_back(all.camera_of_row[i]);
  }
  return sub;
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

// Row i's velocity (ENU m/s) and yaw rate (rad/s, counterclockwise about up) from the same
// camera's rows within a second before and after it (central difference; one-sided at a gap;
// zero alone). A heading change of more than 45 deg between them is a turn-round, not a rate.
void RowMotion(const Survey& s, const EnuFrame& enu, size_t i, cv::Vec3d* velocity,
               double* yaw_rate) {
  constexpr double kSpanS = 1.0, kTurnRoundDeg = 45;
  const int cam = s.camera_of_row[i];
  const double t = s.rows[i].timestamp_s;
  auto near = [&](int step) {
    for (long k = static_cast<long>(i) + step; k >= 0 && k < static_cast<long>(s.rows.size());
         k += step) {
      if (std::abs(s.rows[k].timestamp_s - t) > kSpanS) break;
      if (s.camera_of_row[k] == cam && s.rows[k].timestamp_s != t) return static_cast<size_t>(k);
    }
    return i;
  };
  const size_t a = near(-1), b = near(+1);
  *velocity = cv::Vec3d(0, 0, 0), *yaw_rate = 0;
  const double dt = s.rows[b].timestamp_s - s.rows[a].timestamp_s;
  if (a == b || !(dt > 0)) return;
  const double turn_deg =
      std::remainder(s.rows[b].attitude.heading_deg - s.rows[a].attitude.heading_deg, 360.0);
  if (std::abs(turn_deg) > kTurnRoundDeg) return;
  *velocity = (enu.ToEnu(s.rows[b].position) - enu.ToEnu(s.rows[a].position)) / dt;
  *yaw_rate = -turn_deg * M_PI / 180 / dt;  // heading turns clockwise, ENU counterclockwise
}

std::vector<SurveyView> Views(const Survey& s, const EnuFrame& enu) {
  std::vector<SurveyView> views;
  for (size_t i = 0; i < s.rows.size(); ++i) {
    SurveyView v;
    v.enu_from_camera = EnuFromCamera(s.rows[i].attitude);
    if (!s.boresight.empty())
      v.enu_from_camera = v.enu_from_camera * s.boresight[s.camera_of_row[i]].t();
    v.center_enu = enu.ToEnu(s.rows[i].position);
    RowMotion(s, enu, i, &v.velocity_enu, &v.yaw_rate_rad_s);
    if (const double dt = s.time_offset_s.empty() ? 0 : s.time_offset_s[s.camera_of_row[i]]) {
      // The camera turned with the vehicle.
      v.enu_from_camera = RotationAboutUp(v.yaw_rate_rad_s * dt) * v.enu_from_camera;
      v.center_enu += v.velocity_enu * dt;
    }
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
  const Stopwatch watch(o.env);
  StructureOptions so = o.structure;
  so.jobs = o.jobs;
  Result<StructureResult> structure = BuildStructure(Views(s, enu), so);
  if (!structure.ok()) return structure.status();
  summary->structure = structure->summary;
  summary->structure_s = watch.Seconds();
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

double LocalFeatureBytes(const TileData& t) {
  double bytes = 0;
  for (const ReferenceImage& img : t.images)
    bytes += img.normalized.size() * (sizeof(cv::Point2f) + 128 + sizeof(int32_t));
  return bytes;
}

double PointBytes(const TileData& t) { return t.points.size() * (3 * 8 + 6 * 4 + 128 + 4.0); }

std::string NowIsoUtc(Env* env) {
  // SOURCE_DATE_EPOCH (reproducible-builds.org): a fixed clock makes two builds of one survey
  // byte-identical, catalog included.
  if (const char* fixed = std::getenv("SOURCE_DATE_EPOCH")) {
    char* end = nullptr;
    const long long t = std::strtoll(fixed, &end, 10);
    if (end != fixed && *end == '\0' && t >= 0) return FormatIsoUtc(static_cast<double>(t));
  }
  return FormatIsoUtc(static_cast<double>(env->NowUnixSeconds()));
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

void RemoveUnlistedTiles(Env* env, const std::string& map_dir, const Catalog& catalog) {
  std::set<std::string> listed;  // relative to map_dir
  for (const CatalogTile& t : catalog.tiles)
    listed.insert(fs::path(t.file).lexically_normal().string());
  const fs::path tiles = fs::path(map_dir) / "tiles";
  if (!env->FileExists(tiles.string())) return;
  Result<std::vector<std::string>> files = env->ListDirectory(tiles.string(), true);
  if (!files.ok()) return;
  for (const std::string& f : *files)
    if (!listed.count((fs::path("tiles") / f).lexically_normal().string()))
      env->RemoveFile((tiles / f).string());
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
  if (!o.env->FileExists(path)) return 1;
  if (!o.overwrite)
    return Status(StatusCode::kFailedPrecondition,
                  o.map_dir + " already holds a map; pass --overwrite to replace it");
  Result<Catalog> old = ReadCatalog(path);
  return old.ok() ? old->map_version + 1 : 1;
}

}  // namespace build_internal

using namespace build_internal;

nlohmann::json BuildSummaryJson(const BuildSummary& s) {
  return {{"images", s.images},
          {"input_format", s.input_format},
          {"skipped", s.skipped.size()},
          {"skipped_rows", s.skipped},
          {"tiles", s.tiles},
          {"points", s.points},
          {"map_version", s.map_version},
          {"model_id", s.model_id},
          {"codec", s.codec},
          {"training_vectors", s.training_vectors},
          {"seconds", s.seconds},
          {"images_per_s", s.images_per_s},
          {"stage_s",
           {{"features", s.feature_s},
            {"model", s.model_s},
            {"structure", s.structure_s},
            {"calibration", s.calibration_s},
            {"write", s.write_s}}},
          {"bytes_per_image",
           {{"global_code", s.global_code_bytes},
            {"local_features", s.local_feature_bytes},
            {"points", s.point_bytes},
            {"tile_file", s.tile_file_bytes}}},
          {"structure", StructureSummaryJson(s.structure)},
          {"cameras", s.cameras}};
}

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
  if (env == nullptr) return fail("env must not be null");
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
  if (calibration_frames < 3) return fail("calibration_frames must be >= 3");
  if (!calibration.Validate(&e)) return fail("calibration: " + e);
  return true;
}

bool StepOptions::Validate(std::string* error) const {
  const char* bad = jobs < 0         ? "jobs must be >= 0"
                    : env == nullptr ? "env must not be null"
                                     : nullptr;
  if (bad && error) *error = bad;
  return bad == nullptr;
}

}  // namespace sightfix
