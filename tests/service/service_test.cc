// sightfix-server's service on loopback against a demo map (fixture: make_map.sh): the same fixes
// as the in-process engine, and every kind of bad input answered with a clear status or the one
// connection closed, while another client keeps being served. The secured wire's tests (TLS,
// freshness, fair shares) are in secure_wire_test.cc.
#include "tests/service/service_fixture.h"

namespace sightfix {
namespace {

TEST_F(ServiceTest, SameFixesAsTheInProcessEngine) {
  ASSERT_TRUE(Start(ServiceOptions{}));
  auto local = Localizer::Open(DataDir() + "/map", LocalizerOptions{});
  ASSERT_TRUE(local.ok());
  auto client = Connect();
  int refined = 0;
  for (int row : {3, 10, 20}) {
    const v1::LocateRequest req = Query(row);
    auto remote = FixFromProto(client->Locate(req, 20000));
    ASSERT_TRUE(remote.ok()) << remote.status().ToString();
    auto in_process_req = RequestFromProto(
        req, [](const std::string&) { return std::nullopt; }, 1 << 30);
    auto mine = (*local)->Locate(*in_process_req);
    ASSERT_TRUE(mine.ok());
    EXPECT_EQ(remote->quality, mine->quality);
    EXPECT_DOUBLE_EQ(remote->lat_deg, mine->lat_deg);
    EXPECT_DOUBLE_EQ(remote->lon_deg, mine->lon_deg);
    EXPECT_DOUBLE_EQ(remote->radius95_m, mine->radius95_m);
    refined += remote->quality == FixQuality::kRefined;
  }
  EXPECT_GE(refined, 2);  // the comparison must be about real fixes
}

TEST_F(ServiceTest, BadFramesCloseOnlyTheirConnection) {
  ServiceOptions o;
  o.max_frame_bytes = 1 << 20;
  ASSERT_TRUE(Start(o));
  {  // length prefix over the cap: answered, then closed
    tcp::socket s = Raw();
    const uint8_t h[4] = {0x7f, 0, 0, 0};
    asio::write(s, asio::buffer(h));
    const v1::Envelope e = ReadAnswer(s);
    EXPECT_EQ(e.status().code(), v1::Status::INVALID_ARGUMENT);
    EXPECT_NE(e.status().message().find("over the"), std::string::npos);
    EXPECT_TRUE(ClosedByPeer(s));
  }
  {  // zero-length frame
    tcp::socket s = Raw();
    const uint8_t h[4] = {0, 0, 0, 0};
    asio::write(s, asio::buffer(h));
    EXPECT_EQ(ReadAnswer(s).status().code(), v1::Status::INVALID_ARGUMENT);
    EXPECT_TRUE(ClosedByPeer(s));
  }
  {  // garbage that is not an Envelope
    tcp::socket s = Raw();
    const uint8_t f[9] = {0, 0, 0, 5, 0xff, 0xff, 0xff, 0xff, 0xff};
    asio::write(s, asio::buffer(f));
    EXPECT_EQ(ReadAnswer(s).status().code(), v1::Status::INVALID_ARGUMENT);
    EXPECT_TRUE(ClosedByPeer(s));
  }
  {  // truncated frame: the client goes away mid-frame
    tcp::socket s = Raw();
    const uint8_t f[6] = {0, 0, 0, 100, 1, 2};
    asio::write(s, asio::buffer(f));
  }
  ExpectStillServing();
}

// The cap holds N up to max_frame_bytes inclusive (README "Wire", server/service/session.h): a
// frame of exactly the cap is read and answered, and its connection keeps serving; one byte more
// is refused at its header, before its body is read (call id 0, INVALID_ARGUMENT), and that
// connection closed.
TEST_F(ServiceTest, FrameOfExactlyTheCapIsReadOneByteMoreIsRefused) {
  ServiceOptions o;
  o.max_frame_bytes = 4096;
  o.read_timeout_ms = 1000;  // a server waiting for the refused frame's body gives up quickly
  ASSERT_TRUE(Start(o));
  tcp::socket s = Raw();
  asio::write(s, asio::buffer(DescribeFrameOfSize(7, o.max_frame_bytes)));
  const v1::Envelope at_cap = ReadAnswer(s);
  EXPECT_EQ(at_cap.call_id(), 7u);
  EXPECT_EQ(at_cap.status().code(), v1::Status::OK) << at_cap.status().message();
  asio::write(s, asio::buffer(DescribeFrameOfSize(8, 100)));  // still open: answered too
  EXPECT_EQ(ReadAnswer(s).call_id(), 8u);
  const std::string over = DescribeFrameOfSize(9, o.max_frame_bytes + 1);
  asio::write(s, asio::buffer(over.data(), kFrameHeaderBytes));  // its header alone
  const v1::Envelope refused = ReadAnswer(s);
  EXPECT_EQ(refused.call_id(), 0u);
  EXPECT_EQ(refused.status().code(), v1::Status::INVALID_ARGUMENT);
  EXPECT_NE(refused.status().message().find("4097 bytes is over the 4096-byte cap"),
            std::string::npos)
      << refused.status().message();
  EXPECT_TRUE(ClosedByPeer(s));
  ExpectStillServing();
}

TEST_F(ServiceTest, BadRequestsGetClearStatuses) {
  ASSERT_TRUE(Start(ServiceOptions{}));
  auto c = Connect();
  auto code_of = [&](const std::string& method, const v1::LocateRequest& r) {
    auto a = c->Call(method, r.SerializeAsString(), 5000);
    EXPECT_TRUE(a.ok());
    return a.ok() ? a->code : v1::Status::OK;
  };
  const v1::LocateRequest good = Query(5);
  EXPECT_EQ(code_of("Fly", good), v1::Status::UNIMPLEMENTED);
  v1::LocateRequest r = good;
  r.clear_image();
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // missing image
  r = good;
  r.set_image("hello, not an image");
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // undecodable
  r = good;                                                       // a PNG whose header says 0 x 0
  r.set_image(std::string("\x89PNG\r\n\x1a\n\0\0\0\rIHDR\0\0\0\0\0\0\0\0\x08\x02\0\0\0", 29));
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);
  r = good;  // a JPEG whose SOF0 claims 60000 x 60000: refused before any decode
  r.set_image(std::string("\xff\xd8\xff\xc0\x00\x11\x08\xea\x60\xea\x60\x03", 12) +
              std::string(64, '\0'));
  auto a = c->Call("Locate", r.SerializeAsString(), 5000);
  ASSERT_TRUE(a.ok());
  EXPECT_EQ(a->code, v1::Status::INVALID_ARGUMENT);
  EXPECT_NE(a->message.find("60000x60000"), std::string::npos) << a->message;
  r = good;
  r.mutable_prior()->set_lat_deg(std::nan(""));
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // NaN prior
  r = good;
  r.mutable_prior()->set_radius_m(-10);
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // negative radius
  r = good;
  r.mutable_prior()->set_lat_deg(123);
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // out of range
  r = good;
  r.mutable_calibration()->set_focal_length_sigma_px(-1);
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // negative calibration sigma
  r = good;
  r.mutable_calibration()->set_k1_sigma(std::nan(""));
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // NaN calibration sigma
  r = good;
  r.mutable_integrity()->set_integrity_risk(0.7);
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // integrity risk over 0.5
  r = good;
  r.mutable_integrity()->set_lateral_alert_limit_m(-1);
  EXPECT_EQ(code_of("Locate", r), v1::Status::INVALID_ARGUMENT);  // negative alert limit
  r = good;
  r.clear_calibration();
  r.set_calibration_id("17/1/2#0");
  EXPECT_EQ(code_of("Locate", r), v1::Status::NOT_FOUND);  // unknown calibration id
  auto tiles = c->ListTiles(5000);  // a known id: the first tile's first camera
  ASSERT_TRUE(tiles.ok() && tiles->tiles_size() > 0);
  r.set_calibration_id(tiles->tiles(0).tile() + "#0");
  EXPECT_EQ(code_of("Locate", r), v1::Status::OK);
  EXPECT_EQ(code_of("Locate", good), v1::Status::OK);  // and the good one still works
}

TEST_F(ServiceTest, SlowAndDeafClientsAreCutOff) {
  ServiceOptions o;
  o.read_timeout_ms = 1000;
  o.max_pending_write_bytes = 64 << 10;
  ASSERT_TRUE(Start(o));
  tcp::socket slow = Raw();  // slowloris: a frame announced, one byte a second
  const uint8_t h[4] = {0, 0, 0, 50};
  asio::write(slow, asio::buffer(h));
  bool cut = false;
  for (int i = 0; i < 5 && !cut; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(600));
    boost::system::error_code ec;
    asio::write(slow, asio::buffer(h, 1), ec);
    cut = ec.failed();
    if (!cut && i >= 3) cut = ClosedByPeer(slow);
  }
  EXPECT_TRUE(cut) << "a client trickling one frame was not cut off";
  tcp::socket deaf = Raw();  // sends calls, never reads the answers
  v1::Envelope e;
  e.set_method("ListTiles");
  const std::string frame = EncodeFrame(e);
  std::string burst;
  for (int i = 0; i < 2000; ++i) burst += frame;
  boost::system::error_code ec;
  for (int i = 0; i < 200 && !ec; ++i) asio::write(deaf, asio::buffer(burst), ec);
  EXPECT_TRUE(ec.failed()) << "a client that never reads was not closed";
  ExpectStillServing();
}

