// soak_load: many concurrent clients against a running sightfix-server for a while, good and
// bad calls mixed, while the server's memory, descriptors and latency are watched through
// /proc. Prints one line per window and a JSON verdict; exit 0 only when the verdict passes.
// scripts/soak.sh starts the server and runs this; see README "Limits and guarantees".
#include <algorithm>
#include <atomic>
#include <boost/asio.hpp>
#include <boost/program_options.hpp>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <mutex>
#include <random>
#include <thread>

#include "client/api/client.h"
#include "indexer/map/drive_manifest.h"
#include "proto/frame_codec.h"
#include "server/wire/wire.h"

namespace po = boost::program_options;
namespace asio = boost::asio;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;

namespace {

long RssKb(int pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  while (std::getline(in, line))
    if (line.rfind("VmRSS:", 0) == 0) return std::atol(line.c_str() + 6);
  return -1;
}

int OpenFds(int pid) {
  std::error_code ec;
  int n = 0;
  for (auto it = std::filesystem::directory_iterator("/proc/" + std::to_string(pid) + "/fd", ec);
       !ec && it != std::filesystem::directory_iterator(); it.increment(ec))
    ++n;
  return ec ? -1 : n;
}

bool Alive(int pid) { return std::filesystem::exists("/proc/" + std::to_string(pid)); }

double Percentile(std::vector<double> v, double p) {
  if (v.empty()) return NAN;
  std::sort(v.begin(), v.end());
  const size_t k = static_cast<size_t>(std::ceil(p * v.size()));  // nearest rank
  return v[std::max<size_t>(k, 1) - 1];
}

std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), {});
}

struct Window {
  std::vector<double> locate_ms;  // good locates answered OK
  long good = 0, refused_as_expected = 0, shed = 0, unexpected = 0, abuse = 0;
};

}  // namespace

