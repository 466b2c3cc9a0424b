// Fast-mode recall against the full exact scan on real shapes: Hershey single-stroke glyphs
// from Debian's hershey-fonts-data (licence and acknowledgements in tests/support/hershey.h),
// TrueType glyph outlines from Debian's fonts-dejavu-core (tests/support/truetype.h), and
// country outlines from the npm package world-atlas (tests/support/world_atlas.h).
#include <catch2/catch.hpp>
#include <algorithm>
#include <filesystem>
#include <random>

#include "index/collection.h"
#include "support/hershey.h"
#include "support/recall.h"
#include "support/truetype.h"
#include "support/world_atlas.h"

using namespace waymark;

namespace {

// The 11 distinct Latin styles (other files repeat these letters).
const char* const kStyles[] = {"futural", "futuram", "rowmant", "timesr", "timesi", "timesib",
                               "cursive", "scriptc", "gothgbt", "gothgrt", "gothitt"};

struct GlyphCheck {
  double recall = 0;
  std::size_t exact_mismatches = 0, uncertified = 0;
  std::size_t expected_first = 0;  // queries whose fast answer starts with the expected id
};

// Default settings but for the frame, landmarks and kind, and an approximate index built at
// 100 shapes (these sets have a few hundred).
CollectionSettings unit_frame_settings(IndexKind kind) {
  CollectionSettings settings;
  settings.landmarks = *grid_landmarks(unit_frame_domain(), 64);
  settings.index_kind = kind;
  settings.approximate.minimum_size = 100;
  return settings;
}

// Fast-mode recall@10 against the full scan, and exact mode's agreement with it, for each query.
// `expected` (optional) holds, per query, the id a user would want first.
GlyphCheck check_recall(const std::vector<ShapeRecord>& records, const std::vector<Shape>& queries, Metric metric,
                        const CollectionSettings& settings, const std::vector<std::string>& expected = {});

// Queries every `stride`-th record, in the unit frame with 64 grid landmarks.
GlyphCheck check_recall(const std::vector<ShapeRecord>& records, Metric metric, IndexKind kind, std::size_t stride = 13) {
  std::vector<Shape> queries;
  for (std::size_t q = 0; q < records.size(); q += stride) queries.push_back(records[q].shape);
  return check_recall(records, queries, metric, unit_frame_settings(kind));
}

std::vector<ShapeRecord> hershey_records(Metric metric) {
  std::vector<ShapeRecord> records;
  for (const char* style : kStyles) {
    for (const testing::Glyph& glyph : testing::read_hershey_glyphs(style)) {
      const Shape shape = metric == Metric::frechet ? testing::longest_stroke(glyph.shape) : glyph.shape;
      records.push_back({std::string(style) + "/" + glyph.character, shape, "{}"});
    }
  }
  REQUIRE(records.size() == 11 * 52);
  return records;
}

GlyphCheck check_glyphs(Metric metric, IndexKind kind) { return check_recall(hershey_records(metric), metric, kind); }

GlyphCheck check_recall(const std::vector<ShapeRecord>& records, const std::vector<Shape>& queries, Metric metric,
                        const CollectionSettings& settings, const std::vector<std::string>& expected) {
  const std::filesystem::path directory =
      std::filesystem::temp_directory_path() / ("waymark-glyphs-" + std::to_string(::getpid()));
  std::filesystem::remove_all(directory);
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.string(), settings);
  REQUIRE(collection.is_ok());
  REQUIRE((*collection)->upsert(records).is_ok());
  REQUIRE((*collection)->build_approximate_index_now().is_ok());
  GlyphCheck check;
  testing::RecallCount recall_count;
  for (std::size_t q = 0; q < queries.size(); ++q) {
    QueryOptions options;
    options.metric = metric;
    Result<QueryAnswer> fast = (*collection)->nearest(queries[q], options);
    Result<QueryAnswer> scan = (*collection)->nearest_by_full_scan(queries[q], options);
    options.exact = true;
    Result<QueryAnswer> exact = (*collection)->nearest(queries[q], options);
    REQUIRE((fast.is_ok() && scan.is_ok() && exact.is_ok()));
    recall_count.add(*scan, *fast);
    check.expected_first += q < expected.size() && !fast->hits.empty() && fast->hits.front().id == expected[q];
    check.uncertified += !exact->certified;
    for (std::size_t i = 0; i < scan->hits.size(); ++i) {
      check.exact_mismatches += i >= exact->hits.size() || exact->hits[i].id != scan->hits[i].id ||
                                exact->hits[i].distance != scan->hits[i].distance;
    }
  }
  collection->reset();
  std::filesystem::remove_all(directory);
  check.recall = recall_count.recall();
  return check;
}

