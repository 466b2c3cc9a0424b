// Parsers and writers: valid input, invalid input with its exact message and position, and
// round trips. Expected values are worked out by hand from the input text (byte offsets are
// counted from 0, columns from 1).
#include <catch2/catch.hpp>
#include <bit>
#include <cmath>
#include <nlohmann/json.hpp>

#include "sketch/geometry/formats.h"
#include "sketch/landmarks/landmark_set.h"

using namespace waymark;

namespace {

Shape parsed(std::string_view text, ShapeFormat format = ShapeFormat::automatic) {
  Result<Shape> shape = parse_shape(text, format);
  INFO(text << " -> " << shape.status().to_string());
  REQUIRE(shape.is_ok());
  return *shape;
}

Status error_of(std::string_view text, ShapeFormat format = ShapeFormat::automatic, ParseOptions options = {}) {
  Result<Shape> shape = parse_shape(text, format, options);
  REQUIRE_FALSE(shape.is_ok());
  return shape.status();
}

}  // namespace

TEST_CASE("WktLinestringKeepsVerticesInOrder") {
  const Shape s = parsed("LINESTRING (0 0, 10 0, 10 5.5)");
  CHECK(s.kind == ShapeKind::polyline);
  REQUIRE(s.parts.size() == 1);
  CHECK(s.parts[0] == Path{{0, 0}, {10, 0}, {10, 5.5}});
}

TEST_CASE("WktKeywordsAreCaseInsensitiveAndMultipointTakesBothForms") {
  CHECK(parsed("multipoint ((1 2), (3 4))") == parsed("MultiPoint (1 2, 3 4)"));
  CHECK(parsed("POINT(1e3 -2.5E-1)").parts[0] == Path{{1000, -0.25}});
}

TEST_CASE("WktPolygonDropsClosingVertexAndGroupsHoles") {
  const Shape s = parsed("MULTIPOLYGON (((0 0, 4 0, 4 4, 0 0), (1 1, 2 1, 2 2, 1 1)), ((5 5, 6 5, 6 6, 5 5)))");
  CHECK(s.kind == ShapeKind::polygon);
  REQUIRE(s.parts.size() == 3);
  CHECK(s.parts[0] == Path{{0, 0}, {4, 0}, {4, 4}});
  CHECK(s.polygon_of_ring == std::vector<std::uint32_t>{0, 0, 1});
}

TEST_CASE("WktOpenRingIsRejectedAtItsStart") {
  // The ring's "(" is byte 9 of the text.
  const Status s = error_of("POLYGON ((0 0, 1 0, 1 1))");
  CHECK(s.message() == "polygon ring is not closed: its last vertex must repeat its first");
  CHECK(s.where() == "line 1, column 10 (byte 9)");
}

TEST_CASE("WktEmptyAndUnsupportedTypesAreRejected") {
  Status s = error_of("POINT EMPTY");
  CHECK(s.message() == "EMPTY geometries are not supported");
  CHECK(s.where() == "line 1, column 7 (byte 6)");
  s = error_of("GEOMETRYCOLLECTION (POINT (1 2))");
  CHECK(s.message().rfind("unsupported WKT type 'GEOMETRYCOLLECTION'", 0) == 0);
  CHECK(s.where() == "line 1, column 1 (byte 0)");
  s = error_of("POINT Z (1 2 3)");
  CHECK(s.message() == "coordinates with Z are not supported (2D only)");
  s = error_of("POINT (1 2 3)");
  CHECK(s.message() == "a third coordinate was given; only 2D coordinates are supported");
}

TEST_CASE("WktErrorPositionCountsLines") {
  // Second line "  10 x)": the 'x' is column 6, byte 17 + 5 = 22.
  const Status s = error_of("LINESTRING (0 0,\n  10 x)");
  CHECK(s.message() == "expected a number, found 'x'");
  CHECK(s.where() == "line 2, column 6 (byte 22)");
}

