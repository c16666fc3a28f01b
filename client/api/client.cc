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

#include "indexer/base/endpoint.h"
#include "proto/frame_codec.h"
#include "proto/tls_profile.h"

namespace sightfix {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

// One live connection; replaced whole on reconnect. Its own thread runs every read and write
// of the stream (TLS or plain): an OpenSSL stream must not be read and written from two threads
// at once, so callers post their frames to that thread, which is the stream's one strand.
struct Connection {
  using TlsStream = asio::ssl::stream<tcp::socket>;
  uint32_t max_answer_bytes = 0;
  asio::io_context io;
  tcp::socket socket{io};  // plaintext; moved into tls under TLS
  std::unique_ptr<TlsStream> tls;
  std::thread loop;
  std::mutex mu;  // guards pending and dead
  struct Pending {
    std::promise<Result<Answer>> answer;
    std::string nonce;  // the answer must echo it
  };
  std::map<uint64_t, Pending> pending;
  bool dead = false;
  // The I/O thread's own (no lock).
  uint8_t header[kFrameHeaderBytes];
  std::string body;
  std::deque<std::string> writes;
  bool writing = false;

  tcp::socket& Tcp() { return tls ? tls->next_layer() : socket; }
  template <typename F>
  void OnStream(F&& f) {
    OnFrameStream(tls, socket, f);
  }

  ~Connection() {
    Close();
    if (loop.joinable()) loop.join();
  }

  // From any thread: the I/O thread closes the socket; the pending calls fail from the read.
  void Close() {
    closed_here = true;
    asio::post(io, [this] {
      boost::system::error_code ec;
      Tcp().shutdown(tcp::socket::shutdown_both, ec);
      Tcp().close(ec);
    });
  }

  void Fail(const Status& why) {
    std::lock_guard<std::mutex> lock(mu);
    dead = true;
    for (auto& [id, p] : pending) p.answer.set_value(why);
    pending.clear();
  }

  // A lost connection is worth a retry; a TLS refusal (a bad or missing client certificate, an
  // untrusted server) is not: it would only be refused again.
  void FailRead(const boost::system::error_code& ec) {
    // Ended by the server: its ticket may be one it will not honour (a resumed session it
    // refused after the handshake), so the next connection shakes hands in full.
    if (sessions && !closed_here) sessions->Forget(session_key);
    if (ec.category() == asio::error::get_ssl_category() &&
        ec != asio::ssl::error::stream_truncated)
      return Fail(Status(StatusCode::kFailedPrecondition,
                         "the server ended the TLS session: " + ec.message() +
                             " (is this client's certificate valid, unrevoked and signed by the "
                             "CA the server trusts?)"));
    Fail(Status::IoError("connection lost: " + ec.message()));
  }

  // From any thread.
  void Write(std::string frame) {
    asio::post(io, [this, frame = std::move(frame)]() mutable {
      writes.push_back(std::move(frame));
      if (!writing) WriteNext();
    });
  }

  void WriteNext() {
    if (writes.empty()) {
      writing = false;
      return;
    }
    writing = true;
    OnStream([this](auto& stream) {
      asio::async_write(stream, asio::buffer(writes.front()),
                        [this](const boost::system::error_code& ec, size_t) {
                          if (ec) {  // the read then fails the pending calls
                            boost::system::error_code ignored;
                            Tcp().shutdown(tcp::socket::shutdown_both, ignored);
                            writes.clear();
                            writing = false;
                            return;
                          }
                          writes.pop_front();
                          WriteNext();
                        });
    });
  }

  void ReadHeader() {
    OnStream([this](auto& stream) {
      asio::async_read(stream, asio::buffer(header),
                       [this](const boost::system::error_code& ec, size_t) {
                         if (ec) return FailRead(ec);
                         const uint32_t n = FrameLength(header);
                         if (n > max_answer_bytes)
                           return Fail(Status::IoError("server sent a frame of " +
                                                       std::to_string(n) + " bytes, over the cap"));
                         body.assign(n, '\0');
                         ReadBody();
                       });
    });
  }

  void ReadBody() {
    OnStream([this](auto& stream) {
      asio::async_read(
          stream, asio::buffer(body), [this](const boost::system::error_code& ec, size_t) {
            if (ec) return FailRead(ec);
            Result<v1::Envelope> env = ParseEnvelope(body.data(), body.size());
            if (!env.ok())
              return Fail(Status::IoError("server sent a frame that is not an Envelope"));
            Deliver(*env);
            ReadHeader();
          });
    });
  }

