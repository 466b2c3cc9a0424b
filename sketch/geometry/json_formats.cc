// GeoJSON geometry objects (RFC 7946 §3.1) and JSON point arrays, read and written.
// Errors name the JSON path of the offending value, e.g. "$.coordinates[0][3][1]".
#include <cmath>
#include <optional>
#include <nlohmann/json.hpp>
#include <string>

#include "sketch/geometry/formats.h"
#include "sketch/geometry/plain_json.h"
#include "sketch/geometry/text_cursor.h"

namespace waymark {
namespace {

using Json = nlohmann::json;

Result<Json> parse_json_text(std::string_view text) {
  try {
    return Json::parse(text.begin(), text.end());
  } catch (const Json::parse_error& error) {
    // nlohmann reports the byte just past the problem, counted from 1.
    const std::size_t byte = error.byte > 0 ? error.byte - 1 : 0;
    std::string message = error.what();
    if (auto colon = message.rfind(": "); colon != std::string::npos) message = message.substr(colon + 2);
    return invalid_argument("invalid JSON: " + message, detail::TextCursor(text).where_at(byte));
  } catch (const Json::exception& error) {
    // Not a syntax error: a number beyond the range of a double (out_of_range.406), say.
    std::string message = error.what();
    if (auto bracket = message.find("] "); bracket != std::string::npos) message = message.substr(bracket + 2);
    return invalid_argument("invalid JSON: " + message, "json");
  }
}

class JsonShapeReader {
 public:
  explicit JsonShapeReader(const ParseOptions& options) : options_(options) {}

  Status read_position(const Json& value, const std::string& path, Path& out) {
    if (!value.is_array() || value.size() < 2) return invalid_argument("expected a position [x, y]", path);
    if (value.size() > 2) return invalid_argument("only 2D positions [x, y] are supported", path);
    Point point;
    for (int axis = 0; axis < 2; ++axis) {
      const Json& number = value[axis];
      const std::string where = path + "[" + std::to_string(axis) + "]";
      if (!number.is_number()) return invalid_argument("expected a number", where);
      const double v = number.get<double>();
      if (!std::isfinite(v)) return invalid_argument("coordinate is not a finite number", where);
      (axis == 0 ? point.x : point.y) = v;
    }
    if (++vertices_read_ > options_.limits.max_vertices) {
      return Status(StatusCode::resource_exhausted,
                    "more than " + std::to_string(options_.limits.max_vertices) + " vertices", path);
    }
    out.push_back(point);
    return Status::ok();
  }

  Status read_positions(const Json& value, const std::string& path, Path& out) {
    if (!value.is_array()) return invalid_argument("expected an array of positions", path);
    for (std::size_t i = 0; i < value.size(); ++i) {
      if (Status s = read_position(value[i], path + "[" + std::to_string(i) + "]", out); !s.is_ok()) return s;
    }
    return Status::ok();
  }

  Status read_polygon(const Json& value, const std::string& path, std::uint32_t polygon, Shape& shape) {
    if (!value.is_array() || value.empty()) return invalid_argument("expected an array of rings", path);
    for (std::size_t r = 0; r < value.size(); ++r) {
      const std::string ring_path = path + "[" + std::to_string(r) + "]";
      Path ring;
      if (Status s = read_positions(value[r], ring_path, ring); !s.is_ok()) return s;
      if (ring.size() < 2 || !(ring.front() == ring.back())) {
        return invalid_argument("polygon ring is not closed: its last position must repeat its first", ring_path);
      }
      ring.pop_back();
      shape.parts.push_back(std::move(ring));
      shape.polygon_of_ring.push_back(polygon);
    }
    return Status::ok();
  }

