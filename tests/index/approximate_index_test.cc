// Graph (HNSW) and partitioned (IVF) collections: fast-mode recall against the full scan,
// exact mode unchanged, fresh writes found before any rebuild, deleted shapes never returned,
// rebuilds when due, the background builder, and the kind surviving a restart.
#include <catch2/catch.hpp>
#include <faiss/IndexHNSW.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>
#include <rocksdb/db.h>
#include <xxhash.h>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <chrono>
#include <cstring>
#include <fstream>
#include <limits>
#include <random>
#include <set>
#include <sstream>
#include <thread>

#include "index/collection.h"
#include "sketch/distance/frechet.h"
#include "support/collection_helpers.h"
#include "support/random_shapes.h"
#include "support/recall.h"

using namespace waymark;
using namespace waymark::testing;

namespace {

// The snapshot file `index` writes for `generation`, whole.
std::string snapshot_bytes(const ApproximateIndex& index, std::uint64_t generation) {
  std::string bytes;
  REQUIRE(index.write_snapshot(generation, [&](std::string_view piece) {
    bytes.append(piece);
    return Status::ok();
  }).is_ok());
  return bytes;
}

// `count` vectors of `dimension` values drawn uniformly from [0, 10) by `random`, labelled
// first_label, first_label + 1, … (seeded, invented).
struct LabelledVectors {
  std::vector<std::int64_t> labels;
  std::vector<float> vectors;
};
LabelledVectors uniform_vectors(std::size_t count, std::size_t dimension, std::mt19937& random,
                                std::int64_t first_label = 1) {
  LabelledVectors drawn;
  for (std::size_t r = 0; r < count; ++r) {
    drawn.labels.push_back(first_label + static_cast<std::int64_t>(r));
    for (std::size_t j = 0; j < dimension; ++j) drawn.vectors.push_back(std::uniform_real_distribution<float>(0, 10)(random));
  }
  return drawn;
}

// What VectorIndex::copy() of an index holding `drawn` gives.
VectorIndex::Contents contents_of(const LabelledVectors& drawn, std::size_t dimension) {
  VectorIndex all(dimension);
  REQUIRE(all.add(drawn.labels, drawn.vectors).is_ok());
  return all.copy();
}

// A graph built over `drawn`, comparing every value.
std::unique_ptr<ApproximateIndex> graph_over(const LabelledVectors& drawn, std::size_t dimension) {
  ApproximateIndexSettings settings;
  settings.minimum_size = 1;
  auto graph = std::make_unique<ApproximateIndex>(IndexKind::graph, std::vector<double>(dimension, 1.0), dimension, settings);
  REQUIRE(graph->build(contents_of(drawn, dimension)).is_ok());
  return graph;
}

CollectionSettings approximate_settings(IndexKind kind) {
  CollectionSettings settings = settings_with(32);
  settings.index_kind = kind;
  settings.approximate.minimum_size = 500;
  return settings;
}

double fast_recall(const Collection& collection, const std::vector<ShapeRecord>& records, Metric metric,
                   std::uint64_t seed) {
  SeededRandom random(seed);
  RecallCount recall;
  for (int q = 0; q < 25; ++q) {
    Shape query = records[random.below(records.size())].shape;
    for (Point& p : query.parts[0]) p.x += 0.05 * random.uniform();
    QueryOptions options;
    options.metric = metric;
    Result<QueryAnswer> fast = collection.nearest(query, options);
    Result<QueryAnswer> scan = collection.nearest_by_full_scan(query, options);
    REQUIRE((fast.is_ok() && scan.is_ok()));
    CHECK_FALSE(fast->certified);  // approximate candidates are never certified
    recall.add(*scan, *fast);
  }
  return recall.recall();
}

}  // namespace

TEST_CASE("ApproximateKindsFindTheNearestShapesAndStayExactInExactMode") {
  for (IndexKind kind : {IndexKind::graph, IndexKind::partitioned}) {
    INFO(index_kind_name(kind));
    TemporaryDirectory directory;
    const std::vector<ShapeRecord> records = synthetic_records(3000, 61);
    Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, approximate_settings(kind));
    REQUIRE(created.is_ok());
    Collection& collection = **created;
    REQUIRE(collection.upsert(records).is_ok());
    REQUIRE(collection.build_approximate_index_now().is_ok());
    const ApproximateIndexStatus status = collection.statistics().approximate;
    CHECK(status.built);
    CHECK(status.built_size == 3000);
    CHECK(status.fresh == 0);

    const double hausdorff_recall = fast_recall(collection, records, Metric::hausdorff, 62);
    const double frechet_recall = fast_recall(collection, records, Metric::frechet, 63);
    WARN(index_kind_name(kind) << ": fast-mode recall@10 on 3000 synthetic shapes, 32 landmarks: Hausdorff "
                               << hausdorff_recall << ", Fréchet " << frechet_recall);
    CHECK(hausdorff_recall >= 0.95);
    CHECK(frechet_recall >= 0.95);

    // Exact mode ignores the approximate index: certified and equal to the full scan.
    SeededRandom random(64);
    for (int q = 0; q < 4; ++q) {
      QueryOptions options;
      options.exact = true;
      const Shape query = records[random.below(records.size())].shape;
      Result<QueryAnswer> exact = collection.nearest(query, options);
      Result<QueryAnswer> scan = collection.nearest_by_full_scan(query, options);
      REQUIRE((exact.is_ok() && scan.is_ok()));
      CHECK(exact->certified);
      require_same(*exact, *scan);
    }
  }
}

