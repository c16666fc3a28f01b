// The method table (Locate, Describe, ListTiles), the bounded call queue, the workers and the
// deadlines. The I/O thread only authenticates and routes: Describe and ListTiles read in-memory
// state; a Locate is queued whole and parsed on a worker, where its calibration lookup (which may
// load a tile from disk) and the engine run.
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <nlohmann/json.hpp>

#include "indexer/base/threads.h"
#include "server/service/service_impl.h"
#include "server/service/session.h"
#include "server/wire/wire.h"

namespace sightfix {
namespace {

using service_internal::Clock;
using service_internal::CodeName;
using service_internal::Job;

constexpr char kServerVersion[] = "sightfix-server 0.1.0";

bool ConstantTimeEqual(const std::string& a, const std::string& b) {
  unsigned char diff = a.size() == b.size() ? 0 : 1;
  const size_t n = std::max(a.size(), b.size());
  for (size_t i = 0; i < n; ++i)
    diff |= static_cast<unsigned char>(i < a.size() ? a[i] : 0) ^
            static_cast<unsigned char>(i < b.size() ? b[i] : 0);
  return diff == 0;
}

v1::Status::Code ToWire(StatusCode c) {
  switch (c) {
    case StatusCode::kInvalidArgument:
      return v1::Status::INVALID_ARGUMENT;
    case StatusCode::kNotFound:
      return v1::Status::NOT_FOUND;
    default:
      return v1::Status::INTERNAL;
  }
}

// "<tile z/x/y>#<camera index>" through the engine's tile cache: the tile is read once, not on
// every call. Worker threads only: a cold tile is loaded here.
std::optional<CameraModel> Calibration(const Localizer& loc, const std::string& id) {
  const size_t hash = id.find('#');
  if (hash == std::string::npos) return std::nullopt;
  return loc.TileCamera(id.substr(0, hash), std::atoi(id.c_str() + hash + 1));
}

// The engine's request from a LocateRequest body: parse, calibration, the pixel cap (wire.h).
Result<LocateRequest> ParseLocate(const Localizer& loc, const std::string& body,
                                  int64_t max_pixels) {
  v1::LocateRequest req;
  if (!req.ParseFromString(body)) return Status::InvalidArgument("body is not a LocateRequest");
  return RequestFromProto(
      req, [&loc](const std::string& id) { return Calibration(loc, id); }, max_pixels);
}

}  // namespace

void Service::Impl::Answer(const std::shared_ptr<Session>& s, const service_internal::CallId& call,
                           const std::string& method, v1::Status::Code code,
                           const std::string& message, const std::string& body,
                           Clock::time_point received, const char* quality) {
  const uint64_t id = call.id;
  v1::Envelope e;
  e.set_call_id(id);
  e.set_nonce(call.nonce);
  e.set_method(method);
  e.mutable_status()->set_code(code);
  e.mutable_status()->set_message(message);
  if (code == v1::Status::OK) e.set_body(body);
  const double seconds = std::chrono::duration<double>(Clock::now() - received).count();
  metrics.Record(method, code, seconds, s->identity());
  std::fprintf(stderr,
               "{\"call\":%llu,\"method\":%s,\"status\":\"%s\",\"ms\":%.1f,\"quality\":\"%s\","
               "\"peer\":\"%s\",\"client\":%s}\n",
               static_cast<unsigned long long>(id), nlohmann::json(method).dump().c_str(),
               CodeName(code), 1000 * seconds, quality, s->peer().c_str(),
               nlohmann::json(s->identity()).dump().c_str());
  boost::asio::post(io, [s, frame = EncodeFrame(e)]() mutable { s->Send(std::move(frame)); });
}

std::string Service::Impl::DescribeBody() {
  std::shared_ptr<const Localizer> loc = Current();
  v1::DescribeResponse r;
  r.set_map_version(loc->catalog().map_version);
  r.set_model_id(loc->catalog().model_id);
  r.set_tiles(static_cast<int>(loc->catalog().tiles.size()));
  int images = 0;
  for (const CatalogTile& t : loc->catalog().tiles) images += t.images;
  r.set_images(images);
  r.set_server_version(kServerVersion);
  r.set_uptime_s(std::chrono::duration<double>(Clock::now() - started).count());
  r.set_tiles_cached(loc->tiles_cached());
  for (const TileProblem& p : loc->TileProblems()) {
    v1::TileProblem* b = r.add_bad_tiles();
    b->set_tile(p.tile);
    b->set_reason(p.reason);
  }
  r.set_tiles_checked(loc->tiles_checked());
  return r.SerializeAsString();
}

std::string Service::Impl::ListTilesBody() {
  v1::ListTilesResponse r;
  for (const CatalogTile& t : Current()->catalog().tiles) {
    v1::TileInfo* i = r.add_tiles();
    i->set_tile(t.key.ToString());
    i->set_images(t.images);
    i->set_points(t.points);
    i->set_sha256(t.sha256);
  }
  return r.SerializeAsString();
}

void Service::Impl::Dispatch(const std::shared_ptr<Session>& s, v1::Envelope env,
                             Clock::time_point received) {
  const std::string method = env.method();
  if (env.nonce().size() > kMaxNonceBytes)
    return Answer(s, {env.call_id(), ""}, method, v1::Status::INVALID_ARGUMENT,
                  "nonce of " + std::to_string(env.nonce().size()) + " bytes, over " +
                      std::to_string(kMaxNonceBytes),
                  "", received);
  const service_internal::CallId id{env.call_id(), env.nonce()};
  if (o.client_calls_per_s > 0) {
    const std::string client =
        s->identity().empty() ? "address " + s->address() : "client " + s->identity();
    double wait_s = 0;
    if (!TakeShare(client, received, &wait_s)) {
      // Its next calls wait in its socket (TCP holds the sender back) until it has a token
      // again: a flood then costs neither decryption nor parsing here.
      s->HoldReads(wait_s);
      return Answer(s, id, method, v1::Status::RATE_LIMITED,
                    client + " is over its share (" + FormatShare() + "): back off and retry", "",
                    received);
    }
  }
  if (!token.empty() && !ConstantTimeEqual(env.token(), token))
    return Answer(s, id, method, v1::Status::UNAUTHENTICATED, "missing or wrong token", "",
                  received);
  if (draining)
    return Answer(s, id, method, v1::Status::UNAVAILABLE, "the server is shutting down", "",
                  received);
  if (s->retired())
    return Answer(s, id, method, v1::Status::UNAVAILABLE,
                  "this connection reached its age limit (" +
                      std::to_string(o.max_connection_age_s) + " s): reconnect",
                  "", received);
  if (method == "Describe")
    return Answer(s, id, method, v1::Status::OK, "", DescribeBody(), received);
  if (method == "ListTiles")
    return Answer(s, id, method, v1::Status::OK, "", ListTilesBody(), received);
  if (method != "Locate")
    return Answer(s, id, method, v1::Status::UNIMPLEMENTED,
                  "unknown method '" + method + "' (Locate, Describe, ListTiles)", "", received);
  const int deadline_ms =
      env.deadline_ms() > 0 ? static_cast<int>(env.deadline_ms()) : o.default_deadline_ms;
  {
    std::lock_guard<std::mutex> lock(queue_mu);
    if (static_cast<int>(jobs.size()) < o.queue) {
      jobs.push_back({s, id, std::move(*env.mutable_body()), received,
                      received + std::chrono::milliseconds(deadline_ms)});
      queue_cv.notify_one();
      return;
    }
  }
  Answer(s, id, method, v1::Status::OVERLOADED, "queue full (" + std::to_string(o.queue) + ")", "",
         received);
}

void Service::Impl::WorkerLoop() {
  PinLibraryThreads();
  for (;;) {
    Job job;
    {
      std::unique_lock<std::mutex> lock(queue_mu);
      queue_cv.wait(lock, [&] { return stopping_workers || !jobs.empty(); });
      if (jobs.empty()) return;
      job = std::move(jobs.front());
      jobs.pop_front();
      ++running;
    }
    RunLocate(job);
    std::lock_guard<std::mutex> lock(queue_mu);
    --running;
  }
}

void Service::Impl::RunLocate(const Job& job) {
  auto answer = [&](v1::Status::Code code, const std::string& message, const std::string& body = "",
                    const char* quality = "") {
    Answer(job.session, job.call, "Locate", code, message, body, job.received, quality);
  };
  if (Clock::now() > job.deadline)
    return answer(v1::Status::DEADLINE_EXCEEDED, "deadline passed while queued");
  // One map for the whole call: a reload meanwhile does not mix two maps' tiles.
  const std::shared_ptr<const Localizer> loc = Current();
  Result<LocateRequest> request = ParseLocate(*loc, job.body, o.max_pixels);
  if (!request.ok()) return answer(ToWire(request.status().code()), request.status().message());
  Result<Fix> fix = loc->Locate(*request);
  if (!fix.ok()) return answer(ToWire(fix.status().code()), fix.status().message());
  if (Clock::now() > job.deadline)
    return answer(v1::Status::DEADLINE_EXCEEDED, "deadline passed while locating");
  v1::LocateResponse resp;
  *resp.mutable_fix() = FixToProto(*fix);
  answer(v1::Status::OK, "", resp.SerializeAsString(), FixQualityName(fix->quality));
}

}  // namespace sightfix
