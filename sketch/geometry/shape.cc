#include "sketch/geometry/shape.h"

#include <algorithm>
#include <cmath>
#include <string>

namespace waymark {

const char* shape_kind_name(ShapeKind kind) {
  switch (kind) {
    case ShapeKind::points: return "points";
    case ShapeKind::polyline: return "polyline";
    case ShapeKind::polygon: return "polygon";
  }
  return "unknown";
}

std::size_t Shape::vertex_count() const {
  std::size_t count = 0;
  for (const Path& part : parts) count += part.size();
  return count;
}

double Box::diagonal() const { return std::hypot(width(), height()); }

Box bounding_box(const Shape& shape) {
  Box box{INFINITY, INFINITY, -INFINITY, -INFINITY};
  for (const Path& part : shape.parts) {
    for (const Point& p : part) {
      box.min_x = std::min(box.min_x, p.x);
      box.min_y = std::min(box.min_y, p.y);
      box.max_x = std::max(box.max_x, p.x);
      box.max_y = std::max(box.max_y, p.y);
    }
  }
  return box;
}

namespace {

std::string part_vertex(std::size_t part, std::size_t vertex) {
  return "part " + std::to_string(part) + ", vertex " + std::to_string(vertex);
}

std::size_t distinct_vertex_count(const Path& path) {
  // Distinct among consecutive vertices is what matters for segments; a ring that revisits a
  // vertex later still has extent.
  std::size_t count = path.empty() ? 0 : 1;
  for (std::size_t i = 1; i < path.size(); ++i) {
    if (!(path[i] == path[i - 1])) ++count;
  }
  return count;
}

double ring_signed_area(const Path& ring) {
  double twice_area = 0;
  for (std::size_t i = 0, n = ring.size(); i < n; ++i) {
    const Point& a = ring[i];
    const Point& b = ring[(i + 1) % n];
    twice_area += a.x * b.y - b.x * a.y;
  }
  return twice_area / 2;
}

}  // namespace

Status validate(const Shape& shape, const ShapeLimits& limits) {
  if (shape.parts.empty()) return invalid_argument("shape has no parts (empty geometries are not supported)");
  if (shape.parts.size() > limits.max_parts) {
    return Status(StatusCode::resource_exhausted,
                  "shape has " + std::to_string(shape.parts.size()) + " parts, more than the limit of " +
                      std::to_string(limits.max_parts));
  }
  const std::size_t vertices = shape.vertex_count();
  if (vertices > limits.max_vertices) {
    return Status(StatusCode::resource_exhausted,
                  "shape has " + std::to_string(vertices) + " vertices, more than the limit of " +
                      std::to_string(limits.max_vertices));
  }
  if (shape.kind == ShapeKind::polygon && shape.polygon_of_ring.size() != shape.parts.size()) {
    return Status(StatusCode::internal, "polygon_of_ring does not match the ring count");
  }
  for (std::size_t part = 0; part < shape.parts.size(); ++part) {
    const Path& path = shape.parts[part];
    if (path.empty()) return invalid_argument("part has no vertices", "part " + std::to_string(part));
    for (std::size_t v = 0; v < path.size(); ++v) {
      if (!std::isfinite(path[v].x) || !std::isfinite(path[v].y)) {
        return invalid_argument("coordinate is not a finite number (NaN or infinity)", part_vertex(part, v));
      }
    }
    switch (shape.kind) {
      case ShapeKind::points: break;
      case ShapeKind::polyline:
        if (distinct_vertex_count(path) < 2) {
          return invalid_argument("a polyline stroke needs at least two distinct vertices",
                                  "part " + std::to_string(part));
        }
        break;
      case ShapeKind::polygon:
        if (distinct_vertex_count(path) < 3 || ring_signed_area(path) == 0) {
          return invalid_argument("a polygon ring needs at least three distinct vertices and non-zero area",
                                  "part " + std::to_string(part));
        }
        break;
    }
  }
  return Status::ok();
}

const char* frame_name(Frame frame) {
  switch (frame) {
    case Frame::absolute: return "absolute";
    case Frame::centered: return "centered";
    case Frame::unit: return "unit";
  }
  return "unknown";
}

Result<Frame> parse_frame(const std::string& name) {
  if (name == "absolute") return Frame::absolute;
  if (name == "centered") return Frame::centered;
  if (name == "unit") return Frame::unit;
  return invalid_argument("unknown frame '" + name + "' (expected absolute, centered or unit)");
}

FramePlacement frame_placement(const Shape& shape, Frame frame) {
  if (frame == Frame::absolute || shape.vertex_count() == 0) return {};
  const Box box = bounding_box(shape);
  const double longer_side = std::max(box.width(), box.height());
  return {(box.min_x + box.max_x) / 2, (box.min_y + box.max_y) / 2,
          (frame == Frame::unit && longer_side > 0) ? 1 / longer_side : 1};
}

Shape apply_frame(const Shape& shape, Frame frame) {
  if (frame == Frame::absolute || shape.vertex_count() == 0) return shape;
  const FramePlacement placement = frame_placement(shape, frame);
  Shape placed = shape;
  for (Path& part : placed.parts) {
    for (Point& p : part) p = placement.place(p);
  }
  return placed;
}

}  // namespace waymark