TEST_CASE("WktNonFiniteNumbersAreRejected") {
  CHECK(error_of("POINT (nan 1)").message() == "expected a number, found 'n'");
  CHECK(error_of("POINT (-inf 1)").message() == "expected a number, found '-'");
  const Status s = error_of("POINT (1e999 1)");
  CHECK(s.message() == "coordinate is not a finite number");
  CHECK(s.where() == "line 1, column 8 (byte 7)");
}

TEST_CASE("ShortStrokesAndFlatRingsAreRejected") {
  CHECK(error_of("LINESTRING (1 1, 1 1)").message() == "a polyline stroke needs at least two distinct vertices");
  CHECK(error_of("POLYGON ((0 0, 1 1, 2 2, 0 0))").message() ==
        "a polygon ring needs at least three distinct vertices and non-zero area");
}

TEST_CASE("VertexLimitIsEnforcedWhileReading") {
  ParseOptions options;
  options.limits.max_vertices = 3;
  const Status s = error_of("LINESTRING (0 0, 1 0, 2 0, 3 0)", ShapeFormat::wkt, options);
  CHECK(s.code() == StatusCode::resource_exhausted);
  CHECK(s.message() == "more than 3 vertices");
}

TEST_CASE("TrailingTextIsRejected") {
  const Status s = error_of("POINT (1 2) extra");
  CHECK(s.message() == "unexpected text after the geometry: 'e'");
  CHECK(s.where() == "line 1, column 13 (byte 12)");
}

TEST_CASE("GeoJsonGeometryAndFeatureAreRead") {
  const Shape line = parsed(R"({"type":"LineString","coordinates":[[0,0],[3,4]]})");
  CHECK(line.parts[0] == Path{{0, 0}, {3, 4}});
  const Shape feature = parsed(R"({"type":"Feature","properties":{},"geometry":{"type":"Polygon",
      "coordinates":[[[0,0],[2,0],[2,2],[0,0]]]}})");
  CHECK(feature.kind == ShapeKind::polygon);
  CHECK(feature.parts[0].size() == 3);
}

TEST_CASE("GeoJsonErrorsNameTheJsonPath") {
  Status s = error_of(R"({"type":"MultiLineString","coordinates":[[[0,0],[1,1]],[[0,0],[1,"a"]]]})");
  CHECK(s.message() == "expected a number");
  CHECK(s.where() == "$.coordinates[1][1][1]");
  s = error_of(R"({"type":"Polygon","coordinates":[[[0,0],[2,0],[2,2]]]})");
  CHECK(s.message() == "polygon ring is not closed: its last position must repeat its first");
  CHECK(s.where() == "$.coordinates[0]");
  s = error_of(R"({"type":"Point","coordinates":[1,2,3]})");
  CHECK(s.message() == "only 2D positions [x, y] are supported");
  s = error_of(R"({"type":"GeometryCollection","geometries":[]})");
  CHECK(s.where() == "$.type");
  s = error_of(R"({"type":"LineString","coordinates":[]})");
  CHECK(s.message() == "empty geometries are not supported");
}

