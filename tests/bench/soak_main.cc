// soak_load: many concurrent clients against a running sightfix-server for a while, good and
// bad calls mixed, while the server's memory, descriptors and latency are watched through
// /proc. Prints one line per window and a JSON verdict; exit 0 only when the verdict passes.
// With --tls-dir the clients speak TLS, each with its own vehicle certificate. With --attack
// (TLS only) the run is three phases of --seconds each: unloaded, attacked (a handshake flooder
// and a query flooder, soak_attack.h) and control (a burner in their place, soak_phases.h); the
// verdict then compares the clients' p99 Locate latency across the phases, not across windows.
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
#include "tests/bench/soak_attack.h"
#include "tests/bench/soak_phases.h"

namespace po = boost::program_options;
namespace asio = boost::asio;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;
using Code = sightfix::v1::Status::Code;

using sightfix::soak::Alive;
using sightfix::soak::OpenFds;
using sightfix::soak::Percentile;
using sightfix::soak::RssKb;

namespace {

struct Config {
  std::string host, drive;
  int port = 0, pid = 0, clients = 64, seconds = 300, warmup_s = 60, window_s = 30;
  int think_ms = 4000;
  double max_rss_growth = 0.10;
  std::string tls_dir;  // ca.crt, soak-client-N.crt/.key, soak-query-flooder.*, soak-handshaker.*
  bool attack = false;
  std::string metrics;  // HOST:PORT of the server's HTTP side port
  std::string attack_source = "127.0.0.2";
  int handshakes_in_flight = 16, queries_in_flight = 64;
  double max_p99_ratio = 1.5;  // the requirement: attacked p99 within 1.5 x of control
  int run_s() const { return attack ? 3 * seconds : seconds; }
};

std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), {});
}

bool SplitHostPort(const std::string& s, std::string* host, int* port) {
  const size_t colon = s.rfind(':');
  if (colon == std::string::npos) return false;
  *host = s.substr(0, colon);
  *port = std::atoi(s.c_str() + colon + 1);
  return *port > 0;
}

// Returns -1 to go on, else the exit code.
int ParseFlags(int argc, char** argv, Config* c) {
  std::string server;
  po::options_description desc(
      "soak_load: concurrent clients against a running sightfix-server, good and bad calls\n"
      "mixed; watches the server's RSS, open descriptors and latency.\n\n"
      "Usage: soak_load --server HOST:PORT --pid PID --drive QUERYDIR [options]\n\nOptions");
  desc.add_options()("help,h", "show this help")("server", po::value(&server), "HOST:PORT")(
      "pid", po::value(&c->pid), "the server's process id (for /proc)")(
      "drive", po::value(&c->drive), "query drive folder (drive.csv, camera.yml, images/)")(
      "clients", po::value(&c->clients)->default_value(c->clients), "concurrent clients")(
      "seconds", po::value(&c->seconds)->default_value(c->seconds),
      "length of the run (with --attack: of each of its three phases)")(
      "warmup", po::value(&c->warmup_s)->default_value(c->warmup_s),
      "seconds before the RSS baseline (with --attack: at most --seconds)")(
      "window", po::value(&c->window_s)->default_value(c->window_s), "seconds per report line")(
      "think-ms", po::value(&c->think_ms)->default_value(c->think_ms),
      "mean pause between a client's calls")(
      "max-rss-growth", po::value(&c->max_rss_growth)->default_value(c->max_rss_growth),
      "largest RSS growth after warm-up that passes (fraction)")(
      "tls-dir", po::value(&c->tls_dir),
      "speak TLS: ca.crt and soak-client-N.crt/.key per client (scripts/soak.sh makes them)")(
      "attack",
      "three phases: unloaded; under a handshake and a query flood; control (a burner taking "
      "the flooders' CPU, no network)")("metrics", po::value(&c->metrics),
                                        "HOST:PORT of the server's HTTP side port (--attack)")(
      "attack-source", po::value(&c->attack_source)->default_value(c->attack_source),
      "source address of the handshake flooder")(
      "handshakes-in-flight",
      po::value(&c->handshakes_in_flight)->default_value(c->handshakes_in_flight),
      "the handshake flooder's connection attempts at once")(
      "queries-in-flight", po::value(&c->queries_in_flight)->default_value(c->queries_in_flight),
      "the query flooder's calls outstanding at once")(
      "max-p99-ratio", po::value(&c->max_p99_ratio)->default_value(c->max_p99_ratio),
      "largest attacked / control p99 Locate latency that passes (--attack)");
  po::variables_map vm;
  try {
    po::store(po::parse_command_line(argc, argv, desc), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "soak_load: %s\n", e.what());
    return 2;
  }
  if (vm.count("help")) return std::cout << desc << "\n", 0;
  c->attack = vm.count("attack") > 0;
  if (c->attack) c->warmup_s = std::min(c->warmup_s, c->seconds);  // at the latest, the attack
  std::string metrics_host;
  int metrics_port = 0;
  const char* wrong = !SplitHostPort(server, &c->host, &c->port) || c->pid <= 0 || c->drive.empty()
                          ? "--server HOST:PORT, --pid and --drive are required"
                      : c->warmup_s >= c->run_s() ? "--warmup must be shorter than the run"
                      : c->attack && (c->tls_dir.empty() ||
                                      !SplitHostPort(c->metrics, &metrics_host, &metrics_port))
                          ? "--attack needs --tls-dir and --metrics HOST:PORT"
                          : nullptr;
  if (wrong) std::fprintf(stderr, "soak_load: %s\n", wrong);
  return wrong ? 2 : -1;
}

