// The exhaustive vector index: every stored vector, keyed by a 64-bit label, ranked by L∞
// (max-coordinate) distance to a query.
//
// Exhaustive means a scan ranks every stored vector, so the n-th vector handed out is the n-th
// nearest exactly; the query planner relies on that to certify answers. Collections store raw
// (unweighted) landmark distances here: their L∞ difference is itself a lower bound on d_H and
// d_F, so candidates arrive in lower-bound order.
//
// Why not FAISS's IndexFlat with METRIC_Linf: Debian's FAISS 1.7.3 computes L∞ with a scalar
// loop that calls libm's fmax for every coordinate; it took 58% of a 10,000-shape query's time
// (perf, 2026-12-02). The kernel here is vectorised (AVX-512 / AVX2 / baseline clones) and
// scans once per query, handing out neighbours in growing batches instead of searching again
// for each batch. FAISS serves the graph index (HNSW) kind, where it is not the bottleneck.
//
// Storage: one contiguous array of n × dimension floats; removal moves the last vector into
// the hole (O(dimension)). Beside it, each vector as one byte per value (value j as the level
// nearest it on a scale from low_j in steps shared by every value), with the vector's largest
// coding error: a scan reads these, a quarter of the bytes, for a lower bound on every
// vector's distance, and computes exact distances only for the vectors whose bound comes up
// (at 1M the pass over the floats was memory-bound). The scale is fitted to the stored values
// with some room; a value outside it takes the nearest end level, and its vector's error
// says so (its bound is weak, never wrong); once many are, the scale is fitted again.
// Thread safety: scan(), vector_of(), size() may run concurrently; add() and remove() take an
// exclusive lock.
#pragma once

#include <cstdint>
#include <optional>
#include <shared_mutex>
#include <span>
#include <unordered_map>
#include <vector>

#include "sketch/status.h"

namespace waymark {

struct Neighbour {
  std::int64_t label;
  float distance;  // L∞ between the vectors, computed in float (exact max of rounded differences)
};

class VectorIndex {
 public:
  explicit VectorIndex(std::size_t dimension) : dimension_(dimension) {}
  VectorIndex(const VectorIndex&) = delete;
  VectorIndex& operator=(const VectorIndex&) = delete;

  std::size_t dimension() const { return dimension_; }
  std::size_t size() const;
  struct Contents {
    std::vector<std::int64_t> labels;
    std::vector<float> vectors;  // labels.size() × dimension
  };
  Contents copy() const;  // every stored vector, for building other indexes from
  // Memory held by the vectors, their labels and the label map, in bytes (estimate).
  std::size_t memory_bytes() const;

  // vectors.size() == labels.size() × dimension(). A label already present is invalid (internal).
  Status add(std::span<const std::int64_t> labels, std::span<const float> vectors);
  // Labels that are not present are ignored.
  Status remove(std::span<const std::int64_t> labels);
  // The vector stored under `label`; not_found when no vector has that label. O(dimension).
  Result<std::vector<float>> vector_of(std::int64_t label) const;
  // The L∞ distance over the first `compared` coordinates (0: all) from `query` to the vector
  // of each of `labels` that has one, in order; labels without a vector are left out. One
  // lock and no copies: a query ranks hundreds of candidates this way. O(labels · compared).
  Result<std::vector<Neighbour>> distances_to(std::span<const std::int64_t> labels, std::span<const float> query,
                                              std::size_t compared = 0) const;

  // The distances from one query to every vector stored when the scan began, handed out
  // nearest first (equal distances by label). Later adds do not change a scan; a vector
  // removed after it began may be left out (never handed out with another's distance).
  // Every scan of an index must end before the index does.
  class Scan {
   public:
    // The next `count` nearest (fewer at the end), in order. The scan bounds every vector's
    // distance from below by its byte codes, then gathers rows in tiers of bound, each about
    // twice as many rows as handed out before it, with their exact distances; a row is handed
    // out once every row not gathered is bounded above its distance. So a query that stops
    // early pays one O(n) pass over the codes and exact distances for a few rows. O(n) per
    // tier plus O(g log g) for the g rows gathered.
    std::span<const Neighbour> next(std::size_t count);
    bool exhausted() const { return handed_out_ == total_; }
    std::size_t total() const { return total_; }

   private:
    friend class VectorIndex;
    // Gathers every row whose bound lies above ceiling_ and at most a new ceiling, chosen
    // from sample_ so that about `wanted` rows qualify (all rows once the sample runs out),
    // with their exact distances (under the index's shared lock; a row removed since the scan
    // began is dropped).
    void gather(std::size_t wanted);
    const VectorIndex* index_ = nullptr;
    std::vector<float> query_;
    std::size_t compared_ = 0;
    std::size_t total_ = 0;             // rows when the scan began, less those found removed
    std::vector<std::int64_t> labels_;  // as stored when the scan began, by row
    std::vector<float> bounds_;         // by row: at most the row's distance
    std::vector<float> sample_;         // evenly spaced bounds, ascending: to choose ceilings
    std::vector<Neighbour> gathered_;   // [0, handed_out_) handed out, in order
    std::size_t rows_gathered_ = 0;     // rows whose bound is at most ceiling_ (gathered or found removed)
    float ceiling_ = 0;                 // every row bounded above it is still to be gathered
    bool gathered_any_ = false;         // ceiling_ means nothing until the first tier
    std::size_t handed_out_ = 0;
  };
  // Distances over the first `compared` coordinates only (≤ dimension(); 0 means all), so that
  // one stored vector can carry values that bound some metrics and not others.
  // O(n · compared) for the distances. query.size() must equal dimension() (else internal).
  Result<Scan> scan(std::span<const float> query, std::size_t compared = 0) const;

 private:
  // Fills out[row] with a lower bound on each row's L∞ distance to `query` (first `compared`
  // values, as linf_distances computes it), from the codes. Caller holds the lock. O(n · compared).
  void bound_all(std::span<const float> query, std::size_t compared, float* out) const;
  // The exact distance of the vector of `label` as stored at `row` when a scan began, or
  // nullopt when it has been removed since. Caller holds the lock.
  std::optional<float> distance_now(std::size_t row, std::int64_t label, const float* query, std::size_t compared) const;
  // Codes the rows from `first_row` on at the current scale.
  void encode_rows(std::size_t first_row);
  // Fits the scale to every stored value, with room, and codes every row again. O(n · dimension).
  void fit_code_scale();

  std::size_t dimension_;
  std::vector<float> vectors_;  // row i belongs to labels_[i]
  // Row i's value j is about code_low_[j] + code_step_ · codes_[i · dimension_ + j], within
  // code_error_[i] of vectors_[i · dimension_ + j].
  std::vector<std::uint8_t> codes_;
  std::vector<float> code_error_;
  std::vector<float> code_low_;
  float code_step_ = 0;
  std::size_t rows_off_scale_ = 0;  // rows with a value outside the scale (error over a step)
  std::vector<std::int64_t> labels_;
  std::unordered_map<std::int64_t, std::size_t> row_of_label_;
  mutable std::shared_mutex mutex_;
};

}  // namespace waymark
