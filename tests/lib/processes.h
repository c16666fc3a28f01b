// Test helpers for tests that run real processes: sightfix-server replicas (SIGHTFIX_SERVER_BIN)
// on the service tests' map (SIGHTFIX_SERVICE_DATA), other child processes, free ports, a tiny
// HTTP GET, and query requests from the town's query-day drive.
#pragma once

#include <gtest/gtest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <boost/asio.hpp>
#include <chrono>
#include <cstdio>
#include <fstream>
#include <string>
#include <thread>
#include <vector>

#include "indexer/map/camera_model.h"
#include "indexer/map/drive_manifest.h"
#include "server/wire/wire.h"

namespace sightfix::testing_processes {

inline std::string EnvOr(const char* name, const char* fallback) {
  const char* v = std::getenv(name);
  return v ? v : fallback;
}

inline std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), {});
}

inline int FreePort() {
  boost::asio::io_context io;
  boost::asio::ip::tcp::acceptor a(io, {boost::asio::ip::make_address("127.0.0.1"), 0});
  return a.local_endpoint().port();
}

// A child process (argv[0] is the program), stderr and stdout to a log file.
class ChildProcess {
 public:
  ~ChildProcess() { Stop(SIGKILL); }
  bool Start(const std::vector<std::string>& argv, const std::string& log) {
    log_ = log;
    // Emptied before the fork: the child truncates it too, but only after the parent may have
    // read it, and a log left in the temp folder by an earlier run with the same name would
    // then pass for this child's (a CI run read a stale "serving" line that way).
    std::ofstream(log_, std::ios::trunc).flush();
    pid_ = ::fork();
    if (pid_ == 0) {
      FILE* f = std::freopen(log_.c_str(), "w", stderr);
      (void)f;
      ::dup2(::fileno(stderr), ::fileno(stdout));
      std::vector<char*> args;
      for (const std::string& a : argv) args.push_back(const_cast<char*>(a.c_str()));
      args.push_back(nullptr);
      ::execv(args[0], args.data());
      std::_Exit(127);
    }
    return pid_ > 0;
  }
  // Sends sig and waits for the process; its wait status (-1 if none was running).
  int Stop(int sig) {
    if (pid_ <= 0) return -1;
    ::kill(pid_, sig);
    int status = 0;
    ::waitpid(pid_, &status, 0);
    pid_ = -1;
    return status;
  }
  // False once the process has exited (and reaps it).
  bool Alive() {
    if (pid_ <= 0) return false;
    int status;
    if (::waitpid(pid_, &status, WNOHANG) == pid_) {
      pid_ = -1;
      return false;
    }
    return true;
  }
  std::string Log() const { return ReadFile(log_); }

 private:
  pid_t pid_ = -1;
  std::string log_;
};

// sightfix-server on a fixed call port (and HTTP port, 0 = none), its log in a file.
class ServerProcess {
 public:
  explicit ServerProcess(int port, int http_port = 0) : port_(port), http_port_(http_port) {}
  bool Start() {
    const std::string log = ::testing::TempDir() + "/server-" + std::to_string(port_) + "-" +
                            std::to_string(starts_++) + ".log";
    const std::string map = EnvOr("SIGHTFIX_SERVICE_DATA", "service_data") + "/map";
    const std::string http = http_port_ ? "127.0.0.1:" + std::to_string(http_port_) : "";
    if (!child_.Start({EnvOr("SIGHTFIX_SERVER_BIN", "sightfix-server"), "--map", map, "--listen",
                       "127.0.0.1:" + std::to_string(port_), "--http", http, "--workers", "2"},
                      log))
      return false;
    for (int i = 0; i < 300; ++i) {  // up to 30 s for the map to open
      if (child_.Log().find("\"event\":\"serving\"") != std::string::npos) return true;
      if (!child_.Alive()) return false;
      std::this_thread::sleep_for(std::chrono::milliseconds(100));
    }
    return false;
  }
  int Stop(int sig) { return child_.Stop(sig); }
  bool Alive() { return child_.Alive(); }
  std::string Log() const { return child_.Log(); }
  int port() const { return port_; }
  int http_port() const { return http_port_; }

 private:
  int port_, http_port_;
  int starts_ = 0;
  ChildProcess child_;
};

// Everything a socket gives until the peer closes it.
template <typename Socket>
std::string ReadToEnd(Socket& s) {
  std::string out;
  boost::system::error_code ec;
  char buf[4096];
  for (;;) {
    const size_t n = s.read_some(boost::asio::buffer(buf), ec);
    out.append(buf, n);
    if (ec) return out;
  }
}

// GET http://127.0.0.1:port/path; the whole response (status line, headers, body), or "".
inline std::string HttpGet(int port, const std::string& path) {
  namespace asio = boost::asio;
  try {
    asio::io_context io;
    asio::ip::tcp::socket s(io);
    s.connect({asio::ip::make_address("127.0.0.1"), static_cast<unsigned short>(port)});
    const std::string req = "GET " + path + " HTTP/1.0\r\nHost: 127.0.0.1\r\n\r\n";
    asio::write(s, asio::buffer(req));
    return ReadToEnd(s);
  } catch (const std::exception&) {
    return "";
  }
}

// A locate request for row `row` of the town's query-day drive, with a 60 m prior.
inline v1::LocateRequest Query(int row) {
  const std::string dir = EnvOr("SIGHTFIX_SERVICE_DATA", "service_data") + "/town/query-day";
  auto rows = ReadDriveManifest(dir + "/drive.csv");
  auto cam = LoadCameraModel(dir + "/camera.yml");
  LocateRequest fields;
  const DriveRow& r = (*rows)[row % rows->size()];
  fields.prior = PriorCircle{r.position.lat_deg, r.position.lon_deg, 60};
  return RequestToProto(ReadFile(dir + "/" + r.image), *cam, fields);
}

}  // namespace sightfix::testing_processes
