// The soak's attack phase (scripts/soak.sh --attack): two flooders against a TLS sightfix-server,
// and what the server and its process say about them.
//  - HandshakeFlood opens TLS connections as fast as it can from one source address (bound before
//    connect, so the server's per-address handshake limit meets it and not the well-behaved
//    clients), half without a client certificate (the server refuses them after its side of the
//    handshake) and half completing a full handshake with a valid certificate, then closing.
//  - QueryFlood sends Locate calls back to back on one connection of the client library, many in
//    flight (one thread each), without retries, so the server's RATE_LIMITED answers are
//    counted, not hidden.
// Each flooder runs on its own threads from Start until Stop (or destruction). Counts may be
// read from any thread while it runs; they are final after Stop.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "client/api/client.h"
#include "indexer/base/status.h"

namespace sightfix::soak {

struct HandshakeFloodOptions {
  std::string host = "127.0.0.1";
  int port = 0;
  std::string source_address = "127.0.0.2";  // the socket is bound here before connect
  std::string ca_file;                       // PEM: the CA that signs the server's certificate
  std::string cert_file, key_file;           // PEM: a valid vehicle, for the full handshakes
  std::string server_name = "localhost";     // checked against the server's certificate
  int in_flight = 16;  // connection attempts at once (the server lets 8 per address shake hands)
};

// What the handshake flooder saw, per attempt. An attempt ends in exactly one of the last five.
struct HandshakeFloodCounts {
  uint64_t attempted = 0, attempted_with_cert = 0;
  uint64_t connect_failed = 0;        // TCP connect refused or failed
  uint64_t closed_before_tls = 0;     // closed or reset before the handshake finished: a limit
  uint64_t completed_with_cert = 0;   // full handshake done with the valid certificate, then closed
  uint64_t refused_without_cert = 0;  // no certificate: the server's alert after the handshake
  uint64_t other = 0;                 // anything else (see first_other)
  std::string first_other;            // the first unexpected error's text
};

class HandshakeFlood {
 public:
  // kInvalidArgument when the CA, certificate or key cannot be read or the source address
  // cannot be parsed.
  static Result<std::unique_ptr<HandshakeFlood>> Start(const HandshakeFloodOptions& options);
  ~HandshakeFlood();  // stops
  void Stop();        // idempotent; returns once the flooder's thread has ended
  HandshakeFloodCounts counts() const;

  struct Impl;

 private:
  explicit HandshakeFlood(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

struct QueryFloodOptions {
  ClientOptions client;     // TLS fields set to the flooder's own vehicle; retries forced to 0
  std::string locate_body;  // a serialized LocateRequest
  int in_flight = 64;       // calls outstanding at once
  int deadline_ms = 10000;
};

struct QueryFloodCounts {
  uint64_t sent = 0, ok = 0, rate_limited = 0, overloaded = 0, other_code = 0;
  uint64_t transport_failed = 0;  // no answer (a lost connection, a deadline passed)
};

class QueryFlood {
 public:
  // Fails when the first connection cannot be made (Client::Connect's status).
  static Result<std::unique_ptr<QueryFlood>> Start(const QueryFloodOptions& options);
  ~QueryFlood();  // stops
  // Idempotent; stops sending and waits for the calls in flight (each bounded by its deadline).
  void Stop();
  QueryFloodCounts counts() const;

  struct Impl;

 private:
  explicit QueryFlood(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

// The server's /metrics over plaintext HTTP/1.0 on its side port (loopback); "" when it cannot be
// read within timeout_ms.
std::string FetchMetrics(const std::string& host, int port, int timeout_ms);
// The value of one series in Prometheus text, named exactly as printed (labels included, e.g.
// `sightfix_calls_total{method="Locate",status="RATE_LIMITED"}`); 0 when absent.
double MetricValue(const std::string& text, const std::string& series);

// A process seen from /proc: its resident memory (kB), its open descriptors, whether it lives;
// -1 when it cannot be read.
long RssKb(int pid);
int OpenFds(int pid);
bool Alive(int pid);
// Nearest-rank percentile (p in (0, 1]); NAN for no values.
double Percentile(std::vector<double> values, double p);

// CPU seconds (user + system) a process or one of its threads has used, from /proc; -1 when it
// cannot be read. A server's I/O thread is its main thread (Service::Run), whose tid is its pid.
double ProcessCpuSeconds(int pid);
double ThreadCpuSeconds(int pid, int tid);
// CPU seconds the whole machine has spent busy since boot (/proc/stat), -1 when unreadable.
double MachineCpuSeconds();

// The server at one moment, as the soak sees it: counters from /metrics, CPU from /proc.
struct ServerSnapshot {
  double at_s = 0;  // steady clock, seconds
  bool metrics_read = false;
  double tls_refused = 0, locate_rate_limited = 0, connections = 0;
  double server_cpu_s = -1, io_thread_cpu_s = -1, own_cpu_s = -1;  // own: this process
  double machine_cpu_s = -1;  // every process on the machine: the rest is other people's work
};
ServerSnapshot TakeSnapshot(int pid, const std::string& metrics_host, int metrics_port);

}  // namespace sightfix::soak
