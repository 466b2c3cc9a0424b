#include "index/vector_index.h"

#include <faiss/IndexFlat.h>
#include <faiss/IndexIDMap.h>
#include <faiss/impl/FaissException.h>
#include <faiss/impl/IDSelector.h>

#include <mutex>

namespace waymark {
namespace {

Status from_exception(const std::exception& error) {
  return Status(StatusCode::internal, std::string("vector index: ") + error.what());
}

}  // namespace

VectorIndex::VectorIndex(std::size_t dimension, VectorMetric metric) : dimension_(dimension) {
  auto map = std::make_unique<faiss::IndexIDMap2>(new faiss::IndexFlat(
      static_cast<faiss::Index::idx_t>(dimension), metric == VectorMetric::linf ? faiss::METRIC_Linf : faiss::METRIC_L2));
  map->own_fields = true;
  index_ = std::move(map);
}

VectorIndex::~VectorIndex() = default;

std::size_t VectorIndex::size() const {
  std::shared_lock lock(mutex_);
  return static_cast<std::size_t>(index_->ntotal);
}

std::size_t VectorIndex::memory_bytes() const {
  std::shared_lock lock(mutex_);
  const std::size_t n = static_cast<std::size_t>(index_->ntotal);
  // Flat codes, IDMap2's label array, and its reverse hash map (key, value, node pointer, bucket).
  return n * (dimension_ * sizeof(float) + sizeof(std::int64_t) + 4 * sizeof(std::int64_t));
}

Status VectorIndex::add(std::span<const std::int64_t> labels, std::span<const float> vectors) {
  if (vectors.size() != labels.size() * dimension_) return Status(StatusCode::internal, "vector count mismatch");
  if (labels.empty()) return Status::ok();
  std::unique_lock lock(mutex_);
  try {
    index_->add_with_ids(static_cast<faiss::Index::idx_t>(labels.size()), vectors.data(), labels.data());
  } catch (const std::exception& error) {
    return from_exception(error);
  }
  return Status::ok();
}

Status VectorIndex::remove(std::span<const std::int64_t> labels) {
  if (labels.empty()) return Status::ok();
  std::unique_lock lock(mutex_);
  try {
    faiss::IDSelectorBatch selector(labels.size(), labels.data());
    index_->remove_ids(selector);
  } catch (const std::exception& error) {
    return from_exception(error);
  }
  return Status::ok();
}

Result<std::vector<float>> VectorIndex::vector_of(std::int64_t label) const {
  std::shared_lock lock(mutex_);
  // IndexIDMap2::reconstruct throws for an unknown label; look first so the common "removed
  // since the search" case costs no exception.
  const auto& map = static_cast<const faiss::IndexIDMap2&>(*index_);
  if (map.rev_map.find(label) == map.rev_map.end()) {
    return Status(StatusCode::not_found, "no vector with label " + std::to_string(label));
  }
  std::vector<float> out(dimension_);
  try {
    index_->reconstruct(label, out.data());
  } catch (const std::exception& error) {
    return from_exception(error);
  }
  return out;
}

Result<std::vector<Neighbour>> VectorIndex::search(std::span<const float> query, std::size_t count) const {
  if (query.size() != dimension_) return Status(StatusCode::internal, "query dimension mismatch");
  std::shared_lock lock(mutex_);
  count = std::min<std::size_t>(count, static_cast<std::size_t>(index_->ntotal));
  std::vector<Neighbour> out;
  if (count == 0) return out;
  std::vector<float> distances(count);
  std::vector<faiss::Index::idx_t> labels(count);
  try {
    index_->search(1, query.data(), static_cast<faiss::Index::idx_t>(count), distances.data(), labels.data());
  } catch (const std::exception& error) {
    return from_exception(error);
  }
  out.reserve(count);
  for (std::size_t i = 0; i < count; ++i) {
    if (labels[i] >= 0) out.push_back({labels[i], distances[i]});
  }
  return out;
}

}  // namespace waymark
