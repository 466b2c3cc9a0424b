// The exhaustive vector index: scans rank by L∞ over the leading values a metric compares
// (index/vector_index.h), and distances_to measures the same way to the labels asked.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <map>
#include <random>
#include <set>
#include <span>
#include <vector>

#include "index/vector_index.h"

using namespace waymark;

namespace {

// L∞ over the first `compared` values, as the index computes it (float differences).
float linf(const float* vector, const std::vector<float>& query, std::size_t compared) {
  float distance = 0;
  for (std::size_t j = 0; j < compared; ++j) distance = std::max(distance, std::fabs(vector[j] - query[j]));
  return distance;
}

// The order a scan must hand out: nearest first, equal distances by label.
void sort_as_scanned(std::vector<Neighbour>& neighbours) {
  std::sort(neighbours.begin(), neighbours.end(), [](const Neighbour& a, const Neighbour& b) {
    return a.distance != b.distance ? a.distance < b.distance : a.label < b.label;
  });
}

// Positions where two equally long lists differ in label or distance.
std::size_t mismatches(const std::vector<Neighbour>& got, const std::vector<Neighbour>& expected) {
  std::size_t count = 0;
  for (std::size_t i = 0; i < got.size(); ++i) {
    count += got[i].label != expected[i].label || got[i].distance != expected[i].distance;
  }
  return count;
}

}  // namespace

TEST_CASE("ScansCompareOnlyTheLeadingValuesAsked") {
  // Three values each: two compared ones, then one (a curve end's coordinate, say) that only
  // some metrics may use. Label 1 is nearer on the leading two, label 2 on all three.
  VectorIndex index(3);
  REQUIRE(index.add(std::vector<std::int64_t>{1, 2}, std::vector<float>{0.0f, 1.0f, 50.0f, 3.0f, 3.0f, 0.0f}).is_ok());
  const std::vector<float> query{0.0f, 0.0f, 0.0f};
  Result<VectorIndex::Scan> leading = index.scan(query, 2);
  REQUIRE(leading.is_ok());
  const auto first = leading->next(2);
  REQUIRE(first.size() == 2);
  CHECK(first[0].label == 1);
  CHECK(first[0].distance == 1.0f);
  CHECK(first[1].distance == 3.0f);
  Result<VectorIndex::Scan> all = index.scan(query);
  REQUIRE(all.is_ok());
  const auto second = all->next(2);
  CHECK(second[0].label == 2);
  CHECK(second[0].distance == 3.0f);
  CHECK(second[1].distance == 50.0f);
  CHECK(index.scan(query, 4).status().code() == StatusCode::internal);  // more than stored
}

TEST_CASE("DistancesToLabelsLeaveOutLabelsWithoutAVector") {
  VectorIndex index(3);
  REQUIRE(index.add(std::vector<std::int64_t>{7, 9}, std::vector<float>{1, 2, 3, 4, -6, 100}).is_ok());
  REQUIRE(index.remove(std::vector<std::int64_t>{7}).is_ok());
  const std::vector<std::int64_t> asked{7, 9, 11};
  const std::vector<float> query{1, 1, 1};
  Result<std::vector<Neighbour>> leading = index.distances_to(asked, query, 2);
  REQUIRE(leading.is_ok());
  REQUIRE(leading->size() == 1);
  CHECK((*leading)[0].label == 9);
  CHECK((*leading)[0].distance == 7.0f);  // |−6 − 1|; the third value is not compared
  Result<std::vector<Neighbour>> all = index.distances_to(asked, query);
  REQUIRE(all.is_ok());
  CHECK((*all)[0].distance == 99.0f);
  CHECK(index.distances_to(asked, std::vector<float>{1, 1}).status().code() == StatusCode::internal);
}

