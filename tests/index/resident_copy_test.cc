// Float copies of stored shapes (index/resident_copy.h): their displacement bound, their
// refusals of unrepresentable shapes, the shared capacity, and — the property queries rely on —
// that refusing candidates on them changes no answer and saves store reads, also when they are
// made after an open while writes go on.
#include <catch2/catch.hpp>

#include <atomic>
#include <cmath>
#include <limits>
#include <thread>

#include "index/collection.h"
#include "index/resident_copy.h"
#include "support/collection_helpers.h"
#include "support/random_shapes.h"

using namespace waymark;
using namespace waymark::testing;

namespace {

// Restores the process-wide capacity when a test ends, whatever it set.
struct CapacityGuard {
  std::size_t saved = resident_copy_capacity();
  ~CapacityGuard() { set_resident_copy_capacity(saved); }
};

// The largest distance from a vertex of the copy to the stored vertex, in long double.
long double largest_vertex_distance(const Shape& stored, const Shape& copy) {
  long double largest = 0;
  for (std::size_t part = 0; part < stored.parts.size(); ++part) {
    for (std::size_t i = 0; i < stored.parts[part].size(); ++i) {
      const long double dx = static_cast<long double>(stored.parts[part][i].x) - copy.parts[part][i].x;
      const long double dy = static_cast<long double>(stored.parts[part][i].y) - copy.parts[part][i].y;
      largest = std::max(largest, std::sqrt(dx * dx + dy * dy));
    }
  }
  return largest;
}

}  // namespace

TEST_CASE("AFloatCopyKeepsTheStructureAndBoundsItsDisplacement") {
  SeededRandom random(3);
  // Far from the origin and small: the copy is relative to the box centre, so its rounding
  // follows the extent (about 10 here), not the offset (1e9) — in the given coordinates
  // (absolute frame) and placed in the unit frame.
  for (const Frame frame : {Frame::absolute, Frame::unit}) {
    for (const double offset : {0.0, 1e9, -3.5e12}) {
      INFO("offset " << offset << ", frame " << static_cast<int>(frame));
      Shape shape = random_walk(random, 50);
      shape.parts.push_back(random_walk(random, 7).parts[0]);
      shape.kind = ShapeKind::polygon;
      shape.polygon_of_ring = {0, 0};
      for (Path& part : shape.parts) {
        for (Point& p : part) p = {p.x + offset, p.y - offset};
      }
      const ResidentCopy copy = ResidentCopy::of(shape, frame);
      REQUIRE_FALSE(copy.empty());
      ResidentCopy::Decoded decoded;
      // Another shape decoded into the same buffer first: decode must replace all of it.
      ResidentCopy::of(random_walk(random, 90), frame).decode(decoded);
      copy.decode(decoded);
      const Shape placed = apply_frame(shape, frame);  // what queries compare against
      CHECK(decoded.shape.kind == placed.kind);
      CHECK(decoded.shape.polygon_of_ring == placed.polygon_of_ring);
      REQUIRE(decoded.shape.parts.size() == 2);
      CHECK(decoded.shape.parts[0].size() == 50);
      CHECK(decoded.shape.parts[1].size() == 7);
      CHECK(largest_vertex_distance(placed, decoded.shape) <= decoded.displacement);
      // Binary32 has a 24-bit significand (IEEE 754-2019, table 3.5): rounding moves a
      // coordinate by at most 2^-24 of its magnitude, here below the extent; the bound is a
      // float rounded up, so allow it twice that.
      const Box box = bounding_box(placed);
      const double extent = std::max(box.width(), box.height());
      CHECK(decoded.displacement <= 2 * std::sqrt(2.0) * extent * std::ldexp(1.0, -24));
      CHECK(decoded.displacement > 0);  // random coordinates are not all floats: the bound is not vacuous
      CHECK(copy.bytes() == (2 + 2 * 2 + 4 + 1 + 2 * 57) * sizeof(std::uint32_t));
    }
  }
}

TEST_CASE("AShapeBeyondFloatRangeOrTheCapacityGetsNoCopy") {
  CapacityGuard guard;
  Shape huge;
  huge.kind = ShapeKind::polyline;
  huge.parts = {{{-1e300, 0}, {1e300, 0}}};  // 1e300 from its centre: no finite float
  CHECK(ResidentCopy::of(huge, Frame::absolute).empty());

  SeededRandom random(4);
  const Shape shape = random_walk(random, 64);
  set_resident_copy_capacity(resident_copy_bytes() + 1000);  // room for one 64-vertex copy (540 bytes)
  const std::size_t before = resident_copy_bytes();
  {
    ResidentCopy first = ResidentCopy::of(shape, Frame::absolute);
    CHECK_FALSE(first.empty());
    CHECK(resident_copy_bytes() == before + first.bytes());
    CHECK(ResidentCopy::of(shape, Frame::absolute).empty());  // would pass the capacity
    ResidentCopy moved = std::move(first);
    CHECK(resident_copy_bytes() == before + moved.bytes());
  }
  CHECK(resident_copy_bytes() == before);  // returned when the copies go
}

