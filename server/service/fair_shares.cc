// Fair shares (service.h): handshakes admitted before a client is known, and each known
// client's calls. Everything here runs on the I/O thread: the maps need no lock.
#include <algorithm>
#include <cstdio>

#include "server/service/service_impl.h"
#include "server/service/tls_refusal.h"

namespace sightfix {
namespace {

using service_internal::Clock;
using Buckets = std::map<std::string, Service::Impl::Bucket>;

// A refusal from an address is logged at most this often (the metric counts every one): a
// flood would otherwise write a log line per connection.
constexpr auto kRefusalLogEvery = std::chrono::seconds(10);

// Takes one token from `key`'s bucket (rate tokens a second, `burst` at most, full at first);
// when there is none, *wait_s (if given) is the time until there is one. The map is bounded: a
// bucket full again is as good as none, so those are swept when it grows.
bool TakeToken(Buckets* buckets, const std::string& key, double rate, double burst,
               Clock::time_point now, double* wait_s = nullptr) {
  if (buckets->size() > 4096)
    for (auto it = buckets->begin(); it != buckets->end();)
      it = std::chrono::duration<double>(now - it->second.last).count() * rate >= burst
               ? buckets->erase(it)
               : std::next(it);
  auto [it, fresh] = buckets->try_emplace(key, Service::Impl::Bucket{burst, now});
  Service::Impl::Bucket& b = it->second;
  if (!fresh) {
    b.tokens =
        std::min(burst, b.tokens + std::chrono::duration<double>(now - b.last).count() * rate);
    b.last = now;
  }
  if (b.tokens < 1) {
    if (wait_s) *wait_s = (1 - b.tokens) / rate;
    return false;
  }
  b.tokens -= 1;
  return true;
}

}  // namespace

std::string Service::Impl::AdmitHandshake(const std::string& address, Clock::time_point now,
                                          bool* log) {
  std::string why;
  const double rate = o.handshake_rate_per_address;
  const auto mine = handshakes_by_address.find(address);
  const int from_here = mine == handshakes_by_address.end() ? 0 : mine->second;
  if (handshakes >= o.max_handshakes || from_here >= o.max_handshakes_per_address)
    why = "too many handshakes in progress (" + std::to_string(handshakes) + " in all, " +
          std::to_string(from_here) + " from this address)";
  else if (rate > 0 && !TakeToken(&handshake_buckets, address, rate, 2 * rate, now))
    why = "over the handshake rate of this address (" + std::to_string(rate) +
          " a second, --handshake-rate-per-address)";
  if (why.empty()) {
    ++handshakes_by_address[address], ++handshakes;
    return why;
  }
  Clock::time_point& logged = refusals_logged[address];
  *log = logged == Clock::time_point{} || now - logged >= kRefusalLogEvery;
  if (*log) logged = now;
  if (refusals_logged.size() > 4096)  // bounded as the buckets are
    for (auto it = refusals_logged.begin(); it != refusals_logged.end();)
      it = now - it->second >= kRefusalLogEvery ? refusals_logged.erase(it) : std::next(it);
  return why;
}

bool Service::Impl::AdmitAtAccept(boost::asio::ip::tcp::socket* socket) {
  boost::system::error_code ec;
  const auto peer = socket->remote_endpoint(ec);
  const std::string address = ec ? "?" : peer.address().to_string();
  bool log = true;
  const std::string why = AdmitHandshake(address, Clock::now(), &log);
  if (why.empty()) return true;
  service_internal::LogTlsRefusal(this, service_internal::TlsPort::kQuery,
                                  ec ? "?" : address + ":" + std::to_string(peer.port()), why, log);
  socket->set_option(boost::asio::socket_base::linger(true, 0), ec);
  socket->close(ec);
  return false;
}

void Service::Impl::HandshakeDone(const std::string& address) {
  --handshakes;
  auto it = handshakes_by_address.find(address);
  if (it != handshakes_by_address.end() && --it->second <= 0) handshakes_by_address.erase(it);
}

bool Service::Impl::TakeShare(const std::string& client, Clock::time_point now, double* wait_s) {
  return TakeToken(&buckets, client, o.client_calls_per_s, o.client_burst, now, wait_s);
}

std::string Service::Impl::FormatShare() const {
  char buf[96];
  std::snprintf(buf, sizeof buf, "%g calls/s, burst %d", o.client_calls_per_s, o.client_burst);
  return buf;
}

}  // namespace sightfix
