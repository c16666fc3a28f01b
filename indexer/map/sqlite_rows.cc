#include "indexer/map/sqlite_rows.h"

#include <cstdio>
#include <filesystem>

namespace sightfix::sqlite_rows {

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

Status Finished(sqlite3* db, int rc, const char* table) {
  return rc == SQLITE_DONE ? Status::Ok() : SqliteError(db, rc, std::string("reading ") + table);
}

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

Status InsertMeta(sqlite3* db, const MetaRows& kv) {
  Result<Stmt> st = Prepare(db, "INSERT INTO meta VALUES(?,?)");
  if (!st.ok()) return st.status();
  for (const auto& [k, v] : kv) {
    Binder{st->get()} << k << v;
    if (Status s = StepDone(db, st->get()); !s.ok()) return s;
  }
  return Status::Ok();
}

Result<MetaRows> ReadMeta(sqlite3* db) {
  Result<Stmt> st = Prepare(db, "SELECT key, value FROM meta");
  if (!st.ok()) return st.status();
  MetaRows kv;
  int rc;
  while ((rc = sqlite3_step(st->get())) == SQLITE_ROW)
    kv.emplace_back(ColumnText(st->get(), 0), ColumnText(st->get(), 1));
  if (Status f = Finished(db, rc, "meta"); !f.ok()) return f;
  return kv;
}

std::string MetaValue(const MetaRows& kv, const std::string& key) {
  for (const auto& [k, v] : kv)
    if (k == key) return v;
  return {};
}

Result<MetaRows> ReadMetaOf(sqlite3* db, const std::string& path, const std::string& kind) {
  Result<MetaRows> meta = ReadMeta(db);
  if (!meta.ok() && meta.status().code() != StatusCode::kCorrupt)
    return Status(meta.status().code(), path + ": " + meta.status().message());
  if (!meta.ok())
    return Status::Corrupt(path + ": not a sightfix " + kind + " (" + meta.status().message() +
                           ")");
  return meta;
}

Result<TileKey> ParseTileKey(const std::string& text) {
  TileKey k;
  unsigned x = 0, y = 0;
  if (std::sscanf(text.c_str(), "%d/%u/%u", &k.zoom, &x, &y) != 3 || k.zoom < 0 || k.zoom > 30)
    return Status::Corrupt("bad tile key '" + text + "'");
  k.x = x, k.y = y;
  return k;
}

std::string Num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.17g", v);
  return buf;
}

Status WriteSqliteAtomically(Env* env, const std::string& path,
                             const std::function<Status(sqlite3*)>& write) {
  const std::string parent = std::filesystem::path(path).parent_path().string();
  if (Status s = env->CreateDirectories(parent); !s.ok()) return s;
  const std::string tmp = path + ".tmp";
  if (Status s = env->RemoveFile(tmp); !s.ok()) return s;
  {
    Result<Db> db = OpenDb(tmp, true);
    if (!db.ok()) return db.status();
    Status s = Exec(db->get(), "PRAGMA journal_mode=OFF; PRAGMA synchronous=OFF; BEGIN");
    if (s.ok()) s = write(db->get());
    if (s.ok()) s = Exec(db->get(), "COMMIT");
    if (!s.ok()) {
      db->reset();
      env->RemoveFile(tmp);
      return s;
    }
  }
  return SyncAndRename(env, tmp, path);
}

}  // namespace sightfix::sqlite_rows
