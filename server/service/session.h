// Inside the service (not installed): one client connection. Reads length-prefixed frames
// (proto/frame_codec.h), hands each envelope to Service::Impl::Dispatch, and writes answers in
// order. Limits (service.h): a frame over max_frame_bytes or of zero length is answered once and
// the connection closed; a started frame must finish within read_timeout_ms, an idle connection
// is closed after idle_timeout_ms, and one whose client leaves more than max_pending_write_bytes
// unread is closed.
// Thread safety: none; every method runs on the I/O thread (workers post to it).
#pragma once

#include <boost/asio.hpp>
#include <deque>
#include <memory>
#include <string>
#include <vector>

#include "proto/frame_codec.h"
#include "server/service/service_impl.h"

namespace sightfix::service_internal {

class Session : public std::enable_shared_from_this<Session> {
 public:
  // Counts itself out of svc->connections when destroyed (the acceptor counted it in).
  Session(boost::asio::ip::tcp::socket socket, Service::Impl* svc);
  ~Session();

  void Start() { ReadHeader(); }
  const std::string& peer() const { return peer_; }  // "address:port", or "?"
  // Queues a frame; closes the connection when the client is not reading.
  void Send(std::string frame, bool close_after = false);
  void Close();

 private:
  void Arm(int ms);  // the timer: closes the connection after `ms`
  void ReadHeader();
  void OnHeader();
  void OnBody();
  // A frame the protocol cannot continue after: answer once, then close this connection.
  void Reject(uint64_t id, const std::string& why);
  void WriteNext();

  boost::asio::ip::tcp::socket socket_;
  boost::asio::steady_timer timer_;
  Service::Impl* svc_;
  std::string peer_;
  uint8_t header_[kFrameHeaderBytes];
  std::vector<uint8_t> body_;
  std::deque<std::string> writes_;
  size_t pending_bytes_ = 0;
  bool writing_ = false, closed_ = false, close_after_ = false;
};

}  // namespace sightfix::service_internal