TEST_F(ServiceTest, TokenOverloadAndDeadline) {
  const std::string token_file = ::testing::TempDir() + "/service_token";
  std::ofstream(token_file) << "correct-horse-battery-staple\n";
  ServiceOptions o;
  o.token_file = token_file;
  o.workers = 1;
  o.queue = 1;
  ASSERT_TRUE(Start(o));
  auto anonymous = Connect();
  auto d = anonymous->Call("Describe", "", 5000);
  ASSERT_TRUE(d.ok());
  EXPECT_EQ(d->code, v1::Status::UNAUTHENTICATED);
  auto c = Connect("correct-horse-battery-staple");
  EXPECT_EQ(c->Call("Describe", "", 5000)->code, v1::Status::OK);
  // One worker, one queue slot: of 8 calls at once some must be refused as overloaded, and every
  // call gets exactly one answer.
  const std::string body = Query(7).SerializeAsString();
  std::vector<std::future<Result<Answer>>> calls;
  for (int i = 0; i < 8; ++i) calls.push_back(c->CallAsync("Locate", body, 20000));
  int ok = 0, overloaded = 0;
  for (auto& f : calls) {
    auto a = f.get();
    ASSERT_TRUE(a.ok());
    ok += a->code == v1::Status::OK;
    overloaded += a->code == v1::Status::OVERLOADED;
  }
  EXPECT_EQ(ok + overloaded, 8);
  EXPECT_GE(overloaded, 1);
  EXPECT_GE(ok, 1);
  // A 1 ms deadline cannot be met by a locate: answered DEADLINE_EXCEEDED, not run.
  auto late = c->Call("Locate", body, 1);
  ASSERT_TRUE(late.ok());
  EXPECT_EQ(late->code, v1::Status::DEADLINE_EXCEEDED);
}

