// Reading and writing shapes as text.
//
// Every parser returns the shape or an invalid_argument Status whose where() says where the
// problem is: "line L, column C (byte B)" for WKT and SVG path data (bytes counted from 0,
// lines and columns from 1), a JSON path such as "$.coordinates[0][3][1]" for GeoJSON and
// point arrays. Every parsed shape has passed validate() with the given limits, so NaN,
// infinities, short strokes, degenerate rings and oversize input are rejected here.
//
// Accepted:
//   WKT (OGC Simple Features 1.2.1, §7): POINT, MULTIPOINT (both "((1 2), (3 4))" and
//     "(1 2, 3 4)"), LINESTRING, MULTILINESTRING, POLYGON, MULTIPOLYGON; keywords are
//     case-insensitive. Rings must be closed (first vertex repeated last); an open ring is an
//     error, not closed silently. EMPTY, Z/M coordinates and other types are rejected.
//   GeoJSON (RFC 7946 §3.1): a geometry object of the types above, or a Feature (its
//     "geometry" member). Ring closure as for WKT.
//   SVG path data (SVG 1.1 §8.3): M L H V C S Q T A Z, absolute and relative. Curves and arcs
//     are flattened so that no point of the curve is farther than `curve_tolerance` from the
//     polyline. A path whose every subpath ends with Z becomes a polygon (each subpath a ring
//     of its own polygon: holes are not inferred); otherwise a polyline, and a subpath closed
//     by Z keeps its closing segment as a final vertex equal to its first.
//   Point arrays (JSON): [[x,y],...] is one stroke, [[[x,y],...],...] several (a polyline).
//
// Writers emit the shortest text that parses back to an equal Shape (round trip); numbers are
// printed with 17 significant digits so doubles survive exactly.
#pragma once

#include <nlohmann/json_fwd.hpp>
#include <string>
#include <string_view>

#include "sketch/geometry/shape.h"

namespace waymark {

enum class ShapeFormat { automatic, wkt, geojson, svg_path, point_arrays };

const char* shape_format_name(ShapeFormat format);
Result<ShapeFormat> parse_shape_format(const std::string& name);

struct ParseOptions {
  ShapeLimits limits;
  double curve_tolerance = 0.01;  // SVG curves and arcs, in the input's units
};

Result<Shape> parse_wkt(std::string_view text, const ParseOptions& options = {});
Result<Shape> parse_geojson(std::string_view text, const ParseOptions& options = {});
Result<Shape> parse_svg_path(std::string_view text, const ParseOptions& options = {});
Result<Shape> parse_point_arrays(std::string_view text, const ParseOptions& options = {});
// The same two readers for JSON already parsed, e.g. a member of a request body: the text is
// not printed and parsed again. Results and errors (JSON paths from "$") are those of
// parse_geojson / parse_point_arrays on the value's text.
Result<Shape> geojson_from_json(const nlohmann::json& value, const ParseOptions& options = {});
Result<Shape> point_arrays_from_json(const nlohmann::json& value, const ParseOptions& options = {});

// Chooses the parser from the first non-blank character: '{' GeoJSON, '[' point arrays, an
// SVG path command letter (M or m) SVG path data, anything else WKT.
Result<Shape> parse_shape(std::string_view text, ShapeFormat format = ShapeFormat::automatic,
                          const ParseOptions& options = {});

std::string to_wkt(const Shape& shape);
std::string to_geojson(const Shape& shape);

}  // namespace waymark
