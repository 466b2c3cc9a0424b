// Durable collections and the query engine: exact mode against a full scan, fast-mode recall,
// restart, upsert and delete, all-or-nothing batches, damaged records.
#include <catch2/catch.hpp>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <rocksdb/db.h>
#include <thread>

#include "index/collection.h"
#include "index/shape_codec.h"
#include "sketch/distance/frechet.h"
#include "sketch/distance/hausdorff.h"
#include "support/collection_helpers.h"
#include "support/random_shapes.h"
#include "support/recall.h"
#include "support/shape_helpers.h"

using namespace waymark;
using namespace waymark::testing;

TEST_CASE("ShapeCodecRoundTripsAndRejectsDamage") {
  const Shape shape = testing::wkt("MULTIPOLYGON (((0 0, 4 0, 4 4, 0 0), (1 1, 2 1, 2 2, 1 1)), ((5 5, 6 5, 6 6, 5 5)))");
  const std::string bytes = encode_shape(shape);
  Result<Shape> back = decode_shape(bytes);
  REQUIRE(back.is_ok());
  CHECK(*back == shape);
  for (std::size_t cut : {std::size_t{0}, std::size_t{3}, bytes.size() / 2, bytes.size() - 1}) {
    Result<Shape> damaged = decode_shape(std::string_view(bytes).substr(0, cut));
    REQUIRE_FALSE(damaged.is_ok());
    CHECK(damaged.status().code() == StatusCode::data_loss);
  }
  std::string huge = bytes;
  huge[6] = '\x7f';  // first part's vertex count made enormous: refused before allocating
  CHECK(decode_shape(huge).status().code() == StatusCode::data_loss);
}

namespace {

// The query in exact mode, after checking that it is certified and equal to the full scan.
QueryAnswer exact_answer_equal_to_full_scan(const Collection& collection, const Shape& query, Metric metric) {
  QueryOptions options;
  options.metric = metric;
  options.exact = true;
  const auto start = std::chrono::steady_clock::now();
  Result<QueryAnswer> exact = collection.nearest(query, options);
  const double elapsed = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - start).count();
  Result<QueryAnswer> scan = collection.nearest_by_full_scan(query, options);
  REQUIRE((exact.is_ok() && scan.is_ok()));
  INFO(metric_name(metric) << ": exact evaluations " << exact->stats.exact_evaluations);
  CHECK(exact->certified);
  // The exhaustive scan's rounds were timed, within the query's own time.
  CHECK(exact->stats.index_milliseconds > 0);
  CHECK(exact->stats.index_milliseconds <= elapsed);
  require_same(*exact, *scan);
  return *exact;
}

}  // namespace

TEST_CASE("ExactModeMatchesFullScan") {
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(64));
  REQUIRE(collection.is_ok());
  const std::vector<ShapeRecord> records = synthetic_records(1500, 5);
  for (std::size_t start = 0; start < records.size(); start += 500) {
    REQUIRE((*collection)->upsert(std::span(records).subspan(start, 500)).is_ok());
  }
  CHECK((*collection)->size() == 1500);
  SeededRandom random(6);
  for (Metric metric : {Metric::hausdorff, Metric::frechet, Metric::discrete_frechet}) {
    for (int q = 0; q < 8; ++q) {
      Shape query = records[random.below(records.size())].shape;
      for (Point& p : query.parts[0]) p.x += 0.1 * random.uniform();
      INFO("query " << q);
      const QueryAnswer exact = exact_answer_equal_to_full_scan(**collection, query, metric);
      CHECK(exact.stats.exact_evaluations < 1500 / 2);  // the bounds did prune
    }
  }
}

