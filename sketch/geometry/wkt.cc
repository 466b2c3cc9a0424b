// WKT reader and writer (OGC Simple Features Access 1.2.1, part 1, §7 "Well-known Text").
#include <charconv>
#include <cmath>
#include <cstdio>
#include <string>

#include "sketch/geometry/formats.h"
#include "sketch/geometry/text_cursor.h"

namespace waymark {
namespace {

using detail::TextCursor;

class WktReader {
 public:
  WktReader(std::string_view text, const ParseOptions& options) : cursor_(text), options_(options) {}

  Result<Shape> read() {
    cursor_.skip_spaces();
    const std::size_t type_start = cursor_.position();
    const std::string type = cursor_.read_word();
    if (type.empty()) return fail("expected a WKT geometry type such as POLYGON, found " + cursor_.describe_here());
    cursor_.skip_spaces();
    const std::size_t modifier_start = cursor_.position();
    const std::string modifier = cursor_.read_word();
    if (modifier == "Z" || modifier == "M" || modifier == "ZM") {
      return fail_at(modifier_start, "coordinates with " + modifier + " are not supported (2D only)");
    }
    if (modifier == "EMPTY") return fail_at(modifier_start, "EMPTY geometries are not supported");
    if (!modifier.empty()) return fail_at(modifier_start, "unexpected word '" + modifier + "' after " + type);

    Status status;
    if (type == "POINT") {
      shape_.kind = ShapeKind::points;
      shape_.parts.emplace_back();
      status = read_point_in_parentheses(shape_.parts.back());
    } else if (type == "MULTIPOINT") {
      shape_.kind = ShapeKind::points;
      shape_.parts.emplace_back();
      status = read_multipoint();
    } else if (type == "LINESTRING") {
      shape_.kind = ShapeKind::polyline;
      status = read_path_list_item();
    } else if (type == "MULTILINESTRING") {
      shape_.kind = ShapeKind::polyline;
      status = read_list([&] { return read_path_list_item(); });
    } else if (type == "POLYGON") {
      shape_.kind = ShapeKind::polygon;
      status = read_polygon(0);
    } else if (type == "MULTIPOLYGON") {
      shape_.kind = ShapeKind::polygon;
      std::uint32_t polygon = 0;
      status = read_list([&] { return read_polygon(polygon++); });
    } else {
      return fail_at(type_start, "unsupported WKT type '" + type +
                                     "' (expected POINT, MULTIPOINT, LINESTRING, MULTILINESTRING, POLYGON or "
                                     "MULTIPOLYGON)");
    }
    if (!status.is_ok()) return status;
    cursor_.skip_spaces();
    if (!cursor_.at_end()) return fail("unexpected text after the geometry: " + cursor_.describe_here());
    if (Status valid = validate(shape_, options_.limits); !valid.is_ok()) return valid;
    return std::move(shape_);
  }

 private:
  Status fail(const std::string& message) const { return invalid_argument(message, cursor_.where()); }
  Status fail_at(std::size_t byte, const std::string& message) const {
    return invalid_argument(message, cursor_.where_at(byte));
  }

  Status expect(char symbol) {
    cursor_.skip_spaces();
    if (cursor_.peek() != symbol) {
      return fail(std::string("expected '") + symbol + "', found " + cursor_.describe_here());
    }
    cursor_.advance();
    return Status::ok();
  }

  bool accept(char symbol) {
    cursor_.skip_spaces();
    if (cursor_.peek() != symbol) return false;
    cursor_.advance();
    return true;
  }

  // "(" item ("," item)* ")"
  template <typename ReadItem>
  Status read_list(ReadItem read_item) {
    if (Status s = expect('('); !s.is_ok()) return s;
    do {
      if (Status s = read_item(); !s.is_ok()) return s;
    } while (accept(','));
    return expect(')');
  }

  Status read_coordinate(Path& path) {
    if (++vertices_read_ > options_.limits.max_vertices) {
      return Status(StatusCode::resource_exhausted,
                    "more than " + std::to_string(options_.limits.max_vertices) + " vertices", cursor_.where());
    }
    Point point;
    for (double* value : {&point.x, &point.y}) {
      cursor_.skip_spaces();
      const std::size_t start = cursor_.position();
      if (!cursor_.read_number(*value)) return fail("expected a number, found " + cursor_.describe_here());
      if (!std::isfinite(*value)) return fail_at(start, "coordinate is not a finite number");
    }
    cursor_.skip_spaces();
    double extra;
    if (cursor_.read_number(extra)) return fail("a third coordinate was given; only 2D coordinates are supported");
    path.push_back(point);
    return Status::ok();
  }