  void Deliver(const v1::Envelope& env) {
    std::lock_guard<std::mutex> lock(mu);
    auto it = pending.find(env.call_id());
    if (it == pending.end()) {
      if (env.call_id() == 0 && env.status().code() != v1::Status::OK) {
        // A protocol error the server could not tie to a call: it closes the connection.
        for (auto& [id, p] : pending)
          p.answer.set_value(Answer{env.status().code(), env.status().message(), {}});
        pending.clear();
      }
      return;
    }
    if (env.nonce() != it->second.nonce)
      it->second.answer.set_value(Status(
          StatusCode::kFailedPrecondition,
          "the answer does not echo its request's nonce (a server older than the nonce, or an "
          "answer that is not this call's)"));
    else
      it->second.answer.set_value(Answer{env.status().code(), env.status().message(), env.body()});
    pending.erase(it);
  }

  // How opening a connection ended: the closed handshake is a server over its handshake limit
  // (or going away), worth another try soon; a refusal (an alert, a certificate either side
  // refused, no ALPN of ours) would only come again.
  struct Opened {
    enum Kind { kOk, kUnreachable, kClosedHandshake, kRefused } kind = kOk;
    std::string why;
  };

  // What a TLS handshake needs: the context, the name the server's certificate must carry,
  // the ticket cache and the time certificates are checked at (Unix seconds).
  struct TlsSetup {
    asio::ssl::context* context = nullptr;  // null: plaintext
    TlsSessionCache* sessions = nullptr;
    std::string server_name;
    int64_t verify_time_unix = 0;
  };
  bool resumed = false;  // the handshake resumed a session
  // The ticket cache and this server's key in it; closed_here: this side closed (Close).
  TlsSessionCache* sessions = nullptr;
  std::string session_key;
  std::atomic<bool> closed_here{false};

  // Before the I/O thread starts: connects (and under TLS shakes hands) within timeout_ms on
  // the calling thread.
  Opened Open(const std::string& host, int port, const TlsSetup& setup, int timeout_ms) {
    auto failed = [](Opened::Kind kind, std::string why) { return Opened{kind, std::move(why)}; };
    boost::system::error_code ec;
    tcp::resolver resolver(io);
    auto resolved = resolver.resolve(host, std::to_string(port), ec);
    if (ec) return failed(Opened::kUnreachable, ec.message());
    bool done = false;
    asio::async_connect(socket, resolved,
                        [&](const boost::system::error_code& e, auto&&) { ec = e, done = true; });
    io.run_for(std::chrono::milliseconds(timeout_ms));
    if (!done)
      return failed(Opened::kUnreachable,
                    "no connection within " + std::to_string(timeout_ms) + " ms");
    if (ec) return failed(Opened::kUnreachable, ec.message());
    socket.set_option(tcp::no_delay(true), ec);
    if (setup.context) {
      tls = std::make_unique<TlsStream>(std::move(socket), *setup.context);
      SSL* ssl = tls->native_handle();
      if (Status s = SetClientServerName(ssl, setup.server_name); !s.ok())
        return failed(Opened::kRefused, s.message());
      SetVerifyTime(ssl, setup.verify_time_unix);
      sessions = setup.sessions;
      session_key = host + ":" + std::to_string(port) + "|" + setup.server_name;
      sessions->Prepare(ssl, session_key);
      io.restart();
      done = false;
      tls->async_handshake(asio::ssl::stream_base::client,
                           [&](const boost::system::error_code& e) { ec = e, done = true; });
      io.run_for(std::chrono::milliseconds(timeout_ms));
      if (!done)
        return failed(Opened::kUnreachable,
                      "TLS handshake not finished within " + std::to_string(timeout_ms) + " ms");
      if (ec) {
        const bool closed = ec == asio::error::eof || ec == asio::error::connection_reset ||
                            ec == asio::ssl::error::stream_truncated;
        const std::string v = VerifyProblem(tls->native_handle());
        return failed(closed ? Opened::kClosedHandshake : Opened::kRefused,
                      "TLS handshake: " + ec.message() + (v.empty() ? "" : ": " + v));
      }
      if (std::string alpn = AlpnProblem(tls->native_handle()); !alpn.empty())
        return failed(Opened::kRefused, "TLS: " + alpn);
      resumed = SSL_session_reused(tls->native_handle()) == 1;
    }
    io.restart();
    return {};
  }

  void Start() {
    ReadHeader();
    loop = std::thread([this] { io.run(); });
  }
};

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