TEST_CASE("ManyTiedCopiesKeepTheSmallestIdsAndMatchTheFullScan") {
  // A part stored 700 times: every copy is at the same distance from the query, so the answer
  // is decided by id alone, and the Fréchet ranking must hold more tied candidates than it
  // keeps waiting at once (it completes them in batches).
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(64));
  REQUIRE(collection.is_ok());
  std::vector<ShapeRecord> records = synthetic_records(300, 11);
  const Shape part = records.front().shape;
  std::vector<ShapeRecord> copies;
  for (int i = 0; i < 700; ++i) {
    char id[16];
    std::snprintf(id, sizeof id, "copy-%04d", i);
    copies.push_back({id, part, "{}"});
  }
  // Stored in a seeded random order, so that the smallest ids arrive spread among the others.
  SeededRandom random(12);
  for (std::size_t i = copies.size() - 1; i > 0; --i) std::swap(copies[i], copies[random.below(i + 1)]);
  REQUIRE((*collection)->upsert(records).is_ok());
  REQUIRE((*collection)->upsert(copies).is_ok());
  Shape query = part;
  for (Point& p : query.parts[0]) p.y += 0.02;
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    const QueryAnswer exact = exact_answer_equal_to_full_scan(**collection, query, metric);
    REQUIRE(exact.hits.size() == 10);
    for (int i = 0; i < 10; ++i) {
      char id[16];
      std::snprintf(id, sizeof id, "copy-%04d", i);
      CHECK(exact.hits[i].id == id);
      CHECK(exact.hits[i].distance == exact.hits[0].distance);
    }
  }
}

TEST_CASE("FastModeRecallOnSyntheticShapes") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(2000, 7);
  const std::unique_ptr<Collection> collection = filled_collection(directory, records);
  SeededRandom random(8);
  testing::RecallCount recall_count;
  for (int q = 0; q < 30; ++q) {
    const Shape query = records[random.below(records.size())].shape;
    QueryOptions options;
    Result<QueryAnswer> fast = collection->nearest(query, options);
    Result<QueryAnswer> scan = collection->nearest_by_full_scan(query, options);
    REQUIRE((fast.is_ok() && scan.is_ok()));
    recall_count.add(*scan, *fast);
  }
  const double recall = recall_count.recall();
  WARN("fast-mode recall@10 (Hausdorff, 2000 synthetic shapes, 64 landmarks): " << recall);
  CHECK(recall >= 0.95);
}

TEST_CASE("RestartReadsEverythingBack") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(300, 9);
  QueryOptions options;
  options.exact = true;
  QueryAnswer before;
  {
    Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(32));
    REQUIRE(collection.is_ok());
    REQUIRE((*collection)->upsert(records).is_ok());
    before = *(*collection)->nearest(records[0].shape, options);
  }
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path);
  REQUIRE(reopened.is_ok());
  CHECK((*reopened)->size() == 300);
  require_same(*(*reopened)->nearest(records[0].shape, options), before);
  Result<ShapeRecord> got = (*reopened)->get("shape-17");
  REQUIRE(got.is_ok());
  CHECK(got->metadata == records[17].metadata);
  CHECK(got->shape == records[17].shape);  // the caller's coordinates, not the framed ones
  CHECK(Collection::create(directory.path, settings_with(32)).status().code() == StatusCode::already_exists);
  // Opening a path with no collection fails cleanly and creates nothing there.
  const std::filesystem::path missing = directory.path / "nothing-here";
  CHECK(Collection::open(missing).status().code() == StatusCode::not_found);
  CHECK_FALSE(std::filesystem::exists(missing));
}

TEST_CASE("UpsertReplacesAndDeleteRemoves") {
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(16));
  REQUIRE(collection.is_ok());
  Collection& c = **collection;
  const Shape square = testing::wkt("POLYGON ((0 0, 1 0, 1 1, 0 1, 0 0))");
  const Shape line = testing::wkt("LINESTRING (0 0, 3 1)");
  REQUIRE(c.upsert(std::vector<ShapeRecord>{{"a", square, "{}"}, {"b", line, "{}"}}).is_ok());
  REQUIRE(c.upsert(std::vector<ShapeRecord>{{"a", line, "{\"rev\":2}"}}).is_ok());
  CHECK(c.size() == 2);
  QueryOptions options;
  options.exact = true;
  Result<QueryAnswer> answer = c.nearest(line, options);
  REQUIRE(answer.is_ok());
  REQUIRE(answer->hits.size() == 2);
  CHECK(answer->hits[0].distance == 0);
  CHECK(answer->hits[1].distance == 0);  // both are now the same line
  const std::vector<std::string> gone{"a", "missing"};
  REQUIRE(c.remove(gone).is_ok());
  CHECK(c.size() == 1);
  CHECK(c.get("a").status().code() == StatusCode::not_found);
  Result<QueryAnswer> after = c.nearest(line, options);
  REQUIRE(after->hits.size() == 1);
  CHECK(after->hits[0].id == "b");
  // More like this: the stored shape itself is excluded.
  REQUIRE(c.upsert(std::vector<ShapeRecord>{{"c", square, "{}"}}).is_ok());
  Result<QueryAnswer> like = c.nearest_to_stored("b", options);
  REQUIRE(like.is_ok());
  REQUIRE(like->hits.size() == 1);
  CHECK(like->hits[0].id == "c");
}

