#include "tests/bench/soak_phases.h"

#include <time.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>

namespace sightfix::soak {

namespace {

double ThreadCpuNow() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

// One burner thread: each 10 ms of wall time, spins until it has used `share` of them.
void Burn(double share, const std::atomic<bool>& stop) {
  using Clock = std::chrono::steady_clock;
  constexpr double kPeriodS = 0.010;
  auto period_end = Clock::now();
  while (!stop) {
    period_end += std::chrono::microseconds(static_cast<int>(kPeriodS * 1e6));
    const double cpu_end = ThreadCpuNow() + share * kPeriodS;
    while (ThreadCpuNow() < cpu_end && Clock::now() < period_end) {
    }
    std::this_thread::sleep_until(period_end);
  }
}

}  // namespace

CpuBurner::CpuBurner(double cores) {
  const int n = cores > 0 ? static_cast<int>(std::ceil(cores)) : 0;
  for (int i = 0; i < n; ++i) threads_.emplace_back(Burn, cores / n, std::cref(stop_));
}

CpuBurner::~CpuBurner() {
  stop_ = true;
  for (std::thread& t : threads_) t.join();
}

AttackPhase::AttackPhase(AttackOptions options) : o_(std::move(options)) {}
AttackPhase::~AttackPhase() = default;

void AttackPhase::MarkUnloadedStart() {
  unloaded_ = TakeSnapshot(o_.pid, o_.metrics_host, o_.metrics_port);
}

Status AttackPhase::Begin() {
  attacked_ = TakeSnapshot(o_.pid, o_.metrics_host, o_.metrics_port);
  auto queries = QueryFlood::Start(o_.queries);
  if (!queries.ok()) return queries.status();
  auto handshakes = HandshakeFlood::Start(o_.handshakes);
  if (!handshakes.ok()) return handshakes.status();
  queries_ = std::move(queries).value();
  handshakes_ = std::move(handshakes).value();
  return Status::Ok();
}

void AttackPhase::Sample() {
  const std::string text = FetchMetrics(o_.metrics_host, o_.metrics_port, 1000);
  if (!text.empty())
    connections_peak_ = std::max(connections_peak_, MetricValue(text, "sightfix_connections"));
}

namespace {

// Cores busy on average between two snapshots, for one subject's CPU seconds.
double Cores(const ServerSnapshot& from, const ServerSnapshot& to, double ServerSnapshot::*cpu) {
  const double wall = to.at_s - from.at_s;
  return from.*cpu >= 0 && to.*cpu >= 0 && wall > 0 ? (to.*cpu - from.*cpu) / wall : -1;
}
constexpr double ServerSnapshot::*kServerCpu = &ServerSnapshot::server_cpu_s;
constexpr double ServerSnapshot::*kIoThreadCpu = &ServerSnapshot::io_thread_cpu_s;
constexpr double ServerSnapshot::*kOwnCpu = &ServerSnapshot::own_cpu_s;
constexpr double ServerSnapshot::*kMachineCpu = &ServerSnapshot::machine_cpu_s;

// Cores the rest of the machine kept busy (neither the server nor this process): other work
// that a latency figure measured meanwhile also felt.
double OthersCores(const ServerSnapshot& from, const ServerSnapshot& to) {
  return Cores(from, to, kMachineCpu) - Cores(from, to, kServerCpu) - Cores(from, to, kOwnCpu);
}

std::string N(double v) { return std::to_string(static_cast<long long>(std::llround(v))); }

// Appends `"name":value` to a JSON member list.
void Member(std::string* json, const char* name, double value, const char* format = "%.0f") {
  char number[32];
  std::snprintf(number, sizeof(number), format, value);
  *json += std::string(json->empty() ? "" : ",") + "\"" + name + "\":" + number;
}

}  // namespace

double AttackPhase::BeginControl() {
  end_ = TakeSnapshot(o_.pid, o_.metrics_host, o_.metrics_port);
  burn_cores_ =
      std::max(0.0, Cores(attacked_, end_, kOwnCpu) - Cores(unloaded_, attacked_, kOwnCpu));
  burner_ = std::make_unique<CpuBurner>(burn_cores_);
  // Released here, not at destruction: their connections close now.
  if (handshakes_) handshakes_->Stop(), handshake_counts_ = handshakes_->counts();
  if (queries_) queries_->Stop(), query_counts_ = queries_->counts();
  handshakes_.reset(), queries_.reset();
  control_ = TakeSnapshot(o_.pid, o_.metrics_host, o_.metrics_port);
  return burn_cores_;
}

void AttackPhase::EndControl() {
  burner_.reset();
  control_end_ = TakeSnapshot(o_.pid, o_.metrics_host, o_.metrics_port);
}

bool AttackPhase::Disturbed() const {
  // A quarter of a core taken by others on a 2-core machine moves the workers' latency enough
  // to blur a 1.5 x ratio.
  constexpr double kOthersCores = 0.25;
  return OthersCores(unloaded_, attacked_) > kOthersCores ||
         OthersCores(attacked_, end_) > kOthersCores ||
         OthersCores(control_, control_end_) > kOthersCores;
}

void AttackPhase::Print() const {
  const QueryFloodCounts& q = query_counts_;
  const HandshakeFloodCounts& h = handshake_counts_;
  std::printf(
      "attack: query flooder: %s Locates sent, answered %s OK, %s RATE_LIMITED, %s "
      "OVERLOADED, %s other; %s without an answer\n",
      N(q.sent).c_str(), N(q.ok).c_str(), N(q.rate_limited).c_str(), N(q.overloaded).c_str(),
      N(q.other_code).c_str(), N(q.transport_failed).c_str());
  std::printf(
      "attack: handshake flooder from %s: %s attempts (%s with a certificate): %s full "
      "handshakes, %s refused for want of a certificate, %s closed before TLS (a "
      "limit), %s connects failed, %s other%s%s\n",
      o_.handshakes.source_address.c_str(), N(h.attempted).c_str(),
      N(h.attempted_with_cert).c_str(), N(h.completed_with_cert).c_str(),
      N(h.refused_without_cert).c_str(), N(h.closed_before_tls).c_str(),
      N(h.connect_failed).c_str(), N(h.other).c_str(),
      h.first_other.empty() ? "" : ", first: ", h.first_other.c_str());
  std::printf(
      "attack: server /metrics: TLS refusals +%.0f unloaded, +%.0f attacked; RATE_LIMITED "
      "Locates +%.0f attacked; open connections at most %.0f\n",
      attacked_.tls_refused - unloaded_.tls_refused, end_.tls_refused - attacked_.tls_refused,
      end_.locate_rate_limited - attacked_.locate_rate_limited, connections_peak_);
  std::printf(
      "attack: cores busy, unloaded / attacked / control: server %.2f / %.2f / %.2f, its I/O "
      "thread %.2f / %.2f / %.2f, the soak's clients, flooders and burner %.2f / %.2f / %.2f "
      "(the burner asked for %.2f), other processes %.2f / %.2f / %.2f\n",
      Cores(unloaded_, attacked_, kServerCpu), Cores(attacked_, end_, kServerCpu),
      Cores(control_, control_end_, kServerCpu), Cores(unloaded_, attacked_, kIoThreadCpu),
      Cores(attacked_, end_, kIoThreadCpu), Cores(control_, control_end_, kIoThreadCpu),
      Cores(unloaded_, attacked_, kOwnCpu), Cores(attacked_, end_, kOwnCpu),
      Cores(control_, control_end_, kOwnCpu), burn_cores_, OthersCores(unloaded_, attacked_),
      OthersCores(attacked_, end_), OthersCores(control_, control_end_));
  if (Disturbed())
    std::printf("attack: other processes shared the cores: the ratio is disturbed, run again\n");
}

std::string AttackPhase::JsonMembers() const {
  const QueryFloodCounts& q = query_counts_;
  const HandshakeFloodCounts& h = handshake_counts_;
  std::string j;
  Member(&j, "flood_locates_sent", q.sent);
  Member(&j, "flood_ok", q.ok);
  Member(&j, "flood_rate_limited", q.rate_limited);
  Member(&j, "flood_overloaded", q.overloaded);
  Member(&j, "flood_other", q.other_code);
  Member(&j, "flood_unanswered", q.transport_failed);
  Member(&j, "handshakes_attempted", h.attempted);
  Member(&j, "handshakes_with_cert", h.attempted_with_cert);
  Member(&j, "handshakes_completed", h.completed_with_cert);
  Member(&j, "handshakes_refused_no_cert", h.refused_without_cert);
  Member(&j, "handshakes_closed_before_tls", h.closed_before_tls);
  Member(&j, "handshakes_other", h.other + h.connect_failed);
  Member(&j, "tls_refused_unloaded", attacked_.tls_refused - unloaded_.tls_refused);
  Member(&j, "tls_refused_attacked", end_.tls_refused - attacked_.tls_refused);
  Member(&j, "server_rate_limited_attacked",
         end_.locate_rate_limited - attacked_.locate_rate_limited);
  Member(&j, "connections_peak", connections_peak_);
  Member(&j, "server_cores_unloaded", Cores(unloaded_, attacked_, kServerCpu), "%.2f");
  Member(&j, "server_cores_attacked", Cores(attacked_, end_, kServerCpu), "%.2f");
  Member(&j, "io_thread_cores_unloaded", Cores(unloaded_, attacked_, kIoThreadCpu), "%.2f");
  Member(&j, "io_thread_cores_attacked", Cores(attacked_, end_, kIoThreadCpu), "%.2f");
  Member(&j, "server_cores_control", Cores(control_, control_end_, kServerCpu), "%.2f");
  Member(&j, "soak_load_cores_unloaded", Cores(unloaded_, attacked_, kOwnCpu), "%.2f");
  Member(&j, "soak_load_cores_attacked", Cores(attacked_, end_, kOwnCpu), "%.2f");
  Member(&j, "soak_load_cores_control", Cores(control_, control_end_, kOwnCpu), "%.2f");
  Member(&j, "burn_cores_asked", burn_cores_, "%.2f");
  Member(&j, "other_cores_unloaded", OthersCores(unloaded_, attacked_), "%.2f");
  Member(&j, "other_cores_attacked", OthersCores(attacked_, end_), "%.2f");
  Member(&j, "other_cores_control", OthersCores(control_, control_end_), "%.2f");
  j += std::string(",\"disturbed\":") + (Disturbed() ? "true" : "false");
  return j;
}

std::string AttackPhase::Judge(const PhaseCalls& unloaded, const PhaseCalls& attacked,
                               const PhaseCalls& control, uint64_t resent, double max_ratio,
                               std::string* why) const {
  const double p99_unloaded = Percentile(unloaded.locate_ms, 0.99);
  const double p99_attacked = Percentile(attacked.locate_ms, 0.99);
  const double p99_control = Percentile(control.locate_ms, 0.99);
  const double ratio = p99_attacked / p99_control;
  if (!(ratio <= max_ratio))
    *why = "attacked p99 over the ratio allowed (against the control phase)";
  else if (attacked.unexpected + attacked.shed > 0)
    *why = "well-behaved calls failed under attack";
  else if (resent > 0)
    *why = "well-behaved calls sent again (over their share?)";
  else
    LimitsWorked(why);
  std::printf(
      "attack: well-behaved Locate p99 %.0f ms unloaded (%zu locates), %.0f ms attacked (%zu), "
      "%.0f ms control (%zu): attacked / control %.2f (at most %.2f), attacked / unloaded %.2f "
      "(the flooders' own CPU on these cores included); under attack %ld calls, %ld failed, %ld "
      "shed; %s sent again\n",
      p99_unloaded, unloaded.locate_ms.size(), p99_attacked, attacked.locate_ms.size(), p99_control,
      control.locate_ms.size(), ratio, max_ratio, p99_attacked / p99_unloaded, attacked.calls,
      attacked.unexpected, attacked.shed, N(resent).c_str());
  Print();
  std::string j;
  Member(&j, "locate_p99_ms_unloaded", p99_unloaded);
  Member(&j, "locate_p99_ms_attacked", p99_attacked);
  Member(&j, "locate_p99_ms_control", p99_control);
  Member(&j, "p99_ratio_control", ratio, "%.3f");
  Member(&j, "p99_ratio_unloaded", p99_attacked / p99_unloaded, "%.3f");
  Member(&j, "locates_unloaded", unloaded.locate_ms.size());
  Member(&j, "locates_attacked", attacked.locate_ms.size());
  Member(&j, "locates_control", control.locate_ms.size());
  Member(&j, "failed_attacked", attacked.unexpected);
  Member(&j, "shed_attacked", attacked.shed);
  Member(&j, "resent", resent);
  return j + "," + JsonMembers();
}

bool AttackPhase::LimitsWorked(std::string* why) const {
  const double refused_unloaded = attacked_.tls_refused - unloaded_.tls_refused;
  const double refused_attacked = end_.tls_refused - attacked_.tls_refused;
  if (!unloaded_.metrics_read || !end_.metrics_read)
    *why = "the server's /metrics not read";
  else if (query_counts_.rate_limited == 0)
    *why = "the query flooder got no RATE_LIMITED";
  else if (handshake_counts_.closed_before_tls == 0)
    *why = "no handshake closed by a limit";
  else if (handshake_counts_.refused_without_cert == 0)
    *why = "no handshake refused";
  else if (refused_attacked <= refused_unloaded)
    *why = "no more TLS refusals under attack";
  else
    why->clear();
  return why->empty();
}

}  // namespace sightfix::soak
