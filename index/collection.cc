#include <rocksdb/cache.h>
#include <rocksdb/table.h>
#include <rocksdb/write_batch.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstring>
#include <deque>
#include <filesystem>
#include <fstream>
#include <future>
#include <optional>
#include <system_error>
#include <thread>
#include <nlohmann/json.hpp>

#include "index/collection_state.h"
#include "index/shape_codec.h"
#include "sketch/distance/frechet.h"
#include "sketch/durable_file.h"
#include "sketch/own_thread.h"

namespace waymark {
namespace {

using Json = nlohmann::json;

constexpr const char* kManifestKey = "manifest";
// 3: sketches under their landmark generation, beside the records (2 kept the one sketch
// inside the record; open() upgrades such a store in place).
constexpr int kFormat = 3;
constexpr int kUpgradableFormat = 2;
constexpr const char* kShapePrefix = "s/";
constexpr const char* kSketchPrefix = "v/";
constexpr const char* kAfterSketches = "v0";  // '0' follows '/' in byte order
constexpr const char* kLastWriteKey = "last_write";  // u64 milliseconds since the Unix epoch

void put_u64(std::string& out, std::uint64_t value) { out.append(reinterpret_cast<const char*>(&value), sizeof value); }

// `geometry`: encode_shape of the shape as given.
std::string encode_record(std::int64_t label, const std::string& geometry, const std::string& metadata) {
  std::string out;
  out.reserve(24 + geometry.size() + metadata.size());
  put_u64(out, static_cast<std::uint64_t>(label));
  put_u64(out, geometry.size());
  out += geometry;
  put_u64(out, 0);  // no embedded sketch (format 2 kept one here)
  out += metadata;
  return out;
}

struct DecodedSketch {
  std::int64_t label;
  std::vector<float> values;
};

Result<DecodedSketch> decode_sketch(const std::string& id, std::string_view bytes, std::size_t dimension) {
  if (bytes.size() != 8 + dimension * sizeof(float)) {
    return Status(StatusCode::data_loss, "store: sketch of '" + id + "' has " + std::to_string(bytes.size()) +
                                             " bytes, expected " + std::to_string(8 + dimension * sizeof(float)));
  }
  DecodedSketch sketch{0, std::vector<float>(dimension)};
  std::memcpy(&sketch.label, bytes.data(), 8);
  std::memcpy(sketch.values.data(), bytes.data() + 8, dimension * sizeof(float));
  return sketch;
}

Json manifest_json(const CollectionSettings& settings) {
  return {{"format", kFormat},
          {"frame", frame_name(settings.frame)},
          {"landmarks", to_landmark_file(settings.landmarks)},
          {"max_vertices", settings.limits.max_vertices},
          {"max_parts", settings.limits.max_parts},
          {"max_id_bytes", settings.max_id_bytes},
          {"max_metadata_bytes", settings.max_metadata_bytes},
          {"default_metric", metric_name(settings.default_metric)},
          {"index", index_kind_name(settings.index_kind)}};
}

struct Manifest {
  CollectionSettings settings;
  int format = kFormat;
};

Result<Manifest> parse_manifest(const std::string& text) {
  Manifest manifest;
  CollectionSettings& settings = manifest.settings;
  try {
    const Json json = Json::parse(text);
    manifest.format = json.at("format").get<int>();
    if (manifest.format != kFormat && manifest.format != kUpgradableFormat) {
      return Status(StatusCode::failed_precondition, "store: format " + json.at("format").dump() +
                                                         " is not supported (this build reads formats " +
                                                         std::to_string(kUpgradableFormat) + " and " +
                                                         std::to_string(kFormat) + ")");
    }
    Result<Frame> frame = parse_frame(json.at("frame").get<std::string>());
    if (!frame) return frame.status();
    Result<LandmarkSet> landmarks = parse_landmark_file(json.at("landmarks").get<std::string>());
    if (!landmarks) return landmarks.status();
    settings.frame = *frame;
    settings.landmarks = std::move(*landmarks);
    settings.limits.max_vertices = json.at("max_vertices").get<std::size_t>();
    settings.limits.max_parts = json.at("max_parts").get<std::size_t>();
    settings.max_id_bytes = json.at("max_id_bytes").get<std::size_t>();
    settings.max_metadata_bytes = json.at("max_metadata_bytes").get<std::size_t>();
    // Absent in manifests written before it existed: the default then.
    if (json.contains("default_metric")) {
      Result<Metric> metric = parse_metric(json.at("default_metric").get<std::string>());
      if (!metric) return metric.status();
      settings.default_metric = *metric;
    }
    if (json.contains("index")) {  // absent in manifests written before it existed: exhaustive
      Result<IndexKind> kind = parse_index_kind(json.at("index").get<std::string>());
      if (!kind) return Status(StatusCode::data_loss, "store: manifest names " + kind.status().message());
      settings.index_kind = *kind;
    }
  } catch (const std::exception& error) {
    return Status(StatusCode::data_loss, std::string("store: manifest is damaged: ") + error.what());
  }
  return manifest;
}

// Queries read a record per candidate: a block cache shared by every collection of the process
// keeps hot records in memory (RocksDB's default is 8 MB per database). 512 MB, common practice
// for a dedicated server (no source); the OS page cache backs it.
const std::shared_ptr<rocksdb::Cache>& shared_block_cache() {
  static const std::shared_ptr<rocksdb::Cache> cache = rocksdb::NewLRUCache(512ull << 20);
  return cache;
}

Result<std::unique_ptr<rocksdb::DB>> open_database(const std::string& directory, bool create) {
  rocksdb::Options options;
  options.create_if_missing = create;
  options.paranoid_checks = true;
  // A write-ahead log damaged in the middle must stop the open with an error: RocksDB's default
  // (point-in-time recovery) would silently drop every acknowledged write after the damage. A
  // torn last record, which a crash can leave, is still tolerated: it was never acknowledged.
  options.wal_recovery_mode = rocksdb::WALRecoveryMode::kTolerateCorruptedTailRecords;
  // Opening an existing store pauses automatic compaction until Collection::open has read it
  // all (resume_compactions): a compaction that the open found due (after an ingest, the
  // memtables flushed as level-0 files) otherwise ran beside the read, on the same cores and
  // disk. The first 1M-shape restart after an ingest and a graph build took 6.4 s, the next
  // ones 4.1–5.0 s, and RocksDB's log showed a 221 MB level-0 compaction starting at the first
  // open; with the pause the first took 5.3 s.
  options.disable_auto_compactions = !create;
  rocksdb::BlockBasedTableOptions table;
  table.block_cache = shared_block_cache();
  options.table_factory.reset(rocksdb::NewBlockBasedTableFactory(table));
  rocksdb::DB* raw = nullptr;
  if (Status s = from_rocksdb(rocksdb::DB::Open(options, directory, &raw), "opening '" + directory + "'"); !s.is_ok()) {
    return s;
  }
  return std::unique_ptr<rocksdb::DB>(raw);
}

// Ends the pause of automatic compaction that open_database began for an existing store.
// Anything that writes much must come after it: with compaction paused, level-0 files pile up
// until RocksDB stops writes altogether.
Status resume_compactions(rocksdb::DB& database) {
  return from_rocksdb(database.EnableAutoCompaction({database.DefaultColumnFamily()}), "resuming compactions");
}

// Runs work(begin, end) over [0, count) in two halves at once. A batch's CPU work (framing,
// encoding, float copies, sketching) is done so: while the writing thread runs, RocksDB's
// flushes and compactions leave much of a second core idle (perf, 400k-shape ingest). Small
// counts, or no thread to spare, run on the caller's thread alone.
template <typename Work>
void in_two_halves(std::size_t count, const Work& work) {
  constexpr std::size_t kSplitFrom = 128;  // below this a thread's start costs more than it saves
  if (count < kSplitFrom) return work(std::size_t{0}, count);
  const std::size_t half = count / 2;
  std::future<void> first_half = on_own_thread([&] { work(std::size_t{0}, half); });
  work(half, count);
  first_half.get();
}

std::string now_as_record() {
  const auto now = std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::system_clock::now().time_since_epoch());
  const std::uint64_t ms = static_cast<std::uint64_t>(now.count());
  return std::string(reinterpret_cast<const char*>(&ms), sizeof ms);
}

}  // namespace