TEST_F(ServiceTest, ShutdownAnswersCallsInFlight) {
  ServiceOptions o;
  o.workers = 1;
  ASSERT_TRUE(Start(o));
  auto c = Connect();
  const std::string body = Query(9).SerializeAsString();
  std::vector<std::future<Result<Answer>>> calls;
  for (int i = 0; i < 3; ++i) calls.push_back(c->CallAsync("Locate", body, 30000));
  std::this_thread::sleep_for(std::chrono::milliseconds(200));
  service_->Shutdown();
  for (auto& f : calls) {
    auto a = f.get();
    ASSERT_TRUE(a.ok()) << a.status().ToString();
    EXPECT_EQ(a->code, v1::Status::OK);
  }
  runner_.join();  // Run returned: drained
}

TEST_F(ServiceTest, ClientReconnectsAfterTheServerClosedAnIdleConnection) {
  ServiceOptions o;
  o.idle_timeout_ms = 300;
  ASSERT_TRUE(Start(o));
  auto c = Connect();
  ASSERT_TRUE(c->Describe(5000).ok());
  std::this_thread::sleep_for(std::chrono::milliseconds(900));  // the server drops it meanwhile
  auto again = c->Describe(5000);
  EXPECT_TRUE(again.ok()) << again.status().ToString();
}

