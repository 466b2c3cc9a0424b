#include "sketch/durable_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>

namespace waymark {
namespace {

Status io_failure(const std::string& what, const std::string& path) {
  return Status(StatusCode::io_error, what + " '" + path + "': " + std::strerror(errno));
}

}  // namespace

Status sync_parent_directory(const std::string& path) {
  const std::string parent = std::filesystem::absolute(path).parent_path().string();
  const int descriptor = ::open(parent.c_str(), O_RDONLY | O_DIRECTORY);
  if (descriptor < 0) return io_failure("cannot open directory", parent);
  const int result = ::fsync(descriptor);
  ::close(descriptor);
  if (result != 0) return io_failure("cannot fsync directory", parent);
  return Status::ok();
}

Status write_file_atomically(const std::string& path, std::string_view bytes) {
  const std::string temporary = path + ".tmp";
  const int descriptor = ::open(temporary.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (descriptor < 0) return io_failure("cannot create", temporary);
  for (std::size_t written = 0; written < bytes.size();) {
    const ssize_t n = ::write(descriptor, bytes.data() + written, bytes.size() - written);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      Status failure = io_failure("cannot write", temporary);
      ::close(descriptor);
      return failure;
    }
    written += static_cast<std::size_t>(n);
  }
  if (::fsync(descriptor) != 0) {
    Status failure = io_failure("cannot fsync", temporary);
    ::close(descriptor);
    return failure;
  }
  if (::close(descriptor) != 0) return io_failure("cannot close", temporary);
  if (std::rename(temporary.c_str(), path.c_str()) != 0) return io_failure("cannot rename over", path);
  return sync_parent_directory(path);
}

std::uint64_t fnv1a64(std::string_view bytes) {
  std::uint64_t hash = 0xcbf29ce484222325ull;
  for (unsigned char c : bytes) {
    hash ^= c;
    hash *= 0x100000001b3ull;
  }
  return hash;
}

}  // namespace waymark