TEST_CASE("RefusingOnFloatCopiesChangesNoAnswerAndSavesStoreReads") {
  CapacityGuard guard;
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(3000, 71);
  {
    CollectionSettings settings = settings_with(32);
    settings.index_kind = IndexKind::graph;
    settings.approximate.minimum_size = 500;
    Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, settings);
    REQUIRE(created.is_ok());
    REQUIRE((*created)->upsert(records).is_ok());
    REQUIRE((*created)->build_approximate_index_now().is_ok());  // and its snapshot: both opens load one graph
  }
  // Every kind of query that draws candidates: fast (graph) and exact kNN, by shape and by
  // stored id, and range; Hausdorff and Fréchet. (Fast Fréchet also orders its first
  // candidates by their copies' coupling bounds and starts its threshold there: the answers
  // must be those without copies all the same.)
  struct Run {
    std::vector<QueryAnswer> answers;
    std::size_t store_reads = 0;
    std::size_t copy_bytes = 0;
  };
  auto run_queries = [&](std::size_t capacity) {
    set_resident_copy_capacity(capacity);
    ApproximateIndexSettings approximate;
    approximate.minimum_size = 500;
    Result<std::unique_ptr<Collection>> opened = Collection::open(directory.path, approximate);
    REQUIRE(opened.is_ok());
    const Collection& collection = **opened;
    REQUIRE(collection.statistics().approximate.snapshot == "loaded");
    collection.wait_for_resident_copies();  // made after the open
    Run run;
    run.copy_bytes = collection.statistics().resident_copy_bytes;
    SeededRandom random(72);
    for (int q = 0; q < 12; ++q) {
      const ShapeRecord& record = records[random.below(records.size())];
      Shape query = record.shape;
      for (Point& p : query.parts[0]) p.x += 0.05 * random.uniform();
      for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
        for (bool exact : {false, true}) {
          QueryOptions options;
          options.metric = metric;
          options.exact = exact;
          for (Result<QueryAnswer> answer : {collection.nearest(query, options),
                                             collection.nearest_to_stored(record.id, options)}) {
            REQUIRE(answer.is_ok());
            run.store_reads += answer->stats.candidates_fetched;
            run.answers.push_back(std::move(*answer));
          }
        }
        RangeOptions range;
        range.metric = metric;
        range.radius = run.answers.back().hits.at(4).distance;  // the 5th nearest: a few hits
        Result<QueryAnswer> within = collection.within(query, range);
        REQUIRE(within.is_ok());
        run.store_reads += within->stats.candidates_fetched;
        run.answers.push_back(std::move(*within));
      }
    }
    return run;
  };
  const Run without = run_queries(0);
  const Run with = run_queries(std::size_t{1} << 30);
  CHECK(without.copy_bytes == 0);
  CHECK(with.copy_bytes > 0);
  REQUIRE(with.answers.size() == without.answers.size());
  for (std::size_t i = 0; i < with.answers.size(); ++i) {
    INFO("query " << i);
    require_same(with.answers[i], without.answers[i]);
    CHECK(with.answers[i].certified == without.answers[i].certified);
  }
  // Many candidates drawn are refused by a decision; the copies refuse them before the read
  // (1,952 reads against 3,858 when written).
  INFO("store reads with copies " << with.store_reads << ", without " << without.store_reads);
  CHECK(with.store_reads * 4 < without.store_reads * 3);
}

