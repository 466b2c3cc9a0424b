// The vector index: an exhaustive (flat) L2 index over sketch vectors, keyed by 64-bit labels,
// wrapping FAISS 1.7.3 (IndexIDMap2 over IndexFlatL2, which supports removal).
//
// Exhaustive means search() ranks every stored vector, so the n-th result is the n-th nearest
// exactly; the query planner relies on that to certify answers. Graph (HNSW) and partitioned
// (IVF) kinds are future work (issue 3).
// Thread safety: search() calls may run concurrently; add() and remove() take an exclusive
// lock. FAISS exceptions are caught here and returned as Status.
#pragma once

#include <cstdint>
#include <memory>
#include <shared_mutex>
#include <span>
#include <vector>

#include "sketch/status.h"

namespace faiss {
struct Index;
}

namespace waymark {

struct Neighbour {
  std::int64_t label;
  float squared_distance;  // squared L2 between sketch vectors
};

class VectorIndex {
 public:
  explicit VectorIndex(std::size_t dimension);
  ~VectorIndex();
  VectorIndex(const VectorIndex&) = delete;
  VectorIndex& operator=(const VectorIndex&) = delete;

  std::size_t dimension() const { return dimension_; }
  std::size_t size() const;

  // vectors.size() == labels.size() × dimension(). A label already present must be removed first.
  Status add(std::span<const std::int64_t> labels, std::span<const float> vectors);
  Status remove(std::span<const std::int64_t> labels);
  // The `count` nearest vectors, nearest first (fewer when the index holds fewer). O(n · d).
  Result<std::vector<Neighbour>> search(std::span<const float> query, std::size_t count) const;

 private:
  std::size_t dimension_;
  std::unique_ptr<faiss::Index> index_;
  mutable std::shared_mutex mutex_;
};

}  // namespace waymark
