#include "indexer/map/map_store.h"

#include <fcntl.h>
#include <sqlite3.h>
#include <unistd.h>

#include <cstring>
#include <filesystem>
#include <fstream>
#include <memory>

#include "indexer/base/env.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

struct DbCloser {
  void operator()(sqlite3* db) const { sqlite3_close(db); }
};
struct StmtCloser {
  void operator()(sqlite3_stmt* s) const { sqlite3_finalize(s); }
};
using Db = std::unique_ptr<sqlite3, DbCloser>;
using Stmt = std::unique_ptr<sqlite3_stmt, StmtCloser>;

Result<Db> OpenDb(const std::string& path, bool write) {
  sqlite3* raw = nullptr;
  const int flags = write ? SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE : SQLITE_OPEN_READONLY;
  const int rc = sqlite3_open_v2(path.c_str(), &raw, flags, nullptr);
  Db db(raw);
  if (rc != SQLITE_OK)
    return Status::IoError("cannot open " + path + ": " +
                           (raw ? sqlite3_errmsg(raw) : sqlite3_errstr(rc)));
  // Another process holding a lock on the file (an operator's sqlite3 shell, say) is waited
  // for this long, then the call fails with "database is locked".
  sqlite3_busy_timeout(raw, 3000);
  return db;
}

Status Exec(sqlite3* db, const std::string& sql) {
  char* err = nullptr;
  if (sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &err) != SQLITE_OK) {
    Status s = Status::IoError(std::string("sqlite: ") + (err ? err : "error") +
                               " in: " + sql.substr(0, 60));
    sqlite3_free(err);
    return s;
  }
  return Status::Ok();
}

// A failed SQLite call as a Status: another process's lock is an I/O condition (try again
// later), anything else means the file is not what it should be.
Status SqliteError(sqlite3* db, int rc, const std::string& what) {
  const std::string m = std::string("sqlite: ") + sqlite3_errmsg(db) + " in: " + what;
  const int primary = rc & 0xff;
  if (primary == SQLITE_BUSY || primary == SQLITE_LOCKED || primary == SQLITE_IOERR ||
      primary == SQLITE_NOMEM || primary == SQLITE_CANTOPEN)
    return Status::IoError(m);
  return Status::Corrupt(m);
}

Result<Stmt> Prepare(sqlite3* db, const std::string& sql) {
  sqlite3_stmt* s = nullptr;
  if (int rc = sqlite3_prepare_v2(db, sql.c_str(), -1, &s, nullptr); rc != SQLITE_OK) {
    sqlite3_finalize(s);
    return SqliteError(db, rc, sql);
  }
  return Stmt(s);
}

// After a `while (step == SQLITE_ROW)` loop: OK only when the table was read to its end.
Status Finished(sqlite3* db, int rc, const char* table) {
  return rc == SQLITE_DONE ? Status::Ok() : SqliteError(db, rc, std::string("reading ") + table);
}

// Binds values by position (1-based) in order; blobs are copied by SQLite.
struct Binder {
  sqlite3_stmt* s;
  int i = 1;
  Binder& operator<<(double v) { return sqlite3_bind_double(s, i++, v), *this; }
  Binder& operator<<(int v) { return sqlite3_bind_int(s, i++, v), *this; }
  Binder& operator<<(int64_t v) { return sqlite3_bind_int64(s, i++, v), *this; }
  Binder& operator<<(const std::string& v) {
    return sqlite3_bind_text(s, i++, v.data(), static_cast<int>(v.size()), SQLITE_TRANSIENT), *this;
  }
  Binder& Blob(const void* p, size_t n) {
    sqlite3_bind_blob64(s, i++, p ? p : "", n, SQLITE_TRANSIENT);
    return *this;
  }
};

Status StepDone(sqlite3* db, sqlite3_stmt* s) {
  const int rc = sqlite3_step(s);
  sqlite3_reset(s);
  sqlite3_clear_bindings(s);
  if (rc != SQLITE_DONE) return Status::IoError(std::string("sqlite write: ") + sqlite3_errmsg(db));
  return Status::Ok();
}

std::vector<uint8_t> ColumnBlob(sqlite3_stmt* s, int col) {
  const auto* p = static_cast<const uint8_t*>(sqlite3_column_blob(s, col));
  return std::vector<uint8_t>(p, p + sqlite3_column_bytes(s, col));
}

