// Tiles of a map, loaded on first use and kept in memory under a byte budget (least recently
// used tiles go first). A tile in use by a call stays alive through its shared_ptr even if the
// cache drops it. Every file is checked against the catalog's SHA-256 before it is parsed, so a
// damaged or replaced file never reaches SQLite or FAISS; a bad tile is remembered with its
// reason and the others keep serving.
//
// Each tile is absent, loading, loaded or failed. A load (SHA-256 check, SQLite read, FAISS
// deserialisation: tens to hundreds of milliseconds, seconds on a slow disk) runs on the calling
// thread without any lock held: calls for other tiles, loaded or not, never wait for it. A second
// caller of a tile being loaded waits for that one load (no second read) and gets its tile, or
// its error when it fails.
//
// Thread safety: every method may be called from any number of threads at once.
#pragma once

#include <condition_variable>
#include <cstddef>
#include <list>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/geo.h"
#include "indexer/base/status.h"
#include "indexer/map/map_store.h"

namespace faiss {
struct Index;
}

namespace sightfix {

struct LoadedTile {
  LoadedTile(TileData d, std::unique_ptr<faiss::Index> i);
  ~LoadedTile();
  TileData data;
  std::unique_ptr<faiss::Index> index;   // retrieval over data.images, ids = image ids
  EnuFrame enu;                          // of data.origin
  std::vector<cv::Vec3d> image_centers;  // per image, ENU of the tile
  size_t bytes = 0;                      // memory held, approximately
};

// A tile the cache refuses, and why ("missing", "damaged: ...", "unreadable: ...").
struct TileProblem {
  std::string tile;  // "z/x/y"
  std::string reason;
};

class TileCache {
 public:
  // `tiles`: the catalog's list (ordinal = position). Files are relative to map_dir. `env`
  // reads the files for their SHA-256 check (borrowed, not owned: must outlive the cache; never
  // null). The tile's SQLite file itself is opened by ReadTile (map_store.h) by path.
  TileCache(std::string map_dir, std::vector<CatalogTile> tiles, size_t budget_bytes, Env* env);
  ~TileCache();

  // The tile at `ordinal`, loading it if needed (see the class comment: a load holds no lock;
  // a caller of a tile already loading waits for that load). kCorrupt/kNotFound/kIoError when
  // the file is bad; the failure is remembered so a bad tile is reported once, not reread on
  // every call, and every caller waiting on the failed load gets it.
  Result<std::shared_ptr<const LoadedTile>> Get(int ordinal);
  // Checks the file of `ordinal` against the catalog's SHA-256 without loading it (the server's
  // background scrub; no lock held while reading); a failure is remembered as for Get. Yields to
  // calls: waits until no load is under way before it reads.
  Status Check(int ordinal);
  // Tiles refused so far, in catalog order, and how many have been checked or loaded.
  std::vector<TileProblem> Problems() const;
  int checked_tiles() const;
  // Ordinal of a tile key, or -1 when the map has no such tile. No lock (immutable).
  int OrdinalOf(const TileKey& key) const;
  const std::vector<CatalogTile>& tiles() const { return tiles_; }
  size_t cached_bytes() const;
  int cached_tiles() const;

 private:
  struct PendingLoad;  // one load in flight, shared with the callers waiting for it
  using TilePtr = std::shared_ptr<const LoadedTile>;

  // Reports and remembers a failure (once: a failure already remembered is returned as it is).
  Status Failed(int ordinal, const Status& why);  // REQUIRES: mu_ held
  // Hit: moves `ordinal` to the LRU front and returns it; nullptr when not loaded.
  TilePtr Lookup(int ordinal);  // REQUIRES: mu_ held
  // Adds a loaded tile and evicts from the LRU back down to the budget (never the tile just
  // added); the evicted tiles go to `evicted`, to be released after mu_ is.
  void Insert(int ordinal, TilePtr tile, std::vector<TilePtr>* evicted);  // REQUIRES: mu_ held
  // Runs the load Get registered as `pending` (no lock held), then publishes its result: into
  // the cache or failed_, and to the callers waiting on `pending`.
  Result<TilePtr> LoadAndPublish(int ordinal, const std::shared_ptr<PendingLoad>& pending,
                                 bool verified);
  // The file's check (unless `verified`), read and parse. No lock held; touches no member but
  // the immutable ones.
  Result<TilePtr> Load(int ordinal, bool verified) const;
  // kNotFound / kCorrupt when the file is missing or its SHA-256 is not the catalog's.
  Status VerifyFile(int ordinal) const;
  std::string PathOf(int ordinal) const;

  // Immutable after construction: read without a lock.
  const std::string map_dir_;
  const std::vector<CatalogTile> tiles_;
  std::map<TileKey, int> ordinal_;
  const size_t budget_bytes_;
  Env* const env_;

  // mu_ guards everything below. Held only for map lookups, LRU splices and counters (O(log n)
  // tiles, microseconds); never across file I/O, parsing, index deserialisation or a tile's
  // destruction, so a hit never waits behind a load.
  mutable std::mutex mu_;
  // Signalled (all) when any load finishes; waiters check their own PendingLoad.
  std::condition_variable load_finished_;
  std::list<int> lru_;  // loaded tiles, front = most recent
  std::map<int, std::pair<TilePtr, std::list<int>::iterator>> cache_;  // state: loaded
  std::map<int, std::shared_ptr<PendingLoad>> loading_;                // state: loading
  std::map<int, Status> failed_;                                       // state: failed
  std::vector<bool> checked_;  // SHA-256 verified (or failed) already
  size_t bytes_ = 0;           // sum of cache_'s tiles' bytes
};

}  // namespace sightfix
