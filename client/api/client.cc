#include "client/api/client.h"

#include <atomic>
#include <boost/asio.hpp>
#include <boost/asio/ssl.hpp>
#include <chrono>
#include <cstring>
#include <deque>
#include <map>
#include <mutex>
#include <random>
#include <thread>

#include "client/api/connection.h"
#include "indexer/base/endpoint.h"
#include "proto/frame_codec.h"
#include "proto/tls_profile.h"

namespace sightfix {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;
using client_internal::Connection;

struct Client::Impl {
  ClientOptions o;
  std::vector<std::pair<std::string, int>> endpoints;  // host, port
  std::mutex mu;  // guards conn, current, failovers and next_id
  std::shared_ptr<Connection> conn;
  std::shared_ptr<asio::ssl::context> tls;  // null: plaintext
  std::shared_ptr<TlsSessionCache> tls_sessions;
  // The holdover clock (CertificateClock::kHoldover): wall_clock's reading at the first
  // connect and the monotonic time then.
  std::chrono::system_clock::time_point anchor_wall;
  std::chrono::steady_clock::time_point anchor_steady;
  std::atomic<uint64_t> resumed{0};
  size_t current = 0;  // the endpoint conn is (or was last) connected to
  uint64_t next_id = 1;
  std::mt19937_64 random{std::random_device{}()};  // nonces and jitter; guarded by mu
  std::atomic<uint64_t> resent{0};

  std::string Label(size_t i) const {
    return endpoints[i].first + ":" + std::to_string(endpoints[i].second);
  }
  std::string AllLabels() const {
    std::string s;
    for (size_t i = 0; i < endpoints.size(); ++i) s += (i ? ", " : "") + Label(i);
    return s;
  }

  // The live connection, or a new one: after a lost connection, from the next endpoint on.
  // kFailedPrecondition when an endpoint refused (TLS), kIoError otherwise; *closed_handshake
  // when one closed the handshake unrefused (over its handshake limit: worth trying again).
  Result<std::shared_ptr<Connection>> Live(bool* closed_handshake = nullptr) {
    std::lock_guard<std::mutex> lock(mu);
    if (conn) {
      std::lock_guard<std::mutex> l2(conn->mu);
      if (!conn->dead) return conn;
    }
    const size_t n = endpoints.size();
    const size_t first = conn ? (current + 1) % n : current;
    std::string why;
    bool refused = false;
    if (closed_handshake) *closed_handshake = false;
    for (size_t k = 0; k < n; ++k) {
      const size_t i = (first + k) % n;
      auto c = std::make_shared<Connection>();
      c->max_answer_bytes = o.max_answer_bytes;
      Connection::TlsSetup setup;
      if (tls)
        setup = {tls.get(), tls_sessions.get(),
                 o.tls_server_name.empty() ? endpoints[i].first : o.tls_server_name,
                 CertificateTime()};
      const Connection::Opened opened =
          c->Open(endpoints[i].first, endpoints[i].second, setup, o.connect_timeout_ms);
      if (opened.kind != Connection::Opened::kOk) {
        refused = refused || opened.kind == Connection::Opened::kRefused;
        if (closed_handshake && opened.kind == Connection::Opened::kClosedHandshake)
          *closed_handshake = true;
        why += (why.empty() ? "" : "; ") + Label(i) + ": " + opened.why;
        continue;
      }
      resumed += c->resumed;
      c->Start();
      conn = c;
      current = i;
      return c;
    }
    const std::string what =
        "cannot connect to " + (n == 1 ? why : "any of " + AllLabels() + " (" + why + ")");
    return refused ? Status(StatusCode::kFailedPrecondition, what) : Status::IoError(what);
  }

  // Unix seconds at which the server's certificate is checked (ClientOptions::CertificateClock).
  int64_t CertificateTime() const {
    using std::chrono::system_clock;
    const system_clock::time_point t =
        o.certificate_clock == ClientOptions::CertificateClock::kWallClock
            ? o.wall_clock()
            : anchor_wall + std::chrono::duration_cast<system_clock::duration>(
                                std::chrono::steady_clock::now() - anchor_steady);
    return std::chrono::duration_cast<std::chrono::seconds>(t.time_since_epoch()).count();
  }

  // 16 random bytes: the nonce a call's answer must echo.
  std::string NewNonce() {
    std::lock_guard<std::mutex> lock(mu);
    std::string nonce(16, '\0');
    for (size_t k = 0; k < nonce.size(); k += 8) {
      const uint64_t r = random();
      std::memcpy(&nonce[k], &r, 8);
    }
    return nonce;
  }