  Status read_point_in_parentheses(Path& path) {
    if (Status s = expect('('); !s.is_ok()) return s;
    if (Status s = read_coordinate(path); !s.is_ok()) return s;
    return expect(')');
  }

  Status read_multipoint() {
    Path& points = shape_.parts.back();
    return read_list([&] {
      cursor_.skip_spaces();
      return cursor_.peek() == '(' ? read_point_in_parentheses(points) : read_coordinate(points);
    });
  }

  Status read_path_list_item() {
    shape_.parts.emplace_back();
    return read_list([&] { return read_coordinate(shape_.parts.back()); });
  }

  Status read_polygon(std::uint32_t polygon) {
    return read_list([&] {
      const std::size_t ring_start = cursor_.position();
      if (Status s = read_path_list_item(); !s.is_ok()) return s;
      Path& ring = shape_.parts.back();
      if (ring.size() < 2 || !(ring.front() == ring.back())) {
        return fail_at(ring_start, "polygon ring is not closed: its last vertex must repeat its first");
      }
      ring.pop_back();
      shape_.polygon_of_ring.push_back(polygon);
      return Status::ok();
    });
  }

  TextCursor cursor_;
  const ParseOptions& options_;
  Shape shape_;
  std::size_t vertices_read_ = 0;
};

// The shortest text that reads back as the same double (std::to_chars), so 37.79 stays 37.79.
void append_number(std::string& out, double value) {
  char buffer[32];
  const std::to_chars_result written = std::to_chars(buffer, buffer + sizeof buffer, value);
  out.append(buffer, written.ptr);
}

void append_path(std::string& out, const Path& path, bool close_ring) {
  out += '(';
  for (std::size_t i = 0; i < path.size(); ++i) {
    if (i > 0) out += ", ";
    append_number(out, path[i].x);
    out += ' ';
    append_number(out, path[i].y);
  }
  if (close_ring && !path.empty()) {
    out += ", ";
    append_number(out, path.front().x);
    out += ' ';
    append_number(out, path.front().y);
  }
  out += ')';
}

// Rings [begin, end) of one polygon as "((exterior), (hole), ...)".
void append_polygon(std::string& out, const Shape& shape, std::size_t begin, std::size_t end) {
  out += '(';
  for (std::size_t r = begin; r < end; ++r) {
    if (r > begin) out += ", ";
    append_path(out, shape.parts[r], true);
  }
  out += ')';
}

}  // namespace

Result<Shape> parse_wkt(std::string_view text, const ParseOptions& options) {
  return WktReader(text, options).read();
}

std::string to_wkt(const Shape& shape) {
  std::string out;
  switch (shape.kind) {
    case ShapeKind::points: {
      const Path& points = shape.parts.front();
      if (points.size() == 1) {
        out = "POINT ";
        append_path(out, points, false);
      } else {
        out = "MULTIPOINT (";
        for (std::size_t i = 0; i < points.size(); ++i) {
          if (i > 0) out += ", ";
          append_path(out, Path{points[i]}, false);
        }
        out += ')';
      }
      break;
    }
    case ShapeKind::polyline:
      if (shape.parts.size() == 1) {
        out = "LINESTRING ";
        append_path(out, shape.parts.front(), false);
      } else {
        out = "MULTILINESTRING (";
        for (std::size_t i = 0; i < shape.parts.size(); ++i) {
          if (i > 0) out += ", ";
          append_path(out, shape.parts[i], false);
        }
        out += ')';
      }
      break;
    case ShapeKind::polygon: {
      const std::uint32_t polygon_count = shape.polygon_of_ring.empty() ? 0 : shape.polygon_of_ring.back() + 1;
      out = polygon_count == 1 ? "POLYGON " : "MULTIPOLYGON (";
      std::size_t begin = 0;
      for (std::uint32_t polygon = 0; polygon < polygon_count; ++polygon) {
        std::size_t end = begin;
        while (end < shape.parts.size() && shape.polygon_of_ring[end] == polygon) ++end;
        if (polygon > 0) out += ", ";
        append_polygon(out, shape, begin, end);
        begin = end;
      }
      if (polygon_count != 1) out += ')';
      break;
    }
  }
  return out;
}

}  // namespace waymark
