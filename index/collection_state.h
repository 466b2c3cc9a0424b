// Internal to index/: what a Collection holds, shared by collection.cc (storage) and
// query_planner.cc (queries).
#pragma once

#include <rocksdb/db.h>

#include <memory>
#include <shared_mutex>
#include <string>
#include <unordered_map>
#include <vector>

#include "index/collection.h"
#include "index/vector_index.h"
#include "sketch/landmarks/sketcher.h"

namespace waymark {

// One stored shape as decoded from its record.
struct StoredShape {
  std::string id;
  std::int64_t label = 0;
  Shape shape;  // as given by decode_record; in the collection's frame from State::load
  std::vector<float> sketch;
  std::string metadata;
};

struct Collection::State {
  CollectionSettings settings;
  std::unique_ptr<rocksdb::DB> database;
  std::unique_ptr<Sketcher> sketcher;
  std::unique_ptr<VectorIndex> index;
  // The index holds sketcher->unweighted(sketch): raw distances d(q_i, S), under L∞.

  mutable std::shared_mutex labels_mutex;  // guards the two maps and next_label
  std::unordered_map<std::string, std::int64_t> label_of_id;
  std::unordered_map<std::int64_t, std::string> id_of_label;
  std::int64_t next_label = 1;
  std::mutex write_mutex;  // writes are serialised

  Result<StoredShape> load(const std::string& id) const;  // shape framed, for queries
  Result<StoredShape> load_as_given(const std::string& id) const;
};

std::string shape_key(const std::string& id);
Result<StoredShape> decode_record(const std::string& id, std::string_view bytes, std::size_t dimension,
                                  const ShapeLimits& limits);

}  // namespace waymark
