// Internal to index/: what a Collection holds, shared by collection.cc (storage), refit.cc
// (landmark generations) and query_planner.cc (queries).
#pragma once

#include <rocksdb/db.h>
#include <rocksdb/write_batch.h>

#include <atomic>
#include <condition_variable>
#include <future>
#include <memory>
#include <mutex>
#include <optional>
#include <shared_mutex>
#include <span>
#include <string>
#include <thread>
#include <unordered_map>
#include <vector>

#include "index/collection.h"
#include "index/resident_copy.h"
#include "index/vector_index.h"
#include "sketch/landmarks/sketcher.h"

namespace waymark {

// One landmark generation: the landmarks, the sketcher built on them and the vector index of
// every stored shape's index vector (below, under L∞). A query takes one
// shared_ptr<Generation> at its start and uses only it, so it never compares sketches of two
// generations, even while a refit switches generations under it.
//
// An index vector is the shape's raw landmark distances (sketcher.unweighted(sketch)), then
// the first and last vertex of its curve (curve_ends) in the collection's frame, x and y,
// relative to the landmark domain's centre: zeros when the shape is not one curve. Each raw
// distance difference bounds d_H and d_F from below; each coordinate difference bounds only
// d_F and discrete d_F (a coupling pairs first with first, last with last), so scans compare
// the first compared_dimensions(metric) values. Why the ends: rings or strokes that trace
// the same figure from different start points are near under the landmark distances but far
// under Fréchet, and without the ends their true Fréchet neighbours can rank outside the
// candidates (DejaVu glyph rings: fast-mode recall 0.926–0.937 without, see
// tests/index/real_shapes_test.cc). The ends are derived from the shape record, never stored.
struct Generation {
  Generation(const LandmarkSet& landmarks, IndexKind kind, const ApproximateIndexSettings& settings);
  std::uint64_t number() const { return sketcher.landmarks().generation; }
  static constexpr std::size_t kCurveEndValues = 4;
  std::size_t landmark_count() const { return sketcher.dimension(); }
  std::size_t dimension() const { return landmark_count() + kCurveEndValues; }
  // How many leading index-vector values bound `metric` from below.
  std::size_t compared_dimensions(Metric metric) const;
  // Appends the index vector of `shape` given its sketch in this generation; `shape` is as
  // stored (placed in `frame` here) or already framed (pass Frame::absolute).
  void append_index_vector(std::span<const float> sketch, const Shape& shape, Frame frame, std::vector<float>& out) const;
  // Every change goes to both indexes (writers hold the collection's labels_mutex exclusively).
  Status add(std::span<const std::int64_t> labels, std::span<const float> index_vectors);
  Status remove(std::span<const std::int64_t> labels);
  Sketcher sketcher;
  VectorIndex index;  // internally locked: add/remove while queries search
  // Graph and partitioned collections only. It compares the landmark distances (under L∞ in a
  // graph, weighted under L2 in partitions) for every metric; fast mode re-ranks its candidates
  // by the L∞ bound of the query's metric, curve ends included for Fréchet
  // (index/query_planner.cc, run_query).
  std::unique_ptr<ApproximateIndex> approximate;
  Point origin;  // the landmark domain's centre: keeps the coordinates' float rounding small
};

// One stored shape as decoded from its record and its index vector of one generation.
struct StoredShape {
  std::string id;
  std::int64_t label = 0;
  Shape shape;  // as given by decode_record; in the collection's frame from State::load
  // The index vector in one generation (Generation::append_index_vector), as the vector index
  // holds it; empty from decode_record, filled by State::load.
  std::vector<float> raw;
  std::string metadata;
  // Set by a query when the shape's float copy passed the decision procedure (at a threshold a
  // little wider than the query's): deciding again on these doubles would almost surely pass
  // too, so the query goes straight to the exact value.
  bool passed_copy_decision = false;
};

struct Collection::State {
  std::string directory;
  // Fixed at open except settings.landmarks (the current generation's, replaced by a refit under
  // labels_mutex): the other fields are read without a lock and must never be assigned again.
  CollectionSettings settings;
  std::unique_ptr<rocksdb::DB> database;

