// sightfix-server: the localization engine behind a socket (server/service/service.h).
#include <boost/program_options.hpp>
#include <cstdio>
#include <iostream>

#include "indexer/base/crash_report.h"
#include "indexer/base/threads.h"
#include "server/service/service.h"

namespace po = boost::program_options;

namespace {

// The command line's options, bound to *o, *cache_mb (the tile cache in MiB) and *crl_grace_h.
po::options_description Flags(sightfix::ServiceOptions* o, size_t* cache_mb, double* crl_grace_h) {
  po::options_description desc(
      "sightfix-server: visual localization over TCP (framed protobuf, package sightfix.v1),\n"
      "with /healthz and /metrics on an HTTP side port. SIGTERM drains and exits 0; SIGHUP\n"
      "reloads the map. sightfix is a fallback aid, not a certified navigation source; defer to\n"
      "the vehicle's safety case and local regulations.\n\n"
      "Usage: sightfix-server --map MAPDIR [options]\n\nOptions");
  desc.add_options()("help,h", "show this help")("map", po::value(&o->map_dir), "map folder")(
      "listen", po::value(&o->listen)->default_value(o->listen), "HOST:PORT for calls")(
      "http", po::value(&o->http)->default_value(o->http),
      "HOST:PORT for /healthz and /metrics ('' = none); beyond loopback under TLS it speaks "
      "TLS 1.3 and wants a monitoring client certificate")(
      "workers", po::value(&o->workers)->default_value(0), "engine threads (0 = all cores)")(
      "queue", po::value(&o->queue)->default_value(o->queue), "calls waiting before OVERLOADED")(
      "max-frame-bytes", po::value(&o->max_frame_bytes)->default_value(o->max_frame_bytes),
      "largest frame accepted")("max-pixels",
                                po::value(&o->max_pixels)->default_value(o->max_pixels),
                                "largest image (width x height from its header) accepted")(
      "max-connections", po::value(&o->max_connections)->default_value(o->max_connections),
      "open connections at most")(
      "deadline-ms", po::value(&o->default_deadline_ms)->default_value(o->default_deadline_ms),
      "deadline of calls that set none")("token-file", po::value(&o->token_file),
                                         "file holding the bearer token calls must carry")(
      "allow-open", "listen beyond loopback in plaintext without a token (not advised)")(
      "tls-cert", po::value(&o->tls_cert_file),
      "PEM certificate (chain) of this server: the query port then speaks TLS 1.3 only")(
      "tls-key", po::value(&o->tls_key_file), "PEM private key of --tls-cert")(
      "tls-client-ca", po::value(&o->tls_client_ca_file),
      "PEM CA (bundle) that signs vehicle certificates: every client must present one")(
      "tls-crl", po::value(&o->tls_crl_file),
      "PEM CRLs of the client CAs (one each): revoked vehicles are refused; SIGHUP rereads it")(
      "http-client-ca", po::value(&o->http_client_ca_file),
      "PEM CA (bundle) that signs monitoring client certificates for the HTTP port under TLS "
      "(default: --tls-client-ca, and its --tls-crl)")(
      "tls-crl-grace-h", po::value(crl_grace_h)->default_value(*crl_grace_h),
      "hours past a CRL's nextUpdate during which it is still enforced and other vehicles "
      "accepted; after that every vehicle is refused")(
      "max-handshakes", po::value(&o->max_handshakes)->default_value(o->max_handshakes),
      "TLS handshakes in progress at once; one more connection is closed at once")(
      "max-handshakes-per-address",
      po::value(&o->max_handshakes_per_address)->default_value(o->max_handshakes_per_address),
      "TLS handshakes in progress from one source address")(
      "handshake-rate-per-address",
      po::value(&o->handshake_rate_per_address)->default_value(o->handshake_rate_per_address),
      "new TLS handshakes a second from one source address (burst twice that); 0: no limit. "
      "Raise it where many vehicles share an address (NAT, a balancer)")(
      "flood-block-s", po::value(&o->flood_block_s)->default_value(o->flood_block_s),
      "an address refused more than four bursts' worth of handshakes within a second has its "
      "new connections dropped by the kernel for this long; 0: never")(
      "client-calls-per-s", po::value(&o->client_calls_per_s)->default_value(0),
      "each client's share (by certificate, else address): calls a second, beyond the burst "
      "answered RATE_LIMITED (0: no limit)")(
      "client-burst", po::value(&o->client_burst)->default_value(o->client_burst),
      "calls a client may make at once before its rate applies")(
      "max-connection-age-s",
      po::value(&o->max_connection_age_s)->default_value(o->max_connection_age_s),
      "retire a connection after this long: its client reconnects, and a new handshake checks "
      "its certificate again (0: never)")(
      "plaintext-beyond-loopback",
      "serve beyond loopback without TLS: anyone on the path reads and can forge fixes (not "
      "advised)")("no-scrub",
                  "skip the background check of every tile file at start (tiles are still "
                  "checked against the catalog before first use)")(
      "tile-cache-mb", po::value(cache_mb)->default_value(*cache_mb), "memory for loaded tiles");
  return desc;
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::InstallCrashReport("sightfix-server");
  sightfix::PinLibraryThreads();
  sightfix::ServiceOptions o;
  size_t cache_mb = o.engine.tile_cache_bytes >> 20;
  double crl_grace_h = o.tls_crl_grace_s / 3600.0;
  po::options_description desc = Flags(&o, &cache_mb, &crl_grace_h);
  po::variables_map vm;
  try {
    po::store(po::parse_command_line(argc, argv, desc), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "sightfix-server: %s (see --help)\n", e.what());
    return 2;
  }
  if (vm.count("help")) {
    std::cout << desc << "\n";
    return 0;
  }
  o.allow_open = vm.count("allow-open") > 0;
  o.allow_plaintext = vm.count("plaintext-beyond-loopback") > 0;
  o.scrub = vm.count("no-scrub") == 0;
  o.engine.tile_cache_bytes = cache_mb << 20;
  if (!(crl_grace_h >= 0 && crl_grace_h < 1e6)) {
    std::fprintf(stderr, "sightfix-server: --tls-crl-grace-h must be within [0, 1e6) hours\n");
    return 2;
  }
  o.tls_crl_grace_s = static_cast<int64_t>(crl_grace_h * 3600);
  if (o.map_dir.empty()) {
    std::fprintf(stderr, "sightfix-server: --map MAPDIR is required (see --help)\n");
    return 2;
  }
  auto service = sightfix::Service::Create(o);
  if (!service.ok()) {
    std::fprintf(stderr, "sightfix-server: %s\n", service.status().ToString().c_str());
    return 2;
  }
  return (*service)->Run(true).ok() ? 0 : 1;
}