rocksdb::WriteOptions durable_write() {
  rocksdb::WriteOptions options;
  options.sync = true;  // acknowledged only once on disk
  return options;
}

void put_manifest(rocksdb::WriteBatch& batch, const CollectionSettings& settings) {
  batch.Put(kManifestKey, manifest_json(settings).dump());
}

Status from_rocksdb(const rocksdb::Status& status, const std::string& doing) {
  if (status.ok()) return Status::ok();
  const StatusCode code = status.IsCorruption() ? StatusCode::data_loss : StatusCode::io_error;
  return Status(code, "store: " + doing + ": " + status.ToString());
}

std::string shape_key(const std::string& id) { return kShapePrefix + id; }

std::string id_of_shape_key(const rocksdb::Slice& key) {
  const std::size_t prefix_length = std::strlen(kShapePrefix);
  return std::string(key.data() + prefix_length, key.size() - prefix_length);
}

std::string sketch_prefix(std::uint64_t generation) {
  char hex[17];
  std::snprintf(hex, sizeof hex, "%016llx", static_cast<unsigned long long>(generation));
  return std::string(kSketchPrefix) + hex + "/";
}

std::string sketch_key(std::uint64_t generation, const std::string& id) { return sketch_prefix(generation) + id; }

std::string encode_sketch(std::int64_t label, std::span<const float> sketch) {
  std::string out;
  out.reserve(sizeof(std::uint64_t) + sketch.size() * sizeof(float));
  put_u64(out, static_cast<std::uint64_t>(label));
  out.append(reinterpret_cast<const char*>(sketch.data()), sketch.size() * sizeof(float));
  return out;
}

Result<StoredShape> decode_record(const std::string& id, std::string_view bytes, const ShapeLimits& limits) {
  auto damaged = [&](const std::string& what) {
    return Status(StatusCode::data_loss, "store: record of '" + id + "' is damaged: " + what);
  };
  std::uint64_t label = 0, geometry_size = 0, sketch_size = 0;
  if (bytes.size() < 16) return damaged("too short");
  std::memcpy(&label, bytes.data(), 8);
  std::memcpy(&geometry_size, bytes.data() + 8, 8);
  if (geometry_size > bytes.size() - 16) return damaged("geometry length exceeds the record");
  Result<Shape> shape = decode_shape(bytes.substr(16, geometry_size), limits);
  if (!shape) return damaged(shape.status().to_string());
  std::size_t offset = 16 + geometry_size;
  if (bytes.size() - offset < 8) return damaged("truncated before the sketch");
  std::memcpy(&sketch_size, bytes.data() + offset, 8);
  offset += 8;
  // A format-2 record carries its sketch here; format 3 writes none. Either way it is skipped:
  // sketches live under their generation's keys.
  if ((bytes.size() - offset) / sizeof(float) < sketch_size) return damaged("embedded sketch exceeds the record");
  StoredShape stored;
  stored.id = id;
  stored.label = static_cast<std::int64_t>(label);
  stored.shape = std::move(*shape);
  stored.metadata = std::string(bytes.substr(offset + sketch_size * sizeof(float)));
  return stored;
}

Result<StoredShape> Collection::State::load_as_given(const std::string& id) const {
  std::string value;
  const rocksdb::Status status = database->Get(rocksdb::ReadOptions(), shape_key(id), &value);
  if (status.IsNotFound()) return Status(StatusCode::not_found, "no shape with id '" + id + "'");
  if (Status s = from_rocksdb(status, "reading '" + id + "'"); !s.is_ok()) return s;
  return decode_record(id, value, settings.limits);
}

Result<StoredShape> Collection::State::load(const std::string& id, const Generation& generation,
                                            std::optional<std::int64_t> label) const {
  Result<StoredShape> stored = load_as_given(id);
  if (!stored) return stored;
  if (label && stored->label != *label) return Status(StatusCode::not_found, "shape '" + id + "' was replaced");
  // The index holds the sketch of exactly this record (same label), in this generation.
  Result<std::vector<float>> raw = generation.index.vector_of(stored->label);
  if (!raw) return raw.status();
  stored->raw = std::move(*raw);
  stored->shape = apply_frame(stored->shape, settings.frame);
  return stored;
}

Generation::Generation(const LandmarkSet& landmarks, IndexKind kind, const ApproximateIndexSettings& settings)
    : sketcher(landmarks),
      index(landmarks.size() + kCurveEndValues),
      origin{(landmarks.domain.min_x + landmarks.domain.max_x) / 2, (landmarks.domain.min_y + landmarks.domain.max_y) / 2} {
  if (kind == IndexKind::exhaustive) return;
  std::vector<double> root_weights;
  for (double weight : landmarks.weights) root_weights.push_back(std::sqrt(weight));
  approximate = std::make_unique<ApproximateIndex>(kind, std::move(root_weights), dimension(), settings);
}

std::size_t Generation::compared_dimensions(Metric metric) const {
  return metric == Metric::frechet || metric == Metric::discrete_frechet ? dimension() : landmark_count();
}

void Generation::append_index_vector(std::span<const float> sketch, const Shape& shape, Frame frame,
                                     std::vector<float>& out) const {
  const std::vector<float> raw = sketcher.unweighted(sketch);
  out.insert(out.end(), raw.begin(), raw.end());
  const std::optional<CurveEnds> ends = curve_ends(shape);
  if (!ends) {
    out.insert(out.end(), kCurveEndValues, 0.0f);
    return;
  }
  const FramePlacement placement = frame_placement(shape, frame);
  for (const Point end : {placement.place(ends->first), placement.place(ends->last)}) {
    out.push_back(static_cast<float>(end.x - origin.x));
    out.push_back(static_cast<float>(end.y - origin.y));
  }
}