  // A pause of 0.5 to 1.5 x backoff_ms, so that clients refused together do not come back
  // together.
  int Jittered(int backoff_ms) {
    std::lock_guard<std::mutex> lock(mu);
    return static_cast<int>(backoff_ms * std::uniform_real_distribution<double>(0.5, 1.5)(random));
  }

  std::future<Result<Answer>> Send(const std::string& method, const std::string& body,
                                   int deadline_ms, std::shared_ptr<Connection>* used) {
    std::promise<Result<Answer>> failed;
    Result<std::shared_ptr<Connection>> c = Live();
    if (!c.ok()) {
      failed.set_value(c.status());
      return failed.get_future();
    }
    *used = *c;
    v1::Envelope e;
    {
      std::lock_guard<std::mutex> lock(mu);
      e.set_call_id(next_id++);
    }
    e.set_method(method);
    e.set_deadline_ms(static_cast<uint32_t>(std::max(0, deadline_ms)));
    e.set_token(o.token);
    e.set_body(body);
    e.set_nonce(NewNonce());
    std::future<Result<Answer>> f;
    {
      std::lock_guard<std::mutex> lock((*c)->mu);
      if ((*c)->dead) {
        failed.set_value(Status::IoError("connection lost"));
        return failed.get_future();
      }
      Connection::Pending& p = (*c)->pending[e.call_id()];
      p.nonce = e.nonce();
      f = p.answer.get_future();
    }
    (*c)->Write(EncodeFrame(e));
    return f;
  }

  Result<Answer> Call(const std::string& method, const std::string& body, int deadline_ms) {
    const auto start = std::chrono::steady_clock::now();
    auto elapsed_ms = [&] {
      return std::chrono::duration_cast<std::chrono::milliseconds>(
                 std::chrono::steady_clock::now() - start)
          .count();
    };
    Result<Answer> last = Status::IoError("no attempt made");
    int backoff_ms = o.retry_backoff_ms;
    for (int attempt = 0;; ++attempt) {
      std::shared_ptr<Connection> used;
      const int left_ms = std::max<int>(1, deadline_ms - static_cast<int>(elapsed_ms()));
      const auto sent = std::chrono::steady_clock::now();
      std::future<Result<Answer>> f = Send(method, body, left_ms, &used);
      // The server answers DEADLINE_EXCEEDED itself; the margin covers the network.
      if (f.wait_for(std::chrono::milliseconds(left_ms + 2000)) != std::future_status::ready)
        return Status::Internal(method + ": no answer within the deadline");
      last = f.get();
      const auto age_ms = std::chrono::duration_cast<std::chrono::milliseconds>(
                              std::chrono::steady_clock::now() - sent)
                              .count();
      if (last.ok() && o.max_answer_age_ms > 0 && age_ms > o.max_answer_age_ms)
        return Status(StatusCode::kFailedPrecondition,
                      method + ": stale answer, " + std::to_string(age_ms) +
                          " ms after its request (max_answer_age_ms " +
                          std::to_string(o.max_answer_age_ms) + "): held up on the way?");
      const bool shutting_down = last.ok() && last->code == v1::Status::UNAVAILABLE;
      if (shutting_down && used) {  // this server is draining: the next attempt reconnects
        used->Close();
        std::lock_guard<std::mutex> lock(used->mu);
        used->dead = true;
      }
      const bool over_share = last.ok() && last->code == v1::Status::RATE_LIMITED;
      if (!shutting_down && !over_share &&
          (last.ok() || last.status().code() != StatusCode::kIoError))
        return last;
      // Lost or refused connection, a server shutting down, or this client over its share:
      // again after a pause, while the deadline leaves time. The pause is jittered (0.5 to 1.5
      // of the backoff), so that clients refused together do not come back together.
      const int pause_ms = Jittered(backoff_ms);
      if (attempt >= o.retries || elapsed_ms() + pause_ms >= deadline_ms) {
        if (shutting_down || over_share) return last;  // the server's own answer says why
        break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(pause_ms));
      backoff_ms = std::min(2 * backoff_ms, 2000);
      ++resent;
    }
    return Status::IoError(method + ": no answer from " + AllLabels() + " after retrying for " +
                           std::to_string(elapsed_ms()) +
                           " ms (server down or restarting?): " + last.status().message());
  }
};

Client::Client(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}

uint64_t Client::resent_calls() const { return impl_->resent.load(); }

std::string Client::endpoint() const {
  std::lock_guard<std::mutex> lock(impl_->mu);
  return impl_->Label(impl_->current);
}
Client::~Client() = default;

void Client::Disconnect() {
  std::shared_ptr<Connection> c;
  {
    std::lock_guard<std::mutex> lock(impl_->mu);
    c = impl_->conn;
  }
  if (!c) return;
  {
    std::lock_guard<std::mutex> lock(c->mu);
    c->dead = true;  // no new call on it; the ones in flight fail from the read and go again
  }
  c->Close();
}

uint64_t Client::resumed_handshakes() const { return impl_->resumed.load(); }

Result<std::unique_ptr<Client>> Client::Connect(const ClientOptions& options) {
  auto impl = std::make_unique<Impl>();
  impl->o = options;
  if (options.endpoints.empty()) impl->endpoints.emplace_back(options.host, options.port);
  for (const std::string& e : options.endpoints) {
    std::string host;
    int port = 0;
    if (!SplitHostPort(e, &host, &port))
      return Status::InvalidArgument("endpoint '" + e + "' does not look like HOST:PORT");
    impl->endpoints.emplace_back(host, port);
  }
  const bool tls = !options.tls_ca_file.empty();
  if (!tls && (!options.tls_cert_file.empty() || !options.tls_key_file.empty() ||
               !options.tls_server_name.empty()))
    return Status::InvalidArgument(
        "TLS options need the CA bundle that signs the server's certificate (tls_ca_file)");
  if (tls) {
    auto ctx =
        MakeClientTlsContext({options.tls_cert_file, options.tls_key_file, options.tls_ca_file});
    if (!ctx.ok()) return ctx.status();
    impl->tls = *ctx;
    impl->tls_sessions = TlsSessionCache::Install(impl->tls.get());
    if (!options.wall_clock) return Status::InvalidArgument("wall_clock must be set");
    impl->anchor_wall = options.wall_clock();
    impl->anchor_steady = std::chrono::steady_clock::now();
  }
  // A server over its handshake limit closes the handshake: tried again, with jittered
  // doubling pauses, within connect_timeout_ms.
  const auto start = std::chrono::steady_clock::now();
  bool closed_handshake = false;
  Result<std::shared_ptr<Connection>> c = impl->Live(&closed_handshake);
  for (int attempt = 0, backoff_ms = options.retry_backoff_ms;
       !c.ok() && closed_handshake && attempt < options.retries;
       ++attempt, backoff_ms = std::min(2 * backoff_ms, 2000)) {
    const int pause_ms = impl->Jittered(backoff_ms);
    const auto waited = std::chrono::duration_cast<std::chrono::milliseconds>(
                            std::chrono::steady_clock::now() - start)
                            .count();
    if (waited + pause_ms >= options.connect_timeout_ms) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(pause_ms));
    c = impl->Live(&closed_handshake);
  }
  if (!c.ok()) return c.status();
  return std::unique_ptr<Client>(new Client(std::move(impl)));
}