TEST_CASE("BadRecordRejectsTheWholeBatch") {
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(16));
  REQUIRE(collection.is_ok());
  const Shape line = testing::wkt("LINESTRING (0 0, 3 1)");
  Shape broken = line;
  broken.parts[0][1].y = std::nan("");
  const Status s = (*collection)->upsert(std::vector<ShapeRecord>{{"good", line, "{}"}, {"bad", broken, "{}"}});
  CHECK(s.code() == StatusCode::invalid_argument);
  CHECK(s.message() == "record 1 (id 'bad'): coordinate is not a finite number (NaN or infinity)");
  CHECK(s.where() == "part 0, vertex 1");
  CHECK((*collection)->size() == 0);
  CHECK((*collection)->get("good").status().code() == StatusCode::not_found);
  CHECK((*collection)->upsert(std::vector<ShapeRecord>{{"x", line, "[1]"}}).message() ==
        "record 0 (id 'x'): metadata must be a JSON object");
  CHECK((*collection)->upsert(std::vector<ShapeRecord>{{"", line, "{}"}}).code() == StatusCode::invalid_argument);
}

TEST_CASE("FrechetQueryOnSeveralStrokesIsNotApplicable") {
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(16));
  REQUIRE(collection.is_ok());
  QueryOptions options;
  options.metric = Metric::frechet;
  Result<QueryAnswer> answer = (*collection)->nearest(testing::wkt("MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))"), options);
  CHECK(answer.status().code() == StatusCode::not_applicable);
}

// Every stored shape with its exact distance, nearest first: the full scan with k = all.
std::vector<QueryHit> all_by_full_scan(const Collection& collection, const Shape& query, Metric metric) {
  QueryOptions options;
  options.metric = metric;
  options.k = collection.size();
  Result<QueryAnswer> scan = collection.nearest_by_full_scan(query, options);
  REQUIRE(scan.is_ok());
  return scan->hits;
}

TEST_CASE("RangeQueryReturnsExactlyTheShapesWithinTheRadius") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(1200, 21);
  const std::unique_ptr<Collection> collection = filled_collection(directory, records);
  SeededRandom random(22);
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    for (int q = 0; q < 6; ++q) {
      const Shape query = records[random.below(records.size())].shape;
      const std::vector<QueryHit> everything = all_by_full_scan(*collection, query, metric);
      // A radius between two stored distances (the 5th to the 60th nearest), so the boundary
      // is never a tie.
      const std::size_t cut = 5 + random.below(55);
      RangeOptions options;
      options.metric = metric;
      options.radius = 0.5 * (everything[cut - 1].distance + everything[cut].distance);
      Result<QueryAnswer> range = collection->within(query, options);
      REQUIRE(range.is_ok());
      INFO(metric_name(metric) << " query " << q << " radius " << options.radius);
      CHECK(range->certified);
      require_same(*range, QueryAnswer{std::vector<QueryHit>(everything.begin(), everything.begin() + cut), {}, true});
      CHECK(range->stats.candidates_fetched < records.size());  // the L∞ bound stopped the walk early
      options.max_results = 3;
      Result<QueryAnswer> truncated = collection->within(query, options);
      REQUIRE(truncated.is_ok());
      CHECK(truncated->hits.size() == 3);
      CHECK_FALSE(truncated->certified);
    }
  }
  RangeOptions sketch_range;
  sketch_range.metric = Metric::sketch;
  CHECK(collection->within(records[0].shape, sketch_range).status().code() == StatusCode::invalid_argument);
  sketch_range.metric = Metric::hausdorff;
  sketch_range.radius = -1;
  CHECK(collection->within(records[0].shape, sketch_range).status().code() == StatusCode::invalid_argument);
}

