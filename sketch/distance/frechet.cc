#include "sketch/distance/frechet.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>
#include <optional>
#include <utility>
#include <vector>

#include "sketch/distance/bounds.h"

namespace waymark {
namespace {

struct Interval {
  double lo = 1, hi = 0;  // a sub-interval of [0, 1]; empty when lo > hi
  bool empty() const { return lo > hi; }
};

// Parameters t ∈ [0, 1] with |a + t(b − a) − c| ≤ ε: the chord of a disc on a segment.
// Forced inline: it is most of a decision's work, and with four instances of decide_cells the
// compiler stopped inlining it on its own (plain decisions measured 7 % slower).
// The discriminant qb² − qa·qc is computed as qa·ε² − (d × f)² (Lagrange's identity), which
// does not cancel when c lies on or near the segment: the textbook form subtracts two nearly
// equal squares there and resolved ε only to about √(machine epsilon) of the segment's scale,
// so decisions at tiny ε between curves traced alike came out either way (and a curve against
// itself got values that depended on where its band was recorded). The two roots share one
// division. Both together made the O(n + m) refusal 22–26 % faster (sketch_benchmarks,
// FrechetDecision200/90, 2026-12-04).
[[gnu::always_inline]] inline Interval free_interval(Point a, Point b, Point c, double epsilon_squared) {
  const double dx = b.x - a.x, dy = b.y - a.y;
  const double fx = a.x - c.x, fy = a.y - c.y;
  const double qa = dx * dx + dy * dy;
  const double qb = dx * fx + dy * fy;
  const double cross = dx * fy - dy * fx;
  const double discriminant = qa * epsilon_squared - cross * cross;
  if (discriminant < 0) return {};
  const double root = std::sqrt(discriminant), inverse = 1 / qa;
  return {std::max(0.0, (-qb - root) * inverse), std::min(1.0, (-qb + root) * inverse)};
}

double scale_of(const Path& p, const Path& q) {
  double extent = 0;
  for (const Path* path : {&p, &q}) {
    for (const Point& v : *path) extent = std::max({extent, std::fabs(v.x), std::fabs(v.y)});
  }
  return std::max(extent, 1e-300);
}

// A curve's segments with what the candidate scans reuse: inverse squared lengths, boxes.
struct Segments {
  explicit Segments(const Path& path) {
    for (std::size_t j = 0; j + 1 < path.size(); ++j) {
      const Point a = path[j], b = path[j + 1];
      const double dx = b.x - a.x, dy = b.y - a.y;
      start.push_back(a);
      delta.push_back({dx, dy});
      inverse_length_squared.push_back(1 / (dx * dx + dy * dy));  // no repeated vertices (curve_of)
      box.push_back({std::min(a.x, b.x), std::min(a.y, b.y), std::max(a.x, b.x), std::max(a.y, b.y)});
    }
  }
  std::size_t size() const { return start.size(); }
  // Is v within `reach` of segment j's box? (A cheap necessary condition for being that close.)
  bool near_box(std::size_t j, Point v, double reach) const {
    return v.x >= box[j].min_x - reach && v.x <= box[j].max_x + reach && v.y >= box[j].min_y - reach &&
           v.y <= box[j].max_y + reach;
  }
  Point closest(std::size_t j, Point v) const {
    const double t = std::clamp(((v.x - start[j].x) * delta[j].x + (v.y - start[j].y) * delta[j].y) *
                                    inverse_length_squared[j], 0.0, 1.0);
    return {start[j].x + t * delta[j].x, start[j].y + t * delta[j].y};
  }
  std::vector<Point> start, delta;
  std::vector<double> inverse_length_squared;
  std::vector<Box> box;
};

struct Candidate {
  double value;
  Point from, to;  // from on P, to on Q
  bool operator<(const Candidate& other) const { return value < other.value; }
};

// For each segment of one curve, the vertices [begin, end) of the other curve whose free-space
// boundaries touch a cell reachable at some ε (cells are (segment of P, segment of Q) pairs).
// Every critical value at or below ε involves only these: the optimal path at d_F ≤ ε crosses
// reachable cells alone, and a reachable cell stays reachable as ε grows.
struct Window {
  std::size_t begin = 0, end = 0;
};
using Windows = std::vector<Window>;

// The windows of the cells reachable at some ε, kept together: rows (one per segment of Q)
// and columns (one per segment of P).
struct Band {
  Band(std::size_t row_count, std::size_t column_count, std::size_t p_vertices, std::size_t q_vertices)
      : rows(row_count), columns(column_count) {
    clear(p_vertices, q_vertices);
  }
  // No cell: every window empty (begin past end), as a recording decision expects.
  void clear(std::size_t p_vertices, std::size_t q_vertices) {
    rows.assign(rows.size(), Window{p_vertices, 0});
    columns.assign(columns.size(), Window{q_vertices, 0});
  }
  Windows rows, columns;
};

bool decide(const Path& p, const Path& q, double epsilon, const Band* within, Band* record);

// Vertex-to-segment distances in (lo, hi] (type B critical values), each segment against its
// window of vertices.
void collect_vertex_segment(const Path& vertices, const Segments& segments, const Windows& windows,
                            bool vertices_on_p, double lo, double hi, std::vector<Candidate>& out) {
  const double lo2 = lo * lo, hi2 = hi * hi;
  for (std::size_t j = 0; j < segments.size(); ++j) {
    for (std::size_t k = windows[j].begin; k < windows[j].end; ++k) {
      const Point v = vertices[k];
      if (!segments.near_box(j, v, hi)) continue;
      const Point c = segments.closest(j, v);
      const double d2 = squared_distance(v, c);
      if (d2 > lo2 && d2 <= hi2) {
        out.push_back(vertices_on_p ? Candidate{std::sqrt(d2), v, c} : Candidate{std::sqrt(d2), c, v});
      }
    }
  }
}

// Points of a segment equidistant from two vertices of the other curve, with that distance in
// (lo, hi] (type C critical values). Such a point is at a distance in (lo, hi] from both
// vertices, so each vertex contributes the parameter ranges where its distance is in that
// annulus (at most two per segment), and only pairs whose ranges overlap are solved: a sweep in
// O(v log v + overlapping pairs) per segment instead of all pairs of nearby vertices. The
// annulus is widened by `margin` on both sides so that rounding never drops a candidate; the
// exact (lo, hi] test is applied to each solved point.
void collect_equidistant(const Path& vertices, const Segments& segments, const Windows& windows, bool vertices_on_p,
                         double lo, double hi, double margin, std::vector<Candidate>& out) {
  struct Range {
    double begin, end;
    std::size_t vertex;
  };
  thread_local std::vector<Range> ranges;
  thread_local std::vector<Range> open;
  const double outer2 = (hi + margin) * (hi + margin);
  const double inner2 = lo > margin ? (lo - margin) * (lo - margin) : 0;
  for (std::size_t j = 0; j < segments.size(); ++j) {
    const Point a = segments.start[j];
    const double dx = segments.delta[j].x, dy = segments.delta[j].y;
    const double length = 1 / std::sqrt(segments.inverse_length_squared[j]);
    ranges.clear();
    for (std::size_t k = windows[j].begin; k < windows[j].end; ++k) {
      const Point v = vertices[k];
      if (!segments.near_box(j, v, hi + margin)) continue;
      // Distance to the supporting line (h) and the foot's parameter (t0): the distance at t is
      // sqrt(h² + (length·(t − t0))²).
      const double t0 = ((v.x - a.x) * dx + (v.y - a.y) * dy) * segments.inverse_length_squared[j];
      const double h2 = squared_distance(v, {a.x + t0 * dx, a.y + t0 * dy});
      if (h2 > outer2) continue;
      const double reach = std::sqrt(outer2 - h2) / length;
      const double hole = inner2 > h2 ? std::sqrt(inner2 - h2) / length : 0;
      const double pad = 1e-9;
      for (const auto& [from, to] : {std::pair{t0 - reach, t0 - hole}, std::pair{t0 + hole, t0 + reach}}) {
        const double begin = std::max(0.0, from - pad), end = std::min(1.0, to + pad);
        if (begin <= end) ranges.push_back({begin, end, k});
      }
    }
    std::sort(ranges.begin(), ranges.end(), [](const Range& x, const Range& y) { return x.begin < y.begin; });
    open.clear();
    for (const Range& range : ranges) {
      std::erase_if(open, [&](const Range& o) { return o.end < range.begin; });
      for (const Range& other : open) {
        if (other.vertex == range.vertex) continue;
        const Point pk = vertices[std::min(other.vertex, range.vertex)];
        const Point pl = vertices[std::max(other.vertex, range.vertex)];
        const double denominator = 2 * (dx * (pl.x - pk.x) + dy * (pl.y - pk.y));
        if (denominator == 0) continue;
        const double t = (squared_distance(pl, a) - squared_distance(pk, a)) / denominator;
        if (t < 0 || t > 1) continue;
        const Point on_segment{a.x + t * dx, a.y + t * dy};
        const double value = std::sqrt(squared_distance(on_segment, pk));
        if (value > lo && value <= hi) {
          out.push_back(vertices_on_p ? Candidate{value, pk, on_segment} : Candidate{value, on_segment, pk});
        }
      }
      open.push_back(range);
    }
  }
}

// Narrows (lo, hi] to the smallest candidate for which `decides_yes(value)` (the decision
// at value + slack); returns whether one did. Expected linear work in the candidate count
// (quickselect), plus log2(count) decisions.
template <typename DecidesYes>
bool search_candidates(std::vector<Candidate>& candidates, double& lo, Candidate& hi, DecidesYes decides_yes) {
  bool found = false;
  auto begin = candidates.begin(), end = candidates.end();
  while (begin < end) {
    auto middle = begin + (end - begin) / 2;
    std::nth_element(begin, middle, end);
    if (decides_yes(middle->value)) {
      hi = *middle;
      found = true;
      end = middle;
    } else {
      lo = middle->value;
      begin = middle + 1;
    }
  }
  return found;
}

// The curve of a part: its vertices without consecutive repeats, and for a ring its first
// vertex again at the end. One allocation: curves are made for every candidate a query draws.
Path curve_of_part(const Path& part, bool ring) {
  Path out;
  out.reserve(part.size() + (ring ? 1 : 0));
  for (const Point& v : part) {
    if (out.empty() || !(out.back() == v)) out.push_back(v);
  }
  if (ring && !part.empty() && !(out.back() == part.front())) out.push_back(part.front());
  return out;
}

// The decision procedure. With `within` (the band recorded at some ε' ≥ ε), only the cells
// of that band are visited: reachability only shrinks as ε does (in floating point too: each
// free interval's ends are monotone in ε², and propagation takes maxima and minima), so a cell
// outside it is unreachable at ε as well, and the answer is the same as without. With
// `record` (which must start empty, as Band's constructor leaves it), each entered cell widens
// its windows: the band of the cells reachable at ε.
template <bool kBanded, bool kRecording>
bool decide_cells(const Path& p, const Path& q, double epsilon, const Band* within, Band* record) {
  const std::size_t n = p.size() - 1, m = q.size() - 1;  // segment counts
  if (!(epsilon >= 0)) return false;  // no distance is negative (and NaN decides nothing)
  const double e2 = epsilon * epsilon;
  if (squared_distance(p.front(), q.front()) > e2 || squared_distance(p.back(), q.back()) > e2) return false;

  // bottom[i]: reachable part of the bottom edge of cell (i, j) for the current row j.
  thread_local std::vector<Interval> bottom;
  bottom.assign(n, Interval{});
  bool chain = true;  // the t = 0 boundary is reachable up to here
  for (std::size_t i = 0; i < n && chain; ++i) {
    const Interval free = free_interval(p[i], p[i + 1], q[0], e2);
    if (free.empty() || free.lo > 0) break;
    bottom[i] = free;
    chain = free.hi >= 1;
  }
  bool left_chain = true;  // the s = 0 boundary is reachable up to row j
  for (std::size_t j = 0; j < m; ++j) {
    Interval left;
    if (left_chain) {
      const Interval free = free_interval(q[j], q[j + 1], p[0], e2);
      if (!free.empty() && free.lo <= 0) left = free;
      left_chain = !left.empty() && left.hi >= 1;
    }
    // Cells [first, last) of this row: a row window ends two past its last entered cell.
    std::size_t first = 0, last = n;
    if constexpr (kBanded) {
      first = within->rows[j].begin;
      last = std::min(n, within->rows[j].end > 0 ? within->rows[j].end - 1 : 0);
      if (first >= last) return false;
      // Nothing outside [first, last) needs clearing: a non-empty left edge or bottom[i] would
      // make its cell entered at ε, hence at ε', hence inside the band.
    }
    bool next_row_reachable = left_chain;
    for (std::size_t i = first; i < last; ++i) {
      const Interval below = bottom[i];
      Interval right, top;
      if (!below.empty() || !left.empty()) {
        if constexpr (kRecording) {
          record->rows[j] = {std::min(record->rows[j].begin, i), std::max(record->rows[j].end, i + 2)};
          record->columns[i] = {std::min(record->columns[i].begin, j), std::max(record->columns[i].end, j + 2)};
        }
        const Interval right_free = free_interval(q[j], q[j + 1], p[i + 1], e2);
        right = below.empty() ? Interval{std::max(right_free.lo, left.lo), right_free.hi} : right_free;
        const Interval top_free = free_interval(p[i], p[i + 1], q[j + 1], e2);
        top = left.empty() ? Interval{std::max(top_free.lo, below.lo), top_free.hi} : top_free;
        if (!top.empty()) next_row_reachable = true;
      }
      bottom[i] = top;
      left = right;
    }
    if (j + 1 == m) {
      return (last == n && !left.empty() && left.hi >= 1) || (!bottom[n - 1].empty() && bottom[n - 1].hi >= 1);
    }
    if (!next_row_reachable) return false;
  }
  return false;
}

// A necessary condition for d_F(P, Q) ≤ ε in O(n + m): every coupling matches each vertex of
// P, in order, to a point of Q within ε at or after the point its predecessor matched. Taking
// the earliest such point each time never matches later than any coupling does (induction on
// the vertices), so if that greedy walk runs off the end of Q, no coupling exists. It ignores
// P's segment interiors, so it proves only "no". The free intervals are those decide_cells
// computes, at ε² widened by a relative 1e-9 so that rounding can never make this refuse a
// pair that the decision would accept.
bool vertices_match_in_order(const Path& p, const Path& q, double epsilon_squared) {
  const double widened = epsilon_squared * (1 + 1e-9);
  const std::size_t m = q.size() - 1;
  std::size_t j = 0;  // the walk's position on Q: segment j, parameter t
  double t = 0;
  for (const Point& vertex : p) {
    while (true) {
      const Interval free = free_interval(q[j], q[j + 1], vertex, widened);
      if (!free.empty() && free.hi >= t) {
        t = std::max(t, free.lo);
        break;
      }
      if (++j == m) return false;
      t = 0;
    }
  }
  return true;
}

// Whether the O(n + m) test above, both ways, shows d_F(P, Q) > ε. Worth running before a
// decision that is likely to refuse: most of a query planner's do (about 120 of 140 per
// Fréchet query at 200k shapes). It refuses a decision at 90 % of the value in a quarter of
// the decision's time, and adds about 15 % to a decision that accepts (sketch_benchmarks,
// FrechetDecision200/90 and /110: 8.1 → 1.9 µs, 64 → 74 µs), so decisions expected to
// accept (the value search's at its upper bound) skip it.
bool refused_cheaply(const Path& p, const Path& q, double epsilon) {
  return !(epsilon >= 0) ||  // no distance is negative, as in decide_cells
         !vertices_match_in_order(p, q, epsilon * epsilon) || !vertices_match_in_order(q, p, epsilon * epsilon);
}

// One instance per combination, so that the plain decision pays for neither option.
bool decide(const Path& p, const Path& q, double epsilon, const Band* within, Band* record) {
  if (within) {
    return record ? decide_cells<true, true>(p, q, epsilon, within, record)
                  : decide_cells<true, false>(p, q, epsilon, within, record);
  }
  return record ? decide_cells<false, true>(p, q, epsilon, within, record)
                : decide_cells<false, false>(p, q, epsilon, within, record);
}

}  // namespace

Result<Path> curve_of(const Shape& shape) {
  if (shape.kind == ShapeKind::points) {
    return Status(StatusCode::not_applicable, "Fréchet distance needs a curve (a polyline or a polygon ring), not a point set");
  }
  if (shape.parts.size() != 1) {
    return Status(StatusCode::not_applicable,
                  "Fréchet distance needs a single curve, but the shape has " + std::to_string(shape.parts.size()) +
                      (shape.kind == ShapeKind::polygon ? " rings" : " strokes"));
  }
  Path curve = curve_of_part(shape.parts.front(), shape.kind == ShapeKind::polygon);
  if (curve.size() < 2) return Status(StatusCode::not_applicable, "the curve has fewer than two distinct vertices");
  return curve;
}

std::optional<CurveEnds> curve_ends(const Shape& shape) {
  if (shape.kind == ShapeKind::points || shape.parts.size() != 1 || shape.parts.front().empty()) return std::nullopt;
  const Path& part = shape.parts.front();
  return CurveEnds{part.front(), shape.kind == ShapeKind::polygon ? part.front() : part.back()};
}

bool frechet_at_most(const Path& p, const Path& q, double epsilon) {
  return !refused_cheaply(p, q, epsilon) && decide(p, q, epsilon, nullptr, nullptr);
}

// What a search has proven so far: d_F lies in (lo, hi.value + slack]; the cells reachable
// at band_epsilon (a decision said yes there, and hi.value + slack ≤ band_epsilon) form
// `band`; hi is attained at its witness while hi_is_critical.
struct FrechetSearch::State {
  State(const Path& p_in, const Path& q_in)
      : p(p_in),
        q(q_in),
        scale(scale_of(p_in, q_in)),
        slack(1e-10 * scale),
        band(q_in.size() - 1, p_in.size() - 1, p_in.size(), q_in.size()),
        narrower(band) {}
  const Path& p;
  const Path& q;
  double scale, slack;
  double lo = 0;
  Candidate hi{0, {}, {}};
  bool hi_is_critical = true;
  Candidate endpoint{0, {}, {}};
  Band band;
  Band narrower;  // where a decision records its band, swapped in on "yes" (no allocation)
  double band_epsilon = 0;
  int bisections = 0;
  std::optional<DistanceResult> resolved;  // set when the endpoints already decide the value