// The readers of parsed JSON (used for request bodies) answer as the text parsers do on the
// value's text: the same shape, or the same message and JSON path.
TEST_CASE("ParsedJsonReadersMatchTheTextParsers") {
  const std::vector<std::string> texts = {
      R"({"type":"LineString","coordinates":[[0,0],[3,4],[1e-300,-2.5e10]]})",
      R"({"type":"MultiPolygon","coordinates":[[[[0,0],[2,0],[2,2],[0,0]]],[[[5,5],[6,5],[6,6],[5,5]]]]})",
      R"({"type":"MultiLineString","coordinates":[[[0,0],[1,1]],[[0,0],[1,"a"]]]})",
      R"({"type":"Polygon","coordinates":[[[0,0],[2,0],[2,2]]]})",
      "[[0,0],[1,1],[2,0]]",
      "[[[0,0],[1,1]],[[5,5],\"x\"]]",
      "[[0,0]]"};
  for (const std::string& text : texts) {
    INFO(text);
    const nlohmann::json value = nlohmann::json::parse(text);
    const Result<Shape> from_text = text[0] == '{' ? parse_geojson(text) : parse_point_arrays(text);
    const Result<Shape> from_value = text[0] == '{' ? geojson_from_json(value) : point_arrays_from_json(value);
    REQUIRE(from_text.is_ok() == from_value.is_ok());
    if (from_text.is_ok()) {
      CHECK(*from_text == *from_value);
    } else {
      CHECK(from_text.status().message() == from_value.status().message());
      CHECK(from_text.status().where() == from_value.status().where());
    }
  }
}

namespace {

// Every coordinate bit for bit (operator== takes -0.0 for 0.0).
bool same_bits(const Shape& a, const Shape& b) {
  if (!(a == b)) return false;
  for (std::size_t i = 0; i < a.parts.size(); ++i) {
    for (std::size_t j = 0; j < a.parts[i].size(); ++j) {
      if (std::bit_cast<std::uint64_t>(a.parts[i][j].x) != std::bit_cast<std::uint64_t>(b.parts[i][j].x) ||
          std::bit_cast<std::uint64_t>(a.parts[i][j].y) != std::bit_cast<std::uint64_t>(b.parts[i][j].y)) {
        return false;
      }
    }
  }
  return true;
}

// Seeded GeoJSON texts near the plain case that parse_geojson reads without a JSON document:
// every type, both member orders, odd spacing and number spellings, and the ways such text
// goes wrong (3D positions, open rings, empty arrays, extra members, escapes, bad numbers).
std::string random_geojson(SeededRandom& random) {
  static const char* kNumbers[] = {"0", "-0", "-0.0", "1", "-17", "3.25", "1e3", "2E-2", "-4.5e+1", "12345678901234567890123",
                                   "9007199254740993", "0.1", "1e400", "1e-400", "01", "1.", ".5", "+1", "-", "1e"};
  auto number = [&] {
    return random.below(60) == 0 ? std::string(kNumbers[random.below(std::size(kNumbers))])
                                : std::to_string(static_cast<int>(random.below(200)) - 100) + "." +
                                      std::to_string(random.below(1000));
  };
  auto space = [&] { return std::string(random.below(2), random.below(4) == 0 ? " \n\t\r"[random.below(4)] : ' '); };
  auto position = [&] {
    std::string p = "[" + space() + number() + "," + space() + number();
    if (random.below(30) == 0) p += "," + number();  // 3D
    return p + space() + "]";
  };
  auto positions = [&](std::size_t count, bool ring) {
    std::string first = position(), out = "[" + first;
    for (std::size_t i = 1; i < count; ++i) out += "," + space() + (ring && i + 1 == count && random.below(10) ? first : position());
    return count == 0 ? std::string("[]") : out + "]";
  };
  auto list = [&](std::size_t count, auto item) {
    std::string out = "[";
    for (std::size_t i = 0; i < count; ++i) out += (i ? "," : "") + item();
    return out + "]";
  };
  static const char* kTypes[] = {"Point", "MultiPoint", "LineString", "MultiLineString", "Polygon", "MultiPolygon",
                                 "Feature", "Curve"};
  const std::string type = kTypes[random.below(std::size(kTypes))];
  auto count = [&] { return random.below(12) == 0 ? 0 : 1 + random.below(6); };
  std::string coordinates;
  if (type == "Point") {
    coordinates = position();
  } else if (type == "MultiPoint" || type == "LineString" || type == "Curve") {
    coordinates = positions(count(), false);
  } else if (type == "MultiLineString") {
    coordinates = list(count(), [&] { return positions(count(), false); });
  } else if (type == "Polygon" || type == "Feature") {
    coordinates = list(count(), [&] { return positions(3 + random.below(4), true); });
  } else {
    coordinates = list(count(), [&] { return list(count(), [&] { return positions(3 + random.below(4), true); }); });
  }
  std::vector<std::string> members = {"\"type\"" + space() + ":" + space() + "\"" + type + "\"",
                                      "\"coordinates\":" + space() + coordinates};
  if (random.below(20) == 0) members.push_back("\"bbox\":[0,0,1,1]");
  if (random.below(20) == 0) members[0] = "\"type\":\"Line\\u0053tring\"";
  if (random.below(2)) std::swap(members[0], members[1]);
  std::string text = space() + "{";
  for (std::size_t i = 0; i < members.size(); ++i) text += (i ? "," : "") + space() + members[i] + space();
  text += "}" + space();
  if (type == "Feature") text = R"({"type":"Feature","properties":{},"geometry":)" + text + "}";
  if (random.below(40) == 0) text += "x";  // trailing text
  return text;
}

}  // namespace

