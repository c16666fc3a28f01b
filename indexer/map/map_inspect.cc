#include "indexer/map/map_inspect.h"

#include <faiss/Index.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>

#include "indexer/base/geo.h"
#include "indexer/base/iso_time.h"
#include "indexer/base/sha256.h"
#include "indexer/map/map_store.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

// Bytes one stored keypoint takes (normalized x, y as float; 128 descriptor bytes; point id),
// and one stored point (ENU as 3 doubles, covariance upper triangle as 6 floats, descriptor,
// observation count): the sizes of map_store's BLOB layouts.
constexpr double kKeypointBytes = 2 * 4 + 128 + 4;
constexpr double kPointBytes = 3 * 8 + 6 * 4 + 128 + 4;

// Entries of a serialized FAISS index; -1 when it does not deserialize.
long IndexEntries(const std::vector<uint8_t>& bytes) {
  try {
    faiss::VectorIOReader r;
    r.data = bytes;
    std::unique_ptr<faiss::Index> index(faiss::read_index(&r));
    return static_cast<long>(index->ntotal);
  } catch (const std::exception&) {
    return -1;
  }
}

Result<Catalog> OpenCatalog(const std::string& map_dir) {
  const std::string path = (fs::path(map_dir) / "catalog.sqlite").string();
  if (!fs::exists(path)) return Status::NotFound("no map in " + map_dir + " (no catalog.sqlite)");
  return ReadCatalog(path);
}

}  // namespace

Result<nlohmann::json> InspectMap(const std::string& map_dir) {
  Result<Catalog> catalog = OpenCatalog(map_dir);
  if (!catalog.ok()) return catalog.status();
  int images = 0, points = 0;
  double code_bytes = 0, local_bytes = 0, point_bytes = 0, file_bytes = 0;
  double south = 90, north = -90, west = 180, east = -180, t0 = HUGE_VAL, t1 = -HUGE_VAL;
  for (const CatalogTile& ct : catalog->tiles) {
    const std::string path = (fs::path(map_dir) / ct.file).string();
    Result<TileData> tile = ReadTile(path);
    if (!tile.ok()) return tile.status();
    images += static_cast<int>(tile->images.size());
    points += static_cast<int>(tile->points.size());
    point_bytes += tile->points.size() * kPointBytes;
    file_bytes += fs::file_size(path);
    for (const ReferenceImage& img : tile->images) {
      code_bytes += img.global_code.size();
      local_bytes += img.normalized.size() * kKeypointBytes;
      south = std::min(south, img.position.lat_deg), north = std::max(north, img.position.lat_deg);
      west = std::min(west, img.position.lon_deg), east = std::max(east, img.position.lon_deg);
      t0 = std::min(t0, img.timestamp_s), t1 = std::max(t1, img.timestamp_s);
    }
  }
  const double n = std::max(images, 1);
  nlohmann::json j = {{"map", map_dir},
                      {"format_version", catalog->format_version},
                      {"map_version", catalog->map_version},
                      {"zoom", catalog->zoom},
                      {"created", catalog->created_utc},
                      {"tiles", catalog->tiles.size()},
                      {"images", images},
                      {"points", points},
                      {"model_id", catalog->model_id},
                      {"model", nlohmann::json::parse(catalog->model_params, nullptr, false)},
                      {"drives", nlohmann::json::parse(catalog->provenance, nullptr, false)},
                      {"bytes_per_image",
                       {{"global_code", code_bytes / n},
                        {"local_features", local_bytes / n},
                        {"points", point_bytes / n},
                        {"tile_files", file_bytes / n}}}};
  j["integrity_fit"] = nullptr;
  if (const std::optional<IntegrityFit>& f = catalog->integrity_fit)
    j["integrity_fit"] = nlohmann::json::parse(IntegrityFitJson(*f));  // the record as stored
  if (images > 0) {
    j["extent"] = {{"south", south}, {"west", west}, {"north", north}, {"east", east}};
    j["dates"] = {{"first", FormatIsoUtc(t0)}, {"last", FormatIsoUtc(t1)}};
  }
  return j;
}

std::string IntegrityFitText(const nlohmann::json& inspect) {
  const nlohmann::json& f = inspect.value("integrity_fit", nlohmann::json());
  if (!f.is_object())
    return "integrity overbound: none fitted (sightfix fit-integrity fits one on a drive with "
           "truth)\n";
  char buf[512];
  std::snprintf(buf, sizeof buf,
                "integrity overbound: %.3f, fitted on drive %s (drive.csv sha256 %.16s) over %d "
                "refined fixes (left out: %d more than 5 m off, %d pulled off by one group), at "
                "map version %d, %s\n",
                f.value("overbound_scale", 1.0), f.value("drive", "").c_str(),
                f.value("drive_sha256", "").c_str(), f.value("fixes", 0), f.value("excluded", 0),
                f.value("faults", 0), f.value("map_version", 0), f.value("fitted_utc", "").c_str());
  std::string out = buf;
  if (f.value("map_version", 0) != inspect.value("map_version", 0))
    out += "  the map has changed since (version " +
           std::to_string(inspect.value("map_version", 0)) + "): fit it again\n";
  return out;
}

