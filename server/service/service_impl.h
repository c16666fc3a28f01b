// Inside the service (not installed): the state the service's parts share. service.h says what
// the service does; each part defines its own methods of Service::Impl:
//   session.cc    one client connection (framing, timeouts, write queue)  [Session]
//   dispatch.cc   the method table, the call queue, workers and deadlines [Dispatch, WorkerLoop]
//   http_port.cc  the HTTP side port: /healthz and /metrics               [AcceptHttp]
//   service.cc    lifecycle: create, run, drain, reload, the tile scrub   [Accept, BeginDrain]
//
// Threads: one I/O thread runs io (sockets, timers, Dispatch); `workers` threads run
// WorkerLoop; one scrub thread at most; Reload on a thread of its own.
#pragma once

#include <atomic>
#include <boost/asio.hpp>
#include <boost/asio/ssl.hpp>
#include <chrono>
#include <condition_variable>
#include <deque>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

#include "proto/sightfix.pb.h"
#include "proto/tls_profile.h"
#include "server/service/metrics.h"
#include "server/service/service.h"

namespace sightfix {
namespace service_internal {

using Clock = std::chrono::steady_clock;
class Session;

// A Locate call waiting for a worker. Its body is parsed on the worker: the parse copies the
// image, and the calibration lookup may load a tile.
// What an answer must carry back: the request's call id and nonce.
struct CallId {
  uint64_t id = 0;
  std::string nonce;
};

struct Job {
  std::shared_ptr<Session> session;
  CallId call;
  std::string body;  // the envelope's body: a serialized v1::LocateRequest
  Clock::time_point received, deadline;
};

}  // namespace service_internal

struct Service::Impl {
  using Clock = service_internal::Clock;
  using Session = service_internal::Session;

  ServiceOptions o;
  std::string token;
  boost::asio::io_context io;
  boost::asio::ip::tcp::acceptor acceptor{io};
  boost::asio::ip::tcp::acceptor http_acceptor{io};
  boost::asio::signal_set signals{io};
  boost::asio::steady_timer drain_timer{io};
  std::mutex map_mu;  // guards `localizer` (the pointer; a Localizer is thread-safe)
  std::shared_ptr<const Localizer> localizer;  // swapped by Reload
  service_internal::Metrics metrics;
  Clock::time_point started = Clock::now();

  std::mutex queue_mu;  // guards the four below; held for a push, a pop or a count
  std::condition_variable queue_cv;
  std::deque<service_internal::Job> jobs;
  int running = 0;  // jobs taken by workers, not yet answered
  bool stopping_workers = false;
  std::vector<std::thread> workers;

