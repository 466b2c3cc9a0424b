// Durable collections and the query engine: exact mode against a full scan, fast-mode recall,
// restart, upsert and delete, all-or-nothing batches, damaged records.
#include <catch2/catch.hpp>
#include <filesystem>

#include "index/collection.h"
#include "index/shape_codec.h"
#include "support/random_shapes.h"
#include "support/recall.h"
#include "support/shape_helpers.h"

using namespace waymark;

namespace {

struct TemporaryDirectory {
  TemporaryDirectory() {
    path = std::filesystem::temp_directory_path() /
           ("waymark-test-" + std::to_string(::getpid()) + "-" + std::to_string(counter++));
    std::filesystem::remove_all(path);
  }
  ~TemporaryDirectory() { std::filesystem::remove_all(path); }
  std::filesystem::path path;
  static inline int counter = 0;
};

CollectionSettings settings_with(std::size_t landmarks) {
  CollectionSettings settings;
  settings.frame = Frame::unit;
  settings.landmarks = *grid_landmarks(unit_frame_domain(), landmarks);
  return settings;
}

// Perturbed copies of a few templates: realistic near-duplicates with a clear neighbour
// structure (seeded; invented data).
std::vector<ShapeRecord> synthetic_records(std::size_t count, std::uint64_t seed) {
  SeededRandom random(seed);
  std::vector<Shape> templates;
  for (int t = 0; t < 40; ++t) templates.push_back(testing::random_walk(random, 6 + random.below(20)));
  std::vector<ShapeRecord> records;
  for (std::size_t i = 0; i < count; ++i) {
    const Shape shape = testing::jittered(templates[random.below(templates.size())], random, 0.3);
    records.push_back({"shape-" + std::to_string(i), shape, "{\"n\":" + std::to_string(i) + "}"});
  }
  return records;
}

void require_same(const QueryAnswer& a, const QueryAnswer& b) {
  REQUIRE(a.hits.size() == b.hits.size());
  for (std::size_t i = 0; i < a.hits.size(); ++i) {
    CHECK(a.hits[i].id == b.hits[i].id);
    CHECK(a.hits[i].distance == b.hits[i].distance);
  }
}

}  // namespace

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
      QueryOptions options;
      options.metric = metric;
      options.exact = true;
      Result<QueryAnswer> exact = (*collection)->nearest(query, options);
      Result<QueryAnswer> scan = (*collection)->nearest_by_full_scan(query, options);
      REQUIRE((exact.is_ok() && scan.is_ok()));
      INFO(metric_name(metric) << " query " << q << ": exact evaluations " << exact->stats.exact_evaluations);
      CHECK(exact->certified);
      require_same(*exact, *scan);
      CHECK(exact->stats.exact_evaluations < 1500 / 2);  // the bounds did prune
    }
  }
}

TEST_CASE("FastModeRecallOnSyntheticShapes") {
  TemporaryDirectory directory;
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings_with(64));
  REQUIRE(collection.is_ok());
  const std::vector<ShapeRecord> records = synthetic_records(2000, 7);
  REQUIRE((*collection)->upsert(records).is_ok());
  SeededRandom random(8);
  testing::RecallCount recall_count;
  for (int q = 0; q < 30; ++q) {
    const Shape query = records[random.below(records.size())].shape;
    QueryOptions options;
    Result<QueryAnswer> fast = (*collection)->nearest(query, options);
    Result<QueryAnswer> scan = (*collection)->nearest_by_full_scan(query, options);
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
  CHECK(got->metadata == "{\"n\":17}");
  CHECK(got->shape == apply_frame(records[17].shape, Frame::unit));
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