// The calls the clients make: good locates, and bad ones each with the status it must get.
struct Calls {
  std::vector<sightfix::v1::LocateRequest> good;
  std::vector<std::pair<sightfix::v1::LocateRequest, Code>> bad;
};

bool LoadCalls(const std::string& drive, Calls* calls) {
  auto rows = sightfix::ReadDriveManifest(drive + "/drive.csv");
  auto cam = sightfix::LoadCameraModel(drive + "/camera.yml");
  if (!rows.ok() || !cam.ok() || rows->empty()) return false;
  for (size_t i = 0; i < rows->size() && calls->good.size() < 24; i += 3) {
    sightfix::LocateRequest fields;
    const auto& r = (*rows)[i];
    fields.prior = sightfix::PriorCircle{r.position.lat_deg, r.position.lon_deg, 100};
    calls->good.push_back(sightfix::RequestToProto(ReadFile(drive + "/" + r.image), *cam, fields));
  }
  auto r = calls->good[0];
  r.set_image("not an image");
  calls->bad.push_back({r, sightfix::v1::Status::INVALID_ARGUMENT});
  r = calls->good[0];
  r.mutable_prior()->set_lat_deg(NAN);
  calls->bad.push_back({r, sightfix::v1::Status::INVALID_ARGUMENT});
  r = calls->good[0];
  r.clear_calibration();
  r.set_calibration_id("1/2/3#9");
  calls->bad.push_back({r, sightfix::v1::Status::NOT_FOUND});
  return true;
}

// A client of the soak; under TLS it presents DIR/`vehicle`.crt.
sightfix::ClientOptions OptionsFor(const Config& c, const std::string& vehicle) {
  sightfix::ClientOptions co;
  co.host = c.host;
  co.port = c.port;
  if (!c.tls_dir.empty()) {
    co.tls_ca_file = c.tls_dir + "/ca.crt";
    co.tls_cert_file = c.tls_dir + "/" + vehicle + ".crt";
    co.tls_key_file = c.tls_dir + "/" + vehicle + ".key";
  }
  return co;
}

enum class Outcome { kGood, kRefusedAsExpected, kShed, kUnexpected, kAbuse };

