// Between the engine's types and the wire's (proto/sightfix.proto), both directions, and the
// checks a request gets before any decode: pixel count from the image header, calibration.
// Thread-safe (pure functions).
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>

#include "indexer/base/status.h"
#include "proto/sightfix.pb.h"
#include "server/engine/localizer.h"

namespace sightfix {

// Width and height from a JPEG's SOF marker or a PNG's IHDR, without decoding; nullopt when the
// bytes are neither or the header is cut short.
std::optional<std::pair<int, int>> ImageDimensions(const std::string& bytes);

v1::Calibration CalibrationToProto(const CameraModel& camera);
Result<CameraModel> CalibrationFromProto(const v1::Calibration& c);

// Resolves "<tile z/x/y>#<camera index>" to a calibration; nullopt when unknown.
using CalibrationLookup = std::function<std::optional<CameraModel>(const std::string&)>;

// kInvalidArgument (bad image, pixels over max_pixels, features of the wrong size, bad prior) or
// kNotFound (unknown calibration id), each with a message for the caller.
Result<LocateRequest> RequestFromProto(const v1::LocateRequest& r, const CalibrationLookup& lookup,
                                       int64_t max_pixels);
v1::LocateRequest RequestToProto(const std::string& image_bytes, const CameraModel& camera,
                                 const LocateRequest& fields);

v1::Fix FixToProto(const Fix& fix);
Fix FixFromProto(const v1::Fix& fix);
// A client's answer (client/api/client.h) as the engine's Fix; a failed call's status passes.
Result<Fix> FixFromProto(const Result<v1::Fix>& fix);

}  // namespace sightfix
