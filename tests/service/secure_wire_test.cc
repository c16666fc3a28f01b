// The secured wire on loopback against the service's demo map (fixture: service_fixture.h): an
// answer held up on the way refused as stale, the nonce echoed, each client's fair share, TLS
// from many threads while the server rereads its TLS files (run under ThreadSanitizer by
// scripts/test-sanitizers.sh tsan), session resumption and its check of the certificate, a
// client whose clock jumps, the connection age cap and the pacing of handshakes.
// tests/robustness/tls_test.sh covers TLS from the shell.
#include <array>
#include <atomic>
#include <ctime>
#include <thread>
#include <vector>

#include "tests/service/service_fixture.h"

namespace sightfix {
namespace {

// A relay between one client and the service that holds every server-to-client chunk for
// delay_ms: a network (or an attacker on it) delaying answers. Plaintext or TLS bytes alike.
class DelayingRelay {
 public:
  DelayingRelay(int upstream_port, int delay_ms)
      : acceptor_(io_, {asio::ip::make_address("127.0.0.1"), 0}) {
    thread_ = std::thread([this, upstream_port, delay_ms] {
      boost::system::error_code ec;
      tcp::socket client(io_), server(io_);
      acceptor_.accept(client, ec);
      if (ec) return;
      server.connect(
          {asio::ip::make_address("127.0.0.1"), static_cast<unsigned short>(upstream_port)}, ec);
      if (ec) return;
      auto pump = [](tcp::socket& from, tcp::socket& to, int hold_ms) {
        std::array<char, 65536> buf;
        for (;;) {
          boost::system::error_code e;
          const size_t n = from.read_some(asio::buffer(buf), e);
          if (e) break;
          std::this_thread::sleep_for(std::chrono::milliseconds(hold_ms));
          asio::write(to, asio::buffer(buf.data(), n), e);
          if (e) break;
        }
        boost::system::error_code ignored;
        to.shutdown(tcp::socket::shutdown_send, ignored);
      };
      std::thread up([&] { pump(client, server, 0); });
      pump(server, client, delay_ms);
      up.join();
    });
  }
  ~DelayingRelay() {
    boost::system::error_code ignored;
    acceptor_.close(ignored);
    if (thread_.joinable()) thread_.join();
  }
  int port() const { return acceptor_.local_endpoint().port(); }

