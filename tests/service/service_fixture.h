// The service tests' fixture (tests/service/service_test.cc, secure_wire_test.cc): a service
// on loopback over the demo map that make_map.sh builds (the service_map CTest fixture, or
// SIGHTFIX_SERVICE_DATA), the client library connected to it, and raw-socket helpers for what a
// well-behaved client never sends.
#pragma once

#include <gtest/gtest.h>

#include <array>
#include <atomic>
#include <boost/asio.hpp>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <thread>

#include "client/api/client.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/map/map_store.h"
#include "server/service/service.h"
#include "server/wire/wire.h"

namespace sightfix {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

inline std::string DataDir() {
  const char* d = std::getenv("SIGHTFIX_SERVICE_DATA");
  return d ? d : "service_data";
}

inline std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), {});
}

class ServiceTest : public ::testing::Test {
 protected:
  // False (with the reason) when the fixture's map is missing or the service cannot start.
  bool Start(ServiceOptions o, const std::string& listen = "127.0.0.1:0") {
    if (o.map_dir.empty()) o.map_dir = DataDir() + "/map";
    o.listen = listen;
    o.http = "127.0.0.1:0";
    auto s = Service::Create(o);
    EXPECT_TRUE(s.ok()) << s.status().ToString() << " (run the service_map fixture first)";
    if (!s.ok()) return false;
    service_ = std::move(s).value();
    runner_ = std::thread([this] { service_->Run(false); });
    return true;
  }
  void TearDown() override {
    if (service_) service_->Shutdown();
    if (runner_.joinable()) runner_.join();
  }
  std::unique_ptr<Client> Connect(const std::string& token = "") {
    ClientOptions co;
    co.port = service_->port();
    co.token = token;
    auto c = Client::Connect(co);
    EXPECT_TRUE(c.ok());
    return c.ok() ? std::move(c).value() : nullptr;
  }
  v1::LocateRequest Query(int row, bool with_prior = true) {
    const std::string dir = DataDir() + "/town/query-day";
    auto rows = ReadDriveManifest(dir + "/drive.csv");
    auto cam = LoadCameraModel(dir + "/camera.yml");
    LocateRequest fields;
    const DriveRow& r = (*rows)[row];
    if (with_prior) fields.prior = PriorCircle{r.position.lat_deg, r.position.lon_deg, 150};
    camera_ = *cam;
    return RequestToProto(ReadFile(dir + "/" + r.image), *cam, fields);
  }
  // GET `path` from the service's HTTP side port (plaintext, loopback): the whole answer.
  std::string HttpGet(const std::string& path) {
    tcp::socket s(io_);
    s.connect(
        {asio::ip::make_address("127.0.0.1"), static_cast<unsigned short>(service_->http_port())});
    asio::write(s, asio::buffer("GET " + path + " HTTP/1.1\r\nHost: x\r\n\r\n"));
    std::string out;
    boost::system::error_code ec;
    char buf[4096];
    for (size_t n; (n = s.read_some(asio::buffer(buf), ec)) > 0 || !ec;) out.append(buf, n);
    return out;
  }
  // Raw socket helpers for what a well-behaved client never sends.
  tcp::socket Raw() {
    tcp::socket s(io_);
    s.connect({asio::ip::make_address("127.0.0.1"), static_cast<unsigned short>(service_->port())});
    return s;
  }
  static v1::Envelope ReadAnswer(tcp::socket& s) {
    uint8_t h[4];
    asio::read(s, asio::buffer(h));
    std::string body(FrameLength(h), '\0');
    asio::read(s, asio::buffer(body));
    return *ParseEnvelope(body.data(), body.size());
  }
  // A Describe call as call `id` whose envelope is exactly `bytes` long (the frame's N): its body,
  // which Describe ignores, padded.
  static std::string DescribeFrameOfSize(uint64_t id, size_t bytes) {
    v1::Envelope e;
    e.set_call_id(id);
    e.set_method("Describe");
    for (size_t pad = bytes; pad > 0 && e.ByteSizeLong() != bytes; --pad)
      e.set_body(std::string(pad, 'x'));
    EXPECT_EQ(e.ByteSizeLong(), bytes);
    return EncodeFrame(e);
  }
  static bool ClosedByPeer(tcp::socket& s) {
    boost::system::error_code ec;
    char c;
    asio::read(s, asio::buffer(&c, 1), ec);
    return ec == asio::error::eof || ec == asio::error::connection_reset;
  }
  void ExpectStillServing() {
    auto c = Connect();
    ASSERT_NE(c, nullptr);
    auto d = c->Describe(5000);
    ASSERT_TRUE(d.ok()) << d.status().ToString();
    EXPECT_GT(d->images(), 0);
  }

  asio::io_context io_;
  std::unique_ptr<Service> service_;
  std::thread runner_;
  CameraModel camera_;
};

}  // namespace sightfix
