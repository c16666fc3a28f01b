// Inside the service (not installed): what /metrics reports. Calls by method and status, the
// Locate latency histogram, and gauges the caller samples, as Prometheus text exposition format
// (version 0.0.4). Thread-safe: one mutex, held for a counter update or one Text() rendering.
#pragma once

#include <cstdint>
#include <iterator>
#include <map>
#include <mutex>
#include <string>
#include <utility>

#include "proto/sightfix.pb.h"

namespace sightfix::service_internal {

// A wire status code's name ("OK", "OVERLOADED"...), as metrics labels and the call log spell it.
const char* CodeName(v1::Status::Code c);

class Metrics {
 public:
  // Gauges sampled at the time of a /metrics request.
  struct Gauges {
    int queue_depth = 0;  // calls waiting for a worker
    int connections = 0;  // open client connections
    int tiles_cached = 0;
    int tiles_bad = 0;
    int map_version = 0;
    long tls_refused = 0;         // connections refused in the TLS handshake, since start
    long tls_resumed = 0;         // TLS handshakes that resumed a session, since start
    int64_t crl_next_update = 0;  // Unix seconds (0: no CRL)
    int addresses_blocked = 0;    // source addresses whose new connections the kernel drops
    long address_blocks = 0;      // such blocks since start
  };

  // One answered call; `seconds` from receipt to answer (only Locate's feed the histogram).
  // `client`: the caller's certificate name under TLS ("" otherwise), counted by status in
  // sightfix_client_calls_total for the first kMaxClientSeries names, the rest as "(others)"
  // (a label per vehicle, bounded: a scraper's memory is not the fleet's size).
  void Record(const std::string& method, v1::Status::Code code, double seconds,
              const std::string& client = "");
  static constexpr size_t kMaxClientSeries = 1000;
  std::string Text(const Gauges& gauges) const;

 private:
  // Latency histogram bucket bounds in seconds (Prometheus convention: cumulative, le).
  static constexpr double kLatencyBuckets[] = {0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10};

  mutable std::mutex mu_;
  std::map<std::pair<std::string, std::string>, uint64_t> calls_;
  std::map<std::string, std::map<std::string, uint64_t>> client_calls_;  // client -> status -> n
  uint64_t buckets_[std::size(kLatencyBuckets)] = {};
  uint64_t latency_count_ = 0;
  double latency_sum_ = 0;
};

}  // namespace sightfix::service_internal
