#include "index/vector_index.h"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <mutex>

#include "index/linf_distances.h"
#include "sketch/vector_clones.h"

namespace waymark {
namespace {

// Eight floats as one value (GCC vector extension): each clone compiles the arithmetic below
// to its own instructions (two SSE registers, one AVX2 register, or half an AVX-512 one).
typedef float Float8 __attribute__((vector_size(32)));
typedef std::int32_t Int8 __attribute__((vector_size(32)));
constexpr std::size_t kLanes = 8;

inline Float8 load8(const float* p) {
  Float8 value;
  std::memcpy(&value, p, sizeof value);  // unaligned load
  return value;
}

bool nearer(const Neighbour& a, const Neighbour& b) {
  return a.distance != b.distance ? a.distance < b.distance : a.label < b.label;
}

}  // namespace

// Stored values are finite, so the comparison-based maximum equals the true one.
WAYMARK_VECTOR_CLONES
void linf_distances(const float* __restrict rows, std::size_t count, std::size_t stride, std::size_t dimension,
                    const float* __restrict query, float* __restrict out) {
  const std::size_t whole = dimension - dimension % kLanes;
  const Int8 magnitude = {0x7fffffff, 0x7fffffff, 0x7fffffff, 0x7fffffff,
                          0x7fffffff, 0x7fffffff, 0x7fffffff, 0x7fffffff};
  for (std::size_t row = 0; row < count; ++row) {
    const float* vector = rows + row * stride;
    Float8 largest8 = {};
    for (std::size_t base = 0; base < whole; base += kLanes) {
      const Float8 difference = reinterpret_cast<Float8>(reinterpret_cast<Int8>(load8(vector + base) - load8(query + base)) & magnitude);
      largest8 = largest8 > difference ? largest8 : difference;
    }
    float largest = 0;
    for (std::size_t lane = 0; lane < kLanes; ++lane) largest = std::max(largest, largest8[lane]);
    for (std::size_t k = whole; k < dimension; ++k) largest = std::max(largest, std::fabs(vector[k] - query[k]));
    out[row] = largest;
  }
}

std::size_t VectorIndex::size() const {
  std::shared_lock lock(mutex_);
  return labels_.size();
}

VectorIndex::Contents VectorIndex::copy() const {
  std::shared_lock lock(mutex_);
  return {labels_, vectors_};
}

std::size_t VectorIndex::memory_bytes() const {
  std::shared_lock lock(mutex_);
  // Vectors and labels, plus the hash map's node (key, value, next pointer) and bucket.
  return vectors_.capacity() * sizeof(float) + labels_.capacity() * sizeof(std::int64_t) +
         row_of_label_.size() * (2 * sizeof(std::int64_t) + 2 * sizeof(void*));
}

Status VectorIndex::add(std::span<const std::int64_t> labels, std::span<const float> vectors) {
  if (vectors.size() != labels.size() * dimension_) return Status(StatusCode::internal, "vector count mismatch");
  std::unique_lock lock(mutex_);
  for (std::int64_t label : labels) {
    if (row_of_label_.contains(label)) {
      return Status(StatusCode::internal, "label " + std::to_string(label) + " is already in the vector index");
    }
  }
  for (std::size_t i = 0; i < labels.size(); ++i) {
    row_of_label_.emplace(labels[i], labels_.size());
    labels_.push_back(labels[i]);
  }
  vectors_.insert(vectors_.end(), vectors.begin(), vectors.end());
  return Status::ok();
}

Status VectorIndex::remove(std::span<const std::int64_t> labels) {
  std::unique_lock lock(mutex_);
  for (std::int64_t label : labels) {
    auto found = row_of_label_.find(label);
    if (found == row_of_label_.end()) continue;
    const std::size_t row = found->second, last = labels_.size() - 1;
    row_of_label_.erase(found);
    if (row != last) {  // the last row fills the hole
      std::memcpy(vectors_.data() + row * dimension_, vectors_.data() + last * dimension_, dimension_ * sizeof(float));
      labels_[row] = labels_[last];
      row_of_label_[labels_[row]] = row;
    }
    labels_.pop_back();
    vectors_.resize(labels_.size() * dimension_);
  }
  return Status::ok();
}

Result<std::vector<float>> VectorIndex::vector_of(std::int64_t label) const {
  std::shared_lock lock(mutex_);
  auto found = row_of_label_.find(label);
  if (found == row_of_label_.end()) return Status(StatusCode::not_found, "no vector with label " + std::to_string(label));
  const float* row = vectors_.data() + found->second * dimension_;
  return std::vector<float>(row, row + dimension_);
}

Result<std::vector<Neighbour>> VectorIndex::distances_to(std::span<const std::int64_t> labels,
                                                         std::span<const float> query, std::size_t compared) const {
  if (query.size() != dimension_ || compared > dimension_) {
    return Status(StatusCode::internal, "query dimension mismatch");
  }
  if (compared == 0) compared = dimension_;
  std::vector<Neighbour> out;
  out.reserve(labels.size());
  std::shared_lock lock(mutex_);
  for (const std::int64_t label : labels) {
    auto found = row_of_label_.find(label);
    if (found == row_of_label_.end()) continue;
    float distance = 0;
    linf_distances(vectors_.data() + found->second * dimension_, 1, dimension_, compared, query.data(), &distance);
    out.push_back({label, distance});
  }
  return out;
}

Result<VectorIndex::Scan> VectorIndex::scan(std::span<const float> query, std::size_t compared) const {
  if (query.size() != dimension_ || compared > dimension_) {
    return Status(StatusCode::internal, "query dimension mismatch");
  }
  if (compared == 0) compared = dimension_;
  Scan scan;
  {
    std::shared_lock lock(mutex_);
    scan.labels_ = labels_;
    scan.distances_.resize(labels_.size());
    linf_distances(vectors_.data(), labels_.size(), dimension_, compared, query.data(), scan.distances_.data());
  }
  // Evenly spaced rows: the vectors' order is insertion order, unrelated to the query.
  constexpr std::size_t kSampleSize = 4096;
  const std::size_t stored = scan.distances_.size(), sampled = std::min(stored, kSampleSize);
  scan.sample_.reserve(sampled);
  for (std::size_t i = 0; i < sampled; ++i) scan.sample_.push_back(scan.distances_[i * stored / sampled]);
  std::sort(scan.sample_.begin(), scan.sample_.end());
  return scan;
}

void VectorIndex::Scan::gather(std::size_t wanted) {
  // The sample's values above the ceiling stand for the rows not gathered yet; the new
  // ceiling is the one at their share `wanted` / rows left, with a margin, so that a tier
  // usually holds enough. Too few only costs another tier; the order never depends on it.
  const auto above = gathered_any_ ? std::upper_bound(sample_.begin(), sample_.end(), ceiling_) : sample_.begin();
  const std::size_t left = labels_.size() - gathered_.size(), sample_left = static_cast<std::size_t>(sample_.end() - above);
  const double share = 1.5 * static_cast<double>(wanted) / static_cast<double>(std::max<std::size_t>(1, left));
  const std::size_t rank = static_cast<std::size_t>(share * static_cast<double>(sample_left));
  const bool everything = rank >= sample_left;
  const float ceiling = everything ? 0 : *(above + static_cast<std::ptrdiff_t>(rank));
  for (std::size_t row = 0; row < distances_.size(); ++row) {
    const float d = distances_[row];
    if ((gathered_any_ && !(d > ceiling_)) || (!everything && d > ceiling)) continue;
    gathered_.push_back({labels_[row], d});
  }
  if (everything) ceiling_ = std::numeric_limits<float>::infinity();
  else ceiling_ = ceiling;
  gathered_any_ = true;
}

std::span<const Neighbour> VectorIndex::Scan::next(std::size_t count) {
  while (gathered_.size() - handed_out_ < count && gathered_.size() < labels_.size()) {
    // Tiers at least double what has been handed out, so an exhaustive walk takes O(log n) tiers.
    gather(std::max({count - (gathered_.size() - handed_out_), gathered_.size(), std::size_t{2048}}));
  }
  const auto begin = gathered_.begin() + static_cast<std::ptrdiff_t>(handed_out_);
  const std::size_t taken = std::min(count, gathered_.size() - handed_out_);
  const auto end = begin + static_cast<std::ptrdiff_t>(taken);
  // Select the `taken` nearest of those gathered and not handed out (nearer than every row
  // not gathered), then order them (ties by label, so scans repeat).
  if (end != gathered_.end()) std::nth_element(begin, end, gathered_.end(), nearer);
  std::sort(begin, end, nearer);
  handed_out_ += taken;
  return {gathered_.data() + handed_out_ - taken, taken};
}

}  // namespace waymark