Status Generation::add(std::span<const std::int64_t> labels, std::span<const float> index_vectors) {
  if (Status s = index.add(labels, index_vectors); !s.is_ok()) return s;
  return approximate ? approximate->added(labels, index_vectors) : Status::ok();
}

Status Generation::remove(std::span<const std::int64_t> labels) {
  if (Status s = index.remove(labels); !s.is_ok()) return s;
  if (approximate) approximate->removed(labels);
  return Status::ok();
}

Status Collection::State::build_approximate_index_if_due() {
  std::lock_guard build_lock(build_mutex);
  std::shared_ptr<Generation> generation = current_generation();
  if (!generation->approximate || !generation->approximate->rebuild_due(generation->index.size())) {
    return Status::ok();
  }
  VectorIndex::Contents copy;
  {
    std::shared_lock lock(labels_mutex);  // writers change the indexes only under the exclusive lock
    copy = generation->index.copy();
  }
  if (Status s = generation->approximate->build(copy); !s.is_ok()) return s;
  // Saved so that the next open need not rebuild (a graph takes minutes at a million shapes).
  Result<AtomicFileWriter> file = AtomicFileWriter::create(approximate_snapshot_path());
  if (!file) return file.status();
  if (Status s = generation->approximate->write_snapshot(
          generation->number(), [&](std::string_view piece) { return file->append(piece); });
      !s.is_ok()) {
    return s;
  }
  return file->commit();
}