  Result<Shape> read_geometry(const Json& object, const std::string& path) {
    if (!object.is_object()) return invalid_argument("expected a GeoJSON object", path);
    auto type_member = object.find("type");
    if (type_member == object.end() || !type_member->is_string()) {
      return invalid_argument("missing string member \"type\"", path);
    }
    const std::string type = type_member->get<std::string>();
    if (type == "Feature") {
      auto geometry = object.find("geometry");
      if (geometry == object.end() || geometry->is_null()) {
        return invalid_argument("Feature has no geometry", path + ".geometry");
      }
      return read_geometry(*geometry, path + ".geometry");
    }
    auto coordinates = object.find("coordinates");
    if (type == "GeometryCollection" || type == "FeatureCollection") {
      return invalid_argument("unsupported GeoJSON type \"" + type + "\": give one geometry or Feature", path + ".type");
    }
    if (coordinates == object.end()) return invalid_argument("missing member \"coordinates\"", path);
    const std::string where = path + ".coordinates";
    if (coordinates->is_array() && coordinates->empty()) {
      return invalid_argument("empty geometries are not supported", where);
    }
    Shape shape;
    Status status;
    if (type == "Point") {
      shape.kind = ShapeKind::points;
      shape.parts.emplace_back();
      status = read_position(*coordinates, where, shape.parts.back());
    } else if (type == "MultiPoint") {
      shape.kind = ShapeKind::points;
      shape.parts.emplace_back();
      status = read_positions(*coordinates, where, shape.parts.back());
    } else if (type == "LineString") {
      shape.kind = ShapeKind::polyline;
      shape.parts.emplace_back();
      status = read_positions(*coordinates, where, shape.parts.back());
    } else if (type == "MultiLineString" || type == "Polygon" || type == "MultiPolygon") {
      if (!coordinates->is_array()) return invalid_argument("expected an array", where);
      if (type == "MultiLineString") {
        shape.kind = ShapeKind::polyline;
        for (std::size_t i = 0; i < coordinates->size() && status.is_ok(); ++i) {
          shape.parts.emplace_back();
          status = read_positions((*coordinates)[i], where + "[" + std::to_string(i) + "]", shape.parts.back());
        }
      } else if (type == "Polygon") {
        shape.kind = ShapeKind::polygon;
        status = read_polygon(*coordinates, where, 0, shape);
      } else {
        shape.kind = ShapeKind::polygon;
        for (std::size_t i = 0; i < coordinates->size() && status.is_ok(); ++i) {
          status = read_polygon((*coordinates)[i], where + "[" + std::to_string(i) + "]",
                                static_cast<std::uint32_t>(i), shape);
        }
      }
    } else {
      return invalid_argument("unsupported GeoJSON type \"" + type + "\"", path + ".type");
    }
    if (!status.is_ok()) return status;
    if (Status valid = validate(shape, options_.limits); !valid.is_ok()) return valid;
    return shape;
  }

 private:
  const ParseOptions& options_;
  std::size_t vertices_read_ = 0;
};

// The common case of parse_geojson read straight from the text, without a JSON document: an
// object whose members are exactly "type" (Point, MultiPoint, LineString, MultiLineString,
// Polygon or MultiPolygon) and "coordinates", in either order. It returns the shape only when
// the general reader would return the same one, bit for bit (PlainJsonCursor reads numbers as
// nlohmann does), and nullopt for anything else: other members or types, escapes, 3D
// positions, numbers out of range, and every input the general reader refuses, so that errors
// always come from the general reader.
class PlainGeometryReader {
 public:
  PlainGeometryReader(std::string_view text, const ParseOptions& options) : text_(text), options_(options) {}

  std::optional<Shape> read() {
    std::string_view type, coordinates;
    PlainJsonCursor object(text_);
    object.skip_spaces();
    if (!object.take('{')) return std::nullopt;
    for (int member = 0; member < 2; ++member) {
      std::string_view key;
      if (!object.read_member_name(key)) return std::nullopt;
      const bool read_value = (key == "type" && type.empty() && object.read_plain_string(type)) ||
                              (key == "coordinates" && coordinates.empty() && object.skip_container(coordinates));
      object.skip_spaces();
      if (!read_value || !object.take(member == 0 ? ',' : '}')) return std::nullopt;
    }
    object.skip_spaces();
    if (!object.at_end()) return std::nullopt;
    PlainJsonCursor cursor(coordinates);
    cursor_ = &cursor;
    Shape shape;
    bool read = false;
    if (type == "Point" || type == "MultiPoint" || type == "LineString") {
      shape.kind = type == "LineString" ? ShapeKind::polyline : ShapeKind::points;
      shape.parts.emplace_back();
      read = type == "Point" ? read_position(shape.parts.back()) : read_positions(shape.parts.back());
    } else if (type == "MultiLineString") {
      shape.kind = ShapeKind::polyline;
      read = read_list([&] { return read_positions(shape.parts.emplace_back()); });
    } else if (type == "Polygon") {
      shape.kind = ShapeKind::polygon;
      read = read_polygon(0, shape);
    } else if (type == "MultiPolygon") {
      shape.kind = ShapeKind::polygon;
      std::uint32_t polygon = 0;
      read = read_list([&] { return read_polygon(polygon++, shape); });
    }
    // An empty top-level array is an error of its own in the general reader.
    if (!read || !cursor.at_end() || coordinates.find_first_not_of(" \t\n\r", 1) == coordinates.size() - 1 ||
        !validate(shape, options_.limits).is_ok()) {
      return std::nullopt;
    }
    return shape;
  }

