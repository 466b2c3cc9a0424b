// Landmark refit: a new generation fitted from stored shapes, switched atomically, durable,
// exact answers before, during and after; cancellation; the format-2 store upgrade.
#include <rocksdb/db.h>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>
#include <thread>

#include "index/collection.h"
#include "index/shape_codec.h"
#include "sketch/distance/hausdorff.h"
#include "sketch/landmarks/sketcher.h"
#include "support/collection_helpers.h"

using namespace waymark;
using namespace waymark::testing;

namespace {

// Every stored shape's sketch in the current generation equals a fresh sketch of its shape:
// a sketch-metric query by the shape finds a hit at sketch distance 0.
void require_sketches_match_shapes(const Collection& collection, const std::vector<ShapeRecord>& records,
                                   std::size_t step) {
  for (std::size_t i = 0; i < records.size(); i += step) {
    QueryOptions options;
    options.metric = Metric::sketch;
    options.k = 1;
    Result<QueryAnswer> answer = collection.nearest(records[i].shape, options);
    REQUIRE(answer.is_ok());
    REQUIRE(answer->hits.size() == 1);
    CHECK(answer->hits[0].sketch_distance == 0);
  }
}

void require_exact_equals_full_scan(const Collection& collection, const std::vector<ShapeRecord>& records,
                                    std::uint64_t seed) {
  SeededRandom random(seed);
  for (int q = 0; q < 6; ++q) {
    Shape query = records[random.below(records.size())].shape;
    for (Point& p : query.parts[0]) p.y += 0.05 * random.uniform();
    QueryOptions options;
    options.exact = true;
    options.metric = q % 2 ? Metric::frechet : Metric::hausdorff;
    Result<QueryAnswer> exact = collection.nearest(query, options);
    Result<QueryAnswer> scan = collection.nearest_by_full_scan(query, options);
    REQUIRE((exact.is_ok() && scan.is_ok()));
    CHECK(exact->certified);
    require_same(*exact, *scan);
  }
}

}  // namespace

TEST_CASE("RefitSwitchesToAFittedGenerationThatSurvivesRestart", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(800, 41);
  {
    const std::unique_ptr<Collection> collection = filled_collection(directory, records);
    CHECK(collection->settings().landmarks.generation == 1);
    RefitOptions options;
    options.landmark_count = 48;
    options.sample_size = 200;
    options.batch_size = 97;  // several steps, the last one partial
    RefitProgress progress;
    Result<std::uint64_t> generation = collection->refit(options, progress);
    REQUIRE(generation.is_ok());
    CHECK(*generation == 2);
    CHECK(progress.shapes_done == 800);
    CHECK(progress.shapes_total == 800);
    const LandmarkSet landmarks = collection->settings().landmarks;
    CHECK(landmarks.generation == 2);
    CHECK(landmarks.layout == LandmarkLayout::fitted);
    CHECK(landmarks.size() == 48);
    require_sketches_match_shapes(*collection, records, 7);
    require_exact_equals_full_scan(*collection, records, 42);
  }
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path);
  REQUIRE(reopened.is_ok());
  CHECK((*reopened)->size() == 800);
  CHECK((*reopened)->settings().landmarks.generation == 2);
  CHECK((*reopened)->settings().landmarks.size() == 48);
  require_sketches_match_shapes(**reopened, records, 7);
  require_exact_equals_full_scan(**reopened, records, 43);
}

TEST_CASE("CancelledRefitKeepsTheOldGeneration", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(300, 44);
  {
    const std::unique_ptr<Collection> collection = filled_collection(directory, records);
    const LandmarkSet before = collection->settings().landmarks;
    RefitProgress progress;
    progress.cancel = true;
    Result<std::uint64_t> generation = collection->refit(RefitOptions{}, progress);
    REQUIRE_FALSE(generation.is_ok());
    CHECK(generation.status().code() == StatusCode::failed_precondition);
    CHECK(collection->settings().landmarks == before);
    require_sketches_match_shapes(*collection, records, 11);
  }
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path);
  REQUIRE(reopened.is_ok());
  CHECK((*reopened)->settings().landmarks.generation == 1);
  require_sketches_match_shapes(**reopened, records, 11);
}