TEST_CASE("MetadataFilterMatchesAFilteredFullScan") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(900, 23);
  const std::unique_ptr<Collection> collection = filled_collection(directory, records);
  SeededRandom random(24);
  for (int q = 0; q < 6; ++q) {
    const Shape query = records[random.below(records.size())].shape;
    const std::string group = "g" + std::to_string(q % 3);
    std::vector<QueryHit> expected;
    for (QueryHit& hit : all_by_full_scan(*collection, query, Metric::hausdorff)) {
      if (nlohmann::json::parse(hit.metadata).at("group") == group && expected.size() < 10) expected.push_back(hit);
    }
    QueryOptions options;
    options.exact = true;
    options.metadata_filter = "{\"group\": \"" + group + "\"}";
    Result<QueryAnswer> filtered = collection->nearest(query, options);
    REQUIRE(filtered.is_ok());
    CHECK(filtered->certified);
    CHECK(filtered->stats.filtered_out > 0);
    require_same(*filtered, QueryAnswer{expected, {}, true});
  }
  QueryOptions bad;
  bad.metadata_filter = "[1, 2]";
  Result<QueryAnswer> refused = collection->nearest(records[0].shape, bad);
  CHECK(refused.status().code() == StatusCode::invalid_argument);
  CHECK(refused.status().where() == "metadata_filter");
  bad.metadata_filter = "{\"group\": \"no such group\"}";
  Result<QueryAnswer> none = collection->nearest(records[0].shape, bad);
  REQUIRE(none.is_ok());
  CHECK(none->hits.empty());
}

TEST_CASE("StatisticsAndDefaultMetricSurviveRestart") {
  TemporaryDirectory directory;
  CollectionSettings settings = settings_with(16);
  settings.default_metric = Metric::frechet;
  {
    Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings);
    REQUIRE(collection.is_ok());
    CHECK((*collection)->statistics().last_write_unix_ms == 0);
    REQUIRE((*collection)->upsert(synthetic_records(50, 25)).is_ok());
  }
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path);
  REQUIRE(reopened.is_ok());
  CHECK((*reopened)->settings().default_metric == Metric::frechet);
  const CollectionStatistics statistics = (*reopened)->statistics();
  CHECK(statistics.shape_count == 50);
  CHECK(statistics.index_bytes >= 50 * 16 * sizeof(float));
  CHECK(statistics.store_bytes > 0);
  const auto now_ms = std::chrono::duration_cast<std::chrono::milliseconds>(
                          std::chrono::system_clock::now().time_since_epoch()).count();
  CHECK(statistics.last_write_unix_ms > now_ms - 600'000);
  CHECK(statistics.last_write_unix_ms <= now_ms);
}

