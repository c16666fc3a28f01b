// The wire's TLS profile, shared by the server and the client library (not installed: the
// client's public header speaks of file names only, never of OpenSSL types).
//  - TLS 1.3 only: every peer is ours, and 1.3 encrypts the client's certificate, which 1.2
//    sends in the clear. An older ClientHello gets a protocol_version alert.
//  - Both sides verified: the server presents a certificate its clients' CA bundle trusts, and
//    requires one from the client, signed by the CA it is given (mutual authentication).
//  - ALPN "sightfix/1" names the wire's version; a peer offering none of ours is refused, so
//    no other protocol reaches the frame decoder by accident.
//  - No 0-RTT: OpenSSL accepts early data only when a server sets max_early_data, which this
//    profile never does (early data can be replayed).
//  - Session resumption (TLS 1.3 tickets, an hour at most) carries a session id context
//    ("sightfix"): a resumed session keeps the client identity of its full handshake, and the
//    server checks that certificate again (VerifyResumedPeer), so resuming never skips
//    verification. The client offers each ticket once (TlsSessionCache).
// Boost 1.74's ssl::context has no API for the minimum version, ALPN, the session id context or
// the client CA list sent in the CertificateRequest: those calls go to native_handle() here and
// nowhere else.
#pragma once

#include <boost/asio/ssl.hpp>
#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

inline constexpr char kWireAlpn[] = "sightfix/1";

struct TlsFiles {
  std::string cert_file;  // PEM: this side's certificate (chain)
  std::string key_file;   // PEM: its private key
  std::string ca_file;    // PEM bundle: the CAs this side trusts for its peers
};

// Server: cert, key and the client CA are required. kInvalidArgument naming the file and
// OpenSSL's reason when one cannot be read or the key does not match the certificate.
Result<std::shared_ptr<boost::asio::ssl::context>> MakeServerTlsContext(const TlsFiles& files);

// Revocation on a server context: every CRL in `crl_file` (PEM) is checked against the client
// CA bundle `ca_file` (each CRL must be signed by one of its CAs, and each CA must have a CRL),
// added to the context's store, and checked for every client certificate
// (X509_V_FLAG_CRL_CHECK). The policy for a CRL past its nextUpdate: it is still enforced (a
// revoked certificate stays refused) and other clients are accepted for `grace_s` seconds
// after the earliest nextUpdate; past that every client is refused ("CRL has expired"): a
// fleet's CRL must be renewed within the grace, or revocation would be silently void.
struct CrlSet {
  std::vector<std::shared_ptr<X509_CRL>> crls;
  int64_t next_update_unix = 0;  // the earliest nextUpdate
  bool Revokes(X509* cert) const;
};
Result<std::shared_ptr<const CrlSet>> AddCrl(boost::asio::ssl::context* ctx,
                                             const std::string& crl_file,
                                             const std::string& ca_file, int64_t grace_s);

// Client: the CA bundle is required; cert and key together or neither.
Result<std::shared_ptr<boost::asio::ssl::context>> MakeClientTlsContext(const TlsFiles& files);

// Before a client handshake: sends `server_name` as SNI (a DNS name only: an IP literal is not
// sent, as RFC 6066 says) and checks the server's certificate against it (DNS or IP SAN).
Status SetClientServerName(SSL* ssl, const std::string& server_name);

// After a handshake: empty when the peer agreed on kWireAlpn, else why not.
std::string AlpnProblem(SSL* ssl);

// After a failed handshake: why this side's verification refused the peer's certificate
// (OpenSSL's text, e.g. "hostname mismatch", "certificate has expired"), or "".
std::string VerifyProblem(SSL* ssl);

// Runs f on the stream frames travel on: `tls` when set, else the plain socket (the server's
// sessions and the client's connections hold one or the other).
template <typename Socket, typename F>
void OnFrameStream(std::unique_ptr<boost::asio::ssl::stream<Socket>>& tls, Socket& plain, F&& f) {
  if (tls)
    f(*tls);
  else
    f(plain);
}

// The first byte of every TLS handshake record (content type 22): a first byte other than this
// on the TLS port is a plaintext client, answered in plaintext before the port closes.
inline constexpr unsigned char kTlsHandshakeRecord = 0x16;

// The verified peer certificate's subject common name ("" without one).
std::string PeerCommonName(SSL* ssl);

// Server, after a handshake that resumed a session: OpenSSL trusts what the full handshake
// verified, so the client's certificate is checked again here, against the context's CAs and
// CRLs at the current time (a certificate that expired, or a CRL that revokes it since, is
// caught). `crl_grace_until_unix`: an expired CRL is accepted until then (AddCrl's policy).
// "" when it passes, else why not. Needs the client CA to sign the client's certificate
// directly (a resumed session keeps the certificate, not its chain).
std::string VerifyResumedPeer(SSL* ssl, int64_t crl_grace_until_unix);

// Client session resumption: one ticket per server, used once (RFC 8446, C.4: a ticket reused
// links a client's connections) and replaced by the ticket the server sends on each new
// connection. Thread-safe.
class TlsSessionCache : public std::enable_shared_from_this<TlsSessionCache> {
 public:
  // Makes a cache and installs its callback on the client context `ctx`
  // (SSL_CTX_sess_set_new_cb); each stream Prepare()d keeps the cache alive.
  static std::shared_ptr<TlsSessionCache> Install(boost::asio::ssl::context* ctx);
  // Before a client handshake on `ssl`: offers the session kept for `server` (then forgets it)
  // and files the tickets this connection receives under `server`.
  void Prepare(SSL* ssl, const std::string& server);
  size_t size() const;
  // Drops the session kept for `server`: after a connection the server ended before answering
  // (it may have refused the resumed session, and sent a fresh ticket first).
  void Forget(const std::string& server);
  // Internal (the context's callback): keeps `session` (owned from now on) for `server`.
  void Keep(const std::string& server, SSL_SESSION* session);

 private:
  mutable std::mutex mu_;
  std::map<std::string, std::shared_ptr<SSL_SESSION>> sessions_;
};

// Client, before a handshake: the peer's certificate validity is checked at `unix_s` instead
// of the system clock (X509_VERIFY_PARAM_set_time): the client library's holdover clock.
void SetVerifyTime(SSL* ssl, int64_t unix_s);

// The HTTP side port's server context (/healthz and /metrics served beyond loopback): the
// profile above without ALPN (HTTP clients offer http/1.1 or nothing, and either is accepted):
// TLS 1.3 only, this server's certificate and key, and a client certificate required, signed by
// a CA of `files.ca_file` (the monitoring CA). No session tickets are issued, so there is no
// resumption: every connection verifies its certificate in full, against the CRLs of the day.
// Errors as MakeServerTlsContext.
Result<std::shared_ptr<boost::asio::ssl::context>> MakeMonitoringTlsContext(const TlsFiles& files);

}  // namespace sightfix