TEST_CASE("RefitNeedsTwoStoredShapes") {
  TemporaryDirectory directory;
  const std::unique_ptr<Collection> collection = filled_collection(directory, synthetic_records(1, 45));
  RefitProgress progress;
  Result<std::uint64_t> generation = collection->refit(RefitOptions{}, progress);
  REQUIRE_FALSE(generation.is_ok());
  CHECK(generation.status().code() == StatusCode::failed_precondition);
}

// Writes and queries go on while a refit re-sketches in small steps. Every answer must be
// right (hits are at their exact distance, in order, and exact answers certified), and after
// the switch every shape — also those written during the refit — has a sketch of the new
// generation equal to a fresh sketch of its shape.
TEST_CASE("WritesAndQueriesDuringRefitStayConsistent", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(2400, 46);
  Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, settings_with(32));
  REQUIRE(created.is_ok());
  Collection& collection = **created;
  REQUIRE(collection.upsert(std::span(records).first(1200)).is_ok());

  RefitProgress progress;
  Result<std::uint64_t> refitted = Status(StatusCode::internal, "not run");
  std::thread refit([&] {
    RefitOptions options;
    options.batch_size = 25;
    options.sample_size = 300;
    refitted = collection.refit(options, progress);
  });
  std::atomic<bool> writing = true;
  std::thread writer([&] {
    // New shapes (ids sort both before and after those the refit passed), replacements, deletes.
    for (std::size_t start = 1200; start < records.size(); start += 100) {
      if (!collection.upsert(std::span(records).subspan(start, 100)).is_ok()) break;
      std::vector<ShapeRecord> replaced(records.begin() + (start - 1200), records.begin() + (start - 1150));
      for (ShapeRecord& record : replaced) record.shape = records[(start + 7) % 1200].shape;
      if (!collection.upsert(replaced).is_ok()) break;
    }
    writing = false;
  });
  std::atomic<int> answers = 0, wrong = 0, failures = 0, uncertified = 0;
  SeededRandom random(47);
  while (writing || answers < 30) {
    const Shape query = records[random.below(records.size())].shape;
    QueryOptions options;
    options.exact = true;
    const bool writes_may_overlap = writing;  // read before the query starts
    Result<QueryAnswer> answer = collection.nearest(query, options);
    if (!answer) {
      ++failures;
      continue;
    }
    ++answers;
    if (!answer->certified) ++uncertified;
    for (std::size_t i = 0; i < answer->hits.size(); ++i) {
      const QueryHit& hit = answer->hits[i];
      if (i > 0 && hit.distance < answer->hits[i - 1].distance) ++wrong;
      Result<ShapeRecord> stored = collection.get(hit.id);
      if (!stored) continue;
      const double exact = hausdorff(apply_frame(query, Frame::unit), apply_frame(stored->shape, Frame::unit)).value;
      // Replaced while the query ran: the hit may be of the earlier shape. Once all writes
      // were done before the query began, every distance must match what is stored.
      if (std::abs(exact - hit.distance) > 1e-9 && !writes_may_overlap) ++wrong;
    }
  }
  writer.join();
  refit.join();
  INFO("answers " << answers << ", wrong " << wrong << ", uncertified " << uncertified << ", failures " << failures);
  REQUIRE(refitted.is_ok());
  CHECK(*refitted == 2);
  CHECK(failures == 0);
  CHECK(wrong == 0);
  CHECK(uncertified == 0);
  CHECK(collection.size() == records.size());
  std::vector<ShapeRecord> final_records;
  for (const ShapeRecord& record : records) final_records.push_back(*collection.get(record.id));
  require_sketches_match_shapes(collection, final_records, 3);
  require_exact_equals_full_scan(collection, final_records, 48);
}