// parse_geojson reads plain geometry objects without building a JSON document (bulk ingest);
// on 5,000 seeded texts it must answer exactly as the general reader on the parsed document:
// the same shape bit for bit, or the same error. Outside reference for the numbers: nlohmann
// json's own reading of each literal.
TEST_CASE("PlainGeoJsonFastPathAgreesWithTheGeneralReader") {
  SeededRandom random(2026);
  ParseOptions small;
  small.limits.max_vertices = 20;  // some texts pass it
  std::size_t shapes = 0, errors = 0;
  for (int t = 0; t < 5000; ++t) {
    const std::string text = random_geojson(random);
    const ParseOptions& options = t % 3 == 0 ? small : ParseOptions{};
    INFO(text);
    const Result<Shape> fast = parse_geojson(text, options);
    const nlohmann::json document = nlohmann::json::parse(text, nullptr, false);
    if (document.is_discarded()) {
      CHECK_FALSE(fast.is_ok());
      ++errors;
      continue;
    }
    Result<Shape> general = Status(StatusCode::invalid_argument, "unset");
    try {
      general = geojson_from_json(document, options);
    } catch (const nlohmann::json::exception&) {
      FAIL("the general reader threw");
    }
    REQUIRE(fast.is_ok() == general.is_ok());
    if (fast.is_ok()) {
      CHECK(same_bits(*fast, *general));
      ++shapes;
    } else {
      CHECK(fast.status().message() == general.status().message());
      CHECK(fast.status().where() == general.status().where());
      ++errors;
    }
  }
  INFO("shapes " << shapes << ", errors " << errors);
  CHECK(shapes > 1000);
  CHECK(errors > 500);
}

TEST_CASE("MalformedJsonReportsItsPosition") {
  const Status s = error_of("{\"type\": \"Point\",\n \"coordinates\": [1, 2,]}");
  CHECK(s.message().rfind("invalid JSON: ", 0) == 0);
  CHECK(s.where().rfind("line 2, column", 0) == 0);
}

TEST_CASE("PointArraysGiveOneOrSeveralStrokes") {
  CHECK(parsed("[[0,0],[1,1],[2,0]]").parts.size() == 1);
  const Shape strokes = parsed("[[[0,0],[1,1]],[[5,5],[6,5]]]");
  CHECK(strokes.kind == ShapeKind::polyline);
  CHECK(strokes.parts.size() == 2);
  CHECK(error_of("[[[0,0],[1,1]],[[5,5],\"x\"]]").where() == "$[1][1]");
}

