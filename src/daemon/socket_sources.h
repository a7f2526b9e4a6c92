// Socket sources on the event loop: a TCP listener whose connections each
// send newline-delimited CSV (header line first) or JSON Lines, and a UDP
// listener that takes one record per datagram. Both decode their lines on
// the loop thread and push them to the Handoff for the judging thread.
// Limits (line length, open connections, datagram size) are counted and
// logged, never fatal.
//
// When the handoff has no room: a TCP connection stops reading after
// handing over what it has read (the kernel's flow control then slows the
// sender) and resumes once there is room again; a datagram is dropped
// unread and counted (SourceFigures::dropped_queue_full, warned at most a
// few times a second): UDP has no way to ask a sender to wait.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>

#include <asio.hpp>

#include "config/service_config.h"
#include "daemon/handoff.h"
#include "daemon/intake.h"
#include "daemon/warn_limiter.h"
#include "daemon/line_decoder.h"

namespace tallyd::daemon {

// Open connections over all TCP listeners, shared with the listeners.
struct ConnectionBudget {
  std::size_t open = 0;
  std::size_t max = 64;
};

class TcpSource {
 public:
  // Binds at once; throws asio::system_error when the address cannot be bound
  // (reported by the caller as a startup error).
  // `handoff`, `figures`, `budget` and `warnings` must outlive it; loop thread only.
  TcpSource(asio::io_context& io, const SourceConfig& config, std::size_t max_line_bytes, Handoff& handoff,
            SourceFigures& figures, ConnectionBudget& budget, WarnLimiter& warnings);
  std::uint16_t port() const { return port_; }
  void stop();  // stops accepting and closes open connections

 private:
  void accept();
  asio::ip::tcp::acceptor acceptor_;
  std::optional<Format> format_;
  std::size_t max_line_bytes_;
  Handoff* handoff_;
  SourceFigures* figures_;
  ConnectionBudget* budget_;
  WarnLimiter* warnings_;
  std::uint16_t port_ = 0;
  std::shared_ptr<bool> stopped_ = std::make_shared<bool>(false);
};

class UdpSource {
 public:
  UdpSource(asio::io_context& io, const SourceConfig& config, std::size_t max_datagram_bytes, Handoff& handoff,
            SourceFigures& figures, WarnLimiter& warnings);
  std::uint16_t port() const { return port_; }
  void stop();

 private:
  void receive();
  asio::ip::udp::socket socket_;
  std::vector<char> buffer_;
  asio::ip::udp::endpoint peer_;
  std::size_t max_datagram_bytes_;
  Handoff* handoff_;
  SourceFigures* figures_;
  WarnLimiter* warnings_;
  std::optional<LineDecoder> decoder_;
  std::uint16_t port_ = 0;
  std::string name_;
};

}  // namespace tallyd::daemon
