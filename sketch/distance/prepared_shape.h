// A shape turned into the form the distance algorithms work on: its segments in
// structure-of-arrays layout, its bounding box and, for polygons, what is needed to test
// whether a point lies in the filled region.
//
// Build once per shape and reuse across many distance calls (re-ranking does). Point sets
// become zero-length segments, polylines their consecutive vertex pairs, polygons their ring
// edges including each closing edge. Immutable after construction; safe to share between
// threads.
#pragma once

#include <cstddef>
#include <cstdint>
#include <vector>

#include "sketch/geometry/shape.h"

namespace waymark {

struct PreparedShape {
  explicit PreparedShape(const Shape& shape);

  ShapeKind kind;
  Box box;
  double diameter_bound;  // bounding-box diagonal: at least the shape's diameter

  // Segment i runs from (start_x[i], start_y[i]) to (start_x[i] + delta_x[i], ...).
  // inverse_length_squared[i] is 1/|delta|², or 0 for a zero-length segment; length[i] is |delta|.
  std::vector<double> start_x, start_y, delta_x, delta_y, inverse_length_squared, length;
  // 1 where segment i starts at the vertex where segment i − 1 ends (same stroke or ring):
  // segment_start(i) is then that vertex exactly, while segment_end(i − 1) is it only up to
  // the rounding of start + delta.
  std::vector<std::uint8_t> continues_previous;

  std::size_t segment_count() const { return start_x.size(); }
  Point segment_start(std::size_t i) const { return {start_x[i], start_y[i]}; }
  Point segment_end(std::size_t i) const { return {start_x[i] + delta_x[i], start_y[i] + delta_y[i]}; }
  double segment_length(std::size_t i) const { return length[i]; }
  Point point_on_segment(std::size_t i, double fraction) const {
    return {start_x[i] + fraction * delta_x[i], start_y[i] + fraction * delta_y[i]};
  }

  // Squared distance from p to segment i and the closest point on it. O(1). Inline: it is the
  // innermost operation of every distance algorithm.
  double squared_distance_to_segment(std::size_t i, Point p, Point* closest = nullptr) const {
    const double px = p.x - start_x[i], py = p.y - start_y[i];
    double t = (px * delta_x[i] + py * delta_y[i]) * inverse_length_squared[i];
    t = t < 0 ? 0 : (t > 1 ? 1 : t);
    const double ex = px - t * delta_x[i], ey = py - t * delta_y[i];
    if (closest) *closest = point_on_segment(i, t);
    return ex * ex + ey * ey;
  }

  // For polygons: whether p lies in the filled region (even–odd rule over all rings, so holes
  // are excluded; points exactly on the boundary count as either). Always false for other
  // kinds. O(segment count).
  bool contains(Point p) const;
};

}  // namespace waymark
