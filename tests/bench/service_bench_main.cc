// service_bench: what the socket costs. The same queries one at a time in process and through
// sightfix-server on loopback (p50 overhead; goal under 5 % or 2 ms, whichever is larger), then
// throughput with 1 and 2 workers under 8 concurrent connections.
// Usage: service_bench --map MAPDIR --drive QUERYDIR [--limit N] [--seconds S]
#include <boost/program_options.hpp>
#include <chrono>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <thread>

#include "client/api/client.h"
#include "client/eval/route_eval.h"
#include "indexer/base/threads.h"
#include "indexer/map/drive_manifest.h"
#include "server/service/service.h"
#include "server/wire/wire.h"

namespace po = boost::program_options;
using Clock = std::chrono::steady_clock;

namespace {

double Ms(Clock::time_point t0) {
  return std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
}

std::unique_ptr<sightfix::Service> StartService(const std::string& map, int workers,
                                                std::thread* runner) {
  sightfix::ServiceOptions o;
  o.map_dir = map;
  o.listen = "127.0.0.1:0";
  o.http = "";
  o.workers = workers;
  auto s = sightfix::Service::Create(o);
  if (!s.ok()) {
    std::fprintf(stderr, "%s\n", s.status().ToString().c_str());
    std::exit(1);
  }
  auto service = std::move(s).value();
  *runner = std::thread([p = service.get()] { p->Run(false); });
  return service;
}

}  // namespace

int main(int argc, char** argv) {
  sightfix::PinLibraryThreads();
  std::string map, drive;
  int limit = 30, seconds = 20;
  po::options_description desc("service_bench: socket against in-process cost");
  desc.add_options()("map", po::value(&map))("drive", po::value(&drive))(
      "limit", po::value(&limit))("seconds", po::value(&seconds));
  po::variables_map vm;
  po::store(po::parse_command_line(argc, argv, desc), vm);
  po::notify(vm);
  if (map.empty() || drive.empty()) return std::cout << desc << "\n", 2;
  auto rows = sightfix::ReadDriveManifest(drive + "/drive.csv");
  auto cam = sightfix::LoadCameraModel(drive + "/camera.yml");
  if (!rows.ok() || !cam.ok()) return 1;
  std::vector<sightfix::v1::LocateRequest> requests;
  for (int i = 0; i < std::min<int>(limit, rows->size()); ++i) {
    const sightfix::DriveRow& r = (*rows)[i];
    std::ifstream in(drive + "/" + r.image, std::ios::binary);
    sightfix::LocateRequest fields;
    fields.prior = sightfix::PriorCircle{r.position.lat_deg, r.position.lon_deg, 150};
    requests.push_back(sightfix::RequestToProto(
        std::string((std::istreambuf_iterator<char>(in)), {}), *cam, fields));
  }
  // In process: the request as the server gets it (bytes), so both paths decode the JPEG.
  auto loc = sightfix::Localizer::Open(map, sightfix::LocalizerOptions{});
  if (!loc.ok()) return 1;
  std::vector<double> local_ms, remote_ms;
  // On a thread of its own, as the server's worker is: the same conditions for both paths.
  std::thread([&] {
    for (int pass = 0; pass < 2; ++pass)  // first pass warms the tile cache
      for (const auto& req : requests) {
        auto r = sightfix::RequestFromProto(
            req, [](const std::string&) { return std::nullopt; }, 1 << 30);
        const auto t0 = Clock::now();
        auto fix = (*loc)->Locate(*r);
        if (pass == 1) local_ms.push_back(Ms(t0));
      }
  }).join();
  std::thread runner;
  auto service = StartService(map, 1, &runner);
  sightfix::ClientOptions co;
  co.port = service->port();
  auto client = sightfix::Client::Connect(co);
  for (int pass = 0; pass < 2; ++pass)
    for (const auto& req : requests) {
      const auto t0 = Clock::now();
      auto fix = (*client)->Locate(req, 30000);
      if (pass == 1) remote_ms.push_back(Ms(t0));
    }
  client->reset();
  service->Shutdown();
  runner.join();
  service.reset();
  const double lp = sightfix::Percentile(local_ms, 0.5), rp = sightfix::Percentile(remote_ms, 0.5);
  std::printf(
      "%zu queries, one at a time: p50 in process %.1f ms, through the socket %.1f ms: "
      "overhead %.1f ms (%.1f %%; goal under 5 %% or 2 ms)\n",
      requests.size(), lp, rp, rp - lp, 100 * (rp - lp) / lp);
  for (int workers : {1, 2}) {
    auto svc = StartService(map, workers, &runner);
    std::atomic<int> done{0};
    const auto stop = Clock::now() + std::chrono::seconds(seconds);
    std::vector<std::thread> users;
    for (int u = 0; u < 8; ++u)
      users.emplace_back([&, u] {
        sightfix::ClientOptions c;
        c.port = svc->port();
        auto cl = sightfix::Client::Connect(c);
        for (size_t i = u; Clock::now() < stop; ++i)
          if ((*cl)->Locate(requests[i % requests.size()], 30000).ok()) ++done;
      });
    const auto t0 = Clock::now();
    for (auto& t : users) t.join();
    std::printf("throughput, %d worker%s, 8 connections: %.2f locates/s\n", workers,
                workers > 1 ? "s" : "", done / (Ms(t0) / 1000));
    svc->Shutdown();
    runner.join();
  }
  return 0;
}
