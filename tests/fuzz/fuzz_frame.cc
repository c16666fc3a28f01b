// libFuzzer target: a frame as the server reads it off a socket. The 4-byte length against the
// cap and the rest, the Envelope parse, and for a Locate call the request's checks before any
// image decode (pixel count from the JPEG/PNG header under a small cap, calibration, prior).
// Invariants: a parsed Envelope re-encodes to a frame that parses again; an accepted request
// carries a valid calibration (its sigmas finite and >= 0 included).
#include <cstring>

#include "proto/frame_codec.h"
#include "server/wire/wire.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  if (size < kFrameHeaderBytes) return 0;
  const uint32_t n = FrameLength(data);
  if (n == 0 || n > kDefaultMaxFrameBytes) return 0;  // the server refuses these unread
  const size_t body = std::min<size_t>(n, size - kFrameHeaderBytes);
  Result<v1::Envelope> env = ParseEnvelope(data + kFrameHeaderBytes, body);
  if (!env.ok()) return 0;
  const std::string again = EncodeFrame(*env);
  FUZZ_CHECK(again.size() >= kFrameHeaderBytes);
  FUZZ_CHECK(FrameLength(reinterpret_cast<const uint8_t*>(again.data())) ==
             again.size() - kFrameHeaderBytes);
  FUZZ_CHECK(
      ParseEnvelope(again.data() + kFrameHeaderBytes, again.size() - kFrameHeaderBytes).ok());
  if (env->method() != "Locate") return 0;
  v1::LocateRequest r;
  if (!r.ParseFromString(env->body())) return 0;
  ImageDimensions(r.image());
  CameraModel known;  // what a calibration id resolves to
  known.width_px = 64, known.height_px = 48, known.fx = known.fy = 50, known.cx = 32, known.cy = 24;
  auto lookup = [&](const std::string& id) -> std::optional<CameraModel> {
    if (id == "18/1/1#0") return known;
    return std::nullopt;
  };
  Result<LocateRequest> req = RequestFromProto(r, lookup, 64 * 64);
  if (req.ok()) {
    FUZZ_CHECK(req->camera.IsValid(nullptr));
  }
  return 0;
}