TEST_CASE("ApproximateKindsSeeFreshWritesAtOnceAndNeverReturnDeletedShapes", "[concurrency]") {
  for (IndexKind kind : {IndexKind::graph, IndexKind::partitioned}) {
    INFO(index_kind_name(kind));
    TemporaryDirectory directory;
    CollectionSettings settings = approximate_settings(kind);
    settings.approximate.rebuild_fraction = 0.05;
    const std::vector<ShapeRecord> records = synthetic_records(2000, 65);
    Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, settings);
    REQUIRE(created.is_ok());
    Collection& collection = **created;
    REQUIRE(collection.upsert(std::span(records).first(1500)).is_ok());
    REQUIRE(collection.build_approximate_index_now().is_ok());
    REQUIRE(collection.statistics().approximate.built_size == 1500);

    // Written after the build: found by fast mode straight away, each as its own nearest.
    REQUIRE(collection.upsert(std::span(records).subspan(1500, 50)).is_ok());
    CHECK(collection.statistics().approximate.fresh == 50);
    for (std::size_t i = 1500; i < 1550; i += 7) {
      Result<QueryAnswer> answer = collection.nearest(records[i].shape, QueryOptions{});
      REQUIRE(answer.is_ok());
      REQUIRE_FALSE(answer->hits.empty());
      CHECK(answer->hits[0].id == records[i].id);
      CHECK(answer->hits[0].distance < 1e-12);  // identical shapes, up to rounding
    }

    // Deleted: tombstones in the built index, never returned.
    std::vector<std::string> deleted;
    for (std::size_t i = 0; i < 60; ++i) deleted.push_back(records[i * 20].id);
    REQUIRE(collection.remove(deleted).is_ok());
    // The 110 changes make a rebuild due, and the collection's own thread may already have
    // run it (which drops the tombstones); either way no deleted shape may come back.
    const ApproximateIndexStatus after_delete = collection.statistics().approximate;
    CHECK((after_delete.tombstones == 60 || (after_delete.builds == 2 && after_delete.tombstones == 0)));
    for (std::size_t i = 0; i < 60; i += 6) {
      Result<QueryAnswer> answer = collection.nearest(records[i * 20].shape, QueryOptions{});
      REQUIRE(answer.is_ok());
      for (const QueryHit& hit : answer->hits) {
        CHECK(std::find(deleted.begin(), deleted.end(), hit.id) == deleted.end());
      }
    }

    // 110 changes on 1500 built is past 5%: a rebuild (here, or the thread's) takes in the
    // fresh shapes and drops the tombstones.
    REQUIRE(collection.build_approximate_index_now().is_ok());
    const ApproximateIndexStatus rebuilt = collection.statistics().approximate;
    CHECK(rebuilt.builds == 2);
    CHECK(rebuilt.built_size == 1550 - 60);
    CHECK(rebuilt.fresh == 0);
    CHECK(rebuilt.tombstones == 0);
  }
}