namespace {

// The approximate index's snapshot as read from its file; nullopt when there is none yet (the
// builder makes one when due).
using SnapshotRead = std::optional<Result<ApproximateIndex::Snapshot>>;

// Reads the snapshot of a freshly opened generation on a thread of its own, so that the file's
// reading overlaps the store's scan (at 1M shapes each takes seconds); on this thread when no
// other can be had.
std::future<SnapshotRead> read_snapshot_meanwhile(const Collection::State& state) {
  auto read = [path = state.approximate_snapshot_path(), approximate = state.current->approximate.get(),
               number = state.current->number()]() -> SnapshotRead {
    std::ifstream in(path, std::ios::binary);
    if (!in) return std::nullopt;
    return approximate->read_snapshot(in, number);
  };
  return on_own_thread(read);
}

// Puts the snapshot in use, or says why not. `stored`: what the open just read into the
// exhaustive index (not copied out of it again).
void restore_approximate_index(Collection::State& state, SnapshotRead read, const VectorIndex::Contents& stored) {
  if (!read) return;
  Generation& generation = *state.current;
  const Status restored =
      *read ? generation.approximate->restore(std::move(**read), stored) : read->status();
  generation.approximate->set_snapshot_note(restored.is_ok() ? "loaded" : "rebuilding: " + restored.message());
  // Labels are never reused, also not those that only the snapshot still remembers.
  state.next_label = std::max(state.next_label, generation.approximate->largest_label() + 1);
}

// Whether the store holds sketches of a landmark generation other than `current`.
Result<bool> has_stale_sketches(rocksdb::DB& database, std::uint64_t current) {
  std::unique_ptr<rocksdb::Iterator> keys(database.NewIterator(rocksdb::ReadOptions()));
  keys->Seek(kSketchPrefix);
  bool stale = keys->Valid() && keys->key().compare(sketch_prefix(current)) < 0;
  if (!stale) {
    keys->Seek(sketch_prefix(current + 1));
    stale = keys->Valid() && keys->key().compare(kAfterSketches) < 0;
  }
  if (Status s = from_rocksdb(keys->status(), "looking for stale sketches"); !s.is_ok()) return s;
  return stale;
}

// What open() keeps of each stored shape, read in id order.
struct OpenedShape {
  std::string id;
  std::int64_t label;
};

// The shapes whose ids lie in [first_id, end_id) (empty: no bound) with their index vectors,
// or the first damage found there.
struct StoredRange {
  std::vector<OpenedShape> shapes;
  std::vector<float> vectors;  // Generation::append_index_vector of each, in that order
  Status failure;
};

// Reads one id range of the records and of `generation`'s sketches, pairing them by id (both
// are in id order). Every block is read once: through the block cache it would only churn it
// (an insert and an eviction per block), and large read-ahead turns the table files' blocks
// into few large reads. Checksums are still verified on every block.
StoredRange read_store_range(rocksdb::DB& database, const rocksdb::Snapshot* snapshot,
                             const CollectionSettings& settings, const Generation& generation,
                             const std::string& first_id, const std::string& end_id) {
  StoredRange out;
  rocksdb::ReadOptions at_snapshot;
  at_snapshot.snapshot = snapshot;
  at_snapshot.fill_cache = false;
  at_snapshot.readahead_size = 4 << 20;
  at_snapshot.verify_checksums = true;
  std::unique_ptr<rocksdb::Iterator> records(database.NewIterator(at_snapshot));
  std::unique_ptr<rocksdb::Iterator> sketches(database.NewIterator(at_snapshot));
  const std::uint64_t number = generation.number();
  const std::string prefix = sketch_prefix(number);
  const std::string end_key = kShapePrefix + end_id;
  // key == prefix + id, without building that string for each of a million records.
  auto is_key_of = [](const rocksdb::Slice& key, const std::string& prefix, const std::string& id) {
    return key.size() == prefix.size() + id.size() && key.starts_with(prefix) &&
           std::memcmp(key.data() + prefix.size(), id.data(), id.size()) == 0;
  };
  sketches->Seek(prefix + first_id);
  auto in_range = [&](const rocksdb::Slice& key) {
    return key.starts_with(kShapePrefix) && (end_id.empty() || key.compare(end_key) < 0);
  };
  for (records->Seek(kShapePrefix + first_id); records->Valid() && in_range(records->key()); records->Next()) {
    const std::string id = id_of_shape_key(records->key());
    Result<StoredShape> stored = decode_record(id, records->value().ToStringView(), settings.limits);
    if (!stored) {
      out.failure = stored.status();
      return out;
    }
    if (!sketches->Valid() || !is_key_of(sketches->key(), prefix, id)) {
      out.failure = Status(StatusCode::data_loss, "store: shape '" + id + "' has no sketch of landmark generation " +
                                                      std::to_string(number));
      return out;
    }
    Result<DecodedSketch> sketch = decode_sketch(id, sketches->value().ToStringView(), generation.landmark_count());
    if (sketch && sketch->label != stored->label) {
      sketch = Status(StatusCode::data_loss, "store: sketch of '" + id + "' belongs to another version of the shape");
    }
    if (!sketch) {
      out.failure = sketch.status();
      return out;
    }
    sketches->Next();
    generation.append_index_vector(sketch->values, stored->shape, settings.frame, out.vectors);
    out.shapes.push_back({id, stored->label});
  }
  out.failure = from_rocksdb(records->status(), "scanning records");
  if (out.failure.is_ok()) out.failure = from_rocksdb(sketches->status(), "scanning sketches");
  return out;
}

// Ids that cut the stored shapes into about `parts` ranges of similar size: the first and last
// record ids of the store's table files (each file holds a contiguous key range, and files
// are of similar size), taken at even steps. Fewer cuts when there are too few files (a small
// store: one range is fast enough).
std::vector<std::string> range_cuts(rocksdb::DB& database, std::size_t parts) {
  std::vector<rocksdb::LiveFileMetaData> files;
  database.GetLiveFilesMetaData(&files);
  std::vector<std::string> ids;
  for (const rocksdb::LiveFileMetaData& file : files) {
    for (const std::string* key : {&file.smallestkey, &file.largestkey}) {
      if (key->starts_with(kShapePrefix) && key->size() > std::strlen(kShapePrefix)) {
        ids.push_back(id_of_shape_key(*key));
      }
    }
  }
  std::sort(ids.begin(), ids.end());
  ids.erase(std::unique(ids.begin(), ids.end()), ids.end());
  std::vector<std::string> cuts;
  if (ids.size() < 2 * parts) return cuts;
  for (std::size_t part = 1; part < parts; ++part) cuts.push_back(ids[part * ids.size() / parts]);
  cuts.erase(std::unique(cuts.begin(), cuts.end()), cuts.end());
  return cuts;
}

// Reads every stored shape of `generation`, in id ranges read side by side, one per core (up
// to 4): decoding records and making index vectors is most of an open's work, and a single
// reader left the second core of a 2-core machine idle (1M shapes, graph index: 87 % of the
// open's samples on the reading thread; the open took 7.6–8.5 s, 4.0–5.9 s in ranges). The
// ranges are returned in id order.
std::vector<StoredRange> read_store_in_ranges(rocksdb::DB& database, const rocksdb::Snapshot* snapshot,
                                              const CollectionSettings& settings, const Generation& generation) {
  const std::size_t parts = std::clamp<std::size_t>(std::thread::hardware_concurrency(), 1, 4);
  std::vector<std::string> bounds = range_cuts(database, parts);
  bounds.insert(bounds.begin(), "");
  bounds.push_back("");
  auto read = [&](std::size_t r) {
    return read_store_range(database, snapshot, settings, generation, bounds[r], bounds[r + 1]);
  };
  std::vector<std::future<StoredRange>> others;
  for (std::size_t r = 1; r + 1 < bounds.size(); ++r) others.push_back(on_own_thread([&read, r] { return read(r); }));
  std::vector<StoredRange> ranges;
  ranges.push_back(read(0));
  for (std::future<StoredRange>& other : others) ranges.push_back(other.get());
  return ranges;
}

// Fills the state's id maps from the ranges read, the two maps side by side: each takes a node
// allocation and a hash per shape. The float copies come later (make_copies_after_open).
void fill_maps(Collection::State& state, const std::vector<StoredRange>& ranges) {
  auto fill_labels = [&] {
    for (const StoredRange& range : ranges) {
      for (const OpenedShape& shape : range.shapes) state.label_of_id.emplace(shape.id, shape.label);
    }
  };
  std::future<void> labels_filled = on_own_thread(fill_labels);
  for (const StoredRange& range : ranges) {
    for (const OpenedShape& shape : range.shapes) {
      state.next_label = std::max(state.next_label, shape.label + 1);
      // Reads shape.id beside fill_labels, which only reads it too.
      state.shape_of_label.emplace(shape.label, Collection::State::Labelled{shape.id, ResidentCopy()});
    }
  }
  labels_filled.get();
}

// Gives each copy to its label when that label is still stored, and drops the others (their
// shapes were replaced or removed since the copies' records were read). A label names one
// version of one record and is never reused, so the copy is of the shape the label stands
// for. A label that has a copy already (made by the write that stored it) keeps it.
void give_copies(Collection::State& state, std::vector<std::pair<std::int64_t, ResidentCopy>>& made) {
  {
    std::unique_lock lock(state.labels_mutex);
    for (auto& [label, copy] : made) {
      auto found = state.shape_of_label.find(label);
      if (found != state.shape_of_label.end() && found->second.copy.empty()) found->second.copy = std::move(copy);
    }
  }
  made.clear();  // copies not given return their bytes to the capacity
}

// One copy pass at a time in the process: a server opening many collections would otherwise
// read all their stores at once, beside the next opens and the first queries.
std::mutex copy_turn_mutex;
std::condition_variable copy_turn_changed;
bool copy_pass_running = false;  // guarded by copy_turn_mutex

// Waits for the turn to make copies; false when the collection is closing (stop_copying).
bool take_copy_turn(const Collection::State& state) {
  std::unique_lock lock(copy_turn_mutex);
  copy_turn_changed.wait(lock, [&state] { return !copy_pass_running || state.stop_copying; });
  if (state.stop_copying) return false;
  copy_pass_running = true;
  return true;
}

// Gives the turn back when a pass ends, however it ends.
struct CopyTurnHeld {
  ~CopyTurnHeld() {
    {
      std::lock_guard lock(copy_turn_mutex);
      copy_pass_running = false;
    }
    copy_turn_changed.notify_all();
  }
};

// Tells the collection's copy pass (or its wait for a turn) to end.
void stop_copying(Collection::State& state) {
  {
    std::lock_guard lock(copy_turn_mutex);  // so that a waiter cannot miss the stop
    state.stop_copying = true;
  }
  copy_turn_changed.notify_all();
}

// The float copies of the shapes that open() found, made after it on a thread of its own:
// they are not needed to answer a query (until a shape has its copy, its candidates are read
// from the store, for the same answer), and a restart need not wait for them. Same 1M graph
// store, fresh processes, previous build and this one alternating (2026-12-03): the open took
// 3.98 / 3.78 / 3.90 s with copies made in it, 3.72 / 3.33 / 3.17 s without, and the copies
// were done 2.6–3.5 s later. The records are read once more, in id order from one snapshot,
// and the copies are handed over in groups (each group under the maps' lock for a few hundred
// map look-ups), one collection at a time. Stops early when the collection closes, when no
// copy capacity is left, or at a store error (the shapes not reached then have no copy;
// nothing else depends on them).
void make_copies_after_open(Collection::State& state) {
  if (!take_copy_turn(state)) return;
  const CopyTurnHeld turn;
  constexpr std::size_t kCopiesPerGroup = 512;
  rocksdb::ReadOptions reading;
  reading.fill_cache = false;  // read once: through the block cache it would only churn it
  reading.readahead_size = 4 << 20;
  std::unique_ptr<rocksdb::Iterator> records(state.database->NewIterator(reading));
  std::vector<std::pair<std::int64_t, ResidentCopy>> made;
  made.reserve(kCopiesPerGroup);
  for (records->Seek(kShapePrefix); records->Valid() && records->key().starts_with(kShapePrefix); records->Next()) {
    if (state.stop_copying.load(std::memory_order_relaxed)) break;
    if (resident_copy_bytes() >= resident_copy_capacity()) break;
    Result<StoredShape> stored =
        decode_record(id_of_shape_key(records->key()), records->value().ToStringView(), state.settings.limits);
    if (!stored) break;
    ResidentCopy copy = ResidentCopy::of(stored->shape, state.settings.frame);
    if (copy.empty()) continue;
    made.emplace_back(stored->label, std::move(copy));
    if (made.size() == kCopiesPerGroup) give_copies(state, made);
  }
  give_copies(state, made);
}

}  // namespace

