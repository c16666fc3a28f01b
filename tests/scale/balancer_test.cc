// Serving from several replicas, on loopback, with real processes: two sightfix-server
// replicas (SIGHTFIX_SERVER_BIN) of the service tests' map (SIGHTFIX_SERVICE_DATA).
// - Behind HAProxy (HAPROXY_BIN, default /usr/sbin/haproxy) running scripts/haproxy/sightfix.cfg
//   with the test's ports: under load from 8 clients, replica 1 is killed (SIGKILL) and
//   restarted, then replica 2 is stopped gracefully (SIGTERM). No call is lost: the calls in
//   flight on the killed replica lose their connection, the client library sends them again and
//   HAProxy hands the new connection to the live replica.
// - Without a balancer: one client given both endpoints fails over by itself.
// - TLS through HAProxy (scripts/haproxy/sightfix-tls.cfg): certificates made at test time with
//   scripts/make-certs.sh; HAProxy passes each vehicle's TLS through to a replica (the replica's
//   log names the vehicle) and checks /healthz over TLS with its monitoring certificate; a
//   replica stopped with SIGTERM is marked down and the calls go on.
#include <gtest/gtest.h>

#include <atomic>
#include <boost/asio.hpp>
#include <cstdlib>
#include <filesystem>
#include <mutex>
#include <regex>

#include "client/api/client.h"
#include "tests/lib/processes.h"

namespace sightfix {
namespace {

using namespace testing_processes;

// Calls answered and failed per phase by `threads` client threads, each with its own client.
struct Load {
  static constexpr int kPhases = 4;
  std::atomic<int> phase{0};
  std::atomic<bool> stop{false};
  std::atomic<int> answered[kPhases] = {}, failed[kPhases] = {};
  std::atomic<uint64_t> resent{0};
  std::atomic<int> resent_in[kPhases] = {};  // by the phase the call started in
  std::mutex mu;
  std::vector<std::string> errors;
  std::vector<std::thread> threads;

