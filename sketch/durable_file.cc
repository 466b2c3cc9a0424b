#include "sketch/durable_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <utility>

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

Result<AtomicFileWriter> AtomicFileWriter::create(const std::string& path) {
  const std::string temporary = path + ".tmp";
  const int descriptor = ::open(temporary.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (descriptor < 0) return io_failure("cannot create", temporary);
  return AtomicFileWriter(path, descriptor);
}

AtomicFileWriter::AtomicFileWriter(std::string path, int descriptor) : path_(std::move(path)), descriptor_(descriptor) {}

AtomicFileWriter::AtomicFileWriter(AtomicFileWriter&& other) noexcept
    : path_(std::move(other.path_)),
      descriptor_(std::exchange(other.descriptor_, -1)),
      buffer_(std::move(other.buffer_)),
      failure_(std::move(other.failure_)),
      committed_(other.committed_) {}

AtomicFileWriter::~AtomicFileWriter() {
  if (descriptor_ >= 0) ::close(descriptor_);
  if (!committed_ && !path_.empty()) ::unlink((path_ + ".tmp").c_str());
}

Status AtomicFileWriter::write_through(std::string_view bytes) {
  for (std::size_t written = 0; written < bytes.size();) {
    const ssize_t n = ::write(descriptor_, bytes.data() + written, bytes.size() - written);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      if (n == 0) errno = EIO;
      failure_ = io_failure("cannot write", path_ + ".tmp");
      return failure_;
    }
    written += static_cast<std::size_t>(n);
  }
  return Status::ok();
}

Status AtomicFileWriter::append(std::string_view bytes) {
  constexpr std::size_t kBufferBytes = 1 << 20;
  if (!failure_.is_ok()) return failure_;
  if (descriptor_ < 0 || committed_) return Status(StatusCode::failed_precondition, "file already committed");
  if (buffer_.size() + bytes.size() <= kBufferBytes) {
    buffer_.append(bytes);
    return Status::ok();
  }
  // Large pieces (vector arrays) go straight to the file after what is buffered.
  if (Status s = write_through(buffer_); !s.is_ok()) return s;
  buffer_.clear();
  if (bytes.size() >= kBufferBytes) return write_through(bytes);
  buffer_.append(bytes);
  return Status::ok();
}

Status AtomicFileWriter::commit() {
  if (!failure_.is_ok()) return failure_;
  if (descriptor_ < 0 || committed_) return Status(StatusCode::failed_precondition, "file already committed");
  const std::string temporary = path_ + ".tmp";
  if (Status s = write_through(buffer_); !s.is_ok()) return s;
  buffer_.clear();
  if (::fsync(descriptor_) != 0) return failure_ = io_failure("cannot fsync", temporary);
  const int result = ::close(std::exchange(descriptor_, -1));
  if (result != 0) return failure_ = io_failure("cannot close", temporary);
  if (std::rename(temporary.c_str(), path_.c_str()) != 0) return failure_ = io_failure("cannot rename over", path_);
  committed_ = true;
  return sync_parent_directory(path_);
}

Status write_file_atomically(const std::string& path, std::string_view bytes) {
  Result<AtomicFileWriter> file = AtomicFileWriter::create(path);
  if (!file) return file.status();
  if (Status s = file->append(bytes); !s.is_ok()) return s;
  return file->commit();
}

std::uint64_t fnv1a64(std::string_view bytes) {
  std::uint64_t hash = 0xcbf29ce484222325ull;  // the offset basis
  for (unsigned char c : bytes) {
    hash ^= c;
    hash *= 0x100000001b3ull;
  }
  return hash;
}

}  // namespace waymark