// Queries run while another thread ingests, upserts and deletes. Every answer must be
// internally right: each hit's distance is the exact distance to what is stored under its id
// (or the id was deleted or replaced meanwhile), and hits are in order.
TEST_CASE("QueriesRunCorrectlyDuringIngest", "[concurrency]") {
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, settings_with(32));
  REQUIRE(created.is_ok());
  Collection& collection = **created;
  const std::vector<ShapeRecord> records = synthetic_records(3000, 27);
  REQUIRE(collection.upsert(std::span(records).first(500)).is_ok());
  std::atomic<bool> writing = true;
  std::thread writer([&] {
    for (std::size_t start = 500; start < records.size(); start += 250) {
      if (!collection.upsert(std::span(records).subspan(start, 250)).is_ok()) break;
      const std::vector<std::string> gone = {records[start - 500].id, records[start - 499].id};
      if (!collection.remove(gone).is_ok()) break;
    }
    writing = false;
  });
  std::atomic<int> answers = 0, wrong = 0, failures = 0;
  auto reader = [&](std::uint64_t seed) {
    SeededRandom random(seed);
    while (writing || answers < 40) {
      const Shape query = records[random.below(records.size())].shape;
      QueryOptions options;
      options.metric = random.below(2) ? Metric::hausdorff : Metric::frechet;
      options.exact = random.below(2) == 0;
      Result<QueryAnswer> answer = collection.nearest(query, options);
      if (!answer) {
        ++failures;
        continue;
      }
      ++answers;
      for (std::size_t i = 0; i < answer->hits.size(); ++i) {
        const QueryHit& hit = answer->hits[i];
        if (i > 0 && hit.distance < answer->hits[i - 1].distance) ++wrong;
        Result<ShapeRecord> stored = collection.get(hit.id);
        if (!stored) continue;  // deleted since
        const Shape framed = apply_frame(query, Frame::unit);
        const Shape stored_framed = apply_frame(stored->shape, Frame::unit);
        const double exact = options.metric == Metric::hausdorff ? hausdorff(framed, stored_framed).value
                                                                 : frechet(framed, stored_framed)->value;
        if (std::abs(exact - hit.distance) > 1e-9) ++wrong;
      }
    }
  };
  std::thread reader_a(reader, 28), reader_b(reader, 29);
  writer.join();
  reader_a.join();
  reader_b.join();
  INFO("answers " << answers << ", wrong " << wrong << ", failures " << failures);
  CHECK(failures == 0);
  CHECK(wrong == 0);
  CHECK(answers >= 40);
  CHECK(collection.size() == records.size() - 2 * ((records.size() - 500) / 250));
}

// Concurrent upserts are committed in groups that share one synced write
// (Collection::upsert). Four writers of small batches overlap, and five ids are written by all
// of them: wherever an id's last write came from, the store and the indexes must agree on it:
// one record, indexed under the label of that record, with the sketch of that shape.
TEST_CASE("ConcurrentUpsertsOfSharedIdsLeaveOneConsistentRecordEach", "[concurrency]") {
  TemporaryDirectory directory;
  constexpr std::size_t kWriters = 4, kBatches = 25, kOwnPerBatch = 12, kShared = 5;
  CollectionStatistics live;
  auto check_consistent = [&](const Collection& collection) {
    CHECK(collection.size() == kShared + kWriters * kBatches * kOwnPerBatch);
    for (std::size_t i = 0; i < kShared; ++i) {
      const std::string id = "shared-" + std::to_string(i);
      Result<ShapeRecord> stored = collection.get(id);
      REQUIRE(stored.is_ok());
      QueryOptions options;
      options.exact = true;
      options.k = collection.size();
      Result<QueryAnswer> answer = collection.nearest(stored->shape, options);
      REQUIRE(answer.is_ok());
      CHECK(answer->certified);
      std::size_t hits_of_id = 0;
      for (const QueryHit& hit : answer->hits) {
        if (hit.id != id) continue;
        ++hits_of_id;
        CHECK(hit.distance < 1e-9);  // the stored shape itself (framing rounds); other writers' are far
      }
      CHECK(hits_of_id == 1);
    }
  };
  {
    Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, settings_with(16));
    REQUIRE(created.is_ok());
    Collection& collection = **created;
    std::atomic<int> failures = 0;
    {
      std::vector<std::jthread> writers;
      for (std::size_t w = 0; w < kWriters; ++w) {
        writers.emplace_back([&, w] {
          const std::vector<ShapeRecord> shapes = synthetic_records(kBatches * (kOwnPerBatch + kShared), 40 + w);
          for (std::size_t b = 0; b < kBatches; ++b) {
            std::vector<ShapeRecord> batch(shapes.begin() + b * (kOwnPerBatch + kShared),
                                           shapes.begin() + (b + 1) * (kOwnPerBatch + kShared));
            for (std::size_t i = 0; i < batch.size(); ++i) {
              batch[i].id = i < kShared ? "shared-" + std::to_string(i)
                                        : "own-" + std::to_string(w) + "-" + std::to_string(b) + "-" + std::to_string(i);
            }
            if (!collection.upsert(batch).is_ok()) ++failures;
          }
        });
      }
    }
    REQUIRE(failures == 0);
    check_consistent(collection);
    live = collection.statistics();
  }
  // The restart rebuilds the float copies from the store alone: a label left behind by a write
  // (invisible to queries, whose candidates must match their record's label) keeps its copy,
  // and shows as more copy bytes before the restart than after. (index_bytes differs anyway:
  // hash maps keep their buckets after erasures.)
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path);
  REQUIRE(reopened.is_ok());
  check_consistent(**reopened);
  (*reopened)->wait_for_resident_copies();
  const CollectionStatistics rebuilt = (*reopened)->statistics();
  CHECK(live.resident_copy_bytes == rebuilt.resident_copy_bytes);
}

