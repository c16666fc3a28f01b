#include "server/service/session.h"

#include <cstdio>
#include <nlohmann/json.hpp>

namespace sightfix::service_internal {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

Session::Session(tcp::socket socket, Service::Impl* svc)
    : socket_(std::move(socket)), timer_(socket_.get_executor()), svc_(svc) {
  boost::system::error_code ec;
  const auto ep = socket_.remote_endpoint(ec);
  peer_ = ec ? "?" : ep.address().to_string() + ":" + std::to_string(ep.port());
}

Session::~Session() { --svc_->connections; }

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
  boost::system::error_code ec;
  socket_.shutdown(tcp::socket::shutdown_both, ec);
  socket_.close(ec);
}

void Session::Arm(int ms) {
  timer_.expires_after(std::chrono::milliseconds(ms));
  timer_.async_wait([self = shared_from_this()](const boost::system::error_code& ec) {
    if (!ec) self->Close();  // timed out: slow or idle peer
  });
}

void Session::ReadHeader() {
  if (closed_ || svc_->draining) return;
  Arm(svc_->o.idle_timeout_ms);
  asio::async_read(socket_, asio::buffer(header_),
                   [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                     if (ec) return self->Close();
                     self->OnHeader();
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
  asio::async_read(socket_, asio::buffer(body_),
                   [self = shared_from_this()](const boost::system::error_code& ec, size_t) {
                     if (ec) return self->Close();
                     self->OnBody();
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
  ReadHeader();  // pipelining: the next call may arrive while this one runs
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
  asio::async_write(socket_, asio::buffer(writes_.front()),
                    [self = shared_from_this()](const boost::system::error_code& ec, size_t n) {
                      if (ec) return self->Close();
                      self->pending_bytes_ -= n;
                      self->writes_.pop_front();
                      self->WriteNext();
                    });
}

}  // namespace sightfix::service_internal
