#include "server/engine/tile_cache.h"

#include <faiss/Index.h>
#include <faiss/impl/FaissException.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>

#include <algorithm>
#include <cstdio>
#include <filesystem>

#include "indexer/base/sha256.h"

namespace sightfix {

LoadedTile::LoadedTile(TileData d, std::unique_ptr<faiss::Index> i)
    : data(std::move(d)), index(std::move(i)), enu(data.origin) {
  bytes = sizeof(*this) + data.retrieval_index.size();
  for (const ReferenceImage& r : data.images) {
    image_centers.push_back(enu.ToEnu(r.position));
    bytes += r.descriptors.total() + r.normalized.size() * 12 + r.global_code.size();
  }
  bytes += data.points.size() * (sizeof(MapPoint) + 128);
}

LoadedTile::~LoadedTile() = default;

// One load in flight. Written under mu_ by the loading thread; read under mu_ by its waiters.
struct TileCache::PendingLoad {
  bool done = false;
  Status status;  // the load's failure, when it failed
  TilePtr tile;   // the loaded tile, when it did not
};

TileCache::TileCache(std::string map_dir, std::vector<CatalogTile> tiles, size_t budget_bytes,
                     Env* env)
    : map_dir_(std::move(map_dir)),
      tiles_(std::move(tiles)),
      budget_bytes_(budget_bytes),
      env_(env),
      checked_(tiles_.size(), false) {
  for (size_t i = 0; i < tiles_.size(); ++i) ordinal_[tiles_[i].key] = static_cast<int>(i);
}

TileCache::~TileCache() = default;

int TileCache::OrdinalOf(const TileKey& key) const {
  auto it = ordinal_.find(key);
  return it == ordinal_.end() ? -1 : it->second;
}

size_t TileCache::cached_bytes() const {
  std::lock_guard<std::mutex> lock(mu_);
  return bytes_;
}

int TileCache::cached_tiles() const {
  std::lock_guard<std::mutex> lock(mu_);
  return static_cast<int>(cache_.size());
}

std::string TileCache::PathOf(int ordinal) const {
  return (std::filesystem::path(map_dir_) / tiles_[ordinal].file).string();
}

Status TileCache::Failed(int ordinal, const Status& why) {
  // A scrub and a load may fail the same file at once: the first report stands.
  if (auto f = failed_.find(ordinal); f != failed_.end()) return f->second;
  // Reported once, on stderr (the service's log), then remembered: the rest keeps serving.
  checked_[ordinal] = true;
  std::fprintf(stderr, "{\"event\":\"tile_skipped\",\"tile\":\"%s\",\"reason\":\"%s\"}\n",
               tiles_[ordinal].key.ToString().c_str(),
               why.code() == StatusCode::kNotFound  ? "missing"
               : why.code() == StatusCode::kCorrupt ? "damaged"
                                                    : "unreadable");
  return failed_[ordinal] = why;
}

Status TileCache::VerifyFile(int ordinal) const {
  const std::string path = PathOf(ordinal);
  Result<std::string> bytes = env_->ReadFile(path);
  if (!bytes.ok()) {
    if (!env_->FileExists(path)) return Status::NotFound(path + ": missing");
    return Status::IoError(path + ": unreadable: " + bytes.status().message());
  }
  const std::string sha = Sha256Hex(bytes->data(), bytes->size());
  if (sha != tiles_[ordinal].sha256)
    return Status::Corrupt(path + ": damaged: SHA-256 " + sha.substr(0, 12) +
                           "... is not the catalog's " + tiles_[ordinal].sha256.substr(0, 12) +
                           "...");
  return Status::Ok();
}

Status TileCache::Check(int ordinal) {
  if (ordinal < 0 || ordinal >= static_cast<int>(tiles_.size()))
    return Status::NotFound("no tile with ordinal " + std::to_string(ordinal));
  {
    std::unique_lock<std::mutex> lock(mu_);
    // Background work yields to calls: no file is read for a check while a load runs (a load
    // checks its own file; two reads at once slowed a cold start's first calls).
    load_finished_.wait(lock, [&] { return loading_.empty(); });
    if (auto f = failed_.find(ordinal); f != failed_.end()) return f->second;
    if (checked_[ordinal]) return Status::Ok();
  }
  Status s = VerifyFile(ordinal);  // outside the lock: calls keep loading other tiles
  std::lock_guard<std::mutex> lock(mu_);
  if (checked_[ordinal]) {  // Get got there first
    auto f = failed_.find(ordinal);
    return f == failed_.end() ? Status::Ok() : f->second;
  }
  if (!s.ok()) return Failed(ordinal, s);
  checked_[ordinal] = true;
  return s;
}

std::vector<TileProblem> TileCache::Problems() const {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<TileProblem> out;
  const std::string prefix = (std::filesystem::path(map_dir_) / "").string();
  for (const auto& [ordinal, why] : failed_) {
    std::string reason = why.message();  // paths relative to the map: clients see no layout
    if (reason.rfind(prefix, 0) == 0) reason.erase(0, prefix.size());
    out.push_back({tiles_[ordinal].key.ToString(), reason});
  }
  return out;
}

int TileCache::checked_tiles() const {
  std::lock_guard<std::mutex> lock(mu_);
  return static_cast<int>(std::count(checked_.begin(), checked_.end(), true));
}

Result<TileCache::TilePtr> TileCache::Get(int ordinal) {
  if (ordinal < 0 || ordinal >= static_cast<int>(tiles_.size()))
    return Status::NotFound("no tile with ordinal " + std::to_string(ordinal));
  std::unique_lock<std::mutex> lock(mu_);
  if (TilePtr hit = Lookup(ordinal)) return hit;
  if (auto f = failed_.find(ordinal); f != failed_.end()) return f->second;
  if (auto l = loading_.find(ordinal); l != loading_.end()) {  // wait for that load
    const std::shared_ptr<PendingLoad> pending = l->second;
    load_finished_.wait(lock, [&] { return pending->done; });
    if (!pending->status.ok()) return pending->status;
    return pending->tile;
  }
  auto pending = std::make_shared<PendingLoad>();
  loading_[ordinal] = pending;
  const bool verified = checked_[ordinal];
  lock.unlock();
  return LoadAndPublish(ordinal, pending, verified);
}

TileCache::TilePtr TileCache::Lookup(int ordinal) {
  auto it = cache_.find(ordinal);
  if (it == cache_.end()) return nullptr;
  lru_.splice(lru_.begin(), lru_, it->second.second);
  return it->second.first;
}

Result<TileCache::TilePtr> TileCache::LoadAndPublish(int ordinal,
                                                     const std::shared_ptr<PendingLoad>& pending,
                                                     bool verified) {
  Result<TilePtr> tile = Load(ordinal, verified);
  std::vector<TilePtr> evicted;  // declared before the lock: freed after it is released
  std::lock_guard<std::mutex> lock(mu_);
  loading_.erase(ordinal);
  pending->done = true;
  if (tile.ok()) {
    checked_[ordinal] = true;
    pending->tile = *tile;
    Insert(ordinal, *tile, &evicted);
  } else {
    pending->status = Failed(ordinal, tile.status());
  }
  load_finished_.notify_all();
  if (!pending->status.ok()) return pending->status;
  return tile;
}

void TileCache::Insert(int ordinal, TilePtr tile, std::vector<TilePtr>* evicted) {
  bytes_ += tile->bytes;
  lru_.push_front(ordinal);
  cache_[ordinal] = {std::move(tile), lru_.begin()};
  while (bytes_ > budget_bytes_ && lru_.size() > 1) {  // keep at least the tile just loaded
    const auto victim = cache_.find(lru_.back());
    lru_.pop_back();
    bytes_ -= victim->second.first->bytes;
    evicted->push_back(std::move(victim->second.first));
    cache_.erase(victim);
  }
}

Result<TileCache::TilePtr> TileCache::Load(int ordinal, bool verified) const {
  if (!verified)
    if (Status s = VerifyFile(ordinal); !s.ok()) return s;
  const std::string path = PathOf(ordinal);
  try {  // nothing may escape: callers are waiting for this load's result
    Result<TileData> data = ReadTile(path);
    if (!data.ok()) return data.status();
    std::unique_ptr<faiss::Index> index;
    try {
      faiss::VectorIOReader reader;
      reader.data = data->retrieval_index;
      index.reset(faiss::read_index(&reader));
    } catch (const faiss::FaissException& e) {
      return Status::Corrupt(path + ": retrieval index unreadable");
    }
    if (index->ntotal != static_cast<faiss::Index::idx_t>(data->images.size()))
      return Status::Corrupt(path + ": retrieval index and images disagree");
    return TilePtr(std::make_shared<const LoadedTile>(std::move(data).value(), std::move(index)));
  } catch (const std::exception& e) {  // std::bad_alloc, mostly
    return Status::IoError(path + ": unreadable: " + e.what());
  }
}

}  // namespace sightfix