void Collection::wait_for_resident_copies() const {
  const std::shared_future<void> copying = state_->copying;  // a copy of its own: waits may run side by side
  if (copying.valid()) copying.wait();
}

Collection::Collection(std::unique_ptr<State> state) : state_(std::move(state)) {
  if (state_->settings.index_kind == IndexKind::exhaustive) return;
  State* shared = state_.get();
  state_->builder = std::thread([shared] {
    std::unique_lock lock(shared->builder_mutex);
    while (!shared->builder_stop) {
      lock.unlock();
      (void)shared->build_approximate_index_if_due();  // a failed build is retried on the next wake
      lock.lock();
      // With a predicate: a stop or wake that came during the build is not waited out.
      shared->builder_wake.wait_for(lock, std::chrono::seconds(1),
                                    [shared] { return shared->builder_stop || shared->builder_check_due; });
      shared->builder_check_due = false;
    }
  });
}

void Collection::State::wake_builder() {
  {
    std::lock_guard lock(builder_mutex);
    builder_check_due = true;
  }
  builder_wake.notify_one();
}

Collection::~Collection() {
  stop_copying(*state_);
  wait_for_resident_copies();
  if (!state_->builder.joinable()) return;
  {
    std::lock_guard lock(state_->builder_mutex);
    state_->builder_stop = true;
  }
  state_->builder_wake.notify_all();
  state_->builder.join();  // waits for a build in progress to finish
}

Status Collection::build_approximate_index_now() { return state_->build_approximate_index_if_due(); }

Status Collection::compact_store() {
  rocksdb::CompactRangeOptions options;
  options.bottommost_level_compaction = rocksdb::BottommostLevelCompaction::kForce;  // rewrite even one file
  return from_rocksdb(state_->database->CompactRange(options, nullptr, nullptr), "compacting the store");
}

CollectionSettings Collection::settings() const {
  std::shared_lock lock(state_->labels_mutex);
  return state_->settings;
}

std::size_t Collection::size() const {
  std::shared_lock lock(state_->labels_mutex);
  return state_->label_of_id.size();
}

namespace {

std::unique_ptr<Collection::State> new_state(const CollectionSettings& settings, std::unique_ptr<rocksdb::DB> db) {
  auto state = std::make_unique<Collection::State>();
  state->settings = settings;
  state->database = std::move(db);
  state->current = std::make_shared<Generation>(settings.landmarks, settings.index_kind, settings.approximate);
  return state;
}

// Format 2 → 3: each record's embedded sketch is copied to its generation's key, then the
// manifest says format 3. A crash part-way leaves format 2 and the copy is simply redone.
Status upgrade_from_format_2(rocksdb::DB& database, const CollectionSettings& settings) {
  const std::uint64_t generation = settings.landmarks.generation;
  const std::size_t dimension = settings.landmarks.size();
  rocksdb::WriteBatch batch;
  std::unique_ptr<rocksdb::Iterator> it(database.NewIterator(rocksdb::ReadOptions()));
  for (it->Seek(kShapePrefix); it->Valid() && it->key().starts_with(kShapePrefix); it->Next()) {
    const std::string id = id_of_shape_key(it->key());
    const std::string_view bytes = it->value().ToStringView();
    std::uint64_t label = 0, geometry_size = 0, sketch_size = 0;
    if (bytes.size() < 16) return Status(StatusCode::data_loss, "store: record of '" + id + "' is damaged: too short");
    std::memcpy(&label, bytes.data(), 8);
    std::memcpy(&geometry_size, bytes.data() + 8, 8);
    const std::size_t offset = 16 + geometry_size;
    if (geometry_size > bytes.size() - 16 || bytes.size() - offset < 8) {
      return Status(StatusCode::data_loss, "store: record of '" + id + "' is damaged: truncated");
    }
    std::memcpy(&sketch_size, bytes.data() + offset, 8);
    if (sketch_size != dimension || (bytes.size() - offset - 8) / sizeof(float) < dimension) {
      return Status(StatusCode::data_loss, "store: record of '" + id + "' is damaged: sketch length");
    }
    std::vector<float> sketch(dimension);
    std::memcpy(sketch.data(), bytes.data() + offset + 8, dimension * sizeof(float));
    batch.Put(sketch_key(generation, id), encode_sketch(static_cast<std::int64_t>(label), sketch));
    if (batch.Count() >= 1000) {
      if (Status s = from_rocksdb(database.Write(durable_write(), &batch), "upgrading"); !s.is_ok()) return s;
      batch.Clear();
    }
  }
  if (Status s = from_rocksdb(it->status(), "upgrading"); !s.is_ok()) return s;
  put_manifest(batch, settings);
  return from_rocksdb(database.Write(durable_write(), &batch), "upgrading");
}

}  // namespace

Result<std::unique_ptr<Collection>> Collection::create(const std::string& directory,
                                                       const CollectionSettings& settings) {
  if (settings.landmarks.size() == 0) return invalid_argument("a collection needs at least one landmark");
  namespace fs = std::filesystem;
  std::error_code error;
  if (fs::exists(directory, error) && !fs::is_empty(directory, error)) {
    return Status(StatusCode::already_exists, "'" + directory + "' is not empty");
  }
  // Built beside its final place and renamed into it, so a crash leaves either no collection
  // or a complete one (never a database without its manifest).
  const std::string building = directory + ".creating";
  fs::remove_all(building, error);  // left by a create that crashed
  {
    Result<std::unique_ptr<rocksdb::DB>> db = open_database(building, true);
    if (!db) return db.status();
    const std::string manifest = manifest_json(settings).dump();
    if (Status s = from_rocksdb((*db)->Put(durable_write(), kManifestKey, manifest), "writing the manifest"); !s.is_ok()) {
      return s;
    }
  }
  if (fs::exists(directory, error)) fs::remove(directory, error);  // an empty directory
  fs::rename(building, directory, error);
  if (error) return Status(StatusCode::io_error, "cannot move the new collection into '" + directory + "': " + error.message());
  if (Status s = sync_parent_directory(directory); !s.is_ok()) return s;
  return open(directory, settings.approximate);
}