// A scan hands out every stored row exactly once, nearest first and equal distances by label,
// whatever the sizes asked for: against a full sort of the distances computed here. Rows are
// gathered in tiers chosen from a sample of the distances, so the cases include many ties
// (integer values from a small range), every distance equal, and a few rows far nearer than
// the rest (which the sample may miss).
TEST_CASE("ScansHandOutEveryRowInOrderWhateverTheRoundSizes") {
  constexpr std::size_t kDimension = 3, kRows = 20000;
  const std::vector<float> query{10, 20, 30};
  auto check = [&](const std::vector<float>& vectors, std::vector<std::size_t> rounds) {
    VectorIndex index(kDimension);
    std::vector<std::int64_t> labels;
    // Labels in an order unrelated to the rows' distances, so ties are broken by label.
    for (std::size_t r = 0; r < kRows; ++r) labels.push_back(static_cast<std::int64_t>((r * 7919) % kRows) + 1);
    REQUIRE(index.add(labels, vectors).is_ok());
    std::vector<Neighbour> expected;
    for (std::size_t r = 0; r < kRows; ++r) expected.push_back({labels[r], linf(&vectors[r * kDimension], query, kDimension)});
    sort_as_scanned(expected);
    Result<VectorIndex::Scan> scan = index.scan(query);
    REQUIRE(scan.is_ok());
    std::vector<Neighbour> handed;
    for (std::size_t round = 0; !scan->exhausted(); ++round) {
      const std::size_t asked = rounds[round % rounds.size()];
      const std::span<const Neighbour> got = scan->next(asked);
      REQUIRE(got.size() == std::min(asked, kRows - handed.size()));
      handed.insert(handed.end(), got.begin(), got.end());
    }
    REQUIRE(handed.size() == kRows);
    CHECK(mismatches(handed, expected) == 0);
    CHECK(scan->next(5).empty());
  };
  std::mt19937 random(11);
  std::vector<float> spread(kRows * kDimension);
  for (float& value : spread) value = std::uniform_real_distribution<float>(-50, 80)(random);
  check(spread, {40, 160, 640});
  std::vector<float> ties(kRows * kDimension);
  for (float& value : ties) value = static_cast<float>(std::uniform_int_distribution<int>(0, 60)(random));
  check(ties, {40, 160, 640, 2560, 10240});
  check(ties, {1, 7, 3000});
  std::vector<float> equal(kRows * kDimension, 5.0f);
  check(equal, {40, 160});
  std::vector<float> few_near(kRows * kDimension);
  for (float& value : few_near) value = std::uniform_real_distribution<float>(1000, 2000)(random);
  for (std::size_t r = 0; r < kRows; r += 2003) std::copy(query.begin(), query.end(), few_near.begin() + r * kDimension);
  check(few_near, {3, 100000});
}

// Scans stay exact while the byte codes' scale (fitted to the first vectors) is outgrown:
// vectors added later in batches reach far outside it, some are removed (the last row moving
// into each hole), and queries lie inside and outside it. Each scan is checked against a full
// sort of the distances computed here from the vectors still stored.
TEST_CASE("ScansStayExactWhenLaterVectorsLeaveTheCodedRange") {
  constexpr std::size_t kDimension = 40;  // one block of 32 bytes and an overlapping last one
  VectorIndex index(kDimension);
  std::mt19937 random(5);
  std::map<std::int64_t, std::vector<float>> stored;
  std::int64_t next_label = 1;
  auto add_batch = [&](std::size_t count, float low, float high) {
    std::vector<std::int64_t> labels;
    std::vector<float> vectors;
    for (std::size_t r = 0; r < count; ++r) {
      std::vector<float> vector(kDimension);
      for (float& value : vector) value = std::uniform_real_distribution<float>(low, high)(random);
      labels.push_back(next_label);
      stored[next_label++] = vector;
      vectors.insert(vectors.end(), vector.begin(), vector.end());
    }
    REQUIRE(index.add(labels, vectors).is_ok());
  };
  auto check_scans = [&](std::size_t compared) {
    for (const float centre : {0.5f, 3.0f, -40.0f, 900.0f}) {
      std::vector<float> query(kDimension);
      for (float& value : query) value = centre + std::uniform_real_distribution<float>(-0.5f, 0.5f)(random);
      std::vector<Neighbour> expected;
      for (const auto& [label, vector] : stored) expected.push_back({label, linf(vector.data(), query, compared)});
      sort_as_scanned(expected);
      Result<VectorIndex::Scan> scan = index.scan(query, compared);
      REQUIRE(scan.is_ok());
      std::vector<Neighbour> handed;
      while (!scan->exhausted()) {
        const std::span<const Neighbour> got = scan->next(97);
        handed.insert(handed.end(), got.begin(), got.end());
      }
      REQUIRE(handed.size() == expected.size());
      CHECK(mismatches(handed, expected) == 0);
    }
  };
  add_batch(12000, 0, 1);  // the scale is fitted to these: about [−0.1, 1.1]
  check_scans(kDimension);
  add_batch(50, 0, 5);    // off the scale, too few to fit it again
  add_batch(40, -50, 0);
  check_scans(kDimension);
  check_scans(33);
  check_scans(1);
  std::vector<std::int64_t> removed;
  for (std::int64_t label = 1; label < next_label; label += 3) {
    removed.push_back(label);
    stored.erase(label);
  }
  REQUIRE(index.remove(removed).is_ok());
  check_scans(kDimension);
  add_batch(500, -100, 1000);  // enough off the scale to fit it again
  check_scans(kDimension);
  check_scans(7);  // fewer than one block of bytes
  check_scans(1);  // one value: a bound off by its rounding shows at once
}

