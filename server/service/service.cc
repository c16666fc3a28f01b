// Lifecycle: options, create (bind, workers, scrub), run, drain, reload. The parts of a running
// service are in session.cc, dispatch.cc and http_port.cc (service_impl.h).
#include "server/service/service.h"

#include <algorithm>
#include <boost/asio.hpp>
#include <cstdio>
#include <functional>
#include <nlohmann/json.hpp>
#include <thread>

#include "indexer/base/parallel.h"
#include "proto/tls_profile.h"
#include "server/service/service_impl.h"
#include "server/service/session.h"

namespace sightfix {
namespace {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

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

struct TlsState {
  std::shared_ptr<asio::ssl::context> context;
  std::shared_ptr<const CrlSet> crls;
};

// The query port's TLS context from the options' files (at start, and again on SIGHUP).
Result<TlsState> LoadTls(const ServiceOptions& o) {
  TlsState t;
  Result<std::shared_ptr<asio::ssl::context>> ctx =
      MakeServerTlsContext({o.tls_cert_file, o.tls_key_file, o.tls_client_ca_file});
  if (!ctx.ok()) return ctx.status();
  t.context = *ctx;
  if (!o.tls_crl_file.empty()) {
    Result<std::shared_ptr<const CrlSet>> crls =
        AddCrl(t.context.get(), o.tls_crl_file, o.tls_client_ca_file, o.tls_crl_grace_s);
    if (!crls.ok()) return crls.status();
    t.crls = *crls;
  }
  return t;
}

bool IsLoopback(const std::string& address) {
  std::string host;
  int port;
  if (!SplitHostPort(address, &host, &port)) return false;
  boost::system::error_code ec;
  const auto ip = asio::ip::make_address(host, ec);
  return !ec && ip.is_loopback();
}

// Under TLS the HTTP port speaks TLS too beyond loopback (local scrapers keep plaintext).
bool HttpNeedsTls(const ServiceOptions& o) {
  return !o.tls_cert_file.empty() && !o.http.empty() && !IsLoopback(o.http);
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
  const int tls_files =
      !tls_cert_file.empty() + !tls_key_file.empty() + !tls_client_ca_file.empty();
  if (tls_files != 0 && tls_files != 3)
    return fail("TLS needs all three: the server's certificate, its key and the client CA");
  if (!tls_crl_file.empty() && tls_files == 0) return fail("a CRL file needs TLS");
  if (!http_client_ca_file.empty() && tls_files == 0)
    return fail("an HTTP client CA (monitoring CA) needs TLS");
  if (max_handshakes < 1 || max_handshakes_per_address < 1)
    return fail("max_handshakes and max_handshakes_per_address must be >= 1");
  if (!(client_calls_per_s >= 0) || client_burst < 1)
    return fail("client_calls_per_s must be >= 0 (0: no limit) and client_burst >= 1");
  if (tls_crl_grace_s < 0) return fail("the CRL grace must be >= 0 seconds");
  if (!(handshake_rate_per_address >= 0))
    return fail("handshake_rate_per_address must be >= 0 (0: no limit)");
  if (flood_block_s < 0) return fail("flood_block_s must be >= 0 (0: no blocking)");
  if (max_connection_age_s < 0) return fail("max_connection_age_s must be >= 0 (0: no limit)");
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
  const bool tls = !o.tls_cert_file.empty();
  if (!o.allow_plaintext && !tls && !IsLoopback(o.listen))
    return Status(StatusCode::kFailedPrecondition,
                  "refusing to serve beyond loopback in plaintext: give --tls-cert, --tls-key "
                  "and --tls-client-ca (or --plaintext-beyond-loopback, not advised)");
  if (!o.allow_plaintext && !tls && !o.http.empty() && !IsLoopback(o.http))
    return Status(StatusCode::kFailedPrecondition,
                  "refusing to serve /healthz and /metrics beyond loopback in plaintext: give "
                  "--tls-cert, --tls-key and --tls-client-ca (the HTTP port then speaks TLS "
                  "too), keep --http on loopback, or --plaintext-beyond-loopback (not advised)");
  if (impl->token.empty() && !o.allow_open && !tls &&
      (!IsLoopback(o.listen) || (!o.http.empty() && !IsLoopback(o.http))))
    return Status(StatusCode::kFailedPrecondition,
                  "refusing to listen beyond loopback in plaintext without --token-file (or "
                  "--allow-open)");
  if (tls) {
    Result<TlsState> t = LoadTls(o);
    if (!t.ok()) return t.status();
    impl->tls = t->context, impl->crls = t->crls;
    impl->crl_next_update = t->crls ? t->crls->next_update_unix : 0;
    if (!t->crls)
      std::fprintf(stderr,
                   "{\"event\":\"warning\",\"reason\":\"TLS without a CRL (--tls-crl): a revoked "
                   "vehicle certificate is accepted until it expires\"}\n");
  }
  if (HttpNeedsTls(o)) {
    Result<std::shared_ptr<asio::ssl::context>> http_tls = impl->LoadHttpTls();
    if (!http_tls.ok()) return http_tls.status();
    impl->http_tls = *http_tls;
  }
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
    } else if (tls && !AdmitAtAccept(&socket)) {
      // refused before a session or any TLS state is made for it
    } else {
      ++connections;
      auto session = std::make_shared<Session>(std::move(socket), this);
      if (tls) {  // kept to be checked against a reloaded CRL; dead ones pruned as it grows
        if (sessions.size() >= 2 * static_cast<size_t>(o.max_connections))
          sessions.erase(std::remove_if(sessions.begin(), sessions.end(),
                                        [](const auto& w) { return w.expired(); }),
                         sessions.end());
        sessions.push_back(session);
      }
      session->Start();
    }
    Accept();
  });
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

