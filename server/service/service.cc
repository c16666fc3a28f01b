#include "server/service/service.h"

#include <boost/asio.hpp>
#include <boost/beast/core.hpp>
#include <boost/beast/http.hpp>
#include <chrono>
#include <condition_variable>
#include <cstdio>
#include <deque>
#include <fstream>
#include <map>
#include <mutex>
#include <nlohmann/json.hpp>
#include <thread>

#include "indexer/base/parallel.h"
#include "indexer/base/threads.h"
#include "server/wire/wire.h"

namespace sightfix {
namespace {

namespace asio = boost::asio;
namespace http = boost::beast::http;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;

constexpr char kServerVersion[] = "sightfix-server 0.1.0";
// Latency histogram bucket bounds in seconds (Prometheus convention: cumulative, le).
constexpr double kLatencyBuckets[] = {0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10};

bool ConstantTimeEqual(const std::string& a, const std::string& b) {
  unsigned char diff = a.size() == b.size() ? 0 : 1;
  const size_t n = std::max(a.size(), b.size());
  for (size_t i = 0; i < n; ++i)
    diff |= static_cast<unsigned char>(i < a.size() ? a[i] : 0) ^
            static_cast<unsigned char>(i < b.size() ? b[i] : 0);
  return diff == 0;
}

const char* CodeName(v1::Status::Code c) { return v1::Status::Code_Name(c).c_str(); }

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

// Calls by method and status, latency histogram, gauges. Thread-safe.
class Metrics {
 public:
  void Record(const std::string& method, v1::Status::Code code, double seconds) {
    std::lock_guard<std::mutex> lock(mu_);
    ++calls_[{method, CodeName(code)}];
    if (method != "Locate") return;
    ++latency_count_;
    latency_sum_ += seconds;
    for (size_t i = 0; i < std::size(kLatencyBuckets); ++i)
      if (seconds <= kLatencyBuckets[i]) ++buckets_[i];
  }
  std::string Text(int queue_depth, int connections, int tiles_cached, int tiles_bad,
                   int map_version) const {
    std::lock_guard<std::mutex> lock(mu_);
    std::string t =
        "# HELP sightfix_calls_total Calls answered, by method and status.\n"
        "# TYPE sightfix_calls_total counter\n";
    for (const auto& [k, n] : calls_)
      t += "sightfix_calls_total{method=\"" + k.first + "\",status=\"" + k.second + "\"} " +
           std::to_string(n) + "\n";
    t += "# HELP sightfix_locate_seconds Locate latency from receipt to answer.\n"
         "# TYPE sightfix_locate_seconds histogram\n";
    for (size_t i = 0; i < std::size(kLatencyBuckets); ++i) {
      char le[32];
      std::snprintf(le, sizeof(le), "%g", kLatencyBuckets[i]);
      t += "sightfix_locate_seconds_bucket{le=\"" + std::string(le) + "\"} " +
           std::to_string(buckets_[i]) + "\n";
    }
    t += "sightfix_locate_seconds_bucket{le=\"+Inf\"} " + std::to_string(latency_count_) + "\n";
    t += "sightfix_locate_seconds_sum " + std::to_string(latency_sum_) + "\n";
    t += "sightfix_locate_seconds_count " + std::to_string(latency_count_) + "\n";
    auto gauge = [&](const char* name, const char* help, long v) {
      t += std::string("# HELP ") + name + " " + help + "\n# TYPE " + name + " gauge\n" + name +
           " " + std::to_string(v) + "\n";
    };
    gauge("sightfix_queue_depth", "Calls waiting for a worker.", queue_depth);
    gauge("sightfix_connections", "Open client connections.", connections);
    gauge("sightfix_tiles_cached", "Map tiles in memory.", tiles_cached);
    gauge("sightfix_tiles_bad", "Map tiles refused: missing, damaged or unreadable.", tiles_bad);
    gauge("sightfix_map_version", "Version of the map being served.", map_version);
    return t;
  }

