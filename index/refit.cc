// Landmark refit (Collection::refit, see collection.h): fit, re-sketch into the next
// generation beside the current one, switch with one synced manifest write, drop the old
// generation's sketches. Store layout in index/STORE_FORMAT.md.
#include <rocksdb/iterator.h>

#include <cstring>

#include "index/collection_state.h"
#include "sketch/landmarks/fitting.h"

namespace waymark {
namespace {

// Up to `count` stored ids, drawn uniformly (reservoir sampling, seeded).
std::vector<std::string> sample_ids(const Collection::State& state, std::size_t count, std::uint64_t seed) {
  SeededRandom random(seed);
  std::vector<std::string> sample;
  std::shared_lock lock(state.labels_mutex);
  std::size_t seen = 0;
  for (const auto& entry : state.label_of_id) {
    ++seen;
    if (sample.size() < count) {
      sample.push_back(entry.first);
    } else if (std::size_t slot = random.below(seen); slot < count) {
      sample[slot] = entry.first;
    }
  }
  // unordered_map order depends on the library; sort so the same seed and ids give one fit.
  std::sort(sample.begin(), sample.end());
  return sample;
}

Result<LandmarkSet> fit_next_generation(const Collection::State& state, const LandmarkSet& current,
                                        const RefitOptions& options) {
  std::vector<Shape> sample;
  for (const std::string& id : sample_ids(state, options.sample_size, options.seed)) {
    Result<StoredShape> stored = state.load_as_given(id);
    if (!stored) {
      if (stored.status().code() == StatusCode::not_found) continue;  // deleted meanwhile
      return stored.status();
    }
    sample.push_back(apply_frame(stored->shape, state.settings.frame));
  }
  if (sample.size() < 2) {
    return Status(StatusCode::failed_precondition, "a landmark refit needs at least two stored shapes");
  }
  FitOptions fit;
  fit.count = options.landmark_count > 0 ? options.landmark_count : current.size();
  fit.candidate_count = std::max(options.candidate_count, fit.count);
  fit.pair_count = options.pair_count;
  fit.seed = options.seed;
  fit.domain = current.domain;
  Result<LandmarkSet> fitted = fit_landmarks(sample, fit);
  if (fitted) fitted->generation = current.generation + 1;
  return fitted;
}

}  // namespace

Result<std::uint64_t> Collection::refit(const RefitOptions& options, RefitProgress& progress) {
  State& state = *state_;
  std::unique_lock refit_lock(state.refit_mutex, std::try_to_lock);
  if (!refit_lock.owns_lock()) {
    return Status(StatusCode::failed_precondition, "a landmark refit of this collection is already running");
  }
  if (options.batch_size == 0) return invalid_argument("batch size must be at least 1", "batch_size");
  const std::shared_ptr<Generation> current = state.current_generation();
  Result<LandmarkSet> fitted = fit_next_generation(state, current->sketcher.landmarks(), options);
  if (!fitted) return fitted.status();
  const CollectionSettings settings_now = settings();
  auto next = std::make_shared<Generation>(*fitted, settings_now.index_kind, settings_now.approximate);
  const std::uint64_t number = next->number();

  // Abandoning before the switch: forget the next generation and delete what was written of
  // it (the next open() would also remove it). When the switch itself failed, whether its
  // manifest reached the disk is unknown, so the sketches stay for open() to sort out.
  auto abandon = [&](Status why, bool delete_sketches = true) -> Status {
    std::lock_guard write_lock(state.write_mutex);
    state.pending.reset();
    state.pending_covered_up_to.clear();
    if (delete_sketches) {
      rocksdb::WriteBatch cleanup;
      cleanup.DeleteRange(sketch_prefix(number), sketch_prefix(number + 1));
      (void)state.database->Write(rocksdb::WriteOptions(), &cleanup);
    }
    return why;
  };
  {
    std::lock_guard write_lock(state.write_mutex);
    state.pending = next;
    state.pending_covered_up_to.clear();  // nothing covered yet
  }
  progress.shapes_total = size();

  // Re-sketch in key order, one batch per hold of the write lock, so writes wait at most one
  // batch. Each step reads the records as they are now; writes to ids already covered sketch
  // into `next` themselves (Collection::upsert).
  std::string after = shape_key("");
  std::vector<float> sketch(next->sketcher.dimension());
  // One step: the next batch of records after `after`; returns how many were sketched.
  auto sketch_next_batch = [&]() -> Result<std::size_t> {
    std::lock_guard write_lock(state.write_mutex);
    rocksdb::WriteBatch batch;
    std::vector<std::int64_t> labels;
    std::vector<float> vectors;
    std::unique_ptr<rocksdb::Iterator> it(state.database->NewIterator(rocksdb::ReadOptions()));
    it->Seek(after);
    if (it->Valid() && it->key() == after) it->Next();
    std::string last_key;
    for (; it->Valid() && it->key().starts_with(shape_key("")) && labels.size() < options.batch_size; it->Next()) {
      const std::string key = it->key().ToString();
      const std::string id = key.substr(shape_key("").size());
      Result<StoredShape> stored = decode_record(id, it->value().ToStringView(), state.settings.limits);
      if (!stored) return stored.status();
      const Shape framed = apply_frame(stored->shape, state.settings.frame);
      next->sketcher.sketch(framed, sketch);
      batch.Put(sketch_key(number, id), encode_sketch(stored->label, sketch));
      labels.push_back(stored->label);
      next->append_index_vector(sketch, framed, Frame::absolute, vectors);
      last_key = key;
    }
    if (Status s = from_rocksdb(it->status(), "scanning records for the refit"); !s.is_ok()) return s;
    if (labels.empty()) return std::size_t{0};
    // Not synced: until the switch these sketches matter to no one; the switch syncs the log.
    if (Status s = from_rocksdb(state.database->Write(rocksdb::WriteOptions(), &batch), "writing sketches");
        !s.is_ok()) {
      return s;
    }
    if (Status s = next->add(labels, vectors); !s.is_ok()) return s;
    state.pending_covered_up_to = last_key;
    after = last_key;
    return labels.size();
  };
  while (true) {
    if (progress.cancel) return abandon(Status(StatusCode::failed_precondition, "the landmark refit was cancelled"));
    Result<std::size_t> done = sketch_next_batch();
    if (!done) return abandon(done.status());
    if (*done == 0) break;
    progress.shapes_done += *done;
  }

  // The switch: one synced manifest write names the new landmarks. The log is synced first so
  // that every sketch written above is on disk before the manifest that points at them.
  auto switch_generation = [&]() -> Status {
    std::lock_guard write_lock(state.write_mutex);
    if (Status s = from_rocksdb(state.database->SyncWAL(), "syncing the sketches"); !s.is_ok()) return s;
    CollectionSettings settings = this->settings();
    settings.landmarks = *fitted;
    rocksdb::WriteBatch manifest;
    put_manifest(manifest, settings);
    if (Status s = from_rocksdb(state.database->Write(durable_write(), &manifest), "switching generation");
        !s.is_ok()) {
      return s;
    }
    std::unique_lock lock(state.labels_mutex);
    state.settings.landmarks = std::move(settings.landmarks);  // the rest is read without the lock
    state.current = next;
    state.pending.reset();
    state.pending_covered_up_to.clear();
    return Status::ok();
  };
  if (Status s = switch_generation(); !s.is_ok()) return abandon(s, false);
  // Queries that started before the switch still hold the old generation's in-memory index;
  // its stored sketches are no longer needed by anyone. Not synced: open() removes leftovers.
  rocksdb::WriteBatch cleanup;
  const std::uint64_t old_number = current->number();
  cleanup.DeleteRange(sketch_prefix(old_number), sketch_prefix(old_number + 1));
  (void)state.database->Write(rocksdb::WriteOptions(), &cleanup);
  return number;
}

}  // namespace waymark
