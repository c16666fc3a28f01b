// The localization service: the engine behind a TCP socket (Boost.Asio), speaking the framed
// protobuf of proto/sightfix.proto, plus an HTTP side port (Boost.Beast) with /healthz and
// /metrics (Prometheus text exposition format).
//
// One I/O thread runs every socket asynchronously and only frames, authenticates and routes
// calls (it never touches the disk); a Locate runs on a fixed pool of `workers` threads fed by a
// bounded queue (full: the call is answered OVERLOADED at once). The worker parses the request,
// resolves its calibration_id (which may load a tile) and runs the engine, so a malformed or
// unknown-calibration Locate is answered by a worker too. Each call has a deadline (the
// envelope's, else default_deadline_ms): a call whose deadline passes in the queue is answered
// DEADLINE_EXCEEDED without running. Checked before any allocation or decode: the frame length
// against max_frame_bytes, the image header's pixel count against max_pixels.
// Connections: at most max_connections; a started frame must arrive within read_timeout_ms (a
// client sending a byte a second is cut off), an idle one is closed after idle_timeout_ms, and a
// client that does not read its answers is closed once max_pending_write_bytes pile up. A
// malformed frame (zero length, over the cap, not an Envelope) is answered when possible and
// that one connection is closed; nothing else is disturbed.
// Security: binds loopback by default. With TLS (tls_cert_file, tls_key_file,
// tls_client_ca_file; proto/tls_profile.h) the query port speaks TLS 1.3 only and every client
// must present a certificate signed by the client CA; its common name names the caller in the
// logs. Beyond loopback the query port refuses to start without TLS unless allow_plaintext, and
// a plaintext one there also needs a token (or allow_open). The HTTP side port stays plaintext
// on loopback (local scrapers); beyond loopback under TLS it speaks TLS 1.3 with the same
// server certificate and requires a client certificate of the monitoring CA
// (http_client_ca_file), its handshake and request within read_timeout_ms; beyond loopback
// without TLS it needs allow_plaintext. With a token file every call must carry that
// token (compared in constant time): a second factor under TLS. Logs: one JSON line per call on
// stderr (id, method, status, ms, quality, peer, client), never image data or the token; one per
// connection refused in the TLS handshake (peer, reason).
// Lifecycle: Create binds; Run serves until Shutdown (or SIGTERM/SIGINT when handle_signals),
// then drains: no new calls, every queued and running call answered, then returns. SIGHUP (or
// Reload) reopens the map, and under TLS reads the certificate, key, client CA and CRL files
// again: new connections use them, a live connection whose client the new CRL revokes is
// closed, the rest carry on (each session holds the context it was accepted with). A map or
// TLS reload that fails leaves the old one serving, logged.
#pragma once

#include <memory>
#include <string>

#include "indexer/base/endpoint.h"
#include "indexer/base/status.h"
#include "proto/frame_codec.h"
#include "server/engine/localizer.h"