struct Window {
  std::vector<double> locate_ms;  // good locates answered OK
  long good = 0, refused_as_expected = 0, shed = 0, unexpected = 0, abuse = 0;
};

// Every outcome, by the window in which it ended and the phase in which it started.
class Tally {
 public:
  explicit Tally(const Config& c) : c_(c), windows_(c.run_s() / c.window_s + 3) {}
  void Start() { start_ = Clock::now(); }
  double Elapsed(Clock::time_point t = Clock::now()) const {
    return std::chrono::duration<double>(t - start_).count();
  }
  void Add(Outcome o, Clock::time_point started, double locate_ms = NAN) {
    std::lock_guard<std::mutex> lock(mu_);
    Window& w = windows_[std::min<size_t>(Elapsed() / c_.window_s, windows_.size() - 1)];
    const int phase = PhaseOf(started);
    sightfix::soak::PhaseCalls unphased;
    sightfix::soak::PhaseCalls& p = phase >= 0 ? phases_[phase] : unphased;
    if (std::isfinite(locate_ms))
      w.locate_ms.push_back(locate_ms), p.locate_ms.push_back(locate_ms);
    p.calls += o != Outcome::kAbuse;
    if (o == Outcome::kGood) ++w.good;
    if (o == Outcome::kRefusedAsExpected) ++w.refused_as_expected;
    if (o == Outcome::kShed) ++w.shed, ++p.shed;
    if (o == Outcome::kUnexpected) ++w.unexpected, ++p.unexpected;
    if (o == Outcome::kAbuse) ++w.abuse;
  }
  // The control phase counts calls started from now (the flooders have stopped).
  void MarkControlStart() { control_from_s_ = Elapsed(); }
  Window window(size_t i) const {
    std::lock_guard<std::mutex> lock(mu_);
    return windows_[i];
  }
  size_t windows() const { return windows_.size(); }
  sightfix::soak::PhaseCalls phase(int i) const {
    std::lock_guard<std::mutex> lock(mu_);
    return phases_[i];
  }

 private:
  // With --attack: 0 unloaded, 1 attacked, 2 control; -1 between the attack's end and the
  // control's start (the flooders stopping), in no phase.
  int PhaseOf(Clock::time_point started) const {
    const double s = Elapsed(started);
    if (!c_.attack || s < c_.seconds) return 0;
    if (s < 2 * c_.seconds) return 1;
    return s >= control_from_s_ ? 2 : -1;
  }

  const Config& c_;
  Clock::time_point start_ = Clock::now();
  mutable std::mutex mu_;
  std::vector<Window> windows_;
  std::atomic<double> control_from_s_{INFINITY};
  sightfix::soak::PhaseCalls phases_[3];
};

// Abuse on a raw socket: garbage, a length over the cap, a frame cut short.
void Abuse(const Config& c, asio::io_context& io, int kind) {
  boost::system::error_code ec;
  tcp::socket s(io);
  s.connect({asio::ip::make_address(c.host), static_cast<unsigned short>(c.port)}, ec);
  if (ec) return;
  std::string bytes;
  if (kind == 0) bytes = std::string("\x00\x00\x00\x08garbage!", 12);
  if (kind == 1) bytes = std::string("\x7f\xff\xff\xff", 4);
  if (kind == 2) bytes = std::string("\x00\x01\x00\x00partial", 11);
  asio::write(s, asio::buffer(bytes), ec);
  s.close(ec);
}