// The targets, for either metric: recall@10 ≥ 0.95, and exact mode identical to the full scan
// and certified on every query.
void require_targets(Metric metric, const char* description, IndexKind kind = IndexKind::exhaustive) {
  const GlyphCheck check = check_glyphs(metric, kind);
  WARN(description << ", " << index_kind_name(kind) << " index: " << metric_name(metric)
                   << " fast-mode recall@10 = " << check.recall);
  CHECK(check.recall >= 0.95);
  CHECK(check.exact_mismatches == 0);
  CHECK(check.uncertified == 0);
}

}  // namespace

TEST_CASE("HersheyGlyphsHausdorffRecallAndExactness") {
  require_targets(Metric::hausdorff, "Hershey glyphs, 572 shapes, 64 grid landmarks, unit frame");
}

TEST_CASE("HersheyGlyphsFrechetRecallAndExactness") {
  require_targets(Metric::frechet, "Hershey glyphs (longest stroke), 572 shapes");
}

TEST_CASE("HersheyGlyphsRecallWithGraphAndPartitionedIndexes") {
  for (IndexKind kind : {IndexKind::graph, IndexKind::partitioned}) {
    require_targets(Metric::hausdorff, "Hershey glyphs, 572 shapes", kind);
    require_targets(Metric::frechet, "Hershey glyphs (longest stroke), 572 shapes", kind);
  }
}

// The six fonts of fonts-dejavu-core, 52 letters each: 312 outlines (Fréchet: their longest
// rings, which keep each font's start point and direction).
TEST_CASE("TrueTypeOutlinesRecallForEveryIndexKind") {
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    std::vector<ShapeRecord> records;
    for (const char* font : {"DejaVuSans", "DejaVuSans-Bold", "DejaVuSansMono", "DejaVuSansMono-Bold", "DejaVuSerif",
                             "DejaVuSerif-Bold"}) {
      for (const testing::Glyph& glyph :
           testing::read_truetype_glyphs(std::string("/usr/share/fonts/truetype/dejavu/") + font + ".ttf", font)) {
        const Shape shape = metric == Metric::frechet ? testing::longest_ring(glyph.shape) : glyph.shape;
        records.push_back({glyph.style + "/" + glyph.character, shape, "{}"});
      }
    }
    REQUIRE(records.size() == 6 * 52);
    for (IndexKind kind : {IndexKind::exhaustive, IndexKind::graph, IndexKind::partitioned}) {
      // Every 17th outline as a query (19 queries): full Fréchet scans of rings are slow under
      // the sanitizers.
      const GlyphCheck check = check_recall(records, metric, kind, 17);
      WARN("DejaVu outlines, 312 shapes, " << index_kind_name(kind) << " index: " << metric_name(metric)
                                           << " fast-mode recall@10 = " << check.recall);
      // Rings of different fonts start at other points, so their Fréchet distance is far above
      // the landmark bound: ordered by landmark distances alone, Fréchet recall was 0.937
      // (exhaustive) and 0.926 (graph, partitioned). The curves' ends in the index vectors
      // bring every kind to the target. (The graph and partitioned ones score their candidates
      // by the same bound, but fast mode's default 400 candidates are all 312 shapes here:
      // FastModeFindsFrechetNeighboursOfRingsWithShiftedStarts tests that at scale.)
      CHECK(check.recall >= 0.95);
      CHECK(check.exact_mismatches == 0);
      CHECK(check.uncertified == 0);
    }
  }
}

