// Opening a listening TCP socket, shared by the feed listener and the status endpoint.
#pragma once

#include <cstdint>
#include <string>

#include <asio.hpp>

namespace tallyd::daemon {

// Opens, binds (address reuse on) and listens on `address`:`port` (0 = any
// free port). Returns the port bound. Throws asio's system_error when the
// address is bad or taken: callers report it at start-up.
inline std::uint16_t listen_on(asio::ip::tcp::acceptor& acceptor, const std::string& address, std::uint16_t port) {
  asio::ip::tcp::endpoint ep(asio::ip::make_address(address), port);
  acceptor.open(ep.protocol());
  acceptor.set_option(asio::ip::tcp::acceptor::reuse_address(true));
  acceptor.bind(ep);
  acceptor.listen();
  return acceptor.local_endpoint().port();
}

}  // namespace tallyd::daemon
