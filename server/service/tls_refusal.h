// Inside the service (not installed): what the two TLS-speaking ports, the query port (Session)
// and the HTTP port (HttpSession, http_port.cc), do alike around a refused connection: the log
// line and count, the look at the first byte that tells a plaintext client from a TLS one, and
// the linger that lets the TLS alert or the plaintext answer reach the client before the close.
// Thread safety: none; the I/O thread's, as the sessions'.
#pragma once

#include <array>
#include <boost/asio.hpp>
#include <boost/asio/ssl.hpp>
#include <memory>
#include <string>

#include "proto/tls_profile.h"
#include "server/service/service_impl.h"

namespace sightfix::service_internal {

// After a refusal the connection is read (and discarded) for this long in all, however much the
// client sends, then closed.
inline constexpr int kRefusalLingerMs = 1000;

// The port a refusal is logged for: the query port's lines name no port, the HTTP port's carry
// "port":"http" (tests/robustness/tls_test.sh reads both forms).
enum class TlsPort { kQuery, kHttp };

// One JSON line on stderr, {"peer":"<peer>","tls_refused":"<why>"} (the HTTP port's with
// "port":"http" after the peer), unless `log` is false (a flood's refusals are not logged line by
// line); counted in svc->tls_refused (sightfix_tls_refused_total) either way.
void LogTlsRefusal(Service::Impl* svc, TlsPort port, const std::string& peer,
                   const std::string& why, bool log = true);

// The steps on a session of type S (Session or HttpSession), which befriends this struct and has
//   boost::asio::ip::tcp::socket& Tcp();  // the socket (under TLS, the stream's lower layer)
//   std::unique_ptr<boost::asio::ssl::stream<boost::asio::ip::tcp::socket>> tls_;
//   void Arm(int ms);                     // its timer: closes the connection after `ms`
//   void Close();                         // closes the socket
//   void OnHandshake(const boost::system::error_code& ec);
//   void RefusePlaintext();               // answers a plaintext client in plaintext
// Each step holds `s` until its last handler has run.
struct TlsRefusal {
  // Under TLS, before the handshake: looks at the first byte the client sent, leaving it in the
  // socket, into `*byte` (the session's, alive as long as it is). A TLS handshake record starts
  // the server handshake, whose result goes to OnHandshake; any other byte goes to
  // RefusePlaintext; a failed look goes to OnHandshake (end of stream as asio's eof).
  template <typename S>
  static void LookAtFirstByte(const std::shared_ptr<S>& s, unsigned char* byte) {
    s->Tcp().async_receive(boost::asio::buffer(byte, 1), boost::asio::ip::tcp::socket::message_peek,
                           [s, byte](const boost::system::error_code& ec, size_t n) {
                             if (ec || n == 0)
                               return s->OnHandshake(ec ? ec : boost::asio::error::eof);
                             if (*byte != kTlsHandshakeRecord) return s->RefusePlaintext();
                             s->tls_->async_handshake(
                                 boost::asio::ssl::stream_base::server,
                                 [s](const boost::system::error_code& e) { s->OnHandshake(e); });
                           });
  }

  // After a refusal: stops sending, arms the session's timer for kRefusalLingerMs and reads
  // (discarding) until a read fails or the session is closed, then closes it. Reading keeps what
  // the client sent meanwhile from turning the close into a reset that destroys the TLS alert or
  // the plaintext answer on its way (the client would see a lost connection, and retry).
  template <typename S>
  static void Linger(const std::shared_ptr<S>& s) {
    boost::system::error_code ec;
    s->Tcp().shutdown(boost::asio::ip::tcp::socket::shutdown_send, ec);
    s->Arm(kRefusalLingerMs);
    Drain(s, std::make_shared<std::array<char, 512>>());
  }

 private:
  // `scratch` is allocated per linger: a session that is never refused carries no buffer.
  template <typename S>
  static void Drain(const std::shared_ptr<S>& s, std::shared_ptr<std::array<char, 512>> scratch) {
    s->Tcp().async_read_some(boost::asio::buffer(*scratch),
                             [s, scratch](const boost::system::error_code& e, size_t) {
                               if (e || !s->Tcp().is_open())
                                 return s->Close();  // a read done as the session closed
                               Drain(s, scratch);
                             });
  }
};

}  // namespace sightfix::service_internal