TEST_CASE("SvgAbsoluteAndRelativeLines") {
  // M 10 10 h 5 v 5 L 0 0 l 1 -1: vertices worked out by hand.
  const Shape s = parsed("M 10 10 h 5 v 5 L 0 0 l 1 -1");
  CHECK(s.kind == ShapeKind::polyline);
  CHECK(s.parts[0] == Path{{10, 10}, {15, 10}, {15, 15}, {0, 0}, {1, -1}});
  // Implicit lineto after moveto, compact number syntax "1.5.5" = 1.5, 0.5 (SVG 1.1 §8.3.9 grammar).
  CHECK(parsed("m1 1 2 0-1.5.5").parts[0] == Path{{1, 1}, {3, 1}, {1.5, 1.5}});
}

TEST_CASE("SvgClosedSubpathsMakeAPolygon") {
  const Shape s = parsed("M0 0 L4 0 L4 4 Z M10 10 l1 0 l0 1 z");
  CHECK(s.kind == ShapeKind::polygon);
  REQUIRE(s.parts.size() == 2);
  CHECK(s.parts[0] == Path{{0, 0}, {4, 0}, {4, 4}});
  CHECK(s.polygon_of_ring == std::vector<std::uint32_t>{0, 1});
  // One open subpath makes the whole path a polyline; the closed one keeps its closing vertex.
  const Shape mixed = parsed("M0 0 L4 0 L4 4 Z M10 10 L11 10");
  CHECK(mixed.kind == ShapeKind::polyline);
  CHECK(mixed.parts[0] == Path{{0, 0}, {4, 0}, {4, 4}, {0, 0}});
}

TEST_CASE("SvgCurvesStayWithinTheTolerance") {
  ParseOptions options;
  options.curve_tolerance = 1e-3;
  // Quadratic M0 0 Q 5 10 10 0: y(t) = 20 t (1 − t), apex y = 5 at x = 5 (by hand).
  Result<Shape> quad = parse_svg_path("M0 0 Q 5 10 10 0", options);
  REQUIRE(quad.is_ok());
  double apex = 0;
  for (const Point& p : quad->parts[0]) apex = std::max(apex, p.y);
  CHECK(apex <= 5.0);
  CHECK(apex >= 5.0 - 1e-3);
  // Half circle of radius 5 from (0,0) to (10,0): every vertex on the circle around (5,0).
  Result<Shape> arc = parse_svg_path("M0 0 A 5 5 0 0 1 10 0", options);
  REQUIRE(arc.is_ok());
  for (const Point& p : arc->parts[0]) CHECK(std::hypot(p.x - 5, p.y) == Approx(5).margin(1e-9));
  CHECK(arc->parts[0].back() == Point{10, 0});
  // Smooth cubic reflection: "S" mirrors the previous second control point (SVG 1.1 §8.3.6).
  Result<Shape> smooth = parse_svg_path("M0 0 C 0 1 1 1 1 0 S 2 -1 2 0", options);
  Result<Shape> explicit_form = parse_svg_path("M0 0 C 0 1 1 1 1 0 C 1 -1 2 -1 2 0", options);
  REQUIRE(smooth.is_ok());
  REQUIRE(explicit_form.is_ok());
  CHECK(smooth->parts == explicit_form->parts);
}

TEST_CASE("SvgArcWithTooSmallRadiiIsScaledUp") {
  // SVG 1.1 F.6.6: radii 1 are too small for endpoints 10 apart, so they grow to 5.
  Result<Shape> arc = parse_svg_path("M0 0 A 1 1 0 0 1 10 0");
  REQUIRE(arc.is_ok());
  for (const Point& p : arc->parts[0]) CHECK(std::hypot(p.x - 5, p.y) == Approx(5).margin(1e-9));
}

