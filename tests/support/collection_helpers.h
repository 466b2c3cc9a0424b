// Helpers shared by the collection tests: temporary directories, seeded synthetic records,
// collections filled with them, and answer comparison.
#pragma once

#include <unistd.h>

#include <catch2/catch.hpp>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "index/collection.h"
#include "support/random_shapes.h"

namespace waymark::testing {

struct TemporaryDirectory {
  TemporaryDirectory() {
    path = std::filesystem::temp_directory_path() /
           ("waymark-test-" + std::to_string(::getpid()) + "-" + std::to_string(counter++));
    std::filesystem::remove_all(path);
  }
  ~TemporaryDirectory() {
    std::error_code ignored;  // never throw from a destructor (a store's thread may still be deleting files)
    std::filesystem::remove_all(path, ignored);
  }
  std::filesystem::path path;
  static inline int counter = 0;
};

inline CollectionSettings settings_with(std::size_t landmarks) {
  CollectionSettings settings;
  settings.frame = Frame::unit;
  settings.landmarks = *grid_landmarks(unit_frame_domain(), landmarks);
  return settings;
}

// Perturbed copies of a few templates: realistic near-duplicates with a clear neighbour
// structure (seeded; invented data).
inline std::vector<ShapeRecord> synthetic_records(std::size_t count, std::uint64_t seed) {
  SeededRandom random(seed);
  std::vector<Shape> templates;
  for (int t = 0; t < 40; ++t) templates.push_back(random_walk(random, 6 + random.below(20)));
  std::vector<ShapeRecord> records;
  for (std::size_t i = 0; i < count; ++i) {
    const Shape shape = jittered(templates[random.below(templates.size())], random, 0.3);
    records.push_back({"shape-" + std::to_string(i), shape,
                       "{\"n\":" + std::to_string(i) + ",\"group\":\"g" + std::to_string(i % 3) + "\"}"});
  }
  return records;
}

inline void require_same(const QueryAnswer& a, const QueryAnswer& b) {
  REQUIRE(a.hits.size() == b.hits.size());
  for (std::size_t i = 0; i < a.hits.size(); ++i) {
    CHECK(a.hits[i].id == b.hits[i].id);
    CHECK(a.hits[i].distance == b.hits[i].distance);
  }
}

// A new 64-landmark collection holding `records` (one batch).
inline std::unique_ptr<Collection> filled_collection(const TemporaryDirectory& directory, const std::vector<ShapeRecord>& records) {
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(64));
  REQUIRE(collection.is_ok());
  REQUIRE((*collection)->upsert(records).is_ok());
  return std::move(*collection);
}


}  // namespace waymark::testing
