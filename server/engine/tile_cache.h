// Tiles of a map, loaded on first use and kept in memory under a byte budget (least recently
// used tiles go first). A tile in use by a call stays alive through its shared_ptr even if the
// cache drops it. Every file is checked against the catalog's SHA-256 before it is parsed, so a
// damaged or replaced file never reaches SQLite or FAISS; a bad tile is remembered with its
// reason and the others keep serving. Thread-safe.
#pragma once

#include <cstddef>
#include <list>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "indexer/base/geo.h"
#include "indexer/map/map_store.h"
#include "indexer/base/status.h"

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
  // `tiles`: the catalog's list (ordinal = position). Files are relative to map_dir.
  TileCache(std::string map_dir, std::vector<CatalogTile> tiles, size_t budget_bytes);

  // The tile at `ordinal`, loading it if needed. kCorrupt/kNotFound when the file is bad; the
  // failure is remembered so a bad tile is reported once, not reread on every call.
  Result<std::shared_ptr<const LoadedTile>> Get(int ordinal);
  // Checks the file of `ordinal` against the catalog's SHA-256 without loading it (the server's
  // background scrub); a failure is remembered as for Get.
  Status Check(int ordinal);
  // Tiles refused so far, in catalog order, and how many have been checked or loaded.
  std::vector<TileProblem> Problems() const;
  int checked_tiles() const;
  // Ordinal of a tile key, or -1 when the map has no such tile.
  int OrdinalOf(const TileKey& key) const;
  const std::vector<CatalogTile>& tiles() const { return tiles_; }
  size_t cached_bytes() const;
  int cached_tiles() const;

 private:
  Status Failed(int ordinal, const Status& why);  // REQUIRES: mu_ held
  // kNotFound / kCorrupt when the file is missing or its SHA-256 is not the catalog's.
  Status VerifyFile(int ordinal) const;

  const std::string map_dir_;
  const std::vector<CatalogTile> tiles_;
  std::map<TileKey, int> ordinal_;
  const size_t budget_bytes_;
  mutable std::mutex mu_;
  std::list<int> lru_;  // front = most recent
  std::map<int, std::pair<std::shared_ptr<const LoadedTile>, std::list<int>::iterator>> cache_;
  std::map<int, Status> failed_;
  std::vector<bool> checked_;  // SHA-256 verified (or failed) already
  size_t bytes_ = 0;
};

}  // namespace sightfix