std::string ColumnText(sqlite3_stmt* s, int col) {
  const auto* p = sqlite3_column_text(s, col);
  return p ? std::string(reinterpret_cast<const char*>(p)) : std::string();
}

template <typename T>
bool BlobTo(sqlite3_stmt* s, int col, std::vector<T>* out) {
  const size_t n = sqlite3_column_bytes(s, col);
  if (n % sizeof(T) != 0) return false;
  out->resize(n / sizeof(T));
  if (n) std::memcpy(out->data(), sqlite3_column_blob(s, col), n);
  return true;
}

// Runs write(db) on PATH.tmp inside one transaction, then fsync and rename onto PATH.
template <typename Fn>
Status WriteAtomically(const std::string& path, Fn write) {
  std::error_code ec;
  fs::create_directories(fs::path(path).parent_path(), ec);
  const std::string tmp = path + ".tmp";
  fs::remove(tmp, ec);
  {
    Result<Db> db = OpenDb(tmp, true);
    if (!db.ok()) return db.status();
    Status s = Exec(db->get(), "PRAGMA journal_mode=OFF; PRAGMA synchronous=OFF; BEGIN");
    if (s.ok()) s = write(db->get());
    if (s.ok()) s = Exec(db->get(), "COMMIT");
    if (!s.ok()) {
      db->reset();
      fs::remove(tmp, ec);
      return s;
    }
  }
  return SyncAndRename(Env::Default(), tmp, path);
}

}  // namespace

Status WriteFileAtomically(const std::string& path, const void* data, size_t size) {
  return WriteFileAtomically(Env::Default(), path, data, size);
}