 private:
  asio::io_context io_;
  tcp::acceptor acceptor_;
  std::thread thread_;
};

// Freshness: an answer held up on the way by 400 ms is refused by a client that allows 150 ms
// (and not sent again: a delaying path would delay again), and used by one that allows 2 s.
TEST_F(ServiceTest, AnAnswerHeldUpOnTheWayIsRefusedAsStale) {
  ASSERT_TRUE(Start(ServiceOptions{}));
  for (const int max_age_ms : {150, 2000}) {
    DelayingRelay relay(service_->port(), 400);
    ClientOptions co;
    co.port = relay.port();
    co.max_answer_age_ms = max_age_ms;
    auto c = Client::Connect(co);
    ASSERT_TRUE(c.ok()) << c.status().ToString();
    auto d = (*c)->Describe(10000);
    if (max_age_ms == 150) {
      ASSERT_FALSE(d.ok());
      EXPECT_EQ(d.status().code(), StatusCode::kFailedPrecondition);
      EXPECT_NE(d.status().message().find("stale answer"), std::string::npos)
          << d.status().ToString();
      EXPECT_EQ((*c)->resent_calls(), 0u);
    } else {
      EXPECT_TRUE(d.ok()) << d.status().ToString();
    }
  }
}

// The nonce on the wire: echoed as sent; more than 32 bytes is refused.
TEST_F(ServiceTest, TheAnswerEchoesTheRequestsNonce) {
  ASSERT_TRUE(Start(ServiceOptions{}));
  tcp::socket s = Raw();
  v1::Envelope e;
  e.set_call_id(5);
  e.set_method("Describe");
  e.set_nonce(std::string("\x00\x01vehicle-7 nonce", 17));
  asio::write(s, asio::buffer(EncodeFrame(e)));
  v1::Envelope a = ReadAnswer(s);
  EXPECT_EQ(a.call_id(), 5u);
  EXPECT_EQ(a.status().code(), v1::Status::OK);
  EXPECT_EQ(a.nonce(), e.nonce());
  e.set_call_id(6);
  e.set_nonce(std::string(kMaxNonceBytes + 1, 'n'));
  asio::write(s, asio::buffer(EncodeFrame(e)));
  a = ReadAnswer(s);
  EXPECT_EQ(a.call_id(), 6u);
  EXPECT_EQ(a.status().code(), v1::Status::INVALID_ARGUMENT);
  EXPECT_TRUE(a.nonce().empty());
}

// Fair shares after the client is known: with 2 calls a second and a burst of 2, four calls sent
// at once get two answers and two RATE_LIMITED (the bucket is per client: here the address);
// the client library backs off from RATE_LIMITED with jitter and gets its answers as the bucket
// refills.
TEST_F(ServiceTest, EachClientGetsItsShare) {
  ServiceOptions o;
  o.client_calls_per_s = 2, o.client_burst = 2;
  ASSERT_TRUE(Start(o));
  tcp::socket s = Raw();
  for (uint64_t id = 1; id <= 4; ++id) {
    v1::Envelope e;
    e.set_call_id(id);
    e.set_method("Describe");
    asio::write(s, asio::buffer(EncodeFrame(e)));
  }
  // Two calls take the burst, the third is refused, and the server then reads nothing more
  // from this client until a token is back (half a second at 2 a second): the fourth waits in
  // the socket and is served.
  int ok = 0, limited = 0;
  const auto sent = std::chrono::steady_clock::now();
  double last_s = 0;
  for (int k = 0; k < 4; ++k) {
    const v1::Envelope a = ReadAnswer(s);
    last_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - sent).count();
    ok += a.status().code() == v1::Status::OK;
    if (a.status().code() == v1::Status::RATE_LIMITED) {
      ++limited;
      EXPECT_NE(a.status().message().find("over its share (2 calls/s, burst 2)"), std::string::npos)
          << a.status().message();
    }
  }
  EXPECT_EQ(ok, 3);
  EXPECT_EQ(limited, 1);
  EXPECT_GT(last_s, 0.4) << "the fourth call was read before the client had a token again";
  auto c = Connect();
  ASSERT_NE(c, nullptr);
  for (int k = 0; k < 3; ++k) {
    auto d = c->Describe(10000);
    EXPECT_TRUE(d.ok()) << d.status().ToString();
  }
  EXPECT_GT(c->resent_calls(), 0u);  // it waited its turn
}

// A certificate authority made with scripts/make-certs.sh in a fresh folder: each step is the
// script's arguments after the folder; `ca_args` goes to `openssl ca` (CA_ARGS).
std::string MakePki(const std::string& name, const std::vector<std::string>& steps) {
  const std::string pki = ::testing::TempDir() + "/" + name + "_" + std::to_string(::getpid());
  const std::string certs = std::string("bash ") + SIGHTFIX_SOURCE_DIR + "/scripts/make-certs.sh ";
  std::filesystem::remove_all(pki);
  for (const std::string& step : steps)
    EXPECT_EQ(std::system((certs + pki + " " + step + " >/dev/null").c_str()), 0) << step;
  return pki;
}

// A validity end `seconds` from now, in openssl ca's -enddate form (YYYYMMDDHHMMSSZ, UTC).
std::string EndIn(int seconds) {
  const std::time_t t = std::time(nullptr) + seconds;
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y%m%d%H%M%SZ", std::gmtime(&t));
  return buf;
}

ServiceOptions TlsService(const std::string& pki, bool crl) {
  ServiceOptions o;
  o.tls_cert_file = pki + "/localhost.crt", o.tls_key_file = pki + "/localhost.key";
  o.tls_client_ca_file = pki + "/ca.crt";
  if (crl) o.tls_crl_file = pki + "/crl.pem";
  o.workers = 2;
  return o;
}

ClientOptions TlsClient(const std::string& pki, int port, const std::string& vehicle) {
  ClientOptions co;
  co.port = port;
  co.tls_ca_file = pki + "/ca.crt", co.tls_server_name = "localhost";
  co.tls_cert_file = pki + "/" + vehicle + ".crt", co.tls_key_file = pki + "/" + vehicle + ".key";
  return co;
}

const char kServerStep[] = "server localhost DNS:localhost IP:127.0.0.1";

// TLS from many threads at once while the server rereads its TLS files (and its map): every
// call of a good vehicle is answered, a revoked one is refused and not retried. Run under
// ThreadSanitizer by scripts/test-sanitizers.sh tsan: the client's one I/O thread per
// connection, the server's session swap of contexts and its check of live sessions against a
// reloaded CRL.
TEST_F(ServiceTest, TlsCallsFromManyThreadsWhileTheTlsFilesReload) {
  const std::string pki = MakePki("service_tls", {"ca", kServerStep, "vehicle vehicle-1",
                                                  "vehicle vehicle-2", "revoke vehicle-2"});
  ASSERT_TRUE(Start(TlsService(pki, true)));
  auto connect = [&](const std::string& vehicle) {
    return Client::Connect(TlsClient(pki, service_->port(), vehicle));
  };
  auto good = connect("vehicle-1");
  ASSERT_TRUE(good.ok()) << good.status().ToString();
  std::atomic<int> answered{0}, failed{0};
  std::vector<std::thread> callers;
  for (int t = 0; t < 4; ++t)
    callers.emplace_back([&] {
      for (int k = 0; k < 8; ++k) {
        auto d = (*good)->Describe(20000);
        (d.ok() && d->images() > 0 ? answered : failed)++;
      }
    });
  std::thread reloader([&] {
    for (int k = 0; k < 2; ++k) EXPECT_TRUE(service_->Reload().ok());
  });
  for (std::thread& t : callers) t.join();
  reloader.join();
  EXPECT_EQ(answered, 32);
  EXPECT_EQ(failed, 0);
  auto revoked = connect("vehicle-2");
  ASSERT_TRUE(revoked.ok());  // TLS 1.3: the client's handshake ends before the server's check
  auto refused = (*revoked)->Describe(5000);
  ASSERT_FALSE(refused.ok());
  EXPECT_EQ(refused.status().code(), StatusCode::kFailedPrecondition)
      << refused.status().ToString();
  EXPECT_EQ((*revoked)->resent_calls(), 0u);
}

// Resumption: a reconnect resumes the TLS session (cheaper than a full handshake), and the
// server checks the vehicle's certificate again when it does. A certificate that expires
// between the full handshake and the reconnect is refused: the resumed connection is closed,
// the call sent again on a full handshake, which the server refuses with an alert.
TEST_F(ServiceTest, AReconnectResumesTheSessionAndTheCertificateIsCheckedAgain) {
  const std::string pki = MakePki("service_resume", {"ca", kServerStep, "vehicle vehicle-1"});
  ASSERT_EQ(std::system(("CA_ARGS='-enddate " + EndIn(3) + "' bash " + SIGHTFIX_SOURCE_DIR +
                         "/scripts/make-certs.sh " + pki + " vehicle short-lived >/dev/null")
                            .c_str()),
            0);
  ASSERT_TRUE(Start(TlsService(pki, false)));
  auto good = Client::Connect(TlsClient(pki, service_->port(), "vehicle-1"));
  auto brief = Client::Connect(TlsClient(pki, service_->port(), "short-lived"));
  ASSERT_TRUE(good.ok() && brief.ok());
  for (Client* c : {good->get(), brief->get()}) {
    ASSERT_TRUE(c->Describe(5000).ok());
    EXPECT_EQ(c->resumed_handshakes(), 0u);
  }
  std::this_thread::sleep_for(std::chrono::seconds(4));  // short-lived has expired
  (*good)->Disconnect();
  EXPECT_TRUE((*good)->Describe(5000).ok());
  EXPECT_EQ((*good)->resumed_handshakes(), 1u);
  const std::string metrics = HttpGet("/metrics");
  EXPECT_NE(metrics.find("sightfix_tls_resumed_total 1\n"), std::string::npos) << metrics;
  // The caller named by its certificate in the metrics too (two calls of vehicle-1).
  EXPECT_NE(metrics.find("sightfix_client_calls_total{client=\"vehicle-1\",status=\"OK\"} 2\n"),
            std::string::npos)
      << metrics;
  (*brief)->Disconnect();
  auto refused = (*brief)->Describe(5000);
  EXPECT_EQ((*brief)->resumed_handshakes(), 1u);
  ASSERT_FALSE(refused.ok());
  EXPECT_EQ(refused.status().code(), StatusCode::kFailedPrecondition)
      << refused.status().ToString();
}

// The clock: a client whose wall clock jumps three years ahead (a spoofed GNSS time) after it
// connected. Under the holdover clock it keeps checking the server's certificate at its own
// carried-forward time and goes on; a client that reads the wall clock at each handshake finds
// the certificate expired. The server's reload makes the next handshakes full ones.
TEST_F(ServiceTest, AClientWhoseClockJumpsKeepsItsHoldoverTime) {
  const std::string pki = MakePki("service_clock", {"ca", kServerStep, "vehicle vehicle-1"});
  ASSERT_TRUE(Start(TlsService(pki, false)));
  auto jump_s = std::make_shared<std::atomic<int64_t>>(0);
  auto connect = [&](ClientOptions::CertificateClock clock) {
    ClientOptions co = TlsClient(pki, service_->port(), "vehicle-1");
    co.certificate_clock = clock;
    co.wall_clock = [jump_s] {
      return std::chrono::system_clock::now() + std::chrono::seconds(jump_s->load());
    };
    auto c = Client::Connect(co);
    EXPECT_TRUE(c.ok()) << c.status().ToString();
    return c.ok() ? std::move(c).value() : nullptr;
  };
  auto holdover = connect(ClientOptions::CertificateClock::kHoldover);
  auto wall = connect(ClientOptions::CertificateClock::kWallClock);
  ASSERT_TRUE(holdover && wall);
  jump_s->store(int64_t{3} * 366 * 24 * 3600);
  ASSERT_TRUE(service_->Reload().ok());  // new ticket keys: no resumption below
  for (Client* c : {holdover.get(), wall.get()}) c->Disconnect();
  auto kept = holdover->Describe(5000);
  EXPECT_TRUE(kept.ok()) << kept.status().ToString();
  EXPECT_EQ(holdover->resumed_handshakes(), 0u);
  auto lost = wall->Describe(5000);
  ASSERT_FALSE(lost.ok());
  EXPECT_EQ(lost.status().code(), StatusCode::kFailedPrecondition) << lost.status().ToString();
  EXPECT_NE(lost.status().message().find("expired"), std::string::npos) << lost.status().ToString();
}

// The connection age cap: a call on a connection past its age is answered UNAVAILABLE, which
// the client library sends again on a new connection; the server closes the old one after its
// grace.
TEST_F(ServiceTest, AConnectionPastItsAgeIsRetired) {
  ServiceOptions o;
  o.max_connection_age_s = 1;
  o.default_deadline_ms = 500;
  ASSERT_TRUE(Start(o));
  auto c = Connect();
  ASSERT_TRUE(c && c->Describe(5000).ok());
  std::this_thread::sleep_for(std::chrono::milliseconds(1200));
  EXPECT_TRUE(c->Describe(5000).ok());
  EXPECT_EQ(c->resent_calls(), 1u);
  EXPECT_TRUE(c->Describe(5000).ok());  // on the new connection
  EXPECT_EQ(c->resent_calls(), 1u);
}

// Handshakes paced per source address: past the burst (twice the rate), a new connection is
// closed before any TLS work until the bucket refills.
TEST_F(ServiceTest, HandshakesArePacedPerAddress) {
  const std::string pki = MakePki("service_pace", {"ca", kServerStep, "vehicle vehicle-1"});
  ServiceOptions o = TlsService(pki, false);
  o.handshake_rate_per_address = 1;  // a burst of 2
  ASSERT_TRUE(Start(o));
  ClientOptions co = TlsClient(pki, service_->port(), "vehicle-1");
  co.connect_timeout_ms = 300;  // shorter than a refill: no second try lands
  std::vector<std::unique_ptr<Client>> clients;
  for (int k = 0; k < 3; ++k) {
    auto c = Client::Connect(co);
    if (k < 2) {
      ASSERT_TRUE(c.ok()) << k << ": " << c.status().ToString();
      clients.push_back(std::move(c).value());
    } else {
      EXPECT_FALSE(c.ok()) << "the third handshake within a second was not refused";
    }
  }
  std::this_thread::sleep_for(std::chrono::milliseconds(1100));
  EXPECT_TRUE(Client::Connect(co).ok());
}

// True when a TCP connection from `source` to `target`:port completes within timeout_ms.
bool TcpConnects(const std::string& source, int port, int timeout_ms,
                 const std::string& target = "127.0.0.1") {
  asio::io_context io;
  tcp::socket s(io);
  const tcp::endpoint to{asio::ip::make_address(target), static_cast<unsigned short>(port)};
  s.open(to.protocol());
  s.bind({asio::ip::make_address(source), 0});
  bool connected = false;
  s.async_connect(to, [&](const boost::system::error_code& ec) { connected = !ec; });
  io.run_for(std::chrono::milliseconds(timeout_ms));
  return connected;
}

// Floods the port with connections from `source` until one goes unanswered (its SYN dropped),
// for at most 2 s after a first burst of 12. The kernel completes connects before the server
// accepts them, so the burst's connects all complete; the block follows the server's refusals.
bool FloodUntilBlocked(const std::string& source, int port, const std::string& target) {
  for (int k = 0; k < 12; ++k) TcpConnects(source, port, 200, target);  // the last may be dropped
  const auto burst_end = std::chrono::steady_clock::now();
  while (std::chrono::steady_clock::now() - burst_end < std::chrono::seconds(2))
    if (!TcpConnects(source, port, 200, target)) return true;
  return false;
}

// An address refused more than four bursts' worth within a second floods: the kernel then
// drops its SYNs (its connects go unanswered), other addresses are served, and after
// flood_block_s it may connect again.
TEST_F(ServiceTest, AFloodingAddressIsDroppedByTheKernel) {
  const std::string pki = MakePki("service_flood", {"ca", kServerStep, "vehicle vehicle-1"});
  ServiceOptions o = TlsService(pki, false);
  o.handshake_rate_per_address = 1;  // a burst of 2: blocked past 8 refusals in a second
  o.flood_block_s = 3;
  ASSERT_TRUE(Start(o));
  const int port = service_->port();
  ASSERT_TRUE(FloodUntilBlocked("127.0.0.2", port, "127.0.0.1"))
      << "a flooding address was never blocked";
  const auto blocked_by = std::chrono::steady_clock::now();  // the block began before this
  EXPECT_TRUE(TcpConnects("127.0.0.1", port, 300)) << "another address was blocked too";
  EXPECT_TRUE(Client::Connect(TlsClient(pki, port, "vehicle-1")).ok());
  std::this_thread::sleep_until(blocked_by + std::chrono::milliseconds(3300));
  EXPECT_TRUE(TcpConnects("127.0.0.2", port, 1000)) << "the block did not end";
}

// On a dual-stack port an IPv4 peer is named by its v4-mapped IPv6 address, and its packets are
// IPv4: the block must match them so. A flood from an IPv6 address is dropped too.
TEST_F(ServiceTest, FloodsAreDroppedOnDualStackAndIpv6Ports) {
  {
    boost::system::error_code ec;
    asio::io_context io;
    tcp::socket probe(io);
    probe.open(tcp::v6(), ec);
    if (!ec) probe.bind({asio::ip::make_address("::1"), 0}, ec);
    if (ec) GTEST_SKIP() << "no IPv6 loopback on this machine: " << ec.message();
  }
  const std::string pki = MakePki("service_flood6", {"ca", kServerStep, "vehicle vehicle-1"});
  ServiceOptions o = TlsService(pki, false);
  o.handshake_rate_per_address = 1;
  o.flood_block_s = 3;
  ASSERT_TRUE(Start(o, "[::]:0"));
  EXPECT_TRUE(FloodUntilBlocked("127.0.0.2", service_->port(), "127.0.0.1"))
      << "an IPv4 flood on a dual-stack port was never blocked";
  EXPECT_TRUE(TcpConnects("127.0.0.1", service_->port(), 300)) << "another address was blocked";
  EXPECT_TRUE(TcpConnects("::1", service_->port(), 300, "::1")) << "an IPv6 peer was blocked";
  service_->Shutdown(), runner_.join(), service_.reset();
  ASSERT_TRUE(Start(o, "[::1]:0"));
  EXPECT_TRUE(FloodUntilBlocked("::1", service_->port(), "::1"))
      << "an IPv6 flood was never blocked";
}

}  // namespace
}  // namespace sightfix
