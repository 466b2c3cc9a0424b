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

// Thirty-two bytes as one value (GCC vector extension): an AVX2 register, or two SSE ones.
typedef std::uint8_t Byte32 __attribute__((vector_size(32)));

// The largest of |code_j − query_j| over the first `compared` bytes of each row (rows
// `stride` bytes apart), into out[row]. Bytes compare exactly, so the kernel is 32 lanes wide;
// a row's last block overlaps the one before it (a maximum does not mind). O(count · compared).
WAYMARK_VECTOR_CLONES
void largest_level_differences(const std::uint8_t* __restrict codes, std::size_t count, std::size_t stride,
                               std::size_t compared, const std::uint8_t* __restrict query, std::uint8_t* __restrict out) {
  constexpr std::size_t kBytes = sizeof(Byte32);
  auto load = [](const std::uint8_t* p) {
    Byte32 value;
    std::memcpy(&value, p, sizeof value);
    return value;
  };
  if (compared < kBytes) {
    for (std::size_t row = 0; row < count; ++row) {
      std::uint8_t largest = 0;
      for (std::size_t j = 0; j < compared; ++j) {
        const std::uint8_t a = codes[row * stride + j], b = query[j];
        largest = std::max<std::uint8_t>(largest, a > b ? a - b : b - a);
      }
      out[row] = largest;
    }
    return;
  }
  const std::size_t whole = compared - compared % kBytes;
  for (std::size_t row = 0; row < count; ++row) {
    const std::uint8_t* code = codes + row * stride;
    Byte32 largest = {};
    auto take = [&](std::size_t base) {
      const Byte32 a = load(code + base), b = load(query + base);
      const Byte32 difference = (a > b ? a : b) - (a < b ? a : b);
      largest = largest > difference ? largest : difference;
    };
    for (std::size_t base = 0; base < whole; base += kBytes) take(base);
    if (whole < compared) take(compared - kBytes);
    std::uint8_t result = 0;
    for (std::size_t lane = 0; lane < kBytes; ++lane) result = std::max(result, largest[lane]);
    out[row] = result;
  }
}

// The level nearest `offset` (a value less its low end) on a scale of steps 1 / `inverse_step`
// (0: every value at level 0), held to the 256 levels.
std::uint8_t nearest_level(double offset, double inverse_step) {
  return static_cast<std::uint8_t>(std::clamp(offset * inverse_step, 0.0, 255.0) + 0.5);
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
  return vectors_.capacity() * sizeof(float) + labels_.capacity() * sizeof(std::int64_t) + codes_.capacity() +
         code_error_.capacity() * sizeof(float) + row_of_label_.size() * (2 * sizeof(std::int64_t) + 2 * sizeof(void*));
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
  // The first vectors fit the scale; later ones are coded at it until too many fall outside.
  if (!code_low_.empty()) encode_rows(labels_.size() - labels.size());
  if (code_low_.empty() || rows_off_scale_ > std::max<std::size_t>(64, labels_.size() / 64)) fit_code_scale();
  return Status::ok();
}

Status VectorIndex::remove(std::span<const std::int64_t> labels) {
  std::unique_lock lock(mutex_);
  for (std::int64_t label : labels) {
    auto found = row_of_label_.find(label);
    if (found == row_of_label_.end()) continue;
    const std::size_t row = found->second, last = labels_.size() - 1;
    row_of_label_.erase(found);
    rows_off_scale_ -= code_error_[row] > code_step_;
    code_error_[row] = code_error_[last];
    if (row != last) {  // the last row fills the hole
      std::memcpy(vectors_.data() + row * dimension_, vectors_.data() + last * dimension_, dimension_ * sizeof(float));
      std::memcpy(codes_.data() + row * dimension_, codes_.data() + last * dimension_, dimension_);
      labels_[row] = labels_[last];
      row_of_label_[labels_[row]] = row;
    }
    labels_.pop_back();
    vectors_.resize(labels_.size() * dimension_);
    codes_.resize(labels_.size() * dimension_);
    code_error_.pop_back();
  }
  return Status::ok();
}