namespace {

// Overwrites `count` bytes at `fraction` of the largest file in `directory` with the given
// extension, as a bad sector or a bad copy would; returns that file's size (0 if none).
std::uintmax_t overwrite_inside_largest_file(const std::filesystem::path& directory, const std::string& extension,
                                             double fraction, std::size_t count) {
  std::filesystem::path largest;
  for (const auto& entry : std::filesystem::directory_iterator(directory)) {
    if (entry.path().extension() == extension &&
        (largest.empty() || entry.file_size() > std::filesystem::file_size(largest))) {
      largest = entry.path();
    }
  }
  if (largest.empty()) return 0;
  const std::uintmax_t size = std::filesystem::file_size(largest);
  std::fstream file(largest, std::ios::in | std::ios::out | std::ios::binary);
  file.seekp(static_cast<std::streamoff>(static_cast<double>(size) * fraction));
  const std::string garbage(count, '\x5a');
  file.write(garbage.data(), static_cast<std::streamsize>(garbage.size()));
  return size;
}

}  // namespace

// A write-ahead log damaged in the middle (a bad disk sector, a bad copy) must stop the open with
// an error naming the damage, not silently drop the acknowledged writes after it (RocksDB's
// default recovery mode does the latter). A torn last record is covered by the SIGKILL tests.
TEST_CASE("DamagedWriteAheadLogStopsTheOpenInsteadOfDroppingWrites") {
  TemporaryDirectory directory;
  {
    auto collection = Collection::create(directory.path.string(), settings_with(16));
    REQUIRE(collection.is_ok());
    const std::vector<ShapeRecord> records = synthetic_records(3000, 11);
    for (std::size_t start = 0; start < records.size(); start += 100) {
      REQUIRE((*collection)->upsert(std::span(records).subspan(start, 100)).is_ok());
    }
  }
  // The records are still in the log, not yet in table files.
  REQUIRE(overwrite_inside_largest_file(directory.path, ".log", 0.5, 64) > 100000);
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path.string());
  REQUIRE_FALSE(reopened.is_ok());
  INFO(reopened.status().to_string());
  CHECK(reopened.status().message().find("Corruption") != std::string::npos);
}

// A table file damaged on disk (the store's flushed records, not its log) must also stop the
// open with RocksDB's checksum error: every block is read and verified when the collection
// opens, so damage is found at startup rather than served as missing shapes later.
TEST_CASE("DamagedTableFileStopsTheOpen") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(3000, 12);
  {
    auto collection = Collection::create(directory.path.string(), settings_with(16));
    REQUIRE(collection.is_ok());
    for (std::size_t start = 0; start < records.size(); start += 500) {
      REQUIRE((*collection)->upsert(std::span(records).subspan(start, 500)).is_ok());
    }
  }
  {  // Move everything from the log into table files, as RocksDB does once a memtable fills.
    rocksdb::DB* raw = nullptr;
    REQUIRE(rocksdb::DB::Open(rocksdb::Options(), directory.path.string(), &raw).ok());
    std::unique_ptr<rocksdb::DB> database(raw);
    REQUIRE(database->Flush(rocksdb::FlushOptions()).ok());
    REQUIRE(database->Close().ok());
  }
  // (Not opened undamaged first: the block cache, shared by the process, would then answer the
  // reopen's reads from memory and the damage would only be found by a fresh process.)
  // A third of the way in: inside a data block, far from the index and footer at the end.
  REQUIRE(overwrite_inside_largest_file(directory.path, ".sst", 1.0 / 3, 16) > 100000);
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path.string());
  REQUIRE_FALSE(reopened.is_ok());
  INFO(reopened.status().to_string());
  CHECK(reopened.status().message().find("Corruption") != std::string::npos);
}

