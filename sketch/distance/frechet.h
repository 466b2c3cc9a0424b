// Fréchet distances between two curves.
//
// A curve is a polyline with one stroke, or a polygon with one ring; a ring is traversed from
// its first vertex as given, in its given direction, and back to that vertex (the start point
// is not optimised over). Other shapes — point sets, several strokes or rings — get a
// not_applicable error saying so. Repeated consecutive vertices are dropped first.
//
// Continuous (Alt & Godau, "Computing the Fréchet distance between two polygonal curves",
// IJCGA 5, 1995):
//   frechet_at_most(P, Q, ε) decides d_F ≤ ε on the free-space diagram, cell by cell, keeping
//   one row of reachable intervals: O(n·m) time, O(n + m) memory, with an early "no" once no
//   cell of a row is reachable. Before the diagram, an O(n + m) walk tries to refuse: each
//   vertex of one curve, in order, must find a point of the other within ε at or after the
//   point its predecessor found (greedily the earliest), both ways; most refusals end there.
//   frechet(P, Q) finds the value among the critical values — the endpoint distances, the
//   vertex-to-segment distances, and the distances at which a segment's point is equidistant
//   from two vertices of the other curve — by binary search with the decision procedure over
//   the candidates between a lower bound (endpoints) and an upper bound (discrete Fréchet),
//   after six plain bisection steps have narrowed that bracket. Before them, one decision at
//   the upper bound records which free-space cells are reachable: the optimal path crosses no
//   other cell, and for similar curves they form a band around the matching. Reachability
//   only shrinks as ε falls, so every later decision visits that band alone (narrowed again at
//   each "yes"), and candidates are collected only on its cells' boundaries. Equidistant pairs
//   come from a sweep over the parameter ranges where each vertex's distance lies in the
//   bracket, not from all pairs. Each decision is made at candidate + 1e-10 × the curves'
//   scale to absorb rounding, so the value is within that of the true distance. Should
//   rounding leave no candidate deciding yes, the result has converged =
//   false and carries the proven bracket [value, upper_bound] instead.
//   Cost: two O(n·m) decisions (endpoints, upper bound) and the discrete distance, then about
//   6 + log2(candidates) decisions and the candidate scans in O(cells in the band) each, plus
//   a sort per segment.
// Discrete (Eiter & Mannila, "Computing discrete Fréchet distance", TU Wien CD-TR 94/64,
// 1994): the coupling distance over vertices only, by dynamic programming in O(n·m) time and
// O(n + m) memory. It is an upper bound on the continuous distance. Its witness is a vertex
// pair at exactly the distance (the first in order), not necessarily on an optimal coupling.
#pragma once

#include <memory>
#include <optional>

#include "sketch/distance/hausdorff.h"  // DistanceResult
#include "sketch/geometry/shape.h"

namespace waymark {

// The curve of a shape as described above, or not_applicable.
Result<Path> curve_of(const Shape& shape);

struct CurveEnds {
  Point first, last;
};
// The first and last vertex of curve_of(shape) (for a ring, its first vertex twice), found in
// O(1) without building the curve; nullopt for point sets and shapes of several parts. (A curve
// with fewer than two distinct vertices has ends too, though curve_of refuses it.)
std::optional<CurveEnds> curve_ends(const Shape& shape);

Result<bool> frechet_at_most(const Shape& p, const Shape& q, double epsilon);
Result<DistanceResult> frechet(const Shape& p, const Shape& q);
Result<DistanceResult> discrete_frechet(const Shape& p, const Shape& q);

// The same on curves already extracted with curve_of (at least two vertices, no repeats).
bool frechet_at_most(const Path& p, const Path& q, double epsilon);
DistanceResult frechet(const Path& p, const Path& q);

// frechet(P, Q) in steps, for a caller that ranks many curves against one and needs values
// only for the nearest: start() refuses a curve farther than a threshold and keeps the band
// of reachable cells, narrow() halves the proven bracket with decisions inside that band,
// at_most() compares with any ε (inside the band, or at once outside the bracket), and value()
// completes the search. Started at threshold ∞ and run to value(), it computes exactly what
// frechet(P, Q) does (which is implemented so). The curves (as from curve_of) must outlive it.
//
// Refusals compare with the value, not d_F itself: value() may lie below d_F by up to the
// decisions' slack (1e-10 × the curves' scale), so a curve is refused only when d_F exceeds
// the threshold by more than that. A ranking that compares values therefore never loses a tie
// (two copies of one curve get the same value, and neither is refused against the other).
class FrechetSearch {
 public:
  // The search, or nullopt when value() would exceed threshold. Cost: one O(n·m) decision,
  // plus the discrete distance when threshold is ∞ (its upper bound then starts the bracket).
  static std::optional<FrechetSearch> start(const Path& p, const Path& q, double threshold);
  FrechetSearch(FrechetSearch&&) noexcept;
  FrechetSearch& operator=(FrechetSearch&&) noexcept;
  ~FrechetSearch();

  // The proven bracket: lower() < d_F ≤ upper() (lower() = d_F once the endpoints decide it).
  double lower() const;
  double upper() const;
  // Up to `steps` of the six bisection steps the value search makes anyway (so they are not
  // wasted if value() follows).
  void narrow(int steps);
  // False when value() would exceed epsilon (as start() refuses); narrows the bracket.
  bool at_most(double epsilon);
  // The value, as frechet(P, Q) documents it.
  DistanceResult value();

 private:
  struct State;
  explicit FrechetSearch(std::unique_ptr<State> state);
  std::unique_ptr<State> state_;
};
DistanceResult discrete_frechet(const Path& p, const Path& q);

}  // namespace waymark