namespace sightfix {

struct ServiceOptions {
  std::string map_dir;
  std::string listen = "127.0.0.1:7411";
  std::string http = "127.0.0.1:7412";  // empty: no HTTP side port
  int workers = 0;                      // engine threads; 0 = all cores
  int queue = 64;                       // calls waiting for a worker
  uint32_t max_frame_bytes = kDefaultMaxFrameBytes;
  int64_t max_pixels = 40000000;  // about 7 300 x 5 500; a 60000x60000 header is refused
  int max_connections = 256;
  int read_timeout_ms = 10000;
  int idle_timeout_ms = 120000;
  int default_deadline_ms = 10000;
  size_t max_pending_write_bytes = size_t(32) << 20;
  std::string token_file;
  bool allow_open = false;  // listen beyond loopback in plaintext without a token
  // TLS on the query port: all three or none (PEM files).
  std::string tls_cert_file, tls_key_file, tls_client_ca_file;
  // Revocation (tls_profile.h AddCrl): the client CAs' CRLs (PEM), and how long past its
  // nextUpdate a CRL is still enforced while other clients are accepted (then all refused).
  // Without a CRL file a revoked vehicle certificate is accepted until it expires.
  std::string tls_crl_file;
  int64_t tls_crl_grace_s = 7 * 24 * 3600;
  // TLS on the HTTP port (under TLS, when `http` is beyond loopback): the PEM bundle of the CAs
  // that sign monitoring client certificates (a scraper's, a balancer's health check). Empty:
  // tls_client_ca_file, and then tls_crl_file applies there too; a CA of its own has no CRL
  // check (keep its certificates short-lived), but keeps a vehicle's certificate off the HTTP
  // port and a monitor's off the query port. Needs TLS.
  std::string http_client_ca_file;
  bool allow_plaintext = false;  // listen beyond loopback without TLS (not advised)
  // Fair shares. Before a client is known: TLS handshakes in progress at once, in all and per
  // source address (one more is closed before any TLS work). After: a token bucket per client
  // (its certificate's name under TLS, else its address) of client_calls_per_s calls a second
  // and client_burst at once; a call beyond it is answered RATE_LIMITED, which the client
  // library backs off from with jitter. client_calls_per_s 0: no bucket. Per server: behind a
  // balancer with N replicas a client's share is N times this.
  // Handshakes are also paced per source address: handshake_rate_per_address new ones a
  // second (a burst of twice that), beyond which a connection is closed before any TLS work
  // (each full handshake costs the I/O thread a signature and a certificate check: a flood
  // from one address would otherwise slow every other client's calls). 0: no pacing. Many
  // vehicles behind one NAT, or a balancer that does not pass addresses on, share one address:
  // raise both per-address limits there.
  // An address refused more than four times its burst (of paced handshakes; without pacing,
  // of handshakes in progress) within one second floods: for flood_block_s seconds the kernel
  // drops its new connections' SYNs before the server sees them (syn_filter.h; at most 200
  // addresses at once, of them 30 IPv6). A flood answered by refusals comes back as fast as it is
  // refused; one whose SYNs go unanswered waits on its own retransmission timers. 0: no blocking.
  int max_handshakes = 64;
  int max_handshakes_per_address = 8;
  double handshake_rate_per_address = 20;
  int flood_block_s = 10;
  double client_calls_per_s = 0;
  int client_burst = 20;
  // A connection older than this is retired: calls arriving on it are answered UNAVAILABLE
  // ("reconnect"), which the client library sends again on a new connection, whose handshake
  // checks the certificate again (expiry, the CRL); after a grace of default_deadline_ms more
  // the server closes it. Bounds how long a certificate that expired, or a CRL entry added
  // without a reload, goes unnoticed on a live connection. 0: no limit.
  int max_connection_age_s = 3600;
  // Check every tile file against the catalog's SHA-256 in the background after start (and
  // after a reload), so /healthz names bad tiles early. Off: tiles are still checked before
  // their first use.
  bool scrub = true;
  LocalizerOptions engine;
  bool Validate(std::string* error) const;
};

class Service {
 public:
  // Opens the map and binds the ports (0 picks a free one). Fails with the reason (bad options,
  // map, token file, address in use, open address without token).
  static Result<std::unique_ptr<Service>> Create(const ServiceOptions& options);
  ~Service();

  // Serves on the calling thread until Shutdown, then drains and returns OK.
  Status Run(bool handle_signals);
  // Thread-safe; Run returns once every accepted call is answered.
  void Shutdown();
  // Thread-safe: reopens the map folder; on failure the old map keeps serving.
  Status Reload();

  int port() const;       // bound TCP port
  int http_port() const;  // bound HTTP port, 0 without one

  struct Impl;  // opaque: defined in service_impl.h, shared by the service's parts

 private:
  explicit Service(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace sightfix
