#include "sketch/distance/hausdorff.h"

#include <algorithm>
#include <cfloat>
#include <cmath>
#include <limits>
#include <queue>
#include <vector>

#include "sketch/distance/bounds.h"

namespace waymark {
namespace {

constexpr double kInfinity = std::numeric_limits<double>::infinity();

// d(p, B), scanning B's segments from the one nearest to the previous point and stopping at
// the first one within `threshold`: the returned value is exact when it exceeds `threshold`,
// and otherwise an upper bound on d(p, B) that is at most `threshold`.
class DistanceToShape {
 public:
  DistanceToShape(const PreparedShape& target, bool region) : target_(target), region_(region) {}

  // The segment the last boundary evaluation ended on (nearest, or within the threshold).
  std::size_t last_segment() const { return hint_; }

  // With region semantics a point inside B gets its signed value −depth (exact, so that it
  // bounds nearby points: the signed distance is 1-Lipschitz too); d(p, region B) is then
  // max(0, value) and the closest point is p itself.
  double upper_bound(Point p, double threshold, Point* closest) {
    if (region_ && target_.contains(p)) {
      const double depth = boundary_distance(p, -1, closest);
      *closest = p;
      return -depth;
    }
    return boundary_distance(p, threshold, closest);
  }

  // Distance to B's segments only (ignores the filled region). Scans outward from the hint in
  // both directions: consecutive points of A are usually nearest to neighbouring segments.
  double boundary_distance(Point p, double threshold, Point* closest) {
    const std::size_t n = target_.segment_count();
    const double threshold_squared = threshold > 0 ? threshold * threshold : -1;
    double best_squared = target_.squared_distance_to_segment(hint_, p);
    std::size_t best = hint_;
    auto consider = [&](std::size_t i) {
      const double d2 = target_.squared_distance_to_segment(i, p);
      if (d2 < best_squared) {
        best_squared = d2;
        best = i;
      }
      return best_squared <= threshold_squared;
    };
    if (best_squared > threshold_squared) {
      // forward and backward indices, wrapped without division
      std::size_t forward = hint_, backward = hint_;
      for (std::size_t step = 1; 2 * step <= n; ++step) {
        forward = forward + 1 == n ? 0 : forward + 1;
        backward = backward == 0 ? n - 1 : backward - 1;
        if (consider(forward)) break;
        if (2 * step < n && consider(backward)) break;
      }
    }
    hint_ = best;
    target_.squared_distance_to_segment(best, p, closest);
    return std::sqrt(best_squared);
  }