// One call of the mix on `client`: 65 % good locates, 10 % Describe, 15 % bad calls.
Outcome OneCall(sightfix::Client& client, const Calls& calls, double pick, std::mt19937& rng,
                double* locate_ms) {
  if (pick < 0.65) {
    const auto t0 = Clock::now();
    auto a =
        client.Call("Locate", calls.good[rng() % calls.good.size()].SerializeAsString(), 10000);
    const double ms = std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
    if (a.ok() && a->code == sightfix::v1::Status::OK) return *locate_ms = ms, Outcome::kGood;
    const bool shed = a.ok() && (a->code == sightfix::v1::Status::OVERLOADED ||
                                 a->code == sightfix::v1::Status::DEADLINE_EXCEEDED);
    return shed ? Outcome::kShed : Outcome::kUnexpected;  // shed: an answer, by design
  }
  if (pick < 0.75) {
    auto a = client.Call("Describe", "", 10000);
    return a.ok() && a->code == sightfix::v1::Status::OK ? Outcome::kGood : Outcome::kUnexpected;
  }
  const auto& [req, want] = calls.bad[rng() % calls.bad.size()];
  auto a = client.Call("Locate", req.SerializeAsString(), 10000);
  return a.ok() && a->code == want ? Outcome::kRefusedAsExpected : Outcome::kUnexpected;
}

// A well-behaved client: a call of the mix (or, one time in ten, abuse) after each think time,
// until `stop`. Adds the calls its library sent again to `resent`.
void RunClient(const Config& c, const Calls& calls, int index, Tally* tally,
               const std::atomic<bool>& stop, std::atomic<uint64_t>* resent) {
  std::mt19937 rng(1000 + index);
  std::uniform_real_distribution<double> u(0, 1);
  const sightfix::ClientOptions co = OptionsFor(c, "soak-client-" + std::to_string(index));
  auto client = sightfix::Client::Connect(co);
  asio::io_context io;
  while (!stop) {
    std::this_thread::sleep_for(
        std::chrono::milliseconds(static_cast<int>(c.think_ms * (0.5 + u(rng)))));
    if (stop) break;
    const double pick = u(rng);
    const auto started = Clock::now();
    if (pick >= 0.90) {
      Abuse(c, io, static_cast<int>(rng() % 3));
      tally->Add(Outcome::kAbuse, started);
      continue;
    }
    if (!client.ok()) client = sightfix::Client::Connect(co);
    if (!client.ok()) {
      tally->Add(Outcome::kUnexpected, started);
      continue;
    }
    double ms = NAN;
    const Outcome o = OneCall(**client, calls, pick, rng, &ms);
    tally->Add(o, started, ms);
  }
  if (client.ok()) *resent += (*client)->resent_calls();
}

// Before the clock starts (--attack): good locates spread along the drive, one per client and
// all at once, so that the unloaded phase is not measured with cold tiles. One call leaves a
// client's share of the server's bucket most of its burst, refilled before its first timed call.
void WarmUp(const Config& c, const Calls& calls) {
  std::vector<std::thread> threads;
  const size_t n = std::min<size_t>(calls.good.size(), c.clients);
  for (size_t i = 0; i < n; ++i)
    threads.emplace_back([&, i] {
      auto client = sightfix::Client::Connect(OptionsFor(c, "soak-client-" + std::to_string(i)));
      const auto& request = calls.good[i * calls.good.size() / n];
      if (client.ok()) (*client)->Call("Locate", request.SerializeAsString(), 30000);
    });
  for (std::thread& t : threads) t.join();
}

std::unique_ptr<sightfix::soak::AttackPhase> MakeAttack(const Config& c, const Calls& calls) {
  sightfix::soak::AttackOptions a;
  a.pid = c.pid;
  SplitHostPort(c.metrics, &a.metrics_host, &a.metrics_port);
  a.handshakes.host = c.host, a.handshakes.port = c.port;
  a.handshakes.source_address = c.attack_source;
  a.handshakes.ca_file = c.tls_dir + "/ca.crt";
  a.handshakes.cert_file = c.tls_dir + "/soak-handshaker.crt";
  a.handshakes.key_file = c.tls_dir + "/soak-handshaker.key";
  a.handshakes.server_name = c.host;
  a.handshakes.in_flight = c.handshakes_in_flight;
  a.queries.client = OptionsFor(c, "soak-query-flooder");
  a.queries.locate_body = calls.good[0].SerializeAsString();
  a.queries.in_flight = c.queries_in_flight;
  return std::make_unique<sightfix::soak::AttackPhase>(std::move(a));
}