namespace {

constexpr char kTileSchema[] = R"sql(
CREATE TABLE meta(key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE cameras(id INTEGER PRIMARY KEY, width INTEGER, height INTEGER, fx REAL, fy REAL,
  cx REAL, cy REAL, k1 REAL, k2 REAL, p1 REAL, p2 REAL, k3 REAL, lens TEXT NOT NULL);
CREATE TABLE images(id INTEGER PRIMARY KEY, name TEXT NOT NULL, timestamp REAL, lat REAL,
  lon REAL, height REAL, heading_deg REAL, pitch_deg REAL, roll_deg REAL, sigma_h_m REAL,
  camera_id INTEGER, global_code BLOB, keypoints BLOB, descriptors BLOB, point_ids BLOB);
CREATE TABLE points(id INTEGER PRIMARY KEY, e REAL, n REAL, u REAL, covariance BLOB,
  descriptor BLOB, observations INTEGER);
CREATE TABLE retrieval(id INTEGER PRIMARY KEY, faiss_index BLOB NOT NULL);
)sql";

Status InsertMeta(sqlite3* db, const std::vector<std::pair<std::string, std::string>>& kv) {
  Result<Stmt> st = Prepare(db, "INSERT INTO meta VALUES(?,?)");
  if (!st.ok()) return st.status();
  for (const auto& [k, v] : kv) {
    Binder{st->get()} << k << v;
    if (Status s = StepDone(db, st->get()); !s.ok()) return s;
  }
  return Status::Ok();
}

std::string Num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.17g", v);
  return buf;
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
  Result<Stmt> cam = Prepare(db, "INSERT INTO cameras VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?)");
  if (!cam.ok()) return cam.status();
  for (size_t i = 0; i < t.cameras.size(); ++i) {
    const CameraModel& c = t.cameras[i];
    Binder b{cam->get()};
    b << static_cast<int>(i) << c.width_px << c.height_px << c.fx << c.fy << c.cx << c.cy;
    for (double d : c.distortion) b << d;
    b << std::string(c.lens == LensModel::kFisheye ? "fisheye" : "pinhole");
    if (Status s = StepDone(db, cam->get()); !s.ok()) return s;
  }
  Result<Stmt> img = Prepare(db, "INSERT INTO images VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)");
  if (!img.ok()) return img.status();
  for (const ReferenceImage& r : t.images) {
    if (r.descriptors.rows != static_cast<int>(r.normalized.size()) ||
        r.point_ids.size() != r.normalized.size() ||
        (r.descriptors.rows > 0 && (r.descriptors.type() != CV_8U || r.descriptors.cols != 128)))
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
  Result<Stmt> ix = Prepare(db, "INSERT INTO retrieval VALUES(0,?)");
  if (!ix.ok()) return ix.status();
  Binder{ix->get()}.Blob(t.retrieval_index.data(), t.retrieval_index.size());
  return StepDone(db, ix->get());
}

Result<std::vector<std::pair<std::string, std::string>>> ReadMeta(sqlite3* db) {
  Result<Stmt> st = Prepare(db, "SELECT key, value FROM meta");
  if (!st.ok()) return st.status();
  std::vector<std::pair<std::string, std::string>> kv;
  int rc;
  while ((rc = sqlite3_step(st->get())) == SQLITE_ROW)
    kv.emplace_back(ColumnText(st->get(), 0), ColumnText(st->get(), 1));
  if (Status f = Finished(db, rc, "meta"); !f.ok()) return f;
  return kv;
}

std::string MetaValue(const std::vector<std::pair<std::string, std::string>>& kv,
                      const std::string& key) {
  for (const auto& [k, v] : kv)
    if (k == key) return v;
  return {};
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
    r.id = sqlite3_column_int(s, 0);
    r.name = ColumnText(s, 1);
    r.timestamp_s = sqlite3_column_double(s, 2);
    r.position = {sqlite3_column_double(s, 3), sqlite3_column_double(s, 4),
                  sqlite3_column_double(s, 5)};
    r.attitude = {sqlite3_column_double(s, 6), sqlite3_column_double(s, 7),
                  sqlite3_column_double(s, 8)};
    r.sigma_h_m = sqlite3_column_double(s, 9);
    r.camera_id = sqlite3_column_int(s, 10);
    r.global_code = ColumnBlob(s, 11);
    std::vector<uint8_t> desc;
    if (!BlobTo(s, 12, &r.normalized) || !BlobTo(s, 13, &desc) || !BlobTo(s, 14, &r.point_ids) ||
        desc.size() != r.normalized.size() * 128 || r.point_ids.size() != r.normalized.size() ||
        r.id != static_cast<int>(t->images.size()) || r.camera_id < 0 ||
        r.camera_id >= static_cast<int>(t->cameras.size()))
      return Status::Corrupt(path + ": image row " + std::to_string(r.id) + " is inconsistent");
    r.descriptors = cv::Mat(static_cast<int>(r.normalized.size()), 128, CV_8U);
    if (!desc.empty()) std::memcpy(r.descriptors.data, desc.data(), desc.size());
    t->images.push_back(std::move(r));
  }
  if (Status f = Finished(db, rc, "images"); !f.ok()) return f;
  return Status::Ok();
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

Status ReadCameras(sqlite3* db, const std::string& path, TileData* t) {
  Result<Stmt> st = Prepare(db, "SELECT * FROM cameras ORDER BY id");
  if (!st.ok()) return st.status();
  sqlite3_stmt* s = st->get();
  if (sqlite3_column_count(s) != 13)
    return Status::Corrupt(path + ": cameras table has another shape");
  int rc;
  while ((rc = sqlite3_step(s)) == SQLITE_ROW) {
    CameraModel c;
    c.width_px = sqlite3_column_int(s, 1);
    c.height_px = sqlite3_column_int(s, 2);
    c.fx = sqlite3_column_double(s, 3), c.fy = sqlite3_column_double(s, 4);
    c.cx = sqlite3_column_double(s, 5), c.cy = sqlite3_column_double(s, 6);
    for (int i = 0; i < 5; ++i) c.distortion[i] = sqlite3_column_double(s, 7 + i);
    const unsigned char* lens = sqlite3_column_text(s, 12);
    const std::string lens_name = lens ? reinterpret_cast<const char*>(lens) : "";
    if (lens_name != "pinhole" && lens_name != "fisheye")
      return Status::Corrupt(path + ": camera: lens must be pinhole or fisheye");
    c.lens = lens_name == "fisheye" ? LensModel::kFisheye : LensModel::kPinhole;
    std::string error;
    if (!c.IsValid(&error)) return Status::Corrupt(path + ": camera: " + error);
    t->cameras.push_back(c);
  }
  if (Status f = Finished(db, rc, "cameras"); !f.ok()) return f;
  return Status::Ok();
}

Result<TileKey> ParseTileKey(const std::string& text) {
  TileKey k;
  unsigned x = 0, y = 0;
  if (std::sscanf(text.c_str(), "%d/%u/%u", &k.zoom, &x, &y) != 3 || k.zoom < 0 || k.zoom > 30)
    return Status::Corrupt("bad tile key '" + text + "'");
  k.x = x, k.y = y;
  return k;
}

constexpr char kCatalogSchema[] = R"sql(
CREATE TABLE meta(key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE model(id TEXT PRIMARY KEY, params TEXT NOT NULL, blob BLOB NOT NULL);
CREATE TABLE tiles(ordinal INTEGER PRIMARY KEY, tile TEXT NOT NULL UNIQUE, file TEXT NOT NULL,
  sha256 TEXT NOT NULL, images INTEGER, points INTEGER, model_id TEXT NOT NULL);
CREATE TABLE global_index(id INTEGER PRIMARY KEY, faiss_index BLOB NOT NULL);
)sql";

}  // namespace