void VectorIndex::encode_rows(std::size_t first_row) {
  codes_.resize(labels_.size() * dimension_);
  code_error_.resize(labels_.size());
  const double step = code_step_, inverse = code_step_ > 0 ? 1 / step : 0;
  for (std::size_t row = first_row; row < labels_.size(); ++row) {
    // In double: a float less a float, and a float step times a level under 256, are exact
    // there, so `error` is the coding error itself (rounded up to a float below).
    double error = 0;
    for (std::size_t j = 0; j < dimension_; ++j) {
      const double offset = static_cast<double>(vectors_[row * dimension_ + j]) - code_low_[j];
      const std::uint8_t code = nearest_level(offset, inverse);
      codes_[row * dimension_ + j] = code;
      error = std::max(error, std::fabs(offset - step * code));
    }
    code_error_[row] = std::nextafter(static_cast<float>(error), std::numeric_limits<float>::infinity());
    rows_off_scale_ += code_error_[row] > code_step_;
  }
}

void VectorIndex::fit_code_scale() {
  std::vector<float> high(dimension_, -std::numeric_limits<float>::infinity());
  code_low_.assign(dimension_, std::numeric_limits<float>::infinity());
  for (std::size_t row = 0; row < labels_.size(); ++row) {
    for (std::size_t j = 0; j < dimension_; ++j) {
      code_low_[j] = std::min(code_low_[j], vectors_[row * dimension_ + j]);
      high[j] = std::max(high[j], vectors_[row * dimension_ + j]);
    }
  }
  // One step for every value: the widest range, with a tenth of it as room on each side.
  float widest = 0;
  for (std::size_t j = 0; j < dimension_; ++j) {
    if (labels_.empty()) code_low_[j] = high[j] = 0;
    widest = std::max(widest, high[j] - code_low_[j]);
  }
  for (std::size_t j = 0; j < dimension_; ++j) code_low_[j] -= 0.1f * widest;
  code_step_ = 1.2f * widest / 255;
  if (!(code_step_ > 0) || !std::isfinite(code_step_)) code_step_ = 0;
  rows_off_scale_ = 0;
  encode_rows(0);
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
  scan.index_ = this;
  scan.query_.assign(query.begin(), query.end());
  scan.compared_ = compared;
  {
    std::shared_lock lock(mutex_);
    scan.labels_ = labels_;
    scan.bounds_.resize(labels_.size());
    bound_all(query, compared, scan.bounds_.data());
  }
  scan.total_ = scan.labels_.size();
  // Evenly spaced rows: the vectors' order is insertion order, unrelated to the query.
  constexpr std::size_t kSampleSize = 4096;
  const std::size_t stored = scan.bounds_.size(), sampled = std::min(stored, kSampleSize);
  scan.sample_.reserve(sampled);
  for (std::size_t i = 0; i < sampled; ++i) scan.sample_.push_back(scan.bounds_[i * stored / sampled]);
  std::sort(scan.sample_.begin(), scan.sample_.end());
  return scan;
}

void VectorIndex::bound_all(std::span<const float> query, std::size_t compared, float* out) const {
  // The query at the same scale: its levels and how far they lie from its values.
  std::vector<std::uint8_t> query_levels(compared);
  const double step = code_step_, inverse = code_step_ > 0 ? 1 / step : 0;
  double query_error = 0;
  float magnitude = 0;  // of the values involved: the query's, the scale's ends
  for (std::size_t j = 0; j < compared; ++j) {
    const float low = code_low_.empty() ? 0 : code_low_[j];
    const double offset = static_cast<double>(query[j]) - low;
    query_levels[j] = nearest_level(offset, inverse);
    query_error = std::max(query_error, std::fabs(offset - step * query_levels[j]));
    magnitude = std::max({magnitude, std::fabs(query[j]), std::fabs(low) + 256 * code_step_});
  }
  std::vector<std::uint8_t> levels(labels_.size());
  largest_level_differences(codes_.data(), labels_.size(), dimension_, compared, query_levels.data(), levels.data());
  // For each value, |q − x| ≥ step · |level(q) − level(x)| − (q's error) − (x's error), so
  // the largest over values bounds the L∞ distance; less 1e-6 of the magnitudes for float
  // rounding, of this sum and of the distance itself (a few units in the last place, each
  // under 1.2e-7 of them).
  const float shared_error = std::nextafter(static_cast<float>(query_error), std::numeric_limits<float>::infinity()) +
                             1e-6f * magnitude;
  for (std::size_t row = 0; row < labels_.size(); ++row) {
    const float bound = code_step_ * levels[row] - code_error_[row] - shared_error;
    out[row] = bound > 0 ? bound : 0;
  }
}

