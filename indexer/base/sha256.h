// SHA-256 (FIPS 180-4) of bytes and files, as lowercase hex. Used for tile checksums in the
// catalog and for model ids. Thread-safe (pure functions).
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

std::string Sha256Hex(const void* data, size_t size);
inline std::string Sha256Hex(const std::vector<uint8_t>& bytes) {
  return Sha256Hex(bytes.data(), bytes.size());
}
// Streams the file; kNotFound / kIoError when it cannot be read.
Result<std::string> Sha256OfFile(const std::string& path);

}  // namespace sightfix