// Fast Fréchet starts its threshold at the k-th smallest upper bound of its first candidates'
// float copies (index/query_planner.cc); a candidate deleted before it is scored would leave
// fewer than k within that threshold, and the query must then run again without it. Deletes
// and re-inserts of a third of the shapes run beside the queries; every answer must still
// have k hits, each with its exact distance. (Without that second run, 2–3 of the 400
// answers came back short when written.)
TEST_CASE("FastFrechetKeepsKHitsWhileItsCandidatesAreDeleted", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(1500, 66);
  Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, approximate_settings(IndexKind::graph));
  REQUIRE(created.is_ok());
  Collection& collection = **created;
  REQUIRE(collection.upsert(records).is_ok());
  REQUIRE(collection.build_approximate_index_now().is_ok());
  collection.wait_for_resident_copies();
  // Every third record: its shapes' near copies come and go.
  std::vector<ShapeRecord> churned;
  std::vector<std::string> churned_ids;
  for (std::size_t i = 0; i < records.size(); i += 3) {
    churned.push_back(records[i]);
    churned_ids.push_back(records[i].id);
  }
  std::atomic<bool> querying = true;
  std::atomic<int> rounds = 0;
  std::thread writer([&] {
    while (querying) {
      if (!collection.remove(churned_ids).is_ok() || !collection.upsert(churned).is_ok()) break;
      ++rounds;
    }
  });
  SeededRandom random(67);
  int short_answers = 0, wrong = 0;
  for (int q = 0; q < 400; ++q) {
    const Shape& query = records[1 + 3 * random.below(records.size() / 3)].shape;  // never churned
    QueryOptions options;
    options.metric = Metric::frechet;
    Result<QueryAnswer> answer = collection.nearest(query, options);
    REQUIRE(answer.is_ok());
    if (answer->hits.size() != options.k) ++short_answers;
    for (const QueryHit& hit : answer->hits) {
      Result<ShapeRecord> stored = collection.get(hit.id);
      if (!stored) continue;  // deleted since
      const double exact = frechet(apply_frame(query, Frame::unit), apply_frame(stored->shape, Frame::unit))->value;
      if (std::abs(exact - hit.distance) > 1e-9) ++wrong;
    }
  }
  querying = false;
  writer.join();
  INFO("short answers " << short_answers << ", wrong distances " << wrong << ", churn rounds " << rounds);
  CHECK(short_answers == 0);
  CHECK(wrong == 0);
  CHECK(rounds > 0);
}

TEST_CASE("ApproximateIndexIsBuiltInTheBackgroundAndTheKindSurvivesRestart", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(800, 66);
  {
    Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, approximate_settings(IndexKind::graph));
    REQUIRE(created.is_ok());
    REQUIRE((*created)->upsert(records).is_ok());
    // No call to build: the collection's own thread builds once 500 shapes are stored.
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
    while (!(*created)->statistics().approximate.built && std::chrono::steady_clock::now() < deadline) {
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
    CHECK((*created)->statistics().approximate.built);
  }
  ApproximateIndexSettings approximate;
  approximate.minimum_size = 100000;  // the opener's settings: too few shapes to build now
  {
    // The build's snapshot is loaded: no rebuild after a restart.
    Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path, approximate);
    REQUIRE(reopened.is_ok());
    CHECK((*reopened)->settings().index_kind == IndexKind::graph);
    CHECK((*reopened)->statistics().approximate.snapshot == "loaded");
    CHECK((*reopened)->statistics().approximate.built);
  }
  std::filesystem::remove(directory.path / "approximate-index.snapshot");
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path, approximate);
  REQUIRE(reopened.is_ok());
  CHECK((*reopened)->statistics().approximate.snapshot == "none");
  CHECK_FALSE((*reopened)->statistics().approximate.built);
  // Until it is built, fast mode walks the exhaustive index (and can certify).
  Result<QueryAnswer> answer = (*reopened)->nearest(records[5].shape, QueryOptions{});
  REQUIRE(answer.is_ok());
  CHECK(answer->certified);
  CHECK(answer->hits[0].id == records[5].id);
}

