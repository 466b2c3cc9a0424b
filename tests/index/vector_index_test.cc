// The exhaustive vector index: scans rank by L∞ over the leading values a metric compares
// (index/vector_index.h), and distances_to measures the same way to the labels asked.
#include <catch2/catch.hpp>

#include "index/vector_index.h"

using namespace waymark;

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
