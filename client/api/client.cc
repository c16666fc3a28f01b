#include "client/api/client.h"

#include <atomic>
#include <boost/asio.hpp>
#include <chrono>
#include <map>
#include <mutex>
#include <thread>

#include "indexer/base/endpoint.h"
#include "proto/frame_codec.h"

namespace sightfix {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

// One live connection with its reader thread; replaced whole on reconnect.
struct Connection {
  uint32_t max_answer_bytes = 0;
  asio::io_context io;
  tcp::socket socket{io};
  std::thread reader;
  std::mutex mu;  // guards pending and dead
  std::map<uint64_t, std::promise<Result<Answer>>> pending;
  bool dead = false;
  std::mutex write_mu;

  ~Connection() {
    // shutdown wakes the reader's blocking read; close only once it has returned (closing under
    // a read is a data race on the socket, ThreadSanitizer found).
    boost::system::error_code ec;
    socket.shutdown(tcp::socket::shutdown_both, ec);
    if (reader.joinable()) reader.join();
    socket.close(ec);
  }

  void Fail(const std::string& why) {
    std::lock_guard<std::mutex> lock(mu);
    dead = true;
    for (auto& [id, p] : pending) p.set_value(Status::IoError(why));
    pending.clear();
  }

  void ReadLoop() {
    for (;;) {
      uint8_t header[kFrameHeaderBytes];
      boost::system::error_code ec;
      asio::read(socket, asio::buffer(header), ec);
      if (ec) return Fail("connection lost: " + ec.message());
      const uint32_t n = FrameLength(header);
      if (n > max_answer_bytes)
        return Fail("server sent a frame of " + std::to_string(n) + " bytes, over the cap");
      std::string body(n, '\0');
      asio::read(socket, asio::buffer(body), ec);
      if (ec) return Fail("connection lost: " + ec.message());
      Result<v1::Envelope> env = ParseEnvelope(body.data(), body.size());
      if (!env.ok()) return Fail("server sent a frame that is not an Envelope");
      std::lock_guard<std::mutex> lock(mu);
      auto it = pending.find(env->call_id());
      if (it == pending.end()) {
        if (env->call_id() == 0 && env->status().code() != v1::Status::OK) {
          // A protocol error the server could not tie to a call: it closes the connection.
          for (auto& [id, p] : pending)
            p.set_value(Answer{env->status().code(), env->status().message(), {}});
          pending.clear();
        }
        continue;
      }
      it->second.set_value(Answer{env->status().code(), env->status().message(), env->body()});
      pending.erase(it);
    }
  }
};

struct Client::Impl {
  ClientOptions o;
  std::vector<std::pair<std::string, int>> endpoints;  // host, port
  std::mutex mu;  // guards conn, current, failovers and next_id
  std::shared_ptr<Connection> conn;
  size_t current = 0;  // the endpoint conn is (or was last) connected to
  uint64_t next_id = 1;
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
  Result<std::shared_ptr<Connection>> Live() {
    std::lock_guard<std::mutex> lock(mu);
    if (conn) {
      std::lock_guard<std::mutex> l2(conn->mu);
      if (!conn->dead) return conn;
    }
    const size_t n = endpoints.size();
    const size_t first = conn ? (current + 1) % n : current;
    std::string why;
    for (size_t k = 0; k < n; ++k) {
      const size_t i = (first + k) % n;
      auto c = std::make_shared<Connection>();
      c->max_answer_bytes = o.max_answer_bytes;
      boost::system::error_code ec;
      tcp::resolver resolver(c->io);
      auto resolved = resolver.resolve(endpoints[i].first, std::to_string(endpoints[i].second), ec);
      if (!ec) asio::connect(c->socket, resolved, ec);
      if (ec) {
        why += (why.empty() ? "" : "; ") + Label(i) + ": " + ec.message();
        continue;
      }
      c->socket.set_option(tcp::no_delay(true), ec);
      c->reader = std::thread([raw = c.get()] { raw->ReadLoop(); });
      conn = c;
      current = i;
      return c;
    }
    return Status::IoError("cannot connect to " +
                           (n == 1 ? why : "any of " + AllLabels() + " (" + why + ")"));
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
    std::future<Result<Answer>> f;
    {
      std::lock_guard<std::mutex> lock((*c)->mu);
      if ((*c)->dead) {
        failed.set_value(Status::IoError("connection lost"));
        return failed.get_future();
      }
      f = (*c)->pending[e.call_id()].get_future();
    }
    const std::string frame = EncodeFrame(e);
    boost::system::error_code ec;
    {
      std::lock_guard<std::mutex> lock((*c)->write_mu);
      asio::write((*c)->socket, asio::buffer(frame), ec);
    }
    if (ec) {
      boost::system::error_code ignored;
      (*c)->socket.shutdown(tcp::socket::shutdown_both, ignored);  // reader fails the pending
    }
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
      std::future<Result<Answer>> f = Send(method, body, left_ms, &used);
      // The server answers DEADLINE_EXCEEDED itself; the margin covers the network.
      if (f.wait_for(std::chrono::milliseconds(left_ms + 2000)) != std::future_status::ready)
        return Status::Internal(method + ": no answer within the deadline");
      last = f.get();
      const bool shutting_down = last.ok() && last->code == v1::Status::UNAVAILABLE;
      if (shutting_down && used) {  // this server is draining: the next attempt reconnects
        boost::system::error_code ignored;
        used->socket.shutdown(tcp::socket::shutdown_both, ignored);
        std::lock_guard<std::mutex> lock(used->mu);
        used->dead = true;
      }
      if (!shutting_down && (last.ok() || last.status().code() != StatusCode::kIoError))
        return last;
      // Lost or refused connection, or a server shutting down: again after a pause, while the
      // deadline leaves time.
      if (attempt >= o.retries || elapsed_ms() + backoff_ms >= deadline_ms) {
        if (shutting_down) return last;  // the server's own answer says why
        break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(backoff_ms));
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
  Result<std::shared_ptr<Connection>> c = impl->Live();
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
