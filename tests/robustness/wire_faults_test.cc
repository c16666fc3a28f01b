// Faults on the wire against a real sightfix-server process (SIGHTFIX_SERVER_BIN) on the service
// tests' map (SIGHTFIX_SERVICE_DATA):
// - clients that go away mid-answer (close right after sending a call, or after reading part of
//   the answer): the server keeps serving others and stays up;
// - the server killed (SIGKILL) and restarted, then stopped gracefully (SIGTERM) and restarted,
//   under load from 8 client threads: the client library reconnects and retries; calls that get
//   no answer are at most the calls in flight at the kill, and their error says what happened.
// Disconnects mid-frame and clients that never read are in service_test (in-process server).
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <boost/asio.hpp>
#include <chrono>
#include <fstream>
#include <mutex>
#include <thread>

#include "client/api/client.h"
#include "indexer/map/drive_manifest.h"
#include "proto/frame_codec.h"
#include "server/wire/wire.h"
#include "tests/lib/processes.h"

namespace sightfix {
namespace {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;

using namespace testing_processes;

std::string Frame(const std::string& method, const std::string& body, uint64_t id) {
  v1::Envelope e;
  e.set_call_id(id);
  e.set_method(method);
  e.set_deadline_ms(10000);
  e.set_body(body);
  return EncodeFrame(e);
}

TEST(WireFaults, ClientsThatLeaveMidAnswer) {
  const int port = FreePort();
  ServerProcess server(port);
  ASSERT_TRUE(server.Start()) << server.Log();
  asio::io_context io;
  const tcp::endpoint at{asio::ip::make_address("127.0.0.1"), static_cast<unsigned short>(port)};
  const std::string locate = Frame("Locate", Query(3).SerializeAsString(), 1);
  for (int i = 0; i < 12; ++i) {
    tcp::socket s(io);
    s.connect(at);
    asio::write(s, asio::buffer(locate));
    asio::write(s, asio::buffer(Frame("Describe", "", 2)));
    if (i % 3 == 1) {  // read part of the first answer, then leave
      char part[3];
      asio::read(s, asio::buffer(part));
    } else if (i % 3 == 2) {  // reset instead of a clean close
      s.set_option(asio::socket_base::linger(true, 0));
    }
    s.close();  // i % 3 == 0: leave before any answer
  }
  // A well-behaved client is still served, and the server is still there.
  ClientOptions co;
  co.port = port;
  auto c = Client::Connect(co);
  ASSERT_TRUE(c.ok()) << c.status().ToString();
  for (int i = 0; i < 3; ++i) {
    auto fix = (*c)->Locate(Query(5 + i), 20000);
    ASSERT_TRUE(fix.ok()) << fix.status().ToString();
  }
  EXPECT_TRUE(server.Alive());
  EXPECT_EQ(server.Stop(SIGTERM), 0) << server.Log();
}

TEST(WireFaults, ServerRestartedUnderLoad) {
  const int port = FreePort();
  ServerProcess server(port);
  ASSERT_TRUE(server.Start()) << server.Log();
  constexpr int kThreads = 8;
  std::atomic<bool> stop{false};
  std::atomic<int> phase{0};  // 0 before the kill, 1 after it, 2 after the graceful stop
  std::atomic<int> answered[3] = {}, failed[3] = {};
  std::mutex mu;
  std::vector<std::string> errors;
  std::vector<std::thread> clients;
  std::vector<v1::LocateRequest> queries;
  for (int i = 0; i < 4; ++i) queries.push_back(Query(2 + 5 * i));
  for (int t = 0; t < kThreads; ++t) {
    clients.emplace_back([&, t] {
      ClientOptions co;
      co.port = port;
      auto c = Client::Connect(co);
      if (!c.ok()) {
        std::lock_guard<std::mutex> lock(mu);
        errors.push_back("connect: " + c.status().ToString());
        return;
      }
      for (int i = 0; !stop; ++i) {
        const int p = phase;
        // Descriptions and locates mixed; a 10 s deadline leaves room for a restart.
        const Status r = (i + t) % 4 == 0
                             ? (*c)->Describe(10000).status()
                             : (*c)->Locate(queries[(i + t) % queries.size()], 10000).status();
        if (r.ok()) {
          ++answered[p];
        } else {
          ++failed[p];
          std::lock_guard<std::mutex> lock(mu);
          errors.push_back(r.ToString());
        }
      }
    });
  }
  std::this_thread::sleep_for(std::chrono::seconds(4));
  const int before_kill = answered[0];
  phase = 1;
  server.Stop(SIGKILL);  // calls in flight now lose their connection
  ASSERT_TRUE(server.Start()) << server.Log();
  std::this_thread::sleep_for(std::chrono::seconds(4));
  phase = 2;
  EXPECT_EQ(server.Stop(SIGTERM), 0);  // drains: answers what it has, UNAVAILABLE to the rest
  ASSERT_TRUE(server.Start()) << server.Log();
  std::this_thread::sleep_for(std::chrono::seconds(4));
  stop = true;
  for (std::thread& t : clients) t.join();
  std::printf(
      "answered %d / %d / %d, failed %d / %d / %d (before kill / after kill / after graceful "
      "stop)\n",
      answered[0].load(), answered[1].load(), answered[2].load(), failed[0].load(),
      failed[1].load(), failed[2].load());
  for (const std::string& e : errors) std::printf("  error: %s\n", e.c_str());
  EXPECT_GT(before_kill, 0);
  EXPECT_EQ(failed[0], 0);
  // At most the calls in flight at the kill (one per client thread) may fail, each saying why.
  EXPECT_LE(failed[1], kThreads);
  EXPECT_EQ(failed[2], 0);  // a graceful stop loses nothing: the client retries elsewhere in time
  EXPECT_GT(answered[1], 0);
  EXPECT_GT(answered[2], 0);
  for (const std::string& e : errors) EXPECT_NE(e.find("no answer from"), std::string::npos) << e;
  EXPECT_EQ(server.Stop(SIGTERM), 0);
}

}  // namespace
}  // namespace sightfix