std::future<Result<Answer>> Client::CallAsync(const std::string& method, const std::string& body,
                                              int deadline_ms) {
  return std::async(std::launch::async, [impl = impl_, method, body, deadline_ms] {
    return impl->Call(method, body, deadline_ms);
  });
}

Result<Answer> Client::Call(const std::string& method, const std::string& body, int deadline_ms) {
  return impl_->Call(method, body, deadline_ms);
}

namespace {

template <typename T>
Result<T> Typed(const Result<Answer>& a, const char* method) {
  if (!a.ok()) return a.status();
  if (a->code != v1::Status::OK)
    return Status(a->code == v1::Status::INVALID_ARGUMENT ? StatusCode::kInvalidArgument
                  : a->code == v1::Status::NOT_FOUND      ? StatusCode::kNotFound
                                                          : StatusCode::kFailedPrecondition,
                  std::string(method) + ": " + v1::Status::Code_Name(a->code) + ": " + a->message);
  T out;
  if (!out.ParseFromString(a->body))
    return Status::Corrupt(std::string(method) + ": bad answer body");
  return out;
}

}  // namespace

Result<v1::Fix> Client::Locate(const v1::LocateRequest& request, int deadline_ms) {
  Result<v1::LocateResponse> r =
      Typed<v1::LocateResponse>(Call("Locate", request.SerializeAsString(), deadline_ms), "Locate");
  if (!r.ok()) return r.status();
  return r->fix();
}

Result<v1::DescribeResponse> Client::Describe(int deadline_ms) {
  return Typed<v1::DescribeResponse>(Call("Describe", "", deadline_ms), "Describe");
}

Result<v1::ListTilesResponse> Client::ListTiles(int deadline_ms) {
  return Typed<v1::ListTilesResponse>(Call("ListTiles", "", deadline_ms), "ListTiles");
}

}  // namespace sightfix