VerifyReport VerifyMap(const std::string& map_dir) {
  VerifyReport report;
  Result<Catalog> catalog = OpenCatalog(map_dir);
  if (!catalog.ok()) {
    report.problems.push_back({"catalog", "catalog.sqlite", catalog.status().message()});
    return report;
  }
  report.tiles = static_cast<int>(catalog->tiles.size());
  std::vector<int> images_of(catalog->tiles.size(), -1);  // -1: tile unreadable
  for (size_t i = 0; i < catalog->tiles.size(); ++i) {
    const CatalogTile& ct = catalog->tiles[i];
    const std::string key = ct.key.ToString(), path = (fs::path(map_dir) / ct.file).string();
    const size_t before = report.problems.size();
    auto bad = [&](const std::string& what) { report.problems.push_back({key, ct.file, what}); };
    if (!fs::exists(path)) {
      bad("missing");
      continue;
    }
    Result<std::string> sha = Sha256OfFile(path);
    if (!sha.ok() || *sha != ct.sha256)
      bad("SHA-256 differs from the catalog's (damaged or replaced)");
    Result<TileData> tile = ReadTile(path);
    if (!tile.ok()) {
      bad(tile.status().message());
      continue;
    }
    if (tile->model_id != catalog->model_id || ct.model_id != catalog->model_id)
      bad("model id " + tile->model_id + " is not the catalog's " + catalog->model_id);
    if (static_cast<int>(tile->images.size()) != ct.images ||
        static_cast<int>(tile->points.size()) != ct.points)
      bad("image or point count differs from the catalog's");
    if (IndexEntries(tile->retrieval_index) != static_cast<long>(tile->images.size()))
      bad("retrieval index entries do not match the images");
    images_of[i] = static_cast<int>(tile->images.size());
    report.images += images_of[i];
    if (report.problems.size() == before) ++report.tiles_ok;
  }
  // The map-wide index: one entry per image, every id resolving.
  try {
    faiss::VectorIOReader r;
    r.data = catalog->global_index;
    std::unique_ptr<faiss::Index> index(faiss::read_index(&r));
    if (index->ntotal != report.images)
      report.problems.push_back({"catalog", "catalog.sqlite",
                                 "global index holds " + std::to_string(index->ntotal) +
                                     " entries for " + std::to_string(report.images) + " images"});
  } catch (const std::exception& e) {
    report.problems.push_back(
        {"catalog", "catalog.sqlite", std::string("global index: ") + e.what()});
  }
  return report;
}

Result<nlohmann::json> CoverageGeoJson(const std::string& map_dir) {
  Result<Catalog> catalog = OpenCatalog(map_dir);
  if (!catalog.ok()) return catalog.status();
  nlohmann::json features = nlohmann::json::array();
  std::vector<const ReferenceImage*> all;
  std::vector<TileData> tiles;
  tiles.reserve(catalog->tiles.size());
  for (const CatalogTile& ct : catalog->tiles) {
    Result<TileData> tile = ReadTile((fs::path(map_dir) / ct.file).string());
    if (!tile.ok()) return tile.status();
    tiles.push_back(std::move(tile).value());
    const TileBounds b = BoundsOfTile(ct.key);
    const double w = GeodesicBetween(b.south_deg, b.west_deg, b.south_deg, b.east_deg).distance_m;
    const double h = GeodesicBetween(b.south_deg, b.west_deg, b.north_deg, b.west_deg).distance_m;
    const nlohmann::json ring = {{b.west_deg, b.south_deg},
                                 {b.east_deg, b.south_deg},
                                 {b.east_deg, b.north_deg},
                                 {b.west_deg, b.north_deg},
                                 {b.west_deg, b.south_deg}};  // counterclockwise (RFC 7946 3.1.6)
    features.push_back({{"type", "Feature"},
                        {"geometry", {{"type", "Polygon"}, {"coordinates", {ring}}}},
                        {"properties",
                         {{"kind", "tile"},
                          {"tile", ct.key.ToString()},
                          {"images", ct.images},
                          {"points", ct.points},
                          {"points_per_km2", ct.points / (w * h / 1e6)}}}});
  }
  for (const TileData& t : tiles)
    for (const ReferenceImage& img : t.images) all.push_back(&img);
  std::sort(all.begin(), all.end(), [](const ReferenceImage* a, const ReferenceImage* b) {
    return a->timestamp_s < b->timestamp_s;
  });
  nlohmann::json line = nlohmann::json::array();
  auto flush = [&] {
    if (line.size() >= 2)
      features.push_back({{"type", "Feature"},
                          {"geometry", {{"type", "LineString"}, {"coordinates", line}}},
                          {"properties", {{"kind", "survey_track"}, {"images", line.size()}}}});
    line = nlohmann::json::array();
  };
  for (size_t i = 0; i < all.size(); ++i) {
    if (i > 0 && GeodesicBetween(all[i - 1]->position.lat_deg, all[i - 1]->position.lon_deg,
                                 all[i]->position.lat_deg, all[i]->position.lon_deg)
                         .distance_m > 50)
      flush();
    line.push_back({all[i]->position.lon_deg, all[i]->position.lat_deg});
  }
  flush();
  return nlohmann::json{{"type", "FeatureCollection"}, {"features", features}};
}

}  // namespace sightfix
