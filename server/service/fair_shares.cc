// Fair shares (service.h): handshakes admitted before a client is known, and each known
// client's calls. Everything here runs on the I/O thread: the maps need no lock.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <nlohmann/json.hpp>

#include "server/service/service_impl.h"
#include "server/service/syn_filter.h"
#include "server/service/tls_refusal.h"

namespace sightfix {
namespace {

using service_internal::Clock;
using Buckets = std::map<std::string, Service::Impl::Bucket>;

// A refusal from an address is logged at most this often (the metric counts every one): a
// flood would otherwise write a log line per connection.
constexpr auto kRefusalLogEvery = std::chrono::seconds(10);

// The maps kept per address or client are bounded: past 4 096 entries, those `stale` says are
// as good as none (a full bucket, an old log time, a count from an earlier second) are dropped.
template <typename Map, typename Stale>
void Sweep(Map* m, Stale stale) {
  if (m->size() <= 4096) return;
  for (auto it = m->begin(); it != m->end();) it = stale(it->second) ? m->erase(it) : std::next(it);
}

// Takes one token from `key`'s bucket (rate tokens a second, `burst` at most, full at first);
// when there is none, *wait_s (if given) is the time until there is one. The map is bounded: a
// bucket full again is as good as none, so those are swept when it grows.
bool TakeToken(Buckets* buckets, const std::string& key, double rate, double burst,
               Clock::time_point now, double* wait_s = nullptr) {
  Sweep(buckets, [&](const Service::Impl::Bucket& b) {
    return std::chrono::duration<double>(now - b.last).count() * rate >= burst;
  });
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
  NoteRefusal(address, now);
  Clock::time_point& logged = refusals_logged[address];
  *log = logged == Clock::time_point{} || now - logged >= kRefusalLogEvery;
  if (*log) logged = now;
  Sweep(&refusals_logged, [&](Clock::time_point t) { return now - t >= kRefusalLogEvery; });
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
  socket->shutdown(boost::asio::ip::tcp::socket::shutdown_both, ec);
  socket->close(ec);
  return false;
}

void Service::Impl::NoteRefusal(const std::string& address, Clock::time_point now) {
  if (o.flood_block_s <= 0 || blocked.count(address)) return;
  const double rate = o.handshake_rate_per_address;
  const int threshold =
      4 * (rate > 0 ? static_cast<int>(std::ceil(2 * rate)) : o.max_handshakes_per_address);
  Sweep(&refusal_counts, [&](const std::pair<Clock::time_point, int>& c) {
    return now - c.first >= std::chrono::seconds(1);
  });
  auto& [since, count] = refusal_counts[address];
  if (now - since >= std::chrono::seconds(1)) since = now, count = 0;
  if (++count <= threshold) return;
  refusal_counts.erase(address);
  // Bounded as the filter is: the block nearest its end ends now.
  if (blocked.size() >= service_internal::kMaxSynFilterAddresses)
    blocked.erase(std::min_element(blocked.begin(), blocked.end(),
                                   [](auto& a, auto& b) { return a.second < b.second; }));
  blocked[address] = now + std::chrono::seconds(o.flood_block_s);
  ++address_blocks;
  std::fprintf(stderr, "{\"peer\":%s,\"flood_blocked_s\":%d,\"refusals_in_a_second\":%d}\n",
               nlohmann::json(address).dump().c_str(), o.flood_block_s, threshold + 1);
  ApplyBlocks(now);
}

void Service::Impl::ApplyBlocks(Clock::time_point now) {
  std::vector<std::string> addresses;
  Clock::time_point next_end = Clock::time_point::max();
  for (auto it = blocked.begin(); it != blocked.end();)
    if (it->second <= now) {
      it = blocked.erase(it);
    } else {
      addresses.push_back(it->first), next_end = std::min(next_end, it->second);
      ++it;
    }
  addresses_blocked = static_cast<int>(addresses.size());
  if (!syn_filter_failed && acceptor.is_open())
    if (Status s = service_internal::SetSynFilter(acceptor.native_handle(), addresses); !s.ok()) {
      syn_filter_failed = true;
      std::fprintf(stderr, "{\"warning\":%s}\n",
                   nlohmann::json("flooding addresses cannot be blocked in the kernel (" +
                                  s.message() + "); they are refused at accept")
                       .dump()
                       .c_str());
    }
  if (addresses.empty()) return;
  block_timer.expires_at(next_end);
  block_timer.async_wait([this](const boost::system::error_code& ec) {
    if (!ec) ApplyBlocks(Clock::now());
  });
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