Result<std::unique_ptr<Collection>> Collection::open(const std::string& directory,
                                                     const ApproximateIndexSettings& approximate) {
  // RocksDB creates the directory and its log even when asked not to create a database, so
  // look first: opening a wrong path must leave nothing behind.
  std::error_code error;
  if (!std::filesystem::exists(std::filesystem::path(directory) / "CURRENT", error)) {
    return Status(StatusCode::not_found, "no collection at '" + directory + "'");
  }
  Result<std::unique_ptr<rocksdb::DB>> db = open_database(directory, false);
  if (!db) return db.status();
  std::string manifest;
  if (Status s = from_rocksdb((*db)->Get(rocksdb::ReadOptions(), kManifestKey, &manifest), "reading the manifest");
      !s.is_ok()) {
    return s;
  }
  Result<Manifest> parsed = parse_manifest(manifest);
  if (!parsed) return parsed.status();
  CollectionSettings& settings = parsed->settings;
  settings.approximate = approximate;
  if (parsed->format == kUpgradableFormat) {
    // The upgrade rewrites every record: not while compaction is paused.
    if (Status s = resume_compactions(**db); !s.is_ok()) return s;
    if (Status s = upgrade_from_format_2(**db, settings); !s.is_ok()) return s;
  }
  auto state = new_state(settings, std::move(*db));
  Generation& generation = *state->current;
  const std::uint64_t number = generation.number();

  // Sketches of other generations are leftovers of a refit that crashed before (or right
  // after) its switch: remove them. Keys of generation g sort between prefix(g) and prefix(g+1).
  // Written only when there are some: each write would leave the log a record that the next
  // open flushes into a table file of its own, and every fourth such file set off a compaction.
  if (Result<bool> stale = has_stale_sketches(*state->database, number); !stale) {
    return stale.status();
  } else if (*stale) {
    rocksdb::WriteBatch cleanup;
    cleanup.DeleteRange(kSketchPrefix, sketch_prefix(number));
    cleanup.DeleteRange(sketch_prefix(number + 1), kAfterSketches);
    if (Status s = from_rocksdb(state->database->Write(rocksdb::WriteOptions(), &cleanup), "removing stale sketches");
        !s.is_ok()) {
      return s;
    }
  }

  state->directory = directory;
  std::future<SnapshotRead> snapshot_read;
  if (generation.approximate) snapshot_read = read_snapshot_meanwhile(*state);

  // Rebuild the derived state: records and this generation's sketches, both in id order.
  // The id maps' buckets are reserved from the store's key estimate (records and sketches alike,
  // so about twice the shapes): growing a million-entry map rehashes every node each time. Only
  // bucket arrays (8 bytes a bucket): an estimate that overcounts costs little.
  std::uint64_t estimated_keys = 0;
  state->database->GetIntProperty(rocksdb::DB::Properties::kEstimateNumKeys, &estimated_keys);
  const std::size_t estimated_shapes = static_cast<std::size_t>(estimated_keys / 2);
  state->label_of_id.reserve(estimated_shapes);
  state->shape_of_label.reserve(estimated_shapes);
  // One snapshot for every range, so that they see the same store.
  const rocksdb::Snapshot* snapshot = state->database->GetSnapshot();
  std::vector<StoredRange> ranges = read_store_in_ranges(*state->database, snapshot, settings, generation);
  state->database->ReleaseSnapshot(snapshot);
  if (Status s = resume_compactions(*state->database); !s.is_ok()) return s;
  for (const StoredRange& range : ranges) {
    if (!range.failure.is_ok()) return range.failure;  // the first in key order
  }
  // The exhaustive index's rows are put together beside the id maps: neither touches what the
  // other moves (the vectors; the float copies), and both only read the rest. Only the
  // exhaustive index: the approximate one is restored from its snapshot (or built) from this
  // index, so copying every vector into its fresh part would be undone.
  auto add_rows = [&ranges, &generation]() -> Result<VectorIndex::Contents> {
    VectorIndex::Contents rows{{}, std::move(ranges.front().vectors)};
    std::size_t shapes = 0;
    for (const StoredRange& range : ranges) shapes += range.shapes.size();
    rows.labels.reserve(shapes);
    rows.vectors.reserve(shapes * generation.dimension());
    for (std::size_t r = 0; r < ranges.size(); ++r) {
      for (const OpenedShape& shape : ranges[r].shapes) rows.labels.push_back(shape.label);
      if (r > 0) rows.vectors.insert(rows.vectors.end(), ranges[r].vectors.begin(), ranges[r].vectors.end());
    }
    if (Status s = generation.index.add(rows.labels, rows.vectors); !s.is_ok()) return s;
    return rows;
  };
  std::future<Result<VectorIndex::Contents>> rows_added = on_own_thread(add_rows);
  fill_maps(*state, ranges);
  Result<VectorIndex::Contents> rows = rows_added.get();
  ranges.clear();
  if (!rows) return rows.status();
  if (generation.approximate) restore_approximate_index(*state, snapshot_read.get(), *rows);
  if (!state->shape_of_label.empty() && resident_copy_capacity() > 0) {
    State* shared = state.get();  // outlives the copying: ~Collection stops it and waits
    state->copying = on_own_thread([shared] { make_copies_after_open(*shared); }).share();
  }
  return std::unique_ptr<Collection>(new Collection(std::move(state)));
}

Status Collection::check(const ShapeRecord& record) const {
  const CollectionSettings& settings = state_->settings;
  if (record.id.empty() || record.id.size() > settings.max_id_bytes) {
    return invalid_argument("id must be 1 to " + std::to_string(settings.max_id_bytes) + " bytes", "id");
  }
  if (record.metadata.size() > settings.max_metadata_bytes) {
    return Status(StatusCode::resource_exhausted,
                  "metadata is over " + std::to_string(settings.max_metadata_bytes) + " bytes", "metadata");
  }
  if (const Json metadata = Json::parse(record.metadata, nullptr, false); !metadata.is_object()) {
    return invalid_argument("metadata must be a JSON object", "metadata");
  }
  return validate(record.shape, settings.limits);
}

// A record's and a sketch's value both begin with the record's label (u64): values are
// encoded before the label is known, outside every lock, and labelled in place at the commit.
void set_label(std::string& value, std::int64_t label) {
  const std::uint64_t bits = static_cast<std::uint64_t>(label);
  std::memcpy(value.data(), &bits, sizeof bits);
}

// One upsert() call's batch, made ready for the store outside every lock: each id's last
// record framed, encoded, sketched in the generation that was current then, with its index
// vector and float copy. Committed by whichever call leads the group it joins.
struct Collection::State::PreparedUpsert {
  std::span<const ShapeRecord> batch;
  std::vector<std::size_t> winners;  // batch positions of each id's last record, in order
  // Per winner (the values unlabelled until the commit: set_label):
  std::vector<Shape> framed;
  std::vector<std::string> shape_keys, records;
  std::vector<ResidentCopy> copies;
  std::shared_ptr<Generation> generation;  // the sketches' and index vectors' generation
  std::vector<std::string> sketch_keys, sketch_values;
  std::vector<float> sketches, index_vectors;
  // Set by the group's leader under commit_mutex.
  Status result;
  bool done = false;

  // Everything for the winners, sketched in `in`; each step in two halves at once.
  void prepare(Frame frame, std::shared_ptr<Generation> in) {
    const std::size_t count = winners.size();
    framed.resize(count);
    shape_keys.resize(count);
    records.resize(count);
    copies.resize(count);
    in_two_halves(count, [&](std::size_t begin, std::size_t end) {
      for (std::size_t w = begin; w < end; ++w) {
        const ShapeRecord& record = batch[winners[w]];
        framed[w] = apply_frame(record.shape, frame);
        shape_keys[w] = shape_key(record.id);
        records[w] = encode_record(0, encode_shape(record.shape), record.metadata);
        copies[w] = ResidentCopy::of(framed[w], Frame::absolute);
      }
    });
    sketch_in(std::move(in));
  }