int main(int argc, char** argv) {
  std::string server, drive;
  int pid = 0, clients = 64, seconds = 300, warmup_s = 60, window_s = 30, think_ms = 4000;
  double max_rss_growth = 0.10;
  po::options_description desc(
      "soak_load: concurrent clients against a running sightfix-server, good and bad calls\n"
      "mixed; watches the server's RSS, open descriptors and latency.\n\n"
      "Usage: soak_load --server HOST:PORT --pid PID --drive QUERYDIR [options]\n\nOptions");
  desc.add_options()("help,h", "show this help")("server", po::value(&server), "HOST:PORT")(
      "pid", po::value(&pid), "the server's process id (for /proc)")(
      "drive", po::value(&drive), "query drive folder (drive.csv, camera.yml, images/)")(
      "clients", po::value(&clients)->default_value(clients), "concurrent clients")(
      "seconds", po::value(&seconds)->default_value(seconds), "length of the run")(
      "warmup", po::value(&warmup_s)->default_value(warmup_s), "seconds before the RSS baseline")(
      "window", po::value(&window_s)->default_value(window_s), "seconds per report line")(
      "think-ms", po::value(&think_ms)->default_value(think_ms),
      "mean pause between a client's calls")(
      "max-rss-growth", po::value(&max_rss_growth)->default_value(max_rss_growth),
      "largest RSS growth after warm-up that passes (fraction)");
  po::variables_map vm;
  try {
    po::store(po::parse_command_line(argc, argv, desc), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "soak_load: %s\n", e.what());
    return 2;
  }
  if (vm.count("help")) return std::cout << desc << "\n", 0;
  const size_t colon = server.rfind(':');
  if (server.empty() || colon == std::string::npos || pid <= 0 || drive.empty() ||
      warmup_s >= seconds) {
    std::fprintf(
        stderr,
        "soak_load: --server HOST:PORT, --pid and --drive are required; warmup < seconds\n");
    return 2;
  }
  const std::string host = server.substr(0, colon);
  const int port = std::atoi(server.c_str() + colon + 1);
  auto rows = sightfix::ReadDriveManifest(drive + "/drive.csv");
  auto cam = sightfix::LoadCameraModel(drive + "/camera.yml");
  if (!rows.ok() || !cam.ok()) {
    std::fprintf(stderr, "soak_load: cannot read %s\n", drive.c_str());
    return 2;
  }
  std::vector<sightfix::v1::LocateRequest> good;
  for (size_t i = 0; i < rows->size() && good.size() < 24; i += 3) {
    sightfix::LocateRequest fields;
    const auto& r = (*rows)[i];
    fields.prior = sightfix::PriorCircle{r.position.lat_deg, r.position.lon_deg, 100};
    good.push_back(sightfix::RequestToProto(ReadFile(drive + "/" + r.image), *cam, fields));
  }
  // Bad calls, each with the status it must get.
  std::vector<std::pair<sightfix::v1::LocateRequest, sightfix::v1::Status::Code>> bad;
  {
    auto r = good[0];
    r.set_image("not an image");
    bad.push_back({r, sightfix::v1::Status::INVALID_ARGUMENT});
    r = good[0];
    r.mutable_prior()->set_lat_deg(NAN);
    bad.push_back({r, sightfix::v1::Status::INVALID_ARGUMENT});
    r = good[0];
    r.clear_calibration();
    r.set_calibration_id("1/2/3#9");
    bad.push_back({r, sightfix::v1::Status::NOT_FOUND});
  }

  const int fds_before = OpenFds(pid);
  const auto start = Clock::now();
  std::mutex mu;
  std::vector<Window> windows(seconds / window_s + 2);
  std::atomic<bool> stop{false};
  auto window_of = [&] {
    const double s = std::chrono::duration<double>(Clock::now() - start).count();
    return std::min<size_t>(static_cast<size_t>(s / window_s), windows.size() - 1);
  };
  std::vector<std::thread> threads;
  for (int c = 0; c < clients; ++c) {
    threads.emplace_back([&, c] {
      std::mt19937 rng(1000 + c);
      std::uniform_real_distribution<double> u(0, 1);
      sightfix::ClientOptions co;
      co.host = host;
      co.port = port;
      auto client = sightfix::Client::Connect(co);
      asio::io_context io;
      while (!stop) {
        std::this_thread::sleep_for(
            std::chrono::milliseconds(static_cast<int>(think_ms * (0.5 + u(rng)))));
        if (stop) break;
        const double pick = u(rng);
        if (!client.ok()) {
          client = sightfix::Client::Connect(co);
          if (!client.ok()) {
            std::lock_guard<std::mutex> lock(mu);
            ++windows[window_of()].unexpected;
            continue;
          }
        }
        if (pick < 0.65) {  // a good locate
          const auto t0 = Clock::now();
          auto a = (*client)->Call("Locate", good[rng() % good.size()].SerializeAsString(), 10000);
          const double ms = std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
          std::lock_guard<std::mutex> lock(mu);
          Window& w = windows[window_of()];
          if (a.ok() && a->code == sightfix::v1::Status::OK) {
            ++w.good;
            w.locate_ms.push_back(ms);
          } else if (a.ok() && (a->code == sightfix::v1::Status::OVERLOADED ||
                                a->code == sightfix::v1::Status::DEADLINE_EXCEEDED)) {
            ++w.shed;  // load shed by the server: an answer, by design
          } else {
            ++w.unexpected;
          }
        } else if (pick < 0.75) {  // Describe
          auto a = (*client)->Call("Describe", "", 10000);
          std::lock_guard<std::mutex> lock(mu);
          Window& w = windows[window_of()];
          (a.ok() && a->code == sightfix::v1::Status::OK) ? ++w.good : ++w.unexpected;
        } else if (pick < 0.90) {  // a bad call: the right refusal
          const auto& [req, want] = bad[rng() % bad.size()];
          auto a = (*client)->Call("Locate", req.SerializeAsString(), 10000);
          std::lock_guard<std::mutex> lock(mu);
          Window& w = windows[window_of()];
          (a.ok() && a->code == want) ? ++w.refused_as_expected : ++w.unexpected;
        } else {  // abuse on a raw socket: garbage, a length over the cap, a frame cut short
          boost::system::error_code ec;
          tcp::socket s(io);
          s.connect({asio::ip::make_address(host), static_cast<unsigned short>(port)}, ec);
          if (!ec) {
            const int kind = static_cast<int>(rng() % 3);
            std::string bytes;
            if (kind == 0) bytes = std::string("\x00\x00\x00\x08garbage!", 12);
            if (kind == 1) bytes = std::string("\x7f\xff\xff\xff", 4);
            if (kind == 2) bytes = std::string("\x00\x01\x00\x00partial", 11);
            asio::write(s, asio::buffer(bytes), ec);
            s.close(ec);
          }
          std::lock_guard<std::mutex> lock(mu);
          ++windows[window_of()].abuse;
        }
      }
    });
  }
  long rss_warm = -1, rss_peak = 0;
  int fds_peak = 0;
  bool died = false;
  size_t reported = 0;
  std::printf(
      "window   good  refused  shed  unexpected  abuse  locate_p50_ms  locate_p99_ms  rss_mb  "
      "fds\n");
  while (true) {
    std::this_thread::sleep_for(std::chrono::milliseconds(500));
    const double t = std::chrono::duration<double>(Clock::now() - start).count();
    if (!Alive(pid)) {
      died = true;
      break;
    }
    rss_peak = std::max(rss_peak, RssKb(pid));
    fds_peak = std::max(fds_peak, OpenFds(pid));
    if (rss_warm < 0 && t >= warmup_s) rss_warm = RssKb(pid);
    const size_t done = static_cast<size_t>(t / window_s);
    while (reported < done && reported < windows.size()) {
      std::lock_guard<std::mutex> lock(mu);
      const Window& w = windows[reported];
      std::printf("%3zu-%3zus %6ld %8ld %5ld %11ld %6ld %14.0f %14.0f %7.1f %4d\n",
                  reported * window_s, (reported + 1) * window_s, w.good, w.refused_as_expected,
                  w.shed, w.unexpected, w.abuse, Percentile(w.locate_ms, 0.5),
                  Percentile(w.locate_ms, 0.99), RssKb(pid) / 1024.0, OpenFds(pid));
      std::fflush(stdout);
      ++reported;
    }
    if (t >= seconds) break;
  }
  const long rss_end = RssKb(pid);
  stop = true;
  for (std::thread& th : threads) th.join();
  std::this_thread::sleep_for(std::chrono::seconds(2));  // the server closes the connections
  const int fds_after = died ? -1 : OpenFds(pid);
  died = died || !Alive(pid);

  long unexpected = 0, total_good = 0, shed = 0, refused = 0;
  for (const Window& w : windows)
    unexpected += w.unexpected, total_good += w.good, shed += w.shed,
        refused += w.refused_as_expected;
  // p99 stability: the windows after warm-up, last full one against the first.
  const size_t first = static_cast<size_t>((warmup_s + window_s - 1) / window_s);
  const size_t last = static_cast<size_t>(seconds / window_s) - 1;
  const double p99_first = first <= last ? Percentile(windows[first].locate_ms, 0.99) : NAN;
  const double p99_last = first <= last ? Percentile(windows[last].locate_ms, 0.99) : NAN;
  const double growth = rss_warm > 0 ? double(rss_end - rss_warm) / rss_warm : NAN;
  const bool rss_ok = std::isfinite(growth) && growth <= max_rss_growth;
  const bool fds_ok = fds_after >= 0 && fds_after <= fds_before;
  const bool p99_ok =
      std::isfinite(p99_first) && std::isfinite(p99_last) && p99_last <= 1.5 * p99_first;
  const bool pass = !died && rss_ok && fds_ok && p99_ok && unexpected == 0;
  std::printf(
      "{\"clients\":%d,\"seconds\":%d,\"good\":%ld,\"refused_as_expected\":%ld,\"shed\":%ld,"
      "\"unexpected\":%ld,\"server_died\":%s,\"rss_mb_after_warmup\":%.1f,\"rss_mb_end\":%.1f,"
      "\"rss_growth\":%.4f,\"rss_mb_peak\":%.1f,\"fds_before\":%d,\"fds_peak\":%d,\"fds_after\":%d,"
      "\"locate_p99_ms_first\":%.0f,\"locate_p99_ms_last\":%.0f,\"pass\":%s}\n",
      clients, seconds, total_good, refused, shed, unexpected, died ? "true" : "false",
      rss_warm / 1024.0, rss_end / 1024.0, growth, rss_peak / 1024.0, fds_before, fds_peak,
      fds_after, p99_first, p99_last, pass ? "true" : "false");
  return pass ? 0 : 1;
}
