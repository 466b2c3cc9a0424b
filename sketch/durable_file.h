// Durable file replacement, for every file the project writes outside its database.
//
// write_file_atomically(path, bytes): writes path + ".tmp", fsyncs it, renames it over path
// and fsyncs the parent directory. After it returns ok, a crash leaves the new contents;
// before, the old file (or none) — never a partial one. io_error names the step that failed.
// AtomicFileWriter does the same for a file produced in pieces, so that a large file (an index
// snapshot of a million shapes is hundreds of MB) never has to be held in memory whole.
// sync_parent_directory(path): makes a rename or creation inside path's directory durable.
// POSIX only.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "sketch/status.h"

namespace waymark {

Status write_file_atomically(const std::string& path, std::string_view bytes);

class AtomicFileWriter {
 public:
  // Creates path + ".tmp" (truncating a leftover one); io_error if it cannot.
  static Result<AtomicFileWriter> create(const std::string& path);
  AtomicFileWriter(AtomicFileWriter&& other) noexcept;
  AtomicFileWriter& operator=(AtomicFileWriter&&) = delete;
  // Without a successful commit(): closes and removes the temporary file; path is untouched.
  ~AtomicFileWriter();

  // Buffered (1 MiB); io_error (e.g. a full disk) names the file. After an error, every later
  // call fails the same way.
  Status append(std::string_view bytes);
  // Flushes, fsyncs, renames over path, fsyncs the directory. Once only.
  Status commit();

 private:
  explicit AtomicFileWriter(std::string path, int descriptor);
  Status write_through(std::string_view bytes);

  std::string path_;
  int descriptor_ = -1;
  std::string buffer_;
  Status failure_;
  bool committed_ = false;
};
Status sync_parent_directory(const std::string& path);

// FNV-1a (64-bit) of `bytes`: the checksum landmark files end with (index snapshots, hundreds
// of MB, use XXH3 instead: index/STORE_FORMAT.md). O(n), one byte at a time. Detects
// accidental damage (truncation, flipped bytes), not tampering.
std::uint64_t fnv1a64(std::string_view bytes);

}  // namespace waymark