 private:
  const PreparedShape& target_;
  bool region_;
  std::size_t hint_ = 0;
};

struct SearchState {
  double best = 0;       // largest exact value found (or the floor it started from)
  double tolerance = 0;
  bool found = false;
  Point from, to;
  double unresolved_upper = -kInfinity;  // set when a budget ran out
  bool stop_when_found = false;          // decision mode: any exact value above the floor answers
};

void offer(SearchState& state, double signed_value, Point from, Point to) {
  const double value = std::max(0.0, signed_value);
  if (value > state.best) {
    state.best = value;
    state.found = true;
    state.from = from;
    state.to = to;
  }
}

bool done(const SearchState& state) { return state.stop_when_found && state.found; }

struct Piece {
  double t0, t1, f0, f1;  // f: distance to B, or signed (negative inside B) in region semantics
  std::size_t near0, near1;  // a segment of B close to each end (from the evaluations)
};

// Two bounds on max f over a piece from p0 to p1 of length L, with f = d(·, B):
//  - Lipschitz: f is 1-Lipschitz, so max ≤ (f0 + f1 + L) / 2;
//  - convexity: f ≤ d(·, s) for any one segment s of B, and d(·, s) is convex along a line, so
//    max ≤ max(d(p0, s), d(p1, s)). This one is 0 when the piece lies on B, where the
//    Lipschitz bound alone would force subdivision down to the tolerance.
double piece_upper_bound(const PreparedShape& b, const Piece& piece, Point p0, Point p1, double length) {
  double bound = std::max(0.0, (piece.f0 + piece.f1 + length) / 2);
  for (std::size_t segment : {piece.near0, piece.near1}) {
    const double convex = std::sqrt(
        std::max(b.squared_distance_to_segment(segment, p0), b.squared_distance_to_segment(segment, p1)));
    bound = std::min(bound, convex);
  }
  return bound;
}

// The values at both ends of each segment of A (upper bounds where they did not beat the
// running maximum), and a segment of B near each end.
struct SegmentEnds {
  double f0, f1;
  std::size_t near0, near1;
};

// First phase over A's boundary: every vertex, before any segment's interior. The running
// maximum then starts the interiors' branch and bound at the largest vertex value, so fewer
// pieces survive it, and a decision that must refuse usually finds its point here, before
// any interior is searched. A vertex shared by consecutive segments is evaluated once.
void search_vertices(const PreparedShape& a, DistanceToShape& to_b, SearchState& state, std::vector<SegmentEnds>& ends) {
  ends.resize(a.segment_count());
  Point closest;
  for (std::size_t i = 0; i < a.segment_count() && !done(state); ++i) {
    SegmentEnds& e = ends[i];
    const Point p0 = a.segment_start(i);
    if (a.continues_previous[i]) {
      e.f0 = ends[i - 1].f1;
      e.near0 = ends[i - 1].near1;
    } else {
      e.f0 = to_b.upper_bound(p0, state.best, &closest);
      e.near0 = to_b.last_segment();
      offer(state, e.f0, p0, closest);
    }
    if (a.segment_length(i) == 0) {
      e.f1 = e.f0;
      e.near1 = e.near0;
      continue;
    }
    // The vertex itself where the next segment starts there (segment_end is rounded).
    const bool shared = i + 1 < a.segment_count() && a.continues_previous[i + 1];
    const Point p1 = shared ? a.segment_start(i + 1) : a.segment_end(i);
    e.f1 = to_b.upper_bound(p1, state.best, &closest);
    e.near1 = to_b.last_segment();
    offer(state, e.f1, p1, closest);
  }
}

// Second phase: each segment's interior, by branch and bound from its ends' values.
void search_segment_interiors(const PreparedShape& a, const PreparedShape& b, DistanceToShape& to_b,
                              SearchState& state, const std::vector<SegmentEnds>& ends) {
  std::vector<Piece> stack;
  Point closest;
  for (std::size_t i = 0; i < a.segment_count() && !done(state); ++i) {
    const double length = a.segment_length(i);
    if (length == 0) continue;
    stack.push_back({0, 1, ends[i].f0, ends[i].f1, ends[i].near0, ends[i].near1});
    while (!stack.empty() && !done(state)) {
      const Piece piece = stack.back();
      stack.pop_back();
      const double piece_length = (piece.t1 - piece.t0) * length;
      const Point start = a.point_on_segment(i, piece.t0), end = a.point_on_segment(i, piece.t1);
      if (piece_upper_bound(b, piece, start, end, piece_length) <= state.best + state.tolerance) continue;
      const double t_mid = (piece.t0 + piece.t1) / 2;
      const Point mid = a.point_on_segment(i, t_mid);
      const double f_mid = to_b.upper_bound(mid, state.best, &closest);
      const std::size_t near_mid = to_b.last_segment();
      offer(state, f_mid, mid, closest);
      stack.push_back({piece.t0, t_mid, piece.f0, f_mid, piece.near0, near_mid});
      stack.push_back({t_mid, piece.t1, f_mid, piece.f1, near_mid, piece.near1});
    }
  }
}

// Region semantics, interior of polygon A: 2D branch and bound over square cells. With
// s(p) the signed distance to B's boundary (negative inside B), d(p, region B) = max(0, s(p))
// and s is 1-Lipschitz, so over a cell of half-diagonal h the value is at most max(0, s(c) + h).
void search_interior(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options,
                     SearchState& state) {
  struct Cell {
    double x, y, half, upper;
    bool operator<(const Cell& other) const { return upper < other.upper; }
  };
  // Best first: the cell with the largest bound is split next, so the running maximum rises
  // early and prunes the rest (depth first can spend the budget along a boundary instead).
  DistanceToShape to_a(a, false), to_b(b, false);
  const double half = std::max(a.box.width(), a.box.height()) / 2;
  std::priority_queue<Cell> queue;
  queue.push({(a.box.min_x + a.box.max_x) / 2, (a.box.min_y + a.box.max_y) / 2, half, kInfinity});
  std::size_t budget = options.region_cell_budget;
  Point closest;
  while (!queue.empty() && !done(state)) {
    const Cell cell = queue.top();
    queue.pop();
    if (cell.upper <= state.best + state.tolerance) break;  // every other cell is lower still
    if (budget == 0) {
      state.unresolved_upper = cell.upper;
      break;
    }
    --budget;
    const Point c{cell.x, cell.y};
    const double half_diagonal = cell.half * std::sqrt(2.0);
    const bool in_a = a.contains(c);
    if (!in_a && to_a.boundary_distance(c, half_diagonal, &closest) > half_diagonal) continue;  // misses A
    double upper;
    if (b.contains(c)) {
      const double depth = to_b.boundary_distance(c, -1, &closest);  // exact
      upper = std::max(0.0, half_diagonal - depth);
      if (in_a) offer(state, 0, c, c);
    } else {
      const double d = to_b.boundary_distance(c, state.best + state.tolerance - half_diagonal, &closest);
      upper = d + half_diagonal;
      if (in_a) offer(state, d, c, closest);
    }
    if (upper <= state.best + state.tolerance) continue;
    const double quarter = cell.half / 2;
    for (double dx : {-quarter, quarter}) {
      for (double dy : {-quarter, quarter}) queue.push({cell.x + dx, cell.y + dy, quarter, upper});
    }
  }
}

double tolerance_for(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options) {
  const double scale = std::max(a.diameter_bound, b.diameter_bound);
  // Never below what double rounding can resolve at these coordinates, so the search ends.
  const double magnitude = std::max({std::fabs(a.box.min_x), std::fabs(a.box.max_x), std::fabs(a.box.min_y),
                                     std::fabs(a.box.max_y), std::fabs(b.box.min_x), std::fabs(b.box.max_x),
                                     std::fabs(b.box.min_y), std::fabs(b.box.max_y), 1e-300});
  return std::max(options.relative_tolerance * scale, 16 * DBL_EPSILON * magnitude);
}

// The directed search from A to B, with the running maximum starting at `floor`, in its
// phases: A's vertices, then its segments' interiors and (region semantics) its interior.
class DirectedSearch {
 public:
  DirectedSearch(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options, double floor,
                 bool stop_when_found)
      : a_(a), b_(b), options_(options), to_b_(b, options.region_semantics) {
    state.best = floor;
    state.tolerance = tolerance_for(a, b, options);
    state.stop_when_found = stop_when_found;
  }
  void vertices() { search_vertices(a_, to_b_, state, ends_); }
  void interiors() {
    if (done(state)) return;
    search_segment_interiors(a_, b_, to_b_, state, ends_);
    if (options_.region_semantics && a_.kind == ShapeKind::polygon && !done(state)) {
      search_interior(a_, b_, options_, state);
    }
  }
  SearchState state;