// What the server's process did over the run, watched every half second.
struct Watch {
  long rss_warm = -1, rss_peak = 0, rss_end = -1;
  int fds_peak = 0;
  bool died = false;
  bool attack_failed = false;
};

void PrintWindow(const Tally& tally, size_t i, const Config& c) {
  const Window w = tally.window(i);
  std::printf("%3zu-%3zus %6ld %8ld %5ld %11ld %6ld %14.0f %14.0f %7.1f %4d\n", i * c.window_s,
              (i + 1) * c.window_s, w.good, w.refused_as_expected, w.shed, w.unexpected, w.abuse,
              Percentile(w.locate_ms, 0.5), Percentile(w.locate_ms, 0.99), RssKb(c.pid) / 1024.0,
              OpenFds(c.pid));
  std::fflush(stdout);
}

// Runs the clock: window lines as they close, and with an attack its start at --seconds, its
// end (and the control phase's start) at twice that, and the control's end --seconds later.
Watch WatchServer(const Config& c, Tally* tally_out, sightfix::soak::AttackPhase* attack) {
  const Tally& tally = *tally_out;
  Watch w;
  size_t reported = 0;
  int phase = 0;
  double end_s = c.seconds;
  std::printf(
      "window   good  refused  shed  unexpected  abuse  locate_p50_ms  locate_p99_ms  rss_mb  "
      "fds\n");
  while (true) {
    std::this_thread::sleep_for(std::chrono::milliseconds(500));
    const double t = tally.Elapsed();
    if (!Alive(c.pid)) return w.died = true, w;
    w.rss_peak = std::max(w.rss_peak, RssKb(c.pid));
    w.fds_peak = std::max(w.fds_peak, OpenFds(c.pid));
    if (w.rss_warm < 0 && t >= c.warmup_s) w.rss_warm = RssKb(c.pid);
    for (; reported < static_cast<size_t>(t / c.window_s) && reported < tally.windows(); ++reported)
      PrintWindow(tally, reported, c);
    if (attack && phase == 0 && t >= c.seconds) {
      phase = 1, end_s = 2 * c.seconds;
      const sightfix::Status s = attack->Begin();
      std::printf("-- %.0f s: the attack starts (a handshake and a query flooder)%s%s\n", t,
                  s.ok() ? "" : ": ", s.ok() ? "" : s.ToString().c_str());
      if (!s.ok()) return w.attack_failed = true, w;
    } else if (phase == 1 && t >= end_s) {
      const double burn = attack->BeginControl();
      tally_out->MarkControlStart();
      phase = 2, end_s = tally.Elapsed() + c.seconds;
      std::printf(
          "-- %.0f s: the attack ends; control from %.0f s: a burner takes %.2f cores "
          "(the flooders' share), no flood\n",
          t, tally.Elapsed(), burn);
    }
    if (phase == 1) attack->Sample();
    if (t >= end_s) break;
  }
  if (phase == 2) attack->EndControl();
  w.rss_end = RssKb(c.pid);
  return w;
}

struct Totals {
  long good = 0, refused = 0, shed = 0, unexpected = 0;
};

Totals Sum(const Tally& tally) {
  Totals t;
  for (size_t i = 0; i < tally.windows(); ++i) {
    const Window w = tally.window(i);
    t.good += w.good, t.refused += w.refused_as_expected, t.shed += w.shed;
    t.unexpected += w.unexpected;
  }
  return t;
}

// p99 stability without an attack: the last full window after warm-up against the first.
std::string WindowP99(const Config& c, const Tally& tally, bool* ok) {
  const size_t first = static_cast<size_t>((c.warmup_s + c.window_s - 1) / c.window_s);
  const size_t last = static_cast<size_t>(c.seconds / c.window_s) - 1;
  const double p99_first = first <= last ? Percentile(tally.window(first).locate_ms, 0.99) : NAN;
  const double p99_last = first <= last ? Percentile(tally.window(last).locate_ms, 0.99) : NAN;
  *ok = std::isfinite(p99_first) && std::isfinite(p99_last) && p99_last <= 1.5 * p99_first;
  char out[128];
  std::snprintf(out, sizeof(out), "\"locate_p99_ms_first\":%.0f,\"locate_p99_ms_last\":%.0f",
                p99_first, p99_last);
  return out;
}

