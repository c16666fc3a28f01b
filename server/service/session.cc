#include "server/service/session.h"

#include <cstdio>
#include <nlohmann/json.hpp>

#include "proto/tls_profile.h"

namespace sightfix::service_internal {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

Session::Session(tcp::socket socket, Service::Impl* svc)
    : socket_(socket.get_executor()),
      tls_context_(svc->tls),
      timer_(socket.get_executor()),
      age_timer_(socket.get_executor()),
      hold_timer_(socket.get_executor()),
      svc_(svc) {
  boost::system::error_code ec;
  const auto ep = socket.remote_endpoint(ec);
  address_ = ec ? "?" : ep.address().to_string();
  peer_ = ec ? "?" : address_ + ":" + std::to_string(ep.port());
  // No Nagle: a TLS handshake's flights and each answer go out at once (with Nagle, a flight
  // that waits on the peer's delayed ACK costs up to 40 ms: tls_bench's p99 showed it).
  socket.set_option(tcp::no_delay(true), ec);
  if (tls_context_)
    tls_ = std::make_unique<TlsStream>(std::move(socket), *tls_context_);
  else
    socket_ = std::move(socket);
}

void Session::Start() {
  ArmAge();
  if (!tls_) return ReadHeader();
  handshaking_ = true;           // admitted at accept (Service::Impl::AdmitAtAccept)
  Arm(svc_->o.read_timeout_ms);  // a stalled handshake is cut off as a stalled frame is
  // A plaintext client gets a plaintext answer saying why not.
  TlsRefusal::LookAtFirstByte(shared_from_this(), header_);
}

bool Session::RevokedBy(const CrlSet& crls) {
  if (!tls_ || closed_) return false;
  X509* cert = SSL_get0_peer_certificate(tls_->native_handle());
  return cert != nullptr && crls.Revokes(cert);
}

void Session::RefusePlaintext() {
  EndHandshake();
  timer_.cancel();
  const std::string why =
      "this port speaks TLS 1.3 only: connect with the server's CA and a "
      "vehicle certificate (--tls-ca, --tls-cert, --tls-key)";
  LogTlsRefusal(svc_, TlsPort::kQuery, peer_, "plaintext sent to the TLS port");
  v1::Envelope e;
  e.mutable_status()->set_code(v1::Status::UNAUTHENTICATED);
  e.mutable_status()->set_message(why);
  auto frame = std::make_shared<std::string>(EncodeFrame(e));
  Arm(svc_->o.read_timeout_ms);
  asio::async_write(Tcp(), asio::buffer(*frame),
                    [self = shared_from_this(), frame](const boost::system::error_code&, size_t) {
                      self->Close();
                    });
}

void Session::EndHandshake() {
  if (!handshaking_) return;
  handshaking_ = false;
  svc_->HandshakeDone(address_);
}

void Session::OnHandshake(const boost::system::error_code& ec) {
  EndHandshake();
  timer_.cancel();
  std::string why = closed_ ? "handshake not finished within the read timeout"
                    : ec    ? ec.message()
                            : AlpnProblem(tls_->native_handle());
  if (ec && !closed_)
    if (const std::string v = VerifyProblem(tls_->native_handle()); !v.empty()) why += ": " + v;
  if (!why.empty()) {
    LogTlsRefusal(svc_, TlsPort::kQuery, peer_, why);
    return closed_ ? void() : TlsRefusal::Linger(shared_from_this());
  }
  SSL* ssl = tls_->native_handle();
  if (SSL_session_reused(ssl)) {
    ++svc_->tls_resumed;
    const int64_t grace_until =
        svc_->crls ? svc_->crls->next_update_unix + svc_->o.tls_crl_grace_s : 0;
    if (std::string v = VerifyResumedPeer(ssl, grace_until); !v.empty()) {
      LogTlsRefusal(svc_, TlsPort::kQuery, peer_, "resumed session: " + v);
      return Close();  // the client's cached session is single-use: it comes back in full
    }
  }
  identity_ = PeerCommonName(ssl);
  ReadHeader();
}

Session::~Session() {
  EndHandshake();
  --svc_->connections;
}

void Session::Send(std::string frame, bool close_after) {
  if (closed_) return;
  pending_bytes_ += frame.size();
  if (pending_bytes_ > svc_->o.max_pending_write_bytes) return Close();
  writes_.push_back(std::move(frame));
  close_after_ |= close_after;
  if (!writing_) WriteNext();
}

void Session::Close() {
  if (closed_) return;
  closed_ = true;
  timer_.cancel();
  age_timer_.cancel();
  hold_timer_.cancel();
  boost::system::error_code ec;
  Tcp().shutdown(tcp::socket::shutdown_both, ec);
  Tcp().close(ec);
}

void Session::Arm(int ms) {
  timer_.expires_after(std::chrono::milliseconds(ms));
  timer_.async_wait([self = shared_from_this()](const boost::system::error_code& ec) {
    if (!ec) self->Close();  // timed out: slow or idle peer
  });
}

void Session::ArmAge() {
  if (svc_->o.max_connection_age_s <= 0) return;
  age_timer_.expires_after(std::chrono::seconds(svc_->o.max_connection_age_s));
  age_timer_.async_wait([self = shared_from_this()](const boost::system::error_code& ec) {
    if (ec || self->closed_) return;
    self->retired_ = true;  // calls from now on: UNAVAILABLE, reconnect
    self->age_timer_.expires_after(std::chrono::milliseconds(self->svc_->o.default_deadline_ms));
    self->age_timer_.async_wait([self](const boost::system::error_code& e) {
      if (!e) self->Close();
    });
  });
}

void Session::ReadHeader() {
  if (closed_ || svc_->draining) return;
  Arm(svc_->o.idle_timeout_ms);
  OnStream([this](auto& stream) {
    asio::async_read(stream, asio::buffer(header_),
                     [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                       if (ec) return self->Close();
                       self->OnHeader();
                     });
  });
}

void Session::OnHeader() {
  const uint32_t n = FrameLength(header_);
  if (n == 0) return Reject(0, "zero-length frame");
  if (n > svc_->o.max_frame_bytes)
    return Reject(0, "frame of " + std::to_string(n) + " bytes is over the " +
                         std::to_string(svc_->o.max_frame_bytes) + "-byte cap");
  body_.resize(n);  // bounded by the cap just checked
  Arm(svc_->o.read_timeout_ms);
  OnStream([this](auto& stream) {
    asio::async_read(stream, asio::buffer(body_),
                     [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                       if (ec) return self->Close();
                       self->OnBody();
                     });
  });
}

void Session::OnBody() {
  timer_.cancel();
  const auto received = Clock::now();
  Result<v1::Envelope> env = ParseEnvelope(body_.data(), body_.size());
  body_.clear();
  body_.shrink_to_fit();
  if (!env.ok()) return Reject(0, env.status().message());
  svc_->Dispatch(shared_from_this(), std::move(env).value(), received);
  if (hold_until_ <= Clock::now()) return ReadHeader();  // pipelining: the next call may come
  hold_timer_.expires_at(hold_until_);
  hold_timer_.async_wait([self = shared_from_this()](const boost::system::error_code& ec) {
    if (!ec) self->ReadHeader();
  });
}

void Session::HoldReads(double seconds) {
  hold_until_ = Clock::now() +
                std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(seconds));
}

void Session::Reject(uint64_t id, const std::string& why) {
  std::fprintf(stderr, "{\"peer\":\"%s\",\"protocol_error\":%s}\n", peer_.c_str(),
               nlohmann::json(why).dump().c_str());
  v1::Envelope e;
  e.set_call_id(id);
  e.mutable_status()->set_code(v1::Status::INVALID_ARGUMENT);
  e.mutable_status()->set_message(why);
  Send(EncodeFrame(e), true);
}

void Session::WriteNext() {
  if (writes_.empty() || closed_) {
    writing_ = false;
    if (close_after_) Close();
    return;
  }
  writing_ = true;
  OnStream([this](auto& stream) {
    asio::async_write(stream, asio::buffer(writes_.front()),
                      [self = shared_from_this()](const boost::system::error_code& ec, size_t n) {
                        if (ec) return self->Close();
                        self->pending_bytes_ -= n;
                        self->writes_.pop_front();
                        self->WriteNext();
                      });
  });
}

}  // namespace sightfix::service_internal
