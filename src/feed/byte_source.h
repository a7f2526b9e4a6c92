// ByteSource: where a feed's bytes come from. Files in production; memory in
// tests (and anywhere the bytes are already at hand).
#pragma once

#include <cstddef>
#include <limits>
#include <memory>
#include <span>
#include <string>

#include "core/result.h"

namespace tallyd {

class ByteSource {
 public:
  virtual ~ByteSource() = default;

  // Reads up to buffer.size() bytes (buffer.size() >= 1) into `buffer` and
  // returns how many; 0 means the end of the input. May return fewer bytes
  // than asked for before the end. Fails with a message naming the source.
  virtual Result<std::size_t> read(std::span<char> buffer) = 0;
};

// Reads a file (or a pipe, or a device) from its start.
class FileSource final : public ByteSource {
 public:
  // Fails, naming `path` and the system's reason, when it cannot be opened
  // for reading or is a directory.
  static Result<std::unique_ptr<FileSource>> open(const std::string& path);
  ~FileSource() override;
  FileSource(const FileSource&) = delete;
  FileSource& operator=(const FileSource&) = delete;

  Result<std::size_t> read(std::span<char> buffer) override;

 private:
  FileSource(int fd, std::string path) : fd_(fd), path_(std::move(path)) {}
  int fd_;
  std::string path_;
};

// Hands out the bytes of a string, at most `max_per_read` at a time.
class MemorySource final : public ByteSource {
 public:
  explicit MemorySource(std::string bytes,
                        std::size_t max_per_read = std::numeric_limits<std::size_t>::max())
      : bytes_(std::move(bytes)), max_per_read_(max_per_read == 0 ? 1 : max_per_read) {}

  Result<std::size_t> read(std::span<char> buffer) override;

 private:
  std::string bytes_;
  std::size_t offset_ = 0;
  std::size_t max_per_read_;
};

}  // namespace tallyd