// A store written in format 2 (each record kept its sketch inside it) is upgraded by open():
// built here byte by byte as index/STORE_FORMAT.md describes format 2.
TEST_CASE("FormatTwoStoreIsUpgradedOnOpen") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(200, 49);
  const LandmarkSet landmarks = *grid_landmarks(unit_frame_domain(), 16);
  {
    rocksdb::Options options;
    options.create_if_missing = true;
    rocksdb::DB* raw = nullptr;
    REQUIRE(rocksdb::DB::Open(options, directory.path.string(), &raw).ok());
    std::unique_ptr<rocksdb::DB> database(raw);
    const nlohmann::json manifest = {{"format", 2},          {"frame", "unit"},          {"landmarks", to_landmark_file(landmarks)},
                                     {"max_vertices", 100000}, {"max_parts", 10000},       {"max_id_bytes", 256},
                                     {"max_metadata_bytes", 16384}, {"default_metric", "frechet"}};
    REQUIRE(database->Put(rocksdb::WriteOptions(), "manifest", manifest.dump()).ok());
    const Sketcher sketcher(landmarks);
    std::int64_t label = 1;
    for (const ShapeRecord& record : records) {
      const std::string geometry = encode_shape(record.shape);
      const std::vector<float> sketch = sketcher.sketch(apply_frame(record.shape, Frame::unit));
      std::string value;
      auto put_u64 = [&](std::uint64_t v) { value.append(reinterpret_cast<const char*>(&v), 8); };
      put_u64(label++);
      put_u64(geometry.size());
      value += geometry;
      put_u64(sketch.size());
      value.append(reinterpret_cast<const char*>(sketch.data()), sketch.size() * sizeof(float));
      value += record.metadata;
      REQUIRE(database->Put(rocksdb::WriteOptions(), "s/" + record.id, value).ok());
    }
  }
  for (int opening = 0; opening < 2; ++opening) {  // the second open reads format 3
    Result<std::unique_ptr<Collection>> collection = Collection::open(directory.path);
    REQUIRE(collection.is_ok());
    CHECK((*collection)->size() == records.size());
    CHECK((*collection)->settings().default_metric == Metric::frechet);
    Result<ShapeRecord> first = (*collection)->get(records[0].id);
    REQUIRE(first.is_ok());
    CHECK(first->shape == records[0].shape);
    CHECK(first->metadata == records[0].metadata);
    require_sketches_match_shapes(**collection, records, 5);
    require_exact_equals_full_scan(**collection, records, 50);
  }
}

// open() deletes the sketches of every other landmark generation (a crashed refit's leftovers,
// index/STORE_FORMAT.md) and writes nothing when there are none: each write at open would
// leave one more small table file behind (index/collection.cc).
TEST_CASE("OpenRemovesLeftoverSketchesAndWritesNothingWithoutThem") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(50, 51);
  const CollectionSettings settings = settings_with(16);
  const std::uint64_t generation = settings.landmarks.generation;
  {
    auto collection = Collection::create(directory.path, settings);
    REQUIRE(collection.is_ok());
    REQUIRE((*collection)->upsert(records).is_ok());
  }
  auto sketch_key = [](std::uint64_t g, const std::string& id) {
    char hex[17];
    std::snprintf(hex, sizeof hex, "%016llx", static_cast<unsigned long long>(g));
    return "v/" + std::string(hex) + "/" + id;
  };
  auto with_raw_store = [&](const auto& use) {
    rocksdb::DB* raw = nullptr;
    REQUIRE(rocksdb::DB::Open(rocksdb::Options(), directory.path.string(), &raw).ok());
    std::unique_ptr<rocksdb::DB> database(raw);
    use(*database);
    REQUIRE(database->Close().ok());
  };
  with_raw_store([&](rocksdb::DB& database) {
    REQUIRE(database.Put(rocksdb::WriteOptions(), sketch_key(generation + 1, records[0].id), "leftover").ok());
    if (generation > 0) {
      REQUIRE(database.Put(rocksdb::WriteOptions(), sketch_key(generation - 1, records[1].id), "leftover").ok());
    }
  });
  for (int opening = 0; opening < 2; ++opening) {
    std::uint64_t sequence_before = 0;
    with_raw_store([&](rocksdb::DB& database) { sequence_before = database.GetLatestSequenceNumber(); });
    {
      Result<std::unique_ptr<Collection>> collection = Collection::open(directory.path);
      REQUIRE(collection.is_ok());
      CHECK((*collection)->size() == records.size());
    }
    with_raw_store([&](rocksdb::DB& database) {
      std::size_t sketches = 0, others = 0;
      std::unique_ptr<rocksdb::Iterator> keys(database.NewIterator(rocksdb::ReadOptions()));
      for (keys->Seek("v/"); keys->Valid() && keys->key().starts_with("v/"); keys->Next()) {
        ++(keys->key().starts_with(sketch_key(generation, "")) ? sketches : others);
      }
      CHECK(sketches == records.size());
      CHECK(others == 0);
      // The first open wrote the deletion; the second had nothing to write.
      if (opening == 1) CHECK(database.GetLatestSequenceNumber() == sequence_before);
    });
  }
}
