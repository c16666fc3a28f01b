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

TileCache::TileCache(std::string map_dir, std::vector<CatalogTile> tiles, size_t budget_bytes)
    : map_dir_(std::move(map_dir)),
      tiles_(std::move(tiles)),
      budget_bytes_(budget_bytes),
      checked_(tiles_.size(), false) {
  for (size_t i = 0; i < tiles_.size(); ++i) ordinal_[tiles_[i].key] = static_cast<int>(i);
}

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

Status TileCache::Failed(int ordinal, const Status& why) {
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
  const std::string path = (std::filesystem::path(map_dir_) / tiles_[ordinal].file).string();
  Result<std::string> sha = Sha256OfFile(path);
  if (!sha.ok()) {
    std::error_code ec;
    if (!std::filesystem::exists(path, ec)) return Status::NotFound(path + ": missing");
    return Status::IoError(path + ": unreadable: " + sha.status().message());
  }
  if (*sha != tiles_[ordinal].sha256)
    return Status::Corrupt(path + ": damaged: SHA-256 " + sha->substr(0, 12) +
                           "... is not the catalog's " + tiles_[ordinal].sha256.substr(0, 12) +
                           "...");
  return Status::Ok();
}

Status TileCache::Check(int ordinal) {
  if (ordinal < 0 || ordinal >= static_cast<int>(tiles_.size()))
    return Status::NotFound("no tile with ordinal " + std::to_string(ordinal));
  {
    std::lock_guard<std::mutex> lock(mu_);
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

Result<std::shared_ptr<const LoadedTile>> TileCache::Get(int ordinal) {
  if (ordinal < 0 || ordinal >= static_cast<int>(tiles_.size()))
    return Status::NotFound("no tile with ordinal " + std::to_string(ordinal));
  std::lock_guard<std::mutex> lock(mu_);  // loads are serialized: simple, and tiles are few
  if (auto it = cache_.find(ordinal); it != cache_.end()) {
    lru_.splice(lru_.begin(), lru_, it->second.second);
    return it->second.first;
  }
  if (auto f = failed_.find(ordinal); f != failed_.end()) return f->second;
  if (!checked_[ordinal]) {
    if (Status s = VerifyFile(ordinal); !s.ok()) return Failed(ordinal, s);
    checked_[ordinal] = true;
  }
  const std::string path = (std::filesystem::path(map_dir_) / tiles_[ordinal].file).string();
  Result<TileData> data = ReadTile(path);
  if (!data.ok()) return Failed(ordinal, data.status());
  std::unique_ptr<faiss::Index> index;
  try {
    faiss::VectorIOReader reader;
    reader.data = data->retrieval_index;
    index.reset(faiss::read_index(&reader));
  } catch (const faiss::FaissException& e) {
    return Failed(ordinal, Status::Corrupt(path + ": retrieval index unreadable"));
  }
  if (index->ntotal != static_cast<faiss::Index::idx_t>(data->images.size()))
    return Failed(ordinal, Status::Corrupt(path + ": retrieval index and images disagree"));
  auto tile = std::make_shared<const LoadedTile>(std::move(data).value(), std::move(index));
  lru_.push_front(ordinal);
  cache_[ordinal] = {tile, lru_.begin()};
  bytes_ += tile->bytes;
  while (bytes_ > budget_bytes_ && lru_.size() > 1) {  // keep at least the tile just loaded
    const int victim = lru_.back();
    lru_.pop_back();
    bytes_ -= cache_[victim].first->bytes;
    cache_.erase(victim);
  }
  return std::shared_ptr<const LoadedTile>(tile);
}

}  // namespace sightfix
