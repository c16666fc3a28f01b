#include "indexer/map/catalog.h"

#include <climits>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <nlohmann/json.hpp>

#include "indexer/map/sqlite_rows.h"

namespace sightfix {
namespace {

using namespace sqlite_rows;

constexpr char kCatalogSchema[] = R"sql(
CREATE TABLE meta(key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE model(id TEXT PRIMARY KEY, params TEXT NOT NULL, blob BLOB NOT NULL);
CREATE TABLE tiles(ordinal INTEGER PRIMARY KEY, tile TEXT NOT NULL UNIQUE, file TEXT NOT NULL,
  sha256 TEXT NOT NULL, images INTEGER, points INTEGER, model_id TEXT NOT NULL);
CREATE TABLE global_index(id INTEGER PRIMARY KEY, faiss_index BLOB NOT NULL);
)sql";

Status WriteTileRows(sqlite3* db, const Catalog& c) {
  Result<Stmt> t = Prepare(db, "INSERT INTO tiles VALUES(?,?,?,?,?,?,?)");
  if (!t.ok()) return t.status();
  for (size_t i = 0; i < c.tiles.size(); ++i) {
    const CatalogTile& ct = c.tiles[i];
    Binder{t->get()} << static_cast<int>(i) << ct.key.ToString() << ct.file << ct.sha256
                     << ct.images << ct.points << ct.model_id;
    if (Status s = StepDone(db, t->get()); !s.ok()) return s;
  }
  return Status::Ok();
}

}  // namespace

std::string IntegrityFitJson(const IntegrityFit& f) {
  return nlohmann::json{{"overbound_scale", f.overbound_scale},
                        {"drive", f.drive},
                        {"drive_sha256", f.drive_sha256},
                        {"fixes", f.fixes},
                        {"excluded", f.excluded},
                        {"faults", f.faults},
                        {"binding_z", f.binding_z},
                        {"confidence", f.confidence},
                        {"map_version", f.map_version},
                        {"fitted_utc", f.fitted_utc}}
      .dump();
}

namespace {

// A count of the record: absent is 0; a number that is not a whole one in [0, 2^31) throws.
int CountOf(const nlohmann::json& j, const char* key) {
  if (!j.contains(key)) return 0;
  const nlohmann::json& v = j.at(key);
  if (!v.is_number_integer() || v.get<int64_t>() < 0 || v.get<int64_t>() > INT32_MAX)
    throw nlohmann::json::type_error::create(302, std::string(key) + " is not a count", &v);
  return static_cast<int>(v.get<int64_t>());
}

}  // namespace

Result<IntegrityFit> ParseIntegrityFit(const std::string& text, const std::string& path) {
  const nlohmann::json j = nlohmann::json::parse(text, nullptr, false);
  IntegrityFit f;
  try {
    if (!j.is_object()) throw nlohmann::json::type_error::create(302, "not an object", &j);
    f.overbound_scale = j.at("overbound_scale").get<double>();
    f.drive = j.at("drive").get<std::string>();
    f.drive_sha256 = j.value("drive_sha256", "");
    f.fixes = CountOf(j, "fixes"), f.excluded = CountOf(j, "excluded");
    f.faults = CountOf(j, "faults");
    f.binding_z = j.value("binding_z", 0.0), f.confidence = j.value("confidence", 0.95);
    f.map_version = CountOf(j, "map_version"), f.fitted_utc = j.value("fitted_utc", "");
  } catch (const nlohmann::json::exception&) {
    return Status::Corrupt(path + ": integrity_fit is not the fit's JSON record");
  }
  if (!(std::isfinite(f.overbound_scale) && f.overbound_scale >= 1))
    return Status::Corrupt(path + ": integrity_fit's overbound_scale must be a number >= 1");
  return f;
}

namespace {

Status WriteCatalogRows(sqlite3* db, const Catalog& c) {
  if (Status s = Exec(db, kCatalogSchema); !s.ok()) return s;
  MetaRows meta = {{"format_version", std::to_string(c.format_version)},
                   {"map_version", std::to_string(c.map_version)},
                   {"zoom", std::to_string(c.zoom)},
                   {"model_id", c.model_id},
                   {"feature_type", c.feature_type},
                   {"created_utc", c.created_utc},
                   {"provenance", c.provenance}};
  if (c.integrity_fit) meta.push_back({"integrity_fit", IntegrityFitJson(*c.integrity_fit)});
  if (Status s = InsertMeta(db, meta); !s.ok()) return s;
  Result<Stmt> m = Prepare(db, "INSERT INTO model VALUES(?,?,?)");
  if (!m.ok()) return m.status();
  (Binder{m->get()} << c.model_id << c.model_params).Blob(c.model_blob.data(), c.model_blob.size());
  if (Status s = StepDone(db, m->get()); !s.ok()) return s;
  if (Status s = WriteTileRows(db, c); !s.ok()) return s;
  Result<Stmt> g = Prepare(db, "INSERT INTO global_index VALUES(0,?)");
  if (!g.ok()) return g.status();
  Binder{g->get()}.Blob(c.global_index.data(), c.global_index.size());
  return StepDone(db, g->get());
}

// The meta table into *c; the format version checked.
Status ReadCatalogMeta(sqlite3* db, const std::string& path, Catalog* c) {
  Result<MetaRows> meta = ReadMetaOf(db, path, "catalog");
  if (!meta.ok()) return meta.status();
  c->format_version = std::atoi(MetaValue(*meta, "format_version").c_str());
  if (c->format_version != kMapFormatVersion)
    return Status::Corrupt(path + ": map format version " + std::to_string(c->format_version) +
                           ", this build reads " + std::to_string(kMapFormatVersion));
  c->map_version = std::atoi(MetaValue(*meta, "map_version").c_str());
  c->zoom = std::atoi(MetaValue(*meta, "zoom").c_str());
  c->model_id = MetaValue(*meta, "model_id");
  c->feature_type = MetaValue(*meta, "feature_type");
  c->created_utc = MetaValue(*meta, "created_utc");
  c->provenance = MetaValue(*meta, "provenance");
  if (const std::string fit = MetaValue(*meta, "integrity_fit"); !fit.empty()) {
    Result<IntegrityFit> f = ParseIntegrityFit(fit, path);
    if (!f.ok()) return f.status();
    c->integrity_fit = *f;
  }
  return Status::Ok();
}

Status ReadModel(sqlite3* db, const std::string& path, Catalog* c) {
  Result<Stmt> m = Prepare(db, "SELECT params, blob FROM model WHERE id = ?");
  if (!m.ok()) return m.status();
  Binder{m->get()} << c->model_id;
  if (sqlite3_step(m->get()) != SQLITE_ROW)
    return Status::Corrupt(path + ": model " + c->model_id + " is missing");
  c->model_params = ColumnText(m->get(), 0);
  c->model_blob = ColumnBlob(m->get(), 1);
  return Status::Ok();
}

Status ReadTileRow(sqlite3_stmt* s, const std::string& path, Catalog* c) {
  const std::string row = std::to_string(c->tiles.size());
  CatalogTile ct;
  Result<TileKey> key = ParseTileKey(ColumnText(s, 1));
  if (!key.ok() || sqlite3_column_int(s, 0) != static_cast<int>(c->tiles.size()))
    return Status::Corrupt(path + ": bad tile row " + row);
  ct.key = *key;
  ct.file = ColumnText(s, 2);
  if (ct.file.rfind("tiles/", 0) != 0 || ct.file.find("..") != std::string::npos)
    return Status::Corrupt(path + ": tile row " + row + " names a file outside tiles/");
  ct.sha256 = ColumnText(s, 3);
  ct.images = sqlite3_column_int(s, 4);
  ct.points = sqlite3_column_int(s, 5);
  ct.model_id = ColumnText(s, 6);
  c->tiles.push_back(ct);
  return Status::Ok();
}

Status ReadTiles(sqlite3* db, const std::string& path, Catalog* c) {
  Result<Stmt> t = Prepare(db,
                           "SELECT ordinal, tile, file, sha256, images, points, "
                           "model_id FROM tiles ORDER BY ordinal");
  if (!t.ok()) return t.status();
  int rc;
  while ((rc = sqlite3_step(t->get())) == SQLITE_ROW)
    if (Status s = ReadTileRow(t->get(), path, c); !s.ok()) return s;
  return Finished(db, rc, "tiles");
}

}  // namespace

Status WriteCatalog(const std::string& path, const Catalog& catalog, Env* env) {
  return WriteSqliteAtomically(env, path,
                               [&](sqlite3* db) { return WriteCatalogRows(db, catalog); });
}

Result<Catalog> ReadCatalog(const std::string& path) {
  if (!std::filesystem::exists(path)) return Status::NotFound("no map catalog " + path);
  Result<Db> db = OpenDb(path, false);
  if (!db.ok()) return db.status();
  Catalog c;
  if (Status s = ReadCatalogMeta(db->get(), path, &c); !s.ok()) return s;
  if (Status s = ReadModel(db->get(), path, &c); !s.ok()) return s;
  if (Status s = ReadTiles(db->get(), path, &c); !s.ok()) return s;
  Result<Stmt> g = Prepare(db->get(), "SELECT faiss_index FROM global_index WHERE id = 0");
  if (!g.ok()) return g.status();
  if (sqlite3_step(g->get()) == SQLITE_ROW) c.global_index = ColumnBlob(g->get(), 0);
  return c;
}

}  // namespace sightfix
