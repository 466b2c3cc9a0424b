// Durable file replacement and the checksum our file formats end with.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>

#include "sketch/durable_file.h"

using namespace waymark;

namespace {

std::string read_all(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

std::filesystem::path fresh_directory(const char* name) {
  const std::filesystem::path directory = std::filesystem::temp_directory_path() / name;
  std::filesystem::remove_all(directory);
  std::filesystem::create_directories(directory);
  return directory;
}

}  // namespace

TEST_CASE("Fnv1a64MatchesTheReferenceVectors") {
  // FNV-1a 64-bit test vectors from the FNV reference (draft-eastlake-fnv, values from memory,
  // re-derived with a three-line Python loop): the empty string is the offset basis.
  CHECK(fnv1a64("") == 0xcbf29ce484222325ull);
  CHECK(fnv1a64("a") == 0xaf63dc4c8601ec8cull);
  CHECK(fnv1a64("foobar") == 0x85944171f73967e8ull);
}

TEST_CASE("AtomicFileWriterReplacesTheFileOnlyOnCommit") {
  const std::filesystem::path directory = fresh_directory("waymark-durable-file-test");
  const std::string path = (directory / "snapshot").string();
  REQUIRE(write_file_atomically(path, "old contents").is_ok());

  // Pieces around the 1 MiB buffer: small, larger than the buffer, small again.
  const std::string small = "header", large(3 << 20, 'x'), tail = "checksum";
  {
    Result<AtomicFileWriter> file = AtomicFileWriter::create(path);
    REQUIRE(file.is_ok());
    REQUIRE(file->append(small).is_ok());
    REQUIRE(file->append(large).is_ok());
    REQUIRE(file->append(tail).is_ok());
    CHECK(read_all(path) == "old contents");  // nothing replaced before the commit
  }  // dropped without commit
  CHECK(read_all(path) == "old contents");
  CHECK_FALSE(std::filesystem::exists(path + ".tmp"));

  Result<AtomicFileWriter> file = AtomicFileWriter::create(path);
  REQUIRE(file.is_ok());
  REQUIRE(file->append(small).is_ok());
  REQUIRE(file->append(large).is_ok());
  REQUIRE(file->append(tail).is_ok());
  REQUIRE(file->commit().is_ok());
  CHECK(read_all(path) == small + large + tail);
  CHECK_FALSE(std::filesystem::exists(path + ".tmp"));
  CHECK(file->append("more").code() == StatusCode::failed_precondition);

  // A directory that does not exist: the error names the file.
  Result<AtomicFileWriter> nowhere = AtomicFileWriter::create((directory / "missing" / "file").string());
  REQUIRE_FALSE(nowhere.is_ok());
  CHECK(nowhere.status().code() == StatusCode::io_error);
  CHECK(nowhere.status().message().find("missing/file.tmp") != std::string::npos);
  std::filesystem::remove_all(directory);
}
