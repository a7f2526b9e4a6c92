#include "daemon/socket_sources.h"

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "feed/line_splitter.h"

#include "daemon/listen.h"

namespace tallyd::daemon {
namespace {

std::optional<Format> format_named(const std::string& name) {
  if (name == "csv") return Format::csv;
  if (name == "jsonl") return Format::jsonl;
  return std::nullopt;
}

// One TCP peer: reads, splits, decodes, hands over; closes on EOF or error.
// Reads again only while the handoff has room (see the header).
class Connection : public std::enable_shared_from_this<Connection> {
 public:
  Connection(asio::ip::tcp::socket socket, std::string peer, std::optional<Format> format, std::size_t max_line_bytes,
             Handoff& handoff, SourceFigures& figures, ConnectionBudget& budget, std::shared_ptr<bool> stopped)
      : socket_(std::move(socket)),
        peer_(std::move(peer)),
        max_line_bytes_(max_line_bytes),
        splitter_(max_line_bytes),
        decoder_(peer_, format),
        handoff_(&handoff),
        figures_(&figures),
        budget_(&budget),
        stopped_(std::move(stopped)),
        buffer_(64 * 1024) {}
  ~Connection() { --budget_->open; }

  void start() { read(); }

 private:
  void read() {
    auto self = shared_from_this();
    socket_.async_read_some(asio::buffer(buffer_), [this, self](std::error_code ec, std::size_t n) {
      if (*stopped_) return;
      const SteadyTime arrival = std::chrono::steady_clock::now();
      if (!ec) {
        splitter_.push(std::string_view(buffer_.data(), n));
        hand_over(false, arrival);
        read_when_room();
        return;
      }
      // The peer is done (or gone): its last line counts even without '\n',
      // as in a feed file.
      hand_over(true, arrival);
      if (ec != asio::error::eof) spdlog::info("{}: connection closed: {}", peer_, ec.message());
    });
  }

  void read_when_room() {
    if (handoff_->has_room()) {
      read();
      return;
    }
    // Not reading leaves the bytes in the kernel: TCP's flow control slows the sender.
    auto self = shared_from_this();
    handoff_->when_room([this, self] {
      if (!*stopped_) read();
    });
  }

  void hand_over(bool at_end, SteadyTime arrival) {
    LineBatch batch;
    batch.figures = figures_;
    batch.arrival = arrival;
    for (Split s = at_end ? splitter_.finish() : splitter_.next(); s.kind != SplitKind::need_more;
         s = at_end ? splitter_.finish() : splitter_.next())
      batch.lines.push_back(decoder_.decode(s, max_line_bytes_));
    if (!batch.lines.empty()) handoff_->push(std::move(batch));
  }