std::optional<float> VectorIndex::distance_now(std::size_t row, std::int64_t label, const float* query,
                                               std::size_t compared) const {
  if (row >= labels_.size() || labels_[row] != label) {
    // Moved into another row by a removal since the scan began, or removed itself.
    auto found = row_of_label_.find(label);
    if (found == row_of_label_.end()) return std::nullopt;
    row = found->second;
  }
  float distance = 0;
  linf_distances(vectors_.data() + row * dimension_, 1, dimension_, compared, query, &distance);
  return distance;
}

void VectorIndex::Scan::gather(std::size_t wanted) {
  // The sample's bounds above the ceiling stand for the rows not gathered yet; the new
  // ceiling is the one at their share `wanted` / rows left, with a margin, so that a tier
  // usually holds enough. Too few only costs another tier; the order never depends on it.
  const auto above = gathered_any_ ? std::upper_bound(sample_.begin(), sample_.end(), ceiling_) : sample_.begin();
  const std::size_t left = labels_.size() - rows_gathered_, sample_left = static_cast<std::size_t>(sample_.end() - above);
  const double share = 1.5 * static_cast<double>(wanted) / static_cast<double>(std::max<std::size_t>(1, left));
  const std::size_t rank = static_cast<std::size_t>(share * static_cast<double>(sample_left));
  const bool everything = rank >= sample_left;
  const float ceiling = everything ? std::numeric_limits<float>::infinity() : *(above + static_cast<std::ptrdiff_t>(rank));
  {
    std::shared_lock lock(index_->mutex_);
    for (std::size_t row = 0; row < bounds_.size(); ++row) {
      const float bound = bounds_[row];
      if ((gathered_any_ && !(bound > ceiling_)) || bound > ceiling) continue;
      ++rows_gathered_;
      if (const std::optional<float> d = index_->distance_now(row, labels_[row], query_.data(), compared_)) {
        gathered_.push_back({labels_[row], *d});
      } else {
        --total_;
      }
    }
  }
  // Once every row is gathered, every distance is known: all are ready to hand out.
  ceiling_ = rows_gathered_ == labels_.size() ? std::numeric_limits<float>::infinity() : ceiling;
  gathered_any_ = true;
}

std::span<const Neighbour> VectorIndex::Scan::next(std::size_t count) {
  auto ready_end = gathered_.end();
  while (true) {
    // Ready: gathered rows no farther than the ceiling, which every row not gathered is
    // bounded above. They go first.
    ready_end = std::partition(gathered_.begin() + static_cast<std::ptrdiff_t>(handed_out_), gathered_.end(),
                               [&](const Neighbour& n) { return n.distance <= ceiling_; });
    const std::size_t ready = static_cast<std::size_t>(ready_end - (gathered_.begin() + static_cast<std::ptrdiff_t>(handed_out_)));
    if (ready >= count || rows_gathered_ == labels_.size()) break;
    // Tiers at least double what has been gathered, so an exhaustive walk takes O(log n) tiers.
    gather(std::max({count - ready, rows_gathered_, std::size_t{2048}}));
  }
  const auto first = gathered_.begin() + static_cast<std::ptrdiff_t>(handed_out_);
  const std::size_t taken = std::min(count, static_cast<std::size_t>(ready_end - first));
  const auto end = first + static_cast<std::ptrdiff_t>(taken);
  // Select the `taken` nearest of the ready rows, then order them (ties by label, so scans repeat).
  if (end != ready_end) std::nth_element(first, end, ready_end, nearer);
  std::sort(first, end, nearer);
  handed_out_ += taken;
  return {gathered_.data() + handed_out_ - taken, taken};
}

}  // namespace waymark