std::string TileFileName(const TileKey& key, int map_version) {
  return "tiles/" + std::to_string(key.zoom) + "/" + std::to_string(key.x) + "/" +
         std::to_string(key.y) + "-v" + std::to_string(map_version) + ".sqlite";
}

Status WriteTile(const std::string& path, const TileData& tile) {
  return WriteAtomically(path, [&](sqlite3* db) { return WriteTileRows(db, tile); });
}

Result<TileData> ReadTile(const std::string& path) {
  if (!fs::exists(path)) return Status::NotFound("no tile file " + path);
  Result<Db> db = OpenDb(path, false);
  if (!db.ok()) return db.status();
  auto meta = ReadMeta(db->get());
  if (!meta.ok() && meta.status().code() != StatusCode::kCorrupt)
    return Status(meta.status().code(), path + ": " + meta.status().message());
  if (!meta.ok())
    return Status::Corrupt(path + ": not a sightfix tile (" + meta.status().message() + ")");
  if (MetaValue(*meta, "format_version") != std::to_string(kMapFormatVersion))
    return Status::Corrupt(path + ": tile format version '" + MetaValue(*meta, "format_version") +
                           "', this build reads " + std::to_string(kMapFormatVersion));
  TileData t;
  auto key = ParseTileKey(MetaValue(*meta, "tile"));
  if (!key.ok()) return Status::Corrupt(path + ": " + key.status().message());
  t.key = *key;
  t.origin = {std::atof(MetaValue(*meta, "origin_lat").c_str()),
              std::atof(MetaValue(*meta, "origin_lon").c_str()),
              std::atof(MetaValue(*meta, "origin_height").c_str())};
  t.model_id = MetaValue(*meta, "model_id");
  t.map_version = std::atoi(MetaValue(*meta, "map_version").c_str());
  for (Status s : {ReadCameras(db->get(), path, &t), ReadImages(db->get(), path, &t),
                   ReadPoints(db->get(), path, &t)})
    if (!s.ok()) return s;
  Result<Stmt> st = Prepare(db->get(), "SELECT faiss_index FROM retrieval WHERE id = 0");
  if (!st.ok()) return st.status();
  if (sqlite3_step(st->get()) != SQLITE_ROW) return Status::Corrupt(path + ": no retrieval index");
  t.retrieval_index = ColumnBlob(st->get(), 0);
  return t;
}

Status WriteCatalog(const std::string& path, const Catalog& c) {
  return WriteAtomically(path, [&](sqlite3* db) -> Status {
    if (Status s = Exec(db, kCatalogSchema); !s.ok()) return s;
    if (Status s = InsertMeta(db, {{"format_version", std::to_string(c.format_version)},
                                   {"map_version", std::to_string(c.map_version)},
                                   {"zoom", std::to_string(c.zoom)},
                                   {"model_id", c.model_id},
                                   {"feature_type", c.feature_type},
                                   {"created_utc", c.created_utc},
                                   {"provenance", c.provenance}});
        !s.ok())
      return s;
    Result<Stmt> m = Prepare(db, "INSERT INTO model VALUES(?,?,?)");
    if (!m.ok()) return m.status();
    (Binder{m->get()} << c.model_id << c.model_params)
        .Blob(c.model_blob.data(), c.model_blob.size());
    if (Status s = StepDone(db, m->get()); !s.ok()) return s;
    Result<Stmt> t = Prepare(db, "INSERT INTO tiles VALUES(?,?,?,?,?,?,?)");
    if (!t.ok()) return t.status();
    for (size_t i = 0; i < c.tiles.size(); ++i) {
      const CatalogTile& ct = c.tiles[i];
      Binder{t->get()} << static_cast<int>(i) << ct.key.ToString() << ct.file << ct.sha256
                       << ct.images << ct.points << ct.model_id;
      if (Status s = StepDone(db, t->get()); !s.ok()) return s;
    }
    Result<Stmt> g = Prepare(db, "INSERT INTO global_index VALUES(0,?)");
    if (!g.ok()) return g.status();
    Binder{g->get()}.Blob(c.global_index.data(), c.global_index.size());
    return StepDone(db, g->get());
  });
}

