// Frames on the wire: a 4-byte big-endian length N, then N bytes of one serialized
// sightfix.v1.Envelope (proto/sightfix.proto). Shared by server and client. Thread-safe (pure
// functions).
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>

#include "indexer/base/status.h"
#include "proto/sightfix.pb.h"

namespace sightfix {

constexpr size_t kFrameHeaderBytes = 4;
// Default cap on N: an 8 MiB frame holds a 640x480 JPEG many times over.
constexpr uint32_t kDefaultMaxFrameBytes = 8u << 20;
// The longest Envelope.nonce a server echoes (longer: INVALID_ARGUMENT).
constexpr size_t kMaxNonceBytes = 32;

// Header plus payload, ready to write.
std::string EncodeFrame(const v1::Envelope& envelope);
// N from the 4 header bytes.
uint32_t FrameLength(const uint8_t header[kFrameHeaderBytes]);
// kInvalidArgument when the bytes are not an Envelope.
Result<v1::Envelope> ParseEnvelope(const void* data, size_t size);

}  // namespace sightfix
