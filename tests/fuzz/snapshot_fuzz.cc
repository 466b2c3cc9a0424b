// Fuzz target: reading an approximate-index snapshot file (header, checksum, FAISS payload).
// A damaged snapshot must be refused with a Status, never crash: restore() is what a restart
// runs on whatever the disk holds.
#include <cstdint>
#include <sstream>
#include <string>

#include "index/approximate_index.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  std::istringstream bytes(std::string(reinterpret_cast<const char*>(data), size));
  const waymark::IndexKind kind = size > 0 && (data[0] & 1) ? waymark::IndexKind::graph : waymark::IndexKind::partitioned;
  waymark::ApproximateIndex index(kind, std::vector<double>(4, 1.0));
  waymark::VectorIndex::Contents stored;
  stored.labels = {1, 2, 3};
  stored.vectors = {0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2, 2};
  (void)index.restore(bytes, 1, stored);
  return 0;
}
