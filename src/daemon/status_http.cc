#include "daemon/status_http.h"

#include <fmt/format.h>

#include "daemon/listen.h"

namespace tallyd::daemon {
namespace {

std::string_view reason_phrase(int status) {
  switch (status) {
    case 200: return "OK";
    case 400: return "Bad Request";
    case 404: return "Not Found";
    case 405: return "Method Not Allowed";
    default: return "Error";
  }
}

class Exchange : public std::enable_shared_from_this<Exchange> {
 public:
  Exchange(asio::ip::tcp::socket socket, const StatusHttp::Handler& handler)
      : socket_(std::move(socket)), timer_(socket_.get_executor()), handler_(handler), request_(8192) {}

  void start() {
    auto self = shared_from_this();
    timer_.expires_after(std::chrono::seconds(5));
    timer_.async_wait([this, self](std::error_code ec) {
      if (!ec) {
        std::error_code ignored;
        socket_.close(ignored);
      }
    });
    asio::async_read_until(socket_, request_, "\r\n\r\n", [this, self](std::error_code ec, std::size_t) {
      HttpReply reply;
      if (ec) {
        if (!socket_.is_open()) return;
        reply = {400, "text/plain; charset=utf-8", "bad request\n"};
      } else {
        std::istream in(&request_);
        std::string method, target, version;
        in >> method >> target >> version;
        if (method != "GET") reply = {405, "text/plain; charset=utf-8", "only GET\n"};
        else reply = handler_(target.substr(0, target.find('?')));
      }
      response_ = fmt::format("HTTP/1.1 {} {}\r\nContent-Type: {}\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{}",
                              reply.status, reason_phrase(reply.status), reply.content_type, reply.body.size(),
                              reply.body);
      asio::async_write(socket_, asio::buffer(response_), [this, self](std::error_code, std::size_t) {
        std::error_code ignored;
        socket_.shutdown(asio::ip::tcp::socket::shutdown_both, ignored);
        socket_.close(ignored);
        timer_.cancel();
      });
    });
  }

 private:
  asio::ip::tcp::socket socket_;
  asio::steady_timer timer_;
  const StatusHttp::Handler& handler_;
  asio::streambuf request_;
  std::string response_;
};

}  // namespace

StatusHttp::StatusHttp(asio::io_context& io, const std::string& address, std::uint16_t port, Handler handler)
    : acceptor_(io), handler_(std::move(handler)) {
  port_ = listen_on(acceptor_, address, port);
  accept();
}

void StatusHttp::stop() {
  *stopped_ = true;
  std::error_code ec;
  acceptor_.close(ec);
}

void StatusHttp::accept() {
  acceptor_.async_accept([this, stopped = stopped_](std::error_code ec, asio::ip::tcp::socket socket) {
    if (*stopped || ec == asio::error::operation_aborted) return;
    if (!ec) std::make_shared<Exchange>(std::move(socket), handler_)->start();
    accept();
  });
}

}  // namespace tallyd::daemon
