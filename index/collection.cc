#include <rocksdb/write_batch.h>

#include <chrono>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <nlohmann/json.hpp>

#include "index/collection_state.h"
#include "index/shape_codec.h"
#include "sketch/durable_file.h"

namespace waymark {
namespace {

using Json = nlohmann::json;

constexpr const char* kManifestKey = "manifest";
// 2: geometry stored as given (1 stored it framed; no such store was ever released).
constexpr int kFormat = 2;
constexpr const char* kShapePrefix = "s/";
constexpr const char* kLastWriteKey = "last_write";  // u64 milliseconds since the Unix epoch

Status from_rocksdb(const rocksdb::Status& status, const std::string& doing) {
  if (status.ok()) return Status::ok();
  const StatusCode code = status.IsCorruption() ? StatusCode::data_loss : StatusCode::io_error;
  return Status(code, "store: " + doing + ": " + status.ToString());
}

std::string encode_record(std::int64_t label, const Shape& shape, std::span<const float> sketch,
                          const std::string& metadata) {
  const std::string geometry = encode_shape(shape);
  std::string out;
  auto put_u64 = [&](std::uint64_t v) { out.append(reinterpret_cast<const char*>(&v), sizeof v); };
  put_u64(static_cast<std::uint64_t>(label));
  put_u64(geometry.size());
  out += geometry;
  put_u64(sketch.size());
  out.append(reinterpret_cast<const char*>(sketch.data()), sketch.size() * sizeof(float));
  out += metadata;
  return out;
}

Json manifest_json(const CollectionSettings& settings) {
  return {{"format", kFormat},
          {"frame", frame_name(settings.frame)},
          {"landmarks", to_landmark_file(settings.landmarks)},
          {"max_vertices", settings.limits.max_vertices},
          {"max_parts", settings.limits.max_parts},
          {"max_id_bytes", settings.max_id_bytes},
          {"max_metadata_bytes", settings.max_metadata_bytes},
          {"default_metric", metric_name(settings.default_metric)}};
}

Result<CollectionSettings> parse_manifest(const std::string& text) {
  CollectionSettings settings;
  try {
    const Json json = Json::parse(text);
    if (json.at("format").get<int>() != kFormat) {
      return Status(StatusCode::failed_precondition, "store: format " + json.at("format").dump() +
                                                         " is not supported (this build reads format " +
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
  } catch (const std::exception& error) {
    return Status(StatusCode::data_loss, std::string("store: manifest is damaged: ") + error.what());
  }
  return settings;
}

Result<std::unique_ptr<rocksdb::DB>> open_database(const std::string& directory, bool create) {
  rocksdb::Options options;
  options.create_if_missing = create;
  options.paranoid_checks = true;
  rocksdb::DB* raw = nullptr;
  if (Status s = from_rocksdb(rocksdb::DB::Open(options, directory, &raw), "opening '" + directory + "'"); !s.is_ok()) {
    return s;
  }
  return std::unique_ptr<rocksdb::DB>(raw);
}

std::string now_as_record() {
  const auto now = std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::system_clock::now().time_since_epoch());
  const std::uint64_t ms = static_cast<std::uint64_t>(now.count());
  return std::string(reinterpret_cast<const char*>(&ms), sizeof ms);
}

rocksdb::WriteOptions durable() {
  rocksdb::WriteOptions options;
  options.sync = true;  // acknowledged only once on disk
  return options;
}

}  // namespace

std::string shape_key(const std::string& id) { return kShapePrefix + id; }

Result<StoredShape> decode_record(const std::string& id, std::string_view bytes, std::size_t dimension,
                                  const ShapeLimits& limits) {
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
  if (sketch_size != dimension || (bytes.size() - offset) / sizeof(float) < sketch_size) {
    return damaged("sketch length does not match the landmark count");
  }
  StoredShape stored;
  stored.id = id;
  stored.label = static_cast<std::int64_t>(label);
  stored.shape = std::move(*shape);
  stored.sketch.resize(sketch_size);
  std::memcpy(stored.sketch.data(), bytes.data() + offset, sketch_size * sizeof(float));
  stored.metadata = std::string(bytes.substr(offset + sketch_size * sizeof(float)));
  return stored;
}

Result<StoredShape> Collection::State::load_as_given(const std::string& id) const {
  std::string value;
  const rocksdb::Status status = database->Get(rocksdb::ReadOptions(), shape_key(id), &value);
  if (status.IsNotFound()) return Status(StatusCode::not_found, "no shape with id '" + id + "'");
  if (Status s = from_rocksdb(status, "reading '" + id + "'"); !s.is_ok()) return s;
  return decode_record(id, value, sketcher->dimension(), settings.limits);
}

Result<StoredShape> Collection::State::load(const std::string& id) const {
  Result<StoredShape> stored = load_as_given(id);
  if (stored) stored->shape = apply_frame(stored->shape, settings.frame);
  return stored;
}

Collection::Collection(std::unique_ptr<State> state) : state_(std::move(state)) {}
Collection::~Collection() = default;

const CollectionSettings& Collection::settings() const { return state_->settings; }

std::size_t Collection::size() const {
  std::shared_lock lock(state_->labels_mutex);
  return state_->label_of_id.size();
}

namespace {

std::unique_ptr<Collection::State> new_state(const CollectionSettings& settings, std::unique_ptr<rocksdb::DB> db) {
  auto state = std::make_unique<Collection::State>();
  state->settings = settings;
  state->database = std::move(db);
  state->sketcher = std::make_unique<Sketcher>(settings.landmarks);
  state->index = std::make_unique<VectorIndex>(settings.landmarks.size(), VectorMetric::linf);
  return state;
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
    if (Status s = from_rocksdb((*db)->Put(durable(), kManifestKey, manifest), "writing the manifest"); !s.is_ok()) {
      return s;
    }
  }
  if (fs::exists(directory, error)) fs::remove(directory, error);  // an empty directory
  fs::rename(building, directory, error);
  if (error) return Status(StatusCode::io_error, "cannot move the new collection into '" + directory + "': " + error.message());
  if (Status s = sync_parent_directory(directory); !s.is_ok()) return s;
  return open(directory);
}

Result<std::unique_ptr<Collection>> Collection::open(const std::string& directory) {
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
  Result<CollectionSettings> settings = parse_manifest(manifest);
  if (!settings) return settings.status();
  auto state = new_state(*settings, std::move(*db));

  // Rebuild the derived state from the records (a vector index snapshot is future work).
  std::vector<std::int64_t> labels;
  std::vector<float> vectors;
  std::unique_ptr<rocksdb::Iterator> it(state->database->NewIterator(rocksdb::ReadOptions()));
  for (it->Seek(kShapePrefix); it->Valid() && it->key().starts_with(kShapePrefix); it->Next()) {
    const std::string id = it->key().ToString().substr(std::strlen(kShapePrefix));
    Result<StoredShape> stored = decode_record(id, it->value().ToStringView(), state->sketcher->dimension(),
                                               state->settings.limits);
    if (!stored) return stored.status();
    state->label_of_id[id] = stored->label;
    state->id_of_label[stored->label] = id;
    state->next_label = std::max(state->next_label, stored->label + 1);
    labels.push_back(stored->label);
    const std::vector<float> raw = state->sketcher->unweighted(stored->sketch);
    vectors.insert(vectors.end(), raw.begin(), raw.end());
  }
  if (Status s = from_rocksdb(it->status(), "scanning records"); !s.is_ok()) return s;
  if (Status s = state->index->add(labels, vectors); !s.is_ok()) return s;
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

Status Collection::upsert(std::span<const ShapeRecord> batch) {
  State& state = *state_;
  const std::size_t dimension = state.sketcher->dimension();
  // Check everything before writing anything.
  std::vector<Shape> framed;
  framed.reserve(batch.size());
  for (std::size_t i = 0; i < batch.size(); ++i) {
    if (Status s = check(batch[i]); !s.is_ok()) {
      return Status(s.code(), "record " + std::to_string(i) + " (id '" + batch[i].id.substr(0, 64) + "'): " + s.message(),
                    s.where());
    }
    framed.push_back(apply_frame(batch[i].shape, state.settings.frame));
  }

  // A later record with the same id wins, so only each id's last record is stored at all.
  std::unordered_map<std::string_view, std::size_t> last_of_id;
  for (std::size_t i = 0; i < batch.size(); ++i) last_of_id[batch[i].id] = i;
  std::vector<std::size_t> winners;
  for (std::size_t i = 0; i < batch.size(); ++i) {
    if (last_of_id[batch[i].id] == i) winners.push_back(i);
  }

  std::lock_guard write_lock(state.write_mutex);
  std::vector<std::int64_t> old_labels, new_labels;
  std::int64_t next_label;
  {
    std::shared_lock lock(state.labels_mutex);
    next_label = state.next_label;
    for (std::size_t i : winners) {
      if (auto found = state.label_of_id.find(batch[i].id); found != state.label_of_id.end()) {
        old_labels.push_back(found->second);
      }
    }
  }
  rocksdb::WriteBatch write;
  std::vector<float> sketch(dimension), index_vectors;
  index_vectors.reserve(winners.size() * dimension);
  for (std::size_t i : winners) {
    new_labels.push_back(next_label++);
    state.sketcher->sketch(framed[i], sketch);
    write.Put(shape_key(batch[i].id), encode_record(new_labels.back(), batch[i].shape, sketch, batch[i].metadata));
    const std::vector<float> raw = state.sketcher->unweighted(sketch);
    index_vectors.insert(index_vectors.end(), raw.begin(), raw.end());
  }
  write.Put(kLastWriteKey, now_as_record());
  if (Status s = from_rocksdb(state.database->Write(durable(), &write), "writing a batch"); !s.is_ok()) return s;

  // Durable: now make it searchable.
  std::unique_lock lock(state.labels_mutex);
  if (Status s = state.index->remove(old_labels); !s.is_ok()) return s;
  if (Status s = state.index->add(new_labels, index_vectors); !s.is_ok()) return s;
  for (std::int64_t old : old_labels) state.id_of_label.erase(old);
  for (std::size_t w = 0; w < winners.size(); ++w) {
    const std::string& id = batch[winners[w]].id;
    state.label_of_id[id] = new_labels[w];
    state.id_of_label[new_labels[w]] = id;
  }
  state.next_label = next_label;
  return Status::ok();
}

Status Collection::remove(std::span<const std::string> ids) {
  State& state = *state_;
  std::lock_guard write_lock(state.write_mutex);
  rocksdb::WriteBatch write;
  std::vector<std::int64_t> labels;
  std::vector<std::string> removed;
  {
    std::shared_lock lock(state.labels_mutex);
    for (const std::string& id : ids) {
      auto found = state.label_of_id.find(id);
      if (found == state.label_of_id.end()) continue;
      write.Delete(shape_key(id));
      labels.push_back(found->second);
      removed.push_back(id);
    }
  }
  if (labels.empty()) return Status::ok();
  write.Put(kLastWriteKey, now_as_record());
  if (Status s = from_rocksdb(state.database->Write(durable(), &write), "deleting"); !s.is_ok()) return s;
  std::unique_lock lock(state.labels_mutex);
  if (Status s = state.index->remove(labels); !s.is_ok()) return s;
  for (std::size_t i = 0; i < labels.size(); ++i) {
    state.id_of_label.erase(labels[i]);
    state.label_of_id.erase(removed[i]);
  }
  return Status::ok();
}

Result<std::vector<ShapeRecord>> Collection::list(const std::string& after, std::size_t limit) const {
  std::vector<ShapeRecord> page;
  std::unique_ptr<rocksdb::Iterator> it(state_->database->NewIterator(rocksdb::ReadOptions()));
  const std::string start = shape_key(after);
  it->Seek(start);
  if (it->Valid() && !after.empty() && it->key() == start) it->Next();
  for (; it->Valid() && it->key().starts_with(kShapePrefix) && page.size() < limit; it->Next()) {
    const std::string id = it->key().ToString().substr(std::strlen(kShapePrefix));
    Result<StoredShape> stored =
        decode_record(id, it->value().ToStringView(), state_->sketcher->dimension(), state_->settings.limits);
    if (!stored) return stored.status();
    page.push_back({id, std::move(stored->shape), std::move(stored->metadata)});
  }
  if (Status s = from_rocksdb(it->status(), "listing records"); !s.is_ok()) return s;
  return page;
}

CollectionStatistics Collection::statistics() const {
  CollectionStatistics statistics;
  {
    std::shared_lock lock(state_->labels_mutex);
    statistics.shape_count = state_->label_of_id.size();
    std::size_t id_bytes = 0;
    for (const auto& [id, label] : state_->label_of_id) id_bytes += id.size();
    // Two hash maps (id ↔ label): key, value and about two pointers of node and bucket each.
    statistics.index_bytes = state_->index->memory_bytes() + 2 * id_bytes +
                             statistics.shape_count * 2 * (sizeof(std::string) + sizeof(std::int64_t) + 4 * sizeof(void*));
  }
  std::uint64_t sst = 0, memtables = 0;
  state_->database->GetIntProperty(rocksdb::DB::Properties::kLiveSstFilesSize, &sst);
  state_->database->GetIntProperty(rocksdb::DB::Properties::kCurSizeAllMemTables, &memtables);
  statistics.store_bytes = sst + memtables;
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
