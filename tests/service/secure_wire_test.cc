// The secured wire on loopback against the service's demo map (fixture: service_fixture.h): an
// answer held up on the way refused as stale, the nonce echoed, each client's fair share, and
// TLS from many threads while the server rereads its TLS files (run under ThreadSanitizer by
// scripts/test-sanitizers.sh tsan). tests/robustness/tls_test.sh covers TLS from the shell.
#include <array>
#include <atomic>
#include <thread>

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
  int ok = 0, limited = 0;
  for (int k = 0; k < 4; ++k) {
    const v1::Envelope a = ReadAnswer(s);
    ok += a.status().code() == v1::Status::OK;
    if (a.status().code() == v1::Status::RATE_LIMITED) {
      ++limited;
      EXPECT_NE(a.status().message().find("over its share (2 calls/s, burst 2)"), std::string::npos)
          << a.status().message();
    }
  }
  EXPECT_EQ(ok, 2);
  EXPECT_EQ(limited, 2);
  auto c = Connect();
  ASSERT_NE(c, nullptr);
  for (int k = 0; k < 3; ++k) {
    auto d = c->Describe(10000);
    EXPECT_TRUE(d.ok()) << d.status().ToString();
  }
  EXPECT_GT(c->resent_calls(), 0u);  // it waited its turn
}

// TLS from many threads at once while the server rereads its TLS files (and its map): every
// call of a good vehicle is answered, a revoked one is refused and not retried. Run under
// ThreadSanitizer by scripts/test-sanitizers.sh tsan: the client's one I/O thread per
// connection, the server's session swap of contexts and its check of live sessions against a
// reloaded CRL. Certificates from scripts/make-certs.sh.
TEST_F(ServiceTest, TlsCallsFromManyThreadsWhileTheTlsFilesReload) {
  const std::string pki = ::testing::TempDir() + "/service_tls_" + std::to_string(::getpid());
  const std::string certs = std::string("bash ") + SIGHTFIX_SOURCE_DIR + "/scripts/make-certs.sh ";
  for (const std::string step : {"ca", "server localhost DNS:localhost IP:127.0.0.1",
                                 "vehicle vehicle-1", "vehicle vehicle-2", "revoke vehicle-2"})
    ASSERT_EQ(std::system((certs + pki + " " + step + " >/dev/null").c_str()), 0) << step;
  ServiceOptions o;
  o.tls_cert_file = pki + "/localhost.crt", o.tls_key_file = pki + "/localhost.key";
  o.tls_client_ca_file = pki + "/ca.crt", o.tls_crl_file = pki + "/crl.pem";
  o.workers = 2;
  ASSERT_TRUE(Start(o));
  auto connect = [&](const std::string& vehicle) {
    ClientOptions co;
    co.port = service_->port();
    co.tls_ca_file = pki + "/ca.crt", co.tls_server_name = "localhost";
    co.tls_cert_file = pki + "/" + vehicle + ".crt", co.tls_key_file = pki + "/" + vehicle + ".key";
    return Client::Connect(co);
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

}  // namespace
}  // namespace sightfix
