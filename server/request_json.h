// Internal to server/: reading JSON request bodies with errors that say where. A field error's
// where() is the field's path ("k", "landmarks.count", "shape: $.coordinates[0][1]"); a
// syntax error's is "line L, column C (byte B)" in the body.
#pragma once

#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>

#include "sketch/geometry/shape.h"
#include "sketch/status.h"

namespace waymark::server {

using Json = nlohmann::json;

// "line L, column C (byte B)" for a byte offset into text (lines and columns from 1, bytes from 0).
std::string text_position(std::string_view text, std::size_t byte);

// The body as a JSON object. An empty body is an empty object when allow_empty.
Result<Json> parse_object(std::string_view text, bool allow_empty);

// Fails unless every member of `object` is one of `known`: typos are errors, not ignored.
Status check_known_fields(const Json& object, std::initializer_list<const char*> known, const std::string& prefix = {});

// Each returns `fallback` when the field is absent; a wrong type or a value out of range is
// invalid_argument naming the field (prefix + field).
Result<std::size_t> size_field(const Json& object, const char* field, std::size_t fallback, std::size_t minimum,
                               std::size_t maximum, const std::string& prefix = {});
Result<double> number_field(const Json& object, const char* field, double fallback, const std::string& prefix = {});
Result<std::string> string_field(const Json& object, const char* field, const std::string& fallback,
                                 const std::string& prefix = {});
Result<bool> bool_field(const Json& object, const char* field, bool fallback, const std::string& prefix = {});

// A geometry given as a GeoJSON geometry (or Feature) object, as WKT or SVG path data in a
// string, or as point arrays; absent is invalid_argument ("... is required").
Result<Shape> shape_field(const Json& object, const char* field, const ShapeLimits& limits);

// A metadata object as compact text; absent → "{}".
Result<std::string> metadata_field(const Json& object, const char* field);

// The common line of a bulk NDJSON body, read without building a JSON document (most of a bulk
// load's time otherwise): an object with members "id", "geometry" and optionally "metadata",
// in any order, whose id is printable ASCII without escapes, whose geometry is a GeoJSON
// geometry object that parse_geojson reads, and whose metadata is an object. nullopt for any
// other line and for every line the general reading (parse_object, then the fields above)
// would refuse, so that its errors are the ones users see; otherwise the same id, shape and
// metadata text as the general reading. The id is not checked here.
struct PlainBulkLine {
  std::string id;
  Shape shape;
  std::string metadata;
};
std::optional<PlainBulkLine> read_plain_bulk_line(std::string_view line, const ShapeLimits& limits);

// A time for replies: RFC 3339 in UTC with milliseconds, "2026-12-02T13:05:00.123Z".
std::string iso_time(std::int64_t unix_ms);

}  // namespace waymark::server