// The snapshot written after each build is loaded by the next open and caught up with the
// store (writes since it become fresh, deletions tombstones); a damaged or stale one is
// reported and the index rebuilt, never trusted.
TEST_CASE("ApproximateIndexSnapshotIsLoadedCaughtUpAndRebuiltWhenDamaged", "[concurrency]") {
  TemporaryDirectory directory;
  const std::vector<ShapeRecord> records = synthetic_records(1200, 67);
  ApproximateIndexSettings manual;
  manual.minimum_size = 1000000;  // nothing is built unless asked (no background build)
  {
    CollectionSettings settings = approximate_settings(IndexKind::graph);
    settings.approximate.rebuild_fraction = 100;  // one build only, so the snapshot stays behind
    Result<std::unique_ptr<Collection>> created = Collection::create(directory.path, settings);
    REQUIRE(created.is_ok());
    REQUIRE((*created)->upsert(std::span(records).first(1000)).is_ok());
    REQUIRE((*created)->build_approximate_index_now().is_ok());
    REQUIRE((*created)->statistics().approximate.built_size == 1000);
    // After the snapshot: 200 new shapes and 10 deletions, which the snapshot does not know.
    REQUIRE((*created)->upsert(std::span(records).subspan(1000, 200)).is_ok());
    std::vector<std::string> deleted;
    for (std::size_t i = 0; i < 10; ++i) deleted.push_back(records[i * 50].id);
    REQUIRE((*created)->remove(deleted).is_ok());
  }
  {
    Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path, manual);
    REQUIRE(reopened.is_ok());
    const ApproximateIndexStatus status = (*reopened)->statistics().approximate;
    CHECK(status.snapshot == "loaded");
    CHECK(status.built);
    CHECK(status.built_size == 1000);
    CHECK(status.fresh == 200);
    CHECK(status.tombstones == 10);
    Result<QueryAnswer> fresh = (*reopened)->nearest(records[1100].shape, QueryOptions{});
    REQUIRE(fresh.is_ok());
    CHECK(fresh->hits[0].id == records[1100].id);
    Result<QueryAnswer> gone = (*reopened)->nearest(records[50].shape, QueryOptions{});
    REQUIRE(gone.is_ok());
    for (const QueryHit& hit : gone->hits) CHECK(hit.id != records[50].id);
    // A shape written now must not take a label the snapshot still holds for a deleted one.
    REQUIRE((*reopened)->upsert(std::span(records).subspan(0, 1)).is_ok());
    Result<QueryAnswer> again = (*reopened)->nearest(records[0].shape, QueryOptions{});
    REQUIRE(again.is_ok());
    CHECK(again->hits[0].id == records[0].id);
  }
  const std::string snapshot = (directory.path / "approximate-index.snapshot").string();
  {
    // The file ends with XXH3-64 (seed 0) of everything before it, as the xxHash library
    // computes it in one call (the writer feeds it piece by piece): STORE_FORMAT.md.
    std::ifstream in(snapshot, std::ios::binary);
    const std::string bytes{std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
    REQUIRE(bytes.size() > 16);
    std::uint64_t stored_checksum = 0;
    std::memcpy(&stored_checksum, bytes.data() + bytes.size() - 8, 8);
    CHECK(stored_checksum == XXH3_64bits(bytes.data(), bytes.size() - 8));
    CHECK(bytes.substr(0, 8) == "WMAPPRX2");
  }
  for (const char* damage : {"flip", "truncate", "format 1"}) {
    INFO(damage);
    std::string bytes;
    {
      std::ifstream in(snapshot, std::ios::binary);
      bytes.assign(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
    }
    REQUIRE(bytes.size() > 100);
    std::string damaged = bytes;
    if (std::string(damage) == "flip") {
      damaged[bytes.size() / 2] ^= 0x40;
    } else if (std::string(damage) == "truncate") {
      damaged.resize(bytes.size() / 3);
    } else {
      damaged[7] = '1';  // a snapshot written before the checksum became XXH3
    }
    std::ofstream(snapshot, std::ios::binary | std::ios::trunc) << damaged;
    Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path, manual);
    REQUIRE(reopened.is_ok());
    const ApproximateIndexStatus status = (*reopened)->statistics().approximate;
    CHECK(status.snapshot.starts_with(std::string(damage) == "format 1"
                                          ? "rebuilding: snapshot is of an older format (1)"
                                          : "rebuilding: approximate index snapshot is damaged"));
    CHECK_FALSE(status.built);
    Result<QueryAnswer> answer = (*reopened)->nearest(records[700].shape, QueryOptions{});
    REQUIRE(answer.is_ok());
    CHECK(answer->hits[0].id == records[700].id);  // the exhaustive walk serves meanwhile
    std::ofstream(snapshot, std::ios::binary | std::ios::trunc) << bytes;  // undamaged for the next round
  }
  {
    // A refit makes the snapshot stale: another landmark generation.
    Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path, manual);
    REQUIRE(reopened.is_ok());
    RefitProgress progress;
    REQUIRE((*reopened)->refit(RefitOptions{}, progress).is_ok());
  }
  Result<std::unique_ptr<Collection>> reopened = Collection::open(directory.path, manual);
  REQUIRE(reopened.is_ok());
  CHECK((*reopened)->statistics().approximate.snapshot.starts_with("rebuilding: snapshot is of another"));
}

