// The HTTP side port (Boost.Beast): GET /healthz and /metrics, one request per connection.
// Under TLS beyond loopback (service.h) a connection first passes a TLS 1.3 handshake with a
// monitoring client certificate; a refusal is logged and counted as the query port's are. The
// read timeout bounds the whole exchange: handshake, request and answer.
#include <boost/beast/core.hpp>
#include <boost/beast/http.hpp>
#include <cstdio>
#include <nlohmann/json.hpp>

#include "server/service/service_impl.h"
#include "server/service/tls_refusal.h"

namespace sightfix {
namespace {

namespace asio = boost::asio;
namespace http = boost::beast::http;
using service_internal::LogTlsRefusal;
using service_internal::TlsPort;
using tcp = asio::ip::tcp;

// What a plaintext client of the TLS-speaking HTTP port is told, in plaintext, before it closes.
const std::string& SpeaksTlsAnswer() {
  static const std::string body =
      "this port speaks TLS 1.3 only: use https with a client certificate of the monitoring CA\n";
  static const std::string answer =
      "HTTP/1.1 400 Bad Request\r\nContent-Type: text/plain\r\nContent-Length: " +
      std::to_string(body.size()) + "\r\nConnection: close\r\n\r\n" + body;
  return answer;
}

class HttpSession : public std::enable_shared_from_this<HttpSession> {
 public:
  // `tls` null: plaintext.
  HttpSession(tcp::socket socket, std::shared_ptr<asio::ssl::context> tls, Service::Impl* svc)
      : socket_(socket.get_executor()),
        tls_context_(std::move(tls)),
        timer_(socket.get_executor()),
        svc_(svc) {
    boost::system::error_code ec;
    const auto ep = socket.remote_endpoint(ec);
    peer_ = ec ? "?" : ep.address().to_string() + ":" + std::to_string(ep.port());
    socket.set_option(tcp::no_delay(true), ec);  // handshake flights go out at once
    if (tls_context_)
      tls_ = std::make_unique<TlsStream>(std::move(socket), *tls_context_);
    else
      socket_ = std::move(socket);
  }

  void Start() {
    Arm(svc_->o.read_timeout_ms);
    if (!tls_) return Read();
    // A plaintext request gets a plaintext answer saying why not.
    service_internal::TlsRefusal::LookAtFirstByte(shared_from_this(), &first_byte_);
  }

 private:
  friend struct service_internal::TlsRefusal;  // the first-byte look and the linger
  using Response = http::response<http::string_body>;
  using TlsStream = asio::ssl::stream<tcp::socket>;

  tcp::socket& Tcp() { return tls_ ? tls_->next_layer() : socket_; }

  // The timer: closes the connection after `ms` (timed_out_ tells a handshake cut off).
  void Arm(int ms) {
    timer_.expires_after(std::chrono::milliseconds(ms));
    timer_.async_wait([self = shared_from_this()](const boost::system::error_code& ec) {
      if (ec) return;
      self->timed_out_ = true;
      self->Close();
    });
  }

  void Close() {
    boost::system::error_code ec;
    timer_.cancel();
    Tcp().shutdown(tcp::socket::shutdown_both, ec);
    Tcp().close(ec);
  }

  void OnHandshake(const boost::system::error_code& ec) {
    if (!ec) return Read();
    std::string why = timed_out_ ? "handshake not finished within the read timeout" : ec.message();
    if (!timed_out_)
      if (const std::string v = VerifyProblem(tls_->native_handle()); !v.empty()) why += ": " + v;
    LogTlsRefusal(svc_, TlsPort::kHttp, peer_, why);
    if (!timed_out_) service_internal::TlsRefusal::Linger(shared_from_this());
  }

  void RefusePlaintext() {
    LogTlsRefusal(svc_, TlsPort::kHttp, peer_, "plaintext sent to the TLS HTTP port");
    asio::async_write(Tcp(), asio::buffer(SpeaksTlsAnswer()),
                      [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                        if (ec) return self->Close();
                        service_internal::TlsRefusal::Linger(self);
                      });
  }

  void Read() {
    OnFrameStream(tls_, socket_, [this](auto& stream) {
      http::async_read(stream, buffer_, request_,
                       [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                         if (ec) return self->Close();
                         self->Respond();
                       });
    });
  }

