// SQLite row helpers shared by the tile store and the catalog: handles that close themselves,
// statements, positional binding, column reads, the key/value meta table, and the one atomic
// writer both file kinds use. Internal to sightfix_map (not installed: it includes sqlite3.h).
//
// Errors: every function returns a Status naming the SQL or the file; another process's lock
// (SQLITE_BUSY and kin) is kIoError (try again later), anything else about a file's content is
// kCorrupt. Thread safety: handles are not shared between threads.
#pragma once

#include <sqlite3.h>

#include <cstdint>
#include <cstring>
#include <functional>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/status.h"
#include "indexer/map/tile_key.h"

namespace sightfix::sqlite_rows {

struct DbCloser {
  void operator()(sqlite3* db) const { sqlite3_close(db); }
};
struct StmtCloser {
  void operator()(sqlite3_stmt* s) const { sqlite3_finalize(s); }
};
using Db = std::unique_ptr<sqlite3, DbCloser>;
using Stmt = std::unique_ptr<sqlite3_stmt, StmtCloser>;
using MetaRows = std::vector<std::pair<std::string, std::string>>;

// Opens PATH read-only, or read-write and created when WRITE. Waits up to 3 s for another
// process's lock.
Result<Db> OpenDb(const std::string& path, bool write);
// Runs SQL (several statements allowed).
Status Exec(sqlite3* db, const std::string& sql);
// A failed SQLite call (result code RC) as a Status, as the header says.
Status SqliteError(sqlite3* db, int rc, const std::string& what);
Result<Stmt> Prepare(sqlite3* db, const std::string& sql);
// After a `while (step == SQLITE_ROW)` loop: OK only when TABLE was read to its end.
Status Finished(sqlite3* db, int rc, const char* table);
// Steps a write statement once, then resets it and clears its bindings.
Status StepDone(sqlite3* db, sqlite3_stmt* s);

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

std::vector<uint8_t> ColumnBlob(sqlite3_stmt* s, int col);
std::string ColumnText(sqlite3_stmt* s, int col);
// Column COL's blob as an array of T; false when its size is not a multiple of sizeof(T).
template <typename T>
bool BlobTo(sqlite3_stmt* s, int col, std::vector<T>* out) {
  const size_t n = sqlite3_column_bytes(s, col);
  if (n % sizeof(T) != 0) return false;
  out->resize(n / sizeof(T));
  if (n) std::memcpy(out->data(), sqlite3_column_blob(s, col), n);
  return true;
}

// The meta table (key TEXT, value TEXT): rows inserted in order, read back in table order.
Status InsertMeta(sqlite3* db, const MetaRows& kv);
Result<MetaRows> ReadMeta(sqlite3* db);
// KEY's value, or "" when absent.
std::string MetaValue(const MetaRows& kv, const std::string& key);
// The meta table of PATH, already open as DB; KIND ("tile", "catalog") names what PATH should
// be when the table cannot be read (kCorrupt "PATH: not a sightfix KIND").
Result<MetaRows> ReadMetaOf(sqlite3* db, const std::string& path, const std::string& kind);

// "Z/X/Y" as stored in tiles and the catalog; kCorrupt otherwise.
Result<TileKey> ParseTileKey(const std::string& text);
// A double as text that reads back to the same bits ("%.17g").
std::string Num(double v);

// Runs WRITE(db) on PATH.tmp inside one transaction (journal and syncs off: the file is not live
// yet), then SyncAndRename through ENV onto PATH; parent folders are made through ENV. On a
// failure PATH.tmp is removed and PATH is as it was.
Status WriteSqliteAtomically(Env* env, const std::string& path,
                             const std::function<Status(sqlite3*)>& write);

}  // namespace sightfix::sqlite_rows
