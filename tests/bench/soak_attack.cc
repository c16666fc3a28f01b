#include "tests/bench/soak_attack.h"

#include <unistd.h>

#include <algorithm>
#include <boost/asio.hpp>
#include <boost/asio/ssl.hpp>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <mutex>
#include <sstream>
#include <thread>

#include "proto/tls_profile.h"

namespace sightfix::soak {

namespace asio = boost::asio;
namespace ssl = asio::ssl;
using tcp = asio::ip::tcp;
using TlsStream = ssl::stream<tcp::socket>;
using Clock = std::chrono::steady_clock;

// ---- The handshake flooder: `in_flight` chains of attempts on one I/O thread.

struct HandshakeFlood::Impl {
  HandshakeFloodOptions o;
  // Declared before the io_context: the streams its pending handlers hold need them alive.
  std::shared_ptr<ssl::context> with_cert, without_cert;
  asio::io_context io;
  tcp::endpoint server, source;
  std::thread runner;
  uint64_t next = 0;  // the I/O thread's: even attempts present the certificate
  std::atomic<uint64_t> attempted{0}, attempted_with_cert{0}, connect_failed{0},
      closed_before_tls{0}, completed_with_cert{0}, refused_without_cert{0}, other{0};
  mutable std::mutex mu;
  std::string first_other;

