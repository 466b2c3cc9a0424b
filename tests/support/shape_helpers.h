// Small helpers shared by the geometry tests.
#pragma once

#include <catch2/catch.hpp>

#include "sketch/distance/prepared_shape.h"
#include "sketch/geometry/formats.h"

namespace waymark::testing {

// Parses WKT that the test itself wrote; a parse failure fails the test.
inline Shape wkt(const char* text) {
  Result<Shape> shape = parse_wkt(text);
  INFO(text << ": " << shape.status().to_string());
  REQUIRE(shape.is_ok());
  return *shape;
}

inline double max_segment_length(const Shape& shape) {
  const PreparedShape prepared(shape);
  double longest = 0;
  for (std::size_t i = 0; i < prepared.segment_count(); ++i) longest = std::max(longest, prepared.segment_length(i));
  return longest;
}

}  // namespace waymark::testing
