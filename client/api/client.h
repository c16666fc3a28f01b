// The client library for sightfix-server: one connection, many calls in flight on it, a
// deadline per call. When the connection is lost (the server restarted, say) or the server
// answers UNAVAILABLE (shutting down), a call is sent again on a new connection, with backoff,
// as long as its deadline leaves time: all three methods are reads, safe to repeat. A call that
// cannot be answered gets a kIoError saying so.
// Several endpoints (replicas of one map, or load balancers): the client stays on one while it
// answers and moves to the next in the list when its connection is lost, refused or the server
// is draining; a new connection tries each endpoint in turn from there. Async calls return a
// future; sync calls wait on it. Thread safety: every method may be called from any thread
// concurrently.
#pragma once

#include <chrono>
#include <functional>
#include <future>
#include <memory>
#include <string>
#include <vector>

#include "indexer/base/status.h"
#include "proto/sightfix.pb.h"

namespace sightfix {

struct ClientOptions {
  std::string host = "127.0.0.1";
  int port = 7411;
  // When not empty: HOST:PORT of each replica, in order of preference (host and port unused).
  std::vector<std::string> endpoints;
  std::string token;  // sent with every call when set; never logged
  // TLS 1.3 with the wire's profile (ALPN sightfix/1), on when tls_ca_file is set (PEM files):
  // the CA bundle that signs the server's certificate (a bundle of old and new CA rolls over);
  // this vehicle's certificate and key, which a TLS server requires; the name the server's
  // certificate must carry (default: the endpoint's host; a DNS name is also sent as SNI).
  // A server that refuses the certificate fails the call with kFailedPrecondition, not retried.
  // A reconnect resumes the TLS session (a ticket from the server, offered once) when the
  // server still accepts it, which costs a fraction of a full handshake; the server checks the
  // vehicle's certificate again either way.
  std::string tls_ca_file, tls_cert_file, tls_key_file, tls_server_name;
  // The time the server's certificate is checked against (notBefore, notAfter). A vehicle's
  // wall clock is often set from its GNSS receiver, the very source under attack: a clock
  // pushed forward makes a valid server look expired (no fallback just when it is needed), one
  // pushed back makes an expired, perhaps compromised, certificate look valid.
  //  kHoldover (default): wall_clock is read once, when the client connects first, and carried
  //    forward on the monotonic clock; later jumps of the wall clock do not move it. Connect
  //    while the clock is trusted (or give wall_clock a trusted source).
  //  kWallClock: wall_clock at each handshake.
  // The server checks vehicle certificates on its own clock (service.h).
  enum class CertificateClock { kHoldover, kWallClock };
  CertificateClock certificate_clock = CertificateClock::kHoldover;
  // The wall clock the above reads: the system's, or a stack's own trusted time source.
  std::function<std::chrono::system_clock::time_point()> wall_clock = [] {
    return std::chrono::system_clock::now();
  };
  // To connect and finish the TLS handshake; Connect also tries again within it, with the
  // backoff below, while a server over its handshake limit closes the handshake.
  int connect_timeout_ms = 3000;
  // Freshness: an answer that arrives more than this after its request was sent (the client's
  // monotonic clock) is refused with kFailedPrecondition and not used: a fix held up on the way
  // describes where the vehicle was. 0: only the call's deadline bounds it. Every call also
  // carries a random nonce the answer must echo (Envelope.nonce).
  int max_answer_age_ms = 0;
  // Extra attempts after a lost connection, an UNAVAILABLE (draining) or a RATE_LIMITED (over
  // this client's share) answer, within the deadline; calls are idempotent reads.
  int retries = 10;
  // Before the first retry; doubles each time, 2 s at most; each pause jittered to 0.5-1.5 x.
  int retry_backoff_ms = 100;
  uint32_t max_answer_bytes = 64u << 20;  // a longer answer frame closes the connection
};

// A call's answer: the envelope's status decides; the body is the method's response.
struct Answer {
  v1::Status::Code code = v1::Status::OK;
  std::string message;
  std::string body;
};

class Client {
 public:
  static Result<std::unique_ptr<Client>> Connect(const ClientOptions& options);
  ~Client();

  // The raw call. Result not OK only for transport failures (kIoError: cannot connect, lost
  // connection after the retries; kInternal: deadline passed with no answer); a server's
  // refusal comes back as an Answer with its code.
  std::future<Result<Answer>> CallAsync(const std::string& method, const std::string& body,
                                        int deadline_ms);
  Result<Answer> Call(const std::string& method, const std::string& body, int deadline_ms);

  // Typed forms: a non-OK answer becomes a Status naming the server's code and message. The fix
  // comes as the wire's message (proto/sightfix.proto); an engine embedder converts it with
  // FixFromProto (server/wire/wire.h).
  Result<v1::Fix> Locate(const v1::LocateRequest& request, int deadline_ms);
  Result<v1::DescribeResponse> Describe(int deadline_ms);
  Result<v1::ListTilesResponse> ListTiles(int deadline_ms);

  // Calls sent again so far (after a lost connection or an UNAVAILABLE answer).
  uint64_t resent_calls() const;
  // The endpoint ("HOST:PORT") the client is or was last connected to.
  std::string endpoint() const;
  // Closes the live connection (its calls in flight are sent again); the next call connects
  // anew, resuming the TLS session where the server allows. For a stack whose network changed.
  void Disconnect();
  // TLS handshakes so far that resumed a session (of all the client's handshakes).
  uint64_t resumed_handshakes() const;

 private:
  struct Impl;
  explicit Client(std::unique_ptr<Impl> impl);
  std::shared_ptr<Impl> impl_;
};

}  // namespace sightfix
