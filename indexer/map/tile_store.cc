#include "indexer/map/tile_store.h"

#include <cstdlib>
#include <filesystem>

#include "indexer/map/sqlite_rows.h"

namespace sightfix {
namespace {

using namespace sqlite_rows;

constexpr char kTileSchema[] = R"sql(
CREATE TABLE meta(key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE cameras(id INTEGER PRIMARY KEY, width INTEGER, height INTEGER, fx REAL, fy REAL,
  cx REAL, cy REAL, k1 REAL, k2 REAL, p1 REAL, p2 REAL, k3 REAL, lens TEXT NOT NULL,
  focal_sigma_px REAL, k1_sigma REAL, k2_sigma REAL, boresight_sigma_deg REAL);
CREATE TABLE images(id INTEGER PRIMARY KEY, name TEXT NOT NULL, timestamp REAL, lat REAL,
  lon REAL, height REAL, heading_deg REAL, pitch_deg REAL, roll_deg REAL, sigma_h_m REAL,
  camera_id INTEGER, global_code BLOB, keypoints BLOB, descriptors BLOB, point_ids BLOB);
CREATE TABLE points(id INTEGER PRIMARY KEY, e REAL, n REAL, u REAL, covariance BLOB,
  descriptor BLOB, observations INTEGER);
CREATE TABLE retrieval(id INTEGER PRIMARY KEY, faiss_index BLOB NOT NULL);
)sql";

// ------------------------------------------------------------------------------------- write

Status WriteCameras(sqlite3* db, const TileData& t) {
  Result<Stmt> cam = Prepare(db, "INSERT INTO cameras VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)");
  if (!cam.ok()) return cam.status();
  for (size_t i = 0; i < t.cameras.size(); ++i) {
    const CameraModel& c = t.cameras[i];
    Binder b{cam->get()};
    b << static_cast<int>(i) << c.width_px << c.height_px << c.fx << c.fy << c.cx << c.cy;
    for (double d : c.distortion) b << d;
    b << std::string(c.lens == LensModel::kFisheye ? "fisheye" : "pinhole");
    const CalibrationUncertainty& u = c.uncertainty;
    b << u.focal_px << u.k1 << u.k2 << u.boresight_deg;
    if (Status s = StepDone(db, cam->get()); !s.ok()) return s;
  }
  return Status::Ok();
}

bool KeypointArraysAgree(const ReferenceImage& r) {
  return r.descriptors.rows == static_cast<int>(r.normalized.size()) &&
         r.point_ids.size() == r.normalized.size() &&
         (r.descriptors.rows == 0 || (r.descriptors.type() == CV_8U && r.descriptors.cols == 128));
}

Status WriteImages(sqlite3* db, const TileData& t) {
  Result<Stmt> img = Prepare(db, "INSERT INTO images VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)");
  if (!img.ok()) return img.status();
  for (const ReferenceImage& r : t.images) {
    if (!KeypointArraysAgree(r))
      return Status::InvalidArgument("image " + r.name + ": keypoint arrays disagree");
    const cv::Mat d = r.descriptors.isContinuous() ? r.descriptors : r.descriptors.clone();
    Binder b{img->get()};
    b << r.id << r.name << r.timestamp_s << r.position.lat_deg << r.position.lon_deg
      << r.position.height_m << r.attitude.heading_deg << r.attitude.pitch_deg
      << r.attitude.roll_deg << r.sigma_h_m << r.camera_id;
    b.Blob(r.global_code.data(), r.global_code.size());
    b.Blob(r.normalized.data(), r.normalized.size() * sizeof(cv::Point2f));
    b.Blob(d.data, d.total());
    b.Blob(r.point_ids.data(), r.point_ids.size() * sizeof(int32_t));
    if (Status s = StepDone(db, img->get()); !s.ok()) return s;
  }
  return Status::Ok();
}

Status WritePoints(sqlite3* db, const TileData& t) {
  Result<Stmt> pt = Prepare(db, "INSERT INTO points VALUES(?,?,?,?,?,?,?)");
  if (!pt.ok()) return pt.status();
  for (size_t i = 0; i < t.points.size(); ++i) {
    const MapPoint& p = t.points[i];
    const cv::Matx33d& c = p.covariance;
    const float cov[6] = {float(c(0, 0)), float(c(0, 1)), float(c(0, 2)),
                          float(c(1, 1)), float(c(1, 2)), float(c(2, 2))};
    Binder b{pt->get()};
    b << static_cast<int>(i) << p.enu[0] << p.enu[1] << p.enu[2];
    b.Blob(cov, sizeof(cov)).Blob(p.descriptor.data, p.descriptor.total()) << p.observations;
    if (Status s = StepDone(db, pt->get()); !s.ok()) return s;
  }
  return Status::Ok();
}

Status WriteTileRows(sqlite3* db, const TileData& t) {
  if (Status s = Exec(db, kTileSchema); !s.ok()) return s;
  if (Status s = InsertMeta(db, {{"format_version", std::to_string(kMapFormatVersion)},
                                 {"tile", t.key.ToString()},
                                 {"origin_lat", Num(t.origin.lat_deg)},
                                 {"origin_lon", Num(t.origin.lon_deg)},
                                 {"origin_height", Num(t.origin.height_m)},
                                 {"model_id", t.model_id},
                                 {"map_version", std::to_string(t.map_version)}});
      !s.ok())
    return s;
  if (Status s = WriteCameras(db, t); !s.ok()) return s;
  if (Status s = WriteImages(db, t); !s.ok()) return s;
  if (Status s = WritePoints(db, t); !s.ok()) return s;
  Result<Stmt> ix = Prepare(db, "INSERT INTO retrieval VALUES(0,?)");
  if (!ix.ok()) return ix.status();
  Binder{ix->get()}.Blob(t.retrieval_index.data(), t.retrieval_index.size());
  return StepDone(db, ix->get());
}

// -------------------------------------------------------------------------------------- read

// One images row; false when its blobs or ids are inconsistent with the tile read so far.
bool ReadImageRow(sqlite3_stmt* s, const TileData& t, ReferenceImage* r) {
  r->id = sqlite3_column_int(s, 0);
  r->name = ColumnText(s, 1);
  r->timestamp_s = sqlite3_column_double(s, 2);
  r->position = {sqlite3_column_double(s, 3), sqlite3_column_double(s, 4),
                 sqlite3_column_double(s, 5)};
  r->attitude = {sqlite3_column_double(s, 6), sqlite3_column_double(s, 7),
                 sqlite3_column_double(s, 8)};
  r->sigma_h_m = sqlite3_column_double(s, 9);
  r->camera_id = sqlite3_column_int(s, 10);
  r->global_code = ColumnBlob(s, 11);
  std::vector<uint8_t> desc;
  if (!BlobTo(s, 12, &r->normalized) || !BlobTo(s, 13, &desc) || !BlobTo(s, 14, &r->point_ids) ||
      desc.size() != r->normalized.size() * 128 || r->point_ids.size() != r->normalized.size() ||
      r->id != static_cast<int>(t.images.size()) || r->camera_id < 0 ||
      r->camera_id >= static_cast<int>(t.cameras.size()))
    return false;
  r->descriptors = cv::Mat(static_cast<int>(r->normalized.size()), 128, CV_8U);
  if (!desc.empty()) std::memcpy(r->descriptors.data, desc.data(), desc.size());
  return true;
}

Status ReadImages(sqlite3* db, const std::string& path, TileData* t) {
  Result<Stmt> st = Prepare(db, "SELECT * FROM images ORDER BY id");
  if (!st.ok()) return st.status();
  sqlite3_stmt* s = st->get();
  if (sqlite3_column_count(s) != 15)
    return Status::Corrupt(path + ": images table has another shape");
  int rc;
  while ((rc = sqlite3_step(s)) == SQLITE_ROW) {
    ReferenceImage r;
    if (!ReadImageRow(s, *t, &r))
      return Status::Corrupt(path + ": image row " + std::to_string(r.id) + " is inconsistent");
    t->images.push_back(std::move(r));
  }
  return Finished(db, rc, "images");
}

Status ReadPoints(sqlite3* db, const std::string& path, TileData* t) {
  Result<Stmt> st = Prepare(db,
                            "SELECT e, n, u, covariance, descriptor, observations FROM points "
                            "ORDER BY id");
  if (!st.ok()) return st.status();
  sqlite3_stmt* s = st->get();
  int rc;
  while ((rc = sqlite3_step(s)) == SQLITE_ROW) {
    MapPoint p;
    p.enu = {sqlite3_column_double(s, 0), sqlite3_column_double(s, 1), sqlite3_column_double(s, 2)};
    std::vector<float> c;
    std::vector<uint8_t> d;
    if (!BlobTo(s, 3, &c) || c.size() != 6 || !BlobTo(s, 4, &d) || d.size() != 128)
      return Status::Corrupt(path + ": point row " + std::to_string(t->points.size()) + " is bad");
    p.covariance = {c[0], c[1], c[2], c[1], c[3], c[4], c[2], c[4], c[5]};
    p.descriptor = cv::Mat(1, 128, CV_8U);
    std::memcpy(p.descriptor.data, d.data(), 128);
    p.observations = sqlite3_column_int(s, 5);
    t->points.push_back(std::move(p));
  }
  if (Status f = Finished(db, rc, "points"); !f.ok()) return f;
  for (const ReferenceImage& r : t->images)
    for (int32_t id : r.point_ids)
      if (id < -1 || id >= static_cast<int32_t>(t->points.size()))
        return Status::Corrupt(path + ": image " + r.name + " names a missing point");
  return Status::Ok();
}

Status ReadCameraRow(sqlite3_stmt* s, const std::string& path, CameraModel* c) {
  c->width_px = sqlite3_column_int(s, 1);
  c->height_px = sqlite3_column_int(s, 2);
  c->fx = sqlite3_column_double(s, 3), c->fy = sqlite3_column_double(s, 4);
  c->cx = sqlite3_column_double(s, 5), c->cy = sqlite3_column_double(s, 6);
  for (int i = 0; i < 5; ++i) c->distortion[i] = sqlite3_column_double(s, 7 + i);
  const std::string lens_name = ColumnText(s, 12);
  if (lens_name != "pinhole" && lens_name != "fisheye")
    return Status::Corrupt(path + ": camera: lens must be pinhole or fisheye");
  c->lens = lens_name == "fisheye" ? LensModel::kFisheye : LensModel::kPinhole;
  CalibrationUncertainty& u = c->uncertainty;
  u.focal_px = sqlite3_column_double(s, 13), u.k1 = sqlite3_column_double(s, 14);
  u.k2 = sqlite3_column_double(s, 15), u.boresight_deg = sqlite3_column_double(s, 16);
  std::string error;
  if (!c->IsValid(&error)) return Status::Corrupt(path + ": camera: " + error);
  return Status::Ok();
}

Status ReadCameras(sqlite3* db, const std::string& path, TileData* t) {
  Result<Stmt> st = Prepare(db, "SELECT * FROM cameras ORDER BY id");
  if (!st.ok()) return st.status();
  sqlite3_stmt* s = st->get();
  if (sqlite3_column_count(s) != 17)
    return Status::Corrupt(path + ": cameras table has another shape");
  int rc;
  while ((rc = sqlite3_step(s)) == SQLITE_ROW) {
    CameraModel c;
    if (Status bad = ReadCameraRow(s, path, &c); !bad.ok()) return bad;
    t->cameras.push_back(c);
  }
  return Finished(db, rc, "cameras");
}

// The tile's meta table into *t (key, origin, model id, version); the format version checked.
Status ReadTileMeta(sqlite3* db, const std::string& path, TileData* t) {
  Result<MetaRows> meta = ReadMetaOf(db, path, "tile");
  if (!meta.ok()) return meta.status();
  if (MetaValue(*meta, "format_version") != std::to_string(kMapFormatVersion))
    return Status::Corrupt(path + ": tile format version '" + MetaValue(*meta, "format_version") +
                           "', this build reads " + std::to_string(kMapFormatVersion));
  Result<TileKey> key = ParseTileKey(MetaValue(*meta, "tile"));
  if (!key.ok()) return Status::Corrupt(path + ": " + key.status().message());
  t->key = *key;
  t->origin = {std::atof(MetaValue(*meta, "origin_lat").c_str()),
               std::atof(MetaValue(*meta, "origin_lon").c_str()),
               std::atof(MetaValue(*meta, "origin_height").c_str())};
  t->model_id = MetaValue(*meta, "model_id");
  t->map_version = std::atoi(MetaValue(*meta, "map_version").c_str());
  return Status::Ok();
}

}  // namespace

std::string TileFileName(const TileKey& key, int map_version) {
  return "tiles/" + std::to_string(key.zoom) + "/" + std::to_string(key.x) + "/" +
         std::to_string(key.y) + "-v" + std::to_string(map_version) + ".sqlite";
}

Status WriteTile(const std::string& path, const TileData& tile, Env* env) {
  return WriteSqliteAtomically(env, path, [&](sqlite3* db) { return WriteTileRows(db, tile); });
}

Result<TileData> ReadTile(const std::string& path) {
  if (!std::filesystem::exists(path)) return Status::NotFound("no tile file " + path);
  Result<Db> db = OpenDb(path, false);
  if (!db.ok()) return db.status();
  TileData t;
  if (Status s = ReadTileMeta(db->get(), path, &t); !s.ok()) return s;
  for (Status s : {ReadCameras(db->get(), path, &t), ReadImages(db->get(), path, &t),
                   ReadPoints(db->get(), path, &t)})
    if (!s.ok()) return s;
  Result<Stmt> st = Prepare(db->get(), "SELECT faiss_index FROM retrieval WHERE id = 0");
  if (!st.ok()) return st.status();
  if (sqlite3_step(st->get()) != SQLITE_ROW) return Status::Corrupt(path + ": no retrieval index");
  t.retrieval_index = ColumnBlob(st->get(), 0);
  return t;
}

}  // namespace sightfix