void Service::Impl::BeginDrain() {
  if (draining.exchange(true)) return;
  std::fprintf(stderr, "{\"event\":\"draining\"}\n");
  boost::system::error_code ec;
  acceptor.close(ec);
  http_acceptor.close(ec);
  signals.cancel(ec);
  block_timer.cancel();
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
  std::fprintf(stderr,
               "{\"event\":\"serving\",\"port\":%d,\"http_port\":%d,\"map_version\":%d,"
               "\"tls\":%s,\"http_tls\":%s}\n",
               port(), http_port(), m.Current()->catalog().map_version, m.tls ? "true" : "false",
               m.http_tls ? "true" : "false");
  m.io.run();
  std::fprintf(stderr, "{\"event\":\"stopped\"}\n");
  return Status::Ok();
}

void Service::Shutdown() {
  asio::post(impl_->io, [m = impl_.get()] { m->BeginDrain(); });
}

Status Service::Impl::ReloadTls() {
  Result<TlsState> t = LoadTls(o);
  if (!t.ok()) {
    std::fprintf(stderr, "{\"event\":\"tls_reload_failed\",\"reason\":%s}\n",
                 nlohmann::json(t.status().ToString()).dump().c_str());
    return t.status();
  }
  asio::post(io, [this, t = *t] {
    tls = t.context, crls = t.crls;
    crl_next_update = crls ? crls->next_update_unix : 0;
    int closed = 0;
    for (const std::weak_ptr<Session>& w : sessions)
      if (std::shared_ptr<Session> s = w.lock(); s && crls && s->RevokedBy(*crls)) {
        std::fprintf(stderr,
                     "{\"event\":\"tls_revoked_peer_closed\",\"peer\":\"%s\",\"client\":%s}\n",
                     s->peer().c_str(), nlohmann::json(s->identity()).dump().c_str());
        s->Close();
        ++closed;
      }
    std::fprintf(stderr, "{\"event\":\"tls_reloaded\",\"crl_next_update\":%lld,\"closed\":%d}\n",
                 static_cast<long long>(crl_next_update.load()), closed);
  });
  return Status::Ok();
}

Status Service::Reload() {
  // Under TLS (the options say so: `tls` itself belongs to the I/O thread), logged either way;
  // the map reloads regardless.
  if (!impl_->o.tls_cert_file.empty()) impl_->ReloadTls();
  if (HttpNeedsTls(impl_->o)) impl_->ReloadHttpTls();
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