TEST_CASE("CopiesMadeAfterAnOpenReachEveryStoredShapeAndChangeNoAnswer", "[concurrency]") {
  CapacityGuard guard;
  set_resident_copy_capacity(std::size_t{1} << 30);
  TemporaryDirectory directory;
  std::vector<ShapeRecord> records = synthetic_records(12000, 81);
  filled_collection(directory, records);  // closed again at once
  Result<std::unique_ptr<Collection>> opened = Collection::open(directory.path);
  REQUIRE(opened.is_ok());
  Collection& collection = **opened;
  INFO("copies still being made right after the open: " << collection.statistics().making_resident_copies);
  // While the copies are made: queries, and writes that give a third of the shapes a new
  // version (a new label, whose copy the write makes) and remove a sixth. A copy of a version
  // read at the open must go to no label but that version's.
  SeededRandom random(82);
  std::atomic<int> failed_queries{0};
  std::vector<Shape> queries;  // copied: the writes below change `records`
  for (std::size_t q = 0; q < 30; ++q) queries.push_back(records[q * 97].shape);
  std::thread querying([&] {
    for (std::size_t q = 0; q < queries.size(); ++q) {
      QueryOptions options;
      options.metric = q % 2 == 0 ? Metric::hausdorff : Metric::frechet;
      if (!collection.nearest(queries[q], options).is_ok()) ++failed_queries;
    }
  });
  std::vector<bool> removed(records.size(), false);
  std::vector<ShapeRecord> batch;
  std::vector<std::string> removals;
  for (std::size_t i = 0; i < records.size(); ++i) {
    if (i % 3 == 0) {
      records[i].shape = jittered(records[(i + 1) % records.size()].shape, random, 0.1);
      batch.push_back(records[i]);
    } else if (i % 6 == 1) {
      removed[i] = true;
      removals.push_back(records[i].id);
    }
    if (batch.size() == 400) {
      REQUIRE(collection.upsert(batch).is_ok());
      batch.clear();
    }
  }
  REQUIRE(collection.upsert(batch).is_ok());
  REQUIRE(collection.remove(removals).is_ok());
  querying.join();
  CHECK(failed_queries == 0);
  collection.wait_for_resident_copies();
  const CollectionStatistics statistics = collection.statistics();
  CHECK_FALSE(statistics.making_resident_copies);
  // One copy per stored shape, of its stored version: the bytes of copies made here of them.
  std::size_t expected_bytes = 0, stored = 0;
  for (std::size_t i = 0; i < records.size(); ++i) {
    if (removed[i]) continue;
    ++stored;
    expected_bytes += ResidentCopy::of(records[i].shape, Frame::unit).bytes();
  }
  REQUIRE(statistics.shape_count == stored);
  CHECK(statistics.resident_copy_bytes == expected_bytes);
  // Exact answers near replaced and untouched shapes, refused on these copies, are the full scan's.
  for (std::size_t i = 0; i < 24; ++i) {
    const std::size_t n = (i * 499) % records.size();
    if (removed[n]) continue;
    const Shape query = jittered(records[n].shape, random, 0.02);
    for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
      QueryOptions options;
      options.metric = metric;
      options.exact = true;
      Result<QueryAnswer> exact = collection.nearest(query, options);
      Result<QueryAnswer> scanned = collection.nearest_by_full_scan(query, options);
      REQUIRE(exact.is_ok());
      REQUIRE(scanned.is_ok());
      INFO("query near shape " << n << ", " << metric_name(metric));
      CHECK(exact->certified);
      require_same(*exact, *scanned);
    }
  }
}

TEST_CASE("CopyPassesOfSeveralCollectionsTakeTurnsAndAClosingOneStopsWaiting", "[concurrency]") {
  CapacityGuard guard;
  set_resident_copy_capacity(std::size_t{1} << 30);
  TemporaryDirectory first_directory, second_directory;
  const std::vector<ShapeRecord> first_records = synthetic_records(6000, 91);
  const std::vector<ShapeRecord> second_records = synthetic_records(3000, 92);
  filled_collection(first_directory, first_records);
  filled_collection(second_directory, second_records);
  auto expected_bytes = [](const std::vector<ShapeRecord>& records) {
    std::size_t bytes = 0;
    for (const ShapeRecord& record : records) bytes += ResidentCopy::of(record.shape, Frame::unit).bytes();
    return bytes;
  };
  Result<std::unique_ptr<Collection>> first = Collection::open(first_directory.path);
  REQUIRE(first.is_ok());
  {
    // Opened while the first pass runs, closed at once: its pass is waiting for its turn (or
    // running), and the close must end that wait and return; under ThreadSanitizer too.
    Result<std::unique_ptr<Collection>> closed_early = Collection::open(second_directory.path);
    REQUIRE(closed_early.is_ok());
  }
  Result<std::unique_ptr<Collection>> second = Collection::open(second_directory.path);
  REQUIRE(second.is_ok());
  (*second)->wait_for_resident_copies();  // after the first pass: one at a time
  (*first)->wait_for_resident_copies();
  CHECK((*first)->statistics().resident_copy_bytes == expected_bytes(first_records));
  CHECK((*second)->statistics().resident_copy_bytes == expected_bytes(second_records));
  CHECK_FALSE((*first)->statistics().making_resident_copies);
  CHECK_FALSE((*second)->statistics().making_resident_copies);
}
