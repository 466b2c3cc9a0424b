#include "sketch/landmarks/sketcher.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>

#include "sketch/vector_clones.h"

namespace waymark {
namespace {

// The hot loop: one segment against every landmark, keeping each landmark's smallest squared
// distance. Written so the compiler vectorises it over landmarks (in every clone).

WAYMARK_VECTOR_CLONES
void nearest_to_segment(const double* __restrict x, const double* __restrict y, double* __restrict best,
                        std::size_t count, double ax, double ay, double dx, double dy, double inverse_length_squared) {
  for (std::size_t k = 0; k < count; ++k) {
    const double px = x[k] - ax, py = y[k] - ay;
    // std::max(0, t), std::min(1, t), std::min(best, d) match maxpd/minpd exactly (NaN
    // included), so every clone if-converts; a plain ternary does not vectorise without AVX-512.
    const double t = std::min(1.0, std::max(0.0, (px * dx + py * dy) * inverse_length_squared));
    const double ex = px - t * dx, ey = py - t * dy;
    best[k] = std::min(best[k], ex * ex + ey * ey);
  }
}

// Even–odd crossing parity of a horizontal ray from each landmark, for region semantics.
void toggle_crossings(const double* x, const double* y, unsigned char* inside, std::size_t count, Point a, Point b) {
  for (std::size_t k = 0; k < count; ++k) {
    if ((a.y > y[k]) != (b.y > y[k])) {
      const double x_cross = a.x + (y[k] - a.y) / (b.y - a.y) * (b.x - a.x);
      if (x[k] < x_cross) inside[k] ^= 1;
    }
  }
}

template <typename Visit>
void for_each_segment(const Shape& shape, Visit visit) {
  for (const Path& part : shape.parts) {
    if (shape.kind == ShapeKind::points) {
      for (const Point& p : part) visit(p, p);
      continue;
    }
    for (std::size_t i = 0; i + 1 < part.size(); ++i) visit(part[i], part[i + 1]);
    if (shape.kind == ShapeKind::polygon && part.size() > 1) visit(part.back(), part.front());
  }
}

}  // namespace

Sketcher::Sketcher(const LandmarkSet& landmarks, bool region_semantics)
    : landmarks_(landmarks), region_semantics_(region_semantics) {
  for (std::size_t i = 0; i < landmarks.size(); ++i) {
    x_.push_back(landmarks.points[i].x);
    y_.push_back(landmarks.points[i].y);
    root_weight_.push_back(std::sqrt(landmarks.weights[i]));
    inverse_root_weight_.push_back(1 / root_weight_.back());
  }
}

void Sketcher::distances(const Shape& shape, std::span<double> out) const {
  assert(out.size() == dimension());
  const std::size_t n = dimension();
  std::fill(out.begin(), out.end(), std::numeric_limits<double>::infinity());
  for_each_segment(shape, [&](Point a, Point b) {
    const double dx = b.x - a.x, dy = b.y - a.y;
    const double length_squared = dx * dx + dy * dy;
    nearest_to_segment(x_.data(), y_.data(), out.data(), n, a.x, a.y, dx, dy,
                       length_squared > 0 ? 1 / length_squared : 0);
  });
  for (double& d : out) d = std::sqrt(d);
  if (region_semantics_ && shape.kind == ShapeKind::polygon) {
    thread_local std::vector<unsigned char> inside;
    inside.assign(n, 0);
    for_each_segment(shape, [&](Point a, Point b) { toggle_crossings(x_.data(), y_.data(), inside.data(), n, a, b); });
    for (std::size_t k = 0; k < n; ++k) {
      if (inside[k]) out[k] = 0;
    }
  }
}

void Sketcher::sketch(const Shape& shape, std::span<float> out) const {
  assert(out.size() == dimension());
  thread_local std::vector<double> raw;
  raw.resize(dimension());
  distances(shape, raw);
  for (std::size_t k = 0; k < raw.size(); ++k) out[k] = static_cast<float>(root_weight_[k] * raw[k]);
}

std::vector<float> Sketcher::sketch(const Shape& shape) const {
  std::vector<float> out(dimension());
  sketch(shape, out);
  return out;
}

void Sketcher::sketch_batch(std::span<const Shape> shapes, std::span<float> out) const {
  assert(out.size() == shapes.size() * dimension());
  for (std::size_t i = 0; i < shapes.size(); ++i) sketch(shapes[i], out.subspan(i * dimension(), dimension()));
}

std::vector<float> Sketcher::unweighted(std::span<const float> sketch) const {
  assert(sketch.size() == dimension());
  std::vector<float> raw(sketch.size());
  for (std::size_t k = 0; k < sketch.size(); ++k) raw[k] = static_cast<float>(sketch[k] * inverse_root_weight_[k]);
  return raw;
}

double Sketcher::linf_lower_bound(std::span<const float> a, std::span<const float> b) const {
  assert(a.size() == dimension() && b.size() == dimension());
  // Each stored value is within 2^-24 (relative) of the double it came from, and that double
  // is within a few ulps of the exact weighted distance; 2^-22 per value covers both.
  constexpr double kRelativeError = 0x1.0p-22;
  double bound = 0;
  for (std::size_t k = 0; k < a.size(); ++k) {
    const double va = a[k], vb = b[k];
    const double difference = std::fabs(va - vb) - kRelativeError * (std::fabs(va) + std::fabs(vb));
    bound = std::max(bound, difference * inverse_root_weight_[k]);
  }
  return bound;
}

double Sketcher::weighted_distance(std::span<const float> a, std::span<const float> b) {
  assert(a.size() == b.size());
  double sum = 0;
  for (std::size_t k = 0; k < a.size(); ++k) {
    const double d = static_cast<double>(a[k]) - b[k];
    sum += d * d;
  }
  return std::sqrt(sum);
}

double Sketcher::unweighted_linf_lower_bound(std::span<const float> a, std::span<const float> b) {
  assert(a.size() == b.size());
  // A value went through two float roundings (the sketch, then the division by sqrt(w)), each
  // within 2^-24 relative, after a double computation a few ulps off: 2^-21 covers all three.
  double bound = 0;
  for (std::size_t k = 0; k < a.size(); ++k) {
    const double va = a[k], vb = b[k];
    bound = std::max(bound, std::fabs(va - vb) - kUnweightedRelativeError * (std::fabs(va) + std::fabs(vb)));
  }
  return bound;
}

double Sketcher::weighted_distance_of_unweighted(std::span<const float> a, std::span<const float> b) const {
  assert(a.size() == dimension() && b.size() == dimension());
  double sum = 0;
  for (std::size_t k = 0; k < a.size(); ++k) {
    const double d = (static_cast<double>(a[k]) - b[k]) * root_weight_[k];
    sum += d * d;
  }
  return std::sqrt(sum);
}

}  // namespace waymark
