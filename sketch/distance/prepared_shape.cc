#include "sketch/distance/prepared_shape.h"

#include <algorithm>
#include <cmath>

namespace waymark {

PreparedShape::PreparedShape(const Shape& shape)
    : kind(shape.kind), box(bounding_box(shape)), diameter_bound(box.diagonal()) {
  // At most one segment per vertex: reserving once saves each array its growth steps, which
  // queries paid for every candidate they decide on a float copy.
  const std::size_t most_segments = shape.vertex_count();
  for (std::vector<double>* values : {&start_x, &start_y, &delta_x, &delta_y, &inverse_length_squared, &length}) {
    values->reserve(most_segments);
  }
  continues_previous.reserve(most_segments);
  bool first_of_part = true;  // the next segment added starts a stroke or ring
  auto add = [&](Point a, Point b) {
    const double dx = b.x - a.x, dy = b.y - a.y;
    const double length_squared = dx * dx + dy * dy;
    start_x.push_back(a.x);
    start_y.push_back(a.y);
    delta_x.push_back(dx);
    delta_y.push_back(dy);
    inverse_length_squared.push_back(length_squared > 0 ? 1 / length_squared : 0);
    // hypot (slow) only where the square could overflow or lose everything to underflow.
    length.push_back(length_squared < 1e300 && length_squared > 1e-300 ? std::sqrt(length_squared)
                                                                     : std::hypot(dx, dy));
    continues_previous.push_back(first_of_part ? 0 : 1);
    first_of_part = kind == ShapeKind::points;
  };
  for (const Path& part : shape.parts) {
    first_of_part = true;
    switch (shape.kind) {
      case ShapeKind::points:
        for (const Point& p : part) add(p, p);
        break;
      case ShapeKind::polyline:
        for (std::size_t i = 0; i + 1 < part.size(); ++i) {
          if (!(part[i] == part[i + 1])) add(part[i], part[i + 1]);
        }
        break;
      case ShapeKind::polygon:
        for (std::size_t i = 0; i < part.size(); ++i) {
          const Point& next = part[(i + 1) % part.size()];
          if (!(part[i] == next)) add(part[i], next);
        }
        break;
    }
  }
}

bool PreparedShape::contains(Point p) const {
  if (kind != ShapeKind::polygon) return false;
  if (p.x < box.min_x || p.x > box.max_x || p.y < box.min_y || p.y > box.max_y) return false;
  bool inside = false;
  for (std::size_t i = 0, n = segment_count(); i < n; ++i) {
    const double ay = start_y[i], by = start_y[i] + delta_y[i];
    if ((ay > p.y) != (by > p.y)) {
      const double x_cross = start_x[i] + (p.y - ay) / delta_y[i] * delta_x[i];
      if (p.x < x_cross) inside = !inside;
    }
  }
  return inside;
}

}  // namespace waymark