// A snapshot whose vectors have another length (a build that compared other values, e.g. a
// Fréchet collection's graph from the release that put the curve ends in it) is refused as a
// precondition, not called damaged, and leaves the index as it was.
TEST_CASE("ASnapshotOfAnotherVectorLengthIsRefused") {
  const std::vector<std::int64_t> labels{1, 2, 3};
  const std::vector<float> vectors{0, 0, 0, 1, 1, 1, 2, 2, 2, 3, 3, 3};  // 4 values each: 3 compared + 1
  ApproximateIndexSettings settings;
  settings.minimum_size = 1;
  ApproximateIndex written(IndexKind::graph, {1.0, 1.0, 1.0}, 4, settings);
  VectorIndex all(4);
  REQUIRE(all.add(labels, vectors).is_ok());
  REQUIRE(written.build(all.copy()).is_ok());
  const std::string bytes = snapshot_bytes(written, 7);
  ApproximateIndex same_length(IndexKind::graph, {1.0, 1.0, 1.0}, 4, settings);
  std::istringstream in(bytes);
  Result<ApproximateIndex::Snapshot> read = same_length.read_snapshot(in, 7);
  REQUIRE(read.is_ok());
  CHECK(same_length.restore(std::move(*read), all.copy()).is_ok());
  CHECK(same_length.ready());
  ApproximateIndex longer(IndexKind::graph, {1.0, 1.0, 1.0, 1.0}, 4, settings);
  std::istringstream again(bytes);
  const Result<ApproximateIndex::Snapshot> refused = longer.read_snapshot(again, 7);
  CHECK(refused.status().code() == StatusCode::failed_precondition);
  CHECK(refused.status().message() == "snapshot compares 3 values per vector, this collection 4 (written by an older build)");
  CHECK_FALSE(longer.ready());
}

// A graph compares the leading values only (the landmark distances), yet hands its candidates
// out with L∞ over as many values as asked, from the values it keeps by row (a curve's ends,
// for the Fréchet metrics): after a build, and after a snapshot is restored and caught up
// (the snapshot holds the compared values only; a shape stored since is fresh, one deleted
// since a tombstone). Each distance is checked against L∞ over those values computed here.
TEST_CASE("GraphCandidatesCarryTheBoundOverTheValuesAsked") {
  constexpr std::size_t kCompared = 3, kDimension = 5, kCount = 200;
  std::mt19937 random(3);
  const auto [labels, vectors] = uniform_vectors(kCount, kDimension, random);
  ApproximateIndexSettings settings;
  settings.minimum_size = 1;
  const std::vector<double> weights(kCompared, 1.0);
  VectorIndex all(kDimension);
  REQUIRE(all.add(labels, vectors).is_ok());
  ApproximateIndex built(IndexKind::graph, weights, kDimension, settings);
  REQUIRE(built.build(all.copy()).is_ok());
  const std::string bytes = snapshot_bytes(built, 7);
  // Since the snapshot: one shape deleted, one stored.
  REQUIRE(all.remove(std::vector<std::int64_t>{5}).is_ok());
  const std::vector<float> added{1, 1, 1, 9, 9};
  REQUIRE(all.add(std::vector<std::int64_t>{1000}, added).is_ok());
  ApproximateIndex restored(IndexKind::graph, weights, kDimension, settings);
  std::istringstream in(bytes);
  Result<ApproximateIndex::Snapshot> read = restored.read_snapshot(in, 7);
  REQUIRE(read.is_ok());
  REQUIRE(restored.restore(std::move(*read), all.copy()).is_ok());

  const std::vector<float> query{2, 3, 4, 5, 6};
  for (const ApproximateIndex* graph : {&built, &restored}) {
    for (const std::size_t asked : {std::size_t{0}, kCompared, std::size_t{4}, kDimension}) {
      Result<std::vector<Neighbour>> candidates = graph->candidates(query, kCount + 1, asked);
      REQUIRE(candidates.is_ok());
      CHECK(candidates->size() >= kCount);
      for (const Neighbour& n : *candidates) {
        if (n.label == 5) continue;  // a tombstone in the restored graph: never read
        const float* vector = n.label == 1000 ? added.data() : vectors.data() + (n.label - 1) * kDimension;
        float expected = 0;
        for (std::size_t j = 0; j < std::max(asked, kCompared); ++j) {
          expected = std::max(expected, std::fabs(vector[j] - query[j]));
        }
        CHECK(n.distance == expected);
      }
    }
  }
}