 private:
  // '[' item (',' item)* ']' or '[' ']'.
  template <typename ReadItem>
  bool read_list(ReadItem read_item) {
    PlainJsonCursor& c = *cursor_;
    c.skip_spaces();
    if (!c.take('[')) return false;
    c.skip_spaces();
    if (c.take(']')) return true;
    while (true) {
      if (!read_item()) return false;
      c.skip_spaces();
      if (c.take(']')) return true;
      if (!c.take(',')) return false;
      c.skip_spaces();
    }
  }
  bool read_position(Path& out) {
    PlainJsonCursor& c = *cursor_;
    Point p;
    c.skip_spaces();
    if (!c.take('[')) return false;
    c.skip_spaces();
    if (!c.read_number(p.x)) return false;
    c.skip_spaces();
    if (!c.take(',')) return false;
    c.skip_spaces();
    if (!c.read_number(p.y)) return false;
    c.skip_spaces();
    if (!c.take(']') || ++vertices_read_ > options_.limits.max_vertices) return false;
    out.push_back(p);
    return true;
  }
  bool read_positions(Path& out) {
    return read_list([&] { return read_position(out); });
  }
  bool read_polygon(std::uint32_t polygon, Shape& shape) {
    std::size_t rings = 0;
    const bool read = read_list([&] {
      Path ring;
      if (!read_positions(ring) || ring.size() < 2 || !(ring.front() == ring.back())) return false;
      ring.pop_back();
      shape.parts.push_back(std::move(ring));
      shape.polygon_of_ring.push_back(polygon);
      ++rings;
      return true;
    });
    return read && rings > 0;
  }

