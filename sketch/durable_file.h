// Durable file replacement, for every file the project writes outside its database.
//
// write_file_atomically(path, bytes): writes path + ".tmp", fsyncs it, renames it over path
// and fsyncs the parent directory. After it returns ok, a crash leaves the new contents;
// before, the old file (or none) — never a partial one. io_error names the step that failed.
// sync_parent_directory(path): makes a rename or creation inside path's directory durable.
// POSIX only.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "sketch/status.h"

namespace waymark {

Status write_file_atomically(const std::string& path, std::string_view bytes);
Status sync_parent_directory(const std::string& path);

// FNV-1a (64-bit) of `bytes`: the checksum our own file formats end with. O(n). Detects
// accidental damage (truncation, flipped bytes), not tampering.
std::uint64_t fnv1a64(std::string_view bytes);

}  // namespace waymark