  asio::ip::tcp::socket socket_;
  std::string peer_;
  std::size_t max_line_bytes_;
  LineSplitter splitter_;
  LineDecoder decoder_;
  Handoff* handoff_;
  SourceFigures* figures_;
  ConnectionBudget* budget_;
  std::shared_ptr<bool> stopped_;
  std::vector<char> buffer_;
};

}  // namespace

TcpSource::TcpSource(asio::io_context& io, const SourceConfig& config, std::size_t max_line_bytes, Handoff& handoff,
                     SourceFigures& figures, ConnectionBudget& budget, WarnLimiter& warnings)
    : acceptor_(io),
      format_(format_named(config.format)),
      max_line_bytes_(max_line_bytes),
      handoff_(&handoff),
      figures_(&figures),
      budget_(&budget),
      warnings_(&warnings) {
  port_ = listen_on(acceptor_, config.address, config.port);
  accept();
}

void TcpSource::stop() {
  *stopped_ = true;
  std::error_code ec;
  acceptor_.close(ec);
}

void TcpSource::accept() {
  acceptor_.async_accept([this, stopped = stopped_](std::error_code ec, asio::ip::tcp::socket socket) {
    if (*stopped) return;
    if (!ec) {
      std::error_code pe;
      const auto remote = socket.remote_endpoint(pe);
      const std::string peer = fmt::format("tcp {}:{} ({})", remote.address().to_string(), remote.port(), figures_->name);
      if (budget_->open >= budget_->max) {
        ++figures_->connections_refused;
        warnings_->warn(
            fmt::format("{}: connection closed at once: {} connections are open, the limit", peer, budget_->max));
        socket.close(pe);
      } else {
        ++budget_->open;
        ++figures_->connections;
        std::make_shared<Connection>(std::move(socket), peer, format_, max_line_bytes_, *handoff_, *figures_, *budget_,
                                     stopped_)
            ->start();
      }
    } else if (ec == asio::error::operation_aborted) {
      return;
    } else {
      spdlog::warn("{}: accept failed: {}", figures_->name, ec.message());
    }
    accept();
  });
}

UdpSource::UdpSource(asio::io_context& io, const SourceConfig& config, std::size_t max_datagram_bytes, Handoff& handoff,
                     SourceFigures& figures, WarnLimiter& warnings)
    : socket_(io),
      buffer_(max_datagram_bytes + 1),
      max_datagram_bytes_(max_datagram_bytes),
      handoff_(&handoff),
      figures_(&figures),
      warnings_(&warnings),
      name_(config.name) {
  asio::ip::udp::endpoint ep(asio::ip::make_address(config.address), config.port);
  socket_.open(ep.protocol());
  socket_.bind(ep);
  port_ = socket_.local_endpoint().port();
  const std::string source = fmt::format("udp ({})", name_);
  if (config.format == "csv") {
    auto d = LineDecoder::resumed(source, Format::csv, config.columns);
    if (!d) throw std::runtime_error(fmt::format("source '{}': columns: {}", name_, d.error().message));
    decoder_.emplace(std::move(d).value());
  } else {
    decoder_.emplace(source, Format::jsonl);
  }
  receive();
}

void UdpSource::stop() {
  std::error_code ec;
  socket_.close(ec);
}

void UdpSource::receive() {
  socket_.async_receive_from(asio::buffer(buffer_), peer_, [this](std::error_code ec, std::size_t n) {
    if (ec == asio::error::operation_aborted || !socket_.is_open()) return;
    const SteadyTime arrival = std::chrono::steady_clock::now();
    if (!ec) {
      const std::string peer = fmt::format("udp {}:{} ({})", peer_.address().to_string(), peer_.port(), name_);
      if (!handoff_->has_room()) {
        // A datagram cannot wait: dropped, counted, and said (rate-limited).
        ++figures_->dropped_queue_full;
        warnings_->warn(fmt::format("{}: datagram dropped: the judging queue is full ({} lines waiting); counted as "
                                    "dropped_queue_full",
                                    peer, handoff_->queued_lines()));
        receive();
        return;
      }
      LineBatch batch;
      batch.figures = figures_;
      batch.arrival = arrival;
      if (n > max_datagram_bytes_) {
        batch.lines.push_back(ParseOutcome::of(Rejection{RejectReason::line_too_long, SourcePos{peer, 0},
                                                         fmt::format("datagram longer than {} bytes", max_datagram_bytes_)}));
      } else {
        std::string_view text(buffer_.data(), n);
        if (!text.empty() && text.back() == '\n') text.remove_suffix(1);
        if (!text.empty() && text.back() == '\r') text.remove_suffix(1);
        // Line number 2: never line 1, so a byte order mark is not special here.
        Split s{SplitKind::line, text, 2};
        ParseOutcome o = decoder_->decode(s, max_datagram_bytes_);
        if (o.kind() == LineKind::rejected) o.rejection().where = SourcePos{peer, 0};
        batch.lines.push_back(std::move(o));
      }
      handoff_->push(std::move(batch));
    }
    receive();
  });
}

}  // namespace tallyd::daemon