// Prints the JSON verdict; returns the exit code.
int Verdict(const Config& c, const Tally& tally, const Watch& w, int fds_before, int fds_after,
            uint64_t resent, const sightfix::soak::AttackPhase* attack) {
  const Totals t = Sum(tally);
  const double growth = w.rss_warm > 0 ? double(w.rss_end - w.rss_warm) / w.rss_warm : NAN;
  const bool rss_ok = std::isfinite(growth) && growth <= c.max_rss_growth;
  const bool fds_ok = fds_after >= 0 && fds_after <= fds_before;
  std::string why;
  bool p99_ok = false;
  const std::string p99 = attack ? attack->Judge(tally.phase(0), tally.phase(1), tally.phase(2),
                                                 resent, c.max_p99_ratio, &why)
                                 : WindowP99(c, tally, &p99_ok);
  if (attack) p99_ok = why.empty() && !w.attack_failed;
  const bool pass = !w.died && rss_ok && fds_ok && p99_ok && t.unexpected == 0;
  std::printf(
      "{\"clients\":%d,\"seconds\":%d,\"tls\":%s,\"attack\":%s,\"good\":%ld,"
      "\"refused_as_expected\":%ld,\"shed\":%ld,\"unexpected\":%ld,\"server_died\":%s,"
      "\"rss_mb_after_warmup\":%.1f,\"rss_mb_end\":%.1f,\"rss_growth\":%.4f,\"rss_mb_peak\":%.1f,"
      "\"fds_before\":%d,\"fds_peak\":%d,\"fds_after\":%d,%s,\"pass\":%s%s%s%s}\n",
      c.clients, c.seconds, c.tls_dir.empty() ? "false" : "true", attack ? "true" : "false", t.good,
      t.refused, t.shed, t.unexpected, w.died ? "true" : "false", w.rss_warm / 1024.0,
      w.rss_end / 1024.0, growth, w.rss_peak / 1024.0, fds_before, w.fds_peak, fds_after,
      p99.c_str(), pass ? "true" : "false", why.empty() ? "" : ",\"why\":\"", why.c_str(),
      why.empty() ? "" : "\"");
  return pass ? 0 : 1;
}

}  // namespace

int main(int argc, char** argv) {
  Config c;
  if (const int rc = ParseFlags(argc, argv, &c); rc >= 0) return rc;
  Calls calls;
  if (!LoadCalls(c.drive, &calls)) {
    std::fprintf(stderr, "soak_load: cannot read %s\n", c.drive.c_str());
    return 2;
  }
  std::unique_ptr<sightfix::soak::AttackPhase> attack;
  if (c.attack) WarmUp(c, calls), attack = MakeAttack(c, calls), attack->MarkUnloadedStart();
  const int fds_before = OpenFds(c.pid);
  Tally tally(c);
  tally.Start();
  std::atomic<bool> stop{false};
  std::atomic<uint64_t> resent{0};
  std::vector<std::thread> threads;
  for (int i = 0; i < c.clients; ++i)
    threads.emplace_back([&, i] { RunClient(c, calls, i, &tally, stop, &resent); });
  Watch w = WatchServer(c, &tally, attack.get());
  stop = true;
  for (std::thread& th : threads) th.join();
  std::this_thread::sleep_for(std::chrono::seconds(2));  // the server closes the connections
  const int fds_after = w.died ? -1 : OpenFds(c.pid);
  w.died = w.died || !Alive(c.pid);
  return Verdict(c, tally, w, fds_before, fds_after, resent, attack.get());
}
