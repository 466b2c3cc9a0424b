// The vector index: an exhaustive (flat) index over vectors, keyed by 64-bit labels, under the
// L∞ (max-coordinate) or L2 distance, wrapping FAISS 1.7.3 (IndexIDMap2 over IndexFlat, which
// supports removal; FAISS's flat index accepts METRIC_Linf).
//
// Exhaustive means search() ranks every stored vector, so the n-th result is the n-th nearest
// exactly; the query planner relies on that to certify answers. Collections index raw
// (unweighted) landmark distances under L∞: that distance is itself the lower bound on d_H and
// d_F, so candidates arrive in lower-bound order (L∞ flat search is slower than L2 per vector,
// but on real shapes it finds the true neighbours with far fewer candidates). Graph (HNSW) and
// partitioned (IVF) kinds are future work (issue 3).
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

enum class VectorMetric { l2, linf };

struct Neighbour {
  std::int64_t label;
  float distance;  // L∞, or squared L2 (FAISS's convention), between the vectors
};

class VectorIndex {
 public:
  VectorIndex(std::size_t dimension, VectorMetric metric);
  ~VectorIndex();
  VectorIndex(const VectorIndex&) = delete;
  VectorIndex& operator=(const VectorIndex&) = delete;

  std::size_t dimension() const { return dimension_; }
  std::size_t size() const;
  // Memory held by the vectors and their labels (the FAISS arrays), in bytes.
  std::size_t memory_bytes() const;

  // vectors.size() == labels.size() × dimension(). A label already present must be removed first.
  Status add(std::span<const std::int64_t> labels, std::span<const float> vectors);
  Status remove(std::span<const std::int64_t> labels);
  // The vector stored under `label`; not_found when no vector has that label. O(d).
  Result<std::vector<float>> vector_of(std::int64_t label) const;
  // The `count` nearest vectors, nearest first (fewer when the index holds fewer). O(n · d).
  Result<std::vector<Neighbour>> search(std::span<const float> query, std::size_t count) const;

 private:
  std::size_t dimension_;
  std::unique_ptr<faiss::Index> index_;
  mutable std::shared_mutex mutex_;
};

}  // namespace waymark
