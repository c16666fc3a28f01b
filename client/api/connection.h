// Inside the client library (not installed): one live connection of a Client (client.h),
// replaced whole on reconnect, with its own I/O thread.
#pragma once

#include <atomic>
#include <boost/asio.hpp>
#include <boost/asio/ssl.hpp>
#include <chrono>
#include <deque>
#include <future>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <thread>

#include "client/api/client.h"
#include "proto/frame_codec.h"
#include "proto/tls_profile.h"

namespace sightfix::client_internal {

namespace asio = boost::asio;
using tcp = asio::ip::tcp;

// One live connection; replaced whole on reconnect. Its own thread runs every read and write
// of the stream (TLS or plain): an OpenSSL stream must not be read and written from two threads
// at once, so callers post their frames to that thread, which is the stream's one strand.
struct Connection {
  using TlsStream = asio::ssl::stream<tcp::socket>;
  uint32_t max_answer_bytes = 0;
  asio::io_context io;
  tcp::socket socket{io};  // plaintext; moved into tls under TLS
  std::unique_ptr<TlsStream> tls;
  std::thread loop;
  std::mutex mu;  // guards pending and dead
  struct Pending {
    std::promise<Result<Answer>> answer;
    std::string nonce;  // the answer must echo it
  };
  std::map<uint64_t, Pending> pending;
  bool dead = false;
  // The I/O thread's own (no lock).
  uint8_t header[kFrameHeaderBytes];
  std::string body;
  std::deque<std::string> writes;
  bool writing = false;

  tcp::socket& Tcp() { return tls ? tls->next_layer() : socket; }
  template <typename F>
  void OnStream(F&& f) {
    OnFrameStream(tls, socket, f);
  }

  ~Connection() {
    Close();
    if (loop.joinable()) loop.join();
  }

  // From any thread: the I/O thread closes the socket; the pending calls fail from the read.
  void Close() {
    closed_here = true;
    asio::post(io, [this] {
      boost::system::error_code ec;
      Tcp().shutdown(tcp::socket::shutdown_both, ec);
      Tcp().close(ec);
    });
  }

  void Fail(const Status& why) {
    std::lock_guard<std::mutex> lock(mu);
    dead = true;
    for (auto& [id, p] : pending) p.answer.set_value(why);
    pending.clear();
  }

  // A lost connection is worth a retry; a TLS refusal (a bad or missing client certificate, an
  // untrusted server) is not: it would only be refused again.
  void FailRead(const boost::system::error_code& ec) {
    // Ended by the server: its ticket may be one it will not honour (a resumed session it
    // refused after the handshake), so the next connection shakes hands in full.
    if (sessions && !closed_here) sessions->Forget(session_key);
    if (ec.category() == asio::error::get_ssl_category() &&
        ec != asio::ssl::error::stream_truncated)
      return Fail(Status(StatusCode::kFailedPrecondition,
                         "the server ended the TLS session: " + ec.message() +
                             " (is this client's certificate valid, unrevoked and signed by the "
                             "CA the server trusts?)"));
    Fail(Status::IoError("connection lost: " + ec.message()));
  }

  // From any thread.
  void Write(std::string frame) {
    asio::post(io, [this, frame = std::move(frame)]() mutable {
      writes.push_back(std::move(frame));
      if (!writing) WriteNext();
    });
  }

  void WriteNext() {
    if (writes.empty()) {
      writing = false;
      return;
    }
    writing = true;
    OnStream([this](auto& stream) {
      asio::async_write(stream, asio::buffer(writes.front()),
                        [this](const boost::system::error_code& ec, size_t) {
                          if (ec) {  // the read then fails the pending calls
                            boost::system::error_code ignored;
                            Tcp().shutdown(tcp::socket::shutdown_both, ignored);
                            writes.clear();
                            writing = false;
                            return;
                          }
                          writes.pop_front();
                          WriteNext();
                        });
    });
  }

  void ReadHeader() {
    OnStream([this](auto& stream) {
      asio::async_read(stream, asio::buffer(header),
                       [this](const boost::system::error_code& ec, size_t) {
                         if (ec) return FailRead(ec);
                         const uint32_t n = FrameLength(header);
                         if (n > max_answer_bytes)
                           return Fail(Status::IoError("server sent a frame of " +
                                                       std::to_string(n) + " bytes, over the cap"));
                         body.assign(n, '\0');
                         ReadBody();
                       });
    });
  }

  void ReadBody() {
    OnStream([this](auto& stream) {
      asio::async_read(
          stream, asio::buffer(body), [this](const boost::system::error_code& ec, size_t) {
            if (ec) return FailRead(ec);
            Result<v1::Envelope> env = ParseEnvelope(body.data(), body.size());
            if (!env.ok())
              return Fail(Status::IoError("server sent a frame that is not an Envelope"));
            Deliver(*env);
            ReadHeader();
          });
    });
  }

