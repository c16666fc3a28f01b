// The map's catalog: one SQLite file naming everything a map version serves,
//
//   MAPDIR/catalog.sqlite                 model, tile list with SHA-256s, map version, global index
//
// Switching the catalog (write PATH.tmp, fsync, rename onto PATH, through an Env) is the one
// moment a new map version becomes live: readers see the old catalog or the new one, whole.
// Schema: DEVELOPERS.md "Map format". Thread safety: functions are reentrant.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/status.h"
#include "indexer/map/tile_key.h"
#include "indexer/map/tile_store.h"

namespace sightfix {

struct CatalogTile {
  TileKey key;
  std::string file;  // relative to the map folder
  std::string sha256;
  int images = 0, points = 0;
  std::string model_id;
};

// The Gaussian overbound of a fix's position errors, fitted on a drive with truth (`sightfix
// fit-integrity`, client/eval/overbound.h) and applied by the engine to every protection level.
// Meta key "integrity_fit" (JSON), present only once fitted; `add` carries it forward with the
// map version it was fitted on, so `inspect` can say it predates the map's last drive.
struct IntegrityFit {
  double overbound_scale = 1;  // K >= 1: the sigmas' inflation
  std::string drive;           // the drive's folder name
  std::string drive_sha256;    // of its drive.csv: which drive exactly
  int fixes = 0;               // refined fixes the fit's samples came from
  int excluded = 0;            // refined fixes more than 5 m off: faults, not the error model
  int faults = 0;              // refined fixes one group pulled off, left out too (overbound.h)
  double binding_z = 0;        // the normalised error whose tail set K
  double confidence = 0.95;    // of the Clopper-Pearson bound on the tail
  int map_version = 0;         // the map's version when fitted
  std::string fitted_utc;      // ISO 8601
};

// The record's JSON as the catalog stores it, and back: kCorrupt (naming `path`) when the text is
// not the record's JSON or K is not a finite number >= 1.
std::string IntegrityFitJson(const IntegrityFit& fit);
Result<IntegrityFit> ParseIntegrityFit(const std::string& text, const std::string& path);

struct Catalog {
  int format_version = kMapFormatVersion;
  int map_version = 0;
  int zoom = kDefaultTileZoom;
  std::string model_id;             // SHA-256 of model_blob, first 16 hex digits
  std::string model_params;         // JSON: what the model was trained with
  std::vector<uint8_t> model_blob;  // GlobalDescriptor::Serialize
  std::string feature_type = "rootsift";
  std::vector<CatalogTile> tiles;
  // FAISS index over every image's code; id = GlobalImageId(tile ordinal, image id).
  std::vector<uint8_t> global_index;
  std::string created_utc;  // ISO 8601
  std::string provenance;   // JSON: inputs and options of the build
  std::optional<IntegrityFit> integrity_fit;
};

inline int64_t GlobalImageId(int tile_ordinal, int image_id) {
  return (static_cast<int64_t>(tile_ordinal) << 32) | static_cast<uint32_t>(image_id);
}
inline int TileOrdinalOf(int64_t global_id) { return static_cast<int>(global_id >> 32); }
inline int ImageIdOf(int64_t global_id) { return static_cast<int>(global_id & 0xffffffff); }

// Writes the catalog whole (PATH.tmp, fsync, rename; file operations but SQLite's own through
// ENV, borrowed). On failure PATH is the catalog it was and PATH.tmp is gone.
Status WriteCatalog(const std::string& path, const Catalog& catalog, Env* env = Env::Default());
// Reads and checks a catalog (format version, model present, tile rows in order and inside
// tiles/); kNotFound without the file, kCorrupt naming what is wrong.
Result<Catalog> ReadCatalog(const std::string& path);

}  // namespace sightfix