// A walk widened in steps (the query planner's fast mode on a graph) hands out each label
// once, each with its exact L∞ distance; its first step is candidates()'s answer; widened to
// 400 it finds about as many of the 400 nearest (brute force, L∞) as a walk begun at 400; and
// its frontier is no farther than what it handed out, or ∞ once nothing is left. Seeded,
// invented vectors.
TEST_CASE("AWidenedGraphWalkHandsOutEachCandidateOnceAndFindsWhatAFreshWalkFinds") {
  constexpr std::size_t kDimension = 32, kStored = 5000, kFresh = 50;
  std::mt19937 random(5);
  LabelledVectors stored = uniform_vectors(kStored, kDimension, random);
  const std::unique_ptr<ApproximateIndex> built = graph_over(stored, kDimension);
  ApproximateIndex& graph = *built;
  // Written after the build: searched beside the graph, in the fresh index.
  const LabelledVectors fresh = uniform_vectors(kFresh, kDimension, random, kStored + 1);
  REQUIRE(graph.added(fresh.labels, fresh.vectors).is_ok());
  const std::vector<std::int64_t>& labels = stored.labels;
  std::vector<float>& vectors = stored.vectors;
  vectors.insert(vectors.end(), fresh.vectors.begin(), fresh.vectors.end());

  auto linf = [&](std::int64_t label, const std::vector<float>& query) {
    float distance = 0;
    for (std::size_t j = 0; j < kDimension; ++j) {
      distance = std::max(distance, std::fabs(vectors[(label - 1) * kDimension + j] - query[j]));
    }
    return distance;
  };
  std::size_t widened_found = 0, fresh_walk_found = 0;
  for (int q = 0; q < 20; ++q) {
    const std::vector<float> query = uniform_vectors(1, kDimension, random).vectors;
    Result<ApproximateIndex::CandidateWalk> walk = graph.walk(query);
    REQUIRE(walk.is_ok());
    Result<std::vector<Neighbour>> first = walk->next(40);
    Result<std::vector<Neighbour>> at_once = graph.candidates(query, 40);
    REQUIRE((first.is_ok() && at_once.is_ok()));
    REQUIRE(first->size() == at_once->size());
    for (std::size_t i = 0; i < first->size(); ++i) CHECK((*first)[i].label == (*at_once)[i].label);
    const float first_frontier = walk->frontier();
    float farthest = 0;
    for (const Neighbour& n : *first) farthest = std::max(farthest, n.distance);
    CHECK(first_frontier <= farthest);
    CHECK(first_frontier > 0);

    std::vector<Neighbour> handed_out = *first;
    for (const std::size_t count : {std::size_t{100}, std::size_t{400}, std::size_t{400}}) {
      Result<std::vector<Neighbour>> step = walk->next(count);
      REQUIRE(step.is_ok());
      handed_out.insert(handed_out.end(), step->begin(), step->end());
    }
    std::set<std::int64_t> distinct;
    for (const Neighbour& n : handed_out) {
      CHECK(distinct.insert(n.label).second);
      CHECK(n.distance == linf(n.label, query));
    }
    CHECK(handed_out.size() <= 400 + kFresh);
    CHECK(handed_out.size() >= 400);

    // The 400 nearest stored in the graph, by brute force.
    std::vector<std::pair<float, std::int64_t>> truth;
    for (std::size_t r = 0; r < kStored; ++r) truth.push_back({linf(labels[r], query), labels[r]});
    std::sort(truth.begin(), truth.end());
    truth.resize(400);
    std::set<std::int64_t> nearest;
    for (const auto& [distance, label] : truth) nearest.insert(label);
    for (const Neighbour& n : handed_out) widened_found += nearest.count(n.label);
    Result<std::vector<Neighbour>> fresh_walk = graph.candidates(query, 400);
    REQUIRE(fresh_walk.is_ok());
    for (const Neighbour& n : *fresh_walk) fresh_walk_found += nearest.count(n.label);

    Result<std::vector<Neighbour>> rest = walk->next(kStored + kFresh);
    REQUIRE(rest.is_ok());
    CHECK(handed_out.size() + rest->size() == kStored + kFresh);
    CHECK(walk->frontier() == std::numeric_limits<float>::infinity());
  }
  const double widened = widened_found / (20.0 * 400), fresh_walk = fresh_walk_found / (20.0 * 400);
  WARN("the 400 nearest found: widened walk " << widened << ", walk begun at 400 " << fresh_walk);
  CHECK(widened >= fresh_walk - 0.02);
}

// A rebuild between two steps of a walk replaces the graph it was walking: the walk takes
// nothing more from it (the graph it began on is gone), and fails nothing.
TEST_CASE("AWalkTakesNothingMoreFromAGraphRebuiltSinceItBegan") {
  constexpr std::size_t kDimension = 4, kStored = 1000;
  std::mt19937 random(9);
  const LabelledVectors stored = uniform_vectors(kStored, kDimension, random);
  const std::unique_ptr<ApproximateIndex> graph = graph_over(stored, kDimension);
  const std::vector<float> query{5, 5, 5, 5};
  Result<ApproximateIndex::CandidateWalk> walk = graph->walk(query);
  REQUIRE(walk.is_ok());
  Result<std::vector<Neighbour>> first = walk->next(40);
  REQUIRE(first.is_ok());
  CHECK(first->size() == 40);
  REQUIRE(graph->build(contents_of(stored, kDimension)).is_ok());
  Result<std::vector<Neighbour>> after = walk->next(400);
  REQUIRE(after.is_ok());
  CHECK(after->empty());
  CHECK(walk->frontier() == std::numeric_limits<float>::infinity());
}