  void Deliver(const v1::Envelope& env) {
    std::lock_guard<std::mutex> lock(mu);
    auto it = pending.find(env.call_id());
    if (it == pending.end()) {
      if (env.call_id() == 0 && env.status().code() != v1::Status::OK) {
        // A protocol error the server could not tie to a call: it closes the connection.
        for (auto& [id, p] : pending)
          p.answer.set_value(Answer{env.status().code(), env.status().message(), {}});
        pending.clear();
      }
      return;
    }
    if (env.nonce() != it->second.nonce)
      it->second.answer.set_value(Status(
          StatusCode::kFailedPrecondition,
          "the answer does not echo its request's nonce (a server older than the nonce, or an "
          "answer that is not this call's)"));
    else
      it->second.answer.set_value(Answer{env.status().code(), env.status().message(), env.body()});
    pending.erase(it);
  }

  // How opening a connection ended: the closed handshake is a server over its handshake limit
  // (or going away), worth another try soon; a refusal (an alert, a certificate either side
  // refused, no ALPN of ours) would only come again.
  struct Opened {
    enum Kind { kOk, kUnreachable, kClosedHandshake, kRefused } kind = kOk;
    std::string why;
  };

  // What a TLS handshake needs: the context, the name the server's certificate must carry,
  // the ticket cache and the time certificates are checked at (Unix seconds).
  struct TlsSetup {
    asio::ssl::context* context = nullptr;  // null: plaintext
    TlsSessionCache* sessions = nullptr;
    std::string server_name;
    int64_t verify_time_unix = 0;
  };
  bool resumed = false;  // the handshake resumed a session
  // The ticket cache and this server's key in it; closed_here: this side closed (Close).
  TlsSessionCache* sessions = nullptr;
  std::string session_key;
  std::atomic<bool> closed_here{false};

  // Before the I/O thread starts: connects (and under TLS shakes hands) within timeout_ms on
  // the calling thread.
  Opened Open(const std::string& host, int port, const TlsSetup& setup, int timeout_ms) {
    auto failed = [](Opened::Kind kind, std::string why) { return Opened{kind, std::move(why)}; };
    boost::system::error_code ec;
    tcp::resolver resolver(io);
    auto resolved = resolver.resolve(host, std::to_string(port), ec);
    if (ec) return failed(Opened::kUnreachable, ec.message());
    bool done = false;
    asio::async_connect(socket, resolved,
                        [&](const boost::system::error_code& e, auto&&) { ec = e, done = true; });
    io.run_for(std::chrono::milliseconds(timeout_ms));
    if (!done)
      return failed(Opened::kUnreachable,
                    "no connection within " + std::to_string(timeout_ms) + " ms");
    if (ec) return failed(Opened::kUnreachable, ec.message());
    socket.set_option(tcp::no_delay(true), ec);
    if (setup.context) {
      tls = std::make_unique<TlsStream>(std::move(socket), *setup.context);
      SSL* ssl = tls->native_handle();
      if (Status s = SetClientServerName(ssl, setup.server_name); !s.ok())
        return failed(Opened::kRefused, s.message());
      SetVerifyTime(ssl, setup.verify_time_unix);
      sessions = setup.sessions;
      session_key = host + ":" + std::to_string(port) + "|" + setup.server_name;
      sessions->Prepare(ssl, session_key);
      io.restart();
      done = false;
      tls->async_handshake(asio::ssl::stream_base::client,
                           [&](const boost::system::error_code& e) { ec = e, done = true; });
      io.run_for(std::chrono::milliseconds(timeout_ms));
      if (!done)
        return failed(Opened::kUnreachable,
                      "TLS handshake not finished within " + std::to_string(timeout_ms) + " ms");
      if (ec) {
        const bool closed = ec == asio::error::eof || ec == asio::error::connection_reset ||
                            ec == asio::error::broken_pipe ||
                            ec == asio::ssl::error::stream_truncated;
        const std::string v = VerifyProblem(tls->native_handle());
        return failed(closed ? Opened::kClosedHandshake : Opened::kRefused,
                      "TLS handshake: " + ec.message() + (v.empty() ? "" : ": " + v));
      }
      if (std::string alpn = AlpnProblem(tls->native_handle()); !alpn.empty())
        return failed(Opened::kRefused, "TLS: " + alpn);
      resumed = SSL_session_reused(tls->native_handle()) == 1;
    }
    io.restart();
    return {};
  }

  void Start() {
    ReadHeader();
    loop = std::thread([this] { io.run(); });
  }
};

}  // namespace sightfix::client_internal