 private:
  mutable std::mutex mu_;
  std::map<std::pair<std::string, std::string>, uint64_t> calls_;
  uint64_t buckets_[std::size(kLatencyBuckets)] = {};
  uint64_t latency_count_ = 0;
  double latency_sum_ = 0;
};

class Session;

struct Job {
  std::shared_ptr<Session> session;
  uint64_t call_id = 0;
  LocateRequest request;
  Clock::time_point received, deadline;
};

}  // namespace

struct Service::Impl {
  ServiceOptions o;
  std::string token;
  asio::io_context io;
  tcp::acceptor acceptor{io};
  tcp::acceptor http_acceptor{io};
  asio::signal_set signals{io};
  asio::steady_timer drain_timer{io};
  std::mutex map_mu;
  std::shared_ptr<const Localizer> localizer;  // swapped by Reload
  Metrics metrics;
  Clock::time_point started = Clock::now();

  std::mutex queue_mu;
  std::condition_variable queue_cv;
  std::deque<Job> jobs;
  int running = 0;  // jobs taken by workers, not yet answered
  bool stopping_workers = false;
  std::vector<std::thread> workers;

  std::atomic<int> connections{0};
  std::atomic<bool> draining{false};

  // The scrub: one background thread checks every tile file of the map being served against
  // the catalog's SHA-256, so /healthz and Describe name bad tiles before a call needs them.
  std::mutex scrub_mu;  // guards the three below
  std::thread scrubber;
  std::shared_ptr<std::atomic<bool>> scrub_stop;
  void StartScrub(std::shared_ptr<const Localizer> loc);
  void StopScrub();
  std::string HealthText(bool* ok);

  std::shared_ptr<const Localizer> Current() {
    std::lock_guard<std::mutex> lock(map_mu);
    return localizer;
  }
  void Accept();
  void AcceptHttp();
  void Dispatch(const std::shared_ptr<Session>& s, v1::Envelope env, Clock::time_point received);
  void Answer(const std::shared_ptr<Session>& s, uint64_t id, const std::string& method,
              v1::Status::Code code, const std::string& message, const std::string& body,
              Clock::time_point received, const char* quality = "");
  void WorkerLoop();
  void BeginDrain();
  void CheckDrained();
  std::optional<CameraModel> Calibration(const std::string& id);
  std::string DescribeBody();
  std::string ListTilesBody();
};

namespace {

// One client connection. Lives on the I/O thread; workers post answers to it.
class Session : public std::enable_shared_from_this<Session> {
 public:
  Session(tcp::socket socket, Service::Impl* svc)
      : socket_(std::move(socket)), timer_(socket_.get_executor()), svc_(svc) {
    boost::system::error_code ec;
    const auto ep = socket_.remote_endpoint(ec);
    peer_ = ec ? "?" : ep.address().to_string() + ":" + std::to_string(ep.port());
  }
  ~Session() { --svc_->connections; }

  void Start() { ReadHeader(); }
  const std::string& peer() const { return peer_; }
  bool closed() const { return closed_; }
  bool idle_writes() const { return writes_.empty(); }

  // I/O thread only. Queues a frame; closes the connection when the client is not reading.
  void Send(std::string frame, bool close_after = false) {
    if (closed_) return;
    pending_bytes_ += frame.size();
    if (pending_bytes_ > svc_->o.max_pending_write_bytes) return Close();
    writes_.push_back(std::move(frame));
    close_after_ |= close_after;
    if (!writing_) WriteNext();
  }

  void Close() {
    if (closed_) return;
    closed_ = true;
    timer_.cancel();
    boost::system::error_code ec;
    socket_.shutdown(tcp::socket::shutdown_both, ec);
    socket_.close(ec);
  }

 private:
  void Arm(int ms) {
    timer_.expires_after(std::chrono::milliseconds(ms));
    timer_.async_wait([self = shared_from_this()](const boost::system::error_code& ec) {
      if (!ec) self->Close();  // timed out: slow or idle peer
    });
  }

  void ReadHeader() {
    if (closed_ || svc_->draining) return;
    Arm(svc_->o.idle_timeout_ms);
    asio::async_read(socket_, asio::buffer(header_),
                     [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                       if (ec) return self->Close();
                       self->OnHeader();
                     });
  }

  void OnHeader() {
    const uint32_t n = FrameLength(header_);
    if (n == 0) return Reject(0, "zero-length frame");
    if (n > svc_->o.max_frame_bytes)
      return Reject(0, "frame of " + std::to_string(n) + " bytes is over the " +
                           std::to_string(svc_->o.max_frame_bytes) + "-byte cap");
    body_.resize(n);  // bounded by the cap just checked
    Arm(svc_->o.read_timeout_ms);
    asio::async_read(socket_, asio::buffer(body_),
                     [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                       if (ec) return self->Close();
                       self->OnBody();
                     });
  }