  std::atomic<int> connections{0};
  std::atomic<uint64_t> tls_refused{0};
  std::atomic<uint64_t> tls_resumed{0};  // handshakes that resumed a session
  // TLS on the query port (null: plaintext) and its CRLs (null: none); swapped on the I/O
  // thread by a reload. Sessions hold their own reference to the context they began with.
  std::shared_ptr<boost::asio::ssl::context> tls;
  std::shared_ptr<const CrlSet> crls;
  std::atomic<int64_t> crl_next_update{0};       // Unix seconds, 0 without a CRL (for /metrics)
  std::vector<std::weak_ptr<Session>> sessions;  // the I/O thread's: live ones are checked
                                                 // against a reloaded CRL
  // Fair shares (ServiceOptions; fair_shares.cc), the I/O thread's: handshakes in progress,
  // in all and by source address; token buckets (tokens, last refill) of new handshakes by
  // address and of calls by client; when a refusal from an address was last logged.
  int handshakes = 0;
  std::map<std::string, int> handshakes_by_address;
  struct Bucket {
    double tokens = 0;
    Clock::time_point last;
  };
  std::map<std::string, Bucket> handshake_buckets, buckets;
  std::map<std::string, Clock::time_point> refusals_logged;
  // Flooding addresses (ServiceOptions::flood_block_s): refusals by address in the second
  // that began at the time kept; the addresses whose SYNs the query port's filter drops, and
  // until when; the timer that lifts the next block to end.
  std::map<std::string, std::pair<Clock::time_point, int>> refusal_counts;
  std::map<std::string, Clock::time_point> blocked;
  boost::asio::steady_timer block_timer{io};
  bool syn_filter_failed = false;  // logged once; refusals at accept go on without it
  std::atomic<int> addresses_blocked{0};
  std::atomic<uint64_t> address_blocks{0};  // since start
  // Before any TLS work on a connection from `address`: "" when it may shake hands (counted
  // in handshakes until HandshakeDone), else why not; *log tells whether to log this refusal
  // (the first from the address in 10 s: a flood is not logged line by line).
  std::string AdmitHandshake(const std::string& address, Clock::time_point now, bool* log);
  void HandshakeDone(const std::string& address);
  // AdmitHandshake on an accepted socket, before a session is made for it: false when refused,
  // the refusal logged (as AdmitHandshake says) and the socket closed. Closed, not reset: a
  // reset that reaches the client before its connect is reported fails the connect, which the
  // client library does not retry, where a closed handshake is retried.
  bool AdmitAtAccept(boost::asio::ip::tcp::socket* socket);
  // Counts a refusal of `address`; past the flood threshold, blocks it (ApplyBlocks).
  void NoteRefusal(const std::string& address, Clock::time_point now);
  // Lifts the blocks that have ended, sets the query port's SYN filter to the rest and arms
  // block_timer for the next to end.
  void ApplyBlocks(Clock::time_point now);
  // True when `client` may make one more call now (takes a token); else *wait_s is the time
  // until it may.
  bool TakeShare(const std::string& client, Clock::time_point now, double* wait_s);
  std::string FormatShare() const;  // "R calls/s, burst B"
  std::atomic<bool> draining{false};

  // The scrub: one background thread checks every tile file of the map being served against
  // the catalog's SHA-256, so /healthz and Describe name bad tiles before a call needs them.
  std::mutex scrub_mu;  // guards the two below; held while a scrub is stopped (joined)
  std::thread scrubber;
  std::shared_ptr<std::atomic<bool>> scrub_stop;

  std::shared_ptr<const Localizer> Current() {
    std::lock_guard<std::mutex> lock(map_mu);
    return localizer;
  }

  // service.cc
  void Accept();
  // Under TLS: reads the TLS files again and swaps the context on the I/O thread, closing the
  // live sessions whose client the new CRL revokes. A failure is logged; the old one serves.
  Status ReloadTls();
  void StartScrub(std::shared_ptr<const Localizer> loc);
  void StopScrub();
  void BeginDrain();
  void CheckDrained();
  // http_port.cc
  // TLS on the HTTP port (null: plaintext): set by Create, swapped on the I/O thread by
  // ReloadHttpTls; each HTTP session holds the context it was accepted with.
  std::shared_ptr<boost::asio::ssl::context> http_tls;
  // The HTTP port's context from the options' files (tls_profile.h MakeMonitoringTlsContext,
  // with the query port's CRLs when its CA is the query port's client CA).
  Result<std::shared_ptr<boost::asio::ssl::context>> LoadHttpTls() const;
  // Any thread: LoadHttpTls, then the swap posted to the I/O thread; a failure is logged and
  // the old context serves.
  Status ReloadHttpTls();
  void AcceptHttp();
  // The /healthz text; *ok: whether the answer is 200.
  std::string HealthText(bool* ok);
  // dispatch.cc. I/O thread: authenticates and routes one call; a Locate is queued.
  void Dispatch(const std::shared_ptr<Session>& s, v1::Envelope env, Clock::time_point received);
  // Any thread: logs and counts the answer, then posts its frame to the I/O thread.
  void Answer(const std::shared_ptr<Session>& s, const service_internal::CallId& call,
              const std::string& method, v1::Status::Code code, const std::string& message,
              const std::string& body, Clock::time_point received, const char* quality = "");
  void WorkerLoop();
  // A worker's Locate job: deadline, parse, calibration lookup, engine, answer.
  void RunLocate(const service_internal::Job& job);
  std::string DescribeBody();
  std::string ListTilesBody();
};

}  // namespace sightfix