// An open reads the store in id ranges side by side, cut at the table files' first and last
// record ids (index/collection.cc, read_store_in_ranges). Here the store is rewritten into
// many small table files so that there are cuts to take: every shape must come back once,
// under its own label and vector, with none lost or doubled at a cut.
TEST_CASE("OpenReadsAStoreOfManyTableFilesInRanges", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(2000, 21);
  QueryOptions exact;
  exact.exact = true;
  std::vector<QueryAnswer> before;
  {
    auto collection = Collection::create(directory.path.string(), settings_with(16));
    REQUIRE(collection.is_ok());
    for (std::size_t start = 0; start < records.size(); start += 250) {
      REQUIRE((*collection)->upsert(std::span(records).subspan(start, 250)).is_ok());
    }
    for (std::size_t q = 0; q < records.size(); q += 400) before.push_back(*(*collection)->nearest(records[q].shape, exact));
  }
  {  // Table files of about 16 KB, each a contiguous key range (compaction output is cut by size).
    rocksdb::Options options;
    options.target_file_size_base = 16 << 10;
    rocksdb::DB* raw = nullptr;
    REQUIRE(rocksdb::DB::Open(options, directory.path.string(), &raw).ok());
    std::unique_ptr<rocksdb::DB> database(raw);
    REQUIRE(database->CompactRange(rocksdb::CompactRangeOptions(), nullptr, nullptr).ok());
    std::vector<rocksdb::LiveFileMetaData> files;
    database->GetLiveFilesMetaData(&files);
    const auto record_files = std::count_if(files.begin(), files.end(), [](const rocksdb::LiveFileMetaData& file) {
      return file.smallestkey.starts_with("s/") && file.largestkey.starts_with("s/");
    });
    REQUIRE(record_files >= 8);  // else the open below would read one range and test nothing new
    REQUIRE(database->Close().ok());
  }
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path.string());
  REQUIRE(reopened.is_ok());
  Collection& collection = **reopened;
  CHECK(collection.size() == records.size());
  for (std::size_t q = 0; q < before.size(); ++q) require_same(*collection.nearest(records[q * 400].shape, exact), before[q]);
  QueryOptions two = exact;
  two.k = 2;
  // Each shape is its own nearest, at zero up to the framing's rounding (about 1e-17 here), and
  // only once: a shape read in two ranges would also be its own second nearest.
  std::size_t found_once = 0;
  for (const ShapeRecord& record : records) {
    const QueryAnswer answer = *collection.nearest(record.shape, two);
    found_once += answer.hits.size() == 2 && answer.hits[0].id == record.id && answer.hits[0].distance < 1e-12 &&
                  answer.hits[0].sketch_distance == 0 && answer.hits[1].id != record.id;
  }
  CHECK(found_once == records.size());
  // The id map came back too: a delete finds its shape, and a new shape gets a label of its own.
  REQUIRE(collection.remove(std::vector<std::string>{records[1999].id}).is_ok());
  const ShapeRecord added{"added-after-open", records[7].shape, "{}"};
  REQUIRE(collection.upsert(std::vector<ShapeRecord>{added}).is_ok());
  CHECK(collection.size() == records.size());
  const QueryAnswer twins = *collection.nearest(records[7].shape, two);
  REQUIRE(twins.hits.size() == 2);
  CHECK(twins.hits[0].id == "added-after-open");  // the same shape, so tied: the smaller id first
  CHECK(twins.hits[1].id == records[7].id);
  CHECK(collection.nearest(records[1999].shape, two)->hits[0].id != records[1999].id);
}
