// tls_bench: what TLS costs on the query port, against plaintext, in one run (ratios: absolute
// times on a shared machine are noisy). Both services serve the same map in this process.
//  1. Throughput over persistent connections: `clients` connections calling without pause for
//     `seconds`, Describe (the transport's cost alone: the worst case for TLS) and Locate (the
//     real workload). Goal: TLS >= 0.9 of plaintext.
//  2. A new connection per call (Describe): p50 and p99, with full handshakes (a new client
//     each time) and with resumed ones (one client, Client::Disconnect before each call).
//  3. Handshakes per second: new connections, each with one Describe, from `clients` threads.
// Certificates come from scripts/make-certs.sh (scripts/bench.sh makes them): --pki DIR holding
// ca.crt, localhost.crt/.key and vehicle-bench.crt/.key.
// Usage: tls_bench --map MAPDIR --drive QUERYDIR --pki DIR [--seconds S] [--clients N]
#include <algorithm>
#include <atomic>
#include <boost/program_options.hpp>
#include <chrono>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <thread>
#include <vector>

#include "client/api/client.h"
#include "indexer/base/threads.h"
#include "indexer/map/drive_manifest.h"
#include "server/service/service.h"
#include "server/wire/wire.h"

namespace po = boost::program_options;
using Clock = std::chrono::steady_clock;

namespace {

struct Served {
  std::unique_ptr<sightfix::Service> service;
  std::thread runner;
  ~Served() {
    service->Shutdown();
    runner.join();
  }
};

std::unique_ptr<Served> Serve(const std::string& map, const std::string& pki, bool tls) {
  sightfix::ServiceOptions o;
  o.map_dir = map, o.listen = "127.0.0.1:0", o.http = "", o.workers = 2, o.queue = 256;
  o.handshake_rate_per_address = 0;  // the bench's clients all come from one address
  o.max_handshakes_per_address = o.max_handshakes;
  if (tls) {
    o.tls_cert_file = pki + "/localhost.crt", o.tls_key_file = pki + "/localhost.key";
    o.tls_client_ca_file = pki + "/ca.crt";
  }
  auto s = sightfix::Service::Create(o);
  if (!s.ok()) {
    std::fprintf(stderr, "tls_bench: %s\n", s.status().ToString().c_str());
    std::exit(1);
  }
  auto out = std::make_unique<Served>();
  out->service = std::move(s).value();
  out->runner = std::thread([p = out->service.get()] { p->Run(false); });
  return out;
}

sightfix::ClientOptions Options(int port, const std::string& pki, bool tls) {
  sightfix::ClientOptions co;
  co.port = port;
  if (tls) {
    co.tls_ca_file = pki + "/ca.crt", co.tls_server_name = "localhost";
    co.tls_cert_file = pki + "/vehicle-bench.crt", co.tls_key_file = pki + "/vehicle-bench.key";
  }
  return co;
}

double Pct(std::vector<double> v, double q) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  return v[std::min(v.size() - 1, static_cast<size_t>(q * v.size()))];
}

// Calls per second over `clients` persistent connections for `seconds`.
double Throughput(const sightfix::ClientOptions& co, int clients, int seconds,
                  const sightfix::v1::LocateRequest* locate) {
  std::atomic<long> done{0}, failed{0};
  const auto end = Clock::now() + std::chrono::seconds(seconds);
  std::vector<std::thread> threads;
  for (int t = 0; t < clients; ++t)
    threads.emplace_back([&] {
      auto c = sightfix::Client::Connect(co);
      if (!c.ok()) return void(++failed);
      while (Clock::now() < end) {
        const bool ok = locate ? (*c)->Locate(*locate, 30000).ok() : (*c)->Describe(5000).ok();
        ++(ok ? done : failed);
      }
    });
  for (std::thread& t : threads) t.join();
  if (failed > 0) std::fprintf(stderr, "tls_bench: %ld calls failed\n", failed.load());
  return static_cast<double>(done) / seconds;
}

// Per call: connect (and shake hands), one Describe. Latencies in ms from `clients` threads.
std::vector<double> NewConnectionEach(const sightfix::ClientOptions& co, int clients, int seconds) {
  std::vector<std::vector<double>> per(clients);
  const auto end = Clock::now() + std::chrono::seconds(seconds);
  std::vector<std::thread> threads;
  for (int t = 0; t < clients; ++t)
    threads.emplace_back([&, t] {
      while (Clock::now() < end) {
        const auto t0 = Clock::now();
        auto c = sightfix::Client::Connect(co);
        if (!c.ok() || !(*c)->Describe(5000).ok()) continue;
        per[t].push_back(std::chrono::duration<double, std::milli>(Clock::now() - t0).count());
      }
    });
  for (std::thread& t : threads) t.join();
  std::vector<double> all;
  for (const auto& v : per) all.insert(all.end(), v.begin(), v.end());
  return all;
}