TEST_F(ServiceTest, HealthAndMetricsOnTheHttpPort) {
  ASSERT_TRUE(Start(ServiceOptions{}));
  auto c = Connect();
  ASSERT_TRUE(c->Locate(Query(6), 20000).ok());
  ASSERT_EQ(c->Call("Fly", "", 5000)->code, v1::Status::UNIMPLEMENTED);
  auto get = [&](const std::string& path) { return HttpGet(path); };
  const std::string health = get("/healthz");
  EXPECT_NE(health.find("200 OK"), std::string::npos) << health;
  const std::string metrics = get("/metrics");
  // Prometheus text exposition format: counters by label, a histogram, gauges.
  for (const char* want :
       {"# TYPE sightfix_calls_total counter",
        "sightfix_calls_total{method=\"Locate\",status=\"OK\"} 1",
        "sightfix_calls_total{method=\"Fly\",status=\"UNIMPLEMENTED\"} 1",
        "# TYPE sightfix_locate_seconds histogram", "sightfix_locate_seconds_bucket{le=\"+Inf\"} 1",
        "sightfix_locate_seconds_count 1", "sightfix_queue_depth 0", "sightfix_tiles_cached",
        "sightfix_map_version 1"})
    EXPECT_NE(metrics.find(want), std::string::npos) << want << "\n" << metrics;
  EXPECT_NE(get("/nowhere").find("404"), std::string::npos);
}

TEST_F(ServiceTest, ConfigurationSafety) {
  ServiceOptions o;
  o.map_dir = DataDir() + "/map";
  o.listen = "0.0.0.0:0";  // beyond loopback in plaintext: refused
  o.http = "";
  auto open = Service::Create(o);
  ASSERT_FALSE(open.ok());
  EXPECT_NE(open.status().message().find("--tls-cert"), std::string::npos);
  o.allow_plaintext = true;  // ... unless told so, and then a token is still asked for
  open = Service::Create(o);
  ASSERT_FALSE(open.ok());
  EXPECT_NE(open.status().message().find("--token-file"), std::string::npos);
  o.allow_open = true;  // ... unless told that too
  EXPECT_TRUE(Service::Create(o).ok());
  o = ServiceOptions{};
  o.map_dir = DataDir() + "/map";
  o.listen = "127.0.0.1:0";
  o.http = "";
  o.token_file = ::testing::TempDir() + "/short_token";
  std::ofstream(o.token_file) << "short\n";
  EXPECT_FALSE(Service::Create(o).ok());  // a guessable token is refused
  o.token_file.clear();
  o.map_dir = DataDir() + "/no-such-map";
  EXPECT_FALSE(Service::Create(o).ok());
}

TEST_F(ServiceTest, ReloadKeepsServingAndConnectionCapHolds) {
  ServiceOptions o;
  o.max_connections = 2;
  ASSERT_TRUE(Start(o));
  auto a = Connect();
  auto b = Connect();
  ASSERT_TRUE(a->Describe(5000).ok());
  ASSERT_TRUE(b->Describe(5000).ok());
  tcp::socket third = Raw();  // over the cap: closed at once, the first two unaffected
  EXPECT_TRUE(ClosedByPeer(third));
  EXPECT_TRUE(a->Describe(5000).ok());
  std::future<Result<Answer>> during = a->CallAsync("Locate", Query(4).SerializeAsString(), 20000);
  EXPECT_TRUE(service_->Reload().ok());
  auto answer = during.get();
  ASSERT_TRUE(answer.ok());
  EXPECT_EQ(answer->code, v1::Status::OK);  // the call in flight finished on the old map
  auto after = b->Locate(Query(4), 20000);
  EXPECT_TRUE(after.ok()) << after.status().ToString();
}

TEST_F(ServiceTest, BadTileIsSkippedAndTheRestServes) {
  namespace fs = std::filesystem;
  const std::string copy = ::testing::TempDir() + "/service_bad_tile_map";
  fs::remove_all(copy);
  fs::copy(DataDir() + "/map", copy, fs::copy_options::recursive);
  auto catalog = ReadCatalog(copy + "/catalog.sqlite");
  ASSERT_TRUE(catalog.ok());
  ASSERT_GE(catalog->tiles.size(), 2u);
  std::ofstream(copy + "/" + catalog->tiles[0].file, std::ios::trunc) << "damaged";
  ServiceOptions o;
  o.map_dir = copy;
  ASSERT_TRUE(Start(o));
  auto c = Connect();
  int answered = 0, refined = 0;
  for (int row : {2, 8, 14, 20, 26}) {
    auto fix = FixFromProto(c->Locate(Query(row), 20000));
    ASSERT_TRUE(fix.ok()) << fix.status().ToString();  // an answer, never a failure
    ++answered;
    refined += fix->quality == FixQuality::kRefined;
    if (fix->quality != FixQuality::kRefined) {
      EXPECT_NE(fix->reason.find("skipped"), std::string::npos) << fix->reason;
    }
  }
  std::printf("with tile %s damaged: %d answered, %d refined\n",
              catalog->tiles[0].key.ToString().c_str(), answered, refined);
  EXPECT_GE(refined, 1);
}