  // The sketches, their keys and values, and the index vectors in `in`: by prepare(), and again
  // by the commit should a refit have switched generations since.
  void sketch_in(std::shared_ptr<Generation> in) {
    generation = std::move(in);
    const std::size_t dimension = generation->landmark_count();
    sketches.assign(framed.size() * dimension, 0.0f);
    in_two_halves(framed.size(), [&](std::size_t begin, std::size_t end) {
      generation->sketcher.sketch_batch(std::span<const Shape>(framed).subspan(begin, end - begin),
                                        std::span<float>(sketches).subspan(begin * dimension, (end - begin) * dimension));
    });
    sketch_keys.clear();
    sketch_values.clear();
    index_vectors.clear();
    index_vectors.reserve(framed.size() * generation->dimension());
    for (std::size_t w = 0; w < framed.size(); ++w) {
      sketch_keys.push_back(sketch_key(generation->number(), batch[winners[w]].id));
      sketch_values.push_back(encode_sketch(0, sketch_of(w)));
      generation->append_index_vector(sketch_of(w), framed[w], Frame::absolute, index_vectors);
    }
  }
  std::span<const float> sketch_of(std::size_t w) const {
    const std::size_t dimension = generation->landmark_count();
    return std::span<const float>(sketches).subspan(w * dimension, dimension);
  }
};

Status Collection::upsert(std::span<const ShapeRecord> batch) {
  State& state = *state_;
  State::PreparedUpsert upsert;
  upsert.batch = batch;
  // Check everything before writing anything.
  for (std::size_t i = 0; i < batch.size(); ++i) {
    if (Status s = check(batch[i]); !s.is_ok()) {
      return Status(s.code(), "record " + std::to_string(i) + " (id '" + batch[i].id.substr(0, 64) + "'): " + s.message(),
                    s.where());
    }
  }
  // A later record with the same id wins, so only each id's last record is stored at all.
  std::unordered_map<std::string_view, std::size_t> last_of_id;
  for (std::size_t i = 0; i < batch.size(); ++i) last_of_id[batch[i].id] = i;
  for (std::size_t i = 0; i < batch.size(); ++i) {
    if (last_of_id[batch[i].id] == i) upsert.winners.push_back(i);
  }
  // The CPU work of a batch is done here, outside the write lock, so that it overlaps another
  // call's synced write; commit() re-sketches should a refit have switched generations since.
  upsert.prepare(state.settings.frame, state.current_generation());

  // Group commit: the first caller to find no commit in progress leads; it commits every
  // batch queued by then (its own included) in one synced write, so concurrent callers share
  // a sync. Each batch is still all or nothing: the group's write is one RocksDB WriteBatch.
  std::unique_lock queue_lock(state.commit_mutex);
  state.commit_queue.push_back(&upsert);
  while (!upsert.done) {
    if (state.committing) {
      state.commit_turn.wait(queue_lock);
      continue;
    }
    std::vector<State::PreparedUpsert*> group;
    group.swap(state.commit_queue);
    state.committing = true;
    queue_lock.unlock();
    std::vector<Status> results;
    try {
      results = state.commit(group);
    } catch (const std::exception& error) {  // out of memory, say: the waiters must still wake
      results.assign(group.size(), Status(StatusCode::internal, std::string("committing a batch: ") + error.what()));
    }
    queue_lock.lock();
    for (std::size_t g = 0; g < group.size(); ++g) {
      group[g]->result = results[g];
      group[g]->done = true;
    }
    state.committing = false;
    state.commit_turn.notify_all();
  }
  return upsert.result;
}

std::vector<Status> Collection::State::commit(std::span<PreparedUpsert* const> group) {
  std::lock_guard write_lock(write_mutex);
  // Under the write lock neither generation can change: a refit switches under it too.
  Generation* pending_generation = pending.get();
  struct Labels {
    std::vector<std::int64_t> old_labels, new_labels, pending_labels;
    std::vector<float> pending_vectors;
  };
  std::vector<Labels> labels(group.size());
  std::int64_t label;
  {
    std::shared_lock lock(labels_mutex);
    label = next_label;
    // An id written by an earlier batch of the group replaces that batch's label, not the
    // stored one: the batches are applied in order.
    std::unordered_map<std::string_view, std::int64_t> labelled_in_group;
    for (std::size_t g = 0; g < group.size(); ++g) {
      for (std::size_t i : group[g]->winners) {
        const std::string& id = group[g]->batch[i].id;
        if (auto earlier = labelled_in_group.find(id); earlier != labelled_in_group.end()) {
          labels[g].old_labels.push_back(earlier->second);
        } else if (auto found = label_of_id.find(id); found != label_of_id.end()) {
          labels[g].old_labels.push_back(found->second);
        }
        labels[g].new_labels.push_back(label);
        labelled_in_group[id] = label++;
      }
    }
  }
  struct Put {
    std::string_view key, value;
  };
  std::vector<Put> puts;
  std::deque<std::string> pending_entries;  // keys and values of next-generation sketches
  for (std::size_t g = 0; g < group.size(); ++g) {
    PreparedUpsert& upsert = *group[g];
    if (upsert.generation != current) upsert.sketch_in(current);  // a refit switched meanwhile
    for (std::size_t w = 0; w < upsert.winners.size(); ++w) {
      const std::int64_t new_label = labels[g].new_labels[w];
      set_label(upsert.records[w], new_label);
      set_label(upsert.sketch_values[w], new_label);
      puts.push_back({upsert.shape_keys[w], upsert.records[w]});
      puts.push_back({upsert.sketch_keys[w], upsert.sketch_values[w]});
      // A running refit has passed this id already: sketch it into the next generation too.
      if (pending_generation && upsert.shape_keys[w] <= pending_covered_up_to) {
        std::vector<float> next_sketch = pending_generation->sketcher.sketch(upsert.framed[w]);
        const std::string& key =
            pending_entries.emplace_back(sketch_key(pending_generation->number(), upsert.batch[upsert.winners[w]].id));
        puts.push_back({key, pending_entries.emplace_back(encode_sketch(new_label, next_sketch))});
        pending_generation->append_index_vector(next_sketch, upsert.framed[w], Frame::absolute,
                                                labels[g].pending_vectors);
        labels[g].pending_labels.push_back(new_label);
      }
    }
  }
  // In key order (a later batch's write of an id still after an earlier one's): RocksDB's
  // memtable, a skip list, inserts a key cheaply just after the previous one, while records
  // and sketches interleaved made each insert a search from the top. perf, 100k-shape ingest:
  // the synced write of a 1,000-shape batch took 14 ms interleaved, 10 ms in order.
  std::stable_sort(puts.begin(), puts.end(), [](const Put& a, const Put& b) { return a.key < b.key; });
  std::size_t bytes = 64;  // the header and the last-write entry
  for (const Put& put : puts) bytes += put.key.size() + put.value.size() + 16;  // + tag and lengths
  rocksdb::WriteBatch write(bytes);  // reserved: no copying as it grows
  for (const Put& put : puts) write.Put(rocksdb::Slice(put.key), rocksdb::Slice(put.value));
  write.Put(kLastWriteKey, now_as_record());
  const std::string doing = group.size() == 1 ? "writing a batch"
                                              : "writing " + std::to_string(group.size()) + " concurrent batches";
  if (Status s = from_rocksdb(database->Write(durable_write(), &write), doing); !s.is_ok()) {
    return std::vector<Status>(group.size(), s);
  }

  // Durable: now make it searchable, batch by batch in order.
  std::vector<Status> results(group.size(), Status::ok());
  std::unique_lock lock(labels_mutex);
  for (std::size_t g = 0; g < group.size(); ++g) {
    PreparedUpsert& upsert = *group[g];
    Status applied = current->remove(labels[g].old_labels);
    if (applied.is_ok()) applied = current->add(labels[g].new_labels, upsert.index_vectors);
    if (applied.is_ok() && pending_generation) applied = pending_generation->remove(labels[g].old_labels);
    if (applied.is_ok() && pending_generation) {
      applied = pending_generation->add(labels[g].pending_labels, labels[g].pending_vectors);
    }
    if (!applied.is_ok()) {
      // Stored but not indexed: the next open rebuilds the indexes from the store.
      std::fill(results.begin() + static_cast<std::ptrdiff_t>(g), results.end(), applied);
      break;
    }
    for (std::int64_t old : labels[g].old_labels) shape_of_label.erase(old);
    for (std::size_t w = 0; w < upsert.winners.size(); ++w) {
      const std::string& id = upsert.batch[upsert.winners[w]].id;
      label_of_id[id] = labels[g].new_labels[w];
      shape_of_label[labels[g].new_labels[w]] = {id, std::move(upsert.copies[w])};
    }
  }
  next_label = label;
  lock.unlock();
  wake_builder();  // an approximate index may be due
  return results;
}

