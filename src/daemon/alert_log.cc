#include "daemon/alert_log.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include <fmt/format.h>
#include <spdlog/sinks/basic_file_sink.h>

namespace tallyd::daemon {

Result<std::unique_ptr<AlertLog>> AlertLog::open(const std::string& json_path, const std::string& text_path) {
  std::unique_ptr<AlertLog> log(new AlertLog(json_path, text_path));
  if (Status s = log->open_files(); !s) return s.error();
  return log;
}

AlertLog::~AlertLog() {
  if (fd_ >= 0) ::close(fd_);
}

Status AlertLog::open_files() {
  if (fd_ >= 0) ::close(fd_);
  fd_ = ::open(json_path_.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
  if (fd_ < 0) return Error{fmt::format("{}: cannot open the alert log: {}", json_path_, std::strerror(errno))};
  struct stat st {};
  if (::fstat(fd_, &st) != 0) return Error{fmt::format("{}: cannot stat the alert log: {}", json_path_, std::strerror(errno))};
  bytes_ = static_cast<std::uint64_t>(st.st_size);
  if (!text_path_.empty()) {
    try {
      // A logger that is not registered globally: no global state.
      auto sink = std::make_shared<spdlog::sinks::basic_file_sink_mt>(text_path_, false);
      text_ = std::make_shared<spdlog::logger>("alerts", std::move(sink));
      text_->set_pattern("%v");
      text_->flush_on(spdlog::level::info);
    } catch (const spdlog::spdlog_ex& e) {
      return Error{fmt::format("{}: cannot open the text alert log: {}", text_path_, e.what())};
    }
  }
  return Ok{};
}

Status AlertLog::truncate_to(std::uint64_t bytes) {
  struct stat st {};
  if (::fstat(fd_, &st) != 0) return Error{fmt::format("{}: cannot stat: {}", json_path_, std::strerror(errno))};
  if (static_cast<std::uint64_t>(st.st_size) < bytes)
    return Error{fmt::format("{}: the alert log holds {} bytes, fewer than the {} the checkpoint recorded", json_path_,
                             st.st_size, bytes)};
  if (::ftruncate(fd_, static_cast<off_t>(bytes)) != 0)
    return Error{fmt::format("{}: cannot truncate the alert log: {}", json_path_, std::strerror(errno))};
  bytes_ = bytes;
  return Ok{};
}

Status AlertLog::write(const std::string& json_line, const std::string& text_line) {
  std::string line = json_line;
  line += '\n';
  std::string_view rest = line;
  while (!rest.empty()) {
    ssize_t n = ::write(fd_, rest.data(), rest.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      return Error{fmt::format("{}: writing an alert failed: {}", json_path_, std::strerror(errno))};
    }
    bytes_ += static_cast<std::uint64_t>(n);
    rest.remove_prefix(static_cast<std::size_t>(n));
  }
  if (text_) text_->info(text_line);
  return Ok{};
}

Status AlertLog::reopen() {
  text_.reset();
  return open_files();
}

}  // namespace tallyd::daemon
