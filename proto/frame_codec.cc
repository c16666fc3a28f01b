#include "proto/frame_codec.h"

namespace sightfix {

std::string EncodeFrame(const v1::Envelope& envelope) {
  const std::string payload = envelope.SerializeAsString();
  const uint32_t n = static_cast<uint32_t>(payload.size());
  std::string frame(kFrameHeaderBytes, '\0');
  for (size_t i = 0; i < kFrameHeaderBytes; ++i)
    frame[i] = static_cast<char>((n >> (8 * (kFrameHeaderBytes - 1 - i))) & 0xff);
  return frame + payload;
}

uint32_t FrameLength(const uint8_t header[kFrameHeaderBytes]) {
  return uint32_t(header[0]) << 24 | uint32_t(header[1]) << 16 | uint32_t(header[2]) << 8 |
         header[3];
}

Result<v1::Envelope> ParseEnvelope(const void* data, size_t size) {
  v1::Envelope e;
  if (!e.ParseFromArray(data, static_cast<int>(size)))
    return Status::InvalidArgument("frame is not a sightfix.v1.Envelope");
  return e;
}

}  // namespace sightfix