// An arc far from the unit scale is the same figure scaled: its squared coordinates would
// overflow, so the parser works in units of the arc's extent (a fuzz finding: radii corrected
// by an infinite factor gave NaN, then an out-of-range conversion).
TEST_CASE("SvgArcsAtExtremeScalesKeepTheirShape") {
  ParseOptions options;
  options.curve_tolerance = 1e-3;
  for (double scale : {1e-150, 1e160}) {
    INFO("scale " << scale);
    ParseOptions scaled_options = options;
    scaled_options.curve_tolerance = options.curve_tolerance * scale;
    char text[160];
    std::snprintf(text, sizeof text, "M0 0 A %.17g %.17g 0 0 1 %.17g 0", scale, scale, 10 * scale);
    Result<Shape> arc = parse_svg_path(text, scaled_options);
    REQUIRE(arc.is_ok());
    // Radii 1 (scaled) grow to half the chord (SVG 1.1 F.6.6): a half circle around (5, 0).
    REQUIRE(arc->parts[0].size() > 8);
    for (const Point& p : arc->parts[0]) CHECK(std::hypot(p.x / scale - 5, p.y / scale) == Approx(5).margin(1e-9));
  }
  // The fuzzer's input: an endpoint near 8e165, the radii small beside it. It parses or fails
  // with a message, and any shape it gives has finite coordinates.
  Result<Shape> far = parse_svg_path("M 10 10 A 5 50 0 1 0 8" + std::string(165, '4') + " 1");
  if (far.is_ok()) {
    CHECK(validate(*far, ShapeLimits{}).is_ok());
  } else {
    CHECK_FALSE(far.status().message().empty());
  }
}

TEST_CASE("SvgErrorsSayWhatAndWhere") {
  Status s = error_of("M 0 0 L 1", ShapeFormat::svg_path);
  CHECK(s.message() == "expected a number for the 'L' command, found end of input");
  CHECK(s.where() == "line 1, column 10 (byte 9)");
  s = error_of("L 0 0", ShapeFormat::svg_path);
  CHECK(s.message() == "path data must start with a moveto command (M or m)");
  s = error_of("M 0 0 X 1 1", ShapeFormat::svg_path);
  CHECK(s.message() == "unknown path command 'X'");
  CHECK(s.where() == "line 1, column 7 (byte 6)");
  s = error_of("M0 0 A 1 1 0 2 1 3 3", ShapeFormat::svg_path);
  CHECK(s.message() == "expected an arc flag 0 or 1 for the 'A' command, found '2'");
  CHECK(error_of("M 5 5", ShapeFormat::svg_path).message() == "path data draws nothing (no segment after a moveto)");
}

TEST_CASE("WritersRoundTrip") {
  const char* inputs[] = {
      "POINT (1.25 -3)",
      "MULTIPOINT ((0 0), (0.1 0.2), (1e-300 7))",
      "LINESTRING (0.1 0.2, 0.30000000000000004 1, 5 5)",
      "MULTILINESTRING ((0 0, 1 1), (2 2, 3 3, 4 2))",
      "POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0), (2 2, 3 2, 3 3, 2 2))",
      "MULTIPOLYGON (((0 0, 1 0, 1 1, 0 0)), ((5 5, 6 5, 6 6, 5 5), (5.2 5.1, 5.8 5.1, 5.8 5.7, 5.2 5.1)))",
  };
  for (const char* input : inputs) {
    const Shape shape = parsed(input);
    INFO(input);
    CHECK(parsed(to_wkt(shape), ShapeFormat::wkt) == shape);
    CHECK(parsed(to_geojson(shape), ShapeFormat::geojson) == shape);
  }
  CHECK(to_wkt(parsed("MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))")) == "MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))");
}

TEST_CASE("FramesCenterAndScale") {
  const Shape s = parsed("LINESTRING (10 20, 14 22)");
  CHECK(apply_frame(s, Frame::absolute) == s);
  CHECK(apply_frame(s, Frame::centered).parts[0] == Path{{-2, -1}, {2, 1}});
  CHECK(apply_frame(s, Frame::unit).parts[0] == Path{{-0.5, -0.25}, {0.5, 0.25}});
  CHECK(apply_frame(parsed("POINT (3 4)"), Frame::unit).parts[0] == Path{{0, 0}});
}
