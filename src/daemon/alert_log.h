// AlertLog: the service's alert outputs. The JSON Lines log (alert/alert_format.h,
// one object per line) is written with one write(2) per alert on a file opened
// for appending, and its byte length is tracked so a checkpoint can record it
// and a restart can cut the log back to it. An optional human-readable copy
// goes through an spdlog file logger.
// Not thread-safe: used from the event loop only.
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include <spdlog/logger.h>

#include "core/result.h"

namespace tallyd::daemon {

class AlertLog {
 public:
  // Opens (creating) `json_path` for appending; `text_path` "" = no text copy.
  static Result<std::unique_ptr<AlertLog>> open(const std::string& json_path, const std::string& text_path);
  ~AlertLog();
  AlertLog(const AlertLog&) = delete;
  AlertLog& operator=(const AlertLog&) = delete;

  // Cuts the JSON log back to `bytes` (what a checkpoint recorded), dropping
  // alerts written after it. Fails, changing nothing, when the log is shorter
  // than `bytes` (it was replaced or rotated behind the checkpoint's back).
  Status truncate_to(std::uint64_t bytes);

  // Appends one JSON line (without its '\n') and, if enabled, the text line.
  // A failed write is reported in the result; the length stays that of the
  // bytes actually written.
  Status write(const std::string& json_line, const std::string& text_line);

  // Closes and reopens both files by name (after logrotate moved them). The
  // tracked length becomes the length of the file now at the path.
  Status reopen();

  std::uint64_t bytes() const { return bytes_; }
  const std::string& path() const { return json_path_; }

 private:
  AlertLog(std::string json_path, std::string text_path) : json_path_(std::move(json_path)), text_path_(std::move(text_path)) {}
  Status open_files();

  std::string json_path_;
  std::string text_path_;
  int fd_ = -1;
  std::uint64_t bytes_ = 0;
  std::shared_ptr<spdlog::logger> text_;
};

}  // namespace tallyd::daemon