  void Attempt();
  void OnHandshake(const std::shared_ptr<TlsStream>& s, bool cert,
                   const boost::system::error_code& ec);
  void CloseCompleted(const std::shared_ptr<TlsStream>& s);
  void AwaitRefusal(const std::shared_ptr<TlsStream>& s);
  void Other(const std::shared_ptr<TlsStream>& s, const std::string& why);
  // Counts the attempt's outcome, drops its connection at once (a reset, unless the server
  // closed first: no TIME_WAIT left to use up the source address's ports) and starts the next.
  void Done(const std::shared_ptr<TlsStream>& s, std::atomic<uint64_t>& outcome);
};

namespace {

// The server's side gone: a limit closed the connection before (or during) the handshake.
bool ClosedByPeer(const boost::system::error_code& ec) {
  return ec == asio::error::eof || ec == asio::error::connection_reset ||
         ec == asio::error::broken_pipe || ec == ssl::error::stream_truncated;
}

}  // namespace

void HandshakeFlood::Impl::Attempt() {
  const bool cert = next++ % 2 == 0;
  ++attempted;
  if (cert) ++attempted_with_cert;
  auto s = std::make_shared<TlsStream>(io, cert ? *with_cert : *without_cert);
  boost::system::error_code ec;
  s->next_layer().open(tcp::v4(), ec);
  if (!ec) s->next_layer().bind(source, ec);
  if (ec) return Other(s, "bind " + source.address().to_string() + ": " + ec.message());
  if (Status st = SetClientServerName(s->native_handle(), o.server_name); !st.ok())
    return Other(s, st.ToString());
  s->next_layer().async_connect(server, [this, s, cert](const boost::system::error_code& e) {
    if (e) return Done(s, connect_failed);
    s->async_handshake(
        ssl::stream_base::client,
        [this, s, cert](const boost::system::error_code& h) { OnHandshake(s, cert, h); });
  });
}

void HandshakeFlood::Impl::OnHandshake(const std::shared_ptr<TlsStream>& s, bool cert,
                                       const boost::system::error_code& ec) {
  if (ec && ClosedByPeer(ec)) return Done(s, closed_before_tls);
  // TLS 1.3: the client's handshake ends with its own Finished, before the server has judged
  // its (absent) certificate; the refusal comes as an alert on the first read.
  if (ec && !cert && ec.category() == asio::error::get_ssl_category())
    return Done(s, refused_without_cert);
  if (ec) return Other(s, "handshake: " + ec.message());
  if (cert) return CloseCompleted(s);
  AwaitRefusal(s);
}

void HandshakeFlood::Impl::CloseCompleted(const std::shared_ptr<TlsStream>& s) {
  // A close_notify, answered by the server's close: the server read the client's last flight
  // first, so its side of the handshake is complete too (a reset here instead could discard
  // that flight unread, and the server would count a refusal, not a handshake).
  s->async_shutdown([this, s](const boost::system::error_code& ec) {
    if (ec && ec.category() == asio::error::get_ssl_category())
      return Other(s, "closing a full handshake: " + ec.message());
    Done(s, completed_with_cert);
  });
}

void HandshakeFlood::Impl::AwaitRefusal(const std::shared_ptr<TlsStream>& s) {
  auto byte = std::make_shared<char>();
  s->async_read_some(asio::buffer(byte.get(), 1),
                     [this, s, byte](const boost::system::error_code& ec, size_t) {
                       if (!ec) return Other(s, "served data without a client certificate");
                       Done(s, refused_without_cert);  // the alert, or the close after it
                     });
}

void HandshakeFlood::Impl::Other(const std::shared_ptr<TlsStream>& s, const std::string& why) {
  {
    std::lock_guard<std::mutex> lock(mu);
    if (first_other.empty()) first_other = why;
  }
  ++other;
  boost::system::error_code ignored;
  s->next_layer().close(ignored);
  // Posted, not called: an attempt failing before any I/O must not recurse.
  asio::post(io, [this] { Attempt(); });
}

void HandshakeFlood::Impl::Done(const std::shared_ptr<TlsStream>& s,
                                std::atomic<uint64_t>& outcome) {
  ++outcome;
  boost::system::error_code ignored;
  s->next_layer().set_option(tcp::socket::linger(true, 0), ignored);
  s->next_layer().close(ignored);
  Attempt();
}

HandshakeFlood::HandshakeFlood(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
HandshakeFlood::~HandshakeFlood() { Stop(); }

Result<std::unique_ptr<HandshakeFlood>> HandshakeFlood::Start(const HandshakeFloodOptions& o) {
  auto impl = std::make_unique<Impl>();
  impl->o = o;
  auto with = MakeClientTlsContext({o.cert_file, o.key_file, o.ca_file});
  auto without = MakeClientTlsContext({"", "", o.ca_file});
  if (!with.ok()) return with.status();
  if (!without.ok()) return without.status();
  impl->with_cert = *with, impl->without_cert = *without;
  boost::system::error_code ec;
  const auto server = asio::ip::make_address(o.host, ec);
  const auto source = ec ? server : asio::ip::make_address(o.source_address, ec);
  if (ec) return Status::InvalidArgument("handshake flood: bad address: " + ec.message());
  impl->server = {server, static_cast<unsigned short>(o.port)};
  impl->source = {source, 0};
  tcp::socket probe(impl->io);  // fail here, once, if the source address cannot be bound
  probe.open(tcp::v4(), ec);
  if (!ec) probe.bind(impl->source, ec);
  if (ec)
    return Status::InvalidArgument("handshake flood: cannot bind " + o.source_address + ": " +
                                   ec.message());
  probe.close(ec);
  for (int i = 0; i < o.in_flight; ++i) asio::post(impl->io, [p = impl.get()] { p->Attempt(); });
  impl->runner = std::thread([p = impl.get()] { p->io.run(); });
  return std::unique_ptr<HandshakeFlood>(new HandshakeFlood(std::move(impl)));
}

void HandshakeFlood::Stop() {
  impl_->io.stop();
  if (impl_->runner.joinable()) impl_->runner.join();
}

HandshakeFloodCounts HandshakeFlood::counts() const {
  const Impl& i = *impl_;
  HandshakeFloodCounts c;
  c.attempted = i.attempted, c.attempted_with_cert = i.attempted_with_cert;
  c.connect_failed = i.connect_failed, c.closed_before_tls = i.closed_before_tls;
  c.completed_with_cert = i.completed_with_cert, c.refused_without_cert = i.refused_without_cert;
  c.other = i.other;
  std::lock_guard<std::mutex> lock(i.mu);
  c.first_other = i.first_other;
  return c;
}

// ---- The query flooder: one client (one connection), `in_flight` threads each calling back to
// back, so a slow admitted Locate holds up only its own thread.

struct QueryFlood::Impl {
  QueryFloodOptions o;
  std::unique_ptr<Client> client;
  std::atomic<bool> stop{false};
  std::vector<std::thread> runners;
  std::atomic<uint64_t> sent{0}, ok{0}, rate_limited{0}, overloaded{0}, other_code{0},
      transport_failed{0};

  void Loop() {
    while (!stop) {
      ++sent;
      Count(client->Call("Locate", o.locate_body, o.deadline_ms));
    }
  }
  void Count(const Result<Answer>& a) {
    if (!a.ok()) return void(++transport_failed);
    switch (a->code) {
      case v1::Status::OK:
        return void(++ok);
      case v1::Status::RATE_LIMITED:
        return void(++rate_limited);
      case v1::Status::OVERLOADED:
        return void(++overloaded);
      default:
        return void(++other_code);
    }
  }
};

QueryFlood::QueryFlood(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
QueryFlood::~QueryFlood() { Stop(); }

Result<std::unique_ptr<QueryFlood>> QueryFlood::Start(const QueryFloodOptions& o) {
  auto impl = std::make_unique<Impl>();
  impl->o = o;
  impl->o.client.retries = 0;  // a RATE_LIMITED answer comes back instead of being retried
  auto client = Client::Connect(impl->o.client);
  if (!client.ok()) return client.status();
  impl->client = std::move(client).value();
  for (int i = 0; i < o.in_flight; ++i) impl->runners.emplace_back([p = impl.get()] { p->Loop(); });
  return std::unique_ptr<QueryFlood>(new QueryFlood(std::move(impl)));
}

void QueryFlood::Stop() {
  impl_->stop = true;
  for (std::thread& t : impl_->runners) t.join();
  impl_->runners.clear();
}

QueryFloodCounts QueryFlood::counts() const {
  const Impl& i = *impl_;
  QueryFloodCounts c;
  c.sent = i.sent, c.ok = i.ok, c.rate_limited = i.rate_limited, c.overloaded = i.overloaded;
  c.other_code = i.other_code, c.transport_failed = i.transport_failed;
  return c;
}

// ---- The server seen from outside: /metrics and /proc.

std::string FetchMetrics(const std::string& host, int port, int timeout_ms) {
  asio::io_context io;
  tcp::socket s(io);
  boost::system::error_code ec;
  const tcp::endpoint ep{asio::ip::make_address(host, ec), static_cast<unsigned short>(port)};
  if (ec) return "";
  const std::string request = "GET /metrics HTTP/1.0\r\nHost: " + host + "\r\n\r\n";
  std::string reply;
  bool whole = false;
  s.async_connect(ep, [&](const boost::system::error_code& e) {
    if (e) return;
    asio::async_write(s, asio::buffer(request), [&](const boost::system::error_code& w, size_t) {
      if (w) return;
      asio::async_read(s, asio::dynamic_buffer(reply),
                       [&](const boost::system::error_code& r, size_t) {
                         whole = r == asio::error::eof;  // HTTP/1.0: the body ends at the close
                       });
    });
  });
  io.run_for(std::chrono::milliseconds(timeout_ms));
  const size_t body = reply.find("\r\n\r\n");
  return whole && body != std::string::npos ? reply.substr(body + 4) : "";
}

double MetricValue(const std::string& text, const std::string& series) {
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line))
    if (line.size() > series.size() && line.compare(0, series.size(), series) == 0 &&
        line[series.size()] == ' ')
      return std::strtod(line.c_str() + series.size() + 1, nullptr);
  return 0;
}

namespace {

// utime + stime (fields 14 and 15 of a /proc stat file), in seconds.
double StatCpuSeconds(const std::string& path) {
  std::ifstream in(path);
  std::string text((std::istreambuf_iterator<char>(in)), {});
  const size_t paren = text.rfind(')');  // the command name may hold spaces
  if (paren == std::string::npos) return -1;
  std::istringstream fields(text.substr(paren + 1));
  std::string skip;
  for (int i = 3; i < 14; ++i) fields >> skip;
  double utime = 0, stime = 0;
  if (!(fields >> utime >> stime)) return -1;
  return (utime + stime) / static_cast<double>(sysconf(_SC_CLK_TCK));
}

double Seconds(Clock::time_point t) {
  return std::chrono::duration<double>(t.time_since_epoch()).count();
}

}  // namespace

long RssKb(int pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  while (std::getline(in, line))
    if (line.rfind("VmRSS:", 0) == 0) return std::atol(line.c_str() + 6);
  return -1;
}

int OpenFds(int pid) {
  std::error_code ec;
  int n = 0;
  for (auto it = std::filesystem::directory_iterator("/proc/" + std::to_string(pid) + "/fd", ec);
       !ec && it != std::filesystem::directory_iterator(); it.increment(ec))
    ++n;
  return ec ? -1 : n;
}

bool Alive(int pid) { return std::filesystem::exists("/proc/" + std::to_string(pid)); }

double Percentile(std::vector<double> v, double p) {
  if (v.empty()) return NAN;
  std::sort(v.begin(), v.end());
  const size_t k = static_cast<size_t>(std::ceil(p * v.size()));  // nearest rank
  return v[std::max<size_t>(k, 1) - 1];
}

double ProcessCpuSeconds(int pid) {
  return StatCpuSeconds("/proc/" + std::to_string(pid) + "/stat");
}

double ThreadCpuSeconds(int pid, int tid) {
  return StatCpuSeconds("/proc/" + std::to_string(pid) + "/task/" + std::to_string(tid) + "/stat");
}

double MachineCpuSeconds() {
  std::ifstream in("/proc/stat");
  std::string cpu;
  double user = 0, nice = 0, system = 0, idle = 0, iowait = 0, irq = 0, softirq = 0, steal = 0;
  if (!(in >> cpu >> user >> nice >> system >> idle >> iowait >> irq >> softirq >> steal) ||
      cpu != "cpu")
    return -1;
  return (user + nice + system + irq + softirq + steal) / static_cast<double>(sysconf(_SC_CLK_TCK));
}

ServerSnapshot TakeSnapshot(int pid, const std::string& metrics_host, int metrics_port) {
  ServerSnapshot s;
  s.at_s = Seconds(Clock::now());
  s.server_cpu_s = ProcessCpuSeconds(pid);
  s.io_thread_cpu_s = ThreadCpuSeconds(pid, pid);
  s.own_cpu_s = ProcessCpuSeconds(static_cast<int>(getpid()));
  s.machine_cpu_s = MachineCpuSeconds();
  const std::string text = FetchMetrics(metrics_host, metrics_port, 5000);
  s.metrics_read = !text.empty();
  s.tls_refused = MetricValue(text, "sightfix_tls_refused_total");
  s.locate_rate_limited =
      MetricValue(text, "sightfix_calls_total{method=\"Locate\",status=\"RATE_LIMITED\"}");
  s.connections = MetricValue(text, "sightfix_connections");
  return s;
}

}  // namespace sightfix::soak
