// StatusHttp: a minimal HTTP/1.1 responder for the status endpoint. Reads one
// request head (at most 8 KiB, 5 s), answers GET with what `handler` returns
// for the path, then closes the connection. Anything else gets 400/404/405.
// Runs on the event loop; the handler is called on the loop thread.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <string>

#include <asio.hpp>

namespace tallyd::daemon {

struct HttpReply {
  int status = 200;
  std::string content_type = "text/plain; charset=utf-8";
  std::string body;
};

class StatusHttp {
 public:
  using Handler = std::function<HttpReply(const std::string& path)>;
  // Binds at once; throws asio::system_error when it cannot.
  StatusHttp(asio::io_context& io, const std::string& address, std::uint16_t port, Handler handler);
  std::uint16_t port() const { return port_; }
  void stop();

 private:
  void accept();
  asio::ip::tcp::acceptor acceptor_;
  Handler handler_;
  std::uint16_t port_ = 0;
  std::shared_ptr<bool> stopped_ = std::make_shared<bool>(false);
};

}  // namespace tallyd::daemon