// Natural Earth country outlines (world-atlas), stored at 110m, longitude/latitude degrees
// compared as they are (absolute frame), 64 grid landmarks over the whole globe.
// Hausdorff: the queries are the same countries' 50m outlines, a real change of resolution.
// Fréchet: the queries are the largest 110m rings of every 4th country with every vertex moved
// by up to 0.05 degrees (seeded). Not the 50m rings: they start from other vertices than the
// 110m ones, and exact Fréchet scans over them take minutes under the sanitizers.
TEST_CASE("WorldAtlasCountriesRecall") {
  const std::vector<testing::Country> coarse = testing::read_world_atlas(testing::world_atlas_file("countries-110m.json"));
  const std::vector<testing::Country> fine = testing::read_world_atlas(testing::world_atlas_file("countries-50m.json"));
  INFO("world-atlas missing under " WAYMARK_TEST_NODE_MODULES ": run scripts/install-dependencies.sh --tests");
  REQUIRE(coarse.size() >= 170);  // 177 countries in world-atlas 2.0.2's 110m file
  REQUIRE(fine.size() >= 230);
  CollectionSettings settings;
  settings.frame = Frame::absolute;
  settings.landmarks = *grid_landmarks(Box{-190, -100, 190, 100}, 64);
  settings.approximate.minimum_size = 100;
  // Under AddressSanitizer (a Debug build) exact scans run about 20 times slower: fewer queries.
#ifdef __SANITIZE_ADDRESS__
  const std::size_t hausdorff_stride = 4, frechet_stride = 16;
#else
  const std::size_t hausdorff_stride = 1, frechet_stride = 4;
#endif
  std::mt19937_64 random(20261202);
  std::uniform_real_distribution<double> jitter(-0.05, 0.05);
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    std::vector<ShapeRecord> records;
    std::vector<Shape> queries;
    std::vector<std::string> expected;
    for (const testing::Country& country : coarse) {
      records.push_back({country.name, metric == Metric::frechet ? testing::longest_ring(country.outline) : country.outline, "{}"});
      if (metric == Metric::frechet && (records.size() - 1) % frechet_stride == 0) {
        Shape query = records.back().shape;
        for (Point& p : query.parts.front()) p = {p.x + jitter(random), p.y + jitter(random)};
        queries.push_back(std::move(query));
        expected.push_back(country.name);
      }
    }
    if (metric == Metric::hausdorff) {
      std::size_t matched = 0;
      for (const testing::Country& country : fine) {
        if (std::none_of(coarse.begin(), coarse.end(), [&](const auto& c) { return c.name == country.name; })) continue;
        if (matched++ % hausdorff_stride != 0) continue;
        queries.push_back(country.outline);
        expected.push_back(country.name);
      }
    }
    for (IndexKind kind : {IndexKind::exhaustive, IndexKind::graph}) {
      settings.index_kind = kind;
      const GlyphCheck check = check_recall(records, queries, metric, settings, expected);
      const double first = static_cast<double>(check.expected_first) / static_cast<double>(queries.size());
      WARN("Countries, " << records.size() << " stored, " << queries.size() << " queries, " << index_kind_name(kind)
                         << " index: " << metric_name(metric) << " fast-mode recall@10 = " << check.recall
                         << ", same country first " << first);
      CHECK(check.recall >= 0.95);
      CHECK(check.exact_mismatches == 0);
      CHECK(check.uncertified == 0);
      // A user's ground truth: the same country comes first. Measured 2026-12-02: 0.97 for the
      // 50m outlines under Hausdorff (small island states next to larger neighbours are the
      // misses); the jittered rings under Fréchet, see the WARN line.
      CHECK(first >= 0.95);
    }
  }
}