// Fast Fréchet on a graph takes 20·k candidates first and widens (to 40·k, then its 100·k
// ceiling) only while the walk's frontier could still hold a shape within the k-th best
// distance. 3,000 copies of one figure, each moved by at most 1e-4 (a part imported again and
// again): every candidate's landmark bound is about the same, below the query's distance, so
// no step settles anything and the walk widens to the ceiling. 150 figures, 20 copies each,
// moved by up to 0.3: the walk's 200th candidate lies well beyond the 10th nearest copy, so it
// does not widen (and the answers find the certified neighbours). Seeded, invented random
// walks.
TEST_CASE("FastFrechetOnAGraphWidensOnlyWhereTheFirstCandidatesSettleNothing") {
  for (const std::size_t figure_count : {std::size_t{1}, std::size_t{150}}) {
    SeededRandom random(figure_count);
    const double movement = figure_count == 1 ? 1e-4 : 0.3;
    std::vector<Shape> figures;
    for (std::size_t f = 0; f < figure_count; ++f) figures.push_back(random_walk(random, 24));
    std::vector<ShapeRecord> records;
    for (std::size_t i = 0; i < 3000; ++i) {
      records.push_back({"walk-" + std::to_string(i), jittered(figures[i % figure_count], random, movement), "{}"});
    }
    TemporaryDirectory directory;
    CollectionSettings settings = settings_with(64);
    settings.index_kind = IndexKind::graph;
    Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings);
    REQUIRE(collection.is_ok());
    REQUIRE((*collection)->upsert(records).is_ok());
    REQUIRE((*collection)->build_approximate_index_now().is_ok());
    RecallCount recall;
    std::size_t widened = 0;
    for (int q = 0; q < 10; ++q) {
      const Shape query = jittered(figures[random.below(figure_count)], random, 0.3);
      QueryOptions options;
      options.metric = Metric::frechet;
      Result<QueryAnswer> fast = (*collection)->nearest(query, options);
      options.exact = true;
      Result<QueryAnswer> exact = (*collection)->nearest(query, options);
      REQUIRE((fast.is_ok() && exact.is_ok()));
      REQUIRE(exact->certified);
      recall.add(*exact, *fast);
      CHECK(fast->stats.candidates_drawn == (figure_count == 1 ? 1000 : 200));
      widened += fast->stats.candidates_drawn > 200;
    }
    INFO(figure_count << " figures");
    CHECK(widened == (figure_count == 1 ? 10 : 0));
    // Among near-identical copies the ten nearest differ by 1e-4 moves that no candidate order
    // can see: recall is checked where the figures differ.
    if (figure_count > 1) CHECK(recall.recall() >= 0.95);
  }
}

// Rings traced from random start vertices: 300 near-copies of each of 10 figures, so that the
// landmark distances alone cannot tell a query's Fréchet neighbours (copies that start near
// where it starts) from the other copies of its figure. Fast mode on a graph or partitioned
// index, with default settings, must still find them: it scores the approximate index's
// candidates by the Fréchet bound, curve ends included, and by default asks for enough of
// them (index/query_planner.cc, kFastCandidatesPerHit; 100·k for Fréchet since 2026-12-05,
// which 1M near-copies needed). Measured with this seed: the weighted L2 graph of earlier
// builds, Fréchet 0.72 at 20·k candidates, 0.97 at 40·k; the L∞ graph, 0.97 at 30·k and 0.985
// at 40·k, which is checked too (seeded, invented shapes).
TEST_CASE("FastModeFindsFrechetNeighboursOfRingsWithShiftedStarts") {
  SeededRandom random(21);
  std::vector<Shape> figures;
  for (int f = 0; f < 10; ++f) figures.push_back(random_star_polygon(random, 24));
  auto shifted_copy = [&](const Shape& figure) {
    Shape copy = jittered(figure, random, 0.4);
    Path& ring = copy.parts.front();
    std::rotate(ring.begin(), ring.begin() + static_cast<std::ptrdiff_t>(random.below(ring.size())), ring.end());
    return copy;
  };
  std::vector<ShapeRecord> records;
  for (int i = 0; i < 3000; ++i) records.push_back({"ring-" + std::to_string(i), shifted_copy(figures[i % 10]), "{}"});
  std::vector<Shape> queries;
  for (int q = 0; q < 20; ++q) queries.push_back(shifted_copy(figures[random.below(10)]));
  for (IndexKind kind : {IndexKind::graph, IndexKind::partitioned}) {
    TemporaryDirectory directory;
    CollectionSettings settings = settings_with(64);
    settings.index_kind = kind;
    Result<std::unique_ptr<Collection>> collection = Collection::create(directory.path, settings);
    REQUIRE(collection.is_ok());
    REQUIRE((*collection)->upsert(records).is_ok());
    REQUIRE((*collection)->build_approximate_index_now().is_ok());
    for (const auto& [metric, budget] : {std::pair{Metric::frechet, std::size_t{0}}, std::pair{Metric::frechet, std::size_t{400}},
                                         std::pair{Metric::hausdorff, std::size_t{0}}}) {
      RecallCount recall;
      for (const Shape& query : queries) {
        QueryOptions options;
        options.metric = metric;
        options.candidate_budget = budget;  // 0: the default
        Result<QueryAnswer> fast = (*collection)->nearest(query, options);
        options.candidate_budget = 0;
        options.exact = true;  // certified: the full scan's answer (checked in tests/index/real_shapes_test.cc)
        Result<QueryAnswer> exact = (*collection)->nearest(query, options);
        REQUIRE((fast.is_ok() && exact.is_ok()));
        REQUIRE(exact->certified);
        recall.add(*exact, *fast);
      }
      WARN("shifted rings, 3000 shapes, " << index_kind_name(kind) << " index: " << metric_name(metric)
                                          << " fast-mode recall@10 at budget " << budget << " (0: the default) = "
                                          << recall.recall());
      CHECK(recall.recall() >= 0.95);
    }
  }
}

