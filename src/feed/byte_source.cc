#include "feed/byte_source.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>

namespace tallyd {

Result<std::unique_ptr<FileSource>> FileSource::open(const std::string& path) {
  int fd = -1;
  do {
    fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  } while (fd < 0 && errno == EINTR);
  if (fd < 0) return Error{"cannot open '" + path + "': " + std::strerror(errno)};
  struct stat st {};
  if (::fstat(fd, &st) == 0 && S_ISDIR(st.st_mode)) {
    ::close(fd);
    return Error{"cannot read '" + path + "': it is a directory"};
  }
  return std::unique_ptr<FileSource>(new FileSource(fd, path));
}

FileSource::~FileSource() { ::close(fd_); }

Result<std::size_t> FileSource::read(std::span<char> buffer) {
  while (true) {
    const ssize_t n = ::read(fd_, buffer.data(), buffer.size());
    if (n >= 0) return static_cast<std::size_t>(n);
    if (errno != EINTR) return Error{"cannot read '" + path_ + "': " + std::strerror(errno)};
  }
}

Result<std::size_t> MemorySource::read(std::span<char> buffer) {
  const std::size_t n = std::min({buffer.size(), max_per_read_, bytes_.size() - offset_});
  std::copy_n(bytes_.data() + offset_, n, buffer.data());
  offset_ += n;
  return n;
}

}  // namespace tallyd