 private:
  const PreparedShape& a_;
  const PreparedShape& b_;
  const HausdorffOptions& options_;
  DistanceToShape to_b_;
  std::vector<SegmentEnds> ends_;
};

SearchState directed_search(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options,
                            double floor, bool stop_when_found) {
  DirectedSearch search(a, b, options, floor, stop_when_found);
  search.vertices();
  search.interiors();
  return search.state;
}

DistanceResult to_result(const SearchState& state) {
  DistanceResult result;
  result.value = state.best;
  result.from = state.from;
  result.to = state.to;
  result.converged = state.unresolved_upper == -kInfinity;
  result.upper_bound = std::max(state.best + state.tolerance, state.unresolved_upper);
  return result;
}

}  // namespace

DistanceResult directed_hausdorff(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options) {
  return to_result(directed_search(a, b, options, -1, false));
}

DistanceResult hausdorff(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options) {
  const SearchState forward = directed_search(a, b, options, -1, false);
  // The reverse direction only matters where it beats the forward value: start from it.
  const SearchState backward = directed_search(b, a, options, forward.best, false);
  DistanceResult result = to_result(forward);
  if (backward.found) {
    result.value = backward.best;
    result.from = backward.to;  // keep "from" on the first shape
    result.to = backward.from;
  }
  const DistanceResult backward_bounds = to_result(backward);
  result.upper_bound = std::max(result.upper_bound, backward_bounds.upper_bound);
  result.converged = result.converged && backward_bounds.converged;
  return result;
}

// Both directions' vertices before either's interiors: where the answer is no, a vertex
// usually shows it (HausdorffDecision200/90 in tests/benchmarks/sketch_benchmarks.cc).
bool hausdorff_at_most(const PreparedShape& a, const PreparedShape& b, double epsilon,
                       const HausdorffOptions& options) {
  if (bounding_box_lower_bound(a.box, b.box) > epsilon) return false;
  DirectedSearch forward(a, b, options, epsilon, true), backward(b, a, options, epsilon, true);
  for (DirectedSearch* search : {&forward, &backward}) {
    search->vertices();
    if (search->state.found) return false;
  }
  for (DirectedSearch* search : {&forward, &backward}) {
    search->interiors();
    if (search->state.found) return false;
  }
  return true;
}

DistanceResult hausdorff(const Shape& a, const Shape& b, const HausdorffOptions& options) {
  return hausdorff(PreparedShape(a), PreparedShape(b), options);
}

DistanceResult directed_hausdorff(const Shape& a, const Shape& b, const HausdorffOptions& options) {
  return directed_hausdorff(PreparedShape(a), PreparedShape(b), options);
}

}  // namespace waymark
