// Fuzz target: reading an approximate-index snapshot file (header, checksum, FAISS payload).
// A damaged snapshot must be refused with a Status, never crash: read_snapshot() and restore()
// are what a restart runs on whatever the disk holds.
#include <cstdint>
#include <sstream>
#include <string>
#include <utility>

#include "index/approximate_index.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  std::istringstream bytes(std::string(reinterpret_cast<const char*>(data), size));
  // The index to restore into takes the kind the file names (byte 8, after the magic), so that
  // both kinds' payloads are reached; other values still reach the kind check.
  const waymark::IndexKind kind = size > 8 && data[8] == 2 ? waymark::IndexKind::partitioned : waymark::IndexKind::graph;
  waymark::ApproximateIndex index(kind, std::vector<double>(4, 1.0), 4);
  waymark::VectorIndex::Contents stored;
  stored.labels = {1, 2, 3};
  stored.vectors = {0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2};
  waymark::Result<waymark::ApproximateIndex::Snapshot> read = index.read_snapshot(bytes, 1);
  if (read) (void)index.restore(std::move(*read), stored);
  return 0;
}