Result<Catalog> ReadCatalog(const std::string& path) {
  if (!fs::exists(path)) return Status::NotFound("no map catalog " + path);
  Result<Db> db = OpenDb(path, false);
  if (!db.ok()) return db.status();
  auto meta = ReadMeta(db->get());
  if (!meta.ok() && meta.status().code() != StatusCode::kCorrupt)
    return Status(meta.status().code(), path + ": " + meta.status().message());
  if (!meta.ok())
    return Status::Corrupt(path + ": not a sightfix catalog (" + meta.status().message() + ")");
  Catalog c;
  c.format_version = std::atoi(MetaValue(*meta, "format_version").c_str());
  if (c.format_version != kMapFormatVersion)
    return Status::Corrupt(path + ": map format version " + std::to_string(c.format_version) +
                           ", this build reads " + std::to_string(kMapFormatVersion));
  c.map_version = std::atoi(MetaValue(*meta, "map_version").c_str());
  c.zoom = std::atoi(MetaValue(*meta, "zoom").c_str());
  c.model_id = MetaValue(*meta, "model_id");
  c.feature_type = MetaValue(*meta, "feature_type");
  c.created_utc = MetaValue(*meta, "created_utc");
  c.provenance = MetaValue(*meta, "provenance");
  Result<Stmt> m = Prepare(db->get(), "SELECT params, blob FROM model WHERE id = ?");
  if (!m.ok()) return m.status();
  Binder{m->get()} << c.model_id;
  if (sqlite3_step(m->get()) != SQLITE_ROW)
    return Status::Corrupt(path + ": model " + c.model_id + " is missing");
  c.model_params = ColumnText(m->get(), 0);
  c.model_blob = ColumnBlob(m->get(), 1);
  Result<Stmt> t = Prepare(db->get(),
                           "SELECT ordinal, tile, file, sha256, images, points, "
                           "model_id FROM tiles ORDER BY ordinal");
  if (!t.ok()) return t.status();
  int rc;
  while ((rc = sqlite3_step(t->get())) == SQLITE_ROW) {
    CatalogTile ct;
    auto key = ParseTileKey(ColumnText(t->get(), 1));
    if (!key.ok() || sqlite3_column_int(t->get(), 0) != static_cast<int>(c.tiles.size()))
      return Status::Corrupt(path + ": bad tile row " + std::to_string(c.tiles.size()));
    ct.key = *key;
    ct.file = ColumnText(t->get(), 2);
    if (ct.file.rfind("tiles/", 0) != 0 || ct.file.find("..") != std::string::npos)
      return Status::Corrupt(path + ": tile row " + std::to_string(c.tiles.size()) +
                             " names a file outside tiles/");
    ct.sha256 = ColumnText(t->get(), 3);
    ct.images = sqlite3_column_int(t->get(), 4);
    ct.points = sqlite3_column_int(t->get(), 5);
    ct.model_id = ColumnText(t->get(), 6);
    c.tiles.push_back(ct);
  }
  if (Status f = Finished(db->get(), rc, "tiles"); !f.ok()) return f;
  Result<Stmt> g = Prepare(db->get(), "SELECT faiss_index FROM global_index WHERE id = 0");
  if (!g.ok()) return g.status();
  if (sqlite3_step(g->get()) == SQLITE_ROW) c.global_index = ColumnBlob(g->get(), 0);
  return c;
}

}  // namespace sightfix