  void Respond() {
    auto res = std::make_shared<Response>();
    res->version(request_.version());
    res->keep_alive(false);
    const std::string target(request_.target());
    if (target == "/healthz") {
      bool ok = false;
      res->body() = svc_->HealthText(&ok);
      res->result(ok ? http::status::ok : http::status::service_unavailable);
      res->set(http::field::content_type, "text/plain");
    } else if (target == "/metrics") {
      res->result(http::status::ok);
      res->set(http::field::content_type, "text/plain; version=0.0.4");
      res->body() = svc_->metrics.Text(SampleGauges());
    } else {
      res->result(http::status::not_found);
      res->set(http::field::content_type, "text/plain");
      res->body() = "not found: try /healthz or /metrics\n";
    }
    res->prepare_payload();
    OnFrameStream(tls_, socket_, [this, res](auto& stream) {
      http::async_write(stream, *res,
                        [self = shared_from_this(), res](const boost::system::error_code& ec,
                                                         size_t) { self->Finish(ec); });
    });
  }

  // After the answer: TLS says close_notify first (the timer bounds the wait for the peer's).
  void Finish(const boost::system::error_code& ec) {
    if (ec || !tls_) return Close();
    tls_->async_shutdown(
        [self = shared_from_this()](const boost::system::error_code&) { self->Close(); });
  }

  service_internal::Metrics::Gauges SampleGauges() const {
    std::shared_ptr<const Localizer> loc = svc_->Current();
    service_internal::Metrics::Gauges g;
    {
      std::lock_guard<std::mutex> lock(svc_->queue_mu);
      g.queue_depth = static_cast<int>(svc_->jobs.size());
    }
    g.connections = svc_->connections;
    g.tls_refused = static_cast<long>(svc_->tls_refused.load());
    g.tls_resumed = static_cast<long>(svc_->tls_resumed.load());
    g.crl_next_update = svc_->crl_next_update.load();
    g.addresses_blocked = svc_->addresses_blocked.load();
    g.address_blocks = static_cast<long>(svc_->address_blocks.load());
    g.tiles_cached = loc->tiles_cached();
    g.tiles_bad = static_cast<int>(loc->TileProblems().size());
    g.map_version = loc->catalog().map_version;
    return g;
  }

  tcp::socket socket_;                               // plaintext; moved into tls_ under TLS
  std::shared_ptr<asio::ssl::context> tls_context_;  // kept while the session lives
  std::unique_ptr<TlsStream> tls_;
  asio::steady_timer timer_;
  Service::Impl* svc_;
  std::string peer_;
  bool timed_out_ = false;
  unsigned char first_byte_ = 0;
  boost::beast::flat_buffer buffer_;
  http::request<http::string_body> request_;
};

}  // namespace

void Service::Impl::AcceptHttp() {
  http_acceptor.async_accept([this](const boost::system::error_code& ec, tcp::socket socket) {
    if (ec) return;
    std::make_shared<HttpSession>(std::move(socket), http_tls, this)->Start();
    AcceptHttp();
  });
}

Result<std::shared_ptr<asio::ssl::context>> Service::Impl::LoadHttpTls() const {
  const std::string& ca =
      o.http_client_ca_file.empty() ? o.tls_client_ca_file : o.http_client_ca_file;
  Result<std::shared_ptr<asio::ssl::context>> ctx =
      MakeMonitoringTlsContext({o.tls_cert_file, o.tls_key_file, ca});
  if (!ctx.ok()) return Status(ctx.status().code(), "HTTP port: " + ctx.status().message());
  // The query port's CRLs cover its client CA; a monitoring CA of its own has none.
  if (o.tls_crl_file.empty() || ca != o.tls_client_ca_file) return ctx;
  Result<std::shared_ptr<const CrlSet>> crls =
      AddCrl(ctx->get(), o.tls_crl_file, ca, o.tls_crl_grace_s);
  if (!crls.ok()) return Status(crls.status().code(), "HTTP port: " + crls.status().message());
  return ctx;
}

Status Service::Impl::ReloadHttpTls() {
  Result<std::shared_ptr<asio::ssl::context>> ctx = LoadHttpTls();
  if (!ctx.ok()) {
    std::fprintf(stderr, "{\"event\":\"tls_reload_failed\",\"port\":\"http\",\"reason\":%s}\n",
                 nlohmann::json(ctx.status().ToString()).dump().c_str());
    return ctx.status();
  }
  asio::post(io, [this, fresh = *ctx] { http_tls = fresh; });
  return Status::Ok();
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

}  // namespace sightfix