  void OnBody() {
    timer_.cancel();
    const auto received = Clock::now();
    Result<v1::Envelope> env = ParseEnvelope(body_.data(), body_.size());
    body_.clear();
    body_.shrink_to_fit();
    if (!env.ok()) return Reject(0, env.status().message());
    svc_->Dispatch(shared_from_this(), std::move(env).value(), received);
    ReadHeader();  // pipelining: the next call may arrive while this one runs
  }

  // A frame the protocol cannot continue after: answer once, then close this connection.
  void Reject(uint64_t id, const std::string& why) {
    std::fprintf(stderr, "{\"peer\":\"%s\",\"protocol_error\":%s}\n", peer_.c_str(),
                 nlohmann::json(why).dump().c_str());
    v1::Envelope e;
    e.set_call_id(id);
    e.mutable_status()->set_code(v1::Status::INVALID_ARGUMENT);
    e.mutable_status()->set_message(why);
    Send(EncodeFrame(e), true);
  }

  void WriteNext() {
    if (writes_.empty() || closed_) {
      writing_ = false;
      if (close_after_) Close();
      return;
    }
    writing_ = true;
    asio::async_write(socket_, asio::buffer(writes_.front()),
                      [self = shared_from_this()](const boost::system::error_code& ec, size_t n) {
                        if (ec) return self->Close();
                        self->pending_bytes_ -= n;
                        self->writes_.pop_front();
                        self->WriteNext();
                      });
  }

  tcp::socket socket_;
  asio::steady_timer timer_;
  Service::Impl* svc_;
  std::string peer_;
  uint8_t header_[kFrameHeaderBytes];
  std::vector<uint8_t> body_;
  std::deque<std::string> writes_;
  size_t pending_bytes_ = 0;
  bool writing_ = false, closed_ = false, close_after_ = false;
};

class HttpSession : public std::enable_shared_from_this<HttpSession> {
 public:
  HttpSession(tcp::socket socket, Service::Impl* svc) : socket_(std::move(socket)), svc_(svc) {}
  void Start() {
    http::async_read(socket_, buffer_, request_,
                     [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                       if (!ec) self->Respond();
                     });
  }

 private:
  void Respond() {
    auto res = std::make_shared<http::response<http::string_body>>();
    res->version(request_.version());
    res->keep_alive(false);
    const std::string target(request_.target());
    if (target == "/healthz") {
      bool ok = false;
      res->body() = svc_->HealthText(&ok);
      res->result(ok ? http::status::ok : http::status::service_unavailable);
      res->set(http::field::content_type, "text/plain");
    } else if (target == "/metrics") {
      std::shared_ptr<const Localizer> loc = svc_->Current();
      int depth;
      {
        std::lock_guard<std::mutex> lock(svc_->queue_mu);
        depth = static_cast<int>(svc_->jobs.size());
      }
      res->result(http::status::ok);
      res->set(http::field::content_type, "text/plain; version=0.0.4");
      res->body() = svc_->metrics.Text(depth, svc_->connections, loc->tiles_cached(),
                                       static_cast<int>(loc->TileProblems().size()),
                                       loc->catalog().map_version);
    } else {
      res->result(http::status::not_found);
      res->set(http::field::content_type, "text/plain");
      res->body() = "not found: try /healthz or /metrics\n";
    }
    res->prepare_payload();
    http::async_write(socket_, *res,
                      [self = shared_from_this(), res](const boost::system::error_code&, size_t) {
                        boost::system::error_code ec;
                        self->socket_.shutdown(tcp::socket::shutdown_both, ec);
                      });
  }

