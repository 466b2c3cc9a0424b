// The approximate vector index of a graph or partitioned collection, for fast-mode candidates
// on large collections: FAISS's HNSW graph (IndexHNSWFlat) over the raw landmark distances
// under L∞, the order of the sketch lower bound itself, or inverted lists (IndexIVFFlat,
// k-means partitions) over the weighted landmark distances under L2 (k-means needs L2).
// (Exact mode and range queries always walk the exhaustive L∞ index, index/vector_index.h,
// which every collection keeps: only that walk can certify an answer.)
//
// Built in the background from a copy of the exhaustive index (build()), then swapped in
// whole. Writes never wait for a graph insertion: vectors added since the copy sit in a small
// exhaustive "fresh" index searched beside the built one, so they are found at once; removed
// labels stay in the built index as tombstones that the query planner skips (it finds no
// shape under them). A rebuild is due when fresh vectors and tombstones together pass a
// fraction of the built size (also how IVF is retrained as the collection grows).
//
// Candidates are in approximate order, so answers drawn from here are never certified.
// Thread safety: every member may be called concurrently; build() runs outside any lock and
// takes the exclusive lock only to swap.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <istream>
#include <memory>
#include <shared_mutex>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "index/vector_index.h"
#include "sketch/status.h"

namespace faiss {
struct Index;
}

namespace waymark {

enum class IndexKind { exhaustive, graph, partitioned };
const char* index_kind_name(IndexKind kind);
Result<IndexKind> parse_index_kind(const std::string& name);

struct ApproximateIndexSettings {
  std::size_t minimum_size = 2000;     // below this, fast mode walks the exhaustive index
  double rebuild_fraction = 0.10;      // fresh + tombstones past this share of the built size
  std::size_t graph_neighbours = 32;   // HNSW M
  std::size_t graph_build_effort = 40; // HNSW efConstruction
};

struct ApproximateIndexStatus {
  bool built = false;
  // How the collection's last open got it: "none" (nothing to load), "loaded" (from the
  // snapshot, then caught up), or "rebuilding: <why the snapshot was not used>".
  std::string snapshot = "none";
  std::size_t built_size = 0;   // vectors in the built index, tombstones included
  std::size_t fresh = 0;        // added since the build's copy, searched exhaustively
  std::size_t tombstones = 0;   // removed since the build's copy
  std::size_t builds = 0;
  double last_build_seconds = 0;
};

class ApproximateIndex {
 public:
  // kind is graph or partitioned. Raw vectors have `dimension` values; the index compares the
  // first root_weights.size() (≤ dimension) of them: as they are (graph), or each times its root
  // weight sqrt(w_i) (partitioned).
  ApproximateIndex(IndexKind kind, std::vector<double> root_weights, std::size_t dimension,
                   ApproximateIndexSettings settings = {});
  ~ApproximateIndex();
  ApproximateIndex(const ApproximateIndex&) = delete;
  ApproximateIndex& operator=(const ApproximateIndex&) = delete;

  IndexKind kind() const { return kind_; }
  // Writers report every change they make to the exhaustive index (raw, unweighted vectors).
  Status added(std::span<const std::int64_t> labels, std::span<const float> raw_vectors);
  void removed(std::span<const std::int64_t> labels);

  bool ready() const;          // a built index exists
  bool rebuild_due(std::size_t stored) const;
  // Builds the FAISS index from a copy of the exhaustive index (VectorIndex::copy(), taken by
  // the caller while no writer changes it) and swaps it in; fresh vectors that the copy holds
  // leave the fresh index. O(n log n) for the graph, O(n · partitions) for IVF: seconds to
  // minutes, with no lock held until the swap.
  Status build(const VectorIndex::Contents& copy);

  // Up to `count` candidates from the built index (approximate L∞ or L2 order) followed by up to
  // `count` from the fresh index (L∞ order). A graph's candidates, and the fresh ones, come with
  // the exact L∞ distance over the first max(bound_values, compared) raw values, as the
  // exhaustive index computes it (the graph keeps the values it does not compare, by row);
  // partitions' built candidates come with their weighted L2 distance, fresh ones with L∞ over
  // the compared values. failed_precondition when nothing is built.
  Result<std::vector<Neighbour>> candidates(std::span<const float> raw_query, std::size_t count,
                                            std::size_t bound_values = 0) const;

