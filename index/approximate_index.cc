#include "index/approximate_index.h"

#include <faiss/IndexFlat.h>
#include <faiss/IndexHNSW.h>
#include <faiss/IndexIVFFlat.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <mutex>
#include <unordered_set>

namespace waymark {
namespace {

const char* const kKindNames[] = {"exhaustive", "graph", "partitioned"};

Status from_exception(const std::exception& error) {
  return Status(StatusCode::internal, std::string("approximate index: ") + error.what());
}

}  // namespace

const char* index_kind_name(IndexKind kind) { return kKindNames[static_cast<int>(kind)]; }

Result<IndexKind> parse_index_kind(const std::string& name) {
  for (int k = 0; k < 3; ++k) {
    if (name == kKindNames[k]) return static_cast<IndexKind>(k);
  }
  return invalid_argument("unknown index kind '" + name + "' (expected exhaustive, graph or partitioned)", "index");
}

ApproximateIndex::ApproximateIndex(IndexKind kind, std::vector<double> root_weights, ApproximateIndexSettings settings)
    : kind_(kind), root_weights_(std::move(root_weights)), settings_(settings), fresh_(root_weights_.size()) {}

ApproximateIndex::~ApproximateIndex() = default;

std::vector<float> ApproximateIndex::weighted(std::span<const float> raw) const {
  std::vector<float> out(raw.size());
  for (std::size_t i = 0; i < raw.size(); ++i) {
    out[i] = static_cast<float>(raw[i] * root_weights_[i % root_weights_.size()]);
  }
  return out;
}

Status ApproximateIndex::added(std::span<const std::int64_t> labels, std::span<const float> raw_vectors) {
  return fresh_.add(labels, raw_vectors);
}

void ApproximateIndex::removed(std::span<const std::int64_t> labels) {
  const std::size_t fresh_before = fresh_.size();
  (void)fresh_.remove(labels);  // never fails
  // Labels that were not fresh are in the built index: tombstones there.
  tombstones_ += labels.size() - (fresh_before - fresh_.size());
}

bool ApproximateIndex::ready() const {
  std::shared_lock lock(mutex_);
  return built_ != nullptr;
}

bool ApproximateIndex::rebuild_due(std::size_t stored) const {
  std::shared_lock lock(mutex_);
  if (!built_) return stored >= settings_.minimum_size;
  const double changed = static_cast<double>(fresh_.size() + tombstones_);
  return changed > settings_.rebuild_fraction * static_cast<double>(label_of_row_.size());
}

Status ApproximateIndex::build(const VectorIndex::Contents& copy) {
  const auto started = std::chrono::steady_clock::now();
  const std::size_t dimension = root_weights_.size();
  const std::size_t count = copy.labels.size();
  if (count == 0) return Status::ok();
  const std::vector<float> vectors = weighted(copy.vectors);
  std::unique_ptr<faiss::Index> index;
  std::size_t partitions = 0;
  try {
    if (kind_ == IndexKind::graph) {
      auto graph = std::make_unique<faiss::IndexHNSWFlat>(static_cast<int>(dimension),
                                                          static_cast<int>(settings_.graph_neighbours));
      graph->hnsw.efConstruction = static_cast<int>(settings_.graph_build_effort);
      graph->add(static_cast<faiss::Index::idx_t>(count), vectors.data());
      index = std::move(graph);
    } else {
      // About √n partitions (common practice, no source), trained on up to 64 points each.
      partitions = std::clamp<std::size_t>(static_cast<std::size_t>(std::sqrt(static_cast<double>(count))), 1, 65536);
      auto quantizer = new faiss::IndexFlatL2(static_cast<faiss::Index::idx_t>(dimension));
      auto lists = std::make_unique<faiss::IndexIVFFlat>(quantizer, dimension, partitions, faiss::METRIC_L2);
      lists->own_fields = true;
      const std::size_t training = std::min(count, 64 * partitions);
      // An evenly spaced sample: the copy's order is insertion order, so this spans the history.
      std::vector<float> sample(training * dimension);
      for (std::size_t i = 0; i < training; ++i) {
        const std::size_t row = i * count / training;
        std::copy_n(vectors.begin() + static_cast<std::ptrdiff_t>(row * dimension), dimension,
                    sample.begin() + static_cast<std::ptrdiff_t>(i * dimension));
      }
      lists->cp.verbose = false;
      lists->train(static_cast<faiss::Index::idx_t>(training), sample.data());
      lists->add(static_cast<faiss::Index::idx_t>(count), vectors.data());
      index = std::move(lists);
    }
  } catch (const std::exception& error) {
    return from_exception(error);
  }
  {
    std::unique_lock lock(mutex_);
    built_ = std::move(index);
    label_of_row_ = copy.labels;
    partitions_ = partitions;
    tombstones_ = 0;
  }
  (void)fresh_.remove(copy.labels);  // now in the built index
  ++builds_;
  last_build_seconds_ = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return Status::ok();
}

Result<std::vector<Neighbour>> ApproximateIndex::candidates(std::span<const float> raw_query, std::size_t count) const {
  std::vector<Neighbour> out;
  {
    std::shared_lock lock(mutex_);
    if (!built_) return Status(StatusCode::failed_precondition, "the approximate index is not built yet");
    const std::vector<float> query = weighted(raw_query);
    const std::size_t wanted = std::min(count, label_of_row_.size());
    std::vector<float> distances(wanted);
    std::vector<faiss::Index::idx_t> rows(wanted);
    try {
      if (kind_ == IndexKind::graph) {
        faiss::SearchParametersHNSW parameters;
        parameters.efSearch = static_cast<int>(std::max<std::size_t>(64, wanted));
        built_->search(1, query.data(), static_cast<faiss::Index::idx_t>(wanted), distances.data(), rows.data(),
                       &parameters);
      } else {
        faiss::SearchParametersIVF parameters;
        // Enough lists to hold about 8·count vectors, and at least 8 (common practice, no source).
        const std::size_t per_list = std::max<std::size_t>(1, label_of_row_.size() / std::max<std::size_t>(1, partitions_));
        parameters.nprobe = std::clamp<std::size_t>(8 * wanted / per_list, 8, partitions_);
        built_->search(1, query.data(), static_cast<faiss::Index::idx_t>(wanted), distances.data(), rows.data(),
                       &parameters);
      }
    } catch (const std::exception& error) {
      return from_exception(error);
    }
    for (std::size_t i = 0; i < wanted; ++i) {
      if (rows[i] >= 0) out.push_back({label_of_row_[static_cast<std::size_t>(rows[i])], distances[i]});
    }
  }
  // Fresh vectors, nearest by L∞; a label can be in both only while a build is swapping in.
  Result<VectorIndex::Scan> fresh = fresh_.scan(raw_query);
  if (!fresh) return fresh.status();
  std::unordered_set<std::int64_t> seen;
  for (const Neighbour& n : out) seen.insert(n.label);
  for (const Neighbour& n : fresh->next(count)) {
    if (seen.insert(n.label).second) out.push_back(n);
  }
  return out;
}

ApproximateIndexStatus ApproximateIndex::status() const {
  std::shared_lock lock(mutex_);
  return {built_ != nullptr, label_of_row_.size(), fresh_.size(), tombstones_, builds_, last_build_seconds_};
}

std::size_t ApproximateIndex::memory_bytes() const {
  std::shared_lock lock(mutex_);
  const std::size_t n = label_of_row_.size(), dimension = root_weights_.size();
  std::size_t bytes = fresh_.memory_bytes() + n * sizeof(std::int64_t) + n * dimension * sizeof(float);
  // HNSW: about 2·M neighbour ids per vector on level 0 and a few more above (FAISS layout).
  if (kind_ == IndexKind::graph) bytes += n * (2 * settings_.graph_neighbours + 4) * sizeof(std::int32_t);
  if (kind_ == IndexKind::partitioned) bytes += n * sizeof(std::int64_t) + partitions_ * dimension * sizeof(float);
  return bytes;
}

}  // namespace waymark
