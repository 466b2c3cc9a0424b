// A durable shape collection and its query engine.
//
// A collection lives in its own directory: a RocksDB database holding a manifest (frame,
// landmark set, limits), one record per shape (its caller id, geometry as given, index label,
// metadata JSON) and each shape's sketch vector in the current landmark generation; layout in
// index/STORE_FORMAT.md. The vector index is derived: open() rebuilds it from the stored
// sketches.
//
// Writes: upsert() and remove() apply a whole batch or nothing, and return only after the
// batch is synced to disk (RocksDB WriteBatch with sync). An upsert checks, encodes and
// sketches its batch on the caller's thread without a lock; concurrent upserts are then
// committed in groups (one synced WriteBatch for every batch waiting, applied to the indexes
// in arrival order; a failed write fails each batch of its group, and none is applied).
// Commits and removes are serialised; queries run concurrently with each other and with
// writes, and a write becomes visible to queries once upsert() returns.
//
// Landmark generations: the sketches of every shape are kept per landmark generation; a
// refit() builds the next generation beside the current one and switches atomically.
//
// Queries (nearest): candidates come from the exhaustive L∞ index over raw landmark distances,
// in order of that L∞ value, which is a lower bound on the exact distance; each is checked
// against lower bounds (the sketch L∞ bound, the bounding-box bound and, for Fréchet, the
// endpoint bound) and against the decision procedure at the current k-th best before its
// exact distance is computed; the decision is first made on an in-memory float copy of the
// shape, so that most refused candidates are never read from the store
// (index/resident_copy.h). Every unseen shape's distance is at least the last candidate's
// L∞ value; once that exceeds the k-th best exact distance the answer is certified exact: no
// stored shape outside it is closer. (Metric::sketch ranks the drawn candidates by sketch L2:
// an estimate, certified only when every shape was drawn.) Both modes draw candidates in
// growing rounds until the answer is certified or the budget is spent; they differ only in the
// default budget (exact: every stored shape; fast: 100·k for the Fréchet metrics and on
// partitioned collections, 150·k for both, 40·k otherwise; on a graph a ceiling: 20·k are
// taken first, and more only while the candidates' frontier could still be within the k-th
// best distance). An uncertified answer can miss closer shapes.
#pragma once

#include <atomic>
#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "index/approximate_index.h"
#include "sketch/geometry/shape.h"
#include "sketch/landmarks/landmark_set.h"
#include "sketch/status.h"

