// The HTTP side port (Boost.Beast): GET /healthz and /metrics, one request per connection.
#include <boost/beast/core.hpp>
#include <boost/beast/http.hpp>

#include "server/service/service_impl.h"

namespace sightfix {
namespace {

namespace http = boost::beast::http;
using tcp = boost::asio::ip::tcp;

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
  using Response = http::response<http::string_body>;

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
    http::async_write(socket_, *res,
                      [self = shared_from_this(), res](const boost::system::error_code&, size_t) {
                        boost::system::error_code ec;
                        self->socket_.shutdown(tcp::socket::shutdown_both, ec);
                      });
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
    g.crl_next_update = svc_->crl_next_update.load();
    g.tiles_cached = loc->tiles_cached();
    g.tiles_bad = static_cast<int>(loc->TileProblems().size());
    g.map_version = loc->catalog().map_version;
    return g;
  }

  tcp::socket socket_;
  Service::Impl* svc_;
  boost::beast::flat_buffer buffer_;
  http::request<http::string_body> request_;
};

}  // namespace

void Service::Impl::AcceptHttp() {
  http_acceptor.async_accept([this](const boost::system::error_code& ec, tcp::socket socket) {
    if (ec) return;
    std::make_shared<HttpSession>(std::move(socket), this)->Start();
    AcceptHttp();
  });
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
