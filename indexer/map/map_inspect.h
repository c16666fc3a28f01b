// What a map holds (`inspect`), whether it is whole (`verify`), and where it covers
// (`coverage`, RFC 7946 GeoJSON). Read-only; thread-safe (each call opens its own files).
#pragma once

#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

// inspect: tiles, images, points, drives, model id and parameters, bytes per image by part
// (global code, local features, points), coverage extent, date range, the integrity fit. kNotFound
// / kCorrupt when the catalog or a tile cannot be read.
Result<nlohmann::json> InspectMap(const std::string& map_dir);
// inspect's line on the map's integrity overbound (catalog.h IntegrityFit), from InspectMap's
// JSON: its scale, drive and fix count, and whether the map changed since it was fitted.
std::string IntegrityFitText(const nlohmann::json& inspect);

struct VerifyProblem {
  std::string tile;  // "z/x/y", or "catalog"
  std::string file;
  std::string what;
};

struct VerifyReport {
  int tiles = 0, tiles_ok = 0, images = 0;
  std::vector<VerifyProblem> problems;
  bool whole() const { return problems.empty(); }
};

// verify: the catalog reads; each tile file exists, its SHA-256 is the catalog's, it reads with
// its schema, its model id, map version, image and point counts agree with the catalog, its
// retrieval index holds one entry per image; the map-wide index holds one entry per image of
// every tile and each of its ids names an existing tile and image. Every problem is listed.
VerifyReport VerifyMap(const std::string& map_dir);

// coverage: one Polygon per tile (properties: key, images, points, points_per_km2), one
// LineString per survey pass (images in time order, split where consecutive images are more
// than 50 m apart).
Result<nlohmann::json> CoverageGeoJson(const std::string& map_dir);

}  // namespace sightfix