  // Records the band at epsilon, where the answer is known to be yes (every cell, should
  // rounding say otherwise).
  void record_band(double epsilon) {
    band_epsilon = epsilon;
    if (!decide(p, q, epsilon, nullptr, &band)) {
      band.rows.assign(band.rows.size(), Window{0, p.size()});
      band.columns.assign(band.columns.size(), Window{0, q.size()});
    }
  }

  // The decision at epsilon, visiting the band alone (at or above band_epsilon the answer is
  // yes already); "yes" narrows the band to the cells reachable at epsilon.
  bool decide_in_band(double epsilon) {
    if (epsilon >= band_epsilon) return true;
    narrower.clear(p.size(), q.size());
    if (!decide(p, q, epsilon, &band, &narrower)) return false;
    std::swap(band, narrower);
    band_epsilon = epsilon;
    return true;
  }
};

namespace {

constexpr int kBisections = 6;

DistanceResult result_at(const Candidate& c, double slack) {
  return DistanceResult{c.value, c.value + slack, c.from, c.to, true};
}

}  // namespace

std::optional<FrechetSearch> FrechetSearch::start(const Path& p, const Path& q, double threshold) {
  auto state = std::make_unique<State>(p, q);
  const double first = std::sqrt(squared_distance(p.front(), q.front()));
  const double last = std::sqrt(squared_distance(p.back(), q.back()));
  state->endpoint = first >= last ? Candidate{first, p.front(), q.front()} : Candidate{last, p.back(), q.back()};
  state->lo = state->endpoint.value;
  if (threshold < std::numeric_limits<double>::infinity()) {
    // The caller's threshold is the upper end: no discrete distance is needed.
    state->band_epsilon = threshold + state->slack;
    if (refused_cheaply(p, q, state->band_epsilon) || !decide(p, q, state->band_epsilon, nullptr, &state->band)) {
      return std::nullopt;
    }
    state->hi = Candidate{threshold, state->endpoint.from, state->endpoint.to};
    state->hi_is_critical = false;
    if (state->decide_in_band(state->endpoint.value + state->slack)) {
      state->resolved = result_at(state->endpoint, state->slack);
    }
    return FrechetSearch(std::move(state));
  }
  if (frechet_at_most(p, q, state->endpoint.value + state->slack)) {
    state->resolved = result_at(state->endpoint, state->slack);
    return FrechetSearch(std::move(state));
  }
  const DistanceResult discrete = discrete_frechet(p, q);  // an upper bound, attained, decided yes
  state->hi = Candidate{discrete.value, discrete.from, discrete.to};
  state->record_band(discrete.value + state->slack);
  return FrechetSearch(std::move(state));
}

FrechetSearch::FrechetSearch(std::unique_ptr<State> state) : state_(std::move(state)) {}
FrechetSearch::FrechetSearch(FrechetSearch&&) noexcept = default;
FrechetSearch& FrechetSearch::operator=(FrechetSearch&&) noexcept = default;
FrechetSearch::~FrechetSearch() = default;

double FrechetSearch::lower() const { return state_->resolved ? state_->resolved->value : state_->lo; }
double FrechetSearch::upper() const {
  return state_->resolved ? state_->resolved->upper_bound : state_->hi.value + state_->slack;
}

void FrechetSearch::narrow(int steps) {
  State& s = *state_;
  // Plain bisection: decisions below d_F fail fast, and the candidate scans then only look at
  // the (now narrow) band and values up to the (now small) bound. hi then need not be a
  // critical value itself; d_F lies in (lo, hi].
  for (; steps > 0 && s.bisections < kBisections && !s.resolved; --steps, ++s.bisections) {
    const double middle = (s.lo + s.hi.value) / 2;
    if (s.decide_in_band(middle + s.slack)) {
      s.hi.value = middle;
      s.hi_is_critical = false;
    } else {
      s.lo = middle;
    }
  }
}

bool FrechetSearch::at_most(double epsilon) {
  State& s = *state_;
  if (s.resolved) return s.resolved->value <= epsilon;
  if (epsilon >= s.hi.value) return true;
  if (epsilon + s.slack <= s.lo) return false;
  if (s.decide_in_band(epsilon + s.slack)) {
    s.hi = Candidate{epsilon, s.endpoint.from, s.endpoint.to};
    s.hi_is_critical = false;
    return true;
  }
  s.lo = epsilon + s.slack;
  return false;
}

DistanceResult FrechetSearch::value() {
  narrow(kBisections);
  State& s = *state_;
  if (s.resolved) return *s.resolved;
  // Decisions were made at value + slack, so d_F ≤ hi + slack: collect candidates up to there,
  // on the boundaries of the band's cells.
  const double bound = s.hi.value + s.slack;
  const Segments p_segments(s.p), q_segments(s.q);
  auto decides_yes = [&s](double value) { return s.decide_in_band(value + s.slack); };
  std::vector<Candidate> candidates;
  collect_vertex_segment(s.p, q_segments, s.band.rows, true, s.lo, bound, candidates);
  collect_vertex_segment(s.q, p_segments, s.band.columns, false, s.lo, bound, candidates);
  bool found = search_candidates(candidates, s.lo, s.hi, decides_yes);
  candidates.clear();
  const double top = found ? s.hi.value : bound;
  collect_equidistant(s.p, q_segments, s.band.rows, true, s.lo, top, 1e-8 * s.scale, candidates);
  collect_equidistant(s.q, p_segments, s.band.columns, false, s.lo, top, 1e-8 * s.scale, candidates);
  found = search_candidates(candidates, s.lo, s.hi, decides_yes) || found;
  if (!found && !s.hi_is_critical) {
    // No candidate decided yes: only rounding can cause this. Report the proven bracket.
    return DistanceResult{s.lo, bound, s.hi.from, s.hi.to, false};
  }
  return result_at(s.hi, s.slack);
}

DistanceResult frechet(const Path& p, const Path& q) {
  return FrechetSearch::start(p, q, std::numeric_limits<double>::infinity())->value();
}

namespace {

// Runs `compute` on the curves of p and q, or returns why a shape is not a curve.
template <typename Compute>
auto on_curves(const Shape& p, const Shape& q, Compute compute) -> Result<decltype(compute(Path{}, Path{}))> {
  Result<Path> curve_p = curve_of(p);
  if (!curve_p) return curve_p.status();
  Result<Path> curve_q = curve_of(q);
  if (!curve_q) return curve_q.status();
  return compute(*curve_p, *curve_q);
}

}  // namespace

Result<bool> frechet_at_most(const Shape& p, const Shape& q, double epsilon) {
  return on_curves(p, q, [epsilon](const Path& a, const Path& b) { return frechet_at_most(a, b, epsilon); });
}

Result<DistanceResult> frechet(const Shape& p, const Shape& q) {
  return on_curves(p, q, [](const Path& a, const Path& b) { return frechet(a, b); });
}

Result<DistanceResult> discrete_frechet(const Shape& p, const Shape& q) {
  return on_curves(p, q, [](const Path& a, const Path& b) { return discrete_frechet(a, b); });
}

}  // namespace waymark
