// Serving from several replicas, on loopback, with real processes: two sightfix-server
// replicas (SIGHTFIX_SERVER_BIN) of the service tests' map (SIGHTFIX_SERVICE_DATA).
// - Behind HAProxy (HAPROXY_BIN, default /usr/sbin/haproxy) running scripts/haproxy/sightfix.cfg
//   with the test's ports: under load from 8 clients, replica 1 is killed (SIGKILL) and
//   restarted, then replica 2 is stopped gracefully (SIGTERM). No call is lost: the calls in
//   flight on the killed replica lose their connection, the client library sends them again and
//   HAProxy hands the new connection to the live replica.
// - Without a balancer: one client given both endpoints fails over by itself.
#include <gtest/gtest.h>

#include <atomic>
#include <boost/asio.hpp>
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

// HAProxy's view of a backend server ("UP", "DOWN", ...) from its stats socket.
std::string ServerState(const std::string& socket, const std::string& server) {
  namespace asio = boost::asio;
  try {
    asio::io_context io;
    asio::local::stream_protocol::socket s(io);
    s.connect(asio::local::stream_protocol::endpoint(socket));
    asio::write(s, asio::buffer(std::string("show stat\n")));
    const std::string out = ReadToEnd(s);
    // CSV: pxname,svname,...; status is the 18th field.
    std::istringstream lines(out);
    for (std::string line; std::getline(lines, line);) {
      std::vector<std::string> f;
      std::istringstream cells(line);
      for (std::string c; std::getline(cells, c, ',');) f.push_back(c);
      if (f.size() > 17 && f[0] == "sightfix_replicas" && f[1] == server) return f[17];
    }
  } catch (const std::exception&) {
  }
  return "";
}

bool WaitForState(const std::string& socket, const std::string& server, const std::string& want,
                  int seconds) {
  for (int i = 0; i < seconds * 10; ++i) {
    if (ServerState(socket, server).rfind(want, 0) == 0) return true;
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  return false;
}

// scripts/haproxy/sightfix.cfg with the test's ports and a stats socket.
std::string HaproxyConfig(int lb_port, const ServerProcess& r1, const ServerProcess& r2,
                          const std::string& socket) {
  const std::string sample =
      ReadFile(std::string(SIGHTFIX_SOURCE_DIR) + "/scripts/haproxy/sightfix.cfg");
  std::string c = sample;
  auto replace = [&c](const std::string& from, const std::string& to) {
    const size_t at = c.find(from);
    if (at == std::string::npos) return false;
    c.replace(at, from.size(), to);
    return true;
  };
  const auto addr = [](int port) { return "127.0.0.1:" + std::to_string(port); };
  EXPECT_TRUE(replace("bind 127.0.0.1:7400", "bind " + addr(lb_port)));
  EXPECT_TRUE(replace(
      "server replica1 127.0.0.1:7411 check port 7412",
      "server replica1 " + addr(r1.port()) + " check port " + std::to_string(r1.http_port())));
  EXPECT_TRUE(replace(
      "server replica2 127.0.0.1:7421 check port 7422",
      "server replica2 " + addr(r2.port()) + " check port " + std::to_string(r2.http_port())));
  EXPECT_TRUE(replace("global\n", "global\n    stats socket " + socket + " level admin\n"));
  return c;
}

TEST(BalancerTest, HaproxyLosesNoCallWhenAReplicaDies) {
  ServerProcess r1(FreePort(), FreePort()), r2(FreePort(), FreePort());
  ASSERT_TRUE(r1.Start()) << r1.Log();
  ASSERT_TRUE(r2.Start()) << r2.Log();
  const int lb_port = FreePort();
  const std::string socket = ::testing::TempDir() + "/haproxy-" + std::to_string(lb_port) + ".sock";
  const std::string cfg = ::testing::TempDir() + "/haproxy-" + std::to_string(lb_port) + ".cfg";
  std::ofstream(cfg) << HaproxyConfig(lb_port, r1, r2, socket);
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

}  // namespace
}  // namespace sightfix