// A scan begun before removals (each moving the last row into the hole) still hands out, in
// order and once each, every vector it began with that is still stored, each with its own
// distance; a removed one only if a tier gathered it before the removal (its later tiers read
// the rows again, so rows removed by then are found gone, never read as the row moved into
// their place). A vector added after the scan began is not handed out.
TEST_CASE("ScansBegunBeforeRemovalsHandOutTheSurvivorsWithTheirOwnDistances") {
  constexpr std::size_t kDimension = 4, kRows = 9000;
  std::mt19937 random(9);
  VectorIndex index(kDimension);
  std::vector<std::int64_t> labels;
  std::vector<float> vectors;
  for (std::size_t r = 0; r < kRows; ++r) {
    labels.push_back(static_cast<std::int64_t>(r + 1));
    for (std::size_t j = 0; j < kDimension; ++j) vectors.push_back(std::uniform_real_distribution<float>(0, 100)(random));
  }
  REQUIRE(index.add(labels, vectors).is_ok());
  const std::vector<float> query{50, 50, 50, 50};
  Result<VectorIndex::Scan> scan = index.scan(query);
  REQUIRE(scan.is_ok());
  const std::span<const Neighbour> first = scan->next(10);  // the first tier, before the removals
  std::vector<Neighbour> handed(first.begin(), first.end());
  std::vector<std::int64_t> removed;
  for (std::int64_t label = 3; label <= static_cast<std::int64_t>(kRows); label += 7) removed.push_back(label);
  REQUIRE(index.remove(removed).is_ok());
  REQUIRE(index.add(std::vector<std::int64_t>{100000}, std::vector<float>{50, 50, 50, 50}).is_ok());
  while (!scan->exhausted()) {
    const std::span<const Neighbour> got = scan->next(500);
    REQUIRE_FALSE(got.empty());
    handed.insert(handed.end(), got.begin(), got.end());
  }
  std::set<std::int64_t> seen;
  std::size_t wrong_distance = 0, out_of_order = 0;
  for (std::size_t i = 0; i < handed.size(); ++i) {
    const Neighbour& n = handed[i];
    seen.insert(n.label);
    wrong_distance += n.distance != linf(&vectors[(n.label - 1) * kDimension], query, kDimension);
    out_of_order += i > 0 && n.distance < handed[i - 1].distance;
  }
  CHECK(wrong_distance == 0);
  CHECK(out_of_order == 0);
  CHECK(seen.size() == handed.size());
  CHECK_FALSE(seen.contains(100000));
  std::size_t removed_seen = 0;
  for (std::int64_t label : removed) removed_seen += seen.contains(label);
  CHECK(removed_seen < removed.size());  // the later tiers found most of them gone
  CHECK(handed.size() == kRows - removed.size() + removed_seen);  // so every survivor is there
}
