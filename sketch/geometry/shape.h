// Shapes: plain 2D value types in double precision, and the frames they are compared in.
//
// A Shape is one of three kinds:
//   points   — a finite point set (WKT POINT / MULTIPOINT); `parts` holds one path of points.
//   polyline — one or more open strokes (LINESTRING / MULTILINESTRING); each part is a stroke
//              of at least two distinct vertices.
//   polygon  — one or more polygons (POLYGON / MULTIPOLYGON); each part is a ring stored
//              WITHOUT its repeated closing vertex (the edge last→first is implied), and
//              `polygon_of_ring[r]` says which polygon ring r belongs to; the first ring of
//              each polygon is its exterior, the rest are holes.
// Thread safety: a Shape is a value; concurrent reads are safe.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "sketch/status.h"

namespace waymark {

struct Point {
  double x = 0;
  double y = 0;
  friend bool operator==(const Point&, const Point&) = default;
};

// |a − b|², in double without a square root (comparisons keep their order). O(1).
inline double squared_distance(Point a, Point b) { return (a.x - b.x) * (a.x - b.x) + (a.y - b.y) * (a.y - b.y); }

using Path = std::vector<Point>;

enum class ShapeKind { points, polyline, polygon };

const char* shape_kind_name(ShapeKind kind);

struct Shape {
  ShapeKind kind = ShapeKind::points;
  std::vector<Path> parts;
  std::vector<std::uint32_t> polygon_of_ring;  // polygon kind only; same length as parts

  std::size_t vertex_count() const;
  friend bool operator==(const Shape&, const Shape&) = default;
};

struct Box {
  double min_x = 0, min_y = 0, max_x = 0, max_y = 0;
  double width() const { return max_x - min_x; }
  double height() const { return max_y - min_y; }
  double diagonal() const;
  friend bool operator==(const Box&, const Box&) = default;
};

// Bounding box of all vertices. Precondition: the shape has at least one vertex.
Box bounding_box(const Shape& shape);

// Limits applied by every parser and by validate(). Explicit so callers can configure them.
struct ShapeLimits {
  std::size_t max_vertices = 100'000;  // over all parts
  std::size_t max_parts = 10'000;
};

// Checks the invariants above: finite coordinates, at least one vertex, a polyline stroke has
// two distinct vertices, a ring has three distinct vertices and non-zero area, the limits.
// Errors name the part and vertex ("part 2, vertex 5").
Status validate(const Shape& shape, const ShapeLimits& limits = {});

// How shapes are placed before they are compared; distances are in the frame's units.
enum class Frame {
  absolute,  // coordinates as given
  centered,  // bounding-box centre moved to the origin
  unit,      // centered, then scaled so the longer side of the bounding box is 1
};

const char* frame_name(Frame frame);
Result<Frame> parse_frame(const std::string& name);

// Where `frame` puts a shape's points: p ↦ (p − centre) · scale (identity for absolute). A
// shape whose bounding box has no extent (one point) is only centered by Frame::unit, since it
// has no size to scale. O(vertices), no allocation.
struct FramePlacement {
  double center_x = 0, center_y = 0, scale = 1;
  Point place(Point p) const { return {(p.x - center_x) * scale, (p.y - center_y) * scale}; }
};
FramePlacement frame_placement(const Shape& shape, Frame frame);

// Returns the shape placed in `frame` (each vertex through frame_placement's place).
Shape apply_frame(const Shape& shape, Frame frame);

}  // namespace waymark
