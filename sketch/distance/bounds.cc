#include "sketch/distance/bounds.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

namespace waymark {

double bounding_box_lower_bound(const Box& a, const Box& b) {
  return std::max({std::fabs(a.min_x - b.min_x), std::fabs(a.max_x - b.max_x), std::fabs(a.min_y - b.min_y),
                   std::fabs(a.max_y - b.max_y)});
}

double frechet_endpoint_lower_bound(Point p_first, Point p_last, Point q_first, Point q_last) {
  return std::max(std::hypot(p_first.x - q_first.x, p_first.y - q_first.y),
                  std::hypot(p_last.x - q_last.x, p_last.y - q_last.y));
}

namespace {

// A curve's segments for the coupling walk: the walk's chain of steps is serial, so what can
// be computed for all segments at once (and pipelined) is, before it starts.
struct WalkSegments {
  void assign(const Path& path) {
    const std::size_t count = path.size() - 1;
    delta.resize(count);
    inverse_length_squared.resize(count);
    for (std::size_t j = 0; j < count; ++j) {
      delta[j] = {path[j + 1].x - path[j].x, path[j + 1].y - path[j].y};
      const double length_squared = delta[j].x * delta[j].x + delta[j].y * delta[j].y;
      inverse_length_squared[j] = length_squared > 0 ? 1 / length_squared : 0;  // a repeat: stay put
    }
  }
  std::vector<Point> delta;
  std::vector<double> inverse_length_squared;
};

// One curve's place in the walk: on segment `segment`, at parameter `t` from its start; at the
// last vertex once segment is the count of segments.
struct Place {
  std::size_t segment = 0;
  double t = 0;
};

// The point of `path` nearest to v at or after `from` on from's segment, as a place.
Place nearest_ahead(const Path& path, const WalkSegments& segments, Place from, Point v) {
  if (from.segment == segments.delta.size()) return from;
  const Point start = path[from.segment], delta = segments.delta[from.segment];
  const double t = ((v.x - start.x) * delta.x + (v.y - start.y) * delta.y) *
                   segments.inverse_length_squared[from.segment];
  return {from.segment, std::clamp(t, from.t, 1.0)};
}

Point point_at(const Path& path, const WalkSegments& segments, Place place) {
  if (place.segment == segments.delta.size()) return path.back();
  const Point start = path[place.segment], delta = segments.delta[place.segment];
  return {start.x + place.t * delta.x, start.y + place.t * delta.y};
}

}  // namespace

double greedy_coupling_upper_bound(const Path& p, const Path& q) {
  thread_local WalkSegments p_segments, q_segments;
  p_segments.assign(p);
  q_segments.assign(q);
  const std::size_t p_end = p.size() - 1, q_end = q.size() - 1;
  Place on_p, on_q;
  double largest = squared_distance(p.front(), q.front());
  while (on_p.segment < p_end || on_q.segment < q_end) {
    // Two moves, each to a pair the coupling then passes through: one curve's next vertex with
    // the nearest point ahead on the other's segment. (Both next vertices together is never
    // nearer than the first move, whose segment ends at the other's next vertex.)
    double p_move = std::numeric_limits<double>::infinity(), q_move = p_move;
    Place partner_of_p, partner_of_q;
    if (on_p.segment < p_end) {
      const Point vertex = p[on_p.segment + 1];
      partner_of_p = nearest_ahead(q, q_segments, on_q, vertex);
      p_move = squared_distance(vertex, point_at(q, q_segments, partner_of_p));
    }
    if (on_q.segment < q_end) {
      const Point vertex = q[on_q.segment + 1];
      partner_of_q = nearest_ahead(p, p_segments, on_p, vertex);
      q_move = squared_distance(vertex, point_at(p, p_segments, partner_of_q));
    }
    if (p_move <= q_move) {
      on_p = {on_p.segment + 1, 0};
      on_q = partner_of_p;
      largest = std::max(largest, p_move);
    } else {
      on_q = {on_q.segment + 1, 0};
      on_p = partner_of_q;
      largest = std::max(largest, q_move);
    }
  }
  return std::sqrt(largest);
}

}  // namespace waymark