namespace waymark {

enum class Metric { hausdorff, frechet, discrete_frechet, sketch };
const char* metric_name(Metric metric);
Result<Metric> parse_metric(const std::string& name);

struct CollectionSettings {
  Frame frame = Frame::unit;
  LandmarkSet landmarks;
  ShapeLimits limits;
  std::size_t max_id_bytes = 256;
  std::size_t max_metadata_bytes = 16 * 1024;
  // For callers that name none (the server). It does not shape any index: fast mode scores a
  // graph or partitioned index's candidates by the query metric's own bound.
  Metric default_metric = Metric::hausdorff;
  // exhaustive: every query walks the L∞ index. graph / partitioned: fast-mode queries take
  // their candidates from an approximate index (index/approximate_index.h) once the collection
  // has ApproximateIndexSettings::minimum_size shapes; exact mode and range queries still walk
  // the exhaustive index.
  IndexKind index_kind = IndexKind::exhaustive;
  ApproximateIndexSettings approximate;  // not persisted: the defaults, or what the opener sets
};

struct ShapeRecord {
  std::string id;
  Shape shape;                 // as given by the caller; stored so, framed only for comparison
  std::string metadata = "{}";  // a JSON object, as text
};

struct QueryOptions {
  std::size_t k = 10;
  Metric metric = Metric::hausdorff;
  bool exact = false;
  // Candidates drawn from the vector index at most; 0 = the default (in fast mode 100·k for
  // the Fréchet metrics and on a partitioned collection, 150·k for both, 40·k otherwise, on a
  // graph a ceiling, above; every stored shape in exact mode). In fast
  // mode on a graph or partitioned collection this trades speed for recall
  // (index/query_planner.cc, kFastCandidatesPerHit, has measured figures).
  std::size_t candidate_budget = 0;
  // A JSON object (as text); only shapes whose metadata has each of its members with an equal
  // value are considered. Empty or "{}": no filter. Anything but an object is invalid_argument.
  std::string metadata_filter;
};

struct RangeOptions {
  double radius = 0;  // shapes at exact distance ≤ radius; ≥ 0 and finite
  Metric metric = Metric::hausdorff;  // an exact metric; Metric::sketch is invalid_argument
  std::size_t max_results = 1000;  // more matches than this: the first found, not certified
  std::string metadata_filter;  // as in QueryOptions
};

struct QueryHit {
  std::string id;
  double distance;         // exact, under the query's metric (sketch distance for Metric::sketch)
  double sketch_distance;  // L2 between sketches
  std::string metadata;
};

struct QueryStats {
  // Candidates taken from the vector indexes, in lower-bound order (exhaustive) or the
  // approximate index's order (fast mode on a graph or partitions), tombstones included.
  std::size_t candidates_drawn = 0;
  std::size_t candidates_fetched = 0;  // records read from the store
  std::size_t pruned_by_sketch_bound = 0;
  std::size_t pruned_by_box_or_endpoint_bound = 0;
  std::size_t pruned_by_decision = 0;
  std::size_t exact_evaluations = 0;
  std::size_t not_applicable = 0;  // stored shapes the metric does not apply to (Fréchet on several parts)
  std::size_t filtered_out = 0;    // candidates whose metadata did not match the filter
  // Time spent in the vector indexes: the graph's or partitions' search and the candidates'
  // lower-bound order (fast mode), or the exhaustive index's scan rounds. The rest of a query's
  // time is the bounds, decisions, store reads and exact distances.
  double index_milliseconds = 0;
};

struct QueryAnswer {
  std::vector<QueryHit> hits;  // nearest first
  QueryStats stats;
  // kNN: true when no stored shape outside `hits` is closer than the last hit.
  // Range: true when `hits` holds every stored shape within the radius (none left out).
  bool certified = false;
};

// Landmark refit: new landmarks fitted by sensitivity sampling (sketch/landmarks/fitting.h)
// on a seeded sample of stored shapes, over the current landmarks' domain.
struct RefitOptions {
  std::size_t landmark_count = 0;  // 0: as many as the current generation has
  std::size_t sample_size = 1000;  // stored shapes the fit looks at (all, when fewer are stored)
  std::size_t candidate_count = 1024;
  std::size_t pair_count = 2000;
  std::uint64_t seed = 1;
  std::size_t batch_size = 500;  // shapes re-sketched per step (each step holds the write lock)
};

// Written by a running refit, readable from any thread.
struct RefitProgress {
  std::atomic<std::size_t> shapes_done{0};
  std::atomic<std::size_t> shapes_total{0};  // stored shapes when re-sketching began
  std::atomic<bool> cancel{false};           // set to abandon the refit; the old generation stays
};

struct CollectionStatistics {
  std::size_t shape_count = 0;
  ApproximateIndexStatus approximate;  // all zero for exhaustive collections
  std::size_t index_bytes = 0;          // vector index and id maps, in memory (estimate)
  std::size_t resident_copy_bytes = 0;  // float copies of the shapes, in memory (resident_copy_bytes())
  // True while the float copies of the shapes that open() found are still being made (after
  // it, on a thread of their own): queries meanwhile give the same answers with more store reads.
  bool making_resident_copies = false;
  std::size_t store_bytes = 0;          // RocksDB files on disk and memtables (estimate)
  std::size_t memtable_bytes = 0;       // of which memtables: writes not yet flushed, in memory
  std::size_t table_reader_bytes = 0;   // RocksDB's in-memory index and filter blocks of its files
  std::int64_t last_write_unix_ms = 0;  // 0 when nothing was ever written
};

// Bytes held now by the block cache that every collection of this process shares (store blocks
// read by queries, least recently used first out), and its capacity.
std::size_t shared_block_cache_bytes();
std::size_t shared_block_cache_capacity();
// Sets that capacity (512 MiB until set); shrinking evicts at once. Thread-safe.
void set_shared_block_cache_capacity(std::size_t bytes);
// Bytes held now by the in-memory float copies of stored shapes that every collection of this
// process keeps (queries refuse most candidates on them without a store read;
// index/resident_copy.h), and their capacity. A shape that would pass the capacity gets no copy
// (its candidates are read from the store); lowering it drops no copy already made.
std::size_t resident_copy_bytes();
std::size_t resident_copy_capacity();
void set_resident_copy_capacity(std::size_t bytes);  // 1 GiB until set; thread-safe

class Collection {
 public:
  // Creates a new collection in an empty or missing directory; already_exists if one is there.
  // Atomic: built in "<directory>.creating" and renamed into place.
  static Result<std::unique_ptr<Collection>> create(const std::string& directory, const CollectionSettings& settings);
  // Opens an existing collection and rebuilds its vector index from the stored sketches.
  // not_found when the directory holds no collection (nothing is created then). The float
  // copies of the stored shapes (index/resident_copy.h) are made after it returns, on a thread
  // of their own: queries can run at once, with the same answers (statistics() says when the
  // copies are done; wait_for_resident_copies() waits for them).
  static Result<std::unique_ptr<Collection>> open(const std::string& directory,
                                                  const ApproximateIndexSettings& approximate = {});
  ~Collection();