  // Candidates in steps, for a caller that decides after each step whether it wants more (the
  // query planner's fast mode). On a graph the walk is continued where it stopped, not begun
  // again: the nodes it passed over or dropped from its ef nearest come back into play, and
  // it walks on until it keeps the new count. A partitioned index searches again. Holds the
  // index's shared lock only inside next(); a walk that finds the built index swapped since
  // it began (a rebuild, a restore) takes no more candidates from it, and the fresh index's
  // part goes on. The walk must stay on the thread that began it, and live no longer than
  // this index.
  class CandidateWalk {
   public:
    CandidateWalk(CandidateWalk&&) noexcept;
    CandidateWalk& operator=(CandidateWalk&&) = delete;
    ~CandidateWalk();
    // The candidates, as candidates(raw_query, count, bound_values) describes them, that the
    // first `count` of either index hold and no earlier call returned; each label once.
    // Larger counts widen the walk; a count no larger than before returns nothing.
    Result<std::vector<Neighbour>> next(std::size_t count);
    // The distance (L∞ over the compared values) of the last graph candidate handed out, while
    // the walk may find more: nodes not handed out are likely (not certainly: the walk is
    // approximate) at least this far. Or, where it is smaller, the last fresh candidate's
    // distance (fresh ones come in exact order). ∞ when neither index can give more, and 0 on a
    // partitioned index, whose lists say nothing of it.
    float frontier() const;

   private:
    friend class ApproximateIndex;
    struct State;
    explicit CandidateWalk(std::unique_ptr<State> state);
    std::unique_ptr<State> state_;
  };
  // failed_precondition when nothing is built.
  Result<CandidateWalk> walk(std::span<const float> raw_query, std::size_t bound_values = 0) const;

  // Streams the built index as a snapshot file (index/STORE_FORMAT.md, "Approximate index
  // snapshot"), tagged with `generation`, to `sink` in pieces: no copy of the whole file is
  // ever held (a graph of a million shapes is hundreds of MB). Holds the index's shared lock
  // meanwhile: queries and fresh writes go on, a finished rebuild waits to swap in.
  // failed_precondition when nothing is built; the sink's first error otherwise.
  using ByteSink = std::function<Status(std::string_view)>;
  Status write_snapshot(std::uint64_t generation, const ByteSink& sink) const;
  // A snapshot file read and checked but not in use yet. Restoring takes two steps so that
  // reading the file (seconds at a million shapes) can overlap the store's scan at an open.
  struct Snapshot {
    Snapshot();
    Snapshot(Snapshot&&) noexcept;
    Snapshot& operator=(Snapshot&&) noexcept;
    ~Snapshot();
    std::unique_ptr<faiss::Index> index;
    std::vector<std::int64_t> labels;  // FAISS's sequential ids → labels
    std::size_t partitions = 0;
  };
  // Reads a snapshot written for `generation` from `in`, which must be seekable: the checksum
  // is verified in a first pass, before anything is parsed. data_loss for a damaged file,
  // failed_precondition for one of another kind, generation, vector length or graph metric
  // (the weighted L2 graphs of builds before 2026-12-05 are rebuilt). Reads only what
  // never changes here, so it may run on another thread while this index is filled.
  Result<Snapshot> read_snapshot(std::istream& in, std::uint64_t generation) const;
  // Replaces the built index with `snapshot`, then catches up with `all` (the exhaustive index
  // as stored now): stored vectors the snapshot lacks become fresh, snapshot vectors no longer
  // stored become tombstones. O(n).
  Status restore(Snapshot snapshot, const VectorIndex::Contents& all);
  // Records how the last open went (ApproximateIndexStatus::snapshot).
  void set_snapshot_note(std::string note);
  std::int64_t largest_label() const;  // in the built index; 0 when none

  ApproximateIndexStatus status() const;
  std::size_t memory_bytes() const;

 private:
  // The compared values of each raw vector in `raw` as the built index holds them:
  // root_weights_.size() per vector, weighted for a partitioned index.
  std::vector<float> compared_values(std::span<const float> raw) const;
  // The values of each raw vector after the compared ones, in order.
  std::vector<float> uncompared_values(std::span<const float> raw) const;

  IndexKind kind_;
  std::vector<double> root_weights_;
  ApproximateIndexSettings settings_;
  mutable std::shared_mutex mutex_;
  std::unique_ptr<faiss::Index> built_;        // guarded by mutex_
  std::vector<std::int64_t> label_of_row_;     // FAISS's sequential ids → labels
  // A graph's raw values after the compared ones, row by row (the curve ends, which bound the
  // Fréchet metrics), so that candidates need no lookup in the exhaustive index for them.
  std::vector<float> uncompared_of_row_;
  std::size_t partitions_ = 0;
  VectorIndex fresh_;                          // internally locked
  std::atomic<std::size_t> tombstones_{0};
  std::atomic<std::size_t> builds_{0};
  std::uint64_t swaps_ = 0;  // guarded by mutex_: how often built_ was replaced
  std::atomic<double> last_build_seconds_{0};
  std::string snapshot_note_ = "none";  // guarded by mutex_
};

}  // namespace waymark
