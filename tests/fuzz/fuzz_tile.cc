// libFuzzer target: a tile file (SQLite) as ReadTile reads it for `add`, `retrain` and the
// server. Invariants: a tile that reads has consistent counts (a keypoint per descriptor row and
// per point id, point ids within the points, camera ids within the cameras).
// The retrieval index blob is not parsed here: FAISS's reader is not hardened against hostile
// bytes, so the server and the indexer only hand it files whose SHA-256 matches the catalog
// (server/engine/tile_cache.h, indexer/builder/map_builder.cc).
#include "indexer/map/map_store.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  auto tile = ReadTile(fuzz::WriteInput("tile.sqlite", data, size));
  if (!tile.ok()) return 0;
  for (const ReferenceImage& r : tile->images) {
    FUZZ_CHECK(r.descriptors.rows == static_cast<int>(r.normalized.size()));
    FUZZ_CHECK(r.point_ids.size() == r.normalized.size());
    FUZZ_CHECK(r.camera_id >= 0 && r.camera_id < static_cast<int>(tile->cameras.size()));
    for (int32_t id : r.point_ids)
      FUZZ_CHECK(id >= -1 && id < static_cast<int32_t>(tile->points.size()));
  }
  return 0;
}
