// Fast-mode recall against the full exact scan on real shapes: Hershey single-stroke glyphs
// from Debian's hershey-fonts-data (licence and acknowledgements in tests/support/hershey.h).
#include <catch2/catch.hpp>
#include <filesystem>

#include "index/collection.h"
#include "support/hershey.h"

using namespace waymark;

namespace {

// The 11 distinct Latin styles (other files repeat these letters).
const char* const kStyles[] = {"futural", "futuram", "rowmant", "timesr", "timesi", "timesib",
                               "cursive", "scriptc", "gothgbt", "gothgrt", "gothitt"};

struct GlyphCheck {
  double recall = 0;
  std::size_t exact_mismatches = 0, uncertified = 0;
};

// Fast-mode recall@10 against the full scan, and exact mode's agreement with it, over every
// 13th glyph as a query.
GlyphCheck check_glyphs(Metric metric) {
  const std::filesystem::path directory =
      std::filesystem::temp_directory_path() / ("waymark-glyphs-" + std::to_string(::getpid()));
  std::filesystem::remove_all(directory);
  CollectionSettings settings;
  settings.landmarks = *grid_landmarks(unit_frame_domain(), 64);
  Result<std::unique_ptr<Collection>> collection = Collection::create(directory.string(), settings);
  REQUIRE(collection.is_ok());
  std::vector<ShapeRecord> records;
  for (const char* style : kStyles) {
    for (const testing::Glyph& glyph : testing::read_hershey_glyphs(style)) {
      const Shape shape = metric == Metric::frechet ? testing::longest_stroke(glyph.shape) : glyph.shape;
      records.push_back({std::string(style) + "/" + glyph.character, shape, "{}"});
    }
  }
  REQUIRE(records.size() == 11 * 52);
  REQUIRE((*collection)->upsert(records).is_ok());
  GlyphCheck check;
  std::size_t found = 0, wanted = 0;
  for (std::size_t q = 0; q < records.size(); q += 13) {
    QueryOptions options;
    options.metric = metric;
    Result<QueryAnswer> fast = (*collection)->nearest(records[q].shape, options);
    Result<QueryAnswer> scan = (*collection)->nearest_by_full_scan(records[q].shape, options);
    options.exact = true;
    Result<QueryAnswer> exact = (*collection)->nearest(records[q].shape, options);
    REQUIRE((fast.is_ok() && scan.is_ok() && exact.is_ok()));
    for (const QueryHit& truth : scan->hits) {
      ++wanted;
      for (const QueryHit& hit : fast->hits) found += hit.id == truth.id;
    }
    check.uncertified += !exact->certified;
    for (std::size_t i = 0; i < scan->hits.size(); ++i) {
      check.exact_mismatches += i >= exact->hits.size() || exact->hits[i].id != scan->hits[i].id ||
                                exact->hits[i].distance != scan->hits[i].distance;
    }
  }
  collection->reset();
  std::filesystem::remove_all(directory);
  check.recall = static_cast<double>(found) / wanted;
  return check;
}

}  // namespace

TEST_CASE("HersheyGlyphsHausdorffRecallAndExactness") {
  const GlyphCheck check = check_glyphs(Metric::hausdorff);
  WARN("Hershey glyphs, 572 shapes, 64 grid landmarks, unit frame: Hausdorff fast-mode recall@10 = " << check.recall);
  CHECK(check.recall >= 0.95);  // the target
  CHECK(check.exact_mismatches == 0);
  CHECK(check.uncertified == 0);
}

TEST_CASE("HersheyGlyphsFrechetRecallAndExactness") {
  const GlyphCheck check = check_glyphs(Metric::frechet);
  WARN("Hershey glyphs (longest stroke), 572 shapes: Fréchet fast-mode recall@10 = " << check.recall);
  CHECK(check.recall >= 0.95);  // the target
  CHECK(check.exact_mismatches == 0);
  CHECK(check.uncertified == 0);
}
