#include "server/service/metrics.h"

#include <cstdio>

namespace sightfix::service_internal {

const char* CodeName(v1::Status::Code c) { return v1::Status::Code_Name(c).c_str(); }

namespace {

// A Prometheus label value: backslash, double quote and newline escaped (text format 0.0.4).
std::string LabelValue(const std::string& v) {
  std::string out;
  for (char c : v) {
    if (c == '\\' || c == '"') out += '\\';
    if (c == '\n') {
      out += "\\n";
      continue;
    }
    out += c;
  }
  return out;
}

}  // namespace

void Metrics::Record(const std::string& method, v1::Status::Code code, double seconds,
                     const std::string& client) {
  std::lock_guard<std::mutex> lock(mu_);
  ++calls_[{method, CodeName(code)}];
  if (!client.empty()) {
    const bool known = client_calls_.count(client) > 0;
    const std::string& key =
        known || client_calls_.size() < kMaxClientSeries ? client : std::string("(others)");
    ++client_calls_[key][CodeName(code)];
  }
  if (method != "Locate") return;
  ++latency_count_;
  latency_sum_ += seconds;
  for (size_t i = 0; i < std::size(kLatencyBuckets); ++i)
    if (seconds <= kLatencyBuckets[i]) ++buckets_[i];
}

std::string Metrics::Text(const Gauges& g) const {
  std::lock_guard<std::mutex> lock(mu_);
  std::string t =
      "# HELP sightfix_calls_total Calls answered, by method and status.\n"
      "# TYPE sightfix_calls_total counter\n";
  for (const auto& [k, n] : calls_)
    t += "sightfix_calls_total{method=\"" + k.first + "\",status=\"" + k.second + "\"} " +
         std::to_string(n) + "\n";
  if (!client_calls_.empty())
    t += "# HELP sightfix_client_calls_total Calls answered, by TLS client and status.\n"
         "# TYPE sightfix_client_calls_total counter\n";
  for (const auto& [client, by_status] : client_calls_)
    for (const auto& [status, n] : by_status)
      t += "sightfix_client_calls_total{client=\"" + LabelValue(client) + "\",status=\"" + status +
           "\"} " + std::to_string(n) + "\n";
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
    t += std::string("# HELP ") + name + " " + help + "\n# TYPE " + name + " gauge\n" + name + " " +
         std::to_string(v) + "\n";
  };
  gauge("sightfix_queue_depth", "Calls waiting for a worker.", g.queue_depth);
  gauge("sightfix_connections", "Open client connections.", g.connections);
  gauge("sightfix_tiles_cached", "Map tiles in memory.", g.tiles_cached);
  gauge("sightfix_tiles_bad", "Map tiles refused: missing, damaged or unreadable.", g.tiles_bad);
  gauge("sightfix_map_version", "Version of the map being served.", g.map_version);
  t += "# HELP sightfix_tls_refused_total Connections refused in the TLS handshake.\n"
       "# TYPE sightfix_tls_refused_total counter\nsightfix_tls_refused_total " +
       std::to_string(g.tls_refused) + "\n";
  t += "# HELP sightfix_tls_resumed_total TLS handshakes that resumed a session.\n"
       "# TYPE sightfix_tls_resumed_total counter\nsightfix_tls_resumed_total " +
       std::to_string(g.tls_resumed) + "\n";
  gauge("sightfix_addresses_blocked",
        "Source addresses whose new connections are dropped for flooding (--flood-block-s).",
        g.addresses_blocked);
  t += "# HELP sightfix_address_blocks_total Times a flooding source address was blocked.\n"
       "# TYPE sightfix_address_blocks_total counter\nsightfix_address_blocks_total " +
       std::to_string(g.address_blocks) + "\n";
  if (g.crl_next_update > 0)
    gauge("sightfix_tls_crl_next_update_seconds",
          "Earliest nextUpdate of the client CRLs, Unix seconds (renew before it).",
          static_cast<long>(g.crl_next_update));
  return t;
}

}  // namespace sightfix::service_internal