// Load: 32 clients, each on its own raw connection, one call at a time for 30 s. Every call must
// get exactly one answer (a duplicate would show up as an id mismatch on the next read), and
// every answer must be OK within the deadline, OVERLOADED or DEADLINE_EXCEEDED.
TEST_F(ServiceTest, ThirtyTwoClientsForThirtySeconds) {
  ASSERT_TRUE(Start(ServiceOptions{}));
  std::vector<std::string> bodies;
  for (int row : {2, 6, 10, 14, 18}) bodies.push_back(Query(row).SerializeAsString());
  constexpr int kClients = 32, kDeadlineMs = 10000;
  const auto stop = std::chrono::steady_clock::now() + std::chrono::seconds(30);
  std::mutex mu;
  std::vector<double> ok_ms;
  int sent = 0, lost = 0, mismatched = 0, overloaded = 0, expired = 0, other = 0, late = 0;
  std::vector<std::thread> clients;
  for (int c = 0; c < kClients; ++c)
    clients.emplace_back([&, c] {
      asio::io_context io;
      tcp::socket s(io);
      s.connect(
          {asio::ip::make_address("127.0.0.1"), static_cast<unsigned short>(service_->port())});
      for (uint64_t id = 1; std::chrono::steady_clock::now() < stop; ++id) {
        v1::Envelope e;
        e.set_call_id(id);
        e.set_method("Locate");
        e.set_deadline_ms(kDeadlineMs);
        e.set_body(bodies[(c + id) % bodies.size()]);
        const auto t0 = std::chrono::steady_clock::now();
        boost::system::error_code ec;
        asio::write(s, asio::buffer(EncodeFrame(e)), ec);
        v1::Envelope a;
        if (!ec) {
          uint8_t h[4];
          asio::read(s, asio::buffer(h), ec);
          std::string body(ec ? 0 : FrameLength(h), '\0');
          if (!ec) asio::read(s, asio::buffer(body), ec);
          if (!ec) a = *ParseEnvelope(body.data(), body.size());
        }
        const double ms =
            std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0)
                .count();
        std::lock_guard<std::mutex> lock(mu);
        ++sent;
        if (ec) {
          ++lost;
          return;
        }
        if (a.call_id() != id) ++mismatched;
        switch (a.status().code()) {
          case v1::Status::OK:
            ok_ms.push_back(ms);
            late += ms > kDeadlineMs + 100;  // the server checks; 100 ms for the way back
            break;
          case v1::Status::OVERLOADED:
            ++overloaded;
            break;
          case v1::Status::DEADLINE_EXCEEDED:
            ++expired;
            break;
          default:
            ++other;
        }
      }
    });
  for (std::thread& t : clients) t.join();
  std::sort(ok_ms.begin(), ok_ms.end());
  auto pct = [&](double q) {
    return ok_ms.empty() ? 0.0 : ok_ms[std::min(ok_ms.size() - 1, size_t(q * ok_ms.size()))];
  };
  std::printf(
      "load: %d clients, 30 s: %d calls, %zu OK (%.2f/s), %d overloaded, %d deadline "
      "exceeded, %d other, %d lost, %d mismatched; OK latency p50 %.0f ms, p95 %.0f ms, "
      "p99 %.0f ms\n",
      kClients, sent, ok_ms.size(), ok_ms.size() / 30.0, overloaded, expired, other, lost,
      mismatched, pct(0.5), pct(0.95), pct(0.99));
  EXPECT_EQ(lost, 0);
  EXPECT_EQ(mismatched, 0);
  EXPECT_EQ(other, 0);
  EXPECT_EQ(late, 0);
  EXPECT_GT(ok_ms.size(), 0u);
}

}  // namespace
}  // namespace sightfix