  tcp::socket socket_;
  Service::Impl* svc_;
  boost::beast::flat_buffer buffer_;
  http::request<http::string_body> request_;
};

Status Bind(tcp::acceptor& acceptor, const std::string& address) {
  std::string host;
  int port;
  if (!SplitHostPort(address, &host, &port))
    return Status::InvalidArgument("address must look like HOST:PORT, got '" + address + "'");
  boost::system::error_code ec;
  const auto ip = asio::ip::make_address(host, ec);
  if (ec) return Status::InvalidArgument("not an IP address: '" + host + "'");
  const tcp::endpoint ep(ip, static_cast<unsigned short>(port));
  acceptor.open(ep.protocol(), ec);
  if (!ec) acceptor.set_option(tcp::acceptor::reuse_address(true), ec);
  if (!ec) acceptor.bind(ep, ec);
  if (!ec) acceptor.listen(asio::socket_base::max_listen_connections, ec);
  if (ec) return Status::IoError("cannot listen on " + address + ": " + ec.message());
  return Status::Ok();
}

bool IsLoopback(const std::string& address) {
  std::string host;
  int port;
  if (!SplitHostPort(address, &host, &port)) return false;
  boost::system::error_code ec;
  const auto ip = asio::ip::make_address(host, ec);
  return !ec && ip.is_loopback();
}

}  // namespace


bool ServiceOptions::Validate(std::string* error) const {
  auto fail = [&](const std::string& m) {
    if (error) *error = m;
    return false;
  };
  if (map_dir.empty()) return fail("map_dir is required");
  if (workers < 0) return fail("workers must be >= 0");
  if (queue < 1) return fail("queue must be >= 1");
  if (max_frame_bytes < 64) return fail("max_frame_bytes must be >= 64");
  if (max_pixels < 1) return fail("max_pixels must be >= 1");
  if (max_connections < 1) return fail("max_connections must be >= 1");
  if (read_timeout_ms < 1 || idle_timeout_ms < 1 || default_deadline_ms < 1)
    return fail("timeouts and the default deadline must be >= 1 ms");
  std::string e;
  if (!engine.Validate(&e)) return fail("engine: " + e);
  return true;
}

Service::Service(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}

Service::~Service() {
  impl_->StopScrub();
  {
    std::lock_guard<std::mutex> lock(impl_->queue_mu);
    impl_->stopping_workers = true;
  }
  impl_->queue_cv.notify_all();
  for (std::thread& t : impl_->workers)
    if (t.joinable()) t.join();
}

int Service::port() const { return impl_->acceptor.local_endpoint().port(); }
int Service::http_port() const {
  return impl_->http_acceptor.is_open() ? impl_->http_acceptor.local_endpoint().port() : 0;
}

Result<std::unique_ptr<Service>> Service::Create(const ServiceOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  auto impl = std::make_unique<Impl>();
  impl->o = o;
  if (!o.token_file.empty()) {
    Result<std::string> token = ReadTokenFile(o.token_file);
    if (!token.ok()) return token.status();
    impl->token = *token;
    if (impl->token.size() < 16)
      return Status::InvalidArgument("token in " + o.token_file + " is shorter than 16 characters");
  }
  if (impl->token.empty() && !o.allow_open &&
      (!IsLoopback(o.listen) || (!o.http.empty() && !IsLoopback(o.http))))
    return Status(StatusCode::kFailedPrecondition,
                  "refusing to listen beyond loopback without --token-file (or --allow-open)");
  auto loc = Localizer::Open(o.map_dir, o.engine);
  if (!loc.ok()) return loc.status();
  impl->localizer = std::move(loc).value();
  if (Status s = Bind(impl->acceptor, o.listen); !s.ok()) return s;
  if (!o.http.empty())
    if (Status s = Bind(impl->http_acceptor, o.http); !s.ok()) return s;
  for (int i = 0; i < ThreadCount(o.workers); ++i)
    impl->workers.emplace_back([p = impl.get()] { p->WorkerLoop(); });
  // Threads start last: a failure above returns with none to stop.
  impl->StartScrub(impl->localizer);
  return std::unique_ptr<Service>(new Service(std::move(impl)));
}

void Service::Impl::Accept() {
  acceptor.async_accept([this](const boost::system::error_code& ec, tcp::socket socket) {
    if (ec) return;  // closed while draining
    if (connections >= o.max_connections) {
      boost::system::error_code ignored;
      socket.close(ignored);  // over the cap: refused at once
    } else {
      ++connections;
      std::make_shared<Session>(std::move(socket), this)->Start();
    }
    Accept();
  });
}

void Service::Impl::AcceptHttp() {
  http_acceptor.async_accept([this](const boost::system::error_code& ec, tcp::socket socket) {
    if (ec) return;
    std::make_shared<HttpSession>(std::move(socket), this)->Start();
    AcceptHttp();
  });
}

void Service::Impl::Answer(const std::shared_ptr<Session>& s, uint64_t id,
                           const std::string& method, v1::Status::Code code,
                           const std::string& message, const std::string& body,
                           Clock::time_point received, const char* quality) {
  v1::Envelope e;
  e.set_call_id(id);
  e.set_method(method);
  e.mutable_status()->set_code(code);
  e.mutable_status()->set_message(message);
  if (code == v1::Status::OK) e.set_body(body);
  const double seconds = std::chrono::duration<double>(Clock::now() - received).count();
  metrics.Record(method, code, seconds);
  std::fprintf(stderr,
               "{\"call\":%llu,\"method\":%s,\"status\":\"%s\",\"ms\":%.1f,\"quality\":\"%s\","
               "\"peer\":\"%s\"}\n",
               static_cast<unsigned long long>(id), nlohmann::json(method).dump().c_str(),
               CodeName(code), 1000 * seconds, quality, s->peer().c_str());
  asio::post(io, [s, frame = EncodeFrame(e)]() mutable { s->Send(std::move(frame)); });
}

std::optional<CameraModel> Service::Impl::Calibration(const std::string& id) {
  // Through the engine's tile cache: the tile is read once, not on every call.
  const size_t hash = id.find('#');
  if (hash == std::string::npos) return std::nullopt;
  return Current()->TileCamera(id.substr(0, hash), std::atoi(id.c_str() + hash + 1));
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

void Service::Impl::StartScrub(std::shared_ptr<const Localizer> loc) {
  if (!o.scrub) return;
  std::lock_guard<std::mutex> lock(scrub_mu);
  if (scrub_stop) scrub_stop->store(true);
  if (scrubber.joinable()) scrubber.join();
  scrub_stop = std::make_shared<std::atomic<bool>>(false);
  scrubber = std::thread([loc = std::move(loc), stop = scrub_stop] {
    const int n = static_cast<int>(loc->catalog().tiles.size());
    for (int i = 0; i < n && !stop->load(); ++i) loc->CheckTile(i);
  });
}

void Service::Impl::StopScrub() {
  std::lock_guard<std::mutex> lock(scrub_mu);
  if (scrub_stop) scrub_stop->store(true);
  if (scrubber.joinable()) scrubber.join();
}

// 200 while the service answers calls from at least one usable tile ("ok", or "degraded" with
// the bad tiles named, one per line); 503 while draining or when no tile is usable.
std::string Service::Impl::HealthText(bool* ok) {
  if (draining) {
    *ok = false;
    return "draining\n";
  }
  std::shared_ptr<const Localizer> loc = Current();
  const std::vector<TileProblem> bad = loc->TileProblems();
  const int tiles = static_cast<int>(loc->catalog().tiles.size());
  const std::string checked = " (" + std::to_string(loc->tiles_checked()) + " of " +
                              std::to_string(tiles) + " tiles checked)\n";
  if (bad.empty()) {
    *ok = true;
    return "ok" + checked;
  }
  *ok = static_cast<int>(bad.size()) < tiles;
  std::string t = (*ok ? "degraded: " : "failing: ") + std::to_string(bad.size()) + " of " +
                  std::to_string(tiles) + " tiles unusable" + checked;
  for (const TileProblem& p : bad) t += p.tile + " " + p.reason + "\n";
  return t;
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
  const uint64_t id = env.call_id();
  const std::string method = env.method();
  if (!token.empty() && !ConstantTimeEqual(env.token(), token))
    return Answer(s, id, method, v1::Status::UNAUTHENTICATED, "missing or wrong token", "",
                  received);
  if (draining)
    return Answer(s, id, method, v1::Status::UNAVAILABLE, "the server is shutting down", "",
                  received);
  if (method == "Describe")
    return Answer(s, id, method, v1::Status::OK, "", DescribeBody(), received);
  if (method == "ListTiles")
    return Answer(s, id, method, v1::Status::OK, "", ListTilesBody(), received);
  if (method != "Locate")
    return Answer(s, id, method, v1::Status::UNIMPLEMENTED,
                  "unknown method '" + method + "' (Locate, Describe, ListTiles)", "", received);
  v1::LocateRequest req;
  if (!req.ParseFromString(env.body()))
    return Answer(s, id, method, v1::Status::INVALID_ARGUMENT, "body is not a LocateRequest", "",
                  received);
  Result<LocateRequest> r = RequestFromProto(
      req, [this](const std::string& cid) { return Calibration(cid); }, o.max_pixels);
  if (!r.ok())
    return Answer(s, id, method, ToWire(r.status().code()), r.status().message(), "", received);
  const int deadline_ms =
      env.deadline_ms() > 0 ? static_cast<int>(env.deadline_ms()) : o.default_deadline_ms;
  {
    std::lock_guard<std::mutex> lock(queue_mu);
    if (static_cast<int>(jobs.size()) < o.queue) {
      jobs.push_back({s, id, std::move(r).value(), received,
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
    if (Clock::now() > job.deadline) {
      Answer(job.session, job.call_id, "Locate", v1::Status::DEADLINE_EXCEEDED,
             "deadline passed while queued", "", job.received);
    } else {
      Result<Fix> fix = Current()->Locate(job.request);
      if (!fix.ok()) {
        Answer(job.session, job.call_id, "Locate", ToWire(fix.status().code()),
               fix.status().message(), "", job.received);
      } else if (Clock::now() > job.deadline) {
        Answer(job.session, job.call_id, "Locate", v1::Status::DEADLINE_EXCEEDED,
               "deadline passed while locating", "", job.received);
      } else {
        v1::LocateResponse resp;
        *resp.mutable_fix() = FixToProto(*fix);
        Answer(job.session, job.call_id, "Locate", v1::Status::OK, "", resp.SerializeAsString(),
               job.received, FixQualityName(fix->quality));
      }
    }
    std::lock_guard<std::mutex> lock(queue_mu);
    --running;
  }
}

void Service::Impl::BeginDrain() {
  if (draining.exchange(true)) return;
  std::fprintf(stderr, "{\"event\":\"draining\"}\n");
  boost::system::error_code ec;
  acceptor.close(ec);
  http_acceptor.close(ec);
  signals.cancel(ec);
  CheckDrained();
}

void Service::Impl::CheckDrained() {
  bool idle;
  {
    std::lock_guard<std::mutex> lock(queue_mu);
    idle = jobs.empty() && running == 0;
  }
  // Answers are posted to the I/O thread before `running` drops, and a posted write runs before
  // this timer's next tick; one more tick lets the last writes reach the sockets.
  drain_timer.expires_after(std::chrono::milliseconds(50));
  drain_timer.async_wait([this, idle](const boost::system::error_code&) {
    if (idle)
      io.stop();
    else
      CheckDrained();
  });
}

Status Service::Run(bool handle_signals) {
  Impl& m = *impl_;
  // Outlives io.run(): the handler re-arms itself with it.
  std::function<void(const boost::system::error_code&, int)> on_signal;
  if (handle_signals) {
    m.signals.add(SIGTERM);
    m.signals.add(SIGINT);
    m.signals.add(SIGHUP);
    on_signal = [&m, this, &on_signal](const boost::system::error_code& ec, int sig) {
      if (ec) return;
      if (sig == SIGHUP) {
        std::thread([this] { Reload(); }).detach();
        m.signals.async_wait(on_signal);
      } else {
        m.BeginDrain();
      }
    };
    m.signals.async_wait(on_signal);
  }
  m.Accept();
  if (m.http_acceptor.is_open()) m.AcceptHttp();
  std::fprintf(stderr, "{\"event\":\"serving\",\"port\":%d,\"http_port\":%d,\"map_version\":%d}\n",
               port(), http_port(), m.Current()->catalog().map_version);
  m.io.run();
  std::fprintf(stderr, "{\"event\":\"stopped\"}\n");
  return Status::Ok();
}

void Service::Shutdown() {
  asio::post(impl_->io, [m = impl_.get()] { m->BeginDrain(); });
}

Status Service::Reload() {
  auto loc = Localizer::Open(impl_->o.map_dir, impl_->o.engine);
  if (!loc.ok()) {
    std::fprintf(stderr, "{\"event\":\"reload_failed\",\"reason\":%s}\n",
                 nlohmann::json(loc.status().ToString()).dump().c_str());
    return loc.status();
  }
  std::shared_ptr<const Localizer> fresh = std::move(loc).value();
  {
    std::lock_guard<std::mutex> lock(impl_->map_mu);
    impl_->localizer = fresh;
  }
  impl_->StartScrub(fresh);
  std::fprintf(stderr, "{\"event\":\"reloaded\",\"map_version\":%d}\n",
               fresh->catalog().map_version);
  return Status::Ok();
}

}  // namespace sightfix