// The graph orders by L∞ over the landmark distances, the sketch bound's own metric. Two
// stored vectors whose order differs under L2: from the origin, (3, 0, 0, 0) is 3 away under
// both, (2, 2, 2, 2) is 2 under L∞ and 4 under L2. A graph of four vectors is searched exactly.
TEST_CASE("TheGraphOrdersCandidatesByLinfDistance") {
  const std::vector<std::int64_t> labels{10, 20, 30, 40};
  const std::vector<float> vectors{3, 0, 0, 0, 2, 2, 2, 2, 9, 9, 9, 9, 0, 9, 0, 9};
  ApproximateIndexSettings settings;
  settings.minimum_size = 1;
  ApproximateIndex graph(IndexKind::graph, {1.0, 1.0, 1.0, 1.0}, 4, settings);
  VectorIndex all(4);
  REQUIRE(all.add(labels, vectors).is_ok());
  REQUIRE(graph.build(all.copy()).is_ok());
  const std::vector<float> origin{0, 0, 0, 0};
  Result<std::vector<Neighbour>> candidates = graph.candidates(origin, 4);
  REQUIRE(candidates.is_ok());
  REQUIRE(candidates->size() == 4);
  CHECK((*candidates)[0].label == 20);
  CHECK((*candidates)[0].distance == 2.0f);
  CHECK((*candidates)[1].label == 10);
  CHECK((*candidates)[1].distance == 3.0f);
}

// A snapshot of the weighted L2 graph that builds before 2026-12-05 wrote (the same file
// format, FAISS's flat index inside with METRIC_L2) is refused as a precondition and rebuilt,
// never searched with the L∞ distance it was not built for.
TEST_CASE("ASnapshotOfAnL2GraphIsRefused") {
  const std::vector<std::int64_t> labels{1, 2, 3};
  const std::vector<float> vectors{0, 0, 0, 1, 1, 1, 2, 2, 2};
  faiss::IndexHNSWFlat old_graph(3, 32);  // METRIC_L2, as those builds made it
  old_graph.add(3, vectors.data());
  faiss::VectorIOWriter faiss_bytes;
  faiss::write_index(&old_graph, &faiss_bytes);
  std::string bytes = "WMAPPRX2";  // index/STORE_FORMAT.md, "Approximate index snapshot"
  auto put_u64 = [&](std::uint64_t value) { bytes.append(reinterpret_cast<const char*>(&value), 8); };
  put_u64(1);  // graph
  put_u64(7);  // landmark generation
  put_u64(0);  // partitions
  put_u64(labels.size());
  bytes.append(reinterpret_cast<const char*>(labels.data()), labels.size() * sizeof(std::int64_t));
  put_u64(faiss_bytes.data.size());
  bytes.append(reinterpret_cast<const char*>(faiss_bytes.data.data()), faiss_bytes.data.size());
  put_u64(XXH3_64bits(bytes.data(), bytes.size()));
  ApproximateIndex graph(IndexKind::graph, {1.0, 1.0, 1.0}, 3);
  std::istringstream in(bytes);
  const Result<ApproximateIndex::Snapshot> refused = graph.read_snapshot(in, 7);
  CHECK(refused.status().code() == StatusCode::failed_precondition);
  CHECK(refused.status().message() == "snapshot's graph compares by weighted L2 (written by an older build)");
  CHECK_FALSE(graph.ready());
}