  std::string_view text_;
  const ParseOptions& options_;
  PlainJsonCursor* cursor_ = nullptr;  // over the coordinates, while read() runs
  std::size_t vertices_read_ = 0;
};

Json position_json(const Point& p) { return Json::array({p.x, p.y}); }

Json path_json(const Path& path, bool close_ring) {
  Json out = Json::array();
  for (const Point& p : path) out.push_back(position_json(p));
  if (close_ring && !path.empty()) out.push_back(position_json(path.front()));
  return out;
}

}  // namespace

Result<Shape> parse_geojson(std::string_view text, const ParseOptions& options) {
  if (std::optional<Shape> plain = PlainGeometryReader(text, options).read()) return std::move(*plain);
  Result<Json> json = parse_json_text(text);
  if (!json) return json.status();
  return geojson_from_json(*json, options);
}

Result<Shape> geojson_from_json(const nlohmann::json& value, const ParseOptions& options) {
  return JsonShapeReader(options).read_geometry(value, "$");
}

Result<Shape> parse_point_arrays(std::string_view text, const ParseOptions& options) {
  Result<Json> json = parse_json_text(text);
  if (!json) return json.status();
  return point_arrays_from_json(*json, options);
}

Result<Shape> point_arrays_from_json(const nlohmann::json& root, const ParseOptions& options) {
  if (!root.is_array() || root.empty()) return invalid_argument("expected a non-empty array of points or strokes", "$");
  JsonShapeReader reader(options);
  Shape shape;
  shape.kind = ShapeKind::polyline;
  // [[x,y],...] is one stroke; [[[x,y],...],...] several: the depth of the first element decides.
  const bool several_strokes = root[0].is_array() && !root[0].empty() && root[0][0].is_array();
  if (!several_strokes) {
    shape.parts.emplace_back();
    if (Status s = reader.read_positions(root, "$", shape.parts.back()); !s.is_ok()) return s;
  } else {
    for (std::size_t i = 0; i < root.size(); ++i) {
      shape.parts.emplace_back();
      if (Status s = reader.read_positions(root[i], "$[" + std::to_string(i) + "]", shape.parts.back()); !s.is_ok()) {
        return s;
      }
    }
  }
  if (Status valid = validate(shape, options.limits); !valid.is_ok()) return valid;
  return shape;
}

std::string to_geojson(const Shape& shape) {
  Json geometry;
  switch (shape.kind) {
    case ShapeKind::points:
      if (shape.parts.front().size() == 1) {
        geometry = {{"type", "Point"}, {"coordinates", position_json(shape.parts.front().front())}};
      } else {
        geometry = {{"type", "MultiPoint"}, {"coordinates", path_json(shape.parts.front(), false)}};
      }
      break;
    case ShapeKind::polyline:
      if (shape.parts.size() == 1) {
        geometry = {{"type", "LineString"}, {"coordinates", path_json(shape.parts.front(), false)}};
      } else {
        Json strokes = Json::array();
        for (const Path& part : shape.parts) strokes.push_back(path_json(part, false));
        geometry = {{"type", "MultiLineString"}, {"coordinates", strokes}};
      }
      break;
    case ShapeKind::polygon: {
      Json polygons = Json::array();
      for (std::size_t r = 0; r < shape.parts.size(); ++r) {
        if (shape.polygon_of_ring[r] >= polygons.size()) polygons.push_back(Json::array());
        polygons.back().push_back(path_json(shape.parts[r], true));
      }
      if (polygons.size() == 1) geometry = {{"type", "Polygon"}, {"coordinates", polygons[0]}};
      else geometry = {{"type", "MultiPolygon"}, {"coordinates", polygons}};
      break;
    }
  }
  // nlohmann prints doubles with enough digits to round-trip.
  return geometry.dump();
}

const char* shape_format_name(ShapeFormat format) {
  switch (format) {
    case ShapeFormat::automatic: return "auto";
    case ShapeFormat::wkt: return "wkt";
    case ShapeFormat::geojson: return "geojson";
    case ShapeFormat::svg_path: return "svg";
    case ShapeFormat::point_arrays: return "points";
  }
  return "unknown";
}

Result<ShapeFormat> parse_shape_format(const std::string& name) {
  for (ShapeFormat format : {ShapeFormat::automatic, ShapeFormat::wkt, ShapeFormat::geojson, ShapeFormat::svg_path,
                             ShapeFormat::point_arrays}) {
    if (name == shape_format_name(format)) return format;
  }
  return invalid_argument("unknown shape format '" + name + "' (expected auto, wkt, geojson, svg or points)");
}

Result<Shape> parse_shape(std::string_view text, ShapeFormat format, const ParseOptions& options) {
  if (format == ShapeFormat::automatic) {
    std::size_t first = 0;
    while (first < text.size() && std::isspace(static_cast<unsigned char>(text[first]))) ++first;
    const char c = first < text.size() ? text[first] : '\0';
    if (c == '{') format = ShapeFormat::geojson;
    else if (c == '[') format = ShapeFormat::point_arrays;
    else if (c == 'M' || c == 'm') format = ShapeFormat::svg_path;
    else format = ShapeFormat::wkt;
    // "MULTI..." is WKT, not an SVG moveto.
    if (format == ShapeFormat::svg_path && first + 1 < text.size() && std::isalpha(static_cast<unsigned char>(text[first + 1]))) {
      format = ShapeFormat::wkt;
    }
  }
  switch (format) {
    case ShapeFormat::wkt: return parse_wkt(text, options);
    case ShapeFormat::geojson: return parse_geojson(text, options);
    case ShapeFormat::svg_path: return parse_svg_path(text, options);
    case ShapeFormat::point_arrays: return parse_point_arrays(text, options);
    case ShapeFormat::automatic: break;
  }
  return Status(StatusCode::internal, "no parser chosen");
}

}  // namespace waymark