Status Collection::remove(std::span<const std::string> ids) {
  State& state = *state_;
  std::lock_guard write_lock(state.write_mutex);
  Generation& current = *state.current;
  Generation* pending = state.pending.get();
  rocksdb::WriteBatch write;
  std::vector<std::int64_t> labels;
  std::vector<std::string> removed;
  {
    std::shared_lock lock(state.labels_mutex);
    for (const std::string& id : ids) {
      auto found = state.label_of_id.find(id);
      if (found == state.label_of_id.end()) continue;
      write.Delete(shape_key(id));
      write.Delete(sketch_key(current.number(), id));
      if (pending) write.Delete(sketch_key(pending->number(), id));
      labels.push_back(found->second);
      removed.push_back(id);
    }
  }
  if (labels.empty()) return Status::ok();
  write.Put(kLastWriteKey, now_as_record());
  if (Status s = from_rocksdb(state.database->Write(durable_write(), &write), "deleting"); !s.is_ok()) return s;
  std::unique_lock lock(state.labels_mutex);
  if (Status s = current.remove(labels); !s.is_ok()) return s;
  if (pending) {
    if (Status s = pending->remove(labels); !s.is_ok()) return s;
  }
  for (std::size_t i = 0; i < labels.size(); ++i) {
    state.shape_of_label.erase(labels[i]);
    state.label_of_id.erase(removed[i]);
  }
  lock.unlock();
  state.wake_builder();  // tombstones may make a rebuild due
  return Status::ok();
}

Result<std::vector<ShapeRecord>> Collection::list(const std::string& after, std::size_t limit) const {
  std::vector<ShapeRecord> page;
  std::unique_ptr<rocksdb::Iterator> it(state_->database->NewIterator(rocksdb::ReadOptions()));
  const std::string start = shape_key(after);
  it->Seek(start);
  if (it->Valid() && !after.empty() && it->key() == start) it->Next();
  for (; it->Valid() && it->key().starts_with(kShapePrefix) && page.size() < limit; it->Next()) {
    const std::string id = id_of_shape_key(it->key());
    Result<StoredShape> stored = decode_record(id, it->value().ToStringView(), state_->settings.limits);
    if (!stored) return stored.status();
    page.push_back({id, std::move(stored->shape), std::move(stored->metadata)});
  }
  if (Status s = from_rocksdb(it->status(), "listing records"); !s.is_ok()) return s;
  return page;
}

std::size_t shared_block_cache_bytes() { return shared_block_cache()->GetUsage(); }
std::size_t shared_block_cache_capacity() { return shared_block_cache()->GetCapacity(); }
void set_shared_block_cache_capacity(std::size_t bytes) { shared_block_cache()->SetCapacity(bytes); }

CollectionStatistics Collection::statistics() const {
  CollectionStatistics statistics;
  {
    std::shared_lock lock(state_->labels_mutex);
    statistics.shape_count = state_->label_of_id.size();
    std::size_t id_bytes = 0;
    for (const auto& [id, label] : state_->label_of_id) id_bytes += id.size();
    for (const auto& [label, labelled] : state_->shape_of_label) statistics.resident_copy_bytes += labelled.copy.bytes();
    const std::shared_future<void> copying = state_->copying;
    statistics.making_resident_copies =
        copying.valid() && copying.wait_for(std::chrono::seconds(0)) != std::future_status::ready;
    // Two hash maps (id ↔ label): key, value and about two pointers of node and bucket each.
    const Generation& generation = *state_->current;
    if (generation.approximate) statistics.approximate = generation.approximate->status();
    statistics.index_bytes = generation.index.memory_bytes() +
                             (generation.approximate ? generation.approximate->memory_bytes() : 0) + 2 * id_bytes +
                             statistics.shape_count * 2 * (sizeof(std::string) + sizeof(std::int64_t) + 4 * sizeof(void*));
  }
  std::uint64_t sst = 0, memtables = 0, table_readers = 0;
  state_->database->GetIntProperty(rocksdb::DB::Properties::kLiveSstFilesSize, &sst);
  state_->database->GetIntProperty(rocksdb::DB::Properties::kCurSizeAllMemTables, &memtables);
  state_->database->GetIntProperty(rocksdb::DB::Properties::kEstimateTableReadersMem, &table_readers);
  statistics.store_bytes = sst + memtables;
  statistics.memtable_bytes = memtables;
  statistics.table_reader_bytes = table_readers;
  std::string value;
  if (state_->database->Get(rocksdb::ReadOptions(), kLastWriteKey, &value).ok() && value.size() == 8) {
    std::uint64_t ms = 0;
    std::memcpy(&ms, value.data(), 8);
    statistics.last_write_unix_ms = static_cast<std::int64_t>(ms);
  }
  return statistics;
}

Result<ShapeRecord> Collection::get(const std::string& id) const {
  Result<StoredShape> stored = state_->load_as_given(id);
  if (!stored) return stored.status();
  return ShapeRecord{stored->id, std::move(stored->shape), std::move(stored->metadata)};
}

}  // namespace waymark
