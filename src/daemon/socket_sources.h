// Socket sources on the event loop: a TCP listener whose connections each
// send newline-delimited CSV (header line first) or JSON Lines, and a UDP
// listener that takes one record per datagram. Both hand their lines to the
// Intake on the loop thread. Limits (line length, open connections, datagram
// size) are counted and logged, never fatal.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>

#include <asio.hpp>

#include "config/service_config.h"
#include "daemon/intake.h"
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
  TcpSource(asio::io_context& io, const SourceConfig& config, std::size_t max_line_bytes, Intake& intake,
            SourceFigures& figures, ConnectionBudget& budget);
  std::uint16_t port() const { return port_; }
  void stop();  // stops accepting and closes open connections

 private:
  void accept();
  asio::ip::tcp::acceptor acceptor_;
  std::optional<Format> format_;
  std::size_t max_line_bytes_;
  Intake* intake_;
  SourceFigures* figures_;
  ConnectionBudget* budget_;
  std::uint16_t port_ = 0;
  std::shared_ptr<bool> stopped_ = std::make_shared<bool>(false);
};

class UdpSource {
 public:
  UdpSource(asio::io_context& io, const SourceConfig& config, std::size_t max_datagram_bytes, Intake& intake,
            SourceFigures& figures);
  std::uint16_t port() const { return port_; }
  void stop();

 private:
  void receive();
  asio::ip::udp::socket socket_;
  std::vector<char> buffer_;
  asio::ip::udp::endpoint peer_;
  std::size_t max_datagram_bytes_;
  Intake* intake_;
  SourceFigures* figures_;
  std::optional<LineDecoder> decoder_;
  std::uint16_t port_ = 0;
  std::string name_;
};

}  // namespace tallyd::daemon
