// Seeded random shapes for property tests and benchmarks: the same seed gives the same shapes
// on every platform (SeededRandom, not the standard library's distributions).
#pragma once

#include <cmath>
#include <numbers>

#include "sketch/geometry/shape.h"
#include "sketch/landmarks/landmark_set.h"

namespace waymark::testing {

// A polyline of `vertices` vertices whose steps have uniform direction and length in (0, step].
inline Shape random_walk(SeededRandom& random, std::size_t vertices, double step = 1.0) {
  Shape shape;
  shape.kind = ShapeKind::polyline;
  Path path{{random.uniform(), random.uniform()}};
  while (path.size() < vertices) {
    const double angle = 2 * std::numbers::pi * random.uniform();
    const double length = step * (0.05 + 0.95 * random.uniform());
    path.push_back({path.back().x + length * std::cos(angle), path.back().y + length * std::sin(angle)});
  }
  shape.parts.push_back(std::move(path));
  return shape;
}

inline Shape random_points(SeededRandom& random, std::size_t count, double extent = 10.0) {
  Shape shape;
  shape.kind = ShapeKind::points;
  Path path;
  for (std::size_t i = 0; i < count; ++i) path.push_back({extent * random.uniform(), extent * random.uniform()});
  shape.parts.push_back(std::move(path));
  return shape;
}

// A simple (star-shaped) polygon: radii in [0.5, 1.5]·radius at increasing angles.
inline Shape random_star_polygon(SeededRandom& random, std::size_t vertices, double radius = 5.0) {
  Shape shape;
  shape.kind = ShapeKind::polygon;
  Path ring;
  const double cx = 10 * random.uniform(), cy = 10 * random.uniform();
  for (std::size_t i = 0; i < vertices; ++i) {
    const double angle = 2 * std::numbers::pi * (i + 0.8 * random.uniform()) / vertices;
    const double r = radius * (0.5 + random.uniform());
    ring.push_back({cx + r * std::cos(angle), cy + r * std::sin(angle)});
  }
  shape.parts.push_back(std::move(ring));
  shape.polygon_of_ring.push_back(0);
  return shape;
}

// The shape with every vertex moved by up to ±amplitude/2 in x and y: a near-duplicate.
inline Shape jittered(Shape shape, SeededRandom& random, double amplitude) {
  for (Path& part : shape.parts) {
    for (Point& p : part) p = {p.x + amplitude * (random.uniform() - 0.5), p.y + amplitude * (random.uniform() - 0.5)};
  }
  return shape;
}

}  // namespace waymark::testing
