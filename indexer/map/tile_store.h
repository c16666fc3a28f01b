// Tile files: one SQLite file per WebMercatorQuad tile and map version,
//
//   MAPDIR/tiles/Z/X/Y-vN.sqlite          one tile, version N (self-contained: copy it and it
//                                         serves)
//
// A tile holds its reference images (pose, calibration, global code, compact local features and
// which 3D point each keypoint observes), its 3D points (ENU of the tile's origin, covariance,
// representative descriptor) and its retrieval index (a FAISS index over the images' global codes,
// ids = image ids, serialized with faiss::write_index). Schema: DEVELOPERS.md "Map format".
//
// Writes go to PATH.tmp, are fsynced, then renamed onto PATH (all through an Env), so a reader
// sees a whole file or none. Thread safety: functions are reentrant; SQLite handles are not
// shared.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "indexer/base/env.h"
#include "indexer/base/geo.h"
#include "indexer/base/rotation.h"
#include "indexer/base/status.h"
#include "indexer/map/camera_model.h"
#include "indexer/map/tile_key.h"

namespace sightfix {

// 2: cameras carry their lens model (pinhole or fisheye). 3: and their calibration's remaining
// 1-sigma (focal, k1, k2, boresight: CalibrationUncertainty).
constexpr int kMapFormatVersion = 3;

struct ReferenceImage {
  int id = 0;  // 0..n-1 within the tile; the retrieval index's id
  std::string name;
  double timestamp_s = 0;
  GeoPoint position;  // adjusted survey pose
  Attitude attitude;
  double sigma_h_m = 0;  // 1-sigma per horizontal axis of the survey pose
  int camera_id = 0;     // index into TileData::cameras
  std::vector<uint8_t> global_code;
  std::vector<cv::Point2f> normalized;  // undistorted (x/z, y/z) per keypoint
  cv::Mat descriptors;                  // n x 128 CV_8U (CompactDescriptors)
  std::vector<int32_t> point_ids;       // per keypoint: index into TileData::points, or -1
};

struct MapPoint {
  cv::Vec3d enu;           // metres, ENU of the tile's origin
  cv::Matx33d covariance;  // m^2, triangulation given the adjusted poses
  cv::Mat descriptor;      // 1 x 128 CV_8U, the medoid of its observations
  int observations = 0;
};

struct TileData {
  TileKey key;
  GeoPoint origin;  // ENU origin of the points
  std::string model_id;
  int map_version = 0;
  std::vector<CameraModel> cameras;
  std::vector<ReferenceImage> images;
  std::vector<MapPoint> points;
  std::vector<uint8_t> retrieval_index;  // faiss::write_index bytes
};

// Writes a whole tile: PATH.tmp, fsync, rename, parent folders made, every file operation but
// SQLite's own through ENV (borrowed). kInvalidArgument when an image's keypoint arrays disagree;
// kIoError from the disk. On failure PATH is untouched and PATH.tmp is gone.
Status WriteTile(const std::string& path, const TileData& tile, Env* env = Env::Default());
// Reads and checks a tile (schema version, counts, blob sizes); kNotFound without the file,
// kCorrupt naming what is wrong.
Result<TileData> ReadTile(const std::string& path);

// "tiles/Z/X/Y-vN.sqlite"
std::string TileFileName(const TileKey& key, int map_version);

}  // namespace sightfix