  void Start(int n, const ClientOptions& co) {
    for (int t = 0; t < n; ++t)
      threads.emplace_back([this, t, co] {
        auto client = Client::Connect(co);
        if (!client.ok()) {
          ++failed[phase];
          std::lock_guard<std::mutex> lock(mu);
          errors.push_back("connect: " + client.status().ToString());
          return;
        }
        for (int i = 0; !stop; ++i) {
          const int p = phase;
          const uint64_t sent_before = (*client)->resent_calls();
          Result<v1::Fix> r = (*client)->Locate(Query(t * 7 + i), 20000);
          resent_in[p] += static_cast<int>((*client)->resent_calls() - sent_before);
          if (r.ok()) {
            ++answered[p];
          } else {
            ++failed[p];
            std::lock_guard<std::mutex> lock(mu);
            errors.push_back(r.status().ToString());
          }
        }
        resent += (*client)->resent_calls();
      });
  }
  void Finish() {
    stop = true;
    for (std::thread& t : threads) t.join();
  }
  void Print(const char* what) {
    std::printf("%s: answered", what);
    for (auto& a : answered) std::printf(" %d", a.load());
    std::printf(", failed");
    for (auto& f : failed) std::printf(" %d", f.load());
    std::printf(" (by phase); calls sent again %llu (",
                static_cast<unsigned long long>(resent.load()));
    for (auto& r : resent_in) std::printf(" %d", r.load());
    std::printf(" by phase)\n");
    for (const std::string& e : errors) std::printf("  error: %s\n", e.c_str());
  }
};

// Locate calls a replica answered OK so far, from its /metrics.
int LocatesServed(const ServerProcess& s) {
  const std::string m = HttpGet(s.http_port(), "/metrics");
  std::smatch hit;
  static const std::regex kLine(R"re(sightfix_calls_total\{method="Locate",status="OK"\} (\d+))re");
  return std::regex_search(m, hit, kLine) ? std::stoi(hit[1]) : 0;
}

// Field `field` of a backend server's row in HAProxy's `show stat` CSV (from its stats socket).
std::string StatField(const std::string& socket, const std::string& server, size_t field) {
  namespace asio = boost::asio;
  try {
    asio::io_context io;
    asio::local::stream_protocol::socket s(io);
    s.connect(asio::local::stream_protocol::endpoint(socket));
    asio::write(s, asio::buffer(std::string("show stat\n")));
    const std::string out = ReadToEnd(s);
    // CSV: pxname,svname,...
    std::istringstream lines(out);
    for (std::string line; std::getline(lines, line);) {
      std::vector<std::string> f;
      std::istringstream cells(line);
      for (std::string c; std::getline(cells, c, ',');) f.push_back(c);
      if (f.size() > field && f[0] == "sightfix_replicas" && f[1] == server) return f[field];
    }
  } catch (const std::exception&) {
  }
  return "";
}

// "UP", "DOWN", ... (the 18th field).
std::string ServerState(const std::string& socket, const std::string& server) {
  return StatField(socket, server, 17);
}

bool WaitForState(const std::string& socket, const std::string& server, const std::string& want,
                  int seconds) {
  for (int i = 0; i < seconds * 10; ++i) {
    if (ServerState(socket, server).rfind(want, 0) == 0) return true;
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  return false;
}

// The sample scripts/haproxy/`name` with each {from, to} edit made (each `from` must be in it)
// and a stats socket added.
std::string HaproxyConfig(const std::string& name,
                          const std::vector<std::pair<std::string, std::string>>& edits,
                          const std::string& socket) {
  std::string c = ReadFile(std::string(SIGHTFIX_SOURCE_DIR) + "/scripts/haproxy/" + name);
  auto replace = [&c](const std::string& from, const std::string& to) {
    const size_t at = c.find(from);
    if (at == std::string::npos) return false;
    c.replace(at, from.size(), to);
    return true;
  };
  for (const auto& [from, to] : edits) EXPECT_TRUE(replace(from, to)) << name << ": " << from;
  EXPECT_TRUE(replace("global\n", "global\n    stats socket " + socket + " level admin\n"));
  return c;
}

std::string Loopback(int port) { return "127.0.0.1:" + std::to_string(port); }

// A replica's line in the sample (`sample_line`) made to point at `port`, checked on `http_port`.
std::pair<std::string, std::string> ReplicaLine(const std::string& sample_line,
                                                const std::string& name, int port, int http_port) {
  return {sample_line,
          "server " + name + " " + Loopback(port) + " check port " + std::to_string(http_port)};
}

TEST(BalancerTest, HaproxyLosesNoCallWhenAReplicaDies) {
  ServerProcess r1(FreePort(), FreePort()), r2(FreePort(), FreePort());
  ASSERT_TRUE(r1.Start()) << r1.Log();
  ASSERT_TRUE(r2.Start()) << r2.Log();
  const int lb_port = FreePort();
  const std::string socket = ::testing::TempDir() + "/haproxy-" + std::to_string(lb_port) + ".sock";
  const std::string cfg = ::testing::TempDir() + "/haproxy-" + std::to_string(lb_port) + ".cfg";
  std::ofstream(cfg) << HaproxyConfig("sightfix.cfg",
                                      {{"bind 127.0.0.1:7400", "bind " + Loopback(lb_port)},
                                       ReplicaLine("server replica1 127.0.0.1:7411 check port 7412",
                                                   "replica1", r1.port(), r1.http_port()),
                                       ReplicaLine("server replica2 127.0.0.1:7421 check port 7422",
                                                   "replica2", r2.port(), r2.http_port())},
                                      socket);
  ChildProcess haproxy;
  ASSERT_TRUE(haproxy.Start({EnvOr("HAPROXY_BIN", "/usr/sbin/haproxy"), "-db", "-f", cfg},
                            ::testing::TempDir() + "/haproxy.log"));
  ASSERT_TRUE(WaitForState(socket, "replica1", "UP", 10)) << haproxy.Log();
  ASSERT_TRUE(WaitForState(socket, "replica2", "UP", 10)) << haproxy.Log();

  ClientOptions co;
  co.port = lb_port;
  Load load;
  load.Start(8, co);
  std::this_thread::sleep_for(std::chrono::seconds(5));
  const int served1 = LocatesServed(r1), served2 = LocatesServed(r2);
  load.phase = 1;
  r1.Stop(SIGKILL);  // its calls in flight lose their connection
  EXPECT_TRUE(WaitForState(socket, "replica1", "DOWN", 10)) << "HAProxy did not mark replica1 down";
  std::this_thread::sleep_for(std::chrono::seconds(3));
  load.phase = 2;
  ASSERT_TRUE(r1.Start()) << r1.Log();
  EXPECT_TRUE(WaitForState(socket, "replica1", "UP", 15)) << "replica1 not back in HAProxy";
  std::this_thread::sleep_for(std::chrono::seconds(2));
  load.phase = 3;
  EXPECT_EQ(r2.Stop(SIGTERM), 0);  // drains; its clients reconnect and land on replica1
  std::this_thread::sleep_for(std::chrono::seconds(6));
  const int served1_after = LocatesServed(r1);
  load.Finish();
  load.Print("through HAProxy");
  std::printf(
      "replica1 answered %d and replica2 %d locates before the kill; replica1 answered %d "
      "after its restart\n",
      served1, served2, served1_after);
  EXPECT_GT(served1, 0) << "HAProxy sent no call to replica1";
  EXPECT_GT(served2, 0) << "HAProxy sent no call to replica2";
  EXPECT_GT(served1_after, 0) << "the restarted replica got no call";
  for (int p = 0; p < Load::kPhases; ++p) {
    EXPECT_GT(load.answered[p], 0) << "phase " << p;
    EXPECT_EQ(load.failed[p], 0) << "phase " << p;
  }
  // Calls in flight at the kill started in phase 0 (nothing else goes wrong in it): they were
  // sent again, and phase 0 has no failure.
  EXPECT_GT(load.resent_in[0], 0) << "no call in flight on the killed replica was sent again";
  EXPECT_GT(load.resent, 0u);
  EXPECT_EQ(haproxy.Stop(SIGTERM) >> 8, 0);
  EXPECT_EQ(r1.Stop(SIGTERM), 0);
}

TEST(BalancerTest, ClientFailsOverBetweenEndpoints) {
  ServerProcess r1(FreePort(), FreePort()), r2(FreePort(), FreePort());
  ASSERT_TRUE(r1.Start()) << r1.Log();
  ASSERT_TRUE(r2.Start()) << r2.Log();
  ClientOptions co;
  co.endpoints = {"127.0.0.1:" + std::to_string(r1.port()),
                  "127.0.0.1:" + std::to_string(r2.port())};
  Load load;
  load.Start(4, co);
  std::this_thread::sleep_for(std::chrono::seconds(3));
  load.phase = 1;
  r1.Stop(SIGKILL);  // every client starts on the first endpoint
  std::this_thread::sleep_for(std::chrono::seconds(4));
  load.phase = 2;
  ASSERT_TRUE(r1.Start()) << r1.Log();
  std::this_thread::sleep_for(std::chrono::seconds(1));
  load.phase = 3;
  EXPECT_EQ(r2.Stop(SIGTERM), 0);  // the clients move back to the first endpoint
  std::this_thread::sleep_for(std::chrono::seconds(4));
  load.Finish();
  load.Print("two endpoints, no balancer");
  for (int p = 0; p < Load::kPhases; ++p) {
    EXPECT_GT(load.answered[p], 0) << "phase " << p;
    EXPECT_EQ(load.failed[p], 0) << "phase " << p;
  }
  EXPECT_GT(load.resent_in[0], 0) << "no call in flight on the killed endpoint was sent again";
  EXPECT_GT(LocatesServed(r1), 0) << "the restarted first endpoint got no call";
  EXPECT_EQ(r1.Stop(SIGTERM), 0);
}

TEST(BalancerTest, BadEndpointIsRefused) {
  ClientOptions co;
  co.endpoints = {"127.0.0.1:7411", "no-port-here"};
  auto c = Client::Connect(co);
  ASSERT_FALSE(c.ok());
  EXPECT_NE(c.status().message().find("no-port-here"), std::string::npos) << c.status().ToString();
}

// The TLS variant's certificates, made with scripts/make-certs.sh under `dir`: the vehicles'
// CA (pki/) with one replica certificate for kServerName shared by both replicas and a vehicle
// certificate, and a monitoring CA (mon/) with the balancer's certificate and key in one PEM
// file, as HAProxy's `crt` wants it.
constexpr char kServerName[] = "sightfix.example";  // the sample's check-sni and verifyhost
constexpr char kVehicle[] = "vehicle-1";

bool MakeTlsFleet(const std::string& dir) {
  std::filesystem::remove_all(dir);
  const std::string certs = "bash " + std::string(SIGHTFIX_SOURCE_DIR) + "/scripts/make-certs.sh ";
  const std::string steps =
      certs + dir + "/pki ca && " + certs + dir + "/pki server replica DNS:" + kServerName +
      " && " + certs + dir + "/pki vehicle " + kVehicle + " && CA_NAME='monitoring CA' " + certs +
      dir + "/mon ca && " + certs + dir + "/mon vehicle balancer && cat " + dir +
      "/mon/balancer.crt " + dir + "/mon/balancer.key > " + dir + "/mon/monitor.pem";
  return std::system(("(" + steps + ") >/dev/null").c_str()) == 0;
}

// A replica under TLS: the query port on loopback, the HTTP port on every address (beyond
// loopback, so it speaks TLS and wants a certificate of the monitoring CA).
class TlsReplica {
 public:
  explicit TlsReplica(const std::string& fleet)
      : fleet_(fleet), port_(FreePort()), http_port_(FreePort()) {}
  bool Start() {
    log_ = ::testing::TempDir() + "/tls-replica-" + std::to_string(port_) + ".log";
    const std::string pki = fleet_ + "/pki/";
    if (!child_.Start(
            {EnvOr("SIGHTFIX_SERVER_BIN", "sightfix-server"), "--map",
             EnvOr("SIGHTFIX_SERVICE_DATA", "service_data") + "/map", "--listen", Loopback(port_),
             "--http", "0.0.0.0:" + std::to_string(http_port_), "--workers", "2", "--tls-cert",
             pki + "replica.crt", "--tls-key", pki + "replica.key", "--tls-client-ca",
             pki + "ca.crt", "--http-client-ca", fleet_ + "/mon/ca.crt"},
            log_))
      return false;
    for (int i = 0; i < 300; ++i) {  // up to 30 s for the map to open
      if (child_.Log().find("\"http_tls\":true") != std::string::npos) return true;
      if (!child_.Alive()) return false;
      std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }
    return false;
  }
  int Stop(int sig) { return child_.Stop(sig); }
  std::string Log() const { return child_.Log(); }
  // Locate calls this replica answered OK for the vehicle named `client`, from its log.
  int LocatesFor(const std::string& client) const {
    const std::string log = Log(), want = "\"client\":\"" + client + "\"";
    int n = 0;
    std::istringstream lines(log);
    for (std::string line; std::getline(lines, line);)
      n += line.find("\"method\":\"Locate\",\"status\":\"OK\"") != std::string::npos &&
           line.find(want) != std::string::npos;
    return n;
  }
  int port() const { return port_; }
  int http_port() const { return http_port_; }

 private:
  std::string fleet_, log_;
  int port_, http_port_;
  ChildProcess child_;
};

// scripts/haproxy/sightfix-tls.cfg with the test's ports and certificates.
std::string TlsHaproxyConfig(const std::string& fleet, int lb_port, const TlsReplica& r1,
                             const TlsReplica& r2, const std::string& socket) {
  return HaproxyConfig("sightfix-tls.cfg",
                       {{"bind :7400", "bind " + Loopback(lb_port)},
                        {"/etc/sightfix/pki/ca.crt", fleet + "/pki/ca.crt"},
                        {"/etc/sightfix/pki/monitor.pem", fleet + "/mon/monitor.pem"},
                        ReplicaLine("server replica1 192.0.2.11:7411 check port 7412", "replica1",
                                    r1.port(), r1.http_port()),
                        ReplicaLine("server replica2 192.0.2.12:7411 check port 7412", "replica2",
                                    r2.port(), r2.http_port())},
                       socket);
}

// True once HAProxy has `replica` UP with check_status L7OK (column 37 of `show stat`): a check
// passed at layer 7, that is, the TLS handshake with the monitoring certificate and then
// /healthz's 200.
bool WaitForTlsCheck(const std::string& socket, const std::string& replica, int seconds) {
  for (int i = 0; i < seconds * 10; ++i) {
    if (StatField(socket, replica, 36) == "L7OK" && ServerState(socket, replica) == "UP")
      return true;
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  return false;
}

// The vehicle's client, calling through the balancer and checking the replicas' shared name.
ClientOptions TlsVehicle(const std::string& fleet, int lb_port) {
  ClientOptions co;
  co.port = lb_port;
  co.tls_ca_file = fleet + "/pki/ca.crt";
  co.tls_cert_file = fleet + "/pki/" + kVehicle + ".crt";
  co.tls_key_file = fleet + "/pki/" + kVehicle + ".key";
  co.tls_server_name = kServerName;
  return co;
}

TEST(BalancerTest, HaproxyPassesTlsThroughAndChecksHealthOverTls) {
  const int lb_port = FreePort();
  const std::string fleet = ::testing::TempDir() + "/tls-fleet-" + std::to_string(lb_port);
  ASSERT_TRUE(MakeTlsFleet(fleet)) << "scripts/make-certs.sh failed";
  TlsReplica r1(fleet), r2(fleet);
  ASSERT_TRUE(r1.Start()) << r1.Log();
  ASSERT_TRUE(r2.Start()) << r2.Log();
  const std::string socket = fleet + "/haproxy.sock", cfg = fleet + "/haproxy.cfg";
  std::ofstream(cfg) << TlsHaproxyConfig(fleet, lb_port, r1, r2, socket);
  ChildProcess haproxy;
  ASSERT_TRUE(haproxy.Start({EnvOr("HAPROXY_BIN", "/usr/sbin/haproxy"), "-db", "-f", cfg},
                            fleet + "/haproxy.log"));
  for (const char* replica : {"replica1", "replica2"})
    ASSERT_TRUE(WaitForTlsCheck(socket, replica, 10))
        << replica << " not checked healthy over TLS: " << StatField(socket, replica, 65) << "\n"
        << haproxy.Log();

  const ClientOptions co = TlsVehicle(fleet, lb_port);
  Load load;
  load.Start(4, co);
  std::this_thread::sleep_for(std::chrono::seconds(4));
  const int served1 = r1.LocatesFor(kVehicle), served2 = r2.LocatesFor(kVehicle);
  load.phase = 1;
  EXPECT_EQ(r2.Stop(SIGTERM), 0);  // drains; /healthz stops answering and its clients move
  EXPECT_TRUE(WaitForState(socket, "replica2", "DOWN", 10)) << "HAProxy did not mark replica2 down";
  std::this_thread::sleep_for(std::chrono::seconds(3));
  const int served1_after = r1.LocatesFor(kVehicle);
  load.Finish();
  load.Print("TLS through HAProxy");
  std::printf(
      "replica1 answered %d and replica2 %d locates for %s before the stop; replica1 %d "
      "in all\n",
      served1, served2, kVehicle, served1_after);
  // Each replica's log names the vehicle: its identity survived the balancer.
  EXPECT_GT(served1, 0) << "no call of " << kVehicle << " in replica1's log";
  EXPECT_GT(served2, 0) << "no call of " << kVehicle << " in replica2's log";
  EXPECT_GT(served1_after, served1) << "replica1 answered nothing after replica2 stopped";
  for (int p = 0; p < 2; ++p) {
    EXPECT_GT(load.answered[p], 0) << "phase " << p;
    EXPECT_EQ(load.failed[p], 0) << "phase " << p;
  }
  EXPECT_EQ(haproxy.Stop(SIGTERM) >> 8, 0);
  EXPECT_EQ(r1.Stop(SIGTERM), 0);
}

}  // namespace
}  // namespace sightfix