  mutable std::shared_mutex labels_mutex;  // guards the maps, next_label, settings.landmarks and `current`
  std::shared_ptr<Generation> current;
  std::unordered_map<std::string, std::int64_t> label_of_id;
  // What a label stands for: the id it is stored under and, capacity allowing, a float copy of
  // the shape in the collection's frame (removed with the label).
  struct Labelled {
    std::string id;
    ResidentCopy copy;
  };
  std::unordered_map<std::int64_t, Labelled> shape_of_label;
  std::int64_t next_label = 1;

  std::mutex write_mutex;  // writes are serialised; also guards the refit fields below
  // Group commit of concurrent upserts (collection.cc): batches wait in commit_queue until a
  // caller that finds no commit in progress commits them all.
  struct PreparedUpsert;
  std::mutex commit_mutex;
  std::condition_variable commit_turn;
  std::vector<PreparedUpsert*> commit_queue;  // guarded by commit_mutex
  bool committing = false;                    // guarded by commit_mutex
  // Writes the group in one synced WriteBatch under write_mutex, then applies each batch to
  // the indexes and maps in order; one status per batch (a failed write fails them all).
  std::vector<Status> commit(std::span<PreparedUpsert* const> group);
  // While a refit runs: the generation being built, and the last shape key it has sketched
  // (writes to ids at or before it sketch into `pending` themselves, later ones are left to
  // the refit).
  std::shared_ptr<Generation> pending;
  std::string pending_covered_up_to;
  std::mutex refit_mutex;  // one refit at a time

  // Graph and partitioned collections: a thread that builds the current generation's
  // approximate index whenever one is due; woken by writes.
  std::thread builder;
  std::mutex builder_mutex;
  std::condition_variable builder_wake;
  bool builder_stop = false;       // guarded by builder_mutex
  bool builder_check_due = false;  // guarded by builder_mutex: a write may have made a build due
  void wake_builder();             // after a write
  std::mutex build_mutex;     // one build at a time (the thread, or build_approximate_index_now)
  Status build_approximate_index_if_due();  // and writes its snapshot
  // Float copies of the shapes an open found are made after it, on a thread of their own
  // (make_copies_after_open in collection.cc), so that a restart serves queries without
  // waiting for them; until a shape has its copy, its candidates are read from the store.
  // Set by the destructor to end that work early; `copying` is ready once it has ended.
  std::atomic<bool> stop_copying{false};
  std::shared_future<void> copying;
  std::string approximate_snapshot_path() const { return directory + "/approximate-index.snapshot"; }

  std::shared_ptr<Generation> current_generation() const {
    std::shared_lock lock(labels_mutex);
    return current;
  }
  // The shape framed for queries and its sketch in `generation`; not_found if the id is not
  // stored, or no longer holds `label` when one is given (replaced since an index search).
  Result<StoredShape> load(const std::string& id, const Generation& generation,
                           std::optional<std::int64_t> label = std::nullopt) const;
  Result<StoredShape> load_as_given(const std::string& id) const;
};

// Store keys (index/STORE_FORMAT.md).
std::string shape_key(const std::string& id);
// The id in a record key (shape_key(id)); the key must be one.
std::string id_of_shape_key(const rocksdb::Slice& key);
std::string sketch_key(std::uint64_t generation, const std::string& id);
std::string sketch_prefix(std::uint64_t generation);
// A sketch value: the record's label (u64) then the floats.
std::string encode_sketch(std::int64_t label, std::span<const float> sketch);
Status from_rocksdb(const rocksdb::Status& status, const std::string& doing);
rocksdb::WriteOptions durable_write();  // synced: returns once on disk
void put_manifest(rocksdb::WriteBatch& batch, const CollectionSettings& settings);

Result<StoredShape> decode_record(const std::string& id, std::string_view bytes, const ShapeLimits& limits);

}  // namespace waymark
