// Inside the service (not installed): one client connection. Reads length-prefixed frames
// (proto/frame_codec.h), hands each envelope to Service::Impl::Dispatch, and writes answers in
// order. Limits (service.h): a frame over max_frame_bytes or of zero length is answered once and
// the connection closed; a started frame must finish within read_timeout_ms, an idle connection
// is closed after idle_timeout_ms, and one whose client leaves more than max_pending_write_bytes
// unread is closed.
// TLS (when the service has a context, tls_profile.h): the handshake comes first and must finish
// within read_timeout_ms; a peer that fails it (no or a bad certificate, an old protocol, no
// ALPN of ours, garbage) is logged as refused and closed before any frame is read; a client
// whose first byte is not a TLS handshake record gets one plaintext error frame saying so. The
// certificate's common name then names the caller (identity()). A resumed TLS session has its
// client's certificate checked again against the current CRL and time (OpenSSL itself trusts
// what the full handshake verified); one that fails is logged as refused and closed.
// Age (max_connection_age_s): a connection past it is retired() (Dispatch answers its calls
// UNAVAILABLE, "reconnect") and closed after a grace of default_deadline_ms.
// Thread safety: none; every method runs on the I/O thread (workers post to it); peer() and
// identity() are fixed before the first call is dispatched.
#pragma once

#include <boost/asio.hpp>
#include <boost/asio/ssl.hpp>
#include <deque>
#include <memory>
#include <string>
#include <vector>

#include "proto/frame_codec.h"
#include "proto/tls_profile.h"
#include "server/service/service_impl.h"
#include "server/service/tls_refusal.h"

namespace sightfix::service_internal {

class Session : public std::enable_shared_from_this<Session> {
 public:
  // Counts itself out of svc->connections when destroyed (the acceptor counted it in).
  Session(boost::asio::ip::tcp::socket socket, Service::Impl* svc);
  ~Session();

  void Start();
  const std::string& peer() const { return peer_; }          // "address:port", or "?"
  const std::string& address() const { return address_; }    // the peer's address, or "?"
  const std::string& identity() const { return identity_; }  // TLS: the certificate's CN
  bool RevokedBy(const CrlSet& crls);        // TLS: the client's certificate is on a CRL
  bool retired() const { return retired_; }  // past max_connection_age_s
  // Reads no further frame for `seconds` from the end of the current one (the client is over
  // its share: its calls wait in the socket, and TCP holds it back).
  void HoldReads(double seconds);
  // Queues a frame; closes the connection when the client is not reading.
  void Send(std::string frame, bool close_after = false);
  void Close();

 private:
  friend struct TlsRefusal;  // the first-byte look and the linger (tls_refusal.h)
  using TlsStream = boost::asio::ssl::stream<boost::asio::ip::tcp::socket>;
  void Arm(int ms);  // the timer: closes the connection after `ms`
  void ArmAge();     // retires the connection at its age limit, closes it after the grace
  void OnHandshake(const boost::system::error_code& ec);
  void EndHandshake();     // counts this session out of the handshakes in progress
  void RefusePlaintext();  // answers one error frame in plaintext, then closes
  boost::asio::ip::tcp::socket& Tcp() { return tls_ ? tls_->next_layer() : socket_; }
  // Runs f on the stream the frames travel on: TLS or the plain socket.
  template <typename F>
  void OnStream(F&& f) {
    OnFrameStream(tls_, socket_, f);
  }
  void ReadHeader();
  void OnHeader();
  void OnBody();
  // A frame the protocol cannot continue after: answer once, then close this connection.
  void Reject(uint64_t id, const std::string& why);
  void WriteNext();

  boost::asio::ip::tcp::socket socket_;                     // plaintext; moved into tls_ under TLS
  std::shared_ptr<boost::asio::ssl::context> tls_context_;  // kept while the session lives
  std::unique_ptr<TlsStream> tls_;
  boost::asio::steady_timer timer_, age_timer_, hold_timer_;
  Clock::time_point hold_until_{};
  Service::Impl* svc_;
  std::string peer_, address_, identity_;
  bool handshaking_ = false;  // counted in the service's handshakes in progress
  bool retired_ = false;
  uint8_t header_[kFrameHeaderBytes];
  std::vector<uint8_t> body_;
  std::deque<std::string> writes_;
  size_t pending_bytes_ = 0;
  bool writing_ = false, closed_ = false, close_after_ = false;
};

}  // namespace sightfix::service_internal