  // A copy: a refit changes settings().landmarks (a new generation).
  CollectionSettings settings() const;
  std::size_t size() const;
  CollectionStatistics statistics() const;

  // Would `record` be accepted by upsert()? The same checks, with where() naming the field
  // ("id", "metadata") or the vertex. Lets a bulk loader set bad records aside one by one.
  Status check(const ShapeRecord& record) const;
  // All or nothing. invalid_argument names the record ("record 3 (id 'x'): ..."); nothing is
  // written then. A later record with the same id as an earlier one in the batch wins.
  Status upsert(std::span<const ShapeRecord> batch);
  // Ids that are not stored are ignored. All or nothing, durable on return.
  Status remove(std::span<const std::string> ids);
  Result<ShapeRecord> get(const std::string& id) const;
  // Up to `limit` records with ids after `after` in byte order ("" = from the first): pages
  // for export. A page is read from one consistent view of the store.
  Result<std::vector<ShapeRecord>> list(const std::string& after, std::size_t limit) const;

  // The query shape is given in input coordinates; the collection's frame is applied to it.
  Result<QueryAnswer> nearest(const Shape& query, const QueryOptions& options) const;
  // "More like this": nearest to a stored shape, excluding that shape.
  Result<QueryAnswer> nearest_to_stored(const std::string& id, const QueryOptions& options) const;
  // Every stored shape within options.radius of the query, nearest first. Candidates are drawn
  // from the exhaustive L∞ index until the next one's lower bound exceeds the radius, so the
  // answer is complete (certified) unless max_results was reached.
  Result<QueryAnswer> within(const Shape& query, const RangeOptions& options) const;
  // The baseline: exact distance to every stored shape. O(n) exact evaluations.
  Result<QueryAnswer> nearest_by_full_scan(const Shape& query, const QueryOptions& options) const;

  // Graph and partitioned collections build their approximate index on a background thread;
  // this builds it now if one is due and waits (tests, benchmarks). No-op for exhaustive ones.
  Status build_approximate_index_now();
  // Returns once the float copies that open() started making are made (or given up at the
  // copy capacity): benchmarks and tests that count store reads or copy bytes need them in
  // place. At once for a created collection and when the capacity is 0.
  void wait_for_resident_copies() const;
  // Rewrites the store's files now (a flush, then a compaction of every key): the space of
  // replaced and deleted shapes is reclaimed at once instead of whenever RocksDB gets to it.
  // Takes time in proportion to the store; reads and writes go on meanwhile. A crash part-way
  // leaves the store as it was (RocksDB switches to the new files in one manifest write).
  Status compact_store();

  // Fits a new landmark generation and re-sketches every stored shape into it, then switches
  // to it in one durable write; returns the new generation number. Blocks for O(n) sketches:
  // run it on a thread of its own. Meanwhile reads, queries and writes go on (each query uses
  // one generation from start to end; writes are held for at most one batch step). A crash or
  // an error before the switch leaves the old generation serving and its leftovers are removed
  // by the next open(). Errors: failed_precondition when another refit of this collection is
  // running, when progress.cancel was set (nothing changes), or with fewer than two stored
  // shapes; the fitting's own errors; io_error from the store.
  Result<std::uint64_t> refit(const RefitOptions& options, RefitProgress& progress);

  // Opaque to callers; defined in index/collection_state.h for the index module's own files.
  struct State;

 private:
  explicit Collection(std::unique_ptr<State> state);
  std::unique_ptr<State> state_;
};

}  // namespace waymark