// One client, its connection closed before each call: the reconnect resumes the TLS session.
// Latencies in ms; *resumed: how many of the handshakes resumed.
std::vector<double> ReconnectEach(const sightfix::ClientOptions& co, int seconds,
                                  uint64_t* resumed) {
  std::vector<double> out;
  auto c = sightfix::Client::Connect(co);
  if (!c.ok()) return out;
  if (!(*c)->Describe(5000).ok()) return out;  // the first ticket
  const auto end = Clock::now() + std::chrono::seconds(seconds);
  while (Clock::now() < end) {
    (*c)->Disconnect();
    const auto t0 = Clock::now();
    if ((*c)->Describe(5000).ok())
      out.push_back(std::chrono::duration<double, std::milli>(Clock::now() - t0).count());
  }
  *resumed = (*c)->resumed_handshakes();
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::PinLibraryThreads();
  std::string map, drive, pki;
  int seconds = 10, clients = 4;
  po::options_description desc("tls_bench: TLS against plaintext on the query port");
  desc.add_options()("map", po::value(&map))("drive", po::value(&drive))("pki", po::value(&pki))(
      "seconds", po::value(&seconds))("clients", po::value(&clients));
  po::variables_map vm;
  po::store(po::parse_command_line(argc, argv, desc), vm);
  po::notify(vm);
  if (map.empty() || drive.empty() || pki.empty()) return std::cout << desc << "\n", 2;
  auto rows = sightfix::ReadDriveManifest(drive + "/drive.csv");
  auto cam = sightfix::LoadCameraModel(drive + "/camera.yml");
  if (!rows.ok() || !cam.ok() || rows->empty()) return 1;
  std::ifstream in(drive + "/" + (*rows)[0].image, std::ios::binary);
  const std::string image((std::istreambuf_iterator<char>(in)), {});
  sightfix::LocateRequest fields;
  fields.prior =
      sightfix::PriorCircle{(*rows)[0].position.lat_deg, (*rows)[0].position.lon_deg, 150};
  const sightfix::v1::LocateRequest locate = sightfix::RequestToProto(image, *cam, fields);

  auto plain = Serve(map, pki, false);
  auto tls = Serve(map, pki, true);
  const auto plain_o = Options(plain->service->port(), pki, false);
  const auto tls_o = Options(tls->service->port(), pki, true);
  std::printf("tls_bench: %d clients, %d s per measurement, 2 workers per service\n", clients,
              seconds);
  const double d_plain = Throughput(plain_o, clients, seconds, nullptr);
  const double d_tls = Throughput(tls_o, clients, seconds, nullptr);
  std::printf("persistent, Describe: plaintext %.0f/s, TLS %.0f/s, ratio %.3f (goal >= 0.9)\n",
              d_plain, d_tls, d_tls / d_plain);
  const double l_plain = Throughput(plain_o, clients, seconds, &locate);
  const double l_tls = Throughput(tls_o, clients, seconds, &locate);
  std::printf("persistent, Locate: plaintext %.2f/s, TLS %.2f/s, ratio %.3f (goal >= 0.9)\n",
              l_plain, l_tls, l_tls / l_plain);
  const std::vector<double> n_plain = NewConnectionEach(plain_o, 1, seconds);
  const std::vector<double> n_tls = NewConnectionEach(tls_o, 1, seconds);
  uint64_t resumed = 0;
  const std::vector<double> r_tls = ReconnectEach(tls_o, seconds, &resumed);
  std::printf(
      "new connection per call, one client: plaintext p50 %.2f ms p99 %.2f ms; TLS full "
      "handshake p50 %.2f ms p99 %.2f ms; TLS resumed p50 %.2f ms p99 %.2f ms (%llu of %zu "
      "reconnects resumed)\n",
      Pct(n_plain, 0.5), Pct(n_plain, 0.99), Pct(n_tls, 0.5), Pct(n_tls, 0.99), Pct(r_tls, 0.5),
      Pct(r_tls, 0.99), static_cast<unsigned long long>(resumed), r_tls.size());
  const std::vector<double> h = NewConnectionEach(tls_o, clients, seconds);
  std::printf("handshakes per second (%d clients, each a new connection and one call): %.0f\n",
              clients, h.size() / static_cast<double>(seconds));
  return 0;
}
